"""The safety cautions (DEVELOPERS.md Methods §11): shown once at first start, and on request."""

from __future__ import annotations

from pathlib import Path

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from showkit.errors import ShowkitError
from showkit.safesave import write_text
from showkit.folders import data_dir
from showkit.safety import CAUTION_TITLE, CAUTIONS, LEVEL_CAUTION

MARKER = "cautions-read"


def marker_path() -> Path:
    return data_dir() / MARKER


def cautions_seen() -> bool:
    return marker_path().exists()


def mark_cautions_seen() -> None:
    """Remember that the cautions were read (best effort: an unwritable folder is no error)."""
    try:
        p = marker_path()
        p.parent.mkdir(parents=True, exist_ok=True)
        write_text(p, "The safety cautions were shown and acknowledged.\n", backups=0, what="marker")
    except (OSError, ShowkitError):
        pass


class CautionScreen(ModalScreen[None]):
    """The cautions, one paragraph each.  Enter acknowledges them (not shown at start again);
    escape closes them for now (shown again at the next start).  The keys stay on screen
    whatever its height (the cautions scroll above them)."""

    BINDINGS = [Binding("enter", "acknowledge", "I have read this"), Binding("escape", "close", "close for now")]

    def compose(self) -> ComposeResult:
        with Vertical(id="caution-box"):
            with VerticalScroll(id="caution-text"):
                yield Static(CAUTION_TITLE, id="caution-title")
                for text in CAUTIONS:
                    yield Static(f"• {text}", classes="caution-item")
                yield Static(LEVEL_CAUTION, id="caution-level")
            yield Static("enter: I have read this    esc: close for now (shown again at the next start)    "
                         "! reads them again", id="caution-keys")

    def action_acknowledge(self) -> None:
        mark_cautions_seen()
        self.dismiss(None)

    def action_close(self) -> None:
        self.dismiss(None)
