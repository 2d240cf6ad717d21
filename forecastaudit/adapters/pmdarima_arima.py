"""pmdarima ``arima.ARIMA``, run as its users run it (engine: statsmodels SARIMAX).

Spec -> call: orders and period from the spec; ``with_intercept`` set from the spec's mean,
explicitly, because the library default (True) adds an intercept c for any differencing,
which with d + D = 2 is a quadratic trend in levels. pmdarima passes the intercept to SARIMAX
as ``trend='c'``, converted to mu = c / (phi(1)Phi(1)). Its ``aicc()`` counts n = len(y).

Own likelihood at given parameters: pmdarima's fit builds one statsmodels SARIMAX from its
own settings (:func:`pmdarima_sarimax` rebuilds that same model, with the same trend and
every SARIMAX option pmdarima passes) and reports that model's llf; ``model.loglike(vector)``
on it is the same objective, at the canonical values mapped by its ``param_names``.
"""

from __future__ import annotations

from typing import Any

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
from forecastaudit.spec import ModelSpec


def pmdarima_sarimax(estimator: Any, y: np.ndarray, x: Any = None) -> Any:
    """The statsmodels SARIMAX model a pmdarima ``ARIMA`` estimator's ``fit(y)`` builds.

    Mirrors pmdarima 2.x ``ARIMA.fit`` / ``_fit``: ``y`` as float64, ``trend`` the
    estimator's own, else ``'c'`` when ``with_intercept`` is true (else None, no trend), the
    seasonal order through pmdarima's own check, and the estimator's ``sarimax_kwargs``
    (whatever its constructor was given beyond its own options) passed on unchanged, and the
    regressors ``x`` (a DataFrame or None) as ``exog``. Used by
    every adapter whose fit ends in a pmdarima ``ARIMA`` (pmdarima's, and sktime's wrapper).

    Raises
    ------
    NotImplementedError
        With ``out_of_sample_size`` > 0, where pmdarima fits a shortened series and then
        updates the result: that is not one model's likelihood.
    """
    from pmdarima.compat.statsmodels import check_seasonal_order
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    if getattr(estimator, "out_of_sample_size", 0):
        raise NotImplementedError(
            "with out_of_sample_size > 0 pmdarima fits a shortened series and updates it; "
            "its likelihood is not rebuilt"
        )
    trend = estimator.trend
    if trend is None and estimator.with_intercept:
        trend = "c"
    return SARIMAX(
        endog=np.asarray(y, dtype=np.float64),
        exog=x,
        order=estimator.order,
        seasonal_order=check_seasonal_order(estimator.seasonal_order),
        trend=trend,
        **dict(estimator.sarimax_kwargs or {}),
    )


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
        regressors=True,
        regression_form="levels",
        own_loglike=True,
    )

    @staticmethod
    def _estimator(spec: ModelSpec) -> Any:
        from pmdarima.arima import ARIMA

        return ARIMA(
            order=spec.order,
            seasonal_order=(*spec.seasonal, spec.period or 0),
            with_intercept=spec.mean,
        )

    def _fit(self, request: FitRequest) -> FitOutput:
        y, spec = request.y, request.spec

        model = self._estimator(spec)
        x = request.regressor_frame() if spec.regressors else None
        model.fit(y, X=x) if x is not None else model.fit(y)
        n = len(y)
        return _statespace.to_fit_output(
            model.arima_res_,
            spec,
            "intercept",
            options={"pmdarima": dict(model.get_params())},
            criteria={"aic": model.aic(), "aicc": model.aicc(), "bic": model.bic()},
            notes=[
                f"pmdarima's aicc() counts n = len(y) = {n}; its aic and bic are statsmodels' "
                "(n = observations after the burn-in)",
                *([_statespace.REGRESSION_NOTE + "; passed as X="] if spec.regressors else []),
            ],
            overridden_defaults={} if spec.mean else {"with_intercept": True},
            native=model,
        )

    def _loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        # The SARIMAX model pmdarima's fit would build from the same estimator settings.
        x = request.regressor_frame() if request.spec.regressors else None
        model = pmdarima_sarimax(self._estimator(request.spec), request.y, x)
        return _statespace.model_loglike(model, request.spec, params, "intercept")

    def _forecast(
        self, native, steps: int, levels: tuple[float, ...], future=None
    ) -> ForecastOutput:  # type: ignore[no-untyped-def]
        import pandas as pd

        lower, upper = {}, {}
        mean = None
        x = None
        if future is not None:
            columns = list(native.arima_res_.model.exog_names)[-future.shape[1] :]
            x = pd.DataFrame(future, columns=columns)
        for level in levels:
            mean, bounds = native.predict(
                n_periods=steps, X=x, return_conf_int=True, alpha=1.0 - level / 100.0
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
