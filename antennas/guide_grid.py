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
  most lambda/10, radius = spacing / 2 pi (the equal-area rule), capped at a quarter
  of the shortest segment meeting at either end (Burke & Poggio [1]_ part III,
  Ludwig [2]_; see :mod:`keepclear.antennas.moment`);
* with ``flange_m = [w, h]`` the flange is a thin perfectly conducting plate in the
  aperture plane z = 0, w along x and h along y, centred on the opening, gridded by the
  same rules (cells at most lambda/10, equal-area radii,
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

* in front (within 60 deg): -0.86 to +0.48 dB;
* beside and behind: -2.5 to +2.6 dB;
* boresight directivity: WR-340 6.52 against 6.53 dBi, WR-430 8.04 against 7.83 dBi.

``gain_uncertainty_db`` is the largest error in front (0.9 dB, WR-430).  The full-wave
guides have 2 mm walls, the model thin ones; the default length is the validated one.
The pattern behind moves by about 1 dB when the length changes from 0.15 to 0.45 m
(checked when written).

On a flange (case ``flanged-wr340``: the same WR-340 guide, 0.30 m, on a 2 mm plate
0.25 m along the broad wall x 0.20 m along E whose front face is the aperture plane;
the model: 2,037 segments, its plate thin), at 61 points from 0.1 to 0.4 m:

* in front (within 60 deg): -0.60 to +0.45 dB (the rim model of
  :mod:`keepclear.antennas.walls` was -2.4 to +4.1 dB: it misses the E-plane lobe at
  30-35 deg that the flange's edges raise, which the grid solves);
* beside and behind: never more than 0.69 dB under full wave, up to +3.0 dB over it
  except at two points 5-7 cm behind the plate (H plane 120 and 135 deg at 0.1 m),
  +8.2 and +7.2 dB, where full wave is 33 dB under the front.  There the guide's
  interior field leaks through its walls' wire grid (a grid is not a closed sheet):
  half the walls' wire radius raises the first point to +20.3 dB, a lambda/12 grid of
  the whole lowers it to +6.7 dB, while refining the plate alone (lambda/15, lambda/20)
  or halving its wires' radius moves it by 0.6 dB at most (found when written).  On
  the safe side, and left at the published lambda/10;
* peak directivity 7.57 against 7.17 dBi (boresight 4.53 against 4.74).

Its ``gain_uncertainty_db`` is that case's largest error in front,
:data:`FLANGE_GAIN_UNCERTAINTY_DB` = 0.6 dB.  As the flange shrinks to the guide's outer
size the pattern tends to the bare guide's (within 0.41 dB in front for a 2 mm collar;
tests/test_guide_grid.py).

Validity and limits
-------------------
Perfect conductors, free space, a flat rectangular flange in the aperture plane or
none.  The structure is limited to :data:`MAX_SEGMENTS` segments (a bare guide up to
about 0.5 m long at 2.45 GHz; the default 0.30 m WR-340 guide on a flange up to about
0.28 x 0.28 m): :func:`segments_needed` tells a builder beforehand, and the scenario
reader then falls back to the rim model of :mod:`keepclear.antennas.walls`.
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
#: Largest structure this model solves (NEC-2 time grows as N^3: about 5 s at 2,500).
MAX_SEGMENTS: Final[int] = 2500
#: Largest cell of the grid, in wavelengths (Burke & Poggio, part III).
CELL_WAVELENGTHS: Final[float] = moment.MAX_SEGMENT_WAVELENGTHS
#: Probe length, in units of the narrow dimension b.
PROBE_LENGTH_PER_NARROW: Final[float] = 0.6
#: Probe segment, in wavelengths, and its radius [m] (a launcher antenna's thickness).
PROBE_SEGMENT_WAVELENGTHS: Final[float] = 1.0 / 20.0
PROBE_RADIUS_M: Final[float] = 0.6e-3
#: Keep-out margin [dB]: the largest error in front against openEMS v0.0.35
#: (guide-wr430, -0.86 dB; see the module docstring).
GAIN_UNCERTAINTY_DB: Final[float] = 0.9
#: Keep-out margin [dB] of a guide with its flange on the grid: the largest error in front
#: against openEMS v0.0.35 (flanged-wr340, -0.60 dB at H 45 deg 0.1 m; see the module
#: docstring).
FLANGE_GAIN_UNCERTAINTY_DB: Final[float] = 0.6


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
    nx, ny = _counts(broad_m, narrow_m, cell)
    guide_wavelength = _guide_wavelength_m(broad_m, frequency_hz)
    if not (math.isfinite(guide_wavelength) and math.isfinite(guide_length_m)):
        return math.inf  # type: ignore[return-value]
    zs = _axial_lines(guide_length_m, -guide_length_m + 0.25 * guide_wavelength, cell)
    per_ring = 2 * (nx + ny)
    walls = per_ring * zs.size + per_ring * (zs.size - 1)
    short = nx * (ny - 1) + ny * (nx - 1)
    flange = 0
    if flange_m is not None:
        xs, ys = _flange_lines(broad_m, narrow_m, nx, ny, flange_m, cell)
        # The plate's whole grid less the opening's cells and its rim (the wall's ring).
        flange = xs.size * (ys.size - 1) + ys.size * (xs.size - 1)
        flange -= (nx + 1) * ny + (ny + 1) * nx
    return walls + short + flange + _probe_segments(narrow_m, lam)


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
        nx, ny = _counts(a, b, cell)
        probe_z = -length + 0.25 * self._guide_wavelength_m
        zs = _axial_lines(length, probe_z, cell)
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
        if self.flange_m is not None:
            # The plate in z = 0, its wires ending on the rim ring's nodes.
            fs, fe, fr = _flange_grid(a, b, nx, ny, self.flange_m, cell)
            s, e, radii = np.vstack([s, fs]), np.vstack([e, fe]), np.concatenate([radii, fr])
        s, e, radii = moment._unique_segments(s, e, radii)
        radii = _cap_radii(s, e, radii)
        n_probe = _probe_segments(b, lam)
        y = -0.5 * b + PROBE_LENGTH_PER_NARROW * b * np.arange(n_probe + 1) / n_probe
        pa = np.column_stack([np.zeros(n_probe), y[:-1], np.full(n_probe, probe_z)])
        pb = np.column_stack([np.zeros(n_probe), y[1:], np.full(n_probe, probe_z)])
        feed = s.shape[0]
        return moment.WireStructure.from_segments(
            np.vstack([s, pa]),
            np.vstack([e, pb]),
            np.concatenate([radii, np.full(n_probe, PROBE_RADIUS_M)]),
            feed,
        )

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
    starts_m: NDArray[np.float64], ends_m: NDArray[np.float64], radii_m: NDArray[np.float64]
) -> NDArray[np.float64]:
    """Radii at most a quarter of the shortest segment meeting at either end.

    NEC-2's thin-wire kernel needs every segment several radii long, including the
    neighbours at a junction (Burke & Poggio, part III).
    """
    n = starts_m.shape[0]
    length = np.linalg.norm(ends_m - starts_m, axis=1)
    node = moment.node_index(np.vstack([starts_m, ends_m]))
    shortest = np.full(int(node.max()) + 1, np.inf)
    np.minimum.at(shortest, node, np.concatenate([length, length]))
    cap = moment.MAX_RADIUS_PER_LENGTH * np.minimum(shortest[node[:n]], shortest[node[n:]])
    return np.minimum(radii_m, cap)


# ====================================================================== pyramidal horn
#: Launcher probes of the horn's feed: two from each broad wall, this long (units of b).
HORN_PROBE_LENGTH_PER_NARROW: Final[float] = 0.4
#: Length of the horn's feed guide from the short to the throat, in guide wavelengths
#: (0.12 m for WR-340 at 2.45 GHz, the validated case; the probes stand lambda_g / 4 from
#: the short, 0.45 lambda_g before the throat).
HORN_FEED_GUIDE_WAVELENGTHS: Final[float] = 0.7
#: Largest horn grid this model solves, by :func:`horn_segments_needed` (NEC-2 from the
#: quarter: about 7 s of CPU at 5,000; the engine's own bound,
#: :data:`keepclear.antennas.moment.MAX_SYMMETRIC_SEGMENTS`, leaves room above it).
HORN_MAX_SEGMENTS: Final[int] = 6000
#: Keep-out margin [dB] of the horn: the largest error in front against openEMS v0.0.35
#: (horn-wr340, -0.89 dB at the time of writing).
HORN_GAIN_UNCERTAINTY_DB: Final[float] = 0.9
#: Keep-out margin [dB] of a horn with its flange on the grid: the largest error in front
#: against openEMS v0.0.35 (flanged-horn-wr340, -0.68 dB at H 45 deg 0.2 m; see GridHorn).
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
    if not math.isfinite(lg):
        return math.inf
    cell = CELL_WAVELENGTHS * lam
    nx, ny = _odd(math.ceil(broad_m / cell - 1e-9)), _odd(math.ceil(narrow_m / cell - 1e-9))
    mx = _odd(math.ceil(math.ceil(width_m / cell - 1e-9) / nx))
    my = _odd(math.ceil(math.ceil(height_m / cell - 1e-9) / ny))
    feed_rings = math.ceil(HORN_FEED_GUIDE_WAVELENGTHS * lg / cell) + 2
    flare_rings = math.ceil(length_m / cell) + 1
    feed = 2 * (nx + ny) * (2 * feed_rings - 1)
    flare = 2 * (nx * mx + ny * my) * (2 * flare_rings - 1)
    flange = 0
    if flange_m is not None:
        cx, cy = nx * mx, ny * my
        xs, ys = _flange_lines(width_m, height_m, cx, cy, flange_m, cell)
        flange = xs.size * (ys.size - 1) + ys.size * (xs.size - 1)
        flange -= (cx + 1) * cy + (cy + 1) * cx
    return feed + flare + flange + nx * ny * 2 + 8 * _probe_segments(narrow_m, lam)


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
    plane; the ring wires that cross one are split there.  The flare's walls are graded
    from the feed's cells to at most lambda/10 at the mouth (each feed cell split into
    an odd number of flare cells, so the wires meet at the throat).

    Validation (openEMS v0.0.35, case ``horn-wr340``: 0.24 x 0.18 m mouth, 0.30 m flare,
    2 mm walls): in front (within 60 deg) -0.89 to +0.37 dB; beside and behind never
    more than 1.7 dB under the full-wave field, and up to 10.1 dB over it in the H plane
    120-150 deg behind the mouth, where the field is 33-38 dB under the beam's peak (the
    same with a lambda/12 grid, and within 0.6 dB with twice the wire radius: not the
    cell size nor the grid's transparency; the cause is not found).
    Boresight directivity 14.68 against 14.64 dBi.

    A flange is a plate of the grid in the mouth's plane, gridded as the open guide's
    (:func:`_flange_grid` on the mouth ring's lines, so its wires end on the ring's
    nodes; its wires across the symmetry planes are split there like the rings').
    Validation (case ``flanged-horn-wr340``: the same horn on a 2 mm plate 0.36 m along
    H x 0.27 m along E whose front face is the mouth's plane; the model 5,968 segments
    before the splits): in front -0.68 to +0.24 dB; beside and behind never more than
    1.41 dB under full wave, and up to 12.9 dB over it in the H plane 90-150 deg at
    0.2-0.3 m, where full wave is 33-40 dB under boresight (the bare horn's gap, above,
    grown by the plate's shielding of the true field); peak directivity 14.30 against
    14.30 dBi.  The rim model it replaces was -2.16 to +0.83 dB in front and, without
    its back-region margin, 13.1 dB under full wave straight behind the feed guide.
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
        nx, ny = _odd(math.ceil(a / cell - 1e-9)), _odd(math.ceil(b / cell - 1e-9))
        mx = _odd(math.ceil(math.ceil(big_a / cell - 1e-9) / nx))
        my = _odd(math.ceil(math.ceil(big_b / cell - 1e-9) / ny))
        z_short = -flare - self.feed_length_m
        probe_z = z_short + 0.25 * self._guide_wavelength_m
        sections = [
            (z_short, probe_z, a, b, a, b, nx, ny),
            (probe_z, -flare, a, b, a, b, nx, ny),
            (-flare, 0.0, a, b, big_a, big_b, nx * mx, ny * my),
        ]
        starts, ends = [], []
        for k, (z0, z1, w0, h0, w1, h1, cx, cy) in enumerate(sections):
            n = max(1, math.ceil(abs(z1 - z0) / cell - 1e-9))
            rings = [
                _ring(
                    w0 + (w1 - w0) * i / n, h0 + (h1 - h0) * i / n, cx, cy, z0 + (z1 - z0) * i / n
                )
                for i in range(n + 1)
            ]
            finer_next = k + 1 < len(sections) and sections[k + 1][6] != cx
            for i, ring in enumerate(rings):
                if not (i == n and finer_next):  # the next section's finer ring replaces it
                    starts.append(ring)
                    ends.append(np.roll(ring, -1, axis=0))
                if i < n:
                    starts.append(ring)
                    ends.append(rings[i + 1])
        ex, ey = np.eye(3)[0], np.eye(3)[1]
        xs = -0.5 * a + a * np.arange(nx + 1) / nx
        ys = -0.5 * b + b * np.arange(ny + 1) / ny
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
        # Equal-area radii for the grid (cell / 2 pi), capped against the neighbours; the
        # caps are taken on the whole structure so the images see the same junctions.
        whole_s = np.vstack([s, pa, pa * np.array([1.0, -1.0, 1.0])])
        whole_e = np.vstack([e, pb, pb * np.array([1.0, -1.0, 1.0])])
        radii = np.concatenate(
            [np.full(s.shape[0], cell / (2.0 * np.pi)), np.full(2 * n_probe, PROBE_RADIUS_M)]
        )
        radii = _cap_radii(whole_s, whole_e, radii)[: s.shape[0] + n_probe]
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
