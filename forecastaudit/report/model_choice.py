"""The model-choice report: does the choice between candidate models depend on the library?

One self-contained HTML page (inline CSS, no script) and a Markdown version of a
:class:`~forecastaudit.model_choice.ModelChoiceResult`: the answer first, then the ranks by
holdout MASE per implementation, the scores behind them, the reference AICc ranks within
each group of comparable models, the findings, and the caution. The tables are the same
:class:`~forecastaudit.report.content.Table` data as the audit report's, escaped by each
renderer for its own format.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from forecastaudit.report import content
from forecastaudit.report.markdown import escape_markdown, markdown_table

if TYPE_CHECKING:
    from forecastaudit.model_choice import ModelChoiceResult

__all__ = ["model_choice_tables", "render_model_choice_html", "render_model_choice_markdown"]


def _headline(result: ModelChoiceResult) -> tuple[str, str]:
    """The answer in a few words and in a sentence."""
    if result.stable:
        return (
            "Same ranking in every implementation",
            "Every implementation ranks the candidate models the same way by holdout MASE, "
            "so the choice of model does not depend on the library.",
        )
    return (
        "Ranking differs between implementations",
        "The implementations rank the candidate models differently by holdout MASE; the "
        "findings say whether the differences exceed the accuracy tolerance.",
    )


def model_choice_tables(result: ModelChoiceResult) -> list[content.Table]:
    """The tables of the report: MASE ranks, scores, reference AICc ranks."""
    models = [str(s) for s in result.specs]
    tables = []
    ranks = result.mase_ranks.reindex(columns=[m for m in models if m in result.mase_ranks])
    if not ranks.empty:
        tables.append(
            content.frame_table(
                ranks,
                id="model-choice-mase-ranks",
                caption="Rank of each model by pooled holdout MASE, per implementation",
                corner="estimator",
                columns=[(m, m, "count") for m in ranks.columns],
                notes=(
                    f"Holdout of {result.holdout} steps at {result.origins} origin(s); rank 1 "
                    "is the most accurate.",
                ),
            )
        )
    scores = result.scores.copy()
    if not scores.empty:
        scores.index = [
            f"{m} / {e}" for m, e in zip(scores["model"], scores["estimator"], strict=True)
        ]
        tables += content.fit_for_print(
            content.frame_table(
                scores,
                id="model-choice-scores",
                caption="Holdout accuracy and reference AICc of every model and implementation",
                corner="model / estimator",
                columns=[
                    ("status", "status", "text"),
                    ("mase", "MASE", "column"),
                    ("rmse", "RMSE", "column"),
                    ("mae", "MAE", "column"),
                    ("aicc", "reference AICc", "criterion"),
                    ("d", "d", "count"),
                    ("D", "D", "count"),
                ],
            )
        )
    aicc = result.aicc_ranks.reindex(columns=[m for m in models if m in result.aicc_ranks])
    if not aicc.empty and aicc.notna().any().any():
        tables.append(
            content.frame_table(
                aicc,
                id="model-choice-aicc-ranks",
                caption="Rank by reference AICc among models with the same differencing and "
                "transform",
                corner="estimator",
                columns=[(m, m, "count") for m in aicc.columns],
                notes=(
                    "Likelihoods of differently differenced or transformed series do not "
                    "compare, so those models have no rank here (a dash).",
                ),
            )
        )
    return tables


def _findings(result: ModelChoiceResult) -> list[content.FindingGroup]:
    """The findings grouped by severity, most severe first."""
    groups = []
    for severity in ("fail", "warn", "info"):
        found = [f for f in result.findings if f.severity == severity]
        if found:
            label = content.SEVERITY_LABELS[severity]
            groups.append(
                content.FindingGroup(
                    severity=severity,
                    heading=label["heading"],
                    word=label["word"],
                    symbol=label["symbol"],
                    items=tuple(content._item(f) for f in found),
                )
            )
    return groups


def _context(result: ModelChoiceResult) -> dict[str, Any]:
    from forecastaudit.result import CAUTION

    title, sentence = _headline(result)
    return {
        "title": title,
        "sentence": sentence,
        "stable": result.stable,
        "models": [str(s) for s in result.specs],
        "holdout": result.holdout,
        "origins": result.origins,
        "preferred": dict(result.preferred),
        "tables": model_choice_tables(result),
        "groups": _findings(result),
        "data": _findings(result),
        "caution": CAUTION,
    }


def render_model_choice_html(result: ModelChoiceResult) -> str:
    """The model-choice report as one self-contained HTML document (autoescaped)."""
    from forecastaudit.report.html import _environment

    return _environment().get_template("model_choice.html.j2").render(**_context(result))


def render_model_choice_markdown(result: ModelChoiceResult) -> str:
    """The model-choice report in GitHub-flavoured Markdown, for a change request."""
    ctx = _context(result)
    lines = [
        f"## Model choice: {escape_markdown(ctx['title'])}",
        "",
        escape_markdown(ctx["sentence"]),
        "",
        f"- Models: {', '.join('`' + escape_markdown(m) + '`' for m in ctx['models'])}",
        f"- Holdout: {ctx['holdout']} steps at {ctx['origins']} origin(s)",
    ]
    if ctx["preferred"]:
        preferred = "; ".join(
            f"{escape_markdown(k)}: `{escape_markdown(v)}`" for k, v in ctx["preferred"].items()
        )
        lines.append(f"- Most accurate per implementation: {preferred}")
    lines.append("")
    for table in ctx["tables"]:
        lines += [markdown_table(table), ""]
    lines.append("### Findings")
    lines.append("")
    for group in ctx["groups"]:
        lines.append(f"**{escape_markdown(group.heading)} ({len(group.items)})**")
        lines.append("")
        for item in group.items:
            lines.append(
                f"- **{item.symbol} {item.word}** `{item.kind}`: {escape_markdown(item.message)}"
            )
        lines.append("")
    lines += ["### Caution", "", escape_markdown(ctx["caution"]), ""]
    return "\n".join(lines)
