"""Small modal forms: ask for a few values, give them back as a dict (or None)."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static


class AskScreen(ModalScreen[dict | None]):
    """A form of labelled inputs; enter confirms, escape cancels.

    Parameters
    ----------
    title : str
    fields : list of (name, label, value)
    note : str
        A line shown under the title (e.g. the level caution).
    """

    BINDINGS = [Binding("escape", "cancel", "cancel"), Binding("enter", "confirm", "confirm", priority=True)]

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
            yield Static("enter: confirm    escape: cancel", id="ask-keys")

    def on_mount(self) -> None:
        first = self.query(Input).first()
        first.focus()

    def action_confirm(self) -> None:
        inputs = list(self.query(Input))
        focused = self.focused
        if isinstance(focused, Input) and focused in inputs and inputs.index(focused) < len(inputs) - 1:
            inputs[inputs.index(focused) + 1].focus()
            return
        self.dismiss({name: self.query_one(f"#ask-{name}", Input).value for name, _, _ in self.fields})

    def action_cancel(self) -> None:
        self.dismiss(None)
