"""Zones of a map, the shapes a sign would state, and one map run from grid to shapes.

* the **zone** of each limit: the region of the plane where the exposure quotient
  reaches one, as polygons with holes (marching squares on :math:`\\log_{10} q`,
  through :mod:`contourpy`, the contouring engine of matplotlib);
* the **enclosing shapes** a safety sign states: a circle about the source, an
  axis-aligned box on the plane, and a vertical cylinder about the first source
  (radius and height range) from a ray scan in three dimensions.

See :mod:`keepclear.fields.maps` for accuracy and conservatism.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import contourpy
import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import fibonacci_sphere

from .. import limits as limits_mod
from ..field import FieldResult, evaluate, radiating_terms
from ..keepout import KeepoutResult
from ..scenario import Scenario
from .evaluation import MapResult, ProgressCallback, evaluate_map, limit_values
from .grids import (
    MAX_GRID_BYTES,
    Grid,
    Plane,
    default_half_extent_m,
    default_window_m,
    make_grid,
)

#: Floor of the quotient before taking its logarithm (q = 0 far behind a shield).
_Q_FLOOR = 1e-30


# ------------------------------------------------------------------- zones
@dataclass(frozen=True)
class Zone:
    """Where one limit is reached on a map.

    Parameters
    ----------
    limit_id : str
    level : float
        The quotient bounded: 1 for the model zone, 10^(-u/10) with the model's
        gain uncertainty u [1].
    kind : str
        ``"model"`` or ``"with-uncertainty"``.
    polygons : tuple
        Each ``(exterior, holes)``: an (n, 2) ring in plane coordinates [m] and a
        tuple of hole rings; rings are closed (first point repeated), exteriors
        counter-clockwise and holes clockwise in (s, t).
    clipped : bool
        True when the zone reaches the edge of the map (the map is too small).
    """

    limit_id: str
    level: float
    kind: str
    polygons: tuple[tuple[NDArray[np.float64], tuple[NDArray[np.float64], ...]], ...]
    clipped: bool

    @property
    def area_m2(self) -> float:
        """Area of the zone on the plane [m^2]."""
        total = 0.0
        for exterior, holes in self.polygons:
            total += abs(ring_signed_area(exterior)) - sum(abs(ring_signed_area(h)) for h in holes)
        return float(total)

    @property
    def empty(self) -> bool:
        """True when the limit is reached nowhere on the map."""
        return not self.polygons

    def vertices(self) -> NDArray[np.float64]:
        """Every exterior vertex, shape (n, 2) [m]."""
        rings = [ext for ext, _ in self.polygons]
        return np.vstack(rings) if rings else np.zeros((0, 2))


def ring_signed_area(ring: NDArray[np.float64]) -> float:
    """Shoelace area of a closed or open ring, positive counter-clockwise [m^2]."""
    x, y = ring[:, 0], ring[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))


def _oriented(ring: NDArray[np.float64], ccw: bool) -> NDArray[np.float64]:
    r = np.asarray(ring, dtype=float)
    if not np.allclose(r[0], r[-1]):
        r = np.vstack([r, r[:1]])
    if (ring_signed_area(r) > 0) != ccw:
        r = r[::-1]
    return r


def log_quotient(q: NDArray[np.float64]) -> NDArray[np.float64]:
    """log10 of a quotient map, floored at 1e-30 so q = 0 stays finite [1]."""
    return np.log10(np.maximum(q, _Q_FLOOR))


def zone_of(map_result: MapResult, limit_id: str, level: float = 1.0, kind: str = "model") -> Zone:
    """The region where the quotient of ``limit_id`` is at least ``level``.

    Marching squares (contourpy's filled contours) on log10 q, so the boundary of
    a field falling as 1/r^2 is interpolated exactly along grid lines.
    """
    grid = map_result.grid
    lq = log_quotient(map_result.quotient(limit_id))
    threshold = math.log10(level)
    inside = lq >= threshold
    if not inside.any():
        return Zone(limit_id, level, kind, (), False)
    clipped = bool(inside[0].any() or inside[-1].any() or inside[:, 0].any() or inside[:, -1].any())
    gen = contourpy.contour_generator(
        grid.s_m, grid.t_m, lq, name="serial", fill_type=contourpy.FillType.OuterOffset
    )
    filled: Any = gen.filled(threshold, np.inf)
    points, offsets = filled[0], filled[1]
    polygons = []
    for pts, offs in zip(points, offsets, strict=True):
        rings = [pts[offs[i] : offs[i + 1]] for i in range(len(offs) - 1)]
        rings = [r for r in rings if len(r) >= 3]
        if not rings:
            continue
        exterior = _oriented(rings[0], ccw=True)
        holes = tuple(_oriented(r, ccw=False) for r in rings[1:])
        polygons.append((exterior, holes))
    return Zone(limit_id, level, kind, tuple(polygons), clipped)


def contour_lines(map_result: MapResult, limit_id: str, level: float = 1.0) -> list[NDArray]:
    """The boundary lines (n, 2) where the quotient of ``limit_id`` equals ``level`` [m]."""
    grid = map_result.grid
    lq = log_quotient(map_result.quotient(limit_id))
    gen = contourpy.contour_generator(
        grid.s_m, grid.t_m, lq, name="serial", line_type=contourpy.LineType.Separate
    )
    return [np.asarray(line) for line in gen.lines(math.log10(level))]


def uncertainty_level(keepout: KeepoutResult | None) -> float:
    """The quotient 10^(-u/10) that widens a zone by the model gain uncertainty u [1]."""
    if keepout is None or keepout.uncertainty_db <= 0:
        return 1.0
    return 10 ** (-keepout.uncertainty_db / 10)


def map_zones(
    map_result: MapResult, keepouts: Sequence[KeepoutResult] = ()
) -> dict[str, list[Zone]]:
    """The model zone, and the zone with uncertainty where a model states one, per limit."""
    by_id = {k.limit_id: k for k in keepouts}
    out: dict[str, list[Zone]] = {}
    for limit_id in map_result.limit_ids:
        zones = [zone_of(map_result, limit_id)]
        level = uncertainty_level(by_id.get(limit_id))
        if level < 1.0:
            zones.append(zone_of(map_result, limit_id, level, "with-uncertainty"))
        out[limit_id] = zones
    return out


# --------------------------------------------------------- enclosing shapes
@dataclass(frozen=True)
class Cylinder:
    """A vertical cylinder about the first source holding every exceedance of a limit.

    Parameters
    ----------
    limit_id : str
    axis_xy_m : tuple of float
        Where the vertical axis stands (the first source's x, y) [m].
    radius_m : float
        Radius [m]; 0 where the limit is reached nowhere.
    z_min_m, z_max_m : float
        Height range [m].
    margin_m : float
        The radial sampling step the shape was widened by [m].
    """

    limit_id: str
    axis_xy_m: tuple[float, float]
    radius_m: float
    z_min_m: float
    z_max_m: float
    margin_m: float

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready dimensions."""
        reached = self.radius_m > 0
        return {
            "axis_xy_m": list(self.axis_xy_m),
            "radius_m": self.radius_m,
            "z_min_m": self.z_min_m if reached else None,
            "z_max_m": self.z_max_m if reached else None,
            "height_m": self.z_max_m - self.z_min_m if reached else 0.0,
            "margin_m": self.margin_m,
        }


def _scan_directions(scenario: Scenario, keepouts: Sequence[KeepoutResult]) -> NDArray:
    dirs = [fibonacci_sphere(800)]
    phi = np.radians(np.arange(0, 360, 5.0))
    dirs.append(np.column_stack([np.cos(phi), np.sin(phi), np.zeros_like(phi)]))
    extra: list[Any] = [[0, 0, 1.0], [0, 0, -1.0]]
    for term in radiating_terms(scenario):
        axis = term.radiator.placement.rotation[:, 2]
        extra += [axis, -axis]
    extra += [k.direction for k in keepouts if k.direction is not None]
    dirs.append(np.asarray(extra, dtype=float))
    d = np.vstack(dirs)
    return d / np.linalg.norm(d, axis=1, keepdims=True)


def keepout_cylinders(
    scenario: Scenario,
    keepouts: Sequence[KeepoutResult],
    progress: ProgressCallback | None = None,
    extra_points_m: dict[str, NDArray[np.float64]] | None = None,
) -> list[Cylinder]:
    """Vertical cylinders about the first source holding every exceedance found, per limit.

    Rays from the keep-out centre are sampled out to 1.25 times the keep-out radius
    (with uncertainty), so an exceedance the keep-out search missed still counts;
    every sample where the quotient reaches the limit (scaled by the gain
    uncertainty as in :mod:`keepclear.fields.keepout`) is held, and so are the
    keep-out search's farthest point and any ``extra_points_m`` (the zone outlines of
    the maps).  The cylinder is widened by one radial step.

    Parameters
    ----------
    scenario : Scenario
    keepouts : sequence of KeepoutResult
        From :func:`keepclear.fields.keepout.keepout_distances`.
    progress : callable, optional
        ``progress(done, total)`` in points.
    extra_points_m : dict, optional
        Limit id -> (n, 3) points known to reach the limit [m].

    Returns
    -------
    list of Cylinder
        In the order of ``keepouts``.
    """
    c = scenario.centre_m
    axis_xy = (float(c[0]), float(c[1]))
    extra = extra_points_m or {}
    reach = max((k.recommended_distance_m for k in keepouts), default=0.0)
    dr = 0.0
    hits_by_limit: dict[str, NDArray[np.float64]] = {}
    if reach > 0:
        wavelength = scenario.wavelength_m
        n_r = int(np.clip(math.ceil(1.25 * reach / (wavelength / 8)), 60, 250))
        dr = 1.25 * reach / n_r
        radii = (np.arange(n_r) + 1) * dr
        dirs = _scan_directions(scenario, keepouts)
        pts = (c + dirs[:, None, :] * radii[None, :, None]).reshape(-1, 3)
        values = limit_values(scenario, [k.limit_id for k in keepouts])
        n = pts.shape[0]
        chunk = max(8192, n // 40)
        parts = []
        for start in range(0, n, chunk):
            parts.append(evaluate(scenario, pts[start : start + chunk]))
            if progress is not None:
                progress(min(n, start + chunk), n)
        res = FieldResult(
            **{
                f.name: np.concatenate([getattr(p, f.name) for p in parts])
                for f in dataclasses.fields(FieldResult)
            }
        )
        for k, v in zip(keepouts, values, strict=True):
            scale = 1.0 / uncertainty_level(k)
            hits_by_limit[k.limit_id] = pts[limits_mod.field_quotient(v, res) * scale >= 1.0]
    out = []
    for k in keepouts:
        known = [hits_by_limit.get(k.limit_id, np.zeros((0, 3)))]
        if k.direction is not None:
            known.append((c + k.direction * k.recommended_distance_m)[None, :])
        if k.limit_id in extra and len(extra[k.limit_id]):
            known.append(np.asarray(extra[k.limit_id], dtype=float).reshape(-1, 3))
        held = np.vstack(known)
        if held.shape[0] == 0:
            out.append(Cylinder(k.limit_id, axis_xy, 0.0, float(c[2]), float(c[2]), dr))
            continue
        rel = held - c
        radius = float(np.max(np.hypot(rel[:, 0], rel[:, 1]))) + dr
        z_min = float(held[:, 2].min()) - dr
        z_max = float(held[:, 2].max()) + dr
        out.append(Cylinder(k.limit_id, axis_xy, radius, z_min, z_max, dr))
    return out


def sphere_section(
    plane: Plane, centre_m: ArrayLike, radius_m: float
) -> tuple[tuple[float, float], float] | None:
    """Circle where a sphere meets the plane: (centre (s, t), radius) [m], or None."""
    st, offset = plane.to_plane(np.asarray(centre_m, dtype=float))
    d = abs(float(offset[0]))
    if radius_m <= d:
        return None
    return (float(st[0, 0]), float(st[0, 1])), math.sqrt(radius_m**2 - d**2)


def enclosing_shapes(
    zone: Zone,
    plane: Plane,
    centre_m: ArrayLike,
    margin_m: float,
    keepout: KeepoutResult | None = None,
) -> dict[str, Any]:
    """The circle about the source and the axis-aligned box holding a zone on the plane.

    Both are widened by ``margin_m`` (one grid step).  Where the zone is empty the
    circle radius is 0 and the box is null.

    Parameters
    ----------
    zone : Zone
    plane : Plane
    centre_m : array_like, shape (3,)
        The keep-out centre (first source); the circle is about its foot on the
        plane [m].
    margin_m : float
        Widening [m].
    keepout : KeepoutResult, optional
        Adds the section of the keep-out sphere with the plane, for comparison.
    """
    st, offset = plane.to_plane(np.asarray(centre_m, dtype=float))
    centre = st[0]
    a, b = plane.axis_names
    key_a, key_b = (f"{n.replace(' ', '_')}_m" for n in (a, b))
    out: dict[str, Any] = {
        "level_quotient": zone.level,
        "kind": zone.kind,
        "clipped_at_map_edge": zone.clipped,
        "margin_m": margin_m,
        "area_m2": zone.area_m2,
    }
    vertices = zone.vertices()
    if vertices.shape[0] == 0:
        out["circle"] = {"centre_m": [float(x) for x in centre], "radius_m": 0.0}
        out["box"] = None
    else:
        radius = float(np.max(np.hypot(*(vertices - centre).T))) + margin_m
        lo = vertices.min(axis=0) - margin_m
        hi = vertices.max(axis=0) + margin_m
        out["circle"] = {"centre_m": [float(x) for x in centre], "radius_m": radius}
        out["box"] = {
            key_a: [float(lo[0]), float(hi[0])],
            key_b: [float(lo[1]), float(hi[1])],
            "size_m": [float(hi[0] - lo[0]), float(hi[1] - lo[1])],
        }
    if keepout is not None:
        section = sphere_section(plane, centre_m, keepout.recommended_distance_m)
        out["keepout_sphere_section_radius_m"] = 0.0 if section is None else section[1]
    out["plane_offset_of_centre_m"] = float(offset[0])
    return out


# ------------------------------------------------------------- one map run
@dataclass(frozen=True)
class MapRun:
    """A map with its zones and enclosing shapes, ready to draw and export.

    Parameters
    ----------
    scenario : Scenario
    keepouts : tuple of KeepoutResult
        For the map's limits, in their order.
    result : MapResult
    zones : dict
        Limit id -> zones (:func:`map_zones`).
    shapes : dict
        Limit id -> zone kind -> enclosing shapes (:func:`enclosing_shapes`).
    """

    scenario: Scenario
    keepouts: tuple[KeepoutResult, ...]
    result: MapResult
    zones: dict[str, list[Zone]]
    shapes: dict[str, dict[str, dict[str, Any]]]

    @property
    def plane(self) -> Plane:
        """The plane of the map."""
        return self.result.grid.plane

    def zone_points_m(self, limit_id: str) -> NDArray[np.float64]:
        """Scenario coordinates (n, 3) of the widest zone's outline of a limit [m]."""
        zone = self.zones[limit_id][-1]
        st = zone.vertices()
        return self.plane.to_scenario(st[:, 0], st[:, 1]) if st.size else np.zeros((0, 3))

    def reach_m(self, limit_id: str) -> float:
        """Largest distance from the keep-out centre to the widest zone of a limit [m]."""
        pts = self.zone_points_m(limit_id)
        if pts.shape[0] == 0:
            return 0.0
        return float(np.max(np.linalg.norm(pts - self.scenario.centre_m, axis=1)))

    def conservative_shapes(self, limit_id: str) -> dict[str, Any]:
        """The shapes of the widest zone of a limit (with uncertainty where stated)."""
        kinds = self.shapes[limit_id]
        return kinds.get("with-uncertainty", kinds["model"])

    def summary(self) -> dict[str, Any]:
        """JSON-ready description: plane, grid and, per limit, zone area and shapes."""
        grid = self.result.grid
        by_id = {k.limit_id: k for k in self.keepouts}
        limits = []
        for v in self.result.limits:
            zones = self.zones[v.id]
            k = by_id.get(v.id)
            limits.append(
                {
                    "limit": v.id,
                    "limit_w_m2": v.power_density_w_m2,
                    "keepout_distance_m": None if k is None else k.distance_m,
                    "zone_area_m2": zones[0].area_m2,
                    "zone_area_with_uncertainty_m2": zones[-1].area_m2,
                    "clipped_at_map_edge": any(z.clipped for z in zones),
                    "max_quotient_on_map": float(self.result.quotient(v.id).max()),
                    "zone_reach_from_centre_m": self.reach_m(v.id),
                    "shapes": self.shapes[v.id],
                }
            )
        return {
            "plane": self.plane.as_dict(),
            "extent_m": list(grid.extent_m),
            "step_m": grid.step_m,
            "shape": list(grid.shape),
            "max_power_density_w_m2": float(self.result.power_density_w_m2.max()),
            "limits": limits,
        }


def metal_line_shift_m(scenario: Scenario, grid: Grid) -> tuple[float, float]:
    """How far to move a grid so that no whole row or column lies on a source's metal [m].

    A monopole's infinite ground plane cuts a vertical map along a line; a grid centred on
    the feed has a whole row of samples on it, each counted as over every limit (on the
    metal), which would draw a zone along the whole map.  Such a grid is moved by half a
    step across that line, so the samples lie half a step on either side of the metal
    (the field just off the plane, and none behind it counted as over the limit).  A
    plane lying wholly in the metal is the caller's to avoid
    (:func:`keepclear.fields.maps.grids.source_height_plane`).

    Returns
    -------
    (float, float)
        The shift of the map centre along the plane's first and second axes [m]; zeros
        when no whole row or column is on the metal, or when every sample is.
    """
    s, t, plane = grid.s_m, grid.t_m, grid.plane

    def whole_line_on_metal(across: NDArray, along: NDArray, rows: bool) -> bool:
        # A whole line is on the metal only if both its ends are: test the ends of every
        # line first, then the few lines whose ends both are (not the whole grid).
        def on(a: NDArray, b: NDArray) -> NDArray[np.bool_]:
            ss, tt = (b, a) if rows else (a, b)
            return scenario.inside_source(plane.to_scenario(ss, tt))

        ends = on(across, np.full(across.size, along[0])) & on(
            across, np.full(across.size, along[-1])
        )
        whole = sum(bool(on(np.full(along.size, a), along).all()) for a in across[ends])
        # every line on the metal: the whole plane is, which is the caller's to avoid
        return 0 < whole < across.size

    ds = float(s[1] - s[0]) if s.size > 1 else 0.0
    dt = float(t[1] - t[0]) if t.size > 1 else 0.0
    along_s = 0.5 * ds if whole_line_on_metal(s, t, rows=False) else 0.0
    along_t = 0.5 * dt if whole_line_on_metal(t, s, rows=True) else 0.0
    return along_s, along_t


def run_map(
    scenario: Scenario,
    plane: Plane,
    keepouts: Sequence[KeepoutResult],
    *,
    half_extent_m: float | None = None,
    step_m: float | None = None,
    pixels: int | None = None,
    centre_st_m: tuple[float, float] | None = None,
    progress: ProgressCallback | None = None,
    max_bytes: int = MAX_GRID_BYTES,
) -> MapRun:
    """Grid, evaluate and zone one plane for the limits of ``keepouts``.

    Parameters
    ----------
    scenario : Scenario
    plane : Plane
    keepouts : sequence of KeepoutResult
        The keep-out answers of the limits to map (sets the limits, the default
        extent and the uncertainty widening).
    half_extent_m : float, optional
        Half the side of the map (default :func:`default_half_extent_m`) [m].
    step_m : float, optional
        Sample spacing [m].
    pixels : int, optional
        Samples a side (default 241 when no step is given).
    centre_st_m : tuple, optional
        Map centre in plane coordinates (default :func:`default_window_m`, which also
        cuts a vertical map over a floor down to the height that matters) [m].
    progress : callable, optional
        ``progress(done, total)``.
    max_bytes : int
        Memory bound of the grid [bytes].

    Returns
    -------
    MapRun
    """
    keepouts = tuple(keepouts)
    limit_ids = [k.limit_id for k in keepouts]
    if half_extent_m is None:
        half_extent_m = default_half_extent_m(scenario, keepouts, plane)
    half_height_m = None
    if centre_st_m is None:
        centre_st_m, half_height_m = default_window_m(scenario, plane, half_extent_m, keepouts)

    def grid_at(centre: tuple[float, float]) -> Grid:
        return make_grid(
            plane,
            half_extent_m,
            step_m=step_m,
            pixels=pixels,
            centre_st_m=centre,
            half_height_m=half_height_m,
            n_limits=len(limit_ids),
            max_bytes=max_bytes,
        )

    grid = grid_at(centre_st_m)
    shift = metal_line_shift_m(scenario, grid)
    if shift != (0.0, 0.0):
        grid = grid_at((centre_st_m[0] + shift[0], centre_st_m[1] + shift[1]))
    result = evaluate_map(scenario, grid, limit_ids, progress=progress)
    zones = map_zones(result, keepouts)
    by_id = {k.limit_id: k for k in keepouts}
    shapes = {
        limit_id: {
            z.kind: enclosing_shapes(z, plane, scenario.centre_m, grid.step_m, by_id[limit_id])
            for z in zone_list
        }
        for limit_id, zone_list in zones.items()
    }
    return MapRun(scenario, keepouts, result, zones, shapes)
