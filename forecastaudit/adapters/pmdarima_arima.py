"""pmdarima ``arima.ARIMA``, run as its users run it (engine: statsmodels SARIMAX).

Spec -> call: orders and period from the spec; ``with_intercept`` set from the spec's mean,
explicitly, because the library default (True) adds an intercept c for any differencing,
which with d + D = 2 is a quadratic trend in levels. pmdarima passes the intercept to SARIMAX
as ``trend='c'``, converted to mu = c / (phi(1)Phi(1)). Its ``aicc()`` counts n = len(y).
"""

from __future__ import annotations

import numpy as np

from forecastaudit.adapters import _statespace
from forecastaudit.adapters.protocol import (
    Capabilities,
    EstimatorAdapter,
    FitOutput,
    FitRequest,
    ForecastOutput,
)
from forecastaudit.adapters.registry import register_estimator


@register_estimator
class PmdarimaArima(EstimatorAdapter):
    """pmdarima ARIMA with its default fit."""

    key = "pmdarima"
    engine = _statespace.ENGINE
    package = "pmdarima"
    module = "pmdarima.arima"
    description = "pmdarima ARIMA"
    capabilities = Capabilities(
        mean_differences=frozenset(range(0, 6)),
    )

    def _fit(self, request: FitRequest) -> FitOutput:
        from pmdarima.arima import ARIMA

        y, spec = request.y, request.spec

        model = ARIMA(
            order=spec.order,
            seasonal_order=(*spec.seasonal, spec.period or 0),
            with_intercept=spec.mean,
        )
        model.fit(y)
        n = len(y)
        return _statespace.to_fit_output(
            model.arima_res_,
            spec,
            "intercept",
            options={"pmdarima": dict(model.get_params())},
            criteria={"aic": model.aic(), "aicc": model.aicc(), "bic": model.bic()},
            notes=[
                f"pmdarima's aicc() counts n = len(y) = {n}; its aic and bic are statsmodels' "
                "(n = observations after the burn-in)"
            ],
            overridden_defaults={} if spec.mean else {"with_intercept": True},
            native=model,
        )

    def _forecast(self, native, steps: int, levels: tuple[float, ...]) -> ForecastOutput:  # type: ignore[no-untyped-def]
        lower, upper = {}, {}
        mean = None
        for level in levels:
            mean, bounds = native.predict(
                n_periods=steps, return_conf_int=True, alpha=1.0 - level / 100.0
            )
            bounds = np.asarray(bounds)
            lower[level], upper[level] = bounds[:, 0], bounds[:, 1]
        result = native.arima_res_
        names = list(result.model.param_names)
        return ForecastOutput(
            mean=np.asarray(mean, dtype=float),
            lower=lower,
            upper=upper,
            se=None,
            interval_method=_statespace.INTERVAL_METHOD + "; via pmdarima predict()",
            sigma2_used=float(np.asarray(result.params)[names.index("sigma2")]),
            residuals=np.asarray(native.resid(), dtype=float),
        )
