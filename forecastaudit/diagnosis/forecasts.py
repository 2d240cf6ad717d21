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
from forecastaudit.estimate import REFERENCE_KEY, Estimate, Forecast
from forecastaudit.spec import ModelSpec

#: Level of the Ljung-Box test below which a fit's residuals count as autocorrelated
#: (:func:`residual_findings`). A fixed property of the diagnosis, not a tolerance: the kind
#: of a finding never depends on tolerances. 0.001 rather than the customary 0.05 because
#: the test is run once per estimator (and once at the reference optimum) on every audit,
#: and over 2m lags of a few hundred residuals small autocorrelations of no practical
#: consequence already reach 0.05; below 0.001 the model plainly misses structure
#: (common practice, no source).
RESIDUAL_LEVEL = 0.001

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
    with np.errstate(divide="ignore"):  # lambda < 0: a base of 0 is an unbounded value (inf)
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
) -> pd.DataFrame | None:
    """Per horizon, the range of point forecasts across independent engines.

    One forecast per engine (the first in order) enters, so wrappers of one engine do not
    widen or narrow the band; the forecast at the reference optimum is not an
    implementation and does not enter. Beside it, the reference forecast's interval width
    at ``level`` and the share of that width that the implementation spread takes.
    None when no implementation forecast (every chosen estimator failed, was unsupported
    or unavailable): there is no spread to measure, and the audit goes on without it.
    """
    chosen: dict[str, OriginalScaleForecast] = {}
    for key, fc in forecasts.items():
        if key != reference_key:
            chosen.setdefault(engines[key], fc)
    if not chosen:
        return None
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
        r = np.abs(np.asarray(test.autocorrelations, dtype=float))
        largest = int(np.nanargmax(r)) if r.size and np.isfinite(r).any() else -1
        rows[key] = {
            "lags": test.lags,
            "df": test.df,
            "statistic": test.statistic,
            "p_value": test.p_value,
            "n": test.n,
            # The lag with the largest absolute residual autocorrelation, and its value.
            "largest_lag": largest + 1 if largest >= 0 else None,
            "largest_autocorrelation": (
                float(test.autocorrelations[largest]) if largest >= 0 else math.nan
            ),
        }
    table = pd.DataFrame.from_dict(rows, orient="index")
    table.index.name = "estimator"
    return table


def _model_severity(tol: Tolerances) -> str:
    """Findings about the model itself warn, and fail under ``fail_on_model_findings``."""
    return "fail" if tol.fail_on_model_findings else "warn"


def residual_findings(
    table: pd.DataFrame | None, tol: Tolerances, level: float = RESIDUAL_LEVEL
) -> list[Finding]:
    """One ``residual-autocorrelation`` finding per fit whose Ljung-Box p-value is below
    ``level``.

    Reads the table of :func:`residual_checks` (index: estimator key, the reference
    optimum's residuals under ``"reference"``; columns ``lags``, ``df``, ``statistic``,
    ``p_value``, ``n`` and, where present, ``largest_lag`` and
    ``largest_autocorrelation``). Ljung, G.M., Box, G.E.P. (1978), Biometrika 65: Q is
    chi-square with ``lags - (p + q + P + Q)`` degrees of freedom. A row whose p-value is
    not defined (too few lags for the model's coefficients) gives no finding; the table
    shows it.

    Whether a finding is made depends on ``level`` only (a fixed, stated level); the
    tolerances set its severity: ``warn``, or ``fail`` under ``tol.fail_on_model_findings``.
    One finding per fit: the same finding about wrappers of one engine with the same
    estimate is merged afterwards (:func:`forecastaudit.diagnosis.diagnose.merge_wrapper_findings`).
    """
    if table is None or table.empty:
        return []
    findings: list[Finding] = []
    for key, row in table.iterrows():
        p_value = float(row["p_value"])
        if not math.isfinite(p_value) or p_value >= level:
            continue
        key = str(key)
        whose = (
            "the residuals at the reference optimum"
            if key == REFERENCE_KEY
            else f"{key}'s residuals"
        )
        lags, df, n = int(row["lags"]), int(row["df"]), int(row["n"])
        statistic = float(row["statistic"])
        values: dict[str, Any] = {
            "statistic": statistic,
            "p_value": p_value,
            "lags": lags,
            "df": df,
            "n": n,
            "level": level,
        }
        largest = ""
        lag = row.get("largest_lag")
        if lag is not None and not (isinstance(lag, float) and math.isnan(lag)):
            r = float(row["largest_autocorrelation"])
            largest = f" The largest autocorrelation is {r:+.3f}, at lag {int(lag)}."
            values.update({"largest_lag": int(lag), "largest_autocorrelation": r})
        findings.append(
            Finding(
                "residual-autocorrelation",
                _model_severity(tol),
                key,
                "residuals",
                f"The Ljung-Box test (Ljung & Box 1978) rejects uncorrelated residuals for "
                f"{whose}: Q = {statistic:.2f} over lags 1 to {lags} (chi-square with {df} "
                f"degrees of freedom: {lags} lags less the model's p + q + P + Q), "
                f"p = {p_value:.2g}, below the level {level:g}, on {n} residuals after the "
                f"start-up values.{largest} This is a finding about the model, not about "
                "the implementation: the specified orders leave autocorrelation that the "
                "forecasts do not use, and intervals that assume uncorrelated errors may be "
                "miscalibrated. Consider other orders (see the order search) or a transform.",
                values,
            )
        )
    return findings


def positive_interval_findings(
    forecasts: Mapping[str, OriginalScaleForecast],
    series_values: Any,
    spec: ModelSpec,
    tol: Tolerances,
) -> list[Finding]:
    """One ``interval-below-zero`` finding when every observed value is positive and the
    widest interval of some forecast reaches below zero, on the original scale.

    The forecasts are those of :func:`back_transform` (the reference optimum's included,
    when present). Each forecast's widest level is read; the finding names every forecast
    whose lower bound there goes below zero and the first step at which any does. With a
    log or Box-Cox transform the back-transformed bounds are never negative (the inverse
    transforms map onto the positive half-line, the Box-Cox one clipped at zero), so the
    finding cannot arise; it is about the model (Gaussian errors on the original scale),
    not about any implementation. Severity: ``warn``, or ``fail`` under
    ``tol.fail_on_model_findings``.
    """
    observed = np.asarray(series_values, dtype=float)
    observed = observed[np.isfinite(observed)]
    if observed.size == 0 or not np.all(observed > 0):
        return []
    below: dict[str, int] = {}
    lowest: dict[str, float] = {}
    levels: dict[str, float] = {}
    for key, fc in forecasts.items():
        if not fc.lower:
            continue
        widest = max(fc.lower)
        lower = np.asarray(fc.lower[widest], dtype=float)
        negative = np.flatnonzero(lower < 0)
        if negative.size:
            below[key] = int(negative[0]) + 1
            lowest[key] = float(np.min(lower))
            levels[key] = float(widest)
    if not below:
        return []
    first = min(below.values())
    names = sorted(below, key=lambda k: (below[k], k))
    level_text = ", ".join(sorted({f"{v:g}%" for v in levels.values()}))
    suggestion = ModelSpec(spec.order, spec.seasonal, spec.period, mean=spec.mean, transform="log")
    return [
        Finding(
            "interval-below-zero",
            _model_severity(tol),
            None,
            "interval",
            f"Every observed value is positive (smallest {float(observed.min()):.4g}), yet "
            f"the lower bound of the widest ({level_text}) prediction interval of "
            f"{', '.join(names)} is below zero from step {first} (lowest "
            f"{min(lowest.values()):.4g}): the model puts probability on values the series "
            "cannot take. This is a finding about the model (Gaussian errors on the "
            "original scale), not about any implementation. A log or Box-Cox transform "
            f"keeps forecasts and intervals positive: e.g. {suggestion}.",
            {
                "estimators": names,
                "first_step": first,
                "first_step_by_estimator": dict(below),
                "lowest_bound": dict(lowest),
                "level": dict(levels),
                "smallest_observed": float(observed.min()),
                "suggested_model": str(suggestion),
            },
        )
    ]
