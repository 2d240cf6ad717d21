"""The canonical convention: parameter names, polynomial algebra and conversions.

The model, for the observed series y after the optional transform::

    w_t = (1-B)^d (1-B^m)^D y_t
    phi(B) Phi(B^m) (w_t - mu) = theta(B) Theta(B^m) e_t,     e_t ~ N(0, sigma2)
    phi(B)   = 1 - ar_lag1 B - ... - ar_lagp B^p
    theta(B) = 1 + ma_lag1 B + ... + ma_lagq B^q

AR terms carry a minus sign and MA terms a plus sign; seasonal factors multiply. ``mu`` is
the mean of the differenced series w. Everything downstream of the estimator adapters sees
parameters only in this convention, as an ordered mapping from canonical name to value.

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
    "trend_scale",
]


def coefficient_names(spec: ModelSpec) -> list[str]:
    """Canonical names of the free coefficients of ``spec`` (sigma2 excluded), in order.

    Regular AR, seasonal AR, regular MA, seasonal MA, then ``mu``. Seasonal lags are written
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

    Returns a new float array; the input is not modified.
    """
    w = np.array(values, dtype=float, copy=True)
    for _ in range(spec.D):
        w = w[spec.m :] - w[: -spec.m]
    for _ in range(spec.d):
        w = np.diff(w)
    return w


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
