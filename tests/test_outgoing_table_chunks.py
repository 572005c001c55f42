"""The outgoing-wave table's fast interpolation against the straightforward one.

``OutgoingExpansion._interpolate`` forms every point's stencil once, then gathers the
table's rows in cache-sized chunks and sums them with real weights on the complex table
read as pairs of reals.  The straightforward form below (complex weights, every point in
one gather, the two products as written in the class docstring) is the reference: the
same sums term by term, so they agree to rounding (1e-12 of the largest value here), and
the keep-out distances of the scenarios whose search spends most of its time in the
table agree to the search's own bracket (RADIUS_TOLERANCE, relative).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from keepclear.antennas import moment
from keepclear.antennas.moment import OutgoingExpansion, _lagrange_stencil
from keepclear.fields.field import radiating_terms
from keepclear.fields.keepout import RADIUS_TOLERANCE, keepout_distances
from keepclear.fields.scenario import load_scenario

SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"


def _straightforward(self: OutgoingExpansion, rel: np.ndarray, s_m: np.ndarray) -> np.ndarray:
    """a(u, s) by the 4 x 4 Lagrange stencil and the Chebyshev sum, complex, all at once."""
    m, pad, p, q = self._m, self._pad, self.STENCIL, self._q
    norm = np.linalg.norm(rel, axis=1)
    theta = np.arccos(np.clip(rel[:, 2] / norm, -1.0, 1.0))
    phi = np.arctan2(rel[:, 1], rel[:, 0])
    h = 2.0 * np.pi / m
    i_t, w_t = _lagrange_stencil(theta / h, p)
    i_p, w_p = _lagrange_stencil(phi / h, p)
    rows = (i_t + pad)[:, :, None] * m + (i_p % m)[:, None, :]
    vals = self._grid[rows.reshape(-1)].reshape(-1, p * p, q, 6)
    w = (w_t[:, :, None] * w_p[:, None, :]).reshape(-1, p * p)
    a_l = np.einsum("nk,nkqc->nqc", w.astype(complex), vals)
    x = np.clip(2.0 * s_m / self._s_max - 1.0, -1.0, 1.0)
    cheb = np.cos(np.outer(np.arccos(x), np.arange(q)))
    return np.einsum("nq,nqc->nc", cheb.astype(complex), a_l)


@pytest.fixture(scope="module")
def table() -> OutgoingExpansion:
    scenario = load_scenario(SCENARIOS / "desk-box-source.toml")
    radiator = radiating_terms(scenario)[0].radiator
    table = radiator.expansion
    assert isinstance(table, moment.OutgoingExpansion) and table._grid is not None
    return table


def test_chunked_interpolation_equals_the_straightforward_sum(table):
    rng = np.random.default_rng(7)
    n = 2500  # several chunks and a remainder
    u = rng.normal(size=(n, 3))
    u /= np.linalg.norm(u, axis=1)[:, None]
    r = table.inner_radius_m * rng.uniform(1.0, 40.0, n)
    rel = u * r[:, None]
    s = 1.0 / r
    s[:5] = 0.0  # the far field is the table at s = 0
    fast = table._interpolate(rel, s)
    slow = _straightforward(table, rel, s)
    assert fast.shape == (n, 6)
    scale = np.max(np.abs(slow))
    assert np.max(np.abs(fast - slow)) < 1e-12 * scale


@pytest.mark.parametrize(
    "name", ["desk-box-source", "screened-waveguide-bench", "tabletop-box-room"]
)
def test_keepout_distances_unchanged_by_the_fast_table(name, monkeypatch):
    # far fewer rays than the command's 400 (the test's time): the same rays both ways
    fast = keepout_distances(load_scenario(SCENARIOS / f"{name}.toml"), n_directions=60)
    monkeypatch.setattr(OutgoingExpansion, "_interpolate", _straightforward)
    slow = keepout_distances(load_scenario(SCENARIOS / f"{name}.toml"), n_directions=60)
    assert [r.limit_id for r in fast] == [r.limit_id for r in slow]
    for a, b in zip(fast, slow, strict=True):
        assert a.distance_m > 0
        assert a.distance_m == pytest.approx(b.distance_m, rel=RADIUS_TOLERANCE)
        assert a.distance_with_uncertainty_m == pytest.approx(
            b.distance_with_uncertainty_m, rel=RADIUS_TOLERANCE
        )
