"""The audit record: a versioned JSON document with provenance.

The same inputs give the same bytes apart from the ``created`` time: keys are sorted,
floats are written in Python's shortest round-trip form, and non-finite numbers become
``null``. Files are written atomically (a temporary file in the same folder, then a rename),
so a reader never sees half a record.
"""

from __future__ import annotations

import hashlib
import importlib.metadata
import json
import os
import platform
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from forecastaudit.adapters.registry import adapter_packages
from forecastaudit.errors import RecordError
from forecastaudit.jsonutil import to_plain as _clean

if TYPE_CHECKING:
    from forecastaudit.result import AuditResult


SCHEMA_VERSION = "1.0"


RECORD_KIND = "forecastaudit-record"


# Packages whose versions are recorded whether or not they took part.
#: What forecastaudit's own computations (the reference, the diagnosis) run on; the
#: estimator libraries come from the registry and from the estimates themselves.
_CORE_PACKAGES = ("numpy", "scipy", "pandas")


def _version(package: str) -> str | None:
    try:
        return importlib.metadata.version(package)
    except importlib.metadata.PackageNotFoundError:
        return None


def _packages() -> dict[str, str | None]:
    """Installed versions of the core packages and of every registered adapter's library."""
    names = list(_CORE_PACKAGES)
    for package in adapter_packages():
        if package not in names and package != "forecastaudit":
            names.append(package)
    return {name: _version(name) for name in names}


def _blas() -> str | None:
    """The BLAS numpy was built against, where numpy says (numpy >= 1.25 keeps a CONFIG)."""
    try:
        config = np.__config__.CONFIG  # type: ignore[attr-defined]
        blas = config["Build Dependencies"]["blas"]
        return f"{blas.get('name')} {blas.get('version', '')}".strip()
    except (AttributeError, KeyError, TypeError):
        return None


def provenance(report: AuditResult) -> dict[str, Any]:
    """Versions, platform and data fingerprint: what a reviewer needs to reproduce a record."""
    from forecastaudit._version import __version__

    return {
        "forecastaudit": __version__,
        "python": sys.version.split()[0],
        "implementation": platform.python_implementation(),
        "platform": platform.platform(),
        "machine": platform.machine(),
        "packages": _packages(),
        "estimators": {
            key: {"package": e.package, "version": e.version, "engine": e.engine}
            for key, e in report.estimates.items()
        },
        "blas": _blas(),
        "data": {
            "name": report.series.name,
            "n": len(report.series),
            "fingerprint_sha256": report.series.fingerprint,
            "first": report.series.labels()[0],
            "last": report.series.labels()[-1],
            "frequency": report.series.frequency,
            "period": report.series.period,
        },
    }


def build_record(
    report: AuditResult, *, created: str | None = None, timings: bool = True
) -> dict[str, Any]:
    """The record of an audit as a JSON-ready dictionary, sealed and validated.

    Parameters
    ----------
    report : AuditResult
    created : str, optional
        A fixed creation time to write instead of the audit's own (for byte-identical
        records of identical inputs).
    timings : bool
        Keep wall-clock times (every ``seconds`` field). With ``timings=False`` and a fixed
        ``created``, the same inputs on the same machine and versions give the same bytes.
    """
    record = _clean(
        {
            "record": RECORD_KIND,
            "schema_version": SCHEMA_VERSION,
            "created": report.created if created is None else created,
            "verdict": report.verdict,
            "policy": report.policy,
            "materiality": report.materiality,
            "spec": report.spec.to_dict(),
            "tolerances": report.tolerances.describe(),
            "options": report.options,
            "provenance": provenance(report),
            "independent_engines": report.independent_engines,
            "estimates": {key: e.to_dict() for key, e in report.estimates.items()},
            "reference": {
                "standard_errors": report.standard_errors,
                "starts": report.reference_starts,
            },
            "parameters": {
                column: report.parameters[column].to_dict() for column in report.parameters
            },
            "likelihoods": {key: row.to_dict() for key, row in report.likelihoods.iterrows()},
            "forecasts": {
                "horizon": report.options.get("horizon"),
                "levels": report.options.get("levels"),
                "point_forecast": report.options.get("point_forecast"),
                "original_scale": {k: fc.to_dict() for k, fc in report.forecasts.items()},
                "transformed_scale": {
                    k: fc.to_dict() for k, fc in report.forecasts_transformed.items()
                },
                "spread": _frame_records(report.spread),
            },
            "residual_tests": _frame_rows(report.residual_tests),
            "likelihood_profiles": {
                key: _frame_records(frame) for key, frame in report.profiles.items()
            },
            "likelihood_grid": _grid(report.likelihood_grid),
            "holdout": report.holdout.to_dict() if report.holdout is not None else None,
            "order_search": (
                report.order_search.to_dict() if report.order_search is not None else None
            ),
            "findings": [f.to_dict() for f in report.findings],
        }
    )
    if not timings:
        record = _without(record, "seconds")
    record["content_sha256"] = content_digest(record)
    validate_record(record)
    return record


def _without(value: Any, key: str) -> Any:
    if isinstance(value, dict):
        return {k: _without(v, key) for k, v in value.items() if k != key}
    if isinstance(value, list):
        return [_without(v, key) for v in value]
    return value


def content_digest(record: dict[str, Any]) -> str:
    """SHA-256 of the record's canonical JSON without its ``content_sha256`` field.

    A record whose stored digest differs from this was changed after it was written.
    """
    body = {k: v for k, v in record.items() if k != "content_sha256"}
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _schema() -> dict[str, Any]:
    from importlib import resources

    with resources.files("forecastaudit.data").joinpath("record.schema.json").open() as handle:
        return json.load(handle)


def validate_record(record: dict[str, Any]) -> None:
    """Check a record against the shipped JSON Schema.

    Raises
    ------
    RecordError
        Naming the first place where the record does not follow the schema.
    """
    import jsonschema

    validator = jsonschema.Draft202012Validator(_schema())
    errors = sorted(validator.iter_errors(record), key=lambda e: list(e.absolute_path))
    if errors:
        first = errors[0]
        where = "/".join(str(p) for p in first.absolute_path) or "(top level)"
        raise RecordError(
            f"The record does not follow schema {SCHEMA_VERSION} at {where}: {first.message}"
        )


def _grid(grid: dict[str, Any] | None) -> dict[str, Any] | None:
    if grid is None:
        return None
    return {
        "names": list(grid["names"]),
        "x": np.asarray(grid["x"]).tolist(),
        "y": np.asarray(grid["y"]).tolist(),
        "profiled_loglike": np.asarray(grid["profiled_loglike"]).tolist(),
        "points": grid.get("points", {}),
    }


def _frame_rows(frame: Any) -> dict[str, Any] | None:
    """A DataFrame as {row label: {column: value}}, or None."""
    if frame is None:
        return None
    return {str(k): row.to_dict() for k, row in frame.iterrows()}


def _frame_records(frame: Any) -> list[dict[str, Any]] | None:
    """A DataFrame as a list of rows with the index as a column, or None."""
    if frame is None:
        return None
    return frame.reset_index().to_dict(orient="records")


def dumps(record: dict[str, Any]) -> str:
    """Deterministic JSON text of a record (sorted keys, two-space indent, final newline)."""
    return json.dumps(_clean(record), sort_keys=True, indent=2, allow_nan=False) + "\n"


def load_record(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Read a record written by forecastaudit, checking its kind and schema version.

    Only JSON is parsed; nothing in the file is executed.

    Raises
    ------
    RecordError
        When the file is not JSON, not a forecastaudit record, or of a schema version this
        release does not read.
    """
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as exc:
        raise RecordError(f"Cannot read record {path}: {exc}") from exc
    try:
        record = json.loads(text)
    except json.JSONDecodeError as exc:
        raise RecordError(f"{path} is not valid JSON ({exc}); it is not an audit record.") from exc
    if not isinstance(record, dict) or record.get("record") != RECORD_KIND:
        raise RecordError(f"{path} is not a forecastaudit record (no 'record' marker).")
    version = str(record.get("schema_version", ""))
    if version != SCHEMA_VERSION:
        newer = _is_newer(version)
        raise RecordError(
            f"{path} has schema version {version or 'none'}"
            + (" (newer than this release)" if newer else "")
            + f"; this forecastaudit reads version {SCHEMA_VERSION}. "
            + (
                "Upgrade forecastaudit to read it."
                if newer
                else "Use the forecastaudit release that wrote it, or re-run the audit."
            )
        )
    try:
        validate_record(record)
    except RecordError as exc:
        raise RecordError(f"{path}: {exc}") from None
    if record.get("content_sha256") != content_digest(record):
        raise RecordError(
            f"{path} was modified after it was written: its content no longer matches its "
            "content_sha256 seal. Use the original record, or re-run the audit."
        )
    return record


def _is_newer(version: str) -> bool:
    try:
        return tuple(int(p) for p in version.split(".")) > tuple(
            int(p) for p in SCHEMA_VERSION.split(".")
        )
    except ValueError:
        return False
