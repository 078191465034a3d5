"""The scan cache: one JSON file per analysed track, rig and setting.

The key is the SHA-256 of the file's content, the rig's acoustic and
calibration hashes, the static pressure and reserve, and the model's and the
scan's versions (:func:`cache_version`): a changed file, rig or analysis is never served
from the cache.  The files live under ``scan/`` in the user's cache folder
(:func:`showkit.folders.cache_dir`: ``SHOWKIT_CACHE_DIR`` replaces the platform's
folder; the tests use it).  Writes go to a temporary file, fsync'd and renamed,
so a broken write never leaves a half file (:mod:`showkit.safesave`); an
unreadable, oversized or wrongly shaped cache file is treated as missing.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import stat
from pathlib import Path

import showkit
from showkit import folders
from showkit.analysis import audio
from showkit.errors import ShowkitError
from showkit.fileio import read_json
from showkit.safesave import write_bytes


def cache_dir() -> Path:
    """The folder of scan results, ``scan/`` in the user's cache folder (not created here)."""
    return folders.cache_dir() / "scan"


def content_key(path) -> str:
    """The SHA-256 of an audio file's content, found in bounded time.

    The file's identity and ``stat`` (device, inode, size, modification time
    in ns) come first: a file seen before with the same ones is not read again
    (its hash is kept under ``hashes/`` in the cache), if it can still be opened
    for reading: a file made unreadable since is not served from the cache (its
    scan would fail).  Otherwise the content is hashed by
    :func:`showkit.analysis.audio.content_hash`, which accepts only a regular
    file within the audio size limit and says in one line what is wrong.
    """
    path = Path(path)
    try:
        st = os.stat(path)
        ident = json.dumps([str(path.resolve()), st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns])
        if not stat.S_ISREG(st.st_mode):
            raise OSError("not a regular file")
        os.close(os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0)))
    except (OSError, RuntimeError):
        return audio.content_hash(path)  # says what is wrong in one line
    memo = cache_dir() / "hashes" / (hashlib.sha256(ident.encode()).hexdigest()[:32] + ".json")
    known = read_json(memo)
    if isinstance(known, dict) and known.get("stat") == ident and isinstance(known.get("sha256"), str) \
            and len(known["sha256"]) == 64:
        return known["sha256"]
    sha = audio.content_hash(path)
    _store(memo, {"stat": ident, "sha256": sha})
    return sha


def _store(path: Path, data: dict) -> None:
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        write_bytes(path, json.dumps(data).encode("utf-8"), backups=0, what="cache entry")
    except (OSError, ShowkitError, TypeError, ValueError):
        pass  # only a cache


def cache_version() -> str:
    """The version a cached scan must carry: the model's and the scan's
    (``showkit.ANALYSIS_VERSION``, ``showkit.SCAN_VERSION``)."""
    return f"{showkit.ANALYSIS_VERSION}.{showkit.SCAN_VERSION}"


def cache_key(content_sha256: str, rig) -> str:
    """Key of a track's result for a rig at its static pressure and reserve (hex)."""
    data = {"content": content_sha256, "acoustic": rig.acoustic_hash(),
            "calibration": rig.calibration_hash(), "static_pa": repr(float(rig.static_pa)),
            "reserve": repr(float(rig.reserve)), "version": cache_version()}
    return hashlib.sha256(json.dumps(data, sort_keys=True).encode()).hexdigest()[:32]


#: What a cached track result must hold, and of what type, to be served.
_RESULT_FIELDS = {"path": str, "duration_s": (int, float), "score": (int, float),
                  "transpose_semitones": (int, float), "transpose_score": (int, float),
                  "passages": list}
_PASSAGE_FIELDS = {"start_s": (int, float), "end_s": (int, float), "score": (int, float),
                   "modes": list, "ceiling_db": (int, float), "contrast": (int, float)}


def _finite(value) -> bool:
    """False for a NaN or infinite number (a damaged entry); True for anything else."""
    return not isinstance(value, float) or math.isfinite(value)


def _well_formed(result) -> bool:
    """True when ``result`` has the shape :func:`showkit.analysis.scan.scan_track` returns."""
    if not isinstance(result, dict) or result.get("error") is not None:
        return False
    for key, kind in _RESULT_FIELDS.items():
        if not isinstance(result.get(key), kind) or isinstance(result.get(key), bool) or not _finite(result.get(key)):
            return False
    for p in result["passages"]:
        if not isinstance(p, dict):
            return False
        for key, kind in _PASSAGE_FIELDS.items():
            if not isinstance(p.get(key), kind) or isinstance(p.get(key), bool) or not _finite(p.get(key)):
                return False
        if not all(isinstance(n, int) and not isinstance(n, bool) for n in p["modes"]):
            return False
        shares = p.get("mode_shares", [])
        if not isinstance(shares, list) or not all(
                isinstance(m, dict) and isinstance(m.get("n"), int) and isinstance(m.get("note"), str)
                and isinstance(m.get("share"), (int, float)) and _finite(m.get("share")) for m in shares):
            return False
    return True


def load(key: str) -> dict | None:
    """The cached result, or ``None`` when there is none, or it cannot be read or is not
    the shape a scan writes (a damaged or foreign entry is ignored and the track analysed again).
    """
    data = read_json(cache_dir() / f"{key}.json")
    if not isinstance(data, dict) or data.get("version") != cache_version():
        return None
    result = data.get("result")
    return result if _well_formed(result) else None


def save(key: str, result: dict) -> None:
    """Store a result with the safe writer; a cache that cannot be written is skipped silently."""
    _store(cache_dir() / f"{key}.json", {"version": cache_version(), "result": result})
