"""The command line: contract shapes, exit codes, one-line errors.

Contract: ../shared/contract.md (commands, JSON shapes, exit status).
"""

from __future__ import annotations

import json
import os
import pathlib
import re
import shutil
import subprocess
import sys
from pathlib import Path

import hypothesis.strategies as st
import numpy as np
import pytest
from hypothesis import given, settings
from typer.testing import CliRunner

from keepclear.fields import outputs
from keepclear.fields.cli import app

from ._cli import assert_clean_exit, strict_json
from ._cli import one_error_line as cli_one_error_line
from ._cli import run as cli_run
from ._edge_cases import DIPOLE, probe
from ._fuzz_strategies import EXPECTED_PLAUSIBILITY_WARNING, FUNCTION_FIXTURE
from ._hypothesis import examples
from .conftest import ISOTROPIC, SCENARIOS

runner = CliRunner()


def run(*args: str):
    return runner.invoke(app, list(args))


def one_error_line(result) -> str:
    assert result.exit_code == 2, (result.exit_code, result.output, result.stderr)
    lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.stderr
    assert result.stdout == ""
    return lines[0]


# ------------------------------------------------------------------ help, version
@pytest.mark.parametrize("command", [[], ["limits"], ["probe"], ["keepout"]])
def test_help(command):
    result = run(*command, "--help")
    assert result.exit_code == 0
    assert "Usage" in result.stdout


COMMANDS = ["limits", "probe", "keepout", "readings", "map", "compare", "assess"]


@pytest.mark.parametrize("command", COMMANDS)
def test_help_placeholders_read_as_what_to_type(command):
    """Every option shows a placeholder of what to write (ID, X,Y,Z, METRES), not a type."""
    help_text = run(command, "--help").stdout
    options = help_text.partition("Options:")[2]
    for typed in ("<list[", "<str>", "<float", "<int>", "<path>", "range>"):
        assert typed not in options, (command, typed)


@pytest.mark.parametrize("command", COMMANDS)
def test_numeric_options_end_their_help_with_the_unit(command):
    """Each number's help ends with its unit in brackets (style guide: CLI), from the code."""
    import enum
    import typing

    import typer

    callback = typer.main.get_command(app).commands[command].callback
    hints = typing.get_type_hints(callback, include_extras=True)
    checked = 0
    for name, hint in hints.items():
        infos = [
            a for a in getattr(hint, "__metadata__", ()) if isinstance(a, typer.models.OptionInfo)
        ]
        if not infos:
            continue
        info, kinds = infos[0], set(typing.get_args(typing.get_args(hint)[0])) | {hint.__origin__}
        if bool in kinds or any(isinstance(k, type) and issubclass(k, enum.Enum) for k in kinds):
            continue  # a flag, or a choice that lists its values
        assert info.metavar, (command, name)
        if kinds & {float, int} or info.metavar == "X,Y,Z":
            checked += 1
            assert re.search(r"\[[^\[\]]+\]\.$", info.help or ""), (command, info.help)
    assert checked or command in ("keepout", "readings")


def test_version():
    result = run("--version")
    assert result.exit_code == 0 and result.stdout.startswith("keepclear ")


# ----------------------------------------------------------------------- limits
def test_limits_json_shape():
    result = run("limits", "--json")
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["schema_version"] == 1 and data["frequency_hz"] == 2.45e9
    ids = {v["id"] for v in data["limits"]}
    assert "icnirp-2020/general-public" in ids and "fda-1030.10/in-service" in ids
    for v in data["limits"]:
        assert set(v) >= {
            "id",
            "power_density_w_m2",
            "e_v_m",
            "h_a_m",
            "averaging_time_s",
            "source",
        }
    icnirp = next(v for v in data["limits"] if v["id"] == "icnirp-2020/general-public")
    # ICNIRP 2020, Table 5: 10 W/m^2 above 2 GHz, whole body, 30 min; E and H NA.
    assert icnirp["power_density_w_m2"] == pytest.approx(10.0)
    assert icnirp["e_v_m"] is None and icnirp["averaging_time_s"] == 1800


def test_limits_text_has_caution():
    result = run("limits", "--frequency-hz", "5.8e9")
    assert result.exit_code == 0
    assert "CAUTION" in result.stdout and "beryllium" in result.stdout


# ------------------------------------------------------------------------ probe
def test_probe_json_shape(write_scenario):
    path = write_scenario(ISOTROPIC)
    result = run("probe", str(path), "--at", "1,0,0", "--at=-0.5,0,1", "--json")
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["schema_version"] == 1 and len(data["points"]) == 2
    p = data["points"][0]
    assert set(p) >= {
        "position_m",
        "e_v_m",
        "h_a_m",
        "power_density_w_m2",
        "peak_power_density_w_m2",
        "quotients",
    }
    # OET 65 eq. (3): S = P / (4 pi r^2) for an isotropic source, P = 100 W, r = 1 m.
    assert p["power_density_w_m2"] == pytest.approx(100 / (4 * np.pi), rel=1e-9)
    assert data["points"][1]["position_m"] == [-0.5, 0.0, 1.0]


def test_probe_bulk_csv_roundtrip(write_scenario, tmp_path):
    path = write_scenario(ISOTROPIC)
    pts = np.array([[1.0, 0, 0], [0, 2.0, 0], [-3.0, 0, 0]])
    inp = tmp_path / "in.csv"
    inp.write_text("x_m,y_m,z_m\n" + "\n".join(",".join(map(str, p)) for p in pts) + "\n")
    out = tmp_path / "out.csv"
    result = run("probe", str(path), "--points", str(inp), "--csv", str(out))
    assert result.exit_code == 0, result.stderr
    lines = out.read_text().splitlines()
    assert lines[0] == "x_m,y_m,z_m,e_v_m,h_a_m,power_density_w_m2,peak_power_density_w_m2"
    rows = np.loadtxt(out, delimiter=",", skiprows=1)
    np.testing.assert_allclose(rows[:, :3], pts)
    r = np.linalg.norm(pts, axis=1)
    np.testing.assert_allclose(rows[:, 5], 100 / (4 * np.pi * r**2), rtol=1e-6)
    # E = sqrt(S eta0) for the far-zone plane wave
    np.testing.assert_allclose(rows[:, 3] ** 2 / 376.730313, rows[:, 5], rtol=1e-6)


# ---------------------------------------------------------------------- keepout
def test_keepout_json_shape(write_scenario):
    path = write_scenario(ISOTROPIC)
    result = run("keepout", str(path), "--json")
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["schema_version"] == 1 and data["average_power_w"] == pytest.approx(100.0)
    entry = data["keepout"][0]
    assert set(entry) >= {"limit", "limit_w_m2", "distance_m", "direction"}
    assert entry["limit"] == "icnirp-2020/general-public"
    assert entry["distance_m"] == pytest.approx(np.sqrt(100 / (4 * np.pi * 10)), rel=5e-3)


def test_keepout_text_screening_and_caution(write_scenario):
    path = write_scenario(ISOTROPIC)
    result = run("keepout", str(path), "--screening")
    assert result.exit_code == 0, result.stderr
    assert "screening" in result.stdout and "CAUTION" in result.stdout


# -------------------------------------------------------------------- bad input
BAD_SCENARIOS = {
    "negative power": ('[[source]]\nantenna = "isotropic"\npower_w = -5\n', "source.1.power_w"),
    "duty zero": (
        '[[source]]\nantenna = "isotropic"\npower_w = 5\nduty_cycle = 0\n',
        "source.1.duty_cycle",
    ),
    "duty 1.5": (
        '[[source]]\nantenna = "isotropic"\npower_w = 5\nduty_cycle = 1.5\n',
        "source.1.duty_cycle",
    ),
    "unknown antenna": ('[[source]]\nantenna = "yagi"\npower_w = 5\n', "source.1.antenna"),
    "unknown limit": (
        '[[source]]\nantenna = "isotropic"\npower_w = 5\n[exposure]\nlimits = ["icnirp-2020/general-publc"]\n',
        "did you mean",
    ),
    "missing power": ('[[source]]\nantenna = "isotropic"\n', "source.1.power_w"),
    "nan": ('[[source]]\nantenna = "isotropic"\npower_w = nan\n', "source.1.power_w"),
    "inf": ('[[source]]\nantenna = "isotropic"\npower_w = inf\n', "source.1.power_w"),
    "zero vector": (
        '[[source]]\nantenna = "dipole"\npower_w = 5\naxis = [0, 0, 0]\n',
        "source.1.axis",
    ),
    "not toml": ("this is = = not toml\n", "not valid TOML"),
    "string for number": (
        '[[source]]\nantenna = "isotropic"\npower_w = "800"\n',
        "source.1.power_w",
    ),
    "typo key": ('[[source]]\nantenna = "isotropic"\npowr_w = 5\n', "did you mean 'power_w'"),
    "typo top key": (
        'nmae = "x"\n[[source]]\nantenna = "isotropic"\npower_w = 5\n',
        "did you mean 'name'",
    ),
    "no source": ('name = "empty"\n', "source"),
    "key of another antenna": (
        '[[source]]\nantenna = "isotropic"\npower_w = 5\nlength_m = 0.06\n',
        "does not apply",
    ),
    "duplicate ids": (
        '[[source]]\nid="a"\nantenna = "isotropic"\npower_w = 5\n'
        '[[source]]\nid="a"\nantenna = "isotropic"\npower_w = 5\n',
        "source.2.id",
    ),
    "bad reflection mode": (
        'reflections = "worst"\n[[source]]\nantenna = "isotropic"\npower_w = 5\n',
        "reflections",
    ),
    "frequency out of range": (
        'frequency_hz = -1\n[[source]]\nantenna = "isotropic"\npower_w = 5\n',
        "frequency_hz",
    ),
    "limit out of band": (
        'frequency_hz = 1.0e10\n[[source]]\nantenna = "isotropic"\npower_w = 5\n'
        '[exposure]\nlimits = ["fda-1030.10/in-service"]\n',
        "exposure.limits.1",
    ),
    "position wrong length": (
        '[[source]]\nantenna = "isotropic"\npower_w = 5\nposition_m = [1, 2]\n',
        "source.1.position_m",
    ),
    "bool for number": ('[[source]]\nantenna = "isotropic"\npower_w = true\n', "source.1.power_w"),
}


@pytest.mark.parametrize("case", sorted(BAD_SCENARIOS))
def test_bad_scenario_exit_2_one_line(write_scenario, case):
    text, fragment = BAD_SCENARIOS[case]
    path = write_scenario(text)
    for command in (["keepout", str(path)], ["probe", str(path), "--at", "1,0,0"]):
        line = one_error_line(run(*command))
        assert str(path) in line or "scenario.toml" in line
        assert fragment in line


def test_missing_file_and_directory(tmp_path):
    line = one_error_line(run("keepout", str(tmp_path / "nope.toml")))
    assert "nope.toml" in line and "no such file" in line
    line = one_error_line(run("keepout", str(tmp_path)))
    assert "directory" in line


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["--at", "1,2"], "--at"),
        (["--at", "a,b,c"], "--at"),
        (["--at", "1,2,nan"], "--at"),
        ([], "--at"),
    ],
)
def test_bad_probe_arguments(write_scenario, args, fragment):
    path = write_scenario(ISOTROPIC)
    line = one_error_line(run("probe", str(path), *args))
    assert fragment in line


def test_bad_points_file_writes_nothing(write_scenario, tmp_path):
    path = write_scenario(ISOTROPIC)
    inp = tmp_path / "in.csv"
    inp.write_text("x,y,z\n1,2,3\n")
    out = tmp_path / "out.csv"
    line = one_error_line(run("probe", str(path), "--points", str(inp), "--csv", str(out)))
    assert "header" in line and not out.exists()
    inp.write_text("x_m,y_m,z_m\n1,2,3\n1,2\n")
    assert "--points" in one_error_line(
        run("probe", str(path), "--points", str(inp), "--csv", str(out))
    )
    assert not out.exists()


def test_probe_refuses_to_overwrite_scenario(write_scenario):
    path = write_scenario(ISOTROPIC)
    before = path.read_text()
    line = one_error_line(run("probe", str(path), "--at", "1,0,0", "--csv", str(path)))
    assert "overwrite" in line and path.read_text() == before


def test_unknown_option_and_command():
    assert "--bogus" in one_error_line(run("limits", "--bogus"))
    assert "frobnicate" in one_error_line(run("frobnicate"))


def test_limits_bad_frequency():
    assert "--frequency-hz" in one_error_line(run("limits", "--frequency-hz", "abc"))


# --------------------------------------------------------- the installed script
def test_installed_entry_point_subprocess(tmp_path):
    exe = shutil.which("keepclear", path=str(Path(sys.executable).parent)) or shutil.which(
        "keepclear"
    )
    assert exe, "the keepclear console script is not installed"
    scenario = SCENARIOS / "isotropic-screening.toml"
    done = subprocess.run(
        [exe, "keepout", str(scenario), "--json"],
        capture_output=True,
        text=True,
        timeout=120,
        env={**os.environ, "COLUMNS": "120"},
    )
    assert done.returncode == 0, done.stderr
    data = json.loads(done.stdout)
    assert data["keepout"][0]["distance_m"] > 0
    bad = subprocess.run(
        [exe, "keepout", str(tmp_path / "missing.toml")], capture_output=True, text=True, timeout=60
    )
    assert bad.returncode == 2 and len(bad.stderr.strip().splitlines()) == 1


def test_the_command_line_runs_blas_on_one_thread_unless_told(monkeypatch):
    # Common practice, no source: small BLAS products lose to thread hand-offs
    # (fields/cli.py ``_one_blas_thread`` gives the figures measured here).
    from keepclear.fields import cli

    for name in cli._BLAS_THREAD_VARIABLES:
        monkeypatch.delenv(name, raising=False)
    cli._one_blas_thread()
    assert os.environ["OPENBLAS_NUM_THREADS"] == "1"
    for name in cli._BLAS_THREAD_VARIABLES:
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv("OMP_NUM_THREADS", "2")
    cli._one_blas_thread()
    assert "OPENBLAS_NUM_THREADS" not in os.environ
    assert os.environ["OMP_NUM_THREADS"] == "2"


# ------------------------------------------------------------
# Fuzzing with random and broken input (hypothesis). What is checked, and against
# what, is listed in tests/_fuzz_strategies.py.


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(40), suppress_health_check=FUNCTION_FIXTURE)
@given(
    args=st.lists(st.text(max_size=20) | st.sampled_from(["--at", "--json", "--csv"]), max_size=5)
)
def test_random_probe_arguments(tmp_path, args):
    path = tmp_path / "ok.toml"
    path.write_text('[[source]]\nantenna = "isotropic"\npower_w = 1.0\n', encoding="utf-8")
    # Arguments are written as the shell would pass them; "--csv" targets land in tmp_path.
    args = [str(tmp_path / "out.csv") if a == "" else a for a in args]
    result = cli_run("probe", path, *args)
    assert_clean_exit(result)
    if result.exit_code == 0 and "--json" in args and "--csv" not in args:
        strict_json(result.stdout)


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


def test_extreme_but_allowed_coordinates(write_scenario):
    # Scenario vectors may be as large as 1e6 m (Table.vector); probe points as far.
    path = write_scenario(ISOTROPIC.replace("[0.0, 0.0, 0.0]", "[1e6, -1e6, 1e6]"))
    points = probe(path, (-1e6, 1e6, -1e6), (1e6, -1e6, 1e6), (5e-324, -0.0, 1e-300))
    assert points[1]["power_density_w_m2"] > 0


@pytest.mark.parametrize("at", ["1e308,0,0", "1e200,0,0"])
def test_probe_at_beyond_the_coordinate_bound_is_refused(write_scenario, at):
    path = write_scenario(DIPOLE)
    assert "--at" in cli_one_error_line(cli_run("probe", path, "--at", at, "--json"))


# -------------------------------------------------------------------- bounds
def test_point_file_over_the_bound_is_refused_before_it_is_read(
    write_scenario, tmp_path, monkeypatch
):
    path = write_scenario(ISOTROPIC)
    inp = tmp_path / "many.csv"
    inp.write_text("x_m,y_m,z_m\n" + "1,0,0\n" * 6)
    monkeypatch.setattr(outputs, "MAX_POINTS", 5)

    def no_parse(*args, **kwargs):
        raise AssertionError("the file was parsed before its size was checked")

    monkeypatch.setattr(outputs.np, "loadtxt", no_parse)
    original_read_bytes = pathlib.Path.read_bytes

    def guarded_read_bytes(self):
        if self.name == "many.csv":
            raise AssertionError("the whole file was read before its size was checked")
        return original_read_bytes(self)

    monkeypatch.setattr(pathlib.Path, "read_bytes", guarded_read_bytes)
    out = tmp_path / "out.csv"
    line = cli_one_error_line(cli_run("probe", path, "--points", inp, "--csv", out))
    assert "6 points" in line and "at most 5" in line and "--points" in line
    assert not out.exists()


def test_point_file_at_the_bound_is_accepted(write_scenario, tmp_path, monkeypatch):
    path = write_scenario(ISOTROPIC)
    inp = tmp_path / "five.csv"
    inp.write_text("x_m,y_m,z_m\n" + "1,0,0\n" * 4 + "1e6,-1e6,1e6")  # no final newline
    monkeypatch.setattr(outputs, "MAX_POINTS", 5)
    out = tmp_path / "out.csv"
    result = cli_run("probe", path, "--points", inp, "--csv", out)
    assert_clean_exit(result, allowed=(0,))
    assert len(out.read_text().splitlines()) == 6


@pytest.mark.parametrize("bad", ["1e7,0,0", "0,-1.5e6,0", "0,0,1e308"])
def test_point_file_coordinates_are_bounded(write_scenario, tmp_path, bad):
    path = write_scenario(ISOTROPIC)
    inp = tmp_path / "far.csv"
    inp.write_text(f"x_m,y_m,z_m\n1,0,0\n{bad}\n")
    line = cli_one_error_line(cli_run("probe", path, "--points", inp, "--json"))
    assert "row 3" in line and "1e+06 m" in line


def test_a_terminal_sees_the_source_models_being_solved(tmp_path):
    """On a terminal, a model build shows a busy bar on stderr.

    The bench's probe box, solved afresh (``KEEPCLEAR_CACHE_DIR=off``: NEC-2 runs), through
    a pseudo-terminal, as a user at a shell sees it; off a terminal (every other test here)
    nothing is drawn.  The bar shows at once (``KEEPCLEAR_PROGRESS_AFTER_S=0``, not after
    the usual second), so the test does not hang on how fast the machine solves.
    """
    pytest.importorskip("pty")  # POSIX pseudo-terminals
    env = {k: v for k, v in os.environ.items() if k != "KEEPCLEAR_NO_PROGRESS"}
    env["KEEPCLEAR_CACHE_DIR"] = "off"
    env["KEEPCLEAR_PROGRESS_AFTER_S"] = "0"
    script = (
        "import os, pty, sys\n"
        "pid, fd = pty.fork()\n"
        "if pid == 0:\n"
        "    os.execv(sys.executable, [sys.executable, '-m', 'keepclear.fields.cli', 'keepout',"
        f" {str(SCENARIOS / 'bare-probe-bench.toml')!r}])\n"
        "out = b''\n"
        "while True:\n"
        "    try:\n"
        "        chunk = os.read(fd, 65536)\n"
        "    except OSError:\n"
        "        break\n"
        "    if not chunk:\n"
        "        break\n"
        "    out += chunk\n"
        "_, status = os.waitpid(pid, 0)\n"
        "sys.stdout.write(str(os.waitstatus_to_exitcode(status)) + '\\n')\n"
        "sys.stdout.write(out.decode(errors='replace'))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", script], env=env, capture_output=True, text=True, timeout=300
    )
    status, _, screen = done.stdout.partition("\n")
    assert status == "0", done.stdout + done.stderr
    assert "solving the source models" in screen
    assert "Keep people outside this radius" in screen
