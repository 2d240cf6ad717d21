"""The assertion helpers of forecastaudit.testing."""

from __future__ import annotations

import copy

import numpy as np
import pytest

import forecastaudit as fa
from forecastaudit.testing import (
    assert_audit_passes,
    assert_estimators_agree,
    assert_no_drift,
    assert_parameters_close,
    findings_table,
)


@pytest.fixture(scope="module")
def report() -> fa.AuditResult:
    # Seeded AR(1) with mean 20 and phi 0.5: a model every estimator fits the same way.
    rng = np.random.default_rng(3)
    x = np.zeros(150)
    for t in range(1, 150):
        x[t] = 0.5 * x[t - 1] + rng.normal()
    return fa.audit(
        20 + x, "ARIMA(1,0,0) +mean", estimators=["statsmodels-sarimax", "statsforecast"]
    )


def test_passing_audit_passes(report: fa.AuditResult) -> None:
    assert report.passed, findings_table(report)
    assert_audit_passes(report)


def test_parameters_close_uses_numpy_semantics(report: fa.AuditResult) -> None:
    ref = report.estimates["reference"].params
    assert_parameters_close(report, {"ar_lag1": ref["ar_lag1"]})
    # |a - b| <= atol + rtol |b|: within atol 0.01 of a value 0.005 away.
    assert_parameters_close(report, {"ar_lag1": ref["ar_lag1"] + 0.005}, atol=0.01)
    with pytest.raises(AssertionError, match="ar_lag1"):
        assert_parameters_close(report, {"ar_lag1": ref["ar_lag1"] + 0.05}, atol=0.01)
    with pytest.raises(AssertionError, match="no parameter 'ma_lag1'"):
        assert_parameters_close(report, {"ma_lag1": 0.0})


def test_estimators_agree(report: fa.AuditResult) -> None:
    assert_estimators_agree(report, atol=0.01)
    with pytest.raises(AssertionError, match="disagree"):
        assert_estimators_agree(report, atol=0.0)


def test_no_drift(report: fa.AuditResult) -> None:
    record = report.to_dict()
    assert assert_no_drift(record, report).verdict == "no drift"
    moved = copy.deepcopy(record)
    moved["estimates"]["statsforecast"]["params"]["mu"] += 1.0
    # Records are checked as files are: a deliberate edit is resealed.
    from forecastaudit.record.document import content_digest

    moved["content_sha256"] = content_digest(moved)
    with pytest.raises(AssertionError, match="DRIFT BEYOND TOLERANCE"):
        assert_no_drift(moved, record)


def test_failing_audit_lists_its_findings() -> None:
    y = 20 + np.random.default_rng(4).normal(size=120)
    report = fa.audit(
        y,
        "ARIMA(1,0,0) +mean",
        estimators=["statsmodels-sarimax"],
        tolerances={"min_independent_engines": 3},
    )
    # One engine and the reference cannot meet a policy of three independent engines.
    with pytest.raises(AssertionError, match="engine-count"):
        assert_audit_passes(report)
