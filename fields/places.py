"""Per-place additions to probe results: stay time per limit, spatial average over a body.

These turn the field at a place into the answers a person standing there asks: how long
may I stay (:mod:`keepclear.fields.stay_time`), and what is the exposure averaged over
my height (:mod:`keepclear.fields.spatial_average`).  Each function adds keys to the
probe-like point objects of :mod:`keepclear.fields.assessment`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import spatial_average as sa
from .scenario import Scenario
from .stay_time import allowed_stay


def allowed_seconds(
    scenario: Scenario, quotients: dict[str, NDArray[np.float64]], index: int
) -> tuple[dict[str, float | None], dict[str, str]]:
    """``allowed_s`` of one point: limit id -> longest stay per window [s] or None.

    Returns the seconds and, beside them, the rule that set each (for reports).
    """
    seconds: dict[str, float | None] = {}
    rules: dict[str, str] = {}
    for limit_id, q in quotients.items():
        value = scenario.limit_value(limit_id)
        stay = allowed_stay(value, float(q[index]))
        seconds[limit_id] = stay.seconds
        rules[limit_id] = stay.rule
    return seconds, rules


def add_spatial_averages(scenario: Scenario, entries: list[dict[str, Any]]) -> None:
    """Add ``spatial_average_w_m2`` (and the scheme) to named-place entries that ask for it.

    ``entries`` are the probe objects of the scenario's ``[[point]]`` places, in order.
    For a place with ``average_over_height_m`` the time-averaged power density is
    averaged over the scheme's points (:func:`keepclear.fields.spatial_average.line_points_m`)
    and each limit's quotient against the value it is compared with is listed under
    ``spatial_average_quotients`` (the average for whole-body limits).
    """
    from .field import evaluate

    spans = [(i, p) for i, p in enumerate(scenario.points) if p.average_over_height_m is not None]
    if not spans:
        return
    pts = np.vstack([sa.line_points_m(p.position_m, p.average_over_height_m) for _, p in spans])
    res = evaluate(scenario, pts)
    for k, (i, p) in enumerate(spans):
        block = slice(k * sa.POINTS, (k + 1) * sa.POINTS)
        avg = sa.spatial_average(res.power_density_w_m2[block])
        entry = entries[i]
        entry["spatial_average_w_m2"] = avg
        entry["average_over_height_m"] = [float(z) for z in p.average_over_height_m]
        entry["spatial_average_points"] = sa.POINTS
        compared = {}
        for limit_id in entry.get("quotients", {}):
            value = scenario.limit_value(limit_id)
            if sa.compared_with_average(limit_id, getattr(value, "kind", "") == "device"):
                compared[limit_id] = {
                    "compared_with": "spatial average",
                    "quotient": avg / value.power_density_w_m2,
                }
            else:
                compared[limit_id] = {
                    "compared_with": "point value",
                    "quotient": entry["quotients"][limit_id],
                }
        entry["spatial_average_comparison"] = compared


__all__ = ["add_spatial_averages", "allowed_seconds"]
