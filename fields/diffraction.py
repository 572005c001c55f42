"""Fresnel diffraction by straight edges and flat rectangles (knife edge, plate, sheet).

Model
-----
Scalar Fresnel-Kirchhoff diffraction of a spherical wave by a thin flat rectangle,
in the paraxial (Fresnel) approximation about the straight ray from a point ``S`` to a
field point ``P`` that crosses the rectangle's plane at ``X``.  With ``d1 = |SX|``,
``d2 = |XP|`` and the signed distances ``h`` of the rectangle's edges from ``X``, each
edge has the Fresnel-Kirchhoff parameter of ITU-R P.526 [1]_ sec. 4.1:

.. math::

    \\nu = h\\,\\sqrt{\\frac{2 (d_1 + d_2)}{\\lambda d_1 d_2}},

``h`` measured across the ray.  It is evaluated in the equivalent path-excess form
:math:`|\\nu| = 2\\sqrt{\\Delta/\\lambda}` (P.526 [1]_ sec. 4.1, with
:math:`\\Delta \\approx h^2 (d_1 + d_2)/(2 d_1 d_2)`), Delta the exact excess of the
shortest path from S to P via the edge line over the straight path, and the sign
positive where X lies on the rectangle's side of the edge: this keeps nu finite at wide
angles (a point near the rectangle's plane far beyond an edge), where the paraxial form
would crowd the whole transition into a thin layer over the plane.  With the
complex Fresnel integral :math:`K(\\nu) = C(\\nu) - jS(\\nu)` (time :math:`e^{+j\\omega t}`,
``scipy.special.fresnel``), the field passed by a rectangular **aperture** spanning
:math:`[\\nu_1, \\nu_2]` across and :math:`[\\mu_1, \\mu_2]` along, relative to the free
field, is (P.526 [1]_ sec. 5.2.1.1, the Fresnel-integral method; Born and Wolf [2]_
sec. 8.7.3)

.. math::

    A = \\frac{j}{2}\\,[K(\\nu_2) - K(\\nu_1)]\\,[K(\\mu_2) - K(\\mu_1)],

which is 1 for an unbounded aperture.  By Babinet's principle (P.526 [1]_ sec. 5.2.2)
the field behind the complementary opaque **plate** is :math:`1 - A`.  For a half plane
(one edge, the others at infinity) :math:`|1 - A|` is the single knife edge of P.526
sec. 4.1, :math:`J(\\nu) = -20\\log_{10}|1 - A|`, 6.02 dB on the shadow boundary.

Writing :math:`t(\\nu) = K(\\infty) - K(\\nu)` (``edge_tail``), with every edge's
:math:`\\nu_i` taken **positive when X lies on the plate's side of that edge**, the
obstacle field is

.. math::

    1 - A = \\frac{1+j}{2}\\,(t_1 + t_2 + t_3 + t_4) - \\frac{j}{2}(t_1 + t_2)(t_3 + t_4),

the sum of the four knife edges (each :math:`|t_i|/\\sqrt2` is P.526's single-edge
field ratio) plus a corner term.  Every term is continuous in the field point: the
field has no step at the shadow (or reflection) boundary, only where the path passes
through the plate itself (``d2 -> 0``).

Assumptions and range of validity
---------------------------------
* Scalar, paraxial Kirchhoff theory: accurate for ``d1, d2`` of several wavelengths and
  edges within some tens of degrees of the ray's transverse plane; the polarisation
  of the diffracted field is not followed (the incident polarisation is kept).
* A perfectly absorbing (black) screen: the field scattered back to the source side
  by the plate is not part of :math:`1 - A` (reflection is added separately, as an
  image, by :mod:`keepclear.fields.reflection`).
* Compared with the uniform theory of diffraction (Kouyoumjian and Pathak [3]_), which
  is exact far from the edges for a perfectly conducting wedge, Kirchhoff theory differs
  mostly at wide diffraction angles (far into the shadow or far outside the reflected
  beam), where both fields are small.

References
----------
.. [1] Recommendation ITU-R P.526-15 (10/2019), *Propagation by diffraction*, sec. 4.1
   (single knife edge: eq. (26), the Fresnel-integral form of J(nu), and eq. (31), the
   approximation J(nu) = 6.9 + 20 log10(sqrt((nu - 0.1)^2 + 1) + nu - 0.1) for
   nu > -0.78; Fig. 7), sec. 5.2.1.1 (rectangular aperture, Fresnel integrals) and
   sec. 5.2.2 (composite screens, Babinet).  Equation numbers from memory.
.. [2] M. Born and E. Wolf, *Principles of Optics*, 7th ed., Cambridge University Press,
   1999, sec. 8.7.3 (Fresnel diffraction at a straight edge and a rectangular aperture).
.. [3] R. G. Kouyoumjian and P. H. Pathak, "A uniform geometrical theory of diffraction
   for an edge in a perfectly conducting surface", Proc. IEEE 62(11), 1448-1461, 1974.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Final

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

#: K(+infinity) = C(inf) - j S(inf).
K_INFINITY: Final[complex] = 0.5 - 0.5j
#: Largest field a thin opaque rectangle lets through beside it, relative to no sheet:
#: max |1 - A| of the Fresnel-Kirchhoff rectangle factor A (the Babinet complement of the
#: aperture; Born & Wolf, *Principles of Optics*, 7th ed., sec. 8.7, from memory) over
#: every set of edge parameters: 1.3863 (2.84 dB), one edge 1.21 outside and the other
#: dimension 2.5 Fresnel units wide (found on a grid of the exact Fresnel integrals and
#: refined by Nelder-Mead; held with 1e-3 to spare, tests/test_shield.py).  A sheet can
#: raise the field beside its edges by this much, in the light, and no more.
RECTANGLE_RIPPLE: Final[float] = 1.3873
#: Largest |nu| kept (beyond it the Fresnel integrals are at their limits to 1e-7).
NU_LIMIT: Final[float] = 1e6
#: Shortest leg length used in nu (a point on the plane itself) [m].
_MIN_LEG_M: Final[float] = 1e-12


def fresnel_k(nu: ArrayLike) -> NDArray[np.complex128]:
    """Complex Fresnel integral K(nu) = C(nu) - j S(nu) (``scipy.special.fresnel``).

    Parameters
    ----------
    nu : array_like
        Argument [1].

    Returns
    -------
    ndarray, complex
        :math:`\\int_0^\\nu e^{-j\\pi s^2/2}\\,ds` [1]; odd in nu, -> (1 - j)/2 as nu -> inf.
    """
    s, c = special.fresnel(np.asarray(nu, dtype=float))
    return np.asarray(c - 1j * s, dtype=complex)


def edge_tail(nu: ArrayLike) -> NDArray[np.complex128]:
    """t(nu) = K(inf) - K(nu): one edge's contribution, |t|/sqrt(2) the knife-edge ratio.

    Parameters
    ----------
    nu : array_like
        Fresnel-Kirchhoff parameter, positive in the edge's shadow [1].

    Returns
    -------
    ndarray, complex
        0 deep in the shadow, (1 - j)/2 on the boundary, (1 - j) deep in the light [1].
    """
    return K_INFINITY - fresnel_k(nu)


def knife_edge_loss_db(nu: ArrayLike) -> NDArray[np.float64]:
    """Single knife-edge diffraction loss J(nu), exact Fresnel-integral form [dB].

    Parameters
    ----------
    nu : array_like
        Fresnel-Kirchhoff parameter, positive in the shadow [1].

    Returns
    -------
    ndarray
        :math:`J(\\nu) = -20\\log_{10}\\left(\\sqrt{[1 - C(\\nu) - S(\\nu)]^2
        + [C(\\nu) - S(\\nu)]^2}\\,/\\,2\\right)` [dB]: 6.02 dB at nu = 0, negative (a
        gain, up to 1.4 dB) in the lit ripple.

    References
    ----------
    .. [1] ITU-R P.526-15 (10/2019), sec. 4.1, eq. (26) (number from memory).
    """
    s, c = special.fresnel(np.asarray(nu, dtype=float))
    ratio = np.sqrt((1 - c - s) ** 2 + (c - s) ** 2) / 2
    return -20 * np.log10(ratio)


def knife_edge_loss_db_approximation(nu: ArrayLike) -> NDArray[np.float64]:
    """ITU-R P.526's approximation of J(nu), 0 dB for nu <= -0.78 [dB].

    Parameters
    ----------
    nu : array_like
        Fresnel-Kirchhoff parameter [1].

    Returns
    -------
    ndarray
        :math:`6.9 + 20\\log_{10}(\\sqrt{(\\nu - 0.1)^2 + 1} + \\nu - 0.1)` for
        nu > -0.78, else 0 [dB].

    References
    ----------
    .. [1] ITU-R P.526-15 (10/2019), sec. 4.1, eq. (31) and Fig. 7.
    """
    v = np.asarray(nu, dtype=float)
    j = 6.9 + 20 * np.log10(np.sqrt((v - 0.1) ** 2 + 1) + v - 0.1)
    return np.where(v > -0.78, j, 0.0)


@dataclass(frozen=True)
class RectangleCrossing:
    """Where straight rays meet a rectangle's plane, and the four edges' nu.

    Attributes
    ----------
    crossing : ndarray of bool, shape (N,)
        The ray's end points lie strictly on opposite sides of the plane.
    nu : ndarray, shape (4, N)
        Edge parameters, positive where the crossing point lies on the rectangle's side
        of that edge (all four positive: the ray passes through the rectangle); rows:
        the +width, -width, +height and -height edges.  0 where not crossing [1].
    cos_incidence : ndarray, shape (N,)
        |cos| of the angle between the ray and the normal [1].
    d1_m, d2_m : ndarray, shape (N,)
        Distances from the start and from the end to the crossing point [m].
    inside : ndarray of bool, shape (N,)
        The crossing point lies on the rectangle.
    """

    crossing: NDArray[np.bool_]
    nu: NDArray[np.float64]
    cos_incidence: NDArray[np.float64]
    d1_m: NDArray[np.float64]
    d2_m: NDArray[np.float64]
    inside: NDArray[np.bool_]


def rectangle_crossing(
    start_m: NDArray[np.float64],
    end_m: NDArray[np.float64],
    centre_m: NDArray[np.float64],
    normal: NDArray[np.float64],
    width_axis: NDArray[np.float64],
    height_axis: NDArray[np.float64],
    half_width_m: float,
    half_height_m: float,
    wavelength_m: float,
) -> RectangleCrossing:
    """The Fresnel parameters of a rectangle's four edges for rays start -> end.

    Parameters
    ----------
    start_m, end_m : ndarray, shape (N, 3)
        Ray ends [m].
    centre_m, normal, width_axis, height_axis : ndarray, shape (3,)
        The rectangle's centre [m] and orthonormal axes [1].
    half_width_m, half_height_m : float
        Half sizes (may be <= 0: no rectangle, every nu negative) [m].
    wavelength_m : float
        Wavelength [m].

    Returns
    -------
    RectangleCrossing
    """
    ds = (start_m - centre_m) @ normal
    de = (end_m - centre_m) @ normal
    crossing = ds * de < 0
    n_pts = start_m.shape[0]
    nu = np.zeros((4, n_pts))
    cos_inc = np.ones(n_pts)
    d1 = np.zeros(n_pts)
    d2 = np.zeros(n_pts)
    inside = np.zeros(n_pts, dtype=bool)
    if not crossing.any():
        return RectangleCrossing(crossing, nu, cos_inc, d1, d2, inside)
    s, e, a, b = start_m[crossing], end_m[crossing], ds[crossing], de[crossing]
    frac = a / (a - b)
    # Both ends in the rectangle's frame (u along the width, v along the height, n the
    # normal): each edge is then a line of constant u (or v) in the plane n = 0.
    su, sv = (s - centre_m) @ width_axis, (s - centre_m) @ height_axis
    eu, ev = (e - centre_m) @ width_axis, (e - centre_m) @ height_axis
    length = np.sqrt((eu - su) ** 2 + (ev - sv) ** 2 + (b - a) ** 2)
    xu = su + frac * (eu - su)
    xv = sv + frac * (ev - sv)
    c = np.abs(b - a) / length
    l1 = np.maximum(frac * length, _MIN_LEG_M)
    l2 = np.maximum((1 - frac) * length, _MIN_LEG_M)
    # the four edges at once, rows +width, -width, +height, -height: each edge is a line
    # of constant u (or v) at the offset +-half size; across it (distance from the line,
    # in the plane) and along it, for the start and the end
    hw, hh = half_width_m, half_height_m
    inner = np.stack([hw - xu, hw + xu, hh - xv, hh + xv])
    across_s = np.stack([su - hw, su + hw, sv - hh, sv + hh])
    across_e = np.stack([eu - hw, eu + hw, ev - hh, ev + hh])
    along = np.stack([sv - ev, sv - ev, su - eu, su - eu])
    excess = _edge_path_excess_m(across_s, a[None, :], across_e, b[None, :], along, length[None, :])
    rows = np.where(inner >= 0, 1.0, -1.0) * 2.0 * np.sqrt(excess / wavelength_m)
    nu[:, crossing] = np.clip(rows, -NU_LIMIT, NU_LIMIT)
    cos_inc[crossing] = c
    d1[crossing] = l1
    d2[crossing] = l2
    inside[crossing] = (np.abs(xu) < half_width_m) & (np.abs(xv) < half_height_m)
    return RectangleCrossing(crossing, nu, cos_inc, d1, d2, inside)


def _edge_path_excess_m(
    across_start_m: NDArray[np.float64],
    height_start_m: NDArray[np.float64],
    across_end_m: NDArray[np.float64],
    height_end_m: NDArray[np.float64],
    along_m: NDArray[np.float64],
    direct_m: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Path excess via an edge line, min over E of |SE| + |EP| - |SP| (>= 0) [m].

    In the plane across the edge line, S and P sit at (x_S, n_S) and (x_P, n_P) from the
    line (``across``: in the rectangle's plane, ``height``: off it); ``along_m`` is
    :math:`t_S - t_P` along the line and ``direct_m`` is |SP|.  Unfolding P about the line
    into the half plane opposite S gives the shortest path through the line,
    :math:`L = \\sqrt{(\\rho_S + \\rho_P)^2 + (t_S - t_P)^2}`, :math:`\\rho` the
    distances from the line.  Its excess is written without the difference of two
    nearly equal lengths: :math:`L^2 - |SP|^2 = 2(\\rho_S \\rho_P + x_S x_P + n_S n_P)`
    (the along-line parts cancel exactly), and where the two offsets point apart, as on
    a ray that passes close to the line,
    :math:`\\rho_S \\rho_P + d = (x_S n_P - n_S x_P)^2 / (\\rho_S \\rho_P - d)` with
    :math:`d = x_S x_P + n_S n_P`; the excess is :math:`(L^2 - |SP|^2) / (L + |SP|)`.
    """
    rho_s = np.hypot(across_start_m, height_start_m)
    rho_e = np.hypot(across_end_m, height_end_m)
    dot = across_start_m * across_end_m + height_start_m * height_end_m
    cross = across_start_m * height_end_m - height_start_m * across_end_m
    product = rho_s * rho_e
    with np.errstate(divide="ignore", invalid="ignore"):
        apart = np.where(dot < 0, cross**2 / (product - dot), 0.0)
    half_gap = np.where(dot < 0, apart, product + dot)
    via = np.sqrt((rho_s + rho_e) ** 2 + along_m**2)
    return np.maximum(2.0 * half_gap / (via + direct_m), 0.0)


def rectangle_aperture_factor(nu: NDArray[np.float64]) -> NDArray[np.complex128]:
    """Field passed by a rectangular aperture relative to the free field, A (complex).

    Parameters
    ----------
    nu : ndarray, shape (4, N)
        Edge parameters as in :class:`RectangleCrossing` (positive on the inner side) [1].

    Returns
    -------
    ndarray, complex, shape (N,)
        :math:`A = (j/2)[K(\\nu_{+w}) + K(\\nu_{-w})][K(\\nu_{+h}) + K(\\nu_{-h})]` (K odd):
        1 for an unbounded aperture, 1/4 at the corner of a large one, about
        :math:`j\\,\\Delta\\nu\\,\\Delta\\mu/2` for one much smaller than the first
        Fresnel zone [1].
    """
    k = fresnel_k(nu)
    return 0.5j * (k[0] + k[1]) * (k[2] + k[3])


def obstacle_factor(nu: NDArray[np.float64], transmission_amplitude: ArrayLike = 0.0) -> NDArray:
    """Amplitude factor of a thin rectangular plate across a ray, continuous everywhere.

    Parameters
    ----------
    nu : ndarray, shape (4, N)
        Edge parameters as in :class:`RectangleCrossing` (positive on the plate side) [1].
    transmission_amplitude : array_like, shape (N,) or scalar
        Field transmission of the plate itself, sqrt(T), phase unknown [1].

    Returns
    -------
    ndarray, shape (N,)
        :math:`\\max\\left(|1 - (1 - \\tau)A|,\\; \\min\\left(1, \\sum_i |t_i|/\\sqrt2
        + (|t_1| + |t_2|)(|t_3| + |t_4|)/2 + \\tau|A|\\right)\\right)` [1].

    Notes
    -----
    The first argument is the Fresnel-Kirchhoff field behind the plate (Babinet, see the
    module notes) with the plate's own transmission added in phase with the incident
    wave (a thin sheet; it tends to 1 for a transparent one).  The second
    adds the four edges' knife-edge fields in magnitude (each P.526 sec. 4.1, as a sum of
    edges the worst phase) plus the corner term's magnitude: deep in the shadow this is
    the credit of adding the knife edges in magnitude, never less field than the
    coherent sum; capped at 1 in the light.  The larger of the two keeps the lit-side
    ripple of the exact form (up to 1.17 in amplitude beside one edge: the plate can
    raise the field there) and the conservative edge sum in the shadow; both are
    continuous, so their maximum is.
    """
    t = edge_tail(nu)
    a = 0.5j * (K_INFINITY * 2 - t[0] - t[1]) * (K_INFINITY * 2 - t[2] - t[3])
    tau = np.asarray(transmission_amplitude, dtype=float)
    exact = np.abs(1.0 - (1.0 - tau) * a)
    mag = np.abs(t)
    envelope = (mag[0] + mag[1] + mag[2] + mag[3]) / math.sqrt(2.0) + 0.5 * (mag[0] + mag[1]) * (
        mag[2] + mag[3]
    )
    return np.maximum(exact, np.minimum(1.0, envelope + tau * np.abs(a)))


def cube_offsets(extent_m: float, axes: NDArray[np.float64]) -> NDArray[np.float64]:
    """Offsets (8, 3) of a cube's corners of half-size ``extent_m`` along ``axes`` columns [m].

    One zero offset when ``extent_m`` is 0.
    """
    if extent_m <= 0:
        return np.zeros((1, 3))
    signs = np.array([[a, b, c] for a in (-1, 1) for b in (-1, 1) for c in (-1, 1)], dtype=float)
    return extent_m * signs @ axes.T


def largest_over_corners(
    factor: Callable[[NDArray[np.float64], NDArray[np.float64]], NDArray[np.float64]],
    start_m: NDArray[np.float64],
    end_m: NDArray[np.float64],
    offsets_m: NDArray[np.float64],
    plane: tuple[NDArray[np.float64], NDArray[np.float64]] | None = None,
) -> NDArray[np.float64]:
    """The largest ``factor(start + offset, end)`` over the offsets (:func:`cube_offsets`).

    For a source of finite size: the shadow is credited only where every corner's ray is
    shadowed (the safe side).  Beside an edge, in the light, the largest of the corners'
    factors is the lit-side ripple wherever one corner's ray meets its peak (up to 1.17
    beside one edge, ITU-R P.526 sec. 4.1), so the rise covers a band as wide as the
    source seen through the edge; it never exceeds the point-source bound.

    ``start_m`` and ``end_m`` are (N, 3), one ray a row; ``factor`` works ray by ray, so
    every corner's rays go to it in one call (the values are those of one call a corner).

    ``plane`` (a point on it and its unit normal), when given, says that ``factor`` is
    exactly 1 on a ray whose ends are not on opposite sides of that plane (a sheet's or a
    plate's, :func:`rectangle_crossing`): a ray whose end and every corner's start lie on
    the same side, farther from the plane than :data:`_SIDE_MARGIN_M` (far beyond the
    rounding of the distances), gets 1 without being asked of ``factor`` (the same value:
    every corner's factor is 1).
    """
    if plane is not None:
        return _largest_crossing(factor, start_m, end_m, offsets_m, plane)
    if len(offsets_m) == 1:
        return factor(start_m + offsets_m[0], end_m)
    n = end_m.shape[0]
    starts = (start_m[None, :, :] + offsets_m[:, None, :]).reshape(-1, 3)
    ends = np.broadcast_to(end_m, (len(offsets_m), n, 3)).reshape(-1, 3)
    return factor(starts, ends).reshape(len(offsets_m), n).max(axis=0)


#: Rays whose ends lie this close to a sheet's plane (or closer) are always asked of
#: the factor (see :func:`largest_over_corners`) [m].
_SIDE_MARGIN_M: Final[float] = 1e-9


def _largest_crossing(
    factor: Callable[[NDArray[np.float64], NDArray[np.float64]], NDArray[np.float64]],
    start_m: NDArray[np.float64],
    end_m: NDArray[np.float64],
    offsets_m: NDArray[np.float64],
    plane: tuple[NDArray[np.float64], NDArray[np.float64]],
) -> NDArray[np.float64]:
    """:func:`largest_over_corners` asked only of the rays that may cross ``plane``."""
    point, normal = plane
    d_end = (end_m - point) @ normal
    d_start = (start_m - point) @ normal
    shift = offsets_m @ normal
    lowest = d_start + float(shift.min())
    highest = d_start + float(shift.max())
    clear = ((d_end > _SIDE_MARGIN_M) & (lowest > _SIDE_MARGIN_M)) | (
        (d_end < -_SIDE_MARGIN_M) & (highest < -_SIDE_MARGIN_M)
    )
    out = np.ones(end_m.shape[0])
    if clear.all():
        return out
    ask = ~clear
    out[ask] = largest_over_corners(factor, start_m[ask], end_m[ask], offsets_m)
    return out


__all__ = [
    "K_INFINITY",
    "NU_LIMIT",
    "RECTANGLE_RIPPLE",
    "RectangleCrossing",
    "cube_offsets",
    "edge_tail",
    "fresnel_k",
    "knife_edge_loss_db",
    "knife_edge_loss_db_approximation",
    "largest_over_corners",
    "obstacle_factor",
    "rectangle_aperture_factor",
    "rectangle_crossing",
]
