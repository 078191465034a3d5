"""Making text from files safe to show on a terminal.

Anything showkit shows that came from a file -- cue ids, labels, notes,
titles, rig names, paths, error messages quoting them -- goes through
:func:`printable` before it reaches a terminal or the UI.  Control characters
(C0 such as escape and bell, DEL, the C1 range) and the Unicode direction
overrides could otherwise set the window title, clear the screen or reorder
what the operator reads; each is replaced by a visible ``\\xNN`` /
``\\uNNNN`` escape, so nothing is hidden and nothing is acted on.
"""

from __future__ import annotations

import re

# C0 controls, DEL, C1 controls, and the bidirectional embedding/override/isolate marks
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u200e\u200f\u202a-\u202e\u2066-\u2069\u2028\u2029]")
_CONTROL_KEEP_LINES = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f\u200e\u200f\u202a-\u202e\u2066-\u2069"
                                 "\u2028\u2029]")


def _escape(match: re.Match) -> str:
    code = ord(match.group(0))
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def printable(text, keep_newlines: bool = False) -> str:
    """``text`` (any object, by ``str``) with every control character shown as an escape.

    Parameters
    ----------
    text : object
        What to show; ``None`` becomes ``""``.
    keep_newlines : bool
        Keep line feeds (for multi-line notes shown in a text box); by
        default they are escaped too, so the result is one line.
    """
    if text is None:
        return ""
    s = text if isinstance(text, str) else str(text)
    pattern = _CONTROL_KEEP_LINES if keep_newlines else _CONTROL
    return pattern.sub(_escape, s)
