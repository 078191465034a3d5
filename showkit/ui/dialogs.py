"""Small modal forms: ask for a few values, give them back as a dict (or None)."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static


class AskScreen(ModalScreen[dict | None]):
    """A form of labelled inputs; enter in any field confirms, tab moves, escape cancels.

    Enter is the Input's own (``Input.Submitted``), not a priority binding: a
    priority binding would run before the Input has taken the characters typed
    just before it (a paste, or text and Enter sent together), and lose them.

    Parameters
    ----------
    title : str
    fields : list of (name, label, value)
    note : str
        A line shown under the title (e.g. the level caution).
    """

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, title: str, fields: list[tuple[str, str, str]], note: str = ""):
        super().__init__()
        self.form_title = title
        self.fields = fields
        self.note = note

    def compose(self) -> ComposeResult:
        with Vertical(id="ask-box"):
            yield Static(self.form_title, id="ask-title")
            if self.note:
                yield Static(self.note, id="ask-note")
            for name, label, value in self.fields:
                yield Label(label)
                yield Input(value=str(value), id=f"ask-{name}")
            keys = "enter: confirm    escape: cancel" + ("    tab: next field" if len(self.fields) > 1 else "")
            yield Static(keys, id="ask-keys")

    def on_mount(self) -> None:
        first = self.query(Input).first()
        first.focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        """Enter in any field: confirm with every field's value as it is now."""
        event.stop()
        values = {name: self.query_one(f"#ask-{name}", Input).value for name, _, _ in self.fields}
        if event.input.id and event.input.id.startswith("ask-"):
            values[event.input.id.removeprefix("ask-")] = event.value
        self.dismiss(values)

    def action_confirm(self) -> None:
        self.dismiss({name: self.query_one(f"#ask-{name}", Input).value for name, _, _ in self.fields})

    def action_cancel(self) -> None:
        self.dismiss(None)
