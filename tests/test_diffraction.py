"""Fresnel diffraction by edges and rectangles, and the smooth shadows of shield sheets."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from keepclear.antennas.base import C_M_S
from keepclear.fields import diffraction as dif
from keepclear.fields.shield import RatedSpec, Shield

from ._hypothesis import examples

F = 2.45e9
LAM = C_M_S / F


@pytest.mark.parametrize("nu", [-0.5, 0.0, 0.5, 1.0, 2.0, 3.0])
def test_knife_edge_exact_form_against_itu_p526_eq31(nu: float) -> None:
    # ITU-R P.526-15 sec. 4.1: eq. (31), J(nu) = 6.9 + 20 log10(sqrt((nu-0.1)^2+1) + nu - 0.1)
    # for nu > -0.78, approximates the Fresnel-integral J(nu) to about 0.1 dB over this range.
    exact = float(dif.knife_edge_loss_db(nu))
    approx = float(dif.knife_edge_loss_db_approximation(nu))
    assert exact == pytest.approx(approx, abs=0.15)


def test_knife_edge_readings_of_p526_fig7() -> None:
    # ITU-R P.526-15 Fig. 7 (read from the curve, from memory): 6 dB on the shadow boundary,
    # about 0 dB at nu = -0.78, a lit-side ripple of at most about 1.4 dB of gain.
    assert float(dif.knife_edge_loss_db(0.0)) == pytest.approx(6.02, abs=0.01)
    assert abs(float(dif.knife_edge_loss_db(-0.78))) < 0.1
    lit = dif.knife_edge_loss_db(np.linspace(-6, -0.5, 2000))
    assert -1.45 < float(lit.min()) < -1.3
    # deep in the shadow: J -> 20 log10(nu sqrt(2) pi)... i.e. |E/E0| -> 1/(pi nu sqrt 2)
    assert float(dif.knife_edge_loss_db(10.0)) == pytest.approx(
        20 * math.log10(math.pi * 10.0 * math.sqrt(2)), abs=0.05
    )


def half_plane_shield(edge_y_m: float) -> Shield:
    """A 200 dB sheet in the plane x = 0, 20 km square, its upper edge at y = edge_y_m.

    Its other edges are so far away (nu of several hundred) that it is a half plane.
    """
    return Shield(
        np.array([0.0, edge_y_m - 1e4, 0.0]),
        np.array([1.0, 0.0, 0.0]),
        2e4,
        2e4,
        RatedSpec(200.0),
        F,
    )


@pytest.mark.parametrize("nu", [0.5, 1.0, 2.0, 3.0])
def test_sheet_edge_reproduces_p526_knife_edge(nu: float) -> None:
    # Source 3 m before the sheet, point 3 m behind it, the ray crossing h below the edge:
    # nu = h sqrt(2 (d1 + d2) / (lambda d1 d2)) (P.526-15 eq. (22)); the loss must follow
    # J(nu) of eq. (31) within its 0.15 dB agreement with the exact form, plus 0.1 dB for the
    # exact path excess the model uses at 17 degrees off the ray (nu = 3).
    d = 3.0
    h = nu / math.sqrt(2 * 2 * d / (LAM * d * d))
    shield = half_plane_shield(h)
    f = shield.amplitude_factor(np.array([-d, 0.0, 0.0]), np.array([[d, 0.0, 0.0]]))[0]
    assert -20 * math.log10(f) == pytest.approx(
        float(dif.knife_edge_loss_db_approximation(nu)), abs=0.25
    )


def kirchhoff_aperture_quadrature(source, point, half_w, half_h, n=500):
    """Fresnel-Kirchhoff integral over a rectangle in z = 0, relative to the free field.

    Born and Wolf, Principles of Optics, 7th ed., sec. 8.3.2 (the Fresnel-Kirchhoff
    diffraction formula) with the obliquity factor (cos t1 + cos t2)/2, evaluated by the
    midpoint rule (no paraxial approximation).
    """
    k = 2 * math.pi / LAM
    x = (np.arange(n) + 0.5) / n * 2 * half_w - half_w
    y = (np.arange(n) + 0.5) / n * 2 * half_h - half_h
    xx, yy = np.meshgrid(x, y)
    q = np.stack([xx, yy, np.zeros_like(xx)], axis=-1)
    r1 = np.linalg.norm(q - source, axis=-1)
    r2 = np.linalg.norm(q - point, axis=-1)
    c1 = abs(source[2]) / r1
    c2 = abs(point[2]) / r2
    integrand = np.exp(-1j * k * (r1 + r2)) / (r1 * r2) * (c1 + c2) / 2
    u = 1j / LAM * integrand.sum() * (2 * half_w / n) * (2 * half_h / n)
    r = np.linalg.norm(point - source)
    return u / (np.exp(-1j * k * r) / r)


@pytest.mark.parametrize(
    "point", [[0.0, 0.0, -1.0], [0.15, 0.05, -1.0], [0.35, -0.1, -0.8], [0.6, 0.0, -1.2]]
)
def test_rectangle_closed_form_against_kirchhoff_quadrature(point) -> None:
    # A 0.5 m x 0.3 m rectangle, source 1 m before it: inside the beam, on and beyond the
    # reflection boundary.  The paraxial closed form (P.526-15 sec. 5.2.1.1) against the
    # full Fresnel-Kirchhoff integral: within 0.07 in amplitude relative to the free field
    # (the paraxial form's error grows with the ray's tilt, 10 degrees at the third point).
    source = np.array([0.05, 0.02, 1.0])
    p = np.array(point, dtype=float)
    quad = kirchhoff_aperture_quadrature(source, p, 0.25, 0.15)
    geo = dif.rectangle_crossing(
        source[None, :],
        p[None, :],
        np.zeros(3),
        np.array([0.0, 0.0, 1.0]),
        np.array([1.0, 0.0, 0.0]),
        np.array([0.0, 1.0, 0.0]),
        0.25,
        0.15,
        LAM,
    )
    closed = dif.rectangle_aperture_factor(geo.nu)[0]
    assert abs(closed - quad) < 0.07, (closed, quad)


def db_steps_along(shield, source, start, direction, length_m=2.0, step_m=0.01):
    t = np.arange(0.0, length_m + step_m / 2, step_m)
    pts = start + t[:, None] * direction
    f = shield.amplitude_factor(source, pts)
    return np.abs(np.diff(20 * np.log10(f)))


def test_the_issue_line_behind_a_1m_sheet_has_no_step() -> None:
    # 1 m x 1 m aluminium sheet (0.5 mm), source 1 m before it, a line 1 m beyond it across
    # the shadow: the hard edge margin stepped 4.8 dB between points 1 cm apart.
    from keepclear.fields import shielding as sh
    from keepclear.fields.shield import SheetSpec

    shield = Shield(
        np.zeros(3),
        np.array([1.0, 0.0, 0.0]),
        1.0,
        1.0,
        SheetSpec(sh.METALS["aluminium"], 0.0005),
        F,
    )
    steps = db_steps_along(
        shield, np.array([-1.0, 0.0, 0.0]), np.array([1.0, -2.0, 0.1]), np.array([0, 1.0, 0]), 4.0
    )
    assert steps.max() < 1.0


@settings(max_examples=examples(40))
@given(
    st.floats(0.3, 2.0),
    st.floats(0.3, 2.0),
    st.floats(0.3, 3.0),
    st.floats(0.3, 2.0),
    st.floats(0.0, 2 * math.pi),
    st.floats(-0.5, 0.5),
    st.floats(0.0, 60.0),
)
def test_no_step_above_1db_per_cm_across_shadow_boundaries(
    width, height, behind_m, before_m, angle, offset, se_db
) -> None:
    # Random lines 2.5 m long in a plane 0.3..3 m behind a sheet, crossing its shadow at a
    # random angle: no step above 1 dB between points 1 cm apart (issue requirement; the
    # Fresnel-Kirchhoff factor is continuous, P.526-15 sec. 5.2).
    shield = Shield(np.zeros(3), np.array([1.0, 0.0, 0.0]), width, height, RatedSpec(se_db), F)
    direction = np.array([0.0, math.cos(angle), math.sin(angle)])
    start = np.array([behind_m, offset, offset]) - 1.25 * direction
    steps = db_steps_along(shield, np.array([-before_m, 0.0, 0.0]), start, direction, 2.5)
    assert steps.max() < 1.0
