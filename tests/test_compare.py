"""Option comparison: ranking, worst named place, JSON shape, the demo options file.

The ranking check rests on the far-field law of FCC OET Bulletin 65, Edition 97-01
(1997), eq. (3): R = sqrt(P G / (4 pi S)), so a tenth of the power needs
1/sqrt(10) of the keep-out radius.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from typer.testing import CliRunner

from keepclear.fields.cli import app
from keepclear.fields.compare import (
    RANK_TOLERANCE,
    compare_options,
    comparison_table,
)
from keepclear.fields.scenario import load_scenario

from .conftest import ISOTROPIC, SCENARIOS

runner = CliRunner()

OPTIONS = (
    ISOTROPIC
    + """
[[point]]
name = "desk"
position_m = [0.5, 0.0, 0.0]

[[point]]
name = "door"
position_m = [0.0, 3.0, 0.0]

[[option]]
name = "same again"
description = "nothing changes"

[[option]]
name = "a tenth of the power"
description = "10 W instead of 100 W"
[[option.source]]
id = "s"
power_w = 10.0
"""
)


def test_lower_power_option_ranks_first_by_the_far_field_law(write_scenario):
    scenario = load_scenario(write_scenario(OPTIONS))
    comparison = compare_options(scenario, pixels=41)
    names = [v.name for v in comparison.variants]
    assert names[0] == "a tenth of the power"
    best, *_ = comparison.variants
    base = next(v for v in comparison.variants if v.is_base)
    # OET 65 eq. (3): R scales as sqrt(P).
    assert best.largest_keepout_m / base.largest_keepout_m == pytest.approx(
        1 / math.sqrt(10), rel=2e-3
    )
    assert best.zone_area_m2 < base.zone_area_m2
    # "same again" ties the base on every criterion: the scenario's order decides, on
    # every machine (common practice, no source: a stated tie rule instead of float luck).
    assert names[1:] == ["base", "same again"]


def test_places_per_option_follow_the_far_field_law(write_scenario):
    scenario = load_scenario(write_scenario(OPTIONS))
    data = compare_options(scenario, pixels=21).data()
    for row in data["options"]:
        assert [p["name"] for p in row["places"]] == ["desk", "door"]
        power = 10.0 if row["name"] == "a tenth of the power" else 100.0
        for place, r_m in zip(row["places"], (0.5, 3.0), strict=True):
            # OET 65, Edition 97-01, eq. (3): S = P G / (4 pi R^2) with G = 1.
            assert place["power_density_w_m2"] == pytest.approx(
                power / (4 * math.pi * r_m**2), rel=1e-6
            )
            assert place["quotients"]["icnirp-2020/general-public"] == pytest.approx(
                place["power_density_w_m2"] / 10.0, rel=1e-9
            )
            # A tenth of the power is -10 dB at every place; the others are 0 dB.
            expected_db = -10.0 if power == 10.0 else 0.0
            assert place["change_db"] == pytest.approx(expected_db, abs=1e-9)


def _variant(name, order, keepout_m, area_m2, quotient, place_w_m2=1.0):
    from keepclear.fields.compare import Variant

    class _Zone:
        def __init__(self, area):
            self.area_m2 = area

    class _Horizontal:
        zones = {"l": [_Zone(area_m2)]}

    class _Keepout:
        recommended_distance_m = keepout_m

    return Variant(
        name=name,
        description="",
        scenario=None,
        keepouts=(_Keepout(),),
        horizontal=_Horizontal(),
        leakage_5cm_w_m2=None,
        worst_point={"quotient": quotient},
        places=({"name": "desk", "power_density_w_m2": place_w_m2, "quotients": {}},),
        order=order,
    )


def test_ranking_ties_within_the_stated_tolerance_keep_the_scenario_order():
    from keepclear.fields.compare import rank_variants

    # Keep-out within 1 mm and area within 0.001 m^2 tie; the rounding boundary of the old
    # round-to-millimetre key (x.xxx5) no longer decides anything.
    a = _variant("base", 0, 21.9625, 5.0, 0.5)
    b = _variant("mesh", 1, 21.9625 + 4e-16, 5.0 + 1e-12, 0.5 * (1 + 1e-12))
    c = _variant("sheet", 2, 21.9625 - 9e-4, 5.0, 0.5)
    assert [v.name for v in rank_variants([c, b, a])] == ["base", "mesh", "sheet"]
    # A real difference beyond the tolerance decides.
    d = _variant("bigger sheet", 3, 21.9, 5.0, 0.5)
    assert [v.name for v in rank_variants([a, b, c, d])][0] == "bigger sheet"
    # Zone area decides a keep-out tie; the worst point decides a tie of both.
    e = _variant("smaller zone", 4, 21.9625, 4.0, 0.9)
    f = _variant("lower point", 5, 21.9625, 5.0, 0.1)
    assert [v.name for v in rank_variants([a, e, f])] == ["smaller zone", "lower point", "base"]


def test_ranking_by_a_place_and_by_zone_area():
    from keepclear.fields.compare import rank_variants

    a = _variant("base", 0, 10.0, 5.0, 0.5, place_w_m2=1.9)
    b = _variant("sheet", 1, 10.0, 4.0, 0.5, place_w_m2=0.094)
    c = _variant("mesh", 2, 9.0, 6.0, 0.5, place_w_m2=0.24)
    assert [v.name for v in rank_variants([a, b, c], "place:desk")] == ["sheet", "mesh", "base"]
    assert [v.name for v in rank_variants([a, b, c], "zone-area")] == ["sheet", "base", "mesh"]
    assert [v.name for v in rank_variants([a, b, c], "keepout")] == ["mesh", "sheet", "base"]


def test_unknown_ranking_is_refused_naming_the_choices(write_scenario):
    from keepclear.fields.errors import InputError

    scenario = load_scenario(write_scenario(OPTIONS))
    with pytest.raises(InputError, match="place:desk"):
        compare_options(scenario, pixels=21, rank_by="place:kitchen")
    data = compare_options(scenario, pixels=21, rank_by="place:door").data()
    assert data["ranked_by"].startswith("time-averaged power density at door")


def test_worst_named_point_is_the_nearest_to_an_isotropic_source(write_scenario):
    scenario = load_scenario(write_scenario(OPTIONS))
    data = compare_options(scenario, pixels=41).data()
    for row in data["options"]:
        assert row["worst_point"]["name"] == "desk"
        # OET 65 eq. (3) at R = 0.5 m: S = P / (4 pi R^2), against 10 W/m^2 (ICNIRP 2020 Table 5).
        power = 10.0 if row["name"] == "a tenth of the power" else 100.0
        expected = power / (4 * math.pi * 0.5**2) / 10.0
        assert row["worst_point"]["quotient"] == pytest.approx(expected, rel=1e-3)
        assert row["leakage_5cm_w_m2"] is None


def test_compare_json_shape(write_scenario):
    path = write_scenario(OPTIONS)
    result = runner.invoke(app, ["compare", str(path), "--json", "--pixels", "31"])
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["schema_version"] == 1
    assert [r["rank"] for r in data["options"]] == [1, 2, 3]
    assert sum(r["is_base"] for r in data["options"]) == 1
    for row in data["options"]:
        assert set(row["zone_area_m2"]) == set(data["limits"])
        assert {k["limit"] for k in row["keepout"]} == set(data["limits"])


def test_compare_text_and_figure_files(write_scenario, tmp_path):
    path = write_scenario(OPTIONS)
    out = tmp_path / "cmp"
    result = runner.invoke(app, ["compare", str(path), "--pixels", "31", "--out", str(out)])
    assert result.exit_code == 0, result.stderr
    assert "a tenth of the power" in result.stdout and "CAUTION" in result.stdout
    assert sorted(p.name for p in out.iterdir()) == ["compare.json", "compare.png", "compare.svg"]
    assert (out / "compare.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_compare_without_options_assesses_the_base(write_scenario):
    result = runner.invoke(app, ["compare", str(write_scenario(ISOTROPIC)), "--pixels", "21"])
    assert result.exit_code == 0
    assert "no [[option]]" in result.stderr and "base" in result.stdout


def test_demo_options_scenario_ranks_and_renders():
    scenario = load_scenario(SCENARIOS / "test-cell-options.toml")
    comparison = compare_options(scenario, pixels=41)
    data = comparison.data()
    ranked = [r["name"] for r in data["options"]]
    assert len(ranked) == 1 + len(scenario.options)
    keepouts = [r["largest_keepout_m"] for r in data["options"]]
    # Ranked by keep-out within the stated tie tolerance, not to the last bit: the base
    # and the moved bench need the same radius, equal only to rounding (which may differ
    # between machines), and a tie keeps the scenario's order.
    tie_m = RANK_TOLERANCE["keepout_m"][0]
    assert all(a <= b + tie_m for a, b in zip(keepouts, keepouts[1:], strict=False))
    # Half the power: R / sqrt(2) by OET 65 eq. (3).
    half = next(r for r in data["options"] if r["name"] == "half power")
    base = next(r for r in data["options"] if r["is_base"])
    assert half["largest_keepout_m"] == pytest.approx(
        base["largest_keepout_m"] / math.sqrt(2), rel=2e-3
    )
    table = comparison_table(data)
    assert "half power" in table
    # No enclosure: no leakage column; isotropic and wire models state no gain uncertainty,
    # so no keep-out is widened and no bracket is explained.
    assert "leak 5 cm" not in table and "Keep-out in brackets" not in table


def _shield_box_scenario() -> str:
    text = """
name = "shield box"
[[source]]
id = "s"
antenna = "isotropic"
power_w = 2000.0
position_m = [0.0, 0.0, 0.0]

[[option]]
name = "30 dB shield box"
description = "six rated sheets round the source, overlapping at the edges"
"""
    for axis in range(3):
        for sign in (-1.0, 1.0):
            centre = [0.0, 0.0, 0.0]
            centre[axis] = sign
            normal = [0.0, 0.0, 0.0]
            normal[axis] = 1.0
            text += f"""
[[option.shield]]
center_m = {centre}
normal = {normal}
width_m = 2.6
height_m = 2.6
shielding_db = 30.0
"""
    return text


def test_a_30_db_shield_box_ranks_first(write_scenario):
    scenario = load_scenario(write_scenario(_shield_box_scenario()))
    comparison = compare_options(scenario, pixels=41)
    first, second = comparison.variants
    assert first.name == "30 dB shield box" and second.is_base
    # Unshielded: OET 65 eq. (3), R = sqrt(2000 / (4 pi 10)) = 3.99 m.
    assert second.largest_keepout_m == pytest.approx(math.sqrt(2000 / (4 * math.pi * 10)), rel=2e-3)
    # Shielded: 30 dB is a power factor of 1e-3 (SE = 10 log10 P_in/P_out), so outside the
    # 2 m cube S <= 2000 / (4 pi 1^2) * 1e-3 = 0.16 W/m^2, far below 10 W/m^2: every
    # exceedance is inside the cube, within its half-diagonal sqrt(3) m.
    assert 1.0 <= first.largest_keepout_m <= math.sqrt(3) + 0.01


ENCLOSED = """
name = "leaky box"
[[source]]
id = "inbox"
antenna = "isotropic"
power_w = 800.0
duty_cycle = 0.5
position_m = [0.0, 0.0, 1.0]

[enclosure]
center_m = [0.0, 0.0, 1.0]
size_m = [0.5, 0.4, 0.35]
metal = "mild-steel"
thickness_m = 0.001
[[enclosure.opening]]
face = "+x"
type = "hole"
diameter_m = 0.03
count = 4
"""


def test_leakage_5cm_is_read_with_the_source_on(write_scenario):
    scenario = load_scenario(write_scenario(ENCLOSED))
    data = compare_options(scenario, pixels=21).data()
    leak = data["options"][0]["leakage_5cm_w_m2"]
    # 21 CFR 1030.10(c)(1) is read with the oven running: the full 800 W, not d * P.
    faces = scenario.enclosure.face_density_5cm(800.0, scenario.frequency_hz)
    assert leak == pytest.approx(max(f["power_density_w_m2"] for f in faces))
    assert leak > 0


def test_small_option_gets_its_own_lettered_panel(write_scenario):
    text = (
        ISOTROPIC + '\n[[option]]\nname = "one watt"\n[[option.source]]\nid = "s"\npower_w = 1.0\n'
    )
    text = text.replace("power_w = 100.0", "power_w = 2000.0", 1)
    comparison = compare_options(load_scenario(write_scenario(text)), pixels=21)
    small, base = comparison.variants
    assert small.name == "one watt" and base.is_base
    # The data stay on the common grid; the figure's panel of the small option is its own.
    assert small.horizontal.result.grid.extent_m == base.horizontal.result.grid.extent_m
    assert small.panel is not None and base.panel is None
    common = base.horizontal.result.grid.extent_m
    own = small.panel.result.grid.extent_m
    assert own[1] - own[0] < 0.6 * (common[1] - common[0])
    fig = comparison.figure()
    titles = [ax.get_title(loc="left") for ax in fig.axes if ax.get_title(loc="left")]
    assert titles[0].startswith("(a) 1. one watt") and titles[1].startswith("(b) 2. base")


def test_the_assessment_horizontal_map_serves_as_the_base_map_only_on_the_same_grid(write_scenario):
    # The base's map is reused when it has exactly the samples the comparison would
    # take; the comparison is then the one made afresh (up to float rounding: the same
    # evaluation either way), and a map on another grid is not used.
    from dataclasses import replace

    from keepclear.fields import maps
    from keepclear.fields.keepout import keepout_distances

    scenario = load_scenario(write_scenario(OPTIONS))
    ids = scenario.limit_ids
    keepouts = tuple(keepout_distances(scenario, ids))
    fresh = compare_options(scenario, pixels=41, base_keepouts=keepouts)
    base_fresh = next(v for v in fresh.variants if v.is_base).horizontal
    height = float(scenario.centre_m[2])
    plane = maps.principal_plane("xy", [*scenario.centre_m[:2], height])
    extent = base_fresh.result.grid.extent_m[1] - base_fresh.result.grid.plane.centre_st_m[0]
    ready = maps.run_map(
        scenario,
        replace(plane, description="a plane described otherwise"),
        keepouts,
        half_extent_m=extent,
        pixels=41,
    )
    reused = compare_options(scenario, pixels=41, base_keepouts=keepouts, base_map=ready)
    base = next(v for v in reused.variants if v.is_base).horizontal
    assert base.result.power_density_w_m2 is ready.result.power_density_w_m2
    assert base.plane.description == base_fresh.plane.description
    np.testing.assert_allclose(
        base.result.power_density_w_m2, base_fresh.result.power_density_w_m2, rtol=1e-12
    )
    assert [v.name for v in reused.variants] == [v.name for v in fresh.variants]
    for a, b in zip(reused.variants, fresh.variants, strict=True):
        assert a.zone_area_m2 == pytest.approx(b.zone_area_m2, rel=1e-9)
        assert a.largest_keepout_m == pytest.approx(b.largest_keepout_m, rel=1e-9)
    # Another grid (a coarser map of the same plane) is evaluated again.
    coarse = maps.run_map(scenario, plane, keepouts, half_extent_m=extent, pixels=21)
    other = compare_options(scenario, pixels=41, base_keepouts=keepouts, base_map=coarse)
    base = next(v for v in other.variants if v.is_base).horizontal
    assert base.result.grid.shape == (41, 41)
    # Other keep-out answers than the map's: evaluated again too.
    again = compare_options(scenario, pixels=41, base_map=ready)
    assert next(v for v in again.variants if v.is_base).horizontal.result is not ready.result
