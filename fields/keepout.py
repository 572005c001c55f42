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
2. Along each ray the quotient is sampled outward on a grid that is fine near the
   source (a sixteenth of a wavelength) and grows geometrically (3 % a step)
   further out; in coherent-reflection mode the step stays at a sixteenth of a
   wavelength so no standing-wave crest is stepped over.  The search keeps the
   **outermost** sample at or above the limit (a near-field density need not fall
   monotonically, so stopping at the first crossing would be wrong) and
   bisects the interval beyond it to 1e-4 relative.  The reported radius is the
   outer end of the final bracket, never the inner one.
3. The rays whose crossing is farthest are refined with denser direction caps
   around them, twice, so a narrow beam is not missed between lattice directions.
4. The outer end of the sampling is set from the far-field screening bound of
   every term (with the reflection envelope) and doubled until the quotient at
   the end of every ray is below one.

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

from . import limits as limits_mod
from .field import evaluate, radiating_terms
from .scenario import Scenario

#: Field reflection assumed for a non-metal plane in the screening estimate (OET 65).
SCREENING_GROUND_FIELD_REFLECTION = 0.6
#: Relative width of the final bracket of the bisection.
RADIUS_TOLERANCE = 1e-4


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


def screening_distance_m(scenario: Scenario, limit_w_m2: float) -> float:
    """Far-field screening radius sqrt(F sum d P G / (4 pi S)) about the first source [m].

    Enclosures and shields are ignored (the bare sources radiate): an upper-bound
    estimate, as the trade uses it.  Sources away from the centre add their offset.
    """
    factor = _reflection_envelope(scenario, SCREENING_GROUND_FIELD_REFLECTION)
    eirp_w = sum(s.average_power_w * s.radiator.max_gain() for s in scenario.sources)
    offset = max(float(np.linalg.norm(s.position_m - scenario.centre_m)) for s in scenario.sources)
    return float(np.sqrt(factor * eirp_w / (4 * np.pi * limit_w_m2))) + offset


def _radii(r_max: float, wavelength: float, coherent: bool) -> NDArray[np.float64]:
    fine = wavelength / 16.0
    r = [min(1e-3, fine / 4)]
    while r[-1] < r_max:
        step = fine if coherent else max(fine, 0.03 * r[-1])
        r.append(r[-1] + step)
    return np.asarray(r)


class _Search:
    """Ray search shared by all limits of one scenario (fields computed once per pass)."""

    def __init__(self, scenario: Scenario, values: Sequence[limits_mod.LimitValue]) -> None:
        self.scenario = scenario
        self.values = list(values)
        self.centre = scenario.centre_m
        self.terms = radiating_terms(scenario)
        self.coherent = scenario.reflections == "coherent" and bool(scenario.reflectors)
        self.uncertainty_db = max(
            (float(getattr(t.radiator, "gain_uncertainty_db", 0.0)) for t in self.terms),
            default=0.0,
        )
        thresholds = [_effective_threshold_w_m2(v) for v in self.values]
        floor = min(thresholds) * 10 ** (-self.uncertainty_db / 10)
        self.r_max = self._initial_r_max(floor)

    def _initial_r_max(self, threshold_w_m2: float) -> float:
        envelope = _reflection_envelope(self.scenario) if self.scenario.reflectors else 1.0
        if len(self.scenario.reflectors) > 1:
            n = len(self.scenario.reflectors)
            envelope = (1.0 + n + n * (n - 1)) ** 2
        r = 0.5
        for t in self.terms:
            rad = t.radiator
            offset = float(np.linalg.norm(rad.position_m - self.centre))
            bound = np.sqrt(
                envelope
                * t.average_weight
                * rad.power_w
                * rad.max_gain()
                / (4 * np.pi * threshold_w_m2)
            )
            r = max(r, offset + max(bound, 2 * rad.far_field_distance_m) + rad.largest_dimension_m)
        return 1.3 * r

    #: When set, points inside the enclosure or its walls do not count.
    outside_only: bool = False

    def quotients(self, points: NDArray[np.float64]) -> NDArray[np.float64]:
        """Exposure quotient per limit, shape (L, N), for the time-averaged fields."""
        res = evaluate(self.scenario, points)
        q = np.empty((len(self.values), points.shape[0]))
        for i, v in enumerate(self.values):
            q[i] = limits_mod.quotient(v, res.power_density_w_m2, res.e_v_m, res.h_a_m)
        enclosure = self.scenario.enclosure
        if self.outside_only and enclosure is not None:
            q[:, enclosure.contains(points) | enclosure.in_wall(points)] = 0.0
        return q

    def crossings(self, directions: NDArray[np.float64], scale: NDArray[np.float64]) -> NDArray:
        """Outermost radius along each ray where q * scale >= 1, shape (L, D); 0 if none."""
        wavelength = self.scenario.wavelength_m
        for _ in range(8):
            radii = _radii(self.r_max, wavelength, self.coherent)
            pts = self.centre + directions[:, None, :] * radii[None, :, None]
            q = self.quotients(pts.reshape(-1, 3)).reshape(
                len(self.values), len(directions), len(radii)
            )
            above = q * scale[:, None, None] >= 1.0
            if not above[:, :, -1].any():
                break
            self.r_max *= 2.0
        else:  # pragma: no cover - the bound doubles 8 times: a model fault, not input
            raise RuntimeError("keep-out search did not close: the field does not decay")
        any_above = above.any(axis=2)
        last = len(radii) - 1 - np.argmax(above[:, :, ::-1], axis=2)
        lo = np.where(any_above, radii[last], 0.0)
        hi = np.where(any_above, radii[np.minimum(last + 1, len(radii) - 1)], 0.0)
        return self._bisect(directions, lo, hi, any_above, scale)

    def _bisect(self, directions, lo, hi, active, scale):  # noqa: ANN001, ANN202
        lo = lo.copy()
        hi = hi.copy()
        n_limits = len(self.values)
        while True:
            todo = active & (hi - lo > RADIUS_TOLERANCE * np.maximum(hi, 1e-3))
            if not todo.any():
                break
            li, di = np.nonzero(todo)
            mid = 0.5 * (lo[li, di] + hi[li, di])
            pts = self.centre + directions[di] * mid[:, None]
            q_all = self.quotients(pts)
            q = q_all[li, np.arange(len(li))] * scale[li]
            up = q >= 1.0
            lo[li[up], di[up]] = mid[up]
            hi[li[~up], di[~up]] = mid[~up]
            if n_limits == 0:  # pragma: no cover
                break
        return np.where(active, hi, 0.0)


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


def _cap(direction: NDArray[np.float64], half_angle: float, n: int) -> NDArray[np.float64]:
    """Quasi-uniform directions within ``half_angle`` of ``direction``."""
    base = fibonacci_sphere(4 * n)
    cos_max = np.cos(half_angle)
    # Map the lattice's polar cap z >= cos_max by taking the points in it.
    cap = base[base[:, 2] >= cos_max]
    if cap.shape[0] == 0:
        cap = np.array([[0.0, 0.0, 1.0]])
    # Rotate +z onto ``direction``.
    z = direction / np.linalg.norm(direction)
    trial = np.array([1.0, 0.0, 0.0]) if abs(z[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    x = np.cross(trial, z)
    x /= np.linalg.norm(x)
    y = np.cross(z, x)
    return cap @ np.vstack([x, y, z])


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
        Rays of the first pass (refined afterwards around the farthest ones).

    Returns
    -------
    list of KeepoutResult
        In the order of ``limit_ids``.
    """
    ids = list(limit_ids) if limit_ids is not None else list(scenario.limit_ids)
    values = [limits_mod.get_limit(i).at(scenario.frequency_hz) for i in ids]
    search = _Search(scenario, values)
    ones = np.ones(len(values))
    margin = 10 ** (search.uncertainty_db / 10)
    model = _pass(search, ones, n_directions)
    widened = _pass(search, ones * margin, n_directions) if search.uncertainty_db > 0 else model
    outside = None
    if scenario.enclosure is not None:
        search.outside_only = True
        outside = _pass(search, ones, n_directions)
        search.outside_only = False

    results = []
    for i, v in enumerate(values):
        r, d = model[0][i], model[1][i]
        r_u = widened[0][i]
        results.append(
            KeepoutResult(
                limit_id=v.id,
                limit_w_m2=v.power_density_w_m2,
                distance_m=float(r),
                direction=d / np.linalg.norm(d) if r > 0 else None,
                screening_distance_m=screening_distance_m(scenario, _effective_threshold_w_m2(v)),
                distance_with_uncertainty_m=float(max(r_u, r)),
                uncertainty_db=search.uncertainty_db,
                averaging_time_s=v.averaging_time_s,
                outside_enclosure=None if outside is None else _outside(scenario, outside, i),
            )
        )
    return results


def _pass(search: _Search, scale: NDArray[np.float64], n_directions: int):  # noqa: ANN202
    """One full search: lattice rays, then two levels of caps about the farthest ray."""
    directions = np.vstack([fibonacci_sphere(n_directions), _special_directions(search)])
    radius = search.crossings(directions, scale)  # (L, D)
    best_r = radius.max(axis=1)
    best_d = directions[radius.argmax(axis=1)]
    spacing = np.sqrt(4 * np.pi / n_directions)
    for level in range(2):
        half_angle = spacing * (1.5 if level == 0 else 0.5)
        todo = [i for i in range(len(scale)) if best_r[i] > 0]
        if not todo:
            break
        caps = [_cap(best_d[i], half_angle, 60) for i in todo]
        cap_dirs = np.vstack(caps)
        r_cap = search.crossings(cap_dirs, scale)
        better = r_cap.max(axis=1) > best_r
        best_d = np.where(better[:, None], cap_dirs[r_cap.argmax(axis=1)], best_d)
        best_r = np.maximum(best_r, r_cap.max(axis=1))
        directions = np.vstack([directions, cap_dirs])
        radius = np.hstack([radius, r_cap])
    return best_r, best_d, directions, radius


def _outside(scenario: Scenario, found, i: int) -> dict[str, object]:  # noqa: ANN001
    """The keep-out outside the enclosure: radius about the centre and clearance from the box.

    The clearance is the largest distance from the enclosure's outer surface among the
    outermost exceedances of all rays of the search.
    """
    r, d, directions, radius = found
    if r[i] <= 0:
        return {"distance_m": 0.0, "direction": None, "clearance_from_enclosure_m": 0.0}
    corners = scenario.enclosure.outline()
    lo, hi = corners.min(axis=0), corners.max(axis=0)
    hits = radius[i] > 0
    pts = scenario.centre_m + directions[hits] * radius[i][hits][:, None]
    gap = np.linalg.norm(np.maximum(np.maximum(lo - pts, pts - hi), 0.0), axis=1)
    return {
        "distance_m": float(r[i]),
        "direction": d[i] / np.linalg.norm(d[i]),
        "clearance_from_enclosure_m": float(gap.max()) if gap.size else 0.0,
    }
