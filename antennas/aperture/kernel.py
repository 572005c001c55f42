"""The near- and far-field kernels of an aperture's equivalent currents: one path, two forms.

Near field
----------
E and H at any point are the surface integrals of the *complete* free-space dyadic
Green's function: writing R = r - r', R = |R|, u = 1/(jkR) and G = e^{-jkR}/(4 pi R),

.. math::
   \\mathbf E = -jk\\int G\\,\\big[\\eta_0 (a\\mathbf J + b\\hat R(\\hat R\\cdot\\mathbf J))
                - c\\,\\hat R\\times\\mathbf M\\big]\\,dS'

   \\mathbf H = -jk\\int G\\,\\big[(a\\mathbf M + b\\hat R(\\hat R\\cdot\\mathbf M))/\\eta_0
                + c\\,\\hat R\\times\\mathbf J\\big]\\,dS'

with a = 1 + u + u^2, b = -(1 + 3u + 3u^2), c = 1 + u: the 1/R (radiation), 1/R^2
(induction) and 1/R^3 (quasi-static) terms all kept.  This is
E = -j omega A - j grad(div A)/(omega mu eps) - curl(F)/eps and
H = curl(A)/mu - j omega F - j grad(div F)/(omega mu eps) with A = mu int J G,
F = eps int M G (Balanis [1]_ eqs. (3-29), (3-30), from memory of the numbering),
written out as in the complete fields of an oscillating electric dipole and of a
magnetic dipole (Jackson [2]_ eqs. (9.18) and (9.36), converted to e^{+j omega t}).
Every quadrature node of the aperture is such a pair of elementary dipoles, so the
sum holds at any distance from the aperture; what limits it close in is the
quadrature (:mod:`.quadrature`).

The kernel has one reference form and one fast form, with the same output and the
same field assembly (:func:`fields_from_mixed_sums`):

* :func:`dyadic_kernel_sums`: every kernel written out, in the working precision
  asked for (double for the reference of ``method="direct"``);
* :func:`dyadic_moment_sums`: the kernels that carry R_x and R_y are polynomials in
  the node coordinates, so only three scalar kernels are computed per point-node pair
  (in single precision, the phase taken relative to the aperture centre so that the
  float32 arguments stay small) and summed against coordinate moments of the sources
  in double precision (:func:`moment_matrix`, :func:`kernel_sums_from_moments`), in
  cache-sized blocks of at most :data:`BLOCK_PAIRS` point-node pairs.

Far field
---------
F(u) = -jk/(4 pi) [eta0 (N - (u.N) u) - u x L], N = int J e^{jk u.r'} dS',
L = int M e^{jk u.r'} dS' (Balanis [1]_ eqs. (12-10)-(12-12)):
:func:`radiation_integral_far_field` in double precision (gain, normalisation) and
:func:`radiation_integral_far_field_fast`, the same sum over the low-rank current basis
with single-precision phase factors (the far-zone fields; about 1e-6 of the largest
|F|).

References
----------
.. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley, 2016,
   ch. 3 (vector potentials), ch. 12 (12.3 radiation equations).
.. [2] J. D. Jackson, *Classical Electrodynamics*, 3rd ed., Wiley, 1999, eqs. (9.18)
   (electric dipole) and (9.36) (magnetic dipole), all orders in 1/(kr).
"""

from __future__ import annotations

import threading
from typing import Final

import numpy as np
from numpy.typing import NDArray

from ..base import ETA0_OHM

#: Field-point x node pairs evaluated in one block (fits the L2 cache).
BLOCK_PAIRS: Final[int] = 32768


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
    ndarray, shape (9, S, P), complex
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
    out = np.empty((9, n_src, n_points), dtype=complex)
    out.real = prod[:9, :n_src] - prod[9:, n_src:]
    out.imag = prod[:9, n_src:] + prod[9:, :n_src]
    return out


#: Rows of float32 scratch kept for :func:`dyadic_moment_sums` (per pair; one set per thread,
#: so that a caller may evaluate radiators from several threads).
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
    """Assemble E and H from the kernel sums over a low-rank source basis.

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
        Fields, without the centre phase e^{-jk r_p} (the caller applies it); current
        columns that are zero are skipped.
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


def block_slices(n: int, size: int) -> list[tuple[int, int]]:
    """Consecutive (start, stop) ranges of at most ``size`` covering range(n)."""
    return [(start, min(n, start + size)) for start in range(0, n, size)]


def _unit_phasors(phase_rad: NDArray[np.float64]) -> NDArray[np.complex64]:
    """e^{j phase} in single precision (the phases of a far-field rule stay below ~100 rad)."""
    p32 = phase_rad.astype(np.float32)
    out = np.empty(p32.shape, dtype=np.complex64)
    np.cos(p32, out=out.real)
    np.sin(p32, out=out.imag)
    return out


def radiation_integral_far_field_fast(
    directions: NDArray[np.float64],
    nodes_x_m: NDArray[np.float64],
    nodes_y_m: NDArray[np.float64],
    basis_grids: NDArray[np.complex64],
    mixing: NDArray[np.complex128],
    wavenumber_rad_m: float,
) -> NDArray[np.complex128]:
    """:func:`radiation_integral_far_field` over a low-rank current basis, single-precision phases.

    Parameters
    ----------
    directions : ndarray, shape (D, 3)
        Unit directions (aperture frame).
    nodes_x_m, nodes_y_m : ndarray, shape (nx,), (ny,)
        Rule nodes [m].
    basis_grids : ndarray, shape (S, nx, ny), complex64
        Weighted sources of each basis column at the nodes.
    mixing : ndarray, shape (S, 4), complex
        Basis to current columns (J_x, J_y, M_x, M_y).
    wavenumber_rad_m : float
        k [rad m^-1].

    Returns
    -------
    ndarray, shape (D, 3), complex
        F [V]; relative error about 1e-6 of the largest |F|.
    """
    k = wavenumber_rad_m
    u = directions
    px = _unit_phasors(k * u[:, 0:1] * nodes_x_m[None, :])
    py = _unit_phasors(k * u[:, 1:2] * nodes_y_m[None, :])
    n_vec = np.zeros((u.shape[0], 3), dtype=complex)
    l_vec = np.zeros((u.shape[0], 3), dtype=complex)
    for s, plane in enumerate(basis_grids):
        integral = np.einsum("dj,dj->d", px @ plane, py).astype(complex)
        jx, jy, mx, my = mixing[s]
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
    return f
