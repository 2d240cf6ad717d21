"""The whole audit against published values, closed forms and seeded simulations.

Each check of the main job names its source beside it.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

import forecastaudit as fa
from forecastaudit.adapters.registry import get_adapter
from forecastaudit.conventions import box_jenkins_ma_to_canonical
from forecastaudit.diagnosis.diagnose import CAUSE_KINDS

STATESPACE = ["statsmodels-sarimax", "statsmodels-arima", "pmdarima", "sktime"]
AIRLINE = fa.ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12, transform="log")


@pytest.fixture(scope="module")
def airline() -> pd.Series:
    from sktime.datasets import load_airline

    return load_airline()


@pytest.fixture(scope="module")
def airline_report(airline: pd.Series) -> fa.AuditResult:
    return fa.audit(airline, AIRLINE)


def test_statsmodels_engine_estimators_agree(airline_report: fa.AuditResult) -> None:
    # Four wrappers of one engine (statsmodels SARIMAX) fit the same likelihood with the
    # same optimiser defaults: they must agree to 1e-3 (issue requirement).
    table = airline_report.parameters[STATESPACE]
    spread = table.max(axis=1) - table.min(axis=1)
    assert (spread <= 1e-3).all(), spread


def test_box_jenkins_published_values_recovered(airline_report: fa.AuditResult) -> None:
    # Box, Jenkins & Reinsel, Time Series Analysis: Forecasting and Control, ch. 9, Series G,
    # log airline ARIMA(0,1,1)x(0,1,1)12: theta = 0.40, Theta = 0.61 in the book's minus-sign
    # MA convention (recalled from memory, high confidence). The book minimises the sum of
    # squares; exact maximum likelihood gives a smaller Theta (about 0.56), so sma_lag12 is
    # held to 0.06 (the objective difference), ma_lag1 to 0.01 (two-decimal rounding).
    ref = airline_report.estimates["reference"].params
    assert ref["ma_lag1"] == pytest.approx(box_jenkins_ma_to_canonical(0.40), abs=0.01)
    assert ref["sma_lag12"] == pytest.approx(box_jenkins_ma_to_canonical(0.61), abs=0.06)
    # Residual variance about 0.00134 (same source, recalled from memory): 2% tolerance.
    assert ref["sigma2"] == pytest.approx(0.00134, rel=0.02)


def test_reference_optimum_is_best_and_short_estimates_are_named(
    airline_report: fa.AuditResult,
) -> None:
    table = airline_report.likelihoods
    best = table.loc["reference", "profiled_reference"]
    ok = table[table["status"] == "ok"]
    assert (ok["profiled_reference"] <= best + 1e-9).all()
    tol = airline_report.tolerances.loglike_atol
    short = set(ok.index[ok["gap_to_best"] > tol])
    # Every estimate short beyond tolerance is named by the finding of its cause (wrappers of
    # one engine with the same estimate share one finding).
    named = {
        key
        for f in airline_report.findings
        if f.kind in CAUSE_KINDS and f.severity != "info"
        for key in f.estimators
    }
    assert named == short


def test_log_likelihood_definitions(airline_report: fa.AuditResult) -> None:
    # statsmodels' default (approximate diffuse prior, 13 observations burned) equals the
    # exact likelihood of the differenced series to ~1e-6 at the same parameters
    # (estimator-facts.md: 244.6964851 against 244.6964844).
    row = airline_report.likelihoods.loc["statsmodels-sarimax"]
    assert row["loglike_native"] == pytest.approx(row["loglike_reference"], abs=1e-5)
    assert row["n"] == 131  # n_w = 144 - 1 - 12
    assert row["k"] == 3  # two coefficients plus sigma2


def test_pmdarima_aicc_counts_len_y(airline_report: fa.AuditResult) -> None:
    # pmdarima's aicc() uses n = len(y) = 144 (estimator-facts.md: -483.2215 against
    # statsmodels' -483.2040 with n = 131); the audit explains it as a definition difference.
    # Those are values at the optimum. pmdarima's own aicc is taken where its statsmodels
    # L-BFGS stopped, which is not portable (0.011 log-likelihood units short of the optimum
    # in about 1 of 100 runs with the data perturbed at 1e-13, measured; test_estimators.py):
    # so its value is checked as pmdarima's formula at its own log-likelihood, and the
    # published values at the reference optimum (portable; four decimals, hence 1e-4).
    e = airline_report.estimates["pmdarima"]
    k, n, n_w = 3, 144, 131
    assert e.criteria_native["aicc"] == pytest.approx(
        -2 * e.loglike_native + 2 * k + 2 * k * (k + 1) / (n - k - 1), rel=1e-12
    )
    best = airline_report.estimates["reference"]
    assert -2 * best.loglike_native + 2 * k + 2 * k * (k + 1) / (n - k - 1) == pytest.approx(
        -483.2215, abs=1e-4
    )
    assert (best.n_w, best.k) == (n_w, k)
    assert best.criteria["aicc"] == pytest.approx(-483.2040, abs=1e-4)
    explained = [
        f
        for f in airline_report.findings
        if f.kind == "definition-difference"
        and f.estimator == "pmdarima"
        and f.quantity == "criteria"
    ]
    assert explained


def test_no_constant_added_silently(airline_report: fa.AuditResult) -> None:
    for key in ("pmdarima", "sktime"):
        e = airline_report.estimates[key]
        assert e.fitted_model is None
        assert e.overridden_defaults == {"with_intercept": True}
        assert not any(name.startswith("extra:") for name in e.params)
        found = [
            f
            for f in airline_report.findings
            if f.kind == "default-overridden" and key in f.estimators
        ]
        assert found and found[0].values["default"] is True


def test_record_has_provenance(airline_report: fa.AuditResult, airline: pd.Series) -> None:
    record = json.loads(airline_report.to_json())
    assert record["schema_version"] == "1.0"
    prov = record["provenance"]
    assert prov["forecastaudit"] == fa.__version__
    assert prov["packages"]["statsmodels"]
    assert len(prov["data"]["fingerprint_sha256"]) == 64
    assert record["spec"]["text"] == "ARIMA(0,1,1)x(0,1,1)12 +log"
    assert record["tolerances"]["loglike_atol"]["value"] == 0.01
    assert set(record["estimates"]) >= {*STATESPACE, "statsforecast", "reference"}
    # Deterministic: the same report gives the same bytes.
    assert airline_report.to_json() == airline_report.to_json()


def test_nile_local_level_mapping() -> None:
    # Durbin & Koopman, Time Series Analysis by State Space Methods, 2nd ed. (2012), section
    # 2.10: Nile local level model, ML sigma2_eps = 15099, sigma2_eta = 1469.1. The local level
    # model is an ARIMA(0,1,1) with (closed form) q = sigma2_eta / sigma2_eps,
    # ma_lag1 = (sqrt(q^2 + 4q) - 2 - q) / 2 and innovation variance -sigma2_eps / ma_lag1.
    from statsmodels.datasets import nile

    volume = nile.load_pandas().data["volume"].to_numpy()
    q = 1469.1 / 15099
    ma = (math.sqrt(q * q + 4 * q) - 2 - q) / 2
    sigma2 = -15099 / ma
    assert ma == pytest.approx(-0.73295, abs=1e-5)
    report = fa.audit(volume, fa.ModelSpec(order=(0, 1, 1)))
    ref = report.estimates["reference"].params
    assert ref["ma_lag1"] == pytest.approx(ma, abs=2e-3)
    assert ref["sigma2"] == pytest.approx(sigma2, rel=0.01)
    for key in STATESPACE:
        assert report.estimates[key].params["ma_lag1"] == pytest.approx(ma, abs=2e-3)


def _ar1(n: int = 300, phi: float = 0.6, mean: float = 10.0, seed: int = 7) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = np.empty(n)
    x[0] = rng.normal() / math.sqrt(1 - phi * phi)
    for t in range(1, n):
        x[t] = phi * x[t - 1] + rng.normal()
    return mean + x


def test_mean_agrees_across_estimators() -> None:
    # Seeded AR(1) with mean 10 and unit innovations: mu from every estimator that fits a mean
    # (SARIMAX's intercept converted by mu = c / (1 - phi)) agrees to 0.05, and is within
    # three standard errors of 10 (the mean's standard error is about
    # 1 / ((1 - phi) sqrt(n)) = 0.14, closed form for an AR(1)).
    report = fa.audit(_ar1(), fa.ModelSpec(order=(1, 0, 0), mean=True))
    mus = report.parameters.loc["mu"].drop("reference_se").dropna()
    assert len(mus) == 6  # five estimators and the reference
    assert mus.max() - mus.min() <= 0.05
    assert abs(mus["reference"] - 10.0) < 3 * 0.14


def test_drift_per_period_consistent() -> None:
    # Random walk with drift 0.5 per period (seeded): with d = 1 and a mean, mu is the drift
    # per period; every estimator's converted value agrees to 0.05 and the reference is within
    # three standard errors (1 / sqrt(n - 1)) of the sample mean of the differences, which is
    # the ML estimate of the drift of a pure random walk (closed form).
    rng = np.random.default_rng(11)
    y = 100 + np.cumsum(0.5 + rng.normal(size=240))
    report = fa.audit(y, fa.ModelSpec(order=(0, 1, 0), mean=True))
    mus = report.parameters.loc["mu"].drop("reference_se").dropna()
    assert len(mus) == 6
    assert mus.max() - mus.min() <= 0.05
    assert mus["reference"] == pytest.approx(np.mean(np.diff(y)), abs=1e-4)


def test_missing_package_is_unavailable_and_audit_goes_on(
    airline: pd.Series, monkeypatch: pytest.MonkeyPatch
) -> None:
    adapter = type(get_adapter("statsforecast"))
    monkeypatch.setattr(adapter, "module", "statsforecast_not_installed_here")
    report = fa.audit(airline, AIRLINE, estimators=["statsmodels-sarimax", "statsforecast"])
    e = report.estimates["statsforecast"]
    assert e.status == "unavailable"
    assert "statsforecast_not_installed_here" in e.reason
    assert report.estimates["statsmodels-sarimax"].ok
    assert any(f.kind == "unavailable" for f in report.findings)


def test_callers_data_is_not_modified(airline: pd.Series) -> None:
    before = airline.copy(deep=True)
    fa.audit(airline, AIRLINE, estimators=["statsmodels-sarimax"])
    pd.testing.assert_series_equal(airline, before)


def test_bad_input_fails_before_fitting() -> None:
    with pytest.raises(fa.SeriesError, match="missing or infinite"):
        fa.audit([1.0, 2.0, float("nan")] * 20, "ARIMA(1,0,0)")
    with pytest.raises(fa.SeriesError, match="needs at least"):
        fa.audit(np.arange(10.0), "ARIMA(0,1,1)x(0,1,1)12")
    with pytest.raises(fa.EstimatorError, match="known estimators"):
        fa.audit(_ar1(60), "ARIMA(1,1,0)", estimators=["no-such-estimator"])
    with pytest.raises(fa.SeriesError, match="is constant"):
        fa.audit(np.full(60, 3.0), "ARIMA(1,0,0) +mean")
    with pytest.raises(fa.SeriesError, match=r"differenced series .* is constant"):
        fa.audit(np.arange(60.0), "ARIMA(0,1,1)")  # a straight line: w constant
    with pytest.raises(fa.ToleranceError):
        fa.audit(_ar1(60), "ARIMA(1,1,0)", tolerances={"loglike_atol": -1})


def test_summary_names_verdict_and_caution(airline_report: fa.AuditResult) -> None:
    text = str(airline_report)
    assert airline_report.verdict.upper() in text
    assert "not proof" in text
