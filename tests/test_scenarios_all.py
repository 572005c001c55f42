"""Every bundled scenario runs through ``probe`` (at its named points) and ``keepout``.

Each must exit 0, print one strictly finite JSON object (no NaN, no Infinity) that fits the
packaged schema, and keep the contract's promises: the rows in the order of the scenario's
``[[point]]`` tables, the keep-out centre at the first source. New files in ``scenarios/``
are picked up automatically.
"""

from __future__ import annotations

import tomllib

import numpy as np
import pytest

from ._cli import assert_clean_exit, run, run_once, strict_json, validate
from .conftest import SCENARIOS

SCENARIO_FILES = sorted(SCENARIOS.glob("*.toml"))


def test_there_are_bundled_scenarios():
    assert len(SCENARIO_FILES) >= 1


def _document(path):
    return tomllib.loads(path.read_text(encoding="utf-8"))


def _points(doc):
    """The scenario's named points, or a point 1 m beside the first source when it has none."""
    named = [p["position_m"] for p in doc.get("point", [])]
    if named:
        return named
    first = doc["source"][0].get("position_m", [0.0, 0.0, 0.0])
    return [[first[0] + 1.0, first[1], first[2]]]


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.name)
def test_probe_at_its_points(path):
    doc = _document(path)
    points = _points(doc)
    if doc.get("point"):
        result = run("probe", path, "--json")  # no --at: the scenario's [[point]] places
    else:
        result = run("probe", path, *[f"--at={x},{y},{z}" for x, y, z in points], "--json")
    assert_clean_exit(result, allowed=(0,))
    data = strict_json(result.stdout)
    validate("probe", data)
    got = np.array([p["position_m"] for p in data["points"]])
    np.testing.assert_array_equal(got, np.array(points, dtype=float))
    limits = doc.get("exposure", {}).get(
        "limits", ["icnirp-2020/general-public", "icnirp-2020/occupational"]
    )
    for p in data["points"]:
        assert list(p["quotients"]) == limits
        assert p["peak_power_density_w_m2"] >= p["power_density_w_m2"]


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.name)
def test_keepout(path):
    doc = _document(path)
    result = run_once("keepout", path, "--json")  # the golden test runs it too
    assert_clean_exit(result, allowed=(0,))
    data = strict_json(result.stdout)
    validate("keepout", data)
    first = doc["source"][0].get("position_m", [0.0, 0.0, 0.0])
    assert data["centre_m"] == [float(x) for x in first]
    average_w = sum(s["power_w"] * s.get("duty_cycle", 1.0) for s in doc["source"])
    assert data["average_power_w"] == pytest.approx(average_w, rel=1e-12)
    for entry in data["keepout"]:
        assert entry["reached"] == (entry["direction"] is not None)
        assert entry["distance_with_uncertainty_m"] >= entry["distance_m"]


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.name)
def test_probe_text_ends_with_the_caution(path):
    # (keepout's text form costs a second search per scenario; test_cli checks it.)
    command = ["probe", path]
    if not _document(path).get("point"):
        command += ["--at", ",".join(map(str, _points(_document(path))[0]))]
    result = run(*command)
    assert_clean_exit(result, allowed=(0,))
    assert "CAUTION" in result.stdout
