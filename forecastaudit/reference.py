"""The reference likelihood: forecastaudit's own exact Gaussian likelihood and fit.

Every estimate, whichever library produced it, is re-scored here on one definition: the
exact Gaussian log-likelihood of the differenced series ``w = (1-B)^d (1-B^m)^D y`` under the
canonical model (see :mod:`forecastaudit.conventions`)::

    phi(B) Phi(B^m) (w_t - mu) = theta(B) Theta(B^m) e_t,     e_t ~ N(0, sigma2),

with the ``2 pi`` constant included and ``n_w = n - d - mD`` observations. The code is
written from the definition and the published algorithms cited in each function; no
estimator's filter is called. One published method per function:

* :func:`arma_autocovariances` -- Brockwell & Davis, the "third method".
* :func:`gaussian_loglike` -- dense Cholesky of the Toeplitz covariance, or the banded
  covariance after Ansley's (1979) AR transformation, both exact.
* :func:`log_jacobian` -- the change of variables from the transformed to the original scale.
* :func:`pacf_to_ar` / :func:`ar_to_pacf` -- Durbin-Levinson recursion and its inverse, the
  partial-autocorrelation parameterisation of Barndorff-Nielsen & Schou (1973), Jones
  (1980) and Monahan (1984).
* :func:`fit_reference` -- maximum of the profiled likelihood from several starts, one of
  them our own conditional-least-squares fit; standard errors from a central-difference
  Hessian.
* :func:`profile_line` / :func:`profile_grid` -- the likelihood along a line and on a grid.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Literal

import numpy as np
import pandas as pd
from scipy import optimize
from scipy.linalg import lapack
from scipy.signal import lfilter, lfiltic

from .conventions import (
    ar_polynomial,
    coefficient_names,
    difference,
    ma_polynomial,
    parameter_names,
)
from .spec import ModelSpec

__all__ = [
    "CLS_LABEL",
    "DENSE_THRESHOLD",
    "FORECAST_CONDITION_MAX",
    "ReferenceFit",
    "ReferenceForecast",
    "ReferenceLikelihood",
    "StartResult",
    "ar_to_pacf",
    "arma_autocovariances",
    "best_linear_forecast",
    "conditional_least_squares",
    "evaluate",
    "fit_reference",
    "from_unconstrained",
    "gaussian_loglike",
    "log_jacobian",
    "pacf_to_ar",
    "pacf_to_unconstrained",
    "profile_grid",
    "profile_line",
    "pull_inside",
    "to_unconstrained",
    "unconstrained_to_pacf",
]

Method = Literal["auto", "dense", "banded"]

#: ``method="auto"`` uses the dense Toeplitz Cholesky for differenced series of at most this
#: many observations, and always when a series is too short to band (``n_w <= p + max(p-1,
#: q)``); the banded path otherwise. Measured with ``benchmarks/bench_reference.py`` and
#: direct timings of :func:`gaussian_loglike` (numpy 2.4, scipy 1.17, one BLAS thread;
#: ARIMA(1,1,1)x(0,1,1)12, ARIMA(2,0,1), ARIMA(1,0,1)x(1,0,0)12): the banded path was as
#: fast or faster at every length that can be banded, from n_w = 15 up (about 50 against 70
#: microseconds at n_w = 15-60, 100 against 170 at 130), so no length beyond the structural
#: limit goes to the dense path. It stays as the second, independent exact path (tests
#: force it with ``method="dense"``).
DENSE_THRESHOLD = 0

_LOG_2PI = math.log(2.0 * math.pi)


# ====================================================================== autocovariances
def arma_autocovariances(
    ar: Sequence[float] | np.ndarray,
    ma: Sequence[float] | np.ndarray,
    sigma2: float = 1.0,
    nlags: int | None = None,
) -> np.ndarray:
    """Autocovariances of a causal ARMA process by the Brockwell-Davis third method.

    The process is ``w_t - a_1 w_{t-1} - ... - a_p w_{t-p} = e_t + b_1 e_{t-1} + ... +
    b_q e_{t-q}`` with white noise variance ``sigma2``. With ``b_0 = 1`` and the causal
    weights ``psi_j`` (``w_t = sum_j psi_j e_{t-j}``), the autocovariances satisfy

        gamma_k - sum_i a_i gamma_{|k-i|} = sigma2 sum_{j=k}^{q} b_j psi_{j-k}   (k <= q)

    and the homogeneous equation for ``k > q``. The first ``p + 1`` equations are solved as a
    linear system for ``gamma_0 .. gamma_p``; the rest follow by the recursion (done with
    ``scipy.signal.lfilter``, not a Python loop).

    Reference: Brockwell, P.J., Davis, R.A. (1991), *Time Series: Theory and Methods*, 2nd
    ed., section 3.3, the third method (eqs. 3.3.8-3.3.9; equation numbers recalled from
    memory).

    Parameters
    ----------
    ar : array_like
        AR coefficients ``a_1 .. a_p`` of the expanded polynomial, with the sign of
        ``phi(B) = 1 - a_1 B - ...`` (``ar = -ar_polynomial(...)[1:]``). A multiplicative
        seasonal polynomial is passed expanded (degree ``p + mP``).
    ma : array_like
        MA coefficients ``b_1 .. b_q`` of the expanded polynomial ``1 + b_1 B + ...``
        (``ma = ma_polynomial(...)[1:]``).
    sigma2 : float
        Innovation variance.
    nlags : int, optional
        Highest lag returned; default ``max(p, q)``.

    Returns
    -------
    numpy.ndarray
        ``gamma_0 .. gamma_nlags``. The values are meaningless for a non-stationary AR part
        (the function does not check; :func:`gaussian_loglike` does).
    """
    a = np.asarray(ar, dtype=float).ravel()
    b = np.asarray(ma, dtype=float).ravel()
    if nlags is None:
        nlags = max(a.size, b.size)
    ar_poly = np.concatenate(([1.0], -a))
    ma_poly = np.concatenate(([1.0], b))
    rhs = _ma_cross_moments(ar_poly, ma_poly)  # sum_{j>=k} b_j psi_{j-k}, k = 0..q
    return sigma2 * _autocovariances_from(a, ar_poly, rhs, nlags)


def _autocovariances_from(
    a: np.ndarray, ar_poly: np.ndarray, rhs: np.ndarray, nlags: int
) -> np.ndarray:
    """Unit-variance ``gamma_0 .. gamma_nlags`` from the right-hand sides ``r_0 .. r_q``."""
    p = a.size
    size = max(nlags, p) + 1
    full_rhs = np.zeros(size)
    full_rhs[: min(rhs.size, size)] = rhs[:size]
    if p == 0:
        return full_rhs[: nlags + 1]
    head = np.linalg.solve(_yule_walker_matrix(a), full_rhs[: p + 1])
    if size == p + 1:
        return head[: nlags + 1]
    zi = lfiltic([1.0], ar_poly, head[p:0:-1])
    tail, _ = lfilter([1.0], ar_poly, full_rhs[p + 1 :], zi=zi)
    return np.concatenate((head, tail))[: nlags + 1]


def _ma_cross_moments(ar_poly: np.ndarray, ma_poly: np.ndarray) -> np.ndarray:
    """``r_k = sum_{j=k}^{q} b_j psi_{j-k}`` for ``k = 0..q`` (unit innovation variance).

    ``r_k`` is ``cov(w_t, theta(B) e_{t+k})``: the right-hand side of the Brockwell-Davis
    equations and, in Ansley's banded covariance, the cross term between an untransformed
    observation and a transformed one ``k`` steps later.
    """
    q = ma_poly.size - 1
    impulse = np.zeros(q + 1)
    impulse[0] = 1.0
    psi = lfilter(ma_poly, ar_poly, impulse)
    return np.correlate(ma_poly, psi, "full")[q:]


@lru_cache(maxsize=64)
def _yule_walker_indices(p: int) -> tuple[np.ndarray, np.ndarray]:
    """Index arrays into ``[0, a_1, ..., a_p]`` giving the two parts of the system matrix."""
    k = np.arange(p + 1)[:, None]
    col = np.arange(p + 1)[None, :]
    lower = k - col  # a_{k-l} multiplies gamma_l for 1 <= k - l <= p
    lower = np.where((lower >= 1) & (lower <= p), lower, 0)
    upper = k + col  # a_{k+l} multiplies gamma_l for l >= 1, k + l <= p
    upper = np.where((col >= 1) & (upper <= p), upper, 0)
    return lower, upper


def _yule_walker_matrix(a: np.ndarray) -> np.ndarray:
    """Matrix M with ``(M gamma)_k = gamma_k - sum_i a_i gamma_{|k-i|}``, k = 0..p."""
    p = a.size
    lower, upper = _yule_walker_indices(p)
    padded = np.concatenate(([0.0], a))
    return np.eye(p + 1) - padded[lower] - padded[upper]


# ====================================================================== likelihood
@dataclass(frozen=True)
class ReferenceLikelihood:
    """The reference log-likelihood of one parameter value, from one evaluation.

    Attributes
    ----------
    loglike : float
        Exact Gaussian log-likelihood of the differenced series at ``sigma2`` (2 pi
        included); ``-inf`` when the AR part is not stationary, NaN when ``sigma2`` is not a
        positive finite number.
    profiled_loglike : float
        The same with sigma2 concentrated out, i.e. evaluated at ``sigma2_hat``.
    sigma2_hat : float
        ``S / n``: the maximum-likelihood innovation variance at the other parameters.
    sigma2 : float
        The innovation variance ``loglike`` was evaluated at.
    n : int
        Observations in the likelihood (``n_w``).
    method : str
        ``"dense"`` (Toeplitz Cholesky), ``"banded"`` (Ansley transformation),
        ``"non-stationary"`` (AR part outside the stationary region, nothing evaluated),
        ``"singular"`` (covariance matrix not numerically positive definite) or
        ``"invalid"`` (a non-finite coefficient or mean; both values NaN).
    stationary : bool
        Whether the AR part is stationary.
    invertible : bool or None
        Whether the MA part is invertible; None when not checked (only
        :func:`gaussian_loglike` with expanded polynomials leaves it unchecked).
    loglike_original_scale, profiled_loglike_original_scale : float
        With a log or Box-Cox transform in the spec, the two values on the original scale
        (the log Jacobian added, see :func:`log_jacobian`); equal to the transformed-scale
        values without a transform; NaN when unknown.
    """

    loglike: float
    profiled_loglike: float
    sigma2_hat: float
    sigma2: float
    n: int
    method: str
    stationary: bool = True
    invertible: bool | None = None
    loglike_original_scale: float = math.nan
    profiled_loglike_original_scale: float = math.nan


def gaussian_loglike(
    w: Sequence[float] | np.ndarray,
    ar: Sequence[float] | np.ndarray = (),
    ma: Sequence[float] | np.ndarray = (),
    mu: float = 0.0,
    sigma2: float = 1.0,
    *,
    method: Method = "auto",
    check_stationarity: bool = True,
) -> ReferenceLikelihood:
    """Exact Gaussian log-likelihood of a stationary ARMA series, and its profiled value.

    With ``x = w - mu`` and covariance ``sigma2 R`` the value is

        l = -(n/2) log(2 pi sigma2) - (1/2) log det R - x' R^{-1} x / (2 sigma2),

    and, with ``S = x' R^{-1} x`` and ``sigma2_hat = S / n``, the profiled value
    ``-(n/2)(log(2 pi sigma2_hat) + 1) - (1/2) log det R``. Both come from one factorisation.

    Two exact paths:

    * ``"dense"``: Cholesky factor of the n x n Toeplitz matrix of the autocovariances
      (:func:`arma_autocovariances`), O(n^3). The textbook definition, e.g. Brockwell, P.J.,
      Davis, R.A. (2016), *Introduction to Time Series and Forecasting*, 3rd ed., section
      5.2 (the Gaussian likelihood; section recalled from memory).
    * ``"banded"``: Ansley, C.F. (1979), "An algorithm for the exact likelihood of a mixed
      autoregressive-moving average process", Biometrika 66, 59-65. Keep ``x_1 .. x_p`` and
      replace the rest by ``z_t = phi(B) x_t = theta(B) e_t`` (a unit-determinant
      transformation). The covariance of ``(x_1..x_p, z_{p+1}..z_n)`` is banded with
      half-bandwidth ``max(p - 1, q)``: autocovariances in the leading p x p block, the
      cross moments ``sum_{j>=k} b_j psi_{j-k}`` between the blocks, and the MA(q)
      autocovariances below. LAPACK's banded Cholesky (``dpbtrf``, the routine behind
      ``scipy.linalg.cholesky_banded``) and banded triangular solve (``dtbtrs``) then give
      the exact value in O(n (p+q)^2) with no Python loop over time.

    Parameters
    ----------
    w : array_like
        The differenced series (``conventions.difference(y, spec)``).
    ar, ma : array_like
        Coefficients of the expanded AR and MA polynomials: ``phi(B)Phi(B^m) = 1 - ar_1 B -
        ...`` and ``theta(B)Theta(B^m) = 1 + ma_1 B + ...``.
    mu : float
        Mean of ``w``.
    sigma2 : float
        Innovation variance at which ``loglike`` is evaluated (the profiled value does not
        depend on it).
    method : {"auto", "dense", "banded"}
        ``"auto"`` uses the dense path up to :data:`DENSE_THRESHOLD` observations and when
        the series is too short to band, the banded path otherwise. ``"banded"`` on a series
        too short to band falls back to the dense path (``method`` in the result says so).
    check_stationarity : bool
        Check the AR part by the step-down recursion (:func:`ar_to_pacf`) and return
        ``-inf`` when it is not stationary. Pass False only when the caller has checked (as
        :func:`evaluate` does, factor by factor).

    Returns
    -------
    ReferenceLikelihood

    Notes
    -----
    Outside the stationary region the Gaussian likelihood of a stationary process does not
    exist; both values are then ``-inf`` (method ``"non-stationary"``), never an exception.
    A non-invertible MA part is evaluated as it stands: the covariance matrix stays positive
    definite for finite n, and the profiled value equals that of the invertible
    representation (same autocorrelations; only the scale of sigma2 differs). A covariance
    matrix that is not numerically positive definite (an MA root on the unit circle with a
    long series, or AR roots extremely close to it) gives ``-inf`` with method
    ``"singular"``.
    """
    x = np.asarray(w, dtype=float).ravel()
    n = x.size
    if n < 1:
        raise ValueError(
            "gaussian_loglike needs at least one observation of the differenced series."
        )
    a = np.trim_zeros(np.asarray(ar, dtype=float).ravel(), "b")
    b = np.trim_zeros(np.asarray(ma, dtype=float).ravel(), "b")
    sigma2 = float(sigma2)
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b)) and math.isfinite(float(mu))):
        return _failed(n, sigma2, "invalid", stationary=False, value=math.nan)
    if check_stationarity and not _is_stationary(a):
        return _failed(n, sigma2, "non-stationary", stationary=False)
    p, q = a.size, b.size
    u = max(p - 1, q, 0)
    if method == "auto":
        method = "dense" if n <= DENSE_THRESHOLD or n <= p + u else "banded"
    elif method == "banded" and n <= p + u:
        method = "dense"  # too short to band: every observation sits in the leading block
    elif method not in ("dense", "banded"):
        raise ValueError(f"method must be 'auto', 'dense' or 'banded', got {method!r}.")
    x = x - float(mu)
    if method == "dense":
        logdet, ssq = _dense_quadratic_form(x, a, b)
    else:
        logdet, ssq = _banded_quadratic_form(x, a, b, u)
    if not (math.isfinite(logdet) and math.isfinite(ssq)):
        return _failed(n, sigma2, "singular", stationary=True)
    sigma2_hat = ssq / n
    if sigma2_hat > 0.0:
        profiled = -0.5 * (n * (_LOG_2PI + math.log(sigma2_hat) + 1.0) + logdet)
    else:
        profiled = math.inf  # a perfect fit: only possible for degenerate data
    if sigma2 > 0.0 and math.isfinite(sigma2):
        loglike = -0.5 * (n * (_LOG_2PI + math.log(sigma2)) + logdet + ssq / sigma2)
    else:
        loglike = math.nan
    return ReferenceLikelihood(
        loglike=loglike,
        profiled_loglike=profiled,
        sigma2_hat=sigma2_hat,
        sigma2=sigma2,
        n=n,
        method=method,
    )


def _failed(
    n: int, sigma2: float, method: str, *, stationary: bool, value: float = -math.inf
) -> ReferenceLikelihood:
    return ReferenceLikelihood(
        loglike=value,
        profiled_loglike=value,
        sigma2_hat=math.nan,
        sigma2=sigma2,
        n=n,
        method=method,
        stationary=stationary,
    )


def _dense_quadratic_form(x: np.ndarray, a: np.ndarray, b: np.ndarray) -> tuple[float, float]:
    """``log det R`` and ``x' R^{-1} x`` with R the Toeplitz autocorrelation-scale matrix."""
    n = x.size
    gamma = arma_autocovariances(a, b, 1.0, n - 1)
    index = np.abs(np.arange(n)[:, None] - np.arange(n)[None, :])
    chol, info = lapack.dpotrf(gamma[index], lower=1, clean=0, overwrite_a=1)
    if info != 0:
        return math.nan, math.nan
    v, info = lapack.dtrtrs(chol, x, lower=1)
    if info != 0:
        return math.nan, math.nan
    return 2.0 * float(np.sum(np.log(np.diagonal(chol)))), float(v @ v)


@lru_cache(maxsize=64)
def _band_layout(p: int, u: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Which entries of the first ``p + u`` band columns hold which kind of covariance.

    Upper band storage puts ``R[j-k, j]`` at ``ab[u-k, j]``. Returns the offset ``k`` of each
    entry and two masks: leading-block entries (``j < p``: autocovariances) and cross
    entries (``j - k < p <= j``: MA cross moments). The rest are MA(q) autocovariances.
    """
    offsets = (u - np.arange(u + 1))[:, None] * np.ones((1, p + u), dtype=int)
    columns = np.arange(p + u)[None, :] * np.ones((u + 1, 1), dtype=int)
    leading = columns < p
    cross = (~leading) & (columns - offsets < p)
    return offsets, leading, cross


def _banded_quadratic_form(
    x: np.ndarray, a: np.ndarray, b: np.ndarray, u: int
) -> tuple[float, float]:
    """Ansley (1979): ``log det`` and quadratic form through the banded transformed covariance."""
    n, p, q = x.size, a.size, b.size
    ar_poly = np.concatenate(([1.0], -a))
    ma_poly = np.concatenate(([1.0], b))
    ma_acov = np.zeros(u + 1)
    ma_acov[: q + 1] = np.correlate(ma_poly, ma_poly, "full")[q:]
    ab = np.empty((u + 1, n))
    ab[:] = ma_acov[::-1, None]
    if p > 0:
        cross = np.zeros(u + 1)
        cross[: q + 1] = _ma_cross_moments(ar_poly, ma_poly)
        gamma = np.zeros(u + 1)
        gamma[:p] = _autocovariances_from(a, ar_poly, cross[: q + 1], p)[:p]
        offsets, leading, is_cross = _band_layout(p, u)
        ab[:, : p + u] = np.where(
            leading, gamma[offsets], np.where(is_cross, cross[offsets], ma_acov[offsets])
        )
        z = np.empty(n)
        z[:p] = x[:p]
        z[p:] = np.convolve(x, ar_poly, "valid")
    else:
        z = x
    chol, info = lapack.dpbtrf(ab, lower=0, overwrite_ab=1)
    if info != 0:
        return math.nan, math.nan
    v, info = lapack.dtbtrs(chol, z[:, None], uplo="U", trans="T")
    if info != 0:
        return math.nan, math.nan
    v = v[:, 0]
    return 2.0 * float(np.sum(np.log(chol[u]))), float(v @ v)


# ====================================================================== Jacobian
def log_jacobian(y: Sequence[float] | np.ndarray, lam: float, n_lost: int = 0) -> float:
    """Log Jacobian of the Box-Cox (or log) transform over the observations in the likelihood.

    For ``y^(lam) = (y^lam - 1)/lam`` (``log y`` at ``lam = 0``) the derivative is
    ``y^(lam - 1)``, so the original-scale log-likelihood is the transformed-scale one plus
    ``(lam - 1) * sum(log y_t)`` (Box, G.E.P., Cox, D.R. (1964), "An analysis of
    transformations", JRSS B 26, section 3; a change-of-variables closed form).

    Which observations: the first ``n_lost = d + mD`` values are dropped and the sum runs
    over the last ``n_w`` values of y. The reference likelihood is the density of ``w``,
    which, given the ``d + mD`` start-up values, is the density of the last ``n_w``
    transformed observations (differencing is a unit-Jacobian map from them to ``w``). The
    change of variables to the original scale therefore involves exactly those ``n_w``
    observations, and models with different transforms but the same differencing compare
    on one scale.

    Parameters
    ----------
    y : array_like
        The series on its original scale (strictly positive).
    lam : float
        Box-Cox lambda; 0 for the log transform.
    n_lost : int
        Leading observations used up by differencing (``spec.lost_to_differencing``).

    Returns
    -------
    float
        ``(lam - 1) * sum(log y[n_lost:])``; NaN when a value there is not positive.
    """
    values = np.asarray(y, dtype=float).ravel()[int(n_lost) :]
    if np.any(values <= 0):
        return math.nan
    return (float(lam) - 1.0) * float(np.sum(np.log(values)))


def _log_original_from_transformed(y_transformed: np.ndarray, lam: float) -> np.ndarray:
    """``log y`` recovered from the transformed values: the inverse Box-Cox (or log)."""
    if lam == 0.0:
        return y_transformed
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.log1p(lam * y_transformed) / lam


# ====================================================================== PACF transforms
def pacf_to_ar(pacf: Sequence[float] | np.ndarray) -> np.ndarray:
    """AR coefficients from partial autocorrelations by the Durbin-Levinson recursion.

    ``a^(k)_k = r_k`` and ``a^(k)_j = a^(k-1)_j - r_k a^(k-1)_{k-j}``, j < k. Every vector
    of partial autocorrelations in (-1, 1)^p gives a stationary ``1 - a_1 B - ... - a_p
    B^p`` and every stationary polynomial arises once (Barndorff-Nielsen, O., Schou, G.
    (1973), J. Multivariate Analysis 3; Jones, R.H. (1980), Technometrics 22, 389-395;
    Monahan, J.F. (1984), Biometrika 71, 403-404).

    Parameters
    ----------
    pacf : array_like
        Partial autocorrelations ``r_1 .. r_p``.

    Returns
    -------
    numpy.ndarray
        ``a_1 .. a_p`` in the convention ``phi(B) = 1 - a_1 B - ...``.
    """
    r = np.asarray(pacf, dtype=float).ravel()
    a = np.empty(0)
    for value in r:
        a = np.concatenate((a - value * a[::-1], [value]))
    return a


def ar_to_pacf(ar: Sequence[float] | np.ndarray) -> np.ndarray:
    """Partial autocorrelations of ``1 - a_1 B - ... - a_p B^p`` (inverse Durbin-Levinson).

    The step-down recursion ``r_k = a^(k)_k``, ``a^(k-1)_j = (a^(k)_j + r_k a^(k)_{k-j}) /
    (1 - r_k^2)``; the polynomial is stationary exactly when every ``|r_k| < 1`` (references
    as in :func:`pacf_to_ar`; the step-down form is the Schur-Cohn test).

    Returns
    -------
    numpy.ndarray
        ``r_1 .. r_p``. When the recursion meets ``|r_k| >= 1`` (not stationary) the
        entries it could not reach are NaN and the reached ones are kept.
    """
    a = np.asarray(ar, dtype=float).ravel().copy()
    p = a.size
    r = np.full(p, np.nan)
    for k in range(p, 0, -1):
        value = a[-1]
        r[k - 1] = value
        if not abs(value) < 1.0:
            break
        a = (a[:-1] + value * a[-2::-1]) / (1.0 - value * value)
    return r


def _is_stationary(ar: np.ndarray) -> bool:
    """Step-down (Schur-Cohn) test; plain Python floats for the short factors of a spec."""
    if ar.size > 8:
        return bool(np.all(np.abs(ar_to_pacf(ar)) < 1.0))  # NaN compares False
    a = [float(v) for v in ar]
    while a:
        value = a[-1]
        if not abs(value) < 1.0:  # also catches NaN
            return False
        scale = 1.0 - value * value
        a = [(a[j] + value * a[-2 - j]) / scale for j in range(len(a) - 1)]
    return True


def unconstrained_to_pacf(x: Sequence[float] | np.ndarray) -> np.ndarray:
    """Map reals onto (-1, 1) by ``x / sqrt(1 + x^2)``.

    Any smooth increasing bijection works (Jones 1980 used a logistic form); this one keeps
    floating-point precision further towards +-1 than ``tanh`` (``tanh(20)`` is already 1.0).
    """
    x = np.asarray(x, dtype=float)
    return x / np.sqrt(1.0 + x * x)


def pacf_to_unconstrained(r: Sequence[float] | np.ndarray) -> np.ndarray:
    """Inverse of :func:`unconstrained_to_pacf`: ``r / sqrt(1 - r^2)`` for ``|r| < 1``."""
    r = np.asarray(r, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return r / np.sqrt(1.0 - r * r)


def _factors(spec: ModelSpec) -> list[tuple[list[str], float]]:
    """The four lag-polynomial factors: their canonical names and the sign turning them into
    AR form (``1 - sum c_i B^i``): +1 for AR factors, -1 for MA ones (our MA sign is plus)."""
    m = spec.m
    return [
        ([f"ar_lag{i}" for i in range(1, spec.p + 1)], 1.0),
        ([f"sar_lag{i * m}" for i in range(1, spec.P + 1)], 1.0),
        ([f"ma_lag{j}" for j in range(1, spec.q + 1)], -1.0),
        ([f"sma_lag{j * m}" for j in range(1, spec.Q + 1)], -1.0),
    ]


def to_unconstrained(spec: ModelSpec, params: Mapping[str, float]) -> np.ndarray:
    """Unconstrained reals for the coefficients of ``spec``, in ``coefficient_names`` order.

    Each factor (regular AR, seasonal AR, regular MA, seasonal MA) maps separately to its
    partial autocorrelations (:func:`ar_to_pacf`; an MA factor ``1 + b_1 B + ...`` is
    invertible exactly when the AR-form coefficients ``-b`` are stationary) and then to
    reals (:func:`pacf_to_unconstrained`). ``mu`` passes through unchanged.

    Returns
    -------
    numpy.ndarray
        Non-finite entries appear for a factor outside the stationary or invertible region;
        use :func:`pull_inside` first.
    """
    out: list[float] = []
    for names, sign in _factors(spec):
        if names:
            coefs = sign * np.array([float(params[name]) for name in names])
            out.extend(pacf_to_unconstrained(ar_to_pacf(coefs)).tolist())
    if spec.mean:
        out.append(float(params.get("mu", 0.0)))
    return np.array(out, dtype=float)


def from_unconstrained(spec: ModelSpec, x: Sequence[float] | np.ndarray) -> dict[str, float]:
    """Inverse of :func:`to_unconstrained`: canonical coefficients (sigma2 excluded)."""
    values = np.asarray(x, dtype=float).ravel()
    out: dict[str, float] = {}
    position = 0
    for names, sign in _factors(spec):
        if names:
            block = values[position : position + len(names)]
            coefs = sign * pacf_to_ar(unconstrained_to_pacf(block))
            out.update(zip(names, coefs.tolist(), strict=True))
            position += len(names)
    if spec.mean:
        out["mu"] = float(values[position])
    return {name: out[name] for name in coefficient_names(spec)}


def pull_inside(
    spec: ModelSpec, params: Mapping[str, float], margin: float = 1e-3
) -> tuple[dict[str, float], bool]:
    """Move each factor into the stationary / invertible region, just inside its boundary.

    A factor whose roots (in ``B``, or in ``B^m`` for a seasonal factor) all lie at modulus
    at least ``1 / (1 - margin)`` is left alone. Otherwise roots inside the unit circle are
    reflected to ``1 / conj(root)`` (for an MA factor this is the invertible representation
    with the same autocorrelations) and roots still closer than ``1 / (1 - margin)`` are
    pushed out radially to that modulus. Used on starting values only.

    Returns
    -------
    (dict, bool)
        The coefficients (sigma2 and mu copied when present) and whether anything moved.
    """
    out = {name: float(value) for name, value in params.items()}
    moved = False
    limit = 1.0 / (1.0 - margin)
    for names, sign in _factors(spec):
        if not names:
            continue
        coefs = sign * np.array([float(params[name]) for name in names])
        pacf = ar_to_pacf(coefs)
        if np.all(np.abs(pacf) < 1.0 - margin):
            continue
        poly = np.trim_zeros(np.concatenate(([1.0], -coefs)), "b")
        roots = np.roots(poly[::-1])
        roots = np.where(np.abs(roots) < 1.0, 1.0 / np.conj(roots), roots)
        modulus = np.abs(roots)
        roots = np.where(modulus < limit, roots * (limit / modulus), roots)
        fixed = np.real(np.poly(1.0 / roots))  # prod (1 - B / root), ascending in B
        new = np.zeros(len(names))
        new[: fixed.size - 1] = -fixed[1:]
        if np.array_equal(new, coefs):
            continue  # near the edge by its partial autocorrelations, but no root to move
        out.update(zip(names, (sign * new).tolist(), strict=True))
        moved = True
    return out, moved


# ====================================================================== parameter level
def _expanded(spec: ModelSpec, params: Mapping[str, float]) -> tuple[np.ndarray, np.ndarray]:
    return -ar_polynomial(spec, params)[1:], ma_polynomial(spec, params)[1:]


def _factor_checks(spec: ModelSpec, params: Mapping[str, float]) -> tuple[bool, bool]:
    """(stationary, invertible), checked factor by factor (cheaper than expanded)."""
    stationary = invertible = True
    for names, sign in _factors(spec):
        if names:
            coefs = sign * np.array([float(params[name]) for name in names])
            ok = _is_stationary(coefs)
            if sign > 0:
                stationary = stationary and ok
            else:
                invertible = invertible and ok
    return stationary, invertible


def evaluate(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    params: Mapping[str, float],
    *,
    method: Method = "auto",
) -> ReferenceLikelihood:
    """The reference log-likelihood of canonical parameters, at their sigma2 and profiled.

    Differences the series by the spec, expands the seasonal polynomials and calls
    :func:`gaussian_loglike`. With a log or Box-Cox transform in the spec the original-scale
    values are filled in by adding :func:`log_jacobian` over the last ``n_w`` observations
    (``log y`` is recovered from ``y_transformed``).

    Parameters
    ----------
    y_transformed : array_like
        The series after the spec's transform, before differencing.
    spec : ModelSpec
        The model.
    params : mapping
        Canonical parameters (``coefficient_names(spec)`` and ``sigma2``). ``mu`` is read
        only when ``spec.mean`` is set; otherwise the mean of w is 0.
    method : {"auto", "dense", "banded"}
        See :func:`gaussian_loglike`.

    Returns
    -------
    ReferenceLikelihood
        ``loglike`` is ``-inf`` outside the stationary region, NaN when sigma2 is not a
        positive number, and both values are NaN (method ``"invalid"``) when a coefficient
        is not finite; ``invertible`` says whether the MA factors are invertible.

    Raises
    ------
    ValueError
        When a parameter of the spec, sigma2 included, is missing from ``params``, or the
        differenced series is empty.
    """
    missing = [name for name in parameter_names(spec) if name not in params]
    if missing:
        raise ValueError(
            f"Parameters {missing} of {spec} are missing; pass every name of "
            f"parameter_names(spec): {parameter_names(spec)}."
        )
    y = np.asarray(y_transformed, dtype=float).ravel()
    w = difference(y, spec)
    sigma2 = float(params["sigma2"])
    coefficients = [float(params[name]) for name in coefficient_names(spec)]
    finite = all(math.isfinite(value) for value in coefficients)
    stationary, invertible = _factor_checks(spec, params) if finite else (False, False)
    if not finite:
        result = _failed(w.size, sigma2, "invalid", stationary=False, value=math.nan)
    elif not stationary:
        result = _failed(w.size, sigma2, "non-stationary", stationary=False)
    else:
        ar, ma = _expanded(spec, params)
        mu = float(params["mu"]) if spec.mean else 0.0
        result = gaussian_loglike(w, ar, ma, mu, sigma2, method=method, check_stationarity=False)
    lam = spec.boxcox_lambda
    if lam is None:
        jacobian = 0.0
    else:
        # (lam - 1) * sum(log y) over the last n_w observations, as in log_jacobian, with
        # log y recovered from the transformed values (no round trip through exp).
        log_y = _log_original_from_transformed(y, lam)[spec.lost_to_differencing :]
        jacobian = (lam - 1.0) * float(np.sum(log_y))
    return ReferenceLikelihood(
        loglike=result.loglike,
        profiled_loglike=result.profiled_loglike,
        sigma2_hat=result.sigma2_hat,
        sigma2=result.sigma2,
        n=result.n,
        method=result.method,
        stationary=stationary,
        invertible=invertible,
        loglike_original_scale=result.loglike + jacobian,
        profiled_loglike_original_scale=result.profiled_loglike + jacobian,
    )


# ====================================================================== starting values
def conditional_least_squares(
    y_transformed: Sequence[float] | np.ndarray, spec: ModelSpec, *, maxiter: int = 500
) -> dict[str, float]:
    """Conditional-least-squares estimate, used as the reference fit's own start.

    Minimises the conditional sum of squares ``sum_t e_t^2`` over the coefficients, with the
    residuals from ``phi(B)Phi(B^m)(w_t - mu) = theta(B)Theta(B^m) e_t`` computed by one
    ``lfilter`` call with pre-sample residuals set to zero and the first ``p + mP``
    residuals (incomplete AR lags) left out. Box, G.E.P., Jenkins, G.M., Reinsel, G.C.,
    Ljung, G.M. (2015), *Time Series Analysis: Forecasting and Control*, 5th ed., section
    7.1 (the conditional sum-of-squares function; section recalled from memory).

    The search runs in the unconstrained partial-autocorrelation coordinates of
    :func:`to_unconstrained`, from all coefficients zero and ``mu`` at the mean of w, so the
    result is stationary and invertible.

    Returns
    -------
    dict
        Canonical coefficients and ``sigma2`` (the conditional sum of squares divided by the
        number of residuals in it).
    """
    w = difference(np.asarray(y_transformed, dtype=float).ravel(), spec)
    mean_w = float(np.mean(w)) if w.size else 0.0
    scale = _mu_scale(w)
    names = coefficient_names(spec)
    n_ar = spec.p + spec.m * spec.P

    def residuals(x: np.ndarray) -> np.ndarray:
        params = _params_from_search(spec, x, mean_w, scale)
        ar, ma = _expanded(spec, params)
        mu = params.get("mu", 0.0)
        e = lfilter(np.concatenate(([1.0], -ar)), np.concatenate(([1.0], ma)), w - mu)
        return e[n_ar:]

    def objective(x: np.ndarray) -> float:
        e = residuals(x)
        value = float(e @ e) / max(e.size, 1)
        return value if math.isfinite(value) else 1e300

    x0 = np.zeros(len(names))
    if names:
        found = optimize.minimize(
            objective, x0, method="L-BFGS-B", jac="3-point", options={"maxiter": maxiter}
        )
        x0 = found.x
    params = _params_from_search(spec, x0, mean_w, scale)
    e = residuals(x0)
    params["sigma2"] = float(e @ e) / e.size if e.size else math.nan
    return params


def _mu_scale(w: np.ndarray) -> float:
    """Scale of mu in the search coordinates: the standard deviation of w (1 when flat)."""
    scale = float(np.std(w)) if w.size > 1 else 1.0
    return scale if scale > 0.0 and math.isfinite(scale) else 1.0


def _params_from_search(
    spec: ModelSpec, x: np.ndarray, mean_w: float, scale: float
) -> dict[str, float]:
    """Canonical coefficients from search coordinates (mu centred on mean(w), scaled)."""
    params = from_unconstrained(spec, x)
    if spec.mean:
        params["mu"] = mean_w + scale * float(x[-1])
    return params


def _search_from_params(
    spec: ModelSpec, params: Mapping[str, float], mean_w: float, scale: float
) -> np.ndarray:
    x = to_unconstrained(spec, params)
    if spec.mean:
        x[-1] = (float(params.get("mu", mean_w)) - mean_w) / scale
    return x


# ====================================================================== reference fit
@dataclass(frozen=True)
class StartResult:
    """One start of the reference fit.

    Attributes
    ----------
    label : str
        Where the start came from (an estimator key, or ``"conditional least squares"``).
    start : dict
        The start as given (coefficients; sigma2 is ignored by the search).
    start_used : dict
        The start after :func:`pull_inside` (equal to ``start`` unless ``pulled_inside``).
    pulled_inside : bool
        Whether the start lay outside (or on the edge of) the stationary and invertible
        region and was moved just inside.
    loglike : float
        Reference log-likelihood at the end of this search (at its ML sigma2); NaN when the
        start was skipped.
    params : dict
        Where this search ended, canonical, with the ML sigma2.
    converged : bool
        The optimiser's own success flag.
    message : str
        The optimiser's message, or why the start was skipped.
    iterations : int
        Optimiser iterations.
    """

    label: str
    start: dict[str, float]
    start_used: dict[str, float]
    pulled_inside: bool
    loglike: float
    params: dict[str, float]
    converged: bool
    message: str
    iterations: int = 0


@dataclass(frozen=True)
class ReferenceFit:
    """The reference optimum: the best of several maximisations of the profiled likelihood.

    Attributes
    ----------
    params : dict
        Canonical parameters at the optimum, ``sigma2`` the maximum-likelihood value.
    loglike : float
        Reference log-likelihood at ``params`` (2 pi included).
    profiled_loglike : float
        The profiled value at the optimum; equal to ``loglike`` because sigma2 is its ML
        value there (kept for symmetry with :class:`ReferenceLikelihood`).
    standard_errors : dict
        By canonical name, sigma2 included: square roots of the diagonal of the inverse of
        the negative Hessian of ``loglike`` at the optimum. NaN when that matrix is not
        positive definite; ``standard_error_note`` then says why.
    standard_error_note : str
        How the standard errors were obtained, or why they are NaN.
    covariance : numpy.ndarray
        The inverse negative Hessian, rows and columns in ``parameter_names(spec)`` order
        (all NaN when unavailable).
    start_results : list of StartResult
        Every start, in the order tried.
    best_start : str
        Label of the start whose search reached the optimum.
    converged : bool
        Whether that search reported success.
    message : str
        Its optimiser message.
    seconds : float
        Wall-clock time of the whole fit, standard errors included.
    n : int
        Observations in the likelihood (``n_w``).
    """

    params: dict[str, float]
    loglike: float
    profiled_loglike: float
    standard_errors: dict[str, float]
    standard_error_note: str
    covariance: np.ndarray
    start_results: list[StartResult]
    best_start: str
    converged: bool
    message: str
    seconds: float
    n: int


#: Label of the reference fit's own start.
CLS_LABEL = "conditional least squares"

StartsArgument = (
    Mapping[str, Mapping[str, float]] | Sequence[tuple[str, Mapping[str, float]]] | None
)


def _labelled_starts(starts: StartsArgument) -> list[tuple[str, Mapping[str, float] | None]]:
    if starts is None:
        return []
    if isinstance(starts, Mapping):
        return [(str(label), params) for label, params in starts.items()]
    out = []
    for item in starts:
        if isinstance(item, Mapping):  # a bare parameter dict: number it
            out.append((f"start {len(out) + 1}", item))
        else:
            label, params = item
            out.append((str(label), params))
    return out


def fit_reference(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    starts: StartsArgument = None,
    *,
    method: Method = "auto",
    maxiter: int = 1000,
) -> ReferenceFit:
    """Maximise the reference likelihood from every given start and from our own CLS start.

    The profiled log-likelihood (sigma2 concentrated out) is maximised over the coefficients
    in the unconstrained coordinates of :func:`to_unconstrained` (each factor through its
    partial autocorrelations, so every point searched is stationary and invertible; Jones
    1980, Monahan 1984) with ``mu`` free, by L-BFGS-B with three-point finite-difference
    gradients and tight tolerances. sigma2 is then its ML value ``S / n_w``. The best end
    point over all starts is the reference optimum.

    Standard errors are the square roots of the diagonal of ``(-H)^{-1}``, with H the
    Hessian of the full log-likelihood with respect to the canonical parameters (sigma2
    included), by central differences with steps of ``1e-4`` times each parameter's scale
    (the observed information; e.g. Pawitan, Y. (2001), *In All Likelihood*, section 2.5).

    Parameters
    ----------
    y_transformed : array_like
        The series after the spec's transform, before differencing.
    spec : ModelSpec
        The model.
    starts : mapping label -> params, or sequence of (label, params), optional
        Starting values in canonical names (typically each estimator's estimate). Starts
        outside the stationary/invertible region are pulled just inside
        (:func:`pull_inside`); a start missing a coefficient, or with a non-finite one, is
        recorded as skipped. A missing ``mu`` starts at the mean of w.
    method : {"auto", "dense", "banded"}
        Likelihood path, see :func:`gaussian_loglike`.
    maxiter : int
        Iteration limit per start.

    Returns
    -------
    ReferenceFit
    """
    started = time.perf_counter()
    w = difference(np.asarray(y_transformed, dtype=float).ravel(), spec)
    if w.size < 1:
        raise ValueError(f"{spec} leaves no observations after differencing; nothing to fit.")
    n = w.size
    names = coefficient_names(spec)
    mean_w, scale = float(np.mean(w)), _mu_scale(w)

    def profiled_at(params: Mapping[str, float]) -> ReferenceLikelihood:
        ar, ma = _expanded(spec, params)
        mu = float(params["mu"]) if spec.mean else 0.0
        return gaussian_loglike(w, ar, ma, mu, 1.0, method=method, check_stationarity=False)

    def objective(x: np.ndarray) -> float:
        value = profiled_at(_params_from_search(spec, x, mean_w, scale)).profiled_loglike
        return -value / n if math.isfinite(value) else 1e6

    candidates: list[tuple[str, Mapping[str, float] | None]] = [
        *_labelled_starts(starts),
        (CLS_LABEL, None),  # None: computed here, after the given starts are listed
    ]
    results: list[StartResult] = []
    best_x: np.ndarray | None = None
    best_value = math.inf
    best_index = -1
    for index, (label, given) in enumerate(candidates):
        if given is None and index == len(candidates) - 1:
            given = conditional_least_squares(y_transformed, spec)
        if given is None:
            given = {}
        start = {k: float(v) for k, v in given.items() if _is_number(v)}
        problem = _start_problem(names, start, spec)
        if problem:
            results.append(
                StartResult(label, start, {}, False, math.nan, {}, False, f"skipped: {problem}")
            )
            continue
        if spec.mean:
            start.setdefault("mu", mean_w)
        used, moved = pull_inside(spec, start)
        x0 = _search_from_params(spec, used, mean_w, scale)
        if names:
            found = optimize.minimize(
                objective,
                x0,
                method="L-BFGS-B",
                jac="3-point",
                options={"maxiter": maxiter, "ftol": 1e-15, "gtol": 1e-10, "maxls": 50},
            )
            x, value = found.x, float(found.fun)
            converged, message, iterations = bool(found.success), str(found.message), found.nit
        else:
            x, value = x0, objective(x0)
            converged, message, iterations = True, "no coefficients to estimate", 0
        end = _params_from_search(spec, x, mean_w, scale)
        scored = profiled_at(end)
        end["sigma2"] = scored.sigma2_hat
        results.append(
            StartResult(
                label=label,
                start=start,
                start_used={k: used[k] for k in names if k in used},
                pulled_inside=moved,
                loglike=scored.profiled_loglike,
                params=end,
                converged=converged,
                message=message,
                iterations=int(iterations),
            )
        )
        if value < best_value:
            best_x, best_value, best_index = x, value, len(results) - 1
    if best_x is None:  # every start skipped; cannot happen as the CLS start always runs
        raise RuntimeError("No start of the reference fit could be used.")
    best = results[best_index]
    params = dict(best.params)
    ordered = {name: params[name] for name in parameter_names(spec)}
    full = evaluate(y_transformed, spec, ordered, method=method)
    errors, covariance, note = _standard_errors(w, spec, ordered, method)
    return ReferenceFit(
        params=ordered,
        loglike=full.loglike,
        profiled_loglike=full.profiled_loglike,
        standard_errors=errors,
        standard_error_note=note,
        covariance=covariance,
        start_results=results,
        best_start=best.label,
        converged=best.converged,
        message=best.message,
        seconds=time.perf_counter() - started,
        n=n,
    )


def _is_number(value: Any) -> bool:
    try:
        float(value)
    except (TypeError, ValueError):
        return False
    return True


def _start_problem(names: list[str], start: Mapping[str, float], spec: ModelSpec) -> str:
    missing = [name for name in names if name not in start and name != "mu"]
    if missing:
        return f"no value for {missing}"
    bad = [name for name in names if name in start and not math.isfinite(start[name])]
    if bad:
        return f"non-finite value for {bad}"
    return ""


# ====================================================================== standard errors
def _standard_errors(
    w: np.ndarray, spec: ModelSpec, params: Mapping[str, float], method: Method
) -> tuple[dict[str, float], np.ndarray, str]:
    """Observed-information standard errors by a central-difference Hessian."""
    names = parameter_names(spec)
    theta = np.array([params[name] for name in names], dtype=float)
    steps = np.array(
        [_step_scale(name, value, w) for name, value in zip(names, theta, strict=True)]
    )

    def loglike(values: np.ndarray) -> float:
        point = dict(zip(names, values.tolist(), strict=True))
        stationary, _ = _factor_checks(spec, point)
        if not stationary:
            return -math.inf
        ar, ma = _expanded(spec, point)
        mu = point["mu"] if spec.mean else 0.0
        return gaussian_loglike(
            w, ar, ma, mu, point["sigma2"], method=method, check_stationarity=False
        ).loglike

    nan = dict.fromkeys(names, math.nan)
    nan_cov = np.full((len(names), len(names)), np.nan)
    hessian = None
    for shrink in (1.0, 0.1, 0.01):
        hessian = _central_hessian(loglike, theta, steps * shrink)
        if np.all(np.isfinite(hessian)):
            break
    if hessian is None or not np.all(np.isfinite(hessian)):
        return (
            nan,
            nan_cov,
            (
                "not available: the likelihood is not finite around the optimum (it lies on the "
                "edge of the stationary region)"
            ),
        )
    information = -0.5 * (hessian + hessian.T)
    try:
        np.linalg.cholesky(information)
    except np.linalg.LinAlgError:
        return (
            nan,
            nan_cov,
            (
                "not available: the negative Hessian at the optimum is not positive definite "
                "(a flat likelihood or an optimum on the boundary)"
            ),
        )
    covariance = np.linalg.inv(information)
    errors = dict(zip(names, np.sqrt(np.diag(covariance)).tolist(), strict=True))
    note = (
        "inverse of the negative central-difference Hessian of the reference log-likelihood "
        "(observed information) at the reference optimum"
    )
    edge = _near_boundary(spec, params)
    if edge:
        note += (
            f"; the optimum lies at the edge of the stationary/invertible region ({edge}), "
            "where the usual normal approximation does not hold, so read these values with care"
        )
    return errors, covariance, note


def _near_boundary(spec: ModelSpec, params: Mapping[str, float], margin: float = 1e-3) -> str:
    """Names of the factors with a partial autocorrelation within ``margin`` of +-1."""
    found = []
    for names, sign in _factors(spec):
        if names:
            coefs = sign * np.array([float(params[name]) for name in names])
            pacf = ar_to_pacf(coefs)
            if not np.all(np.abs(pacf) < 1.0 - margin):
                found.append("/".join(names))
    return ", ".join(found)


def _step_scale(name: str, value: float, w: np.ndarray) -> float:
    """Difference step: 1e-4 of the parameter's natural scale (common practice, no source)."""
    if name == "sigma2":
        return 1e-4 * abs(value)
    if name == "mu":
        return 1e-4 * max(abs(value), _mu_scale(w) / math.sqrt(max(w.size, 1)))
    return 1e-4 * max(abs(value), 0.1)


def _central_hessian(f: Callable[[np.ndarray], float], x: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Second derivatives by central differences, O(h^2).

    ``H_ii = (f(x+h_i) - 2f(x) + f(x-h_i)) / h_i^2`` and ``H_ij = (f(++) - f(+-) - f(-+) +
    f(--)) / (4 h_i h_j)`` (e.g. Abramowitz, M., Stegun, I.A. (1964), *Handbook of
    Mathematical Functions*, formulas 25.3.23 and 25.3.26; numbers recalled from memory).
    """
    k = x.size
    centre = f(x)
    out = np.empty((k, k))
    unit = np.eye(k)
    for i in range(k):
        hi = h[i] * unit[i]
        out[i, i] = (f(x + hi) - 2.0 * centre + f(x - hi)) / (h[i] * h[i])
        for j in range(i):
            hj = h[j] * unit[j]
            value = (f(x + hi + hj) - f(x + hi - hj) - f(x - hi + hj) + f(x - hi - hj)) / (
                4.0 * h[i] * h[j]
            )
            out[i, j] = out[j, i] = value
    return out


# ====================================================================== profiles
def profile_line(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    params_a: Mapping[str, float],
    params_b: Mapping[str, float],
    n_points: int = 41,
    *,
    t_range: tuple[float, float] = (-0.25, 1.25),
) -> pd.DataFrame:
    """The reference likelihood along the straight line from one estimate to another.

    Every parameter (sigma2 included) moves as ``(1 - t) a + t b``; t = 0 is ``params_a``
    and t = 1 is ``params_b``. A flat curve means the data do not tell the two apart; a dip
    between them means two separate optima.

    Parameters
    ----------
    y_transformed : array_like
        The series after the spec's transform, before differencing.
    spec : ModelSpec
        The model.
    params_a, params_b : mapping
        Canonical parameters of the two estimates.
    n_points : int
        Number of positions.
    t_range : (float, float)
        First and last position.

    Returns
    -------
    pandas.DataFrame
        Columns ``t``, ``loglike`` (at the interpolated sigma2), ``profiled_loglike``, and
        one column per canonical parameter. Points outside the stationary region have
        ``-inf``; points where the interpolated sigma2 is not positive have a NaN
        ``loglike``.
    """
    names = parameter_names(spec)
    a = np.array([float(params_a[name]) for name in names])
    b = np.array([float(params_b[name]) for name in names])
    t = np.linspace(t_range[0], t_range[1], int(n_points))
    rows = []
    for position in t:
        point = dict(zip(names, ((1.0 - position) * a + position * b).tolist(), strict=True))
        value = evaluate(y_transformed, spec, point)
        rows.append(
            {
                "t": float(position),
                "loglike": value.loglike,
                "profiled_loglike": value.profiled_loglike,
                **point,
            }
        )
    return pd.DataFrame(rows, columns=["t", "loglike", "profiled_loglike", *names])


def profile_grid(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    params: Mapping[str, float],
    names: tuple[str, str],
    ranges: tuple[tuple[float, float], tuple[float, float]] | None = None,
    n: int = 31,
) -> dict[str, Any]:
    """The reference likelihood on a grid of two parameters, the others held fixed.

    Parameters
    ----------
    y_transformed : array_like
        The series after the spec's transform, before differencing.
    spec : ModelSpec
        The model.
    params : mapping
        Canonical parameters; all but the two named stay at these values.
    names : (str, str)
        The two canonical names on the grid's x and y axes.
    ranges : ((float, float), (float, float)), optional
        Lower and upper ends of each axis. By default (common practice, no source): +-0.2
        around an AR/MA coefficient, +-4 naive standard errors ``std(w)/sqrt(n_w)`` around
        ``mu``, and 0.7 to 1.4 times ``sigma2``.
    n : int
        Points per axis.

    Returns
    -------
    dict
        ``names`` (the pair), ``x`` and ``y`` (axis values, 1-D arrays), ``loglike`` and
        ``profiled_loglike`` (2-D arrays, shape ``(len(y), len(x))``, row i at ``y[i]``).
        ``profiled_loglike`` concentrates sigma2 out and does not move with a sigma2 axis.
    """
    all_names = parameter_names(spec)
    for name in names:
        if name not in all_names:
            raise ValueError(f"{name!r} is not a parameter of {spec}; choose from {all_names}.")
    w = difference(np.asarray(y_transformed, dtype=float).ravel(), spec)
    if ranges is None:
        ranges = (
            _default_range(names[0], float(params[names[0]]), w),
            _default_range(names[1], float(params[names[1]]), w),
        )
    x = np.linspace(ranges[0][0], ranges[0][1], int(n))
    y = np.linspace(ranges[1][0], ranges[1][1], int(n))
    loglike = np.empty((y.size, x.size))
    profiled = np.empty((y.size, x.size))
    base = {name: float(params[name]) for name in all_names}
    for i, y_value in enumerate(y):
        for j, x_value in enumerate(x):
            point = {**base, names[0]: float(x_value), names[1]: float(y_value)}
            value = evaluate(y_transformed, spec, point)
            loglike[i, j], profiled[i, j] = value.loglike, value.profiled_loglike
    return {"names": tuple(names), "x": x, "y": y, "loglike": loglike, "profiled_loglike": profiled}


def _default_range(name: str, value: float, w: np.ndarray) -> tuple[float, float]:
    if name == "sigma2":
        return 0.7 * value, 1.4 * value
    if name == "mu":
        half = 4.0 * _mu_scale(w) / math.sqrt(max(w.size, 1))
        return value - half, value + half
    return value - 0.2, value + 0.2


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
    """
    from scipy.linalg import cho_factor, cho_solve, solve_triangular, toeplitz
    from scipy.stats import norm

    y = np.asarray(y_transformed, dtype=float).ravel()
    w = difference(y, spec)
    cond = w[-FORECAST_CONDITION_MAX:]
    n, h = cond.size, int(steps)
    ar = -ar_polynomial(spec, params)[1:]
    ma = ma_polynomial(spec, params)[1:]
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
    mean = path[y.size :]
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
