"""Maps on a plane: grids, their evaluation, limit zones and the shapes a sign would state.

=====================  ===============================================================
:mod:`.grids`          planes, grids, default windows; where objects cut a plane
:mod:`.evaluation`     the scenario on a grid: fields, densities, quotients
:mod:`.zones`          zones, enclosing shapes and cylinders; :func:`run_map`
:mod:`.exports`        CSV, NPZ and GeoJSON
=====================  ===============================================================

A *map* samples the time-averaged fields of a scenario on a regular grid in a
plane (a principal plane through a point, the horizontal plane at a height, the
vertical plane through a boresight, or any plane by origin and two axes).  From
it come

* the **zone** of each limit: the region of the plane where the exposure
  quotient reaches one, as polygons with holes (marching squares on
  :math:`\\log_{10} q`, through :mod:`contourpy`, the contouring engine of
  matplotlib), written as GeoJSON in metres for marking out with tape;
* the **enclosing shapes** a safety sign states: a circle about the source, an
  axis-aligned box on the plane, and a vertical cylinder about the first source
  (radius and height range) from a ray scan in three dimensions.

Accuracy and conservatism
-------------------------
Linear interpolation of :math:`\\log_{10} q` between grid nodes places a crossing
exactly where :math:`q \\propto r^{-2}` (the far field) and within a fraction of a
grid step elsewhere, but a zone narrower than a step can fall between nodes.
Every enclosing shape is therefore widened by one grid step (the ``margin_m``),
and where a model states a gain uncertainty the shapes are drawn around the
zone at :math:`q \\ge 10^{-u/10}` instead of :math:`q \\ge 1`.  A zone that
touches the edge of the map is flagged ``clipped``: the shapes are then lower
bounds and the map must be widened.  The keep-out sphere of
:mod:`keepclear.fields.keepout` bounds every zone; its section with the plane is
reported beside the shapes.

The cylinder comes from rays in 800-odd quasi-uniform directions plus a
horizontal ring, the radiators' axes and the keep-out direction, sampled out to
1.25 times the keep-out radius, together with the zone outlines of the maps; it is
widened by one radial step.  The maps also check the keep-out search: the
farthest zone point of a map from the keep-out centre (:meth:`MapRun.reach_m`)
should not exceed the keep-out radius by more than a grid step; where it does, the
larger figure is the one to mark out.

References
----------
.. [1] W. E. Lorensen and H. E. Cline, "Marching cubes: a high resolution 3D
   surface construction algorithm", *Computer Graphics* 21(4) (1987) 163-169,
   doi:10.1145/37402.37422 (the two-dimensional case is marching squares).
.. [2] H. Butler et al., "The GeoJSON Format", IETF RFC 7946 (2016), sec. 3.1.6
   (Polygon, ring orientation) and 3.1.7 (MultiPolygon).
.. [3] FCC OET Bulletin 65, Edition 97-01 (1997), sec. 4 (controlling access:
   marking the area where limits may be exceeded).
"""

from keepclear.antennas.base import ModelRangeWarning

from .evaluation import (
    INSIDE_SOURCE_QUOTIENT,
    SINGULAR_DENSITY_W_M2,
    MapResult,
    ProgressCallback,
    busy,
    evaluate_map,
    limit_values,
)
from .exports import grid_csv_bytes, grid_npz_bytes, map_geojson, zones_geojson
from .grids import (
    DEFAULT_PIXELS,
    KEEPOUT_EXTENT_FACTOR,
    MAX_GRID_BYTES,
    MAX_PIXELS_PER_SIDE,
    MIN_HALF_EXTENT_M,
    PLANE_NAMES,
    SOURCE_HEIGHT_NAME,
    Grid,
    Plane,
    boresight_plane,
    convex_section,
    custom_plane,
    default_half_extent_m,
    default_window_m,
    grid_bytes,
    height_stem,
    horizontal_plane,
    main_axis,
    make_grid,
    object_corners,
    opening_corners,
    plane_trace,
    point_letter,
    principal_plane,
    projected_hull,
    round_extent_m,
    source_height_m,
    source_height_plane,
)
from .zones import (
    Cylinder,
    MapRun,
    Zone,
    contour_lines,
    enclosing_shapes,
    keepout_cylinders,
    log_quotient,
    map_zones,
    ring_signed_area,
    run_map,
    sphere_section,
    uncertainty_level,
    zone_of,
)

__all__ = [
    "DEFAULT_PIXELS",
    "INSIDE_SOURCE_QUOTIENT",
    "KEEPOUT_EXTENT_FACTOR",
    "MAX_GRID_BYTES",
    "MAX_PIXELS_PER_SIDE",
    "MIN_HALF_EXTENT_M",
    "PLANE_NAMES",
    "SOURCE_HEIGHT_NAME",
    "SINGULAR_DENSITY_W_M2",
    "Cylinder",
    "Grid",
    "MapResult",
    "MapRun",
    "ModelRangeWarning",
    "Plane",
    "ProgressCallback",
    "Zone",
    "boresight_plane",
    "busy",
    "contour_lines",
    "convex_section",
    "custom_plane",
    "default_half_extent_m",
    "default_window_m",
    "enclosing_shapes",
    "evaluate_map",
    "grid_bytes",
    "grid_csv_bytes",
    "grid_npz_bytes",
    "height_stem",
    "horizontal_plane",
    "keepout_cylinders",
    "limit_values",
    "log_quotient",
    "main_axis",
    "make_grid",
    "map_geojson",
    "map_zones",
    "object_corners",
    "opening_corners",
    "plane_trace",
    "point_letter",
    "principal_plane",
    "projected_hull",
    "ring_signed_area",
    "round_extent_m",
    "source_height_m",
    "source_height_plane",
    "run_map",
    "sphere_section",
    "uncertainty_level",
    "zone_of",
    "zones_geojson",
]
