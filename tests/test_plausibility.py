"""Plausibility warnings: valid inputs that are probably slips, said aloud, never refused.

The thresholds are the project's own (common practice, no source): a 5 cm sheet, 100 m
from the first source, 100 kW, a duty cycle of 1e-4.  The oven-leakage ids are product
emission limits read 5 cm from an oven's outer surface (21 CFR 1030.10(c)(1)).
"""

from __future__ import annotations

import warnings

import pytest
from typer.testing import CliRunner

from keepclear.fields.cli import app
from keepclear.fields.plausibility import PlausibilityWarning
from keepclear.fields.scenario import load_scenario

from .conftest import ISOTROPIC, SCENARIOS

runner = CliRunner()

SHEET = """
[[shield]]
type = "sheet"
center_m = [0.5, 0.0, 0.0]
normal = [1.0, 0.0, 0.0]
width_m = 1.0
height_m = 1.0
metal = "aluminium"
thickness_m = {thickness}
"""


def _messages(path) -> list[str]:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        load_scenario(path)
    return [str(w.message) for w in caught if issubclass(w.category, PlausibilityWarning)]


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        (ISOTROPIC.replace("power_w = 100.0", "power_w = 250000.0"), "above 100 kW"),
        (ISOTROPIC.replace("power_w = 100.0", "power_w = 100.0\nduty_cycle = 5e-5"), "1e-4"),
        (ISOTROPIC + '[[point]]\nname = "seat"\nposition_m = [0.0, 0.0, 184.0]\n', "184 m"),
        (
            ISOTROPIC + "[[reflector]]\npoint_m = [0, 0, -150]\nnormal = [0, 0, 1]\n"
            'material = "concrete"\n',
            "150 m",
        ),
        (ISOTROPIC + SHEET.format(thickness=1.0), "thicker than 5 cm"),
        (
            ISOTROPIC + '[exposure]\nlimits = ["fda-1030.10/in-service"]\n',
            "product emission limit",
        ),
    ],
)
def test_implausible_input_is_computed_with_a_warning(write_scenario, text, fragment):
    messages = _messages(write_scenario(text))
    assert any(fragment in m for m in messages), messages


@pytest.mark.parametrize(
    "text",
    [
        ISOTROPIC,
        ISOTROPIC.replace("power_w = 100.0", "power_w = 100000.0"),
        ISOTROPIC + SHEET.format(thickness=0.05),
        ISOTROPIC + '[[point]]\nname = "gate"\nposition_m = [99.0, 0.0, 0.0]\n',
    ],
)
def test_plausible_input_draws_no_warning(write_scenario, text):
    assert _messages(write_scenario(text)) == []


def test_bundled_scenarios_are_plausible():
    for path in sorted(SCENARIOS.glob("*.toml")):
        assert _messages(path) == [], path.name


def test_oven_leakage_limit_asked_for_by_id_warns(write_scenario):
    from keepclear.fields.keepout import keepout_distances

    scenario = load_scenario(write_scenario(ISOTROPIC))
    with pytest.warns(PlausibilityWarning, match="product emission limit"):
        keepout_distances(scenario, ["fda-1030.10/before-purchase"])


def test_the_command_line_prints_the_warning_once_after_the_results(write_scenario):
    path = write_scenario(ISOTROPIC.replace("power_w = 100.0", "power_w = 250000.0"))
    result = runner.invoke(app, ["probe", str(path), "--at", "1,0,0", "--json"])
    assert result.exit_code == 0, result.output
    assert result.stderr.count("above 100 kW") == 1
