"""Planes and grids of a map, and where objects cut a plane.

A *map* samples a scenario on a regular grid in a plane: a principal plane through a
point, the horizontal plane at a height, the vertical plane through a boresight, or any
plane by origin and two axes (:class:`Plane`, :class:`Grid`).  The default window
follows the keep-out answers and cuts a vertical map over a floor down to the height
that matters.  The drawing helpers say where an object's outline
(:mod:`keepclear.fields.surroundings`) cuts a plane or what it looks like seen along the
plane's normal.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError, ResourceError
from ..keepout import KeepoutResult
from ..scenario import Scenario
from ..surroundings import Drawable, EnclosureModel

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
PLANE_NAMES = ("xy", "xz", "yz")


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
    name : str
        What a horizontal plane is, where the tool chose it: ``"source height"``,
        ``"floor level"``, ``"head height"``; empty for a plane given by the user.
        Its files and text are named after it (:attr:`file_stem`, :attr:`where`).
    """

    kind: str
    ref_m: NDArray[np.float64]
    u: NDArray[np.float64]
    v: NDArray[np.float64]
    centre_st_m: tuple[float, float]
    axis_names: tuple[str, str]
    description: str
    name: str = ""

    @property
    def is_horizontal(self) -> bool:
        """Whether the plane is horizontal (``"xy"``)."""
        return self.kind == "xy"

    @property
    def height_m(self) -> float:
        """Height z of a horizontal plane [m]."""
        return float(self.ref_m[2])

    @property
    def file_stem(self) -> str:
        """The plane in file names: ``map-STEM.png``, ``zones-STEM.geojson``.

        A horizontal plane is named after what it is (``source-height``,
        ``floor-level``, ``head-height``) or, given by its height, after that height
        (``z1.70m``, :func:`height_stem`); another plane after its kind (``xz``,
        ``boresight``, ...).
        """
        if self.name:
            return self.name.replace(" ", "-")
        return height_stem(self.height_m) if self.is_horizontal else self.kind

    @property
    def where(self) -> str:
        """A horizontal plane in a few words: ``"source height (z = 1.10 m)"``, ``"z = 1.70 m"``."""
        if not self.is_horizontal:
            return self.description
        z = f"z = {_height_text(self.height_m)} m"
        return f"{self.name} ({z})" if self.name else z

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
            **({"name": self.name} if self.name else {}),
            "ref_m": [float(x) for x in self.ref_m],
            "u": [float(x) for x in self.u],
            "v": [float(x) for x in self.v],
            "axis_names": list(self.axis_names),
        }


def _height_text(z_m: float) -> str:
    """A height to the centimetre, without a minus sign on zero."""
    text = f"{z_m:.2f}"
    return "0.00" if text == "-0.00" else text


def height_stem(z_m: float) -> str:
    """A horizontal plane's file-name stem from its height: ``z1.70m``, ``z-0.50m``."""
    return f"z{_height_text(z_m)}m"


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
    """The first source's main axis (boresight or wire direction), None for a point source [1]."""
    return scenario.sources[0].radiator.main_axis


#: Largest tilt of a monopole's axis from the vertical for its infinite ground plane to
#: count as horizontal (the cosine of 8 degrees, the same tolerance as a floor's normal).
_VERTICAL_COSINE = math.cos(math.radians(8.0))
#: The name of the horizontal plane through the first source (files ``map-source-height.*``).
SOURCE_HEIGHT_NAME = "source height"


def source_height_m(scenario: Scenario) -> tuple[float, str]:
    """The height of the horizontal plane "at source height", and a note on where it is [m].

    The plane through the first source's reference point, except where that plane is a
    source's own metal: a monopole on an infinite ground plane has its feed on the ground,
    so with a (nearly) vertical element the plane through the feed is the ground plane
    itself, where every sample is on the metal (counted as over every limit, and nowhere
    anyone stands).  The plane then goes through the middle of the element, half its
    height off the ground on the radiating side: the field there is the field just above
    the ground (vertical E, largest towards the horizon), and no sample is on the metal.

    Returns
    -------
    (float, str)
        The height [m] and a short note for the plane's description (empty when the
        plane goes through the first source's reference point).
    """
    from keepclear.antennas.wire import Monopole

    z = float(scenario.centre_m[2])
    for source in scenario.sources:
        radiator = source.radiator
        if not isinstance(radiator, Monopole):
            continue
        axis = np.asarray(radiator.placement.rotation[:, 2], dtype=float)
        feed_z = float(radiator.position_m[2])
        if abs(axis[2]) >= _VERTICAL_COSINE and abs(feed_z - z) <= 1e-3:
            lifted = feed_z + 0.5 * radiator.height_m * float(np.sign(axis[2]))
            return lifted, (
                f"through the middle of the monopole {source.id!r}, "
                f"{0.5 * radiator.height_m * 100:.1f} cm off its ground plane"
            )
    return z, ""


def source_height_plane(scenario: Scenario) -> Plane:
    """The horizontal plane at source height (:func:`source_height_m`), named as such.

    The assessment's horizontal map and ``map``'s default plane lie at the first source's
    height, not on the floor: their description says so, and their files are named after
    it (``map-source-height.*``, ``zones-source-height.geojson``).
    """
    z, note = source_height_m(scenario)
    centre = scenario.centre_m
    plane = principal_plane("xy", [centre[0], centre[1], z])
    where = f"horizontal plane at source height z = {z:.2f} m"
    return replace(
        plane, description=where + (f" ({note})" if note else ""), name=SOURCE_HEIGHT_NAME
    )


def horizontal_plane(scenario: Scenario, height_m: float | None = None) -> Plane:
    """The horizontal plane of a scenario's maps: at ``height_m``, or at source height.

    Centred on the first source; without a height it is :func:`source_height_plane`
    (named, and lifted off a probe's infinite ground), with one it is named after it.
    """
    if height_m is None:
        return source_height_plane(scenario)
    centre = scenario.centre_m
    return principal_plane("xy", [centre[0], centre[1], float(height_m)])


def boresight_plane(scenario: Scenario) -> Plane:
    """The vertical plane through the first source that holds its boresight.

    s is the horizontal distance from the source along the boresight, t the height z.
    Where the boresight is (nearly) vertical or the source has none (a point source, a
    wire), the plane is the xz plane through the source.
    """
    c = scenario.centre_m
    axis = scenario.sources[0].radiator.boresight
    horizontal = None if axis is None else np.array([axis[0], axis[1], 0.0])
    if horizontal is None or np.linalg.norm(horizontal) < 0.1:
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
    for obj in (*scenario.shields, *scenario.reflectors, scenario.enclosure):
        corners = object_corners(obj) if obj is not None else None  # none: unbounded
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
        if object_corners(r) is None  # an unbounded plane: a table top is not a floor
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


# ----------------------------------------------- objects cut by a plane
def object_corners(obj: Drawable) -> NDArray[np.float64] | None:
    """The corners (n, 3) of an object's :meth:`outline`, None when it has none [m].

    Every drawable object (radiators, reflectors, shields, the enclosure) has
    ``outline()``: points whose convex hull is the object
    (:mod:`keepclear.fields.surroundings`).
    """
    outline = getattr(obj, "outline", None)
    value = None if outline is None else outline()
    if value is None:
        return None
    corners = np.asarray(value, dtype=float).reshape(-1, 3)
    return corners if corners.shape[0] else None


def opening_corners(enclosure: EnclosureModel) -> list[NDArray[np.float64]]:
    """Corner sets (4, 3) of an enclosure's openings [m]."""
    return [np.asarray(enclosure.opening_outline(o), dtype=float) for o in enclosure.openings]


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
