"""Our own bounded exhaustive order search under the reference AICc."""

from __future__ import annotations

import itertools
import math
import time
from collections.abc import Iterable
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.conventions import information_criteria
from forecastaudit.run import Backend, make_backend
from forecastaudit.search.common import _key, _text
from forecastaudit.spec import ModelSpec

#: Burnham & Anderson (2002), section 2.6: within 2 AICc units = substantial support.
SUPPORT_BAND = 2.0


# ====================================================================== exhaustive search
def _fit_candidate(job: tuple[np.ndarray, ModelSpec]) -> dict[str, Any]:
    """Reference fit of one candidate (module level, so a process pool can run it)."""
    from forecastaudit import reference

    y_t, spec = job
    started = time.perf_counter()
    n_w = len(y_t) - spec.lost_to_differencing
    k = spec.n_coefficients + 1
    try:
        fit = reference.fit_reference(y_t, spec, None)
        loglike, converged, params, note = float(fit.loglike), bool(fit.converged), fit.params, ""
    except Exception as exc:  # a candidate that cannot be fitted is recorded, not fatal
        loglike, converged, params, note = math.nan, False, {}, f"{type(exc).__name__}: {exc}"
    criteria = information_criteria(loglike, k, n_w)
    return {
        "loglike": loglike,
        "k": k,
        "n_w": n_w,
        **criteria,
        "converged": converged,
        "params": {str(a): float(b) for a, b in params.items()},
        "note": note,
        "seconds": time.perf_counter() - started,
    }


def _failed_candidate(job: tuple[np.ndarray, ModelSpec], error: str) -> dict[str, Any]:
    """The row of a candidate whose fit gave no result (it raised outside, or timed out)."""
    y_t, spec = job
    n_w = len(y_t) - spec.lost_to_differencing
    k = spec.n_coefficients + 1
    return {
        "loglike": math.nan,
        "k": k,
        "n_w": n_w,
        **information_criteria(math.nan, k, n_w),
        "converged": False,
        "params": {},
        "note": error,
        "seconds": 0.0,
    }


def _grid(
    d: int, D: int, m: int, max_p: int, max_q: int, max_P: int, max_Q: int
) -> list[ModelSpec]:
    seasonal_p = range(max_P + 1) if m > 1 else range(1)
    seasonal_q = range(max_Q + 1) if m > 1 else range(1)
    # A constant only where it is a level mean, a drift or m x a drift (d + D <= 1): with
    # two or more differences it implies a polynomial trend (common practice, no source).
    constants = (False, True) if d + D <= 1 else (False,)
    period = m if m > 1 else None
    return [
        ModelSpec((p, d, q), (P, D, Q), period, mean=c)
        for p, q, P, Q, c in itertools.product(
            range(max_p + 1), range(max_q + 1), seasonal_p, seasonal_q, constants
        )
    ]


def exhaustive_reference_search(
    y_transformed: np.ndarray,
    period: int | None,
    differencing: Iterable[tuple[int, int]],
    *,
    max_p: int = 2,
    max_q: int = 2,
    max_P: int = 1,
    max_Q: int = 1,
    extra: Iterable[ModelSpec] = (),
    n_jobs: int | Backend | None = None,
) -> tuple[pd.DataFrame, dict[str, Any]]:
    """Our own bounded exhaustive search under the reference AICc.

    Every model with ``p <= max_p``, ``q <= max_q``, ``P <= max_P``, ``Q <= max_Q`` is
    fitted by :func:`forecastaudit.reference.fit_reference` within each ``(d, D)`` given,
    with and without a constant when ``d + D <= 1``. AICc is canonical
    (:func:`forecastaudit.conventions.information_criteria`, k = coefficients + 1,
    n = n_w). Candidates are ranked within their differencing only (information criteria do
    not compare models with different differencing: common practice, no source).

    Parameters
    ----------
    y_transformed : numpy.ndarray
        The series after the transform.
    period : int or None
        Seasonal period.
    differencing : iterable of (d, D)
        The differencing choices to search within.
    max_p, max_q, max_P, max_Q : int
        Bounds of the grid.
    extra : iterable of ModelSpec
        Models fitted besides the grid (e.g. a search's choice outside the bounds), marked
        ``in_grid = False``.
    n_jobs : int or execution backend, optional
        Where the candidate fits run: None or 1 in this process (one BLAS thread), N >= 2
        in N local worker processes, or a backend from :mod:`forecastaudit.run`.

    Returns
    -------
    table : pandas.DataFrame
        One row per candidate: ``model``, ``d``, ``D``, ``p``, ``q``, ``P``, ``Q``,
        ``constant``, ``k``, ``n_w``, ``loglike``, ``aic``, ``aicc``, ``bic``,
        ``delta_aicc``, ``rank``, ``within_2``, ``in_grid``, ``converged``, ``seconds``,
        ``params`` (dict), ``note``.
    info : dict
        ``seconds`` (wall time), ``n_jobs``, ``candidates``, ``bounds``.
    """
    m = int(period) if period and period > 1 else 1
    choices = sorted({(int(d), int(D)) for d, D in differencing})
    specs: list[ModelSpec] = []
    in_grid: list[bool] = []
    seen: set[Any] = set()
    for d, D in choices:
        for spec in _grid(d, D, m, max_p, max_q, max_P, max_Q):
            seen.add(_key(spec))
            specs.append(spec)
            in_grid.append(True)
    for spec in extra:
        plain = ModelSpec(spec.order, spec.seasonal, spec.period, mean=spec.mean)
        if _key(plain) not in seen and (plain.d, plain.D) in choices:
            seen.add(_key(plain))
            specs.append(plain)
            in_grid.append(False)
    y = np.asarray(y_transformed, dtype=float)
    jobs = [(y, spec) for spec in specs]
    owned = not isinstance(n_jobs, Backend)
    backend = make_backend(n_jobs)
    workers = backend.workers
    started = time.perf_counter()
    # Most expensive first (more coefficients), so the workers end together.
    order = sorted(range(len(jobs)), key=lambda i: -specs[i].n_coefficients)
    try:
        done = backend.map(_fit_candidate, [jobs[i] for i in order])
    finally:
        if owned:
            backend.close()
    results: list[dict[str, Any]] = [{}] * len(jobs)
    for i, outcome in zip(order, done, strict=True):
        results[i] = outcome.value if outcome.ok else _failed_candidate(jobs[i], outcome.error)
    seconds = time.perf_counter() - started
    rows = []
    for spec, grid_member, result in zip(specs, in_grid, results, strict=True):
        rows.append(
            {
                "model": _text(spec),
                "d": spec.d,
                "D": spec.D,
                "p": spec.p,
                "q": spec.q,
                "P": spec.P,
                "Q": spec.Q,
                "constant": spec.mean,
                **{k: result[k] for k in ("k", "n_w", "loglike", "aic", "aicc", "bic")},
                "in_grid": grid_member,
                "converged": result["converged"],
                "seconds": result["seconds"],
                "params": result["params"],
                "note": result["note"],
            }
        )
    table = pd.DataFrame(rows)
    if not table.empty:
        best = table.groupby(["d", "D"])["aicc"].transform("min")
        table["delta_aicc"] = table["aicc"] - best
        table["rank"] = (
            table.groupby(["d", "D"])["aicc"].rank(method="min", na_option="bottom").astype(int)
        )
        table["within_2"] = table["delta_aicc"] <= SUPPORT_BAND
        table = table.sort_values(["d", "D", "rank", "model"]).reset_index(drop=True)
    info = {
        "seconds": seconds,
        "n_jobs": workers,
        "candidates": len(specs),
        "bounds": {"max_p": max_p, "max_q": max_q, "max_P": max_P, "max_Q": max_Q},
        "differencing": [list(c) for c in choices],
    }
    return table, info
