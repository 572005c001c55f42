"""Record (or recompute) the contract outputs of every bundled scenario as golden data.

Run from the repository root::

    python tests/golden/regenerate.py          # rewrite tests/golden/*.json
    python tests/golden/regenerate.py --check  # compare only, write nothing

The outputs come from the real command line (in-process), exactly as a user gets them:
``limits --json`` at 2.45 GHz; and per scenario ``probe --json`` at a fixed point set,
``keepout --json``, ``map`` on a small grid (the NPZ arrays at full precision and the CSV
as printed), ``compare --json`` and ``assess``'s ``assessment.json`` on small grids.
Keys that name paths, versions, the written files and the caution text are dropped; see
:data:`VOLATILE_KEYS`.  :func:`differences` is the comparison the test uses.
"""

from __future__ import annotations

import csv
import json
import math
import sys
import tempfile
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parent.parent
SCENARIOS = REPO / "scenarios"

#: Relative tolerance of every number, and the absolute floor for values near zero
#: (power densities below 1e-30 W/m^2 and quotients below 1e-30 count as equal).
RTOL = 1e-9
ATOL = 1e-30
#: The map CSV prints 7 significant digits: a change in the last printed digit of a value
#: that sits on a rounding boundary is allowed (one unit in the 7th digit, relative).
CSV_RTOL = 1.1e-6

#: Values the keep-out search defines only to its bracket (``RADIUS_TOLERANCE``, 1e-4
#: relative, in fields/keepout.py): the distances and what is derived from them (the
#: uncertainty percentiles, the mark-out, the cylinder about the zone), compared to
#: :data:`BRACKET_RTOL`.  Their last bits, and so which of two equally far rays ends a
#: bisection on the outer side, follow the processor and the BLAS build.
BRACKET_KEYS = frozenset(
    {
        "distance_m",
        "distance_with_uncertainty_m",
        "recommended_distance_m",
        "mark_out_m",
        "keepout_distance_m",
        "keepout_sphere_section_radius_m",
        "largest_keepout_m",
        "clearance_from_enclosure_m",
        "distance_median_m",
        "distance_p95_m",
        "cylinder",
    }
)
#: Two brackets: each of two runs places a crossing within one bracket of the true one.
BRACKET_RTOL = 2e-4
#: Unit vectors to the farthest exceedance (``direction``) agree to this in each component
#: (absolute): the direction of a ray's end moves with its radius where the ray does not
#: start at the centre (rays along a reflector).
DIRECTION_ATOL = 2e-4

#: Keys dropped before recording or comparing: paths, versions, the list of written files,
#: and prose that is not a result (the caution, the assumption sentences).
VOLATILE_KEYS = frozenset(
    {"caution", "tool_version", "scenario_file", "files", "assumptions", "description"}
)

#: Points probed in each scenario: offsets [m] from the first source's position, in front
#: (+x, the boresight of most bundled scenarios), beside (+-y), behind (-x), above (+z),
#: below (-z) and diagonally, from 0.3 m to 5 m.
POINT_OFFSETS_M = (
    (0.3, 0.0, 0.0),
    (1.0, 0.0, 0.0),
    (2.0, 0.0, 0.0),
    (5.0, 0.0, 0.0),
    (0.0, 0.5, 0.0),
    (0.0, -2.0, 0.0),
    (-0.5, 0.0, 0.0),
    (-3.0, 0.0, 0.0),
    (0.0, 0.0, 0.3),
    (0.0, 0.0, 1.5),
    (1.0, 1.0, 0.5),
    (-1.0, 2.0, -0.5),
)

#: Grid of the map, compare and assess runs (small, for speed).
GRID_ARGS = ("--extent-m", "2", "--pixels", "9")
#: ``compare --json`` is recorded for the scenarios with options and for one without (where
#: it assesses the base alone, which ``keepout`` and ``map`` cover already): the keep-out
#: searches of the options are the slowest part of the check.
COMPARE_WITHOUT_OPTIONS = ("isotropic-screening",)


def scenario_paths() -> list[Path]:
    """Every bundled scenario, sorted by name."""
    return sorted(SCENARIOS.glob("*.toml"))


def _run(*args: Any) -> str:
    from typer.testing import CliRunner

    from keepclear.fields.cli import app

    result = CliRunner().invoke(app, [str(a) for a in args])
    if result.exit_code != 0:
        raise RuntimeError(
            f"keepclear {' '.join(map(str, args))}: exit {result.exit_code}: {result.stderr}"
        )
    return result.stdout


def strip(obj: Any) -> Any:
    """The JSON tree without the :data:`VOLATILE_KEYS`."""
    if isinstance(obj, dict):
        return {k: strip(v) for k, v in obj.items() if k not in VOLATILE_KEYS}
    if isinstance(obj, list):
        return [strip(v) for v in obj]
    return obj


def first_source_position(path: Path) -> np.ndarray:
    """The first source's ``position_m`` (read through the scenario loader)."""
    from keepclear.fields.scenario import load_scenario

    return np.asarray(load_scenario(path).sources[0].position_m, dtype=float)


def has_options(path: Path) -> bool:
    """Whether the scenario has ``[[option]]`` tables."""
    from keepclear.fields.scenario import load_scenario

    return bool(load_scenario(path).options)


def probe_points(path: Path) -> list[list[float]]:
    """The fixed point set of a scenario [m]."""
    centre = first_source_position(path)
    return [[float(c) for c in centre + np.asarray(d)] for d in POINT_OFFSETS_M]


def limits_output() -> dict[str, Any]:
    """``limits --json`` at 2.45 GHz."""
    return strip(json.loads(_run("limits", "--frequency-hz", "2.45e9", "--json")))


def scenario_outputs(path: Path) -> dict[str, Any]:
    """Every recorded output of one scenario.

    The commands run one after another inside one
    :func:`~keepclear.fields.scenario.shared_radiators` and
    :func:`~keepclear.antennas.memo.shared_field_evaluations` block: each loads the file
    afresh, but gets the radiators the first load built, and a field point of a radiator
    is evaluated once for all of them (the keep-out search of the base runs in
    ``keepout``, ``map``, ``compare`` and ``assess``).  Every other step (images,
    shields, limits, the search, maps, the report) runs in each command as a user gets it.
    """
    from keepclear.antennas.memo import shared_field_evaluations
    from keepclear.fields.scenario import shared_radiators

    with shared_radiators(), shared_field_evaluations():
        return _scenario_outputs(path)


def _scenario_outputs(path: Path) -> dict[str, Any]:
    out: dict[str, Any] = {}
    at = [f"--at={x!r},{y!r},{z!r}" for x, y, z in probe_points(path)]
    out["probe"] = strip(json.loads(_run("probe", path, *at, "--json")))
    out["keepout"] = strip(json.loads(_run("keepout", path, "--json")))
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        csv_path, npz_path = folder / "m.csv", folder / "m.npz"
        _run("map", path, "--plane", "xy", *GRID_ARGS, "--csv", csv_path, "--npz", npz_path)
        with np.load(npz_path) as npz:
            arrays = {
                k: npz[k].tolist()
                for k in sorted(npz.files)
                if k not in ("metadata_json", "limit_ids")
            }
            arrays["limit_ids"] = [str(s) for s in npz["limit_ids"]]
        with open(csv_path, newline="", encoding="utf-8") as fh:
            rows = list(csv.reader(fh))
        out["map"] = {
            "npz": arrays,
            "csv_header": rows[0],
            "csv_rows": [[float(v) for v in row] for row in rows[1:]],
        }
        if has_options(path) or path.stem in COMPARE_WITHOUT_OPTIONS:
            out["compare"] = strip(json.loads(_run("compare", path, *GRID_ARGS, "--json")))
        assess_dir = folder / "assess"
        _run("assess", path, "--out", assess_dir, *GRID_ARGS)
        out["assess"] = strip(
            json.loads((assess_dir / "assessment.json").read_text(encoding="utf-8"))
        )
    return out


def golden_path(name: str) -> Path:
    """Where the golden data of ``name`` (a scenario stem, or ``limits``) is stored."""
    return HERE / f"{name}.json"


def _close(a: float, b: float, rtol: float) -> bool:
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    return abs(a - b) <= max(rtol * max(abs(a), abs(b)), ATOL)


def differences(expected: Any, actual: Any, where: str = "$", rtol: float = RTOL) -> list[str]:
    """Every place where ``actual`` differs from the golden ``expected``, as readable lines.

    Numbers agree to ``rtol`` relative (with the absolute floor :data:`ATOL`); strings,
    booleans and nulls exactly; lists in length and element by element.  Keys of
    ``expected`` must all be present in ``actual``; keys ``actual`` adds are allowed (the
    contract may grow).  The CSV rows of a map are compared to :data:`CSV_RTOL`.
    """
    out: list[str] = []
    if isinstance(expected, dict):
        if not isinstance(actual, dict):
            return [f"{where}: expected an object, got {type(actual).__name__}"]
        for key, value in expected.items():
            if key not in actual:
                out.append(f"{where}.{key}: missing")
                continue
            if key == "direction" and isinstance(value, list) and isinstance(actual[key], list):
                out += _direction_differences(value, actual[key], f"{where}.{key}")
                continue
            tol = CSV_RTOL if key == "csv_rows" else rtol
            if key in BRACKET_KEYS:
                tol = max(tol, BRACKET_RTOL)
            out += differences(value, actual[key], f"{where}.{key}", tol)
        return out
    if isinstance(expected, list):
        if not isinstance(actual, list):
            return [f"{where}: expected a list, got {type(actual).__name__}"]
        if len(expected) != len(actual):
            return [f"{where}: length {len(actual)}, expected {len(expected)}"]
        for i, (e, a) in enumerate(zip(expected, actual, strict=True)):
            out += differences(e, a, f"{where}[{i}]", rtol)
            if len(out) > 20:
                break
        return out
    if isinstance(expected, bool) or expected is None or isinstance(expected, str):
        if type(expected) is not type(actual) or expected != actual:
            out.append(f"{where}: {actual!r}, expected {expected!r}")
        return out
    if isinstance(expected, int | float):
        if isinstance(actual, bool) or not isinstance(actual, int | float):
            return [f"{where}: {actual!r}, expected the number {expected!r}"]
        if not _close(float(expected), float(actual), rtol):
            rel = abs(actual - expected) / max(abs(expected), abs(actual))
            out.append(f"{where}: {actual!r}, expected {expected!r} (relative {rel:.2e})")
        return out
    return [f"{where}: unexpected value {expected!r}"]


def _direction_differences(expected: list, actual: list, where: str) -> list[str]:
    """A recorded unit vector against a computed one, component by component."""
    if len(expected) != len(actual):
        return [f"{where}: length {len(actual)}, expected {len(expected)}"]
    for e, a in zip(expected, actual, strict=True):
        if not isinstance(a, int | float) or isinstance(a, bool) or abs(a - e) > DIRECTION_ATOL:
            return [f"{where}: {actual!r}, expected {expected!r} (to {DIRECTION_ATOL:g} each)"]
    return []


def _dump(data: Any) -> str:
    return json.dumps(data, separators=(",", ":"), allow_nan=False, sort_keys=False) + "\n"


def main(argv: list[str]) -> int:
    """Write the golden files, or with ``--check`` report every difference."""
    check = "--check" in argv
    only = {a.removeprefix("--only=") for a in argv if a.startswith("--only=")}
    jobs: list[tuple[str, Any]] = [("limits", limits_output)]
    jobs += [(p.stem, (lambda p=p: scenario_outputs(p))) for p in scenario_paths()]
    if only:
        jobs = [(name, job) for name, job in jobs if name in only]
    bad = 0
    for name, job in jobs:
        data = job()
        target = golden_path(name)
        if check:
            diffs = differences(json.loads(target.read_text(encoding="utf-8")), data)
            bad += bool(diffs)
            print(f"{name}: {'ok' if not diffs else 'DIFFERS'}")
            for line in diffs[:20]:
                print("   ", line)
        else:
            target.write_text(_dump(data), encoding="utf-8")
            print(f"wrote {target.relative_to(REPO)}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.path.insert(0, str(REPO))
    sys.exit(main(sys.argv[1:]))
