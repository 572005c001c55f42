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


# ------------------------------------------------------------ outgoing-wave tables
# An outgoing-wave table (moment.OutgoingExpansion) is made from the exact kernel's
# values on spheres about its centre; those samples are kept beside the solutions.
# The reference for a table read back is the table built afresh in the same process
# (the same bits: the file holds the very samples), and for its fields the exact
# kernel of the currents (Wilcox's expansion, to the table's stated 1e-3 of the
# largest field at the same distance; moment.OutgoingExpansion's docstring).


def _no_sampling(*args: object) -> None:
    raise AssertionError("the kernel was sampled although the table was kept")


def _dipole_elements(power_w: float = 1.0) -> moment.CurrentElements:
    return moment.solve_structure(_dipole(), F_HZ).elements(power_w)


def test_a_table_is_kept_and_read_back_unchanged(store, monkeypatch):
    elements = _dipole_elements()
    first = moment.OutgoingExpansion(elements, np.zeros(3))
    assert len(list(store.glob("table-*.npz"))) == 1
    monkeypatch.setattr(moment, "_sample_table", _no_sampling)
    again = moment.OutgoingExpansion(elements, np.zeros(3))
    assert np.array_equal(again._coeff_m, first._coeff_m)
    assert np.array_equal(again._grid, first._grid)
    # The table read back radiates the currents' own field (the exact kernel).
    rng = np.random.default_rng(5)
    u = rng.normal(size=(200, 3))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    pts = u * rng.uniform(1.0, 4.0, (200, 1)) * again.inner_radius_m
    e_table, h_table = again.fields(pts)
    e_exact, h_exact = elements.fields(pts)
    scale = np.max(np.linalg.norm(e_exact, axis=1))
    assert np.max(np.linalg.norm(e_table - e_exact, axis=1)) < 1e-3 * scale


def test_other_currents_or_another_centre_get_a_table_of_their_own(store):
    elements = _dipole_elements()
    a = moment.OutgoingExpansion(elements, np.zeros(3))
    b = moment.OutgoingExpansion(elements.scaled(2.0), np.zeros(3))
    c = moment.OutgoingExpansion(elements, np.array([0.0, 0.0, 0.01]))
    assert len(list(store.glob("table-*.npz"))) == 3
    np.testing.assert_allclose(b._coeff_m, 2.0 * a._coeff_m, rtol=1e-12, atol=0.0)
    # The table about the shifted centre is its own (its samples are about that centre).
    pts = np.array([[0.5, 0.2, 0.3], [-0.4, 0.1, -0.6]])
    e_exact, _ = elements.fields(pts)
    e_c, _ = c.fields(pts)
    scale = np.max(np.linalg.norm(e_exact, axis=1))
    assert np.max(np.linalg.norm(e_c - e_exact, axis=1)) < 1e-3 * scale


def test_an_unreadable_table_is_built_again_and_replaced(store):
    elements = _dipole_elements()
    first = moment.OutgoingExpansion(elements, np.zeros(3))
    (path,) = store.glob("table-*.npz")
    path.write_bytes(b"not a table")
    again = moment.OutgoingExpansion(elements, np.zeros(3))
    assert np.array_equal(again._coeff_m, first._coeff_m)
    with np.load(path) as kept:
        assert kept["samples"].shape[-1] == 6


def test_a_table_file_of_the_wrong_shape_is_not_used(store, monkeypatch):
    elements = _dipole_elements()
    first = moment.OutgoingExpansion(elements, np.zeros(3))
    (path,) = store.glob("table-*.npz")
    np.savez(path, samples=np.zeros((2, 3, 6), dtype=complex))
    again = moment.OutgoingExpansion(elements, np.zeros(3))
    assert np.array_equal(again._coeff_m, first._coeff_m)


def test_no_table_is_kept_when_the_store_is_off(monkeypatch, tmp_path):
    monkeypatch.setenv(moment.CACHE_ENV, "off")
    moment.OutgoingExpansion(_dipole_elements(), np.zeros(3))
    assert not list(tmp_path.iterdir())
