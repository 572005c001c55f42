"""Option comparison: the base scenario and each ``[[option]]`` assessed and ranked.

Each variant (the base, then every option as the loader merged it) gets

* the keep-out distance for each selected limit (:mod:`keepclear.fields.keepout`),
* the zone area on a horizontal plane at a common height (by default the first
  source's height, not the floor), on one common grid,
* the leakage 5 cm from the enclosure where there is one (the enclosure model's
  ``face_density_5cm``, with the enclosed sources' power while radiating: the
  21 CFR 1030.10 reading is taken with the source on),
* the worst named place: the ``[[point]]`` with the largest exposure quotient
  over the selected limits.

* the value at every named place (the ``places`` of ``compare --json``): the
  time-averaged power density, its change in dB against the base, and the
  quotient of each limit.

Ranking (``rank_by``):

* ``"keepout"`` (default): the smallest "largest keep-out distance across the
  selected limits" first (each with the model's gain uncertainty where one is
  stated, the figure to mark out), then the smaller zone area of the strictest
  limit, then the worst named place's quotient;
* ``"place:NAME"``: the smallest time-averaged power density at the named place
  first, then as ``"keepout"``;
* ``"zone-area"``: the smallest zone area (on that horizontal plane) of the
  strictest limit first, then as ``"keepout"``.

The ranked table shows the value it ranks by as its first column after the option:
the keep-out distances, the zone area, or the density at the named place (W/m2 and
mW/cm2, and its change in dB against the base).

Ties are decided with a stated tolerance, never by the last bit of a float:
two keep-out distances within 1 mm, two areas within 0.001 m^2 (or 1e-6
relative), two densities or quotients within 1e-6 relative count as equal, and
the next criterion decides.  When every criterion ties, the variants keep the
scenario's order (the base first, then the options as written).  The ranking
says which option needs the least space, or gives the least exposure at the
chosen place; it is not a judgement that any option is safe.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from keepclear.antennas.memo import sharing_evaluations

from . import maps, shield
from .arguments import check_rank_by_names
from .cautions import CAUTION_TEXT
from .diffraction import RECTANGLE_RIPPLE
from .field import evaluate
from .keepout import KeepoutResult, keepout_distances
from .report_text import (
    change_text,
    density_text,
    pair_text,
    place_cell,
    ranked_columns,
    ranked_place,
    share_text,
    shows_leakage,
)
from .scenario import Scenario
from .workers import Pending, run_each, start_each, worker_count

SCHEMA_VERSION = 1
ProgressFactory = Callable[[str], Callable[[int, int], None] | None]


@dataclass(frozen=True)
class Variant:
    """One assessed variant: the base or an option.

    Parameters
    ----------
    name : str
        ``"base"`` or the option's name.
    description : str
    scenario : Scenario
    keepouts : tuple of KeepoutResult
    horizontal : MapRun
        The map of the common horizontal plane on the common grid.
    leakage_5cm_w_m2 : float or None
        Largest leakage power density 5 cm from the enclosure [W m^-2].
    worst_point : dict or None
        ``{"name", "quotient", "limit", "power_density_w_m2"}``.
    places : tuple of dict
        One ``{"name", "power_density_w_m2", "quotients"}`` per named place, in the
        scenario's order.
    order : int
        Position in the scenario (0 for the base): the last tie-break.
    panel : MapRun or None
        The horizontal map on the variant's own, smaller extent for the comparison figure
        (None where the common grid already fits it).
    """

    name: str
    description: str
    scenario: Scenario
    keepouts: tuple[KeepoutResult, ...]
    horizontal: maps.MapRun
    leakage_5cm_w_m2: float | None
    worst_point: dict[str, Any] | None
    places: tuple[dict[str, Any], ...] = field(default=())
    order: int = 0
    panel: Any = None

    @property
    def is_base(self) -> bool:
        """Whether this is the base scenario."""
        return self.name == "base"

    @property
    def largest_keepout_m(self) -> float:
        """The largest keep-out distance (with uncertainty) across the limits [m]."""
        return max((k.recommended_distance_m for k in self.keepouts), default=0.0)

    @property
    def zone_area_m2(self) -> float:
        """Zone area of the strictest limit (the largest zone) on the horizontal plane [m^2]."""
        return max((zs[-1].area_m2 for zs in self.horizontal.zones.values()), default=0.0)

    def place_density_w_m2(self, name: str) -> float:
        """Time-averaged power density at the named place [W m^-2]."""
        for place in self.places:
            if place["name"] == name:
                return float(place["power_density_w_m2"])
        raise KeyError(name)


#: Tolerances of the ranking: (absolute, relative) per criterion.  Values closer than
#: ``max(absolute, relative * larger)`` are a tie and the next criterion decides.
RANK_TOLERANCE = {
    "keepout_m": (1e-3, 0.0),
    "zone_area_m2": (1e-3, 1e-6),
    "power_density_w_m2": (0.0, 1e-6),
    "quotient": (0.0, 1e-6),
}

#: An option's figure panel gets its own extent below this fraction of the common one.
#: Both are default half-widths as drawn (rounded up to 0.5 m below 10 m, see
#: :func:`maps.default_half_extent_m`).  Below 0.7 the option's zone would cover less
#: than half (0.7² = 0.49) of the area on the common panel that it covers on its own;
#: an option whose keep-out is 0.6 of the largest (its own extent rounds to about 0.63 of
#: the common one) gets its own panel.
OWN_PANEL_FRACTION = 0.7


def _criteria(rank_by: str) -> list[tuple[str, Callable[[Variant], float]]]:
    """The ranking criteria, most important first, as (tolerance key, value) pairs."""
    keepout = [
        ("keepout_m", lambda v: v.largest_keepout_m),
        ("zone_area_m2", lambda v: v.zone_area_m2),
        ("quotient", lambda v: v.worst_point["quotient"] if v.worst_point else 0.0),
    ]
    if rank_by == "keepout":
        return keepout
    if rank_by == "zone-area":
        return [keepout[1], keepout[0], keepout[2]]
    name = rank_by.removeprefix("place:")
    return [("power_density_w_m2", lambda v: v.place_density_w_m2(name)), *keepout]


def rank_variants(variants: Sequence[Variant], rank_by: str = "keepout") -> list[Variant]:
    """The variants in rank order, best first, ties decided by :data:`RANK_TOLERANCE`.

    Parameters
    ----------
    variants : sequence of Variant
    rank_by : str
        ``"keepout"``, ``"zone-area"`` or ``"place:NAME"``.

    Returns
    -------
    list of Variant
    """
    criteria = _criteria(rank_by)

    def compare(a: Variant, b: Variant) -> int:
        for key, value in criteria:
            x, y = value(a), value(b)
            absolute, relative = RANK_TOLERANCE[key]
            if abs(x - y) > max(absolute, relative * max(abs(x), abs(y))):
                return -1 if x < y else 1
        return (a.order > b.order) - (a.order < b.order)

    return sorted(variants, key=functools.cmp_to_key(compare))


def tolerance_text() -> str:
    """The tie rule of the ranking in words, from :data:`RANK_TOLERANCE`."""
    k_abs = RANK_TOLERANCE["keepout_m"][0]
    a_abs, a_rel = RANK_TOLERANCE["zone_area_m2"]
    d_rel = RANK_TOLERANCE["power_density_w_m2"][1]
    q_rel = RANK_TOLERANCE["quotient"][1]

    def small(x: float) -> str:
        # 1e-06 reads better as 1e-6.
        mantissa, _, exponent = f"{x:g}".partition("e")
        return f"{mantissa}e{int(exponent)}" if exponent else mantissa

    return (
        f" (ties: keep-out distances within {1000 * k_abs:g} mm, zone areas within "
        f"{small(a_abs)} m2 or {small(a_rel)} relative, densities within {small(d_rel)} and "
        f"quotients within {small(q_rel)} relative count as equal; full ties keep the "
        "scenario's order)"
    )


def ranked_by_text(rank_by: str, where: str = "source height") -> str:
    """The sentence that says how the variants were ranked.

    ``where`` names the horizontal plane of the zones: ``"source height (z = 1.10 m)"``
    (:attr:`keepclear.fields.maps.Plane.where`).
    """
    zone = f"zone area at {where} of the strictest limit"
    keepout = (
        "largest keep-out distance across the limits (with model uncertainty), "
        f"then {zone}, then worst named place"
    )
    if rank_by == "keepout":
        return keepout
    if rank_by == "zone-area":
        return (
            f"{zone}, then largest keep-out distance across "
            "the limits (with model uncertainty), then worst named place"
        )
    return f"time-averaged power density at {rank_by.removeprefix('place:')}, then {keepout}"


def leakage_5cm_w_m2(scenario: Scenario) -> float | None:
    """The enclosure model's largest leakage density 5 cm from its faces [W m^-2].

    The power is that of the enclosed sources while radiating (duty cycle not
    applied: the product limit is read with the source on).  None without an
    enclosure.  The same figure as ``leakage_5cm_w_m2`` in the ``"enclosure"`` object
    of ``keepout --json`` and ``assessment.json`` (:func:`leakage.enclosure_leakage`).
    """
    from .leakage import enclosure_leakage

    block = enclosure_leakage(scenario, limit_ids=())
    return None if block is None else block["leakage_5cm_w_m2"]


def place_values(
    scenario: Scenario, limit_ids: Sequence[str]
) -> tuple[tuple[dict[str, Any], ...], dict[str, Any] | None]:
    """The named places' densities and quotients, and the worst of them.

    Parameters
    ----------
    scenario : Scenario
    limit_ids : sequence of str

    Returns
    -------
    places : tuple of dict
        ``{"name", "power_density_w_m2", "quotients"}`` per ``[[point]]``, in order.
    worst : dict or None
        ``{"name", "position_m", "quotient", "limit", "power_density_w_m2"}`` of the
        place with the largest quotient over the limits (the first such place and
        limit on a tie), or None without named places.
    """
    if not scenario.points:
        return (), None
    from . import limits as limits_mod

    pts = np.array([p.position_m for p in scenario.points])
    res = evaluate(scenario, pts)
    quotients = {}
    for limit_id in limit_ids:
        quotients[limit_id] = limits_mod.field_quotient(scenario.limit_value(limit_id), res)
    places = tuple(
        {
            "name": p.name,
            "power_density_w_m2": float(res.power_density_w_m2[i]),
            "quotients": {limit_id: float(q[i]) for limit_id, q in quotients.items()},
        }
        for i, p in enumerate(scenario.points)
    )
    best: dict[str, Any] | None = None
    for limit_id, q in quotients.items():
        i = int(np.argmax(q))
        if best is None or q[i] > best["quotient"]:
            best = {
                "name": scenario.points[i].name,
                "position_m": [float(x) for x in pts[i]],
                "quotient": float(q[i]),
                "limit": limit_id,
                "power_density_w_m2": float(res.power_density_w_m2[i]),
            }
    return places, best


def worst_point(scenario: Scenario, limit_ids: Sequence[str]) -> dict[str, Any] | None:
    """The named point with the largest exposure quotient over the limits, or None."""
    return place_values(scenario, limit_ids)[1]


def change_db(value_w_m2: float, base_w_m2: float) -> float | None:
    """``10 log10(value / base)`` [dB]; None where either is zero or not finite."""
    if not (value_w_m2 > 0.0 and base_w_m2 > 0.0):
        return None
    if not (math.isfinite(value_w_m2) and math.isfinite(base_w_m2)):
        return None
    return 10.0 * math.log10(value_w_m2 / base_w_m2)


#: An option is marked as above the base where its keep-out to mark out is larger by at
#: least this much [m] or a named place's density by at least this much [dB]: the
#: smallest differences the text shows (0.01 m, 0.1 dB when rounded).
ABOVE_BASE_KEEPOUT_M = 5e-3
ABOVE_BASE_DB = 0.05
#: The keys :func:`above_base` fills in each option of ``compare --json``.
ABOVE_BASE_KEYS = ("raises_keepout", "raised_places", "above_base_note")


def above_base(v: Variant, base: Variant) -> tuple[bool, list[str], str | None]:
    """Whether an option raises the keep-out or a named place's value above the base's.

    Returns ``(raises_keepout, raised place names, note)``; the note (None when nothing is
    raised) names the likely cause when the option changes the shield sheets and not the
    power: a sheet of the base left out, moved or changed (what it shaded may be open), or
    else, when every sheet of the base is still there, an added sheet's lit-side edge
    diffraction (README, "Shield sheets").
    """
    if v.is_base:
        return False, [], None
    base_places = {p["name"]: p["power_density_w_m2"] for p in base.places}
    raised = [
        p["name"]
        for p in v.places
        if (change_db(p["power_density_w_m2"], base_places.get(p["name"], 0.0)) or 0.0)
        >= ABOVE_BASE_DB
    ]
    keepout = v.largest_keepout_m >= base.largest_keepout_m + ABOVE_BASE_KEEPOUT_M
    if not (keepout or raised):
        return False, [], None
    what = [f"the keep-out ({v.largest_keepout_m:.2f} m against {base.largest_keepout_m:.2f} m)"]
    what = (what if keepout else []) + [f"the value at {n}" for n in raised]
    note = "raises " + " and ".join(what)
    if shield.shields_differ(v.scenario.shields, base.scenario.shields) and (
        v.scenario.average_power_w <= base.scenario.average_power_w
    ):
        kept = {shield.sheet_key(s) for s in v.scenario.shields}
        if any(shield.sheet_key(s) not in kept for s in base.scenario.shields):
            # a sheet of the base taken away, moved or changed: what it shaded may be open
            note += (
                ": it leaves out, moves or changes a shield sheet of the base, and what that "
                "sheet shaded may be open"
            )
        else:
            ripple_db = 20 * math.log10(RECTANGLE_RIPPLE)
            note += (
                f": the sheet's edge diffraction beside it (up to +{ripple_db:.2f} dB in the "
                "light); widen the sheet or move it"
            )
    return keepout, raised, note


@dataclass(frozen=True)
class Comparison:
    """The ranked variants on a common horizontal grid.

    Parameters
    ----------
    base : Scenario
    limit_ids : tuple of str
    height_m : float
        Height of the common horizontal plane [m].
    variants : tuple of Variant
        In rank order (best first).
    rank_by : str
    plane_name : str
        ``"source height"`` when the plane is at the first source's height, empty when
        its height was given.
    """

    base: Scenario
    limit_ids: tuple[str, ...]
    height_m: float
    variants: tuple[Variant, ...]
    rank_by: str = "keepout"
    plane_name: str = ""

    @property
    def where(self) -> str:
        """The common plane in a few words: ``"source height (z = 1.10 m)"``, ``"z = 1.70 m"``."""
        return self.variants[0].horizontal.result.grid.plane.where

    def data(self) -> dict[str, Any]:
        """The ``compare --json`` object (schema_version 1)."""
        grid = self.variants[0].horizontal.result.grid
        base = next(v for v in self.variants if v.is_base)
        base_places = {p["name"]: p["power_density_w_m2"] for p in base.places}
        rows = []
        for rank, v in enumerate(self.variants, start=1):
            zones = {z[0].limit_id: z for z in v.horizontal.zones.values()}
            rows.append(
                {
                    "rank": rank,
                    "name": v.name,
                    "description": v.description,
                    "is_base": v.is_base,
                    "scenario": v.scenario.name,
                    "average_power_w": v.scenario.average_power_w,
                    "largest_keepout_m": v.largest_keepout_m,
                    "keepout": [
                        {
                            "limit": k.limit_id,
                            "limit_w_m2": k.limit_w_m2,
                            "distance_m": k.distance_m,
                            "distance_with_uncertainty_m": k.distance_with_uncertainty_m,
                            "reached": k.reached,
                        }
                        for k in v.keepouts
                    ],
                    "zone_area_m2": {i: zones[i][0].area_m2 for i in self.limit_ids},
                    "zone_area_with_uncertainty_m2": {
                        i: zones[i][-1].area_m2 for i in self.limit_ids
                    },
                    "zone_clipped_at_map_edge": any(z.clipped for zs in zones.values() for z in zs),
                    "leakage_5cm_w_m2": v.leakage_5cm_w_m2,
                    "worst_point": v.worst_point,
                    **dict(zip(ABOVE_BASE_KEYS, above_base(v, base), strict=True)),
                    "places": [
                        {
                            "name": p["name"],
                            "power_density_w_m2": p["power_density_w_m2"],
                            "change_db": change_db(p["power_density_w_m2"], base_places[p["name"]]),
                            "quotients": p["quotients"],
                        }
                        for p in v.places
                    ],
                }
            )
        return {
            "schema_version": SCHEMA_VERSION,
            "scenario": self.base.name,
            "frequency_hz": self.base.frequency_hz,
            "limits": list(self.limit_ids),
            "horizontal_plane": {
                "name": self.plane_name or None,
                "where": self.where,
                "height_m": self.height_m,
                "extent_m": list(grid.extent_m),
                "step_m": grid.step_m,
            },
            "ranked_by": ranked_by_text(self.rank_by, self.where),
            "rank_by": self.rank_by,
            "tie_rule": tolerance_text().strip()[1:-1],
            "options": rows,
            "caution": CAUTION_TEXT,
        }

    def figure(self) -> Any:
        """Side-by-side horizontal maps on one colour scale, in rank order."""
        from .plots import comparison_figure

        panels = []
        for rank, v in enumerate(self.variants, start=1):
            letter = chr(ord("a") + rank - 1) if rank <= 26 else str(rank)
            caption = (
                f"({letter}) {rank}. {v.name}: keep-out {v.largest_keepout_m:.2f} m, "
                f"zone {v.zone_area_m2:.2f} m²"
            )
            run = v.panel if v.panel is not None else v.horizontal
            panels.append((caption, run.result, v.scenario, v.keepouts))
        own = [v.panel is not None for v in self.variants]
        note = (
            "panels "
            + ", ".join(f"({chr(ord('a') + i)})" for i, o in enumerate(own) if o and i < 26)
            + " on their own, smaller extent"
            if any(own)
            else ""
        )
        return comparison_figure(panels, f"Options compared: {self.base.name}", note=note)


@sharing_evaluations
def compare_options(
    scenario: Scenario,
    limit_ids: Sequence[str] | None = None,
    *,
    height_m: float | None = None,
    half_extent_m: float | None = None,
    step_m: float | None = None,
    pixels: int | None = None,
    progress: ProgressFactory | None = None,
    base_keepouts: Sequence[KeepoutResult] | None = None,
    rank_by: str = "keepout",
    own_panels: bool = True,
    base_map: maps.MapRun | None = None,
    option_keepouts: Pending[tuple[KeepoutResult, ...]] | None = None,
) -> Comparison:
    """Assess the base and every option on a common horizontal grid and rank them.

    Parameters
    ----------
    scenario : Scenario
        The base scenario (its ``options`` are the alternatives).
    limit_ids : sequence of str, optional
        Limits for every variant (default: the base's).
    height_m : float, optional
        Height of the horizontal plane (default: the base's first source) [m].
    half_extent_m, step_m, pixels : optional
        Grid settings (default: wide enough for the largest variant).
    progress : callable, optional
        ``progress(label)`` returns a ``(done, total)`` callback or None.
    base_keepouts : sequence of KeepoutResult, optional
        The base's keep-out answers for ``limit_ids`` when already computed.
    rank_by : str
        ``"keepout"`` (default), ``"zone-area"`` or ``"place:NAME"`` with NAME a
        ``[[point]]`` of the scenario (see the module notes for the tie rule).
    own_panels : bool
        Give the figure's panel of an option whose own default extent is under
        :data:`OWN_PANEL_FRACTION` of the common one a map of its own extent.
    base_map : MapRun, optional
        A map of the base already made (the assessment's horizontal map): used as the
        base's map when it is of this scenario and these keep-out answers, on the
        same plane and the very same grid (the same samples, to the last bit), instead
        of evaluating it again.
    option_keepouts : Pending, optional
        The options' keep-out searches for ``limit_ids``, in the options' order, already
        started by :func:`start_option_searches` (an assessment starts them before its
        base maps, so that they run meanwhile).

    Returns
    -------
    Comparison
    """
    ids = tuple(scenario.limit_ids if limit_ids is None else limit_ids)
    check_rank_by(scenario, rank_by)
    if height_m is not None and not math.isfinite(height_m):
        from .errors import InputError

        raise InputError("must be a finite height in metres", "argument", "--height-m")
    plane = maps.horizontal_plane(scenario, height_m)
    height = plane.height_m
    variants = [("base", "the scenario as given", scenario)] + [
        (o.name, o.description, o.scenario) for o in scenario.options
    ]
    known = tuple(base_keepouts) if base_keepouts is not None else None
    if known is not None and [k.limit_id for k in known] != list(ids):
        known = None
    # Every variant's search starts from the base's kept evaluations alone, in a worker
    # process of its own where there are cores to spare (fields/workers.py): the same
    # answers, to the last bit, on one core or many.
    searched = [i for i in range(len(variants)) if not (i == 0 and known is not None)]
    label = (
        f"keep-out search: {variants[searched[0]][0]}"
        if len(searched) == 1
        else f"keep-out searches of {len(searched)} variants"
    )
    with maps.busy(progress, label):
        if option_keepouts is not None:
            found = list(option_keepouts.results())
            if known is None:
                found.insert(0, _variant_keepouts(scenario, ids))
        else:
            found = run_each(
                [functools.partial(_variant_keepouts, variants[i][2], ids) for i in searched]
            )
    by_index = dict(zip(searched, found, strict=True))
    keepouts = [known if i not in by_index else by_index[i] for i in range(len(variants))]
    if half_extent_m is None:
        half_extent_m = max(
            maps.default_half_extent_m(s, k, plane)
            for (_, _, s), k in zip(variants, keepouts, strict=True)
        )
    grid = {"half_extent_m": half_extent_m, "step_m": step_m, "pixels": pixels}
    # The base's map first, here: the options' maps look up what they share with it.
    base_run = None
    if base_map is not None:
        base_run = _same_map(base_map, scenario, keepouts[0], plane, **grid)
    if base_run is None:
        callback = progress("option base") if progress is not None else None
        base_run = maps.run_map(
            scenario,
            plane,
            keepouts[0],
            centre_st_m=plane.centre_st_m,
            progress=callback,
            **grid,
        )
    side = base_run.result.grid.shape[1]
    tasks = [
        functools.partial(_variant_maps, s, ids, k, plane, grid, order > 0, own_panels, side)
        for order, ((_, _, s), k) in enumerate(zip(variants, keepouts, strict=True))
    ]
    with maps.busy(progress, f"maps of {len(variants)} variants"):
        made = run_each(tasks)
    out = []
    for order, ((name, description, s), k, piece) in enumerate(
        zip(variants, keepouts, made, strict=True)
    ):
        common, panel, places, worst, leakage = piece
        run = base_run if common is None else maps.MapRun(s, k, *common)
        panel_run = None if panel is None else maps.MapRun(s, k, *panel)
        out.append(Variant(name, description, s, k, run, leakage, worst, places, order, panel_run))
    return Comparison(
        scenario, ids, height, tuple(rank_variants(out, rank_by)), rank_by, plane.name
    )


def start_option_searches(
    scenario: Scenario, limit_ids: Sequence[str], workers: int | None = None
) -> Pending[tuple[KeepoutResult, ...]]:
    """Start the keep-out searches of the scenario's options (see :mod:`.workers`).

    ``workers`` children share them (default: one core fewer than
    :func:`keepclear.fields.workers.worker_count`, the caller going on with its own
    work; at least one); with a single worker they run here, now.
    """
    if workers is None:
        workers = max(1, worker_count() - 1)
    ids = tuple(limit_ids)
    return start_each(
        [functools.partial(_variant_keepouts, o.scenario, ids) for o in scenario.options],
        workers,
    )


def _variant_keepouts(scenario: Scenario, limit_ids: tuple[str, ...]) -> tuple[KeepoutResult, ...]:
    """One variant's keep-out answers (a piece of :func:`compare_options`' work)."""
    return tuple(keepout_distances(scenario, limit_ids))


_MapPiece = tuple[Any, Any, Any]


def _variant_maps(
    scenario: Scenario,
    limit_ids: tuple[str, ...],
    keepouts: tuple[KeepoutResult, ...],
    plane: maps.Plane,
    grid: dict[str, Any],
    common_map: bool,
    own_panels: bool,
    side: int,
) -> tuple[_MapPiece | None, _MapPiece | None, Any, Any, float | None]:
    """One variant's maps, named places and leakage (a piece of :func:`compare_options`).

    Returns the common map (when ``common_map``) and the figure's own-extent panel (when
    the variant's own extent is under :data:`OWN_PANEL_FRACTION` of the common one), each
    as (result, zones, shapes) without the scenario (the piece may run in a worker process:
    only plain data come back), the places, the worst place and the leakage.
    """

    def piece(run: maps.MapRun) -> _MapPiece:
        return run.result, run.zones, run.shapes

    common = None
    if common_map:
        common = piece(
            maps.run_map(scenario, plane, keepouts, centre_st_m=plane.centre_st_m, **grid)
        )
    places, worst = place_values(scenario, limit_ids)
    panel = None
    own_m = maps.default_half_extent_m(scenario, keepouts, plane)
    if own_panels and own_m < OWN_PANEL_FRACTION * grid["half_extent_m"]:
        # A small option's zone is a few pixels of the common grid: its panel of the
        # figure gets a map of its own extent (the data keep the common grid).
        panel = piece(
            maps.run_map(
                scenario,
                plane,
                keepouts,
                half_extent_m=own_m,
                pixels=side,
                centre_st_m=plane.centre_st_m,
            )
        )
    return common, panel, places, worst, leakage_5cm_w_m2(scenario)


def _same_map(
    run: maps.MapRun,
    scenario: Scenario,
    keepouts: Sequence[KeepoutResult],
    plane: maps.Plane,
    half_extent_m: float,
    step_m: float | None,
    pixels: int | None,
) -> maps.MapRun | None:
    """``run`` on ``plane``'s words if it is the map :func:`maps.run_map` would make, else None.

    The same scenario object and keep-out answers, a plane of the same geometry and
    a grid of the same samples (compared exactly: a map of other samples is made
    afresh); the plane's description is this comparison's.
    """
    if run.scenario is not scenario or len(run.keepouts) != len(keepouts):
        return None
    if not all(a is b for a, b in zip(run.keepouts, keepouts, strict=True)):
        return None
    have = run.result.grid
    same_plane = (
        have.plane.kind == plane.kind
        and have.plane.axis_names == plane.axis_names
        and all(
            np.array_equal(getattr(have.plane, name), getattr(plane, name))
            for name in ("ref_m", "u", "v")
        )
    )
    if not same_plane:
        return None
    want = maps.make_grid(
        plane,
        half_extent_m,
        step_m=step_m,
        pixels=pixels,
        centre_st_m=plane.centre_st_m,
        n_limits=len(keepouts),
    )
    if not (np.array_equal(want.s_m, have.s_m) and np.array_equal(want.t_m, have.t_m)):
        return None
    grid = replace(have, plane=plane)
    return replace(run, result=replace(run.result, grid=grid))


def check_rank_by(scenario: Scenario, rank_by: str) -> None:
    """Refuse a ranking the scenario cannot give (exit 2 through the CLI).

    Raises
    ------
    InputError
        If ``rank_by`` is not ``keepout``, ``zone-area`` or ``place:NAME`` with NAME
        one of the scenario's ``[[point]]`` names.
    """
    check_rank_by_names(rank_by, [p.name for p in scenario.points])


def comparison_table(data: dict[str, Any]) -> str:
    """The ranked comparison as a plain-text table.

    The value the ranking is by comes first after the option: the keep-out distances
    (``keepout``), the zone area (``zone-area``) or the density at the named place with
    its change against the base (``place:NAME``).
    """
    limits = data["limits"]
    rank_by = data.get("rank_by", "keepout")
    place = ranked_place(rank_by)
    groups = ranked_columns(rank_by)
    heads = {
        "place": [f"{place} W/m2 (mW/cm2)", "change"],
        "keepout": [f"keep-out m {i}" for i in limits],
        "zone": ["zone m2"],
    }
    header = ["rank", "option", *(h for g in groups for h in heads[g])]
    leaks = shows_leakage(data["options"])
    header += [*(["leak 5 cm W/m2 (mW/cm2)"] if leaks else []), "worst named place"]
    widened = False
    rows = []
    for row in data["options"]:
        k = {e["limit"]: e for e in row["keepout"]}
        keepout_cells = []
        for i in limits:
            e = k[i]
            text = f"{e['distance_m']:.2f}"
            if e["distance_with_uncertainty_m"] > e["distance_m"] + 5e-3:
                text += f" ({e['distance_with_uncertainty_m']:.2f})"
                widened = True
            keepout_cells.append(text)
        strictest = max(row["zone_area_with_uncertainty_m2"].values(), default=0.0)
        zone_cells = [f"{strictest:.2f}" + (" clipped" if row["zone_clipped_at_map_edge"] else "")]
        cells = [str(row["rank"]), row["name"] if row["is_base"] else f"option: {row['name']}"]
        place_cells = []
        if place is not None:
            density, change = place_cell(row, place)
            place_cells = [pair_text(density), "base" if row["is_base"] else change_text(change)]
        values = {"place": place_cells, "keepout": keepout_cells, "zone": zone_cells}
        cells += [c for g in groups for c in values[g]]
        if leaks:
            cells.append(pair_text(row["leakage_5cm_w_m2"]))
        wp = row["worst_point"]
        cells.append(
            "-" if wp is None else f"{wp['name']}: {share_text(wp['quotient'])} of {wp['limit']}"
        )
        rows.append(cells)
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(header)]
    plane = data["horizontal_plane"]
    where = plane.get("where") or f"z = {plane['height_m']:.2f} m"
    lines = [
        f"Options compared: {data['scenario']}",
        f"Zones on the horizontal plane at {where}; ranked by "
        + data["ranked_by"]
        + tolerance_text(),
        "",
        "  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)),
        "  ".join("-" * w for w in widths),
    ]
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)) for r in rows]
    lines.append("")
    if widened:
        lines.append("Keep-out in brackets: widened by the source model's stated gain uncertainty.")
    lines.append(
        f"Zone: the area at {where} where the strictest limit is reached (with the model's "
        "uncertainty); 'clipped' where it reaches the map edge."
    )
    if place is not None:
        lines.append(f"{place}: time-averaged power density there; change in dB against the base.")
    notes = [(r["name"], r.get("above_base_note")) for r in data["options"]]
    lines += [f'Above the base: option "{name}" {note}.' for name, note in notes if note]
    lines += _places_lines(data)
    return "\n".join(lines)


def _places_lines(data: dict[str, Any]) -> list[str]:
    """Each option's time-averaged density at every named place, with its change in dB."""
    rows = [row for row in data["options"] if row.get("places")]
    if not rows:
        return []
    lines = ["", "At the named places (time-averaged; change against the base):"]
    for name in [p["name"] for p in rows[0]["places"]]:
        lines.append(f"  {name}:")
        for row in rows:
            place = next(p for p in row["places"] if p["name"] == name)
            change = place["change_db"]
            db = "" if row["is_base"] or change is None else f"  {change:+.1f} dB"
            label = row["name"] if row["is_base"] else f"option: {row['name']}"
            lines.append(
                f"    {row['rank']}. {label}: {density_text(place['power_density_w_m2'])}{db}"
            )
    return lines
