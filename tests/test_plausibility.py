"""Plausibility warnings: valid inputs that are probably slips, said aloud, never refused.

The thresholds are the project's own (common practice, no source): a 5 cm sheet, 100 m
from the first source, 100 kW, a duty cycle of 1e-4.  The oven-leakage ids are product
emission limits read 5 cm from an oven's outer surface (21 CFR 1030.10(c)(1)).
"""

from __future__ import annotations

import html as html_lib
import json
import warnings

import pytest
from typer.testing import CliRunner

from keepclear.antennas.base import ModelRangeWarning
from keepclear.fields.cli import app
from keepclear.fields.plausibility import (
    PlausibilityWarning,
    input_warnings,
    oven_leakage_messages,
)
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


# ------------------------------------------------- warnings carried into the outputs
#: Every plausibility finding at once: 200 kW, duty 5e-5, a place 150 m away, an 8 cm
#: sheet and an oven-leakage limit without an [enclosure].
IMPLAUSIBLE = """
name = "slips"
[[source]]
id = "s"
antenna = "isotropic"
gain_dbi = 6.0
power_w = 200000.0
duty_cycle = 0.00005
position_m = [0.0, 0.0, 1.0]
[exposure]
limits = ["fda-1030.10/in-service", "icnirp-2020/general-public"]
[[shield]]
center_m = [1.0, 0.0, 1.0]
normal = [1.0, 0.0, 0.0]
width_m = 1.0
height_m = 1.0
type = "sheet"
metal = "aluminium"
thickness_m = 0.08
[[point]]
name = "far"
position_m = [150.0, 0.0, 1.0]
"""

#: A fragment of each message the scenario above must draw, one per finding.
IMPLAUSIBLE_FRAGMENTS = (
    "source.1.power_w = 200000 W is above 100 kW",
    "source.1.duty_cycle = 5e-05 is below 1e-4",
    "point.1.position_m ('far') is 150 m from the first source",
    "shield.1.thickness_m = 0.08 m is thicker than 5 cm",
    "fda-1030.10/in-service is a product emission limit",
)

OVEN_ID = "fda-1030.10/before-purchase"


def _report_warnings(html: str) -> str:
    """The report's block of input warnings (empty when it has none)."""
    start = html.find('id="input-warnings"')
    return "" if start < 0 else html[start : html.index("</div>", start)]


def test_assess_carries_every_warning_into_the_json_and_the_report(write_scenario, tmp_path):
    path = write_scenario(IMPLAUSIBLE)
    out = tmp_path / "out"
    result = runner.invoke(app, ["assess", str(path), "--out", str(out), "--pixels", "21"])
    assert result.exit_code == 0, result.output
    data = json.loads((out / "assessment.json").read_text(encoding="utf-8"))
    block = _report_warnings((out / "report.html").read_text(encoding="utf-8"))
    assert "Warnings about the input" in block
    assert len(data["warnings"]) == len(IMPLAUSIBLE_FRAGMENTS), data["warnings"]
    for fragment in IMPLAUSIBLE_FRAGMENTS:
        assert sum(fragment in w for w in data["warnings"]) == 1, (fragment, data["warnings"])
        assert html_lib.escape(fragment) in block, fragment
        # Printed once on stderr, however many steps of the run came across it.
        assert result.stderr.count(fragment) == 1, (fragment, result.stderr)
    # Near the top: before the summary of the keep-out distances.
    html = (out / "report.html").read_text(encoding="utf-8")
    assert html.index('id="input-warnings"') < html.index('class="summary"')


def test_plausible_assessment_has_no_warnings(write_scenario):
    from keepclear.fields.assessment import GridSettings, assess

    scenario = load_scenario(write_scenario(ISOTROPIC))
    result = assess(scenario, grid=GridSettings(pixels=21))
    assert result.data["warnings"] == []
    html = result.files["report.html"].decode("utf-8")
    assert "Warnings about the input" not in html and 'id="input-warnings"' not in html


@pytest.mark.parametrize("command", ["probe", "readings", "keepout"])
def test_an_oven_leakage_id_on_the_command_line_warns_once(write_scenario, tmp_path, command):
    path = write_scenario(ISOTROPIC)
    extra = {
        "probe": ["--at", "1,0,0"],
        "readings": ["--csv", str(tmp_path / "r.csv")],
        "keepout": [],
    }[command]
    (tmp_path / "r.csv").write_text("x_m,y_m,z_m,value,unit\n1,0,0,2,W/m2\n", encoding="utf-8")
    result = runner.invoke(app, [command, str(path), *extra, "--limit", OVEN_ID, "--json"])
    assert result.exit_code == 0, result.output
    (warning,) = oven_leakage_messages([OVEN_ID], False)
    assert result.stderr.count(warning) == 1, result.stderr
    assert json.loads(result.stdout)["warnings"] == [warning]


def test_an_oven_leakage_id_given_to_the_api_warns(write_scenario):
    from keepclear.fields import assessment as api

    scenario = load_scenario(write_scenario(ISOTROPIC))
    with pytest.warns(PlausibilityWarning, match="product emission limit"):
        api.probe(scenario, [1.0, 0.0, 0.0], limits=[OVEN_ID])
    with pytest.warns(PlausibilityWarning, match="product emission limit"):
        api.keepout(scenario, limits=[OVEN_ID])


def test_an_oven_leakage_id_with_an_enclosure_draws_no_warning():
    assert oven_leakage_messages([OVEN_ID, "icnirp-2020/general-public"], True) == []
    assert [m.split(" ")[0] for m in oven_leakage_messages([OVEN_ID], False)] == [OVEN_ID]


def test_plausible_probe_and_keepout_json_have_empty_warnings(write_scenario):
    path = write_scenario(ISOTROPIC)
    for args in (["probe", str(path), "--at", "1,0,0"], ["keepout", str(path)]):
        result = runner.invoke(app, [*args, "--json"])
        assert result.exit_code == 0, result.output
        assert json.loads(result.stdout)["warnings"] == []
        assert "warning" not in result.stderr


def test_a_loader_warning_is_raised_and_carried(write_scenario):
    # ITU-R P.2040-3 (08/2023) Table 3 gives concrete for 1-100 GHz: 0.9 GHz is outside.
    text = ISOTROPIC.replace('name = "test point source"', 'name = "low"\nfrequency_hz = 0.9e9')
    text += '[[reflector]]\npoint_m = [0, 0, -1]\nnormal = [0, 0, 1]\nmaterial = "concrete"\n'
    with pytest.warns(ModelRangeWarning, match="outside the 1-100 GHz range"):
        scenario = load_scenario(write_scenario(text))
    assert len(scenario.load_warnings) == 1
    assert "reflector.1.material" in scenario.load_warnings[0]
    assert input_warnings(scenario) == list(scenario.load_warnings)


def test_a_swept_implausible_value_warns_and_is_carried(write_scenario):
    from keepclear.fields.assessment import with_sweeps

    scenario = load_scenario(write_scenario(ISOTROPIC))
    with pytest.warns(PlausibilityWarning, match="below 1e-4"):
        swept = with_sweeps(scenario, ["source.s.duty_cycle=0.5,5e-5"])
    # An assessment of every option carries it, named by its option; the base alone not.
    found = input_warnings(swept, options=True)
    assert any(m.startswith("option '") and "duty_cycle = 5e-05" in m for m in found), found
    assert not any("duty_cycle" in m for m in input_warnings(swept))


def test_each_run_carries_its_own_load_warnings(write_scenario):
    # The base at 2.45 GHz is inside concrete's fitted range (ITU-R P.2040-3, Table 3:
    # 1-100 GHz); its option at 0.9 GHz is not.  The warning belongs to the option's run.
    path = write_scenario(
        'name = "o"\n[[source]]\nid = "s"\nantenna = "isotropic"\npower_w = 10.0\n'
        "position_m = [0.0, 0.0, 1.0]\n[[reflector]]\npoint_m = [0, 0, -1]\n"
        'normal = [0, 0, 1]\nmaterial = "concrete"\n[[option]]\nname = "low-f"\n'
        "frequency_hz = 0.9e9\n"
    )
    with pytest.warns(UserWarning, match="0.9 GHz is outside"):
        scenario = load_scenario(path)
    assert scenario.load_warnings == ()
    (option,) = scenario.options
    assert any("0.9 GHz is outside" in m for m in option.scenario.load_warnings)
    assert input_warnings(scenario) == []
    assert any("0.9 GHz" in m for m in input_warnings(option.scenario))
    assert any(
        m.startswith("option 'low-f': ") and "0.9 GHz" in m
        for m in input_warnings(scenario, options=True)
    )


def test_an_options_own_finding_is_named_after_it_on_stderr(write_scenario):
    # The base's 200 kW is the base's finding (every option shares it, so it is given once,
    # without an option's name); a 1 m sheet that only one option adds is that option's.
    path = write_scenario(
        ISOTROPIC.replace("power_w = 100.0", "power_w = 250000.0")
        + '\n[[option]]\nname = "thick sheet"\n'
        + SHEET.format(thickness=1.0).replace("[[shield]]", "[[option.shield]]")
    )
    result = runner.invoke(app, ["compare", str(path), "--pixels", "11", "--json"])
    assert result.exit_code == 0, result.output
    assert result.stderr.count("above 100 kW") == 1
    assert "option 'thick sheet': shield.1.thickness_m = 1 m is thicker than 5 cm" in (
        result.stderr
    )
    assert "option 'thick sheet': source.1.power_w" not in result.stderr
