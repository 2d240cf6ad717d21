"""Strict reading of record files: only standard JSON of a record, refused with a RecordError."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import numpy as np
import pytest

import forecastaudit as fa
from forecastaudit.errors import RecordError
from forecastaudit.record.document import MAX_DEPTH, content_digest, dumps, load_record


@pytest.fixture(scope="module")
def record() -> dict:
    y = 20 + np.random.default_rng(5).normal(size=60)
    return fa.audit(y, "ARIMA(1,0,0) +mean", estimators=["statsmodels-sarimax"]).to_dict()


def _file(tmp_path: Path, content: bytes | str) -> Path:
    path = tmp_path / "record.json"
    path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    return path


def test_a_written_record_loads(record: dict, tmp_path: Path) -> None:
    assert load_record(_file(tmp_path, dumps(record))) == record


def test_duplicate_keys_are_refused(record: dict, tmp_path: Path) -> None:
    text = dumps(record)
    # A second "verdict" key at the top level: json.loads would silently keep the last one.
    doubled = text.replace('"verdict":', '"verdict": "pass",\n  "verdict":', 1)
    with pytest.raises(RecordError, match="'verdict' appears twice"):
        load_record(_file(tmp_path, doubled))


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity"])
def test_non_standard_number_literals_are_refused(
    record: dict, tmp_path: Path, literal: str
) -> None:
    text = dumps(record).replace('"loglike_atol": {', f'"x": {literal}, "loglike_atol": {{', 1)
    with pytest.raises(RecordError, match=f"non-standard JSON value {literal}"):
        load_record(_file(tmp_path, text))


@pytest.mark.parametrize(
    "content",
    [b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", b"PK\x03\x04\x14\x00", b"\xff\xfe{\x00}\x00"],
    ids=["png", "zip", "utf16"],
)
def test_binary_content_is_refused(tmp_path: Path, content: bytes) -> None:
    with pytest.raises(RecordError, match=r"binary file|not UTF-8"):
        load_record(_file(tmp_path, content))


def test_deep_nesting_is_refused_before_parsing(tmp_path: Path) -> None:
    deep = "[" * 100_000 + "]" * 100_000
    with pytest.raises(RecordError, match=f"more than {MAX_DEPTH} deep"):
        load_record(_file(tmp_path, deep))
    # Brackets inside strings do not count.
    assert len(json.dumps({"s": "[" * 1000})) > 1000
    with pytest.raises(RecordError, match="no 'record' marker"):
        load_record(_file(tmp_path, json.dumps({"s": "[" * 1000})))


def test_a_null_where_the_schema_needs_a_number_is_named(record: dict, tmp_path: Path) -> None:
    broken = copy.deepcopy(record)
    broken["provenance"]["data"]["n"] = None
    broken["content_sha256"] = content_digest(broken)
    with pytest.raises(RecordError, match="provenance/data/n: None is not of type 'integer'"):
        load_record(_file(tmp_path, dumps(broken)))


def test_not_json_and_not_a_record(tmp_path: Path) -> None:
    with pytest.raises(RecordError, match="not valid JSON"):
        load_record(_file(tmp_path, "{'single': 'quotes'}"))
    with pytest.raises(RecordError, match="no 'record' marker"):
        load_record(_file(tmp_path, "[1, 2]"))
    with pytest.raises(RecordError, match="Cannot read record"):
        load_record(tmp_path / "missing.json")


def test_a_standard_error_that_is_not_a_number_is_named(record: dict, tmp_path: Path) -> None:
    broken = copy.deepcopy(record)
    name = next(iter(broken["reference"]["standard_errors"]))
    broken["reference"]["standard_errors"][name] = "0.1"
    broken["content_sha256"] = content_digest(broken)
    with pytest.raises(RecordError, match=f"reference/standard_errors/{name}: '0.1' is not"):
        load_record(_file(tmp_path, dumps(broken)))
    # null (no standard error: the Hessian was not usable) is legal, and compares.
    broken["reference"]["standard_errors"][name] = None
    broken["content_sha256"] = content_digest(broken)
    assert fa.compare_records(record, load_record(_file(tmp_path, dumps(broken)))).passed
