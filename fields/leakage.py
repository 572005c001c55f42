"""What an enclosure lets out: the figures the outputs give for a scenario's ``[enclosure]``.

No new physics here: this gathers, for the sources inside the box, the stirred-cavity power
balance (:meth:`Enclosure.power_balance`: inside density, Q, each opening's leaked power) and
the highest density 5 cm outside each face (:meth:`Enclosure.face_density_5cm`), and compares
that figure with the oven-leakage limits (``fda-1030.10/*``) among the assessed limits.

The power is that of the enclosed sources while they radiate: the duty cycle is not applied,
because 21 CFR 1030.10(c)(1) reads the leakage with the oven operating.  Sources outside the
box radiate directly and are not part of it.

References
----------
.. [1] 21 CFR 1030.10(c)(1), Microwave ovens, power density limit: 1 mW/cm^2 before
   acquisition by a purchaser, 5 mW/cm^2 thereafter, at any point 5 cm or more from the
   external surface of the oven.
.. [2] D. A. Hill et al., "Aperture excitation of electrically large, lossy cavities", IEEE
   Trans. Electromagn. Compat. 36(3), 169-178, 1994 (the cavity model in ``enclosure.py``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from .enclosure import FDA_DISTANCE_M
from .scenario import Scenario

OVEN_LEAKAGE_PREFIX = "fda-1030.10/"
BASIS_TEXT = (
    "enclosed sources radiating (duty cycle not applied), as 21 CFR 1030.10(c)(1) reads "
    "oven leakage"
)


def enclosed_power_w(scenario: Scenario) -> float:
    """Power delivered into the enclosure by the sources inside it, while radiating [W]."""
    enclosure = scenario.enclosure
    if enclosure is None:
        return 0.0
    positions = np.array([s.position_m for s in scenario.sources])
    inside = np.asarray(enclosure.contains(positions), dtype=bool)
    return float(sum(s.power_w for s, i in zip(scenario.sources, inside, strict=True) if i))


def _finite_or_none(value: float) -> float | None:
    """A Q part is infinite when that loss is absent: null in JSON, not Infinity."""
    return float(value) if math.isfinite(value) else None


def enclosure_leakage(
    scenario: Scenario, limit_ids: Sequence[str] | None = None
) -> dict[str, Any] | None:
    """The enclosure's leakage figures (the ``"enclosure"`` object of the JSON outputs).

    Parameters
    ----------
    scenario : Scenario
    limit_ids : sequence of str, optional
        The limits assessed (default: the scenario's); each ``fda-1030.10/*`` among them is
        compared with the 5 cm figure.

    Returns
    -------
    dict or None
        None without an enclosure.  Otherwise ``id``, ``input_power_w`` [W], ``basis``,
        ``distance_m`` (0.05), ``leakage_5cm_w_m2`` (the highest density 5 cm outside any
        face [W m^-2]), ``leakage_5cm_face`` and ``leakage_5cm_position_m`` (where [m]),
        ``leakage_5cm_by_face`` (face to its highest density [W m^-2]),
        ``inside_power_density_w_m2`` (the stirred cavity density S_c [W m^-2]),
        ``inside_e_v_m`` [V m^-1], ``q_factor`` and its parts
        ``q_walls``, ``q_load``, ``q_openings`` (null where that loss is absent),
        ``mode_count``, ``leaked_power_w`` (openings plus wall transmission [W]),
        ``openings`` (``id``, ``face``, ``type``, ``leaked_power_w`` [W]) and
        ``oven_limits`` (``limit``, ``limit_w_m2``, ``percent_of_limit``).
    """
    enclosure = scenario.enclosure
    if enclosure is None:
        return None
    f = scenario.frequency_hz
    power_w = enclosed_power_w(scenario)
    balance = enclosure.power_balance(power_w, f)
    faces = enclosure.face_density_5cm(power_w, f)
    worst = max(faces, key=lambda row: row["power_density_w_m2"])  # first face on a tie
    leakage = float(worst["power_density_w_m2"])
    ids = scenario.limit_ids if limit_ids is None else limit_ids
    oven_limits = []
    for limit_id in ids:
        if not limit_id.startswith(OVEN_LEAKAGE_PREFIX):
            continue
        limit_w_m2 = float(scenario.limit_value(limit_id).power_density_w_m2)
        oven_limits.append(
            {
                "limit": limit_id,
                "limit_w_m2": limit_w_m2,
                "percent_of_limit": 100.0 * leakage / limit_w_m2,
            }
        )
    return {
        "id": enclosure.label,
        "input_power_w": power_w,
        "basis": BASIS_TEXT,
        "distance_m": FDA_DISTANCE_M,
        "leakage_5cm_w_m2": leakage,
        "leakage_5cm_face": worst["face"],
        "leakage_5cm_position_m": [float(x) for x in worst["position_m"]],
        "leakage_5cm_by_face": {row["face"]: float(row["power_density_w_m2"]) for row in faces},
        "inside_power_density_w_m2": float(balance["cavity_power_density_w_m2"]),
        "inside_e_v_m": float(balance["cavity_e_v_m"]),
        "q_factor": _finite_or_none(balance["q_factor"]),
        "q_walls": _finite_or_none(balance["q_walls"]),
        "q_load": _finite_or_none(balance["q_load"]),
        "q_openings": _finite_or_none(balance["q_openings"]),
        "mode_count": float(balance["mode_count"]),
        "leaked_power_w": float(balance["leaked_power_w"]),
        "openings": [
            {
                "id": o["id"],
                "face": o["face"],
                "type": o["type"],
                "leaked_power_w": float(o["leaked_power_w"]),
            }
            for o in balance["openings"]
        ],
        "oven_limits": oven_limits,
    }


__all__ = ["BASIS_TEXT", "OVEN_LEAKAGE_PREFIX", "enclosed_power_w", "enclosure_leakage"]
