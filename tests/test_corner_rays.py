"""A shield's and a metal plate's factor for an extended source: all corners at once.

Both take, per field point, the largest factor over the rays from the eight corners of
the source's cube (``source_extent_m``).  They evaluate the eight rays of every point in
one call; the straightforward form, one call per corner and the running maximum, is the
reference here.  The factor is computed ray by ray, so the two agree to rounding (1e-12).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from keepclear.fields import diffraction
from keepclear.fields.scenario import load_scenario

SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"


def _points(rng: np.random.Generator, n: int = 3000) -> np.ndarray:
    # around the bench and the table: in front of, beside and behind the sheets
    return rng.uniform([-2.0, -2.0, 0.05], [3.0, 3.0, 2.5], size=(n, 3))


@pytest.mark.parametrize("extent_m", [0.0, 0.16])
def test_shield_corners_at_once_equal_one_corner_at_a_time(extent_m):
    scenario = load_scenario(SCENARIOS / "screened-waveguide-bench.toml")
    shield = scenario.shields[0]
    source = np.array([0.0, 0.0, 1.0])
    pts = _points(np.random.default_rng(3))
    axes = np.column_stack([shield.width_axis, shield.height_axis, shield.normal])
    starts = np.broadcast_to(source, pts.shape)
    slow = np.zeros(pts.shape[0])
    for offset in diffraction.cube_offsets(extent_m, axes):
        slow = np.maximum(slow, shield._factor_from(starts + offset, pts))
    fast = shield.amplitude_factor(source, pts, source_extent_m=extent_m)
    assert np.any(slow < 0.5) and np.any(slow == 1.0)  # shadowed and clear rays both tried
    np.testing.assert_allclose(fast, slow, rtol=0, atol=1e-12)


@pytest.mark.parametrize("extent_m", [0.0, 0.16])
def test_plate_obstacle_corners_at_once_equal_one_corner_at_a_time(extent_m):
    scenario = load_scenario(SCENARIOS / "tabletop-box-room.toml")
    cabinet = next(r for r in scenario.reflectors if r.is_obstacle)
    source = np.array([0.0, 0.0, 0.85])
    f_hz = scenario.frequency_hz
    pts = _points(np.random.default_rng(4))
    axes = np.column_stack([cabinet.width_axis, cabinet.height_axis, cabinet.normal])
    slow = np.zeros(pts.shape[0])
    for offset in diffraction.cube_offsets(extent_m, axes):
        geo = cabinet._crossing(np.broadcast_to(source + offset, pts.shape), pts, f_hz)
        f = np.ones(pts.shape[0])
        if geo.crossing.any():
            f[geo.crossing] = diffraction.obstacle_factor(geo.nu[:, geo.crossing])
        slow = np.maximum(slow, f)
    fast = cabinet.obstacle_factor(source, pts, f_hz, source_extent_m=extent_m)
    assert np.any(slow < 0.5) and np.any(slow == 1.0)
    np.testing.assert_allclose(fast, slow, rtol=0, atol=1e-12)
