"""statsforecast ``models.AutoARIMA``, run as its users run it (its own compiled engine).

Settings -> call: only ``season_length`` is passed, plus any harmonised setting, and
``trace=True`` so that the candidates fitted can be counted from the printed trace (trace
changes only what is printed). Defaults are read from the class signature at run time.

The differencing decisions are recomputed with the library's own functions, in the order
``auto_arima_f`` takes them (measured in statsforecast 2.1): D by
``statsforecast.arima.nsdiffs`` on the levels (default ``seasonal_test='seas'``: the
seasonal strength of an STL decomposition, ``seas_heuristic``, above 0.64 means
difference), then d by ``statsforecast.arima.ndiffs`` on the seasonally differenced series
(KPSS through ``statsmodels.tsa.kpss(x, 'c', nlags=floor(3 sqrt(n) / 13))``, difference when
p < 0.05). The recomputed steps are checked against ``nsdiffs`` / ``ndiffs`` themselves; a
mismatch is noted.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from forecastaudit.adapters.registry import register_search
from forecastaudit.adapters.search_pmdarima import (
    _applied,
    kpss_statistic,
    signature_defaults,
    teed_stdout,
)
from forecastaudit.adapters.search_protocol import SearchAdapter, SearchResult, count_trace_lines
from forecastaudit.estimate import DifferencingTest, SearchSettings

ENGINE = "statsforecast-arima"

#: Seasonal-strength threshold of ``nsdiffs(test='seas')`` (measured in statsforecast 2.1).
SEASONAL_STRENGTH_THRESHOLD = 0.64

_CRITERION_DEFINITIONS = {
    "aic": "-2 loglike + 2 k, k = coefficients + sigma2, exact likelihood of n_w observations",
    "aicc": "AIC + 2k(k+1)/(n_w-k-1), n_w = n - d - mD (the differenced series)",
    "bic": "AIC + k (ln(n_w) - 2), n_w = n - d - mD",
}


def constant_rule(allowdrift: bool, allowmean: bool) -> str:
    """The canonical constant rule of statsforecast's ``allowdrift`` / ``allowmean``.

    With either allowed, a mean (d + D = 0) or a drift (d + D = 1) is considered and the
    stepwise search also tries without; with d + D >= 2 no constant is offered.
    """
    return "auto" if (allowdrift or allowmean) else "never"


def constant_flags(rule: str) -> dict[str, bool]:
    """``allowdrift`` / ``allowmean`` for a canonical rule ("always" is not offered by the
    library for d + D >= 2; it is mapped to "auto")."""
    allowed = rule != "never"
    return {"allowdrift": allowed, "allowmean": allowed}


def differencing_tests(
    y: np.ndarray,
    m: int,
    *,
    test: str,
    seasonal_test: str,
    max_d: int,
    max_D: int,
    d_fixed: int | None,
    D_fixed: int | None,
) -> tuple[list[DifferencingTest], list[str]]:
    """Every step of statsforecast's differencing decisions on ``y``, with its own tests."""
    from statsforecast.arima import diff, ndiffs, nsdiffs, seas_heuristic

    steps: list[DifferencingTest] = []
    notes: list[str] = []
    x = np.asarray(y, dtype=float)
    D = D_fixed
    if m > 1 and D_fixed is None:
        level = x
        for before in range(max_D):
            if seasonal_test != "seas" or len(level) < 2 * m:
                break
            score = float(seas_heuristic(level, m))
            says = score > SEASONAL_STRENGTH_THRESHOLD
            steps.append(
                DifferencingTest(
                    decision="seasonal",
                    test="seasonal strength of an STL decomposition (Wang, Smith & Hyndman 2006)",
                    applied_to=_applied(before, 0, m),
                    differences_before=before,
                    statistic=score,
                    p_value=math.nan,
                    threshold=SEASONAL_STRENGTH_THRESHOLD,
                    lags=None,
                    lag_rule="no lags: 1 - var(remainder) / var(remainder + seasonal)",
                    says_difference=bool(says),
                    source="statsforecast.arima.seas_heuristic",
                )
            )
            if not says:
                break
            level = diff(level, m, 1)
        D = int(nsdiffs(x, period=m, test=seasonal_test, max_D=max_D))
        recomputed = sum(s.says_difference for s in steps)
        if seasonal_test == "seas" and recomputed != D:
            notes.append(f"nsdiffs chose D={D}; the recomputed steps say {recomputed}")
    D = int(D or 0)
    dx = diff(x, m, D) if D > 0 else x
    if d_fixed is None:
        level = dx[~np.isnan(dx)]
        for before in range(max_d):
            if test != "kpss":
                notes.append(f"unit-root test {test!r}: only its decision is reported")
                break
            n = level.size
            lags = math.floor(3 * math.sqrt(n) / 13)
            stat, p_value = kpss_statistic(level, lags)
            says = p_value < 0.05
            steps.append(
                DifferencingTest(
                    decision="regular",
                    test=(
                        "KPSS level-stationarity test (Kwiatkowski, Phillips, Schmidt & Shin 1992)"
                    ),
                    applied_to=_applied(D, before, m),
                    differences_before=before,
                    statistic=float(stat),
                    p_value=float(p_value),
                    threshold=0.05,
                    lags=int(lags),
                    lag_rule=f"floor(3 sqrt(n) / 13) with n = {n}; difference when p < alpha",
                    says_difference=bool(says),
                    source="statsmodels.tsa.stattools.kpss, as statsforecast.arima.ndiffs calls it",
                )
            )
            if not says:
                break
            level = np.diff(level)
        d = int(ndiffs(dx, test=test, max_d=max_d))
        recomputed = sum(s.says_difference for s in steps if s.decision == "regular")
        if test == "kpss" and recomputed != d:
            notes.append(f"ndiffs chose d={d}; the recomputed steps say {recomputed}")
    return steps, notes


def settings_to_statsforecast(settings: SearchSettings) -> dict[str, Any]:
    """statsforecast keyword arguments for the harmonised settings."""
    kwargs: dict[str, Any] = {}
    if settings.d is not None:
        kwargs["d"] = settings.d
    if settings.D is not None:
        kwargs["D"] = settings.D
    if settings.criterion is not None:
        kwargs["ic"] = settings.criterion
    if settings.constant is not None:
        kwargs.update(constant_flags(settings.constant))
    if settings.stepwise is not None:
        kwargs["stepwise"] = settings.stepwise
    for name in ("max_p", "max_q", "max_P", "max_Q"):
        value = getattr(settings, name)
        if value is not None:
            kwargs[name] = value
    return kwargs


def read_selection(fit: dict[str, Any]) -> tuple[tuple[int, int, int], tuple[int, int, int], bool]:
    """Orders and constant of a statsforecast fitted model dictionary (``arma`` is
    ``(p, q, P, Q, m, d, D)``)."""
    p, q, P, Q, _m, d, D = (int(v) for v in fit["arma"])
    names = {str(k) for k in fit["coef"]}
    return (p, d, q), (P, D, Q), bool(names & {"intercept", "drift"})


def result_from_fit(
    fit: dict[str, Any],
    y: np.ndarray,
    m: int,
    settings: SearchSettings,
    options: dict[str, Any],
    *,
    criterion: str,
    allow_drift: bool,
    allow_mean: bool,
    printed: str,
    seconds: float,
    native: Any,
) -> SearchResult:
    """Read a search result from the ``model_`` dict of a fitted statsforecast AutoARIMA.

    Shared by every wrapper of statsforecast's search (its engine); the wrappers name the
    criterion and constant options differently, so they pass them in.
    """
    order, seasonal, constant = read_selection(fit)
    tests, notes = differencing_tests(
        y,
        m,
        test=options["test"],
        seasonal_test=options["seasonal_test"],
        max_d=int(options["max_d"]),
        max_D=int(options["max_D"]),
        d_fixed=settings.d,
        D_fixed=settings.D,
    )
    notes.append(
        "trace=True is set by forecastaudit to count the candidates; it changes only "
        "what is printed"
    )
    return SearchResult(
        order=order,
        seasonal=seasonal,
        constant=constant,
        criterion=criterion,
        criterion_value=float(fit[criterion]),
        criterion_definition=_CRITERION_DEFINITIONS.get(criterion, criterion),
        candidates=count_trace_lines(printed, "ARIMA("),
        d_decided_by="fixed" if settings.d is not None else "test",
        D_decided_by="fixed" if settings.D is not None or m == 1 else "test",
        tests=tests,
        constant_rule=constant_rule(allow_drift, allow_mean),
        stepwise=bool(options["stepwise"]),
        bounds={k: options.get(k) for k in ("max_p", "max_q", "max_P", "max_Q", "max_order")},
        options=options,
        seconds=seconds,
        notes=notes,
        native=native,
    )


@register_search
class StatsforecastSearch(SearchAdapter):
    """statsforecast's ``AutoARIMA`` with its defaults."""

    key = "statsforecast"
    engine = ENGINE
    package = "statsforecast"
    module = "statsforecast.models"
    description = "statsforecast AutoARIMA"

    def _run(self, y: np.ndarray, m: int, settings: SearchSettings) -> SearchResult:
        import time

        from statsforecast.models import AutoARIMA

        options = {**signature_defaults(AutoARIMA.__init__), "season_length": m, "trace": True}
        overrides = settings_to_statsforecast(settings)
        options.update(overrides)
        started = time.perf_counter()
        with teed_stdout() as printed:
            model = AutoARIMA(season_length=m, trace=True, **overrides)
            model.fit(y)
        seconds = time.perf_counter() - started
        return result_from_fit(
            model.model_,
            y,
            m,
            settings,
            options,
            criterion=str(options["ic"]),
            allow_drift=bool(options["allowdrift"]),
            allow_mean=bool(options["allowmean"]),
            printed=printed.getvalue(),
            seconds=seconds,
            native=model,
        )
