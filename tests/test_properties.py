"""Physical properties over random scenarios (hypothesis).

Each property is a law the models must obey whatever the scenario, so a counter-example is a
bug, not a tolerance question:

* power density is linear in the source power and in the duty cycle (fields add as power,
  OET 65 sec. 2 time averaging);
* the keep-out distance grows with power and shrinks as the limit rises (the quotient is
  monotone in both; ICNIRP 2020 reference levels are compared as ratios);
* moving a whole scenario rigidly moves its fields: |E|, |H| and S are invariant at the moved
  points and the vector fields rotate with it (Maxwell's equations are invariant under
  rotations and translations);
* the TE10 aperture pattern is symmetric in its principal planes (the aperture field is even
  in x and y; Balanis, *Antenna Theory*, 4th ed., sec. 12.5 on rectangular apertures with
  the TE10 distribution; section from memory);
* the near field of every antenna carries its power through any closed sphere (Poynting's
  theorem for time-harmonic fields in a lossless medium: the flux of Re(E x H*) is the same
  through every surface enclosing the source; Balanis, *Antenna Theory*, 4th ed., sec. 2.3,
  radiated power from the time-average Poynting vector, with RMS phasors the 1/2 drops;
  section from memory);
* in free space the screening estimate P G / (4 pi S) is never inside the computed keep-out
  sphere once that sphere is beyond the far-field distance (OET 65 eq. (3) is the far-field
  limit of the model), allowing only the named near-field terms that survive there (an xfail
  test keeps the strict form, which fails by up to 0.7 % for wires);
* the reflection envelope is never below the coherent sum (|a| + |b| >= |a + b|);
* adding a shield never raises a field (envelope mode; in coherent mode a sheet over one
  reflected ray may fill a null), and a shield on the far side of a reflector changes
  nothing in front of it (the credit follows the real path via the reflection point).

Run longer with ``KEEPCLEAR_HYPOTHESIS_PROFILE=long`` (see tests/_hypothesis.py).
"""

from __future__ import annotations

import copy
import importlib
import math
import warnings

import hypothesis.strategies as st
import numpy as np
import pytest
from hypothesis import assume, given, note, settings

from keepclear.antennas.base import C_M_S, ETA0_OHM
from keepclear.fields.errors import InputError
from keepclear.fields.field import evaluate
from keepclear.fields.keepout import RADIUS_TOLERANCE, keepout_distances
from keepclear.fields.limits import LIMIT_IDS, get_limit
from keepclear.fields.scenario import scenario_from_document

from ._hypothesis import PROFILE, examples

# Limit ids are drawn from every id, the oven-leakage product limits included, for scenarios
# without an enclosure: the plausibility warning that this draws is expected here.
pytestmark = pytest.mark.filterwarnings("ignore::keepclear.fields.plausibility.PlausibilityWarning")


def _available(module: str, name: str) -> bool:
    """Whether ``module`` defines ``name`` (a model still being written counts as absent)."""
    try:
        return hasattr(importlib.import_module(module), name)
    except ImportError:
        return False


HAS_APERTURE = _available("keepclear.antennas.aperture", "OpenWaveguide")
HAS_HORN = _available("keepclear.antennas.horn", "PyramidalHorn")
HAS_REFLECTION = _available("keepclear.fields.reflection", "reflector_from_table")
HAS_SHIELD = _available("keepclear.fields.shield", "shield_from_table")
KINDS = ["isotropic", "dipole", "monopole"]
KINDS += ["open-waveguide"] if HAS_APERTURE else []
KINDS += ["horn"] if HAS_HORN else []
#: Kinds, power and reflection modes for the keep-out properties.  A coherent-reflection
#: search steps a sixteenth of a wavelength out to the keep-out radius, and the limit-order
#: property searches every limit at once, so CI keeps those to 100 W over envelope
#: reflections and leaves the apertures out of the limit-order property; the long profile
#: draws every kind up to 1 kW, coherent reflections too.
KEEPOUT_KINDS = tuple(KINDS)
ORDER_KINDS = tuple(KINDS) if PROFILE == "long" else ("isotropic", "dipole", "monopole")
KEEPOUT_POWER_W = 1000.0 if PROFILE == "long" else 100.0
KEEPOUT_MODES = ("envelope", "coherent") if PROFILE == "long" else ("envelope",)

F_HZ = 2.45e9
WAVELENGTH_M = C_M_S / F_HZ

# ------------------------------------------------------------------ strategies
unit = st.floats(-1.0, 1.0)


@st.composite
def directions(draw) -> np.ndarray:
    v = np.array([draw(unit), draw(unit), draw(unit)])
    assume(np.linalg.norm(v) > 0.2)
    return v / np.linalg.norm(v)


def _across(v: np.ndarray, angle: float) -> np.ndarray:
    """A unit vector at right angles to ``v``, turned by ``angle`` about it."""
    trial = np.array([0.0, 0.0, 1.0]) if abs(v[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    a = np.cross(v, trial)
    a /= np.linalg.norm(a)
    b = np.cross(v, a)
    return math.cos(angle) * a + math.sin(angle) * b


@st.composite
def source_tables(draw, kind: str, box_m: float = 1.0, max_power_w: float = 1000.0) -> dict:
    s: dict = {
        "antenna": kind,
        "power_w": draw(st.floats(0.1, max_power_w)),
        "duty_cycle": draw(st.floats(0.05, 1.0)),
        "position_m": [draw(st.floats(-box_m, box_m)) for _ in range(3)],
    }
    axis = draw(directions())
    if kind == "isotropic":
        s["gain_dbi"] = draw(st.floats(-5.0, 15.0))
        s["polarization"] = axis.tolist()
    elif kind in ("dipole", "monopole"):
        s["axis"] = axis.tolist()
        s["length_m"] = WAVELENGTH_M * draw(st.floats(0.05, 1.25))
    else:
        s["boresight"] = axis.tolist()
        s["polarization"] = _across(axis, draw(st.floats(0.0, 2 * math.pi))).tolist()
        s["waveguide"] = "WR-340"
        if kind == "horn":
            s["aperture_width_m"] = draw(st.floats(0.12, 0.3))
            s["aperture_height_m"] = draw(st.floats(0.08, 0.24))
            s["length_m"] = draw(st.floats(0.15, 0.5))
    return s


@st.composite
def floors(draw, sources: list[dict]) -> dict:
    """A plane below every source, its normal towards them (contract: [[reflector]])."""
    low = min(s["position_m"][2] for s in sources)
    t: dict = {"point_m": [0.0, 0.0, low - draw(st.floats(0.2, 1.5))], "normal": [0.0, 0.0, 1.0]}
    form = draw(st.sampled_from(["material", "coefficient", "permittivity"]))
    if form == "material":
        t["material"] = draw(st.sampled_from(["concrete", "metal", "wet-ground", "wood", "glass"]))
    elif form == "coefficient":
        t["reflection_coefficient"] = draw(st.floats(-1.0, 1.0))
    else:
        t["relative_permittivity"] = draw(st.floats(1.0, 30.0))
        t["conductivity_s_m"] = draw(st.floats(0.0, 2.0))
    return t


@st.composite
def documents(
    draw,
    kinds=tuple(KINDS),
    max_sources: int = 2,
    reflector: bool | None = None,
    max_power_w: float = 1000.0,
    modes: tuple[str, ...] = ("envelope", "coherent"),
) -> dict:
    n = draw(st.integers(1, max_sources))
    doc: dict = {
        "source": [
            draw(source_tables(draw(st.sampled_from(kinds)), max_power_w=max_power_w))
            for _ in range(n)
        ]
    }
    with_floor = draw(st.booleans()) if reflector is None else reflector
    if with_floor and HAS_REFLECTION:
        doc["reflector"] = [draw(floors(doc["source"]))]
        doc["reflections"] = draw(st.sampled_from(modes))
    return doc


def build(doc: dict):
    """The scenario, or None where the generated geometry is refused (e.g. overlapping)."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # ModelRangeWarning near a validity edge
            return scenario_from_document(copy.deepcopy(doc), "generated.toml")
    except InputError as exc:
        note(f"refused: {exc}")
        return None


def field_points(n_max: int = 12):
    return st.lists(
        st.tuples(*(st.floats(-3.0, 3.0) for _ in range(3))), min_size=1, max_size=n_max
    ).map(lambda pts: np.array(pts, dtype=float))


def _close(a, b, rel=1e-9):
    """Elementwise |a - b| <= rel * max(|a|, |b|, tiny scale of the whole array)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    scale = max(float(np.max(np.abs(a), initial=0.0)), float(np.max(np.abs(b), initial=0.0)))
    return np.all(
        np.abs(a - b) <= rel * np.maximum(np.maximum(np.abs(a), np.abs(b)), 1e-12 * scale)
    )


# ------------------------------------------------------------ linear in power
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


# -------------------------------------------------------------- keep-out order
FAST_DIRECTIONS = 80  # rays of the first pass; the properties hold for any ray set


def _limits_at(frequency_hz: float) -> list[str]:
    return [i for i in LIMIT_IDS if get_limit(i).covers(frequency_hz)]


@settings(max_examples=examples(8))
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


def _at_most(a, b) -> bool:
    """Limit value a is nowhere above b: S, E and H (a missing field limit is no limit)."""

    def le(x, y):
        return (math.inf if x is None else x) <= (math.inf if y is None else y)

    return (
        a.power_density_w_m2 <= b.power_density_w_m2
        and le(a.e_v_m, b.e_v_m)
        and le(a.h_a_m, b.h_a_m)
    )


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


# ----------------------------------------------------------------- rigid motion
@st.composite
def rotations(draw) -> np.ndarray:
    q = np.array([draw(st.floats(-1.0, 1.0)) for _ in range(4)])
    assume(np.linalg.norm(q) > 0.1)
    w, x, y, z = q / np.linalg.norm(q)
    return np.array(
        [
            [1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
            [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
            [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)],
        ]
    )


_POINT_KEYS = ("position_m", "point_m", "center_m")
_DIRECTION_KEYS = ("axis", "boresight", "polarization", "normal", "up")


def moved(doc: dict, rotation: np.ndarray, shift: np.ndarray) -> dict:
    """The document with every point and direction moved by x -> R x + t."""
    out = copy.deepcopy(doc)
    for section in ("source", "reflector", "shield"):
        for table in out.get(section, []):
            for key in _POINT_KEYS:
                if key in table:
                    table[key] = (rotation @ np.array(table[key]) + shift).tolist()
            for key in _DIRECTION_KEYS:
                if key in table:
                    table[key] = (rotation @ np.array(table[key])).tolist()
    return out


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


# -------------------------------------------------------------- TE10 symmetry
@settings(max_examples=examples(20))
@given(theta=st.floats(0.0, math.pi), phi=st.floats(0.0, 2 * math.pi), r_m=st.floats(0.0, 3.0))
def test_te10_pattern_is_symmetric_in_its_principal_planes(theta, phi, r_m):
    if not HAS_APERTURE:
        pytest.skip("the open-waveguide model has not landed")
    from keepclear.antennas.aperture import OpenWaveguide

    guide = OpenWaveguide(F_HZ, 100.0, 0.08636, 0.04318)  # WR-340: 3.400 x 1.700 in (EIA)
    u = np.array(
        [math.sin(theta) * math.cos(phi), math.sin(theta) * math.sin(phi), math.cos(theta)]
    )
    # Mirror images in the E-plane (y-z: x -> -x) and the H-plane (x-z: y -> -y), local frame
    # (broad wall along x, E along y, boresight z: antennas/base.py conventions).
    flips = np.array([[1, 1, 1], [1, -1, 1], [-1, 1, 1], [-1, -1, 1]], dtype=float)
    g = guide.gain(u * flips)
    assert _close(g, np.full(4, g[0]), rel=1e-9)
    e, h = guide.fields(r_m * u * flips)  # near field too, on and behind the aperture plane
    for v in (e, h):
        magnitude = np.linalg.norm(v, axis=1)
        assert _close(magnitude, np.full(4, magnitude[0]), rel=1e-7)


# ---------------------------------------------------------- power conservation
def sphere_quadrature(n_theta: int, n_phi: int):
    """Unit vectors and weights over the sphere: Gauss-Legendre in cos(theta) on each
    hemisphere separately (fields may be discontinuous at a ground plane or aperture plane),
    the trapezoid rule (exact for trigonometric polynomials) in phi.  Weights sum to 4 pi."""
    x, w = np.polynomial.legendre.leggauss(n_theta)
    cos_t = np.concatenate([(x - 1) / 2, (x + 1) / 2])
    w_t = np.concatenate([w / 2, w / 2])
    phi = 2 * np.pi * np.arange(n_phi) / n_phi
    ct, ph = np.meshgrid(cos_t, phi, indexing="ij")
    st_ = np.sqrt(1 - ct**2)
    u = np.stack([st_ * np.cos(ph), st_ * np.sin(ph), ct], axis=-1).reshape(-1, 3)
    weights = (w_t[:, None] * np.full(n_phi, 2 * np.pi / n_phi)[None, :]).reshape(-1)
    return u, weights


def poynting_flux_w(radiator, radius_m: float, n_theta: int = 24, n_phi: int = 48) -> float:
    """Real Poynting flux [W] out of a sphere about the reference point (RMS phasors):
    P = integral of Re(E x H*) . n dA (Jackson, 3rd ed., eq. (6.132) with RMS amplitudes)."""
    u_local, w = sphere_quadrature(n_theta, n_phi)
    rotation = radiator.placement.rotation
    u = u_local @ rotation.T  # sphere aligned with the local axis (split at its equator)
    pts = radiator.position_m + radius_m * u
    e, h = radiator.fields(pts)
    s_r = np.real(np.sum(np.cross(e, np.conj(h)) * u, axis=1))
    return float(np.sum(s_r * w) * radius_m**2)


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
    # DEVELOPERS.md: power conservation over the sphere within 1 %.
    assert flux == pytest.approx(radiator.power_w, rel=0.01)


# ------------------------------------------------------ screening in free space
@settings(max_examples=examples(8))
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


# ---------------------------------------------------------- envelope >= coherent
@pytest.mark.skipif(not HAS_REFLECTION, reason="reflection model not present")
@settings(max_examples=examples(25))
@given(doc=documents(max_sources=2, reflector=True), pts=field_points(), wall=st.booleans())
def test_reflection_envelope_is_never_below_coherent(doc, pts, wall):
    if wall:
        east = max(s["position_m"][0] for s in doc["source"]) + 0.5
        doc["reflector"].append(
            {"point_m": [east, 0, 0], "normal": [-1.0, 0, 0], "material": "metal"}
        )
    envelope = build({**doc, "reflections": "envelope"})
    coherent = build({**doc, "reflections": "coherent"})
    assume(envelope is not None and coherent is not None)
    r_env, r_coh = evaluate(envelope, pts), evaluate(coherent, pts)
    for name in ("e_v_m", "h_a_m", "power_density_w_m2", "peak_power_density_w_m2"):
        env, coh = getattr(r_env, name), getattr(r_coh, name)
        assert np.all(env >= coh * (1 - 1e-12)), name


# --------------------------------------------------------------- shields only cut
@st.composite
def shields(draw, sources: list[dict]) -> dict:
    """A sheet between the first source and a random direction, of a random kind."""
    first = np.array(sources[0]["position_m"])
    normal = draw(directions())
    t: dict = {
        "center_m": (first + normal * draw(st.floats(0.1, 1.0))).tolist(),
        "normal": normal.tolist(),
        "width_m": draw(st.floats(0.1, 3.0)),
        "height_m": draw(st.floats(0.1, 3.0)),
    }
    kind = draw(st.sampled_from(["rated", "sheet", "mesh"]))
    if kind == "rated":
        t["shielding_db"] = draw(st.floats(0.0, 80.0))
    elif kind == "sheet":
        t["type"] = "sheet"
        t["metal"] = draw(st.sampled_from(["aluminium", "mild-steel", "stainless-steel-304"]))
        t["thickness_m"] = draw(st.floats(1e-7, 0.003))
    else:
        t["type"] = "mesh"
        t["metal"] = "copper"
        t["pitch_m"] = draw(st.floats(0.002, 0.02))
        t["wire_diameter_m"] = t["pitch_m"] * draw(st.floats(0.05, 0.5))
    return t


@pytest.mark.skipif(not HAS_SHIELD, reason="shield model not present")
@settings(max_examples=examples(25))
@given(doc=documents(max_sources=2), data=st.data(), pts=field_points())
def test_a_shield_raises_a_field_at_most_by_the_fresnel_ripple(doc, data, pts):
    # In coherent mode a sheet that weakens only the reflected ray can fill an interference
    # null (physically right), so the law is stated for the envelope, the default.  Beside
    # its shadow a sheet's diffraction raises each ray's field by at most the lit-side
    # ripple of a rectangular screen, 1.9 dB near a corner (ITU-R P.526-15 sec. 5.2;
    # 1.4 dB beside one straight edge, Fig. 7).
    doc = {**doc, "reflections": "envelope"}
    bare = build(doc)
    assume(bare is not None)
    shielded_doc = {**doc, "shield": [data.draw(shields(doc["source"]), label="shield")]}
    shielded = build(shielded_doc)
    assume(shielded is not None)
    r0, r1 = evaluate(bare, pts), evaluate(shielded, pts)
    ripple = 10 ** (1.9 / 20)
    for name in ("e_v_m", "h_a_m", "power_density_w_m2", "peak_power_density_w_m2"):
        bound = ripple if name in ("e_v_m", "h_a_m") else ripple**2
        assert np.all(getattr(r1, name) <= getattr(r0, name) * bound * (1 + 1e-12)), name


@pytest.mark.skipif(not (HAS_SHIELD and HAS_REFLECTION), reason="shield or reflection missing")
@pytest.mark.parametrize(("depth", "size"), [(0.5, 4.0), (0.8, 1.0)])
@pytest.mark.parametrize("material", ["metal", "concrete"])
def test_a_shield_behind_a_reflector_changes_nothing_in_front(depth, size, material):
    doc = {
        "source": [{"antenna": "isotropic", "power_w": 100.0, "position_m": [0.0, 0.0, 1.0]}],
        "reflector": [{"point_m": [0, 0, 0], "normal": [0, 0, 1.0], "material": material}],
    }
    sheet = {
        "center_m": [0.0, 0.0, -depth],
        "normal": [0.0, 0.0, 1.0],
        "width_m": size,
        "height_m": size,
        "shielding_db": 40.0,
    }
    front = np.array([[0.5, 0.0, 0.5], [0.0, 0.0, 0.2], [-1.0, 2.0, 1.5], [3.0, 0.0, 0.05]])
    r0 = evaluate(build(doc), front)
    r1 = evaluate(build({**doc, "shield": [sheet]}), front)
    # Every real ray to a point above the floor (direct, and reflected at the floor) stays
    # above it; a sheet below the floor is on none of them.  (The sheet lies between the
    # floor and the source's image at z = -1, where the unfolded image ray passes.)
    assert _close(r1.power_density_w_m2, r0.power_density_w_m2, rel=1e-12)
