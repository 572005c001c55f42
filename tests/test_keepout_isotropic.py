"""Keep-out search against the closed form for an isotropic source.

Reference: FCC OET Bulletin 65, Edition 97-01 (1997), eq. (3), S = P G / (4 pi R^2),
so R = sqrt(P d G / (4 pi S)) for a source of average power P d.
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario


def closed_form_m(power_w: float, duty: float, gain_dbi: float, limit_w_m2: float) -> float:
    # OET 65 eq. (3) solved for R.
    return float(np.sqrt(power_w * duty * 10 ** (gain_dbi / 10) / (4 * np.pi * limit_w_m2)))


@pytest.mark.parametrize(
    ("power_w", "duty", "gain_dbi"),
    [(100.0, 1.0, 0.0), (800.0, 0.5, 6.0), (1.0, 0.1, -3.0), (5000.0, 1.0, 15.0)],
)
def test_isotropic_keepout_matches_closed_form_and_never_below(
    write_scenario, power_w, duty, gain_dbi
):
    path = write_scenario(
        f"""
        [[source]]
        antenna = "isotropic"
        power_w = {power_w}
        duty_cycle = {duty}
        gain_dbi = {gain_dbi}
        position_m = [0.3, -0.2, 1.0]
        [exposure]
        limits = ["icnirp-2020/general-public", "icnirp-2020/occupational", "sc6-2015/uncontrolled"]
        """
    )
    scenario = load_scenario(path)
    for result in keepout_distances(scenario):
        expected = closed_form_m(power_w, duty, gain_dbi, result.limit_w_m2)
        assert result.distance_m >= expected  # never below the closed form
        assert result.distance_m == pytest.approx(expected, rel=5e-3)
        # SC6 also gives E and H; their plane-wave equivalents differ from S by the rounding of
        # the printed coefficients, and the stricter of them sets the threshold.
        assert result.screening_distance_m == pytest.approx(expected, rel=1e-3)
        assert result.direction is not None and np.linalg.norm(result.direction) == pytest.approx(
            1.0
        )


def test_keepout_zero_when_limit_never_reached(write_scenario):
    # 1 uW isotropic: S = 1e-6 / (4 pi r^2) reaches 10 W/m^2 only within 0.09 mm of the source,
    # inside the 1e-3-wavelength clamp of the model, so the answer is a tiny radius or zero.
    path = write_scenario(
        """
        [[source]]
        antenna = "isotropic"
        power_w = 1e-6
        """
    )
    (result, _) = keepout_distances(load_scenario(path))
    assert result.distance_m < 1e-3


def test_keepout_grows_with_power_and_shrinks_with_limit(write_scenario):
    distances = []
    for p in (10.0, 100.0, 1000.0):
        path = write_scenario(f'[[source]]\nantenna = "isotropic"\npower_w = {p}\n')
        distances.append([r.distance_m for r in keepout_distances(load_scenario(path))])
    distances = np.array(distances)
    assert np.all(np.diff(distances[:, 0]) > 0)
    # general public (10 W/m^2) is farther than occupational (50 W/m^2)
    assert np.all(distances[:, 0] > distances[:, 1])
