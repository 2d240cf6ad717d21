"""Rolling-origin holdout: every estimator fitted on the training part and scored on the rest."""

from __future__ import annotations

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
from forecastaudit.estimate import Estimate, Forecast
from forecastaudit.fitting import DEFAULT_TIME_LIMIT, fit_tasks, run_fits
from forecastaudit.run import Backend
from forecastaudit.series import prepare_series
from forecastaudit.spec import ModelSpec


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
        Pairwise Diebold-Mariano tests (squared loss) with the small-sample correction.
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
    backend: Backend | int | None = None,
    time_limit: float | None = DEFAULT_TIME_LIMIT,
    progress: bool = False,
) -> HoldoutResult:
    """Fit on the training part and forecast the held-out part, at each origin.

    The last ``origins * horizon`` observations are split into ``origins`` consecutive
    windows of ``horizon``; each window is forecast from a fit on everything before it.

    Parameters
    ----------
    values : array
        The series on the original scale.
    reference_forecaster : callable, optional
        ``f(train_transformed, estimates, horizon) -> Forecast`` for the reference optimum.
    backend : Backend or int, optional
        Where the fits run (see :func:`forecastaudit.fitting.run_fits`).
    time_limit : float, optional
        Seconds one fit may take where the backend can stop it.
    progress : bool
        Show a progress bar (tqdm) over the fits.
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
    tasks = [
        task
        for start, train_t in zip(starts, trains, strict=True)
        for task in fit_tasks(
            keys, train_t, spec, steps=horizon, levels=levels, label=f"origin {start}"
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
            ref = reference_forecaster(train_t, estimates, horizon)
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
    pairs = []
    for a, b in combinations(complete, 2):
        test = diebold_mariano(errors[a], errors[b], horizon=horizon)
        pairs.append(
            {
                "first": a,
                "second": b,
                "mean_loss_difference": test.mean_difference,
                "dm": test.statistic,
                "dm_corrected": test.corrected_statistic,
                "p_value": test.p_value,
                "n": test.n,
                "note": test.note,
            }
        )
    return HoldoutResult(
        horizon=horizon,
        origins=starts,
        accuracy=accuracy,
        comparisons=pd.DataFrame(pairs),
        forecasts=per_origin,
        actuals=actuals,
        failures=failures,
        point_forecast=point_kind(spec),
    )
