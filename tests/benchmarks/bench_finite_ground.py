"""Speed of the wire-grid models: a 1e5-point map around a probe in its box, an open
guide and the demo horn, each solved with its metal.

Run with ``.venv/bin/python -m pytest tests/benchmarks/bench_finite_ground.py
--benchmark-only``.  Each model is built once, outside the map's timing (its build time,
the NEC-2 solve and the outgoing-wave table, is recorded as ``build_s``): the issue's box
(30 mm probe through the 0.20 x 0.09 m face of a 0.15 m deep box), the open WR-340 guide
solved with its walls, and the horn of ``scenarios/horn-bench-options.toml``.  Timed: the
fields at 1e5 points of a horizontal map plane through the source, 2 m x 2 m (in front,
beside and behind it), as the map command asks for them; the first call also builds the
near-field clusters' tables.  Compared in the same run with the direct segment kernel alone
(every point summed over every segment) on a subsample, scaled to all points; the worst
difference in dB of the density on that subsample is asserted at 0.01 dB.  Speed is
reported, never asserted.
"""

from __future__ import annotations

import numpy as np
import pytest
from _common import F_HZ, record, squares, subsample, timed, worst_db

from keepclear.antennas.aperture import OpenWaveguide
from keepclear.antennas.base import Placement
from keepclear.antennas.finite_ground import FiniteGroundMonopole
from keepclear.antennas.guide_grid import GridHorn, GridOpenWaveguide
from keepclear.antennas.horn import PyramidalHorn
from keepclear.antennas.waveguide import waveguide_dimensions

pytest.importorskip("pytest_benchmark")
pytest.importorskip("PyNEC")

N_POINTS = 100_000
N_DIRECT = 2_000
#: Source 1 m up, pointing along +x, its E plane vertical.
PLACEMENT = Placement.from_axes([0.0, 0.0, 1.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0])


def _map_points(n: int) -> np.ndarray:
    side = int(round(np.sqrt(n)))
    x = np.linspace(-1.0, 1.0, side)
    xx, yy = np.meshgrid(x, x, indexing="ij")
    return np.column_stack([xx.ravel(), yy.ravel(), np.full(xx.size, 1.0)])


def _box_probe():
    return FiniteGroundMonopole(
        F_HZ,
        1.0,
        0.030,
        ground="box",
        ground_size_m=(0.20, 0.09),
        box_depth_m=0.15,
        placement=PLACEMENT,
    )


def _open_guide():
    wr340 = waveguide_dimensions("WR-340")
    return GridOpenWaveguide(OpenWaveguide(F_HZ, 1.0, *wr340, placement=PLACEMENT))


def _demo_horn():
    wr340 = waveguide_dimensions("WR-340")
    return GridHorn(PyramidalHorn(F_HZ, 1.0, *wr340, 0.24, 0.18, 0.30, placement=PLACEMENT))


MODELS = {
    "finite-ground box probe": _box_probe,
    "open WR-340 with its walls": _open_guide,
    "demo horn with its walls": _demo_horn,
}


@pytest.mark.parametrize("name", list(MODELS))
def test_bench_wire_grid_map(benchmark, name):
    model, build_s, _ = timed(MODELS[name])
    pts = _map_points(N_POINTS)
    e, h = benchmark.pedantic(model.fields, args=(pts,), rounds=1, iterations=1)
    seconds = benchmark.stats.stats.mean
    idx = subsample(pts.shape[0], N_DIRECT)
    local = PLACEMENT.to_local(pts[idx])
    (e_d, h_d), direct_s, _ = timed(model.elements.fields, local)
    e_d = PLACEMENT.vectors_to_global(e_d)
    h_d = PLACEMENT.vectors_to_global(h_d)
    worst = worst_db(squares(e[idx], h[idx])[2], squares(e_d, h_d)[2])
    direct_all_s = direct_s * pts.shape[0] / idx.size
    record(
        benchmark,
        f"{name}, 2 m map",
        points=pts.shape[0],
        seconds=seconds,
        points_per_s=pts.shape[0] / seconds,
        direct_s=direct_all_s,
        speedup=direct_all_s / seconds,
        worst_db=worst,
        segments=model.structure.segment_count,
        build_s=build_s,
    )
    assert worst < 0.01
