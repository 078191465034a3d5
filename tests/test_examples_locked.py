"""Issue 11 item 9: the example sheets in cues/ ship locked, and their locks are valid.

The README's "Running a show" runs them as shipped; an unlocked or stale example
gave "no cue in the sheet can be played today".  After a change that bumps
ANALYSIS_VERSION or alters the demo rig or tracks, lock them again
(`showkit lock cues/NAME.toml`) and commit the result.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from showkit.show.lock import check_sheet
from showkit.show.sheet import load_sheet

EXAMPLES = sorted((Path(__file__).resolve().parent.parent / "cues").glob("*.toml"))


def test_there_are_examples():
    assert len(EXAMPLES) >= 2


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.name for p in EXAMPLES])
def test_example_sheet_is_locked_and_every_cue_is_ok_as_shipped(path):
    sheet = load_sheet(path)
    checks = check_sheet(sheet)
    bad = [(c.id, c.status, c.message) for c in checks if c.status != "ok"]
    assert not bad, f"{path.name}: run `showkit lock cues/{path.name}` and commit it: {bad}"
    # and each gain keeps some room below its ceiling, as the README's examples say
    assert all(c.headroom_db is not None and c.headroom_db >= 0 for c in checks)
