"""Drift between two audit records: what moved, by how much, against which tolerance.

This is what a reviewer attaches to a library-upgrade or re-fit change request: the signed-off
record on one side, the new one on the other. Records are read with
:func:`forecastaudit.load_record` (schema and seal checked); nothing in them is executed.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.errors import RecordError
from forecastaudit.record.document import load_record

__all__ = ["RecordDrift", "compare_records"]

_COLUMNS = ["estimator", "quantity", "old", "new", "change", "tolerance", "beyond"]


@dataclass
class RecordDrift:
    """The drift between two records.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per estimator and quantity that changed: old and new value, change,
        tolerance and whether the change is beyond it.
    same_data : bool
        Whether both records were made from the same data (equal SHA-256 fingerprints).
    same_spec : bool
        Whether both records audit the same specification.
    changes : list of str
        Changes of setting: package versions, tolerances, options, estimators, verdict.
    verdict : str
        ``"no drift"``, ``"drift within tolerance"`` or ``"drift beyond tolerance"``.
    """

    table: pd.DataFrame
    same_data: bool
    same_spec: bool
    changes: list[str] = field(default_factory=list)
    old_verdict: str = ""
    new_verdict: str = ""

    @property
    def beyond(self) -> pd.DataFrame:
        """The rows whose change is beyond tolerance."""
        return self.table[self.table["beyond"]]

    @property
    def verdict(self) -> str:
        """``"no drift"``, ``"drift within tolerance"`` or ``"drift beyond tolerance"``."""
        if self.table.empty:
            return "no drift"
        return "drift beyond tolerance" if self.table["beyond"].any() else "drift within tolerance"

    @property
    def passed(self) -> bool:
        """True when nothing moved beyond tolerance."""
        return self.verdict != "drift beyond tolerance"

    def __str__(self) -> str:
        lines = [f"Drift between records: {self.verdict.upper()}"]
        lines.append(
            "Data: the same (equal fingerprints)."
            if self.same_data
            else "Data: DIFFERENT (the fingerprints differ): changes mix data and numerics."
        )
        if not self.same_spec:
            lines.append("Specification: DIFFERENT; quantities are compared by name only.")
        lines.append(f"Verdict of the audits: {self.old_verdict} -> {self.new_verdict}")
        lines += [f"- {c}" for c in self.changes]
        if not self.table.empty:
            with pd.option_context("display.width", 140, "display.max_rows", 200):
                lines += ["", self.table.to_string(index=False)]
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "verdict": self.verdict,
            "same_data": self.same_data,
            "same_spec": self.same_spec,
            "changes": list(self.changes),
            "old_verdict": self.old_verdict,
            "new_verdict": self.new_verdict,
            "rows": self.table.to_dict(orient="records"),
        }


def _load(record: dict[str, Any] | str | os.PathLike[str]) -> dict[str, Any]:
    if isinstance(record, dict):
        return record
    return load_record(record)


def _row(estimator: str, quantity: str, old: Any, new: Any, tolerance: float) -> dict | None:
    if old is None and new is None:
        return None
    if old is None or new is None:
        return {
            "estimator": estimator,
            "quantity": quantity,
            "old": old,
            "new": new,
            "change": math.nan,
            "tolerance": tolerance,
            "beyond": True,
        }
    change = float(new) - float(old)
    if change == 0.0:
        return None
    return {
        "estimator": estimator,
        "quantity": quantity,
        "old": float(old),
        "new": float(new),
        "change": change,
        "tolerance": tolerance,
        "beyond": bool(abs(change) > tolerance),
    }


def _setting_changes(old: dict[str, Any], new: dict[str, Any]) -> list[str]:
    out = []
    for name, version in sorted(new["provenance"]["packages"].items()):
        before = old["provenance"]["packages"].get(name)
        if before != version:
            out.append(f"{name} {before or 'absent'} -> {version or 'absent'}")
    if old["provenance"]["forecastaudit"] != new["provenance"]["forecastaudit"]:
        out.append(
            f"forecastaudit {old['provenance']['forecastaudit']} -> "
            f"{new['provenance']['forecastaudit']}"
        )
    for name, item in sorted(new["tolerances"].items()):
        before = old["tolerances"].get(name, {}).get("value")
        if before != item["value"]:
            out.append(f"tolerance {name} {before} -> {item['value']}")
    for name in sorted(set(old["options"]) | set(new["options"])):
        if old["options"].get(name) != new["options"].get(name):
            out.append(
                f"option {name} {old['options'].get(name)!r} -> {new['options'].get(name)!r}"
            )
    for key in sorted(set(old["estimates"]) | set(new["estimates"])):
        a, b = old["estimates"].get(key, {}), new["estimates"].get(key, {})
        if a.get("status") != b.get("status"):
            out.append(f"{key}: status {a.get('status', 'absent')} -> {b.get('status', 'absent')}")
        if a.get("options") != b.get("options") and a and b:
            moved = sorted(
                k
                for k in set(a.get("options", {})) | set(b.get("options", {}))
                if a.get("options", {}).get(k) != b.get("options", {}).get(k)
            )
            out.append(f"{key}: estimator options changed ({', '.join(moved)})")
    return out


def compare_records(
    old: dict[str, Any] | str | os.PathLike[str],
    new: dict[str, Any] | str | os.PathLike[str],
    tolerances: Tolerances | None = None,
) -> RecordDrift:
    """Compare two audit records of the same spec and data.

    Parameters
    ----------
    old, new : dict or path
        The signed-off record and the new one (paths are read with ``load_record``).
    tolerances : Tolerances, optional
        Tolerances for the drift; default those stated in the new record.

    Returns
    -------
    RecordDrift
    """
    a, b = _load(old), _load(new)
    if tolerances is None:
        tolerances = Tolerances.from_dict({k: v["value"] for k, v in b["tolerances"].items()})
    tol = tolerances
    se = b.get("reference", {}).get("standard_errors", {}) or {}
    rows: list[dict | None] = []
    keys = [k for k in b["estimates"] if k in a["estimates"]]
    keys += [k for k in a["estimates"] if k not in b["estimates"]]
    for key in keys:
        pa = (a["estimates"].get(key) or {}).get("params", {})
        pb = (b["estimates"].get(key) or {}).get("params", {})
        for name in sorted(set(pa) | set(pb)):
            if name == "sigma2":
                ref = pb.get(name) or pa.get(name) or 0.0
                allowed = tol.sigma2_rtol * abs(ref)
            else:
                allowed = tol.parameter_tolerance(se.get(name))
            rows.append(_row(key, name, pa.get(name), pb.get(name), allowed))
        la = a["likelihoods"].get(key, {})
        lb = b["likelihoods"].get(key, {})
        for name in ("loglike_native", "loglike_reference", "aicc"):
            # AICc is -2 log-likelihood plus a constant: twice the log-likelihood tolerance.
            allowed = 2 * tol.loglike_atol if name == "aicc" else tol.loglike_atol
            rows.append(_row(key, name, la.get(name), lb.get(name), allowed))
        fa_ = a.get("forecasts", {}).get("transformed_scale", {}).get(key)
        fb_ = b.get("forecasts", {}).get("transformed_scale", {}).get(key)
        if fa_ and fb_ and fa_.get("mean") and fb_.get("mean"):
            for step, (x, y, s) in enumerate(
                zip(fa_["mean"], fb_["mean"], fb_["se"], strict=False), start=1
            ):
                rows.append(_row(key, f"forecast_step{step}", x, y, tol.forecast_se_fraction * s))
        ha = ((a.get("holdout") or {}).get("accuracy") or {}).get(key, {})
        hb = ((b.get("holdout") or {}).get("accuracy") or {}).get(key, {})
        for name in sorted(set(ha) & set(hb)):
            ref = hb[name] if hb[name] is not None else 0.0
            allowed = tol.accuracy_rtol * abs(ref)
            rows.append(_row(key, f"holdout_{name}", ha[name], hb[name], allowed))
    table = pd.DataFrame([r for r in rows if r is not None], columns=_COLUMNS)
    same_spec = a["spec"]["text"] == b["spec"]["text"]
    fingerprint = lambda r: r["provenance"]["data"]["fingerprint_sha256"]  # noqa: E731
    if not same_spec and fingerprint(a) != fingerprint(b):
        raise RecordError(
            f"The records audit different specifications ({a['spec']['text']} and "
            f"{b['spec']['text']}) on different data; there is nothing to compare."
        )
    return RecordDrift(
        table=table,
        same_data=fingerprint(a) == fingerprint(b),
        same_spec=same_spec,
        changes=_setting_changes(a, b),
        old_verdict=a["verdict"],
        new_verdict=b["verdict"],
    )
