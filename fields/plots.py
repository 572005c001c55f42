"""Figures: density and quotient maps with limit contours, objects to scale, comparisons.

Every figure is built on a bare :class:`matplotlib.figure.Figure` (no pyplot, no
global state, safe in threads and servers) and carries what a reader needs to
use it without the report: the scenario, the plane, the quantity and its unit,
the assumptions (time averaging, reflection mode), a legend of the limit
contours with their keep-out radii, the objects drawn to scale, and the short
caution as a footer.

Conventions of the drawing
--------------------------
* Colour: time-averaged power density on a logarithmic scale, W/m^2 on the
  colour bar with mW/cm^2 beside it (1 mW/cm^2 = 10 W/m^2); or the exposure
  quotient in dB against one limit (0 dB = the limit).
* A solid/dashed coloured line per limit: where the quotient is one (the zone's
  edge; the zone is the side towards the source).  A dotted circle in the same
  colour: the keep-out sphere cut by the plane.
* Objects in the plane are drawn solid; objects off the plane are drawn as
  their outline seen along the plane normal, dashed and light.
"""

from __future__ import annotations

import io
import math
import re
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import matplotlib as mpl
import numpy as np
from matplotlib.colors import LogNorm, Normalize, TwoSlopeNorm
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Circle, Polygon
from matplotlib.ticker import FuncFormatter, NullFormatter
from numpy.typing import NDArray

from . import maps
from .cautions import CAUTION_LINES
from .keepout import KeepoutResult
from .scenario import Scenario

#: Line colours and styles of the limit contours, in the order of the limits.
LIMIT_COLOURS = ("#111111", "#1748c4", "#b5127f", "#0b7d5e", "#8a4b00", "#5a2d91", "#4d4d4d")
LIMIT_STYLES = ("-", "--", "-.", (0, (5, 1.5, 1, 1.5, 1, 1.5)), (0, (1, 1.2)), "-", "--")
DENSITY_CMAP = "YlOrRd"
QUOTIENT_CMAP = "RdBu_r"
#: Colour-scale span of a quotient map [dB] below and above the limit.
QUOTIENT_SPAN_DB = (-30.0, 30.0)
#: Named places farther than this from a non-horizontal plane are not drawn on it [m].
OFF_PLANE_SHOWN_M = 0.5
#: mW/cm^2 per W/m^2.
MW_CM2_PER_W_M2 = 0.1
#: A light box behind labels on the map (kept as text in SVG, unlike a stroked halo).
_LABEL_BOX = {"boxstyle": "round,pad=0.12", "fc": "white", "ec": "none", "alpha": 0.8}
_RC: dict[str, Any] = {
    "svg.fonttype": "none",
    "font.size": 9.5,
    "axes.titlesize": 10,
    "axes.labelsize": 10,
    "legend.fontsize": 8.5,
    "legend.frameon": True,
    "legend.framealpha": 0.95,
}


def short_caution() -> str:
    """The caution's first line: an estimate, not a measurement."""
    return CAUTION_LINES[0]


def limit_style(index: int) -> dict[str, Any]:
    """Colour and line style of the i-th limit contour."""
    return {
        "color": LIMIT_COLOURS[index % len(LIMIT_COLOURS)],
        "linestyle": LIMIT_STYLES[index % len(LIMIT_STYLES)],
    }


def density_range(
    results: Sequence[maps.MapResult], margin_below: float = 1e2, margin_above: float = 30.0
) -> tuple[float, float]:
    """Colour limits of a density map, narrowed to the data [W m^-2].

    From ``margin_below`` under the strictest limit to ``margin_above`` over the
    most lenient, so equal colours mean equal densities on every map of a run.
    """
    limits = [v.power_density_w_m2 for r in results for v in r.limits]
    data = np.concatenate([r.power_density_w_m2.ravel() for r in results])
    data = data[np.isfinite(data) & (data > 0)]
    top = float(data.max()) if data.size else 1.0
    lo = min(limits) / margin_below if limits else top / 1e4
    hi = max(limits) * margin_above if limits else top
    hi = min(hi, top)
    if hi <= lo * 10:
        lo = hi / 1e4
    return lo, hi


def figure_bytes(fig: Figure, fmt: str, dpi: int = 150) -> bytes:
    """Render a figure to PNG or SVG bytes."""
    buf = io.BytesIO()
    with mpl.rc_context(_RC):  # type: ignore[arg-type]
        fig.savefig(buf, format=fmt, dpi=dpi, metadata=_metadata(fmt))
    return buf.getvalue()


_SUPERSCRIPTS = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def power_of_ten(exponent: int) -> str:
    """``10`` with the exponent as Unicode superscripts, e.g. ``10⁻³``."""
    return "10" + str(int(exponent)).translate(_SUPERSCRIPTS)


def _metadata(fmt: str) -> dict[str, Any]:
    if fmt == "svg":
        return {"Date": None, "Creator": "keepclear"}
    if fmt == "png":
        return {"Software": "keepclear"}
    return {}


# ----------------------------------------------------------------- labels
def duty_text(scenario: Scenario) -> str:
    """How the duty cycle enters: the time average."""
    duties = sorted({s.duty_cycle for s in scenario.sources})
    if duties == [1.0]:
        return "continuous (duty cycle 1)"
    if len(duties) == 1:
        return f"time-averaged over duty cycle {duties[0]:g}"
    return "time-averaged over each source's duty cycle"


def reflection_text(scenario: Scenario) -> str:
    """The reflection assumption in words."""
    if not scenario.reflectors:
        return "no reflecting planes modelled"
    names = ", ".join(_reflector_name(r) for r in scenario.reflectors)
    mode = {
        "envelope": "worst-phase envelope",
        "coherent": "coherent (standing waves)",
    }.get(scenario.reflections, scenario.reflections)
    return f"reflections from {names}: {mode}"


def _reflector_name(reflector: Any) -> str:
    label = reflector.label or "plane"
    material = reflector.material
    if material and material not in label:
        return f"{label} ({material})"
    gamma = reflector.reflection_coefficient
    if gamma is not None:
        return f"{label} (Gamma = {gamma:g})"
    return label


def assumptions_text(scenario: Scenario) -> str:
    """One line of the assumptions a map rests on."""
    parts = [duty_text(scenario), reflection_text(scenario)]
    if scenario.shields:
        parts.append(f"{len(scenario.shields)} shield(s)")
    if scenario.enclosure is not None:
        parts.append("enclosure leakage modelled")
    return "; ".join(parts)


def _axis_label(plane: maps.Plane, which: int) -> str:
    name = plane.axis_names[which]
    if plane.kind == "custom":
        vec = plane.u if which == 0 else plane.v
        return f"{name} [m]  (along {vec[0]:.2f}, {vec[1]:.2f}, {vec[2]:.2f})"
    if name == "along boresight":
        return "horizontal distance along boresight from the source [m]"
    return f"{name} [m]"


def _short_id(limit_id: str) -> str:
    return limit_id


# ---------------------------------------------------------------- drawing
@dataclass(frozen=True)
class MapStyle:
    """What a map shows: the quantity and the colour limits.

    Parameters
    ----------
    quantity : str
        ``"density"`` or ``"quotient"``.
    quotient_limit : str or None
        The limit of a quotient map.
    vmin, vmax : float
        Colour limits: W/m^2 for density, dB for quotient.
    """

    quantity: str = "density"
    quotient_limit: str | None = None
    vmin: float | None = None
    vmax: float | None = None


def _norm(style: MapStyle, results: Sequence[maps.MapResult]) -> Normalize:
    if style.quantity == "quotient":
        lo = QUOTIENT_SPAN_DB[0] if style.vmin is None else style.vmin
        hi = QUOTIENT_SPAN_DB[1] if style.vmax is None else style.vmax
        return TwoSlopeNorm(vcenter=0.0, vmin=min(lo, -1.0), vmax=max(hi, 1.0))
    lo, hi = density_range(results)
    lo = lo if style.vmin is None else style.vmin
    hi = hi if style.vmax is None else style.vmax
    return LogNorm(vmin=lo, vmax=hi)


def _image_data(result: maps.MapResult, style: MapStyle) -> NDArray[np.float64]:
    if style.quantity == "quotient":
        limit = style.quotient_limit or result.limit_ids[0]
        return 10.0 * maps.log_quotient(result.quotient(limit))
    return np.maximum(result.power_density_w_m2, 1e-300)


def draw_map(
    ax: Any,
    result: maps.MapResult,
    scenario: Scenario,
    keepouts: Sequence[KeepoutResult],
    style: MapStyle,
    norm: Normalize,
    *,
    zones: dict[str, list[maps.Zone]] | None = None,
    labels: bool = True,
    source_labels: bool | None = None,
    overlay: MapOverlay | None = None,
) -> Any:
    """Draw one map into an axes: colour image, contours, objects, points.

    Parameters
    ----------
    ax : matplotlib Axes
        Placed in its figure for good (the labels are laid out in its pixels).
    result : MapResult
    scenario : Scenario
    keepouts : sequence of KeepoutResult
        For the keep-out circles and the legend (may be empty).
    style : MapStyle
    norm : Normalize
        Shared colour normalisation.
    zones : dict, optional
        Unused for drawing (contours are drawn from the quotient directly, with the
        same marching squares); accepted so callers can pass what they have.
    labels : bool
        Whether to write the places' letters and the contours' numbers.
    source_labels : bool, optional
        Whether to write the sources' names beside them (default: ``labels``).
    overlay : MapOverlay, optional
        The 95th-percentile contours of an ``[uncertainty]`` run and survey readings.

    Returns
    -------
    The image artist (for a colour bar).

    Notes
    -----
    Labels (letters, source names, contour numbers) are placed by :class:`_Labeller`:
    each takes the first position, in a fixed order, clear of the dots, the sources
    and the labels before it, inside the map.
    """
    del zones
    source_labels = labels if source_labels is None else source_labels
    grid = result.grid
    plane = grid.plane
    s0, s1, t0, t1 = grid.extent_m
    ds = (s1 - s0) / max(grid.s_m.size - 1, 1)
    dt = (t1 - t0) / max(grid.t_m.size - 1, 1)
    cmap = mpl.colormaps[QUOTIENT_CMAP if style.quantity == "quotient" else DENSITY_CMAP]
    image = ax.imshow(
        _image_data(result, style),
        origin="lower",
        extent=(s0 - ds / 2, s1 + ds / 2, t0 - dt / 2, t1 + dt / 2),
        cmap=cmap,
        norm=norm,
        interpolation="nearest",
        aspect="equal",
        rasterized=True,
    )
    # The limits first: the labels are laid out in the final pixels of the map.
    ax.set_xlim(s0 - ds / 2, s1 + ds / 2)
    ax.set_ylim(t0 - dt / 2, t1 + dt / 2)
    ax.set_aspect("equal")
    labeller = _Labeller(ax) if (labels or source_labels) else None
    by_id = {k.limit_id: k for k in keepouts}
    centre = scenario.centre_m
    centre_st = plane.to_plane(centre)[0][0]
    badges = []
    for i, limit_id in enumerate(result.limit_ids):
        st = limit_style(i)
        lines = maps.contour_lines(result, limit_id)
        for line in lines:
            ax.plot(line[:, 0], line[:, 1], lw=1.9, **st, zorder=4)
        if lines:
            badges.append((i, lines, st["color"]))
        k = by_id.get(limit_id)
        if k is not None and k.reached:
            section = maps.sphere_section(plane, centre, k.distance_m)
            if section is not None:
                ax.add_patch(
                    Circle(
                        section[0],
                        section[1],
                        fill=False,
                        lw=0.9,
                        ls=(0, (1, 2.5)),
                        color=st["color"],
                        zorder=3,
                    )
                )
    _draw_reflectors(ax, result, scenario)
    for shield in scenario.shields:
        _draw_object(ax, plane, maps.object_corners(shield), "shield", grid.step_m)
    if scenario.enclosure is not None:
        _draw_object(ax, plane, maps.object_corners(scenario.enclosure), "enclosure", grid.step_m)
        for corners in maps.opening_corners(scenario.enclosure):
            _draw_object(ax, plane, corners, "opening", grid.step_m)
    names = _draw_sources(ax, plane, scenario, (s1 - s0), grid.step_m, labeller)
    shown = _draw_points(ax, plane, scenario, (s0, s1, t0, t1), grid.step_m, labeller)
    if overlay is not None:
        _draw_overlay(ax, result, overlay)
    if labeller is not None:
        if labels:
            for p in shown:
                labeller.place(
                    p.letter,
                    (p.s, p.t),
                    _DOT_RADIUS_PT,
                    gid=f"label-place-{p.letter}",
                    fontsize=9,
                    fontweight="bold",
                    bbox=_LABEL_BOX,
                )
        if source_labels:
            for k, (text, suffix, at, radius) in enumerate(names):
                kw = {"fontsize": 8.5, "color": "#0d2a6b", "bbox": _LABEL_BOX}
                width = SOURCE_LABEL_WIDTH * (labeller.frame[2] - labeller.frame[0])
                fitted = labeller.fit_text(text, suffix, width, **kw)
                labeller.place(fitted, at, radius, gid=f"label-source-{k}", **kw)
        if labels:
            for i, lines, colour in badges:
                _tag_contour(labeller, lines, i, centre_st, colour)
    ax.set_xlim(s0 - ds / 2, s1 + ds / 2)
    ax.set_ylim(t0 - dt / 2, t1 + dt / 2)
    ax.set_xlabel(_axis_label(plane, 0))
    ax.set_ylabel(_axis_label(plane, 1))
    ax.set_aspect("equal")
    ax.grid(True, color="#000000", alpha=0.12, lw=0.5)
    return image


#: Radius of a place's dot (7 pt marker and its edge) and of a source's star [points].
_DOT_RADIUS_PT = 4.2
_STAR_RADIUS_PT = 6.5
#: Candidate points along a contour tried for its badge, at most.
_BADGE_CANDIDATES = 240


def _tag_contour(
    labeller: _Labeller,
    lines: list[NDArray[np.float64]],
    index: int,
    centre: NDArray,
    colour: str,
) -> None:
    """Write the limit's number on its contour where it covers no other label or marker.

    The points of the contour are tried in order of preference (those nearest to an
    angle of the limit's own about the source first, so badges of limits sharing a line
    part); where none is clear, positions beside the preferred point with a leader.
    """
    points = np.concatenate(lines)
    rel = points - centre
    angle = np.radians(50.0 + 32.0 * index)
    want = np.array([np.cos(angle), np.sin(angle)])
    norm = np.hypot(rel[:, 0], rel[:, 1])
    score = (rel @ want) / np.where(norm > 0, norm, 1.0)
    order = np.argsort(-np.round(score, 9), kind="stable")
    stride = max(1, len(order) // _BADGE_CANDIDATES)
    order = order[::stride]
    kw = {
        "fontsize": 8,
        "fontweight": "bold",
        "color": colour,
        "bbox": {"boxstyle": "circle,pad=0.18", "fc": "white", "ec": colour, "lw": 1.0},
    }
    w, _ = labeller.size_px(str(index + 1), True, **kw)
    on_line = [(labeller.to_px(points[j]), False) for j in order]
    first = points[order[0]]
    around = labeller.ring_centres(labeller.to_px(first), 0.0, w, w)[len(_DIRECTIONS) :]
    labeller.place(
        str(index + 1),
        first,
        0.0,
        gid=f"label-contour-{index + 1}",
        candidates=on_line + around,
        leader_colour=colour,
        square=True,
        **kw,
    )


# ------------------------------------------------------------ label placement
#: Directions tried around an anchor, in this order: right, above, left, below, then
#: the four diagonals (x to the right, y up).
_DIRECTIONS = ((1, 0), (0, 1), (-1, 0), (0, -1), (1, 1), (-1, 1), (-1, -1), (1, -1))
#: Distances of the rings of candidates, as multiples of the first ring's; from the
#: second ring on a thin leader line joins the label to its anchor.
_RINGS = (1.0, 2.2, 3.6, 5.2)
#: Gap between a label's box and what it labels, and between labels [points].
_LABEL_GAP_PT = 1.5
#: A source's name is cut (with an ellipsis) to this fraction of the map's width.
SOURCE_LABEL_WIDTH = 0.45
#: Overlaps up to this size are not counted (rounding of the boxes) [pixels].
_TOUCH_PX = 0.5

_Box = tuple[float, float, float, float]


def _renderer(fig: Figure) -> Any:
    """A renderer to measure text with (the Agg canvas: the same fonts as every output)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    return fig.canvas.get_renderer()


def _overlap(a: _Box, b: _Box) -> float:
    """Area shared by two boxes (x0, y0, x1, y1), ignoring mere touching [px^2]."""
    w = min(a[2], b[2]) - max(a[0], b[0])
    h = min(a[3], b[3]) - max(a[1], b[1])
    if w <= _TOUCH_PX or h <= _TOUCH_PX:
        return 0.0
    return w * h


class _Labeller:
    """Puts the labels of one map where they overlap nothing already there.

    Works in display coordinates once the axes' limits and aspect are final.  Dots,
    source stars and arrows are registered as obstacles first; each label then takes
    the first candidate position, in a fixed order, whose box lies inside the axes and
    overlaps no obstacle and no label placed before it.  Candidates are the eight
    directions around the anchor on rings of growing distance (a leader line from the
    second ring on), or for a contour's badge the points of its contour by preference.
    Where none is clear, the candidate with the least overlap (the first of equals)
    is taken.  The order and the arithmetic are fixed, so the layout is the same on
    every machine with the same fonts (matplotlib ships its own).
    """

    def __init__(self, ax: Any) -> None:
        self.ax = ax
        self.renderer = _renderer(ax.figure)
        ax.apply_aspect()
        frame = ax.get_window_extent(self.renderer)
        self.frame: _Box = (frame.x0, frame.y0, frame.x1, frame.y1)
        self.px_per_pt = ax.figure.dpi / 72.0
        self.obstacles: list[_Box] = []

    def to_px(self, xy: Sequence[float]) -> NDArray[np.float64]:
        return np.asarray(self.ax.transData.transform((float(xy[0]), float(xy[1]))), dtype=float)

    def to_data(self, px: Sequence[float]) -> NDArray[np.float64]:
        return np.asarray(self.ax.transData.inverted().transform((px[0], px[1])), dtype=float)

    def block(self, xy: Sequence[float], radius_pt: float) -> None:
        """Keep labels off a marker of this radius at data position ``xy``."""
        x, y = self.to_px(xy)
        r = radius_pt * self.px_per_pt
        self.obstacles.append((x - r, y - r, x + r, y + r))

    def block_segment(self, start: Sequence[float], end: Sequence[float], half_pt: float) -> None:
        """Keep labels off a line (an arrow) from ``start`` to ``end`` (data)."""
        a, b = self.to_px(start), self.to_px(end)
        r = half_pt * self.px_per_pt
        n = max(int(np.hypot(*(b - a)) / (2 * r)) + 1, 2)
        for f in np.linspace(0.0, 1.0, n):
            x, y = a + f * (b - a)
            self.obstacles.append((x - r, y - r, x + r, y + r))

    def size_px(self, text: str, square: bool = False, **kw: Any) -> tuple[float, float]:
        """Width and height of a label's box (text and padding; a circle's square) [px]."""
        kw.pop("bbox", None)
        probe = self.ax.text(0.0, 0.0, text, **kw)
        ext = probe.get_window_extent(self.renderer)
        probe.remove()
        fontsize = float(kw.get("fontsize", mpl.rcParams["font.size"]))
        pad = 2 * 0.3 * fontsize * self.px_per_pt
        if square:
            side = max(ext.width, ext.height) + pad
            return side, side
        return ext.width + pad, ext.height + pad

    def fit_text(self, text: str, suffix: str, max_px: float, **kw: Any) -> str:
        """``text + suffix`` cut with an ellipsis inside ``text`` to at most ``max_px`` wide."""
        if self.size_px(text + suffix, **kw)[0] <= max_px:
            return text + suffix
        lo, hi = 0, len(text)
        while lo < hi:  # the longest head that fits
            mid = (lo + hi + 1) // 2
            if self.size_px(text[:mid].rstrip() + "…" + suffix, **kw)[0] <= max_px:
                lo = mid
            else:
                hi = mid - 1
        return text[:lo].rstrip() + "…" + suffix

    def _score(self, box: _Box) -> float:
        f = self.frame
        outside = (
            max(f[0] - box[0], 0.0)
            + max(box[2] - f[2], 0.0)
            + max(f[1] - box[1], 0.0)
            + max(box[3] - f[3], 0.0)
        )
        return 1e6 * outside + sum(_overlap(box, o) for o in self.obstacles)

    def _choose(self, centres: list[NDArray[np.float64]], w: float, h: float) -> int:
        best, best_score = 0, math.inf
        for i, (cx, cy) in enumerate(centres):
            score = self._score((cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2))
            if score == 0.0:
                return i
            if score < best_score:
                best, best_score = i, score
        return best

    def ring_centres(
        self, anchor_px: NDArray[np.float64], radius_pt: float, w: float, h: float
    ) -> list[tuple[NDArray[np.float64], bool]]:
        """Candidate centres around an anchor, each with whether it needs a leader."""
        gap = (radius_pt + _LABEL_GAP_PT) * self.px_per_pt
        out = []
        for k, ring in enumerate(_RINGS):
            for dx, dy in _DIRECTIONS:
                off = np.array([dx * (gap + w / 2), dy * (gap + h / 2)])
                if k:
                    off = off + np.array([dx, dy]) * ring * (gap + min(w, h) / 2)
                out.append((anchor_px + off, k > 0))
        return out

    def place(
        self,
        text: str,
        anchor: Sequence[float],
        radius_pt: float,
        *,
        gid: str,
        candidates: list[tuple[NDArray[np.float64], bool]] | None = None,
        leader_colour: str = "#333333",
        square: bool = False,
        **kw: Any,
    ) -> Any:
        """Write ``text`` near data point ``anchor`` (a marker of ``radius_pt``) clear of the rest.

        ``candidates`` (centres in pixels, each with whether it needs a leader) replace
        the rings about the anchor; ``square`` sizes the box of a circled label.
        """
        w, h = self.size_px(text, square, **kw)
        anchor_px = self.to_px(anchor)
        if candidates is None:
            candidates = self.ring_centres(anchor_px, radius_pt, w, h)
        i = self._choose([c for c, _ in candidates], w, h)
        centre, leader = candidates[i]
        self.obstacles.append(
            (centre[0] - w / 2, centre[1] - h / 2, centre[0] + w / 2, centre[1] + h / 2)
        )
        at = self.to_data(centre)
        kw = {"ha": "center", "va": "center", "zorder": 9, **kw}
        if leader:
            artist = self.ax.annotate(
                text,
                xy=(float(anchor[0]), float(anchor[1])),
                xytext=(float(at[0]), float(at[1])),
                arrowprops={
                    "arrowstyle": "-",
                    "color": leader_colour,
                    "lw": 0.8,
                    "shrinkA": 0.0,
                    "shrinkB": radius_pt,
                },
                **kw,
            )
        else:
            artist = self.ax.text(float(at[0]), float(at[1]), text, **kw)
        artist.set_gid(gid)
        return artist


def _draw_reflectors(ax: Any, result: maps.MapResult, scenario: Scenario) -> None:
    grid = result.grid
    plane = grid.plane
    s0, s1, t0, t1 = grid.extent_m
    ss, tt = np.meshgrid(grid.s_m, grid.t_m)
    for reflector in scenario.reflectors:
        corners = maps.object_corners(reflector)
        if corners is not None:  # a finite plate: only the plate itself is hatched
            _draw_plate(ax, plane, corners, grid.step_m)
            continue
        trace = maps.plane_trace(plane, reflector.point_m, reflector.normal)
        if trace is None:
            continue
        a, b, c = trace
        behind = (a * ss + b * tt - c) < 0
        if behind.any():
            ax.contourf(
                ss,
                tt,
                behind.astype(float),
                levels=[0.5, 1.5],
                colors=["#808080"],
                alpha=0.35,
                zorder=2,
            )
            ax.contourf(
                ss,
                tt,
                behind.astype(float),
                levels=[0.5, 1.5],
                colors="none",
                hatches=["////"],
                zorder=2,
            )
        # The trace line across the map.
        if abs(b) > abs(a):
            xs = np.array([s0, s1])
            ys = (c - a * xs) / b
        else:
            ys = np.array([t0, t1])
            xs = (c - b * ys) / a
        ax.plot(xs, ys, color="#333333", lw=2.4, solid_capstyle="butt", zorder=5)


#: Colour of a finite reflecting plate on maps.
PLATE_COLOUR = "#333333"


def _draw_plate(
    ax: Any, plane: maps.Plane, corners: NDArray[np.float64] | None, step: float
) -> None:
    """A finite reflector: only the plate itself is hatched (space around it stays open).

    Where the map plane cuts the plate, a thick hatched bar along the cut; where the map
    lies in the plate's plane, the plate's rectangle hatched; otherwise its dashed outline
    projected (off the map plane).
    """
    if corners is None:
        return
    section = maps.convex_section(plane, corners)
    if section is not None and section.shape[0] == 2:
        ax.plot(
            section[:, 0],
            section[:, 1],
            color=PLATE_COLOUR,
            lw=4.0,
            zorder=6,
            solid_capstyle="butt",
        )
        ax.plot(section[:, 0], section[:, 1], color="white", lw=1.2, ls=(0, (2, 2)), zorder=6)
        return
    if section is not None:
        ax.add_patch(
            Polygon(
                section, closed=True, fc="#808080", alpha=0.35, ec=PLATE_COLOUR, lw=2.0, zorder=2
            )
        )
        ax.add_patch(
            Polygon(
                section, closed=True, fill=False, hatch="////", ec=PLATE_COLOUR, lw=0.0, zorder=2
            )
        )
        return
    hull = maps.projected_hull(plane, corners)
    if hull is not None and hull.shape[0] > 2:
        ax.add_patch(
            Polygon(
                hull, closed=True, fill=False, ec=PLATE_COLOUR, lw=1.3, ls="--", alpha=0.7, zorder=6
            )
        )
    elif hull is not None:
        ax.plot(hull[:, 0], hull[:, 1], color=PLATE_COLOUR, lw=1.6, ls="--", alpha=0.7, zorder=6)


def _draw_object(
    ax: Any, plane: maps.Plane, corners: NDArray[np.float64] | None, role: str, step: float
) -> None:
    if corners is None:
        return
    colour = {
        "shield": "#3b3b8f",
        "enclosure": "#2d2d2d",
        "opening": "#e0006c",
        "source": "#0d2a6b",
    }[role]
    section = maps.convex_section(plane, corners)
    if section is not None:
        if section.shape[0] == 2:
            ax.plot(
                section[:, 0], section[:, 1], color=colour, lw=3.2, zorder=6, solid_capstyle="butt"
            )
        else:
            ax.add_patch(Polygon(section, closed=True, fill=False, ec=colour, lw=2.2, zorder=6))
        return
    hull = maps.projected_hull(plane, corners)
    if hull is None:
        return
    if hull.shape[0] == 2:
        ax.plot(hull[:, 0], hull[:, 1], color=colour, lw=1.6, ls="--", alpha=0.7, zorder=6)
    else:
        ax.add_patch(
            Polygon(hull, closed=True, fill=False, ec=colour, lw=1.3, ls="--", alpha=0.7, zorder=6)
        )


def _draw_sources(
    ax: Any,
    plane: maps.Plane,
    scenario: Scenario,
    width: float,
    step: float,
    labeller: _Labeller | None,
) -> list[tuple[str, str, NDArray[np.float64], float]]:
    """Sources: outline, star and boresight arrow; returns their labels to place.

    Each label is (name, where-suffix, position, star radius [pt]) for a source inside
    the map.
    """
    xlo, xhi = sorted(ax.get_xlim())
    ylo, yhi = sorted(ax.get_ylim())
    out = []
    for source in scenario.sources:
        st, offset = plane.to_plane(source.position_m)
        near = abs(float(offset[0])) <= max(step, 1e-6)
        _draw_object(ax, plane, maps.object_corners(source.radiator), "source", step)
        ax.plot(
            st[0, 0],
            st[0, 1],
            marker="*",
            ms=13 if near else 10,
            mfc="#0d2a6b",
            mec="white",
            mew=1.0,
            ls="none",
            zorder=8,
        )
        end = None
        if source.radiator.boresight is not None:
            end = _draw_boresight(ax, plane, source, st[0], width)
        if not (xlo <= st[0, 0] <= xhi and ylo <= st[0, 1] <= yhi):
            continue
        radius = _STAR_RADIUS_PT if near else _STAR_RADIUS_PT * 10 / 13
        if labeller is not None:
            labeller.block(st[0], radius)
            if end is not None:
                labeller.block_segment(st[0], end, 4.0)
        suffix = "" if near else f" ({_off_plane(plane, source.position_m, float(offset[0]))})"
        out.append((source.id, suffix, st[0], radius))
    return out


def _draw_boresight(
    ax: Any, plane: maps.Plane, source: Any, start: NDArray, width: float
) -> NDArray | None:
    """The boresight arrow (or the out-of/into-page symbol); returns the arrow's tip."""
    axis = source.radiator.boresight
    along = np.array([axis @ plane.u, axis @ plane.v])
    length = 0.12 * width
    if np.hypot(*along) < 0.2:
        # Nearly along the plane normal: the usual "out of" / "into" the page symbols.
        out_of_page = float(axis @ plane.normal) > 0
        ax.plot(*start, marker="o", ms=12, mfc="none", mec="#0d2a6b", mew=1.3, zorder=8)
        ax.plot(*start, marker="." if out_of_page else "x", ms=6, color="#0d2a6b", zorder=8)
        return None
    end = start + along * length
    ax.annotate(
        "",
        xy=end,
        xytext=start,
        arrowprops={"arrowstyle": "-|>", "color": "#0d2a6b", "lw": 1.6},
        zorder=8,
    )
    return end


@dataclass(frozen=True)
class _ShownPoint:
    letter: str
    name: str
    s: float
    t: float
    on_plane: bool
    where: str


def _shown_points(
    plane: maps.Plane,
    scenario: Scenario,
    extent: tuple[float, float, float, float],
    step: float,
) -> list[_ShownPoint]:
    """The named places a map shows, lettered A, B, ... by their order in the scenario."""
    if not scenario.points:
        return []
    s0, s1, t0, t1 = extent
    st, offset = plane.to_plane(np.array([p.position_m for p in scenario.points]))
    out = []
    for i, (p, (s, t), d) in enumerate(zip(scenario.points, st, offset, strict=True)):
        if not (s0 <= s <= s1 and t0 <= t <= t1):
            continue
        # On a horizontal plane every place is shown at its foot point (where to stand);
        # on other planes only places near the plane, so none appears where it is not.
        if plane.kind != "xy" and abs(d) > max(OFF_PLANE_SHOWN_M, 3 * step):
            continue
        on = bool(abs(d) <= step)
        where = "" if on else _off_plane(plane, p.position_m, float(d))
        out.append(_ShownPoint(maps.point_letter(i), p.name, float(s), float(t), on, where))
    return out


def _draw_points(
    ax: Any,
    plane: maps.Plane,
    scenario: Scenario,
    extent: tuple[float, float, float, float],
    step: float,
    labeller: _Labeller | None,
) -> list[_ShownPoint]:
    """Named places: a dot each (the legend gives each letter's name); returns them."""
    shown = _shown_points(plane, scenario, extent, step)
    for p in shown:
        ax.plot(
            p.s,
            p.t,
            marker="o",
            ms=7,
            mfc="white" if p.on_plane else "#dddddd",
            mec="black",
            mew=1.2,
            ls="none",
            zorder=8,
        )
        if labeller is not None:
            labeller.block((p.s, p.t), _DOT_RADIUS_PT)
    return shown


def _off_plane(plane: maps.Plane, position_m: NDArray, offset_m: float) -> str:
    if plane.kind == "xy":
        return f"at z = {position_m[2]:.2f} m"
    return f"{offset_m:+.2f} m off plane"


def _legend_handles(
    result: maps.MapResult,
    keepouts: Sequence[KeepoutResult],
    scenario: Scenario,
    shown: Sequence[_ShownPoint] | None = None,
) -> list[Any]:
    """The legend: limits, keep-out spheres, the sources by name, places, objects.

    ``shown`` are the places to list (default: those on ``result``'s map).
    """
    by_id = {k.limit_id: k for k in keepouts}
    handles: list[Any] = []
    for i, v in enumerate(result.limits):
        k = by_id.get(v.id)
        if k is None:
            tail = ""
        elif not k.reached:
            tail = ": not reached anywhere"
        else:
            tail = f": keep-out {k.distance_m:.2f} m"
            if k.distance_with_uncertainty_m > k.distance_m + 1e-9:
                tail += f" ({k.distance_with_uncertainty_m:.2f} m with model uncertainty)"
        label = f"[{i + 1}] {v.id}, {v.power_density_w_m2:.3g} W/m²{tail}"
        handles.append(Line2D([], [], lw=1.9, label=label, **limit_style(i)))
    if keepouts:
        handles.append(
            Line2D(
                [],
                [],
                color="#444444",
                lw=0.9,
                ls=(0, (1, 2.5)),
                label="keep-out sphere about the first source, cut by this plane",
            )
        )
    apertures = any(s.radiator.boresight is not None for s in scenario.sources)
    handles.append(
        Line2D(
            [],
            [],
            marker="*",
            ms=10,
            mfc="#0d2a6b",
            mec="white",
            ls="none",
            label=source_legend_text(scenario, apertures),
        )
    )
    if shown is None:
        shown = _shown_points(result.grid.plane, scenario, result.grid.extent_m, result.grid.step_m)
    for p in shown:
        label = f"{p.letter}  {p.name}" + (f" ({p.where})" if p.where else "")
        handles.append(
            Line2D(
                [],
                [],
                marker="o",
                ms=7,
                mfc="white" if p.on_plane else "#dddddd",
                mec="black",
                ls="none",
                label=textwrap.shorten(label, 95),
            )
        )
    plane = result.grid.plane
    infinite = [r for r in scenario.reflectors if maps.object_corners(r) is None]
    if any(maps.plane_trace(plane, r.point_m, r.normal) for r in infinite):
        handles.append(
            Line2D([], [], color="#333333", lw=2.4, label="reflecting plane (hatched: behind it)")
        )
    if len(infinite) < len(scenario.reflectors):
        handles.append(
            Line2D([], [], color=PLATE_COLOUR, lw=4.0, label="reflecting plate (finite)")
        )
    if scenario.shields:
        handles.append(Line2D([], [], color="#3b3b8f", lw=3.2, label="shield"))
    if scenario.enclosure is not None:
        handles.append(
            Line2D([], [], color="#2d2d2d", lw=2.2, label="enclosure (openings in magenta)")
        )
    return handles


#: Characters of a legend line before it wraps.
LEGEND_LINE_CHARS = 100


def source_legend_text(scenario: Scenario, apertures: bool) -> str:
    """The legend's line for the sources: their full names (a map may shorten them)."""
    ids = [s.id for s in scenario.sources]
    head = "source" if len(ids) == 1 else "sources"
    text = f"{head} {', '.join(ids)}" if ids else head
    if apertures:
        text += " (arrow: boresight; outline to scale)"
    return "\n".join(
        textwrap.wrap(text, LEGEND_LINE_CHARS, break_on_hyphens=False, break_long_words=True)
    )


def _legend_lines(handles: Sequence[Any]) -> int:
    """Lines the legend's labels take (a label may wrap)."""
    return sum(h.get_label().count("\n") + 1 for h in handles)


def _colour_bar(fig: Figure, image: Any, cax: Any, style: MapStyle, limit_id: str | None) -> None:
    if style.quantity == "quotient":
        bar = fig.colorbar(image, cax=cax, extend="both")
        tall_in = cax.get_position().height * fig.get_figheight()
        bar.set_label(
            f"exposure quotient against {limit_id} [dB]  (0 dB = the limit)"
            if tall_in > 4.2
            else "quotient [dB], 0 dB = limit"
        )
        ticks = [
            t
            for t in (-30, -20, -10, -6, -3, 0, 3, 6, 10, 20)
            if image.norm.vmin <= t <= image.norm.vmax
        ]
        bar.set_ticks(ticks)
        return
    bar = fig.colorbar(image, cax=cax, extend="both")
    tall_in = cax.get_position().height * fig.get_figheight()
    bar.set_label(
        "time-averaged power density [W/m²]  (right scale)" if tall_in > 4.2 else "power density"
    )
    # Decade labels as plain text (mathtext costs more to lay out than the map to draw).
    bar.ax.yaxis.set_major_formatter(
        FuncFormatter(lambda x, _pos: power_of_ten(round(math.log10(x))) if x > 0 else "")
    )
    bar.ax.yaxis.set_minor_formatter(NullFormatter())
    # The same decades in mW/cm² on the left (1 mW/cm² = 10 W/m²), written directly: a
    # secondary log axis would cost more to draw than the whole map.
    lo, hi = image.norm.vmin, image.norm.vmax
    decades = range(math.ceil(math.log10(lo) - 1e-9), math.floor(math.log10(hi) + 1e-9) + 1)
    transform = cax.get_yaxis_transform()
    for k in decades:
        exponent = k + round(math.log10(MW_CM2_PER_W_M2))
        cax.text(
            -0.35,
            10.0**k,
            power_of_ten(exponent),
            transform=transform,
            ha="right",
            va="center",
            fontsize=9.5,
        )
        cax.plot(
            [-0.25, 0.0], [10.0**k] * 2, transform=transform, color="black", lw=0.8, clip_on=False
        )
    cax.text(-0.5, 1.035, "mW/cm²", transform=cax.transAxes, ha="right", va="bottom", fontsize=8.5)
    cax.text(1.5, 1.035, "W/m²", transform=cax.transAxes, ha="left", va="bottom", fontsize=8.5)


def quantity_title(style: MapStyle, result: maps.MapResult) -> str:
    """What the colour shows, in words."""
    if style.quantity == "quotient":
        limit = style.quotient_limit or result.limit_ids[0]
        return f"Exposure quotient against {limit}"
    return "Time-averaged power density"


@dataclass(frozen=True)
class MapOverlay:
    """What an assessment adds to a map beyond the nominal fields.

    Parameters
    ----------
    p95 : dict
        Limit id -> the 95th percentile over the Monte Carlo samples of the quotient on
        the map's grid (ny, nx); its contour at one is drawn thin and dashed.
    readings : list of dict
        Survey readings near the plane: ``s``, ``t`` (plane coordinates [m]), ``tag``
        (a short label) and ``under`` (more than 3 dB above the model).
    """

    p95: dict[str, NDArray[np.float64]] = field(default_factory=dict)
    readings: list[dict[str, Any]] = field(default_factory=list)


def _draw_overlay(ax: Any, result: maps.MapResult, overlay: MapOverlay) -> None:
    grid = result.grid
    for i, limit_id in enumerate(result.limit_ids):
        q = overlay.p95.get(limit_id)
        if q is None or not np.any(q >= 1.0) or q.shape != grid.shape or min(q.shape) < 2:
            continue
        st = limit_style(i)
        ax.contour(
            grid.s_m,
            grid.t_m,
            q,
            levels=[1.0],
            colors=[st["color"]],
            linewidths=1.0,
            linestyles=[(0, (4, 2))],
            zorder=4,
        )
    for r in overlay.readings:
        ax.plot(
            r["s"],
            r["t"],
            marker="D",
            ms=6,
            ls="none",
            zorder=9,
            mfc="#d62728" if r["under"] else "#ffffff",
            mec="black",
            mew=1.0,
        )
        ax.annotate(
            r["tag"],
            (r["s"], r["t"]),
            xytext=(5, -11),
            textcoords="offset points",
            fontsize=8,
            bbox=_LABEL_BOX,
            zorder=9,
        )


def _overlay_handles(overlay: MapOverlay | None) -> list[Any]:
    if overlay is None:
        return []
    out: list[Any] = []
    if overlay.p95:
        out.append(
            Line2D(
                [],
                [],
                color="#444444",
                lw=1.0,
                ls=(0, (4, 2)),
                label="dashed: 95th-percentile contour of the same limit ([uncertainty] samples)",
            )
        )
    if overlay.readings:
        out.append(
            Line2D(
                [],
                [],
                marker="D",
                ls="none",
                mfc="#ffffff",
                mec="black",
                label="survey reading (filled red: more than 3 dB above the model)",
            )
        )
    return out


def map_figure(
    result: maps.MapResult,
    scenario: Scenario,
    keepouts: Sequence[KeepoutResult],
    style: MapStyle | None = None,
    zones: dict[str, list[maps.Zone]] | None = None,
    overlay: MapOverlay | None = None,
) -> Figure:
    """The complete figure of one map: title, map, colour bar, legend, caution.

    Parameters
    ----------
    result : MapResult
    scenario : Scenario
    keepouts : sequence of KeepoutResult
    style : MapStyle, optional
    zones : dict, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    style = style or MapStyle()
    handles = _legend_handles(result, keepouts, scenario) + _overlay_handles(overlay)
    heading = _title_lines(scenario, result, style)
    # Layout in inches: title block, square map with colour bar, legend, caution.
    width, left, side = 8.4, 0.85, 5.6
    s0, s1, t0, t1 = result.grid.extent_m
    # A map wider than tall (a vertical plane over a floor) keeps its width.
    tall = side * min(1.0, max((t1 - t0) / max(s1 - s0, 1e-9), 0.3))
    top = 0.3 + 0.25 * (len(heading[0]) - 1) + 0.27 * len(heading[1]) + 0.19 * len(heading[2])
    top += 0.2
    legend_h = 0.2 * _legend_lines(handles) + 0.2
    height = top + tall + 0.6 + legend_h + 0.55
    with mpl.rc_context(_RC):  # type: ignore[arg-type]
        fig = Figure(figsize=(width, height))
        bottom = (height - top - tall) / height
        ax = fig.add_axes((left / width, bottom, side / width, tall / height))
        cax = fig.add_axes(((left + side + 0.95) / width, bottom, 0.22 / width, tall / height))
        norm = _norm(style, [result])
        image = draw_map(ax, result, scenario, keepouts, style, norm, zones=zones, overlay=overlay)
        _colour_bar(fig, image, cax, style, style.quotient_limit or result.limit_ids[0])
        _title(fig, heading, height)
        fig.legend(
            handles=handles,
            loc="upper left",
            bbox_to_anchor=(0.5 / width, (0.55 + legend_h) / height),
            ncols=1,
            borderaxespad=0.0,
            handlelength=3.2,
        )
        _footer(fig, width)
    return fig


def _title_lines(
    scenario: Scenario, result: maps.MapResult, style: MapStyle
) -> tuple[list[str], list[str], list[str]]:
    """Title, the what-and-where lines and the assumption lines of a map."""
    grid = result.grid
    what = f"{quantity_title(style, result)} on the {grid.plane.description}"
    assumptions = (
        f"{assumptions_text(scenario)}; grid step {grid.step_m * 100:.1f}\u00a0cm; "
        f"{scenario.frequency_hz / 1e9:g}\u00a0GHz"
    )
    return (
        wrap_title(scenario.name, TITLE_WIDTH),
        wrap_words(what, 92),
        wrap_words(assumptions, 115),
    )


#: Characters of a bold title line on a single map's figure.
TITLE_WIDTH = 72
#: A title is cut (with an ellipsis) after this many lines.
TITLE_MAX_LINES = 3


#: Units kept on the line of their number when a text wraps.
_UNITS = r"(?:mW/cm²|W/m²|m²|cm|mm|m|GHz|MHz|Hz|dBi|dB|W|s|%)"
_NUMBER_UNIT = re.compile(r"(\d)[ \t]+(" + _UNITS + r")(?![\w/²])")


def glue_units(text: str) -> str:
    """``text`` with a no-break space between each number and its unit (``5.47\u00a0m²``)."""
    return _NUMBER_UNIT.sub("\\1\u00a0\\2", text)


def wrap_words(text: str, width: int, balanced: bool = False) -> list[str]:
    """``text`` wrapped at spaces to lines of about ``width`` characters.

    Words are not split at hyphens, and a unit stays on the line of its number.
    ``balanced`` evens the lines out (the narrowest width giving as few lines), so no
    word is left alone on the last one.
    """
    glued = glue_units(text)

    def wrap(w: int) -> list[str]:
        return textwrap.wrap(glued, w, break_on_hyphens=False, break_long_words=True) or [""]

    lines = wrap(width)
    if balanced and len(lines) > 1:
        for w in range(width - 1, width // 2, -1):
            narrower = wrap(w)
            if len(narrower) > len(lines):
                break
            lines = narrower
    return lines


def wrap_title(text: str, width: int) -> list[str]:
    """A title wrapped to lines of ``width`` characters, at most three lines.

    The whole name shows unless it needs more than three lines; then the third line
    ends with an ellipsis.  Control characters are shown as spaces (fonts have no
    glyph for them).
    """
    printable = "".join(ch if ch.isprintable() else " " for ch in text)
    lines = wrap_words(printable, width)
    if len(lines) > TITLE_MAX_LINES:
        lines = lines[: TITLE_MAX_LINES - 1] + [
            textwrap.shorten(" ".join(lines[TITLE_MAX_LINES - 1 :]), width, placeholder=" …")
        ]
    return lines


def _title(fig: Figure, heading: tuple[list[str], list[str], list[str]], height: float) -> None:
    title, what, assumptions = heading
    x = 0.5 / fig.get_figwidth()
    fig.text(
        x,
        1 - 0.22 / height,
        "\n".join(title),
        fontsize=12.5,
        fontweight="bold",
        va="top",
        linespacing=1.15,
    )
    y = 0.52 + 0.25 * (len(title) - 1)
    fig.text(x, 1 - y / height, "\n".join(what), fontsize=10.5, va="top", linespacing=1.3)
    y += 0.27 * len(what) - 0.03
    fig.text(x, 1 - y / height, "\n".join(assumptions), fontsize=8.5, va="top", color="#333333")


def _footer(fig: Figure, width: float) -> None:
    fig.text(
        0.5 / width,
        0.012,
        textwrap.fill("CAUTION: " + short_caution(), 120),
        fontsize=8,
        style="italic",
        va="bottom",
        color="#222222",
    )


# ------------------------------------------------------------ comparison
def comparison_figure(
    panels: Sequence[tuple[str, maps.MapResult, Scenario, Sequence[KeepoutResult]]],
    title: str,
    style: MapStyle | None = None,
    note: str = "",
) -> Figure:
    """Maps of several options side by side on one colour scale.

    Every panel letters its places as the legend does (A, B, ... by their order in
    the scenario) and numbers its limit contours; the legend lists every place that
    some panel shows, and the sources by their full names.

    Parameters
    ----------
    panels : sequence of (caption, MapResult, Scenario, keepouts)
        One panel per option, in rank order.
    title : str
        Figure title.
    style : MapStyle, optional
    note : str, optional
        A clause added to the subtitle (for example about the panels' extents).
    """
    style = style or MapStyle()
    n = len(panels)
    cols = n if n <= 3 else (2 if n == 4 else 3)
    rows = math.ceil(n / cols)
    # Layout in inches.
    side, gap, left, top, row_foot = 3.6, 0.75, 0.8, 0.95, 0.55
    bar_gap, bar, right = 0.95, 0.22, 0.95
    width = left + cols * side + (cols - 1) * gap + bar_gap + bar + right
    title_lines = wrap_title(title, int(TITLE_WIDTH * width / 8.4))
    first = panels[0][1]
    subtitle = wrap_words(
        f"{quantity_title(style, first)} on the {first.grid.plane.description}; "
        "one colour scale for all panels; ranked best first" + (f"; {note}" if note else ""),
        int(COMPARE_SUBTITLE_CHARS * (width - left - 0.3) / 12.0),
        balanced=True,
    )
    captions = [wrap_words(p[0], PANEL_CAPTION_CHARS) for p in panels]
    row_head = 0.2 + 0.16 * max(len(c) for c in captions)
    top += 0.24 * (len(title_lines) - 1) + 0.19 * (len(subtitle) - 1)
    row_h = row_head + side + row_foot
    shown = _compare_places(panels)
    handles = _legend_handles(first, [], panels[0][2], shown=shown)
    legend_h = (
        0.19
        * max(
            _legend_lines(handles[: math.ceil(len(handles) / 2)]),
            _legend_lines(handles[math.ceil(len(handles) / 2) :]),
        )
        + 0.15
    )
    height = top + rows * row_h + legend_h + 0.35
    with mpl.rc_context(_RC):  # type: ignore[arg-type]
        fig = Figure(figsize=(width, height))
        norm = _norm(style, [p[1] for p in panels])
        image = None
        for k, (_caption, result, scenario, keepouts) in enumerate(panels):
            r, c = divmod(k, cols)
            x = left + c * (side + gap)
            y = height - top - r * row_h - row_head - side
            ax = fig.add_axes((x / width, y / height, side / width, side / height))
            image = draw_map(
                ax, result, scenario, keepouts, style, norm, labels=True, source_labels=False
            )
            ax.set_title("\n".join(captions[k]), fontsize=9, loc="left")
            if c != 0:
                ax.set_ylabel("")
        bar_x = left + cols * side + (cols - 1) * gap + bar_gap
        bar_y = height - top - rows * row_h + row_foot
        cax = fig.add_axes(
            (
                bar_x / width,
                bar_y / height,
                bar / width,
                (rows * row_h - row_foot - row_head) / height,
            )
        )
        _colour_bar(fig, image, cax, style, style.quotient_limit or panels[0][1].limit_ids[0])
        fig.text(
            left / width,
            1 - 0.2 / height,
            "\n".join(title_lines),
            fontsize=12,
            fontweight="bold",
            va="top",
            linespacing=1.15,
        )
        fig.text(
            left / width,
            1 - (0.5 + 0.24 * (len(title_lines) - 1)) / height,
            "\n".join(subtitle),
            fontsize=9.5,
            va="top",
        )
        fig.legend(
            handles=handles,
            loc="upper left",
            bbox_to_anchor=(left / width, (legend_h + 0.3) / height),
            ncols=2,
            borderaxespad=0.0,
            handlelength=3.2,
        )
        fig.text(
            left / width,
            0.08 / height,
            "CAUTION: " + short_caution(),
            fontsize=8,
            style="italic",
            va="bottom",
        )
    return fig


#: Characters of a panel's caption line (a 3.6 in panel at 9 pt).
PANEL_CAPTION_CHARS = 50
#: Characters of the comparison's subtitle per 12 in of width (9.5 pt).
COMPARE_SUBTITLE_CHARS = 150


def _compare_places(
    panels: Sequence[tuple[str, maps.MapResult, Scenario, Sequence[KeepoutResult]]],
) -> list[_ShownPoint]:
    """The places some panel shows, by letter (one entry each, in the scenario's order)."""
    seen: dict[str, tuple[int, _ShownPoint]] = {}
    for _caption, result, scenario, _keepouts in panels:
        grid = result.grid
        for p in _shown_points(grid.plane, scenario, grid.extent_m, grid.step_m):
            index = next(i for i, q in enumerate(scenario.points) if q.name == p.name)
            seen.setdefault(p.letter, (index, p))
    return [p for _i, p in sorted(seen.values(), key=lambda item: item[0])]
