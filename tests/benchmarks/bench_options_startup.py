"""Speed of ``assess`` with six options, and of the command line's start-up.

Run with ``.venv/bin/python -m pytest tests/benchmarks --benchmark-only``.  Each command
runs in a process of its own (the installed ``keepclear``), several times; the figures are
the medians of the wall time and of the processor time (user + system) of the child.  On a
machine shared with other jobs the wall time measures the neighbours too: the processor
time is what the command itself costs.  Nothing is asserted about speed.
"""

from __future__ import annotations

import os
import resource
import statistics
import subprocess
import tempfile
import time
from pathlib import Path

import pytest
from _common import keepclear_executable, record

pytest.importorskip("pytest_benchmark")

SIX_OPTIONS = Path(__file__).parent / "data" / "horn-bench-six-options.toml"


def _timed(
    args: list[str], expect: int = 0, env: dict[str, str] | None = None
) -> tuple[float, float, str]:
    """Wall time [s], processor time of the child [s] and stderr of one run."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    done = subprocess.run(
        [str(a) for a in args], capture_output=True, text=True, check=False, env=env
    )
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    if done.returncode != expect:
        raise AssertionError(f"{args[1:]} exited {done.returncode}: {done.stderr[-2000:]}")
    return wall, cpu, done.stderr


def _exe() -> Path:
    exe = keepclear_executable()
    if exe is None:
        pytest.skip("the keepclear console script is not installed beside this interpreter")
    return exe


def _assess_six_options(exe: Path, env: dict[str, str] | None = None) -> tuple[float, float]:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "out"
        wall, cpu, _ = _timed([exe, "assess", SIX_OPTIONS, "--out", folder], env=env)
        assert (folder / "report.html").exists()
    return wall, cpu


def _bench_six_options(benchmark, rounds: int, label: str, note: str, env=None) -> None:
    """Time ``rounds`` runs of the six-option assessment and record their medians."""
    exe = _exe()
    benchmark.group = "assess with six options"
    walls: list[float] = []
    cpus: list[float] = []

    def run():
        wall, cpu = _assess_six_options(exe, env)
        walls.append(wall)
        cpus.append(cpu)

    benchmark.pedantic(run, rounds=rounds, iterations=1)
    record(
        benchmark,
        label,
        seconds=statistics.median(walls),
        cpu_s=statistics.median(cpus),
        note=note,
    )


def test_bench_assess_six_options(benchmark):
    # The usual case: NEC-2's solution and the outgoing-wave tables kept from an earlier
    # run (the suite's own store, filled by an untimed first run).
    _assess_six_options(_exe())
    _bench_six_options(
        benchmark,
        3,
        "assess horn bench, six options (process; solution and tables kept)",
        "median of 3; keep-out of the base and six options, maps, report, start-up",
    )


def test_bench_assess_six_options_nothing_kept(benchmark):
    # The first run of a new geometry: NEC-2 solves and the tables are built.
    _bench_six_options(
        benchmark,
        1,
        "assess horn bench, six options (process; nothing kept)",
        "one run; NEC-2 solve and outgoing-wave tables included",
        env={**os.environ, "KEEPCLEAR_CACHE_DIR": "off"},
    )


STARTUP = {
    "help": (["--help"], 0),
    "command-help": (["assess", "--help"], 0),
    "refused-option": (["keepout", "--no-such-option"], 2),
    "missing-file": (["keepout", "no-such-file.toml"], 2),
}
#: Arguments refused after the scenario is read, before numpy and the models are imported.
_OPTIONS_SCENARIO = str(Path(__file__).parents[2] / "scenarios" / "horn-bench-options.toml")
STARTUP |= {
    "refused-limit": (["keepout", _OPTIONS_SCENARIO, "--limit", "nope"], 2),
    "refused-option-name": (["keepout", _OPTIONS_SCENARIO, "--option", "nosuch"], 2),
    "refused-rank-by": (["compare", _OPTIONS_SCENARIO, "--rank-by", "bogus"], 2),
    "refused-sweep": (["compare", _OPTIONS_SCENARIO, "--sweep", "foo"], 2),
    "refused-sweep-entry": (["compare", _OPTIONS_SCENARIO, "--sweep", "source.9.power_w=1"], 2),
    "refused-point": (["probe", _OPTIONS_SCENARIO, "--at", "1,2"], 2),
    "refused-pixels": (["map", _OPTIONS_SCENARIO, "--out", "unused", "--pixels", "1"], 2),
}


#: Refused by reading the scenario as changed (numpy, the scenario's reader and the models'
#: input checks imported; point sources stand in for the wire grids to be solved): the one
#: kind of refusal not answered before numpy.
STARTUP |= {
    "refused-sweep-value": (["compare", _OPTIONS_SCENARIO, "--sweep", "source.1.power_w=-5"], 2),
    "refused-sweep-key": (
        ["assess", _OPTIONS_SCENARIO, "--out", "unused", "--sweep", "source.1.power=5"],
        2,
    ),
}


@pytest.mark.parametrize("case", list(STARTUP))
def test_bench_cli_startup(benchmark, case: str):
    exe = _exe()
    args, expect = STARTUP[case]
    benchmark.group = "command-line start-up"
    walls: list[float] = []
    cpus: list[float] = []

    def run():
        wall, cpu, err = _timed([exe, *args], expect)
        if expect == 2:
            assert err.startswith("keepclear: ") and err.count("\n") == 1
        walls.append(wall)
        cpus.append(cpu)

    benchmark.pedantic(run, rounds=7, iterations=1)
    record(
        benchmark,
        f"keepclear {' '.join(args)} (process)",
        seconds=statistics.median(walls),
        cpu_s=statistics.median(cpus),
        note=f"median of 7; exit status {expect}",
    )
