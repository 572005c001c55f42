"""Labels on the maps: placed clear of each other, inside the map, on every panel.

The checks read the drawn boxes from matplotlib's own renderer (the text's box patch
as drawn), not pixels: two labels overlap when their boxes share more than half a
pixel each way.  What a reader needs of a map label is common practice, no source:
each label readable (not covered), next to what it names, and inside the map.
"""

from __future__ import annotations

import pytest

from keepclear.fields import maps, plots
from keepclear.fields.compare import OWN_PANEL_FRACTION, compare_options
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario

from .conftest import ISOTROPIC

LIMITS = '[exposure]\nlimits = ["icnirp-2020/general-public", "icnirp-2020/occupational"]\n'


def _drawn_labels(fig, ax):
    """(gid, text, box) of every placed label of an axes, after a draw."""
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    out = []
    for t in ax.texts:
        gid = t.get_gid() or ""
        if not gid.startswith("label-"):
            continue
        patch = t.get_bbox_patch()
        box = patch.get_window_extent(renderer) if patch else t.get_window_extent(renderer)
        out.append((gid, t.get_text(), box))
    return out


def _overlap_px(a, b) -> float:
    return min(min(a.x1, b.x1) - max(a.x0, b.x0), min(a.y1, b.y1) - max(a.y0, b.y0))


def _inside(box, frame) -> bool:
    tol = 0.5
    return (
        box.x0 >= frame.x0 - tol
        and box.x1 <= frame.x1 + tol
        and box.y0 >= frame.y0 - tol
        and box.y1 <= frame.y1 + tol
    )


def _crowded(write_scenario, source_id: str = "s"):
    # Six places within 0.4 m of each other beside the source, on a 3 m map: the
    # letters, the source's name and both contour numbers compete for the same room.
    text = ISOTROPIC.replace('id = "s"', f'id = "{source_id}"') + LIMITS
    spots = [(0.5, 0.3), (0.55, 0.35), (0.6, 0.28), (0.45, 0.4), (0.2, -0.1), (0.62, 0.45)]
    for i, (x, y) in enumerate(spots):
        text += f'\n[[point]]\nname = "p{i}"\nposition_m = [{x}, {y}, 0.0]\n'
    scenario = load_scenario(write_scenario(text))
    keepouts = keepout_distances(scenario)
    plane = maps.principal_plane("xy", [0.0, 0.0, 0.0])
    run = maps.run_map(scenario, plane, keepouts, half_extent_m=3.0, pixels=41)
    return scenario, keepouts, run


def test_labels_of_a_crowded_map_do_not_overlap_and_stay_inside(write_scenario):
    scenario, keepouts, run = _crowded(write_scenario)
    fig = plots.map_figure(run.result, scenario, keepouts)
    ax = fig.axes[0]
    labels = _drawn_labels(fig, ax)
    gids = [g for g, _, _ in labels]
    # Every place lettered, the source named, every contour numbered.
    letters = {f"label-place-{maps.point_letter(i)}" for i in range(6)}
    assert letters <= set(gids)
    assert "label-source-0" in gids
    drawn = [i for i, lid in enumerate(run.result.limit_ids) if maps.contour_lines(run.result, lid)]
    assert len(drawn) == 2
    assert {f"label-contour-{i + 1}" for i in drawn} <= set(gids)
    frame = ax.get_window_extent()
    for i, (ga, _, a) in enumerate(labels):
        assert _inside(a, frame), ga
        for gb, _, b in labels[i + 1 :]:
            assert _overlap_px(a, b) <= 0.5, (ga, gb, a, b)


def test_layout_is_the_same_when_drawn_again(write_scenario):
    scenario, keepouts, run = _crowded(write_scenario)
    first = _drawn_labels(fig := plots.map_figure(run.result, scenario, keepouts), fig.axes[0])
    again = _drawn_labels(fig := plots.map_figure(run.result, scenario, keepouts), fig.axes[0])
    assert [(g, t) for g, t, _ in first] == [(g, t) for g, t, _ in again]
    for (_, _, a), (_, _, b) in zip(first, again, strict=True):
        assert a.x0 == pytest.approx(b.x0, abs=0.5) and a.y0 == pytest.approx(b.y0, abs=0.5)


def test_a_long_source_name_is_cut_inside_the_map_and_given_whole_in_the_legend(write_scenario):
    long_id = "weed-control-applicator-prototype-screening-source-on-the-orchard-trailer"
    scenario, keepouts, run = _crowded(write_scenario, long_id)
    fig = plots.map_figure(run.result, scenario, keepouts)
    ax = fig.axes[0]
    labels = {g: (t, box) for g, t, box in _drawn_labels(fig, ax)}
    text, box = labels["label-source-0"]
    assert text.endswith("…") and long_id.startswith(text[:-1])
    frame = ax.get_window_extent()
    assert _inside(box, frame)
    assert box.width <= plots.SOURCE_LABEL_WIDTH * frame.width + 1.0
    legend = " ".join(t.get_text().replace("\n", "") for t in fig.legends[0].get_texts())
    assert long_id in legend


def test_units_stay_with_their_numbers_when_a_caption_wraps():
    caption = "(d) 4. aluminium screen: keep-out 14.67 m, zone 39.06 m²"
    for width in range(20, 60):
        lines = plots.wrap_words(caption, width)
        assert not any(line.strip() in {"m", "m²"} for line in lines), (width, lines)
        assert " ".join(lines).replace("\u00a0", " ") == caption
    # Hyphenated words stay whole.
    assert "keep-out" in " ".join(plots.wrap_words("a keep-out of 3.14 m", 8))


def test_every_compare_panel_letters_every_place(write_scenario):
    # A small option (a third of the power) gets a panel of its own extent; both panels
    # letter the same places with the legend's letters.
    text = ISOTROPIC.replace("power_w = 100.0", "power_w = 2000.0", 1) + LIMITS
    for i, (x, y) in enumerate([(1.0, 0.5), (1.1, 0.6), (-0.8, 1.0)]):
        text += f'\n[[point]]\nname = "place {i}"\nposition_m = [{x}, {y}, 0.0]\n'
    text += '\n[[option]]\nname = "a tenth"\n[[option.source]]\nid = "s"\npower_w = 200.0\n'
    comparison = compare_options(load_scenario(write_scenario(text)), pixels=21)
    assert any(v.panel is not None for v in comparison.variants)
    fig = comparison.figure()
    panels = [ax for ax in fig.axes if ax.get_images()]
    assert len(panels) == 2
    legend = [t.get_text() for t in fig.legends[0].get_texts()]
    for letter in "ABC":
        assert any(t.split()[:2] == [letter, "place"] for t in legend), legend
    for ax in panels:
        labels = _drawn_labels(fig, ax)
        assert {t for g, t, _ in labels if g.startswith("label-place-")} == {"A", "B", "C"}
        for i, (ga, _, a) in enumerate(labels):
            for gb, _, b in labels[i + 1 :]:
                assert _overlap_px(a, b) <= 0.5, (ga, gb)
    # No caption leaves its unit alone on a line.
    for ax in panels:
        assert all(line.strip() != "m²" for line in ax.get_title(loc="left").splitlines())


@pytest.mark.parametrize(("option_power_w", "own"), [(770.0, True), (1700.0, False)])
def test_an_option_with_a_much_smaller_zone_gets_its_own_panel(write_scenario, option_power_w, own):
    # Keep-out of an isotropic source goes as the square root of the power (far field,
    # S = P / (4 pi r^2)): 770 W of 2000 W gives 0.62 of the keep-out (the seed-dryer
    # case: 3.14 m against 5.06 m), 1700 W gives 0.92.
    text = ISOTROPIC.replace("power_w = 100.0", "power_w = 2000.0", 1) + LIMITS
    text += (
        f'\n[[option]]\nname = "less"\n[[option.source]]\nid = "s"\npower_w = {option_power_w}\n'
    )
    comparison = compare_options(load_scenario(write_scenario(text)), pixels=21)
    less = next(v for v in comparison.variants if v.name == "less")
    base = next(v for v in comparison.variants if v.is_base)
    ratio = less.largest_keepout_m / base.largest_keepout_m
    assert ratio == pytest.approx((option_power_w / 2000.0) ** 0.5, rel=0.02)
    assert (less.panel is not None) is own
    if own:
        mine = less.panel.result.grid.extent_m
        common = base.floor.result.grid.extent_m
        assert mine[1] - mine[0] < OWN_PANEL_FRACTION * (common[1] - common[0])
