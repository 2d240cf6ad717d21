"""sktime ``forecasting.arima.ARIMA``, run as its users run it (engine: pmdarima, hence
statsmodels SARIMAX).

Spec -> call: orders and period from the spec; ``with_intercept`` set from the spec's mean,
explicitly, because the library default (True) adds an intercept c for any differencing.
sktime needs a pandas Series; a positional index is used, the values are those given.
Regressors go in as ``X`` (a DataFrame on the same positional index; the future values on
the positions after it), passed on to pmdarima and statsmodels' SARIMAX ``exog``.

Own likelihood at given parameters: sktime's fit hands its own pmdarima ``ARIMA`` (built by
the forecaster from its settings, including the SARIMAX options sktime passes explicitly:
``enforce_stationarity``, ``simple_differencing``, ``measurement_error``, ...) the series;
the same pmdarima estimator is built from a forecaster with the same settings, and the
SARIMAX model it fits is rebuilt (:func:`~forecastaudit.adapters.pmdarima_arima.pmdarima_sarimax`)
and evaluated with ``model.loglike(vector)``.
"""

from __future__ import annotations

import numpy as np

from forecastaudit.adapters import _statespace
from forecastaudit.adapters.pmdarima_arima import pmdarima_sarimax
from forecastaudit.adapters.protocol import (
    Capabilities,
    EstimatorAdapter,
    FitOutput,
    FitRequest,
    ForecastOutput,
)
from forecastaudit.adapters.registry import register_estimator
from forecastaudit.spec import ModelSpec


@register_estimator
class SktimeArima(EstimatorAdapter):
    """sktime's ARIMA forecaster with its defaults."""

    key = "sktime"
    engine = _statespace.ENGINE
    package = "sktime"
    module = "sktime.forecasting.arima"
    description = "sktime ARIMA forecaster"
    capabilities = Capabilities(
        mean_differences=frozenset(range(0, 6)),
        regressors=True,
        regression_form="levels",
        own_loglike=True,
    )

    @staticmethod
    def _forecaster(spec: ModelSpec):  # type: ignore[no-untyped-def]
        from sktime.forecasting.arima import ARIMA

        return ARIMA(
            order=spec.order,
            seasonal_order=(*spec.seasonal, spec.period or 0),
            with_intercept=spec.mean,
        )

    def _fit(self, request: FitRequest) -> FitOutput:
        import pandas as pd

        y, spec = request.y, request.spec

        forecaster = self._forecaster(spec)
        if spec.regressors:
            forecaster.fit(pd.Series(y), X=request.regressor_frame())
        else:
            forecaster.fit(pd.Series(y))
        fitted = forecaster.get_fitted_params()
        criteria = {name: float(fitted[name]) for name in ("aic", "aicc", "bic") if name in fitted}
        result = forecaster._forecaster.arima_res_  # the pmdarima model sktime holds
        return _statespace.to_fit_output(
            result,
            spec,
            "intercept",
            options={"sktime": dict(forecaster.get_params())},
            criteria=criteria,
            notes=[
                "sktime reports statsmodels' aic, aicc and bic (not pmdarima's aicc)",
                *([_statespace.REGRESSION_NOTE + "; passed as X="] if spec.regressors else []),
            ],
            overridden_defaults={} if spec.mean else {"with_intercept": True},
            native=forecaster,
        )

    def _loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        # The pmdarima estimator sktime's fit would create (its private factory, the one
        # its fit calls), and the SARIMAX model that estimator builds.
        estimator = self._forecaster(request.spec)._instantiate_model()
        x = request.regressor_frame() if request.spec.regressors else None
        model = pmdarima_sarimax(estimator, request.y, x)
        return _statespace.model_loglike(model, request.spec, params, "intercept")

    def _forecast(
        self, native, steps: int, levels: tuple[float, ...], future=None
    ) -> ForecastOutput:  # type: ignore[no-untyped-def]
        import pandas as pd

        fh = list(range(1, steps + 1))
        x = None
        if future is not None:
            start = len(native._y)  # the positions after the fitted series
            columns = list(native._X.columns)
            x = pd.DataFrame(future, columns=columns, index=pd.RangeIndex(start, start + steps))
        mean = np.asarray(native.predict(fh=fh, X=x), dtype=float)
        coverage = [level / 100.0 for level in levels]
        intervals = native.predict_interval(fh=fh, X=x, coverage=coverage)
        lower, upper = {}, {}
        for level, cov in zip(levels, coverage, strict=True):
            columns = [c for c in intervals.columns if abs(float(c[1]) - cov) < 1e-12]
            frame = intervals[columns]
            lower[level] = frame.xs("lower", axis=1, level=-1).to_numpy().ravel()
            upper[level] = frame.xs("upper", axis=1, level=-1).to_numpy().ravel()
        result = native._forecaster.arima_res_
        names = list(result.model.param_names)
        return ForecastOutput(
            mean=mean,
            lower=lower,
            upper=upper,
            se=None,
            interval_method=_statespace.INTERVAL_METHOD + "; via sktime predict_interval()",
            sigma2_used=float(np.asarray(result.params)[names.index("sigma2")]),
            residuals=np.asarray(result.resid, dtype=float),
        )
