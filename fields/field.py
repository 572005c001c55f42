"""Sources, images and shields combined into E, H and power density at points.

Model
-----
For every *radiating term* (a source in free space, or an enclosure opening that
leaks the power of the sources inside) the field at each point is

* the term's own field, times the amplitude factor of every shield sheet the
  straight ray from the term's reference point to the point crosses;
* plus, for every reflecting plane, the field of the term's image with the
  Fresnel coefficients applied (:func:`keepclear.fields.reflection.reflected_fields`),
  each image's ray also checked against the shields;
* combined per the scenario's ``reflections`` mode: ``"coherent"`` sums the
  phasors (the standing-wave pattern); ``"envelope"`` adds the magnitudes (the
  worst phase everywhere, never below coherent);
* a finite reflector (a plate: ``size_m``) scales its image by the plate's
  Fresnel-Kirchhoff aperture factor (continuous across the reflection boundary), and a
  finite *metal* plate shades the direct ray and the legs of the other first-order
  paths as a shield with no transmission does; a plate does not bound the space, so
  every other plane's images stay in play beside and under it;
* behind an infinite reflector (inside the wall or floor half-space, or the room beyond)
  only the direct field remains, unattenuated (the wall's thickness is unknown and a
  thin panel can pass nearly all of it: conservative), or nothing behind metal.

Terms add as power: magnetrons are not phase-locked, so
:math:`|E|^2 = \\sum_i |E_i|^2` over terms.  The time average weights each term by
its duty cycle; the peak assumes every source radiates at once (conservative).
The power density is the contract's plane-wave equivalent
:math:`S = \\max(|E|^2/\\eta_0, \\eta_0 |H|^2)`, from the RMS E and H of the sum.

Memory and chunks
-----------------
One setting bounds the scratch memory of an evaluation: the budget of
:func:`memory_budget_bytes`, 1 GiB by default and at most (``memory_bytes=`` of
:func:`evaluate`, or the environment variable ``KEEPCLEAR_MEMORY_BYTES`` for a whole
run).  :func:`chunk_plan` splits it: half bounds the orchestrator's chunk of points (the
fields of the direct ray and of every image, at most 6144 points, cut into equal
chunks), half is passed down to each radiator as its ``chunk_bytes``, which it divides
by its ``bytes_per_point`` (the images, evaluated by
:func:`keepclear.fields.reflection.reflected_fields`, use the radiators' default chunk of
64 MiB, inside that half).  Outside the budget: the N x 3 points and the N results,
which are the caller's, and each aperture model's cache of quadrature rules (at most
128 MiB, a few MiB in practice).

References
----------
.. [1] C. A. Balanis, *Advanced Engineering Electromagnetics*, 2nd ed., Wiley,
   2012, sec. 7.4 (image theory).
.. [2] FCC OET Bulletin 65, Edition 97-01 (1997), sec. 2 (power density,
   time averaging, plane-wave equivalence).
"""

from __future__ import annotations

import functools
import os
import warnings
import weakref
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from keepclear.antennas.base import ETA0_OHM, Radiator, as_points
from keepclear.antennas.memo import radiator_fields

from .scenario import Scenario, Source

#: Default and largest memory budget of one evaluation [bytes] (the scratch of the sums;
#: the N x 3 points and the N results are the caller's).
DEFAULT_MEMORY_BYTES = 1024**3
MAX_MEMORY_BYTES = 1024**3
#: Smallest budget accepted [bytes]: a radiator's own chunk (64 MiB) must fit beside a chunk.
MIN_MEMORY_BYTES = 128 * 1024**2
#: Environment variable that sets the budget for a whole run [bytes].
MEMORY_ENV = "KEEPCLEAR_MEMORY_BYTES"
#: Largest number of points per chunk of the orchestrator; a call is cut into equal chunks
#: of at most this size.  Small chunks keep the temporaries of the sums in the processor's
#: cache: on the 2-core test machine chunks of 4096 to 6144 points cost 3 to 4 times less
#: a point than 8192 or more.  Each radiator chunks further inside.
DEFAULT_CHUNK_POINTS = 6144
#: Scratch one point of a chunk costs in the orchestrator, per field (direct or image)
#: summed: E and H and their temporaries [bytes].  Measured with tracemalloc: about
#: 440-580 bytes since one call asks the source for every image together
#: (:func:`keepclear.fields.reflection.direct_and_reflected_fields`).
_FIELD_BYTES_PER_POINT = 640


def memory_budget_bytes(requested: int | None = None) -> int:
    """The memory budget of an evaluation [bytes]: the one setting every chunk follows.

    Parameters
    ----------
    requested : int, optional
        Budget asked for [bytes]; default the environment variable ``KEEPCLEAR_MEMORY_BYTES``
        if set, else 1 GiB.

    Returns
    -------
    int
        The budget, clamped to 128 MiB .. 1 GiB (never more than 1 GiB); a value of the
        environment variable that is not a number of bytes is ignored with a warning.
    """
    if requested is None:
        requested = DEFAULT_MEMORY_BYTES
        text = os.environ.get(MEMORY_ENV, "").strip()
        if text:
            try:
                value = float(text)
            except ValueError:
                value = float("nan")
            if np.isfinite(value):
                requested = int(value)
            else:
                warnings.warn(
                    f"{MEMORY_ENV}={text!r} is not a number of bytes; using 1 GiB",
                    UserWarning,
                    stacklevel=2,
                )
    return int(min(max(int(requested), MIN_MEMORY_BYTES), MAX_MEMORY_BYTES))


def chunk_plan(scenario: Scenario, memory_bytes: int | None = None) -> tuple[int, int]:
    """Points per chunk and the radiators' own chunk budget [bytes] under the memory budget.

    The budget is split in half: one half bounds the radiators' scratch (each radiator
    chunks its points by ``chunk_bytes`` and its ``bytes_per_point``; an image is the
    radiator evaluated at mirrored points), the other the orchestrator's chunk, at
    :data:`_FIELD_BYTES_PER_POINT` for the direct field and each image of every term, and
    at most :data:`DEFAULT_CHUNK_POINTS` points.
    """
    budget = memory_budget_bytes(memory_bytes)
    n_refl = len(scenario.reflectors)
    images = n_refl + (n_refl * (n_refl - 1) if n_refl > 1 else 0)
    per_point = 64 + _FIELD_BYTES_PER_POINT * (1 + images)
    points = max(1, min(DEFAULT_CHUNK_POINTS, (budget // 2) // per_point))
    return points, budget // 2


@dataclass(frozen=True)
class RadiatingTerm:
    """One incoherent contribution.

    Parameters
    ----------
    radiator : Radiator
        Field model carrying the full power of the term while radiating.
    average_weight : float
        Factor on |E|^2 for the time average (the duty cycle, or the duty-weighted
        share of the sources feeding an enclosure opening).
    peak_weight : float
        Factor on |E|^2 while radiating (1).
    label : str
        For reports.
    """

    radiator: Radiator
    average_weight: float
    peak_weight: float
    label: str


@dataclass(frozen=True)
class FieldResult:
    """Field magnitudes and power densities at N points (all RMS).

    ``e_v_m`` and ``h_a_m`` are time-averaged RMS values (the square root of the
    duty-weighted mean square), so ``power_density_w_m2 = max(e^2/eta0, eta0 h^2)``
    holds for them; the ``peak_`` values are while radiating.
    """

    e_v_m: NDArray[np.float64]
    h_a_m: NDArray[np.float64]
    power_density_w_m2: NDArray[np.float64]
    peak_e_v_m: NDArray[np.float64]
    peak_h_a_m: NDArray[np.float64]
    peak_power_density_w_m2: NDArray[np.float64]


@dataclass(frozen=True)
class CavityState:
    """The stirred field inside an enclosure, fixed by the enclosed sources.

    Parameters
    ----------
    enclosed : tuple of Source
        The sources inside the enclosure.
    power_density_w_m2 : float
        Cavity power density while every enclosed source radiates [W m^-2].
    average_ratio : float
        Time-averaged over peak enclosed power (the duty-weighted share) [1].
    """

    enclosed: tuple[Source, ...]
    power_density_w_m2: float
    average_ratio: float


@dataclass(frozen=True, eq=False)
class PreparedScenario:
    """A scenario with what every evaluation needs built once: immutable.

    Parameters
    ----------
    scenario : Scenario
        The validated scenario.
    terms : tuple of RadiatingTerm
        The incoherent radiating terms: free sources and enclosure openings (the power
        balance of the enclosure is solved here, not per evaluation).
    cavity : CavityState or None
        The field inside the enclosure, when there is one.

    Notes
    -----
    Build it with :func:`prepare`.  The reflectors' images are formed per evaluation from
    the terms' radiators (:func:`keepclear.fields.reflection.reflected_fields`).
    """

    scenario: Scenario
    terms: tuple[RadiatingTerm, ...]
    cavity: CavityState | None


#: What :func:`prepare` built, by the identity of its scenario, while that scenario lives
#: (the radiating terms and the cavity state hold no reference to the scenario itself, so
#: the entry goes when the scenario does).
_PREPARED: dict[int, tuple[weakref.ref[Scenario], tuple[RadiatingTerm, ...], CavityState | None]]
_PREPARED = {}


def prepare(scenario: Scenario | PreparedScenario) -> PreparedScenario:
    """The :class:`PreparedScenario` of a scenario; its parts are built on first use, then shared.

    The prepared parts are kept beside the scenario (keyed by its identity, dropped when
    the scenario is), never written into the frozen :class:`Scenario` itself, so every
    search and map over one scenario solves its enclosure once.
    """
    if isinstance(scenario, PreparedScenario):
        return scenario
    key = id(scenario)
    known = _PREPARED.get(key)
    if known is not None and known[0]() is scenario:
        return PreparedScenario(scenario, known[1], known[2])
    terms, cavity = tuple(_radiating_terms(scenario)), _cavity(scenario)
    ref = weakref.ref(scenario, functools.partial(_forget, key, _PREPARED))
    _PREPARED[key] = (ref, terms, cavity)
    return PreparedScenario(scenario, terms, cavity)


def _forget(key: int, table: dict, ref: weakref.ref) -> None:
    """Drop a prepared scenario once its scenario is gone (``table`` bound: safe at exit)."""
    entry = table.get(key)
    if entry is not None and entry[0] is ref:
        del table[key]


def _cavity(scenario: Scenario) -> CavityState | None:
    enclosure = scenario.enclosure
    if enclosure is None:
        return None
    enclosed = tuple(s for s in scenario.sources if enclosure.contains(s.position_m[None, :])[0])
    total_w = sum(s.power_w for s in enclosed)
    average_w = sum(s.average_power_w for s in enclosed)
    density = float(
        enclosure.power_balance(total_w, scenario.frequency_hz)["cavity_power_density_w_m2"]
    )
    ratio = average_w / total_w if total_w > 0 else 0.0
    return CavityState(enclosed, density, ratio)


def radiating_terms(scenario: Scenario | PreparedScenario) -> list[RadiatingTerm]:
    """The incoherent terms of a scenario: free sources, and enclosure openings.

    Sources inside the enclosure do not radiate outside directly; the openings of
    the enclosure do, with the leaked share of their power.  Computed once per
    scenario (see :func:`prepare`).
    """
    return list(prepare(scenario).terms)


def _radiating_terms(scenario: Scenario) -> list[RadiatingTerm]:
    enclosure = scenario.enclosure
    inside = np.zeros(len(scenario.sources), dtype=bool)
    if enclosure is not None:
        inside = enclosure.contains(np.array([s.position_m for s in scenario.sources]))
    terms = [
        RadiatingTerm(s.radiator, s.duty_cycle, 1.0, s.id)
        for s, is_in in zip(scenario.sources, inside, strict=True)
        if not is_in
    ]
    if enclosure is not None and inside.any():
        enclosed = [s for s, is_in in zip(scenario.sources, inside, strict=True) if is_in]
        powers = [s.power_w for s in enclosed]
        duties = np.array([s.duty_cycle for s in enclosed])
        for radiator, fractions in enclosure.leakage_radiators(powers, scenario.frequency_hz):
            weight = float(np.dot(np.asarray(fractions, dtype=float), duties))
            terms.append(RadiatingTerm(radiator, weight, 1.0, getattr(radiator, "label", "leak")))
    return terms


def _shield_factor(
    scenario: Scenario, origin_m: NDArray[np.float64], points_m: NDArray, extent_m: float = 0.0
) -> NDArray:
    """Product of every shield's amplitude factor for rays from ``origin_m`` to points."""
    factor = np.ones(points_m.shape[0])
    for shield in scenario.shields:
        factor *= shield.amplitude_factor(origin_m, points_m, source_extent_m=extent_m)
    return factor


def _bounce_points(
    reflector: object, source_m: NDArray[np.float64], points_m: NDArray[np.float64]
) -> NDArray[np.float64]:
    """Specular reflection points on one plane for rays from ``source_m`` to points."""
    image = reflector.mirror_points(source_m[None, :])[0]  # type: ignore[attr-defined]
    d_image = abs(float(reflector.signed_distance_m(image[None, :])[0]))  # type: ignore[attr-defined]
    d_points = np.abs(reflector.signed_distance_m(points_m))  # type: ignore[attr-defined]
    t = d_image / np.maximum(d_image + d_points, 1e-12)
    return image + t[:, None] * (points_m - image)


def _path_factors(
    scenario: Scenario, radiator: Radiator, points_m: NDArray[np.float64], n_images: int
) -> tuple[NDArray[np.float64], list[NDArray[np.float64]]]:
    """Shield factors of the direct ray and of the first ``n_images`` reflected paths.

    A reflected path gets the product of its two legs, source -> reflection point ->
    field point (a sheet behind the plane is not on it).  The legs from the source (with
    the source's extent) are asked of each shield in one call, and so are the legs back,
    so the fixed cost of a shield's evaluation is paid twice, not once per image and leg.
    """
    n = points_m.shape[0]
    source = radiator.position_m
    bounces = [_bounce_points(scenario.reflectors[k], source, points_m) for k in range(n_images)]
    extent = 0.5 * radiator.largest_dimension_m
    out = _shield_factor(scenario, source, np.vstack([points_m, *bounces]), extent)
    direct = out[:n]
    images = [out[(k + 1) * n : (k + 2) * n] for k in range(n_images)]
    if n_images:
        back = np.ones(n * n_images)
        starts, ends = np.vstack(bounces), np.tile(points_m, (n_images, 1))
        for shield in scenario.shields:
            back *= shield.amplitude_factor(starts, ends)
        images = [f * back[k * n : (k + 1) * n] for k, f in enumerate(images)]
    direct, images = _plate_shadows(scenario, radiator, points_m, bounces, direct, images)
    return direct, images


def _plate_shadows(  # noqa: ANN202
    scenario: Scenario,
    radiator: Radiator,
    points_m: NDArray[np.float64],
    bounces: list[NDArray[np.float64]],
    direct: NDArray[np.float64],
    images: list[NDArray[np.float64]],
):
    """Finite metal reflectors as obstacles on the direct ray and the reflected legs.

    Both legs of each first-order reflected path count, except the plate that path
    reflects from.
    """
    from . import reflection

    refl = scenario.reflectors
    if not reflection.has_obstacles(refl):
        return direct, images
    f_hz, source = scenario.frequency_hz, radiator.position_m
    extent = 0.5 * radiator.largest_dimension_m
    n = points_m.shape[0]
    # the products of reflection.plate_obstacle_factor, plate by plate in the same order;
    # each plate is asked once for every ray from the source and once for every leg back
    on_direct = np.ones(n)
    leg1 = [np.ones(n) for _ in bounces]
    leg2 = [np.ones(n) for _ in bounces]
    for m, plate in enumerate(refl):
        if not plate.is_obstacle:
            continue
        legs = [k for k in range(len(bounces)) if k != m]
        ends = np.vstack([points_m, *(bounces[k] for k in legs)])
        f = plate.obstacle_factor(source, ends, f_hz, extent)
        on_direct *= f[:n]
        for slot, k in enumerate(legs, start=1):
            leg1[k] *= f[slot * n : (slot + 1) * n]
        if legs:
            starts = np.vstack([bounces[k] for k in legs])
            g = plate.obstacle_factor(starts, np.tile(points_m, (len(legs), 1)), f_hz)
            for slot, k in enumerate(legs):
                leg2[k] *= g[slot * n : (slot + 1) * n]
    direct = direct * on_direct
    out = [f * a * b for f, a, b in zip(images, leg1, leg2, strict=True)]
    return direct, out


def _term_squares(
    term: RadiatingTerm,
    scenario: Scenario,
    points_m: NDArray[np.float64],
    chunk_bytes: int = 64 * 1024**2,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """|E|^2 and |H|^2 of one term at points, reflections and shields included."""
    radiator = term.radiator
    from . import reflection

    images: list[tuple[NDArray, NDArray]] = []
    if scenario.reflectors:
        # the radiator asked once, for the points and every image's mirrored points
        e, h, images = reflection.direct_and_reflected_fields(
            radiator,
            scenario.reflectors,
            points_m,
            scenario.frequency_hz,
            order=2 if len(scenario.reflectors) > 1 else 1,
            chunk_bytes=chunk_bytes,
        )
    else:
        e, h = radiator_fields(radiator, points_m, chunk_bytes)
    image_factors: list[NDArray[np.float64]] = []
    shaded = bool(scenario.shields) or reflection.has_obstacles(scenario.reflectors)
    if shaded:
        f, image_factors = _path_factors(scenario, radiator, points_m, len(scenario.reflectors))
        e = e * f[:, None]
        h = h * f[:, None]
    if not scenario.reflectors:
        return np.sum(np.abs(e) ** 2, axis=1), np.sum(np.abs(h) ** 2, axis=1)

    if shaded:
        # First-order images: shield credit along the real path, source -> reflection
        # point -> field point (a sheet behind the plane is not on it).  Higher orders get
        # no credit (conservative: their path is not traced).
        shaded = []
        for k, (ei, hi) in enumerate(images):
            if k < len(image_factors):
                f = image_factors[k]
                ei, hi = ei * f[:, None], hi * f[:, None]
            shaded.append((ei, hi))
        images = shaded
    e2, h2 = reflection.combine(e, h, images, scenario.reflections)
    behind = reflection.behind(scenario.reflectors, points_m)
    if behind.any():
        # Behind a plane (inside the floor or wall half-space, or the room beyond it) the
        # wall's thickness is unknown, and a thin panel can pass nearly everything: keep the
        # full direct field (conservative), except behind metal, which passes nothing.
        t = reflection.transmission_power_factor(
            scenario.reflectors, radiator.position_m, points_m[behind], scenario.frequency_hz
        )
        t = np.where(t > 0, 1.0, 0.0)
        e2[behind] = np.sum(np.abs(e[behind]) ** 2, axis=1) * t
        h2[behind] = np.sum(np.abs(h[behind]) ** 2, axis=1) * t
    return e2, h2


def evaluate(
    scenario: Scenario | PreparedScenario,
    points_m: ArrayLike,
    chunk_points: int | None = None,
    progress: object | None = None,
    *,
    memory_bytes: int | None = None,
) -> FieldResult:
    """E, H and power density of a scenario at points.

    Parameters
    ----------
    scenario : Scenario or PreparedScenario
        The validated scenario, or its prepared form (:func:`prepare`).
    points_m : array_like, shape (N, 3)
        Field points in scenario coordinates [m].
    chunk_points : int, optional
        Points per chunk; default from :func:`chunk_plan` (never more than the memory
        budget allows).
    progress : callable, optional
        Called as ``progress(done, total)`` after each chunk.
    memory_bytes : int, optional
        Memory budget of the evaluation's scratch [bytes]; see
        :func:`memory_budget_bytes` (default 1 GiB, or ``KEEPCLEAR_MEMORY_BYTES``).

    Returns
    -------
    FieldResult
    """
    pts = as_points(points_m)
    n = pts.shape[0]
    e2_avg = np.zeros(n)
    h2_avg = np.zeros(n)
    e2_peak = np.zeros(n)
    h2_peak = np.zeros(n)
    prepared = prepare(scenario)
    scenario = prepared.scenario
    terms = prepared.terms
    plan_points, radiator_bytes = chunk_plan(scenario, memory_bytes)
    step = plan_points if chunk_points is None else max(1, min(int(chunk_points), plan_points))
    step = -(-n // max(1, -(-n // step)))  # equal chunks: no small remainder
    for start in range(0, n, step):
        sl = slice(start, min(n, start + step))
        chunk = pts[sl]
        for term in terms:
            e2, h2 = _term_squares(term, scenario, chunk, radiator_bytes)
            e2_avg[sl] += term.average_weight * e2
            h2_avg[sl] += term.average_weight * h2
            e2_peak[sl] += term.peak_weight * e2
            h2_peak[sl] += term.peak_weight * h2
        cavity = _cavity_squares(prepared, chunk, radiator_bytes)
        if cavity is not None:
            mask, c2_avg, c2_peak, direct = cavity
            inner = np.flatnonzero(mask) + start
            e2_avg[inner] += c2_avg + direct[0]
            h2_avg[inner] += c2_avg / ETA0_OHM**2 + direct[1]
            e2_peak[inner] += c2_peak + direct[2]
            h2_peak[inner] += c2_peak / ETA0_OHM**2 + direct[3]
        if progress is not None:
            progress(sl.stop, n)  # type: ignore[operator]
    return _result(e2_avg, h2_avg, e2_peak, h2_peak)


def _cavity_squares(  # noqa: ANN202
    scenario: Scenario | PreparedScenario,
    pts: NDArray[np.float64],
    chunk_bytes: int = 64 * 1024**2,
):
    """Inside the enclosure: the stirred cavity field plus the sources' direct fields."""
    prepared = prepare(scenario)
    enclosure = prepared.scenario.enclosure
    cavity = prepared.cavity
    if enclosure is None or cavity is None:
        return None
    mask = enclosure.contains(pts)
    if not mask.any():
        return None
    inner = pts[mask]
    direct = [np.zeros(inner.shape[0]) for _ in range(4)]
    for s in cavity.enclosed:
        e, h = radiator_fields(s.radiator, inner, chunk_bytes)
        e2, h2 = np.sum(np.abs(e) ** 2, axis=1), np.sum(np.abs(h) ** 2, axis=1)
        direct[0] += s.duty_cycle * e2
        direct[1] += s.duty_cycle * h2
        direct[2] += e2
        direct[3] += h2
    c2_peak = cavity.power_density_w_m2 * ETA0_OHM
    return mask, c2_peak * cavity.average_ratio, c2_peak, direct


def _result(e2_avg: NDArray, h2_avg: NDArray, e2_peak: NDArray, h2_peak: NDArray) -> FieldResult:
    return FieldResult(
        e_v_m=np.sqrt(e2_avg),
        h_a_m=np.sqrt(h2_avg),
        power_density_w_m2=np.maximum(e2_avg / ETA0_OHM, ETA0_OHM * h2_avg),
        peak_e_v_m=np.sqrt(e2_peak),
        peak_h_a_m=np.sqrt(h2_peak),
        peak_power_density_w_m2=np.maximum(e2_peak / ETA0_OHM, ETA0_OHM * h2_peak),
    )


def power_density(
    scenario: Scenario | PreparedScenario, points_m: ArrayLike
) -> NDArray[np.float64]:
    """Time-averaged power density at points [W m^-2] (shortcut for searches)."""
    return evaluate(scenario, points_m).power_density_w_m2
