"""pmdarima ``arima.auto_arima``, run as its users run it (candidates fitted by statsmodels
SARIMAX).

Settings -> call: only the period ``m`` is passed, plus any harmonised setting, and
``trace=True`` so that the candidates fitted can be counted from the printed trace (trace
changes only what is printed). The library's defaults are read from its signature at run
time, so a new default shows up in the record.

The differencing decisions are recomputed after the search with the library's own tests on
the same data, in the order ``auto_arima`` takes them (measured in pmdarima 2.1): first D by
``nsdiffs`` on the levels (default seasonal test OCSB, ``OCSBTest(m).
estimate_seasonal_differencing_term``: statistic above the critical value means difference),
then d by ``ndiffs`` on the seasonally differenced series (default KPSS level test,
``KPSSTest(alpha).should_diff``, lag truncation ``trunc(4 (n/100)^(1/4))``).
"""

from __future__ import annotations

import contextlib
import inspect
import io
import math
import sys
import warnings
from typing import Any

import numpy as np

from forecastaudit.adapters.registry import register_search
from forecastaudit.adapters.search_protocol import SearchAdapter, SearchResult, count_trace_lines
from forecastaudit.estimate import DifferencingTest, SearchSettings

ENGINE = "statsmodels-statespace"

_CRITERION_DEFINITIONS = {
    "aic": "statsmodels' AIC: -2 loglike + 2 k, k = free parameters with sigma2",
    "aicc": (
        "pmdarima's AICc: statsmodels' AIC + 2k(k+1)/(n-k-1) with n = len(y), all "
        "observations (not the n_w left after differencing)"
    ),
    "bic": "statsmodels' BIC: -2 loglike + k ln(n), n = observations after the burn-in",
}


def signature_defaults(func: Any) -> dict[str, Any]:
    """Default values of a callable's keyword parameters, as installed."""
    return {
        name: p.default
        for name, p in inspect.signature(func).parameters.items()
        if p.default is not inspect.Parameter.empty
    }


def constant_rule(with_intercept: Any) -> str:
    """The canonical constant rule of a pmdarima ``with_intercept`` value.

    ``'auto'`` gives a constant when d + D is 0 or 1 and the stepwise search also tries
    the model without it; ``True`` keeps one for any differencing (measured in pmdarima
    2.1: the stepwise search toggles it too, see ``_StepwiseFitWrapper``).
    """
    if with_intercept == "auto":
        return "auto"
    return "always" if bool(with_intercept) else "never"


def with_intercept_for(rule: str) -> Any:
    """The pmdarima ``with_intercept`` value for a canonical constant rule."""
    return {"auto": "auto", "always": True, "never": False}[rule]


def differencing_tests(
    y: np.ndarray,
    m: int,
    *,
    test: str,
    seasonal_test: str,
    alpha: float,
    max_d: int,
    max_D: int,
    d_fixed: int | None,
    D_fixed: int | None,
    test_args: dict[str, Any] | None = None,
    seasonal_test_args: dict[str, Any] | None = None,
) -> tuple[list[DifferencingTest], list[str]]:
    """Every step of pmdarima's differencing decisions on ``y``, with its own tests.

    Returns the steps and notes (e.g. a test this function cannot report in detail).
    """
    from pmdarima.arima import nsdiffs
    from pmdarima.utils import diff

    steps: list[DifferencingTest] = []
    notes: list[str] = []
    x = np.asarray(y, dtype=float)
    D = D_fixed
    if m > 1 and D_fixed is None:
        if seasonal_test == "ocsb":
            from pmdarima.arima.seasonality import OCSBTest

            kwargs = dict(seasonal_test_args or {})
            ocsb = OCSBTest(m, **kwargs)
            level = x
            for before in range(max_D):
                stat = float(ocsb._compute_test_statistic(level))
                crit = float(ocsb._calc_ocsb_crit_val(m))
                says = stat > crit
                steps.append(
                    DifferencingTest(
                        decision="seasonal",
                        test=(
                            "OCSB seasonal unit-root test (Osborn, Chui, Smith & Birchenhall 1988)"
                        ),
                        applied_to=_applied(before, 0, m),
                        differences_before=before,
                        statistic=stat,
                        p_value=math.nan,
                        threshold=crit,
                        lags=int(ocsb.max_lag),
                        lag_rule=(
                            f"lag order chosen by {ocsb.lag_method.upper()} up to "
                            f"max_lag={ocsb.max_lag}; difference when the statistic exceeds "
                            "the critical value"
                        ),
                        says_difference=bool(says),
                        source="pmdarima.arima.seasonality.OCSBTest",
                    )
                )
                if not says:
                    break
                level = diff(level, lag=m)
        else:
            notes.append(
                f"seasonal test {seasonal_test!r}: only its decision is reported "
                "(pmdarima.arima.nsdiffs)"
            )
        D = int(nsdiffs(x, m=m, test=seasonal_test, max_D=max_D, **(seasonal_test_args or {})))
    D = int(D or 0)
    dx = diff(x, lag=m, differences=D) if D > 0 else x
    if d_fixed is None:
        if test == "kpss":
            from pmdarima.arima.stationarity import KPSSTest

            kwargs = dict(test_args or {})
            kpss_test = KPSSTest(alpha=alpha, **kwargs)
            level = dx
            for before in range(max_d):
                n = level.size
                lags = int(np.trunc((4 if kpss_test.lshort else 12) * (n / 100) ** 0.25))
                p_value, says = kpss_test.should_diff(level)
                stat = math.nan
                with contextlib.suppress(Exception):
                    stat = kpss_statistic(level, lags)[0]
                steps.append(
                    DifferencingTest(
                        decision="regular",
                        test=(
                            "KPSS level-stationarity test (Kwiatkowski, Phillips, Schmidt & "
                            "Shin 1992)"
                        ),
                        applied_to=_applied(D, before, m),
                        differences_before=before,
                        statistic=stat,
                        p_value=float(p_value),
                        threshold=float(alpha),
                        lags=lags,
                        lag_rule=(
                            f"trunc({4 if kpss_test.lshort else 12} (n/100)^(1/4)) with n = "
                            f"{n}; difference when p < alpha"
                        ),
                        says_difference=bool(says),
                        source=(
                            "p-value: pmdarima.arima.stationarity.KPSSTest.should_diff; "
                            "statistic: statsmodels.tsa.stattools.kpss at the same lags"
                        ),
                    )
                )
                if not says:
                    break
                level = np.diff(level)
        else:
            notes.append(f"unit-root test {test!r}: only its decision is reported")
    return steps, notes


def kpss_statistic(x: np.ndarray, lags: int) -> tuple[float, float]:
    """KPSS level-test statistic and p-value from ``statsmodels.tsa.stattools.kpss``.

    statsmodels returns a tuple today and announces a result object; both are read. Its
    warnings (statistic outside the p-value table, the announced change) are not findings
    about the audited library and are dropped here.
    """
    from statsmodels.tsa.stattools import kpss

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = kpss(x, regression="c", nlags=lags)
    if hasattr(result, "statistic"):
        return float(result.statistic), float(result.pvalue)
    return float(result[0]), float(result[1])


def _applied(D: int, d: int, m: int) -> str:
    parts = []
    if D:
        parts.append(f"{D} seasonal difference{'s' if D > 1 else ''} (lag {m})")
    if d:
        parts.append(f"{d} regular difference{'s' if d > 1 else ''}")
    return "levels" if not parts else "after " + " and ".join(parts)


@contextlib.contextmanager
def teed_stdout() -> Any:
    """Capture printed output (to count trace lines) while still passing it on."""
    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer):
        yield buffer
    sys.stdout.write(buffer.getvalue())


def search_bounds(options: dict[str, Any]) -> dict[str, Any]:
    """The order bounds in force, from resolved options (pmdarima and sktime names)."""
    return {k: options.get(k) for k in ("max_p", "max_q", "max_P", "max_Q", "max_order")}


def settings_to_pmdarima(settings: SearchSettings) -> dict[str, Any]:
    """pmdarima keyword arguments for the harmonised settings."""
    kwargs: dict[str, Any] = {}
    if settings.d is not None:
        kwargs["d"] = settings.d
    if settings.D is not None:
        kwargs["D"] = settings.D
    if settings.criterion is not None:
        kwargs["information_criterion"] = settings.criterion
    if settings.constant is not None:
        kwargs["with_intercept"] = with_intercept_for(settings.constant)
    if settings.stepwise is not None:
        kwargs["stepwise"] = settings.stepwise
    for name in ("max_p", "max_q", "max_P", "max_Q"):
        value = getattr(settings, name)
        if value is not None:
            kwargs[name] = value
    return kwargs


def result_from_model(
    model: Any,
    y: np.ndarray,
    m: int,
    settings: SearchSettings,
    options: dict[str, Any],
    printed: str,
    seconds: float,
    native: Any,
) -> SearchResult:
    """Read a search result from the fitted pmdarima ARIMA that ``auto_arima`` returned.

    Shared by every wrapper of pmdarima's search (its engine): the selection, the
    criterion, the candidates counted from the printed trace, and the differencing tests
    recomputed with pmdarima's own functions on the same data.
    """
    criterion = str(options["information_criterion"])
    tests, notes = differencing_tests(
        y,
        m,
        test=options["test"],
        seasonal_test=options["seasonal_test"],
        alpha=float(options["alpha"]),
        max_d=int(options["max_d"]),
        max_D=int(options["max_D"]),
        d_fixed=settings.d,
        D_fixed=settings.D,
        test_args=options.get("offset_test_args"),
        seasonal_test_args=options.get("seasonal_test_args"),
    )
    notes.append(
        "trace=True is set by forecastaudit to count the candidates; it changes only "
        "what is printed"
    )
    return SearchResult(
        order=tuple(model.order),
        seasonal=tuple(model.seasonal_order[:3]),
        constant=bool(model.with_intercept),
        criterion=criterion,
        criterion_value=float(getattr(model, criterion)()),
        criterion_definition=_CRITERION_DEFINITIONS.get(criterion, criterion),
        candidates=count_trace_lines(printed, "ARIMA("),
        d_decided_by="fixed" if settings.d is not None else "test",
        D_decided_by="fixed" if settings.D is not None or m == 1 else "test",
        tests=tests,
        constant_rule=constant_rule(options["with_intercept"]),
        stepwise=bool(options["stepwise"]),
        bounds=search_bounds(options),
        options=options,
        seconds=seconds,
        notes=notes,
        native=native,
    )


@register_search
class PmdarimaSearch(SearchAdapter):
    """pmdarima's ``auto_arima`` with its defaults."""

    key = "pmdarima"
    engine = ENGINE
    package = "pmdarima"
    module = "pmdarima.arima"
    description = "pmdarima auto_arima"

    def _run(self, y: np.ndarray, m: int, settings: SearchSettings) -> SearchResult:
        import time

        from pmdarima.arima import auto_arima

        options = {**signature_defaults(auto_arima), "m": m, "trace": True}
        options.update(settings_to_pmdarima(settings))
        call = {"m": m, "trace": True, **settings_to_pmdarima(settings)}
        started = time.perf_counter()
        with teed_stdout() as printed:
            model = auto_arima(y, **call)
        seconds = time.perf_counter() - started
        return result_from_model(model, y, m, settings, options, printed.getvalue(), seconds, model)
