"""The help screen: every key of every view, read from the views' own bindings."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

KEY_NAMES = {"ctrl+q": "ctrl+q", "ctrl+z": "ctrl+z", "ctrl+s": "ctrl+s", "question_mark": "?",
             "exclamation_mark": "!", "plus": "+", "minus": "-", "left_square_bracket": "[",
             "right_square_bracket": "]", "left_parenthesis": "(", "right_parenthesis": ")",
             "shift+left": "shift+←", "shift+right": "shift+→", "left": "←", "right": "→",
             "up": "↑", "down": "↓", "enter": "enter", "escape": "esc", "home": "home", "end": "end",
             "equals_sign": "=", "less_than_sign": "<", "greater_than_sign": ">", "delete": "del",
             "space": "space", "ctrl+c": "ctrl+c"}


def key_label(key: str) -> str:
    return ", ".join(KEY_NAMES.get(k.strip(), k.strip()) for k in key.split(","))


def binding_lines(bindings) -> list[str]:
    lines = []
    for b in bindings:
        if isinstance(b, Binding):
            key, desc = b.key, b.description
        else:
            key, desc = b[0], b[2] if len(b) > 2 else b[1]
        if desc:
            lines.append(f"  {key_label(key):<16} {desc}")
    return lines


class HelpScreen(ModalScreen[None]):
    """All keys, by view."""

    BINDINGS = [Binding("escape,question_mark,enter", "close", "close")]

    def __init__(self, sections: list[tuple[str, list]]):
        super().__init__()
        self.sections = sections

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-box"):
            yield Static("Keys", id="help-title")
            for title, bindings in self.sections:
                # a Text, not markup: key names such as "[" and "]" must not be read as tags
                yield Static(Text.assemble((title, "bold"), "\n", "\n".join(binding_lines(bindings))),
                             classes="help-section")
            yield Static("escape: back", id="help-keys")

    def action_close(self) -> None:
        self.dismiss(None)
