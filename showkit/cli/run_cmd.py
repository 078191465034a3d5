"""Run a show live through the audio device, from a plain terminal.

First the pre-show check: today's manometer reading (--static) and gas
temperature (--temperature) re-derive every ceiling and move the tone cues
with the modes; the cues that no longer fit are listed and cannot be started.
Then the show, one key per action.  The keys are the operator's key map, the
same as in the UI's Run view: Enter or
space starts the next cue, Esc panics, f fades out, - and + move the fader,
a re-arms after a panic, d reconnects the device, ? lists them; q quits (press
twice while a cue plays).  Ctrl+C panics too, and then quits.

--auto plays every cue in order with no keyboard, treating every cue as
"then = next": a rehearsal, or a test.
Every reading, start, stop, fade, fader move, panic and device error goes to
the show log (one JSON object a line; --log FILE, default in the user's data
directory).
"""

from __future__ import annotations

import argparse
import math
import os
import shutil
import sys
import time

from showkit.errors import DeviceError, InputError, SheetError, ShowkitError
from showkit.printable import printable
from showkit.units import agree, format_count, format_every, format_time

POLL_S = 0.05

def keys_help() -> str:
    """The key line printed at the start and on ``?`` (from the one operator key table)."""
    from showkit.show.operator_keys import keys_line

    return keys_line() + " | q quit"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("sheet", help="cue sheet (TOML), locked with `showkit lock`")
    parser.add_argument("--device", metavar="NAME|INDEX",
                        help="output device: part of its name or its index (see `showkit devices`; "
                             "default: the system's default output)")
    parser.add_argument("--log", metavar="FILE",
                        help="show log file, one JSON object a line (default: "
                             "<user data dir>/showkit/logs/show-<date>.jsonl)")
    parser.add_argument("--auto", action="store_true",
                        help="rehearsal: play every cue in order with no keyboard, then exit; names every "
                             "cue it skipped and why, and exits 1 when any was or the device faulted during "
                             "the show (2, as any setup error, when no device can be opened at the start)")
    parser.add_argument("--static", metavar="PRESSURE",
                        help='today\'s static overpressure from the manometer, e.g. "22 Pa", '
                             '"0.09 inH2O" (default: the rig file\'s)')
    parser.add_argument("--temperature", metavar="TEMP",
                        help='today\'s gas temperature, e.g. "24 C", "75 F" (default: the rig file\'s); '
                             "the modes move with it and the tone cues follow them")
    parser.add_argument("--fade", metavar="SECONDS", type=float, default=3.0,
                        help="fade-out time of the fade key, s (default 3)")


def run(args) -> int:
    from showkit.cli.common import level_caution
    from showkit.conditions import static_reading, temperature_reading
    from showkit.safety import caution_text
    from showkit.show.sheet import load_sheet, sheet_inputs
    from showkit.show.showlog import ShowLog

    # everything that can be refused is refused before anything is printed: the one line is
    # then the only output.  Today's readings go through the one door (the rig file's limits).
    static_pa = None if args.static is None else static_reading(args.static, "--static")
    temperature_k = None if args.temperature is None else temperature_reading(args.temperature, "--temperature")
    if not (args.fade > 0 and math.isfinite(args.fade)):
        raise InputError(f"the fade time must be above zero (got {args.fade:g})", "--fade",
                         "give seconds, e.g. --fade 3")
    if not args.auto and not _is_tty(sys.stdin):
        raise InputError("no keyboard: standard input is not a terminal", "showkit run",
                         "run it in a terminal, or use --auto for a rehearsal with no keyboard")
    show_files = sheet_inputs(load_sheet(args.sheet))  # the log is never written into one of them

    out = sys.stdout
    print(caution_text(), file=out)
    print(file=out)
    level_caution()
    log = ShowLog(args.log, protect=show_files)
    print(f"show log: {printable(log.path)}", file=out)
    try:
        return _run(args, log, static_pa, temperature_k, out)
    finally:
        log.close()


def _is_tty(stream) -> bool:
    try:
        return stream.isatty()
    except (AttributeError, ValueError):
        return False


def pre_show(args, log, static_pa, temperature_k, out):
    """The pre-show check: render for playback, log and print the summary; returns the cues."""
    from showkit.cli.common import table
    from showkit.show.preshow import pre_show_check
    from showkit.show.status import ceiling_text

    cues, problems = pre_show_check(args.sheet, log, static_pa, temperature_k)
    for line in problems:
        if not line.startswith("cue "):
            print(printable(line), file=out)
    rows = [[str(k + 1), c.id, c.label[:32], format_time(c.duration_s) if c.playable else "-",
             f"{c.gain_db:+.2f}", ceiling_text(c.ceiling_db, c.silent, 2),  # a gain a hair over shows
             c.then, c.status] for k, c in enumerate(cues)]
    print(table(rows, ["#", "cue", "label", "length", "gain dB", "ceiling dB", "then", "status"],
                "><<>>><<"), file=out)
    bad = [c for c in cues if not c.playable]
    if bad:
        print(f"\n{format_count(len(bad), 'cue')} cannot be started today:", file=out)
        for c in bad:
            print(f"  {printable(c.refusal())}", file=out)
        if args.auto:  # no keyboard: the rehearsal skips them itself and names them at the end
            print("The rehearsal passes over them and names them again at the end.", file=out)
        else:
            from showkit.show.operator_keys import shown

            print(f"{shown('go')} passes over them to the next cue that may be played.", file=out)
    if not any(c.playable for c in cues):
        raise SheetError("no cue in the sheet can be played today", args.sheet,
                         "lock it with `showkit lock SHEET` and check it with `showkit check SHEET`")
    print(file=out)
    return cues


def _run(args, log, static_pa, temperature_k, out) -> int:
    from showkit.show.engine import Engine

    cues = pre_show(args, log, static_pa, temperature_k, out)
    engine = Engine(cues, log=log, auto=args.auto, fade_s=args.fade)
    try:
        engine.open(args.device)
    except DeviceError as exc:
        if not engine.fault:  # open() logged stream failures itself; log the others here
            log.write("device_error", None, None, exc.line())
        raise
    dev = engine.device
    print(f"device: {dev.index} {printable(dev.name)} ({printable(dev.hostapi)}) at {engine.rate_hz} Hz", file=out)
    try:
        if args.auto:
            try:
                return run_auto(engine, out)
            except KeyboardInterrupt:
                engine.panic()
                time.sleep(0.1)
                _print_events(engine.poll(), out)
                raise
        return KeyRunner(engine, out).loop(sys.stdin)
    finally:
        engine.close()


# ---------------------------------------------------------------- rehearsal
def run_auto(engine, out, poll_s: float = 0.01) -> int:
    """Play every playable cue in order (followed on).

    Returns 0 when every cue was played; 1 when any cue was skipped (it may not be
    played today: stale, over or error; each is named with why) or the device faulted.
    """
    faults = 0
    skipped: list[int] = []
    while True:
        for k in engine.skipped:
            if k not in skipped:
                skipped.append(k)
                _skip(engine, k, out)
        index = engine.next_index
        if index is None:
            break
        engine.go(index)
        while engine.busy and not engine.fault:
            time.sleep(poll_s)
            _print_events(engine.poll(), out)
        _print_events(engine.poll(), out)
        if engine.fault:
            faults += 1
            print(f"DEVICE FAULT: {engine.fault}", file=out)
            print("reconnecting the device and resuming at the next cue ...", file=out)
            engine.reopen()
    played = len(engine.cues) - len(skipped)
    if not skipped and not faults:
        print(f"rehearsal done: "
              f"{format_every(played, 'cue')} {agree(played, 'was', 'were')} played", file=out)
        return 0
    parts = []
    if skipped:
        parts.append(f"{len(skipped)} of {format_count(len(engine.cues), 'cue')} skipped: "
                     + "; ".join(f"{engine.cues[k].id} ({engine.cues[k].status}"
                                 + (f": {engine.cues[k].message}" if engine.cues[k].message else "") + ")"
                                 for k in skipped))
    if faults:
        parts.append(f"{format_count(faults, 'device fault')}: see the log")
    print("rehearsal NOT complete: " + " | ".join(parts), file=out)
    return 1


def _skip(engine, index: int, out) -> None:
    cue = engine.cues[index]
    print(f"skipping {printable(cue.refusal())}", file=out)
    if engine.log is not None:
        engine.log.write("check", cue.id, cue.gain_db, f"skipped in rehearsal: {cue.status}"
                         + (f": {cue.message}" if cue.message else ""))


def _print_events(events, out) -> None:
    for ev in events:
        when = "" if ev.show_time_s is None else f"[{format_time(ev.show_time_s)}] "
        cue = f" {printable(ev.cue)}" if ev.cue else ""
        detail = printable(ev.detail)
        print(f"\r\x1b[K{when}{ev.kind}{cue}: {detail}" if _is_tty(out)
              else f"{when}{ev.kind}{cue}: {detail}", file=out)


def status_line(engine) -> str:
    """One line for the screen: current and next cue, elapsed/left, fader, state."""
    st = engine.status()
    if st.cue_id is not None:
        cue = engine.cues[st.cue_index]
        now = (f"NOW {st.cue_index + 1} {st.cue_id} '{cue.label[:24]}' {format_time(st.elapsed_s)}"
               f" (left {format_time(st.left_s)})")
    else:
        now = "NOW -"
    nxt = f"NEXT {st.next_index + 1} {st.next_id}" if st.next_id is not None else "NEXT (end of show)"
    if st.skipped_ids:
        nxt += f" (passing over {', '.join(st.skipped_ids)}: not playable)"
    fader = "silent" if st.fader_db == -math.inf else f"{st.fader_db:+.1f} dB"
    line = f"{now} | {nxt} | fader {fader} | {st.state.upper()}"
    if st.message:
        line += f" | {st.message}"
    return printable(line)  # cue ids and labels come from the sheet


# ----------------------------------------------------------------- keyboard
class KeyRunner:
    """Headless keyboard control of an engine (see the module docstring for the keys)."""

    def __init__(self, engine, out):
        self.engine = engine
        self.out = out
        self._quit_armed_until = 0.0

    def say(self, text: str) -> None:
        text = printable(text)  # may quote cue ids and messages from the sheet
        print(f"\r\x1b[K{text}" if _is_tty(self.out) else text, file=self.out)

    def handle(self, key: str) -> bool:
        """Act on one key (a character, or a whole control sequence); returns False to quit.

        The keys are :data:`showkit.show.operator_keys.OPERATOR_KEYS`; ``q`` quits.
        """
        from showkit.show.operator_keys import shown, terminal_actions

        engine = self.engine
        action = terminal_actions().get(key)
        try:
            if action == "panic":
                engine.panic()
                if key == "\x03":  # Ctrl+C from a raw terminal: as the signal, panic then quit
                    self.say("PANIC (Ctrl+C): output to silence; quitting")
                    return False
                self.say(f"PANIC: output to silence; press {shown('rearm')} to re-arm when it is safe")
            elif action == "go":
                index = engine.go()
                self.say(f"GO {index + 1} {engine.cues[index].id}")
            elif action == "fade":
                engine.fade_out()
            elif action == "fader_down":
                new = engine.fader_step(-1.0)
                self.say("fader " + ("silent" if new == -math.inf else f"{new:+.1f} dB"))
            elif action == "fader_up":
                new = engine.fader_step(+1.0)
                self.say(f"fader {new:+.1f} dB")
            elif action == "rearm":
                engine.rearm()
                self.say(f"re-armed: {shown('go')} starts the next cue")
            elif action == "reconnect":
                engine.reopen()
                self.say(f"device reconnected: {engine.device.name}; {shown('go')} starts the next cue")
            elif action == "help":
                self.say(keys_help())
            elif key == "q":
                if engine.busy and time.monotonic() > self._quit_armed_until:
                    self._quit_armed_until = time.monotonic() + 3.0
                    self.say("a cue is playing: press q again within 3 s to stop it and quit")
                    return True
                return False
            elif key.isprintable() and key.strip():
                self.say(f"{key!r} is not an operator key ({shown('panic')} is PANIC; ? lists the keys)")
        except ShowkitError as exc:
            self.say(f"refused: {exc.line()}")
        return True

    def loop(self, stdin) -> int:
        """Read keys in cbreak mode until quit; Ctrl+C panics and quits."""
        import select
        import termios
        import tty

        from showkit.show.operator_keys import split_terminal_input

        fd = stdin.fileno()
        saved = termios.tcgetattr(fd)
        shown = ""
        try:
            tty.setcbreak(fd)
            self.say(keys_help())
            running = True
            while running:
                ready, _, _ = select.select([fd], [], [], POLL_S)
                if ready:
                    data = os.read(fd, 64).decode("utf-8", "replace")
                    if not data:
                        break
                    for key in split_terminal_input(data):
                        if not self.handle(key):
                            running = False
                            break
                events = self.engine.poll()
                _print_events(events, self.out)
                line = status_line(self.engine)[:max(20, shutil.get_terminal_size().columns - 1)]
                if line != shown or events:
                    self.out.write("\r\x1b[K" + line)
                    self.out.flush()
                    shown = line
        except KeyboardInterrupt:
            self.engine.panic()
            self.say("PANIC (Ctrl+C): output to silence; quitting")
            time.sleep(0.1)
            _print_events(self.engine.poll(), self.out)
        finally:
            termios.tcsetattr(fd, termios.TCSADRAIN, saved)
            self.out.write("\n")
        return 0
