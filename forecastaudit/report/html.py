"""The HTML report: one self-contained file (inline CSS, images embedded as data URIs).

The page is a list of sections. Each section is one template under ``templates/`` and one
entry in :data:`SECTIONS` naming the function that builds its context; a builder returns
None when the report holds no data for it, and the section is left out. Adding a section is
therefore one template block and one entry here.

Jinja2 runs with autoescape on, so every user-supplied string (series name, estimator keys,
column names, messages) is escaped wherever it appears.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import jinja2

from forecastaudit.report import content
from forecastaudit.report.plots import Plot, report_plots

if TYPE_CHECKING:
    from forecastaudit.result import AuditResult

__all__ = ["SECTIONS", "Section", "render_compact_html", "render_html"]


@dataclass
class _Shared:
    """What several sections use, computed once per rendering."""

    report: AuditResult
    summary: content.Summary
    provenance: dict[str, Any]
    plots: list[Plot] = field(default_factory=list)


Builder = Callable[[_Shared], dict[str, Any] | None]


@dataclass(frozen=True)
class Section:
    """One section of the page: its anchor, its heading, its template and its builder."""

    id: str
    title: str
    template: str
    build: Builder


def _verdict(shared: _Shared) -> dict[str, Any]:
    return {"summary": shared.summary, "caution": _caution()}


def _findings(shared: _Shared) -> dict[str, Any] | None:
    groups = content.finding_groups(shared.report)
    if not groups:
        return None
    return {"groups": groups}


def _tables(*tables: content.Table | None, intro: str = "") -> dict[str, Any] | None:
    kept = [t for t in tables if t is not None]
    return {"tables": kept, "intro": intro} if kept else None


def _parameters(shared: _Shared) -> dict[str, Any] | None:
    if shared.report.parameters.empty:
        return None
    return _tables(
        content.parameter_table(shared.report),
        intro=(
            "Every estimate on the canonical convention, beside the reference optimum and its "
            "standard error (from the reference likelihood's Hessian). An estimator that "
            "produced nothing shows dashes."
        ),
    )


def _likelihoods(shared: _Shared) -> dict[str, Any] | None:
    if shared.report.likelihoods.empty:
        return None
    return _tables(
        content.likelihood_table(shared.report),
        intro=(
            "Each estimator's own numbers beside the same quantities recomputed under the "
            "reference likelihood, so that differences of definition are not mistaken for "
            "differences of fit."
        ),
    )


def _estimators(shared: _Shared) -> dict[str, Any] | None:
    return _tables(content.estimator_table(shared.report))


def _forecasts(shared: _Shared) -> dict[str, Any] | None:
    return _tables(content.forecast_table(shared.report))


def _residuals(shared: _Shared) -> dict[str, Any] | None:
    return _tables(content.residual_table(shared.report))


def _holdout(shared: _Shared) -> dict[str, Any] | None:
    return _tables(*content.holdout_tables(shared.report))


def _order_search(shared: _Shared) -> dict[str, Any] | None:
    return _tables(*content.order_search_tables(shared.report))


def _plots(shared: _Shared) -> dict[str, Any] | None:
    return {"plots": shared.plots} if shared.plots else None


def _tolerances(shared: _Shared) -> dict[str, Any] | None:
    return _tables(
        content.tolerance_table(shared.report),
        intro="Every tolerance can be overridden by the caller and is written into the record.",
    )


def _provenance(shared: _Shared) -> dict[str, Any] | None:
    return _tables(
        content.provenance_table(shared.report, shared.provenance),
        content.package_table(shared.provenance),
        intro=(
            "The audit record (JSON) holds the full detail: every resolved option, warning "
            "and native value."
        ),
    )


def _caution_section(shared: _Shared) -> dict[str, Any]:
    return {"caution": _caution()}


SECTIONS: tuple[Section, ...] = (
    Section("verdict", "Verdict", "section_verdict.html.j2", _verdict),
    Section("findings", "Findings", "section_findings.html.j2", _findings),
    Section("parameters", "Parameters", "section_tables.html.j2", _parameters),
    Section("likelihoods", "Likelihoods and criteria", "section_tables.html.j2", _likelihoods),
    Section("estimators", "Estimators", "section_tables.html.j2", _estimators),
    Section("forecasts", "Forecasts", "section_tables.html.j2", _forecasts),
    Section("residuals", "Residual checks", "section_tables.html.j2", _residuals),
    Section("holdout", "Holdout accuracy", "section_tables.html.j2", _holdout),
    Section("order-search", "Order searches", "section_tables.html.j2", _order_search),
    Section("plots", "Plots", "section_plots.html.j2", _plots),
    Section("tolerances", "Tolerances", "section_tables.html.j2", _tolerances),
    Section("provenance", "Provenance", "section_tables.html.j2", _provenance),
    Section("caution", "Caution", "section_caution.html.j2", _caution_section),
)


def _caution() -> str:
    from forecastaudit.result import CAUTION

    return CAUTION


@lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("forecastaudit.report", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.globals["flag_marks"] = content.FLAG_MARKS
    return env


def _shared(report: AuditResult, with_plots: bool) -> _Shared:
    from forecastaudit.record.document import provenance

    return _Shared(
        report=report,
        summary=content.summary(report),
        provenance=provenance(report),
        plots=report_plots(report) if with_plots else [],
    )


def render_html(report: AuditResult) -> str:
    """The full report as one self-contained HTML document.

    Parameters
    ----------
    report : AuditResult
        The audit to report.

    Returns
    -------
    str
        HTML5 text with inline CSS (screen and print) and figures embedded as base64 PNG,
        readable without a network connection. Sections without data are left out.
    """
    shared = _shared(report, with_plots=True)
    sections = []
    for section in SECTIONS:
        context = section.build(shared)
        if context is not None:
            sections.append(
                {
                    "id": section.id,
                    "title": section.title,
                    "template": section.template,
                    "context": context,
                }
            )
    return (
        _environment()
        .get_template("report.html.j2")
        .render(
            summary=shared.summary,
            sections=sections,
        )
    )


def render_compact_html(report: AuditResult, top: int = 5) -> str:
    """A short HTML summary for notebooks (``AuditResult._repr_html_``).

    Parameters
    ----------
    report : AuditResult
        The audit to summarise.
    top : int
        How many fail and warn findings to show, the most severe first.

    Returns
    -------
    str
        An HTML fragment (styles scoped to it): the verdict, counts of findings, the
        parameter table, the most severe fail and warn findings, the caution and how to
        write the full report.
    """
    shared = _shared(report, with_plots=False)
    serious = report.findings_of(severity="fail") + report.findings_of(severity="warn")
    table = None if report.parameters.empty else content.parameter_table(report)
    return (
        _environment()
        .get_template("compact.html.j2")
        .render(
            summary=shared.summary,
            parameters=table,
            groups=content.finding_groups(report, limit=top, severities=("fail", "warn")),
            shown=min(top, len(serious)),
            total=len(serious),
            info=len(report.findings_of(severity="info")),
            caution=_caution(),
        )
    )
