"""The audio output setting: a list of the output devices to choose from.

The devices come from :mod:`showkit.show.devices` (PortAudio through
sounddevice).  With no PortAudio library or no output device the dialog says
so, and what to do, instead of a list.  The choice is kept in the session
(``session.device``: None for the system default, else a device index) and
used by the audition and the run view.
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option

from showkit.errors import DeviceError

DEFAULT_ID = "default"


def device_choices():
    """``(devices, problem)``: the output devices, or the one-line reason there are none."""
    from showkit.show import devices

    try:
        found = devices.list_output_devices()
    except DeviceError as exc:
        return [], exc.line()
    if not found:
        return [], ("no audio output device was found -- connect or switch on an audio interface "
                    "(or check the sound settings), then open this setting again")
    return found, ""


class DeviceScreen(ModalScreen["object"]):
    """Choose the output device; dismisses with ``("set", None | index)`` or None (cancel)."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, current=None):
        super().__init__()
        self.current = current
        self.found, self.problem = device_choices()

    def compose(self) -> ComposeResult:
        with Vertical(id="device-box"):
            yield Static("Audio output (used by the audition and the run view)", id="device-title")
            if self.problem:
                yield Static(Text("⚠ " + self.problem), id="device-problem")
                yield Static("escape: back", id="device-keys")
                return
            options = [Option("system default output", id=DEFAULT_ID)]
            for d in self.found:
                mark = "  (system default)" if d.is_default else ""
                options.append(Option(f"{d.index:>3}  {d.name}  ·  {d.hostapi}, {d.channels} ch, "
                                      f"{d.default_rate_hz:g} Hz{mark}", id=str(d.index)))
            yield OptionList(*options, id="device-list")
            yield Static("enter: use this device    escape: cancel", id="device-keys")

    def on_mount(self) -> None:
        if self.problem:
            return
        lst = self.query_one(OptionList)
        ids = [DEFAULT_ID] + [str(d.index) for d in self.found]
        want = DEFAULT_ID if self.current is None else str(self.current)
        lst.highlighted = ids.index(want) if want in ids else 0
        lst.focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        oid = event.option.id
        self.dismiss(("set", None if oid == DEFAULT_ID else int(oid)))

    def action_cancel(self) -> None:
        self.dismiss(None)


def describe(found, index) -> str:
    """A short name for the chosen device."""
    if index is None:
        return "the system default output"
    for d in found:
        if d.index == index:
            return f"device {d.index} ({d.name})"
    return f"device {index}"
