"""Options share the base's radiators and, inside a comparison, its field evaluations.

Identity checks of our own (no published number applies): every model is linear in the
field amplitude, so a radiator at power P' has the fields of the same model at P times
sqrt(P'/P) (Balanis, *Antenna Theory*, 4th ed., sec. 2.3: radiated power is quadratic in
the fields).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from keepclear.antennas.base import Radiator
from keepclear.antennas.horn import PyramidalHorn
from keepclear.antennas.memo import isolated, radiator_fields, shared_field_evaluations
from keepclear.antennas.wire import Dipole
from keepclear.fields.keepout import RADIUS_TOLERANCE, keepout_distances
from keepclear.fields.scenario import load_scenario, shared_radiators

SIX = Path(__file__).parent / "benchmarks" / "data" / "horn-bench-six-options.toml"
F_HZ = 2.45e9


def _points(n: int = 300, seed: int = 2) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return rng.uniform(-2.0, 2.0, (n, 3)) + np.array([0.3, 0.0, 0.0])


def _horn(power_w: float) -> PyramidalHorn:
    return PyramidalHorn(F_HZ, power_w, 0.08636, 0.04318, 0.24, 0.18, 0.30)


@pytest.mark.parametrize(
    "make", [_horn, lambda p: Dipole(F_HZ, p, length_m=0.0612)], ids=["horn", "dipole"]
)
def test_with_power_equals_a_radiator_built_at_that_power(make):
    base = make(800.0)
    copy = base.with_power(50.0)
    fresh = make(50.0)
    pts = _points()
    for got, want in zip(copy.fields(pts), fresh.fields(pts), strict=True):
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-15 * np.abs(want).max())
    assert copy.power_w == 50.0 and base.power_w == 800.0


def test_with_power_refuses_a_negative_power():
    with pytest.raises(ValueError, match="power_w"):
        _horn(1.0).with_power(-1.0)


def test_memo_gives_the_fields_of_a_fresh_evaluation():
    horn = _horn(800.0)
    half = horn.with_power(400.0)
    pts = _points()
    plain_e, plain_h = horn.fields(pts)
    half_e, _ = half.fields(pts)
    with shared_field_evaluations() as memo:
        e1, h1 = horn.fields(pts[:200])
        e2, h2 = horn.fields(pts)  # 200 of them looked up
        e3, _ = half.fields(pts)  # all looked up, scaled by sqrt(1/2)
        assert memo.looked_up == 200 + 300
        assert memo.evaluated == 300
    tol = dict(rtol=1e-12, atol=1e-15 * np.abs(plain_e).max())
    np.testing.assert_allclose(e2, plain_e, **tol)
    np.testing.assert_allclose(h2, plain_h, rtol=1e-12, atol=1e-15 * np.abs(plain_h).max())
    np.testing.assert_allclose(e1, plain_e[:200], **tol)
    np.testing.assert_allclose(e3, half_e, **tol)


def test_a_point_asked_twice_in_one_call_is_evaluated_and_kept_once():
    # A point on a reflecting plane is its own mirror image: the field evaluation asks the
    # radiator for it twice in one call.  It is evaluated once, both answers are its field,
    # and what was kept is forgotten cleanly at the end of an isolated block.
    horn = _horn(800.0)
    pts = _points(50)
    twice = np.vstack([pts, pts[:10]])
    plain_e, plain_h = horn.fields(twice)
    with shared_field_evaluations() as memo:
        with isolated():
            e, h = horn.fields(twice)
            assert memo.evaluated == 50
        e_again, _ = horn.fields(twice)  # forgotten: evaluated afresh
        assert memo.evaluated == 100
    tol = dict(rtol=1e-12, atol=1e-15 * np.abs(plain_e).max())
    np.testing.assert_allclose(e, plain_e, **tol)
    np.testing.assert_allclose(h, plain_h, rtol=1e-12, atol=1e-15 * np.abs(plain_h).max())
    np.testing.assert_allclose(e_again, plain_e, **tol)


def test_a_whole_array_asked_again_is_looked_up_and_a_changed_one_is_not_confused():
    horn = _horn(800.0)
    half = horn.with_power(400.0)
    pts = _points(1500, seed=4)
    plain_e, plain_h = horn.fields(pts)
    moved = pts.copy()
    moved[700, 2] += 1e-3
    moved_e, _ = horn.fields(moved)
    with shared_field_evaluations() as memo:
        horn.fields(pts)
        e2, h2 = horn.fields(pts.copy())  # the same points: found whole
        e3, _ = half.fields(pts)  # found whole, scaled by sqrt(1/2)
        assert (memo.looked_up, memo.evaluated) == (3000, 1500)
        e4, _ = horn.fields(moved)  # one point differs: only it is evaluated
        assert (memo.looked_up, memo.evaluated) == (3000 + 1499, 1501)
    tol = dict(rtol=1e-12, atol=1e-15 * np.abs(plain_e).max())
    np.testing.assert_allclose(e2, plain_e, **tol)
    np.testing.assert_allclose(h2, plain_h, rtol=1e-12, atol=1e-15 * np.abs(plain_h).max())
    np.testing.assert_allclose(e3, plain_e / np.sqrt(2.0), **tol)
    np.testing.assert_allclose(e4, moved_e, **tol)


def test_options_reuse_the_base_radiator_unless_the_model_changes():
    scenario = load_scenario(SIX)
    base = scenario.sources[0].radiator
    by_name = {o.name: o.scenario.sources[0].radiator for o in scenario.options}
    assert by_name["30 dB screen across the beam"] is base
    assert by_name["pulsed at 20 %"] is base
    half = by_name["half power"]
    assert half is not base and _model(half) is _model(base) and half.power_w == 400.0
    turned = by_name["horn turned down to the load"]
    assert _model(turned) is not _model(base)


def _model(radiator):
    """The aperture model's shared state (inside the rim wrapper of a guide or horn)."""
    return getattr(radiator, "aperture", radiator)._model


@pytest.mark.filterwarnings("ignore::keepclear.fields.plausibility.PlausibilityWarning")
def test_shared_evaluations_leave_the_keepout_unchanged(tmp_path):
    # The memo's machinery, on the horn on a flange too large for its wire grid (the rim
    # model: the horn's wire grid would make this a minute-long test of the same code path).
    # The sharing is per field point, whatever the ray set: a coarse first pass (80 rays)
    # shares as much.
    text = SIX.read_text(encoding="utf-8")
    anchor = "length_m = 0.30"
    assert anchor in text
    flanged = tmp_path / "six-flanged.toml"
    flanged.write_text(text.replace(anchor, anchor + "\nflange_m = [0.40, 0.30]", 1), "utf-8")
    scenario = load_scenario(flanged)
    assert type(scenario.sources[0].radiator).__name__ == "WalledAperture"
    option = scenario.options[2].scenario  # half power: a copy of the base radiator
    alone = keepout_distances(option, n_directions=80)
    with shared_field_evaluations() as memo:
        keepout_distances(scenario, n_directions=80)
        looked_up = memo.looked_up
        shared = keepout_distances(option, n_directions=80)
        assert memo.looked_up > looked_up  # the option's search found the base's points
    for a, b in zip(alone, shared, strict=True):
        # a shared field is the stored one times sqrt(P'/P): equal to the last bit or two,
        # so a bisection may end one bracket (RADIUS_TOLERANCE) to either side
        assert b.distance_m == pytest.approx(a.distance_m, rel=2 * RADIUS_TOLERANCE)
        assert b.distance_with_uncertainty_m == pytest.approx(
            a.distance_with_uncertainty_m, rel=2 * RADIUS_TOLERANCE
        )


FLANGED_GUIDE = """
name = "flanged guide (rim model: too long for the wire grid)"
[[source]]
antenna = "open-waveguide"
power_w = 100.0
waveguide = "WR-340"
guide_length_m = 1.0
flange_m = [0.3, 0.3]
position_m = [0.0, 0.0, 1.0]
boresight = [1.0, 0.0, 0.0]
"""


@pytest.mark.filterwarnings("ignore::keepclear.fields.plausibility.PlausibilityWarning")
def test_with_power_scales_every_bundled_source_model(tmp_path):
    # Every radiator the loader builds (the guides and horns solved with their walls, the
    # finite-ground monopole, wires, point sources; the rim model of a flanged guide too
    # long for the grid, below): half the power is half the density everywhere.
    scenarios = Path(__file__).parent.parent / "scenarios"
    pts = _points(60, seed=3) + np.array([0.0, 0.0, 1.0])
    seen = set()
    flanged = tmp_path / "flanged.toml"
    flanged.write_text(FLANGED_GUIDE, encoding="utf-8")
    paths = sorted(scenarios.glob("*.toml"))
    for path in [*paths, flanged]:
        for source in load_scenario(path).sources:
            radiator = source.radiator
            if type(radiator).__name__ in seen or radiator.power_w <= 0:
                continue
            seen.add(type(radiator).__name__)
            pts_here = pts + radiator.position_m - np.array([0.3, 0.0, 1.0])
            outside = ~radiator.inside_or_on(pts_here, 0.01)
            e_full, h_full = radiator.fields(pts_here[outside])
            e_half, h_half = radiator.with_power(0.5 * radiator.power_w).fields(pts_here[outside])
            for half, full in ((e_half, e_full), (h_half, h_full)):
                np.testing.assert_allclose(
                    np.abs(half) ** 2, 0.5 * np.abs(full) ** 2, rtol=1e-9,
                    atol=1e-12 * float(np.max(np.abs(full) ** 2)), err_msg=path.name,
                )  # fmt: skip
    assert {"GridOpenWaveguide", "GridHorn", "WalledAperture", "FiniteGroundMonopole"} <= seen


def test_the_whole_model_is_shared_through_the_orchestrator():
    # radiator_fields shares any model, the rim of a guide or horn with its aperture: the
    # half-power option's fields are the base's stored ones times sqrt(1/2).
    scenario = load_scenario(SIX)
    base = scenario.sources[0].radiator
    half = scenario.options[2].scenario.sources[0].radiator
    pts = _points(50)
    fresh_e, fresh_h = half.fields(pts)
    with shared_field_evaluations() as memo:
        radiator_fields(base, pts)
        e, h = radiator_fields(half, pts)
        assert (memo.evaluated, memo.looked_up) == (50, 50)
    np.testing.assert_allclose(e, fresh_e, rtol=1e-12, atol=1e-15 * np.abs(fresh_e).max())
    np.testing.assert_allclose(h, fresh_h, rtol=1e-12, atol=1e-15 * np.abs(fresh_h).max())
    # a model built anew (the turned horn) is never taken for the base
    turned = scenario.options[5].scenario.sources[0].radiator
    assert turned.field_identity is not base.field_identity


def test_scenarios_loaded_in_one_block_share_their_radiators():
    first, second = load_scenario(SIX), load_scenario(SIX)
    assert first.sources[0].radiator is not second.sources[0].radiator
    with shared_radiators():
        first, second = load_scenario(SIX), load_scenario(SIX)
    assert first.sources[0].radiator is second.sources[0].radiator


def test_with_power_refuses_a_model_that_does_not_say_how_and_the_loader_builds_it_anew():
    # A model that keeps power-dependent state must update it; the default refuses, so a
    # copy can never keep the base's fields at another power.
    from keepclear.antennas.isotropic import IsotropicSource

    class Kept(IsotropicSource):
        _power_changed = Radiator._power_changed  # as a new model that forgot it

    with pytest.raises(NotImplementedError, match="Kept"):
        Kept(F_HZ, 10.0).with_power(5.0)
    assert IsotropicSource(F_HZ, 10.0).with_power(5.0).power_w == 5.0
