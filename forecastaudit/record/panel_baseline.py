"""A panel's baseline: one file per panel, and the drift of a new run from it, series by series.

A panel of a thousand series cannot keep a thousand full records as its baseline (about
90 KB each). The baseline keeps, for each series, the parts of its record that the record
comparison reads (:func:`forecastaudit.record.changes.compare_loaded`): the specification,
the canonical parameters and status of every estimate, the log-likelihoods and criteria,
the forecast means and standard errors on the transformed scale, the holdout accuracy, the
reference standard errors, the tolerances, options and provenance, and the verdict. That
is about a tenth of the record.

The file is one JSON document::

    {"baseline": "forecastaudit-panel-baseline", "version": 1, "created": "...",
     "settings": {...}, "series": {"<id>": {<record parts>}, ...}}

:func:`compare_panel_to_baseline` compares a new :class:`~forecastaudit.panel.PanelResult`
with it: each series with the comparison of two records, plus the series that appeared,
disappeared, or could not be audited on one side.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, ClassVar

import pandas as pd

from forecastaudit.errors import PanelError, RecordError
from forecastaudit.files import write_text_atomic
from forecastaudit.jsonutil import to_plain
from forecastaudit.panel.result import PanelResult
from forecastaudit.record.changes import RecordChanges, compare_loaded

__all__ = [
    "BASELINE_KIND",
    "PanelDrift",
    "compare_panel_to_baseline",
    "load_panel_baseline",
    "panel_baseline",
    "write_panel_baseline",
]

BASELINE_KIND = "forecastaudit-panel-baseline"
BASELINE_VERSION = 1

#: Record sections a baseline keeps whole.
_WHOLE = ("record", "schema_version", "created", "verdict", "spec", "tolerances", "options")
#: What a baseline keeps of each estimate.
_ESTIMATE_KEYS = ("key", "engine", "package", "version", "status", "params", "options")

#: Drift states of one series, most serious first.
STATES = (
    "drift beyond tolerance",
    "missing now",
    "new series",
    "not audited",
    "drift within tolerance",
    "no drift",
)

_COLUMNS = ["old_verdict", "new_verdict", "state", "beyond", "largest", "data"]


def _parts(record: dict[str, Any]) -> dict[str, Any]:
    """The parts of one series' record that a baseline keeps."""
    out = {k: record[k] for k in _WHOLE if k in record}
    out["provenance"] = {
        "forecastaudit": record["provenance"]["forecastaudit"],
        "packages": record["provenance"]["packages"],
        # The fingerprint says whether the data changed; n, the last label and the
        # frequency let forecasts be matched by target period when it did.
        "data": {
            k: record["provenance"]["data"].get(k)
            for k in ("fingerprint_sha256", "n", "last", "frequency")
        },
    }
    out["estimates"] = {
        key: {k: item.get(k) for k in _ESTIMATE_KEYS if k in item}
        for key, item in record["estimates"].items()
    }
    out["likelihoods"] = record.get("likelihoods", {})
    ses = (record.get("reference") or {}).get("standard_errors") or {}
    out["reference"] = {"standard_errors": ses}
    scale = (record.get("forecasts") or {}).get("transformed_scale") or {}
    out["forecasts"] = {
        "transformed_scale": {
            key: {"mean": item.get("mean"), "se": item.get("se")}
            for key, item in scale.items()
            if isinstance(item, dict)
        }
    }
    accuracy = (record.get("holdout") or {}).get("accuracy")
    out["holdout"] = {"accuracy": accuracy} if accuracy else None
    return out


def panel_baseline(result: PanelResult, created: str | None = None) -> dict[str, Any]:
    """The baseline document of a panel result (a dict ready for JSON).

    Parameters
    ----------
    result : PanelResult
        A finished panel audit; its records are read from its store.
    created : str, optional
        Timestamp to write (default: now, UTC, ISO 8601).

    Returns
    -------
    dict
    """
    if created is None:
        created = pd.Timestamp.now(tz="UTC").isoformat(timespec="seconds")
    series: dict[str, Any] = {}
    for series_id in result.summary.index:
        record = result.record(series_id)
        entry = result.entries.get(str(series_id), {})
        series[str(series_id)] = (
            _parts(record)
            if record is not None
            else {"status": entry.get("status", "not audited"), "error": entry.get("error")}
        )
    return {
        "baseline": BASELINE_KIND,
        "version": BASELINE_VERSION,
        "created": created,
        "settings": to_plain(result.settings),
        "series": series,
    }


def write_panel_baseline(result: PanelResult, path: str | os.PathLike[str]) -> Path:
    """Write a panel's baseline to ``path`` atomically (a temporary file, then a rename).

    Returns
    -------
    pathlib.Path
        The path written.
    """
    text = json.dumps(panel_baseline(result), indent=1, sort_keys=True, allow_nan=False)
    return write_text_atomic(Path(path), text + "\n")


def load_panel_baseline(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Read a panel baseline written by :func:`write_panel_baseline`.

    Raises
    ------
    PanelError
        When the file cannot be read, is not JSON, or is not a panel baseline.
    """
    from forecastaudit.errors import RecordError
    from forecastaudit.record.document import parse_strict_json

    path = Path(path)
    try:
        # Strictly: no duplicate keys, NaN literals, binary content or deep nesting.
        document = parse_strict_json(path.read_bytes(), str(path))
    except (OSError, RecordError) as exc:
        raise PanelError(
            f"Cannot read the panel baseline {path}: {exc}. Regenerate it from a reviewed run."
        ) from None
    if (
        not isinstance(document, dict)
        or document.get("baseline") != BASELINE_KIND
        or not isinstance(document.get("series"), dict)
    ):
        raise PanelError(
            f"{path} is not a forecastaudit panel baseline (no 'baseline': "
            f"'{BASELINE_KIND}' header with a 'series' table). Regenerate it from a reviewed run."
        )
    if document.get("version") != BASELINE_VERSION:
        raise PanelError(
            f"{path} is a panel baseline of version {document.get('version')!r}; this "
            f"forecastaudit reads version {BASELINE_VERSION}. Regenerate it from a reviewed run."
        )
    return document


@dataclass
class PanelDrift:
    """How a panel moved from its baseline, series by series.

    Attributes
    ----------
    table : pandas.DataFrame
        Indexed by series id, most serious first: the verdict in the baseline and now, the
        drift state (one of ``STATES``), how many quantities moved beyond tolerance, the
        largest such move in words, and whether the data changed.
    drifts : dict
        Per series id audited on both sides, its :class:`~forecastaudit.RecordChanges`.
    changes : list of str
        Settings that differ between the baseline and this run.
    """

    table: pd.DataFrame
    drifts: dict[str, RecordChanges] = field(default_factory=dict, repr=False)
    changes: list[str] = field(default_factory=list)

    def ids(self, state: str) -> list[str]:
        """The series in one drift state."""
        return [str(i) for i in self.table.index[self.table["state"] == state]]

    def ids_with_changed_data(self) -> list[str]:
        """The series whose data changed since the baseline (fingerprints differ), in the
        table's order (most serious first)."""
        return [str(i) for i in self.table.index[self.table["data"] == "changed"]]

    @property
    def passed(self) -> bool:
        """True when no series moved beyond tolerance and the panel has the same series."""
        bad = {"drift beyond tolerance", "missing now", "new series"}
        return not self.table["state"].isin(bad).any()

    @property
    def verdict(self) -> str:
        """``"no drift"``, ``"drift within tolerance"`` or ``"drift beyond tolerance"``."""
        if not self.passed:
            return "drift beyond tolerance"
        if (self.table["state"] == "no drift").all():
            return "no drift"
        return "drift within tolerance"

    def __str__(self) -> str:
        counts = self.table["state"].value_counts()
        lines = [f"Panel drift from its baseline: {self.verdict.upper()}"]
        lines.append(
            ", ".join(f"{int(counts[s])} {s}" for s in STATES if s in counts)
            + f" (of {len(self.table)} series)"
        )
        changed = int((self.table["data"] == "changed").sum())
        if changed:
            lines.append(
                f"The data changed in {changed} of {len(self.table)} series (fingerprints "
                "differ from the baseline's): their fits and forecasts move with the new data."
            )
        lines += [f"- {c}" for c in self.changes]
        shown = self.table[~self.table["state"].isin(["no drift", "drift within tolerance"])]
        for series_id, row in shown.head(20).iterrows():
            lines += self._series_lines(str(series_id), row)
        if len(shown) > 20:
            lines.append(f"  ... and {len(shown) - 20} more series")
        return "\n".join(lines)

    #: Quantities beyond tolerance shown per series in the text form, the largest first.
    SHOWN_PER_SERIES: ClassVar[int] = 3

    def _series_lines(self, series_id: str, row: pd.Series) -> list[str]:
        """One series in the text form: its state, whether its data changed, how many
        quantities moved beyond tolerance, and the largest few of them."""
        drift = self.drifts.get(series_id)
        if drift is None or drift.beyond.empty:
            detail = f": {row['largest']}" if row["largest"] else ""
            return [f"  {series_id}: {row['state']}{detail}"]
        beyond = len(drift.beyond)
        data = (
            "data changed (fingerprints differ)"
            if row["data"] == "changed"
            else "same data (equal fingerprints)"
        )
        moves = _moves(drift)
        shown = moves[: self.SHOWN_PER_SERIES]
        lines = [
            f"  {series_id}: {row['state']}: {data}; {beyond} "
            f"{'quantity' if beyond == 1 else 'quantities'} beyond tolerance"
            + (", the largest:" if beyond > 1 else ":")
        ]
        lines += [f"    {move}" for move in shown]
        if beyond > len(shown):
            lines.append(f"    ... and {beyond - len(shown)} more")
        return lines

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (JSON-ready)."""
        return {
            "verdict": self.verdict,
            "changes": list(self.changes),
            "series": to_plain(self.table.reset_index().to_dict(orient="records")),
        }


def _moves(drift: RecordChanges) -> list[str]:
    """The quantities beyond tolerance in words, the largest move (against its tolerance)
    first; a quantity that appeared or vanished counts as largest."""
    beyond = drift.beyond
    if beyond.empty:
        return []
    ratio = (beyond["change"].abs() / beyond["tolerance"].where(beyond["tolerance"] > 0)).fillna(
        float("inf")
    )
    out = []
    for index in ratio.sort_values(ascending=False, kind="stable").index:
        row = beyond.loc[index]
        if pd.isna(row["change"]):
            out.append(f"{row['estimator']} {row['quantity']}: {row['old']} -> {row['new']}")
        else:
            out.append(
                f"{row['estimator']} {row['quantity']} {row['change']:+.4g} "
                f"(tolerance {row['tolerance']:.3g})"
            )
    return out


def _largest(drift: RecordChanges) -> str:
    moves = _moves(drift)
    return moves[0] if moves else ""


def _setting_changes(old: dict[str, Any], new: dict[str, Any]) -> list[str]:
    out = []
    for name in sorted(set(old) | set(new)):
        if old.get(name) != new.get(name):
            out.append(f"setting {name}: {old.get(name)!r} -> {new.get(name)!r}")
    return out


def compare_panel_to_baseline(
    baseline: dict[str, Any] | str | os.PathLike[str], result: PanelResult
) -> PanelDrift:
    """Compare a panel audit with its baseline, series by series.

    Parameters
    ----------
    baseline : dict or path
        A baseline document (:func:`panel_baseline`) or the file holding one.
    result : PanelResult
        The new run.

    Returns
    -------
    PanelDrift
    """
    document = baseline if isinstance(baseline, dict) else load_panel_baseline(baseline)
    if document.get("baseline") != BASELINE_KIND:
        raise PanelError(
            "The baseline given is not a forecastaudit panel baseline; pass the file written by "
            "write_panel_baseline or the dict from panel_baseline."
        )
    old_series: dict[str, Any] = document["series"]
    new_ids = [str(i) for i in result.summary.index]
    rows: dict[str, dict[str, Any]] = {}
    drifts: dict[str, RecordChanges] = {}
    for series_id in new_ids + [i for i in old_series if i not in set(new_ids)]:
        old = old_series.get(series_id)
        new = result.record(series_id) if series_id in set(new_ids) else None
        old_verdict = old.get("verdict", "not audited") if old else ""
        new_verdict = (
            new["verdict"]
            if new
            else str(result.summary.loc[series_id, "verdict"])
            if series_id in result.summary.index
            else ""
        )
        row = {
            "old_verdict": old_verdict,
            "new_verdict": new_verdict,
            "beyond": 0,
            "largest": "",
            "data": "",
        }
        if old is None:
            row["state"] = "new series"
            row["largest"] = "not in the baseline"
        elif series_id not in set(new_ids):
            row["state"] = "missing now"
            row["largest"] = "in the baseline, not in this panel"
        elif new is None or "estimates" not in old:
            row["state"] = "not audited"
            row["largest"] = "not audited in the baseline or in this run"
        else:
            try:
                drift = compare_loaded(old, _parts(new))
            except RecordError as exc:
                row["state"] = "drift beyond tolerance"
                row["largest"] = str(exc)
            else:
                drifts[series_id] = drift
                row["state"] = drift.verdict
                row["beyond"] = len(drift.beyond)
                row["largest"] = _largest(drift)
                row["data"] = "same" if drift.same_data else "changed"
        rows[series_id] = row
    table = pd.DataFrame.from_dict(rows, orient="index", columns=_COLUMNS)
    rank = table["state"].map({s: i for i, s in enumerate(STATES)})
    table = table.iloc[rank.argsort(kind="stable")]
    table.index.name = "series"
    return PanelDrift(
        table=table,
        drifts=drifts,
        changes=_setting_changes(document.get("settings") or {}, to_plain(result.settings)),
    )
