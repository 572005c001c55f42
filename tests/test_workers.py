"""Pieces of work run side by side (fields/workers.py): the same results as one after another.

No outside source: these check the project's own scheduling (results in order, each piece
from the same state, warnings and errors as without workers); the physics of what runs in
the pieces is checked elsewhere.
"""

from __future__ import annotations

import os
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from keepclear.antennas import memo
from keepclear.fields import workers
from keepclear.fields.compare import compare_options
from keepclear.fields.scenario import load_scenario

ROOT = Path(__file__).resolve().parent.parent
LINUX = sys.platform.startswith("linux")


@pytest.fixture(autouse=True)
def _two_workers(monkeypatch: pytest.MonkeyPatch) -> None:
    """Two workers whatever the machine's cores (a test may set another number)."""
    monkeypatch.setenv(workers.WORKERS_VARIABLE, "2")


def _pid() -> int:
    return os.getpid()


@pytest.mark.skipif(not LINUX, reason="pieces run in forked children on Linux only")
def test_pieces_run_in_children_and_come_back_in_order() -> None:
    results = workers.run_each([lambda i=i: (i, os.getpid()) for i in range(5)], workers=2)
    assert [r[0] for r in results] == list(range(5))
    assert all(pid != os.getpid() for _, pid in results)
    assert len({pid for _, pid in results}) == 5  # a child per piece, two at a time


@pytest.mark.skipif(not LINUX, reason="pieces run in forked children on Linux only")
def test_started_pieces_are_shared_by_children_forked_at_once() -> None:
    pending = workers.start_each([lambda i=i: (i, os.getpid()) for i in range(5)], workers=2)
    results = pending.results()
    assert [r[0] for r in results] == list(range(5))
    pids = [pid for _, pid in results]
    assert len(set(pids)) == 2 and os.getpid() not in pids  # pieces 0, 2, 4 and 1, 3
    assert pids[0] == pids[2] == pids[4] != pids[1] == pids[3]


def test_one_worker_runs_every_piece_here() -> None:
    results = workers.run_each([_pid, _pid], workers=1)
    assert results == [os.getpid(), os.getpid()]


def _constant_fields(points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    return np.ones((len(points), 3), complex), np.ones((len(points), 3), complex)


def _memo_piece(model: object, points: np.ndarray, counter: str):  # noqa: ANN202
    """A piece that asks the active memo for ``points``; it returns the change of ``counter``."""

    def piece() -> int:
        m = memo.active_memo()
        before = getattr(m, counter)
        m.fields(model, 1.0, points, _constant_fields)
        return getattr(m, counter) - before

    return piece


@pytest.mark.parametrize("n", [1, 2])
def test_each_piece_starts_from_the_same_kept_evaluations(n: int) -> None:
    """A piece never sees what another kept (memo.isolated / a child of its own)."""
    model, pts = object(), np.array([[1.0, 2.0, 3.0]])
    piece = _memo_piece(model, pts, "evaluated")
    with memo.shared_field_evaluations() as m:
        assert workers.run_each([piece, piece, piece], workers=n) == [1, 1, 1]
        assert m.evaluated == (3 if n == 1 else 0) and m.kept == 0
        m.fields(model, 1.0, pts, _constant_fields)  # kept before the pieces: all see it
        assert workers.run_each([piece, piece], workers=n) == [0, 0]


@pytest.mark.parametrize("n", [1, 2])
def test_started_pieces_do_not_see_what_is_kept_after_the_start(n: int) -> None:
    """start_each: the pieces see the state at the start, whatever this process does next."""
    model, pts = object(), np.array([[0.5, 0.25, 2.0]])
    piece = _memo_piece(model, pts, "looked_up")
    with memo.shared_field_evaluations() as m:
        pending = workers.start_each([piece, piece, piece], workers=n)
        m.fields(model, 1.0, pts, _constant_fields)  # kept after the start: no piece sees it
        assert pending.results() == [0, 0, 0]
        assert pending.results() == [0, 0, 0]  # asked again: the same list


@pytest.mark.skipif(not LINUX, reason="pieces run in forked children on Linux only")
def test_one_started_child_works_beside_this_process() -> None:
    """start_each with one worker forks it (this process goes on meanwhile)."""
    results = workers.start_each([_pid, _pid, _pid], workers=1).results()
    assert len(set(results)) == 1 and results[0] != os.getpid()


def test_a_single_worker_in_all_starts_nothing(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv(workers.WORKERS_VARIABLE, "1")
    assert workers.start_each([_pid, _pid], workers=1).results() == [os.getpid()] * 2


@pytest.mark.skipif(not LINUX, reason="pieces run in forked children on Linux only")
def test_cancelled_pieces_leave_no_child_behind() -> None:
    import time

    pending = workers.start_each([lambda: time.sleep(30), lambda: time.sleep(30)], workers=2)
    children = [pid for _, pid, _ in pending._children.values()]
    pending.cancel()
    for pid in children:
        with pytest.raises(ChildProcessError):
            os.waitpid(pid, os.WNOHANG)


@pytest.mark.skipif(not LINUX, reason="pieces run in forked children on Linux only")
def test_no_process_to_be_had_runs_the_pieces_here(monkeypatch: pytest.MonkeyPatch) -> None:
    def refuse() -> int:
        raise OSError(11, "Resource temporarily unavailable")

    monkeypatch.setattr(workers.os, "fork", refuse)
    assert workers.run_each([_pid, _pid], workers=2) == [os.getpid(), os.getpid()]


@pytest.mark.parametrize("n", [1, 2])
def test_a_failing_piece_raises_its_own_error(n: int) -> None:
    def bad() -> None:
        raise ValueError("piece 2 failed")

    with pytest.raises(ValueError, match="piece 2 failed"):
        workers.run_each([_pid, bad, _pid], workers=n)


@pytest.mark.skipif(not LINUX, reason="pieces run in forked children on Linux only")
def test_a_result_that_does_not_pickle_is_made_here() -> None:
    results = workers.run_each([lambda: lambda: 7, _pid], workers=2)
    assert results[0]() == 7 and results[1] != os.getpid()


@pytest.mark.parametrize("n", [1, 2])
def test_warnings_of_the_pieces_are_given_in_order(n: int) -> None:
    def warn(text: str) -> int:
        warnings.warn(text, UserWarning, stacklevel=1)
        return 1

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        workers.run_each([lambda: warn("first"), lambda: warn("second")], workers=n)
    assert [str(w.message) for w in caught] == ["first", "second"]


_SEEN = {"value": "at the fork"}


def _answer(request: object) -> tuple[object, int, str]:
    """A crew's handler: the request back, the process that answered, a module's state."""
    if request == "fail":
        raise ValueError("request 'fail' failed")
    if request == "warn":
        warnings.warn("a crew child's warning", UserWarning, stacklevel=1)
    if request == "unpicklable":
        return (lambda: 7, os.getpid(), _SEEN["value"])  # type: ignore[return-value]
    if request == "unreadable":  # pickles in the child, but cannot be read back here
        return (_TwoArguments("x", "y"), os.getpid(), _SEEN["value"])  # type: ignore[return-value]
    return request, os.getpid(), _SEEN["value"]


class _TwoArguments(Exception):  # noqa: N818 - a test value, not an error raised
    """An object whose pickle (its args, one) does not build it again (two needed)."""

    def __init__(self, first: str, second: str) -> None:
        super().__init__(first)
        self.second = second


def _gone(pid: int) -> bool:
    try:
        os.waitpid(pid, os.WNOHANG)
    except ChildProcessError:
        return True
    return False


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_a_crew_is_forked_once_and_answers_in_order(monkeypatch: pytest.MonkeyPatch) -> None:
    """The same children answer every round; they see this process's state at the fork."""
    with workers.Crew(_answer, 2) as crew:
        crew.start(["a", "b"])
        first = crew.results()
        monkeypatch.setitem(_SEEN, "value", "after the fork")
        crew.start(["c", "d"])
        second = crew.results()
        crew.start(["e"])  # fewer requests than children: the first child answers
        third = crew.results()
        children = [pid for pid, _, _ in crew._children]
    assert [r[0] for r in first + second + third] == ["a", "b", "c", "d", "e"]
    assert [r[1] for r in first] == [r[1] for r in second] == children
    assert third[0][1] == children[0] and os.getpid() not in children
    assert {r[2] for r in first + second + third} == {"at the fork"}
    assert all(_gone(pid) for pid in children)  # closed on leaving the block


def test_a_crew_without_children_answers_here() -> None:
    """Size 0 (one worker in all): every request is answered in this process."""
    crew = workers.Crew(_answer, 0)
    crew.start(["a", "b"])
    assert crew.results() == [("a", os.getpid(), "at the fork"), ("b", os.getpid(), "at the fork")]


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_a_failing_request_raises_its_own_error_and_the_crew_starts_afresh() -> None:
    with workers.Crew(_answer, 1) as crew:
        crew.start(["a"])
        (pid,) = {r[1] for r in crew.results()}
        crew.start(["fail"])
        with pytest.raises(ValueError, match="request 'fail' failed"):
            crew.results()  # answered here again, where it raises
        assert _gone(pid) and not crew._children
        crew.start(["b"])
        (answer,) = crew.results()
        assert answer[0] == "b" and answer[1] not in (pid, os.getpid())


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_a_crew_child_gone_or_an_answer_that_does_not_pickle_is_answered_here() -> None:
    with workers.Crew(_answer, 1) as crew:
        crew.start(["unpicklable"])
        (answer,) = crew.results()
        assert answer[0]() == 7 and answer[1] == os.getpid()
        crew.start(["a"])
        (pid,) = {r[1] for r in crew.results()}
        os.kill(pid, 9)  # not reaped here: the crew does, on renewing (no reused pid)
        crew.start(["b"])
        assert crew.results() == [("b", os.getpid(), "at the fork")]
        crew.start(["c"])  # a new child
        (answer,) = crew.results()
        assert answer[0] == "c" and answer[1] not in (pid, os.getpid())


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_an_answer_that_does_not_read_back_is_answered_here() -> None:
    with workers.Crew(_answer, 1) as crew:
        crew.start(["a"])
        (pid,) = {r[1] for r in crew.results()}
        crew.start(["unreadable"])
        (answer,) = crew.results()
        assert isinstance(answer[0], _TwoArguments) and answer[0].second == "y"
        assert answer[1] == os.getpid() and _gone(pid) and not crew._children


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_an_interrupted_child_is_replaced() -> None:
    """Ctrl-C reaches the whole process group: a child it stops is answered for here."""
    import signal

    with workers.Crew(_answer, 1) as crew:
        crew.start(["a"])
        (pid,) = {r[1] for r in crew.results()}
        os.kill(pid, signal.SIGINT)
        crew.start(["b"])
        assert crew.results() == [("b", os.getpid(), "at the fork")]
        crew.start(["c"])
        (answer,) = crew.results()
        assert answer[0] == "c" and answer[1] not in (pid, os.getpid())


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_an_interrupt_while_sending_closes_the_crew(monkeypatch: pytest.MonkeyPatch) -> None:
    """No child is left holding a request whose answer would pair with the next one."""
    crew = workers.Crew(_answer, 2)
    crew.start(["a", "b"])
    crew.results()
    children = [pid for pid, _, _ in crew._children]
    real_send = workers._send
    sent: list[object] = []

    def interrupted_second(fd: int, obj: object) -> None:
        if sent:
            raise KeyboardInterrupt
        sent.append(obj)
        real_send(fd, obj)

    monkeypatch.setattr(workers, "_send", interrupted_second)
    with pytest.raises(KeyboardInterrupt):
        crew.start(["old-0", "old-1"])
    assert all(_gone(pid) for pid in children) and not crew._children
    monkeypatch.setattr(workers, "_send", real_send)
    crew.start(["new-0", "new-1"])
    assert [r[0] for r in crew.results()] == ["new-0", "new-1"]
    crew.close()


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_a_crew_childs_warnings_are_given_here() -> None:
    with workers.Crew(_answer, 1) as crew, warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        crew.start(["warn"])
        (answer,) = crew.results()
    assert answer[1] != os.getpid()
    assert [str(w.message) for w in caught] == ["a crew child's warning"]


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_an_interrupt_while_waiting_stops_the_crew(monkeypatch: pytest.MonkeyPatch) -> None:
    crew = workers.Crew(_answer, 2)
    crew.start(["a", "b"])
    children = [pid for pid, _, _ in crew._children]

    def interrupted(fd: int) -> tuple[bool, object]:
        raise KeyboardInterrupt

    monkeypatch.setattr(workers, "_receive", interrupted)
    with pytest.raises(KeyboardInterrupt):
        crew.results()
    assert all(_gone(pid) for pid in children) and not crew._children


@pytest.mark.skipif(not LINUX, reason="a crew's children are forked on Linux only")
def test_a_keepout_search_forks_its_workers_once(monkeypatch: pytest.MonkeyPatch) -> None:
    """Every shared batch of a search (first pass and refinements) goes to one crew."""
    from keepclear.fields.keepout import keepout_distances

    real_fork = os.fork
    forks: list[int] = []

    def counting_fork() -> int:
        forks.append(1)
        return real_fork()

    batches: list[int] = []
    real_start = workers.Crew.start

    def counting_start(self, requests):  # noqa: ANN001, ANN202
        batches.append(len(requests))
        return real_start(self, requests)

    monkeypatch.setattr(workers.os, "fork", counting_fork)
    monkeypatch.setattr(workers.Crew, "start", counting_start)
    keepout_distances(load_scenario(ROOT / "scenarios" / "plasma-bench.toml"))
    assert len(batches) >= 2 and len(forks) == 1


def test_a_child_starts_no_children_of_its_own() -> None:
    assert workers.worker_count() == 2  # the autouse fixture's
    assert workers.run_each([workers.worker_count, workers.worker_count], workers=2) == [1, 1]


def test_worker_count_from_the_environment(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv(workers.WORKERS_VARIABLE, "3")
    assert workers.worker_count() == (3 if LINUX else 1)
    monkeypatch.setenv(workers.WORKERS_VARIABLE, "two")
    if LINUX:
        with pytest.warns(RuntimeWarning, match="KEEPCLEAR_WORKERS='two' ignored"):
            assert workers.worker_count() >= 1


def test_options_compared_in_workers_match_one_process(monkeypatch: pytest.MonkeyPatch) -> None:
    """The bundled test-cell options, in two workers and in one: the same answers."""
    scenario = load_scenario(ROOT / "scenarios" / "test-cell-options.toml")
    answers = []
    real_fork = os.fork
    forks: dict[str, int] = {"1": 0, "2": 0}
    for n in ("1", "2"):
        monkeypatch.setenv(workers.WORKERS_VARIABLE, n)

        def counting_fork(n: str = n) -> int:
            forks[n] += 1
            return real_fork()

        monkeypatch.setattr(workers.os, "fork", counting_fork)
        c = compare_options(scenario, pixels=61)
        monkeypatch.setattr(workers.os, "fork", real_fork)
        answers.append(
            (
                [v.name for v in c.variants],
                np.array([[k.distance_m for k in v.keepouts] for v in c.variants]),
                np.stack([v.horizontal.result.power_density_w_m2 for v in c.variants]),
                [v.places for v in c.variants],
            )
        )
    # one worker forks nothing; two really ran the variants in children
    assert forks["1"] == 0 and forks["2"] > 0, forks
    (names1, keep1, maps1, places1), (names2, keep2, maps2, places2) = answers
    assert names1 == names2
    np.testing.assert_allclose(keep2, keep1, rtol=1e-12)
    np.testing.assert_allclose(maps2, maps1, rtol=1e-12)
    for a, b in zip(places1, places2, strict=True):
        assert [p["name"] for p in a] == [p["name"] for p in b]
        np.testing.assert_allclose(
            [p["power_density_w_m2"] for p in b], [p["power_density_w_m2"] for p in a], rtol=1e-12
        )


@pytest.mark.skipif(not LINUX, reason="pieces run in forked children on Linux only")
@pytest.mark.parametrize("name", ["plasma-bench", "drying-line-enclosure"])
def test_keepout_rays_shared_between_workers_give_the_same_answers(
    name: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    """A keep-out search whose ray batches are shared between two workers answers as one.

    The distances, their margins, the directions and (with an enclosure) the clearance
    from the box are compared; the shares must really have run (with two workers, one
    share in a child beside the one searched here).
    """
    from keepclear.fields import keepout

    shared: list[int] = []
    real = workers.Crew.start

    def counting(self, requests):  # noqa: ANN001, ANN202
        shared.append(len(requests))
        return real(self, requests)

    monkeypatch.setattr(workers.Crew, "start", counting)
    real_fork = os.fork
    forks: list[int] = []

    def counting_fork() -> int:
        forks.append(1)
        return real_fork()

    monkeypatch.setattr(workers.os, "fork", counting_fork)
    answers = []
    for n in ("1", "2"):
        monkeypatch.setenv(workers.WORKERS_VARIABLE, n)
        found = keepout.keepout_distances(load_scenario(ROOT / "scenarios" / f"{name}.toml"))
        answers.append(
            [
                (
                    r.distance_m,
                    r.distance_with_uncertainty_m,
                    r.direction,
                    None if r.outside_enclosure is None else r.outside_enclosure["distance_m"],
                    None
                    if r.outside_enclosure is None
                    else r.outside_enclosure["clearance_from_enclosure_m"],
                )
                for r in found
            ]
        )
    assert shared and set(shared) == {1}
    assert forks == [1]  # one worker forked for the two-worker search, none for one
    for one, two in zip(*answers, strict=True):
        assert one[0] == pytest.approx(two[0], rel=1e-12)
        assert one[1] == pytest.approx(two[1], rel=1e-12)
        if one[2] is None:
            assert two[2] is None
        else:
            np.testing.assert_allclose(two[2], one[2], rtol=1e-12, atol=1e-15)
        if one[3] is not None:
            assert two[3] == pytest.approx(one[3], rel=1e-12)
            assert two[4] == pytest.approx(one[4], rel=1e-12, abs=1e-15)


@pytest.mark.skipif(not LINUX, reason="pieces run in forked children on Linux only")
def test_tables_the_workers_built_are_built_here_too() -> None:
    """The near-metal tables a worker builds on first use are built in this process too.

    The desk box's guide needs its near tables (the search samples close to it); after a
    search shared with workers, this process has them, so the workers of a later search
    (forked from here) inherit them instead of building them again.
    """
    from keepclear.fields.keepout import keepout_distances

    scenario = load_scenario(ROOT / "scenarios" / "desk-box-source.toml")
    radiator = scenario.sources[0].radiator
    radiator._solved.__dict__.pop("near", None)  # as a freshly solved model has it
    assert radiator.built_on_demand() == frozenset()
    keepout_distances(scenario)
    assert len(radiator.built_on_demand()) >= 1
