"""Finite reflecting plates: reflection where the specular point falls, edge diffraction,
shadows behind metal, the floor under a table, second-order paths, and the scenario keys."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from keepclear.antennas.base import C_M_S, ETA0_OHM, Placement
from keepclear.antennas.isotropic import IsotropicSource
from keepclear.fields import diffraction as dif
from keepclear.fields.errors import ScenarioError
from keepclear.fields.field import evaluate
from keepclear.fields.reflection import Reflector, image_labels, reflected_fields
from keepclear.fields.scenario import load_scenario

from ._cli import run
from ._hypothesis import examples

F = 2.45e9
LAM = C_M_S / F
UP = np.array([0.0, 0.0, 1.0])


def iso(position, power_w: float = 100.0) -> IsotropicSource:
    return IsotropicSource(F, power_w, placement=Placement(position_m=np.asarray(position, float)))


def plate(size=None, material="metal", point=(0.0, 0.0, 0.0), normal=UP, up=None, label="p"):
    return Reflector(
        np.asarray(point, float),
        np.asarray(normal, float),
        material=material,
        size_m=size,
        up=None if up is None else np.asarray(up, float),
        label=label,
    )


def reflected_density(src, reflector, pts):
    e, _ = reflected_fields(src, [reflector], np.atleast_2d(pts), F)[0]
    return np.sum(np.abs(e) ** 2, axis=1) / ETA0_OHM


@pytest.mark.parametrize("material", ["metal", "wood", "concrete"])
@pytest.mark.parametrize("theta_deg", [0.0, 30.0, 60.0])
def test_plate_much_larger_than_the_fresnel_zone_is_the_infinite_image(material, theta_deg):
    # Source and point 1 m from the plate centre, specular geometry: the first Fresnel zone's
    # radius is sqrt(lambda d1 d2 / (d1 + d2)) = 0.25 m (ITU-R P.526-15 eq. (2)); a 10 m plate
    # puts its edges beyond nu = 20.  Its image must be the infinite plane's within 0.5 dB
    # at the specular point (P.526-15 sec. 5.2: the aperture factor tends to 1).
    t = math.radians(theta_deg)
    src = iso([-math.sin(t), 0.0, math.cos(t)])
    p = np.array([[math.sin(t), 0.0, math.cos(t)]])
    finite = reflected_density(src, plate((10.0, 10.0), material), p)[0]
    infinite = reflected_density(src, plate(None, material), p)[0]
    assert 10 * math.log10(finite / infinite) == pytest.approx(0.0, abs=0.5)


@pytest.mark.parametrize("theta_deg", [0.0, 30.0, 50.0])
def test_plate_smaller_than_the_fresnel_zone_follows_the_po_flat_plate_rcs(theta_deg):
    # A 3 cm x 4 cm metal plate, 1 m from source and point (in its far zone, 2 D^2/lambda =
    # 4 cm; first Fresnel zone 0.25 m): physical optics gives the specular bistatic RCS
    # sigma = 4 pi (a b cos theta / lambda)^2 (C. A. Balanis, Advanced Engineering
    # Electromagnetics, 2nd ed., Wiley 2012, sec. 11.3, rectangular plate, PO; E. F. Knott,
    # J. F. Shaeffer, M. T. Tuley, Radar Cross Section, 2nd ed., 1993, flat plate
    # sigma = 4 pi A^2 / lambda^2; section numbers from memory), so the reflected density is
    # S_i sigma / (4 pi r^2).  Within 0.3 dB, and far below the infinite plane's image.
    t = math.radians(theta_deg)
    r, a, b = 1.0, 0.03, 0.04
    src = iso([-r * math.sin(t), 0.0, r * math.cos(t)], 100.0)
    p = np.array([[r * math.sin(t), 0.0, r * math.cos(t)]])
    s_i = 100.0 / (4 * math.pi * r**2)
    sigma = 4 * math.pi * (a * b * math.cos(t) / LAM) ** 2
    po = s_i * sigma / (4 * math.pi * r**2)
    model = reflected_density(src, plate((a, b)), p)[0]
    assert 10 * math.log10(model / po) == pytest.approx(0.0, abs=0.3)
    infinite = reflected_density(src, plate(None), p)[0]
    assert model < infinite / 100


def test_reflection_boundary_is_halved_and_far_beyond_it_nothing():
    # The specular point on the plate's edge: the reflected field is half the image (the
    # aperture of a half plane on its boundary, P.526-15 sec. 4.1: J(0) = 6 dB); far
    # outside the beam the plate adds little.
    src = iso([0.0, 0.0, 1.0])
    pl = plate((400.0, 4000.0), point=(200.0, 0.0, 0.0), up=[0.0, 1.0, 0.0])  # edge at x = 0
    inf = plate(None)
    on_edge = np.array([[0.0, 0.0, 1.0 + 1e-9]])
    ratio = reflected_density(src, pl, on_edge)[0] / reflected_density(src, inf, on_edge)[0]
    assert 10 * math.log10(ratio) == pytest.approx(-6.02, abs=0.2)
    far = np.array([[-3.0, 0.0, 1.0]])
    ratio = reflected_density(src, pl, far)[0] / reflected_density(src, inf, far)[0]
    assert ratio < 10 ** (-20 / 10)


def test_behind_a_wooden_plate_the_direct_field_is_kept_and_behind_metal_it_diffracts(
    write_scenario,
):
    text = """
        [[source]]
        antenna = "isotropic"
        power_w = 100.0
        position_m = [0.0, 0.0, 0.1]
        [[reflector]]
        point_m = [0.0, 0.0, 0.0]
        normal = [0.0, 0.0, 1.0]
        material = "{m}"
        size_m = [1.2, 0.8]
        up = [0.0, 1.0, 0.0]
    """
    below = np.array([[0.0, 0.0, -0.5], [0.1, 0.05, -1.0]])
    free = 100.0 / (4 * math.pi * np.sum((below - [0, 0, 0.1]) ** 2, axis=1))
    wood = evaluate(load_scenario(write_scenario(text.format(m="wood"))), below)
    # as a non-metal infinite plane gives today: the full direct field
    np.testing.assert_allclose(wood.power_density_w_m2, free, rtol=1e-9)
    steel = evaluate(load_scenario(write_scenario(text.format(m="metal"), "m.toml")), below)
    ratio = steel.power_density_w_m2 / free
    assert np.all(ratio > 0) and np.all(ratio < 10 ** (-10 / 10))
    # the knife-edge sum of the four edges (P.526-15 sec. 4.1) bounds it from above
    src = np.array([0.0, 0.0, 0.1])
    geo = dif.rectangle_crossing(
        np.broadcast_to(src, below.shape),
        below,
        np.zeros(3),
        np.array([0.0, 0.0, 1.0]),
        np.array([1.0, 0.0, 0.0]),
        np.array([0.0, 1.0, 0.0]),
        0.6,
        0.4,
        LAM,
    )
    edges = np.sum(np.abs(dif.edge_tail(geo.nu)), axis=0) / math.sqrt(2)
    assert np.all(np.sqrt(ratio) >= 0.9 * edges)


FLOOR_AND_TABLE = """
reflections = "{mode}"
[[source]]
antenna = "isotropic"
power_w = 50.0
position_m = [0.0, 0.0, 0.85]
[[reflector]]
name = "floor"
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"
[[reflector]]
name = "table"
point_m = [0.3, 0.0, 0.75]
normal = [0.0, 0.0, 1.0]
material = "{table}"
size_m = [1.6, 0.9]
"""


@pytest.mark.parametrize("table", ["wood", "metal"])
def test_the_floor_stays_in_play_beside_and_under_a_table(write_scenario, table):
    floor_only = load_scenario(
        write_scenario(
            FLOOR_AND_TABLE.format(mode="envelope", table=table).split(
                '[[reflector]]\nname = "table"'
            )[0],
            "floor.toml",
        )
    )
    both = load_scenario(write_scenario(FLOOR_AND_TABLE.format(mode="envelope", table=table)))
    labels = image_labels(both.reflectors, order=2)
    # beside the table, below its top: the floor image is there in full
    beside = np.array([[5.0, 3.0, 0.5], [-4.0, 0.0, 0.3]])
    imgs = reflected_fields(both.sources[0].radiator, both.reflectors, beside, F, order=2)
    floor_alone = reflected_fields(floor_only.sources[0].radiator, floor_only.reflectors, beside, F)
    np.testing.assert_allclose(
        np.abs(imgs[labels.index("floor")][0]), np.abs(floor_alone[0][0]), rtol=1e-9
    )
    # under the table: the floor image is still there (no half-space cut-off)
    under = np.array([[0.6, 0.0, 0.4]])
    imgs = reflected_fields(both.sources[0].radiator, both.reflectors, under, F, order=2)
    assert np.linalg.norm(imgs[labels.index("floor")][0]) > 0
    # and the table's own image does not reach below it
    assert np.linalg.norm(imgs[labels.index("table")][0]) == 0
    # floor, then the table's underside: a real second-order path under the table
    assert np.linalg.norm(imgs[labels.index("floor>table")][0]) > 0
    # beside the table the answer does not depend on a plane that is not there (the
    # table's edges add a little by diffraction; these rays pass near a metal top's shadow
    # boundary, within 1 dB)
    s_both = evaluate(both, beside).power_density_w_m2
    s_floor = evaluate(floor_only, beside).power_density_w_m2
    np.testing.assert_allclose(s_both, s_floor, rtol=0.1 if table == "wood" else 0.26)


def test_second_order_cabinet_then_floor_matches_infinite_planes_for_a_large_plate():
    # A vertical metal plate 20 m x 20 m and a floor: the path plate -> floor is the
    # classical corner image (Balanis, Antenna Theory, 4th ed., ch. 15) when the plate is
    # large; the finite plate's aperture factors tend to 1 (P.526-15 sec. 5.2).
    src = iso([0.0, -0.5, 1.0])
    floor = plate(None, "metal", label="floor")
    wall_inf = plate(None, "metal", point=(0, 0.3, 0), normal=(0, -1, 0), label="wall")
    wall = plate((20.0, 20.0), "metal", point=(0, 0.3, 0), normal=(0, -1, 0), label="wall")
    p = np.array([[0.2, -1.5, 0.6]])
    a = reflected_fields(src, [wall, floor], p, F, order=2)
    b = reflected_fields(src, [wall_inf, floor], p, F, order=2)
    k = image_labels([wall, floor], 2).index("wall>floor")
    na, nb = np.linalg.norm(a[k][0]), np.linalg.norm(b[k][0])
    assert nb > 0
    assert 20 * math.log10(na / nb) == pytest.approx(0.0, abs=0.5)


def _line(start, direction, length_m=1.5, step_m=0.01):
    t = np.arange(0.0, length_m + step_m / 2, step_m)
    return np.asarray(start) + t[:, None] * np.asarray(direction)


@settings(max_examples=examples(12))
@given(
    st.sampled_from(["metal", "wood"]),
    st.floats(0.4, 2.0),
    st.floats(0.4, 2.0),
    st.floats(0.0, 2 * math.pi),
    st.floats(0.8, 1.5),
    st.floats(-0.3, 0.3),
)
def test_continuity_across_reflection_and_shadow_boundaries(material, w, h, angle, z, shift):
    # Random horizontal lines 0.8..1.5 m above or below a plate (a point source 0.5 m
    # above it) cross the reflection boundary (above) or the shadow boundary (below): the
    # envelope density steps by no more than 1 dB between points 1 cm apart (the aperture
    # and obstacle factors are continuous, P.526-15 sec. 5.2).
    src = iso([shift, -shift, 0.5])
    refl = [plate((w, h), material)]
    d = np.array([math.cos(angle), math.sin(angle), 0.0])
    for height in (z, -z):
        pts = _line(np.array([shift, 0.0, height]) - 1.5 * d, d, 3.0)
        e_direct, _ = src.fields(pts)
        e_direct = np.linalg.norm(e_direct, axis=1)
        if height < 0 and material == "metal":
            e_direct = e_direct * refl[0].obstacle_factor(src.position_m, pts, F)
        e_img = np.linalg.norm(reflected_fields(src, refl, pts, F)[0][0], axis=1)
        s = (e_direct + e_img) ** 2
        assert np.max(np.abs(np.diff(10 * np.log10(s)))) < 1.0


SHEET_AND_PLATES = """
reflections = "{mode}"
[[source]]
antenna = "dipole"
power_w = 20.0
position_m = [{sx}, {sy}, 1.0]
axis = [0.0, 0.0, 1.0]
[[reflector]]
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"
[[reflector]]
point_m = [0.2, 0.1, 0.7]
normal = [0.0, 0.0, 1.0]
material = "{table}"
size_m = [{w}, 0.9]
[[reflector]]
point_m = [0.5, 0.8, 0.9]
normal = [0.0, -1.0, 0.0]
material = "metal"
size_m = [0.8, 1.4]
up = [0.0, 0.0, 1.0]
[[shield]]
center_m = [1.2, 0.0, 1.0]
normal = [1.0, 0.0, 0.0]
width_m = 1.0
height_m = 1.0
shielding_db = 30.0
"""


@settings(max_examples=examples(8))
@given(
    st.floats(-0.3, 0.3),
    st.floats(-0.3, 0.3),
    st.sampled_from(["wood", "metal"]),
    st.floats(0.5, 2.0),
    st.lists(st.floats(-3.0, 3.0), min_size=3, max_size=3),
)
def test_envelope_never_below_coherent_with_plates_and_sheets(
    tmp_path_factory, sx, sy, table, w, c
):
    # The envelope adds magnitudes, the coherent mode phasors: by the triangle inequality the
    # envelope is never below (the contract's "worst case").
    d = tmp_path_factory.mktemp("env")
    pts = np.asarray(c)[None, :] + np.random.default_rng(0).uniform(-0.5, 0.5, (64, 3))
    pts[:, 2] = np.abs(pts[:, 2])
    out = {}
    for mode in ("envelope", "coherent"):
        path = d / f"{mode}.toml"
        path.write_text(SHEET_AND_PLATES.format(mode=mode, sx=sx, sy=sy, table=table, w=w))
        out[mode] = evaluate(load_scenario(path), pts).power_density_w_m2
    assert np.all(out["envelope"] >= out["coherent"] * (1 - 1e-9))


# ----------------------------------------------------------------- scenario keys
BASE = """
[[source]]
antenna = "isotropic"
power_w = 10.0
position_m = [0.0, 0.0, 1.0]
[[reflector]]
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "wood"
"""


def test_size_and_up_are_read(write_scenario):
    sc = load_scenario(write_scenario(BASE + "size_m = [1.2, 0.8]\nup = [1.0, 0.0, 0.0]\n"))
    r = sc.reflectors[0]
    assert r.is_finite and r.size_m == (1.2, 0.8)
    np.testing.assert_allclose(r.height_axis, [1, 0, 0])
    np.testing.assert_allclose(r.width_axis, [0, -1, 0])  # up x normal
    assert r.corners().shape == (4, 3)
    sc = load_scenario(write_scenario(BASE, "inf.toml"))
    assert not sc.reflectors[0].is_finite and sc.reflectors[0].outline() is None


@pytest.mark.parametrize(
    ("extra", "key", "words"),
    [
        ("size_m = [1.2]\n", "reflector.1.size_m", "[width, height]"),
        ("size_m = [1.2, -0.8]\n", "reflector.1.size_m", "> 0"),
        ("size_m = [1.2, true]\n", "reflector.1.size_m", "[width, height]"),
        ("size_m = 1.0\n", "reflector.1.size_m", "[width, height]"),
        ("size_m = [1.0, 1.0]\nup = [0.0, 0.0, 1.0]\n", "reflector.1.up", "perpendicular"),
        ("size_m = [1.0, 1.0]\nup = [0.0, 0.0, 0.0]\n", "reflector.1.up", "zero"),
        ("up = [1.0, 0.0, 0.0]\n", "reflector.1.up", "size_m"),
        ("sise_m = [1.0, 1.0]\n", "reflector.1.sise_m", "did you mean"),
    ],
)
def test_bad_plate_keys_exit_2_naming_file_and_key(write_scenario, extra, key, words):
    path = write_scenario(BASE + extra)
    with pytest.raises(ScenarioError) as err:
        load_scenario(path)
    assert key in str(err.value) and words in str(err.value)
    result = run("probe", path, "--at", "1,0,1")
    assert result.exit_code == 2
    line = result.stderr.strip()
    assert "\n" not in line and path.name in line and key in line and "Traceback" not in line


# ----------------------------------------------------------------- keep-out search
@pytest.mark.parametrize("material", ["metal", "wood"])
def test_keepout_with_a_finite_bench_top_is_never_inside_the_brute_force_grid(
    write_scenario, material
):
    # A vertical dipole 10 cm over a 1.2 m x 0.8 m bench top, 0.9 m over a concrete floor: the
    # search must not report less than a dense grid of points finds (a lower bound of the
    # contract's radius), and not much more.
    from keepclear.fields.keepout import keepout_distances

    from .test_keepout_search import grid_radius

    path = write_scenario(
        f"""
        [[source]]
        antenna = "dipole"
        power_w = 200.0
        position_m = [0.0, 0.0, 1.0]
        axis = [0.0, 0.0, 1.0]
        [[reflector]]
        point_m = [0.0, 0.0, 0.0]
        normal = [0.0, 0.0, 1.0]
        material = "concrete"
        [[reflector]]
        point_m = [0.2, 0.0, 0.9]
        normal = [0.0, 0.0, 1.0]
        material = "{material}"
        size_m = [1.2, 0.8]
        """
    )
    scenario = load_scenario(path)
    result = keepout_distances(scenario)[0]
    half = 1.3 * result.distance_m
    # the floor, under, on and over the plate, and the level of the search's own answer
    far = scenario.centre_m + result.direction * result.distance_m
    planes = [0.0005, 0.3, 0.9005, 1.0, 1.2, 1.6, float(far[2])]
    brute = grid_radius(scenario, result.limit_id, planes, half, 121)
    assert brute > 0
    assert result.distance_m >= brute
    assert result.distance_m <= brute + 2 * half / 120 + 0.05 * brute


def test_uncertainty_decomposition_reproduces_the_orchestrator_with_plates():
    # The sampling of [uncertainty] re-weights the same paths the orchestrator sums: with
    # neutral factors it must give the orchestrator's |E|^2 with finite plates present (a
    # wooden table, a steel cabinet side, a concrete floor).
    from keepclear.fields import uncertainty as unc

    from .conftest import SCENARIOS

    scenario = load_scenario(SCENARIOS / "tabletop-box-room.toml")
    pts = np.random.default_rng(1).uniform(-2.0, 2.0, (200, 3))
    pts[:, 2] = np.abs(pts[:, 2]) + 0.05
    dec = unc.decompose(scenario, pts)
    draws = unc.draw_samples(scenario, unc.UncertaintySpec(gain_db=0.0, samples=1))
    ref = evaluate(scenario, pts)
    e2, h2 = unc.sample_squares(dec, draws, slice(0, 1), peak=True)
    np.testing.assert_allclose(e2[0], ref.peak_e_v_m**2, rtol=1e-9, atol=1e-20)
    np.testing.assert_allclose(h2[0], ref.peak_h_a_m**2, rtol=1e-9, atol=1e-25)
