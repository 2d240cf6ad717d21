"""Rolling-origin holdout: every estimator fitted on the training part and scored on the rest."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from itertools import combinations
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.diagnosis.forecasts import OriginalScaleForecast, back_transform, point_kind
from forecastaudit.diagnosis.metrics import (
    diebold_mariano,
    interval_score,
    mase_scale,
    point_accuracy,
)
from forecastaudit.estimate import REFERENCE_ENGINE, Estimate, Forecast
from forecastaudit.fitting import DEFAULT_TIME_LIMIT, fit_tasks, run_fits
from forecastaudit.run import Backend
from forecastaudit.series import prepare_series
from forecastaudit.spec import ModelSpec

#: A pairwise difference in holdout accuracy is immaterial when the mean squared-error loss
#: differs by less than this fraction of the second forecast's mean squared-error loss (5%
#: of the mean squared error is about 2.5% of the root mean squared error; common practice,
#: no source). A Diebold-Mariano test on many errors can call such a difference significant.
IMMATERIAL_LOSS = 0.05

#: The level at which a Diebold-Mariano p-value is called significant in the comparison
#: table's note (the customary 5%; common practice, no source).
SIGNIFICANCE = 0.05

#: Columns of :attr:`HoldoutResult.comparisons`, in order.
COMPARISON_COLUMNS = (
    "first",
    "second",
    "first_engine",
    "second_engine",
    "loss",
    "mean_loss_difference",
    "relative_loss_difference",
    "immaterial",
    "dm",
    "dm_corrected",
    "p_value",
    "n",
    "note",
)


# ---------------------------------------------------------------------- holdout
@dataclass
class HoldoutResult:
    """Holdout accuracy of every estimator over one or more forecast origins.

    Attributes
    ----------
    horizon : int
        Steps held out after each origin.
    origins : list of int
        Number of training observations at each origin.
    accuracy : pandas.DataFrame
        Per estimator: MAE, RMSE, MAPE, MASE, coverage and mean interval score per level,
        pooled over origins.
    comparisons : pandas.DataFrame
        Pairwise Diebold-Mariano tests (squared-error loss) with the small-sample
        correction, between independent engines only (one estimator per engine, see
        :func:`run_holdout`). Columns :data:`COMPARISON_COLUMNS`: ``mean_loss_difference``
        is the mean of ``e_first^2 - e_second^2`` (negative favours the first);
        ``relative_loss_difference`` divides it by the second's mean squared error (the
        effect size beside the p-value); ``immaterial`` is True when its absolute value is
        below :data:`IMMATERIAL_LOSS`; ``note`` says why a value is undefined, and
        "significant but immaterial" where ``p_value`` < :data:`SIGNIFICANCE` and the
        difference is immaterial.
    forecasts : dict
        Per origin, per estimator, the original-scale forecast.
    failures : dict
        Estimator -> reason, where a fit or forecast failed at some origin.
    """

    horizon: int
    origins: list[int]
    accuracy: pd.DataFrame
    comparisons: pd.DataFrame
    forecasts: list[dict[str, OriginalScaleForecast]] = field(default_factory=list)
    actuals: list[np.ndarray] = field(default_factory=list)
    failures: dict[str, str] = field(default_factory=dict)
    point_forecast: str = ""

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "horizon": self.horizon,
            "origins": list(self.origins),
            "point_forecast": self.point_forecast,
            "accuracy": {k: row.to_dict() for k, row in self.accuracy.iterrows()},
            "comparisons": self.comparisons.to_dict(orient="records"),
            "actuals": [a.tolist() for a in self.actuals],
            "forecasts": [
                {k: fc.to_dict() for k, fc in origin.items()} for origin in self.forecasts
            ],
            "failures": dict(self.failures),
        }


ReferenceForecaster = Callable[[np.ndarray, Mapping[str, Estimate], int], Forecast | None]


def run_holdout(
    values: np.ndarray,
    spec: ModelSpec,
    keys: Sequence[str],
    horizon: int,
    origins: int,
    levels: tuple[float, ...],
    reference_forecaster: ReferenceForecaster | None = None,
    reference_key: str = "reference",
    *,
    engines: Mapping[str, str] | None = None,
    backend: Backend | int | None = None,
    time_limit: float | None = DEFAULT_TIME_LIMIT,
    progress: bool = False,
    regressors: np.ndarray | None = None,
) -> HoldoutResult:
    """Fit on the training part and forecast the held-out part, at each origin.

    The last ``origins * horizon`` observations are split into ``origins`` consecutive
    windows of ``horizon``; each window is forecast from a fit on everything before it.

    Parameters
    ----------
    values : array
        The series on the original scale.
    reference_forecaster : callable, optional
        ``f(train_transformed, estimates, horizon) -> Forecast`` for the reference optimum;
        with regressors it is also given ``regressors=`` (the training rows) and
        ``future_regressors=`` (the held-out rows) as keywords.
    engines : mapping of str to str, optional
        Estimator key -> engine (lineage). Accuracy is scored for every estimator, but the
        pairwise Diebold-Mariano comparisons are made only between independent engines:
        one estimator per engine, the first key of each engine in the order of ``keys``
        among those scored at every origin (wrappers of one engine are not independent
        evidence). The reference optimum is its own engine (``forecastaudit-reference``).
        Default None: each key is its own engine (every pair is compared). A key missing
        from the mapping is its own engine.
    backend : Backend or int, optional
        Where the fits run (see :func:`forecastaudit.fitting.run_fits`).
    time_limit : float, optional
        Seconds one fit may take where the backend can stop it.
    progress : bool
        Show a progress bar (tqdm) over the fits.
    regressors : numpy.ndarray, optional
        The regressor values over the whole series, ``(n, k)``, when the spec has
        regressors: each origin fits on the rows before it and forecasts with the held-out
        rows as the future values (known in advance, as calendar effects and planned prices
        are; a forecast that must also predict its regressors is not what is scored).
    """
    n = values.size
    starts = [n - horizon * (origins - i) for i in range(origins)]
    per_origin: list[dict[str, OriginalScaleForecast]] = []
    actuals: list[np.ndarray] = []
    scales: list[float] = []
    failures: dict[str, str] = {}
    # Every (origin, estimator) fit is one unit on the execution seam, all in one batch.
    trains = [
        prepare_series(values[:start], period=spec.period).transformed(spec) for start in starts
    ]

    def rows(start: int, stop: int) -> np.ndarray | None:
        return None if regressors is None else np.array(regressors[start:stop], dtype=float)

    tasks = [
        task
        for start, train_t in zip(starts, trains, strict=True)
        for task in fit_tasks(
            keys,
            train_t,
            spec,
            steps=horizon,
            levels=levels,
            label=f"origin {start}",
            regressors=rows(0, start),
            future_regressors=rows(start, start + horizon),
        )
    ]
    outcomes = run_fits(
        tasks, backend, time_limit=time_limit, progress="holdout fits" if progress else None
    )
    for i, (start, train_t) in enumerate(zip(starts, trains, strict=True)):
        estimates: dict[str, Estimate] = {}
        forecasts: dict[str, OriginalScaleForecast] = {}
        for j, key in enumerate(keys):
            outcome = outcomes[i * len(keys) + j]
            e, fc = outcome.estimate, outcome.forecast
            estimates[key] = e
            if not e.ok:
                # Unavailable and unsupported estimators are reported once, by the main fit.
                if e.status in ("failed", "timed-out"):
                    failures.setdefault(key, f"fit {e.status} at origin {start}: {e.reason}")
                continue
            if fc is None or not fc.ok:
                reason = fc.reason if fc is not None else "no forecast was produced"
                failures.setdefault(key, f"forecast failed at origin {start}: {reason}")
                continue
            forecasts[key] = back_transform(fc, spec)
        if reference_forecaster is not None:
            if regressors is None:
                ref = reference_forecaster(train_t, estimates, horizon)
            else:
                ref = reference_forecaster(
                    train_t,
                    estimates,
                    horizon,
                    regressors=rows(0, start),
                    future_regressors=rows(start, start + horizon),
                )
            if ref is not None and ref.ok:
                forecasts[reference_key] = back_transform(ref, spec)
        per_origin.append(forecasts)
        actuals.append(values[start : start + horizon])
        scales.append(mase_scale(values[:start], spec.m))

    complete = [k for k in [*keys, reference_key] if all(k in fc for fc in per_origin)]
    rows = {}
    errors: dict[str, np.ndarray] = {}
    for key in complete:
        point = np.concatenate([fc[key].median for fc in per_origin])
        actual = np.concatenate(actuals)
        errors[key] = actual - point
        scaled = np.concatenate(
            [
                np.abs(a - fc[key].median) / s
                for a, fc, s in zip(actuals, per_origin, scales, strict=True)
            ]
        )
        row = point_accuracy(actual, point, scale=1.0)
        row["mase"] = float(np.mean(scaled))
        for level in levels:
            lo = np.concatenate([fc[key].lower[level] for fc in per_origin])
            hi = np.concatenate([fc[key].upper[level] for fc in per_origin])
            row[f"coverage_{level:g}"] = float(np.mean((actual >= lo) & (actual <= hi)))
            row[f"interval_score_{level:g}"] = float(np.mean(interval_score(actual, lo, hi, level)))
        rows[key] = row
    accuracy = pd.DataFrame.from_dict(rows, orient="index")
    accuracy.index.name = "estimator"
    lineage = _engines_of(complete, engines, reference_key)
    representatives: dict[str, str] = {}
    for key in complete:
        representatives.setdefault(lineage[key], key)
    pairs = [
        _comparison(a, b, lineage, errors, horizon)
        for a, b in combinations(list(representatives.values()), 2)
    ]
    return HoldoutResult(
        horizon=horizon,
        origins=starts,
        accuracy=accuracy,
        comparisons=pd.DataFrame(pairs, columns=list(COMPARISON_COLUMNS)),
        forecasts=per_origin,
        actuals=actuals,
        failures=failures,
        point_forecast=point_kind(spec),
    )


def _engines_of(
    keys: Sequence[str], engines: Mapping[str, str] | None, reference_key: str
) -> dict[str, str]:
    """Engine of each key: from ``engines``, else the key itself; the reference its own."""
    given = dict(engines or {})
    out = {key: str(given.get(key, key)) for key in keys}
    if reference_key in out:
        out[reference_key] = REFERENCE_ENGINE
    return out


def _comparison(
    a: str,
    b: str,
    lineage: Mapping[str, str],
    errors: Mapping[str, np.ndarray],
    horizon: int,
) -> dict[str, Any]:
    """One Diebold-Mariano comparison (squared-error loss) with its effect size."""
    test = diebold_mariano(errors[a], errors[b], horizon=horizon, loss="squared")
    second_loss = float(np.mean(errors[b] ** 2))
    if second_loss > 0:
        relative = test.mean_difference / second_loss
    else:
        relative = 0.0 if test.mean_difference == 0 else math.inf
    immaterial = bool(math.isfinite(relative) and abs(relative) < IMMATERIAL_LOSS)
    notes = [test.note] if test.note else []
    if immaterial and math.isfinite(test.p_value) and test.p_value < SIGNIFICANCE:
        notes.append("significant but immaterial")
    return {
        "first": a,
        "second": b,
        "first_engine": lineage[a],
        "second_engine": lineage[b],
        "loss": "squared error",
        "mean_loss_difference": test.mean_difference,
        "relative_loss_difference": relative,
        "immaterial": immaterial,
        "dm": test.statistic,
        "dm_corrected": test.corrected_statistic,
        "p_value": test.p_value,
        "n": test.n,
        "note": "; ".join(notes),
    }
