"""Exact Gaussian log-likelihood of an ARMA model of the differenced series.

Two paths: a dense Toeplitz Cholesky factorisation, and Ansley's (1979, Biometrika 66)
banded factorisation after an AR transformation, O(n (p+q)^2) with LAPACK's banded Cholesky.
Autocovariances follow Box, Jenkins and Reinsel, chapter 3 (Brockwell & Davis, chapter 3).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import Literal

import numpy as np
from scipy.linalg import lapack
from scipy.signal import lfilter, lfiltic

from forecastaudit.conventions import difference, regression_effect
from forecastaudit.layout import is_stationary_polynomial, layout_of
from forecastaudit.spec import ModelSpec

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


def _trim_trailing_zeros(x: np.ndarray) -> np.ndarray:
    """``x`` without its trailing zeros (``np.trim_zeros(x, "b")``, several times faster on
    the short polynomials of the likelihood's inner loop)."""
    nonzero = np.flatnonzero(x)
    return x[: nonzero[-1] + 1] if nonzero.size else x[:0]


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
    a = _trim_trailing_zeros(np.asarray(ar, dtype=float).ravel())
    b = _trim_trailing_zeros(np.asarray(ma, dtype=float).ravel())
    sigma2 = float(sigma2)
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b)) and math.isfinite(float(mu))):
        return _failed(n, sigma2, "invalid", stationary=False, value=math.nan)
    if check_stationarity and not is_stationary_polynomial(a):
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


# ====================================================================== parameter level
def evaluate(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    params: Mapping[str, float],
    *,
    method: Method = "auto",
    regressors: np.ndarray | None = None,
) -> ReferenceLikelihood:
    """The reference log-likelihood of canonical parameters, at their sigma2 and profiled.

    Differences the series by the spec, expands the seasonal polynomials and calls
    :func:`gaussian_loglike`. With regressors the differenced series is that of the
    regression errors ``y - X beta`` (regression on the levels with ARIMA errors: the
    regressors are differenced with the series; see :mod:`forecastaudit.conventions`), which
    is exact: ``Delta (y - X beta) = w - (Delta X) beta``. With a log or Box-Cox transform
    in the spec the original-scale values are filled in by adding :func:`log_jacobian` over
    the last ``n_w`` observations (``log y`` is recovered from ``y_transformed``).

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
    regressors : numpy.ndarray, optional
        The regressor values, shape ``(n, k)`` in ``spec.regressors`` order; required when
        the spec has regressors.

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
    layout = layout_of(spec)
    missing = [name for name in layout.parameter_names if name not in params]
    if missing:
        raise ValueError(
            f"Parameters {missing} of {spec} are missing; pass every name of "
            f"parameter_names(spec): {list(layout.parameter_names)}."
        )
    y = np.asarray(y_transformed, dtype=float).ravel()
    finite = bool(np.all(np.isfinite(layout.to_vector(params))))
    effect = regression_effect(spec, params, regressors, rows=y.size) if finite else 0.0
    w = difference(y - effect, spec)
    sigma2 = float(params["sigma2"])
    stationary = finite and layout.is_stationary(params)
    invertible = finite and layout.is_invertible(params)
    if not finite:
        result = _failed(w.size, sigma2, "invalid", stationary=False, value=math.nan)
    elif not stationary:
        result = _failed(w.size, sigma2, "non-stationary", stationary=False)
    else:
        ar, ma = layout.expanded_coefficients(params)
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
