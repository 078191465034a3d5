"""The operator's keys for running a show: one table for `showkit run` and the UI's Run view.

Both front ends read :data:`OPERATOR_KEYS`: the terminal runner
(:class:`showkit.cli.run_cmd.KeyRunner`) turns the keys into the characters a
terminal sends (:func:`terminal_actions`), the terminal UI turns them into
Textual bindings of its Run view (:func:`ui_bindings`).  The README's
"Running a show" table and the UI's help screen are both written from it, so
there is one key map, documented once.

The set is chosen for a presenter at a lectern, who looks at the audience and
the flames rather than at the keyboard:

- the two largest keys, Enter and the space bar, start the next cue;
- the panic key is Esc, the key at the top-left corner that a hand finds without
  looking; Ctrl+C, the terminal's own "stop", panics as well (in `showkit run`
  it then quits);
- every other action is one letter, none of them next to each other on the
  home row by accident: ``f`` fade, ``-``/``+`` the fader, ``a`` re-arm (arm
  again), ``d`` reconnect the audio device.

No operator key deletes, edits or re-locks anything, and no key that edits the
show elsewhere in the UI is an operator key (the Show view deletes a cue with
the Delete key only, and says at once how to undo it).
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class OperatorKey:
    """One operator action and its keys.

    Attributes
    ----------
    action : str
        What it does, by name (``go``, ``fade``, ``fader_down``, ``fader_up``,
        ``panic``, ``rearm``, ``reconnect``, ``help``).
    keys : tuple of str
        The keys, as Textual names them (``enter``, ``space``, ``escape``, ``ctrl+c``,
        ``minus``, ``plus``, ``equals_sign``, ``question_mark`` or a letter).
    shown : str
        The keys as printed for people.
    does : str
        What the key does, for the help and the README.
    short : str
        A word or two for the UI's key bar.
    """

    action: str
    keys: tuple[str, ...]
    shown: str
    does: str
    short: str


#: The operator's keys, in the order they are documented.
OPERATOR_KEYS: tuple[OperatorKey, ...] = (
    OperatorKey("go", ("enter", "space"), "Enter or space",
                "start the next cue; a cue still playing is cut with a quick 20 ms ramp first, and "
                "a cue that does not fit today is passed over", "go"),
    OperatorKey("panic", ("escape", "ctrl+c"), "Esc or Ctrl+C",
                "PANIC: the output ramps to silence within 20 ms, from whatever is happening, "
                "and the show stops until re-armed", "PANIC"),
    OperatorKey("fade", ("f",), "f", "fade the cue playing out (over 3 s; `showkit run --fade SECONDS` "
                "changes it)", "fade out"),
    OperatorKey("fader_down", ("minus",), "-", "operator fader down 1 dB (down past -60 dB is silent)",
                "fader -1"),
    OperatorKey("fader_up", ("plus", "equals_sign"), "+ or =",
                "operator fader up 1 dB; it stops at 0 dB, the cue's locked gain, and says so", "fader +1"),
    OperatorKey("rearm", ("a",), "a", "re-arm after a panic, when it is safe; go then resumes at the "
                "next cue", "re-arm"),
    OperatorKey("reconnect", ("d",), "d", "reconnect the audio device after a fault; go then resumes at "
                "the next cue", "reconnect"),
    OperatorKey("help", ("question_mark",), "?", "list the keys", "keys"),
)

#: The characters a terminal in cbreak mode sends for the named keys (letters send themselves).
#: Ctrl+C normally arrives as a signal (KeyboardInterrupt); "\x03" covers a raw terminal.
TERMINAL_CHARS = {"enter": ("\r", "\n"), "space": (" ",), "escape": ("\x1b",), "ctrl+c": ("\x03",),
                  "minus": ("-",), "plus": ("+",), "equals_sign": ("=",), "question_mark": ("?",)}


def key(action: str) -> OperatorKey:
    """The entry of :data:`OPERATOR_KEYS` for ``action``."""
    for k in OPERATOR_KEYS:
        if k.action == action:
            return k
    raise KeyError(action)


def shown(action: str) -> str:
    """The keys of ``action`` as printed (e.g. ``"Esc or Ctrl+C"``)."""
    return key(action).shown


def terminal_actions() -> dict[str, str]:
    """Character a terminal sends -> action name, for every operator key."""
    out = {}
    for k in OPERATOR_KEYS:
        for name in k.keys:
            for ch in TERMINAL_CHARS.get(name, (name,) if len(name) == 1 else ()):
                out[ch] = k.action
    return out


def split_terminal_input(data: str) -> list[str]:
    """Split what a terminal sent into keys: one character each, a control sequence whole.

    A lone ESC (not followed by ``[`` or ``O``, which start the sequences of arrows,
    page and function keys) is the Esc key.  A sequence is kept whole, so an arrow key
    is never read as Esc followed by letters; an ESC at the very end of the data is Esc.
    """
    keys = []
    i, n = 0, len(data)
    while i < n:
        ch = data[i]
        if ch == "\x1b" and i + 1 < n and data[i + 1] in "[O":
            j = i + 2
            while j < n and not ("@" <= data[j] <= "~"):
                j += 1
            keys.append(data[i:j + 1])
            i = j + 1
            continue
        keys.append(ch)
        i += 1
    return keys


def keys_line() -> str:
    """One line listing every operator key (the terminal runner prints it)."""
    return "keys: " + " | ".join(f"{k.shown} {k.short}" for k in OPERATOR_KEYS)


def markdown_table() -> str:
    """The key table as the README prints it (a test keeps the README in step)."""
    lines = ["| key | what it does |", "|---|---|"]
    for k in OPERATOR_KEYS:
        keys = " or ".join(_md_key(part) for part in k.shown.split(" or "))
        lines.append(f"| {keys} | {k.does} |")
    return "\n".join(lines)


def _md_key(text: str) -> str:
    return text if text in ("Enter", "space", "Esc", "Ctrl+C") else f"`{text}`"
