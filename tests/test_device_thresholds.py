"""Device thresholds (equipment, not people) and user thresholds.

Device thresholds are compared with the RMS E field **while radiating**: every source on,
no duty-cycle averaging (contract, "Additions: device thresholds").

References
----------
- FCC OET Bulletin 65, Edition 97-01 (1997), eq. (3): S = P G / (4 pi R^2); with the
  plane-wave relation S = E^2 / eta0 the radius where the field reaches E is
  R = sqrt(eta0 P G / (4 pi E^2)).
- IEC 61000-4-3:2020 (Ed. 4.0), Table 1 test levels: level 2 = 3 V/m (FOUND, secondary:
  IEEE EMC Society PSTC list), level 4 = 30 V/m (from memory).
- IEC 60601-1-2:2014, Table 9, 2 450 MHz (2 400-2 570 MHz): 28 V/m (FOUND, secondary:
  Table 9 reproduced in equipment manuals; tests/data/limits_provenance.md).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants

from keepclear.fields import limits as L
from keepclear.fields.assessment import probe_data
from keepclear.fields.keepout import keepout_distances
from keepclear.fields.scenario import load_scenario

from ._cli import run

ETA0 = math.sqrt(constants.mu_0 / constants.epsilon_0)  # 376.73 ohm, scipy.constants


def device_radius_m(power_w: float, gain_dbi: float, e_v_m: float) -> float:
    """OET 65 eq. (3) with S = E^2/eta0, solved for R (the while-on power P)."""
    return math.sqrt(ETA0 * power_w * 10 ** (gain_dbi / 10) / (4 * math.pi * e_v_m**2))


def exposure_radius_m(power_w: float, duty: float, gain_dbi: float, s_w_m2: float) -> float:
    """OET 65 eq. (3) solved for R with the time-averaged power P d."""
    return math.sqrt(power_w * duty * 10 ** (gain_dbi / 10) / (4 * math.pi * s_w_m2))


SOURCE = """
[[source]]
antenna = "isotropic"
power_w = {power_w}
duty_cycle = {duty}
gain_dbi = {gain_dbi}
position_m = [0.3, -0.2, 1.0]
"""


@pytest.mark.parametrize(("power_w", "gain_dbi"), [(1.0, 0.0), (5.0, 3.0)])
def test_device_keepout_of_an_isotropic_source_matches_the_closed_form(
    write_scenario, power_w, gain_dbi
):
    path = write_scenario(
        SOURCE.format(power_w=power_w, duty=1.0, gain_dbi=gain_dbi)
        + """
        [exposure]
        limits = ["iec-61000-4-3/level-2", "iec-61000-4-3/level-4", "iec-60601-1-2/wireless-2450"]
        """
    )
    results = keepout_distances(load_scenario(path))
    # IEC 61000-4-3 Table 1: 3 and 30 V/m; IEC 60601-1-2 Table 9: 28 V/m
    for result, e_v_m in zip(results, (3.0, 30.0, 28.0), strict=True):
        expected = device_radius_m(power_w, gain_dbi, e_v_m)
        assert result.distance_m >= expected  # never below the closed form
        assert result.distance_m == pytest.approx(expected, rel=5e-3)
        assert result.screening_distance_m == pytest.approx(expected, rel=1e-3)


def test_device_keepout_ignores_the_duty_cycle(write_scenario):
    # A magnetron on a half-wave doubler radiates about half of each mains cycle; a device
    # sees the field while it is on.  The people's (time-averaged) keep-out shrinks by
    # sqrt(d); the device keep-out does not (OET 65 eq. (3) with P, not P d).
    power_w, duty = 2.0, 0.25
    path = write_scenario(
        SOURCE.format(power_w=power_w, duty=duty, gain_dbi=0.0)
        + """
        [exposure]
        limits = ["iec-61000-4-3/level-2", "icnirp-2020/general-public"]
        """
    )
    device, people = keepout_distances(load_scenario(path))
    assert device.distance_m == pytest.approx(device_radius_m(power_w, 0.0, 3.0), rel=5e-3)
    assert device.screening_distance_m == pytest.approx(
        device_radius_m(power_w, 0.0, 3.0), rel=1e-3
    )
    # ICNIRP 2020 Table 5, >2-300 GHz: 10 W/m2 (FOUND, secondary), time-averaged
    assert people.distance_m == pytest.approx(exposure_radius_m(power_w, duty, 0.0, 10.0), rel=5e-3)
    # the same source at d = 1 gives the same device keep-out
    full = write_scenario(
        SOURCE.format(power_w=power_w, duty=1.0, gain_dbi=0.0)
        + '[exposure]\nlimits = ["iec-61000-4-3/level-2"]\n'
    )
    (device_full,) = keepout_distances(load_scenario(full))
    assert device.distance_m == pytest.approx(device_full.distance_m, rel=1e-3)


@pytest.mark.parametrize("basis", ["while-on", "time-averaged"])
@pytest.mark.parametrize("quantity", ["e_v_m", "power_density_w_m2"])
def test_custom_thresholds_on_both_bases(write_scenario, basis, quantity):
    power_w, duty = 4.0, 0.5
    value = 6.0 if quantity == "e_v_m" else 0.05  # V/m or W/m2
    path = write_scenario(
        SOURCE.format(power_w=power_w, duty=duty, gain_dbi=0.0)
        + f"""
        [exposure]
        limits = ["custom/router"]
        [[exposure.threshold]]
        name = "router"
        {quantity} = {value}
        basis = "{basis}"
        """
    )
    scenario = load_scenario(path)
    (result,) = keepout_distances(scenario)
    d = 1.0 if basis == "while-on" else duty
    if quantity == "e_v_m":
        expected = device_radius_m(power_w * d, 0.0, value)
    else:
        expected = exposure_radius_m(power_w, d, 0.0, value)
    assert result.limit_id == "custom/router"
    assert result.distance_m >= expected
    assert result.distance_m == pytest.approx(expected, rel=5e-3)
    # the probe's quotient at the closed-form radius is one (isotropic, OET 65 eq. (3))
    direction = np.array([1.0, 0.0, 0.0])
    point = scenario.centre_m + 0.999 * expected * direction
    data, _ = probe_data(scenario, point[None, :])
    assert data["points"][0]["quotients"]["custom/router"] == pytest.approx(
        1.0 / 0.999**2, rel=2e-3
    )
    value_row = scenario.limit_value("custom/router")
    assert value_row.kind == "device" and value_row.basis == basis
    # contract, Additions: power_density_w_m2 = E^2/eta0 on such rows
    assert value_row.power_density_w_m2 == pytest.approx(value_row.e_v_m**2 / ETA0, rel=1e-12)


def test_probe_quotient_of_a_device_threshold_uses_the_field_while_on(write_scenario):
    path = write_scenario(
        SOURCE.format(power_w=1.0, duty=0.1, gain_dbi=0.0)
        + '[exposure]\nlimits = ["iec-61000-4-3/level-3", "icnirp-2020/general-public"]\n'
    )
    scenario = load_scenario(path)
    data, result = probe_data(scenario, scenario.centre_m[None, :] + [[1.0, 0.0, 0.0]])
    point = data["points"][0]
    # (E_peak / 10 V/m)^2 with E_peak the field of all sources on (IEC 61000-4-3 level 3)
    assert point["quotients"]["iec-61000-4-3/level-3"] == pytest.approx(
        (point["peak_e_v_m"] / 10.0) ** 2, rel=1e-12
    )
    # the people's limit sees the time-averaged density (10 % of the while-on one)
    assert point["quotients"]["icnirp-2020/general-public"] == pytest.approx(
        point["power_density_w_m2"] / 10.0, rel=1e-12
    )
    assert point["power_density_w_m2"] == pytest.approx(
        0.1 * point["peak_power_density_w_m2"], rel=1e-9
    )


def test_limits_json_rows_carry_kind_basis_and_the_equivalent_density():
    result = run("limits", "--json")
    assert result.exit_code == 0
    import json

    rows = {row["id"]: row for row in json.loads(result.stdout)["limits"]}
    row = rows["iec-60601-1-2/wireless-2450"]
    assert (row["kind"], row["basis"], row["e_v_m"]) == ("device", "while-on", 28.0)
    assert row["power_density_w_m2"] == pytest.approx(28.0**2 / ETA0, rel=1e-12)
    assert rows["icnirp-2020/general-public"]["kind"] == "exposure"
    assert rows["icnirp-2020/general-public"]["basis"] == "time-averaged"


BAD_THRESHOLDS = [
    ('name = "a"\ne_v_m = 3.0\nbasis = "peak"', "exposure.threshold.1.basis", "must be one of"),
    (
        'name = "a"\ne_v_m = 3.0\npower_density_w_m2 = 0.1\nbasis = "while-on"',
        "exposure.threshold.1.power_density_w_m2",
        "not both",
    ),
    ('name = "a"\nbasis = "while-on"', "exposure.threshold.1", "needs e_v_m"),
    ('name = "a"\ne_v_m = -3.0\nbasis = "while-on"', "exposure.threshold.1.e_v_m", "> 0"),
    ('name = "A b"\ne_v_m = 3.0\nbasis = "while-on"', "exposure.threshold.1.name", "lower-case"),
    ('name = "a"\ne_v_m = 3.0\nbasis = "while-on"\ncolour = 1', "colour", "colour"),
]


@pytest.mark.parametrize(("body", "key", "fragment"), BAD_THRESHOLDS)
def test_bad_threshold_exits_2_naming_file_and_key(write_scenario, body, key, fragment):
    path = write_scenario(
        SOURCE.format(power_w=1.0, duty=1.0, gain_dbi=0.0)
        + '[exposure]\nlimits = ["icnirp-2020/general-public"]\n[[exposure.threshold]]\n'
        + body
        + "\n"
    )
    result = run("keepout", path)
    assert result.exit_code == 2
    assert str(path.name) in result.stderr and key in result.stderr
    assert fragment in result.stderr
    assert "Traceback" not in result.stderr and len(result.stderr.strip().splitlines()) == 1


def test_duplicate_threshold_name_exits_2(write_scenario):
    path = write_scenario(
        SOURCE.format(power_w=1.0, duty=1.0, gain_dbi=0.0)
        + """
        [exposure]
        limits = ["custom/router"]
        [[exposure.threshold]]
        name = "router"
        e_v_m = 3.0
        basis = "while-on"
        [[exposure.threshold]]
        name = "router"
        e_v_m = 10.0
        basis = "time-averaged"
        """
    )
    result = run("keepout", path)
    assert result.exit_code == 2
    assert "exposure.threshold.2.name" in result.stderr and "unique" in result.stderr
    assert str(path.name) in result.stderr


def test_unknown_custom_id_names_the_known_ones(write_scenario):
    path = write_scenario(
        SOURCE.format(power_w=1.0, duty=1.0, gain_dbi=0.0)
        + """
        [exposure]
        limits = ["custom/ruoter"]
        [[exposure.threshold]]
        name = "router"
        e_v_m = 3.0
        basis = "while-on"
        """
    )
    result = run("keepout", path)
    assert result.exit_code == 2
    assert "exposure.limits.1" in result.stderr and "did you mean 'custom/router'" in result.stderr


def test_custom_threshold_is_usable_with_the_limit_option(write_scenario):
    path = write_scenario(
        SOURCE.format(power_w=1.0, duty=1.0, gain_dbi=0.0)
        + """
        [exposure]
        limits = ["icnirp-2020/general-public"]
        [[exposure.threshold]]
        name = "logger"
        power_density_w_m2 = 0.05
        basis = "time-averaged"
        """
    )
    scenario = load_scenario(path)
    (result,) = keepout_distances(scenario, ["custom/logger"])
    assert result.distance_m == pytest.approx(exposure_radius_m(1.0, 1.0, 0.0, 0.05), rel=5e-3)


def test_custom_threshold_function_refuses_bad_input():
    with pytest.raises(ValueError, match="basis"):
        L.custom_threshold("x", basis="peak", e_v_m=1.0)
    with pytest.raises(ValueError, match="exactly one"):
        L.custom_threshold("x", basis="while-on")
    with pytest.raises(ValueError, match="exactly one"):
        L.custom_threshold("x", basis="while-on", e_v_m=1.0, power_density_w_m2=1.0)
    with pytest.raises(ValueError, match="> 0"):
        L.custom_threshold("x", basis="while-on", e_v_m=float("nan"))


def test_map_quotient_and_zone_of_a_device_threshold_use_the_field_while_on(write_scenario):
    # A duty-cycled isotropic source: the map's device quotient is (E_peak/E_lim)^2 with the
    # field of every source on (contract, Additions), the people's one S_avg/S_lim.
    from keepclear.fields import maps
    from keepclear.fields.field import evaluate

    path = write_scenario(
        SOURCE.format(power_w=1.0, duty=0.2, gain_dbi=0.0)
        + '[exposure]\nlimits = ["iec-61000-4-3/level-3", "icnirp-2020/general-public"]\n'
    )
    scenario = load_scenario(path)
    grid = maps.make_grid(maps.principal_plane("xy", scenario.centre_m), 2.0, pixels=21)
    result = maps.evaluate_map(scenario, grid)
    fields = evaluate(scenario, grid.points_m())
    device = result.quotient("iec-61000-4-3/level-3").ravel()
    ok = np.isfinite(fields.peak_e_v_m)
    assert np.allclose(device[ok], (fields.peak_e_v_m[ok] / 10.0) ** 2, rtol=1e-12)
    people = result.quotient("icnirp-2020/general-public").ravel()
    assert np.allclose(people[ok], fields.power_density_w_m2[ok] / 10.0, rtol=1e-12)
    # 10 V/m is reached within R = sqrt(eta0 P / (4 pi E^2)) = 0.548 m (OET 65 eq. (3))
    inside = np.linalg.norm(grid.points_m() - scenario.centre_m, axis=1) < 0.95 * device_radius_m(
        1.0, 0.0, 10.0
    )
    assert np.all(device[inside] >= 1.0)
