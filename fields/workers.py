"""Independent pieces of work run side by side, each as if it ran alone.

The options of a scenario are assessed independently of one another: each option's
keep-out search, and later each option's maps, need only what the base has already
computed (the loaded radiators, their tables and the field evaluations the base's
search kept, :mod:`keepclear.antennas.memo`); the shares of a keep-out search's batch of
rays, and the figures of an assessment, are independent too.  Such pieces run:

* on Linux, in child processes forked from this one, at most :func:`worker_count` at a
  time (by default one per core, at most :data:`MAX_WORKERS`): :func:`run_each` forks a
  child per piece as places free up (this process only waits), :func:`start_each` forks
  its children at once and returns, each child running its share of the pieces.  A child
  sees everything this process holds at the moment it is forked, and every piece runs
  inside :func:`keepclear.antennas.memo.isolated`, so it sees nothing another piece
  computes; its result comes back pickled through a file and the child exits.  A warning
  a piece gives is recorded in the child and given again here, in the order of the
  pieces;
* elsewhere (Windows and macOS, where forking a process that has loaded numerical
  libraries is not safe), or with ``KEEPCLEAR_WORKERS=1``, here, one after the other,
  each inside :func:`keepclear.antennas.memo.isolated`.

Either way every piece starts from the same state, so the results are the same, to the
last bit, whatever the number of cores or the order in which the pieces finish.  A piece
that fails in a child (an error, a result that cannot be pickled, a child killed) is run
again here, where its error is raised as it would be without workers; when no child can
be started (no temporary folder, pipe or process) the pieces run here.  What a child
builds for itself (a model's tables, built on first use) is lost with it; a caller that
wants it kept asks the child to report it (the keep-out search does, see
:meth:`keepclear.antennas.base.Radiator.built_on_demand`).

``KEEPCLEAR_WORKERS=N`` sets the number of workers (a whole number from 1; 1 runs
everything in this process).
"""

from __future__ import annotations

import functools
import os
import pickle
import select
import shutil
import signal
import sys
import tempfile
import warnings
from collections.abc import Callable, Sequence
from typing import Any, Final, Generic, TypeVar

from keepclear.antennas import memo

T = TypeVar("T")

#: Most children run at once by default (each holds its own evaluations: about 100-300 MB
#: for an assessment's option).
MAX_WORKERS: Final[int] = 4
#: Environment variable that sets the number of children.
WORKERS_VARIABLE: Final[str] = "KEEPCLEAR_WORKERS"


def _cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def worker_count() -> int:
    """How many pieces run at once: ``KEEPCLEAR_WORKERS`` or one per core (at most 4).

    A value of ``KEEPCLEAR_WORKERS`` that is not a whole number from 1 is ignored with a
    warning.  Without fork (see the module notes), and in a worker process itself (no
    children of children), the answer is 1.
    """
    if _IN_CHILD or not _can_fork():
        return 1
    text = os.environ.get(WORKERS_VARIABLE, "").strip()
    if text:
        try:
            n = int(text)
        except ValueError:
            n = 0
        if n >= 1:
            return n
        warnings.warn(
            f"{WORKERS_VARIABLE}={text!r} ignored: it must be a whole number from 1",
            RuntimeWarning,
            stacklevel=2,
        )
    return max(1, min(MAX_WORKERS, _cores()))


#: Set in a forked child: pieces of work there run one after the other, in it.
_IN_CHILD = False


def _can_fork() -> bool:
    return sys.platform.startswith("linux") and hasattr(os, "fork")


def run_each(tasks: Sequence[Callable[[], T]], workers: int | None = None) -> list[T]:
    """The results of ``tasks`` (called without arguments), in their order.

    Parameters
    ----------
    tasks : sequence of callables
        Independent pieces: each must not depend on what another computes, and its
        result must pickle (it is sent back from a child process).
    workers : int, optional
        Children at once (default :func:`worker_count`); 1 runs every piece here.

    Returns
    -------
    list
        ``[task() for task in tasks]``, each computed from the state this process has
        when :func:`run_each` is called (see the module notes).

    Notes
    -----
    Each piece gets a child of its own, forked when a place is free: this process only
    waits meanwhile, so a child forked later sees the same state as the first.
    """
    tasks = list(tasks)
    n_workers = worker_count() if workers is None else max(1, int(workers))
    if len(tasks) <= 1 or n_workers <= 1 or not _can_fork():
        return [_isolated(task) for task in tasks]
    return Pending(tasks, [[i] for i in range(len(tasks))], n_workers).results()


def start_each(tasks: Sequence[Callable[[], T]], workers: int | None = None) -> Pending[T]:
    """Start ``tasks`` in worker processes and return at once; :meth:`Pending.results` waits.

    This process may go on with other work meanwhile (that work does not reach the
    pieces: each sees the state at this call).  ``workers`` children (default
    :func:`worker_count`; one child is worth starting here, since this process works
    beside it), all forked now, share the pieces: the first takes pieces 0, k, 2k, ...,
    each inside :func:`keepclear.antennas.memo.isolated`.  With a single worker in all
    (:func:`worker_count` is 1, or no fork) the pieces run here, now.  See
    :func:`run_each`.
    """
    tasks = list(tasks)
    available = worker_count()
    if not tasks or available <= 1 or not _can_fork():
        return Pending(tasks, None)
    k = min(max(1, available if workers is None else int(workers)), len(tasks))
    return Pending(tasks, [list(range(j, len(tasks), k)) for j in range(k)], k)


def _isolated(task: Callable[[], T]) -> T:
    with memo.isolated():
        return task()


_FAILED = "keepclear-piece-failed"


def _attempt(task: Callable[[], Any]) -> Any:
    """In a child: ``(value, warnings)`` of ``task``, or :data:`_FAILED`.

    :data:`_FAILED` when the task raised or its value does not pickle: the parent then
    runs it again itself, where it raises its own error (or gives its value).
    """
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            value = _isolated(task)
        given = [(str(w.message), w.category, w.filename, w.lineno) for w in caught]
        pickle.dumps(value, protocol=pickle.HIGHEST_PROTOCOL)  # fails here, not when sent
    except Exception:  # noqa: BLE001 - the parent runs it again and raises
        return _FAILED
    return value, given


def _settle(item: Any, task: Callable[[], T]) -> T:
    """Here: a child's :func:`_attempt` as a value, or ``task`` run here where it failed.

    The child's warnings are given again; a task run here raises its own error.
    """
    if isinstance(item, str) and item == _FAILED:
        return _isolated(task)
    value, given = item
    for message, category, filename, lineno in given:
        warnings.warn_explicit(message, category, filename, lineno)
    return value


def _block_interrupts() -> Any:
    """Block SIGINT in this thread; the mask before, for :func:`_restore_interrupts`."""
    try:
        return signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    except (AttributeError, OSError, ValueError):  # pragma: no cover - no signal masks
        return None


def _restore_interrupts(mask: Any) -> None:
    if mask is not None:
        signal.pthread_sigmask(signal.SIG_SETMASK, mask)


def _fork_child(run: Callable[[], None]) -> int:
    """Fork a child that calls ``run`` and exits; here, the child's pid.

    SIGINT is blocked across the fork: an interrupt that reached the child before it was
    inside ``run`` would unwind through the caller's code in the child.  The child
    unblocks it inside ``run``'s guard (any way out of it ends the child), this process
    on return.  Flush stdout and stderr before (and before making the child's pipes, so
    that a failing flush leaves none open).
    """
    with warnings.catch_warnings():
        # Python 3.12 warns when a process with threads forks (a progress bar's thread, a
        # test runner's): the child only runs its pieces and exits
        warnings.simplefilter("ignore", DeprecationWarning)
        mask = _block_interrupts()
        try:
            pid = os.fork()
        except BaseException:
            _restore_interrupts(mask)
            raise
    if pid == 0:  # pragma: no cover - the child
        try:
            _restore_interrupts(mask)
            run()
        finally:
            os._exit(1)
    _restore_interrupts(mask)
    return pid


def _reap(pids: Sequence[int], fds: Sequence[int]) -> None:
    """Close ``fds`` and stop and wait for the children ``pids``, with SIGINT held back.

    An interrupt during the clean-up is given once it is done, so that no child is left
    running or unwaited.
    """
    mask = _block_interrupts()
    try:
        for fd in fds:
            try:
                os.close(fd)
            except OSError:
                pass
        for pid in pids:
            try:
                os.kill(pid, signal.SIGKILL)
            except OSError:
                pass
        for pid in pids:
            try:
                os.waitpid(pid, 0)
            except OSError:
                pass
    finally:
        _restore_interrupts(mask)


def _child(tasks: Sequence[Callable[[], Any]], path: str) -> None:  # pragma: no cover
    """In a forked child: run ``tasks``, write [(result, warnings)] to ``path``, exit.

    A child starts no children of its own (:func:`worker_count` is 1 in it).
    """
    global _IN_CHILD
    _IN_CHILD = True
    code = 1
    try:
        out = [_attempt(task) for task in tasks]
        with open(path, "wb") as handle:
            pickle.dump(out, handle, protocol=pickle.HIGHEST_PROTOCOL)
        code = 0
    finally:
        os._exit(code)


class Pending(Generic[T]):
    """Pieces of work started by :func:`start_each`; :meth:`results` waits for them.

    ``shares`` lists the pieces of each child; at most ``running`` children run at once
    (the first ones are forked now, the others as places free up while :meth:`results`
    waits).  Without ``shares`` the pieces run here, now.
    """

    def __init__(
        self,
        tasks: list[Callable[[], T]],
        shares: list[list[int]] | None,
        running: int = 1,
    ) -> None:
        self._tasks = tasks
        self._done: list[T] | None = None
        self._children: dict[int, tuple[list[int], int, str]] = {}
        self._waiting = list(shares or [])
        self._running = max(1, running)
        self._folder = ""
        if shares is None:
            self._done = [_isolated(task) for task in tasks]
            return
        try:
            self._folder = tempfile.mkdtemp(prefix="keepclear-work-")
            self._fork_while_free()
        except OSError:  # no temporary folder, pipe or process to be had: run here
            self.cancel()
            self._done = [_isolated(task) for task in tasks]

    def _fork_while_free(self) -> None:
        while self._waiting and len(self._children) < self._running:
            share = self._waiting.pop(0)
            path = os.path.join(self._folder, f"{share[0]}.pickle")
            sys.stdout.flush()
            sys.stderr.flush()
            read_end, write_end = os.pipe()

            def run(share: list[int] = share, path: str = path, read_end: int = read_end) -> None:
                os.close(read_end)  # pragma: no cover - the child
                _child([self._tasks[i] for i in share], path)  # pragma: no cover

            try:
                pid = _fork_child(run)
            except OSError:
                os.close(read_end)
                os.close(write_end)
                raise
            os.close(write_end)
            self._children[read_end] = (share, pid, path)

    def results(self) -> list[T]:
        """The pieces' results in their order (waiting for the children)."""
        if self._done is not None:
            return self._done
        n = len(self._tasks)
        got: list[Any] = [_FAILED] * n
        try:
            while self._children or self._waiting:
                try:
                    self._fork_while_free()
                except OSError:
                    pass  # the pieces left are run here below
                if not self._children:
                    break
                # a child's end of its pipe closes when it exits: wait for any of them
                ready, _, _ = select.select(list(self._children), [], [])
                for fd in ready:
                    share, pid, path = self._children.pop(fd)
                    os.close(fd)
                    _, status = os.waitpid(pid, 0)
                    if os.waitstatus_to_exitcode(status) != 0:
                        continue
                    try:
                        with open(path, "rb") as handle:
                            out = pickle.load(handle)
                    except Exception:  # noqa: BLE001 - run them here instead
                        continue
                    for i, item in zip(share, out, strict=True):
                        got[i] = item
        finally:
            self.cancel()
        done = [_settle(item, task) for item, task in zip(got, self._tasks, strict=True)]
        self._done = done
        return done

    def cancel(self) -> None:
        """Stop the children still running (their pieces are not run) and tidy up."""
        children = dict(self._children)
        self._children.clear()
        _reap([pid for _, pid, _ in children.values()], list(children))
        self._waiting.clear()
        if self._folder:
            shutil.rmtree(self._folder, ignore_errors=True)
            self._folder = ""


def _send(fd: int, obj: object) -> None:
    """Write ``obj`` pickled, after its length (8 bytes), to a pipe."""
    data = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    view = memoryview(len(data).to_bytes(8, "little") + data)
    while view:
        view = view[os.write(fd, view) :]


def _receive(fd: int) -> tuple[bool, Any]:
    """Read one object :func:`_send` wrote: (True, obj), or (False, None) at the pipe's end."""

    def exactly(n: int) -> bytes | None:
        parts, left = [], n
        while left:
            part = os.read(fd, min(left, 1 << 20))
            if not part:
                return None
            parts.append(part)
            left -= len(part)
        return b"".join(parts)

    head = exactly(8)
    if head is None:
        return False, None
    body = exactly(int.from_bytes(head, "little"))
    if body is None:
        return False, None
    return True, pickle.loads(body)  # noqa: S301 - our own child's answer


def _serve(handler: Callable[[Any], Any], inbox: int, outbox: int) -> None:  # pragma: no cover
    """In a crew's child: answer each request read from ``inbox`` until its end, then exit.

    Each answer is ``(value, warnings)``, or :data:`_FAILED` when the handler raised or its
    value does not pickle (the parent then answers that request itself).
    """
    global _IN_CHILD
    _IN_CHILD = True
    code = 1
    try:
        while True:
            got, request = _receive(inbox)
            if not got:
                break
            _send(outbox, _attempt(functools.partial(handler, request)))
        code = 0
    finally:
        os._exit(code)


class Crew(Generic[T]):
    """Worker processes forked once that answer a series of requests with one handler.

    The shares of a keep-out search's batches of rays follow one another (each batch
    depends on the last).  Forking children anew for every batch (:func:`start_each`)
    costs the fork, and in both processes a copy of every memory page written afterwards
    (copy on write) while the children live.  A crew's children are forked at the first
    request (they see this process's state then, like any child) and answer every later
    one; they leave when the crew is closed, or when this process ends (their requests'
    pipe closes).

    ``handler(request)`` is called in a child for each request, inside
    :func:`keepclear.antennas.memo.isolated`; requests and answers are pickled through
    pipes.  What a child keeps from one request to the next is what ``handler`` keeps
    (a model's tables built on first use): ``handler`` must answer every request as it
    would from the state at the fork.  A warning the handler gives is given again here.
    A request whose child fails (an error, an answer that cannot be pickled, a child
    gone) is answered here, by ``handler(request)``, which raises its own error; the crew
    is then closed, and the next request forks new children.  Without fork, or with one
    worker, every request is answered here.

    Parameters
    ----------
    handler : callable
        Answers one request; its answer must pickle.
    size : int
        Children (at most; fewer when fewer requests are sent at once).
    """

    def __init__(self, handler: Callable[[Any], T], size: int) -> None:
        self._handler = handler
        self._size = max(0, int(size))
        self._children: list[tuple[int, int, int]] = []  # (pid, inbox, outbox) as seen here
        self._asked: list[tuple[int, Any]] = []  # (child index or -1, request) in order
        self._stale = False  # a child was found gone: close the crew after these answers

    def start(self, requests: Sequence[Any]) -> None:
        """Send request ``k`` to child ``k`` (forking the children still missing)."""
        if self._asked:
            raise RuntimeError("the crew's last requests are not answered yet")
        requests = list(requests)
        use = len(requests) if _can_fork() and not _IN_CHILD else 0
        use = min(use, self._size)
        asked: list[tuple[int, Any]] = []
        try:
            try:
                while len(self._children) < use:
                    self._fork()
            except OSError:  # no pipe or process to be had: the rest are answered here
                use = len(self._children)
            for k, request in enumerate(requests):
                if k < use:
                    try:
                        _send(self._children[k][1], request)
                    except OSError:  # the child is gone: answered here, the crew renewed
                        asked.append((-1, request))
                        self._stale = True
                        continue
                    asked.append((k, request))
                else:
                    asked.append((-1, request))
        except BaseException:  # an interrupt part way: a child may hold a request
            self.close()
            raise
        self._asked = asked

    def results(self) -> list[T]:
        """The answers to the requests of the last :meth:`start`, in their order."""
        asked, self._asked = self._asked, []
        got: list[Any] = []
        broken, self._stale = self._stale, False
        try:
            for k, _ in asked:
                if k < 0:
                    got.append(_FAILED)
                    continue
                try:
                    ok, reply = _receive(self._children[k][2])
                except Exception:  # noqa: BLE001 - an answer that does not read back here
                    ok, reply = False, None
                if not ok or (isinstance(reply, str) and reply == _FAILED):
                    broken = True
                    got.append(_FAILED)
                else:
                    got.append(reply)
        except BaseException:  # an interrupt while waiting: the children's work is moot
            self.close()
            raise
        if broken:
            self.close()
        return [
            _settle(item, functools.partial(self._handler, request))
            for (_, request), item in zip(asked, got, strict=True)
        ]

    def close(self) -> None:
        """Stop the children (any request still running is dropped)."""
        children, self._children = self._children, []
        self._asked = []
        self._stale = False
        _reap([pid for pid, _, _ in children], [fd for _, *fds in children for fd in fds])

    def __enter__(self) -> Crew[T]:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _fork(self) -> None:
        sys.stdout.flush()
        sys.stderr.flush()
        to_child = os.pipe()
        try:
            from_child = os.pipe()
        except OSError:
            os.close(to_child[0])
            os.close(to_child[1])
            raise

        def run() -> None:  # pragma: no cover - the child
            os.close(to_child[1])
            os.close(from_child[0])
            for _, inbox, outbox in self._children:  # the other children's pipes
                os.close(inbox)
                os.close(outbox)
            _serve(self._handler, to_child[0], from_child[1])

        try:
            pid = _fork_child(run)
        except OSError:
            for fd in (*to_child, *from_child):
                os.close(fd)
            raise
        os.close(to_child[0])
        os.close(from_child[1])
        self._children.append((pid, to_child[1], from_child[0]))
