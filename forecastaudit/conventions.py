"""The canonical convention: parameter names, polynomial algebra and conversions.

The model, for the observed series y after the optional transform::

    w_t = (1-B)^d (1-B^m)^D y_t
    phi(B) Phi(B^m) (w_t - mu) = theta(B) Theta(B^m) e_t,     e_t ~ N(0, sigma2)
    phi(B)   = 1 - ar_lag1 B - ... - ar_lagp B^p
    theta(B) = 1 + ma_lag1 B + ... + ma_lagq B^q

AR terms carry a minus sign and MA terms a plus sign; seasonal factors multiply. ``mu`` is
the mean of the differenced series w. Everything downstream of the estimator adapters sees
parameters only in this convention, as an ordered mapping from canonical name to value.

Regressors: regression on the levels with ARIMA errors
------------------------------------------------------
With regressor columns ``x_t = (x_t1 .. x_tk)`` (``ModelSpec.regressors``) the model is a
regression of the series on the regressors *in levels*, whose errors follow the seasonal
ARIMA model above::

    y_t = x_t' beta + u_t,     (1-B)^d (1-B^m)^D u_t = mu + ARMA error,

so, with ``Delta = (1-B)^d (1-B^m)^D`` applied to the regressors as to the series,

    phi(B) Phi(B^m) (w_t - mu - (Delta x_t)' beta) = theta(B) Theta(B^m) e_t.

The regressors are differenced with the series; ``beta`` keeps its meaning in levels (the
effect on y of one unit of x, whatever the differencing). The coefficient of column ``c``
is named ``x_<c>``. The errors ``u_t = y_t - x_t' beta`` are an ordinary seasonal ARIMA
process, so the likelihood, the forecasts and the profiles are those of the model without
regressors applied to ``y - X beta`` (:func:`regression_effect`), with the future values of
the regressors added back to the forecasts.

The other form a stack may use, a regression of the *differenced* series on undifferenced
regressors (``w_t = x_t' gamma + ARMA``), is a different model: ``gamma`` is the effect of x
on the change of y, and no conversion of coefficients turns one into the other. A stack
that fits it is recorded as regressing "on differences" and its estimate as a different
model, never converted.

The constant and a drift. ``mu`` stays the mean of the differenced series, separate from
the regressors. A time trend in levels is a regressor like any other: with ``d + D = s`` a
regressor ``t^s`` with coefficient ``b`` differences to the constant ``s! m^D b``
(:func:`trend_scale`), which is ``mu``. So with ``d + D = 1`` a stack's "drift" (a
regression on ``t = 1..n`` with ARIMA errors, ``b`` per period) is ``mu = b`` when d = 1 and
``mu = m b`` when D = 1; the conversion is exact, and the audit shows the two agree. A time
column given as a regressor *and* ``+mean`` are the same term twice and are refused as
collinear (:func:`forecastaudit.series.prepare_regressors` checks the rank of the
differenced regressors with the constant).

The names, factor blocks, polynomials and roots belong to :mod:`forecastaudit.layout`; the
functions of that kind here are thin, stable shorthands for it.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from forecastaudit.layout import lag_polynomial_root_moduli, layout_of
from forecastaudit.spec import ModelSpec

__all__ = [
    "ar_polynomial",
    "box_jenkins_ma_to_canonical",
    "canonical_ma_to_box_jenkins",
    "coefficient_names",
    "df_adjusted_to_ml_sigma2",
    "difference",
    "information_criteria",
    "intercept_to_mean",
    "ma_polynomial",
    "mean_to_intercept",
    "ml_to_df_adjusted_sigma2",
    "parameter_names",
    "polynomial_roots_modulus",
    "regression_effect",
    "trend_scale",
]


def coefficient_names(spec: ModelSpec) -> list[str]:
    """Canonical names of the free coefficients of ``spec`` (sigma2 excluded), in order.

    Regular AR, seasonal AR, regular MA, seasonal MA, then ``mu``, then ``x_<column>`` for
    each regressor. Seasonal lags are written
    as lag numbers: the second seasonal AR term at m=12 is ``sar_lag24``. The parameter
    layout (:func:`forecastaudit.layout.layout_of`) owns the names; this is a list copy.
    """
    return list(layout_of(spec).coefficient_names)


def parameter_names(spec: ModelSpec) -> list[str]:
    """Canonical names of every parameter of ``spec``: the coefficients, then ``sigma2``."""
    return list(layout_of(spec).parameter_names)


def ar_polynomial(spec: ModelSpec, params: Mapping[str, float]) -> np.ndarray:
    """Full AR lag polynomial ``phi(B) Phi(B^m)`` as coefficients of B^0, B^1, ...

    The first entry is 1 and the others carry the minus sign of the convention:
    ``ar_polynomial`` of an AR(1) with ``ar_lag1 = 0.6`` is ``[1, -0.6]``. See
    :meth:`forecastaudit.layout.ParameterLayout.ar_polynomial`.
    """
    return layout_of(spec).ar_polynomial(params)


def ma_polynomial(spec: ModelSpec, params: Mapping[str, float]) -> np.ndarray:
    """Full MA lag polynomial ``theta(B) Theta(B^m)`` as coefficients of B^0, B^1, ..."""
    return layout_of(spec).ma_polynomial(params)


def difference(values: Sequence[float] | np.ndarray, spec: ModelSpec) -> np.ndarray:
    """Apply ``(1-B)^d (1-B^m)^D`` to ``values``: the differenced series w, of length n - d - mD.

    A two-dimensional ``values`` (one column per regressor) is differenced column by column,
    along its first axis. Returns a new float array; the input is not modified.
    """
    w = np.array(values, dtype=float, copy=True)
    for _ in range(spec.D):
        w = w[spec.m :] - w[: -spec.m]
    for _ in range(spec.d):
        w = np.diff(w, axis=0)
    return w


def regression_effect(
    spec: ModelSpec,
    params: Mapping[str, float],
    regressors: np.ndarray | None,
    rows: int | None = None,
) -> np.ndarray:
    """``X beta``: the regressors' contribution to the levels of the (transformed) series.

    Parameters
    ----------
    spec : ModelSpec
    params : mapping
        Canonical parameters; the ``x_<column>`` values are read.
    regressors : numpy.ndarray or None
        Shape ``(n, k)``, columns in ``spec.regressors`` order. None without regressors.
    rows : int, optional
        Length of the zero result when the spec has no regressors.

    Returns
    -------
    numpy.ndarray
        A new array of length n (zeros without regressors), so that ``y - X beta`` are the
        ARIMA errors of the regression.

    Raises
    ------
    ValueError
        When the spec has regressors and none are given, or their number of columns differs.
    """
    names = layout_of(spec).regressor_names
    if not names:
        n = rows if rows is not None else (0 if regressors is None else len(regressors))
        return np.zeros(n)
    if regressors is None:
        raise ValueError(f"{spec} has regressors; pass their values (an (n, k) array).")
    x = np.asarray(regressors, dtype=float)
    if x.ndim != 2 or x.shape[1] != len(names):
        raise ValueError(f"{spec} has {len(names)} regressor(s); got an array of shape {x.shape}.")
    beta = np.array([float(params[name]) for name in names])
    return x @ beta


def polynomial_roots_modulus(poly: np.ndarray) -> np.ndarray:
    """Moduli of the roots of a lag polynomial (coefficients of B^0, B^1, ...).

    Stationarity (AR) and invertibility (MA) need every modulus above 1. A constant
    polynomial has no roots and gives an empty array. Trailing coefficients that are zero
    or negligible (subnormal ones included) are dropped, and the function never raises; see
    :func:`forecastaudit.layout.lag_polynomial_roots`, the one root routine.
    """
    return lag_polynomial_root_moduli(poly)


def intercept_to_mean(intercept: float, spec: ModelSpec, params: Mapping[str, float]) -> float:
    """Convert an intercept to the mean of the differenced series.

    The intercept ``c`` of ``phi(B)Phi(B^m) w_t = c + ...`` gives ``mu = c / (phi(1)Phi(1))``.

    Raises
    ------
    ZeroDivisionError
        When ``phi(1) Phi(1)`` is zero (a unit AR root), where no mean exists.
    """
    at_one = float(np.sum(ar_polynomial(spec, params)))
    if at_one == 0.0:
        raise ZeroDivisionError("phi(1)Phi(1) is zero: the AR part has a unit root, no mean")
    return intercept / at_one


def mean_to_intercept(mu: float, spec: ModelSpec, params: Mapping[str, float]) -> float:
    """Convert ``mu`` to the intercept ``c = mu phi(1) Phi(1)``; see :func:`intercept_to_mean`."""
    return mu * float(np.sum(ar_polynomial(spec, params)))


def trend_scale(spec: ModelSpec) -> float:
    """Factor from the leading coefficient of a degree-(d+D) time trend in levels to ``mu``.

    A regression on ``t^s`` with ``s = d + D`` in levels becomes, after
    ``(1-B)^d (1-B^m)^D``, the constant ``s! m^D`` times its coefficient. So a drift ``b``
    per period with d=1 is ``mu = b``; with d=0, D=1 it is ``mu = m b``.
    """
    return float(math.factorial(spec.n_differences) * spec.m**spec.D)


def box_jenkins_ma_to_canonical(theta: float | Sequence[float]) -> float | np.ndarray:
    """Convert MA coefficients from the Box-Jenkins minus-sign convention to ours.

    Box and Jenkins write ``theta(B) = 1 - theta_1 B - ...``; a published theta of 0.40 is
    ``ma_lag1 = -0.40`` here.
    """
    if np.ndim(theta) == 0:
        return -float(theta)
    return -np.asarray(theta, dtype=float)


def canonical_ma_to_box_jenkins(ma: float | Sequence[float]) -> float | np.ndarray:
    """Inverse of :func:`box_jenkins_ma_to_canonical`."""
    return box_jenkins_ma_to_canonical(ma)


def df_adjusted_to_ml_sigma2(sigma2_adjusted: float, n_used: int, n_subtracted: int) -> float:
    """Convert a degrees-of-freedom-adjusted variance ``SSR / (n - k)`` to the ML ``SSR / n``.

    Parameters
    ----------
    sigma2_adjusted : float
        The reported variance, ``SSR / (n_used - n_subtracted)``.
    n_used : int
        Observations in the sum of squares (n_w for a differenced series).
    n_subtracted : int
        What the estimator subtracted from ``n_used`` in the divisor.
    """
    return sigma2_adjusted * (n_used - n_subtracted) / n_used


def ml_to_df_adjusted_sigma2(sigma2_ml: float, n_used: int, n_subtracted: int) -> float:
    """Inverse of :func:`df_adjusted_to_ml_sigma2`."""
    return sigma2_ml * n_used / (n_used - n_subtracted)


def information_criteria(loglike: float, k: int, n: int) -> dict[str, float]:
    """AIC, AICc and BIC on the canonical definition.

    ``k`` counts every free coefficient plus sigma2 and ``n`` is the length of the
    differenced series: AIC = -2l + 2k, AICc = AIC + 2k(k+1)/(n-k-1), BIC = -2l + k ln n.
    AICc is infinite when ``n - k - 1 <= 0``; all three are NaN when ``n <= 0`` or the
    log-likelihood is not finite.
    """
    if not math.isfinite(loglike) or n <= 0:
        return {"aic": math.nan, "aicc": math.nan, "bic": math.nan}
    aic = -2.0 * loglike + 2.0 * k
    denominator = n - k - 1
    aicc = aic + 2.0 * k * (k + 1) / denominator if denominator > 0 else math.inf
    bic = -2.0 * loglike + k * math.log(n)
    return {"aic": aic, "aicc": aicc, "bic": bic}
