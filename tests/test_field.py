"""Fields of the combined scenario: laws over random scenarios, singular points, many sources."""

from __future__ import annotations

import copy
import math
import textwrap

import hypothesis.strategies as st
import numpy as np
import pytest
from hypothesis import assume, given, note, settings

from keepclear.antennas.base import ETA0_OHM
from keepclear.fields.field import evaluate

from ._cli import assert_clean_exit, run, strict_json, validate
from ._edge_cases import DIPOLE, MONOPOLE, probe
from ._hypothesis import examples
from ._property_strategies import (
    EXPECTED_PLAUSIBILITY_WARNING,
    KINDS,
    WAVELENGTH_M,
    _close,
    build,
    documents,
    field_points,
    moved,
    poynting_flux_w,
    rotations,
    source_tables,
)
from .conftest import ISOTROPIC

# ------------------------------------------------------------
# Physical properties over random scenarios (hypothesis). The laws and their sources
# are listed in tests/_property_strategies.py.


# ------------------------------------------------------------ linear in power
@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(30))
@given(
    doc=documents(max_sources=3), k=st.floats(1e-3, 1e3), c=st.floats(0.05, 1.0), pts=field_points()
)
def test_density_is_linear_in_power_and_duty_cycle(doc, k, c, pts):
    base = build(doc)
    assume(base is not None)
    louder = copy.deepcopy(doc)
    quieter_duty = copy.deepcopy(doc)
    for s, t in zip(louder["source"], quieter_duty["source"], strict=True):
        s["power_w"] *= k
        t["duty_cycle"] *= c
    r0, r1, r2 = (
        evaluate(base, pts),
        evaluate(build(louder), pts),
        evaluate(build(quieter_duty), pts),
    )
    assert _close(r1.power_density_w_m2, k * r0.power_density_w_m2)
    assert _close(r1.peak_power_density_w_m2, k * r0.peak_power_density_w_m2)
    assert _close(r1.e_v_m, math.sqrt(k) * r0.e_v_m)
    assert _close(r1.h_a_m, math.sqrt(k) * r0.h_a_m)
    # Duty cycle: the time average scales, the peak (while radiating) does not.
    assert _close(r2.power_density_w_m2, c * r0.power_density_w_m2)
    assert _close(r2.peak_power_density_w_m2, r0.peak_power_density_w_m2)
    # The contract's plane-wave equivalent holds for the averaged RMS values.
    s_pw = np.maximum(r0.e_v_m**2 / ETA0_OHM, ETA0_OHM * r0.h_a_m**2)
    assert _close(r0.power_density_w_m2, s_pw)


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(25))
@given(
    doc=documents(max_sources=2),
    rotation=rotations(),
    shift=st.tuples(*(st.floats(-5.0, 5.0) for _ in range(3))).map(np.array),
    pts=field_points(),
)
def test_moving_the_scenario_moves_its_fields(doc, rotation, shift, pts):
    base = build(doc)
    assume(base is not None)
    other = build(moved(doc, rotation, shift))
    assert other is not None, "a rigidly moved valid scenario must stay valid"
    # Leave out the two sets of measure zero where a model is discontinuous or a direction is
    # undefined: a monopole's ground plane (the field is zero below it, so rounding of the
    # rotated point decides), and a reference point itself (the ray direction is undefined).
    keep = np.ones(len(pts), dtype=bool)
    for s in base.sources:
        local = s.radiator.placement.to_local(pts)
        keep &= np.linalg.norm(local, axis=1) > 1e-6
        if s.antenna == "monopole":
            keep &= np.abs(local[:, 2]) > 1e-9
    assume(keep.any())
    pts = pts[keep]
    pts_moved = pts @ rotation.T + shift
    r0, r1 = evaluate(base, pts), evaluate(other, pts_moved)
    for name in ("e_v_m", "h_a_m", "power_density_w_m2", "peak_power_density_w_m2"):
        assert _close(getattr(r1, name), getattr(r0, name), rel=1e-7), name
    # The vector fields of every source rotate with the scenario: E'(R p + t) = R E(p).
    for s0, s1 in zip(base.sources, other.sources, strict=True):
        e0, h0 = s0.radiator.fields(pts)
        e1, h1 = s1.radiator.fields(pts_moved)
        for v0, v1 in ((e0, e1), (h0, h1)):
            expected = v0 @ rotation.T
            scale = np.linalg.norm(np.abs(v0), axis=1, keepdims=True)
            assert np.all(np.abs(v1 - expected) <= 1e-7 * scale + 1e-300)


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(16))
@given(
    kind=st.sampled_from(KINDS),
    data=st.data(),
)
def test_near_field_carries_the_power_through_any_sphere(kind, data):
    table = data.draw(source_tables(kind), label="source")
    if kind == "isotropic":
        table["gain_dbi"] = 0.0  # only 0 dBi conserves power (a screening gain does not)
    scenario = build({"source": [table]})
    assume(scenario is not None)
    radiator = scenario.sources[0].radiator
    reach = max(radiator.largest_dimension_m, 0.5 * WAVELENGTH_M)
    if kind in ("open-waveguide", "horn"):
        reach = max(reach, radiator.far_field_distance_m)  # aperture models: radiating zone
    radius = reach * data.draw(st.floats(1.1, 4.0), label="radius / reach")
    dense = 2 if kind == "horn" else 1
    flux = poynting_flux_w(radiator, radius, 24 * dense, 48 * dense)
    note(f"{kind}: r = {radius:.4g} m, flux = {flux:.6g} W of {radiator.power_w:.6g} W")
    # DEVELOPERS.md: power conservation over the sphere within 1 %.  An open guide or horn
    # with its rim term radiates power_ratio * power_w: the rim comes on top of the
    # aperture's own scaling, on the safe side (antennas/walls.py, normalize="aperture").
    expected = radiator.power_w * float(getattr(radiator, "power_ratio", 1.0))
    assert flux == pytest.approx(expected, rel=0.01)


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


def test_isotropic_at_its_source_point_and_far_away(write_scenario):
    path = write_scenario(ISOTROPIC)
    near, far = probe(path, (0.0, 0.0, 0.0), (1e5, 0.0, 0.0))
    assert near["power_density_w_m2"] > 0
    # OET 65 eq. (3): S = P / (4 pi R^2), P = 100 W, R = 1e5 m.
    assert far["power_density_w_m2"] == pytest.approx(100 / (4 * math.pi * 1e10), rel=1e-9)


def test_dipole_on_its_wire_and_far_away(write_scenario):
    path = write_scenario(DIPOLE)
    half = 0.0306
    on_wire = [(0.0, 0.0, 1.0 + z) for z in (0.0, 0.01, -0.01, half, -half, half / 2)]
    beside = [(1e-9, 0.0, 1.0), (0.0, 1e-12, 1.0 + half), (0.0, 0.0, 1.0 + half + 1e-12)]
    points = probe(path, *on_wire, *beside, (1e5, 0.0, 1.0), (0.0, 0.0, 1e5))
    for p in points:
        assert p["power_density_w_m2"] >= 0  # finite is checked by the strict JSON parser
    broadside = points[-2]
    # Balanis, Antenna Theory, 4th ed., eq. (4-91): half-wave dipole D0 = 1.643 (lossless,
    # so G = D); S = P G / (4 pi r^2) at r = 1e5 m broadside.  L = 0.0612 m is 0.4998
    # wavelength at 2.45 GHz, within 0.1 % of the tabulated half-wave value.
    s_far = 100 * 1.643 / (4 * math.pi * 1e10)
    assert broadside["power_density_w_m2"] == pytest.approx(s_far, rel=2e-3)


def test_dipole_far_along_its_axis(write_scenario):
    path = write_scenario(DIPOLE)
    broadside, end_fire, off_axis = probe(path, (1e5, 0.0, 1.0), (0.0, 0.0, 1e5), (0.1, 0.0, 1e5))
    # Along the wire axis the far field of a thin dipole vanishes (Balanis eq. (4-64) pattern
    # sin(theta) factor); what is left is the 1/r^2 induction field, 1e-13 of broadside here.
    assert end_fire["power_density_w_m2"] < 1e-6 * broadside["power_density_w_m2"]
    assert end_fire["power_density_w_m2"] <= 10 * off_axis["power_density_w_m2"]


def test_monopole_base_tip_ground_plane_and_below(write_scenario):
    path = write_scenario(MONOPOLE)
    points = probe(
        path,
        (0.0, 0.0, 1.0),  # base (feed)
        (0.0, 0.0, 1.0306),  # tip
        (0.0, 0.0, 1.015),  # on the wire
        (0.1, 0.0, 1.0),  # on the ground plane
        (0.0, 0.0, 0.5),  # below the ground plane: no field there
        (1e5, 0.0, 1.0 + 1e-9),  # far away along the ground
    )
    assert points[4]["power_density_w_m2"] == 0.0
    assert all(p["power_density_w_m2"] >= 0 for p in points)


def test_fifty_sources(write_scenario):
    rng = np.random.default_rng(20240607)
    first = [1.0, 2.0, 0.5]
    positions = [first] + (np.array(first) + rng.uniform(-0.4, 0.4, size=(49, 3))).tolist()
    blocks = [
        textwrap.dedent(
            f"""
            [[source]]
            id = "s{i}"
            antenna = "isotropic"
            power_w = {1.0 + 0.1 * i:.1f}
            duty_cycle = 0.5
            position_m = [{x!r}, {y!r}, {z!r}]
            """
        )
        for i, (x, y, z) in enumerate(positions)
    ]
    limits = '[exposure]\nlimits = ["sc6-2015/uncontrolled"]\n'
    many = write_scenario("".join(blocks) + limits, name="many.toml")
    single = write_scenario(blocks[0] + limits, name="single.toml")
    result = run("keepout", many, "--json")
    assert_clean_exit(result, allowed=(0,))
    data_many = strict_json(result.stdout)
    data_one = strict_json(run("keepout", single, "--json").stdout)
    validate("keepout", data_many)
    assert data_many["centre_m"] == first
    expected_w = sum(0.5 * (1.0 + 0.1 * i) for i in range(50))
    assert data_many["average_power_w"] == pytest.approx(expected_w, rel=1e-12)
    (k_many,), (k_one,) = data_many["keepout"], data_one["keepout"]
    # Sources add as power (not phase-locked): more sources never give a smaller sphere.
    assert k_many["distance_m"] >= k_one["distance_m"] > 0
    # Every source exceeds 5.42 W/m^2 within a few cm of itself (S = P/(4 pi r^2), OET 65
    # eq. (3)), so the sphere about the first one must reach past the farthest source.
    offsets = np.linalg.norm(np.array(positions) - np.array(first), axis=1)
    assert k_many["distance_m"] >= offsets.max()
    # Points along the way: 50 sources probe finite everywhere, also on the sources.
    points = probe(many, *positions[:5], (1e5, 0.0, 0.0))
    assert all(p["power_density_w_m2"] > 0 for p in points)


# ------------------------------------------------------------ isotropic polarisation
@pytest.mark.parametrize("polarization", [[0.0, 0.0, 1.0], [1.0, 0.0, 1.0], [0.0, -2.0, 0.0]])
def test_isotropic_polarization_is_its_e_direction(write_scenario, polarization):
    # README scenario reference: `polarization` of an isotropic source is its E direction
    # (made transverse to the ray).  A vertical one must be accepted: a point source has no
    # boresight it could be parallel to.
    from keepclear.fields.scenario import load_scenario

    path = write_scenario(ISOTROPIC + f"polarization = {polarization!r}\n")
    radiator = load_scenario(path).sources[0].radiator
    pol = np.array(polarization) / np.linalg.norm(polarization)
    ray = np.cross(pol, [0.3, 0.4, 0.5])  # any direction across the polarisation
    ray /= np.linalg.norm(ray)
    e, _ = radiator.fields(2.0 * ray[None, :])
    direction = np.abs(e[0]) / np.linalg.norm(np.abs(e[0]))
    np.testing.assert_allclose(direction, np.abs(pol), atol=1e-12)


def test_row_norms_are_the_euclidean_lengths_of_real_and_complex_rows():
    # |v| = sqrt(sum |v_k|^2), the Euclidean length (a definition; common practice, no
    # source): the written-out sum equals numpy's norm to the last bits.
    from keepclear.antennas.base import row_norms

    rng = np.random.default_rng(5)
    real = rng.normal(size=(500, 3)) * 10.0 ** rng.uniform(-9, 3, (500, 1))
    cplx = real + 1j * rng.normal(size=(500, 3))
    np.testing.assert_allclose(row_norms(real), np.linalg.norm(real, axis=1), rtol=1e-15)
    np.testing.assert_allclose(row_norms(cplx), np.linalg.norm(cplx, axis=1), rtol=1e-15)
    assert row_norms(np.zeros((2, 3))).tolist() == [0.0, 0.0]  # exact by construction
