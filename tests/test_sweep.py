"""Sweeps: one key over a list of values, each an option, checked like any scenario.

The physical check rests on the far-field law of FCC OET Bulletin 65, Edition 97-01
(1997), eq. (3): R = sqrt(P G / (4 pi S)), so the keep-out radius of an isotropic source
scales as the square root of its power.
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from typer.testing import CliRunner

from keepclear.fields.cli import app
from keepclear.fields.errors import InputError, ScenarioError
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario, with_sweep
from keepclear.fields.sweep import parse_sweep_argument

from .conftest import ISOTROPIC

runner = CliRunner()

SWEPT = (
    ISOTROPIC
    + """
[[point]]
name = "desk"
position_m = [0.5, 0.0, 0.0]

[[sweep]]
name = "power"
key = "source.s.power_w"
values = [25.0, 4.0]
"""
)


def test_sweep_makes_one_option_per_value_following_the_far_field_law(write_scenario):
    scenario = load_scenario(write_scenario(SWEPT))
    assert [o.name for o in scenario.options] == ["power = 25", "power = 4"]
    assert [o.scenario.sources[0].power_w for o in scenario.options] == [25.0, 4.0]
    base = keepout_distances(scenario)[0].distance_m
    for option, power in zip(scenario.options, (25.0, 4.0), strict=True):
        # OET 65 eq. (3): R scales as sqrt(P); the base is 100 W.
        distance = keepout_distances(option.scenario)[0].distance_m
        assert distance / base == pytest.approx(math.sqrt(power / 100.0), rel=2e-3)


def test_sweep_follows_the_options_and_keeps_file_order(write_scenario):
    text = SWEPT.replace(
        "[[sweep]]",
        '[[option]]\nname = "moved"\n[[option.source]]\nid = "s"\nposition_m = [1, 0, 0]\n\n'
        "[[sweep]]",
    )
    text += '\n[[sweep]]\nkey = "reflections"\nvalues = ["coherent"]\n'
    scenario = load_scenario(write_scenario(text))
    assert [o.name for o in scenario.options] == [
        "moved",
        "power = 25",
        "power = 4",
        "reflections = coherent",
    ]
    assert scenario.options[-1].scenario.reflections == "coherent"


@pytest.mark.parametrize(
    ("sweep", "where", "fragment"),
    [
        ('key = "source.nope.power_w"\nvalues = [1.0]', "sweep.1.key", "no [[source]]"),
        ('key = "antenna.s.power_w"\nvalues = [1.0]', "sweep.1.key", "not a table"),
        ('key = "source.s.power_w"\nvalues = []', "sweep.1.values", "at least one"),
        ('key = "source.s.power_w"\nvalues = [-5.0]', "sweep.1.values", "-5"),
        ('key = "source.s.power_w"\nvalues = 5.0', "sweep.1.values", "list"),
        ('key = "source.s.power_w"\nvalues = [1.0]\nstep = 2', "sweep.1.step", "not a known"),
    ],
)
def test_bad_sweep_is_refused_naming_the_key(write_scenario, sweep, where, fragment):
    path = write_scenario(ISOTROPIC + "\n[[sweep]]\n" + sweep + "\n")
    with pytest.raises(ScenarioError) as caught:
        load_scenario(path)
    assert caught.value.key == where
    assert fragment in str(caught.value)
    result = runner.invoke(app, ["probe", str(path), "--at", "1,0,0"])
    assert result.exit_code == 2
    assert where in result.stderr and "Traceback" not in result.output


@pytest.mark.parametrize(
    ("key", "suggestion"),
    [
        ("source.s.dutycycle", "did you mean 'source.s.duty_cycle'?"),
        ("source.1.power", "did you mean 'source.1.power_w'?"),
        ("source.s.length_m", "not of isotropic"),  # a key of other antenna kinds
    ],
)
def test_misspelt_sweep_key_is_blamed_not_the_value(write_scenario, key, suggestion):
    text = ISOTROPIC + f'\n[[sweep]]\nkey = "{key}"\nvalues = [0.1]\n'
    with pytest.raises(ScenarioError) as caught:
        load_scenario(write_scenario(text))
    message = str(caught.value)
    assert caught.value.key == "sweep.1.key"
    assert suggestion in message and "allowed there:" in message and "duty_cycle" in message
    assert "impossible" not in message and "0.1" not in message


def test_command_line_sweep_with_a_misspelt_key_names_the_argument(write_scenario):
    path = write_scenario(ISOTROPIC)
    result = runner.invoke(
        app, ["compare", str(path), "--sweep", "source.s.dutycycle=0.5,0.25", "--json"]
    )
    assert result.exit_code == 2
    assert "--sweep" in result.stderr and "did you mean 'source.s.duty_cycle'" in result.stderr


def test_messages_name_entries_as_sweep_keys_do(write_scenario):
    """An entry's path in a message (counted from 1) is the path a sweep key takes."""
    second = '\n[[source]]\nantenna = "isotropic"\npower_w = -1.0\nposition_m = [1, 0, 0]\n'
    with pytest.raises(ScenarioError) as caught:
        load_scenario(write_scenario(ISOTROPIC + second))
    assert caught.value.key == "source.2.power_w"
    fixed = ISOTROPIC + second.replace("-1.0", "5.0")
    scenario = with_sweep(load_scenario(write_scenario(fixed)), caught.value.key, [7.0])
    assert [s.power_w for s in scenario.options[0].scenario.sources] == [100.0, 7.0]


def test_sweep_inside_an_option_is_refused(write_scenario):
    text = ISOTROPIC + '\n[[option]]\nname = "x"\n[[option.sweep]]\nkey = "frequency_hz"\n'
    with pytest.raises(ScenarioError, match="not a key an option may override"):
        load_scenario(write_scenario(text + "values = [2.4e9]\n"))


def test_sweep_name_clash_with_an_option_is_refused(write_scenario):
    text = SWEPT.replace("[[sweep]]", '[[option]]\nname = "power = 4"\n\n[[sweep]]')
    with pytest.raises(ScenarioError, match="already has"):
        load_scenario(write_scenario(text))


def test_command_line_sweep_argument():
    assert parse_sweep_argument("source.feed.power_w=900,40,9") == (
        "source.feed.power_w",
        [900, 40, 9],
    )
    assert parse_sweep_argument("source.feed.position_m=[0,0,1],[0,0,2.5]") == (
        "source.feed.position_m",
        [[0, 0, 1], [0, 0, 2.5]],
    )
    assert parse_sweep_argument("shield.1.metal=aluminium,copper")[1] == ["aluminium", "copper"]
    for bad in ("source.feed.power_w", "=1,2", "source.feed.power_w=1,,2", "k=nan"):
        with pytest.raises(InputError, match="--sweep|finite|empty"):
            parse_sweep_argument(bad)


def test_with_sweep_adds_options_to_a_loaded_scenario(write_scenario):
    scenario = with_sweep(load_scenario(write_scenario(ISOTROPIC)), "source.s.duty_cycle", [0.5])
    (option,) = scenario.options
    assert option.name == "source.s.duty_cycle = 0.5"
    assert option.scenario.average_power_w == pytest.approx(50.0)
    with pytest.raises(ScenarioError) as caught:
        with_sweep(scenario, "source.s.duty_cycle", [0.0])
    assert caught.value.key == "--sweep"


SCENARIO_FILES = sorted((Path(__file__).resolve().parents[1] / "scenarios").glob("*.toml"))


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=[p.stem for p in SCENARIO_FILES])
def test_the_quick_sweep_check_accepts_what_the_full_reading_accepts(path, monkeypatch):
    """Every bundled scenario (options and file sweeps too), with a sweep on its first
    source, passes the check that stands point sources in for the models to be solved,
    and no model is built by it."""
    from keepclear.antennas import guide_grid
    from keepclear.fields.arguments import read_scenario_document
    from keepclear.fields.scenario import check_sweeps

    def refuse(*args, **kwargs):  # noqa: ANN002, ANN003, ANN202
        raise AssertionError("a model was built by the quick check")

    from keepclear.antennas import finite_ground

    monkeypatch.setattr(guide_grid, "GridOpenWaveguide", refuse)
    monkeypatch.setattr(guide_grid, "GridHorn", refuse)
    monkeypatch.setattr(finite_ground, "FiniteGroundMonopole", refuse)
    document = read_scenario_document(path)
    check_sweeps(document, path, [("source.1.duty_cycle", [0.5, 0.25])])


@pytest.mark.parametrize(
    ("key", "values"),
    [
        ("source.1.bogus_key", [1.0]),  # a key the entry does not take
        ("source.1.dutycycle", [0.5]),  # misspelt: "did you mean"
        ("source.1.power_w", [10.0, -5.0]),  # the second value is impossible
        ("source.1.boresight", [[0.0, 0.0, 0.0]]),  # a zero direction
        ("source.1.waveguide", ["WR-999"]),  # no such guide
        # the first value fails the horn model's own check (narrower than its feed), the
        # second the reader's range: the first is named, as the full reading names it
        ("source.1.aperture_width_m", [0.05, 30.0]),
        ("source.1.flange_m", [[0.1, 0.1]]),  # a flange smaller than the horn's mouth
    ],
)
def test_the_quick_sweep_check_refuses_as_the_full_reading_does(key, values):
    """The same message as the sweep added to the fully read scenario gives."""
    from keepclear.fields.arguments import read_scenario_document
    from keepclear.fields.scenario import check_sweeps

    path = Path(__file__).resolve().parents[1] / "scenarios" / "horn-bench-options.toml"
    document = read_scenario_document(path)
    with pytest.raises(ScenarioError) as full:
        with_sweep(load_scenario(path, document), key, values)
    with pytest.raises(ScenarioError) as quick:
        check_sweeps(document, path, [(key, values)])
    assert str(quick.value) == str(full.value)
    assert quick.value.key == full.value.key == "--sweep"


def test_a_refused_sweep_solves_no_model(tmp_path):
    """On a first run (no model kept), a sweep typo is refused before the horn is solved:
    nothing is written to the model folder."""
    import os
    import subprocess
    import sys

    path = Path(__file__).resolve().parents[1] / "scenarios" / "horn-bench-options.toml"
    cache = tmp_path / "models"
    done = subprocess.run(
        [
            sys.executable,
            "-m",
            "keepclear.fields.cli",
            "compare",
            str(path),
            "--sweep",
            "source.1.power_watts=100,10",
        ],
        capture_output=True,
        text=True,
        env={**os.environ, "KEEPCLEAR_CACHE_DIR": str(cache)},
        timeout=120,
        check=False,
    )
    assert done.returncode == 2, done.stderr
    assert "did you mean 'source.1.power_w'" in done.stderr
    assert not cache.exists() or not any(cache.rglob("*"))


def test_the_quick_sweep_check_leaves_shared_models_alone(monkeypatch):
    """Inside shared_radiators() (several readings of one run share their models), the
    point sources of the quick check never reach the shared models: a scenario read next
    gets its solved horn."""
    from keepclear.antennas.guide_grid import GridHorn
    from keepclear.fields.arguments import read_scenario_document
    from keepclear.fields.scenario import check_sweeps, shared_radiators

    path = Path(__file__).resolve().parents[1] / "scenarios" / "horn-bench-options.toml"
    document = read_scenario_document(path)
    with shared_radiators():
        check_sweeps(document, path, [("source.1.duty_cycle", [0.5])])
        scenario = load_scenario(path, document)
    assert isinstance(scenario.sources[0].radiator, GridHorn)


def test_command_line_checks_limits_before_the_sweep(write_scenario):
    """An out-of-band --limit is named before a bad --sweep, as it was before the quick
    check (the limit is checked on the scenario first)."""
    path = write_scenario(ISOTROPIC.replace("[[source]]", "frequency_hz = 5.8e9\n[[source]]", 1))
    result = runner.invoke(
        app,
        [
            "compare",
            str(path),
            "--limit",
            "iec-60601-1-2/wireless-2450",  # published for 2.4-2.57 GHz only
            "--sweep",
            "source.s.power_w=-1",
        ],
    )
    assert result.exit_code == 2
    assert "--limit" in result.stderr and "never extrapolated" in result.stderr
    assert "--sweep" not in result.stderr
