"""The monopole on a finite plate or through the face of a closed box (NEC-2 wire grid).

Each check names its source beside the value.  The NEC-2 solutions are cached per
geometry, so the module builds three grids: the box of the issue's full-wave case, a
one-wavelength plate and a two-wavelength plate.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from keepclear.antennas import moment
from keepclear.antennas.base import ETA0_OHM, ModelInputError, Placement
from keepclear.antennas.finite_ground import FiniteGroundMonopole
from keepclear.antennas.wire import Monopole
from keepclear.fields.errors import ScenarioError
from keepclear.fields.scenario import load_scenario

pytest.importorskip("PyNEC")

F_HZ = 2.45e9
LAM = 299792458.0 / F_HZ
BOX = {"ground": "box", "ground_size_m": (0.20, 0.09), "box_depth_m": 0.15}
# A smaller box (fewer segments) for the checks of geometry and input.
SMALL_BOX = {
    "ground": "box",
    "ground_size_m": (0.10, 0.06),
    "ground_offset_m": (0.02, 0.0),
    "box_depth_m": 0.05,
}


def _density(model, points):
    e, h = model.fields(points)
    return np.maximum(
        np.sum(np.abs(e) ** 2, axis=1) / ETA0_OHM, ETA0_OHM * np.sum(np.abs(h) ** 2, axis=1)
    )


def _elevation_directions(elevation_deg, azimuth_deg=0.0):
    el, az = np.radians(elevation_deg), math.radians(azimuth_deg)
    return np.column_stack([np.cos(el) * math.cos(az), np.cos(el) * math.sin(az), np.sin(el)])


@pytest.fixture(scope="module")
def box():
    # The full-wave case: a 30 mm probe through the centre of the 0.20 x 0.09 m
    # face of a closed box 0.15 m deep.
    return FiniteGroundMonopole(F_HZ, 1.0, 0.030, **BOX)


@pytest.fixture(scope="module")
def plate_1():
    return FiniteGroundMonopole(F_HZ, 1.0, LAM / 4, ground="plate", ground_size_m=(LAM, LAM))


@pytest.fixture(scope="module")
def plate_2():
    return FiniteGroundMonopole(
        F_HZ, 1.0, LAM / 4, ground="plate", ground_size_m=(2 * LAM, 2 * LAM)
    )


# ------------------------------------------------------------------ published numbers
def test_box_peak_directivity_against_the_full_wave_figure(box):
    # Full-wave (FDTD) solution of this geometry quoted in the project's issue 12: peak
    # directivity 2.4 dBi (the infinite-ground model says 5.2 dBi).  Within 1 dB, the
    # project's acceptance for a peak directivity.  Found when written: 2.44 dBi.
    d_dbi = 10 * math.log10(box.max_gain())
    assert d_dbi == pytest.approx(2.4, abs=1.0)
    assert d_dbi < 10 * math.log10(Monopole(F_HZ, 1.0, 0.030).max_gain()) - 2.0


def test_box_density_behind_and_beside_within_the_full_wave_range(box):
    # Issue 12: the full-wave solution gives 0.06-1.5 W/m^2 per radiated watt at
    # 0.2-0.3 m behind and beside the box.  Local frame: face at z = 0, box to
    # z = -0.15, width along x (+-0.10), height along y (+-0.045).
    pts = np.array(
        [
            [0.1, 0.0, -0.15 - 0.2],  # behind the back face, off its axis
            [-0.15, 0.0, -0.15 - 0.3],
            [0.1 + 0.2, 0.0, -0.075],  # beside, off the narrow side faces
            [-0.1 - 0.3, 0.0, -0.075],
            [0.0, 0.045 + 0.2, -0.075],  # above / below the box
            [0.0, -0.045 - 0.3, -0.075],
            [0.25, 0.0, -0.35],  # behind and beside
        ]
    )
    s = _density(box, pts)
    assert np.all(np.isfinite(s))
    # Not a silent zero: at least half the lowest full-wave figure, at most twice the
    # highest.  Found when written: 0.07 to 0.95 W/m^2.
    assert np.all(s > 0.03) and np.all(s < 3.0), s
    # On the box's axis, behind it, the far field has a null: the structure is
    # symmetric about the planes x = 0 and y = 0, so the transverse field there
    # cancels.  What is left is small but not zero (0.011 W/m^2 at 0.3 m when written).
    s_axis = _density(box, np.array([[0.0, 0.0, -0.45]]))[0]
    assert 0.0 < s_axis < 0.2 * np.min(s)
    assert box.gain(np.array([[0.0, 0.0, -1.0]]))[0] < 0.01


def test_plate_pattern_tilts_up_from_the_plane(plate_1, plate_2):
    # M. M. Weiner, Monopole Antennas (Marcel Dekker, 2003), ch. 4 (from memory): on a
    # ground plane about a wavelength across, the peak of a quarter-wave monopole's
    # pattern is tilted up from the plane by tens of degrees (about 30-45 deg), and the
    # tilt shrinks as the plane grows.  Found when written: 43.6 deg (1 lambda), 32.4
    # deg (2 lambda).
    elev = [math.degrees(math.asin(m.peak_direction()[2])) for m in (plate_1, plate_2)]
    assert 25.0 < elev[0] < 55.0
    assert 15.0 < elev[1] < elev[0] - 5.0


def test_plate_field_on_the_horizon_is_half_the_infinite_ground_value(plate_1, plate_2):
    # Edge diffraction at grazing incidence: in the plane of a finite ground plane the
    # far field is half that over an infinite plane, -6.02 dB (Weiner 2003, ch. 4, for
    # circular planes; from memory).  On a square plate this holds in its planes of
    # symmetry (towards an edge's middle and towards a corner); in between, the other
    # edges' diffraction adds a ripple of about 1.5 dB.  Found when written: -5.7 and
    # -6.3 dB at both azimuths.
    inf = Monopole(F_HZ, 1.0, LAM / 4)
    for m in (plate_1, plate_2):
        for az in (0.0, 45.0):
            u = _elevation_directions(np.array([0.0]), az)
            diff = 10 * math.log10(m.gain(u)[0] / inf.gain(u)[0])
            assert diff == pytest.approx(-6.02, abs=0.6)


def test_large_plate_tends_to_the_infinite_ground_monopole(plate_2):
    # Infinite ground: R = 36.5 ohm for the thin quarter-wave monopole (Balanis 4th ed.
    # sec. 4.7.4, half the half-wave dipole's 73 ohm); NEC-2 over a perfect ground gives
    # 41.8 ohm for this exact lambda/4 wire of radius lambda/1000 (tests/test_wire_nec.py
    # geometry, found when written).  The plate's radiation resistance oscillates about
    # that value with the plate size and settles as it grows (Weiner 2003, ch. 4).
    # Found when written: 37.5 ohm (1 lambda), 42.7 ohm (2 lambda), 41.1 ohm (3 lambda).
    assert plate_2.radiation_resistance_ohm == pytest.approx(41.8, rel=0.05)
    assert plate_2.radiation_resistance_ohm == pytest.approx(36.5, rel=0.2)
    # Broadside pattern between 20 and 45 deg elevation within 2.5 dB of the infinite
    # ground's (nearer the plane the -6 dB of the horizon takes over), the peak within
    # 1 dB of its 5.16 dBi (Balanis 4th ed. sec. 4.7.4).  Found when written: 2.1 dB
    # and 4.67 dBi.
    inf = Monopole(F_HZ, 1.0, LAM / 4)
    u = _elevation_directions(np.arange(20.0, 46.0, 5.0))
    diff = 10 * np.log10(plate_2.gain(u) / inf.gain(u))
    assert np.max(np.abs(diff)) < 2.5
    assert 10 * math.log10(plate_2.max_gain()) == pytest.approx(5.16, abs=1.0)


def test_smaller_plate_lies_further_from_the_infinite_ground(plate_1, plate_2):
    g_inf = 10 * math.log10(Monopole(F_HZ, 1.0, LAM / 4).max_gain())
    g1, g2 = (10 * math.log10(m.max_gain()) for m in (plate_1, plate_2))
    assert g_inf - g1 > g_inf - g2 > -0.5


# ------------------------------------------------------------------ identities
def _poynting_flux(model, centre, radius_m, n_theta=32):
    dirs, w = moment._gauss_sphere(n_theta)
    e, h = model.fields(centre + radius_m * dirs)
    s_r = np.sum(np.real(np.cross(e, np.conj(h))) * dirs, axis=1)  # RMS phasors: Re(E x H*)
    return float(np.sum(w * s_r) * radius_m**2)


def test_power_conserved_through_a_sphere_around_the_box(box):
    # Poynting's theorem (lossless): the flux of Re(E x H*) (RMS phasors) through any
    # closed surface around the source is the radiated power (Balanis 4th ed. sec. 1.x).
    # The near-field kernel is independent of the far-field integral that sets the
    # scale, so this checks both.  Sphere about the box centre, clear of the metal.
    centre = np.array([0.0, 0.0, -0.06])
    for radius in (0.2, 0.5):
        assert _poynting_flux(box, centre, radius) == pytest.approx(1.0, rel=0.02)


def test_power_conserved_through_a_sphere_around_the_plate(plate_1):
    assert _poynting_flux(plate_1, np.zeros(3), 0.6 * LAM + 0.1) == pytest.approx(1.0, rel=0.02)


def test_near_field_tends_to_the_far_field(box):
    # E -> F e^{-jkr}/r (the base class's definition of F).  100 m is far beyond
    # 2 D^2/lambda; agreement within 0.1 dB.
    u = moment._gauss_sphere(6)[0]
    r = 100.0
    e, _ = box.fields(r * u)
    f = box.far_field(u)
    ratio = np.linalg.norm(e, axis=1) * r / np.linalg.norm(f, axis=1)
    assert np.max(np.abs(20 * np.log10(ratio))) < 0.1


def test_kernel_agrees_with_nec_own_near_field(plate_1):
    # NEC-2 (nec2++ via PyNEC) evaluates its own three-term segment currents (NE/NH
    # requests, Burke & Poggio 1981, part III); the kernel radiates the node-continuous
    # piecewise-sinusoidal current built from NEC's centre currents.  Same scale for both.
    rng = np.random.default_rng(3)
    u = rng.normal(size=(16, 3))
    u /= np.linalg.norm(u, axis=1)[:, None]
    near, far = u * 0.05, np.vstack([u * 0.1, u * 0.3, u * 1.0])
    pts = np.vstack([near, far])
    e_nec, h_nec = moment.nec_near_fields(plate_1.structure, F_HZ, pts)
    fs = plate_1.structure.feed_segment
    scale = abs(plate_1.elements.start_currents_a[fs] / plate_1.solution.node_currents_a[0][fs])
    e, h = plate_1.fields(pts)
    de = 20 * np.log10(np.linalg.norm(e, axis=1) / np.linalg.norm(scale * e_nec, axis=1))
    dh = 20 * np.log10(np.linalg.norm(h, axis=1) / np.linalg.norm(scale * h_nec, axis=1))
    # Found when written: within 0.35 dB from 0.1 m, within 2 dB at 5 cm (next to grid
    # nodes, where the two current representations differ most).
    n = near.shape[0]
    assert np.max(np.abs(de[n:])) < 0.5 and np.max(np.abs(dh[n:])) < 0.5
    assert np.max(np.abs(de[:n])) < 2.5 and np.max(np.abs(dh[:n])) < 2.5


def test_outer_expansion_matches_the_direct_kernel(box):
    # The tabulated outgoing-wave expansion (Wilcox 1956) used beyond 2.5 r_s against the
    # exact kernel: within 1e-3 of the largest field at each distance (1e-4 when written).
    ex = box.expansion
    u = np.random.default_rng(7).normal(size=(300, 3))
    u /= np.linalg.norm(u, axis=1)[:, None]
    for r in (ex.inner_radius_m * 1.0001, 0.6, 2.0, 20.0):
        pts = ex.centre_m + r * u
        assert ex.covers(pts).all()
        e0, h0 = box.elements.fields(pts)
        for e1, h1 in (ex.fields(pts), ex.fields_exact(pts)):  # interpolated, full sum
            assert np.max(np.linalg.norm(e1 - e0, axis=1)) < 1e-3 * np.max(np.abs(e0))
            assert np.max(np.linalg.norm(h1 - h0, axis=1)) < 1e-3 * np.max(np.abs(h0))
    # The far field from the table at s = 0 against the segments' radiation integral.
    f0 = box.elements.far_field(u)
    f1 = box._local_far_field(u)
    assert np.max(np.linalg.norm(f1 - f0, axis=1)) < 1e-3 * np.max(np.abs(f0))
    # The model switches between the two on this radius: no step in the fields.
    d = np.array([0.3, 0.5, -0.8]) / np.linalg.norm([0.3, 0.5, -0.8])
    inner = ex.centre_m + ex.inner_radius_m * (1 - 1e-9) * d
    outer = ex.centre_m + ex.inner_radius_m * (1 + 1e-9) * d
    e_in, _ = box.fields(inner[None, :])
    e_out, _ = box.fields(outer[None, :])
    assert np.linalg.norm(e_out - e_in) < 1e-3 * np.linalg.norm(e_in)


def test_clustered_near_field_matches_the_direct_kernel(box):
    # Within 2.5 r_s the segments are split into clusters, each radiating by its own
    # outgoing-wave table beyond 2.5 of its radius (moment.ClusteredElements): the sum
    # against the exact kernel of every segment, at points from 2 cm of the box's centre
    # to the whole table's radius (5.6e-5 of each point's field at worst when written).
    near = box._solved.near
    assert len(near.parts) == 8
    assert sum(p.count for p in near.parts) == box.elements.count
    rng = np.random.default_rng(11)
    u = rng.normal(size=(600, 3))
    u /= np.linalg.norm(u, axis=1)[:, None]
    ex = box.expansion
    pts = ex.centre_m + u * rng.uniform(0.02, ex.inner_radius_m, size=(600, 1))
    e0, h0 = box._solved.elements.fields(pts)
    e1, h1 = near.fields(pts)
    assert np.all(np.linalg.norm(e1 - e0, axis=1) < 1e-3 * np.linalg.norm(e0, axis=1))
    assert np.all(np.linalg.norm(h1 - h0, axis=1) < 1e-3 * np.linalg.norm(h0, axis=1))
    # at least one cluster answered by its table, and at least one by the kernel
    pairs = zip(near.centres_m, near.radii_m, strict=True)
    r = np.asarray([np.linalg.norm(pts - c, axis=1) / rad for c, rad in pairs])
    assert np.any(r >= 2.5) and np.any(r < 2.5)


def test_kernel_reproduces_the_sinusoidal_dipole():
    # Two piecewise-sinusoidal segments carrying I_m sin k(h - |z|) are the sinusoidal
    # dipole, whose exact near fields are in keepclear.antennas.wire (Balanis 4th ed.
    # sec. 8.5).
    from keepclear.antennas.wire import Dipole

    k = 2 * np.pi / LAM
    d = Dipole(F_HZ, 10.0, length_m=0.4 * LAM)
    h = 0.2 * LAM
    i0 = d.current_max_a * np.sin(k * h)
    el = moment.CurrentElements(
        np.array([[0, 0, -h], [0, 0, 0.0]]),
        np.array([[0, 0, 0.0], [0, 0, h]]),
        np.array([1e-4, 1e-4]),
        np.array([0.0, i0], complex),
        np.array([i0, 0.0], complex),
        k,
    )
    pts = np.random.default_rng(1).normal(size=(40, 3)) * 0.1
    e1, h1 = d.fields(pts)
    e2, h2 = el.fields(pts)
    assert np.allclose(e2, e1, rtol=1e-9, atol=1e-9 * np.abs(e1).max())
    assert np.allclose(h2, h1, rtol=1e-9, atol=1e-9 * np.abs(h1).max())
    assert el.radiated_power_w() == pytest.approx(10.0, rel=1e-6)


def test_grid_convergence_supports_the_stated_uncertainty(plate_1):
    # Refining the whole grid from lambda/10 to lambda/14 moves the peak gain by under
    # 0.5 dB (0.2 dB when written), the field in front by under 1 dB, and behind the plate
    # by under 1.5 dB (1.0 dB when written); the model as built (fed face at lambda/13)
    # lies between the two.  Burke & Poggio, NEC-2 manual part III: a wire-grid model is
    # checked by refining it (common practice, no tolerance given there).
    coarse = FiniteGroundMonopole(
        F_HZ,
        1.0,
        LAM / 4,
        ground="plate",
        ground_size_m=(LAM, LAM),
        fed_face_segment_wavelengths=0.1,
    )
    fine = FiniteGroundMonopole(
        F_HZ,
        1.0,
        LAM / 4,
        ground="plate",
        ground_size_m=(LAM, LAM),
        max_segment_wavelengths=1 / 14,
    )
    counts = [m.structure.segment_count for m in (coarse, plate_1, fine)]
    assert counts == sorted(counts) and counts[0] < counts[2]
    dg = 10 * math.log10(fine.max_gain() / coarse.max_gain())
    assert abs(dg) < 0.5
    assert plate_1.gain_uncertainty_db >= 1.0
    front = np.array([[0.3, 0.1, 0.2], [-0.2, -0.2, 0.05], [0.0, 0.1, 0.5]])
    behind = np.array([[0.0, 0.4, -0.3], [0.1, 0.0, -0.5]])
    ds = 10 * np.log10(_density(fine, front) / _density(coarse, front))
    assert np.max(np.abs(ds)) < 1.0
    ds = 10 * np.log10(_density(fine, behind) / _density(coarse, behind))
    assert np.max(np.abs(ds)) < 1.5


def test_fed_face_is_gridded_finer_than_the_faces_behind(box):
    # The fed face (z = 0) at most lambda/13 (FED_FACE_SEGMENT_WAVELENGTHS, chosen against
    # the openEMS probe cases, tests/test_fullwave.py); the faces behind at most lambda/10
    # (Burke & Poggio, NEC-2 manual part III), with steps longer than lambda/13 along the
    # depth; every wire radius follows the equal-area rule (spacing / 2 pi, Ludwig 1987),
    # so none exceeds (lambda/13) / 2 pi on the fed face.
    s = box.structure
    grid = np.arange(s.segment_count) < s.feed_segment  # the probe's segments come last
    length = np.linalg.norm(s.ends_m - s.starts_m, axis=1)
    on_face = grid & (np.abs(s.starts_m[:, 2]) < 1e-9) & (np.abs(s.ends_m[:, 2]) < 1e-9)
    behind = grid & ~on_face
    assert on_face.sum() > 100 and behind.sum() > 100
    assert box.fed_face_segment_m == pytest.approx(LAM / 13, rel=1e-12)
    assert length[on_face].max() <= LAM / 13 * (1 + 1e-9)
    assert length[behind].max() <= LAM / 10 * (1 + 1e-9)
    assert length[behind].max() > LAM / 13
    assert s.radii_m[on_face].max() <= LAM / 13 / (2 * np.pi) * (1 + 1e-9)
    assert box.gain_uncertainty_db == 1.0


def test_face_too_large_for_the_fine_grid_falls_back_with_the_coarse_margin(monkeypatch):
    # A structure whose lambda/13 fed face would exceed NEC-2's segment bound takes the
    # lambda/10 face and that grid's larger margin (COARSE_GAIN_UNCERTAINTY_DB, 1.8 dB:
    # plate-probe +1.72 dB on the axis with it, openEMS v0.0.35).  The bound is lowered
    # here so that a small plate shows it.
    args = {"ground": "plate", "ground_size_m": (0.12, 0.12)}
    fine = FiniteGroundMonopole(F_HZ, 1.0, 0.030, **args)
    coarse = FiniteGroundMonopole(F_HZ, 1.0, 0.030, fed_face_segment_wavelengths=0.1, **args)
    n_fine, n_coarse = fine.structure.segment_count, coarse.structure.segment_count
    assert n_coarse < n_fine
    monkeypatch.setattr(moment, "MAX_SEGMENTS", n_coarse)
    fallback = FiniteGroundMonopole(F_HZ, 1.0, 0.030, **args)
    assert fallback.structure.segment_count == n_coarse
    assert fallback.fed_face_segment_m == pytest.approx(LAM / 10, rel=1e-12)
    assert fallback.gain_uncertainty_db == 1.8 > fine.gain_uncertainty_db


def test_plate_fields_are_symmetric_for_a_centred_probe(plate_1):
    # Symmetry of the square plate about x = 0, y = 0 and the diagonal.
    p = np.array([[0.2, 0.07, 0.1], [-0.2, 0.07, 0.1], [0.2, -0.07, 0.1], [0.07, 0.2, 0.1]])
    s = _density(plate_1, p)
    assert s == pytest.approx(np.full(4, s[0]), rel=1e-3)


def test_fields_behind_the_plate_are_finite_and_not_zero(plate_1):
    pts = np.array([[0.0, 0.0, -0.3], [0.1, 0.1, -1.0], [0.0, 0.0, -0.02]])
    s = _density(plate_1, pts)
    assert np.all(np.isfinite(s)) and np.all(s > 1e-3)
    # ... and weaker behind than in front at the same distance (front-to-back).
    assert _density(plate_1, np.array([[0.0, 0.3, 0.3]]))[0] > s[0]


# ------------------------------------------------------------------ placement and geometry
def test_placement_rotates_the_fields(box):
    # The same box with axis +x and up +z: fields at rotated points are the rotated ones.
    placement = Placement.from_axes([0.5, -0.2, 1.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0])
    turned = FiniteGroundMonopole(F_HZ, 1.0, 0.030, placement=placement, **BOX)
    local = np.array([[0.1, 0.2, 0.3], [0.0, 0.0, -0.4], [-0.3, 0.0, -0.1]])
    glob = placement.position_m + local @ placement.rotation.T
    e0, h0 = box.fields(local)
    e1, h1 = turned.fields(glob)
    assert np.allclose(e1, e0 @ placement.rotation.T, rtol=1e-9, atol=1e-12)
    assert np.allclose(h1, h0 @ placement.rotation.T, rtol=1e-9, atol=1e-12)
    # Contract: width along up x axis = +y here; the face spans y in [-0.3, -0.1],
    # z in [0.955, 1.045], and the box x in [0.35, 0.5].
    assert turned.inside_or_on(np.array([[0.45, -0.11, 1.0], [0.45, -0.2, 1.06]])).tolist() == [
        True,
        False,
    ]


def test_offset_moves_the_face_not_the_probe():
    # Contract: ground_offset_m = [0.05, 0] puts the base 5 cm from the face centre
    # towards +y (axis +x, up +z): the face centre at position - 0.05 * (up x axis).
    placement = Placement.from_axes([0.0, 0.0, 1.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0])
    m = FiniteGroundMonopole(F_HZ, 1.0, 0.030, placement=placement, **SMALL_BOX)
    # Face 0.10 x 0.06 m with the base 0.02 m off centre: y in [-0.07, 0.03],
    # z in [0.97, 1.03]; box x in [-0.05, 0].
    inside = m.inside_or_on(np.array([[-0.03, -0.06, 1.0], [-0.03, 0.04, 1.0], [-0.03, 0.0, 1.0]]))
    assert inside.tolist() == [True, False, True]


def test_largest_dimension_is_the_diagonal(box, plate_1):
    assert box.largest_dimension_m == pytest.approx(math.sqrt(0.2**2 + 0.09**2 + 0.18**2))
    assert plate_1.largest_dimension_m == pytest.approx(
        math.sqrt(2 * LAM**2 + (LAM / 4) ** 2), rel=1e-9
    )


def test_inside_or_on_marks_the_box_the_plate_and_the_wire(box, plate_1):
    pts = np.array(
        [
            [0.0, 0.0, -0.07],  # inside the box
            [0.0, 0.0, 0.0005],  # on the face
            [0.0005, 0.0, 0.02],  # on the probe
            [0.0, 0.0, 0.04],  # above the probe tip
            [0.2, 0.0, -0.07],  # beside the box
            [0.0, 0.0, -0.16],  # behind it
        ]
    )
    assert box.inside_or_on(pts).tolist() == [True, True, True, False, False, False]
    assert plate_1.inside_or_on(pts).tolist() == [False, True, True, False, False, False]


def test_the_solution_is_solved_once_and_is_deterministic(box):
    before = moment._solve_cached.cache_info().misses
    again = FiniteGroundMonopole(F_HZ, 1.0, 0.030, **BOX)
    # No new NEC-2 run: the same geometry, frequency and power reuse the solved structure.
    assert moment._solve_cached.cache_info().misses == before
    assert np.array_equal(again.solution.centre_currents_a, box.solution.centre_currents_a)


# ------------------------------------------------------------------ input checking
@pytest.mark.parametrize(
    ("kwargs", "parameter"),
    [
        ({"ground_size_m": (0.0, 0.09)}, "ground_size_m"),
        ({"ground_size_m": (0.2,)}, "ground_size_m"),
        ({"ground_offset_m": (0.11, 0.0)}, "ground_offset_m"),
        ({"box_depth_m": -0.1}, "box_depth_m"),
        ({"ground": "disc"}, "ground"),
        ({"ground": "plate"}, "box_depth_m"),
        ({"ground_size_m": (20.0, 20.0)}, "ground_size_m"),
    ],
)
def test_model_rejects_bad_geometry(kwargs, parameter):
    args = {**BOX, **kwargs}
    with pytest.raises(ModelInputError) as err:
        FiniteGroundMonopole(F_HZ, 1.0, 0.030, **args)
    assert err.value.parameter == parameter


SCENARIO = """
name = "box probe"
[[source]]
antenna = "monopole"
power_w = 1.0
position_m = [0.0, 0.0, 1.0]
axis = [1.0, 0.0, 0.0]
length_m = 0.030
{extra}
"""
GOOD_BOX = """ground = "box"
ground_size_m = [0.10, 0.06]
ground_up = [0.0, 0.0, 1.0]
ground_offset_m = [0.02, 0.0]
box_depth_m = 0.05"""


def _load(tmp_path, extra):
    path = tmp_path / "s.toml"
    path.write_text(SCENARIO.format(extra=extra), encoding="utf-8")
    return load_scenario(path)


def test_scenario_builds_the_box_with_the_contract_keys(tmp_path):
    sc = _load(tmp_path, GOOD_BOX)
    rad = sc.sources[0].radiator
    assert isinstance(rad, FiniteGroundMonopole) and rad.ground == "box"
    assert rad.ground_offset_m == (0.02, 0.0) and rad.box_depth_m == 0.05
    # Default ground_up is +z for a horizontal probe: the same model.
    default_up = GOOD_BOX.replace("ground_up = [0.0, 0.0, 1.0]\n", "")
    rad2 = _load(tmp_path, default_up).sources[0].radiator
    assert np.allclose(rad2.placement.rotation, rad.placement.rotation)
    # ground = "infinite" (or no ground key) keeps the infinite-plane monopole.
    assert isinstance(_load(tmp_path, 'ground = "infinite"').sources[0].radiator, Monopole)


@pytest.mark.parametrize(
    ("change", "key", "fragment"),
    [
        (
            ("ground_up = [0.0, 0.0, 1.0]", "ground_up = [0.3, 0.0, 1.0]"),
            "ground_up",
            "perpendicular",
        ),
        (
            ("ground_offset_m = [0.02, 0.0]", "ground_offset_m = [0.06, 0.0]"),
            "ground_offset_m",
            "off",
        ),
        (("ground_size_m = [0.10, 0.06]", "ground_size_m = [0.10, 0.0]"), "ground_size_m", "> 0"),
        (("ground_size_m = [0.10, 0.06]", "ground_size_m = [0.10]"), "ground_size_m", "two"),
        (("ground_size_m = [0.10, 0.06]", ""), "ground_size_m", "required"),
        (('ground = "box"', 'ground = "plate"'), "box_depth_m", "box"),
        (("box_depth_m = 0.05", ""), "box_depth_m", "required"),
        (("box_depth_m = 0.05", "box_depth_m = 0.0"), "box_depth_m", "> 0"),
        (('ground = "box"', 'ground = "boxx"'), "ground", "box"),
        (('ground = "box"', 'ground = "infinite"'), "ground_size_m", "infinite"),
        (("ground_up = [0.0, 0.0, 1.0]", "ground_up = [0.0, 0.0, 0.0]"), "ground_up", "zero"),
    ],
)
def test_scenario_rejects_bad_ground_keys(tmp_path, change, key, fragment):
    with pytest.raises(ScenarioError) as err:
        _load(tmp_path, GOOD_BOX.replace(*change))
    text = str(err.value)
    assert "s.toml" in text and f"source.1.{key}" in text and fragment in text


def test_cli_exits_2_naming_the_file_and_key(tmp_path):
    from ._cli import run

    path = tmp_path / "bad.toml"
    path.write_text(
        SCENARIO.format(extra=GOOD_BOX.replace("[0.0, 0.0, 1.0]", "[1.0, 0.0, 1.0]")),
        encoding="utf-8",
    )
    res = run("probe", path, "--at", "1,0,1")
    assert res.exit_code == 2
    assert "bad.toml" in res.stderr and "ground_up" in res.stderr
    assert "Traceback" not in res.stderr
