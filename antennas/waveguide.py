"""Standard rectangular waveguides and their dominant TE10 mode.

The open-waveguide and horn models are fed by the TE10 mode of a hollow
rectangular guide of inner broad dimension ``a`` (``broad_m``) and narrow
dimension ``b`` (``narrow_m``).  This module holds

* :data:`WAVEGUIDE_SIZES`, the standard EIA "WR" sizes with their inner
  dimensions, and :func:`waveguide_dimensions` to look one up by name;
* :func:`te10_mode`, the TE10 cutoff frequency, guide wavelength, wave
  impedance and propagation constant, computed with scikit-rf's
  :class:`skrf.media.RectangularWaveguide` (perfectly conducting walls, empty
  guide), with the input checks every aperture model needs: a frequency at or
  below the TE10 cutoff is refused, one within 5 % above it is warned about,
  and so is one where TE20 or TE01 also propagate;
* :func:`flanged_aperture_admittance` and :func:`open_end_reflection`, an
  estimate of the mismatch at the open end (information only).

The radiating open end itself is :class:`keepclear.antennas.aperture.OpenWaveguide`.

All scikit-rf use sits in this module (its traps: always ``unit=`` on the
frequency and an explicit ``rho=`` on the media).

References
----------
.. [1] D. M. Pozar, *Microwave Engineering*, 4th ed., Wiley, 2012, sec. 3.3
   (rectangular waveguide: eqs. (3.84) cutoff, (3.85)-(3.86) propagation
   constant and TE wave impedance) and Table 3.2 (TE_mn summary).
.. [2] "Waveguide & Flange Selection Guide", RF Cafe,
   http://www.rfcafe.com/references/electrical/waveguide-chart.htm (inside
   width and height in inches, cutoff frequencies, IEC designations; the
   sizes are those of EIA RS-261-B).
.. [3] scikit-rf 2.2, :class:`skrf.media.RectangularWaveguide`,
   https://scikit-rf.readthedocs.io/.
"""

from __future__ import annotations

import difflib
import warnings
from dataclasses import dataclass
from typing import Final

import numpy as np
import skrf
from scipy import constants
from scipy.special import roots_legendre
from skrf.media import RectangularWaveguide

from .base import C_M_S, ETA0_OHM, ModelInputError, ModelRangeWarning

_INCH_M: Final[float] = constants.inch

#: Fraction above the TE10 cutoff inside which a warning is issued.
NEAR_CUTOFF_FRACTION: Final[float] = 0.05


@dataclass(frozen=True)
class WaveguideSize:
    """One standard rectangular waveguide size.

    Parameters
    ----------
    name : str
        EIA designation, e.g. ``"WR-340"``.
    broad_m : float
        Inner broad dimension a [m].
    narrow_m : float
        Inner narrow dimension b [m].
    band_hz : tuple of float
        Recommended operating band (low, high) [Hz].
    published_cutoff_hz : float
        TE10 cutoff frequency as printed in the source table [Hz] (a check
        value; the model computes its own).
    iec : str
        IEC 60153-2 designation where the source table gives one, else ``""``.
    """

    name: str
    broad_m: float
    narrow_m: float
    band_hz: tuple[float, float]
    published_cutoff_hz: float
    iec: str = ""


def _size(
    name: str, a_in: float, b_in: float, lo_ghz: float, hi_ghz: float, fc_ghz: float, iec: str = ""
) -> tuple[str, WaveguideSize]:
    return name, WaveguideSize(
        name, a_in * _INCH_M, b_in * _INCH_M, (lo_ghz * 1e9, hi_ghz * 1e9), fc_ghz * 1e9, iec
    )


#: Standard rectangular waveguides: inner dimensions from the RF Cafe chart [2]_
#: (inches, converted with the exact inch), recommended band and printed TE10 cutoff.
WAVEGUIDE_SIZES: Final[dict[str, WaveguideSize]] = dict(
    [
        _size("WR-975", 9.750, 4.875, 0.75, 1.12, 0.605),
        _size("WR-770", 7.700, 3.850, 0.96, 1.45, 0.766),
        _size("WR-650", 6.500, 3.250, 1.12, 1.70, 0.908),
        _size("WR-510", 5.100, 2.550, 1.45, 2.20, 1.157),
        _size("WR-430", 4.300, 2.150, 1.70, 2.60, 1.372),
        _size("WR-340", 3.400, 1.700, 2.20, 3.30, 1.736),
        _size("WR-284", 2.840, 1.340, 2.60, 3.95, 2.078),
        _size("WR-229", 2.290, 1.145, 3.30, 4.90, 2.577, "R40"),
        _size("WR-187", 1.872, 0.872, 3.95, 5.85, 3.152, "R48"),
        _size("WR-159", 1.590, 0.795, 4.90, 7.05, 3.712, "R58"),
        _size("WR-137", 1.372, 0.622, 5.85, 8.20, 4.301, "R70"),
        _size("WR-112", 1.122, 0.497, 7.05, 10.00, 5.260, "R84"),
        _size("WR-90", 0.900, 0.400, 8.20, 12.40, 6.56, "R100"),
        _size("WR-75", 0.750, 0.375, 10.0, 15.0, 7.87),
        _size("WR-62", 0.622, 0.311, 12.40, 18.00, 9.49),
    ]
)


def _canonical(name: str) -> str:
    text = "".join(str(name).split()).upper().replace("_", "-")
    if text.startswith("WR") and not text.startswith("WR-"):
        text = "WR-" + text[2:]
    return text


def waveguide_dimensions(name: str) -> tuple[float, float]:
    """Inner dimensions of a standard waveguide.

    Parameters
    ----------
    name : str
        EIA name (``"WR-340"``; ``"WR340"``, ``"wr 340"`` are accepted) or the
        IEC designation where the table has one (``"R48"``).

    Returns
    -------
    broad_m, narrow_m : float
        Inner broad dimension a and narrow dimension b [m].

    Raises
    ------
    ModelInputError
        ``parameter="waveguide"`` for an unknown name; the message lists the
        known names and suggests the closest.
    """
    key = _canonical(name)
    if key in WAVEGUIDE_SIZES:
        size = WAVEGUIDE_SIZES[key]
        return size.broad_m, size.narrow_m
    for size in WAVEGUIDE_SIZES.values():
        if size.iec and size.iec == key:
            return size.broad_m, size.narrow_m
    names = list(WAVEGUIDE_SIZES)
    close = difflib.get_close_matches(key, names, n=1, cutoff=0.6)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    raise ModelInputError(
        "waveguide",
        f"unknown waveguide size {name!r}{hint}; known sizes: {', '.join(names)}; "
        "or give broad_m and narrow_m instead",
    )


@dataclass(frozen=True)
class TE10Mode:
    """The TE10 mode of an empty, perfectly conducting rectangular guide at one frequency.

    Parameters
    ----------
    broad_m, narrow_m : float
        Inner dimensions a and b [m].
    frequency_hz : float
        Frequency [Hz].
    cutoff_hz : float
        TE10 cutoff frequency c / (2 a) [Hz].
    te20_cutoff_hz, te01_cutoff_hz : float
        Cutoff frequencies of the next modes, c / a and c / (2 b) [Hz].
    guide_wavelength_m : float
        lambda_g = lambda / sqrt(1 - (f_c / f)^2) [m].
    wave_impedance_ohm : float
        Z_TE10 = eta0 / sqrt(1 - (f_c / f)^2) [ohm].
    beta_rad_m : float
        Phase constant beta = k sqrt(1 - (f_c / f)^2) [rad m^-1]; the
        propagation constant is gamma = j beta.
    """

    broad_m: float
    narrow_m: float
    frequency_hz: float
    cutoff_hz: float
    te20_cutoff_hz: float
    te01_cutoff_hz: float
    guide_wavelength_m: float
    wave_impedance_ohm: float
    beta_rad_m: float

    @property
    def propagation_constant(self) -> complex:
        """Propagation constant gamma = alpha + j beta [m^-1] (alpha = 0: lossless walls)."""
        return complex(0.0, self.beta_rad_m)

    @property
    def beta_over_k(self) -> float:
        """Ratio beta / k = eta0 / Z_TE10, the TE10 obliquity factor (dimensionless)."""
        return self.beta_rad_m / (2 * np.pi * self.frequency_hz / C_M_S)

    @property
    def is_multimode(self) -> bool:
        """Whether TE20 or TE01 also propagate at this frequency."""
        return self.frequency_hz > min(self.te20_cutoff_hz, self.te01_cutoff_hz)


def _media(broad_m: float, narrow_m: float, frequency_hz: float, m: int = 1, n: int = 0):
    frequency = skrf.Frequency(frequency_hz, frequency_hz, 1, unit="Hz")
    # rho=None: perfectly conducting walls (scikit-rf 2.2 defaults to copper).
    return RectangularWaveguide(
        frequency, a=broad_m, b=narrow_m, m=m, n=n, ep_r=1, mu_r=1, rho=None
    )


def rectangular_mode_cutoff_hz(broad_m: float, narrow_m: float, m: int, n: int) -> float:
    """Cutoff frequency of the TE_mn mode of an empty rectangular guide (scikit-rf) [Hz].

    Notes
    -----
    :math:`f_{c,mn} = \\frac{c}{2\\pi}\\sqrt{(m\\pi/a)^2 + (n\\pi/b)^2}`,
    Pozar [1]_ eq. (3.84).
    """
    return float(np.atleast_1d(_media(broad_m, narrow_m, 1e9, m, n).f_cutoff)[0])


def check_waveguide_dimensions(broad_m: float, narrow_m: float) -> None:
    """Refuse dimensions that do not describe a rectangular guide.

    Raises
    ------
    ModelInputError
        ``broad_m`` or ``narrow_m`` not a positive finite number, or the
        narrow dimension larger than the broad one.
    """
    for key, value in (("broad_m", broad_m), ("narrow_m", narrow_m)):
        if not (isinstance(value, int | float) and np.isfinite(value) and value > 0):
            raise ModelInputError(key, f"{key} must be a length > 0 [m], got {value!r}")
    if narrow_m > broad_m:
        raise ModelInputError(
            "narrow_m",
            f"narrow_m ({narrow_m!r} m) must not exceed broad_m ({broad_m!r} m): the broad "
            "dimension a is the one across which the TE10 E-field varies",
        )


def te10_mode(broad_m: float, narrow_m: float, frequency_hz: float) -> TE10Mode:
    """TE10 quantities of an empty rectangular guide, with the validity checks.

    Parameters
    ----------
    broad_m : float
        Inner broad dimension a [m].
    narrow_m : float
        Inner narrow dimension b [m].
    frequency_hz : float
        Operating frequency [Hz].

    Returns
    -------
    TE10Mode

    Raises
    ------
    ModelInputError
        ``broad_m`` when the frequency is at or below the TE10 cutoff (the
        guide does not propagate: an open WR-187, f_c = 3.15 GHz, does not
        carry 2.45 GHz); bad dimensions as in :func:`check_waveguide_dimensions`.

    Warns
    -----
    ModelRangeWarning
        Within 5 % above the TE10 cutoff (the wave impedance and guide
        wavelength grow without bound there, the mode model is fragile), and
        when TE20 or TE01 propagate as well (the single-mode TE10 aperture
        model is then incomplete).

    Notes
    -----
    Computed with scikit-rf's ``RectangularWaveguide`` (TE10, ``rho=None``:
    perfectly conducting walls, empty guide).  The closed forms (Pozar [1]_
    sec. 3.3, Table 3.2) are

    .. math:: f_c = \\frac{c}{2a},\\quad
              \\beta = k\\sqrt{1 - (f_c/f)^2},\\quad
              \\lambda_g = \\frac{\\lambda}{\\sqrt{1-(f_c/f)^2}},\\quad
              Z_{TE} = \\frac{\\eta_0}{\\sqrt{1-(f_c/f)^2}}

    and are checked against these numbers in the tests.
    """
    check_waveguide_dimensions(broad_m, narrow_m)
    if not (np.isfinite(frequency_hz) and frequency_hz > 0):
        raise ModelInputError("frequency_hz", f"frequency_hz must be > 0, got {frequency_hz!r}")
    media = _media(broad_m, narrow_m, frequency_hz)
    cutoff = float(np.atleast_1d(media.f_cutoff)[0])
    te20 = rectangular_mode_cutoff_hz(broad_m, narrow_m, 2, 0)
    te01 = rectangular_mode_cutoff_hz(broad_m, narrow_m, 0, 1)
    if frequency_hz <= cutoff:
        raise ModelInputError(
            "broad_m",
            f"the TE10 cutoff of a guide {broad_m * 1e3:.2f} mm wide is {cutoff / 1e9:.4g} GHz, "
            f"not below the frequency {frequency_hz / 1e9:.4g} GHz: the guide does not "
            f"propagate; broad_m must exceed c/(2f) = {C_M_S / (2 * frequency_hz) * 1e3:.2f} mm",
        )
    if frequency_hz < (1.0 + NEAR_CUTOFF_FRACTION) * cutoff:
        warnings.warn(
            f"frequency {frequency_hz / 1e9:.4g} GHz is within {NEAR_CUTOFF_FRACTION:.0%} of "
            f"the TE10 cutoff {cutoff / 1e9:.4g} GHz of a {broad_m * 1e3:.2f} mm guide: the "
            "wave impedance and guide wavelength change fast here; the model is fragile",
            ModelRangeWarning,
            stacklevel=2,
        )
    if frequency_hz > min(te20, te01):
        which = "TE20" if te20 <= te01 else "TE01"
        warnings.warn(
            f"a {broad_m * 1e3:.2f} x {narrow_m * 1e3:.2f} mm guide also propagates {which} "
            f"(cutoff {min(te20, te01) / 1e9:.4g} GHz) at {frequency_hz / 1e9:.4g} GHz: the "
            "TE10-only aperture model is incomplete",
            ModelRangeWarning,
            stacklevel=2,
        )
    gamma = complex(np.atleast_1d(media.gamma)[0])
    z_te = complex(np.atleast_1d(media.z0_characteristic)[0])
    lambda_g = float(np.real(np.atleast_1d(media.lambda_guide)[0]))
    return TE10Mode(
        broad_m=float(broad_m),
        narrow_m=float(narrow_m),
        frequency_hz=float(frequency_hz),
        cutoff_hz=cutoff,
        te20_cutoff_hz=te20,
        te01_cutoff_hz=te01,
        guide_wavelength_m=lambda_g,
        wave_impedance_ohm=float(z_te.real),
        beta_rad_m=float(gamma.imag),
    )


# ------------------------------------------------------------------ open end
def flanged_aperture_admittance(
    broad_m: float, narrow_m: float, frequency_hz: float, samples: int = 128
) -> complex:
    """One-mode variational admittance of a TE10 guide opening into a flanged half-space.

    Parameters
    ----------
    broad_m, narrow_m : float
        Inner dimensions a and b [m].
    frequency_hz : float
        Frequency [Hz] (above the TE10 cutoff).
    samples : int
        Quadrature order per coordinate of the spectral integral.

    Returns
    -------
    complex
        Aperture admittance normalised to the TE10 wave admittance, y = Y Z_TE.

    Notes
    -----
    The aperture field is taken as the TE10 mode alone, E_y = V cos(pi x/a)
    (the one-mode Galerkin / variational approximation for a guide ending in
    an infinite flange).  The complex power radiated into the half-space is
    the spectral integral

    .. math:: P = \\frac{1}{4\\pi^2\\omega\\mu_0}\\iint |\\tilde E_y(k_x,k_y)|^2
              \\frac{k^2 - k_x^2}{k_z^*}\\,dk_x\\,dk_y ,\\qquad
              k_z = \\sqrt{k^2 - k_x^2 - k_y^2}

    (visible region: radiated power; invisible region, k_z = -j|k_z|: the
    stored energy), evaluated in polar coordinates with k_t = k sin(psi)
    inside and k_t = k cosh(tau) outside the visible circle, which removes the
    1/k_z singularity.  With the mode power |V|^2 ab / (2 Z_TE) the normalised
    admittance is y = Z_TE P^* / (|V|^2 a b / 2).  This is the standard
    one-mode variational estimate of the open-end admittance (e.g. R. F.
    Harrington, *Time-Harmonic Electromagnetic Fields*, McGraw-Hill, 1961,
    ch. 8 — from memory); it neglects the higher-order modes excited at the
    junction, and a real guide has a finite flange or none.  Use it as
    information only.
    """
    mode = te10_mode(broad_m, narrow_m, frequency_hz)
    k = 2 * np.pi * frequency_hz / C_M_S
    a, b = broad_m, narrow_m
    omega_mu = k * ETA0_OHM

    def spectrum_sq(kx: np.ndarray, ky: np.ndarray) -> np.ndarray:
        # |FT of cos(pi x/a) on |x|<a/2|^2 * |FT of 1 on |y|<b/2|^2
        u = kx * a / 2
        den = (np.pi / 2) ** 2 - u**2
        near = np.abs(den) < 1e-9
        fx = np.where(near, a / 2, (np.pi * a / 2) * np.cos(u) / np.where(near, 1.0, den))
        fy = b * np.sinc(ky * b / (2 * np.pi))
        return (fx * fy) ** 2

    x, w = roots_legendre(samples)
    # azimuth alpha over a quarter (the integrand is even in kx and ky) -> x4
    alpha = (x + 1) * np.pi / 4
    w_alpha = w * np.pi / 4
    ca, sa = np.cos(alpha), np.sin(alpha)
    # visible region: k_t = k sin(psi), psi in [0, pi/2]; dk_t k_t / k_z = k_t dpsi
    psi = (x + 1) * np.pi / 4
    w_psi = w * np.pi / 4
    kt = k * np.sin(psi)
    kx = kt[:, None] * ca[None, :]
    ky = kt[:, None] * sa[None, :]
    integrand = spectrum_sq(kx, ky) * (k**2 - kx**2) * kt[:, None]
    p_real = 4 * np.sum(integrand * w_psi[:, None] * w_alpha[None, :])
    # invisible region: k_t = k cosh(tau); dk_t k_t / |k_z| = k_t dtau.  Split tau range.
    total_imag = 0.0
    edges = np.linspace(0.0, np.arccosh(400.0), 9)
    for lo, hi in zip(edges[:-1], edges[1:], strict=True):
        tau = lo + (x + 1) * (hi - lo) / 2
        w_tau = w * (hi - lo) / 2
        kt = k * np.cosh(tau)
        kx = kt[:, None] * ca[None, :]
        ky = kt[:, None] * sa[None, :]
        integrand = spectrum_sq(kx, ky) * (k**2 - kx**2) * kt[:, None]
        total_imag += 4 * np.sum(integrand * w_tau[:, None] * w_alpha[None, :])
    # 1/k_z^* = -j/|k_z| in the invisible region
    power = (p_real - 1j * total_imag) / (4 * np.pi**2 * omega_mu)
    mode_power_per_v2 = a * b / (2 * mode.wave_impedance_ohm)
    return complex(np.conj(power) / mode_power_per_v2)


def open_end_reflection(broad_m: float, narrow_m: float, frequency_hz: float) -> complex:
    """Estimated TE10 reflection coefficient at a flanged open end (information only).

    Parameters
    ----------
    broad_m, narrow_m : float
        Inner dimensions a and b [m].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    complex
        Gamma = (1 - y) / (1 + y) with y from :func:`flanged_aperture_admittance`.

    Notes
    -----
    The keep-out models do not use it: ``power_w`` is the power delivered to
    the antenna while it radiates, so all of it is radiated (conservative).
    """
    y = flanged_aperture_admittance(broad_m, narrow_m, frequency_hz)
    return complex((1 - y) / (1 + y))
