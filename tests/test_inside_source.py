"""Points inside a source or on its metal: flagged by every radiator, counted over every limit.

The geometry is the models' own (the guide's inner cross-section, the horn's flare from throat
to mouth, the wire's axis and radius, the monopole's ground plane z = 0); the 1 mm tolerance
and the 2 cm clearance are the contract's ("Points inside a source or on its metal").
"""

from __future__ import annotations

import io

import numpy as np
import pytest

import keepclear as kc
from keepclear.antennas.aperture import OpenWaveguide
from keepclear.antennas.base import C_M_S, ModelRangeWarning, Placement
from keepclear.antennas.horn import PyramidalHorn
from keepclear.antennas.isotropic import IsotropicSource
from keepclear.antennas.waveguide import waveguide_dimensions
from keepclear.antennas.wire import Dipole, Monopole
from keepclear.fields import maps
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import inside_source_mask, load_scenario

from ._cli import run, strict_json, validate

F = 2.45e9
LAM = C_M_S / F
# WR-340 inner dimensions 86.36 mm x 43.18 mm (EIA RS-261-B, 3.400 x 1.700 in; from memory).
A, B = waveguide_dimensions("WR-340")

# Boresight +x, E-field +z, aperture centre at (0, 0, 1): local x (broad) is scenario +y or -y,
# local y (narrow) is scenario z, local z (boresight) is scenario x.
PLACED = Placement.from_axes([0.0, 0.0, 1.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0])


def test_points_inside_a_wr340_guide_are_flagged_and_2_cm_outside_are_not():
    guide = OpenWaveguide(F, 800.0, A, B, PLACED)
    inside = [
        [-0.05, 0.0, 1.0],  # on the axis, 5 cm back from the open end
        [-0.10, 0.4 * A, 1.0 + 0.4 * B],  # near a corner, inside
        [0.0, 0.0, 1.0],  # in the opening
        [-0.05, A / 2 + 0.0005, 1.0],  # 0.5 mm outside the broad wall: on its metal
    ]
    outside = [
        [0.02, 0.0, 1.0],  # 2 cm in front of the opening
        [-0.05, A / 2 + 0.02, 1.0],  # 2 cm beside the broad wall
        [-0.05, 0.0, 1.0 + B / 2 + 0.02],  # 2 cm above the narrow wall
    ]
    assert guide.inside_or_on(inside).all()
    assert not guide.inside_or_on(outside).any()


def test_points_inside_the_horn_flare_are_flagged_and_2_cm_outside_are_not():
    # 0.367 m x 0.245 m mouth, 0.25 m long, on WR-340: the flare half-height at 10 cm behind
    # the mouth is (b + (B - b) * 0.6) / 2.
    horn = PyramidalHorn(F, 900.0, A, B, 0.367, 0.245, 0.25, PLACED)
    half_h = 0.5 * (B + (0.245 - B) * (0.15 / 0.25))
    inside = [
        [-0.10, 0.0, 1.0],  # on the axis inside the flare
        [-0.10, 0.0, 1.0 + half_h - 0.005],  # 5 mm inside the E-plane wall
        [-0.25, 0.0, 1.0],  # at the throat
        [-0.30, 0.0, 1.0],  # in the feed guide behind the throat
    ]
    outside = [
        [0.02, 0.0, 1.0],  # 2 cm in front of the mouth
        [-0.10, 0.0, 1.0 + half_h + 0.02],  # 2 cm outside the E-plane wall
        [-0.26, 0.0, 1.0 + B / 2 + 0.02],  # 2 cm beside the feed guide
    ]
    assert horn.inside_or_on(inside).all()
    assert not horn.inside_or_on(outside).any()


def test_points_on_a_monopole_wire_and_within_1_mm_of_its_ground_plane_are_flagged():
    monopole = Monopole(F, 10.0, 0.030, Placement.from_axes([0.0, 0.0, 1.0], [0.0, 0.0, 1.0]))
    on = [
        [0.0, 0.0, 1.015],  # on the wire's axis, half-way up
        [0.0008, 0.0, 1.015],  # 0.8 mm from the axis: within 1 mm of the wire
        [0.0, 0.0, 1.0305],  # 0.5 mm beyond the tip
        [0.5, -0.3, 1.0009],  # 0.9 mm above the ground plane, far from the wire
        [0.2, 0.2, 0.9995],  # 0.5 mm below it
    ]
    off = [
        [0.02, 0.0, 1.015],  # 2 cm beside the wire
        [0.0, 0.0, 1.05],  # 2 cm above the tip
        [0.5, -0.3, 1.02],  # 2 cm above the ground plane
    ]
    assert monopole.inside_or_on(on).all()
    assert not monopole.inside_or_on(off).any()


def test_dipole_wire_and_point_source():
    dipole = Dipole(F, 1.0)
    half = dipole.length_m / 2
    assert dipole.inside_or_on([[0.0, 0.0, 0.0], [0.0, 0.0005, 0.9 * half]]).all()
    assert not dipole.inside_or_on([[0.02, 0.0, 0.0], [0.0, 0.0, half + 0.02]]).any()
    # An idealised point source has no body: nothing is inside it (the documented default).
    assert not IsotropicSource(F, 1.0).inside_or_on([[0.0, 0.0, 0.0]]).any()
    assert IsotropicSource(F, 1.0).outline() is None


def test_tolerance_sets_what_counts_as_on_the_metal():
    monopole = Monopole(F, 10.0, 0.030)
    point = [[0.3, 0.0, 0.004]]  # 4 mm above the plane
    assert not monopole.inside_or_on(point).any()
    assert monopole.inside_or_on(point, tolerance_m=0.005).all()
    with pytest.raises(ValueError, match="tolerance_m"):
        monopole.inside_or_on(point, tolerance_m=-1.0)


def test_outlines_are_the_bodies_to_scale():
    guide = OpenWaveguide(F, 1.0, A, B, PLACED)
    corners = guide.outline()
    assert corners.shape == (4, 3)
    np.testing.assert_allclose(np.ptp(corners, axis=0), [0.0, A, B], atol=1e-12)
    horn = PyramidalHorn(F, 1.0, A, B, 0.367, 0.245, 0.25, PLACED)
    corners = horn.outline()
    assert corners.shape == (8, 3)
    np.testing.assert_allclose(np.ptp(corners, axis=0), [0.25, 0.367, 0.245], atol=1e-12)
    wire = Monopole(F, 1.0, 0.03).outline()
    np.testing.assert_allclose(wire, [[0, 0, 0], [0, 0, 0.03]], atol=1e-15)


def test_scenario_mask_over_all_sources(write_scenario):
    path = write_scenario(
        """
        name = "two sources"
        [[source]]
        id = "guide"
        antenna = "open-waveguide"
        power_w = 100.0
        waveguide = "WR-340"
        position_m = [0.0, 0.0, 1.0]
        boresight = [1.0, 0.0, 0.0]
        [[source]]
        id = "probe"
        antenna = "monopole"
        power_w = 10.0
        length_m = 0.03
        position_m = [3.0, 0.0, 0.5]
        axis = [0.0, 0.0, 1.0]
        """
    )
    scenario = load_scenario(path)
    points = np.array([[-0.05, 0.0, 1.0], [3.0, 0.0, 0.515], [1.5, 0.0, 1.5], [0.02, 0.0, 1.0]])
    expected = [True, True, False, False]
    np.testing.assert_array_equal(inside_source_mask(scenario, points), expected)
    np.testing.assert_array_equal(scenario.inside_source(points), expected)


def test_a_map_sample_inside_a_source_counts_over_every_limit(write_scenario):
    # A 1 mW guide: nothing reaches any limit except the samples inside the guide.
    path = write_scenario(
        """
        name = "weak guide"
        [[source]]
        antenna = "open-waveguide"
        power_w = 0.001
        waveguide = "WR-340"
        position_m = [0.0, 0.0, 1.0]
        boresight = [1.0, 0.0, 0.0]
        [exposure]
        limits = ["icnirp-2020/general-public", "icnirp-2020/occupational"]
        """
    )
    scenario = load_scenario(path)
    plane = maps.principal_plane("xy", scenario.centre_m)
    grid = maps.make_grid(plane, 0.5, step_m=0.01)
    result = maps.evaluate_map(scenario, grid)
    points = grid.points_m().reshape(*grid.shape, 3)
    inside = scenario.inside_source(points.reshape(-1, 3)).reshape(grid.shape)
    assert inside.any() and not inside.all()
    np.testing.assert_array_equal(result.inside_source, inside)
    with np.load(io.BytesIO(maps.grid_npz_bytes(result))) as npz:
        np.testing.assert_array_equal(npz["inside_source"], inside)
    for q in result.quotients:
        assert np.all(q[inside] > 1.0)  # over every limit
        assert np.all(q[~inside] < 1.0)  # and nothing else is
    # The zones hold the guide's section (A wide, as long as the modelled guide behind the
    # opening: 0.30 m by default, the length solved with its walls) and nothing else, to
    # within a grid step all round.
    length = scenario.sources[0].radiator.guide_length_m
    assert length == pytest.approx(0.30)
    perimeter = 2 * (A + length)
    for limit_id in result.limit_ids:
        zone = maps.zone_of(result, limit_id)
        assert abs(zone.area_m2 - A * length) < perimeter * grid.step_m


#: A horn too large for the wall grid: the rim model, which warns that no full-wave case
#: covers it and that it carries a back-region margin (tested in tests/test_guide_grid.py).
HORN_BENCH = """
name = "horn on a bench"
[[source]]
id = "horn"
antenna = "horn"
power_w = 900.0
duty_cycle = 0.5
waveguide = "WR-340"
aperture_width_m = 0.367
aperture_height_m = 0.245
length_m = 0.25
position_m = [0.0, 0.0, 1.0]
boresight = [1.0, 0.0, 0.0]
polarization = [0.0, 0.0, 1.0]
"""


def test_probe_json_marks_every_point_and_the_text_says_so(write_scenario):
    path = write_scenario(HORN_BENCH)
    # inside the flare, inside the feed guide, 2 cm in front of the mouth, 1 m away
    points = ["-0.1,0,1", "-0.3,0,1", "0.02,0,1", "1,0.5,1"]
    result = run("probe", path, *(f"--at={p}" for p in points), "--json")
    assert result.exit_code == 0, result.stderr
    data = strict_json(result.stdout)
    validate("probe", data)
    assert [p["inside_source"] for p in data["points"]] == [True, True, False, False]
    # the fields of a point inside are reported as computed (finite, not replaced)
    assert all(p["power_density_w_m2"] > 0 for p in data["points"])
    text = run("probe", path, *(f"--at={p}" for p in points)).stdout
    blocks = text.split("Point (")
    assert "INSIDE A SOURCE" in blocks[1] and "INSIDE A SOURCE" in blocks[2]
    assert "INSIDE A SOURCE" not in blocks[3] and "INSIDE A SOURCE" not in blocks[4]


@pytest.mark.filterwarnings("ignore::keepclear.fields.plausibility.PlausibilityWarning")
def test_python_api_probe_carries_the_mask(write_scenario):
    scenario = kc.load_scenario(write_scenario(HORN_BENCH))
    result = kc.probe(scenario, [[-0.1, 0.0, 1.0], [1.0, 0.5, 1.0]])
    np.testing.assert_array_equal(result.inside_source, [True, False])
    assert [p["inside_source"] for p in result.to_dict()["points"]] == [True, False]


#: A vertical whip on an infinite ground plane at z = 1.6 m (a car roof), 250 W.
ROOF_WHIP = """
name = "roof whip"
[[source]]
id = "whip"
antenna = "monopole"
power_w = 250.0
length_m = 0.03
position_m = [0.0, 0.0, 1.6]
axis = [0.0, 0.0, 1.0]
[exposure]
limits = ["icnirp-2020/general-public"]
"""


def test_the_source_height_plane_of_a_whip_on_infinite_ground_is_off_the_metal(write_scenario):
    # The plane through the feed is the ground plane itself, every sample on the metal and
    # counted over the limit: the map goes through the middle of the element instead.
    scenario = load_scenario(write_scenario(ROOF_WHIP))
    plane = maps.source_height_plane(scenario)
    assert plane.height_m == pytest.approx(1.615)
    assert "middle of the monopole" in plane.description
    grid = maps.make_grid(plane, 1.0, pixels=21)
    # only the sample on the wire itself (the map's centre) is on the metal
    assert scenario.inside_source(grid.points_m()).sum() == 1
    # A guide's plane is the plane through its reference point, as before.
    guide = load_scenario(
        write_scenario(
            'name = "g"\n[[source]]\nantenna = "open-waveguide"\npower_w = 1.0\n'
            'waveguide = "WR-340"\nposition_m = [0.0, 0.0, 1.0]\nboresight = [1.0, 0.0, 0.0]\n'
        )
    )
    assert maps.source_height_plane(guide).height_m == 1.0


def test_maps_of_a_whip_on_infinite_ground_draw_no_zone_along_the_ground(write_scenario):
    # Vertical plane through the whip: centred on the feed, a whole row of samples would lie
    # on the ground plane (on the metal, over every limit) and draw a zone to the map's edge.
    # Moved half a step off it, the zones stay within two steps of the keep-out sphere.
    # The keep-out: a quarter-wave monopole on infinite ground has directivity 3.28 (5.16
    # dBi; Balanis, Antenna Theory, 4th ed., sec. 4.7.2, from memory), so OET 65 eq. (3)
    # gives sqrt(P G / (4 pi S)) = sqrt(250 x 3.28 / (4 pi x 10)) = 2.55 m (ICNIRP 2020
    # general public, 10 W/m2 at 2.45 GHz).
    scenario = load_scenario(write_scenario(ROOF_WHIP))
    (found,) = keepout_distances(scenario)
    assert found.distance_m == pytest.approx(2.55, rel=0.02)
    for plane in (maps.boresight_plane(scenario), maps.source_height_plane(scenario)):
        run = maps.run_map(scenario, plane, [found], half_extent_m=4.0, pixels=81)
        assert not run.result.inside_source.all(axis=1).any()
        assert not run.result.inside_source.all(axis=0).any()
        points = run.zone_points_m(found.limit_id)
        assert len(points) > 0
        reach = float(np.max(np.linalg.norm(points - scenario.centre_m, axis=1)))
        assert reach < found.distance_m + 2 * run.result.grid.step_m, plane.description


def test_probing_behind_an_infinite_ground_plane_warns(write_scenario):
    scenario = load_scenario(write_scenario(ROOF_WHIP))
    with pytest.warns(ModelRangeWarning, match="behind the infinite ground plane of source 'whip'"):
        result = kc.probe(scenario, [[1.0, 0.0, 1.5], [1.0, 0.0, 1.7]])
    assert result.to_dict()["points"][0]["power_density_w_m2"] == 0.0
