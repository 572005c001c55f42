"""Keep-out distances: the smallest sphere about the first source holding every exceedance.

Method
------
The contract defines the keep-out distance for a limit as the radius, about the
first source's reference point, of the smallest sphere that holds every point
where the time-averaged exposure reaches the limit.  Here "reaches" means an
exposure quotient >= 1 (:func:`keepclear.fields.limits.quotient`): the power
density against the limit's power density, and E and H against their field
values where the standard gives them.

1. Rays leave the centre in a quasi-uniform set of directions (the golden-spiral
   lattice), plus the main axes of every radiator, both ways, and the directions
   to every other radiating term, so no lobe or far-off source falls between rays.
   Along every reflector, rays also run in the plane itself, a millimetre on the
   source side, from the foot of the centre: next to a floor the exceedance is a thin
   layer (the reflection adds most at grazing incidence) that reaches farthest on the
   floor, between any two rays from the centre.  Over a finite plate the layer ends at
   the plate's edge: its rays run over the plate and a little beyond (:func:`_plane_ends`),
   and one still above the limit there is followed to the end of the grid.  A finite
   plate also adds rays along the beam it reflects: from its centre, corners and edge
   midpoints, away from each term's image, and from the centre towards its corners
   (the reflection boundaries).
2. Along each ray the quotient is sampled on a grid that is fine near the
   source (a sixteenth of a wavelength) and grows geometrically (3 % a step)
   further out; in coherent-reflection mode the step stays at a sixteenth of a
   wavelength so no standing-wave crest is stepped over.  The search keeps the
   **outermost** sample at or above the limit (a near-field density need not fall
   monotonically, so stopping at the first crossing would be wrong) and
   narrows the interval beyond it to 1e-4 relative: first at the crossing of the
   straight line through its ends in (log r, log q), with trials a fraction of the
   final width to either side (one pass usually settles it), then by cutting it into
   equal parts; several trials a pass, as a bracket, like bisection.  The reported
   radius is the outer end of the final bracket, never the inner one.  The samples
   are taken from the outside in, a few radii a pass (more while every quotient still
   asked of a ray is far below one), and a ray is left once every
   question asked of it has found its outermost exceedance: the samples inside
   cannot change the answer (it is the one a full evaluation gives), and they are
   the costly ones, close to the sources.  A ray that can no longer be among a
   limit's three farthest of its batch (nor tied with the farthest) is left early too,
   inwards and in the narrowing: those three, the farthest and its direction are all
   the search uses of a batch.
3. Around the three farthest rays of every limit, three levels of denser rays follow
   (direction caps for rays from the centre, finer azimuths for rays along a plane),
   so a narrow beam is not missed between lattice directions.  Rays within twice the
   bracket of the farthest count as equally far and are taken in the order they were
   laid out; the reported direction is the first of them.  Their distances differ only
   in bits that depend on the processor and the BLAS build, so the starts and the
   direction are the same on every machine.
4. The outer end of the sampling is set from the far-field screening bound of
   every term (with the reflection envelope) and doubled until the quotient at
   the end of every ray is below one.
5. Limits with equal values, the margin of the models' stated gain uncertainty and,
   with an enclosure, the region outside it, are answered from the same field
   evaluations (one row of quotients each).

Every evaluation is vectorised: all rays of a pass are evaluated as one array of
points.

The screening estimate beside it is the trade's far-field formula
:math:`R = \\sqrt{F\\, \\sum d_i P_i G_i / (4\\pi S)}` with the reflection
factor F of FCC OET Bulletin 65: 1 in free space, 2.56 (a 60 % field
reflection, 1.6^2) for a ground, 4 for a perfect reflector; several planes add
their field reflections, F = (1 + sum |Gamma_k|)^2, each |Gamma_k| at least 0.6.

References
----------
.. [1] FCC OET Bulletin 65, Edition 97-01 (1997), eqs. (3)-(6) and sec. 2
   ("ground reflection", factor 2.56 and 4).
.. [2] Á. González, "Measurement of areas on a sphere using Fibonacci and
   latitude-longitude lattices", Math. Geosci. 42 (2010) 49-64.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from keepclear.antennas.base import ETA0_OHM, fibonacci_sphere
from keepclear.antennas.memo import active_memo

from . import limits as limits_mod
from .field import evaluate, radiating_terms
from .scenario import Scenario
from .workers import Crew, worker_count

#: Field reflection assumed for a non-metal plane in the screening estimate (OET 65).
SCREENING_GROUND_FIELD_REFLECTION = 0.6
#: Relative width of the final bracket about a ray's outermost crossing.
RADIUS_TOLERANCE = 1e-4
#: Radial samples evaluated per pass of the outside-in sweep along the rays.
RADIAL_BLOCK = 12
#: Fewest rays of a batch shared between worker processes (a smaller batch costs less
#: than starting them).
SHARED_RAYS = 100


@dataclass(frozen=True)
class KeepoutResult:
    """The keep-out answer for one limit.

    Parameters
    ----------
    limit_id : str
    limit_w_m2 : float
        The limit's power density [W m^-2].
    distance_m : float
        Keep-out radius about the first source [m]; 0 where no point reaches the limit.
    direction : ndarray or None
        Unit vector from the centre to the farthest exceedance (None if none).
    screening_distance_m : float
        The far-field screening estimate (OET 65 formula with reflection factor) [m].
    distance_with_uncertainty_m : float
        The radius where the quotient reaches 10^(-u/10), u the models' stated gain
        uncertainty [m]; equals ``distance_m`` when u = 0.
    uncertainty_db : float
        The largest model gain uncertainty among the radiating terms [dB].
    averaging_time_s : float or None
        The limit's averaging time [s].
    outside_enclosure : dict or None
        With an enclosure: the same search counting only points outside the box and its
        walls (``distance_m``, ``direction``, and ``clearance_from_enclosure_m``, the
        farthest exceedance's distance from the outer box surface [m]).
    """

    limit_id: str
    limit_w_m2: float
    distance_m: float
    direction: NDArray[np.float64] | None
    screening_distance_m: float
    distance_with_uncertainty_m: float
    uncertainty_db: float
    averaging_time_s: float | None
    outside_enclosure: dict[str, object] | None = None

    @property
    def reached(self) -> bool:
        """Whether any point reaches the limit."""
        return self.direction is not None

    @property
    def recommended_distance_m(self) -> float:
        """The distance to mark: the model radius widened by its stated uncertainty [m]."""
        return max(self.distance_m, self.distance_with_uncertainty_m)


def _effective_threshold_w_m2(value: limits_mod.LimitValue) -> float:
    """The lowest plane-wave-equivalent density at which the quotient can reach one."""
    candidates = [value.power_density_w_m2]
    if value.e_v_m is not None:
        candidates.append(value.e_v_m**2 / ETA0_OHM)
    if value.h_a_m is not None:
        candidates.append(ETA0_OHM * value.h_a_m**2)
    return float(min(candidates))


def _reflection_envelope(scenario: Scenario, minimum: float = 0.0) -> float:
    total = 0.0
    for reflector in scenario.reflectors:
        gamma = abs(complex(reflector.normal_incidence_coefficient(scenario.frequency_hz)))
        total += max(gamma, minimum)
    return (1.0 + total) ** 2


def screening_distance_m(scenario: Scenario, limit_w_m2: float, while_on: bool = False) -> float:
    """Far-field screening radius sqrt(F sum d P G / (4 pi S)) about the first source [m].

    Enclosures and shields are ignored (the bare sources radiate): an upper-bound
    estimate, as the trade uses it.  Sources away from the centre add their offset.
    With ``while_on`` (a device threshold) the duty cycle d is left out: every source
    radiates at once.
    """
    factor = _reflection_envelope(scenario, SCREENING_GROUND_FIELD_REFLECTION)
    eirp_w = sum(
        (s.power_w if while_on else s.average_power_w) * s.radiator.max_gain()
        for s in scenario.sources
    )
    offset = max(float(np.linalg.norm(s.position_m - scenario.centre_m)) for s in scenario.sources)
    return float(np.sqrt(factor * eirp_w / (4 * np.pi * limit_w_m2))) + offset


def _radii(r_max: float, wavelength: float, coherent: bool) -> NDArray[np.float64]:
    fine = wavelength / 16.0
    r = [min(1e-3, fine / 4)]
    while r[-1] < r_max:
        step = fine if coherent else max(fine, 0.03 * r[-1])
        r.append(r[-1] + step)
    return np.asarray(r)


@dataclass(frozen=True)
class _Row:
    """One question the search answers: a limit, a margin on the quotient, a region."""

    limit: int
    scale: float
    outside_only: bool


class _Search:
    """Ray search shared by all rows (limits, margins, regions): one field evaluation per pass."""

    def __init__(
        self, scenario: Scenario, values: Sequence[limits_mod.LimitValue], rows: Sequence[_Row]
    ) -> None:
        self.scenario = scenario
        self.values = list(values)
        self.rows = list(rows)
        self.centre = scenario.centre_m
        self.terms = radiating_terms(scenario)
        self.coherent = scenario.reflections == "coherent" and bool(scenario.reflectors)
        self.uncertainty_db = max(
            (float(t.radiator.gain_uncertainty_db) for t in self.terms),
            default=0.0,
        )

        def floor(while_on: bool) -> float:
            return min(
                (
                    _effective_threshold_w_m2(self.values[r.limit]) / r.scale
                    for r in self.rows
                    if self.values[r.limit].while_on == while_on
                ),
                default=np.inf,
            )

        self.r_max = max(
            self._initial_r_max(floor(False), while_on=False),
            self._initial_r_max(floor(True), while_on=True),
        )
        self._crew: Crew | None = None

    def _initial_r_max(self, threshold_w_m2: float, while_on: bool = False) -> float:
        n = len(self.scenario.reflectors)
        envelope = (1.0 + n + n * (n - 1)) ** 2 if n > 1 else _reflection_envelope(self.scenario)
        r = 0.5
        if not np.isfinite(threshold_w_m2):
            return r
        for t in self.terms:
            rad = t.radiator
            offset = float(np.linalg.norm(rad.position_m - self.centre))
            bound = np.sqrt(
                envelope
                * (t.peak_weight if while_on else t.average_weight)
                * rad.power_w
                * rad.max_gain()
                / (4 * np.pi * threshold_w_m2)
            )
            r = max(r, offset + max(bound, 2 * rad.far_field_distance_m) + rad.largest_dimension_m)
        return 1.3 * r

    def quotients(self, points: NDArray[np.float64]) -> NDArray[np.float64]:
        """Exposure quotient times the row's margin, shape (rows, N), each on its basis.

        A ``"time-averaged"`` limit sees the duty-cycle-averaged fields; a ``"while-on"``
        limit (a device threshold) the fields while every source radiates.
        """
        res = evaluate(self.scenario, points)
        per_limit = [limits_mod.field_quotient(v, res) for v in self.values]
        q = np.empty((len(self.rows), points.shape[0]))
        enclosure = self.scenario.enclosure
        boxed = None
        for k, row in enumerate(self.rows):
            q[k] = per_limit[row.limit] * row.scale
            if row.outside_only and enclosure is not None:
                if boxed is None:
                    boxed = enclosure.contains(points) | enclosure.in_wall(points)
                q[k, boxed] = 0.0
        return q

    def rays(
        self,
        origins: NDArray[np.float64],
        directions: NDArray[np.float64],
        ends_m: NDArray[np.float64] | None = None,
        asked: NDArray[np.bool_] | None = None,
    ) -> NDArray:
        """Outermost radius from each ray's origin where the quotient reaches one, (rows, D).

        ``ends_m`` (D,) limits a ray to its first ``ends_m`` metres (infinite: the whole
        grid); see :meth:`_rays_here`.  ``asked`` (rows, D) says which rows a ray is
        sampled for (all by default): a row not asked of a ray does not keep it open, and
        gets the outermost exceedance among the samples taken for the others (0 if none).
        A batch of at least
        :data:`SHARED_RAYS` rays is shared between worker processes when there are cores
        to spare and no field sharing between variants is under way
        (:mod:`keepclear.fields.workers`): share ``j`` of ``k`` takes rays ``j, j + k,
        ...`` (each its share of every direction; the first is searched in this
        process), and the answers are those of :meth:`_rays_here` on the whole batch
        (see :meth:`_shared_rays`).
        """
        ends = np.full(len(directions), np.inf) if ends_m is None else np.asarray(ends_m)
        if asked is None:
            asked = np.ones((len(self.rows), len(directions)), dtype=bool)
        count = worker_count()
        if count > 1 and len(directions) >= SHARED_RAYS and active_memo() is None:
            shared = self._shared_rays(origins, directions, ends, asked, count)
            if shared is not None:
                return shared
        return self._rays_here(origins, directions, ends, asked)

    def _shared_rays(
        self,
        origins: NDArray[np.float64],
        directions: NDArray[np.float64],
        ends_m: NDArray[np.float64],
        asked: NDArray[np.bool_],
        count: int,
    ) -> NDArray | None:
        """:meth:`_rays_here` of the batch, computed in ``count`` interleaved shares.

        Each share is searched as a batch of its own.  Its rays' ends are those of the
        whole batch where they matter: a ray left early in a share (as zero, or with a
        wider bracket) has three rays of that share farther, so it is not among the
        whole batch's three farthest either, and a ray the whole batch would have left
        is not among them in its share; the farthest, the ties with it, the refinement
        starts, the keep-out and its direction are the same.  When a share had to
        reach farther out than the bound (the reach is doubled for the whole batch),
        None is returned and the batch is searched here.

        The first share is searched here while the worker processes search the others:
        one child fewer, and what this process evaluates and builds stays with it for the
        next batches.  The workers are the search's
        :class:`~keepclear.fields.workers.Crew`, forked at its first shared batch and kept
        for the others (:meth:`close` lets them go): forking anew for every batch cost the
        fork and a copy of every memory page either process wrote while the children
        lived, about a tenth of the room's search.
        """
        shares = [np.arange(j, len(directions), count) for j in range(count)]
        r_max = self.r_max
        models = [t.radiator for t in self.terms]
        requests = [
            (origins[index], directions[index], ends_m[index], asked[:, index], r_max)
            for index in shares
        ]
        if self._crew is None:
            self._crew = Crew(self._share, count - 1)
        crew = self._crew
        crew.start(requests[1:])
        try:
            here = self._share(requests[0])
        except BaseException:  # an interrupt or an error here: the workers' shares are moot
            self.close()
            raise
        others = crew.results()
        done = [here, *others]
        self.r_max = r_max  # a share here that had to reach farther changed it
        # what a worker built on first use (tables near the metal) is built here too, so
        # that workers forked from here later (another search's) find it
        for k, model in enumerate(models):
            wanted = frozenset().union(*(built[k] for _, _, built in others))
            model.build_on_demand(wanted - model.built_on_demand())
        if any(reach != r_max for _, reach, _ in done):
            return None
        out = np.empty((len(self.rows), len(directions)))
        for index, (radius, _, _) in zip(shares, done, strict=True):
            out[:, index] = radius
        return out

    def _share(
        self, request: tuple[NDArray, NDArray, NDArray, NDArray, float]
    ) -> tuple[NDArray, float, list[frozenset]]:
        """One share of a batch (:meth:`_shared_rays`), here or in a worker of the crew.

        ``request`` holds the share's origins, directions, ends and asked rows, and the
        reach of the batch (a worker's own may have grown in an earlier batch's share).
        """
        origins, directions, ends_m, asked, r_max = request
        self.r_max = r_max
        radius = self._rays_here(origins, directions, ends_m, asked)
        return radius, self.r_max, [t.radiator.built_on_demand() for t in self.terms]

    def close(self) -> None:
        """Let the search's worker processes go (:class:`~keepclear.fields.workers.Crew`)."""
        if self._crew is not None:
            self._crew.close()
            self._crew = None

    def _rays_here(
        self,
        origins: NDArray[np.float64],
        directions: NDArray[np.float64],
        ends_m: NDArray[np.float64],
        asked: NDArray[np.bool_],
    ) -> NDArray:
        """:meth:`rays` in this process.

        A ray with a finite end (``ends_m``) is sampled up to it only (the samples beyond
        count as below the limit); one whose last sample before its end is at or above
        the limit is followed past it, every sample beyond evaluated in one pass
        (:meth:`_past_ends`), so its outermost crossing is never cut short by its end.
        A row not ``asked`` of a ray keeps the outermost exceedance among the samples
        taken for the rows asked (0 where they hold none).

        Zero where the ray never reaches the limit.  The grid is sampled outward, the
        outermost sample at or above the limit kept, and the interval beyond it narrowed
        (:func:`_bracket_trials`);
        the outer end of the final bracket is returned.  Rows whose samples or bracket
        cannot bring a ray among the row's farthest of the batch (:func:`_rank_threshold`)
        leave it early: such a ray is given as zero (its samples inside are not taken) or
        with the outer end of a wider bracket, in both cases below the row's three
        farthest rays and not tied with the farthest, so neither the keep-out, its
        direction nor the refinement starts change.  Rows that count only the outside of
        an enclosure are never left early (their clearance uses every ray's end).
        """
        wavelength = self.scenario.wavelength_m
        reach = self.r_max + float(np.max(np.linalg.norm(origins - self.centre, axis=1)))
        ends = np.array(ends_m, dtype=float)
        for _ in range(8):
            radii = _radii(reach, wavelength, self.coherent)
            swept = self._outermost(origins, directions, radii, ends, asked)
            if swept is not None:
                swept = self._past_ends(origins, directions, radii, ends, *swept)
            if swept is not None:
                last, q_lo, q_hi = swept
                break
            reach *= 2.0
            self.r_max *= 2.0
        else:  # pragma: no cover - the bound doubled 8 times: a model fault, not input
            raise RuntimeError("keep-out search did not close: the field does not decay")
        any_above = last >= 0
        last = np.maximum(last, 0)
        lo = np.where(any_above, radii[last], 0.0)
        hi = np.where(any_above, radii[np.minimum(last + 1, len(radii) - 1)], 0.0)
        offsets = np.linalg.norm(origins - self.centre, axis=1)
        prunable = ~np.array([row.outside_only for row in self.rows], dtype=bool)[:, None]
        settled = np.zeros_like(any_above)
        steps = np.zeros(any_above.shape, dtype=np.intp)
        while True:
            todo = any_above & ~settled & (hi - lo > RADIUS_TOLERANCE * np.maximum(hi, 1e-3))
            # a bracket wholly below the row's third farthest (and the tie tolerance) is
            # not narrowed further: see _outranked; its outer end stays below them
            lower = np.where(any_above, lo - offsets[None, :], -np.inf)
            threshold = _rank_threshold(lower)
            settled |= (
                todo & prunable & ((hi + offsets[None, :]) * (1.0 + _SAFETY) < threshold[:, None])
            )
            todo &= ~settled
            if not todo.any():
                break
            ri, di = np.nonzero(todo)
            trials = _bracket_trials(
                lo[ri, di], hi[ri, di], q_lo[ri, di], q_hi[ri, di], steps[ri, di]
            )
            steps[ri, di] += 1
            pair = np.repeat(np.arange(ri.size), trials.shape[1])
            r_try = trials.reshape(-1)
            keep = np.isfinite(r_try)
            pair, r_try = pair[keep], r_try[keep]
            # rows with the same trial radius on a ray ask for the same point: evaluate once
            key = np.column_stack([di[pair].astype(np.float64), r_try])
            unique, inverse = np.unique(key, axis=0, return_inverse=True)
            inverse = inverse.reshape(-1)
            cols = unique[:, 0].astype(np.intp)
            q_all = self.quotients(origins[cols] + directions[cols] * unique[:, 1:2])
            q_trials = np.full(trials.shape, np.nan)
            q_trials.reshape(-1)[keep] = q_all[ri[pair], inverse]
            # trials from the outside in: one above the limit raises lo, one below lowers
            # hi, each only inside the bracket (an unused trial, NaN, is inside none), which
            # stays [above, below] with a crossing in it (the outermost among the trials)
            for r_k, q_k in zip(trials.T[::-1], q_trials.T[::-1], strict=True):
                inside = (r_k > lo[ri, di]) & (r_k < hi[ri, di])
                up = inside & (q_k >= 1.0)
                lo[ri[up], di[up]] = r_k[up]
                q_lo[ri[up], di[up]] = q_k[up]
                down = inside & (q_k < 1.0)
                hi[ri[down], di[down]] = r_k[down]
                q_hi[ri[down], di[down]] = q_k[down]
        return np.where(any_above, hi, 0.0)

    def _past_ends(
        self,
        origins: NDArray[np.float64],
        directions: NDArray[np.float64],
        radii: NDArray[np.float64],
        ends_m: NDArray[np.float64],
        last: NDArray[np.intp],
        q_lo: NDArray[np.float64],
        q_hi: NDArray[np.float64],
    ) -> tuple[NDArray[np.intp], NDArray[np.float64], NDArray[np.float64]] | None:
        """:meth:`_outermost`'s answer, with the rays whose exceedance runs past their end.

        Where a row's outermost exceedance on a ray is the ray's last sample before its
        end, every sample beyond the end is evaluated (all in one pass) and each row's
        outermost exceedance taken from them where there is one: the answer of the ray
        without an end, with the quotients at its bracket's ends.  None when the grid's
        outermost sample is above the limit.
        """
        at_end = _last_before(radii, ends_m)
        cut = np.isfinite(ends_m) & (at_end < len(radii) - 1) & (last == at_end).any(axis=0)
        if not cut.any():
            return last, q_lo, q_hi
        rays = np.flatnonzero(cut)
        n_radii = len(radii)
        beyond = np.arange(n_radii)[None, :] > at_end[rays, None]  # (rays, radii)
        ray_of, index = np.nonzero(beyond)
        pts = origins[rays[ray_of]] + directions[rays[ray_of]] * radii[index][:, None]
        q = np.zeros((len(self.rows), rays.size, n_radii))
        q[:, ray_of, index] = self.quotients(pts)
        above = q >= 1.0
        if above[:, :, -1].any():
            return None
        hit = above.any(axis=2)
        outer = n_radii - 1 - np.argmax(above[:, :, ::-1], axis=2)
        out, lo, hi = last.copy(), q_lo.copy(), q_hi.copy()
        new = np.where(hit, outer, last[:, rays])
        out[:, rays] = new
        row = np.arange(len(self.rows))[:, None]
        col = np.arange(rays.size)[None, :]
        lo[:, rays] = np.where(hit, q[row, col, np.maximum(new, 0)], q_lo[:, rays])
        # the sample outside a bracket that ends at or past the ray's end: evaluated here
        moved = hit | (last[:, rays] == at_end[rays][None, :])
        outside = q[row, col, np.minimum(np.maximum(new, 0) + 1, n_radii - 1)]
        hi[:, rays] = np.where(moved, outside, q_hi[:, rays])
        return out, lo, hi

    def _outermost(
        self,
        origins: NDArray[np.float64],
        directions: NDArray[np.float64],
        radii: NDArray,
        ends_m: NDArray[np.float64],
        asked: NDArray[np.bool_],
    ) -> tuple[NDArray[np.intp], NDArray[np.float64], NDArray[np.float64]] | None:
        """Index of the outermost radius at or above the limit, (rows, D); -1 where none.

        With it, each row's quotient at that sample and at the one outside it (the ends
        of the bracket the crossing is narrowed in; NaN where none).
        None when the outermost sample of some ray is above (the grid must reach farther).
        The samples of a ray beyond its end (``ends_m``) are not evaluated (taken as 0), and
        a row not ``asked`` of a ray does not keep it open: it is closed from the start
        and keeps the outermost exceedance among the samples taken for the others (all the
        samples outside it were taken, so it is that row's outermost on the ray).
        The samples are evaluated from the outside in, :data:`RADIAL_BLOCK` radii a pass,
        and a ray is dropped once every row has found its outermost exceedance on it: the
        samples inside it cannot change the answer, and they are the costly ones (close to
        the sources).  The result is the one a full evaluation of every sample gives,
        except that a (row, ray) pair which :meth:`_outranked` shows cannot be among the
        row's farthest rays of this batch is given up (-1, as if never reached).
        """
        n_rows, n_dirs, n_radii = len(self.rows), len(directions), len(radii)
        last = np.full((n_rows, n_dirs), -1, dtype=np.intp)
        q_lo = np.full((n_rows, n_dirs), np.nan)
        q_hi = np.full((n_rows, n_dirs), np.nan)
        edge = np.zeros((n_rows, n_dirs))  # each ray's quotient at radii[stop]
        closed = ~asked
        boxed_below = self._boxed_prefix(origins, directions, radii)
        outside_rows = np.array([row.outside_only for row in self.rows], dtype=bool)
        offsets = np.linalg.norm(origins - self.centre, axis=1)
        open_rays = np.arange(n_dirs)
        stop = n_radii
        block = RADIAL_BLOCK
        at_end = _last_before(radii, ends_m)
        while stop > 0 and open_rays.size:
            start = max(0, stop - block)
            rr = radii[start:stop]
            pts = origins[open_rays, None, :] + directions[open_rays, None, :] * rr[None, :, None]
            within = rr[None, :] <= ends_m[open_rays, None]
            if within.all():
                q = self.quotients(pts.reshape(-1, 3)).reshape(n_rows, open_rays.size, rr.size)
            else:
                q = np.zeros((n_rows, open_rays.size, rr.size))
                if within.any():
                    q[:, within] = self.quotients(pts[within])
            block = _next_block(q, closed[:, open_rays], radii, start)
            above = q >= 1.0
            if stop == n_radii and above[:, :, -1].any():
                return None
            hit = above.any(axis=2)
            index = start + rr.size - 1 - np.argmax(above[:, :, ::-1], axis=2)
            current = last[:, open_rays]
            found = (current < 0) & hit
            last[:, open_rays] = np.where(found, index, current)
            r_f, o_f = np.nonzero(found)
            if r_f.size:
                at = index[r_f, o_f] - start
                q_lo[r_f, open_rays[o_f]] = q[r_f, o_f, at]
                outer_q = q[r_f, o_f, np.minimum(at + 1, rr.size - 1)]
                q_hi[r_f, open_rays[o_f]] = np.where(
                    at + 1 < rr.size, outer_q, edge[r_f, open_rays[o_f]]
                )
            edge[:, open_rays] = q[:, :, 0]
            shut = closed[:, open_rays] | found
            # a row that counts only points outside the enclosure cannot reach the limit
            # on the samples still below when all of them lie in the box or its walls
            shut |= outside_rows[:, None] & (start <= boxed_below[open_rays])[None, :]
            closed[:, open_rays] = shut
            if start > 0:
                # a ray with an end is ranked only once its last sample before the end is
                # taken: until then an exceedance may run past its end (see _past_ends)
                reached = (start <= at_end)[None, :]
                closed |= (
                    self._outranked(last, closed, offsets, radii, start)
                    & ~outside_rows[:, None]
                    & reached
                )
                shut = closed[:, open_rays]
            open_rays = open_rays[~shut.all(axis=0)]
            stop = start
        return last, q_lo, q_hi

    @staticmethod
    def _outranked(
        last: NDArray[np.intp],
        closed: NDArray[np.bool_],
        offsets: NDArray[np.float64],
        radii: NDArray[np.float64],
        start: int,
    ) -> NDArray[np.bool_]:
        """Open (row, ray) pairs that cannot be among the row's farthest rays of the batch.

        Of a batch of rays only the farthest ends of each row are used: the row's keep-out
        is the largest of them, its direction the first within :data:`TIE_TOLERANCE` of
        it, and the refinement starts from the three farthest (:func:`_tied_first`).  A
        ray whose outermost exceedance has been found at sample ``i`` ends, once narrowed,
        at least ``radii[i] - |origin - centre|`` from the centre; a ray still open below
        sample ``start`` ends at most ``|origin - centre| + radii[start]`` from it (its
        bracket lies inside ``radii[start]``).  Where that upper bound is below the third
        largest lower bound and below the largest lower bound less the tie tolerance, at
        least three rays end strictly farther, none of them tied with it: the ray is
        neither the farthest nor a refinement start, whatever its samples inside, and it
        is not sampled further (the cheapest saving: those samples are near the sources).
        Its ends would only be listed among the ray ends, which count for the farthest
        point alone; rows limited to the outside of an enclosure (whose clearance uses
        every end) are never given up.
        """
        found = last >= 0
        lower = np.where(found, radii[np.maximum(last, 0)] - offsets[None, :], -np.inf)
        threshold = _rank_threshold(lower)
        upper = (offsets + radii[start]) * (1.0 + _SAFETY)
        return ~closed & (upper[None, :] < threshold[:, None])

    def _boxed_prefix(
        self, origins: NDArray[np.float64], directions: NDArray[np.float64], radii: NDArray
    ) -> NDArray[np.intp]:
        """For each ray, how many of its innermost samples lie in the enclosure or its walls.

        Zero without an enclosure, or when no row counts only the points outside it.
        """
        enclosure = self.scenario.enclosure
        counts = np.zeros(len(directions), dtype=np.intp)
        if enclosure is None or not any(row.outside_only for row in self.rows):
            return counts
        pts = origins[:, None, :] + directions[:, None, :] * radii[None, :, None]
        flat = pts.reshape(-1, 3)
        boxed = (enclosure.contains(flat) | enclosure.in_wall(flat)).reshape(len(directions), -1)
        # length of the leading run of boxed samples along each ray
        free = ~boxed
        return np.where(free.any(axis=1), np.argmax(free, axis=1), len(radii))


#: Rays whose distances differ by less than this fraction of the farthest count as equally
#: far (twice the bracket: each end is known to RADIUS_TOLERANCE).
TIE_TOLERANCE = 2 * RADIUS_TOLERANCE
#: Relative margin of the bounds that leave a ray out (rounding of the distances computed
#: from the narrowed radii).
_SAFETY = 1e-9


def _last_before(radii: NDArray[np.float64], ends_m: NDArray[np.float64]) -> NDArray[np.intp]:
    """Index of each ray's last sample at or before its end (the grid's last for no end)."""
    return np.searchsorted(radii, ends_m, side="right") - 1


def _bracket_trials(
    lo: NDArray[np.float64],
    hi: NDArray[np.float64],
    q_lo: NDArray[np.float64],
    q_hi: NDArray[np.float64],
    steps: NDArray[np.intp],
) -> NDArray[np.float64]:
    """Radii to evaluate next in brackets [lo, hi] with q(lo) >= 1 > q(hi), (M, 12).

    The first :data:`_SECANT_STEPS` steps of a bracket aim at the crossing of the
    straight line through its ends in (log r, log q) (where a field falling as a power of
    the distance crosses the limit), with trials on both sides of it at
    :data:`_TRIAL_OFFSETS` times the final width (:data:`RADIUS_TOLERANCE`): an estimate
    within 0.45 of that width gives the final bracket at once, one a few widths off takes
    one step more.  Later steps, and brackets whose quotients are 0 or not finite, split
    the bracket into thirteen equal parts.  Unused trials are NaN.  Every trial lies strictly
    inside its bracket, so the bracket only narrows and keeps a crossing inside, as
    bisection does; evaluating several trials in one pass costs fewer passes.
    """
    width = RADIUS_TOLERANCE * np.maximum(hi, 1e-3)
    sections = np.arange(1, _TRIAL_OFFSETS.size + 1) / (_TRIAL_OFFSETS.size + 1.0)
    out = lo[:, None] + (hi - lo)[:, None] * sections[None, :]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        log_lo, log_hi = np.log(q_lo), np.log(q_hi)
        t = log_lo / (log_lo - log_hi)
        estimate = lo * np.exp(t * np.log(hi / lo))
    secant = (
        (steps < _SECANT_STEPS)
        & (lo > 0)
        & np.isfinite(log_lo)
        & np.isfinite(log_hi)
        & (log_lo >= 0)
        & (log_hi < 0)
        & np.isfinite(estimate)
    )
    aimed = estimate[secant, None] + width[secant, None] * _TRIAL_OFFSETS[None, :]
    inside = (aimed > lo[secant, None]) & (aimed < hi[secant, None])
    out[secant] = np.where(inside, aimed, np.nan)
    return out


#: Steps of a bracket that aim at the log-log secant's estimate before sectioning.
_SECANT_STEPS = 3
#: Trials about the estimate, in units of the final bracket width.
_TRIAL_OFFSETS = np.array(
    [-250.0, -80.0, -25.0, -8.0, -2.5, -0.45, 0.45, 2.5, 8.0, 25.0, 80.0, 250.0]
)


#: A pass of the sweep grows beyond :data:`RADIAL_BLOCK` radii only while the largest
#: quotient still asked of a ray is below this, and covers at most this ratio of radii.
_GROW_BELOW = 0.25
_GROW_SPAN = 2.0


def _next_block(
    q: NDArray[np.float64], closed: NDArray[np.bool_], radii: NDArray[np.float64], start: int
) -> int:
    """Radii of the next pass of the outside-in sweep (a question of speed only).

    A ray is left only once every row has found its outermost exceedance on it or been
    outranked, so no ray is left while every open (row, ray) pair is well below the
    limit: the passes there can be long.  The next pass reaches inwards to where the
    largest open quotient ``q_max`` would reach :data:`_GROW_BELOW` if it grew as 1/r^2
    (and no farther than a factor :data:`_GROW_SPAN` in radius); at least
    :data:`RADIAL_BLOCK` radii.  A heuristic on the quotients evaluated (samples not
    evaluated count as 0; the 1/r^2 law fails in the reactive near field): a long pass
    can evaluate samples a short one would have skipped, but the answer does not depend
    on the pass lengths.
    """
    if start <= 0:
        return RADIAL_BLOCK
    open_q = np.where(closed[:, :, None], 0.0, q)
    q_max = float(open_q.max()) if open_q.size else 0.0
    if not q_max < _GROW_BELOW:
        return RADIAL_BLOCK
    r_in = radii[start]
    target = r_in * max(np.sqrt(q_max / _GROW_BELOW), 1.0 / _GROW_SPAN)
    count = start - int(np.searchsorted(radii, target, side="left"))
    return max(RADIAL_BLOCK, count)


def _rank_threshold(lower: NDArray[np.float64]) -> NDArray[np.float64]:
    """Per row, a distance below which a ray is neither the farthest nor a refinement start.

    ``lower`` (rows, rays) holds a lower bound of each ray's final distance from the
    centre (-inf where unknown).  A ray known to end below the returned value, which is
    the smaller of the third largest lower bound and the largest one less the tie
    tolerance (narrowed by :data:`_SAFETY`), has three rays strictly farther and is not
    tied with the farthest: :func:`_tied_first` does not pick it, and it is not the
    farthest.  Zero (nothing is below it) with fewer than three known rays.
    """
    if lower.shape[1] < 3:
        return np.zeros(lower.shape[0])
    third = -np.partition(-lower, 2, axis=1)[:, 2]
    top = lower.max(axis=1)
    threshold = np.minimum(third, top * (1.0 - TIE_TOLERANCE)) * (1.0 - _SAFETY)
    return np.where(np.isfinite(threshold) & (threshold > 0), threshold, 0.0)


def _tied_first(dist: NDArray[np.float64], count: int) -> list[int]:
    """The ``count`` farthest rays, ties (within :data:`TIE_TOLERANCE`) in the rays' order.

    Distances come from a bracket known to :data:`RADIUS_TOLERANCE`: rays equally far
    (an isotropic source, a ring about a wire) differ in their last bits, and those bits
    depend on the processor and the BLAS build.  Every ray within the tie tolerance of
    the farthest is taken first, in the order the rays were laid out (the same on every
    machine), then the rest by falling distance (a stable sort).
    """
    top = float(dist.max()) if dist.size else 0.0
    if top <= 0:
        return []
    tied = np.flatnonzero(dist >= top * (1.0 - TIE_TOLERANCE))
    rest = [int(j) for j in np.argsort(-dist, kind="stable") if dist[j] < top * (1 - TIE_TOLERANCE)]
    return [int(j) for j in tied[:count]] + rest[: max(0, count - len(tied))]


class _Best:
    """The farthest exceedance found so far for each row, and every ray's end point."""

    def __init__(self, centre: NDArray[np.float64], n_rows: int) -> None:
        self.centre = centre
        self.distance = np.zeros(n_rows)
        self.point = np.tile(centre, (n_rows, 1))
        self.ends: list[list[NDArray[np.float64]]] = [[] for _ in range(n_rows)]

    def add(self, origins: NDArray, directions: NDArray, radius: NDArray) -> NDArray:
        """Record one batch of rays; return the distance of each ray's end from the centre."""
        ends = origins[None, :, :] + directions[None, :, :] * radius[:, :, None]
        dist = np.where(radius > 0, np.linalg.norm(ends - self.centre, axis=2), 0.0)
        for k in range(dist.shape[0]):
            self.distance[k] = max(self.distance[k], float(dist[k].max(initial=0.0)))
            self.ends[k].append(ends[k][radius[k] > 0])
        return dist

    def settle(self) -> None:
        """Set each row's point: the first ray end within the tie tolerance of the farthest.

        The ends are taken in the order the rays were laid out, so that equally far rays
        give the same direction on every machine (see :func:`_tied_first`).
        """
        for k in range(len(self.distance)):
            if self.distance[k] <= 0:
                continue
            pts = np.vstack(self.ends[k])
            dist = np.linalg.norm(pts - self.centre, axis=1)
            self.point[k] = pts[_tied_first(dist, 1)[0]]


def _special_directions(search: _Search) -> NDArray[np.float64]:
    dirs = []
    for t in search.terms:
        axis = t.radiator.placement.rotation[:, 2]
        dirs += [axis, -axis]
        offset = t.radiator.position_m - search.centre
        if np.linalg.norm(offset) > 1e-9:
            dirs.append(offset / np.linalg.norm(offset))
    for axis in np.eye(3):
        dirs += [axis, -axis]
    return np.asarray(dirs)


def _basis(direction: NDArray[np.float64]) -> tuple[NDArray, NDArray, NDArray]:
    z = direction / np.linalg.norm(direction)
    trial = np.array([1.0, 0.0, 0.0]) if abs(z[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    x = np.cross(trial, z)
    x /= np.linalg.norm(x)
    return x, np.cross(z, x), z


def _cap(direction: NDArray[np.float64], half_angle: float, n: int) -> NDArray[np.float64]:
    """``n`` quasi-uniform directions within ``half_angle`` of ``direction`` (a spiral cap)."""
    i = np.arange(n) + 0.5
    z = 1.0 - (1.0 - np.cos(half_angle)) * i / n
    phi = np.pi * (1.0 + np.sqrt(5.0)) * i
    rho = np.sqrt(np.clip(1.0 - z * z, 0.0, None))
    cap = np.column_stack([rho * np.cos(phi), rho * np.sin(phi), z])
    x, y, zz = _basis(direction)
    return np.vstack([direction / np.linalg.norm(direction), cap @ np.vstack([x, y, zz])])


def _plane_rays(search: _Search, reflector, azimuths: NDArray) -> tuple[NDArray, NDArray]:  # noqa: ANN001
    """Rays along a reflector, just on the source side, from the foot of the centre."""
    n = np.asarray(reflector.normal, dtype=float)
    n = n / np.linalg.norm(n)
    height = float(np.dot(search.centre - np.asarray(reflector.point_m, dtype=float), n))
    origin = search.centre - (height - PLANE_STANDOFF_M) * n
    u, v, _ = _basis(n)
    directions = np.cos(azimuths)[:, None] * u + np.sin(azimuths)[:, None] * v
    return np.tile(origin, (len(azimuths), 1)), directions


def _plane_ends(reflector, origins: NDArray, directions: NDArray) -> NDArray[np.float64]:  # noqa: ANN001
    """How far each ray along a reflector is sampled [m]: over a plate, and a little beyond.

    The rays along a plane look for the thin layer next to a reflecting surface where the
    exceedance reaches farthest (grazing incidence).  Along an infinite plane that layer
    runs the whole way (infinite ends); over a finite plate it ends at the plate's edge,
    within about a Fresnel zone of it: a ray is sampled to where it leaves the plate
    (the slab method on the plate's rectangle) plus :data:`PLATE_RAY_MARGIN_M` or
    :data:`PLATE_RAY_MARGIN` of that distance, whichever is more.  Beyond it the ray
    runs through open space, which the rays from the centre sample.  A ray that misses
    the plate altogether gets 0 (left out).
    """
    n = len(directions)
    if not reflector.is_finite:
        return np.full(n, np.inf)
    centre = np.asarray(reflector.point_m, dtype=float)
    t_in = np.zeros(n)
    t_out = np.full(n, np.inf)
    for axis, half in zip(
        (reflector.width_axis, reflector.height_axis),
        (reflector.size_m[0] / 2, reflector.size_m[1] / 2),
        strict=True,
    ):
        at = (origins - centre) @ axis
        step = directions @ axis
        flat = np.abs(step) < 1e-12
        with np.errstate(divide="ignore", invalid="ignore"):
            a = (-half - at) / step
            b = (half - at) / step
        lo = np.where(flat, np.where(np.abs(at) <= half, -np.inf, np.inf), np.minimum(a, b))
        hi = np.where(flat, np.where(np.abs(at) <= half, np.inf, -np.inf), np.maximum(a, b))
        t_in = np.maximum(t_in, lo)
        t_out = np.minimum(t_out, hi)
    hit = t_out >= t_in
    return np.where(hit, t_out + np.maximum(PLATE_RAY_MARGIN_M, PLATE_RAY_MARGIN * t_out), 0.0)


def _beam_rays(search: _Search, reflector) -> tuple[NDArray, NDArray]:  # noqa: ANN001
    """Rays along the beam a finite plate reflects, and from the centre to its corners.

    The beam rays leave the plate's centre, corners and edge midpoints (a millimetre in
    front of it), away from each radiating term's image: the reflected beam is bounded by
    the rays from the image through the plate's edges (the reflection boundary).
    """
    n = np.asarray(reflector.normal, dtype=float)
    corners = np.asarray(reflector.corners(), dtype=float)
    mids = 0.5 * (corners + np.roll(corners, -1, axis=0))
    marks = np.vstack([np.asarray(reflector.point_m, dtype=float), corners, mids])
    marks = marks + PLANE_STANDOFF_M * n
    origins, directions = [], []
    for t in search.terms:
        image = reflector.mirror_points(t.radiator.position_m[None, :])[0]
        away = marks - image
        origins.append(marks)
        directions.append(away / np.linalg.norm(away, axis=1)[:, None])
    towards = marks[1:5] - search.centre
    norm = np.linalg.norm(towards, axis=1)
    keep = norm > 1e-9
    origins.append(np.tile(search.centre, (int(keep.sum()), 1)))
    directions.append(towards[keep] / norm[keep, None])
    return np.vstack(origins), np.vstack(directions)


#: Height above a reflector at which the in-plane rays run [m].
PLANE_STANDOFF_M = 1e-3
#: Rays of the first pass along each reflector.
PLANE_AZIMUTHS = 120
#: A ray along a finite plate runs this far past the plate's edge at least [m] ...
PLATE_RAY_MARGIN_M = 0.15
#: ... or this fraction of its length over the plate, whichever is more.
PLATE_RAY_MARGIN = 0.1


def _distinct_starts(
    search: _Search,
    starts: list[int],
    o: NDArray[np.float64],
    d: NDArray[np.float64],
    kind: NDArray[np.intp],
    spacing: float,
    az_step: float,
) -> dict[int, list[int]]:
    """The refinement starts, less those that another start's refinement already covers.

    A start from the same origin within half its refinement's reach of an earlier start
    (half the cap's half-angle, 0.75 ``spacing``; along a plane, half the azimuth span,
    0.75 ``az_step``) adds rays interleaved with that start's own, at the same density:
    it is left out.  The first of such starts is kept, in the order given (the same on
    every machine).  Returns each kept start with the starts it stands for (itself first).
    """
    kept: dict[int, list[int]] = {}
    for j in starts:
        covered = False
        for i in kept:
            if kind[i] != kind[j] or not np.array_equal(o[i], o[j]):
                continue
            if kind[j] < 0:
                angle = float(np.arccos(np.clip(np.dot(d[i], d[j]), -1.0, 1.0)))
                covered = angle < 0.75 * spacing
            else:
                reflector = search.scenario.reflectors[int(kind[j])]
                u, v, _ = _basis(np.asarray(reflector.normal, dtype=float))
                a_i = np.arctan2(np.dot(d[i], v), np.dot(d[i], u))
                a_j = np.arctan2(np.dot(d[j], v), np.dot(d[j], u))
                gap = abs(float(np.angle(np.exp(1j * (a_i - a_j)))))
                covered = gap < 0.75 * az_step
            if covered:
                kept[i].append(j)
                break
        if not covered:
            kept[j] = [j]
    return kept


def _search_all(search: _Search, n_directions: int) -> _Best:
    """Lattice rays from the centre and rays along every reflector, then multi-start caps.

    The first pass shoots rays from the centre (golden-spiral lattice plus the radiators'
    axes) and along each reflector plane (the exceedance next to a floor is thin and
    reaches farthest on the floor itself, between the lattice rays).  Three levels of
    refinement follow around the three farthest rays of every row.
    """
    best = _Best(search.centre, len(search.rows))
    centre_dirs = np.vstack([fibonacci_sphere(n_directions), _special_directions(search)])
    origins = [np.tile(search.centre, (len(centre_dirs), 1))]
    directions = [centre_dirs]
    kinds = [np.full(len(centre_dirs), -1)]
    ends = [np.full(len(centre_dirs), np.inf)]
    azimuths = np.linspace(0.0, 2 * np.pi, PLANE_AZIMUTHS, endpoint=False)
    for j, reflector in enumerate(search.scenario.reflectors):
        o, d = _plane_rays(search, reflector, azimuths)
        e = _plane_ends(reflector, o, d)
        origins.append(o[e > 0])
        directions.append(d[e > 0])
        kinds.append(np.full(int(np.count_nonzero(e > 0)), j))
        ends.append(e[e > 0])
        if reflector.is_finite:
            o, d = _beam_rays(search, reflector)
            origins.append(o)
            directions.append(d)
            kinds.append(np.full(len(d), -1))
            ends.append(np.full(len(d), np.inf))
    o, d, kind = np.vstack(origins), np.vstack(directions), np.concatenate(kinds)
    end = np.concatenate(ends)
    dist = best.add(o, d, search.rays(o, d, end))

    spacing = np.sqrt(4 * np.pi / n_directions)
    az_step = 2 * np.pi / PLANE_AZIMUTHS
    outside_rows = np.array([row.outside_only for row in search.rows], dtype=bool)
    for level in range(3):
        shrink = 3.0**-level
        new_o, new_d, new_kind, new_end, new_asked = [], [], [], [], []
        starts: list[int] = []
        rows_of: dict[int, set[int]] = {}
        for k in range(len(search.rows)):
            # equally far rays (to the bracket) in the order they were laid out: the same
            # starts on every machine, whatever the last bits of their distances
            for j in _tied_first(dist[k], 3):
                if dist[k, j] > 0:
                    if j not in starts:
                        starts.append(j)
                    rows_of.setdefault(j, set()).add(k)
        distinct = _distinct_starts(search, starts, o, d, kind, spacing * shrink, az_step * shrink)
        for j, stands_for in distinct.items():
            # a start's rays answer the rows it refines (and the enclosure rows, which use
            # every ray's end), not the others: a row's own starts refine it
            asked = outside_rows.copy()
            for i in stands_for:
                asked[sorted(rows_of[i])] = True
            if kind[j] < 0:
                cap = _cap(d[j], 1.5 * spacing * shrink, 24)
                new_o.append(np.tile(o[j], (len(cap), 1)))
                new_d.append(cap)
                new_kind.append(np.full(len(cap), -1))
                new_end.append(np.full(len(cap), np.inf))
                new_asked.append(np.tile(asked[:, None], (1, len(cap))))
            else:
                reflector = search.scenario.reflectors[int(kind[j])]
                u, v, _ = _basis(np.asarray(reflector.normal, dtype=float))
                a0 = float(np.arctan2(np.dot(d[j], v), np.dot(d[j], u)))
                az = a0 + np.linspace(-1.5, 1.5, 13) * az_step * shrink
                oo, dd = _plane_rays(search, reflector, az)
                ee = _plane_ends(reflector, oo, dd)
                new_o.append(oo[ee > 0])
                new_d.append(dd[ee > 0])
                new_kind.append(np.full(int(np.count_nonzero(ee > 0)), int(kind[j])))
                new_end.append(ee[ee > 0])
                new_asked.append(np.tile(asked[:, None], (1, int(np.count_nonzero(ee > 0)))))
        if not new_o:
            break
        o, d, kind = np.vstack(new_o), np.vstack(new_d), np.concatenate(new_kind)
        end = np.concatenate(new_end)
        dist = best.add(o, d, search.rays(o, d, end, np.hstack(new_asked)))
    best.settle()
    return best


def keepout_distances(
    scenario: Scenario,
    limit_ids: Sequence[str] | None = None,
    n_directions: int = 400,
) -> list[KeepoutResult]:
    """Keep-out distance for each limit of a scenario.

    Parameters
    ----------
    scenario : Scenario
    limit_ids : sequence of str, optional
        Defaults to the scenario's limits.
    n_directions : int
        Rays of the first pass from the centre (refined afterwards around the farthest).

    Returns
    -------
    list of KeepoutResult
        In the order of ``limit_ids``.
    """
    ids = list(limit_ids) if limit_ids is not None else list(scenario.limit_ids)
    if limit_ids is not None:
        from .plausibility import warn_limits

        warn_limits(scenario, ids)
    values = [scenario.limit_value(i) for i in ids]
    terms = radiating_terms(scenario)
    uncertainty_db = max((float(t.radiator.gain_uncertainty_db) for t in terms), default=0.0)
    margin = 10 ** (uncertainty_db / 10)
    # Limits with the same values give the same answer: search each once.
    keys = [
        (v.power_density_w_m2, v.e_v_m, v.h_a_m, v.kind, v.basis, v.power_density_derived)
        for v in values
    ]
    first = [keys.index(key) for key in keys]
    unique = sorted(set(first))
    scales = [1.0] + ([margin] if uncertainty_db > 0 else [])
    regions = [False] + ([True] if scenario.enclosure is not None else [])
    rows = [
        _Row(i, sc, out) for out in regions for sc in scales for i in unique if sc == 1.0 or not out
    ]
    search = _Search(scenario, values, rows)
    try:
        best = _search_all(search, n_directions)
    finally:
        search.close()

    def row_of(i: int, scale: float, outside: bool) -> int:
        return rows.index(_Row(first[i], scale, outside))

    results = []
    for i, v in enumerate(values):
        k = row_of(i, 1.0, False)
        r = float(best.distance[k])
        direction = best.point[k] - search.centre
        k_u = row_of(i, margin, False) if uncertainty_db > 0 else k
        outside = None
        if scenario.enclosure is not None:
            outside = _outside(scenario, best, row_of(i, 1.0, True))
        results.append(
            KeepoutResult(
                limit_id=v.id,
                limit_w_m2=v.power_density_w_m2,
                distance_m=r,
                direction=direction / np.linalg.norm(direction) if r > 0 else None,
                screening_distance_m=screening_distance_m(
                    scenario, _effective_threshold_w_m2(v), while_on=v.while_on
                ),
                distance_with_uncertainty_m=float(max(best.distance[k_u], r)),
                uncertainty_db=uncertainty_db,
                averaging_time_s=v.averaging_time_s,
                outside_enclosure=outside,
            )
        )
    return results


def _outside(scenario: Scenario, best: _Best, k: int) -> dict[str, object]:
    """The keep-out outside the enclosure: radius about the centre and clearance from the box.

    The clearance is the largest distance from the enclosure's outer surface among the
    outermost exceedances of all rays of the search.
    """
    r = float(best.distance[k])
    enclosure = scenario.enclosure
    if r <= 0 or enclosure is None:
        return {"distance_m": 0.0, "direction": None, "clearance_from_enclosure_m": 0.0}
    corners = enclosure.outline()
    lo, hi = corners.min(axis=0), corners.max(axis=0)
    pts = np.vstack(best.ends[k])
    gap = np.linalg.norm(np.maximum(np.maximum(lo - pts, pts - hi), 0.0), axis=1)
    d = best.point[k] - best.centre
    return {
        "distance_m": r,
        "direction": d / np.linalg.norm(d),
        "clearance_from_enclosure_m": float(gap.max()) if gap.size else 0.0,
    }
