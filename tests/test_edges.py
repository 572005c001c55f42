"""Numerical and file-system edges: singular points, band edges, bounds, atomic outputs.

What is checked, and against what:

* fields at the singular places of every model (the source point, on the wire, on the
  ground plane, on an aperture, on and behind a reflector) and very far away are finite;
  far away they match the published far field (OET 65 eq. (3); Balanis, *Antenna Theory*,
  4th ed., eq. (4-91): half-wave dipole directivity 1.643);
* a frequency exactly on a limit's band edge is inside or outside as the printed table says;
* input sizes are bounded before anything large is allocated;
* 0 sources is refused, 50 sources work and never give less than the first source alone;
* outputs are atomic, never overwrite an input, and an unwritable place gives exit 2 with
  nothing written.
"""

from __future__ import annotations

import math
import os
import pathlib
import textwrap

import numpy as np
import pytest

from keepclear.antennas.base import C_M_S
from keepclear.fields import outputs
from keepclear.fields.limits import get_limit

from ._cli import assert_clean_exit, one_error_line, run, strict_json, validate
from .conftest import ISOTROPIC

WAVELENGTH_M = C_M_S / 2.45e9


def probe(path, *points, allowed=(0,)):
    result = run("probe", path, *[f"--at={x!r},{y!r},{z!r}" for x, y, z in points], "--json")
    assert_clean_exit(result, allowed=allowed)
    if result.exit_code:
        return None
    data = strict_json(result.stdout)
    validate("probe", data)
    return data["points"]


# ------------------------------------------------------------ singular points
DIPOLE = """
[[source]]
antenna = "dipole"
power_w = 100.0
length_m = 0.0612
position_m = [0.0, 0.0, 1.0]
"""
MONOPOLE = """
[[source]]
antenna = "monopole"
power_w = 100.0
length_m = 0.0306
position_m = [0.0, 0.0, 1.0]
"""
FLOOR = """
[[reflector]]
point_m = [0.0, 0.0, 0.0]
normal = [0.0, 0.0, 1.0]
material = "{material}"
"""


def test_isotropic_at_its_source_point_and_far_away(write_scenario):
    path = write_scenario(ISOTROPIC)
    near, far = probe(path, (0.0, 0.0, 0.0), (1e5, 0.0, 0.0))
    assert near["power_density_w_m2"] > 0
    # OET 65 eq. (3): S = P / (4 pi R^2), P = 100 W, R = 1e5 m.
    assert far["power_density_w_m2"] == pytest.approx(100 / (4 * math.pi * 1e10), rel=1e-9)


def test_dipole_on_its_wire_and_far_away(write_scenario):
    path = write_scenario(DIPOLE)
    half = 0.0306
    on_wire = [(0.0, 0.0, 1.0 + z) for z in (0.0, 0.01, -0.01, half, -half, half / 2)]
    beside = [(1e-9, 0.0, 1.0), (0.0, 1e-12, 1.0 + half), (0.0, 0.0, 1.0 + half + 1e-12)]
    points = probe(path, *on_wire, *beside, (1e5, 0.0, 1.0), (0.0, 0.0, 1e5))
    for p in points:
        assert p["power_density_w_m2"] >= 0  # finite is checked by the strict JSON parser
    broadside = points[-2]
    # Balanis, Antenna Theory, 4th ed., eq. (4-91): half-wave dipole D0 = 1.643 (lossless,
    # so G = D); S = P G / (4 pi r^2) at r = 1e5 m broadside.  L = 0.0612 m is 0.4998
    # wavelength at 2.45 GHz, within 0.1 % of the tabulated half-wave value.
    s_far = 100 * 1.643 / (4 * math.pi * 1e10)
    assert broadside["power_density_w_m2"] == pytest.approx(s_far, rel=2e-3)


def test_dipole_far_along_its_axis(write_scenario):
    path = write_scenario(DIPOLE)
    broadside, end_fire, off_axis = probe(path, (1e5, 0.0, 1.0), (0.0, 0.0, 1e5), (0.1, 0.0, 1e5))
    # Along the wire axis the far field of a thin dipole vanishes (Balanis eq. (4-64) pattern
    # sin(theta) factor); what is left is the 1/r^2 induction field, 1e-13 of broadside here.
    assert end_fire["power_density_w_m2"] < 1e-6 * broadside["power_density_w_m2"]
    assert end_fire["power_density_w_m2"] <= 10 * off_axis["power_density_w_m2"]


def test_monopole_base_tip_ground_plane_and_below(write_scenario):
    path = write_scenario(MONOPOLE)
    points = probe(
        path,
        (0.0, 0.0, 1.0),  # base (feed)
        (0.0, 0.0, 1.0306),  # tip
        (0.0, 0.0, 1.015),  # on the wire
        (0.1, 0.0, 1.0),  # on the ground plane
        (0.0, 0.0, 0.5),  # below the ground plane: no field there
        (1e5, 0.0, 1.0 + 1e-9),  # far away along the ground
    )
    assert points[4]["power_density_w_m2"] == 0.0
    assert all(p["power_density_w_m2"] >= 0 for p in points)


@pytest.mark.parametrize("material", ["metal", "concrete", "wet-ground"])
def test_on_and_behind_a_reflector(write_scenario, material):
    path = write_scenario(
        ISOTROPIC.replace("[0.0, 0.0, 0.0]", "[0.0, 0.0, 1.0]") + FLOOR.format(material=material)
    )
    points = probe(
        path,
        (0.0, 0.0, 0.0),  # on the plane below the source
        (1.0, 0.0, 0.0),  # on the plane, oblique
        (0.0, 0.0, -0.05),  # inside the floor
        (0.0, 0.0, -1e5),  # far inside
        (1e5, 0.0, 1e-9),  # far along the plane, grazing
    )
    assert all(p["power_density_w_m2"] >= 0 for p in points)
    direct = 100.0 / (4 * math.pi * 1.0**2)  # OET 65 eq. (3) at 1 m below the source
    if material == "metal":
        # Envelope mode adds the reflection in its worst phase, (1 + |Gamma|)^2 = 4 times the
        # direct density for a perfect reflector (contract; OET 65 sec. 2, factor 4).
        assert points[0]["power_density_w_m2"] == pytest.approx(4 * direct, rel=1e-9)
        # Nothing passes a perfect conductor (Balanis, Advanced Engineering
        # Electromagnetics, 2nd ed., sec. 7.4).
        assert points[2]["power_density_w_m2"] == 0.0
    else:
        assert direct < points[0]["power_density_w_m2"] < 4 * direct


@pytest.fixture
def open_waveguide(write_scenario):
    pytest.importorskip("keepclear.antennas.aperture")
    return write_scenario(
        """
        [[source]]
        antenna = "open-waveguide"
        power_w = 800.0
        waveguide = "WR-340"
        position_m = [0.0, 0.0, 1.0]
        boresight = [1.0, 0.0, 0.0]
        polarization = [0.0, 0.0, 1.0]
        """
    )


def test_open_waveguide_on_its_aperture(open_waveguide):
    a, b = 0.08636, 0.04318  # WR-340 inner size (EIA WR-340: 3.400 x 1.700 in)
    # Local x is the broad wall: here boresight +x, polarization +z, so broad along -y or +y.
    pts = [(0.0, 0.0, 1.0)]
    pts += [(0.0, sy * a / 2, 1.0 + sz * b / 2) for sy in (-1, 1) for sz in (-1, 1)]
    pts += [(0.0, a / 2, 1.0), (0.0, 0.0, 1.0 + b / 2), (-1e-9, 0.0, 1.0), (-0.05, 0.0, 1.0)]
    pts += [(1e5, 0.0, 1.0)]
    points = probe(open_waveguide, *pts)
    assert points[0]["power_density_w_m2"] > 0
    assert all(p["power_density_w_m2"] >= 0 for p in points)


def test_extreme_but_allowed_coordinates(write_scenario):
    # Scenario vectors may be as large as 1e6 m (Table.vector); probe points as far.
    path = write_scenario(ISOTROPIC.replace("[0.0, 0.0, 0.0]", "[1e6, -1e6, 1e6]"))
    points = probe(path, (-1e6, 1e6, -1e6), (1e6, -1e6, 1e6), (5e-324, -0.0, 1e-300))
    assert points[1]["power_density_w_m2"] > 0


@pytest.mark.parametrize("at", ["1e308,0,0", "1e200,0,0"])
def test_probe_at_beyond_the_coordinate_bound_is_refused(write_scenario, at):
    path = write_scenario(DIPOLE)
    assert "--at" in one_error_line(run("probe", path, "--at", at, "--json"))


# --------------------------------------------------------------- band edges
# Outer edges of the published tables: ICNIRP 2020 guidelines, title "100 kHz to 300 GHz";
# 47 CFR 1.1310 Table 1, 0.3-100,000 MHz; 21 CFR 1030.10(b), ovens 890-6000 MHz (as cited
# in fields/limits.py and the shared standards notes (shared/notes/standards.md), FOUND).
OUTER_EDGES = {
    "icnirp-2020/general-public": (1e5, 3e11),
    "icnirp-2020/occupational-local": (1e5, 3e11),
    "fcc-1.1310/general-population": (3e5, 1e11),
    "fda-1030.10/in-service": (8.9e8, 6e9),
}


@pytest.mark.parametrize("limit_id", sorted(OUTER_EDGES))
def test_outer_band_edges_are_inclusive(limit_id):
    low, high = OUTER_EDGES[limit_id]
    for f, inside in (
        (low, True),
        (high, True),
        (math.nextafter(low, 0.0), False),
        (math.nextafter(high, math.inf), False),
    ):
        result = run("limits", "--frequency-hz", repr(f), "--json")
        assert result.exit_code == 0, result.stderr
        data = strict_json(result.stdout)
        validate("limits", data)
        covered = {v["id"] for v in data["limits"]}
        assert (limit_id in covered) is inside, (f, inside)
        assert (limit_id in data["not_covering_frequency"]) is not inside


def _fda_scenario(frequency_hz: float) -> str:
    return (
        f"frequency_hz = {frequency_hz!r}\n"
        '[[source]]\nantenna = "isotropic"\npower_w = 1.0\n'
        '[exposure]\nlimits = ["fda-1030.10/before-purchase"]\n'
    )


@pytest.mark.parametrize(
    ("frequency_hz", "ok"),
    [(8.9e8, True), (6e9, True), (math.nextafter(8.9e8, 0), False), (6.000000001e9, False)],
)
def test_scenario_at_the_fda_band_edges(write_scenario, frequency_hz, ok):
    # 21 CFR 1030.10(b): a microwave oven works in the ISM bands 890-6000 MHz (FOUND).
    path = write_scenario(_fda_scenario(frequency_hz))
    result = run("probe", path, "--at", "0.05,0,0", "--json")
    if ok:
        assert_clean_exit(result, allowed=(0,))
    else:
        line = one_error_line(result)
        assert "exposure.limits[0]" in line and "890 MHz" in line


def test_icnirp_local_row_change_at_6_ghz(write_scenario):
    # ICNIRP 2020 Table 6 (local, general public): ">2-6 GHz" S = 40 W/m^2 (closed at 6 GHz);
    # ">6 to <300 GHz" S = 55 / fG^0.177 (open at 6 GHz: 40.05 W/m^2 just above).
    limit = "icnirp-2020/general-public-local"
    for f, s_lim in ((6e9, 40.0), (6.000001e9, 55 / 6.000001**0.177)):
        path = write_scenario(
            f'frequency_hz = {f!r}\n[[source]]\nantenna = "isotropic"\npower_w = 10.0\n'
            f'[exposure]\nlimits = ["{limit}"]\n'
        )
        (p,) = probe(path, (0.3, 0.0, 0.0))
        assert p["quotients"][limit] == pytest.approx(p["power_density_w_m2"] / s_lim, rel=1e-12)
        assert get_limit(limit).at(f).power_density_w_m2 == pytest.approx(s_lim, rel=1e-12)


# -------------------------------------------------------------------- bounds
def test_point_file_over_the_bound_is_refused_before_it_is_read(
    write_scenario, tmp_path, monkeypatch
):
    path = write_scenario(ISOTROPIC)
    inp = tmp_path / "many.csv"
    inp.write_text("x_m,y_m,z_m\n" + "1,0,0\n" * 6)
    monkeypatch.setattr(outputs, "MAX_POINTS", 5)

    def no_parse(*args, **kwargs):
        raise AssertionError("the file was parsed before its size was checked")

    monkeypatch.setattr(outputs.np, "loadtxt", no_parse)
    original_read_bytes = pathlib.Path.read_bytes

    def guarded_read_bytes(self):
        if self.name == "many.csv":
            raise AssertionError("the whole file was read before its size was checked")
        return original_read_bytes(self)

    monkeypatch.setattr(pathlib.Path, "read_bytes", guarded_read_bytes)
    out = tmp_path / "out.csv"
    line = one_error_line(run("probe", path, "--points", inp, "--csv", out))
    assert "6 points" in line and "at most 5" in line and "--points" in line
    assert not out.exists()


def test_point_file_at_the_bound_is_accepted(write_scenario, tmp_path, monkeypatch):
    path = write_scenario(ISOTROPIC)
    inp = tmp_path / "five.csv"
    inp.write_text("x_m,y_m,z_m\n" + "1,0,0\n" * 4 + "1e6,-1e6,1e6")  # no final newline
    monkeypatch.setattr(outputs, "MAX_POINTS", 5)
    out = tmp_path / "out.csv"
    result = run("probe", path, "--points", inp, "--csv", out)
    assert_clean_exit(result, allowed=(0,))
    assert len(out.read_text().splitlines()) == 6


@pytest.mark.parametrize("bad", ["1e7,0,0", "0,-1.5e6,0", "0,0,1e308"])
def test_point_file_coordinates_are_bounded(write_scenario, tmp_path, bad):
    path = write_scenario(ISOTROPIC)
    inp = tmp_path / "far.csv"
    inp.write_text(f"x_m,y_m,z_m\n1,0,0\n{bad}\n")
    line = one_error_line(run("probe", path, "--points", inp, "--json"))
    assert "row 3" in line and "1e+06 m" in line


# ------------------------------------------------------------ source counts
def test_no_source_is_refused(write_scenario):
    for text in (
        'name = "empty"\n',
        "source = []\n",
        "[exposure]\nlimits = ['icnirp-2020/occupational']\n",
    ):
        line = one_error_line(run("keepout", write_scenario(text), "--json"))
        assert "source" in line and "at least one [[source]]" in line


def test_more_than_200_sources_is_refused(write_scenario):
    text = '[[source]]\nantenna = "isotropic"\npower_w = 1.0\n' * 201
    assert "at most 200" in one_error_line(run("keepout", write_scenario(text)))


def test_fifty_sources(write_scenario):
    rng = np.random.default_rng(20240607)
    first = [1.0, 2.0, 0.5]
    positions = [first] + (np.array(first) + rng.uniform(-0.4, 0.4, size=(49, 3))).tolist()
    blocks = [
        textwrap.dedent(
            f"""
            [[source]]
            id = "s{i}"
            antenna = "isotropic"
            power_w = {1.0 + 0.1 * i:.1f}
            duty_cycle = 0.5
            position_m = [{x!r}, {y!r}, {z!r}]
            """
        )
        for i, (x, y, z) in enumerate(positions)
    ]
    limits = '[exposure]\nlimits = ["sc6-2015/uncontrolled"]\n'
    many = write_scenario("".join(blocks) + limits, name="many.toml")
    single = write_scenario(blocks[0] + limits, name="single.toml")
    result = run("keepout", many, "--json")
    assert_clean_exit(result, allowed=(0,))
    data_many = strict_json(result.stdout)
    data_one = strict_json(run("keepout", single, "--json").stdout)
    validate("keepout", data_many)
    assert data_many["centre_m"] == first
    expected_w = sum(0.5 * (1.0 + 0.1 * i) for i in range(50))
    assert data_many["average_power_w"] == pytest.approx(expected_w, rel=1e-12)
    (k_many,), (k_one,) = data_many["keepout"], data_one["keepout"]
    # Sources add as power (not phase-locked): more sources never give a smaller sphere.
    assert k_many["distance_m"] >= k_one["distance_m"] > 0
    # Every source exceeds 5.42 W/m^2 within a few cm of itself (S = P/(4 pi r^2), OET 65
    # eq. (3)), so the sphere about the first one must reach past the farthest source.
    offsets = np.linalg.norm(np.array(positions) - np.array(first), axis=1)
    assert k_many["distance_m"] >= offsets.max()
    # Points along the way: 50 sources probe finite everywhere, also on the sources.
    points = probe(many, *positions[:5], (1e5, 0.0, 0.0))
    assert all(p["power_density_w_m2"] > 0 for p in points)


# ---------------------------------------------------------------- the files
def _leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".part"))


def _csv_run(write_scenario, tmp_path, out):
    path = write_scenario(ISOTROPIC)
    return run("probe", path, "--at", "1,0,0", "--at", "2,0,0", "--csv", out)


def test_output_mode_follows_the_umask(write_scenario, tmp_path):
    out = tmp_path / "out.csv"
    old = os.umask(0o022)
    try:
        assert_clean_exit(_csv_run(write_scenario, tmp_path, out), allowed=(0,))
    finally:
        os.umask(old)
    assert out.stat().st_mode & 0o777 == 0o644


def test_failed_rename_leaves_no_temporary_and_keeps_the_old_file(
    write_scenario, tmp_path, monkeypatch
):
    out = tmp_path / "out.csv"
    out.write_text("the previous result\n")

    def failing_replace(src, dst):
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(os, "replace", failing_replace)
    line = one_error_line(_csv_run(write_scenario, tmp_path, out))
    assert "out.csv" in line and "cannot be written" in line
    assert out.read_text() == "the previous result\n"
    assert _leftovers(tmp_path) == []


class _HalfWriter:
    """A file object that writes half of what it is given, then fails like a full disk."""

    def __init__(self, fh):
        self.fh = fh

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.fh.close()
        return False

    def write(self, data):
        self.fh.write(data[: len(data) // 2])
        self.fh.flush()
        raise OSError(28, "No space left on device")

    def __getattr__(self, name):
        return getattr(self.fh, name)


def test_disk_full_mid_write_leaves_nothing(write_scenario, tmp_path, monkeypatch):
    real_fdopen = os.fdopen
    monkeypatch.setattr(
        os, "fdopen", lambda fd, mode="r", *a, **k: _HalfWriter(real_fdopen(fd, mode, *a, **k))
    )
    out = tmp_path / "out.csv"
    line = one_error_line(_csv_run(write_scenario, tmp_path, out))
    assert "No space left" in line
    assert not out.exists() and _leftovers(tmp_path) == []


def test_interrupt_mid_write_leaves_nothing(write_scenario, tmp_path, monkeypatch):
    def interrupted(fd):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "fsync", interrupted)
    out = tmp_path / "out.csv"
    result = _csv_run(write_scenario, tmp_path, out)
    assert "Traceback" not in result.stderr
    assert not out.exists() and _leftovers(tmp_path) == []


def test_interrupt_is_not_reported_as_success(write_scenario, tmp_path, monkeypatch):
    def interrupted(fd):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "fsync", interrupted)
    result = _csv_run(write_scenario, tmp_path, tmp_path / "out.csv")
    assert result.exit_code != 0 and result.stderr.strip()


def test_scenario_is_never_overwritten(write_scenario, tmp_path):
    path = write_scenario(ISOTROPIC)
    before = path.read_bytes()
    (tmp_path / "sub").mkdir()
    os.symlink(path, tmp_path / "link.toml")
    os.link(path, tmp_path / "hard.toml")
    inp = tmp_path / "in.csv"
    inp.write_text("x_m,y_m,z_m\n1,0,0\n")
    aliases = [
        path,
        tmp_path / "sub" / ".." / path.name,
        tmp_path / "link.toml",
        tmp_path / "hard.toml",
    ]
    for target in aliases:
        line = one_error_line(run("probe", path, "--at", "1,0,0", "--csv", target))
        assert "overwrite" in line
    # ... nor the point file given as input.
    line = one_error_line(run("probe", path, "--points", inp, "--csv", inp))
    assert "overwrite" in line and inp.read_text() == "x_m,y_m,z_m\n1,0,0\n"
    assert path.read_bytes() == before
    assert _leftovers(tmp_path) == []


@pytest.mark.parametrize("where", ["under a file", "missing folder", "a folder"])
def test_unwritable_output_place(write_scenario, tmp_path, where):
    # CI runs as root, where chmod does not stop a write; a path under a regular file does.
    blocker = tmp_path / "plain.txt"
    blocker.write_text("not a folder\n")
    target = {
        "under a file": blocker / "out.csv",
        "missing folder": tmp_path / "nowhere" / "out.csv",
        "a folder": tmp_path,
    }[where]
    path = write_scenario(ISOTROPIC)
    before = sorted(p.name for p in tmp_path.iterdir())
    line = one_error_line(run("probe", path, "--at", "1,0,0", "--csv", target))
    assert str(target) in line
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    assert blocker.read_text() == "not a folder\n"


# ------------------------------------------------------------ isotropic polarisation
@pytest.mark.parametrize("polarization", [[0.0, 0.0, 1.0], [1.0, 0.0, 1.0], [0.0, -2.0, 0.0]])
def test_isotropic_polarization_is_its_e_direction(write_scenario, polarization):
    # README scenario reference: `polarization` of an isotropic source is its E direction
    # (made transverse to the ray).  A vertical one must be accepted: a point source has no
    # boresight it could be parallel to.
    from keepclear.fields.scenario import load_scenario

    path = write_scenario(ISOTROPIC + f"polarization = {polarization!r}\n")
    radiator = load_scenario(path).sources[0].radiator
    pol = np.array(polarization) / np.linalg.norm(polarization)
    ray = np.cross(pol, [0.3, 0.4, 0.5])  # any direction across the polarisation
    ray /= np.linalg.norm(ray)
    e, _ = radiator.fields(2.0 * ray[None, :])
    direction = np.abs(e[0]) / np.linalg.norm(np.abs(e[0]))
    np.testing.assert_allclose(direction, np.abs(pol), atol=1e-12)


# ------------------------------------------------------------------ map and assess
def _no_evaluation(monkeypatch):
    """Make any field evaluation fail loudly: a refusal must come before the work."""
    from keepclear.fields import field, maps

    def refuse(*args, **kwargs):
        raise AssertionError("fields were evaluated before the grid size was checked")

    monkeypatch.setattr(field, "evaluate", refuse)
    if hasattr(maps, "evaluate"):
        monkeypatch.setattr(maps, "evaluate", refuse)


@pytest.mark.parametrize(
    "args",
    [["--pixels", "4001"], ["--pixels", "100000"], ["--step-m", "1e-9", "--extent-m", "100"]],
    ids=["4001 a side", "over the side bound", "tiny step"],
)
@pytest.mark.parametrize("command", ["map", "assess"])
def test_a_grid_too_large_is_refused_with_estimate_and_bound(
    write_scenario, tmp_path, monkeypatch, command, args
):
    path = write_scenario(ISOTROPIC)
    _no_evaluation(monkeypatch)
    out = tmp_path / "out"
    line = one_error_line(run(command, path, *args, "--out", out))
    assert args[0] in line
    assert "MiB" in line or "samples a side" in line  # the estimate ...
    assert "allowed" in line or "refused" in line  # ... and the bound
    assert not out.exists()


@pytest.mark.parametrize(
    "args",
    [["--extent-m", "1e300"], ["--height-m", "1e300"], ["--through", "1e300,0,0"]],
    ids=["extent", "height", "through"],
)
def test_map_coordinates_beyond_the_bound_are_refused(write_scenario, tmp_path, args):
    path = write_scenario(ISOTROPIC)
    one_error_line(run("map", path, "--pixels", "5", *args, "--csv", tmp_path / "m.csv"))


def test_map_extent_too_small_for_a_step_is_refused(write_scenario, tmp_path):
    path = write_scenario(ISOTROPIC)
    line = one_error_line(
        run("map", path, "--pixels", "5", "--extent-m", "5e-324", "--csv", tmp_path / "m.csv")
    )
    assert "--extent-m" in line


def test_assess_never_overwrites_its_scenario(tmp_path):
    # An output folder that holds the scenario under an output's own name.
    for name in ("scenario-input.toml", "report.html", "assessment.json"):
        path = tmp_path / name
        path.write_text(ISOTROPIC, encoding="utf-8")
        line = one_error_line(run("assess", path, "--out", tmp_path, "--pixels", "5"))
        assert "overwrite" in line and name in line
        assert path.read_text(encoding="utf-8") == ISOTROPIC
        path.unlink()
    assert list(tmp_path.iterdir()) == []


def test_map_outputs_never_overwrite_the_scenario(write_scenario):
    path = write_scenario(ISOTROPIC)
    for option in ("--png", "--svg", "--csv", "--npz", "--geojson"):
        line = one_error_line(run("map", path, "--pixels", "5", option, path))
        assert "overwrite" in line
    assert path.read_text(encoding="utf-8").strip() == textwrap.dedent(ISOTROPIC).strip()


@pytest.mark.parametrize("command", ["assess", "map"])
def test_output_folder_under_a_regular_file(write_scenario, tmp_path, command):
    path = write_scenario(ISOTROPIC)
    blocker = tmp_path / "plain.txt"
    blocker.write_text("not a folder\n")
    before = sorted(p.name for p in tmp_path.iterdir())
    line = one_error_line(run(command, path, "--pixels", "5", "--out", blocker / "out"))
    assert "--out" in line or "plain.txt" in line
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    assert blocker.read_text() == "not a folder\n"


# ------------------------------------------------------------------ enclosure
ENCLOSED = """
[[source]]
antenna = "isotropic"
power_w = 800.0
position_m = [0.1, 0.0, 1.0]
[enclosure]
center_m = [0.0, 0.0, 1.0]
size_m = [0.5, 0.4, 0.3]
metal = "mild-steel"
thickness_m = 0.002
[[enclosure.opening]]
face = "+x"
type = "slot"
length_m = 0.03
width_m = 0.001
along = "z"
offset_m = [0.0, 0.0]
"""


def test_points_inside_on_and_in_the_walls_of_an_enclosure(write_scenario):
    path = write_scenario(ENCLOSED)
    points = probe(
        path,
        (0.1, 0.0, 1.0),  # on the source, inside the cavity
        (0.0, 0.0, 1.0),  # cavity centre
        (0.25, 0.0, 1.0),  # inner face of the +x wall, at the slot
        (0.251, 0.0, 1.0),  # inside the wall
        (0.252, 0.0, 1.0),  # outer face, at the slot
        (0.302, 0.0, 1.0),  # 5 cm outside the slot
        (0.0, 0.2011, 1.0),  # inside the -y/+y wall, no opening there
        (1e5, 0.0, 1.0),  # far away
    )
    assert all(p["power_density_w_m2"] >= 0 for p in points)
    cavity, outside_5cm = points[1], points[5]
    # A nearly closed steel box holds far more than leaks out through a 3 cm slot.
    assert cavity["power_density_w_m2"] > outside_5cm["power_density_w_m2"]


def test_control_characters_in_the_name_draw_without_warnings(write_scenario, tmp_path):
    text = ISOTROPIC.replace('name = "test point source"', 'name = "bench \\u001b[31m B2"')
    path = write_scenario(text)
    assert "\x1b" in load_scenario_name(path)
    result = run("assess", path, "--out", tmp_path / "out", "--pixels", "5", "--json")
    assert_clean_exit(result, allowed=(0,))


def load_scenario_name(path) -> str:
    from keepclear.fields.scenario import load_scenario

    return load_scenario(path).name
