"""The sources, described: peak gain and direction, EIRP while on and averaged, far field.

Each figure is checked against its textbook closed form.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants

from keepclear.fields.describe import describe_sources, sources_text
from keepclear.fields.scenario import load_scenario

from .conftest import SCENARIOS

WAVELENGTH_M = constants.c / 2.45e9


def _one(write_scenario, source: str) -> dict:
    text = 'name = "described"\n[exposure]\nlimits = ["icnirp-2020/general-public"]\n' + source
    return describe_sources(load_scenario(write_scenario(text)))[0]


def test_isotropic_eirp_is_power_times_the_stated_gain(write_scenario):
    d = _one(
        write_scenario,
        "[[source]]\nid = 'iso'\nantenna = 'isotropic'\npower_w = 300.0\nduty_cycle = 0.25\n"
        "gain_dbi = 6.0\nposition_m = [0, 0, 1]\n",
    )
    # EIRP = P G (IEEE Std 145-2013, effective isotropically radiated power).
    assert d["peak_gain_dbi"] == pytest.approx(6.0, abs=1e-9)
    assert d["eirp_w"] == pytest.approx(300.0 * 10**0.6, rel=1e-9)
    assert d["average_eirp_w"] == pytest.approx(0.25 * 300.0 * 10**0.6, rel=1e-9)
    assert np.linalg.norm(d["peak_direction"]) == pytest.approx(1.0, abs=1e-12)


def test_half_wave_dipole_peak_gain_and_broadside_direction(write_scenario):
    d = _one(
        write_scenario,
        "[[source]]\nid = 'dip'\nantenna = 'dipole'\npower_w = 10.0\n"
        f"length_m = {WAVELENGTH_M / 2}\naxis = [0, 0, 1]\nposition_m = [0, 0, 2]\n",
    )
    # Balanis, Antenna Theory 4th ed., eq. (4-91): D0 = 1.643 for the half-wave dipole,
    # 2.16 dBi; the thin-wire model is within 0.02 dB of it.
    assert d["peak_gain_dbi"] == pytest.approx(10 * math.log10(1.643), abs=0.02)
    # The peak is broadside: perpendicular to the wire axis.
    assert abs(d["peak_direction"][2]) < 1e-6
    assert d["eirp_w"] == pytest.approx(10.0 * 10 ** (d["peak_gain_dbi"] / 10), rel=1e-9)


def test_quarter_wave_monopole_on_infinite_ground(write_scenario):
    d = _one(
        write_scenario,
        "[[source]]\nid = 'whip'\nantenna = 'monopole'\npower_w = 10.0\n"
        f"length_m = {WAVELENGTH_M / 4}\naxis = [0, 0, 1]\nposition_m = [0, 0, 0]\n",
    )
    # Balanis 4th ed., sec. 4.7.4: twice the half-wave dipole's directivity, 3.286 (5.17 dBi).
    assert d["peak_gain_dbi"] == pytest.approx(10 * math.log10(3.286), abs=0.02)
    assert abs(d["peak_direction"][2]) < 1e-6


def test_demo_horn_points_along_its_boresight_with_the_fraunhofer_distance():
    scenario = load_scenario(SCENARIOS / "horn-bench-options.toml")
    d = describe_sources(scenario)[0]
    radiator = scenario.sources[0].radiator
    assert d["peak_direction"] == pytest.approx([1.0, 0.0, 0.0], abs=1e-12)
    assert d["peak_gain_dbi"] == pytest.approx(10 * math.log10(radiator.max_gain()), abs=1e-9)
    # Balanis 4th ed., eq. (2-1): R = 2 D^2 / lambda; the 0.24 m x 0.18 m aperture's
    # diagonal is D = 0.30 m.
    assert d["far_field_distance_m"] == pytest.approx(2 * 0.30**2 / WAVELENGTH_M, rel=1e-6)
    source = scenario.sources[0]
    assert d["average_eirp_w"] == pytest.approx(source.duty_cycle * d["eirp_w"], rel=1e-12)
    (line,) = sources_text([d])
    assert "dBi" in line and "EIRP" in line


def test_every_bundled_source_is_described_with_finite_numbers():
    for path in sorted(SCENARIOS.glob("*.toml")):
        for d in describe_sources(load_scenario(path)):
            assert math.isfinite(d["peak_gain_dbi"]), path.name
            assert d["eirp_w"] >= d["average_eirp_w"] > 0, path.name
            assert d["far_field_distance_m"] >= 0, path.name
