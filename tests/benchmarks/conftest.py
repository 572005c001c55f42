"""Print the figures of the speed benchmarks at the end of the run."""

from __future__ import annotations

import os

from keepclear.fields.cli import _one_blas_thread

# The benchmarks time what the command line runs: one BLAS thread a process, unless the
# user chose otherwise.  Set before numpy loads (the next import loads it; the command
# line's module does not); the worker processes of a search inherit it.
_one_blas_thread()

from _common import SUMMARY  # noqa: E402

#: Figures shown in the end-of-run table, in this order, where a benchmark has them.
_COLUMNS = (
    ("points", "points"),
    ("seconds", "fast s"),
    ("cpu_s", "cpu s"),
    ("points_per_s", "points/s"),
    ("direct_s", "direct s"),
    ("speedup", "x direct"),
    ("worst_db", "worst dB"),
    ("peak_rss_mib", "peak MiB"),
    ("build_s", "build s"),
    ("search_s", "search s"),
    ("spread_s", "spread s"),
)


def _fmt(value: object) -> str:
    if isinstance(value, float):
        return f"{value:.3g}"
    return str(value)


def pytest_terminal_summary(terminalreporter) -> None:  # noqa: D103
    if not SUMMARY:
        return
    tr = terminalreporter
    tr.section(f"keepclear speed figures (machine: {os.cpu_count() or '?'} cores)")
    header = ["benchmark"] + [title for _, title in _COLUMNS]
    rows = [
        [str(entry["name"])] + [_fmt(entry.get(key, "")) for key, _ in _COLUMNS]
        for entry in SUMMARY
    ]
    widths = [max(len(r[i]) for r in [header, *rows]) for i in range(len(header))]
    tr.write_line("  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)))
    for r in rows:
        tr.write_line("  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)))
    notes = [e for e in SUMMARY if e.get("note")]
    for entry in notes:
        tr.write_line(f"{entry['name']}: {entry['note']}")
