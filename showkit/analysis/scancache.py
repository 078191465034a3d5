"""The scan cache: one JSON file per analysed track, rig and setting.

The key is the SHA-256 of the file's content, the rig's acoustic and
calibration hashes, the static pressure and reserve, and
``showkit.ANALYSIS_VERSION``: a changed file, rig or analysis is never served
from the cache.  The files live in ``platformdirs.user_cache_dir("showkit")``
under ``scan/``; the environment variable ``SHOWKIT_CACHE_DIR`` replaces that
folder (the tests use it).  Writes go to a temporary file, fsync'd and renamed,
so a broken write never leaves a half file; an unreadable cache file is
treated as missing.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from pathlib import Path

import showkit

ENV_VAR = "SHOWKIT_CACHE_DIR"


def cache_dir() -> Path:
    """The folder of scan results (not created here)."""
    override = os.environ.get(ENV_VAR)
    if override:
        return Path(override) / "scan"
    import platformdirs

    return Path(platformdirs.user_cache_dir("showkit")) / "scan"


def cache_key(content_sha256: str, rig) -> str:
    """Key of a track's result for a rig at its static pressure and reserve (hex)."""
    data = {"content": content_sha256, "acoustic": rig.acoustic_hash(),
            "calibration": rig.calibration_hash(), "static_pa": repr(float(rig.static_pa)),
            "reserve": repr(float(rig.reserve)), "version": showkit.ANALYSIS_VERSION}
    return hashlib.sha256(json.dumps(data, sort_keys=True).encode()).hexdigest()[:32]


def load(key: str) -> dict | None:
    """The cached result, or ``None`` when there is none (or it cannot be read)."""
    path = cache_dir() / f"{key}.json"
    try:
        with open(path, encoding="utf-8") as f:
            data = json.load(f)
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("version") != showkit.ANALYSIS_VERSION:
        return None
    return data.get("result")


def save(key: str, result: dict) -> None:
    """Store a result; a cache that cannot be written is skipped silently (it is only a cache)."""
    folder = cache_dir()
    tmp = None
    try:
        folder.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".scan-", suffix=".tmp", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8") as f:
            json.dump({"version": showkit.ANALYSIS_VERSION, "result": result}, f)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, folder / f"{key}.json")
    except OSError:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
