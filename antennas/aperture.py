"""Radiation from a planar aperture by the equivalence principle, near field included.

The engine behind the open-waveguide model (:class:`OpenWaveguide`, in this
module) and the horn (:mod:`keepclear.antennas.horn`).  An aperture is a
rectangle ``|x| <= width/2, |y| <= height/2`` in the plane z = 0 of the local
frame, radiating towards +z, on which the tangential fields E_t and H_t are
known (:class:`ApertureDistribution`).  They are replaced by equivalent surface
currents (Balanis [1]_ sec. 12.2, eqs. (12-3)/(12-4); Harrington's form of the
equivalence principle)

.. math:: \\mathbf J_s = \\hat n \\times \\mathbf H_a,\\qquad
          \\mathbf M_s = -\\hat n \\times \\mathbf E_a,\\qquad \\hat n = \\hat z,

which radiate in free space ("huygens": both currents; the Kirchhoff-Huygens
or Stratton-Chu aperture model), or, for an aperture in an infinite
perfectly conducting plane, as ``2 M_s`` alone by image theory ("ground-plane",
Balanis [1]_ sec. 12.5.1 and 12.5.3; no field behind the plane).

Near field
----------
E and H at any point are the surface integrals of the *complete* free-space
dyadic Green's function: writing R = r - r', R = |R|, u = 1/(jkR) and
G = e^{-jkR}/(4 pi R),

.. math::
   \\mathbf E = -jk\\int G\\,\\big[\\eta_0 (a\\mathbf J + b\\hat R(\\hat R\\cdot\\mathbf J))
                - c\\,\\hat R\\times\\mathbf M\\big]\\,dS'

   \\mathbf H = -jk\\int G\\,\\big[(a\\mathbf M + b\\hat R(\\hat R\\cdot\\mathbf M))/\\eta_0
                + c\\,\\hat R\\times\\mathbf J\\big]\\,dS'

with a = 1 + u + u^2, b = -(1 + 3u + 3u^2), c = 1 + u: the 1/R (radiation),
1/R^2 (induction) and 1/R^3 (quasi-static) terms all kept.  This is
E = -j omega A - j grad(div A)/(omega mu eps) - curl(F)/eps and
H = curl(A)/mu - j omega F - j grad(div F)/(omega mu eps) with
A = mu int J G, F = eps int M G (Balanis [1]_ eqs. (3-29), (3-30), from
memory of the numbering), written out as in the complete fields of an
oscillating electric dipole and of a magnetic dipole (Jackson [2]_ eqs.
(9.18) and (9.36), converted to e^{+j omega t}).  Every quadrature node of the
aperture is such a pair of elementary dipoles, so the sum holds at any
distance from the aperture; what limits it close in is the quadrature, see
below.

Quadrature
----------
Tensor Gauss-Legendre nodes over the aperture rectangle.  The node count per
coordinate is chosen per field point from the analyticity of the integrand
(Trefethen [3]_, Theorem 19.3: for f analytic and bounded by M inside the
Bernstein ellipse E_rho, the n-point Gauss error is at most
64 M rho^{-2n} / (15 (rho^2 - 1))).  The integrand has a near-singularity
(its 1/R^3 pole) at the complex coordinate x' = x_p + j d, d the distance of
the point from the line of integration, and grows like e^{omega Im x'} from
the oscillation e^{-jkR} and the aperture's own phase; the estimate
minimises the required n over the ellipse parameter between the two
(:func:`gauss_legendre_order`).  Calibrated against brute-force integration
it gives at least the requested accuracy with 1.6 times the minimal node
count on average.  Points that need the same rule are grouped and evaluated
together in cache-sized blocks of at most 32768 point-node pairs (about 2 MB
of reused scratch per thread; larger rules are summed in slices of nodes).
The kernels that carry R_x and R_y are polynomials in the node coordinates,
so only three scalar kernels are computed per point-node pair and summed
against coordinate moments of the sources (:func:`dyadic_moment_sums`); the
kernels are computed in single precision (the phase is taken relative to the
aperture centre, so the float32 arguments stay small) and summed and
assembled in double precision.  The equivalent currents are written in their
smallest basis (one column for a linearly polarised aperture).  Orders are
capped at 1024 per coordinate, which an aperture of about 8 wavelengths
reaches at the minimum standoff.

Symmetry.  Where the currents have the mirror symmetries of the TE10 family
(J_y, M_x even in x and in y, :attr:`ApertureRadiator.mirror_parities`), the
field at a mirror point follows from the field at the point, E(Mp) = +-M E(p)
and H(Mp) = -+M H(p); the adaptive method folds the points of one call into
one quadrant and evaluates each folded point once (sets with hardly any mirror
pairs are evaluated as given).  Measured: a symmetric 250 000-point H-plane map
of a 3 x 2 wavelength horn in one call needs half the kernel work (the whole
call about 25 % less); a scenario map, handed over in bands of rows, gains
nothing.  The calls run on :data:`DEFAULT_THREADS` thread (one; a second never
paid on the 2-core test machine).

``method="direct"`` instead uses one fixed, fine rule (the one a point lambda/10
above the aperture centre needs at 1e-7) with every kernel written out, in
double precision, for every point as given (no far zone, no folding): the
reference the adaptive result is tested and benchmarked against.

Far field and normalisation
---------------------------
The far-field amplitude is the radiation integral
F(u) = -jk/(4 pi) [eta0 (N - (u.N) u) - u x L], N = int J e^{jk u.r'} dS',
L = int M e^{jk u.r'} dS' (Balanis [1]_ eqs. (12-10)-(12-12)), integrated
with a rule fine enough for the whole visible region.  The aperture amplitude
is scaled so that the radiated power, (1/eta0) int |F|^2 dOmega over both
half-spaces (Gauss-Legendre in cos(theta) on each, trapezoid in phi), equals
``power_w``: the power delivered is the power radiated (the package
convention, and what a Poynting-flux check around the source measures).  For
a ground-plane aperture that is the front half-space alone; a Huygens
aperture also sends :attr:`ApertureRadiator.back_fraction` of its front power
backwards (15 % for an open WR-340 end, 1 % for a 16 dBi horn).  Normalising
the front half-space alone would raise the front fields by that fraction but
break the power balance; the models put that kind of spread into their
``gain_uncertainty_db`` instead.
Beyond :attr:`ApertureRadiator.far_zone_distance_m` = max(40 * 2D^2/lambda,
20 lambda) the adaptive method uses F e^{-jkr}/r directly.  The usual
10 * 2D^2/lambda is not enough for 0.1 dB everywhere: an aperture with its own
phase curvature (a horn) differs from its pattern by a term falling only as
1/r (the cross term of the flare phase and the Fresnel phase), measured at
0.15 dB in the sidelobes of a 16 dBi horn at 10 * 2D^2/lambda and 0.04 dB at
40 * 2D^2/lambda; the induction terms are below 0.1 % in power there.

Validity
--------
* The fields are those of the equivalent currents of the given aperture
  distribution: exact for a ground-plane aperture with that field, the
  Kirchhoff approximation otherwise.  Behind the aperture plane (z < 0) a
  "huygens" aperture returns the same integral (the Kirchhoff continuation:
  the spill-over an aperture without a flange sends sideways and back); a
  "ground-plane" aperture returns zero.
* Accuracy: within 0.1 dB of the converged integral from lambda/10 off the
  aperture outward (tested; typically 1e-3 dB).  Memory: the outer chunks of
  :meth:`ApertureRadiator.fields` follow ``chunk_bytes`` (at most 1 GiB) with
  :attr:`ApertureRadiator.bytes_per_point`; the rule cache holds at most
  128 MiB.  Points closer than the minimum standoff
  :attr:`ApertureRadiator.min_standoff_m` = lambda/20 to the aperture
  rectangle are evaluated at that standoff, moved along z (front side for
  z = 0): finite values, of the order of the aperture field; a current sheet
  with a rim has no meaningful value closer in (the fields of its edge
  charges grow without bound at the rim).

References
----------
.. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley,
   2016, ch. 3 (vector potentials), ch. 12 (aperture antennas: 12.2 field
   equivalence, 12.3 radiation equations, 12.5 rectangular apertures,
   Tables 12.1 and 12.2).
.. [2] J. D. Jackson, *Classical Electrodynamics*, 3rd ed., Wiley, 1999,
   eqs. (9.18) (electric dipole) and (9.36) (magnetic dipole), all orders in
   1/(kr).
.. [3] L. N. Trefethen, *Approximation Theory and Approximation Practice*,
   SIAM, 2013, ch. 19, Theorem 19.3 (Gauss quadrature error in a Bernstein
   ellipse).
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from functools import cached_property, lru_cache
from typing import Final

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import roots_legendre

from .base import (
    C_M_S,
    DEFAULT_CHUNK_BYTES,
    ETA0_OHM,
    ModelInputError,
    Placement,
    Radiator,
    as_points,
    fibonacci_sphere,
)
from .memo import active_memo
from .waveguide import TE10Mode, open_end_reflection, te10_mode, waveguide_dimensions

#: Equivalent-current models.
HUYGENS: Final[str] = "huygens"
GROUND_PLANE: Final[str] = "ground-plane"
EQUIVALENCES: Final[tuple[str, ...]] = (HUYGENS, GROUND_PLANE)

#: Quadrature methods of :meth:`ApertureRadiator.fields`.
METHODS: Final[tuple[str, ...]] = ("adaptive", "direct")

#: Relative quadrature error aimed at by the adaptive rule (relative to the
#: integral of |integrand|; 1e-4 leaves 0.1 dB down to about -40 dB sidelobes).
DEFAULT_TOLERANCE: Final[float] = 1e-4

#: Tolerance of the fixed fine rule of ``method="direct"``.
DIRECT_TOLERANCE: Final[float] = 1e-7

#: Ladder of Gauss-Legendre orders the adaptive rule is rounded up to
#: (shared rules let points be evaluated in blocks).
_ORDER_LADDER: Final[NDArray[np.int64]] = np.array(
    [2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 14, 16, 18, 20, 22, 24, 28, 32, 36, 40, 44, 48, 56,
     64, 72, 80, 88, 96, 112, 128, 144, 160, 176, 192, 224, 256, 288, 320, 352, 384, 448,
     512, 576, 640, 704, 768, 896, 1024],
    dtype=np.int64,
)  # fmt: skip
MAX_ORDER: Final[int] = int(_ORDER_LADDER[-1])

#: Field-point x node pairs evaluated in one block (fits the L2 cache).
BLOCK_PAIRS: Final[int] = 32768

#: Point-node pairs of one call below which the blocks run on the calling thread only.
THREAD_MIN_PAIRS: Final[int] = 2**21

#: Worker threads of a radiator by default.  One: on the 2-core test machine a second
#: thread was never faster (the kernels are many short numpy calls that take turns at the
#: interpreter lock; tests/benchmarks/bench_engine.py measures both).
DEFAULT_THREADS: Final[int] = 1

#: Largest memory a radiator's cache of quadrature rules may hold [bytes]
#: (a near-field rule costs about 60 bytes a node, a direct one about 40).
RULE_CACHE_BYTES: Final[int] = 128 * 1024**2

#: Field points whose folded coordinates agree to this are evaluated once [m].
FOLD_QUANTUM_M: Final[float] = 1e-9

#: Hard ceiling of every memory budget here [bytes].
MAX_BUDGET_BYTES: Final[int] = 1024**3

FieldFunction = Callable[[NDArray[np.float64], NDArray[np.float64]], tuple[NDArray, NDArray]]


# ============================================================ parameter class
@dataclass(frozen=True)
class ApertureDistribution:
    """Tangential field over a rectangular aperture in z = 0 (local frame).

    Parameters
    ----------
    width_m : float
        Extent along local x [m] (the H-plane / broad direction).
    height_m : float
        Extent along local y [m] (the E-plane / narrow direction).
    field_function : callable
        ``f(x, y) -> (e_t, h_t)`` for broadcastable coordinate arrays [m]
        inside the rectangle; ``e_t`` and ``h_t`` have the broadcast shape
        plus a last axis of 2 (x and y components), complex, in any
        consistent amplitude ([V m^-1] and [A m^-1]; the radiator rescales).
    bandwidth_x_rad_m : float
        Largest spatial angular frequency of the distribution along x (its
        phase slope plus its amplitude variation, e.g. pi/width for a
        cosine) [rad m^-1]; it sets the quadrature order.
    bandwidth_y_rad_m : float
        The same along y [rad m^-1].
    equivalence : {"huygens", "ground-plane"}
        ``"huygens"``: J = n x H and M = -n x E radiating in free space;
        ``"ground-plane"``: 2 M alone, the aperture sits in an infinite
        conducting plane and nothing radiates behind it.
    description : str
        Short text for messages and reports.
    """

    width_m: float
    height_m: float
    field_function: FieldFunction
    bandwidth_x_rad_m: float = 0.0
    bandwidth_y_rad_m: float = 0.0
    equivalence: str = HUYGENS
    description: str = ""

    def __post_init__(self) -> None:
        for key in ("width_m", "height_m"):
            value = getattr(self, key)
            if not (np.isfinite(value) and value > 0):
                raise ModelInputError(key, f"{key} must be a length > 0 [m], got {value!r}")
        if self.equivalence not in EQUIVALENCES:
            raise ModelInputError(
                "equivalence",
                f"equivalence must be one of {', '.join(EQUIVALENCES)}, got {self.equivalence!r}",
            )
        for key in ("bandwidth_x_rad_m", "bandwidth_y_rad_m"):
            value = getattr(self, key)
            if not (np.isfinite(value) and value >= 0):
                raise ModelInputError(key, f"{key} must be >= 0 [rad m^-1], got {value!r}")

    @property
    def half_sizes_m(self) -> tuple[float, float]:
        """Half-width and half-height (L_x, L_y) [m]."""
        return 0.5 * self.width_m, 0.5 * self.height_m

    @property
    def diagonal_m(self) -> float:
        """Largest dimension D of the rectangle (its diagonal) [m]."""
        return float(np.hypot(self.width_m, self.height_m))


def uniform_distribution(
    width_m: float,
    height_m: float,
    wave_impedance_ohm: float = ETA0_OHM,
    equivalence: str = HUYGENS,
) -> ApertureDistribution:
    """Uniform, in-phase aperture: E_y = 1, H_x = -1 / Z_w.

    Parameters
    ----------
    width_m, height_m : float
        Aperture size along x and y [m].
    wave_impedance_ohm : float
        Ratio E_y / (-H_x) on the aperture [ohm].
    equivalence : str
        See :class:`ApertureDistribution`.

    Notes
    -----
    Balanis [1]_ sec. 12.5.1-12.5.2: directivity 4 pi A / lambda^2 in the
    large-aperture limit (aperture efficiency 1, Table 12.1).
    """

    def fields(x: NDArray, y: NDArray) -> tuple[NDArray, NDArray]:
        shape = np.broadcast(x, y).shape
        e = np.zeros(shape + (2,), dtype=complex)
        e[..., 1] = 1.0
        h = np.zeros(shape + (2,), dtype=complex)
        h[..., 0] = -1.0 / wave_impedance_ohm
        return e, h

    return ApertureDistribution(width_m, height_m, fields, 0.0, 0.0, equivalence, "uniform")


def te10_distribution(
    width_m: float,
    height_m: float,
    wave_impedance_ohm: float,
    equivalence: str = HUYGENS,
    phase_x: Callable[[NDArray], NDArray] | None = None,
    phase_y: Callable[[NDArray], NDArray] | None = None,
    phase_slope_x_rad_m: float = 0.0,
    phase_slope_y_rad_m: float = 0.0,
    description: str = "TE10 cosine",
) -> ApertureDistribution:
    """TE10-like aperture: E_y = cos(pi x / width) e^{-j(phi_x(x) + phi_y(y))}, H_x = -E_y / Z_w.

    Parameters
    ----------
    width_m, height_m : float
        Aperture size along x (cosine direction) and y [m].
    wave_impedance_ohm : float
        E_y / (-H_x): Z_TE10 for the open end of a guide, eta0 for a horn
        aperture (Balanis [1]_ sec. 13.4) [ohm].
    equivalence : str
        See :class:`ApertureDistribution`.
    phase_x, phase_y : callable, optional
        Aperture phase lag along x and y [rad] (e.g. a horn's flare phase).
    phase_slope_x_rad_m, phase_slope_y_rad_m : float
        Largest |d phase / dx| and |d phase / dy| over the aperture [rad m^-1].
    description : str
        Short text for messages.

    Notes
    -----
    With no phase this is Balanis [1]_ eq. (12-47) (TE10 distribution),
    aperture efficiency 8/pi^2 in the large-aperture limit (Table 12.1).
    """

    def fields(x: NDArray, y: NDArray) -> tuple[NDArray, NDArray]:
        amplitude = np.cos(np.pi * np.asarray(x) / width_m).astype(complex)
        phase = np.zeros(np.broadcast(x, y).shape)
        if phase_x is not None:
            phase = phase + phase_x(np.asarray(x))
        if phase_y is not None:
            phase = phase + phase_y(np.asarray(y))
        ey = amplitude * np.exp(-1j * phase)
        shape = ey.shape
        e = np.zeros(shape + (2,), dtype=complex)
        e[..., 1] = ey
        h = np.zeros(shape + (2,), dtype=complex)
        h[..., 0] = -ey / wave_impedance_ohm
        return e, h

    return ApertureDistribution(
        width_m,
        height_m,
        fields,
        np.pi / width_m + phase_slope_x_rad_m,
        phase_slope_y_rad_m,
        equivalence,
        description,
    )


# ============================================================ model functions
def equivalent_currents(
    e_t: NDArray, h_t: NDArray, equivalence: str
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """Equivalent surface currents of an aperture field in z = 0, normal +z.

    Parameters
    ----------
    e_t, h_t : ndarray, shape (..., 2)
        Tangential aperture E [V m^-1] and H [A m^-1] (x and y components).
    equivalence : {"huygens", "ground-plane"}
        Free-space Huygens sources, or 2 M over a conducting plane.

    Returns
    -------
    j_s, m_s : ndarray, shape (..., 2)
        Electric [A m^-1] and magnetic [V m^-1] surface currents (x, y).

    Notes
    -----
    J_s = z x H_a = (-H_y, H_x); M_s = -z x E_a = (E_y, -E_x)
    (Balanis [1]_ eqs. (12-3), (12-4)); ground plane: J_s = 0, M_s doubled
    (image theory, Balanis sec. 12.5.1).
    """
    e_t = np.asarray(e_t, dtype=complex)
    h_t = np.asarray(h_t, dtype=complex)
    m_s = np.stack([e_t[..., 1], -e_t[..., 0]], axis=-1)
    if equivalence == GROUND_PLANE:
        return np.zeros_like(m_s), np.asarray(2.0 * m_s, dtype=complex)
    j_s = np.stack([-h_t[..., 1], h_t[..., 0]], axis=-1)
    return j_s, m_s


@lru_cache(maxsize=256)
def gauss_legendre(n: int) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Gauss-Legendre nodes and weights on [-1, 1] (cached, read-only)."""
    x, w = roots_legendre(int(n))
    x.setflags(write=False)
    w.setflags(write=False)
    return x, w


_LOG_RHO_FRACTIONS: Final[NDArray[np.float64]] = np.linspace(0.02, 0.98, 49)
_MAX_LOG_RHO: Final[float] = 12.0


def bernstein_pole_parameter(
    half_length_m: ArrayLike, offset_m: ArrayLike, distance_m: ArrayLike
) -> NDArray[np.float64]:
    """ln(rho_p) of the Bernstein ellipse of [-L, L] through the pole x_p + j d.

    Parameters
    ----------
    half_length_m : array_like
        Half-length L [m].
    offset_m : array_like
        Real part x_p of the pole [m].
    distance_m : array_like
        Imaginary part d >= 0 [m]; ``inf`` for no pole.

    Returns
    -------
    ndarray
        ln(rho_p) with rho_p = |w + sqrt(w^2 - 1)|, w = (x_p + j d)/L, capped
        at 12 (no pole within reach).
    """
    half = np.asarray(half_length_m, dtype=float)
    offset = np.asarray(offset_m, dtype=float)
    distance = np.asarray(distance_m, dtype=float)
    finite = np.isfinite(distance) & np.isfinite(offset)
    x = np.where(finite, offset, 0.0)
    d = np.where(finite, distance, 1.0)
    # The ellipse with foci +-L through x + j d has semi-major axis a = (s1 + s2)/2, s1 and
    # s2 the distances to the foci, and rho = (a + sqrt(a^2 - L^2))/L: the same value as
    # |w + sqrt(w^2 - 1)| in real arithmetic.
    semi = 0.5 * (np.hypot(x - half, d) + np.hypot(x + half, d))
    excess = np.maximum(semi - half, 0.0)
    rho_p = (semi + np.sqrt(excess * (semi + half))) / half
    log_rho_p = np.where(finite, np.log(np.maximum(rho_p, 1.0 + 1e-12)), _MAX_LOG_RHO)
    return np.minimum(log_rho_p, _MAX_LOG_RHO)


def gauss_legendre_order_from_pole(
    log_rho_p: ArrayLike, bandwidth_rad: ArrayLike, tolerance: float
) -> NDArray[np.float64]:
    """Gauss-Legendre order from the pole's ellipse parameter and the oscillation.

    See :func:`gauss_legendre_order`; ``log_rho_p`` from
    :func:`bernstein_pole_parameter`.
    """
    f = _LOG_RHO_FRACTIONS
    log_rho = np.asarray(log_rho_p, dtype=float)[..., None] * f
    omega = np.asarray(bandwidth_rad, dtype=float)[..., None]
    numerator = (
        np.log(64.0 / 15.0)
        + omega * np.sinh(log_rho)
        - 3.0 * np.log1p(-f)
        - np.log(np.expm1(2.0 * log_rho))
        - np.log(tolerance)
    )
    return np.min(numerator / (2.0 * log_rho), axis=-1)


def gauss_legendre_order(
    half_length_m: ArrayLike,
    offset_m: ArrayLike,
    distance_m: ArrayLike,
    bandwidth_rad: ArrayLike,
    tolerance: float,
) -> NDArray[np.float64]:
    """Gauss-Legendre order for a near-singular oscillatory integral over [-L, L].

    Parameters
    ----------
    half_length_m : array_like
        Half-length L of the interval [m].
    offset_m : array_like
        Real part x_p of the integrand's pole (the field point's coordinate
        along the interval) [m].
    distance_m : array_like
        Its imaginary part d >= 0 (the field point's distance from the line of
        integration) [m]; ``inf`` for no pole.
    bandwidth_rad : array_like
        omega = L * (largest |phase slope| of the integrand) [rad]: the
        integrand grows like e^{omega Im t} off the real axis.
    tolerance : float
        Wanted error relative to the integral of |integrand|.

    Returns
    -------
    ndarray
        Required number of nodes (real, not rounded).

    Notes
    -----
    From the Bernstein-ellipse bound (Trefethen [3]_ Thm 19.3),
    error <= 64 M rho^{-2n} / (15 (rho^2 - 1)), with M(rho) modelled as
    e^{omega (rho - 1/rho)/2} (1 - ln rho / ln rho_p)^{-3}: the exponential
    growth of the oscillation and the cubic pole at rho_p, the ellipse
    through x_p + j d.  The order is minimised over rho in (1, rho_p).
    Calibrated on 1/R, 1/R^2 and 1/R^3 kernels with e^{-jkR} and a cosine
    taper (0 failures in 250 random cases at 1e-4, 1.6 x the minimal order on
    average).
    """
    log_rho_p = bernstein_pole_parameter(half_length_m, offset_m, distance_m)
    return gauss_legendre_order_from_pole(log_rho_p, bandwidth_rad, tolerance)


_TABLE_LOG_RHO: Final[NDArray[np.float64]] = np.geomspace(1e-4, 12.0, 97)
_TABLE_OMEGA: Final[NDArray[np.float64]] = np.concatenate(
    [np.linspace(0.0, 4.0, 17)[:-1], np.geomspace(4.0, 1e5, 180)]
)


@lru_cache(maxsize=8)
def _order_table(tolerance: float) -> NDArray[np.float64]:
    """Orders on the (ln rho_p, omega) grid, for conservative look-up."""
    return gauss_legendre_order_from_pole(_TABLE_LOG_RHO[:, None], _TABLE_OMEGA[None, :], tolerance)


def gauss_legendre_order_lookup(
    log_rho_p: NDArray[np.float64], bandwidth_rad: NDArray[np.float64], tolerance: float
) -> NDArray[np.float64]:
    """Fast upper bound of :func:`gauss_legendre_order_from_pole` from a table.

    The order falls with ln(rho_p) and grows with omega, so the table entry at
    the grid point just below ln(rho_p) and just above omega bounds it from
    above (the grids are 13 % steps in ln(rho_p), 6 % in omega).
    """
    table = _order_table(float(tolerance))
    i = np.searchsorted(_TABLE_LOG_RHO, log_rho_p, side="right") - 1
    j = np.searchsorted(_TABLE_OMEGA, bandwidth_rad, side="left")
    exact_fallback = (i < 0) | (j >= _TABLE_OMEGA.size)
    i = np.clip(i, 0, _TABLE_LOG_RHO.size - 1)
    j = np.clip(j, 0, _TABLE_OMEGA.size - 1)
    order = table[i, j]
    if np.any(exact_fallback):
        fallback = np.nonzero(exact_fallback)
        order = np.array(order, dtype=float, copy=True)
        order[fallback] = gauss_legendre_order_from_pole(
            np.broadcast_to(log_rho_p, order.shape)[fallback],
            np.broadcast_to(bandwidth_rad, order.shape)[fallback],
            tolerance,
        )
    return order


def _round_to_ladder(order: NDArray[np.float64]) -> NDArray[np.int64]:
    index = np.searchsorted(_ORDER_LADDER, np.ceil(np.clip(order, 2, MAX_ORDER)), side="left")
    return _ORDER_LADDER[np.minimum(index, _ORDER_LADDER.size - 1)]


def dyadic_kernel_sums(
    points_m: NDArray[np.float64],
    nodes_x_m: NDArray[np.float64],
    nodes_y_m: NDArray[np.float64],
    sources: NDArray[np.complex128],
    wavenumber_rad_m: float,
    dtype: type = np.float32,
) -> NDArray[np.complex128]:
    """Quadrature sums of the free-space dyadic kernels over the aperture nodes.

    Parameters
    ----------
    points_m : ndarray, shape (P, 3)
        Field points in the aperture frame [m].
    nodes_x_m, nodes_y_m : ndarray, shape (Q,)
        Aperture quadrature nodes (z' = 0) [m].
    sources : ndarray, shape (Q, S), complex
        Weighted source amplitudes at the nodes (columns of equivalent
        currents times the quadrature weight) [A] or [V].
    wavenumber_rad_m : float
        k [rad m^-1].
    dtype : numpy float type
        Working precision of the kernel (float32 or float64).

    Returns
    -------
    ndarray, shape (9, P, S), complex
        sum_q K_m(p, q) s_q for the kernels, in order,
        K_0 = g a, K_1..K_5 = g b (R_x^2, R_x R_y, R_y^2, R_x, R_y) / R^2,
        K_6..K_8 = g c (1, R_x, R_y) / R, with
        g = e^{-jk(R - r_p)} / R, r_p = |p| and a, b, c the dyadic
        coefficients of the module docstring (R = p - q).

    Notes
    -----
    The phase is taken relative to the distance r_p of the point from the
    aperture centre, k(R - r_p) = k (|q|^2 - 2 p.q) / (R + r_p), evaluated
    without cancellation; the caller multiplies by e^{-jk r_p}.
    """
    f = np.dtype(dtype).type
    k = f(wavenumber_rad_m)
    # Layout (Q, P): the points run along the fast axis, so that the broadcast
    # operations have long inner loops even when a rule has few nodes.
    xp = points_m[:, 0].astype(f)[None, :]
    yp = points_m[:, 1].astype(f)[None, :]
    zp = points_m[:, 2].astype(f)[None, :]
    rp = np.sqrt(xp * xp + yp * yp + zp * zp)
    xq = nodes_x_m.astype(f)[:, None]
    yq = nodes_y_m.astype(f)[:, None]
    n_points, n_nodes = xp.shape[1], xq.shape[0]
    rx = xp - xq
    ry = yp - yq
    r = rx * rx
    r += ry * ry
    r += zp * zp
    np.sqrt(r, out=r)
    inv_r = np.reciprocal(r)
    # phase relative to the centre distance
    arg = xq * xp
    arg += yq * yp
    arg *= f(-2)
    arg += xq * xq + yq * yq
    r += rp
    arg /= r
    arg *= k
    g_re = np.cos(arg)
    g_im = np.sin(arg)
    np.negative(g_im, out=g_im)
    g_re *= inv_r
    g_im *= inv_r
    t = inv_r * (f(1) / k)  # 1/(kR)
    tt = t * t
    # The 18 real kernels are computed in the working precision and stored in
    # double precision, so that the sum over the nodes is accurate (and exactly
    # symmetric for mirror-image points) whatever the working precision.
    kern = np.empty((18, n_nodes, n_points), dtype=np.float64)
    # a = (1 - t^2) - j t
    a_re = f(1) - tt
    np.add(g_re * a_re, g_im * t, out=kern[0], dtype=f, casting="unsafe")
    np.subtract(g_im * a_re, g_re * t, out=kern[9], dtype=f, casting="unsafe")
    # b / R^2 with b = (3 t^2 - 1) + 3 j t
    inv_r2 = inv_r * inv_r
    b_re = f(3) * tt
    b_re -= f(1)
    b_im = f(3) * t
    gb_re = g_re * b_re
    gb_re -= g_im * b_im
    gb_re *= inv_r2
    gb_im = g_im * b_re
    gb_im += g_re * b_im
    gb_im *= inv_r2
    for m, factor in enumerate((rx * rx, rx * ry, ry * ry, rx, ry), start=1):
        np.multiply(gb_re, factor, out=kern[m], dtype=f, casting="unsafe")
        np.multiply(gb_im, factor, out=kern[9 + m], dtype=f, casting="unsafe")
    # c / R with c = 1 - j t
    c_re = g_im * t
    c_re += g_re
    c_re *= inv_r
    c_im = g_re * t
    np.subtract(g_im, c_im, out=c_im)
    c_im *= inv_r
    kern[6] = c_re
    kern[15] = c_im
    for m, factor in ((7, rx), (8, ry)):
        np.multiply(c_re, factor, out=kern[m], dtype=f, casting="unsafe")
        np.multiply(c_im, factor, out=kern[9 + m], dtype=f, casting="unsafe")
    n_src = sources.shape[1]
    src_t = np.ascontiguousarray(np.concatenate([sources.real, sources.imag], axis=1).T)
    prod = np.matmul(src_t, kern)  # (18, 2S, P), one small product per kernel
    out = np.empty((9, n_points, n_src), dtype=complex)
    out.real = np.transpose(prod[:9, :n_src] - prod[9:, n_src:], (0, 2, 1))
    out.imag = np.transpose(prod[:9, n_src:] + prod[9:, :n_src], (0, 2, 1))
    return out


def fields_from_kernel_sums(
    sums: NDArray[np.complex128],
    z_m: NDArray[np.float64],
    wavenumber_rad_m: float,
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """Assemble E and H from :func:`dyadic_kernel_sums` of the four current columns.

    Parameters
    ----------
    sums : ndarray, shape (9, P, 4), complex
        Kernel sums for the source columns (J_x, J_y, M_x, M_y).
    z_m : ndarray, shape (P,)
        Height of the points above the aperture plane [m].
    wavenumber_rad_m : float
        k [rad m^-1].

    Returns
    -------
    e_v_m, h_a_m : ndarray, shape (P, 3), complex
        Fields, without the centre phase e^{-jk r_p} (the caller applies it).
    """
    t = sums
    z = z_m.astype(float)
    eta = ETA0_OHM
    jx, jy, mx, my = 0, 1, 2, 3
    e = np.empty((z.size, 3), dtype=complex)
    h = np.empty((z.size, 3), dtype=complex)
    e[:, 0] = eta * (t[0, :, jx] + t[1, :, jx] + t[2, :, jy]) + z * t[6, :, my]
    e[:, 1] = eta * (t[0, :, jy] + t[2, :, jx] + t[3, :, jy]) - z * t[6, :, mx]
    e[:, 2] = eta * z * (t[4, :, jx] + t[5, :, jy]) - (t[7, :, my] - t[8, :, mx])
    h[:, 0] = (t[0, :, mx] + t[1, :, mx] + t[2, :, my]) / eta - z * t[6, :, jy]
    h[:, 1] = (t[0, :, my] + t[2, :, mx] + t[3, :, my]) / eta + z * t[6, :, jx]
    h[:, 2] = z * (t[4, :, mx] + t[5, :, my]) / eta + (t[7, :, jy] - t[8, :, jx])
    factor = -1j * wavenumber_rad_m / (4.0 * np.pi)
    return e * factor, h * factor


#: Rows of float32 scratch each thread keeps for :func:`dyadic_moment_sums` (per pair).
_SCRATCH_ROWS: Final[int] = 13
_SCRATCH = threading.local()


def _scratch(n_pairs: int) -> tuple[NDArray[np.float32], NDArray[np.float64]]:
    """Reusable scratch of the calling thread: float32 (13, n) and float64 (2 n).

    Fresh arrays of a few hundred kB are served by the operating system page by page;
    reusing them is several times faster than allocating them for every block.
    """
    f32 = getattr(_SCRATCH, "f32", None)
    if f32 is None or f32.shape[1] < n_pairs:
        f32 = np.empty((_SCRATCH_ROWS, n_pairs), dtype=np.float32)
        _SCRATCH.f32 = f32
        _SCRATCH.f64 = np.empty(2 * n_pairs, dtype=np.float64)
    return f32, _SCRATCH.f64


#: Moments of the node coordinates each kernel family is summed against:
#: a: 1; b: 1, x', y', x'^2, x'y', y'^2; c: 1, x', y'.
_MOMENT_COUNTS: Final[tuple[int, int, int]] = (1, 6, 3)


def moment_matrix(
    nodes_x_m: NDArray[np.float64], nodes_y_m: NDArray[np.float64], sources: NDArray[np.complex128]
) -> NDArray[np.float32]:
    """Source-weighted coordinate moments of a rule, for :func:`dyadic_moment_sums`.

    Parameters
    ----------
    nodes_x_m, nodes_y_m : ndarray, shape (Q,)
        Node coordinates [m].
    sources : ndarray, shape (Q, S), complex
        Weighted source amplitudes at the nodes.

    Returns
    -------
    ndarray, shape (12 S, Q), float32
        Rows Re and Im of ``s_q * m(q)`` for the moments m = 1, x', y', x'^2, x'y', y'^2
        (moment-major, then source column, then real and imaginary part), so that the
        first 2 S rows serve the kernel family a, the first 6 S the family c and all the
        family b.  Single precision perturbs each node's weight by about 1e-7 relative,
        far below the quadrature tolerance.
    """
    x, y = nodes_x_m, nodes_y_m
    weights = (np.ones_like(x), x, y, x * x, x * y, y * y)
    n_src = sources.shape[1]
    out = np.empty((6, n_src, 2, x.size), dtype=np.float32)
    for i, w in enumerate(weights):
        m = sources.T * w
        out[i, :, 0] = m.real
        out[i, :, 1] = m.imag
    return out.reshape(12 * n_src, x.size)


def dyadic_moment_sums(
    points_m: NDArray[np.float64],
    nodes: tuple[NDArray[np.float32], NDArray[np.float32], NDArray[np.float32]],
    moments: NDArray[np.float32],
    wavenumber_rad_m: float,
    out: NDArray[np.complex128] | None = None,
    accumulate: bool = False,
) -> NDArray[np.complex128]:
    """Moment sums of the dyadic kernels over a rule's nodes (the fast adaptive kernel).

    Parameters
    ----------
    points_m : ndarray, shape (P, 3)
        Field points in the aperture frame [m].
    nodes : tuple of ndarray, each shape (Q, 1), float32
        Node x' and y' [m] and k |q|^2 [rad m].
    moments : ndarray, shape (12 S, Q), float32
        From :func:`moment_matrix` for the same nodes.
    wavenumber_rad_m : float
        k [rad m^-1].
    out : ndarray, shape (10, S, P), complex, optional
        Where to write the sums (a new array if omitted).
    accumulate : bool
        Add to ``out`` instead of overwriting it (node slices of one large rule).

    Returns
    -------
    ndarray, shape (10, S, P), complex
        sum_q s_q m(q) K(p, q) for, in order, K = g a with m = 1; K = g b / R^2 with
        m = 1, x', y', x'^2, x'y', y'^2; K = g c / R with m = 1, x', y' (g, a, b, c as in
        :func:`dyadic_kernel_sums`, phase relative to r_p).

    Notes
    -----
    The kernels of :func:`dyadic_kernel_sums` that carry R_x = x - x' and R_y = y - y'
    are polynomials in the node coordinates, so sum_q s_q g b R_x^2 =
    x^2 M_1 - 2 x M_x + M_xx with the moments M of g b; the caller assembles them in double
    precision (:func:`kernel_sums_from_moments`).  Three scalar kernel families (6 real
    arrays) are computed per point-node pair in single precision instead of 18, in
    reusable per-thread scratch, and the node sums are double-precision matrix products.
    """
    f = np.float32
    xq, yq, kqq = nodes
    n_points, n_nodes = points_m.shape[0], xq.shape[0]
    n = n_points * n_nodes
    work, wide = _scratch(n)
    k = float(wavenumber_rad_m)

    w = work[:, :n].reshape(_SCRATCH_ROWS, n_nodes, n_points)  # views, no copy
    xp = points_m[:, 0].astype(f)[None, :]
    yp = points_m[:, 1].astype(f)[None, :]
    zp = points_m[:, 2].astype(f)[None, :]
    rp = np.sqrt(xp * xp + yp * yp + zp * zp)
    zz = zp * zp
    m2kx = f(-2.0 * k) * xp
    m2ky = f(-2.0 * k) * yp
    r, tmp, arg, gr, gst, grt, u = w[0], w[1], w[2], w[3], w[4], w[5], w[6]
    np.subtract(xp, xq, out=r)
    np.multiply(r, r, out=r)
    np.subtract(yp, yq, out=tmp)
    np.multiply(tmp, tmp, out=tmp)
    r += tmp
    r += zz
    np.sqrt(r, out=r)
    # k (R - r_p) = k (|q|^2 - 2 p.q) / (R + r_p), without cancellation
    np.multiply(xq, m2kx, out=arg)
    np.multiply(yq, m2ky, out=tmp)
    arg += tmp
    arg += kqq
    np.add(r, rp, out=tmp)
    arg /= tmp
    t = r
    np.reciprocal(r, out=t)
    t *= f(1.0 / k)  # t = 1/(kR)
    gs = arg
    np.cos(arg, out=gr)
    np.sin(arg, out=gs)
    gr *= t  # g = k (gr - j gs)
    gs *= t
    np.multiply(gs, t, out=gst)
    np.multiply(gr, t, out=grt)
    tt = tmp
    np.multiply(t, t, out=tt)
    wa, wb, wc = w[7:9], w[9:11], w[11:13]
    # a = (1 - t^2) - j t:  g a = k [(gr u - gs t) - j (gs u + gr t)],  u = 1 - t^2
    np.subtract(f(1), tt, out=u)
    np.multiply(gr, u, out=wa[0])
    wa[0] -= gst
    np.multiply(gs, u, out=wa[1])
    wa[1] += grt
    # c / R with c = 1 - j t:  k^2 t [(gr - gs t) - j (gs + gr t)]
    np.subtract(gr, gst, out=wc[0])
    wc[0] *= t
    np.add(gs, grt, out=wc[1])
    wc[1] *= t
    # b / R^2 with b = (3 t^2 - 1) + 3 j t:  3 k^3 t^2 [(gr v + gs t) - j (gs v - gr t)],
    # v = t^2 - 1/3
    v = u
    np.subtract(tt, f(1.0 / 3.0), out=v)
    np.multiply(gr, v, out=wb[0])
    wb[0] += gst
    wb[0] *= tt
    np.multiply(gs, v, out=wb[1])
    wb[1] -= grt
    wb[1] *= tt
    n_src = moments.shape[0] // 12
    if out is None:
        out = np.empty((10, n_src, n_points), dtype=complex)
        accumulate = False
    moments64 = moments.astype(np.float64)
    row = 0
    w64 = wide[: 2 * n].reshape(2, n_nodes, n_points)
    for w, scale, count in zip((wa, wb, wc), (k, 3.0 * k**3, k * k), _MOMENT_COUNTS, strict=True):
        np.copyto(w64, w)
        # (2, 2 count S, P): rows Re M, Im M (interleaved) times W_re and W_n
        prod = np.matmul(moments64[: 2 * count * n_src], w64)
        prod *= scale
        # sum M (W_re - j W_n) with M = Mr + j Mi: re = Mr W_re + Mi W_n, im = Mi W_re - Mr W_n
        shape = (count, n_src, n_points)
        re = np.add(prod[0, 0::2], prod[1, 1::2]).reshape(shape)
        im = np.subtract(prod[0, 1::2], prod[1, 0::2]).reshape(shape)
        target = out[row : row + count]  # a view, possibly strided: written through
        if accumulate:
            target.real += re
            target.imag += im
        else:
            target.real = re
            target.imag = im
        row += count
    return out


def kernel_sums_from_moments(
    moments: NDArray[np.complex128], x_m: NDArray[np.float64], y_m: NDArray[np.float64]
) -> NDArray[np.complex128]:
    """The nine kernel sums of :func:`dyadic_kernel_sums` from :func:`dyadic_moment_sums`.

    Parameters
    ----------
    moments : ndarray, shape (10, S, P), complex
        Moment sums.
    x_m, y_m : ndarray, shape (P,)
        Field point coordinates in the aperture frame [m].

    Returns
    -------
    ndarray, shape (9, S, P), complex
        K_0..K_8 summed, in double precision, e.g.
        sum g b R_x^2 = x^2 M_1 - 2 x M_x + M_xx.
    """
    x = x_m
    y = y_m
    a1, b1, bx, by, bxx, bxy, byy, c1, cx, cy = moments
    out = np.empty((9, *a1.shape), dtype=complex)
    out[0] = a1
    out[4] = x * b1 - bx
    out[5] = y * b1 - by
    out[1] = x * (out[4] - bx) + bxx  # x^2 b1 - 2 x bx + bxx
    out[2] = x * out[5] - y * bx + bxy  # x y b1 - x by - y bx + bxy
    out[3] = y * (out[5] - by) + byy
    out[6] = c1
    out[7] = x * c1 - cx
    out[8] = y * c1 - cy
    return out


def fields_from_mixed_sums(
    sums: NDArray[np.complex128],
    mixing: NDArray[np.complex128],
    z_m: NDArray[np.float64],
    wavenumber_rad_m: float,
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """:func:`fields_from_kernel_sums` for sums over a low-rank source basis.

    Parameters
    ----------
    sums : ndarray, shape (9, S, P), complex
        Kernel sums for the S basis columns.
    mixing : ndarray, shape (S, 4), complex
        Basis to current columns (J_x, J_y, M_x, M_y).
    z_m : ndarray, shape (P,)
        Height of the points above the aperture plane [m].
    wavenumber_rad_m : float
        k [rad m^-1].

    Returns
    -------
    e_v_m, h_a_m : ndarray, shape (P, 3), complex
        As :func:`fields_from_kernel_sums`; current columns that are zero are skipped.
    """
    n = sums.shape[2]
    used = [bool(np.any(mixing[:, c] != 0)) for c in range(4)]

    def col(m: int, c: int) -> NDArray[np.complex128] | float:
        if not used[c]:
            return 0.0
        out = sums[m, 0] * mixing[0, c]
        for r in range(1, sums.shape[1]):
            out = out + sums[m, r] * mixing[r, c]
        return out

    eta = ETA0_OHM
    z = z_m.astype(float)
    jx, jy, mx, my = 0, 1, 2, 3
    factor = -1j * wavenumber_rad_m / (4.0 * np.pi)
    e = np.empty((n, 3), dtype=complex)
    h = np.empty((n, 3), dtype=complex)
    e[:, 0] = eta * (col(0, jx) + col(1, jx) + col(2, jy)) + z * col(6, my)
    e[:, 1] = eta * (col(0, jy) + col(2, jx) + col(3, jy)) - z * col(6, mx)
    e[:, 2] = eta * z * (col(4, jx) + col(5, jy)) - (col(7, my) - col(8, mx))
    h[:, 0] = (col(0, mx) + col(1, mx) + col(2, my)) / eta - z * col(6, jy)
    h[:, 1] = (col(0, my) + col(2, mx) + col(3, my)) / eta + z * col(6, jx)
    h[:, 2] = z * (col(4, mx) + col(5, my)) / eta + (col(7, jy) - col(8, jx))
    e *= factor
    h *= factor
    return e, h


def radiation_integral_far_field(
    directions: NDArray[np.float64],
    nodes_x_m: NDArray[np.float64],
    nodes_y_m: NDArray[np.float64],
    j_grid: NDArray[np.complex128],
    m_grid: NDArray[np.complex128],
    wavenumber_rad_m: float,
) -> NDArray[np.complex128]:
    """Far-field vector amplitude F [V] of tensor-grid equivalent currents.

    Parameters
    ----------
    directions : ndarray, shape (D, 3)
        Unit directions (aperture frame).
    nodes_x_m : ndarray, shape (nx,)
        x nodes [m].
    nodes_y_m : ndarray, shape (ny,)
        y nodes [m].
    j_grid, m_grid : ndarray, shape (nx, ny, 2), complex
        Weighted currents at the nodes (J_x, J_y), (M_x, M_y) [A], [V].
    wavenumber_rad_m : float
        k [rad m^-1].

    Returns
    -------
    ndarray, shape (D, 3), complex
        F with E -> F e^{-jkr}/r.

    Notes
    -----
    F = -jk/(4 pi) [eta0 (N - (u.N) u) - u x L] with N, L the radiation
    integrals (Balanis [1]_ eqs. (12-10)-(12-12)); the double sum is done as
    (D, nx) @ (nx, ny) products.
    """
    k = wavenumber_rad_m
    px = np.exp(1j * k * np.outer(directions[:, 0], nodes_x_m))
    py = np.exp(1j * k * np.outer(directions[:, 1], nodes_y_m))
    n_vec = np.zeros((directions.shape[0], 3), dtype=complex)
    l_vec = np.zeros((directions.shape[0], 3), dtype=complex)
    for c in range(2):
        n_vec[:, c] = np.einsum("dj,dj->d", px @ j_grid[:, :, c], py)
        l_vec[:, c] = np.einsum("dj,dj->d", px @ m_grid[:, :, c], py)
    u = directions
    n_perp = n_vec - np.sum(u * n_vec, axis=1, keepdims=True) * u
    return (-1j * k / (4 * np.pi)) * (ETA0_OHM * n_perp - np.cross(u, l_vec))


def hemisphere_rule(order: int) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Directions and solid-angle weights covering the front hemisphere u_z > 0.

    Gauss-Legendre in cos(theta) on [0, 1] (``order`` nodes) times the
    trapezoid rule in phi (``2 order`` nodes, spectrally accurate for periodic
    integrands); the weights sum to 2 pi.
    """
    x, w = gauss_legendre(order)
    cos_t = 0.5 * (x + 1.0)
    w_t = 0.5 * w
    n_phi = 2 * order
    phi = (np.arange(n_phi) + 0.5) * (2 * np.pi / n_phi)
    sin_t = np.sqrt(1.0 - cos_t**2)
    dirs = np.stack(
        [
            (sin_t[:, None] * np.cos(phi)[None, :]).ravel(),
            (sin_t[:, None] * np.sin(phi)[None, :]).ravel(),
            np.repeat(cos_t, n_phi),
        ],
        axis=1,
    )
    weights = np.repeat(w_t, n_phi) * (2 * np.pi / n_phi)
    return dirs, weights


def _slices(n: int, size: int) -> list[tuple[int, int]]:
    """Consecutive (start, stop) ranges of at most ``size`` covering range(n)."""
    return [(start, min(n, start + size)) for start in range(0, n, size)]


def _unit_phasors(phase_rad: NDArray[np.float64]) -> NDArray[np.complex64]:
    """e^{j phase} in single precision (the phases of a far-field rule stay below ~100 rad)."""
    p32 = phase_rad.astype(np.float32)
    out = np.empty(p32.shape, dtype=np.complex64)
    np.cos(p32, out=out.real)
    np.sin(p32, out=out.imag)
    return out


def _groups(orders: NDArray[np.int64]) -> list[tuple[tuple[int, int], NDArray[np.intp]]]:
    """Indices of the points sharing each (nx, ny) rule, by rule."""
    codes = orders[:, 0] * (MAX_ORDER + 1) + orders[:, 1]
    order = np.argsort(codes, kind="stable")
    bounds = np.flatnonzero(np.diff(codes[order])) + 1
    return [((int(orders[g[0], 0]), int(orders[g[0], 1])), g) for g in np.split(order, bounds)]


_POOLS: dict[int, ThreadPoolExecutor] = {}
_POOLS_LOCK = threading.Lock()


def _pool(workers: int) -> ThreadPoolExecutor:
    """A process-wide pool of ``workers`` threads, started once (not per call)."""
    with _POOLS_LOCK:
        pool = _POOLS.get(workers)
        if pool is None:
            pool = ThreadPoolExecutor(max_workers=workers, thread_name_prefix="keepclear-aperture")
            _POOLS[workers] = pool
        return pool


# ============================================================ orchestrator
class ApertureRadiator(Radiator):
    """A radiator whose fields are those of a planar aperture distribution.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    power_w : float
        Radiated power, both half-spaces together [W].
    distribution : ApertureDistribution
        Aperture field (any amplitude; it is rescaled to ``power_w``).
    placement : Placement, optional
        Position and orientation; local +z is the boresight, +y the E-field.
    method : {"adaptive", "direct"}
        Default quadrature of :meth:`fields` (see the module docstring).
    tolerance : float
        Relative quadrature tolerance of the adaptive rule.
    threads : int, optional
        Worker threads (default :data:`DEFAULT_THREADS`, one).

    Notes
    -----
    See the module docstring for the model, its accuracy and its limits.
    """

    kind = "aperture"
    #: Memory one field point costs outside the kernel blocks (outputs, indices) [bytes].
    bytes_per_point = 1024

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        distribution: ApertureDistribution,
        placement: Placement | None = None,
        *,
        method: str = "adaptive",
        tolerance: float = DEFAULT_TOLERANCE,
        threads: int | None = None,
    ) -> None:
        super().__init__(frequency_hz, power_w, placement)
        if method not in METHODS:
            raise ModelInputError("method", f"method must be one of {METHODS}, got {method!r}")
        if not (np.isfinite(tolerance) and 1e-10 <= tolerance <= 1e-2):
            raise ModelInputError(
                "tolerance", f"tolerance must lie in 1e-10..1e-2, got {tolerance!r}"
            )
        self.distribution = distribution
        self.method = method
        self.tolerance = float(tolerance)
        #: Tolerance of the fixed rule of ``method="direct"`` (see :meth:`direct_orders`).
        self.direct_tolerance = DIRECT_TOLERANCE
        self.threads = int(threads) if threads else DEFAULT_THREADS
        self._rule_cache: dict[tuple, tuple] = {}
        self._rule_bytes = 0
        self._rule_lock = threading.Lock()
        self._far_rule_cache: tuple | None = None
        self._far_basis_cache: tuple | None = None
        self._max_gain_cache: dict[int, float] = {}
        lx, ly = distribution.half_sizes_m
        k = self.wavenumber_rad_m
        # far-field rule: fine enough for the whole visible region (omega = L (k + b))
        self._far_orders = tuple(
            int(_round_to_ladder(gauss_legendre_order(half, 0.0, np.inf, half * (k + bw), 1e-10)))
            for half, bw in ((lx, distribution.bandwidth_x_rad_m),
                             (ly, distribution.bandwidth_y_rad_m))
        )  # fmt: skip
        self._scale = 1.0
        unit_front, unit_back = self._radiated_power_unit()
        if unit_front <= 0:
            raise ModelInputError("aperture", "the aperture distribution radiates no power")
        #: Power radiated into z < 0 relative to the power radiated into z > 0.
        self.back_fraction = float(unit_back / unit_front)
        self._unit_power = float(unit_front + unit_back)
        self._scale = float(np.sqrt(self.power_w / self._unit_power))
        #: The model's identity, shared by the copies of :meth:`with_power` (antennas/memo.py).
        self._model = object()
        #: Orthonormal basis (4, S) of the current columns (J_x, J_y, M_x, M_y) at the nodes.
        self._basis_vectors = self._current_basis()
        self._mixing = np.ascontiguousarray(self._basis_vectors.conj().T)
        #: Mirror parities (x, y) of the currents: +1 or -1, 0 where there is none.
        self.mirror_parities = self._mirror_parities()
        #: Memory one field point costs outside the kernel blocks (outputs, indices, sums).
        self.bytes_per_point = 640 + 320 * int(self._basis_vectors.shape[1])

    def _power_changed(self) -> None:
        self._scale = float(np.sqrt(self.power_w / self._unit_power))

    # ----------------------------------------------------------- geometry
    @property
    def largest_dimension_m(self) -> float:
        """Diagonal of the aperture rectangle [m]."""
        return self.distribution.diagonal_m

    @property
    def min_standoff_m(self) -> float:
        """Closest distance to the aperture rectangle at which fields are evaluated [m]."""
        return self.wavelength_m / 20.0

    @property
    def far_zone_distance_m(self) -> float:
        """Distance beyond which the adaptive method uses the far-field pattern [m]."""
        d = self.largest_dimension_m
        return max(40.0 * 2.0 * d * d / self.wavelength_m, 20.0 * self.wavelength_m)

    # ------------------------------------------------------------ rules
    def _far_rule(self) -> tuple:
        """Nodes and weighted current grids of the far-field rule."""
        if self._far_rule_cache is None:
            x, y, weights, j_s, m_s = self._sample_currents(*self._far_orders)
            self._far_rule_cache = (x, y, j_s * weights[..., None], m_s * weights[..., None])
        return self._far_rule_cache

    def _sample_currents(self, nx: int, ny: int) -> tuple:
        lx, ly = self.distribution.half_sizes_m
        gx, wx = gauss_legendre(nx)
        gy, wy = gauss_legendre(ny)
        x = gx * lx
        y = gy * ly
        weights = np.outer(wx * lx, wy * ly)
        e_t, h_t = self.distribution.field_function(x[:, None], y[None, :])
        j_s, m_s = equivalent_currents(e_t, h_t, self.distribution.equivalence)
        return x, y, weights, j_s, m_s

    def _current_columns(self, nx: int, ny: int) -> NDArray[np.complex128]:
        """Weighted current columns (J_x, J_y, M_x, M_y) at the (nx, ny) nodes, shape (Q, 4)."""
        _, _, weights, j_s, m_s = self._sample_currents(nx, ny)
        return (np.concatenate([j_s, m_s], axis=-1) * weights[..., None]).reshape(-1, 4)

    def _rule_sources(
        self, nx: int, ny: int
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.complex128]]:
        """Flattened nodes x', y' [m] and weighted sources in the current basis, (Q, S)."""
        x, y, weights, j_s, m_s = self._sample_currents(nx, ny)
        currents = (j_s[..., 0], j_s[..., 1], m_s[..., 0], m_s[..., 1])
        basis = np.zeros((nx * ny, self._basis_vectors.shape[1]), dtype=complex)
        for s in range(basis.shape[1]):
            for c, current in enumerate(currents):
                coefficient = self._basis_vectors[c, s]
                if coefficient != 0:
                    basis[:, s] += (current * weights).reshape(-1) * coefficient
        return np.repeat(x, ny), np.tile(y, nx), basis

    def _current_basis(self) -> NDArray[np.complex128]:
        """Smallest orthonormal basis (4, S) of the current columns (S = 1: one polarisation).

        From the eigenvectors of the 4 x 4 Gram matrix of the columns on the far-field rule,
        checked on two coarser rules; the full basis (S = 4) where the check fails.
        """
        cols = self._current_columns(*self._far_orders)
        gram = np.einsum("qi,qj->ij", cols.conj(), cols)
        values, vectors = np.linalg.eigh(gram)
        keep = values > max(values[-1], 1e-300) * 1e-18
        basis = vectors[:, keep]
        for nx, ny in ((3, 2), (17, 13)):
            c = self._current_columns(nx, ny)
            rest = c - (c @ basis) @ basis.conj().T
            if np.linalg.norm(rest) > 1e-9 * max(float(np.linalg.norm(c)), 1e-300):
                return np.eye(4, dtype=complex)
        return np.asarray(basis, dtype=complex)

    def _mirror_parities(self) -> tuple[int, int]:
        """Parities of the currents under the mirrors x -> -x and y -> -y (0: not symmetric).

        Notes
        -----
        Under x -> -x a source is mapped to itself times sigma (+1 or -1) when
        J_x and M_y are odd times sigma and J_y and M_x even times sigma (J polar, M axial);
        then E(x') = sigma M E(x) and H(x') = -sigma M H(x) at the mirror point x' = M x.
        Under y -> -y the roles of the components swap.  Checked on the far-field rule,
        whose nodes are symmetric.
        """
        cols = self._current_columns(*self._far_orders).reshape(*self._far_orders, 4)
        scale = max(float(np.abs(cols).max()), 1e-300)
        out = []
        for axis, pattern in ((0, (-1, 1, 1, -1)), (1, (1, -1, -1, 1))):
            mirrored = np.flip(cols, axis=axis)
            found = 0
            for sigma in (1, -1):
                expected = sigma * np.asarray(pattern, dtype=float) * cols
                if np.abs(mirrored - expected).max() <= 1e-9 * scale:
                    found = sigma
                    break
            out.append(found)
        return out[0], out[1]

    def _cached_rule(self, key: tuple, build: Callable[[], tuple], node_bytes: int) -> tuple:
        """A quadrature rule from the radiator's cache (least recently used out first)."""
        with self._rule_lock:
            cached = self._rule_cache.pop(key, None)
            if cached is not None:
                self._rule_cache[key] = cached  # most recently used goes last
                return cached[0]
        rule = build()
        size = int(key[1]) * int(key[2]) * node_bytes
        with self._rule_lock:
            if key not in self._rule_cache:
                self._rule_cache[key] = (rule, size)
                self._rule_bytes += size
            while self._rule_bytes > RULE_CACHE_BYTES and len(self._rule_cache) > 1:
                old_key = next(iter(self._rule_cache))
                self._rule_bytes -= self._rule_cache.pop(old_key)[1]
        return rule

    def _rule(self, nx: int, ny: int) -> tuple:
        """Flattened nodes and low-rank source basis of the (nx, ny) rule (direct method)."""

        def build() -> tuple:
            xq, yq, basis = self._rule_sources(nx, ny)
            return (xq, yq, basis, self._mixing)

        return self._cached_rule(("direct", int(nx), int(ny)), build, 40)

    def _moment_rule(self, nx: int, ny: int) -> list[tuple]:
        """Slices of at most :data:`BLOCK_PAIRS` nodes of the (nx, ny) rule for the moment kernel.

        Each slice holds the float32 node coordinates and k |q|^2 (column vectors) and the
        moment matrices of :func:`moment_matrices`.
        """

        def build() -> tuple:
            xq, yq, basis = self._rule_sources(nx, ny)
            kqq = self.wavenumber_rad_m * (xq * xq + yq * yq)
            parts = []
            for start, stop in _slices(xq.size, BLOCK_PAIRS):
                nodes = tuple(
                    np.ascontiguousarray(v[start:stop, None], dtype=np.float32)
                    for v in (xq, yq, kqq)
                )
                parts.append(
                    (nodes, moment_matrix(xq[start:stop], yq[start:stop], basis[start:stop]))
                )
            return tuple(parts)

        return list(self._cached_rule(("moment", int(nx), int(ny)), build, 60))

    def direct_orders(self) -> tuple[int, int]:
        """(nx, ny) of the fixed fine rule of ``method="direct"``."""
        lx, ly = self.distribution.half_sizes_m
        k = self.wavenumber_rad_m
        d = self.wavelength_m / 10.0
        nx = gauss_legendre_order(
            lx, 0.0, d, lx * (k + self.distribution.bandwidth_x_rad_m), self.direct_tolerance
        )
        ny = gauss_legendre_order(
            ly, 0.0, d, ly * (k + self.distribution.bandwidth_y_rad_m), self.direct_tolerance
        )
        return int(_round_to_ladder(nx)), int(_round_to_ladder(ny))

    def adaptive_orders(self, points_local_m: NDArray[np.float64]) -> NDArray[np.int64]:
        """Per-point (nx, ny) of the adaptive rule, shape (N, 2)."""
        lx, ly = self.distribution.half_sizes_m
        k = self.wavenumber_rad_m
        x, y, z = points_local_m[:, 0], points_local_m[:, 1], points_local_m[:, 2]
        over_x = np.maximum(np.abs(x) - lx, 0.0)
        over_y = np.maximum(np.abs(y) - ly, 0.0)
        dist_x = np.hypot(over_y, z)  # pole offset of the x-integral: distance off the strip
        dist_y = np.hypot(over_x, z)
        far_x = np.abs(x) + lx
        far_y = np.abs(y) + ly
        slope_x = far_x / np.hypot(far_x, dist_x)
        slope_y = far_y / np.hypot(far_y, dist_y)
        omega_x = lx * (k * slope_x + self.distribution.bandwidth_x_rad_m)
        omega_y = ly * (k * slope_y + self.distribution.bandwidth_y_rad_m)
        nx = gauss_legendre_order_lookup(
            bernstein_pole_parameter(lx, x, dist_x), omega_x, self.tolerance
        )
        ny = gauss_legendre_order_lookup(
            bernstein_pole_parameter(ly, y, dist_y), omega_y, self.tolerance
        )
        return np.stack([_round_to_ladder(nx), _round_to_ladder(ny)], axis=1)

    # --------------------------------------------------------- far field
    def _unit_far_field(self, directions: NDArray[np.float64]) -> NDArray[np.complex128]:
        """F [V] of the unscaled distribution for local unit directions."""
        x, y, j_grid, m_grid = self._far_rule()
        f = radiation_integral_far_field(directions, x, y, j_grid, m_grid, self.wavenumber_rad_m)
        if self.distribution.equivalence == GROUND_PLANE:
            f[directions[:, 2] < 0] = 0.0
        return f

    def _radiated_power_unit(self) -> tuple[float, float]:
        """Power radiated into the front and back half-spaces by the unscaled distribution [W]."""
        k = self.wavenumber_rad_m
        order = int(np.clip(np.ceil(0.5 * k * self.largest_dimension_m) + 24, 24, 400))
        dirs, weights = hemisphere_rule(order)
        front = np.sum(np.abs(self._unit_far_field(dirs)) ** 2, axis=1) @ weights / ETA0_OHM
        if self.distribution.equivalence == GROUND_PLANE:
            return float(front), 0.0
        back_dirs = dirs * np.array([1.0, 1.0, -1.0])
        back = np.sum(np.abs(self._unit_far_field(back_dirs)) ** 2, axis=1) @ weights / ETA0_OHM
        return float(front), float(back)

    def _local_far_field(self, directions_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        return self._scale * self._unit_far_field(directions_local)

    def gain(self, directions: ArrayLike) -> NDArray[np.float64]:
        """Gain towards scenario directions (N, 3), independent of ``power_w`` (linear).

        Notes
        -----
        G = 4 pi |F|^2 / (eta0 P), P the total radiated power (Balanis [1]_
        eq. (2-16)), computed from the unscaled pattern so it holds at any power.
        """
        d = as_points(directions)
        d = d / np.linalg.norm(d, axis=1, keepdims=True)
        local = self.placement.directions_to_local(d)
        f = self._unit_far_field(local)
        return 4 * np.pi * np.sum(np.abs(f) ** 2, axis=1) / (ETA0_OHM * self._unit_power)

    def boresight_gain(self) -> float:
        """Gain along the local +z axis (linear)."""
        f = self._unit_far_field(np.array([[0.0, 0.0, 1.0]]))
        return float(4 * np.pi * np.sum(np.abs(f) ** 2) / (ETA0_OHM * self._unit_power))

    def max_gain(self, samples: int = 20000) -> float:
        """Largest gain (linear): the boresight value unless the beam is split.

        The pattern does not change: the value is computed once per ``samples``.

        Notes
        -----
        The boresight gain, checked against fine scans of both principal
        planes and a quasi-uniform set of front directions; an aperture with
        a large phase error (an over-long horn flare) can have its peak off
        the axis, and then that peak is returned.
        """
        cached = self._max_gain_cache.get(int(samples))
        if cached is not None:
            return cached
        theta = np.linspace(0.0, np.pi / 2, 721)
        s, c = np.sin(theta), np.cos(theta)
        zeros = np.zeros_like(theta)
        planes = np.concatenate(
            [np.stack([s, zeros, c], axis=1), np.stack([zeros, s, c], axis=1)], axis=0
        )
        sphere = fibonacci_sphere(2 * samples)
        front = sphere[sphere[:, 2] > 0]
        dirs = np.concatenate([planes, front], axis=0)
        f = self._unit_far_field(dirs)
        g = 4 * np.pi * np.sum(np.abs(f) ** 2, axis=1) / (ETA0_OHM * self._unit_power)
        value = float(max(self.boresight_gain(), float(np.max(g))))
        self._max_gain_cache[int(samples)] = value
        return value

    # --------------------------------------------------------- near field
    def fields(
        self,
        points_m: ArrayLike,
        chunk_bytes: int = DEFAULT_CHUNK_BYTES,
        *,
        method: str | None = None,
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """Complex RMS E [V/m] and H [A/m] at scenario points.

        Parameters
        ----------
        points_m : array_like, shape (N, 3)
            Field points in scenario coordinates [m].
        chunk_bytes : int
            Memory budget for the scratch of one chunk of points [bytes] (at most 1 GiB);
            the N x 3 inputs and outputs, and for the adaptive method an index of the
            folded points (about 100 bytes a point), come on top.
        method : {"adaptive", "direct"}, optional
            Quadrature; default the radiator's :attr:`method`.

        Returns
        -------
        e_v_m, h_a_m : ndarray, shape (N, 3), complex

        Notes
        -----
        The adaptive method folds the points into the quadrant x, y >= 0 of the aperture
        frame where the currents have a mirror symmetry (:attr:`mirror_parities`), evaluates
        each folded point once (points that agree to :data:`FOLD_QUANTUM_M` count as one)
        and maps the fields back with the mirror relations: a map symmetric about the
        boresight costs half.  The direct method evaluates every point as given.
        """
        method = self.method if method is None else method
        if method not in METHODS:
            raise ModelInputError("method", f"method must be one of {METHODS}, got {method!r}")
        pts = as_points(points_m)
        memo = active_memo()
        if memo is not None and method == self.method:
            # variants of one scenario share this model's evaluations (antennas/memo.py)
            return memo.fields(
                self._model, self._scale, pts, lambda p: self._fields(p, chunk_bytes, method)
            )
        return self._fields(pts, chunk_bytes, method)

    def _fields(
        self, pts: NDArray[np.float64], chunk_bytes: int, method: str
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """:meth:`fields` of points (N, 3), every one evaluated."""
        chunk_bytes = int(min(max(chunk_bytes, self.bytes_per_point), MAX_BUDGET_BYTES))
        local = self.placement.to_local(pts)
        folded = self._fold(local) if method == "adaptive" else None
        if folded is not None:
            local = folded[0]
        n = local.shape[0]
        e = np.empty((n, 3), dtype=complex)
        h = np.empty((n, 3), dtype=complex)
        step = max(1, chunk_bytes // self.bytes_per_point)
        for start in range(0, n, step):
            stop = min(n, start + step)
            e[start:stop], h[start:stop] = self._evaluate_local(local[start:stop], method)
        if folded is not None:
            _, inverse, code = folded
            e_sign, h_sign = self._fold_signs()
            e = e[inverse] * e_sign[code]
            h = h[inverse] * h_sign[code]
        return self._to_global(e), self._to_global(h)

    def _fold(self, local: NDArray[np.float64]) -> tuple | None:
        """Folded unique points, the index of each input point among them, its mirror code.

        None where the currents have no mirror symmetry or folding cannot pay.
        """
        sx, sy = self.mirror_parities
        n = local.shape[0]
        if (sx == 0 and sy == 0) or n < 2:
            return None
        code = np.zeros(n, dtype=np.int8)
        pairs_possible = False
        for axis, (sigma, bit) in enumerate(((sx, 1), (sy, 2))):
            if sigma:
                negative = local[:, axis] < 0
                code += bit * negative
                # mirror pairs need points on both sides of that plane
                pairs_possible |= bool(negative.any() and (local[:, axis] > 0).any())
        if not pairs_possible:
            return None
        canon = local.copy()
        if sx:
            np.abs(canon[:, 0], out=canon[:, 0])
        if sy:
            np.abs(canon[:, 1], out=canon[:, 1])
        if not np.all(np.abs(canon) < 1e8):  # keys must fit int64; such points are far anyway
            return None
        keys = np.rint(canon * (1.0 / FOLD_QUANTUM_M)).astype(np.int64)
        mix = keys.view(np.uint64) * np.array(
            [0x9E3779B97F4A7C15, 0xC2B2AE3D27D4EB4F, 0x165667B19E3779F9], dtype=np.uint64
        )
        digest = mix[:, 0] ^ (mix[:, 1] >> np.uint64(1)) ^ (mix[:, 2] >> np.uint64(2))
        order = np.argsort(digest)
        starts = np.empty(n, dtype=bool)
        starts[0] = True
        np.not_equal(digest[order[1:]], digest[order[:-1]], out=starts[1:])
        n_unique = int(np.count_nonzero(starts))
        if n_unique > 0.9 * n:  # hardly any mirror pairs: folding would not pay
            return None
        inverse = np.empty(n, dtype=np.intp)
        inverse[order] = np.cumsum(starts) - 1
        first = order[starts]
        clash = np.any(keys[first][inverse] != keys, axis=1)
        if clash.any():  # equal digests of different points: evaluate those on their own
            extra = np.flatnonzero(clash)
            inverse[extra] = first.size + np.arange(extra.size)
            first = np.concatenate([first, extra])
        return canon[first], inverse.reshape(-1), code

    def _fold_signs(self) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Component signs of E and H at the mirror images, by mirror code (x: 1, y: 2)."""
        sx, sy = self.mirror_parities
        e_x = sx * np.array([-1.0, 1.0, 1.0])
        h_x = sx * np.array([1.0, -1.0, -1.0])
        e_y = sy * np.array([1.0, -1.0, 1.0])
        h_y = sy * np.array([-1.0, 1.0, -1.0])
        one = np.ones(3)
        e_sign = np.stack([one, e_x, e_y, e_x * e_y])
        h_sign = np.stack([one, h_x, h_y, h_x * h_y])
        return e_sign, h_sign

    def _to_global(self, vectors: NDArray[np.complex128]) -> NDArray[np.complex128]:
        """Rotate complex local vectors (N, 3) into scenario axes (column products)."""
        rotation = self.placement.rotation
        if np.array_equal(rotation, np.eye(3)):
            return vectors
        out = np.empty_like(vectors)
        for i in range(3):
            terms = [(j, rotation[i, j]) for j in range(3) if rotation[i, j] != 0.0]
            if not terms:
                out[:, i] = 0.0
                continue
            j0, c0 = terms[0]
            np.multiply(vectors[:, j0], c0, out=out[:, i])
            for j, c in terms[1:]:
                out[:, i] += vectors[:, j] * c
        return out

    def _local_fields(
        self, points_local_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        return self._evaluate_local(points_local_m, self.method)

    def apply_standoff(self, points_local_m: NDArray[np.float64]) -> NDArray[np.float64]:
        """Move points closer than :attr:`min_standoff_m` to the aperture out to it, along z."""
        lx, ly = self.distribution.half_sizes_m
        p = np.array(points_local_m, dtype=float, copy=True)
        lateral = np.hypot(
            np.maximum(np.abs(p[:, 0]) - lx, 0.0), np.maximum(np.abs(p[:, 1]) - ly, 0.0)
        )
        h_min = self.min_standoff_m
        close = np.hypot(lateral, p[:, 2]) < h_min
        if np.any(close):
            side = np.where(p[close, 2] < 0, -1.0, 1.0)
            p[close, 2] = side * np.sqrt(np.maximum(h_min**2 - lateral[close] ** 2, 0.0))
        return p

    def _run(self, run: Callable[[tuple], None], tasks: list[tuple], pairs: int) -> None:
        """Run independent tasks, on :attr:`threads` worker threads when the work pays.

        ``pairs`` is the number of point-node pairs of all tasks: below
        :data:`THREAD_MIN_PAIRS` handing tasks to threads costs more than it saves.
        """
        if self.threads > 1 and len(tasks) > 1 and pairs >= THREAD_MIN_PAIRS:
            shares = [tasks[i :: self.threads] for i in range(self.threads)]

            def run_share(share: list[tuple]) -> None:
                for task in share:
                    run(task)

            list(_pool(self.threads).map(run_share, shares))
        else:
            for task in tasks:
                run(task)

    def _evaluate_local(
        self, points_local_m: NDArray[np.float64], method: str
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        pts = self.apply_standoff(points_local_m)
        n = pts.shape[0]
        e = np.zeros((n, 3), dtype=complex)
        h = np.zeros((n, 3), dtype=complex)
        if n == 0 or self._scale == 0.0:
            return e, h
        active = np.ones(n, dtype=bool)
        if self.distribution.equivalence == GROUND_PLANE:
            active &= pts[:, 2] >= 0
        r = np.linalg.norm(pts, axis=1)
        if method == "direct":
            index = np.nonzero(active)[0]
            if index.size:
                self._direct_fields(pts, r, index, e, h)
            return e, h
        far = active & (r >= self.far_zone_distance_m)
        if np.any(far):
            ef, hf = self._far_zone_fields(pts[far], r[far])
            e[far], h[far] = ef, hf
        index = np.nonzero(active & ~far)[0]
        if index.size == 0:
            return e, h
        orders = self.adaptive_orders(pts[index])
        groups = _groups(orders)
        # points sorted by rule, so that every block is a contiguous slice
        index = index[np.concatenate([g for _, g in groups])]
        near = pts[index]
        moments = np.empty((10, self._mixing.shape[0], index.size), dtype=complex)
        tasks = []
        offset = 0
        pairs = 0
        for (nx, ny), group in groups:
            rule = self._moment_rule(nx, ny)
            block = max(1, BLOCK_PAIRS // (nx * ny))
            for start in range(offset, offset + group.size, block):
                tasks.append((start, min(offset + group.size, start + block), rule))
            offset += group.size
            pairs += group.size * nx * ny
        k = self.wavenumber_rad_m

        def run(task: tuple) -> None:
            start, stop, rule = task
            p = near[start:stop]
            target = moments[:, :, start:stop]
            for i, (nodes, mom) in enumerate(rule):  # a large rule: slices of nodes
                dyadic_moment_sums(p, nodes, mom, k, out=target, accumulate=i > 0)

        self._run(run, tasks, pairs)
        sums = kernel_sums_from_moments(moments, near[:, 0], near[:, 1])
        el, hl = fields_from_mixed_sums(sums, self._mixing, near[:, 2], k)
        phase = (self._scale * np.exp(-1j * k * r[index]))[:, None]
        e[index] = el * phase
        h[index] = hl * phase
        return e, h

    def _direct_fields(
        self,
        pts: NDArray[np.float64],
        r: NDArray[np.float64],
        index: NDArray[np.intp],
        e: NDArray[np.complex128],
        h: NDArray[np.complex128],
    ) -> None:
        """``method="direct"``: the fixed fine rule, every kernel explicit, double precision."""
        nx, ny = self.direct_orders()
        rule = self._rule(nx, ny)
        block = max(1, BLOCK_PAIRS // (nx * ny))
        tasks = [(index[s:t], rule) for s, t in _slices(index.size, block)]
        k = self.wavenumber_rad_m

        def run(task: tuple) -> None:
            members, rule = task
            xx, yy, basis, mixing = rule
            p = pts[members]
            # a rule larger than a block is summed in slices of nodes (memory bound)
            sums = sum(
                dyadic_kernel_sums(p, xx[s:t], yy[s:t], basis[s:t], k, np.float64)
                for s, t in _slices(xx.size, BLOCK_PAIRS)
            )
            sums = np.einsum("mpr,rc->mpc", sums, mixing)
            el, hl = fields_from_kernel_sums(sums, p[:, 2], k)
            phase = (self._scale * np.exp(-1j * k * r[members]))[:, None]
            e[members] = el * phase
            h[members] = hl * phase

        self._run(run, tasks, index.size * nx * ny)

    def _far_zone_fields(
        self, points_local_m: NDArray[np.float64], r_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """E = F e^{-jkr}/r and H = u x E / eta0 beyond :attr:`far_zone_distance_m`."""
        u = points_local_m / r_m[:, None]
        f = self._scale * self.fast_far_field(u)
        e = f * (np.exp(-1j * self.wavenumber_rad_m * r_m) / r_m)[:, None]
        h = np.empty_like(e)
        h[:, 0] = u[:, 1] * e[:, 2] - u[:, 2] * e[:, 1]
        h[:, 1] = u[:, 2] * e[:, 0] - u[:, 0] * e[:, 2]
        h[:, 2] = u[:, 0] * e[:, 1] - u[:, 1] * e[:, 0]
        h /= ETA0_OHM
        return e, h

    def _far_basis(self) -> tuple:
        """Far-rule nodes and the weighted sources in the current basis, (S, nx, ny)."""
        if self._far_basis_cache is None:
            nx, ny = self._far_orders
            x, y, _, _, _ = self._sample_currents(nx, ny)
            _, _, basis = self._rule_sources(nx, ny)
            grid = np.ascontiguousarray(basis.T.reshape(-1, nx, ny).astype(np.complex64))
            self._far_basis_cache = (x, y, grid)
        return self._far_basis_cache

    def fast_far_field(self, directions_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        """F [V] of the unscaled distribution for local unit directions, in single precision.

        The radiation integral of :func:`radiation_integral_far_field` on the same rule,
        summed over the current basis (one column for a linearly polarised aperture)
        with the separable phase factors in single precision: relative error about 1e-6
        of the largest |F|, for the far-zone fields; :meth:`gain` and the normalisation
        use the double-precision integral.
        """
        x, y, grid = self._far_basis()
        k = self.wavenumber_rad_m
        u = directions_local
        px = _unit_phasors(k * u[:, 0:1] * x[None, :])
        py = _unit_phasors(k * u[:, 1:2] * y[None, :])
        n_vec = np.zeros((u.shape[0], 3), dtype=complex)
        l_vec = np.zeros((u.shape[0], 3), dtype=complex)
        for s, plane in enumerate(grid):
            integral = np.einsum("dj,dj->d", px @ plane, py).astype(complex)
            jx, jy, mx, my = self._mixing[s]
            n_vec[:, 0] += integral * jx
            n_vec[:, 1] += integral * jy
            l_vec[:, 0] += integral * mx
            l_vec[:, 1] += integral * my
        along = np.sum(u * n_vec, axis=1, keepdims=True)
        f = ETA0_OHM * (n_vec - along * u)
        f[:, 0] -= u[:, 1] * l_vec[:, 2] - u[:, 2] * l_vec[:, 1]
        f[:, 1] -= u[:, 2] * l_vec[:, 0] - u[:, 0] * l_vec[:, 2]
        f[:, 2] -= u[:, 0] * l_vec[:, 1] - u[:, 1] * l_vec[:, 0]
        f *= -1j * k / (4 * np.pi)
        if self.distribution.equivalence == GROUND_PLANE:
            f[u[:, 2] < 0] = 0.0
        return f


# ------------------------------------------------------------ open waveguide
#: Equivalent-current models of the open end offered by :class:`OpenWaveguide`.
OPEN_END_MODELS: Final[tuple[str, ...]] = ("huygens", "flange")


def open_waveguide_distribution(mode: TE10Mode, model: str = "huygens") -> ApertureDistribution:
    """TE10 aperture distribution of an open guide end.

    Parameters
    ----------
    mode : TE10Mode
        The feeding mode (dimensions, wave impedance).
    model : {"huygens", "flange"}
        ``"huygens"``: E_y = cos(pi x/a), H_x = -E_y / Z_TE10, both equivalent
        currents in free space (the Stratton-Chu aperture integration of the
        TE10 mode); ``"flange"``: the same E_y in an infinite conducting flange,
        magnetic current only (image theory).

    Returns
    -------
    ApertureDistribution
    """
    if model not in OPEN_END_MODELS:
        raise ModelInputError(
            "model", f"model must be one of {', '.join(OPEN_END_MODELS)}, got {model!r}"
        )
    equivalence = HUYGENS if model == "huygens" else GROUND_PLANE
    return te10_distribution(
        mode.broad_m,
        mode.narrow_m,
        mode.wave_impedance_ohm,
        equivalence,
        description=f"TE10 open end ({model})",
    )


def open_waveguide_gain_variants(
    broad_m: float, narrow_m: float, frequency_hz: float
) -> dict[str, float]:
    """Boresight gain of an open guide end under the competing models [dBi].

    Parameters
    ----------
    broad_m, narrow_m : float
        Inner dimensions a and b [m].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    dict
        ``"huygens"``: both currents with H = -E/Z_TE, normalised to the
        power radiated over the whole sphere (the model :class:`OpenWaveguide`
        uses); ``"huygens-front-only"``: the same pattern normalised to the
        power in front alone (information: it does not conserve power);
        ``"flange"``: magnetic current in an infinite flange;
        ``"yaghjian-1"``: E-plane pattern of the Stratton-Chu TE10 integration,
        H-plane pattern of the E-field-only integration, first-order azimuthal
        dependence, total power (a reconstruction of the first method of
        Yaghjian [4]_ from its abstract, which reports about 0.2 dB on-axis
        accuracy against measurements for X-band and larger guides);
        ``"large-aperture"``: (8/pi^2) 4 pi a b / lambda^2 (Balanis, Table 12.1).

    References
    ----------
    .. [4] A. D. Yaghjian, "Approximate formulas for the far field and gain of
       open-ended rectangular waveguide", *IEEE Trans. Antennas Propag.* 32(4),
       378-384 (1984).
    """
    mode = te10_mode(broad_m, narrow_m, frequency_hz)
    wavelength = C_M_S / frequency_hz
    k = 2 * np.pi / wavelength
    out: dict[str, float] = {}
    huygens = ApertureRadiator(frequency_hz, 1.0, open_waveguide_distribution(mode, "huygens"))
    g_total = huygens.boresight_gain()
    out["huygens"] = float(10 * np.log10(g_total))
    out["huygens-front-only"] = float(10 * np.log10(g_total * (1.0 + huygens.back_fraction)))
    flange = ApertureRadiator(frequency_hz, 1.0, open_waveguide_distribution(mode, "flange"))
    out["flange"] = float(10 * np.log10(flange.boresight_gain()))
    # Yaghjian-type first-order azimuthal pattern
    x, w = gauss_legendre(400)
    theta = np.arccos(x)
    s = np.sin(theta)
    r = mode.beta_over_k
    u = k * broad_m * s / 2
    den = (np.pi / 2) ** 2 - u**2
    near = np.abs(den) < 1e-9
    h_factor = np.where(near, np.pi / 4, np.cos(u) / np.where(near, 1.0, den)) * (np.pi / 2) ** 2
    e_factor = np.sinc(k * narrow_m * s / (2 * np.pi))
    e_plane = (1 + r * np.cos(theta)) * e_factor
    h_plane = (1 + r) * np.cos(theta) * h_factor
    power = np.pi * np.sum((np.abs(e_plane) ** 2 + np.abs(h_plane) ** 2) * w)
    out["yaghjian-1"] = float(10 * np.log10(4 * np.pi * (1 + r) ** 2 / power))
    area = broad_m * narrow_m
    out["large-aperture"] = float(10 * np.log10(8 / np.pi**2 * 4 * np.pi * area / wavelength**2))
    return out


class OpenWaveguide(ApertureRadiator):
    """Open end of a rectangular waveguide carrying the TE10 mode.

    Parameters
    ----------
    frequency_hz : float
        Frequency [Hz].
    power_w : float
        Power delivered to the guide while it radiates; all of it is radiated
        (no mismatch loss is subtracted: conservative) [W].
    broad_m : float
        Inner broad dimension a, along local x [m].
    narrow_m : float
        Inner narrow dimension b, along local y (the E-field direction) [m].
    placement : Placement, optional
        Aperture centre and orientation (boresight = local +z, E along +y).
    model : {"huygens", "flange"}
        Equivalent-current model of the open end (default ``"huygens"``).
    method : {"adaptive", "direct"}
        Default quadrature (see :mod:`keepclear.antennas.aperture`).

    Attributes
    ----------
    mode : TE10Mode
        The feeding mode.
    gain_uncertainty_db : float
        Margin [dB] by which the real gain and near field may exceed the
        model (0.8 dB); keep-out estimates add it.

    Notes
    -----
    Aperture field (Balanis, *Antenna Theory*, 4th ed., sec. 12.5.3, TE10
    distribution; Yaghjian [4]_): E_y = E0 cos(pi x / a), H_x = -E_y / Z_TE10
    on |x| <= a/2, |y| <= b/2, z = 0, radiating towards +z.  E0 is set so the
    radiated power equals ``power_w``.

    Model choice.  At 2.45 GHz in WR-340 the boresight gains are (see
    :func:`open_waveguide_gain_variants`): Huygens (both currents, H from
    Z_TE) 6.25 dBi; magnetic current in an infinite flange 6.25 dBi (6.246);
    a Yaghjian-type estimate 5.66 dBi; the large-aperture formula (8/pi^2
    efficiency) 4.04 dBi; about 6-7 dBi is usually quoted for a real open
    guide (from memory).  The model is the power-conserving variant with the
    highest boresight gain, the Huygens aperture: a keep-out distance must not
    shrink because of a model choice.  Normalising its pattern to the power in
    front alone would give 6.85 dBi, but the 15 % it sends backwards would then
    come out of nowhere.  What the model leaves open (the 7 dBi end of the
    quoted range, the ripple a finite flange adds through edge diffraction,
    wall thickness, the higher-order modes at the junction) is put at
    ``gain_uncertainty_db = 0.8`` dB, so that gain plus margin (7.05 dBi)
    covers the top of the quoted range; an estimate, not a bound from a source.

    Behind the aperture plane (z < 0) the Huygens model returns the same
    integral: the Kirchhoff continuation, which sends about 15 % of the front
    power backwards (front-to-back about 15 dB), a generous value for the
    spill-over of a real guide without flange (measured open guides are
    usually quoted at 20 dB or more front-to-back, from memory).  Inside the
    guide body (behind the opening, within its cross-section) the model has
    no meaning; nobody stands there.  The ``"flange"`` model returns zero
    behind the plane.

    The open end mismatch (:attr:`open_end_reflection`, about |Gamma| = 0.22
    for WR-340 at 2.45 GHz, one-mode flanged estimate) is information only:
    ``power_w`` is what is delivered and so radiated.
    """

    kind = "open-waveguide"

    def __init__(
        self,
        frequency_hz: float,
        power_w: float,
        broad_m: float,
        narrow_m: float,
        placement: Placement | None = None,
        *,
        model: str = "huygens",
        method: str = "adaptive",
    ) -> None:
        if not (np.isfinite(frequency_hz) and frequency_hz > 0):
            raise ModelInputError("frequency_hz", f"frequency_hz must be > 0, got {frequency_hz!r}")
        self.mode = te10_mode(broad_m, narrow_m, frequency_hz)
        self.model = model
        super().__init__(
            frequency_hz,
            power_w,
            open_waveguide_distribution(self.mode, model),
            placement,
            method=method,
        )
        self.gain_uncertainty_db = 0.8

    @classmethod
    def from_name(
        cls,
        frequency_hz: float,
        power_w: float,
        waveguide: str,
        placement: Placement | None = None,
        **options: str,
    ) -> OpenWaveguide:
        """Build from a standard size name (``"WR-340"``), see :func:`waveguide_dimensions`."""
        broad, narrow = waveguide_dimensions(waveguide)
        return cls(frequency_hz, power_w, broad, narrow, placement, **options)

    @property
    def broad_m(self) -> float:
        """Inner broad dimension a [m]."""
        return self.mode.broad_m

    @property
    def narrow_m(self) -> float:
        """Inner narrow dimension b [m]."""
        return self.mode.narrow_m

    @cached_property
    def open_end_reflection(self) -> complex:
        """One-mode flanged estimate of the TE10 reflection at the open end (information)."""
        return open_end_reflection(self.broad_m, self.narrow_m, self.frequency_hz)

    def max_gain(self, samples: int = 0) -> float:
        """Boresight gain (linear): the TE10 aperture without phase error peaks on axis."""
        return self.boresight_gain()
