"""Forecasts, intervals and holdout accuracy across estimators."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

import forecastaudit as fa
from forecastaudit.adapters.registry import get_adapter
from forecastaudit.diagnosis.forecasts import back_transform, forecast_findings
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import Estimate, Forecast

STATESPACE = ["statsmodels-sarimax", "statsmodels-arima", "pmdarima", "sktime"]


@pytest.fixture(scope="module")
def airline() -> pd.Series:
    from sktime.datasets import load_airline

    return load_airline()


@pytest.fixture(scope="module")
def airline_holdout(airline: pd.Series) -> fa.AuditResult:
    spec = fa.ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12, transform="log")
    return fa.audit(airline, spec, holdout=12, origins=2)


def test_statsmodels_engine_forecasts_agree(airline_holdout: fa.AuditResult) -> None:
    # Same engine and parameters agreeing to ~1e-7: forecasts must agree to 1e-6 (issue).
    ref = airline_holdout.forecasts["statsmodels-sarimax"]
    for key in STATESPACE[1:]:
        other = airline_holdout.forecasts[key]
        assert np.allclose(other.median, ref.median, rtol=1e-6, atol=0)
        for level in (80.0, 95.0):
            assert np.allclose(other.upper[level], ref.upper[level], rtol=1e-6, atol=0)


def test_log_back_transform_gives_median_and_lognormal_mean(
    airline_holdout: fa.AuditResult,
) -> None:
    # Closed form: if log Y ~ N(m, s^2), median(Y) = exp(m), E(Y) = exp(m + s^2 / 2).
    transformed = airline_holdout.forecasts_transformed["statsmodels-sarimax"]
    original = airline_holdout.forecasts["statsmodels-sarimax"]
    assert np.allclose(original.median, np.exp(transformed.mean))
    assert np.allclose(original.mean, np.exp(transformed.mean + transformed.se**2 / 2))
    assert (original.mean > original.median).all()
    assert "median" in airline_holdout.options["point_forecast"]


def test_holdout_runs_for_every_estimator_and_is_recorded(
    airline_holdout: fa.AuditResult,
) -> None:
    accuracy = airline_holdout.holdout.accuracy
    assert set(accuracy.index) == {*STATESPACE, "statsforecast", "reference"}
    assert (accuracy["mase"] > 0).all() and (accuracy["mape"] > 0).all()
    assert accuracy["coverage_95"].between(0, 1).all()
    assert airline_holdout.holdout.origins == [120, 132]
    record = json.loads(airline_holdout.to_json())
    assert set(record["holdout"]["accuracy"]) == set(accuracy.index)
    # Diebold-Mariano comparisons only between independent engines, one estimator each:
    # the statsmodels engine, statsforecast and the reference (Diebold & Mariano 1995).
    assert len(record["holdout"]["comparisons"]) == math.comb(3, 2)


def test_holdout_on_the_demo_series() -> None:
    report = fa.audit(fa.load_demo(), fa.DEMO_SPEC, holdout=12)
    available = [k for k, e in report.estimates.items() if e.ok]
    assert set(report.holdout.accuracy.index) == set(available)
    record = json.loads(report.to_json())
    assert record["holdout"]["horizon"] == 12


def test_spread_band_counts_each_engine_once(airline_holdout: fa.AuditResult) -> None:
    spread = airline_holdout.spread
    assert spread.attrs["engines"] == ["statsforecast-arima", "statsmodels-statespace"]
    assert (spread["highest"] >= spread["lowest"]).all()
    assert len(spread) == 12


def test_residual_tests_use_model_degrees_of_freedom(airline_holdout: fa.AuditResult) -> None:
    # Ljung & Box (1978): df = lags - (p + q + P + Q) = 24 - 2 at m = 12 (2m lags, common
    # practice, no source), on the 131 residuals after the 13 start-up values.
    table = airline_holdout.residual_tests
    assert (table["df"] == 22).all()
    assert (table["n"] == 131).all()


def _forecast(key: str, mean: float, se: float, sigma2: float) -> Forecast:
    steps = 3
    m = np.full(steps, mean)
    s = np.full(steps, se)
    return Forecast(
        key=key,
        status="ok",
        steps=steps,
        levels=(95.0,),
        mean=m,
        lower={95.0: m - 1.959963984540054 * s},
        upper={95.0: m + 1.959963984540054 * s},
        se=s,
        sigma2_used=sigma2,
    )


def test_interval_difference_from_df_adjusted_sigma2_is_diagnosed() -> None:
    # An estimator whose parameters equal the reference but whose intervals use
    # SSR / (n_w - 3) with n_w = 40: widths scale by sqrt(40 / 37) = 1.0398 (closed form).
    ml = 1.0
    adjusted = ml * 40 / 37
    ref = _forecast("reference", 0.0, 1.0, ml)
    other = _forecast("b", 0.0, math.sqrt(adjusted), adjusted)
    e = Estimate(
        "b",
        "engine-2",
        "b",
        "0",
        "ok",
        params={"sigma2": ml},
        sigma2_reported=adjusted,
        sigma2_kind="df-adjusted",
        sigma2_definition="SSR / (n_w - 3), degrees-of-freedom adjusted",
    )
    transformed = {"reference": ref, "b": other}
    spec = fa.ModelSpec(order=(2, 0, 0), mean=True)
    original = {k: back_transform(v, spec) for k, v in transformed.items()}
    findings = forecast_findings(original, transformed, {"b": e}, "reference", Tolerances())
    kinds = [(f.kind, f.severity) for f in findings]
    assert kinds == [("interval-difference", "info")]
    assert findings[0].values["step1_ratio"] == pytest.approx(math.sqrt(40 / 37))
    assert "accounts for the difference" in findings[0].message


def test_point_forecast_difference_beyond_tolerance_fails() -> None:
    ref = _forecast("reference", 0.0, 1.0, 1.0)
    other = _forecast("b", 0.2, 1.0, 1.0)  # 0.2 forecast standard errors away
    transformed = {"reference": ref, "b": other}
    spec = fa.ModelSpec(order=(1, 0, 0))
    original = {k: back_transform(v, spec) for k, v in transformed.items()}
    findings = forecast_findings(original, transformed, {}, "reference", Tolerances())
    assert [(f.kind, f.severity) for f in findings] == [("forecast-difference", "fail")]


def test_statsforecast_intervals_use_its_reported_sigma2(airline: pd.Series) -> None:
    # statsforecast's intervals use its degrees-of-freedom adjusted sigma2 (estimator-facts):
    # the step-1 half-width is z * sqrt(sigma2 reported), up to the vanishing excess of a
    # finite-sample Kalman filter's one-step variance over sigma2 (measured 1.4e-6 here).
    y = np.log(airline.to_numpy())
    spec = fa.ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12)
    adapter = get_adapter("statsforecast")
    e = adapter.fit(y, spec)
    fc = adapter.forecast(e, 2, (95.0,))
    half = (fc.upper[95.0][0] - fc.lower[95.0][0]) / 2
    assert half == pytest.approx(1.959963984540054 * math.sqrt(e.sigma2_reported), rel=1e-5)
    assert fc.sigma2_used == pytest.approx(e.sigma2_reported)


@pytest.mark.parametrize(
    ("name", "spec"),
    [
        ("airline", fa.ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12)),
        ("airline", fa.ModelSpec(order=(1, 1, 0), seasonal=(1, 1, 0), period=12)),
        ("ar1", fa.ModelSpec(order=(1, 0, 0), mean=True)),
        ("drift", fa.ModelSpec(order=(1, 1, 1), mean=True)),
    ],
)
def test_reference_predictor_matches_a_kalman_filter(
    name: str, spec: fa.ModelSpec, airline: pd.Series
) -> None:
    # Our best linear predictor from the exact covariance (Brockwell & Davis, section 2.5)
    # against statsmodels' Kalman filter at the same parameters (a general-purpose library):
    # point forecasts, standard errors and one-step innovations agree to ~1e-8 relative
    # (statsmodels' approximate diffuse prior, variance 1e6, leaves differences of that size).
    from forecastaudit import reference

    rng = np.random.default_rng(1)
    if name == "airline":
        y = np.log(airline.to_numpy())
    elif name == "ar1":
        x = np.zeros(300)
        for t in range(1, 300):
            x[t] = 0.6 * x[t - 1] + rng.normal()
        y = 10 + x
    else:
        y = 100 + np.cumsum(0.5 + rng.normal(size=200))
    adapter = get_adapter("statsmodels-sarimax")
    params = adapter.fit(y, spec).params
    ours = reference.best_linear_forecast(y, spec, params, 12, (95.0,))
    theirs = adapter.forecast_at(y, spec, params, 12, (95.0,))
    assert np.allclose(ours.mean, theirs.mean, rtol=1e-7, atol=1e-8)
    assert np.allclose(ours.se, theirs.se, rtol=1e-7)
    # Innovations after the filter's diffuse start-up has settled (20 steps past it;
    # measured differences up to 3e-6 with a mean and d = 1).
    start = spec.lost_to_differencing + 20
    assert np.allclose(ours.residuals[start:], theirs.residuals[start:], rtol=0, atol=1e-5)
