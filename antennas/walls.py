"""The rim and outer walls of an open guide or horn: equivalent edge currents.

An aperture model (:mod:`keepclear.antennas.aperture`) radiates the equivalent currents
of the opening alone, as if the opening floated in free space (Kirchhoff).  A real open
guide or horn ends in metal walls: the guided wave meets the rim, part of it diffracts
around the rim onto the outer walls, and those currents radiate beside and behind the
source, where the Kirchhoff field is far too weak.  :class:`WalledAperture` adds that
part to any :class:`~keepclear.antennas.aperture.ApertureRadiator`:

.. math:: \\mathbf E = \\sigma\\,(\\mathbf E_{\\rm aperture} + \\mathbf E_{\\rm rim}),

with the rim term radiated by equivalent edge currents along the four rim edges
(the method of equivalent currents, Ryan and Peters [2]_, in the incremental form of
Michaeli [3]_), and sigma the one factor that makes the power radiated over the whole
sphere equal ``power_w``.

Symbols (local frame of the aperture: opening in z = 0, boresight +z, E along +y)

=====================  ==========  ===========================================
quantity               symbol      variable
=====================  ==========  ===========================================
edge direction         t           ``tangent``
outward, in the plane  s           ``outward``
local ray direction    d           ``incidence`` (along the wall at the rim)
angle from d, signed   psi         ``psi`` (positive towards s, i.e. outward)
hard driver            E_e         aperture E across the edge at the rim [V/m]
soft driver (slope)    S_e         -dE_t/ds at the rim, E_t along t [V/m^2]
=====================  ==========  ===========================================

Model
-----
Each rim edge is a wall of the guide seen locally as a half-plane (the wall is thin:
2 mm is lambda/60 at 2.45 GHz) lit by the guided wave at grazing incidence along the
wall.  Keller's half-plane coefficient at grazing incidence (Kouyoumjian and Pathak
[1]_ eq. (28)-(29) with n = 2, phi' = 0, and the factor 1/2 of grazing incidence)
has the angular shape 1/sin(psi/2) for the hard polarisation (H along the edge: the
edges across E, i.e. the broad walls' rims) and, for the soft polarisation (E along
the edge: the narrow walls' rims, where the TE10 field falls to zero), a slope
coefficient of shape cos(psi/2)/sin^2(psi/2) (the psi'-derivative of the soft
coefficient, Kouyoumjian and Pathak [1]_ sec. V, slope diffraction).  The Kirchhoff
aperture integral, written asymptotically, has end-point terms at the same edges
with the same singularity at the shadow boundary psi = 0 (both reproduce the same
jump of the guided wave), cot(psi/2) and 1/(2 sin^2(psi/2)) for a matched aperture.
What the aperture model lacks is the difference, the *fringe* field of the physical
theory of diffraction (Ufimtsev [4]_): bounded at every angle,

.. math:: f_h(\\psi) = \\frac{1}{\\sin(\\psi/2)} - \\cot\\frac{\\psi}{2}
                     = \\tan\\frac{\\psi}{4},\\qquad
          f_s(\\psi) = \\frac{\\cos(\\psi/2)}{2\\sin^2(\\psi/2)} - \\frac{1}{2\\sin^2(\\psi/2)}
                     = -\\frac{1}{4\\cos^2(\\psi/4)}.

They are radiated by a magnetic line current along the hard edges and an electric one
along the soft edges, per unit length (far-field amplitude F as in
:mod:`keepclear.antennas.base`)

.. math:: \\mathbf F_h = \\frac{1}{4\\pi} E_e\\, g_h(\\psi)\\, \\hat u\\times\\hat t,\\qquad
          \\mathbf F_s = \\frac{1}{4\\pi} \\frac{S_e}{jk}\\, f_s(\\psi)\\,
          (\\hat t - (\\hat u\\cdot\\hat t)\\hat u),

i.e. M = t E_e g_h / (jk) and J = t S_e f_s / (k^2 eta0), integrated along the edge
with the rim's own amplitude and phase.  Two choices depart from the half-plane, both
on the conservative side:

* g_h(psi) = 1 - cos(psi/2) in place of tan(psi/4).  Both are 0 on the shadow boundary,
  1 straight back along the outer wall (psi = +-180 deg, where the Kirchhoff term
  vanishes and the half-plane value is exact) and within 0.12 of each other between;
  the even form stays continuous across the wall's plane behind the rim (the odd half-
  plane value flips sign there: a thin sheet's two faces), and it keeps the rays that
  would cross the guide's interior (psi < -90 deg) instead of dropping them: a bound,
  not a cancellation, where the guide body blocks them.
* The outer walls are taken as long (the half-plane): the feed end behind the source
  (launcher, flange of the feed) is not modelled.

Near field.  Each edge is sampled by Gauss-Legendre nodes; every node radiates the
complete fields of a short electric or magnetic dipole (all orders in 1/kR, the same
kernel as the aperture engine), weighted by the shape function of the direction from
the node to the field point.  The kernel distance is regularised,
R_eff = sqrt(R^2 + delta^2) with delta the node spacing (at least lambda/40): the sum
is a smooth line source, finite and continuous up to and across the rim.

Flange.  With ``flange_m = [w, h]`` the rim is the flange's edge: a flat conducting
plate in z = 0 around the opening, w along x, h along y.  The walls behind the flange
are shielded from the opening and radiate nothing; the flange's four edges are hard
edges (the field grazing along a conducting plate has its H along the plate), lit by
the aperture's own field at the edge (its H along the edge, times eta0), and the local
ray direction is the outward direction s in the plate.  The aperture term keeps its
Kirchhoff continuation behind the plane (an upper bound of what a finite flange lets
through: with an infinite flange it would vanish).

Validation and limits
---------------------
The full-wave (FDTD, openEMS v0.0.35) solutions stored in ``validation/`` are the
reference; tests/test_walls.py compares the model with the figures of the open WR-340
guide and the horn, tests/test_fullwave.py with the stored data.

Bare opening (the open WR-340 and WR-430 guides and the pyramidal horn on WR-340, 2 mm
walls, no flange).  In front (within 60 deg of boresight) the model is -0.6 to +2.2 dB
from full wave.  Beside and behind it was up to 6.8 dB *under* full wave (guide-wr430,
H plane 120-135 deg at 0.1-0.2 m: the outer walls' currents and the feed end are not in
the rim term).  This model serves the guides and horns the wall grid of
:mod:`keepclear.antennas.guide_grid` cannot take (too large), so the power density beside
and behind carries a margin, :data:`BACK_MARGIN_DB` = 7 dB from 90 deg off boresight on,
rising smoothly from 60 deg (:func:`back_margin`): with it the model is never more than
0.9 dB under the full-wave field at any stored point of those cases, and up to about 14 dB
over it.

Opening in a flange (flanged-wr340: open WR-340, 2 mm walls, on a 0.25 x 0.20 m flange in
the aperture plane).  A flanged guide or horn whose walls and flange fit the wall grid of
:mod:`keepclear.antennas.guide_grid` is solved there (the flanged WR-340 guide within
-0.60/+0.45 dB in front); this model serves the flanged ones too large for it, with the
margins below.  The flange does not make the back region easier: behind the plate the
model, without a margin, is up to 7.6 dB under full wave (H plane 135 deg, 0.3-0.4 m; the
model drives every flange edge by the aperture's H along it, which is small on the edges
along E, so those edges radiate little in the model), and the margin there is
:data:`FLANGE_BACK_MARGIN_DB` = 8 dB; with it the model is over full wave at every stored
point from 90 deg on (by 0.4 dB at least, H 135 deg 0.4 m), and up to 24 dB over it close
behind the plate (H 120 deg 0.1 m, where full wave is 33 dB under the front).  In front the
flange's edges reshape the E-plane pattern: full wave peaks at 30-35 deg in the E plane
(7.2 dBi) with 4.7 dBi on boresight, which the model (5.9 dBi on boresight, its E plane
smooth) misses: -2.6 to +4.0 dB in front, -2.7 dB at worst on the E plane's shoulder at 60
deg.  Its keep-out margin is therefore :data:`FLANGE_GAIN_UNCERTAINTY_DB` = 2.8 dB.  The
model's peak gain (7.9 dBi; full wave 7.2) lies in the margin's region, at grazing in the E
plane.  A horn in a flange (flanged-horn-wr340: the 0.24 x 0.18 m horn on WR-340 on a
0.36 x 0.27 m flange) takes the same keep-out margin (the model is -2.16 to +0.83 dB from
full wave in front), but straight behind, 3 cm behind its feed guide's short, the model
without a margin is 16.5 dB under full wave (it leaves the feed guide's currents out; -4.9 dB
at most elsewhere behind), so its back-region margin is :data:`FLANGED_HORN_BACK_MARGIN_DB`
= 17 dB.  (Against the first stored run, whose sample there held the electric part of the
power density alone, it was 13.1 dB under and the margin 14 dB.)

Points on or inside the metal have no meaning (about the same as the aperture engine's:
finite values, not a field anyone meets).

References
----------
.. [1] R. G. Kouyoumjian and P. H. Pathak, "A uniform geometrical theory of diffraction
   for an edge in a perfectly conducting surface", *Proc. IEEE* 62(11), 1448-1461
   (1974), doi:10.1109/PROC.1974.9651.
.. [2] C. E. Ryan and L. Peters, "Evaluation of edge-diffracted fields including
   equivalent currents for the caustic regions", *IEEE Trans. Antennas Propag.* 17(3),
   292-299 (1969).
.. [3] A. Michaeli, "Equivalent edge currents for arbitrary aspects of observation",
   *IEEE Trans. Antennas Propag.* 32(3), 252-258 (1984).
.. [4] P. Ya. Ufimtsev, *Fundamentals of the Physical Theory of Diffraction*, Wiley,
   2007, ch. 1-2 (fringe waves, the half-plane).
.. [5] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley, 2016,
   sec. 12.10 (GTD for apertures), sec. 13.2-13.4 (horn E-plane edge diffraction).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .aperture import ApertureRadiator
from .base import ETA0_OHM, ModelInputError, Radiator, as_points, fibonacci_sphere

#: Point-node pairs evaluated in one block of the rim kernel.
RIM_BLOCK_PAIRS: Final[int] = 1 << 18

#: Smallest regularisation distance of the rim kernel, in wavelengths.
MIN_DELTA_WAVELENGTHS: Final[float] = 1.0 / 40.0

#: Raise of the power density beside and behind a bare opening [dB]: the largest deficit of
#: the rim model against full wave on the bare guides and horn of ``validation/`` (guide-wr430,
#: -6.79 dB at 135 deg in the H plane, 0.1 m; openEMS v0.0.35), rounded up.
BACK_MARGIN_DB: Final[float] = 7.0

#: The same raise for an open guide in a flange [dB]: the largest deficit of the flange's rim
#: model beside and behind against the flanged case of ``validation/`` (flanged-wr340: open
#: WR-340 on a 0.25 x 0.20 m flange, -7.61 dB at 135 deg in the H plane, 0.4 m; openEMS
#: v0.0.35), rounded up.
FLANGE_BACK_MARGIN_DB: Final[float] = 8.0

#: The same raise for a horn in a flange [dB]: the largest deficit of the flange's rim model
#: beside and behind against flanged-horn-wr340 (the 0.24 x 0.18 m horn on WR-340 on a
#: 0.36 x 0.27 m flange: -16.50 dB straight behind at 0.45 m, 3 cm behind the feed guide's
#: short, whose currents the model leaves out; -4.9 dB at most elsewhere, E plane 135-150 deg
#: 0.2 m; openEMS v0.0.35, with the H field recorded there), rounded up.
FLANGED_HORN_BACK_MARGIN_DB: Final[float] = 17.0

#: Keep-out margin of an opening in a flange [dB]: the largest deficit of the flange's rim
#: model (with its back-region margin) at any stored point of flanged-wr340 (-2.70 dB in the
#: E plane at 60 deg, 0.2 m; in front of 60 deg -2.63 dB at 45 deg, 0.2 m: the E-plane lobe
#: the flange's edges raise, which the model misses; openEMS v0.0.35, with the H field
#: recorded on the E plane), rounded up.  Taken
#: for flanged horns too, unless their aperture states more (on flanged-horn-wr340, with
#: :data:`FLANGED_HORN_BACK_MARGIN_DB`, the model is -2.16 dB at worst, E 45 deg 0.3 m).
FLANGE_GAIN_UNCERTAINTY_DB: Final[float] = 2.8

#: The raise starts at this angle from boresight and is whole from :data:`BACK_FULL_DEG` on.
BACK_START_DEG: Final[float] = 60.0
BACK_FULL_DEG: Final[float] = 90.0


def back_margin(
    vectors_local: NDArray[np.float64], margin_db: float = BACK_MARGIN_DB
) -> NDArray[np.float64]:
    """Amplitude factor of the rim model's back-region margin along local vectors (N,).

    1 within :data:`BACK_START_DEG` of boresight (+z, where the model is validated
    against full wave), ``10**(margin_db / 20)`` from :data:`BACK_FULL_DEG` on, and a
    smooth step (3 w^2 - 2 w^3) between, so that maps show no edge.  The origin counts as
    in front.  ``margin_db``: :data:`BACK_MARGIN_DB` for a bare opening,
    :data:`FLANGE_BACK_MARGIN_DB` for one in a flange.
    """
    v = np.asarray(vectors_local, dtype=float).reshape(-1, 3)
    norm = np.linalg.norm(v, axis=1)
    cos = np.divide(v[:, 2], norm, out=np.ones_like(norm), where=norm > 0)
    theta_deg = np.degrees(np.arccos(np.clip(cos, -1.0, 1.0)))
    w = np.clip((theta_deg - BACK_START_DEG) / (BACK_FULL_DEG - BACK_START_DEG), 0.0, 1.0)
    return 10.0 ** (margin_db * (3 * w * w - 2 * w * w * w) / 20.0)


# ============================================================ model functions
def hard_fringe(psi_rad: NDArray[np.float64]) -> NDArray[np.float64]:
    """Shape of the hard (H along the edge) rim term (see module Notes).

    Parameters
    ----------
    psi_rad : ndarray
        Angle from the local ray direction in the plane normal to the edge [rad],
        in [-pi, pi], positive outward (away from the opening).

    Returns
    -------
    ndarray
        The half-plane fringe tan(psi/4) from -90 deg (across the opening) round the
        outside to +180 deg (back along the outer wall); over the rays that would cross
        the guide's interior (-150 deg < psi < -90 deg) it tapers to zero, and over the
        last 30 deg it rises again to the outer wall's value 1, so that the field stays
        continuous across the wall's plane behind the rim (blocked on one side, the
        outer face's field on the other).
    """
    psi = np.asarray(psi_rad, dtype=float)
    out = np.tan(0.25 * psi)
    taper = (psi < -0.5 * np.pi) & (psi >= -5.0 * np.pi / 6.0)
    s = (psi + 0.5 * np.pi) / (-np.pi / 3.0)  # 0 at -90 deg, 1 at -150 deg
    out = np.where(taper, np.tan(-np.pi / 8.0) * np.cos(0.5 * np.pi * s) ** 2, out)
    rise = psi < -5.0 * np.pi / 6.0
    r = (psi + 5.0 * np.pi / 6.0) / (-np.pi / 6.0)  # 0 at -150 deg, 1 at -180 deg
    return np.where(rise, np.sin(0.5 * np.pi * r) ** 2, out)


def soft_slope_fringe(psi_rad: NDArray[np.float64]) -> NDArray[np.float64]:
    """Shape of the soft slope rim term, -1 / (4 cos^2(psi/4)) (see module Notes)."""
    c = np.cos(0.25 * psi_rad)
    return -0.25 / (c * c)


@dataclass(frozen=True)
class RimEdge:
    """One straight rim edge, sampled for the equivalent edge currents (local frame).

    Parameters
    ----------
    nodes_m : ndarray, shape (Q, 3)
        Quadrature nodes along the edge [m].
    weights_m : ndarray, shape (Q,)
        Quadrature weights (lengths) [m].
    tangent : ndarray, shape (3,)
        Unit edge direction t.
    outward : ndarray, shape (3,)
        Unit vector normal to t, pointing away from the opening across the edge.
    incidence : ndarray, shape (3,)
        Local ray direction d at the rim (unit, normal to t): the direction psi = 0.
    hard : ndarray, shape (Q,), complex
        Hard driver E_e at the nodes [V/m] (0 where the edge is soft).
    soft_slope : ndarray, shape (Q,), complex
        Soft slope driver S_e at the nodes [V/m^2].
    delta_m : float
        Kernel regularisation distance [m].
    """

    nodes_m: NDArray[np.float64]
    weights_m: NDArray[np.float64]
    tangent: NDArray[np.float64]
    outward: NDArray[np.float64]
    incidence: NDArray[np.float64]
    hard: NDArray[np.complex128]
    soft_slope: NDArray[np.complex128]
    delta_m: float

    def psi(self, directions: NDArray[np.float64]) -> NDArray[np.float64]:
        """Signed angle psi of unit directions (..., 3) in the plane normal to the edge."""
        normal = np.cross(self.tangent, self.incidence)  # completes (t, d, n) right-handed
        sign = 1.0 if float(np.dot(normal, self.outward)) >= 0 else -1.0
        return np.arctan2(sign * (directions @ normal), directions @ self.incidence)


def _edge_nodes(
    start: NDArray[np.float64], stop: NDArray[np.float64], count: int
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Gauss-Legendre nodes (Q, 3), weights (Q,) and the parameter in [-1, 1]."""
    g, w = np.polynomial.legendre.leggauss(count)
    half = 0.5 * (stop - start)
    nodes = 0.5 * (start + stop)[None, :] + g[:, None] * half[None, :]
    return nodes, w * float(np.linalg.norm(half)), g


def rim_far_field(edges: list[RimEdge], directions: NDArray[np.float64], k: float) -> NDArray:
    """Far-field amplitude F [V] of the rim currents towards local unit directions (N, 3).

    Notes
    -----
    F = (1/4 pi) sum_nodes w e^{jk u.r'} [E_e g_h (u x t) + S_e/(jk) f_s (t - (u.t) u)],
    the line integral of the module Notes by the nodes' quadrature.
    """
    u = directions
    f = np.zeros((u.shape[0], 3), dtype=complex)
    for edge in edges:
        psi = edge.psi(u)
        phase = np.exp(1j * k * (u @ edge.nodes_m.T)) * edge.weights_m[None, :]  # (N, Q)
        t = edge.tangent
        if np.any(edge.hard != 0):
            amp = (phase @ edge.hard) * hard_fringe(psi)
            f += amp[:, None] * np.cross(u, t)[:, :] / (4 * np.pi)
        if np.any(edge.soft_slope != 0):
            amp = (phase @ edge.soft_slope) * soft_slope_fringe(psi) / (1j * k)
            perp = t[None, :] - (u @ t)[:, None] * u
            f += amp[:, None] * perp / (4 * np.pi)
    return f


def rim_near_fields(
    edges: list[RimEdge], points_m: NDArray[np.float64], k: float
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """E [V/m] and H [A/m] of the rim currents at local points (N, 3), all orders in 1/kR.

    Notes
    -----
    Each node is a short dipole, magnetic M = t E_e g_h w / (jk) [V m] or electric
    J = t S_e f_s w / (k^2 eta0) [A m], radiating the complete free-space fields
    (E = -jk G [eta0 (a J + b R(R.J)) - c R x M], H = -jk G [(a M + b R(R.M))/eta0
    + c R x J], G = e^{-jkR}/(4 pi R), u = 1/(jkR), a = 1 + u + u^2,
    b = -(1 + 3u + 3u^2), c = 1 + u; Jackson, *Classical Electrodynamics*, 3rd ed.,
    eqs. (9.18), (9.36)), with the shape function taken at the direction from the node
    to the point and R regularised to sqrt(R^2 + delta^2).
    """
    n = points_m.shape[0]
    e = np.zeros((n, 3), dtype=complex)
    h = np.zeros((n, 3), dtype=complex)
    for edge in edges:
        q = edge.nodes_m.shape[0]
        step = max(1, RIM_BLOCK_PAIRS // max(q, 1))
        t = edge.tangent
        m_amp = edge.hard * edge.weights_m / (1j * k)
        j_amp = edge.soft_slope * edge.weights_m / (k * k * ETA0_OHM)
        has_m = bool(np.any(m_amp != 0))
        has_j = bool(np.any(j_amp != 0))
        for start in range(0, n, step):
            stop = min(n, start + step)
            rvec = points_m[start:stop, None, :] - edge.nodes_m[None, :, :]  # (B, Q, 3)
            r_true = np.sqrt(np.sum(rvec * rvec, axis=-1))
            r = np.sqrt(r_true * r_true + edge.delta_m**2)
            rhat = rvec / r[..., None]
            unit = rvec / np.maximum(r_true, 1e-300)[..., None]
            psi = edge.psi(unit)
            u = 1.0 / (1j * k * r)
            a = 1.0 + u + u * u
            b = -(1.0 + 3.0 * u + 3.0 * u * u)
            c = 1.0 + u
            g = -1j * k * np.exp(-1j * k * r) / (4 * np.pi * r)
            rt = rhat @ t  # (B, Q)
            rxt = np.cross(rhat, t)  # (B, Q, 3)
            if has_m:
                m = m_amp[None, :] * hard_fringe(psi)  # (B, Q)
                gm = g * m
                # E += -jkG (-c R x M);  H += -jkG (a M + b R (R.M)) / eta0
                e[start:stop] += np.einsum("bq,bqi->bi", -gm * c, rxt)
                h[start:stop] += (
                    np.sum(gm * a, axis=1)[:, None] * t[None, :]
                    + np.einsum("bq,bqi->bi", gm * b * rt, rhat)
                ) / ETA0_OHM
            if has_j:
                jj = j_amp[None, :] * soft_slope_fringe(psi)
                gj = g * jj
                # E += -jkG eta0 (a J + b R (R.J));  H += -jkG c R x J
                e[start:stop] += ETA0_OHM * (
                    np.sum(gj * a, axis=1)[:, None] * t[None, :]
                    + np.einsum("bq,bqi->bi", gj * b * rt, rhat)
                )
                h[start:stop] += np.einsum("bq,bqi->bi", gj * c, rxt)
    return e, h


# ============================================================ parameter checks
def check_flange(
    flange_m: ArrayLike | None, outer_width_m: float, outer_height_m: float
) -> tuple[float, float] | None:
    """Validate ``flange_m = [w, h]`` against the aperture's outer size.

    Parameters
    ----------
    flange_m : array_like of 2 floats, or None
        Flange width along the broad direction and height along the polarisation [m].
    outer_width_m, outer_height_m : float
        Outer size of the opening the flange surrounds [m] (the guide with its walls,
        or the horn's aperture).

    Returns
    -------
    (w, h) or None

    Raises
    ------
    ModelInputError
        ``flange_m`` is not two positive finite lengths, or is smaller than the opening.
    """
    if flange_m is None:
        return None
    try:
        values = np.asarray(flange_m, dtype=float)
    except (TypeError, ValueError):
        raise ModelInputError(
            "flange_m", f"flange_m must be two lengths [w, h] in metres, got {flange_m!r}"
        ) from None
    if values.shape != (2,) or not np.all(np.isfinite(values)) or np.any(values <= 0):
        raise ModelInputError(
            "flange_m",
            f"flange_m must be two positive, finite lengths [w, h] in metres, got {flange_m!r}",
        )
    w, h = float(values[0]), float(values[1])
    if w < outer_width_m - 1e-12 or h < outer_height_m - 1e-12:
        raise ModelInputError(
            "flange_m",
            f"flange_m = [{w:g}, {h:g}] m is smaller than the opening it surrounds "
            f"({outer_width_m:g} m x {outer_height_m:g} m outside the walls); give at least that",
        )
    return w, h


# ============================================================ the radiator
#: How aperture plus rim are scaled: "aperture" keeps the aperture's own scaling (the rim
#: comes on top: conservative, the total exceeds ``power_w`` by ``power_ratio``); "total"
#: scales both so the whole sphere receives ``power_w``.
NORMALIZATIONS: Final[tuple[str, ...]] = ("aperture", "total")

#: Wall thickness assumed for the outer size of an open guide when checking a flange [m].
DEFAULT_WALL_M: Final[float] = 0.002


class WalledAperture(Radiator):
    """An aperture radiator with its rim and outer walls (or its flange) added.

    Parameters
    ----------
    aperture : ApertureRadiator
        The opening's model (an :class:`~keepclear.antennas.aperture.OpenWaveguide`
        or a :class:`~keepclear.antennas.horn.PyramidalHorn`, or any aperture with a
        TE10-like field: E along local y).  Its placement and power are used.
    flange_m : (w, h), optional
        A flat conducting flange in the aperture plane, centred, w along local x and h
        along local y [m]; at least the opening's outer size.  Without it the guide or
        horn ends in its bare walls.
    flare_half_angles_deg : (H-plane, E-plane), optional
        Wall angles from the axis at the rim [deg] (a horn's flare; 0 for a guide).
    wall_m : float
        Wall thickness used for the outer size of an open guide [m].
    normalize : {"aperture", "total"}
        ``"aperture"`` (default): the aperture term keeps the scaling that gives it
        ``power_w`` alone and the rim term comes on top, so the model radiates
        ``power_ratio * power_w`` (1.33 for an open WR-340 guide, 1.05 for the demo
        horn): conservative everywhere, and the front stays what the aperture model
        gives (validated there within 0.5-0.65 dB, low).  ``"total"``: aperture plus
        rim scaled together to radiate exactly ``power_w``; this lowers the front by
        10 log10(power_ratio) dB, which on boresight of the open guide would add to the
        aperture model's own deficit against full-wave (6.25 against 6.9 dBi) and leave
        it more than 1 dB low: not the default.

    Attributes
    ----------
    aperture : ApertureRadiator
    edges : list of RimEdge
        The rim edges in the local frame, drivers at the aperture's power.
    rim_scale : float
        sigma: the factor applied to aperture plus rim (1 with ``normalize="aperture"``).
    power_ratio : float
        Power radiated by aperture plus rim (before sigma) over ``power_w``.
    gain_uncertainty_db : float
        The aperture model's margin (see it); with a flange at least
        :data:`FLANGE_GAIN_UNCERTAINTY_DB`.
    back_margin_db : float
        The back-region margin [dB]: :data:`BACK_MARGIN_DB` bare,
        :data:`FLANGE_BACK_MARGIN_DB` with a flange round a guide,
        :data:`FLANGED_HORN_BACK_MARGIN_DB` round a horn (flared walls).

    Notes
    -----
    Model, validity and references: module docstring.  Conservative where not validated:
    the rim term keeps rays the guide body blocks and takes the walls as long.
    """

    bytes_per_point = 4096

    def __init__(
        self,
        aperture: ApertureRadiator,
        flange_m: ArrayLike | None = None,
        *,
        flare_half_angles_deg: tuple[float, float] = (0.0, 0.0),
        wall_m: float = DEFAULT_WALL_M,
        normalize: str = "aperture",
    ) -> None:
        if normalize not in NORMALIZATIONS:
            raise ModelInputError(
                "normalize", f"normalize must be one of {NORMALIZATIONS}, got {normalize!r}"
            )
        self.normalize = normalize
        super().__init__(aperture.frequency_hz, aperture.power_w, aperture.placement)
        self.aperture = aperture
        self.kind = aperture.kind
        width, height = aperture.distribution.width_m, aperture.distribution.height_m
        flare = (float(flare_half_angles_deg[0]), float(flare_half_angles_deg[1]))
        self.flare_half_angles_deg = flare
        thick = 0.0 if any(a > 0 for a in flare) else float(wall_m)
        self.flange_m = check_flange(flange_m, width + 2 * thick, height + 2 * thick)
        self.gain_uncertainty_db = float(getattr(aperture, "gain_uncertainty_db", 0.0))
        self.back_margin_db = BACK_MARGIN_DB
        if self.flange_m is not None:
            self.gain_uncertainty_db = max(self.gain_uncertainty_db, FLANGE_GAIN_UNCERTAINTY_DB)
            horn = any(a > 0 for a in flare)
            self.back_margin_db = FLANGED_HORN_BACK_MARGIN_DB if horn else FLANGE_BACK_MARGIN_DB
        k = self.wavenumber_rad_m
        if self.flange_m is None:
            self.edges = self._bare_rim_edges(np.radians(flare))
        else:
            self.edges = self._flange_edges(*self.flange_m)
        p_aperture = max(aperture.power_w, 0.0)
        self.rim_scale = 1.0
        #: Power radiated by aperture plus rim over the power the aperture alone radiates.
        self.power_ratio = 1.0
        if p_aperture > 0.0:
            self.power_ratio = self._radiated_power(k) / p_aperture
            if normalize == "total":
                self.rim_scale = float(np.sqrt(1.0 / self.power_ratio))
        for name in ("mode", "geometry", "broad_m", "narrow_m"):
            if hasattr(aperture, name):
                setattr(self, name, getattr(aperture, name))

    # ------------------------------------------------------------- the body
    @property
    def boresight(self) -> NDArray[np.float64] | None:
        """The aperture's boresight in scenario axes [1]."""
        return self.aperture.boresight

    def _local_outline(self) -> NDArray[np.float64] | None:
        """The aperture's body (guide or flare); a flange is drawn by its own plate."""
        return self.aperture._local_outline()

    def _local_inside_or_on(
        self, points_local_m: NDArray[np.float64], tolerance_m: float
    ) -> NDArray[np.bool_]:
        """Inside the guide or the flare, or on their metal: the aperture's own test."""
        return self.aperture._local_inside_or_on(points_local_m, tolerance_m)

    def _power_changed(self) -> None:
        """Follow a new ``power_w`` (:meth:`Radiator.with_power`).

        The aperture and the rim's drive follow; the rim's share of the power
        (``power_ratio``) does not change with the power.
        """
        self.aperture = self.aperture.with_power(self.power_w)
        if self.flange_m is None:
            self.edges = self._bare_rim_edges(np.radians(self.flare_half_angles_deg))
        else:
            self.edges = self._flange_edges(*self.flange_m)
        if self.power_ratio == 1.0 and self.power_w > 0.0:
            self.power_ratio = self._radiated_power(self.wavenumber_rad_m) / self.power_w
            if self.normalize == "total":
                self.rim_scale = float(np.sqrt(1.0 / self.power_ratio))

    # ----------------------------------------------------------- edges
    def _aperture_e_y(self, x: NDArray, y: NDArray) -> NDArray[np.complex128]:
        e_t, _ = self.aperture.distribution.field_function(x, y)
        return np.asarray(e_t[..., 1], dtype=complex) * self.aperture._scale

    def _node_count(self, length_m: float) -> int:
        return int(max(8, np.ceil(12.0 * length_m / self.wavelength_m)))

    def _bare_rim_edges(self, flare_rad: NDArray[np.float64]) -> list[RimEdge]:
        lx, ly = self.aperture.distribution.half_sizes_m
        alpha_h, alpha_e = float(flare_rad[0]), float(flare_rad[1])
        edges = []
        ex, ey, ez = np.eye(3)
        for sign in (1.0, -1.0):
            # hard edges: the broad walls' rims, along x at y = +-ly
            start = np.array([-lx, sign * ly, 0.0])
            stop = np.array([lx, sign * ly, 0.0])
            n = self._node_count(2 * lx)
            nodes, w, _ = _edge_nodes(start, stop, n)
            e_edge = self._aperture_e_y(nodes[:, 0], nodes[:, 1])
            d = np.array([0.0, sign * np.sin(alpha_e), np.cos(alpha_e)])
            edges.append(
                RimEdge(nodes, w, ex, sign * ey, d, e_edge, np.zeros(n, complex),
                        self._delta(2 * lx, n))
            )  # fmt: skip
            # soft edges: the narrow walls' rims, along y at x = +-lx (E falls to zero)
            start = np.array([sign * lx, -ly, 0.0])
            stop = np.array([sign * lx, ly, 0.0])
            n = self._node_count(2 * ly)
            nodes, w, _ = _edge_nodes(start, stop, n)
            eps = 1e-4 * lx
            inner = self._aperture_e_y(nodes[:, 0] - sign * eps, nodes[:, 1])
            at = self._aperture_e_y(nodes[:, 0], nodes[:, 1])
            slope = (inner - at) / eps
            d = np.array([sign * np.sin(alpha_h), 0.0, np.cos(alpha_h)])
            edges.append(RimEdge(nodes, w, ey, sign * ex, d, at, slope, self._delta(2 * ly, n)))
        return edges

    def _flange_edges(self, w_m: float, h_m: float) -> list[RimEdge]:
        ex, ey, ez = np.eye(3)
        edges = []
        for sign in (1.0, -1.0):
            for tangent, outward, length, offset in (
                (ex, sign * ey, w_m, 0.5 * h_m * sign * ey),
                (ey, sign * ex, h_m, 0.5 * w_m * sign * ex),
            ):
                n = self._node_count(length)
                nodes, wts, _ = _edge_nodes(
                    offset - 0.5 * length * tangent, offset + 0.5 * length * tangent, n
                )
                h_local = self._aperture_local_h(nodes)
                orient = float(np.dot(np.cross(outward, ez), tangent))
                drive = ETA0_OHM * (h_local @ tangent) * orient
                edges.append(
                    RimEdge(nodes, wts, tangent, outward, outward, drive,
                            np.zeros(n, complex), self._delta(length, n))
                )  # fmt: skip
        return edges

    def _aperture_local_h(self, nodes_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        """The aperture's H [A/m] at local points, in local axes (at its own power)."""
        rot = self.placement.rotation
        pts = self.placement.position_m + nodes_local @ rot.T
        _, h = self.aperture.fields(pts)
        return h @ rot

    def _delta(self, length_m: float, count: int) -> float:
        return max(length_m / count, MIN_DELTA_WAVELENGTHS * self.wavelength_m)

    # ------------------------------------------------------------ power
    def _radiated_power(self, k: float) -> float:
        from .aperture import hemisphere_rule

        order = int(np.clip(np.ceil(0.5 * k * self.largest_dimension_m) + 32, 32, 400))
        dirs, weights = hemisphere_rule(order)
        total = 0.0
        for flip in (1.0, -1.0):
            d = dirs * np.array([1.0, 1.0, flip])
            f = self._unscaled_far_field(d)
            total += float(np.sum(np.abs(f) ** 2, axis=1) @ weights) / ETA0_OHM
        return total

    def _unscaled_far_field(self, directions_local: NDArray[np.float64]) -> NDArray:
        f = self.aperture._local_far_field(directions_local)
        return f + rim_far_field(self.edges, directions_local, self.wavenumber_rad_m)

    # ------------------------------------------------------------ radiator
    @property
    def largest_dimension_m(self) -> float:
        """Diagonal of the opening, or of the flange when there is one [m]."""
        if self.flange_m is not None:
            return float(np.hypot(*self.flange_m))
        return self.aperture.largest_dimension_m

    def _local_far_field(self, directions_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        scale = self.rim_scale * back_margin(directions_local, self.back_margin_db)
        return scale[:, None] * self._unscaled_far_field(directions_local)

    def _local_fields(
        self, points_local_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        e_a, h_a = self.aperture._local_fields(points_local_m)
        e_r, h_r = rim_near_fields(self.edges, points_local_m, self.wavenumber_rad_m)
        scale = (self.rim_scale * back_margin(points_local_m, self.back_margin_db))[:, None]
        return scale * (e_a + e_r), scale * (h_a + h_r)

    def fields(
        self, points_m: ArrayLike, chunk_bytes: int = 64 * 1024**2
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """Complex RMS E [V/m] and H [A/m] at scenario points (aperture plus rim).

        Beside and behind the opening the fields carry the back-region margin
        (:func:`back_margin`).
        """
        pts = as_points(points_m)
        e, h = self.aperture.fields(pts, chunk_bytes)
        local = self.placement.to_local(pts)
        rot = self.placement.rotation
        step = max(1, int(chunk_bytes // self.bytes_per_point))
        for start in range(0, pts.shape[0], step):
            stop = min(pts.shape[0], start + step)
            e_r, h_r = rim_near_fields(self.edges, local[start:stop], self.wavenumber_rad_m)
            e[start:stop] += e_r @ rot.T
            h[start:stop] += h_r @ rot.T
        scale = (self.rim_scale * back_margin(local, self.back_margin_db))[:, None]
        return scale * e, scale * h

    def gain(self, directions: ArrayLike) -> NDArray[np.float64]:
        """Gain towards scenario directions (N, 3) relative to ``power_w`` (linear).

        With ``normalize="aperture"`` the gain integrates to more than 1 over the
        sphere: ``power_ratio`` (the conservative rim on top), and more again from the
        back-region margin.
        """
        d = as_points(directions)
        d = d / np.linalg.norm(d, axis=1, keepdims=True)
        local = self.placement.directions_to_local(d)
        f = self._unit_far_field(local)
        return 4 * np.pi * np.sum(np.abs(f) ** 2, axis=1) / ETA0_OHM

    def _unit_far_field(self, directions_local: NDArray[np.float64]) -> NDArray:
        """F [V] per sqrt(W) of ``power_w`` (so that |F|^2 scales out the power)."""
        if self.power_w > 0:
            return self._local_far_field(directions_local) / np.sqrt(self.power_w)
        return np.zeros((directions_local.shape[0], 3), dtype=complex)

    def max_gain(self, samples: int = 20000) -> float:
        """Largest gain (linear) over the aperture's planes and a quasi-uniform sphere."""
        theta = np.linspace(0.0, np.pi, 721)
        s, c = np.sin(theta), np.cos(theta)
        z = np.zeros_like(theta)
        dirs = np.concatenate(
            [np.stack([s, z, c], 1), np.stack([z, s, c], 1), fibonacci_sphere(samples)]
        )
        f = self._unit_far_field(dirs)  # local directions: the peak does not depend on placement
        return float(np.max(4 * np.pi * np.sum(np.abs(f) ** 2, axis=1)) / ETA0_OHM)
