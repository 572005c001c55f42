"""The bulk CSV writer gives the same text as numpy's savetxt with "%.9g", byte for byte.

Reference: ``numpy.savetxt(..., delimiter=",", fmt="%.9g")`` (the writer this replaces) and
Python's ``%`` operator, which follows C's printf for ``%g`` (C11, 7.21.6.1: precision P =
9 significant digits, style e if the exponent X < -4 or X >= P, else style f, trailing zeros
and a bare point removed; correctly rounded).
"""

from __future__ import annotations

import io

import numpy as np
import pytest

from keepclear.fields.outputs import PROBE_CSV_COLUMNS, csv_rows_g9, format_g9, probe_csv_bytes


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
