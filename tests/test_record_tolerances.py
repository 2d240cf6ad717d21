"""Tolerances and the record file: validation, determinism, version checks."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import forecastaudit as fa
from forecastaudit.record import SCHEMA_VERSION, dumps, load_record, write_text_atomic
from forecastaudit.tolerances import REASONS


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


def test_load_record_rejects_foreign_and_future_files(tmp_path: Path) -> None:
    path = tmp_path / "r.json"
    write_text_atomic(
        path, dumps({"record": "forecastaudit-record", "schema_version": SCHEMA_VERSION})
    )
    assert load_record(path)["schema_version"] == SCHEMA_VERSION
    write_text_atomic(path, dumps({"record": "forecastaudit-record", "schema_version": "99.0"}))
    with pytest.raises(fa.RecordError, match=r"schema version 99\.0"):
        load_record(path)
    path.write_text("{not json")
    with pytest.raises(fa.RecordError, match="not valid JSON"):
        load_record(path)
    path.write_text('{"hello": 1}')
    with pytest.raises(fa.RecordError, match="not a forecastaudit record"):
        load_record(path)
