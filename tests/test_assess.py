"""The `map` and `assess` commands: outputs, atomic writing, refusals with exit 2.

Contract: ../shared/contract.md (exit status: 2 for bad input with one line on
stderr and nothing written).  The keep-out figures are checked against FCC OET
Bulletin 65, Edition 97-01 (1997), eq. (3), R = sqrt(P G / (4 pi S)).
"""

from __future__ import annotations

import io
import json
import math
import os
import shutil
import subprocess
import sys
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest
from hypothesis import given, note, settings
from typer.testing import CliRunner

from keepclear.fields.cli import app

from ._cli import assert_clean_exit, strict_json, validate
from ._cli import one_error_line as cli_one_error_line
from ._cli import run as cli_run
from ._fuzz_strategies import (
    EXPECTED_PLAUSIBILITY_WARNING,
    FUNCTION_FIXTURE,
    _keepout_is_bounded,
    toml_document,
    valid_documents,
)
from ._hypothesis import examples
from .conftest import ISOTROPIC

runner = CliRunner()

SCENARIO = (
    ISOTROPIC
    + """
[[point]]
name = "desk"
position_m = [0.5, 0.0, 0.0]
"""
)
ASSESS_FILES = {
    "assessment.json",
    "report.html",
    "map-source-height.png",
    "map-source-height.svg",
    "map-source-height.npz",
    "map-vertical.png",
    "map-vertical.svg",
    "map-vertical.npz",
    "zones-source-height.geojson",
    "scenario-input.toml",
}


def run(*args: str):
    return runner.invoke(app, [str(a) for a in args])


def one_error_line(result) -> str:
    assert result.exit_code == 2, (result.exit_code, result.output, result.stderr)
    lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.stderr
    return lines[0]


def listing(folder: Path) -> set[str]:
    return {str(p.relative_to(folder)) for p in folder.rglob("*")}


@pytest.fixture(scope="module")
def assessed(tmp_path_factory):
    """One assessment, into a folder that already holds a file of the user's and an old report."""
    root = tmp_path_factory.mktemp("assess")
    scenario = root / "bench.toml"
    scenario.write_text(SCENARIO, encoding="utf-8")
    out = root / "out"
    out.mkdir()
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    (out / "report.html").write_text("old", encoding="utf-8")
    result = runner.invoke(app, ["assess", str(scenario), "--out", str(out), "--pixels", "31"])
    return root, scenario, out, result


# ------------------------------------------------------------------------ assess
def test_assess_writes_every_output_and_says_where(assessed):
    root, scenario, out, result = assessed
    assert result.exit_code == 0, result.stderr
    assert {p.name for p in out.iterdir()} == ASSESS_FILES | {"notes.txt"}
    assert str(out / "report.html") in result.stdout
    assert "CAUTION" in result.stdout and "desk" in result.stdout
    # Only its own files replaced; no staging folder left behind; the scenario untouched.
    assert (out / "notes.txt").read_text(encoding="utf-8") == "mine"
    assert (out / "report.html").read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert sorted(p.name for p in root.iterdir()) == ["bench.toml", "out"]
    assert scenario.read_text(encoding="utf-8") == SCENARIO
    assert (out / "scenario-input.toml").read_text(encoding="utf-8") == SCENARIO


def test_assess_into_a_new_folder(tmp_path, write_scenario):
    scenario = write_scenario(SCENARIO)
    out = tmp_path / "fresh"
    with pytest.MonkeyPatch.context() as mp:
        # Skip the figures here (covered above): this checks the folder handling only.
        import keepclear.fields.plots as plots

        mp.setattr(plots, "figure_bytes", lambda fig, fmt, dpi=150: b"\x89PNG\r\n\x1a\n")
        result = run("assess", scenario, "--out", out, "--pixels", "11")
    assert result.exit_code == 0, result.stderr
    assert {p.name for p in out.iterdir()} == ASSESS_FILES
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fresh", "scenario.toml"]
    assert oct(out.stat().st_mode & 0o777) != oct(0o700)  # an ordinary folder, not mkdtemp's


def test_assessment_json(assessed):
    _, _, out, _ = assessed
    data = json.loads((out / "assessment.json").read_text(encoding="utf-8"))
    assert data["schema_version"] == 1
    gp = next(k for k in data["keepout"] if k["limit"] == "icnirp-2020/general-public")
    # OET 65 eq. (3): 100 W isotropic against 10 W/m^2 (ICNIRP 2020 Table 5).
    assert gp["distance_m"] == pytest.approx(math.sqrt(100 / (4 * math.pi * 10)), rel=2e-3)
    assert gp["cylinder"]["radius_m"] > 0 and gp["horizontal_zone"]["circle"]["radius_m"] > 0
    # The maps cross-check the keep-out search: for a point source they agree within a step.
    step = data["maps"]["horizontal"]["step_m"]
    assert abs(gp["map_reach_m"] - gp["distance_m"]) <= step
    assert not gp["map_reach_beyond_keepout"]
    assert gp["mark_out_m"] >= gp["recommended_distance_m"]
    assert data["points"][0]["name"] == "desk"
    assert set(data["files"]) == ASSESS_FILES
    assert data["comparison"] is None


def test_assess_figures_and_zones_are_valid(assessed):
    _, _, out, _ = assessed
    for name in ("map-source-height.png", "map-vertical.png"):
        image = mpimg.imread(io.BytesIO((out / name).read_bytes()), format="png")
        assert float(np.var(image[..., :3])) > 0.005
    zones = json.loads((out / "zones-source-height.geojson").read_text(encoding="utf-8"))
    assert zones["type"] == "FeatureCollection" and len(zones["features"]) == 2
    with np.load(out / "map-source-height.npz") as npz:
        assert npz["power_density_w_m2"].shape == (31, 31)
        assert npz["quotients"].shape == (2, 31, 31)


def test_assess_refuses_an_unwritable_out_and_writes_nothing(tmp_path, write_scenario):
    scenario = write_scenario(SCENARIO)
    blocker = tmp_path / "a-file"
    blocker.write_text("x", encoding="utf-8")
    before = listing(tmp_path)
    for target in (blocker, blocker / "sub", tmp_path / "missing" / "deeper"):
        line = one_error_line(run("assess", scenario, "--out", target, "--pixels", "21"))
        assert "--out" in line
    assert listing(tmp_path) == before


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="root ignores permissions")
def test_assess_refuses_a_read_only_folder(tmp_path, write_scenario):
    scenario = write_scenario(SCENARIO)
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o555)
    try:
        line = one_error_line(run("assess", scenario, "--out", locked / "out", "--pixels", "21"))
        assert "--out" in line and "permission" in line
        assert list(locked.iterdir()) == []
    finally:
        locked.chmod(0o755)


def test_assess_never_overwrites_the_scenario(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    scenario = out / "scenario-input.toml"  # the name of one of the outputs
    scenario.write_text(SCENARIO, encoding="utf-8")
    line = one_error_line(run("assess", scenario, "--out", out, "--pixels", "21"))
    assert "overwrite" in line
    assert scenario.read_text(encoding="utf-8") == SCENARIO
    assert sorted(p.name for p in out.iterdir()) == ["scenario-input.toml"]


def test_a_failure_leaves_no_partial_output(tmp_path, write_scenario, monkeypatch):
    import keepclear.fields.maps as maps

    def broken(*args, **kwargs):
        raise RuntimeError("simulated fault half-way through")

    monkeypatch.setattr(maps, "keepout_cylinders", broken)
    scenario = write_scenario(SCENARIO)
    before = listing(tmp_path)
    for out in (tmp_path / "new", tmp_path):  # a new folder, and an existing one
        result = run("assess", scenario, "--out", out, "--pixels", "11")
        assert result.exit_code == 1 and "simulated fault" in result.stderr
        assert listing(tmp_path) == before


def test_publishing_refuses_before_moving_anything(tmp_path):
    from keepclear.fields.assessment import publish_output_folder, stage_output_folder
    from keepclear.fields.errors import ResourceError

    out = tmp_path / "out"
    out.mkdir()
    (out / "b.png").mkdir()  # a folder where a file should go
    staging = stage_output_folder(out)
    for name in ("a.json", "b.png", "c.html"):
        (staging / name).write_text(name, encoding="utf-8")
    with pytest.raises(ResourceError) as err:
        publish_output_folder(staging, out, [])
    assert err.value.key == "--out"
    assert sorted(p.name for p in out.iterdir()) == ["b.png"]  # nothing moved, staging gone


def test_assess_refuses_a_grid_too_large_before_computing(tmp_path, write_scenario):
    scenario = write_scenario(SCENARIO)
    before = listing(tmp_path)
    line = one_error_line(
        run("assess", scenario, "--out", tmp_path / "o", "--step-m", "0.0005", "--extent-m", "50")
    )
    assert "--step-m" in line and "MiB" in line
    line = one_error_line(run("assess", scenario, "--out", tmp_path / "o", "--pixels", "9000"))
    assert "--pixels" in line
    assert listing(tmp_path) == before


def test_assess_help():
    result = run("assess", "--help")
    assert result.exit_code == 0 and "--out" in result.stdout and "--height-m" in result.stdout


# --------------------------------------------------------------------------- map
def test_map_out_folder(tmp_path, write_scenario):
    scenario = write_scenario(SCENARIO)
    out = tmp_path / "maps"
    result = run("map", scenario, "--out", out, "--pixels", "31", "--height-m", "0.2")
    assert result.exit_code == 0, result.stderr
    # The files are named after the plane's height (a map at another height beside them
    # keeps its own files).
    names = {p.name for p in out.iterdir()}
    stem = "z0.20m"
    assert names == {f"map-{stem}.{e}" for e in ("png", "svg", "csv", "npz")} | {
        f"zones-{stem}.geojson"
    }
    header = (out / f"map-{stem}.csv").read_text(encoding="utf-8").splitlines()[0]
    assert header.startswith("x_m,y_m,z_m,s_m,t_m,power_density_w_m2")
    rows = np.loadtxt(out / f"map-{stem}.csv", delimiter=",", skiprows=1)
    assert rows.shape == (31 * 31, 9 + 2) and np.allclose(rows[:, 2], 0.2)
    assert "z = 0.20 m" in result.stdout and "CAUTION" in result.stdout


def test_map_single_files_quotient_and_json(tmp_path, write_scenario):
    scenario = write_scenario(SCENARIO)
    png = tmp_path / "q.png"
    result = run(
        "map", scenario, "--png", png, "--quantity", "quotient", "--limit",
        "icnirp-2020/occupational", "--plane", "xz", "--pixels", "31", "--json",
    )  # fmt: skip
    assert result.exit_code == 0, result.stderr
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    data = json.loads(result.stdout)
    assert data["schema_version"] == 1
    assert [e["limit"] for e in data["map"]["limits"]] == ["icnirp-2020/occupational"]
    assert data["map"]["plane"]["kind"] == "xz"


def test_map_custom_plane(tmp_path, write_scenario):
    scenario = write_scenario(SCENARIO)
    result = run(
        "map", scenario, "--geojson", tmp_path / "z.geojson", "--origin=-0.1,0,0",
        "--u", "1,1,0", "--v", "0,0,1", "--pixels", "31", "--json",
    )  # fmt: skip
    assert result.exit_code == 0, result.stderr
    assert json.loads(result.stdout)["map"]["plane"]["kind"] == "custom"
    assert json.loads((tmp_path / "z.geojson").read_text())["type"] == "FeatureCollection"


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["--pixels", "31"], "--out"),
        (["--out", "o", "--origin", "0,0,0"], "--u"),
        (["--out", "o", "--plane", "xz", "--height-m", "1"], "--height-m"),
        (["--out", "o", "--limit", "icnirp-2020/general-publik"], "--limit"),
        (["--out", "o", "--through", "1,2"], "--through"),
        (["--out", "o", "--pixels", "5000"], "--pixels"),
        (["--out", "o", "--step-m", "0.1", "--pixels", "31"], "--pixels"),
        (["--out", "o", "--extent-m", "-1"], "--extent-m"),
        (["--out", "o", "--origin", "0,0,0", "--u", "1,0,0", "--v", "2,0,0"], "--v"),
    ],
)
def test_map_bad_arguments_exit_2(tmp_path, write_scenario, monkeypatch, args, fragment):
    scenario = write_scenario(SCENARIO)
    monkeypatch.chdir(tmp_path)  # restored after the test: later tests use relative paths
    before = listing(tmp_path)
    line = one_error_line(run("map", scenario, *args))
    assert fragment in line
    assert listing(tmp_path) == before


def test_probe_names_the_scenario_points(write_scenario):
    result = run("probe", write_scenario(SCENARIO), "--json")
    assert result.exit_code == 0, result.stderr
    assert json.loads(result.stdout)["points"][0]["name"] == "desk"
    text = run("probe", write_scenario(SCENARIO))
    assert "desk: point (0.5, 0, 0) m" in text.stdout


def test_installed_entry_point_maps(tmp_path, write_scenario):
    exe = shutil.which("keepclear", path=str(Path(sys.executable).parent))
    if exe is None:
        pytest.skip("the keepclear entry point is not installed next to this python")
    scenario = write_scenario(SCENARIO)
    zones = tmp_path / "zones.geojson"
    done = subprocess.run(
        [exe, "map", str(scenario), "--geojson", str(zones), "--pixels", "21", "--json"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["schema_version"] == 1
    assert json.loads(zones.read_text(encoding="utf-8"))["type"] == "FeatureCollection"


# ------------------------------------------------------------
# Fuzzing with random and broken input (hypothesis). What is checked, and against
# what, is listed in tests/_fuzz_strategies.py.


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(2), suppress_health_check=FUNCTION_FIXTURE)
@given(doc=valid_documents())
def test_assess_on_valid_scenarios(tmp_path, doc):
    """The whole assessment on a 5 x 5 grid: exit 0 or 2, schema-valid JSON, and on exit 2
    no output folder at all (assess stages its outputs and moves them in when complete)."""
    path = tmp_path / "assess.toml"
    path.write_text(toml_document(doc), encoding="utf-8")
    note(toml_document(doc))
    if not _keepout_is_bounded(path):
        return
    out = tmp_path / "report"
    if out.exists():
        for old in out.iterdir():
            old.unlink()
        out.rmdir()
    result = cli_run("assess", path, "--out", out, "--pixels", "5", "--json")
    assert_clean_exit(result)
    if result.exit_code == 0:
        validate("assessment", strict_json(result.stdout))
    else:
        assert not out.exists()


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


def test_assess_never_overwrites_its_scenario(tmp_path):
    # An output folder that holds the scenario under an output's own name.
    for name in ("scenario-input.toml", "report.html", "assessment.json"):
        path = tmp_path / name
        path.write_text(ISOTROPIC, encoding="utf-8")
        line = cli_one_error_line(cli_run("assess", path, "--out", tmp_path, "--pixels", "5"))
        assert "overwrite" in line and name in line
        assert path.read_text(encoding="utf-8") == ISOTROPIC
        path.unlink()
    assert list(tmp_path.iterdir()) == []
