"""The Track view's domain work: finding, analysing and auditioning tracks (no Textual here).

Every analysis call of the Track view goes through :class:`TrackWork`, which the
session holds (``session.tracks``): the scan (:func:`showkit.analysis.scan.scan_paths`,
cached), the flame frames of a passage (:func:`showkit.analysis.pressure.passage_report`)
and the time x mode map (:func:`showkit.analysis.scan.track_frames`).  Methods named
``*_job`` are slow and run in Textual worker threads.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

from showkit.demo_files import DEMO_TRACKS
from showkit.errors import AudioError
from showkit.fileio import check_audio_file
from showkit.show.editing import PASSAGE_MARGIN_DB
from showkit.show.sheet import DEMO_AUDIO_PREFIX, AudioSource, Cue, Sheet, floor_db

#: Most rows the time x mode map draws.
MAP_ROWS = 10


@dataclass
class TrackAnalysis:
    """What the Track view draws for one track (numbers from the analysis layer).

    ``height``/``air_in`` are the flame frames (frames x holes) of the whole
    track at its ceiling (:func:`showkit.analysis.pressure.passage_report`);
    ``map_energy`` (modes x map frames) is the scan's map for the modes in
    ``map_modes``: each mode's strength (0 to 1, the share of the band's
    sustained sound on it) where the mode is hit, 0 elsewhere
    (:func:`showkit.analysis.scan.map_data`, the same data as ``scan --map``);
    ``passages`` are the scan's, best first, re-scored at the shift shown when
    ``transpose`` is not 0 (score, modes; the ``~ceiling`` and contrast stay the
    recording's); ``transpose`` (the shift shown) and ``suggestion_semitones``
    (the scan's) in semitones, to the cent.  Times in s, the ceiling in dB.
    """

    path: Path
    duration_s: float
    transpose: float
    score: float
    suggestion_semitones: float
    ceiling_db: float
    passages: list
    height: object
    air_in: object
    contrast_frame: object
    frame_rate_hz: float
    height_lo: float
    height_hi: float
    map_modes: list
    map_energy: object
    map_times_s: object
    frame_notes: list
    note: str = ""

    def frame_at(self, t_s: float) -> int:
        """The flame frame at ``t_s`` seconds."""
        return int(min(self.height.shape[0] - 1, max(0, round(t_s * self.frame_rate_hz))))

    @staticmethod
    def modes_cell(passage: dict) -> str:
        """A passage's modes for the table (up to 4 of those the scan's table lists), or what the
        scan says when none is listed."""
        from showkit.analysis.score import listed_shares, unlisted_modes_text

        listed = [s["n"] for s in listed_shares(passage.get("mode_shares") or [])]
        return " ".join(str(n) for n in listed[:4]) or unlisted_modes_text(passage.get("score", 0))

    def notes_at(self, t_s: float) -> str:
        """The notes heard at ``t_s`` seconds (the map's frame), or ''."""
        if not self.frame_notes:
            return ""
        if self.map_times_s is None or len(self.map_times_s) == 0:
            return ""
        import numpy as np

        k = int(np.clip(np.searchsorted(self.map_times_s, t_s), 0, len(self.frame_notes) - 1))
        return self.frame_notes[k]


class TrackWork:
    """The Track view's work on a session (its sheet and today's rig).

    Parameters
    ----------
    session : showkit.ui.session.Session
    """

    def __init__(self, session):
        self.session = session

    def choices(self) -> list[str]:
        """Tracks to offer (as text): those the sheet uses, then the demo tracks.

        Cheap: nothing is decoded or synthesized here (the UI thread calls it).
        """
        out = []
        for cue in self.session.sheet.cues:
            if isinstance(cue.source, AudioSource) and cue.source.path not in out:
                out.append(cue.source.path)
        for name in DEMO_TRACKS:
            if DEMO_AUDIO_PREFIX + name not in out:
                out.append(DEMO_AUDIO_PREFIX + name)
        return out

    def resolve(self, text) -> Path:
        """The file a track name means: ``demo:NAME`` (made if need be: slow the first
        time, so call it in a worker), a path relative to the sheet, or a path."""
        sheet = self.session.sheet
        t = str(text).strip()
        if t in DEMO_TRACKS or Path(t).stem in [Path(n).stem for n in DEMO_TRACKS] and not Path(t).exists():
            t = DEMO_AUDIO_PREFIX + (t if t.endswith(".flac") else t + ".flac")
        if t.startswith(DEMO_AUDIO_PREFIX):
            p = sheet.audio_path(AudioSource(t))
        else:
            p = Path(t).expanduser()
            if not p.is_absolute() and not p.exists():
                here = Path.cwd() / p
                p = sheet.folder / p
                if not p.exists() and not p.is_symlink():
                    # neither place holds it: say both, not only the last one tried
                    raise AudioError(f"no such audio file here ({here.parent}) or beside the sheet ({p.parent})",
                                     t, "check the name, or give the whole path")
        check_audio_file(p, AudioError)  # missing, a folder, a pipe or a device: one line
        return p.resolve()

    def analysis_job(self, path, transpose_cents: float = 0.0, progress=None) -> TrackAnalysis:
        """Analyse a track for the Track view (worker thread); ``transpose_cents``: the shift tried, cents.

        The passages, score and suggested transposition are the scan's
        (:func:`showkit.analysis.scan.scan_paths`, cached); the flame frames are
        :func:`~showkit.analysis.pressure.passage_report` of the whole track at
        its ceiling; the map, the score and the passages' scores and modes at a
        tried transposition come from :func:`track_frames` (the score the scan's
        suggestion promises, :meth:`showkit.analysis.scan._Work.promised_at`).
        """
        import numpy as np

        from showkit.analysis.pressure import passage_report
        from showkit.analysis.scan import scan_paths

        rig = self.session.rig
        steps = 4
        path = self.resolve(path)

        def tick(k):
            if progress:
                progress(k, steps, None)

        tick(0)
        scan = scan_paths(rig, [path], jobs=1, use_cache=True)[0]
        if scan.get("error"):
            raise AudioError(scan["error"])  # already says where, what and how to fix, once
        tick(1)
        report = passage_report(rig, path)
        tick(2)
        frames_info = track_frames(rig, path, float(transpose_cents))
        tick(3)
        frames = report.frames
        height, air = frames.height, frames.air_in
        score = scan["score"] if transpose_cents == 0 else frames_info["score"]
        passages = scan["passages"] if transpose_cents == 0 else shifted_passages(scan["passages"],
                                                                                 frames_info["passages"])
        tick(4)
        return TrackAnalysis(
            path=Path(path), duration_s=float(scan["duration_s"]), transpose=round(float(transpose_cents) / 100.0, 2),
            score=float(score), suggestion_semitones=float(scan.get("transpose_semitones") or 0.0),
            ceiling_db=report.ceiling_db,
            passages=sorted(passages, key=lambda p: -p["score"]), height=height, air_in=air,
            contrast_frame=report.contrast_per_frame, frame_rate_hz=float(frames.frame_rate_hz),
            height_lo=float(np.min(height)) if height.size else 0.0,
            height_hi=float(np.max(height)) if height.size else 1.0,
            map_modes=frames_info["map_modes"], map_energy=frames_info["map_energy"],
            map_times_s=frames_info["times_s"], frame_notes=frames_info["notes"],
            note=scan.get("note", ""))

    def passage_job(self, path: Path, start_s: float, end_s: float):
        """The pressure report of a passage (``start_s`` to ``end_s`` s): its ceiling and contrast."""
        from showkit.analysis.pressure import passage_report

        return passage_report(self.session.rig, path, start_s, end_s)

    def audition_job(self, path: Path, start_s: float, end_s: float):
        """The passage as a locked cue at its safe gain, rendered and verified."""
        from showkit.show.lock import lock_cue
        from showkit.show.render import render_cue
        from showkit.show.sources import SignalMemo

        sheet = Sheet(title="audition", rig=self.session.sheet.rig, path=self.session.sheet.path)
        cue = Cue(id="audition", source=AudioSource(str(path), start_s, end_s), gain_db=-60.0,
                  fade_in_s=min(0.5, 0.1 * (end_s - start_s)), fade_out_s=min(0.5, 0.1 * (end_s - start_s)))
        rig = self.session.rig
        signals = SignalMemo()  # the passage decoded once for its lock and its render
        locked, _ = lock_cue(sheet, rig, cue, signals)
        locked = replace(locked, gain_db=floor_db(locked.lock.ceiling_db - PASSAGE_MARGIN_DB))
        sheet.cues.append(locked)
        return render_cue(sheet, rig, locked, signals)


def shifted_passages(recorded: list[dict], shifted: list[dict]) -> list[dict]:
    """The passages re-scored at a transposition (``shifted``, :func:`track_frames`: score, modes)
    with the recording's ``~ceiling`` and contrast from the scan's (``recorded``) for the same span
    (none where no span matches: the table then leaves them blank rather than mix two analyses)."""
    by_span = {(p["start_s"], p["end_s"]): p for p in recorded}
    out = []
    for q in shifted:
        p = by_span.get((q["start_s"], q["end_s"]), {})
        out.append({**q, "ceiling_db": p.get("ceiling_db"), "limited_by": p.get("limited_by"),
                    "contrast": p.get("contrast")})
    return out


def track_frames(rig, path, shift_cents: float) -> dict:
    """The time x mode map and the score at a transposition (``shift_cents``; the scan's own analysis).

    The rows drawn are the modes hit most (at most :data:`MAP_ROWS`), in
    frequency order; each row is the map's strength where the mode is hit.
    ``passages`` are the scan's spans re-scored at the shift.
    """
    import numpy as np

    from showkit.analysis.scan import track_frames as scan_frames

    got = scan_frames(rig, path, shift_cents)
    m = got["map"]
    strength = np.asarray(m["strength"], dtype=float).reshape(len(m["modes"]), -1)
    hit = np.asarray(m["hit"], dtype=bool).reshape(strength.shape)
    drawn = np.where(hit, strength, 0.0)
    count = hit.sum(axis=1)
    rows = np.nonzero(count > 0)[0]
    if rows.size > MAP_ROWS:
        rows = np.sort(rows[np.argsort(-count[rows], kind="stable")[:MAP_ROWS]])
    return {"score": got["score"], "passages": got["passages"], "map_modes": [int(m["modes"][k]["n"]) for k in rows],
            "map_energy": drawn[rows], "times_s": np.asarray(m["times_s"], dtype=float),
            "notes": got["notes"]}
