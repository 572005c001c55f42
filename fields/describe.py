"""What each source model radiates, stated: peak gain and direction, EIRP, far-field distance.

A practitioner checks a model against the data sheet before trusting its keep-out: the
horn's gain, where its beam points, the EIRP while on and averaged over the duty cycle,
and from how far the far-field formulas hold.  These are the ``"sources"`` of
``keepout --json`` (contract, "The sources, described") and the source table of the
report and the terminal.

Notes
-----
* Peak gain: the model's own largest gain (closed form where the model has one,
  otherwise a search over directions), and never below the gain found in the direction
  this module reports, so the two agree.
* EIRP (effective isotropic radiated power) = P G_peak while the source radiates; the
  averaged EIRP applies the duty cycle, d P G_peak (IEEE Std 145-2013, definition of
  effective radiated power; common practice).
* Far-field distance: the Fraunhofer distance 2 D^2 / lambda with D the model's largest
  dimension (Balanis, Antenna Theory, 4th ed., 2016, eq. (2-1)).  For a source much
  smaller than the wavelength it is far shorter than a wavelength, and the reactive near
  field (about lambda / 2 pi) reaches farther: the report says so.

References
----------
.. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley, 2016,
   sec. 2.2.4 (field regions, eq. 2-1) and sec. 2.9 (gain).
"""

from __future__ import annotations

import math
from typing import Any

from keepclear.antennas.base import C_M_S

from .scenario import Scenario, Source


def describe_source(source: Source) -> dict[str, Any]:
    """The ``"sources"`` entry of one source (contract, "The sources, described").

    Parameters
    ----------
    source : Source

    Returns
    -------
    dict
        ``id``, ``antenna``, ``peak_gain_dbi``, ``peak_direction`` (unit vector),
        ``eirp_w`` [W], ``average_eirp_w`` [W], ``far_field_distance_m`` [m].
    """
    radiator = source.radiator
    direction = radiator.peak_direction()
    gain_along = float(radiator.gain(direction[None, :])[0])
    peak = max(float(radiator.max_gain()), gain_along)
    d_m = float(radiator.radiating_dimension_m)
    return {
        "id": source.id,
        "antenna": source.antenna,
        "peak_gain_dbi": 10.0 * math.log10(peak) if peak > 0 else None,
        "peak_direction": [float(x) for x in direction],
        "eirp_w": source.power_w * peak,
        "average_eirp_w": source.duty_cycle * source.power_w * peak,
        "far_field_distance_m": 2.0 * d_m * d_m / radiator.wavelength_m,
    }


def describe_sources(scenario: Scenario) -> list[dict[str, Any]]:
    """One :func:`describe_source` entry per source, in scenario order."""
    return [describe_source(s) for s in scenario.sources]


def reactive_near_field_m(frequency_hz: float) -> float:
    """The usual reach of the reactive near field of a small source, lambda / (2 pi) [m].

    Balanis, *Antenna Theory*, 4th ed., 2016, sec. 2.2.4: for a source small against the
    wavelength the reactive near field extends to about lambda / 2 pi.
    """
    return C_M_S / float(frequency_hz) / (2.0 * math.pi)


def power_text(power_w: float) -> str:
    """A power with three significant figures and thousands separators ("23,600 W")."""
    value = float(f"{power_w:.3g}")
    if abs(value) >= 1000:
        return f"{value:,.0f} W"
    return f"{value:.3g} W"


def far_field_text(far_field_distance_m: float, frequency_hz: float) -> str:
    """The far-field distance in words, saying so when it is inside the reactive near field."""
    reactive = reactive_near_field_m(frequency_hz)
    text = f"far field beyond 2D²/λ = {far_field_distance_m:.3g} m"
    if far_field_distance_m < reactive:
        text += (
            f", shorter than the reactive near field (λ/2π = {1000 * reactive:.1f} mm), "
            "which sets the near-field region instead"
        )
    return text


def sources_text(described: list[dict[str, Any]], frequency_hz: float = 2.45e9) -> list[str]:
    """Terminal lines describing the sources (one a source).

    Parameters
    ----------
    described : list of dict
        :func:`describe_sources` entries.
    frequency_hz : float
        Operating frequency, for the reactive near field lambda / 2 pi [Hz].
    """
    lines = []
    for d in described:
        x, y, z = d["peak_direction"]
        gain = "-" if d["peak_gain_dbi"] is None else f"{d['peak_gain_dbi']:.1f} dBi"
        lines.append(
            f"  {d['id']} ({d['antenna']}): peak gain {gain} towards ({x:+.2f}, {y:+.2f}, "
            f"{z:+.2f}); EIRP {power_text(d['eirp_w'])} while on, "
            f"{power_text(d['average_eirp_w'])} averaged; "
            + far_field_text(d["far_field_distance_m"], frequency_hz)
        )
    return lines
