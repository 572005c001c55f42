"""The evaluation's memory budget is one setting, never above 1 GiB, and chunks do not matter.

These are properties of the software, not of physics (common practice, no source): the
budget of keepclear.fields.field bounds every chunk, and cutting the points into chunks
of any size gives the same fields.
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.fields import field
from keepclear.fields.field import chunk_plan, evaluate, memory_budget_bytes
from keepclear.fields.scenario import load_scenario

GIB = 1024**3


def test_default_budget_is_one_gib_and_never_more(monkeypatch):
    monkeypatch.delenv(field.MEMORY_ENV, raising=False)
    assert memory_budget_bytes() == GIB
    assert memory_budget_bytes(10 * GIB) == GIB
    assert memory_budget_bytes(1) == field.MIN_MEMORY_BYTES
    monkeypatch.setenv(field.MEMORY_ENV, str(256 * 1024**2))
    assert memory_budget_bytes() == 256 * 1024**2
    monkeypatch.setenv(field.MEMORY_ENV, "4e9")
    assert memory_budget_bytes() == GIB
    monkeypatch.setenv(field.MEMORY_ENV, "lots")
    with pytest.warns(UserWarning, match="not a number of bytes"):
        assert memory_budget_bytes() == GIB


def test_chunk_plan_follows_the_budget(write_scenario):
    scenario = load_scenario(
        write_scenario(
            """
            [[source]]
            antenna = "open-waveguide"
            waveguide = "WR-340"
            power_w = 100.0
            position_m = [0.0, 0.0, 1.0]
            boresight = [1.0, 0.0, 0.0]
            polarization = [0.0, 0.0, 1.0]
            [[reflector]]
            point_m = [0.0, 0.0, 0.0]
            normal = [0.0, 0.0, 1.0]
            material = "concrete"
            """
        )
    )
    points, radiator_bytes = chunk_plan(scenario, GIB)
    assert 1 <= points <= field.DEFAULT_CHUNK_POINTS
    assert radiator_bytes == GIB // 2
    small_points, small_bytes = chunk_plan(scenario, field.MIN_MEMORY_BYTES)
    assert small_bytes == field.MIN_MEMORY_BYTES // 2 and small_points <= points
    # the chunk and the radiators' share stay inside the budget
    per_point = 64 + field._FIELD_BYTES_PER_POINT * 2
    assert small_points * per_point + small_bytes <= field.MIN_MEMORY_BYTES

    rng = np.random.default_rng(0)
    pts = np.array([0.0, 0.0, 1.0]) + rng.normal(size=(700, 3))
    pts[:, 2] = np.abs(pts[:, 2]) + 0.05
    whole = evaluate(scenario, pts)
    for chunk in (7, 37, 256):
        parts = evaluate(scenario, pts, chunk_points=chunk)
        np.testing.assert_allclose(parts.power_density_w_m2, whole.power_density_w_m2, rtol=1e-12)
        np.testing.assert_allclose(parts.e_v_m, whole.e_v_m, rtol=1e-12)
