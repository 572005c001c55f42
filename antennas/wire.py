"""Thin-wire dipole and monopole with a sinusoidal standing-wave current.

Model
-----
A straight, perfectly conducting, infinitely thin wire (a *filament*) along the
local z axis carries the standing-wave current

.. math:: I(z) = I_m \\sin k(h - |z|), \\qquad |z| \\le h,

the classic approximation for a centre-fed wire of radius :math:`a \\ll \\lambda`.
For this current the fields everywhere outside the filament are known in closed
form (Schelkunoff [3]_; Jordan & Balmain [2]_ ch. 14; Balanis [1]_ sec. 8.5, the
near fields used by the induced-EMF method).  With
:math:`R_1 = \\sqrt{\\rho^2 + (z-h)^2}`, :math:`R_2 = \\sqrt{\\rho^2 + (z+h)^2}`,
:math:`r = \\sqrt{\\rho^2 + z^2}` and the time convention :math:`e^{+j\\omega t}`:

.. math::

    E_z &= -\\frac{j\\eta_0 I_m}{4\\pi}
          \\left[\\frac{e^{-jkR_1}}{R_1} + \\frac{e^{-jkR_2}}{R_2}
          - 2\\cos kh\\,\\frac{e^{-jkr}}{r}\\right] \\\\
    E_\\rho &= \\frac{j\\eta_0 I_m}{4\\pi\\rho}
          \\left[(z-h)\\frac{e^{-jkR_1}}{R_1} + (z+h)\\frac{e^{-jkR_2}}{R_2}
          - 2z\\cos kh\\,\\frac{e^{-jkr}}{r}\\right] \\\\
    H_\\phi &= \\frac{j I_m}{4\\pi\\rho}
          \\left[e^{-jkR_1} + e^{-jkR_2} - 2\\cos kh\\, e^{-jkr}\\right]

These are exact solutions of Maxwell's equations for the assumed current (every
term, reactive and radiating), not the far-field pattern carried inwards.  The
far field of the same current is (Balanis [1]_ eq. 4-58a)

.. math:: F_\\theta(\\theta) = \\frac{j\\eta_0 I_m}{2\\pi}
          \\frac{\\cos(kh\\cos\\theta) - \\cos kh}{\\sin\\theta},

and the radiated power :math:`P = |I_m|^2 R_m` with the radiation resistance
referred to the current maximum (Balanis [1]_ eq. 4-70, :math:`l = 2h`)

.. math:: R_m = \\frac{\\eta_0}{2\\pi}\\Big\\{C + \\ln kl - \\mathrm{Ci}(kl)
          + \\tfrac12 \\sin kl\\,[\\mathrm{Si}(2kl) - 2\\mathrm{Si}(kl)]
          + \\tfrac12 \\cos kl\\,[C + \\ln(kl/2) + \\mathrm{Ci}(2kl)
          - 2\\mathrm{Ci}(kl)]\\Big\\},

C = 0.5772... (Euler's constant).  Referred to the feed current
:math:`I_m \\sin kh` the input resistance is :math:`R_{in} = R_m / \\sin^2 kh`
(Balanis [1]_ eq. 4-79).

Monopole: by image theory (Balanis [1]_ sec. 4.7) a monopole of height h on an
infinite perfectly conducting plane has, in the upper half-space, the fields of
the dipole of length 2h with the same current; it radiates half the power, so
:math:`R_{mono} = R_m(2h)/2` and :math:`D_{mono} = 2 D_{dip}(2h)`.

Assumptions and range of validity
---------------------------------
* The current is the sinusoid above.  Good for thin wires (a below about
  lambda/100) up to a few wavelengths long; poorest near lengths where the feed
  current of the sinusoid vanishes (dipole l = lambda, 2 lambda, ...), where the
  real current is not zero at the feed and :math:`R_{in}` is large but finite.
  The NEC-2 cross-check (tests/test_wire_nec.py) bounds the field error of the
  half-wave dipole and quarter-wave monopole: within 1 dB from lambda/4 to 2 m,
  the largest differences (model up to 0.8 dB *below* NEC in |H|) next to the
  wire tips at lambda/4 from the feed, a few hundredths of a dB broadside in the
  far zone.  Peak gains agree with NEC-2 within 0.2 dB from lambda/2 to
  3 lambda, but for longer wires (e.g. 1.5 lambda) the near-zone levels differ
  by several dB near the pattern nulls, where the model under-estimates.
* ``power_w`` is the radiated power: ohmic loss in the wire and mismatch at the
  feed are ignored (a lossless antenna, so delivered power = radiated power).
* Field points closer to the wire axis than the wire radius ``a`` are evaluated
  at :math:`\\rho = a` (the wire surface, where the thin-wire field is largest
  outside the conductor), in the same azimuth (local +x on the axis).  This keeps
  points on the wire and at the feed finite.  Default :math:`a = \\lambda/1000`
  (0.12 mm at 2.45 GHz), capped at one fiftieth of the wire length.
* The monopole ground plane is infinite and perfectly conducting: the fields are
  exactly zero for local z < 0 (inside or behind the plane).

References
----------
.. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley,
   2016: sec. 4.2 (infinitesimal dipole, eqs. 4-8 to 4-10), sec. 4.5 (finite
   dipole: far field eq. 4-58, radiation resistance eq. 4-70, input resistance
   eq. 4-79), sec. 4.6 (half-wave dipole, R = 73 ohm, D = 1.643), sec. 4.7
   (ground effects, image theory, quarter-wave monopole R = 36.5 ohm),
   sec. 8.5 (near fields of the sinusoidal dipole in the induced-EMF method).
   Equation numbers from memory of the 3rd/4th editions.
.. [2] E. C. Jordan and K. G. Balmain, *Electromagnetic Waves and Radiating
   Systems*, 2nd ed., Prentice-Hall, 1968, ch. 14 (fields of the sinusoidal
   current filament; from memory).
.. [3] S. A. Schelkunoff and H. T. Friis, *Antennas: Theory and Practice*,
   Wiley, 1952 (near fields of the sinusoidal antenna; from memory).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import minimize_scalar
from scipy.special import sici

from .base import C_M_S, ETA0_OHM, ModelInputError, ModelRangeWarning, Placement, Radiator

#: Longest wire accepted, in wavelengths (dipole length or monopole height).
MAX_LENGTH_WAVELENGTHS = 5.0
#: Shortest wire accepted, in wavelengths.
MIN_LENGTH_WAVELENGTHS = 1e-3
#: Default wire radius, in wavelengths.
DEFAULT_RADIUS_WAVELENGTHS = 1e-3
#: Radius above which the thin-wire assumption is flagged, in wavelengths.
THIN_WIRE_WARN_WAVELENGTHS = 1e-2


# --------------------------------------------------------------------------- model functions
def sinusoidal_filament_fields(
    rho_m: NDArray[np.float64],
    z_m: NDArray[np.float64],
    half_length_m: float,
    wavenumber_rad_m: float,
    current_max_a: complex,
) -> tuple[NDArray[np.complex128], NDArray[np.complex128], NDArray[np.complex128]]:
    """Exact near fields of a filament with the current I_m sin k(h - |z|).

    Parameters
    ----------
    rho_m : ndarray
        Distance from the wire axis, > 0 [m].
    z_m : ndarray
        Coordinate along the wire, origin at the centre [m].
    half_length_m : float
        Half the wire length h [m].
    wavenumber_rad_m : float
        Free-space wavenumber k [rad m^-1].
    current_max_a : complex
        Amplitude I_m of the sinusoid (RMS phasor gives RMS fields) [A].

    Returns
    -------
    e_rho, e_z, h_phi : ndarray, complex
        Cylindrical components E_rho [V m^-1], E_z [V m^-1], H_phi [A m^-1].

    Notes
    -----
    The expressions of the module docstring (Balanis 4th ed. sec. 8.5;
    Jordan & Balmain 2nd ed. ch. 14).  Exact outside the filament for
    ``rho_m > 0``.

    References
    ----------
    .. [1] C. A. Balanis, *Antenna Theory*, 4th ed., Wiley, 2016, sec. 8.5.
    """
    k = wavenumber_rad_m
    h = half_length_m
    rho2 = rho_m * rho_m
    r1 = np.sqrt(rho2 + (z_m - h) ** 2)
    r2 = np.sqrt(rho2 + (z_m + h) ** 2)
    r0 = np.sqrt(rho2 + z_m * z_m)
    e1 = np.exp(-1j * k * r1)
    e2 = np.exp(-1j * k * r2)
    e0 = np.exp(-1j * k * r0)
    two_c = 2.0 * math.cos(k * h)
    g1 = e1 / r1
    g2 = e2 / r2
    g0 = e0 / r0
    q_e = 1j * ETA0_OHM * current_max_a / (4.0 * np.pi)
    e_z = -q_e * (g1 + g2 - two_c * g0)
    e_rho = q_e / rho_m * ((z_m - h) * g1 + (z_m + h) * g2 - two_c * z_m * g0)
    h_phi = 1j * current_max_a / (4.0 * np.pi * rho_m) * (e1 + e2 - two_c * e0)
    return e_rho, e_z, h_phi


def sinusoidal_dipole_pattern(
    cos_theta: NDArray[np.float64], half_length_rad: float
) -> NDArray[np.float64]:
    """Pattern factor g = [cos(kh cos theta) - cos kh] / sin^2 theta (finite everywhere).

    Parameters
    ----------
    cos_theta : ndarray
        Cosine of the angle from the wire axis.
    half_length_rad : float
        Electrical half length kh [rad].

    Returns
    -------
    ndarray
        g such that the far-field pattern is ``g * sin(theta)``.

    Notes
    -----
    Written as :math:`g = \\tfrac12 (kh)^2\\,\\mathrm{sinc}\\tfrac{kh(1+u)}{2\\pi}
    \\,\\mathrm{sinc}\\tfrac{kh(1-u)}{2\\pi}` (u = cos theta, numpy's normalised sinc),
    from :math:`\\cos a - \\cos b = 2\\sin\\tfrac{a+b}{2}\\sin\\tfrac{b-a}{2}` and
    :math:`\\sin^2\\theta = (1-u)(1+u)`; no division, exact on the axis.  The pattern
    :math:`g\\sin\\theta` is Balanis 4th ed. eq. 4-58a.
    """
    kh = half_length_rad
    u = np.clip(cos_theta, -1.0, 1.0)
    return (
        0.5
        * kh
        * kh
        * np.sinc(kh * (1.0 + u) / (2 * np.pi))
        * np.sinc(kh * (1.0 - u) / (2 * np.pi))
    )


def dipole_radiation_resistance_ohm(length_rad: float) -> float:
    """Radiation resistance of the sinusoidal dipole, referred to the current maximum [ohm].

    Parameters
    ----------
    length_rad : float
        Electrical total length kl = 2 kh [rad].

    Returns
    -------
    float
        R_m such that the radiated power is |I_m|^2 R_m (RMS I_m) [ohm].

    Notes
    -----
    Balanis 4th ed. eq. 4-70 (see the module docstring), with Ci and Si from
    :func:`scipy.special.sici`.  For kl = pi it gives 73.08 ohm (Balanis sec. 4.6:
    73 ohm).

    References
    ----------
    .. [1] C. A. Balanis, *Antenna Theory*, 4th ed., Wiley, 2016, eq. (4-70).
    """
    kl = float(length_rad)
    c_e = float(np.euler_gamma)
    si1, ci1 = sici(kl)
    si2, ci2 = sici(2.0 * kl)
    bracket = (
        c_e
        + math.log(kl)
        - ci1
        + 0.5 * math.sin(kl) * (si2 - 2.0 * si1)
        + 0.5 * math.cos(kl) * (c_e + math.log(kl / 2.0) + ci2 - 2.0 * ci1)
    )
    return float(ETA0_OHM / (2.0 * np.pi) * bracket)


def dipole_pattern_maximum(half_length_rad: float) -> tuple[float, float]:
    """Largest value of the far-field pattern f = [cos(kh cos t) - cos kh] / sin t.

    Parameters
    ----------
    half_length_rad : float
        Electrical half length kh [rad].

    Returns
    -------
    f_max : float
        max over theta of |f(theta)|.
    theta_max_rad : float
        Angle from the axis, in [0, pi/2], where it occurs [rad].

    Notes
    -----
    For kh <= pi (dipole up to one wavelength) the maximum is broadside,
    f = 1 - cos kh (closed form; Balanis 4th ed. sec. 4.5.3).  Longer wires are
    searched on a grid of angles and refined by a bounded scalar search.
    """
    kh = float(half_length_rad)
    if kh <= np.pi:
        return 1.0 - math.cos(kh), 0.5 * np.pi

    def pattern(theta: NDArray[np.float64] | float) -> NDArray[np.float64]:
        c = np.cos(theta)
        return np.abs(sinusoidal_dipole_pattern(np.atleast_1d(c), kh) * np.sin(theta))

    grid = np.linspace(0.0, 0.5 * np.pi, 4001)
    values = pattern(grid)
    i = int(np.argmax(values))
    step = grid[1] - grid[0]
    lo, hi = max(0.0, grid[i] - step), min(0.5 * np.pi, grid[i] + step)
    res = minimize_scalar(
        lambda t: -float(pattern(t)[0]), bounds=(lo, hi), method="bounded", options={"xatol": 1e-10}
    )
    best_t, best_f = (
        (float(res.x), -float(res.fun)) if -res.fun > values[i] else (grid[i], values[i])
    )
    return float(best_f), float(best_t)


# --------------------------------------------------------------------------- parameters
#: Distance, in units of max(length, wavelength), beyond which the radiation field is used.
FAR_ZONE_FACTOR = 1000.0


@dataclass(frozen=True)
class ThinWire:
    """Electrical description of a sinusoidal-current wire (immutable).

    Parameters
    ----------
    half_length_m : float
        h: half the dipole length, or the monopole height (the image dipole's
        half length) [m].
    wire_radius_m : float
        Wire radius a; field points nearer the axis are evaluated at rho = a [m].
    wavenumber_rad_m : float
        Free-space wavenumber k [rad m^-1].
    """

    half_length_m: float
    wire_radius_m: float
    wavenumber_rad_m: float

    @property
    def half_length_rad(self) -> float:
        """Electrical half length kh [rad]."""
        return self.wavenumber_rad_m * self.half_length_m

    @property
    def dipole_radiation_resistance_ohm(self) -> float:
        """R_m of the full (image) dipole of length 2h, referred to I_m [ohm]."""
        return dipole_radiation_resistance_ohm(2.0 * self.half_length_rad)


def _validate_wire(
    frequency_hz: float,
    length_m: float | None,
    wire_radius_m: float | None,
    resonant_fraction: float,
    what: str,
) -> tuple[float, float]:
    """Check and default the wire length and radius; return (length, radius) [m]."""
    lam = C_M_S / frequency_hz
    if length_m is None:
        length = resonant_fraction * lam
    else:
        try:
            length = float(length_m)
        except (TypeError, ValueError):
            raise ModelInputError(
                "length_m", f"length_m must be a number of metres, got {length_m!r}"
            ) from None
        if not math.isfinite(length) or length <= 0.0:
            raise ModelInputError("length_m", f"length_m must be > 0 m, got {length_m!r}")
        lo, hi = MIN_LENGTH_WAVELENGTHS * lam, MAX_LENGTH_WAVELENGTHS * lam
        if not lo <= length <= hi:
            raise ModelInputError(
                "length_m",
                f"length_m = {length:g} m is outside the thin-wire model's range for the {what} "
                f"at {frequency_hz:g} Hz: {lo:.3g} m to {hi:.3g} m "
                f"({MIN_LENGTH_WAVELENGTHS:g} to {MAX_LENGTH_WAVELENGTHS:g} wavelengths)",
            )
    if wire_radius_m is None:
        radius = min(DEFAULT_RADIUS_WAVELENGTHS * lam, length / 50.0)
    else:
        try:
            radius = float(wire_radius_m)
        except (TypeError, ValueError):
            raise ModelInputError(
                "wire_radius_m", f"wire_radius_m must be a number of metres, got {wire_radius_m!r}"
            ) from None
        if not math.isfinite(radius) or radius <= 0.0:
            raise ModelInputError(
                "wire_radius_m", f"wire_radius_m must be > 0 m, got {wire_radius_m!r}"
            )
        if radius >= length / 10.0:
            raise ModelInputError(
                "wire_radius_m",
                f"wire_radius_m = {radius:g} m is not thin against the {what} length "
                f"{length:g} m; the thin-wire model needs a radius below length/10 "
                f"({length / 10.0:.3g} m)",
            )
        if radius > THIN_WIRE_WARN_WAVELENGTHS * lam:
            warnings.warn(
                f"wire_radius_m = {radius:g} m exceeds lambda/100 ({lam / 100:.3g} m): the "
                "sinusoidal-current thin-wire model loses accuracy for thick wires",
                ModelRangeWarning,
                stacklevel=3,
            )
    return length, radius


# --------------------------------------------------------------------------- radiators
def wire_proximity(
    points_local_m: NDArray[np.float64], z_start_m: float, z_end_m: float, reach_m: float
) -> NDArray[np.bool_]:
    """Points (N, 3) within ``reach_m`` of the axis segment z_start..z_end on local z.

    Parameters
    ----------
    points_local_m : ndarray, shape (N, 3)
        Points in the wire's local frame [m].
    z_start_m, z_end_m : float
        Ends of the wire along local z [m].
    reach_m : float
        Largest distance from the segment (wire radius plus tolerance) [m].

    Returns
    -------
    ndarray of bool, shape (N,)
    """
    p = np.asarray(points_local_m, dtype=float)
    dz = np.maximum(np.maximum(z_start_m - p[:, 2], p[:, 2] - z_end_m), 0.0)
    return np.hypot(np.hypot(p[:, 0], p[:, 1]), dz) <= reach_m


class _SinusoidalWireRadiator(Radiator):
    """Shared machinery of the dipole and the monopole (fields of the image dipole)."""

    #: Fraction of the image dipole's power that this radiator emits.
    _power_fraction: float = 1.0
    #: True when only local z >= 0 exists (monopole over its ground plane).
    _upper_half_space_only: bool = False
    bytes_per_point = 1536

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        half_length_m: float,
        wire_radius_m: float,
        placement: Placement | None,
    ) -> None:
        super().__init__(frequency_hz, power_w, placement)
        self.wire = ThinWire(half_length_m, wire_radius_m, self.wavenumber_rad_m)
        self.wire_radius_m = wire_radius_m
        #: Radiation resistance referred to the current maximum I_m [ohm].
        self.radiation_resistance_ohm = (
            self._power_fraction * self.wire.dipole_radiation_resistance_ohm
        )
        #: RMS amplitude I_m of the sinusoidal current for the radiated power ``power_w`` [A].
        self.current_max_a = math.sqrt(self.power_w / self.radiation_resistance_ohm)
        f_max, _ = dipole_pattern_maximum(self.wire.half_length_rad)
        self._directivity = float(
            ETA0_OHM * f_max * f_max / (np.pi * self.radiation_resistance_ohm)
        )

    def _power_changed(self) -> None:
        self.current_max_a = math.sqrt(self.power_w / self.radiation_resistance_ohm)

    # ------------------------------------------------------------ derived numbers
    @property
    def feed_current_a(self) -> float:
        """RMS current at the feed point, |I_m sin kh| [A] (zero for a full-wave dipole)."""
        return abs(self.current_max_a * math.sin(self.wire.half_length_rad))

    @property
    def feed_resistance_ohm(self) -> float:
        """Input (feed-point) resistance R_in = R_m / sin^2 kh [ohm].

        Notes
        -----
        Balanis 4th ed. eq. 4-79 (lossless wire: the feed and the current
        maximum see the same power).  Where sin kh = 0 (dipole lengths of whole
        wavelengths, monopole heights of whole half-wavelengths) the sinusoid puts
        no current at the feed and this returns ``inf``; the real input
        resistance there is large but finite and set by the wire radius, which
        this model cannot give.  Near those lengths the value is unreliable.
        """
        s2 = math.sin(self.wire.half_length_rad) ** 2
        if s2 < 1e-12:
            return math.inf
        return self.radiation_resistance_ohm / s2

    @property
    def directivity(self) -> float:
        """Peak directivity D (linear) from the model; equal to the gain (lossless)."""
        return self._directivity

    def max_gain(self, samples: int = 0) -> float:
        """Peak gain (linear) in closed form: D = eta0 f_max^2 / (pi R_m).

        Notes
        -----
        :math:`U_{max} = \\eta_0 |I_m|^2 f_{max}^2 / (4\\pi^2)` and
        :math:`P = |I_m|^2 R`, so :math:`D = 4\\pi U_{max}/P`
        (Balanis 4th ed. eq. 2-16).  ``samples`` is unused.
        """
        return self.directivity

    # ------------------------------------------------------------------- model
    def _local_fields(
        self, points_local_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        x, y, z = points_local_m[:, 0], points_local_m[:, 1], points_local_m[:, 2]
        rho = np.hypot(x, y)
        on_axis = rho <= 0.0
        safe = np.where(on_axis, 1.0, rho)
        cos_phi = np.where(on_axis, 1.0, x / safe)
        sin_phi = np.where(on_axis, 0.0, y / safe)
        rho_eval = np.maximum(rho, self.wire.wire_radius_m)
        e_rho, e_z, h_phi = sinusoidal_filament_fields(
            rho_eval, z, self.wire.half_length_m, self.wavenumber_rad_m, self.current_max_a
        )
        e = np.empty((points_local_m.shape[0], 3), dtype=complex)
        h = np.empty_like(e)
        e[:, 0] = e_rho * cos_phi
        e[:, 1] = e_rho * sin_phi
        e[:, 2] = e_z
        h[:, 0] = -h_phi * sin_phi
        h[:, 1] = h_phi * cos_phi
        h[:, 2] = 0.0
        # Far out, the exact sums cancel catastrophically (worst on the axis, where the
        # field is a tiny 1/r^2 remainder): use the radiation field there.  Beyond
        # FAR_ZONE_FACTOR x max(length, wavelength) the induction terms are below 1e-3 of it.
        r = np.linalg.norm(points_local_m, axis=1)
        far = r > FAR_ZONE_FACTOR * max(2.0 * self.wire.half_length_m, self.wavelength_m)
        if far.any():
            u = points_local_m[far] / r[far, None]
            phase = np.exp(-1j * self.wavenumber_rad_m * r[far]) / r[far]
            e_far = self._local_far_field(u) * phase[:, None]
            e[far] = e_far
            h[far] = np.cross(u, e_far) / ETA0_OHM
        if self._upper_half_space_only:
            below = z < 0.0
            e[below] = 0.0
            h[below] = 0.0
        return e, h

    def _local_far_field(self, directions_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        ux, uy, uz = directions_local[:, 0], directions_local[:, 1], directions_local[:, 2]
        g = sinusoidal_dipole_pattern(uz, self.wire.half_length_rad)
        amp = 1j * ETA0_OHM * self.current_max_a / (2.0 * np.pi) * g
        # F = F_theta theta_hat with sin(theta) theta_hat = (uz ux, uz uy, -(ux^2 + uy^2)).
        f = np.column_stack([amp * uz * ux, amp * uz * uy, -amp * (ux * ux + uy * uy)])
        if self._upper_half_space_only:
            f[uz < 0.0] = 0.0
        return f


class Dipole(_SinusoidalWireRadiator):
    """Centre-fed thin-wire dipole with a sinusoidal current.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    power_w : float
        Radiated power (ohmic loss ignored, so equal to the delivered power) [W].
    length_m : float, optional
        Total tip-to-tip length l; default lambda/2 (the half-wave dipole).
        Allowed lambda/1000 to 5 lambda [m].
    placement : Placement, optional
        Centre and wire direction, from ``Placement.from_axes(position_m, axis)``.
    wire_radius_m : float, optional
        Wire radius a, below l/10; default min(lambda/1000, l/50) [m].

    Raises
    ------
    ModelInputError
        ``length_m`` not positive, or outside lambda/1000..5 lambda;
        ``wire_radius_m`` not positive or not below l/10.

    Warns
    -----
    ModelRangeWarning
        When the wire radius exceeds lambda/100.

    Notes
    -----
    Local frame: wire on the z axis from -l/2 to +l/2, feed at the origin.
    Fields: the exact expressions of the sinusoidal filament (module docstring,
    Balanis 4th ed. sec. 8.5) with h = l/2 and
    :math:`I_m = \\sqrt{P/R_m}` (RMS), :math:`R_m` from Balanis eq. 4-70.
    The far-field amplitude refers to the centre.  ``largest_dimension_m`` is l.

    References
    ----------
    .. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley,
       2016, secs. 4.5, 4.6 and 8.5.
    """

    kind = "dipole"

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        length_m: float | None = None,
        placement: Placement | None = None,
        wire_radius_m: float | None = None,
    ) -> None:
        Radiator.__init__(self, frequency_hz, power_w, placement)
        length, radius = _validate_wire(self.frequency_hz, length_m, wire_radius_m, 0.5, "dipole")
        self.length_m = length
        super().__init__(frequency_hz, power_w, 0.5 * length, radius, placement)

    @property
    def largest_dimension_m(self) -> float:
        """The dipole length l [m]."""
        return self.length_m

    def _local_outline(self) -> NDArray[np.float64]:
        """The wire's two ends, z = -l/2 and +l/2 [m]."""
        return np.array([[0.0, 0.0, -0.5 * self.length_m], [0.0, 0.0, 0.5 * self.length_m]])

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Within ``tolerance_m`` of the wire's surface (radius a about the z axis)."""
        half = 0.5 * self.length_m
        return wire_proximity(points_local_m, -half, half, self.wire_radius_m + tolerance_m)


class Monopole(_SinusoidalWireRadiator):
    """Base-fed thin-wire monopole on an infinite perfectly conducting ground plane.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    power_w : float
        Radiated power into the half-space above the plane (ohmic loss in wire
        and plane ignored) [W].
    length_m : float, optional
        Height h above the ground plane; default lambda/4 (the quarter-wave
        monopole).  Allowed lambda/1000 to 5 lambda [m].
    placement : Placement, optional
        Base point (on the plane) and wire direction (the plane normal, pointing
        into the radiating half-space), from ``Placement.from_axes(position_m, axis)``.
    wire_radius_m : float, optional
        Wire radius a, below h/10; default min(lambda/1000, h/50) [m].

    Raises
    ------
    ModelInputError
        ``length_m`` not positive, or outside lambda/1000..5 lambda;
        ``wire_radius_m`` not positive or not below h/10.

    Warns
    -----
    ModelRangeWarning
        When the wire radius exceeds lambda/100.

    Notes
    -----
    Local frame: the plane is z = 0, the wire occupies 0 <= z <= h with the feed
    at the origin.  Image theory (Balanis 4th ed. sec. 4.7): for z >= 0 the
    fields are those of the dipole of length 2h with the same I_m; the power is
    half, :math:`R_{mono} = R_m(2h)/2`, so :math:`I_m = \\sqrt{P/R_{mono}}` and
    the directivity doubles.  Fields and far field are zero for z < 0.

    ``largest_dimension_m`` is 2h, the length of the wire together with its
    image: the radiating current distribution whose far field this is, and the
    size that sets the Fraunhofer distance 2 D^2 / lambda measured from the base
    point (taking h would put the far-field distance four times too close).

    References
    ----------
    .. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley,
       2016, secs. 4.5 and 4.7.
    """

    kind = "monopole"
    _power_fraction = 0.5
    _upper_half_space_only = True

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        length_m: float | None = None,
        placement: Placement | None = None,
        wire_radius_m: float | None = None,
    ) -> None:
        Radiator.__init__(self, frequency_hz, power_w, placement)
        height, radius = _validate_wire(
            self.frequency_hz, length_m, wire_radius_m, 0.25, "monopole"
        )
        self.length_m = height
        self.height_m = height
        super().__init__(frequency_hz, power_w, height, radius, placement)

    @property
    def largest_dimension_m(self) -> float:
        """Wire plus image, 2h [m] (see Notes of the class)."""
        return 2.0 * self.height_m

    def _local_outline(self) -> NDArray[np.float64]:
        """The wire's base and tip, z = 0 and h [m] (the infinite plane is not drawn)."""
        return np.array([[0.0, 0.0, 0.0], [0.0, 0.0, self.height_m]])

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Within ``tolerance_m`` of the wire's surface or of the ground plane z = 0."""
        on_wire = wire_proximity(
            points_local_m, 0.0, self.height_m, self.wire_radius_m + tolerance_m
        )
        return on_wire | (np.abs(points_local_m[:, 2]) <= tolerance_m)
