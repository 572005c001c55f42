"""Maps on a plane: grids, their evaluation, limit zones and the shapes a sign would state.

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

from __future__ import annotations

import io
import json
import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import contourpy
import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import ETA0_OHM, ModelRangeWarning, fibonacci_sphere

from . import limits as limits_mod
from .errors import InputError, ResourceError
from .field import evaluate, radiating_terms
from .keepout import KeepoutResult
from .scenario import Scenario

#: Memory a map may use at most (grid, fields, quotients, CSV text) [bytes].
MAX_GRID_BYTES = 1 << 30
#: Most samples along one side of a map.
MAX_PIXELS_PER_SIDE = 4001
#: Samples along a side when neither a step nor a pixel count is given.
DEFAULT_PIXELS = 241
#: Smallest default half-width of a map [m].
MIN_HALF_EXTENT_M = 2.0
#: Default half-width as a multiple of the largest keep-out radius.
KEEPOUT_EXTENT_FACTOR = 1.5
#: Density given to a sample on a source singularity (far above any limit) [W m^-2].
SINGULAR_DENSITY_W_M2 = 1e12
#: Floor of the quotient before taking its logarithm (q = 0 far behind a shield).
_Q_FLOOR = 1e-30
PLANE_NAMES = ("xy", "xz", "yz")
ProgressCallback = Callable[[int, int], None]


def busy(progress: Callable[[str], Any] | None, label: str) -> Any:
    """A context for a stage without steps: the progress factory's indeterminate bar.

    ``progress(label)`` may return a callback with a ``busy()`` context manager (the
    command line's progress bars); otherwise nothing is shown.
    """
    import contextlib

    callback = progress(label) if progress is not None else None
    context = getattr(callback, "busy", None)
    return context() if context is not None else contextlib.nullcontext()


# ------------------------------------------------------------------ planes
@dataclass(frozen=True)
class Plane:
    """A plane with in-plane coordinates (s, t) in metres.

    A point of the plane is ``ref_m + s * u + t * v``.  For the principal planes
    ``ref_m`` is chosen so that s and t are the scenario coordinates themselves
    (x and y on a horizontal plane).

    Parameters
    ----------
    kind : str
        ``"xy"``, ``"xz"``, ``"yz"``, ``"boresight"`` (vertical, through a main axis)
        or ``"custom"``.
    ref_m : ndarray, shape (3,)
        The point where s = t = 0 [m].
    u, v : ndarray, shape (3,)
        Orthonormal in-plane axes (s along u, t along v) [1].
    centre_st_m : tuple of float
        Default map centre in plane coordinates [m].
    axis_names : tuple of str
        Names of the two in-plane coordinates (``"x"``, ``"y"``), used in labels
        and as JSON key stems (``x_m``).
    description : str
        Where the plane lies, in words (``"horizontal plane z = 1.00 m"``).
    """

    kind: str
    ref_m: NDArray[np.float64]
    u: NDArray[np.float64]
    v: NDArray[np.float64]
    centre_st_m: tuple[float, float]
    axis_names: tuple[str, str]
    description: str

    @property
    def normal(self) -> NDArray[np.float64]:
        """Unit normal u x v [1]."""
        return np.cross(self.u, self.v)

    def to_plane(self, points_m: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Project scenario points (N, 3) onto the plane.

        Returns
        -------
        st_m : ndarray, shape (N, 2)
            In-plane coordinates of the foot points [m].
        offset_m : ndarray, shape (N,)
            Signed distance from the plane along :attr:`normal` [m].
        """
        p = np.asarray(points_m, dtype=float).reshape(-1, 3) - self.ref_m
        return np.column_stack([p @ self.u, p @ self.v]), p @ self.normal

    def to_scenario(self, s_m: ArrayLike, t_m: ArrayLike) -> NDArray[np.float64]:
        """Scenario points (N, 3) of in-plane coordinates [m]."""
        s = np.asarray(s_m, dtype=float).reshape(-1, 1)
        t = np.asarray(t_m, dtype=float).reshape(-1, 1)
        return self.ref_m + s * self.u + t * self.v

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready description."""
        return {
            "kind": self.kind,
            "description": self.description,
            "ref_m": [float(x) for x in self.ref_m],
            "u": [float(x) for x in self.u],
            "v": [float(x) for x in self.v],
            "axis_names": list(self.axis_names),
        }


def _unit(vector: ArrayLike, option: str) -> NDArray[np.float64]:
    v = np.asarray(vector, dtype=float)
    if v.shape != (3,) or not np.all(np.isfinite(v)):
        raise InputError(f"must be three finite numbers, got {vector!r}", "argument", option)
    n = float(np.linalg.norm(v))
    if n < 1e-12:
        raise InputError("must not be a zero vector", "argument", option)
    return v / n


def principal_plane(name: str, through_m: ArrayLike) -> Plane:
    """The principal plane ``"xy"``, ``"xz"`` or ``"yz"`` through a point.

    Parameters
    ----------
    name : str
        Which plane.
    through_m : array_like, shape (3,)
        A point on the plane; also the map centre [m].
    """
    if name not in PLANE_NAMES:
        raise InputError(
            f"must be one of {', '.join(PLANE_NAMES)}, got '{name}'", "argument", "--plane"
        )
    p = np.asarray(through_m, dtype=float).reshape(3)
    e = np.eye(3)
    i, j = {"xy": (0, 1), "xz": (0, 2), "yz": (1, 2)}[name]
    k = 3 - i - j
    ref = np.zeros(3)
    ref[k] = p[k]
    axis = "xyz"
    where = {
        "xy": f"horizontal plane z = {p[2]:.2f} m",
        "xz": f"vertical plane y = {p[1]:.2f} m",
        "yz": f"vertical plane x = {p[0]:.2f} m",
    }[name]
    return Plane(name, ref, e[i], e[j], (float(p[i]), float(p[j])), (axis[i], axis[j]), where)


def custom_plane(origin_m: ArrayLike, u: ArrayLike, v: ArrayLike) -> Plane:
    """An arbitrary plane through ``origin_m`` spanned by ``u`` and ``v``.

    ``u`` is normalised; ``v`` is made perpendicular to it (Gram-Schmidt), which
    keeps the plane and the side of ``v``.  The map is centred on the origin.

    Raises
    ------
    InputError
        For a zero vector, or ``u`` and ``v`` (nearly) parallel, naming the option.
    """
    o = np.asarray(origin_m, dtype=float).reshape(3)
    uu = _unit(u, "--u")
    vv = _unit(v, "--v")
    vv = vv - np.dot(vv, uu) * uu
    if np.linalg.norm(vv) < 1e-6:
        raise InputError("must not be parallel to --u: the two span the plane", "argument", "--v")
    vv = vv / np.linalg.norm(vv)
    where = (
        f"plane through ({o[0]:g}, {o[1]:g}, {o[2]:g}) m spanned by "
        f"u = ({uu[0]:.2f}, {uu[1]:.2f}, {uu[2]:.2f}), v = ({vv[0]:.2f}, {vv[1]:.2f}, {vv[2]:.2f})"
    )
    return Plane("custom", o, uu, vv, (0.0, 0.0), ("u", "v"), where)


def main_axis(scenario: Scenario) -> NDArray[np.float64] | None:
    """The first source's boresight (apertures) or wire axis, None for isotropic [1]."""
    source = scenario.sources[0]
    if source.antenna == "isotropic":
        return None
    return np.asarray(source.radiator.placement.rotation[:, 2], dtype=float)


def boresight_plane(scenario: Scenario) -> Plane:
    """The vertical plane through the first source that holds its main axis.

    s is the horizontal distance from the source along the axis, t the height z.
    Where the axis is (nearly) vertical or absent (isotropic, wires) the plane is
    the xz plane through the source.
    """
    c = scenario.centre_m
    axis = main_axis(scenario)
    horizontal = None if axis is None else np.array([axis[0], axis[1], 0.0])
    is_wire = scenario.sources[0].antenna in ("dipole", "monopole")
    if horizontal is None or is_wire or np.linalg.norm(horizontal) < 0.1:
        return principal_plane("xz", c)
    u = horizontal / np.linalg.norm(horizontal)
    v = np.array([0.0, 0.0, 1.0])
    ref = np.array([c[0], c[1], 0.0])
    azimuth = math.degrees(math.atan2(u[1], u[0]))
    where = (
        f"vertical plane through the {scenario.sources[0].id} boresight "
        f"(azimuth {azimuth:.0f} deg from +x)"
    )
    return Plane("boresight", ref, u, v, (0.0, float(c[2])), ("along boresight", "z"), where)


def point_letter(index: int) -> str:
    """The map letter of the i-th named place: A, B, ... Z, then P27, P28, ..."""
    return chr(ord("A") + index) if index < 26 else f"P{index + 1}"


# ------------------------------------------------------------------- grids
@dataclass(frozen=True)
class Grid:
    """A regular grid of samples on a plane.

    Parameters
    ----------
    plane : Plane
    s_m : ndarray, shape (nx,)
        Sample coordinates along u [m].
    t_m : ndarray, shape (ny,)
        Sample coordinates along v [m].
    """

    plane: Plane
    s_m: NDArray[np.float64]
    t_m: NDArray[np.float64]

    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx): rows along t, columns along s."""
        return (self.t_m.size, self.s_m.size)

    @property
    def step_m(self) -> float:
        """The larger of the two sample spacings [m]."""
        ds = float(self.s_m[1] - self.s_m[0]) if self.s_m.size > 1 else 0.0
        dt = float(self.t_m[1] - self.t_m[0]) if self.t_m.size > 1 else 0.0
        return max(ds, dt)

    @property
    def extent_m(self) -> tuple[float, float, float, float]:
        """(s_min, s_max, t_min, t_max) of the samples [m]."""
        return (float(self.s_m[0]), float(self.s_m[-1]), float(self.t_m[0]), float(self.t_m[-1]))

    def points_m(self) -> NDArray[np.float64]:
        """Scenario coordinates of every sample, row by row, shape (ny * nx, 3) [m]."""
        ss, tt = np.meshgrid(self.s_m, self.t_m)
        return self.plane.to_scenario(ss.ravel(), tt.ravel())


def grid_bytes(n_points: int, n_limits: int) -> int:
    """Memory a map of ``n_points`` samples needs, roughly [bytes].

    Points (24 B), six field arrays (48 B), quotients and their logarithms (16 B
    a limit), and the CSV text (about 16 B a column), plus a third for the
    temporaries of plotting and contouring.
    """
    per_point = 24 + 48 + 16 * n_limits + 16 * (9 + n_limits)
    return int(n_points * per_point * 4 // 3)


def round_extent_m(x: float) -> float:
    """Round a half-width up: to 0.5 m below 10 m, to 1 m below 50 m, else to 10 m [m]."""
    if x <= 0:
        return 0.0
    quantum = 0.5 if x < 10 else (1.0 if x < 50 else 10.0)
    return quantum * math.ceil(x / quantum - 1e-9)


def default_half_extent_m(
    scenario: Scenario, keepouts: Sequence[KeepoutResult], plane: Plane
) -> float:
    """A half-width that shows every zone, the named points and the sources [m].

    ``max(2 m, 1.5 x the largest keep-out radius (with uncertainty), the farthest
    named point or source from the map centre + 10 %)``, rounded up (to
    0.5 m below 10 m).  Named points farther than three times the keep-out part are
    left off.
    """
    r = max((k.recommended_distance_m for k in keepouts), default=0.0)
    centre = np.asarray(plane.centre_st_m)
    # The keep-out centre may sit off the map centre (an option that moves the source).
    st_c, _ = plane.to_plane(scenario.centre_m)
    shift = float(np.max(np.abs(st_c[0] - centre)))
    base = max(MIN_HALF_EXTENT_M, KEEPOUT_EXTENT_FACTOR * r + shift)
    places = [p.position_m for p in scenario.points] + [s.position_m for s in scenario.sources]
    plates = [r for r in scenario.reflectors if getattr(r, "is_finite", False)]
    for obj in (*scenario.shields, *plates, scenario.enclosure):
        corners = object_corners(obj) if obj is not None else None
        if corners is not None:
            places += list(corners)
    reach = 0.0
    if places:
        st, _ = plane.to_plane(np.array(places))
        d = np.max(np.abs(st - centre), axis=1) * 1.1
        d = d[d <= 3 * base]
        reach = float(d.max()) if d.size else 0.0
    return round_extent_m(max(base, reach))


def default_window_m(
    scenario: Scenario,
    plane: Plane,
    half_extent_m: float,
    keepouts: Sequence[KeepoutResult] = (),
) -> tuple[tuple[float, float], float]:
    """The map centre and half-height: square, or cut down on a vertical plane over a floor.

    On a plane whose second axis is the vertical, a horizontal reflector below the
    centre (a floor) would leave much of a square map underground or in empty air
    high above a horizontal beam.  The window then runs from a little below the floor
    (a tenth of the height) to 1.25 times the largest keep-out radius above the
    centre (at least 2 m, and above every named place), never beyond the square.

    Returns
    -------
    centre_st_m : tuple of float
        Map centre in plane coordinates [m].
    half_height_m : float
        Half the map's extent along the plane's second axis [m].
    """
    cs, ct = plane.centre_st_m
    square = ((cs, ct), half_extent_m)
    if float(plane.v[2]) < 0.99:
        return square
    base_t = float(plane.ref_m @ plane.v)
    floors = [
        float(r.point_m[2]) - base_t
        for r in scenario.reflectors
        if not getattr(r, "is_finite", False)  # a table top is not a floor
        and float(np.asarray(r.normal)[2]) > 0.99
        and float(r.point_m[2]) - base_t < ct
    ]
    if not floors:
        return square
    floor = max(floors)
    reach = max((k.recommended_distance_m for k in keepouts), default=0.0)
    top = ct + max(MIN_HALF_EXTENT_M, 1.25 * reach)
    if scenario.points:
        top = max(top, max(float(p.position_m[2]) - base_t for p in scenario.points) + 0.5)
    top = min(top, ct + half_extent_m)
    bottom = max(ct - half_extent_m, floor - 0.1 * (top - floor))
    half_height = min(half_extent_m, (top - bottom) / 2)
    return (cs, bottom + half_height), half_height


def make_grid(
    plane: Plane,
    half_extent_m: float,
    *,
    step_m: float | None = None,
    pixels: int | None = None,
    centre_st_m: tuple[float, float] | None = None,
    half_height_m: float | None = None,
    n_limits: int = 1,
    max_bytes: int = MAX_GRID_BYTES,
) -> Grid:
    """A regular grid centred on the plane's centre, checked against the memory bound.

    Parameters
    ----------
    plane : Plane
    half_extent_m : float
        Half the width of the map, along the first axis [m].
    step_m : float, optional
        Sample spacing [m]; the half-width is rounded up to a whole number of steps.
    pixels : int, optional
        Samples along a side (used when no step is given; default 241).
    centre_st_m : tuple, optional
        Map centre in plane coordinates (default: the plane's) [m].
    half_height_m : float, optional
        Half the height along the second axis (default: square) [m]; the same step.
    n_limits : int
        Limits whose quotients the map will hold (for the memory estimate).
    max_bytes : int
        Memory bound [bytes].

    Raises
    ------
    InputError
        For a non-positive or non-finite extent, step or pixel count.
    ResourceError
        If the grid would need more than ``max_bytes`` or more than
        :data:`MAX_PIXELS_PER_SIDE` samples a side; raised before anything is
        allocated and naming the option to change.
    """
    if not (math.isfinite(half_extent_m) and half_extent_m > 0):
        raise InputError(
            f"must be a positive number of metres, got {half_extent_m!r}", "argument", "--extent-m"
        )
    if step_m is not None and pixels is not None:
        raise InputError("give --step-m or --pixels, not both", "argument", "--pixels")
    if step_m is not None:
        if not (math.isfinite(step_m) and step_m > 0):
            raise InputError(
                f"must be a positive number of metres, got {step_m!r}", "argument", "--step-m"
            )
        n = 2 * math.ceil(half_extent_m / step_m - 1e-9) + 1
        option = "--step-m"
    else:
        n = DEFAULT_PIXELS if pixels is None else int(pixels)
        if n < 3:
            raise InputError(f"must be at least 3, got {n}", "argument", "--pixels")
        option = "--pixels" if pixels is not None else "--extent-m"
        step_m = 2 * half_extent_m / (n - 1)
    half_t = half_extent_m if half_height_m is None else min(half_height_m, half_extent_m)
    ny = min(n, 2 * math.ceil(half_t / step_m - 1e-9) + 1) if n > 1 else n
    if n > MAX_PIXELS_PER_SIDE:
        raise ResourceError(
            f"a map of more than {MAX_PIXELS_PER_SIDE} samples a side is refused "
            f"(asked {n}); use a coarser {option} or a smaller --extent-m",
            "argument",
            option,
        )
    need = grid_bytes(n * ny, n_limits)
    if need > max_bytes:
        raise ResourceError(
            f"a {n} x {ny} map needs about {need / 2**20:.0f} MiB, more than the "
            f"{max_bytes / 2**20:.0f} MiB allowed; use a coarser {option} or a smaller --extent-m",
            "argument",
            option,
        )
    cs, ct = plane.centre_st_m if centre_st_m is None else centre_st_m
    s_offsets = (np.arange(n) - (n - 1) / 2) * step_m
    t_offsets = (np.arange(ny) - (ny - 1) / 2) * step_m
    return Grid(
        plane, np.asarray(cs + s_offsets, dtype=float), np.asarray(ct + t_offsets, dtype=float)
    )


# -------------------------------------------------------------- evaluation
@dataclass(frozen=True)
class MapResult:
    """Time-averaged fields and exposure quotients on a grid.

    Arrays have the grid's shape (ny, nx); ``quotients`` is (L, ny, nx).

    Parameters
    ----------
    grid : Grid
    power_density_w_m2, peak_power_density_w_m2 : ndarray
        Time-averaged and while-radiating power density [W m^-2].
    e_v_m, h_a_m : ndarray
        Time-averaged RMS field strengths [V m^-1], [A m^-1].
    limits : tuple of LimitValue
        The limits, at the scenario frequency.
    quotients : ndarray
        Exposure quotient per limit [1].
    """

    grid: Grid
    power_density_w_m2: NDArray[np.float64]
    peak_power_density_w_m2: NDArray[np.float64]
    e_v_m: NDArray[np.float64]
    h_a_m: NDArray[np.float64]
    limits: tuple[limits_mod.LimitValue, ...]
    quotients: NDArray[np.float64]

    @property
    def limit_ids(self) -> tuple[str, ...]:
        """The limit ids in the order of ``quotients``."""
        return tuple(v.id for v in self.limits)

    def quotient(self, limit_id: str) -> NDArray[np.float64]:
        """The quotient map of one limit [1]."""
        return self.quotients[self.limit_ids.index(limit_id)]


def limit_values(scenario: Scenario, limit_ids: Sequence[str]) -> tuple[limits_mod.LimitValue, ...]:
    """The limits at the scenario frequency (LimitError names an unknown id)."""
    return tuple(limits_mod.get_limit(i).at(scenario.frequency_hz) for i in limit_ids)


def evaluate_map(
    scenario: Scenario,
    grid: Grid,
    limit_ids: Sequence[str] | None = None,
    progress: ProgressCallback | None = None,
) -> MapResult:
    """Evaluate a scenario on a grid.

    Parameters
    ----------
    scenario : Scenario
    grid : Grid
    limit_ids : sequence of str, optional
        Limits to compare with (default: the scenario's).
    progress : callable, optional
        Called as ``progress(done, total)`` in points.

    Returns
    -------
    MapResult
    """
    ids = list(scenario.limit_ids if limit_ids is None else limit_ids)
    values = limit_values(scenario, ids)
    points = grid.points_m()
    n = points.shape[0]
    _warn_undersampled(scenario, grid)
    chunk = max(4096, n // 50)
    parts = []
    for start in range(0, n, chunk):
        parts.append(evaluate(scenario, points[start : start + chunk]))
        if progress is not None:
            progress(min(n, start + chunk), n)

    def cat(name: str) -> NDArray[np.float64]:
        return np.concatenate([getattr(p, name) for p in parts]).reshape(grid.shape)

    s, e, h, peak = _singular_as_exceeding(
        cat("power_density_w_m2"), cat("e_v_m"), cat("h_a_m"), cat("peak_power_density_w_m2")
    )
    q = np.empty((len(values), *grid.shape))
    for i, v in enumerate(values):
        q[i] = limits_mod.quotient(v, s, e, h)
    return MapResult(grid, s, peak, e, h, values, q)


def _singular_as_exceeding(
    s: NDArray[np.float64], e: NDArray[np.float64], h: NDArray[np.float64], peak: NDArray
) -> tuple[NDArray, NDArray, NDArray, NDArray]:
    """Samples where a model returns no finite field (on a source) count as exceeding.

    They are set to :data:`SINGULAR_DENSITY_W_M2` (E and H of a plane wave of that
    density), far above every limit, and a warning says how many there are.
    """
    bad = ~(np.isfinite(s) & np.isfinite(e) & np.isfinite(h) & np.isfinite(peak))
    if not bad.any():
        return s, e, h, peak
    warnings.warn(
        f"{int(bad.sum())} map sample(s) fall on a source singularity (no finite field); "
        "they are counted as exceeding every limit",
        ModelRangeWarning,
        stacklevel=3,
    )
    s, e, h, peak = (np.where(bad, 0.0, x) for x in (s, e, h, peak))
    s[bad] = peak[bad] = SINGULAR_DENSITY_W_M2
    e[bad] = math.sqrt(SINGULAR_DENSITY_W_M2 * ETA0_OHM)
    h[bad] = math.sqrt(SINGULAR_DENSITY_W_M2 / ETA0_OHM)
    return s, e, h, peak


def _warn_undersampled(scenario: Scenario, grid: Grid) -> None:
    if scenario.reflections == "coherent" and scenario.reflectors:
        wavelength = scenario.wavelength_m
        if grid.step_m > wavelength / 8:
            warnings.warn(
                f"the map step {grid.step_m * 100:.1f} cm is coarser than lambda/8 = "
                f"{wavelength / 8 * 100:.1f} cm: the coherent standing-wave pattern is "
                "undersampled and its crests may be missed between samples; use a finer "
                '--step-m or reflections = "envelope"',
                ModelRangeWarning,
                stacklevel=2,
            )


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
        s_parts, e_parts, h_parts = [], [], []
        for start in range(0, n, chunk):
            res = evaluate(scenario, pts[start : start + chunk])
            s_parts.append(res.power_density_w_m2)
            e_parts.append(res.e_v_m)
            h_parts.append(res.h_a_m)
            if progress is not None:
                progress(min(n, start + chunk), n)
        s, e, h = (np.concatenate(p) for p in (s_parts, e_parts, h_parts))
        for k, v in zip(keepouts, values, strict=True):
            scale = 1.0 / uncertainty_level(k)
            hits_by_limit[k.limit_id] = pts[limits_mod.quotient(v, s, e, h) * scale >= 1.0]
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
    """The grid as a NumPy .npz archive (arrays in SI units, metadata as JSON text)."""
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
        limit_ids=np.array(map_result.limit_ids),
        metadata_json=np.array(json.dumps(meta)),
    )
    return buf.getvalue()


# --------------------------------------------------- geometry for drawing
@dataclass(frozen=True)
class Outline:
    """A polyline or polygon in three dimensions, with what it is.

    Parameters
    ----------
    points_m : ndarray, shape (n, 3)
        Vertices [m].
    closed : bool
        Whether the last vertex joins the first.
    role : str
        ``"aperture"``, ``"horn"``, ``"wire"``, ``"shield"``, ``"enclosure"``.
    """

    points_m: NDArray[np.float64]
    closed: bool
    role: str
    label: str = ""
    extra: dict[str, Any] = field(default_factory=dict)


def _given_number(given: dict[str, Any], key: str) -> float | None:
    value = given.get(key)
    return float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) else None


def _aperture_size(source: Any) -> tuple[float, float] | None:
    """Aperture width (local x) and height (local y) of an aperture source [m]."""
    radiator, given = source.radiator, source.given
    if source.antenna == "horn":
        w = _given_number(given, "aperture_width_m")
        h = _given_number(given, "aperture_height_m")
        if w and h:
            return w, h
    for names in (("broad_m", "narrow_m"), ("a_m", "b_m")):
        w = getattr(radiator, names[0], None)
        h = getattr(radiator, names[1], None)
        if isinstance(w, (int, float)) and isinstance(h, (int, float)):
            return float(w), float(h)
    w, h = _given_number(given, "broad_m"), _given_number(given, "narrow_m")
    if w and h:
        return w, h
    if isinstance(given.get("waveguide"), str):
        try:
            from keepclear.antennas.waveguide import waveguide_dimensions

            w, h = waveguide_dimensions(given["waveguide"])
            return float(w), float(h)
        except Exception:  # noqa: BLE001 - a drawing aid only; the model validated it
            return None
    return None


def _local_rect(width: float, height: float, z: float) -> NDArray[np.float64]:
    return np.array(
        [
            [-width / 2, -height / 2, z],
            [width / 2, -height / 2, z],
            [width / 2, height / 2, z],
            [-width / 2, height / 2, z],
        ]
    )


def source_outlines(source: Any) -> list[Outline]:
    """To-scale outlines of a source: aperture rectangle, horn flare, or wire [m]."""
    placement = source.radiator.placement
    rot, pos = placement.rotation, placement.position_m

    def to_global(local: NDArray[np.float64]) -> NDArray[np.float64]:
        return local @ rot.T + pos

    out: list[Outline] = []
    if source.antenna in ("open-waveguide", "horn"):
        size = _aperture_size(source)
        if size is None:
            return out
        out.append(Outline(to_global(_local_rect(*size, 0.0)), True, "aperture", source.id))
        if source.antenna == "horn":
            length = _given_number(source.given, "length_m")
            feed = None
            w, h = source.given.get("broad_m"), source.given.get("narrow_m")
            if isinstance(w, (int, float)) and isinstance(h, (int, float)):
                feed = (float(w), float(h))
            elif isinstance(source.given.get("waveguide"), str):
                try:
                    from keepclear.antennas.waveguide import waveguide_dimensions

                    fw, fh = waveguide_dimensions(source.given["waveguide"])
                    feed = (float(fw), float(fh))
                except Exception:  # noqa: BLE001 - a drawing aid only
                    feed = None
            if length and feed:
                throat = _local_rect(feed[0], feed[1], -length)
                mouth = _local_rect(*size, 0.0)
                out.append(Outline(to_global(throat), True, "horn", source.id))
                for a, b in zip(throat, mouth, strict=True):
                    out.append(Outline(to_global(np.array([a, b])), False, "horn", source.id))
    elif source.antenna in ("dipole", "monopole"):
        length = _given_number(source.given, "length_m")
        if length is None:
            length = float(getattr(source.radiator, "length_m", 0.0) or 0.0)
        if length > 0:
            z0 = -length / 2 if source.antenna == "dipole" else 0.0
            local = np.array([[0.0, 0.0, z0], [0.0, 0.0, z0 + length]])
            out.append(Outline(to_global(local), False, "wire", source.id))
    return out


def object_corners(obj: Any) -> NDArray[np.float64] | None:
    """Corner points (n, 3) of a shield or enclosure, from whatever it offers [m].

    Tries ``outline()``, ``corners()``, ``corners_m``, then a rectangle from
    ``center_m``/``centre_m``, ``normal``, ``width_m`` and ``height_m`` (width
    horizontal).  Returns None when the object offers no geometry.
    """
    for name in ("outline", "corners", "corners_m", "outline_m"):
        attr = getattr(obj, name, None)
        if attr is None:
            continue
        try:
            value = attr() if callable(attr) else attr
            arr = np.asarray(value, dtype=float)
        except Exception:  # noqa: BLE001 - a drawing aid only
            continue
        if arr.ndim == 2 and arr.shape[1] == 3 and arr.shape[0] >= 2 and np.all(np.isfinite(arr)):
            return arr
    centre = getattr(obj, "center_m", getattr(obj, "centre_m", None))
    normal = getattr(obj, "normal", None)
    width = getattr(obj, "width_m", None)
    height = getattr(obj, "height_m", None)
    if centre is None or normal is None or width is None or height is None:
        return None
    try:
        c = np.asarray(centre, dtype=float).reshape(3)
        n = np.asarray(normal, dtype=float).reshape(3)
        n = n / np.linalg.norm(n)
        up = np.array([0.0, 0.0, 1.0])
        across = np.cross(up, n)
        if np.linalg.norm(across) < 1e-6:
            across = np.array([1.0, 0.0, 0.0])
        across /= np.linalg.norm(across)
        vertical = np.cross(n, across)
        w, h = float(width) / 2, float(height) / 2
    except Exception:  # noqa: BLE001 - a drawing aid only
        return None
    return np.array(
        [
            c - w * across - h * vertical,
            c + w * across - h * vertical,
            c + w * across + h * vertical,
            c - w * across + h * vertical,
        ]
    )


def opening_corners(enclosure: Any) -> list[NDArray[np.float64]]:
    """Corner sets (4, 3) of an enclosure's openings, where it can say them [m]."""
    outline = getattr(enclosure, "opening_outline", None)
    openings = getattr(enclosure, "openings", ())
    if outline is None:
        return []
    out = []
    for opening in openings:
        try:
            corners = np.asarray(outline(opening), dtype=float)
        except Exception:  # noqa: BLE001 - a drawing aid only
            continue
        if corners.ndim == 2 and corners.shape[1] == 3:
            out.append(corners)
    return out


def convex_section(
    plane: Plane, corners_m: NDArray[np.float64], tolerance_m: float = 1e-9
) -> NDArray[np.float64] | None:
    """Where the plane cuts the convex hull of ``corners_m``: ordered (n, 2) vertices, or None.

    The section of a convex body with a plane is the convex hull of the points
    where the plane meets the segments between its vertices.  Two vertices mean
    the plane cuts a flat object (a shield sheet) along a segment.
    """
    st, d = plane.to_plane(corners_m)
    hits = [st[i] for i in range(len(d)) if abs(d[i]) <= tolerance_m]
    for i in range(len(d)):
        for j in range(i + 1, len(d)):
            if d[i] * d[j] < 0:
                w = d[i] / (d[i] - d[j])
                hits.append(st[i] + w * (st[j] - st[i]))
    if len(hits) < 2:
        return None
    pts = np.unique(np.round(np.asarray(hits), 9), axis=0)
    if pts.shape[0] < 3:
        return pts if pts.shape[0] == 2 else None
    centre = pts.mean(axis=0)
    spread = pts - centre
    # Nearly collinear: the extreme pair along the main direction.
    _, sv, vt = np.linalg.svd(spread, full_matrices=False)
    if sv[-1] < 1e-9 * max(sv[0], 1e-12):
        proj = spread @ vt[0]
        return np.array([pts[np.argmin(proj)], pts[np.argmax(proj)]])
    from scipy.spatial import ConvexHull

    hull = ConvexHull(pts)
    return pts[hull.vertices]


def projected_hull(plane: Plane, corners_m: NDArray[np.float64]) -> NDArray[np.float64] | None:
    """The outline of an object seen along the plane normal: hull of projected corners (n, 2)."""
    st, _ = plane.to_plane(corners_m)
    pts = np.unique(np.round(st, 9), axis=0)
    if pts.shape[0] < 3:
        return pts if pts.shape[0] == 2 else None
    spread = pts - pts.mean(axis=0)
    _, sv, vt = np.linalg.svd(spread, full_matrices=False)
    if sv[-1] < 1e-9 * max(sv[0], 1e-12):
        proj = spread @ vt[0]
        return np.array([pts[np.argmin(proj)], pts[np.argmax(proj)]])
    from scipy.spatial import ConvexHull

    hull = ConvexHull(pts)
    return pts[hull.vertices]


def plane_trace(
    plane: Plane, point_m: ArrayLike, normal: ArrayLike
) -> tuple[float, float, float] | None:
    """Line where another plane meets this one, as (a, b, c) with a s + b t = c.

    (a, b) is the other plane's normal projected into this plane, so a s + b t > c
    is its front side.  None when the two planes are (nearly) parallel.
    """
    n = np.asarray(normal, dtype=float)
    n = n / np.linalg.norm(n)
    a, b = float(n @ plane.u), float(n @ plane.v)
    norm = math.hypot(a, b)
    if norm < 1e-6:
        return None
    c = float(n @ (np.asarray(point_m, dtype=float) - plane.ref_m))
    return a / norm, b / norm, c / norm


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
    grid = make_grid(
        plane,
        half_extent_m,
        step_m=step_m,
        pixels=pixels,
        centre_st_m=centre_st_m,
        half_height_m=half_height_m,
        n_limits=len(limit_ids),
        max_bytes=max_bytes,
    )
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


def map_geojson(run: MapRun) -> dict[str, Any]:
    """The zones of a map run as GeoJSON (:func:`zones_geojson`)."""
    return zones_geojson(run.result, run.zones, run.shapes, run.scenario)
