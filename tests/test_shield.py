"""Shield sheets: ray crossing, edge and near-field rules, and the [[shield]] keys."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from keepclear.antennas.base import C_M_S, ModelInputError
from keepclear.fields import shielding as sh
from keepclear.fields.diffraction import RECTANGLE_RIPPLE
from keepclear.fields.errors import ScenarioError
from keepclear.fields.field import evaluate
from keepclear.fields.scenario_tables import shield_from_table
from keepclear.fields.shield import (
    MeshSpec,
    PerforatedSpec,
    RatedSpec,
    SheetSpec,
    Shield,
    SlotSpec,
)
from keepclear.fields.validate import Table

from ._hypothesis import examples
from ._property_strategies import (
    EXPECTED_PLAUSIBILITY_WARNING,
    HAS_REFLECTION,
    HAS_SHIELD,
    _close,
    build,
    documents,
    field_points,
    shields,
)

F = 2.45e9
LAM = C_M_S / F
SOURCE = np.array([-1.0, 0.0, 0.0])


def wall(spec, size: float = 1.0, **kw) -> Shield:
    return Shield(np.zeros(3), np.array([1.0, 0.0, 0.0]), size, size, spec, F, **kw)


def test_ray_through_a_large_sheet_is_attenuated_by_its_se() -> None:
    # A 20 dB panel, 5 km square: edge diffraction (four knife edges, ITU-R P.526, nu about
    # 400) adds under 0.3 dB, so the factor is the sheet's 10^(-20/20).
    shield = wall(RatedSpec(20.0), size=5000.0)
    factor = shield.amplitude_factor(SOURCE, np.array([[1.0, 0.0, 0.0]]))
    assert 20 * math.log10(1 / factor[0]) == pytest.approx(20.0, abs=0.3)
    assert factor[0] >= 0.1  # never more credit than the sheet's own


def test_points_on_the_source_side_get_no_credit() -> None:
    shield = wall(RatedSpec(40.0))
    pts = np.array([[-0.5, 0.0, 0.0], [0.0, 0.1, 0.0], [-2.0, 3.0, 1.0]])
    np.testing.assert_array_equal(shield.amplitude_factor(SOURCE, pts), 1.0)


def test_beside_the_sheet_only_the_lit_side_ripple_remains() -> None:
    # Rays passing well beside the sheet: the Fresnel ripple of the lit side, at most
    # 1.4 dB beside one edge (ITU-R P.526-15 Fig. 7, J(nu) > -1.4 dB; from memory), more
    # where two edges' ripples meet (RECTANGLE_RIPPLE, 2.84 dB, the rectangle's maximum).
    shield = wall(RatedSpec(40.0))
    pts = np.array([[1.0, 2.0, 0.0], [1.0, 0.0, 3.0], [1.0, 2.0, 2.0], [3.0, -4.0, 0.3]])
    f = shield.amplitude_factor(SOURCE, pts)
    assert np.all(f > 10 ** (-1.5 / 20)) and np.all(f <= RECTANGLE_RIPPLE), f


def test_on_the_shadow_boundary_of_one_edge_the_field_is_halved() -> None:
    # A 200 dB sheet, 4 km square, its edge at y = 0.5 m, crossed exactly there: P.526-15
    # sec. 4.1 gives J(0) = 6.02 dB (exact Fresnel form) / 6.03 dB (eq. (31)).  The
    # far edges add a little (their nu is about 360).
    shield = Shield(
        np.array([0.0, -1999.5, 0.0]),
        np.array([1.0, 0.0, 0.0]),
        4000.0,
        4000.0,
        RatedSpec(200.0),
        F,
    )
    f = shield.amplitude_factor(SOURCE, np.array([[1.0, 1.0, 0.0]]))[0]
    assert -20 * math.log10(f) == pytest.approx(6.02, abs=0.15)


def test_credit_behind_a_finite_sheet_is_limited_by_edge_diffraction() -> None:
    # Behind a perfect 1 m sheet the field is at least the knife-edge field of the
    # nearest edge (ITU-R P.526 J(nu) approximation) -- the sheet's 200 dB is not credited.
    shield = wall(RatedSpec(200.0))
    factor = shield.amplitude_factor(SOURCE, np.array([[1.0, 0.0, 0.0]]))[0]
    nu = 0.5 * math.sqrt(2 * 2.0 / (LAM * 1.0 * 1.0))
    j_db = 6.9 + 20 * math.log10(math.sqrt((nu - 0.1) ** 2 + 1) + nu - 0.1)
    assert factor >= 10 ** (-j_db / 20)
    assert factor < 1.0


def test_source_extent_never_adds_credit() -> None:
    # The largest factor over the corners of the source's cube: a large source whose
    # corner rays pass near the edge gets less credit than a point source.
    shield = wall(RatedSpec(30.0), size=2.0)
    pts = np.array([[1.0, 1.7, 0.0], [1.0, 0.0, 0.0]])
    point = shield.amplitude_factor(SOURCE, pts)
    big = shield.amplitude_factor(SOURCE, pts, source_extent_m=0.2)
    assert np.all(big >= point)
    assert big[0] > point[0]


def test_near_field_sheet_keeps_only_its_absorption() -> None:
    al = sh.METALS["aluminium"]
    spec = SheetSpec(al, 1e-6)
    terms = sh.schelkunoff_sheet_se(F, al.conductivity_s_m, 1e-6)
    far = spec.power_transmission(F, np.ones(1), np.array([1.0]))
    near = spec.power_transmission(F, np.ones(1), np.array([0.01]))  # < lambda / 2 pi
    assert -10 * math.log10(far[0]) == pytest.approx(float(terms.total_db), abs=1e-6)
    expected = float(terms.absorption_db + min(float(terms.multiple_reflection_db), 0.0))
    assert -10 * math.log10(near[0]) == pytest.approx(expected, abs=1e-6)
    assert near[0] > far[0]


def test_near_field_aperture_panel_loses_credit() -> None:
    spec = RatedSpec(30.0)
    r = 0.005
    t = spec.power_transmission(F, np.ones(1), np.array([r]))
    expected = 30.0 - 20 * math.log10(LAM / (2 * math.pi * r))
    assert -10 * math.log10(t[0]) == pytest.approx(expected, abs=1e-9)


def test_oblique_rays_get_less_credit() -> None:
    spec = RatedSpec(30.0)
    t = spec.power_transmission(F, np.array([1.0, 0.5]), np.array([1.0, 1.0]))
    assert -10 * math.log10(t[1]) == pytest.approx(30.0 - 20 * math.log10(2), abs=1e-9)
    sheet = SheetSpec(sh.METALS["aluminium"], 1e-5)
    ts = sheet.power_transmission(F, np.array([1.0, 0.5]), np.array([1.0, 1.0]))
    assert ts[1] > ts[0]


def test_slot_perforated_and_mesh_specs() -> None:
    slot = SlotSpec(0.01, 4)
    assert slot.normal_incidence_se_db(F) == pytest.approx(15.73 - 6.02, abs=0.01)  # Ott
    assert SlotSpec(0.08).normal_incidence_se_db(F) == 0.0
    perf = PerforatedSpec(0.003, 0.005, 0.001)
    assert 20 < perf.normal_incidence_se_db(F) < 120
    mesh = MeshSpec(0.002, 0.0003)
    assert 20 < mesh.normal_incidence_se_db(F) < 60
    with pytest.raises(ModelInputError):
        wall(PerforatedSpec(0.003, 0.08, 0.001))


@settings(max_examples=examples(60))
@given(
    st.lists(st.floats(-3, 3), min_size=3, max_size=3),
    st.lists(st.floats(-3, 3), min_size=3, max_size=3),
    st.floats(0.0, 120.0),
    st.floats(0.0, 0.3),
)
def test_an_added_shield_raises_a_field_by_the_fresnel_ripple_at_most(
    src, pt, se_db, extent
) -> None:
    # The Fresnel-Kirchhoff field beside a rectangular screen exceeds the free field by at
    # most RECTANGLE_RIPPLE (2.84 dB: two edges' lit-side ripples meeting; the exact
    # Fresnel integrals on a fine grid, test_rectangle_ripple_bound); never 0.
    shield = Shield(
        np.array([0.1, 0.2, 0.0]), np.array([1.0, 0.3, 0.2]), 1.5, 0.8, RatedSpec(se_db), F
    )
    factor = shield.amplitude_factor(np.array(src), np.array([pt]), source_extent_m=extent)
    assert 0.0 < factor[0] <= RECTANGLE_RIPPLE


def test_vectorised_paired_sources() -> None:
    shield = wall(RatedSpec(20.0), size=3.0)
    pts = np.array([[1.0, 0.0, 0.0], [1.0, 0.0, 0.0]])
    srcs = np.array([[-1.0, 0.0, 0.0], [0.5, 0.0, 0.0]])
    f = shield.amplitude_factor(srcs, pts)
    assert f[0] < 0.3 and f[1] == 1.0
    assert shield.corners().shape == (4, 3)


# --------------------------------------------------------------- scenario keys
def table(data: dict) -> Table:
    return Table(data, "shield.1", "bench.toml")


BASE = {"center_m": [0.5, 0.0, 1.0], "normal": [1.0, 0.0, 0.0], "width_m": 1.0, "height_m": 0.8}


def test_shield_from_table_sheet() -> None:
    s = shield_from_table(
        table({**BASE, "type": "sheet", "metal": "aluminium", "thickness_m": 0.001}), F
    )
    assert isinstance(s.spec, SheetSpec)
    assert s.spec.metal.name == "aluminium"
    np.testing.assert_allclose(s.height_axis, [0, 0, 1])
    assert s.label == "shield.1"


def test_shield_from_table_rated_without_type_and_other_types() -> None:
    s = shield_from_table(table({**BASE, "shielding_db": 25, "id": "screen"}), F)
    assert isinstance(s.spec, RatedSpec) and s.label == "screen"
    s = shield_from_table(
        table(
            {
                **BASE,
                "type": "perforated",
                "hole_size_m": 0.003,
                "pitch_m": 0.005,
                "thickness_m": 0.001,
                "lattice": "square",
            }
        ),
        F,
    )
    assert isinstance(s.spec, PerforatedSpec)
    s = shield_from_table(
        table(
            {**BASE, "type": "mesh", "pitch_m": 0.002, "wire_diameter_m": 0.0003, "metal": "copper"}
        ),
        F,
    )
    assert isinstance(s.spec, MeshSpec)
    s = shield_from_table(
        table({**BASE, "type": "slot", "slot_length_m": 0.02, "slot_count": 3}), F
    )
    assert isinstance(s.spec, SlotSpec) and s.spec.slot_count == 3


@pytest.mark.parametrize(
    ("extra", "key", "words"),
    [
        (
            {"type": "sheet", "metal": "alumnium", "thickness_m": 0.001},
            "shield.1.metal",
            "did you mean 'aluminium'",
        ),
        (
            {"type": "sheet", "metal": "copper", "thickness_m": -0.001},
            "shield.1.thickness_m",
            "> 0",
        ),
        ({"type": "sheet", "metal": "copper"}, "shield.1.thickness_m", "required"),
        ({"type": "plate", "shielding_db": 3}, "shield.1.type", "one of"),
        ({}, "shield.1.type", "required"),
        (
            {"type": "sheet", "metal": "copper", "thickness_m": 0.001, "hole_size_m": 0.002},
            "shield.1.hole_size_m",
            "not a known key",
        ),
        ({"shielding_db": 20, "up": [1.0, 0.0, 0.0]}, "shield.1.up", "parallel"),
        (
            {"type": "perforated", "hole_size_m": 0.003, "pitch_m": 0.09, "thickness_m": 0.001},
            "shield.1.pitch_m",
            "half a wavelength",
        ),
        (
            {"type": "slot", "slot_length_m": 0.02, "slot_count": 1.5},
            "shield.1.slot_count",
            "whole number",
        ),
    ],
)
def test_shield_bad_input_names_the_key(extra: dict, key: str, words: str) -> None:
    with pytest.raises(ScenarioError) as err:
        shield_from_table(table({**BASE, **extra}), F)
    text = str(err.value)
    assert text.startswith(f"bench.toml: {key}:"), text
    assert words in text


def test_zero_normal_is_refused() -> None:
    with pytest.raises(ScenarioError) as err:
        shield_from_table(table({**BASE, "normal": [0, 0, 0], "shielding_db": 10}), F)
    assert "shield.1.normal" in str(err.value)


def test_unknown_metal_lists_known_ones() -> None:
    with pytest.raises(ScenarioError) as err:
        shield_from_table(table({**BASE, "type": "sheet", "metal": "tin", "thickness_m": 1e-3}), F)
    for name in sh.METAL_NAMES:
        assert name in str(err.value)


# ------------------------------------------------------------
# Physical properties over random scenarios (hypothesis). The laws and their sources
# are listed in tests/_property_strategies.py.


def test_rectangle_ripple_bound():
    """The Fresnel-Kirchhoff obstacle factor never exceeds RECTANGLE_RIPPLE on a fine grid.

    Computed from scipy's Fresnel integrals (the closed form, no project code) on edge
    parameters -5..5 in steps of 0.25 (every rectangle of positive size), and at the
    refined maximum; the bound is within 1e-3 of the largest value found.
    """
    from scipy import special

    def k(v):
        s, c = special.fresnel(v)
        return c - 1j * s

    v = np.linspace(-5.0, 5.0, 41)
    a, b, c, d = np.meshgrid(v, v, v, v, indexing="ij", sparse=True)
    width = (k(a) + k(b)) / (1 - 1j)
    height = (k(c) + k(d)) / (1 - 1j)
    value = np.where((a + b > 0) & (c + d > 0), np.abs(1 - width * height), 0.0)
    refined = abs(1 - (k(-1.21329) + k(1.86335)) / (1 - 1j) * (k(1.25704) + k(1.25704)) / (1 - 1j))
    largest = max(float(value.max()), float(refined))
    assert largest <= RECTANGLE_RIPPLE
    assert largest >= RECTANGLE_RIPPLE - 1e-3
    # one wide edge alone: the knife edge's 1.17 (1.4 dB, ITU-R P.526-15 Fig. 7)
    edge = np.abs(1 - (k(v) + (0.5 - 0.5j)) / (1 - 1j))
    assert float(edge.max()) == pytest.approx(1.17, abs=0.01)


@EXPECTED_PLAUSIBILITY_WARNING
@pytest.mark.skipif(not HAS_SHIELD, reason="shield model not present")
@settings(max_examples=examples(25))
@given(doc=documents(max_sources=2), data=st.data(), pts=field_points())
def test_a_shield_raises_a_field_at_most_by_the_fresnel_ripple(doc, data, pts):
    # In coherent mode a sheet that weakens only the reflected ray can fill an interference
    # null (physically right), so the law is stated for the envelope, the default.  Beside
    # its shadow a sheet's diffraction raises each ray's field by at most the lit-side
    # ripple of a rectangular screen: 1.4 dB beside one straight edge (ITU-R P.526-15
    # sec. 4.1, Fig. 7), and at most RECTANGLE_RIPPLE (2.84 dB) where the ripples of a
    # narrow sheet's edges meet (test_rectangle_ripple_bound below).
    doc = {**doc, "reflections": "envelope"}
    bare = build(doc)
    assume(bare is not None)
    shielded_doc = {**doc, "shield": [data.draw(shields(doc["source"]), label="shield")]}
    shielded = build(shielded_doc)
    assume(shielded is not None)
    r0, r1 = evaluate(bare, pts), evaluate(shielded, pts)
    ripple = RECTANGLE_RIPPLE
    for name in ("e_v_m", "h_a_m", "power_density_w_m2", "peak_power_density_w_m2"):
        bound = ripple if name in ("e_v_m", "h_a_m") else ripple**2
        assert np.all(getattr(r1, name) <= getattr(r0, name) * bound * (1 + 1e-12)), name


@EXPECTED_PLAUSIBILITY_WARNING
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


# ------------------------------------------- the lit-side rise beside a sheet's edge
def _knife_edge_ratio(nu: float) -> float:
    """|E / E0| of one knife edge, ITU-R P.526-15 sec. 4.1, eq. (26) (number from memory).

    sqrt((1 - C - S)^2 + (C - S)^2) / 2 with scipy's Fresnel integrals: 0.5 at nu = 0 and
    a lit-side peak of 1.17 near nu = -1.2 (P.526 Fig. 7: J(nu) about -1.4 dB there; also
    Born and Wolf, *Principles of Optics*, 7th ed., sec. 8.7.3, Cornu spiral; from memory).
    """
    from scipy import special

    s, c = special.fresnel(nu)
    return math.sqrt((1 - c - s) ** 2 + (c - s) ** 2) / 2


@pytest.mark.parametrize(("size_m", "tolerance"), [(60.0, 0.01), (1.2, 0.07)])
def test_a_sheet_raises_the_field_beside_its_edge_by_the_knife_edge_ripple(
    size_m, tolerance
) -> None:
    # An aluminium sheet 1.5 m in front of a point source, its +y edge at y = 0.6 m; points
    # 3.5 m away at the source's height.  The geometric shadow edge is at y = 1.4 m.
    # 60 m square, only that edge counts (the others' nu exceed 100): P.526's knife edge.
    # 1.2 m square, the other edges (nu about 2.4 and 6) move the ripple by up to 0.07.
    shield = Shield(
        np.array([1.5, 0.6 - size_m / 2, 1.1]),
        np.array([1.0, 0.0, 0.0]),
        size_m,
        size_m,
        SheetSpec(sh.METALS["aluminium"], 0.002),
        F,
    )
    src = np.array([0.0, 0.0, 1.1])
    ys = np.array([0.0, 2.2, 2.4])
    f = shield.amplitude_factor(src, np.column_stack([np.full(3, 3.5), ys, np.full(3, 1.1)]))
    # The nearest edge's nu from the path excess via the edge point (1.5, 0.6, 1.1), signed
    # negative in the light (P.526-15 sec. 4.1: nu = 2 sqrt(Delta / lambda)); no project code.
    edge = np.array([1.5, 0.6, 1.1])
    for y, factor in zip(ys[1:], f[1:], strict=True):
        p = np.array([3.5, y, 1.1])
        excess = np.linalg.norm(edge - src) + np.linalg.norm(p - edge) - np.linalg.norm(p - src)
        nu = -2 * math.sqrt(excess / LAM)
        assert -1.5 < nu < -1.0  # beside the edge, in the light, near the ripple's peak
        # The sheet raises the field there, as one knife edge does (the far edges add a
        # little: their nu is about 2.4), and never above the rectangle's bound.
        assert 1.0 < factor <= RECTANGLE_RIPPLE
        assert factor == pytest.approx(_knife_edge_ratio(nu), abs=tolerance)
    assert _knife_edge_ratio(-1.22) == pytest.approx(1.17, abs=0.01)  # P.526 Fig. 7
    # Deep in the shadow the field is well below the free field (edges added in magnitude).
    assert f[0] < 0.5


def test_a_finite_source_spreads_the_ripple_over_its_corners_rays() -> None:
    # A 0.6 x 0.5 m plate 0.4 m in front of a source of half-size 0.134 m (a 0.27 m box):
    # at this point the centre's ray sees the plate's edge at nu about -0.3, where the model
    # takes no credit and gives no rise (factor 1), but the ray from one corner of the
    # source's cube sees it at nu about -1.3, the ripple's peak.  The factor is the largest
    # over the corners, so the rise is kept, within the rectangle's bound.
    plate = Shield(
        np.array([0.0, 0.4, 1.0]),
        np.array([0.0, 1.0, 0.0]),
        0.6,
        0.5,
        PerforatedSpec(0.003, 0.005, 0.001),
        F,
    )
    src, pt = np.array([0.0, 0.0, 0.95]), np.array([[-2.7, 2.8, 2.15]])
    point = plate.amplitude_factor(src, pt)[0]
    finite = plate.amplitude_factor(src, pt, source_extent_m=0.134)[0]
    assert point == pytest.approx(1.0, abs=1e-9)
    assert 1.15 < finite <= RECTANGLE_RIPPLE


SHEET_OPTIONS = """
name = "point source with a small sheet option"
[[source]]
id = "s"
antenna = "isotropic"
power_w = 100.0
position_m = [0.0, 0.0, 1.0]

[[point]]
name = "behind the sheet"
position_m = [2.0, 0.0, 1.0]

[[option]]
name = "small sheet"
[[option.shield]]
center_m = [0.5, 0.0, 1.0]
normal = [1.0, 0.0, 0.0]
width_m = 0.5
height_m = 0.5
type = "sheet"
metal = "aluminium"
thickness_m = 0.001

[[option]]
name = "half power"
[[option.source]]
id = "s"
power_w = 50.0
"""


def test_an_option_whose_sheet_raises_the_keepout_is_marked(write_scenario):
    # Round a point source the keep-out is a sphere, so its farthest reach is wherever the
    # field is largest: beside the sheet's edge, in the lit ripple (up to 1.17 times the
    # field beside one edge, ITU-R P.526-15 sec. 4.1, Fig. 7, from memory).  In the far
    # field R scales with the field amplitude (FCC OET Bulletin 65, Ed. 97-01, eq. (3):
    # R = sqrt(P G / (4 pi S))), so the keep-out grows by that factor at most.
    from keepclear.fields.compare import compare_options, comparison_table
    from keepclear.fields.scenario import load_scenario

    comparison = compare_options(load_scenario(write_scenario(SHEET_OPTIONS)), pixels=21)
    data = comparison.data()
    rows = {r["name"]: r for r in data["options"]}
    base, sheet, half = rows["base"], rows["small sheet"], rows["half power"]
    ratio = sheet["largest_keepout_m"] / base["largest_keepout_m"]
    assert 1.0 < ratio <= RECTANGLE_RIPPLE * 1.01
    assert sheet["raises_keepout"] is True
    assert "edge diffraction" in sheet["above_base_note"]
    assert sheet["raised_places"] == []  # behind the sheet the field is lower
    for row in (base, half):
        assert row["raises_keepout"] is False and row["above_base_note"] is None
    text = comparison_table(data)
    assert 'Above the base: option "small sheet" raises the keep-out' in text
    assert text.count("Above the base:") == 1


SHEET_TAKEN_AWAY = """
name = "sheet taken away"
frequency_hz = 2.45e9
[exposure]
limits = ["icnirp-2020/general-public"]

[[source]]
id = "s"
antenna = "isotropic"
power_w = 100.0
position_m = [0.0, 0.0, 1.0]

[[shield]]
center_m = [0.5, 0.0, 1.0]
normal = [1.0, 0.0, 0.0]
width_m = 0.5
height_m = 0.5
type = "sheet"
metal = "aluminium"
thickness_m = 0.001

[[point]]
name = "behind the sheet"
position_m = [2.0, 0.0, 1.0]

[[option]]
name = "no sheet"
shield = []
"""


def test_an_option_that_takes_the_sheet_away_is_not_blamed_on_edge_diffraction(
    write_scenario,
):
    # Behind a 1 mm aluminium sheet the field is far below the free field (common practice,
    # no source: a solid metal sheet passes nothing but its edges' diffraction); without it
    # the place behind gets the free field, so the option raises it.  The note says the
    # sheet was left out, not that an edge diffracts.
    from keepclear.fields.compare import compare_options
    from keepclear.fields.scenario import load_scenario

    data = compare_options(load_scenario(write_scenario(SHEET_TAKEN_AWAY)), pixels=21).data()
    row = {r["name"]: r for r in data["options"]}["no sheet"]
    assert row["raised_places"] == ["behind the sheet"]
    assert "leaves out, moves or changes a shield sheet" in row["above_base_note"]
    assert "edge diffraction" not in row["above_base_note"]


def test_an_option_that_moves_the_sheet_aside_is_not_blamed_on_edge_diffraction(
    write_scenario,
):
    # The same sheet moved 2.5 m aside no longer shades the place behind it: the cause is
    # the base's sheet gone from where it was, not an edge's ripple (common practice, no
    # source), and the advice to widen or move a sheet would be wrong.
    from keepclear.fields.compare import compare_options
    from keepclear.fields.scenario import load_scenario

    moved = SHEET_TAKEN_AWAY.replace(
        'name = "no sheet"\nshield = []',
        'name = "sheet moved aside"\n[[option.shield]]\ncenter_m = [0.5, 2.5, 1.0]\n'
        'normal = [1.0, 0.0, 0.0]\nwidth_m = 0.5\nheight_m = 0.5\ntype = "sheet"\n'
        'metal = "aluminium"\nthickness_m = 0.001',
    )
    assert "sheet moved aside" in moved
    data = compare_options(load_scenario(write_scenario(moved)), pixels=21).data()
    row = {r["name"]: r for r in data["options"]}["sheet moved aside"]
    assert row["raised_places"] == ["behind the sheet"]
    assert "moves or changes a shield sheet" in row["above_base_note"]
    assert "edge diffraction" not in row["above_base_note"]
