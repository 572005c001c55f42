"""Survey readings: unit conversion, comparison and flags, bad files.

References
----------
- FCC OET Bulletin 65, Edition 97-01 (1997), sec. 1: 1 mW/cm^2 = 10 W/m^2; plane-wave
  equivalent power density S = E^2 / 377 = 377 H^2 (eta0 = 376.73 ohm from
  scipy.constants).
- The 3 dB under-prediction threshold is the contract's; a meter's combined uncertainty
  of about that size is common practice, no source.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants

from keepclear.fields import readings as rd
from keepclear.fields.errors import InputError

ETA0 = math.sqrt(constants.mu_0 / constants.epsilon_0)


def test_unit_conversions_by_hand():
    assert rd.power_density_from_reading(1.0, "mW/cm2") == pytest.approx(10.0)  # OET 65 sec. 1
    assert rd.power_density_from_reading(2.5, "W/m2") == 2.5
    assert rd.power_density_from_reading(61.4, "V/m") == pytest.approx(61.4**2 / ETA0)
    assert rd.power_density_from_reading(61.4, "V/m") == pytest.approx(10.0, rel=2e-3)
    assert rd.power_density_from_reading(0.163, "A/m") == pytest.approx(ETA0 * 0.163**2)
    assert rd.power_density_from_reading(0.163, "A/m") == pytest.approx(10.0, rel=3e-3)


def test_six_db_above_is_flagged_and_at_the_prediction_is_not():
    readings = [
        rd.Reading(np.zeros(3), 4.0 * 10**0.6, "W/m2", "hot"),
        rd.Reading(np.ones(3), 4.0, "W/m2", "equal"),
        rd.Reading(np.ones(3), 0.1, "mW/cm2", "same in mW/cm2"),
        rd.Reading(np.ones(3), 1.0, "W/m2", "below"),
    ]
    predicted = np.array([4.0, 4.0, 1.0, 4.0])
    out = rd.compare_readings(readings, predicted, {"x/limit": np.array([2.0, 0.4, 0.1, 0.1])})
    rows = out["readings"]
    assert rows[0]["ratio_db"] == pytest.approx(6.0, abs=0.01) and rows[0]["under_predicted"]
    assert rows[1]["ratio_db"] == 0.0 and not rows[1]["under_predicted"]
    assert rows[2]["ratio_db"] == 0.0 and rows[2]["measured_w_m2"] == pytest.approx(1.0)
    assert rows[3]["ratio_db"] == pytest.approx(-6.02, abs=0.01)
    assert rows[0]["over_limits"] == ["x/limit"] and rows[1]["over_limits"] == []
    assert out["largest_under_prediction_db"] == pytest.approx(6.0, abs=0.01)
    assert out["suggested_margin_db"] == pytest.approx(6.0, abs=0.01)


def test_margin_is_zero_when_every_reading_is_below():
    readings = [rd.Reading(np.zeros(3), 1.0, "W/m2")]
    out = rd.compare_readings(readings, np.array([2.0]), {})
    assert out["suggested_margin_db"] == 0.0
    assert out["largest_under_prediction_db"] == pytest.approx(-3.01, abs=0.01)


def test_reads_mixed_units_and_labels(tmp_path):
    path = tmp_path / "r.csv"
    path.write_text(
        "x_m,y_m,z_m,value,unit,label\n1,0,1,0.5,mW/cm2,desk\n-0.5,2,1.2,27.5,V/m,door\n"
        "0,0,2,0.05,A/m,\n"
    )
    got = rd.read_readings_csv(path)
    assert [r.label for r in got] == ["desk", "door", ""]
    assert got[0].power_density_w_m2 == pytest.approx(5.0)
    assert got[1].position_m.tolist() == [-0.5, 2.0, 1.2]


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("x,y,z,value,unit\n1,0,1,1,W/m2\n", "row 1: header"),
        ("x_m,y_m,z_m,value,unit\n1,0,1,abc,W/m2\n", "row 2, column value"),
        ("x_m,y_m,z_m,value,unit\n1,0,1,1,W/m2\n1,zz,1,1,W/m2\n", "row 3, column y_m"),
        ("x_m,y_m,z_m,value,unit\n1,0,1,1,dBm\n", "row 2, column unit"),
        ("x_m,y_m,z_m,value,unit\n1,0,1,-1,W/m2\n", "row 2, column value"),
        ("x_m,y_m,z_m,value,unit\n1,0,1\n", "row 2: has 3 columns"),
        ("x_m,y_m,z_m,value,unit\n", "no readings"),
        ("x_m,y_m,z_m,value,unit\n1,0,nan,1,W/m2\n", "column z_m"),
    ],
)
def test_bad_files_name_row_and_column(tmp_path, text, fragment):
    path = tmp_path / "bad.csv"
    path.write_text(text)
    with pytest.raises(InputError) as info:
        rd.read_readings_csv(path)
    assert fragment in str(info.value) and "bad.csv" in str(info.value)


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        rd.read_readings_csv(tmp_path / "none.csv")
