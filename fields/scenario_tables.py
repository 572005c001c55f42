"""Reading the surroundings from a scenario's TOML tables: reflectors, shields, the enclosure.

The TOML layer (:mod:`.validate`) meets the physics models here and nowhere else: each
reader checks every key of one table (type, range, unit sense, did-you-mean for a
misspelt key), then builds the frozen model object of :mod:`.reflection`,
:mod:`.shield` or :mod:`.enclosure`.  A :class:`~keepclear.antennas.base.ModelInputError`
the model raises is relocated to the file and key path.  The physics modules themselves
know nothing of files or tables.
"""

from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np

from keepclear.antennas.base import ModelInputError, ModelRangeWarning

from . import shielding as sh
from .enclosure import AXES, CELL_SHAPES, FACES, OPENING_TYPES, Enclosure, Opening
from .errors import entry_path
from .materials import MATERIAL_NAMES, out_of_range_message
from .reflection import REFLECTOR_KEYS, Reflector
from .shield import (
    HOLE_SHAPES,
    LATTICES,
    SHIELD_TYPES,
    MeshSpec,
    PerforatedSpec,
    RatedSpec,
    SheetSpec,
    Shield,
    ShieldSpec,
    SlotSpec,
)
from .validate import Table


# ------------------------------------------------------------------ reflectors
def reflector_from_table(table: Table, frequency_hz: float) -> Reflector:
    """Build a :class:`Reflector` from one ``[[reflector]]`` table.

    Parameters
    ----------
    table : Table
        The table, with keys ``point_m``, ``normal`` and exactly one of
        ``material`` | (``relative_permittivity`` and ``conductivity_s_m``) |
        ``reflection_coefficient``, plus an optional ``name``.
    frequency_hz : float
        The scenario frequency, for the material range check [Hz].

    Returns
    -------
    Reflector

    Raises
    ------
    ScenarioError
        Located at the offending key: missing or conflicting forms, out-of-range
        values, an unknown material (with the known names and a suggestion), a
        zero normal, an unknown key.

    Warns
    -----
    ModelRangeWarning
        When the frequency is outside the material's ITU-R P.2040 range.
    """
    point = table.vector("point_m", unit="m")
    normal = table.vector("normal", nonzero=True)
    name = table.string("name", None)
    has = {key: key in table.data for key in REFLECTOR_KEYS}
    forms = []
    if has["material"]:
        forms.append("material")
    if has["relative_permittivity"] or has["conductivity_s_m"]:
        forms.append(
            "relative_permittivity" if has["relative_permittivity"] else "conductivity_s_m"
        )
    if has["reflection_coefficient"]:
        forms.append("reflection_coefficient")
    if not forms:
        table.finish(REFLECTOR_KEYS)  # a misspelt key gets its "did you mean" first
        raise table.error(
            "material",
            "is required here: give material = an ITU-R P.2040 name or 'metal' ("
            + ", ".join(MATERIAL_NAMES)
            + "), or relative_permittivity and conductivity_s_m, or reflection_coefficient",
        )
    if len(forms) > 1:
        raise table.error(
            forms[1],
            f"conflicts with {forms[0]}: give exactly one of material, "
            "relative_permittivity + conductivity_s_m, or reflection_coefficient",
        )
    label = name if name else (table.path or "reflector")
    kwargs: dict[str, object] = {}
    if forms[0] == "material":
        kwargs["material"] = table.string("material")
    elif forms[0] in ("relative_permittivity", "conductivity_s_m"):
        kwargs["relative_permittivity"] = table.number("relative_permittivity", minimum=1.0)
        kwargs["conductivity_s_m"] = table.number("conductivity_s_m", minimum=0.0, unit="S/m")
    else:
        kwargs["reflection_coefficient"] = table.number(
            "reflection_coefficient", minimum=-1.0, maximum=1.0
        )
    kwargs.update(_finite_plate_keys(table))
    reflector = table.build(Reflector, point_m=point, normal=normal, label=label, **kwargs)
    if reflector.material is not None:
        message = out_of_range_message(reflector.material, frequency_hz)
        if message is not None:
            where = ": ".join(p for p in (table.source, table.key_path("material")) if p)
            warnings.warn(f"{where}: {message}", ModelRangeWarning, stacklevel=2)
    table.finish()
    return reflector


def _finite_plate_keys(table: Table) -> dict[str, object]:
    """The optional ``size_m = [w, h]`` and ``up`` of a finite reflector, checked."""
    out: dict[str, object] = {}
    value = table.raw("size_m", None)  # read even when absent: a misspelling gets its hint
    if value is not None:
        if (
            not isinstance(value, list)
            or len(value) != 2
            or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in value)
            or not all(math.isfinite(float(v)) and 0 < float(v) <= 1e4 for v in value)
        ):
            raise table.error(
                "size_m",
                f"must be [width, height], two numbers > 0 and <= 10000 [m], got {value!r}",
            )
        out["size_m"] = (float(value[0]), float(value[1]))
    up = table.vector("up", None, nonzero=True)
    if up is not None:
        if "size_m" not in out:
            raise table.error(
                "up", "is only for a finite reflector: give size_m = [width, height] too"
            )
        out["up"] = up
    return out


# --------------------------------------------------------------------- shields
def _spec_from_table(table: Table, kind: str) -> ShieldSpec:
    def metal(default: str | None) -> sh.Metal | None:
        name = table.string("metal", default, choices=sh.METAL_CHOICES)
        return None if name is None else sh.metal_from_name(name)

    if kind == "sheet":
        sheet_metal = sh.metal_from_name(table.string("metal", choices=sh.METAL_CHOICES))
        thickness = table.number(
            "thickness_m", unit="m", minimum=0, exclusive_minimum=True, maximum=1.0
        )
        return table.build(SheetSpec, sheet_metal, thickness)
    if kind == "perforated":
        return table.build(
            PerforatedSpec,
            table.number("hole_size_m", unit="m", minimum=0, exclusive_minimum=True),
            table.number("pitch_m", unit="m", minimum=0, exclusive_minimum=True),
            table.number("thickness_m", unit="m", minimum=0, exclusive_minimum=True, maximum=1.0),
            table.string("hole_shape", "round", choices=HOLE_SHAPES),
            table.string("lattice", "triangular", choices=LATTICES),
            metal(sh.WORST_METAL),
        )
    if kind == "mesh":
        return table.build(
            MeshSpec,
            table.number("pitch_m", unit="m", minimum=0, exclusive_minimum=True),
            table.number("wire_diameter_m", unit="m", minimum=0, exclusive_minimum=True),
            metal(sh.WORST_METAL),
        )
    if kind == "slot":
        length = table.number("slot_length_m", unit="m", minimum=0, exclusive_minimum=True)
        count = table.number("slot_count", 1, minimum=1, maximum=1e9)
        if float(count) != int(count):
            raise table.error("slot_count", f"must be a whole number >= 1, got {count!r}")
        m = metal(None)
        thickness = table.number(
            "thickness_m", None, unit="m", minimum=0, exclusive_minimum=True, maximum=1.0
        )
        if thickness is not None and m is None:
            m = sh.METALS[sh.WORST_METAL]
        return table.build(SlotSpec, length, int(count), m, thickness)
    shielding_db = table.number("shielding_db", unit="dB", minimum=0, maximum=300)
    return table.build(RatedSpec, shielding_db)


def shield_from_table(table: Table, frequency_hz: float) -> Shield:
    """Read one ``[[shield]]`` table.

    Parameters
    ----------
    table : Table
        The table, with its key path (``shield.1``).
    frequency_hz : float
        Scenario frequency [Hz].

    Returns
    -------
    Shield

    Raises
    ------
    ScenarioError
        For a missing, unknown or out-of-range key, located at its key path.

    Notes
    -----
    Keys: ``id``, ``center_m``, ``normal``, ``width_m``, ``height_m``, ``up``,
    ``edge_margin_m`` and ``type`` = ``"sheet"`` (``metal``, ``thickness_m``) |
    ``"perforated"`` (``hole_size_m``, ``pitch_m``, ``thickness_m``, ``hole_shape``,
    ``lattice``, ``metal``) | ``"mesh"`` (``pitch_m``, ``wire_diameter_m``, ``metal``) |
    ``"slot"`` (``slot_length_m``, ``slot_count``, ``metal``, ``thickness_m``) |
    ``"rated"`` (``shielding_db``).  ``type`` may be left out when ``shielding_db`` is
    given.
    """
    label = table.string("id", table.path or "shield")
    center = table.vector("center_m", unit="m")
    normal = table.vector("normal", nonzero=True)
    up = table.vector("up", None, nonzero=True)
    width = table.number("width_m", unit="m", minimum=0, exclusive_minimum=True, maximum=1e4)
    height = table.number("height_m", unit="m", minimum=0, exclusive_minimum=True, maximum=1e4)
    margin = table.number("edge_margin_m", None, unit="m", minimum=0, maximum=1e4)
    kind = table.string("type", None, choices=SHIELD_TYPES)
    if kind is None:
        if not table.has("shielding_db"):
            raise table.error(
                "type", f"is required here: one of {', '.join(repr(k) for k in SHIELD_TYPES)}"
            )
        kind = "rated"
    spec = _spec_from_table(table, kind)
    table.finish()
    return table.build(
        Shield, center, normal, width, height, spec, float(frequency_hz), up, margin, label
    )


# ------------------------------------------------------------------ enclosure
def _offset(table: Table) -> tuple[float, float]:
    value = table.raw("offset_m", [0.0, 0.0])
    if (
        not isinstance(value, list)
        or len(value) != 2
        or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in value)
        or not all(math.isfinite(float(v)) for v in value)
    ):
        raise table.error(
            "offset_m",
            "must be two finite numbers [a, b] [m]: the offset from the face centre along "
            "the face's two in-plane axes in x, y, z order (a +x face: [y, z])",
        )
    return float(value[0]), float(value[1])


def _positive_number(table: Table, key: str, default: Any = ..., maximum: float = 1e3) -> Any:
    if default is ...:
        return table.number(key, unit="m", minimum=0, exclusive_minimum=True, maximum=maximum)
    return table.number(key, default, unit="m", minimum=0, exclusive_minimum=True, maximum=maximum)


def _count(table: Table, default: int = 1) -> int:
    value = table.number("count", default, minimum=1, maximum=1e9)
    if float(value) != int(value):
        raise table.error("count", f"must be a whole number >= 1, got {value!r}")
    return int(value)


def opening_from_table(table: Table) -> Opening:
    """Read one ``[[enclosure.opening]]`` table.

    Parameters
    ----------
    table : Table
        The table (key path ``enclosure.opening[i]``).

    Returns
    -------
    Opening

    Notes
    -----
    Keys: ``id``, ``face``, ``type``, ``offset_m``, and per type: hole (``diameter_m``,
    ``depth_m``, ``count``); slot (``length_m``, ``width_m``, ``along``, ``depth_m``,
    ``count``); vent-array (``cell``, ``cell_size_m``, ``pitch_m``, ``depth_m``,
    ``count``, ``lattice``); mesh-window (``width_m``, ``height_m``, ``pitch_m`` and
    ``wire_diameter_m`` or ``hole_diameter_m`` with ``depth_m``, ``lattice``);
    antenna-port (``diameter_m``).
    """
    label = table.string("id", ".".join(table.path.split(".")[-2:]) or "opening")
    face = table.string("face", choices=FACES)
    kind = table.string("type", choices=OPENING_TYPES)
    offset = _offset(table)
    kw: dict[str, Any] = {}
    if kind in ("hole", "antenna-port"):
        kw["diameter_m"] = _positive_number(table, "diameter_m")
        if kind == "hole":
            kw["depth_m"] = _positive_number(table, "depth_m", None)
            kw["count"] = _count(table)
    elif kind == "slot":
        kw["length_m"] = _positive_number(table, "length_m")
        kw["width_m"] = _positive_number(table, "width_m")
        kw["along"] = table.string("along", None, choices=AXES)
        kw["depth_m"] = _positive_number(table, "depth_m", None)
        kw["count"] = _count(table)
    elif kind == "vent-array":
        kw["cell"] = table.string("cell", choices=CELL_SHAPES)
        kw["cell_size_m"] = _positive_number(table, "cell_size_m")
        kw["pitch_m"] = _positive_number(table, "pitch_m")
        kw["depth_m"] = _positive_number(table, "depth_m")
        kw["count"] = _count(table)
        kw["lattice"] = table.string("lattice", "triangular", choices=("triangular", "square"))
    else:  # mesh-window
        kw["width_m"] = _positive_number(table, "width_m")
        kw["height_m"] = _positive_number(table, "height_m")
        kw["pitch_m"] = _positive_number(table, "pitch_m")
        if table.has("wire_diameter_m") or not table.has("hole_diameter_m"):
            kw["wire_diameter_m"] = _positive_number(table, "wire_diameter_m", None)
        if table.has("hole_diameter_m"):
            kw["hole_diameter_m"] = _positive_number(table, "hole_diameter_m")
            kw["depth_m"] = _positive_number(table, "depth_m", None)
            kw["lattice"] = table.string("lattice", "triangular", choices=("triangular", "square"))
    table.finish()
    return table.build(Opening, face, kind, offset, label, **kw)


def enclosure_from_table(table: Table, frequency_hz: float) -> Enclosure:
    """Read the ``[enclosure]`` table and its ``[[enclosure.opening]]`` tables.

    Parameters
    ----------
    table : Table
        The table (key path ``enclosure``).
    frequency_hz : float
        Scenario frequency [Hz].

    Returns
    -------
    Enclosure

    Raises
    ------
    ScenarioError
        Located at the key path, for a missing, unknown or out-of-range key, an
        unknown metal or face, or an opening larger than (or running off) its face.

    Warns
    -----
    ModelRangeWarning
        When the box is too small for the stirred-cavity model.

    Notes
    -----
    Keys: ``id``, ``center_m`` or ``min_corner_m`` (exactly one), ``size_m`` (inner
    size along x, y, z), ``metal``, ``thickness_m``, ``load_absorption_cross_section_m2``,
    ``load_water_volume_m3``, and ``[[enclosure.opening]]``.
    """
    label = table.string("id", "enclosure")
    has_center, has_corner = table.has("center_m"), table.has("min_corner_m")
    if has_center == has_corner:
        raise table.error(
            "center_m",
            "give exactly one of center_m (cavity centre) or min_corner_m "
            "(cavity corner with the smallest x, y, z) [m]",
        )
    size = table.vector("size_m", unit="m")
    if np.any(size <= 0):
        raise table.error("size_m", f"must be three inner sizes > 0 [m], got {size.tolist()}")
    if has_center:
        corner = table.vector("center_m", unit="m") - size / 2
    else:
        corner = table.vector("min_corner_m", unit="m")
    metal = sh.metal_from_name(table.string("metal", choices=sh.METAL_CHOICES))
    thickness = table.number(
        "thickness_m", unit="m", minimum=0, exclusive_minimum=True, maximum=0.1
    )
    load = table.number("load_absorption_cross_section_m2", 0.0, unit="m^2", minimum=0, maximum=1e4)
    water = table.number("load_water_volume_m3", 0.0, unit="m^3", minimum=0, maximum=1e3)
    openings = tuple(opening_from_table(t) for t in table.tables("opening"))
    table.finish()
    enclosure = table.build(
        Enclosure, corner, size, metal, thickness, openings, load, water, label, table.source
    )
    # Frequency-dependent checks (an array pitch beyond lambda/2, vents that do not cut
    # off) at load time, located at the opening's key path.
    for i, opening in enumerate(openings):
        try:
            opening.leak(frequency_hz, thickness, warn=True)
        except ModelInputError as exc:
            raise table.error(f"{entry_path('opening', i)}.{exc.parameter}", exc.message) from None
    try:
        enclosure.power_balance(1.0, frequency_hz)
    except ModelInputError as exc:
        raise table.error(exc.parameter, exc.message) from None
    message = enclosure.validity_warning(frequency_hz)
    if message is not None:
        warnings.warn(f"{table.key_path('size_m')}: {message}", ModelRangeWarning, stacklevel=2)
    return enclosure


__all__ = [
    "enclosure_from_table",
    "opening_from_table",
    "reflector_from_table",
    "shield_from_table",
]
