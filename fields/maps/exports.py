"""Exports of a map: the grid as CSV and NPZ, the zones and shapes as GeoJSON.

References
----------
.. [1] H. Butler et al., "The GeoJSON Format", IETF RFC 7946 (2016), sec. 3.1.6
   (Polygon, ring orientation) and 3.1.7 (MultiPolygon).
"""

from __future__ import annotations

import io
import json
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..scenario import Scenario
from .evaluation import MapResult
from .zones import MapRun, Zone


# ---------------------------------------------------------------- GeoJSON
def _ring_list(ring: NDArray[np.float64]) -> list[list[float]]:
    return [[round(float(x), 6), round(float(y), 6)] for x, y in ring]


def zones_geojson(
    map_result: MapResult,
    zones: dict[str, list[Zone]],
    shapes: dict[str, dict[str, Any]] | None = None,
    scenario: Scenario | None = None,
) -> dict[str, Any]:
    """The zones as a GeoJSON FeatureCollection in plane metres.

    One feature per limit and kind (``model``; ``with-uncertainty`` where a model
    states a gain uncertainty), each a MultiPolygon with holes (RFC 7946: exterior
    rings counter-clockwise, holes clockwise).  Coordinates are the plane's (s, t)
    in metres, not longitude and latitude: on a horizontal plane they are the
    scenario's x and y.  ``properties`` carry the limit, the level, the area, the
    clipping flag and the enclosing shapes.
    """
    plane = map_result.grid.plane
    shapes = shapes or {}
    by_id = {v.id: v for v in map_result.limits}
    features = []
    for limit_id, zone_list in zones.items():
        for zone in zone_list:
            coords = [
                [_ring_list(ext)] + [_ring_list(h) for h in holes] for ext, holes in zone.polygons
            ]
            props: dict[str, Any] = {
                "limit": limit_id,
                "limit_w_m2": by_id[limit_id].power_density_w_m2,
                "kind": zone.kind,
                "level_quotient": zone.level,
                "area_m2": zone.area_m2,
                "clipped_at_map_edge": zone.clipped,
            }
            if zone.kind in shapes.get(limit_id, {}):
                props["enclosing"] = shapes[limit_id][zone.kind]
            features.append(
                {
                    "type": "Feature",
                    "geometry": {"type": "MultiPolygon", "coordinates": coords},
                    "properties": props,
                }
            )
    s0, s1, t0, t1 = map_result.grid.extent_m
    return {
        "type": "FeatureCollection",
        "name": "keepclear zones" + (f": {scenario.name}" if scenario is not None else ""),
        "coordinate_units": "m",
        "coordinates_are": (
            f"in-plane metres ({plane.axis_names[0]}, {plane.axis_names[1]}) on the "
            f"{plane.description}; not longitude/latitude"
        ),
        "plane": plane.as_dict(),
        "map_extent_m": [s0, s1, t0, t1],
        "grid_step_m": map_result.grid.step_m,
        "features": features,
    }


# ---------------------------------------------------------- grid exports
def grid_csv_bytes(map_result: MapResult) -> bytes:
    """The grid as CSV: scenario and plane coordinates, fields and quotients, a row a sample."""
    grid = map_result.grid
    pts = grid.points_m()
    ss, tt = np.meshgrid(grid.s_m, grid.t_m)
    columns = [
        pts[:, 0],
        pts[:, 1],
        pts[:, 2],
        ss.ravel(),
        tt.ravel(),
        map_result.power_density_w_m2.ravel(),
        map_result.peak_power_density_w_m2.ravel(),
        map_result.e_v_m.ravel(),
        map_result.h_a_m.ravel(),
    ] + [q.ravel() for q in map_result.quotients]
    header = [
        "x_m",
        "y_m",
        "z_m",
        "s_m",
        "t_m",
        "power_density_w_m2",
        "peak_power_density_w_m2",
        "e_v_m",
        "h_a_m",
    ]
    header += [f"quotient:{i}" for i in map_result.limit_ids]
    buf = io.BytesIO()
    buf.write((",".join(header) + "\n").encode())
    np.savetxt(buf, np.column_stack(columns), delimiter=",", fmt="%.7g")
    return buf.getvalue()


def grid_npz_bytes(map_result: MapResult, metadata: dict[str, Any] | None = None) -> bytes:
    """The grid as a NumPy .npz archive (arrays in SI units, metadata as JSON text).

    ``inside_source`` marks the samples inside a source or on its metal (their quotients
    are raised to :data:`~keepclear.fields.maps.evaluation.INSIDE_SOURCE_QUOTIENT`).
    """
    grid = map_result.grid
    meta = {"plane": grid.plane.as_dict(), "limit_ids": list(map_result.limit_ids)}
    meta.update(metadata or {})
    buf = io.BytesIO()
    np.savez_compressed(
        buf,
        s_m=grid.s_m,
        t_m=grid.t_m,
        points_m=grid.points_m().reshape(*grid.shape, 3),
        power_density_w_m2=map_result.power_density_w_m2,
        peak_power_density_w_m2=map_result.peak_power_density_w_m2,
        e_v_m=map_result.e_v_m,
        h_a_m=map_result.h_a_m,
        quotients=map_result.quotients,
        inside_source=(
            np.zeros(grid.shape, dtype=bool)
            if map_result.inside_source is None
            else map_result.inside_source
        ),
        limit_ids=np.array(map_result.limit_ids),
        metadata_json=np.array(json.dumps(meta)),
    )
    return buf.getvalue()


def map_geojson(run: MapRun) -> dict[str, Any]:
    """The zones of a map run as GeoJSON (:func:`zones_geojson`)."""
    return zones_geojson(run.result, run.zones, run.shapes, run.scenario)
