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
from typing import Any, Final

import numpy as np
from numpy.typing import NDArray

from . import moment
from .aperture import OpenWaveguide
from .aperture.radiator import inside_guide
from .base import ModelInputError
from .horn import PyramidalHorn, inside_horn
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

    @property
    def radiating_dimension_m(self) -> float:
        """The opening's size, as the aperture model gives it (the Fraunhofer distance's D).

        The walls and feed solved behind it (in ``largest_dimension_m``, which bounds the
        sources for the field evaluation) do not set the far-field distance.
        """
        return self.aperture.radiating_dimension_m


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
        super().__init__(guide)
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
    segment whose centre lies inside another wire).  The open guide keeps a quarter for
    both; the horn relaxes the neighbour's share (:data:`HORN_NEIGHBOUR_RADIUS_PER_LENGTH`).
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
#: Largest radius of a horn grid wire as a fraction of the shortest neighbour meeting it
#: (its own segment: a quarter, :data:`keepclear.antennas.moment.MAX_RADIUS_PER_LENGTH`).
#: The horn's grid has short segments at every junction (the ring wires split at the two
#: symmetry planes, the throat's and the short's rings three times finer than the feed's);
#: a quarter of those thinned the wires meeting them to a leaky grid (GridHorn, Notes).
HORN_NEIGHBOUR_RADIUS_PER_LENGTH: Final[float] = 0.4
#: Keep-out margin [dB] of the horn: the largest error in front against openEMS v0.0.35
#: (horn-wr340, -0.85 dB).
HORN_GAIN_UNCERTAINTY_DB: Final[float] = 0.9


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
) -> float:
    """Segments of the whole horn grid (before the plane splits), without building it."""
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
    return feed + flare + short + 8 * _probe_segments(narrow_m, lam)


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

    Attributes
    ----------
    feed_length_m : float
        Length of the feed guide behind the throat, closed by the short [m]:
        :data:`HORN_FEED_GUIDE_WAVELENGTHS` guide wavelengths.
    gain_uncertainty_db : float
        0.9 dB, the largest error in front against the full-wave validation.
    aperture : PyramidalHorn

    Raises
    ------
    ModelInputError
        The grid would exceed :data:`HORN_MAX_SEGMENTS`.

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
      neighbour (:data:`HORN_NEIGHBOUR_RADIUS_PER_LENGTH`; a neighbour's centre, its
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
    2 mm walls; 43 points 0.1-0.45 m): in front (within 60 deg) -0.85 to +0.29 dB; beside
    and behind -1.67 to +4.33 dB (the highest at H 135 deg 0.3 m, where the field is 38 dB
    under the beam's peak at that distance).  Boresight directivity 14.76 against
    14.64 dBi.  The far-field H plane behind keeps a residue where full wave has a deep
    null (-34 dBi at 125-130 deg; the model -28 to -22 dBi), and misses the full-wave
    shallow lobes at 90 and 105 deg by -3.0 and -6.6 dB (directions 40 dB under the peak);
    beyond 60 deg the E plane is within 1.7 dB of the full-wave pattern, the H plane
    from 140 to 180 deg within 2.3 dB (nf2ff cuts, 5 deg steps).

    References: module docstring, and

    .. [4] N. Marcuvitz, *Waveguide Handbook*, MIT Radiation Laboratory Series vol. 10,
       McGraw-Hill, 1951, sec. 5.21 (inductive obstacles: grating of round wires; from
       memory of the edition).
    """

    kind = "horn"

    def __init__(self, horn: PyramidalHorn) -> None:
        super().__init__(horn)
        self.geometry = horn.geometry
        g = horn.geometry
        lg = _guide_wavelength_m(g.broad_m, self.frequency_hz)
        needed = horn_segments_needed(
            g.broad_m,
            g.narrow_m,
            g.aperture_width_m,
            g.aperture_height_m,
            g.length_m,
            self.frequency_hz,
        )
        if not (math.isfinite(lg) and needed <= HORN_MAX_SEGMENTS):
            raise ModelInputError(
                "length_m",
                f"the horn's wire grid needs about {needed} segments, more than "
                f"{HORN_MAX_SEGMENTS}",
            )
        self.feed_length_m = HORN_FEED_GUIDE_WAVELENGTHS * lg
        self._guide_wavelength_m = lg
        self.gain_uncertainty_db = HORN_GAIN_UNCERTAINTY_DB
        self._geometry_key = (
            self.frequency_hz,
            g.broad_m,
            g.narrow_m,
            g.aperture_width_m,
            g.aperture_height_m,
            g.length_m,
            self.feed_length_m,
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
        radii = np.concatenate([spacing / (2.0 * np.pi), np.full(2 * n_probe, PROBE_RADIUS_M)])
        radii = _cap_radii(whole_s, whole_e, radii, HORN_NEIGHBOUR_RADIUS_PER_LENGTH)
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
        """Inside the flare or the modelled feed guide, or within ``tolerance_m`` of the walls."""
        return inside_horn(points_local_m, self.geometry, self.feed_length_m, tolerance_m)
