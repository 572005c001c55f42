"""Scenario files: read once, validate everything, build immutable objects.

A scenario is a TOML file (read with :mod:`tomllib`).  The keys of the stable
contract are accepted exactly; every value is checked for type, range and unit
sense before anything is computed, and an unknown key is an error with a "did you
mean" suggestion, because a typo silently ignored in a safety tool is a wrong
answer.  Errors name the file, the key path (``source.2.power_w``) and what is
allowed.

After loading, computation never reads the file again: :class:`Scenario` and the
objects it holds are frozen.

Alternatives (``[[option]]``) are parsed here too: each option overrides parts of
the base document (top-level keys are replaced; ``[[option.source]]`` tables are
merged into the base source with the same ``id``; ``[option.enclosure]`` is merged
key by key into the base enclosure) and the merged document is validated as a
whole scenario of its own.
"""

from __future__ import annotations

import copy
import re
import warnings
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import Placement, Radiator

from . import limits as limits_mod
from .arguments import read_scenario_document
from .errors import InputError, LimitError, ScenarioError, UnknownKeyError, entry_path
from .surroundings import EnclosureModel, ReflectorModel, ShieldModel
from .validate import Table, suggest

#: Default operating frequency [Hz] (the 2.45 GHz ISM band centre).
DEFAULT_FREQUENCY_HZ = 2.45e9
#: Limits assessed when a scenario has no ``[exposure]`` table.
DEFAULT_LIMIT_IDS = ("icnirp-2020/general-public", "icnirp-2020/occupational")
ANTENNA_KINDS = ("isotropic", "dipole", "monopole", "open-waveguide", "horn")
REFLECTION_MODES = ("envelope", "coherent")
#: Grounds a monopole may stand on (contract, Additions: "Finite ground for a monopole").
GROUND_KINDS = ("infinite", "plate", "box")
#: Keys a [[source]] table may hold, per antenna kind (besides the common ones).
_COMMON_SOURCE_KEYS = ("id", "antenna", "power_w", "duty_cycle", "position_m")
_KIND_KEYS: dict[str, tuple[str, ...]] = {
    "isotropic": ("gain_dbi", "polarization"),
    "dipole": ("axis", "length_m"),
    "monopole": (
        "axis",
        "length_m",
        "ground",
        "ground_size_m",
        "ground_up",
        "ground_offset_m",
        "box_depth_m",
    ),
    "open-waveguide": (
        "boresight",
        "polarization",
        "waveguide",
        "broad_m",
        "narrow_m",
        "flange_m",
        "guide_length_m",
    ),
    "horn": (
        "flange_m",
        "boresight",
        "polarization",
        "waveguide",
        "broad_m",
        "narrow_m",
        "aperture_width_m",
        "aperture_height_m",
        "length_m",
    ),
}
_ALL_SOURCE_KEYS = sorted(set(_COMMON_SOURCE_KEYS).union(*_KIND_KEYS.values()))
_TOP_KEYS = (
    "name",
    "frequency_hz",
    "reflections",
    "source",
    "exposure",
    "reflector",
    "shield",
    "enclosure",
    "point",
    "option",
    "sweep",
    "uncertainty",
)
#: Distance from a wire or a plate within which a point counts as on a source's metal [m].
INSIDE_SOURCE_TOLERANCE_M = 1e-3
#: Top-level keys that make variants of the scenario: not allowed inside an option.
_VARIANT_KEYS = ("option", "sweep")
#: Frequencies the models accept at all [Hz]; limits narrow this further.
FREQUENCY_RANGE_HZ = (1e8, 1e11)


@dataclass(frozen=True)
class Source:
    """One radiating source of a scenario.

    Parameters
    ----------
    id : str
        Unique label.
    antenna : str
        Model name (one of :data:`ANTENNA_KINDS`).
    power_w : float
        Power delivered to the antenna while it radiates [W].
    duty_cycle : float
        Fraction of time radiating, 0 < d <= 1.
    radiator : Radiator
        The field model, placed in the scenario.
    """

    id: str
    antenna: str
    power_w: float
    duty_cycle: float
    radiator: Radiator

    @property
    def position_m(self) -> NDArray[np.float64]:
        """Reference point [m]."""
        return self.radiator.position_m

    @property
    def average_power_w(self) -> float:
        """Time-averaged radiated power d * P [W]."""
        return self.duty_cycle * self.power_w


@dataclass(frozen=True)
class PointOfInterest:
    """A named place to report (``[[point]]``): the operator's seat, a doorway.

    ``average_over_height_m`` (optional) is ``(z0, z1)``: a vertical line at this x, y
    over which the spatial average of the power density is also reported [m].
    """

    name: str
    position_m: NDArray[np.float64]
    average_over_height_m: tuple[float, float] | None = None


@dataclass(frozen=True)
class Option:
    """A named alternative (``[[option]]``): the whole scenario as it would be."""

    name: str
    description: str
    scenario: Scenario


@dataclass(frozen=True)
class Scenario:
    """A validated scenario: sources, surroundings and the limits to assess.

    Parameters
    ----------
    name : str
        Free text title.
    path : str
        The file it came from (for messages and reports).
    frequency_hz : float
        Operating frequency [Hz].
    reflections : str
        ``"envelope"`` (worst case) or ``"coherent"``.
    sources : tuple of Source
    limit_ids : tuple of str
    reflectors : tuple of ReflectorModel
        Reflecting planes (:mod:`keepclear.fields.surroundings` interfaces; the models
        are in :mod:`keepclear.fields.reflection`).
    shields : tuple of ShieldModel
        Shields (models in :mod:`keepclear.fields.shield`).
    enclosure : EnclosureModel or None
        The enclosure (model in :mod:`keepclear.fields.enclosure`).
    points : tuple of PointOfInterest
    options : tuple of Option
    document : dict
        The parsed TOML as given.
    thresholds : tuple of Limit
        User thresholds (``[[exposure.threshold]]``), ids ``custom/NAME``.
    load_warnings : tuple of str
        The input warnings raised while it was built, besides the plausibility ones
        (:func:`keepclear.fields.plausibility.recording_load_warnings`).
    """

    name: str
    path: str
    frequency_hz: float
    reflections: str
    sources: tuple[Source, ...]
    limit_ids: tuple[str, ...]
    reflectors: tuple[ReflectorModel, ...] = ()
    shields: tuple[ShieldModel, ...] = ()
    enclosure: EnclosureModel | None = None
    points: tuple[PointOfInterest, ...] = ()
    options: tuple[Option, ...] = ()
    document: dict[str, Any] = field(default_factory=dict)
    uncertainty: Any = None
    thresholds: tuple[limits_mod.Limit, ...] = ()
    load_warnings: tuple[str, ...] = ()

    @property
    def centre_m(self) -> NDArray[np.float64]:
        """Keep-out centre: the first source's reference point [m]."""
        return self.sources[0].position_m

    @property
    def average_power_w(self) -> float:
        """Sum of time-averaged source powers [W]."""
        return float(sum(s.average_power_w for s in self.sources))

    @property
    def wavelength_m(self) -> float:
        """Free-space wavelength [m]."""
        return self.sources[0].radiator.wavelength_m

    def limit(self, limit_id: str) -> limits_mod.Limit:
        """A limit by id: the scenario's user thresholds, then the published limits."""
        return limits_mod.resolve_limit(limit_id, self.thresholds)

    def limit_value(self, limit_id: str) -> limits_mod.LimitValue:
        """A limit by id, at the scenario frequency (LimitError outside its band)."""
        return self.limit(limit_id).at(self.frequency_hz)

    def inside_source(
        self, points_m: ArrayLike, tolerance_m: float = INSIDE_SOURCE_TOLERANCE_M
    ) -> NDArray[np.bool_]:
        """Which points lie inside a source or on its metal (:func:`inside_source_mask`)."""
        return inside_source_mask(self, points_m, tolerance_m)

    def with_limits(self, limit_ids: tuple[str, ...]) -> Scenario:
        """A copy assessing other limits."""
        return replace(self, limit_ids=limit_ids)


def inside_source_mask(
    scenario: Scenario, points_m: ArrayLike, tolerance_m: float = INSIDE_SOURCE_TOLERANCE_M
) -> NDArray[np.bool_]:
    """Which points lie inside any source of a scenario, or on its metal.

    Parameters
    ----------
    scenario : Scenario
    points_m : array_like, shape (N, 3)
        Points in scenario coordinates [m].
    tolerance_m : float
        Distance from a wire or a plate within which a point counts as on it [m]
        (default 1 mm).

    Returns
    -------
    ndarray of bool, shape (N,)
        True inside a guide, a horn, a box or within ``tolerance_m`` of a wire or a plate
        of any source (:meth:`keepclear.antennas.base.Radiator.inside_or_on`): not a place
        where anyone stands.  Its fields are computed as anywhere else, but the outputs
        mark it and count it as over every limit.
    """
    pts = np.asarray(points_m, dtype=float).reshape(-1, 3)
    mask = np.zeros(pts.shape[0], dtype=bool)
    for source in scenario.sources:
        mask |= source.radiator.inside_or_on(pts, tolerance_m)
    return mask


# ----------------------------------------------------------------- sources
def _placement(t: Table, axis_key: str, polarization: bool) -> Placement:
    position = t.vector("position_m", np.zeros(3), unit="m")
    if axis_key == "boresight":
        axis = t.vector("boresight", unit="unit-free direction", nonzero=True)
    else:
        axis = t.vector(axis_key, np.array([0.0, 0.0, 1.0]), nonzero=True)
    pol = t.vector("polarization", None, nonzero=True) if polarization else None
    if pol is None and axis_key == "boresight":
        # E along the vertical where the boresight is horizontal (the usual bench set-up).
        up = np.array([0.0, 0.0, 1.0])
        pol = up if abs(np.dot(up, axis) / np.linalg.norm(axis)) < 0.99 else np.array([1.0, 0, 0])
    return t.build(Placement.from_axes, position, axis, pol)


def _feed_dimensions(t: Table) -> tuple[float, float]:
    from keepclear.antennas.waveguide import waveguide_dimensions

    has_name = t.has("waveguide")
    has_dims = t.has("broad_m") or t.has("narrow_m")
    if has_name and has_dims:
        raise t.error(
            "waveguide", 'give either waveguide = "WR-340" or broad_m and narrow_m, not both'
        )
    if has_name:
        name = t.string("waveguide")
        return t.build(waveguide_dimensions, name)
    if not has_dims:
        raise t.error(
            "waveguide",
            'is required: a standard size name such as "WR-340", or broad_m and narrow_m',
        )
    broad = t.number("broad_m", unit="m", minimum=0.0, exclusive_minimum=True, maximum=10.0)
    narrow = t.number("narrow_m", unit="m", minimum=0.0, exclusive_minimum=True, maximum=10.0)
    if narrow > broad:
        raise t.error(
            "narrow_m", f"must not exceed broad_m ({broad:g} m): the broad wall is the wider one"
        )
    return broad, narrow


#: Set while a scenario is read only to be checked (:func:`check_sweeps`): a guide, a horn
#: or a monopole on a finite ground (a NEC-2 solve on its first run, tables built on every
#: run) gets a point source at its place instead, once every key of its table is read and
#: every input check of the model has passed.
_STAND_IN: ContextVar[bool] = ContextVar("keepclear_stand_in_models", default=False)


def _stand_in(f: float, p: float, placement: Placement) -> Radiator:
    """A point source at the model's place: enough to check the rest of the scenario."""
    from keepclear.antennas.isotropic import IsotropicSource

    return IsotropicSource(f, p, placement=placement)


def _build_isotropic(t: Table, f: float, p: float) -> Radiator:
    from keepclear.antennas.isotropic import IsotropicSource

    gain = t.number("gain_dbi", 0.0, unit="dBi", minimum=-30.0, maximum=60.0)
    position = t.vector("position_m", np.zeros(3), unit="m")
    pol = t.vector("polarization", None, nonzero=True)
    if pol is None:
        placement = t.build(Placement.from_axes, position)
    else:
        # A point source has no main axis: take any direction across the polarisation as
        # local z, so that local +y (the E direction) is the given polarisation itself.
        trial = np.array([0.0, 0.0, 1.0])
        if abs(pol[2]) >= 0.9 * float(np.linalg.norm(pol)):
            trial = np.array([1.0, 0.0, 0.0])
        placement = t.build(Placement.from_axes, position, np.cross(pol, trial), pol)
    return t.build(IsotropicSource, f, p, gain_dbi=gain, placement=placement)


def _build_wire(t: Table, f: float, p: float, kind: str) -> Radiator:
    from keepclear.antennas import wire

    length = t.number(
        "length_m", None, unit="m", minimum=0.0, exclusive_minimum=True, maximum=100.0
    )
    if kind == "monopole" and t.string("ground", "infinite", choices=GROUND_KINDS) != "infinite":
        return _build_grounded_monopole(t, f, p, length)
    for key in ("ground_size_m", "ground_up", "ground_offset_m", "box_depth_m"):
        if kind == "monopole" and t.has(key):
            raise t.error(key, 'applies to ground = "plate" or "box" only, not to "infinite"')
    placement = _placement(t, "axis", polarization=False)
    cls = wire.Dipole if kind == "dipole" else wire.Monopole
    return t.build(cls, f, p, length_m=length, placement=placement)


def _pair(t: Table, key: str, default: Any, positive: bool) -> tuple[float, float]:
    """Two finite numbers [a, b] in metres; ``positive`` asks both to be > 0."""
    value = t.raw(key, default)
    what = "two sizes > 0 [w, h] [m]" if positive else "two numbers [along width, along up] [m]"
    if (
        not isinstance(value, (list, tuple))
        or len(value) != 2
        or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in value)
    ):
        raise t.error(key, f"must be {what}, got {value!r}")
    try:
        a, b = float(value[0]), float(value[1])
    except OverflowError:
        raise t.error(key, f"must be {what}, got {value!r}") from None
    if not (np.isfinite(a) and np.isfinite(b)) or max(abs(a), abs(b)) > 1e3:
        raise t.error(key, f"must be {what}, finite and within 1000 m, got {value!r}")
    if positive and min(a, b) <= 0.0:
        raise t.error(key, f"must be {what}, got {value!r}")
    return a, b


def _build_grounded_monopole(t: Table, f: float, p: float, length: float | None) -> Radiator:
    """A monopole on a finite plate or through the face of a box (contract: Additions)."""
    ground = t.string("ground")
    if not t.has("ground_size_m"):
        raise t.error(
            "ground_size_m", f'is required for ground = "{ground}": [width, height] in metres'
        )
    size = _pair(t, "ground_size_m", None, positive=True)
    offset = _pair(t, "ground_offset_m", [0.0, 0.0], positive=False)
    depth = None
    if ground == "box":
        if not t.has("box_depth_m"):
            raise t.error("box_depth_m", 'is required for ground = "box": the depth in metres')
        depth = t.number("box_depth_m", unit="m", minimum=0.0, exclusive_minimum=True, maximum=1e3)
    elif t.has("box_depth_m"):
        raise t.error("box_depth_m", 'applies to ground = "box" only, not to a plate')
    position = t.vector("position_m", np.zeros(3), unit="m")
    axis = t.vector("axis", np.array([0.0, 0.0, 1.0]), nonzero=True)
    a = axis / np.linalg.norm(axis)
    up = t.vector("ground_up", None, nonzero=True)
    if up is None:
        # +z, or +y when the probe is vertical; made perpendicular for a tilted probe.
        up = np.array([0.0, 0.0, 1.0]) if abs(a[2]) < 0.99 else np.array([0.0, 1.0, 0.0])
        up = up - np.dot(up, a) * a
    elif abs(float(np.dot(up / np.linalg.norm(up), a))) > 1e-6:
        raise t.error(
            "ground_up",
            f"must be perpendicular to axis (the direction of the face's height edges); "
            f"the angle between them is "
            f"{np.degrees(np.arccos(np.clip(np.dot(up / np.linalg.norm(up), a), -1, 1))):.4g} deg",
        )
    placement = t.build(Placement.from_axes, position, axis, up)
    from keepclear.antennas.finite_ground import FiniteGroundMonopole, checked_inputs

    if _STAND_IN.get():  # the model's own checks, without its solve
        t.build(
            checked_inputs,
            f,
            length,
            ground=ground,
            ground_size_m=size,
            ground_offset_m=offset,
            box_depth_m=depth,
        )
        return _stand_in(f, p, placement)
    return t.build(
        FiniteGroundMonopole,
        f,
        p,
        length,
        ground=ground,
        ground_size_m=size,
        ground_offset_m=offset,
        box_depth_m=depth,
        placement=placement,
    )


def _build_open_waveguide(t: Table, f: float, p: float) -> Radiator:
    from keepclear.antennas.aperture import OpenWaveguide
    from keepclear.antennas.walls import WalledAperture

    broad, narrow = _feed_dimensions(t)
    placement = _placement(t, "boresight", polarization=True)
    guide = t.build(OpenWaveguide, f, p, broad, narrow, placement=placement)
    flange = _flange(t)
    length = None
    if t.has("guide_length_m"):
        length = t.number(
            "guide_length_m", unit="m", minimum=0.0, exclusive_minimum=True, maximum=50.0
        )
    from keepclear.antennas import guide_grid
    from keepclear.antennas.walls import DEFAULT_WALL_M, check_flange

    if flange is not None:
        flange = t.build(
            check_flange, flange, broad + 2 * DEFAULT_WALL_M, narrow + 2 * DEFAULT_WALL_M
        )
    if _STAND_IN.get():  # every input checked: a point source for the solved guide
        return _stand_in(f, p, placement)
    needed = guide_grid.segments_needed(
        broad, narrow, f, length or guide_grid.default_guide_length_m(broad, f), flange
    )
    if needed <= guide_grid.MAX_SEGMENTS:
        # The guide solved with its walls, and its flange if it has one (validated all
        # around against full wave).
        return t.build(guide_grid.GridOpenWaveguide, guide, length, flange)
    # A guide too large for the wire grid: the aperture and its rim (or its flange's).
    return t.build(WalledAperture, guide, flange)


def _flange(t: Table) -> Any:
    """The optional ``flange_m = [w, h]`` as given (checked by the wall model) [m]."""
    if not t.has("flange_m"):
        return None
    value = t.raw("flange_m")
    if (
        not isinstance(value, list)
        or len(value) != 2
        or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)
    ):
        raise t.error("flange_m", f"must be two lengths [w, h] in metres, got {value!r}")
    return [float(v) for v in value]


def _build_horn(t: Table, f: float, p: float) -> Radiator:
    from keepclear.antennas.horn import PyramidalHorn

    broad, narrow = _feed_dimensions(t)
    width = t.number(
        "aperture_width_m", unit="m", minimum=0.0, exclusive_minimum=True, maximum=20.0
    )
    height = t.number(
        "aperture_height_m", unit="m", minimum=0.0, exclusive_minimum=True, maximum=20.0
    )
    length = t.number("length_m", unit="m", minimum=0.0, exclusive_minimum=True, maximum=50.0)
    from keepclear.antennas.walls import WalledAperture

    placement = _placement(t, "boresight", polarization=True)
    horn = t.build(PyramidalHorn, f, p, broad, narrow, width, height, length, placement=placement)
    flange = _flange(t)
    from keepclear.antennas import guide_grid
    from keepclear.antennas.walls import check_flange

    if flange is not None:
        flange = t.build(check_flange, flange, width, height)
    if _STAND_IN.get():  # every input checked: a point source for the solved horn
        return _stand_in(f, p, placement)
    needed = guide_grid.horn_segments_needed(broad, narrow, width, height, length, f, flange)
    if needed <= guide_grid.HORN_MAX_SEGMENTS:
        # The horn solved with its flare, feed and probes, and its flange if it has one
        # (validated all around against full wave).
        return t.build(guide_grid.GridHorn, horn, flange)
    # A horn too large for the wire grid: the aperture and its rim (or its flange's).
    flare = horn.geometry.flare_half_angles_deg
    return t.build(WalledAperture, horn, flange, flare_half_angles_deg=flare)


_BUILDERS: dict[str, Callable[[Table, float, float], Radiator]] = {
    "isotropic": _build_isotropic,
    "dipole": lambda t, f, p: _build_wire(t, f, p, "dipole"),
    "monopole": lambda t, f, p: _build_wire(t, f, p, "monopole"),
    "open-waveguide": _build_open_waveguide,
    "horn": _build_horn,
}


#: Source keys that do not define the radiator model: a source that differs from another
#: only in these reuses its radiator (the same object, or a copy with another power).
_NOT_MODEL = ("id", "power_w", "duty_cycle")
#: The radiators built while one scenario and its options are read, by model keys.
_RADIATORS: ContextVar[dict[tuple, Radiator] | None] = ContextVar(
    "keepclear_radiators", default=None
)


def _read_source(t: Table, index: int, frequency_hz: float) -> Source:
    # Refuse unknown keys first, so a typo is named before any value error it causes.
    for key in t.data:
        if key not in _ALL_SOURCE_KEYS:
            raise t.unknown_key(key, "is not a known source key", _ALL_SOURCE_KEYS)
    kind = t.string("antenna", choices=ANTENNA_KINDS)
    allowed = set(_COMMON_SOURCE_KEYS) | set(_KIND_KEYS[kind])
    for key in t.data:
        if key not in allowed:
            users = [k for k, keys in _KIND_KEYS.items() if key in keys]
            raise UnknownKeyError(
                f'does not apply to antenna = "{kind}" (it is a key of '
                f"{', '.join(users)}); allowed here: {', '.join(sorted(allowed))}",
                t.source,
                t.key_path(key),
                word=key,
                allowed=sorted(allowed),
                reason=f"a key of {', '.join(users)}, not of {kind}",
            )
    source_id = t.string("id", f"source{index + 1}")
    if not source_id.strip():
        raise t.error("id", "must not be empty")
    power = t.number("power_w", unit="W", minimum=0.0, exclusive_minimum=True, maximum=1e7)
    duty = t.number("duty_cycle", 1.0, minimum=0.0, exclusive_minimum=True, maximum=1.0)
    pool = _RADIATORS.get()
    model = (kind, frequency_hz, repr(sorted(i for i in t.data.items() if i[0] not in _NOT_MODEL)))
    known = pool.get(model) if pool is not None else None
    radiator = None
    if known is not None:  # an option's source whose model keys are the base's: no new model
        try:
            radiator = known if known.power_w == power else known.with_power(power)
        except NotImplementedError:  # a model that cannot change its power: build it anew
            radiator = None
    if radiator is None:
        radiator = _BUILDERS[kind](t, frequency_hz, power)
        if pool is not None and model not in pool:
            pool[model] = radiator
    t.finish(allowed)
    return Source(source_id, kind, power, duty, radiator)


# --------------------------------------------------------------- top level
def _read_thresholds(exposure: Table) -> tuple[limits_mod.Limit, ...]:
    """``[[exposure.threshold]]``: user thresholds, ids ``custom/NAME``."""
    out: list[limits_mod.Limit] = []
    names: dict[str, int] = {}
    for i, t in enumerate(exposure.tables("threshold")):
        name = t.string("name")
        if not re.fullmatch(r"[a-z0-9][a-z0-9.\-]*", name):
            raise t.error(
                "name",
                f"must be lower-case letters, digits, '.' or '-' (not empty), got {name!r}",
            )
        if name in names:
            raise t.error(
                "name",
                f"'{name}' is used by {entry_path('exposure.threshold', names[name])}; "
                "names must be unique",
            )
        names[name] = i
        basis = t.string("basis", choices=limits_mod.BASES)
        e_v_m = t.number("e_v_m", None, unit="V/m", minimum=0.0, exclusive_minimum=True)
        s_w_m2 = t.number(
            "power_density_w_m2", None, unit="W/m^2", minimum=0.0, exclusive_minimum=True
        )
        if e_v_m is not None and s_w_m2 is not None:
            raise t.error("power_density_w_m2", "give either e_v_m or power_density_w_m2, not both")
        if e_v_m is None and s_w_m2 is None:
            raise ScenarioError(
                "needs e_v_m [V/m] or power_density_w_m2 [W/m^2] (one of them)",
                t.source,
                t.path,
            )
        t.finish()
        out.append(
            limits_mod.custom_threshold(name, basis=basis, e_v_m=e_v_m, power_density_w_m2=s_w_m2)
        )
    return tuple(out)


def _read_limits(
    root: Table, frequency_hz: float
) -> tuple[tuple[str, ...], tuple[limits_mod.Limit, ...]]:
    exposure = root.table("exposure", None)
    thresholds: tuple[limits_mod.Limit, ...] = ()
    if exposure is None:
        ids = list(DEFAULT_LIMIT_IDS)
    else:
        thresholds = _read_thresholds(exposure)
        ids = exposure.string_list("limits")
        exposure.finish(["limits", "threshold"])
        if not ids:
            raise exposure.error(
                "limits", "must name at least one limit id; see `keepclear limits`"
            )
    seen = set()
    for i, limit_id in enumerate(ids):
        key = entry_path("limits", i)
        if limit_id in seen:
            raise root.error(f"exposure.{key}", f"'{limit_id}' is listed twice")
        seen.add(limit_id)
        try:
            limit = limits_mod.resolve_limit(limit_id, thresholds)
            limit.at(frequency_hz)
        except LimitError as exc:
            raise ScenarioError(exc.message, root.source, f"exposure.{key}") from None
    return tuple(ids), thresholds


def _read_points(root: Table) -> tuple[PointOfInterest, ...]:
    points = []
    names: set[str] = set()
    for t in root.tables("point"):
        name = t.string("name")
        if name in names:
            raise t.error("name", f"'{name}' is used by another [[point]]; names must be unique")
        names.add(name)
        position = t.vector("position_m", unit="m")
        span = None
        if t.has("average_over_height_m"):
            raw = t.raw("average_over_height_m")
            if (
                not isinstance(raw, list)
                or len(raw) != 2
                or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in raw)
            ):
                raise t.error(
                    "average_over_height_m",
                    f"must be two heights [z0, z1] in metres, got {raw!r}"[:160],
                )
            z0, z1 = (float(v) for v in raw)
            if not (np.isfinite(z0) and np.isfinite(z1)) or max(abs(z0), abs(z1)) > 1e6:
                raise t.error("average_over_height_m", "must be two finite heights [z0, z1] [m]")
            if not z1 > z0:
                raise t.error(
                    "average_over_height_m",
                    f"must be [z0, z1] with z1 > z0 (the line from z0 up to z1) [m], "
                    f"got [{z0:g}, {z1:g}]",
                )
            span = (z0, z1)
        points.append(PointOfInterest(name, position, span))
        t.finish()
    return tuple(points)


def _read_uncertainty(root: Table) -> Any:
    t = root.table("uncertainty", None)
    if t is None:
        return None
    from .uncertainty import DEFAULT_SAMPLES, DEFAULT_SEED, UNCERTAINTY_KEYS, UncertaintySpec

    for key in t.data:
        if key not in UNCERTAINTY_KEYS:
            raise t.unknown_key(key, "is not a known uncertainty key", UNCERTAINTY_KEYS)
    spec = UncertaintySpec(
        power_db=t.number("power_db", 0.0, unit="dB", minimum=0.0, maximum=20.0),
        gain_db=t.number("gain_db", None, unit="dB", minimum=0.0, maximum=20.0),
        reflection=t.number("reflection", 0.0, minimum=0.0, maximum=1.0),
        shielding_db=t.number("shielding_db", 0.0, unit="dB", minimum=0.0, maximum=100.0),
        position_m=t.number("position_m", 0.0, unit="m", minimum=0.0, maximum=10.0),
        samples=_integer(t, "samples", DEFAULT_SAMPLES, 1, 1_000_000),
        seed=_integer(t, "seed", DEFAULT_SEED, 0, 2**63 - 1),
    )
    t.finish(UNCERTAINTY_KEYS)
    return spec


def _integer(t: Table, key: str, default: int, minimum: int, maximum: int) -> int:
    if not t.has(key):
        return default
    value = t.raw(key)
    if isinstance(value, bool) or not isinstance(value, int) or not minimum <= value <= maximum:
        shown = (
            repr(value)
            if not isinstance(value, int) or value.bit_length() < 200
            else "a huge integer"
        )
        raise t.error(key, f"must be a whole number from {minimum} to {maximum}, got {shown}")
    return int(value)


def _read_reflectors(root: Table, frequency_hz: float) -> tuple[Any, ...]:
    tables = root.tables("reflector")
    if not tables:
        return ()
    from .scenario_tables import reflector_from_table

    return tuple(reflector_from_table(t, frequency_hz) for t in tables)


def _read_shields(root: Table, frequency_hz: float) -> tuple[Any, ...]:
    tables = root.tables("shield")
    if not tables:
        return ()
    from .scenario_tables import shield_from_table

    return tuple(shield_from_table(t, frequency_hz) for t in tables)


def _read_enclosure(root: Table, frequency_hz: float, sources: tuple[Source, ...]) -> Any:
    t = root.table("enclosure", None)
    if t is None:
        return None
    from .scenario_tables import enclosure_from_table

    enclosure = enclosure_from_table(t, frequency_hz)
    positions = np.array([s.position_m for s in sources])
    try:
        enclosure.check_sources(positions, [s.id for s in sources])
    except InputError as exc:
        raise exc.located(root.source, "enclosure") from None
    return enclosure


@contextmanager
def shared_radiators() -> Iterator[None]:
    """Scenarios loaded inside the block share the radiators whose model keys agree.

    A scenario and its options always do (see :func:`scenario_from_document`); inside
    this block so do scenarios loaded one after another, e.g. the same file read by
    several commands of one run.  A source then gets the radiator already built for its
    model keys (all keys but ``id``, ``power_w`` and ``duty_cycle``), or its
    :meth:`~keepclear.antennas.base.Radiator.with_power` copy, and inside
    :func:`keepclear.antennas.memo.shared_field_evaluations` their field evaluations are
    shared too.  Nested blocks use the outermost one's radiators.
    """
    if _RADIATORS.get() is not None:
        yield
        return
    token = _RADIATORS.set({})
    try:
        yield
    finally:
        _RADIATORS.reset(token)


def scenario_from_document(
    document: dict[str, Any], source: str, *, allow_options: bool = True
) -> Scenario:
    """Validate a parsed TOML document and build the :class:`Scenario`.

    Parameters
    ----------
    document : dict
        As returned by :func:`tomllib.loads`.
    source : str
        File name used in messages.
    allow_options : bool
        Whether ``[[option]]`` tables may appear (not inside an option).

    Raises
    ------
    ScenarioError
        For the first problem found, located by file and key path.
    """
    from .plausibility import recording_load_warnings

    if _RADIATORS.get() is not None:  # an option, read while its base is built
        with recording_load_warnings() as found:
            scenario = _scenario_from_document(document, source, allow_options)
        return replace(scenario, load_warnings=tuple(found))
    # The base and its options share the radiators whose model keys agree (see _read_source).
    token = _RADIATORS.set({})
    try:
        with recording_load_warnings() as found:
            scenario = _scenario_from_document(document, source, allow_options)
    finally:
        _RADIATORS.reset(token)
    return replace(scenario, load_warnings=tuple(found))


def _scenario_from_document(document: dict[str, Any], source: str, allow_options: bool) -> Scenario:
    root = Table(document, "", source)
    for key in root.data:
        allowed = (
            _TOP_KEYS if allow_options else tuple(k for k in _TOP_KEYS if k not in _VARIANT_KEYS)
        )
        if key not in allowed:
            raise root.unknown_key(key, "is not a known top-level key", allowed)
    name = root.string("name", Path(source).stem)
    frequency = root.number(
        "frequency_hz",
        DEFAULT_FREQUENCY_HZ,
        unit="Hz",
        minimum=FREQUENCY_RANGE_HZ[0],
        maximum=FREQUENCY_RANGE_HZ[1],
    )
    mode = root.string("reflections", "envelope", choices=REFLECTION_MODES)
    source_tables = root.tables("source")
    if not source_tables:
        raise root.error("source", "at least one [[source]] table is required")
    if len(source_tables) > 200:
        raise root.error("source", f"at most 200 sources are supported, got {len(source_tables)}")
    sources = tuple(_read_source(t, i, frequency) for i, t in enumerate(source_tables))
    ids = [s.id for s in sources]
    for i, sid in enumerate(ids):
        if ids.index(sid) != i:
            raise root.error(
                f"{entry_path('source', i)}.id",
                f"'{sid}' is used by {entry_path('source', ids.index(sid))}; ids must be unique",
            )
    limit_ids, thresholds = _read_limits(root, frequency)
    reflectors = _read_reflectors(root, frequency)
    shields = _read_shields(root, frequency)
    enclosure = _read_enclosure(root, frequency, sources)
    points = _read_points(root)
    uncertainty = _read_uncertainty(root)
    root.raw("option", None)
    root.raw("sweep", None)
    scenario = Scenario(
        name=name,
        path=source,
        frequency_hz=frequency,
        reflections=mode,
        sources=sources,
        limit_ids=limit_ids,
        reflectors=reflectors,
        shields=shields,
        enclosure=enclosure,
        points=points,
        document=document,
        uncertainty=uncertainty,
        thresholds=thresholds,
    )
    if allow_options and "option" in document:
        scenario = replace(scenario, options=_read_options(root, document, source))
    if allow_options and "sweep" in document:
        scenario = replace(scenario, options=scenario.options + _read_sweeps(root, scenario))
    if allow_options:
        from .plausibility import warn_implausible

        warn_implausible(scenario)
    return scenario


def _merge_option(base: dict[str, Any], option: Table) -> dict[str, Any]:
    merged = copy.deepcopy(base)
    merged.pop("option", None)
    merged.pop("sweep", None)
    for key, value in option.data.items():
        if key in ("name", "description"):
            continue
        if key not in _TOP_KEYS or key in _VARIANT_KEYS:
            allowed = [k for k in _TOP_KEYS if k not in _VARIANT_KEYS] + ["name", "description"]
            raise option.unknown_key(key, "is not a key an option may override", allowed)
        if key == "source":
            merged["source"] = _merge_sources(merged.get("source", []), value, option)
        elif key == "enclosure" and isinstance(value, dict) and isinstance(merged.get(key), dict):
            merged[key] = {**merged[key], **copy.deepcopy(value)}
        else:
            merged[key] = copy.deepcopy(value)
    return merged


def _merge_sources(base: list[Any], changes: Any, option: Table) -> list[Any]:
    """Merge ``[[option.source]]`` tables into the base sources by ``id``."""
    if isinstance(changes, dict):
        changes = [changes]
    if not isinstance(changes, list) or not all(isinstance(c, dict) for c in changes):
        raise option.error("source", "must be an array of tables ([[option.source]])")
    out = copy.deepcopy(base)
    base_ids = [
        s.get("id", f"source{i + 1}") if isinstance(s, dict) else None for i, s in enumerate(out)
    ]
    for i, change in enumerate(changes):
        sid = change.get("id")
        if sid in base_ids and "antenna" not in change:
            j = base_ids.index(sid)
            out[j] = {**out[j], **copy.deepcopy(change)}
        elif sid in base_ids:
            # A new antenna replaces the source whole: the old kind's keys would not apply.
            out[base_ids.index(sid)] = copy.deepcopy(change)
        elif "antenna" in change:
            out.append(copy.deepcopy(change))
        else:
            raise option.error(
                f"{entry_path('source', i)}.id",
                f"must name a base source ({', '.join(str(b) for b in base_ids)}) to change it, "
                "or the table must be a whole new source with `antenna`"
                + suggest(str(sid), map(str, base_ids)),
            )
    return out


def _read_options(root: Table, document: dict[str, Any], source: str) -> tuple[Option, ...]:
    options = []
    names: set[str] = set()
    for t in root.tables("option"):
        name = t.string("name")
        if name in names:
            raise t.error("name", f"'{name}' names two options; option names must be unique")
        names.add(name)
        description = t.string("description", "")
        merged = _merge_option(document, t)
        try:
            scenario = scenario_from_document(merged, source, allow_options=False)
        except InputError as exc:
            raise ScenarioError(
                f"in option '{name}': {exc.key}: {exc.message}" if exc.key else exc.message,
                source,
                t.path,
            ) from None
        options.append(
            Option(name, description, replace(scenario, name=f"{scenario.name} — {name}"))
        )
    return tuple(options)


def _read_sweeps(root: Table, scenario: Scenario) -> tuple[Option, ...]:
    """The options of every ``[[sweep]]`` (see :mod:`keepclear.fields.sweep`)."""
    out: list[Option] = []
    names = {o.name for o in scenario.options}
    for t in root.tables("sweep"):
        key = t.string("key")
        values = t.raw("values")
        if not isinstance(values, list):
            raise t.error("values", "must be a list of values, one option each")
        label = t.string("name", None)
        t.finish(("key", "values", "name"))
        out += _sweep_options(scenario, key, values, label, (root.source, t.path), names)
    return tuple(out)


def _sweep_options(
    scenario: Scenario,
    key: str,
    values: list[Any],
    label: str | None,
    where: tuple[str, str],
    names: set[str],
) -> list[Option]:
    from .sweep import expand_sweep

    def build(document: dict[str, Any]) -> Scenario:
        return scenario_from_document(document, scenario.path, allow_options=False)

    out = []
    for name, description, variant in expand_sweep(
        scenario.document, key, values, label, build, where
    ):
        if name in names:
            raise ScenarioError(
                f"makes an option named '{name}', which another option already has",
                where[0],
                where[1],
            )
        names.add(name)
        out.append(Option(name, description, replace(variant, name=f"{scenario.name} — {name}")))
    return out


def with_sweep(scenario: Scenario, key: str, values: list[Any]) -> Scenario:
    """The scenario with one more sweep's options (``compare --sweep KEY=V1,V2``).

    Raises
    ------
    ScenarioError
        As for a ``[[sweep]]`` in the file, located at the ``--sweep`` argument.
    """
    names = {o.name for o in scenario.options}
    options = _sweep_options(scenario, key, values, None, ("argument", "--sweep"), names)
    return replace(scenario, options=scenario.options + tuple(options))


def check_sweeps(
    document: dict[str, Any],
    path: str | Path,
    sweeps: Sequence[tuple[str, list[Any]]],
    check_base: Callable[[Scenario], None] | None = None,
) -> None:
    """Refuse what the scenario and its command-line sweeps would be refused for, quickly.

    The scenario (its options and sweeps too) and every swept value are read as
    :func:`load_scenario` and :func:`with_sweep` read them, model input checks included,
    except that a guide, a horn or a monopole on a finite ground then gets a point source
    at its place instead of its solved wire grid: a sweep's key that its entry does not
    take, or a value that makes an impossible scenario, is refused with the full
    reading's message before any model is solved or its tables built (the first run of a
    new horn solves it for half a minute).  ``check_base``, when given, is called on the
    scenario before the sweeps are added (the command line's ``--limit`` and
    ``--rank-by`` checks, so that they keep their turn).  Nothing is returned, and no
    warning is given: the full reading that follows gives them.  The scenarios read here
    never share models with others (the radiators of :func:`shared_radiators` are left
    alone).  What only a solve can find is left to the full reading.

    Raises
    ------
    InputError
        The first problem found, as the full reading would name it.
    """
    stand_in = _STAND_IN.set(True)
    pool = _RADIATORS.set(None)  # point sources must never reach a shared pool
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            scenario = scenario_from_document(document, str(path))
            if check_base is not None:
                check_base(scenario)
            for key, values in sweeps:
                scenario = with_sweep(scenario, key, list(values))
    finally:
        _RADIATORS.reset(pool)
        _STAND_IN.reset(stand_in)


def load_scenario(path: str | Path, document: dict[str, Any] | None = None) -> Scenario:
    """Read and validate a scenario file.

    Parameters
    ----------
    path : str or Path
        The TOML file.
    document : dict, optional
        The file already parsed by
        :func:`~keepclear.fields.arguments.read_scenario_document` (it is not read again).

    Returns
    -------
    Scenario

    Raises
    ------
    ScenarioError
        If the file is missing, a directory, not UTF-8 TOML, or invalid.
    """
    label = str(path)
    if document is None:
        document = read_scenario_document(path)
    try:
        return scenario_from_document(document, label)
    except RecursionError:
        raise ScenarioError("is nested too deeply to be a scenario", label) from None
