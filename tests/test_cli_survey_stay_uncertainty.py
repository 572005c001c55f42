"""The command line of the survey readings, stay times, spatial averages and uncertainty.

Checks of the numbers themselves are in test_readings.py, test_stay_time.py,
test_spatial_average.py and test_uncertainty.py (with their sources); here the commands,
their JSON shapes (the contract's "Additions") and their bad-input messages.
"""

from __future__ import annotations

import math

import pytest

from ._cli import run, strict_json, validate

SCENARIO = """
name = "cli check: point source over a floor"
[[source]]
antenna = "isotropic"
power_w = 400.0
duty_cycle = 0.5
gain_dbi = 3.0
position_m = [0.0, 0.0, 1.0]
[exposure]
limits = ["icnirp-2020/general-public", "icnirp-2020/occupational-local"]
[[reflector]]
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "concrete"
[uncertainty]
power_db = 1.0
samples = 200
[[point]]
name = "near"
position_m = [0.4, 0.0, 1.0]
[[point]]
name = "operator"
position_m = [1.5, 0.0, 1.7]
average_over_height_m = [0.0, 2.0]
"""


@pytest.fixture
def scenario(write_scenario):
    return write_scenario(SCENARIO)


def test_keepout_json_adds_median_and_p95(scenario):
    result = run("keepout", scenario, "--json")
    assert result.exit_code == 0, result.stderr
    data = strict_json(result.stdout)
    validate("keepout", data)
    for k in data["keepout"]:
        assert k["distance_median_m"] > 0
        assert k["distance_p95_m"] > k["distance_median_m"]
    assert data["uncertainty"]["samples"] == 200
    text = run("keepout", scenario)
    assert "95th percentile" in text.stdout


def test_probe_json_adds_stay_times_and_the_spatial_average(scenario):
    result = run("probe", scenario, "--json")
    assert result.exit_code == 0, result.stderr
    data = strict_json(result.stdout)
    validate("probe", data)
    near, operator = data["points"]
    # over the limits at 0.4 m: T / q (linear) and the brief rule for the local limit
    q = near["quotients"]["icnirp-2020/general-public"]
    assert q > 1
    assert near["allowed_s"]["icnirp-2020/general-public"] == pytest.approx(1800 / q)
    q_local = near["quotients"]["icnirp-2020/occupational-local"]
    local = near["allowed_s"]["icnirp-2020/occupational-local"]
    if q_local >= 1:
        assert local <= 360 / q_local
    else:
        assert local is None
    assert "spatial_average_w_m2" not in near
    assert operator["spatial_average_w_m2"] > 0
    comparison = operator["spatial_average_comparison"]
    assert comparison["icnirp-2020/general-public"]["compared_with"] == "spatial average"
    assert comparison["icnirp-2020/occupational-local"]["compared_with"] == "point value"
    text = run("probe", scenario).stdout
    assert "spatial average over z = 0 .. 2 m (20 points)" in text


def test_readings_command_json_and_text(scenario, tmp_path):
    csv = tmp_path / "r.csv"
    csv.write_text(
        "x_m,y_m,z_m,value,unit,label\n1.0,0.0,1.0,30.0,mW/cm2,hot spot\n2.0,0.0,1.0,0.0001,W/m2,\n"
    )
    result = run("readings", scenario, "--csv", csv, "--json")
    assert result.exit_code == 0, result.stderr
    data = strict_json(result.stdout)
    validate("readings", data)
    first, second = data["readings"]
    assert first["measured_w_m2"] == pytest.approx(300.0)  # 30 mW/cm2 (OET 65 sec. 1)
    assert first["under_predicted"] and "icnirp-2020/general-public" in first["over_limits"]
    assert not second["under_predicted"]
    assert data["suggested_margin_db"] == first["ratio_db"]
    assert math.isclose(
        first["ratio_db"],
        10 * math.log10(first["measured_w_m2"] / first["predicted_w_m2"]),
        abs_tol=0.006,
    )
    text = run("readings", scenario, "--csv", csv)
    assert text.exit_code == 0 and "time-averaged prediction" in text.stdout
    assert "UNDER-PREDICTED" in text.stdout and "CAUTION" in text.stdout


@pytest.mark.parametrize(
    ("content", "fragment"),
    [
        ("x_m,y_m,z_m,value\n1,0,1,1\n", "row 1: header"),
        ("x_m,y_m,z_m,value,unit\n1,0,1,1,mW/m2\n", "row 2, column unit"),
    ],
)
def test_readings_bad_csv_exit_2_names_file_row_column(scenario, tmp_path, content, fragment):
    csv = tmp_path / "bad.csv"
    csv.write_text(content)
    result = run("readings", scenario, "--csv", csv)
    assert result.exit_code == 2
    assert fragment in result.stderr and "bad.csv" in result.stderr
    assert "Traceback" not in result.stderr


def test_bad_average_over_height(write_scenario):
    path = write_scenario(SCENARIO.replace("[0.0, 2.0]", "[2.0, 0.5]"))
    result = run("probe", path)
    assert result.exit_code == 2
    assert "point.2.average_over_height_m" in result.stderr
