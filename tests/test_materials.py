"""Building materials after ITU-R P.2040 Table 3.

Edition checked: ITU-R P.2040-3 (08/2023), Table 3 (1-100 GHz rows, unchanged from
P.2040-2 (09/2021)).  P.2040-1 (07/2015) had concrete 5.31 / 0.0326 / 0.8095 and
glass 6.27 / 0.0043 / 1.1925 instead (from memory, corroborated by the MathWorks
R2021a example at 9 GHz: 5.31 and 0.19305 S/m for concrete, 6.27 and 0.059075 S/m
for glass).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import constants

from keepclear.antennas.base import ModelInputError, ModelRangeWarning
from keepclear.fields.materials import (
    MATERIAL_NAMES,
    MATERIALS,
    canonical_material_name,
    permittivity_and_conductivity_itu_p2040,
    relative_permittivity_itu_p2040,
)

F_HZ = 2.45e9


def test_concrete_at_2_45_ghz_itu_p2040_3_table_3():
    # ITU-R P.2040-3 (08/2023) Table 3, concrete: a = 5.24, b = 0, c = 0.0462, d = 0.7822,
    # 1-100 GHz (FOUND secondary: NVlabs/sionna-rt itu.py; wavetracer.dev P.2040-2 Table 3).
    eta, sigma = permittivity_and_conductivity_itu_p2040("concrete", F_HZ)
    assert eta == pytest.approx(5.24, abs=1e-12)
    # sigma = 0.0462 * 2.45^0.7822 = 0.09312 S/m (worked by hand in the project notes, sec. 3).
    assert sigma == pytest.approx(0.09312, abs=2e-5)
    eps = relative_permittivity_itu_p2040("concrete", F_HZ)
    # eta'' = sigma / (2 pi f eps0) = 17.98 sigma / f_GHz = 0.6832 (P.2040 eq. (9b), notes).
    assert eps.real == pytest.approx(5.24)
    assert -eps.imag == pytest.approx(0.6832, abs=2e-4)
    assert -eps.imag == pytest.approx(sigma / (2 * math.pi * F_HZ * constants.epsilon_0))
    # Normal incidence, Balanis AEE 2nd ed. sec. 5.2: Gamma = (1 - sqrt(eps))/(1 + sqrt(eps));
    # |Gamma|^2 = 0.156 (project notes sec. 3, worked by hand).  sqrt(eps) by hand here:
    # |eps| = 5.2843, arg = -0.12966 rad, so sqrt(eps) = 2.2988 at -0.06483 rad
    # = 2.2939 - j0.1489.
    root = np.sqrt(eps)
    assert root.real == pytest.approx(2.2939, abs=2e-4)
    assert root.imag == pytest.approx(-0.1489, abs=2e-4)
    gamma = (1 - root) / (1 + root)
    assert abs(gamma) ** 2 == pytest.approx(0.156, abs=1e-3)


def test_glass_at_2_45_ghz_itu_p2040_3_table_3():
    # ITU-R P.2040-3 Table 3, glass: a = 6.31, b = 0, c = 0.0036, d = 1.3394, 0.1-100 GHz.
    eta, sigma = permittivity_and_conductivity_itu_p2040("glass", F_HZ)
    assert eta == pytest.approx(6.31, abs=1e-12)
    # 0.0036 * 2.45^1.3394 = 0.0036 * exp(1.3394 * 0.89609) = 0.0036 * 3.3209 = 0.011955 S/m
    assert sigma == pytest.approx(0.011955, abs=5e-6)
    eps = relative_permittivity_itu_p2040("glass", F_HZ)
    assert -eps.imag == pytest.approx(0.0877, abs=2e-4)  # 17.98 * 0.011955 / 2.45
    gamma = (1 - np.sqrt(eps)) / (1 + np.sqrt(eps))
    # Project notes sec. 3: |Gamma|^2 = 0.185 for glass at normal incidence (DERIVED there).
    assert abs(gamma) ** 2 == pytest.approx(0.185, abs=1e-3)
    # A lossless check of the same number: (sqrt(6.31) - 1)/(sqrt(6.31) + 1) = 0.4305.
    assert abs(gamma) == pytest.approx((math.sqrt(6.31) - 1) / (math.sqrt(6.31) + 1), abs=1e-3)


@pytest.mark.parametrize(
    ("name", "eta", "sigma"),
    [
        # MathWorks buildingMaterialPermittivity documentation (cites ITU-R P.2040-3), example
        # table at 9 GHz (FOUND secondary): real permittivity and conductivity [S/m].
        ("concrete", 5.24, 0.25766),
        ("brick", 3.91, 0.033826),
        ("plasterboard", 2.73, 0.066978),
        ("wood", 1.99, 0.049528),
        ("glass", 6.31, 0.068299),
    ],
)
def test_nine_ghz_values_match_published_table(name, eta, sigma):
    e, s = permittivity_and_conductivity_itu_p2040(name, 9e9)
    assert e == pytest.approx(eta, abs=1e-9)
    assert s == pytest.approx(sigma, rel=5e-5)


def test_ground_types_power_laws():
    # P.2040-3 Table 3: medium dry ground a = 15, b = -0.1, c = 0.035, d = 1.63 (1-10 GHz);
    # project notes sec. 3 (worked by hand): eta' = 13.71, sigma = 0.151 S/m at 2.45 GHz.
    eta, sigma = permittivity_and_conductivity_itu_p2040("medium-dry-ground", F_HZ)
    assert eta == pytest.approx(13.71, abs=0.01)
    assert sigma == pytest.approx(0.151, abs=1e-3)
    # wet ground a = 30, b = -0.4, c = 0.15, d = 1.30: eta' = 20.96, sigma = 0.481 S/m.
    eta, sigma = permittivity_and_conductivity_itu_p2040("wet-ground", F_HZ)
    assert eta == pytest.approx(20.96, abs=0.01)
    assert sigma == pytest.approx(0.481, abs=1e-3)


def test_every_required_material_is_present_with_a_range():
    # The names of the task (ITU-R P.2040 Table 3 material classes).
    required = [
        "vacuum", "concrete", "brick", "plasterboard", "wood", "glass", "ceiling-board",
        "chipboard", "plywood", "marble", "floorboard", "metal", "very-dry-ground",
        "medium-dry-ground", "wet-ground",
    ]  # fmt: skip
    assert list(MATERIAL_NAMES) == required
    for name in required:
        row = MATERIALS[name]
        assert 0 < row.f_min_ghz < row.f_max_ghz <= 100
    # Ranges quoted in P.2040-3 Table 3 (FOUND secondary, sionna-rt / geo2sigmap):
    assert (MATERIALS["brick"].f_min_ghz, MATERIALS["brick"].f_max_ghz) == (1.0, 40.0)
    assert (MATERIALS["floorboard"].f_min_ghz, MATERIALS["floorboard"].f_max_ghz) == (50.0, 100.0)
    assert MATERIALS["wet-ground"].hard_limit and not MATERIALS["concrete"].hard_limit


def test_lossy_sign_convention_e_plus_jwt():
    # e^{+jwt}: a lossy medium has a negative imaginary permittivity (Balanis AEE sec. 4.3).
    for name in MATERIAL_NAMES:
        eps = relative_permittivity_itu_p2040(name, F_HZ, warn=False)
        assert eps.imag <= 0
        assert eps.real >= 1


@pytest.mark.parametrize(
    ("spelling", "name"),
    [
        ("Concrete", "concrete"),
        ("ceiling_board", "ceiling-board"),
        ("Ceiling board", "ceiling-board"),
        ("very dry ground", "very-dry-ground"),
        ("MEDIUM_DRY_GROUND", "medium-dry-ground"),
        ("air", "vacuum"),
    ],
)
def test_aliases(spelling, name):
    assert canonical_material_name(spelling) == name


def test_unknown_material_lists_names_and_suggests():
    with pytest.raises(ModelInputError) as info:
        relative_permittivity_itu_p2040("concret", F_HZ)
    assert info.value.parameter == "material"
    assert "did you mean 'concrete'" in info.value.message
    assert "plasterboard" in info.value.message and "wet-ground" in info.value.message


def test_bad_frequency_is_an_input_error():
    with pytest.raises(ModelInputError) as info:
        relative_permittivity_itu_p2040("concrete", -1.0)
    assert info.value.parameter == "frequency_hz"


def test_out_of_range_warns():
    # Floorboard's Table 3 row covers 50-100 GHz only: 2.45 GHz is an extrapolation.
    with pytest.warns(ModelRangeWarning, match="floorboard"):
        relative_permittivity_itu_p2040("floorboard", F_HZ)
    # Ground types: P.2040 gives 1-10 GHz as a hard limit (MathWorks P.2040 page, FOUND).
    with pytest.warns(ModelRangeWarning, match="hard limit"):
        relative_permittivity_itu_p2040("wet-ground", 20e9)
    # Inside the range: no warning at all.
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        relative_permittivity_itu_p2040("concrete", F_HZ)
        relative_permittivity_itu_p2040("wood", 0.5e9)
