"""Drift between two records."""

from __future__ import annotations

import copy
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import forecastaudit as fa
from forecastaudit.cli import EXIT_FINDINGS, EXIT_PASS, main
from forecastaudit.record.document import content_digest, dumps

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


def test_looser_tolerances_in_the_new_record_do_not_loosen_the_check(record: dict) -> None:
    """A re-audit with tolerances fifty times looser, of a moved estimate: the change is
    judged by the signed-off record's (stricter) tolerance, whichever record is looser."""
    loose = {"parameter_se_fraction": 5.0, "parameter_atol": 0.1, "loglike_atol": 0.5}
    looser = fa.audit(_series(), SPEC, estimators=ESTIMATORS, tolerances=loose).to_dict()
    looser["estimates"]["statsforecast"]["params"]["ar_lag1"] += 0.05
    looser["content_sha256"] = content_digest(looser)
    for old, new in ((record, looser), (looser, record)):
        drift = fa.compare_records(old, new)
        row = drift.table[
            (drift.table["estimator"] == "statsforecast") & (drift.table["quantity"] == "ar_lag1")
        ].iloc[0]
        se = record["reference"]["standard_errors"]["ar_lag1"]
        assert row["tolerance"] == pytest.approx(max(0.1 * se, 2e-3))  # the defaults
        assert bool(row["beyond"]) and drift.verdict == "drift beyond tolerance"
        assert any("judged by the stricter" in line for line in drift.changes)
    # Asked for explicitly, a tolerance is used as given.
    given = fa.compare_records(record, looser, fa.Tolerances.from_dict(loose))
    assert given.passed


def test_moved_parameter_is_a_row_beyond_tolerance(record: dict) -> None:
    moved = copy.deepcopy(record)
    params = moved["estimates"]["statsforecast"]["params"]
    params["ar_lag1"] += 0.05
    moved["estimates"]["statsforecast"]["options"]["method"] = "CSS"
    # compare_records checks the seal of a dict as of a file: a deliberate edit is resealed.
    moved["content_sha256"] = content_digest(moved)
    drift = fa.compare_records(record, moved)
    row = drift.table[
        (drift.table["estimator"] == "statsforecast") & (drift.table["quantity"] == "ar_lag1")
    ].iloc[0]
    assert row["change"] == pytest.approx(0.05)
    assert bool(row["beyond"])
    assert drift.verdict == "drift beyond tolerance"
    assert "statsforecast: estimator options changed (method)" in drift.changes


def test_an_unsealed_edit_or_a_plain_dict_is_refused(record: dict) -> None:
    edited = copy.deepcopy(record)
    edited["verdict"] = "pass"
    with pytest.raises(fa.RecordError, match="content_sha256"):
        fa.compare_records(record, edited)
    with pytest.raises(fa.RecordError, match="not a forecastaudit record"):
        fa.compare_records({"estimates": {}}, record)
    with pytest.raises(fa.RecordError, match="must be a record dict"):
        fa.compare_records(record, 42)  # type: ignore[arg-type]


def test_a_null_forecast_standard_error_allows_no_change(record: dict) -> None:
    moved = copy.deepcopy(record)
    forecast = moved["forecasts"]["transformed_scale"]["statsforecast"]
    forecast["se"][0] = None
    forecast["mean"][0] += 1e-6
    moved["content_sha256"] = content_digest(moved)
    drift = fa.compare_records(record, moved)
    row = drift.table[drift.table["quantity"] == "forecast_step1"].iloc[0]
    assert row["tolerance"] == 0.0 and bool(row["beyond"])


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


def _monthly(n: int, seed: int = 21) -> pd.Series:
    values = 50 + np.cumsum(np.random.default_rng(seed).normal(size=n))
    return pd.Series(values, index=pd.period_range("2015-01", periods=n, freq="M"))


def test_moved_data_aligns_forecasts_by_target_period_and_skips_loglikelihoods() -> None:
    full = _monthly(91)
    old = fa.audit(full.iloc[:90], SPEC, estimators=ESTIMATORS).to_dict()
    new = fa.audit(full, SPEC, estimators=ESTIMATORS).to_dict()
    drift = fa.compare_records(old, new)
    assert any("log-likelihoods of different data do not compare" in c for c in drift.changes)
    assert not drift.table["quantity"].isin(["loglike_native", "loglike_reference", "aicc"]).any()
    assert any("ends 1 period(s) after the old one" in c for c in drift.changes)
    # The new record's step 1 (2022-08) is the old record's step 2 (the old series ends 2022-06).
    row = drift.table[drift.table["quantity"].str.startswith("forecast_2022-08")].iloc[0]
    assert "old step 2, new step 1" in row["quantity"]
    assert row["old"] == old["forecasts"]["transformed_scale"][row["estimator"]]["mean"][1]


def test_records_with_different_transforms_are_refused() -> None:
    y = _monthly(90)
    plain = fa.audit(y, SPEC, estimators=["statsmodels-sarimax"]).to_dict()
    logged = fa.audit(y, SPEC + " +log", estimators=["statsmodels-sarimax"]).to_dict()
    with pytest.raises(fa.RecordError, match=r"different transforms \(none and log\)"):
        fa.compare_records(plain, logged)


def test_changes_command_writes_json_html_markdown_summary_first(
    tmp_path: Path, record: dict, capsys: pytest.CaptureFixture[str]
) -> None:
    old, new = tmp_path / "old.json", tmp_path / "new.json"
    old.write_text(dumps(record))
    fa.audit(_series(seed=22), SPEC, estimators=ESTIMATORS).to_json(new)
    outputs = [tmp_path / "c.json", tmp_path / "c.html", tmp_path / "c.md"]
    args = ["changes", str(old), str(new), "--out", str(outputs[0])]
    args += ["--html", str(outputs[1]), "--markdown", str(outputs[2])]
    assert main(args) == EXIT_FINDINGS
    printed = capsys.readouterr()
    assert printed.out.startswith("CHANGES BETWEEN THE RECORDS: DRIFT BEYOND TOLERANCE.")
    assert "warning" not in printed.err
    html, markdown = outputs[1].read_text(), outputs[2].read_text()
    assert html.index('id="summary"') < html.index('id="quantities"')
    assert 'class="beyond"' in html and "not proof" in html
    assert markdown.index("- Changes between the records") < markdown.index("| estimator |")
    # The old name still works, with a deprecation warning.
    assert main(["drift", str(old), str(new)]) == EXIT_FINDINGS
    assert "'drift' is now called 'changes'" in capsys.readouterr().err


def test_old_class_name_warns() -> None:
    with pytest.warns(DeprecationWarning, match="RecordChanges"):
        assert fa.RecordDrift is fa.RecordChanges


def test_a_year_more_data_compares_only_what_compares() -> None:
    """The same model re-audited after twelve more months: no period is forecast by both
    records (horizon 12), so no forecast is compared and the notes say why; holdout
    accuracies of different data are not judged against the numerics tolerance."""
    rng = np.random.default_rng(4)
    index = pd.period_range("2015-01", periods=96, freq="M")
    y = pd.Series(50 + np.cumsum(rng.normal(size=96)), index=index, name="loans")
    old = fa.audit(y.iloc[:84], SPEC, estimators=ESTIMATORS, horizon=12, holdout=6).to_dict()
    new = fa.audit(y, SPEC, estimators=ESTIMATORS, horizon=12, holdout=6).to_dict()
    changes = fa.compare_records(old, new)
    assert not changes.same_data
    quantities = set(changes.table["quantity"])
    assert not any(q.startswith(("forecast_", "holdout_")) for q in quantities)
    assert any("no forecast compared" in line and "2021-12" in line for line in changes.changes)
    assert any(line.startswith("holdout accuracy not compared") for line in changes.changes)
    # With a 24-month horizon the old record's second year is the new record's first.
    old = fa.audit(y.iloc[:84], SPEC, estimators=ESTIMATORS, horizon=24).to_dict()
    changes = fa.compare_records(old, new)
    assert "forecast_2023-01 (old step 13, new step 1)" in set(changes.table["quantity"])


def test_changes_write_their_reports_like_the_other_results(record: dict, tmp_path: Path) -> None:
    changes = fa.compare_records(record, record)
    html = changes.to_html(tmp_path / "changes.html")
    assert (tmp_path / "changes.html").read_text(encoding="utf-8") == html
    markdown = changes.to_markdown(tmp_path / "changes.md")
    assert (tmp_path / "changes.md").read_text(encoding="utf-8") == markdown
