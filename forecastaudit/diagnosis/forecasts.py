"""Forecasts and holdout accuracy across estimators, on the original scale.

Every estimator forecasts with its own method and intervals on the transformed scale;
forecastaudit back-transforms once, here. With a log or Box-Cox transform the Gaussian
forecast on the transformed scale back-transforms to the *median* on the original scale; the
bias-adjusted *mean* is given beside it. Accuracy is scored on the median (what a user who
back-transforms the library's point forecast gets).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.diagnosis.findings import Finding
from forecastaudit.diagnosis.metrics import (
    ljung_box,
)
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import Estimate, Forecast
from forecastaudit.spec import ModelSpec

POINT_KIND = {
    None: "mean (no transform)",
    "log": "median (back-transformed Gaussian forecast of the log)",
}


@dataclass
class OriginalScaleForecast:
    """A forecast back-transformed to the original scale.

    Attributes
    ----------
    median : numpy.ndarray
        The back-transformed point forecast (the median when there is a transform; the mean
        otherwise).
    mean : numpy.ndarray
        The bias-adjusted mean: ``exp(m + s^2/2)`` for log (exact for a log-normal), and for
        Box-Cox the second-order expansion ``inv(m) [1 + s^2 (1-lambda) / (2 (lambda m + 1)^2)]``
        (a closed-form Taylor approximation); equal to ``median`` without a transform.
    lower, upper : dict
        Interval bounds by level, back-transformed (the transforms are monotone, so the
        bounds keep their coverage).
    """

    key: str
    median: np.ndarray
    mean: np.ndarray
    lower: dict[float, np.ndarray]
    upper: dict[float, np.ndarray]
    se_transformed: np.ndarray
    interval_method: str
    sigma2_used: float

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "median": self.median.tolist(),
            "mean": self.mean.tolist(),
            "lower": {f"{k:g}": v.tolist() for k, v in self.lower.items()},
            "upper": {f"{k:g}": v.tolist() for k, v in self.upper.items()},
            "se_transformed": self.se_transformed.tolist(),
            "interval_method": self.interval_method,
            "sigma2_used": self.sigma2_used,
        }


def _inverse(values: np.ndarray, lam: float | None) -> np.ndarray:
    if lam is None:
        return np.asarray(values, dtype=float).copy()
    if lam == 0.0:
        return np.exp(values)
    base = np.maximum(lam * np.asarray(values, dtype=float) + 1.0, 0.0)
    return np.power(base, 1.0 / lam)


def back_transform(forecast: Forecast, spec: ModelSpec) -> OriginalScaleForecast:
    """Back-transform a forecast to the original scale (median, bias-adjusted mean, bounds)."""
    lam = spec.boxcox_lambda
    m, s2 = forecast.mean, forecast.se**2
    median = _inverse(m, lam)
    if lam is None:
        mean = median.copy()
    elif lam == 0.0:
        mean = np.exp(m + s2 / 2.0)
    else:
        mean = median * (1.0 + s2 * (1.0 - lam) / (2.0 * (lam * m + 1.0) ** 2))
    return OriginalScaleForecast(
        key=forecast.key,
        median=median,
        mean=mean,
        lower={k: _inverse(v, lam) for k, v in forecast.lower.items()},
        upper={k: _inverse(v, lam) for k, v in forecast.upper.items()},
        se_transformed=forecast.se.copy(),
        interval_method=forecast.interval_method,
        sigma2_used=forecast.sigma2_used,
    )


def point_kind(spec: ModelSpec) -> str:
    """What the point forecast on the original scale is, in words."""
    if spec.transform is None:
        return POINT_KIND[None]
    if spec.transform == "log":
        return POINT_KIND["log"]
    return f"median (back-transformed Gaussian forecast of the {spec.transform} series)"


# ---------------------------------------------------------------------- forecast comparison
def spread_band(
    forecasts: Mapping[str, OriginalScaleForecast],
    engines: Mapping[str, str],
    reference_key: str,
    level: float,
) -> pd.DataFrame:
    """Per horizon, the range of point forecasts across independent engines.

    One forecast per engine (the first in order) enters, so wrappers of one engine do not
    widen or narrow the band; the forecast at the reference optimum is not an
    implementation and does not enter. Beside it, the reference forecast's interval width
    at ``level`` and the share of that width that the implementation spread takes.
    """
    chosen: dict[str, OriginalScaleForecast] = {}
    for key, fc in forecasts.items():
        if key != reference_key:
            chosen.setdefault(engines[key], fc)
    stacked = np.vstack([fc.median for fc in chosen.values()])
    ref = forecasts.get(reference_key)
    low, high = stacked.min(axis=0), stacked.max(axis=0)
    table = pd.DataFrame(
        {
            "horizon": np.arange(1, stacked.shape[1] + 1),
            "lowest": low,
            "highest": high,
            "spread": high - low,
        }
    )
    if ref is not None and level in ref.lower:
        width = ref.upper[level] - ref.lower[level]
        table[f"interval_width_{level:g}"] = width
        table["spread_share_of_interval"] = (high - low) / width
    table.attrs["engines"] = sorted(chosen)
    return table.set_index("horizon")


def forecast_findings(
    forecasts: Mapping[str, OriginalScaleForecast],
    transformed: Mapping[str, Forecast],
    estimates: Mapping[str, Estimate],
    reference_key: str,
    tol: Tolerances,
) -> list[Finding]:
    """Point-forecast differences (in forecast standard errors) and interval-width ratios."""
    findings: list[Finding] = []
    ref = transformed.get(reference_key)
    if ref is None:
        return findings
    widest = max(ref.levels)
    ref_width = ref.upper[widest] - ref.lower[widest]
    for key, fc in transformed.items():
        if key == reference_key:
            continue
        in_se = (fc.mean - ref.mean) / ref.se
        worst = int(np.argmax(np.abs(in_se)))
        if abs(in_se[worst]) > tol.forecast_se_fraction:
            findings.append(
                Finding(
                    "forecast-difference",
                    "fail",
                    key,
                    "point_forecast",
                    f"{key}'s point forecast differs from the forecast at the reference "
                    f"optimum by up to {abs(in_se[worst]):.3f} forecast standard errors (step "
                    f"{worst + 1}; tolerance {tol.forecast_se_fraction:g}).",
                    {"max_in_se": float(in_se[worst]), "step": worst + 1},
                )
            )
        ratio = (fc.upper[widest] - fc.lower[widest]) / ref_width
        worst_ratio = float(ratio[int(np.argmax(np.abs(ratio - 1.0)))])
        if abs(worst_ratio - 1.0) > tol.interval_width_rtol:
            e = estimates.get(key)
            explained = ""
            if e is not None and e.ok and e.sigma2_kind != "maximum-likelihood":
                df_part = math.sqrt(fc.sigma2_used / e.sigma2)
                explained = (
                    f" Its intervals use sigma2 defined as {e.sigma2_definition}, which alone "
                    f"makes them {100 * (df_part - 1):+.2f}% wider than at its own "
                    "maximum-likelihood sigma2"
                    + (
                        "; that accounts for the difference."
                        if abs(ratio[0] - df_part) < 0.005
                        else "; the rest comes from its different parameter estimates."
                    )
                )
            findings.append(
                Finding(
                    "interval-difference",
                    "info" if explained.endswith("difference.") else "warn",
                    key,
                    f"interval_{widest:g}",
                    f"{key}'s {widest:g}% intervals are up to {100 * (worst_ratio - 1):+.2f}% "
                    f"the width of those at the reference optimum (tolerance "
                    f"{100 * tol.interval_width_rtol:g}%).{explained}",
                    {"worst_ratio": worst_ratio, "step1_ratio": float(ratio[0])},
                )
            )
    return findings


def residual_checks(
    residuals: Mapping[str, np.ndarray], spec: ModelSpec, n_obs: int
) -> pd.DataFrame:
    """Ljung-Box on each estimator's residuals after the d + mD start-up values.

    Lags: 2m for seasonal data, 10 otherwise, at most n_w / 5 (common practice, no source);
    degrees of freedom h - (p + q + P + Q) (Ljung & Box 1978).
    """
    lost = spec.lost_to_differencing
    n_w = n_obs - lost
    lags = 2 * spec.m if spec.m > 1 else 10
    lags = max(1, min(lags, n_w // 5))
    model_df = spec.p + spec.q + spec.P + spec.Q
    rows = {}
    for key, resid in residuals.items():
        kept = np.asarray(resid, dtype=float)[lost:]
        kept = kept[np.isfinite(kept)]  # a reference forecast may condition on fewer values
        test = ljung_box(kept, lags, model_df)
        rows[key] = {
            "lags": test.lags,
            "df": test.df,
            "statistic": test.statistic,
            "p_value": test.p_value,
            "n": test.n,
        }
    table = pd.DataFrame.from_dict(rows, orient="index")
    table.index.name = "estimator"
    return table
