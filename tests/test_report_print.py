"""The report printed to PDF by headless Chromium: every column of every table on the page.

A column that does not fit the printable width is cut off by the browser's print layout,
and the PDF then lacks its text.  So the check renders the report of a scenario with many
limits, named places and options, prints it on A4 and on US Letter portrait (ISO 216 and
ANSI/ASME Y14.1 paper sizes, common practice, no source needed for the sizes), extracts
the PDF's text with poppler's ``pdftotext -raw`` (content order, cropped to the page) and
asserts that the text of every table cell appears.  On the same pages no heading may end a
page: the last line of each page (``pdftotext -layout``, one page at a time) is no heading,
and the page that prints a heading over a table also prints the start of that table.  The
same report is then laid out at a 1,280 px browser width, and the document must not be wider
than the window (no sideways scroll).

Chromium is Debian's ``chromium`` package and pdftotext is ``poppler-utils``; ``.ci/run``
installs both.  Without them the test is skipped on a developer machine and fails in CI
(where ``CI`` is set), so a missing install step cannot hide.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import pytest

from keepclear.fields.assessment import run_assessment
from keepclear.fields.scenario import load_scenario

from .conftest import ISOTROPIC

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
PDFTOTEXT = shutil.which("pdftotext")

if not (CHROMIUM and PDFTOTEXT):
    if os.environ.get("CI"):
        raise RuntimeError(
            "the report print check needs Debian's chromium and poppler-utils (.ci/run installs "
            "them)"
        )
    pytest.skip("chromium and pdftotext are not installed", allow_module_level=True)

SCENARIO = (
    ISOTROPIC.replace('name = "test point source"', 'name = "' + "Long bench name " * 6 + '"')
    + """
[exposure]
limits = ["icnirp-2020/general-public", "icnirp-2020/occupational",
          "ieee-c95.1-2019/unrestricted", "fcc-1.1310/general-population",
          "sc6-2015/uncontrolled", "icnirp-2020/general-public-local"]

[[reflector]]
point_m = [0.0, 0.0, -1.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"

[[point]]
name = "operator's chair beside the long bench"
position_m = [0.5, 0.0, 0.0]

[[point]]
name = "doorway"
position_m = [0.0, 2.0, 0.0]

[[option]]
name = "lower power with a very long option name"
description = "the magnetron run at a fifth of its rated power through a smaller capacitor"
[[option.source]]
id = "s"
power_w = 20.0

[[option]]
name = "half duty"
[[option.source]]
id = "s"
duty_cycle = 0.5
"""
)

_FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


class _Cells(HTMLParser):
    """The text of every table cell (th and td), in document order."""

    def __init__(self) -> None:
        super().__init__()
        self.cells: list[str] = []
        self._depth = 0
        self._text: list[str] = []

    def handle_starttag(self, tag, attrs):
        if tag in ("td", "th"):
            self._depth += 1
            self._text = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._depth:
            self._depth -= 1
            self.cells.append("".join(self._text))

    def handle_data(self, data):
        if self._depth:
            self._text.append(data)


class _Headings(HTMLParser):
    """Each heading's text, with the cells of the first body row of the table it heads."""

    def __init__(self) -> None:
        super().__init__()
        self.headings: list[tuple[str, list[str]]] = []
        self._in: str | None = None
        self._text: list[str] = []
        self._row: list[str] | None = None  # the first body row of the table being read
        self._cell: list[str] | None = None
        self._blocks = 0  # blocks since the last heading: its intro, then what it heads

    def handle_starttag(self, tag, attrs):
        if tag in ("h1", "h2", "h3"):
            self._in, self._text, self._blocks = tag, [], 0
        elif tag in ("p", "figure", "dl", "ul", "ol", "pre", "table") and self.headings:
            self._blocks += 1
            if tag == "table" and self._blocks <= 2 and not self.headings[-1][1]:
                self._row = self.headings[-1][1]
        elif tag == "td" and self._row is not None:
            self._cell = []

    def handle_endtag(self, tag):
        if tag == self._in:
            self.headings.append(("".join(self._text), []))
            self._in = None
        elif tag == "td" and self._cell is not None and self._row is not None:
            self._row.append("".join(self._cell))
            self._cell = None
        elif tag == "tr" and self._row:
            self._row = None

    def handle_data(self, data):
        if self._in:
            self._text.append(data)
        elif self._cell is not None:
            self._cell.append(data)


def _squeeze(text: str) -> str:
    return re.sub(r"\s+", "", text.replace("\u00a0", " "))


def _chromium(tmp: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [CHROMIUM, *_FLAGS, f"--user-data-dir={tmp / 'profile'}", *args],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )


@pytest.fixture(scope="module")
def report_html(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("print")
    path = folder / "bench.toml"
    path.write_text(SCENARIO, encoding="utf-8")
    _, files = run_assessment(
        load_scenario(path), pixels=41, scenario_text=path.read_text(encoding="utf-8")
    )
    report = folder / "report.html"
    report.write_bytes(files["report.html"])
    return report


@pytest.mark.slow
@pytest.mark.parametrize("paper", ["A4", "letter"])
def test_printed_report_keeps_every_table_cell(report_html, tmp_path, paper):
    html = report_html.read_text(encoding="utf-8")
    # The paper size is the printer's choice; the test picks one as a user's print dialog does.
    page = tmp_path / "page.html"
    page.write_text(
        html.replace("</style>", f"@page {{ size: {paper} portrait; }}</style>", 1),
        encoding="utf-8",
    )
    pdf = tmp_path / "report.pdf"
    done = _chromium(tmp_path, "--no-pdf-header-footer", f"--print-to-pdf={pdf}", page.as_uri())
    assert pdf.exists(), done.stderr[-2000:]
    text = subprocess.run(
        [PDFTOTEXT, "-raw", str(pdf), "-"], capture_output=True, text=True, check=True
    ).stdout
    printed = _squeeze(text)
    parser = _Cells()
    parser.feed(html)
    assert len(parser.cells) > 60
    missing = [c for c in parser.cells if _squeeze(c) and _squeeze(c) not in printed]
    assert not missing, f"cut from the printed {paper} page: {missing[:8]}"
    _no_heading_ends_a_page(html, pdf, paper)


def _pages(pdf: Path, layout: str) -> list[str]:
    """The text of each page of ``pdf``, by poppler's ``pdftotext`` (form feed between pages)."""
    text = subprocess.run(
        [PDFTOTEXT, layout, str(pdf), "-"], capture_output=True, text=True, check=True
    ).stdout
    return text.split("\f")[:-1] if text.endswith("\f") else text.split("\f")


def _no_heading_ends_a_page(html: str, pdf: Path, paper: str) -> None:
    """No page ends with a heading, and a heading over a table shares its page with the table.

    A heading is found on a page by its squeezed text (it may wrap); the table's start by a
    cell of its first body row, searched after the heading on the same page.
    """
    parser = _Headings()
    parser.feed(html)
    # The start of a table: the first cell of its first row long enough to be told apart.
    headings = [
        (_squeeze(h), next((_squeeze(c) for c in row if len(_squeeze(c)) >= 6), None))
        for h, row in parser.headings
    ]
    assert len(headings) > 10 and sum(c is not None for _, c in headings) >= 5
    pages = _pages(pdf, "-layout")
    assert len(pages) > 3
    for number, page in enumerate(pages[:-1], start=1):
        lines = [line for line in page.splitlines() if line.strip()]
        last = _squeeze(lines[-1]) if lines else ""
        # The last line is a whole heading, or the end of one that wrapped.
        ended = [
            h for h, _ in headings if last and (h == last or (len(last) >= 10 and h.endswith(last)))
        ]
        assert not ended, f"{paper} page {number} ends with the heading {ended[0]!r}"
    # The closing caution is printed with the last section, never alone on a last page.
    last_page = _squeeze(pages[-1])
    assert _squeeze("Files of this assessment") in last_page, f"{paper}: last page {pages[-1]!r}"
    raw = [_squeeze(page) for page in _pages(pdf, "-raw")]
    for heading, cell in headings:
        on = [i for i, page in enumerate(raw) if heading in page]
        assert on, f"heading {heading!r} not printed on {paper}"
        if cell:
            page = raw[on[0]]
            after = page[page.index(heading) + len(heading) :]
            assert cell in after, (
                f"{paper} page {on[0] + 1}: the heading {heading!r} without the start of its table"
            )


@pytest.mark.slow
def test_report_fits_a_1280_px_window(report_html, tmp_path):
    html = report_html.read_text(encoding="utf-8")
    probe = html.replace(
        "</body>",
        "<script>document.title = 'W' + document.documentElement.scrollWidth;</script></body>",
    )
    page = tmp_path / "wide.html"
    page.write_text(probe, encoding="utf-8")
    done = _chromium(tmp_path, "--window-size=1280,900", "--dump-dom", page.as_uri())
    width = re.search(r"<title>W(\d+)</title>", done.stdout)
    assert width is not None, done.stderr[-2000:]
    assert int(width.group(1)) <= 1280
