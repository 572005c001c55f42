"""How the keep-out search narrows a ray's outermost crossing: a bracket to the last.

Along a ray the search keeps the outermost sample at or above the limit and narrows the
interval beyond it to ``RADIUS_TOLERANCE`` (``keepout._bracket_trials``): trials about the
crossing of the straight line through the bracket's ends in (log r, log q), then equal
parts.  These checks hold the narrowing to what bisection promised (a bracket that only
shrinks, a crossing inside, the outer end reported) and to its purpose (fewer passes).
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.fields import keepout as keepout_mod
from keepclear.fields.keepout import RADIUS_TOLERANCE, _bracket_trials, keepout_distances
from keepclear.fields.scenario import load_scenario


def _narrow(q, lo, hi, passes=40):
    """Narrow [lo, hi] about a crossing of q(r) = 1 as the search does; (lo, hi, passes)."""
    lo, hi = np.array([lo]), np.array([hi])
    q_lo, q_hi = np.array([q(lo[0])]), np.array([q(hi[0])])
    steps = np.zeros(1, dtype=np.intp)
    for n in range(passes):
        if hi[0] - lo[0] <= RADIUS_TOLERANCE * max(hi[0], 1e-3):
            return lo[0], hi[0], n
        trials = _bracket_trials(lo, hi, q_lo, q_hi, steps)[0]
        steps += 1
        finite = trials[np.isfinite(trials)]
        assert finite.size
        assert np.all((finite > lo[0]) & (finite < hi[0]))  # strictly inside
        # from the outside in, as keepout._Search._rays_here applies them
        for r in finite[::-1]:
            if lo[0] < r < hi[0]:
                value = q(r)
                if value >= 1.0:
                    lo[0], q_lo[0] = r, value
                else:
                    hi[0], q_hi[0] = r, value
    raise AssertionError("the bracket did not narrow")


@pytest.mark.parametrize("exponent", [2.0, 6.0])
def test_a_power_law_crossing_is_bracketed_in_one_pass(exponent):
    # q = (r0 / r)^n crosses one at r0; the log-log secant is exact for it, so the two
    # trials nearest the estimate are the final bracket (one pass, where bisection of a
    # 3 % step to 1e-4 takes nine).
    r0 = 1.7

    def q(r):
        return (r0 / r) ** exponent

    lo, hi, passes = _narrow(q, r0 / 1.013, r0 * 1.017)
    assert passes == 1
    assert lo <= r0 <= hi
    assert hi - lo <= RADIUS_TOLERANCE * hi


def test_a_crossing_off_the_secant_still_closes_to_the_tolerance():
    # A density that falls steeply through a lobe's edge inside the step (not a power law):
    # the estimate misses, and the bracket still closes on the crossing, from both sides.
    def q(r):
        return 1.6 * np.exp(-(((r - 1.50) / 0.018) ** 2)) + 0.5 * (1.5 / r) ** 2

    grid = np.linspace(1.50, 1.56, 200001)
    crossing = grid[np.flatnonzero(q(grid) >= 1.0).max()]
    lo, hi, passes = _narrow(q, 1.50, 1.545)
    assert q(lo) >= 1.0 > q(hi)
    assert lo <= crossing + 1e-6 and hi >= crossing - 1e-6
    assert hi - lo <= RADIUS_TOLERANCE * hi
    assert passes <= 6


def test_a_zero_quotient_at_the_outer_end_falls_back_to_equal_parts():
    # Behind metal or inside an enclosure the quotient is exactly 0: no logarithm; the
    # bracket is cut into equal parts (every trial strictly inside).
    trials = _bracket_trials(
        np.array([1.0]), np.array([1.03]), np.array([2.0]), np.array([0.0]), np.zeros(1, int)
    )[0]
    parts = trials.size + 1
    np.testing.assert_allclose(trials, 1.0 + 0.03 * np.arange(1, parts) / parts)


def test_the_isotropic_keep_out_is_the_closed_form_to_the_bracket(write_scenario, monkeypatch):
    # FCC OET Bulletin 65, Ed. 97-01, eq. (3): S = P G / (4 pi R^2), so R = sqrt(P G / (4 pi
    # S)) for an isotropic 6 dBi source in free space (ICNIRP 2020 general public at 2.45 GHz,
    # 10 W/m^2, Table 5).  The search reports the outer end of a bracket 1e-4 wide, and its
    # narrowing takes one pass per batch (the field is an exact power law).
    monkeypatch.setenv("KEEPCLEAR_WORKERS", "1")
    path = write_scenario(
        """
        [[source]]
        antenna = "isotropic"
        gain_dbi = 6.0
        power_w = 100.0
        position_m = [0.0, 0.0, 1.0]
        """
    )
    scenario = load_scenario(path)
    stages: list[str] = []
    outermost = keepout_mod._Search._outermost
    quotients = keepout_mod._Search.quotients

    def marking(self, *args):
        stages.append("sweep")
        out = outermost(self, *args)
        stages.append("narrow")
        return out

    def counting(self, points):
        if stages and stages[-1].startswith("narrow"):
            stages.append("narrow pass")
        return quotients(self, points)

    monkeypatch.setattr(keepout_mod._Search, "_outermost", marking)
    monkeypatch.setattr(keepout_mod._Search, "quotients", counting)
    result = keepout_distances(scenario, ["icnirp-2020/general-public"])[0]
    exact = np.sqrt(100.0 * 10**0.6 / (4 * np.pi * 10.0))
    assert exact <= result.distance_m <= exact * (1 + RADIUS_TOLERANCE)
    # after every sweep, at most one pass narrows (the sweep keeps the bracket's ends)
    runs = "/".join(stages).split("sweep")
    assert all(run.count("narrow pass") <= 1 for run in runs)


def test_refinement_starts_that_another_start_covers_are_refined_once(write_scenario):
    # Two caps about directions 0.6 degrees apart (within half a cap's reach) interleave
    # their rays at the same density: only the first is refined.  Starts farther apart,
    # from another origin, or along a plane at another azimuth are all kept.
    path = write_scenario(
        """
        [[source]]
        antenna = "isotropic"
        power_w = 1.0
        position_m = [0.0, 0.0, 1.0]
        [[reflector]]
        point_m = [0.0, 0.0, 0.0]
        normal = [0.0, 0.0, 1.0]
        material = "metal"
        """
    )
    scenario = load_scenario(path)
    search = keepout_mod._Search(
        scenario, [scenario.limit_value(scenario.limit_ids[0])], [keepout_mod._Row(0, 1.0, False)]
    )
    spacing = np.radians(5.0)
    az_step = np.radians(1.0)

    def towards(degrees):
        a = np.radians(degrees)
        return np.array([np.cos(a), np.sin(a), 0.0])

    centre = scenario.centre_m
    o = np.array([centre, centre, centre, centre + [0.0, 0.0, 0.5], [0, 0, 1e-3], [0, 0, 1e-3]])
    d = np.array(
        [towards(0.0), towards(0.6), towards(4.0), towards(0.0), towards(90.0), towards(90.5)]
    )
    kind = np.array([-1, -1, -1, -1, 0, 0])
    kept = keepout_mod._distinct_starts(search, [0, 1, 2, 3, 4, 5], o, d, kind, spacing, az_step)
    assert kept == {0: [0, 1], 2: [2], 3: [3], 4: [4, 5]}


def test_rays_along_a_plate_run_over_it_and_a_little_beyond():
    # A table top 1.6 m x 0.9 m centred at (0.3, 0, 0.75): from the foot of a source above
    # (0, 0), a ray along +x leaves it after 1.1 m, one along -y after 0.45 m; each runs
    # 0.15 m (or a tenth of its length) further.  An infinite plane's rays are not cut.
    from keepclear.fields.reflection import Reflector

    plate = Reflector(
        point_m=(0.3, 0.0, 0.75),
        normal=(0.0, 0.0, 1.0),
        material="wood",
        size_m=(1.6, 0.9),
        up=(0.0, 1.0, 0.0),
    )
    origins = np.tile([0.0, 0.0, 0.751], (3, 1))
    directions = np.array([[1.0, 0.0, 0.0], [0.0, -1.0, 0.0], [-1.0, 0.0, 0.0]])
    ends = keepout_mod._plane_ends(plate, origins, directions)
    np.testing.assert_allclose(ends, [1.1 + 0.15, 0.45 + 0.15, 0.5 + 0.15], rtol=1e-12)
    # from a foot beside the plate, a ray away from it misses it: left out (0)
    beside = np.tile([-1.0, 0.0, 0.751], (2, 1))
    ends = keepout_mod._plane_ends(plate, beside, directions[[0, 2]])
    np.testing.assert_allclose(ends, [2.1 + 0.21, 0.0], rtol=1e-12)
    floor = Reflector(point_m=(0.0, 0.0, 0.0), normal=(0.0, 0.0, 1.0), material="concrete")
    assert np.all(np.isinf(keepout_mod._plane_ends(floor, origins, directions)))


def test_an_exceedance_past_a_plate_is_followed_to_its_end(write_scenario, monkeypatch):
    # A 100 W isotropic source 10 cm over a small metal plate: along the plate the
    # exceedance runs far past its edge, so the rays along it are followed beyond their
    # ends, and the keep-out is the one the search finds with uncut rays.
    monkeypatch.setenv("KEEPCLEAR_WORKERS", "1")
    path = write_scenario(
        """
        [[source]]
        antenna = "isotropic"
        power_w = 100.0
        position_m = [0.0, 0.0, 1.0]
        [[reflector]]
        point_m = [0.1, 0.0, 0.9]
        normal = [0.0, 0.0, 1.0]
        material = "metal"
        size_m = [0.4, 0.4]
        up = [0.0, 1.0, 0.0]
        """
    )
    scenario = load_scenario(path)
    followed: list[int] = []
    past_ends = keepout_mod._Search._past_ends

    def counting(self, origins, directions, radii, ends_m, last, q_lo, q_hi):
        out = past_ends(self, origins, directions, radii, ends_m, last, q_lo, q_hi)
        if out is not None:
            followed.append(int(np.count_nonzero((out[0] != last).any(axis=0))))
        return out

    monkeypatch.setattr(keepout_mod._Search, "_past_ends", counting)
    cut = keepout_distances(scenario)
    assert sum(followed) > 0
    monkeypatch.setattr(keepout_mod, "_plane_ends", lambda plate, o, d: np.full(len(d), np.inf))
    uncut = keepout_distances(scenario)
    for a, b in zip(cut, uncut, strict=True):
        assert a.distance_m == pytest.approx(b.distance_m, rel=1e-12)
        assert a.distance_with_uncertainty_m == pytest.approx(
            b.distance_with_uncertainty_m, rel=1e-12
        )


def test_refinement_rays_answer_the_limits_they_refine(write_scenario, monkeypatch):
    # An isotropic 6 dBi source, 100 W, over a concrete floor: the general-public and
    # occupational limits (ICNIRP 2020 Table 5 at 2.45 GHz: 10 and 50 W/m^2) reach
    # different distances.  The first pass asks every limit of every ray; a refinement
    # ray is followed inwards only for the limits whose farthest rays it refines.  Each
    # keep-out still holds the free-space radius of FCC OET Bulletin 65, Ed. 97-01, eq.
    # (3), and stays within the floor's envelope factor (1 + |Gamma|)^2 <= 4 of it (OET 65
    # sec. 2).
    monkeypatch.setenv("KEEPCLEAR_WORKERS", "1")
    path = write_scenario(
        """
        [[source]]
        antenna = "isotropic"
        gain_dbi = 6.0
        power_w = 100.0
        position_m = [0.0, 0.0, 1.5]
        [[reflector]]
        point_m = [0.0, 0.0, 0.0]
        normal = [0.0, 0.0, 1.0]
        material = "concrete"
        [exposure]
        limits = ["icnirp-2020/general-public", "icnirp-2020/occupational"]
        """
    )
    scenario = load_scenario(path)
    masks: list[np.ndarray] = []
    rays = keepout_mod._Search.rays

    def recording(self, origins, directions, ends_m=None, asked=None):
        masks.append(np.ones((len(self.rows), len(directions)), bool) if asked is None else asked)
        return rays(self, origins, directions, ends_m, asked)

    monkeypatch.setattr(keepout_mod._Search, "rays", recording)
    results = keepout_distances(scenario)
    assert masks[0].all()
    assert len(masks) > 1 and not all(m.all() for m in masks[1:])
    assert all(m.any(axis=0).all() for m in masks)  # every ray answers some limit
    for result, limit_w_m2 in zip(results, (10.0, 50.0), strict=True):
        free = np.sqrt(100.0 * 10**0.6 / (4 * np.pi * limit_w_m2))
        assert free <= result.distance_m <= 2 * free * (1 + RADIUS_TOLERANCE)


def test_the_keepout_outside_an_enclosure_is_never_beyond_the_whole_one(monkeypatch):
    # The points outside the box are some of all the points: the sphere that holds every
    # exceedance outside the box cannot be larger than the one that holds every
    # exceedance (a set inclusion; common practice, no source).  The enclosure's rows are
    # asked of every ray, the others only of their own refinement rays: an exceedance met
    # on samples taken for the enclosure's rows counts for the others too.
    from pathlib import Path

    monkeypatch.setenv("KEEPCLEAR_WORKERS", "1")
    scenario = load_scenario(
        Path(__file__).resolve().parent.parent / "scenarios" / "drying-line-enclosure.toml"
    )
    for result in keepout_distances(scenario):
        outside = result.outside_enclosure
        assert outside is not None
        assert outside["distance_m"] <= result.distance_m * (1 + 1e-12), result.limit_id
