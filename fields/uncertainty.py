"""How sure is a keep-out distance: a seeded Monte Carlo over the scenario's inputs.

Model
-----
The ``[uncertainty]`` table gives one-sigma spreads of the inputs a practitioner knows
only roughly:

=====================  ============================================================
quantity               drawn per sample as
=====================  ============================================================
delivered power        :math:`P_s \\cdot 10^{X_s/10}`, :math:`X_s \\sim N(0, \\sigma_P)` dB,
                       one draw per source
gain                   :math:`G_t \\cdot 10^{Y_t/10}`, :math:`Y_t \\sim N(0, \\sigma_G)` dB, one
                       draw per radiating term; left out, :math:`\\sigma_G` is the model's
                       own stated gain uncertainty (``gain_uncertainty_db`` of the radiator)
reflection             :math:`|\\Gamma_k| \\to \\mathrm{clip}(|\\Gamma_k| + \\delta_k, 0, 1)`,
                       :math:`\\delta_k \\sim N(0, \\sigma_\\Gamma)`, one draw per reflector,
                       :math:`|\\Gamma_k|` its normal-incidence value; every image of
                       the plane scales by the ratio
shielding credit       :math:`SE_j \\to \\max(SE_j + \\epsilon_j, 0)`,
                       :math:`\\epsilon_j \\sim N(0, \\sigma_{SE})` dB, one draw per shield;
                       a ray's amplitude factor :math:`f` becomes
                       :math:`f^{SE'_j/SE_j}` (its credit in dB scales with the sheet's)
source position        :math:`\\mathbf r_s + \\boldsymbol\\delta_s`,
                       :math:`\\delta_{s,i} \\sim N(0, \\sigma_r)` per axis, one per source
=====================  ============================================================

The draws come from one ``numpy.random.Generator(PCG64(seed))`` in a fixed order, so
the same scenario and seed give the same samples on every machine.

Why it is cheap
---------------
The time-averaged power density is linear in each term's power and quadratic in the
image amplitudes.  For one radiating term with direct field :math:`\\mathbf E_0` and
image fields :math:`\\mathbf E_k` (shield factors applied), both combination modes of
:func:`keepclear.fields.reflection.combine` are quadratic forms in the image scale
factors :math:`a_k` (:math:`a_0 = 1`):

.. math::

    |E|^2 = \\sum_{k,l} a_k a_l\\, G_{kl}, \\qquad
    G_{kl} = \\begin{cases} \\Re(\\mathbf E_k \\cdot \\mathbf E_l^*) & \\text{coherent} \\\\
                            |\\mathbf E_k|\\,|\\mathbf E_l| & \\text{envelope} \\end{cases}

(and the same for H).  So the fields are evaluated **once**, on the keep-out search's
rays (the golden-spiral lattice, the radiators' axes, the rays along every reflector
and caps around the nominal farthest direction of each limit), sampled on the search's
radial grid out to a bound that holds the largest sample; the Gram entries
:math:`G_{kl}` are stored, and every sample is a weighted sum of them, evaluated for
blocks of samples at once.  On each ray the outermost grid sample at or above the
limit is found per sample, and the crossing beyond it is placed by log-log
interpolation (exact for the far-field :math:`1/r^2` law).

Position spread is a rigid shift of the exceedance region with its source: each
ray's crossing point moves by the displacement of the term that dominates the field
there.  This is exact for one source in free space and a documented approximation
with reflectors (the image moves with the source, mirrored) and several sources.

The grid answer is tied to the search's own answer: a sample's distance is the
nominal keep-out distance times the ratio of the sample's grid distance to the
nominal inputs' grid distance, so the grid's discretisation cancels, and a sample
whose draws are all neutral returns the nominal distance exactly.

Validity
--------
Spreads are independent and normal (in dB for power, gain and credit).  The enclosure
power balance and the cavity field scale with the enclosed sources' power draws; the
enclosure's wall and opening models are not varied.  Higher-order images get no shield
credit (as in the field orchestrator).  The 95th percentile of 1,000 samples carries a
sampling error of about 0.07 sigma; use more samples for a tighter figure.

References
----------
.. [1] JCGM 101:2008, *Evaluation of measurement data - Supplement 1 to the "Guide to
   the expression of uncertainty in measurement" - Propagation of distributions using a
   Monte Carlo method*, sec. 7 (the Monte Carlo method, coverage intervals from
   percentiles of the samples).
.. [2] M. E. O'Neill, "PCG: a family of simple fast space-efficient statistically good
   algorithms for random number generation", HMC-CS-2014-0905 (2014) (the generator).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from keepclear.antennas.base import ETA0_OHM, fibonacci_sphere

from . import limits as limits_mod
from .field import RadiatingTerm, _bounce_points, radiating_terms
from .scenario import Scenario

#: Keys of the ``[uncertainty]`` table and their defaults (``gain_db``: the model's own).
UNCERTAINTY_KEYS = (
    "power_db",
    "gain_db",
    "reflection",
    "shielding_db",
    "position_m",
    "samples",
    "seed",
)
DEFAULT_SAMPLES = 1000
DEFAULT_SEED = 1
#: Samples evaluated together (bounds the scratch: block x points x 8 bytes per array).
_SAMPLE_BLOCK = 16
#: z-value of the one-sided 95th percentile of a normal distribution.
Z95 = 1.6448536269514722


@dataclass(frozen=True)
class UncertaintySpec:
    """The ``[uncertainty]`` table: one-sigma spreads of the inputs.

    Parameters
    ----------
    power_db : float
        One sigma of each source's delivered power [dB].
    gain_db : float or None
        One sigma of each term's gain [dB]; None: each model's own
        ``gain_uncertainty_db`` (0 where a model states none).
    reflection : float
        One sigma of every reflector's :math:`|\\Gamma|` (absolute) [1].
    shielding_db : float
        One sigma of every shield's credit [dB].
    position_m : float
        One sigma of each source position, per axis [m].
    samples : int
        Number of Monte Carlo samples.
    seed : int
        Seed of the PCG64 generator.
    """

    power_db: float = 0.0
    gain_db: float | None = None
    reflection: float = 0.0
    shielding_db: float = 0.0
    position_m: float = 0.0
    samples: int = DEFAULT_SAMPLES
    seed: int = DEFAULT_SEED

    def as_dict(self) -> dict[str, object]:
        """The table as given, with defaults filled in (``gain_db`` None: the model's)."""
        return {k: getattr(self, k) for k in UNCERTAINTY_KEYS}


def gain_sigma_db(spec: UncertaintySpec, term: RadiatingTerm) -> float:
    """One sigma of a term's gain [dB]: the table's, else the model's stated figure."""
    if spec.gain_db is not None:
        return float(spec.gain_db)
    return float(term.radiator.gain_uncertainty_db)


@dataclass(frozen=True)
class Draws:
    """The samples of every uncertain input, shape (samples, ...) each.

    ``term_average`` and ``term_peak`` are the factors on each radiating term's
    time-averaged and while-on |E|^2 (power and gain draws combined); ``cavity_*`` the
    factors on the enclosure's cavity field; ``image`` the amplitude factor of each
    image (in the order of :func:`keepclear.fields.reflection.image_labels`);
    ``shield_exponent`` the exponent on each shield's amplitude factor; ``shift_m`` each
    term's displacement; ``neutral`` marks samples whose draws are all neutral.
    """

    term_average: NDArray[np.float64]
    term_peak: NDArray[np.float64]
    cavity_average: NDArray[np.float64]
    cavity_peak: NDArray[np.float64]
    image: NDArray[np.float64]
    shield_exponent: NDArray[np.float64]
    shift_m: NDArray[np.float64]
    neutral: NDArray[np.bool_]

    @property
    def samples(self) -> int:
        """Number of samples."""
        return int(self.term_average.shape[0])


def _image_chains(n_reflectors: int) -> list[tuple[int, ...]]:
    """Reflectors each image bounces on, in the order of ``image_labels``."""
    chains: list[tuple[int, ...]] = [(j,) for j in range(n_reflectors)]
    if n_reflectors > 1:
        chains += [(i, j) for i in range(n_reflectors) for j in range(n_reflectors) if i != j]
    return chains


def _enclosed_shares(scenario: Scenario) -> tuple[NDArray[np.bool_], NDArray[np.float64]]:
    """Which sources sit inside the enclosure, and their shares P_s / sum P."""
    n = len(scenario.sources)
    inside = np.zeros(n, dtype=bool)
    if scenario.enclosure is not None:
        inside = scenario.enclosure.contains(np.array([s.position_m for s in scenario.sources]))
    powers = np.array([s.power_w for s in scenario.sources]) * inside
    total = float(powers.sum())
    return inside, (powers / total if total > 0 else powers)


def draw_samples(scenario: Scenario, spec: UncertaintySpec) -> Draws:
    """Draw every uncertain input, in a fixed order, from one seeded PCG64 generator.

    Parameters
    ----------
    scenario : Scenario
    spec : UncertaintySpec

    Returns
    -------
    Draws
    """
    rng = np.random.Generator(np.random.PCG64(spec.seed))
    m = int(spec.samples)
    sources = scenario.sources
    terms = radiating_terms(scenario)
    n_src, n_terms = len(sources), len(terms)
    n_refl, n_shields = len(scenario.reflectors), len(scenario.shields)
    # Fixed order of the draws: power, gain, reflection, shielding, position.
    x_power = rng.standard_normal((m, n_src)) * spec.power_db
    x_gain = rng.standard_normal((m, n_terms)) * np.array([gain_sigma_db(spec, t) for t in terms])
    x_refl = rng.standard_normal((m, n_refl)) * spec.reflection
    x_shield = rng.standard_normal((m, n_shields)) * spec.shielding_db
    x_pos = rng.standard_normal((m, n_src, 3)) * spec.position_m

    power = 10.0 ** (x_power / 10.0)
    gain = 10.0 ** (x_gain / 10.0)
    inside, shares = _enclosed_shares(scenario)
    duty = np.array([s.duty_cycle for s in sources])
    free = [i for i in range(n_src) if not inside[i]]
    term_avg = np.empty((m, n_terms))
    term_peak = np.empty((m, n_terms))
    shift = np.zeros((m, n_terms, 3))
    # Terms: the free sources in scenario order, then the enclosure's leak radiators.
    for t in range(n_terms):
        if t < len(free):
            s = free[t]
            term_avg[:, t] = power[:, s] * gain[:, t]
            term_peak[:, t] = power[:, s] * gain[:, t]
            shift[:, t, :] = x_pos[:, s, :]
        else:
            w = shares * duty
            avg = (power @ w) / w.sum() if w.sum() > 0 else np.ones(m)
            peak = (power @ shares) / shares.sum() if shares.sum() > 0 else np.ones(m)
            term_avg[:, t] = avg * gain[:, t]
            term_peak[:, t] = peak * gain[:, t]
    w = shares * duty
    cavity_avg = (power @ w) / w.sum() if w.sum() > 0 else np.ones(m)
    cavity_peak = (power @ shares) / shares.sum() if shares.sum() > 0 else np.ones(m)

    gammas = np.array(
        [
            abs(complex(r.normal_incidence_coefficient(scenario.frequency_hz)))
            for r in scenario.reflectors
        ]
    )
    refl_factor = np.ones((m, n_refl))
    for k in range(n_refl):
        if gammas[k] > 0:
            refl_factor[:, k] = np.clip(gammas[k] + x_refl[:, k], 0.0, 1.0) / gammas[k]
    chains = _image_chains(n_refl)
    image = np.ones((m, len(chains)))
    for c, chain in enumerate(chains):
        for k in chain:
            image[:, c] *= refl_factor[:, k]

    exponent = np.ones((m, n_shields))
    for j, shield in enumerate(scenario.shields):
        se = float(shield.normal_incidence_se_db())
        if se > 0:
            exponent[:, j] = np.maximum(se + x_shield[:, j], 0.0) / se
    neutral = (
        np.all(term_avg == 1.0, axis=1)
        & np.all(term_peak == 1.0, axis=1)
        & np.all(image == 1.0, axis=1)
        & np.all(exponent == 1.0, axis=1)
        & np.all(shift == 0.0, axis=(1, 2))
        & (cavity_avg == 1.0)
        & (cavity_peak == 1.0)
    )
    return Draws(term_avg, term_peak, cavity_avg, cavity_peak, image, exponent, shift, neutral)


# ------------------------------------------------------------------ decomposition
@dataclass
class TermParts:
    """One term's field at N points, split for re-weighting.

    ``pairs`` lists the component pairs (k, l), k <= l (0 the direct field, k >= 1 the
    images); ``e_gram`` and ``h_gram`` hold, per pair, the Gram entry at each point
    (off-diagonal entries doubled), (pairs, N); ``log_shield`` the natural log of each
    shield's amplitude factor per component, (components, shields, N), or None.
    """

    pairs: list[tuple[int, int]]
    e_gram: NDArray[np.float64]
    h_gram: NDArray[np.float64]
    log_shield: NDArray[np.float64] | None


@dataclass
class Decomposition:
    """Every term's parts at N points, and the cavity field inside an enclosure."""

    points_m: NDArray[np.float64]
    terms: list[TermParts]
    average_weight: NDArray[np.float64]
    peak_weight: NDArray[np.float64]
    cavity: tuple[NDArray[np.float64], ...] | None = None
    dominant: NDArray[np.intp] = field(default_factory=lambda: np.zeros(0, dtype=np.intp))

    def subset(self, index: NDArray[np.intp]) -> Decomposition:
        """The same parts at a subset of the points (``index`` into the N points)."""
        terms = [
            TermParts(
                p.pairs,
                p.e_gram[:, index],
                p.h_gram[:, index],
                None if p.log_shield is None else p.log_shield[:, :, index],
            )
            for p in self.terms
        ]
        cavity = None
        if self.cavity is not None:
            mask = self.cavity[0]
            position = np.cumsum(mask) - 1  # index of each masked point in the cavity arrays
            keep = mask[index]
            inner = position[index[keep]]
            cavity = (keep, *(c[inner] for c in self.cavity[1:]))
        return Decomposition(
            self.points_m[index],
            terms,
            self.average_weight,
            self.peak_weight,
            cavity,
            self.dominant[index],
        )


def _concatenate(parts: Sequence[Decomposition]) -> Decomposition:
    """One decomposition of the points of several, in their order (each point's parts kept)."""
    first = parts[0]
    terms = [
        TermParts(
            p.pairs,
            np.concatenate([d.terms[t].e_gram for d in parts], axis=1),
            np.concatenate([d.terms[t].h_gram for d in parts], axis=1),
            None
            if p.log_shield is None
            else np.concatenate([d.terms[t].log_shield for d in parts], axis=2),  # type: ignore[misc]
        )
        for t, p in enumerate(first.terms)
    ]
    cavity = None
    if first.cavity is not None:
        cavity = tuple(
            np.concatenate([d.cavity[c] for d in parts], axis=0)  # type: ignore[index]
            for c in range(len(first.cavity))
        )
    return Decomposition(
        np.vstack([d.points_m for d in parts]),
        terms,
        first.average_weight,
        first.peak_weight,
        cavity,
        np.concatenate([d.dominant for d in parts]),
    )


def _gram(
    fields: list[NDArray[np.complex128]], mode: str
) -> tuple[list[tuple[int, int]], NDArray[np.float64]]:
    k = len(fields)
    pairs = [(a, b) for a in range(k) for b in range(a, k)]
    out = np.empty((len(pairs), fields[0].shape[0]))
    if mode == "coherent":
        for p, (a, b) in enumerate(pairs):
            g = np.real(np.sum(fields[a] * np.conj(fields[b]), axis=1))
            out[p] = g if a == b else 2.0 * g
    else:
        mags = [np.linalg.norm(f, axis=1) for f in fields]
        for p, (a, b) in enumerate(pairs):
            out[p] = mags[a] * mags[b] * (1.0 if a == b else 2.0)
    return pairs, out


def _term_parts(term: RadiatingTerm, scenario: Scenario, pts: NDArray[np.float64]) -> TermParts:
    """Direct and image fields of one term, shield factors per shield kept apart.

    Mirrors :func:`keepclear.fields.field._term_squares` (same models, same shield and
    behind-the-plane rules); tested to reproduce its answer with neutral factors.
    """
    from . import reflection

    radiator = term.radiator
    e, h = radiator.fields(pts)
    n = pts.shape[0]
    refl = scenario.reflectors
    n_first = len(refl)
    images: list[tuple[NDArray, NDArray]] = []
    if refl:
        order = 2 if len(refl) > 1 else 1
        images = list(
            reflection.reflected_fields(radiator, refl, pts, scenario.frequency_hz, order)
        )
    n_comp = 1 + len(images)
    if reflection.has_obstacles(refl):
        # finite metal plates shade the direct ray and the first-order legs (not varied)
        f_hz, origin = scenario.frequency_hz, radiator.position_m
        spread = 0.5 * radiator.largest_dimension_m
        f0 = reflection.plate_obstacle_factor(refl, origin, pts, f_hz, (), spread)
        e, h = e * f0[:, None], h * f0[:, None]
        for k in range(n_first):
            q = _bounce_points(refl[k], origin, pts)
            fk = reflection.plate_obstacle_factor(refl, origin, q, f_hz, (k,), spread)
            fk = fk * reflection.plate_obstacle_factor(refl, q, pts, f_hz, (k,))
            images[k] = (images[k][0] * fk[:, None], images[k][1] * fk[:, None])
    log_shield = None
    if scenario.shields:
        source = radiator.position_m
        extent = 0.5 * radiator.largest_dimension_m
        bounces = [_bounce_points(refl[k], source, pts) for k in range(n_first)]
        log_shield = np.zeros((n_comp, len(scenario.shields), n))
        for j, shield in enumerate(scenario.shields):
            log_shield[0, j] = np.log(shield.amplitude_factor(source, pts, source_extent_m=extent))
            for k in range(n_first):
                f = shield.amplitude_factor(source, bounces[k], source_extent_m=extent)
                f = f * shield.amplitude_factor(bounces[k], pts)
                log_shield[1 + k, j] = np.log(f)
        total = np.exp(log_shield.sum(axis=1))  # (components, N)
        e = e * total[0][:, None]
        h = h * total[0][:, None]
        images = [
            (ei * total[1 + k][:, None], hi * total[1 + k][:, None]) if k < n_first else (ei, hi)
            for k, (ei, hi) in enumerate(images)
        ]
    e_fields = [e] + [ei for ei, _ in images]
    h_fields = [h] + [hi for _, hi in images]
    pairs, e_gram = _gram(e_fields, scenario.reflections)
    _, h_gram = _gram(h_fields, scenario.reflections)
    if refl:
        back = reflection.behind(refl, pts)
        if back.any():
            t = reflection.transmission_power_factor(
                refl, radiator.position_m, pts[back], scenario.frequency_hz
            )
            t = np.where(t > 0, 1.0, 0.0)
            e_gram[:, back] = 0.0
            h_gram[:, back] = 0.0
            e_gram[0, back] = np.sum(np.abs(e[back]) ** 2, axis=1) * t
            h_gram[0, back] = np.sum(np.abs(h[back]) ** 2, axis=1) * t
    return TermParts(pairs, e_gram, h_gram, log_shield)


def decompose(scenario: Scenario, points_m: NDArray[np.float64]) -> Decomposition:
    """The parts of every term at points, for re-weighting by the samples.

    Parameters
    ----------
    scenario : Scenario
    points_m : ndarray, shape (N, 3)
        Field points [m].

    Returns
    -------
    Decomposition
    """
    from .field import _cavity_squares

    pts = np.asarray(points_m, dtype=float)
    terms = radiating_terms(scenario)
    parts = [_term_parts(t, scenario, pts) for t in terms]
    cavity = None
    c = _cavity_squares(scenario, pts)
    if c is not None:
        mask, c2_avg, c2_peak, direct = c
        cavity = (mask, c2_avg, c2_peak, *direct)
    if parts:
        strength = np.array(
            [t.average_weight * p.e_gram.sum(axis=0) for t, p in zip(terms, parts, strict=True)]
        )
        dominant = np.argmax(strength, axis=0)
    else:
        dominant = np.zeros(pts.shape[0], dtype=np.intp)
    return Decomposition(
        pts,
        parts,
        np.array([t.average_weight for t in terms]),
        np.array([t.peak_weight for t in terms]),
        cavity,
        dominant,
    )


def sample_squares(
    dec: Decomposition, draws: Draws, rows: slice | NDArray[np.intp], *, peak: bool = False
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """|E|^2 and |H|^2 for a block of samples at every point, (block, N) each.

    Parameters
    ----------
    dec : Decomposition
    draws : Draws
    rows : slice or ndarray of int
        The samples of the block.
    peak : bool
        While radiating (every source on) instead of time-averaged.
    """
    chains_factor = draws.image[rows]  # (b, images)
    m = chains_factor.shape[0]
    n = dec.points_m.shape[0]
    e2 = np.zeros((m, n))
    h2 = np.zeros((m, n))
    weights = dec.peak_weight if peak else dec.average_weight
    factors = draws.term_peak[rows] if peak else draws.term_average[rows]
    for t, part in enumerate(dec.terms):
        n_comp = 1 + chains_factor.shape[1]
        amp = np.ones((m, n_comp))
        amp[:, 1:] = chains_factor
        scale = None
        if part.log_shield is not None and draws.shield_exponent.shape[1]:
            extra = draws.shield_exponent[rows] - 1.0  # (b, shields)
            if np.any(extra != 0.0):
                # per component and point: exp(sum_j (gamma_j - 1) ln f_j)
                scale = np.exp(np.einsum("bs,csn->bcn", extra, part.log_shield))
        for p, (a, b) in enumerate(part.pairs):
            coef = weights[t] * factors[:, t] * amp[:, a] * amp[:, b]
            if scale is None:
                e2 += coef[:, None] * part.e_gram[p][None, :]
                h2 += coef[:, None] * part.h_gram[p][None, :]
            else:
                s = scale[:, a, :] * scale[:, b, :]
                e2 += coef[:, None] * s * part.e_gram[p][None, :]
                h2 += coef[:, None] * s * part.h_gram[p][None, :]
    if dec.cavity is not None:
        mask, c2_avg, c2_peak, d_e_avg, d_h_avg, d_e_peak, d_h_peak = dec.cavity
        idx = np.flatnonzero(mask)
        f = (draws.cavity_peak if peak else draws.cavity_average)[rows][:, None]
        if peak:
            e2[:, idx] += f * (c2_peak + d_e_peak)
            h2[:, idx] += f * (c2_peak / ETA0_OHM**2 + d_h_peak)
        else:
            e2[:, idx] += f * (c2_avg + d_e_avg)
            h2[:, idx] += f * (c2_avg / ETA0_OHM**2 + d_h_avg)
    return e2, h2


def uses_peak(value: limits_mod.LimitValue) -> bool:
    """Whether a limit is compared with the field while radiating (a device threshold)."""
    return str(getattr(value, "basis", "time-averaged")) == "while-on"


def sample_quotients(
    dec: Decomposition,
    draws: Draws,
    rows: slice | NDArray[np.intp],
    values: Sequence[limits_mod.LimitValue],
) -> list[NDArray[np.float64]]:
    """Exposure quotient of each limit for a block of samples, (block, N) each.

    The quotient of :func:`keepclear.fields.limits.quotient`,
    ``max(S/S_lim, E^2/E_lim^2, H^2/H_lim^2)`` over the quantities the limit gives, with
    ``S = max(E^2/eta0, eta0 H^2)``; while-on fields for device thresholds.
    """
    cache: dict[bool, tuple[NDArray, NDArray]] = {}
    out = []
    for v in values:
        pk = uses_peak(v)
        if pk not in cache:
            cache[pk] = sample_squares(dec, draws, rows, peak=pk)
        out.append(_quotient(v, *cache[pk]))
    return out


def _quotient(
    v: limits_mod.LimitValue, e2: NDArray[np.float64], h2: NDArray[np.float64]
) -> NDArray[np.float64]:
    """The exposure quotient of one limit from |E|^2 and |H|^2 (see :func:`sample_quotients`).

    Non-decreasing in both |E|^2 and |H|^2.
    """
    if v.kind == "device" and v.power_density_derived and v.e_v_m is not None:
        # a device threshold given as an E field compares E alone (limits.quotient)
        return e2 * (1.0 / v.e_v_m**2)
    q = np.maximum(
        e2 * (1.0 / (ETA0_OHM * v.power_density_w_m2)), h2 * (ETA0_OHM / v.power_density_w_m2)
    )
    if v.e_v_m is not None:
        q = np.maximum(q, e2 * (1.0 / v.e_v_m**2))
    if v.h_a_m is not None:
        q = np.maximum(q, h2 * (1.0 / v.h_a_m**2))
    return q


#: Relative widening of the quotient bounds of :func:`bound_quotients` (rounding of sums).
_BOUND_SAFETY = 1e-9
#: Relative margin of the comparisons that leave a ray out of the spread (rounding of the
#: distances computed from the crossings).
_RAY_SAFETY = 1e-9


def bound_quotients(
    dec: Decomposition,
    draws: Draws,
    values: Sequence[limits_mod.LimitValue],
    rows: NDArray[np.intp] | slice = slice(None),
    with_nominal: bool = True,
) -> tuple[list[NDArray[np.float64]], list[NDArray[np.float64]]] | None:
    """Pointwise bounds, over the samples and the nominal field, of each limit's quotient.

    Every sample's |E|^2 (and |H|^2) is a sum over the terms and their component pairs of
    ``weight * factor * amp_a * amp_b * gram`` (and the cavity's ``factor * c2``).  Where
    every Gram entry is >= 0 (envelope mode or no reflector: the caller checks) and no
    shield credit is spread, taking each coefficient's smallest (largest) value over the
    samples and the nominal field (every factor one) gives a lower (upper) bound of
    every sample's and of the nominal |E|^2 and |H|^2 at every point, and the quotient
    is non-decreasing in both.  The bounds are widened by :data:`_BOUND_SAFETY` for the
    rounding of the sums.  None where the bounds do not hold (a shield-credit spread).
    ``rows`` restricts the samples bounded; without ``with_nominal`` the nominal field is
    left out of the bounds.

    Returns
    -------
    (lower, upper) : lists of ndarray, shape (N,) each
        Per limit, in the order of ``values``.
    """
    if np.any(draws.shield_exponent != 1.0):
        return None
    image = draws.image[rows]
    amp = np.concatenate([np.ones((image.shape[0], 1)), image], axis=1)
    one = 1.0 if with_nominal else np.nan  # np.fmin/np.fmax ignore NaN
    lower: list[NDArray[np.float64]] = []
    upper: list[NDArray[np.float64]] = []
    cache: dict[bool, tuple[NDArray, NDArray, NDArray, NDArray]] = {}
    n = dec.points_m.shape[0]
    for v in values:
        pk = uses_peak(v)
        if pk not in cache:
            weights = dec.peak_weight if pk else dec.average_weight
            factors = (draws.term_peak if pk else draws.term_average)[rows]
            e_lo, h_lo, e_hi, h_hi = (np.zeros(n) for _ in range(4))
            for t, part in enumerate(dec.terms):
                for p, (a, b) in enumerate(part.pairs):
                    coef = factors[:, t] * amp[:, a] * amp[:, b]
                    c_lo = weights[t] * float(np.fmin(one, coef.min()))
                    c_hi = weights[t] * float(np.fmax(one, coef.max()))
                    e_lo += c_lo * part.e_gram[p]
                    h_lo += c_lo * part.h_gram[p]
                    e_hi += c_hi * part.e_gram[p]
                    h_hi += c_hi * part.h_gram[p]
            if dec.cavity is not None:
                mask, c2_avg, c2_peak, d_e_avg, d_h_avg, d_e_peak, d_h_peak = dec.cavity
                idx = np.flatnonzero(mask)
                f = (draws.cavity_peak if pk else draws.cavity_average)[rows]
                f_lo = float(np.fmin(one, f.min()))
                f_hi = float(np.fmax(one, f.max()))
                c2, d_e, d_h = (c2_peak, d_e_peak, d_h_peak) if pk else (c2_avg, d_e_avg, d_h_avg)
                for e2, h2, f_k in ((e_lo, h_lo, f_lo), (e_hi, h_hi, f_hi)):
                    e2[idx] += f_k * (c2 + d_e)
                    h2[idx] += f_k * (c2 / ETA0_OHM**2 + d_h)
            cache[pk] = (e_lo, h_lo, e_hi, h_hi)
        e_lo, h_lo, e_hi, h_hi = cache[pk]
        lower.append(_quotient(v, e_lo, h_lo) * (1.0 - _BOUND_SAFETY))
        upper.append(_quotient(v, e_hi, h_hi) * (1.0 + _BOUND_SAFETY))
    return lower, upper


# ---------------------------------------------------------------- keep-out samples
@dataclass(frozen=True)
class KeepoutSpread:
    """Keep-out distance over the samples for one limit.

    Parameters
    ----------
    limit_id : str
    distance_m : float
        The nominal keep-out distance [m].
    samples_m : ndarray, shape (samples,)
        The distance of each sample [m].
    """

    limit_id: str
    distance_m: float
    samples_m: NDArray[np.float64]

    @property
    def median_m(self) -> float:
        """Median of the samples [m]."""
        return float(np.median(self.samples_m))

    @property
    def p95_m(self) -> float:
        """95th percentile of the samples [m] (linear interpolation between order statistics)."""
        return float(np.percentile(self.samples_m, 95.0))


def _ray_set(
    scenario: Scenario, directions_hint: Sequence[NDArray[np.float64] | None], n_directions: int
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Rays of the keep-out search: lattice, axes, along each plane, caps about the hints."""
    from .keepout import PLANE_AZIMUTHS, _cap, _plane_rays, _Search, _special_directions

    values = [scenario.limit_value(i) for i in scenario.limit_ids[:1]]
    from .keepout import _Row

    search = _Search(scenario, values, [_Row(0, 1.0, False)])
    dirs = [fibonacci_sphere(n_directions), _special_directions(search)]
    spacing = np.sqrt(4 * np.pi / n_directions)
    for d in directions_hint:
        if d is not None:
            dirs.append(_cap(np.asarray(d, dtype=float), spacing, 24))
            dirs.append(_cap(np.asarray(d, dtype=float), spacing / 3, 12))
    centre_dirs = np.vstack(dirs)
    origins = [np.tile(scenario.centre_m, (len(centre_dirs), 1))]
    directions = [centre_dirs]
    azimuths = np.linspace(0.0, 2 * np.pi, PLANE_AZIMUTHS, endpoint=False)
    for reflector in scenario.reflectors:
        o, d = _plane_rays(search, reflector, azimuths)
        origins.append(o)
        directions.append(d)
    return np.vstack(origins), np.vstack(directions)


def _reach_m(scenario: Scenario, values: Sequence[limits_mod.LimitValue], draws: Draws) -> float:
    """Outer end of the radial grid: a far-field bound that holds every sample [m].

    Every plane reflecting fully (the envelope (1 + n + n(n-1))^2), no shield credit,
    and the largest power-and-gain factor of any sample on every term.
    """
    from .keepout import _effective_threshold_w_m2

    terms = radiating_terms(scenario)
    n = len(scenario.reflectors)
    envelope = float((1 + n + (n * (n - 1) if n > 1 else 0)) ** 2)
    factor = float(
        max(np.max(draws.term_peak, initial=1.0), np.max(draws.term_average, initial=1.0))
    )
    threshold = min(_effective_threshold_w_m2(v) for v in values)
    centre = scenario.centre_m
    shift = float(np.max(np.abs(draws.shift_m), initial=0.0)) * np.sqrt(3.0)
    r = 0.5
    for t in terms:
        rad = t.radiator
        offset = float(np.linalg.norm(rad.position_m - centre))
        bound = np.sqrt(envelope * factor * rad.power_w * rad.max_gain() / (4 * np.pi * threshold))
        r = max(r, offset + max(bound, 2 * rad.far_field_distance_m) + rad.largest_dimension_m)
    return 1.3 * r + shift


def _crossings(
    q: NDArray[np.float64], radii: NDArray[np.float64], last: NDArray[np.bool_]
) -> tuple[NDArray[np.float64], NDArray[np.bool_], NDArray[np.intp]]:
    """Outer crossing radius of each (sample, ray), from q of shape (b, rays, W).

    ``radii`` (rays, W) are the radii of the samples along each ray, ``last`` marks the
    grid's outermost sample.  The outermost sample at or above one is kept; the
    crossing beyond it is placed by log-log interpolation (the far-field 1/r^2 law
    exactly); past the grid's end by that law.  Returns the radius (0 where never
    reached), whether it was reached, and the index of the sample kept.
    """
    above = q >= 1.0
    hit = above.any(axis=2)
    w = q.shape[2]
    idx = w - 1 - np.argmax(above[:, :, ::-1], axis=2)
    idx = np.where(hit, idx, 0)
    nxt = np.minimum(idx + 1, w - 1)
    q_in = np.take_along_axis(q, idx[..., None], axis=2)[..., 0]
    q_out = np.take_along_axis(q, nxt[..., None], axis=2)[..., 0]
    rr = np.broadcast_to(radii[None, :, :], q.shape)
    r_in = np.take_along_axis(rr, idx[..., None], axis=2)[..., 0]
    r_out = np.take_along_axis(rr, nxt[..., None], axis=2)[..., 0]
    at_end = np.take_along_axis(np.broadcast_to(last[None], q.shape), idx[..., None], axis=2)[
        ..., 0
    ]
    ok = (q_out > 0) & (q_in > q_out) & (r_out > r_in) & ~at_end
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(
            ok,
            np.log(q_in / np.where(ok, q_out, 1.0)) / np.log(np.where(ok, r_out / r_in, 2.0)),
            1.0,
        )
        r_cross = np.where(ok, r_in * np.exp(np.log(np.maximum(q_in, 1.0)) / slope), r_out)
    r_cross = np.where(at_end, r_in * np.sqrt(np.maximum(q_in, 1.0)), np.minimum(r_cross, r_out))
    r_cross = np.maximum(r_cross, r_in)
    return np.where(hit, r_cross, 0.0), hit, idx


def _factor_bounds(draws: Draws) -> tuple[float, float] | None:
    """Smallest and largest factor any sample puts on any Gram entry, or None.

    None where no such bound holds pointwise: a shield-credit spread (its factor varies
    from point to point).  The bounds hold where every Gram entry is >= 0 (envelope
    mode, or no reflector); the caller checks that.
    """
    if np.any(draws.shield_exponent != 1.0):
        return None
    amp = np.concatenate([np.ones((draws.samples, 1)), draws.image], axis=1)
    hi_amp, lo_amp = np.max(amp, axis=1) ** 2, np.min(amp, axis=1) ** 2
    f = np.concatenate(
        [
            draws.term_average,
            draws.term_peak,
            draws.cavity_average[:, None],
            draws.cavity_peak[:, None],
        ],
        axis=1,
    )
    lo = float(np.min(np.min(f, axis=1) * lo_amp))
    hi = float(np.max(np.max(f, axis=1) * hi_amp))
    return lo, hi


def _outermost_above(q: NDArray[np.float64]) -> NDArray[np.intp]:
    """Index of the outermost sample at or above one on each ray (rays, W); -1 where none."""
    above = q >= 1.0
    last = q.shape[1] - 1 - np.argmax(above[:, ::-1], axis=1)
    return np.where(above.any(axis=1), last, -1)


@dataclass
class _Swept:
    """The nominal quotients and decomposed points of the spread's rays (see :func:`_sweep`).

    ``dec`` holds the decomposed points; ``row[ray * n_r + i]`` is the position of the
    ray's sample ``i`` in it (-1 where not decomposed); ``q0`` the nominal quotient of each
    limit, (limits, rays, n_r), zero where not decomposed; ``lo`` and ``hi`` (limits,
    rays) the outermost sample where the lower and the upper bound of the quotient reach
    one (-1 where none), or None without bounds; ``dropped`` the (limit, ray) pairs that
    cannot hold the farthest crossing of any sample.
    """

    dec: Decomposition
    row: NDArray[np.intp]
    q0: NDArray[np.float64]
    lo: NDArray[np.intp] | None
    hi: NDArray[np.intp] | None
    dropped: NDArray[np.bool_]


def _sweep(
    scenario: Scenario,
    origins: NDArray[np.float64],
    directions: NDArray[np.float64],
    radii: NDArray[np.float64],
    values: Sequence[limits_mod.LimitValue],
    draws: Draws,
    coherent: bool,
    bounded: bool = True,
) -> _Swept:
    """Decompose the rays' samples from the outside in, only as far in as the spread needs.

    Where the quotient has pointwise bounds over the samples and the nominal field
    (:func:`bound_quotients`: no coherent reflections, no shield-credit spread), on each
    ray (index ``i`` along it):

    * every sample's outermost exceedance, and the nominal one, lies between ``lo``, the
      outermost ``i`` where the lower bound reaches one, and ``hi``, the outermost where
      the upper bound does; its crossing lies between ``radii[lo]`` and ``radii[hi + 1]``.
      Only the samples from ``lo`` outwards are read, so the samples inside ``lo`` are
      never decomposed: the rays are decomposed :data:`keepout.RADIAL_BLOCK` radii a pass
      from the outside in, and a ray is left once ``lo`` is found for every limit (the
      samples inside are the costly ones, next to the sources).
    * a sample's crossing on the ray ends at most ``|origin - centre| + radii[hi + 1] +
      s`` from the centre (``s`` the largest position shift of any sample; while ``hi``
      is not found, ``radii[start]``, the innermost radius decomposed, stands for
      ``radii[hi + 1]``), and on a ray where ``lo`` is found at least ``radii[lo] -
      |origin - centre| - s``.  Every sample's keep-out is the largest end over the rays,
      so a ray whose upper bound is below some ray's lower bound is never the farthest
      for any sample, nor for the nominal field: it is left for that limit (``dropped``).
      A ray whose ``hi`` is the grid's last sample (where the crossing is extrapolated
      beyond the grid) is never dropped.

    The decomposition of a point does not depend on the other points decomposed with
    it, so the answers are those of decomposing every sample of every ray.  Without the
    bounds (or with ``bounded`` false: the reference the tests compare with) every sample
    is decomposed.
    """
    from .keepout import RADIAL_BLOCK

    n_rays, n_r, n_lim = len(directions), radii.size, len(values)
    pts = (origins[:, None, :] + directions[:, None, :] * radii[None, :, None]).reshape(-1, 3)
    neutral = _neutral_like(draws)
    no_drop = np.zeros((n_lim, n_rays), dtype=bool)
    if not bounded or coherent or np.any(draws.shield_exponent != 1.0):
        dec = decompose(scenario, pts)
        q0 = np.array([q[0] for q in sample_quotients(dec, neutral, slice(0, 1), values)])
        return _Swept(
            dec, np.arange(n_rays * n_r), q0.reshape(n_lim, n_rays, n_r), None, None, no_drop
        )
    shift_m = float(np.max(np.linalg.norm(draws.shift_m, axis=2), initial=0.0))
    q0 = np.zeros((n_lim, n_rays, n_r))
    lo = np.full((n_lim, n_rays), -1, dtype=np.intp)
    hi = np.full((n_lim, n_rays), -1, dtype=np.intp)
    dropped = no_drop.copy()
    offsets = np.linalg.norm(origins - scenario.centre_m, axis=1)
    parts: list[Decomposition] = []
    flats: list[NDArray[np.intp]] = []
    open_rays = np.arange(n_rays)
    stop = n_r
    while stop > 0 and open_rays.size:
        start = max(0, stop - RADIAL_BLOCK)
        width = stop - start
        flat = (open_rays[:, None] * n_r + np.arange(start, stop)[None, :]).ravel()
        dec = decompose(scenario, pts[flat])
        parts.append(dec)
        flats.append(flat)
        shape = (n_lim, open_rays.size, width)
        block = np.array([q[0] for q in sample_quotients(dec, neutral, slice(0, 1), values)])
        q0[:, open_rays, start:stop] = block.reshape(shape)
        bounds = bound_quotients(dec, draws, values)
        assert bounds is not None
        for outer, bound in ((lo, bounds[0]), (hi, bounds[1])):
            above = np.array(bound).reshape(shape) >= 1.0
            index = start + width - 1 - np.argmax(above[:, :, ::-1], axis=2)
            current = outer[:, open_rays]
            outer[:, open_rays] = np.where((current < 0) & above.any(axis=2), index, current)
        found = lo >= 0
        lower = np.where(found, radii[np.maximum(lo, 0)] - offsets[None, :] - shift_m, -np.inf)
        reach = np.where(hi >= 0, radii[np.minimum(hi + 1, n_r - 1)], radii[start])
        upper = np.where(hi == n_r - 1, np.inf, offsets[None, :] + reach + shift_m)
        best = lower.max(axis=1, initial=-np.inf)
        dropped |= ~found & (upper * (1 + _RAY_SAFETY) < (best * (1 - _RAY_SAFETY))[:, None])
        done = found | dropped
        open_rays = open_rays[~done[:, open_rays].all(axis=0)]
        stop = start
    flat_all = np.concatenate(flats)
    row = np.full(n_rays * n_r, -1, dtype=np.intp)
    row[flat_all] = np.arange(flat_all.size)
    return _Swept(_concatenate(parts), row, q0, lo, hi, dropped)


def _neutral_like(draws: Draws) -> Draws:
    """A single sample of the same shapes with every factor neutral (the nominal field)."""
    return Draws(
        np.ones((1, draws.term_average.shape[1])),
        np.ones((1, draws.term_peak.shape[1])),
        np.ones(1),
        np.ones(1),
        np.ones((1, draws.image.shape[1])),
        np.ones((1, draws.shield_exponent.shape[1])),
        np.zeros((1, draws.shift_m.shape[1], 3)),
        np.ones(1, dtype=bool),
    )


#: Samples re-weighted together in the keep-out spread (each group has its own bounds).
SAMPLE_GROUP = 64


def _sample_blocks(draws: Draws, peak: bool) -> list[NDArray[np.intp]]:
    """The samples in groups of :data:`SAMPLE_GROUP`, sorted by their overall term factor.

    Samples of similar factors have tight bounds together (narrow bands along the rays);
    the grouping changes the work, not the answers.
    """
    factors = draws.term_peak if peak else draws.term_average
    key = factors.sum(axis=1) if factors.shape[1] else np.zeros(draws.samples)
    order = np.argsort(key, kind="stable")
    return [order[b : b + SAMPLE_GROUP] for b in range(0, draws.samples, SAMPLE_GROUP)]


def _band_points(
    rays: NDArray[np.intp], lo: NDArray[np.intp], width: NDArray[np.intp], n_r: int
) -> NDArray[np.intp]:
    """Flat indices (ray * n_r + i) of the samples ``lo .. lo + width - 1`` of each ray."""
    if rays.size == 0:
        return np.zeros(0, dtype=np.intp)
    counts = width[rays]
    starts = np.repeat(rays * n_r + lo[rays], counts)
    steps = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
    return starts + steps


def _farthest_in_block(
    swept: _Swept,
    sub: Decomposition,
    band: NDArray[np.intp],
    draws: Draws,
    v: limits_mod.LimitValue,
    block: NDArray[np.intp],
    rays: NDArray[np.intp],
    lo: NDArray[np.intp],
    hi: NDArray[np.intp],
    offsets: NDArray[np.float64],
    origins: NDArray[np.float64],
    directions: NDArray[np.float64],
    radii: NDArray[np.float64],
    centre: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Keep-out of each sample of a group: :func:`_farthest` on the group's own bands.

    The group's bounds (:func:`bound_quotients` over its samples alone) narrow each ray's
    band to ``lo_b .. hi_b + 1`` (within the band of all samples: both bounds hold for
    every sample of the group), and a ray whose farthest possible end for the group,
    ``|origin - centre| + radii[hi_b + 1] + s_b``, is below some ray's nearest,
    ``radii[lo_b] - |origin - centre| - s_b`` (``s_b`` the group's largest position
    shift), is not the farthest for any of its samples and is left (see :func:`_sweep`
    for the same argument over all samples).  The answers are those of :func:`_farthest`
    on the bands of all samples.
    """
    n_rays, n_r = len(directions), radii.size
    bounds = bound_quotients(sub, draws, [v], rows=block, with_nominal=False)
    assert bounds is not None
    lo_b, hi_b = lo.copy(), hi.copy()
    if rays.size:
        for out, bound, pick in (
            (lo_b, bounds[0][0], np.maximum),
            (hi_b, bounds[1][0], np.minimum),
        ):
            full = np.zeros(n_rays * n_r)
            full[band] = bound
            index = _outermost_above(full.reshape(n_rays, n_r)[rays])
            out[rays] = np.where(index >= 0, pick(index, out[rays]), out[rays])
    lo_b[rays] = np.minimum(lo_b[rays], hi_b[rays])  # (only ever widens a band)
    kept = rays[hi_b[rays] >= 0]
    shift = float(np.max(np.linalg.norm(draws.shift_m[block], axis=2), initial=0.0))
    nearest = radii[lo_b[kept]] - offsets[kept] - shift
    farthest = np.where(
        hi_b[kept] >= n_r - 1,
        np.inf,
        offsets[kept] + radii[np.minimum(hi_b[kept] + 1, n_r - 1)] + shift,
    )
    best = float(nearest.max(initial=-np.inf))
    kept = kept[~(farthest * (1 + _RAY_SAFETY) < best * (1 - _RAY_SAFETY))]
    width = np.minimum(hi_b - lo_b + 2, n_r - lo_b)
    return _farthest(swept, draws, v, block, kept, lo_b, width, origins, directions, radii, centre)


def _farthest(
    swept: _Swept,
    draws: Draws,
    v: limits_mod.LimitValue,
    samples: NDArray[np.intp],
    rays: NDArray[np.intp],
    lo: NDArray[np.intp],
    width: NDArray[np.intp],
    origins: NDArray[np.float64],
    directions: NDArray[np.float64],
    radii: NDArray[np.float64],
    centre: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Each sample's farthest crossing over the rays, each read on ``lo .. lo + width - 1``.

    Zero for a sample that reaches the limit on none of them.  Rays are taken in groups
    of similar window width, each group as one array (a wider window than a ray needs
    holds no further exceedance: the answer does not depend on the grouping).
    """
    n_r = radii.size
    m = samples.size
    shifted = draws.shift_m.shape[1] > 0 and bool(np.any(draws.shift_m != 0.0))
    grid = np.zeros(m)
    order = rays[np.argsort(width[rays], kind="stable")]
    groups: list[NDArray[np.intp]] = []
    start = 0
    while start < order.size:
        w0 = width[order[start]]
        stop = int(np.searchsorted(width[order], 2 * w0, side="left"))
        stop = max(stop, start + 1)
        groups.append(order[start:stop])
        start = stop
    for g in groups:
        w = int(width[g].max())
        idx = np.minimum(lo[g][:, None] + np.arange(w)[None, :], n_r - 1)
        at = swept.row[(g[:, None] * n_r + idx).ravel()]
        assert np.all(at >= 0), "a window reaches a sample that was not decomposed"
        sub = swept.dec.subset(at)
        r_g, last_g = radii[idx], idx == n_r - 1
        dominant = sub.dominant.reshape(len(g), w)
        step = max(1, min(m, 2_000_000 // max(1, len(g) * w)))
        for b0 in range(0, m, step):
            part = slice(b0, min(m, b0 + step))
            rows = samples[part]
            q = sample_quotients(sub, draws, rows, [v])[0].reshape(-1, len(g), w)
            r, hit, k = _crossings(q, r_g, last_g)
            ends = origins[g][None] + directions[g][None] * r[..., None]
            if shifted:
                dom = np.take_along_axis(
                    np.broadcast_to(dominant, k.shape[:1] + dominant.shape),
                    k[..., None],
                    axis=2,
                )[..., 0]
                ends = ends + np.take_along_axis(draws.shift_m[rows], dom[..., None], axis=1)
            dist = np.where(hit, np.linalg.norm(ends - centre, axis=2), 0.0)
            grid[part] = np.maximum(grid[part], dist.max(axis=1))
    return grid


def keepout_spread(
    scenario: Scenario,
    spec: UncertaintySpec,
    nominal: Sequence[object],
    n_directions: int = 400,
    draws: Draws | None = None,
) -> list[KeepoutSpread]:
    """Keep-out distance of each limit over the Monte Carlo samples.

    Parameters
    ----------
    scenario : Scenario
    spec : UncertaintySpec
    nominal : sequence of KeepoutResult
        The search's nominal answers, in the order of the limits to assess (their
        ``distance_m`` anchors the samples, their ``direction`` adds rays).
    n_directions : int
        Lattice rays from the centre.
    draws : Draws, optional
        Samples drawn beforehand (default: :func:`draw_samples`).

    Returns
    -------
    list of KeepoutSpread
        In the order of ``nominal``.

    Notes
    -----
    Where every Gram entry is non-negative (envelope mode or no reflector) and no shield
    credit is spread, each sample's quotient lies, at every point, between the bounds of
    :func:`bound_quotients` (each coefficient's smallest and largest value over the
    samples).  Then on each ray only the radii between the outermost one where the lower
    bound reaches one and the outermost one where the upper bound does can hold a
    sample's crossing: only those are decomposed and re-weighted, and a ray that cannot
    hold any sample's farthest crossing is left out (:func:`_sweep`).  The answer is
    the one of re-weighting every sample of every ray, for far less work.
    """
    from .keepout import _radii

    draws = draw_samples(scenario, spec) if draws is None else draws
    values = [scenario.limit_value(r.limit_id) for r in nominal]  # type: ignore[attr-defined]
    origins, directions = _ray_set(scenario, [r.direction for r in nominal], n_directions)  # type: ignore[attr-defined]
    coherent = scenario.reflections == "coherent" and bool(scenario.reflectors)
    radii = _radii(_reach_m(scenario, values, draws), scenario.wavelength_m, coherent)
    n_rays, n_r = len(directions), radii.size
    swept = _sweep(scenario, origins, directions, radii, values, draws, coherent)
    dec = swept.dec
    centre = scenario.centre_m
    m = draws.samples
    last_full = np.broadcast_to(np.arange(n_r) == n_r - 1, (n_rays, n_r))
    out = []
    for i, (res, v) in enumerate(zip(nominal, values, strict=True)):
        q0 = swept.q0[i].reshape(1, n_rays, n_r)
        r0, hit0, _ = _crossings(q0, np.broadcast_to(radii, (n_rays, n_r)), last_full)
        kept = ~swept.dropped[i]
        ends0 = origins + directions * r0[0][:, None]
        g0 = float(np.where(hit0[0] & kept, np.linalg.norm(ends0 - centre, axis=1), 0.0).max())
        if swept.lo is None or swept.hi is None:
            lo = np.zeros(n_rays, dtype=np.intp)
            width = np.full(n_rays, n_r, dtype=np.intp)
            grid = _farthest(
                swept,
                draws,
                v,
                np.arange(m),
                np.arange(n_rays),
                lo,
                width,
                origins,
                directions,
                radii,
                centre,
            )
        else:
            hi, lo = swept.hi[i], np.maximum(swept.lo[i], 0)
            rays = np.flatnonzero((hi >= 0) & kept)
            width = np.minimum(hi - lo + 2, n_r - lo)
            grid = np.zeros(m)
            band = _band_points(rays, lo, width, n_r)
            sub = dec.subset(swept.row[band])
            offsets = np.linalg.norm(origins - centre, axis=1)
            for block in _sample_blocks(draws, uses_peak(v)):
                grid[block] = _farthest_in_block(
                    swept,
                    sub,
                    band,
                    draws,
                    v,
                    block,
                    rays,
                    lo,
                    hi,
                    offsets,
                    origins,
                    directions,
                    radii,
                    centre,
                )
        d0 = float(res.distance_m)  # type: ignore[attr-defined]
        samples = grid * (d0 / g0) if (g0 > 0 and d0 > 0) else grid
        samples = np.where(draws.neutral, d0, samples)
        out.append(KeepoutSpread(res.limit_id, d0, samples))  # type: ignore[attr-defined]
    return out


def quotient_percentile(
    scenario: Scenario,
    spec: UncertaintySpec,
    points_m: NDArray[np.float64],
    limit_ids: Sequence[str],
    percentile: float = 95.0,
    draws: Draws | None = None,
    chunk_points: int = 4096,
) -> dict[str, NDArray[np.float64]]:
    """Percentile over the samples of each limit's exposure quotient at points.

    The P95 contour of a map is where this reaches one.  Power, gain, reflection and
    shielding spreads enter; the position spread does not (a map point does not move
    with the source), so the contour is drawn for the source where it is placed.

    Returns
    -------
    dict
        Limit id -> (N,) percentile of the quotient.
    """
    draws = draw_samples(scenario, spec) if draws is None else draws
    values = [scenario.limit_value(i) for i in limit_ids]
    pts = np.asarray(points_m, dtype=float)
    n = pts.shape[0]
    out = {i: np.zeros(n) for i in limit_ids}
    m = draws.samples
    for start in range(0, n, chunk_points):
        sl = slice(start, min(n, start + chunk_points))
        dec = decompose(scenario, pts[sl])
        per = [np.empty((m, sl.stop - sl.start)) for _ in values]
        for b in range(0, m, _SAMPLE_BLOCK * 8):
            rows = slice(b, min(m, b + _SAMPLE_BLOCK * 8))
            for k, q in enumerate(sample_quotients(dec, draws, rows, values)):
                per[k][rows] = q
        for k, limit_id in enumerate(limit_ids):
            out[limit_id][sl] = np.percentile(per[k], percentile, axis=0)
    return out


__all__ = [
    "DEFAULT_SAMPLES",
    "DEFAULT_SEED",
    "UNCERTAINTY_KEYS",
    "Draws",
    "KeepoutSpread",
    "UncertaintySpec",
    "decompose",
    "draw_samples",
    "keepout_spread",
    "quotient_percentile",
    "sample_quotients",
]
