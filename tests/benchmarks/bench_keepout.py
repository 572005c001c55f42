"""Speed of the keep-out search on every bundled scenario, and of ``assess`` end to end.

Run with ``.venv/bin/python -m pytest tests/benchmarks --benchmark-only``.  The search is
timed from a freshly loaded scenario (no quadrature rule or derived term cached); the
assessment runs the installed ``keepclear`` in a process of its own (start-up, maps,
plots and report included), with its peak resident memory.  ``test_bench_keepout_stages``
splits the work of ``keepclear keepout`` on each scenario into the model build (the first
load of the scenario: a wire grid's NEC-2 solve), the search and the uncertainty spread; the
target of the search is under a second per bundled scenario, model build excluded.
Nothing is asserted about speed; the answers are checked to be positive and finite.
"""

from __future__ import annotations

import math
import statistics
import tempfile
import time
from pathlib import Path

import pytest
from _common import DEMO_ASSESS, SCENARIOS, keepclear_executable, record, run_measured

from keepclear.fields.assessment import uncertainty_data
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario
from keepclear.fields.workers import worker_count

pytest.importorskip("pytest_benchmark")

SCENARIO_FILES = sorted(SCENARIOS.glob("*.toml"))


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=[p.stem for p in SCENARIO_FILES])
def test_bench_keepout(benchmark, path: Path):
    benchmark.group = "keep-out search per scenario"
    load_scenario(path)  # warm-up of the process-wide tables (limits, Gauss rules)

    cpus: list[float] = []
    walls: list[float] = []

    def search():
        scenario = load_scenario(path)
        start, wall = time.process_time(), time.perf_counter()
        found = keepout_distances(scenario)
        cpus.append(time.process_time() - start)
        walls.append(time.perf_counter() - wall)
        return found

    results = benchmark.pedantic(search, rounds=3, iterations=1)
    distances = {r.limit_id: round(r.recommended_distance_m, 4) for r in results}
    record(
        benchmark,
        f"keepout {path.stem}",
        seconds=benchmark.stats.stats.median,
        search_s=statistics.median(walls),
        cpu_s=statistics.median(cpus),
        workers=worker_count(),
        distances_m=distances,
        note=(
            "median of 3; seconds: loading the scenario afresh and the search; search_s: "
            "the search alone (wall); cpu_s: this process's share of it (a batch of 100 "
            "rays or more is shared with worker processes, fields/workers.py)"
        ),
    )
    assert all(math.isfinite(d) and d >= 0 for d in distances.values())


def _stage(fn, *args):
    """Result, wall time [s] and processor time [s] of one call."""
    wall, cpu = time.perf_counter(), time.process_time()
    out = fn(*args)
    return out, time.perf_counter() - wall, time.process_time() - cpu


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=[p.stem for p in SCENARIO_FILES])
def test_bench_keepout_stages(benchmark, path: Path):
    benchmark.group = "keepout command per scenario: build, search, spread"
    # the first load builds the models (a wire grid's NEC-2 solve); the process keeps them
    _, build_wall, build_cpu = _stage(load_scenario, path)
    stages: dict[str, list[float]] = {"build_s": [build_wall], "build_cpu_s": [build_cpu]}

    def command():
        scenario, *load = _stage(load_scenario, path)
        results, *search = _stage(keepout_distances, scenario)
        _, *spread = _stage(uncertainty_data, scenario, results)
        for name, (wall, cpu) in (("reload", load), ("search", search), ("spread", spread)):
            stages.setdefault(f"{name}_s", []).append(wall)
            stages.setdefault(f"{name}_cpu_s", []).append(cpu)
        return results

    results = benchmark.pedantic(command, rounds=3, iterations=1)
    medians = {key: round(statistics.median(v), 3) for key, v in stages.items()}
    record(
        benchmark,
        f"keepout stages {path.stem}",
        seconds=benchmark.stats.stats.median,
        **medians,
        note="median of 3; build: the first load (model solve, once), search: keep-out "
        "distances, spread: the [uncertainty] Monte Carlo (0 without the table)",
    )
    assert all(math.isfinite(r.recommended_distance_m) for r in results)


def test_bench_assess_demo(benchmark):
    exe = keepclear_executable()
    if exe is None:
        pytest.skip("the keepclear console script is not installed beside this interpreter")
    benchmark.group = "assess end to end"
    out: dict[str, float] = {}

    def run():
        with tempfile.TemporaryDirectory() as tmp:
            folder = Path(tmp) / "out"
            wall, rss, _, _ = run_measured([exe, "assess", DEMO_ASSESS, "--out", folder])
            assert (folder / "report.html").exists()
            out.update(wall=wall, rss=rss)

    benchmark.pedantic(run, rounds=1, iterations=1)
    record(
        benchmark,
        f"assess {DEMO_ASSESS.stem} (process)",
        seconds=out["wall"],
        peak_rss_mib=out["rss"] / 2**20,
        note="keep-out, two maps, cylinders, plots, report, start-up included",
    )
