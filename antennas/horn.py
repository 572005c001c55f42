"""Pyramidal horn fed by the TE10 mode of a rectangular guide.

The horn flares from the feed guide (``broad_m`` x ``narrow_m``) at its throat
to an aperture ``aperture_width_m`` (A, along the broad / H-plane direction,
local x) by ``aperture_height_m`` (B, along the narrow / E-plane direction,
local y) over an axial length ``length_m`` (L, throat to aperture).  The
aperture is the plane z = 0 of the local frame, centred on the reference
point, radiating towards +z with its E-field along +y.

Geometry (Balanis [1]_ sec. 13.4, Fig. 13.18 of the 3rd-edition numbering):
the E-plane walls meet at an apex rho_1 = L B / (B - b) behind the aperture,
the H-plane walls at rho_2 = L A / (A - a) (similar triangles; these are
eqs. (13-49a,b), p_e = (B - b) sqrt((rho_e/B)^2 - 1/4) = L, solved for rho_1
with rho_e^2 = rho_1^2 + (B/2)^2, and the same in the H-plane); the slant
lengths are rho_e = sqrt(rho_1^2 + B^2/4) and rho_h = sqrt(rho_2^2 + A^2/4).
A horn with A = a (or B = b) is a sectoral horn: no flare, no phase error in
that plane.

Aperture field (Balanis [1]_ eqs. (13-46a,b)):
E_y = E0 cos(pi x / A) e^{-j phi(x, y)}, H_x = -E_y / eta0, with the flare
phase either the exact path-length lag of the two cylindrical wavefronts,
phi = k (sqrt(rho_2^2 + x^2) - rho_2) + k (sqrt(rho_1^2 + y^2) - rho_1)
(``phase="exact"``, the default), or its quadratic approximation
phi = k (x^2 / (2 rho_2) + y^2 / (2 rho_1)) (``phase="quadratic"``, exactly
Balanis' model, used to check against his closed form (13-52)).  The
quadratic form over-states the phase error of a short, wide-flared horn and so
under-states its gain; the exact path length is the conservative choice and
also the more accurate one (finite-range gain formulas that avoid the path
length approximation agree with measurements to about 0.15 dB: IEEE Trans.
Electromagn. Compat. 39(4), Nov. 1997).  The fields are radiated by the
equivalent J and M of :mod:`keepclear.antennas.aperture` (both currents), the
amplitude scaled so the radiated power equals ``power_w``.

References
----------
.. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley,
   2016, sec. 13.4 (pyramidal horn).  Equation numbers are those of the
   3rd edition (2005) as quoted by the book's companion program for the
   pyramidal horn: (13-46) aperture fields, (13-49) realisability,
   (13-19) and (13-41) sectoral directivities, (13-52) pyramidal directivity;
   the 4th edition keeps the same development in sec. 13.4.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from dataclasses import dataclass
from typing import Final

import numpy as np
from numpy.typing import NDArray
from scipy.special import fresnel

from .aperture import HUYGENS, ApertureDistribution, ApertureRadiator, te10_distribution
from .aperture.open_waveguide import feed_guide_length_m
from .aperture.radiator import inside_guide, rectangle_corners
from .base import C_M_S, ETA0_OHM, ModelInputError, ModelRangeWarning, Placement
from .waveguide import TE10Mode, te10_mode

#: A flare half-angle above this is refused (the horn is then an abrupt step) [deg].
MAX_FLARE_HALF_ANGLE_DEG: Final[float] = 60.0
#: Above this flare half-angle a warning is issued [deg].
WARN_FLARE_HALF_ANGLE_DEG: Final[float] = 40.0
#: Flare phase models.
PHASE_MODELS: Final[tuple[str, ...]] = ("exact", "quadratic")


@dataclass(frozen=True)
class HornGeometry:
    """Flare geometry of a pyramidal horn (Balanis [1]_ sec. 13.4).

    Parameters
    ----------
    broad_m, narrow_m : float
        Feed guide inner dimensions a, b [m].
    aperture_width_m, aperture_height_m : float
        Aperture A (H-plane, x) and B (E-plane, y) [m].
    length_m : float
        Axial length L from throat to aperture (p_e = p_h) [m].
    """

    broad_m: float
    narrow_m: float
    aperture_width_m: float
    aperture_height_m: float
    length_m: float

    @property
    def rho1_m(self) -> float:
        """E-plane apex-to-aperture distance rho_1 = L B / (B - b) [m] (inf: no E-plane flare)."""
        flare = self.aperture_height_m - self.narrow_m
        return np.inf if flare <= 0 else self.length_m * self.aperture_height_m / flare

    @property
    def rho2_m(self) -> float:
        """H-plane apex-to-aperture distance rho_2 = L A / (A - a) [m] (inf: no H-plane flare)."""
        flare = self.aperture_width_m - self.broad_m
        return np.inf if flare <= 0 else self.length_m * self.aperture_width_m / flare

    @property
    def rho_e_m(self) -> float:
        """E-plane slant length sqrt(rho_1^2 + (B/2)^2) [m]."""
        return float(np.hypot(self.rho1_m, self.aperture_height_m / 2))

    @property
    def rho_h_m(self) -> float:
        """H-plane slant length sqrt(rho_2^2 + (A/2)^2) [m]."""
        return float(np.hypot(self.rho2_m, self.aperture_width_m / 2))

    @property
    def flare_half_angles_deg(self) -> tuple[float, float]:
        """(H-plane, E-plane) wall half-angles from the axis [deg]."""
        h = np.degrees(np.arctan2(self.aperture_width_m - self.broad_m, 2 * self.length_m))
        e = np.degrees(np.arctan2(self.aperture_height_m - self.narrow_m, 2 * self.length_m))
        return float(h), float(e)

    def phase_error_parameters(self, wavelength_m: float) -> tuple[float, float]:
        """Largest quadratic phase error at the aperture rim in turns, (t, s).

        t = A^2 / (8 lambda rho_2) (H-plane) and s = B^2 / (8 lambda rho_1)
        (E-plane); an optimum-gain horn has s about 1/4 and t about 3/8.
        """
        t = self.aperture_width_m**2 / (8 * wavelength_m * self.rho2_m)
        s = self.aperture_height_m**2 / (8 * wavelength_m * self.rho1_m)
        return float(t), float(s)


def check_horn_geometry(geometry: HornGeometry) -> None:
    """Refuse a horn that cannot be built, warn about a very wide flare.

    Raises
    ------
    ModelInputError
        ``aperture_width_m`` / ``aperture_height_m`` not positive or smaller
        than the feed (``broad_m`` / ``narrow_m``); ``length_m`` not positive,
        or so short that a wall's half-angle exceeds 60 deg.

    Warns
    -----
    ModelRangeWarning
        Flare half-angle above 40 deg: the aperture field of a single
        cylindrical wave is a poor description of such a horn.
    """
    checks = (
        ("aperture_width_m", geometry.aperture_width_m, "broad_m", geometry.broad_m),
        ("aperture_height_m", geometry.aperture_height_m, "narrow_m", geometry.narrow_m),
    )
    for key, value, feed_key, feed in checks:
        if not (np.isfinite(value) and value > 0):
            raise ModelInputError(key, f"{key} must be a length > 0 [m], got {value!r}")
        if value < feed:
            raise ModelInputError(
                key,
                f"{key} = {value!r} m is smaller than the feed guide's {feed_key} = {feed!r} m: "
                "a horn flares outwards from its feed",
            )
    length = geometry.length_m
    if not (np.isfinite(length) and length > 0):
        raise ModelInputError("length_m", f"length_m must be a length > 0 [m], got {length!r}")
    h_angle, e_angle = geometry.flare_half_angles_deg
    worst = max(h_angle, e_angle)
    if worst > MAX_FLARE_HALF_ANGLE_DEG:
        need = max(
            (geometry.aperture_width_m - geometry.broad_m),
            (geometry.aperture_height_m - geometry.narrow_m),
        ) / (2 * np.tan(np.radians(MAX_FLARE_HALF_ANGLE_DEG)))
        raise ModelInputError(
            "length_m",
            f"length_m = {length!r} m is too short for the flare: a wall would stand at "
            f"{worst:.0f} deg from the axis (at most {MAX_FLARE_HALF_ANGLE_DEG:.0f} deg); "
            f"give at least {need:.3g} m",
        )
    if worst > WARN_FLARE_HALF_ANGLE_DEG:
        warnings.warn(
            f"horn flare half-angle {worst:.0f} deg exceeds {WARN_FLARE_HALF_ANGLE_DEG:.0f} deg: "
            "the single-mode aperture field is a rough model of such a wide flare",
            ModelRangeWarning,
            stacklevel=3,
        )


def inside_horn(
    points_local_m: NDArray[np.float64],
    geometry: HornGeometry,
    feed_length_m: float,
    tolerance_m: float,
) -> NDArray[np.bool_]:
    """Points inside a horn's flare or its feed guide, or within ``tolerance_m`` of the walls.

    Local frame: mouth in z = 0, throat at z = -L.  Between them the cross-section grows
    linearly from a x b to A x B; behind the throat the feed guide (a x b) runs back
    ``feed_length_m``.  The tolerance widens each cross-section for the walls' metal.
    """
    g = geometry
    p = points_local_m
    z = p[:, 2]
    back = g.length_m + feed_length_m + tolerance_m
    along = np.clip((z + g.length_m) / g.length_m, 0.0, 1.0)  # 0 at the throat, 1 at the mouth
    half_x = 0.5 * (g.broad_m + (g.aperture_width_m - g.broad_m) * along)
    half_y = 0.5 * (g.narrow_m + (g.aperture_height_m - g.narrow_m) * along)
    return np.asarray((z <= 0.0) & (z >= -back) & inside_guide(p, half_x, half_y, tolerance_m))


def horn_distribution(
    geometry: HornGeometry, wavelength_m: float, phase: str = "exact"
) -> ApertureDistribution:
    """Aperture field of a pyramidal horn (Balanis [1]_ eqs. (13-46a,b)).

    Parameters
    ----------
    geometry : HornGeometry
        Flare geometry.
    wavelength_m : float
        Free-space wavelength [m].
    phase : {"exact", "quadratic"}
        Flare phase: exact cylindrical path length or its quadratic
        approximation (see the module docstring).

    Returns
    -------
    ApertureDistribution
        E_y = cos(pi x/A) e^{-j phi}, H_x = -E_y/eta0, both equivalent currents.
    """
    if phase not in PHASE_MODELS:
        raise ModelInputError("phase", f"phase must be one of {PHASE_MODELS}, got {phase!r}")
    k = 2 * np.pi / wavelength_m
    rho1, rho2 = geometry.rho1_m, geometry.rho2_m
    half_a, half_b = geometry.aperture_width_m / 2, geometry.aperture_height_m / 2

    def flare_phase(rho: float) -> Callable[[NDArray], NDArray] | None:
        if not np.isfinite(rho):
            return None
        if phase == "quadratic":
            return lambda u: k * u * u / (2 * rho)
        # k (sqrt(rho^2 + u^2) - rho), written without cancellation
        return lambda u: k * u * u / (np.sqrt(rho * rho + u * u) + rho)

    def rim_slope(rho: float, half: float) -> float:
        if not np.isfinite(rho):
            return 0.0
        return float(k * half / (rho if phase == "quadratic" else np.hypot(rho, half)))

    phase_x = flare_phase(rho2)
    phase_y = flare_phase(rho1)
    slope_x = rim_slope(rho2, half_a)
    slope_y = rim_slope(rho1, half_b)
    return te10_distribution(
        geometry.aperture_width_m,
        geometry.aperture_height_m,
        ETA0_OHM,
        HUYGENS,
        phase_x=phase_x,
        phase_y=phase_y,
        phase_slope_x_rad_m=slope_x,
        phase_slope_y_rad_m=slope_y,
        description=f"pyramidal horn aperture ({phase} flare phase)",
    )


def balanis_pyramidal_directivity(
    aperture_width_m: float,
    aperture_height_m: float,
    rho1_m: float,
    rho2_m: float,
    wavelength_m: float,
) -> float:
    """Directivity of a pyramidal horn from Balanis' closed form, eq. (13-52) (linear).

    Parameters
    ----------
    aperture_width_m, aperture_height_m : float
        Aperture A (H-plane) and B (E-plane) [m].
    rho1_m, rho2_m : float
        E- and H-plane apex-to-aperture distances (finite: both planes flared) [m].
    wavelength_m : float
        Wavelength [m].

    Returns
    -------
    float
        D_P = (8 pi rho1 rho2 / (A B)) {[C(u) - C(v)]^2 + [S(u) - S(v)]^2}
        {C^2(w) + S^2(w)} with lengths in wavelengths,
        u, v = (1/sqrt 2)(sqrt(lambda rho2)/A +- A/sqrt(lambda rho2)),
        w = B / sqrt(2 lambda rho1), C and S the Fresnel integrals
        (scipy.special.fresnel).  Equal to (pi lambda^2/(32 a b)) D_E D_H with
        the sectoral directivities (13-19) and (13-41).

    Notes
    -----
    Quadratic-phase aperture model, power taken as the aperture flux
    int |E|^2 / eta0 (the large-aperture normalisation).
    """
    if not (np.isfinite(rho1_m) and np.isfinite(rho2_m)):
        raise ValueError("the closed form (13-52) needs a flare in both planes")
    lam = wavelength_m
    a1, b1 = aperture_width_m / lam, aperture_height_m / lam
    r1, r2 = rho1_m / lam, rho2_m / lam
    u = (np.sqrt(r2) / a1 + a1 / np.sqrt(r2)) / np.sqrt(2)
    v = (np.sqrt(r2) / a1 - a1 / np.sqrt(r2)) / np.sqrt(2)
    s_u, c_u = fresnel(u)
    s_v, c_v = fresnel(v)
    s_w, c_w = fresnel(b1 / np.sqrt(2 * r1))
    h_factor = (c_u - c_v) ** 2 + (s_u - s_v) ** 2
    e_factor = c_w**2 + s_w**2
    return float(8 * np.pi * r1 * r2 / (a1 * b1) * h_factor * e_factor)


class PyramidalHorn(ApertureRadiator):
    """Pyramidal horn fed by a TE10 guide, with its radiating near field.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    power_w : float
        Power delivered to the horn while it radiates; all of it is radiated
        (about 1 % of it behind the aperture plane for a 16 dBi horn) [W].
    broad_m, narrow_m : float
        Feed guide inner dimensions a (along x) and b (along y, the E-field) [m].
    aperture_width_m : float
        Aperture A along the broad (H-plane, local x) direction [m].
    aperture_height_m : float
        Aperture B along the narrow (E-plane, local y) direction [m].
    length_m : float
        Axial length from the waveguide throat to the aperture [m].
    placement : Placement, optional
        Aperture centre (``position_m``) and orientation (boresight +z).
    phase : {"exact", "quadratic"}
        Flare phase model (default ``"exact"``, see the module docstring).
    method : {"adaptive", "direct"}
        Default quadrature.

    Attributes
    ----------
    geometry : HornGeometry
    mode : TE10Mode
        The feed mode (checked: refused below cutoff, warned near it or when
        multimode).
    gain_uncertainty_db : float
        Margin [dB] by which a real horn may exceed the model (0.5 dB).

    Notes
    -----
    The model and its numbers: module docstring and
    :mod:`keepclear.antennas.aperture`.  The aperture theory neglects the
    diffraction at the E-plane edges and the currents on the outer walls; for
    standard-gain horns it is usually quoted within a few tenths of a dB of
    measured gain, more for small horns (from memory): hence
    ``gain_uncertainty_db = 0.5``.  Behind the aperture plane the same
    integral is returned (the Kirchhoff continuation: spill-over beside and
    behind the horn; inside the horn body it has no meaning).
    """

    kind = "horn"

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        broad_m: float,
        narrow_m: float,
        aperture_width_m: float,
        aperture_height_m: float,
        length_m: float,
        placement: Placement | None = None,
        *,
        phase: str = "exact",
        method: str = "adaptive",
    ) -> None:
        if not (np.isfinite(frequency_hz) and frequency_hz > 0):
            raise ModelInputError("frequency_hz", f"frequency_hz must be > 0, got {frequency_hz!r}")
        self.mode: TE10Mode = te10_mode(broad_m, narrow_m, frequency_hz)
        self.geometry = HornGeometry(
            float(broad_m),
            float(narrow_m),
            float(aperture_width_m),
            float(aperture_height_m),
            float(length_m),
        )
        check_horn_geometry(self.geometry)
        self.phase = phase
        wavelength = C_M_S / frequency_hz
        super().__init__(
            frequency_hz,
            power_w,
            horn_distribution(self.geometry, wavelength, phase),
            placement,
            method=method,
        )
        self.gain_uncertainty_db = 0.5

    def _local_outline(self) -> NDArray[np.float64]:
        """Mouth (z = 0, A x B) then throat (z = -L, a x b), each in order around it [m]."""
        g = self.geometry
        return np.concatenate(
            [
                rectangle_corners(g.aperture_width_m / 2, g.aperture_height_m / 2, 0.0),
                rectangle_corners(g.broad_m / 2, g.narrow_m / 2, -g.length_m),
            ]
        )

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Inside the flare or the feed guide behind it, or within ``tolerance_m`` of the walls.

        Between the throat (z = -L) and the mouth (z = 0) the cross-section grows linearly
        from a x b to A x B; behind the throat the feed guide (a x b) is taken to run back
        :func:`~keepclear.antennas.aperture.open_waveguide.feed_guide_length_m`.  The
        tolerance widens each cross-section for the walls' metal.
        """
        feed_m = feed_guide_length_m(self.mode)
        return inside_horn(points_local_m, self.geometry, feed_m, tolerance_m)

    def balanis_directivity(self) -> float:
        """Balanis' closed-form directivity (13-52) of this geometry (linear)."""
        g = self.geometry
        return balanis_pyramidal_directivity(
            g.aperture_width_m, g.aperture_height_m, g.rho1_m, g.rho2_m, self.wavelength_m
        )
