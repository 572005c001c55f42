"""A module imported on first use, so that the command line starts fast.

``--help`` and a refused argument need neither numpy nor the models; importing them
costs most of a second.  ``np = lazy_module("numpy")`` binds a stand-in whose first
attribute access imports the module, so code keeps writing ``np.asarray``.
"""

from __future__ import annotations

import importlib
from types import ModuleType
from typing import Any


class _LazyModule:
    """Stand-in for a module, imported on the first attribute looked up."""

    __slots__ = ("_name",)

    def __init__(self, name: str) -> None:
        self._name = name

    def __getattr__(self, attribute: str) -> Any:
        module: ModuleType = importlib.import_module(self._name)
        return getattr(module, attribute)

    def __repr__(self) -> str:
        return f"<module {self._name!r}, imported on first use>"


def lazy_module(name: str) -> Any:
    """A stand-in for module ``name`` that imports it on the first attribute access."""
    return _LazyModule(name)
