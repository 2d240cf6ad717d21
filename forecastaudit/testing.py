"""Assertion helpers for audits in a modelling repository's own tests.

Numbers are compared with numpy's semantics: ``|actual - expected| <= atol + rtol * |expected|``.
Each helper raises ``AssertionError`` with a message a reviewer can read without the code.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Mapping
from typing import Any

import numpy as np

from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.record.changes import RecordDrift, compare_records
from forecastaudit.result import AuditResult

__all__ = [
    "assert_audit_passes",
    "assert_estimators_agree",
    "assert_no_drift",
    "assert_parameters_close",
    "findings_table",
]


def findings_table(report: AuditResult, severities: Iterable[str] = ("fail", "warn")) -> str:
    """The findings of the given severities as an aligned plain-text table."""
    wanted = set(severities)
    rows = [f for f in report.findings if f.severity in wanted]
    if not rows:
        return "(no findings)"
    width_kind = max(len(f.kind) for f in rows)
    width_est = max(len(f.estimator or "-") for f in rows)
    lines = [f"{'severity':8}  {'kind':{width_kind}}  {'estimator':{width_est}}  message"]
    for f in rows:
        lines.append(
            f"{f.severity:8}  {f.kind:{width_kind}}  {f.estimator or '-':{width_est}}  {f.message}"
        )
    return "\n".join(lines)


def assert_audit_passes(report: AuditResult) -> None:
    """Fail unless the audit's verdict is pass; the message lists fail and warn findings."""
    if not report.passed:
        raise AssertionError(
            f"Audit of {report.spec} on '{report.series.name}' failed:\n" + findings_table(report)
        )


def _close(actual: float, expected: float, rtol: float, atol: float) -> bool:
    return bool(np.isclose(actual, expected, rtol=rtol, atol=atol, equal_nan=False))


def assert_parameters_close(
    report: AuditResult,
    expected: Mapping[str, float],
    *,
    rtol: float = 1e-7,
    atol: float = 0.0,
    estimators: Iterable[str] | None = None,
) -> None:
    """Every listed estimator's canonical parameters are close to ``expected``.

    Parameters
    ----------
    expected : mapping
        Canonical names (``ma_lag1``, ``sigma2`` ...) to values.
    estimators : iterable of str, optional
        Estimator keys; default the reference optimum only.
    """
    keys = list(estimators) if estimators is not None else ["reference"]
    problems = []
    for key in keys:
        e = report.estimates.get(key)
        if e is None or not e.ok:
            problems.append(f"{key}: no estimate ({e.status if e else 'not run'})")
            continue
        for name, value in expected.items():
            if name not in e.params:
                problems.append(f"{key}: no parameter {name!r}")
            elif not _close(e.params[name], value, rtol, atol):
                problems.append(f"{key}: {name} = {e.params[name]:.6g}, expected {value:.6g}")
    if problems:
        raise AssertionError(
            f"Parameters not within rtol={rtol:g}, atol={atol:g}:\n" + "\n".join(problems)
        )


def assert_estimators_agree(
    report: AuditResult,
    estimators: Iterable[str] | None = None,
    *,
    rtol: float = 0.0,
    atol: float = 1e-3,
) -> None:
    """The listed estimators' canonical parameters agree pairwise (default: all that fitted)."""
    table = report.parameters.drop(columns=["reference_se"], errors="ignore")
    keys = (
        list(estimators)
        if estimators is not None
        else [k for k, e in report.estimates.items() if e.ok]
    )
    missing = [k for k in keys if k not in table or not report.estimates[k].ok]
    if missing:
        raise AssertionError(f"No estimate from {', '.join(missing)}.")
    problems = []
    first = keys[0]
    for key in keys[1:]:
        for name in table.index:
            a, b = float(table.at[name, key]), float(table.at[name, first])
            if not _close(a, b, rtol, atol):
                problems.append(f"{name}: {key} {a:.6g} vs {first} {b:.6g}")
    if problems:
        raise AssertionError(
            f"Estimators disagree beyond rtol={rtol:g}, atol={atol:g}:\n" + "\n".join(problems)
        )


def assert_no_drift(
    old: dict[str, Any] | str | os.PathLike[str],
    new: dict[str, Any] | str | os.PathLike[str] | AuditResult,
    tolerances: Tolerances | None = None,
) -> RecordDrift:
    """Fail when ``new`` drifted from ``old`` beyond tolerance; return the drift otherwise."""
    if isinstance(new, AuditResult):
        new = new.to_dict()
    drift = compare_records(old, new, tolerances)
    if not drift.passed:
        raise AssertionError(str(drift))
    return drift
