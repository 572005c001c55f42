"""The Python API (``import keepclear as kc``) on its own, and against the command line.

Each result's ``to_dict()`` must be exactly the JSON object the matching command prints
(the contract, "The python API"); the results are frozen; bad input raises an
``InputError`` naming the argument, as the command line would report it.
"""

from __future__ import annotations

import dataclasses
import json
import re
from pathlib import Path

import numpy as np
import pytest

import keepclear as kc
from keepclear.antennas.base import ModelInputError
from keepclear.antennas.errors import InputError as BaseInputError

from ._cli import one_error_line, run, strict_json
from .conftest import ISOTROPIC, SCENARIOS

HORN = SCENARIOS / "horn-bench-options.toml"
POINT_SOURCE = SCENARIOS / "isotropic-screening.toml"
GRID = kc.GridSettings(half_extent_m=2.0, pixels=9)


def _roundtrip(data):
    """What a dict becomes once printed as JSON and read back (tuples -> lists)."""
    return json.loads(json.dumps(data))


def test_public_names_are_exported():
    for name in ("load_scenario", "keepout", "probe", "field_map", "compare", "assess", "limits"):
        assert callable(getattr(kc, name)), name
    assert set(kc.__all__) <= set(dir(kc))


def test_package_ships_its_type_marker():
    assert (Path(kc.__file__).parent / "py.typed").is_file()


def test_limits_to_dict_is_the_command_json():
    result = kc.limits(2.45e9)
    assert dataclasses.is_dataclass(result)
    cli = strict_json(run("limits", "--json").stdout)
    assert _roundtrip(result.to_dict()) == cli
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.frequency_hz = 1.0  # type: ignore[misc]


def test_keepout_to_dict_is_the_command_json():
    scenario = kc.load_scenario(POINT_SOURCE)
    result = kc.keepout(scenario)
    cli = strict_json(run("keepout", POINT_SOURCE, "--json").stdout)
    assert _roundtrip(result.to_dict()) == cli
    # The typed fields say the same as the JSON.
    assert [k.limit_id for k in result.distances] == list(scenario.limit_ids)
    assert result.distances[0].distance_m == cli["keepout"][0]["distance_m"]
    assert result.average_power_w == cli["average_power_w"]


def test_probe_to_dict_is_the_command_json():
    scenario = kc.load_scenario(HORN)
    points = [[1.0, 0.0, 1.0], [-0.5, 0.2, 1.3]]
    result = kc.probe(scenario, points)
    cli = strict_json(run("probe", HORN, "--at", "1,0,1", "--at=-0.5,0.2,1.3", "--json").stdout)
    assert _roundtrip(result.to_dict()) == cli
    assert result.power_density_w_m2.shape == (2,)
    assert set(result.quotients) == set(scenario.limit_ids)
    # A single point as a 3-vector is one point.
    single = kc.probe(scenario, points[0])
    assert single.points_m.shape == (1, 3)
    assert single.power_density_w_m2[0] == pytest.approx(result.power_density_w_m2[0], rel=1e-12)


def test_probe_of_the_named_places_carries_their_names():
    scenario = kc.load_scenario(HORN)
    result = kc.probe(scenario)
    cli = strict_json(run("probe", HORN, "--json").stdout)
    assert _roundtrip(result.to_dict()) == cli
    assert [p["name"] for p in cli["points"]] == [p.name for p in scenario.points]


def test_field_map_to_dict_is_the_command_json(tmp_path):
    scenario = kc.load_scenario(POINT_SOURCE)
    result = kc.field_map(scenario, "xz", grid=GRID)
    csv = tmp_path / "m.csv"
    cli = strict_json(
        run(
            "map",
            POINT_SOURCE,
            "--plane",
            "xz",
            "--extent-m",
            "2",
            "--pixels",
            "9",
            "--csv",
            csv,
            "--json",
        ).stdout
    )
    expected = dict(cli, files=[])
    assert _roundtrip(result.to_dict()) == expected
    assert result.run.result.power_density_w_m2.shape == (9, 9)


def test_compare_to_dict_is_the_command_json(shared_models):
    scenario = kc.load_scenario(HORN)
    result = kc.compare(scenario, grid=GRID)
    cli = strict_json(run("compare", HORN, "--extent-m", "2", "--pixels", "9", "--json").stdout)
    assert _roundtrip(result.to_dict()) == cli
    assert [o["name"] for o in cli["options"]][0] in {"base", *(o.name for o in scenario.options)}


def test_assess_writes_the_folder_and_to_dict_is_assessment_json(tmp_path):
    scenario = kc.load_scenario(POINT_SOURCE)
    out = tmp_path / "api"
    result = kc.assess(scenario, out=out, grid=GRID)
    written = sorted(p.name for p in result.written)
    assert written == sorted(p.name for p in out.iterdir()) == result.to_dict()["files"]
    on_disk = json.loads((out / "assessment.json").read_text(encoding="utf-8"))
    assert _roundtrip(result.to_dict()) == on_disk
    cli_out = tmp_path / "cli"
    cli = strict_json(
        run(
            "assess", POINT_SOURCE, "--out", cli_out, "--extent-m", "2", "--pixels", "9", "--json"
        ).stdout
    )
    assert on_disk == cli
    # Without a folder nothing is written, and the answer is the same.
    again = kc.assess(scenario, grid=GRID)
    assert again.written == () and _roundtrip(again.to_dict()) == on_disk
    assert [k.limit_id for k in result.keepouts] == list(scenario.limit_ids)
    assert len(result.cylinders) == len(scenario.limit_ids)


def test_keepout_of_an_option_and_of_chosen_limits():
    scenario = kc.load_scenario(HORN)
    option = scenario.options[0]
    result = kc.keepout(scenario, limits=["icnirp-2020/occupational"], option=option.name)
    assert result.scenario is option.scenario
    assert [k.limit_id for k in result.distances] == ["icnirp-2020/occupational"]
    with pytest.raises(kc.InputError, match="no option named") as err:
        kc.keepout(scenario, option="no such option")
    assert err.value.key == "--option"
    with pytest.raises(kc.InputError) as err:
        kc.keepout(scenario, limits=["icnirp-2020/nobody"])
    assert err.value.key == "--limit"


def test_bad_arguments_raise_input_errors_naming_them():
    scenario = kc.load_scenario(POINT_SOURCE)
    with pytest.raises(kc.InputError) as err:
        kc.GridSettings(pixels=2)
    assert err.value.key == "--pixels"
    with pytest.raises(kc.InputError) as err:
        kc.compare(scenario, height_m=float("nan"))
    assert err.value.key == "--height-m"
    with pytest.raises(kc.InputError) as err:
        kc.limits(float("inf"))
    assert err.value.key == "--frequency-hz"
    with pytest.raises(kc.ScenarioError):
        kc.load_scenario(SCENARIOS / "no-such-file.toml")


def test_a_model_error_is_an_input_error():
    err = ModelInputError("power_w", "power_w must be >= 0, got -1")
    assert isinstance(err, kc.InputError) and isinstance(err, BaseInputError)
    assert isinstance(err, ValueError)  # as before, for callers that catch ValueError
    assert err.key == "power_w" and "must be >= 0" in str(err)


def test_a_model_error_at_run_time_exits_2(monkeypatch, write_scenario):
    """A model refusing its input during the computation is bad input (2), not a fault (1)."""
    from keepclear.antennas.isotropic import IsotropicSource

    def refuse(self, *args, **kwargs):
        raise ModelInputError("gain_dbi", "gain_dbi cannot be evaluated here")

    monkeypatch.setattr(IsotropicSource, "fields", refuse)
    line = one_error_line(run("probe", write_scenario(ISOTROPIC), "--at", "1,0,0"))
    assert "gain_dbi" in line and "cannot be evaluated" in line


def test_prepared_scenario_is_built_once_and_not_stored_on_the_scenario():
    from keepclear.fields.field import PreparedScenario, evaluate, prepare

    scenario = kc.load_scenario(SCENARIOS / "drying-line-enclosure.toml")
    prepared = prepare(scenario)
    assert isinstance(prepared, PreparedScenario) and prepare(prepared) is prepared
    again = prepare(scenario)  # built once: the same terms and cavity state
    assert again.terms is prepared.terms and again.cavity is prepared.cavity
    assert "_derived" not in vars(scenario)
    with pytest.raises(dataclasses.FrozenInstanceError):
        prepared.terms = ()  # type: ignore[misc]
    pts = np.array([[0.5, 0.3, 1.0], [3.0, 0.0, 1.0]])
    a = evaluate(scenario, pts).power_density_w_m2
    b = evaluate(prepared, pts).power_density_w_m2
    assert np.allclose(a, b, rtol=1e-12, atol=0.0)


def test_prepared_parts_go_with_their_scenario():
    import gc

    from keepclear.fields import field

    scenario = kc.load_scenario(SCENARIOS / "drying-line-enclosure.toml")
    field.prepare(scenario)
    key = id(scenario)
    assert key in field._PREPARED
    del scenario
    gc.collect()
    assert key not in field._PREPARED


def test_readme_example_runs(shared_models):
    """The README's "Python API" example, run as written (from the repository root).

    (The option's search shares the base's radiator evaluations: ``shared_models``.)
    """
    readme = (SCENARIOS.parent / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Python API", 1)[1]
    code = re.search(r"```python\n(.*?)```", section, re.S)
    assert code is not None, "no python block in the README's Python API section"
    import contextlib
    import io
    import os

    here = os.getcwd()
    os.chdir(SCENARIOS.parent)
    try:
        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            exec(compile(code.group(1), "README.md", "exec"), {})
    finally:
        os.chdir(here)
    assert "icnirp-2020/general-public" in buf.getvalue()


def test_readings_to_dict_is_the_command_json():
    desk = SCENARIOS / "desk-box-source.toml"
    csv_path = SCENARIOS / "desk-box-source-readings.csv"
    result = kc.readings(kc.load_scenario(desk), csv_path)
    cli = strict_json(run("readings", desk, "--csv", csv_path, "--json").stdout)
    assert _roundtrip(result.to_dict()) == cli
    assert result.suggested_margin_db == cli["suggested_margin_db"]
    assert len(result.under_predicted) == len(cli["readings"])
