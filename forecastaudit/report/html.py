"""The HTML report: one self-contained file (inline CSS, images embedded as data URIs).

The page is the shared section list of :mod:`forecastaudit.report.sections`, each section
drawn by the template of its kind (:data:`TEMPLATES`); the page template writes every
section's heading and intro, so the HTML and the Markdown report cannot differ in either.

Jinja2 runs with autoescape on, so every user-supplied string (series name, estimator keys,
column names, messages) is escaped wherever it appears.

Printed, a table cell wraps only at spaces; a long unspaced run of characters in a text
cell (a hash, a module path) is marked by :func:`breakable` so that it alone may break
anywhere. A closed ``<details>`` opens for printing (``print_details.html.j2``).
"""

from __future__ import annotations

import re
from functools import lru_cache
from typing import TYPE_CHECKING

import jinja2
import markupsafe

from forecastaudit.report import content
from forecastaudit.report.sections import SECTIONS, ReportData, Section, built_sections

if TYPE_CHECKING:
    from forecastaudit.result import AuditResult

__all__ = [
    "LONG_RUN",
    "SECTIONS",
    "TEMPLATES",
    "Section",
    "breakable",
    "render_compact_html",
    "render_html",
]

# The template that draws each kind of section (its body; heading and intro are the page's).
TEMPLATES: dict[str, str] = {
    "verdict": "section_verdict.html.j2",
    "policy": "section_policy.html.j2",
    "findings": "section_findings.html.j2",
    "tables": "section_tables.html.j2",
    "plots": "section_plots.html.j2",
    "caution": "section_caution.html.j2",
}


#: An unspaced run of at least this many characters may break anywhere in a printed table
#: cell; shorter ones (words, numbers, model orders such as ARIMA(0,1,1)x(0,1,2)12) never do.
LONG_RUN = 25
_LONG_RUN = re.compile(rf"(\S{{{LONG_RUN},}})")


def breakable(text: object) -> markupsafe.Markup:
    """``text`` escaped, each unspaced run of :data:`LONG_RUN` characters or more in a
    ``<span class="long">`` (which the print style lets break anywhere)."""
    parts = _LONG_RUN.split(str(text))
    return markupsafe.Markup("").join(
        markupsafe.Markup('<span class="long">{}</span>').format(part)
        if i % 2
        else markupsafe.escape(part)
        for i, part in enumerate(parts)
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
    env.filters["breakable"] = breakable
    return env


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
    data = ReportData(report)
    sections = [
        {
            "id": built.id,
            "title": built.title,
            "intro": built.intro,
            "template": TEMPLATES[built.kind],
            "data": built.data,
        }
        for built in built_sections(data)
    ]
    return (
        _environment()
        .get_template("report.html.j2")
        .render(
            summary=data.summary,
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
    serious = report.findings_of(severity="fail") + report.findings_of(severity="warn")
    table = None if report.parameters.empty else content.parameter_table(report)
    return (
        _environment()
        .get_template("compact.html.j2")
        .render(
            summary=content.summary(report),
            parameters=table,
            groups=content.finding_groups(report, limit=top, severities=("fail", "warn")),
            shown=min(top, len(serious)),
            total=len(serious),
            info=len(report.findings_of(severity="info")),
            caution=_caution(),
        )
    )
