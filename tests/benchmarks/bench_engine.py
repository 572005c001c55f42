"""Speed of the field engine, measured against straightforward direct integration.

Run every benchmark with (they are skipped in normal runs by ``--benchmark-skip``)::

    .venv/bin/python -m pytest tests/benchmarks --benchmark-only

Each case times the engine (pytest-benchmark) and, in the same run, a direct
integration of the same model on the same points: for the apertures the engine's
``method="direct"`` (one fixed fine Gauss rule, every node for every point, every kernel
written out in double precision, no far zone, no folding); for the wire
antennas the sinusoidal current summed as 2 x 200 Gauss-Legendre current elements with the
complete dipole fields.  Where the direct integration of every point would take minutes it
is timed on a fixed random subsample and scaled to all points (its cost per point does not
depend on the point: one rule for all); the accuracy is the worst difference on that
subsample, in dB of |E|^2, |H|^2 and the plane-wave-equivalent density, asserted at
0.1 dB.  Speed is reported, never asserted: ``extra_info`` and the table at the end of the
run give points per second, the direct time, their ratio and the worst difference.
"""

from __future__ import annotations

import os
import textwrap

import numpy as np
import pytest
from _common import (
    DEMO_HORN,
    F_HZ,
    LAMBDA_M,
    REPO,
    record,
    run_measured,
    shell_points,
    squares,
    subsample,
    timed,
    worst_db,
)
from scipy.special import roots_legendre

from keepclear.antennas.aperture import OpenWaveguide
from keepclear.antennas.base import ETA0_OHM
from keepclear.antennas.horn import PyramidalHorn
from keepclear.antennas.isotropic import IsotropicSource
from keepclear.antennas.waveguide import waveguide_dimensions
from keepclear.antennas.wire import Dipole, Monopole
from keepclear.fields import maps
from keepclear.fields.field import evaluate
from keepclear.fields.scenario import load_scenario

pytest.importorskip("pytest_benchmark")

K_RAD_M = 2 * np.pi / LAMBDA_M
#: Point-node pairs the direct integration is timed on in one case (a few seconds).
DIRECT_PAIR_BUDGET = 3e7
#: Points of each per-model case.
N_MODEL = 100_000


# ----------------------------------------------------------- direct references
def line_current_fields(
    points_m: np.ndarray,
    half_length_m: float,
    current_max_a: complex,
    nodes_per_half: int = 200,
) -> tuple[np.ndarray, np.ndarray]:
    """E and H of I(z') = I_m sin k(h - |z'|) on the z axis, summed element by element.

    Each Gauss-Legendre node (on [-h, 0] and [0, h] separately: the current has a kink at
    the feed) is an electric current element I dz' z_hat with its complete fields
    (Jackson, *Classical Electrodynamics*, 3rd ed., eq. (9.18), all orders in 1/kR, in the
    e^{+j omega t} convention of the package): E = -jk eta0 G [a J + b R(R.J)],
    H = -jk G c R x J, G = e^{-jkR}/(4 pi R), u = 1/(jkR), a = 1 + u + u^2,
    b = -(1 + 3u + 3u^2), c = 1 + u.
    """
    x, w = roots_legendre(nodes_per_half)
    zq = np.concatenate([(x - 1.0) * half_length_m / 2, (x + 1.0) * half_length_m / 2])
    wq = np.concatenate([w, w]) * half_length_m / 2
    idz = current_max_a * np.sin(K_RAD_M * (half_length_m - np.abs(zq))) * wq
    e = np.zeros((len(points_m), 3), dtype=complex)
    h = np.zeros((len(points_m), 3), dtype=complex)
    for start in range(0, len(points_m), 1000):
        p = points_m[start : start + 1000]
        rel = p[:, None, :] - np.stack([0 * zq, 0 * zq, zq], axis=1)[None]
        r = np.linalg.norm(rel, axis=2)
        n = rel / r[..., None]
        u = 1.0 / (1j * K_RAD_M * r)
        g = np.exp(-1j * K_RAD_M * r) / (4 * np.pi * r) * idz[None, :]
        a = 1 + u + u * u
        b = -(1 + 3 * u + 3 * u * u)
        c = 1 + u
        z_hat = np.zeros_like(n)
        z_hat[..., 2] = 1.0
        term = ETA0_OHM * (a[..., None] * z_hat + (b * n[..., 2])[..., None] * n)
        e[start : start + 1000] = -1j * K_RAD_M * np.einsum("pq,pqc->pc", g, term)
        cross = np.stack([n[..., 1], -n[..., 0], np.zeros_like(r)], axis=-1)  # n x z_hat
        h[start : start + 1000] = -1j * K_RAD_M * np.einsum("pq,pqc->pc", g * c, cross)
    return e, h


def aperture_points(radiator, n: int, d_min_m: float, d_max_m: float, seed: int = 0):
    """Points at log-uniform distances d_min..d_max from the aperture rectangle, all around."""
    rng = np.random.default_rng(seed)
    lx, ly = radiator.distribution.half_sizes_m
    pts = np.zeros((0, 3))
    while len(pts) < n:
        m = 2 * n
        d = np.exp(rng.uniform(np.log(d_min_m), np.log(d_max_m), m))
        u = rng.normal(size=(m, 3))
        u /= np.linalg.norm(u, axis=1, keepdims=True)
        anchor = np.column_stack([rng.uniform(-lx, lx, m), rng.uniform(-ly, ly, m), np.zeros(m)])
        p = anchor + d[:, None] * u
        lateral = np.hypot(np.maximum(np.abs(p[:, 0]) - lx, 0), np.maximum(np.abs(p[:, 1]) - ly, 0))
        keep = np.hypot(lateral, p[:, 2]) >= d_min_m
        pts = np.vstack([pts, p[keep]])
    return pts[:n]


def demo_horn(**kw) -> PyramidalHorn:
    """The horn of scenarios/horn-bench-options.toml in its own frame (15 dBi, WR-340 feed)."""
    return PyramidalHorn(F_HZ, 800.0, *waveguide_dimensions("WR-340"), 0.24, 0.18, 0.30, **kw)


def _compare(benchmark, name, fast_fn, points, direct_fn, n_direct, reference, rounds=3, **extra):
    """Time ``fast_fn`` on all points and ``direct_fn`` on a subsample; record and check."""
    e, h = benchmark.pedantic(fast_fn, args=(points,), rounds=rounds, iterations=1)
    fast_s = benchmark.stats.stats.min
    sub = subsample(len(points), n_direct)
    (e_d, h_d), direct_wall, _ = timed(direct_fn, points[sub])
    direct_s = direct_wall * len(points) / len(sub)
    fast_sq = squares(e[sub], h[sub])
    direct_sq = squares(e_d, h_d)
    worst = max(worst_db(a, b) for a, b in zip(fast_sq, direct_sq, strict=True))
    record(
        benchmark,
        name,
        points=len(points),
        seconds=fast_s,
        points_per_s=len(points) / fast_s,
        direct_points_timed=len(sub),
        direct_s=direct_s,
        speedup=direct_s / fast_s,
        worst_db=worst,
        reference=reference,
        **extra,
    )
    assert worst < 0.1


# ------------------------------------------------------------- per model
def test_bench_isotropic(benchmark):
    benchmark.group = "models, 1e5 points"
    src = IsotropicSource(F_HZ, 100.0, 6.0)
    pts = shell_points(N_MODEL, 0.05, 10.0)
    e, h = benchmark.pedantic(src.fields, args=(pts,), rounds=3, iterations=1)
    r = np.linalg.norm(pts, axis=1)
    closed = 100.0 * 10**0.6 / (4 * np.pi * r**2)  # FCC OET 65 eq. (3), S = P G / (4 pi R^2)
    worst = worst_db(squares(e, h)[2], closed)
    seconds = benchmark.stats.stats.min
    record(
        benchmark,
        "isotropic 6 dBi",
        points=len(pts),
        seconds=seconds,
        points_per_s=len(pts) / seconds,
        worst_db=worst,
        reference="closed form S = P G / (4 pi r^2) (OET 65 eq. 3); no integration to compare",
    )
    assert worst < 1e-6


@pytest.mark.parametrize("kind", ["dipole", "monopole"])
def test_bench_wire(benchmark, kind):
    benchmark.group = "models, 1e5 points"
    if kind == "dipole":
        wire = Dipole(F_HZ, 100.0)
        pts = shell_points(N_MODEL, 0.05, 10.0, seed=2)
    else:
        wire = Monopole(F_HZ, 100.0)
        pts = shell_points(N_MODEL, 0.05, 10.0, seed=3)
        pts[:, 2] = np.abs(pts[:, 2])  # the half-space above the ground plane
    # the thin-wire model evaluates points inside the wire radius at the radius: keep clear
    far_from_wire = np.hypot(pts[:, 0], pts[:, 1]) > LAMBDA_M / 10
    pts = pts[far_from_wire]
    h_m, i_m = wire.wire.half_length_m, wire.current_max_a

    def direct(p):
        return line_current_fields(p, h_m, i_m)

    _compare(
        benchmark,
        f"{kind} (closed form)",
        wire.fields,
        pts,
        direct,
        int(DIRECT_PAIR_BUDGET // 400),
        "sinusoidal current summed as 2 x 200 Gauss current elements (Jackson eq. 9.18)",
    )


@pytest.mark.parametrize("kind", ["open-waveguide", "horn"])
def test_bench_aperture_models(benchmark, kind):
    benchmark.group = "models, 1e5 points"
    rad = (
        OpenWaveguide(F_HZ, 800.0, *waveguide_dimensions("WR-340"))
        if kind != "horn"
        else demo_horn()
    )
    pts = aperture_points(rad, N_MODEL, LAMBDA_M / 10, 5.0)
    nx, ny = rad.direct_orders()

    def direct(p):
        return rad.fields(p, method="direct")

    orders = rad.adaptive_orders(rad.apply_standoff(pts))
    _compare(
        benchmark,
        f"{kind} (lambda/10..5 m, all round)",
        rad.fields,
        pts,
        direct,
        int(DIRECT_PAIR_BUDGET // (nx * ny)),
        f'method="direct": {nx} x {ny} nodes for every point, double precision',
        adaptive_mean_nodes=float(np.mean(orders[:, 0] * orders[:, 1])),
        direct_nodes=nx * ny,
    )


# ------------------------------------------------- the demo map, 1e3 .. 1e6 points
def _demo_scenarios():
    fast = load_scenario(DEMO_HORN)
    direct = load_scenario(DEMO_HORN)
    for source in direct.sources:
        source.radiator.method = "direct"
    return fast, direct


def _front_grid(side: int, y_shift_m: float = 0.0) -> maps.Grid:
    """``side`` x ``side`` samples on the horizontal plane through the horn (z = 1 m), in
    front of it: x 0.05..5.05 m, y -2.5..2.5 m (+ shift), the floor image included."""
    plane = maps.principal_plane("xy", [2.55, y_shift_m, 1.0])
    return maps.make_grid(plane, 2.5, pixels=side, n_limits=2)


def _map_note(side: int, shift: float, n_direct: int, convergence_db: float | None) -> str:
    if side != 1000:
        return ""
    where = "5 m x 5 m at the horn height in front of it" + (
        f", moved {shift:g} m sideways" if shift else ", centred on the boresight"
    )
    note = f"{where}, floor image included; direct timed on {n_direct} points and scaled"
    if convergence_db is not None:
        note += f"; the direct rule moves by {convergence_db:.1e} dB with a rule for 1e-9"
    return note


@pytest.mark.parametrize(
    ("side", "shift"),
    [(32, 0.0), (100, 0.0), (316, 0.0), (1000, 0.0), (1000, 1.5)],
    ids=["1e3", "1e4", "1e5", "1e6", "1e6-off-axis"],
)
def test_bench_demo_map(benchmark, side, shift):
    """The map target: 1000 x 1000 in front of the demo horn, against direct integration."""
    benchmark.group = "demo horn map (scenario, floor image)"
    fast, direct = _demo_scenarios()
    grid = _front_grid(side, shift)
    ids = list(fast.limit_ids)
    evaluate_map = maps.evaluate_map  # warm-up: rules and caches of the first call
    evaluate_map(fast, _front_grid(16, shift), ids)
    result = benchmark.pedantic(
        evaluate_map, args=(fast, grid, ids), rounds=3 if side < 1000 else 1, iterations=1
    )
    fast_s = benchmark.stats.stats.min
    pts = grid.points_m()
    radiator = direct.sources[0].radiator
    label = f"demo horn map {side}x{side}" + (" off-axis" if shift else "")
    timing = {
        "points": len(pts),
        "seconds": fast_s,
        "points_per_s": len(pts) / fast_s,
        "seconds_per_million": fast_s / len(pts) * 1e6,
    }
    if not hasattr(radiator, "direct_orders"):
        # the bundled horn is solved with its walls (a wire grid): its fast path against
        # every segment's exact kernel is bench_finite_ground.py's "demo horn with its
        # walls"; here the map is timed alone
        note = "wire-grid horn; accuracy against the segment kernel: bench_finite_ground.py"
        record(benchmark, label, **timing, note=note)
        assert np.all(np.isfinite(result.power_density_w_m2))
        return
    nx, ny = radiator.direct_orders()
    sub = subsample(len(pts), int(min(len(pts), DIRECT_PAIR_BUDGET // (2 * nx * ny))))
    res_d, direct_wall, _ = timed(evaluate, direct, pts[sub])
    direct_s = direct_wall * len(pts) / len(sub)
    flat = [getattr(result, k).reshape(-1)[sub] for k in ("e_v_m", "h_a_m", "power_density_w_m2")]
    ref = [res_d.e_v_m, res_d.h_a_m, res_d.power_density_w_m2]
    worst = max(worst_db(a, b) for a, b in zip(flat, ref, strict=True))
    extra = {}
    if side == 1000 and shift == 0.0:
        # the direct rule itself is converged: a rule for 1e-9 moves it by this much
        finer = load_scenario(DEMO_HORN)
        finer.sources[0].radiator.method = "direct"
        finer.sources[0].radiator.direct_tolerance = 1e-9
        few = sub[:: max(1, len(sub) // 40)]
        res_f = evaluate(finer, pts[few])
        extra["direct_convergence_db"] = worst_db(
            res_f.power_density_w_m2, evaluate(direct, pts[few]).power_density_w_m2
        )
    record(
        benchmark,
        label,
        **timing,
        direct_points_timed=len(sub),
        direct_s=direct_s,
        speedup=direct_s / fast_s,
        worst_db=worst,
        reference=f'scenario with method="direct" ({nx} x {ny} nodes, direct field and image)',
        note=_map_note(side, shift, len(sub), extra.get("direct_convergence_db")),
        **extra,
    )
    assert worst < 0.1


# --------------------------------------------------------- aperture size
@pytest.mark.parametrize(
    ("width_wl", "height_wl", "length_m"),
    [(0.0, 0.0, 0.0), (1.5, 1.0, 0.15), (2.0, 1.5, 0.20), (3.0, 2.0, 0.25)],
    ids=["WR-340", "horn-1.5x1", "horn-2x1.5", "horn-3x2"],
)
def test_bench_aperture_size(benchmark, width_wl, height_wl, length_m):
    benchmark.group = "aperture size, 1e5 points"
    a, b = waveguide_dimensions("WR-340")
    if width_wl == 0.0:
        rad = OpenWaveguide(F_HZ, 800.0, a, b)
        label = "WR-340 open end (0.7 x 0.35 wavelengths)"
    else:
        rad = PyramidalHorn(F_HZ, 800.0, a, b, width_wl * LAMBDA_M, height_wl * LAMBDA_M, length_m)
        label = f"horn {width_wl:g} x {height_wl:g} wavelengths"
    pts = aperture_points(rad, N_MODEL, LAMBDA_M / 10, 3.0, seed=5)
    nx, ny = rad.direct_orders()
    orders = rad.adaptive_orders(rad.apply_standoff(pts))

    def direct(p):
        return rad.fields(p, method="direct")

    _compare(
        benchmark,
        label,
        rad.fields,
        pts,
        direct,
        int(DIRECT_PAIR_BUDGET // (nx * ny)),
        f'method="direct", {nx} x {ny} nodes',
        rounds=1,
        adaptive_mean_nodes=float(np.mean(orders[:, 0] * orders[:, 1])),
        direct_nodes=nx * ny,
    )


# ------------------------------------------------------------- peak memory
def test_bench_map_memory(benchmark, tmp_path):
    """Peak resident memory of the 1000 x 1000 demo map, in a process of its own."""
    benchmark.group = "memory"
    script = tmp_path / "map.py"
    script.write_text(
        textwrap.dedent(
            f"""
            import resource, sys
            sys.path.insert(0, {str(REPO / "tests" / "benchmarks")!r})
            from bench_engine import _front_grid
            from keepclear.fields import maps
            from keepclear.fields.scenario import load_scenario
            sc = load_scenario({str(DEMO_HORN)!r})
            before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
            maps.evaluate_map(sc, _front_grid(1000), list(sc.limit_ids))
            print(before * 1024)
            """
        )
    )
    out: dict[str, float] = {}

    def run():
        wall, rss, stdout, _ = run_measured([os.sys.executable, str(script)])
        out.update(wall=wall, rss=rss, before=float(stdout.split()[0]))

    benchmark.pedantic(run, rounds=1, iterations=1)
    record(
        benchmark,
        "demo map 1000x1000, own process",
        points=1_000_000,
        seconds=out["wall"],
        peak_rss_mib=out["rss"] / 2**20,
        rss_after_imports_mib=out["before"] / 2**20,
        note="peak resident memory of the whole process (Python, numpy, scipy included)",
    )
