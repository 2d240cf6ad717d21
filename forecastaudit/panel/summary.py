"""The panel summary: one row per series, most serious first, and causes counted over series.

The order puts what a reviewer must read first at the top:

0. series that fail because of the production estimator (its estimate is short of the
   optimum, or disagrees, materially);
1. series that fail for another reason under the policy;
2. series that could not be audited (their run failed, timed out or crashed, or the series
   itself is not fit to audit);
3. series that pass with notes; 4. series that pass.

Within a group, the larger forecast difference of the production estimator (in forecast
standard errors) comes first, then the id.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

__all__ = ["CauseCount", "count_causes", "summary_frame"]

#: Summary columns, in order.
COLUMNS = (
    "verdict",
    "cause",
    "cause_estimator",
    "production",
    "production_gap",
    "production_forecast_se",
    "production_material",
    "engines_agreeing",
    "fail",
    "warn",
    "n",
    "model",
    "status",
    "error",
    "seconds",
    "report",
)

NOT_AUDITED = "not-audited"

_RANK = {"pass": 4, "pass-with-notes": 3, NOT_AUDITED: 2, "fail": 1}


def _rank(row: dict[str, Any]) -> int:
    if row["verdict"] == "fail" and row.get("production_material") and row.get("cause_production"):
        return 0
    return _RANK.get(row["verdict"], 2)


def summary_frame(entries: Iterable[dict[str, Any]]) -> pd.DataFrame:
    """The summary table from the store's entries (see :mod:`forecastaudit.panel.store`).

    Returns
    -------
    pandas.DataFrame
        Indexed by series id (``series``), columns :data:`COLUMNS` plus ``rank`` (0 most
        serious), sorted most serious first.
    """
    rows = []
    for entry in entries:
        base: dict[str, Any] = dict.fromkeys(COLUMNS)
        base["series"] = entry["id"]
        base["status"] = entry.get("status")
        base["error"] = entry.get("error") or None
        base["seconds"] = entry.get("seconds")
        base["report"] = (entry.get("files") or {}).get("html")
        if entry.get("status") == "audited" and entry.get("row"):
            base.update({k: v for k, v in entry["row"].items() if k in COLUMNS})
            production = base.get("production")
            base["cause_production"] = bool(
                production
                and any(
                    c["production"] and c["material"] and c["kind"] not in _NOT_A_CAUSE
                    for c in entry.get("causes") or []
                )
            )
        else:
            base["verdict"] = NOT_AUDITED
            base["cause"] = entry.get("status")
            base["cause_production"] = False
        base["rank"] = _rank(base)
        rows.append(base)
    frame = pd.DataFrame(rows, columns=["series", *COLUMNS, "rank", "cause_production"])
    if frame.empty:
        return frame.set_index("series").drop(columns="cause_production")
    size = frame["production_forecast_se"].map(
        lambda v: -v if isinstance(v, int | float) and math.isfinite(v) else math.inf
    )
    frame = frame.assign(_size=size).sort_values(["rank", "_size", "series"], kind="stable")
    return frame.drop(columns=["_size", "cause_production"]).set_index("series")


#: Counted findings that describe the audit rather than a cause (left out of rank 0).
_NOT_A_CAUSE = frozenset({"engine-count"})

#: How each kind of finding reads in a sentence about a subject: "<subject> <phrase>".
PHRASES: dict[str, str] = {
    "stopped-short": "stopped short of its own optimum",
    "objective-differs": "maximised another objective than the exact likelihood",
    "short-of-optimum": "was short of the optimum (cause unknown: no own likelihood)",
    "flat-likelihood": "sat away from the optimum on a flat likelihood",
    "fit-failed": "failed to fit or forecast",
    "not-converged": "reported that its optimiser did not converge",
    "unsupported": "could not fit the specification",
    "different-model": "fitted terms the specification did not ask for",
    "parameter-disagreement": "disagreed with the optimum for no known reason",
    "forecast-difference": "forecast beyond tolerance of the optimum's forecast",
    "interval-difference": "gave intervals beyond tolerance of the optimum's",
    "near-boundary": "has a root on or near the unit circle",
    "possible-overdifferencing": "suggests the series was differenced once too often",
    "implied-trend": "implies a polynomial trend in levels",
    "residual-autocorrelation": "leaves autocorrelated residuals (Ljung-Box)",
    "interval-below-zero": "gives intervals below zero on a positive series",
    "holdout-failure": "failed at a holdout origin",
    "engine-count": "was corroborated by too few independent engines",
}

#: At most this many ids are named in a sentence.
_IDS_SHOWN = 10


@dataclass
class CauseCount:
    """One kind of finding about one subject, counted over the series of a panel.

    Attributes
    ----------
    kind : str
    subject : str
        The estimator(s) it is about, or ``"the specified model"`` (a finding about the
        reference optimum or the model itself).
    production : bool
        Whether the subject is the production estimator.
    series : list of str
        Ids of the series with this finding.
    material : list of str
        Ids of those where it is material (or fails under the policy).
    """

    kind: str
    subject: str
    production: bool
    series: list[str] = field(default_factory=list)
    material: list[str] = field(default_factory=list)

    def sentence(self, total: int) -> str:
        """E.g. "statsforecast stopped short of its own optimum on 45 of 60 series,
        material on 2: ids a, b"."""
        phrase = PHRASES.get(self.kind, f"had the finding {self.kind!r}")
        who = f"the production estimator ({self.subject})" if self.production else self.subject
        n = len(self.series)
        text = f"{who} {phrase} on {n} of {total} series"
        if self.material:
            text += f", material on {len(self.material)}: " + _ids(self.material)
        elif n <= 3:
            text += ": " + _ids(self.series)
        return text[0].upper() + text[1:]

    def to_dict(self) -> dict[str, Any]:
        """Plain values."""
        return {
            "kind": self.kind,
            "subject": self.subject,
            "production": self.production,
            "series": list(self.series),
            "material": list(self.material),
        }


def _ids(ids: list[str]) -> str:
    shown = ", ".join(ids[:_IDS_SHOWN])
    more = f" and {len(ids) - _IDS_SHOWN} more" if len(ids) > _IDS_SHOWN else ""
    return ("id " if len(ids) == 1 else "ids ") + shown + more


def count_causes(entries: Iterable[dict[str, Any]]) -> list[CauseCount]:
    """Count the findings the panel tracks over its series, most important first.

    First the production estimator's material causes, then every other count with material
    series (most material first), then the rest by how many series they touch.
    """
    counts: dict[tuple[str, str], CauseCount] = {}
    for entry in entries:
        if entry.get("status") != "audited":
            continue
        seen: set[tuple[str, str]] = set()
        for cause in entry.get("causes") or []:
            names = [n for n in cause.get("estimators") or [] if n != "reference"]
            subject = ", ".join(names) if names else "the specified model"
            key = (cause["kind"], subject)
            count = counts.setdefault(
                key, CauseCount(cause["kind"], subject, bool(cause.get("production")))
            )
            if key in seen:
                if cause.get("material") and entry["id"] not in count.material:
                    count.material.append(entry["id"])
                continue
            seen.add(key)
            count.series.append(entry["id"])
            if cause.get("material"):
                count.material.append(entry["id"])

    def order(count: CauseCount) -> tuple[int, int, int, str, str]:
        first = 0 if count.production and count.material else 1 if count.material else 2
        return (first, -len(count.material), -len(count.series), count.kind, count.subject)

    return sorted(counts.values(), key=order)
