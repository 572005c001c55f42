"""Shared pieces of the speed benchmarks: paths, point sets, dB comparisons, the summary.

Every benchmark records its figures in ``benchmark.extra_info`` (kept by
``--benchmark-json``) and in :data:`SUMMARY`, which ``conftest.py`` prints at the end
of the run.  Wall times on a shared machine mostly measure the neighbours: each field
benchmark times the fast engine and a straightforward direct integration in the same run,
so their ratio holds when the absolute figures do not.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

from keepclear.antennas.base import C_M_S, ETA0_OHM

REPO = Path(__file__).resolve().parents[2]
SCENARIOS = REPO / "scenarios"
DEMO_HORN = SCENARIOS / "horn-bench-options.toml"
DEMO_ASSESS = SCENARIOS / "plasma-bench.toml"
F_HZ = 2.45e9
LAMBDA_M = C_M_S / F_HZ

#: One dict per benchmark: what ``conftest.py`` prints at the end of the run.
SUMMARY: list[dict[str, object]] = []


def keepclear_executable() -> Path | None:
    """The installed ``keepclear`` console script beside the running interpreter."""
    path = Path(sys.executable).parent / "keepclear"
    return path if path.exists() else None


def record(benchmark, name: str, **info: object) -> None:
    """Put figures into the benchmark's extra_info and the end-of-run summary."""
    benchmark.extra_info.update(info)
    SUMMARY.append({"name": name, **info})


def squares(e: np.ndarray, h: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """|E|^2, |H|^2 and the plane-wave-equivalent density max(|E|^2/eta0, eta0 |H|^2)."""
    e2 = np.sum(np.abs(e) ** 2, axis=1)
    h2 = np.sum(np.abs(h) ** 2, axis=1)
    return e2, h2, np.maximum(e2 / ETA0_OHM, ETA0_OHM * h2)


def worst_db(a: np.ndarray, b: np.ndarray) -> float:
    """Largest |10 log10(a / b)| over the points where both are positive [dB]."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    ok = (a > 0) & (b > 0)
    if not ok.any():
        return 0.0
    return float(np.max(np.abs(10.0 * np.log10(a[ok] / b[ok]))))


def shell_points(
    n: int, r_min_m: float, r_max_m: float, seed: int = 0, centre_m=(0.0, 0.0, 0.0)
) -> np.ndarray:
    """``n`` points in random directions, log-uniform in distance from the centre [m]."""
    rng = np.random.default_rng(seed)
    u = rng.normal(size=(n, 3))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    r = np.exp(rng.uniform(np.log(r_min_m), np.log(r_max_m), n))
    return np.asarray(centre_m, dtype=float) + u * r[:, None]


def subsample(n: int, count: int, seed: int = 1) -> np.ndarray:
    """Sorted indices of ``count`` of ``n`` points (all of them if fewer)."""
    if count >= n:
        return np.arange(n)
    return np.sort(np.random.default_rng(seed).choice(n, count, replace=False))


def timed(fn, *args, **kwargs) -> tuple[object, float, float]:
    """``fn(*args, **kwargs)``, its wall time and its CPU time (all threads) [s]."""
    start, start_cpu = time.perf_counter(), time.process_time()
    out = fn(*args, **kwargs)
    return out, time.perf_counter() - start, time.process_time() - start_cpu


def run_measured(args: list[str], cwd: Path | None = None) -> tuple[float, int, str, str]:
    """Run a command; its wall time [s], its peak resident memory [bytes], stdout, stderr.

    The command runs as the only child of a small Python parent, so that the parent's
    ``RUSAGE_CHILDREN`` peak (Linux ``ru_maxrss``, in kB) is the command's own.
    """
    probe = (
        "import resource, subprocess, sys, time\n"
        "t = time.perf_counter()\n"
        "p = subprocess.run(sys.argv[1:], capture_output=True, text=True)\n"
        "dt = time.perf_counter() - t\n"
        "rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss\n"
        "sys.stdout.write(f'{dt} {rss * 1024} {p.returncode}\\n')\n"
        "sys.stdout.write(p.stdout)\n"
        "sys.stderr.write(p.stderr)\n"
    )
    env = dict(os.environ)
    done = subprocess.run(
        [sys.executable, "-c", probe, *map(str, args)],
        capture_output=True,
        text=True,
        cwd=cwd,
        env=env,
        check=False,
    )
    first, _, rest = done.stdout.partition("\n")
    wall, rss, code = first.split()
    if int(code) != 0:
        raise AssertionError(f"{args[0]} exited {code}: {done.stderr[-2000:]}")
    return float(wall), int(rss), rest, done.stderr


def write_points_csv(path: Path, points: np.ndarray) -> None:
    """A point file in the contract's format (header x_m,y_m,z_m, one point a row)."""
    from keepclear.fields.outputs import POINTS_HEADER, csv_rows_g9

    path.write_bytes((POINTS_HEADER + "\n").encode() + csv_rows_g9(points))
