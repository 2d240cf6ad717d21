"""An in-house estimator adapter, registered through the ``forecastaudit.adapters`` group.

The worked example of docs/adapters.md, as a distribution of its own: not installed, but
found by :mod:`importlib.metadata` through ``inhouse_adapters-0.1.dist-info`` when
``tests/plugin_packages/inhouse`` is on ``sys.path`` (see ``tests/test_inhouse_adapter.py``).

The "in-house estimator" is a small exact maximum-likelihood fit of its own: the
autocovariances of the ARMA part from ``statsmodels.tsa.arima_process.arma_acovf``, the dense
Gaussian log-density of the differenced series through a Cholesky factor
(``scipy.linalg.cho_factor``), sigma2 profiled out, and Nelder-Mead over the coefficients.
Dense linear algebra costs O(n^3), so it is for short series only, as many in-house tools
are.
"""

from __future__ import annotations

import math

import numpy as np

from forecastaudit.adapters.protocol import Capabilities, EstimatorAdapter, FitOutput, FitRequest
from forecastaudit.conventions import difference
from forecastaudit.layout import layout_of

__all__ = ["DenseGaussianAdapter"]

#: Nelder-Mead settings: tight, so the fit reaches the optimum of its own objective.
_OPTIONS = {"xatol": 1e-9, "fatol": 1e-11, "maxiter": 20000, "maxfev": 40000}


def _loglike(w: np.ndarray, spec, params: dict[str, float], sigma2: float | None) -> float:
    """Exact Gaussian log-likelihood of w at ``params`` (sigma2 profiled out when None)."""
    from scipy.linalg import cho_factor, cho_solve
    from statsmodels.tsa.arima_process import arma_acovf

    layout = layout_of(spec)
    if not (layout.is_stationary(params) and layout.is_invertible(params)):
        return -math.inf
    n = len(w)
    acov = arma_acovf(layout.ar_polynomial(params), layout.ma_polynomial(params), nobs=n)
    lags = np.abs(np.subtract.outer(np.arange(n), np.arange(n)))
    factor = cho_factor(acov[lags], lower=True)
    centred = w - params.get("mu", 0.0)
    quadratic = float(centred @ cho_solve(factor, centred))
    log_det = 2.0 * float(np.sum(np.log(np.diag(factor[0]))))
    if sigma2 is None:
        sigma2 = quadratic / n
    return -0.5 * (n * math.log(2.0 * math.pi * sigma2) + log_det + quadratic / sigma2)


def _profiled_sigma2(w: np.ndarray, spec, params: dict[str, float]) -> float:
    from scipy.linalg import cho_factor, cho_solve
    from statsmodels.tsa.arima_process import arma_acovf

    layout = layout_of(spec)
    n = len(w)
    acov = arma_acovf(layout.ar_polynomial(params), layout.ma_polynomial(params), nobs=n)
    lags = np.abs(np.subtract.outer(np.arange(n), np.arange(n)))
    factor = cho_factor(acov[lags], lower=True)
    centred = w - params.get("mu", 0.0)
    return float(centred @ cho_solve(factor, centred)) / n


class DenseGaussianAdapter(EstimatorAdapter):
    """Exact maximum likelihood by dense Cholesky and Nelder-Mead (an in-house estimator)."""

    key = "inhouse-dense"
    engine = "inhouse-dense-gaussian"
    package = "inhouse-adapters"
    module = "inhouse_adapters"
    description = "the in-house dense exact-likelihood fit (inhouse_adapters)"
    capabilities = Capabilities(
        mean_differences=frozenset({0, 1}), forecast=False, own_loglike=True
    )

    # translate the spec -> call the estimator -> translate the result
    def _fit(self, request: FitRequest) -> FitOutput:
        from scipy.optimize import minimize

        spec = request.spec
        layout = layout_of(spec)
        names = list(layout.coefficient_names)
        w = difference(request.y, spec)
        start = np.array([float(np.mean(w)) if name == "mu" else 0.0 for name in names])

        def objective(vector: np.ndarray) -> float:
            value = _loglike(w, spec, dict(zip(names, vector, strict=True)), None)
            return -value if math.isfinite(value) else 1e12

        result = minimize(objective, start, method="Nelder-Mead", options=_OPTIONS)
        params = {name: float(v) for name, v in zip(names, result.x, strict=True)}
        sigma2 = _profiled_sigma2(w, spec, params)
        loglike = _loglike(w, spec, params, sigma2)
        k = len(names) + 1
        n = len(w)
        return FitOutput(
            params=params,
            native_params=dict(params),
            sigma2_reported=sigma2,
            sigma2_kind="maximum-likelihood",
            sigma2_definition="sum of squares of the whitened series / n_w",
            sigma2_ml=sigma2,
            loglike=loglike,
            loglike_definition=(
                "exact Gaussian log-density of the differenced series (dense Cholesky), 2*pi "
                "constant included"
            ),
            n_used=n,
            k_counted=k,
            criteria={
                "aic": -2 * loglike + 2 * k,
                "aicc": -2 * loglike + 2 * k + 2 * k * (k + 1) / (n - k - 1),
                "bic": -2 * loglike + k * math.log(n),
            },
            converged=bool(result.success),
            optimizer={
                "method": "Nelder-Mead",
                "message": str(result.message),
                "iterations": int(result.nit),
            },
            options={"inhouse-adapters": {"method": "Nelder-Mead", **_OPTIONS}},
        )

    def _loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        spec = request.spec
        w = difference(request.y, spec)
        return _loglike(w, spec, params, params["sigma2"])
