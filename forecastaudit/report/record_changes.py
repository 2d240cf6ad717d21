"""HTML and Markdown of the changes between two audit records (:class:`RecordChanges`).

The summary comes first (the verdict, the data and specification, the audits' verdicts,
how many quantities moved beyond tolerance), then the changes of setting, then the table of
quantities, those beyond tolerance first. Every string is escaped (Jinja2 autoescape for
HTML, :func:`~forecastaudit.report.markdown.escape_markdown` for Markdown).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from forecastaudit.report.content import format_number

if TYPE_CHECKING:
    from forecastaudit.record.changes import RecordChanges

__all__ = ["render_changes_html", "render_changes_markdown", "summary_lines"]

_HEADINGS = ("estimator", "quantity", "old", "new", "change", "tolerance", "beyond")


def summary_lines(changes: RecordChanges) -> list[str]:
    """The summary, one sentence per line, in reading order."""
    beyond = int(changes.table["beyond"].sum()) if not changes.table.empty else 0
    return [
        f"Changes between the records: {changes.verdict}.",
        f"{beyond} of {len(changes.table)} changed quantities are beyond tolerance.",
        "Data: the same (equal fingerprints)."
        if changes.same_data
        else "Data: DIFFERENT (the fingerprints differ): changes mix data and numerics.",
        "Specification: the same."
        if changes.same_spec
        else "Specification: DIFFERENT; quantities are compared by name only.",
        f"Verdict of the audits: {changes.old_verdict} -> {changes.new_verdict}.",
        *_signoff_line(changes),
    ]


def _signoff_line(changes: RecordChanges) -> list[str]:
    block = changes.old_signoff
    if not block:
        return ["The old record has no sign-off."]
    return [
        f"The old record was signed off: {block.get('decision')} by {block.get('reviewer')} "
        f"on {block.get('date')} under {block.get('policy_reference')}."
    ]


def _rows(changes: RecordChanges) -> list[list[str]]:
    table = changes.table.sort_values("beyond", ascending=False, kind="stable")
    out = []
    for _, row in table.iterrows():
        out.append(
            [
                str(row["estimator"]),
                str(row["quantity"]),
                format_number(row["old"]),
                format_number(row["new"]),
                format_number(row["change"]),
                format_number(row["tolerance"]),
                "BEYOND" if row["beyond"] else "within",
            ]
        )
    return out


def render_changes_markdown(changes: RecordChanges) -> str:
    """The changes as GitHub-flavoured Markdown."""
    from forecastaudit.report.markdown import escape_markdown
    from forecastaudit.result import CAUTION

    lines = ["## forecastaudit: changes between two audit records", ""]
    lines += [f"- {escape_markdown(s)}" for s in summary_lines(changes)]
    if changes.changes:
        lines += ["", "### Changes of setting", ""]
        lines += [f"- {escape_markdown(c)}" for c in changes.changes]
    rows = _rows(changes)
    if rows:
        lines += ["", "### Quantities that changed", ""]
        lines.append("| " + " | ".join(_HEADINGS) + " |")
        lines.append("|" + "|".join(["---", "---"] + ["---:"] * 4 + ["---"]) + "|")
        lines += ["| " + " | ".join(escape_markdown(c) for c in r) + " |" for r in rows]
    lines += ["", "### Caution", "", escape_markdown(CAUTION), ""]
    return "\n".join(lines)


_HTML = """<!DOCTYPE html>
<html lang="en">
<head><meta charset="utf-8"><meta name="generator" content="forecastaudit">
<title>Changes between two audit records: {{ verdict }} (forecastaudit)</title>
<style>
body { font-family: system-ui, sans-serif; max-width: 70rem; margin: 2rem auto; }
table { border-collapse: collapse; } td, th { border: 1px solid #ccc; padding: .2rem .5rem; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
tr.beyond td { background: #fde8e8; }
</style></head>
<body><main>
<h1>Changes between two audit records</h1>
<section id="summary"><h2>Summary</h2><ul>
{% for line in summary %}<li>{{ line }}</li>
{% endfor %}</ul></section>
{% if settings %}<section id="settings"><h2>Changes of setting</h2><ul>
{% for line in settings %}<li>{{ line }}</li>
{% endfor %}</ul></section>{% endif %}
{% if rows %}<section id="quantities"><h2>Quantities that changed</h2>
<table><thead><tr>{% for h in headings %}<th scope="col">{{ h }}</th>{% endfor %}</tr></thead>
<tbody>
{% for r in rows %}<tr{% if r[6] == "BEYOND" %} class="beyond"{% endif %}>
<td>{{ r[0] }}</td><td>{{ r[1] }}</td>
{% for c in r[2:6] %}<td class="num">{{ c }}</td>{% endfor %}<td>{{ r[6] }}</td></tr>
{% endfor %}</tbody></table></section>{% endif %}
<section id="caution"><h2>Caution</h2><p>{{ caution }}</p></section>
</main></body></html>
"""


def render_changes_html(changes: RecordChanges) -> str:
    """The changes as one self-contained HTML page (autoescaped)."""
    import jinja2

    from forecastaudit.result import CAUTION

    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined)
    context: dict[str, Any] = {
        "verdict": changes.verdict,
        "summary": summary_lines(changes),
        "settings": list(changes.changes),
        "rows": _rows(changes),
        "headings": _HEADINGS,
        "caution": CAUTION,
    }
    return env.from_string(_HTML).render(**context)
