"""The keep-out search leans to the safe side: it is never inside a brute-force grid answer.

The contract defines the keep-out distance as the radius of the smallest sphere about the
first source that holds every point at or above the limit.  A dense grid of points gives a
lower bound of that radius (it can only miss exceedances); the search must never report less.
These checks compare against the scenario's own field, so they test the search, not the models.
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.fields import limits as limits_mod
from keepclear.fields.field import evaluate
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario


def grid_radius(scenario, limit_id, planes_z, half_width_m, n=241, scale=1.0):
    """Largest distance from the centre of any grid point whose quotient (times scale) >= 1."""
    value = limits_mod.get_limit(limit_id).at(scenario.frequency_hz)
    c = scenario.centre_m
    best = 0.0
    axis = np.linspace(-half_width_m, half_width_m, n)
    for z in planes_z:
        x, y = np.meshgrid(c[0] + axis, c[1] + axis)
        pts = np.column_stack([x.ravel(), y.ravel(), np.full(x.size, z)])
        res = evaluate(scenario, pts)
        q = limits_mod.quotient(value, res.power_density_w_m2, res.e_v_m, res.h_a_m) * scale
        if (q >= 1).any():
            best = max(best, float(np.linalg.norm(pts[q >= 1] - c, axis=1).max()))
    return best


def test_outermost_crossing_not_the_first(write_scenario):
    # A weak source at the centre and a strong one 3 m away on +x: along +x the density
    # falls below the limit, rises again near the second source and falls once more.  The
    # keep-out must reach past the second source: 3 m + sqrt(P/(4 pi S)) (OET 65 eq. (3)
    # about the second source) is a lower bound.
    path = write_scenario(
        """
        [[source]]
        antenna = "isotropic"
        power_w = 10.0
        position_m = [0.0, 0.0, 1.0]
        [[source]]
        antenna = "isotropic"
        power_w = 1000.0
        position_m = [3.0, 0.0, 1.0]
        """
    )
    scenario = load_scenario(path)
    result = keepout_distances(scenario)[0]
    lower = 3.0 + np.sqrt(1000.0 / (4 * np.pi * 10.0))
    assert result.distance_m >= lower
    assert result.direction[0] > 0.9
    # and not absurdly beyond it: the two sources' combined field adds a little only
    assert result.distance_m < lower * 1.1


@pytest.mark.parametrize("material", ["metal", "concrete"])
def test_grazing_exceedance_along_a_floor_is_found(write_scenario, material):
    # A vertical half-wave dipole 0.5 m over a floor: in envelope mode the reflection adds most at
    # grazing incidence, so the exceedance reaches farthest along the floor itself, in a thin
    # layer between the rays of any direction lattice.
    path = write_scenario(
        f"""
        [[source]]
        antenna = "dipole"
        power_w = 300.0
        position_m = [0.0, 0.0, 0.5]
        axis = [0.0, 0.0, 1.0]
        [[reflector]]
        point_m = [0.0, 0.0, 0.0]
        normal = [0.0, 0.0, 1.0]
        material = "{material}"
        """
    )
    scenario = load_scenario(path)
    result = keepout_distances(scenario)[0]
    brute = grid_radius(
        scenario, result.limit_id, [0.0005, 0.01, 0.1, 0.5, 1.0], 1.3 * result.distance_m
    )
    assert brute > 0
    assert result.distance_m >= brute
    # The grid step bounds how much farther the true answer can be than the grid's.
    assert result.distance_m <= brute + 2 * 1.3 * result.distance_m / 240 + 0.02 * brute


def test_uncertainty_margin_never_shrinks_the_answer(write_scenario):
    path = write_scenario(
        """
        [[source]]
        antenna = "open-waveguide"
        waveguide = "WR-340"
        power_w = 100.0
        position_m = [0.0, 0.0, 1.0]
        boresight = [1.0, 0.0, 0.0]
        polarization = [0.0, 0.0, 1.0]
        """
    )
    scenario = load_scenario(path)
    for result in keepout_distances(scenario):
        assert result.uncertainty_db > 0
        assert result.distance_with_uncertainty_m > result.distance_m
        assert result.recommended_distance_m == result.distance_with_uncertainty_m
        # in free space beyond the far field the exceedance scales as sqrt(margin) (OET 65
        # eq. (3)); closer in it need not, so only the direction of the change is asserted
        assert result.direction[0] > 0.9
