"""Spatial average over a standing body: the scheme's points and their mean.

The scheme (fields/spatial_average.py): the composite midpoint rule, 20 points at the
centres of 20 equal segments of the vertical line; the number of points is our choice
(common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.fields import spatial_average as sa
from keepclear.fields.field import evaluate
from keepclear.fields.scenario import load_scenario

from .conftest import SCENARIOS


def test_points_are_twenty_midpoints_ten_centimetres_apart():
    pts = sa.line_points_m(np.array([1.0, -2.0, 1.7]), (0.0, 2.0))
    assert pts.shape == (20, 3)
    np.testing.assert_allclose(pts[:, 2], [0.05 + 0.1 * i for i in range(20)], atol=1e-12)
    assert np.all(pts[:, 0] == 1.0) and np.all(pts[:, 1] == -2.0)


def test_average_equals_the_mean_of_the_points_computed_independently():
    scenario = load_scenario(SCENARIOS / "plasma-bench.toml")
    place = np.array([1.5, 0.3, 1.7])
    own = np.array([[1.5, 0.3, 0.05 + 0.1 * i] for i in range(20)])  # built by hand
    expected = float(np.mean(evaluate(scenario, own).power_density_w_m2))
    values = evaluate(scenario, sa.line_points_m(place, (0.0, 2.0))).power_density_w_m2
    assert sa.spatial_average(values) == pytest.approx(expected, rel=1e-12)


def test_closed_form_for_an_isotropic_source_on_its_axis_line():
    # S(z) = P / (4 pi (d^2 + (z - h)^2)) for a point source at height h, distance d:
    # the midpoint rule over 20 points against the exact integral mean
    # (1 / (z1 - z0)) * P/(4 pi d) [atan((z1-h)/d) - atan((z0-h)/d)].
    from keepclear.antennas.isotropic import IsotropicSource

    p, d, h = 100.0, 2.0, 1.0
    z = sa.line_points_m(np.array([d, 0.0, 0.0]), (0.0, 2.0))[:, 2]
    s = p / (4 * np.pi * (d**2 + (z - h) ** 2))
    exact = p / (4 * np.pi * d) * (np.arctan(1.0 / d) - np.arctan(-1.0 / d)) / 2.0
    assert sa.spatial_average(s) == pytest.approx(exact, rel=1e-3)
    assert IsotropicSource  # the model this closed form describes


def test_which_limits_meet_the_average():
    assert sa.compared_with_average("icnirp-2020/general-public")
    assert sa.compared_with_average("fcc-1.1310/occupational")
    assert not sa.compared_with_average("icnirp-2020/occupational-local")
    assert not sa.compared_with_average("fda-1030.10/in-service")
    assert not sa.compared_with_average("iec-61000-4-3/level-2")
    assert not sa.compared_with_average("custom/router")
