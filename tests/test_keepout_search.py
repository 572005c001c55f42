"""The keep-out search leans to the safe side: it is never inside a brute-force grid answer.

The contract defines the keep-out distance as the radius of the smallest sphere about the
first source that holds every point at or above the limit.  A dense grid of points gives a
lower bound of that radius (it can only miss exceedances); the search must never report less.
These checks compare against the scenario's own field, so they test the search, not the models.
"""

from __future__ import annotations

import copy
import math

import hypothesis.strategies as st
import numpy as np
import pytest
from hypothesis import assume, given, note, settings

from keepclear.fields import limits as limits_mod
from keepclear.fields.field import evaluate
from keepclear.fields.keepout import PLANE_STANDOFF_M, RADIUS_TOLERANCE, keepout_distances
from keepclear.fields.limits import get_limit
from keepclear.fields.scenario import load_scenario

from ._hypothesis import examples
from ._property_strategies import (
    EXPECTED_PLAUSIBILITY_WARNING,
    FAST_DIRECTIONS,
    KEEPOUT_KINDS,
    KEEPOUT_MODES,
    KEEPOUT_POWER_W,
    ORDER_KINDS,
    _at_most,
    _limits_at,
    build,
    documents,
)


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
    # the grid's lowest plane is the search's own layer over the floor (PLANE_STANDOFF_M,
    # 1 mm): at grazing the density falls only 0.05 % a millimetre along the floor and
    # rises as fast towards it, so a plane nearer the floor (0.5 mm) reaches about a
    # millimetre farther, below the model's resolution and no test of the search
    brute = grid_radius(
        scenario, result.limit_id, [PLANE_STANDOFF_M, 0.01, 0.1, 0.5, 1.0], 1.3 * result.distance_m
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


# ------------------------------------------------------------
# Physical properties over random scenarios (hypothesis). The laws and their sources
# are listed in tests/_property_strategies.py.


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(5, long=80))
@given(
    doc=documents(KEEPOUT_KINDS, 2, max_power_w=KEEPOUT_POWER_W, modes=KEEPOUT_MODES),
    k=st.floats(1.05, 10.0),
)
def test_keepout_grows_with_power(doc, k):
    base = build(doc)
    assume(base is not None)
    louder = copy.deepcopy(doc)
    for s in louder["source"]:
        s["power_w"] *= k
    ids = ["icnirp-2020/general-public", "sc6-2015/controlled"]
    r0 = keepout_distances(base, ids, n_directions=FAST_DIRECTIONS)
    r1 = keepout_distances(build(louder), ids, n_directions=FAST_DIRECTIONS)
    for a, b in zip(r0, r1, strict=True):
        note(f"{a.limit_id}: {a.distance_m} -> {b.distance_m}")
        assert b.distance_m >= a.distance_m
        assert b.distance_with_uncertainty_m >= a.distance_with_uncertainty_m
        assert b.screening_distance_m >= a.screening_distance_m


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(7))
@given(
    doc=documents(ORDER_KINDS, 2, max_power_w=KEEPOUT_POWER_W, modes=KEEPOUT_MODES),
    frequency_hz=st.sampled_from([9.15e8, 2.45e9, 5.8e9]),
)
def test_keepout_shrinks_as_the_limit_rises(doc, frequency_hz):
    doc = {**doc, "frequency_hz": frequency_hz}
    scenario = build(doc)
    assume(scenario is not None)
    ids = _limits_at(frequency_hz)
    values = {i: get_limit(i).at(frequency_hz) for i in ids}
    results = {
        r.limit_id: r for r in keepout_distances(scenario, ids, n_directions=FAST_DIRECTIONS)
    }
    compared = 0
    for a in ids:
        for b in ids:
            if a != b and _at_most(values[a], values[b]):
                compared += 1
                # A stricter (lower) limit is reached wherever a laxer one is: never closer.
                assert results[a].distance_m >= results[b].distance_m, (a, b)
    assert compared > 0


# ------------------------------------------------------ screening in free space
@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(5, long=80))
@given(
    doc=documents(KEEPOUT_KINDS, max_sources=2, reflector=False, max_power_w=KEEPOUT_POWER_W),
    gain_boost=st.floats(0.0, 20.0),
)
def test_screening_is_never_inside_the_far_field_keepout(doc, gain_boost):
    for s in doc["source"]:
        if s["antenna"] == "isotropic":
            s["gain_dbi"] = min(60.0, s["gain_dbi"] + gain_boost)
    scenario = build(doc)
    assume(scenario is not None)
    centre = scenario.centre_m
    far = max(
        float(np.linalg.norm(s.position_m - centre)) + s.radiator.far_field_distance_m
        for s in scenario.sources
    )
    offset = max(float(np.linalg.norm(s.position_m - centre)) for s in scenario.sources)
    k = 2 * math.pi / scenario.wavelength_m
    ids = ["icnirp-2020/general-public", "sc6-2015/uncontrolled", "fda-1030.10/in-service"]
    checked = 0
    for r in keepout_distances(scenario, ids, n_directions=FAST_DIRECTIONS):
        note(
            f"{r.limit_id}: keep-out {r.distance_m:.6g} m, screening "
            f"{r.screening_distance_m:.6g} m, far {far:.4g} m"
        )
        if r.distance_m > far:
            checked += 1
            # Two allowances, both named:
            # * the search reports the outer end of a bracket 1e-4 wide (RADIUS_TOLERANCE);
            #   for an isotropic source both answers describe the same sphere;
            # * the far field is a limit, not a bound: the contract's density
            #   max(|E|^2/eta0, eta0 |H|^2) keeps the induction term of H, |H|^2 = far field
            #   (1 + 1/(k r)^2) for a short dipole (Balanis, Antenna Theory, 4th ed., eq.
            #   (4-10a)), 1 % above P G / (4 pi r^2) at 10 lambda / 2 pi; and at 2 D^2 /
            #   lambda the pattern still differs from its far-field form (the pi/8 phase
            #   criterion, Balanis sec. 2.2.4, from memory) by up to 0.1 dB for the wires
            #   here (measured: 0.7 % in distance for a 0.75 lambda monopole).  Both are
            #   allowed for; a larger excess fails.  The strict bound is
            #   test_screening_of_a_quarter_wave_dipole_beyond_its_far_field_distance.
            nearest = max(r.distance_m - offset, 1e-9)
            induction = math.sqrt(1 + 1 / (k * nearest) ** 2)
            pattern = 10 ** (0.1 / 20)  # 0.1 dB in density is 0.05 dB in distance
            bound = r.screening_distance_m * induction * pattern * (1 + 2 * RADIUS_TOLERANCE)
            assert bound >= r.distance_m
    assume(checked > 0)


@EXPECTED_PLAUSIBILITY_WARNING
@pytest.mark.xfail(
    strict=True,
    reason="fields/keepout.py screening_distance_m: OET 65's far-field formula is not an upper "
    "bound just beyond the far-field distance: eta0 |H|^2 of a wire exceeds P G / (4 pi r^2) "
    "by 1/(k r)^2 (1 % at 10 lambda / 2 pi), so the screening radius is up to 0.5 % short",
)
def test_screening_of_a_quarter_wave_dipole_beyond_its_far_field_distance():
    # Found by test_screening_is_never_inside_the_far_field_keepout without the allowance.
    doc = {
        "source": [
            {"antenna": "dipole", "power_w": 2.0, "axis": [0.0, 0.0, 1.0], "length_m": 0.0306}
        ],
        "exposure": {"limits": ["sc6-2015/uncontrolled"]},
    }
    scenario = build(doc)
    (r,) = keepout_distances(scenario)
    assert r.distance_m > scenario.sources[0].radiator.far_field_distance_m
    assert r.screening_distance_m * (1 + 2 * RADIUS_TOLERANCE) >= r.distance_m
