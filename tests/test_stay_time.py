"""Stay time per averaging window against hand calculations from the standards' rules.

References
----------
- Linear time averaging: FCC OET Bulletin 65, Edition 97-01 (1997), sec. 2 ("time
  averaging"): the exposure S for t seconds of a window T averages to S t / T, so the
  longest stay is T S_lim / S.
- Brief local exposure: ICNIRP 2020 guidelines, Health Phys. 118(5), Table 7 (from
  memory, not checked against the printed table): U = S_6min * 360 s * (0.05 + 0.95
  sqrt(t/360)) for 400 MHz to 6 GHz, S_6min the Table 6 level (40 W/m^2 general public,
  200 W/m^2 occupational above 2 GHz: FOUND, secondary, Bioelectromagnetism Table 7.8).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from keepclear.fields import limits as limits_mod
from keepclear.fields import stay_time as st

F = 2.45e9


def value(limit_id: str):
    return limits_mod.get_limit(limit_id).at(F)


@pytest.mark.parametrize("q", [1.0, 1.5, 4.0, 30.0])
def test_linear_rule_by_hand_icnirp_whole_body_30_min(q):
    # ICNIRP 2020 Table 5: 10 W/m^2 over 30 min. A place at q times the limit: 1800 s / q.
    out = st.allowed_stay(value("icnirp-2020/general-public"), q)
    assert out.seconds == pytest.approx(1800.0 / q, rel=1e-12)


def test_fcc_occupational_six_minutes_by_hand():
    # 47 CFR 1.1310 Table 1: occupational 5 mW/cm^2 averaged over 6 min. At 100 W/m^2
    # (q = 2): 360 s / 2 = 180 s.
    out = st.allowed_stay(value("fcc-1.1310/occupational"), 100.0 / 50.0)
    assert out.seconds == pytest.approx(180.0)


@pytest.mark.parametrize("q", [0.0, 0.5, 0.999])
def test_below_the_limit_gives_no_stay_time(q):
    assert st.allowed_stay(value("icnirp-2020/general-public"), q).seconds is None
    assert st.allowed_stay(value("icnirp-2020/general-public-local"), q).seconds is None


def test_no_averaging_time_gives_none():
    v = value("fda-1030.10/before-purchase")
    if v.averaging_time_s is None:
        assert st.allowed_stay(v, 5.0).seconds is None


@pytest.mark.parametrize("q", [1.0, 1.2, 2.0, 5.0, 20.0, 400.0])
def test_brief_rule_matches_the_energy_formula_and_is_never_longer(q):
    # Hand calculation for the general-public local level, 40 W/m^2 (ICNIRP 2020 Table 6):
    # the stay t solves S t = U(t) = 40 * 360 * (0.05 + 0.95 sqrt(t/360)).
    v = value("icnirp-2020/general-public-local")
    s = q * 40.0
    out = st.allowed_stay(v, q)
    t = out.seconds
    assert t is not None and t <= 360.0 / q * (1 + 1e-12)  # never longer than linear
    energy_limit = 40.0 * 360.0 * (0.05 + 0.95 * math.sqrt(t / 360.0))
    assert s * t == pytest.approx(energy_limit, rel=1e-9)
    # and the function of the module gives the same limit
    assert st.brief_energy_limit_j_m2(t, 40.0) == pytest.approx(energy_limit, rel=1e-12)
    # every shorter interval stays within its own energy limit
    taus = np.linspace(1e-3, t, 200)
    assert np.all(s * taus <= st.brief_energy_limit_j_m2(taus, 40.0) * (1 + 1e-9))
    if q > 1.0:
        assert "Table 7" in out.rule


def test_brief_rule_worked_example_occupational():
    # 800 W/m^2 at an occupational local limit of 200 W/m^2: q = 4. Linear: 90 s.
    # Brief: 4 y^2 - 0.95 y - 0.05 = 0 -> y = (0.95 + sqrt(0.9025 + 0.8)) / 8 = 0.28184...
    # t = 360 y^2 = 28.598 s; check: 800 * 28.598 = 22 878 J/m^2 = 72 000 * (0.05 + 0.95 * 0.28185).
    out = st.allowed_stay(value("icnirp-2020/occupational-local"), 4.0)
    y = (0.95 + math.sqrt(0.9025 + 0.8)) / 8.0
    assert out.seconds == pytest.approx(360.0 * y * y, rel=1e-12)
    assert out.seconds == pytest.approx(28.598, abs=1e-3)
    assert out.seconds < 90.0


def test_whole_body_limits_use_only_the_linear_rule():
    out = st.allowed_stay(value("icnirp-2020/occupational"), 4.0)
    assert out.seconds == pytest.approx(450.0)
    assert "Table 7" not in out.rule
