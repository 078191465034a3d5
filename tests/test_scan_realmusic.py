"""The scan on real music (issue 12): rendered public-domain scores, their MIDI notes as ground truth.

The set (``tests/realmusic.py``, fixture ``realmusic`` in conftest.py): scores
from music21's bundled corpus (Bach BWV 66.6, Haydn op. 74/1 II, Mozart K. 545
I, Joplin's Maple Leaf Rag, the Acacia Reel, Handel's "Lascia ch'io pianga")
played by Debian's fluidsynth with the FluidR3 General MIDI soundfont, plus a GM
drum kit, off-mode and level-changed copies and a medley with known joins, on an
invented rig whose length puts readable modes on the notes the pieces hold.
The ground truth is the MIDI notes at the pitch the soundfont really plays
(measured with librosa's pYIN, cross-checked below against an FFT peak).

Thresholds are issue 12's ("Tests on real music" and item 4); where the issue
gives a rule in words the number used is named beside the check.  The set's own checks (tuning,
latency, copies, the second medley) are in tests/test_realmusic_set.py.
"""

from __future__ import annotations

import numpy as np
import pytest
import realmusic as rm


@pytest.fixture(scope="session")
def evaluation(realmusic, tmp_path_factory):
    """Every track of the set scanned once and measured (rm.evaluate), cache in a tmp folder."""
    import os

    old = os.environ.get("SHOWKIT_CACHE_DIR")
    os.environ["SHOWKIT_CACHE_DIR"] = str(tmp_path_factory.mktemp("realmusic-cache"))
    try:
        return rm.evaluate(realmusic)
    finally:
        if old is None:
            os.environ.pop("SHOWKIT_CACHE_DIR", None)
        else:
            os.environ["SHOWKIT_CACHE_DIR"] = old


# ----------------------------------------------------------------------------- the scan (issue 12 thresholds)

def test_mode_hits_pooled_f1(evaluation):
    assert evaluation["hits_pooled"]["f1"] >= 0.70, rm.report(evaluation)


def test_mode_hits_per_track_f1(evaluation):
    """F1 >= 0.5 on every track with notes on modes (>= 20 frames of them)."""
    bad = {n: round(t["hits"]["f1"], 2) for n, t in evaluation["tracks"].items()
           if "hits" in t and t["hits"]["tp"] + t["hits"]["fn"] >= 20 and t["hits"]["f1"] < 0.5}
    assert not bad, bad


def test_drums_draw_no_modes(evaluation):
    """Issue 12 item 2: drums draw nothing (project's number: under 0.05 modes per frame)."""
    assert evaluation["tracks"]["drums"]["map_hits_per_frame"] < 0.05


def test_same_music_at_another_level_draws_the_same_map(evaluation):
    """Issue 12 item 2 (project's numbers: hit agreement F1 >= 0.9, score within 10 % or 2 points)."""
    assert evaluation["level_map_agreement"]["f1"] >= 0.9
    a = evaluation["tracks"]["chorale_organ"]["score"]
    b = evaluation["tracks"]["chorale_organ_level-20dB"]["score"]
    assert abs(a - b) <= max(2.0, 0.1 * a)


def test_dominant_pitch_raw_pitch_accuracy(evaluation):
    """Issue 12: mir_eval.melody raw pitch accuracy >= 0.70 of the dominant pitch, the mean over the
    pieces (measured 2026-12-03: 0.703; pooled over their frames 0.709; the network's term and its
    pitch where it agrees; 0.648 without the network, 0.06 in the first engine)."""
    rpa = [evaluation["tracks"][p.name]["melody"]["Raw Pitch Accuracy"] for p in rm.PIECES]
    assert np.mean(rpa) >= 0.70, rpa


@pytest.mark.xfail(strict=True, reason="beyond issue 12's figure (the mean over the pieces, met): the organ chorale "
                   "alone is at 0.51 (measured 2026-12-03, 0.46 without the network); the melody often sits on a "
                   "partial of a lower voice, and the note search cancels a soprano an octave above a lower voice "
                   "with that voice's 2nd partial; an own salience/contour front end, an onset cue, spectral "
                   "smoothness, the track's own harmonic templates, a wider analysis band, a fitted note selector, "
                   "a published learned multi-pitch model and a network trained on organ timbres gave no sufficient "
                   "gain on it (DEVELOPERS.md Methods §8b)")
def test_dominant_pitch_on_the_organ_chorale(evaluation):
    """mir_eval.melody raw pitch accuracy >= 0.70 on the organ chorale alone."""
    rpa = evaluation["tracks"]["chorale_organ"]["melody"]["Raw Pitch Accuracy"]
    assert rpa >= 0.70, rpa


def test_held_notes_are_placed_to_5_cents(evaluation):
    """Issue 12 item 1: median error <= 5 cents on held notes (notes >= 0.5 s, frames 0.1 s inside them,
    each matched to the nearest detected note within 50 cents); most of them (60 %) must be found."""
    h = evaluation["held_notes"]
    assert h["frames"] > 100
    assert h["found"] >= 0.6 and h["median_cents"] <= 5.0, h


def test_on_mode_held_music_scores_clearly_high(evaluation):
    """Issue 12 item 4: held on-mode music "clearly high" -- project's reading: every piece whose notes are
    held on readable modes >= 50 % of the time scores >= 40 of 100 and above every off-mode copy and the
    drums."""
    tr = evaluation["tracks"]
    good = [p.name for p in rm.PIECES if tr[p.name]["held_share"] >= 0.5]
    low = [n for n in tr if n.endswith("c") and "_off" in n] + ["drums"]
    assert good
    for n in good:
        assert tr[n]["score"] >= 40.0, (n, tr[n]["score"])
        assert tr[n]["score"] > max(tr[x]["score"] for x in low), n


def test_off_mode_scores_at_most_half(evaluation):
    """Issue 12 item 4: the same music moved off the modes scores at most half as much."""
    assert all(r <= 0.5 for r in evaluation["off_ratio"].values()), evaluation["off_ratio"]


def test_percussion_scores_at_most_5(evaluation):
    assert evaluation["tracks"]["drums"]["score"] <= 5.0


def test_scores_follow_held_on_mode_share(evaluation):
    """Spearman rank correlation (scipy) of score vs held-on-mode share >= 0.6 (issue 12 item 4)."""
    assert evaluation["spearman"] >= 0.6


def test_transposition_finds_the_shift(evaluation):
    """Issue 12 item 5: the shift undone within +-25 cents in at least 4 of 5 off-mode copies."""
    assert evaluation["transposition_ok"] >= 4, evaluation["transposition"]


def test_medley_joins_are_passage_boundaries(evaluation):
    """Every join of the medley's contrasting pieces within 1.5 s of a passage boundary (issue 12)."""
    assert evaluation["joins_found"] == len(evaluation["joins"]["joins_s"]), evaluation["joins"]


# ------------------------------------------------ floors: what the scan reaches today (no regression)

def test_medley_joins_floor(evaluation):
    """No regression: every join found (4 of 4 measured 2026-12-02, 2 of 4 before the multi-feature
    novelty), in passages of a usable length (none shorter than the segmentation's minimum; at most
    one boundary inside each piece besides the joins: 6 boundaries measured)."""
    from showkit.analysis.segments import MIN_PASSAGE_S

    assert evaluation["joins_found"] == len(evaluation["joins"]["joins_s"]), evaluation["joins"]
    spans = [(a, b) for a, b, _ in evaluation["tracks"]["medley"]["passages"]]
    assert min(b - a for a, b in spans) >= MIN_PASSAGE_S - 1e-9
    assert len(spans) - 1 <= 2 * len(evaluation["joins"]["joins_s"]) + 1, spans
