"""The sections of the report: one list, read by the HTML and the Markdown renderer alike.

Each :class:`Section` says what the section is (its anchor, title and optional intro), what
kind of content it holds and how to build that content from an audit. The builders return
format-free data (a :class:`~forecastaudit.report.content.Summary`, the
:class:`~forecastaudit.report.content.Policy`, finding groups,
:class:`~forecastaudit.report.content.Table` objects, :class:`~forecastaudit.report.plots.Plot`
objects, the caution text) or None when the audit holds no data for the section, which
then is left out of every format. Each renderer maps the six kinds to its own markup, so
both formats show the same sections, in the same order, under the same titles and intros.
Adding a section is one entry in :data:`SECTIONS`; adding a kind means teaching each
renderer to draw it (the tests check that every kind has a drawing in every format).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING, Any, Literal

from forecastaudit.report import content

if TYPE_CHECKING:
    from forecastaudit.report.plots import Plot
    from forecastaudit.result import AuditResult

__all__ = [
    "KINDS",
    "SECTIONS",
    "BuiltSection",
    "ReportData",
    "Section",
    "SectionKind",
    "built_sections",
]

SectionKind = Literal["verdict", "policy", "findings", "tables", "plots", "caution"]
KINDS: tuple[SectionKind, ...] = ("verdict", "policy", "findings", "tables", "plots", "caution")


class ReportData:
    """What several sections use, computed at most once per rendering.

    The figures are drawn on first use only: a rendering that never reaches the plots
    section (or a caller that builds only some sections) does not pay for matplotlib.
    """

    def __init__(self, report: AuditResult) -> None:
        self.report = report

    @cached_property
    def summary(self) -> content.Summary:
        """The verdict block."""
        return content.summary(self.report)

    @cached_property
    def provenance(self) -> dict[str, Any]:
        """Versions, platform and data fingerprint, as written into the record."""
        from forecastaudit.record.document import provenance

        return provenance(self.report)

    @cached_property
    def plots(self) -> list[Plot]:
        """Every figure the audit has data for, in reading order."""
        from forecastaudit.report.plots import report_plots

        return report_plots(self.report)


Builder = Callable[[ReportData], Any]


@dataclass(frozen=True)
class Section:
    """One section of the report.

    Attributes
    ----------
    id : str
        Stable anchor (HTML id, test hook).
    title : str
        The heading, the same in every format.
    kind : {"verdict", "policy", "findings", "tables", "plots", "caution"}
        What :attr:`build` returns, and so how each renderer draws it: a
        :class:`~forecastaudit.report.content.Summary`; a
        :class:`~forecastaudit.report.content.Policy`; a list of
        :class:`~forecastaudit.report.content.FindingGroup`; a list of
        :class:`~forecastaudit.report.content.Table`; a list of
        :class:`~forecastaudit.report.plots.Plot`; the caution text.
    build : callable
        ``build(data: ReportData)`` returns the section's content, or None when the audit
        holds no data for it (the section is then left out).
    intro : str
        One or two plain sentences printed under the heading (unescaped here; every
        renderer escapes them), or an empty string.
    """

    id: str
    title: str
    kind: SectionKind
    build: Builder
    intro: str = ""


@dataclass(frozen=True)
class BuiltSection:
    """A section with its content, ready for a renderer."""

    section: Section
    data: Any

    @property
    def id(self) -> str:
        return self.section.id

    @property
    def title(self) -> str:
        return self.section.title

    @property
    def intro(self) -> str:
        return self.section.intro

    @property
    def kind(self) -> SectionKind:
        return self.section.kind


# ---------------------------------------------------------------------- builders
def _verdict(data: ReportData) -> content.Summary:
    return data.summary


def _signoff(data: ReportData) -> list[content.Table] | None:
    return _kept(content.signoff_table(data.report))


def _findings(data: ReportData) -> list[content.FindingGroup] | None:
    return content.finding_groups(data.report) or None


def _kept(*tables: content.Table | None) -> list[content.Table] | None:
    return [t for t in tables if t is not None] or None


def _parameters(data: ReportData) -> list[content.Table] | None:
    if data.report.parameters.empty:
        return None
    return _kept(content.parameter_table(data.report))


def _likelihoods(data: ReportData) -> list[content.Table] | None:
    if data.report.likelihoods.empty:
        return None
    return _kept(content.likelihood_table(data.report))


def _estimators(data: ReportData) -> list[content.Table] | None:
    return _kept(content.estimator_table(data.report))


def _forecasts(data: ReportData) -> list[content.Table] | None:
    return _kept(
        content.forecast_values_table(data.report),
        content.forecast_table(data.report),
        content.future_regressors_table(data.report),
    )


def _residuals(data: ReportData) -> list[content.Table] | None:
    return _kept(content.residual_table(data.report))


def _holdout(data: ReportData) -> list[content.Table] | None:
    return _kept(*content.holdout_tables(data.report))


def _order_search(data: ReportData) -> list[content.Table] | None:
    return _kept(*content.order_search_tables(data.report))


def _plots(data: ReportData) -> list[Plot] | None:
    return list(data.plots) or None


def _policy(data: ReportData) -> content.Policy:
    return content.policy(data.report)


def _tolerances(data: ReportData) -> list[content.Table] | None:
    return _kept(content.tolerance_table(data.report))


def _provenance(data: ReportData) -> list[content.Table] | None:
    return _kept(
        content.provenance_table(data.report, data.provenance),
        content.package_table(data.provenance),
    )


def _caution(data: ReportData) -> str:
    from forecastaudit.result import CAUTION

    return CAUTION


SECTIONS: tuple[Section, ...] = (
    Section("verdict", "Verdict", "verdict", _verdict),
    Section(
        "signoff",
        "Sign-off",
        "tables",
        _signoff,
        intro=(
            "The reviewer's decision as written into the record. A signature on the record "
            "covers this block; the report itself is not signed."
        ),
    ),
    Section(
        "findings",
        "Findings",
        "findings",
        _findings,
        intro=(
            "Every disagreement, event and caveat, most severe first. FAIL findings make the "
            "audit fail; WARN asks the reviewer to look; INFO is recorded for completeness."
        ),
    ),
    Section(
        "parameters",
        "Parameters",
        "tables",
        _parameters,
        intro=(
            "Every estimate on the canonical convention, beside the reference optimum and its "
            "standard error (from the reference likelihood's Hessian). An estimator that "
            "produced nothing shows dashes."
        ),
    ),
    Section(
        "likelihoods",
        "Likelihoods and criteria",
        "tables",
        _likelihoods,
        intro=(
            "Each estimator's own numbers beside the same quantities recomputed under the "
            "reference likelihood, so that differences of definition are not mistaken for "
            "differences of fit."
        ),
    ),
    Section("estimators", "Estimators", "tables", _estimators),
    Section("forecasts", "Forecasts", "tables", _forecasts),
    Section("residuals", "Residual checks", "tables", _residuals),
    Section("holdout", "Holdout accuracy", "tables", _holdout),
    Section("order-search", "Order searches", "tables", _order_search),
    Section("plots", "Plots", "plots", _plots),
    Section(
        "policy",
        "Policy",
        "policy",
        _policy,
        intro=(
            "What the verdict is about and what makes the audit fail. A production estimate "
            "beyond tolerance of the reference optimum fails only when the difference is also "
            "material: when it moves the forecasts, their intervals or their accuracy by more "
            "than the thresholds below."
        ),
    ),
    Section(
        "tolerances",
        "Tolerances",
        "tables",
        _tolerances,
        intro="Every tolerance can be overridden by the caller and is written into the record.",
    ),
    Section(
        "provenance",
        "Provenance",
        "tables",
        _provenance,
        intro=(
            "The audit record (JSON) holds the full detail: every resolved option, warning "
            "and native value."
        ),
    ),
    Section("caution", "Caution", "caution", _caution),
)


def built_sections(
    report: AuditResult | ReportData, sections: tuple[Section, ...] = SECTIONS
) -> list[BuiltSection]:
    """The sections the audit holds data for, in order, each with its content.

    Parameters
    ----------
    report : AuditResult or ReportData
        The audit (or its shared data, when the caller needs the summary as well).
    sections : tuple of Section
        The section list; :data:`SECTIONS` unless a caller wants a subset.
    """
    data = report if isinstance(report, ReportData) else ReportData(report)
    built = []
    for section in sections:
        value = section.build(data)
        if value is not None:
            built.append(BuiltSection(section, value))
    return built
