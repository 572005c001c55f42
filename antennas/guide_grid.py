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

Validity and limits
-------------------
Perfect conductors, free space, no flange (a flanged guide uses the rim model of
:mod:`keepclear.antennas.walls`).  The structure is limited to :data:`MAX_SEGMENTS`
segments (a guide up to about 0.5 m long at 2.45 GHz): :func:`segments_needed`
tells a builder beforehand, and the scenario reader then falls back to the rim model.
Inside the guide the grid's field is reported as computed; nobody stands there
(:meth:`GridOpenWaveguide.inside_or_on`).

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
from typing import Final

import numpy as np
from numpy.typing import NDArray

from . import moment
from .aperture import OpenWaveguide
from .aperture.radiator import inside_guide
from .base import ModelInputError
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
    broad_m: float, narrow_m: float, frequency_hz: float, guide_length_m: float
) -> float:
    """Number of segments of the grid (walls, short and probe), without building it."""
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
    return walls + short + _probe_segments(narrow_m, lam)


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


class GridOpenWaveguide(SolvedWireRadiator):
    """Open end of a TE10 guide, solved with its walls, short and launcher probe.

    Parameters
    ----------
    guide : OpenWaveguide
        The aperture model of the same guide: its frequency, power, placement and
        dimensions are used (and its TE10 mode, for the description).
    guide_length_m : float, optional
        Length of the straight guide behind the opening, closed by the short [m];
        default :func:`default_guide_length_m`; at least 0.75 guide wavelengths.

    Attributes
    ----------
    guide_length_m : float
    gain_uncertainty_db : float
        0.9 dB, the largest error in front against the full-wave validation.
    aperture : OpenWaveguide
        The aperture model, for what it describes (mode, open-end reflection).

    Raises
    ------
    ModelInputError
        ``guide_length_m`` not a length of at least 0.75 guide wavelengths, the guide
        below cut-off, or a grid of more than :data:`MAX_SEGMENTS` segments.

    Notes
    -----
    Model, validation and references: module docstring.
    """

    kind = "open-waveguide"

    def __init__(self, guide: OpenWaveguide, guide_length_m: float | None = None) -> None:
        super().__init__(guide.frequency_hz, guide.power_w, guide.placement)
        self.aperture = guide
        a, b = float(guide.broad_m), float(guide.narrow_m)
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
        needed = segments_needed(a, b, self.frequency_hz, length)
        if needed > MAX_SEGMENTS:
            raise ModelInputError(
                "guide_length_m",
                f"the guide's wire grid needs {needed} segments, more than {MAX_SEGMENTS}",
            )
        self.guide_length_m = length
        self.broad_m, self.narrow_m = a, b
        self.mode = guide.mode
        self.gain_uncertainty_db = GAIN_UNCERTAINTY_DB
        self._guide_wavelength_m = lg
        self._geometry_key = (self.frequency_hz, a, b, length)
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

    @property
    def boresight(self) -> NDArray[np.float64]:
        """The opening's normal in scenario axes [1]."""
        return self.aperture.boresight

    def _local_outline(self) -> NDArray[np.float64]:
        """The guide's eight corners: the opening, then the short [m]."""
        a, b = 0.5 * self.broad_m, 0.5 * self.narrow_m
        face = np.array([[-a, -b, 0.0], [a, -b, 0.0], [a, b, 0.0], [-a, b, 0.0]])
        return np.vstack([face, face - np.array([0.0, 0.0, self.guide_length_m])])

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Inside the guide, or within ``tolerance_m`` of its walls or short."""
        p = points_local_m
        tol = float(tolerance_m)
        along = (p[:, 2] <= tol) & (p[:, 2] >= -self.guide_length_m - tol)
        return np.asarray(along & inside_guide(p, 0.5 * self.broad_m, 0.5 * self.narrow_m, tol))


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
