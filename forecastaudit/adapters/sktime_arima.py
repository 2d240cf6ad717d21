"""sktime ``forecasting.arima.ARIMA``, run as its users run it (engine: pmdarima, hence
statsmodels SARIMAX).

Spec -> call: orders and period from the spec; ``with_intercept`` set from the spec's mean,
explicitly, because the library default (True) adds an intercept c for any differencing.
sktime needs a pandas Series; a positional index is used, the values are those given.
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
class SktimeArima(EstimatorAdapter):
    """sktime's ARIMA forecaster with its defaults."""

    key = "sktime"
    engine = _statespace.ENGINE
    package = "sktime"
    module = "sktime.forecasting.arima"
    description = "sktime ARIMA forecaster"
    capabilities = Capabilities(
        mean_differences=frozenset(range(0, 6)),
    )

    def _fit(self, request: FitRequest) -> FitOutput:
        import pandas as pd
        from sktime.forecasting.arima import ARIMA

        y, spec = request.y, request.spec

        forecaster = ARIMA(
            order=spec.order,
            seasonal_order=(*spec.seasonal, spec.period or 0),
            with_intercept=spec.mean,
        )
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
            notes=["sktime reports statsmodels' aic, aicc and bic (not pmdarima's aicc)"],
            overridden_defaults={} if spec.mean else {"with_intercept": True},
            native=forecaster,
        )

    def _forecast(self, native, steps: int, levels: tuple[float, ...]) -> ForecastOutput:  # type: ignore[no-untyped-def]
        fh = list(range(1, steps + 1))
        mean = np.asarray(native.predict(fh=fh), dtype=float)
        coverage = [level / 100.0 for level in levels]
        intervals = native.predict_interval(fh=fh, coverage=coverage)
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
