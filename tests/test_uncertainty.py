"""Monte Carlo keep-out spread: checks against closed forms and the field orchestrator.

References
----------
- FCC OET Bulletin 65, Edition 97-01 (1997), eq. (3): S = P G / (4 pi R^2) for a point
  source, so the keep-out radius R scales with sqrt(P): a power draw of X dB moves it by
  10^(X/20).
- The one-sided 95th percentile of a normal distribution is mu + 1.645 sigma (any
  statistics table, e.g. NIST/SEMATECH e-Handbook of Statistical Methods, table of the
  normal distribution).
- JCGM 101:2008 (GUM Supplement 1), sec. 7: coverage from percentiles of Monte Carlo
  samples; the standard error of the p-quantile of n samples is
  sqrt(p (1 - p) / n) / phi(z_p).
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.fields import uncertainty as unc
from keepclear.fields.errors import ScenarioError
from keepclear.fields.field import evaluate
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario

from .conftest import SCENARIOS

ISOTROPIC = """
[[source]]
antenna = "isotropic"
power_w = 500.0
duty_cycle = 0.5
gain_dbi = 3.0
position_m = [0.0, 0.0, 1.0]
[exposure]
limits = ["icnirp-2020/general-public", "icnirp-2020/occupational"]
"""


@pytest.fixture(scope="module")
def isotropic(tmp_path_factory):
    path = tmp_path_factory.mktemp("unc") / "iso.toml"
    path.write_text(ISOTROPIC)
    scenario = load_scenario(path)
    return scenario, keepout_distances(scenario)


def test_power_spread_p95_matches_closed_form_within_sampling_error(isotropic):
    # OET 65 eq. (3): R ~ sqrt(P); P95 of a normal in dB is 1.645 sigma, so
    # R_95 = R_0 10^(1.645 sigma / 20).
    scenario, nominal = isotropic
    sigma = 1.0
    spec = unc.UncertaintySpec(power_db=sigma, gain_db=0.0, samples=1000, seed=1)
    spread = unc.keepout_spread(scenario, spec, nominal)
    # standard error of the 95th percentile of 1000 normal samples (JCGM 101 sec. 7):
    phi = np.exp(-0.5 * 1.645**2) / np.sqrt(2 * np.pi)
    se_db = sigma * np.sqrt(0.05 * 0.95 / 1000) / phi
    for s in spread:
        expected = s.distance_m * 10 ** (1.645 * sigma / 20)
        tolerance = 10 ** (3 * se_db / 20) - 1  # three standard errors, as a ratio
        assert s.p95_m == pytest.approx(expected, rel=tolerance)
        assert s.median_m == pytest.approx(s.distance_m, rel=tolerance)


def test_each_sample_scales_with_the_square_root_of_its_power(isotropic):
    # The same draws, made independently: PCG64(seed), power drawn first, one per source.
    scenario, nominal = isotropic
    spec = unc.UncertaintySpec(power_db=2.0, gain_db=0.0, samples=200, seed=7)
    spread = unc.keepout_spread(scenario, spec, nominal)
    x_db = np.random.Generator(np.random.PCG64(7)).standard_normal((200, 1))[:, 0] * 2.0
    for s in spread:
        np.testing.assert_allclose(s.samples_m, s.distance_m * 10 ** (x_db / 20), rtol=2e-4)


def test_same_seed_same_answer_and_another_seed_another(isotropic):
    scenario, nominal = isotropic
    a = unc.keepout_spread(scenario, unc.UncertaintySpec(power_db=1.0, samples=300), nominal)
    b = unc.keepout_spread(scenario, unc.UncertaintySpec(power_db=1.0, samples=300), nominal)
    c = unc.keepout_spread(
        scenario, unc.UncertaintySpec(power_db=1.0, samples=300, seed=2), nominal
    )
    for x, y, z in zip(a, b, c, strict=True):
        # exact: the same seed repeats the same computation in the same process
        assert np.array_equal(x.samples_m, y.samples_m)
        assert not np.array_equal(x.samples_m, z.samples_m)


def test_zero_spread_gives_exactly_the_nominal_distance(isotropic):
    scenario, nominal = isotropic
    spec = unc.UncertaintySpec(gain_db=0.0, samples=50)
    for s, r in zip(unc.keepout_spread(scenario, spec, nominal), nominal, strict=True):
        # exact by construction: with no spread every sample is the nominal value itself
        assert np.all(s.samples_m == r.distance_m)
        assert s.p95_m == r.distance_m and s.median_m == r.distance_m


def test_position_spread_moves_a_point_source_rigidly(isotropic):
    # One source in free space: the exceedance sphere moves with the source, so the
    # farthest point from the nominal centre is R + |delta| (to the grid's precision).
    scenario, nominal = isotropic
    spec = unc.UncertaintySpec(position_m=0.05, gain_db=0.0, samples=100, seed=3)
    spread = unc.keepout_spread(scenario, spec, nominal)
    shifts = np.random.Generator(np.random.PCG64(3))
    shifts.standard_normal((100, 1))  # power (zero spread)
    shifts.standard_normal((100, 1))  # gain
    shifts.standard_normal((100, 0))
    shifts.standard_normal((100, 0))
    delta = shifts.standard_normal((100, 1, 3))[:, 0, :] * 0.05
    for s in spread:
        expected = s.distance_m + np.linalg.norm(delta, axis=1)
        np.testing.assert_allclose(s.samples_m, expected, rtol=0.01)


def test_decomposition_reproduces_the_field_orchestrator():
    # With neutral factors the re-weighted Gram sums are the orchestrator's |E|^2, |H|^2
    # (a floor, a shield and an open guide: every path the decomposition copies).
    scenario = load_scenario(SCENARIOS / "screened-waveguide-bench.toml")
    pts = np.random.default_rng(0).uniform(-2.0, 2.0, (300, 3))
    pts[:, 2] = np.abs(pts[:, 2]) + 0.05
    dec = unc.decompose(scenario, pts)
    spec = unc.UncertaintySpec(gain_db=0.0, samples=1)
    draws = unc.draw_samples(scenario, spec)
    ref = evaluate(scenario, pts)
    for peak, e_ref, h_ref in (
        (False, ref.e_v_m, ref.h_a_m),
        (True, ref.peak_e_v_m, ref.peak_h_a_m),
    ):
        e2, h2 = unc.sample_squares(dec, draws, slice(0, 1), peak=peak)
        np.testing.assert_allclose(e2[0], e_ref**2, rtol=1e-9, atol=1e-20)
        np.testing.assert_allclose(h2[0], h_ref**2, rtol=1e-9, atol=1e-25)


def test_reflection_and_shield_spread_move_the_keepout_both_ways_or_not_at_all():
    # A metal reflector's |Gamma| = 1 cannot grow (kept in 0..1): a draw above leaves the
    # nominal answer; a draw below, or a weaker shield, changes it.
    scenario = load_scenario(SCENARIOS / "screened-waveguide-bench.toml")
    nominal = keepout_distances(scenario)
    spec = unc.UncertaintySpec(reflection=0.1, shielding_db=3.0, gain_db=0.0, samples=40, seed=5)
    for s in unc.keepout_spread(scenario, spec, nominal):
        assert np.all(np.isfinite(s.samples_m))
        if s.distance_m > 0:
            assert s.samples_m.min() < s.distance_m <= s.samples_m.max()


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("[uncertainty]\npower_dB = 1.0\n", "did you mean 'power_db'"),
        ("[uncertainty]\npower_db = -1.0\n", "uncertainty.power_db"),
        ("[uncertainty]\nsamples = 0\n", "uncertainty.samples"),
        ("[uncertainty]\nsamples = 10.5\n", "whole number"),
        ("[uncertainty]\nreflection = 1.5\n", "uncertainty.reflection"),
    ],
)
def test_bad_uncertainty_table_is_refused_with_its_key(tmp_path, text, fragment):
    path = tmp_path / "bad.toml"
    path.write_text(ISOTROPIC + text)
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    assert fragment in str(info.value)


def test_defaults_and_the_models_own_gain_figure(tmp_path):
    path = tmp_path / "ok.toml"
    path.write_text(ISOTROPIC + "[uncertainty]\npower_db = 0.5\n")
    spec = load_scenario(path).uncertainty
    assert (spec.samples, spec.seed, spec.gain_db) == (1000, 1, None)
    demo = load_scenario(SCENARIOS / "plasma-bench.toml")
    term = demo.sources[0]
    from keepclear.fields.field import radiating_terms

    # open waveguide: the model states its gain uncertainty (antennas/aperture.py)
    assert unc.gain_sigma_db(spec, radiating_terms(demo)[0]) == term.radiator.gain_uncertainty_db
