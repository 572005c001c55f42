"""Reading validated values out of parsed TOML tables.

A :class:`Table` wraps one TOML table with its key path (``source.2``) and the file
name, hands out typed, range-checked values, and at the end refuses any key that was
not asked for, with a "did you mean" suggestion.  Every scenario section is read
through it, so all messages share one form::

    scenarios/bench.toml: source.2.power_w: must be a number > 0 [W], got -5

Entries of an array of tables count from 1 in file order (``source.2`` is the second
``[[source]]``), the same path a sweep key takes.

Model code stays free of file handling: it raises
:class:`~keepclear.antennas.base.ModelInputError` naming the parameter, and
:meth:`Table.build` relocates that to the key path.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from typing import Any, TypeVar

import numpy as np

from .errors import (
    ModelInputError,
    ScenarioError,
    UnknownKeyError,
    closest,
    entry_path,
    suggest,
)

T = TypeVar("T")
#: Similarity (difflib ratio) from which a key not read is named as a misspelling of a
#: required key that is missing (thikness_m / thickness_m: 0.95).
MISSPELLING_RATIO = 0.85
_MISSING = object()


def _describe(value: Any) -> str:
    if isinstance(value, int) and not isinstance(value, bool) and value.bit_length() > 200:
        # repr() of a very long integer is slow, and refused beyond 4300 digits.
        return f"an integer of about {value.bit_length() * math.log10(2):.0f} digits"
    try:
        text = repr(value)
    except (ValueError, RecursionError):
        text = f"a {type(value).__name__} too large to show"
    return text if len(text) <= 60 else text[:57] + "..."


class Table:
    """A TOML table being read, with its location for error messages.

    Parameters
    ----------
    data : dict
        The parsed table.
    path : str
        Key path of the table (``""`` for the top level, ``"source.1"``).
    source : str
        File name for messages.
    """

    def __init__(self, data: Any, path: str, source: str) -> None:
        self.path = path
        self.source = source
        if not isinstance(data, dict):
            raise ScenarioError(f"must be a table, got {_describe(data)}", source, path or None)
        self.data = data
        self._used: set[str] = set()

    # ----------------------------------------------------------- locations
    def key_path(self, key: str) -> str:
        """Full key path of ``key`` in this table."""
        return f"{self.path}.{key}" if self.path else key

    def error(self, key: str, message: str) -> ScenarioError:
        """A :class:`ScenarioError` located at ``key`` of this table."""
        return ScenarioError(message, self.source, self.key_path(key))

    def unknown_key(self, key: str, what: str, allowed: Sequence[str]) -> UnknownKeyError:
        """An :class:`UnknownKeyError` at ``key``: ``what``, the closest allowed key, the list."""
        return UnknownKeyError(
            what + suggest(key, allowed) + f"; allowed: {', '.join(allowed)}",
            self.source,
            self.key_path(key),
            word=key,
            allowed=allowed,
        )

    def has(self, key: str) -> bool:
        """Whether ``key`` is present (and mark it as known)."""
        return key in self.data

    def _get(self, key: str, default: Any) -> Any:
        self._used.add(key)
        if key in self.data:
            return self.data[key]
        if default is _MISSING:
            # a key of the table not read yet that is nearly this one is a misspelling; the
            # bar is high, for real keys look alike too (width_m, pitch_m, depth_m: 0.71)
            typo = closest(key, [k for k in self.data if k not in self._used], MISSPELLING_RATIO)
            if typo:
                raise self.error(
                    key, f"is required here; the table has '{typo}': a misspelling of '{key}'?"
                )
            raise self.error(key, "is required here")
        return default

    # ------------------------------------------------------------- readers
    def number(
        self,
        key: str,
        default: Any = _MISSING,
        *,
        unit: str = "",
        minimum: float | None = None,
        maximum: float | None = None,
        exclusive_minimum: bool = False,
        exclusive_maximum: bool = False,
    ) -> Any:
        """A finite real number, range-checked; ``default`` (maybe None) when absent."""
        value = self._get(key, default)
        if value is default and key not in self.data:
            return value
        allowed = self._range_text(minimum, maximum, exclusive_minimum, exclusive_maximum, unit)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.error(key, f"must be {allowed}, got {_describe(value)}")
        try:
            x = float(value)
        except OverflowError:  # an integer beyond the float range (TOML integers are unbounded)
            x = math.inf
        if not math.isfinite(x):
            raise self.error(key, f"must be a finite number ({allowed}), got {_describe(value)}")
        low_bad = minimum is not None and (x <= minimum if exclusive_minimum else x < minimum)
        high_bad = maximum is not None and (x >= maximum if exclusive_maximum else x > maximum)
        if low_bad or high_bad:
            raise self.error(key, f"must be {allowed}, got {_describe(value)}")
        return x

    @staticmethod
    def _range_text(
        minimum: float | None,
        maximum: float | None,
        exclusive_minimum: bool,
        exclusive_maximum: bool,
        unit: str,
    ) -> str:
        parts = []
        if minimum is not None:
            parts.append(f"{'>' if exclusive_minimum else '>='} {minimum:g}")
        if maximum is not None:
            parts.append(f"{'<' if exclusive_maximum else '<='} {maximum:g}")
        text = "a number" + (" " + " and ".join(parts) if parts else "")
        return text + (f" [{unit}]" if unit else "")

    def string(
        self, key: str, default: Any = _MISSING, *, choices: Sequence[str] | None = None
    ) -> Any:
        """A string; with ``choices`` one of them (with a suggestion otherwise)."""
        value = self._get(key, default)
        if value is default and key not in self.data:
            return value
        if not isinstance(value, str):
            raise self.error(key, f"must be a string, got {_describe(value)}")
        if choices is not None and value not in choices:
            raise self.error(
                key,
                f"must be one of {', '.join(repr(c) for c in choices)}, got {_describe(value)}"
                + suggest(value, choices),
            )
        return value

    def vector(
        self, key: str, default: Any = _MISSING, *, unit: str = "", nonzero: bool = False
    ) -> Any:
        """Three finite numbers as a float array; ``nonzero`` refuses the zero vector."""
        value = self._get(key, default)
        if value is default and key not in self.data:
            return value
        what = "three numbers [x, y, z]" + (f" [{unit}]" if unit else "")
        if (
            not isinstance(value, list)
            or len(value) != 3
            or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in value)
        ):
            raise self.error(key, f"must be {what}, got {_describe(value)}")
        try:
            arr = np.asarray(value, dtype=float)
        except OverflowError:  # an integer beyond the float range
            arr = np.full(3, np.inf)
        if not np.all(np.isfinite(arr)):
            raise self.error(key, f"must be {what}, all finite, got {_describe(value)}")
        if np.max(np.abs(arr)) > 1e6:
            raise self.error(key, f"must be {what} within 1e6 in size, got {_describe(value)}")
        if nonzero and float(np.linalg.norm(arr)) < 1e-12:
            raise self.error(key, "must not be a zero vector: give a direction")
        return arr

    def string_list(self, key: str, default: Any = _MISSING) -> Any:
        """A list of strings."""
        value = self._get(key, default)
        if value is default and key not in self.data:
            return value
        if not isinstance(value, list) or any(not isinstance(v, str) for v in value):
            raise self.error(key, f"must be a list of strings, got {_describe(value)}")
        return list(value)

    def table(self, key: str, default: Any = _MISSING) -> Any:
        """A sub-table as a :class:`Table` (or ``default`` when absent)."""
        value = self._get(key, default)
        if value is default and key not in self.data:
            return value
        if not isinstance(value, dict):
            raise self.error(
                key, f"must be a table ([{self.key_path(key)}]), got {_describe(value)}"
            )
        return Table(value, self.key_path(key), self.source)

    def tables(self, key: str) -> list[Table]:
        """An array of tables (``[[key]]``) as a list of :class:`Table`; empty when absent."""
        value = self._get(key, [])
        if isinstance(value, dict):
            value = [value]
        if not isinstance(value, list):
            raise self.error(key, f"must be an array of tables ([[{key}]]), got {_describe(value)}")
        out = []
        for i, item in enumerate(value):
            path = entry_path(self.key_path(key), i)
            if not isinstance(item, dict):
                raise ScenarioError(f"must be a table, got {_describe(item)}", self.source, path)
            out.append(Table(item, path, self.source))
        return out

    def raw(self, key: str, default: Any = _MISSING) -> Any:
        """The value as parsed, unchecked (the caller checks it)."""
        return self._get(key, default)

    # -------------------------------------------------------------- closing
    def finish(self, allowed: Iterable[str] | None = None) -> None:
        """Refuse every key that was not read (or is not in ``allowed``).

        Raises
        ------
        ScenarioError
            Naming the first unknown key, the keys allowed here, and the closest one.
        """
        known = set(self._used if allowed is None else allowed)
        for key in self.data:
            if key not in known:
                raise self.unknown_key(key, "is not a known key here", sorted(known))

    def build(self, factory: Callable[..., T], *args: Any, **kwargs: Any) -> T:
        """Call a model constructor, relocating its :class:`ModelInputError` to this table."""
        try:
            return factory(*args, **kwargs)
        except ModelInputError as exc:
            raise self.error(exc.parameter, exc.message) from None
