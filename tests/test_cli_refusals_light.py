"""Refused arguments are answered before numpy and the models are imported.

The command line promises that ``--help`` and a refused argument come back at once
(importing numpy, scipy, matplotlib and the models costs most of a second).  These runs
check what is imported, not how long it takes: the refusals run the console-script
entry point one after another in a fresh interpreter, which reports after each whether
numpy has been loaded, with the exit status and the message the full checks give (the
same fragments the other CLI tests assert).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from keepclear.fields import arguments, limits

SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"
OPTIONS = str(SCENARIOS / "horn-bench-options.toml")
THRESHOLD = str(SCENARIOS / "desk-box-source.toml")
SCREENING = str(SCENARIOS / "isotropic-screening.toml")

#: Run the entry point once per argument list, in order, in one interpreter; after each
#: run report its exit status, its stderr and whether numpy has been imported so far.
_WRAPPER = """
import io, json, sys
from keepclear.fields.cli import main
reports = []
for args in json.loads(sys.argv[1]):
    sys.argv = ["keepclear", *args]
    sys.stderr = io.StringIO()
    try:
        main()
        code = 0
    except SystemExit as exc:
        code = exc.code
    reports.append({"code": code, "stderr": sys.stderr.getvalue(), "numpy": "numpy" in sys.modules})
sys.stdout.write("\\n" + json.dumps(reports))
"""


def _run_in_order(runs: list[list[str]], folder: Path) -> list[dict]:
    env = {**os.environ, "KEEPCLEAR_CACHE_DIR": str(folder / "cache")}
    done = subprocess.run(
        [sys.executable, "-c", _WRAPPER, json.dumps(runs)],
        capture_output=True,
        text=True,
        cwd=folder,
        env=env,
        timeout=300,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


REFUSALS = {
    "limit": (["keepout", OPTIONS, "--limit", "nope"], "--limit: unknown limit id 'nope'"),
    "limit-custom": (
        ["keepout", THRESHOLD, "--limit", "custom/router"],
        "(did you mean 'custom/router-spec'?)",
    ),
    "limit-readings": (
        ["readings", OPTIONS, "--csv", "r.csv", "--limit", "nope"],
        "unknown limit id 'nope'",
    ),
    "option": (["keepout", OPTIONS, "--option", "nosuch"], "--option: no option named 'nosuch'"),
    "option-probe": (["probe", OPTIONS, "--option", "nosuch"], "no option named 'nosuch'"),
    "rank-by": (["compare", OPTIONS, "--rank-by", "bogus"], "--rank-by: 'bogus' is not a ranking"),
    "rank-by-assess": (
        ["assess", OPTIONS, "--out", "o", "--rank-by", "place:nowhere"],
        "allowed: keepout, zone-area, place:operator at the control panel",
    ),
    "sweep": (["compare", OPTIONS, "--sweep", "foo"], "--sweep: 'foo' is not KEY=V1,V2,..."),
    "sweep-empty": (["compare", OPTIONS, "--sweep", "a=1,,2"], "has an empty value"),
    "sweep-no-entry": (
        ["compare", OPTIONS, "--sweep", "source.9.power_w=1,2"],
        "--sweep: 'source.9.power_w': no [[source]] is named or numbered '9'",
    ),
    "sweep-no-table": (
        ["assess", OPTIONS, "--out", "o", "--sweep", "cabinet.power_w=1,2"],
        "'cabinet.power_w' starts with 'cabinet', not a table a sweep can vary",
    ),
    "sweep-source-id-as-table": (
        ["compare", OPTIONS, "--sweep", "source2.power_w=1,2"],
        "'source2.power_w' starts with 'source2', not a table a sweep can vary (did you mean "
        "'source.2.power_w'?)",
    ),
    "sweep-no-enclosure": (
        ["compare", OPTIONS, "--sweep", "enclosure.wall_m=1"],
        "'enclosure.wall_m': the scenario has no [enclosure]",
    ),
    "at": (["probe", OPTIONS, "--at", "1,2"], "--at: expects three finite numbers X,Y,Z"),
    "through": (["map", OPTIONS, "--out", "o", "--through", "1,2,x"], "--through: expects"),
    "u-vector": (
        ["map", OPTIONS, "--out", "o", "--origin", "0,0,0", "--u", "1,0", "--v", "0,1,0"],
        "--u: expects three finite numbers X,Y,Z,",
    ),
    "pixels": (["map", OPTIONS, "--out", "o", "--pixels", "1"], "--pixels: must be at least 3"),
    "step": (["compare", OPTIONS, "--step-m", "-1"], "--step-m: must be a positive number"),
    "extent": (["assess", OPTIONS, "--out", "o", "--extent-m", "0"], "--extent-m: must be"),
    "height": (["compare", OPTIONS, "--height-m", "nan"], "--height-m: must be a finite height"),
    "toml-syntax": (["keepout", "broken.toml"], "broken.toml: is not valid TOML"),
    "missing-file": (["compare", "absent.toml"], "absent.toml: no such file"),
}


@pytest.fixture(scope="module")
def refusals(tmp_path_factory) -> dict[str, dict]:
    """Every refusal run in one fresh interpreter (one start-up instead of one each)."""
    folder = tmp_path_factory.mktemp("refusals")
    (folder / "broken.toml").write_text('name = "bench\n[[source]]\n', encoding="utf-8")
    reports = _run_in_order([args for args, _ in REFUSALS.values()], folder)
    return dict(zip(REFUSALS, reports, strict=True))


@pytest.mark.parametrize("case", list(REFUSALS))
def test_refusal_before_numpy(case: str, refusals: dict[str, dict]):
    args, fragment = REFUSALS[case]
    report = refusals[case]
    assert report["code"] == 2
    assert fragment in report["stderr"]
    assert report["stderr"].startswith("keepclear: ") and report["stderr"].count("\n") == 1
    assert not report["numpy"], f"numpy was imported by the time {args} was refused"


def test_valid_arguments_reach_the_models(tmp_path: Path):
    """The check of the wrapper itself: known names pass on to the full run, which loads numpy."""
    args = ["probe", SCREENING, "--limit", "icnirp-2020/occupational", "--at", "0.5,0,1.2"]
    refused, done = _run_in_order([[*args[:-1], "1,2,nan"], args], tmp_path)
    assert refused["code"] == 2 and not refused["numpy"]
    assert done["code"] == 0, done["stderr"]
    assert done["numpy"]


def test_light_limit_ids_are_the_tables_ids():
    """The ids read from the data files' id lines are the ids the full tables hold."""
    assert arguments.published_limit_ids() == limits.LIMIT_IDS
