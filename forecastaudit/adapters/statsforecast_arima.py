"""statsforecast ``models.ARIMA``, run as its users run it (its own compiled engine).

Spec -> call: orders, period and seasonal orders from the spec. The constant: with no
differencing ``include_mean`` (coefficient ``intercept`` = mu); with d + D = 1
``include_drift`` (a regression on t = 1..n with ARIMA errors; coefficient ``drift`` b gives
mu = m^D b); a mean with d + D >= 2 is not offered by the library. Both flags are passed
explicitly. The reported sigma2 is SSR / (n_w - number of coefficients) (measured in
statsforecast 2.1: ``nansum(residuals**2) / (nstar - npar + 1)`` with npar counting
sigma2), converted here to the maximum-likelihood SSR / n_w.
"""

from __future__ import annotations

import inspect
import re

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

_NAME = re.compile(r"^(ar|ma|sar|sma)(\d+)$")
# scipy.optimize result status codes, as statsforecast stores them in model_["code"].
_CODES = {
    0: "optimizer reported success",
    1: "iteration limit reached",
    2: "precision loss: the optimizer could not improve further",
    3: "NaN encountered",
}


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
    )

    def _fit(self, request: FitRequest) -> FitOutput:
        from statsforecast.models import ARIMA

        y, spec = request.y, request.spec

        s = spec.n_differences
        model = ARIMA(
            order=spec.order,
            season_length=spec.m,
            seasonal_order=spec.seasonal,
            include_mean=spec.mean and s == 0,
            include_drift=spec.mean and s == 1,
        )
        model.fit(y)
        fit = model.model_
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
            elif not spec.mean or name not in {"intercept", "drift"}:
                extra[name] = value  # a term the spec did not ask for
        if spec.mean:
            if s == 0:
                params["mu"] = coef["intercept"]
            else:
                params["mu"] = coef["drift"] * trend_scale(spec)
                conversions.append(
                    f"mu = {trend_scale(spec):g} x drift (slope per period in levels)"
                )
        n_w = int(fit["nobs"])
        n_coef = int(np.sum(fit["mask"]))
        sigma2_reported = float(fit["sigma2"])
        sigma2_ml = df_adjusted_to_ml_sigma2(sigma2_reported, n_w, n_coef)
        code = int(fit["code"])
        options = {
            name: getattr(model, name)
            for name in inspect.signature(ARIMA.__init__).parameters
            if name != "self" and hasattr(model, name)
        }
        overridden = {"include_mean": True} if s == 0 and not spec.mean else {}
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
            overridden_defaults=overridden,
            native=model,
        )

    def _forecast(self, native, steps: int, levels: tuple[float, ...]) -> ForecastOutput:  # type: ignore[no-untyped-def]
        levels_int = [int(level) if float(level).is_integer() else level for level in levels]
        out = native.predict(h=steps, level=levels_int)
        lower = {
            lv: np.asarray(out[f"lo-{li}"], dtype=float)
            for lv, li in zip(levels, levels_int, strict=True)
        }
        upper = {
            lv: np.asarray(out[f"hi-{li}"], dtype=float)
            for lv, li in zip(levels, levels_int, strict=True)
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
            sigma2_used=float(native.model_["sigma2"]),
            residuals=np.asarray(native.model_["residuals"], dtype=float),
        )
