"""statsmodels ``tsa.arima.model.ARIMA``, run as its users run it.

Spec -> call: orders and period from the spec. The constant is a regression with ARIMA
errors: ``trend='c'`` (a mean equal to mu) without differencing, and with d + D = s > 0 a
trend on ``t^s`` alone (``trend='t'`` for s = 1), whose coefficient b gives
mu = s! m^D b. Without a mean the trend is ``'n'``, passed explicitly because the library
adds a constant by default when d + D = 0.
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
    )

    def _fit(self, request: FitRequest) -> FitOutput:
        from statsmodels.tsa.arima.model import ARIMA

        y, spec = request.y, request.spec
        model = ARIMA(
            y,
            order=spec.order,
            seasonal_order=(*spec.seasonal, spec.period or 0),
            trend=_trend_for(spec),
        )
        result = model.fit()
        mean_kind = "mean" if spec.n_differences == 0 else "trend"
        # The trend columns come first among the model's regression names ("const", or the
        # trend on t^s, which statsmodels calls "x1" like a first regressor).
        constant = next(iter(model.exog_names or [None])) if spec.mean else None
        # The library adds a constant by default when d + D = 0; the spec decides instead.
        overridden = {"trend": "c"} if spec.n_differences == 0 and not spec.mean else {}
        return _statespace.to_fit_output(
            result, spec, mean_kind, constant_name=constant, overridden_defaults=overridden
        )

    def _forecast(self, native, steps: int, levels: tuple[float, ...]) -> ForecastOutput:  # type: ignore[no-untyped-def]
        return _statespace.statespace_forecast(native, steps, levels)
