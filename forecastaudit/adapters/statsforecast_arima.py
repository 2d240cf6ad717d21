"""statsforecast ``models.ARIMA``, run as its users run it (its own compiled engine).

Spec -> call: orders, period and seasonal orders from the spec. The constant: with no
differencing ``include_mean`` (coefficient ``intercept`` = mu); with d + D = 1
``include_drift`` (a regression on t = 1..n with ARIMA errors; coefficient ``drift`` b gives
mu = m^D b); a mean with d + D >= 2 is not offered by the library. Both flags are passed
explicitly. The reported sigma2 is SSR / (n_w - number of coefficients) (measured in
statsforecast 2.1: ``nansum(residuals**2) / (nstar - npar + 1)`` with npar counting
sigma2), converted here to the maximum-likelihood SSR / n_w.

Own likelihood at given parameters: the same ``models.ARIMA`` with every coefficient fixed
(``fixed`` = the canonical values as ``ar1..``, ``ma1..``, ``sar1..``, ``sma1..``,
``intercept`` = mu or ``drift`` = mu / m^D) and ``method="ML"``, which evaluates its ML
objective once, without optimising: the Kalman filter with the differences in the state
vector under its diffuse prior (kappa 1e6), on the observations whose prediction variance
is below 1e4 (n - d - mD here), 2*pi constant included. Its ML objective profiles sigma2 out
(``0.5 log(SSR/n) + 0.5 sum log f_t / n``): ``loglik`` is the value at the maximum-likelihood
sigma2 = SSR / n_w for the given coefficients, and the library takes no sigma2. So the
canonical ``sigma2`` passed is not used: the value is the library's own objective, which is
what its fit maximised; at its own estimate it is its reported ``loglik`` (measured equal to
the last digit, statsforecast 2.1.1).

Regressors: passed as ``X`` (a float array, columns in the spec's order), coefficients
``ex_1 .. ex_k`` mapped back by position. The library regresses on the levels with ARIMA
errors (a port of R's ``arima`` with ``xreg``): measured (statsforecast 2.1.1) on a seeded
series with d = 1 and known levels effects 1.5 and -2.0, it returns 1.485 and -1.983, and its
own likelihood at the reference optimum agrees with the reference (tests/test_regressors.py).
Its constant (``intercept`` or ``drift``) is a term of its own beside ``ex_*``.
"""

from __future__ import annotations

import inspect
import re
from typing import Any

import numpy as np

from forecastaudit.adapters.protocol import (
    Capabilities,
    EstimatorAdapter,
    FitOutput,
    FitRequest,
    ForecastOutput,
)
from forecastaudit.adapters.registry import register_estimator
from forecastaudit.conventions import df_adjusted_to_ml_sigma2, trend_scale
from forecastaudit.layout import layout_of
from forecastaudit.spec import ModelSpec

_NAME = re.compile(r"^(ar|ma|sar|sma)(\d+)$")
# scipy.optimize result status codes, as statsforecast stores them in model_["code"].
_CODES = {
    0: "optimizer reported success",
    1: "iteration limit reached",
    2: "precision loss: the optimizer could not improve further",
    3: "NaN encountered",
}


def _native_coefficients(spec: ModelSpec, params: dict[str, float]) -> dict[str, float]:
    """Canonical coefficients under statsforecast's names, in its order (no sigma2).

    ``ar1..``, ``ma1..``, ``sar1..``, ``sma1..`` (same signs as ours), then ``intercept`` = mu
    with no differencing or ``drift`` = mu / trend_scale with d + D = 1: the inverse of the
    mapping in :meth:`StatsforecastArima._fit`.
    """
    layout = layout_of(spec)
    native: dict[str, float] = {}
    for key in ("ar", "ma", "sar", "sma"):  # statsforecast's coefficient order
        for i, name in enumerate(layout.factor(key).names, start=1):
            native[f"{key}{i}"] = float(params[name])
    if spec.mean:
        if spec.n_differences == 0:
            native["intercept"] = float(params["mu"])
        else:
            native["drift"] = float(params["mu"]) / trend_scale(spec)
    for j, name in enumerate(layout.regressor_names, start=1):
        native[f"ex_{j}"] = float(params[name])
    return native


def fit_output(fit: Any, options: dict[str, Any], spec: ModelSpec, native: Any = None) -> FitOutput:
    """The canonical :class:`FitOutput` of a fitted ``models.ARIMA``'s ``model_`` mapping.

    ``fit`` needs the keys ``coef``, ``mask``, ``sigma2``, ``loglik``, ``aic``, ``aicc``,
    ``bic``, ``nobs`` and ``code``; ``options`` are the model's resolved options. Shared with
    the adapter that runs statsforecast in another Python environment, which receives those
    values from its worker.
    """
    s = spec.n_differences
    regressor_names = {
        f"ex_{j}": name for j, name in enumerate(layout_of(spec).regressor_names, start=1)
    }
    coef = {str(k): float(v) for k, v in fit["coef"].items()}
    params: dict[str, float] = {}
    extra: dict[str, float] = {}
    conversions: list[str] = []
    for name, value in coef.items():
        match = _NAME.match(name)
        if match:
            kind, i = match.group(1), int(match.group(2))
            lag = i * spec.m if kind.startswith("s") else i
            params[f"{kind}_lag{lag}"] = value
        elif name in regressor_names:
            params[regressor_names[name]] = value
        elif not spec.mean or name not in {"intercept", "drift"}:
            extra[name] = value  # a term the spec did not ask for
    if spec.mean:
        if s == 0:
            params["mu"] = coef["intercept"]
        else:
            params["mu"] = coef["drift"] * trend_scale(spec)
            conversions.append(f"mu = {trend_scale(spec):g} x drift (slope per period in levels)")
    n_w = int(fit["nobs"])
    n_coef = int(np.sum(fit["mask"]))
    sigma2_reported = float(fit["sigma2"])
    sigma2_ml = df_adjusted_to_ml_sigma2(sigma2_reported, n_w, n_coef)
    code = int(fit["code"])
    overridden = {"include_mean": True} if s == 0 and not spec.mean else {}
    notes = (
        [
            "regression on the levels with ARIMA errors (measured); regressors passed as X, "
            "coefficients ex_1.. mapped by position; the constant is a separate term"
        ]
        if spec.regressors
        else []
    )
    return FitOutput(
        params=params,
        native_params=coef,
        sigma2_reported=sigma2_reported,
        sigma2_kind="df-adjusted",
        sigma2_definition=f"SSR / (n_w - {n_coef}), degrees-of-freedom adjusted",
        sigma2_ml=sigma2_ml,
        loglike=float(fit["loglik"]),
        loglike_definition=(
            f"exact Gaussian by Kalman filter on the {n_w} observations left after "
            "differencing (differencing in the state vector under a diffuse prior), "
            "2*pi constant included, at the maximum-likelihood sigma2"
        ),
        n_used=n_w,
        k_counted=n_coef + 1,
        criteria={"aic": fit["aic"], "aicc": fit["aicc"], "bic": fit["bic"]},
        converged=code == 0,
        optimizer={"code": code, "message": _CODES.get(code, "unknown status")},
        options={"statsforecast": options},
        extra_terms=extra,
        conversions=conversions,
        notes=notes,
        overridden_defaults=overridden,
        native=native,
    )


def interval_levels(levels: tuple[float, ...]) -> list[float]:
    """Levels as statsforecast names its interval columns (``80``, not ``80.0``)."""
    return [int(level) if float(level).is_integer() else level for level in levels]


def forecast_output(
    out: Any, levels: tuple[float, ...], sigma2: float, residuals: Any
) -> ForecastOutput:
    """A :class:`ForecastOutput` from what ``predict(h, level=...)`` returns (``mean``,
    ``lo-80``, ``hi-80``, ...), the model's reported sigma2 and its residuals."""
    named = interval_levels(levels)
    lower = {
        lv: np.asarray(out[f"lo-{li}"], dtype=float) for lv, li in zip(levels, named, strict=True)
    }
    upper = {
        lv: np.asarray(out[f"hi-{li}"], dtype=float) for lv, li in zip(levels, named, strict=True)
    }
    return ForecastOutput(
        mean=np.asarray(out["mean"], dtype=float),
        lower=lower,
        upper=upper,
        se=None,
        interval_method=(
            "Gaussian: point forecast +/- z x the forecast standard error at the reported "
            "(degrees-of-freedom adjusted) sigma2"
        ),
        sigma2_used=float(sigma2),
        residuals=np.asarray(residuals, dtype=float),
    )


@register_estimator
class StatsforecastArima(EstimatorAdapter):
    """statsforecast ARIMA with its defaults (CSS-ML)."""

    key = "statsforecast"
    engine = "statsforecast-arima"
    package = "statsforecast"
    module = "statsforecast.models"
    description = "statsforecast ARIMA"
    capabilities = Capabilities(
        mean_differences=frozenset({0, 1}),
        regressors=True,
        regression_form="levels",
        own_loglike=True,
    )

    @staticmethod
    def _model(spec: ModelSpec, **options: Any) -> Any:
        from statsforecast.models import ARIMA

        s = spec.n_differences
        return ARIMA(
            order=spec.order,
            season_length=spec.m,
            seasonal_order=spec.seasonal,
            include_mean=spec.mean and s == 0,
            include_drift=spec.mean and s == 1,
            **options,
        )

    def _fit(self, request: FitRequest) -> FitOutput:
        from statsforecast.models import ARIMA

        model = self._model(request.spec)
        # X only with regressors: the call without them stays the library's plain fit(y).
        if request.regressors is not None:
            model.fit(request.y, X=request.regressors)
        else:
            model.fit(request.y)
        options = {
            name: getattr(model, name)
            for name in inspect.signature(ARIMA.__init__).parameters
            if name != "self" and hasattr(model, name)
        }
        return fit_output(model.model_, options, request.spec, native=model)

    def _loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        spec = request.spec
        fixed = _native_coefficients(spec, params)
        model = self._model(spec, method="ML", fixed=dict(fixed))
        # X only with regressors: the call without them stays the library's plain fit(y).
        if request.regressors is not None:
            model.fit(request.y, X=request.regressors)
        else:
            model.fit(request.y)
        fit = model.model_
        # An unknown name in ``fixed`` is silently left free (and then optimised): refuse.
        free = [name for name, is_free in zip(fit["coef"], fit["mask"], strict=True) if is_free]
        if free or set(fit["coef"]) != set(fixed):
            raise RuntimeError(
                f"statsforecast did not fix every coefficient (free: {free}; asked "
                f"{sorted(fixed)}, got {sorted(fit['coef'])})"
            )
        return float(fit["loglik"])

    def _forecast(
        self, native, steps: int, levels: tuple[float, ...], future=None
    ) -> ForecastOutput:  # type: ignore[no-untyped-def]
        if future is None:
            out = native.predict(h=steps, level=interval_levels(levels))
        else:
            out = native.predict(h=steps, X=future, level=interval_levels(levels))
        return forecast_output(out, levels, native.model_["sigma2"], native.model_["residuals"])
