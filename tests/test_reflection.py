"""Reflecting planes: Fresnel coefficients, exact images, corners, combination modes."""

from __future__ import annotations

import math

import hypothesis.strategies as st
import numpy as np
import pytest
from hypothesis import assume, given, settings

from keepclear.antennas.base import (
    C_M_S,
    ETA0_OHM,
    ModelInputError,
    ModelRangeWarning,
    Placement,
    Radiator,
)
from keepclear.antennas.isotropic import IsotropicSource
from keepclear.fields.errors import ScenarioError
from keepclear.fields.field import evaluate
from keepclear.fields.materials import relative_permittivity_itu_p2040
from keepclear.fields.reflection import (
    Reflector,
    behind,
    combine,
    fresnel_coefficients,
    image_labels,
    reflected_fields,
    transmission_power_factor,
)
from keepclear.fields.scenario_tables import reflector_from_table
from keepclear.fields.validate import Table

from ._edge_cases import FLOOR, probe
from ._hypothesis import examples
from ._property_strategies import (
    EXPECTED_PLAUSIBILITY_WARNING,
    HAS_REFLECTION,
    build,
    documents,
    field_points,
)
from .conftest import ISOTROPIC

F_HZ = 2.45e9
LAMBDA_M = C_M_S / F_HZ
K = 2 * math.pi / LAMBDA_M


class HertzianDipole(Radiator):
    """Infinitesimal electric dipole of moment I l along the local z axis (test helper).

    Balanis, Antenna Theory 4th ed., sec. 4.2.1, eqs. (4-8a..c) for H and (4-10a..c)
    for E (equation numbers from memory), written in vector form; checked here
    against Maxwell's curl equations by finite differences.
    """

    kind = "test-hertzian"

    def __init__(self, position, axis, moment_a_m: float = 1.0):
        super().__init__(F_HZ, 1.0, Placement.from_axes(position, axis))
        self.moment_a_m = moment_a_m

    @property
    def largest_dimension_m(self) -> float:
        return 0.0

    def _local_fields(self, pts):
        r = np.linalg.norm(pts, axis=1)
        rh = pts / r[:, None]
        p = np.array([0.0, 0.0, 1.0])
        pr = rh @ p
        kr = K * r
        g = self.moment_a_m * np.exp(-1j * kr) / (4 * np.pi)
        trans = p - pr[:, None] * rh
        e = (
            ETA0_OHM
            * g[:, None]
            * (
                -(1j * K / r * (1 + 1 / (1j * kr) - 1 / kr**2))[:, None] * trans
                + (2 / r**2 * (1 + 1 / (1j * kr)) * pr)[:, None] * rh
            )
        )
        h = (g * 1j * K / r * (1 + 1 / (1j * kr)))[:, None] * np.cross(p, rh)
        return e, h

    def _local_far_field(self, d):
        p = np.array([0.0, 0.0, 1.0])
        return (-1j * K * ETA0_OHM * self.moment_a_m / (4 * np.pi)) * (
            p - (d @ p)[:, None] * d
        ).astype(complex)


def metal(point, normal, label="metal"):
    return Reflector(point_m=point, normal=normal, material="metal", label=label)


def _curl(fn, x, h=1e-6):
    jac = np.empty((3, 3), dtype=complex)  # jac[i, j] = d F_i / d x_j
    for j in range(3):
        dx = np.zeros(3)
        dx[j] = h
        jac[:, j] = (fn(x + dx) - fn(x - dx)) / (2 * h)
    return np.array([jac[2, 1] - jac[1, 2], jac[0, 2] - jac[2, 0], jac[1, 0] - jac[0, 1]])


def test_hertzian_helper_obeys_maxwell():
    # curl E = -j w mu0 H and curl H = j w eps0 E (e^{+jwt}); k = w sqrt(mu0 eps0).
    d = HertzianDipole([0.01, -0.02, 0.03], [0.3, 0.4, 1.0])
    x = np.array([0.11, 0.07, 0.25])
    curl_e = _curl(lambda q: d.fields(q)[0][0], x)
    curl_h = _curl(lambda q: d.fields(q)[1][0], x)
    e, h = d.fields(x)
    assert np.allclose(curl_e, -1j * K * ETA0_OHM * h[0], rtol=1e-5, atol=0)
    assert np.allclose(curl_h, 1j * K / ETA0_OHM * e[0], rtol=1e-5, atol=0)


# ----------------------------------------------------------------------- Fresnel
@pytest.mark.parametrize("eps", [1.5, 2.73, 5.24, 6.31, 30.0])
def test_lossless_energy_conservation(eps):
    # Balanis AEE 2nd ed. sec. 5.3; ITU-R P.2040-3 sec. 2.2.1.4 (power flux coefficients):
    # |Gamma|^2 + T = 1 with T from the transmission coefficients, tau_TE = 1 + Gamma_perp
    # (tangential E continuous), tau_TM^H = 1 + Gamma_par (tangential H continuous), and the
    # normal Poynting flux ratios Re(r)/cos and Re(r/eps)/cos, r = sqrt(eps - sin^2).
    c = np.linspace(0.01, 1.0, 50)
    g_perp, g_par = fresnel_coefficients(eps, c)
    r = np.sqrt(eps - (1 - c**2))
    t_perp = np.abs(1 + g_perp) ** 2 * r.real / c
    t_par = np.abs(1 + g_par) ** 2 * (r / eps).real / c
    assert np.allclose(np.abs(g_perp) ** 2 + t_perp, 1.0, atol=1e-12)
    assert np.allclose(np.abs(g_par) ** 2 + t_par, 1.0, atol=1e-12)


@pytest.mark.parametrize("eps", [2.73, 5.24, 6.31])
def test_brewster_angle(eps):
    # Balanis AEE 2nd ed. sec. 5.3.2: tan(theta_B) = sqrt(eps_r) gives Gamma_par = 0;
    # Gamma_perp does not vanish there.
    theta_b = math.atan(math.sqrt(eps))
    g_perp, g_par = fresnel_coefficients(eps, np.array([math.cos(theta_b)]))
    assert abs(g_par[0]) < 1e-12
    assert abs(g_perp[0]) > 0.2


def test_grazing_incidence_tends_to_total_reflection():
    # Balanis AEE sec. 5.3: as theta -> 90 deg both coefficients -> -1 (|Gamma| -> 1).
    eps = relative_permittivity_itu_p2040("concrete", F_HZ)
    c = np.array([1e-2, 1e-4, 1e-6, 0.0])
    g_perp, g_par = fresnel_coefficients(eps, c)
    assert np.all(np.diff(np.abs(g_perp)) > -1e-15) and np.all(np.diff(np.abs(g_par)) > -1e-15)
    assert np.allclose(g_perp[-2:], -1.0, atol=1e-5) and np.allclose(g_par[-2:], -1.0, atol=1e-5)


def test_pec_limit():
    # Balanis AEE sec. 5.3: eta_2 -> 0 (eps -> infinity): Gamma_TE = -1; in our convention
    # (ratio of the H components, ITU-R P.2040 R_TM form) Gamma_TM = +1.
    c = np.linspace(0.05, 1.0, 20)
    g_perp, g_par = fresnel_coefficients(1e12 * (1 - 1j), c)
    assert np.allclose(g_perp, -1.0, atol=1e-5)
    assert np.allclose(g_par, 1.0, atol=1e-4)


def test_normal_incidence_agrees_between_polarisations():
    # At normal incidence the plane of incidence is undefined: Gamma_par = -Gamma_perp =
    # -(1 - sqrt(eps))/(1 + sqrt(eps)) (Balanis AEE sec. 5.2).
    eps = relative_permittivity_itu_p2040("glass", F_HZ)
    g_perp, g_par = fresnel_coefficients(eps, np.array([1.0]))
    expected = (1 - np.sqrt(eps)) / (1 + np.sqrt(eps))
    assert g_perp[0] == pytest.approx(expected, abs=1e-14)
    assert g_par[0] == pytest.approx(-expected, abs=1e-14)


def test_lossy_coefficients_never_exceed_one():
    # Passive half-space: |Gamma| <= 1 (energy conservation; common practice, no source).
    rng = np.random.default_rng(1)
    eps = rng.uniform(1, 80, 500) - 1j * rng.uniform(0, 100, 500)
    c = rng.uniform(0, 1, 500)
    g_perp, g_par = fresnel_coefficients(eps, c)
    assert np.all(np.abs(g_perp) <= 1 + 1e-12) and np.all(np.abs(g_par) <= 1 + 1e-12)


def test_bad_cosine_refused():
    with pytest.raises(ValueError):
        fresnel_coefficients(4.0, np.array([1.5]))


# --------------------------------------------------------------------- Reflector
def test_reflector_kinds_and_coefficients():
    c = np.array([0.2, 0.7, 1.0])
    g_perp, g_par = metal([0, 0, 0], [0, 0, 2]).coefficients(F_HZ, c)
    assert np.all(g_perp == -1) and np.all(g_par == 1)
    given = Reflector([0, 0, 0], [0, 0, 1], reflection_coefficient=-0.4)
    g_perp, g_par = given.coefficients(F_HZ, c)
    assert np.allclose(g_perp, -0.4) and np.allclose(g_par, 0.4)
    assert given.normal_incidence_coefficient(F_HZ) == -0.4
    concrete = Reflector([0, 0, 0], [0, 0, 1], material="concrete")
    eps = relative_permittivity_itu_p2040("concrete", F_HZ)
    assert concrete.normal_incidence_coefficient(F_HZ) == pytest.approx(
        (1 - np.sqrt(eps)) / (1 + np.sqrt(eps))
    )
    custom = Reflector([0, 0, 0], [0, 0, 1], relative_permittivity=5.24, conductivity_s_m=0.093121)
    assert custom.normal_incidence_coefficient(F_HZ) == pytest.approx(
        concrete.normal_incidence_coefficient(F_HZ), rel=1e-5
    )
    assert metal([0, 0, 0], [0, 0, 1]).normal_incidence_coefficient(F_HZ) == -1


def test_mirror_geometry():
    r = Reflector([0, 0, 1.0], [0, 3.0, 4.0], material="glass")
    assert np.allclose(r.normal, [0, 0.6, 0.8])
    m = r.mirror_matrix
    assert np.allclose(m @ m, np.eye(3)) and np.linalg.det(m) == pytest.approx(-1.0)
    p = np.array([[1.0, 2.0, 3.0], [0.0, 0.0, 1.0]])
    q = r.mirror_points(p)
    assert np.allclose(r.signed_distance_m(q), -r.signed_distance_m(p))
    assert np.allclose(r.mirror_points(q), p)
    assert r.signed_distance_m(p)[0] == pytest.approx(0.6 * 2 + 0.8 * 2)


def _table(data):
    return Table(data, "reflector.1", "bench.toml")


def test_reflector_from_table_forms():
    r = reflector_from_table(
        _table({"point_m": [0, 0, 0], "normal": [0, 0, 1], "material": "Ceiling board"}), F_HZ
    )
    assert r.material == "ceiling-board" and r.kind == "dielectric" and r.label == "reflector.1"
    r = reflector_from_table(
        _table({"point_m": [0, 0, 0], "normal": [0, 0, 1], "material": "metal", "name": "bench"}),
        F_HZ,
    )
    assert r.is_perfect_conductor and r.label == "bench"
    r = reflector_from_table(
        _table(
            {
                "point_m": [0, 0, 0],
                "normal": [1, 0, 0],
                "relative_permittivity": 5.3,
                "conductivity_s_m": 0.09,
            }
        ),
        F_HZ,
    )
    assert r.relative_permittivity == 5.3 and r.conductivity_s_m == 0.09
    r = reflector_from_table(
        _table({"point_m": [0, 0, 0], "normal": [0, 0, 1], "reflection_coefficient": -1.0}), F_HZ
    )
    assert r.kind == "coefficient"


@pytest.mark.parametrize(
    ("extra", "key", "text"),
    [
        ({}, "material", "is required"),
        ({"material": "metal", "reflection_coefficient": -1.0}, "reflection_coefficient", "one of"),
        ({"material": "brick", "relative_permittivity": 4.0}, "relative_permittivity", "one of"),
        ({"relative_permittivity": 0.5, "conductivity_s_m": 0.0}, "relative_permittivity", ">= 1"),
        ({"relative_permittivity": 4.0, "conductivity_s_m": -1.0}, "conductivity_s_m", ">= 0"),
        ({"relative_permittivity": 4.0}, "conductivity_s_m", "required"),
        ({"conductivity_s_m": 0.1}, "relative_permittivity", "required"),
        ({"reflection_coefficient": 1.5}, "reflection_coefficient", "<= 1"),
        ({"reflection_coefficient": -1.01}, "reflection_coefficient", ">= -1"),
        ({"material": "concret"}, "material", "did you mean 'concrete'"),
        ({"material": "metal", "materail": "x"}, "materail", "not a known key"),
        ({"materail": "metal"}, "materail", "did you mean 'material'"),
    ],
)
def test_reflector_from_table_errors(extra, key, text):
    data = {"point_m": [0, 0, 0], "normal": [0, 0, 1], **extra}
    with pytest.raises(ScenarioError) as info:
        reflector_from_table(_table(data), F_HZ)
    assert info.value.key == f"reflector.1.{key}"
    assert text in info.value.message
    assert info.value.source == "bench.toml"


def test_zero_normal_is_refused():
    with pytest.raises(ScenarioError) as info:
        reflector_from_table(
            _table({"point_m": [0, 0, 0], "normal": [0, 0, 0], "material": "metal"}), F_HZ
        )
    assert info.value.key == "reflector.1.normal"


def test_material_out_of_range_warns_with_location():
    with pytest.warns(ModelRangeWarning, match=r"reflector\.1\.material.*floorboard"):
        reflector_from_table(
            _table({"point_m": [0, 0, 0], "normal": [0, 0, 1], "material": "floorboard"}), F_HZ
        )


# ------------------------------------------------------------------ PEC images
def test_pec_floor_fourfold_and_null_isotropic():
    # Image theory (Balanis, Antenna Theory 4th ed., sec. 4.7.1): a horizontally polarised
    # point source at height h over a conductor has an image of opposite sign at -h.
    # Straight above at height z: E = E0 [e^{-jk(z-h)}/(z-h) - e^{-jk(z+h)}/(z+h)].
    # h = lambda/4: the two add (power ~ 4x); h = lambda/2: they cancel (power ~ 0).
    floor = metal([0, 0, 0], [0, 0, 1])
    z = 100 * LAMBDA_M
    p = np.array([[0.0, 0.0, z]])
    for h, expected in ((LAMBDA_M / 4, (1 + (z - LAMBDA_M / 4) / (z + LAMBDA_M / 4)) ** 2),
                        (LAMBDA_M / 2, (1 - (z - LAMBDA_M / 2) / (z + LAMBDA_M / 2)) ** 2)):  # fmt: skip
        src = IsotropicSource(F_HZ, 100.0, placement=Placement(position_m=np.array([0, 0, h])))
        e, hh = src.fields(p)
        images = reflected_fields(src, [floor], p, F_HZ)
        e2, _ = combine(e, hh, images, "coherent")
        ratio = e2[0] / np.sum(np.abs(e[0]) ** 2)
        assert ratio == pytest.approx(expected, rel=1e-9)
        # The envelope adds the image in the worst phase: (1 + |Gamma| r_d/r_i)^2 ~ 4 at both.
        e2_env, _ = combine(e, hh, images, "envelope")
        assert e2_env[0] / np.sum(np.abs(e[0]) ** 2) == pytest.approx(
            (1 + (z - h) / (z + h)) ** 2, rel=1e-9
        )
    assert (1 + (z - LAMBDA_M / 4) / (z + LAMBDA_M / 4)) ** 2 > 3.98  # the fourfold point
    assert (1 - (z - LAMBDA_M / 2) / (z + LAMBDA_M / 2)) ** 2 < 1e-4  # the null


def _plane_grid(reflector, n=7, size=0.6):
    n_hat = reflector.normal
    u = np.cross(n_hat, [1.0, 0, 0] if abs(n_hat[0]) < 0.9 else [0, 1.0, 0])
    u /= np.linalg.norm(u)
    v = np.cross(n_hat, u)
    a, b = np.meshgrid(np.linspace(-size, size, n), np.linspace(-size, size, n))
    return reflector.point_m + a.reshape(-1, 1) * u + b.reshape(-1, 1) * v


@pytest.mark.parametrize(
    "source",
    [
        HertzianDipole([0.1, -0.05, 0.3], [1.0, 0.5, 0.7]),
        IsotropicSource(F_HZ, 10.0, placement=Placement.from_axes([0.05, 0.1, 0.25], [0, 1, 1])),
    ],
)
def test_tangential_e_and_normal_h_vanish_on_pec(source):
    # Perfect conductor boundary conditions n x E = 0, n . H = 0 (Balanis AEE sec. 1.8.2).
    plane = metal([0, 0, 0.02], [0.1, 0.2, 1.0])
    pts = _plane_grid(plane)
    e, h = source.fields(pts)
    ((ei, hi),) = reflected_fields(source, [plane], pts, F_HZ)
    e_tot, h_tot = e + ei, h + hi
    n_hat = plane.normal
    scale_e = np.max(np.linalg.norm(e, axis=1))
    scale_h = np.max(np.linalg.norm(h, axis=1))
    assert np.max(np.linalg.norm(np.cross(n_hat, e_tot), axis=1)) < 1e-12 * scale_e
    assert np.max(np.abs(h_tot @ n_hat)) < 1e-12 * scale_h
    # ... and the normal E and tangential H double (the image adds to them).
    assert np.allclose(e_tot @ n_hat, 2 * (e @ n_hat), rtol=1e-12, atol=1e-12 * scale_e)


def test_pec_image_is_the_textbook_image_current():
    # Balanis, Antenna Theory 4th ed., sec. 4.7.1, Fig. 4.12: over a conductor the image of an
    # electric current element has its horizontal part reversed and its vertical part kept,
    # i.e. the image moment is -M p.  Compare with an explicit dipole at the image point.
    floor = metal([0, 0, 0.05], [0, 0, 1])
    axis = np.array([0.6, -0.3, 0.74])
    src = HertzianDipole([0.02, 0.01, 0.17], axis)
    image = HertzianDipole(
        floor.mirror_points(src.position_m[None, :])[0], -(floor.mirror_matrix @ axis)
    )
    rng = np.random.default_rng(7)
    pts = rng.uniform([-1, -1, 0.05], [1, 1, 1.5], (200, 3))
    ((ei, hi),) = reflected_fields(src, [floor], pts, F_HZ)
    e_ref, h_ref = image.fields(pts)
    assert np.allclose(ei, e_ref, rtol=1e-10, atol=1e-12 * np.abs(e_ref).max())
    assert np.allclose(hi, h_ref, rtol=1e-10, atol=1e-12 * np.abs(h_ref).max())


def _far_points(theta, phi, r):
    return r * np.column_stack(
        [np.sin(theta) * np.cos(phi), np.sin(theta) * np.sin(phi), np.cos(theta)]
    )


@pytest.mark.parametrize(
    ("axis", "array_factor"),
    [
        # Balanis, Antenna Theory 4th ed., sec. 4.7.5 (horizontal electric dipole above a
        # conductor): AF = 2j sin(kh cos(theta)) (eq. 4-116 in the 3rd-ed. numbering, from
        # memory).
        ([1.0, 0.0, 0.0], lambda kh, c: 2j * np.sin(kh * c)),
        ([0.0, 1.0, 0.0], lambda kh, c: 2j * np.sin(kh * c)),
        # sec. 4.7.2 (vertical electric dipole): AF = 2 cos(kh cos(theta)) (eq. 4-99, 3rd ed.).
        ([0.0, 0.0, 1.0], lambda kh, c: 2 * np.cos(kh * c)),
    ],
)
def test_dipole_over_pec_far_field_array_factor(axis, array_factor):
    h = 0.7 * LAMBDA_M
    src = HertzianDipole([0, 0, h], axis)
    element = HertzianDipole([0, 0, 0], axis)  # the same element referenced at the origin
    theta, phi = np.meshgrid(np.linspace(0.0, 1.55, 25), np.linspace(0, 2 * np.pi, 9))
    theta, phi = theta.ravel(), phi.ravel()
    pts = _far_points(theta, phi, 2e4 * LAMBDA_M)
    e, hh = src.fields(pts)
    ((ei, hi),) = reflected_fields(src, [metal([0, 0, 0], [0, 0, 1])], pts, F_HZ)
    e_el, _ = element.fields(pts)
    expected = e_el * array_factor(K * h, np.cos(theta))[:, None]
    scale = 2 * np.max(np.linalg.norm(e_el, axis=1))
    assert np.max(np.linalg.norm(e + ei - expected, axis=1)) < 2e-3 * scale


@pytest.mark.parametrize("material", ["concrete", "wet-ground", "glass"])
def test_dipoles_over_lossy_ground_two_ray(material):
    # Two-ray far field over a flat lossy earth (Balanis, Antenna Theory 4th ed., sec. 4.8,
    # ground effects; ITU-R P.2040-3 sec. 2.2.1.5): E = E_element [e^{jkh cos} + R e^{-jkh cos}]
    # with R_v = (eps c - sqrt(eps - s^2))/(eps c + sqrt(eps - s^2)) for a vertical dipole and
    # R_h = (c - sqrt(eps - s^2))/(c + sqrt(eps - s^2)) for a horizontal dipole seen broadside
    # (E perpendicular to the plane of incidence), c = cos(theta).
    eps = relative_permittivity_itu_p2040(material, F_HZ)
    ground = Reflector([0, 0, 0], [0, 0, 1], material=material)
    h = 1.3 * LAMBDA_M
    theta = np.linspace(0.0, 1.5, 31)
    c, s2 = np.cos(theta), np.sin(theta) ** 2
    root = np.sqrt(eps - s2)
    r_v = (eps * c - root) / (eps * c + root)
    r_h = (c - root) / (c + root)
    pts = _far_points(theta, np.zeros_like(theta), 2e4 * LAMBDA_M)  # the xz-plane
    for axis, refl in (([0.0, 0.0, 1.0], r_v), ([0.0, 1.0, 0.0], r_h)):
        src = HertzianDipole([0, 0, h], axis)
        e_el, _ = HertzianDipole([0, 0, 0], axis).fields(pts)
        e, _ = src.fields(pts)
        ((ei, _),) = reflected_fields(src, [ground], pts, F_HZ)
        af = np.exp(1j * K * h * c) + refl * np.exp(-1j * K * h * c)
        expected = e_el * af[:, None]
        scale = np.max(np.linalg.norm(e_el, axis=1))
        assert np.max(np.linalg.norm(e + ei - expected, axis=1)) < 2e-3 * scale


def test_given_coefficient_scales_the_conductor_image():
    # reflection_coefficient Gamma: reflected field = -Gamma x conductor image (our convention,
    # Gamma = -1 behaves as metal).
    src = HertzianDipole([0.0, 0.0, 0.3], [1.0, 0.0, 1.0])
    pts = np.random.default_rng(3).uniform([-1, -1, 0.0], [1, 1, 1], (50, 3))
    ((em, hm),) = reflected_fields(src, [metal([0, 0, 0], [0, 0, 1])], pts, F_HZ)
    for g in (-1.0, -0.5, 0.3):
        r = Reflector([0, 0, 0], [0, 0, 1], reflection_coefficient=g)
        ((eg, hg),) = reflected_fields(src, [r], pts, F_HZ)
        assert np.allclose(eg, -g * em) and np.allclose(hg, -g * hm)


# ---------------------------------------------------------------- the PEC corner
def test_ninety_degree_corner_is_the_classical_three_image_solution():
    # Balanis, Antenna Theory 4th ed., ch. 15 (corner reflector): a 90-degree conducting
    # corner is solved exactly by three images: the two mirror images (moments -M_w p and
    # -M_f p) and the double image at M_f M_w s with moment +M_f M_w p.
    floor = metal([0, 0, 0], [0, 0, 1], "floor")
    wall = metal([0, 0, 0], [1, 0, 0], "wall")
    axis = np.array([0.5, 0.4, 0.77])
    s = np.array([0.21, 0.05, 0.14])
    src = HertzianDipole(s, axis)
    mw, mf = wall.mirror_matrix, floor.mirror_matrix
    explicit = [
        HertzianDipole(mw @ s, -(mw @ axis)),
        HertzianDipole(mf @ s, -(mf @ axis)),
        HertzianDipole(mf @ mw @ s, mf @ mw @ axis),
    ]
    rng = np.random.default_rng(11)
    pts = rng.uniform([0.0, -0.5, 0.0], [0.8, 0.5, 0.8], (400, 3))
    images = reflected_fields(src, [floor, wall], pts, F_HZ, order=2)
    assert image_labels([floor, wall], order=2) == ["floor", "wall", "floor>wall", "wall>floor"]
    assert len(images) == 4
    e_sum = src.fields(pts)[0] + sum(ei for ei, _ in images)
    h_sum = src.fields(pts)[1] + sum(hi for _, hi in images)
    e_ref = src.fields(pts)[0] + sum(d.fields(pts)[0] for d in explicit)
    h_ref = src.fields(pts)[1] + sum(d.fields(pts)[1] for d in explicit)
    assert np.allclose(e_sum, e_ref, rtol=1e-10, atol=1e-10 * np.abs(e_ref).max())
    assert np.allclose(h_sum, h_ref, rtol=1e-10, atol=1e-10 * np.abs(h_ref).max())
    # Exactly one of the two second-order paths exists at each point.
    on_fw = np.linalg.norm(images[2][0], axis=1) > 0
    on_wf = np.linalg.norm(images[3][0], axis=1) > 0
    assert np.all(on_fw ^ on_wf)
    # Tangential E vanishes on both walls.
    for plane, grid in (
        (floor, np.column_stack([rng.uniform(0, 0.8, 60), rng.uniform(-0.5, 0.5, 60), 0 * np.ones(60)])),
        (wall, np.column_stack([0 * np.ones(60), rng.uniform(-0.5, 0.5, 60), rng.uniform(0, 0.8, 60)])),
    ):  # fmt: skip
        imgs = reflected_fields(src, [floor, wall], grid, F_HZ, order=2)
        e_tot = src.fields(grid)[0] + sum(ei for ei, _ in imgs)
        tangential = np.cross(plane.normal, e_tot)
        assert np.max(np.linalg.norm(tangential, axis=1)) < 1e-9 * np.abs(e_tot).max()


def test_first_order_only_misses_the_corner_image():
    # With order=1 the double image is absent: the floor's tangential E no longer vanishes
    # near the wall (a check that order=2 adds something that matters).
    floor = metal([0, 0, 0], [0, 0, 1], "floor")
    wall = metal([0, 0, 0], [1, 0, 0], "wall")
    src = HertzianDipole([0.1, 0.0, 0.1], [0.0, 1.0, 0.0])
    grid = np.column_stack([np.linspace(0.01, 0.3, 20), np.zeros(20), np.zeros(20)])
    imgs = reflected_fields(src, [floor, wall], grid, F_HZ, order=1)
    e_tot = src.fields(grid)[0] + sum(ei for ei, _ in imgs)
    assert (
        np.max(np.linalg.norm(np.cross(floor.normal, e_tot), axis=1)) > 1e-3 * np.abs(e_tot).max()
    )


# ------------------------------------------------------------ combination modes
def test_envelope_never_below_coherent_on_a_grid():
    # Triangle inequality |a + b| <= |a| + |b| (common practice, no source).
    floor = Reflector([0, 0, 0], [0, 0, 1], material="concrete", label="floor")
    wall = metal([1.0, 0, 0], [-1, 0, 0], "wall")
    bench = Reflector([0, 0.8, 0], [0, -1, 0], reflection_coefficient=-0.7, label="bench")
    src = IsotropicSource(F_HZ, 50.0, placement=Placement.from_axes([0.3, 0.1, 0.4], [1, 0, 0]))
    x, y, z = np.meshgrid(
        np.linspace(-0.5, 0.99, 15), np.linspace(-0.5, 0.79, 11), np.linspace(0.0, 1.0, 9)
    )
    pts = np.column_stack([x.ravel(), y.ravel(), z.ravel()])
    e, h = src.fields(pts)
    images = reflected_fields(src, [floor, wall, bench], pts, F_HZ, order=2)
    assert len(images) == 3 + 6
    e_coh, h_coh = combine(e, h, images, "coherent")
    e_env, h_env = combine(e, h, images, "envelope")
    assert np.all(e_env >= e_coh * (1 - 1e-12)) and np.all(h_env >= h_coh * (1 - 1e-12))
    assert np.any(e_env > 1.5 * e_coh)  # the standing wave has deep minima somewhere


def test_envelope_single_image_factor_matches_contract():
    # Contract: with "envelope" the reflected power is added in the worst phase,
    # (1 + |Gamma|)^2 times.  A concrete floor at normal incidence far above the source.
    floor = Reflector([0, 0, 0], [0, 0, 1], material="concrete")
    src = IsotropicSource(F_HZ, 1.0, placement=Placement(position_m=np.array([0.0, 0.0, 0.2])))
    p = np.array([[0.0, 0.0, 2e4 * LAMBDA_M]])
    e, h = src.fields(p)
    e2, _ = combine(e, h, reflected_fields(src, [floor], p, F_HZ), "envelope")
    gamma = abs(floor.normal_incidence_coefficient(F_HZ))
    assert e2[0] / np.sum(np.abs(e[0]) ** 2) == pytest.approx((1 + gamma) ** 2, rel=1e-4)


def test_combine_rejects_unknown_mode():
    e = np.zeros((1, 3), complex)
    with pytest.raises(ValueError):
        combine(e, e, [], "worst")


# ---------------------------------------------------------------- behind a plane
def test_points_behind_get_no_reflection_and_metal_blocks():
    floor = metal([0, 0, 0], [0, 0, 1], "floor")
    wall = Reflector([2.0, 0, 0], [-1, 0, 0], material="concrete", label="wall")
    src = HertzianDipole([0.5, 0.0, 0.5], [0, 0, 1])
    pts = np.array(
        [
            [1.0, 0.0, 1.0],  # in front of both
            [1.0, 0.0, -0.3],  # below the metal floor
            [3.0, 0.0, 0.5],  # behind the concrete wall, level with the source
            [3.0, 0.0, -0.5],  # behind both
        ]
    )
    assert behind([floor, wall], pts).tolist() == [False, True, True, True]
    for ei, hi in reflected_fields(src, [floor, wall], pts, F_HZ, order=2):
        assert np.all(ei[1:] == 0) and np.all(hi[1:] == 0)
    t = transmission_power_factor([floor, wall], src.position_m, pts, F_HZ)
    # 1 in front; 0 behind metal; behind concrete at normal incidence 1 - |Gamma|^2 with
    # |Gamma|^2 = 0.156 (ITU-R P.2040-3 Table 3 concrete, project notes sec. 3).
    assert t[0] == 1.0 and t[1] == 0.0 and t[3] == 0.0
    assert t[2] == pytest.approx(1 - 0.156, abs=1e-3)


def test_transmission_product_over_crossed_planes():
    # Two dielectric planes crossed by the direct ray: the fractions multiply; each is
    # 1 - |Gamma|^2 at that ray's angle of incidence (P.2040-3 sec. 2.2.1.4).
    a = Reflector([0, 0, 0], [0, 0, 1], material="glass")
    b = Reflector([1.0, 0, 0], [-1, 0, 0], material="plasterboard")
    s = np.array([0.0, 0.0, 1.0])
    p = np.array([[2.0, 0.0, -1.0]])  # the ray from s to p has 45-degree incidence on both
    t = transmission_power_factor([a, b], s, p, F_HZ)
    c = np.array([math.cos(math.pi / 4)])
    expected = 1.0
    for r in (a, b):
        g_perp, g_par = fresnel_coefficients(r.permittivity(F_HZ), c)
        expected *= max(1 - abs(g_perp[0]) ** 2, 1 - abs(g_par[0]) ** 2)
    assert t[0] == pytest.approx(expected, rel=1e-12)
    assert 0.5 < t[0] < 1.0


def test_source_behind_a_plane_is_refused():
    src = IsotropicSource(F_HZ, 1.0, placement=Placement(position_m=np.array([0.0, 0.0, -0.1])))
    with pytest.raises(ModelInputError) as info:
        reflected_fields(src, [metal([0, 0, 0], [0, 0, 1])], np.array([[0, 0, 1.0]]), F_HZ)
    assert info.value.parameter == "normal"


def test_order_must_be_one_or_two():
    src = IsotropicSource(F_HZ, 1.0, placement=Placement(position_m=np.array([0.0, 0.0, 0.1])))
    with pytest.raises(ValueError):
        reflected_fields(src, [metal([0, 0, 0], [0, 0, 1])], np.array([[0, 0, 1.0]]), F_HZ, 3)


def _crossing_point(reflector, a, b):
    """Where segment a -> b meets the plane, and whether it does (test-side geometry)."""
    da, db = reflector.signed_distance_m(a), reflector.signed_distance_m(b)
    ok = (da >= -1e-12) & (db <= 1e-12) & (da - db > 0)
    t = np.where(ok, da / np.where(ok, da - db, 1.0), 0.0)
    return a + t[:, None] * (b - a), ok


def test_second_order_path_validity_against_forward_tracing():
    # Independent construction from the source side (law of reflection by unfolding; common
    # practice, no source): the first bounce Q_i is where s -> M_i M_j p meets plane i, the
    # last Q_j where Q_i -> M_j p meets plane j.  The image exists iff both crossings happen
    # and s, Q_i, Q_j, p lie in the room (the intersection of the half-spaces).
    planes = [
        metal([0, 0, 0], [0, 0, 1], "floor"),
        metal([0, 0, 0], [1, 0, 0.6], "leaning wall"),
        metal([1.2, 0, 0], [-1, 0.3, -0.8], "slanted ceiling"),
    ]
    s = np.array([[0.5, 0.1, 0.2]])
    src = IsotropicSource(F_HZ, 1.0, placement=Placement(position_m=s[0]))
    rng = np.random.default_rng(5)
    pts = rng.uniform([-0.5, -1, 0], [1.5, 1, 1.5], (3000, 3))
    pts = pts[~behind(planes, pts)][:800]
    images = reflected_fields(src, planes, pts, F_HZ, order=2)
    labels = image_labels(planes, order=2)

    def inside(q):
        return ~behind(planes, q)

    mixed = 0
    for j, pj in enumerate(planes):  # first order: Q where s -> M_j p meets plane j
        q, ok = _crossing_point(pj, np.broadcast_to(s, pts.shape), pj.mirror_points(pts))
        exists = ok & inside(q)
        got = np.linalg.norm(images[j][0], axis=1) > 0
        assert np.array_equal(got, exists), pj.label
        mixed += bool(exists.any() and not exists.all())
    for i, pi in enumerate(planes):
        for j, pj in enumerate(planes):
            if i == j:
                continue
            mjp = pj.mirror_points(pts)
            q_i, ok_i = _crossing_point(pi, np.broadcast_to(s, pts.shape), pi.mirror_points(mjp))
            q_j, ok_j = _crossing_point(pj, q_i, mjp)
            exists = ok_i & ok_j & inside(q_i) & inside(q_j)
            e_img = images[labels.index(f"{pi.label}>{pj.label}")][0]
            got = np.linalg.norm(e_img, axis=1) > 0
            assert np.array_equal(got, exists), (pi.label, pj.label)
            mixed += bool(exists.any() and not exists.all())
    assert mixed >= 3  # the scene exercises the validity rules, not just all-or-nothing


def test_vertical_element_on_a_conductor_doubles_its_field():
    # Balanis, Antenna Theory 4th ed., sec. 4.7.1 (image theory; the monopole principle): a
    # vertical electric element standing on a conducting plane has a coincident image of the
    # same sign, so the field above the plane is twice the free-space field.
    src = HertzianDipole([0.2, -0.1, 0.0], [0, 0, 1])
    pts = np.random.default_rng(2).uniform([-1, -1, 0.05], [1, 1, 1], (100, 3))
    e, h = src.fields(pts)
    ((ei, hi),) = reflected_fields(src, [metal([0, 0, 0], [0, 0, 1])], pts, F_HZ)
    assert np.allclose(ei, e, rtol=1e-12, atol=0) and np.allclose(hi, h, rtol=1e-12, atol=0)


# ------------------------------------------------------------
# Physical properties over random scenarios (hypothesis). The laws and their sources
# are listed in tests/_property_strategies.py.


# ---------------------------------------------------------- envelope >= coherent
@EXPECTED_PLAUSIBILITY_WARNING
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


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


@pytest.mark.parametrize("material", ["metal", "concrete", "wet-ground"])
def test_on_and_behind_a_reflector(write_scenario, material):
    path = write_scenario(
        ISOTROPIC.replace("[0.0, 0.0, 0.0]", "[0.0, 0.0, 1.0]") + FLOOR.format(material=material)
    )
    points = probe(
        path,
        (0.0, 0.0, 0.0),  # on the plane below the source
        (1.0, 0.0, 0.0),  # on the plane, oblique
        (0.0, 0.0, -0.05),  # inside the floor
        (0.0, 0.0, -1e5),  # far inside
        (1e5, 0.0, 1e-9),  # far along the plane, grazing
    )
    assert all(p["power_density_w_m2"] >= 0 for p in points)
    direct = 100.0 / (4 * math.pi * 1.0**2)  # OET 65 eq. (3) at 1 m below the source
    if material == "metal":
        # Envelope mode adds the reflection in its worst phase, (1 + |Gamma|)^2 = 4 times the
        # direct density for a perfect reflector (contract; OET 65 sec. 2, factor 4).
        assert points[0]["power_density_w_m2"] == pytest.approx(4 * direct, rel=1e-9)
        # Nothing passes a perfect conductor (Balanis, Advanced Engineering
        # Electromagnetics, 2nd ed., sec. 7.4).
        assert points[2]["power_density_w_m2"] == 0.0
    else:
        assert direct < points[0]["power_density_w_m2"] < 4 * direct
