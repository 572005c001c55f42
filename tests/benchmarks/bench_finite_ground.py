"""Speed of the finite-ground monopole: a 1e5-point map around the probe in its box.

Run with ``.venv/bin/python -m pytest tests/benchmarks/bench_finite_ground.py
--benchmark-only``.  The model (the issue's box: 30 mm probe through the 0.20 x 0.09 m face
of a 0.15 m deep box) is built once, outside the timing: the NEC-2 solve and the outer
expansion's table are per radiator.  Timed: the fields at 1e5 points of a horizontal map
plane through the probe, 2 m x 2 m (in front, beside and behind the box), as the map
command asks for them.  Compared in the same run with the direct segment kernel alone
(every point summed over every segment) on a subsample, scaled to all points; the worst
difference in dB of the density on that subsample is asserted at 0.01 dB.  Speed is
reported, never asserted.
"""

from __future__ import annotations

import numpy as np
import pytest
from _common import F_HZ, record, squares, subsample, timed, worst_db

from keepclear.antennas.base import Placement
from keepclear.antennas.finite_ground import FiniteGroundMonopole

pytest.importorskip("pytest_benchmark")
pytest.importorskip("PyNEC")

N_POINTS = 100_000
N_DIRECT = 2_000


def _map_points(n: int) -> np.ndarray:
    side = int(round(np.sqrt(n)))
    x = np.linspace(-1.0, 1.0, side)
    xx, yy = np.meshgrid(x, x, indexing="ij")
    return np.column_stack([xx.ravel(), yy.ravel(), np.full(xx.size, 1.0)])


def test_bench_box_probe_map(benchmark):
    placement = Placement.from_axes([0.0, 0.0, 1.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0])
    model, build_s, _ = timed(
        FiniteGroundMonopole,
        F_HZ,
        1.0,
        0.030,
        ground="box",
        ground_size_m=(0.20, 0.09),
        box_depth_m=0.15,
        placement=placement,
    )
    _, table_s, _ = timed(lambda: model.expansion)
    pts = _map_points(N_POINTS)
    e, h = benchmark.pedantic(model.fields, args=(pts,), rounds=1, iterations=1)
    seconds = benchmark.stats.stats.mean
    idx = subsample(pts.shape[0], N_DIRECT)
    local = placement.to_local(pts[idx])
    (e_d, h_d), direct_s, _ = timed(model.elements.fields, local)
    e_d = placement.vectors_to_global(e_d)
    h_d = placement.vectors_to_global(h_d)
    worst = worst_db(squares(e[idx], h[idx])[2], squares(e_d, h_d)[2])
    direct_all_s = direct_s * pts.shape[0] / idx.size
    record(
        benchmark,
        "finite-ground box probe, 2 m map",
        points=pts.shape[0],
        seconds=seconds,
        points_per_s=pts.shape[0] / seconds,
        direct_s=direct_all_s,
        speedup=direct_all_s / seconds,
        worst_db=worst,
        segments=model.structure.segment_count,
        build_s=build_s,
        expansion_table_s=table_s,
    )
    assert worst < 0.01
