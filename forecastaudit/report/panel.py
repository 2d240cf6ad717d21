"""The panel report: the summary and the causes first, then plots, then every series.

One self-contained HTML file (inline CSS and script, figures as data URIs) and a Markdown
version. The HTML table of series sorts by any column (click its heading) and filters by
verdict and by text, in the page, with no server. The ids of failing series link to their
own reports, written beside the panel report.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from forecastaudit.report import content
from forecastaudit.report.markdown import escape_markdown
from forecastaudit.report.plots import Plot, _new_figure, _style_axes, figure_to_png

if TYPE_CHECKING:
    from forecastaudit.panel.result import PanelResult

__all__ = ["panel_plots", "render_panel_compact", "render_panel_html", "render_panel_markdown"]

VERDICT_WORDS = {
    "fail": "Fail",
    "not-audited": "Not audited",
    "pass-with-notes": "Pass with notes",
    "pass": "Pass",
}
VERDICT_COLOURS = {
    "fail": "#9b1c1c",
    "not-audited": "#566173",
    "pass-with-notes": "#a06f00",
    "pass": "#1b6b39",
}

#: Columns of the series table: (summary column, heading, kind of value).
TABLE_COLUMNS: tuple[tuple[str, str, str], ...] = (
    ("verdict", "Verdict", "text"),
    ("cause", "Cause", "text"),
    ("cause_estimator", "Of", "text"),
    ("production_gap", "Production log-likelihood gap", "number"),
    ("production_forecast_se", "Production forecast difference (SE)", "number"),
    ("production_material", "Material", "text"),
    ("engines_agreeing", "Engines agreeing", "count"),
    ("fail", "Fail", "count"),
    ("warn", "Warn", "count"),
    ("n", "n", "count"),
    ("seconds", "Seconds", "seconds"),
    ("error", "Why not audited", "text"),
)

#: At most this many failing series get a forecast plot.
WORST_PLOTTED = 4


@dataclass
class PanelRow:
    """One series in the table: its id, link and cells (text, sort key, numeric?)."""

    id: str
    verdict: str
    link: str | None
    cells: list[tuple[str, str, bool]]


def _cell(value: Any, kind: str) -> tuple[str, str, bool]:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return ("", "", kind != "text")
    if kind == "count":
        return (str(int(value)), f"{float(value):.12g}", True)
    if kind == "number":
        # Three significant digits: a gap of 0.0000646 against a tolerance of 0.01 is
        # read for its size, not its sixth digit (the record keeps every digit).
        return (content.significant(float(value), 3), f"{float(value):.12g}", True)
    if kind == "seconds":
        return (content.format_number(value, "seconds"), f"{float(value):.12g}", True)
    if isinstance(value, bool | np.bool_):
        text = "yes" if value else "no"
        return (text, text, False)
    text = str(value)
    return (VERDICT_WORDS.get(text, text), text, False)


def panel_rows(result: PanelResult) -> list[PanelRow]:
    """The series table's rows, in the summary's order."""
    rows = []
    for series_id, row in result.summary.iterrows():
        cells = [_cell(row.get(column), kind) for column, _, kind in TABLE_COLUMNS]
        link = row.get("report") if isinstance(row.get("report"), str) else None
        rows.append(PanelRow(str(series_id), str(row["verdict"]), link, cells))
    return rows


# ---------------------------------------------------------------------- plots
def _verdict_plot(result: PanelResult) -> Plot:
    counts = result.counts
    figure = _new_figure(6.5, 2.2)
    ax = figure.add_subplot()
    names = list(counts)[::-1]
    values = [counts[n] for n in names]
    bars = ax.barh([VERDICT_WORDS[n] for n in names], values,
                   color=[VERDICT_COLOURS[n] for n in names])  # fmt: skip
    for bar, value in zip(bars, values, strict=True):
        ax.annotate(str(value), (bar.get_width(), bar.get_y() + bar.get_height() / 2),
                    xytext=(4, 0), textcoords="offset points", va="center")  # fmt: skip
    ax.set_xlabel("series")
    ax.set_xlim(0, max([*values, 1]) * 1.12)
    _style_axes(ax)
    total = sum(values)
    return Plot(
        "panel-verdicts",
        "Verdicts",
        f"Bar chart of verdicts over {total} series: "
        + ", ".join(f"{counts[n]} {VERDICT_WORDS[n].lower()}" for n in counts),
        "Series per verdict under the stated policy.",
        figure_to_png(figure),
    )


def _engine_values(result: PanelResult, measure: str) -> dict[str, np.ndarray]:
    """Per estimator, the measure over the audited series (finite values only)."""
    return {k: np.asarray(v) for k, v in result.engine_measures(measure).items()}


def _distribution_plot(result: PanelResult) -> Plot | None:
    gaps = _engine_values(result, "gap")
    differences = _engine_values(result, "forecast_se")
    if not gaps and not differences:
        return None
    keys = sorted(set(gaps) | set(differences))
    figure = _new_figure(7.5, 0.9 + 0.55 * len(keys) * 2)
    axes = figure.subplots(2, 1)
    rng = np.random.default_rng(0)  # vertical jitter of the dots only
    for ax, values, label, floor in (
        (axes[0], gaps, "log-likelihood gap to the best (log scale)", 1e-6),
        (axes[1], differences, "largest forecast difference, in forecast SEs (log scale)",
         1e-4),
    ):  # fmt: skip
        for row, key in enumerate(keys):
            data = np.maximum(values.get(key, np.array([])), floor)
            if data.size:
                ax.scatter(data, row + rng.uniform(-0.18, 0.18, data.size), s=9, alpha=0.55,
                           color="#30506e", linewidths=0)  # fmt: skip
                ax.plot([np.median(data)] * 2, [row - 0.3, row + 0.3], color="#9b1c1c", lw=2)
        ax.set_yticks(range(len(keys)), keys)
        ax.set_xscale("log")
        ax.set_xlabel(label)
        ax.set_ylim(-0.6, len(keys) - 0.4)
        _style_axes(ax)
    return Plot(
        "panel-distributions",
        "Gaps and forecast differences per estimator",
        "Dot plots, one row per estimator: the log-likelihood gap to the best estimate and "
        "the largest forecast difference from the forecast at the optimum, one dot per series.",
        "One dot per series; the red bar is the median. Gaps under the reference likelihood "
        "(below 1e-6 drawn at 1e-6); largest point-forecast differences from the forecast at "
        "the optimum, in the reference forecast standard errors (below 1e-4 drawn at 1e-4).",
        figure_to_png(figure),
    )


def _worst_plot(result: PanelResult) -> Plot | None:
    sketches = [(sid, e["sketch"]) for sid, e in result.sketches().items() if e.get("sketch")][
        :WORST_PLOTTED
    ]
    if not sketches:
        return None
    figure = _new_figure(7.5, 2.4 * len(sketches))
    axes = np.atleast_1d(figure.subplots(len(sketches), 1))
    for ax, (series_id, data) in zip(axes, sketches, strict=True):
        history = np.asarray(data["values"], dtype=float)
        x = np.arange(history.size)
        ax.plot(x, history, color="#1d2733", lw=1.3, label="observed")
        for position, (key, fc) in enumerate(sorted(data["forecasts"].items())):
            median = np.asarray(fc["median"], dtype=float)
            future = history.size + np.arange(median.size)
            style = {"color": "#9b1c1c", "lw": 2.0} if key == "reference" else {"lw": 1.2}
            if key != "reference":
                style["ls"] = ("--", ":", "-.")[position % 3]
            ax.plot(future, median, label=key, **style)
            if key == "reference" and fc.get("lower") is not None:
                ax.fill_between(future, fc["lower"], fc["upper"], color="#9b1c1c", alpha=0.12,
                                lw=0, label=f"reference {fc['level']:g}% interval")  # fmt: skip
        labels = data.get("labels") or []
        if labels:
            ticks = list(range(0, len(labels), 12))
            ax.set_xticks(ticks, [labels[i] for i in ticks])
        ax.set_title(str(series_id), loc="left", fontsize=10)
        ax.legend(fontsize=7, loc="lower right", bbox_to_anchor=(1.0, 1.0), ncol=4, frameon=False)
        _style_axes(ax)
    return Plot(
        "panel-worst",
        "Forecasts of the most serious series",
        "Line charts of the last observations and every estimator's forecast for the "
        f"{len(sketches)} most serious failing series.",
        "The end of each series and the point forecasts of every estimator; the red line and "
        "band are the forecast at the reference optimum and its widest interval.",
        figure_to_png(figure),
    )


def panel_plots(result: PanelResult) -> list[Plot]:
    """The panel report's figures."""
    plots = [_verdict_plot(result), _distribution_plot(result), _worst_plot(result)]
    return [p for p in plots if p is not None]


# ---------------------------------------------------------------------- pages
def _context(result: PanelResult) -> dict[str, Any]:
    from forecastaudit.result import CAUTION

    settings = result.settings
    counts = result.counts
    return {
        "title": f"Panel audit of {len(result.summary)} series",
        "passed": result.passed,
        "verdict": result.verdict,
        "counts": counts,
        "words": VERDICT_WORDS,
        "sentences": result.cause_sentences(),
        "columns": [heading for _, heading, _ in TABLE_COLUMNS],
        "numeric": [kind != "text" for _, _, kind in TABLE_COLUMNS],
        "rows": panel_rows(result),
        "settings": [
            ("Production estimator", settings.get("production") or "every estimator"),
            ("Estimators", ", ".join(settings.get("estimators") or [])),
            ("Models", ", ".join(sorted(set(result.summary["model"].dropna().astype(str)))) or "-"),
            ("Holdout", settings.get("holdout") or "none"),
            ("Interval levels", ", ".join(f"{v:g}%" for v in settings.get("levels") or [])),
            (
                "Ran on",
                f"{result.backend}, {result.workers} at once"
                + (
                    f"; {result.resumed} series taken from an earlier run" if result.resumed else ""
                ),
            ),
            ("forecastaudit", settings.get("forecastaudit")),
        ],
        "caution": CAUTION,
    }


def render_panel_html(result: PanelResult) -> str:
    """The panel report as one self-contained HTML document."""
    from forecastaudit.report.html import _environment

    return (
        _environment()
        .get_template("panel.html.j2")
        .render(plots=panel_plots(result), **_context(result))
    )


def render_panel_compact(result: PanelResult, top: int = 10) -> str:
    """A short HTML summary for notebooks."""
    from forecastaudit.report.html import _environment

    context = _context(result)
    context["rows"] = [r for r in context["rows"] if r.verdict in {"fail", "not-audited"}][:top]
    return _environment().get_template("panel_compact.html.j2").render(**context)


def render_panel_markdown(result: PanelResult) -> str:
    """The panel report in Markdown (GitHub-flavoured tables)."""
    c = _context(result)
    lines = [f"# {c['title']}", ""]
    verdict = c["verdict"].upper()
    lines.append(
        f"**{verdict}**: "
        + ", ".join(f"{n} {c['words'][v].lower()}" for v, n in c["counts"].items())
    )
    lines += ["", "## Causes across the panel", ""]
    lines += [f"- {escape_markdown(s)}" for s in c["sentences"]] or ["- No findings to count."]
    lines += ["", "## Settings", ""]
    lines += [f"- {name}: {escape_markdown(value)}" for name, value in c["settings"]]
    lines += ["", "## Series", "", "Most serious first."]
    header = ["Series", *c["columns"]]
    rule = "|" + "|".join("---:" if n else "---" for n in [False, *c["numeric"]]) + "|"
    lines += ["", "| " + " | ".join(header) + " |", rule]
    for row in c["rows"]:
        name = escape_markdown(row.id)
        if row.link:
            name = f"[{name}]({row.link})"
        cells = [escape_markdown(text) for text, _, _ in row.cells]
        lines.append("| " + " | ".join([name, *cells]) + " |")
    lines += ["", "## Caution", "", c["caution"], ""]
    return "\n".join(lines)
