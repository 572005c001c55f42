"""Published human-exposure limits and oven-leakage limits, as cited data.

Every limit the contract names (``LIMIT_IDS``) is held as the rows of its published
table, in one data file per standard (``data/limits/*.toml``, shipped with the package)
laid out like the printed table, one line per printed row: frequency band as printed,
the incident power density, electric and magnetic field expressions, the averaging time,
the table and page it comes from and a verification tag for every value.  This module
reads those files into :class:`Limit` and :class:`Band`; a file that does not read raises
:class:`LimitDataError` naming the file, the limit and the row.  Nothing is
extrapolated: a frequency outside the published table raises
:class:`~keepclear.fields.errors.LimitError`.

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
import tomllib
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from importlib import resources
from typing import Any, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import ETA0_OHM

from .arguments import CUSTOM_PREFIX, LIMIT_FILES, unknown_limit_message
from .errors import LimitError

__all__ = [
    "LIMIT_IDS",
    "Band",
    "Limit",
    "LimitDataError",
    "LimitError",
    "LimitValue",
    "all_limits",
    "custom_threshold",
    "field_quotient",
    "get_limit",
    "quotient",
    "resolve_limit",
    "values_at",
    "verification_text",
]

FOUND = "FOUND"
MEMORY = "MEMORY"
TAGS = (FOUND, MEMORY)
#: Tag of a value the user gave in the scenario file (a custom threshold).
USER = "USER"

#: What a limit protects: people (exposure limits) or equipment (device thresholds).
KINDS = ("exposure", "device")
#: What a limit is compared with: the time-averaged exposure (duty cycle applied) or the
#: field while the sources radiate (every source on, no duty-cycle averaging).
TIME_AVERAGED = "time-averaged"
WHILE_ON = "while-on"
BASES = (TIME_AVERAGED, WHILE_ON)

#: Units a printed power density may be in, with the factor to W m^-2.
POWER_DENSITY_UNITS = {"W/m^2": 1.0, "mW/cm^2": 10.0}

TIERS = ("whole-body", "local", "product-emission", "device")
POPULATIONS = ("general-public", "occupational", "equipment")

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
        if isinstance(node, ast.Name):
            return _VARIABLES[node.id](f_hz)
        raise ValueError(f"limit formula {expression!r}: {ast.dump(node)} is not allowed")

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
    page : str
        Page of the printed table, where known (empty otherwise).
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
    page: str = ""

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
    kind : str
        ``"exposure"`` (a limit for people) or ``"device"`` (a threshold for equipment).
    basis : str
        ``"time-averaged"`` (compared with the duty-cycle-averaged exposure) or
        ``"while-on"`` (compared with the fields while every source radiates).
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
    kind: str = "exposure"
    basis: str = TIME_AVERAGED

    @property
    def while_on(self) -> bool:
        """Whether the limit is compared with the fields while the sources radiate."""
        return self.basis == WHILE_ON

    def as_dict(self) -> dict[str, Any]:
        """The contract's ``limits`` JSON entry (plus kind, basis, tier, population, expression)."""
        return {
            "id": self.id,
            "power_density_w_m2": self.power_density_w_m2,
            "e_v_m": self.e_v_m,
            "h_a_m": self.h_a_m,
            "averaging_time_s": self.averaging_time_s,
            "source": self.source,
            "kind": self.kind,
            "basis": self.basis,
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
    kind : str
        ``"exposure"`` (people) or ``"device"`` (equipment: an immunity threshold).
    basis : str
        ``"time-averaged"`` or ``"while-on"``; see :class:`LimitValue`.
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
    kind: str = "exposure"
    basis: str = TIME_AVERAGED

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
            expression += (
                "; S = E^2/eta0 (its plane-wave equivalent; the threshold is the E field)"
                if self.kind == "device"
                else "; S = min(E^2/eta0, eta0*H^2) (derived: the table gives no S)"
            )
        elif self.kind == "device" and e is not None and band.e_field is not None:
            expression = (
                f"S = {band.power_density} {band.power_density_unit} (E = {e:.4g} V/m, its "
                "plane-wave equivalent; the threshold is the power density)"
            )
        formulas = " ".join(
            x for x in (band.power_density, band.e_field, band.h_field) if x is not None
        )
        variables = self.kind == "exposure" and any(c.isalpha() for c in formulas)
        legend = "; fM, f in MHz, fG in GHz" if variables else ""
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
            kind=self.kind,
            basis=self.basis,
        )


# ------------------------------------------------------------------ the tables
# The data files are LIMIT_FILES (in keepclear.fields.arguments, which the command line
# reads without numpy), in the contract's order of limit ids.
# One file per standard in ``data/limits/``, laid out like the printed table: a
# ``[document]`` table (what every limit of the file shares), a ``[text]`` table of named
# provenance sentences, and one ``[[limit]]`` per tier whose ``rows`` hold one line per
# printed row.  Problems raise :class:`LimitDataError` naming the file, the limit and the
# row, never ``assert`` (which ``python -O`` strips).

#: The columns of a ``rows`` table, in order.
ROW_COLUMNS: tuple[str, ...] = (
    "start_MHz",
    "end_MHz",
    "printed range",
    "table",
    "page",
    "S",
    "S unit",
    "S tag",
    "E",
    "E tag",
    "H",
    "H tag",
    "avg min",
    "avg tag",
    "where",
    "note",
)
_LIMIT_KEYS = {
    "id",
    "title",
    "document",
    "edition",
    "source",
    "reference",
    "tier",
    "population",
    "averaging_time_s",
    "averaging_tag",
    "averaging_reason",
    "notes",
    "rows",
    "kind",
    "basis",
}
_SHARED_KEYS = ("document", "edition", "source", "reference")
_NONE = ("", "-")


class LimitDataError(ValueError):
    """A limit data file that does not read: names the file, the limit, the row and why."""


def _edge_mhz(text: str, strict: str, where: str) -> tuple[float, bool]:
    """A band edge as printed in MHz; a leading ``>`` or ``<`` makes it exclusive."""
    inclusive = not text.startswith(strict)
    number = text[1:] if not inclusive else text
    try:
        value = float(number)
    except ValueError:
        raise LimitDataError(
            f"{where}: band edge {text!r} is not a number of MHz "
            f"(optionally preceded by {strict!r} for an open edge)"
        ) from None
    if not math.isfinite(value) or value < 0:
        raise LimitDataError(f"{where}: band edge {text!r} must be a finite number >= 0 [MHz]")
    return value * _MHZ, inclusive


def _formula(text: str, where: str, column: str) -> str | None:
    if text == "NA":
        return None
    try:
        _parse(text)
    except (SyntaxError, ValueError) as exc:
        raise LimitDataError(
            f"{where}: column {column!r}: {text!r} is not a formula ({exc})"
        ) from None
    return text


def _tag(text: str, where: str, column: str) -> str:
    if text not in TAGS:
        raise LimitDataError(f"{where}: column {column!r} must be one of {TAGS}, got {text!r}")
    return text


def _joined_text(text: str, texts: dict[str, str], where: str, column: str) -> str:
    """A ``+``-joined list of names from the file's ``[text]`` table, concatenated."""
    parts = []
    for name in (p.strip() for p in text.split("+")):
        if name not in texts:
            raise LimitDataError(
                f"{where}: column {column!r} names {name!r}, which the [text] table lacks"
            )
        parts.append(texts[name])
    return "".join(parts)


def _parse_rows(block: str, texts: dict[str, str], where: str) -> tuple[Band, ...]:
    lines = [line for line in block.splitlines() if line.strip()]
    if not lines:
        raise LimitDataError(f"{where}: 'rows' holds no header and no rows")
    header = tuple(cell.strip() for cell in lines[0].split("|"))
    if header != ROW_COLUMNS:
        raise LimitDataError(f"{where}: 'rows' header must be {' | '.join(ROW_COLUMNS)}")
    bands = []
    for number, line in enumerate(lines[1:], start=1):
        at = f"{where}, row {number}"
        cells = [cell.strip() for cell in line.split("|")]
        if len(cells) != len(ROW_COLUMNS):
            raise LimitDataError(f"{at}: {len(cells)} cells, the header names {len(ROW_COLUMNS)}")
        c = dict(zip(ROW_COLUMNS, cells, strict=True))
        low, low_inclusive = _edge_mhz(c["start_MHz"], ">", at)
        high, high_inclusive = _edge_mhz(c["end_MHz"], "<", at)
        if low > high:
            raise LimitDataError(f"{at}: the band starts above its end")
        s = _formula(c["S"], at, "S")
        e = _formula(c["E"], at, "E")
        h = _formula(c["H"], at, "H")
        if s is None and e is None and h is None:
            raise LimitDataError(f"{at}: S, E and H are all NA; a row must give one of them")
        if c["S unit"] not in POWER_DENSITY_UNITS:
            raise LimitDataError(
                f"{at}: column 'S unit' must be one of {tuple(POWER_DENSITY_UNITS)}, "
                f"got {c['S unit']!r}"
            )
        averaging = None if c["avg min"] in _NONE else _formula(c["avg min"], at, "avg min")
        averaging_tag = None if c["avg tag"] in _NONE else _tag(c["avg tag"], at, "avg tag")
        if (averaging is None) != (averaging_tag is None):
            raise LimitDataError(f"{at}: 'avg min' and 'avg tag' go together")
        if not c["printed range"] or not c["table"]:
            raise LimitDataError(f"{at}: 'printed range' and 'table' must not be empty")
        bands.append(
            Band(
                low_hz=low,
                high_hz=high,
                low_inclusive=low_inclusive,
                high_inclusive=high_inclusive,
                printed_range=c["printed range"],
                table=c["table"],
                power_density=s,
                e_field=e,
                h_field=h,
                s_tag=_tag(c["S tag"], at, "S tag"),
                e_tag=_tag(c["E tag"], at, "E tag"),
                h_tag=_tag(c["H tag"], at, "H tag"),
                where=_joined_text(c["where"], texts, at, "where"),
                power_density_unit=c["S unit"],
                averaging_min=averaging,
                averaging_tag=averaging_tag,
                note="" if c["note"] in _NONE else _joined_text(c["note"], texts, at, "note"),
                page="" if c["page"] in _NONE else c["page"],
            )
        )
    return tuple(bands)


def _text_field(entry: dict[str, Any], key: str, where: str) -> str:
    value = entry.get(key)
    if not isinstance(value, str) or not value:
        raise LimitDataError(f"{where}: {key!r} must be a non-empty string")
    return value


def limits_from_toml(text: str, name: str) -> tuple[Limit, ...]:
    """The limits of one data file.

    Parameters
    ----------
    text : str
        The file's TOML text.
    name : str
        The file name, for messages.

    Returns
    -------
    tuple of Limit
        In the order of the file.

    Raises
    ------
    LimitDataError
        Naming the file, the limit and the row, for anything that does not read.
    """
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise LimitDataError(f"{name}: not valid TOML ({exc})") from None
    unknown = set(doc) - {"document", "text", "limit"}
    if unknown:
        raise LimitDataError(f"{name}: unknown top-level key(s) {sorted(unknown)}")
    shared = doc.get("document", {})
    texts = doc.get("text", {})
    if not all(isinstance(v, str) for v in texts.values()):
        raise LimitDataError(f"{name}: every [text] entry must be a string")
    entries = doc.get("limit")
    if not isinstance(entries, list) or not entries:
        raise LimitDataError(f"{name}: no [[limit]] table")
    limits = []
    for i, raw in enumerate(entries):
        entry = {**shared, **raw}
        where = f"{name}: limit[{i}] ({entry.get('id', '?')})"
        extra = set(entry) - _LIMIT_KEYS
        if extra:
            raise LimitDataError(f"{where}: unknown key(s) {sorted(extra)}")
        tier = _text_field(entry, "tier", where)
        population = _text_field(entry, "population", where)
        if tier not in TIERS or population not in POPULATIONS:
            raise LimitDataError(
                f"{where}: tier must be one of {TIERS} and population one of {POPULATIONS}"
            )
        averaging = entry.get("averaging_time_s")
        if averaging == "none":
            averaging = None
        elif (
            isinstance(averaging, bool) or not isinstance(averaging, (int, float)) or averaging <= 0
        ):
            raise LimitDataError(f"{where}: 'averaging_time_s' must be a number > 0 or \"none\"")
        notes = entry.get("notes", [])
        if not isinstance(notes, list) or not all(isinstance(n, str) for n in notes):
            raise LimitDataError(f"{where}: 'notes' must be a list of strings")
        kind = entry.get("kind", "exposure")
        basis = entry.get("basis", TIME_AVERAGED)
        if kind not in KINDS or basis not in BASES:
            raise LimitDataError(f"{where}: kind must be one of {KINDS} and basis one of {BASES}")
        if not isinstance(entry.get("rows"), str):
            raise LimitDataError(f"{where}: 'rows' must be a multi-line string")
        limits.append(
            Limit(
                id=_text_field(entry, "id", where),
                title=_text_field(entry, "title", where),
                document=_text_field(entry, "document", where),
                edition=_text_field(entry, "edition", where),
                tier=tier,
                population=population,
                averaging_time_s=None if averaging is None else float(averaging),
                averaging_tag=_tag(entry.get("averaging_tag"), where, "averaging_tag"),
                averaging_reason=_text_field(entry, "averaging_reason", where),
                bands=_parse_rows(entry["rows"], texts, where),
                notes=tuple(notes),
                source=_text_field(entry, "source", where),
                reference=_text_field(entry, "reference", where),
                kind=kind,
                basis=basis,
            )
        )
    return tuple(limits)


def _load_tables() -> tuple[Limit, ...]:
    folder = resources.files("keepclear.fields") / "data" / "limits"
    limits: list[Limit] = []
    for name in LIMIT_FILES:
        limits.extend(limits_from_toml((folder / name).read_text(encoding="utf-8"), name))
    ids = [limit.id for limit in limits]
    twice = sorted({i for i in ids if ids.count(i) > 1})
    if twice:
        raise LimitDataError(f"limit id(s) defined twice: {twice}")
    return tuple(limits)


_LIMITS: tuple[Limit, ...] = _load_tables()

#: The contract's limit ids, in contract order.
LIMIT_IDS: tuple[str, ...] = tuple(limit.id for limit in _LIMITS)
_BY_ID = {limit.id: limit for limit in _LIMITS}


# ------------------------------------------------------------ verification in words
#: Plain names of the tagged quantities, for people.
_TAG_NAMES = {"S": "power density", "E": "E field", "H": "H field", "averaging": "averaging time"}
#: The sentence for values recalled from memory; every human-facing output uses it.
RECALLED = "value recalled, not checked against the printed standard"
#: The sentence for values read in the document or a faithful copy.
CHECKED = "checked against the published table (or a faithful copy of it)"
#: The sentence for a user threshold's values.
GIVEN = "given in the scenario file (a user threshold, not a published value)"
#: What every output says beside a device threshold.
DEVICE_NOTE = (
    "Device thresholds are about equipment, not people: they compare the RMS E field while "
    "the sources radiate (every source on, no duty-cycle averaging) with an equipment "
    "threshold (an immunity test level, or one of your own); they say nothing about human "
    "exposure."
)


def _join(words: list[str]) -> str:
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def verification_text(verification: str) -> str:
    """The verification tags of a limit value, as a plain sentence for people.

    Parameters
    ----------
    verification : str
        Tags as in :attr:`LimitValue.verification` (and the ``"verification"`` of the
        assessment JSON), e.g. ``"S MEMORY; E NA MEMORY; H NA MEMORY; averaging FOUND"``.

    Returns
    -------
    str
        E.g. ``"Power density and the absence of E and H values: value recalled, not
        checked against the printed standard. Averaging time: checked against the
        published table (or a faithful copy of it)."``  A cell the table prints as NA
        is named only when its absence was recalled.  Empty input gives ``""``.

    Raises
    ------
    ValueError
        If a part is not ``"<S|E|H|averaging> [NA] <FOUND|MEMORY>"``.
    """
    if not verification.strip():
        return ""
    found: list[str] = []
    recalled: list[str] = []
    absent_recalled: list[str] = []
    given: list[str] = []
    for part in (p.strip() for p in verification.split(";")):
        words = part.split()
        ok = len(words) in (2, 3) and words[0] in _TAG_NAMES and words[-1] in (*TAGS, USER)
        if not ok or (len(words) == 3 and words[1] != "NA"):
            raise ValueError(f"verification tag {part!r} is not '<quantity> [NA] FOUND|MEMORY'")
        if len(words) == 3:
            if words[-1] == MEMORY:
                absent_recalled.append(words[0])
            continue
        if words[-1] == USER:
            given.append(_TAG_NAMES[words[0]])
            continue
        (found if words[-1] == FOUND else recalled).append(_TAG_NAMES[words[0]])
    if absent_recalled:
        recalled.append(f"the absence of {_join(absent_recalled)} values")
    sentences = []
    if recalled:
        text = _join(recalled)
        sentences.append(f"{text[0].upper()}{text[1:]}: {RECALLED}.")
    if found:
        text = _join(found)
        sentences.append(f"{text[0].upper()}{text[1:]}: {CHECKED}.")
    if given:
        text = _join(given)
        sentences.append(f"{text[0].upper()}{text[1:]}: {GIVEN}.")
    return " ".join(sentences)


def is_recalled(verification: str) -> bool:
    """Whether any value behind a limit was recalled rather than read (a MEMORY tag)."""
    return MEMORY in verification.replace(";", " ").split()


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
    if isinstance(limit_id, str):
        raise LimitError(unknown_limit_message(limit_id, LIMIT_IDS))
    raise LimitError(f"unknown limit id {repr(limit_id)!r}; known ids: {', '.join(LIMIT_IDS)}")


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
    A device threshold (``limit.kind == "device"``) compares one quantity: ``(E/E_lim)^2``
    where the threshold is an E field (and ``e_v_m`` is passed), else ``S/S_lim``.  Which
    fields to pass (time-averaged or while radiating) follows ``limit.basis``; see
    :func:`field_quotient`.

    Fields enter squared so every ratio is a ratio of powers; with a plane wave
    (E = eta0 H, S = E^2/eta0) the three ratios coincide where the table is itself
    plane-wave consistent.
    """
    s = _nonnegative("power_density_w_m2", power_density_w_m2)
    if limit.kind == "device":
        # A device threshold is one quantity: the E field where it is given as E (the
        # immunity test level), else the power density.
        if limit.power_density_derived and e_v_m is not None and limit.e_v_m is not None:
            q = (_nonnegative("e_v_m", e_v_m) / limit.e_v_m) ** 2
            return np.asarray(q * np.ones_like(s), dtype=float)
        return np.asarray(s / limit.power_density_w_m2, dtype=float)
    q = s / limit.power_density_w_m2
    if e_v_m is not None and limit.e_v_m is not None:
        q = np.maximum(q, (_nonnegative("e_v_m", e_v_m) / limit.e_v_m) ** 2)
    if h_a_m is not None and limit.h_a_m is not None:
        q = np.maximum(q, (_nonnegative("h_a_m", h_a_m) / limit.h_a_m) ** 2)
    return np.asarray(q, dtype=float)


class FieldsOnBothBases(Protocol):
    """Fields time-averaged and while radiating, as :class:`keepclear.fields.field.FieldResult`."""

    power_density_w_m2: NDArray[np.float64]
    e_v_m: NDArray[np.float64]
    h_a_m: NDArray[np.float64]
    peak_power_density_w_m2: NDArray[np.float64]
    peak_e_v_m: NDArray[np.float64]
    peak_h_a_m: NDArray[np.float64]


def field_quotient(limit: LimitValue, fields: FieldsOnBothBases) -> NDArray[np.float64]:
    """Exposure quotient of one limit on its own basis.

    Parameters
    ----------
    limit : LimitValue
    fields : FieldsOnBothBases
        Fields at the points, time-averaged and while radiating (a ``FieldResult``).

    Returns
    -------
    ndarray
        :func:`quotient` of the time-averaged fields for a ``"time-averaged"`` limit, of
        the fields while every source radiates (no duty-cycle averaging) for a
        ``"while-on"`` limit (the device thresholds).
    """
    if limit.while_on:
        return quotient(limit, fields.peak_power_density_w_m2, fields.peak_e_v_m, fields.peak_h_a_m)
    return quotient(limit, fields.power_density_w_m2, fields.e_v_m, fields.h_a_m)


# ------------------------------------------------------------------ user thresholds


def custom_threshold(
    name: str,
    *,
    basis: str,
    e_v_m: float | None = None,
    power_density_w_m2: float | None = None,
) -> Limit:
    """A user threshold (``[[exposure.threshold]]``) as a device-kind limit.

    Parameters
    ----------
    name : str
        Its name; the id is ``"custom/" + name``.
    basis : str
        ``"while-on"`` or ``"time-averaged"``.
    e_v_m : float, optional
        RMS E field threshold [V m^-1] (give this or ``power_density_w_m2``).
    power_density_w_m2 : float, optional
        Plane-wave-equivalent power density threshold [W m^-2].

    Returns
    -------
    Limit
        Valid at every frequency.  ``e_v_m`` and ``power_density_w_m2`` of its value are
        both filled, one from the other by ``S = E^2/eta0``; the quotient compares the
        quantity given.

    Raises
    ------
    ValueError
        For an empty name, a basis not in :data:`BASES`, both or neither threshold
        given, or a threshold that is not a finite number > 0.
    """
    if not isinstance(name, str) or not name:
        raise ValueError("a threshold needs a non-empty name")
    if basis not in BASES:
        raise ValueError(f"basis must be one of {BASES}, got {basis!r}")
    if (e_v_m is None) == (power_density_w_m2 is None):
        raise ValueError("give exactly one of e_v_m and power_density_w_m2")
    value = e_v_m if e_v_m is not None else power_density_w_m2
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError(f"the threshold must be a number, got {value!r}")
    if not math.isfinite(value) or value <= 0:
        raise ValueError(f"the threshold must be a finite number > 0, got {value!r}")
    if e_v_m is not None:
        s_text, e_text = None, repr(float(e_v_m))
    else:
        s_text = repr(float(power_density_w_m2))  # type: ignore[arg-type]
        e_text = repr(math.sqrt(float(power_density_w_m2) * ETA0_OHM))  # type: ignore[arg-type]
    band = Band(
        low_hz=0.0,
        high_hz=math.inf,
        low_inclusive=False,
        high_inclusive=False,
        printed_range="every frequency",
        table="[[exposure.threshold]]",
        power_density=s_text,
        e_field=e_text,
        h_field=None,
        s_tag=USER,
        e_tag=USER,
        h_tag=USER,
        where="given in the scenario file",
    )
    on = "while the sources radiate" if basis == WHILE_ON else "time-averaged"
    return Limit(
        id=CUSTOM_PREFIX + name,
        title=f"User threshold '{name}' ({on})",
        document="the scenario file",
        edition="-",
        tier="device",
        population="equipment",
        averaging_time_s=None,
        averaging_tag=USER,
        averaging_reason="a user threshold has no averaging time; basis: " + basis,
        bands=(band,),
        notes=(DEVICE_NOTE,) if basis == WHILE_ON else (),
        source="user threshold",
        reference="the scenario file, [[exposure.threshold]]",
        kind="device",
        basis=basis,
    )


def resolve_limit(limit_id: str, thresholds: Iterable[Limit] = ()) -> Limit:
    """The limit with an id, among the user thresholds first, then the published ones.

    Parameters
    ----------
    limit_id : str
        A limit id (``"icnirp-2020/general-public"``, ``"custom/router"``).
    thresholds : iterable of Limit
        The scenario's user thresholds.

    Raises
    ------
    LimitError
        For an unknown id, naming it, the closest known id and all known ids.
    """
    own = {limit.id: limit for limit in thresholds}
    if isinstance(limit_id, str) and limit_id in own:
        return own[limit_id]
    if isinstance(limit_id, str) and limit_id not in _BY_ID:
        known = (*LIMIT_IDS, *own)
        raise LimitError(unknown_limit_message(limit_id, known))
    return get_limit(limit_id)
