"""Strategies and helpers shared by the edge-case tests, which live in their area's test module.

Numerical and file-system edges: singular points, band edges, bounds, atomic outputs.

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

from keepclear.antennas.base import C_M_S

from ._cli import assert_clean_exit, run, strict_json, validate
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


def _fda_scenario(frequency_hz: float) -> str:
    return (
        f"frequency_hz = {frequency_hz!r}\n"
        '[[source]]\nantenna = "isotropic"\npower_w = 1.0\n'
        '[exposure]\nlimits = ["fda-1030.10/before-purchase"]\n'
    )


# ---------------------------------------------------------------- the files
def _leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".part"))


def _csv_run(write_scenario, tmp_path, out):
    path = write_scenario(ISOTROPIC)
    return run("probe", path, "--at", "1,0,0", "--at", "2,0,0", "--csv", out)


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


# ------------------------------------------------------------------ map and assess
def _no_evaluation(monkeypatch):
    """Make any field evaluation fail loudly: a refusal must come before the work."""
    from keepclear.fields import field, maps

    def refuse(*args, **kwargs):
        raise AssertionError("fields were evaluated before the grid size was checked")

    monkeypatch.setattr(field, "evaluate", refuse)
    if hasattr(maps, "evaluate"):
        monkeypatch.setattr(maps, "evaluate", refuse)


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


def load_scenario_name(path) -> str:
    from keepclear.fields.scenario import load_scenario

    return load_scenario(path).name
