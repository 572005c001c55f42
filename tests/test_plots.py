"""Figures: valid, non-blank PNG and parseable SVG, with and without objects to draw.

The checks are on the files (PNG signature per ISO/IEC 15948:2004 sec. 5.2, SVG as
XML) and on the pixels (a blank or single-colour image has no variance).
"""

from __future__ import annotations

import dataclasses
import io
import xml.etree.ElementTree as ET

import matplotlib.image as mpimg
import numpy as np
import pytest

from keepclear.fields import maps, plots
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario

from ._cli import assert_clean_exit, run
from ._edge_cases import load_scenario_name
from .conftest import ISOTROPIC

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # ISO/IEC 15948:2004, sec. 5.2


def assert_good_png(data: bytes) -> np.ndarray:
    assert data[:8] == PNG_SIGNATURE
    image = mpimg.imread(io.BytesIO(data), format="png")
    assert image.ndim == 3 and image.shape[0] > 300 and image.shape[1] > 300
    assert float(np.var(image[..., :3])) > 0.005, "image is (nearly) blank"
    return image


def assert_good_svg(data: bytes) -> ET.Element:
    root = ET.fromstring(data)
    assert root.tag.endswith("svg")
    return root


@pytest.fixture
def iso_run(write_scenario):
    scenario = load_scenario(write_scenario(ISOTROPIC))
    keepouts = keepout_distances(scenario)
    run = maps.run_map(scenario, maps.principal_plane("xy", scenario.centre_m), keepouts, pixels=41)
    return scenario, keepouts, run


def test_density_map_png_and_svg(iso_run):
    scenario, keepouts, run = iso_run
    fig = plots.map_figure(run.result, scenario, keepouts)
    assert_good_png(plots.figure_bytes(fig, "png", dpi=60))
    root = assert_good_svg(plots.figure_bytes(fig, "svg"))
    text = "".join(root.itertext())
    # Title, units on both colour scales, every limit in the legend, the caution.
    assert scenario.name in text
    assert "W/m²" in text and "mW/cm²" in text
    for limit_id in scenario.limit_ids:
        assert limit_id in text
    assert plots.short_caution()[:40] in text


def test_quotient_map_says_what_it_is_against(iso_run):
    scenario, keepouts, run = iso_run
    style = plots.MapStyle("quotient", "icnirp-2020/occupational")
    fig = plots.map_figure(run.result, scenario, keepouts, style)
    assert_good_png(plots.figure_bytes(fig, "png", dpi=60))
    text = "".join(assert_good_svg(plots.figure_bytes(fig, "svg")).itertext())
    assert "quotient against icnirp-2020/occupational" in text and "dB" in text


class _Sheet:
    """A shield-like object that offers only centre, normal, size and its outline()."""

    center_m = np.array([0.4, 0.0, 0.0])
    normal = np.array([1.0, 0.0, 0.0])
    width_m = 0.6
    height_m = 0.5

    def outline(self):
        across, up = np.array([0.0, 1.0, 0.0]), np.array([0.0, 0.0, 1.0])
        w, h = self.width_m / 2, self.height_m / 2
        return np.array(
            [
                self.center_m + a * w * across + b * h * up
                for a, b in ((-1, -1), (1, -1), (1, 1), (-1, 1))
            ]
        )


class _Box:
    """An enclosure-like object with an outline() of corners and no openings."""

    openings = ()

    def outline(self):
        return np.array(
            [[x, y, z] for x in (-0.2, 0.2) for y in (-0.15, 0.15) for z in (-0.1, 0.1)]
        )


def test_objects_are_drawn_without_their_modules(iso_run):
    scenario, keepouts, run = iso_run
    # Drawing only: the objects are not used to compute the fields here.
    decorated = dataclasses.replace(scenario, shields=(_Sheet(),), enclosure=_Box())
    fig = plots.map_figure(run.result, decorated, keepouts)
    assert_good_png(plots.figure_bytes(fig, "png", dpi=60))
    assert maps.object_corners(_Sheet()).shape == (4, 3)
    assert maps.object_corners(object()) is None


def test_reflector_trace_and_vertical_plane(write_scenario):
    scenario = load_scenario(
        write_scenario(
            ISOTROPIC.replace("[0.0, 0.0, 0.0]", "[0.0, 0.0, 1.0]")
            + """
[[reflector]]
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"

[[point]]
name = "seat"
position_m = [0.8, 0.0, 1.2]
"""
        )
    )
    keepouts = keepout_distances(scenario)
    run = maps.run_map(scenario, maps.boresight_plane(scenario), keepouts, pixels=41)
    fig = plots.map_figure(run.result, scenario, keepouts)
    text = "".join(assert_good_svg(plots.figure_bytes(fig, "svg")).itertext())
    assert "seat" in text and "reflecting plane" in text and "concrete" in text
    assert maps.plane_trace(run.plane, [0, 0, 0], [0, 0, 1]) is not None


def test_comparison_figure_shares_one_colour_scale(iso_run):
    scenario, keepouts, run = iso_run
    fig = plots.comparison_figure(
        [("1. a", run.result, scenario, keepouts), ("2. b", run.result, scenario, keepouts)],
        "two panels",
    )
    assert_good_png(plots.figure_bytes(fig, "png", dpi=50))
    images = [im for ax in fig.axes for im in ax.get_images()]
    assert len(images) == 2
    assert images[0].norm.vmin == images[1].norm.vmin and images[0].norm.vmax == images[1].norm.vmax


def test_long_titles_wrap_and_keep_every_word():
    name = "Kiln room north bench with the long-necked applicator " * 3
    lines = plots.wrap_title(name, plots.TITLE_WIDTH)
    assert 1 < len(lines) <= plots.TITLE_MAX_LINES
    assert all(len(line) <= plots.TITLE_WIDTH for line in lines)
    assert " ".join(lines).split() == name.split()
    assert plots.wrap_title("A\x1bB", 40) == ["A B"]
    # Beyond three lines the third ends with an ellipsis instead of running off the figure.
    assert plots.wrap_title(name * 3, 40)[-1].endswith("…")


def test_letters_of_nearby_places_do_not_overlap(write_scenario):
    text = ISOTROPIC
    for i, (x, y) in enumerate([(1.0, 1.0), (1.05, 1.02), (1.02, 1.08), (0.97, 0.96)]):
        text += f'\n[[point]]\nname = "p{i}"\nposition_m = [{x}, {y}, 0.0]\n'
    scenario = load_scenario(write_scenario(text))
    plane = maps.principal_plane("xy", [0.0, 0.0, 0.0])
    run = maps.run_map(scenario, plane, keepout_distances(scenario), half_extent_m=3.0, pixels=31)
    fig = plots.map_figure(run.result, scenario, run.keepouts)
    fig.canvas.draw()
    ax = fig.axes[0]
    letters = [t for t in ax.texts if t.get_text() in {"A", "B", "C", "D"}]
    assert len(letters) == 4
    boxes = [t.get_window_extent() for t in letters]
    for i, a in enumerate(boxes):
        for b in boxes[i + 1 :]:
            overlap_x = min(a.x1, b.x1) - max(a.x0, b.x0)
            overlap_y = min(a.y1, b.y1) - max(a.y0, b.y0)
            assert overlap_x <= 0.5 or overlap_y <= 0.5, (a, b)


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


def test_control_characters_in_the_name_draw_without_warnings(write_scenario, tmp_path):
    text = ISOTROPIC.replace('name = "test point source"', 'name = "bench \\u001b[31m B2"')
    path = write_scenario(text)
    assert "\x1b" in load_scenario_name(path)
    result = run("assess", path, "--out", tmp_path / "out", "--pixels", "5", "--json")
    assert_clean_exit(result, allowed=(0,))
