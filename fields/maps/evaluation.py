"""A scenario evaluated on a map's grid: fields, power densities and exposure quotients.

Samples where a model returns no finite field, and samples inside a source or on its
metal (:func:`keepclear.fields.scenario.inside_source_mask`: inside a guide, a horn, a
box, within 1 mm of a wire or a plate), count as over every limit: nobody stands there,
and a number there must not pass for a safe one.  The fields of a sample inside a
source are kept as computed; its quotients are raised to :data:`INSIDE_SOURCE_QUOTIENT`.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from keepclear.antennas.base import ETA0_OHM, ModelRangeWarning

from .. import limits as limits_mod
from ..field import evaluate
from ..scenario import Scenario
from .grids import Grid

#: Density given to a sample on a source singularity (far above any limit) [W m^-2].
SINGULAR_DENSITY_W_M2 = 1e12
#: Exposure quotient given, for every limit, to a sample inside a source or on its metal
#: (far above one, finite so that contours and colour scales stay defined) [1].
INSIDE_SOURCE_QUOTIENT = 1e9
ProgressCallback = Callable[[int, int], None]


def busy(progress: Callable[[str], Any] | None, label: str) -> Any:
    """A context for a stage without steps: the progress factory's indeterminate bar.

    ``progress(label)`` may return a callback with a ``busy()`` context manager (the
    command line's progress bars); otherwise nothing is shown.
    """
    import contextlib

    callback = progress(label) if progress is not None else None
    context = getattr(callback, "busy", None)
    return context() if context is not None else contextlib.nullcontext()


@dataclass(frozen=True)
class MapResult:
    """Time-averaged fields and exposure quotients on a grid.

    Arrays have the grid's shape (ny, nx); ``quotients`` is (L, ny, nx).

    Parameters
    ----------
    grid : Grid
    power_density_w_m2, peak_power_density_w_m2 : ndarray
        Time-averaged and while-radiating power density [W m^-2].
    e_v_m, h_a_m : ndarray
        Time-averaged RMS field strengths [V m^-1], [A m^-1].
    limits : tuple of LimitValue
        The limits, at the scenario frequency.
    quotients : ndarray
        Exposure quotient per limit [1]; at least :data:`INSIDE_SOURCE_QUOTIENT` where
        ``inside_source`` is set.
    inside_source : ndarray of bool, optional
        Samples inside a source or on its metal (shape (ny, nx)); none when omitted.
    """

    grid: Grid
    power_density_w_m2: NDArray[np.float64]
    peak_power_density_w_m2: NDArray[np.float64]
    e_v_m: NDArray[np.float64]
    h_a_m: NDArray[np.float64]
    limits: tuple[limits_mod.LimitValue, ...]
    quotients: NDArray[np.float64]
    inside_source: NDArray[np.bool_] | None = None

    @property
    def limit_ids(self) -> tuple[str, ...]:
        """The limit ids in the order of ``quotients``."""
        return tuple(v.id for v in self.limits)

    def quotient(self, limit_id: str) -> NDArray[np.float64]:
        """The quotient map of one limit [1]."""
        return self.quotients[self.limit_ids.index(limit_id)]


def limit_values(scenario: Scenario, limit_ids: Sequence[str]) -> tuple[limits_mod.LimitValue, ...]:
    """The limits at the scenario frequency (LimitError names an unknown id)."""
    return tuple(scenario.limit_value(i) for i in limit_ids)


def evaluate_map(
    scenario: Scenario,
    grid: Grid,
    limit_ids: Sequence[str] | None = None,
    progress: ProgressCallback | None = None,
) -> MapResult:
    """Evaluate a scenario on a grid.

    Parameters
    ----------
    scenario : Scenario
    grid : Grid
    limit_ids : sequence of str, optional
        Limits to compare with (default: the scenario's).
    progress : callable, optional
        Called as ``progress(done, total)`` in points.

    Returns
    -------
    MapResult
    """
    ids = list(scenario.limit_ids if limit_ids is None else limit_ids)
    values = limit_values(scenario, ids)
    points = grid.points_m()
    n = points.shape[0]
    _warn_undersampled(scenario, grid)
    chunk = max(4096, n // 50)
    parts = []
    for start in range(0, n, chunk):
        parts.append(evaluate(scenario, points[start : start + chunk]))
        if progress is not None:
            progress(min(n, start + chunk), n)

    def cat(name: str) -> NDArray[np.float64]:
        return np.concatenate([getattr(p, name) for p in parts]).reshape(grid.shape)

    s, e, h, peak = _singular_as_exceeding(
        cat("power_density_w_m2"), cat("e_v_m"), cat("h_a_m"), cat("peak_power_density_w_m2")
    )
    q = np.empty((len(values), *grid.shape))
    while_on = None
    for i, v in enumerate(values):
        if v.while_on:  # a device threshold: the fields while every source radiates
            if while_on is None:
                while_on = _while_on_fields(s, peak, cat("peak_e_v_m"), cat("peak_h_a_m"))
            q[i] = limits_mod.quotient(v, *while_on)
        else:
            q[i] = limits_mod.quotient(v, s, e, h)
    inside = scenario.inside_source(points).reshape(grid.shape)
    if inside.any():
        q[:, inside] = np.maximum(q[:, inside], INSIDE_SOURCE_QUOTIENT)
    return MapResult(grid, s, peak, e, h, values, q, inside)


def _while_on_fields(
    s: NDArray[np.float64], peak: NDArray[np.float64], peak_e: NDArray, peak_h: NDArray
) -> tuple[NDArray, NDArray, NDArray]:
    """Density, E and H while every source radiates, for the while-on limits.

    A sample counted as exceeding by :func:`_singular_as_exceeding` (its density set to
    :data:`SINGULAR_DENSITY_W_M2`) or without finite peak fields exceeds here too.
    """
    bad = s >= SINGULAR_DENSITY_W_M2
    bad |= ~(np.isfinite(peak_e) & np.isfinite(peak_h))
    peak_e = np.where(bad, math.sqrt(SINGULAR_DENSITY_W_M2 * ETA0_OHM), peak_e)
    peak_h = np.where(bad, math.sqrt(SINGULAR_DENSITY_W_M2 / ETA0_OHM), peak_h)
    return np.where(bad, SINGULAR_DENSITY_W_M2, peak), peak_e, peak_h


def _singular_as_exceeding(
    s: NDArray[np.float64], e: NDArray[np.float64], h: NDArray[np.float64], peak: NDArray
) -> tuple[NDArray, NDArray, NDArray, NDArray]:
    """Samples where a model returns no finite field (on a source) count as exceeding.

    They are set to :data:`SINGULAR_DENSITY_W_M2` (E and H of a plane wave of that
    density), far above every limit, and a warning says how many there are.
    """
    bad = ~(np.isfinite(s) & np.isfinite(e) & np.isfinite(h) & np.isfinite(peak))
    if not bad.any():
        return s, e, h, peak
    warnings.warn(
        f"{int(bad.sum())} map sample(s) fall on a source singularity (no finite field); "
        "they are counted as exceeding every limit",
        ModelRangeWarning,
        stacklevel=3,
    )
    s, e, h, peak = (np.where(bad, 0.0, x) for x in (s, e, h, peak))
    s[bad] = peak[bad] = SINGULAR_DENSITY_W_M2
    e[bad] = math.sqrt(SINGULAR_DENSITY_W_M2 * ETA0_OHM)
    h[bad] = math.sqrt(SINGULAR_DENSITY_W_M2 / ETA0_OHM)
    return s, e, h, peak


def _warn_undersampled(scenario: Scenario, grid: Grid) -> None:
    if scenario.reflections == "coherent" and scenario.reflectors:
        wavelength = scenario.wavelength_m
        if grid.step_m > wavelength / 8:
            warnings.warn(
                f"the map step {grid.step_m * 100:.1f} cm is coarser than lambda/8 = "
                f"{wavelength / 8 * 100:.1f} cm: the coherent standing-wave pattern is "
                "undersampled and its crests may be missed between samples; use a finer "
                '--step-m or reflections = "envelope"',
                ModelRangeWarning,
                stacklevel=2,
            )
