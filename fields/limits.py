"""Published human-exposure limits and oven-leakage limits, as cited data.

Every limit the contract names (``LIMIT_IDS``) is held here as the rows of its
published table: frequency band as printed, the incident power density, electric and
magnetic field expressions, the averaging time, the table it comes from and a
verification tag for every value.  Nothing is extrapolated: a frequency outside the
published table raises :class:`~keepclear.fields.errors.LimitError`.

What a reference level is
-------------------------
The standards protect against tissue heating by *basic restrictions* (dosimetric
reference limits in IEEE terms): the specific absorption rate SAR [W kg^-1] averaged
over the whole body or over 10 g, and above 6 GHz the absorbed (epithelial) power
density.  These cannot be measured outside a body, so each standard derives
*reference levels* (ICNIRP, Safety Code 6), *exposure reference levels* (ERL, IEEE)
or *maximum permissible exposures* (MPE, FCC): the unperturbed incident field
strengths E [V m^-1], H [A m^-1] and the incident power density S [W m^-2], spatially
averaged over the space the body would occupy, that keep the basic restriction
with margin under the worst coupling.  Meeting the reference level implies meeting
the basic restriction; exceeding it means the basic restriction must be assessed, it
does not prove harm.  The 21 CFR 1030.10 values are different in kind: a product
*emission* limit for microwave ovens, read 5 cm from the outer surface.

Quantity convention
-------------------
The keepclear contract reports RMS fields and the plane-wave-equivalent power density
``S = max(|E|^2/eta0, eta0*|H|^2)``.  :func:`quotient` compares that S with the
limit's S and, where the table also gives E or H, ``(E/E_lim)^2`` and ``(H/H_lim)^2``,
and returns the largest ratio.  ICNIRP 2020 (Table 6 note 5) lets one quantity show
compliance in the far field but asks for S or both E and H in the radiative near field;
taking the maximum of every quantity the table gives never passes what either rule
fails, so it errs on the safe side.  Where a table gives only E and H (ICNIRP below
30 MHz) :attr:`LimitValue.power_density_w_m2` is the plane-wave equivalent of the
stricter of the two, ``min(E_lim^2/eta0, eta0*H_lim^2)``, flagged as derived.

Averaging time
--------------
The time-averaged exposure is compared with the limit; the window differs:

===========================  ===============================================
ICNIRP 2020 whole-body       30 min (Table 5); ICNIRP 1998 used 6 min
ICNIRP 2020 local            6 min (Table 6, note 3)
IEEE C95.1-2019 whole-body   30 min (from memory, both tiers; not verified)
FCC 47 CFR 1.1310            6 min occupational/controlled, 30 min general
                             population/uncontrolled (Table 1)
Safety Code 6 (2015)         6 min to 15 GHz, then 616000/f^1.2 min (f in MHz)
21 CFR 1030.10               none: a limit on the instrument reading (90 % of
                             the steady reading within 3 s), not a time average
===========================  ===============================================

A duty-cycled magnetron (on for half of each mains cycle, or switched on and off over
seconds) is averaged the same way under every window of at least a few seconds; the
window matters for sources that run for less than the window.  Where the window is
uncertain the shorter one is the stricter reading for intermittent use.

At a frequency where two printed rows meet and the table does not say which applies,
the more restrictive row is used.

Verification
------------
Every value carries a tag: ``"FOUND"`` (read in the document or in a faithful
reproduction; the place is named in the row's ``where``) or ``"MEMORY"`` (recalled,
not seen in a copy; check before relying on it).  ``tests/data/limits_provenance.md``
lists the sources row by row.

References
----------
.. [1] ICNIRP, "Guidelines for limiting exposure to electromagnetic fields (100 kHz to
   300 GHz)", Health Physics 118(5):483-524, 2020, doi:10.1097/HP.0000000000001210.
   Table 5 (whole-body reference levels, 30 min), Table 6 (local, 6 min).
.. [2] ICNIRP, "Guidelines for limiting exposure to time-varying electric, magnetic,
   and electromagnetic fields (up to 300 GHz)", Health Physics 74(4):494-522, 1998
   (superseded above 100 kHz by [1]; cited for comparison only).
.. [3] IEEE Std C95.1-2019, "IEEE Standard for Safety Levels with Respect to Human
   Exposure to Electric, Magnetic, and Electromagnetic Fields, 0 Hz to 300 GHz",
   IEEE Xplore document 8859679 (doi:10.1109/IEEESTD.2019.8859679; the DOI follows
   IEEE's pattern for that document, not read).  ERL Table 7 (unrestricted) and
   Table 8 (restricted); table numbers and values from memory.
.. [4] 47 CFR 1.1310, "Radiofrequency radiation exposure limits", Table 1 (limits for
   maximum permissible exposure), as amended 85 FR 18146, 1 Apr 2020.
.. [5] Health Canada, Safety Code 6 (2015), "Limits of Human Exposure to
   Radiofrequency Electromagnetic Energy in the Frequency Range from 3 kHz to
   300 GHz", Cat. H129-48/2015E-PDF, ISBN 978-0-660-02466-0.  Tables 5 and 6.
.. [6] 21 CFR 1030.10, "Microwave ovens", paragraphs (b) (definition, 890-6000 MHz)
   and (c)(1) (power density limit).  FDA/BRH, "Procedures for Field Testing
   Microwave Ovens", HEW Publication (FDA) 77-8037, 1977.
"""

from __future__ import annotations

import ast
import math
import operator
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import ETA0_OHM

from .errors import LimitError
from .validate import suggest

__all__ = [
    "LIMIT_IDS",
    "Band",
    "Limit",
    "LimitError",
    "LimitValue",
    "all_limits",
    "get_limit",
    "quotient",
    "values_at",
]

FOUND = "FOUND"
MEMORY = "MEMORY"
TAGS = (FOUND, MEMORY)

#: Units a printed power density may be in, with the factor to W m^-2.
POWER_DENSITY_UNITS = {"W/m^2": 1.0, "mW/cm^2": 10.0}

TIERS = ("whole-body", "local", "product-emission")
POPULATIONS = ("general-public", "occupational")

_MHZ = 1e6
_GHZ = 1e9

# ------------------------------------------------------------ expressions
# Printed formulas are kept as text ("fM/200", "0.02619*f^0.6834") and evaluated by a
# small arithmetic interpreter: numbers, the frequency names below, + - * / ^ and
# parentheses.  Nothing else parses, so the data cannot run code.
_VARIABLES = {
    "fM": lambda f_hz: f_hz / _MHZ,  # ICNIRP, IEEE: frequency in MHz
    "fG": lambda f_hz: f_hz / _GHZ,  # ICNIRP, IEEE: frequency in GHz
    "f": lambda f_hz: f_hz / _MHZ,  # FCC and Safety Code 6 print f in MHz
}
_BINARY: dict[type, Callable[[Any, Any], Any]] = {
    ast.Add: operator.add,
    ast.Sub: operator.sub,
    ast.Mult: operator.mul,
    ast.Div: operator.truediv,
    ast.Pow: operator.pow,
}
_UNARY: dict[type, Callable[[Any], Any]] = {ast.USub: operator.neg, ast.UAdd: operator.pos}
_PARSED: dict[str, ast.expr] = {}


def _parse(expression: str) -> ast.expr:
    """Parse and check a printed formula once; ``^`` is the power as printed."""
    if expression in _PARSED:
        return _PARSED[expression]
    tree = ast.parse(expression.replace("^", "**"), mode="eval").body

    def check(node: ast.AST) -> None:
        if isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
            check(node.left)
            check(node.right)
        elif isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
            check(node.operand)
        elif isinstance(node, ast.Constant) and type(node.value) in (int, float):
            pass
        elif isinstance(node, ast.Name) and node.id in _VARIABLES:
            pass
        else:
            raise ValueError(f"limit formula {expression!r}: {ast.dump(node)} is not allowed")

    check(tree)
    _PARSED[expression] = tree
    return tree


def evaluate(expression: str, frequency_hz: float) -> float:
    """Value of a printed formula at a frequency.

    Parameters
    ----------
    expression : str
        A formula as printed in the table, e.g. ``"fM/200"`` or ``"55/fG^0.177"``;
        ``fM`` and ``f`` are the frequency in MHz, ``fG`` in GHz.
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    float
        The value, in the unit the table prints.
    """
    f_hz = float(frequency_hz)

    def run(node: ast.expr) -> Any:
        if isinstance(node, ast.BinOp):
            return _BINARY[type(node.op)](run(node.left), run(node.right))
        if isinstance(node, ast.UnaryOp):
            return _UNARY[type(node.op)](run(node.operand))
        if isinstance(node, ast.Constant):
            return node.value
        assert isinstance(node, ast.Name)
        return _VARIABLES[node.id](f_hz)

    return float(run(_parse(expression)))


# -------------------------------------------------------------- the data
@dataclass(frozen=True)
class Band:
    """One printed row of a limit table.

    Parameters
    ----------
    low_hz, high_hz : float
        Band edges as printed [Hz].
    low_inclusive, high_inclusive : bool
        Whether each edge belongs to the row (``"> 2-300 GHz"``: low exclusive).  Where
        the table prints no sign the row is taken as closed and, at a shared edge, the
        more restrictive row applies.
    printed_range : str
        The range as printed.
    table : str
        Table (or paragraph) of the document the row is in.
    power_density : str or None
        Incident power density formula, in ``power_density_unit``; None where the
        table gives none ("NA" or a dash).
    e_field, h_field : str or None
        RMS field formulas [V m^-1], [A m^-1]; None where the table gives none.
    s_tag, e_tag, h_tag : str
        ``"FOUND"`` or ``"MEMORY"`` for each cell, including a cell printed "NA".
    where : str
        Where the row was read, or what the recollection rests on.
    power_density_unit : str
        ``"W/m^2"`` or ``"mW/cm^2"`` (FCC, FDA print mW/cm^2).
    averaging_min : str or None
        Averaging-time formula in minutes when the row overrides the limit's.
    averaging_tag : str or None
        Tag of ``averaging_min``.
    note : str
        Anything the row's reader must know.
    """

    low_hz: float
    high_hz: float
    low_inclusive: bool
    high_inclusive: bool
    printed_range: str
    table: str
    power_density: str | None
    e_field: str | None
    h_field: str | None
    s_tag: str
    e_tag: str
    h_tag: str
    where: str
    power_density_unit: str = "W/m^2"
    averaging_min: str | None = None
    averaging_tag: str | None = None
    note: str = ""

    def contains(self, frequency_hz: float) -> bool:
        """Whether the row applies at ``frequency_hz`` [Hz]."""
        f = float(frequency_hz)
        above = f > self.low_hz or (self.low_inclusive and f == self.low_hz)
        below = f < self.high_hz or (self.high_inclusive and f == self.high_hz)
        return above and below

    @property
    def expression(self) -> str:
        """The printed formulas of the row, for reports."""
        parts = []
        if self.power_density is not None:
            parts.append(f"S = {self.power_density} {self.power_density_unit}")
        if self.e_field is not None:
            parts.append(f"E = {self.e_field} V/m")
        if self.h_field is not None:
            parts.append(f"H = {self.h_field} A/m")
        return "; ".join(parts)


@dataclass(frozen=True)
class LimitValue:
    """A limit evaluated at one frequency.

    Parameters
    ----------
    id : str
        Limit id.
    frequency_hz : float
        Frequency [Hz].
    power_density_w_m2 : float
        Incident (plane-wave-equivalent) power density limit [W m^-2].
    e_v_m, h_a_m : float or None
        RMS field limits [V m^-1], [A m^-1]; None where the table gives none.
    averaging_time_s : float or None
        Averaging time [s]; None where the document sets none.
    source : str
        Document and table, e.g. ``"ICNIRP 2020 guidelines, Table 5"``.
    tier, population : str
        As :class:`Limit`.
    expression : str
        The printed formulas of the row used.
    verification : str
        Tags of the values, e.g. ``"S FOUND; E NA FOUND; H NA FOUND"``.
    power_density_derived : bool
        True when the table gives no power density and ``power_density_w_m2`` is the
        plane-wave equivalent of the stricter of E and H.
    """

    id: str
    frequency_hz: float
    power_density_w_m2: float
    e_v_m: float | None
    h_a_m: float | None
    averaging_time_s: float | None
    source: str
    tier: str
    population: str
    expression: str
    verification: str = ""
    power_density_derived: bool = False

    def as_dict(self) -> dict[str, Any]:
        """The contract's ``limits`` JSON entry (plus tier, population, expression)."""
        return {
            "id": self.id,
            "power_density_w_m2": self.power_density_w_m2,
            "e_v_m": self.e_v_m,
            "h_a_m": self.h_a_m,
            "averaging_time_s": self.averaging_time_s,
            "source": self.source,
            "tier": self.tier,
            "population": self.population,
            "expression": self.expression,
        }


def _check_frequency(frequency_hz: Any) -> float:
    if isinstance(frequency_hz, bool) or not isinstance(frequency_hz, (int, float, np.number)):
        raise LimitError(f"frequency must be a number [Hz], got {frequency_hz!r}")
    f = float(frequency_hz)
    if not math.isfinite(f) or f <= 0.0:
        raise LimitError(f"frequency must be a finite number > 0 [Hz], got {frequency_hz!r}")
    return f


def _format_hz(f_hz: float) -> str:
    for scale, unit in ((_GHZ, "GHz"), (_MHZ, "MHz"), (1e3, "kHz")):
        if f_hz >= scale:
            return f"{f_hz / scale:g} {unit}"
    return f"{f_hz:g} Hz"


@dataclass(frozen=True)
class Limit:
    """One published limit: a table of frequency bands and its context.

    Parameters
    ----------
    id : str
        Contract id, e.g. ``"icnirp-2020/general-public"``.
    title : str
        What the limit is, in words.
    document : str
        The publishing document.
    edition : str
        Edition / version of the document.
    tier : str
        ``"whole-body"``, ``"local"`` or ``"product-emission"``.
    population : str
        ``"general-public"`` or ``"occupational"``.
    averaging_time_s : float or None
        Averaging time of the table [s]; None where the document sets none (see
        ``averaging_reason``).  A row may override it (``Band.averaging_min``).
    averaging_tag : str
        Tag of the averaging time (or of the statement that there is none).
    averaging_reason : str
        Why the averaging time is None or varies; where it was read.
    bands : tuple of Band
        The rows of the table, over its whole published range.
    notes : tuple of str
        Disagreements with other standards and cautions.
    source : str
        Short label used in :attr:`LimitValue.source` (table appended).
    reference : str
        Full citation with DOI where there is one.
    """

    id: str
    title: str
    document: str
    edition: str
    tier: str
    population: str
    averaging_time_s: float | None
    averaging_tag: str
    averaging_reason: str
    bands: tuple[Band, ...]
    notes: tuple[str, ...]
    source: str
    reference: str

    @property
    def band_hz(self) -> tuple[float, float]:
        """The whole covered range (lowest and highest printed edge) [Hz]."""
        return (min(b.low_hz for b in self.bands), max(b.high_hz for b in self.bands))

    @property
    def printed_ranges(self) -> str:
        """The rows' ranges as printed, for messages."""
        return ", ".join(b.printed_range for b in self.bands)

    def covers(self, frequency_hz: float) -> bool:
        """Whether a printed row applies at ``frequency_hz`` [Hz] (False for bad input)."""
        try:
            f = _check_frequency(frequency_hz)
        except LimitError:
            return False
        return any(b.contains(f) for b in self.bands)

    def at(self, frequency_hz: float) -> LimitValue:
        """The limit at one frequency; never extrapolated.

        Parameters
        ----------
        frequency_hz : float
            Frequency [Hz].

        Returns
        -------
        LimitValue
            The values of the row that applies (the most restrictive where two
            printed rows share the frequency).

        Raises
        ------
        LimitError
            If the frequency is not a finite positive number or lies outside every
            printed row.
        """
        f = _check_frequency(frequency_hz)
        rows = [b for b in self.bands if b.contains(f)]
        if not rows:
            low, high = self.band_hz
            raise LimitError(
                f"limit '{self.id}' is published for {_format_hz(low)} to "
                f"{_format_hz(high)} ({self.source}: {self.printed_ranges}); "
                f"{f:g} Hz is outside it and limits are never extrapolated"
            )
        values = [self._value(b, f) for b in rows]
        return min(
            values,
            key=lambda v: (
                v.power_density_w_m2,
                math.inf if v.e_v_m is None else v.e_v_m,
                math.inf if v.h_a_m is None else v.h_a_m,
            ),
        )

    def _value(self, band: Band, f: float) -> LimitValue:
        s = None
        if band.power_density is not None:
            s = evaluate(band.power_density, f) * POWER_DENSITY_UNITS[band.power_density_unit]
        e = None if band.e_field is None else evaluate(band.e_field, f)
        h = None if band.h_field is None else evaluate(band.h_field, f)
        derived = s is None
        if s is None:
            candidates = []
            if e is not None:
                candidates.append(e * e / ETA0_OHM)
            if h is not None:
                candidates.append(ETA0_OHM * h * h)
            s = min(candidates)
        if band.averaging_min is not None:
            averaging = evaluate(band.averaging_min, f) * 60.0
        else:
            averaging = self.averaging_time_s
        expression = band.expression
        if derived:
            expression += "; S = min(E^2/eta0, eta0*H^2) (derived: the table gives no S)"
        formulas = " ".join(
            x for x in (band.power_density, band.e_field, band.h_field) if x is not None
        )
        legend = "; fM, f in MHz, fG in GHz" if any(c.isalpha() for c in formulas) else ""
        expression += f" [{band.printed_range}{legend}]"

        def tag(name: str, value: Any, cell_tag: str) -> str:
            return f"{name} {cell_tag}" if value is not None else f"{name} NA {cell_tag}"

        verification = "; ".join(
            [
                tag("S", band.power_density, band.s_tag),
                tag("E", band.e_field, band.e_tag),
                tag("H", band.h_field, band.h_tag),
                f"averaging {band.averaging_tag if band.averaging_min else self.averaging_tag}",
            ]
        )
        return LimitValue(
            id=self.id,
            frequency_hz=f,
            power_density_w_m2=float(s),
            e_v_m=e,
            h_a_m=h,
            averaging_time_s=averaging,
            source=f"{self.source}, {band.table}",
            tier=self.tier,
            population=self.population,
            expression=expression,
            verification=verification,
            power_density_derived=derived,
        )


def _row(
    low_hz: float,
    high_hz: float,
    printed: str,
    table: str,
    s: str | None,
    e: str | None,
    h: str | None,
    tag: str,
    where: str,
    *,
    low_inclusive: bool = True,
    high_inclusive: bool = True,
    e_tag: str | None = None,
    h_tag: str | None = None,
    unit: str = "W/m^2",
    averaging_min: str | None = None,
    averaging_tag: str | None = None,
    note: str = "",
) -> Band:
    return Band(
        low_hz=low_hz,
        high_hz=high_hz,
        low_inclusive=low_inclusive,
        high_inclusive=high_inclusive,
        printed_range=printed,
        table=table,
        power_density=s,
        e_field=e,
        h_field=h,
        s_tag=tag,
        e_tag=e_tag or tag,
        h_tag=h_tag or tag,
        where=where,
        power_density_unit=unit,
        averaging_min=averaging_min,
        averaging_tag=averaging_tag,
        note=note,
    )


# ---- ICNIRP 2020 ------------------------------------------------------------
_ICNIRP_REF = (
    "ICNIRP (2020) Guidelines for limiting exposure to electromagnetic fields "
    "(100 kHz to 300 GHz). Health Phys 118(5):483-524. doi:10.1097/HP.0000000000001210"
)
_T5_MEM = (
    "recalled from ICNIRP 2020 Table 5; consistent with Table 6 (FOUND), whose rows "
    "below 2 GHz are 5x in S (sqrt(5) in E, H) of these"
)
_T5_PUBLIC_S = (
    "FOUND (secondary): research note quoting ICNIRP 2020 Table 5 'averaged over 30 min "
    "and the whole body': 10 W/m2 above 2 GHz, fM/200 from 400 to 2000 MHz (search "
    "file id 70499974463)"
)
_T6 = (
    "FOUND (secondary): Bioelectromagnetism (textbook), Table 7.8 p. 316, 'Reproduced "
    "from ICNIRP, Health Physics 118:483-524, 2020'"
)
_ICNIRP_NOTES_COMMON = (
    "ICNIRP 2020 replaces the 100 kHz-300 GHz part of ICNIRP 1998. At 2.45 GHz the "
    "power density is unchanged (10 / 50 W/m2) but the whole-body averaging went from "
    "6 to 30 min, E and H are no longer given above 2 GHz (NA: only S is assessed), "
    "local reference levels were added, and the 1998 pulse rule (peak <= 1000x) became "
    "brief-exposure energy limits (Table 7, not held here).",
)


def _icnirp_whole_body(population: str) -> Limit:
    occ = population == "occupational"
    t5 = "Table 5"
    if occ:
        rows = (
            _row(
                0.1 * _MHZ,
                30 * _MHZ,
                "0.1-30 MHz",
                t5,
                None,
                "660/fM^0.7",
                "4.9/fM",
                MEMORY,
                _T5_MEM,
            ),
            _row(
                30 * _MHZ,
                400 * _MHZ,
                ">30-400 MHz",
                t5,
                "10",
                "61",
                "0.16",
                MEMORY,
                _T5_MEM,
                low_inclusive=False,
            ),
            _row(
                400 * _MHZ,
                2000 * _MHZ,
                ">400-2000 MHz",
                t5,
                "fM/40",
                "3*fM^0.5",
                "0.008*fM^0.5",
                MEMORY,
                _T5_MEM,
                low_inclusive=False,
            ),
            _row(
                2 * _GHZ,
                300 * _GHZ,
                ">2-300 GHz",
                t5,
                "50",
                None,
                None,
                MEMORY,
                _T5_MEM + "; 50 W/m2 also agrees with FCC, IEEE and ICNIRP 1998 "
                "occupational (FOUND for those)",
                low_inclusive=False,
            ),
        )
    else:
        rows = (
            _row(
                0.1 * _MHZ,
                30 * _MHZ,
                "0.1-30 MHz",
                t5,
                None,
                "300/fM^0.7",
                "2.2/fM",
                MEMORY,
                _T5_MEM,
            ),
            _row(
                30 * _MHZ,
                400 * _MHZ,
                ">30-400 MHz",
                t5,
                "2",
                "27.7",
                "0.073",
                MEMORY,
                _T5_MEM,
                low_inclusive=False,
            ),
            _row(
                400 * _MHZ,
                2000 * _MHZ,
                ">400-2000 MHz",
                t5,
                "fM/200",
                "1.375*fM^0.5",
                "0.0037*fM^0.5",
                FOUND,
                _T5_PUBLIC_S + "; E, H " + _T5_MEM,
                low_inclusive=False,
                e_tag=MEMORY,
                h_tag=MEMORY,
            ),
            _row(
                2 * _GHZ,
                300 * _GHZ,
                ">2-300 GHz",
                t5,
                "10",
                None,
                None,
                FOUND,
                _T5_PUBLIC_S + "; E, H 'NA' " + _T5_MEM,
                low_inclusive=False,
                e_tag=MEMORY,
                h_tag=MEMORY,
            ),
        )
    name = "occupational" if occ else "general public"
    return Limit(
        id=f"icnirp-2020/{population}",
        title=f"ICNIRP 2020 whole-body reference levels, {name}",
        document="ICNIRP Guidelines for limiting exposure to electromagnetic fields "
        "(100 kHz to 300 GHz)",
        edition="2020 (Health Physics 118(5):483-524)",
        tier="whole-body",
        population=population,
        averaging_time_s=1800.0,
        averaging_tag=FOUND,
        averaging_reason="30 min, Table 5 title 'averaged over 30 min and the whole body' "
        "(FOUND secondary, search file id 70499974463)",
        bands=rows,
        notes=_ICNIRP_NOTES_COMMON
        + (
            "30-min whole-body average; ICNIRP 1998 and FCC occupational use 6 min, SC6 "
            "6 min: a source on for less than the window is judged on its average over "
            "the window.",
            "Below 30 MHz the table gives E and H only; power_density_w_m2 is then the "
            "plane-wave equivalent of the stricter field (derived).",
            "Occupational 50 W/m2 at 2-6 GHz agrees with FCC occupational and IEEE "
            "restricted; Health Canada SC6 controlled is lower (31.95 W/m2 at 2.45 GHz)."
            if occ
            else "Public 10 W/m2 above 2 GHz agrees with FCC and IEEE; Health Canada SC6 "
            "uncontrolled is lower (5.42 W/m2 at 2.45 GHz), so SC6 gives a keep-out "
            "radius about 1.36x larger.",
        ),
        source="ICNIRP 2020 guidelines",
        reference=_ICNIRP_REF,
    )


def _icnirp_local(population: str) -> Limit:
    occ = population == "occupational"
    t6 = "Table 6"
    if occ:
        vals = (
            "1504/fM^0.7",
            "10.8/fM",
            "139",
            "0.36",
            "50",
            "10.58*fM^0.43",
            "0.0274*fM^0.43",
            "0.29*fM^0.86",
            "200",
            "275/fG^0.177",
            "100",
        )
    else:
        vals = (
            "671/fM^0.7",
            "4.9/fM",
            "62",
            "0.163",
            "10",
            "4.72*fM^0.43",
            "0.0123*fM^0.43",
            "0.058*fM^0.86",
            "40",
            "55/fG^0.177",
            "20",
        )
    e1, h1, e2, h2, s2, e3, h3, s3, s4, s5, s6 = vals
    rows = (
        _row(0.1 * _MHZ, 30 * _MHZ, "0.1-30 MHz", t6, None, e1, h1, FOUND, _T6),
        _row(30 * _MHZ, 400 * _MHZ, ">30-400 MHz", t6, s2, e2, h2, FOUND, _T6, low_inclusive=False),
        _row(
            400 * _MHZ,
            2000 * _MHZ,
            ">400-2000 MHz",
            t6,
            s3,
            e3,
            h3,
            FOUND,
            _T6,
            low_inclusive=False,
        ),
        _row(2 * _GHZ, 6 * _GHZ, ">2-6 GHz", t6, s4, None, None, FOUND, _T6, low_inclusive=False),
        _row(
            6 * _GHZ,
            300 * _GHZ,
            ">6 to <300 GHz",
            t6,
            s5,
            None,
            None,
            FOUND,
            _T6 + "; the reproduction's OCR drops the '/', continuity at 6 GHz "
            "(S = the >2-6 GHz value) confirms division",
            low_inclusive=False,
            high_inclusive=False,
        ),
        _row(300 * _GHZ, 300 * _GHZ, "300 GHz", t6, s6, None, None, FOUND, _T6),
    )
    name = "occupational" if occ else "general public"
    return Limit(
        id=f"icnirp-2020/{population}-local",
        title=f"ICNIRP 2020 local reference levels, {name}",
        document="ICNIRP Guidelines for limiting exposure to electromagnetic fields "
        "(100 kHz to 300 GHz)",
        edition="2020 (Health Physics 118(5):483-524)",
        tier="local",
        population=population,
        averaging_time_s=360.0,
        averaging_tag=FOUND,
        averaging_reason="6 min, Table 6 note 3 'Sinc, Einc, and Hinc are to be averaged "
        "over 6 minutes' (FOUND secondary, " + _T6 + ")",
        bands=rows,
        notes=_ICNIRP_NOTES_COMMON
        + (
            "Local levels apply to peak spatial exposure of part of the body (Table 6 "
            "notes 5-7: above 6 GHz S is averaged over 4 cm2 squares; MEMORY), averaged "
            "over 6 min, against 30 min for the whole-body levels.",
            "The 2-6 GHz local value is 4x the whole-body value (200 vs 50, 40 vs 10 "
            "W/m2); IEEE C95.1-2019 has no incident-power-density local ERL below 6 GHz "
            "(it uses a peak 10 g SAR DRL instead; MEMORY).",
            "Table 6 note 5: for >30 MHz-6 GHz in the far field one of S, E or H shows "
            "compliance; in the radiative near field S, or both E and H. The quotient "
            "takes the largest ratio of every quantity given, which is never less strict.",
        ),
        source="ICNIRP 2020 guidelines",
        reference=_ICNIRP_REF,
    )


# ---- IEEE C95.1-2019 ---------------------------------------------------------
_IEEE_REF = (
    "IEEE Std C95.1-2019, IEEE Standard for Safety Levels with Respect to Human Exposure "
    "to Electric, Magnetic, and Electromagnetic Fields, 0 Hz to 300 GHz. "
    "doi:10.1109/IEEESTD.2019.8859679"
)
_IEEE_MEM = (
    "MEMORY: the ERL tables of C95.1-2019 were not found in the reference library; "
    "recalled (rows below 400 MHz as in the C95.1-2005 MPE tables, low confidence)"
)
_IEEE_MEM_HIGH = (
    "MEMORY: not found in the reference library; recalled, and the same as ICNIRP 2020 "
    "Table 5 which the 2019 edition harmonised with"
)


def _ieee(population: str) -> Limit:
    restricted = population == "occupational"
    if restricted:
        table = "Table 8"
        rows = (
            _row(
                0.1 * _MHZ,
                1.0 * _MHZ,
                "0.1-1.0 MHz",
                table,
                "9000",
                "1842",
                "16.3/fM",
                MEMORY,
                _IEEE_MEM,
                note="printed S pair (S_E, S_H) = (9000, 100000/fM^2); "
                "the E-equivalent S_E is held",
            ),
            _row(
                1.0 * _MHZ,
                30 * _MHZ,
                "1.0-30 MHz",
                table,
                "9000/fM^2",
                "1842/fM",
                "16.3/fM",
                MEMORY,
                _IEEE_MEM,
                note="printed S pair (9000/fM^2, 100000/fM^2); S_E held",
            ),
            _row(
                30 * _MHZ,
                100 * _MHZ,
                "30-100 MHz",
                table,
                "10",
                "61.4",
                "16.3/fM",
                MEMORY,
                _IEEE_MEM,
                note="printed S pair (10, 1000000/fM^2); S_E held",
            ),
            _row(
                100 * _MHZ,
                400 * _MHZ,
                "100-400 MHz",
                table,
                "10",
                "61.4",
                "0.163",
                MEMORY,
                _IEEE_MEM,
            ),
            _row(
                400 * _MHZ,
                2000 * _MHZ,
                "400-2000 MHz",
                table,
                "fM/40",
                None,
                None,
                MEMORY,
                _IEEE_MEM_HIGH,
            ),
            _row(
                2000 * _MHZ,
                300000 * _MHZ,
                "2000-300000 MHz",
                table,
                "50",
                None,
                None,
                MEMORY,
                _IEEE_MEM_HIGH + "; C95.1-2005 had 100 W/m2 above 3 GHz for the "
                "upper tier: 50 is the stricter reading",
            ),
        )
    else:
        table = "Table 7"
        rows = (
            _row(
                0.1 * _MHZ,
                1.34 * _MHZ,
                "0.1-1.34 MHz",
                table,
                "1000",
                "614",
                "16.3/fM",
                MEMORY,
                _IEEE_MEM,
                note="printed S pair (S_E, S_H) = (1000, 100000/fM^2); "
                "the E-equivalent S_E is held",
            ),
            _row(
                1.34 * _MHZ,
                30 * _MHZ,
                "1.34-30 MHz",
                table,
                "1800/fM^2",
                "823.8/fM",
                "16.3/fM",
                MEMORY,
                _IEEE_MEM,
                note="printed S pair (1800/fM^2, 100000/fM^2); S_E held",
            ),
            _row(
                30 * _MHZ,
                100 * _MHZ,
                "30-100 MHz",
                table,
                "2",
                "27.5",
                "158.3/fM^1.668",
                MEMORY,
                _IEEE_MEM,
                note="printed S pair (2, 9400000/fM^3.336); S_E held",
            ),
            _row(
                100 * _MHZ,
                400 * _MHZ,
                "100-400 MHz",
                table,
                "2",
                "27.5",
                "0.0729",
                MEMORY,
                _IEEE_MEM,
            ),
            _row(
                400 * _MHZ,
                2000 * _MHZ,
                "400-2000 MHz",
                table,
                "fM/200",
                None,
                None,
                MEMORY,
                _IEEE_MEM_HIGH,
            ),
            _row(
                2000 * _MHZ,
                300000 * _MHZ,
                "2000-300000 MHz",
                table,
                "10",
                None,
                None,
                MEMORY,
                _IEEE_MEM_HIGH,
            ),
        )
    env = (
        "persons permitted in restricted environments"
        if restricted
        else ("persons in unrestricted environments")
    )
    return Limit(
        id=f"ieee-c95.1-2019/{'restricted' if restricted else 'unrestricted'}",
        title=f"IEEE C95.1-2019 whole-body exposure reference levels (ERL), {env}",
        document="IEEE Std C95.1, Standard for Safety Levels with Respect to Human "
        "Exposure to Electric, Magnetic, and Electromagnetic Fields, 0 Hz to 300 GHz",
        edition="2019 (published 4 Oct 2019)",
        tier="whole-body",
        population=population,
        averaging_time_s=1800.0,
        averaging_tag=MEMORY,
        averaging_reason="30 min recalled for whole-body ERLs of both tiers, not verified "
        "(some summaries give 6 min for the restricted tier; the shorter window is "
        "stricter for sources on for less than the window)",
        bands=rows,
        notes=(
            "Every IEEE value here is MEMORY: the 2019 ERL tables were not available in "
            "the reference library (only the title, scope and DRL/ERL terminology were "
            "FOUND, standards.ieee.org and the ICES notice).",
            "At 2-300 GHz the recalled values equal ICNIRP 2020 whole-body (10 / 50 "
            "W/m2) and the FCC MPEs; below 2 GHz they equal ICNIRP fM/200 / fM/40, "
            "while FCC uses f/1500 / f/300 from 300 to 1500 MHz.",
            "Rows printing a pair of power densities (E- and H-equivalent) hold the "
            "E-equivalent; the quotient also checks E and H directly.",
            "Local exposure below 6 GHz is governed by a peak-spatial SAR DRL (2 / 10 W/kg "
            "over 10 g, MEMORY), not by an incident power-density ERL; not held here.",
        ),
        source="IEEE Std C95.1-2019",
        reference=_IEEE_REF,
    )


# ---- FCC 47 CFR 1.1310 -------------------------------------------------------
_FCC_REF = (
    "47 CFR 1.1310 Radiofrequency radiation exposure limits, Table 1 (Limits for Maximum "
    "Permissible Exposure), current eCFR text as amended 85 FR 18146 (1 Apr 2020)"
)
_FCC_FOUND = (
    "FOUND: 47 CFR 1.1310 Table 1 rows at http://www.emclabinfo.com/emc_calc/fcclim.htm "
    "and the rule text (editions 1997-2009) at http://hallikainen.org/org/FCC/FccRules/"
    "2009/1/1310; current (a)-(d) text at https://lawserver.com/law/country/us/cfr/"
    "47_cfr_1-1310 (no change to the values seen)"
)


def _fcc(population: str) -> Limit:
    occ = population == "occupational"
    t1 = "Table 1"
    pw = "power density in parentheses: plane-wave-equivalent"
    if occ:
        rows = (
            _row(
                0.3 * _MHZ,
                3.0 * _MHZ,
                "0.3-3.0 MHz",
                t1,
                "100",
                "614",
                "1.63",
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
                note="*(100) " + pw,
            ),
            _row(
                3.0 * _MHZ,
                30 * _MHZ,
                "3.0-30 MHz",
                t1,
                "900/f^2",
                "1842/f",
                "4.89/f",
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
                note="*(900/f^2) " + pw,
            ),
            _row(
                30 * _MHZ,
                300 * _MHZ,
                "30-300 MHz",
                t1,
                "1.0",
                "61.4",
                "0.163",
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
            ),
            _row(
                300 * _MHZ,
                1500 * _MHZ,
                "300-1,500 MHz",
                t1,
                "f/300",
                None,
                None,
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
            ),
            _row(
                1500 * _MHZ,
                100000 * _MHZ,
                "1,500-100,000 MHz",
                t1,
                "5",
                None,
                None,
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
            ),
        )
    else:
        rows = (
            _row(
                0.3 * _MHZ,
                1.34 * _MHZ,
                "0.3-1.34 MHz",
                t1,
                "100",
                "614",
                "1.63",
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
                note="*(100) " + pw,
            ),
            _row(
                1.34 * _MHZ,
                30 * _MHZ,
                "1.34-30 MHz",
                t1,
                "180/f^2",
                "824/f",
                "2.19/f",
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
                note="*(180/f^2) " + pw,
            ),
            _row(
                30 * _MHZ,
                300 * _MHZ,
                "30-300 MHz",
                t1,
                "0.2",
                "27.5",
                "0.073",
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
            ),
            _row(
                300 * _MHZ,
                1500 * _MHZ,
                "300-1,500 MHz",
                t1,
                "f/1500",
                None,
                None,
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
            ),
            _row(
                1500 * _MHZ,
                100000 * _MHZ,
                "1,500-100,000 MHz",
                t1,
                "1.0",
                None,
                None,
                FOUND,
                _FCC_FOUND,
                unit="mW/cm^2",
            ),
        )
    return Limit(
        id=f"fcc-1.1310/{'occupational' if occ else 'general-population'}",
        title="FCC maximum permissible exposure (MPE), "
        + ("occupational/controlled" if occ else "general population/uncontrolled"),
        document="47 CFR 1.1310 Radiofrequency radiation exposure limits",
        edition="eCFR current text (Table 1 to paragraph (e)(1)); values unchanged since "
        "the 1996 Report and Order FCC 96-326",
        tier="whole-body",
        population=population,
        averaging_time_s=360.0 if occ else 1800.0,
        averaging_tag=FOUND,
        averaging_reason=("6 min" if occ else "30 min")
        + ", Table 1 averaging-time column (FOUND, emclabinfo copy of Table 1); the SAR "
        "paragraphs (b), (c) give the same 6 / 30 min (lawserver copy)",
        bands=rows,
        notes=(
            "Averaging: occupational 6 min, general population 30 min (Table 1). ICNIRP "
            "2020 whole-body uses 30 min for both tiers.",
            "MPEs are derived from whole-body SAR and may replace it from 300 kHz to "
            "6 GHz (1.1310(d)(2)); portable devices (2.1093) must use SAR.",
            "Table 1 prints power density in mW/cm2 (1 mW/cm2 = 10 W/m2) and f in MHz; "
            "E and H are printed only below 300 MHz.",
            "The table prints no inclusivity at the band edges; at a shared edge the more "
            "restrictive row is used.",
            "300-1500 MHz: f/1500 (public) and f/300 (occupational) are higher than "
            "ICNIRP/IEEE fM/200, fM/40 in 400-1500 MHz; equal above 2 GHz.",
        ),
        source="47 CFR 1.1310",
        reference=_FCC_REF,
    )


# ---- Health Canada Safety Code 6 (2015) ----------------------------------------
_SC6_REF = (
    "Health Canada (2015) Safety Code 6: Limits of Human Exposure to Radiofrequency "
    "Electromagnetic Energy in the Frequency Range from 3 kHz to 300 GHz. "
    "Cat. H129-48/2015E-PDF, ISBN 978-0-660-02466-0"
)
_SC6_MEM = (
    "MEMORY: Tables 5/6 were not found in a copy; recalled. E, H and S of each row agree "
    "with the plane-wave impedance (E^2/eta0 = S within 0.3 %) and adjacent rows meet "
    "without a step, which a misremembered coefficient would break"
)
_SC6_UNC_S = (
    "MEMORY, corroborated: Mazar (EMC Europe 2016, https://studylib.net/doc/18695301) "
    "'at 1,000 MHz the allowed PD levels (W/m2) are ... 2.94 in Canada' = "
    "0.02619*1000^0.6834 = 2.940; ISED RSS-102 exemption '1.31 x 10-2 f^0.6834 W ... where "
    "f is in MHz' (https://www.emc.wiki/thread-4335-1-1.html) = this S times 4*pi*(0.2 m)^2, "
    "which confirms the exponent and that f is in MHz"
)
_SC6_AVG_HIGH = "616000/f^1.2"


def _sc6(population: str) -> Limit:
    controlled = population == "occupational"
    table = "Table 6" if controlled else "Table 5"
    if controlled:
        rows = (
            _row(10 * _MHZ, 20 * _MHZ, "10-20 MHz", table, "10", "61.4", "0.163", MEMORY, _SC6_MEM),
            _row(
                20 * _MHZ,
                48 * _MHZ,
                "20-48 MHz",
                table,
                "44.72/f^0.5",
                "129.8/f^0.25",
                "0.3444/f^0.25",
                MEMORY,
                _SC6_MEM,
            ),
            _row(
                48 * _MHZ,
                100 * _MHZ,
                "48-100 MHz",
                table,
                "6.455",
                "49.33",
                "0.1309",
                MEMORY,
                _SC6_MEM,
            ),
            _row(
                100 * _MHZ,
                6000 * _MHZ,
                "100-6000 MHz",
                table,
                "0.6455*f^0.5",
                "15.60*f^0.25",
                "0.04138*f^0.25",
                MEMORY,
                _SC6_MEM + "; E was once recalled as 15.06 and rejected by these checks",
            ),
            _row(
                6000 * _MHZ,
                15000 * _MHZ,
                "6000-15000 MHz",
                table,
                "50",
                "137",
                "0.364",
                MEMORY,
                _SC6_MEM,
            ),
            _row(
                15000 * _MHZ,
                150000 * _MHZ,
                "15000-150000 MHz",
                table,
                "50",
                "137",
                "0.364",
                MEMORY,
                _SC6_MEM,
                averaging_min=_SC6_AVG_HIGH,
                averaging_tag=MEMORY,
            ),
            _row(
                150000 * _MHZ,
                300000 * _MHZ,
                "150000-300000 MHz",
                table,
                "3.33e-4*f",
                "0.354*f^0.5",
                "9.40e-4*f^0.5",
                MEMORY,
                _SC6_MEM,
                averaging_min=_SC6_AVG_HIGH,
                averaging_tag=MEMORY,
            ),
        )
    else:
        rows = (
            _row(
                10 * _MHZ, 20 * _MHZ, "10-20 MHz", table, "2", "27.46", "0.0728", MEMORY, _SC6_MEM
            ),
            _row(
                20 * _MHZ,
                48 * _MHZ,
                "20-48 MHz",
                table,
                "8.944/f^0.5",
                "58.07/f^0.25",
                "0.1540/f^0.25",
                MEMORY,
                _SC6_MEM,
            ),
            _row(
                48 * _MHZ,
                300 * _MHZ,
                "48-300 MHz",
                table,
                "1.291",
                "22.06",
                "0.05852",
                MEMORY,
                _SC6_MEM,
            ),
            _row(
                300 * _MHZ,
                6000 * _MHZ,
                "300-6000 MHz",
                table,
                "0.02619*f^0.6834",
                "3.142*f^0.3417",
                "0.008335*f^0.3417",
                MEMORY,
                _SC6_UNC_S + ". " + _SC6_MEM,
            ),
            _row(
                6000 * _MHZ,
                15000 * _MHZ,
                "6000-15000 MHz",
                table,
                "10",
                "61.4",
                "0.163",
                MEMORY,
                _SC6_MEM + "; 10 W/m2 above 6 GHz also matches the RSS-102 5 W "
                "e.i.r.p. exemption at 20 cm (5/(4*pi*0.04) = 9.95 W/m2, FOUND)",
            ),
            _row(
                15000 * _MHZ,
                150000 * _MHZ,
                "15000-150000 MHz",
                table,
                "10",
                "61.4",
                "0.163",
                MEMORY,
                _SC6_MEM,
                averaging_min=_SC6_AVG_HIGH,
                averaging_tag=MEMORY,
            ),
            _row(
                150000 * _MHZ,
                300000 * _MHZ,
                "150000-300000 MHz",
                table,
                "6.67e-5*f",
                "0.158*f^0.5",
                "4.21e-4*f^0.5",
                MEMORY,
                _SC6_MEM,
                averaging_min=_SC6_AVG_HIGH,
                averaging_tag=MEMORY,
            ),
        )
    env = "controlled environments" if controlled else "uncontrolled environments"
    return Limit(
        id=f"sc6-2015/{'controlled' if controlled else 'uncontrolled'}",
        title=f"Health Canada Safety Code 6 reference levels, {env}",
        document="Safety Code 6: Limits of Human Exposure to Radiofrequency "
        "Electromagnetic Energy in the Frequency Range from 3 kHz to 300 GHz",
        edition="2015 (June 2015, replaces SC6 2009)",
        tier="whole-body",
        population=population,
        averaging_time_s=360.0,
        averaging_tag=MEMORY,
        averaging_reason="6 min from 10 MHz to 15 GHz; above 15 GHz 616000/f^1.2 min "
        "(f in MHz; 6.0 min at 15 GHz, so continuous), held per row. Recalled, not "
        "verified",
        bands=rows,
        notes=(
            "f is in MHz in Tables 5 and 6 (not fG): the RSS-102 exemption formula "
            "1.31e-2 f^0.6834 W 'where f is in MHz' (FOUND) is S x 4*pi*(20 cm)^2.",
            "The thermal reference levels start at 10 MHz; below 10 MHz SC6 sets "
            "nerve-stimulation levels (instantaneous E and H, other tables) not held here.",
            "Averaging: 6 min, against 30 min for ICNIRP 2020 whole-body, IEEE 2019 and "
            "FCC general population.",
            (
                "Controlled 0.6455*f^0.5 gives 31.95 W/m2 at 2.45 GHz, below the 50 W/m2 "
                "of ICNIRP / IEEE / FCC occupational; it reaches 50 W/m2 only at 6 GHz."
                if controlled
                else "Uncontrolled 0.02619*f^0.6834 gives 5.42 W/m2 at 2.45 GHz, the most "
                "restrictive public limit here (ICNIRP, IEEE, FCC: 10 W/m2); the keep-out "
                "radius scales as 1/sqrt(S), about 1.36x larger."
            ),
            "The table prints no inclusivity at band edges; at a shared edge the more "
            "restrictive row is used (the rows are continuous there anyway).",
        ),
        source="Health Canada Safety Code 6 (2015)",
        reference=_SC6_REF,
    )


# ---- FDA 21 CFR 1030.10 ------------------------------------------------------------
_FDA_REF = (
    "21 CFR 1030.10 Microwave ovens, (b) definitions and (c)(1) power density limit; "
    "FDA/BRH Procedures for Field Testing Microwave Ovens, HEW Publication (FDA) 77-8037 "
    "(1977)"
)
_FDA_WHERE = (
    "FOUND: (c)(1) quoted 'shall not exceed 1 milliwatt per square centimeter at any "
    "point 5 centimeters or more from the external surface of the oven, measured prior "
    "to acquisition by a purchaser, and, thereafter, 5 milliwatts per square centimeter' "
    "(https://experts123.com/q/is-this-a-cause-for-concern-for-the-pregnant-worker-is-"
    "there-a-maximum-allowable-limit-for-commercial-microwave-oven-radiation.html) and "
    "FDA HEW (FDA) 77-8037 (repository henry-1981/Cowork-RA, aria/knowledge/fda/"
    "03-guidance/538_procedures_for_field_testing_microwave_ovens.md); band from the "
    "definition 'ranging from 890 megahertz to 6,000 megahertz' (FOUND secondary, Oregon "
    "OAR 333-112-0005 which mirrors 1030.10(b), https://oregon.public.law/rules/"
    "oar_333-112-0005)"
)


def _fda(stage: str) -> Limit:
    before = stage == "before-purchase"
    value = "1" if before else "5"
    rows = (
        _row(
            890 * _MHZ,
            6000 * _MHZ,
            "890-6,000 MHz (oven definition, (b))",
            "paragraph (c)(1)",
            value,
            None,
            None,
            FOUND,
            _FDA_WHERE,
            unit="mW/cm^2",
            note="E, H: the standard limits only the equivalent plane-wave power density "
            "(E_rms^2/377 ohm as the instrument reads it)",
        ),
    )
    return Limit(
        id=f"fda-1030.10/{stage}",
        title="FDA microwave-oven leakage limit, "
        + ("before acquisition by a purchaser" if before else "thereafter (in service)")
        + ", at 5 cm or more from the external surface",
        document="21 CFR 1030.10 Performance standard for microwave and radio frequency "
        "emitting products: microwave ovens",
        edition="current CFR text (standard in force since 6 Oct 1971)",
        tier="product-emission",
        population="general-public",
        averaging_time_s=None,
        averaging_tag=FOUND,
        averaging_reason="none: (c)(1) limits the reading of an instrument that must "
        "reach 90 % of its steady reading within 3 s (FOUND secondary, Oregon OAR "
        "333-112-0020 mirroring 1030.10(d)), with the oven at full power, not a time "
        "average; the limit applies at every instant of operation",
        bands=rows,
        notes=(
            "A product emission limit, not an exposure limit: it bounds leakage 5 cm or "
            "more from any external surface (including door, handles, latches, knobs) of "
            "an oven with a 275 mL water load (FOUND, FDA 77-8037), not the body-averaged "
            "exposure of a person.",
            (
                "1 mW/cm2 = 10 W/m2 before purchase equals the ICNIRP/FCC public whole-body "
                "value numerically, but it is assessed at 5 cm, not over the body."
                if before
                else "5 mW/cm2 = 50 W/m2 in service is 9.2x the SC6 uncontrolled limit at "
                "2.45 GHz (5.42 W/m2)."
            ),
            "No averaging time: a duty-cycled oven is judged on the reading while it "
            "radiates, so use the peak (while radiating) power density against it.",
        ),
        source="21 CFR 1030.10",
        reference=_FDA_REF,
    )


_LIMITS: tuple[Limit, ...] = (
    _icnirp_whole_body("general-public"),
    _icnirp_whole_body("occupational"),
    _icnirp_local("general-public"),
    _icnirp_local("occupational"),
    _ieee("general-public"),
    _ieee("occupational"),
    _fcc("general-public"),
    _fcc("occupational"),
    _sc6("general-public"),
    _sc6("occupational"),
    _fda("before-purchase"),
    _fda("in-service"),
)

#: The contract's limit ids, in contract order.
LIMIT_IDS: tuple[str, ...] = tuple(limit.id for limit in _LIMITS)
_BY_ID = {limit.id: limit for limit in _LIMITS}


def _self_check() -> None:
    """Refuse to import with malformed data (bad formula, tag, unit or tier)."""
    for limit in _LIMITS:
        assert limit.tier in TIERS and limit.population in POPULATIONS, limit.id
        assert limit.averaging_tag in TAGS and limit.averaging_reason, limit.id
        for band in limit.bands:
            assert band.low_hz <= band.high_hz, (limit.id, band.printed_range)
            assert band.power_density_unit in POWER_DENSITY_UNITS, limit.id
            assert {band.s_tag, band.e_tag, band.h_tag} <= set(TAGS), limit.id
            assert any(x is not None for x in (band.power_density, band.e_field, band.h_field))
            for text in (band.power_density, band.e_field, band.h_field, band.averaging_min):
                if text is not None:
                    _parse(text)


_self_check()


# ------------------------------------------------------------------ public API
def get_limit(limit_id: str) -> Limit:
    """The limit with a contract id.

    Parameters
    ----------
    limit_id : str
        A contract limit id, e.g. ``"icnirp-2020/general-public"``.

    Returns
    -------
    Limit

    Raises
    ------
    LimitError
        For an unknown id, naming it, the closest known id and all known ids.
    """
    if isinstance(limit_id, str) and limit_id in _BY_ID:
        return _BY_ID[limit_id]
    word = limit_id if isinstance(limit_id, str) else repr(limit_id)
    raise LimitError(
        f"unknown limit id {word!r}"
        + (suggest(word, LIMIT_IDS) if isinstance(limit_id, str) else "")
        + f"; known ids: {', '.join(LIMIT_IDS)}"
    )


def all_limits() -> tuple[Limit, ...]:
    """Every limit, in contract order."""
    return _LIMITS


def values_at(
    frequency_hz: float, ids: Iterable[str] | None = None
) -> tuple[list[LimitValue], list[str]]:
    """Limits evaluated at one frequency.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    ids : iterable of str, optional
        Limit ids (default: all, in contract order).

    Returns
    -------
    covered : list of LimitValue
        The limits whose tables cover the frequency, in the order asked.
    not_covering : list of str
        The ids whose tables do not cover it.

    Raises
    ------
    LimitError
        For an unknown id or a frequency that is not a finite positive number.
    """
    f = _check_frequency(frequency_hz)
    limits = [get_limit(i) for i in (LIMIT_IDS if ids is None else ids)]
    covered, not_covering = [], []
    for limit in limits:
        if limit.covers(f):
            covered.append(limit.at(f))
        else:
            not_covering.append(limit.id)
    return covered, not_covering


def _nonnegative(name: str, value: ArrayLike) -> NDArray[np.float64]:
    arr = np.asarray(value, dtype=float)
    if np.any(np.isnan(arr)) or np.any(arr < 0):
        raise ValueError(f"{name} must be >= 0 and not NaN")
    return arr


def quotient(
    limit: LimitValue,
    power_density_w_m2: ArrayLike,
    e_v_m: ArrayLike | None = None,
    h_a_m: ArrayLike | None = None,
) -> NDArray[np.float64]:
    """Exposure quotient: the largest ratio of exposure to limit.

    Parameters
    ----------
    limit : LimitValue
        The limit at the frequency of the fields.
    power_density_w_m2 : array_like
        Time-averaged plane-wave-equivalent power density [W m^-2].
    e_v_m : array_like, optional
        RMS electric field strength [V m^-1], compared where the limit gives E.
    h_a_m : array_like, optional
        RMS magnetic field strength [A m^-1], compared where the limit gives H.

    Returns
    -------
    ndarray
        ``max(S/S_lim, (E/E_lim)^2, (H/H_lim)^2)`` over the quantities the limit gives
        and the caller passes, broadcast over the inputs; >= 1 means the limit is
        reached.

    Raises
    ------
    ValueError
        If an input is negative or NaN.

    Notes
    -----
    Fields enter squared so every ratio is a ratio of powers; with a plane wave
    (E = eta0 H, S = E^2/eta0) the three ratios coincide where the table is itself
    plane-wave consistent.
    """
    q = _nonnegative("power_density_w_m2", power_density_w_m2) / limit.power_density_w_m2
    if e_v_m is not None and limit.e_v_m is not None:
        q = np.maximum(q, (_nonnegative("e_v_m", e_v_m) / limit.e_v_m) ** 2)
    if h_a_m is not None and limit.h_a_m is not None:
        q = np.maximum(q, (_nonnegative("h_a_m", h_a_m) / limit.h_a_m) ** 2)
    return np.asarray(q, dtype=float)
