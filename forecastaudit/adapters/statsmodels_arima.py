"""statsmodels ``tsa.arima.model.ARIMA``, run as its users run it.

Spec -> call: orders and period from the spec. The constant is a regression with ARIMA
errors: ``trend='c'`` (a mean equal to mu) without differencing, and with d + D = s > 0 a
trend on ``t^s`` alone (``trend='t'`` for s = 1), whose coefficient b gives
mu = s! m^D b. Without a mean the trend is ``'n'``, passed explicitly because the library
adds a constant by default when d + D = 0. Regressors are passed as ``exog`` (a DataFrame
named by the spec): the library regresses on the levels with ARIMA errors and puts its trend
columns first among the regression terms, so the regressors are mapped back by position.

Own likelihood at given parameters: ``model.loglike(vector)`` on the model built exactly as
for the fit (the same default approximate diffuse prior and burn-in of d + mD observations),
with the canonical values mapped by the model's own ``param_names`` (``const`` = mu, or the
trend coefficient b = mu / (s! m^D)) and sigma2 as given.
"""

from __future__ import annotations

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


def _trend_for(spec: ModelSpec) -> str | list[int]:
    if not spec.mean:
        return "n"
    if spec.n_differences == 0:
        return "c"
    if spec.n_differences == 1:
        return "t"
    return [0] * spec.n_differences + [1]


@register_estimator
class StatsmodelsArima(EstimatorAdapter):
    """statsmodels tsa.arima ARIMA with its default fit (state-space, L-BFGS)."""

    key = "statsmodels-arima"
    engine = _statespace.ENGINE
    package = "statsmodels"
    module = "statsmodels.tsa.arima.model"
    description = "statsmodels tsa.arima ARIMA"
    capabilities = Capabilities(
        mean_differences=frozenset(range(0, 6)),
        regressors=True,
        regression_form="levels",
        own_loglike=True,
    )

    @staticmethod
    def _model(request: FitRequest):  # type: ignore[no-untyped-def]
        from statsmodels.tsa.arima.model import ARIMA

        spec = request.spec
        return ARIMA(
            request.y,
            exog=request.regressor_frame() if spec.regressors else None,
            order=spec.order,
            seasonal_order=(*spec.seasonal, spec.period or 0),
            trend=_trend_for(spec),
        )

    @staticmethod
    def _mean_of(model, spec: ModelSpec) -> tuple[_statespace.MeanKind, str | None]:  # type: ignore[no-untyped-def]
        """How the constant enters the model, and its native name."""
        mean_kind: _statespace.MeanKind = "mean" if spec.n_differences == 0 else "trend"
        # The trend columns come first among the model's regression names ("const", or the
        # trend on t^s, which statsmodels calls "x1" like a first regressor).
        constant = next(iter(model.exog_names or [None])) if spec.mean else None
        return mean_kind, constant

    def _fit(self, request: FitRequest) -> FitOutput:
        spec = request.spec
        model = self._model(request)
        result = model.fit()
        mean_kind, constant = self._mean_of(model, spec)
        # The library adds a constant by default when d + D = 0; the spec decides instead.
        overridden = {"trend": "c"} if spec.n_differences == 0 and not spec.mean else {}
        return _statespace.to_fit_output(
            result,
            spec,
            mean_kind,
            constant_name=constant,
            overridden_defaults=overridden,
            notes=[_statespace.REGRESSION_NOTE] if spec.regressors else [],
        )

    def _loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        # The same model object as the fit: its own prior, burn-in and regression constant.
        model = self._model(request)
        mean_kind, constant = self._mean_of(model, request.spec)
        return _statespace.model_loglike(model, request.spec, params, mean_kind, constant)

    def _forecast(
        self, native, steps: int, levels: tuple[float, ...], future=None
    ) -> ForecastOutput:  # type: ignore[no-untyped-def]
        return _statespace.statespace_forecast(native, steps, levels, future)
