"""Tests of the execution seam: inline and worker-process backends."""

from __future__ import annotations

import gc
import multiprocessing
import os
import signal
import subprocess
import sys
import textwrap
import time
import types
from collections.abc import Iterator
from pathlib import Path

import pytest
import run_helpers as helpers

from forecastaudit.errors import ForecastAuditError
from forecastaudit.run import (
    Backend,
    ExecutionError,
    InlineBackend,
    Outcome,
    ProcessBackend,
    default_workers,
    make_backend,
)


@pytest.fixture(scope="module")
def backend() -> Iterator[ProcessBackend]:
    """Two workers shared by the tests of this module, so they also test reuse."""
    with ProcessBackend(2, preload=("numpy",)) as shared:
        yield shared


def _gone(pid: int, within: float = 5.0) -> bool:
    """Whether process ``pid`` has exited (and been reaped) within ``within`` seconds."""
    end = time.monotonic() + within
    while time.monotonic() < end:
        if not Path(f"/proc/{pid}").exists():
            return True
        try:
            state = Path(f"/proc/{pid}/stat").read_text().split(") ")[-1].split()[0]
        except OSError:
            return True
        if state in {"Z", "X"}:  # exited; waiting to be reaped by the fork server
            return True
        time.sleep(0.05)
    return False


# -- results --------------------------------------------------------------------------------


def test_map_returns_outcomes_in_input_order(backend: ProcessBackend) -> None:
    # Later items finish first: item 5 sleeps 0.5 s, item 0 not at all.
    items = [5, 4, 3, 0, 1, 2]
    outcomes = backend.map(helpers.sleep_then_square, items, labels=[f"x{i}" for i in items])
    assert [outcome.value for outcome in outcomes] == [x * x for x in items]
    assert [outcome.label for outcome in outcomes] == [f"x{i}" for i in items]
    assert all(outcome.ok and outcome.status == "ok" for outcome in outcomes)
    assert all(outcome.seconds >= 0 for outcome in outcomes)


def test_stream_yields_every_index_once(backend: ProcessBackend) -> None:
    items = list(range(7))
    seen = dict(backend.stream(helpers.square, items))
    assert sorted(seen) == items
    assert {index: outcome.value for index, outcome in seen.items()} == {x: x * x for x in items}
    assert [outcome.label for _, outcome in sorted(seen.items())] == [str(x) for x in items]


def test_empty_batch(backend: ProcessBackend) -> None:
    assert backend.map(helpers.square, []) == []
    assert InlineBackend().map(helpers.square, []) == []


def test_workers_are_reused_between_batches(backend: ProcessBackend) -> None:
    first = {outcome.value for outcome in backend.map(helpers.process_id, range(6))}
    second = {outcome.value for outcome in backend.map(helpers.process_id, range(6))}
    assert os.getpid() not in first
    assert first == second
    assert len(first) <= backend.workers


def test_inline_gives_the_same_values_as_processes(backend: ProcessBackend) -> None:
    items = [3, -1, 2.5, 0, -7]
    here = InlineBackend().map(helpers.square_or_raise, items)
    there = backend.map(helpers.square_or_raise, items)
    assert [o.status for o in here] == [o.status for o in there]
    assert [o.value for o in here] == [o.value for o in there]
    assert [o.error for o in here] == [o.error for o in there]


# -- failures of one item -------------------------------------------------------------------


def test_hanging_item_times_out_and_the_rest_go_on(backend: ProcessBackend) -> None:
    start = time.monotonic()
    outcomes = backend.map(helpers.square_or_hang, [1, "hang", 2, 3], time_limit=1)
    elapsed = time.monotonic() - start
    assert [o.status for o in outcomes] == ["ok", "timed-out", "ok", "ok"]
    assert [o.value for o in outcomes] == [1, None, 4, 9]
    assert "no result within 1 s" in outcomes[1].error
    assert "stopped" in outcomes[1].error
    assert elapsed < 20  # far below the 60 s the item would have slept
    # The stopped worker was replaced: the backend still runs on all its workers.
    assert [o.value for o in backend.map(helpers.square, [4, 5])] == [16, 25]


def test_dead_worker_is_reported_and_replaced(backend: ProcessBackend) -> None:
    outcomes = backend.map(helpers.square_or_exit, [1, "exit", 2, 3])
    assert [o.status for o in outcomes] == ["ok", "crashed", "ok", "ok"]
    assert [o.value for o in outcomes] == [1, None, 4, 9]
    assert "exit code 3" in outcomes[1].error
    assert "died" in outcomes[1].error
    again = backend.map(helpers.square, range(4))
    assert [o.value for o in again] == [0, 1, 4, 9]
    killed = backend.map(helpers.square_or_kill, ["kill", 5])
    assert [o.status for o in killed] == ["crashed", "ok"]
    assert "exit code -9, SIGKILL" in killed[0].error


def test_spawn_start_method_works_too() -> None:
    with ProcessBackend(1, start_method="spawn") as spawned:
        assert spawned.start_method == "spawn"
        outcomes = spawned.map(helpers.square_or_hang, [2, "hang", 3], time_limit=1)
        assert [o.status for o in outcomes] == ["ok", "timed-out", "ok"]
        assert [o.value for o in outcomes] == [4, None, 9]
        assert spawned.map(helpers.thread_variables, [0])[0].value == dict.fromkeys(
            helpers.thread_variables(0), "1"
        )


def test_exception_gives_failed_with_type_and_trace(backend: ProcessBackend) -> None:
    outcomes = backend.map(helpers.square_or_raise, [2, -3])
    assert outcomes[0].ok and outcomes[0].value == 4
    failed = outcomes[1]
    assert failed.status == "failed" and not failed.ok and failed.value is None
    assert failed.error == "ValueError: negative input -3"
    assert "square_or_raise" in failed.trace
    assert "ValueError" in failed.trace


def test_unpicklable_return_value_fails_that_item(backend: ProcessBackend) -> None:
    outcomes = backend.map(helpers.return_lock, [1])
    assert outcomes[0].status == "failed"
    assert "return value could not be sent back" in outcomes[0].error
    assert [o.value for o in backend.map(helpers.square, [3])] == [9]


def test_unpicklable_item_or_function_fails_without_breaking_the_pool(
    backend: ProcessBackend,
) -> None:
    outcomes = backend.map(helpers.square, [2, lambda: 0, 3])
    assert [o.status for o in outcomes] == ["ok", "failed", "ok"]
    assert "item could not be sent" in outcomes[1].error
    local = backend.map(lambda x: x, [1, 2])
    assert [o.status for o in local] == ["failed", "failed"]
    assert "function could not be sent" in local[0].error
    assert [o.value for o in backend.map(helpers.square, [5])] == [25]


def test_function_missing_in_the_workers_fails_each_item(
    backend: ProcessBackend, monkeypatch: pytest.MonkeyPatch
) -> None:
    # A module that exists only in this process's memory pickles by name here but
    # cannot be imported by a worker.
    module = types.ModuleType("run_memory_only")
    exec("def double(x):\n    return 2 * x\n", module.__dict__)
    monkeypatch.setitem(sys.modules, "run_memory_only", module)
    outcomes = backend.map(module.double, [1, 2, 3])
    assert [o.status for o in outcomes] == ["failed"] * 3
    assert "could not be loaded in the worker process" in outcomes[0].error
    assert "ModuleNotFoundError" in outcomes[0].error
    assert [o.value for o in backend.map(helpers.square, [2])] == [4]


def test_abandoned_stream_stops_its_items_and_the_backend_goes_on(
    backend: ProcessBackend,
) -> None:
    stream = backend.stream(helpers.square_or_hang, [1, "hang", "hang"])
    first_index, first = next(stream)
    assert first_index == 0 and first.value == 1
    start = time.monotonic()
    stream.close()
    assert time.monotonic() - start < 20
    assert [o.value for o in backend.map(helpers.square, [6, 7])] == [36, 49]


def test_one_batch_at_a_time(backend: ProcessBackend) -> None:
    stream = backend.stream(helpers.square, [1, 2])
    next(stream)
    with pytest.raises(ExecutionError, match="already running"):
        backend.stream(helpers.square, [3])
    stream.close()
    assert [o.value for o in backend.map(helpers.square, [3])] == [9]


# -- worker environment -----------------------------------------------------------------------


def test_workers_use_one_blas_thread(backend: ProcessBackend) -> None:
    pytest.importorskip("threadpoolctl")
    pools = backend.map(helpers.blas_threads, range(2))
    assert all(o.ok for o in pools), [o.error for o in pools]
    if not any(o.value for o in pools):
        pytest.skip("threadpoolctl finds no BLAS library")
    assert all(threads == 1 for o in pools for _, threads in o.value)
    variables = backend.map(helpers.thread_variables, [0])[0].value
    assert variables == dict.fromkeys(variables, "1")


def test_parent_environment_is_left_as_it_was() -> None:
    before = {name: os.environ.get(name) for name in helpers.thread_variables(0)}
    with ProcessBackend(1) as one:
        assert one.map(helpers.square, [2])[0].value == 4
    assert {name: os.environ.get(name) for name in before} == before


def test_inline_limits_blas_while_running() -> None:
    pytest.importorskip("threadpoolctl")
    pools = InlineBackend().map(helpers.blas_threads, [0])[0].value
    if not pools:
        pytest.skip("threadpoolctl finds no BLAS library")
    assert all(threads == 1 for _, threads in pools)


def test_workers_see_the_parents_import_path(
    backend: ProcessBackend, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # The workers are already running; a directory added to sys.path now must reach them.
    assert backend.pids
    (tmp_path / "run_late_module.py").write_text("def triple(x):\n    return 3 * x\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    import run_late_module  # type: ignore[import-not-found]

    outcomes = backend.map(run_late_module.triple, [1, 2])
    assert [o.value for o in outcomes] == [3, 6]
    assert str(tmp_path) in backend.map(helpers.search_path, [0])[0].value


# -- lifetime ---------------------------------------------------------------------------------


def test_close_leaves_no_worker_processes() -> None:
    before = set(multiprocessing.active_children())
    pool = ProcessBackend(2)
    assert pool.pids == []  # started lazily
    pool.map(helpers.square, range(4))
    pids = pool.pids
    assert len(pids) == 2
    pool.close()
    pool.close()  # twice is fine
    assert pool.pids == []
    assert set(multiprocessing.active_children()) <= before
    assert all(_gone(pid) for pid in pids)
    # Usable again after closing: new workers start.
    assert [o.value for o in pool.map(helpers.square, [2])] == [4]
    pids = pool.pids
    pool.close()
    assert all(_gone(pid) for pid in pids)


def test_garbage_collected_backend_stops_its_workers() -> None:
    pool = ProcessBackend(1)
    pool.map(helpers.square, [1])
    pids = pool.pids
    del pool
    gc.collect()
    assert pids and all(_gone(pid) for pid in pids)


def test_no_workers_outlive_the_interpreter(tmp_path: Path) -> None:
    script = tmp_path / "leave_open.py"
    script.write_text(
        textwrap.dedent(
            f"""
            import sys
            sys.path.insert(0, {str(Path(helpers.__file__).parent)!r})
            import run_helpers
            from forecastaudit.run import ProcessBackend

            if __name__ == "__main__":
                pool = ProcessBackend(2)
                pool.map(run_helpers.square, range(4))
                print(" ".join(map(str, pool.pids)))
                # exits without closing the backend
            """
        )
    )
    done = subprocess.run(
        [sys.executable, str(script)], capture_output=True, text=True, timeout=60, check=True
    )
    pids = [int(pid) for pid in done.stdout.split()]
    assert len(pids) == 2
    assert all(_gone(pid) for pid in pids)


def test_keyboard_interrupt_stops_the_workers_and_propagates() -> None:
    pool = ProcessBackend(2)
    pool.map(helpers.square, [1, 2])

    def interrupt(signum: int, frame: object) -> None:
        raise KeyboardInterrupt

    previous = signal.signal(signal.SIGALRM, interrupt)
    try:
        signal.setitimer(signal.ITIMER_REAL, 0.5)
        start = time.monotonic()
        with pytest.raises(KeyboardInterrupt):
            pool.map(helpers.square_or_hang, ["hang", "hang"])
        assert time.monotonic() - start < 20
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
    assert pool.pids == []
    pool.close()


# -- inline backend ---------------------------------------------------------------------------


def test_inline_backend_reports_failures_and_ignores_time_limit() -> None:
    inline = InlineBackend()
    assert inline.name == "inline" and inline.workers == 1
    assert inline.enforces_time_limit is False
    outcomes = inline.map(helpers.square_or_raise, [2, -1], time_limit=5)
    assert [o.status for o in outcomes] == ["ok", "failed"]
    assert outcomes[1].error == "ValueError: negative input -1"
    assert "square_or_raise" in outcomes[1].trace
    assert [index for index, _ in inline.stream(helpers.square, [1, 2, 3])] == [0, 1, 2]


def test_progress_bar_is_shown_when_asked(
    backend: ProcessBackend, capsys: pytest.CaptureFixture[str]
) -> None:
    outcomes = backend.map(helpers.square, range(3), progress="squaring")
    assert [o.value for o in outcomes] == [0, 1, 4]
    assert "squaring" in capsys.readouterr().err
    InlineBackend().map(helpers.square, range(3), progress=True)
    assert "3/3" in capsys.readouterr().err
    backend.map(helpers.square, range(3), progress=None)
    assert capsys.readouterr().err == ""


# -- arguments --------------------------------------------------------------------------------


def test_make_backend_choices() -> None:
    assert isinstance(make_backend(), InlineBackend)
    assert isinstance(make_backend(None), InlineBackend)
    assert isinstance(make_backend(1), InlineBackend)
    pool = make_backend(2)
    try:
        assert isinstance(pool, ProcessBackend)
        assert pool.workers == 2 and pool.name == "processes" and pool.enforces_time_limit
        assert make_backend(pool) is pool
    finally:
        pool.close()
    inline = InlineBackend()
    assert make_backend(inline) is inline
    assert isinstance(inline, Backend)


@pytest.mark.parametrize("bad", [0, -2, True, False, 1.5, 2.0, "2", [2]])
def test_make_backend_rejects_bad_workers(bad: object) -> None:
    with pytest.raises(ExecutionError, match="workers must be a whole number >= 1") as caught:
        make_backend(bad)  # type: ignore[arg-type]
    assert f"got {bad!r}" in str(caught.value)
    assert isinstance(caught.value, ForecastAuditError)


def test_batch_arguments_are_checked_up_front(backend: ProcessBackend) -> None:
    with pytest.raises(ExecutionError, match="one entry per item"):
        backend.stream(helpers.square, [1, 2], labels=["a"])
    with pytest.raises(ExecutionError, match="time_limit"):
        backend.map(helpers.square, [1], time_limit=0)
    with pytest.raises(ExecutionError, match="time_limit"):
        InlineBackend().map(helpers.square, [1], time_limit="1")  # type: ignore[arg-type]
    with pytest.raises(ExecutionError, match="callable"):
        backend.map(3, [1])  # type: ignore[arg-type]
    with pytest.raises(ExecutionError, match="workers"):
        ProcessBackend(0)
    with pytest.raises(ExecutionError, match="start_method"):
        ProcessBackend(2, start_method="teleport")


def test_default_workers_counts_usable_cores() -> None:
    count = default_workers()
    assert isinstance(count, int) and count >= 1
    if hasattr(os, "sched_getaffinity"):
        assert count == len(os.sched_getaffinity(0))


def test_outcome_ok_property() -> None:
    assert Outcome("a", "ok", 1).ok
    assert not Outcome("a", "failed", error="ValueError: x").ok
    assert not Outcome("a", "timed-out").ok
    assert not Outcome("a", "crashed").ok


def test_import_is_cheap() -> None:
    code = (
        "import sys, forecastaudit.run; "
        "heavy = {'pandas', 'scipy', 'statsmodels', 'numpy', 'tqdm', 'threadpoolctl'}; "
        "print(sorted(heavy & set(sys.modules)))"
    )
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=60, check=True
    )
    assert done.stdout.strip() == "[]"
