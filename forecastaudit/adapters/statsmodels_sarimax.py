"""statsmodels ``tsa.statespace.sarimax.SARIMAX``, run as its users run it.

Spec -> call: orders and period from the spec; ``trend='c'`` when the spec has a mean (an
intercept c in the differenced equation, converted to mu = c / (phi(1)Phi(1))), else
``trend='n'``; regressors as ``exog``, a DataFrame with the spec's column names (a
regression on the levels with ARIMA errors, the library's default; coefficients mapped back
by position, see :func:`~forecastaudit.adapters._statespace.regressor_positions`); every
other option is the library default, read back and recorded.
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
from forecastaudit.spec import ModelSpec


@register_estimator
class StatsmodelsSarimax(EstimatorAdapter):
    """statsmodels SARIMAX with its default fit (L-BFGS, 50 iterations)."""

    key = "statsmodels-sarimax"
    engine = _statespace.ENGINE
    package = "statsmodels"
    module = "statsmodels.tsa.statespace.sarimax"
    description = "statsmodels SARIMAX"
    capabilities = Capabilities(
        mean_differences=frozenset(range(0, 6)),
        regressors=True,
        regression_form="levels",
        own_loglike=True,
        forecast_at_params=True,
    )

    @staticmethod
    def _model(request: FitRequest):  # type: ignore[no-untyped-def]
        from statsmodels.tsa.statespace.sarimax import SARIMAX

        spec = request.spec
        return SARIMAX(
            request.y,
            exog=request.regressor_frame() if spec.regressors else None,
            order=spec.order,
            seasonal_order=(*spec.seasonal, spec.period or 0),
            trend="c" if spec.mean else "n",
        )

    def _fit(self, request: FitRequest) -> FitOutput:
        result = self._model(request).fit(disp=False)
        notes = [_statespace.REGRESSION_NOTE] if request.spec.regressors else []
        return _statespace.to_fit_output(result, request.spec, "intercept", notes=notes)

    def _loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        # The same model object as the fit (same diffuse prior and burn-in): its own objective.
        model = self._model(request)
        vector = _statespace.native_vector(list(model.param_names), request.spec, params)
        return float(model.loglike(vector))

    def _forecast(
        self, native, steps: int, levels: tuple[float, ...], future=None
    ) -> ForecastOutput:  # type: ignore[no-untyped-def]
        return _statespace.statespace_forecast(native, steps, levels, future)

    def _forecast_at(
        self,
        y: np.ndarray,
        spec: ModelSpec,
        params: dict[str, float],
        steps: int,
        levels: tuple[float, ...],
        regressors: np.ndarray | None = None,
        future: np.ndarray | None = None,
    ) -> ForecastOutput:
        request = FitRequest(y, spec, regressors)
        model = self._model(request)
        result = model.filter(_statespace.native_vector(list(model.param_names), spec, params))
        return _statespace.statespace_forecast(result, steps, levels, future)
