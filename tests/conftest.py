"""Shared pytest fixtures (keep generic and small; add fixtures with small edits)."""

from __future__ import annotations

import pytest


@pytest.fixture
def write_rig(tmp_path):
    """Factory: ``write_rig(text, name="rig.toml")`` writes a rig file in tmp_path, returns its Path."""

    def _write(text: str, name: str = "rig.toml"):
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path

    return _write


@pytest.fixture(scope="session")
def air_20c():
    """Dry air at 20 C and 101 325 Pa (the gas of the openwind reference tubes)."""
    from showkit.physics.gas import gas_state

    return gas_state("air", 0.0, 293.15)
