"""The Markdown report, for pasting into a change request.

GitHub-flavoured Markdown: pipe tables, and a collapsed ``<details>`` list for the
findings recorded for information. Tables are formatted here (no dependency on
``tabulate``). User-supplied text is escaped so that it cannot break a table or inject
markup: ``|`` and Markdown punctuation are backslash-escaped and ``<``, ``>``, ``&`` become
HTML entities.

The sections, their order, titles and intros are those of the HTML report (the shared list
in :mod:`forecastaudit.report.sections`): each section is a level-3 heading, and this
module only says how each kind of section is written in Markdown (:data:`WRITERS`).
Figures are not embedded: the plots section lists each figure's title and its alternative
text (what the figure shows, in words) and points to the HTML report for the images.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any

from forecastaudit.report import content
from forecastaudit.report.sections import ReportData, built_sections

if TYPE_CHECKING:
    from forecastaudit.report.plots import Plot
    from forecastaudit.result import AuditResult

__all__ = ["WRITERS", "escape_markdown", "markdown_table", "render_markdown"]

_ESCAPED = "\\`*[]|"


def escape_markdown(text: object) -> str:
    """One line of text safe inside Markdown, including inside a table cell.

    Newlines become spaces; ``\\ ` * [ ] |`` are backslash-escaped; ``& < >`` become
    HTML entities (so a string like ``<script>`` is shown, never interpreted).
    """
    plain = " ".join(str(text).split())
    plain = plain.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return "".join("\\" + ch if ch in _ESCAPED else ch for ch in plain)


def markdown_table(table: content.Table) -> str:
    """A :class:`~forecastaudit.report.content.Table` as a Markdown pipe table.

    The caption is a bold line above; numeric columns are right-aligned; group rows become
    a row with the group name in bold; flagged cells carry their marker, explained in the
    notes below the table.
    """
    numeric = table.numeric_columns
    header = [escape_markdown(table.corner), *(escape_markdown(c) for c in table.columns)]
    align = ["---", *("---:" if n else "---" for n in numeric)]
    lines = [f"**{escape_markdown(table.caption)}**", "", _pipe_row(header), _pipe_row(align)]
    for row in table.rows:
        if row.group:
            cells = [f"**{escape_markdown(row.header)}**", *([""] * len(table.columns))]
        else:
            cells = [escape_markdown(row.header)]
            cells += [escape_markdown(c.text) + c.mark for c in row.cells]
        lines.append(_pipe_row(cells))
    notes = table.all_notes
    if notes:
        lines.append("")
        lines += [escape_markdown(note) for note in notes]
    return "\n".join(lines).replace("\n\n\n", "\n\n")


def _pipe_row(cells: list[str]) -> str:
    return "| " + " | ".join(cells) + " |"


def _finding_line(item: content.FindingItem) -> str:
    where = escape_markdown(item.estimator)
    if item.quantity:
        where += f", {escape_markdown(item.quantity)}"
    return (
        f"- **{item.symbol} {item.word}** `{item.kind}` ({where}): {escape_markdown(item.message)}"
    )


# ---------------------------------------------------------------------- one writer per kind
def _verdict(s: content.Summary) -> list[str]:
    from forecastaudit.result import CAUTION

    return [
        f"- **Verdict:** {s.verdict_symbol} {s.verdict_word}. {escape_markdown(s.verdict_meaning)}",
        f"- **Production estimator:** {escape_markdown(s.production_text)}",
        f"- **Model:** `{s.spec}`",
        f"- **Series:** {escape_markdown(s.series_name)}, {s.n} observations, "
        f"{escape_markdown(s.date_range)}" + (f", period {s.period}" if s.period else ""),
        f"- **Findings:** {s.counts_sentence}",
        f"- **Independent engines:** {escape_markdown(s.engines_sentence)}"
        + (f": {escape_markdown(', '.join(s.engines_agreeing))}" if s.engines_agreeing else ""),
        f"- **Estimators:** {s.estimators_ok} of {s.estimators_run} produced an estimate",
        f"- **Audit finished:** {escape_markdown(s.created or 'not recorded')} (UTC)",
        "",
        f"> **Caution.** {escape_markdown(CAUTION)}",
    ]


def _policy(p: content.Policy) -> list[str]:
    lines = [
        f"- **Production estimator:** {escape_markdown(p.production_text)}",
        "- **The audit fails when:**",
        *(f"  - {escape_markdown(condition)}" for condition in p.fails_when),
        "",
    ]
    return lines + _tables(list(p.tables))


def _findings(groups: list[content.FindingGroup]) -> list[str]:
    lines: list[str] = []
    for group in groups:
        count = len(group.items)
        if group.severity == "info":
            lines += [
                "<details>",
                f"<summary>{group.heading}: {count} finding{'s' if count != 1 else ''} "
                "recorded for completeness</summary>",
                "",
            ]
            lines += [_finding_line(item) for item in group.items]
            lines += ["", "</details>", ""]
            continue
        lines += [f"#### {group.heading} ({count})", ""]
        for item in group.items:
            lines.append(_finding_line(item))
            lines.append(f"  - *{escape_markdown(item.explanation)}*")
        lines.append("")
    return lines


def _tables(tables: list[content.Table]) -> list[str]:
    lines: list[str] = []
    for table in tables:
        lines += [markdown_table(table), ""]
    return lines


def _plots(plots: list[Plot]) -> list[str]:
    lines = ["The figures are embedded in the HTML report only; here is what each one shows.", ""]
    lines += [f"- **{escape_markdown(p.title)}.** {escape_markdown(p.alt)}" for p in plots]
    return lines


def _caution(text: str) -> list[str]:
    return [escape_markdown(text)]


# How each kind of section is written (heading and intro are written by render_markdown).
WRITERS: dict[str, Callable[[Any], list[str]]] = {
    "verdict": _verdict,
    "policy": _policy,
    "findings": _findings,
    "tables": _tables,
    "plots": _plots,
    "caution": _caution,
}


def render_markdown(report: AuditResult) -> str:
    """The report as GitHub-flavoured Markdown.

    Parameters
    ----------
    report : AuditResult
        The audit to report.

    Returns
    -------
    str
        A title line, then the sections of the HTML report in the same order, each a
        level-3 heading with its intro: verdict, findings (fail and warn in full, info in a
        collapsed list), the tables the audit has data for, the figures (title and
        description; the images are in the HTML report), the policy, tolerances,
        provenance and the caution.
    """
    data = ReportData(report)
    s = data.summary
    lines = [
        f"## forecastaudit: {s.verdict_symbol} {s.verdict_word}: "
        f"{escape_markdown(s.spec)} on {escape_markdown(s.series_name)}",
        "",
    ]
    for built in built_sections(data):
        lines += [f"### {escape_markdown(built.title)}", ""]
        if built.intro:
            lines += [escape_markdown(built.intro), ""]
        lines += WRITERS[built.kind](built.data)
        lines.append("")
    text = "\n".join(lines)
    while "\n\n\n" in text:
        text = text.replace("\n\n\n", "\n\n")
    return text.rstrip("\n") + "\n"
