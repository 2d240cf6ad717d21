"""The execution seam: run one function over many items, inline or in worker processes.

Everything else in the package that runs many independent pieces of work (one estimator on
one series, one origin of a rolling holdout, one series of a panel) hands a plain function
and a list of items to a :class:`Backend` and gets back one :class:`Outcome` per item. An
outcome is always there, whatever happened to the item: it finished (``"ok"``), raised
(``"failed"``), ran past its time limit (``"timed-out"``) or took its worker process down with
it (``"crashed"``). One bad item never stops the others.

Three backends are provided:

* :class:`InlineBackend` runs the items one at a time in this process. It is the default,
  the easiest to debug, and it cannot stop a function that hangs.
* :class:`ProcessBackend` keeps a few local worker processes alive for its whole lifetime
  and sends each of them one item at a time. It enforces per-item time limits by stopping
  the worker and starting a fresh one, and it survives workers that die.
* :class:`DaskBackend` sends the items to the workers of a Dask distributed cluster (a
  ``LocalCluster`` or a cluster of many machines), one item per worker thread at a time.
  It enforces time limits by restarting the worker that runs an item past its limit, and
  reports an item whose workers died as ``"crashed"``.

Both limit the BLAS and OpenMP thread pools to one thread while a function runs, so that
several workers do not oversubscribe the cores and so that results do not depend on how
many threads a linear-algebra library happened to use.

This module imports nothing heavy: ``tqdm`` and ``threadpoolctl`` are imported only when
they are needed, and it imports nothing from the package except :mod:`forecastaudit.errors`.

Examples
--------
>>> from forecastaudit.run import make_backend
>>> with make_backend(None) as backend:
...     outcomes = backend.map(abs, [-1, 2, -3])
>>> [outcome.value for outcome in outcomes]
[1, 2, 3]
"""

from __future__ import annotations

import contextlib
import importlib
import itertools
import math
import multiprocessing
import os
import pickle
import signal
import sys
import time
import traceback
import weakref
from abc import ABC, abstractmethod
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass
from multiprocessing.connection import wait as wait_for_any
from typing import Any, Literal

from forecastaudit.errors import ForecastAuditError

__all__ = [
    "Backend",
    "DaskBackend",
    "ExecutionError",
    "InlineBackend",
    "Outcome",
    "ProcessBackend",
    "Status",
    "default_workers",
    "make_backend",
]

#: What happened to one item.
Status = Literal["ok", "failed", "timed-out", "crashed"]

#: Environment variables that cap the thread pools of BLAS and OpenMP libraries when the
#: library is loaded; set to ``"1"`` in every worker before user code runs.
THREAD_VARIABLES: tuple[str, ...] = (
    "OMP_NUM_THREADS",
    "OPENBLAS_NUM_THREADS",
    "MKL_NUM_THREADS",
)

#: How many innermost frames of a traceback an outcome keeps, and at most how many characters.
_TRACE_FRAMES = 8
_TRACE_CHARS = 4000

#: Seconds a new worker process has to report that it is ready before it counts as failed.
_STARTUP_SECONDS = 120.0

#: A worker that fails to start this many times in a row means workers cannot start at all.
_STARTUP_ATTEMPTS = 3

#: Seconds given to a worker to exit after being asked (or terminated) before the next step.
_STOP_SECONDS = 2.0


class ExecutionError(ForecastAuditError, ValueError):
    """An execution backend was misconfigured or its worker processes could not start."""


@dataclass
class Outcome:
    """What happened when one item was run.

    Attributes
    ----------
    label : str
        The item's label (its position in the input unless labels were given).
    status : {"ok", "failed", "timed-out", "crashed"}
        ``"ok"``: the function returned; ``"failed"``: it raised, or its function, item or
        return value could not be moved between processes; ``"timed-out"``: it ran past the
        time limit and its worker was stopped; ``"crashed"``: its worker process died.
    value : object
        The function's return value when ``status`` is ``"ok"``, else ``None``.
    error : str
        Empty when ok. ``"TypeError: message"`` when the function raised; a description in
        plain words otherwise.
    trace : str
        The innermost frames of the traceback when the function raised, else empty.
    seconds : float
        Wall time from handing the item to a worker (or starting it inline) to its outcome.
    """

    label: str
    status: Status
    value: Any = None
    error: str = ""
    trace: str = ""
    seconds: float = 0.0

    @property
    def ok(self) -> bool:
        """Whether the function returned normally."""
        return self.status == "ok"


class Backend(ABC):
    """Runs one function over many items and reports one :class:`Outcome` per item.

    Subclasses implement :meth:`stream` and :meth:`close`; :meth:`map` collects the stream
    in input order. A backend is a context manager that closes itself on exit. Backends are
    not thread-safe and do not run two batches at once.

    Attributes
    ----------
    workers : int
        How many items can run at the same time.
    name : str
        A short name of the kind of backend (``"inline"``, ``"processes"``).
    enforces_time_limit : bool
        Whether ``time_limit`` is honoured. When it is not, it is ignored.
    """

    workers: int = 1
    name: str = "backend"
    enforces_time_limit: bool = False

    def map(
        self,
        func: Callable[[Any], Any],
        items: Iterable[Any],
        *,
        labels: Sequence[str] | None = None,
        time_limit: float | None = None,
        progress: str | bool | None = None,
    ) -> list[Outcome]:
        """Run ``func`` on every item and return the outcomes in input order.

        Parameters
        ----------
        func : callable
            Called as ``func(item)``. For :class:`ProcessBackend` it must be picklable: a
            function defined at module level in an importable module.
        items : iterable
            The items; read once, up front.
        labels : sequence of str, optional
            One label per item, copied into the outcomes. Defaults to the item positions.
        time_limit : float, optional
            Seconds one item may run before it is stopped and reported ``"timed-out"``.
            Ignored by backends whose ``enforces_time_limit`` is False.
        progress : str or bool, optional
            A description (or True) to show a progress bar; None or False for none.

        Returns
        -------
        list of Outcome
            ``outcomes[i]`` belongs to ``items[i]``.
        """
        items = list(items)
        outcomes: list[Outcome | None] = [None] * len(items)
        for index, outcome in self.stream(
            func, items, labels=labels, time_limit=time_limit, progress=progress
        ):
            outcomes[index] = outcome
        missing = [index for index, outcome in enumerate(outcomes) if outcome is None]
        if missing:
            raise ExecutionError(
                f"{type(self).__name__} gave no outcome for items {missing}; this is a bug "
                "in the backend."
            )
        return [outcome for outcome in outcomes if outcome is not None]

    @abstractmethod
    def stream(
        self,
        func: Callable[[Any], Any],
        items: Iterable[Any],
        *,
        labels: Sequence[str] | None = None,
        time_limit: float | None = None,
        progress: str | bool | None = None,
    ) -> Iterator[tuple[int, Outcome]]:
        """Run ``func`` on every item and yield ``(index, outcome)`` as each one finishes.

        Parameters are those of :meth:`map`. Arguments are checked when this is called,
        not when the iterator is first advanced. Every index is yielded exactly once if the
        iterator is consumed to the end; stopping early abandons the items still running.

        Yields
        ------
        index : int
            Position of the item in ``items``.
        outcome : Outcome
            What happened to it.
        """

    @abstractmethod
    def close(self) -> None:
        """Release the backend's resources (worker processes). Safe to call twice."""

    def __enter__(self) -> Backend:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"{type(self).__name__}(workers={self.workers})"


class InlineBackend(Backend):
    """Run items one at a time in this process.

    Each call runs with the BLAS and OpenMP thread pools limited to one thread (through
    ``threadpoolctl`` when it is installed), as in a worker process. An exception raised by
    the function becomes a ``"failed"`` outcome; ``KeyboardInterrupt`` and ``SystemExit``
    are not caught.

    A function cannot be stopped from inside the process that runs it, so ``time_limit`` is
    ignored: ``enforces_time_limit`` is False, an item that hangs hangs the caller, and
    outcomes never say ``"timed-out"`` or ``"crashed"``. Use :class:`ProcessBackend` when
    time limits matter.
    """

    name = "inline"
    enforces_time_limit = False

    def __init__(self) -> None:
        self.workers = 1

    def stream(
        self,
        func: Callable[[Any], Any],
        items: Iterable[Any],
        *,
        labels: Sequence[str] | None = None,
        time_limit: float | None = None,
        progress: str | bool | None = None,
    ) -> Iterator[tuple[int, Outcome]]:
        """Run ``func`` on every item, in order, yielding ``(index, outcome)`` after each.

        See :meth:`Backend.stream`; ``time_limit`` is checked but not enforced.
        """
        items, names = _check_batch(func, items, labels, time_limit, progress)
        return self._stream(func, items, names, progress)

    def _stream(
        self,
        func: Callable[[Any], Any],
        items: list[Any],
        names: list[str],
        progress: str | bool | None,
    ) -> Iterator[tuple[int, Outcome]]:
        bar = _progress_bar(progress, len(items))
        try:
            for index, item in enumerate(items):
                start = time.perf_counter()
                with _one_thread_pool():
                    try:
                        value = func(item)
                    except Exception as exc:
                        outcome = Outcome(
                            names[index],
                            "failed",
                            error=_describe(exc),
                            trace=_short_trace(exc),
                            seconds=time.perf_counter() - start,
                        )
                    else:
                        outcome = Outcome(
                            names[index], "ok", value, seconds=time.perf_counter() - start
                        )
                if bar is not None:
                    bar.update(1)
                yield index, outcome
        finally:
            if bar is not None:
                bar.close()

    def close(self) -> None:
        """Nothing to release."""


class ProcessBackend(Backend):
    """Run items in persistent local worker processes, one item per worker at a time.

    Workers are started on first use (only as many as there are items waiting) and kept
    until :meth:`close`, the end of the ``with`` block, garbage collection of the backend or
    interpreter exit, so several batches reuse them. Each worker has its own pipe; the
    parent hands the next item to whichever worker is free.

    * An item that runs past ``time_limit`` seconds gets ``"timed-out"``: its worker is
      terminated (killed if it does not stop) and a fresh one takes its place.
    * An item whose worker dies (``os._exit``, a segfault, the out-of-memory killer) gets
      ``"crashed"`` with the exit code, and the worker is replaced.
    * An exception in the function, or a function, item or return value that cannot be
      pickled, gives ``"failed"`` for that item only.
    * ``KeyboardInterrupt`` in the parent terminates every worker and is re-raised.

    Every worker mirrors the parent's ``sys.path`` and working directory (sent with the
    first item of each batch), so a function importable in the parent is importable in the
    workers. Every worker sets ``OMP_NUM_THREADS``, ``OPENBLAS_NUM_THREADS`` and
    ``MKL_NUM_THREADS`` to 1 before it runs anything, and limits the BLAS and OpenMP
    libraries it has loaded to one thread with ``threadpoolctl`` for its whole life. Workers
    ignore SIGINT (the parent handles Ctrl-C) and are daemonic, so they cannot start
    ``multiprocessing`` children of their own; libraries that would (joblib, for instance)
    run serially instead.

    Parameters
    ----------
    workers : int
        Number of worker processes, at least 1.
    start_method : str, default "forkserver"
        The ``multiprocessing`` start method. ``"forkserver"`` falls back to ``"spawn"``
        where it does not exist. ``"fork"`` is allowed but copies the parent's whole state
        into every worker.
    preload : sequence of str, optional
        Modules (``"numpy"``, ``"statsmodels.api"``) the fork server imports once, so that
        workers start with them loaded. Used only with ``"forkserver"``, and only if the
        fork server, which is shared by the whole interpreter, is not running yet. Modules
        that fail to import are skipped.

    Raises
    ------
    ExecutionError
        If ``workers`` is not a whole number >= 1 or ``start_method`` is not available.

    Notes
    -----
    The thread variables are set to 1 in this process's environment for the moment a
    worker is started, and restored right after, so that a fork server started at that
    moment (and every process it forks later) has them from the start.
    """

    name = "processes"
    enforces_time_limit = True

    def __init__(
        self,
        workers: int,
        *,
        start_method: str = "forkserver",
        preload: Sequence[str] = (),
    ) -> None:
        if not _is_whole_number(workers) or workers < 1:
            raise ExecutionError(
                f"workers must be a whole number >= 1; got {workers!r}. Pass the number of "
                "worker processes, for example ProcessBackend(4)."
            )
        methods = multiprocessing.get_all_start_methods()
        if start_method == "forkserver" and start_method not in methods:
            start_method = "spawn"
        if start_method not in methods:
            raise ExecutionError(
                f"start_method {start_method!r} is not available here; use one of "
                f"{', '.join(repr(method) for method in methods)}."
            )
        if isinstance(preload, str):
            preload = (preload,)
        self.workers = int(workers)
        self.start_method = start_method
        self.preload: tuple[str, ...] = tuple(preload)
        self._context = multiprocessing.get_context(start_method)
        self._slots: list[_Worker | None] = [None] * self.workers
        self._running = False
        self._batches = itertools.count(1)
        self._startup_failures = 0  # workers in a row that died or hung before ready
        # The finalizer holds the slot list, not the backend, so that it can stop the
        # workers after the backend is garbage collected, and at interpreter exit.
        self._finalizer = weakref.finalize(self, _stop_all, self._slots)

    def __repr__(self) -> str:
        return f"ProcessBackend(workers={self.workers}, start_method={self.start_method!r})"

    @property
    def pids(self) -> list[int]:
        """Process ids of the worker processes alive now (none before first use)."""
        return [
            worker.process.pid
            for worker in self._slots
            if worker is not None and worker.process.pid is not None and worker.process.is_alive()
        ]

    def stream(
        self,
        func: Callable[[Any], Any],
        items: Iterable[Any],
        *,
        labels: Sequence[str] | None = None,
        time_limit: float | None = None,
        progress: str | bool | None = None,
    ) -> Iterator[tuple[int, Outcome]]:
        """Run ``func`` on every item in the workers; yield ``(index, outcome)`` as each ends.

        See :meth:`Backend.stream`. Raises :class:`ExecutionError` if this backend is
        already running a batch, or if its workers cannot start at all.
        """
        items, names = _check_batch(func, items, labels, time_limit, progress)
        if self._running:
            raise ExecutionError(
                "this ProcessBackend is already running a batch; finish or close that "
                "iterator first, or use a second backend."
            )
        return self._stream(func, items, names, time_limit, progress)

    def close(self) -> None:
        """Stop every worker process: ask, then terminate, then kill. Safe to call twice.

        The backend stays usable: a later batch starts new workers.
        """
        _stop_all(self._slots)

    # -- the dispatch loop ------------------------------------------------------------------

    def _stream(
        self,
        func: Callable[[Any], Any],
        items: list[Any],
        names: list[str],
        time_limit: float | None,
        progress: str | bool | None,
    ) -> Iterator[tuple[int, Outcome]]:
        self._running = True
        bar = _progress_bar(progress, len(items))
        batch = _Batch(next(self._batches), func, items, names, time_limit)
        try:
            while batch.pending or any(w is not None and w.busy for w in self._slots):
                self._hand_out(batch)
                yield from batch.drain(bar)
                self._wait_and_collect(batch)
                yield from batch.drain(bar)
        except KeyboardInterrupt:
            _stop_all(self._slots, patience=0.0)
            raise
        finally:
            # Whatever is still running belongs to a batch nobody listens to any more (the
            # iterator was closed early or an error was raised): stop those workers.
            # Workers still starting are left to finish starting; the next batch uses them.
            for slot, worker in enumerate(self._slots):
                if worker is not None and worker.busy:
                    worker.stop(0.0)
                    self._slots[slot] = None
            if bar is not None:
                bar.close()
            self._running = False

    def _hand_out(self, batch: _Batch) -> None:
        """Give waiting items to idle workers; start workers for items nobody can take."""
        for slot, worker in enumerate(self._slots):
            if worker is not None and worker.ready and not worker.busy:
                if not worker.process.is_alive():  # died while idle: replace it quietly
                    worker.stop(0.0)
                    self._slots[slot] = None
        for worker in self._slots:
            if not batch.pending:
                return
            if worker is not None and worker.ready and not worker.busy:
                self._send(worker, batch)
        starting = sum(1 for w in self._slots if w is not None and not w.ready)
        for slot, worker in enumerate(self._slots):
            if len(batch.pending) <= starting:
                return
            if worker is None:
                self._slots[slot] = self._start_worker()
                starting += 1

    def _send(self, worker: _Worker, batch: _Batch) -> None:
        index = batch.pending.popleft()
        name = batch.names[index]
        if batch.func_payload is None:
            batch.finished.append((index, Outcome(name, "failed", error=batch.func_problem)))
            return
        try:
            item_payload = _dumps(batch.items[index])
        except Exception as exc:
            problem = (
                f"the item could not be sent to a worker process: {_describe(exc)}. Items "
                "must be picklable."
            )
            batch.finished.append((index, Outcome(name, "failed", error=problem)))
            return
        fresh = worker.batch != batch.number
        message = (
            "task",
            batch.func_payload if fresh else None,
            batch.context if fresh else None,
            item_payload,
        )
        try:
            worker.conn.send(message)
        except (OSError, ValueError):
            # The worker died while idle and the item never reached it: put the item back
            # for a fresh worker, once; a second failure is reported.
            slot = self._slots.index(worker)
            notice = worker.death_notice()
            worker.stop(0.0)
            self._slots[slot] = None
            if index in batch.resent:
                problem = f"{notice} before the item could be handed to it"
                batch.finished.append((index, Outcome(name, "crashed", error=problem)))
            else:
                batch.resent.add(index)
                batch.pending.appendleft(index)
            return
        worker.batch = batch.number
        worker.index = index
        worker.started = time.monotonic()
        worker.deadline = (
            math.inf if batch.time_limit is None else worker.started + batch.time_limit
        )

    def _wait_and_collect(self, batch: _Batch) -> None:
        """Wait for a result, a death or the nearest deadline, and record what happened."""
        waiting = [w for w in self._slots if w is not None and (w.busy or not w.ready)]
        if not waiting:
            return
        deadline = min(w.deadline for w in waiting)
        timeout = None if math.isinf(deadline) else max(0.0, deadline - time.monotonic())
        objects: list[Any] = []
        for w in waiting:
            objects.extend((w.conn, w.process.sentinel))
        ready = set(wait_for_any(objects, timeout=timeout))
        now = time.monotonic()
        for worker in waiting:
            slot = self._slots.index(worker)
            if worker.conn in ready or worker.process.sentinel in ready:
                message = worker.receive()
                if message is None:
                    notice = worker.death_notice()
                    worker.stop(0.0)
                    self._slots[slot] = None
                    if worker.ready:
                        self._settle(batch, worker, "crashed", f"{notice} while running it", now)
                    else:
                        self._startup_failed(notice)
                elif message[0] == "ready":
                    worker.ready = True
                    worker.deadline = math.inf
                    self._startup_failures = 0
                else:
                    index = worker.index
                    worker.index = None
                    worker.deadline = math.inf
                    assert index is not None
                    outcome = _outcome_from(message, batch.names[index], now - worker.started)
                    batch.finished.append((index, outcome))
            elif now >= worker.deadline:
                worker.stop(0.0)
                self._slots[slot] = None
                if worker.ready:
                    problem = f"no result within {batch.time_limit:g} s; the worker was stopped"
                    self._settle(batch, worker, "timed-out", problem, now)
                else:
                    self._startup_failed(f"no worker reported ready within {_STARTUP_SECONDS:g} s")

    def _startup_failed(self, notice: str) -> None:
        self._startup_failures += 1
        if self._startup_failures >= _STARTUP_ATTEMPTS:
            self._startup_failures = 0
            raise ExecutionError(
                f"worker processes could not start: {notice}. The workers' error output "
                "says why. A script that starts workers needs the guard "
                "'if __name__ == \"__main__\":' around its main code, and forecastaudit must "
                f"import in a fresh interpreter ({sys.executable})."
            )

    @staticmethod
    def _settle(batch: _Batch, worker: _Worker, status: Status, problem: str, now: float) -> None:
        index = worker.index
        assert index is not None
        outcome = Outcome(batch.names[index], status, error=problem, seconds=now - worker.started)
        batch.finished.append((index, outcome))

    def _start_worker(self) -> _Worker:
        if self.start_method == "forkserver":
            # Our own module first, so that workers do not import it each time they start.
            self._context.set_forkserver_preload(["forecastaudit.run", *self.preload])
        parent_end, child_end = self._context.Pipe(duplex=True)
        process = self._context.Process(
            target=_worker_main,
            args=(child_end, list(sys.path)),
            name="forecastaudit-worker",
            daemon=True,
        )
        with _thread_variables_set():
            process.start()
        child_end.close()
        return _Worker(process, parent_end, deadline=time.monotonic() + _STARTUP_SECONDS)


# -- helpers of the process backend -----------------------------------------------------------


class DaskBackend(Backend):
    """Run items on the workers of a Dask distributed cluster.

    At most one item per worker thread is in the cluster at any time, so an item starts as
    soon as it is sent, its run time is measured from then, and a huge batch never floods
    the scheduler. Results stream back as items finish.

    * An exception in the function gives ``"failed"`` for that item only, as with the other
      backends; so does a function or item that cannot be sent to the cluster.
    * An item that runs past ``time_limit`` gets ``"timed-out"``: it is cancelled and the
      worker running it is restarted by its nanny (the only way to stop a running Python
      function). Without a nanny the worker cannot be restarted, the item is still reported
      ``"timed-out"`` and its thread stays busy until the function returns.
    * An item whose workers keep dying (the scheduler gives up after
      ``distributed.scheduler.allowed-failures`` attempts, 3 by default) gets ``"crashed"``.

    Each item runs with the BLAS and OpenMP libraries limited to one thread
    (``threadpoolctl``); Dask's nanny already sets ``OMP_NUM_THREADS`` and its kin to 1 in
    every worker process. Use workers with one thread each (``threads_per_worker=1``): the
    limit is per process, and the libraries fitted here hold the GIL most of the time.

    Parameters
    ----------
    client : distributed.Client or str
        A connected client, or the address of a scheduler (``"tcp://10.0.0.5:8786"``) to
        connect to. A client made here is closed by :meth:`close`; a client passed in is
        left open.
    preload : sequence of str, optional
        Modules every worker imports once before the first item (so that a library's
        import time does not count against an item's time limit). Modules that fail to
        import are skipped.

    Raises
    ------
    ExecutionError
        If Dask distributed is not installed, the scheduler cannot be reached, or the
        cluster has no workers.
    """

    name = "dask"
    enforces_time_limit = True

    def __init__(self, client: Any, *, preload: Sequence[str] = ()) -> None:
        try:
            import distributed
        except ImportError:
            raise ExecutionError(
                "Running on a Dask cluster needs Dask distributed: pip install "
                "'forecastaudit[all]' (or 'dask[distributed]')."
            ) from None
        self._own_client = False
        if isinstance(client, str):
            try:
                client = distributed.Client(client, timeout=30)
            except Exception as exc:  # OSError, TimeoutError, ValueError of a bad address
                raise ExecutionError(
                    f"Cannot connect to the Dask scheduler at {client!r}: {_describe(exc)}. "
                    "Check the address (for example tcp://host:8786) and that the "
                    "scheduler is running."
                ) from None
            self._own_client = True
        elif not isinstance(client, distributed.Client):
            raise ExecutionError(
                "client must be a dask.distributed.Client or a scheduler address such as "
                f"'tcp://host:8786'; got {type(client).__name__}."
            )
        self.client = client
        self.preload: tuple[str, ...] = (preload,) if isinstance(preload, str) else tuple(preload)
        self._preloaded: set[str] = set()
        self.workers = self._threads()
        if self.workers < 1:
            with contextlib.suppress(Exception):
                self.client.wait_for_workers(1, timeout=30)
            self.workers = self._threads()
        if self.workers < 1:
            raise ExecutionError(
                "The Dask cluster has no workers; start some (dask worker <scheduler>) or "
                "wait for them, then try again."
            )

    def __repr__(self) -> str:
        return f"DaskBackend(workers={self.workers}, scheduler={self.client.scheduler.address!r})"

    def _threads(self) -> int:
        try:
            return int(sum(self.client.nthreads().values()))
        except Exception:
            return 0

    def stream(
        self,
        func: Callable[[Any], Any],
        items: Iterable[Any],
        *,
        labels: Sequence[str] | None = None,
        time_limit: float | None = None,
        progress: str | bool | None = None,
    ) -> Iterator[tuple[int, Outcome]]:
        """Run ``func`` on every item in the cluster; yield ``(index, outcome)`` as each ends.

        See :meth:`Backend.stream`.
        """
        items, names = _check_batch(func, items, labels, time_limit, progress)
        return self._stream(func, items, names, time_limit, progress)

    def close(self) -> None:
        """Close the client if this backend connected it. Safe to call twice."""
        if self._own_client:
            with contextlib.suppress(Exception):
                self.client.close()

    def _stream(
        self,
        func: Callable[[Any], Any],
        items: list[Any],
        names: list[str],
        time_limit: float | None,
        progress: str | bool | None,
    ) -> Iterator[tuple[int, Outcome]]:
        import distributed

        self._preload()
        bar = _progress_bar(progress, len(items))
        pending = deque(range(len(items)))
        running: dict[Any, tuple[int, float]] = {}
        batch = f"forecastaudit-{os.getpid()}-{time.time_ns()}"
        try:
            while pending or running:
                capacity = max(1, self._threads())
                while pending and len(running) < capacity:
                    index = pending.popleft()
                    try:
                        future = self.client.submit(
                            _dask_call, func, items[index], key=f"{batch}-{index}", pure=False
                        )
                    except Exception as exc:
                        problem = f"the item could not be sent to the cluster: {_describe(exc)}"
                        yield self._done(bar, index, Outcome(names[index], "failed", error=problem))
                        continue
                    running[future] = (index, time.perf_counter())
                if not running:
                    continue
                wait = 0.5 if time_limit is None else min(0.5, time_limit)
                try:
                    done = distributed.wait(
                        list(running), timeout=wait, return_when="FIRST_COMPLETED"
                    ).done
                except TimeoutError:  # nothing finished within ``wait``
                    done = set()
                now = time.perf_counter()
                for future in done:
                    index, started = running.pop(future)
                    outcome = _dask_outcome(future, names[index], now - started)
                    future.release()
                    yield self._done(bar, index, outcome)
                if time_limit is not None:
                    late = [f for f, (_, started) in running.items() if now - started > time_limit]
                    if late:
                        self._stop(late)
                    for future in late:
                        index, started = running.pop(future)
                        outcome = Outcome(
                            names[index],
                            "timed-out",
                            error=(
                                f"ran past the time limit of {time_limit:g} s; its Dask worker "
                                "was restarted"
                            ),
                            seconds=now - started,
                        )
                        yield self._done(bar, index, outcome)
        finally:
            for future in running:
                with contextlib.suppress(Exception):
                    future.cancel()
            if bar is not None:
                bar.close()

    @staticmethod
    def _done(bar: Any, index: int, outcome: Outcome) -> tuple[int, Outcome]:
        if bar is not None:
            bar.update(1)
        return index, outcome

    def _preload(self) -> None:
        wanted = [name for name in self.preload if name not in self._preloaded]
        if wanted:
            with contextlib.suppress(Exception):
                self.client.run(_import_quietly, wanted)
            self._preloaded.update(wanted)

    def _stop(self, futures: list[Any]) -> None:
        """Cancel the futures and restart the workers that are running them."""
        keys = {future.key for future in futures}
        try:
            processing = self.client.processing()
        except Exception:
            processing = {}
        busy = [worker for worker, held in processing.items() if keys & set(held)]
        for future in futures:
            with contextlib.suppress(Exception):
                future.cancel()
        if busy:
            with contextlib.suppress(Exception):
                self.client.restart_workers(workers=busy, timeout=60, raise_for_error=False)


def _dask_call(func: Callable[[Any], Any], item: Any) -> tuple[Any, ...]:
    """Run one item on a Dask worker: the worker-process protocol, in one call."""
    try:
        with _one_thread_pool():
            value = func(item)
    except Exception as exc:
        return ("failed", _describe(exc), _short_trace(exc))
    return ("ok", value)


def _dask_outcome(future: Any, label: str, seconds: float) -> Outcome:
    """Turn a finished Dask future into an outcome."""
    try:
        message = future.result()
    except Exception as exc:
        if type(exc).__name__ == "KilledWorker":
            problem = (
                "its Dask workers died while running it (the scheduler gave up after "
                f"repeated attempts): {_describe(exc)}"
            )
            return Outcome(label, "crashed", error=problem, seconds=seconds)
        if isinstance(exc, TimeoutError | OSError):
            problem = f"the cluster lost it: {_describe(exc)}"
            return Outcome(label, "crashed", error=problem, seconds=seconds)
        problem = f"the cluster could not run it: {_describe(exc)}"
        return Outcome(label, "failed", error=problem, trace=_short_trace(exc), seconds=seconds)
    if message[0] == "ok":
        return Outcome(label, "ok", message[1], seconds=seconds)
    _, error, trace = message
    return Outcome(label, "failed", error=error, trace=trace, seconds=seconds)


def _import_quietly(names: list[str]) -> None:
    for name in names:
        with contextlib.suppress(Exception):
            importlib.import_module(name)


class _Batch:
    """The state of one ``stream`` call on a :class:`ProcessBackend`."""

    def __init__(
        self,
        number: int,
        func: Callable[[Any], Any],
        items: list[Any],
        names: list[str],
        time_limit: float | None,
    ) -> None:
        self.number = number
        self.items = items
        self.names = names
        self.time_limit = time_limit
        self.context = (list(sys.path), os.getcwd())
        self.pending: deque[int] = deque(range(len(items)))
        self.finished: deque[tuple[int, Outcome]] = deque()
        self.resent: set[int] = set()
        self.func_problem = ""
        self.func_payload: bytes | None
        try:
            self.func_payload = _dumps(func)
        except Exception as exc:
            self.func_payload = None
            self.func_problem = (
                f"the function could not be sent to a worker process: {_describe(exc)}. "
                "Pass a function defined at module level in an importable module."
            )

    def drain(self, bar: Any) -> Iterator[tuple[int, Outcome]]:
        while self.finished:
            if bar is not None:
                bar.update(1)
            yield self.finished.popleft()


class _Worker:
    """One worker process seen from the parent."""

    def __init__(self, process: Any, conn: Any, *, deadline: float) -> None:
        self.process = process
        self.conn = conn
        self.ready = False  # it said it is ready for work
        self.batch = 0  # the batch whose function and context it holds
        self.index: int | None = None  # the item it runs now
        self.started = time.monotonic()  # when that item was handed to it
        self.deadline = deadline  # when to give up on it (start-up or item time limit)

    @property
    def busy(self) -> bool:
        return self.index is not None

    def receive(self) -> tuple[Any, ...] | None:
        """The next message, or None if the worker is gone."""
        try:
            if self.conn.poll():
                return self.conn.recv()
        except (EOFError, OSError):
            pass
        return None

    def death_notice(self) -> str:
        self.process.join(timeout=_STOP_SECONDS)
        code = self.process.exitcode
        if code is None:
            return "the worker process stopped answering"
        if code < 0:
            try:
                return f"the worker process died (exit code {code}, {signal.Signals(-code).name})"
            except ValueError:
                pass
        return f"the worker process died (exit code {code})"

    def stop(self, patience: float) -> None:
        """Ask the worker to exit (if idle), then terminate it, then kill it."""
        _stop_all([self], patience=patience)


def _stop_all(slots: list[_Worker | None], patience: float = _STOP_SECONDS) -> None:
    """Stop every worker in ``slots`` and empty the slots.

    Idle workers are asked to exit and given ``patience`` seconds; busy ones, and any that
    do not exit, are terminated, then killed.
    """
    workers = [worker for worker in slots if worker is not None]
    for slot in range(len(slots)):
        slots[slot] = None
    if not workers:
        return
    for worker in workers:
        if worker.ready and not worker.busy and patience > 0:
            with contextlib.suppress(OSError, ValueError):
                worker.conn.send(("stop",))
    deadline = time.monotonic() + patience
    for worker in workers:
        if worker.ready and not worker.busy and patience > 0:
            worker.process.join(timeout=max(0.0, deadline - time.monotonic()))
    for step in ("terminate", "kill"):
        alive = [worker for worker in workers if worker.process.is_alive()]
        if not alive:
            break
        for worker in alive:
            with contextlib.suppress(OSError, ValueError):
                getattr(worker.process, step)()
        deadline = time.monotonic() + _STOP_SECONDS
        for worker in alive:
            worker.process.join(timeout=max(0.0, deadline - time.monotonic()))
    for worker in workers:
        with contextlib.suppress(OSError, ValueError):
            worker.conn.close()
        if not worker.process.is_alive():
            with contextlib.suppress(ValueError):
                worker.process.close()


@contextlib.contextmanager
def _thread_variables_set() -> Iterator[None]:
    """Set the thread variables to 1 in this process's environment for a moment."""
    saved = {name: os.environ.get(name) for name in THREAD_VARIABLES}
    os.environ.update(dict.fromkeys(THREAD_VARIABLES, "1"))
    try:
        yield
    finally:
        for name, value in saved.items():
            if value is None:
                os.environ.pop(name, None)
            else:
                os.environ[name] = value


def _outcome_from(message: tuple[Any, ...], label: str, seconds: float) -> Outcome:
    """Turn a worker's reply into an outcome."""
    if message[0] == "ok":
        try:
            value = pickle.loads(message[1])
        except Exception as exc:
            problem = f"the return value could not be loaded in this process: {_describe(exc)}"
            return Outcome(label, "failed", error=problem, seconds=seconds)
        return Outcome(label, "ok", value, seconds=seconds)
    _, error, trace = message
    return Outcome(label, "failed", error=error, trace=trace, seconds=seconds)


# -- the worker process -----------------------------------------------------------------------


def _worker_main(conn: Any, sys_path: list[str]) -> None:
    """Body of a worker process: run tasks from ``conn`` until told to stop or orphaned."""
    os.environ.update(dict.fromkeys(THREAD_VARIABLES, "1"))
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    sys.path[:] = sys_path
    limits = _limit_thread_pools(None)
    conn.send(("ready",))
    func: Any = None
    func_problem = ""
    while True:
        try:
            message = conn.recv()
        except (EOFError, OSError):  # the parent is gone
            return
        if message[0] == "stop":
            return
        _, func_payload, context, item_payload = message
        try:
            if context is not None:
                _enter_context(*context)
            if func_payload is not None:
                func, func_problem = None, ""
                try:
                    func = pickle.loads(func_payload)
                except Exception as exc:
                    func_problem = (
                        "the function could not be loaded in the worker process: "
                        f"{_describe(exc)}. Define it at module level in a module the "
                        "worker can import."
                    )
            if func is None:
                conn.send(("failed", func_problem, ""))
                continue
            item = pickle.loads(item_payload)
        except Exception as exc:
            problem = f"the item could not be loaded in the worker process: {_describe(exc)}"
            conn.send(("failed", problem, _short_trace(exc)))
            continue
        limits = _limit_thread_pools(limits)
        try:
            value = func(item)
        except BaseException as exc:  # SystemExit too: it is the function's failure
            conn.send(("failed", _describe(exc), _short_trace(exc)))
            continue
        try:
            payload = _dumps(value)
        except Exception as exc:
            problem = (
                f"the return value could not be sent back from the worker process: "
                f"{_describe(exc)}. Return plain data (numbers, strings, arrays, dataclasses)."
            )
            conn.send(("failed", problem, ""))
            continue
        del value
        conn.send(("ok", payload))


def _enter_context(sys_path: list[str], cwd: str) -> None:
    """Take the parent's import path and working directory."""
    if sys.path != sys_path:
        sys.path[:] = sys_path
        importlib.invalidate_caches()
    with contextlib.suppress(OSError):
        os.chdir(cwd)


def _limit_thread_pools(current: Any) -> Any:
    """Limit loaded BLAS/OpenMP pools to one thread; redo it when new modules were loaded.

    ``current`` is the result of the previous call (None at first). Returns a value to
    pass next time; the limits stay in force for the rest of the process.
    """
    count = len(sys.modules)
    if current is not None and current[0] == count:
        return current
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return (count, None)
    return (count, threadpool_limits(limits=1))


# -- shared helpers ---------------------------------------------------------------------------


def _check_batch(
    func: Any,
    items: Iterable[Any],
    labels: Sequence[str] | None,
    time_limit: Any,
    progress: Any,
) -> tuple[list[Any], list[str]]:
    """Check the arguments of a batch; return the items as a list and one label per item."""
    if not callable(func):
        raise ExecutionError(f"func must be callable; got {type(func).__name__} {func!r}.")
    items = list(items)
    if labels is None:
        names = [str(index) for index in range(len(items))]
    else:
        if isinstance(labels, str):
            raise ExecutionError("labels must be a sequence of strings, one per item; got a str.")
        names = [str(label) for label in labels]
        if len(names) != len(items):
            raise ExecutionError(
                f"labels must have one entry per item; got {len(names)} labels for "
                f"{len(items)} items."
            )
    if time_limit is not None and (
        isinstance(time_limit, bool)
        or not isinstance(time_limit, int | float)
        or not time_limit > 0
        or math.isinf(time_limit)
    ):
        raise ExecutionError(
            f"time_limit must be a positive number of seconds, or None for no limit; got "
            f"{time_limit!r}."
        )
    if progress is not None and not isinstance(progress, bool | str):
        raise ExecutionError(
            f"progress must be a description (str), True, False or None; got {progress!r}."
        )
    return items, names


def _progress_bar(progress: str | bool | None, total: int) -> Any:
    """A tqdm progress bar over ``total`` items, or None when no progress is wanted."""
    if progress is None or progress is False:
        return None
    from tqdm.auto import tqdm

    return tqdm(total=total, desc=progress if isinstance(progress, str) else None)


@contextlib.contextmanager
def _one_thread_pool() -> Iterator[None]:
    """Limit BLAS/OpenMP libraries to one thread for the duration of the block."""
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        yield
        return
    with threadpool_limits(limits=1):
        yield


def _dumps(obj: Any) -> bytes:
    return pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)


def _describe(exc: BaseException) -> str:
    """``"TypeError: message"`` (just the type name when there is no message)."""
    try:
        message = str(exc)
    except Exception:
        message = ""
    name = type(exc).__name__
    return f"{name}: {message}" if message else name


def _short_trace(exc: BaseException) -> str:
    """The innermost frames of ``exc``'s traceback, at most a few thousand characters."""
    frames = exc.__traceback__
    if frames is not None and frames.tb_next is not None:
        frames = frames.tb_next  # the first frame is ours: the line that called the function
    try:
        lines = traceback.format_exception(type(exc), exc, frames, limit=-_TRACE_FRAMES)
        text = "".join(lines)
    except Exception:
        return ""
    if len(text) > _TRACE_CHARS:
        text = "...\n" + text[-_TRACE_CHARS:]
    return text.rstrip("\n")


def _is_whole_number(value: Any) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


# -- choosing a backend -----------------------------------------------------------------------


def make_backend(
    workers: int | Backend | None = None, *, preload: Sequence[str] = (), client: Any = None
) -> Backend:
    """Turn a ``workers`` argument (or a Dask client) into an execution backend.

    Parameters
    ----------
    workers : int, Backend or None, optional
        None or 1: run inline (:class:`InlineBackend`). A whole number >= 2: that many
        local worker processes (:class:`ProcessBackend`). A backend: returned as is, so
        callers can bring their own (and keep its workers across calls).
    preload : sequence of str, optional
        Modules the workers' fork server imports once; see :class:`ProcessBackend`.
        Ignored unless a new process or Dask backend is made.
    client : distributed.Client or str, optional
        A Dask client or scheduler address: the items run on that cluster
        (:class:`DaskBackend`) and ``workers`` must be None.

    Returns
    -------
    Backend
        A backend the caller should close (or use as a context manager) when it made it.

    Raises
    ------
    ExecutionError
        If ``workers`` is anything else (0, a negative number, a bool, a float, a str).

    Examples
    --------
    >>> make_backend(None).name
    'inline'
    >>> make_backend(1.5)
    Traceback (most recent call last):
    ...
    forecastaudit.run.ExecutionError: workers must be a whole number >= 1, ...
    """
    if client is not None:
        if workers is not None:
            raise ExecutionError(
                "Give either workers (local processes) or client (a Dask cluster), not both; "
                "the cluster's workers set how many items run at once."
            )
        return DaskBackend(client, preload=preload)
    if isinstance(workers, Backend):
        return workers
    if workers is None:
        return InlineBackend()
    if not _is_whole_number(workers) or workers < 1:
        raise ExecutionError(
            "workers must be a whole number >= 1, or an execution backend; got "
            f"{workers!r}. Use None or 1 to run inline, or N >= 2 for N worker processes "
            f"(this machine has {default_workers()} usable cores)."
        )
    if workers == 1:
        return InlineBackend()
    return ProcessBackend(workers, preload=preload)


def default_workers() -> int:
    """Number of CPU cores this process may use (its affinity mask where available).

    Returns
    -------
    int
        At least 1.
    """
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)
