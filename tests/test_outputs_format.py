"""The bulk CSV writer gives the same text as numpy's savetxt with "%.9g", byte for byte.

Reference: ``numpy.savetxt(..., delimiter=",", fmt="%.9g")`` (the writer this replaces) and
Python's ``%`` operator, which follows C's printf for ``%g`` (C11, 7.21.6.1: precision P =
9 significant digits, style e if the exponent X < -4 or X >= P, else style f, trailing zeros
and a bare point removed; correctly rounded).
"""

from __future__ import annotations

import io
import os

import numpy as np
import pytest

from keepclear.fields.outputs import PROBE_CSV_COLUMNS, csv_rows_g9, format_g9, probe_csv_bytes

from ._cli import assert_clean_exit, one_error_line, run
from ._edge_cases import _csv_run, _HalfWriter, _leftovers
from .conftest import ISOTROPIC


def savetxt_text(table: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.savetxt(buf, table, delimiter=",", fmt="%.9g")
    return buf.getvalue()


EDGE_VALUES = [
    0.0,
    -0.0,
    1.0,
    -1.0,
    0.5,
    0.1,
    1e-5,  # last exponent in scientific style below
    1e-4,  # first fixed-style exponent
    0.00012345678949,
    0.00099999999951,  # rounds up into the next decade
    9.9999999995,
    9.99999999949,
    99999999.99,
    123456789.0,
    999999999.4,
    999999999.5,  # rounds to 1e+09 (scientific)
    1e9,
    1e21,
    1e22,
    1e23,
    1e100,
    -1e-100,
    1e-300,
    1e300,
    5e-324,  # subnormal: formatted one by one
    1e-310,
    1.7976931348623157e308,
    12.5,
    0.125,
    2.0 / 3.0,
    1234.5678905,
    np.inf,
    -np.inf,
    np.nan,
]


def test_edge_values_match_printf():
    values = np.array(EDGE_VALUES + list(10.0 ** np.arange(-310, 309, 7)))
    chars, lengths = format_g9(values)
    for value, row, n in zip(values, chars, lengths, strict=True):
        assert row[:n].tobytes() == ("%.9g" % value).encode(), value  # noqa: UP031 (printf)
        assert not row[n:].any()


@pytest.mark.parametrize("seed", [0, 1])
def test_random_tables_match_savetxt(seed):
    rng = np.random.default_rng(seed)
    n = 3000
    table = np.column_stack(
        [
            np.round(rng.uniform(-50, 50, (n, 3)), rng.integers(0, 9)),  # coordinates
            rng.random((n, 4)) * 10.0 ** rng.integers(-15, 15, (n, 4)),  # fields, densities
        ]
    )
    table[::97, 4] = 0.0
    table[::89, 0] = -0.0
    table[::83, 1] = rng.integers(-(10**9), 10**9, table[::83, 1].size) + 0.5  # ties
    assert csv_rows_g9(table, rows_per_block=700) == savetxt_text(table)


def test_probe_csv_header_and_rows_in_order():
    pts = np.array([[1.0, 2.0, 3.0], [-0.5, 0.0, 1e-7], [4.0, 5.0, 6.0]])
    cols = [np.array([1.0, 2.0, 3.0]) * k for k in (1, 2, 3, 4)]
    text = probe_csv_bytes(pts, cols).decode()
    lines = text.splitlines()
    assert lines[0] == ",".join(PROBE_CSV_COLUMNS)
    assert lines[2] == "-0.5,0,1e-07,2,4,6,8"
    assert probe_csv_bytes(np.zeros((0, 3)), [np.zeros(0)] * 4).decode() == lines[0] + "\n"


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


def test_output_mode_follows_the_umask(write_scenario, tmp_path):
    out = tmp_path / "out.csv"
    old = os.umask(0o022)
    try:
        assert_clean_exit(_csv_run(write_scenario, tmp_path, out), allowed=(0,))
    finally:
        os.umask(old)
    assert out.stat().st_mode & 0o777 == 0o644


def test_failed_rename_leaves_no_temporary_and_keeps_the_old_file(
    write_scenario, tmp_path, monkeypatch
):
    out = tmp_path / "out.csv"
    out.write_text("the previous result\n")

    def failing_replace(src, dst):
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(os, "replace", failing_replace)
    line = one_error_line(_csv_run(write_scenario, tmp_path, out))
    assert "out.csv" in line and "cannot be written" in line
    assert out.read_text() == "the previous result\n"
    assert _leftovers(tmp_path) == []


def test_disk_full_mid_write_leaves_nothing(write_scenario, tmp_path, monkeypatch):
    real_fdopen = os.fdopen
    monkeypatch.setattr(
        os, "fdopen", lambda fd, mode="r", *a, **k: _HalfWriter(real_fdopen(fd, mode, *a, **k))
    )
    out = tmp_path / "out.csv"
    line = one_error_line(_csv_run(write_scenario, tmp_path, out))
    assert "No space left" in line
    assert not out.exists() and _leftovers(tmp_path) == []


def test_interrupt_mid_write_leaves_nothing(write_scenario, tmp_path, monkeypatch):
    def interrupted(fd):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "fsync", interrupted)
    out = tmp_path / "out.csv"
    result = _csv_run(write_scenario, tmp_path, out)
    assert "Traceback" not in result.stderr
    assert not out.exists() and _leftovers(tmp_path) == []


def test_interrupt_is_not_reported_as_success(write_scenario, tmp_path, monkeypatch):
    def interrupted(fd):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "fsync", interrupted)
    result = _csv_run(write_scenario, tmp_path, tmp_path / "out.csv")
    assert result.exit_code != 0 and result.stderr.strip()


def test_scenario_is_never_overwritten(write_scenario, tmp_path):
    path = write_scenario(ISOTROPIC)
    before = path.read_bytes()
    (tmp_path / "sub").mkdir()
    os.symlink(path, tmp_path / "link.toml")
    os.link(path, tmp_path / "hard.toml")
    inp = tmp_path / "in.csv"
    inp.write_text("x_m,y_m,z_m\n1,0,0\n")
    aliases = [
        path,
        tmp_path / "sub" / ".." / path.name,
        tmp_path / "link.toml",
        tmp_path / "hard.toml",
    ]
    for target in aliases:
        line = one_error_line(run("probe", path, "--at", "1,0,0", "--csv", target))
        assert "overwrite" in line
    # ... nor the point file given as input.
    line = one_error_line(run("probe", path, "--points", inp, "--csv", inp))
    assert "overwrite" in line and inp.read_text() == "x_m,y_m,z_m\n1,0,0\n"
    assert path.read_bytes() == before
    assert _leftovers(tmp_path) == []


@pytest.mark.parametrize("where", ["under a file", "missing folder", "a folder"])
def test_unwritable_output_place(write_scenario, tmp_path, where):
    # CI runs as root, where chmod does not stop a write; a path under a regular file does.
    blocker = tmp_path / "plain.txt"
    blocker.write_text("not a folder\n")
    target = {
        "under a file": blocker / "out.csv",
        "missing folder": tmp_path / "nowhere" / "out.csv",
        "a folder": tmp_path,
    }[where]
    path = write_scenario(ISOTROPIC)
    before = sorted(p.name for p in tmp_path.iterdir())
    line = one_error_line(run("probe", path, "--at", "1,0,0", "--csv", target))
    assert str(target) in line
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    assert blocker.read_text() == "not a folder\n"


@pytest.mark.parametrize("command", ["assess", "map"])
def test_output_folder_under_a_regular_file(write_scenario, tmp_path, command):
    path = write_scenario(ISOTROPIC)
    blocker = tmp_path / "plain.txt"
    blocker.write_text("not a folder\n")
    before = sorted(p.name for p in tmp_path.iterdir())
    line = one_error_line(run(command, path, "--pixels", "5", "--out", blocker / "out"))
    assert "--out" in line or "plain.txt" in line
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    assert blocker.read_text() == "not a folder\n"
