"""sktime's automatic order searches, run as their users run them.

``sktime.forecasting.arima.AutoARIMA`` wraps pmdarima's ``auto_arima`` (same engine, the
candidates are fitted by statsmodels SARIMAX) with sktime's own defaults, among them
``with_intercept=True`` and ``suppress_warnings=False``.
``sktime.forecasting.statsforecast.StatsForecastAutoARIMA`` wraps statsforecast's
``AutoARIMA`` (its compiled engine) with sktime's own defaults. Defaults are read from the
class signatures at run time; ``trace=True`` is set to count the candidates from the printed
trace (it changes only what is printed). The differencing tests are those of the wrapped
library, recomputed with its own functions on the same data.
"""

from __future__ import annotations

import time
from typing import Any

import numpy as np

from forecastaudit.adapters import search_pmdarima, search_statsforecast
from forecastaudit.adapters.registry import register_search
from forecastaudit.adapters.search_pmdarima import signature_defaults, teed_stdout
from forecastaudit.adapters.search_protocol import SearchAdapter, SearchResult
from forecastaudit.estimate import SearchSettings


@register_search
class SktimeSearch(SearchAdapter):
    """sktime's ``AutoARIMA`` (pmdarima inside) with sktime's defaults."""

    key = "sktime"
    engine = search_pmdarima.ENGINE
    package = "sktime"
    module = "sktime.forecasting.arima"
    description = "sktime AutoARIMA (wraps pmdarima auto_arima)"

    def _run(self, y: np.ndarray, m: int, settings: SearchSettings) -> SearchResult:
        import pandas as pd
        from sktime.forecasting.arima import AutoARIMA

        overrides = search_pmdarima.settings_to_pmdarima(settings)
        options: dict[str, Any] = {**signature_defaults(AutoARIMA.__init__), "sp": m}
        options.update({**overrides, "trace": True})
        started = time.perf_counter()
        with teed_stdout() as printed:
            forecaster = AutoARIMA(sp=m, trace=True, **overrides)
            forecaster.fit(pd.Series(y))
        seconds = time.perf_counter() - started
        model = forecaster._forecaster.model_  # the fitted pmdarima ARIMA sktime holds
        return search_pmdarima.result_from_model(
            model, y, m, settings, options, printed.getvalue(), seconds, forecaster
        )


@register_search
class SktimeStatsforecastSearch(SearchAdapter):
    """sktime's ``StatsForecastAutoARIMA`` (statsforecast inside) with sktime's defaults."""

    key = "sktime-statsforecast"
    engine = search_statsforecast.ENGINE
    package = "sktime"
    module = "sktime.forecasting.statsforecast"
    description = "sktime StatsForecastAutoARIMA (wraps statsforecast AutoARIMA)"

    def availability(self) -> str | None:
        """Both sktime's wrapper and statsforecast itself must import."""
        missing = super().availability()
        if missing is not None:
            return missing
        try:
            import statsforecast.models  # noqa: F401
        except Exception as exc:  # the wrapped library is missing or broken
            return f"statsforecast could not be imported ({type(exc).__name__}: {exc})"
        return None

    def _run(self, y: np.ndarray, m: int, settings: SearchSettings) -> SearchResult:
        import pandas as pd
        from sktime.forecasting.statsforecast import StatsForecastAutoARIMA

        native = search_statsforecast.settings_to_statsforecast(settings)
        # sktime's names for statsforecast's options (sktime maps them back on fit).
        rename = {
            "ic": "information_criterion",
            "allowdrift": "trend",
            "allowmean": "with_intercept",
        }
        overrides = {rename.get(k, k): v for k, v in native.items()}
        options: dict[str, Any] = {**signature_defaults(StatsForecastAutoARIMA.__init__), "sp": m}
        options.update({**overrides, "trace": True})
        started = time.perf_counter()
        with teed_stdout() as printed:
            forecaster = StatsForecastAutoARIMA(sp=m, trace=True, **overrides)
            forecaster.fit(pd.Series(y))
        seconds = time.perf_counter() - started
        return search_statsforecast.result_from_fit(
            forecaster._forecaster.model_,
            y,
            m,
            settings,
            options,
            criterion=str(options["information_criterion"]),
            allow_drift=bool(options["trend"]),
            allow_mean=bool(options["with_intercept"]),
            printed=printed.getvalue(),
            seconds=seconds,
            native=forecaster,
        )
