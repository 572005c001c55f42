"""An open rectangular waveguide solved with its walls: a moment-method wire grid.

Model
-----
The aperture model of an open guide (:class:`keepclear.antennas.aperture.OpenWaveguide`)
radiates the TE10 field of the opening alone.  A real open guide ends in metal walls
that carry current on their outer faces, and its opening is mismatched (|S11| about
0.27 for WR-340 at 2.45 GHz); beside and behind the guide, where a hand adjusts the
launcher, those currents set the field.  Here the whole guide is solved by the
**method of moments**, the same engine as the finite-ground monopole
(:mod:`keepclear.antennas.moment`, :mod:`keepclear.antennas.wire_grid`):

* the guide is a straight perfectly conducting tube of the inner cross-section
  a x b (broad along local x, narrow along local y, the E field), open at z = 0,
  boresight +z, running back ``guide_length_m`` to a short at z = -L;
* it is fed as a magnetron launcher is: a probe from the centre of the broad wall
  (y = -b/2), 0.6 b long, a quarter guide wavelength in front of the short, with a
  delta-gap source at its base.  Only TE10 propagates; the higher modes the probe
  excites decay by exp(-alpha d) over the distance d to the opening (for WR-340 at
  2.45 GHz TE20 decays by 51 Np/m: 1e-5 over the default 0.26 m), so the opening
  sees the TE10 mode and its reflection, as in the guide as built;
* walls and short are a **wire grid** on the inner surfaces (thin walls): cells at
  most lambda/12 (:data:`WALL_CELL_WAVELENGTHS`; finer than the lambda/10 of Burke &
  Poggio [1]_ part III so that the grid holds the guided wave in, see "The walls must
  shield" below); the ring and short wires take radius = spacing / 2 pi (the
  equal-area rule, Ludwig [2]_), the axial wires the largest radius NEC-2's thin-wire
  kernel allows; every radius is capped at a quarter of its own segment and 0.4 of the
  shortest segment meeting it at either end, the probe's included
  (:data:`NEIGHBOUR_RADIUS_PER_LENGTH`, as for the horn; see
  :mod:`keepclear.antennas.moment`);
* with ``flange_m = [w, h]`` the flange is a thin perfectly conducting plate in the
  aperture plane z = 0, w along x and h along y, centred on the opening, gridded by the
  same rules (cells at most lambda/10, equal-area radii, the same caps,
  :func:`keepclear.antennas.moment.face_grid`): across the opening its grid lines are
  the rim ring's own, so every plate wire that meets the rim ends on a node of the
  walls' grid (NEC-2 joins wires only at shared end points, [1]_ part III), and beyond
  the rim the plate is divided evenly out to its edges; the opening stays open.  The
  walls behind the plate are solved with it (their outer faces are shielded by the
  plate, not removed);
* NEC-2 solves the currents once per geometry; the currents are scaled so that the
  power they radiate is ``power_w`` (the contract's meaning: the power put into free
  space), and radiated by the exact kernel or its outgoing-wave expansion.

Why this method: the fields in front, beside and behind an unflanged guide are set
by the aperture field *and* the currents that the rim sends round onto the outer
walls; a moment method solves both together, with the opening's own mismatch, with
no ray or edge approximation.  Ray models (equivalent edge currents on top of the
aperture integral, :mod:`keepclear.antennas.walls`) were held against the same
full-wave data and missed by -3.3 to +6.8 dB beside and behind.

Validation
----------
Against openEMS v0.0.35 (FDTD; ``validation/``, cases ``guide-wr340`` and
``guide-wr430``: 0.30 m guides closed by a short, 2 mm walls, no flange), at 63 points
each from 0.1 to 0.4 m in front, beside and behind:

* in front (within 60 deg): -0.83 to +0.46 dB;
* beside and behind: -2.85 to +1.08 dB (the lowest straight behind WR-430's short, 0.1 m
  behind it);
* peak directivity: WR-340 6.42 against 6.54 dBi, WR-430 7.76 against 7.82 dBi.

``gain_uncertainty_db`` is the largest error in front (0.83 dB, WR-340, stated as
0.9 dB).  The full-wave guides have 2 mm walls, the model thin ones; the default length
is the validated one.  The pattern behind moves by about 1 dB when the length changes
from 0.15 to 0.45 m (checked when written with the lambda/10 grid below).

On a flange (case ``flanged-wr340``: the same WR-340 guide, 0.30 m, on a 2 mm plate
0.25 m along the broad wall x 0.20 m along E whose front face is the aperture plane;
the model: 2,820 segments, its plate thin), at 61 points from 0.1 to 0.4 m:

* in front (within 60 deg): -0.66 to +0.31 dB (the rim model of
  :mod:`keepclear.antennas.walls` is -2.6 to +4.0 dB: it misses the E-plane lobe at
  30-35 deg that the flange's edges raise, which the grid solves);
* beside and behind: -1.94 to +5.21 dB, the highest 5 cm behind the plate (H plane
  120 deg at 0.1 m, where full wave is 33 dB under the front; +4.08 dB at H 135 deg);
* peak directivity 7.36 against 7.17 dBi.

Its ``gain_uncertainty_db`` is that case's largest error in front,
:data:`FLANGE_GAIN_UNCERTAINTY_DB` = 0.7 dB.  As the flange shrinks to the guide's outer
size the pattern tends to the bare guide's (within 0.41 dB in front for a 2 mm collar;
tests/test_guide_grid.py).

The walls must shield
---------------------
Inside the guide the TE10 wave runs at the walls, while 5-7 cm behind a flange the
full-wave field is 33 dB under the front: whatever of the interior field the walls'
grid lets through shows there.  A grid of parallel round wires, spacing d and radius r,
is a sheet of inductive reactance X / eta0 = (d / lambda) ln(1 / (1 - exp(-2 pi r / d)))
(Marcuvitz [4]_ sec. 5.21, the grating of round wires), letting through about
2 X / eta0 of the field at it.  The earlier grid (cells lambda/10, equal-area radii
throughout, capped at a quarter of the shortest neighbour) had X / eta0 = 0.041 on its
axial wires and 0.046 on its ring wires, and on the flange of ``flanged-wr340`` was
+8.23 dB (H 120 deg 0.1 m) and +7.21 dB (H 135 deg 0.1 m) over full wave; the bare
guides passed (-2.5 to +2.6 dB beside and behind, peak directivity 6.52 and 8.05 dBi).
Measured on that case (H 120 deg 0.1 m; found when written):

* the leak is the walls', everywhere along them: halving the wire radius on the
  narrow walls only, the broad walls only, the front or the back half, raised the point
  to +15.1 to +17.5 dB (the whole: +20.3 dB); refining the plate alone (lambda/15,
  lambda/20) or halving its wires' radius moved it by 0.6 dB at most;
* the axial wires, which carry the TE10 wave's longitudinal wall current, are the lever:
  1.4 times their equal-area radius gives +6.8 dB, the kernel's limit +6.7 dB; thicker
  *ring* wires raise the point (1.4 times: +11.7 dB, +12.0 dB at H 135 deg; all wires
  to X / eta0 = 0.03: +12.0 dB), so the ring wires keep the equal-area radius;
* finer cells: lambda/12 round the rings +7.2 dB, along the axis too +6.6 dB
  (rings every lambda/14 alone: +8.1 dB);
* lambda/12 cells with the axial wires at the kernel's limit (X / eta0 at most 0.018,
  0.037 on the ring wires; the grid here): +5.27 dB, and the bare guides closer to
  full wave too (above); the same with the rings every lambda/10 (1,620 segments bare
  instead of 1,980): +5.98 dB, too close to the +6 dB the project allows.

A test holds every wall wire's X / eta0 (tests/test_guide_grid.py).

Validity and limits
-------------------
Perfect conductors, free space, a flat rectangular flange in the aperture plane or
none.  The structure is limited to :data:`MAX_SEGMENTS` segments (a bare WR-340 guide up
to about 0.63 m long at 2.45 GHz, 1,980 segments at the default 0.30 m; the default
0.30 m WR-340 guide on a flange up to about 0.35 x 0.35 m, 3,912 segments, or
0.40 x 0.30 m): :func:`segments_needed` tells a builder beforehand,
and the scenario reader then falls back to the rim model of
:mod:`keepclear.antennas.walls`.
Inside the guide the grid's field is reported as computed; nobody stands there
(:meth:`GridOpenWaveguide.inside_or_on`), nor within 1 mm of the flange.

References
----------
.. [1] G. J. Burke and A. J. Poggio, *Numerical Electromagnetics Code (NEC) --
   Method of Moments*, LLNL UCID-18834, 1981, part III (wire modelling guidelines;
   wire grids; from memory of the 1981 edition).
.. [2] A. C. Ludwig, "Wire grid modeling of surfaces", *IEEE Trans. Antennas
   Propag.* 35(9), 1045-1048 (1987), doi:10.1109/TAP.1987.1144220.
.. [3] D. M. Pozar, *Microwave Engineering*, 4th ed., Wiley, 2012, sec. 3.3 (TE10,
   cut-off and attenuation of the higher modes) and sec. 4.13 (probe feeds of a guide).
.. [4] N. Marcuvitz, *Waveguide Handbook*, MIT Radiation Laboratory Series vol. 10,
   McGraw-Hill, 1951, sec. 5.21 (inductive obstacles: grating of round wires; from
   memory of the edition).
"""

from __future__ import annotations

import math
from typing import Any, Final

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import moment
from .aperture import OpenWaveguide
from .aperture.radiator import inside_guide
from .base import ModelInputError
from .horn import PyramidalHorn, inside_horn
from .walls import DEFAULT_WALL_M, check_flange
from .wire_grid import SolvedWireRadiator

#: Default length of the guide behind the opening [m]: the validated full-wave length
#: (a launcher section and a short straight run; common practice, no source).
DEFAULT_GUIDE_LENGTH_M: Final[float] = 0.30
#: Least guide length, in guide wavelengths (the probe sits lambda_g / 4 from the short).
MIN_GUIDE_LENGTH_GUIDE_WAVELENGTHS: Final[float] = 0.75
#: Largest structure this model solves (NEC-2 time grows as N^3: a guide on a
#: 0.35 x 0.35 m flange, 3,912 segments, builds in 22 s on a busy 2-core machine; its
#: matrix takes 245 MB, the process 590 MB at its peak).  Below the engine's own bound,
#: :data:`keepclear.antennas.moment.MAX_SEGMENTS`.
MAX_SEGMENTS: Final[int] = 3950
#: Largest cell of the grid, in wavelengths (Burke & Poggio, part III).
CELL_WAVELENGTHS: Final[float] = moment.MAX_SEGMENT_WAVELENGTHS
#: Largest cell of the open guide's walls and short, in wavelengths: finer than
#: :data:`CELL_WAVELENGTHS` so that the walls hold the guided wave in (module docstring,
#: "The walls must shield"); the flange plate beyond the rim keeps :data:`CELL_WAVELENGTHS`.
WALL_CELL_WAVELENGTHS: Final[float] = 1.0 / 12.0
#: Largest radius of a guide's or a horn's grid wire as a fraction of the shortest
#: neighbour meeting it, the launcher probe included (a neighbour's centre, its match
#: point, stays outside the wire); its own segment caps it at a quarter
#: (:data:`keepclear.antennas.moment.MAX_RADIUS_PER_LENGTH`).  Both grids have short
#: segments at junctions (the horn's ring wires split at the symmetry planes, the throat's
#: and the short's rings three times finer than the feed's); a quarter of those thinned the
#: wires meeting them to a leaky grid (GridHorn, Notes).
NEIGHBOUR_RADIUS_PER_LENGTH: Final[float] = 0.4
#: Probe length, in units of the narrow dimension b.
PROBE_LENGTH_PER_NARROW: Final[float] = 0.6
#: Probe segment, in wavelengths, and its radius [m] (a launcher antenna's thickness).
PROBE_SEGMENT_WAVELENGTHS: Final[float] = 1.0 / 20.0
PROBE_RADIUS_M: Final[float] = 0.6e-3
#: Keep-out margin [dB]: the largest error in front against openEMS v0.0.35
#: (guide-wr340, -0.83 dB; see the module docstring).
GAIN_UNCERTAINTY_DB: Final[float] = 0.9
#: Keep-out margin [dB] of a guide with its flange on the grid: the largest error in front
#: against openEMS v0.0.35 (flanged-wr340, -0.66 dB at H 45 deg 0.1 m; see the module
#: docstring).
FLANGE_GAIN_UNCERTAINTY_DB: Final[float] = 0.7


def _counts(broad_m: float, narrow_m: float, cell_m: float) -> tuple[int, int]:
    """Cells across the broad (even: the probe stands on its centre line) and narrow walls."""
    nx = max(2, math.ceil(broad_m / cell_m - 1e-9))
    nx += nx % 2
    ny = max(1, math.ceil(narrow_m / cell_m - 1e-9))
    return nx, ny


def _ring(broad_m: float, narrow_m: float, nx: int, ny: int, z_m: float) -> NDArray[np.float64]:
    """Grid nodes round the cross-section at z, in order (nx cells on x, ny on y)."""
    xs = -0.5 * broad_m + broad_m * np.arange(nx + 1) / nx
    ys = -0.5 * narrow_m + narrow_m * np.arange(ny + 1) / ny
    pts = (
        [(x, -0.5 * narrow_m) for x in xs[:-1]]
        + [(0.5 * broad_m, y) for y in ys[:-1]]
        + [(x, 0.5 * narrow_m) for x in xs[::-1][:-1]]
        + [(-0.5 * broad_m, y) for y in ys[::-1][:-1]]
    )
    return np.array([(x, y, z_m) for x, y in pts])


def _axial_lines(length_m: float, probe_z_m: float, cell_m: float) -> NDArray[np.float64]:
    """Ring positions from the short (z = -L) to the opening (z = 0), one at the probe."""
    back = moment.uniform_lines(-length_m, probe_z_m, cell_m)
    front = moment.uniform_lines(probe_z_m, 0.0, cell_m)
    return np.concatenate([back, front[1:]])


def segments_needed(
    broad_m: float,
    narrow_m: float,
    frequency_hz: float,
    guide_length_m: float,
    flange_m: tuple[float, float] | None = None,
) -> float:
    """Number of segments of the grid (walls, short, probe, flange), without building it.

    ``flange_m = (w, h)`` adds the flange's plate (:func:`_flange_grid`); it must be at
    least the opening's size (:func:`keepclear.antennas.walls.check_flange` checks it).
    """
    lam = moment.C_M_S / frequency_hz
    cell = CELL_WAVELENGTHS * lam
    wall_cell = WALL_CELL_WAVELENGTHS * lam
    nx, ny = _counts(broad_m, narrow_m, wall_cell)
    guide_wavelength = _guide_wavelength_m(broad_m, frequency_hz)
    if not (math.isfinite(guide_wavelength) and math.isfinite(guide_length_m)):
        return math.inf  # type: ignore[return-value]
    zs = _axial_lines(guide_length_m, -guide_length_m + 0.25 * guide_wavelength, wall_cell)
    per_ring = 2 * (nx + ny)
    walls = per_ring * zs.size + per_ring * (zs.size - 1)
    short = nx * (ny - 1) + ny * (nx - 1)
    flange = _flange_segments(broad_m, narrow_m, nx, ny, flange_m, cell)
    return walls + short + flange + _probe_segments(narrow_m, lam)


def _flange_segments(
    broad_m: float,
    narrow_m: float,
    nx: int,
    ny: int,
    flange_m: tuple[float, float] | None,
    cell_m: float,
) -> int:
    """Segments of the flange plate of :func:`_flange_grid` (0 without a flange)."""
    if flange_m is None:
        return 0
    xs, ys = _flange_lines(broad_m, narrow_m, nx, ny, flange_m, cell_m)
    # The plate's whole grid less the opening's cells and its rim (the walls' ring).
    whole = xs.size * (ys.size - 1) + ys.size * (xs.size - 1)
    return whole - ((nx + 1) * ny + (ny + 1) * nx)


def _flange_lines(
    broad_m: float,
    narrow_m: float,
    nx: int,
    ny: int,
    flange_m: tuple[float, float],
    cell_m: float,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Grid lines of a flange plate: the opening's own lines, then even steps to its edges.

    Across the opening the lines are those of the guide's rim ring (:func:`_ring`), so
    every wire of the plate that meets the rim ends on a node of the walls' grid (NEC-2
    joins wires only at shared end points, Burke & Poggio, part III); outside it the
    plate is divided evenly, at most ``cell_m`` apart, out to the flange's edges.
    """
    out = []
    for inner, cells, outer in ((broad_m, nx, flange_m[0]), (narrow_m, ny, flange_m[1])):
        across = -0.5 * inner + inner * np.arange(cells + 1) / cells
        rim = moment.uniform_lines(0.5 * inner, max(0.5 * outer, 0.5 * inner), cell_m)[1:]
        out.append(np.concatenate([-rim[::-1], across, rim]))
    return out[0], out[1]


def _flange_grid(
    broad_m: float,
    narrow_m: float,
    nx: int,
    ny: int,
    flange_m: tuple[float, float],
    cell_m: float,
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Wires of the flange plate in z = 0 round an opening of a x b (the opening left open).

    The plate's rectangular grid (:func:`keepclear.antennas.moment.face_grid`: equal-area
    radii) on :func:`_flange_lines`, less every wire inside or on the opening's rim (the
    rim's wires belong to the walls' grid).
    """
    xs, ys = _flange_lines(broad_m, narrow_m, nx, ny, flange_m, cell_m)
    ex, ey = np.eye(3)[0], np.eye(3)[1]
    s, e, r = moment.face_grid(np.zeros(3), ex, ey, xs, ys)
    mid = 0.5 * (s + e)
    tol = 1e-9
    opening = (np.abs(mid[:, 0]) <= 0.5 * broad_m + tol) & (
        np.abs(mid[:, 1]) <= 0.5 * narrow_m + tol
    )
    return s[~opening], e[~opening], r[~opening]


def _probe_segments(narrow_m: float, wavelength_m: float) -> int:
    """Segments of the launcher probe (at most lambda/20 each, at least 3)."""
    length = PROBE_LENGTH_PER_NARROW * narrow_m
    return max(3, math.ceil(length / (PROBE_SEGMENT_WAVELENGTHS * wavelength_m)))


def _guide_wavelength_m(broad_m: float, frequency_hz: float) -> float:
    lam = moment.C_M_S / frequency_hz
    ratio = lam / (2.0 * broad_m)
    return lam / math.sqrt(1.0 - ratio * ratio) if ratio < 1.0 else math.inf


def default_guide_length_m(broad_m: float, frequency_hz: float) -> float:
    """The length used when the scenario gives none: 0.30 m, or 0.75 lambda_g if longer."""
    lg = _guide_wavelength_m(broad_m, frequency_hz)
    return max(DEFAULT_GUIDE_LENGTH_M, MIN_GUIDE_LENGTH_GUIDE_WAVELENGTHS * lg)


class _SolvedOpening(SolvedWireRadiator):
    """A guide or horn solved with its metal, described through its aperture model.

    The aperture model gives the frequency, power and placement, the TE10 mode, the
    boresight and the opening's size (the Fraunhofer distance's D).
    """

    def __init__(self, aperture: OpenWaveguide | PyramidalHorn) -> None:
        super().__init__(aperture.frequency_hz, aperture.power_w, aperture.placement)
        self.aperture = aperture
        self.mode = aperture.mode

    @property
    def boresight(self) -> NDArray[np.float64]:
        """The opening's normal in scenario axes [1]."""
        return self.aperture.boresight

    #: The flange (w, h) in the aperture plane [m], or None for an opening in bare walls.
    flange_m: tuple[float, float] | None = None

    @property
    def radiating_dimension_m(self) -> float:
        """The opening's size (the Fraunhofer distance's D), or the flange's diagonal.

        The walls and feed solved behind the opening (in ``largest_dimension_m``, which
        bounds the sources for the field evaluation) do not set the far-field distance; a
        flange's edges radiate with the opening (they reshape the E plane), so a flange
        does.
        """
        d = self.aperture.radiating_dimension_m
        return d if self.flange_m is None else max(d, float(np.hypot(*self.flange_m)))

    def _on_flange(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Points within ``tolerance_m`` of the flange plate (none without a flange)."""
        p = points_local_m
        if self.flange_m is None:
            return np.zeros(p.shape[0], dtype=bool)
        w, h = 0.5 * self.flange_m[0] + tolerance_m, 0.5 * self.flange_m[1] + tolerance_m
        return np.asarray(
            (np.abs(p[:, 2]) <= tolerance_m) & (np.abs(p[:, 0]) <= w) & (np.abs(p[:, 1]) <= h)
        )


class GridOpenWaveguide(_SolvedOpening):
    """Open end of a TE10 guide, solved with its walls, short and launcher probe.

    Parameters
    ----------
    guide : OpenWaveguide
        The aperture model of the same guide: its frequency, power, placement and
        dimensions are used (and its TE10 mode, for the description).
    guide_length_m : float, optional
        Length of the straight guide behind the opening, closed by the short [m];
        default :func:`default_guide_length_m`; at least 0.75 guide wavelengths.
    flange_m : array_like of 2 floats, optional
        A flat conducting flange in the aperture plane, centred: [w along the broad
        dimension (local x), h along E (local y)] [m], at least the guide's outer size
        with 2 mm walls (:func:`keepclear.antennas.walls.check_flange`).

    Attributes
    ----------
    guide_length_m : float
    flange_m : (float, float) or None
    gain_uncertainty_db : float
        The largest error in front against the full-wave validation: 0.9 dB bare
        (:data:`GAIN_UNCERTAINTY_DB`), 0.6 dB on a flange
        (:data:`FLANGE_GAIN_UNCERTAINTY_DB`).
    aperture : OpenWaveguide
        The aperture model, for what it describes (mode, open-end reflection).

    Raises
    ------
    ModelInputError
        ``guide_length_m`` not a length of at least 0.75 guide wavelengths, the guide
        below cut-off, ``flange_m`` not two lengths at least the guide's outer size, or
        a grid of more than :data:`MAX_SEGMENTS` segments.

    Notes
    -----
    Model, validation and references: module docstring.
    """

    kind = "open-waveguide"

    def __init__(
        self,
        guide: OpenWaveguide,
        guide_length_m: float | None = None,
        flange_m: ArrayLike | None = None,
    ) -> None:
        super().__init__(guide)
        a, b = float(guide.broad_m), float(guide.narrow_m)
        flange = check_flange(flange_m, a + 2 * DEFAULT_WALL_M, b + 2 * DEFAULT_WALL_M)
        lg = _guide_wavelength_m(a, self.frequency_hz)
        if not math.isfinite(lg):
            raise ModelInputError(
                "frequency_hz",
                f"the guide ({a * 1e3:.2f} mm broad) is below its TE10 cut-off at "
                f"{self.frequency_hz:g} Hz",
            )
        if guide_length_m is None:
            length = default_guide_length_m(a, self.frequency_hz)
        else:
            length = float(guide_length_m)
            if not (math.isfinite(length) and length >= MIN_GUIDE_LENGTH_GUIDE_WAVELENGTHS * lg):
                raise ModelInputError(
                    "guide_length_m",
                    f"guide_length_m must be at least 0.75 guide wavelengths "
                    f"({MIN_GUIDE_LENGTH_GUIDE_WAVELENGTHS * lg:.4g} m here: the launcher "
                    f"probe stands a quarter guide wavelength from the short), got "
                    f"{guide_length_m!r}",
                )
        needed = segments_needed(a, b, self.frequency_hz, length, flange)
        if needed > MAX_SEGMENTS:
            raise ModelInputError(
                "guide_length_m" if flange is None else "flange_m",
                f"the guide's wire grid needs {needed} segments, more than {MAX_SEGMENTS}",
            )
        self.guide_length_m = length
        self.broad_m, self.narrow_m = a, b
        #: The flange (w, h) [m], or None for a guide ending in its bare walls.
        self.flange_m = flange
        self.gain_uncertainty_db = (
            GAIN_UNCERTAINTY_DB if flange is None else FLANGE_GAIN_UNCERTAINTY_DB
        )
        self._guide_wavelength_m = lg
        self._geometry_key = (self.frequency_hz, a, b, length, flange)
        self._use_solved()
        self.bytes_per_point = 32 * 1024

    # ------------------------------------------------------------------ geometry
    def _structure(self) -> moment.WireStructure:
        a, b, length = self.broad_m, self.narrow_m, self.guide_length_m
        lam = self.wavelength_m
        cell = CELL_WAVELENGTHS * lam
        nx, ny = _counts(a, b, WALL_CELL_WAVELENGTHS * lam)
        probe_z = -length + 0.25 * self._guide_wavelength_m
        zs = _axial_lines(length, probe_z, WALL_CELL_WAVELENGTHS * lam)
        rings = [_ring(a, b, nx, ny, z) for z in zs]
        starts, ends = [], []
        for i, ring in enumerate(rings):
            nxt = np.roll(ring, -1, axis=0)
            starts.append(ring)
            ends.append(nxt)
            if i + 1 < len(rings):
                starts.append(ring)
                ends.append(rings[i + 1])
        ex, ey = np.eye(3)[0], np.eye(3)[1]
        xs = -0.5 * a + a * np.arange(nx + 1) / nx
        ys = -0.5 * b + b * np.arange(ny + 1) / ny
        short = moment.face_grid(
            np.array([0.0, 0.0, -length]), ex, ey, xs, ys, ("u0", "u1", "v0", "v1")
        )
        s = np.vstack([*starts, short[0]])
        e = np.vstack([*ends, short[1]])
        # Equal-area radii: the spacing of the parallel wires over 2 pi; capped below.
        spacing = np.where(
            np.abs((e - s)[:, 2]) > 0.0,
            np.where(np.abs(s[:, 1]) >= 0.5 * b - 1e-12, a / nx, b / ny),  # axial wires
            np.diff(zs).max(),  # ring and short wires (the short's: its own cell)
        )
        short_rows = np.zeros(s.shape[0], dtype=bool)
        short_rows[-short[0].shape[0] :] = True
        spacing = np.where(short_rows, min(a / nx, b / ny), spacing)
        radii = spacing / (2.0 * np.pi)
        # The axial wires as thick as the thin-wire kernel allows (capped below).
        radii = np.where(np.abs((e - s)[:, 2]) > 0.0, np.inf, radii)
        if self.flange_m is not None:
            # The plate in z = 0, its wires ending on the rim ring's nodes.
            fs, fe, fr = _flange_grid(a, b, nx, ny, self.flange_m, cell)
            s, e, radii = np.vstack([s, fs]), np.vstack([e, fe]), np.concatenate([radii, fr])
        s, e, radii = moment._unique_segments(s, e, radii)
        n_probe = _probe_segments(b, lam)
        y = -0.5 * b + PROBE_LENGTH_PER_NARROW * b * np.arange(n_probe + 1) / n_probe
        pa = np.column_stack([np.zeros(n_probe), y[:-1], np.full(n_probe, probe_z)])
        pb = np.column_stack([np.zeros(n_probe), y[1:], np.full(n_probe, probe_z)])
        feed = s.shape[0]
        s, e = np.vstack([s, pa]), np.vstack([e, pb])
        radii = np.concatenate([radii, np.full(n_probe, PROBE_RADIUS_M)])
        # Caps against every neighbour, the probe's base included; the probe keeps its own.
        capped = _cap_radii(s, e, radii, NEIGHBOUR_RADIUS_PER_LENGTH)
        radii = np.concatenate([capped[:feed], radii[feed:]])
        return moment.WireStructure.from_segments(s, e, radii, feed)

    def _local_outline(self) -> NDArray[np.float64]:
        """The guide's eight corners: the opening, then the short [m]."""
        a, b = 0.5 * self.broad_m, 0.5 * self.narrow_m
        face = np.array([[-a, -b, 0.0], [a, -b, 0.0], [a, b, 0.0], [-a, b, 0.0]])
        return np.vstack([face, face - np.array([0.0, 0.0, self.guide_length_m])])

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Inside the guide, or within ``tolerance_m`` of its walls, short or flange."""
        p = points_local_m
        tol = float(tolerance_m)
        along = (p[:, 2] <= tol) & (p[:, 2] >= -self.guide_length_m - tol)
        inside = along & inside_guide(p, 0.5 * self.broad_m, 0.5 * self.narrow_m, tol)
        return np.asarray(inside | self._on_flange(p, tol))


def _cap_radii(
    starts_m: NDArray[np.float64],
    ends_m: NDArray[np.float64],
    radii_m: NDArray[np.float64],
    neighbour_fraction: float = moment.MAX_RADIUS_PER_LENGTH,
) -> NDArray[np.float64]:
    """Radii capped against their own segment and the shortest neighbour at either end.

    At most a quarter of the segment's own length and ``neighbour_fraction`` of the
    shortest segment meeting it.
    NEC-2's thin-wire kernel needs every segment several radii long (a quarter: Burke &
    Poggio, part III), and a neighbour at a junction must leave the wire's volume before
    its own match point, its centre (``neighbour_fraction`` below 0.5; NEC-2 refuses a
    segment whose centre lies inside another wire).  The open guide and the horn both
    relax the neighbour's share to :data:`NEIGHBOUR_RADIUS_PER_LENGTH`.
    """
    n = starts_m.shape[0]
    length = np.linalg.norm(ends_m - starts_m, axis=1)
    node = moment.node_index(np.vstack([starts_m, ends_m]))
    shortest = np.full(int(node.max()) + 1, np.inf)
    np.minimum.at(shortest, node, np.concatenate([length, length]))
    cap = np.minimum(
        moment.MAX_RADIUS_PER_LENGTH * length,
        neighbour_fraction * np.minimum(shortest[node[:n]], shortest[node[n:]]),
    )
    return np.minimum(radii_m, cap)


# ====================================================================== pyramidal horn
#: Launcher probes of the horn's feed: two from each broad wall, this long (units of b).
HORN_PROBE_LENGTH_PER_NARROW: Final[float] = 0.4
#: Length of the horn's feed guide from the short to the throat, in guide wavelengths
#: (0.12 m for WR-340 at 2.45 GHz, the validated case; the probes stand lambda_g / 4 from
#: the short, 0.45 lambda_g before the throat).
HORN_FEED_GUIDE_WAVELENGTHS: Final[float] = 0.7
#: Largest horn grid this model solves, by :func:`horn_segments_needed` (NEC-2 from the
#: quarter; the engine's own bound,
#: :data:`keepclear.antennas.moment.MAX_SYMMETRIC_SEGMENTS`, leaves room above it).
HORN_MAX_SEGMENTS: Final[int] = 10500
#: Keep-out margin [dB] of the horn: the largest error in front against openEMS v0.0.35
#: (horn-wr340, -0.85 dB).
HORN_GAIN_UNCERTAINTY_DB: Final[float] = 0.9
#: Keep-out margin [dB] of a horn with its flange on the grid: the largest error in front
#: against openEMS v0.0.35 (flanged-horn-wr340, -0.65 dB at H 45 deg 0.3 m; see GridHorn).
FLANGED_HORN_GAIN_UNCERTAINTY_DB: Final[float] = 0.7


def _odd(n: int) -> int:
    n = max(1, int(n))
    return n if n % 2 else n + 1


def _split_at_planes(
    starts: NDArray[np.float64], ends: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Split every segment that crosses the plane x = 0 or y = 0 at the plane."""
    for axis in (0, 1):
        cross = starts[:, axis] * ends[:, axis] < 0.0
        if cross.any():
            a, b = starts[cross], ends[cross]
            t = a[:, axis] / (a[:, axis] - b[:, axis])
            mid = a + t[:, None] * (b - a)
            mid[:, axis] = 0.0
            starts = np.vstack([starts[~cross], a, mid])
            ends = np.vstack([ends[~cross], mid, b])
    return starts, ends


def _flare_lines(
    flare_m: float,
    feed_m: tuple[float, float],
    mouth_m: tuple[float, float],
    cells: tuple[int, int],
    max_step_m: float,
) -> NDArray[np.float64]:
    """Ring positions of the flare, z from -flare_m (throat) to 0 (mouth) [m].

    The axial step follows the cells round the ring (the larger of the two walls', each
    wall's width over its number of cells), at most ``max_step_m``: near-square cells from
    the throat, where the ring's cells are a third of the feed's, to the mouth.
    """
    z = np.linspace(-flare_m, 0.0, 2001)
    t = (z + flare_m) / flare_m
    width = feed_m[0] + (mouth_m[0] - feed_m[0]) * t
    height = feed_m[1] + (mouth_m[1] - feed_m[1]) * t
    step = np.minimum(max_step_m, np.maximum(width / cells[0], height / cells[1]))
    inverse = 1.0 / step
    u = np.concatenate([[0.0], np.cumsum(0.5 * (inverse[1:] + inverse[:-1]) * np.diff(z))])
    n = max(1, math.ceil(u[-1] - 1e-9))
    lines = np.interp(u[-1] * np.arange(n + 1) / n, u, z)
    lines[0], lines[-1] = -flare_m, 0.0
    return lines


def _horn_cells(
    broad_m: float, narrow_m: float, width_m: float, height_m: float, cell_m: float
) -> tuple[int, int, int, int]:
    """Cells across the feed's broad and narrow walls (odd) and the flare's factors (odd)."""
    nx, ny = _odd(math.ceil(broad_m / cell_m - 1e-9)), _odd(math.ceil(narrow_m / cell_m - 1e-9))
    mx = _odd(math.ceil(math.ceil(width_m / cell_m - 1e-9) / nx))
    my = _odd(math.ceil(math.ceil(height_m / cell_m - 1e-9) / ny))
    return nx, ny, mx, my


def horn_segments_needed(
    broad_m: float,
    narrow_m: float,
    width_m: float,
    height_m: float,
    length_m: float,
    frequency_hz: float,
    flange_m: tuple[float, float] | None = None,
) -> float:
    """Segments of the whole horn grid (before the plane splits), without building it.

    ``flange_m = (w, h)``, at least the mouth's size, adds the flange's plate.
    """
    lam = moment.C_M_S / frequency_hz
    lg = _guide_wavelength_m(broad_m, frequency_hz)
    if not (math.isfinite(lg) and math.isfinite(length_m) and length_m > 0):
        return math.inf
    cell = CELL_WAVELENGTHS * lam
    nx, ny, mx, my = _horn_cells(broad_m, narrow_m, width_m, height_m, cell)
    feed_rings = math.ceil(HORN_FEED_GUIDE_WAVELENGTHS * lg / cell) + 2
    flare_rings = _flare_lines(
        length_m, (broad_m, narrow_m), (width_m, height_m), (nx * mx, ny * my), cell
    ).size
    feed = 2 * (nx + ny) * (2 * feed_rings - 1)
    flare = 2 * (nx * mx + ny * my) * (2 * flare_rings - 1)
    short = 2 * nx * mx * ny * my + 2 * (nx * mx + ny * my)
    flange = _flange_segments(width_m, height_m, nx * mx, ny * my, flange_m, cell)
    return feed + flare + short + flange + 8 * _probe_segments(narrow_m, lam)


def _horn_spacing(
    starts_m: NDArray[np.float64],
    ends_m: NDArray[np.float64],
    rings_z_m: NDArray[np.float64],
    shape_m: tuple[float, float, float, float, float],
    cells: tuple[int, int, int, int],
) -> NDArray[np.float64]:
    """Spacing of the parallel wires at each segment of the horn grid [m].

    Axial wires: the cell round the ring where they run (the wall's width over its cells:
    the feed's, or the flare's three times finer ones).  Ring wires: the mean of the axial
    gaps on either side.  The short's wires: the short's own cells, across them.
    """
    a, b, big_a, big_b, flare = shape_m
    nx, ny, cx, cy = cells
    d = ends_m - starts_m
    mid = 0.5 * (starts_m + ends_m)
    t = np.clip((mid[:, 2] + flare) / flare, 0.0, 1.0)
    in_flare = mid[:, 2] > -flare + 1e-9
    width = np.where(in_flare, a + (big_a - a) * t, a)
    height = np.where(in_flare, b + (big_b - b) * t, b)
    on_broad = np.abs(np.abs(mid[:, 1]) - 0.5 * height) < 1e-9
    round_ring = np.where(
        on_broad, width / np.where(in_flare, cx, nx), height / np.where(in_flare, cy, ny)
    )
    gaps = np.diff(rings_z_m)
    both = 0.5 * (np.concatenate([[gaps[0]], gaps]) + np.concatenate([gaps, [gaps[-1]]]))
    index = np.clip(np.searchsorted(rings_z_m, mid[:, 2] - 1e-9), 0, rings_z_m.size - 1)
    axial_gap = both[index]
    short = np.where(np.abs(d[:, 0]) > np.abs(d[:, 1]), b / cy, a / cx)
    ring = np.abs(d[:, 2]) <= 1e-12
    at_short = np.abs(mid[:, 2] - rings_z_m[0]) < 1e-9
    return np.where(ring, np.where(at_short, short, axial_gap), round_ring)


class GridHorn(_SolvedOpening):
    """Pyramidal horn solved with its flare, feed guide, short and launcher probes.

    Parameters
    ----------
    horn : PyramidalHorn
        The aperture model of the same horn: frequency, power, placement, geometry.
    flange_m : array_like of 2 floats, optional
        A flat conducting flange in the mouth's plane, centred: [w along the H plane
        (local x), h along E (local y)] [m], at least the mouth's size.

    Attributes
    ----------
    feed_length_m : float
        Length of the feed guide behind the throat, closed by the short [m]:
        :data:`HORN_FEED_GUIDE_WAVELENGTHS` guide wavelengths.
    flange_m : (float, float) or None
    gain_uncertainty_db : float
        The largest error in front against the full-wave validation: 0.9 dB bare
        (:data:`HORN_GAIN_UNCERTAINTY_DB`), 0.7 dB on a flange
        (:data:`FLANGED_HORN_GAIN_UNCERTAINTY_DB`).
    aperture : PyramidalHorn

    Raises
    ------
    ModelInputError
        ``flange_m`` smaller than the mouth, or the grid would exceed
        :data:`HORN_MAX_SEGMENTS`.

    Notes
    -----
    The method of :class:`GridOpenWaveguide`, with the structure symmetric about the
    E plane (x = 0) and the H plane (y = 0) so that NEC-2 solves a quarter (its GX card:
    four blocks of a quarter's size, a sixteenth of the work of the whole matrix).  The
    TE10 mode is launched by four probes, two from each broad wall at x = +-a/(2 n)
    (n the odd number of cells across the broad wall), each 0.4 b long, fed in phase,
    a quarter guide wavelength in front of the short: symmetric about both planes as
    the mode is; the modes they excite besides TE10 are below cut-off and decay before
    the throat.  Cell counts across the walls are odd, so no wire lies in a symmetry
    plane; the ring wires that cross one are split there.  The flare's rings have three
    times (an odd number of times) the feed's cells, so the wires meet at the throat; the
    short has the same fine cells.

    The grid must shield: the field behind the horn is 35-50 dB under the beam's peak,
    while inside the feed and the throat the guided wave runs at the walls.  A wire grid
    of spacing d and wire radius r is a sheet of inductive reactance
    X / eta0 = (d / lambda) ln(1 / (1 - exp(-2 pi r / d))) (Marcuvitz [4]_ sec. 5.21, the
    grating of round wires) and lets through about 2 X / eta0 of the field at it.  So:

    * the flare's rings are spaced as its cells round the ring (near-square cells, at
      most lambda/10), and every wire's radius is the equal-area value of *its own*
      spacing (the parallel wires' distance over 2 pi);
    * the short, where the guided wave's H (the wall current) is largest, has the
      throat's fine cells;
    * a radius is capped at a quarter of its own segment and 0.4 of the shortest
      neighbour (:data:`NEIGHBOUR_RADIUS_PER_LENGTH`; a neighbour's centre, its
      match point, stays outside the wire).

    An earlier grid (rings every lambda/10 along the whole flare, one radius lambda/(20 pi)
    for all wires, capped at a quarter of the shortest neighbour) had cells 4:1 at the
    throat whose ring wires were capped to 0.4-0.8 mm at 12 mm spacing (X / eta0 about
    0.14: -17 dB through the wall), and thinned wires where the split halves at the
    symmetry planes meet the H plane's ring wires.  Its field beside and behind the horn
    in the H plane was up to 10.1 dB over full wave (H 135 deg 0.3 m), falling with the
    cell size (lambda/15: +8.7 dB, lambda/20: +6.5 dB): the leakage of the grid, not the
    horn.  The feed guide closed by a second short at the throat (a box that should
    radiate nothing) radiated 1e-3 of the horn's power through that grid, a field only
    5 dB under the full-wave one at H 135 deg 0.3 m (checked when written).

    Validation (openEMS v0.0.35, case ``horn-wr340``: 0.24 x 0.18 m mouth, 0.30 m flare,
    2 mm walls; 43 points 0.1-0.45 m): in front (within 60 deg) -0.85 to +0.28 dB; beside
    and behind -1.67 to +4.33 dB (the highest at H 135 deg 0.3 m, where the field is 38 dB
    under the beam's peak at that distance).  Boresight directivity 14.76 against
    14.64 dBi.  The far-field H plane behind keeps a residue where full wave has a deep
    null (-34 dBi at 125-130 deg; the model -28 to -22 dBi), and misses the full-wave
    shallow lobes at 90 and 105 deg by -3.0 and -6.6 dB (directions 40 dB under the peak);
    beyond 60 deg the E plane is within 1.7 dB of the full-wave pattern, the H plane
    from 140 to 180 deg within 2.3 dB (nf2ff cuts, 5 deg steps).

    A flange is a plate of the grid in the mouth's plane, gridded as the open guide's
    (:func:`_flange_grid` on the mouth ring's lines, so its wires end on the ring's
    nodes; its wires across the symmetry planes are split there like the rings').
    Validation (case ``flanged-horn-wr340``: the same horn on a 2 mm plate 0.36 m along
    H x 0.27 m along E whose front face is the mouth's plane; about 10,500 segments before
    the splits): in front -0.65 to +0.20 dB; beside and behind -1.29 to +5.36 dB (the
    highest at E 150 deg 0.3 m, just behind the plate's edge across E, 29 dB under the
    beam at that distance), +3.80 dB 27 mm behind the feed guide's short (axis 180 deg
    0.45 m); peak directivity 14.43 against 14.30 dBi.  The plate's wires take the
    equal-area radius of the plate's own lines.  The rim model it replaces was -2.16 to
    +0.83 dB in front and, without its back-region margin, 16.5 dB under full wave straight
    behind the feed guide.

    Behind the short the comparison first read +7.2 dB: the full-wave run had recorded no
    H at its E-plane and axis samples (an H probe on the first mesh line above its magnetic
    symmetry wall reads zero; validation/run.py ``h_probe_position``), and there, 27 mm
    behind the short's face, eta0 |H| is 1.48 times |E| (the model: 1.48 too), so the
    stored power density was 3.4 dB short.  The grid was not the cause; measured on this
    case against that first run (its E there unchanged since): the short's wire radius
    x1.5 (x1.3-1.4 after its cap), +8.1 dB; the feed guide's wires x1.5, +7.1 dB; the
    plate's x1.5, +6.9 dB; the flare's x1.5, +6.3 dB but H 120 deg 0.3 m from +5.2 to
    +7.3 dB; all of them x1.5, +7.0 dB.  The field along the axis behind the short falls
    slowly (0.13, 0.08, 0.06, 0.03 W/m^2 per watt at 5, 27, 50 and 200 mm), a radiated
    field, not the evanescent near field of the short's 3 mm cells (exp(-2 pi z / d):
    e^-56 at 27 mm).  Only a finer grid of the whole moved it, over the segment bound:
    lambda/12 (15,196 segments) +5.4 dB, five cells per feed cell across E (cy = 25;
    14,780) +5.6 dB (found when written).

    References: module docstring, and

    .. [4] N. Marcuvitz, *Waveguide Handbook*, MIT Radiation Laboratory Series vol. 10,
       McGraw-Hill, 1951, sec. 5.21 (inductive obstacles: grating of round wires; from
       memory of the edition).
    """

    kind = "horn"

    def __init__(self, horn: PyramidalHorn, flange_m: ArrayLike | None = None) -> None:
        super().__init__(horn)
        self.geometry = horn.geometry
        g = horn.geometry
        flange = check_flange(flange_m, g.aperture_width_m, g.aperture_height_m)
        lg = _guide_wavelength_m(g.broad_m, self.frequency_hz)
        needed = horn_segments_needed(
            g.broad_m,
            g.narrow_m,
            g.aperture_width_m,
            g.aperture_height_m,
            g.length_m,
            self.frequency_hz,
            flange,
        )
        if not (math.isfinite(lg) and needed <= HORN_MAX_SEGMENTS):
            raise ModelInputError(
                "length_m" if flange is None else "flange_m",
                f"the horn's wire grid needs about {needed} segments, more than "
                f"{HORN_MAX_SEGMENTS}",
            )
        self.feed_length_m = HORN_FEED_GUIDE_WAVELENGTHS * lg
        self._guide_wavelength_m = lg
        #: The flange (w, h) [m], or None for a horn ending in its bare walls.
        self.flange_m = flange
        self.gain_uncertainty_db = (
            HORN_GAIN_UNCERTAINTY_DB if flange is None else FLANGED_HORN_GAIN_UNCERTAINTY_DB
        )
        self._geometry_key = (
            self.frequency_hz,
            g.broad_m,
            g.narrow_m,
            g.aperture_width_m,
            g.aperture_height_m,
            g.length_m,
            self.feed_length_m,
            flange,
        )
        self._use_solved()
        self.bytes_per_point = 32 * 1024

    def _solve(self, structure: moment.WireStructure) -> Any:
        """The quarter structure solved with its two symmetry planes (the probes in phase)."""
        return moment.solve_symmetric(structure, self.frequency_hz, (-1.0, 1.0, -1.0, 1.0))

    def _structure(self) -> moment.WireStructure:
        """The quarter x >= 0, y >= 0 of the grid; its feed: the probe on the +y wall."""
        g = self.geometry
        a, b, big_a, big_b, flare = (
            g.broad_m,
            g.narrow_m,
            g.aperture_width_m,
            g.aperture_height_m,
            g.length_m,
        )
        lam = self.wavelength_m
        cell = CELL_WAVELENGTHS * lam
        nx, ny, mx, my = _horn_cells(a, b, big_a, big_b, cell)
        cx, cy = nx * mx, ny * my  # the flare's cells round the ring, and the short's
        z_short = -flare - self.feed_length_m
        probe_z = z_short + 0.25 * self._guide_wavelength_m
        feed_z = np.concatenate(
            [
                moment.uniform_lines(z_short, probe_z, cell),
                moment.uniform_lines(probe_z, -flare, cell)[1:-1],
            ]
        )
        flare_z = _flare_lines(flare, (a, b), (big_a, big_b), (cx, cy), cell)
        t = (flare_z + flare) / flare
        widths = np.concatenate([np.full(feed_z.size, a), a + (big_a - a) * t])
        heights = np.concatenate([np.full(feed_z.size, b), b + (big_b - b) * t])
        zs = np.concatenate([feed_z, flare_z])
        counts = [(nx, ny)] * feed_z.size + [(cx, cy)] * flare_z.size
        starts, ends = [], []
        for i, z in enumerate(zs):
            # ring wires: the short's ring and the flare's rings at the fine cells
            fine = i == 0 or counts[i][0] == cx
            ring = _ring(widths[i], heights[i], *((cx, cy) if fine else counts[i]), z)
            starts.append(ring)
            ends.append(np.roll(ring, -1, axis=0))
            if i + 1 < zs.size:  # axial wires at the coarser of the two rings' nodes
                coarse = counts[i] if counts[i][0] <= counts[i + 1][0] else counts[i + 1]
                starts.append(_ring(widths[i], heights[i], *coarse, z))
                ends.append(_ring(widths[i + 1], heights[i + 1], *coarse, zs[i + 1]))
        ex, ey = np.eye(3)[0], np.eye(3)[1]
        xs = -0.5 * a + a * np.arange(cx + 1) / cx
        ys = -0.5 * b + b * np.arange(cy + 1) / cy
        short = moment.face_grid(
            np.array([0.0, 0.0, z_short]), ex, ey, xs, ys, ("u0", "u1", "v0", "v1")
        )
        s = np.vstack([*starts, short[0]])
        e = np.vstack([*ends, short[1]])
        if self.flange_m is not None:
            # The plate in z = 0, its wires ending on the mouth ring's nodes.
            fs, fe, _ = _flange_grid(big_a, big_b, nx * mx, ny * my, self.flange_m, cell)
            s, e = np.vstack([s, fs]), np.vstack([e, fe])
        s, e, _ = moment._unique_segments(s, e, np.zeros(s.shape[0]))
        s, e = _split_at_planes(s, e)
        # The feed probe of the quarter: from the +y broad wall at x = a / (2 nx), towards -y.
        n_probe = max(
            2, math.ceil(HORN_PROBE_LENGTH_PER_NARROW * b / (PROBE_SEGMENT_WAVELENGTHS * lam))
        )
        y = 0.5 * b - HORN_PROBE_LENGTH_PER_NARROW * b * np.arange(n_probe + 1) / n_probe
        x = 0.5 * a / nx
        pa = np.column_stack([np.full(n_probe, x), y[:-1], np.full(n_probe, probe_z)])
        pb = np.column_stack([np.full(n_probe, x), y[1:], np.full(n_probe, probe_z)])
        # Equal-area radii (the local spacing of the parallel wires over 2 pi), capped
        # against the segment and its neighbours; the caps are taken on the whole structure
        # so the images see the same junctions.
        whole_s = np.vstack([s, pa, pa * np.array([1.0, -1.0, 1.0])])
        whole_e = np.vstack([e, pb, pb * np.array([1.0, -1.0, 1.0])])
        spacing = _horn_spacing(s, e, zs, (a, b, big_a, big_b, flare), (nx, ny, cx, cy))
        if self.flange_m is not None:
            # The plate's wires: the spacing of its own parallel lines.
            mid = 0.5 * (s + e)
            plate = (np.abs(mid[:, 2]) < 1e-12) & (
                (np.abs(mid[:, 0]) > 0.5 * big_a + 1e-9) | (np.abs(mid[:, 1]) > 0.5 * big_b + 1e-9)
            )
            fx, fy = _flange_lines(big_a, big_b, cx, cy, self.flange_m, cell)
            along_x = np.abs((e - s)[:, 0]) > np.abs((e - s)[:, 1])
            across = np.where(
                along_x,
                np.interp(np.abs(mid[:, 1]), fy, moment._spacing(fy)),
                np.interp(np.abs(mid[:, 0]), fx, moment._spacing(fx)),
            )
            spacing = np.where(plate, across, spacing)
        radii = np.concatenate([spacing / (2.0 * np.pi), np.full(2 * n_probe, PROBE_RADIUS_M)])
        radii = _cap_radii(whole_s, whole_e, radii, NEIGHBOUR_RADIUS_PER_LENGTH)
        radii = radii[: s.shape[0] + n_probe]
        s, e = np.vstack([s, pa]), np.vstack([e, pb])
        quarter = (np.minimum(s[:, 0], e[:, 0]) >= -1e-12) & (
            np.minimum(s[:, 1], e[:, 1]) >= -1e-12
        )
        feed = int(np.count_nonzero(quarter[: s.shape[0] - n_probe]))  # first probe segment
        return moment.WireStructure.from_segments(s[quarter], e[quarter], radii[quarter], feed)

    def _local_outline(self) -> NDArray[np.float64] | None:
        """The horn's body, as the aperture model draws it."""
        return self.aperture._local_outline()

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Inside the flare or the feed guide, or within ``tolerance_m`` of walls or flange."""
        inside = inside_horn(points_local_m, self.geometry, self.feed_length_m, tolerance_m)
        return np.asarray(inside | self._on_flange(points_local_m, tolerance_m))
