"""Options, limits, rankings and sweeps from the command line; the sources described; text.

Each command that assesses limits takes ``--limit``; ``probe``, ``keepout`` and ``map`` take
``--option``; ``compare`` and ``assess`` take ``--rank-by`` and ``--sweep``.  The contract's
"Additions" ("Options from the command line", "The sources, described", "Options compared
per place") fix the names and the JSON keys checked here.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

import keepclear as kc
from keepclear.fields import assessment as api
from keepclear.fields.compare import RANK_TOLERANCE
from keepclear.fields.describe import reactive_near_field_m, sources_text
from keepclear.fields.report import verification_sentences
from keepclear.fields.report_text import pair_text

from ._cli import assert_clean_exit, one_error_line, run, run_once, strict_json, validate

# A small, fast scenario: a point source of 100 W, 6 dBi, over a concrete floor, with two
# options and two named places (the values are ours, chosen so that the options differ).
OPTIONS = """
name = "options check"
[[source]]
id = "feed"
antenna = "isotropic"
gain_dbi = 6.0
power_w = 100.0
duty_cycle = 0.5
position_m = [0.0, 0.0, 1.0]

[exposure]
limits = ["icnirp-2020/general-public", "icnirp-2020/occupational"]

[[reflector]]
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"

[[point]]
name = "desk"
position_m = [1.0, 0.5, 1.0]

[[point]]
name = "door"
position_m = [3.0, -1.0, 1.2]

[[option]]
name = "low power"
[[option.source]]
id = "feed"
power_w = 10.0

[[option]]
name = "screen"
[[option.shield]]
center_m = [0.5, 0.0, 1.0]
normal = [1.0, 0.0, 0.0]
width_m = 1.0
height_m = 1.0
shielding_db = 20.0
"""
GP = "icnirp-2020/general-public"
OCC = "icnirp-2020/occupational"
GRID = ("--pixels", "41")


@pytest.fixture
def options_file(write_scenario):
    return write_scenario(OPTIONS, "options.toml")


# ------------------------------------------------------------------ help
@pytest.mark.parametrize(
    ("command", "flags"),
    [
        ("probe", ("--option", "--limit")),
        ("keepout", ("--option", "--limit")),
        ("map", ("--option", "--limit")),
        ("readings", ("--limit",)),
        ("compare", ("--rank-by", "--sweep", "--limit")),
        ("assess", ("--rank-by", "--sweep", "--limit")),
    ],
)
def test_help_lists_the_options(command, flags):
    result = run(command, "--help")
    assert result.exit_code == 0, result.stderr
    for flag in flags:
        assert flag in result.stdout, (command, flag)


# ----------------------------------------------------------------- --option
def test_keepout_option_assesses_the_option(write_scenario):
    # In free space (the floor taken out), so that the far-field law applies.
    free = OPTIONS.replace(
        """[[reflector]]
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"
""",
        "",
    )
    assert "reflector" not in free
    path = write_scenario(free, "free.toml")
    base = strict_json(run("keepout", path, "--json").stdout)
    low = run("keepout", path, "--option", "low power", "--json")
    assert_clean_exit(low, (0,))
    low = strict_json(low.stdout)
    validate("keepout", low)
    assert low["average_power_w"] == pytest.approx(5.0)
    # Far-field point source: d ~ sqrt(P) (FCC OET 65, eq. (3)); a tenth of the power
    # gives sqrt(10) less distance.
    ratio = base["keepout"][0]["distance_m"] / low["keepout"][0]["distance_m"]
    assert ratio == pytest.approx(math.sqrt(10.0), rel=0.02)
    assert "low power" in low["scenario"]


@pytest.mark.parametrize("command", ["keepout", "probe", "map"])
def test_unknown_option_is_refused_with_the_names(options_file, tmp_path, command):
    extra = ("--csv", str(tmp_path / "m.csv")) if command == "map" else ()
    result = run(command, options_file, "--option", "no such", *extra)
    line = one_error_line(result)
    assert "--option" in line and "'low power'" in line and "'screen'" in line
    assert not (tmp_path / "m.csv").exists()


def test_option_on_a_scenario_without_options_is_refused(write_scenario):
    from .conftest import ISOTROPIC

    line = one_error_line(run("keepout", write_scenario(ISOTROPIC), "--option", "x"))
    assert "--option" in line and "no [[option]]" in line


def test_probe_option_and_limit(options_file):
    base = strict_json(run("probe", options_file, "--json").stdout)
    result = run("probe", options_file, "--option", "low power", "--limit", OCC, "--json")
    assert_clean_exit(result, (0,))
    low = strict_json(result.stdout)
    validate("probe", low)
    assert [p["name"] for p in low["points"]] == ["desk", "door"]
    for b, o in zip(base["points"], low["points"], strict=True):
        assert list(o["quotients"]) == [OCC]
        assert o["power_density_w_m2"] == pytest.approx(0.1 * b["power_density_w_m2"], rel=1e-9)


def test_map_option_json_and_text(options_file, tmp_path):
    out = tmp_path / "m.csv"
    result = run("map", options_file, "--option", "screen", "--csv", out, *GRID, "--json")
    assert_clean_exit(result, (0,))
    data = strict_json(result.stdout)
    validate("map", data)
    assert "screen" in data["scenario"]
    text = run("map", options_file, "--option", "screen", "--csv", out, *GRID)
    assert_clean_exit(text, (0,))
    assert "Sources:" in text.stdout and "EIRP" in text.stdout
    assert "horizontal plane at source height z = 1.00 m" in text.stdout
    assert "W/m2 (1 mW/cm2)" in text.stdout  # 10 W/m2 = 1 mW/cm2


def test_api_option_on_probe_map_and_keepout(options_file):
    scenario = kc.load_scenario(options_file)
    at = kc.probe(scenario, [[2.0, 0.0, 1.0]], option="low power")
    base = kc.probe(scenario, [[2.0, 0.0, 1.0]])
    assert at.power_density_w_m2[0] == pytest.approx(0.1 * base.power_density_w_m2[0], rel=1e-9)
    fmap = kc.field_map(scenario, "xy", option="screen", grid=kc.GridSettings(pixels=21))
    assert "screen" in fmap.to_dict()["scenario"]
    report = kc.keepout(scenario, limits=[OCC], option="low power")
    assert [k.limit_id for k in report.distances] == [OCC]
    with pytest.raises(kc.InputError, match="no option named"):
        kc.keepout(scenario, option="nope")


# ------------------------------------------------------------------ --limit
def test_keepout_limit_selects_and_refuses(options_file):
    result = run("keepout", options_file, "--limit", OCC, "--json")
    assert_clean_exit(result, (0,))
    assert [k["limit"] for k in strict_json(result.stdout)["keepout"]] == [OCC]
    line = one_error_line(run("keepout", options_file, "--limit", "icnirp-2020/nobody"))
    assert "--limit" in line


def test_readings_limit(options_file, tmp_path):
    csv = tmp_path / "r.csv"
    csv.write_text("x_m,y_m,z_m,value,unit\n1.0,0.5,1.0,2.0,W/m2\n", encoding="utf-8")
    result = run("readings", options_file, "--csv", csv, "--limit", OCC, "--json")
    assert_clean_exit(result, (0,))
    assert one_error_line(run("readings", options_file, "--csv", csv, "--limit", "x/y"))


# ------------------------------------------------------------ the sources
def test_keepout_json_describes_the_sources_as_the_contract_says(options_file):
    data = strict_json(run("keepout", options_file, "--json").stdout)
    validate("keepout", data)
    (source,) = data["sources"]
    assert list(source) == [
        "id",
        "antenna",
        "peak_gain_dbi",
        "peak_direction",
        "eirp_w",
        "average_eirp_w",
        "far_field_distance_m",
    ]
    # EIRP = P G (IEEE Std 145-2013, effective radiated power referred to an isotropic
    # radiator): 100 W times 6 dBi = 398.1 W; averaged with the duty cycle 0.5.
    assert source["peak_gain_dbi"] == pytest.approx(6.0, abs=1e-9)
    assert source["eirp_w"] == pytest.approx(100.0 * 10**0.6, rel=1e-9)
    assert source["average_eirp_w"] == pytest.approx(0.5 * source["eirp_w"], rel=1e-12)
    assert np.linalg.norm(source["peak_direction"]) == pytest.approx(1.0)
    assert source["far_field_distance_m"] == 0.0


def test_sources_in_order_with_the_horn_gain(tmp_path):
    from .conftest import SCENARIOS

    # the golden test and the bundled-scenario checks run the same command: one run for all
    result = run_once("keepout", SCENARIOS / "horn-bench-options.toml", "--json")
    assert result.exit_code == 0, result.stderr
    data = strict_json(result.stdout)
    assert [s["id"] for s in data["sources"]] == ["horn"]
    # The bundled horn: 14.7 dBi (README "Source models"; Balanis 4th ed. eq. (13-52)).
    assert data["sources"][0]["peak_gain_dbi"] == pytest.approx(14.7, abs=0.1)
    validate("keepout", data)


def test_sources_text_says_when_the_far_field_is_inside_the_reactive_near_field():
    lam_2pi = reactive_near_field_m(2.45e9)
    # lambda / 2 pi at 2.45 GHz: 0.1224 m / 6.283 = 19.5 mm (Balanis 4th ed., sec. 2.2.4).
    assert lam_2pi == pytest.approx(0.01948, rel=1e-3)
    entry = {
        "id": "a",
        "antenna": "isotropic",
        "peak_gain_dbi": 0.0,
        "peak_direction": [0.0, 0.0, 1.0],
        "eirp_w": 23612.0,
        "average_eirp_w": 11806.0,
        "far_field_distance_m": 0.0,
    }
    (line,) = sources_text([entry])
    assert "23,600 W while on" in line and "11,800 W averaged" in line
    assert "shorter than the reactive near field" in line and "19.5 mm" in line
    (line,) = sources_text([{**entry, "far_field_distance_m": 1.47}])
    assert "reactive" not in line and "1.47 m" in line


@pytest.mark.parametrize("command", ["probe", "keepout", "compare"])
def test_text_outputs_describe_the_sources(options_file, command):
    extra = GRID if command == "compare" else ()
    result = run(command, options_file, *extra)
    assert_clean_exit(result, (0,))
    assert "Sources" in result.stdout and "EIRP" in result.stdout and "dBi" in result.stdout
    assert "mW/cm2" in result.stdout


def test_compare_text_describes_an_option_whose_source_differs(options_file):
    result = run("compare", options_file, *GRID)
    assert "Sources of option low power:" in result.stdout
    assert "Sources of option screen:" not in result.stdout  # same source as the base


# ------------------------------------------------------- --rank-by, --sweep
def test_compare_rank_by_place_and_zone_area(options_file):
    result = run("compare", options_file, "--rank-by", "place:door", *GRID, "--json")
    assert_clean_exit(result, (0,))
    data = strict_json(result.stdout)
    validate("compare", data)
    assert data["rank_by"] == "place:door" and "door" in data["ranked_by"]
    assert "1 mm" in data["tie_rule"]
    at_door = [next(p for p in o["places"] if p["name"] == "door") for o in data["options"]]
    densities = [p["power_density_w_m2"] for p in at_door]
    # in order within the stated tie tolerance (RANK_TOLERANCE), not to the last bit
    _, rel = RANK_TOLERANCE["power_density_w_m2"]
    assert all(a <= b * (1 + rel) for a, b in zip(densities, densities[1:], strict=False))
    zone = strict_json(
        run("compare", options_file, "--rank-by", "zone-area", *GRID, "--json").stdout
    )
    assert zone["rank_by"] == "zone-area"
    areas = [max(o["zone_area_with_uncertainty_m2"].values()) for o in zone["options"]]
    absolute, rel = RANK_TOLERANCE["zone_area_m2"]
    assert all(a <= b + max(absolute, rel * b) for a, b in zip(areas, areas[1:], strict=False))


@pytest.mark.parametrize("value", ["place:nowhere", "height", "place:"])
def test_compare_rank_by_refused(options_file, value):
    line = one_error_line(run("compare", options_file, "--rank-by", value, *GRID))
    assert "--rank-by" in line and "allowed" in line and "place:desk" in line


def test_compare_sweep_adds_one_option_a_value(options_file):
    result = run("compare", options_file, "--sweep", "source.feed.power_w=50,5", *GRID, "--json")
    assert_clean_exit(result, (0,))
    data = strict_json(result.stdout)
    validate("compare", data)
    names = [o["name"] for o in data["options"]]
    assert "source.feed.power_w = 50" in names and "source.feed.power_w = 5" in names
    assert len(names) == 5
    by_name = {o["name"]: o for o in data["options"]}
    # Power density is linear in the power: 5 W against 100 W is -13.0 dB everywhere.
    (desk,) = [p for p in by_name["source.feed.power_w = 5"]["places"] if p["name"] == "desk"]
    assert desk["change_db"] == pytest.approx(10 * math.log10(5 / 100), abs=1e-6)


@pytest.mark.parametrize(
    ("sweep", "fragment"),
    [
        ("source.feed.power_w", "KEY=V1,V2"),
        ("source.nobody.power_w=1,2", "--sweep"),
        ("source.feed.power_w=-5", "-5"),
        ("source.feed.power_w=1,,2", "empty value"),
    ],
)
def test_compare_sweep_refused(options_file, sweep, fragment):
    line = one_error_line(run("compare", options_file, "--sweep", sweep, *GRID))
    assert "--sweep" in line and fragment in line


def test_api_compare_rank_by_and_sweeps(options_file):
    scenario = kc.load_scenario(options_file)
    result = kc.compare(
        scenario,
        rank_by="place:desk",
        sweeps=["source.feed.duty_cycle=0.1", ("source.feed.power_w", [20.0])],
        grid=kc.GridSettings(pixels=21),
    )
    data = result.to_dict()
    assert len(data["options"]) == 5 and data["rank_by"] == "place:desk"
    with pytest.raises(kc.InputError, match="--rank-by"):
        kc.compare(scenario, rank_by="nearest")


# ------------------------------------------------------------------ assess
def test_assess_sweep_rank_by_sources_and_heights(options_file, tmp_path):
    out = tmp_path / "out"
    result = run(
        "assess",
        options_file,
        "--out",
        out,
        *GRID,
        "--sweep",
        "source.feed.power_w=1",
        "--rank-by",
        "place:desk",
    )
    assert_clean_exit(result, (0,))
    text = result.stdout
    assert "Sources:" in text and "EIRP" in text
    assert "Zones near the floor and at head height" in text
    assert "floor level z = 0.10 m" in text and "head height z = 1.70 m" in text
    assert "circle at source height (z = 1.00 m)" in text
    assert "e+" not in text
    data = json.loads((out / "assessment.json").read_text(encoding="utf-8"))
    validate("assessment", data)
    assert data["comparison"]["rank_by"] == "place:desk"
    assert "source.feed.power_w = 1" in [o["name"] for o in data["comparison"]["options"]]
    (source,) = data["sources"]
    assert source["peak_gain_dbi"] == pytest.approx(6.0) and source["power_w"] == 100.0
    assert source["reactive_near_field_m"] == pytest.approx(reactive_near_field_m(2.45e9))
    maps = data["maps"]
    assert maps["horizontal"]["plane"]["description"].startswith(
        "horizontal plane at source height"
    )
    assert maps["horizontal"]["zones_file"] == "zones-source-height.geojson"
    assert maps["head_height"]["zones_file"] == "zones-head-height.geojson"
    assert maps["floor_level"]["height_m"] == pytest.approx(0.1)
    assert maps["head_height"]["height_m"] == pytest.approx(1.7)
    assert maps["head_height"]["height_above_floor_m"] == pytest.approx(1.7)
    assert {"zones-floor-level.geojson", "zones-head-height.geojson"} <= set(data["files"])
    geo = json.loads((out / "zones-floor-level.geojson").read_text(encoding="utf-8"))
    assert geo["type"] == "FeatureCollection"
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "<h2>Sources</h2>" in html and "EIRP while on" in html
    assert "Zones near the floor and at head height" in html
    assert "S MEMORY" not in html and "NA MEMORY" not in html and "NA FOUND" not in html


def test_no_level_zones_without_a_floor(write_scenario, tmp_path):
    from .conftest import ISOTROPIC

    result = kc.assess(kc.load_scenario(write_scenario(ISOTROPIC)), grid=kc.GridSettings(pixels=21))
    data = result.to_dict()
    assert "floor_level" not in data["maps"] and "head_height" not in data["maps"]
    assert "zones-floor-level.geojson" not in data["files"]


def test_assess_api_sweeps(options_file):
    result = kc.assess(
        kc.load_scenario(options_file),
        grid=kc.GridSettings(pixels=21),
        sweeps=["source.feed.power_w=1"],
        rank_by="zone-area",
    )
    assert result.to_dict()["comparison"]["rank_by"] == "zone-area"


def test_floor_height_found_only_below_the_sources(write_scenario):
    floor = kc.load_scenario(write_scenario(OPTIONS, "f.toml"))
    assert api.floor_height_m(floor) == pytest.approx(0.0)
    wall = OPTIONS.replace("normal = [0.0, 0.0, 1.0]", "normal = [1.0, 0.0, 0.0]").replace(
        "point_m = [0.0, 0.0, 0.0]", "point_m = [-1.0, 0.0, 0.0]"
    )
    assert api.floor_height_m(kc.load_scenario(write_scenario(wall, "w.toml"))) is None
    raised = OPTIONS.replace("point_m = [0.0, 0.0, 0.0]", "point_m = [0.0, 0.0, -0.5]")
    assert api.floor_height_m(kc.load_scenario(write_scenario(raised, "r.toml"))) == (
        pytest.approx(-0.5)
    )


# -------------------------------------------------------------------- text
def test_pixels_at_the_side_bound_is_refused_for_memory_not_for_the_side(options_file, tmp_path):
    out = tmp_path / "m.csv"
    line = one_error_line(run("map", options_file, "--pixels", "4001", "--csv", out))
    assert "at most 4001 samples a side" not in line
    assert "MiB" in line and "--pixels" in line
    largest = api.largest_square_map(api.GRID_CHECK_LIMITS)
    assert f"at most {largest} x {largest}" in line
    line = one_error_line(run("map", options_file, "--pixels", "4002", "--csv", out))
    assert "more than the 4001 samples a side" in line
    # The largest square grid the message names is accepted by the check.
    api.GridSettings(pixels=largest)
    with pytest.raises(kc.InputError):
        api.GridSettings(pixels=largest + 1)


def test_keepout_text_gives_both_units(options_file):
    result = run("keepout", options_file)
    assert "limit W/m2 (mW/cm2)" in result.stdout and "10 (1)" in result.stdout


def test_huge_shares_read_as_multiples(write_scenario):
    # A place 1 mm from a 100 W point source: S = P G / (4 pi r^2) ~ 3e7 W/m2, millions of
    # times the limit: the text gives "x3.17 million", never "3.17e+08 %".
    text = OPTIONS.replace("position_m = [1.0, 0.5, 1.0]", "position_m = [0.001, 0.0, 1.0]")
    result = run("probe", write_scenario(text, "near.toml"))
    assert_clean_exit(result, (0,))
    shares = [line for line in result.stdout.splitlines() if "of limit" in line]
    assert shares and not any("e+" in line for line in shares)
    assert "x1.58 million" in result.stdout  # 1.58e7 W/m2 against 10 W/m2
    assert "15,800,000 W/m2 (1,580,000 mW/cm2)" in result.stdout


def test_verification_tags_read_as_sentences():
    text = verification_sentences("S MEMORY; E NA MEMORY; H NA FOUND; averaging FOUND")
    assert "MEMORY" not in text and "FOUND" not in text
    assert "recalled" in text.lower() and "checked" in text
    assert verification_sentences("") == ""
    assert verification_sentences("free words") == "free words"


# ------------------------------------------- names of the planes, the ranking column
def _table_header(text: str) -> list[str]:
    """The ranked table's column heads (split on the runs of two spaces)."""
    lines = text.splitlines()
    i = next(n for n, line in enumerate(lines) if line.startswith("rank "))
    return [h.strip() for h in lines[i].split("  ") if h.strip()]


def test_compare_table_ranked_by_a_place_shows_that_place(options_file):
    """Ranked by place:door, the table's first value column is the density at the door
    (W/m2 and mW/cm2) with its change against the base, in the ranked order."""
    result = run("compare", options_file, "--rank-by", "place:door", *GRID)
    assert_clean_exit(result, (0,))
    header = _table_header(result.stdout)
    assert header[:4] == ["rank", "option", "door W/m2 (mW/cm2)", "change"]
    data = strict_json(
        run("compare", options_file, "--rank-by", "place:door", *GRID, "--json").stdout
    )
    lines = result.stdout.splitlines()
    start = next(n for n, line in enumerate(lines) if line.startswith("rank ")) + 2
    rows = lines[start : start + len(data["options"])]
    assert len(rows) == len(data["options"]) and all(r.strip() for r in rows)
    for row, line in zip(data["options"], rows, strict=True):
        door = next(p for p in row["places"] if p["name"] == "door")
        w_m2 = door["power_density_w_m2"]
        assert pair_text(w_m2) in line  # W/m2 (mW/cm2), as the table writes numbers
        if row["is_base"]:
            assert " base " in line
        else:
            assert f"{door['change_db']:+.1f} dB" in line
    # The low-power option is 10 dB down everywhere (power density linear in power).
    assert "-10.0 dB" in result.stdout
    assert "floor zone" not in result.stdout


def test_compare_table_ranked_by_zone_area_puts_the_zone_first(options_file):
    result = run("compare", options_file, "--rank-by", "zone-area", *GRID)
    assert_clean_exit(result, (0,))
    assert _table_header(result.stdout)[2] == "zone m2"
    assert "zone area at source height (z = 1.00 m) of the strictest limit" in result.stdout
    keepout = run("compare", options_file, *GRID)
    assert _table_header(keepout.stdout)[2].startswith("keep-out m ")


def test_compare_at_a_given_height_names_it(options_file):
    result = run("compare", options_file, "--height-m", "1.7", *GRID, "--json")
    data = strict_json(result.stdout)
    validate("compare", data)
    plane = data["horizontal_plane"]
    assert plane["name"] is None and plane["where"] == "z = 1.70 m"
    assert "zone area at z = 1.70 m" in data["ranked_by"]
    assert "source height" not in data["ranked_by"]


def test_compare_height_help_names_no_map_files():
    result = run("compare", "--help")
    assert result.exit_code == 0
    # compare writes no map files: its --height-m help names none.
    assert "map-" not in result.stdout and "map-floor" not in result.stdout
    assert "options'" in result.stdout


def test_assess_names_the_horizontal_files_after_the_plane(options_file, tmp_path):
    """At the source height map-source-height.*; at a given height map-z1.70m.*; the
    report's options table names the zone's plane and shows the place it ranks by."""
    out = tmp_path / "out"
    result = kc.assess(
        kc.load_scenario(options_file),
        out,
        grid=kc.GridSettings(pixels=21),
        height_m=1.7,
        rank_by="place:desk",
    )
    data = result.to_dict()
    names = set(data["files"])
    assert {"map-z1.70m.png", "map-z1.70m.svg", "map-z1.70m.npz", "zones-z1.70m.geojson"} <= names
    assert not any("source-height" in n or "floor." in n for n in names)
    assert names == {p.name for p in out.iterdir()}
    assert data["maps"]["horizontal"]["zones_file"] == "zones-z1.70m.geojson"
    assert data["comparison"]["horizontal_plane"]["where"] == "z = 1.70 m"
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "zone area at z = 1.70 m" in html and "floor zone" not in html
    assert "at desk (ranked by)" in html
    assert "zones-z1.70m.geojson" in html


def test_map_files_at_two_heights_stand_side_by_side(options_file, tmp_path):
    out = tmp_path / "maps"
    assert_clean_exit(run("map", options_file, "--out", out, "--pixels", "11"), (0,))
    assert_clean_exit(
        run("map", options_file, "--out", out, "--pixels", "11", "--height-m", "1.7"), (0,)
    )
    names = {p.name for p in out.iterdir()}
    for stem in ("source-height", "z1.70m"):
        assert {f"map-{stem}.png", f"map-{stem}.csv", f"zones-{stem}.geojson"} <= names
    heights = np.loadtxt(out / "map-z1.70m.csv", delimiter=",", skiprows=1)[:, 2]
    assert np.allclose(heights, 1.7)
    source = np.loadtxt(out / "map-source-height.csv", delimiter=",", skiprows=1)[:, 2]
    assert np.allclose(source, 1.0)


@pytest.mark.parametrize(
    ("height_m", "stem"), [(1.7, "z1.70m"), (0.1, "z0.10m"), (-0.001, "z0.00m"), (-0.5, "z-0.50m")]
)
def test_height_stem(height_m, stem):
    from keepclear.fields.maps import height_stem

    assert height_stem(height_m) == stem
