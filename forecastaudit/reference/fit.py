"""The reference fit: multi-start maximum likelihood with standard errors from the Hessian."""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import optimize
from scipy.signal import lfilter

from forecastaudit.conventions import difference
from forecastaudit.layout import layout_of
from forecastaudit.reference.likelihood import (
    Method,
    ReferenceLikelihood,
    evaluate,
    gaussian_loglike,
)
from forecastaudit.reference.parameterisation import (
    ar_to_pacf,
    from_unconstrained,
    pull_inside,
    to_unconstrained,
)
from forecastaudit.spec import ModelSpec


# ====================================================================== starting values
def conditional_least_squares(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    *,
    maxiter: int = 500,
    regressors: np.ndarray | None = None,
) -> dict[str, float]:
    """Conditional-least-squares estimate, used as the reference fit's own start.

    Minimises the conditional sum of squares ``sum_t e_t^2`` over the coefficients, with the
    residuals from ``phi(B)Phi(B^m)(w_t - mu) = theta(B)Theta(B^m) e_t`` computed by one
    ``lfilter`` call with pre-sample residuals set to zero and the first ``p + mP``
    residuals (incomplete AR lags) left out. Box, G.E.P., Jenkins, G.M., Reinsel, G.C.,
    Ljung, G.M. (2015), *Time Series Analysis: Forecasting and Control*, 5th ed., section
    7.1 (the conditional sum-of-squares function; section recalled from memory).

    The search runs in the unconstrained partial-autocorrelation coordinates of
    :func:`to_unconstrained`, from all coefficients zero and ``mu`` (and the regression
    coefficients) at their ordinary least-squares values on the differenced data, so the
    result is stationary and invertible. With regressors the residuals are those of
    ``w - mu - (Delta X) beta``.

    Returns
    -------
    dict
        Canonical coefficients and ``sigma2`` (the conditional sum of squares divided by the
        number of residuals in it).
    """
    w = difference(np.asarray(y_transformed, dtype=float).ravel(), spec)
    dx = _differenced_regressors(spec, regressors, w.size)
    block = _regression_block(spec, w, dx)
    layout = layout_of(spec)
    names = layout.coefficient_names
    n_ar = layout.ar_degree

    def residuals(x: np.ndarray) -> np.ndarray:
        params = _params_from_search(spec, x, block)
        ar, ma = layout.expanded_coefficients(params)
        e = lfilter(
            np.concatenate(([1.0], -ar)),
            np.concatenate(([1.0], ma)),
            _centred(w, dx, spec, params),
        )
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
    params = _params_from_search(spec, x0, block)
    e = residuals(x0)
    params["sigma2"] = float(e @ e) / e.size if e.size else math.nan
    return params


def _mu_scale(w: np.ndarray) -> float:
    """Scale of mu in the search coordinates: the standard deviation of w (1 when flat)."""
    scale = float(np.std(w)) if w.size > 1 else 1.0
    return scale if scale > 0.0 and math.isfinite(scale) else 1.0


@dataclass(frozen=True)
class _RegressionBlock:
    """Search coordinates of ``mu`` and the regression coefficients: centre and scale.

    The centre is the ordinary least-squares fit of the differenced series on a constant
    (with a mean) and the differenced regressors; the scale is the standard deviation of w
    for ``mu`` and that divided by the standard deviation of the differenced regressor for
    its coefficient, so that one unit in the search moves every coordinate comparably.
    """

    names: tuple[str, ...]
    centre: np.ndarray
    scale: np.ndarray


def _differenced_regressors(spec: ModelSpec, regressors: np.ndarray | None, n_w: int) -> np.ndarray:
    """The regressors differenced with the series, shape ``(n_w, k)`` (k = 0 without)."""
    k = len(spec.regressors)
    if not k:
        return np.zeros((n_w, 0))
    if regressors is None:
        raise ValueError(f"{spec} has regressors; pass their values (an (n, k) array).")
    x = np.asarray(regressors, dtype=float)
    if x.ndim != 2 or x.shape[1] != k:
        raise ValueError(f"{spec} has {k} regressor(s); got an array of shape {x.shape}.")
    dx = difference(x, spec)
    if dx.shape[0] != n_w:
        raise ValueError(
            f"The regressors have {x.shape[0]} rows; the series has "
            f"{n_w + spec.lost_to_differencing}."
        )
    return dx


def _regression_block(spec: ModelSpec, w: np.ndarray, dx: np.ndarray) -> _RegressionBlock:
    layout = layout_of(spec)
    names = (*layout.mean_names, *layout.regressor_names)
    columns = ([np.ones(w.size)] if spec.mean else []) + [dx[:, j] for j in range(dx.shape[1])]
    if not columns:
        return _RegressionBlock((), np.zeros(0), np.ones(0))
    design = np.column_stack(columns)
    centre = np.linalg.lstsq(design, w, rcond=None)[0] if w.size else np.zeros(len(names))
    w_scale = _mu_scale(w)
    scale = np.array([w_scale] * int(spec.mean) + [_ratio(w_scale, c) for c in dx.T])
    return _RegressionBlock(names, np.asarray(centre, dtype=float), scale)


def _ratio(w_scale: float, column: np.ndarray) -> float:
    spread = float(np.std(column)) if column.size > 1 else 0.0
    value = w_scale / spread if spread > 0.0 and math.isfinite(spread) else w_scale
    return value if value > 0.0 and math.isfinite(value) else 1.0


def _centred(
    w: np.ndarray, dx: np.ndarray, spec: ModelSpec, params: Mapping[str, float]
) -> np.ndarray:
    """``w - mu - (Delta X) beta``: the differenced regression errors minus their mean."""
    mu = float(params["mu"]) if spec.mean else 0.0
    if dx.shape[1]:
        beta = np.array([float(params[name]) for name in layout_of(spec).regressor_names])
        return w - mu - dx @ beta
    return w - mu


def _params_from_search(
    spec: ModelSpec, x: np.ndarray, block: _RegressionBlock
) -> dict[str, float]:
    """Canonical coefficients from search coordinates (mu and beta centred and scaled)."""
    params = from_unconstrained(spec, x)
    k = len(block.names)
    if k:
        values = block.centre + block.scale * np.asarray(x[-k:], dtype=float)
        params.update(zip(block.names, values.tolist(), strict=True))
    return params


def _search_from_params(
    spec: ModelSpec, params: Mapping[str, float], block: _RegressionBlock
) -> np.ndarray:
    x = to_unconstrained(spec, params)
    k = len(block.names)
    if k:
        values = np.array(
            [float(params.get(n, c)) for n, c in zip(block.names, block.centre, strict=True)]
        )
        x[-k:] = (values - block.centre) / block.scale
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
    regressors: np.ndarray | None = None,
) -> ReferenceFit:
    """Maximise the reference likelihood from every given start and from our own CLS start.

    The profiled log-likelihood (sigma2 concentrated out) is maximised over the coefficients
    in the unconstrained coordinates of :func:`to_unconstrained` (each factor through its
    partial autocorrelations, so every point searched is stationary and invertible; Jones
    1980, Monahan 1984) with ``mu`` and the regression coefficients free (estimated jointly,
    centred on their least-squares values on the differenced data), by L-BFGS-B with
    three-point finite-difference gradients and tight tolerances. sigma2 is then its ML
    value ``S / n_w``. The best end point over all starts is the reference optimum.

    Standard errors are the square roots of the diagonal of ``(-H)^{-1}``, with H the
    Hessian of the full log-likelihood with respect to the canonical parameters (sigma2
    included), by central differences with steps of ``1e-4`` times each parameter's scale
    (the observed information; e.g. Pawitan, Y. (2001), *In All Likelihood*, section 2.5).

    Parameters
    ----------
    y_transformed, spec
        The series (after the spec's transform, before differencing) and the model, as in
        :func:`~forecastaudit.reference.likelihood.evaluate`.
    starts : mapping label -> params, or sequence of (label, params), optional
        Starting values in canonical names (typically each estimator's estimate). Starts
        outside the stationary/invertible region are pulled just inside
        (:func:`pull_inside`); a start missing a coefficient, or with a non-finite one, is
        recorded as skipped. A missing ``mu`` starts at the mean of w.
    method : {"auto", "dense", "banded"}
        Likelihood path, see :func:`gaussian_loglike`.
    maxiter : int
        Iteration limit per start.
    regressors : numpy.ndarray, optional
        Regressor values, shape ``(n, k)`` in ``spec.regressors`` order; required when the
        spec has regressors (regression on the levels with ARIMA errors).

    Returns
    -------
    ReferenceFit
    """
    started = time.perf_counter()
    w = difference(np.asarray(y_transformed, dtype=float).ravel(), spec)
    if w.size < 1:
        raise ValueError(f"{spec} leaves no observations after differencing; nothing to fit.")
    n = w.size
    layout = layout_of(spec)
    names = layout.coefficient_names
    dx = _differenced_regressors(spec, regressors, n)
    block = _regression_block(spec, w, dx)

    def profiled_at(params: Mapping[str, float]) -> ReferenceLikelihood:
        ar, ma = layout.expanded_coefficients(params)
        return gaussian_loglike(
            _centred(w, dx, spec, params),
            ar,
            ma,
            0.0,
            1.0,
            method=method,
            check_stationarity=False,
        )

    def objective(x: np.ndarray) -> float:
        value = profiled_at(_params_from_search(spec, x, block)).profiled_loglike
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
            given = conditional_least_squares(y_transformed, spec, regressors=regressors)
        if given is None:
            given = {}
        start = {k: float(v) for k, v in given.items() if _is_number(v)}
        problem = _start_problem(names, start, spec)
        if problem:
            results.append(
                StartResult(label, start, {}, False, math.nan, {}, False, f"skipped: {problem}")
            )
            continue
        for name, centre in zip(block.names, block.centre, strict=True):
            start.setdefault(name, float(centre))
        used, moved = pull_inside(spec, start)
        x0 = _search_from_params(spec, used, block)
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
        end = _params_from_search(spec, x, block)
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
    ordered = {name: params[name] for name in layout.parameter_names}
    full = evaluate(y_transformed, spec, ordered, method=method, regressors=regressors)
    errors, covariance, note = _standard_errors(w, dx, spec, ordered, method)
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


def _start_problem(names: Sequence[str], start: Mapping[str, float], spec: ModelSpec) -> str:
    # mu and the regression coefficients start at their least-squares values when missing.
    free = {"mu", *layout_of(spec).regressor_names}
    missing = [name for name in names if name not in start and name not in free]
    if missing:
        return f"no value for {missing}"
    bad = [name for name in names if name in start and not math.isfinite(start[name])]
    if bad:
        return f"non-finite value for {bad}"
    return ""


# ====================================================================== standard errors
def _standard_errors(
    w: np.ndarray, dx: np.ndarray, spec: ModelSpec, params: Mapping[str, float], method: Method
) -> tuple[dict[str, float], np.ndarray, str]:
    """Observed-information standard errors by a central-difference Hessian."""
    layout = layout_of(spec)
    names = layout.parameter_names
    theta = layout.to_vector(params, include_sigma2=True)
    block = _regression_block(spec, w, dx)
    scales = dict(zip(block.names, block.scale.tolist(), strict=True))
    steps = np.array(
        [
            _step_scale(name, value, w, scales.get(name))
            for name, value in zip(names, theta, strict=True)
        ]
    )

    def loglike(values: np.ndarray) -> float:
        point = layout.from_vector(values, include_sigma2=True)
        if not layout.is_stationary(point):
            return -math.inf
        ar, ma = layout.expanded_coefficients(point)
        return gaussian_loglike(
            _centred(w, dx, spec, point),
            ar,
            ma,
            0.0,
            point["sigma2"],
            method=method,
            check_stationarity=False,
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
    for factor in layout_of(spec).factors:
        if factor.order:
            pacf = ar_to_pacf(factor.ar_form(factor.values(params)))
            if not np.all(np.abs(pacf) < 1.0 - margin):
                found.append("/".join(factor.names))
    return ", ".join(found)


def _step_scale(name: str, value: float, w: np.ndarray, scale: float | None = None) -> float:
    """Difference step: 1e-4 of the parameter's natural scale (common practice, no source).

    For ``mu`` and a regression coefficient the natural scale is its naive standard error,
    ``scale / sqrt(n_w)`` with ``scale`` the search scale of :class:`_RegressionBlock`.
    """
    if name == "sigma2":
        return 1e-4 * abs(value)
    if name == "mu" or scale is not None:
        spread = _mu_scale(w) if scale is None else scale
        return 1e-4 * max(abs(value), spread / math.sqrt(max(w.size, 1)))
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
