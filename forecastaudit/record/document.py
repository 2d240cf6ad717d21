"""The audit record: a versioned JSON document with provenance.

The same inputs give the same bytes apart from the ``created`` time: keys are sorted,
floats are written in Python's shortest round-trip form, and non-finite numbers become
``null``. Files are written atomically (a temporary file in the same folder, then a rename),
so a reader never sees half a record.
"""

from __future__ import annotations

import hashlib
import json
import os
import platform
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from forecastaudit.adapters.protocol import installed_version
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


def _packages() -> dict[str, str | None]:
    """Installed versions of the core packages and of every registered adapter's library."""
    names = list(_CORE_PACKAGES)
    for package in adapter_packages():
        if package not in names and package != "forecastaudit":
            names.append(package)
    return {name: installed_version(name) for name in names}


def _blas() -> str | None:
    """The BLAS numpy was built against, where numpy says (numpy >= 1.25 keeps a CONFIG)."""
    try:
        config = np.__config__.CONFIG  # type: ignore[attr-defined]
        blas = config["Build Dependencies"]["blas"]
        return f"{blas.get('name')} {blas.get('version', '')}".strip()
    except (AttributeError, KeyError, TypeError):
        return None


def future_regressors_sha256(report: AuditResult) -> str:
    """SHA-256 of the future regressor values the forecasts assume (columns and values)."""
    values = np.ascontiguousarray(report.future_regressors, dtype="<f8")
    digest = hashlib.sha256(",".join(report.spec.regressors).encode("utf-8") + b"\n")
    digest.update(f"{values.shape}".encode("ascii"))
    digest.update(values.tobytes())
    return digest.hexdigest()


def _future_regressors(report: AuditResult) -> dict[str, Any] | None:
    """The future regressor values in the record, by forecast period, or None."""
    values = getattr(report, "future_regressors", None)
    if values is None:
        return None
    periods = report.series.future_labels(len(values))
    return {
        "columns": list(report.spec.regressors),
        "periods": [str(p) for p in periods],
        "values": [[float(v) for v in row] for row in np.asarray(values)],
        "sha256": future_regressors_sha256(report),
    }


def provenance(report: AuditResult) -> dict[str, Any]:
    """Versions, platform and data fingerprint: what a reviewer needs to reproduce a record."""
    from forecastaudit._version import __version__

    out = {
        "forecastaudit": __version__,
        "python": sys.version.split()[0],
        "implementation": platform.python_implementation(),
        "platform": platform.platform(),
        "machine": platform.machine(),
        "packages": _packages(),
        "estimators": {
            key: {
                "package": e.package,
                "version": e.version,
                "engine": e.engine,
                "origin": e.origin,
                **({"environment": e.provenance} if e.origin == "environment" else {}),
            }
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
            **(
                {"future_regressors_sha256": future_regressors_sha256(report)}
                if getattr(report, "future_regressors", None) is not None
                else {}
            ),
        },
    }
    invocation = getattr(report, "invocation", None)
    if invocation:
        out["invocation"] = _clean(dict(invocation))
    return out


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
                "future_regressors": _future_regressors(report),
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
    signoff = getattr(report, "signoff", None)
    if signoff is not None:
        record["signoff"] = _clean(dict(signoff))
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


#: Deepest nesting of arrays and objects a record may have (a real record stays below 12).
MAX_DEPTH = 64

#: Largest record file read, in bytes (a large audit with profiles is a few MB).
MAX_BYTES = 256 * 1024 * 1024


def _refuse_constant(token: str) -> None:
    raise RecordError(
        f"The file holds the non-standard JSON value {token}; audit records hold only "
        "standard JSON (a missing number is null). Use the record as forecastaudit wrote it."
    )


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for key, value in pairs:
        if key in out:
            raise RecordError(
                f"The key {key[:80]!r} appears twice in one object; a reader could take "
                "either value. Use the record as forecastaudit wrote it."
            )
        out[key] = value
    return out


def _depth(text: str) -> int:
    depth = deepest = 0
    in_string = escaped = False
    for char in text:
        if in_string:
            if escaped:
                escaped = False
            elif char == "\\":
                escaped = True
            elif char == '"':
                in_string = False
        elif char == '"':
            in_string = True
        elif char in "[{":
            depth += 1
            deepest = max(deepest, depth)
            if deepest > MAX_DEPTH:
                return deepest
        elif char in "]}":
            depth -= 1
    return deepest


def parse_strict_json(data: bytes, where: str) -> Any:
    """Parse untrusted JSON bytes strictly, raising only :class:`RecordError`.

    Refused: content that is not UTF-8 text (binary files), NaN and Infinity literals,
    duplicate keys in one object, and nesting deeper than :data:`MAX_DEPTH`.
    """
    if b"\x00" in data:
        raise RecordError(f"{where} is a binary file, not an audit record (JSON text).")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise RecordError(
            f"{where} is not UTF-8 text (a binary file?); it is not an audit record."
        ) from None
    if _depth(text) > MAX_DEPTH:
        raise RecordError(
            f"{where} nests arrays or objects more than {MAX_DEPTH} deep; no audit record "
            "does. It is not a record forecastaudit wrote."
        )
    try:
        return json.loads(text, object_pairs_hook=_no_duplicates, parse_constant=_refuse_constant)
    except RecordError as exc:
        raise RecordError(f"{where}: {exc}") from None
    except (json.JSONDecodeError, RecursionError) as exc:
        raise RecordError(
            f"{where} is not valid JSON ({exc}); it is not an audit record."
        ) from None


def check_seal(record: Any, where: str) -> None:
    """Raise :class:`RecordError` when ``content_sha256`` does not match the content."""
    if record.get("content_sha256") != content_digest(record):
        raise RecordError(
            f"{where} was modified after it was written: its content no longer matches its "
            "content_sha256 seal. Use the original record, or re-run the audit."
        )


def check_record(
    record: Any,
    where: str = "The record",
    *,
    trusted_keys: Any = None,
    require_signature: bool | None = None,
) -> dict[str, Any]:
    """Check a record already in memory as :func:`load_record` checks a file.

    Raises
    ------
    RecordError
        When ``record`` is not a dict, not a forecastaudit record, of another schema
        version, does not follow the schema, fails its seal, or (when signatures are
        required) lacks a valid signature by a trusted key.
    """
    if not isinstance(record, dict) or record.get("record") != RECORD_KIND:
        raise RecordError(
            f"{where} is not a forecastaudit record (no 'record' marker). Give a record "
            "written by forecastaudit, read with load_record."
        )
    version = str(record.get("schema_version", ""))
    if version != SCHEMA_VERSION:
        newer = _is_newer(version)
        raise RecordError(
            f"{where} has schema version {version or 'none'}"
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
        raise RecordError(f"{where}: {exc}") from None
    check_seal(record, where)
    if require_signature is None:
        require_signature = trusted_keys is not None
    if require_signature:
        if trusted_keys is None:
            raise RecordError(
                "Signatures are required but no trusted keys were given: pass "
                "trusted_keys=[...] (the reviewers' public key files)."
            )
        from forecastaudit.record.signing import verify_signatures

        verify_signatures(record, trusted_keys, where=where)
    return record


def load_record(
    path: str | os.PathLike[str],
    *,
    trusted_keys: Any = None,
    require_signature: bool | None = None,
) -> dict[str, Any]:
    """Read a record written by forecastaudit, checking its kind, schema, seal and signatures.

    Only JSON is parsed, strictly (see :func:`parse_strict_json`); nothing in the file is
    executed.

    Parameters
    ----------
    path : path-like
    trusted_keys : public key or sequence of them, optional
        Reviewers' Ed25519 public keys (PEM file paths, PEM bytes or key objects). When
        given, the record must carry a valid signature by at least one of them.
    require_signature : bool, optional
        Default: True when ``trusted_keys`` is given. True without ``trusted_keys`` is an
        error.

    Raises
    ------
    RecordError
        When the file is not standard JSON, not a forecastaudit record, of a schema version
        this release does not read, changed after it was written, or (when signatures are
        required) not signed by a trusted key.
    """
    where = str(path)
    try:
        size = Path(path).stat().st_size
        if size > MAX_BYTES:
            raise RecordError(
                f"{where} is {size} bytes, more than any audit record ({MAX_BYTES}); it is "
                "not a record forecastaudit wrote."
            )
        data = Path(path).read_bytes()
    except OSError as exc:
        raise RecordError(f"Cannot read record {path}: {exc}") from exc
    record = parse_strict_json(data, where)
    return check_record(
        record, where, trusted_keys=trusted_keys, require_signature=require_signature
    )


def _is_newer(version: str) -> bool:
    try:
        return tuple(int(p) for p in version.split(".")) > tuple(
            int(p) for p in SCHEMA_VERSION.split(".")
        )
    except ValueError:
        return False
