"""A radiator whose fields are those of a planar aperture distribution, near field included.

The orchestration of :mod:`.distribution` (the aperture field and its equivalent
currents), :mod:`.quadrature` (the rule each field point needs) and :mod:`.kernel`
(the dyadic kernel in its reference and fast forms).

Evaluation
----------
``method="adaptive"`` (the default) chooses the Gauss-Legendre order per field point
and coordinate (:meth:`ApertureRadiator.adaptive_orders`); points that need the same
rule are grouped and evaluated together with the fast moment kernel, in cache-sized
blocks.  The equivalent currents are written in their smallest basis (one column for
a linearly polarised aperture).  ``method="direct"`` instead uses one fixed, fine rule
(the one a point lambda/10 above the aperture centre needs at 1e-7) with every kernel
written out, in double precision, for every point as given (no far zone, no folding):
the reference the adaptive result is tested and benchmarked against.

Symmetry.  Where the currents have the mirror symmetries of the TE10 family (J_y, M_x
even in x and in y, :attr:`ApertureRadiator.mirror_parities`), the field at a mirror
point follows from the field at the point, E(Mp) = +-M E(p) and H(Mp) = -+M H(p); the
adaptive method folds the points of one call into one quadrant and evaluates each
folded point once (sets with hardly any mirror pairs are evaluated as given).
Measured: a symmetric 250 000-point H-plane map of a 3 x 2 wavelength horn in one call
needs half the kernel work (the whole call about 25 % less).  Everything runs on the
calling thread: a pool of worker threads was measured never to pay on two cores (the
kernels are many short numpy calls that take turns at the interpreter lock).

Far field and normalisation
---------------------------
The far-field amplitude is the radiation integral (:mod:`.kernel`), integrated with a
rule fine enough for the whole visible region.  The aperture amplitude is scaled so
that the radiated power, (1/eta0) int |F|^2 dOmega over both half-spaces
(Gauss-Legendre in cos(theta) on each, trapezoid in phi), equals ``power_w``: the power
delivered is the power radiated (the package convention, and what a Poynting-flux
check around the source measures).  For a ground-plane aperture that is the front
half-space alone; a Huygens aperture also sends
:attr:`ApertureRadiator.back_fraction` of its front power backwards (15 % for an open
WR-340 end, 1 % for a 16 dBi horn).  Normalising the front half-space alone would
raise the front fields by that fraction but break the power balance; the models put
that kind of spread into their ``gain_uncertainty_db`` instead.  Beyond
:attr:`ApertureRadiator.far_zone_distance_m` = max(40 * 2D^2/lambda, 20 lambda) the
adaptive method uses F e^{-jkr}/r directly.  The usual 10 * 2D^2/lambda is not enough
for 0.1 dB everywhere: an aperture with its own phase curvature (a horn) differs from
its pattern by a term falling only as 1/r (the cross term of the flare phase and the
Fresnel phase), measured at 0.15 dB in the sidelobes of a 16 dBi horn at
10 * 2D^2/lambda and 0.04 dB at 40 * 2D^2/lambda; the induction terms are below 0.1 %
in power there.

Validity
--------
* The fields are those of the equivalent currents of the given aperture distribution:
  exact for a ground-plane aperture with that field, the Kirchhoff approximation
  otherwise.  Behind the aperture plane (z < 0) a "huygens" aperture returns the same
  integral (the Kirchhoff continuation: the spill-over an aperture without a flange
  sends sideways and back); a "ground-plane" aperture returns zero.
* Accuracy: within 0.1 dB of the converged integral from lambda/10 off the aperture
  outward (tested; typically 1e-3 dB).  Memory: the outer chunks of
  :meth:`ApertureRadiator.fields` follow ``chunk_bytes`` (at most 1 GiB) with
  :attr:`ApertureRadiator.bytes_per_point`; the rule cache holds at most 128 MiB.
  Points closer than the minimum standoff :attr:`ApertureRadiator.min_standoff_m` =
  lambda/20 to the aperture rectangle are evaluated at that standoff, moved along z
  (front side for z = 0): finite values, of the order of the aperture field; a current
  sheet with a rim has no meaningful value closer in (the fields of its edge charges
  grow without bound at the rim).

References
----------
.. [1] C. A. Balanis, *Antenna Theory: Analysis and Design*, 4th ed., Wiley, 2016,
   ch. 12 (aperture antennas: 12.3 radiation equations, 12.5 rectangular apertures),
   eq. (2-16) (gain).
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from typing import Final

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..base import (
    DEFAULT_CHUNK_BYTES,
    ETA0_OHM,
    ModelInputError,
    Placement,
    Radiator,
    as_points,
    fibonacci_sphere,
)
from ..memo import active_memo
from .distribution import GROUND_PLANE, ApertureDistribution, equivalent_currents
from .kernel import (
    BLOCK_PAIRS,
    block_slices,
    dyadic_kernel_sums,
    dyadic_moment_sums,
    fields_from_mixed_sums,
    kernel_sums_from_moments,
    moment_matrix,
    radiation_integral_far_field,
    radiation_integral_far_field_fast,
)
from .quadrature import (
    DEFAULT_TOLERANCE,
    DIRECT_TOLERANCE,
    MAX_ORDER,
    bernstein_pole_parameter,
    gauss_legendre,
    gauss_legendre_order,
    gauss_legendre_order_lookup,
    hemisphere_rule,
    round_to_ladder,
)

#: Quadrature methods of :meth:`ApertureRadiator.fields`.
METHODS: Final[tuple[str, ...]] = ("adaptive", "direct")

#: Largest memory a radiator's cache of quadrature rules may hold [bytes]
#: (a near-field rule costs about 60 bytes a node, a direct one about 40).
RULE_CACHE_BYTES: Final[int] = 128 * 1024**2

#: Field points whose folded coordinates agree to this are evaluated once [m].
FOLD_QUANTUM_M: Final[float] = 1e-9

#: Hard ceiling of every memory budget here [bytes].
MAX_BUDGET_BYTES: Final[int] = 1024**3


def rectangle_corners(half_x_m: float, half_y_m: float, z_m: float) -> NDArray[np.float64]:
    """Corners (4, 3) of the rectangle |x| <= half_x, |y| <= half_y at height z, in order [m]."""
    return np.array(
        [
            [-half_x_m, -half_y_m, z_m],
            [half_x_m, -half_y_m, z_m],
            [half_x_m, half_y_m, z_m],
            [-half_x_m, half_y_m, z_m],
        ]
    )


def inside_guide(
    points_local_m: NDArray[np.float64],
    half_x_m: ArrayLike,
    half_y_m: ArrayLike,
    tolerance_m: float,
) -> NDArray[np.bool_]:
    """Points within a rectangular cross-section widened by ``tolerance_m`` (walls' metal).

    ``half_x_m`` and ``half_y_m`` may vary per point (a flare) [m].
    """
    p = points_local_m
    return (np.abs(p[:, 0]) <= np.asarray(half_x_m) + tolerance_m) & (
        np.abs(p[:, 1]) <= np.asarray(half_y_m) + tolerance_m
    )


def _groups(orders: NDArray[np.int64]) -> list[tuple[tuple[int, int], NDArray[np.intp]]]:
    """Indices of the points sharing each (nx, ny) rule, by rule."""
    codes = orders[:, 0] * (MAX_ORDER + 1) + orders[:, 1]
    order = np.argsort(codes, kind="stable")
    bounds = np.flatnonzero(np.diff(codes[order])) + 1
    return [((int(orders[g[0], 0]), int(orders[g[0], 1])), g) for g in np.split(order, bounds)]


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
            int(round_to_ladder(gauss_legendre_order(half, 0.0, np.inf, half * (k + bw), 1e-10)))
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
    def boresight(self) -> NDArray[np.float64]:
        """The aperture normal, local +z, in scenario axes [1]."""
        return np.array(self.placement.rotation[:, 2], dtype=float)

    def _local_outline(self) -> NDArray[np.float64]:
        """The aperture rectangle's corners in z = 0, in order around it [m]."""
        lx, ly = self.distribution.half_sizes_m
        return rectangle_corners(lx, ly, 0.0)

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
        moment matrix of :func:`moment_matrix`.
        """

        def build() -> tuple:
            xq, yq, basis = self._rule_sources(nx, ny)
            kqq = self.wavenumber_rad_m * (xq * xq + yq * yq)
            parts = []
            for start, stop in block_slices(xq.size, BLOCK_PAIRS):
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
        return int(round_to_ladder(nx)), int(round_to_ladder(ny))

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
        return np.stack([round_to_ladder(nx), round_to_ladder(ny)], axis=1)

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
        # equal keys next to each other (a stable sort: each group's first point in input order)
        order = np.lexsort(keys.T[::-1])
        ordered = keys[order]
        starts = np.empty(n, dtype=bool)
        starts[0] = True
        np.any(ordered[1:] != ordered[:-1], axis=1, out=starts[1:])
        n_unique = int(np.count_nonzero(starts))
        if n_unique > 0.9 * n:  # hardly any mirror pairs: folding would not pay
            return None
        inverse = np.empty(n, dtype=np.intp)
        inverse[order] = np.cumsum(starts) - 1
        first = order[starts]
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
        k = self.wavenumber_rad_m
        offset = 0
        for (nx, ny), group in groups:
            rule = self._moment_rule(nx, ny)
            block = max(1, BLOCK_PAIRS // (nx * ny))
            for start in range(offset, offset + group.size, block):
                stop = min(offset + group.size, start + block)
                p = near[start:stop]
                target = moments[:, :, start:stop]
                for i, (nodes, mom) in enumerate(rule):  # a large rule: slices of nodes
                    dyadic_moment_sums(p, nodes, mom, k, out=target, accumulate=i > 0)
            offset += group.size
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
        block = max(1, BLOCK_PAIRS // (nx * ny))
        xx, yy, basis, mixing = self._rule(nx, ny)
        k = self.wavenumber_rad_m
        for start, stop in block_slices(index.size, block):
            members = index[start:stop]
            p = pts[members]
            # a rule larger than a block is summed in slices of nodes (memory bound)
            sums = np.zeros((9, basis.shape[1], members.size), dtype=complex)
            for s, t in block_slices(xx.size, BLOCK_PAIRS):
                sums += dyadic_kernel_sums(p, xx[s:t], yy[s:t], basis[s:t], k, np.float64)
            el, hl = fields_from_mixed_sums(sums, mixing, p[:, 2], k)
            phase = (self._scale * np.exp(-1j * k * r[members]))[:, None]
            e[members] = el * phase
            h[members] = hl * phase

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
        u = directions_local
        f = radiation_integral_far_field_fast(u, x, y, grid, self._mixing, self.wavenumber_rad_m)
        if self.distribution.equivalence == GROUND_PLANE:
            f[u[:, 2] < 0] = 0.0
        return f
