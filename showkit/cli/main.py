"""The ``showkit`` command: one command, one subcommand per job.

Each subcommand lives in its own module under :mod:`showkit.cli` with two
functions, ``add_arguments(parser)`` and ``run(args) -> int``, and is imported
only when it is used, so that ``showkit --help`` and the UI start fast.
A :class:`~showkit.errors.ShowkitError` becomes one line on stderr and exit
status 2, never a traceback.
"""

from __future__ import annotations

import argparse
import errno
import importlib
import importlib.util
import sys

from showkit import __version__
from showkit.errors import InputError, ShowkitError
from showkit.fileio import quiet_native_probes
from showkit.safety import LEVEL_CAUTION

#: name -> (module under showkit.cli, one-line help)
COMMANDS: dict[str, tuple[str, str]] = {
    "open": ("open_cmd", "open the terminal UI on a cue sheet or a track"),
    "modes": ("modes_cmd", "list the tube's resonances and the flame patterns they show"),
    "ceiling": ("ceiling_cmd", "the safe drive ceiling (dB) of a track or passage"),
    "scan": ("scan_cmd", "rank tracks and passages by how well they read in flames"),
    "lock": ("lock_cmd", "compute and lock the ceiling of every cue in a cue sheet"),
    "check": ("check_cmd", "check a locked cue sheet against today's manometer reading"),
    "render": ("render_cmd", "render a locked cue sheet to audio files, every cue at or below its ceiling"),
    "run": ("run_cmd", "run a show live through the audio device"),
    "devices": ("devices_cmd", "list audio output devices"),
    "measure": ("measure_cmd", "measure a real tube: sweep, resonances, fit and calibration"),
    "book": ("book_cmd", "write a printable show book (PDF) of a cue sheet"),
    "preview": ("preview_cmd", "write a video of the predicted flame row with the show's sound"),
}

EPILOG = ("Run `showkit` with no arguments to open the terminal UI on the bundled demo show. "
          "Lengths accept m, mm, cm, in, ft (\"6 ft 6 in\"); pressures Pa, mbar, inH2O, mmH2O, psi; "
          "temperatures C, F, K. " + LEVEL_CAUTION)


def _available() -> dict[str, tuple[str, str]]:
    """The commands whose module is present in this version."""
    found = {}
    for name, (module, text) in COMMANDS.items():
        if importlib.util.find_spec(f"showkit.cli.{module}") is not None:
            found[name] = (module, text)
    return found


class _OneLineParser(argparse.ArgumentParser):
    """argparse, with its errors (a missing argument, an option without its value, an unknown
    command) raised as one :class:`~showkit.errors.InputError` line instead of the usage block.

    Subcommand parsers are made of the same class (argparse's ``add_subparsers`` default).
    """

    def error(self, message: str):
        raise InputError(message, self.prog.partition(" ")[2] or None,
                         f"see `{self.prog} --help` for what it takes")


def build_parser() -> tuple[argparse.ArgumentParser, dict]:
    parser = _OneLineParser(
        prog="showkit",
        description="Plan, check and run flame-tube science shows: model your tube, "
                    "analyse tracks, lock safe drive levels per cue.",
        epilog=EPILOG,
    )
    parser.add_argument("--version", action="version", version=f"showkit {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    modules = {}
    for name, (module, text) in _available().items():
        mod = importlib.import_module(f"showkit.cli.{module}")
        p = sub.add_parser(name, help=text, description=(mod.__doc__ or text).strip(),
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        mod.add_arguments(p)
        modules[name] = mod
    return parser, modules


def _unrecognized(args, extras: list[str]) -> tuple[str, str | None, str]:
    """``(what, where, fix)`` for arguments no parser took: named for the (sub)command given."""
    words = [w for w in (getattr(args, "command", None), getattr(args, "measure_command", None)) if w]
    command = " ".join(["showkit", *words])
    kind = "option" if all(e.startswith("-") for e in extras) else "argument"
    what = f"unrecognized {kind}{'s' if len(extras) > 1 else ''}: {' '.join(extras)}"
    return what, " ".join(words) or None, f"see `{command} --help` for what it takes"


class _StdoutFailed(Exception):
    """Standard output refused a write or a flush (a full disk, a device), with the OSError's words."""


class _GuardedStdout:
    """Standard output as given, its write and flush errors (other than a closed pipe, which stays
    a BrokenPipeError) raised as :class:`_StdoutFailed`, so that they are told from any other
    OSError."""

    def __init__(self, stream):
        self._stream = stream

    def _guard(self, method, *args):
        try:
            return method(*args)
        except BrokenPipeError:
            raise
        except OSError as exc:
            raise _StdoutFailed(exc.strerror or str(exc), exc.errno) from None

    def write(self, text):
        return self._guard(self._stream.write, text)

    def flush(self):
        return self._guard(self._stream.flush)

    def __getattr__(self, name):
        return getattr(self._stream, name)


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    given = sys.stdout
    if given is not None:      # None: started with standard output closed; print() then writes nothing
        sys.stdout = _GuardedStdout(given)
    # the C libraries' own lines on standard error are silenced for the commands, never for the
    # terminal UI (`showkit`, `showkit open`), which draws through that descriptor
    quiet_native_probes(bool(argv) and argv[0] != "open")
    try:
        return _main(argv)
    finally:
        quiet_native_probes(False)
        sys.stdout = given


def _main(argv: list[str]) -> int:
    try:
        if not argv and "open" in _available():
            from showkit.cli import open_cmd
            return open_cmd.run(open_cmd.default_args())
        parser, modules = build_parser()
        args, extras = parser.parse_known_args(argv)
        if extras:
            # argparse would print the top-level usage for an option a subcommand does not take
            raise InputError(*_unrecognized(args, extras))
        if args.command is None:
            parser.print_help()
            return 0
        status = int(modules[args.command].run(args) or 0)
        if sys.stdout is not None:
            sys.stdout.flush()     # here, not at exit: a full disk or a closed pipe is then caught below
        return status
    except ShowkitError as exc:
        print(f"showkit: {exc.line()}", file=sys.stderr)
        return exc.exit_status
    except KeyboardInterrupt:
        print("showkit: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        _drop_stdout()
        return 0
    except _StdoutFailed as exc:
        _drop_stdout()
        fix = "free some disk space, or send" if exc.args[1] in (errno.ENOSPC, errno.EDQUOT) else "send"
        print(f"showkit: standard output cannot be written ({exc.args[0]}) -- {fix} the output to another "
              "file", file=sys.stderr)
        return 2


def _drop_stdout() -> None:
    """Standard output to the null device, so that the interpreter's last flush of what could not be
    written raises nothing more (the way Python's documentation handles a closed pipe)."""
    import os

    try:
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, sys.stdout.fileno())
        os.close(null)
    except (OSError, ValueError, AttributeError):  # not a real file (a test's capture): nothing waits
        pass


if __name__ == "__main__":
    raise SystemExit(main())
