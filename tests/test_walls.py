"""Rim and outer walls of open guides and horns (keepclear.antennas.walls)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from keepclear.antennas.aperture import OpenWaveguide, hemisphere_rule
from keepclear.antennas.base import ETA0_OHM, ModelInputError, Placement
from keepclear.antennas.horn import PyramidalHorn
from keepclear.antennas.walls import (
    BACK_MARGIN_DB,
    WalledAperture,
    back_margin,
    hard_fringe,
    soft_slope_fringe,
)

F_HZ = 2.45e9
WR340 = (0.08636, 0.04318)  # EIA WR-340: 3.400 x 1.700 in
DEMO_HORN = (0.24, 0.18, 0.30)  # scenarios/horn-bench-options.toml
LAM = 299792458.0 / F_HZ


def _guide(**kw):
    return WalledAperture(OpenWaveguide(F_HZ, 10.0, *WR340), **kw)


def _horn(**kw):
    horn = PyramidalHorn(F_HZ, 10.0, *WR340, *DEMO_HORN)
    return WalledAperture(horn, flare_half_angles_deg=horn.geometry.flare_half_angles_deg, **kw)


def _dirs(plane: str, degrees) -> np.ndarray:
    t = np.radians(np.asarray(degrees, dtype=float))
    z = np.zeros_like(t)
    if plane == "E":
        return np.stack([z, np.sin(t), np.cos(t)], axis=1)
    return np.stack([np.sin(t), z, np.cos(t)], axis=1)


def _db(x):
    return 10 * np.log10(x)


def _fullwave_boresight_dbi():
    """Peak directivity of the stored open WR-340 case (validation/data), if present."""
    from tests import validation_data as vd

    if "guide-wr340" not in vd.available():
        return None
    case = vd.load("guide-wr340")
    return float(case.peak_directivity_dbi), case.engine


# ------------------------------------------------------------------ published numbers
def test_open_wr340_boresight_directivity_fullwave():
    """Boresight directivity against full-wave (FDTD, openEMS).

    Reference: the stored openEMS case ``guide-wr340`` (validation/data/guide-wr340.json,
    open WR-340 guide, no flange, 2 mm walls, 2.45 GHz, nf2ff peak directivity 6.54 dBi,
    openEMS v0.0.35); without the data file, 6.9 dBi, the openEMS figure quoted in the
    project's issue on the all-around validation.  Tolerance 1 dB: the
    front-region criterion of that validation.
    """
    stored = _fullwave_boresight_dbi()
    reference = stored[0] if stored else 6.9
    guide = _guide()
    g = _db(guide.gain(np.array([[0.0, 0.0, 1.0]]))[0])
    assert abs(g - reference) <= 1.0, (g, reference, stored)
    # the aperture model alone: 6.25 dBi (same source: 0.3-0.65 dB low)
    assert g > _db(guide.aperture.boresight_gain())


def test_open_wr340_boresight_gain_published_range():
    """Against published gains of unflanged open rectangular guides.

    Yaghjian, IEEE Trans. AP-32(4), 378-384 (1984), abstract (p. 378): both his methods
    give the on-axis gain of X-band and larger open-ended guides within about 0.2 dB of
    measurement; our reconstruction of his first method
    (:func:`open_waveguide_gain_variants`, ``"yaghjian-1"``, whole-sphere reading) gives
    5.66 dBi for WR-340 at 2.45 GHz.  The model must not fall below it (a keep-out
    estimate must not shrink), and stays within 1.5 dB above it (the 2 dB pattern
    accuracy Yaghjian quotes for his second method, less margin; the reconstruction is
    from the paper's first page, its equations unread, so the bound is loose).
    """
    from keepclear.antennas.aperture import open_waveguide_gain_variants

    yaghjian = open_waveguide_gain_variants(*WR340, F_HZ)["yaghjian-1"]
    g = _db(_guide().gain(np.array([[0.0, 0.0, 1.0]]))[0])
    assert yaghjian - 0.2 <= g <= yaghjian + 1.5, (g, yaghjian)


def test_issue_figures_open_guide_behind_and_beside():
    """Held against the full-wave figures of the open WR-340 guide (same source as above).

    The aperture-only model was up to 7.5 dB high at 90 deg in the H-plane and 5-6 dB
    low beside the feed guide; the walled model must be no more than 6 dB above the
    full-wave value at H-plane 90 deg (full-wave = aperture model - 7.5 dB) and lift
    every direction behind the aperture plane above the aperture-only value.
    """
    guide = _guide()
    kirchhoff = guide.aperture
    h90 = _dirs("H", [90.0])
    fullwave_h90 = _db(kirchhoff.gain(h90)[0]) - 7.5
    # the rim term itself; the back-region margin (BACK_MARGIN_DB) comes on top of it
    assert _db(guide.gain(h90)[0]) - BACK_MARGIN_DB <= fullwave_h90 + 6.0
    behind = np.concatenate([_dirs("E", [120, 135, 150, 180]), _dirs("H", [120, 135, 150])])
    assert np.all(guide.gain(behind) > kirchhoff.gain(behind))


def test_issue_figures_horn_front_and_back():
    """Pyramidal horn on WR-340 (full-wave figures, same source).

    Within 0.6 dB of full-wave in front out to 45 deg, where the aperture model is good:
    the rim must not move the front by more than 0.6 dB there; 15 dB low at 135 deg in
    the E-plane: the rim term must lift that direction by at least 6 dB.
    """
    horn = _horn()
    front = np.concatenate([_dirs("E", [0, 15, 30, 45]), _dirs("H", [15, 30, 45])])
    g = horn.gain(front)
    g0 = horn.aperture.gain(front)
    strong = g0 > g0.max() * 10 ** (-1.5)  # compare where the beam is, not in its nulls
    assert np.all(np.abs(_db(g[strong]) - _db(g0[strong])) <= 0.6)
    e135 = _dirs("E", [135.0])
    assert _db(horn.gain(e135)[0]) - _db(horn.aperture.gain(e135)[0]) >= 6.0


# ------------------------------------------------------------------ identities
@pytest.mark.parametrize("make", [_guide, _horn, lambda: _guide(flange_m=[0.3, 0.2])])
@pytest.mark.parametrize("normalize", ["aperture", "total"])
def test_power_conservation_over_sphere(make, normalize):
    """Radiated power over the sphere: power_w ("total") or power_ratio * power_w.

    Common practice, no source: Gauss-Legendre in cos(theta), trapezoid in phi, on a
    finer rule than the model's own normalisation; within 2 %.
    """
    radiator = make() if normalize == "aperture" else _rebuild(make(), normalize)
    dirs, weights = hemisphere_rule(120)
    total = 0.0
    for flip in (1.0, -1.0):
        d = dirs * np.array([1.0, 1.0, flip])
        # the power of the model's currents: the back-region margin taken out
        f = radiator.far_field(d) / back_margin(d, radiator.back_margin_db)[:, None]
        total += float(np.sum(np.abs(f) ** 2, axis=1) @ weights) / ETA0_OHM
    expected = radiator.power_w * (radiator.power_ratio if normalize == "aperture" else 1.0)
    assert abs(total / expected - 1.0) < 0.02
    # the near field far out agrees with the pattern (1/r^2 law, far field)
    r = 200.0
    u = np.array([[0.0, 0.6, 0.8], [0.7, 0.0, -0.714142842854285]])
    e, _ = radiator.fields(r * u)
    f = radiator.far_field(u)
    assert np.allclose(np.abs(e) ** 2 * r * r, np.abs(f) ** 2, rtol=0.05, atol=1e-6)


def _rebuild(walled: WalledAperture, normalize: str) -> WalledAperture:
    return WalledAperture(
        walled.aperture,
        walled.flange_m,
        flare_half_angles_deg=walled.flare_half_angles_deg,
        normalize=normalize,
    )


def test_continuity_across_aperture_plane_and_around_rim():
    """No jump in |E| across z = 0 beside the opening, nor around the rim edge.

    A smooth field between neighbouring points lambda/200 apart: |E| changes by less
    than 5 % (common practice, no source).  Paths: across the aperture plane beside
    the guide (x = 0.1 m), and a half-circle of radius lambda/4 round the top rim edge
    from in front to behind the wall.
    """
    guide = _guide()
    step = LAM / 200
    z = np.arange(-0.05, 0.05, step)
    line = np.stack([np.full_like(z, 0.1), np.full_like(z, 0.01), z], axis=1)
    ang = np.linspace(0.0, np.pi, 400)
    rho = LAM / 4
    arc = np.stack(
        [np.full_like(ang, 0.01), WR340[1] / 2 + rho * np.sin(ang), rho * np.cos(ang)], axis=1
    )
    for path in (line, arc):
        e, h = guide.fields(path)
        mag = np.linalg.norm(e, axis=1)
        assert np.all(np.isfinite(mag)) and np.all(np.isfinite(h))
        jumps = np.abs(np.diff(mag)) / np.maximum(mag[:-1], 1e-12)
        assert jumps.max() < 0.05, jumps.max()


def test_never_below_aperture_model_behind():
    """Behind the aperture plane and beside the feed, the walled guide and horn do not
    fall below the aperture-only model by more than the validation allows (3 dB), at
    points 0.3-1 m from the source (the test_fullwave criterion, "never more than 3 dB
    below" the reference, applied to the aperture model, which is itself low there).
    """
    rng = np.random.default_rng(7)
    for make in (_guide, _horn):
        radiator = make()
        u = rng.normal(size=(400, 3))
        u /= np.linalg.norm(u, axis=1, keepdims=True)
        u = u[u[:, 2] < -0.1]
        pts = u * rng.uniform(0.3, 1.0, size=(u.shape[0], 1))
        e, _ = radiator.fields(pts)
        e0, _ = radiator.aperture.fields(pts)
        s = np.sum(np.abs(e) ** 2, axis=1)
        s0 = np.sum(np.abs(e0) ** 2, axis=1)
        assert np.all(s >= s0 * 10 ** (-0.3))


def test_flange_reduces_back_radiation():
    """A flange shields the guide's outer walls: less radiation behind than bare walls.

    Common practice, no source (a flange raises the front-to-back ratio of an open
    guide).  Mean gain over the back hemisphere, and a larger flange less again.
    """
    d = np.random.default_rng(3).normal(size=(2000, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    back = d[d[:, 2] < -0.2]
    bare = _guide().gain(back).mean()
    small = _guide(flange_m=[0.2, 0.15]).gain(back).mean()
    large = _guide(flange_m=[0.5, 0.5]).gain(back).mean()
    assert small < bare and large < small


def test_fringe_shapes_published_limits():
    """The fringe shapes at the half-plane's limits (Kouyoumjian and Pathak 1974, n = 2,
    grazing incidence): zero on the shadow boundary for the hard edge, the full half-plane
    value 1 straight back along the wall, tan(psi/4) in between on the lit side; the soft
    slope shape -1/(4 cos^2(psi/4)): -1/4 on the boundary, -1/2 straight back.
    """
    assert hard_fringe(np.array([0.0]))[0] == pytest.approx(0.0, abs=1e-15)
    assert hard_fringe(np.array([np.pi]))[0] == pytest.approx(1.0)
    assert hard_fringe(np.array([-np.pi]))[0] == pytest.approx(1.0)
    assert hard_fringe(np.array([1.0]))[0] == pytest.approx(np.tan(0.25))
    assert soft_slope_fringe(np.array([0.0]))[0] == pytest.approx(-0.25)
    assert soft_slope_fringe(np.array([np.pi]))[0] == pytest.approx(-0.5)
    psi = np.linspace(-np.pi, np.pi, 2001)
    assert np.all(np.abs(np.diff(hard_fringe(psi))) < 0.02)  # continuous


def test_rotation_of_placement():
    """Fields follow the placement (rotation invariance, common practice, no source)."""
    placed = WalledAperture(
        OpenWaveguide(F_HZ, 10.0, *WR340, Placement.from_axes([1, 2, 3], [1, 0, 0], [0, 0, 1]))
    )
    local = _guide()
    p_local = np.array([[0.3, -0.2, -0.4], [0.0, 0.1, 0.5]])
    p = placed.placement.position_m + p_local @ placed.placement.rotation.T
    e_placed, _ = placed.fields(p)
    e_local, _ = local.fields(p_local)
    assert np.allclose(np.linalg.norm(e_placed, axis=1), np.linalg.norm(e_local, axis=1),
                       rtol=1e-9)  # fmt: skip


@pytest.mark.parametrize(
    ("flange", "fragment"),
    [([0.05, 0.2], "smaller than the opening"), ([0.3, -1.0], "positive, finite"),
     ([0.3, float("nan")], "positive, finite"), ([0.3], "two")],
)  # fmt: skip
def test_flange_validation(flange, fragment):
    with pytest.raises(ModelInputError, match=fragment) as info:
        _guide(flange_m=flange)
    assert info.value.parameter == "flange_m"


def test_flange_key_in_scenario_cli(tmp_path):
    """flange_m through the command line: accepted, and refused with exit 2 naming the key."""
    body = (
        'name = "flanged guide"\n[[source]]\nantenna = "open-waveguide"\nwaveguide = "WR-340"\n'
        "power_w = 100.0\nposition_m = [0, 0, 1]\nboresight = [1, 0, 0]\nflange_m = {}\n"
    )
    ok = tmp_path / "ok.toml"
    ok.write_text(body.format("[0.3, 0.2]"))
    bad = tmp_path / "bad.toml"
    bad.write_text(body.format("[0.05, 0.2]"))
    from typer.testing import CliRunner

    from keepclear.fields.cli import app

    runner = CliRunner()
    res = runner.invoke(app, ["probe", str(ok), "--at", "-0.3,0.2,1", "--json"])
    assert res.exit_code == 0, res.output
    assert json.loads(res.stdout)["points"][0]["power_density_w_m2"] > 0
    res = runner.invoke(app, ["probe", str(bad), "--at", "1,0,1", "--json"])
    assert res.exit_code == 2
    assert "flange_m" in res.output and "smaller than the opening" in res.output


def test_fast_enough_shape_only():
    """The rim adds a few dozen line-source nodes, not a surface: a sanity check of the
    model's size (speed itself is measured in tests/benchmarks/bench_walls.py)."""
    assert sum(e.nodes_m.shape[0] for e in _guide().edges) <= 64
    assert sum(e.nodes_m.shape[0] for e in _horn().edges) <= 160
