"""Speed of the Monte Carlo keep-out: 1,000 samples of the demo scenario.

Target (not asserted): under 10 s on the 2-core test machine for the samples, after the
nominal keep-out search.  Run with
``.venv/bin/python -m pytest tests/benchmarks/bench_uncertainty.py --benchmark-only``.
"""

from __future__ import annotations

import math

import pytest
from _common import SCENARIOS, record

from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario
from keepclear.fields.uncertainty import UncertaintySpec, keepout_spread

pytest.importorskip("pytest_benchmark")


def test_bench_monte_carlo_keepout_demo(benchmark):
    benchmark.group = "uncertainty"
    scenario = load_scenario(SCENARIOS / "plasma-bench.toml")
    nominal = keepout_distances(scenario)
    spec = UncertaintySpec(power_db=1.0, reflection=0.1, position_m=0.02, samples=1000)

    def run():
        return keepout_spread(load_scenario(SCENARIOS / "plasma-bench.toml"), spec, nominal)

    spreads = benchmark.pedantic(run, rounds=1, iterations=1)
    record(
        benchmark,
        "Monte Carlo keep-out, plasma-bench, 1000 samples",
        seconds=benchmark.stats.stats.min,
        note="target under 10 s on 2 cores (fields once, re-weighted per sample)",
    )
    assert all(math.isfinite(s.p95_m) and s.p95_m > 0 for s in spreads)
