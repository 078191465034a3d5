"""Scan tracks: passages, mode hits, readability scores and a transposition.

:func:`scan_track` analyses one file for a rig (decode and resample once to
the hole filters' rate; features, pressure envelope, passages, scores,
transposition) and returns a JSON-ready dict.  :func:`scan_paths` scans files
and folders (recursively), from the cache where it can and in worker
processes otherwise; a file that cannot be analysed gets its ``error`` and
the scan goes on.
"""

from __future__ import annotations

import math
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
from showkit.analysis.pitches import ModeTable, dominant_pitch
from showkit.analysis.pressure import hole_filters
from showkit.analysis.score import (APPROXIMATION, frame_gate, mode_frames, mode_shares, passage_level,
                                    passage_score, track_score)
from showkit.analysis.segments import passages as find_passages
from showkit.analysis import transpose
from showkit.errors import AudioError, ShowkitError
from showkit.limits import MAX_SCAN_S
from showkit.physics.flames import FRAME_RATE_HZ
from showkit.physics.response import envelope_range
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


def _decode(path: Path, rate_hz: int, native_rate_hz: int, native_frames: int = 0
            ) -> tuple[np.ndarray, np.ndarray]:
    """Mono samples at ``rate_hz`` (float32) and the digital peak of every flame frame at the file's rate.

    The samples are written into one array sized from ``native_frames`` (the
    file's length at its own rate), grown if the resampler gives more, so the
    track is never held twice.
    """
    frame = max(1, int(round(native_rate_hz / FRAME_RATE_HZ)))
    peaks: list[np.ndarray] = []
    carry = [np.zeros(0)]

    def on_native(block):
        data = np.abs(np.concatenate([carry[0], block])) if carry[0].size else np.abs(block)
        whole = data.size // frame
        if whole:
            peaks.append(data[:whole * frame].reshape(whole, frame).max(axis=1))
        carry[0] = data[whole * frame:]

    x = np.empty(int(native_frames * rate_hz / max(native_rate_hz, 1)) + 64, dtype=np.float32)
    n = 0
    for b in read_blocks(path, rate_hz, on_native=on_native):
        if n + b.size > x.size:
            x = np.concatenate([x[:n], np.empty(max(b.size, x.size // 8), dtype=np.float32)])
        x[n:n + b.size] = b
        n += b.size
    if carry[0].size:
        peaks.append(np.array([carry[0].max()]))
    return x[:n].copy() if n < x.size // 2 else x[:n], (np.concatenate(peaks) if peaks else np.zeros(0))


def _note(table: ModeTable, n: int) -> str:
    return table.notes[table.index_of(n)]


@dataclass
class _Work:
    """One decode and analysis of a track: what scoring and the map are made from."""

    path: Path
    duration_s: float
    table: ModeTable
    features: object
    envelope: np.ndarray  # (frames, 2): least and largest envelope over the holes, Pa (envelope_range)
    native_peaks: np.ndarray
    spans_s: list
    beats: np.ndarray
    gate: np.ndarray = None

    def spans(self) -> list[tuple[int, int]]:
        """Each passage's frames ``(first, last)``."""
        fr = self.features.frame_rate_hz
        out = []
        for start, end in self.spans_s:
            first = int(round(start * fr))
            out.append((first, min(self.features.frames, max(first + 1, int(round(end * fr))))))
        return out

    def score_at(self, shift_cents: float = 0.0):
        """``(track score, passage scores, map)`` with every note moved by ``shift_cents``."""
        mf = mode_frames(self.features, self.table, self.gate, shift_cents)
        term = mf.term(self.table)
        scores = [passage_score(term, a, b) for a, b in self.spans()]
        lengths = [e - s for s, e in self.spans_s]
        return track_score(scores, lengths), scores, mf

    def promised_at(self, shift_cents: float = 0.0):
        """``(track score, passage scores, map)`` a real shift by ``shift_cents`` promises.

        At 0 this is :meth:`score_at` (the track as it is).  Otherwise it is the least
        of :meth:`score_at` over ``shift_cents`` plus :func:`transpose.promise_offsets`
        (the notes of really shifted audio land a few cents from the notes found moved),
        with that run's passage scores; the map is the one at ``shift_cents`` itself.
        """
        if shift_cents == 0:
            return self.score_at(0.0)
        offsets = list(transpose.promise_offsets())
        runs = [self.score_at(shift_cents + d) for d in offsets]
        least = min(runs, key=lambda r: r[0])
        return float(least[0]), list(least[1]), runs[offsets.index(0.0)][2]


def _analyse(rig: Rig, path: str | Path, threads: int | None = None) -> _Work:
    """Decode once at the hole filters' rate; features, pressure envelope, passages and the gate.

    The BLAS/OpenMP pools are held to one thread here: showkit's own
    parallelism (the simulation's threads, the folder scan's processes) uses
    the cores, and nested pools only made the work slower (measured: twice the
    CPU time for the same wall time).
    """
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1):
        return _analyse_now(rig, Path(path), threads)


def _analyse_now(rig: Rig, path: Path, threads: int | None) -> _Work:
    info = audio_info(path)
    if info.duration_s > MAX_SCAN_S:
        raise AudioError(f"the track is {info.duration_s / 60:.0f} min long, more than a scan analyses in one "
                         f"piece ({MAX_SCAN_S / 60:.0f} min, about 1.5 GB of analysis)", str(path),
                         "`showkit ceiling` streams any length; to scan it, cut it into parts")
    filters = hole_filters(rig)
    x, native_peaks = _decode(path, filters.rate_hz, info.rate_hz, info.frames)
    hop = filters.frame_samples
    features = track_features(x, filters.rate_hz, hop, filters.band_hz)
    # the scan's display and score read the least and largest envelope over the holes per frame
    # (envelope_range: half the work of simulate(), an approximation never used for ceilings)
    envelope = envelope_range(filters, x, workers=threads)
    del x
    lag = int(round(filters.delay / hop))  # the responses are delayed by `delay` samples
    envelope = envelope[lag:]
    spans_s, beats = find_passages(features, info.duration_s)
    pressure = envelope[:, 1] if envelope.size else np.zeros(0)
    gate = frame_gate(features, pressure)
    return _Work(path, info.duration_s, mode_table(rig), features, envelope, native_peaks,
                 spans_s, beats, gate)


def _levels(rig: Rig, work: _Work):
    """Ceiling and flame contrast of each passage."""
    levels = []
    for first, last in work.spans():
        env = work.envelope[first:max(last, first + 1)]
        peaks = work.native_peaks[first:last]
        levels.append(passage_level(env, float(peaks.max()) if peaks.size else 0.0, rig.static_pa,
                                    rig.reserve))
    return levels


#: The Track view's cursor line names at most this many notes.
CURSOR_NOTES = 3
#: A note further than this from its nearest mode is named without the mode, cents.
NEAR_MODE_CENTS = 50.0


def frame_notes_text(work: _Work, shift_cents: float = 0.0) -> list[str]:
    """Per frame: the notes found (at most :data:`CURSOR_NOTES`), those on a mode (within its
    tolerance: the ones the map lights) first, then the strongest, with the nearest mode and
    the offset from it when it is within :data:`NEAR_MODE_CENTS` (text)."""
    from showkit.analysis.score import nearest_modes, tolerance_cents
    from showkit.physics.pitch import nearest_note

    features, table = work.features, work.table
    scale = 2.0 ** (shift_cents / 1200.0)
    idx, cents = nearest_modes(features.notes_hz, table, shift_cents)
    tol = tolerance_cents(table)
    found = np.isfinite(features.notes_hz) & (features.notes_energy > 0)
    with np.errstate(invalid="ignore"):
        on = found & (idx >= 0) & (np.abs(np.nan_to_num(cents, nan=np.inf)) <= tol[np.maximum(idx, 0)])
    # on a mode first, then by energy (strongest first)
    order = np.lexsort((-np.where(found, features.notes_energy, -np.inf), ~on), axis=1) if found.size else found
    out = []
    for t in range(features.frames):
        items = []
        for k in order[t]:
            if len(items) == CURSOR_NOTES or not found[t, k]:
                break
            f = float(features.notes_hz[t, k])
            name, _ = nearest_note(f * scale)
            j, c = int(idx[t, k]), float(cents[t, k])
            items.append(f"{name} {f * scale:.0f} Hz → mode {int(table.n[j])} {c:+.0f}c"
                         if j >= 0 and abs(c) <= NEAR_MODE_CENTS else f"{name} {f * scale:.0f} Hz")
        out.append(", ".join(items))
    return out


def map_data(work: _Work, shift_cents: float = 0.0, mf=None, dominant_hz=None) -> dict:
    """The time x mode map as data (the ``--map`` file and what the Track view draws).

    ``{"hop_s", "times_s", "modes": [{"n", "frequency_hz", "note"}], "strength": [[0-1 per frame]
    per mode], "hit": [[bool per frame] per mode], "notes_hz": [[every note found] per frame]}``,
    plus ``"dominant_hz"`` (the dominant pitch per frame as recorded, 0 for none: ``dominant_hz``
    when given -- :func:`dominant_line`, with the trained network -- else
    :func:`showkit.analysis.pitches.dominant_pitch` of the notes alone) and ``"shift_cents"``.
    Notes are given as heard after the shift.
    """
    if mf is None:
        mf = mode_frames(work.features, work.table, work.gate, shift_cents)
    features, table = work.features, work.table
    if dominant_hz is None:
        dominant_hz = dominant_pitch(features.notes_hz, features.notes_energy)
    hop_s = 1.0 / features.frame_rate_hz
    scale = 2.0 ** (shift_cents / 1200.0)
    notes = [[round(float(f) * scale, 2) for f in row if np.isfinite(f)] for row in features.notes_hz]
    return {"hop_s": hop_s,
            "times_s": [round(k * hop_s, 4) for k in range(features.frames)],
            "modes": [{"n": int(n), "frequency_hz": round(float(f), 3), "note": note}
                      for n, f, note in zip(table.n, table.freq_hz, table.notes)],
            "strength": np.round(mf.strength.astype(float), 3).tolist(),
            "hit": mf.hit.tolist(),
            "notes_hz": notes,
            "dominant_hz": [round(float(f) * scale, 2) if np.isfinite(f) else 0.0
                            for f in dominant_hz],
            "shift_cents": float(shift_cents)}


def track_map(rig: Rig, path: str | Path, shift_cents: float = 0.0) -> dict:
    """The time x mode map of a track as data (:func:`map_data`; what ``scan --map`` writes)."""
    return track_frames(rig, path, shift_cents)["map"]


def passage_rows(work: _Work, scores: list[float], mf) -> list[dict]:
    """The scan's passages as rows: ``start_s``, ``end_s``, ``score``, ``modes`` and ``mode_shares``.

    ``scores`` are the passages' scores and ``mf`` the map they were scored on
    (:meth:`_Work.score_at` or :meth:`_Work.promised_at` at some shift).
    """
    table = work.table
    out = []
    for (first, last), (start, end), score in zip(work.spans(), work.spans_s, scores):
        shares = mode_shares(mf, table, first, last)
        out.append({"start_s": round(start, 3), "end_s": round(end, 3), "score": round(score, 1),
                    "modes": [n for n, _ in shares],
                    "mode_shares": [{"n": n, "note": _note(table, n), "share": round(s, 3)}
                                    for n, s in shares]})
    return out


def track_frames(rig: Rig, path: str | Path, shift_cents: float = 0.0) -> dict:
    """The time x mode map, the score and the passages of a track at a transposition.

    Returns ``score`` (the score a shift by ``shift_cents`` promises,
    :meth:`_Work.promised_at`, on the scan's passages: at 0 the scan's own
    score, at the scan's suggestion the score it promises), ``passages``
    (:func:`passage_rows` re-scored at the shift, in the scan's order),
    ``map`` (:func:`map_data`) and ``notes`` (per frame: the strongest notes
    with their nearest modes, as text).
    """
    work = _analyse(rig, path)
    score, scores, mf = work.promised_at(shift_cents)
    return {"score": float(score), "passages": passage_rows(work, scores, mf),
            "map": map_data(work, shift_cents, mf, dominant_line(work)), "notes": frame_notes_text(work, shift_cents)}


def dominant_line(work: _Work) -> np.ndarray:
    """The dominant pitch per frame as recorded, Hz (NaN for none), with the trained network's word
    (:func:`showkit.analysis.pitches.dominant_pitch` on
    :func:`showkit.analysis.topline.frame_logp`, the file read again at the network's rate).

    Kept in process per file (path, size, modification time) and notes found: the Track view
    asks again at every transposition tried, and the line does not depend on the shift (the
    map scales it).  Only the line is kept, not the network's output (75 MB for an hour).
    """
    import hashlib

    from showkit.analysis import topline

    features = work.features
    st = work.path.stat()
    digest = hashlib.blake2b(digest_size=16)
    for a in (features.notes_hz, features.notes_energy):
        digest.update(np.ascontiguousarray(a, dtype=float).tobytes())
    key = (str(work.path), st.st_size, st.st_mtime_ns, float(features.frame_rate_hz), digest.hexdigest())
    if key not in _DOMINANT:
        from threadpoolctl import threadpool_limits

        times = np.arange(features.frames) / features.frame_rate_hz
        with threadpool_limits(limits=1):
            logp = topline.frame_logp(read_blocks(work.path, topline.LINE_RATE_HZ), times)
        line = dominant_pitch(features.notes_hz, features.notes_energy, logp)
        del logp
        line.flags.writeable = False
        while len(_DOMINANT) >= _DOMINANT_KEPT:
            _DOMINANT.pop(next(iter(_DOMINANT)))
        _DOMINANT[key] = line
    return _DOMINANT[key]


#: Dominant lines kept in process (a few tracks; 8 bytes per frame).
_DOMINANT: dict = {}
_DOMINANT_KEPT = 8


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
        ``note`` (how the score is made).
    """
    work = _analyse(rig, path, threads)
    table = work.table
    total, scores, mf = work.score_at(0.0)
    levels = _levels(rig, work)
    out = [{**row, "ceiling_db": round(level.ceiling.ceiling_db, 2), "limited_by": level.ceiling.limited_by,
            "contrast": round(level.median_contrast, 4)}
           for row, level in zip(passage_rows(work, scores, mf), levels)]
    cache = {0.0: total}

    def score_at(shift):
        if shift not in cache:
            cache[shift] = work.promised_at(shift)[0]
        return cache[shift]

    shift, shifted, _ = transpose.search(work.features, table, work.gate, score_at)
    return {"path": str(work.path), "duration_s": round(work.duration_s, 3), "score": round(total, 1),
            "transpose_semitones": round(shift / 100.0, 2), "transpose_score": round(shifted, 1),
            "error": None, "passages": out, "beats": int(work.beats.size), "note": APPROXIMATION}


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


def _import_for_workers() -> None:
    """Import what a track's analysis uses here, before the pool starts its workers.

    Forked workers (the start method on Linux before Python 3.14) inherit the modules
    instead of each importing them on its first file (under forkserver or spawn this
    changes nothing): about 0.6 s of CPU per process (scipy's fft,
    ndimage and sparse), which a two-worker scan of a short folder paid twice on top of
    the work (measured: ``tests/benchmarks/bench_scan_growth.py --folder-only --cold``).
    """
    import scipy.fft  # noqa: F401
    import scipy.ndimage  # noqa: F401
    import scipy.sparse  # noqa: F401
    import soundfile  # noqa: F401
    import soxr  # noqa: F401
    import threadpoolctl  # noqa: F401


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
    """Best score first; on equal scores as the table shows them (whole points), the better score a
    suggested transposition would reach (music that reads with a shift before drums or noise, which
    read with none), then the unrounded score; tracks with errors last."""
    def number(value) -> float:   # a missing or non-finite figure sorts as nothing
        return float(value) if isinstance(value, (int, float)) and math.isfinite(value) else 0.0

    return sorted(tracks, key=lambda t: (t["error"] is not None, -round(number(t["score"])),
                                         -number(t.get("transpose_score")), -number(t["score"]), t["path"]))


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
        _import_for_workers()
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
