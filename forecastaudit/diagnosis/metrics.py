"""Published accuracy measures and tests, one function per method, each with its source.

All functions take plain arrays and return plain numbers or small results; none modifies
its input.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

__all__ = [
    "ComparisonTest",
    "LjungBox",
    "diebold_mariano",
    "interval_score",
    "ljung_box",
    "mase_scale",
    "point_accuracy",
]


def mase_scale(train: np.ndarray, period: int) -> float:
    """In-sample mean absolute error of the seasonal naive forecast (lag ``period``).

    Hyndman, R.J., Koehler, A.B. (2006), "Another look at measures of forecast accuracy",
    International Journal of Forecasting 22, 679-688: MASE scales errors by the in-sample
    MAE of the naive forecast; for seasonal data the seasonal naive (lag m). With
    ``period`` 1 this is the one-step naive forecast.
    """
    train = np.asarray(train, dtype=float)
    lag = max(int(period), 1)
    if train.size <= lag:
        return math.nan
    return float(np.mean(np.abs(train[lag:] - train[:-lag])))


def point_accuracy(actual: np.ndarray, forecast: np.ndarray, scale: float) -> dict[str, float]:
    """MAE, RMSE, MAPE (percent; NaN unless every actual value is positive) and MASE."""
    actual = np.asarray(actual, dtype=float)
    error = actual - np.asarray(forecast, dtype=float)
    mae = float(np.mean(np.abs(error)))
    out = {
        "mae": mae,
        "rmse": float(np.sqrt(np.mean(error**2))),
        "mape": (
            float(100.0 * np.mean(np.abs(error / actual))) if np.all(actual > 0) else math.nan
        ),
        "mase": mae / scale if scale and math.isfinite(scale) and scale > 0 else math.nan,
    }
    return out


def interval_score(
    actual: np.ndarray, lower: np.ndarray, upper: np.ndarray, level: float
) -> np.ndarray:
    """Interval score of central (1 - alpha) prediction intervals, per observation.

    Gneiting, T., Raftery, A.E. (2007), "Strictly proper scoring rules, prediction, and
    estimation", JASA 102, 359-378, section 6.2:
    ``(u - l) + (2/alpha)(l - y)1{y < l} + (2/alpha)(y - u)1{y > u}``; lower is better.

    Parameters
    ----------
    level : float
        Interval level in percent (95 means alpha = 0.05).
    """
    y = np.asarray(actual, dtype=float)
    lo = np.asarray(lower, dtype=float)
    hi = np.asarray(upper, dtype=float)
    alpha = 1.0 - level / 100.0
    return (hi - lo) + (2.0 / alpha) * (lo - y) * (y < lo) + (2.0 / alpha) * (y - hi) * (y > hi)


@dataclass(frozen=True)
class ComparisonTest:
    """Result of a Diebold-Mariano comparison of two forecasts.

    Attributes
    ----------
    mean_difference : float
        Mean of the loss differential d_t = L(e1_t) - L(e2_t); negative favours the first.
    statistic : float
        The DM statistic (NaN when undefined).
    corrected_statistic : float
        With the Harvey-Leybourne-Newbold small-sample correction.
    p_value : float
        Two-sided, Student t with T - 1 degrees of freedom, for the corrected statistic.
    variance_fallback : bool
        True when the long-run variance estimate was not positive and the lag-0 variance was
        used instead (see :func:`diebold_mariano`).
    note : str
        Why a value is undefined, or which fallback was used.
    """

    mean_difference: float
    statistic: float
    corrected_statistic: float
    p_value: float
    n: int
    horizon: int
    variance_fallback: bool
    note: str


def diebold_mariano(
    errors_1: np.ndarray, errors_2: np.ndarray, horizon: int = 1, loss: str = "squared"
) -> ComparisonTest:
    """Diebold-Mariano test of equal accuracy with the small-sample correction.

    Diebold, F.X., Mariano, R.S. (1995), "Comparing predictive accuracy", JBES 13, 253-263;
    Harvey, D., Leybourne, S., Newbold, P. (1997), "Testing the equality of prediction mean
    squared errors", IJF 13, 281-291::

        d_t = L(e1_t) - L(e2_t)
        V   = [gamma_0 + 2 sum_{k=1}^{h-1} gamma_k] / T
        DM  = mean(d) / sqrt(V)
        DM* = DM sqrt((T + 1 - 2h + h(h-1)/T) / T),   Student t with T - 1 df.

    Defined behaviour where the formulas break down: with fewer than 2h loss differentials
    the lag window covers most of the sample and the correction factor is not positive, so
    the statistics are NaN (note: use more forecast origins); when all d_t are equal
    (gamma_0 = 0)
    the statistics are NaN and the p-value is 1 if the mean difference is 0 (identical
    losses), NaN otherwise; when V <= 0 with h > 1 (possible, since the truncated sum of
    autocovariances is not guaranteed positive) V falls back to gamma_0 / T, the h = 1
    form, and ``variance_fallback`` is set.

    Parameters
    ----------
    errors_1, errors_2 : array
        Forecast errors (actual minus forecast) of the two forecasts, aligned in time.
    horizon : int
        Forecast horizon h: the autocovariances of d up to lag h - 1 enter V.
    loss : {"squared", "absolute"}
    """
    e1 = np.asarray(errors_1, dtype=float)
    e2 = np.asarray(errors_2, dtype=float)
    if e1.shape != e2.shape or e1.ndim != 1:
        raise ValueError("the two error series must be one-dimensional and of equal length")
    if loss == "squared":
        d = e1**2 - e2**2
    elif loss == "absolute":
        d = np.abs(e1) - np.abs(e2)
    else:
        raise ValueError(f"unknown loss {loss!r}; use 'squared' or 'absolute'")
    T, h = d.size, int(horizon)
    mean = float(np.mean(d))
    if T < 2 * h:
        return ComparisonTest(
            mean,
            math.nan,
            math.nan,
            math.nan,
            T,
            h,
            False,
            f"only {T} forecast errors for horizon {h}: at least {2 * h} are needed; "
            "use more forecast origins",
        )
    centred = d - mean
    gamma = [float(np.dot(centred[k:], centred[: T - k]) / T) for k in range(min(h, T))]
    if gamma[0] <= 0.0:
        return ComparisonTest(
            mean,
            math.nan,
            math.nan,
            1.0 if mean == 0.0 else math.nan,
            T,
            h,
            False,
            "the loss differential is constant: the test is undefined",
        )
    variance = (gamma[0] + 2.0 * sum(gamma[1:])) / T
    fallback, note = False, ""
    if variance <= 0.0:
        variance, fallback = gamma[0] / T, True
        note = "long-run variance not positive; lag-0 variance used (h = 1 form)"
    dm = mean / math.sqrt(variance)
    correction = math.sqrt((T + 1 - 2 * h + h * (h - 1) / T) / T)
    corrected = dm * correction
    p = float(2.0 * stats.t.sf(abs(corrected), df=T - 1))
    return ComparisonTest(mean, dm, corrected, p, T, h, fallback, note)


@dataclass(frozen=True)
class LjungBox:
    """Ljung-Box portmanteau test result."""

    statistic: float
    df: int
    p_value: float
    lags: int
    n: int
    autocorrelations: tuple[float, ...]


def ljung_box(residuals: np.ndarray, lags: int, model_df: int = 0) -> LjungBox:
    """Ljung-Box test of residual autocorrelation.

    Ljung, G.M., Box, G.E.P. (1978), "On a measure of lack of fit in time series models",
    Biometrika 65, 297-303: ``Q = n(n+2) sum_{k=1}^{h} r_k^2 / (n-k)``, chi-square with
    ``h - model_df`` degrees of freedom (model_df = p + q + P + Q for ARMA residuals).
    The p-value is NaN when the degrees of freedom are not positive.

    Parameters
    ----------
    residuals : array
        Residuals after the start-up values (the first d + mD) are dropped.
    lags : int
        Number of autocorrelations h.
    model_df : int
        Degrees of freedom used by the fitted ARMA coefficients.
    """
    x = np.asarray(residuals, dtype=float)
    n = x.size
    centred = x - x.mean()
    denom = float(np.dot(centred, centred))
    r = np.array([float(np.dot(centred[k:], centred[: n - k])) / denom for k in range(1, lags + 1)])
    q = float(n * (n + 2) * np.sum(r**2 / (n - np.arange(1, lags + 1))))
    df = lags - int(model_df)
    p = float(stats.chi2.sf(q, df)) if df > 0 else math.nan
    return LjungBox(q, df, p, lags, n, tuple(float(v) for v in r))
