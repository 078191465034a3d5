"""Reading the project's TOML files (rig files, cue sheets) with one-line errors.

Kept for its callers; the reading itself is :mod:`showkit.fileio` (regular
files only, size limit per kind, bounded nesting).
"""

from __future__ import annotations

from pathlib import Path

from showkit.errors import ShowkitError
from showkit.fileio import parse_toml
from showkit.fileio import read_text as _read_text

__all__ = ["parse_toml", "read_text"]


def read_text(path: Path, kind: str, error: type[ShowkitError], missing_fix: str) -> str:
    """The UTF-8 text of ``path`` (a ``"rig file"`` or ``"cue sheet"``), or ``error`` in one line."""
    return _read_text(path, kind, error, missing_fix)
