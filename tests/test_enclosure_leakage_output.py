"""An enclosure's leakage is shown: ``keepout`` (text and JSON), ``assess`` and the report.

The figures come from the stirred-cavity model of ``fields/enclosure.py`` (Hill et al.,
IEEE Trans. EMC 36(3), 1994); the physics is tested in ``test_enclosure.py``.  Here: the
``"enclosure"`` object is present with an enclosure and absent (keepout) or null (assess)
without one, its 5 cm figure is the one ``compare`` shows, its parts are consistent
(Q = 1 / sum 1/Q_i, Hill 1994 eq. (8); the leaked power below the input), and the oven
limits are compared as 21 CFR 1030.10(c)(1) gives them: 1 mW/cm^2 = 10 W/m^2 and
5 mW/cm^2 = 50 W/m^2 at 5 cm.
"""

from __future__ import annotations

import io

import matplotlib.image as mpimg
import numpy as np
import pytest

from keepclear.fields import plots
from keepclear.fields.assessment import keepout_data, run_assessment
from keepclear.fields.compare import compare_options
from keepclear.fields.report import summary_text
from keepclear.fields.report_text import density_text, enclosure_lines, number_text, share_text
from keepclear.fields.scenario import load_scenario

from ._cli import assert_clean_exit, run, run_once, strict_json, validate
from .conftest import ISOTROPIC, SCENARIOS

DRYING_LINE = SCENARIOS / "drying-line-enclosure.toml"

SMALL_BOX = """
name = "small box check"
[[source]]
id = "feed"
antenna = "isotropic"
power_w = 800.0
position_m = [0.1, 0.0, 1.0]
[enclosure]
id = "box"
center_m = [0.0, 0.0, 1.0]
size_m = [0.5, 0.4, 0.3]
metal = "mild-steel"
thickness_m = 0.002
load_water_volume_m3 = 275e-6
[[enclosure.opening]]
id = "gap"
face = "+x"
type = "slot"
length_m = 0.03
width_m = 0.001
along = "z"
offset_m = [0.0, 0.0]
[exposure]
limits = ["fda-1030.10/before-purchase", "fda-1030.10/in-service"]
"""


@pytest.fixture(scope="module")
def drying_line():
    result = run_once("keepout", DRYING_LINE, "--json")  # shared with the scenario checks
    assert_clean_exit(result, allowed=(0,))
    return strict_json(result.stdout)


def test_keepout_json_gives_the_enclosure_leakage(drying_line):
    validate("keepout", drying_line)
    block = drying_line["enclosure"]
    assert block["id"] == "tunnel"
    assert block["input_power_w"] == pytest.approx(3000.0)  # both heads on, duty not applied
    assert block["distance_m"] == pytest.approx(0.05)  # 21 CFR 1030.10(c)(1): 5 cm
    leak = block["leakage_5cm_w_m2"]
    assert leak > 0
    assert leak == pytest.approx(max(block["leakage_5cm_by_face"].values()), rel=1e-12)
    assert set(block["leakage_5cm_by_face"]) == {"+x", "-x", "+y", "-y", "+z", "-z"}
    # the door seam gap is on the front (-y): the front is where it leaks most
    assert max(block["leakage_5cm_by_face"], key=block["leakage_5cm_by_face"].get) == "-y"
    assert [o["id"] for o in block["openings"]] == [
        "belt-entry",
        "belt-exit",
        "top-vent",
        "viewing-window",
        "door-seam-gap",
    ]
    assert all(o["leaked_power_w"] > 0 for o in block["openings"])
    assert sum(o["leaked_power_w"] for o in block["openings"]) <= block["leaked_power_w"] * (
        1 + 1e-12
    )
    assert block["leaked_power_w"] < block["input_power_w"]
    assert block["inside_power_density_w_m2"] > leak
    # Hill et al. 1994, eq. (8): 1/Q = sum of 1/Q_i over the losses (wall transmission,
    # the one loss without its own Q here, only lowers Q further)
    parts = [block[k] for k in ("q_walls", "q_load", "q_openings")]
    assert 1 / block["q_factor"] >= sum(1 / q for q in parts) * (1 - 1e-12)
    assert block["q_factor"] <= min(parts)
    # 21 CFR 1030.10(c)(1): 1 mW/cm^2 before purchase, 5 mW/cm^2 in service
    limits = {row["limit"]: row for row in block["oven_limits"]}
    assert limits["fda-1030.10/before-purchase"]["limit_w_m2"] == pytest.approx(10.0)
    assert limits["fda-1030.10/in-service"]["limit_w_m2"] == pytest.approx(50.0)
    for row in block["oven_limits"]:
        assert row["percent_of_limit"] == pytest.approx(100 * leak / row["limit_w_m2"])


def test_the_5cm_figure_is_the_one_compare_shows(drying_line):
    # The figure compare writes in its table, from its own run, against keepout --json's.
    data = compare_options(load_scenario(DRYING_LINE), pixels=11).data()
    (base,) = [row for row in data["options"] if row["is_base"]]
    assert base["leakage_5cm_w_m2"] == pytest.approx(
        drying_line["enclosure"]["leakage_5cm_w_m2"], rel=1e-9
    )


def test_keepout_text_lines_show_the_figures(drying_line):
    block = drying_line["enclosure"]
    text = "\n".join(enclosure_lines(block))
    assert text.startswith("Enclosure leakage (tunnel")
    assert density_text(block["leakage_5cm_w_m2"]) in text  # W/m2 and mW/cm2 side by side
    assert "cavity Q" in text and "door-seam-gap" in text
    assert "fda-1030.10/before-purchase" in text and "% of it" in text
    assert enclosure_lines(None) == []


def test_keepout_without_an_enclosure_has_no_enclosure_key(write_scenario):
    result = run("keepout", write_scenario(ISOTROPIC), "--json")
    assert_clean_exit(result, allowed=(0,))
    data = strict_json(result.stdout)
    assert "enclosure" not in data
    text = run("keepout", write_scenario(ISOTROPIC)).stdout
    assert "Enclosure leakage" not in text


@pytest.fixture(scope="module")
def small_box_assessed(tmp_path_factory):
    path = tmp_path_factory.mktemp("leak") / "box.toml"
    path.write_text(SMALL_BOX, encoding="utf-8")
    scenario = load_scenario(path)
    # The figures are checked elsewhere (test_plots, test_assess): a small PNG stands in.
    buf = io.BytesIO()
    mpimg.imsave(buf, np.random.default_rng(1).random((8, 8)), format="png")
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(plots, "figure_bytes", lambda fig, fmt, dpi=150: buf.getvalue())
        data, files = run_assessment(scenario, pixels=31)
    return scenario, data, files["report.html"].decode("utf-8")


def test_assessment_json_summary_and_report_show_the_leakage(small_box_assessed):
    scenario, data, html = small_box_assessed
    validate("assessment", data)
    block = data["enclosure"]
    leak = block["leakage_5cm_w_m2"]
    assert leak > 0
    # the same figures as keepout --json gives for the scenario (another code path)
    alone = keepout_data(scenario)[0]["enclosure"]
    assert alone.keys() == block.keys()
    for key in ("leakage_5cm_w_m2", "q_factor", "inside_power_density_w_m2", "leaked_power_w"):
        assert block[key] == pytest.approx(alone[key], rel=1e-9), key
    assert [o["id"] for o in block["openings"]] == ["gap"]
    assert [r["limit"] for r in block["oven_limits"]] == list(scenario.limit_ids)
    assert "Enclosure leakage" in summary_text(data)
    assert "<h3>Enclosure leakage</h3>" in html
    # the 5 cm figure in W/m2 and mW/cm2 (1 W/m2 = 0.1 mW/cm2), as the report writes numbers
    assert f"{number_text(leak)}&nbsp;W/m²" in html
    assert f"{number_text(leak / 10)}&nbsp;mW/cm²" in html
    for row in block["oven_limits"]:  # "495 %", or above ten times the limit "x40.2"
        assert share_text(row["percent_of_limit"] / 100).replace(" ", "&nbsp;") in html
    assert f"cavity Q {number_text(block['q_factor'])}" in html
    assert "e+0" not in html  # numbers as the text outputs write them, never 4.02e+03
    assert "gap" in html
    # the section sits with the keep-out results, before the named places
    assert (
        html.index("Results per limit")
        < html.index("Enclosure leakage")
        < html.index("Named places")
    )


def test_assessment_without_an_enclosure_has_null(tmp_path):
    path = tmp_path / "free.toml"
    path.write_text(ISOTROPIC, encoding="utf-8")
    buf = io.BytesIO()
    mpimg.imsave(buf, np.zeros((4, 4)), format="png")
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(plots, "figure_bytes", lambda fig, fmt, dpi=150: buf.getvalue())
        data, files = run_assessment(load_scenario(path), pixels=21)
    assert data["enclosure"] is None
    assert "Enclosure leakage" not in files["report.html"].decode("utf-8")
    assert "Enclosure leakage" not in summary_text(data)
