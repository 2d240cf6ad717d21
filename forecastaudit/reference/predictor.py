"""The reference model's best linear predictor: forecasts and innovations at given parameters.

The exact conditional Gaussian distribution of future differenced values given the observed
ones (from the same autocovariances and Cholesky factor as the likelihood), integrated back
through the differencing; the innovations come from the same factor.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from forecastaudit.conventions import difference, regression_effect
from forecastaudit.layout import layout_of
from forecastaudit.reference.likelihood import arma_autocovariances
from forecastaudit.spec import ModelSpec

# ---------------------------------------------------------------------- forecasts
#: Forecasts condition on at most this many of the latest differenced observations (the
#: dense conditional covariance grows with its square); see :func:`best_linear_forecast`.
FORECAST_CONDITION_MAX = 3000


@dataclass(frozen=True)
class ReferenceForecast:
    """Forecasts at given parameters from the reference model, on the transformed scale.

    Attributes
    ----------
    mean : numpy.ndarray
        Point forecasts of the (transformed, undifferenced) series for steps 1..h.
    se : numpy.ndarray
        Their standard errors (parameter uncertainty not included).
    lower, upper : dict of float to numpy.ndarray
        Gaussian interval bounds by level in percent.
    residuals : numpy.ndarray
        One-step innovations ``w_t - E(w_t | w_1..w_{t-1})`` of the differenced series,
        preceded by NaN for the d + mD start-up values (full length n).
    conditioned_on : int
        Differenced observations the forecast conditions on.
    """

    mean: np.ndarray
    se: np.ndarray
    lower: dict[float, np.ndarray]
    upper: dict[float, np.ndarray]
    residuals: np.ndarray
    conditioned_on: int
    sigma2: float
    method: str


def _differencing_polynomial(spec: ModelSpec) -> np.ndarray:
    """Coefficients of ``(1-B)^d (1-B^m)^D`` in B^0, B^1, ..."""
    delta = np.array([1.0])
    for _ in range(spec.d):
        delta = np.convolve(delta, [1.0, -1.0])
    seasonal = np.zeros(spec.m + 1)
    seasonal[0], seasonal[-1] = 1.0, -1.0
    for _ in range(spec.D):
        delta = np.convolve(delta, seasonal)
    return delta


def best_linear_forecast(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    params: Mapping[str, float],
    steps: int,
    levels: Sequence[float] = (80.0, 95.0),
    *,
    regressors: np.ndarray | None = None,
    future_regressors: np.ndarray | None = None,
) -> ReferenceForecast:
    """Minimum mean-squared-error forecasts of the reference model at given parameters.

    The differenced series w is Gaussian with mean mu and the ARMA autocovariances
    (Brockwell & Davis, *Introduction to Time Series and Forecasting*, 2nd ed., section 2.5,
    the best linear predictor): with Gamma partitioned into observed (o) and future (f)
    blocks, ``E(w_f | w_o) = mu + Gamma_fo Gamma_oo^{-1} (w_o - mu)`` and
    ``Var(w_f | w_o) = Gamma_ff - Gamma_fo Gamma_oo^{-1} Gamma_of``, exactly for the finite
    sample. The series is then integrated back: ``delta(B) y_t = w_t`` with
    ``delta(B) = (1-B)^d (1-B^m)^D`` gives ``y_f = A w_f + (known past)``, A the lower
    triangular Toeplitz matrix of the coefficients of ``1 / delta(B)``, so the forecast
    variance is ``A Var(w_f | w_o) A'``. The one-step innovations come from the same
    Cholesky factor (``Gamma_oo = L L'``: innovations ``diag(L) L^{-1} (w_o - mu)``).

    At most :data:`FORECAST_CONDITION_MAX` latest differenced observations are conditioned
    on; for longer series the effect of earlier ones decays geometrically for a stationary
    and invertible model, and ``conditioned_on`` says how many were used.

    With regressors (regression on the levels with ARIMA errors) the predictor above is that
    of the errors ``u = y - X beta``, and the forecast of y adds the future regressors'
    effect: ``E(y_f | y_o) = X_f beta + E(u_f | u_o)``, with the same variance, since
    ``X beta`` is known. ``regressors`` (shape ``(n, k)``) and ``future_regressors`` (shape
    ``(steps, k)``; further rows are ignored) are then both required.
    """
    from scipy.linalg import cho_factor, cho_solve, solve_triangular, toeplitz
    from scipy.stats import norm

    y_given = np.asarray(y_transformed, dtype=float).ravel()
    effect = regression_effect(spec, params, regressors, rows=y_given.size)
    future = None if future_regressors is None else np.asarray(future_regressors)[: int(steps)]
    future_effect = regression_effect(spec, params, future, rows=int(steps))
    if future_effect.size != int(steps):
        raise ValueError(
            f"Forecasting {int(steps)} steps needs {int(steps)} rows of future regressor "
            f"values; got {future_effect.size}."
        )
    y = y_given - effect
    w = difference(y, spec)
    cond = w[-FORECAST_CONDITION_MAX:]
    n, h = cond.size, int(steps)
    ar, ma = layout_of(spec).expanded_coefficients(params)
    mu = float(params.get("mu", 0.0))
    sigma2 = float(params["sigma2"])
    gamma = arma_autocovariances(ar, ma, sigma2, nlags=n + h - 1)
    full = toeplitz(gamma[: n + h])
    g_oo, g_fo, g_ff = full[:n, :n], full[n:, :n], full[n:, n:]
    factor = cho_factor(g_oo, lower=True)
    z = cond - mu
    w_mean = mu + g_fo @ cho_solve(factor, z)
    w_var = g_ff - g_fo @ cho_solve(factor, g_fo.T)

    delta = _differencing_polynomial(spec)
    r = delta.size - 1
    path = np.concatenate([y, np.zeros(h)])
    for j in range(h):
        t = y.size + j
        path[t] = w_mean[j] - float(np.dot(delta[1:], path[t - r : t][::-1])) if r else w_mean[j]
    psi = np.zeros(h)
    psi[0] = 1.0
    for j in range(1, h):
        k = min(j, r)
        psi[j] = -float(np.dot(delta[1 : k + 1], psi[j - k : j][::-1]))
    a = toeplitz(psi, np.zeros(h))
    variance = np.diag(a @ w_var @ a.T).copy()
    se = np.sqrt(np.maximum(variance, 0.0))
    mean = path[y.size :] + future_effect
    lower, upper = {}, {}
    for level in levels:
        zq = float(norm.ppf(0.5 + float(level) / 200.0))
        lower[float(level)], upper[float(level)] = mean - zq * se, mean + zq * se

    chol = factor[0]
    innovations = np.diag(chol) * solve_triangular(chol, z, lower=True)
    residuals = np.full(y.size, np.nan)
    residuals[y.size - n :] = innovations
    return ReferenceForecast(
        mean=mean,
        se=se,
        lower=lower,
        upper=upper,
        residuals=residuals,
        conditioned_on=n,
        sigma2=sigma2,
        method=(
            "best linear predictor of the differenced series from the exact ARMA covariance, "
            "integrated back; Gaussian intervals at the given sigma2 (parameter uncertainty "
            "not included)"
        ),
    )
