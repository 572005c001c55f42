"""The HTML report: complete, self-contained, and saying what it must.

Self-contained means no reference outside the file: no <link>, no <script>, no
image or style loaded from a URL (every <img> is a data: URI), and no http(s)
address at all.  Content: every selected limit id with its source, the caution
(keepclear.fields.cautions), the scenario name and text, the named places, and
what the estimate leaves out.
"""

from __future__ import annotations

import base64
import io
import re
from html.parser import HTMLParser

import matplotlib.image as mpimg
import numpy as np
import pytest

from keepclear.fields import plots
from keepclear.fields.assessment import run_assessment
from keepclear.fields.cautions import CAUTION_LINES
from keepclear.fields.report import LEFT_OUT, summary_text
from keepclear.fields.scenario import load_scenario

from .conftest import ISOTROPIC

SCENARIO = (
    ISOTROPIC.replace('name = "test point source"', 'name = "Report check <bench & door>"')
    + """
[exposure]
limits = ["icnirp-2020/general-public", "fcc-1.1310/occupational", "sc6-2015/controlled"]

[[point]]
name = "operator's chair"
position_m = [0.5, 0.0, 0.0]

[[option]]
name = "lower power"
[[option.source]]
id = "s"
power_w = 20.0
"""
)


class _Collect(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict[str, str | None]]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


@pytest.fixture(scope="module")
def assessed(tmp_path_factory):
    path = tmp_path_factory.mktemp("report") / "bench.toml"
    path.write_text(SCENARIO, encoding="utf-8")
    scenario = load_scenario(path)
    # The figures themselves are checked in test_plots and test_assess; here a small real
    # PNG stands in for each, so the report's embedding is what is tested.
    buf = io.BytesIO()
    mpimg.imsave(buf, np.random.default_rng(1).random((8, 8)), format="png")
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(plots, "figure_bytes", lambda fig, fmt, dpi=150: buf.getvalue())
        data, files = run_assessment(
            scenario, pixels=31, scenario_text=path.read_text(encoding="utf-8")
        )
    return scenario, data, files, files["report.html"].decode("utf-8")


def test_report_names_every_limit_with_its_source(assessed):
    scenario, data, _, html = assessed
    for limit in data["limits"]:
        assert limit["id"] in html
        assert limit["source"].split(",")[0] in html
    assert len(data["limits"]) == len(scenario.limit_ids) == 3


def test_report_carries_the_cautions_and_what_is_left_out(assessed):
    *_, html = assessed
    for line in CAUTION_LINES:
        assert line.replace("'", "&#x27;") in html
    for heading, _ in LEFT_OUT:
        assert heading in html
    assert "SAR" in html and "pulsed" in html.lower() and "multipath" in html.lower()


def test_report_shows_the_scenario_escaped(assessed):
    *_, html = assessed
    assert "Report check &lt;bench &amp; door&gt;" in html
    assert "<bench" not in html
    assert "operator&#x27;s chair" in html
    assert "[[option]]" in html  # the scenario text as given


def test_report_has_no_external_resource(assessed):
    *_, html = assessed
    assert "http://" not in html and "https://" not in html and 'src="//' not in html
    parser = _Collect()
    parser.feed(html)
    tags = [t for t, _ in parser.tags]
    assert "link" not in tags and "script" not in tags and "iframe" not in tags
    images = [a for t, a in parser.tags if t == "img"]
    assert len(images) == 3  # floor, vertical, comparison
    for attrs in images:
        src = attrs["src"] or ""
        assert src.startswith("data:image/png;base64,")
        png = base64.b64decode(src.split(",", 1)[1])
        assert png[:8] == b"\x89PNG\r\n\x1a\n"
        mpimg.imread(io.BytesIO(png), format="png")
    assert not re.search(r"url\(", html)
    assert "@media print" in html


def test_option_table_has_a_leakage_column_only_with_an_enclosure(assessed):
    # No enclosure in this scenario: the report's option table, like compare's text, has
    # no column of dashes for the leakage 5 cm from a box.
    *_, html = assessed
    assert "4. Options compared" in html and "lower power" in html
    assert "leakage at 5" not in html


def test_terminal_summary(assessed):
    _, data, _, _ = assessed
    text = summary_text(data, ["out/report.html"])
    assert "icnirp-2020/general-public" in text and "operator's chair" in text
    assert "out/report.html" in text and "CAUTION" in text
