"""Electrical properties of building materials after ITU-R P.2040, Table 3.

Model
-----
Recommendation ITU-R P.2040 fits the measured properties of common building
materials with two power laws in frequency (f in GHz):

.. math::

    \\eta' = a f^b, \\qquad \\sigma = c f^d \\;[\\mathrm{S\\,m^{-1}}],

and forms the complex relative permittivity (time convention :math:`e^{+j\\omega t}`)

.. math::

    \\varepsilon_r = \\eta' - j \\frac{\\sigma}{2 \\pi f \\varepsilon_0}
                 = \\eta' - j\\, 17.98\\, \\sigma / f_\\mathrm{GHz}.

Each row of Table 3 carries the frequency range of the measurements behind the
fit.  P.2040 says these ranges are indicative, not hard limits, *except* for the
three ground types (1-10 GHz).  Outside a row's range this module still evaluates
the power law (extrapolation) and warns with :class:`ModelRangeWarning`.

Edition
-------
The coefficients are those of **ITU-R P.2040-3 (08/2023), Table 3**, 1-100 GHz
block, which repeats P.2040-2 (09/2021) for these rows.  P.2040-1 (07/2015) had
different fits for five materials (concrete 5.31 / 0.0326 / 0.8095, brick 3.75 /
0.038 / 0, plasterboard 2.94 / 0.0116 / 0.7076, glass 6.27 / 0.0043 / 1.1925,
ceiling board 1.50 / 0.0005 / 1.1634) and no plywood or marble rows.  The newer
sub-THz rows (110-450 GHz) are not included: this tool works at 2.45 GHz.

Verification (tags as in the project notes):

* FOUND (secondary): every 1-100 GHz row below, read in the public code
  ``NVlabs/sionna-rt``, ``src/sionna/rt/radio_materials/itu.py`` ("Table 3 of
  ITU-R P2040"), and in the wavetracer.dev documentation of its ITU material table
  ("Table 3 of the Recommendation ITU-R P.2040-2"), which agree digit for digit.
* FOUND (secondary): the MathWorks ``buildingMaterialPermittivity`` page (citing
  P.2040-3) lists at 9 GHz sigma = 0.25766 (concrete), 0.033826 (brick),
  0.066978 (plasterboard), 0.049528 (wood), 0.068299 (glass) S/m; these values
  follow from the coefficients below and are checked in the tests.  The same page
  states that the ranges are not hard limits except for the ground types.
* FOUND (secondary): the P.2040-1 fits quoted above, reproduced by the MathWorks
  R2021a page's 9 GHz example (concrete 5.31 / 0.19305 S/m, brick 3.75 / 0.038,
  plasterboard 2.94 / 0.054914, glass 6.27 / 0.059075, ceiling board 1.5 /
  0.0064437); the coefficients themselves are from memory.
* Not seen: the primary PDF text of Table 3 itself.

"metal" (sigma = 1e7 S/m) is P.2040's generic stand-in for a good conductor;
:mod:`keepclear.fields.reflection` treats the ``metal`` reflector as a perfect
conductor instead.

References
----------
.. [1] Recommendation ITU-R P.2040-3 (08/2023), "Effects of building materials and
   structures on radiowave propagation above about 100 MHz", sec. 3, Table 3 and
   the power laws of sec. 2.1.4 (eqs. (58), (59) in the P.2040-1 numbering) and
   eq. (9b) for the complex permittivity (equation numbers from the MathWorks
   documentation of P.2040-1, FOUND secondary).
.. [2] Recommendation ITU-R P.2040-1 (07/2015), same title, Table 3 (superseded).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Final

import numpy as np
from scipy import constants

from keepclear.antennas.base import ModelInputError, ModelRangeWarning

from .errors import suggest

#: The edition whose Table 3 is encoded here.
P2040_EDITION: Final[str] = "ITU-R P.2040-3 (08/2023), Table 3"


@dataclass(frozen=True)
class P2040Material:
    """One row of ITU-R P.2040 Table 3.

    Parameters
    ----------
    name : str
        Scenario name (lower case, hyphenated).
    a : float
        Coefficient of the real relative permittivity eta' = a f^b [1].
    b : float
        Exponent of eta' in f [GHz] [1].
    c : float
        Coefficient of the conductivity sigma = c f^d [S m^-1].
    d : float
        Exponent of sigma in f [GHz] [1].
    f_min_ghz : float
        Lower end of the row's frequency range [GHz].
    f_max_ghz : float
        Upper end of the row's frequency range [GHz].
    hard_limit : bool
        Whether P.2040 calls the range a hard limit (the three ground types).
    """

    name: str
    a: float
    b: float
    c: float
    d: float
    f_min_ghz: float
    f_max_ghz: float
    hard_limit: bool = False


# ITU-R P.2040-3 (08/2023) Table 3, rows up to 100 GHz.  All rows FOUND (secondary)
# in NVlabs/sionna-rt radio_materials/itu.py and wavetracer.dev (P.2040-2 Table 3),
# identical; sigma at 9 GHz for concrete/brick/plasterboard/wood/glass also FOUND on
# the MathWorks buildingMaterialPermittivity page (P.2040-3).
_ROWS: Final[tuple[P2040Material, ...]] = (
    P2040Material("vacuum", 1.0, 0.0, 0.0, 0.0, 0.001, 100.0),  # FOUND (secondary)
    P2040Material("concrete", 5.24, 0.0, 0.0462, 0.7822, 1.0, 100.0),  # FOUND (secondary)
    P2040Material("brick", 3.91, 0.0, 0.0238, 0.16, 1.0, 40.0),  # FOUND (secondary)
    P2040Material("plasterboard", 2.73, 0.0, 0.0085, 0.9395, 1.0, 100.0),  # FOUND (sec.)
    P2040Material("wood", 1.99, 0.0, 0.0047, 1.0718, 0.001, 100.0),  # FOUND (secondary)
    P2040Material("glass", 6.31, 0.0, 0.0036, 1.3394, 0.1, 100.0),  # FOUND (secondary)
    P2040Material("ceiling-board", 1.48, 0.0, 0.0011, 1.075, 1.0, 100.0),  # FOUND (sec.)
    P2040Material("chipboard", 2.58, 0.0, 0.0217, 0.78, 1.0, 100.0),  # FOUND (secondary)
    P2040Material("plywood", 2.71, 0.0, 0.33, 0.0, 1.0, 40.0),  # FOUND (secondary)
    P2040Material("marble", 7.074, 0.0, 0.0055, 0.9262, 1.0, 60.0),  # FOUND (secondary)
    P2040Material("floorboard", 3.66, 0.0, 0.0044, 1.3515, 50.0, 100.0),  # FOUND (sec.)
    P2040Material("metal", 1.0, 0.0, 1.0e7, 0.0, 1.0, 100.0),  # FOUND (secondary)
    P2040Material("very-dry-ground", 3.0, 0.0, 0.00015, 2.52, 1.0, 10.0, True),  # FOUND
    P2040Material("medium-dry-ground", 15.0, -0.1, 0.035, 1.63, 1.0, 10.0, True),  # FOUND
    P2040Material("wet-ground", 30.0, -0.4, 0.15, 1.30, 1.0, 10.0, True),  # FOUND (sec.)
)

#: The material rows by scenario name.
MATERIALS: Final[dict[str, P2040Material]] = {row.name: row for row in _ROWS}

#: Scenario names of the P.2040 materials (lower case, hyphenated), in table order.
MATERIAL_NAMES: Final[tuple[str, ...]] = tuple(MATERIALS)

#: Other spellings accepted for a name (after lower-casing and mapping "_" and " " to "-").
_ALIASES: Final[dict[str, str]] = {"air": "vacuum", "ceilingboard": "ceiling-board"}


def canonical_material_name(material: str) -> str:
    """Return the scenario name of a material given in any accepted spelling.

    Parameters
    ----------
    material : str
        A name such as ``"concrete"``, ``"Ceiling board"``, ``"very_dry_ground"``
        or ``"air"`` (an alias of ``"vacuum"``).

    Returns
    -------
    str
        One of :data:`MATERIAL_NAMES`.

    Raises
    ------
    ModelInputError
        (parameter ``material``) for a name that is not in Table 3, listing the
        known names and the closest one.
    """
    if not isinstance(material, str):
        raise ModelInputError("material", f"material must be a name (string), got {material!r}")
    key = "-".join(material.strip().lower().replace("_", " ").replace("-", " ").split())
    key = _ALIASES.get(key, key)
    if key in MATERIALS:
        return key
    raise ModelInputError(
        "material",
        f"unknown material {material!r}; known ITU-R P.2040 materials: "
        + ", ".join(MATERIAL_NAMES)
        + suggest(key, MATERIAL_NAMES),
    )


def out_of_range_message(material: str, frequency_hz: float) -> str | None:
    """The warning text when ``frequency_hz`` is outside the material's Table 3 range.

    Parameters
    ----------
    material : str
        Material name (any accepted spelling).
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    str or None
        ``None`` inside the range.
    """
    row = MATERIALS[canonical_material_name(material)]
    f_ghz = frequency_hz / 1e9
    if row.f_min_ghz <= f_ghz <= row.f_max_ghz:
        return None
    kind = (
        "P.2040 gives this range as a hard limit for ground types"
        if row.hard_limit
        else "the fit is extrapolated (P.2040: the range is indicative, not a hard limit)"
    )
    return (
        f"material {row.name!r}: {f_ghz:g} GHz is outside the {row.f_min_ghz:g}-"
        f"{row.f_max_ghz:g} GHz range of {P2040_EDITION}; {kind}"
    )


def permittivity_and_conductivity_itu_p2040(
    material: str, frequency_hz: float, *, warn: bool = True
) -> tuple[float, float]:
    """Real relative permittivity and conductivity of a P.2040 material.

    Parameters
    ----------
    material : str
        Material name (see :data:`MATERIAL_NAMES`; ``_``/space variants accepted).
    frequency_hz : float
        Frequency, > 0 [Hz].
    warn : bool
        Issue :class:`ModelRangeWarning` outside the row's frequency range.

    Returns
    -------
    eta_prime : float
        Real part of the relative permittivity, a f^b [1].
    sigma_s_m : float
        Conductivity, c f^d [S m^-1].

    Raises
    ------
    ModelInputError
        For an unknown material or a frequency that is not a finite number > 0.

    Notes
    -----
    :math:`\\eta' = a f^b`, :math:`\\sigma = c f^d`, f in GHz (P.2040 sec. 2.1.4).

    References
    ----------
    .. [1] ITU-R P.2040-3 (08/2023), Table 3.
    """
    name = canonical_material_name(material)
    if not (np.isfinite(frequency_hz) and frequency_hz > 0):
        raise ModelInputError("frequency_hz", f"frequency_hz must be > 0, got {frequency_hz!r}")
    row = MATERIALS[name]
    if warn:
        message = out_of_range_message(name, frequency_hz)
        if message is not None:
            warnings.warn(message, ModelRangeWarning, stacklevel=2)
    f_ghz = frequency_hz / 1e9
    return float(row.a * f_ghz**row.b), float(row.c * f_ghz**row.d)


def complex_permittivity(
    relative_permittivity: float, conductivity_s_m: float, frequency_hz: float
) -> complex:
    """Complex relative permittivity of a conducting dielectric (e^{+jwt}).

    Parameters
    ----------
    relative_permittivity : float
        Real part eta' [1].
    conductivity_s_m : float
        Conductivity sigma [S m^-1].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    complex
        :math:`\\eta' - j \\sigma / (2 \\pi f \\varepsilon_0)` [1].

    References
    ----------
    .. [1] ITU-R P.2040-3, sec. 2.1.2 (eq. (9b) in the P.2040-1 numbering).
    """
    loss = conductivity_s_m / (2.0 * np.pi * frequency_hz * constants.epsilon_0)
    return complex(relative_permittivity, -loss)


def relative_permittivity_itu_p2040(
    material: str, frequency_hz: float, *, warn: bool = True
) -> complex:
    """Complex relative permittivity of an ITU-R P.2040 material.

    Parameters
    ----------
    material : str
        Material name (see :data:`MATERIAL_NAMES`; ``_``/space variants accepted).
    frequency_hz : float
        Frequency, > 0 [Hz].
    warn : bool
        Issue :class:`ModelRangeWarning` outside the row's frequency range.

    Returns
    -------
    complex
        :math:`\\varepsilon_r = \\eta' - j \\sigma/(2\\pi f \\varepsilon_0)`, with
        the time convention :math:`e^{+j\\omega t}` (negative imaginary part for a
        lossy material) [1].

    Raises
    ------
    ModelInputError
        For an unknown material (with the known names and a suggestion) or a bad
        frequency.

    Warns
    -----
    ModelRangeWarning
        When the frequency is outside the Table 3 row's range.

    Notes
    -----
    :math:`\\eta' = a f^b`, :math:`\\sigma = c f^d` (f in GHz), then
    :math:`\\varepsilon_r = \\eta' - j\\sigma/(2\\pi f\\varepsilon_0)`.

    References
    ----------
    .. [1] ITU-R P.2040-3 (08/2023), sec. 2.1.4 and Table 3.

    Examples
    --------
    >>> eps = relative_permittivity_itu_p2040("concrete", 2.45e9)
    >>> round(eps.real, 2), round(-eps.imag, 3)
    (5.24, 0.683)
    """
    eta, sigma = permittivity_and_conductivity_itu_p2040(material, frequency_hz, warn=False)
    if warn:
        message = out_of_range_message(material, frequency_hz)
        if message is not None:
            warnings.warn(message, ModelRangeWarning, stacklevel=2)
    return complex_permittivity(eta, sigma, frequency_hz)


__all__ = [
    "MATERIALS",
    "MATERIAL_NAMES",
    "P2040_EDITION",
    "P2040Material",
    "canonical_material_name",
    "complex_permittivity",
    "out_of_range_message",
    "permittivity_and_conductivity_itu_p2040",
    "relative_permittivity_itu_p2040",
]
