"""What the reports say, independent of the format they say it in.

The HTML and Markdown renderers both read the same summary, finding groups and tables from
here, so the two formats cannot drift apart. A table is plain data (:class:`Table`): cells
hold display text that is *not* escaped; each renderer escapes for its own format.
"""

from __future__ import annotations

import math
import shlex
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from forecastaudit.diagnosis.findings import KINDS, Finding
from forecastaudit.estimate import ORIGINS, REFERENCE_KEY
from forecastaudit.jsonutil import is_finite_number as _finite

if TYPE_CHECKING:
    from forecastaudit.result import AuditResult

__all__ = [
    "FLAG_MARKS",
    "SEVERITY_LABELS",
    "Cell",
    "FindingGroup",
    "Policy",
    "Row",
    "Summary",
    "Table",
    "estimator_table",
    "finding_groups",
    "forecast_table",
    "forecast_values_table",
    "format_number",
    "future_regressors_table",
    "holdout_tables",
    "likelihood_table",
    "materiality_table",
    "order_search_tables",
    "package_table",
    "parameter_table",
    "policy",
    "provenance_table",
    "residual_table",
    "significant",
    "summary",
    "tolerance_table",
]


# Severity words and symbols: the verdict and severities never rely on colour alone.
SEVERITY_LABELS: dict[str, dict[str, str]] = {
    "fail": {"word": "FAIL", "symbol": "\u2717", "heading": "Failures"},
    "warn": {"word": "WARN", "symbol": "!", "heading": "Warnings"},
    "info": {"word": "INFO", "symbol": "i", "heading": "For information"},
}
VERDICT_LABELS: dict[str, dict[str, str]] = {
    "pass": {"word": "PASS", "symbol": "\u2713"},
    "pass-with-notes": {"word": "PASS WITH NOTES", "symbol": "\u2713"},
    "fail": {"word": "FAIL", "symbol": "\u2717"},
}
# What each outcome means, in one sentence (the verdict block prints it under the badge).
VERDICT_MEANINGS: dict[str, str] = {
    "pass": "Nothing fails under the stated policy, and no finding asks a reviewer to look.",
    "pass-with-notes": (
        "Nothing fails under the stated policy; the notes below ask a reviewer to look."
    ),
    "fail": (
        "At least one finding fails under the stated policy; the failures below say which and why."
    ),
}

# Markers appended to flagged cells, with the note explaining them under the table.
FLAG_MARKS: dict[str, tuple[str, str]] = {
    "beyond": ("\u2020", "differs from the reference optimum by more than the tolerance"),
    "changed": ("\u2021", "changed from the default"),
    "low-p": (
        "\u00a7",
        "p-value below 0.05: some autocorrelation may remain in the residuals (a finding is "
        "written only below 0.001, where the model plainly misses structure)",
    ),
    "material": ("\u00b6", "beyond the materiality threshold of the policy"),
}

MISSING = "\u2013"  # en dash for a value that does not exist


# ---------------------------------------------------------------------- value formatting
def format_number(value: Any, kind: str = "general") -> str:
    """Display text of one number.

    Parameters
    ----------
    value : number, bool or None
        The value; None and NaN become an en dash.
    kind : {"general", "param", "loglike", "criterion", "seconds", "pvalue", "count",
            "percent", "level", "fixed<d>"}
        What the number is, which fixes its precision: parameters to 5 significant digits,
        log-likelihoods and criteria to 4 decimals (so definition differences of 0.01 show),
        seconds to 2 decimals, p-values to 3 decimals, counts as whole numbers; ``fixed3``
        is three decimals (see :func:`column_kind`).
    """
    if value is None:
        return MISSING
    if isinstance(value, bool):
        return "yes" if value else "no"
    try:
        number = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(number):
        return MISSING
    if number == 0.0:
        number = 0.0  # no "-0"
    if kind == "param":
        return significant(number, 5)
    if kind in ("loglike", "criterion"):
        return f"{number:.4f}"
    if kind == "seconds":
        return f"{number:.2f}"
    if kind == "pvalue":
        return "<0.001" if number < 0.001 else f"{number:.3f}"
    if kind == "count":
        return f"{number:.0f}"
    if kind == "percent":
        return f"{100.0 * number:.2f}%"
    if kind == "level":
        return f"{number:g}"
    if kind.startswith("fixed"):
        return f"{number:.{int(kind[len('fixed') :])}f}"
    return significant(number, 6)


#: Beyond these magnitudes a number is written in scientific notation (nothing ordinary is).
_PLAIN_RANGE = (1e-9, 1e12)


def significant(number: float, digits: int) -> str:
    """``number`` to ``digits`` significant digits in plain decimal notation.

    ``format(x, 'g')`` switches to scientific notation below 1e-4 (a drift of 0.0000167
    would read 1.67e-05); a reviewer compares coefficients down a column by eye, so only
    magnitudes outside :data:`_PLAIN_RANGE` keep the exponent.
    """
    size = abs(number)
    if number == 0.0:
        return "0"
    if not _PLAIN_RANGE[0] <= size < _PLAIN_RANGE[1]:
        return f"{number:.{digits}g}"
    decimals = max(0, digits - 1 - math.floor(math.log10(size)))
    text = f"{number:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def column_kind(values: Iterable[Any], significant: int = 5) -> str:
    """A ``fixed<d>`` kind giving a whole column the same decimals.

    ``d`` is chosen so the largest magnitude in the column shows ``significant`` digits
    (at most 6 decimals), so numbers line up and compare by eye down the column.
    """
    finite = [abs(float(v)) for v in values if _finite(v)]
    largest = max(finite, default=0.0)
    if largest == 0.0:
        return "fixed0"
    decimals = significant - 1 - math.floor(math.log10(largest))
    return f"fixed{min(6, max(0, decimals))}"


def _plain_text(value: Any) -> str:
    """A user-supplied value as one line of text (newlines would break tables)."""
    return " ".join(str(value).split())


# ---------------------------------------------------------------------- tables as data
@dataclass(frozen=True)
class Cell:
    """One table cell: display text (unescaped), whether it is a number, an optional flag."""

    text: str
    numeric: bool = False
    flag: str | None = None

    @property
    def mark(self) -> str:
        """The marker symbol of the flag, or an empty string."""
        return FLAG_MARKS[self.flag][0] if self.flag else ""


@dataclass(frozen=True)
class Row:
    """A table row: a header cell and data cells, or a group heading when ``group`` is set."""

    header: str
    cells: tuple[Cell, ...] = ()
    group: bool = False


@dataclass(frozen=True)
class Table:
    """A table ready for any renderer.

    Attributes
    ----------
    id : str
        Stable identifier (HTML id, test hook).
    caption : str
        What the table shows, in one line.
    corner : str
        Heading of the first (row header) column.
    columns : tuple of str
        Headings of the data columns.
    rows : tuple of Row
    notes : tuple of str
        Sentences printed under the table; flag markers in use are explained automatically.
    """

    id: str
    caption: str
    corner: str
    columns: tuple[str, ...]
    rows: tuple[Row, ...]
    notes: tuple[str, ...] = ()

    @property
    def numeric_columns(self) -> tuple[bool, ...]:
        """Per data column, whether every non-empty cell in it is a number."""
        flags = []
        for i in range(len(self.columns)):
            cells = [r.cells[i] for r in self.rows if not r.group and i < len(r.cells)]
            flags.append(bool(cells) and all(c.numeric or c.text == MISSING for c in cells))
        return tuple(flags)

    @property
    def all_notes(self) -> tuple[str, ...]:
        """The notes, followed by an explanation of each flag marker used in the table."""
        used = {c.flag for r in self.rows for c in r.cells if c.flag}
        legends = tuple(f"{FLAG_MARKS[f][0]} {FLAG_MARKS[f][1]}." for f in FLAG_MARKS if f in used)
        return self.notes + legends


def _num(value: Any, kind: str = "general", flag: str | None = None) -> Cell:
    return Cell(format_number(value, kind), numeric=True, flag=flag)


def _text(value: Any, flag: str | None = None) -> Cell:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return Cell(MISSING)
    if isinstance(value, bool | np.bool_):
        return Cell("yes" if value else "no", flag=flag)
    return Cell(_plain_text(value), flag=flag)


# ---------------------------------------------------------------------- summary
@dataclass(frozen=True)
class Summary:
    """The verdict block: everything a reviewer reads first."""

    verdict: str
    verdict_word: str
    verdict_symbol: str
    verdict_meaning: str
    production: str | None
    production_engine: str | None
    spec: str
    series_name: str
    n: int
    first: str
    last: str
    has_time_index: bool
    frequency: str | None
    period: int | None
    counts: dict[str, int]
    engines_agreeing: tuple[str, ...]
    engines_fitted: tuple[str, ...]
    engines_required: int
    estimators_ok: int
    estimators_run: int
    created: str

    @property
    def production_text(self) -> str:
        """The production estimator and its engine, or what the verdict covers without one."""
        return _production_text(self.production, self.production_engine)

    @property
    def date_range(self) -> str:
        """First to last label, or the positions when there is no time index."""
        if self.has_time_index:
            return f"{self.first} to {self.last}"
        return f"no time index (positions {self.first} to {self.last})"

    @property
    def engines_sentence(self) -> str:
        """How many independent engines corroborate the production estimate, in words."""
        agreeing = len(self.engines_agreeing)
        fitted = max(len(self.engines_fitted), agreeing)
        return (
            f"{agreeing} of {fitted} independent engine{'' if fitted == 1 else 's'} (the "
            "reference counts as one) corroborate the production estimate (required: "
            f"{self.engines_required})"
        )

    @property
    def counts_sentence(self) -> str:
        """Counts of findings by severity, in words."""
        return ", ".join(
            f"{self.counts[s]} {SEVERITY_LABELS[s]['word'].lower()}"
            for s in ("fail", "warn", "info")
        )


def _production_text(production: str | None, engine: str | None) -> str:
    if not production:
        return "none named: the verdict covers every estimator"
    return f"{production} (engine {engine})" if engine else production


def _production(report: AuditResult) -> tuple[str | None, str | None]:
    """The production estimator's key and engine (plain text), or None for each."""
    key = report.production
    if not key:
        return None, None
    estimate = report.estimates.get(key)
    engine = getattr(estimate, "engine", None) if estimate is not None else None
    return _plain_text(key), (_plain_text(engine) if engine else None)


def summary(report: AuditResult) -> Summary:
    """The verdict block of a report."""
    labels = report.series.display_labels()
    counts = {s: len(report.findings_of(severity=s)) for s in ("fail", "warn", "info")}
    engine_values: Mapping[str, Any] = {}
    for f in report.findings:
        if f.kind == "engine-count":
            engine_values = f.values
            break
    run = [k for k in report.estimates if k != REFERENCE_KEY]
    production, production_engine = _production(report)
    return Summary(
        verdict=report.verdict,
        verdict_word=VERDICT_LABELS[report.verdict]["word"],
        verdict_symbol=VERDICT_LABELS[report.verdict]["symbol"],
        verdict_meaning=VERDICT_MEANINGS[report.verdict],
        production=production,
        production_engine=production_engine,
        spec=str(report.spec),
        series_name=_plain_text(report.series.name),
        n=len(report.series),
        first=labels[0] if labels else "",
        last=labels[-1] if labels else "",
        has_time_index=report.series.index is not None,
        frequency=report.series.frequency,
        period=report.series.period,
        counts=counts,
        engines_agreeing=tuple(engine_values.get("agreeing", report.independent_engines)),
        engines_fitted=tuple(
            engine_values.get("fitted")
            or [*engine_values.get("agreeing", ()), *engine_values.get("not_counted", {})]
        ),
        engines_required=int(
            engine_values.get("required", report.tolerances.min_independent_engines)
        ),
        estimators_ok=sum(report.estimates[k].ok for k in run),
        estimators_run=len(run),
        created=report.created,
    )


# ---------------------------------------------------------------------- findings
@dataclass(frozen=True)
class FindingItem:
    """One finding with what the report prints beside it."""

    severity: str
    word: str
    symbol: str
    kind: str
    explanation: str
    estimator: str
    quantity: str | None
    message: str
    estimators: tuple[str, ...] = ()


@dataclass(frozen=True)
class FindingGroup:
    """The findings of one severity."""

    severity: str
    heading: str
    word: str
    symbol: str
    items: tuple[FindingItem, ...] = field(default_factory=tuple)


def _item(f: Finding, report: AuditResult | None = None) -> FindingItem:
    """One finding for the report; a finding shared by several wrappers of one engine is
    shown once, naming all of them (an estimate made elsewhere with its origin)."""
    label = SEVERITY_LABELS[f.severity]
    who = tuple(_column(report, e) if report is not None else _plain_text(e) for e in f.estimators)
    return FindingItem(
        severity=f.severity,
        word=label["word"],
        symbol=label["symbol"],
        kind=f.kind,
        explanation=KINDS.get(f.kind, ""),
        estimator=", ".join(who) if who else "the audit as a whole",
        quantity=_plain_text(f.quantity) if f.quantity else None,
        message=str(f.message),
        estimators=who,
    )


def finding_groups(
    report: AuditResult,
    limit: int | None = None,
    severities: tuple[str, ...] = ("fail", "warn", "info"),
) -> list[FindingGroup]:
    """Findings grouped by severity, most severe first; groups without findings left out.

    Parameters
    ----------
    limit : int, optional
        Keep at most this many findings in all, the most severe first (for the compact view).
    severities : tuple of str
        The severities to include.
    """
    groups = []
    left = math.inf if limit is None else limit
    for severity in ("fail", "warn", "info"):
        if severity not in severities:
            continue
        found = report.findings_of(severity=severity)
        if not found or left <= 0:
            continue
        kept = found[: int(min(left, len(found)))]
        left -= len(kept)
        label = SEVERITY_LABELS[severity]
        groups.append(
            FindingGroup(
                severity=severity,
                heading=label["heading"],
                word=label["word"],
                symbol=label["symbol"],
                items=tuple(_item(f, report) for f in kept),
            )
        )
    return groups


# ---------------------------------------------------------------------- the tables
def parameter_table(report: AuditResult) -> Table:
    """Canonical parameters per estimator, the reference standard error and the tolerance.

    A value is flagged when it differs from the reference optimum by more than the stated
    tolerance (coefficients: in units of the reference standard error, with an absolute
    floor; sigma2: relative).
    """
    frame = report.parameters
    keys = [c for c in frame.columns if c != "reference_se"]
    has_ref = REFERENCE_KEY in keys
    rows = []
    for name in frame.index:
        se = frame.at[name, "reference_se"] if "reference_se" in frame.columns else math.nan
        ref = frame.at[name, REFERENCE_KEY] if has_ref else math.nan
        if name == "sigma2":
            tol = report.tolerances.sigma2_rtol * abs(ref) if _finite(ref) else math.nan
            tol_text = f"{100 * report.tolerances.sigma2_rtol:g}% relative"
        else:
            tol = report.tolerances.parameter_tolerance(se if _finite(se) else None)
            tol_text = format_number(tol, "param")
        cells = []
        for key in keys:
            value = frame.at[name, key]
            beyond = (
                key != REFERENCE_KEY
                and _finite(value)
                and _finite(ref)
                and _finite(tol)
                and abs(value - ref) > tol
            )
            cells.append(_num(value, "param", "beyond" if beyond else None))
        cells.append(_num(se, "param"))
        cells.append(Cell(tol_text, numeric=True))
        rows.append(Row(str(name), tuple(cells)))
    notes = (
        "Canonical convention: AR terms with a minus sign, MA terms with a plus sign; mu is "
        "the mean of the differenced series; sigma2 is the maximum-likelihood variance.",
    )
    return Table(
        id="parameters",
        caption="Parameter estimates in the canonical convention",
        corner="parameter",
        columns=(*(_column(report, k) for k in keys), "reference SE", "tolerance"),
        rows=tuple(rows),
        notes=notes,
    )


_LIKELIHOOD_ROWS: tuple[tuple[str, tuple[tuple[str, str, str], ...]], ...] = (
    ("", (("status", "status", "text"),)),
    (
        "Log-likelihood",
        (
            ("loglike_native", "as reported by the estimator", "loglike"),
            ("loglike_reference", "reference, at the estimate's sigma2", "loglike"),
            ("profiled_reference", "reference, sigma2 profiled out", "loglike"),
            ("gap_to_best", "gap to the best (profiled)", "loglike"),
        ),
    ),
    (
        "Observations and parameters counted",
        (
            ("n_native", "n as counted by the estimator", "count"),
            ("k_native", "k as counted by the estimator", "count"),
            ("n", "n (canonical: after differencing)", "count"),
            ("k", "k (canonical: coefficients + sigma2)", "count"),
        ),
    ),
    (
        "Information criteria",
        (
            ("aic_native", "AIC as reported", "criterion"),
            ("aic", "AIC canonical", "criterion"),
            ("aicc_native", "AICc as reported", "criterion"),
            ("aicc", "AICc canonical", "criterion"),
            ("bic_native", "BIC as reported", "criterion"),
            ("bic", "BIC canonical", "criterion"),
        ),
    ),
    (
        "Innovation variance",
        (
            ("sigma2_reported", "sigma2 as reported", "param"),
            ("sigma2_ml", "sigma2 maximum likelihood", "param"),
        ),
    ),
)


def likelihood_table(report: AuditResult) -> Table:
    """Log-likelihoods, counts, criteria and sigma2 per estimator, native beside canonical.

    Quantities are rows and estimators columns, like the parameter table, so one
    estimator's numbers read down a column. A gap to the best log-likelihood above the
    tolerance is flagged.
    """
    frame = report.likelihoods
    keys = list(frame.index)
    rows: list[Row] = []
    for group, items in _LIKELIHOOD_ROWS:
        if group:
            rows.append(Row(group, group=True))
        for column, label, kind in items:
            if column not in frame.columns:
                continue
            cells = []
            for key in keys:
                value = frame.at[key, column]
                if kind == "text":
                    cells.append(_text(value))
                    continue
                flag = None
                if column == "gap_to_best" and _finite(value):
                    flag = "beyond" if value > report.tolerances.loglike_atol else None
                cells.append(_num(value, kind, flag))
            rows.append(Row(label, tuple(cells)))
    notes = (
        "Reported values use each estimator's own definitions; canonical values use the "
        "reference likelihood (exact Gaussian likelihood of the differenced series, 2*pi "
        "constant included) with n the observations after differencing and k every free "
        "coefficient plus sigma2.",
        f"A gap to the best above {format_number(report.tolerances.loglike_atol)} "
        "log-likelihood units means the optimiser stopped before the optimum.",
    )
    return Table(
        id="likelihoods",
        caption="Log-likelihoods and information criteria, as reported and canonical",
        corner="quantity",
        columns=tuple(_column(report, k) for k in keys),
        rows=tuple(rows),
        notes=notes,
    )


def _column(report: AuditResult, key: str) -> str:
    """A column heading: the key, with its origin when the estimate was not fitted here."""
    estimate = report.estimates.get(key)
    return _plain_text(estimate.column if estimate is not None else key)


def _where(e: Any) -> str:
    """Where an estimate made elsewhere came from: the import file or the environment."""
    if e.origin == "imported" and e.provenance.get("source"):
        return f": {e.provenance['source']}"
    if e.origin == "environment" and e.provenance.get("environment"):
        return f": {e.provenance['environment']}"
    return ""


def estimator_table(report: AuditResult) -> Table:
    """Per estimator: status, package and version, engine, convergence, time, warnings."""
    rows = []
    for key, e in report.estimates.items():
        note = e.reason or (f"fitted {e.fitted_model}" if e.fitted_model else "")
        rows.append(
            Row(
                _plain_text(key),
                (
                    _text(e.status),
                    _text(ORIGINS.get(e.origin, e.origin) + _where(e)),
                    _text(e.package),
                    _text(e.version or "not installed"),
                    _text(e.engine),
                    _text(format_number(e.converged) if e.converged is not None else "not said"),
                    _num(e.seconds, "seconds"),
                    _num(len(e.warnings), "count"),
                    _text(note) if note else Cell(MISSING),
                ),
            )
        )
    return Table(
        id="estimators",
        caption="Estimators: what ran, and how",
        corner="estimator",
        columns=(
            "status",
            "origin",
            "package",
            "version",
            "engine",
            "converged",
            "seconds",
            "warnings",
            "note",
        ),
        rows=tuple(rows),
        notes=(
            "Estimators that share an engine are wrappers of one implementation and count once "
            "as independent evidence. Every warning is kept in the audit record.",
            "Imported estimates were made by other software and typed in or exported as import "
            "records; their package and version are as the record states them.",
        ),
    )


def tolerance_table(report: AuditResult) -> Table:
    """Each tolerance with its value, its default and the reason for the default."""
    rows = []
    for name, item in report.tolerances.describe().items():
        changed = item["value"] != item["default"]
        rows.append(
            Row(
                name,
                (
                    _num(item["value"], "general", "changed" if changed else None),
                    _num(item["default"], "general"),
                    _text(item["reason"]),
                ),
            )
        )
    return Table(
        id="tolerances",
        caption="Tolerances the verdict was reached under",
        corner="tolerance",
        columns=("value", "default", "reason for the default"),
        rows=tuple(rows),
    )


# ---------------------------------------------------------------------- the policy
# The materiality thresholds: key in ``AuditResult.policy["materiality"]``, the tolerance
# that sets it, what it measures and how its value reads.
_THRESHOLDS: tuple[tuple[str, str, str, Callable[[float], str]], ...] = (
    (
        "forecast_se",
        "material_forecast_se",
        "point-forecast difference, in forecast standard errors",
        lambda v: format_number(v),
    ),
    (
        "forecast_percent",
        "material_forecast_percent",
        "point-forecast difference, in percent of the point",
        lambda v: f"{format_number(v, 'level')}%",
    ),
    (
        "width_rtol",
        "material_width_rtol",
        "interval width, relative difference",
        lambda v: f"{format_number(100.0 * v, 'level')}%",
    ),
    (
        "accuracy_rtol",
        "material_accuracy_rtol",
        "holdout MASE, relative difference",
        lambda v: f"{format_number(100.0 * v, 'level')}%",
    ),
)


@dataclass(frozen=True)
class Policy:
    """The policy section: who the verdict is about, what fails, and what is material.

    Attributes
    ----------
    production, production_engine : str or None
        The production estimator and its engine (None: the verdict covers every estimator).
    fails_when : tuple of str
        The conditions that fail the audit, in words.
    thresholds : Table
        The materiality thresholds.
    materiality : Table or None
        Each estimator's disagreement in decision units, None when none was measured.
    """

    production: str | None
    production_engine: str | None
    fails_when: tuple[str, ...]
    thresholds: Table
    materiality: Table | None = None

    @property
    def production_text(self) -> str:
        """The production estimator and its engine, in words."""
        return _production_text(self.production, self.production_engine)

    @property
    def tables(self) -> tuple[Table, ...]:
        """The thresholds, then the materiality table when there is one."""
        return tuple(t for t in (self.thresholds, self.materiality) if t is not None)


def policy(report: AuditResult) -> Policy:
    """The stated policy of the audit, for the policy section."""
    stated = report.policy
    production, engine = _production(report)
    limits = stated.get("materiality", {})
    rows = [
        Row(words, (Cell(shown(limits[key]), numeric=True), _text(tolerance)))
        for key, tolerance, words, shown in _THRESHOLDS
        if _finite(limits.get(key))
    ]
    thresholds = Table(
        id="materiality-thresholds",
        caption="Materiality thresholds: a difference matters beyond these",
        corner="measure",
        columns=("material beyond", "tolerance"),
        rows=tuple(rows),
        notes=(
            "A difference is material when any one measure is beyond its threshold. The "
            "thresholds are tolerances like the others: they can be overridden and are "
            "written into the record.",
        ),
    )
    return Policy(
        production=production,
        production_engine=engine,
        fails_when=tuple(_plain_text(c) for c in stated.get("fails_when", ())),
        thresholds=thresholds,
        materiality=materiality_table(report),
    )


def _measures(value: Any) -> Mapping[str, Any]:
    """One estimator's materiality as a mapping (a record's dict or a Materiality)."""
    if isinstance(value, Mapping):
        return value
    to_dict = getattr(value, "to_dict", None)
    return to_dict() if callable(to_dict) else {}


def materiality_table(report: AuditResult) -> Table | None:
    """Per estimator, its disagreement with the reference optimum in decision units.

    Forecast difference in forecast standard errors and in percent of the point, the
    interval width ratio, the relative holdout MASE difference and whether any is beyond
    its threshold (the measure beyond it is flagged). None when nothing was measured.
    """
    measured = {key: _measures(value) for key, value in report.materiality.items()}
    if not measured:
        return None
    limits = report.policy.get("materiality", {})

    def beyond(value: Any, threshold: Any) -> str | None:
        over = _finite(value) and _finite(threshold) and value > threshold
        return "material" if over else None

    def column(name: str) -> list[Any]:
        return [m.get(name) for m in measured.values()]

    se_kind = column_kind(column("forecast_se"), significant=3)
    percent_kind = column_kind(column("forecast_percent"), significant=3)
    rows = []
    reasons = []
    for key, m in measured.items():
        se, percent = m.get("forecast_se"), m.get("forecast_percent")
        ratio, accuracy = m.get("width_ratio"), m.get("accuracy_difference")
        width_off = abs(ratio - 1.0) if _finite(ratio) else None
        accuracy_off = abs(accuracy) if _finite(accuracy) else None
        material = m.get("material")
        label = _plain_text(key) + (" (production)" if key == report.production else "")
        rows.append(
            Row(
                label,
                (
                    _num(se, se_kind, beyond(se, limits.get("forecast_se"))),
                    _num(percent, percent_kind, beyond(percent, limits.get("forecast_percent"))),
                    _num(ratio, "fixed4", beyond(width_off, limits.get("width_rtol"))),
                    _num(accuracy, "percent", beyond(accuracy_off, limits.get("accuracy_rtol"))),
                    Cell(format_number(bool(material)) if material is not None else MISSING),
                ),
            )
        )
        if material and m.get("reasons"):
            reasons.append(
                f"{_plain_text(key)}: " + "; ".join(_plain_text(r) for r in m["reasons"]) + "."
            )
    notes = (
        "Each estimate's forecasts against those at the reference optimum, at the step "
        "where they differ most"
        + ("; the holdout difference needs a holdout." if report.holdout is None else "."),
        *reasons,
    )
    return Table(
        id="materiality",
        caption="Materiality: each estimator's difference from the reference optimum in "
        "decision units",
        corner="estimator",
        columns=(
            "forecast difference (forecast SEs)",
            "forecast difference (% of the point)",
            "interval width ratio",
            "holdout MASE difference",
            "material",
        ),
        rows=tuple(rows),
        notes=notes,
    )


def signoff_table(report: AuditResult) -> Table | None:
    """The reviewer's sign-off, one field per row, or None when there is none."""
    block = getattr(report, "signoff", None)
    if not block:
        return None
    facts = [
        ("reviewer", block.get("reviewer")),
        ("date", block.get("date")),
        ("decision", block.get("decision")),
        ("policy reference", block.get("policy_reference")),
        ("comments", block.get("comments") or "none"),
    ]
    return Table(
        id="signoff",
        caption="Sign-off by the reviewer",
        corner="field",
        columns=("value",),
        rows=tuple(Row(label, (_text(value),)) for label, value in facts),
    )


def provenance_table(report: AuditResult, provenance: Mapping[str, Any]) -> Table:
    """Versions, platform and the data fingerprint, one fact per row."""
    data = dict(provenance.get("data", {}))
    shown = report.series.display_labels() if len(report.series) else []
    if shown:  # periods (2009-01), as everywhere in the report, not midnight timestamps
        data["first"], data["last"] = shown[0], shown[-1]
    facts = [
        ("audit finished (UTC)", report.created or MISSING),
        ("forecastaudit", provenance.get("forecastaudit")),
        ("Python", f"{provenance.get('python')} ({provenance.get('implementation')})"),
        ("platform", provenance.get("platform")),
        ("machine", provenance.get("machine")),
        ("series", data.get("name")),
        ("observations", data.get("n")),
        ("first label", data.get("first")),
        ("last label", data.get("last")),
        ("frequency", data.get("frequency") or "none"),
        ("period", data.get("period") or "none"),
        ("data fingerprint (SHA-256)", data.get("fingerprint_sha256")),
    ]
    invocation = provenance.get("invocation") or {}
    if invocation.get("command_line"):
        facts.append(("command line", shlex.join(invocation["command_line"])))
    source = invocation.get("input_file") or {}
    if source:
        facts.append(("input file", f"{source.get('name')} ({source.get('bytes')} bytes)"))
        facts.append(("input file SHA-256", source.get("sha256")))
    for other in invocation.get("other_files") or []:
        role = other.get("role", "other file")
        facts.append((role, f"{other.get('name')} ({other.get('bytes')} bytes)"))
        facts.append((f"{role} SHA-256", other.get("sha256")))
    return Table(
        id="provenance",
        caption="Provenance: what is needed to reproduce this audit",
        corner="item",
        columns=("value",),
        rows=tuple(Row(label, (_text(value),)) for label, value in facts),
    )


def package_table(provenance: Mapping[str, Any]) -> Table:
    """Installed versions of the numerical packages, whether or not they took part."""
    packages = provenance.get("packages", {})
    return Table(
        id="packages",
        caption="Package versions",
        corner="package",
        columns=("version",),
        rows=tuple(
            Row(_plain_text(name), (_text(version or "not installed"),))
            for name, version in packages.items()
        ),
    )


def frame_table(
    frame: pd.DataFrame,
    *,
    id: str,
    caption: str,
    corner: str,
    columns: Sequence[tuple[str, str, str]],
    notes: Iterable[str] = (),
    flag: Callable[[str, Any], str | None] | None = None,
    row_label: Callable[[Any], str] = str,
) -> Table:
    """A table from a DataFrame: rows are its index, ``columns`` are (name, heading, kind).

    Columns missing from the frame are left out, so a table keeps working when a later
    release adds or drops a column. ``flag(column, value)`` may return a flag name.
    """
    present = [
        (c, h, column_kind(frame[c]) if k == "column" else k)
        for c, h, k in columns
        if c in frame.columns
    ]
    rows = []
    for label, record in frame.iterrows():
        cells = []
        for column, _heading, kind in present:
            value = record[column]
            mark = flag(column, value) if flag is not None else None
            cells.append(_text(value, mark) if kind == "text" else _num(value, kind, mark))
        rows.append(Row(_plain_text(row_label(label)), tuple(cells)))
    return Table(
        id=id,
        caption=caption,
        corner=corner,
        columns=tuple(h for _c, h, _k in present),
        rows=tuple(rows),
        notes=tuple(notes),
    )


def forecast_values_table(report: AuditResult) -> Table | None:
    """Per forecast period, the point forecast and widest interval of the production
    estimator (else the first estimator that forecast) and of the reference optimum."""
    keys = [k for k in report.forecasts if k != "reference"]
    if not keys:
        return None
    production = report.production
    shown = production if production in report.forecasts else keys[0]
    steps = len(report.forecasts[shown].median)
    periods = report.series.future_labels(steps)
    frame = pd.DataFrame({"period": periods[:steps]}, index=pd.RangeIndex(1, steps + 1))
    columns: list[tuple[str, str, str]] = [("period", "period", "text")]
    for key in dict.fromkeys([shown, "reference"]):
        fc = report.forecasts.get(key)
        if fc is None:
            continue
        # Short headings keep the table on the page; the caption names the estimator.
        prefix = "reference " if key == "reference" else ""
        frame[f"{key}:point"] = fc.median
        columns.append((f"{key}:point", f"{prefix}point", "column"))
        if fc.lower:
            level = max(fc.lower)
            frame[f"{key}:lower"] = fc.lower[level]
            frame[f"{key}:upper"] = fc.upper[level]
            columns.append((f"{key}:lower", f"{prefix}{level:g}% lower", "column"))
            columns.append((f"{key}:upper", f"{prefix}{level:g}% upper", "column"))
    role = "the production estimator" if shown == production else "the first estimator"
    notes = [
        f"The forecasts of {role} ({_plain_text(shown)}: point, lower, upper) and at the "
        "reference optimum (reference ...), on the original scale. Every estimator's "
        "forecasts are in the record (forecasts)."
    ]
    point = report.options.get("point_forecast")
    if point:
        notes.append(f"Point forecasts on the original scale are the {point}.")
    return frame_table(
        frame,
        id="forecast-values",
        caption=(
            f"Forecasts by period: {_plain_text(shown)} and the reference optimum, point "
            "forecasts and intervals"
        ),
        corner="step",
        columns=columns,
        notes=notes,
    )


def future_regressors_table(report: AuditResult) -> Table | None:
    """The regressor values the forecasts assume, by forecast period (None without)."""
    values = getattr(report, "future_regressors", None)
    if values is None:
        return None
    steps = len(values)
    periods = report.series.future_labels(steps)
    frame = pd.DataFrame(np.asarray(values), columns=list(report.spec.regressors))
    frame.index = pd.RangeIndex(1, steps + 1)
    frame.insert(0, "period", periods[:steps])
    columns = [("period", "period", "text")] + [
        (c, _plain_text(c), "column") for c in report.spec.regressors
    ]
    from forecastaudit.record.document import future_regressors_sha256

    return frame_table(
        frame,
        id="future-regressors",
        caption="Regressors: the future values the forecasts assume",
        corner="step",
        columns=columns,
        notes=[
            "Forecasts of a regression are conditional on these values; other values give "
            f"other forecasts. SHA-256 of these values: {future_regressors_sha256(report)}."
        ],
    )


def forecast_table(report: AuditResult) -> Table | None:
    """Per horizon, the spread of point forecasts across independent engines, or None."""
    spread = report.spread
    if spread is None or spread.empty:
        return None
    width_columns = [c for c in spread.columns if str(c).startswith("interval_width_")]
    level = width_columns[0][len("interval_width_") :] if width_columns else ""
    steps = len(spread)
    future = report.series.future_labels(steps)
    frame = spread.copy()
    frame.insert(0, "period", future[: len(frame)])
    engines = spread.attrs.get("engines", [])
    notes = [
        "One forecast per independent engine enters the spread, so wrappers of one engine do "
        "not widen or narrow it"
        + (f" (engines: {', '.join(map(_plain_text, engines))})." if engines else "."),
    ]
    if len(engines) < 2:
        notes.insert(
            0,
            "Only one engine forecast"
            + (f" ({_plain_text(engines[0])})" if engines else "")
            + ", so there is no spread between implementations to measure: a spread of 0 "
            "here is not agreement. Run another engine to compare forecasts.",
        )
    point = report.options.get("point_forecast")
    if point:
        notes.append(f"Point forecasts on the original scale are the {point}.")
    return frame_table(
        frame,
        id="forecast-spread",
        caption="Forecasts: spread of point forecasts across independent engines",
        corner="step",
        columns=(
            ("period", "period", "text"),
            ("lowest", "lowest", "column"),
            ("highest", "highest", "column"),
            ("spread", "spread", "column"),
            (f"interval_width_{level}", f"reference {level}% interval width", "column"),
            ("spread_share_of_interval", "spread as share of interval", "percent"),
        ),
        notes=notes,
    )


def residual_table(report: AuditResult) -> Table | None:
    """Ljung-Box tests of each estimator's residuals, or None when there are none."""
    frame = report.residual_tests
    if frame is None or frame.empty:
        return None
    return frame_table(
        frame,
        id="residual-tests",
        caption="Ljung\u2013Box tests of the one-step residuals",
        corner="estimator",
        columns=(
            ("lags", "lags", "count"),
            ("df", "degrees of freedom", "count"),
            ("statistic", "statistic", "column"),
            ("p_value", "p-value", "pvalue"),
            ("n", "residuals", "count"),
        ),
        notes=(
            "Residuals after the start-up values lost to differencing; degrees of freedom are "
            "the lags less the number of ARMA coefficients.",
        ),
        flag=lambda column, value: (
            "low-p" if column == "p_value" and _finite(value) and value < 0.05 else None
        ),
    )


_ACCURACY_NAMES = {
    "mae": "MAE",
    "rmse": "RMSE",
    "mape": "MAPE",
    "mase": "MASE",
    "smape": "sMAPE",
    "bias": "bias",
}


def _accuracy_heading(column: str) -> str:
    if column in _ACCURACY_NAMES:
        return _ACCURACY_NAMES[column]
    for prefix, words in (("coverage_", "coverage"), ("interval_score_", "interval score")):
        if column.startswith(prefix):
            return f"{words} {column[len(prefix) :]}%"
    return column.replace("_", " ")


_ORDER_SEARCH_TABLES = (
    ("selections", "Automatic order searches: what each stack selected"),
    ("differencing_tests", "Differencing decisions: each stack's tests on the same data"),
    ("decomposition", "Causes of the disagreements: re-runs with one setting harmonised"),
    (
        "candidates",
        "Exhaustive search under the reference AICc: candidates within 2 units of the best "
        "of their differencing",
    ),
    ("default_constant", "What each stack would add with its defaults"),
    ("timings", "Search times"),
)


#: Plain headings of the order-search columns whose names are terse.
_ORDER_HEADINGS = {
    "n_w": "observations after differencing",
    "in_grid": "in the exhaustive grid",
    "grid_best_aicc": "best AICc in the grid (same differencing)",
    "best_aicc": "best reference AICc (same differencing)",
    "best_in_differencing": "best model of the same differencing",
    "reference_aicc": "reference AICc of the selection",
    "delta_aicc": "AICc above the best of its differencing",
    "rank": "rank within its differencing",
    "of": "candidates of that differencing",
    "chosen_by": "selected by",
    "specified": "the audited model",
    "k": "coefficients (with sigma2)",
    "default_adds": "its defaults add",
    "implies": "which means",
    "reason": "why it failed",
}

#: The columns a reader compares first, put first (the rest follow in their order).
_ORDER_FIRST = {
    "candidates": ("d", "D", "rank", "delta_aicc", "aicc", "chosen_by", "specified"),
    "selections": ("selected", "d", "D", "reference_aicc", "rank", "of", "delta_aicc"),
}

_ORDER_NOTES = {
    "candidates": (
        "Rank and AICc difference are within each differencing choice (d, D): "
        "log-likelihoods of differently differenced series do not compare, so each choice "
        "has its own best model at rank 1."
    ),
    "selections": (
        "The rank of a selection is among the exhaustive search's candidates of the same "
        "differencing, under the reference AICc."
    ),
    "default_constant": (
        "Each selected order without a constant, fitted here with each library's defaults: "
        "'nothing' means its defaults add no constant."
    ),
}


def order_search_tables(report: AuditResult) -> list[Table]:
    """The order-search audit's tables, ready to print; empty when it did not run.

    A frame without a meaningful index (positions 0, 1, ...) is labelled by its first
    column instead (the model, the search), the candidates table keeps only the candidates
    within 2 AICc units of the best (Burnham & Anderson 2002; the full list stays in the
    record), and a table too wide for a printed page is turned or split
    (:func:`fit_for_print`), so no column is lost on paper.
    """
    result = getattr(report, "order_search", None)
    if result is None:
        return []
    tables: list[Table] = []
    for name, caption in _ORDER_SEARCH_TABLES:
        frame = getattr(result, name, None)
        if frame is None or frame.empty:
            continue
        notes: list[str] = []
        if name == "candidates":
            frame, notes = _within_support_band(frame)
        if name in _ORDER_NOTES:
            notes = [_ORDER_NOTES[name], *notes]
        frame = _labelled_rows(frame)
        first = [c for c in _ORDER_FIRST.get(name, ()) if c in frame.columns]
        frame = frame[first + [c for c in frame.columns if c not in first]]
        if name == "default_constant" and "reason" in frame and frame["reason"].isna().all():
            frame = frame.drop(columns=["reason"])
        table = frame_table(
            frame,
            id=f"order-search-{name.replace('_', '-')}",
            caption=caption,
            corner=str(frame.index.name or ""),
            columns=[
                (str(c), _ORDER_HEADINGS.get(str(c), str(c).replace("_", " ")), _kind(frame[c]))
                for c in frame.columns
                if not any(isinstance(v, dict | list) for v in frame[c])  # kept in the record
            ],
            notes=notes,
        )
        tables += fit_for_print(table)
    return tables


def _within_support_band(frame: pd.DataFrame) -> tuple[pd.DataFrame, list[str]]:
    """Only the candidates within 2 AICc units of the best, and a note saying so."""
    if "within_2" in frame.columns:
        within = frame["within_2"].fillna(False).astype(bool)
    elif "delta_aicc" in frame.columns:
        within = frame["delta_aicc"] <= 2.0
    else:
        return frame, []
    kept = frame[within.to_numpy()].drop(columns=["within_2"], errors="ignore")
    if isinstance(frame.index, pd.RangeIndex):
        kept = kept.reset_index(drop=True)
    note = (
        f"{len(kept)} of {len(frame)} candidates lie within 2 AICc units of the best of their "
        "differencing (Burnham "
        "& Anderson 2002, section 2.6); the record lists them all."
    )
    return kept, [note]


def _labelled_rows(frame: pd.DataFrame) -> pd.DataFrame:
    """The frame indexed by its first column when its index is only positions."""
    positions = isinstance(frame.index, pd.RangeIndex) and frame.index.name is None
    if not positions or frame.columns.empty:
        return frame
    first = frame.columns[0]
    if any(isinstance(v, dict | list) for v in frame[first]):
        return frame
    return frame.set_index(first)


#: Most data columns a table prints with on a portrait A4 page at the report's print size.
PRINT_COLUMNS = 8
#: Most rows of a wide table that is turned (rows become columns) rather than split.
TURN_ROWS = 6


def fit_for_print(table: Table, max_columns: int = PRINT_COLUMNS) -> list[Table]:
    """A wide table as tables that fit a printed page, keeping every column.

    A table with more than ``max_columns`` data columns and at most :data:`TURN_ROWS`
    rows is turned: each column becomes a row, each row a column (what a search selected
    reads down the page). A wider table with more rows is split into parts of at most
    ``max_columns`` columns, each repeating the row headers. Narrow tables are returned
    as they are.
    """
    if len(table.columns) <= max_columns:
        return [table]
    rows = [r for r in table.rows if not r.group]
    if len(rows) <= TURN_ROWS:
        turned = tuple(
            Row(heading, tuple(r.cells[i] for r in rows)) for i, heading in enumerate(table.columns)
        )
        return [
            Table(
                id=table.id,
                caption=table.caption,
                corner=table.corner,
                columns=tuple(r.header for r in rows),
                rows=turned,
                notes=table.notes,
            )
        ]
    parts = range(0, len(table.columns), max_columns)
    out = []
    for number, start in enumerate(parts, 1):
        stop = min(start + max_columns, len(table.columns))
        out.append(
            Table(
                id=table.id if number == 1 else f"{table.id}-{number}",
                caption=f"{table.caption} (columns {start + 1}-{stop} of {len(table.columns)})",
                corner=table.corner,
                columns=table.columns[start:stop],
                rows=tuple(
                    Row(r.header, r.cells[start:stop], r.group) if not r.group else r
                    for r in table.rows
                ),
                notes=table.notes if number == len(parts) else (),
            )
        )
    return out


def _kind(values: pd.Series) -> str:
    """Text for words, whole numbers without decimals, else one precision for the column."""
    present = [v for v in values if v is not None and not (isinstance(v, float) and math.isnan(v))]
    numbers = (int, float, np.integer, np.floating)
    if any(isinstance(v, bool | np.bool_) or not isinstance(v, numbers) for v in present):
        return "text"
    if present and all(float(v).is_integer() for v in present):
        return "fixed0"
    return "column"


def holdout_tables(report: AuditResult) -> list[Table]:
    """Holdout accuracy per estimator and the pairwise comparisons; empty without a holdout."""
    result = report.holdout
    if result is None:
        return []
    accuracy = result.accuracy
    columns = [
        (
            str(c),
            _accuracy_heading(str(c)),
            "percent" if str(c).startswith("coverage_") else "column",
        )
        for c in accuracy.columns
    ]
    origins = ", ".join(str(o) for o in result.origins)
    tables = [
        frame_table(
            accuracy,
            id="holdout-accuracy",
            caption="Holdout accuracy, pooled over forecast origins",
            corner="estimator",
            columns=columns,
            notes=(
                f"{result.horizon} steps held out after each origin (training lengths: "
                f"{origins}). Scored on the {result.point_forecast or 'point forecast'}.",
            ),
        )
    ]
    comparisons = result.comparisons
    if comparisons is not None and not comparisons.empty:
        frame = comparisons.copy()
        frame.index = [f"{a} vs {b}" for a, b in zip(frame["first"], frame["second"], strict=True)]
        # One note repeats on many rows; print each once under the table, lettered.
        distinct = list(dict.fromkeys(str(n) for n in frame.get("note", []) if n and str(n)))
        letters = {note: f"({chr(ord('a') + i)})" for i, note in enumerate(distinct)}
        if "note" in frame.columns:
            frame["note"] = [letters.get(str(n), MISSING) for n in frame["note"]]
        tables.append(
            frame_table(
                frame,
                id="holdout-comparisons",
                caption="Pairwise Diebold\u2013Mariano tests of holdout accuracy (squared loss)",
                corner="pair",
                columns=(
                    ("mean_loss_difference", "mean loss difference", "column"),
                    ("dm", "DM", "general"),
                    ("dm_corrected", "DM, small-sample corrected", "general"),
                    ("p_value", "p-value", "pvalue"),
                    ("n", "n", "count"),
                    ("note", "note", "text"),
                ),
                notes=[f"{letter} {note}." for note, letter in letters.items()],
            )
        )
    return tables
