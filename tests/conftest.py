"""Shared fixtures: scenario files written into a temporary folder."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
SCENARIOS = REPO / "scenarios"


@pytest.fixture
def write_scenario(tmp_path: Path):
    """Write TOML text (dedented) to a file and return its path."""

    def _write(text: str, name: str = "scenario.toml") -> Path:
        path = tmp_path / name
        path.write_text(textwrap.dedent(text), encoding="utf-8")
        return path

    return _write


ISOTROPIC = """
name = "test point source"
[[source]]
id = "s"
antenna = "isotropic"
power_w = 100.0
position_m = [0.0, 0.0, 0.0]
"""
