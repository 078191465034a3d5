"""Open the terminal UI on a cue sheet or on a track.

  showkit                              the demo show (your own copy of it)
  showkit open SHEET.toml              a cue sheet of yours
  showkit open TRACK.flac --rig RIG.toml
                                       a track, on your rig, with a new sheet for it
                                       (kept in showkit's data folder unless --sheet is given)

Keys: press ? in the UI for every key; ctrl+q saves and quits.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from showkit.errors import InputError
from showkit.folders import data_dir

AUDIO_SUFFIXES = {".flac", ".wav", ".ogg", ".oga", ".aiff", ".aif", ".mp3"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("path", nargs="?", metavar="SHEET.toml|TRACK",
                        help="a cue sheet, or an audio file to analyse (default: the demo show)")
    parser.add_argument("--rig", metavar="RIG.toml",
                        help="rig file for a track opened on its own (default: the demo rig)")
    parser.add_argument("--sheet", metavar="SHEET.toml",
                        help="with a track: the cue sheet to add passages to (made if missing)")
    parser.add_argument("--view", choices=("show", "tube", "track", "run", "measure"),
                        help="the view to open first: show (cue list), tube (modes), track (a track's "
                             "passages), run (play the show) or measure (fit the tube to a sweep); "
                             "default: show, or track when a track is opened")
    parser.add_argument("--cautions", action="store_true", help="show the safety cautions at start")


def default_args() -> argparse.Namespace:
    """The arguments of ``showkit`` with no arguments: the demo show."""
    return argparse.Namespace(path=None, rig=None, sheet=None, view=None, cautions=False)


def build_app(args: argparse.Namespace):
    """The app for these arguments (raises ShowkitError for a bad path)."""
    from showkit.ui.app import ShowkitApp
    from showkit.ui.session import Session

    track = None
    view = args.view
    path = Path(args.path).expanduser() if args.path else None
    if path is None:
        from showkit.demo_files import user_demo_show

        session = Session.open_sheet(user_demo_show())
    elif path.suffix.lower() in AUDIO_SUFFIXES:
        from showkit.analysis.audio import audio_info

        # one line before any sheet is made: missing, a folder, a pipe or a device, too big, not
        # audio, cut short or empty (a text file named .wav opened the UI and wrote a sheet for it)
        audio_info(path)
        sheet = Path(args.sheet).expanduser() if args.sheet else data_dir() / "shows" / f"{path.stem}.toml"
        session = Session.for_track(path, args.rig, sheet)
        track, view = path, view or "track"
    else:
        if args.rig:
            raise InputError("--rig goes with a track; a cue sheet names its own rig", "--rig",
                             "edit the sheet's rig = line, or open a track with --rig")
        session = Session.open_sheet(path)
    return ShowkitApp(session, track=track, view=view or "show", cautions=True if args.cautions else None)


def run(args: argparse.Namespace) -> int:
    app = build_app(args)
    app.run()
    return int(app.return_code or 0)
