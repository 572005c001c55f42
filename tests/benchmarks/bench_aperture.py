"""Speed of the aperture engine: adaptive quadrature against direct integration.

Run with (benchmarks are skipped in normal runs by ``--benchmark-skip``)::

    .venv/bin/python -m pytest tests/benchmarks/bench_aperture.py --benchmark-only

Each case evaluates a square map of points in the H-plane (y = 0) in front of the
aperture, x from -1 to 1 m and z from lambda/10 to 2 m, with the adaptive method
(timed by pytest-benchmark), and the same points, or for large maps a fixed random
subsample of them, with ``method="direct"`` (one fine rule for every point, double
precision).  ``extra_info`` reports points per second, the direct time per point
extrapolated to the whole map, their ratio, and the worst difference in dB between the
two on the points both computed (|E|, |H| and the plane-wave-equivalent density).
The CPU time of the adaptive run is reported beside the wall time: on a
shared machine the wall time mostly measures the neighbours.  Nothing is asserted about
speed; accuracy is asserted at 0.1 dB.
"""

from __future__ import annotations

import time

import numpy as np
import pytest

from keepclear.antennas.aperture import OpenWaveguide
from keepclear.antennas.base import C_M_S, ETA0_OHM
from keepclear.antennas.horn import PyramidalHorn
from keepclear.antennas.waveguide import waveguide_dimensions

pytest.importorskip("pytest_benchmark")

F_HZ = 2.45e9
LAMBDA_M = C_M_S / F_HZ
#: Direct integration is timed on at most this many field-point x node pairs (~10-20 s).
DIRECT_PAIR_BUDGET = 1e8


def h_plane_map(n_points: int) -> np.ndarray:
    """A side x side grid (side = sqrt(n)) in y = 0: x in [-1, 1] m, z in [lambda/10, 2] m."""
    side = int(round(np.sqrt(n_points)))
    x = np.linspace(-1.0, 1.0, side)
    z = np.linspace(LAMBDA_M / 10, 2.0, side)
    xx, zz = np.meshgrid(x, z)
    return np.column_stack([xx.ravel(), np.zeros(xx.size), zz.ravel()])


def open_waveguide() -> OpenWaveguide:
    return OpenWaveguide(F_HZ, 1000.0, *waveguide_dimensions("WR-340"))


def horn_3x2() -> PyramidalHorn:
    """About 3 x 2 wavelengths aperture (0.367 x 0.245 m), WR-340 feed, 0.25 m long: 16 dBi."""
    return PyramidalHorn(
        F_HZ, 1000.0, *waveguide_dimensions("WR-340"), 3 * LAMBDA_M, 2 * LAMBDA_M, 0.25
    )


def _db(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.max(np.abs(10 * np.log10(a / b))))


def _run_case(benchmark, radiator, n_points: int) -> None:
    points = h_plane_map(n_points)
    local = radiator.apply_standoff(radiator.placement.to_local(points))
    orders = radiator.adaptive_orders(local)
    rounds = 3 if points.shape[0] <= 20_000 else 1
    cpu_s: list[float] = []

    def adaptive(p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        start_cpu = time.process_time()
        out = radiator.fields(p)
        cpu_s.append(time.process_time() - start_cpu)
        return out

    e, h = benchmark.pedantic(adaptive, args=(points,), rounds=rounds, iterations=1)
    adaptive_s = benchmark.stats.stats.min

    nx, ny = radiator.direct_orders()
    n_direct = int(min(points.shape[0], max(200, DIRECT_PAIR_BUDGET // (nx * ny))))
    rng = np.random.default_rng(0)
    subset = np.sort(rng.choice(points.shape[0], n_direct, replace=False))
    start = time.perf_counter()
    e_d, h_d = radiator.fields(points[subset], method="direct")
    direct_s = time.perf_counter() - start
    direct_total_s = direct_s * points.shape[0] / n_direct

    e_a, h_a = e[subset], h[subset]
    e2_a, e2_d = np.sum(abs(e_a) ** 2, 1), np.sum(abs(e_d) ** 2, 1)
    h2_a, h2_d = np.sum(abs(h_a) ** 2, 1), np.sum(abs(h_d) ** 2, 1)
    s_a = np.maximum(e2_a / ETA0_OHM, ETA0_OHM * h2_a)
    s_d = np.maximum(e2_d / ETA0_OHM, ETA0_OHM * h2_d)
    worst = {"E": _db(e2_a, e2_d), "H": _db(h2_a, h2_d), "S": _db(s_a, s_d)}
    benchmark.extra_info.update(
        {
            "model": type(radiator).__name__,
            "points": int(points.shape[0]),
            "adaptive_s": adaptive_s,
            "adaptive_cpu_s": min(cpu_s),
            "points_per_s": points.shape[0] / adaptive_s,
            "adaptive_mean_nodes": float(np.mean(orders[:, 0] * orders[:, 1])),
            "direct_nodes": nx * ny,
            "direct_points_timed": n_direct,
            "direct_s_per_point": direct_s / n_direct,
            "direct_s_estimated": direct_total_s,
            "speedup_vs_direct": direct_total_s / adaptive_s,
            "worst_db_e": worst["E"],
            "worst_db_h": worst["H"],
            "worst_db_density": worst["S"],
        }
    )
    print(
        f"\n{type(radiator).__name__} {points.shape[0]} points: "
        f"adaptive {adaptive_s:.3f} s (cpu {min(cpu_s):.3f} s, "
        f"{points.shape[0] / adaptive_s:.3g} points/s), direct "
        f"{direct_total_s:.3g} s (timed on {n_direct}), x{direct_total_s / adaptive_s:.1f}, "
        f"worst {max(worst.values()):.2e} dB"
    )
    assert max(worst.values()) < 0.1


@pytest.mark.parametrize("n_points", [1_000, 10_000, 100_000])
def test_bench_open_waveguide_map(benchmark, n_points):
    benchmark.group = "open waveguide WR-340"
    _run_case(benchmark, open_waveguide(), n_points)


@pytest.mark.parametrize("n_points", [1_000, 10_000, 100_000, 1_000_000])
def test_bench_horn_map(benchmark, n_points):
    benchmark.group = "horn 3 x 2 wavelengths"
    _run_case(benchmark, horn_3x2(), n_points)
