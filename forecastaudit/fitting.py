"""The unit of work of an audit, run on the execution seam: one adapter on one series.

A unit fits the adapter to the series, forecasts from that fit with the library's own
method, keeps the in-sample residuals, and evaluates the library's own likelihood at any
given parameters, all where the fit ran: the library's objects never leave that process;
plain :class:`~forecastaudit.estimate.Estimate` and
:class:`~forecastaudit.estimate.Forecast` values come back. A unit that raises outside the
adapter's capture, times out or loses its worker still gives an estimate, with the status
``failed`` or ``timed-out`` and the reason, so the audit of the other adapters goes on.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from forecastaudit.adapters.protocol import FitRequest
from forecastaudit.adapters.registry import adapter_class, get_search
from forecastaudit.estimate import Estimate, Forecast, SearchOutcome, SearchSettings
from forecastaudit.run import Backend, Outcome, make_backend
from forecastaudit.spec import ModelSpec

__all__ = [
    "FitOutcome",
    "FitTask",
    "OwnLikelihoodTask",
    "SearchTask",
    "fit_tasks",
    "fit_unit",
    "own_loglike_unit",
    "run_fits",
    "run_own_loglikes",
    "run_searches",
    "search_unit",
]

#: Default time limit of one unit, in seconds, where the backend can enforce one.
DEFAULT_TIME_LIMIT = 600.0


@dataclass(frozen=True)
class FitTask:
    """One adapter on one series.

    Attributes
    ----------
    key : str
        The adapter's registry key.
    request : FitRequest
        The series (transformed) and the spec.
    steps : int
        Forecast steps (0: no forecast).
    levels : tuple of float
        Interval levels in percent.
    loglike_at : tuple of dict
        Canonical parameter sets at which to evaluate the library's own likelihood
        (adapters declaring ``own_loglike`` only).
    future_regressors : numpy.ndarray or None
        The regressors over the ``steps`` forecast periods, ``(steps, k)``, when the spec
        has regressors (their sample values travel in ``request``).
    label : str
        What the progress bar and messages call this unit.
    """

    key: str
    request: FitRequest
    steps: int = 0
    levels: tuple[float, ...] = ()
    loglike_at: tuple[Mapping[str, float], ...] = ()
    label: str = ""
    adapter: type | None = field(default=None, compare=False)
    future_regressors: np.ndarray | None = field(default=None, compare=False)


@dataclass
class FitOutcome:
    """What a unit hands back: plain values only."""

    estimate: Estimate
    forecast: Forecast | None = None
    own_loglike: tuple[float, ...] = ()


def fit_unit(task: FitTask) -> FitOutcome:
    """Run one unit (module level, so worker processes can import it)."""
    cls = task.adapter if task.adapter is not None else adapter_class(task.key)
    adapter = cls()
    estimate = adapter.fit(task.request)
    forecast = None
    if estimate.ok and task.steps > 0 and adapter.capabilities.forecast:
        forecast = adapter.forecast(estimate, task.steps, task.levels, task.future_regressors)
    own: tuple[float, ...] = ()
    if estimate.ok and task.loglike_at and adapter.capabilities.own_loglike:
        own = tuple(adapter.loglike_at(task.request, dict(p)) for p in task.loglike_at)
    estimate.native = None  # the library's object stays here
    return FitOutcome(estimate=estimate, forecast=forecast, own_loglike=own)


def _stand_in(task: FitTask, outcome: Outcome) -> FitOutcome:
    """An estimate for a unit that gave no value (timed out, raised, lost its worker)."""
    cls = task.adapter if task.adapter is not None else adapter_class(task.key)
    status = "timed-out" if outcome.status == "timed-out" else "failed"
    version: str | None
    try:
        version = cls().version()
    except Exception:  # the adapter's own failure is what is being reported
        version = None
    estimate = Estimate(
        key=task.key,
        engine=getattr(cls, "engine", task.key),
        package=getattr(cls, "package", ""),
        version=version,
        status=status,
        reason=outcome.error,
        spec=task.request.spec,
        output=outcome.trace,
        seconds=outcome.seconds,
    )
    return FitOutcome(estimate=estimate)


def _map_units(
    backend: Backend | int | None,
    func: Any,
    items: list[Any],
    labels: list[str],
    time_limit: float | None,
    progress: str | bool | None = None,
) -> list[Outcome]:
    """Map a unit over items on a backend (one made here, and closed, when given a number)."""
    owned = not isinstance(backend, Backend)
    runner = make_backend(backend)
    try:
        return runner.map(
            func,
            items,
            labels=labels,
            time_limit=time_limit if runner.enforces_time_limit else None,
            progress=progress,
        )
    finally:
        if owned:
            runner.close()


def run_fits(
    tasks: Sequence[FitTask],
    backend: Backend | int | None = None,
    *,
    time_limit: float | None = DEFAULT_TIME_LIMIT,
    progress: str | bool | None = None,
) -> list[FitOutcome]:
    """Run units on the execution seam; one outcome per task, in order.

    Parameters
    ----------
    tasks : sequence of FitTask
    backend : Backend or int, optional
        An execution backend, or a number of local workers (None or 1: in this process).
    time_limit : float, optional
        Seconds one unit may take where the backend can enforce it (local processes);
        past it the unit is stopped and its estimate is ``timed-out``.
    progress : str or bool, optional
        A progress-bar description (or True), or None for none.
    """
    outcomes = _map_units(
        backend, fit_unit, list(tasks), [t.label or t.key for t in tasks], time_limit, progress
    )
    return [
        o.value if o.ok and isinstance(o.value, FitOutcome) else _stand_in(t, o)
        for t, o in zip(tasks, outcomes, strict=True)
    ]


def fit_tasks(
    keys: Sequence[str],
    y: np.ndarray,
    spec: ModelSpec,
    *,
    steps: int = 0,
    levels: tuple[float, ...] = (),
    label: str = "",
    regressors: np.ndarray | None = None,
    future_regressors: np.ndarray | None = None,
) -> list[FitTask]:
    """One task per adapter key on the same series (the adapter classes resolved here).

    ``regressors`` (``(n, k)``) and ``future_regressors`` (``(steps, k)``) are the regressor
    values over the sample and the forecast periods when the spec has regressors.
    """
    request = FitRequest(
        np.asarray(y, dtype=float),
        spec,
        None if regressors is None else np.asarray(regressors, dtype=float),
    )
    return [
        FitTask(
            key=key,
            request=request,
            steps=steps,
            levels=levels,
            label=f"{key} {label}".strip(),
            adapter=adapter_class(key),
            future_regressors=future_regressors,
        )
        for key in keys
    ]


@dataclass(frozen=True)
class SearchTask:
    """One automatic order search on one series."""

    key: str
    y: np.ndarray
    period: int | None
    settings: SearchSettings | None = None


def search_unit(task: SearchTask) -> SearchOutcome:
    """Run one order search (module level, so worker processes can import it)."""
    outcome = get_search(task.key).run(task.y, task.period, task.settings)
    outcome.native = None  # the library's object stays here
    return outcome


def run_searches(
    tasks: Sequence[SearchTask],
    backend: Backend | int | None = None,
    *,
    time_limit: float | None = None,
    progress: str | bool | None = None,
) -> list[SearchOutcome]:
    """Run order searches on the execution seam; one outcome per task, in order."""
    outcomes = _map_units(
        backend, search_unit, list(tasks), [t.key for t in tasks], time_limit, progress
    )
    results = []
    for task, outcome in zip(tasks, outcomes, strict=True):
        if outcome.ok and isinstance(outcome.value, SearchOutcome):
            results.append(outcome.value)
            continue
        adapter = get_search(task.key)
        results.append(
            SearchOutcome(
                key=task.key,
                engine=adapter.engine,
                package=adapter.package,
                version=adapter.version(),
                status="failed",
                reason=f"{outcome.status}: {outcome.error}",
                settings=task.settings or SearchSettings(),
                output=outcome.trace,
                seconds=outcome.seconds,
            )
        )
    return results


@dataclass(frozen=True)
class OwnLikelihoodTask:
    """An adapter's own log-likelihood of one series at given parameter sets."""

    key: str
    request: FitRequest
    points: tuple[Mapping[str, float], ...]
    adapter: type | None = field(default=None, compare=False)


def own_loglike_unit(task: OwnLikelihoodTask) -> tuple[float, ...]:
    """Evaluate the library's own likelihood at each point (module level, for workers)."""
    cls = task.adapter if task.adapter is not None else adapter_class(task.key)
    adapter = cls()
    if not adapter.capabilities.own_loglike:
        return tuple(float("nan") for _ in task.points)
    return tuple(adapter.loglike_at(task.request, dict(p)) for p in task.points)


def run_own_loglikes(
    tasks: Sequence[OwnLikelihoodTask],
    backend: Backend | int | None = None,
    *,
    time_limit: float | None = DEFAULT_TIME_LIMIT,
) -> list[tuple[float, ...]]:
    """Own log-likelihoods on the execution seam; NaN where a unit gave no value."""
    outcomes = _map_units(
        backend,
        own_loglike_unit,
        list(tasks),
        [f"{t.key} own likelihood" for t in tasks],
        time_limit,
    )
    return [
        tuple(o.value) if o.ok else tuple(float("nan") for _ in t.points)
        for t, o in zip(tasks, outcomes, strict=True)
    ]
