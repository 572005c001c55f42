"""A monopole on a finite plate, or through the front face of a closed metal box.

Model
-----
The portable source this tool was written for is a magnetron in a small metal box
with its quarter-wave output probe through a hole in one face.  An infinite ground
plane puts exactly zero field behind such a box and over-states the gain (5.2 dBi
instead of about 2.4 dBi for a 0.20 x 0.09 x 0.15 m box, the full-wave figure the
project was given).  Here the probe and the metal it stands on are solved together
by the **method of moments**:

* the probe is a thin wire of ``length_m`` along the local +z axis, fed at its base
  by a delta-gap source;
* a ``"plate"`` is a thin perfectly conducting rectangle in the plane z = 0, a
  ``"box"`` a closed perfectly conducting box whose front face is that rectangle and
  which extends ``box_depth_m`` behind it (towards -z);
* the metal is a **wire grid** following the published rules for surfaces: segments
  at most lambda/10 (Burke & Poggio [1]_, part III), wire radius = spacing / 2 pi
  (the equal-area rule, Ludwig [2]_), graded to lambda/40 at the probe base where
  the feed current spreads into the metal (see :mod:`keepclear.antennas.moment`);
  the **fed face** (the plate, or the box face the probe stands on) is finer, cells
  at most lambda/13 (:data:`FED_FACE_SEGMENT_WAVELENGTHS`; why: "The probe's axis"
  below), the other faces of a box keep lambda/10 between the fed face's lines;
* NEC-2 ([1]_, the nec2++ engine through PyPI ``PyNEC``) solves the segment
  currents once per radiator (cached per geometry);
* the solved currents, as piecewise-sinusoidal segments, are radiated by the exact
  closed-form kernel of :meth:`keepclear.antennas.moment.CurrentElements.fields`
  within 2.5 times the metal's radius of its centre, and beyond that by the
  tabulated outgoing-wave expansion of the same currents
  (:class:`keepclear.antennas.moment.OutgoingExpansion`, within 1e-4 of the kernel
  and some 30 times cheaper a point), so a map of 1e5 points costs numpy time, not
  NEC-2 time;
* the currents are scaled so that the power they radiate (their far field
  integrated over the sphere) is ``power_w``.

Why this method: a moment method solves the currents on the plate or box, both
faces, edges and corners, so the field is right in front, beside and *behind* the
metal (where ray methods such as UTD need separate corner and creeping terms on a
box, and where an infinite ground plane says zero).  NEC-2 is the general-purpose,
public, long-validated engine for wire structures, and the wire-grid representation
of surfaces is its documented way of modelling plates and boxes ([1]_ part III,
[2]_).  Its far field of grid models agrees with measurements and surface-patch
methods to within about 1 dB (Ludwig [2]_).

The probe's axis
----------------
Straight out along the probe lies the monopole's pattern null.  A thin probe
radiates nothing along its own axis, and where the probe stands on a symmetry centre
of the face (the probe centred on a plate or box face) the metal's currents cancel
there too, pair by mirror pair: the far field on the axis is zero and what is left
at 0.1-0.3 m is the small longitudinal near field of the charges on the probe and
the face (20-29 dB under the strongest sample at 0.3 m in the full-wave cases).  It
is the sum of the probe's and the metal's contributions, which partly cancel (on
the 0.25 m plate at 0.3 m: E_z of 2.1 V/m from each, 1.1 V/m together, per watt;
found when written), so a small error in the metal's current shows large there: it
depends on how well the grid resolves the current and charge on the fed face: near
the probe's base, where the feed current spreads into the metal, and at the face's
edges, where the current turns the corner or ends.
With the probe off the face's centre (``box-probe-offset``) the mirror symmetry is
broken along one direction, the axis carries some radiation and is less sensitive.
The faces behind do not matter there (refining them to lambda/15 moves the
``box-probe`` axis by 0.01 dB; found when written).  Burke & Poggio's guideline
([1]_ part III) is an upper bound on the segment length, lambda/10, not a fineness
that converges a null: against openEMS v0.0.35 (``validation/``) the axis at 0.3 m
is, with the fed face at lambda/10, lambda/12, lambda/13, lambda/15 (others at
lambda/10): ``box-probe`` +1.10, +1.07, +0.95, +0.93 dB (converged to about
+0.9 dB); ``plate-probe`` +1.72, +1.07, +0.49, -0.47 dB, and -2.16 dB at lambda/20
(not converged: each refinement lowers it, as openEMS's own refinement from its
lambda/15 to its lambda/25 mesh lowered it by 3.2 dB); ``box-probe-offset`` +0.63,
+0.66, +0.62, +0.58 dB.  Lambda/13 is the coarsest fed face that puts every case's
axis within 1 dB, and it stays on the high (safe) side of the full-wave value; it
costs 2987 instead of 2311 segments for the 0.20 x 0.09 x 0.15 m box (NEC-2's time
grows as the cube: about 10 s instead of 5 s to build, 1.9-2.0 times), 1592 instead
of 1420 for the 0.12 x 0.10 x 0.10 m box of the bench scenario (1.3 times).  Off
the axis the finer face changes the fields by a few tenths of a dB, towards the
full-wave values.  Tried and not taken (found when written): a finer first cell at
the probe (lambda/80) or a slower grading (1.5 -> 1.3 per line) leave the plate's
axis at +2.0 and +1.3 dB; grading the fed face down to lambda/20-lambda/35 at its
edges as well is cheaper (2459-2735 segments for the box) but not monotone (the
box's axis +0.92 dB with lambda/30 at the edges, +1.09 dB with lambda/25), so no
grid of that family is safely inside 1 dB.  Every wire keeps the equal-area radius,
spacing / 2 pi.  A face too large for a lambda/13 grid within
:data:`keepclear.antennas.moment.MAX_SEGMENTS` falls back to lambda/10, with the
lambda/10 grid's margin (:data:`COARSE_GAIN_UNCERTAINTY_DB`).

Local frame
-----------
Base of the probe at the origin, probe along +z (= ``axis``, the face's outward
normal), ``ground_up`` along +y, the face's width along +x = up x axis.  The face
centre is at (-w_off, -h_off, 0) with ``ground_offset_m = [w_off, h_off]``.

Validity
--------
Perfect conductors, free space, a thin probe (radius below lambda/100).  The grid
is limited to :data:`keepclear.antennas.moment.MAX_SEGMENTS` segments (square plates up
to about 3 wavelengths with the fed face at lambda/13, up to about 4 at lambda/10);
for larger metal the infinite ground plane is the better model anyway.  Inside the
box the grid's leakage field is reported as computed; nobody stands there
(:meth:`FiniteGroundMonopole.inside_or_on`).

References
----------
.. [1] G. J. Burke and A. J. Poggio, *Numerical Electromagnetics Code (NEC) --
   Method of Moments*, LLNL UCID-18834, 1981, part III (modelling guidelines; wire
   grids; the average gain test).
.. [2] A. C. Ludwig, "Wire grid modeling of surfaces", *IEEE Trans. Antennas
   Propag.* 35(9), 1045-1048 (1987), doi:10.1109/TAP.1987.1144220.
.. [3] A. Weiner, "Monopole antennas on circular disks", and M. M. Weiner,
   *Monopole Antennas*, Marcel Dekker, 2003, ch. 2-4 (finite ground planes: the
   peak of the pattern tilts up from the plane; from memory).
.. [4] J. E. Storer, "Impedance of thin-wire loop antennas" / "The radiation
   pattern of an antenna over a circular ground screen", Harvard Cruft Lab. TR 1951
   (from memory).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import moment
from .base import ModelInputError, Placement
from .wire import _validate_wire
from .wire_grid import SolvedWireRadiator

#: Ground descriptions this model handles (``"infinite"`` is :class:`wire.Monopole`).
GROUND_KINDS = ("plate", "box")
#: Largest probe segment, in wavelengths.
PROBE_SEGMENT_WAVELENGTHS = 1.0 / 20.0
#: Longest segment on the fed face (the plate, or the box face the probe stands on), in
#: wavelengths: the coarsest that puts the probe's axis within 1 dB of full wave.
FED_FACE_SEGMENT_WAVELENGTHS = 1.0 / 13.0
#: Keep-out margin [dB]: the largest error in front against the openEMS v0.0.35 cases
#: (box-probe, +0.95 dB on the probe axis at 0.3 m; see FiniteGroundMonopole).
GAIN_UNCERTAINTY_DB = 1.0
#: Keep-out margin [dB] of a fed face gridded at lambda/10 (too large for lambda/13): the
#: largest error in front of that grid (plate-probe, +1.72 dB on the probe axis at 0.3 m).
COARSE_GAIN_UNCERTAINTY_DB = 1.8


def _pair(value: ArrayLike, name: str, positive: bool) -> tuple[float, float]:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise ModelInputError(name, f"{name} must be two numbers, got {value!r}") from None
    if arr.shape != (2,) or not np.all(np.isfinite(arr)):
        raise ModelInputError(name, f"{name} must be two finite numbers [m], got {value!r}")
    if positive and np.any(arr <= 0.0):
        raise ModelInputError(name, f"{name} must be two sizes > 0 m, got {value!r}")
    return float(arr[0]), float(arr[1])


def _face_count(lines_u: NDArray[np.float64], lines_v: NDArray[np.float64]) -> int:
    """Number of segments of a full rectangular grid on these lines."""
    return int(lines_u.size * (lines_v.size - 1) + lines_v.size * (lines_u.size - 1))


def checked_inputs(
    frequency_hz: float,
    length_m: float | None,
    *,
    ground: str,
    ground_size_m: ArrayLike,
    ground_offset_m: ArrayLike = (0.0, 0.0),
    box_depth_m: float | None = None,
    wire_radius_m: float | None = None,
) -> tuple[float, float, tuple[float, float], tuple[float, float], float]:
    """The checks of :class:`FiniteGroundMonopole`'s inputs, without solving it.

    Returns the wire's length and radius [m], the face's size and the probe's offset
    [m], and the box's depth (0 for a plate) [m].

    Raises
    ------
    ModelInputError
        As the constructor raises it, naming the parameter.
    """
    if ground not in GROUND_KINDS:
        raise ModelInputError(
            "ground", f"ground must be one of {', '.join(GROUND_KINDS)}, got {ground!r}"
        )
    length, radius = _validate_wire(frequency_hz, length_m, wire_radius_m, 0.25, "monopole")
    width, height = _pair(ground_size_m, "ground_size_m", positive=True)
    off_w, off_h = _pair(ground_offset_m, "ground_offset_m", positive=False)
    if abs(off_w) > 0.5 * width or abs(off_h) > 0.5 * height:
        raise ModelInputError(
            "ground_offset_m",
            f"ground_offset_m = [{off_w:g}, {off_h:g}] puts the probe's base off the "
            f"{width:g} x {height:g} m face: each offset must be within half the size "
            f"(|w| <= {0.5 * width:g} m, |h| <= {0.5 * height:g} m)",
        )
    if ground == "box":
        if box_depth_m is None:
            raise ModelInputError("box_depth_m", 'box_depth_m is required for ground = "box"')
        depth = float(box_depth_m)
        if not (math.isfinite(depth) and depth > 0.0):
            raise ModelInputError("box_depth_m", f"box_depth_m must be > 0 m, got {box_depth_m!r}")
    else:
        if box_depth_m is not None:
            raise ModelInputError(
                "box_depth_m", 'box_depth_m applies to ground = "box" only, not to a plate'
            )
        depth = 0.0
    return length, radius, (width, height), (off_w, off_h), depth


class FiniteGroundMonopole(SolvedWireRadiator):
    """Base-fed monopole on a finite plate or through the face of a closed box.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    power_w : float
        Radiated power [W] (lossless metal: the delivered power).
    length_m : float, optional
        Probe height above the face; default lambda/4 [m].
    ground : str
        ``"plate"`` or ``"box"``.
    ground_size_m : array_like, shape (2,)
        Plate, or the box's front face: [width, height] [m], each > 0.
    ground_offset_m : array_like, shape (2,)
        The probe's base from the face centre, [along width, along up] [m]; the base
        must lie on the face.
    box_depth_m : float, optional
        ``"box"`` only: how far the box extends behind the face [m], > 0.
    placement : Placement, optional
        Probe base and axes: ``Placement.from_axes(position_m, axis, ground_up)``.
    wire_radius_m : float, optional
        Probe radius; default min(lambda/1000, length/50) [m].
    max_segment_wavelengths : float, optional
        Longest grid segment, in wavelengths; default lambda/10 (Burke & Poggio [1]_).
    fed_face_segment_wavelengths : float, optional
        Longest segment on the fed face, in wavelengths (at most
        ``max_segment_wavelengths``); default :data:`FED_FACE_SEGMENT_WAVELENGTHS`.

    Attributes
    ----------
    gain_uncertainty_db : float
        1.0 dB: the largest error in front (within 60 deg of the probe axis) against
        the full-wave validation, case ``box-probe`` (openEMS v0.0.35, 30 mm probe
        through the 0.20 x 0.09 m face of a 0.15 m deep box, validation/README.md):
        +0.95 dB at 0.3 m on the probe's axis, an over-prediction in the monopole's
        axial null (see "The probe's axis" above; openEMS's two meshes differ by 0.7 dB
        there).  Off the axis the errors in front lie within -0.6/+0.6 dB in the three
        probe cases (``box-probe``, ``plate-probe``, ``box-probe-offset``) and the peak
        directivities agree within 0.35 dB.  The margin is the largest error in front,
        as the project's rule for keep-out margins asks (tests/test_fullwave.py).  A
        fed face gridded at lambda/10 (a face too large for lambda/13) carries
        :data:`COARSE_GAIN_UNCERTAINTY_DB` instead.
    fed_face_segment_m : float
        Longest segment of the fed face as built [m].
    radiation_resistance_ohm : float
        2 P / |I_feed|^2 with the feed current of the scaled solution [ohm].

    Raises
    ------
    ModelInputError
        Naming ``ground``, ``ground_size_m``, ``ground_offset_m``, ``box_depth_m``,
        ``length_m`` or ``wire_radius_m``.
    """

    kind = "monopole"

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        length_m: float | None = None,
        *,
        ground: str,
        ground_size_m: ArrayLike,
        ground_offset_m: ArrayLike = (0.0, 0.0),
        box_depth_m: float | None = None,
        placement: Placement | None = None,
        wire_radius_m: float | None = None,
        max_segment_wavelengths: float = moment.MAX_SEGMENT_WAVELENGTHS,
        fed_face_segment_wavelengths: float = FED_FACE_SEGMENT_WAVELENGTHS,
    ) -> None:
        super().__init__(frequency_hz, power_w, placement)
        length, radius, (width, height), (off_w, off_h), depth = checked_inputs(
            self.frequency_hz,
            length_m,
            ground=ground,
            ground_size_m=ground_size_m,
            ground_offset_m=ground_offset_m,
            box_depth_m=box_depth_m,
            wire_radius_m=wire_radius_m,
        )
        self.ground = ground
        self.length_m = length
        self.height_m = length
        self.wire_radius_m = radius
        self.ground_size_m = (width, height)
        self.ground_offset_m = (off_w, off_h)
        self.box_depth_m = depth if ground == "box" else None
        lam = self.wavelength_m
        self._max_segment_m = max_segment_wavelengths * lam
        # The fed face at its own (finer) grid if the whole structure then fits NEC-2's
        # bound; otherwise at the grid of the other faces, with that grid's margin.
        face_m = min(fed_face_segment_wavelengths, max_segment_wavelengths) * lam
        self.gain_uncertainty_db = GAIN_UNCERTAINTY_DB
        if self._segment_count(face_m) > moment.MAX_SEGMENTS:
            face_m = self._max_segment_m
            self.gain_uncertainty_db = COARSE_GAIN_UNCERTAINTY_DB
        self.fed_face_segment_m = face_m
        # The moment-method solution and its outgoing-wave table depend only on the
        # geometry, the frequency and the power: a scenario loaded again (an option, a
        # second command in the same process) reuses them.
        self._geometry_key = (
            self.frequency_hz,
            ground,
            length,
            radius,
            width,
            height,
            off_w,
            off_h,
            depth,
            float(max_segment_wavelengths),
            face_m,
        )
        self._use_solved()
        # Both paths bound their own scratch (the kernel by pairs, the expansion by its
        # table): a chunk of points costs about this much each.
        self.bytes_per_point = 32 * 1024
        feed = self.elements.start_currents_a[self.structure.feed_segment]
        self.radiation_resistance_ohm = (
            self.power_w / abs(feed) ** 2 if self.power_w > 0 and abs(feed) > 0 else math.nan
        )

    # ------------------------------------------------------------------ geometry
    def _face_bounds(self) -> tuple[float, float, float, float]:
        """x0, x1, y0, y1 of the face in the local frame [m]."""
        (w, h), (ow, oh) = self.ground_size_m, self.ground_offset_m
        return -ow - 0.5 * w, -ow + 0.5 * w, -oh - 0.5 * h, -oh + 0.5 * h

    def _face_lines(self, face_step_m: float) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Grid lines of the fed face: graded from lambda/40 at the probe to ``face_step_m``."""
        fine = min(moment.FEED_SPACING_WAVELENGTHS * self.wavelength_m, face_step_m)
        x0, x1, y0, y1 = self._face_bounds()
        xs = moment.graded_lines(x0, x1, 0.0, face_step_m, fine)
        ys = moment.graded_lines(y0, y1, 0.0, face_step_m, fine)
        return xs, ys

    def _probe_count(self) -> int:
        lam = self.wavelength_m
        return max(4, math.ceil(self.length_m / (PROBE_SEGMENT_WAVELENGTHS * lam) - 1e-9))

    def _segment_count(self, face_step_m: float) -> int:
        """Segments of the probe and the grid with the fed face at ``face_step_m``."""
        max_step_m = self._max_segment_m
        xs, ys = self._face_lines(face_step_m)
        n_grid = _face_count(xs, ys)
        if self.ground == "box":
            assert self.box_depth_m is not None
            xt, yt = moment.thinned_lines(xs, max_step_m), moment.thinned_lines(ys, max_step_m)
            zs = moment.uniform_lines(-self.box_depth_m, 0.0, max_step_m)
            n_grid += _face_count(xt, yt) + 2 * _face_count(xt, zs) + 2 * _face_count(yt, zs)
        return n_grid + self._probe_count()

    def _structure(self) -> moment.WireStructure:
        max_step_m = self._max_segment_m
        xs, ys = self._face_lines(self.fed_face_segment_m)
        n_probe = self._probe_count()
        n_total = self._segment_count(self.fed_face_segment_m)
        if n_total > moment.MAX_SEGMENTS:
            raise ModelInputError(
                "ground_size_m",
                f"the {self.ground} is too large for the wire-grid model at "
                f"{self.frequency_hz:g} Hz (about {n_total} segments, at most "
                f'{moment.MAX_SEGMENTS}); for metal this large use ground = "infinite"',
            )
        if self.ground == "plate":
            ex, ey = np.eye(3)[0], np.eye(3)[1]
            starts, ends, radii = moment.face_grid(np.zeros(3), ex, ey, xs, ys)
        else:
            assert self.box_depth_m is not None
            starts, ends, radii = moment.box_grid(xs, ys, self.box_depth_m, max_step_m)
        z = self.length_m * np.arange(n_probe + 1) / n_probe
        probe_a = np.column_stack([np.zeros(n_probe), np.zeros(n_probe), z[:-1]])
        probe_b = np.column_stack([np.zeros(n_probe), np.zeros(n_probe), z[1:]])
        feed = starts.shape[0]
        return moment.WireStructure.from_segments(
            np.vstack([starts, probe_a]),
            np.vstack([ends, probe_b]),
            np.concatenate([radii, np.full(n_probe, self.wire_radius_m)]),
            feed,
        )

    def _local_outline(self) -> NDArray[np.float64]:
        """The plate's four corners, or the box's eight (front face, then back) [m]."""
        x0, x1, y0, y1 = self._face_bounds()
        face = np.array([[x0, y0, 0.0], [x1, y0, 0.0], [x1, y1, 0.0], [x0, y1, 0.0]])
        if self.ground != "box" or self.box_depth_m is None:
            return face
        return np.vstack([face, face - np.array([0.0, 0.0, self.box_depth_m])])

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Inside the box, or within ``tolerance_m`` of the plate, a box face or the probe."""
        x, y, z = points_local_m[:, 0], points_local_m[:, 1], points_local_m[:, 2]
        x0, x1, y0, y1 = self._face_bounds()
        tol = float(tolerance_m)
        over_face = (x >= x0 - tol) & (x <= x1 + tol) & (y >= y0 - tol) & (y <= y1 + tol)
        if self.ground == "box" and self.box_depth_m is not None:
            metal = over_face & (z >= -self.box_depth_m - tol) & (z <= tol)
        else:
            metal = over_face & (np.abs(z) <= tol)
        zc = np.clip(z, 0.0, self.length_m)
        wire = np.hypot(np.hypot(x, y), z - zc) <= self.wire_radius_m + tol
        return np.asarray(metal | wire)

    def _power_changed(self) -> None:
        """Follow a new ``power_w`` (:meth:`Radiator.with_power`): the currents scale."""
        super()._power_changed()
        feed = self.elements.start_currents_a[self.structure.feed_segment]
        self.radiation_resistance_ohm = (
            self.power_w / abs(feed) ** 2 if self.power_w > 0 and abs(feed) > 0 else math.nan
        )
