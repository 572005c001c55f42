"""Field evaluations shared between the variants of one scenario.

The options of a scenario (``[[option]]``, ``[[sweep]]``) mostly keep the base's
radiators: a shield, a reflector or the duty cycle changes nothing in a source model, and
a new ``power_w`` only scales its fields by sqrt(P'/P) (every model here is linear in the
field amplitude).  The scenario loader gives such an option the base's radiator itself, or
a copy made with :meth:`~keepclear.antennas.base.Radiator.with_power` that shares its
caches.  Inside :func:`shared_field_evaluations` each field point is evaluated once for
all of them: the keep-out searches of the variants sample the same rays at the same
radii, and their maps share one grid, so an option's search or map is mostly looked up.
The field orchestrator asks through :func:`radiator_fields`, which shares the whole model
of any radiator (an aperture with its rim, a wire, a monopole on its plate) by its
:attr:`~keepclear.antennas.base.Radiator.field_identity`; an aperture radiator asked
directly shares its aperture integration the same way.

What is shared is the complex E and H of the radiator alone at a point, before shields,
images (an image is the radiator evaluated at the mirrored point, which is shared too) and
the duty cycle are applied.  A point is the same only when its three coordinates are equal
to the last bit.  A copy with another power gets the stored fields times
sqrt(P'/P), which differs from evaluating afresh in the last bit or two only.

An array of points asked for before as a whole (a variant's map asks for the very chunks
of the base's map) is found by a digest of its bytes and checked point by point against
the copy kept, instead of one index look-up a point.

The options of an assessment are computed side by side in worker processes
(:mod:`keepclear.fields.workers`): each starts from what the base kept and sees nothing
another option keeps.  Where they run one after the other in this process instead, each
runs inside :func:`isolated`, which forgets at its end what was kept in it, so the
results are the same, to the last bit, either way.

Memory: at most :data:`MAX_POINTS` points are kept (E and H, 96 bytes, and an index entry,
about 100 bytes, a point: about 150 MiB in all; a whole array's copy counts a quarter point
a point); beyond that, new points are evaluated and not kept.  Everything is dropped when
the outermost ``with`` block ends.
"""

from __future__ import annotations

import functools
import hashlib
import math
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from typing import Any, ParamSpec, TypeVar

import numpy as np
from numpy.typing import NDArray

#: Points kept at most, over every radiator of a :func:`shared_field_evaluations` block.
MAX_POINTS = 800_000
#: Fewest points of a chunk remembered whole (smaller ones are looked up point by point).
MIN_CHUNK_POINTS = 1024

_VOID_POINT = np.dtype((np.void, 24))
_ACTIVE: ContextVar[FieldMemo | None] = ContextVar("keepclear_field_memo", default=None)

Fields = tuple[NDArray[np.complex128], NDArray[np.complex128]]


class _Store:
    """The E and H of one radiator model at the points seen, at the power ``scale`` stands for."""

    def __init__(self, scale: float) -> None:
        self.scale = scale
        self.index: dict[bytes, int] = {}
        #: The keys in the order they were kept (to forget the newest, :meth:`truncate`).
        self.keys: list[bytes] = []
        #: Whole point arrays seen before, by digest: (the points, their rows).
        self.chunks: dict[bytes, tuple[NDArray[np.float64], NDArray[np.intp]]] = {}
        self.e = np.empty((0, 3), dtype=complex)
        self.h = np.empty((0, 3), dtype=complex)
        self.size = 0

    def append(self, keys: list[bytes], e: NDArray, h: NDArray) -> NDArray[np.intp]:
        n = len(keys)
        if self.size + n > self.e.shape[0]:
            capacity = max(2 * self.e.shape[0], self.size + n, 4096)
            for name in ("e", "h"):
                grown = np.empty((capacity, 3), dtype=complex)
                grown[: self.size] = getattr(self, name)[: self.size]
                setattr(self, name, grown)
        rows = np.arange(self.size, self.size + n)
        self.e[rows] = e
        self.h[rows] = h
        self.index.update(zip(keys, rows.tolist(), strict=True))
        self.keys.extend(keys)
        self.size += n
        return rows

    def truncate(self, size: int, n_chunks: int) -> None:
        """Forget every point kept after the first ``size`` and every chunk after ``n_chunks``."""
        for key in self.keys[size:]:
            del self.index[key]
        del self.keys[size:]
        self.size = size
        for digest in list(self.chunks)[n_chunks:]:
            del self.chunks[digest]


class FieldMemo:
    """E and H of radiator models at points, by model and exact point (see the module notes)."""

    def __init__(self, max_points: int = MAX_POINTS) -> None:
        self.max_points = int(max_points)
        self.kept = 0
        self.looked_up = 0
        self.evaluated = 0
        self._stores: dict[int, tuple[Any, _Store]] = {}

    def fields(
        self,
        model: object,
        scale: float,
        points_m: NDArray[np.float64],
        evaluate: Callable[[NDArray[np.float64]], Fields],
    ) -> Fields:
        """E and H at points for the model ``model`` at amplitude ``scale``.

        Parameters
        ----------
        model : object
            The model's identity: the same object for a radiator and its copies with other
            powers.
        scale : float
            The radiator's field amplitude relative to the model (sqrt of its power) [1].
        points_m : ndarray, shape (N, 3)
            Field points [m].
        evaluate : callable
            ``evaluate(points)`` -> (E, H) of the radiator itself at points not seen yet.
        """
        entry = self._stores.get(id(model))
        if entry is None or entry[0] is not model:
            entry = (model, _Store(scale))
            self._stores[id(model)] = entry
        store = entry[1]
        pts = np.ascontiguousarray(points_m, dtype=np.float64)
        factor = scale / store.scale if store.scale != scale else None
        # A variant's map asks for the very chunks of points the base's map asked for:
        # such a chunk is found whole by its digest (and checked point by point).
        digest = hashlib.blake2b(pts.data, digest_size=16).digest()
        seen = store.chunks.get(digest)
        if seen is not None and np.array_equal(seen[0], pts):
            rows = seen[1]
            self.looked_up += rows.size
            e, h = store.e[rows], store.h[rows]
            return (e, h) if factor is None else (e * factor, h * factor)
        keys = pts.view(_VOID_POINT).ravel().tolist()
        get = store.index.get
        rows = np.fromiter((get(k, -1) for k in keys), dtype=np.intp, count=len(keys))
        miss = np.flatnonzero(rows < 0)
        self.looked_up += len(keys) - miss.size
        self.evaluated += miss.size
        if miss.size == 0:
            self._remember_chunk(store, digest, pts, rows)
            e, h = store.e[rows], store.h[rows]
            return (e, h) if factor is None else (e * factor, h * factor)
        # a point asked twice in one call (a point on a plane is its own mirror image) is
        # evaluated and kept once
        first: dict[bytes, int] = {}  # each point asked: its place among the new ones
        order = np.fromiter(
            (first.setdefault(keys[i], len(first)) for i in miss.tolist()),
            dtype=np.intp,
            count=miss.size,
        )
        unique = miss[np.unique(order, return_index=True)[1]]
        e_new, h_new = evaluate(pts[unique])
        e = np.empty((len(keys), 3), dtype=complex)
        h = np.empty((len(keys), 3), dtype=complex)
        hit = np.flatnonzero(rows >= 0)
        if hit.size:
            e[hit], h[hit] = store.e[rows[hit]], store.h[rows[hit]]
            if factor is not None:
                e[hit] *= factor
                h[hit] *= factor
        e[miss], h[miss] = e_new[order], h_new[order]
        self.evaluated += unique.size - miss.size
        if self.kept + unique.size <= self.max_points:
            back = None if factor is None else 1.0 / factor
            kept_rows = store.append(
                list(first),
                e_new if back is None else e_new * back,
                h_new if back is None else h_new * back,
            )
            rows[miss] = kept_rows[order]
            self.kept += unique.size
            self._remember_chunk(store, digest, pts, rows)
        return e, h

    def checkpoint(self) -> tuple[int, dict[int, tuple[Any, int, int]]]:
        """The memo's state now, for :meth:`rollback`."""
        return self.kept, {
            k: (entry, entry[1].size, len(entry[1].chunks)) for k, entry in self._stores.items()
        }

    def rollback(self, state: tuple[int, dict[int, tuple[Any, int, int]]]) -> None:
        """Forget everything kept since :meth:`checkpoint` gave ``state``."""
        kept, entries = state
        self._stores = {k: entry for k, (entry, _, _) in entries.items()}
        for entry, size, n_chunks in entries.values():
            entry[1].truncate(size, n_chunks)
        self.kept = kept

    def _remember_chunk(
        self, store: _Store, digest: bytes, pts: NDArray[np.float64], rows: NDArray[np.intp]
    ) -> None:
        """Keep a whole chunk's points and rows (counted against the bound, 24 bytes a point)."""
        if len(rows) < MIN_CHUNK_POINTS or digest in store.chunks:
            return
        cost = -(-len(rows) // 4)  # the copy of the points: a quarter of a kept point's bytes
        if self.kept + cost > self.max_points:
            return
        store.chunks[digest] = (pts.copy(), rows.copy())
        self.kept += cost


def active_memo() -> FieldMemo | None:
    """The memo of the innermost :func:`shared_field_evaluations` block, or None."""
    return _ACTIVE.get()


@contextmanager
def shared_field_evaluations(max_points: int = MAX_POINTS) -> Iterator[FieldMemo]:
    """Share aperture field evaluations between radiators of one model inside the block.

    Nested blocks use the outermost one's memo; it is dropped when that block ends.
    """
    memo = _ACTIVE.get()
    if memo is not None:
        yield memo
        return
    memo = FieldMemo(max_points)
    token = _ACTIVE.set(memo)
    try:
        yield memo
    finally:
        _ACTIVE.reset(token)


@contextmanager
def isolated() -> Iterator[None]:
    """Inside the block, sharing goes on, but what is kept in it is forgotten at its end.

    A piece of work run inside sees the evaluations kept before the block and its own,
    never those of a piece run before it in another such block: the same state as a
    child process forked at the block's start (:mod:`keepclear.fields.workers`).
    """
    memo = _ACTIVE.get()
    if memo is None:
        yield
        return
    state = memo.checkpoint()
    try:
        yield
    finally:
        memo.rollback(state)


@contextmanager
def paused() -> Iterator[None]:
    """No sharing inside the block (evaluations that no variant repeats: keep memory free)."""
    token = _ACTIVE.set(None)
    try:
        yield
    finally:
        _ACTIVE.reset(token)


def radiator_fields(
    radiator: Any, points_m: NDArray[np.float64], chunk_bytes: int | None = None
) -> Fields:
    """E and H of a radiator at points, shared between its copies inside a sharing block.

    Outside :func:`shared_field_evaluations`, for a radiator without a
    ``field_identity`` (None) and at zero power this is ``radiator.fields(points_m,
    chunk_bytes)``.  Inside, the fields are kept under the radiator's ``field_identity``
    (the same object for a radiator and its :meth:`with_power` copies, which differ only
    by the factor sqrt(P'/P)) and ``sqrt(power_w)``; a point not seen yet is evaluated
    with the inner sharing paused (it is kept once, here).

    Parameters
    ----------
    radiator : Radiator
        Any source model.
    points_m : ndarray, shape (N, 3)
        Field points in scenario coordinates [m].
    chunk_bytes : int, optional
        The radiator's memory budget for one chunk [bytes] (default: the radiator's own).
    """
    args = () if chunk_bytes is None else (chunk_bytes,)
    memo = _ACTIVE.get()
    identity = getattr(radiator, "field_identity", None)
    power_w = float(radiator.power_w)
    if memo is None or identity is None or not power_w > 0.0:
        return radiator.fields(points_m, *args)

    def evaluate(points: NDArray[np.float64]) -> Fields:
        with paused():
            return radiator.fields(points, *args)

    return memo.fields(identity, math.sqrt(power_w), points_m, evaluate)


P = ParamSpec("P")
R = TypeVar("R")


def sharing_evaluations(function: Callable[P, R]) -> Callable[P, R]:
    """Decorator: run ``function`` inside :func:`shared_field_evaluations`."""

    @functools.wraps(function)
    def run(*args: P.args, **kwargs: P.kwargs) -> R:
        with shared_field_evaluations():
            return function(*args, **kwargs)

    return run
