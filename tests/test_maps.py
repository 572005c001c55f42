"""Maps: planes, grids, zones, enclosing shapes, GeoJSON and the memory bound.

The reference for the isotropic source is the far-field prediction equation of
FCC OET Bulletin 65, Edition 97-01 (1997), eq. (3): S = P G / (4 pi R^2), so the
zone of a limit S_lim is the disc R = sqrt(P G / (4 pi S_lim)) and its area pi R^2.
"""

from __future__ import annotations

import json
import math
import textwrap
import tracemalloc

import numpy as np
import pytest
from hypothesis import given, note, settings

from keepclear.fields import limits as limits_mod
from keepclear.fields import maps
from keepclear.fields.errors import InputError, ResourceError
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario

from ._cli import one_error_line, run
from ._edge_cases import _no_evaluation
from ._fuzz_strategies import EXPECTED_PLAUSIBILITY_WARNING, FUNCTION_FIXTURE, MAP_ARGS, check_map
from ._hypothesis import examples
from .conftest import ISOTROPIC

# ICNIRP 2020, Table 5: 10 W/m^2 (general public) and 50 W/m^2 (occupational) above 2 GHz.
S_GP_W_M2 = 10.0
S_OCC_W_M2 = 50.0


@pytest.fixture
def iso(write_scenario):
    scenario = load_scenario(write_scenario(ISOTROPIC))
    return scenario, keepout_distances(scenario)


def oet65_radius_m(power_w: float, gain: float, limit_w_m2: float) -> float:
    """FCC OET Bulletin 65 (1997), eq. (3) solved for R."""
    return math.sqrt(power_w * gain / (4 * math.pi * limit_w_m2))


# ------------------------------------------------------------------------- planes
def test_principal_planes_use_scenario_coordinates():
    plane = maps.principal_plane("xz", [1.0, 2.0, 3.0])
    st, offset = plane.to_plane(np.array([[4.0, 2.5, -1.0]]))
    assert st[0] == pytest.approx([4.0, -1.0]) and offset[0] == pytest.approx(-0.5)
    assert plane.centre_st_m == (1.0, 3.0)
    back = plane.to_scenario([4.0], [-1.0])
    assert back[0] == pytest.approx([4.0, 2.0, -1.0])
    assert "y = 2.00 m" in plane.description


def test_custom_plane_is_orthonormal_and_keeps_the_plane():
    plane = maps.custom_plane([0, 0, 1], [1, 1, 0], [1, 0, 1])
    assert np.linalg.norm(plane.u) == pytest.approx(1) and np.linalg.norm(plane.v) == pytest.approx(
        1
    )
    assert plane.u @ plane.v == pytest.approx(0, abs=1e-12)
    # The given v still lies in the plane (its offset along the normal is zero).
    assert np.array([1.0, 0.0, 1.0]) @ plane.normal == pytest.approx(0, abs=1e-12)


@pytest.mark.parametrize(
    ("u", "v", "option"),
    [([1, 0, 0], [2, 0, 0], "--v"), ([0, 0, 0], [0, 1, 0], "--u"), ([1, 0, 0], [0, 0, 0], "--v")],
)
def test_custom_plane_refuses_degenerate_axes(u, v, option):
    with pytest.raises(InputError) as err:
        maps.custom_plane([0, 0, 0], u, v)
    assert err.value.key == option


def test_boresight_plane_of_an_isotropic_source_is_xz(iso):
    scenario, _ = iso
    assert maps.boresight_plane(scenario).kind == "xz"


# -------------------------------------------------------------------------- grids
def test_grid_too_large_is_refused_before_allocating():
    plane = maps.principal_plane("xy", [0, 0, 0])
    tracemalloc.start()
    try:
        with pytest.raises(ResourceError) as err:
            maps.make_grid(plane, 10.0, pixels=4001, n_limits=2)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert err.value.key == "--pixels" and "MiB" in err.value.message
    assert peak < 5_000_000  # nothing near the ~5 GB the grid would need was allocated
    with pytest.raises(ResourceError) as err:
        maps.make_grid(plane, 100.0, step_m=1e-3)
    assert err.value.key == "--step-m"


def test_grid_step_and_default_extent(iso):
    scenario, keepouts = iso
    plane = maps.principal_plane("xy", scenario.centre_m)
    half = maps.default_half_extent_m(scenario, keepouts, plane)
    radius = max(k.distance_m for k in keepouts)
    assert half >= max(2.0, 1.5 * radius)
    grid = maps.make_grid(plane, 1.0, step_m=0.1)
    assert grid.shape == (21, 21) and grid.step_m == pytest.approx(0.1)
    assert grid.s_m[10] == pytest.approx(0.0)


# ---------------------------------------------------------- zones vs keep-out
def test_contour_agrees_with_keepout_distance_isotropic(iso):
    """On the plane through the source the farthest contour point is the keep-out radius."""
    scenario, keepouts = iso
    plane = maps.principal_plane("xy", scenario.centre_m)
    run = maps.run_map(scenario, plane, keepouts, half_extent_m=2.0, pixels=81)
    step = run.result.grid.step_m
    for k in keepouts:
        zone = run.zones[k.limit_id][0]
        far = np.max(np.hypot(*zone.vertices().T))
        assert abs(far - k.distance_m) <= step, (k.limit_id, far, k.distance_m, step)
    # And both agree with OET 65 eq. (3) for the 100 W isotropic source (G = 1).
    r_gp = oet65_radius_m(100.0, 1.0, S_GP_W_M2)
    assert keepouts[0].distance_m == pytest.approx(r_gp, rel=2e-3)


def test_zone_area_is_the_disc_of_oet65_radius(iso):
    scenario, keepouts = iso
    plane = maps.principal_plane("xy", scenario.centre_m)
    run = maps.run_map(scenario, plane, keepouts, half_extent_m=1.5, pixels=101)
    for limit, s_lim in (
        ("icnirp-2020/general-public", S_GP_W_M2),
        ("icnirp-2020/occupational", S_OCC_W_M2),
    ):
        r = oet65_radius_m(100.0, 1.0, s_lim)
        zone = run.zones[limit][0]
        # Marching squares on log q inscribes the circle: chord error only, well under 1 %.
        assert zone.area_m2 == pytest.approx(math.pi * r**2, rel=0.01)
        assert not zone.clipped


def test_zone_on_a_parallel_plane_is_the_sphere_section(iso):
    scenario, keepouts = iso
    r = keepouts[0].distance_m
    height = 0.5
    plane = maps.principal_plane("xy", [0, 0, height])
    run = maps.run_map(scenario, plane, keepouts[:1], half_extent_m=1.2, pixels=121)
    far = np.max(np.hypot(*run.zones[keepouts[0].limit_id][0].vertices().T))
    section = maps.sphere_section(plane, scenario.centre_m, r)
    assert section is not None
    assert far == pytest.approx(section[1], abs=run.result.grid.step_m)
    assert section[1] == pytest.approx(math.sqrt(r**2 - height**2))


def test_zone_reaching_the_edge_is_flagged_clipped(iso):
    scenario, keepouts = iso
    plane = maps.principal_plane("xy", scenario.centre_m)
    run = maps.run_map(scenario, plane, keepouts, half_extent_m=0.5, pixels=21)
    assert run.zones["icnirp-2020/general-public"][0].clipped
    assert run.summary()["limits"][0]["clipped_at_map_edge"]


def _synthetic_map(q: np.ndarray, s: np.ndarray) -> maps.MapResult:
    plane = maps.principal_plane("xy", [0, 0, 0])
    grid = maps.Grid(plane, s, s)
    value = limits_mod.get_limit("icnirp-2020/general-public").at(2.45e9)
    zeros = np.zeros_like(q)
    return maps.MapResult(
        grid, q * value.power_density_w_m2, zeros, zeros, zeros, (value,), q[None]
    )


def test_annulus_zone_has_a_hole_with_the_right_area():
    # A synthetic quotient >= 1 on the ring 0.5 <= r <= 1: the area is pi (1 - 0.25).
    s = np.linspace(-1.5, 1.5, 301)
    ss, tt = np.meshgrid(s, s)
    r = np.hypot(ss, tt)
    q = 2.0 ** (1.0 - 4.0 * np.abs(r - 0.75))  # 2 at r = 0.75, exactly 1 at r = 0.5 and 1
    zone = maps.zone_of(_synthetic_map(q, s), "icnirp-2020/general-public")
    assert len(zone.polygons) == 1
    exterior, holes = zone.polygons[0]
    assert len(holes) == 1
    assert zone.area_m2 == pytest.approx(math.pi * (1.0 - 0.25), rel=0.01)
    # RFC 7946 sec. 3.1.6: exterior counter-clockwise, holes clockwise, rings closed.
    assert maps.ring_signed_area(exterior) > 0 and maps.ring_signed_area(holes[0]) < 0
    assert np.allclose(exterior[0], exterior[-1]) and np.allclose(holes[0][0], holes[0][-1])


# --------------------------------------------------------------------- GeoJSON
def test_geojson_structure(iso):
    scenario, keepouts = iso
    plane = maps.principal_plane("xy", scenario.centre_m)
    run = maps.run_map(scenario, plane, keepouts, half_extent_m=1.5, pixels=61)
    doc = json.loads(json.dumps(maps.map_geojson(run)))
    assert doc["type"] == "FeatureCollection"
    assert [f["properties"]["limit"] for f in doc["features"]] == list(scenario.limit_ids)
    for feature in doc["features"]:
        assert feature["type"] == "Feature"
        geometry = feature["geometry"]
        assert geometry["type"] == "MultiPolygon"
        assert len(geometry["coordinates"]) >= 1
        for polygon in geometry["coordinates"]:
            for ring in polygon:
                assert len(ring) >= 4 and ring[0] == ring[-1]
                assert all(len(p) == 2 and all(isinstance(c, float) for c in p) for p in ring)
        props = feature["properties"]
        assert props["area_m2"] > 0 and props["enclosing"]["circle"]["radius_m"] > 0
    assert doc["coordinate_units"] == "m"


# ------------------------------------------------------------- enclosing shapes
def test_enclosing_shapes_hold_the_zone(iso):
    scenario, keepouts = iso
    plane = maps.principal_plane("xy", scenario.centre_m)
    run = maps.run_map(scenario, plane, keepouts, half_extent_m=1.5, pixels=61)
    step = run.result.grid.step_m
    for k in keepouts:
        shapes = run.conservative_shapes(k.limit_id)
        assert shapes["circle"]["radius_m"] >= k.distance_m
        assert shapes["circle"]["radius_m"] <= k.distance_m + 2 * step
        lo, hi = shapes["box"]["x_m"]
        assert lo <= -k.distance_m and hi >= k.distance_m
        assert shapes["keepout_sphere_section_radius_m"] == pytest.approx(k.distance_m)


def test_cylinder_of_an_isotropic_source_is_the_sphere_bound(iso):
    """The exceedance volume of an isotropic source is the keep-out ball (OET 65 eq. (3))."""
    scenario, keepouts = iso
    for cyl, k in zip(maps.keepout_cylinders(scenario, keepouts), keepouts, strict=True):
        r = oet65_radius_m(100.0, 1.0, k.limit_w_m2)
        # Held, and widened by at most two radial steps (sampling + margin).
        assert r <= cyl.radius_m <= r + 2 * cyl.margin_m
        assert r <= cyl.z_max_m <= r + 2 * cyl.margin_m
        assert -r - 2 * cyl.margin_m <= cyl.z_min_m <= -r


def test_cylinder_holds_extra_points(iso):
    scenario, keepouts = iso
    far = {keepouts[0].limit_id: np.array([[3.0, 4.0, -7.0]])}
    cyl = maps.keepout_cylinders(scenario, keepouts, extra_points_m=far)[0]
    assert cyl.radius_m >= 5.0 and cyl.z_min_m <= -7.0


def test_convex_section_of_a_box():
    corners = np.array([[x, y, z] for x in (0, 2) for y in (0, 1) for z in (0, 1)], dtype=float)
    section = maps.convex_section(maps.principal_plane("xy", [0, 0, 0.5]), corners)
    closed = np.vstack([section, section[:1]])
    assert abs(maps.ring_signed_area(closed)) == pytest.approx(2.0)
    # A sheet cut across: a segment.
    sheet = np.array([[1, -1, 0], [1, 1, 0], [1, 1, 2], [1, -1, 2]], dtype=float)
    seg = maps.convex_section(maps.principal_plane("xy", [0, 0, 1]), sheet)
    assert seg.shape == (2, 2) and sorted(seg[:, 1]) == pytest.approx([-1, 1])
    assert maps.convex_section(maps.principal_plane("xy", [0, 0, 5]), corners) is None


def test_vertical_map_over_a_floor_starts_near_the_floor(write_scenario):
    scenario = load_scenario(
        write_scenario(
            ISOTROPIC.replace("[0.0, 0.0, 0.0]", "[0.0, 0.0, 1.0]")
            + """
[[reflector]]
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"
"""
        )
    )
    keepouts = keepout_distances(scenario)
    plane = maps.principal_plane("xz", scenario.centre_m)
    (cs, ct), half_height = maps.default_window_m(scenario, plane, 4.0, keepouts)
    bottom, top = ct - half_height, ct + half_height
    # From a tenth of the height below the floor to 2 m (> 1.25 keep-out) above the source.
    assert top == pytest.approx(1.0 + 2.0)
    assert bottom == pytest.approx(-0.1 * 3.0)
    run = maps.run_map(scenario, plane, keepouts, half_extent_m=4.0, pixels=81)
    assert run.result.grid.shape[1] == 81 and run.result.grid.shape[0] < 81
    assert run.result.grid.t_m[0] == pytest.approx(-0.3, abs=run.result.grid.step_m)


def test_a_singular_sample_counts_as_exceeding(iso, monkeypatch):
    """A model that returns NaN on its own source point must not crash or hide an exceedance."""
    scenario, keepouts = iso
    import keepclear.fields.maps.evaluation as maps_mod

    real = maps_mod.evaluate

    def with_nan(scen, points):
        res = real(scen, points)
        at_source = np.linalg.norm(np.asarray(points) - scen.centre_m, axis=1) < 1e-9
        res.power_density_w_m2[at_source] = np.nan
        return res

    monkeypatch.setattr(maps_mod, "evaluate", with_nan)
    grid = maps.make_grid(maps.principal_plane("xy", scenario.centre_m), 1.0, pixels=21)
    with pytest.warns(maps.ModelRangeWarning, match="singularity"):
        result = maps.evaluate_map(scenario, grid)
    assert np.all(np.isfinite(result.quotients))
    assert result.quotients[:, 10, 10].min() > 1e9


# ------------------------------------------------------------
# Fuzzing with random and broken input (hypothesis). What is checked, and against
# what, is listed in tests/_fuzz_strategies.py.


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(12), suppress_health_check=FUNCTION_FIXTURE)
@given(args=MAP_ARGS)
def test_map_arguments(tmp_path, args):
    """Map options at their edges (coordinates within the 1e6 m bound; beyond it is a known
    fault, see the edge-case tests), always on a tiny grid; --pixels comes first so a later --step-m
    meets it (refused as 'not both')."""
    path = tmp_path / "ok.toml"
    path.write_text(
        '[[source]]\nantenna = "dipole"\npower_w = 10.0\nposition_m = [0.0, 0.0, 1.0]\n',
        encoding="utf-8",
    )
    out = tmp_path / "out"
    out.mkdir(exist_ok=True)
    for old in out.iterdir():
        old.unlink()
    note(repr(args))
    check_map(path, out, args)


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


@pytest.mark.parametrize(
    "args",
    [["--pixels", "4001"], ["--pixels", "100000"], ["--step-m", "1e-9", "--extent-m", "100"]],
    ids=["4001 a side", "over the side bound", "tiny step"],
)
@pytest.mark.parametrize("command", ["map", "assess"])
def test_a_grid_too_large_is_refused_with_estimate_and_bound(
    write_scenario, tmp_path, monkeypatch, command, args
):
    path = write_scenario(ISOTROPIC)
    _no_evaluation(monkeypatch)
    out = tmp_path / "out"
    line = one_error_line(run(command, path, *args, "--out", out))
    assert args[0] in line
    assert "MiB" in line or "samples a side" in line  # the estimate ...
    assert "allowed" in line or "refused" in line  # ... and the bound
    assert not out.exists()


@pytest.mark.parametrize(
    "args",
    [["--extent-m", "1e300"], ["--height-m", "1e300"], ["--through", "1e300,0,0"]],
    ids=["extent", "height", "through"],
)
def test_map_coordinates_beyond_the_bound_are_refused(write_scenario, tmp_path, args):
    path = write_scenario(ISOTROPIC)
    one_error_line(run("map", path, "--pixels", "5", *args, "--csv", tmp_path / "m.csv"))


def test_map_extent_too_small_for_a_step_is_refused(write_scenario, tmp_path):
    path = write_scenario(ISOTROPIC)
    line = one_error_line(
        run("map", path, "--pixels", "5", "--extent-m", "5e-324", "--csv", tmp_path / "m.csv")
    )
    assert "--extent-m" in line


def test_map_outputs_never_overwrite_the_scenario(write_scenario):
    path = write_scenario(ISOTROPIC)
    for option in ("--png", "--svg", "--csv", "--npz", "--geojson"):
        line = one_error_line(run("map", path, "--pixels", "5", option, path))
        assert "overwrite" in line
    assert path.read_text(encoding="utf-8").strip() == textwrap.dedent(ISOTROPIC).strip()
