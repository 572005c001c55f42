"""Checks of the thin-wire dipole and monopole (keepclear.antennas.wire).

Sources are named beside each check.  Balanis = C. A. Balanis, *Antenna Theory:
Analysis and Design*, 4th ed., Wiley, 2016.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from keepclear.antennas.base import (
    ETA0_OHM,
    ModelInputError,
    ModelRangeWarning,
    Placement,
)
from keepclear.antennas.wire import (
    Dipole,
    Monopole,
    dipole_radiation_resistance_ohm,
    sinusoidal_dipole_pattern,
)

F_HZ = 2.45e9
LAM = 299792458.0 / F_HZ
K = 2 * np.pi / LAM


# ----------------------------------------------------------------------------- helpers
def sphere_grid(n_theta: int, n_phi: int, upper_only: bool = False):
    """Gauss-Legendre in cos(theta) x uniform phi: unit vectors and solid-angle weights."""
    x, w = np.polynomial.legendre.leggauss(n_theta)
    if upper_only:
        x, w = 0.5 * (x + 1.0), 0.5 * w
    phi = 2 * np.pi * (np.arange(n_phi) + 0.37) / n_phi
    ct = np.repeat(x, n_phi)
    wt = np.repeat(w, n_phi) * (2 * np.pi / n_phi)
    ph = np.tile(phi, n_theta)
    st = np.sqrt(1.0 - ct * ct)
    return np.column_stack([st * np.cos(ph), st * np.sin(ph), ct]), wt


def rotation_frame(axis, position=(0.0, 0.0, 0.0)):
    return Placement.from_axes(position, axis)


# ------------------------------------------------------------------- published numbers
def test_half_wave_dipole_resistance_and_directivity():
    d = Dipole(F_HZ, 1.0)
    assert d.length_m == pytest.approx(LAM / 2, rel=1e-12)
    # Balanis 4th ed. sec. 4.6: R_r = 73 ohm (73.1 with Cin(2 pi) = 2.435), D0 = 1.643.
    assert d.radiation_resistance_ohm == pytest.approx(73.1, abs=0.1)
    assert d.directivity == pytest.approx(1.643, abs=0.003)
    assert 10 * math.log10(d.max_gain()) == pytest.approx(2.15, abs=0.01)
    # Balanis eq. 4-79: R_in = R_r / sin^2(kl/2) = R_r for l = lambda/2.
    assert d.feed_resistance_ohm == pytest.approx(d.radiation_resistance_ohm, rel=1e-12)


def test_quarter_wave_monopole_resistance_and_directivity():
    m = Monopole(F_HZ, 1.0)
    assert m.height_m == pytest.approx(LAM / 4, rel=1e-12)
    # Balanis 4th ed. sec. 4.7 (image theory), quarter-wave monopole on an infinite
    # ground plane: R = 36.5 ohm, D0 = 3.28 (5.16 dBi), twice the half-wave dipole's D.
    assert m.radiation_resistance_ohm == pytest.approx(36.5, abs=0.1)
    assert m.directivity == pytest.approx(3.28, abs=0.01)
    assert 10 * math.log10(m.max_gain()) == pytest.approx(5.16, abs=0.01)
    assert m.largest_dimension_m == pytest.approx(LAM / 2)


def test_full_wave_dipole_numbers_and_feed_singularity():
    d = Dipole(F_HZ, 1.0, LAM)
    # Balanis 4th ed. sec. 4.5 / Table 4.2, l = lambda: R_r ~ 199 ohm, D0 = 2.41 (from memory).
    assert d.radiation_resistance_ohm == pytest.approx(199.0, abs=1.0)
    assert d.directivity == pytest.approx(2.41, abs=0.01)
    # Balanis eq. 4-79 breaks down: the sinusoid has no current at the feed.
    assert math.isinf(d.feed_resistance_ohm)
    assert d.feed_current_a == pytest.approx(0.0, abs=1e-12)


def test_short_dipole_radiation_resistance():
    # Balanis 4th ed. eq. 4-37: a short dipole (triangular current) has
    # R_r = 20 pi^2 (l/lambda)^2 referred to the feed current.
    d = Dipole(F_HZ, 1.0, LAM / 50)
    expected = 20 * np.pi**2 * (1 / 50) ** 2 * (ETA0_OHM / (120 * np.pi))
    assert d.feed_resistance_ohm == pytest.approx(expected, rel=2e-3)


def test_radiation_resistance_against_numerical_pattern_integral():
    # Balanis 4th ed. eq. 4-70 (closed form) versus eq. 4-68 (P_rad as the integral of
    # the pattern), done here by quadrature: R = eta/(2 pi) * int_0^pi f^2 sin t dt.
    x, w = np.polynomial.legendre.leggauss(400)
    for length_wl in (0.02, 0.5, 1.0, 1.5, 2.7, 5.0):
        kh = np.pi * length_wl
        f2 = (sinusoidal_dipole_pattern(x, kh) ** 2) * (1 - x * x)
        r_num = ETA0_OHM / (2 * np.pi) * np.sum(w * f2)
        assert dipole_radiation_resistance_ohm(2 * kh) == pytest.approx(r_num, rel=1e-9)


# ------------------------------------------------------------------ conservation of power
@pytest.mark.parametrize("length_wl", [0.02, 0.5, 1.0, 1.5, 3.0])
def test_far_field_integrates_to_radiated_power_dipole(length_wl):
    # Balanis 4th ed. eq. 2-13: P = closed integral of the radiation intensity.
    d = Dipole(F_HZ, 7.5, length_wl * LAM, rotation_frame((0.3, -0.5, 0.8), (1, 2, 3)))
    u, w = sphere_grid(160, 96)
    f = d.far_field(u)
    p = np.sum(w * np.sum(np.abs(f) ** 2, axis=1)) / ETA0_OHM
    assert p == pytest.approx(7.5, rel=0.01)


@pytest.mark.parametrize("height_wl", [0.25, 0.6])
def test_far_field_integrates_to_radiated_power_monopole(height_wl):
    m = Monopole(F_HZ, 3.0, height_wl * LAM)
    u, w = sphere_grid(120, 8, upper_only=True)
    p_up = np.sum(w * np.sum(np.abs(m.far_field(u)) ** 2, axis=1)) / ETA0_OHM
    assert p_up == pytest.approx(3.0, rel=0.01)
    # Nothing is radiated into the ground plane's lower side.
    u_low = u * np.array([1.0, 1.0, -1.0]) - np.array([0.0, 0.0, 1e-9])
    assert np.all(m.gain(u_low) == 0.0)


def _poynting_flux(radiator, radius_m, upper_only=False):
    u, w = sphere_grid(48, 12, upper_only=upper_only)
    rot = radiator.placement.rotation
    u_global = u @ rot.T
    e, h = radiator.fields(radiator.position_m + radius_m * u_global)
    s = np.real(np.cross(e, np.conj(h)))  # RMS phasors: S = Re(E x H*)
    return float(np.sum(w * np.sum(s * u_global, axis=1)) * radius_m**2)


@pytest.mark.parametrize(
    ("length_wl", "radius_wl"), [(0.5, 1.0), (0.5, 0.3), (1.5, 1.0), (0.02, 1.0)]
)
def test_near_field_poynting_flux_equals_power_dipole(length_wl, radius_wl):
    # Poynting's theorem (lossless medium): the real flux of E x H* through any closed
    # surface around the source is the radiated power (Balanis 4th ed. sec. 1.x / eq. 2-8).
    d = Dipole(F_HZ, 2.0, length_wl * LAM, rotation_frame((1, 1, 0), (0.1, 0.2, 0.3)))
    assert _poynting_flux(d, radius_wl * LAM) == pytest.approx(2.0, rel=0.01)


def test_near_field_poynting_flux_equals_power_monopole():
    # Closed surface = hemisphere r = lambda plus the ground plane; the plane carries no
    # flux because tangential E vanishes on it (checked below), so the hemisphere suffices.
    m = Monopole(F_HZ, 5.0, placement=rotation_frame((0, -1, 1), (1.0, 0.0, 0.5)))
    assert _poynting_flux(m, LAM, upper_only=True) == pytest.approx(5.0, rel=0.01)


# ------------------------------------------------------------------------ far-zone limit
@pytest.mark.parametrize(
    ("cls", "length_wl"),
    [(Dipole, 0.5), (Dipole, 1.0), (Dipole, 1.5), (Monopole, 0.25), (Monopole, 0.6)],
)
def test_near_field_matches_pattern_far_field(cls, length_wl):
    ant = cls(F_HZ, 10.0, length_wl * LAM, rotation_frame((0.2, 0.9, -0.4), (0.5, -1.0, 2.0)))
    # Fraunhofer distance 2 D^2/lambda (Balanis 4th ed. eq. 2-1 context), times ten,
    # and at least a few wavelengths.
    r = max(10 * 2 * ant.largest_dimension_m**2 / LAM, 5 * LAM, 10 * ant.far_field_distance_m)
    u, _ = sphere_grid(40, 16)
    g = ant.gain(u)
    keep = g > 0.05 * ant.max_gain()  # away from pattern nulls (and the monopole's shadow)
    pts = ant.position_m + r * u[keep]
    e, h = ant.fields(pts)
    s_ff = ant.far_field_power_density(pts)
    for s in (
        np.sum(np.abs(e) ** 2, axis=1) / ETA0_OHM,
        ETA0_OHM * np.sum(np.abs(h) ** 2, axis=1),
        np.sum(np.real(np.cross(e, np.conj(h))) * u[keep], axis=1),
    ):
        assert np.max(np.abs(10 * np.log10(s / s_ff))) < 0.1


def test_far_field_vector_is_the_limit_of_the_near_field():
    # Base-class definition: E(r u) -> F(u) e^{-jkr}/r (complex, phase included).
    d = Dipole(F_HZ, 1.0, 0.8 * LAM)
    u, _ = sphere_grid(12, 5)
    r = 2000 * LAM
    e, _ = d.fields(r * u)
    f = d.far_field(u) * (np.exp(-1j * K * r) / r)
    scale = np.max(np.abs(f))
    assert np.max(np.abs(e - f)) < 2e-3 * scale


# ------------------------------------------------------------- wire, feed, ground plane
def test_points_on_the_wire_and_feed_are_finite():
    d = Dipole(F_HZ, 100.0)
    h = d.length_m / 2
    pts = np.array(
        [
            [0, 0, 0],
            [0, 0, h],
            [0, 0, -h],
            [0, 0, 0.3 * h],
            [0, 0, 1.5 * h],
            [1e-6, 0, 0],
            [d.wire_radius_m, 0, 0],
            [0, 0, 1e3],
        ],
        dtype=float,
    )
    e, hh = d.fields(pts)
    assert np.all(np.isfinite(e)) and np.all(np.isfinite(hh))
    # Inside the wire radius the surface value is used.
    assert np.allclose(hh[5], hh[6]) and np.allclose(e[5], e[6])
    # Ampere's circuital law for a thin wire: |H| at the surface next to the feed is
    # I_feed / (2 pi a) (textbook magnetostatics; valid when k a << 1).
    assert np.linalg.norm(hh[6]) == pytest.approx(
        d.feed_current_a / (2 * np.pi * d.wire_radius_m), rel=1e-3
    )


def test_monopole_fields_vanish_below_ground_and_match_image_dipole_above():
    m = Monopole(F_HZ, 4.0)
    d = Dipole(F_HZ, 4.0, 2 * m.height_m, wire_radius_m=m.wire_radius_m)
    rng = np.random.default_rng(1)
    pts = rng.uniform(-0.3, 0.3, size=(400, 3))
    e, h = m.fields(pts)
    below = pts[:, 2] < 0
    assert np.all(e[below] == 0) and np.all(h[below] == 0)
    # Image theory (Balanis 4th ed. sec. 4.7): same current as the 2h dipole above the
    # plane; same power with half the resistance means sqrt(2) times the current.
    ed, hd = d.fields(pts)
    assert np.allclose(e[~below], math.sqrt(2) * ed[~below], rtol=1e-10, atol=0)
    assert np.allclose(h[~below], math.sqrt(2) * hd[~below], rtol=1e-10, atol=0)
    # Perfect conductor boundary condition: tangential E is zero on the plane z = 0.
    plane = np.column_stack([rng.uniform(-0.2, 0.2, 50), rng.uniform(-0.2, 0.2, 50), np.zeros(50)])
    ep, _ = m.fields(plane)
    assert np.max(np.abs(ep[:, :2])) < 1e-9 * np.max(np.abs(ep[:, 2]))


def test_tilted_monopole_shadow_follows_its_plane():
    axis = np.array([1.0, 0.0, 1.0]) / math.sqrt(2)
    m = Monopole(F_HZ, 1.0, placement=Placement.from_axes((1.0, 2.0, 0.5), axis))
    e_behind, _ = m.fields(np.array([1.0, 2.0, 0.5]) - 0.2 * axis + [[0.0, 0.05, 0.0]])
    e_front, _ = m.fields(np.array([1.0, 2.0, 0.5]) + 0.2 * axis + [[0.0, 0.05, 0.0]])
    assert np.all(e_behind == 0) and np.linalg.norm(e_front) > 0


# ------------------------------------------------------------------------------ rotation
def test_rotating_the_placement_rotates_the_fields():
    a = Dipole(F_HZ, 1.0, 0.7 * LAM, Placement.from_axes((0, 0, 0), (0, 0, 1)))
    b = Dipole(F_HZ, 1.0, 0.7 * LAM, Placement.from_axes((0.5, -1.0, 2.0), (1, 0, 0)))
    rng = np.random.default_rng(7)
    pts_a = rng.normal(size=(200, 3)) * 0.2
    local = a.placement.to_local(pts_a)
    pts_b = b.position_m + local @ b.placement.rotation.T
    ea, ha = a.fields(pts_a)
    eb, hb = b.fields(pts_b)
    rot = b.placement.rotation @ a.placement.rotation.T
    assert np.allclose(eb, ea @ rot.T, rtol=1e-10, atol=1e-12)
    assert np.allclose(hb, ha @ rot.T, rtol=1e-10, atol=1e-12)
    # Physical sense of the x-axis dipole: broadside (along y) E is parallel to x,
    # and along its own axis (end-fire) the far field is zero.
    e_side, _ = b.fields(b.position_m + [[0.0, 3.0, 0.0]])
    assert abs(e_side[0, 0]) > 1e3 * max(abs(e_side[0, 1]), abs(e_side[0, 2]))
    assert b.gain([[1.0, 0.0, 0.0]])[0] == pytest.approx(0.0, abs=1e-20)


# ----------------------------------------------------------------- Hertzian-dipole limit
def test_short_dipole_approaches_hertzian_near_field():
    p_w = 1.0
    d = Dipole(F_HZ, p_w, LAM / 50)
    length = d.length_m
    # Short dipole, triangular current: R_in = 20 pi^2 (l/lambda)^2 (Balanis eq. 4-37,
    # eta = 120 pi; rescaled to eta0) and the equivalent Hertzian moment I_in l / 2.
    r_in = 20 * np.pi**2 * (length / LAM) ** 2 * (ETA0_OHM / (120 * np.pi))
    i_l = math.sqrt(p_w / r_in) * length / 2
    rng = np.random.default_rng(3)
    n = 300
    r = LAM * rng.uniform(0.12, 2.0, n)  # kr from 0.75 to 12.6: 1/r^2, 1/r^3 terms matter
    th = np.arccos(rng.uniform(-1, 1, n))
    ph = rng.uniform(0, 2 * np.pi, n)
    st, ct = np.sin(th), np.cos(th)
    kr = K * r
    ex = np.exp(-1j * kr)
    # Balanis 4th ed. eqs. 4-8a/4-10a-b (infinitesimal dipole, all terms).
    e_r = ETA0_OHM * i_l * ct / (2 * np.pi * r**2) * (1 + 1 / (1j * kr)) * ex
    e_t = 1j * ETA0_OHM * K * i_l * st / (4 * np.pi * r) * (1 + 1 / (1j * kr) - 1 / kr**2) * ex
    h_p = 1j * K * i_l * st / (4 * np.pi * r) * (1 + 1 / (1j * kr)) * ex
    r_hat = np.column_stack([st * np.cos(ph), st * np.sin(ph), ct])
    t_hat = np.column_stack([ct * np.cos(ph), ct * np.sin(ph), -st])
    p_hat = np.column_stack([-np.sin(ph), np.cos(ph), np.zeros(n)])
    e_ref = e_r[:, None] * r_hat + e_t[:, None] * t_hat
    h_ref = h_p[:, None] * p_hat
    pts = r[:, None] * r_hat
    # The placement's frame is local; this one is the identity up to a turn about z.
    e, h = d.fields(pts)
    err_e = np.linalg.norm(e - e_ref, axis=1) / np.linalg.norm(e_ref, axis=1)
    err_h = np.linalg.norm(h - h_ref, axis=1) / np.linalg.norm(h_ref, axis=1)
    assert np.max(err_e) < 0.01 and np.max(err_h) < 0.01
    # The quasi-static terms are really exercised: dropping them would fail the check.
    e_far = (1j * ETA0_OHM * K * i_l * st / (4 * np.pi * r) * ex)[:, None] * t_hat
    near = kr < 2
    assert (
        np.min(np.linalg.norm(e_far - e_ref, axis=1)[near] / np.linalg.norm(e_ref, axis=1)[near])
        > 0.1
    )


# ------------------------------------------------------------------------ power, inputs
def test_fields_scale_with_square_root_of_power_and_zero_power_is_zero():
    pts = np.array([[0.05, 0.01, 0.02], [1.0, 0.0, 0.0]])
    e1, h1 = Dipole(F_HZ, 1.0).fields(pts)
    e4, h4 = Dipole(F_HZ, 4.0).fields(pts)
    assert np.allclose(e4, 2 * e1) and np.allclose(h4, 2 * h1)
    e0, h0 = Monopole(F_HZ, 0.0).fields(pts)
    assert np.all(e0 == 0) and np.all(h0 == 0)
    assert np.all(Monopole(F_HZ, 0.0).gain(pts) == 0)


def test_chunked_evaluation_matches_single_pass():
    d = Dipole(F_HZ, 1.0, 1.2 * LAM, rotation_frame((0, 1, 1)))
    pts = np.random.default_rng(5).normal(size=(5000, 3))
    e1, h1 = d.fields(pts)
    e2, h2 = d.fields(pts, chunk_bytes=100 * d.bytes_per_point)
    # Not bit for bit: the rotation to scenario axes is a matrix product, whose rounding
    # may depend on the block size and the BLAS kernel.
    np.testing.assert_allclose(e1, e2, rtol=1e-13, atol=1e-13 * np.abs(e1).max())
    np.testing.assert_allclose(h1, h2, rtol=1e-13, atol=1e-13 * np.abs(h1).max())


@pytest.mark.parametrize("cls", [Dipole, Monopole])
@pytest.mark.parametrize("bad", [0.0, -0.01, float("nan"), float("inf"), 6 * LAM, 1e-5, "long"])
def test_bad_lengths_are_rejected(cls, bad):
    with pytest.raises(ModelInputError) as err:
        cls(F_HZ, 1.0, length_m=bad)
    assert err.value.parameter == "length_m"
    assert "length_m" in str(err.value)


@pytest.mark.parametrize("bad", [0.0, -1e-4, float("nan"), 0.01, "thin"])
def test_bad_wire_radius_is_rejected(bad):
    with pytest.raises(ModelInputError) as err:
        Dipole(F_HZ, 1.0, wire_radius_m=bad)
    assert err.value.parameter == "wire_radius_m"


def test_thick_wire_warns_and_thin_wire_is_silent():
    with pytest.warns(ModelRangeWarning):
        Dipole(F_HZ, 1.0, wire_radius_m=LAM / 50)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        Dipole(F_HZ, 1.0, wire_radius_m=LAM / 500)
        Monopole(F_HZ, 1.0)


def test_kinds_defaults_and_sizes():
    d, m = Dipole(F_HZ, 1.0), Monopole(F_HZ, 1.0)
    assert (d.kind, m.kind) == ("dipole", "monopole")
    assert d.largest_dimension_m == pytest.approx(LAM / 2)
    assert d.wire_radius_m == pytest.approx(LAM / 1000)
    assert Dipole(F_HZ, 1.0, LAM / 100).wire_radius_m == pytest.approx(LAM / 5000)
    # Closed-form peak gain equals the largest sampled gain of the model.
    for ant in (Dipole(F_HZ, 1.0, 1.4 * LAM), Monopole(F_HZ, 1.0, 0.7 * LAM)):
        sampled = float(np.max(ant.gain(sphere_grid(400, 4)[0])))
        assert ant.max_gain() >= sampled
        assert ant.max_gain() == pytest.approx(sampled, rel=2e-3)
