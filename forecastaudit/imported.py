"""Estimates made elsewhere: import records, their declared conventions, and normalisation.

An *import record* holds one fit of one specification by software that cannot run here
(another language's forecasting package, a spreadsheet add-in, an in-house system): the
values as that software reports them, the conventions they are written in, its reported
log-likelihood and criteria, its name and version, and optionally its forecasts. The format
is ours; its JSON Schema is ``forecastaudit/data/import.schema.json`` (:func:`import_schema`)
and docs/estimates-made-elsewhere.md describes it with the quick ``name,value`` CSV form.

Reading is strict: text only (UTF-8, no NUL bytes), no duplicate keys, no ``NaN`` or
``Infinity`` literals, every field checked against the schema, every parameter of the
specification present and no other. :func:`imported_estimate` converts the values to the
canonical convention (:mod:`forecastaudit.conventions`) under the declared conventions, or
under any other :class:`Declarations`, which is how the audit checks the declarations: see
:mod:`forecastaudit.diagnosis.declarations`.
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import io
import json
import math
import os
import re
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import numpy as np

from forecastaudit.conventions import (
    df_adjusted_to_ml_sigma2,
    intercept_to_mean,
    trend_scale,
)
from forecastaudit.errors import ImportRecordError, SpecError
from forecastaudit.estimate import Estimate, Forecast
from forecastaudit.layout import layout_of
from forecastaudit.spec import ModelSpec

__all__ = [
    "CONSTANT_KINDS",
    "IMPORT_KIND",
    "Declarations",
    "ImportRecord",
    "import_schema",
    "imported_estimate",
    "imported_forecast",
    "read_import",
]

#: The value of the ``record`` field of every import record.
IMPORT_KIND = "forecastaudit-import"
#: The format version this release reads and writes.
FORMAT_VERSION = 1
#: Largest import file read, in bytes (a record is a few kilobytes; anything far larger is
#: not one).
MAX_BYTES = 5_000_000

MaSign = Literal["plus", "minus"]
ConstantKind = Literal["mean", "intercept", "drift", "none"]
Sigma2Declared = Literal["maximum-likelihood", "df-adjusted"]
LoglikeScale = Literal["transformed", "original"]

#: What each declared kind of constant is, in words.
CONSTANT_KINDS: dict[str, str] = {
    "mean": "the mean of the differenced series",
    "intercept": "the intercept c of phi(B)Phi(B^m) w_t = c + ...",
    "drift": "the slope per period of a time trend in levels",
    "none": "no constant",
}

_MA_SIGNS = {
    "plus": "theta(B) = 1 + theta_1 B + ...",
    "minus": "theta(B) = 1 - theta_1 B - ... (Box-Jenkins)",
}


@dataclass(frozen=True)
class Declarations:
    """The conventions an import record's values are written in.

    Attributes
    ----------
    ma_sign : {"plus", "minus"}
        Sign of the MA terms (regular and seasonal): ``plus`` is the canonical
        ``1 + theta_1 B``; ``minus`` the Box-Jenkins ``1 - theta_1 B``.
    constant : {"mean", "intercept", "drift", "none"}
        What the parameter ``constant`` is (see :data:`CONSTANT_KINDS`).
    sigma2 : {"maximum-likelihood", "df-adjusted"}
        Whether the reported innovation variance divides the sum of squares by ``n_w`` or
        by ``n_w - sigma2_subtracted``.
    sigma2_subtracted : int or None
        For a df-adjusted sigma2, what is subtracted from ``n_w`` (None: the number of free
        coefficients).
    loglike_scale : {"transformed", "original"}
        Whether the reported log-likelihood is of the transformed series or of the
        original one (log-Jacobian of the transform included).
    """

    ma_sign: MaSign
    constant: ConstantKind
    sigma2: Sigma2Declared
    sigma2_subtracted: int | None = None
    loglike_scale: LoglikeScale = "transformed"

    def to_dict(self) -> dict[str, Any]:
        """The ``conventions`` object of an import record."""
        out: dict[str, Any] = {
            "ma_sign": self.ma_sign,
            "constant": self.constant,
            "sigma2": self.sigma2,
            "loglike_scale": self.loglike_scale,
        }
        if self.sigma2_subtracted is not None:
            out["sigma2_subtracted"] = self.sigma2_subtracted
        return out

    def replace(self, **changes: Any) -> Declarations:
        """A copy with some declarations changed."""
        return dataclasses.replace(self, **changes)

    def differences(self, other: Declarations) -> dict[str, tuple[Any, Any]]:
        """The declarations that differ from ``other``: name -> (this, other)."""
        return {
            f.name: (getattr(self, f.name), getattr(other, f.name))
            for f in dataclasses.fields(self)
            if getattr(self, f.name) != getattr(other, f.name)
        }

    def describe(self) -> str:
        """The declarations in words."""
        sigma2 = self.sigma2
        if sigma2 == "df-adjusted":
            subtracted = (
                "the number of coefficients"
                if self.sigma2_subtracted is None
                else str(self.sigma2_subtracted)
            )
            sigma2 += f" (n_w minus {subtracted})"
        return (
            f"MA sign {self.ma_sign}, constant {self.constant}, sigma2 {sigma2}, "
            f"log-likelihood on the {self.loglike_scale} scale"
        )


@dataclass(frozen=True)
class ImportRecord:
    """One import record, read and checked (see the module docstring).

    Attributes
    ----------
    label : str
        Its column name in tables and findings.
    software, software_version : str, str or None
        The software that made the estimate and its version, as free text.
    engine : str
        Engine lineage (default: the software name).
    spec : ModelSpec
        The specification the estimate is of.
    declarations : Declarations
        The conventions declared for its values.
    parameters : dict
        The values as reported, under our lag names, ``constant`` and ``sigma2``.
    loglike, loglike_definition : float, str
        The reported log-likelihood (NaN when none) and its definition.
    criteria : dict
        Reported ``aic``, ``aicc``, ``bic``.
    criteria_n, criteria_k : int or None
        What the reported criteria count.
    criteria_definition : str
    forecasts : dict or None
        The ``forecasts`` object as given (see the schema).
    notes : str
    source : str
        Where it was read from (a path, or ``"mapping"``).
    sha256 : str
        Digest of the canonical JSON form of the record (the same for a JSON file and the
        mapping it holds).
    data : dict
        The record in its JSON form (a CSV file converted), as checked.
    """

    label: str
    software: str
    software_version: str | None
    engine: str
    spec: ModelSpec
    declarations: Declarations
    parameters: dict[str, float]
    loglike: float = math.nan
    loglike_definition: str = ""
    criteria: dict[str, float] = field(default_factory=dict)
    criteria_n: int | None = None
    criteria_k: int | None = None
    criteria_definition: str = ""
    forecasts: dict[str, Any] | None = None
    notes: str = ""
    source: str = "mapping"
    sha256: str = ""
    data: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)

    def provenance(self) -> dict[str, Any]:
        """Where the estimate came from, for the record."""
        return {
            "origin": "imported",
            "software": self.software,
            "software_version": self.software_version,
            "source": self.source,
            "import_sha256": self.sha256,
            "declared": self.declarations.to_dict(),
            "notes": self.notes,
        }


# ---------------------------------------------------------------------- reading
def import_schema() -> dict[str, Any]:
    """The JSON Schema of an import record (``forecastaudit/data/import.schema.json``)."""
    from importlib import resources

    text = resources.files("forecastaudit").joinpath("data/import.schema.json").read_text()
    return json.loads(text)


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    seen: dict[str, Any] = {}
    for key, value in pairs:
        if key in seen:
            raise ImportRecordError(
                f"the key {key!r} appears twice in one object; keep one value for it."
            )
        seen[key] = value
    return seen


def _no_constant(name: str) -> Any:
    raise ImportRecordError(
        f"the literal {name} is not a number in JSON; leave the value out (or use null where "
        "the schema allows it) instead."
    )


def _read_text(path: Path) -> str:
    try:
        size = path.stat().st_size
    except OSError as exc:
        raise ImportRecordError(f"Cannot read the import record {path}: {exc}") from exc
    if size > MAX_BYTES:
        raise ImportRecordError(
            f"{path} is {size} bytes; an import record is a small text file (at most "
            f"{MAX_BYTES} bytes). Check that the right file was given."
        )
    raw = path.read_bytes()
    if b"\x00" in raw:
        raise ImportRecordError(
            f"{path} holds binary data (NUL bytes); an import record is a UTF-8 text file "
            "(JSON or CSV). Export it as text."
        )
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ImportRecordError(
            f"{path} is not UTF-8 text ({exc}); save it as UTF-8 and import it again."
        ) from None


def _loads(text: str, where: str) -> Any:
    try:
        return json.loads(text, object_pairs_hook=_no_duplicates, parse_constant=_no_constant)
    except ImportRecordError as exc:
        raise ImportRecordError(f"{where}: {exc}") from None
    except json.JSONDecodeError as exc:
        raise ImportRecordError(
            f"{where} is not valid JSON ({exc}). Write it as JSON, or use the CSV form "
            "(a file ending in .csv)."
        ) from None


#: CSV header lines: "# name: value". These names become declarations or fields.
_CSV_HEADERS = {
    "specification": ("specification",),
    "label": ("label",),
    "software": ("software", "name"),
    "software_version": ("software", "version"),
    "engine": ("software", "engine"),
    "ma_sign": ("conventions", "ma_sign"),
    "constant": ("conventions", "constant"),
    "sigma2": ("conventions", "sigma2"),
    "sigma2_subtracted": ("conventions", "sigma2_subtracted"),
    "loglike_scale": ("conventions", "loglike_scale"),
    "loglike_definition": ("loglike", "definition"),
    "criteria_definition": ("criteria", "definition"),
    "notes": ("notes",),
}
#: CSV rows that are not parameters.
_CSV_VALUES = {
    "loglike": ("loglike", "value"),
    "aic": ("criteria", "aic"),
    "aicc": ("criteria", "aicc"),
    "bic": ("criteria", "bic"),
    "criteria_n": ("criteria", "n"),
    "criteria_k": ("criteria", "k"),
}
_HEADER_LINE = re.compile(r"^#\s*([A-Za-z_][A-Za-z0-9_]*)\s*:\s*(.*?)\s*$")


def _csv_number(text: str, where: str) -> float | int:
    cleaned = text.strip()
    if not re.fullmatch(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?", cleaned):
        raise ImportRecordError(
            f"{where}: {text!r} is not a number; write it with a decimal point and no "
            "thousands separators (e.g. -0.3351)."
        )
    if re.fullmatch(r"[+-]?\d+", cleaned):
        return int(cleaned)
    return float(cleaned)


def _csv_to_mapping(text: str, where: str) -> dict[str, Any]:
    """The JSON form of the CSV form (see docs/estimates-made-elsewhere.md)."""
    data: dict[str, Any] = {"record": IMPORT_KIND, "format_version": FORMAT_VERSION}
    parameters: dict[str, Any] = {}
    rows: list[str] = []
    for number, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            continue
        if line.lstrip().startswith("#"):
            match = _HEADER_LINE.match(line.strip())
            if match is None:
                continue  # a plain comment
            name, value = match.group(1).lower(), match.group(2)
            if name not in _CSV_HEADERS:
                raise ImportRecordError(
                    f"{where}, line {number}: unknown header {name!r}; the headers are "
                    f"{', '.join(sorted(_CSV_HEADERS))}."
                )
            *parents, leaf = _CSV_HEADERS[name]
            target = data
            for parent in parents:
                target = target.setdefault(parent, {})
            if leaf in target:
                raise ImportRecordError(f"{where}, line {number}: the header {name!r} is repeated.")
            target[leaf] = (
                _csv_number(value, f"{where}, line {number}")
                if (name == "sigma2_subtracted")
                else value
            )
            continue
        rows.append(line)
    reader = csv.reader(io.StringIO("\n".join(rows)))
    table = [row for row in reader if any(cell.strip() for cell in row)]
    if not table or [c.strip().lower() for c in table[0]] != ["name", "value"]:
        raise ImportRecordError(
            f"{where}: after the '# name: value' header lines, the CSV form needs the header "
            "row 'name,value' and then one row per value."
        )
    for index, row in enumerate(table[1:], start=2):
        if len(row) != 2:
            raise ImportRecordError(
                f"{where}: row {index} of the table has {len(row)} cells; write 'name,value'."
            )
        name, value = row[0].strip(), row[1]
        number = _csv_number(value, f"{where}, row {name!r}")
        if name in _CSV_VALUES:
            parent, leaf = _CSV_VALUES[name]
            target = data.setdefault(parent, {})
        else:
            target, leaf = parameters, name
        if leaf in target:
            raise ImportRecordError(f"{where}: the value {name!r} is given twice.")
        target[leaf] = number
    data["parameters"] = parameters
    return data


def _canonical_sha256(data: Mapping[str, Any]) -> str:
    text = json.dumps(data, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _check_schema(data: Any, where: str) -> None:
    import jsonschema

    if not isinstance(data, dict):
        raise ImportRecordError(
            f"{where} is not an import record: its top level is {type(data).__name__}, "
            "not an object."
        )
    if data.get("record") != IMPORT_KIND:
        raise ImportRecordError(
            f'{where} is not a forecastaudit import record: set "record": '
            f'"{IMPORT_KIND}" and "format_version": {FORMAT_VERSION} (see '
            "docs/estimates-made-elsewhere.md)."
        )
    validator = jsonschema.Draft202012Validator(import_schema())
    errors = sorted(validator.iter_errors(data), key=lambda e: list(e.absolute_path))
    if errors:
        first = errors[0]
        at = "/".join(str(p) for p in first.absolute_path) or "(top level)"
        raise ImportRecordError(
            f"{where} does not follow the import record format at {at}: {first.message}"
        )
    _check_finite(data, where, "")


def _check_finite(value: Any, where: str, at: str) -> None:
    # JSON without NaN literals still allows 1e999, which Python reads as infinity.
    if isinstance(value, float) and not math.isfinite(value):
        raise ImportRecordError(f"{where}: the number at {at or '(top level)'} is not finite.")
    if isinstance(value, dict):
        for k, v in value.items():
            _check_finite(v, where, f"{at}/{k}")
    elif isinstance(value, list):
        for i, v in enumerate(value):
            _check_finite(v, where, f"{at}/{i}")


def _label(data: Mapping[str, Any]) -> str:
    if "label" in data:
        return str(data["label"])
    slug = re.sub(r"[^a-z0-9]+", "-", str(data["software"]["name"]).lower()).strip("-")
    return ("imported-" + slug)[:60].rstrip("-") or "imported"


def _record_from(data: dict[str, Any], where: str, source: str) -> ImportRecord:
    _check_schema(data, where)
    try:
        spec = ModelSpec.parse(data["specification"])
    except SpecError as exc:
        raise ImportRecordError(f"{where}: its specification cannot be read: {exc}") from None
    conventions = data["conventions"]
    declarations = Declarations(
        ma_sign=conventions["ma_sign"],
        constant=conventions["constant"],
        sigma2=conventions["sigma2"],
        sigma2_subtracted=conventions.get("sigma2_subtracted"),
        loglike_scale=conventions.get("loglike_scale", "transformed"),
    )
    parameters = {str(k): float(v) for k, v in data["parameters"].items()}
    _check_parameters(spec, declarations, parameters, where)
    software = data["software"]
    loglike = data.get("loglike", {})
    criteria = data.get("criteria", {})
    return ImportRecord(
        label=_label(data),
        software=str(software["name"]),
        software_version=software.get("version"),
        engine=str(software.get("engine") or software["name"]),
        spec=spec,
        declarations=declarations,
        parameters=parameters,
        loglike=float(loglike["value"]) if "value" in loglike else math.nan,
        loglike_definition=str(loglike.get("definition", "")),
        criteria={k: float(criteria[k]) for k in ("aic", "aicc", "bic") if k in criteria},
        criteria_n=criteria.get("n"),
        criteria_k=criteria.get("k"),
        criteria_definition=str(criteria.get("definition", "")),
        forecasts=data.get("forecasts"),
        notes=str(data.get("notes", "")),
        source=source,
        sha256=_canonical_sha256(data),
        data=data,
    )


def _check_parameters(
    spec: ModelSpec, declarations: Declarations, parameters: Mapping[str, float], where: str
) -> None:
    layout = layout_of(spec)
    wanted = [n for n in layout.coefficient_names if n not in layout.mean_names]
    if spec.mean:
        if declarations.constant == "none":
            raise ImportRecordError(
                f"{where}: the specification {spec} has a mean, but the constant is declared "
                "'none'. Declare what the software's constant is (mean, intercept or drift)."
            )
        if declarations.constant == "drift" and spec.n_differences == 0:
            raise ImportRecordError(
                f"{where}: a drift per period needs at least one difference, and {spec} has "
                "none. Declare the constant as 'mean' or 'intercept'."
            )
        wanted.append("constant")
    elif declarations.constant != "none":
        raise ImportRecordError(
            f"{where}: the constant is declared {declarations.constant!r}, but {spec} has no "
            "mean. Add '+mean' to the specification, or declare the constant 'none'."
        )
    missing = [n for n in wanted if n not in parameters]
    extra = [n for n in parameters if n not in wanted and n != "sigma2"]
    if missing or extra:
        problems = []
        if missing:
            problems.append(f"missing {', '.join(missing)}")
        if extra:
            problems.append(f"not part of {spec}: {', '.join(extra)}")
        raise ImportRecordError(
            f"{where}: the parameters do not match the specification ({'; '.join(problems)}). "
            f"{spec} has exactly {', '.join(wanted) or 'no coefficients'} (and optionally "
            "sigma2)."
        )
    if "sigma2" in parameters and not parameters["sigma2"] > 0:
        raise ImportRecordError(f"{where}: sigma2 must be positive, got {parameters['sigma2']}.")


def read_import(source: str | os.PathLike[str] | Mapping[str, Any] | ImportRecord) -> ImportRecord:
    """Read and check one import record.

    Parameters
    ----------
    source : path, mapping or ImportRecord
        A JSON file (any name not ending in ``.csv``), a CSV file of the quick form (ending
        in ``.csv``), the record as a mapping, or a record already read (returned as is).

    Returns
    -------
    ImportRecord

    Raises
    ------
    ImportRecordError
        Naming the problem and the fix: not text, not JSON, a duplicate key, a NaN
        literal, a field outside the format, a parameter missing or not part of the
        specification, a declaration that does not fit the specification.
    """
    if isinstance(source, ImportRecord):
        return source
    if isinstance(source, Mapping):
        try:
            # A deep copy through JSON: the caller's mapping is never modified, and it obeys
            # the same rules as a file (no NaN, no non-JSON values).
            text = json.dumps(source, allow_nan=False)
        except (TypeError, ValueError) as exc:
            raise ImportRecordError(
                f"the import record mapping cannot be written as JSON ({exc}); use plain "
                "numbers, strings, lists and dicts, and no NaN or infinity."
            ) from None
        return _record_from(_loads(text, "the import record"), "the import record", "mapping")
    if isinstance(source, str | os.PathLike):
        path = Path(source)
        if not path.is_file():
            raise ImportRecordError(
                f"The import record {path} does not exist or is not a file; give the path of "
                "a JSON or CSV import record."
            )
        text = _read_text(path)
        where = str(path)
        data = (
            _csv_to_mapping(text, where) if path.suffix.lower() == ".csv" else _loads(text, where)
        )
        return _record_from(data, where, str(path))
    raise ImportRecordError(
        f"An import record is a path, a mapping or an ImportRecord, not {type(source).__name__}."
    )


# ---------------------------------------------------------------------- normalisation
@dataclass(frozen=True)
class Normalised:
    """An import record's values in the canonical convention under some declarations.

    ``params`` holds the coefficients and, when the record reports one, ``sigma2``
    (maximum likelihood); ``conversions`` says what was converted, in words.
    """

    params: dict[str, float]
    conversions: tuple[str, ...]
    sigma2_given: bool


def normalise(
    record: ImportRecord, declarations: Declarations | None = None, *, n_w: int | None = None
) -> Normalised:
    """Convert a record's values to the canonical convention under ``declarations``.

    Parameters
    ----------
    record : ImportRecord
    declarations : Declarations, optional
        Default: the record's own. Other declarations give what the values would mean if
        they were written in those conventions (the declaration check).
    n_w : int, optional
        Observations after differencing of the audited series; needed to convert a
        df-adjusted sigma2.

    Returns
    -------
    Normalised

    Raises
    ------
    ImportRecordError
        When the constant cannot be converted (an intercept with a unit AR root), or the
        declarations do not fit the specification.
    """
    decl = record.declarations if declarations is None else declarations
    spec = record.spec
    layout = layout_of(spec)
    values = record.parameters
    conversions: list[str] = []
    params: dict[str, float] = {}
    ma_names = {name for factor in layout.ma_factors for name in factor.names}
    for name in layout.coefficient_names:
        if name in layout.mean_names:
            continue
        value = values[name]
        if name in ma_names and decl.ma_sign == "minus":
            value = -value
        params[name] = value
    if ma_names and decl.ma_sign == "minus":
        conversions.append(
            "MA terms written with a minus sign (Box-Jenkins) were negated: "
            + ", ".join(f"{n} {values[n]:+.6g} -> {params[n]:+.6g}" for n in sorted(ma_names))
        )
    if spec.mean:
        constant = values["constant"]
        if decl.constant == "mean":
            mu = constant
        elif decl.constant == "intercept":
            try:
                mu = intercept_to_mean(constant, spec, params)
            except ZeroDivisionError:
                raise ImportRecordError(
                    f"{record.label}: an intercept cannot be converted to a mean when the AR "
                    "part has a unit root (phi(1)Phi(1) = 0)."
                ) from None
            conversions.append(
                f"intercept c = {constant:.6g} converted to the mean of the differenced series "
                f"mu = c / (phi(1)Phi(1)) = {mu:.6g}"
            )
        elif decl.constant == "drift":
            if spec.n_differences == 0:
                raise ImportRecordError(
                    f"{record.label}: a drift per period needs at least one difference."
                )
            mu = constant * trend_scale(spec)
            conversions.append(
                f"drift per period {constant:.6g} converted to the mean of the differenced "
                f"series mu = {trend_scale(spec):g} x drift = {mu:.6g}"
            )
        else:
            raise ImportRecordError(f"{record.label}: {spec} has a mean; the constant is 'none'.")
        params["mu"] = mu
    given = "sigma2" in values
    if given:
        sigma2 = values["sigma2"]
        if decl.sigma2 == "df-adjusted":
            subtracted = _subtracted(decl, spec)
            if n_w is None:
                raise ImportRecordError(
                    f"{record.label}: a df-adjusted sigma2 needs the series length to convert."
                )
            ml = df_adjusted_to_ml_sigma2(sigma2, n_w, subtracted)
            conversions.append(
                f"df-adjusted sigma2 {sigma2:.6g} (divisor n_w - {subtracted}) converted to "
                f"the maximum-likelihood value {ml:.6g} (divisor n_w = {n_w})"
            )
            sigma2 = ml
        params["sigma2"] = sigma2
    return Normalised(params=params, conversions=tuple(conversions), sigma2_given=given)


def _subtracted(decl: Declarations, spec: ModelSpec) -> int:
    return spec.n_coefficients if decl.sigma2_subtracted is None else decl.sigma2_subtracted


def alternative_declarations(record: ImportRecord) -> Iterator[Declarations]:
    """Every declaration the record's values could be in, its own first.

    MA sign (when the model has MA terms), kind of constant (when it has a mean: mean,
    intercept, and drift with d + D >= 1), sigma2 kind (when sigma2 is given), and the
    scale of the log-likelihood (when the spec has a transform).
    """
    spec = record.spec
    layout = layout_of(spec)
    own = record.declarations
    signs = ("plus", "minus") if layout.ma_factors else (own.ma_sign,)
    if spec.mean:
        constants: tuple[str, ...] = ("mean", "intercept") + (
            ("drift",) if spec.n_differences >= 1 else ()
        )
    else:
        constants = ("none",)
    kinds = (
        ("maximum-likelihood", "df-adjusted") if "sigma2" in record.parameters else (own.sigma2,)
    )
    scales = ("transformed", "original") if spec.transform is not None else ("transformed",)
    yield own
    for sign in signs:
        for constant in constants:
            for kind in kinds:
                for scale in scales:
                    candidate = own.replace(
                        ma_sign=sign, constant=constant, sigma2=kind, loglike_scale=scale
                    )
                    if candidate != own:
                        yield candidate


def imported_estimate(record: ImportRecord, n_w: int) -> Estimate:
    """The canonical estimate of an import record, as the audit's other estimates are.

    ``sigma2`` is the reported one converted to maximum likelihood; a record without one
    gets NaN here and the audit fills in the maximum-likelihood value at its coefficients.
    """
    normalised = normalise(record, n_w=n_w)
    spec = record.spec
    params = dict(normalised.params)
    params.setdefault("sigma2", math.nan)
    ordered = {name: params[name] for name in layout_of(spec).parameter_names}
    decl = record.declarations
    k = layout_of(spec).n_coefficients + 1
    criteria_native = dict(record.criteria)
    sigma2_reported = record.parameters.get("sigma2", math.nan)
    if decl.sigma2 == "df-adjusted":
        sigma2_definition = f"sum of squares / (n_w - {_subtracted(decl, spec)}), as declared"
    else:
        sigma2_definition = "sum of squares / n_w (maximum likelihood), as declared"
    if "sigma2" not in record.parameters:
        sigma2_definition = "not reported; the maximum-likelihood value at the coefficients"
    notes = [f"Imported from {record.source}: values as reported by {record.software}."]
    if record.notes:
        notes.append(record.notes)
    if record.criteria_definition:
        notes.append(f"Its criteria: {record.criteria_definition}.")
    return Estimate(
        key=record.label,
        engine=record.engine,
        package=record.software,
        version=record.software_version,
        status="ok",
        spec=spec,
        params=ordered,
        native_params=dict(record.parameters),
        sigma2_reported=sigma2_reported,
        sigma2_kind="df-adjusted" if decl.sigma2 == "df-adjusted" else "maximum-likelihood",
        sigma2_definition=sigma2_definition,
        loglike_native=record.loglike,
        loglike_definition=(
            record.loglike_definition or f"as reported by {record.software}; definition not stated"
        )
        + (" (original scale, log-Jacobian included)" if decl.loglike_scale == "original" else ""),
        n_used_native=record.criteria_n,
        k_counted_native=record.criteria_k,
        criteria_native=criteria_native,
        criteria={},
        n_w=n_w,
        k=k,
        converged=None,
        optimizer={},
        options={"import": {"declared": decl.to_dict(), "source": record.source}},
        conversions=list(normalised.conversions),
        notes=notes,
        origin="imported",
        provenance=record.provenance(),
    )


def imported_forecast(
    record: ImportRecord, spec: ModelSpec, levels: tuple[float, ...]
) -> Forecast | None:
    """The record's forecasts on the transformed scale, as the audit's forecasts are, or None.

    Forecasts on the original scale are transformed (point forecast read as the
    back-transformed median, interval bounds transformed bound by bound, exact under a
    monotone transform). The standard error is the one implied by the widest Gaussian
    interval. Levels the audit asks for and the record does not give are left out.

    Raises
    ------
    ImportRecordError
        When the arrays have different lengths, a bound is not positive where the transform
        needs it, or a lower bound is above the upper one.
    """
    given = record.forecasts
    if not given:
        return None
    from scipy.stats import norm

    mean = np.asarray(given["mean"], dtype=float)
    steps = len(mean)
    intervals = {float(k): v for k, v in given.get("intervals", {}).items()}
    lower = {k: np.asarray(v["lower"], dtype=float) for k, v in intervals.items()}
    upper = {k: np.asarray(v["upper"], dtype=float) for k, v in intervals.items()}
    where = f"{record.label} forecasts"
    for level in intervals:
        if not 0 < level < 100:
            raise ImportRecordError(f"{where}: interval level {level:g} is not between 0 and 100.")
        if len(lower[level]) != steps or len(upper[level]) != steps:
            raise ImportRecordError(
                f"{where}: the {level:g}% bounds have {len(lower[level])} and "
                f"{len(upper[level])} values for {steps} point forecasts; give one per step."
            )
        if np.any(lower[level] > upper[level]):
            raise ImportRecordError(f"{where}: a {level:g}% lower bound is above its upper bound.")
    if given.get("scale", "original") == "original" and spec.transform is not None:
        lam = spec.boxcox_lambda
        arrays = [mean, *lower.values(), *upper.values()]
        if any(np.any(a <= 0) for a in arrays):
            raise ImportRecordError(
                f"{where}: the {spec.transform} transform needs positive forecasts and bounds."
            )

        def forward(a: np.ndarray) -> np.ndarray:
            return np.log(a) if lam == 0.0 else (a**lam - 1.0) / lam

        mean = forward(mean)
        lower = {k: forward(v) for k, v in lower.items()}
        upper = {k: forward(v) for k, v in upper.items()}
    kept = tuple(sorted(level for level in levels if level in lower))
    if lower:
        widest = max(lower)
        z = norm.ppf(0.5 + widest / 200.0)
        se = (upper[widest] - lower[widest]) / (2.0 * z)
    else:
        se = np.full(steps, math.nan)
    method = given.get("method") or f"as reported by {record.software}"
    return Forecast(
        key=record.label,
        status="ok",
        steps=steps,
        levels=kept,
        mean=mean,
        lower={k: lower[k] for k in kept},
        upper={k: upper[k] for k in kept},
        se=se,
        se_derived=True,
        interval_method=method,
    )
