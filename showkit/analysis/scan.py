"""Scan tracks: passages, mode hits, readability scores and a transposition.

:func:`scan_track` analyses one file for a rig (decode and resample once to
the hole filters' rate; features, pressure envelope, passages, scores,
transposition) and returns a JSON-ready dict.  :func:`scan_paths` scans files
and folders (recursively), from the cache where it can and in worker
processes otherwise; a file that cannot be analysed gets its ``error`` and
the scan goes on.
"""

from __future__ import annotations

import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Callable

import numpy as np

from showkit.analysis import scancache
from showkit.analysis.audio import audio_info, read_blocks
from showkit.analysis.features import track_features
from showkit.analysis.pitches import ModeTable
from showkit.analysis.pressure import hole_filters
from showkit.analysis.score import (APPROXIMATION, frame_scores, mode_shares, passage_level,
                                    passage_score, track_score)
from showkit.analysis.segments import passages as find_passages
from showkit.analysis.transpose import best_shift, shifted_scores
from showkit.errors import AudioError, ShowkitError
from showkit.physics.flames import FRAME_RATE_HZ
from showkit.physics.response import simulate
from showkit.rigfile import Rig

#: File name endings a folder scan picks up (what libsndfile reads, and common others).
AUDIO_SUFFIXES = {".wav", ".wave", ".flac", ".ogg", ".oga", ".opus", ".mp3", ".aif", ".aiff",
                  ".aifc", ".au", ".snd", ".caf", ".w64", ".rf64", ".mat", ".voc", ".sd2"}


@lru_cache(maxsize=8)
def _table(acoustic: str, rig: Rig) -> ModeTable:
    from showkit.physics.modes import find_modes

    return ModeTable.from_modes(find_modes(rig.model))


def mode_table(rig: Rig) -> ModeTable:
    """The rig's modes as a :class:`ModeTable`, found once per process."""
    return _table(rig.acoustic_hash(), rig)


def _decode(path: Path, rate_hz: int, native_rate_hz: int) -> tuple[np.ndarray, np.ndarray]:
    """Mono samples at ``rate_hz`` and the digital peak of every flame frame at the file's rate."""
    frame = max(1, int(round(native_rate_hz / FRAME_RATE_HZ)))
    peaks: list[np.ndarray] = []
    carry = [np.zeros(0)]

    def on_native(block):
        data = np.abs(np.concatenate([carry[0], block])) if carry[0].size else np.abs(block)
        whole = data.size // frame
        if whole:
            peaks.append(data[:whole * frame].reshape(whole, frame).max(axis=1))
        carry[0] = data[whole * frame:]

    blocks = [b.astype(np.float32) for b in read_blocks(path, rate_hz, on_native=on_native)]
    if carry[0].size:
        peaks.append(np.array([carry[0].max()]))
    x = np.concatenate(blocks) if blocks else np.zeros(0, np.float32)
    return x, (np.concatenate(peaks) if peaks else np.zeros(0))


def _note(table: ModeTable, n: int) -> str:
    return table.notes[table.index_of(n)]


@dataclass
class _Work:
    """One decode and analysis of a track: what scoring and the map are made from."""

    path: Path
    duration_s: float
    table: ModeTable
    features: object
    envelope: np.ndarray
    native_peaks: np.ndarray
    spans_s: list
    beats: np.ndarray


def _analyse(rig: Rig, path: str | Path, threads: int | None = None) -> _Work:
    """Decode once at the hole filters' rate; features, pressure envelope and passages.

    The BLAS/OpenMP pools are held to one thread here: showkit's own
    parallelism (the simulation's threads, the folder scan's processes) uses
    the cores, and nested pools only made the work slower (measured: twice the
    CPU time for the same wall time).
    """
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1):
        return _analyse_now(rig, Path(path), threads)


def _analyse_now(rig: Rig, path: Path, threads: int | None) -> _Work:
    from showkit.limits import MAX_SCAN_S

    info = audio_info(path)
    if info.duration_s > MAX_SCAN_S:
        raise AudioError(f"the track is {info.duration_s / 60:.0f} min long, more than a scan analyses in one "
                         f"piece ({MAX_SCAN_S / 60:.0f} min, about 1.5 GB of analysis)", str(path),
                         "`showkit ceiling` streams any length; to scan it, cut it into parts")
    filters = hole_filters(rig)
    x, native_peaks = _decode(path, filters.rate_hz, info.rate_hz)
    hop = filters.frame_samples
    features = track_features(x, filters.rate_hz, hop, filters.band_hz)
    envelope = simulate(filters, x, workers=threads).envelope
    lag = int(round(filters.delay / hop))  # the responses are delayed by `delay` samples
    spans_s, beats = find_passages(features, info.duration_s)
    return _Work(path, info.duration_s, mode_table(rig), features, envelope[lag:], native_peaks,
                 spans_s, beats)


def _score_spans(rig: Rig, work: _Work, fs):
    """Frame spans, level factors, scores, lengths and levels of the passages."""
    fr = work.features.frame_rate_hz
    spans, factors, scores, lengths, levels = [], [], [], [], []
    for start, end in work.spans_s:
        first = int(round(start * fr))
        last = min(work.features.frames, max(first + 1, int(round(end * fr))))
        env = work.envelope[first:max(last, first + 1)]
        peaks = work.native_peaks[first:last]
        level = passage_level(env, float(peaks.max()) if peaks.size else 0.0, rig.static_pa, rig.reserve)
        spans.append((first, last))
        factors.append(level.factor)
        scores.append(passage_score(fs, level.factor, first, last))
        lengths.append(end - start)
        levels.append(level)
    return spans, factors, scores, lengths, levels


def track_frames(rig: Rig, path: str | Path, shift_cents: float = 0.0, max_rows: int = 10) -> dict:
    """Per-frame mode hits of a track at a transposition: the time x mode map and the score.

    Returns ``score`` (the track score with every pitch moved by
    ``shift_cents``, on the scan's passages), ``map_modes`` (the mode numbers
    of the map's rows, at most ``max_rows``: the driven ones), ``map_energy``
    (rows x frames: the scored on-mode energy of each mode per frame),
    ``times_s`` (frame times) and ``notes`` (per frame: the dominant notes with
    their nearest modes, as text).
    """
    from showkit.analysis.pitches import map_to_modes
    from showkit.physics.pitch import nearest_note

    work = _analyse(rig, path)
    features, table = work.features, work.table
    hits = map_to_modes(features.peak_hz, table, shift_cents)
    fs = frame_scores(features, table, shift_cents, hits)
    _, _, scores, lengths, _ = _score_spans(rig, work, fs)
    score = track_score(scores, lengths)
    part = features.peak_energy * features.peak_harmonic * hits.weight        # (F, K)
    idx = np.where(hits.index >= 0, hits.index, 0)
    energy = np.zeros((table.n.size, features.frames))
    frames_k = np.broadcast_to(np.arange(features.frames)[:, None], idx.shape)
    np.add.at(energy, (idx.ravel(), frames_k.ravel()), np.where(hits.index >= 0, part, 0.0).ravel())
    row_max = energy.max(axis=1)
    # rows more than 30 dB under the strongest mode would draw blank: not drawn
    driven = row_max.size and row_max.max() > 0
    hit_rows = np.nonzero(row_max > 1e-3 * row_max.max())[0] if driven else np.zeros(0, int)
    if hit_rows.size:
        lo, hi = max(0, hit_rows.min() - 1), min(table.n.size - 1, hit_rows.max() + 1)
    else:
        lo, hi = 1, min(table.n.size - 1, max_rows)
    if hi - lo + 1 > max_rows:  # keep the rows that are driven most
        keep = np.sort(np.argsort(-row_max)[:max_rows])
    else:
        keep = np.arange(lo, hi + 1)
    scale = 2.0 ** (shift_cents / 1200.0)
    notes = []
    order = np.argsort(-features.peak_energy, axis=1)
    for t in range(features.frames):
        items = []
        for k in order[t, :2]:
            f = features.peak_hz[t, k]
            if not np.isfinite(f) or features.peak_energy[t, k] <= 0:
                continue
            name, _ = nearest_note(float(f) * scale)
            j = int(hits.index[t, k])
            items.append(f"{name} {f * scale:.0f} Hz → mode {int(table.n[j])} {hits.cents[t, k]:+.0f}c"
                         if j >= 0 else name)
        notes.append(", ".join(items))
    return {"score": float(score), "map_modes": [int(n) for n in table.n[keep]],
            "map_energy": energy[keep], "times_s": np.arange(features.frames) / features.frame_rate_hz,
            "notes": notes}


def scan_track(rig: Rig, path: str | Path, threads: int | None = None) -> dict:
    """Analyse one track for ``rig`` (no cache).  Raises :class:`ShowkitError` for bad audio.

    ``threads`` is passed to the pressure simulation (default: all cores; the
    worker processes of a folder scan use one each).

    Returns
    -------
    dict
        ``path``, ``duration_s``, ``score``, ``transpose_semitones``,
        ``transpose_score``, ``error`` (None), ``passages`` (each with
        ``start_s``, ``end_s``, ``score``, ``modes``, ``mode_shares``,
        ``ceiling_db``, ``limited_by``, ``contrast``), ``beats`` (count) and
        ``note`` (the scoring approximation).
    """
    work = _analyse(rig, path, threads)
    table = work.table
    fs = frame_scores(work.features, table)
    spans, factors, scores, lengths, levels = _score_spans(rig, work, fs)
    out = []
    for (first, last), (start, end), score, level in zip(spans, work.spans_s, scores, levels):
        shares = mode_shares(fs, table, first, last)
        out.append({"start_s": round(start, 3), "end_s": round(end, 3), "score": round(score, 1),
                    "modes": [n for n, _ in shares],
                    "mode_shares": [{"n": n, "note": _note(table, n), "share": round(s, 3)}
                                    for n, s in shares],
                    "ceiling_db": round(level.ceiling.ceiling_db, 2),
                    "limited_by": level.ceiling.limited_by,
                    "contrast": round(level.median_contrast, 4)})
    features, duration, beats, path = work.features, work.duration_s, work.beats, work.path
    total = track_score(scores, lengths)
    by_shift = shifted_scores(features, table, spans, factors, lengths)
    shift, shifted = best_shift(by_shift)
    return {"path": str(path), "duration_s": round(duration, 3), "score": round(total, 1),
            "transpose_semitones": round(shift / 100.0, 2), "transpose_score": round(shifted, 1),
            "error": None, "passages": out, "beats": int(beats.size), "note": APPROXIMATION}


def failed(path: str | Path, message: str) -> dict:
    """The record of a track that could not be analysed."""
    return {"path": str(path), "duration_s": None, "score": None, "transpose_semitones": None,
            "transpose_score": None, "error": message, "passages": [], "cached": False}


def _scan_one(rig: Rig, path: str, key: str | None, threads: int | None = None) -> dict:
    try:
        result = scan_track(rig, path, threads)
    except ShowkitError as exc:
        return failed(path, exc.line())
    except MemoryError:
        return failed(path, "out of memory while analysing this file")
    except Exception as exc:  # a file must never stop the scan; say what happened
        return failed(path, f"analysis failed ({exc.__class__.__name__}: {' '.join(str(exc).split())[:160]})")
    if key is not None:
        scancache.save(key, result)
    result["cached"] = False
    return result


_WORKER_RIG: Rig | None = None


def _init_worker(rig: Rig) -> None:
    global _WORKER_RIG
    _WORKER_RIG = rig


def _scan_in_worker(path: str, key: str | None) -> dict:
    return _scan_one(_WORKER_RIG, path, key, 1)


def expand_paths(paths) -> list[Path]:
    """Files named, and audio files found in folders named (recursively, sorted, hidden ones skipped)."""
    found: list[Path] = []
    for p in map(Path, paths):
        if p.is_dir():
            for root, dirs, files in os.walk(p):
                dirs[:] = sorted(d for d in dirs if not d.startswith(".")
                                 and Path(d).suffix.lower() not in AUDIO_SUFFIXES)
                named = [d for d in os.listdir(root) if Path(d).suffix.lower() in AUDIO_SUFFIXES
                         and os.path.isdir(os.path.join(root, d)) and not d.startswith(".")]
                for f in sorted(files + named):
                    if not f.startswith(".") and Path(f).suffix.lower() in AUDIO_SUFFIXES:
                        found.append(Path(root) / f)
        else:
            found.append(p)
    return found


def sort_tracks(tracks: list[dict]) -> list[dict]:
    """Best score first; tracks with errors last."""
    return sorted(tracks, key=lambda t: (t["error"] is not None, -(t["score"] or 0.0), t["path"]))


def default_jobs() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:
        return max(1, os.cpu_count() or 1)


def scan_paths(rig: Rig, paths, jobs: int | None = None, use_cache: bool = True,
               progress: Callable[[int, int, str], None] | None = None) -> list[dict]:
    """Scan files and folders; returns one dict per track, best first.

    Parameters
    ----------
    rig : Rig
    paths : iterable of path
        Files and folders (folders are searched recursively for audio files).
    jobs : int, optional
        Worker processes (default: all cores).
    use_cache : bool
        Read and write the scan cache.
    progress : callable, optional
        ``progress(done, total, path)`` after each track.
    """
    files = expand_paths(paths)
    total = len(files)
    results: list[dict] = []
    todo: list[tuple[str, str | None]] = []
    done = 0
    for f in files:
        key = None
        if use_cache:
            try:
                key = scancache.cache_key(scancache.content_key(f), rig)
            except (ShowkitError, OSError, IsADirectoryError):
                key = None
            hit = scancache.load(key) if key else None
            if hit is not None:
                hit = dict(hit, path=str(f), cached=True)
                results.append(hit)
                done += 1
                if progress:
                    progress(done, total, str(f))
                continue
        todo.append((str(f), key))
    jobs = default_jobs() if jobs is None else max(1, int(jobs))
    if todo:
        try:  # designed once here, so that forked workers inherit them
            hole_filters(rig)
            mode_table(rig)
        except ShowkitError:
            pass
    if len(todo) <= 1 or jobs == 1:
        threads = 1 if jobs == 1 else None  # --jobs 1: one core
        for f, key in todo:
            results.append(_scan_one(rig, f, key, threads))
            done += 1
            if progress:
                progress(done, total, f)
    else:
        with ProcessPoolExecutor(max_workers=min(jobs, len(todo)), initializer=_init_worker,
                                 initargs=(rig,)) as pool:
            futures = {pool.submit(_scan_in_worker, f, key): f for f, key in todo}
            for fut in as_completed(futures):
                f = futures[fut]
                try:
                    results.append(fut.result())
                except Exception as exc:  # a worker that died
                    results.append(failed(f, f"analysis failed ({exc.__class__.__name__})"))
                done += 1
                if progress:
                    progress(done, total, f)
    return sort_tracks(results)


def best_passage(track: dict) -> dict | None:
    """The passage with the highest score (first one on ties), or None."""
    ps = track.get("passages") or []
    return max(ps, key=lambda p: p["score"]) if ps else None
