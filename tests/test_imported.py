"""Estimates made elsewhere: import records, their declared conventions, and the audit.

The "software elsewhere" is simulated by typing a fit into an import record the way a
spreadsheet or another language's package would report it: MA terms in the Box-Jenkins
minus-sign convention, an intercept instead of the mean of the differenced series, values
rounded to the digits such software shows. The fit typed in is the reference optimum of the
demo series (an optimum, so the assertions do not depend on where any optimiser stopped);
the reported log-likelihood is statsmodels' own at those parameters, computed by
``SARIMAX(..., simple_differencing=True).loglike`` (the exact Gaussian log-likelihood of the
differenced series, a general-purpose library independent of our reference; see
check-values.md). The demo model ARIMA(0,1,1)x(0,1,1)12 has no AR terms, so an intercept
and a mean coincide there; the record with an intercept uses the demo series with an AR(1)
term and a mean added, ARIMA(1,0,1)x(0,1,1)12 +mean +log, where they differ by a factor of
about 36.
"""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import forecastaudit as fa
from forecastaudit.errors import ImportRecordError
from forecastaudit.estimate import Estimate, estimate_schema
from forecastaudit.imported import Declarations, import_schema, normalise, read_import
from forecastaudit.spec import ModelSpec

WITH_MEAN = ModelSpec.parse("ARIMA(1,0,1)x(0,1,1)12 +mean +log")
DEMO = ModelSpec.parse("ARIMA(0,1,1)x(0,1,1)12 +log")
ESTIMATORS = ["statsmodels-sarimax"]


def _statsmodels_loglike(y_log: np.ndarray, spec: ModelSpec, params: dict[str, float]) -> float:
    """statsmodels' exact log-likelihood of the differenced series at canonical params."""
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    model = SARIMAX(
        y_log,
        order=spec.order,
        seasonal_order=(*spec.seasonal, spec.m),
        trend="c" if spec.mean else None,
        simple_differencing=True,
    )
    values = []
    ar = params.get("ar_lag1", 0.0)
    for name in model.param_names:
        if name == "intercept":
            values.append(params["mu"] * (1.0 - ar))  # statsmodels' c = mu phi(1)
        elif name == "ar.L1":
            values.append(ar)
        elif name == "ma.L1":
            values.append(params["ma_lag1"])
        elif name == "ma.S.L12":
            values.append(params["sma_lag12"])
        elif name == "sigma2":
            values.append(params["sigma2"])
        else:
            raise AssertionError(name)
    return float(model.loglike(np.array(values)))


def _typed(value: float, digits: int = 6) -> float:
    """A value as other software shows it: ``digits`` significant digits."""
    return float(f"{value:.{digits}g}")


@pytest.fixture(scope="module")
def demo_log() -> np.ndarray:
    return np.log(fa.load_demo().to_numpy(dtype=float))


@pytest.fixture(scope="module")
def optimum(demo_log: np.ndarray) -> dict[str, float]:
    """The reference optimum of the demo series under ARIMA(1,0,1)x(0,1,1)12 +mean +log."""
    from forecastaudit.reference import fit_reference

    fit = fit_reference(demo_log, WITH_MEAN, {})
    return {k: float(v) for k, v in fit.params.items()}


@pytest.fixture(scope="module")
def cedar_record(demo_log: np.ndarray, optimum: dict[str, float]) -> dict[str, Any]:
    """The optimum typed in as a fictional package reports it: MA with a minus sign, an
    intercept, six significant digits, the log-likelihood to four decimals."""
    reported = _statsmodels_loglike(demo_log, WITH_MEAN, optimum)
    return {
        "record": "forecastaudit-import",
        "format_version": 1,
        "label": "cedar",
        "software": {"name": "Cedar Forecasting Suite", "version": "7.3 (build 1184)"},
        "specification": str(WITH_MEAN),
        "conventions": {
            "ma_sign": "minus",
            "constant": "intercept",
            "sigma2": "maximum-likelihood",
        },
        "parameters": {
            "ar_lag1": _typed(optimum["ar_lag1"]),
            "ma_lag1": _typed(-optimum["ma_lag1"]),
            "sma_lag12": _typed(-optimum["sma_lag12"]),
            "constant": _typed(optimum["mu"] * (1.0 - optimum["ar_lag1"])),
            "sigma2": _typed(optimum["sigma2"]),
        },
        "loglike": {"value": round(reported, 4), "definition": "exact Gaussian"},
        "criteria": {"aic": round(-2 * reported + 10, 4), "n": 168, "k": 5},
    }


def _wrongly(record: dict[str, Any], label: str, **conventions: str) -> dict[str, Any]:
    out = copy.deepcopy(record)
    out["label"] = label
    out["conventions"].update(conventions)
    return out


@pytest.fixture(scope="module")
def mean_audit(cedar_record: dict[str, Any]) -> fa.AuditResult:
    """One audit of the demo series with the record declared correctly and wrongly."""
    wrong = _wrongly(cedar_record, "cedar-as-typed", ma_sign="plus", constant="mean")
    return fa.audit(
        fa.load_demo(), WITH_MEAN, estimators=ESTIMATORS, imported=[cedar_record, wrong]
    )


def _declared(result: fa.AuditResult, label: str) -> fa.Finding:
    (finding,) = [
        f for f in result.findings if f.kind == "declared-conventions" and f.estimator == label
    ]
    return finding


# ---------------------------------------------------------------------- the must-show
def test_declared_correctly_is_normalised_and_agrees(
    mean_audit: fa.AuditResult, optimum: dict[str, float], cedar_record: dict[str, Any]
) -> None:
    e = mean_audit.estimates["cedar"]
    assert e.origin == "imported"
    # Normalised: the MA signs flipped back and the intercept turned into the mean of the
    # differenced series, mu = c / (1 - ar_lag1) (design.md, the canonical convention).
    typed = cedar_record["parameters"]
    assert e.params["ma_lag1"] == -typed["ma_lag1"]
    assert e.params["sma_lag12"] == -typed["sma_lag12"]
    assert e.params["mu"] == pytest.approx(typed["constant"] / (1.0 - typed["ar_lag1"]), rel=1e-12)
    # Agrees with the reference: every coefficient within a hundredth of a reference
    # standard error of the optimum (six typed digits), no gap, no cause finding.
    se = mean_audit.standard_errors
    for name in ("ar_lag1", "ma_lag1", "sma_lag12", "mu"):
        assert abs(e.params[name] - optimum[name]) < 0.01 * se[name], name
    assert mean_audit.likelihoods.at["cedar", "gap_to_best"] < 1e-4
    causes = {"stopped-short", "objective-differs", "short-of-optimum", "flat-likelihood"}
    assert not [f for f in mean_audit.findings if f.estimator == "cedar" and f.kind in causes]
    # The declarations check: statsmodels' log-likelihood (reported) equals the reference
    # one at the normalised parameters within the typed digits.
    finding = _declared(mean_audit, "cedar")
    assert finding.severity == "info"
    assert "are consistent" in finding.message
    assert abs(finding.values["declared"]["mismatch"]) <= finding.values["declared"]["allowance"]


def test_declared_wrongly_names_the_declaration_that_fits(mean_audit: fa.AuditResult) -> None:
    finding = _declared(mean_audit, "cedar-as-typed")
    assert finding.severity == "warn"  # not the production estimator
    assert "do not fit its numbers" in finding.message
    assert "ma_sign 'minus' instead of 'plus'" in finding.message
    assert "constant 'intercept' instead of 'mean'" in finding.message
    best = finding.values["fitting"][0]
    assert best["declarations"]["ma_sign"] == "minus"
    assert best["declarations"]["constant"] == "intercept"
    assert abs(best["mismatch"]) <= best["allowance"]
    # Declared wrongly, the reported log-likelihood is hundreds of units from the reference.
    assert abs(finding.values["declared"]["mismatch"]) > 100


def test_imported_is_production_fails_when_declared_wrongly(
    cedar_record: dict[str, Any],
) -> None:
    wrong = _wrongly(cedar_record, "cedar", ma_sign="plus")
    result = fa.audit(
        fa.load_demo(), WITH_MEAN, estimators=ESTIMATORS, imported=[wrong], production="cedar"
    )
    finding = _declared(result, "cedar")
    assert finding.severity == "fail"
    assert "ma_sign 'minus' instead of 'plus'" in finding.message
    assert result.verdict == "fail"


def test_demo_model_with_flipped_ma_signs(demo_log: np.ndarray) -> None:
    """The demo model itself: MA terms typed with a minus sign, declared as plus."""
    from forecastaudit.reference import fit_reference

    fit = fit_reference(demo_log, DEMO, {})
    params = {k: float(v) for k, v in fit.params.items()}
    record = {
        "record": "forecastaudit-import",
        "format_version": 1,
        "software": {"name": "Box-Jenkins worksheet"},
        "specification": str(DEMO),
        "conventions": {"ma_sign": "plus", "constant": "none", "sigma2": "maximum-likelihood"},
        "parameters": {
            "ma_lag1": _typed(-params["ma_lag1"], 5),
            "sma_lag12": _typed(-params["sma_lag12"], 5),
            "sigma2": _typed(params["sigma2"], 5),
        },
        "loglike": {"value": round(_statsmodels_loglike(demo_log, DEMO, params), 3)},
    }
    result = fa.audit(fa.load_demo(), DEMO, estimators=ESTIMATORS, imported=[record])
    finding = _declared(result, "imported-box-jenkins-worksheet")
    assert "ma_sign 'minus' instead of 'plus'" in finding.message
    assert finding.severity == "warn"


def test_without_a_reported_loglike_the_optimum_decides(
    demo_log: np.ndarray, cedar_record: dict[str, Any], optimum: dict[str, float]
) -> None:
    from forecastaudit.diagnosis.declarations import check_declarations
    from forecastaudit.reference import evaluate

    data = _wrongly(cedar_record, "no-loglike", constant="mean")
    del data["loglike"]
    record = read_import(data)
    best = evaluate(demo_log, WITH_MEAN, optimum).profiled_loglike
    check = check_declarations(record, demo_log, WITH_MEAN, best, gap_tolerance=0.01)
    assert check.basis == "optimum"
    assert check.consistent is False
    assert check.fitting[0].declarations.constant == "intercept"
    assert check.fitting[0].gap < 0.01


# ---------------------------------------------------------------------- reading
def test_csv_form_reads_as_the_json_form(tmp_path: Path, cedar_record: dict[str, Any]) -> None:
    p = cedar_record["parameters"]
    text = "\n".join(
        [
            "# forecastaudit import record, CSV form",
            "# label: cedar",
            f"# specification: {WITH_MEAN}",
            "# software: Cedar Forecasting Suite",
            "# software_version: 7.3 (build 1184)",
            "# ma_sign: minus",
            "# constant: intercept",
            "# sigma2: maximum-likelihood",
            "# loglike_definition: exact Gaussian",
            "name,value",
            *(f"{name},{value!r}" for name, value in p.items()),
            f"loglike,{cedar_record['loglike']['value']!r}",
            f"aic,{cedar_record['criteria']['aic']!r}",
            "criteria_n,168",
            "criteria_k,5",
        ]
    )
    path = tmp_path / "cedar.csv"
    path.write_text(text, encoding="utf-8")
    from_csv = read_import(path)
    from_json = read_import(cedar_record)
    assert from_csv.sha256 == from_json.sha256
    assert from_csv.parameters == from_json.parameters
    assert from_csv.declarations == from_json.declarations
    assert from_csv.source == str(path)


def test_reading_does_not_modify_the_callers_mapping(cedar_record: dict[str, Any]) -> None:
    before = copy.deepcopy(cedar_record)
    read_import(cedar_record)
    assert cedar_record == before


@pytest.mark.parametrize(
    ("text", "problem"),
    [
        ('{"record": "forecastaudit-import", "record": "x"}', "appears twice"),
        ('{"record": "forecastaudit-import", "format_version": NaN}', "NaN"),
        ('{"a": 1', "not valid JSON"),
        ("[1, 2]", "not an object"),
        ('{"format_version": 1}', "not a forecastaudit import record"),
    ],
)
def test_strict_json(tmp_path: Path, text: str, problem: str) -> None:
    path = tmp_path / "record.json"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ImportRecordError, match=problem):
        read_import(path)


def test_binary_and_missing_files(tmp_path: Path) -> None:
    binary = tmp_path / "record.json"
    binary.write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00")
    with pytest.raises(ImportRecordError, match="binary"):
        read_import(binary)
    with pytest.raises(ImportRecordError, match="does not exist"):
        read_import(tmp_path / "nowhere.json")


def test_parameters_and_declarations_must_fit_the_spec(cedar_record: dict[str, Any]) -> None:
    missing = copy.deepcopy(cedar_record)
    del missing["parameters"]["ma_lag1"]
    with pytest.raises(ImportRecordError, match="missing ma_lag1"):
        read_import(missing)
    extra = copy.deepcopy(cedar_record)
    extra["parameters"]["sar_lag12"] = 0.1
    with pytest.raises(ImportRecordError, match="not part of"):
        read_import(extra)
    no_constant = _wrongly(cedar_record, "x", constant="none")
    with pytest.raises(ImportRecordError, match="has a mean"):
        read_import(no_constant)
    regressors = dict(copy.deepcopy(cedar_record), specification="ARIMA(1,0,1) +mean +x(price)")
    with pytest.raises(ImportRecordError, match="missing x_price; not part of"):
        read_import(regressors)  # a regression coefficient is a parameter like any other
    unknown = copy.deepcopy(cedar_record)
    unknown["conventions"]["ma_sign"] = "negative"
    with pytest.raises(ImportRecordError, match="conventions/ma_sign"):
        read_import(unknown)


def test_audit_refuses_another_model_and_a_taken_label(cedar_record: dict[str, Any]) -> None:
    y = fa.load_demo()
    with pytest.raises(ImportRecordError, match="audit is of"):
        fa.audit(y, DEMO, estimators=ESTIMATORS, imported=[cedar_record])
    taken = dict(cedar_record, label="statsmodels-sarimax")
    with pytest.raises(ImportRecordError, match="already uses"):
        fa.audit(y, WITH_MEAN, estimators=ESTIMATORS, imported=[taken])


def test_normalise_drift_and_df_adjusted_sigma2(cedar_record: dict[str, Any]) -> None:
    record = read_import(cedar_record)
    drift = normalise(
        record, Declarations("minus", "drift", "df-adjusted", sigma2_subtracted=4), n_w=168
    )
    # With d = 0, D = 1 at m = 12 a drift b per period is mu = 12 b (design.md).
    assert drift.params["mu"] == pytest.approx(12 * cedar_record["parameters"]["constant"])
    assert drift.params["sigma2"] == pytest.approx(cedar_record["parameters"]["sigma2"] * 164 / 168)


# ---------------------------------------------------------------------- the record
def test_imported_estimates_in_the_record(mean_audit: fa.AuditResult) -> None:
    import jsonschema

    record = mean_audit.to_dict()
    entry = record["estimates"]["cedar"]
    assert entry["origin"] == "imported"
    assert entry["provenance"]["software"] == "Cedar Forecasting Suite"
    assert entry["provenance"]["declared"]["ma_sign"] == "minus"
    assert len(entry["provenance"]["import_sha256"]) == 64
    assert record["options"]["imported"] == ["cedar", "cedar-as-typed"]
    jsonschema.validate(mean_audit.estimates["cedar"].to_dict(), estimate_schema())
    back = Estimate.from_dict(json.loads(json.dumps(mean_audit.estimates["cedar"].to_dict())))
    assert back == mean_audit.estimates["cedar"]


def test_schema_is_a_valid_json_schema() -> None:
    import jsonschema

    jsonschema.Draft202012Validator.check_schema(import_schema())


def test_imported_forecasts_join_the_comparison(
    cedar_record: dict[str, Any], mean_audit: fa.AuditResult
) -> None:
    ref = mean_audit.forecasts["reference"]
    data = dict(copy.deepcopy(cedar_record), label="cedar-forecasts")
    data["forecasts"] = {
        "scale": "original",
        "mean": [round(float(v), 1) for v in ref.median],
        "intervals": {
            f"{level:g}": {
                "lower": [round(float(v), 1) for v in ref.lower[level]],
                "upper": [round(float(v), 1) for v in ref.upper[level]],
            }
            for level in ref.lower
        },
    }
    result = fa.audit(fa.load_demo(), WITH_MEAN, estimators=ESTIMATORS, imported=[data])
    fc = result.forecasts["cedar-forecasts"]
    assert np.allclose(fc.median, ref.median, atol=0.05 + 1e-9)
    assert not [
        f
        for f in result.findings
        if f.estimator == "cedar-forecasts"
        and f.kind in {"forecast-difference", "interval-difference"}
    ]
    assert math.isfinite(result.materiality["cedar-forecasts"]["forecast_se"])


# ---------------------------------------------------------------------- reports and the CLI
def test_reports_mark_the_imported_columns(mean_audit: fa.AuditResult) -> None:
    markdown = mean_audit.to_markdown()
    assert "cedar (imported)" in markdown
    assert "cedar-as-typed (imported)" in markdown
    assert "declared-conventions" in markdown or "declared conventions" in markdown
    html = mean_audit.to_html()
    assert "cedar (imported)" in html


def test_cli_import_option(tmp_path: Path, cedar_record: dict[str, Any], capsys: Any) -> None:
    from importlib import resources

    from forecastaudit.cli import EXIT_PASS, main

    data = tmp_path / "units.csv"
    data.write_text(
        resources.files("forecastaudit.data").joinpath("ashgrove_red_cell_units.csv").read_text()
    )
    path = tmp_path / "cedar.json"
    path.write_text(json.dumps(cedar_record), encoding="utf-8")
    out = tmp_path / "out"
    code = main(
        [
            "audit",
            str(data),
            "--model",
            str(WITH_MEAN),
            "--estimators",
            "statsmodels-sarimax",
            "--import",
            str(path),
            "--out",
            str(out),
            "--quiet",
        ]
    )
    assert code == EXIT_PASS, capsys.readouterr().out
    record = json.loads((out / "forecastaudit-record.json").read_text())
    assert record["estimates"]["cedar"]["origin"] == "imported"
    assert record["estimates"]["cedar"]["provenance"]["source"] == str(path)
    # The imported file's bytes are pinned in the record, beside the data file's.
    import hashlib

    (other,) = record["provenance"]["invocation"]["other_files"]
    assert other == {
        "role": "imported estimate",
        "name": "cedar.json",
        "sha256": hashlib.sha256(path.read_bytes()).hexdigest(),
        "bytes": path.stat().st_size,
    }
    assert other["sha256"] in (out / "forecastaudit-report.md").read_text()


def test_cli_import_error_is_a_usage_error(tmp_path: Path, capsys: Any) -> None:
    from forecastaudit.cli import EXIT_USAGE, main

    bad = tmp_path / "bad.json"
    bad.write_text('{"record": "forecastaudit-import", "format_version": 1}', encoding="utf-8")
    from importlib import resources

    data = tmp_path / "units.csv"
    data.write_text(
        resources.files("forecastaudit.data").joinpath("ashgrove_red_cell_units.csv").read_text()
    )
    code = main(["audit", str(data), "--model", str(DEMO), "--import", str(bad), "--quiet"])
    assert code == EXIT_USAGE
    assert "does not follow the import record format" in capsys.readouterr().err


# ---------------------------------------------------------------------- the pytest plugin
PLUGIN_TEST = """
import numpy as np

def series():
    rng = np.random.default_rng(3)
    x = np.zeros(150)
    for t in range(1, 150):
        x[t] = 0.5 * x[t - 1] + rng.normal()
    return 20 + x

def test_model(model_audit):
    report = model_audit(series(), "ARIMA(1,0,0) +mean", name="ar1", imported=["elm.json"])
    assert report.estimates["elm"].origin == "imported"
"""


def _ar1_series() -> np.ndarray:
    rng = np.random.default_rng(3)
    x = np.zeros(150)
    for t in range(1, 150):
        x[t] = 0.5 * x[t - 1] + rng.normal()
    return 20 + x


def test_plugin_audits_and_baselines_an_import(pytester: pytest.Pytester) -> None:
    """The model_audit fixture takes imported records; the baseline carries them and a
    change of the imported estimate is drift."""
    from forecastaudit.reference import fit_reference

    spec = ModelSpec.parse("ARIMA(1,0,0) +mean")
    y = _ar1_series()
    fit = fit_reference(y, spec, {})
    record = {
        "record": "forecastaudit-import",
        "format_version": 1,
        "label": "elm",
        "software": {"name": "Elm Statistics", "version": "2.0"},
        "specification": str(spec),
        "conventions": {"ma_sign": "plus", "constant": "intercept", "sigma2": "maximum-likelihood"},
        "parameters": {
            "ar_lag1": _typed(fit.params["ar_lag1"]),
            "constant": _typed(fit.params["mu"] * (1 - fit.params["ar_lag1"])),
            "sigma2": _typed(fit.params["sigma2"]),
        },
    }
    pytester.makeini("[pytest]\naudit_estimators = statsmodels-sarimax\n")
    pytester.makepyfile(test_model=PLUGIN_TEST)
    (pytester.path / "elm.json").write_text(json.dumps(record), encoding="utf-8")
    pytester.runpytest("--audit-update-baselines").assert_outcomes(passed=1)
    baseline = json.loads((pytester.path / "audit-baselines" / "ar1.json").read_text())
    assert baseline["estimates"]["elm"]["provenance"]["software_version"] == "2.0"
    pytester.runpytest().assert_outcomes(passed=1)
    # The other software re-fitted: a new version and an AR coefficient moved by 0.05.
    record["software"]["version"] = "2.1"
    record["parameters"]["ar_lag1"] = round(record["parameters"]["ar_lag1"] + 0.05, 6)
    (pytester.path / "elm.json").write_text(json.dumps(record), encoding="utf-8")
    result = pytester.runpytest()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*elm: version 2.0 -> 2.1*", "*elm*ar_lag1*"])


def test_outside_the_region_under_every_declaration(cedar_record: dict[str, Any]) -> None:
    data = _wrongly(cedar_record, "odd")
    data["parameters"]["ar_lag1"] = 1.2  # explosive whatever the MA sign or constant
    result = fa.audit(fa.load_demo(), WITH_MEAN, estimators=ESTIMATORS, imported=[data])
    finding = _declared(result, "odd")
    assert finding.severity == "warn"
    assert "outside the stationary or invertible region" in finding.message
    assert "Check the values typed and their signs" in finding.message


# ---------------------------------------------------------------------- a property
@settings(max_examples=60, deadline=None)
@given(
    ar=st.floats(-0.95, 0.95),
    ma=st.floats(-0.95, 0.95),
    sma=st.floats(-0.95, 0.95),
    mu=st.floats(-5, 5),
    sigma2=st.floats(1e-4, 10),
    ma_sign=st.sampled_from(["plus", "minus"]),
    constant=st.sampled_from(["mean", "intercept", "drift"]),
    sigma2_kind=st.sampled_from(["maximum-likelihood", "df-adjusted"]),
)
def test_normalise_inverts_every_declaration(
    ar: float,
    ma: float,
    sma: float,
    mu: float,
    sigma2: float,
    ma_sign: str,
    constant: str,
    sigma2_kind: str,
) -> None:
    """Canonical values written in any declared convention (with the inverse conversions of
    forecastaudit.conventions) normalise back to themselves."""
    from forecastaudit.conventions import (
        canonical_ma_to_box_jenkins,
        mean_to_intercept,
        ml_to_df_adjusted_sigma2,
        trend_scale,
    )

    canonical = {"ar_lag1": ar, "ma_lag1": ma, "sma_lag12": sma, "mu": mu, "sigma2": sigma2}
    n_w = 168
    typed = {"ar_lag1": ar, "ma_lag1": ma, "sma_lag12": sma}
    if ma_sign == "minus":
        typed["ma_lag1"] = float(canonical_ma_to_box_jenkins(ma))
        typed["sma_lag12"] = float(canonical_ma_to_box_jenkins(sma))
    typed["constant"] = {
        "mean": mu,
        "intercept": mean_to_intercept(mu, WITH_MEAN, canonical),
        "drift": mu / trend_scale(WITH_MEAN),
    }[constant]
    typed["sigma2"] = (
        ml_to_df_adjusted_sigma2(sigma2, n_w, 4) if sigma2_kind == "df-adjusted" else sigma2
    )
    record = read_import(
        {
            "record": "forecastaudit-import",
            "format_version": 1,
            "software": {"name": "property"},
            "specification": str(WITH_MEAN),
            "conventions": {"ma_sign": ma_sign, "constant": constant, "sigma2": sigma2_kind},
            "parameters": typed,
        }
    )
    back = normalise(record, n_w=n_w).params
    for name, value in canonical.items():
        assert back[name] == pytest.approx(value, rel=1e-12, abs=1e-12), name
