"""Speed of the rim and outer-wall term on a map of 1e5 points.

Run with (benchmarks are skipped in normal runs by ``--benchmark-skip``)::

    .venv/bin/python -m pytest tests/benchmarks/bench_walls.py --benchmark-only

A 316 x 316 map in the H-plane all round the source, x and z from -1 to 1 m: the rim
term alone (``rim_near_fields``) and the whole walled radiator (aperture plus rim), for
the open WR-340 guide and the demo horn.  ``extra_info`` reports points per second.
Nothing is asserted about speed.
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.antennas.aperture import OpenWaveguide
from keepclear.antennas.horn import PyramidalHorn
from keepclear.antennas.walls import WalledAperture, rim_near_fields

pytest.importorskip("pytest_benchmark")

F_HZ = 2.45e9
WR340 = (0.08636, 0.04318)


def _map(n: int = 100_000) -> np.ndarray:
    side = int(np.sqrt(n))
    x, z = np.meshgrid(np.linspace(-1, 1, side), np.linspace(-1, 1, side))
    return np.stack([x.ravel(), np.full(x.size, 0.013), z.ravel()], axis=1)


def _radiator(kind: str) -> WalledAperture:
    if kind == "guide":
        return WalledAperture(OpenWaveguide(F_HZ, 100.0, *WR340))
    horn = PyramidalHorn(F_HZ, 100.0, *WR340, 0.24, 0.18, 0.30)
    return WalledAperture(horn, flare_half_angles_deg=horn.geometry.flare_half_angles_deg)


@pytest.mark.parametrize("kind", ["guide", "horn"])
def test_rim_term_map(benchmark, kind):
    radiator = _radiator(kind)
    pts = _map()
    benchmark.pedantic(
        rim_near_fields, args=(radiator.edges, pts, radiator.wavenumber_rad_m), rounds=1
    )
    benchmark.extra_info["points_per_s"] = pts.shape[0] / benchmark.stats.stats.mean


@pytest.mark.parametrize("kind", ["guide", "horn"])
def test_walled_radiator_map(benchmark, kind):
    radiator = _radiator(kind)
    pts = _map()
    benchmark.pedantic(radiator.fields, args=(pts,), rounds=1)
    benchmark.extra_info["points_per_s"] = pts.shape[0] / benchmark.stats.stats.mean
