"""Radiators whose fields are those of NEC-2-solved currents on a wire structure.

Shared by the models that describe their metal as a wire grid and solve it with the
method of moments (:mod:`keepclear.antennas.moment`): a monopole on a finite plate or
box (:mod:`keepclear.antennas.finite_ground`) and an open waveguide with its walls,
short and launcher probe (:mod:`keepclear.antennas.guide_grid`).  A subclass
describes its structure; this base solves it once per geometry, frequency and power
(kept in a small cache, so an option or a second command in the same process reuses
it), and evaluates the fields:

* within 2.5 times the metal's radius of its centre, by the segments split into eight
  clusters (:class:`keepclear.antennas.moment.ClusteredElements`): the exact closed-form
  kernel of the piecewise-sinusoidal segments of the clusters near the point
  (:meth:`keepclear.antennas.moment.CurrentElements.fields`), each other cluster's own
  outgoing-wave table;
* beyond that, by the tabulated outgoing-wave expansion of all the currents
  (:class:`keepclear.antennas.moment.OutgoingExpansion`, within 1e-4 of the kernel);
* beyond :data:`FAR_ZONE_FACTOR` times max(size, wavelength), by the radiation field
  (the exact sums cancel there; the 1/r^2 terms are below 1e-3 of it).

The currents are scaled so that the power they radiate (their far field integrated
over the sphere) is ``power_w``: solved and tabulated once at 1 W, then multiplied by
sqrt(power_w) (the fields are linear in the feed).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import minimize

from . import moment
from .base import ETA0_OHM, Radiator, fibonacci_sphere, row_norms

#: Distance, in units of max(D, lambda), beyond which the radiation field is used.
FAR_ZONE_FACTOR = 1000.0


@dataclass
class _Solved:
    """A solved structure: its currents scaled to the power, and its outgoing-wave table."""

    structure: moment.WireStructure
    solution: Any
    elements: moment.CurrentElements
    expansion: moment.OutgoingExpansion
    #: The peak gain and its local direction, once searched.
    max_gain: tuple[float, NDArray[np.float64]] | None = field(default=None)

    @functools.cached_property
    def largest_dimension_m(self) -> float:
        """Diagonal of the smallest axis-aligned box (local frame) holding the metal [m]."""
        pts = np.vstack([self.structure.starts_m, self.structure.ends_m])
        return float(np.linalg.norm(pts.max(axis=0) - pts.min(axis=0)))

    @functools.cached_property
    def near(self) -> moment.ClusteredElements:
        """The same currents for points near the metal: clusters, each with its table."""
        return moment.ClusteredElements(self.elements)

    @classmethod
    def at_one_watt(cls, solution: Any) -> _Solved:
        """The solution's currents and table, scaled so that they radiate 1 W.

        The radiated power is integrated from the outgoing-wave table's far field (the
        table is needed anyway), which costs nothing per segment: the same figure as the
        elements' own radiation integral to about 1e-5.
        """
        raw = solution.feed_elements()
        pts = np.vstack([raw.starts_m, raw.ends_m])
        table = moment.OutgoingExpansion(raw, 0.5 * (pts.max(axis=0) + pts.min(axis=0)))
        p = table.radiated_power_w()
        scale = math.sqrt(1.0 / p) if p > 0 else 0.0
        return cls(solution.structure, solution, raw.scaled(scale), table.scaled(scale))


#: Solved structures (at 1 W) by model, geometry and frequency (the most recent few).
_SOLVED: dict[tuple[Any, ...], _Solved] = {}
_SOLVED_CACHE_SIZE = 8


class SolvedWireRadiator(Radiator):
    """Base of the wire-grid models: solve once, radiate the currents anywhere.

    A subclass sets ``self._geometry_key`` (a hashable description of everything its
    structure depends on, the frequency included) and implements :meth:`_structure`,
    then calls :meth:`_use_solved` at the end of its ``__init__``.
    """

    _geometry_key: tuple[Any, ...]

    def _structure(self) -> moment.WireStructure:
        """The wire structure in the local frame (called once per geometry)."""
        raise NotImplementedError

    def _use_solved(self) -> None:
        """Take the solved structure for this geometry (solved once at 1 W, then kept).

        The currents are linear in the feed: the fields at ``power_w`` are those at 1 W
        times sqrt(power_w), so another power (an option, :meth:`Radiator.with_power`)
        reuses the solution, its outgoing-wave table and its peak search.
        """
        key = (type(self).__name__, *self._geometry_key)
        solved = _SOLVED.get(key)
        if solved is None:
            structure = self._structure()
            solution = self._solve(structure)
            solved = _Solved.at_one_watt(solution)
            _SOLVED[key] = solved
            while len(_SOLVED) > _SOLVED_CACHE_SIZE:
                _SOLVED.pop(next(iter(_SOLVED)))
        self._solved = solved
        self.structure = solved.structure
        self.solution = solved.solution
        self._amplitude = math.sqrt(max(self.power_w, 0.0))
        #: The segment currents at ``power_w`` (RMS) [A].
        self.elements = solved.elements.scaled(self._amplitude)

    def _solve(self, structure: moment.WireStructure) -> Any:
        """NEC-2's solution of the structure (a subclass may solve it another way)."""
        return moment.solve_structure(structure, self.frequency_hz)

    def _power_changed(self) -> None:
        """Follow a new ``power_w`` (:meth:`Radiator.with_power`): the currents scale."""
        self._use_solved()

    def built_on_demand(self) -> frozenset[Any]:
        """The near clusters' tables built so far (their indices)."""
        near = self._solved.__dict__.get("near")
        if near is None:
            return frozenset()
        return frozenset(i for i, table in enumerate(near._tables) if table is not None)

    def build_on_demand(self, keys: frozenset[Any]) -> None:
        """Build the near clusters' tables ``keys`` (read from the disk store when kept)."""
        if keys:
            near = self._solved.near
            for i in sorted(keys):
                near._table(int(i))

    @property
    def expansion(self) -> moment.OutgoingExpansion:
        """The tabulated outgoing-wave expansion used beyond 2.5 times the metal's radius."""
        return self._solved.expansion

    @property
    def largest_dimension_m(self) -> float:
        """Diagonal of the smallest axis-aligned box (local frame) holding the metal [m]."""
        return self._solved.largest_dimension_m

    # --------------------------------------------------------------------- model
    def _local_fields(
        self, points_local_m: NDArray[np.float64]
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        r = row_norms(points_local_m)
        far = r > FAR_ZONE_FACTOR * max(self.largest_dimension_m, self.wavelength_m)
        e = np.empty((points_local_m.shape[0], 3), dtype=complex)
        h = np.empty_like(e)
        outer = ~far & self.expansion.covers(points_local_m)
        near = ~far & ~outer
        if near.any():
            e[near], h[near] = self._solved.near.fields(points_local_m[near])
        if outer.any():
            e[outer], h[outer] = self.expansion.fields(points_local_m[outer])
        if far.any():
            u = points_local_m[far] / r[far, None]
            phase = np.exp(-1j * self.wavenumber_rad_m * r[far]) / r[far]
            e[far] = self._unit_far_field(u) * phase[:, None]
            h[far] = np.cross(u, e[far]) / ETA0_OHM
        return e * self._amplitude, h * self._amplitude

    def _unit_far_field(self, directions_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        """F [V] of the 1 W solution about the local origin, from the expansion's table.

        The table's far field is about its centre c; about the origin it carries the
        phase exp(jk u.c).  The same to 1e-4 of the peak as the segment sum
        (:meth:`moment.CurrentElements.far_field`), at a cost that does not grow with
        the number of segments.
        """
        u = np.asarray(directions_local, dtype=float).reshape(-1, 3)
        u = u / np.linalg.norm(u, axis=1, keepdims=True)
        ex = self.expansion
        shift = np.exp(1j * self.wavenumber_rad_m * (u @ ex.centre_m))
        return ex.far_field(u) * shift[:, None]

    def _local_far_field(self, directions_local: NDArray[np.float64]) -> NDArray[np.complex128]:
        return self._unit_far_field(directions_local) * self._amplitude

    def _peak(self) -> tuple[float, NDArray[np.float64]]:
        """Peak gain and its local direction: 6000 directions refined by Nelder-Mead."""
        if self._solved.max_gain is None:
            dirs = fibonacci_sphere(6000)
            g = self._local_gain(dirs)
            best = dirs[int(np.argmax(g))]

            def neg(angles: NDArray[np.float64]) -> float:
                t, p = angles
                u = np.array([[math.sin(t) * math.cos(p), math.sin(t) * math.sin(p), math.cos(t)]])
                return -float(self._local_gain(u)[0])

            start = np.array([math.acos(np.clip(best[2], -1, 1)), math.atan2(best[1], best[0])])
            res = minimize(neg, start, method="Nelder-Mead", options={"xatol": 1e-6, "fatol": 1e-9})
            t, p = res.x
            u = np.array([math.sin(t) * math.cos(p), math.sin(t) * math.sin(p), math.cos(t)])
            g_best = max(-float(res.fun), float(np.max(g)))
            self._solved.max_gain = (g_best, u if -res.fun >= np.max(g) else best)
        return self._solved.max_gain

    def _local_gain(self, directions_local: NDArray[np.float64]) -> NDArray[np.float64]:
        """Gain (linear): the 1 W solution's pattern, so the same at any power."""
        f = self._unit_far_field(directions_local)
        return 4 * np.pi * np.sum(np.abs(f) ** 2, axis=1) / ETA0_OHM

    def max_gain(self, samples: int = 0) -> float:
        """Peak gain (linear): a 6000-direction search refined by Nelder-Mead (cached)."""
        return self._peak()[0]
