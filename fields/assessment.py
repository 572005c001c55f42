"""The orchestrator: each job of the tool as named steps with typed results.

Every public job (``limits``, ``probe``, ``keepout``, ``map``, ``compare``, ``assess``)
is a function here that takes a validated :class:`~keepclear.fields.scenario.Scenario`
and returns a frozen result whose ``to_dict()`` is the contract's JSON object of the
matching command (``schema_version`` 1).  The full assessment is a short sequence of
steps, each a function with typed inputs and outputs::

    keepout -> maps -> zones -> places -> options -> report

and :func:`assess` composes them.  Writing files is a separate consumer of the typed
result (:func:`write_assessment`); the command line (:mod:`keepclear.fields.cli`) only
parses, calls these functions and prints.
"""

from __future__ import annotations

import contextlib
import functools
import math
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas import memo
from keepclear.antennas.base import ModelRangeWarning

from . import limits as limits_mod
from . import maps
from .arguments import check_grid_ranges, check_height, option_error
from .cautions import CAUTION_TEXT
from .compare import Comparison, start_option_searches
from .errors import InputError, LimitError, ResourceError
from .field import FieldResult, evaluate, prepare
from .keepout import KeepoutResult, keepout_distances
from .outputs import (  # noqa: F401 - re-exported: the output folders' former home
    discard_staging,
    publish_output_folder,
    stage_output_folder,
)
from .scenario import Scenario
from .workers import Pending, run_each

SCHEMA_VERSION = 1

#: ``progress(label)`` gives a ``(done, total)`` callback for a stage, or None.
ProgressFactory = Callable[[str], Any]


# ------------------------------------------------------------------ argument checks
def check_grid(
    half_extent_m: float | None = None, step_m: float | None = None, pixels: int | None = None
) -> None:
    """Refuse grid settings out of range, or a grid too large, before any computation.

    Raises
    ------
    InputError
        Naming ``--extent-m``, ``--step-m`` or ``--pixels``.
    """
    check_grid_ranges(half_extent_m, step_m, pixels)
    if pixels is not None:
        n, option = pixels, "--pixels"
    elif step_m is not None and half_extent_m is not None:
        n, option = 2 * int(np.ceil(half_extent_m / step_m - 1e-9)) + 1, "--step-m"
    else:
        return
    need = maps.grid_bytes(n * n, GRID_CHECK_LIMITS)
    if n > maps.MAX_PIXELS_PER_SIDE:
        raise ResourceError(
            f"a {n} x {n} map has more than the {maps.MAX_PIXELS_PER_SIDE} samples a side "
            f"allowed (and would need about {need / 2**20:.0f} MiB); use a coarser {option} "
            "or a smaller --extent-m",
            "argument",
            option,
        )
    if need > maps.MAX_GRID_BYTES:
        largest = largest_square_map(GRID_CHECK_LIMITS)
        raise ResourceError(
            f"a {n} x {n} map needs about {need / 2**20:.0f} MiB, more than the "
            f"{maps.MAX_GRID_BYTES / 2**20:.0f} MiB allowed (at most {largest} x {largest} "
            f"samples with {GRID_CHECK_LIMITS} limits); use a coarser {option} or a "
            "smaller --extent-m",
            "argument",
            option,
        )


#: Limits assumed when a grid is checked before the limits are known.
GRID_CHECK_LIMITS = 4


def largest_square_map(n_limits: int) -> int:
    """The most samples a side of a square map within the memory bound [count]."""
    n = int(math.isqrt(maps.MAX_GRID_BYTES // max(1, maps.grid_bytes(1, n_limits))))
    while n > 3 and maps.grid_bytes(n * n, n_limits) > maps.MAX_GRID_BYTES:
        n -= 1
    return min(n, maps.MAX_PIXELS_PER_SIDE)


def select_limits(scenario: Scenario, limit_ids: Sequence[str] | None) -> tuple[str, ...]:
    """The limit ids to assess: the scenario's, or these, each checked at its frequency.

    An oven-leakage id (``fda-1030.10/*``) given here for a scenario without an
    ``[enclosure]`` draws the same warning as one in the scenario's own limits
    (:func:`keepclear.fields.plausibility.warn_limits`).

    Raises
    ------
    InputError
        Naming ``--limit`` for an unknown id or one that does not cover the frequency.
    """
    if not limit_ids:
        return tuple(scenario.limit_ids)
    seen: list[str] = []
    for limit_id in limit_ids:
        try:
            scenario.limit_value(limit_id)
        except LimitError as exc:
            raise InputError(exc.message, "argument", "--limit") from None
        if limit_id not in seen:
            seen.append(limit_id)
    from .plausibility import warn_limits

    warn_limits(scenario, seen)
    return tuple(seen)


def select_option(scenario: Scenario, option: str | None) -> Scenario:
    """The scenario of the named ``[[option]]`` (or the scenario itself for None)."""
    if option is None:
        return scenario
    for o in scenario.options:
        if o.name == option:
            return o.scenario
    raise option_error(option, [o.name for o in scenario.options])


#: A sweep given to the API: ``"KEY=V1,V2,..."`` as on the command line, or ``(key, values)``.
SweepSpec = str | tuple[str, Sequence[Any]]


def with_sweeps(scenario: Scenario, sweeps: Sequence[SweepSpec] | None) -> Scenario:
    """The scenario with the options of each sweep added (``--sweep KEY=V1,V2,...``).

    Parameters
    ----------
    scenario : Scenario
    sweeps : sequence, optional
        Each a ``"KEY=V1,V2,..."`` text (:func:`keepclear.fields.sweep.parse_sweep_argument`)
        or a ``(key, values)`` pair; the key is a sweep's dotted path (``source.feed.power_w``).

    Raises
    ------
    InputError
        Naming ``--sweep``: a text that is not ``KEY=V1,...``, a key that names nothing, a
        value that makes an impossible scenario, or an option name already taken.
    """
    if not sweeps:
        return scenario
    from .plausibility import warn_implausible
    from .scenario import with_sweep
    from .sweep import parse_sweep_argument

    given = len(scenario.options)
    for spec in sweeps:
        if isinstance(spec, str):
            key, values = parse_sweep_argument(spec)
        else:
            key, values = spec[0], list(spec[1])
        scenario = with_sweep(scenario, key, list(values))
    # The file's options were checked when it was loaded; the swept values are new.
    warn_implausible(scenario, scenario.options[given:], with_base=False)
    return scenario


def _callback(progress: ProgressFactory | None, label: str) -> Any:
    return progress(label) if progress is not None else None


# ------------------------------------------------------------------ limits
@dataclass(frozen=True)
class LimitsResult:
    """Every known limit at one frequency (``keepclear limits``).

    Attributes
    ----------
    frequency_hz : float
        Frequency of evaluation [Hz].
    limits : tuple of LimitValue
        The limits that cover the frequency, in the contract's order (power density in
        [W m^-2], field strengths in [V m^-1] and [A m^-1], averaging time in [s]).
    not_covering_frequency : tuple of str
        Ids of the limits whose published range does not include the frequency.
    """

    frequency_hz: float
    limits: tuple[limits_mod.LimitValue, ...]
    not_covering_frequency: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        """The ``limits --json`` object."""
        return {
            "schema_version": SCHEMA_VERSION,
            "frequency_hz": self.frequency_hz,
            "limits": [v.as_dict() for v in self.limits],
            "not_covering_frequency": list(self.not_covering_frequency),
            "caution": CAUTION_TEXT,
        }


def limits(frequency_hz: float = 2.45e9) -> LimitsResult:
    """Every known exposure limit at a frequency [Hz], with its source."""
    if not (isinstance(frequency_hz, int | float) and math.isfinite(frequency_hz)):
        raise InputError("must be a finite frequency in Hz", "argument", "--frequency-hz")
    covered, uncovered = limits_mod.values_at(frequency_hz)
    return LimitsResult(frequency_hz, tuple(covered), tuple(uncovered))


def limits_data(frequency_hz: float) -> dict[str, Any]:
    """Every known limit at a frequency (contract ``limits`` JSON)."""
    return limits(frequency_hz).to_dict()


# ------------------------------------------------------------------- probe
@dataclass(frozen=True, eq=False)
class ProbeResult:
    """Fields and exposure quotients at points (``keepclear probe``).

    Attributes
    ----------
    scenario : Scenario
        The scenario probed (its limits are the quotients' limits).
    points_m : ndarray, shape (N, 3)
        The points, in scenario coordinates [m].
    fields : FieldResult
        Time-averaged RMS ``e_v_m`` [V m^-1] and ``h_a_m`` [A m^-1], time-averaged
        ``power_density_w_m2`` [W m^-2], and the same while radiating (``peak_*``).
    names : tuple of str, optional
        The names of the scenario's ``[[point]]`` places, when those are what was probed.
    """

    scenario: Scenario
    points_m: NDArray[np.float64]
    fields: FieldResult
    names: tuple[str, ...] | None = None

    @property
    def frequency_hz(self) -> float:
        """Operating frequency [Hz]."""
        return self.scenario.frequency_hz

    @property
    def e_v_m(self) -> NDArray[np.float64]:
        """Time-averaged RMS electric field strength [V m^-1]."""
        return self.fields.e_v_m

    @property
    def h_a_m(self) -> NDArray[np.float64]:
        """Time-averaged RMS magnetic field strength [A m^-1]."""
        return self.fields.h_a_m

    @property
    def power_density_w_m2(self) -> NDArray[np.float64]:
        """Time-averaged plane-wave-equivalent power density [W m^-2]."""
        return self.fields.power_density_w_m2

    @property
    def peak_power_density_w_m2(self) -> NDArray[np.float64]:
        """Power density while radiating [W m^-2]."""
        return self.fields.peak_power_density_w_m2

    @functools.cached_property
    def quotients(self) -> dict[str, NDArray[np.float64]]:
        """Exposure quotient per limit id, shape (N,) each (each on its basis) [1]."""
        return quotients_at(self.scenario, self.fields)

    @functools.cached_property
    def inside_source(self) -> NDArray[np.bool_]:
        """Whether each point lies inside a source or on its metal, shape (N,).

        Inside a guide, a horn or a box, or within 1 mm of a wire or a plate: not a place
        where anyone stands.  Its fields are reported as computed.
        """
        return self.scenario.inside_source(self.points_m)

    def point_dicts(self) -> list[dict[str, Any]]:
        """One JSON object a point (the ``points`` list of ``probe --json``)."""
        from .places import add_spatial_averages, allowed_seconds

        r = self.fields
        quotients = self.quotients
        out = []
        for i, p in enumerate(self.points_m):
            allowed, rules = allowed_seconds(self.scenario, quotients, i)
            entry: dict[str, Any] = {
                "position_m": [float(x) for x in p],
                "e_v_m": float(r.e_v_m[i]),
                "h_a_m": float(r.h_a_m[i]),
                "power_density_w_m2": float(r.power_density_w_m2[i]),
                "peak_power_density_w_m2": float(r.peak_power_density_w_m2[i]),
                "peak_e_v_m": float(r.peak_e_v_m[i]),
                "peak_h_a_m": float(r.peak_h_a_m[i]),
                "quotients": {k: float(q[i]) for k, q in quotients.items()},
                "allowed_s": allowed,
                "allowed_rule": {k: rules[k] for k, v in allowed.items() if v is not None},
                "inside_source": bool(self.inside_source[i]),
            }
            out.append(entry)
        if self.names is not None:
            # The scenario's named places: say which is which (an added key, "name").
            for entry, name in zip(out, self.names, strict=True):
                entry["name"] = name
            add_spatial_averages(self.scenario, out)
        return out

    def to_dict(self) -> dict[str, Any]:
        """The ``probe --json`` object."""
        from .plausibility import input_warnings

        return {
            "schema_version": SCHEMA_VERSION,
            "frequency_hz": self.scenario.frequency_hz,
            "scenario": self.scenario.name,
            "reflections": self.scenario.reflections,
            "points": self.point_dicts(),
            "warnings": input_warnings(self.scenario),
            "caution": CAUTION_TEXT,
        }


def quotients_at(scenario: Scenario, result: FieldResult) -> dict[str, NDArray[np.float64]]:
    """Exposure quotient per scenario limit, each on its basis.

    Time-averaged fields for the people's limits; the fields while every source radiates
    for the while-on limits (device thresholds), see :func:`limits.field_quotient`.
    """
    return {
        limit_id: limits_mod.field_quotient(scenario.limit_value(limit_id), result)
        for limit_id in scenario.limit_ids
    }


def probe(
    scenario: Scenario,
    points: ArrayLike | None = None,
    *,
    limits: Sequence[str] | None = None,
    option: str | None = None,
) -> ProbeResult:
    """Fields, power density and exposure quotients at points.

    Parameters
    ----------
    scenario : Scenario
    points : array_like, shape (N, 3) or (3,), optional
        Points in scenario coordinates [m]; default the scenario's named ``[[point]]``
        places (then each result carries its ``name``).
    limits : sequence of str, optional
        Limit ids for the quotients (default: the scenario's).
    option : str, optional
        Probe this ``[[option]]`` of the scenario instead of the base.

    Returns
    -------
    ProbeResult
    """
    scenario = select_option(scenario, option)
    if limits:
        scenario = scenario.with_limits(select_limits(scenario, limits))
    names = None
    if points is None:
        if not scenario.points:
            raise InputError(
                "give at least one --at X,Y,Z or a --points file (the scenario has no [[point]])",
                "argument",
                "--at",
            )
        pts = np.array([p.position_m for p in scenario.points], dtype=float)
        names = tuple(p.name for p in scenario.points)
    else:
        pts = np.asarray(points, dtype=float).reshape(-1, 3)
    _warn_behind_infinite_ground(scenario, pts)
    return ProbeResult(scenario, pts, evaluate(scenario, pts), names)


def _warn_behind_infinite_ground(scenario: Scenario, points_m: NDArray[np.float64]) -> None:
    """Warn when points lie behind a monopole's infinite ground plane (its field is 0 there).

    The ideal infinite plane passes nothing: the model's 0 behind it is not an estimate of
    a real ground, which is finite and lets field round its edges.  Said, never silent.
    """
    from keepclear.antennas.wire import Monopole  # the models are imported on first use

    for source in scenario.sources:
        radiator = source.radiator
        if not isinstance(radiator, Monopole):
            continue
        behind = int(np.count_nonzero(radiator.placement.to_local(points_m)[:, 2] < -1e-3))
        if behind:
            warnings.warn(
                f"{behind} of the {len(points_m)} points lie behind the infinite ground "
                f"plane of source {source.id!r}, where this model gives no field (0): a real "
                'ground is finite and field reaches round its edges; give ground = "plate" '
                'or "box" with ground_size_m to estimate the field there',
                ModelRangeWarning,
                stacklevel=3,
            )


def probe_data(
    scenario: Scenario, points_m: NDArray[np.float64]
) -> tuple[dict[str, Any], FieldResult]:
    """Fields and exposure quotients at points (contract ``probe`` JSON)."""
    result = probe(scenario, points_m)
    return result.to_dict(), result.fields


# ----------------------------------------------------------------- keepout
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
        **(
            {}
            if r.outside_enclosure is None
            else {
                "outside_enclosure": {
                    k: (None if v is None else (list(map(float, v)) if k == "direction" else v))
                    for k, v in r.outside_enclosure.items()
                }
            }
        ),
    }


@dataclass(frozen=True, eq=False)
class KeepoutReport:
    """Keep-out distance about the first source for each limit (``keepclear keepout``).

    Attributes
    ----------
    scenario : Scenario
        The scenario assessed (the option's, when one was chosen).
    distances : tuple of KeepoutResult
        One per limit, in order: ``distance_m`` [m] (radius of the smallest sphere about
        ``centre_m`` holding every point at or above the limit), ``direction`` (unit
        vector to the farthest such point), ``limit_w_m2`` [W m^-2], and the screening
        and uncertainty figures.
    spread : dict, optional
        With ``[uncertainty]``: ``{"spec": ..., "per_limit": {id: (median_m, p95_m)}}``, the
        Monte Carlo spread of each keep-out distance [m] (:func:`uncertainty_data`).
    """

    scenario: Scenario
    distances: tuple[KeepoutResult, ...]
    spread: dict[str, Any] | None = None

    @functools.cached_property
    def sources(self) -> list[dict[str, Any]]:
        """Each source described (:func:`keepclear.fields.describe.describe_sources`).

        Peak gain [dBi] and its direction, EIRP while on and averaged [W], far-field
        distance 2 D^2 / lambda [m].
        """
        from .describe import describe_sources

        return describe_sources(self.scenario)

    @property
    def average_power_w(self) -> float:
        """Sum of the sources' time-averaged powers [W]."""
        return self.scenario.average_power_w

    @property
    def centre_m(self) -> NDArray[np.float64]:
        """The keep-out centre, the first source's reference point [m]."""
        return self.scenario.centre_m

    def to_dict(self) -> dict[str, Any]:
        """The ``keepout --json`` object."""
        from .plausibility import input_warnings

        s = self.scenario
        data = {
            "schema_version": SCHEMA_VERSION,
            "frequency_hz": s.frequency_hz,
            "scenario": s.name,
            "average_power_w": s.average_power_w,
            "centre_m": [float(x) for x in s.centre_m],
            "reflections": s.reflections,
            "keepout": [keepout_entry(r) for r in self.distances],
            "sources": self.sources,
            "warnings": input_warnings(s, [r.limit_id for r in self.distances]),
            "caution": CAUTION_TEXT,
        }
        _add_spread(data["keepout"], self.spread)
        if self.spread is not None:
            data["uncertainty"] = self.spread["spec"]
        if s.enclosure is not None:
            data["enclosure"] = self.enclosure
        return data

    @functools.cached_property
    def enclosure(self) -> dict[str, Any] | None:
        """The enclosure's leakage figures (:func:`keepclear.fields.leakage.enclosure_leakage`).

        The highest density 5 cm outside its faces [W m^-2] against each oven-leakage limit
        assessed, the inside density [W m^-2], Q and each opening's leaked power [W], with
        the enclosed sources radiating; None without an enclosure.
        """
        from .leakage import enclosure_leakage

        return enclosure_leakage(self.scenario, [r.limit_id for r in self.distances])


def uncertainty_data(scenario: Scenario, results: list[KeepoutResult]) -> dict[str, Any] | None:
    """The Monte Carlo spread of each keep-out (None without ``[uncertainty]``).

    Returns ``{"spec": ..., "per_limit": {id: (median_m, p95_m)}}``.
    """
    spec = scenario.uncertainty
    if spec is None:
        return None
    from .field import radiating_terms
    from .uncertainty import gain_sigma_db, keepout_spread

    spreads = keepout_spread(scenario, spec, results)
    return {
        "spec": {
            **spec.as_dict(),
            "gain_db_used": [gain_sigma_db(spec, t) for t in radiating_terms(scenario)],
            "method": "seeded Monte Carlo (PCG64), fields re-weighted per sample",
        },
        "per_limit": {s.limit_id: (s.median_m, s.p95_m) for s in spreads},
    }


def _add_spread(entries: list[dict[str, Any]], spread: dict[str, Any] | None) -> None:
    if spread is None:
        return
    for entry in entries:
        median, p95 = spread["per_limit"][entry["limit"]]
        entry["distance_median_m"] = median
        entry["distance_p95_m"] = p95


def keepout(
    scenario: Scenario,
    limits: Sequence[str] | None = None,
    option: str | None = None,
    *,
    progress: ProgressFactory | None = None,
) -> KeepoutReport:
    """Keep-out distance about the first source for each limit.

    Parameters
    ----------
    scenario : Scenario
    limits : sequence of str, optional
        Limit ids (default: the scenario's ``[exposure] limits``).
    option : str, optional
        Assess this ``[[option]]`` of the scenario instead of the base.
    progress : callable, optional
        ``progress(label)`` returns a stage callback (see :func:`maps.busy`).

    Returns
    -------
    KeepoutReport
    """
    scenario = select_option(scenario, option)
    ids = select_limits(scenario, limits)
    with maps.busy(progress, "keep-out search"):
        results = keepout_distances(scenario, ids)
    scoped = scenario if ids == tuple(scenario.limit_ids) else scenario.with_limits(ids)
    spread = uncertainty_data(scoped, results)
    return KeepoutReport(scenario, tuple(results), spread)


def keepout_data(scenario: Scenario) -> tuple[dict[str, Any], list[KeepoutResult]]:
    """Keep-out distance for each scenario limit (contract ``keepout`` JSON)."""
    report = keepout(scenario)
    return report.to_dict(), list(report.distances)


def readings_data(scenario: Scenario, readings: list[Any]) -> dict[str, Any]:
    """Survey readings against the time-averaged prediction (``readings --json``).

    Each reading's power density is compared with every scenario limit: the reading
    counts as over a limit where its quotient (the measured density against the
    limit's density) reaches one.
    """
    from .readings import compare_readings

    pts = np.array([r.position_m for r in readings])
    result = evaluate(scenario, pts)
    measured = np.array([r.power_density_w_m2 for r in readings])
    quotients = {}
    for limit_id in scenario.limit_ids:
        value = scenario.limit_value(limit_id)
        quotients[limit_id] = limits_mod.quotient(value, measured)
    body = compare_readings(readings, result.power_density_w_m2, quotients)
    return {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": scenario.frequency_hz,
        "scenario": scenario.name,
        **body,
        "compared_with": "time-averaged prediction (duty cycle applied): a survey meter "
        "averages over at least a second, far longer than a mains cycle",
        "caution": CAUTION_TEXT,
    }


@dataclass(frozen=True)
class ReadingsResult:
    """Survey-meter readings against the model (``keepclear readings``).

    Attributes
    ----------
    scenario : Scenario
        The scenario compared (its limits are the ones each reading is checked against).
    readings : tuple of Reading
        The readings as read: place [m], value and unit, and the power density they
        stand for [W m^-2] (E and H through E^2/eta0 and eta0 H^2).
    data : dict
        The ``readings --json`` body: per reading ``measured_w_m2``, ``predicted_w_m2``
        (time-averaged) [W m^-2], ``ratio_db`` [dB], ``under_predicted``,
        ``over_limits``; ``largest_under_prediction_db`` and ``suggested_margin_db`` [dB].
    """

    scenario: Scenario
    readings: tuple[Any, ...]
    data: dict[str, Any]

    @property
    def suggested_margin_db(self) -> float:
        """The largest measured-over-predicted ratio, 0 when none is positive [dB]."""
        return float(self.data["suggested_margin_db"])

    @property
    def under_predicted(self) -> tuple[bool, ...]:
        """Per reading: more than 3 dB above the prediction."""
        return tuple(bool(r["under_predicted"]) for r in self.data["readings"])

    def to_dict(self) -> dict[str, Any]:
        """The ``keepclear readings --json`` object."""
        from .plausibility import input_warnings

        data = dict(self.data)
        data["warnings"] = input_warnings(self.scenario)
        return data


def readings(
    scenario: Scenario,
    readings_in: str | Path | Sequence[Any],
    *,
    limits: Sequence[str] | None = None,
    option: str | None = None,
) -> ReadingsResult:
    """Survey-meter readings against the time-averaged prediction.

    A meter averages over a second or more, far longer than a mains cycle, so each
    reading is compared with the time-averaged prediction (duty cycle applied).

    Parameters
    ----------
    scenario : Scenario
    readings_in : str, Path or sequence of Reading
        A readings CSV (header ``x_m,y_m,z_m,value,unit[,label]``; units W/m2, mW/cm2,
        V/m, A/m) or readings already read
        (:func:`keepclear.fields.readings.read_readings_csv`).
    limits : sequence of str, optional
        Limit ids (default: the scenario's).
    option : str, optional
        Compare with this ``[[option]]`` of the scenario instead of the base.

    Returns
    -------
    ReadingsResult
    """
    from .readings import read_readings_csv

    scenario = select_option(scenario, option)
    scenario = scenario.with_limits(select_limits(scenario, limits))
    if isinstance(readings_in, (str, Path)):
        taken = tuple(read_readings_csv(readings_in))
    else:
        taken = tuple(readings_in)
    return ReadingsResult(scenario, taken, readings_data(scenario, list(taken)))


# --------------------------------------------------------------------- map
@dataclass(frozen=True)
class GridSettings:
    """How a map is sampled; None takes the default from the keep-out radius.

    Attributes
    ----------
    half_extent_m : float, optional
        Half the side of the map [m].
    step_m : float, optional
        Sample spacing [m].
    pixels : int, optional
        Samples a side (instead of ``step_m``) [count].
    """

    half_extent_m: float | None = None
    step_m: float | None = None
    pixels: int | None = None

    def __post_init__(self) -> None:
        check_grid(self.half_extent_m, self.step_m, self.pixels)

    def as_kwargs(self) -> dict[str, Any]:
        """The keyword arguments of :func:`keepclear.fields.maps.run_map`."""
        return {"half_extent_m": self.half_extent_m, "step_m": self.step_m, "pixels": self.pixels}


def map_plane(
    scenario: Scenario,
    plane: str | maps.Plane | None = None,
    *,
    through_m: ArrayLike | None = None,
    height_m: float | None = None,
) -> maps.Plane:
    """The plane of a map: ``"xy"``, ``"xz"``, ``"yz"`` through a point, or ``"boresight"``.

    Parameters
    ----------
    scenario : Scenario
    plane : str or Plane, optional
        A principal plane name (default ``"xy"``), ``"boresight"`` (the vertical plane
        through the first source's boresight) or a ready :class:`maps.Plane`.
    through_m : array_like, optional
        A point on a principal plane, also the map centre (default the first source) [m].
    height_m : float, optional
        Height of the horizontal plane (``"xy"`` only) [m].
    """
    if isinstance(plane, maps.Plane):
        return plane
    check_height(height_m)
    if height_m is not None and plane not in (None, "xy"):
        raise InputError(
            "applies to the horizontal plane only (--plane xy)", "argument", "--height-m"
        )
    if plane == "boresight":
        if through_m is not None:
            raise InputError("does not apply to --plane boresight", "argument", "--through")
        return maps.boresight_plane(scenario)
    if plane in (None, "xy") and through_m is None:
        return maps.horizontal_plane(scenario, height_m)
    point = scenario.centre_m.copy() if through_m is None else np.array(through_m, dtype=float)
    if height_m is not None:
        point[2] = height_m
    return maps.principal_plane(plane or "xy", point)


def horizontal_stem(height_m: float | None = None) -> str:
    """The file-name stem of an assessment's horizontal plane.

    ``source-height`` at the first source's height (``height_m`` None), else the height
    itself, ``z1.70m`` (:func:`keepclear.fields.maps.height_stem`).
    """
    if height_m is None:
        return maps.SOURCE_HEIGHT_NAME.replace(" ", "-")
    return maps.height_stem(height_m)


@dataclass(frozen=True, eq=False)
class FieldMap:
    """A map on a plane with its limit zones and enclosing shapes (``keepclear map``).

    Attributes
    ----------
    run : MapRun
        The grid (``run.result``: time-averaged ``power_density_w_m2`` [W m^-2],
        ``e_v_m`` [V m^-1], ``h_a_m`` [A m^-1] and quotients [1] on the grid), the zones
        per limit and their enclosing shapes [m].
    files : tuple of str
        The files written for it, when a caller wrote any.
    """

    run: maps.MapRun
    files: tuple[str, ...] = ()

    @property
    def keepouts(self) -> tuple[KeepoutResult, ...]:
        """The keep-out answers of the mapped limits."""
        return self.run.keepouts

    def to_dict(self) -> dict[str, Any]:
        """The ``map --json`` object: plane, grid, zones and shapes per limit."""
        return map_data(self.run, list(self.files))


def field_map(
    scenario: Scenario,
    plane: str | maps.Plane | None = None,
    *,
    limits: Sequence[str] | None = None,
    option: str | None = None,
    through_m: ArrayLike | None = None,
    height_m: float | None = None,
    grid: GridSettings | None = None,
    progress: ProgressFactory | None = None,
) -> FieldMap:
    """Map the time-averaged fields on a plane, with the zone of each limit.

    Parameters
    ----------
    scenario : Scenario
    plane : str or Plane, optional
        See :func:`map_plane` (default the horizontal plane through the first source).
    limits : sequence of str, optional
        Limits to contour (default: the scenario's).
    option : str, optional
        Map this ``[[option]]`` instead of the base.
    through_m, height_m : optional
        See :func:`map_plane` [m].
    grid : GridSettings, optional
        Sampling (default from the keep-out radius).
    progress : callable, optional
        ``progress(label)`` returns a stage callback.

    Returns
    -------
    FieldMap
    """
    scenario = select_option(scenario, option)
    grid = grid or GridSettings()
    ids = select_limits(scenario, limits)
    the_plane = map_plane(scenario, plane, through_m=through_m, height_m=height_m)
    with maps.busy(progress, "keep-out search"):
        keepouts = keepout_distances(scenario, ids)
    run = maps.run_map(
        scenario, the_plane, keepouts, progress=_callback(progress, "map"), **grid.as_kwargs()
    )
    return FieldMap(run)


def map_files(
    run: Any,
    stem: str,
    style: Any = None,
    formats: tuple[str, ...] = ("png", "svg"),
    overlay: Any = None,
) -> dict[str, bytes]:
    """The files of one map run, by name, in the ``formats`` asked.

    ``{stem}.png``, ``{stem}.svg`` (the figure), ``{stem}.csv``, ``{stem}.npz`` (the
    grid) and ``zones-....geojson`` (the zones; ``map-`` in the stem becomes ``zones-``).
    """
    from . import plots
    from .outputs import json_text

    files: dict[str, bytes] = {}
    if "png" in formats or "svg" in formats:
        fig = plots.map_figure(
            run.result, run.scenario, run.keepouts, style, run.zones, overlay=overlay
        )
        for fmt in ("png", "svg"):
            if fmt in formats:
                files[f"{stem}.{fmt}"] = plots.figure_bytes(fig, fmt)
    if "csv" in formats:
        files[f"{stem}.csv"] = maps.grid_csv_bytes(run.result)
    if "npz" in formats:
        files[f"{stem}.npz"] = maps.grid_npz_bytes(
            run.result, {"scenario": run.scenario.name, "summary": run.summary()}
        )
    if "geojson" in formats:
        zone_stem = stem.replace("map-", "zones-", 1) if stem.startswith("map-") else stem
        files[f"{zone_stem}.geojson"] = json_text(maps.map_geojson(run)).encode()
    return files


def map_data(run: Any, files: list[str] | None = None) -> dict[str, Any]:
    """The ``map --json`` object: plane, grid, zones and shapes per limit."""
    return {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": run.scenario.frequency_hz,
        "scenario": run.scenario.name,
        "reflections": run.scenario.reflections,
        "keepout": [keepout_entry(k) for k in run.keepouts],
        "map": run.summary(),
        "files": files or [],
        "caution": CAUTION_TEXT,
    }


# ----------------------------------------------------------------- compare
@dataclass(frozen=True, eq=False)
class ComparisonResult:
    """The base and each ``[[option]]``, ranked (``keepclear compare``).

    Attributes
    ----------
    comparison : Comparison
        The variants in rank order, each with its keep-out distances [m], horizontal map and
        zone areas [m^2], leakage 5 cm from the enclosure [W m^-2] and worst named place.
    """

    comparison: Comparison

    def to_dict(self) -> dict[str, Any]:
        """The ``compare --json`` object."""
        return self.comparison.data()

    def figure(self) -> Any:
        """The side-by-side horizontal maps (a matplotlib figure)."""
        return self.comparison.figure()


def compare(
    scenario: Scenario,
    limits: Sequence[str] | None = None,
    *,
    height_m: float | None = None,
    grid: GridSettings | None = None,
    rank_by: str = "keepout",
    sweeps: Sequence[SweepSpec] | None = None,
    progress: ProgressFactory | None = None,
) -> ComparisonResult:
    """Assess the base scenario and each ``[[option]]`` on one horizontal grid, and rank them.

    Parameters
    ----------
    scenario : Scenario
    limits : sequence of str, optional
        Limit ids (default: the scenario's).
    height_m : float, optional
        Height of the horizontal plane of the maps (default: the first source's) [m].
    grid : GridSettings, optional
        Sampling of the maps.
    rank_by : str
        ``"keepout"`` (default), ``"zone-area"`` or ``"place:NAME"`` with NAME a
        ``[[point]]`` of the scenario; ties within
        :data:`keepclear.fields.compare.RANK_TOLERANCE` keep the scenario's order.
    sweeps : sequence, optional
        More options, one per value of each sweep (:func:`with_sweeps`), after the
        scenario's own ``[[option]]`` and ``[[sweep]]`` ones.
    progress : callable, optional
        ``progress(label)`` returns a stage callback.
    """
    from .compare import check_rank_by, compare_options

    check_height(height_m)
    grid = grid or GridSettings()
    ids = select_limits(scenario, limits)
    check_rank_by(scenario, rank_by)
    scenario = with_sweeps(scenario, sweeps)
    comparison = compare_options(
        scenario, ids, height_m=height_m, progress=progress, rank_by=rank_by, **grid.as_kwargs()
    )
    return ComparisonResult(comparison)


# ------------------------------------------------------------------ assess
#: Every file ``assess`` may write, the one list (the comparison only with options, the
#: scenario as given only when its text is known).  The horizontal plane's files are
#: named after it: ``source-height`` here; at a height given with ``--height-m`` that
#: height takes its place, e.g. ``map-z1.70m.png`` (:func:`assess_file_names`).
ASSESS_FILE_NAMES = (
    "assessment.json",
    "report.html",
    "map-source-height.png",
    "map-source-height.svg",
    "map-source-height.npz",
    "zones-source-height.geojson",
    "zones-floor-level.geojson",
    "zones-head-height.geojson",
    "map-vertical.png",
    "map-vertical.svg",
    "map-vertical.npz",
    "compare.json",
    "compare.png",
    "compare.svg",
    "scenario-input.toml",
)
_COMPARISON_FILES = frozenset({"compare.json", "compare.png", "compare.svg"})
_FLOOR_FILES = frozenset({"zones-floor-level.geojson", "zones-head-height.geojson"})


def assess_file_names(
    with_comparison: bool,
    with_scenario_text: bool,
    with_floor: bool = False,
    height_m: float | None = None,
) -> tuple[str, ...]:
    """The files an assessment writes, sorted: :data:`ASSESS_FILE_NAMES` as they apply.

    The comparison only with options, the scenario as given only when its text is
    known, the zones at floor level and head height only when the scenario has a floor;
    the horizontal plane's files named after ``height_m`` when it is given
    (:func:`horizontal_stem`).
    """
    default = horizontal_stem()
    stem = horizontal_stem(height_m)
    return tuple(
        sorted(
            n.replace(f"-{default}.", f"-{stem}.")
            for n in ASSESS_FILE_NAMES
            if (with_comparison or n not in _COMPARISON_FILES)
            and (with_scenario_text or n != "scenario-input.toml")
            and (with_floor or n not in _FLOOR_FILES)
        )
    )


#: Zones "at the floor" are taken this far above a floor, where feet are [m] (common
#: practice, no source; the reflection model holds from about a wavelength, 0.12 m, off
#: the plane and is an approximation closer, README "Floors, walls and benches").
FLOOR_LEVEL_ABOVE_M = 0.1
#: Head height of a standing adult above the floor [m] (common practice, no source).
HEAD_HEIGHT_ABOVE_M = 1.7
#: A reflector is a floor when its normal is within about 8 degrees of +z.
FLOOR_NORMAL_MIN_Z = 0.99


def floor_height_m(scenario: Scenario) -> float | None:
    """The height of the scenario's floor, or None when it has none [m].

    The floor is the highest infinite reflecting plane whose normal points up (within
    about 8 degrees of +z) and which lies below every source, taken under the first
    source.  A finite plate (a table top) is not a floor.
    """
    centre = scenario.centre_m
    lowest_source = min(float(s.position_m[2]) for s in scenario.sources)
    heights = []
    for r in scenario.reflectors:
        if getattr(r, "is_finite", False):
            continue
        n = np.asarray(r.normal, dtype=float)
        n = n / np.linalg.norm(n)
        if n[2] < FLOOR_NORMAL_MIN_Z:
            continue
        p = np.asarray(r.point_m, dtype=float)
        # The plane's height under the first source: n . (x - p) = 0 at x = (cx, cy, z).
        z = float(p[2] - (n[0] * (centre[0] - p[0]) + n[1] * (centre[1] - p[1])) / n[2])
        if z < lowest_source:
            heights.append(z)
    return max(heights) if heights else None


@dataclass(frozen=True, eq=False)
class LevelMap:
    """A horizontal map at a height above the real floor, for the zones people meet there.

    Attributes
    ----------
    key : str
        ``"floor_level"`` or ``"head_height"`` (the key in ``assessment.json``'s ``maps``).
    name : str
        In words: ``"floor level"``, ``"head height"``.
    above_floor_m : float
        Height above the floor [m].
    floor_m : float
        Height of the floor [m].
    run : MapRun
    """

    key: str
    name: str
    above_floor_m: float
    floor_m: float
    run: maps.MapRun

    @property
    def height_m(self) -> float:
        """Height of the plane [m]."""
        return self.floor_m + self.above_floor_m

    def summary(self) -> dict[str, Any]:
        """The map's JSON object with its height above the floor."""
        return {
            **self.run.summary(),
            "name": self.name,
            "height_m": self.height_m,
            "height_above_floor_m": self.above_floor_m,
            "floor_height_m": self.floor_m,
        }


@dataclass(frozen=True, eq=False)
class AssessmentMaps:
    """The maps of an assessment.

    Attributes
    ----------
    horizontal : MapRun
        The horizontal plane at ``height_m`` (by default the first source's height,
        files ``map-source-height.*``; at a given height ``map-z1.70m.*``).
    vertical : MapRun
        The vertical plane through the first source's boresight.
    height_m : float
        Height of that horizontal plane [m].
    height_given : bool
        Whether the height was given (``--height-m``) rather than the source's.
    levels : tuple of LevelMap
        With a floor in the scenario: the horizontal maps at floor level and at head
        height above it (empty without a floor).
    """

    horizontal: maps.MapRun
    vertical: maps.MapRun
    height_m: float
    levels: tuple[LevelMap, ...] = ()
    height_given: bool = False

    @property
    def horizontal_stem(self) -> str:
        """The horizontal plane's file-name stem (:func:`horizontal_stem`)."""
        return horizontal_stem(self.height_m if self.height_given else None)


def step_keepout(
    scenario: Scenario, limit_ids: Sequence[str], progress: ProgressFactory | None = None
) -> tuple[KeepoutResult, ...]:
    """Step 1, keep-out: the keep-out answer of each limit."""
    with maps.busy(progress, "keep-out search"):
        return tuple(keepout_distances(scenario, list(limit_ids)))


def step_maps(
    scenario: Scenario,
    keepouts: Sequence[KeepoutResult],
    grid: GridSettings,
    height_m: float | None = None,
    progress: ProgressFactory | None = None,
) -> AssessmentMaps:
    """Step 2, maps: the horizontal map, the vertical map and the maps above a floor.

    The horizontal map lies at ``height_m``, by default the source height; with a floor
    in the scenario come the maps at floor level and head height.
    """
    centre = scenario.centre_m
    horizontal_plane = maps.horizontal_plane(scenario, height_m)
    vertical_plane = maps.boresight_plane(scenario)
    kwargs = grid.as_kwargs()
    horizontal = maps.run_map(
        scenario,
        horizontal_plane,
        keepouts,
        progress=_callback(progress, f"map at {horizontal_plane.where}"),
        **kwargs,
    )
    vertical = maps.run_map(
        scenario, vertical_plane, keepouts, progress=_callback(progress, "vertical map"), **kwargs
    )
    levels = []
    floor_m = floor_height_m(scenario)
    if floor_m is not None:
        for key, name, above in (
            ("floor_level", "floor level", FLOOR_LEVEL_ABOVE_M),
            ("head_height", "head height", HEAD_HEIGHT_ABOVE_M),
        ):
            z = floor_m + above
            plane = replace(
                maps.principal_plane("xy", [centre[0], centre[1], z]),
                description=f"horizontal plane at {name}, z = {z:.2f} m "
                f"({above:.2f} m above the floor)",
                name=name,
            )
            run = maps.run_map(
                scenario, plane, keepouts, progress=_callback(progress, f"{name} map"), **kwargs
            )
            levels.append(LevelMap(key, name, above, floor_m, run))
    return AssessmentMaps(
        horizontal, vertical, horizontal_plane.height_m, tuple(levels), height_m is not None
    )


def step_zones(
    scenario: Scenario,
    keepouts: Sequence[KeepoutResult],
    runs: AssessmentMaps,
    progress: ProgressFactory | None = None,
) -> tuple[maps.Cylinder, ...]:
    """Step 3, zones: the vertical cylinder per limit holding the zones of both maps."""
    zone_points = {
        k.limit_id: np.vstack(
            [runs.horizontal.zone_points_m(k.limit_id), runs.vertical.zone_points_m(k.limit_id)]
        )
        for k in keepouts
    }
    return tuple(
        maps.keepout_cylinders(
            scenario,
            keepouts,
            progress=_callback(progress, "vertical extent"),
            extra_points_m=zone_points,
        )
    )


def step_places(scenario: Scenario, limit_ids: Sequence[str]) -> ProbeResult | None:
    """Step 4, places: the scenario's named ``[[point]]`` places probed (None without)."""
    if not scenario.points:
        return None
    return probe(scenario.with_limits(tuple(limit_ids)))


def step_options(
    scenario: Scenario,
    limit_ids: Sequence[str],
    keepouts: Sequence[KeepoutResult],
    grid: GridSettings,
    height_m: float | None,
    progress: ProgressFactory | None = None,
    rank_by: str = "keepout",
    base_map: maps.MapRun | None = None,
    searches: Pending[tuple[KeepoutResult, ...]] | None = None,
) -> Comparison | None:
    """Step 5, options: the ranked comparison of the ``[[option]]``s (None without).

    ``height_m`` is the horizontal plane's height when given (None: the source height).
    ``base_map`` (the horizontal map of step 2) serves as the base's map of the comparison
    when it is on the same grid; ``searches`` are the options' keep-out searches when
    already started (:func:`keepclear.fields.compare.start_option_searches`).
    """
    if not scenario.options:
        return None
    from .compare import compare_options

    return compare_options(
        scenario,
        tuple(limit_ids),
        height_m=height_m,
        progress=lambda label: _callback(progress, label),
        base_keepouts=keepouts,
        rank_by=rank_by,
        base_map=base_map,
        option_keepouts=searches,
        **grid.as_kwargs(),
    )


def step_uncertainty(
    scenario: Scenario,
    limit_ids: Sequence[str],
    keepouts: Sequence[KeepoutResult],
    progress: ProgressFactory | None = None,
) -> dict[str, Any] | None:
    """With ``[uncertainty]``: the Monte Carlo spread of each keep-out (None without)."""
    if scenario.uncertainty is None:
        return None
    with maps.busy(progress, "uncertainty samples"):
        return uncertainty_data(scenario.with_limits(tuple(limit_ids)), list(keepouts))


def place_entries(places: ProbeResult | None) -> list[dict[str, Any]]:
    """The ``points`` list of ``assessment.json``: each place probed, with its verdict."""
    if places is None:
        return []
    out = []
    for i, entry in enumerate(places.point_dicts()):
        name = entry.pop("name")
        worst = max(entry["quotients"].items(), key=lambda kv: kv[1])
        out.append(
            {
                "name": name,
                "map_letter": maps.point_letter(i),
                **entry,
                "worst_limit": worst[0],
                "worst_quotient": worst[1],
                "exceeds": [k for k, q in entry["quotients"].items() if q >= 1.0],
            }
        )
    return out


def named_points_data(
    scenario: Scenario, limit_ids: list[str] | tuple[str, ...] | None = None
) -> list[dict[str, Any]]:
    """The scenario's ``[[point]]`` places, probe-like, each with its ``name``."""
    ids = tuple(scenario.limit_ids if limit_ids is None else limit_ids)
    return place_entries(step_places(scenario, ids))


@dataclass(frozen=True, eq=False)
class AssessmentResult:
    """The full assessment (``keepclear assess``).

    Attributes
    ----------
    scenario : Scenario
    limit_ids : tuple of str
        The limits assessed.
    keepouts : tuple of KeepoutResult
        Keep-out answer per limit [m].
    maps : AssessmentMaps
        The horizontal and vertical maps, with their zones.
    cylinders : tuple of Cylinder
        Per limit, the vertical cylinder about the first source holding every
        exceedance found (radius and height range [m]).
    places : ProbeResult or None
        The named places probed.
    comparison : Comparison or None
        The options ranked, when the scenario has any.
    spread : dict or None
        With ``[uncertainty]``, the keep-out spread (:func:`uncertainty_data`).
    readings : dict or None
        The survey readings compared (:func:`readings_data`), when given.
    data : dict
        The ``assessment.json`` object.
    files : dict of str to bytes
        Every output by file name (:func:`assess_file_names`), ``assessment.json`` and
        ``report.html`` included.
    written : tuple of Path
        Where the files were written, once they were (:func:`write_assessment`).
    """

    scenario: Scenario
    limit_ids: tuple[str, ...]
    keepouts: tuple[KeepoutResult, ...]
    maps: AssessmentMaps
    cylinders: tuple[maps.Cylinder, ...]
    places: ProbeResult | None
    comparison: Comparison | None
    spread: dict[str, Any] | None
    readings: dict[str, Any] | None
    data: dict[str, Any]
    files: Mapping[str, bytes]
    written: tuple[Path, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        """The ``assessment.json`` object (what ``assess --json`` prints)."""
        return self.data


def _map_overlay(scenario: Scenario, run: Any, readings_block: dict[str, Any] | None) -> Any:
    """The P95 contours (with ``[uncertainty]``) and the readings near a map's plane."""
    from .plots import MapOverlay

    p95: dict[str, NDArray[np.float64]] = {}
    if scenario.uncertainty is not None:
        from .uncertainty import quotient_percentile

        grid = run.result.grid
        q = quotient_percentile(
            scenario, scenario.uncertainty, grid.points_m(), list(run.result.limit_ids)
        )
        p95 = {k: v.reshape(grid.shape) for k, v in q.items()}
    marks = []
    if readings_block is not None:
        plane = run.result.grid.plane
        near = max(0.5, 2 * run.result.grid.step_m)
        for i, r in enumerate(readings_block["readings"]):
            pos = np.asarray(r["position_m"], dtype=float)
            st, off = plane.to_plane(pos)
            if abs(float(off[0])) <= near:
                marks.append(
                    {
                        "s": float(st[0, 0]),
                        "t": float(st[0, 1]),
                        "tag": r["label"] or f"R{i + 1}",
                        "under": r["under_predicted"],
                    }
                )
    return MapOverlay(p95=p95, readings=marks)


def _comparison_figures(comparison: Comparison) -> dict[str, bytes]:
    """``compare.png`` and ``compare.svg`` of an assessment's option comparison."""
    from . import plots

    fig = comparison.figure()
    return {
        "compare.png": plots.figure_bytes(fig, "png"),
        "compare.svg": plots.figure_bytes(fig, "svg"),
    }


def step_report(
    scenario: Scenario,
    limit_ids: Sequence[str],
    keepouts: Sequence[KeepoutResult],
    runs: AssessmentMaps,
    cylinders: Sequence[maps.Cylinder],
    places: ProbeResult | None,
    comparison: Comparison | None,
    scenario_text: str | None = None,
    spread: dict[str, Any] | None = None,
    readings_block: dict[str, Any] | None = None,
) -> tuple[dict[str, Any], dict[str, bytes]]:
    """Step 6, report: the ``assessment.json`` object and every output file's bytes."""
    from importlib import metadata

    from . import plots
    from .describe import describe_sources, reactive_near_field_m
    from .leakage import enclosure_leakage
    from .outputs import json_text
    from .plausibility import input_warnings
    from .report import render_report

    horizontal, vertical = runs.horizontal, runs.vertical
    by_cyl = {c.limit_id: c for c in cylinders}
    keepout_rows = []
    for k in keepouts:
        row = keepout_entry(k)
        row["recommended_distance_m"] = k.recommended_distance_m
        # Cross-check of the keep-out search by the maps: the farthest zone point found.
        reach = max(horizontal.reach_m(k.limit_id), vertical.reach_m(k.limit_id))
        step = max(horizontal.result.grid.step_m, vertical.result.grid.step_m)
        row["map_reach_m"] = reach
        row["map_reach_beyond_keepout"] = bool(reach > k.recommended_distance_m + step)
        row["mark_out_m"] = max(k.recommended_distance_m, reach)
        row["cylinder"] = by_cyl[k.limit_id].as_dict()
        row["horizontal_zone"] = horizontal.conservative_shapes(k.limit_id)
        keepout_rows.append(row)
    _add_spread(keepout_rows, spread)
    try:
        version = metadata.version("keepclear")
    except metadata.PackageNotFoundError:  # pragma: no cover - running from a checkout
        version = "unknown"
    values = [scenario.limit_value(i) for i in limit_ids]
    data: dict[str, Any] = {
        "schema_version": SCHEMA_VERSION,
        "tool_version": version,
        "scenario": scenario.name,
        "scenario_file": scenario.path,
        "frequency_hz": scenario.frequency_hz,
        "reflections": scenario.reflections,
        "average_power_w": scenario.average_power_w,
        "centre_m": [float(x) for x in scenario.centre_m],
        "sources": [
            {
                "id": s.id,
                "antenna": s.antenna,
                "power_w": s.power_w,
                "duty_cycle": s.duty_cycle,
                "average_power_w": s.average_power_w,
                "position_m": [float(x) for x in s.position_m],
                **described,
                "reactive_near_field_m": reactive_near_field_m(scenario.frequency_hz),
            }
            for s, described in zip(scenario.sources, describe_sources(scenario), strict=True)
        ],
        "limits": [{**v.as_dict(), "verification": v.verification} for v in values],
        "keepout": keepout_rows,
        "points": place_entries(places),
        "maps": {
            "horizontal": {
                **horizontal.summary(),
                "height_m": runs.height_m,
                "zones_file": f"zones-{runs.horizontal_stem}.geojson",
            },
            "vertical": vertical.summary(),
            **{
                level.key: {
                    **level.summary(),
                    "zones_file": f"zones-{level.run.result.grid.plane.file_stem}.geojson",
                }
                for level in runs.levels
            },
        },
        "enclosure": enclosure_leakage(scenario, limit_ids),
        "comparison": None if comparison is None else comparison.data(),
        "uncertainty": None if spread is None else spread["spec"],
        "readings": readings_block,
        "warnings": input_warnings(scenario, limit_ids, options=True),
        "assumptions": {
            "time_averaging": plots.duty_text(scenario),
            "reflections": plots.reflection_text(scenario),
            "shields": len(scenario.shields),
            "enclosure": scenario.enclosure is not None,
        },
        "caution": CAUTION_TEXT,
    }
    names = assess_file_names(
        comparison is not None,
        scenario_text is not None,
        bool(runs.levels),
        runs.height_m if runs.height_given else None,
    )
    data["files"] = list(names)

    files: dict[str, bytes] = {}
    overlays = {
        name: _map_overlay(scenario, run, readings_block)
        for name, run in (("horizontal", horizontal), ("vertical", vertical))
    }
    # The figures are drawn side by side (fields/workers.py): each is a piece of its own,
    # the comparison's (the longest) first.
    pieces: list[Callable[[], dict[str, bytes]]] = []
    if comparison is not None:
        pieces.append(functools.partial(_comparison_figures, comparison))
    pieces += [
        functools.partial(
            map_files,
            horizontal,
            f"map-{runs.horizontal_stem}",
            formats=("png", "svg", "npz", "geojson"),
            overlay=overlays["horizontal"],
        ),
        functools.partial(
            map_files,
            vertical,
            "map-vertical",
            formats=("png", "svg", "npz"),
            overlay=overlays["vertical"],
        ),
    ]
    for made in run_each(pieces):
        files.update(made)
    for level in runs.levels:
        stem = "map-" + level.run.result.grid.plane.file_stem
        files.update(map_files(level.run, stem, formats=("geojson",)))
    figures = {
        "horizontal": files[f"map-{runs.horizontal_stem}.png"],
        "vertical": files["map-vertical.png"],
    }
    if comparison is not None:
        files["compare.json"] = json_text(comparison.data()).encode()
        figures["compare"] = files["compare.png"]
    if scenario_text is not None:
        files["scenario-input.toml"] = scenario_text.encode("utf-8")
    files["report.html"] = render_report(data, figures, scenario_text).encode("utf-8")
    files["assessment.json"] = json_text(data).encode("utf-8")
    if tuple(sorted(files)) != names:  # pragma: no cover - a programming error
        raise RuntimeError(f"assessment files {sorted(files)} differ from {names}")
    return data, files


def assess(
    scenario: Scenario,
    out: str | Path | None = None,
    *,
    limits: Sequence[str] | None = None,
    height_m: float | None = None,
    grid: GridSettings | None = None,
    scenario_text: str | None = None,
    readings: Sequence[Any] | None = None,
    rank_by: str = "keepout",
    sweeps: Sequence[SweepSpec] | None = None,
    progress: ProgressFactory | None = None,
) -> AssessmentResult:
    """The full assessment: keep-out -> maps -> zones -> places -> options -> report.

    Parameters
    ----------
    scenario : Scenario
    out : str or Path, optional
        Folder to write every output into (created; files of the same name replaced,
        nothing else touched; all or nothing).  Without it nothing is written.
    limits : sequence of str, optional
        Limit ids (default: the scenario's).
    height_m : float, optional
        Height of the horizontal map and zones (default: the first source's; files
        ``map-source-height.*``, else named after the height, ``map-z1.70m.*``) [m].
    grid : GridSettings, optional
        Sampling of the maps (default from the keep-out radius).
    scenario_text : str, optional
        The scenario file as written, for the report (default: read from
        ``scenario.path`` when that is a file).
    readings : sequence of Reading, optional
        Survey readings to compare and mark on the maps
        (:func:`keepclear.fields.readings.read_readings_csv`).
    rank_by : str
        How the options are ranked: ``"keepout"`` (default), ``"zone-area"`` or
        ``"place:NAME"`` (:func:`compare`).
    sweeps : sequence, optional
        More options, one per value of each sweep (:func:`with_sweeps`).
    progress : callable, optional
        ``progress(label)`` returns a stage callback.

    Returns
    -------
    AssessmentResult
    """
    from .compare import check_rank_by

    check_height(height_m)
    grid = grid or GridSettings()
    ids = select_limits(scenario, limits)
    check_rank_by(scenario, rank_by)
    scenario = with_sweeps(scenario, sweeps)
    if scenario_text is None and scenario.path and Path(scenario.path).is_file():
        scenario_text = Path(scenario.path).read_text(encoding="utf-8-sig")
    if out is None:
        return _assess(scenario, ids, height_m, grid, scenario_text, progress, readings, rank_by)
    protected = [Path(scenario.path)] if scenario.path else []
    refuse_assessment_overwrites(out, protected, height_m)
    from .outputs import staged_output_folder

    with staged_output_folder(out, protected) as staged:
        result = _assess(scenario, ids, height_m, grid, scenario_text, progress, readings, rank_by)
        for name, blob in result.files.items():
            staged.write(name, blob)
    return replace(result, written=tuple(staged.published))


def refuse_assessment_overwrites(
    out: str | Path, protected: Sequence[str | Path], height_m: float | None = None
) -> None:
    """Refuse, before any computation, an ``out`` folder whose outputs would replace an input."""
    from .outputs import refuse_overwriting

    for name in assess_file_names(True, True, True, height_m):
        refuse_overwriting(Path(out) / name, [Path(p) for p in protected])


def _assess(
    scenario: Scenario,
    ids: tuple[str, ...],
    height_m: float | None,
    grid: GridSettings,
    scenario_text: str | None,
    progress: ProgressFactory | None,
    readings: Sequence[Any] | None = None,
    rank_by: str = "keepout",
) -> AssessmentResult:
    scenario = prepare(scenario).scenario
    # The options' searches reuse the base search's field evaluations (antennas/memo.py);
    # the steps in between evaluate points no option repeats, so they keep none.
    with memo.shared_field_evaluations() if scenario.options else contextlib.nullcontext():
        keepouts = step_keepout(scenario, ids, progress)
        # The options' keep-out searches run in worker processes (fields/workers.py) while
        # the base's maps are made here; each starts from the base's kept evaluations.
        searches = start_option_searches(scenario, ids) if scenario.options else None
        try:
            with memo.paused():
                runs = step_maps(scenario, keepouts, grid, height_m, progress)
                cylinders = step_zones(scenario, keepouts, runs, progress)
                places = step_places(scenario, ids)
                spread = step_uncertainty(scenario, ids, keepouts, progress)
                readings_block = (
                    readings_data(scenario.with_limits(ids), readings) if readings else None
                )
            comparison = step_options(
                scenario,
                ids,
                keepouts,
                grid,
                runs.height_m if runs.height_given else None,
                progress,
                rank_by,
                runs.horizontal,
                searches,
            )
        finally:
            if searches is not None:
                searches.cancel()
    data, files = step_report(
        scenario,
        ids,
        keepouts,
        runs,
        cylinders,
        places,
        comparison,
        scenario_text,
        spread,
        readings_block,
    )
    return AssessmentResult(
        scenario,
        ids,
        keepouts,
        runs,
        cylinders,
        places,
        comparison,
        spread,
        readings_block,
        data,
        files,
    )


def write_assessment(
    result: AssessmentResult, out: str | Path, protected: Sequence[str | Path] = ()
) -> AssessmentResult:
    """Write every file of an assessment into ``out`` (all or nothing); the written paths."""
    from .outputs import staged_output_folder

    with staged_output_folder(out, protected) as staged:
        for name, blob in result.files.items():
            staged.write(name, blob)
    return replace(result, written=tuple(staged.published))


def run_assessment(
    scenario: Scenario,
    *,
    limit_ids: list[str] | tuple[str, ...] | None = None,
    height_m: float | None = None,
    half_extent_m: float | None = None,
    step_m: float | None = None,
    pixels: int | None = None,
    scenario_text: str | None = None,
    progress: Any = None,
    readings: list[Any] | None = None,
) -> tuple[dict[str, Any], dict[str, bytes]]:
    """The whole assessment as ``(assessment.json object, files by name)``; nothing written.

    The same steps as :func:`assess` (which returns the typed result).
    """
    if height_m is not None and not math.isfinite(height_m):
        raise InputError("must be a finite height in metres", "argument", "--height-m")
    ids = tuple(scenario.limit_ids if limit_ids is None else limit_ids)
    grid = GridSettings(half_extent_m, step_m, pixels)
    result = _assess(scenario, ids, height_m, grid, scenario_text, progress, readings)
    return result.data, dict(result.files)
