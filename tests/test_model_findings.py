"""Findings about the model itself, and comparisons between independent engines only.

Residual autocorrelation (Ljung & Box 1978), intervals below zero on a positive series,
Diebold-Mariano comparisons between one estimator per engine with the effect size beside
the p-value (Diebold & Mariano 1995; Harvey, Leybourne & Newbold 1997), the specified
model outside the 2-unit AICc band (Burnham & Anderson 2002, section 2.6) and wrappers of
one engine whose searches differ by their defaults. Every series is seeded; the checks are
unit-level except one small holdout and one small order search.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from forecastaudit.adapters.registry import adapter_class
from forecastaudit.diagnosis.findings import KINDS
from forecastaudit.diagnosis.forecasts import (
    RESIDUAL_LEVEL,
    back_transform,
    positive_interval_findings,
    residual_checks,
    residual_findings,
)
from forecastaudit.diagnosis.holdout import (
    COMPARISON_COLUMNS,
    IMMATERIAL_LOSS,
    _comparison,
    run_holdout,
)
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.errors import SpecError
from forecastaudit.estimate import REFERENCE_ENGINE, Forecast, SearchOutcome
from forecastaudit.search.decomposition import _decompose, default_differences
from forecastaudit.search.exhaustive import SUPPORT_BAND, exhaustive_reference_search
from forecastaudit.search.order_search import _specified_plain, _support_band
from forecastaudit.spec import ModelSpec

Z95 = 1.959963984540054  # standard normal 97.5% quantile (scipy.stats.norm.ppf(0.975))
POLICY = Tolerances(fail_on_model_findings=True)
NEW_KINDS = ("residual-autocorrelation", "interval-below-zero", "outside-support-band")


def _ar1(n: int, phi: float, seed: int, mean: float = 0.0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(n + 100)
    x = np.zeros(n + 100)
    for t in range(1, n + 100):
        x[t] = phi * x[t - 1] + e[t]
    return mean + x[100:]


def test_new_kinds_are_declared_with_a_meaning():
    for kind in NEW_KINDS:
        assert kind in KINDS and KINDS[kind].endswith(".")


# ---------------------------------------------------------------------- residuals
@pytest.fixture(scope="module")
def residual_table() -> pd.DataFrame:
    """AR(1) residuals (phi = 0.7) for "a" and the reference, white noise for "b"."""
    correlated = _ar1(200, 0.7, seed=1)
    white = np.random.default_rng(2).standard_normal(200)
    spec = ModelSpec((0, 0, 0))  # no differencing, no coefficients: 10 lags, 10 df
    return residual_checks({"a": correlated, "b": white, "reference": correlated}, spec, 200)


def test_residual_statistic_matches_statsmodels(residual_table):
    # General-purpose library: statsmodels' acorr_ljungbox at the same lags (Ljung & Box
    # 1978: Q = n(n+2) sum r_k^2 / (n-k), chi-square with h - model_df degrees of freedom).
    from statsmodels.stats.diagnostic import acorr_ljungbox

    correlated = _ar1(200, 0.7, seed=1)
    expected = acorr_ljungbox(correlated, lags=[10], model_df=0)
    row = residual_table.loc["a"]
    assert row["statistic"] == pytest.approx(float(expected["lb_stat"].iloc[0]), rel=1e-10)
    assert row["p_value"] == pytest.approx(float(expected["lb_pvalue"].iloc[0]), abs=1e-12)
    assert row["largest_lag"] == 1  # an AR(1) has its largest autocorrelation at lag 1


def test_residual_findings_per_fit_with_lag_and_statistic(residual_table):
    findings = residual_findings(residual_table, Tolerances())
    assert {f.estimator for f in findings} == {"a", "reference"}  # white noise passes
    for f in findings:
        assert f.kind == "residual-autocorrelation" and f.severity == "warn"
        assert f.values["p_value"] < RESIDUAL_LEVEL and f.values["lags"] == 10
        assert "Q = " in f.message and "lags 1 to 10" in f.message and "lag 1" in f.message
        assert "about the model" in f.message and "Ljung & Box 1978" in f.message
    reference = next(f for f in findings if f.estimator == "reference")
    assert "reference optimum" in reference.message


def test_residual_kind_does_not_depend_on_tolerances(residual_table):
    plain = residual_findings(residual_table, Tolerances())
    strict = residual_findings(residual_table, POLICY)
    assert [(f.kind, f.estimator) for f in plain] == [(f.kind, f.estimator) for f in strict]
    assert {f.severity for f in strict} == {"fail"}


def test_residual_level_is_strict_and_undefined_tests_are_skipped():
    table = pd.DataFrame(
        {
            "lags": [10, 10, 2],
            "df": [10, 10, 0],
            "statistic": [30.0, 31.0, 50.0],
            "p_value": [RESIDUAL_LEVEL, RESIDUAL_LEVEL / 2, math.nan],
            "n": [100, 100, 100],
        },
        index=pd.Index(["at", "below", "undefined"], name="estimator"),
    )  # hand-built, without the largest-autocorrelation columns
    found = residual_findings(table, Tolerances())
    assert [f.estimator for f in found] == ["below"]
    assert "largest autocorrelation" not in found[0].message
    assert residual_findings(None, Tolerances()) == []


# ---------------------------------------------------------------------- intervals below zero
def _forecast(key: str, mean: float, se: list[float], levels=(80.0, 95.0)) -> Forecast:
    m = np.full(len(se), mean)
    s = np.asarray(se, dtype=float)
    z = {80.0: 1.2815515655446004, 95.0: Z95}  # normal quantiles (scipy.stats.norm.ppf)
    return Forecast(
        key=key,
        status="ok",
        steps=len(se),
        levels=tuple(levels),
        mean=m,
        lower={lv: m - z[lv] * s for lv in levels},
        upper={lv: m + z[lv] * s for lv in levels},
        se=s,
        sigma2_used=float(s[0] ** 2),
    )


def test_interval_below_zero_names_estimators_and_first_step():
    spec = ModelSpec((0, 1, 1))
    transformed = {
        "a": _forecast("a", 2.0, [0.5, 1.2, 1.5]),  # 95% lower 2 - 1.96*1.2 < 0 at step 2
        "b": _forecast("b", 2.0, [0.5, 0.6, 1.1]),  # below zero at step 3
        "c": _forecast("c", 2.0, [0.5, 0.6, 0.7]),  # never below zero
    }
    forecasts = {k: back_transform(fc, spec) for k, fc in transformed.items()}
    observed = np.linspace(1.0, 3.0, 40)
    found = positive_interval_findings(forecasts, observed, spec, Tolerances())
    assert len(found) == 1
    f = found[0]
    assert f.kind == "interval-below-zero" and f.severity == "warn" and f.estimator is None
    assert f.values["estimators"] == ["a", "b"] and f.values["first_step"] == 2
    assert f.values["first_step_by_estimator"] == {"a": 2, "b": 3}
    assert "+log" in f.message and "from step 2" in f.message
    strict = positive_interval_findings(forecasts, observed, spec, POLICY)
    assert [(g.kind, g.severity) for g in strict] == [("interval-below-zero", "fail")]


def test_interval_below_zero_needs_a_positive_series_and_reads_the_widest_level():
    spec = ModelSpec((0, 1, 1))
    forecasts = {"a": back_transform(_forecast("a", 2.0, [0.5, 1.2, 1.5]), spec)}
    with_zero = np.r_[np.linspace(1.0, 3.0, 39), 0.0]
    assert positive_interval_findings(forecasts, with_zero, spec, Tolerances()) == []
    # Only the widest level counts: an 80% bound below zero with a 95% bound above it is
    # impossible for real intervals, so a hand-made one proves which level is read.
    odd = back_transform(_forecast("a", 2.0, [0.5, 0.6, 0.7]), spec)
    odd.lower[80.0] = np.array([-1.0, -1.0, -1.0])
    observed = np.linspace(1.0, 3.0, 40)
    assert positive_interval_findings({"a": odd}, observed, spec, Tolerances()) == []


@pytest.mark.parametrize("transform", ["log", "boxcox(0.5)", "boxcox(-0.5)"])
def test_interval_below_zero_cannot_arise_with_a_transform(transform):
    # The inverse transforms map onto [0, inf): exp for the log; (lambda x + 1)^(1/lambda),
    # clipped at zero, for Box-Cox (closed form); with lambda < 0 a clipped upper bound is
    # unbounded (inf), never a negative lower one.
    spec = ModelSpec((0, 1, 1), transform=transform)
    transformed = _forecast("a", -1.0, [1.0, 3.0, 6.0])  # far below zero on that scale
    forecasts = {"a": back_transform(transformed, spec)}
    assert all((v >= 0).all() for v in forecasts["a"].lower.values())
    observed = np.linspace(1.0, 3.0, 40)
    assert positive_interval_findings(forecasts, observed, spec, Tolerances()) == []


# ---------------------------------------------------------------------- holdout comparisons
def _naive_reference(train_t, estimates, steps):
    """A stand-in for the reference optimum: the training mean with the sample deviation."""
    mean = float(np.mean(train_t))
    return _forecast("reference", mean, [float(np.std(train_t))] * steps, levels=(95.0,))


@pytest.fixture(scope="module")
def holdout_keys() -> list[str]:
    return ["statsmodels-sarimax", "statsmodels-arima", "statsforecast"]


@pytest.fixture(scope="module")
def seeded_holdout(holdout_keys):
    values = _ar1(90, 0.6, seed=7, mean=50.0)
    spec = ModelSpec((1, 0, 0), mean=True)
    engines = {k: adapter_class(k).engine for k in holdout_keys}
    engines["reference"] = "statsmodels-statespace"  # ignored: the reference is its own
    result = run_holdout(
        values, spec, holdout_keys, 5, 3, (95.0,), _naive_reference, engines=engines
    )
    return values, spec, result


def test_comparisons_only_between_independent_engines(seeded_holdout, holdout_keys):
    _, _, result = seeded_holdout
    assert set(result.accuracy.index) == {*holdout_keys, "reference"}  # scored for every key
    c = result.comparisons
    pairs = {frozenset(p) for p in zip(c["first"], c["second"], strict=True)}
    # statsmodels-arima wraps the same engine as statsmodels-sarimax (listed first): not
    # independent evidence, so it is in no comparison.
    assert pairs == {
        frozenset({"statsmodels-sarimax", "statsforecast"}),
        frozenset({"statsmodels-sarimax", "reference"}),
        frozenset({"statsforecast", "reference"}),
    }
    engines = dict(zip(c["first"], c["first_engine"], strict=True))
    engines.update(zip(c["second"], c["second_engine"], strict=True))
    assert engines["reference"] == REFERENCE_ENGINE
    old = {"first", "second", "mean_loss_difference", "dm", "dm_corrected", "p_value", "n"}
    assert old | {"note"} <= set(c.columns) and list(c.columns) == list(COMPARISON_COLUMNS)


def test_relative_loss_difference_and_immaterial_flag(seeded_holdout):
    _, _, result = seeded_holdout
    actual = np.concatenate(result.actuals)

    def errors(key):
        return actual - np.concatenate([fc[key].median for fc in result.forecasts])

    for _, row in result.comparisons.iterrows():
        e1, e2 = errors(row["first"]), errors(row["second"])
        # Squared-error loss: d_t = e1^2 - e2^2 (Diebold & Mariano 1995), relative to the
        # second's mean squared error.
        assert row["loss"] == "squared error"
        assert row["mean_loss_difference"] == pytest.approx(np.mean(e1**2 - e2**2), rel=1e-12)
        assert row["relative_loss_difference"] == pytest.approx(
            np.mean(e1**2 - e2**2) / np.mean(e2**2), rel=1e-12
        )
        assert row["immaterial"] == (abs(row["relative_loss_difference"]) < IMMATERIAL_LOSS)
        flagged = "significant but immaterial" in row["note"]
        assert flagged == bool(row["immaterial"] and row["p_value"] < 0.05)


def test_default_engines_compare_every_pair(seeded_holdout, holdout_keys):
    values, spec, _ = seeded_holdout
    result = run_holdout(values, spec, holdout_keys[:2], 5, 3, (95.0,), _naive_reference)
    assert len(result.comparisons) == math.comb(3, 2)  # each key its own engine


def test_significant_but_immaterial():
    # Errors 2% larger at every step: d_t = e2^2 (1.02^2 - 1) > 0 always, so the test is
    # highly significant; the relative loss difference is 1.02^2 - 1 = 0.0404 (closed form),
    # below IMMATERIAL_LOSS.
    e2 = np.random.default_rng(3).standard_normal(200)
    e1 = 1.02 * e2
    row = _comparison("a", "b", {"a": "x", "b": "y"}, {"a": e1, "b": e2}, horizon=1)
    assert row["relative_loss_difference"] == pytest.approx(1.02**2 - 1, rel=1e-12)
    assert row["p_value"] < 1e-6 and row["immaterial"]
    assert row["note"] == "significant but immaterial"
    bigger = _comparison("a", "b", {"a": "x", "b": "y"}, {"a": 1.2 * e2, "b": e2}, horizon=1)
    assert not bigger["immaterial"] and bigger["note"] == ""


# ---------------------------------------------------------------------- support band
@pytest.fixture(scope="module")
def ar2_candidates():
    """Exhaustive reference search, d = D = 0, p <= 2, q <= 1, on a seeded AR(2)."""
    rng = np.random.default_rng(11)
    e = rng.standard_normal(300)
    y = np.zeros(300)
    for t in range(2, 300):
        y[t] = 0.5 * y[t - 1] + 0.3 * y[t - 2] + e[t]
    y = 10.0 + y[100:]
    table, _ = exhaustive_reference_search(y, None, [(0, 0)], max_p=2, max_q=1, max_P=0, max_Q=0)
    return table


def test_specified_model_outside_the_band(ar2_candidates):
    # Burnham & Anderson (2002), section 2.6: more than 2 AICc units above the best of its
    # own differencing is outside the band of substantial support.
    wanted = ModelSpec((0, 0, 1), mean=True)  # an MA(1) for an AR(2): far worse
    placed, found = _support_band(wanted, ar2_candidates, Tolerances())
    assert placed["delta_aicc"] > SUPPORT_BAND and not placed["within_band"]
    assert len(found) == 1
    f = found[0]
    assert f.kind == "outside-support-band" and f.severity == "warn"
    assert f.values["rank"] == placed["rank"] > 1 and f.values["of"] == len(ar2_candidates)
    assert f.values["best"] == ar2_candidates.iloc[0]["model"]
    assert f"{placed['delta_aicc']:.2f} AICc units above the best" in f.message
    assert "Burnham & Anderson 2002" in f.message and "different differencing" in f.message
    _, strict = _support_band(wanted, ar2_candidates, POLICY)
    assert [(g.kind, g.severity) for g in strict] == [("outside-support-band", "fail")]


def test_specified_model_inside_the_band_gives_no_finding(ar2_candidates):
    best = ar2_candidates.iloc[0]
    wanted = ModelSpec((int(best["p"]), 0, int(best["q"])), mean=bool(best["constant"]))
    placed, found = _support_band(wanted, ar2_candidates, Tolerances())
    assert placed["rank"] == 1 and placed["delta_aicc"] == 0.0 and found == []


def test_specified_model_must_match_the_search_series():
    with pytest.raises(SpecError, match="transform"):
        _specified_plain(ModelSpec((0, 1, 1), (0, 1, 1), 12, transform="log"), 12, None)
    with pytest.raises(SpecError, match="period"):
        _specified_plain(ModelSpec((0, 1, 1), (0, 1, 1), 4), 12, None)
    plain = _specified_plain(ModelSpec((1, 1, 0), transform="log"), 12, "log")
    assert str(plain) == "ARIMA(1,1,0)x(0,0,0)12"


def test_order_search_ranks_the_specified_model_in_its_own_differencing():
    from forecastaudit.search.order_search import audit_order_search

    y = np.cumsum(_ar1(120, 0.5, seed=5)) + 100.0  # an ARIMA(1,1,0)
    wanted = ModelSpec((0, 0, 1))  # no difference at all, whatever the search decides
    audit = audit_order_search(
        y, None, searches=["statsforecast"], max_p=1, max_q=1, check_defaults=False,
        specified=wanted,
    )  # fmt: skip
    c = audit.candidates
    assert (0, 0) in {(int(d), int(D)) for d, D in zip(c["d"], c["D"], strict=True)}
    placed = audit.exhaustive["specified"]
    assert placed["model"] == "ARIMA(0,0,1)" and c["specified"].sum() == 1
    assert placed["of"] == len(c[(c["d"] == 0) & (c["D"] == 0)])  # ranked within d = D = 0
    found = audit.findings_of(kind="outside-support-band")
    assert bool(found) == (placed["delta_aicc"] > SUPPORT_BAND)


# ---------------------------------------------------------------------- decomposition
def _outcome(key, engine, spec, **fields) -> SearchOutcome:
    base = {
        "criterion": "aic",
        "criterion_definition": "-2l + 2k",
        "constant_rule": "auto",
        "stepwise": True,
        "bounds": {"max_p": 5, "max_q": 5},
        "options": {"information_criterion": "aic", "with_intercept": "auto", "trace": True},
        "seconds": 1.0,
    }
    base.update(fields)
    return SearchOutcome(key, engine, "pkg", "1.0", "ok", spec=spec, **base)


A = ModelSpec((2, 0, 0), (0, 1, 1), 12, mean=True)
B = ModelSpec((0, 1, 1), (0, 1, 1), 12)


def test_wrappers_of_one_engine_differ_by_their_defaults():
    first = _outcome("wrapper-1", "engine-e", A)
    second = _outcome(
        "wrapper-2",
        "engine-e",
        B,
        constant_rule="always",
        bounds={"max_p": 5, "max_q": 3},
        options={"information_criterion": "aic", "with_intercept": True, "trace": False,
                 "sp": 12},
    )  # fmt: skip
    assert default_differences(first, second) == {
        "constant_rule": ("auto", "always"),
        "bounds.max_q": (5, 3),
        "options.with_intercept": ("auto", True),
    }  # trace is a reporting option; "sp" only one wrapper names
    # rerun_limit below the searches' seconds: no library is re-run here.
    table, findings, reruns = _decompose(
        {"wrapper-1": first, "wrapper-2": second}, np.zeros(10), 12, rerun_limit=0.5
    )
    assert reruns == [] and len(findings) == 1
    f = findings[0]
    assert f.kind == "search-disagreement" and f.values["same_engine"]
    assert "wrappers of one engine chose differently because their defaults differ" in f.message
    assert "constant_rule 'auto' (wrapper-1) vs 'always' (wrapper-2)" in f.message
    assert "Criteria differ" not in f.message and "Constant handling" not in f.message
    assert f.values["causes"] == ["constant_rule", "bounds.max_q", "options.with_intercept"]
    assert bool(table["same_engine"].all())


def test_cross_engine_pair_kept_beside_the_same_engine_pair():
    # Selection A by wrapper-1 (engine e); selection B by wrapper-2 (engine e) and other
    # (engine f): one cross-engine decomposition (wrapper-1 / other) and one same-engine
    # one (wrapper-1 / wrapper-2).
    outcomes = {
        "wrapper-1": _outcome("wrapper-1", "engine-e", A),
        "wrapper-2": _outcome("wrapper-2", "engine-e", B, stepwise=False),
        "other": _outcome("other", "engine-f", B, criterion="aicc", criterion_definition="x"),
    }
    _, findings, _ = _decompose(outcomes, np.zeros(10), 12, rerun_limit=0.5)
    by_pair = {tuple(f.values["searches"]): f for f in findings}
    assert set(by_pair) == {("wrapper-1", "other"), ("wrapper-1", "wrapper-2")}
    cross = by_pair[("wrapper-1", "other")]
    assert not cross.values["same_engine"] and "Criteria differ" in cross.message
    assert "other (and wrapper-2)" in cross.message
    same = by_pair[("wrapper-1", "wrapper-2")]
    assert same.values["same_engine"] and same.values["causes"] == ["stepwise"]


def test_wrappers_with_identical_options_say_so():
    outcomes = {
        "wrapper-1": _outcome("wrapper-1", "engine-e", A),
        "wrapper-2": _outcome("wrapper-2", "engine-e", B),
    }
    _, findings, _ = _decompose(outcomes, np.zeros(10), 12, rerun_limit=0.5)
    assert len(findings) == 1 and findings[0].values["causes"] == []
    assert "every resolved option both record is the same" in findings[0].message
