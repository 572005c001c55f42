"""Survey readings against the prediction: where the model under-predicted.

Model
-----
A survey meter reports an RMS value averaged over at least a second (broadband
isotropic probes settle over about a second to several seconds), far longer than a
magnetron's mains-cycle on-off pattern (10 to 20 ms).  So a reading is compared with
the **time-averaged** prediction (the duty cycle applied), not the while-on value.

Readings in field units are turned into the plane-wave-equivalent power density, the
quantity the predictions and the limits share:

.. math::

    S = E^2 / \\eta_0, \\qquad S = \\eta_0 H^2, \\qquad 1\\ \\mathrm{mW/cm^2} = 10\\ \\mathrm{W/m^2}

and the comparison is the ratio in decibels, :math:`10 \\log_{10}(S_{meas}/S_{pred})`.
A reading more than 3 dB above the prediction is flagged as under-predicted (3 dB is
a common figure for the combined uncertainty of a broadband survey meter, common
practice, no source).  The margin suggested for the model is the largest ratio found
(0 when every reading is at or below its prediction).

References
----------
.. [1] FCC OET Bulletin 65, Edition 97-01 (1997), sec. 1 (plane-wave equivalent power
   density; 1 mW/cm^2 = 10 W/m^2) and sec. 3 (measurements, time averaging by the
   meter).
.. [2] IEEE Std C95.3-2021, *Recommended practice for measurements and computations of
   electric, magnetic, and electromagnetic fields with respect to human exposure* (probe
   response and averaging; from memory).
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from keepclear.antennas.base import ETA0_OHM

from .errors import InputError

#: Units a reading may carry, and the factor or rule that turns it into W/m^2.
READING_UNITS = ("W/m2", "mW/cm2", "V/m", "A/m")
READINGS_HEADER = ("x_m", "y_m", "z_m", "value", "unit")
#: A reading this many dB above the prediction is flagged as under-predicted.
UNDER_PREDICTION_DB = 3.0
#: Largest readings file accepted [rows].
MAX_READINGS = 100_000


def power_density_from_reading(value: float, unit: str) -> float:
    """Plane-wave-equivalent power density of a meter reading [W m^-2].

    Parameters
    ----------
    value : float
        The reading, >= 0, in ``unit``.
    unit : str
        One of :data:`READING_UNITS`.

    Notes
    -----
    W/m2 as is; mW/cm2 times 10 (1 mW/cm^2 = 10 W/m^2); V/m as
    :math:`E^2/\\eta_0`; A/m as :math:`\\eta_0 H^2` (FCC OET 65, sec. 1).
    """
    if unit == "W/m2":
        return float(value)
    if unit == "mW/cm2":
        return float(value) * 10.0
    if unit == "V/m":
        return float(value) ** 2 / ETA0_OHM
    if unit == "A/m":
        return ETA0_OHM * float(value) ** 2
    raise ValueError(f"unit must be one of {', '.join(READING_UNITS)}, got {unit!r}")


@dataclass(frozen=True)
class Reading:
    """One survey reading: where, what the meter showed, in which unit, and a label."""

    position_m: NDArray[np.float64]
    value: float
    unit: str
    label: str = ""

    @property
    def power_density_w_m2(self) -> float:
        """The reading as a plane-wave-equivalent power density [W m^-2]."""
        return power_density_from_reading(self.value, self.unit)


def read_readings_csv(path: str | Path, argument: str = "--csv") -> list[Reading]:
    """Read a readings file: header ``x_m,y_m,z_m,value,unit[,label]``, one reading a row.

    Raises
    ------
    InputError
        Naming the file, the row (1 = the header) and the column for a missing file, a
        wrong header, a malformed, non-finite or negative number or an unknown unit.
    """
    label = str(path)
    p = Path(path)
    if not p.exists():
        raise InputError("no such file", label, argument)
    if p.is_dir():
        raise InputError("is a directory; give a readings CSV file", label, argument)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", label, argument) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("is not UTF-8 text", label, argument) from None
    rows = list(csv.reader(io.StringIO(text)))
    if not rows:
        raise InputError(
            "row 1: is empty; the header must be x_m,y_m,z_m,value,unit[,label]", label, argument
        )
    header = [h.strip() for h in rows[0]]
    if (
        tuple(header[:5]) != READINGS_HEADER
        or len(header) > 6
        or (len(header) == 6 and header[5] != "label")
    ):
        raise InputError(
            f"row 1: header must be x_m,y_m,z_m,value,unit with an optional last column "
            f"label, got {','.join(header)[:80]!r}",
            label,
            argument,
        )
    body = [(i + 2, r) for i, r in enumerate(rows[1:]) if any(c.strip() for c in r)]
    if not body:
        raise InputError("holds no readings after the header", label, argument)
    if len(body) > MAX_READINGS:
        raise InputError(f"holds {len(body)} readings; at most {MAX_READINGS}", label, argument)
    out = []
    for row_no, r in body:
        if len(r) < 5 or len(r) > len(header):
            raise InputError(
                f"row {row_no}: has {len(r)} columns, the header {len(header)}", label, argument
            )
        numbers = []
        for col in range(4):
            name = header[col]
            cell = r[col].strip()
            try:
                x = float(cell)
            except ValueError:
                raise InputError(
                    f"row {row_no}, column {name}: {cell[:40]!r} is not a number", label, argument
                ) from None
            if not math.isfinite(x) or (col < 3 and abs(x) > 1e6):
                raise InputError(
                    f"row {row_no}, column {name}: must be a finite number"
                    + (" within 1e6 m" if col < 3 else ""),
                    label,
                    argument,
                )
            numbers.append(x)
        if numbers[3] < 0:
            raise InputError(
                f"row {row_no}, column value: a reading must be >= 0, got {numbers[3]:g}",
                label,
                argument,
            )
        unit = r[4].strip()
        if unit not in READING_UNITS:
            raise InputError(
                f"row {row_no}, column unit: {unit[:20]!r} is not one of "
                f"{', '.join(READING_UNITS)}",
                label,
                argument,
            )
        text_label = r[5].strip() if len(r) > 5 else ""
        out.append(Reading(np.array(numbers[:3]), numbers[3], unit, text_label))
    return out


def ratio_db(measured_w_m2: float, predicted_w_m2: float) -> float:
    """Measured over predicted in dB; +inf where the model predicts nothing."""
    if predicted_w_m2 <= 0:
        return math.inf if measured_w_m2 > 0 else 0.0
    if measured_w_m2 <= 0:
        return -math.inf
    return 10.0 * math.log10(measured_w_m2 / predicted_w_m2)


def compare_readings(
    readings: list[Reading],
    predicted_w_m2: NDArray[np.float64],
    quotients: dict[str, NDArray[np.float64]],
) -> dict[str, object]:
    """The readings against the time-averaged prediction, as the contract's JSON body.

    Parameters
    ----------
    readings : list of Reading
    predicted_w_m2 : ndarray, shape (N,)
        Time-averaged predicted power density at each reading's place [W m^-2].
    quotients : dict
        Limit id -> (N,) quotient of each *reading* against that limit.

    Returns
    -------
    dict
        ``readings`` (one object each: ``position_m``, ``measured_w_m2``,
        ``predicted_w_m2``, ``ratio_db``, ``under_predicted``, ``over_limits``, and
        ``unit``, ``value``, ``label``), ``largest_under_prediction_db`` (the largest
        ratio, or None without readings) and ``suggested_margin_db`` (the largest ratio,
        0 when none is positive).
    """
    rows = []
    ratios = []
    for i, r in enumerate(readings):
        measured = r.power_density_w_m2
        predicted = float(predicted_w_m2[i])
        db = ratio_db(measured, predicted)
        ratios.append(db)
        rows.append(
            {
                "position_m": [float(x) for x in r.position_m],
                "measured_w_m2": measured,
                "predicted_w_m2": predicted,
                "ratio_db": _json_db(db),
                "under_predicted": bool(db > UNDER_PREDICTION_DB),
                "over_limits": [k for k, q in quotients.items() if float(q[i]) >= 1.0],
                "value": r.value,
                "unit": r.unit,
                "label": r.label,
            }
        )
    finite = [d for d in ratios if not math.isnan(d)]
    largest = max(finite) if finite else None
    margin = max(0.0, largest) if largest is not None else 0.0
    return {
        "readings": rows,
        "largest_under_prediction_db": None if largest is None else _json_db(largest),
        "suggested_margin_db": _json_db(margin),
        "under_predicted_count": sum(1 for d in ratios if d > UNDER_PREDICTION_DB),
    }


def _json_db(db: float) -> float | None:
    """A dB figure for JSON: rounded to 0.01 dB; None for an infinite ratio."""
    return round(db, 2) if math.isfinite(db) else None


__all__ = [
    "READINGS_HEADER",
    "READING_UNITS",
    "UNDER_PREDICTION_DB",
    "Reading",
    "compare_readings",
    "power_density_from_reading",
    "ratio_db",
    "read_readings_csv",
]
