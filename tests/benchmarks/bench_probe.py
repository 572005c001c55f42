"""Speed of the bulk probe path end to end: ``keepclear probe S --points IN.csv --csv OUT.csv``.

Run with ``.venv/bin/python -m pytest tests/benchmarks --benchmark-only``.  The installed
``keepclear`` runs in a process of its own on 1e5 and 1e6 points in front of the demo horn
(start-up, parsing, evaluation and writing included; peak resident memory recorded).  In
the same run the point file is parsed and the result written in-process, by the package
and by the numpy routines it replaced (``np.loadtxt``, ``np.savetxt`` with "%.9g"), so
that one can see what the input and output cost against the evaluation.  The output is
checked: the contract's header, one row per input point, in the input order.
"""

from __future__ import annotations

import io
import time
from pathlib import Path

import numpy as np
import pytest
from _common import SCENARIOS, keepclear_executable, record, run_measured, timed

from keepclear.fields.outputs import PROBE_CSV_COLUMNS, probe_csv_bytes, read_points_csv

pytest.importorskip("pytest_benchmark")


def demo_points(n: int, seed: int = 0) -> np.ndarray:
    """Points in front of the demo horn (x 0.05..5 m, y +-2.5 m, z 0.2..2 m), 6 decimals."""
    rng = np.random.default_rng(seed)
    pts = np.column_stack(
        [rng.uniform(0.05, 5.0, n), rng.uniform(-2.5, 2.5, n), rng.uniform(0.2, 2.0, n)]
    )
    return np.round(pts, 6)


def _write_input(path: Path, pts: np.ndarray) -> None:
    path.write_text("x_m,y_m,z_m\n" + "".join(f"{x:.6f},{y:.6f},{z:.6f}\n" for x, y, z in pts))


@pytest.mark.parametrize("n", [100_000, 1_000_000], ids=["1e5", "1e6"])
@pytest.mark.parametrize("scenario", ["horn-bench-options", "isotropic-screening"])
def test_bench_probe_cli(benchmark, tmp_path, n, scenario):
    exe = keepclear_executable()
    if exe is None:
        pytest.skip("the keepclear console script is not installed beside this interpreter")
    benchmark.group = "probe --points/--csv, own process"
    path = SCENARIOS / f"{scenario}.toml"
    pts = demo_points(n)
    inp = tmp_path / "in.csv"
    out = tmp_path / "out.csv"
    _write_input(inp, pts)
    figures: dict[str, float] = {}

    def run():
        if out.exists():
            out.unlink()
        wall, rss, _, _ = run_measured([exe, "probe", path, "--points", inp, "--csv", out])
        figures.update(wall=wall, rss=rss)

    benchmark.pedantic(run, rounds=1, iterations=1)
    # start-up alone: one point
    start_wall, _, _, _ = run_measured([exe, "probe", path, "--at", "1,0,1"])
    # the output: header, a row per point, input order
    with out.open() as fh:
        assert fh.readline().strip() == ",".join(PROBE_CSV_COLUMNS)
    rows = np.loadtxt(out, delimiter=",", skiprows=1)
    assert rows.shape == (n, 7)
    np.testing.assert_allclose(rows[:, :3], pts, rtol=0, atol=1e-6)
    # reading and writing in-process, against numpy's routines
    data, read_s, _ = timed(read_points_csv, inp)
    columns = [rows[:, i] for i in range(3, 7)]
    _, write_s, _ = timed(probe_csv_bytes, data, columns)
    t = time.perf_counter()
    np.loadtxt(io.StringIO(inp.read_text().partition("\n")[2]), delimiter=",", ndmin=2)
    loadtxt_s = time.perf_counter() - t
    t = time.perf_counter()
    np.savetxt(io.BytesIO(), np.column_stack([data, *columns]), delimiter=",", fmt="%.9g")
    savetxt_s = time.perf_counter() - t
    record(
        benchmark,
        f"probe CLI {scenario} {n:.0e} points",
        points=n,
        seconds=figures["wall"],
        points_per_s=n / figures["wall"],
        peak_rss_mib=figures["rss"] / 2**20,
        startup_s=start_wall,
        read_s=read_s,
        write_s=write_s,
        numpy_loadtxt_s=loadtxt_s,
        numpy_savetxt_s=savetxt_s,
        note=(
            f"start-up {start_wall:.2f} s, read {read_s:.2f} s (np.loadtxt {loadtxt_s:.2f} s), "
            f"write {write_s:.2f} s (np.savetxt {savetxt_s:.2f} s)"
        ),
    )
