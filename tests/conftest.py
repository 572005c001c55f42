"""Shared fixtures: scenario files written into a temporary folder."""

from __future__ import annotations

import os
import shutil
import tempfile
import textwrap
from contextlib import ExitStack
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
SCENARIOS = REPO / "scenarios"


def pytest_configure(config: pytest.Config) -> None:
    """Parallel workers get one BLAS thread and no worker processes of their own each; the
    run keeps NEC-2 solutions in a folder of its own.

    With ``-n`` the workers already use every core; BLAS threads, or keepclear's own worker
    processes (``KEEPCLEAR_WORKERS``, fields/workers.py: tests/test_workers.py sets its own
    number), on top of them only contend.  The variables are read when numpy loads, in the workers, which start after
    this hook.  Results do not depend on the thread count (DEVELOPERS.md, "The same
    answer").  NEC-2 solutions (``KEEPCLEAR_CACHE_DIR``) go to a temporary folder shared
    by the workers and removed at the end, unless the variable is set already: the suite
    neither reads nor fills the user's store.
    """
    if os.environ.get("PYTEST_XDIST_WORKER"):
        return
    workers = getattr(config.option, "numprocesses", None)
    if workers:
        for name in (
            "OPENBLAS_NUM_THREADS",
            "OMP_NUM_THREADS",
            "MKL_NUM_THREADS",
            "KEEPCLEAR_WORKERS",
        ):
            os.environ.setdefault(name, "1")
    if "KEEPCLEAR_CACHE_DIR" not in os.environ:
        folder = tempfile.mkdtemp(prefix="keepclear-nec-")
        os.environ["KEEPCLEAR_CACHE_DIR"] = folder
        config.stash[_STORE] = folder


_STORE = pytest.StashKey[str]()


def pytest_unconfigure(config: pytest.Config) -> None:
    """Remove the run's folder of NEC-2 solutions."""
    folder = config.stash.get(_STORE, None)
    if folder is not None:
        shutil.rmtree(folder, ignore_errors=True)
        os.environ.pop("KEEPCLEAR_CACHE_DIR", None)


@pytest.fixture
def write_scenario(tmp_path: Path):
    """Write TOML text (dedented) to a file and return its path."""

    def _write(text: str, name: str = "scenario.toml") -> Path:
        path = tmp_path / name
        path.write_text(textwrap.dedent(text), encoding="utf-8")
        return path

    return _write


@pytest.fixture
def shared_models():
    """Scenarios loaded in the test share their radiators and those radiators' evaluations.

    For a test that runs the same scenario twice (the Python API and the command line):
    the second run gets the first one's radiators (:func:`keepclear.fields.scenario.
    shared_radiators`) and looks their fields up (:func:`keepclear.antennas.memo.
    shared_field_evaluations`); everything else runs again.
    """
    from keepclear.antennas.memo import shared_field_evaluations
    from keepclear.fields.scenario import shared_radiators

    with ExitStack() as stack:
        stack.enter_context(shared_radiators())
        yield stack.enter_context(shared_field_evaluations())


ISOTROPIC = """
name = "test point source"
[[source]]
id = "s"
antenna = "isotropic"
power_w = 100.0
position_m = [0.0, 0.0, 0.0]
"""
