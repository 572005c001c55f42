"""NEC-2 solutions kept on disk between runs (antennas/moment.py ``_kept_solution``).

The reference is NEC-2 itself (PyPI ``PyNEC``, the nec2++ engine): a solution read back
from the store must be the engine's own, to the last bit, and a problem that differs in
any input must be solved, not read.
"""

from __future__ import annotations

import numpy as np
import pytest

from keepclear.antennas import moment

pytest.importorskip("PyNEC")

F_HZ = 2.45e9
LAM = moment.C_M_S / F_HZ


def _dipole(length_m: float = 0.48 * LAM) -> moment.WireStructure:
    """A centre-fed straight wire of 11 segments along z."""
    z = np.linspace(-0.5 * length_m, 0.5 * length_m, 12)
    starts = np.column_stack([np.zeros(11), np.zeros(11), z[:-1]])
    ends = np.column_stack([np.zeros(11), np.zeros(11), z[1:]])
    return moment.WireStructure.from_segments(starts, ends, np.full(11, 1e-3), 5)


@pytest.fixture
def store(monkeypatch, tmp_path):
    """An empty store, and no solution kept in the process."""
    monkeypatch.setenv(moment.CACHE_ENV, str(tmp_path))
    moment._solve_cached.cache_clear()
    yield tmp_path
    moment._solve_cached.cache_clear()


def _no_engine(*args: object) -> None:
    raise AssertionError("NEC-2 ran although the solution was kept")


def test_a_solution_is_kept_and_read_back_unchanged(store, monkeypatch):
    first = moment.solve_structure(_dipole(), F_HZ)
    assert len(list(store.glob("solve-*.npz"))) == 1
    moment._solve_cached.cache_clear()
    monkeypatch.setattr(moment, "_nec_run", _no_engine)
    again = moment.solve_structure(_dipole(), F_HZ)
    assert np.array_equal(again.centre_currents_a, first.centre_currents_a)
    assert again.input_impedance_ohm == first.input_impedance_ohm


def test_another_frequency_or_structure_is_solved_afresh(store):
    a = moment.solve_structure(_dipole(), F_HZ)
    b = moment.solve_structure(_dipole(), 1.1 * F_HZ)
    c = moment.solve_structure(_dipole(0.40 * LAM), F_HZ)
    assert len(list(store.glob("solve-*.npz"))) == 3
    assert not np.allclose(a.centre_currents_a, b.centre_currents_a)
    assert not np.allclose(a.centre_currents_a, c.centre_currents_a)


def test_an_unreadable_file_is_solved_again_and_replaced(store):
    first = moment.solve_structure(_dipole(), F_HZ)
    (path,) = store.glob("solve-*.npz")
    path.write_bytes(b"not a solution")
    moment._solve_cached.cache_clear()
    again = moment.solve_structure(_dipole(), F_HZ)
    assert np.array_equal(again.centre_currents_a, first.centre_currents_a)
    with np.load(path) as kept:
        assert np.array_equal(kept["currents"], first.centre_currents_a)


@pytest.mark.parametrize("value", ["off", ""])
def test_the_store_can_be_switched_off(monkeypatch, tmp_path, value):
    monkeypatch.setenv(moment.CACHE_ENV, value)
    assert moment.solution_cache_dir() is None
    moment._solve_cached.cache_clear()
    moment.solve_structure(_dipole(), F_HZ)
    moment._solve_cached.cache_clear()
    assert not list(tmp_path.iterdir())


def test_the_size_bound_holds_before_the_store(store, monkeypatch):
    moment.solve_structure(_dipole(), F_HZ)
    moment._solve_cached.cache_clear()
    monkeypatch.setattr(moment, "MAX_SEGMENTS", 5)
    with pytest.raises(moment.ModelInputError, match="more than 5"):
        moment.solve_structure(_dipole(), F_HZ)
