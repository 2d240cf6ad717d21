"""The Markdown report, for pasting into a change request.

GitHub-flavoured Markdown: pipe tables, and a collapsed ``<details>`` list for the
findings recorded for information. Tables are formatted here (no dependency on
``tabulate``). User-supplied text is escaped so that it cannot break a table or inject
markup: ``|`` and Markdown punctuation are backslash-escaped and ``<``, ``>``, ``&`` become
HTML entities.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from forecastaudit.report import content

if TYPE_CHECKING:
    from forecastaudit.result import AuditResult

__all__ = ["escape_markdown", "markdown_table", "render_markdown"]

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


def _findings(report: AuditResult) -> list[str]:
    groups = content.finding_groups(report)
    if not groups:
        return ["No findings."]
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
        lines += [f"### {group.heading} ({count})", ""]
        for item in group.items:
            lines.append(_finding_line(item))
            lines.append(f"  - *{escape_markdown(item.explanation)}*")
        lines.append("")
    return lines


def render_markdown(report: AuditResult) -> str:
    """The report as GitHub-flavoured Markdown.

    Parameters
    ----------
    report : AuditResult
        The audit to report.

    Returns
    -------
    str
        Verdict, findings (fail and warn in full, info in a collapsed list), the parameter
        and likelihood tables, the estimators, forecasts, residual and holdout tables when
        the audit has them, the tolerances, a provenance summary and the caution.
    """
    from forecastaudit.record.document import provenance
    from forecastaudit.result import CAUTION

    s = content.summary(report)
    facts = provenance(report)
    lines = [
        f"## forecastaudit: {s.verdict_symbol} {s.verdict_word}: "
        f"{escape_markdown(s.spec)} on {escape_markdown(s.series_name)}",
        "",
        f"- **Verdict:** {s.verdict_symbol} {s.verdict_word}",
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
        "",
        "### Findings" if report.findings else "",
        "",
    ]
    lines += _findings(report)
    tables: list[content.Table | None] = [
        None if report.parameters.empty else content.parameter_table(report),
        None if report.likelihoods.empty else content.likelihood_table(report),
        content.estimator_table(report),
        content.forecast_table(report),
        content.residual_table(report),
        *content.holdout_tables(report),
        *content.order_search_tables(report),
        content.tolerance_table(report),
    ]
    for table in tables:
        if table is not None:
            lines += ["", markdown_table(table), ""]
    data = facts.get("data", {})
    packages = ", ".join(
        f"{escape_markdown(name)} {escape_markdown(version or 'not installed')}"
        for name, version in facts.get("packages", {}).items()
    )
    lines += [
        "",
        "### Provenance",
        "",
        f"- forecastaudit {escape_markdown(facts.get('forecastaudit'))}, Python "
        f"{escape_markdown(facts.get('python'))} on {escape_markdown(facts.get('platform'))}",
        f"- Packages: {packages}",
        f"- Data: {escape_markdown(data.get('name'))}, n = {data.get('n')}, "
        f"{escape_markdown(data.get('first'))} to {escape_markdown(data.get('last'))}, "
        f"SHA-256 `{data.get('fingerprint_sha256')}`",
        "- The audit record (JSON) holds every resolved option, warning and native value.",
        "",
        "### Caution",
        "",
        escape_markdown(CAUTION),
        "",
    ]
    text = "\n".join(lines)
    while "\n\n\n" in text:
        text = text.replace("\n\n\n", "\n\n")
    return text
