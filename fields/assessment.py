"""The orchestrator: scenario -> fields -> limits -> keep-out, as plain data.

Each function returns the JSON-ready dictionary of the stable contract
(``schema_version`` 1); the command line prints it or renders it as text.
Computation happens here and in the modules below; the CLI only formats.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import limits as limits_mod
from .cautions import CAUTION_TEXT
from .field import FieldResult, evaluate
from .keepout import KeepoutResult, keepout_distances
from .scenario import Scenario

SCHEMA_VERSION = 1


def limits_data(frequency_hz: float) -> dict[str, Any]:
    """Every known limit at a frequency (contract ``limits`` JSON)."""
    covered, uncovered = limits_mod.values_at(frequency_hz)
    return {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": frequency_hz,
        "limits": [
            {
                "id": v.id,
                "power_density_w_m2": v.power_density_w_m2,
                "e_v_m": v.e_v_m,
                "h_a_m": v.h_a_m,
                "averaging_time_s": v.averaging_time_s,
                "source": v.source,
                "tier": v.tier,
                "population": v.population,
                "expression": v.expression,
            }
            for v in covered
        ],
        "not_covering_frequency": list(uncovered),
        "caution": CAUTION_TEXT,
    }


def quotients_at(scenario: Scenario, result: FieldResult) -> dict[str, NDArray[np.float64]]:
    """Exposure quotient per scenario limit for time-averaged fields."""
    out = {}
    for limit_id in scenario.limit_ids:
        value = limits_mod.get_limit(limit_id).at(scenario.frequency_hz)
        out[limit_id] = limits_mod.quotient(
            value, result.power_density_w_m2, result.e_v_m, result.h_a_m
        )
    return out


def probe_data(
    scenario: Scenario, points_m: NDArray[np.float64]
) -> tuple[dict[str, Any], FieldResult]:
    """Fields and exposure quotients at points (contract ``probe`` JSON)."""
    result = evaluate(scenario, points_m)
    quotients = quotients_at(scenario, result)
    points = []
    for i, p in enumerate(points_m):
        points.append(
            {
                "position_m": [float(x) for x in p],
                "e_v_m": float(result.e_v_m[i]),
                "h_a_m": float(result.h_a_m[i]),
                "power_density_w_m2": float(result.power_density_w_m2[i]),
                "peak_power_density_w_m2": float(result.peak_power_density_w_m2[i]),
                "peak_e_v_m": float(result.peak_e_v_m[i]),
                "peak_h_a_m": float(result.peak_h_a_m[i]),
                "quotients": {k: float(q[i]) for k, q in quotients.items()},
            }
        )
    data = {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": scenario.frequency_hz,
        "scenario": scenario.name,
        "reflections": scenario.reflections,
        "points": points,
        "caution": CAUTION_TEXT,
    }
    return data, result


def keepout_entry(r: KeepoutResult) -> dict[str, Any]:
    """One ``keepout`` list entry (contract keys first)."""
    return {
        "limit": r.limit_id,
        "limit_w_m2": r.limit_w_m2,
        "distance_m": r.distance_m,
        "direction": None if r.direction is None else [float(x) for x in r.direction],
        "reached": r.reached,
        "averaging_time_s": r.averaging_time_s,
        "screening_distance_m": r.screening_distance_m,
        "model_uncertainty_db": r.uncertainty_db,
        "distance_with_uncertainty_m": r.distance_with_uncertainty_m,
    }


def keepout_data(scenario: Scenario) -> tuple[dict[str, Any], list[KeepoutResult]]:
    """Keep-out distance for each scenario limit (contract ``keepout`` JSON)."""
    results = keepout_distances(scenario)
    data = {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": scenario.frequency_hz,
        "scenario": scenario.name,
        "average_power_w": scenario.average_power_w,
        "centre_m": [float(x) for x in scenario.centre_m],
        "reflections": scenario.reflections,
        "keepout": [keepout_entry(r) for r in results],
        "caution": CAUTION_TEXT,
    }
    return data, results
