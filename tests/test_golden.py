"""The contract outputs of every bundled scenario match their recorded golden data.

The golden files (``tests/golden/*.json``) hold what ``limits``, ``probe``, ``keepout``,
``map`` (CSV and NPZ), ``compare`` and ``assess`` printed or wrote for each scenario in
``scenarios/`` when they were recorded (``tests/golden/README.md``).  A refactoring must
reproduce them to 1e-9 relative (values the keep-out search defines only to its bracket,
1e-4, to that precision: ``BRACKET_KEYS`` in ``regenerate.py``); a deliberate change of a result is recorded again with
``python tests/golden/regenerate.py`` and explained in its commit.
"""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import pytest

from ._cli import run_once

HERE = Path(__file__).resolve().parent / "golden"
_spec = importlib.util.spec_from_file_location("golden_regenerate", HERE / "regenerate.py")
assert _spec is not None and _spec.loader is not None
golden = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(golden)


def _shared_run(*args):
    """The golden runner, with the commands that only print shared with other tests."""
    if args[0] not in ("probe", "keepout", "compare") or "--json" not in args:
        return _own_run(*args)
    result = run_once(*args)
    if result.exit_code != 0:
        raise RuntimeError(f"keepclear {' '.join(map(str, args))}: exit {result.exit_code}")
    return result.stdout


_own_run = golden._run
golden._run = _shared_run


def _recorded(name: str):
    path = golden.golden_path(name)
    assert path.is_file(), f"no golden data {path.name}: run tests/golden/regenerate.py"
    return json.loads(path.read_text(encoding="utf-8"))


def _assert_same(name: str, actual) -> None:
    diffs = golden.differences(_recorded(name), actual)
    assert not diffs, f"{name} differs from its golden data:\n" + "\n".join(diffs[:20])


def test_every_scenario_has_golden_data():
    recorded = {p.stem for p in HERE.glob("*.json")}
    expected = {p.stem for p in golden.scenario_paths()} | {"limits"}
    assert recorded == expected


def test_limits_match_golden():
    _assert_same("limits", golden.limits_output())


@pytest.mark.parametrize("path", golden.scenario_paths(), ids=lambda p: p.stem)
def test_scenario_outputs_match_golden(path):
    _assert_same(path.stem, golden.scenario_outputs(path))


def test_comparison_reports_the_differing_key():
    expected = {"a": [1.0, {"b": 2.0, "c": "x"}], "d": 0.0}
    actual = {"a": [1.0, {"b": 2.0 * (1 + 1e-6), "c": "x"}], "d": 1e-40, "new": 1}
    diffs = golden.differences(expected, actual)
    assert len(diffs) == 1 and diffs[0].startswith("$.a[1].b:"), diffs
    assert golden.differences(expected, {"a": [1.0]}) == [
        "$.a: length 1, expected 2",
        "$.d: missing",
    ]
    assert golden.differences({"x": 1.0}, {"x": 1.0 + 1e-12}) == []
    # bracket-defined values: two brackets of the keep-out search, no more
    near, far = 2.0 * (1 + 1.5e-4), 2.0 * (1 + 3e-4)
    assert golden.differences({"distance_m": 2.0}, {"distance_m": near}) == []
    assert golden.differences({"distance_m": 2.0}, {"distance_m": far})[0].startswith(
        "$.distance_m:"
    )
    assert (
        golden.differences({"cylinder": {"radius_m": 1.0}}, {"cylinder": {"radius_m": 1.0001}})
        == []
    )
    assert golden.differences({"limit_w_m2": 2.0}, {"limit_w_m2": near})  # not a bracket value
    direction = [0.6, 0.8, 0.0]
    assert golden.differences({"direction": direction}, {"direction": [0.6001, 0.7999, 0.0]}) == []
    assert golden.differences({"direction": direction}, {"direction": [0.8, 0.6, 0.0]})
