"""Plain-text tables for the terminal, rendered from the JSON-ready data."""

from __future__ import annotations

import textwrap
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np


def number_text(x: float | None, digits: int = 3) -> str:
    """A number to ``digits`` significant figures; thousands separators up to 1e9."""
    if x is None:
        return "-"
    if x == 0:
        return "0"
    if 1e3 <= abs(x) < 1e9:
        return f"{float(f'{x:.{digits}g}'):,.0f}"
    return f"{x:.{digits}g}"


def _table(header: list[str], rows: list[list[str]]) -> str:
    widths = [
        max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)
    ]
    line = "  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True))
    out = [line, "  ".join("-" * w for w in widths)]
    out += ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)) for r in rows]
    return "\n".join(out)


def _minutes(seconds: float | None) -> str:
    return "-" if seconds is None else f"{seconds / 60:g} min"


def limits_table(data: dict[str, Any]) -> str:
    """The ``limits`` listing."""
    rows = [
        [
            v["id"],
            number_text(v["power_density_w_m2"], 4),
            number_text(v["power_density_w_m2"] / 10.0, 4),
            number_text(v["e_v_m"], 4),
            number_text(v["h_a_m"], 4),
            _minutes(v["averaging_time_s"]),
            v["source"],
        ]
        for v in data["limits"]
    ]
    head = f"Exposure limits at {data['frequency_hz'] / 1e6:g} MHz"
    text = (
        head
        + "\n\n"
        + _table(["limit", "S W/m2", "mW/cm2", "E V/m", "H A/m", "averaging", "source"], rows)
    )
    if data.get("not_covering_frequency"):
        text += "\n\nNot defined at this frequency: " + ", ".join(data["not_covering_frequency"])
    return text + "\n\n" + verification_block(data)


def _wrap(text: str, width: int = 100) -> str:
    return textwrap.fill(text, width, subsequent_indent="  ", break_on_hyphens=False)


def verification_block(data: dict[str, Any]) -> str:
    """Which limit values were checked against the printed standard, in plain words.

    ``data`` is a ``limits``-shaped dict; a limit row without ``"verification"`` is
    looked up in the limit library at ``data["frequency_hz"]``.
    """
    from . import limits as limits_mod

    lines = ["Verification of the values:"]
    checked = []
    for v in data["limits"]:
        tags = v.get("verification")
        if tags is None and v["id"] in limits_mod.LIMIT_IDS:
            tags = limits_mod.get_limit(v["id"]).at(data["frequency_hz"]).verification
        if not tags:
            continue
        if limits_mod.is_recalled(tags):
            lines.append(_wrap(f"- {v['id']}: {limits_mod.verification_text(tags)}"))
        else:
            checked.append(v["id"])
    if checked:
        lines.append(
            _wrap(
                f"- every value of {', '.join(checked)}: {limits_mod.CHECKED}."
                if len(lines) > 1
                else f"- every value above: {limits_mod.CHECKED}."
            )
        )
    return "\n".join(lines) if len(lines) > 1 else ""


def probe_table(data: dict[str, Any], scenario: Any = None) -> str:
    """The ``probe`` listing: one block per point."""
    devices = device_ids(
        {k for p in data["points"] for k in p["quotients"]},
        scenario,
    )
    lines = [f"Scenario: {data['scenario']}    reflections: {data['reflections']}", ""]
    for p in data["points"]:
        x, y, z = p["position_m"]
        inside = bool(p.get("inside_source"))
        lines.append(f"Point ({x:g}, {y:g}, {z:g}) m")
        if inside:
            lines += [
                "  INSIDE A SOURCE or on its metal (a guide, a horn, a box, or within 1 mm of a",
                "  wire or a plate): nobody can stand here. The model's numbers follow; maps",
                "  count this place as over every limit.",
            ]
        lines.append(
            f"  E {number_text(p['e_v_m'])} V/m time-averaged, "
            f"{number_text(p.get('peak_e_v_m'))} V/m while radiating   "
            f"H {number_text(p['h_a_m'])} A/m   "
            f"S {density_text(p['power_density_w_m2'])} time-averaged, "
            f"{density_text(p['peak_power_density_w_m2'])} while radiating"
        )
        for limit_id, q in p["quotients"].items():
            verdict = "EXCEEDS" if q >= 1 else ("inside a source" if inside else "below")
            device = " (equipment, while radiating)" if limit_id in devices else ""
            lines.append(f"  {limit_id:36s} {share_text(q):>14s} of limit  {verdict}{device}")
        lines += probe_extras(p)
        lines.append("")
    if devices:
        lines.append(_wrap(device_note()))
    return "\n".join(lines).rstrip()


def device_note() -> str:
    """The plain sentence every output prints beside device thresholds."""
    from . import limits as limits_mod

    return limits_mod.DEVICE_NOTE


def device_ids(limit_ids: Any, scenario: Any = None) -> set[str]:
    """The ids among ``limit_ids`` that are device thresholds (equipment, not people)."""
    from . import limits as limits_mod

    out = set()
    for limit_id in limit_ids:
        if scenario is not None:
            try:
                limit = scenario.limit(limit_id)
            except limits_mod.LimitError:
                continue
        elif limit_id in limits_mod.LIMIT_IDS:
            limit = limits_mod.get_limit(limit_id)
        else:  # a user threshold of a scenario not at hand: always a device kind
            if limit_id.startswith(limits_mod.CUSTOM_PREFIX):
                out.add(limit_id)
            continue
        if limit.kind == "device":
            out.add(limit_id)
    return out


def keepout_table(data: dict[str, Any], scenario: Any = None, screening: bool = False) -> str:
    """The ``keepout`` listing."""
    c = data["centre_m"]
    lines = [
        f"Scenario: {data['scenario']}",
        f"Keep-out about the first source at ({c[0]:g}, {c[1]:g}, {c[2]:g}) m; "
        f"time-averaged power {number_text(data['average_power_w'], 4)} W; "
        f"reflections: {data['reflections']}",
        "",
    ]
    header = [
        "limit",
        "limit W/m2 (mW/cm2)",
        "keep-out m",
        "with model uncertainty m",
        "farthest towards",
    ]
    boxed = any("outside_enclosure" in k for k in data["keepout"])
    if boxed:
        header += ["outside enclosure m", "clear of enclosure m"]
    if screening:
        header.append("screening m")
    rows = []
    for k in data["keepout"]:
        d = k["direction"]
        towards = (
            "not reached anywhere" if d is None else "(" + ", ".join(f"{x:+.2f}" for x in d) + ")"
        )
        row = [
            k["limit"],
            pair_text(k["limit_w_m2"], 4),
            f"{k['distance_m']:.3f}",
            f"{k['distance_with_uncertainty_m']:.3f}"
            + (f" (+{k['model_uncertainty_db']:.1f} dB)" if k["model_uncertainty_db"] > 0 else ""),
            towards,
        ]
        if boxed:
            out = k.get("outside_enclosure") or {}
            row += [
                f"{out.get('distance_m', 0.0):.3f}",
                f"{out.get('clearance_from_enclosure_m', 0.0):.3f}",
            ]
        if screening:
            row.append(f"{k['screening_distance_m']:.3f}")
        rows.append(row)
    lines.append(_table(header, rows))
    if screening:
        lines += [
            "",
            "Screening: S = P G / (4 pi R^2) with the peak gain in every direction and the "
            "FCC OET 65 reflection factor (2.56 ground, 4 perfect reflector); "
            "enclosures and shields ignored.",
        ]
    if any(k["model_uncertainty_db"] > 0 for k in data["keepout"]):
        lines += [
            "",
            "Mark out the larger figure: the source model's gain is uncertain by the stated dB.",
        ]
    if boxed:
        lines += [
            "",
            "Keep-out counts the points inside the enclosure too (the cavity field is far above "
            "every limit); 'outside enclosure' counts only points outside the box, and 'clear of "
            "enclosure' is how far from its outer surface the farthest of them lies.",
        ]
    devices = device_ids([k["limit"] for k in data["keepout"]], scenario)
    if devices:
        lines += [
            "",
            _wrap(
                f"{', '.join(sorted(devices))}: keep sensitive equipment (not people) outside "
                "that radius. " + device_note()
            ),
        ]
    people = [k for k in data["keepout"] if k["limit"] not in devices]
    if scenario is not None and np.any([k["distance_m"] > 0 for k in people]):
        lines += ["", "Keep people outside this radius while the source can radiate."]
    return "\n".join(lines)


def _stay_text(seconds: float | None) -> str:
    if seconds is None:
        return ""
    if seconds >= 120:
        return f"  stay at most {seconds / 60:.3g} min per window"
    return f"  stay at most {seconds:.3g} s per window"


def probe_extras(p: dict[str, Any]) -> list[str]:
    """Lines for a probe point's stay times and spatial average (added keys)."""
    lines = []
    allowed = p.get("allowed_s") or {}
    for limit_id, seconds in allowed.items():
        if seconds is not None:
            lines.append(f"  {limit_id:36s}{_stay_text(seconds)}")
    if "spatial_average_w_m2" in p:
        z0, z1 = p["average_over_height_m"]
        lines.append(
            f"  spatial average over z = {z0:g} .. {z1:g} m "
            f"({p['spatial_average_points']} points): "
            f"{density_text(p['spatial_average_w_m2'])} "
            f"(point value {density_text(p['power_density_w_m2'])})"
        )
        for limit_id, c in p.get("spatial_average_comparison", {}).items():
            lines.append(
                f"    {limit_id:34s} compared with the {c['compared_with']}: "
                f"{share_text(c['quotient'])} of limit"
            )
    return lines


def uncertainty_lines(data: dict[str, Any]) -> str:
    """The Monte Carlo spread of the keep-out distances (``keepout`` with [uncertainty])."""
    u = data["uncertainty"]
    rows = [
        [
            k["limit"],
            f"{k['distance_m']:.3f}",
            f"{k['distance_median_m']:.3f}",
            f"{k['distance_p95_m']:.3f}",
        ]
        for k in data["keepout"]
    ]
    gains = ", ".join(f"{g:g}" for g in u["gain_db_used"])
    head = (
        f"Uncertainty: {u['samples']} samples (seed {u['seed']}); one sigma: power "
        f"{u['power_db']:g} dB, gain {gains} dB, |Gamma| {u['reflection']:g}, shielding "
        f"{u['shielding_db']:g} dB, position {u['position_m']:g} m"
    )
    return (
        head
        + "\n\n"
        + _table(["limit", "nominal m", "median m", "95th percentile m"], rows)
        + "\n\nMark out the 95th percentile where the inputs are this uncertain."
    )


def readings_table(data: dict[str, Any]) -> str:
    """The ``readings`` listing: each reading against the time-averaged prediction."""
    rows = []
    for r in data["readings"]:
        x, y, z = r["position_m"]
        db = r["ratio_db"]
        rows.append(
            [
                r.get("label") or f"({x:g}, {y:g}, {z:g})",
                f"{r['value']:g} {r['unit']}",
                pair_text(r["measured_w_m2"]),
                pair_text(r["predicted_w_m2"]),
                "no prediction" if db is None else f"{db:+.1f}",
                "UNDER-PREDICTED" if r["under_predicted"] else "",
                ", ".join(r["over_limits"]) or "-",
            ]
        )
    lines = [
        f"Scenario: {data['scenario']}",
        "A survey meter averages over a second or more, far longer than a mains cycle: each "
        "reading is compared with the time-averaged prediction (duty cycle applied).",
        "",
        _table(
            [
                "reading",
                "meter",
                "measured W/m2 (mW/cm2)",
                "predicted W/m2 (mW/cm2)",
                "measured/predicted dB",
                "flag",
                "over limits",
            ],
            rows,
        ),
        "",
    ]
    largest = data["largest_under_prediction_db"]
    if largest is not None:
        lines.append(f"Largest measured-over-predicted ratio: {largest:+.1f} dB.")
    lines.append(
        f"Suggested margin on the model: {data['suggested_margin_db']:.1f} dB"
        + (
            " (the largest ratio found)."
            if data["suggested_margin_db"] > 0
            else " (no reading above its prediction)."
        )
    )
    if data.get("under_predicted_count"):
        lines.append(
            f"{data['under_predicted_count']} reading(s) more than 3 dB above the model: check "
            "the set-up against the scenario (power, position, reflecting surfaces) before "
            "relying on the model's keep-out."
        )
    return "\n".join(lines)


def share_text(quotient: float) -> str:
    """An exposure quotient as a reader-friendly share of the limit.

    Up to ten times the limit the share is a percentage with three significant figures and
    thousands separators ("0.0123 %", "45.6 %", "1,300 %"); above 1,000 % it is a multiple of
    the limit ("x13", "x2,450", "x7.84 million"), which reads better than a long percentage.

    Parameters
    ----------
    quotient : float
        Exposure quotient (1 = at the limit) [1].

    Returns
    -------
    str
    """
    q = float(quotient)
    if not np.isfinite(q):
        return "not finite"
    if q <= 10.0:
        percent = 100.0 * q
        if percent == 0.0:
            return "0 %"
        if percent >= 100.0:
            return f"{round(percent):,} %"
        return f"{percent:.3g} %"
    if q < 1e6:
        return f"x{q:,.3g}" if q < 100 else f"x{round(q):,}"
    for scale, word in ((1e12, "trillion"), (1e9, "billion"), (1e6, "million")):
        if q >= scale:
            return f"x{q / scale:.3g} {word}"
    return f"x{q:.3g}"


def density_text(power_density_w_m2: float | None, digits: int = 3) -> str:
    """A power density in W/m2 with the same value in mW/cm2 beside it (1 W/m2 = 0.1 mW/cm2)."""
    if power_density_w_m2 is None:
        return "-"
    w_m2 = number_text(power_density_w_m2, digits)
    return f"{w_m2} W/m2 ({number_text(power_density_w_m2 / 10.0, digits)} mW/cm2)"


def pair_text(power_density_w_m2: float | None, digits: int = 3) -> str:
    """A power density for a table column headed "W/m2 (mW/cm2)": ``"10 (1)"``."""
    if power_density_w_m2 is None:
        return "-"
    w_m2 = number_text(power_density_w_m2, digits)
    return f"{w_m2} ({number_text(power_density_w_m2 / 10.0, digits)})"


def ranked_place(rank_by: str) -> str | None:
    """The named place a ranking is by (``place:NAME``), or None."""
    return rank_by.removeprefix("place:") if rank_by.startswith("place:") else None


def ranked_columns(rank_by: str) -> tuple[str, ...]:
    """The groups of an option table's value columns, the one ranked by first.

    ``"place"`` (the ranked place's density and change), ``"keepout"`` (one column a
    limit) and ``"zone"`` (the zone area); a ranking by a place keeps the other two after
    it, a ranking by zone area drops nothing but moves the zone first.
    """
    if ranked_place(rank_by) is not None:
        return ("place", "keepout", "zone")
    if rank_by == "zone-area":
        return ("zone", "keepout")
    return ("keepout", "zone")


def shows_leakage(options: Sequence[dict[str, Any]]) -> bool:
    """Whether an option table has a leakage column: some variant has an enclosure."""
    return any(row["leakage_5cm_w_m2"] is not None for row in options)


def place_cell(row: dict[str, Any], name: str) -> tuple[float | None, float | None]:
    """An option row's time-averaged density at a named place [W m^-2] and its change [dB]."""
    place = next((p for p in row.get("places", []) if p["name"] == name), None)
    if place is None:
        return None, None
    return place["power_density_w_m2"], None if row["is_base"] else place["change_db"]


def change_text(change: float | None) -> str:
    """A change in dB against the base, ``"+1.2 dB"``, or ``"-"``."""
    return "-" if change is None else f"{change:+.1f} dB"


def q_parts_text(block: dict[str, Any], number: Callable[[float], str]) -> str:
    """The cavity Q's parts of an ``"enclosure"`` object: "walls 40,500, load 2,480, ..."."""
    return ", ".join(
        f"{name} {number(block[key])}"
        for name, key in (("walls", "q_walls"), ("load", "q_load"), ("openings", "q_openings"))
        if block[key] is not None
    )


def enclosure_lines(block: dict[str, Any] | None) -> list[str]:
    """The enclosure's leakage (the ``"enclosure"`` JSON object) as text lines; none without."""
    if not block:
        return []
    by_face = block["leakage_5cm_by_face"]
    x, y, z = block["leakage_5cm_position_m"]
    lines = [
        f"Enclosure leakage ({block['id']}, {number_text(block['input_power_w'])} W in):",
        f"  {block['basis']}",
        f"  highest 5 cm from the outer surface: {density_text(block['leakage_5cm_w_m2'])}, "
        f"face {block['leakage_5cm_face']} at ({x:.3g}, {y:.3g}, {z:.3g}) m",
        "  per face W/m2 (mW/cm2): "
        + ", ".join(f"{face} {pair_text(value)}" for face, value in by_face.items()),
    ]
    for row in block["oven_limits"]:
        verdict = "ABOVE" if row["percent_of_limit"] >= 100.0 else "below"
        lines.append(
            f"  {row['limit']}, {density_text(row['limit_w_m2'])}: "
            f"{share_text(row['percent_of_limit'] / 100.0)} of it, {verdict}"
        )
    lines.append(
        f"  inside: {density_text(block['inside_power_density_w_m2'])}, E "
        f"{number_text(block['inside_e_v_m'])} V/m; cavity Q {number_text(block['q_factor'])} "
        f"({q_parts_text(block, number_text)})"
    )
    if block["openings"]:
        lines.append(
            "  leaked power: "
            + ", ".join(
                f"{o['id']} {number_text(o['leaked_power_w'])} W" for o in block["openings"]
            )
            + f"; {number_text(block['leaked_power_w'])} W in all"
        )
    else:
        lines.append(f"  leaked power (walls only): {number_text(block['leaked_power_w'])} W")
    return lines
