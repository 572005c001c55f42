"""The keep-out search and its spread skip samples that cannot change their answers.

The search stops sampling a ray inwards, or narrowing its bracket, once the ray cannot be
among the farthest (``keepout._rank_threshold``); the spread decomposes only the band of
radii where a sample's crossing can lie and leaves rays that cannot hold any sample's
farthest crossing (``uncertainty._sweep``).  Both are claimed exact: these checks run the
same scenarios with every sample evaluated and compare.  The reference is the program's
own full evaluation (the claim is about the work skipped, not about the physics).
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.fields import keepout as keepout_mod
from keepclear.fields import uncertainty as unc
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario

# A half-wave dipole above a concrete floor and a second, weaker one beside it: a pattern
# with nulls, a reflected lobe along the floor and a far-off source, so that rays end at
# very different distances.
TWO_DIPOLES = """
name = "two dipoles over a floor"
frequency_hz = 2.45e9
reflections = "envelope"

[[source]]
antenna = "dipole"
power_w = 40.0
position_m = [0.0, 0.0, 1.2]
axis = [0.0, 0.0, 1.0]
length_m = 0.0612

[[source]]
antenna = "dipole"
power_w = 5.0
position_m = [0.8, 0.3, 1.0]
axis = [1.0, 0.0, 0.0]
length_m = 0.0612

[[reflector]]
name = "floor"
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"

[exposure]
limits = ["icnirp-2020/general-public", "icnirp-2020/occupational",
          "icnirp-2020/occupational-local"]

[uncertainty]
samples = 150
seed = 3
power_db = 1.0
reflection = 0.1
position_m = 0.02
"""


@pytest.fixture(autouse=True)
def _one_process(monkeypatch):
    # The tests count and record what the search evaluates in this process: no ray batch
    # is shared with worker processes (fields/workers.py; tests/test_workers.py checks
    # that sharing gives the same answers).
    monkeypatch.setenv("KEEPCLEAR_WORKERS", "1")


@pytest.fixture(scope="module")
def scenario(tmp_path_factory):
    path = tmp_path_factory.mktemp("pruning") / "two-dipoles.toml"
    path.write_text(TWO_DIPOLES, encoding="utf-8")
    return load_scenario(path)


def test_search_gives_up_only_rays_that_cannot_change_the_answer(scenario, monkeypatch):
    # Beyond the answers, every batch of rays must give the same refinement starts (its
    # three farthest rays per row, ties in order) and the same distances along them.
    evaluated: list[int] = []
    batches: list[list[tuple[list[int], np.ndarray]]] = [[], []]
    quotients = keepout_mod._Search.quotients
    add = keepout_mod._Best.add

    def counting(self, points):
        evaluated.append(len(points))
        return quotients(self, points)

    def recording(self, origins, directions, radius):
        dist = add(self, origins, directions, radius)
        for k in range(dist.shape[0]):
            top = keepout_mod._tied_first(dist[k], 3)
            batches[run].append((top, dist[k][top]))
        return dist

    monkeypatch.setattr(keepout_mod._Search, "quotients", counting)
    monkeypatch.setattr(keepout_mod._Best, "add", recording)
    run = 0
    pruned = keepout_distances(scenario)
    n_pruned = sum(evaluated)
    evaluated.clear()
    run = 1
    # no threshold: no ray is left early, inwards or in the bisection
    monkeypatch.setattr(keepout_mod, "_rank_threshold", lambda lower: np.zeros(lower.shape[0]))
    full = keepout_distances(scenario)
    n_full = sum(evaluated)
    assert n_pruned < 0.9 * n_full  # the pruning does skip samples here
    for a, b in zip(pruned, full, strict=True):
        assert a.distance_m == pytest.approx(b.distance_m, rel=1e-12)
        assert a.distance_with_uncertainty_m == pytest.approx(
            b.distance_with_uncertainty_m, rel=1e-12
        )
        np.testing.assert_allclose(a.direction, b.direction, rtol=0, atol=1e-12)
    assert len(batches[0]) == len(batches[1])
    for (top_a, dist_a), (top_b, dist_b) in zip(*batches, strict=True):
        assert top_a == top_b
        np.testing.assert_allclose(dist_a, dist_b, rtol=1e-12)


@pytest.mark.parametrize(
    "reflection_only", [False, True], ids=["scenario-spread", "reflection-spread"]
)
def test_spread_band_and_ray_pruning_match_every_sample_evaluated(
    scenario, monkeypatch, reflection_only
):
    # The second spread varies the floor's |Gamma| alone (0.3): the reflected lobes move
    # against the direct field, so different rays are the farthest for different samples.
    nominal = keepout_distances(scenario)
    spec = scenario.uncertainty
    if reflection_only:
        spec = unc.UncertaintySpec(power_db=0.0, gain_db=0.0, reflection=0.3, samples=150, seed=3)
    draws = unc.draw_samples(scenario, spec)
    decomposed: list[int] = []
    sweep = unc._sweep

    def recording(*args, bounded=True):
        swept = sweep(*args, bounded=bounded)
        decomposed.append(int(np.count_nonzero(swept.row >= 0)))
        return swept

    monkeypatch.setattr(unc, "_sweep", recording)
    pruned = unc.keepout_spread(scenario, spec, nominal, draws=draws)
    monkeypatch.setattr(unc, "_sweep", lambda *args: recording(*args, bounded=False))
    full = unc.keepout_spread(scenario, spec, nominal, draws=draws)
    assert decomposed[0] < 0.9 * decomposed[1]  # the band does leave samples out here
    for a, b in zip(pruned, full, strict=True):
        assert a.limit_id == b.limit_id
        np.testing.assert_allclose(a.samples_m, b.samples_m, rtol=1e-12, atol=0)


def test_quotient_bounds_hold_every_sample(scenario):
    # The band rests on these bounds: every sample's quotient, and the nominal one, lies
    # between them at every point.
    pts = np.random.default_rng(1).uniform(-1.5, 1.5, (400, 3))
    pts[:, 2] = np.abs(pts[:, 2]) + 0.02
    dec = unc.decompose(scenario, pts)
    draws = unc.draw_samples(scenario, scenario.uncertainty)
    values = [scenario.limit_value(i) for i in scenario.limit_ids]
    bounds = unc.bound_quotients(dec, draws, values)
    assert bounds is not None
    lower, upper = bounds
    samples = unc.sample_quotients(dec, draws, slice(0, draws.samples), values)
    nominal = unc.sample_quotients(dec, unc._neutral_like(draws), slice(0, 1), values)
    for q, q0, lo, hi in zip(samples, nominal, lower, upper, strict=True):
        assert np.all(lo <= q) and np.all(q <= hi)
        assert np.all(lo <= q0[0]) and np.all(q0[0] <= hi)
