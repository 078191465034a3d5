"""List the audio output devices showkit can play a show through.

Each line gives the index and the name (either can be given to
`showkit run --device`), the number of output channels, the default sample
rate and the host audio system; the system's default output is marked with *.
Without the PortAudio library or with no output device, one line says what to do.
"""

from __future__ import annotations

import argparse

from showkit.cli.common import add_json_option, print_json, table
from showkit.errors import DeviceError


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_json_option(parser)


def run(args) -> int:
    from showkit.show.devices import list_output_devices

    devices = list_output_devices()
    if args.json:
        print_json({"devices": [d.as_dict() for d in devices]})
        return 0
    if not devices:
        raise DeviceError("no audio output device was found", "audio",
                          "connect or switch on an audio interface, or check the sound settings")
    rows = [["*" if d.is_default else "", str(d.index), d.name, str(d.channels),
             f"{d.default_rate_hz:g}", d.hostapi] for d in devices]
    print(table(rows, ["", "index", "name", "channels", "rate Hz", "host"], "<><>><"))
    return 0
