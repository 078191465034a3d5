"""Reading the project's TOML files (rig files, cue sheets) with one-line errors."""

from __future__ import annotations

import tomllib
from pathlib import Path

from showkit.errors import ShowkitError


def read_text(path: Path, kind: str, error: type[ShowkitError], missing_fix: str) -> str:
    """The UTF-8 text of ``path``, or ``error`` saying what is wrong in one line.

    Parameters
    ----------
    path : Path
    kind : str
        What the file is, for the message (``"rig file"``, ``"cue sheet"``).
    error : ShowkitError subclass
    missing_fix : str
        What to do when the file does not exist.
    """
    try:
        return Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise error(f"no such {kind}", str(path), missing_fix) from None
    except IsADirectoryError:
        raise error(f"is a folder, not a {kind}", str(path), "give the path of a .toml file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise error(f"cannot read the {kind} ({exc.__class__.__name__})", str(path),
                    "check that it is a readable UTF-8 text file") from None


def parse_toml(text: str, where: str, error: type[ShowkitError]) -> dict:
    """Parse TOML; a syntax error becomes ``error`` with the line and column."""
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise error(f"TOML syntax error: {exc}", where,
                    "fix the line shown (quote strings, one key = value per line)") from None
