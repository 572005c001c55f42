"""Method of moments for wire structures: NEC-2 solves the currents, numpy radiates them.

This module is the reusable engine behind models that need the currents on metal
surfaces of a source (a monopole on a finite plate or on a box; the outer walls of a
guide or a horn): describe the metal as a **wire structure** (straight segments, one
of them fed), let NEC-2 solve the segment currents once, then radiate those currents
with a vectorised kernel that gives the exact fields of the current everywhere, near
and far, for any number of points.

Workflow
--------
>>> structure = WireStructure.from_segments(starts, ends, radii, feed_segment=k)
>>> solution = solve_structure(structure, frequency_hz)      # NEC-2, cached
>>> elements = solution.elements(power_w)                    # RMS, scaled to power_w
>>> e, h = elements.fields(points_m)                         # (N, 3) complex, chunked
>>> f = elements.far_field(directions)                       # F [V], E -> F e^{-jkr}/r

Grids for surfaces come from :func:`graded_lines` and :func:`face_grid` (one
rectangle) and :func:`box_grid` (the six faces of a closed box); a caller adds its
own wires (a probe) and names the fed segment.

Surfaces as wire grids
----------------------
A perfectly conducting surface is replaced by a grid of wires, following the rules
published for NEC-2:

* segment length at most 0.1 wavelength, and adjacent segment lengths not too
  different (Burke & Poggio [1]_, part III, "Wire modeling guidelines": segment
  length below about 0.1 lambda; wire grids for surfaces);
* the **equal-area rule**: each wire's radius is the grid spacing divided by 2 pi,
  so that the surface area of the wires parallel to one direction equals the area of
  the surface they replace (Ludwig [2]_; the same choice makes the inductance of an
  infinite grid vanish);
* the radius is capped at a quarter of the segment's own length, because the thin
  wire kernel needs segments several radii long (Burke & Poggio [1]_, segment length
  to radius above about 2 even with the extended kernel, above 8 for 1 % with the
  standard one).  This only touches the short segments of graded grids.

Near a feed the grid is graded (spacing from lambda/40 up to the maximum by a
factor 1.5 per line), because the current leaving a probe base spreads into the
grid there and a coarse grid there makes the input resistance too high (found when
written: a quarter-wave probe on a one-wavelength square plate, R_in 51 ohm with a
uniform lambda/10 grid, 45 ohm graded to lambda/40, 44 ohm graded to lambda/80).

Power balance
-------------
A wire grid is not a surface: NEC-2's input power 0.5 Re(V I*) of such a model
exceeds the power its currents radiate (the "average gain" test of Burke & Poggio
[1]_, which should be 1 for a lossless structure in free space, gives 0.79 to 0.89
for the grids of the plate monopole).  The elements are therefore scaled so that the
power **radiated by the solved currents**, integrated over the sphere from their far
field, equals ``power_w``: the contract's meaning of ``power_w`` (power put into free
space), and 0.5 to 1 dB higher fields than a normalisation by the input power.

The radiating kernel
--------------------
Each segment of length :math:`\\Delta` from :math:`s_1` to :math:`s_2` carries a
piecewise-sinusoidal current through its end values :math:`I_1, I_2`

.. math:: I(s) = \\frac{I_1 \\sin k(s_2 - s) + I_2 \\sin k(s - s_1)}{\\sin k\\Delta},

which satisfies :math:`I'' + k^2 I = 0` on the segment.  For such a current the
integrals of the potentials close (integration by parts twice; the same closure gives
the classic near fields of the sinusoidal dipole, Balanis [3]_ sec. 8.5, and the
piecewise-sinusoidal reaction method of Richmond [4]_).  With :math:`z` along the
segment, :math:`u = z' - z` from the field point to an end, :math:`\\rho` the distance
from the segment's line, :math:`R = \\sqrt{\\rho^2 + u^2}` and the sum over the two
ends with sign :math:`\\sigma = -1` at :math:`s_1` and :math:`+1` at :math:`s_2`:

.. math::

    H_\\phi &= \\frac{1}{4\\pi\\rho}\\sum \\sigma\\, e^{-jkR}
               \\Big(\\frac{u I}{R} - \\frac{j I'}{k}\\Big) \\\\
    E_z &= \\frac{-j\\eta_0}{4\\pi k}\\sum \\sigma\\, e^{-jkR}
               \\Big(-\\frac{(1 + jkR)\\, u I}{R^3} - \\frac{I'}{R}\\Big) \\\\
    E_\\rho &= \\frac{j\\eta_0}{4\\pi k\\rho}\\sum \\sigma\\, e^{-jkR}
               \\Big(\\frac{jk u^2 I}{R^2} + \\frac{u I'}{R} - \\frac{\\rho^2 I}{R^3}\\Big)

exactly, every term (reactive and radiating), including the charge the current
leaves at the segment's ends.  With the sinusoidal dipole's ends and kink these
reduce to the filament fields of :mod:`keepclear.antennas.wire`.

NEC-2 reports one current per segment, at its centre.  The end values are taken at
the nodes: at each node, the currents of the segments meeting there, oriented away
from the node, are corrected by their mean so that they sum to zero (Kirchhoff's
current law; NEC-2 enforces the same at its junctions).  A free end gets zero, two
segments in a row the average of their two centre currents.  The radiated current is
thus continuous along every wire and conserves charge at every junction; its fields
are exact for it.  Against NEC-2's own near field (which uses its three-term current
on each segment) they agree within a few tenths of a dB from a few centimetres off
the metal (tests/test_finite_ground.py).

Field points closer to a segment's line than its radius are evaluated at the radius
(as in :mod:`keepclear.antennas.wire`), so points on the metal give large but finite
values; they are not places where anyone stands.

Validity
--------
Perfect conductors, free space, one frequency.  The grid model is good for the
fields and the pattern; the reactance and the currents within a grid cell of the
metal are not meaningful.  The structure's size is limited by NEC-2's dense matrix
(:data:`MAX_SEGMENTS`).

References
----------
.. [1] G. J. Burke and A. J. Poggio, *Numerical Electromagnetics Code (NEC) --
   Method of Moments*, Lawrence Livermore National Laboratory, UCID-18834, January
   1981: part I (theory: thin-wire kernel, current expansion, junctions), part III
   (user's guide: wire modelling guidelines, segment length and radius, wire grids,
   the average gain test; from memory of the 1981 edition).
.. [2] A. C. Ludwig, "Wire grid modeling of surfaces", *IEEE Trans. Antennas
   Propag.* 35(9), 1045-1048 (1987), doi:10.1109/TAP.1987.1144220.
.. [3] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley, 2016,
   sec. 8.5 (near fields of the sinusoidal current).
.. [4] J. H. Richmond and N. H. Geary, "Mutual impedance of nonplanar-skew
   sinusoidal dipoles", *IEEE Trans. Antennas Propag.* 23(3), 412-414 (1975),
   doi:10.1109/TAP.1975.1141067 (the piecewise-sinusoidal segment; from memory).
"""

from __future__ import annotations

import contextlib
import copy
import functools
import hashlib
import math
import os
import tempfile
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .base import C_M_S, ETA0_OHM, ModelInputError, row_norms

#: Largest number of segments accepted (NEC-2's dense matrix: 16 N^2 bytes, N^3/3 steps).
MAX_SEGMENTS = 4000
#: The same for a structure solved from its quarter (four blocks of N/4: 1/16 the steps).
#: An engine bound; models choose their own, lower, size for the grid (GridHorn: 10,500).
#: Memory: four blocks of (N/4)^2 complex numbers, about 0.6 GB at this bound.
MAX_SYMMETRIC_SEGMENTS = 12000
#: Longest grid segment, in wavelengths (Burke & Poggio, part III).
MAX_SEGMENT_WAVELENGTHS = 0.1
#: Finest grid spacing at a feed, in wavelengths.
FEED_SPACING_WAVELENGTHS = 1.0 / 40.0
#: Growth of the grid spacing away from a feed, per line.
GRADING_FACTOR = 1.5
#: Largest wire radius as a fraction of its segment's length.
MAX_RADIUS_PER_LENGTH = 0.25
#: Scratch memory one (point, segment) pair needs in the kernel [bytes].
BYTES_PER_PAIR = 320
#: Points x elements per inner chunk of the kernel (arrays of a few MB stay in cache).
CACHE_PAIRS = 2**15
#: Coordinates closer than this are one node [m].
NODE_TOLERANCE_M = 1e-9


# --------------------------------------------------------------------------- structure
@dataclass(frozen=True)
class WireStructure:
    """Straight perfectly conducting wire segments, one of them fed (immutable).

    Parameters
    ----------
    starts_m, ends_m : ndarray, shape (S, 3)
        End points of the segments in the structure's own frame [m].  Segments that
        share an end point (within :data:`NODE_TOLERANCE_M`) are joined.
    radii_m : ndarray, shape (S,)
        Wire radius of each segment [m].
    feed_segment : int
        Index of the segment with the delta-gap voltage source.
    """

    starts_m: NDArray[np.float64]
    ends_m: NDArray[np.float64]
    radii_m: NDArray[np.float64]
    feed_segment: int

    @classmethod
    def from_segments(
        cls, starts_m: ArrayLike, ends_m: ArrayLike, radii_m: ArrayLike, feed_segment: int
    ) -> WireStructure:
        """Build and check a structure (read-only arrays)."""
        a = np.array(starts_m, dtype=float).reshape(-1, 3)
        b = np.array(ends_m, dtype=float).reshape(-1, 3)
        r = np.array(radii_m, dtype=float).reshape(-1)
        if not (a.shape == b.shape and r.shape == (a.shape[0],)):
            raise ValueError("starts_m, ends_m and radii_m must describe the same segments")
        if not 0 <= feed_segment < a.shape[0]:
            raise ValueError(f"feed_segment {feed_segment} is not a segment index")
        if np.any(np.linalg.norm(b - a, axis=1) <= NODE_TOLERANCE_M) or np.any(r <= 0):
            raise ValueError("segments need a positive length and radius")
        for arr in (a, b, r):
            arr.setflags(write=False)
        return cls(a, b, r, int(feed_segment))

    @property
    def segment_count(self) -> int:
        """Number of segments S."""
        return int(self.starts_m.shape[0])

    def key(self) -> tuple:
        """A hashable description (for the solution cache)."""
        return (
            self.starts_m.tobytes(),
            self.ends_m.tobytes(),
            self.radii_m.tobytes(),
            self.feed_segment,
        )


def node_index(points_m: NDArray[np.float64]) -> NDArray[np.intp]:
    """Node number of each point: points within :data:`NODE_TOLERANCE_M` share one.

    Numbered in order of first appearance (the same on every machine).  Points are
    joined by distance, not by rounding, so two ends a rounding step apart are one node.
    """
    from scipy.spatial import cKDTree

    pts = np.asarray(points_m, dtype=float).reshape(-1, 3)
    pairs = cKDTree(pts).query_pairs(NODE_TOLERANCE_M, output_type="ndarray")
    parent = np.arange(pts.shape[0])
    for i, j in sorted(map(tuple, pairs)):  # union to the smallest index
        ri, rj = i, j
        while parent[ri] != ri:
            ri = parent[ri]
        while parent[rj] != rj:
            rj = parent[rj]
        if ri != rj:
            parent[max(ri, rj)] = min(ri, rj)
    for i in range(pts.shape[0]):
        parent[i] = parent[parent[i]]
    _, index = np.unique(parent, return_inverse=True)
    return np.asarray(index.reshape(-1), dtype=np.intp)


def graded_lines(
    low_m: float, high_m: float, through_m: float, max_step_m: float, min_step_m: float
) -> NDArray[np.float64]:
    """Grid line positions on [low, high] through ``through``, graded away from it.

    The spacing starts at ``min_step_m`` on both sides of ``through_m`` and grows by
    :data:`GRADING_FACTOR` per line up to ``max_step_m``; the rest of each side is
    divided evenly with steps of at most ``max_step_m``.  Both ends are lines.

    Parameters
    ----------
    low_m, high_m : float
        The interval [m]; ``low_m < high_m``.
    through_m : float
        A position that must be a line (a feed), ``low_m <= through_m <= high_m`` [m].
    max_step_m, min_step_m : float
        Largest and first spacing [m]; ``min_step_m <= max_step_m``.

    Returns
    -------
    ndarray
        Sorted line positions [m].
    """
    lines = [low_m, through_m, high_m]
    for sign, end in ((1.0, high_m), (-1.0, low_m)):
        x, step = through_m, min_step_m
        while abs(end - x) > max_step_m and step < max_step_m and abs(end - x) > 2.0 * step:
            x += sign * step
            lines.append(x)
            step = min(step * GRADING_FACTOR, max_step_m)
        rest = abs(end - x)
        n = max(1, math.ceil(rest / max_step_m - 1e-9))
        lines.extend(x + sign * rest * i / n for i in range(1, n))
    return _merge(np.array(lines))


def uniform_lines(low_m: float, high_m: float, max_step_m: float) -> NDArray[np.float64]:
    """Evenly spaced line positions on [low, high], spacing at most ``max_step_m`` [m]."""
    n = max(1, math.ceil((high_m - low_m) / max_step_m - 1e-9))
    return low_m + (high_m - low_m) * np.arange(n + 1) / n


def thinned_lines(lines_m: NDArray[np.float64], max_step_m: float) -> NDArray[np.float64]:
    """A subset of ``lines_m`` (ends kept) whose spacing stays at most ``max_step_m``.

    Used where a graded face meets a coarser one: every line of the coarse face is
    a line of the graded one, so their wires meet at nodes.
    """
    out = [lines_m[0]]
    for i in range(1, len(lines_m)):
        last = i == len(lines_m) - 1
        if last or lines_m[i + 1] - out[-1] > max_step_m * (1 + 1e-9):
            out.append(lines_m[i])
    return np.array(out)


def _merge(values: NDArray[np.float64]) -> NDArray[np.float64]:
    v = np.sort(values)
    keep = np.concatenate([[True], np.diff(v) > 1e-9])
    return v[keep]


def _spacing(lines_m: NDArray[np.float64]) -> NDArray[np.float64]:
    """Local spacing at each line: the mean of its two gaps (the one gap at the ends)."""
    gaps = np.diff(lines_m)
    if gaps.size == 0:
        return np.zeros(1)
    out = np.empty(lines_m.size)
    out[0], out[-1] = gaps[0], gaps[-1]
    out[1:-1] = 0.5 * (gaps[:-1] + gaps[1:])
    return out


def face_grid(
    origin_m: ArrayLike,
    axis_u: ArrayLike,
    axis_v: ArrayLike,
    lines_u_m: NDArray[np.float64],
    lines_v_m: NDArray[np.float64],
    skip_edges: tuple[str, ...] = (),
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Wires of a rectangular grid on the face origin + u axis_u + v axis_v.

    Every cell edge is one segment.  Radii follow the equal-area rule (the local
    spacing of the parallel lines over 2 pi, Ludwig 1987), capped at
    :data:`MAX_RADIUS_PER_LENGTH` times the segment length.

    Parameters
    ----------
    origin_m, axis_u, axis_v : array_like, shape (3,)
        Face origin [m] and two orthogonal unit vectors.
    lines_u_m, lines_v_m : ndarray
        Positions of the grid lines along u and v [m] (the face is their hull).
    skip_edges : tuple of str
        Boundary rows to leave out because another face owns them: any of
        ``"u0"``, ``"u1"`` (the lines u = first, last) and ``"v0"``, ``"v1"``.

    Returns
    -------
    starts_m, ends_m : ndarray, shape (S, 3)
    radii_m : ndarray, shape (S,)
    """
    o = np.asarray(origin_m, dtype=float)
    eu, ev = np.asarray(axis_u, dtype=float), np.asarray(axis_v, dtype=float)
    su, sv = _spacing(lines_u_m), _spacing(lines_v_m)
    starts, ends, radii = [], [], []
    # Segments along u, on each line v = const.
    for j, v in enumerate(lines_v_m):
        if (j == 0 and "v0" in skip_edges) or (j == lines_v_m.size - 1 and "v1" in skip_edges):
            continue
        u0, u1 = lines_u_m[:-1], lines_u_m[1:]
        starts.append(o + np.outer(u0, eu) + v * ev)
        ends.append(o + np.outer(u1, eu) + v * ev)
        radii.append(np.minimum(sv[j] / (2 * np.pi), MAX_RADIUS_PER_LENGTH * (u1 - u0)))
    # Segments along v, on each line u = const.
    for i, u in enumerate(lines_u_m):
        if (i == 0 and "u0" in skip_edges) or (i == lines_u_m.size - 1 and "u1" in skip_edges):
            continue
        v0, v1 = lines_v_m[:-1], lines_v_m[1:]
        starts.append(o + u * eu + np.outer(v0, ev))
        ends.append(o + u * eu + np.outer(v1, ev))
        radii.append(np.minimum(su[i] / (2 * np.pi), MAX_RADIUS_PER_LENGTH * (v1 - v0)))
    if not starts:
        return np.zeros((0, 3)), np.zeros((0, 3)), np.zeros(0)
    return np.vstack(starts), np.vstack(ends), np.concatenate(radii)


def box_grid(
    lines_x_m: NDArray[np.float64],
    lines_y_m: NDArray[np.float64],
    depth_m: float,
    max_step_m: float,
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Wires of a closed box: front face z = 0 on the given lines, the rest coarser.

    The front face (z = 0, the face a probe stands on) uses ``lines_x_m`` and
    ``lines_y_m`` (graded near the feed); the other five faces use their thinned
    subsets and evenly spaced lines along depth (z from -depth to 0), so every wire
    of a coarse face ends on a node of the front face.  Edges shared by two faces are
    built once.

    Returns
    -------
    starts_m, ends_m : ndarray, shape (S, 3)
    radii_m : ndarray, shape (S,)
    """
    xs, ys = thinned_lines(lines_x_m, max_step_m), thinned_lines(lines_y_m, max_step_m)
    zs = uniform_lines(-depth_m, 0.0, max_step_m)
    ex, ey, ez = np.eye(3)
    zero = np.zeros(3)
    parts = [
        face_grid(zero, ex, ey, lines_x_m, lines_y_m),  # front, z = 0
        face_grid(-depth_m * ez, ex, ey, xs, ys),  # back
        # Sides x = const (u = y, v = z), top/bottom y = const (u = x, v = z); the row
        # z = 0 (v1) belongs to the front face.
        face_grid(xs[0] * ex, ey, ez, ys, zs, ("v1",)),
        face_grid(xs[-1] * ex, ey, ez, ys, zs, ("v1", "u0", "u1")),
        face_grid(ys[0] * ey, ex, ez, xs, zs, ("v1", "u0", "u1")),
        face_grid(ys[-1] * ey, ex, ez, xs, zs, ("v1", "u0", "u1")),
    ]
    starts = np.vstack([p[0] for p in parts])
    ends = np.vstack([p[1] for p in parts])
    radii = np.concatenate([p[2] for p in parts])
    return _unique_segments(starts, ends, radii)


def _unique_segments(
    starts: NDArray[np.float64], ends: NDArray[np.float64], radii: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Drop repeated segments (either direction), keeping the first of each."""
    q = np.round(np.hstack([starts, ends]) / 1e-9).astype(np.int64)
    a, b = q[:, :3], q[:, 3:]
    diff = b - a
    first = diff[np.arange(diff.shape[0]), np.argmax(diff != 0, axis=1)]
    swap = first < 0  # order each pair's ends the same way
    key = np.where(swap[:, None], np.hstack([b, a]), np.hstack([a, b]))
    _, idx = np.unique(key, axis=0, return_index=True)
    idx = np.sort(idx)
    return starts[idx], ends[idx], radii[idx]


# --------------------------------------------------------------------------- NEC-2 solve
@dataclass(frozen=True)
class MomentSolution:
    """Segment currents of a structure for a 1 V (peak) delta-gap feed.

    Parameters
    ----------
    structure : WireStructure
    frequency_hz : float
        Frequency [Hz].
    centre_currents_a : ndarray, shape (S,), complex
        Current at each segment's centre, along start -> end, NEC-2 peak phasor [A].
    input_impedance_ohm : complex
        Feed voltage over feed current [ohm].
    """

    structure: WireStructure
    frequency_hz: float
    centre_currents_a: NDArray[np.complex128]
    input_impedance_ohm: complex

    @property
    def wavenumber_rad_m(self) -> float:
        """Free-space wavenumber [rad m^-1]."""
        return 2.0 * np.pi * self.frequency_hz / C_M_S

    @functools.cached_property
    def node_currents_a(self) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """Current at each segment's start and end (along start -> end) [A].

        Kirchhoff's current law at every node: the centre currents of the segments
        meeting there, oriented away from the node, minus their mean.
        """
        s = self.structure
        n = s.segment_count
        node = node_index(np.vstack([s.starts_m, s.ends_m]))
        c = self.centre_currents_a
        outward = np.concatenate([c, -c])  # away from the start, away from the end
        count = np.bincount(node)
        total = np.bincount(node, outward.real) + 1j * np.bincount(node, outward.imag)
        corrected = np.asarray(outward - (total / count)[node], dtype=complex)
        return corrected[:n], -corrected[n:]

    def feed_elements(self) -> CurrentElements:
        """The current elements of the 1 V feed, unscaled (NEC-2's currents) [A]."""
        s = self.structure
        i1, i2 = self.node_currents_a
        return CurrentElements(s.starts_m, s.ends_m, s.radii_m, i1, i2, self.wavenumber_rad_m)

    def elements(self, power_w: float) -> CurrentElements:
        """RMS current elements scaled so that they radiate ``power_w`` [W]."""
        unit = self.feed_elements()
        p = unit.radiated_power_w()
        scale = math.sqrt(power_w / p) if p > 0 else 0.0
        return unit.scaled(scale)

    @property
    def feed_current_a(self) -> complex:
        """Feed current for the 1 V feed (NEC-2 peak phasor) [A]."""
        return complex(self.centre_currents_a[self.structure.feed_segment])


def _enter_wires(geo: object, structure: WireStructure) -> None:
    """Enter every segment into a NEC-2 geometry as its own wire (tag = index + 1).

    NEC-2 joins wires whose ends coincide, so the grid's junctions need no cards.
    """
    s = structure
    for i in range(s.segment_count):
        a, b = s.starts_m[i], s.ends_m[i]
        geo.wire(i + 1, 1, *a, *b, float(s.radii_m[i]), 1.0, 1.0)  # type: ignore[attr-defined]


def _structure_from_key(key: tuple) -> WireStructure:
    """The structure back from :meth:`WireStructure.key` (for the solution caches)."""
    starts, ends, radii, feed = key
    return WireStructure(
        np.frombuffer(starts).reshape(-1, 3),
        np.frombuffer(ends).reshape(-1, 3),
        np.frombuffer(radii),
        feed,
    )


def _check_size(structure: WireStructure) -> None:
    """Refuse a structure beyond :data:`MAX_SEGMENTS` (before any cache is consulted)."""
    if structure.segment_count > MAX_SEGMENTS:
        raise ModelInputError(
            "ground_size_m",
            f"the wire-grid model needs {structure.segment_count} segments, more than "
            f"{MAX_SEGMENTS}; use a smaller structure",
        )


def _check_symmetric_size(quarter: WireStructure) -> None:
    """Refuse a quarter whose whole structure is beyond :data:`MAX_SYMMETRIC_SEGMENTS`."""
    if 4 * quarter.segment_count > MAX_SYMMETRIC_SEGMENTS:
        raise ModelInputError(
            "length_m",
            f"the wire-grid model needs {4 * quarter.segment_count} segments, more than "
            f"{MAX_SYMMETRIC_SEGMENTS}",
        )


def _nec_run(structure: WireStructure, frequency_hz: float) -> tuple[NDArray, complex]:
    """Run NEC-2 (PyPI ``PyNEC``, the nec2++ engine): centre currents and impedance."""
    import PyNEC  # imported here: only models built on wire structures need it

    s = structure
    _check_size(s)
    ctx = PyNEC.nec_context()
    geo = ctx.get_geometry()
    _enter_wires(geo, s)
    ctx.geometry_complete(0)  # no ground plane
    ctx.fr_card(0, 1, frequency_hz / 1e6, 0.0)  # frequency in MHz
    ctx.ex_card(0, s.feed_segment + 1, 1, 0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0)  # 1 V delta gap
    ctx.xq_card(0)  # solve, no pattern
    currents = np.asarray(ctx.get_structure_currents(0).get_current(), dtype=complex)
    impedance = complex(ctx.get_input_parameters(0).get_impedance()[0])
    if currents.shape != (s.segment_count,) or not np.all(np.isfinite(currents)):
        raise RuntimeError("NEC-2 returned no finite segment currents")
    return currents, impedance


def nec_near_fields(
    structure: WireStructure, frequency_hz: float, points_m: ArrayLike
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """NEC-2's own near field (NE and NH requests) of a structure fed with 1 V peak.

    For checks of the radiating kernel: NEC-2 evaluates the fields of its own
    three-term current on each segment.  Returns peak phasors, as NEC-2 does.

    Parameters
    ----------
    structure : WireStructure
    frequency_hz : float
        Frequency [Hz].
    points_m : array_like, shape (N, 3)
        Field points in the structure's frame [m].

    Returns
    -------
    e_v_m, h_a_m : ndarray, shape (N, 3), complex
        Peak E [V/m] and H [A/m] for the 1 V feed.
    """
    import PyNEC

    s = structure
    pts = np.asarray(points_m, dtype=float).reshape(-1, 3)
    ctx = PyNEC.nec_context()
    _enter_wires(ctx.get_geometry(), s)
    ctx.geometry_complete(0)
    ctx.fr_card(0, 1, frequency_hz / 1e6, 0.0)
    ctx.ex_card(0, s.feed_segment + 1, 1, 0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0)
    for p in pts:  # one-point rectangular requests
        ctx.ne_card(0, 1, 1, 1, p[0], p[1], p[2], 0.0, 0.0, 0.0)
    for p in pts:
        ctx.nh_card(0, 1, 1, 1, p[0], p[1], p[2], 0.0, 0.0, 0.0)

    def vector(i: int) -> NDArray[np.complex128]:
        nf = ctx.get_near_field_pattern(i)
        return np.array([nf.get_field_x()[0], nf.get_field_y()[0], nf.get_field_z()[0]])

    n = pts.shape[0]
    e = np.array([vector(i) for i in range(n)])
    h = np.array([vector(i) for i in range(n, 2 * n)])
    return e, h


#: Environment variable naming the folder of kept NEC-2 solutions ("off" or empty: none).
CACHE_ENV = "KEEPCLEAR_CACHE_DIR"


def solution_cache_dir() -> Path | None:
    """Folder where NEC-2 solutions (and table samples) are kept between runs, or None.

    ``$KEEPCLEAR_CACHE_DIR`` if set ("off" or empty switches the store off), else
    ``$XDG_CACHE_HOME/keepclear/nec`` (``~/.cache/keepclear/nec``).  A folder that cannot
    be made switches it off too: keeping solutions only saves time.
    """
    value = os.environ.get(CACHE_ENV)
    if value is not None:
        if value.strip() in ("", "off"):
            return None
        folder = Path(value)
    else:
        base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
        folder = Path(base) / "keepclear" / "nec"
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError:
        return None
    return folder


@functools.cache
def _engine_stamp() -> bytes:
    """What a kept solution depends on besides its inputs.

    The NEC-2 package's version and the code that enters the wires and the cards: a
    change to either starts afresh.
    """
    import inspect
    from importlib import metadata

    try:
        version = metadata.version("PyNEC")
    except metadata.PackageNotFoundError:  # pragma: no cover - PyNEC is a dependency
        version = "unknown"
    parts = []
    for f in (_enter_wires, _nec_run, _nec_run_quarter):
        try:
            parts.append(inspect.getsource(f).encode())
        except (OSError, TypeError):  # installed without sources: the compiled code
            parts.append(f.__code__.co_code + repr(f.__code__.co_consts).encode())
    return f"{SOLUTION_FORMAT}|{version}|".encode() + b"|".join(parts)


#: Layout of a kept solution file (raise it when the layout changes).
SOLUTION_FORMAT = 1


def _kept_solution(
    kind: str, parts: tuple, compute: Any, stamp: bytes | None = None
) -> dict[str, NDArray]:
    """``compute()`` (a dict of arrays), kept on disk under a digest of every input.

    NEC-2 solves the same structure to the same currents every time: the digest covers
    the structure's bytes, the frequency, the feed and :func:`_engine_stamp`, so a kept
    file is only read back for exactly the same problem.  A file that cannot be read is
    solved again and replaced; writing goes through a temporary file and an atomic
    rename, so parallel runs never see half a file.  ``stamp`` stands for
    :func:`_engine_stamp` for what does not come from NEC-2 (the tables' samples,
    :func:`_table_stamp`).
    """
    folder = solution_cache_dir()
    if folder is None:
        return compute()
    digest = hashlib.sha256(_engine_stamp() if stamp is None else stamp)
    for part in (kind, *parts):
        digest.update(part if isinstance(part, bytes) else repr(part).encode())
        digest.update(b"|")
    path = folder / f"{kind}-{digest.hexdigest()[:40]}.npz"
    try:
        with np.load(path, allow_pickle=False) as kept:
            return {name: kept[name] for name in kept.files}
    except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile):
        pass
    result = compute()
    name = None
    try:
        with tempfile.NamedTemporaryFile(dir=folder, suffix=".npz", delete=False) as tmp:
            name = tmp.name
            np.savez(tmp, **result)
        os.replace(name, path)
    except OSError:
        if name is not None:
            with contextlib.suppress(OSError):
                os.unlink(name)
    return result


@functools.lru_cache(maxsize=32)
def _solve_cached(key: tuple, frequency_hz: float) -> tuple[NDArray, complex]:
    def compute() -> dict[str, NDArray]:
        currents, z = _nec_run(_structure_from_key(key), frequency_hz)
        return {"currents": currents, "impedance": np.array([z])}

    kept = _kept_solution("solve", (*key, frequency_hz), compute)
    currents = np.array(kept["currents"], dtype=complex)
    currents.setflags(write=False)
    return currents, complex(kept["impedance"][0])


def solve_structure(structure: WireStructure, frequency_hz: float) -> MomentSolution:
    """Solve the segment currents with NEC-2 for a 1 V delta-gap feed (cached).

    The same structure at the same frequency is solved once per process, and kept on
    disk for later runs (:func:`solution_cache_dir`, :func:`_kept_solution`); NEC-2's
    solution is deterministic (a dense LU factorisation of the same matrix).

    Parameters
    ----------
    structure : WireStructure
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    MomentSolution
    """
    _check_size(structure)
    currents, z = _solve_cached(structure.key(), float(frequency_hz))
    return MomentSolution(structure, float(frequency_hz), currents, z)


# ------------------------------------------------------------- two symmetry planes
#: Mirror factors of the four quarters, in NEC-2's order after reflecting the first
#: quarter in the plane y = 0 and then everything in the plane x = 0 (GX card, IX = IY = 1):
#: the quarter, its y-mirror, its x-mirror, and both.
QUARTER_MIRRORS = (
    np.array([1.0, 1.0, 1.0]),
    np.array([1.0, -1.0, 1.0]),
    np.array([-1.0, 1.0, 1.0]),
    np.array([-1.0, -1.0, 1.0]),
)


def mirrored_structure(quarter: WireStructure) -> WireStructure:
    """The whole structure of a quarter and its three mirror images, in NEC-2's order.

    Each image keeps its segments' start -> end order (the mirrored end points), so a
    current along an image segment is the mirror of the same current in the quarter.
    The feed index is the quarter's.
    """
    starts = np.vstack([quarter.starts_m * m for m in QUARTER_MIRRORS])
    ends = np.vstack([quarter.ends_m * m for m in QUARTER_MIRRORS])
    radii = np.concatenate([quarter.radii_m] * 4)
    return WireStructure.from_segments(starts, ends, radii, quarter.feed_segment)


def _nec_run_quarter(
    quarter: WireStructure, frequency_hz: float, voltages: tuple[float, ...]
) -> NDArray[np.complex128]:
    """NEC-2 with the planes x = 0 and y = 0 as symmetry planes (GX card).

    The quarter (every segment in x >= 0, y >= 0, none in or across a plane) is reflected
    by NEC-2, which then factorises four blocks of a quarter's size instead of the whole
    matrix (Burke & Poggio [1]_, part III, GX card).  The quarter's feed segment and its
    three images are fed with ``voltages`` (one per quarter, :data:`QUARTER_MIRRORS`
    order; the excitation need not be symmetric).  Returns the centre currents of the
    whole structure in :func:`mirrored_structure`'s order.
    """
    import PyNEC

    q = quarter
    _check_symmetric_size(q)
    ctx = PyNEC.nec_context()
    geo = ctx.get_geometry()
    _enter_wires(geo, q)
    geo.reflect(1, 1, 0, 0)  # x and y planes; tags unchanged
    ctx.geometry_complete(0)
    ctx.fr_card(0, 1, frequency_hz / 1e6, 0.0)
    for k, v in enumerate(voltages):
        if v != 0.0:
            segment = q.feed_segment + 1 + k * q.segment_count  # absolute number (tag 0)
            ctx.ex_card(0, 0, segment, 0, float(v), 0.0, 0.0, 0.0, 0.0, 0.0)
    ctx.xq_card(0)
    currents = np.asarray(ctx.get_structure_currents(0).get_current(), dtype=complex)
    if currents.shape != (4 * q.segment_count,) or not np.all(np.isfinite(currents)):
        raise RuntimeError("NEC-2 returned no finite segment currents")
    return currents


@functools.lru_cache(maxsize=8)
def _solve_quarter_cached(
    key: tuple, frequency_hz: float, voltages: tuple[float, ...]
) -> NDArray[np.complex128]:
    def compute() -> dict[str, NDArray]:
        return {"currents": _nec_run_quarter(_structure_from_key(key), frequency_hz, voltages)}

    kept = _kept_solution("quarter", (*key, frequency_hz, voltages), compute)
    currents = np.array(kept["currents"], dtype=complex)
    currents.setflags(write=False)
    return currents


def solve_symmetric(
    quarter: WireStructure, frequency_hz: float, voltages: tuple[float, float, float, float]
) -> MomentSolution:
    """Solve a structure symmetric about the planes x = 0 and y = 0 from its quarter (cached).

    Parameters
    ----------
    quarter : WireStructure
        The segments in x >= 0, y >= 0 (ends may lie on a plane, no segment in one); its
        ``feed_segment`` is the fed segment of the quarter.
    frequency_hz : float
    voltages : 4 floats
        Delta-gap voltages [V] at the feed and its images (:data:`QUARTER_MIRRORS` order).

    Returns
    -------
    MomentSolution
        On the whole structure (:func:`mirrored_structure`); ``input_impedance_ohm`` is
        the quarter feed's voltage over its current.
    """
    _check_symmetric_size(quarter)
    currents = _solve_quarter_cached(quarter.key(), float(frequency_hz), tuple(voltages))
    whole = mirrored_structure(quarter)
    feed = complex(currents[quarter.feed_segment])
    z = complex(voltages[0]) / feed if feed != 0 else complex("nan")
    return MomentSolution(whole, float(frequency_hz), currents, z)


# --------------------------------------------------------------------------- radiation
def _gauss_sphere(n_theta: int) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Directions and weights for integrals over the unit sphere (Gauss x trapezoid)."""
    x, w = np.polynomial.legendre.leggauss(n_theta)
    n_phi = 2 * n_theta
    phi = 2 * np.pi * np.arange(n_phi) / n_phi
    ct, ph = np.meshgrid(x, phi, indexing="ij")
    st = np.sqrt(1.0 - ct * ct)
    dirs = np.column_stack([(st * np.cos(ph)).ravel(), (st * np.sin(ph)).ravel(), ct.ravel()])
    weights = np.repeat(w, n_phi) * (2 * np.pi / n_phi)
    return dirs, weights


@dataclass(frozen=True)
class CurrentElements:
    """Piecewise-sinusoidal current segments and their exact fields (RMS phasors).

    Parameters
    ----------
    starts_m, ends_m : ndarray, shape (M, 3)
        Segment end points [m].
    radii_m : ndarray, shape (M,)
        Wire radii: points nearer a segment's line are evaluated at this distance [m].
    start_currents_a, end_currents_a : ndarray, shape (M,), complex
        RMS current at each end, flowing from start to end [A].
    wavenumber_rad_m : float
        Free-space wavenumber k [rad m^-1].
    """

    starts_m: NDArray[np.float64]
    ends_m: NDArray[np.float64]
    radii_m: NDArray[np.float64]
    start_currents_a: NDArray[np.complex128]
    end_currents_a: NDArray[np.complex128]
    wavenumber_rad_m: float

    def scaled(self, factor: float) -> CurrentElements:
        """The same elements with every current multiplied by ``factor``."""
        return CurrentElements(
            self.starts_m,
            self.ends_m,
            self.radii_m,
            self.start_currents_a * factor,
            self.end_currents_a * factor,
            self.wavenumber_rad_m,
        )

    def subset(self, index: NDArray[np.intp]) -> CurrentElements:
        """The elements at ``index`` (their own currents, unchanged)."""
        return CurrentElements(
            self.starts_m[index],
            self.ends_m[index],
            self.radii_m[index],
            self.start_currents_a[index],
            self.end_currents_a[index],
            self.wavenumber_rad_m,
        )

    @property
    def count(self) -> int:
        """Number of elements M."""
        return int(self.starts_m.shape[0])

    @functools.cached_property
    def _geometry(self) -> tuple[NDArray, ...]:
        d = self.ends_m - self.starts_m
        length = np.linalg.norm(d, axis=1)
        t = d / length[:, None]
        k = self.wavenumber_rad_m
        s = np.sin(k * length)
        c = np.cos(k * length)
        i1, i2 = self.start_currents_a, self.end_currents_a
        # I'(s1) and I'(s2) of the sinusoid through I1, I2.
        d1 = k * (i2 - i1 * c) / s
        d2 = k * (i2 * c - i1) / s
        return t, length, d1, d2, np.sum(self.starts_m * t, axis=1), np.cross(t, self.starts_m)

    @property
    def bytes_per_point(self) -> int:
        """Scratch memory one field point costs [bytes]."""
        return BYTES_PER_PAIR * max(self.count, 1)

    def fields(
        self, points_m: ArrayLike, chunk_bytes: int = 64 * 1024**2
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """Exact E [V/m] and H [A/m] of the elements at points (N, 3), chunked.

        Parameters
        ----------
        points_m : array_like, shape (N, 3)
            Field points in the elements' frame [m].
        chunk_bytes : int
            Memory budget of one chunk [bytes].

        Returns
        -------
        e_v_m, h_a_m : ndarray, shape (N, 3), complex
        """
        pts = np.asarray(points_m, dtype=float).reshape(-1, 3)
        n = pts.shape[0]
        e = np.zeros((n, 3), dtype=complex)
        h = np.zeros((n, 3), dtype=complex)
        # Small chunks keep the pair arrays in the processor's cache.
        step = max(1, min(int(chunk_bytes // self.bytes_per_point), CACHE_PAIRS // self.count))
        for start in range(0, n, step):
            stop = min(n, start + step)
            e[start:stop], h[start:stop] = self._fields_chunk(pts[start:stop])
        return e, h

    @functools.cached_property
    def _nodes(self) -> tuple[NDArray, ...]:
        """Distinct end points, and each element's start and end among them."""
        ends = np.vstack([self.starts_m, self.ends_m])
        inverse = node_index(ends)
        first = np.full(int(inverse.max()) + 1, -1)
        first[inverse[::-1]] = np.arange(inverse.size)[::-1]  # first end of each node
        nodes = ends[first]
        m = self.count
        return nodes, np.sum(nodes * nodes, axis=1), inverse[:m], inverse[m:]

    def _fields_chunk(
        self, pts: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """The kernel of the module docstring on one chunk of points.

        The exponentials are taken once per distinct end point (segments of a grid
        share their ends), distances and projections come from matrix products, and
        the sums over the elements are matrix products too; only the bracketed
        terms are computed per (point, element) pair.
        """
        t, length, d1, d2, start_along, t_cross_s = self._geometry
        nodes, nodes2, n1, n2 = self._nodes
        k = self.wavenumber_rad_m
        p2 = np.sum(pts * pts, axis=1)
        r2_node = np.maximum(p2[:, None] + nodes2[None, :] - 2.0 * (pts @ nodes.T), 0.0)
        kr_node = k * np.sqrt(r2_node)
        g_node = np.cos(kr_node) - 1j * np.sin(kr_node)  # exp(-jkR), once per node
        along = pts @ t.T - start_along[None, :]  # (P, M) from each start, along its line
        rho2 = np.maximum(np.take(r2_node, n1, axis=1) - along * along, 0.0)
        radius2 = (self.radii_m * self.radii_m)[None, :]
        inside = rho2 < radius2  # within a wire's radius of its line: evaluate at the radius
        # The pairs inside are few (points on a wire's line): fixed up where they are.
        pi_, mi_ = np.nonzero(inside)
        any_inside = pi_.size > 0
        if any_inside:
            rho2[pi_, mi_] = radius2[0, mi_]
        h_phi = np.zeros(along.shape, dtype=complex)
        e_z = np.zeros(along.shape, dtype=complex)
        e_rho = np.zeros(along.shape, dtype=complex)
        jk = 1j * k
        for idx, u, cur, der in (
            (n1, -along, -self.start_currents_a, -d1),  # sign -1 at the start
            (n2, length[None, :] - along, self.end_currents_a, d2),
        ):
            g = np.take(g_node, idx, axis=1)
            r2 = rho2 + u * u
            inv_r = 1.0 / np.sqrt(r2)
            if any_inside:
                kr = k * np.sqrt(r2[pi_, mi_])
                g[pi_, mi_] = np.cos(kr) - 1j * np.sin(kr)
            ur = u * inv_r
            q = ur * inv_r
            w = rho2 * inv_r * (inv_r * inv_r)
            c_i, c_d = cur[None, :], der[None, :]
            # H_phi: g (u I / R - j I'/k)
            h_phi += g * (ur * c_i - (1j / k) * c_d)
            # E_z bracket: -g / R (u I / R^2 + jk u I / R + I')
            e_z -= (g * inv_r) * (q * c_i + ur * (jk * c_i) + c_d)
            # E_rho bracket: g (jk u^2 I / R^2 + u I' / R - rho^2 I / R^3)
            e_rho += g * ((ur * ur) * (jk * c_i) + ur * c_d - w * c_i)
        inv_rho2 = 1.0 / rho2
        # H = sum H_phi phi_hat, phi_hat = t x (p - s) / rho; E_rho rho_hat, rho_hat =
        # ((p - s) - along t) / rho.  rho is the evaluation distance (points inside a wire
        # see a field that tapers to zero on its axis).
        b = h_phi * (inv_rho2 / (4 * np.pi))
        c = e_rho * (inv_rho2 * (1j * ETA0_OHM / (4 * np.pi * k)))
        e_z *= -1j * ETA0_OHM / (4 * np.pi * k)
        h = np.cross(b @ t, pts) - b @ t_cross_s
        e = (e_z - c * along) @ t + np.sum(c, axis=1)[:, None] * pts - c @ self.starts_m
        return e, h

    def far_field(self, directions: ArrayLike) -> NDArray[np.complex128]:
        """Far-field vector amplitude F [V] about the frame's origin, E -> F e^{-jkr}/r.

        Notes
        -----
        :math:`\\mathbf F = -\\frac{j\\omega\\mu_0}{4\\pi}\\,\\hat u \\times\\hat u
        \\times\\ldots` written as the transverse part of
        :math:`-\\frac{jk\\eta_0}{4\\pi}\\sum_m \\hat t_m \\int I_m(s)
        e^{jk\\hat u\\cdot\\mathbf r(s)}ds` (Balanis 4th ed. sec. 3.6), the integral by
        4-point Gauss-Legendre quadrature per segment (segments are below 0.1 lambda:
        the phase and the sinusoid vary by less than 0.7 rad along one, and the rule's
        relative error is below 1e-7).
        """
        u = np.asarray(directions, dtype=float).reshape(-1, 3)
        u = u / np.linalg.norm(u, axis=1, keepdims=True)
        t, length = self._geometry[:2]
        k = self.wavenumber_rad_m
        x, w = np.polynomial.legendre.leggauss(4)
        frac = 0.5 * (x + 1.0)  # positions along each segment, 0..1
        s = np.outer(length, frac)  # (M, Q)
        sin_kl = np.sin(k * length)[:, None]
        cur = (
            self.start_currents_a[:, None] * np.sin(k * (length[:, None] - s))
            + self.end_currents_a[:, None] * np.sin(k * s)
        ) / sin_kl
        weight = cur * (0.5 * w)[None, :] * length[:, None]  # (M, Q)
        pos = self.starts_m[:, None, :] + s[:, :, None] * t[:, None, :]  # (M, Q, 3)
        pos = pos.reshape(-1, 3)
        moment = weight.reshape(-1)[:, None] * np.repeat(t, s.shape[1], axis=0)  # (MQ, 3)
        out = np.empty((u.shape[0], 3), dtype=complex)
        step = max(1, int(2**22 // max(pos.shape[0], 1)))
        for a in range(0, u.shape[0], step):
            b = min(u.shape[0], a + step)
            phase = np.exp(1j * k * (u[a:b] @ pos.T))  # (D, MQ)
            n_vec = phase @ moment  # (D, 3)
            along = np.sum(n_vec * u[a:b], axis=1, keepdims=True)
            out[a:b] = -1j * k * ETA0_OHM / (4 * np.pi) * (n_vec - along * u[a:b])
        return out

    def radiated_power_w(self, n_theta: int | None = None) -> float:
        """Power radiated by the elements: |F|^2 / eta0 integrated over the sphere [W].

        Gauss-Legendre in cos(theta) times the trapezoid rule in phi; by default
        n_theta = 2 k r_max + 12 (at least 16), r_max the farthest segment end from the
        origin: the pattern of sources within r_max holds spherical harmonics up to
        degree about k r_max, |F|^2 up to twice that, and n Gauss points integrate
        degree 2n - 1 exactly.
        """
        if n_theta is None:
            r_max = float(np.max(np.linalg.norm(np.vstack([self.starts_m, self.ends_m]), axis=1)))
            n_theta = max(16, math.ceil(2 * self.wavenumber_rad_m * r_max) + 12)
        dirs, weights = _gauss_sphere(n_theta)
        f = self.far_field(dirs)
        return float(np.sum(weights * np.sum(np.abs(f) ** 2, axis=1)) / ETA0_OHM)


# --------------------------------------------------------------------------- outer region
class OutgoingExpansion:
    """Fast, exact-to-1e-4 fields outside a sphere: the outgoing-wave expansion, tabulated.

    Outside the smallest sphere (centre ``centre_m``, radius :math:`r_s`) that holds
    every source, an outgoing field has the convergent expansion (Wilcox [1]_)

    .. math:: \\mathbf E(r\\hat u) = \\frac{e^{-jkr}}{r}
              \\sum_{n \\ge 0} \\frac{\\mathbf A_n(\\hat u)}{r^n},

    so :math:`\\mathbf a(\\hat u, s) = r e^{jkr}\\mathbf E` is analytic in
    :math:`s = 1/r` for :math:`s < 1/r_s`, and, as a function of direction, a field of
    sources within :math:`r_s` is band-limited to spherical-harmonic degree about
    :math:`k r_s`.  Here :math:`\\mathbf a` (and the same for H) is sampled exactly, with
    the elements' kernel, on Chebyshev nodes in s on :math:`[0, 1/r_1]`,
    :math:`r_1 = 2.5 r_s`, times a grid on the "double sphere" (theta over a whole
    turn, phi over a whole turn, which makes both periodic), and represented by its
    two-dimensional Fourier series times a Chebyshev series.  Evaluating a point costs
    two small matrix products instead of a sum over every segment.

    Band limit L = ceil(k r_s) + 6 (N = 2 L + 2 samples per turn), Q = 6 Chebyshev
    nodes (the series converges like 7.9^-Q for r_1 = 2.5 r_s: 4e-6).

    Evaluation.  The Fourier series is summed once, onto a grid six times finer than
    the samples (zero padding of the coefficients, one inverse FFT per Chebyshev
    term), and a point takes 4 x 4-point Lagrange interpolation in (theta, phi) on
    that grid, then the Chebyshev sum in s: about 800 complex products per point
    whatever the band limit, where the full double Fourier sum costs 6 N^2 Q.  For a
    function band-limited to degree L sampled with spacing h the interpolation error
    is below :math:`C_4 (L h)^4 / 4!` of its largest value, :math:`C_4 = (0.5 \\cdot
    1.5)^2` the node polynomial's largest value between the middle nodes (the
    remainder of Lagrange interpolation, Davis [2]_ ch. III), and :math:`L h = \\pi/6`
    here: 1.8e-3 for content at the band edge, far less for a real source, whose
    content lies well below it (3e-5 of the largest field for the box probe, found
    when written).  The full sum stays in
    :meth:`fields_exact`.  Both are checked against the direct kernel in
    tests/test_finite_ground.py (within 1e-3 of the largest field at the same
    distance).

    The far field is the table at s = 0 (:meth:`far_field`): F about the centre, which
    costs the same per direction as a field point and nothing per segment.

    The kernel's samples (nearly all of a build's time) are kept on disk beside NEC-2's
    solutions (:func:`_kept_table_samples`) and read back by a later run for exactly the
    same currents, centre and sampling: the same table, to the last bit.

    Parameters
    ----------
    elements : CurrentElements
        The sources, in the frame where ``centre_m`` is given.
    centre_m : array_like, shape (3,)
        Centre of the expansion [m].

    References
    ----------
    .. [1] C. H. Wilcox, "An expansion theorem for electromagnetic fields",
       *Comm. Pure Appl. Math.* 9(2), 115-134 (1956), doi:10.1002/cpa.3160090202.
    .. [2] P. J. Davis, *Interpolation and Approximation*, Dover (1975), ch. III
       (the remainder of polynomial interpolation).
    """

    #: Chebyshev nodes in s = 1/r.
    NODES = 6
    #: The interpolation grid is this many times finer than the samples.
    OVERSAMPLE = 6
    #: Interpolation points per angle (even).
    STENCIL = 4
    #: Largest interpolation grid kept [bytes]; a larger table sums the series exactly.
    MAX_GRID_BYTES = 256 * 1024**2
    #: Extra degrees beyond k r_s.
    EXTRA_DEGREES = 6
    #: Inner radius of the region, in units of the sources' radius r_s.
    INNER_FACTOR = 2.5

    def __init__(self, elements: CurrentElements, centre_m: ArrayLike) -> None:
        self.centre_m = np.asarray(centre_m, dtype=float)
        ends = np.vstack([elements.starts_m, elements.ends_m]) - self.centre_m
        r_s = float(np.max(np.linalg.norm(ends, axis=1)))
        k = elements.wavenumber_rad_m
        self.wavenumber_rad_m = k
        self.source_radius_m = r_s
        #: Points at least this far from the centre use the expansion [m].
        self.inner_radius_m = self.INNER_FACTOR * r_s
        degree = math.ceil(k * r_s) + self.EXTRA_DEGREES
        n = 2 * degree + 2
        q = self.NODES
        self._n, self._q = n, q
        s_max = 1.0 / self.inner_radius_m
        self._s_max = s_max
        x = np.cos(np.pi * (np.arange(q) + 0.5) / q)
        s = 0.5 * (x + 1.0) * s_max
        half = n // 2
        theta = 2 * np.pi * np.arange(half + 1) / n  # 0..pi; the rest by symmetry
        phi = 2 * np.pi * np.arange(n) / n
        tt, pp = np.meshgrid(theta, phi, indexing="ij")
        u = np.column_stack(
            [
                (np.sin(tt) * np.cos(pp)).ravel(),
                (np.sin(tt) * np.sin(pp)).ravel(),
                np.cos(tt).ravel(),
            ]
        )
        samples = _kept_table_samples(elements, self.centre_m, s, u)
        values = np.empty((q, n, n, 6), dtype=complex)
        for iq in range(q):
            grid = samples[iq].reshape(half + 1, n, 6)
            values[iq, : half + 1] = grid
            # theta' = 2 pi - theta at phi is the point (theta, phi + pi).
            for i in range(half + 1, n):
                values[iq, i] = np.roll(grid[n - i], -half, axis=0)
        coeff = np.fft.fft2(values, axes=(1, 2)) / (n * n)
        coeff[:, half, :, :] = 0.0  # the Nyquist terms (beyond the band limit)
        coeff[:, :, half, :] = 0.0
        cheb = np.cos(np.outer(np.arange(q), np.pi * (np.arange(q) + 0.5) / q)) * (2.0 / q)
        cheb[0] *= 0.5
        coeff = np.einsum("lq,qnmc->lnmc", cheb, coeff)
        # Layout for the first product: (m, l * n * c).
        self._coeff_m = np.ascontiguousarray(np.transpose(coeff, (2, 0, 1, 3)).reshape(n, -1))
        self._freq = np.fft.fftfreq(n, 1.0 / n)
        self._grid = self._fine_grid(coeff)

    def _fine_grid(self, coeff: NDArray[np.complex128]) -> NDArray[np.complex128] | None:
        """The series summed on the finer grid: rows theta in [-p h, pi + p h], all phi.

        Shape (rows * m, Q * 6), row-major in (theta, phi); ``None`` if too large.
        """
        n, q, pad = self._n, self._q, self.STENCIL
        m = self.OVERSAMPLE * n
        rows = m // 2 + 2 * pad + 1
        if rows * m * q * 6 * 16 > self.MAX_GRID_BYTES:
            return None
        padded = np.zeros((q, m, m, 6), dtype=complex)
        f = np.fft.fftfreq(n, 1.0 / n).astype(int)
        padded[:, f[:, None] % m, f[None, :] % m, :] = coeff
        fine = np.fft.ifft2(padded, axes=(1, 2)) * (m * m)
        theta_rows = np.arange(-pad, m // 2 + pad + 1) % m
        grid = np.transpose(fine[:, theta_rows], (1, 2, 0, 3))  # (rows, m, q, 6)
        self._m, self._pad = m, pad
        return np.ascontiguousarray(grid.reshape(rows * m, q * 6))

    def scaled(self, factor: float) -> OutgoingExpansion:
        """The same table for every source current multiplied by ``factor`` (a copy)."""
        out = copy.copy(self)
        out._coeff_m = self._coeff_m * factor
        out._grid = None if self._grid is None else self._grid * factor
        return out

    def radiated_power_w(self) -> float:
        """Power the tabulated field radiates: |F|^2 / eta0 over the sphere [W].

        The same rule as :meth:`CurrentElements.radiated_power_w` (Gauss-Legendre in
        cos(theta) times the trapezoid in phi, n_theta = 2 k r_s + 12, at least 16),
        about the table's centre (r_s the sources' radius from it), on the table's far
        field instead of a sum over every segment.
        """
        n_theta = max(16, math.ceil(2 * self.wavenumber_rad_m * self.source_radius_m) + 12)
        dirs, weights = _gauss_sphere(n_theta)
        f = self.far_field(dirs)
        return float(np.sum(weights * np.sum(np.abs(f) ** 2, axis=1)) / ETA0_OHM)

    def covers(self, points_m: NDArray[np.float64]) -> NDArray[np.bool_]:
        """Which points lie in the expansion's region (r >= inner radius)."""
        r = row_norms(points_m - self.centre_m)
        return np.asarray(r >= self.inner_radius_m)

    def fields(
        self, points_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """E [V/m] and H [A/m] at points in the region (N, 3), chunked."""
        if self._grid is None:
            return self.fields_exact(points_m)
        pts = np.asarray(points_m, dtype=float).reshape(-1, 3)
        rel = pts - self.centre_m
        r = row_norms(rel)
        a = self._interpolate(rel, 1.0 / r)
        a *= (np.exp(-1j * self.wavenumber_rad_m * r) / r)[:, None]
        return a[:, :3], a[:, 3:]

    def far_field(self, directions: ArrayLike) -> NDArray[np.complex128]:
        """Far-field amplitude F [V] about the centre (E -> F e^{-jk|r-c|}/|r-c|).

        The table at s = 0; directions (N, 3), any length.
        """
        u = np.asarray(directions, dtype=float).reshape(-1, 3)
        if self._grid is None:
            far = self.centre_m + 1e9 * u / np.linalg.norm(u, axis=1, keepdims=True)
            e, _ = self.fields_exact(far)
            r = np.linalg.norm(far - self.centre_m, axis=1)
            return e * (r * np.exp(1j * self.wavenumber_rad_m * r))[:, None]
        return self._interpolate(u, np.zeros(u.shape[0]))[:, :3]

    def _interpolate(
        self, rel: NDArray[np.float64], s_m: NDArray[np.float64]
    ) -> NDArray[np.complex128]:
        """a(u, s) (E then H, shape (N, 6)) from the fine grid.

        The stencils, weights and Chebyshev terms of every point are formed at once; the
        rows of the grid are gathered and summed in chunks of about 2 MiB of gathered
        values, which stay in the processor's cache for the products that follow (chunks
        of 64 MiB cost twice as much a point).  The weights are real: the complex table
        is read as pairs of reals, which halves the products (the same sums, term by term).
        """
        m, pad, p, q = self._m, self._pad, self.STENCIL, self._q
        norm = row_norms(rel)
        theta = np.arccos(np.clip(rel[:, 2] / norm, -1.0, 1.0))
        phi = np.arctan2(rel[:, 1], rel[:, 0])
        h = 2.0 * np.pi / m
        i_t, w_t = _lagrange_stencil(theta / h, p)
        i_p, w_p = _lagrange_stencil(phi / h, p)
        rows = ((i_t + pad)[:, :, None] * m + (i_p % m)[:, None, :]).reshape(-1, p * p)
        w = (w_t[:, :, None] * w_p[:, None, :]).reshape(-1, 1, p * p)
        x = np.clip(2.0 * s_m / self._s_max - 1.0, -1.0, 1.0)
        # T_l(x) by the three-term recurrence (T_l = cos(l arccos x) on [-1, 1])
        cheb = np.empty((x.size, 1, q))
        cheb[:, 0, 0] = 1.0
        if q > 1:
            cheb[:, 0, 1] = x
        for k in range(2, q):
            cheb[:, 0, k] = 2.0 * x * cheb[:, 0, k - 1] - cheb[:, 0, k - 2]
        grid = self._grid.view(np.float64)
        out = np.empty((rel.shape[0], 12))
        step = max(32, 2**21 // (p * p * grid.shape[1] * 8))
        for a in range(0, rel.shape[0], step):
            b = min(rel.shape[0], a + step)
            vals = np.take(grid, rows[a:b].reshape(-1), axis=0).reshape(b - a, p * p, q * 12)
            a_l = np.matmul(w[a:b], vals).reshape(b - a, q, 12)
            out[a:b] = np.matmul(cheb[a:b], a_l).reshape(b - a, 12)
        return out.view(np.complex128)

    def fields_exact(
        self, points_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """E and H from the full double Fourier sum (no interpolation), chunked."""
        pts = np.asarray(points_m, dtype=float).reshape(-1, 3)
        out = np.empty((pts.shape[0], 6), dtype=complex)
        step = max(1, 2**21 // self._coeff_m.shape[1])
        for a in range(0, pts.shape[0], step):
            b = min(pts.shape[0], a + step)
            out[a:b] = self._chunk(pts[a:b])
        return out[:, :3], out[:, 3:]

    def _chunk(self, pts: NDArray[np.float64]) -> NDArray[np.complex128]:
        rel = pts - self.centre_m
        r = np.linalg.norm(rel, axis=1)
        theta = np.arccos(np.clip(rel[:, 2] / r, -1.0, 1.0))
        phi = np.arctan2(rel[:, 1], rel[:, 0])
        x = np.clip(2.0 * (1.0 / r) / self._s_max - 1.0, -1.0, 1.0)
        e_phi = np.exp(1j * np.outer(phi, self._freq))
        e_theta = np.exp(1j * np.outer(theta, self._freq))
        cheb = np.cos(np.outer(np.arccos(x), np.arange(self._q)))
        p = pts.shape[0]
        w = (e_phi @ self._coeff_m).reshape(p, self._q, self._n * 6)
        # Chebyshev sum first, then the theta series: two stacked matrix products (the
        # same sums in another order; numpy's einsum over complex stacks is several times
        # slower).
        w = np.matmul(cheb.astype(complex)[:, None, :], w).reshape(p, self._n, 6)
        a = np.matmul(e_theta[:, None, :], w).reshape(p, 6)
        return a * (np.exp(-1j * self.wavenumber_rad_m * r) / r)[:, None]


def _sample_table(
    elements: CurrentElements,
    centre_m: NDArray[np.float64],
    s_m: NDArray[np.float64],
    directions: NDArray[np.float64],
) -> NDArray[np.complex128]:
    """The kernel's r e^{jkr} (E, H) on spheres r = 1/s about the centre: a table's samples.

    Shape (len(s), directions, 6): the exact kernel's values that an
    :class:`OutgoingExpansion` is made from (the expensive part of building one).
    """
    k = elements.wavenumber_rad_m
    out = np.empty((s_m.size, directions.shape[0], 6), dtype=complex)
    for iq, s in enumerate(s_m):
        r = 1.0 / s
        e, h = elements.fields(centre_m + r * directions)
        out[iq] = np.hstack([e, h]) * (r * np.exp(1j * k * r))
    return out


#: Layout of a kept table file (raise it when the layout changes).
TABLE_FORMAT = 1


@functools.cache
def _table_stamp() -> bytes | None:
    """What a kept table depends on besides its inputs: the kernel and the sampling code.

    None (nothing kept) when the code's source cannot be read.
    """
    import inspect

    try:
        parts = [
            inspect.getsource(f).encode() for f in (CurrentElements, _sample_table, node_index)
        ]
    except (OSError, TypeError):  # installed without sources: built afresh every run
        return None
    return f"{TABLE_FORMAT}|{np.__version__}|".encode() + b"|".join(parts)


def _kept_table_samples(
    elements: CurrentElements,
    centre_m: NDArray[np.float64],
    s_m: NDArray[np.float64],
    directions: NDArray[np.float64],
) -> NDArray[np.complex128]:
    """:func:`_sample_table`, kept on disk next to the NEC-2 solutions.

    The digest covers every input array's bytes (the segments, radii, currents,
    wavenumber, centre, radii of the spheres and directions) and :func:`_table_stamp`, so a
    kept file is read back only for exactly the same sources sampled the same way: the
    table built from it is the one built afresh, to the last bit.  The same store,
    atomic write and rebuild of an unreadable file as NEC-2's solutions
    (:func:`_kept_solution`).
    """
    parts = (
        elements.starts_m,
        elements.ends_m,
        elements.radii_m,
        elements.start_currents_a,
        elements.end_currents_a,
        np.float64(elements.wavenumber_rad_m),
        np.asarray(centre_m, dtype=np.float64),
        np.asarray(s_m, dtype=np.float64),
        np.asarray(directions, dtype=np.float64),
    )
    shape = (s_m.size, directions.shape[0], 6)

    def compute() -> dict[str, NDArray]:
        return {"samples": _sample_table(elements, centre_m, s_m, directions)}

    stamp = _table_stamp()
    if stamp is None:
        return compute()["samples"]
    byte_parts = tuple(
        np.ascontiguousarray(p).tobytes() + repr((p.dtype.str, p.shape)).encode() for p in parts
    )
    samples = _kept_solution("table", byte_parts, compute, stamp).get("samples")
    if samples is None or samples.shape != shape or samples.dtype != np.complex128:
        samples = compute()["samples"]
    return samples


class ClusteredElements:
    """The elements' exact fields near the sources, each cluster's far part tabulated.

    Close to a structure (within the whole table's region, 2.5 times its radius) every
    point would need the kernel of every segment.  Here the segments are split into
    spatial clusters (recursive halving at the median of the segment centres, along the
    longest extent, the same on every machine), and each cluster radiates by its own
    outgoing-wave table (:class:`OutgoingExpansion`, about its own centre and radius)
    at points beyond 2.5 times its radius, and by the exact kernel at the points nearer
    to it.  The fields are linear in the currents, so the sum over the clusters is the
    whole field; each table is within about 1e-4 of its cluster's largest field at the
    same distance (the table's own accuracy), so the sum is within the same of the
    direct kernel, checked in tests/test_finite_ground.py.  A hierarchical split of the
    sources with a far-field expansion per group is the idea of the treecode
    (Barnes and Hut [1]_) and the fast multipole method (Greengard and Rokhlin [2]_).

    Tables are built on first use, so a cluster no point is far from costs nothing.

    Parameters
    ----------
    elements : CurrentElements
    clusters : int
        Number of clusters (a power of two; fewer when there are few segments).

    References
    ----------
    .. [1] J. Barnes and P. Hut, "A hierarchical O(N log N) force-calculation algorithm",
       *Nature* 324, 446-449 (1986), doi:10.1038/324446a0.
    .. [2] L. Greengard and V. Rokhlin, "A fast algorithm for particle simulations",
       *J. Comput. Phys.* 73(2), 325-348 (1987), doi:10.1016/0021-9991(87)90140-9.
    """

    #: Fewest segments a cluster is split into two below.
    MIN_SEGMENTS = 64

    def __init__(self, elements: CurrentElements, clusters: int = 8) -> None:
        self.elements = elements
        mid = 0.5 * (elements.starts_m + elements.ends_m)
        groups = [np.arange(elements.count)]
        while len(groups) < clusters and all(g.size >= 2 * self.MIN_SEGMENTS for g in groups):
            split = []
            for g in groups:
                pts = mid[g]
                axis = int(np.argmax(np.ptp(pts, axis=0)))
                order = g[np.argsort(pts[:, axis], kind="stable")]
                half = order.size // 2
                split += [np.sort(order[:half]), np.sort(order[half:])]
            groups = split
        self.parts = [elements.subset(g) for g in groups]
        self._tables: list[OutgoingExpansion | None] = [None] * len(self.parts)
        self.centres_m = []
        self.radii_m = []
        for part in self.parts:
            ends = np.vstack([part.starts_m, part.ends_m])
            centre = 0.5 * (ends.max(axis=0) + ends.min(axis=0))
            self.centres_m.append(centre)
            self.radii_m.append(float(np.max(np.linalg.norm(ends - centre, axis=1))))

    def _table(self, i: int) -> OutgoingExpansion:
        table = self._tables[i]
        if table is None:
            table = OutgoingExpansion(self.parts[i], self.centres_m[i])
            self._tables[i] = table
        return table

    def fields(self, points_m: ArrayLike) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """E [V/m] and H [A/m] of all the elements at points (N, 3)."""
        pts = np.asarray(points_m, dtype=float).reshape(-1, 3)
        e = np.zeros((pts.shape[0], 3), dtype=complex)
        h = np.zeros((pts.shape[0], 3), dtype=complex)
        for i, part in enumerate(self.parts):
            r = np.linalg.norm(pts - self.centres_m[i], axis=1)
            far = r >= OutgoingExpansion.INNER_FACTOR * self.radii_m[i]
            if far.any():
                e_f, h_f = self._table(i).fields(pts[far])
                e[far] += e_f
                h[far] += h_f
            near = ~far
            if near.any():
                e_n, h_n = part.fields(pts[near])
                e[near] += e_n
                h[near] += h_n
        return e, h


def _lagrange_stencil(
    t: NDArray[np.float64], p: int
) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
    """Indices and weights of p-point Lagrange interpolation on the integers at t.

    The nodes are floor(t) - p/2 + 1 ... floor(t) + p/2 (p even), so t lies in the
    middle interval; returns the node indices (N, p) and weights (N, p).
    """
    floor = np.floor(t)
    base = floor.astype(np.int64) - (p // 2 - 1)
    idx = base[:, None] + np.arange(p)[None, :]
    if p == 4:
        # the cubic's four weights written out (nodes -1, 0, 1, 2 about floor(t)):
        # the same polynomials as the loop below, in fewer passes over the points
        f = t - floor
        fp, fm, fm2 = f + 1.0, f - 1.0, f - 2.0
        w4 = np.empty(idx.shape)
        w4[:, 0] = -(f * fm * fm2) / 6.0
        w4[:, 1] = (fp * fm * fm2) / 2.0
        w4[:, 2] = -(fp * f * fm2) / 2.0
        w4[:, 3] = (fp * f * fm) / 6.0
        return idx, w4
    d = t[:, None] - idx  # distance to each node
    w = np.ones(idx.shape)
    for j in range(p):  # L_j(t) = prod over i != j of (t - x_i) / (x_j - x_i), x_j - x_i = j - i
        for i in range(p):
            if i != j:
                w[:, j] *= d[:, i] / (j - i)
    return idx, w
