"""Drift between two records."""

from __future__ import annotations

import copy
from pathlib import Path

import numpy as np
import pytest

import forecastaudit as fa
from forecastaudit.cli import EXIT_FINDINGS, EXIT_PASS, main

SPEC = "ARIMA(1,1,0)"
ESTIMATORS = ["statsmodels-sarimax", "statsforecast"]


def _series(seed: int = 21) -> np.ndarray:
    return 50 + np.cumsum(np.random.default_rng(seed).normal(size=90))


@pytest.fixture(scope="module")
def record() -> dict:
    return fa.audit(_series(), SPEC, estimators=ESTIMATORS).to_dict()


def test_identical_inputs_give_no_drift(record: dict) -> None:
    again = fa.audit(_series(), SPEC, estimators=ESTIMATORS).to_dict()
    drift = fa.compare_records(record, again)
    assert drift.verdict == "no drift"
    assert drift.same_data and drift.same_spec
    assert drift.changes == []
    assert drift.passed


def test_changed_tolerances_are_listed(record: dict) -> None:
    looser = fa.audit(
        _series(), SPEC, estimators=ESTIMATORS, tolerances={"loglike_atol": 0.05}
    ).to_dict()
    drift = fa.compare_records(record, looser)
    assert "tolerance loglike_atol 0.01 -> 0.05" in drift.changes
    assert drift.table.empty


def test_moved_parameter_is_a_row_beyond_tolerance(record: dict) -> None:
    moved = copy.deepcopy(record)
    params = moved["estimates"]["statsforecast"]["params"]
    params["ar_lag1"] += 0.05
    moved["estimates"]["statsforecast"]["options"]["method"] = "CSS"
    drift = fa.compare_records(record, moved)
    row = drift.table[
        (drift.table["estimator"] == "statsforecast") & (drift.table["quantity"] == "ar_lag1")
    ].iloc[0]
    assert row["change"] == pytest.approx(0.05)
    assert bool(row["beyond"])
    assert drift.verdict == "drift beyond tolerance"
    assert "statsforecast: estimator options changed (method)" in drift.changes


def test_different_data_is_said_clearly(record: dict) -> None:
    other = fa.audit(_series(seed=22), SPEC, estimators=ESTIMATORS).to_dict()
    drift = fa.compare_records(record, other)
    assert not drift.same_data
    assert "DIFFERENT" in str(drift)


def test_drift_command(tmp_path: Path, record: dict) -> None:
    old, new = tmp_path / "old.json", tmp_path / "new.json"
    report = fa.audit(_series(), SPEC, estimators=ESTIMATORS)
    report.to_json(old)
    report.to_json(new)
    assert main(["drift", str(old), str(new), "--out", str(tmp_path / "drift.json")]) == EXIT_PASS
    assert (tmp_path / "drift.json").exists()
    fa.audit(_series(seed=22), SPEC, estimators=ESTIMATORS).to_json(new)
    assert main(["drift", str(old), str(new)]) == EXIT_FINDINGS
