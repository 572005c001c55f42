"""The assessment report: one self-contained HTML file, and the terminal summary.

The report is written for a lab-safety committee: what was assessed (the scenario
file as given), how (the method and its assumptions), the answer per limit (keep-out
radius, the figure to mark out with the model uncertainty, the far-field screening
estimate, the shapes to tape), the named places, the options compared, what the
estimate leaves out, the cautions, and the source of every limit and formula.

Self-contained: the figures are embedded as base64 PNG, the style sheet is inline,
there is no script and no reference to anything outside the file, so it opens the
same offline, in an archive, or printed.  A print style sheet (A4, no page break
inside a table or figure) makes "print to PDF" give a clean document.

Everything shown comes from the ``assessment.json`` data (:func:`render_report`
takes that dictionary), so the report and the JSON can never disagree.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
from typing import Any

from . import limits as limits_mod
from .cautions import CAUTION_LINES, caution_block
from .describe import power_text
from .report_text import (
    change_text,
    density_text,
    enclosure_lines,
    number_text,
    pair_text,
    place_cell,
    q_parts_text,
    ranked_columns,
    ranked_place,
    share_text,
    shows_leakage,
)

#: What the estimate leaves out, as printed in the report.
LEFT_OUT: tuple[tuple[str, str], ...] = (
    (
        "Specific absorption rate (SAR).",
        "The limits used are reference levels (incident fields). The basic restrictions "
        "they protect, whole-body and 10 g SAR (and absorbed power density above 6 GHz), "
        "are not computed; close to a source, within a wavelength or two, the incident-field "
        "comparison can be far from the absorbed dose in either direction.",
    ),
    (
        "Pulsed and peak limits.",
        "Only time-averaged exposure is compared with the limits. The peak (while-radiating) "
        "density is reported, but the separate limits some standards set on brief or pulsed "
        "exposure (ICNIRP 2020 brief-exposure and peak limits, IEEE C95.1 peak power "
        "density) are not checked.",
    ),
    (
        "Multipath beyond the modelled planes.",
        "Only the reflecting planes in the scenario are included, as infinite planes, to "
        "second order at most. Walls, ceilings, benches, cabinets and people that are not "
        "listed reflect and focus too; in a small metal-rich room the field can exceed the "
        "estimate.",
    ),
    (
        "Objects not in the scenario.",
        "Anything metallic near the source (tools, trolleys, cable trays, a second "
        "waveguide) changes the pattern. Shields and enclosures are only what the scenario "
        "describes; gaps, seams, door seals and ageing are not assessed.",
    ),
    (
        "Measurement and model uncertainty.",
        "Source models carry a stated gain uncertainty where they give one (widened "
        "distances are reported). Power, duty cycle and geometry are taken as given; an "
        "error in them passes straight into the answer. A survey with a calibrated meter "
        "is the check.",
    ),
    (
        "Electromagnetic interference with devices.",
        "Active implanted medical devices and electronics can be affected at levels far "
        "below the human-exposure limits; those need their own assessment.",
    ),
)

_CSS = """
:root { --ink: #1b1b1b; --muted: #555; --rule: #c9c9c9; --warn: #8a1c00; --band: #f4f1ea; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; color: var(--ink);
       max-width: 60rem; margin: 2rem auto; padding: 0 1.2rem; line-height: 1.45;
       font-size: 15px; }
h1 { font-size: 1.55rem; margin: 0 0 .3rem; }
h2 { font-size: 1.2rem; margin: 2.2rem 0 .6rem; border-bottom: 2px solid var(--ink);
     padding-bottom: .15rem; }
h3 { font-size: 1.02rem; margin: 1.4rem 0 .4rem; }
p.meta { color: var(--muted); margin: 0 0 1rem; font-size: .9rem; }
table { border-collapse: collapse; width: 100%; margin: .5rem 0 1rem; font-size: .88rem; }
th, td { border-bottom: 1px solid var(--rule); padding: .3rem .45rem; text-align: left;
         vertical-align: top; overflow-wrap: break-word; }
.free { overflow-wrap: anywhere; }
th { background: var(--band); font-weight: 600; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
td .unit2 { color: var(--muted); font-size: .9em; }
p.legend { font-size: .84rem; color: var(--muted); margin: -.6rem 0 1rem; }
.summary { border: 2px solid var(--ink); padding: .8rem 1rem; margin: 1rem 0 1.4rem;
           background: #fffdf8; }
.summary p { margin: .3rem 0; }
.exceed { color: var(--warn); font-weight: 600; }
.caution { border-left: 6px solid var(--warn); background: #fff4f0; padding: .6rem 1rem;
           margin: 1rem 0; }
.caution ul { margin: .3rem 0; padding-left: 1.2rem; }
figure { margin: 1rem 0 1.6rem; }
figure img { width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { font-size: .86rem; color: var(--muted); margin-top: .3rem; }
pre { background: #f7f7f7; border: 1px solid var(--rule); padding: .7rem; overflow-x: auto;
      font-size: .8rem; line-height: 1.3; white-space: pre-wrap; word-break: break-word; }
code { font-size: .88em; }
dl dt { font-weight: 600; margin-top: .5rem; }
dl dd { margin: .1rem 0 .3rem 1.2rem; }
footer { margin-top: 2.5rem; border-top: 1px solid var(--rule); padding-top: .6rem;
         font-size: .82rem; color: var(--muted); }
@page { margin: 15mm 13mm 17mm; }
@media print {
  body { max-width: none; margin: 0; padding: 0; font-size: 10pt; }
  table { font-size: 8.2pt; }
  th, td { padding: .2rem .3rem; }
  /* A heading never ends a page: it stays with its introduction and the table it heads
     (.keep, which moves to the next page whole when it does not fit; a table longer than a
     page then splits between rows). Chromium honours break-after: avoid only where the next
     block can start on the same page, hence the wrapper. */
  h1, h2, h3 { break-after: avoid; page-break-after: avoid; break-inside: avoid; }
  h2 + p, h3 + p, p:has(+ table) { break-after: avoid; page-break-after: avoid; }
  table + p.legend { break-before: avoid; page-break-before: avoid; }
  table, figure, .summary, .caution, pre, dl, .keep {
    break-inside: avoid; page-break-inside: avoid; }
  /* A table longer than a page splits between rows and repeats its header row. */
  thead { display: table-header-group; }
  tr { break-inside: avoid; page-break-inside: avoid; }
  figure.map + figure.map { break-before: page; page-break-before: always; }
  figure img { border: none; max-height: 19.5cm; width: auto; max-width: 100%; }
  a { color: inherit; text-decoration: none; }
  .noprint { display: none; }
}
"""


def _e(text: Any) -> str:
    return html.escape(str(text), quote=True)


def _num(x: float | None, digits: int = 3) -> str:
    """A number as the text outputs write it (:func:`number_text`: "3,920", not "3.92e+03")."""
    return "–" if x is None else number_text(x, digits)


def _metres(x: float | None) -> str:
    return "–" if x is None else f"{x:.2f}&nbsp;m"


def _id(limit_id: str) -> str:
    """A limit id that may wrap after its "/" and "-" (never inside a word)."""
    return _e(limit_id).replace("/", "/<wbr>").replace("-", "-<wbr>")


def _free(text: Any) -> str:
    """A cell of free text (a name or description) that may wrap anywhere if it must."""
    return f'<span class="free">{_e(text)}</span>'


def _density(x: float | None, digits: int = 3) -> str:
    """A power density in W/m² with mW/cm² beside it (1 W/m² = 0.1 mW/cm²)."""
    if x is None:
        return "–"
    return (
        f"{_num(x, digits)}&nbsp;W/m² "
        f'<span class="unit2">({_num(x / 10.0, digits)}&nbsp;mW/cm²)</span>'
    )


def _share(q: float) -> str:
    """An exposure quotient as a share of the limit, marked where the limit is reached."""
    text = _e(share_text(q)).replace(" ", "&nbsp;")
    return f'<span class="exceed">{text}</span>' if q >= 1 else text


def _limit_keys(limit_ids: list[str]) -> dict[str, str]:
    """Short column keys L1, L2, ... for the limits, in the scenario's order."""
    return {limit_id: f"L{i}" for i, limit_id in enumerate(limit_ids, start=1)}


def _legend(keys: dict[str, str], data: dict[str, Any]) -> str:
    """One line naming each column key's limit and its value."""
    values = {v["id"]: v for v in data["limits"]}
    parts = []
    for limit_id, key in keys.items():
        v = values.get(limit_id)
        value = "" if v is None else f" ({_num(v['power_density_w_m2'])}&nbsp;W/m²)"
        parts.append(f"<strong>{key}</strong> = {_id(limit_id)}{value}")
    return '<p class="legend">' + "; ".join(parts) + ".</p>"


def _img(png: bytes, alt: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return f'<img alt="{_e(alt)}" src="data:image/png;base64,{data}">'


def _keep(*parts: str) -> str:
    """A heading with its introduction and the table it heads: on one printed page."""
    return '<div class="keep">' + "".join(parts) + "</div>"


def _table(header: list[str], rows: list[list[str]], numeric: set[int] | None = None) -> str:
    numeric = numeric or set()
    head = "".join(
        f'<th class="num">{h}</th>' if i in numeric else f"<th>{h}</th>"
        for i, h in enumerate(header)
    )
    body = "".join(
        "<tr>"
        + "".join(
            f'<td class="num">{c}</td>' if i in numeric else f"<td>{c}</td>"
            for i, c in enumerate(r)
        )
        + "</tr>"
        for r in rows
    )
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


# --------------------------------------------------------------------- sections
def _where(data: dict[str, Any]) -> str:
    """The assessment's horizontal plane in a few words: ``"source height (z = 1.10 m)"``."""
    m = data["maps"]["horizontal"]
    z = f"z = {m['height_m']:.2f} m"
    name = m["plane"].get("name")
    return f"{name} ({z})" if name else z


def _summary(data: dict[str, Any]) -> str:
    rows = []
    for k in data["keepout"]:
        cyl = k["cylinder"]
        zone = k["horizontal_zone"]
        if not k["reached"]:
            rows.append([_id(k["limit"]), _density(k["limit_w_m2"]), "not reached", "–", "–", "–"])
            continue
        rows.append(
            [
                _id(k["limit"]),
                _density(k["limit_w_m2"]),
                _metres(k["distance_m"]),
                f"<strong>{_metres(k['mark_out_m'])}</strong>",
                _metres(zone["circle"]["radius_m"]) if zone["circle"]["radius_m"] else "–",
                f"r {_metres(cyl['radius_m'])}, z {cyl['z_min_m']:.2f} to "
                f"{cyl['z_max_m']:.2f}&nbsp;m",
            ]
        )
    table = _table(
        [
            "limit",
            "limit value",
            "keep-out radius",
            "mark out",
            f"circle at {_e(_where(data))}",
            "vertical cylinder",
        ],
        rows,
        numeric={1, 2, 3},
    )
    exceed = [p for p in data["points"] if p["exceeds"]]
    lines = [
        '<section class="summary">',
        "<p><strong>Keep people outside these distances from the first source while it "
        "can radiate.</strong> “Mark out” is the keep-out radius widened by the source "
        "model’s stated gain uncertainty, or the farthest zone point the maps found if that "
        "is farther; the circle and cylinder are widened by one grid step.</p>",
        table,
    ]
    for note in _reach_notes(data):
        lines.append(f'<p class="exceed">{_e(note)}</p>')
    if exceed:
        names = ", ".join(_e(p["name"]) for p in exceed)
        lines.append(f'<p class="exceed">Named places where a limit is reached: {names}.</p>')
    elif data["points"]:
        lines.append("<p>No named place reaches a limit.</p>")
    lines.append(f"<p>{_e(CAUTION_LINES[0])}</p>")
    lines.append("</section>")
    return "\n".join(lines)


def _sources(data: dict[str, Any]) -> str:
    """What each source radiates, as the model has it: gain, direction, EIRP, far field."""
    rows = []
    notes = []
    for s in data["sources"]:
        if "peak_gain_dbi" not in s:
            continue
        x, y, z = s["peak_direction"]
        gain = s["peak_gain_dbi"]
        far = s["far_field_distance_m"]
        reactive = s.get("reactive_near_field_m")
        rows.append(
            [
                _free(s["id"]),
                _e(s["antenna"]),
                f"{s['power_w']:g}&nbsp;W, duty {s['duty_cycle']:g}",
                "–" if gain is None else f"{gain:.1f}&nbsp;dBi",
                f"({x:+.2f}, {y:+.2f}, {z:+.2f})",
                _e(power_text(s["eirp_w"])).replace(" ", "&nbsp;"),
                _e(power_text(s["average_eirp_w"])).replace(" ", "&nbsp;"),
                f"{far:.3g}&nbsp;m",
            ]
        )
        if reactive is not None and far < reactive:
            notes.append(
                f"{s['id']}: the far-field distance 2D²/λ = {far:.3g} m is shorter than the "
                f"reactive near field, which reaches about λ/2π = {1000 * reactive:.1f} mm; "
                "treat points closer than that as near field."
            )
    if not rows:
        return ""
    table = _table(
        [
            "source",
            "antenna",
            "power while on",
            "peak gain",
            "peak towards (x, y, z)",
            "EIRP while on",
            "EIRP averaged",
            "far field beyond 2D²/λ",
        ],
        rows,
        numeric={3, 5, 6, 7},
    )
    legend = (
        '<p class="legend">Peak gain and its direction are the model’s own; EIRP is the '
        "power while on times the peak gain, averaged with the duty cycle applied; the far "
        "field is taken from the Fraunhofer distance 2D²/λ, D the source’s largest "
        "dimension (Balanis, Antenna Theory, 4th ed., eq. (2-1)). A source inside an "
        "enclosure radiates only through the enclosure’s openings.</p>"
    )
    return table + legend + "".join(f"<p>{_e(n)}</p>" for n in notes)


def _levels_section(data: dict[str, Any]) -> str:
    """The zones at floor level and at head height, when the scenario has a floor."""
    levels = _levels(data)
    if not levels:
        return ""
    header = ["limit"] + [
        f"{_e(lv['name'])}, z = {lv['height_m']:.2f}&nbsp;m ({lv['height_above_floor_m']:.2f}"
        "&nbsp;m above the floor): circle, area, box"
        for lv in levels
    ]
    rows = []
    for k in data["keepout"]:
        cells = [_id(k["limit"])]
        for lv in levels:
            e = _level_limit(lv, k["limit"])
            if e is None:
                cells.append("–")
                continue
            shapes = e["shapes"].get("with-uncertainty", e["shapes"]["model"])
            radius = shapes["circle"]["radius_m"]
            if radius == 0:
                cells.append("not reached")
                continue
            box = shapes["box"]
            keys = [key for key in box if key.endswith("_m") and key != "size_m"]
            box_text = "; ".join(
                f"{_e(key[:-2])} {box[key][0]:.2f} to {box[key][1]:.2f}&nbsp;m" for key in keys
            )
            clipped = " <em>(clipped at map edge)</em>" if e["clipped_at_map_edge"] else ""
            cells.append(
                f"r {_metres(radius)}, {_num(e['zone_area_with_uncertainty_m2'])}&nbsp;m²; "
                f"{box_text}{clipped}"
            )
        rows.append(cells)
    floor_m = levels[0]["floor_height_m"]
    return _keep(
        "<h3>Zones near the floor and at head height</h3>"
        f"<p>The scenario has a floor at z = {floor_m:.2f}&nbsp;m. Besides the plane at "
        f"{_e(_where(data))}, the zones are given just above the floor (where feet are; "
        f"{levels[0]['height_above_floor_m']:.2f}&nbsp;m up, where the reflection model "
        "is an approximation) and at head height (1.7&nbsp;m above the floor, common "
        "practice, no source); their outlines are in "
        + " and ".join(_e(lv["zones_file"]) for lv in levels)
        + ".</p>",
        _table(header, rows),
    )


def _reach_notes(data: dict[str, Any]) -> list[str]:
    """Sentences for limits whose map zones reach beyond the keep-out search's radius."""
    return [
        f"{k['limit']}: the maps find the limit reached {k['map_reach_m']:.2f} m from the "
        f"source, beyond the keep-out search's {k['recommended_distance_m']:.2f} m (a narrow "
        "lobe or a grazing reflection between the search's rays); mark out the larger."
        for k in data["keepout"]
        if k.get("map_reach_beyond_keepout")
    ]


def _results(data: dict[str, Any]) -> str:
    rows = []
    for k in data["keepout"]:
        d = k["direction"]
        towards = "–" if d is None else "(" + ", ".join(f"{x:+.2f}" for x in d) + ")"
        zone = k["horizontal_zone"]
        box = zone.get("box")
        if box:
            keys = [key for key in box if key.endswith("_m") and key != "size_m"]
            box_text = "; ".join(
                f"{_e(key[:-2])} {box[key][0]:.2f} to {box[key][1]:.2f}&nbsp;m" for key in keys
            )
        else:
            box_text = "–"
        avg = k["averaging_time_s"]
        rows.append(
            [
                _e(k["limit"]),
                _density(k["limit_w_m2"])
                + ("" if avg is None else f", averaged over {avg / 60:g}&nbsp;min"),
                _metres(k["distance_m"]),
                _metres(k["distance_with_uncertainty_m"])
                + (
                    f" (+{k['model_uncertainty_db']:.1f}&nbsp;dB)"
                    if k["model_uncertainty_db"] > 0
                    else ""
                ),
                _metres(k["screening_distance_m"]),
                towards,
                box_text
                + (" <em>(clipped at map edge)</em>" if zone["clipped_at_map_edge"] else ""),
                _num(zone["area_m2"]) + "&nbsp;m²",
            ]
        )
    return _table(
        [
            "limit",
            "limit value",
            "keep-out (model)",
            "with model uncertainty",
            "screening (far-field formula)",
            "farthest towards",
            f"box at {_e(_where(data))}",
            f"zone area at {_e(_where(data))}",
        ],
        rows,
        numeric={2, 3, 4, 7},
    )


def _points(data: dict[str, Any]) -> str:
    points = data["points"]
    if not points:
        return "<p>The scenario names no places (<code>[[point]]</code>).</p>"
    keys = _limit_keys([v["id"] for v in data["limits"]])
    header = ["", "place", "position (x, y, z)", "S time-averaged", "S while on"]
    header += [f"share of {key}" for key in keys.values()]
    rows = []
    for p in points:
        x, y, z = p["position_m"]
        cells = [
            f"<strong>{_e(p.get('map_letter', ''))}</strong>",
            _free(p["name"]),
            f"({x:g}, {y:g}, {z:g})&nbsp;m",
            _density(p["power_density_w_m2"]),
            _density(p["peak_power_density_w_m2"]),
        ]
        cells += [_share(p["quotients"][i]) for i in keys]
        rows.append(cells)
    return (
        _table(header, rows, numeric=set(range(3, len(header))))
        + _legend(keys, data)
        + "<p>The letters are the places’ marks on the maps.</p>"
    )


def _uncertainty_section(data: dict[str, Any]) -> str:
    """The Monte Carlo spread of the keep-out (with ``[uncertainty]``)."""
    u = data.get("uncertainty")
    if not u:
        return ""
    rows = [
        [
            _e(k["limit"]),
            _metres(k["distance_m"]),
            _metres(k["distance_median_m"]),
            f"<strong>{_metres(k['distance_p95_m'])}</strong>",
        ]
        for k in data["keepout"]
    ]
    gains = ", ".join(f"{g:g}" for g in u["gain_db_used"])
    return _keep(
        "<h3>How sure: the keep-out over the input uncertainty</h3>"
        f"<p>{u['samples']} Monte Carlo samples (PCG64, seed {u['seed']}) of the inputs, each "
        f"normal with one sigma: delivered power {u['power_db']:g}&nbsp;dB, gain {_e(gains)}"
        f"&nbsp;dB (per source; the model's own figure where the table gives none), floor and "
        f"wall |Γ| {u['reflection']:g}, shielding credit {u['shielding_db']:g}&nbsp;dB, source "
        f"position {u['position_m']:g}&nbsp;m per axis. The fields are computed once and "
        "re-weighted per sample. <strong>Mark out the 95th percentile</strong>: it is the "
        "distance 19 set-ups in 20 stay within. On the maps the dashed contour of each limit is "
        "where its 95th-percentile quotient reaches one (source position spread not included "
        "there).</p>",
        _table(["limit", "nominal", "median", "95th percentile"], rows, numeric={1, 2, 3}),
    )


def _enclosure_section(data: dict[str, Any]) -> str:
    """The enclosure's leakage 5 cm out, against the oven-leakage limits (with an enclosure)."""
    block = data.get("enclosure")
    if not block:
        return ""
    leak = block["leakage_5cm_w_m2"]
    by_face = block["leakage_5cm_by_face"]
    where = ", ".join(f"{x:.3g}" for x in block["leakage_5cm_position_m"])
    rows = [
        [_id(row["limit"]), _density(row["limit_w_m2"]), _share(row["percent_of_limit"] / 100.0)]
        for row in block["oven_limits"]
    ]
    limits_table = (
        _table(["oven-leakage limit", "limit value", "5&nbsp;cm figure, share of it"], rows, {1, 2})
        if rows
        else "<p>No oven-leakage limit (fda-1030.10/*) is among the limits assessed.</p>"
    )
    openings = [
        [_free(o["id"]), _e(o["face"]), _e(o["type"]), f"{_num(o['leaked_power_w'])}&nbsp;W"]
        for o in block["openings"]
    ]
    faces = [["highest 5&nbsp;cm out"] + [_density(value) for value in by_face.values()]]
    return _keep(
        "<h3>Enclosure leakage</h3>"
        f"<p>Enclosure {_free(block['id'])}, {_num(block['input_power_w'])}&nbsp;W in; "
        f"{_e(block['basis'])}. Highest density 5&nbsp;cm from its outer surface: "
        f"<strong>{_density(leak)}</strong>, face {_e(block['leakage_5cm_face'])} at "
        f"({_e(where)})&nbsp;m. "
        f"Inside the cavity {_density(block['inside_power_density_w_m2'])} "
        f"(E {_num(block['inside_e_v_m'])}&nbsp;V/m); cavity Q {_num(block['q_factor'])} "
        f"({_e(q_parts_text(block, _num))}); {_num(block['leaked_power_w'])}&nbsp;W leaks out "
        "in all.</p>",
        limits_table,
    ) + (
        _table(["face", *map(_e, by_face)], faces, set(range(1, len(by_face) + 1)))
        + (_table(["opening", "face", "type", "leaked power"], openings, {3}) if openings else "")
    )


def _places_extras(data: dict[str, Any]) -> str:
    """Stay time per limit and spatial averages at the named places."""
    parts = []
    stay_rows = []
    for p in data["points"]:
        for limit_id, seconds in (p.get("allowed_s") or {}).items():
            if seconds is not None:
                stay_rows.append(
                    [
                        _e(p["name"]),
                        _e(limit_id),
                        f"{seconds:.3g}&nbsp;s ({seconds / 60:.2g}&nbsp;min)",
                        _e(p.get("allowed_rule", {}).get(limit_id, "")),
                    ]
                )
    if stay_rows:
        parts.append(
            _keep(
                "<h3>How long: the longest stay per averaging window</h3>"
                "<p>Where a place is over a limit, a person may stay there for at most this "
                "long in each averaging window of that limit (linear time averaging: window × "
                "limit ÷ density, with nothing received the rest of the window). For the ICNIRP "
                "2020 local limits the brief-exposure energy rule (Table 7) is applied where it "
                "is stricter; its formula was written from memory of the guidelines and is not "
                "yet checked against the printed table.</p>",
                _table(["place", "limit", "longest stay", "rule"], stay_rows),
            )
        )
    avg_rows = []
    for p in data["points"]:
        if "spatial_average_w_m2" not in p:
            continue
        z0, z1 = p["average_over_height_m"]
        compared = "; ".join(
            f"{_e(k)}: {c['compared_with']} ({_share(c['quotient'])})"
            for k, c in p.get("spatial_average_comparison", {}).items()
        )
        avg_rows.append(
            [
                _e(p["name"]),
                f"{z0:g} to {z1:g}&nbsp;m",
                _num(p["spatial_average_w_m2"]),
                _num(p["power_density_w_m2"]),
                compared,
            ]
        )
    if avg_rows:
        parts.append(
            _keep(
                "<h3>The whole body: spatial average over a standing person</h3>"
                "<p>The time-averaged power density averaged over a vertical line at the place, "
                "by the composite midpoint rule with 20 equally spaced points (0.1&nbsp;m apart "
                "over 2&nbsp;m). Whole-body limits (ICNIRP 2020 Table 5, IEEE, FCC, Safety Code "
                "6) are compared with the spatial average; local limits, product emission limits "
                "and device thresholds with the point value.</p>",
                _table(
                    ["place", "line", "spatial average W/m²", "point value W/m²", "compared with"],
                    avg_rows,
                    numeric={2, 3},
                ),
            )
        )
    return "".join(parts)


def _readings_section(data: dict[str, Any]) -> str:
    """Survey readings against the prediction (``assess --readings``)."""
    block = data.get("readings")
    if not block:
        return ""
    rows = []
    for i, r in enumerate(block["readings"]):
        db = r["ratio_db"]
        flag = '<span class="exceed">under-predicted</span>' if r["under_predicted"] else ""
        rows.append(
            [
                _e(r["label"] or f"R{i + 1}"),
                "(" + ", ".join(f"{x:g}" for x in r["position_m"]) + ")&nbsp;m",
                f"{r['value']:g}&nbsp;{_e(r['unit'])}",
                _num(r["measured_w_m2"]),
                _num(r["predicted_w_m2"]),
                "no prediction" if db is None else f"{db:+.1f}",
                flag,
                _e(", ".join(r["over_limits"]) or "-"),
            ]
        )
    largest = block["largest_under_prediction_db"]
    return (
        _keep(
            "<h3>What the meter says: survey readings against the model</h3>"
            "<p>A survey meter averages over a second or more, far longer than a mains cycle, so "
            "each reading is compared with the time-averaged prediction (duty cycle applied); E "
            "and H readings as E²/η0 and η0H². A reading more than 3&nbsp;dB above the model is "
            "flagged. The readings are marked on the maps (diamonds; filled red when flagged) "
            "where they lie within 0.5&nbsp;m of the plane.</p>"
            + _table(
                [
                    "reading",
                    "position",
                    "meter",
                    "measured W/m²",
                    "predicted W/m²",
                    "ratio dB",
                    "flag",
                    "over limits",
                ],
                rows,
                numeric={3, 4, 5},
            ),
        )
        + "<p>"
        + (
            f"Largest measured-over-predicted ratio {largest:+.1f}&nbsp;dB. "
            if largest is not None
            else ""
        )
        + f"Suggested margin on the model: <strong>{block['suggested_margin_db']:.1f}&nbsp;dB"
        "</strong>.</p>"
    )


def _comparison(data: dict[str, Any], figure: bytes | None, heading: str) -> str:
    comp = data.get("comparison")
    if not comp:
        return heading + "<p>The scenario lists no alternatives (<code>[[option]]</code>).</p>"
    keys = _limit_keys(list(comp["limits"]))
    where = comp["horizontal_plane"]["where"]
    rank_by = comp.get("rank_by", "keepout")
    place = ranked_place(rank_by)
    # The value the ranking is by comes first after the description.
    groups = ranked_columns(rank_by)
    heads = {
        "place": [f"at {_e(place)}"],
        "keepout": [f"keep-out {key}" for key in keys.values()],
        "zone": [f"zone area at {_e(where)}"],
    }
    if rank_by != "keepout":
        heads[groups[0]] = [f"{heads[groups[0]][0]} (ranked by)"]
    header = ["#", "option", "description", *(h for g in groups for h in heads[g])]
    leaks = shows_leakage(comp["options"])
    header += [*(["leakage at 5 cm"] if leaks else []), "worst named place"]
    rows = []
    for row in comp["options"]:
        k = {e["limit"]: e for e in row["keepout"]}
        cells = [str(row["rank"]), _free(row["name"]), _free(row["description"])]
        keepout_cells = []
        for i in keys:
            e = k[i]
            text = _metres(e["distance_m"])
            if e["distance_with_uncertainty_m"] > e["distance_m"] + 5e-3:
                text += f" ({_metres(e['distance_with_uncertainty_m'])})"
            keepout_cells.append(text)
        zone_cells = [
            _num(max(row["zone_area_with_uncertainty_m2"].values(), default=0.0)) + "&nbsp;m²"
        ]
        place_cells = []
        if place is not None:
            density, change = place_cell(row, place)
            text = _density(density)
            if not row["is_base"]:
                text += f"<br>{_e(change_text(change))}"
            place_cells = [text]
        values = {"place": place_cells, "keepout": keepout_cells, "zone": zone_cells}
        cells += [c for g in groups for c in values[g]]
        if leaks:
            cells.append(_density(row["leakage_5cm_w_m2"]))
        wp = row["worst_point"]
        cells.append(
            "–"
            if wp is None
            else f"{_free(wp['name'])}: {_share(wp['quotient'])} of "
            f"{keys.get(wp['limit'], _e(wp['limit']))}"
        )
        rows.append(cells)
    parts = [
        _keep(
            heading,
            f"<p>Ranked by {_e(comp['ranked_by'])}"
            + (f" ({_e(comp['tie_rule'])})" if comp.get("tie_rule") else "")
            + f". Zones on the horizontal plane at {_e(where)}. The ranking says which option "
            "needs the least space, or gives the least exposure at the chosen place; it does "
            "not make any option safe by itself.</p>",
            _table(header, rows, numeric={0, *range(3, len(header) - 1)}),
            _legend(keys, data),
            *(
                f'<p class="legend">Above the base: option &ldquo;{_free(r["name"])}&rdquo; '
                f"{_e(r['above_base_note'])}.</p>"
                for r in comp["options"]
                if r.get("above_base_note")
            ),
        ),
        _comparison_places(data, comp),
    ]
    if figure is not None:
        parts.append(
            '<figure class="map">'
            + _img(figure, "maps of the options side by side on the horizontal plane")
            + "<figcaption>The options on one colour scale, best first.</figcaption></figure>"
        )
    return "\n".join(parts)


def _comparison_places(data: dict[str, Any], comp: dict[str, Any]) -> str:
    """Each option's time-averaged density at every named place, with its change in dB."""
    if not any(row.get("places") for row in comp["options"]):
        return ""
    letters = {p["name"]: p.get("map_letter", p["name"]) for p in data["points"]}
    names = [p["name"] for p in comp["options"][0]["places"]]
    header = ["#", "option"] + [f"at {_e(letters.get(n, n))}" for n in names]
    rows = []
    for row in comp["options"]:
        cells = [str(row["rank"]), _free(row["name"])]
        for place in row["places"]:
            text = _density(place["power_density_w_m2"])
            if not row["is_base"] and place["change_db"] is not None:
                text += f"<br>{place['change_db']:+.1f}&nbsp;dB"
            cells.append(text)
        rows.append(cells)
    legend = "; ".join(f"<strong>{_e(letters.get(n, n))}</strong> = {_free(n)}" for n in names)
    return _keep(
        "<h3>The options at the named places</h3>",
        _table(header, rows, numeric={0, *range(2, len(header))}),
        f'<p class="legend">Time-averaged power density; the change in dB is against the '
        f"base. {legend}.</p>",
    )


def _method(data: dict[str, Any]) -> str:
    a = data["assumptions"]
    floor = data["maps"]["horizontal"]
    vertical = data["maps"]["vertical"]
    return f"""
<dl>
<dt>Quantity compared</dt>
<dd>RMS fields E and H from the source models (near and far field), and the
plane-wave-equivalent power density S = max(|E|²/η₀, η₀|H|²), η₀ = √(μ₀/ε₀) ≈ 376.73 Ω
(CODATA via SciPy). The exposure quotient is max(S/S<sub>lim</sub>, (E/E<sub>lim</sub>)²,
(H/H<sub>lim</sub>)²) over the quantities the standard gives; a limit is reached where it is
at least one.</dd>
<dt>Time averaging</dt>
<dd>{_e(_sentence(a["time_averaging"]))}. Each source’s |E|² and |H|² are weighted by its duty cycle
(the time average over any window the duty pattern repeats within); sources are not
phase-locked and add as power. “While on” values assume every source radiates at once.</dd>
<dt>Reflections</dt>
<dd>{_e(_sentence(a["reflections"]))}. Each reflecting plane adds the image of every source with the
Fresnel coefficients of its material (ITU-R P.2040 where named). In the envelope mode the
reflected field adds in the worst phase everywhere ((1 + |Γ|)² on power), never below the
coherent sum; the coherent mode sums phasors and shows the standing waves.</dd>
<dt>Keep-out distance</dt>
<dd>The radius, about the first source’s reference point, of the smallest sphere holding
every point where the time-averaged quotient reaches one: rays in about 400 quasi-uniform
directions (golden-spiral lattice) plus the radiators’ axes, sampled outwards (λ/16 near
the source, growing 3 % a step), the outermost exceedance kept and narrowed to 10⁻⁴, the
farthest rays refined twice with denser caps. Where a source model states a gain
uncertainty u, the search is repeated at a quotient of 10<sup>−u/10</sup> (“with model
uncertainty”, the figure to mark out).</dd>
<dt>Screening estimate</dt>
<dd>The trade’s far-field formula R = √(F Σ dᵢ Pᵢ Gᵢ / (4π S<sub>lim</sub>)) with the
peak gain in every direction and the reflection factor F of FCC OET Bulletin 65 (1 in free
space, 2.56 for a ground, 4 for a perfect reflector); enclosures and shields ignored. It is
shown for comparison only: within the near field it can err either way.</dd>
<dt>Maps and zones</dt>
<dd>The first map is the {_e(floor["plane"]["description"])}
({floor["shape"][1]} × {floor["shape"][0]} samples, step {100 * floor["step_m"]:.1f}&nbsp;cm);
the vertical map is the {_e(vertical["plane"]["description"])} (step
{100 * vertical["step_m"]:.1f}&nbsp;cm). Zone boundaries are marching-squares contours of
log₁₀ of the quotient (exact along grid lines for a 1/r² fall-off). The circle about the
source and the axis-aligned box are widened by one grid step; the vertical cylinder comes
from rays in about 900 directions sampled to the keep-out radius, widened by one radial
step and never larger than the cylinder around the keep-out sphere. The zones are written
as GeoJSON in metres in the plane’s own coordinates (x, y on the horizontal plane), not
longitude and latitude.</dd>
</dl>
"""


def _sentence(text: str) -> str:
    return text[:1].upper() + text[1:]


def _left_out() -> str:
    items = "".join(f"<li><strong>{_e(h)}</strong> {_e(t)}</li>" for h, t in LEFT_OUT)
    return f"<ul>{items}</ul>"


def _input_warnings(data: dict[str, Any]) -> str:
    """The warnings about the input, above the results; nothing when there are none."""
    found = data.get("warnings") or []
    if not found:
        return ""
    items = "".join(f"<li>{_e(w if w.endswith('.') else w + '.')}</li>" for w in found)
    return (
        '<div class="caution" id="input-warnings"><strong>Warnings about the input</strong>'
        "<p>The scenario was computed exactly as given, but the following inputs look like "
        "slips or fall outside what the models were checked for. Check each one before "
        f"relying on the results below.</p><ul>{items}</ul></div>"
    )


def _cautions() -> str:
    items = "".join(f"<li>{_e(c)}</li>" for c in CAUTION_LINES)
    return f'<div class="caution"><strong>CAUTION</strong><ul>{items}</ul></div>'


def _limit_sources(data: dict[str, Any]) -> str:
    rows = []
    for v in data["limits"]:
        avg = v["averaging_time_s"]
        fields = [f"S {_density(v['power_density_w_m2'], 4)}"]
        if v["e_v_m"] is not None:
            fields.append(f"E {_num(v['e_v_m'], 4)}&nbsp;V/m")
        if v["h_a_m"] is not None:
            fields.append(f"H {_num(v['h_a_m'], 4)}&nbsp;A/m")
        rows.append(
            [
                _id(v["id"]),
                ", ".join(fields),
                "–" if avg is None else f"{avg / 60:g}&nbsp;min",
                _e(v["source"]),
                f"<code>{_e(v['expression'])}</code>",
                _e(verification_sentences(v.get("verification", ""))),
            ]
        )
    devices = [v["id"] for v in data["limits"] if v.get("kind") == "device"]
    note = (
        f"<p><strong>Equipment, not people.</strong> {_e(', '.join(devices))}: "
        f"{_e(limits_mod.DEVICE_NOTE)}</p>"
        if devices
        else ""
    )
    return note + _table(
        [
            "limit",
            f"value at {data['frequency_hz'] / 1e9:g} GHz",
            "averaging",
            "source",
            "printed expression",
            "how the values were checked",
        ],
        rows,
    )


def verification_sentences(verification: str) -> str:
    """A limit's verification tags (``"S MEMORY; E NA FOUND; ..."``) as plain sentences.

    :func:`keepclear.fields.limits.verification_text`; text that is not in the tag form
    is shown as it is.
    """
    try:
        return limits_mod.verification_text(verification)
    except ValueError:
        return verification


_REFERENCES = (
    "IEC 61000-4-3:2020 (Ed. 4.0), Radiated, radio-frequency, electromagnetic field immunity "
    "test, Table 1 (test levels); IEC 60601-1-2:2014, Table 9 (proximity fields from RF "
    "wireless communications equipment, 2 450 MHz: 28 V/m).",
    "ICNIRP, Guidelines for limiting exposure to electromagnetic fields (100 kHz to 300 GHz), "
    "Health Physics 118(5):483–524, 2020, doi:10.1097/HP.0000000000001210 (Tables 5, 6).",
    "IEEE Std C95.1-2019, Safety Levels with Respect to Human Exposure to Electric, Magnetic, "
    "and Electromagnetic Fields, 0 Hz to 300 GHz, doi:10.1109/IEEESTD.2019.8859679.",
    "47 CFR 1.1310, Radiofrequency radiation exposure limits, Table 1.",
    "Health Canada, Safety Code 6 (2015), Tables 5 and 6.",
    "21 CFR 1030.10, Microwave ovens, (c)(1): leakage 5 cm from the external surface.",
    "FCC OET Bulletin 65, Edition 97-01 (1997): far-field prediction equations (3)–(6) and "
    "the ground-reflection factors 2.56 and 4.",
    "C. A. Balanis, Antenna Theory: Analysis and Design, 4th ed., Wiley, 2016, ch. 2 and 12; "
    "Advanced Engineering Electromagnetics, 2nd ed., Wiley, 2012, sec. 5.2 and 7.4 "
    "(Fresnel coefficients, image theory).",
    "ITU-R Recommendation P.2040, Effects of building materials and structures on "
    "radiowave propagation above about 100 MHz (material constants).",
    "Á. González, Measurement of areas on a sphere using Fibonacci and latitude–longitude "
    "lattices, Math. Geosci. 42 (2010) 49–64, doi:10.1007/s11004-009-9257-x.",
    "W. E. Lorensen and H. E. Cline, Marching cubes, Computer Graphics 21(4) (1987) 163–169, "
    "doi:10.1145/37402.37422 (marching squares is its two-dimensional case).",
    "IETF RFC 7946 (2016), The GeoJSON Format.",
)


def render_report(
    data: dict[str, Any], figures: dict[str, bytes], scenario_text: str | None = None
) -> str:
    """The HTML report of an assessment.

    Parameters
    ----------
    data : dict
        The ``assessment.json`` object (:func:`keepclear.fields.assessment.run_assessment`).
    figures : dict
        PNG bytes by role: ``"horizontal"``, ``"vertical"`` and, with options, ``"compare"``.
    scenario_text : str, optional
        The scenario file as written.

    Returns
    -------
    str
        A complete HTML document with no external reference.
    """
    generated = _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    title = f"RF exposure assessment: {data['scenario']}"
    sources = ", ".join(
        f"{_e(s['id'])} ({_e(s['antenna'])}, {s['power_w']:g}&nbsp;W, duty {s['duty_cycle']:g})"
        for s in data["sources"]
    )
    horizontal = data["maps"]["horizontal"]
    vertical = data["maps"]["vertical"]
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title>",
        f"<style>{_CSS}</style></head><body>",
        f"<header><h1>{_e(title)}</h1>",
        f'<p class="meta">Scenario file {_e(data["scenario_file"])} · '
        f"{data['frequency_hz'] / 1e9:g}&nbsp;GHz · sources: {sources} · time-averaged power "
        f"{data['average_power_w']:g}&nbsp;W · keepclear {_e(data['tool_version'])} · "
        f"generated {generated}</p></header>",
        _input_warnings(data),
        _summary(data),
        _keep("<h2>Sources</h2>", _sources(data)),
        "<h2>1. Maps</h2>",
        '<figure class="map">'
        + _img(figures["horizontal"], f"power density on the {horizontal['plane']['description']}")
        + f"<figcaption>{_e(_sentence(horizontal['plane']['description']))}: time-averaged "
        "power density, the contour of each limit and the keep-out sphere cut by the plane "
        f"({_e(horizontal['zones_file'])}).</figcaption></figure>",
        '<figure class="map">'
        + _img(figures["vertical"], "power density on the vertical plane")
        + f"<figcaption>{_e(_sentence(vertical['plane']['description']))}: how high and "
        "how low the zones reach.</figcaption></figure>",
        _levels_section(data),
        _keep("<h2>2. Results per limit</h2>", _results(data)),
        _enclosure_section(data),
        _uncertainty_section(data),
        _keep("<h2>3. Named places</h2>", _points(data)),
        _places_extras(data),
        _readings_section(data),
        _comparison(data, figures.get("compare"), "<h2>4. Options compared</h2>"),
        "<h2>5. Method and assumptions</h2>",
        _method(data),
        "<h2>6. What this estimate leaves out</h2>",
        _left_out(),
        "<h2>7. Cautions</h2>",
        _cautions(),
        _keep("<h2>8. Sources of the limits</h2>", _limit_sources(data)),
        "<h2>9. References for the formulas</h2>",
        "<ol>" + "".join(f"<li>{_e(r)}</li>" for r in _REFERENCES) + "</ol>",
        "<h2>10. The scenario as given</h2>",
        (
            f"<pre>{_e(scenario_text)}</pre>"
            if scenario_text is not None
            else "<p>(scenario text not available)</p>"
        ),
        # the closing caution printed with the last section, never alone on a last page
        _keep(
            "<h2>11. Files of this assessment</h2>",
            "<ul>" + "".join(f"<li><code>{_e(n)}</code></li>" for n in data["files"]) + "</ul>",
            f"<footer>{_e(CAUTION_LINES[0])}</footer>",
        ),
        "</body></html>",
    ]
    return "\n".join(parts)


# ------------------------------------------------------------- terminal summary
def summary_text(data: dict[str, Any], written: list[str] | None = None, width: int = 100) -> str:
    """The terminal summary of an assessment: keep-out, named places, options, files."""
    from .describe import sources_text

    lines = [
        f"Scenario: {data['scenario']}",
        f"{data['frequency_hz'] / 1e9:g} GHz; time-averaged power {data['average_power_w']:g} W; "
        f"{data['assumptions']['time_averaging']}; {data['assumptions']['reflections']}",
        "Sources:",
        *sources_text(data["sources"], data["frequency_hz"]),
        "",
        "Keep-out about the first source (mark out the larger figure):",
    ]
    header = [
        "limit",
        "W/m2 (mW/cm2)",
        "keep-out m",
        "mark out m",
        f"circle at {_where(data)} r m",
        "cylinder r m, z m",
    ]
    rows = []
    for k in data["keepout"]:
        cyl = k["cylinder"]
        rows.append(
            [
                k["limit"],
                pair_text(k["limit_w_m2"]),
                f"{k['distance_m']:.2f}" if k["reached"] else "not reached",
                f"{k['mark_out_m']:.2f}" if k["mark_out_m"] > 0 else "-",
                f"{k['horizontal_zone']['circle']['radius_m']:.2f}" if k["reached"] else "-",
                (
                    f"{cyl['radius_m']:.2f}, {cyl['z_min_m']:.2f}..{cyl['z_max_m']:.2f}"
                    if k["reached"]
                    else "-"
                ),
            ]
        )
    lines += _text_table(header, rows)
    lines += ["  Note: " + note for note in _reach_notes(data)]
    levels = _levels(data)
    if levels:
        floor_m = levels[0]["floor_height_m"]
        lines += ["", f"Zones near the floor and at head height (floor at z = {floor_m:.2f} m):"]
        header = ["limit"] + [
            f"{lv['name']} z = {lv['height_m']:.2f} m: circle r m, area m2" for lv in levels
        ]
        rows = []
        for k in data["keepout"]:
            cells = [k["limit"]]
            for lv in levels:
                cells.append(_level_cell_text(lv, k["limit"]))
            rows.append(cells)
        lines += _text_table(header, rows)
    if data.get("enclosure"):
        lines += ["", *enclosure_lines(data["enclosure"])]
    if data["points"]:
        lines += ["", "Named places (letter on the maps; the largest share of a limit):"]
        for p in data["points"]:
            verdict = "REACHES A LIMIT" if p["exceeds"] else "below every limit"
            lines.append(
                f"  {p.get('map_letter', '-')}  {p['name']}: "
                f"{density_text(p['power_density_w_m2'])}, {share_text(p['worst_quotient'])} "
                f"of {p['worst_limit']}  {verdict}"
            )
    comp = data.get("comparison")
    if comp:
        lines += ["", f"Options, best first (ranked by {comp['ranked_by']}):"]
        place = ranked_place(comp.get("rank_by", "keepout"))
        for row in comp["options"]:
            text = f"  {row['rank']}. {row['name']}: "
            if place is not None:
                density, change = place_cell(row, place)
                text += f"at {place} {density_text(density)}"
                text += "" if row["is_base"] else f" ({change_text(change)})"
                text += "; "
            elif comp.get("rank_by") == "zone-area":
                area = max(row["zone_area_with_uncertainty_m2"].values(), default=0.0)
                text += f"zone {area:.2f} m2; "
            lines.append(
                text
                + f"largest keep-out {row['largest_keepout_m']:.2f} m"
                + (f" ({row['above_base_note']})" if row.get("above_base_note") else "")
            )
    if written:
        lines += ["", "Written:"] + [f"  {w}" for w in written]
    lines += ["", caution_block(width)]
    return "\n".join(lines)


def _levels(data: dict[str, Any]) -> list[dict[str, Any]]:
    """The maps at floor level and head height, when the scenario has a floor."""
    return [data["maps"][k] for k in ("floor_level", "head_height") if data["maps"].get(k)]


def _level_limit(level: dict[str, Any], limit_id: str) -> dict[str, Any] | None:
    return next((e for e in level["limits"] if e["limit"] == limit_id), None)


def _level_cell_text(level: dict[str, Any], limit_id: str) -> str:
    """A limit's zone on a level map: circle radius and area, or "not reached"."""
    e = _level_limit(level, limit_id)
    if e is None:
        return "-"
    shapes = e["shapes"].get("with-uncertainty", e["shapes"]["model"])
    radius = shapes["circle"]["radius_m"]
    if radius == 0:
        return "not reached"
    clipped = " (clipped at map edge)" if e["clipped_at_map_edge"] else ""
    return f"{radius:.2f}, {e['zone_area_with_uncertainty_m2']:.2f}{clipped}"


def _text_table(header: list[str], rows: list[list[str]]) -> list[str]:
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(header)]
    out = ["  " + "  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True))]
    out.append("  " + "  ".join("-" * w for w in widths))
    out += ["  " + "  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)) for r in rows]
    return out
