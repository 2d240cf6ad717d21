"""Each built-in adapter's own log-likelihood at given parameters (``loglike_at``).

Every assertion is at fixed parameters, where no optimiser runs, so the values are
deterministic; no test asserts where an optimiser stopped. Two kinds of check:

- at the adapter's own estimate, ``loglike_at`` gives back the log-likelihood the library
  reported for that fit (source: the same computation, the library's own objective at the
  same point; measured equal to the last digit with statsmodels 0.15.0, pmdarima 2.1.1,
  sktime 1.2.0, statsforecast 2.1.1);
- at one fixed point, adapters whose libraries build the same model give the same value,
  and where they do not the measured difference is asserted, with its cause.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from forecastaudit.adapters._statespace import native_vector
from forecastaudit.adapters.pmdarima_arima import PmdarimaArima, pmdarima_sarimax
from forecastaudit.adapters.protocol import FitRequest
from forecastaudit.adapters.registry import available_estimators, get_adapter
from forecastaudit.adapters.sktime_arima import SktimeArima
from forecastaudit.reference import evaluate
from forecastaudit.spec import ModelSpec

BUILT_IN = ("statsmodels-sarimax", "statsmodels-arima", "pmdarima", "sktime", "statsforecast")
STATESPACE = BUILT_IN[:4]

SEASONAL = ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12)
AR_MEAN = ModelSpec(order=(1, 0, 0), mean=True)
DRIFT = ModelSpec(order=(1, 1, 0), mean=True)
SEASONAL_MEAN = ModelSpec(order=(1, 0, 0), seasonal=(0, 1, 1), period=12, mean=True)


# ------------------------------------------------------------------ seeded series
def _seasonal_series(seed: int = 1, n: int = 120) -> np.ndarray:
    """``(1-B)(1-B^12) y_t = (1 - 0.4 B)(1 - 0.6 B^12) e_t``, e ~ N(0, 1), around 10."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(n + 13)
    w = e[13:] - 0.4 * e[12:-1] - 0.6 * e[1:-12] + 0.24 * e[:-13]
    y = np.zeros(n + 13)
    for t in range(13, n + 13):
        y[t] = y[t - 1] + y[t - 12] - y[t - 13] + w[t - 13]
    return y[13:] + 10.0


def _ar_series(seed: int = 2, n: int = 150) -> np.ndarray:
    """``(1 - 0.6 B)(y_t - 5) = e_t``, e ~ N(0, 1), after a burn-in of 50."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(n + 50)
    x = np.zeros(n + 50)
    for t in range(1, n + 50):
        x[t] = 0.6 * x[t - 1] + e[t]
    return x[50:] + 5.0


def _drift_series(seed: int = 3, n: int = 100) -> np.ndarray:
    """``(1 - 0.5 B)((1-B) y_t - 0.3) = e_t``: a random walk with drift 0.3 and AR errors."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(n + 50)
    w = np.zeros(n + 50)
    for t in range(1, n + 50):
        w[t] = 0.3 + 0.5 * (w[t - 1] - 0.3) + e[t]
    return np.cumsum(w[50:]) + 20.0


CASES = {
    "seasonal": (_seasonal_series, SEASONAL),
    "ar-mean": (_ar_series, AR_MEAN),
    "drift": (_drift_series, DRIFT),
}


@pytest.fixture(scope="module")
def fitted() -> dict[tuple[str, str], tuple[np.ndarray, object]]:
    """Every built-in adapter fitted once to every case: ``(key, case) -> (y, estimate)``."""
    out = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for case, (make, spec) in CASES.items():
            y = make()
            for key in BUILT_IN:
                out[key, case] = (y, get_adapter(key).fit(y, spec))
    return out


def _own(key: str, y: np.ndarray, spec: ModelSpec, params: dict[str, float]) -> float:
    return get_adapter(key).loglike_at(FitRequest(y, spec), params)


# ------------------------------------------------------------------ declarations
def test_every_built_in_adapter_declares_own_loglike() -> None:
    assert set(BUILT_IN) <= set(available_estimators())
    assert all(get_adapter(key).capabilities.own_loglike for key in BUILT_IN)


# ------------------------------------------------------------------ at its own estimate
@pytest.mark.parametrize("case", sorted(CASES))
@pytest.mark.parametrize("key", BUILT_IN)
def test_own_loglike_at_own_estimate_is_the_reported_one(fitted, key: str, case: str) -> None:
    # Same computation: the library's own objective evaluated where its fit ended, through
    # the adapter's canonical conversion and back (measured relative difference 0).
    y, estimate = fitted[key, case]
    assert estimate.ok, estimate.reason
    value = _own(key, y, CASES[case][1], estimate.params)
    assert value == pytest.approx(estimate.loglike_native, rel=1e-7)


@pytest.mark.parametrize("key", ["pmdarima", "sktime"])
def test_wrapper_rebuilds_the_sarimax_model_its_fit_built(fitted, key: str) -> None:
    # The options of the rebuilt model are those of the model the wrapper fitted (trend,
    # enforce_stationarity, simple_differencing, measurement_error, ...), and the orders.
    y, estimate = fitted[key, "ar-mean"]
    native = estimate.native
    if key == "pmdarima":
        fitted_model = native.arima_res_.model
        rebuilt = pmdarima_sarimax(PmdarimaArima._estimator(AR_MEAN), y)
    else:
        fitted_model = native._forecaster.arima_res_.model
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FutureWarning)  # sktime's notice of a new default
            forecaster = SktimeArima._forecaster(AR_MEAN)
        rebuilt = pmdarima_sarimax(forecaster._instantiate_model(), y)
    assert rebuilt._get_init_kwds() == fitted_model._get_init_kwds()
    assert list(rebuilt.param_names) == list(fitted_model.param_names)


# ------------------------------------------------------------------ at a fixed point
def test_statsmodels_engine_adapters_agree_without_a_mean() -> None:
    # With no constant all four build the same SARIMAX (default approximate diffuse prior,
    # 13 observations burned): measured identical to the last digit (-145.86348921975915).
    y = _seasonal_series()
    point = {"ma_lag1": -0.4, "sma_lag12": -0.6, "sigma2": 1.0}
    values = {key: _own(key, y, SEASONAL, point) for key in STATESPACE}
    for key in STATESPACE:
        assert values[key] == pytest.approx(values["statsmodels-sarimax"], abs=1e-9), key
    # The approximate diffuse prior (variance 1e6) is close to, not equal to, the exact
    # likelihood of the differenced series (measured 6.5e-6 apart here).
    exact = evaluate(y, SEASONAL, point).loglike
    assert values["statsmodels-sarimax"] == pytest.approx(exact, abs=1e-4)
    # sigma2 is a parameter of statsmodels' likelihood, not profiled out.
    doubled = _own("statsmodels-sarimax", y, SEASONAL, {**point, "sigma2": 2.0})
    assert doubled < values["statsmodels-sarimax"] - 1.0


def test_statsmodels_engine_adapters_agree_with_a_mean_and_no_differencing() -> None:
    # SARIMAX's intercept c = mu (1 - phi) (SARIMAX, pmdarima, sktime) and tsa ARIMA's
    # regression constant mu give the same model; with no differencing there is no diffuse
    # state, so each is the exact likelihood (measured within 3e-14 of the reference).
    y = _ar_series()
    point = {"ar_lag1": 0.5, "mu": 5.0, "sigma2": 1.0}
    values = {key: _own(key, y, AR_MEAN, point) for key in STATESPACE}
    exact = evaluate(y, AR_MEAN, point)
    for key in STATESPACE:
        assert values[key] == pytest.approx(exact.loglike, abs=1e-9), key
    # statsforecast's value is its ML objective, profiled over sigma2: on an undifferenced
    # series it is the exact profiled likelihood (measured equal to the last digit).
    assert _own("statsforecast", y, AR_MEAN, point) == pytest.approx(
        exact.profiled_loglike, abs=1e-9
    )


def test_tsa_arima_trend_regression_differs_under_the_approximate_prior() -> None:
    # With D = 1 and a mean, tsa ARIMA regresses y on t (coefficient b = mu / 12) and
    # differences the errors, while SARIMAX (and pmdarima, sktime) puts an intercept in the
    # differenced equation. Both are statsmodels' approximate diffuse prior (variance 1e6)
    # on the 12 seasonal states, which sees y - b t and y differently: measured 1.66e-6
    # apart (and 4e-10 apart with a prior variance of 1e9). A different objective, slightly.
    y = _seasonal_series()
    point = {"ar_lag1": 0.5, "sma_lag12": -0.5, "mu": -2.0, "sigma2": 1.0}
    values = {key: _own(key, y, SEASONAL_MEAN, point) for key in STATESPACE}
    for key in ("pmdarima", "sktime"):
        assert values[key] == pytest.approx(values["statsmodels-sarimax"], abs=1e-9), key
    gap = abs(values["statsmodels-arima"] - values["statsmodels-sarimax"])
    assert 1e-7 < gap < 1e-5


def test_tsa_arima_drift_agrees_with_sarimax_intercept_with_one_difference() -> None:
    # With d = 1 there is one diffuse state (the level), and the two constants give the same
    # value (measured equal to the last digit).
    y = _drift_series()
    point = {"ar_lag1": 0.5, "mu": 0.3, "sigma2": 1.0}
    values = {key: _own(key, y, DRIFT, point) for key in STATESPACE}
    for key in STATESPACE:
        assert values[key] == pytest.approx(values["statsmodels-sarimax"], abs=1e-9), key


def test_statsforecast_profiles_sigma2_out() -> None:
    # statsforecast's ML objective concentrates sigma2 (it takes none): the value does not
    # depend on the sigma2 passed, and is close to the exact profiled likelihood (its kappa
    # 1e6 diffuse prior on the 13 differencing states: measured 2.1e-4 apart here).
    y = _seasonal_series()
    point = {"ma_lag1": -0.4, "sma_lag12": -0.6, "sigma2": 1.0}
    at_one = _own("statsforecast", y, SEASONAL, point)
    assert _own("statsforecast", y, SEASONAL, {**point, "sigma2": 2.0}) == at_one
    assert at_one == pytest.approx(evaluate(y, SEASONAL, point).profiled_loglike, abs=1e-3)


def test_native_vector_inverts_each_constant_form() -> None:
    # The canonical -> statsmodels map for the three ways the constant enters.
    params = {"ar_lag1": 0.5, "sma_lag12": -0.5, "mu": -2.0, "sigma2": 1.5}
    names = ["intercept", "ar.L1", "ma.S.L12", "sigma2"]
    assert native_vector(names, SEASONAL_MEAN, params).tolist() == [-1.0, 0.5, -0.5, 1.5]
    trend = native_vector(
        ["x1", "ar.L1", "ma.S.L12", "sigma2"], SEASONAL_MEAN, params, "trend", "x1"
    )
    assert trend.tolist() == [-2.0 / 12.0, 0.5, -0.5, 1.5]
    mean = native_vector(["const", "ar.L1", "sigma2"], AR_MEAN, params, "mean")
    assert mean.tolist() == [-2.0, 0.5, 1.5]
    with pytest.raises(KeyError):
        native_vector(["drift", "ar.L1", "sigma2"], AR_MEAN, params)
