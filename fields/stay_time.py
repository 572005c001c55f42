"""How long may a person stay at a place: the longest stay per averaging window.

Model
-----
Exposure limits on power density are time averages over a window :math:`T` (6 or 30
min).  A person who stays :math:`t` seconds of a window at a place where the
time-averaged density is :math:`S` (the source's duty cycle already applied: a
magnetron's on-off cycle is a mains period, far shorter than any window) and is
elsewhere unexposed receives the window average :math:`S t / T`.  The limit is reached
when that equals the limit, so with the exposure quotient :math:`q = S / S_{lim}` (the
largest of the power-density and squared field ratios):

.. math::

    t_{lin} = T / q \\qquad (q \\ge 1)

Below the limit (:math:`q < 1`) a whole window is allowed and no stay time is given
(null); limits without an averaging time (product emission limits, device thresholds)
give none either.

Brief exposures
---------------
ICNIRP (2020) also caps the energy density delivered in any interval shorter than 6
min for local exposure, from 400 MHz to 6 GHz (its Table 7, "integrated over intervals
of between >0 and <6 min"):

.. math::

    U_{lim}(t) = S_{6min} \\cdot 360\\,\\mathrm{s} \\cdot \\left[0.05 + 0.95\\sqrt{t/360}\\right]

with :math:`S_{6min}` the 6-min local reference level of its Table 6 (40 W/m^2 general
public, 200 W/m^2 occupational from 2 to 6 GHz; printed as
:math:`40 \\times 0.36\\,[\\dots]` and :math:`200 \\times 0.36\\,[\\dots]` kJ/m^2).  At a
steady density S the energy after t seconds is S t, so the stay is allowed while
:math:`S\\tau \\le U_{lim}(\\tau)` for every :math:`\\tau \\le t`.  With
:math:`x = t/360` and :math:`y = \\sqrt x` this is :math:`q y^2 - 0.95 y - 0.05 \\le 0`,
whose positive root gives

.. math::

    t_{brief} = 360 \\left(\\frac{0.95 + \\sqrt{0.9025 + 0.2 q}}{2 q}\\right)^2

It is never longer than the linear rule (at :math:`x = 1/q` the bracket is
:math:`0.05 + 0.95/\\sqrt q \\le 1`), equal at q = 1.  The stricter (shorter) of the two
is reported for the ICNIRP 2020 local limits, with the table named.

The energy-density formula was written from memory of ICNIRP (2020) Table 7 and could
not be checked against the printed table here; the 6-min levels it multiplies are
FOUND (secondary) (Table 6 reproduced in *Bioelectromagnetism*, Table 7.8).

References
----------
.. [1] ICNIRP, "Guidelines for limiting exposure to electromagnetic fields (100 kHz to
   300 GHz)", Health Phys. 118(5):483-524 (2020), DOI 10.1097/HP.0000000000001210,
   Tables 5 and 6 (averaging times), Table 7 (brief local exposure; from memory).
.. [2] FCC OET Bulletin 65, Edition 97-01 (1997), sec. 2 (time averaging: exposure may
   exceed the limit for a fraction of the averaging time as long as the average holds).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import limits as limits_mod

#: Limits to which the ICNIRP 2020 brief-exposure rule applies (local, 6-min).
BRIEF_RULE_LIMITS = ("icnirp-2020/general-public-local", "icnirp-2020/occupational-local")
#: Frequency range of the brief-exposure formula used here [Hz].
BRIEF_RULE_RANGE_HZ = (400e6, 6e9)
#: The source named beside a brief-exposure stay time.
BRIEF_RULE_SOURCE = (
    "ICNIRP 2020, Table 7 (brief local exposure, < 6 min; formula from memory, "
    "not checked against the printed table)"
)


def linear_stay_s(quotient: ArrayLike, averaging_time_s: float) -> NDArray[np.float64]:
    """Longest stay per window by linear time averaging, T / q; NaN where q < 1.

    Parameters
    ----------
    quotient : array_like
        Exposure quotient q of the time-averaged field at the place [1].
    averaging_time_s : float
        The limit's averaging window T [s].

    Returns
    -------
    ndarray
        T / q [s] where q >= 1, NaN where q < 1 (a whole window is allowed).
    """
    q = np.asarray(quotient, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(q >= 1.0, averaging_time_s / np.where(q >= 1.0, q, 1.0), np.nan)


def brief_energy_limit_j_m2(time_s: ArrayLike, six_minute_w_m2: float) -> NDArray[np.float64]:
    """Energy density allowed within an interval t < 6 min [J m^-2] (ICNIRP 2020 Table 7).

    :math:`U = S_{6min} \\cdot 360 \\cdot (0.05 + 0.95 \\sqrt{t/360})`, t in seconds.
    """
    t = np.asarray(time_s, dtype=float)
    return six_minute_w_m2 * 360.0 * (0.05 + 0.95 * np.sqrt(t / 360.0))


def brief_stay_s(quotient: ArrayLike) -> NDArray[np.float64]:
    """Longest stay under the brief-exposure energy rule [s]; NaN where q < 1.

    The positive root of :math:`q y^2 - 0.95 y - 0.05 = 0`, :math:`t = 360 y^2`.
    """
    q = np.asarray(quotient, dtype=float)
    qq = np.where(q >= 1.0, q, 1.0)
    y = (0.95 + np.sqrt(0.9025 + 0.2 * qq)) / (2.0 * qq)
    return np.where(q >= 1.0, 360.0 * y * y, np.nan)


@dataclass(frozen=True)
class StayTime:
    """The allowed stay for one limit at one place.

    ``seconds`` is None where no stay time applies; ``rule`` names what set it.
    """

    limit_id: str
    seconds: float | None
    rule: str


def allowed_stay(value: limits_mod.LimitValue, quotient: float) -> StayTime:
    """Longest stay per averaging window at a place, for one limit.

    Parameters
    ----------
    value : LimitValue
        The limit at the scenario's frequency.
    quotient : float
        Exposure quotient of the field the limit is compared with [1].

    Returns
    -------
    StayTime
        ``seconds`` None where the place is below the limit or the limit has no
        averaging time; otherwise the shorter of the linear rule and, for the ICNIRP
        2020 local limits from 400 MHz to 6 GHz, the brief-exposure rule.
    """
    t_avg = value.averaging_time_s
    q = float(quotient)
    if t_avg is None or not math.isfinite(q) or q < 1.0:
        return StayTime(
            value.id, None, "below the limit" if t_avg is not None else "no averaging time"
        )
    linear = float(linear_stay_s(q, float(t_avg)))
    rule = f"linear time averaging over {t_avg:g} s ({value.source})"
    lo, hi = BRIEF_RULE_RANGE_HZ
    if value.id in BRIEF_RULE_LIMITS and lo < value.frequency_hz <= hi:
        brief = float(brief_stay_s(q))
        if brief < linear:
            return StayTime(value.id, brief, BRIEF_RULE_SOURCE)
    return StayTime(value.id, linear, rule)


__all__ = [
    "BRIEF_RULE_LIMITS",
    "StayTime",
    "allowed_stay",
    "brief_energy_limit_j_m2",
    "brief_stay_s",
    "linear_stay_s",
]
