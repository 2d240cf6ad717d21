"""Tests of the order-search audit and of model-choice stability.

The order-search audit runs every library search once, on the natural log of the airline
passengers series shipped with sktime (``sktime.datasets.load_airline()``; Box, Jenkins &
Reinsel, *Time Series Analysis*, Series G), period 12, in one module-scope fixture. The
selections the libraries make (docs: /work/shared/estimator-facts.md, measured with
pmdarima 2.1.1 and statsforecast 2.1.1) are checked as measured facts of the installed
versions: pmdarima selects ARIMA(2,0,0)x(0,1,1)12 with a constant, d = 0 by KPSS;
statsforecast selects ARIMA(0,1,1)x(0,1,1)12, d = 1.
"""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pytest

import forecastaudit as fa
from forecastaudit.adapters.registry import available_searches, get_search
from forecastaudit.adapters.search_protocol import SearchAdapter
from forecastaudit.conventions import information_criteria
from forecastaudit.errors import EstimatorError
from forecastaudit.estimate import SearchSettings
from forecastaudit.model_choice import compare_models
from forecastaudit.search.exhaustive import SUPPORT_BAND
from forecastaudit.search.order_search import _advisories, audit_order_search

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def airline_audit():
    """Every installed search once on the log airline series, with the full audit."""
    from sktime.datasets import load_airline

    return audit_order_search(load_airline(), 12, transform="log")


@pytest.fixture(scope="module")
def log_airline_values():
    from sktime.datasets import load_airline

    return np.log(load_airline().to_numpy(dtype=float))


# ---------------------------------------------------------------------- selections
def test_every_installed_search_ran(airline_audit):
    assert set(airline_audit.searches) == set(available_searches())
    for key, outcome in airline_audit.searches.items():
        assert outcome.ok, f"{key}: {outcome.reason}"
        assert outcome.candidates and outcome.candidates > 1
        assert outcome.seconds > 0
        assert math.isfinite(outcome.criterion_value)


def test_selections_of_pmdarima_and_statsforecast(airline_audit):
    # Measured facts of the installed versions (estimator-facts.md), verified here.
    pmd = airline_audit.searches["pmdarima"]
    sf = airline_audit.searches["statsforecast"]
    assert pmd.selected == "ARIMA(2,0,0)x(0,1,1)12 +mean"
    assert (pmd.criterion, pmd.constant_rule, pmd.stepwise) == ("aic", "auto", True)
    assert sf.selected == "ARIMA(0,1,1)x(0,1,1)12"
    assert (sf.criterion, sf.constant_rule, sf.stepwise) == ("aicc", "auto", True)
    # pmdarima reports its own AIC of the selected model: -2 l + 2 k from its statsmodels fit.
    # The library's objects stay where the search ran, so the selected model is fitted again
    # here with pmdarima's own defaults (the same computation on the same machine).
    from pmdarima.arima import ARIMA
    from sktime.datasets import load_airline

    refit = ARIMA(order=(2, 0, 0), seasonal_order=(0, 1, 1, 12), with_intercept=True)
    result = refit.fit(np.log(load_airline().to_numpy())).arima_res_
    assert pmd.criterion_value == pytest.approx(-2 * result.llf + 2 * len(result.params), abs=1e-6)
    table = airline_audit.selections
    assert table.loc["pmdarima", "d"] == 0 and table.loc["statsforecast", "d"] == 1
    assert table.loc["pmdarima", "D"] == 1 and table.loc["statsforecast", "D"] == 1


def test_wrappers_select_what_their_engine_selects(airline_audit):
    s = airline_audit.searches
    assert s["sktime"].engine == s["pmdarima"].engine
    assert s["sktime"].selected == s["pmdarima"].selected
    # sktime's own default keeps a constant for any differencing (its AutoARIMA signature).
    assert s["sktime"].constant_rule == "always"
    assert s["sktime-statsforecast"].selected == s["statsforecast"].selected


# ---------------------------------------------------------------------- differencing tests
def _steps(audit, key, decision):
    t = audit.differencing_tests
    return t[(t["search"] == key) & (t["decision"] == decision)].reset_index(drop=True)


def test_regular_differencing_tests_and_lag_rules(airline_audit):
    n = 132  # 144 observations less one seasonal difference at lag 12
    pmd = _steps(airline_audit, "pmdarima", "regular")
    sf = _steps(airline_audit, "statsforecast", "regular")
    # Lag rules, closed forms: trunc(4 (n/100)^(1/4)) and floor(3 sqrt(n) / 13).
    assert pmd.loc[0, "lags"] == math.trunc(4 * (n / 100) ** 0.25) == 4
    assert sf.loc[0, "lags"] == math.floor(3 * math.sqrt(n) / 13) == 2
    # Same test, different lags, opposite decisions at alpha 0.05.
    assert pmd.loc[0, "p_value"] > 0.05 and not pmd.loc[0, "says_difference"]
    assert sf.loc[0, "p_value"] < 0.05 and sf.loc[0, "says_difference"]
    assert not sf.loc[1, "says_difference"]  # after one regular difference: stop at d = 1
    # The p-value is the linear interpolation in the KPSS level table (Kwiatkowski,
    # Phillips, Schmidt & Shin 1992, Table 1: 0.347 at 10%, 0.463 at 5%).
    stat = pmd.loc[0, "statistic"]
    assert 0.347 < stat < 0.463
    expected = 0.10 - (stat - 0.347) / (0.463 - 0.347) * 0.05
    assert pmd.loc[0, "p_value"] == pytest.approx(expected, abs=1e-6)


def test_regular_differencing_statistic_matches_statsmodels(log_airline_values):
    # General-purpose library: statsmodels' KPSS at pmdarima's lag count, on the same data.
    from statsmodels.tsa.stattools import kpss

    from forecastaudit.adapters.search_pmdarima import differencing_tests

    w = log_airline_values[12:] - log_airline_values[:-12]
    tests, _ = differencing_tests(
        log_airline_values, 12, test="kpss", seasonal_test="ocsb", alpha=0.05,
        max_d=2, max_D=1, d_fixed=None, D_fixed=None,
    )  # fmt: skip
    regular = next(t for t in tests if t.decision == "regular")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)  # statsmodels' announced result object
        result = kpss(w, regression="c", nlags=4)
    stat, p_value = (result[0], result[1]) if isinstance(result, tuple) else (
        result.statistic, result.pvalue
    )  # fmt: skip
    assert regular.statistic == pytest.approx(stat, rel=1e-10)
    assert regular.p_value == pytest.approx(p_value, abs=1e-6)


def test_seasonal_differencing_tests(airline_audit):
    pmd = _steps(airline_audit, "pmdarima", "seasonal")
    sf = _steps(airline_audit, "statsforecast", "seasonal")
    assert pmd.loc[0, "statistic"] > pmd.loc[0, "threshold"]  # OCSB: difference
    assert sf.loc[0, "statistic"] > 0.64  # seasonal strength above statsforecast's 0.64
    assert pmd.loc[0, "says_difference"] and sf.loc[0, "says_difference"]


def test_disagreement_explained_by_the_regular_differencing_decision(airline_audit):
    found = airline_audit.findings_of(kind="search-disagreement")
    assert len(found) == 1  # one per distinct pair of selections, wrappers folded in
    finding = found[0]
    assert finding.values["causes"] == ["d"]
    message = finding.message
    for text in ("KPSS", "4 lags", "2 lags", "p = 0.09088", "p = 0.0334", "d=0", "d=1"):
        assert text in message, text
    rows = airline_audit.decomposition
    alone = rows[rows["setting"] == "d"].iloc[0]
    assert alone["rerun"] == "statsforecast"  # the cheaper search is re-run
    assert alone["selected"] == "ARIMA(2,0,0)x(0,1,1)12 +mean"
    assert bool(alone["reproduces_other"])
    criterion = rows[rows["setting"] == "criterion"].iloc[0]
    assert not bool(criterion["reproduces_other"])  # AIC alone does not move statsforecast
    assert airline_audit.findings_of(kind="differencing-decision")


# ---------------------------------------------------------------------- exhaustive search
def test_exhaustive_search_within_each_differencing_choice(airline_audit):
    c = airline_audit.candidates
    assert {(int(d), int(D)) for d, D in zip(c["d"], c["D"], strict=True)} == {(0, 1), (1, 1)}
    # Grid: p, q <= 2, P, Q <= 1; with and without a constant where d + D = 1.
    assert len(c[(c["d"] == 0) & c["in_grid"]]) == 72
    assert len(c[(c["d"] == 1) & c["in_grid"]]) == 36
    assert not c[(c["d"] == 1)]["constant"].any()
    for key, row in airline_audit.selections.iterrows():
        same = c[(c["d"] == row["d"]) & (c["D"] == row["D"]) & c["in_grid"]]
        assert same["aicc"].min() <= row["reference_aicc"] + 1e-9, key
        assert row["grid_best_aicc"] <= row["reference_aicc"] + 1e-9
    supported = airline_audit.supported(1, 1)
    assert (supported["delta_aicc"] <= SUPPORT_BAND).all()  # Burnham & Anderson (2002)
    assert "ARIMA(0,1,1)x(0,1,1)12" in set(supported["model"])
    assert airline_audit.findings_of(kind="search-rank")


def test_reference_aicc_against_statsmodels(airline_audit, log_airline_values):
    # General-purpose library: statsmodels SARIMAX with simple differencing is the exact
    # Gaussian likelihood of the differenced series; AICc by the closed form with
    # k = 2 coefficients + sigma2 and n_w = 144 - 13 = 131.
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = SARIMAX(
            log_airline_values, order=(0, 1, 1), seasonal_order=(0, 1, 1, 12),
            simple_differencing=True,
        ).fit(disp=False, method="bfgs", maxiter=500, gtol=1e-10)  # fmt: skip
    k, n_w = 3, 131
    aicc = -2 * fit.llf + 2 * k + 2 * k * (k + 1) / (n_w - k - 1)
    c = airline_audit.candidates
    row = c[c["model"] == "ARIMA(0,1,1)x(0,1,1)12"].iloc[0]
    assert row["aicc"] <= aicc + 1e-6  # the reference optimum is at least as high
    assert row["aicc"] == pytest.approx(aicc, abs=1e-3)
    assert row["aicc"] == pytest.approx(
        information_criteria(row["loglike"], k, n_w)["aicc"], abs=1e-12
    )


def test_timings_beside_each_other(airline_audit):
    t = airline_audit.timings
    assert "reference exhaustive" in t.index
    assert set(airline_audit.searches) <= set(t.index)
    assert t.loc["reference exhaustive", "candidates"] == len(airline_audit.candidates)
    assert (t["seconds"] > 0).all()


# ---------------------------------------------------------------------- default constant
def test_default_constant_check(airline_audit):
    import inspect

    from pmdarima.arima import ARIMA

    # pmdarima's own signature: with_intercept defaults to True.
    assert inspect.signature(ARIMA).parameters["with_intercept"].default is True
    table = airline_audit.default_constant
    row = table[(table["model"] == "ARIMA(0,1,1)x(0,1,1)12") & (table["estimator"] == "pmdarima")]
    assert row.iloc[0]["default_adds"] == "with_intercept=True"
    warned = [
        f
        for f in airline_audit.findings_of(kind="default-adds-constant")
        if f.values["d_plus_D"] == 2
    ]
    assert {f.estimator for f in warned} >= {"pmdarima"}
    assert all(f.severity == "warn" for f in warned)


# ---------------------------------------------------------------------- rules of thumb
def test_rules_of_thumb():
    # Common practice, no source: thresholds are the module's own constants.
    spec = fa.ModelSpec((2, 2, 2), (2, 1, 0), 12)
    params = {"ar_lag1": 0.6, "ar_lag2": 0.35, "ma_lag1": -0.7, "ma_lag2": -0.28,
              "sar_lag12": 0.1, "sar_lag24": 0.1}  # fmt: skip
    messages = " | ".join(f.message for f in _advisories(spec, params, "test"))
    assert "more than one" in messages
    assert "p + q = 4" in messages
    assert "P=2" in messages
    assert "over-differencing" in messages  # ma sum -0.98
    assert "missing regular difference" in messages  # ar sum 0.95
    assert not _advisories(fa.ModelSpec((0, 1, 1), (0, 1, 1), 12), {"ma_lag1": -0.4}, "x")


# ---------------------------------------------------------------------- protocol
def test_search_protocol_status_and_settings():
    with pytest.raises(EstimatorError, match="known searches"):
        get_search("no-such-search")
    with pytest.raises(EstimatorError, match="criterion"):
        SearchSettings(criterion="hqic")
    assert SearchSettings(d=1).changed() == {"d": 1}

    class Missing(SearchAdapter):
        key, engine, package, module = "missing", "none", "no-such-dist", "no_such_module_x"
        description = "a search whose library is not installed"

        def _run(self, y, m, settings):
            raise AssertionError("not reached")

    class Broken(Missing):
        module = "math"

        def _run(self, y, m, settings):
            raise RuntimeError("the library failed")

    y = np.arange(30.0)
    assert Missing().run(y, None).status == "unavailable"
    broken = Broken().run(y, None)
    assert broken.status == "failed" and "the library failed" in broken.reason


def test_harmonised_setting_is_passed_to_the_library(log_airline_values):
    # statsforecast with d fixed at 0 skips its regular test and reports d as fixed.
    outcome = get_search("statsforecast").run(log_airline_values, 12, SearchSettings(d=0))
    assert outcome.ok and outcome.spec.d == 0 and outcome.d_decided_by == "fixed"
    assert not [t for t in outcome.tests if t.decision == "regular"]
    assert outcome.options["d"] == 0


# ---------------------------------------------------------------------- record
def test_order_search_record_is_json(airline_audit):
    record = airline_audit.to_dict()
    text = json.dumps(record, allow_nan=False)
    back = json.loads(text)
    assert back["searches"]["pmdarima"]["selected"] == "ARIMA(2,0,0)x(0,1,1)12 +mean"
    assert back["exhaustive"]["candidates"] == len(airline_audit.candidates)
    assert {r["search"] for r in back["timings"]} >= {"reference exhaustive", "pmdarima"}
    assert "Selections:" in str(airline_audit) and "reference exhaustive" in str(airline_audit)


# ---------------------------------------------------------------------- model choice
@pytest.fixture(scope="module")
def nile_choice():
    """Three candidates for the Nile flow (statsmodels.datasets.nile; Durbin & Koopman 2012,
    section 2.10), two rolling origins of 10 years."""
    from statsmodels.datasets import nile

    y = nile.load_pandas().data["volume"].to_numpy(dtype=float)
    return compare_models(
        y, ["ARIMA(0,1,1)", "ARIMA(1,1,1)", "ARIMA(1,0,0) +mean"], holdout=10, origins=2
    )


def test_model_choice_on_nile(nile_choice):
    r = nile_choice
    labels = ["ARIMA(0,1,1)", "ARIMA(1,1,1)", "ARIMA(1,0,0) +mean"]
    assert [str(s) for s in r.specs] == labels
    assert {"reference", "statsmodels-sarimax", "statsforecast"} <= set(r.mase_ranks.index)
    # Ranks agree with the MASE values in the table, implementation by implementation.
    for key, ranks in r.mase_ranks.iterrows():
        rows = r.scores[r.scores["estimator"] == key].set_index("model")["mase"]
        assert list(ranks.sort_values(kind="stable").index) == list(
            rows[labels].sort_values(kind="stable").index
        )
    orderings = {tuple(row.sort_values(kind="stable").index) for _, row in r.mase_ranks.iterrows()}
    assert r.stable == (len(orderings) == 1)
    kinds = {f.kind for f in r.findings}
    assert ("ranking-stable" in kinds) == r.stable and ("ranking-flip" in kinds) != r.stable
    # AICc ranks only among the models that share d = 1.
    assert r.aicc_ranks["ARIMA(1,0,0) +mean"].isna().all()
    assert set(r.aicc_ranks["ARIMA(0,1,1)"]) | set(r.aicc_ranks["ARIMA(1,1,1)"]) == {1.0, 2.0}


def test_model_choice_reference_values_on_nile(nile_choice):
    # Durbin & Koopman (2012), section 2.10: sigma2_eps = 15099, sigma2_eta = 1469.1; the
    # local level model is an ARIMA(0,1,1) with q = sigma2_eta / sigma2_eps and
    # ma_lag1 = (sqrt(q^2 + 4q) - 2 - q) / 2 (closed form).
    q = 1469.1 / 15099
    ma = (math.sqrt(q * q + 4 * q) - 2 - q) / 2
    reference = nile_choice.reports["ARIMA(0,1,1)"].estimates["reference"]
    assert reference.params["ma_lag1"] == pytest.approx(ma, abs=2e-3)
    row = nile_choice.scores[
        (nile_choice.scores["model"] == "ARIMA(0,1,1)")
        & (nile_choice.scores["estimator"] == "reference")
    ].iloc[0]
    assert row["aicc"] == pytest.approx(
        information_criteria(reference.loglike_native, 2, 99)["aicc"], abs=1e-9
    )


def test_model_choice_on_the_demo_series():
    alternative = fa.ModelSpec((1, 1, 0), (0, 1, 1), 12, transform="log")
    r = compare_models(fa.load_demo(), [fa.DEMO_SPEC, alternative], holdout=12)
    assert set(r.preferred) == set(r.mase_ranks.index)
    assert set(r.preferred.values()) <= {str(fa.DEMO_SPEC), str(alternative)}
    assert r.findings and r.findings[0].kind in {"ranking-stable", "ranking-flip"}
    record = json.loads(json.dumps(r.to_dict(), allow_nan=False))
    assert record["stable"] == r.stable
    assert {row["model"] for row in record["scores"]} == {str(fa.DEMO_SPEC), str(alternative)}
    assert "Rank by holdout MASE" in str(r)


def test_model_choice_record_is_json(nile_choice):
    record = json.loads(json.dumps(nile_choice.to_dict(), allow_nan=False))
    assert record["holdout"] == 10 and record["origins"] == 2
    assert record["aicc_ranks"]["reference"]["ARIMA(1,0,0) +mean"] is None


def test_wrappers_that_agree_give_no_same_engine_disagreement(airline_audit):
    # pmdarima and sktime (one engine), statsforecast and sktime-statsforecast (another)
    # select alike here, so the one disagreement is between engines, not between wrappers.
    found = airline_audit.findings_of(kind="search-disagreement")
    assert [f.values["same_engine"] for f in found] == [False]
    assert set(airline_audit.decomposition["same_engine"]) == {False}
