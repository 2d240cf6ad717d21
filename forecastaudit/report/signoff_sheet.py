"""A one-page sign-off sheet (HTML and Markdown) made from a signed-off audit record.

The reports written with an audit present the audit; the ``sign-off`` command adds the
reviewer's decision to the record afterwards. This sheet is what goes beside them in a
change request: which record was reviewed (its file, and the SHA-256 of the content its
signatures cover, which signing does not change), what it found
(verdict, model, data, estimators, the findings that failed or warned), and the decision
(reviewer, date, decision, policy reference, comments), with the command that verifies
the record. It is made from the record alone, so it says nothing the record does not.

The sheet is not signed. The record's signature covers the sign-off block; the sheet
names that signed content's digest, which ``forecastaudit verify`` prints, so a reader can
check that the sheet describes the record. Every
string from the record is escaped (Jinja2 autoescape for HTML,
:func:`~forecastaudit.report.markdown.escape_markdown` for Markdown).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

__all__ = ["render_signoff_html", "render_signoff_markdown", "sheet_facts"]

SEVERITIES = ("fail", "warn", "info")

_DECISION_WORDS = {
    "approved": "Approved",
    "approved-with-conditions": "Approved with conditions",
    "rejected": "Rejected",
}


def sheet_facts(record: Mapping[str, Any], record_name: str) -> dict[str, Any]:
    """What the sheet shows, as plain strings, read from ``record``.

    Parameters
    ----------
    record : dict
        A validated audit record with a sign-off block.
    record_name : str
        The record's file name, shown on the sheet.
    """
    from forecastaudit.record.signing import signed_body_sha256

    block = record.get("signoff") or {}
    provenance = record.get("provenance") or {}
    data = provenance.get("data") or {}
    estimators = provenance.get("estimators") or {}
    policy = record.get("policy") or {}
    findings = [f for f in record.get("findings") or [] if isinstance(f, Mapping)]
    counts = {level: sum(f.get("severity") == level for f in findings) for level in SEVERITIES}
    shown = [
        {
            "severity": str(f.get("severity", "")).upper(),
            "estimator": str(f.get("estimator") or "all"),
            "kind": str(f.get("kind", "")),
            "message": str(f.get("message", "")),
        }
        for level in ("fail", "warn")
        for f in findings
        if f.get("severity") == level
    ]
    span = f"{data.get('first', '?')} to {data.get('last', '?')}" if data.get("first") else ""
    return {
        "decision": _DECISION_WORDS.get(str(block.get("decision")), str(block.get("decision"))),
        "signoff": [
            ("reviewer", block.get("reviewer", "")),
            ("date", block.get("date", "")),
            ("decision", _DECISION_WORDS.get(str(block.get("decision")), block.get("decision"))),
            ("policy reference", block.get("policy_reference", "")),
            ("comments", block.get("comments") or "none"),
        ],
        "record": [
            ("record file", record_name),
            ("signed content SHA-256", signed_body_sha256(record)),
            ("audit made", record.get("created", "")),
            ("verdict of the audit", str(record.get("verdict", "")).upper()),
            ("model", (record.get("spec") or {}).get("text", "")),
            (
                "data",
                f"{data.get('name', '')}: {data.get('n', '?')} observations"
                + (f", {span}" if span else ""),
            ),
            ("data fingerprint (SHA-256)", data.get("fingerprint_sha256", "")),
            ("production estimator", policy.get("production") or "none named"),
            (
                "estimators",
                ", ".join(
                    f"{key} ({e.get('package')} {e.get('version') or 'version unknown'})"
                    for key, e in estimators.items()
                    if isinstance(e, Mapping)
                ),
            ),
            (
                "findings",
                ", ".join(f"{counts[level]} {level}" for level in SEVERITIES),
            ),
        ],
        "findings": shown,
        "verify": f"forecastaudit verify {record_name} --trusted-key REVIEWER-PUBLIC-KEY.pem",
    }


def render_signoff_markdown(record: Mapping[str, Any], record_name: str) -> str:
    """The sign-off sheet as GitHub-flavoured Markdown."""
    from forecastaudit.report.markdown import escape_markdown as esc
    from forecastaudit.result import CAUTION

    facts = sheet_facts(record, record_name)
    lines = [f"## forecastaudit sign-off sheet: {esc(facts['decision'])}", ""]
    lines += ["### Decision", "", "| item | value |", "|---|---|"]
    lines += [f"| {esc(k)} | {esc(v)} |" for k, v in facts["signoff"]]
    lines += ["", "### The record reviewed", "", "| item | value |", "|---|---|"]
    lines += [f"| {esc(k)} | {esc(v)} |" for k, v in facts["record"]]
    if facts["findings"]:
        lines += ["", "### Findings that failed or warned", ""]
        lines += [
            f"- **{esc(f['severity'])}** {esc(f['estimator'])}, {esc(f['kind'])}: "
            f"{esc(f['message'])}"
            for f in facts["findings"]
        ]
    lines += [
        "",
        "### Checking this sheet",
        "",
        "This sheet is not signed. The record is: check its signature, and that its signed "
        "content SHA-256 is the one above, with",
        "",
        f"    {facts['verify']}",
        "",
        "### Caution",
        "",
        esc(CAUTION),
        "",
    ]
    return "\n".join(lines)


_HTML = """<!DOCTYPE html>
<html lang="en">
<head><meta charset="utf-8"><meta name="generator" content="forecastaudit">
<title>Sign-off sheet: {{ decision }} (forecastaudit)</title>
<style>
body { font-family: system-ui, sans-serif; max-width: 60rem; margin: 2rem auto; }
table { border-collapse: collapse; width: 100%; }
td, th { border: 1px solid #ccc; padding: .25rem .5rem; text-align: left; vertical-align: top; }
th[scope=row] { width: 16rem; font-weight: 600; }
td { overflow-wrap: anywhere; }
.fail { color: #8b0000; font-weight: 600; } .warn { color: #7a4b00; font-weight: 600; }
code { background: #f3f3f3; padding: .1rem .3rem; }
</style></head>
<body><main>
<h1>Sign-off sheet: {{ decision }}</h1>
<section id="decision"><h2>Decision</h2><table><tbody>
{% for k, v in signoff %}<tr><th scope="row">{{ k }}</th><td>{{ v }}</td></tr>
{% endfor %}</tbody></table></section>
<section id="record"><h2>The record reviewed</h2><table><tbody>
{% for k, v in record %}<tr><th scope="row">{{ k }}</th><td>{{ v }}</td></tr>
{% endfor %}</tbody></table></section>
{% if findings %}<section id="findings"><h2>Findings that failed or warned</h2><ul>
{% for f in findings %}<li><span class="{{ f.severity|lower }}">{{ f.severity }}</span>
{{ f.estimator }}, {{ f.kind }}: {{ f.message }}</li>
{% endfor %}</ul></section>{% endif %}
<section id="checking"><h2>Checking this sheet</h2>
<p>This sheet is not signed. The record is: check its signature, and that its signed
content SHA-256 is the one above, with <code>{{ verify }}</code>.</p></section>
<section id="caution"><h2>Caution</h2><p>{{ caution }}</p></section>
</main></body></html>
"""


def render_signoff_html(record: Mapping[str, Any], record_name: str) -> str:
    """The sign-off sheet as one self-contained HTML page (autoescaped)."""
    import jinja2

    from forecastaudit.result import CAUTION

    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined)
    return env.from_string(_HTML).render(**sheet_facts(record, record_name), caution=CAUTION)
