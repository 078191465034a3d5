"""The one operator key map: `showkit run` and the UI's Run view read the same table."""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np

from showkit.show import operator_keys as ok

ROOT = Path(__file__).resolve().parents[1]


def test_every_action_has_keys_and_no_key_does_two_things():
    seen = {}
    for k in ok.OPERATOR_KEYS:
        assert k.keys and k.shown and k.does
        for name in k.keys:
            assert name not in seen, f"{name} is bound to {seen[name]} and {k.action}"
            seen[name] = k.action
    assert {"go", "panic", "fade", "fader_down", "fader_up", "rearm", "reconnect"} <= {
        k.action for k in ok.OPERATOR_KEYS}
    # the presenter's keys (issue 11): Enter and space go, Esc and Ctrl+C panic
    assert ok.key("go").keys == ("enter", "space")
    assert set(ok.key("panic").keys) == {"escape", "ctrl+c"}


def test_terminal_characters_map_to_the_same_actions():
    chars = ok.terminal_actions()
    assert chars["\r"] == chars["\n"] == chars[" "] == "go"
    assert chars["\x1b"] == chars["\x03"] == "panic"
    assert chars["-"] == "fader_down" and chars["+"] == chars["="] == "fader_up"
    assert chars["f"] == "fade" and chars["a"] == "rearm" and chars["d"] == "reconnect"
    assert "x" not in chars and "q" not in chars  # x is no longer a panic, q is the runner's quit


def test_terminal_input_keeps_control_sequences_whole():
    # ECMA-48 (5th ed., 1991) s.5.4: a control sequence is ESC [ , parameters, one final
    # byte 0x40..0x7E; SS3 (ESC O x) for keypad keys.  An arrow key must not read as Esc.
    assert ok.split_terminal_input("\x1b[B") == ["\x1b[B"]
    assert ok.split_terminal_input("\x1bOA") == ["\x1bOA"]
    assert ok.split_terminal_input("\x1b[6~ ") == ["\x1b[6~", " "]
    assert ok.split_terminal_input("\x1b") == ["\x1b"]
    assert ok.split_terminal_input("a\x1bf") == ["a", "\x1b", "f"]
    assert ok.split_terminal_input("\r-+") == ["\r", "-", "+"]


def test_the_runner_and_the_ui_bind_the_table():
    from showkit.ui.run import RunView

    bound = {}
    for b in RunView.BINDINGS:
        for name in b.key.split(","):
            bound[name] = b.action
    for k in ok.OPERATOR_KEYS:
        for name in k.keys:
            if k.action == "help" or name == "ctrl+c":
                continue  # the App's (? help, ctrl+c panic from every view and dialog)
            assert bound[name] == f"operator('{k.action}')"
    from showkit.ui.app import ShowkitApp

    app_keys = {b.key: (b.action, b.priority) for b in ShowkitApp.BINDINGS}
    assert app_keys["ctrl+c"] == ("panic", True)
    assert app_keys["escape"][0] == "panic"
    assert app_keys["question_mark"][0] == "help"


def test_arrow_key_in_the_runner_is_not_a_panic():
    from showkit.cli.run_cmd import KeyRunner
    from showkit.show.engine import Engine
    from showkit.show.playlist import RenderedCue

    tone = (0.1 * np.sin(2 * np.pi * 220 * np.arange(4800) / 48000)).astype(np.float32)
    engine = Engine([RenderedCue("a", "A", tone, 48000)])
    out = io.StringIO()
    runner = KeyRunner(engine, out)
    for key in ok.split_terminal_input("\r\x1b[A"):
        runner.handle(key)
    engine.render_into(np.zeros((480, 1), np.float32), 480)
    assert engine.status().state == "playing"
    runner.handle("\x1b")
    assert engine.status().state == "panic"


def test_documented_once_in_the_readme_and_in_the_help():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert ok.markdown_table() in readme
    section = readme[readme.index("## Running a show"):]
    section = section[:section.index("\n## ", 5)]
    assert "`x`" not in section and "ctrl+x" not in readme
    from showkit.ui.app import _operator_help
    from showkit.ui.help import binding_lines

    text = "\n".join(binding_lines(_operator_help()))
    for k in ok.OPERATOR_KEYS:
        assert k.does in text
    assert "esc, ctrl+c" in text and "enter, space" in text
