"""Changes between two audit records: what moved, by how much, against which tolerance.

This is what a reviewer attaches to a library-upgrade or re-fit change request: the signed-off
record on one side, the new one on the other. Records are read with
:func:`forecastaudit.load_record` (schema and seal checked); nothing in them is executed.
"""

from __future__ import annotations

import dataclasses
import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.errors import RecordError
from forecastaudit.record.document import check_record, load_record

__all__ = ["RecordChanges", "compare_records", "stricter_tolerances"]


def __getattr__(name: str) -> object:
    # The old name, kept for one release.
    if name == "RecordDrift":
        import warnings

        warnings.warn(
            "RecordDrift is now called RecordChanges; the old name goes in the next release.",
            DeprecationWarning,
            stacklevel=2,
        )
        return RecordChanges
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


_COLUMNS = ["estimator", "quantity", "old", "new", "change", "tolerance", "beyond"]


@dataclass
class RecordChanges:
    """The changes between two records (formerly ``RecordDrift``).

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
    old_signoff: dict[str, Any] | None = None

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
        from forecastaudit.report.record_changes import summary_lines

        lines = summary_lines(self)  # the summary first
        lines[0] = lines[0].upper()
        lines += [f"- {c}" for c in self.changes]
        if not self.table.empty:
            table = self.table.sort_values("beyond", ascending=False, kind="stable")
            with pd.option_context("display.width", 140, "display.max_rows", 200):
                lines += ["", table.to_string(index=False)]
        return "\n".join(lines)

    def to_markdown(self, path: str | os.PathLike[str] | None = None) -> str:
        """The changes as Markdown: the summary first, then settings and quantities; written
        to ``path`` if given (as the audit's and the model choice's reports are)."""
        from forecastaudit.files import write_text_atomic
        from forecastaudit.report.record_changes import render_changes_markdown

        text = render_changes_markdown(self)
        if path is not None:
            write_text_atomic(path, text)
        return text

    def to_html(self, path: str | os.PathLike[str] | None = None) -> str:
        """The changes as one self-contained HTML page, summary first; written to ``path``
        if given."""
        from forecastaudit.files import write_text_atomic
        from forecastaudit.report.record_changes import render_changes_html

        text = render_changes_html(self)
        if path is not None:
            write_text_atomic(path, text)
        return text

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "verdict": self.verdict,
            "same_data": self.same_data,
            "same_spec": self.same_spec,
            "changes": list(self.changes),
            "old_verdict": self.old_verdict,
            "new_verdict": self.new_verdict,
            "old_signoff": self.old_signoff,
            "rows": self.table.to_dict(orient="records"),
        }


def _load(
    record: dict[str, Any] | str | os.PathLike[str],
    which: str,
    trusted_keys: Any = None,
    require_signature: bool | None = None,
) -> dict[str, Any]:
    if isinstance(record, dict):
        return check_record(
            record,
            f"The {which} record",
            trusted_keys=trusted_keys,
            require_signature=require_signature,
        )
    if not isinstance(record, str | os.PathLike):
        raise RecordError(
            f"The {which} record must be a record dict (from load_record or "
            f"AuditResult.to_dict) or a path to one, not {type(record).__name__}."
        )
    return load_record(record, trusted_keys=trusted_keys, require_signature=require_signature)


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


def _step_offset(a: dict[str, Any], b: dict[str, Any]) -> int | None:
    """How many periods the new series ends after the old one (None: cannot be matched)."""
    da, db = a["provenance"]["data"], b["provenance"]["data"]
    last_a, last_b = da.get("last"), db.get("last")
    if last_a == last_b:
        return 0
    if isinstance(last_a, int) and isinstance(last_b, int):
        return last_b - last_a
    freq = db.get("frequency")
    if not freq or freq != da.get("frequency"):
        return None
    try:
        return int((pd.Period(str(last_b), freq=freq) - pd.Period(str(last_a), freq=freq)).n)
    except (ValueError, TypeError, AttributeError, OverflowError):
        pass
    try:  # timestamps with a frequency that has no period alias (MS, ME, W-SUN, ...)
        start, end = pd.Timestamp(str(last_a)), pd.Timestamp(str(last_b))
        if end < start:
            back = _step_offset(b, a)
            return -back if back is not None else None
        steps = pd.date_range(start, end, freq=freq)
        return len(steps) - 1 if len(steps) and steps[-1] == end else None
    except (ValueError, TypeError, AttributeError, OverflowError):
        return None


def _target(b: dict[str, Any], step: int) -> str:
    """The period that step ``step`` of record ``b`` forecasts, as a label."""
    data = b["provenance"]["data"]
    last = data.get("last")
    if isinstance(last, int):
        return str(last + step)
    freq = data.get("frequency")
    try:
        return str(pd.Period(str(last), freq=freq) + step)
    except (ValueError, TypeError, AttributeError, OverflowError):
        pass
    try:
        return str(pd.date_range(pd.Timestamp(str(last)), periods=step + 1, freq=freq)[-1].date())
    except (ValueError, TypeError, AttributeError, OverflowError):
        return f"step{step}"


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
    for name in sorted(set(new["tolerances"]) | set(old["tolerances"])):
        before = old["tolerances"].get(name, {}).get("value")
        after = new["tolerances"].get(name, {}).get("value")
        if before != after:
            out.append(f"tolerance {name} {before} -> {after}")
    for name in sorted(set(old["options"]) | set(new["options"])):
        if old["options"].get(name) != new["options"].get(name):
            out.append(
                f"option {name} {old['options'].get(name)!r} -> {new['options'].get(name)!r}"
            )
    for key in sorted(set(old["estimates"]) | set(new["estimates"])):
        a, b = old["estimates"].get(key, {}), new["estimates"].get(key, {})
        if a.get("status") != b.get("status"):
            out.append(f"{key}: status {a.get('status', 'absent')} -> {b.get('status', 'absent')}")
        # Versions of libraries installed here are listed once, by package, above; an
        # estimate made elsewhere has a version of its own.
        elsewhere = "fitted" not in (a.get("origin", "fitted"), b.get("origin", "fitted"))
        if a and b and elsewhere and a.get("version") != b.get("version"):
            out.append(f"{key}: version {a.get('version')} -> {b.get('version')}")
        if a and b and a.get("origin", "fitted") != b.get("origin", "fitted"):
            out.append(f"{key}: origin {a.get('origin', 'fitted')} -> {b.get('origin', 'fitted')}")
        moved = _provenance_changes(a.get("provenance") or {}, b.get("provenance") or {})
        if a and b and moved:
            out.append(f"{key}: provenance changed ({'; '.join(moved)})")
        if a.get("options") != b.get("options") and a and b:
            moved = sorted(
                k
                for k in set(a.get("options", {})) | set(b.get("options", {}))
                if a.get("options", {}).get(k) != b.get("options", {}).get(k)
            )
            out.append(f"{key}: estimator options changed ({', '.join(moved)})")
    return out


def _provenance_changes(a: dict[str, Any], b: dict[str, Any], at: str = "") -> list[str]:
    """What differs between two estimates' provenance (an import record's digest, another
    environment's package versions), one entry per changed leaf."""
    out = []
    for name in sorted(set(a) | set(b)):
        x, y = a.get(name), b.get(name)
        where = f"{at}{name}"
        if isinstance(x, dict) and isinstance(y, dict):
            out += _provenance_changes(x, y, f"{where}.")
        elif x != y:
            out.append(f"{where} {x!r} -> {y!r}")
    return out


def compare_records(
    old: dict[str, Any] | str | os.PathLike[str],
    new: dict[str, Any] | str | os.PathLike[str],
    tolerances: Tolerances | None = None,
    *,
    trusted_keys: Any = None,
) -> RecordChanges:
    """Compare two audit records of the same spec and data.

    Parameters
    ----------
    old, new : dict or path
        The signed-off record and the new one (paths are read with ``load_record``).
    tolerances : Tolerances, optional
        Tolerances for the drift; default the stricter of the values the two records state,
        tolerance by tolerance (see :func:`stricter_tolerances`), so that neither record's
        looser setting loosens the comparison.
    trusted_keys : public key or sequence of them, optional
        Reviewers' Ed25519 public keys. When given, the old (signed-off) record must carry a
        valid signature by one of them; the new record's signatures, if any, are checked too.

    Both records are checked as :func:`~forecastaudit.load_record` checks a file (kind,
    schema, seal); a dict that is not a validated record is refused.

    Raises
    ------
    RecordError
        When either record fails those checks.

    Returns
    -------
    RecordChanges
    """
    a = _load(old, "old", trusted_keys)
    b = _load(new, "new")
    if trusted_keys is not None and b.get("signatures"):
        from forecastaudit.record.signing import verify_signatures

        verify_signatures(b, trusted_keys, where="The new record")
    return compare_loaded(a, b, tolerances)


def stricter_tolerances(a: Mapping[str, Any], b: Mapping[str, Any]) -> Tolerances:
    """Per tolerance, the smaller (stricter) of the values the two records state.

    A re-audit run with looser tolerances must not loosen the check against the signed-off
    record, nor a signed-off record with loose ones the check of a stricter re-audit: the
    comparison holds both records to the stricter value of each. A tolerance only one record
    states is taken from it.
    """
    known = {f.name for f in dataclasses.fields(Tolerances)}
    stated: dict[str, Any] = {}
    for record in (a, b):
        for name, item in (record.get("tolerances") or {}).items():
            value = item.get("value") if isinstance(item, Mapping) else None
            if name not in known or value is None:
                continue
            if name not in stated:
                stated[name] = value
            elif name in _LARGER_IS_STRICTER or isinstance(value, bool):
                stated[name] = max(stated[name], value)
            else:
                stated[name] = min(stated[name], value)
    return Tolerances.from_dict(stated)


#: Tolerances for which a larger value asks more (the others allow more when larger); the
#: ``fail_on_*`` switches are stricter when on.
_LARGER_IS_STRICTER = frozenset({"min_independent_engines", "root_margin"})


def _tolerance_basis(a: Mapping[str, Any], b: Mapping[str, Any], merged: bool) -> list[str]:
    """How the changes were judged, when the records' tolerances differ."""
    value = lambda r, n: (r.get("tolerances") or {}).get(n, {}).get("value")  # noqa: E731
    names = set(a.get("tolerances") or {}) | set(b.get("tolerances") or {})
    if not any(value(a, n) != value(b, n) for n in names):
        return []
    if merged:
        return [
            "the records state different tolerances: each change is judged by the stricter "
            "of the two values"
        ]
    return ["the records state different tolerances: changes are judged by those given"]


def _future_regressor_notes(
    a: Mapping[str, Any], b: Mapping[str, Any], offset: int | None
) -> list[str]:
    """Whether the future regressor values the two records' forecasts assume differ, over
    the periods both forecast (records made before they were kept say nothing)."""
    fa_ = (a.get("forecasts") or {}).get("future_regressors")
    fb_ = (b.get("forecasts") or {}).get("future_regressors")
    if not fa_ or not fb_:
        return []
    if fa_.get("columns") != fb_.get("columns"):
        return [
            f"future regressors differ: columns {', '.join(fa_.get('columns') or [])} -> "
            f"{', '.join(fb_.get('columns') or [])}"
        ]
    old = dict(zip(fa_.get("periods") or [], fa_.get("values") or [], strict=False))
    moved = []
    for period, values in zip(fb_.get("periods") or [], fb_.get("values") or [], strict=False):
        if period in old and old[period] != values:
            columns = [
                c for c, x, y in zip(fa_["columns"], old[period], values, strict=False) if x != y
            ]
            moved.append(f"{period} ({', '.join(columns)})")
    if not moved:
        return []
    shown = "; ".join(moved[:6]) + (f"; and {len(moved) - 6} more" if len(moved) > 6 else "")
    return [
        "future regressor values differ for periods both records forecast: "
        f"{shown}. Those forecasts assume different values, so their changes are not "
        "numerics alone"
    ]


def compare_loaded(
    a: dict[str, Any], b: dict[str, Any], tolerances: Tolerances | None = None
) -> RecordChanges:
    """Compare two records already read and checked (or parts of them kept for a baseline).

    The comparison of :func:`compare_records` without the reading: it uses the record's
    ``spec``, ``estimates``, ``likelihoods``, ``forecasts``, ``holdout``, ``reference``
    standard errors, ``tolerances``, ``options``, ``provenance`` and ``verdict``.
    """
    merged = tolerances is None
    if tolerances is None:
        tolerances = stricter_tolerances(a, b)
    tol = tolerances
    transforms = (a["spec"].get("transform"), b["spec"].get("transform"))
    if transforms[0] != transforms[1]:
        raise RecordError(
            f"The records fit different transforms ({transforms[0] or 'none'} and "
            f"{transforms[1] or 'none'}): their log-likelihoods, coefficients and forecasts "
            "are on different scales and do not compare. Audit both with the same transform."
        )
    fingerprint = lambda r: r["provenance"]["data"]["fingerprint_sha256"]  # noqa: E731
    # Log-likelihoods of different samples are of different data: not comparable.
    same_sample = fingerprint(a) == fingerprint(b)
    offset = _step_offset(a, b)
    notes: list[str] = []
    if not same_sample:
        notes.append(
            "log-likelihoods and AICc not compared: the records are of different samples "
            f"(n {a['provenance']['data'].get('n', '?')} -> "
            f"{b['provenance']['data'].get('n', '?')}, data "
            "fingerprints differ), and log-likelihoods of different data do not compare"
        )
    if offset is None:
        notes.append(
            "forecasts not compared: the series end at periods that cannot be matched "
            f"({a['provenance']['data'].get('last')} and {b['provenance']['data'].get('last')})"
        )
    holdouts = all(((r.get("holdout") or {}).get("accuracy")) for r in (a, b))
    if not same_sample and holdouts:
        notes.append(
            "holdout accuracy not compared: the records are of different data, so they hold "
            "out different observations, and their accuracies measure the data as much as the "
            "numerics"
        )
    if transforms[0]:
        notes.append(
            f"coefficients and forecasts compared on the {transforms[0]} scale the models are "
            "fitted on; forecast tolerances are fractions of the reference forecast standard "
            "error there"
        )
    notes += _future_regressor_notes(a, b, offset)
    se = b.get("reference", {}).get("standard_errors", {}) or {}
    rows: list[dict | None] = []
    compared_forecasts = 0
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
        for name in ("loglike_native", "loglike_reference", "aicc") if same_sample else ():
            # AICc is -2 log-likelihood plus a constant: twice the log-likelihood tolerance.
            allowed = 2 * tol.loglike_atol if name == "aicc" else tol.loglike_atol
            rows.append(_row(key, name, la.get(name), lb.get(name), allowed))
        fa_ = a.get("forecasts", {}).get("transformed_scale", {}).get(key)
        fb_ = b.get("forecasts", {}).get("transformed_scale", {}).get(key)
        if fa_ and fb_ and fa_.get("mean") and fb_.get("mean") and offset is not None:
            # Step h of the new record forecasts the same period as step h + offset of the
            # old one: forecasts are compared by the period they are for.
            for step, (y, s) in enumerate(zip(fb_["mean"], fb_["se"], strict=False), start=1):
                old_step = step + offset
                if not 1 <= old_step <= len(fa_["mean"]):
                    continue
                # A standard error the estimator did not give (null) allows no change.
                allowed = tol.forecast_se_fraction * s if s is not None else 0.0
                name = (
                    f"forecast_step{step}"
                    if offset == 0
                    else f"forecast_{_target(b, step)} (old step {old_step}, new step {step})"
                )
                rows.append(_row(key, name, fa_["mean"][old_step - 1], y, allowed))
                compared_forecasts += 1
        ha = ((a.get("holdout") or {}).get("accuracy") or {}).get(key, {})
        hb = ((b.get("holdout") or {}).get("accuracy") or {}).get(key, {})
        for name in sorted(set(ha) & set(hb)) if same_sample else ():
            ref = hb[name] if hb[name] is not None else 0.0
            allowed = tol.accuracy_rtol * abs(ref)
            rows.append(_row(key, f"holdout_{name}", ha[name], hb[name], allowed))
    if offset and compared_forecasts:
        notes.append(
            f"forecasts compared by target period: the new series ends {abs(offset)} "
            f"period(s) {'after' if offset > 0 else 'before'} the old one"
        )
    elif offset:
        earlier = a if offset > 0 else b
        horizon = earlier.get("forecasts", {}).get("horizon")
        which = "old" if offset > 0 else "new"
        notes.append(
            f"no forecast compared: the {which} record forecasts {horizon} period(s) after "
            f"{earlier['provenance']['data'].get('last')}, and the other series ends "
            f"{abs(offset)} period(s) later, so no period is forecast by both (audit the "
            f"{which} data with a longer horizon to compare forecasts across a data update)"
        )
    table = pd.DataFrame([r for r in rows if r is not None], columns=_COLUMNS)
    same_spec = a["spec"]["text"] == b["spec"]["text"]
    if not same_spec and fingerprint(a) != fingerprint(b):
        raise RecordError(
            f"The records audit different specifications ({a['spec']['text']} and "
            f"{b['spec']['text']}) on different data; there is nothing to compare."
        )
    return RecordChanges(
        table=table,
        same_data=fingerprint(a) == fingerprint(b),
        same_spec=same_spec,
        changes=notes + _setting_changes(a, b) + _tolerance_basis(a, b, merged),
        old_verdict=a["verdict"],
        new_verdict=b["verdict"],
        old_signoff=dict(a["signoff"]) if isinstance(a.get("signoff"), Mapping) else None,
    )
