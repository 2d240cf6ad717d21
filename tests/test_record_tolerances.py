"""Tolerances and the record file: validation, determinism, version checks."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import forecastaudit as fa
from forecastaudit.diagnosis.tolerances import REASONS
from forecastaudit.files import write_text_atomic
from forecastaudit.record.document import SCHEMA_VERSION, dumps, load_record


def test_every_tolerance_has_a_reason() -> None:
    described = fa.Tolerances().describe()
    assert set(described) == set(REASONS)
    assert described["loglike_atol"]["default"] == 0.01


def test_tolerances_validate_and_replace() -> None:
    tol = fa.Tolerances().replace(loglike_atol=0.05)
    assert tol.loglike_atol == 0.05
    assert fa.Tolerances.from_dict({"parameter_atol": 0.01}).parameter_atol == 0.01
    with pytest.raises(fa.ToleranceError, match="Unknown tolerance"):
        fa.Tolerances().replace(loglike=1)
    with pytest.raises(fa.ToleranceError, match="not negative"):
        fa.Tolerances(parameter_atol=-1)
    with pytest.raises(fa.ToleranceError, match="number"):
        fa.Tolerances(sigma2_rtol="x")  # type: ignore[arg-type]
    with pytest.raises(fa.ToleranceError):
        fa.Tolerances(min_independent_engines=0)


def test_dumps_is_deterministic_and_strict() -> None:
    record = {"b": float("nan"), "a": [1, 2.5, float("inf")], "c": {"z": 1, "y": 2}}
    text = dumps(record)
    assert text == dumps(record)
    assert json.loads(text) == {"a": [1, 2.5, None], "b": None, "c": {"y": 2, "z": 1}}
    assert text.index('"a"') < text.index('"b"')


@pytest.fixture(scope="module")
def small_record(tmp_path_factory: pytest.TempPathFactory) -> Path:
    rng = np.random.default_rng(5)
    y = np.cumsum(rng.normal(size=80))
    report = fa.audit(y, "ARIMA(1,1,0)", estimators=["statsmodels-sarimax"])
    path = tmp_path_factory.mktemp("record") / "record.json"
    report.to_json(path)
    return path


def test_record_round_trip(small_record: Path) -> None:
    record = load_record(small_record)
    assert record["schema_version"] == SCHEMA_VERSION
    assert record["spec"]["text"] == "ARIMA(1,1,0)"
    assert small_record.read_text() == dumps(record)


def _rewrite(path: Path, change) -> Path:  # type: ignore[no-untyped-def]
    record = json.loads(path.read_text())
    change(record)
    out = path.with_name("changed.json")
    out.write_text(json.dumps(record))
    return out


def test_tampered_record_is_rejected(small_record: Path) -> None:
    def flip(record: dict) -> None:
        record["verdict"] = "pass" if record["verdict"] == "fail" else "fail"

    with pytest.raises(fa.RecordError, match="modified after it was written"):
        load_record(_rewrite(small_record, flip))

    def break_schema(record: dict) -> None:
        record["findings"].append({"kind": "x"})

    with pytest.raises(fa.RecordError, match="does not follow schema"):
        load_record(_rewrite(small_record, break_schema))


def test_future_and_foreign_files_are_rejected(small_record: Path, tmp_path: Path) -> None:
    def future(record: dict) -> None:
        record["schema_version"] = "99.0"

    with pytest.raises(fa.RecordError, match=r"newer than this release.*Upgrade"):
        load_record(_rewrite(small_record, future))
    path = tmp_path / "r.json"
    path.write_text("{not json")
    with pytest.raises(fa.RecordError, match="not valid JSON"):
        load_record(path)
    path.write_text('{"hello": 1}')
    with pytest.raises(fa.RecordError, match="not a forecastaudit record"):
        load_record(path)
    write_text_atomic(path, dumps({"record": "forecastaudit-record", "schema_version": "1.0"}))
    with pytest.raises(fa.RecordError, match="does not follow schema"):
        load_record(path)


def test_same_inputs_give_the_same_bytes() -> None:
    y = np.cumsum(np.random.default_rng(8).normal(size=80))
    texts = [
        fa.audit(y, "ARIMA(1,1,0)", estimators=["statsmodels-sarimax", "statsforecast"]).to_json(
            created="2026-01-01T00:00:00+00:00", timings=False
        )
        for _ in range(2)
    ]
    assert texts[0] == texts[1]
    assert '"seconds"' not in texts[0]
    assert json.loads(texts[0])["provenance"]["blas"] is not None
