"""The equivalent-current aperture engine and the open waveguide (keepclear.antennas.aperture)."""

from __future__ import annotations

import math

import hypothesis.strategies as st
import numpy as np
import pytest
from hypothesis import given, settings

from keepclear.antennas.aperture import (
    ApertureDistribution,
    ApertureRadiator,
    OpenWaveguide,
    bernstein_pole_parameter,
    gauss_legendre,
    gauss_legendre_order,
    gauss_legendre_order_from_pole,
    gauss_legendre_order_lookup,
    te10_distribution,
    uniform_distribution,
)
from keepclear.antennas.base import (
    C_M_S,
    ETA0_OHM,
    ModelInputError,
    Placement,
    fibonacci_sphere,
)
from keepclear.antennas.waveguide import waveguide_dimensions

from ._edge_cases import probe
from ._hypothesis import examples
from ._property_strategies import EXPECTED_PLAUSIBILITY_WARNING, F_HZ, HAS_APERTURE, _close

F = 2.45e9
LAM = C_M_S / F
K = 2 * np.pi / LAM
A, B = waveguide_dimensions("WR-340")


@pytest.fixture(scope="module")
def guide() -> OpenWaveguide:
    return OpenWaveguide(F, 800.0, A, B)


def power_density(e, h):
    """Plane-wave-equivalent density max(|E|^2/eta0, eta0 |H|^2) (contract)."""
    return np.maximum(np.sum(np.abs(e) ** 2, 1) / ETA0_OHM, ETA0_OHM * np.sum(np.abs(h) ** 2, 1))


def db(ratio):
    return 10 * np.log10(ratio)


def sphere_rule(n_theta: int, n_phi: int):
    """Directions and weights over the sphere: Gauss-Legendre in cos(theta) on each hemisphere,
    trapezoid in phi; weights sum to 4 pi."""
    x, w = gauss_legendre(n_theta)
    cos_t = np.concatenate([(x - 1) / 2, (x + 1) / 2])
    w_t = np.concatenate([w / 2, w / 2])
    phi = 2 * np.pi * (np.arange(n_phi) + 0.5) / n_phi
    ct, ph = np.meshgrid(cos_t, phi, indexing="ij")
    st = np.sqrt(1 - ct**2)
    u = np.stack([st * np.cos(ph), st * np.sin(ph), ct], axis=-1).reshape(-1, 3)
    return u, (w_t[:, None] * np.full(n_phi, 2 * np.pi / n_phi)).ravel()


def poynting_flux_w(radiator, radius_m, n_theta=24, n_phi=48):
    """Net real Poynting flux out of a sphere about the aperture centre,
    P = int Re(E x H*) . n dA for RMS phasors (Jackson, 3rd ed., eq. (6.132))."""
    u, w = sphere_rule(n_theta, n_phi)
    e, h = radiator.fields(radius_m * u)
    return float(np.sum(np.real(np.cross(e, np.conj(h))) * u, axis=1) @ w * radius_m**2)


def random_points(radiator, n, seed, d_min, d_max=2.0, behind_fraction=0.2):
    """Points whose distance to the aperture rectangle lies in [d_min, d_max], some behind."""
    rng = np.random.default_rng(seed)
    lx, ly = radiator.distribution.half_sizes_m
    d = np.exp(rng.uniform(np.log(d_min), np.log(d_max), 3 * n))
    u = rng.normal(size=(3 * n, 3))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    u[:, 2] = np.where(rng.random(3 * n) < behind_fraction, u[:, 2], np.abs(u[:, 2]))
    anchor = np.column_stack([rng.uniform(-lx, lx, 3 * n), rng.uniform(-ly, ly, 3 * n), 0 * d])
    p = anchor + d[:, None] * u
    lateral = np.hypot(np.maximum(np.abs(p[:, 0]) - lx, 0), np.maximum(np.abs(p[:, 1]) - ly, 0))
    keep = np.hypot(lateral, p[:, 2]) >= d_min
    return p[keep][:n]


# ----------------------------------------------------------- aperture efficiency
@pytest.mark.parametrize(
    ("distribution", "limit"),
    [
        # Balanis, Antenna Theory 4th ed., Table 12.1: uniform distribution on a ground
        # plane D0 = 4 pi ab / lambda^2 (efficiency 1); TE10 distribution on a ground
        # plane D0 = (8/pi^2) 4 pi ab / lambda^2 (efficiency 8/pi^2 = 0.811), both in the
        # large-aperture limit.
        (uniform_distribution, 1.0),
        (lambda a, b, eq: te10_distribution(a, b, ETA0_OHM, eq), 8 / np.pi**2),
    ],
    ids=["uniform", "te10"],
)
def test_aperture_efficiency_large_aperture_limit(distribution, limit):
    efficiencies = []
    for size in (3, 14):
        a, b = size * LAM, 0.75 * size * LAM
        if distribution is uniform_distribution:
            dist = uniform_distribution(a, b, equivalence="ground-plane")
        else:
            dist = distribution(a, b, "ground-plane")
        rad = ApertureRadiator(F, 1.0, dist)
        efficiencies.append(rad.boresight_gain() / (4 * np.pi * a * b / LAM**2))
    small, large = efficiencies
    assert abs(large - limit) < abs(small - limit)  # it tends to the limit ...
    assert large == pytest.approx(limit, rel=0.015)  # ... and is close at 14 x 10.5 lambda


def test_huygens_te10_aperture_efficiency_tends_to_8_over_pi2():
    # Balanis 4th ed. Table 12.1 / sec. 12.5: with both currents (H = -E/eta) the
    # large-aperture directivity is the same (8/pi^2) 4 pi ab / lambda^2.
    a, b = 16 * LAM, 12 * LAM  # the obliquity factor makes it converge more slowly
    rad = ApertureRadiator(F, 1.0, te10_distribution(a, b, ETA0_OHM))
    assert rad.boresight_gain() / (4 * np.pi * a * b / LAM**2) == pytest.approx(0.8106, rel=0.01)


# ---------------------------------------------------------------- power
def test_radiated_power_equals_power_w(guide):
    # Independent quadrature (golden-spiral lattice, Gonzalez 2010) of the far-field power
    # (1/eta0) int |F|^2 dOmega over the sphere: the normalisation target.
    u = fibonacci_sphere(60000)
    density = np.sum(np.abs(guide.far_field(u)) ** 2, axis=1) / ETA0_OHM * (4 * np.pi / u.shape[0])
    front = float(np.sum(density[u[:, 2] > 0]))
    total = float(np.sum(density))
    assert total == pytest.approx(guide.power_w, rel=0.01)
    # The Kirchhoff back radiation of the open end is part of it, as stated.
    assert total == pytest.approx(front * (1 + guide.back_fraction), rel=0.01)
    assert 0.05 < guide.back_fraction < 0.25


def test_near_field_poynting_flux_through_a_sphere_equals_power_w(guide):
    # Poynting's theorem: the flux of Re(E x H*) out of any closed surface around the
    # sources equals the radiated power; here a sphere of radius 0.1 m (0.8 lambda, in the
    # reactive/radiating near field of the 97 mm aperture).
    flux = poynting_flux_w(guide, 0.10, n_theta=20, n_phi=40)
    assert flux == pytest.approx(guide.power_w, rel=0.01)


def test_flange_model_radiates_only_in_front():
    flange = OpenWaveguide(F, 100.0, A, B, model="flange")
    assert flange.back_fraction == 0.0
    e, h = flange.fields([[0.0, 0.0, -0.1], [0.2, 0.0, -0.01]])
    assert np.all(e == 0) and np.all(h == 0)
    flux = poynting_flux_w(flange, 0.1, n_theta=20, n_phi=40)
    assert flux == pytest.approx(100.0, rel=0.01)


def test_fields_scale_with_the_square_root_of_power():
    p = [[0.05, 0.02, 0.2]]
    e1, _ = OpenWaveguide(F, 100.0, A, B).fields(p)
    e4, _ = OpenWaveguide(F, 400.0, A, B).fields(p)
    np.testing.assert_allclose(e4, 2 * e1, rtol=1e-12)
    e0, h0 = OpenWaveguide(F, 0.0, A, B).fields(p)
    assert np.all(e0 == 0) and np.all(h0 == 0)


# ------------------------------------------------------- kernel against dipoles
def dipole_fields(points, axis, kind):
    """Complete fields of an infinitesimal dipole of unit moment along `axis` at the origin.

    Electric (moment I l): Balanis, Antenna Theory 4th ed., sec. 4.2, eqs. (4-10a)-(4-10c)
    (numbering from memory); Jackson 3rd ed. eq. (9.18).  Magnetic (moment K l): the same by
    duality (E -> H, H -> -E, eta -> 1/eta; Balanis sec. 3.7 / 5.2).  e^{+j omega t}.
    """
    r = np.linalg.norm(points, axis=1)
    rh = points / r[:, None]
    cos_t = rh @ axis
    sin_t = np.sqrt(1 - cos_t**2)
    theta_hat = (rh * cos_t[:, None] - axis) / sin_t[:, None]
    phi_hat = np.cross(axis, rh) / sin_t[:, None]
    kr = K * r
    ph = np.exp(-1j * kr)
    eta = ETA0_OHM if kind == "electric" else 1 / ETA0_OHM
    radial = eta * cos_t / (2 * np.pi * r**2) * (1 + 1 / (1j * kr)) * ph
    polar = 1j * eta * K * sin_t / (4 * np.pi * r) * (1 + 1 / (1j * kr) - 1 / kr**2) * ph
    azimuthal = 1j * K * sin_t / (4 * np.pi * r) * (1 + 1 / (1j * kr)) * ph
    first = radial[:, None] * rh + polar[:, None] * theta_hat  # E (electric) / H (magnetic)
    second = azimuthal[:, None] * phi_hat  # H (electric) / -E (magnetic)
    if kind == "electric":
        return first, second
    return -second, first


@pytest.mark.parametrize("kind", ["electric", "magnetic"])
def test_small_aperture_has_the_complete_dipole_near_field(kind):
    # A lambda/40 square aperture is an infinitesimal dipole: its fields, 1/r, 1/r^2 and
    # 1/r^3 terms alike, must follow the closed-form dipole fields from lambda/4 outward.
    side = LAM / 40
    if kind == "magnetic":
        # E_y on a ground plane: M = 2 E_y x_hat, a magnetic dipole along x.
        dist = uniform_distribution(side, side, equivalence="ground-plane")
        axis = np.array([1.0, 0.0, 0.0])
    else:
        # H_x alone with both-current equivalence: J = z x H = -H_x y_hat, electric along y.
        def only_h(x, y):
            shape = np.broadcast(x, y).shape
            e = np.zeros(shape + (2,), complex)
            h = np.zeros(shape + (2,), complex)
            h[..., 0] = 1.0
            return e, h

        dist = ApertureDistribution(side, side, only_h)
        axis = np.array([0.0, 1.0, 0.0])
    rad = ApertureRadiator(F, 1.0, dist)
    rng = np.random.default_rng(11)
    u = rng.normal(size=(40, 3))
    u[:, 2] = np.abs(u[:, 2]) + 0.2
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    r = np.exp(rng.uniform(np.log(LAM / 4), np.log(2 * LAM), 40))
    pts = u * r[:, None]
    e, h = rad.fields(pts, method="direct")
    e_ref, h_ref = dipole_fields(pts, axis, kind)
    scale = e[0] @ np.conj(e_ref[0]) / (e_ref[0] @ np.conj(e_ref[0]))  # moment and sign
    np.testing.assert_allclose(e, scale * e_ref, rtol=0, atol=0.01 * np.abs(scale * e_ref).max())
    for got, ref in ((e, e_ref), (h, h_ref)):
        err = np.linalg.norm(got - scale * ref, axis=1) / np.linalg.norm(scale * ref, axis=1)
        assert err.max() < 0.01


# ---------------------------------------------------------------- quadrature
@pytest.mark.parametrize("x0", [0.0, 0.4, 0.97, 1.5])
@pytest.mark.parametrize("d", [0.02, 0.1, 0.5, 3.0])
def test_gauss_legendre_order_on_a_near_singular_integral(x0, d):
    # int_{-1}^{1} dx / ((x - x0)^2 + d^2)^{3/2} = [u / (d^2 sqrt(u^2 + d^2))], u = x - x0
    # (elementary antiderivative, common practice): the 1/R^3 near-field kernel.
    tol = 1e-6
    n = int(np.ceil(gauss_legendre_order(1.0, x0, d, 0.0, tol)))
    x, w = gauss_legendre(n)
    got = np.sum(w / ((x - x0) ** 2 + d**2) ** 1.5)

    def anti(u):
        return u / (d**2 * np.sqrt(u**2 + d**2))

    exact = anti(1 - x0) - anti(-1 - x0)
    assert abs(got - exact) <= tol * exact


@pytest.mark.parametrize("omega", [0.5, 5.0, 20.0, 80.0])
def test_gauss_legendre_order_on_an_oscillatory_integral(omega):
    # int_{-1}^{1} e^{j omega x} dx = 2 sin(omega) / omega (common practice).
    tol = 1e-6
    n = int(np.ceil(gauss_legendre_order(1.0, 0.0, np.inf, omega, tol)))
    x, w = gauss_legendre(n)
    assert abs(np.sum(w * np.exp(1j * omega * x)) - 2 * np.sin(omega) / omega) <= 2 * tol


def test_order_lookup_never_undercuts_the_estimate():
    rng = np.random.default_rng(2)
    log_rho = bernstein_pole_parameter(
        1.0, rng.uniform(-3, 3, 5000), 10 ** rng.uniform(-3, 1, 5000)
    )
    omega = 10 ** rng.uniform(-2, 3, 5000)
    exact = gauss_legendre_order_from_pole(log_rho, omega, 1e-4)
    assert np.all(gauss_legendre_order_lookup(log_rho, omega, 1e-4) >= exact - 1e-9)


def test_adaptive_matches_direct_from_a_tenth_wavelength_to_2_m(guide):
    # Converged direct integration is the reference; 0.1 dB is the accuracy promised.
    pts = random_points(guide, 150, seed=7, d_min=LAM / 10)
    ea, ha = guide.fields(pts)
    ed, hd = guide.fields(pts, method="direct")
    assert np.max(np.abs(db(power_density(ea, ha) / power_density(ed, hd)))) < 0.1
    assert np.max(np.abs(db(np.sum(abs(ea) ** 2, 1) / np.sum(abs(ed) ** 2, 1)))) < 0.1
    assert np.max(np.abs(db(np.sum(abs(ha) ** 2, 1) / np.sum(abs(hd) ** 2, 1)))) < 0.1


def test_direct_reference_is_converged(guide):
    pts = random_points(guide, 30, seed=8, d_min=LAM / 10, d_max=0.3)
    e1, h1 = guide.fields(pts, method="direct")
    finer = OpenWaveguide(F, 800.0, A, B)
    finer.direct_tolerance = 1e-11
    assert finer.direct_orders()[0] > guide.direct_orders()[0]
    e2, h2 = finer.fields(pts, method="direct")
    assert np.max(np.linalg.norm(e1 - e2, axis=1) / np.linalg.norm(e2, axis=1)) < 1e-5


def test_far_zone_integral_agrees_with_the_pattern(guide):
    # Beyond 10 x 2 D^2 / lambda the integrated near field and F e^{-jkr}/r agree to 0.1 dB
    # (the Fraunhofer distance 2 D^2 / lambda: Balanis 4th ed. sec. 2.2.4).
    fraunhofer = 2 * guide.largest_dimension_m**2 / LAM
    assert guide.far_zone_distance_m == pytest.approx(max(40 * fraunhofer, 20 * LAM))
    u = fibonacci_sphere(400)
    u = u[u[:, 2] > -0.9]
    for r in (10.5 * fraunhofer, guide.far_zone_distance_m):
        e, h = guide.fields(r * u, method="direct")
        f = guide.far_field(u) * (np.exp(-1j * K * r) / r)
        assert np.max(np.abs(db(np.sum(abs(e) ** 2, 1) / np.sum(abs(f) ** 2, 1)))) < 0.1
    # and the adaptive method is continuous where it switches to the pattern
    r0 = guide.far_zone_distance_m
    dirs = u[:50]
    s_in = power_density(*guide.fields(0.999 * r0 * dirs)) * 0.999**2
    s_out = power_density(*guide.fields(1.001 * r0 * dirs)) * 1.001**2
    assert np.max(np.abs(db(s_in / s_out))) < 0.1


# ------------------------------------------------------- finiteness and symmetry
def test_finite_on_the_aperture_and_behind_it(guide):
    lx, ly = A / 2, B / 2
    pts = [[0, 0, 0], [lx, ly, 0], [-lx, 0, 0], [0, ly, 0], [0, 0, 1e-9], [0, 0, -1e-9],
           [lx * 1.01, 0, 0], [0, 0, -0.05], [0, 0, -1.0], [0.3, 0.2, -0.2], [0, 0, 1e-12]]  # fmt: skip
    e, h = guide.fields(pts)
    assert np.all(np.isfinite(e)) and np.all(np.isfinite(h))
    s = power_density(e, h)
    assert np.all(s > 0)
    # Behind, the Kirchhoff continuation is well below the front field at the same distance.
    front = power_density(*guide.fields([[0, 0, 1.0]]))[0]
    assert s[8] < 0.2 * front


def test_points_inside_the_standoff_take_the_standoff_value(guide):
    h_min = guide.min_standoff_m
    assert h_min == pytest.approx(LAM / 20)
    e0, h0 = guide.fields([[0.01, 0.005, 0.0], [0.01, 0.005, 0.3 * h_min]])
    e1, h1 = guide.fields([[0.01, 0.005, h_min]])
    np.testing.assert_allclose(e0, np.vstack([e1, e1]), rtol=1e-12)
    np.testing.assert_allclose(h0, np.vstack([h1, h1]), rtol=1e-12)


def test_te10_pattern_symmetric_in_both_principal_planes(guide):
    rng = np.random.default_rng(4)
    u = rng.normal(size=(200, 3))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    g = guide.gain(u)
    for mirror in ([1, -1, 1], [-1, 1, 1], [-1, -1, 1]):  # phi -> -phi, pi - phi, pi + phi
        np.testing.assert_allclose(guide.gain(u * mirror), g, rtol=1e-9)
    p = random_points(guide, 100, seed=5, d_min=LAM / 10, d_max=0.5)
    s = power_density(*guide.fields(p))
    for mirror in ([1, -1, 1], [-1, 1, 1]):
        np.testing.assert_allclose(power_density(*guide.fields(p * mirror)), s, rtol=1e-9)


def test_rotating_the_scenario_rotates_the_fields():
    local = OpenWaveguide(F, 500.0, A, B)
    placement = Placement.from_axes([1.0, -2.0, 0.5], main_axis=[1, 1, 0], polarization=[0, 0, 1])
    placed = OpenWaveguide(F, 500.0, A, B, placement)
    rot = placement.rotation
    assert np.allclose(rot[:, 2], np.array([1, 1, 0]) / np.sqrt(2))  # boresight
    assert np.allclose(rot[:, 1], [0, 0, 1])  # polarisation: local E along scenario z
    p_local = random_points(local, 60, seed=9, d_min=LAM / 10, d_max=1.0)
    e_l, h_l = local.fields(p_local)
    e_g, h_g = placed.fields(p_local @ rot.T + placement.position_m)
    np.testing.assert_allclose(e_g, e_l @ rot.T, rtol=1e-9, atol=1e-9 * np.abs(e_l).max())
    np.testing.assert_allclose(h_g, h_l @ rot.T, rtol=1e-9, atol=1e-9 * np.abs(h_l).max())
    u = fibonacci_sphere(50)
    np.testing.assert_allclose(placed.gain(u @ rot.T), local.gain(u), rtol=1e-9)
    # the E-field at boresight is along the polarisation, as the contract says
    e_b, _ = placed.fields([placement.position_m + 1.0 * rot[:, 2]])
    assert abs(e_b[0] @ [0, 0, 1]) / np.linalg.norm(e_b[0]) > 0.999


# -------------------------------------------------------- chunking and options
def test_chunking_and_threads_do_not_change_the_result(guide):
    pts = random_points(guide, 200, seed=10, d_min=LAM / 10, d_max=3.0)
    e1, h1 = guide.fields(pts)
    e2, h2 = guide.fields(pts, chunk_bytes=16 * 1024)
    single = OpenWaveguide(F, 800.0, A, B)
    single.threads = 1
    e3, h3 = single.fields(pts)
    for e in (e2, e3):
        np.testing.assert_allclose(e, e1, rtol=1e-12, atol=0)
    np.testing.assert_allclose(h2, h1, rtol=1e-12, atol=0)
    e4, _ = guide.fields(pts[:5], chunk_bytes=10 * 1024**3)  # clamped to the 1 GiB ceiling
    np.testing.assert_allclose(e4, e1[:5], rtol=1e-12)


def test_bad_options_are_refused():
    with pytest.raises(ModelInputError):
        OpenWaveguide(F, 1.0, A, B, method="fast")
    with pytest.raises(ModelInputError):
        OpenWaveguide(F, 1.0, A, B, model="lens")
    with pytest.raises(ModelInputError):
        OpenWaveguide(F, 1.0, A, B).fields([[0, 0, 1]], method="fast")
    with pytest.raises(ModelInputError):
        uniform_distribution(0.0, 0.1)


def test_huygens_aperture_radiates_forward():
    # Poynting vector of the aperture field E_y x H_x* = -|E|^2/Z z_hat ... with H_x = -E_y/Z it
    # points along +z: more power in front than behind.
    rad = ApertureRadiator(F, 1.0, te10_distribution(2 * LAM, LAM, ETA0_OHM))
    assert rad.gain([[0, 0, 1]])[0] > 100 * rad.gain([[0, 0, -1]])[0]


# ------------------------------------------------------------
# Physical properties over random scenarios (hypothesis). The laws and their sources
# are listed in tests/_property_strategies.py.


# -------------------------------------------------------------- TE10 symmetry
@EXPECTED_PLAUSIBILITY_WARNING
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


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


@pytest.fixture
def open_waveguide(write_scenario):
    pytest.importorskip("keepclear.antennas.aperture")
    return write_scenario(
        """
        [[source]]
        antenna = "open-waveguide"
        power_w = 800.0
        waveguide = "WR-340"
        position_m = [0.0, 0.0, 1.0]
        boresight = [1.0, 0.0, 0.0]
        polarization = [0.0, 0.0, 1.0]
        """
    )


def test_open_waveguide_on_its_aperture(open_waveguide):
    a, b = 0.08636, 0.04318  # WR-340 inner size (EIA WR-340: 3.400 x 1.700 in)
    # Local x is the broad wall: here boresight +x, polarization +z, so broad along -y or +y.
    pts = [(0.0, 0.0, 1.0)]
    pts += [(0.0, sy * a / 2, 1.0 + sz * b / 2) for sy in (-1, 1) for sz in (-1, 1)]
    pts += [(0.0, a / 2, 1.0), (0.0, 0.0, 1.0 + b / 2), (-1e-9, 0.0, 1.0), (-0.05, 0.0, 1.0)]
    pts += [(1e5, 0.0, 1.0)]
    points = probe(open_waveguide, *pts)
    assert points[0]["power_density_w_m2"] > 0
    assert all(p["power_density_w_m2"] >= 0 for p in points)
