"""One series of a panel: the audit, and what the panel keeps of it.

:func:`audit_series` is the unit of work the panel hands to the execution seam. It runs the
single-series :func:`~forecastaudit.pipeline.audit` in the worker (inline there: the panel's
parallelism is across series) and returns plain data only: the summary row, the findings
that name a cause, the sealed audit record, and, for a series that does not pass, its HTML
and Markdown reports. Library objects never leave the worker.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Any

from forecastaudit.errors import ForecastAuditError
from forecastaudit.spec import ModelSpec

__all__ = ["SeriesJob", "audit_series", "cause_entries", "summary_row"]

#: Kinds of findings counted across a panel: the causes of a disagreement with the optimum,
#: failures to produce an estimate, and findings about the specified model.
COUNTED_KINDS = frozenset(
    {
        "stopped-short",
        "objective-differs",
        "short-of-optimum",
        "flat-likelihood",
        "fit-failed",
        "not-converged",
        "unsupported",
        "different-model",
        "parameter-disagreement",
        "forecast-difference",
        "interval-difference",
        "near-boundary",
        "possible-overdifferencing",
        "implied-trend",
        "residual-autocorrelation",
        "interval-below-zero",
        "holdout-failure",
        "engine-count",
    }
)


@dataclass
class SeriesJob:
    """Everything a worker needs to audit one series of a panel.

    Attributes
    ----------
    id : str
    series : pandas.Series
    spec : ModelSpec
    digest : str
        The series' digest (see :class:`~forecastaudit.panel.data.PanelSeries`).
    options : dict
        Keyword arguments of :func:`~forecastaudit.pipeline.audit` (estimators, tolerances
        as a plain dict, production, horizon, levels, holdout, origins, period).
    reports : bool
        Render the HTML and Markdown reports when the series does not pass.
    created : str or None
        Fixed creation time of the record (None: now).
    """

    id: str
    series: Any
    spec: ModelSpec
    digest: str
    options: dict[str, Any] = field(default_factory=dict)
    reports: bool = True
    created: str | None = None


def _finite(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _material(finding: Any) -> bool:
    if finding.severity == "fail":
        return True
    measured = finding.values.get("materiality") if isinstance(finding.values, dict) else None
    return bool(isinstance(measured, dict) and measured.get("material"))


def cause_entries(result: Any) -> list[dict[str, Any]]:
    """The findings of one audit that the panel counts across series, as plain dicts."""
    out = []
    production = result.production
    for f in result.findings:
        if f.kind not in COUNTED_KINDS or (f.kind == "engine-count" and f.severity == "info"):
            continue
        names = list(f.estimators) if f.estimators else [f.estimator] if f.estimator else []
        out.append(
            {
                "kind": f.kind,
                "estimators": names,
                "severity": f.severity,
                "material": _material(f),
                "production": bool(production is not None and production in names),
                "message": f.message,
            }
        )
    return out


def summary_row(result: Any) -> dict[str, Any]:
    """The panel summary's row for one audited series (plain values)."""
    production = result.production
    first = _first_cause(result)
    if first is not None and first.severity == "info":
        first = None
    gap = None
    if production is not None and production in result.likelihoods.index:
        gap = _finite(result.likelihoods.loc[production].get("gap_to_best"))
    measured = (result.materiality or {}).get(production or "", {}) or {}
    counts = {s: len(result.findings_of(severity=s)) for s in ("fail", "warn", "info")}
    engines = {}
    for key, estimate in result.estimates.items():
        if key == "reference" or not estimate.ok:
            continue
        measures = (result.materiality or {}).get(key, {}) or {}
        engines[key] = {
            "gap": _finite(result.likelihoods.loc[key].get("gap_to_best"))
            if key in result.likelihoods.index
            else None,
            "forecast_se": _finite(measures.get("forecast_se")),
            "material": bool(measures.get("material", False)),
        }
    status = None
    if production is not None and production in result.estimates:
        status = result.estimates[production].status
    return {
        "verdict": result.verdict,
        "cause": first.kind if first is not None else None,
        "cause_estimator": _names(first) if first is not None else None,
        "cause_message": first.message if first is not None else None,
        "production": production,
        "production_status": status,
        "production_gap": gap,
        "production_forecast_se": _finite(measured.get("forecast_se")),
        "production_material": bool(measured.get("material", False)),
        "engines_agreeing": len(result.independent_engines),
        "fail": counts["fail"],
        "warn": counts["warn"],
        "info": counts["info"],
        "n": len(result.series),
        "model": str(result.spec),
        "engines": engines,
    }


#: Observations of history drawn before the forecasts in a series sketch.
SKETCH_HISTORY = 36


def _period_labels(index: Any) -> list[str]:
    """Dates as periods (``2024-01``, ``2024Q1``) where the index has a regular frequency."""
    import pandas as pd

    if isinstance(index, pd.DatetimeIndex) and index.freq is not None:
        try:
            index = index.to_period(index.freq)
        except (ValueError, TypeError):  # a frequency with no period form (e.g. business days)
            pass
    return [str(v) for v in index]


def sketch(result: Any) -> dict[str, Any]:
    """The end of the series and every estimator's forecast, for the panel report's plot."""
    series = result.series
    values = series.values[-SKETCH_HISTORY:]
    index = series.index
    labels = _period_labels(index[-SKETCH_HISTORY:]) if index is not None else []
    forecasts = {}
    for key, fc in result.forecasts.items():
        widest = max(fc.lower) if fc.lower else None
        forecasts[key] = {
            "median": [float(v) for v in fc.median],
            "lower": [float(v) for v in fc.lower[widest]] if widest is not None else None,
            "upper": [float(v) for v in fc.upper[widest]] if widest is not None else None,
            "level": widest,
        }
    return {"labels": labels, "values": [float(v) for v in values],
            "n": len(series), "forecasts": forecasts}  # fmt: skip


def _names(finding: Any) -> str | None:
    if finding.estimators:
        return ", ".join(finding.estimators)
    return finding.estimator


def result_severity(result: Any) -> str:
    """The most serious severity among the findings (``"info"`` when there are none)."""
    severities = {f.severity for f in result.findings}
    for severity in ("fail", "warn"):
        if severity in severities:
            return severity
    return "info"


def _first_cause(result: Any) -> Any:
    """The finding that explains the verdict: the first of the most serious severity,
    preferring a cause about the production estimator."""
    severity = result_severity(result)
    top = [f for f in result.findings if f.severity == severity]
    if not top:
        return None
    from forecastaudit.diagnosis.diagnose import CAUSE_KINDS

    production = result.production

    # A cause of a disagreement (material first) says more than a symptom of it such as a
    # convergence code: "stopped short, material" rather than "did not report convergence".
    def weight(f: Any) -> tuple[int, int]:
        material = bool(((f.values or {}).get("materiality") or {}).get("material"))
        return (0 if f.kind in CAUSE_KINDS else 1, 0 if material else 1)

    ranked = sorted(top, key=weight)  # stable: the audit's order within a rank
    for f in ranked:
        if f.kind not in {"production-estimate", "engine-count"} and (
            production is None or f.estimator == production or production in f.estimators
        ):
            return f
    return ranked[0]


def audit_series(job: SeriesJob) -> dict[str, Any]:
    """Audit one series of a panel; return what the panel stores about it.

    An input problem of this series (too short, gaps, a constant series, a model that does
    not fit its data) is reported in the returned dict (``status`` ``"input-error"``), not
    raised, so that one bad series does not stop the panel.
    """
    from forecastaudit.pipeline import audit

    start = time.perf_counter()
    try:
        result = audit(
            job.series,
            job.spec,
            name=job.id,
            workers=None,
            time_limit=None,
            progress=False,
            **job.options,
        )
    except ForecastAuditError as exc:
        return {
            "id": job.id,
            "digest": job.digest,
            "status": "input-error",
            "error": f"{type(exc).__name__}: {exc}",
            "seconds": time.perf_counter() - start,
        }
    row = summary_row(result)
    out: dict[str, Any] = {
        "id": job.id,
        "digest": job.digest,
        "status": "audited",
        "row": row,
        "causes": cause_entries(result),
        "record": result.to_dict(created=job.created),
        "error": "",
    }
    if result.verdict == "fail":
        out["sketch"] = sketch(result)
    if job.reports and result.verdict == "fail":
        out["html"] = result.to_html()
        out["markdown"] = result.to_markdown()
    out["seconds"] = time.perf_counter() - start
    return out
