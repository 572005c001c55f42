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


def test_rays_clear_of_the_plane_are_not_asked_and_the_rest_are():
    # A source 0.1 m in front of the cabinet side, its 0.16 m cube straddling the plane:
    # some corners' rays cross it from both sides; field points on the plane, a rounding
    # away from it, and well clear of it on both sides.  Only the rays whose end and every
    # corner lie on one side, clear of the plane, may skip the factor (it is 1 there), so
    # the answer is the one-corner-at-a-time maximum everywhere.
    scenario = load_scenario(SCENARIOS / "tabletop-box-room.toml")
    cabinet = next(r for r in scenario.reflectors if r.is_obstacle)
    f_hz = scenario.frequency_hz
    rng = np.random.default_rng(5)
    pts = _points(rng, 2000)
    on_plane = pts[:300].copy()
    on_plane[:, 1] = cabinet.point_m[1]
    nearly = pts[300:600].copy()
    nearly[:, 1] = cabinet.point_m[1] + rng.choice([-1e-12, 1e-12, -1e-9, 1e-9], 300)
    pts = np.vstack([on_plane, nearly, pts[600:]])
    axes = np.column_stack([cabinet.width_axis, cabinet.height_axis, cabinet.normal])
    for source, across in ((np.array([0.8, 0.8, 0.9]), True), (np.array([0.0, 0.0, 0.85]), False)):
        slow = np.zeros(pts.shape[0])
        for offset in diffraction.cube_offsets(0.16, axes):
            geo = cabinet._crossing(np.broadcast_to(source + offset, pts.shape), pts, f_hz)
            f = np.ones(pts.shape[0])
            if geo.crossing.any():
                f[geo.crossing] = diffraction.obstacle_factor(geo.nu[:, geo.crossing])
            slow = np.maximum(slow, f)
        fast = cabinet.obstacle_factor(source, pts, f_hz, source_extent_m=0.16)
        if across:  # a corner's ray on each side of the plane: one never crosses, no credit
            assert np.all(slow >= 1.0)
        else:
            assert np.any(slow < 0.5) and np.any(slow == 1.0)
        np.testing.assert_allclose(fast, slow, rtol=0, atol=1e-12)
