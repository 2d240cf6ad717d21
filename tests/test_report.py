"""The HTML and Markdown reports and their figures, rendered from one demo audit.

One audit (two estimators of independent engines) is shared by every test in the module;
variations (a hostile series name, an extra finding, changed parameters) are copies of it.
"""

from __future__ import annotations

import base64
import dataclasses
import html as html_text
import re
import shutil
import subprocess
import tempfile
from collections.abc import Callable
from pathlib import Path

import markupsafe
import numpy as np
import pytest

import forecastaudit as fa
from forecastaudit.diagnosis.findings import Finding
from forecastaudit.report import content, plots, render_compact_html, render_html
from forecastaudit.report.html import SECTIONS, TEMPLATES
from forecastaudit.report.markdown import WRITERS, escape_markdown, render_markdown
from forecastaudit.report.sections import KINDS
from forecastaudit.result import CAUTION

VERDICT_WORD = {k: v["word"] for k, v in content.VERDICT_LABELS.items()}

HOSTILE = '<script>alert(1)</script>&"'
CHROMIUM = "/usr/bin/chromium"


@pytest.fixture(scope="module")
def report() -> fa.AuditResult:
    return fa.audit(
        fa.load_demo(), fa.DEMO_SPEC, estimators=["statsmodels-sarimax", "statsforecast"]
    )


@pytest.fixture(scope="module")
def html(report: fa.AuditResult) -> str:
    return render_html(report)


@pytest.fixture(scope="module")
def markdown(report: fa.AuditResult) -> str:
    return render_markdown(report)


@pytest.fixture(scope="module")
def hostile(report: fa.AuditResult) -> fa.AuditResult:
    """The same audit with a series name and a finding that try to inject markup."""
    extra = Finding(
        "reference-fit",
        "warn",
        None,
        "x_<b>col|umn</b>",
        f"message with {HOSTILE} and a | pipe\nand a newline",
    )
    return dataclasses.replace(
        report,
        series=dataclasses.replace(report.series, name=HOSTILE),
        findings=[*report.findings, extra],
    )


def _escaped(text: str) -> str:
    return str(markupsafe.escape(text))


# ---------------------------------------------------------------------- HTML
def test_html_opens_with_the_verdict(report: fa.AuditResult, html: str) -> None:
    verdict = re.search(r'<section id="verdict".*?</section>', html, re.S)
    assert verdict is not None
    block = verdict.group(0)
    assert content.VERDICT_LABELS[report.verdict]["word"] in block
    assert str(report.spec) in block
    assert f"{len(report.series)} observations" in block
    labels = report.series.labels()
    assert f"{labels[0]} to {labels[-1]}" in block
    counts = {s: len(report.findings_of(severity=s)) for s in ("fail", "warn", "info")}
    for severity, count in counts.items():
        assert f"{count} {severity}" in block
    assert "independent engine" in block
    # The verdict is the first section of the page.
    assert html.index('id="verdict"') < html.index('id="findings"') < html.index('id="parameters"')


def test_html_carries_every_finding_with_its_explanation(report: fa.AuditResult, html: str) -> None:
    assert report.findings
    for finding in report.findings:
        assert _escaped(finding.message) in html
        assert _escaped(fa.KINDS[finding.kind]) in html
    for severity in {f.severity for f in report.findings}:
        assert content.SEVERITY_LABELS[severity]["word"] in html


def test_html_findings_are_grouped_most_severe_first(report: fa.AuditResult, html: str) -> None:
    positions = {
        s: html.find(f"<h3>{content.SEVERITY_LABELS[s]['heading']} (")
        for s in ("fail", "warn", "info")
        if report.findings_of(severity=s)
    }
    assert all(p > 0 for p in positions.values())
    assert list(positions.values()) == sorted(positions.values())


def test_html_carries_the_caution(html: str) -> None:
    assert _escaped(CAUTION) in html
    assert 'id="caution"' in html


def test_html_embeds_images_with_alt_text(html: str) -> None:
    images = re.findall(r'<img src="data:image/png;base64,([^"]+)" alt="([^"]*)"', html)
    assert len(images) >= 3  # parameters, series, forecasts at least
    for payload, alt in images:
        assert base64.b64decode(payload)[:8] == b"\x89PNG\r\n\x1a\n"
        assert len(alt) > 40


def test_html_is_self_contained(html: str) -> None:
    assert html.startswith("<!DOCTYPE html>")
    # The one script is inline: it opens the closed <details> for printing.
    scripts = re.findall(r"<script([^>]*)>(.*?)</script>", html, re.S)
    assert len(scripts) == 1 and scripts[0][0] == ""
    assert "beforeprint" in scripts[0][1] and "afterprint" in scripts[0][1]
    assert "<link" not in html
    assert not re.search(r'(src|href)="(https?:)?//', html)
    assert "<style>" in html and "@media print" in html


def test_html_tables(report: fa.AuditResult, html: str) -> None:
    for table_id in ("parameters", "likelihoods", "estimators", "tolerances", "provenance"):
        assert f'id="table-{table_id}"' in html
    for name in report.parameters.index:
        assert f'<th scope="row">{name}</th>' in html
    for key, estimate in report.estimates.items():
        assert f'<th scope="row">{key}</th>' in html
        assert estimate.engine in html
    for name in report.tolerances.describe():
        assert name in html


def test_sections_appear_only_with_data(report: fa.AuditResult, html: str) -> None:
    assert report.holdout is None
    assert 'id="holdout"' not in html
    bare = dataclasses.replace(report, spread=None, residual_tests=None, forecasts={})
    text = render_html(bare)
    assert 'id="forecasts"' not in text and 'id="residuals"' not in text
    assert 'id="plot-forecasts"' not in text
    assert 'id="verdict"' in text and 'id="caution"' in text


def test_every_section_template_exists() -> None:
    folder = Path(fa.__file__).parent / "report" / "templates"
    for section in SECTIONS:
        assert (folder / TEMPLATES[section.kind]).is_file(), TEMPLATES[section.kind]


def test_every_kind_of_section_is_drawn_in_every_format() -> None:
    assert {s.kind for s in SECTIONS} <= set(KINDS)
    assert set(TEMPLATES) == set(KINDS)
    assert set(WRITERS) == set(KINDS)
    assert len({s.id for s in SECTIONS}) == len(SECTIONS)


def test_hostile_strings_are_escaped_everywhere(hostile: fa.AuditResult) -> None:
    for text in (render_html(hostile), render_compact_html(hostile)):
        assert "<script>alert" not in text
        assert "<b>col" not in text
        assert _escaped(HOSTILE) in text
    page = render_html(hostile)
    word = content.VERDICT_LABELS[hostile.verdict]["word"]
    assert f"<title>{word}: {hostile.spec} on {_escaped(HOSTILE)}" in page
    assert _escaped("x_<b>col|umn</b>") in page


# ---------------------------------------------------------------------- compact view
def test_compact_view(report: fa.AuditResult, html: str) -> None:
    compact = report._repr_html_()
    assert compact == render_compact_html(report)
    assert content.VERDICT_LABELS[report.verdict]["word"] in compact
    assert str(report.spec) in compact
    assert "<table>" in compact
    for name in report.parameters.index:
        assert name in compact
    assert 'report.to_html("audit.html")' in compact
    assert _escaped(CAUTION) in compact
    assert "<img" not in compact and "<html" not in compact
    assert len(compact) < len(html) / 5
    serious = report.findings_of(severity="fail") + report.findings_of(severity="warn")
    for finding in serious[:5]:
        assert _escaped(finding.message) in compact
    for finding in report.findings_of(severity="info"):
        assert _escaped(finding.message) not in compact


def test_compact_view_without_serious_findings(report: fa.AuditResult) -> None:
    quiet = dataclasses.replace(report, findings=report.findings_of(severity="info"))
    compact = render_compact_html(quiet)
    assert "PASS" in compact
    assert "No fail or warn findings" in compact


# ---------------------------------------------------------------------- Markdown
def _pipe_count(line: str) -> int:
    return len(re.findall(r"(?<!\\)\|", line))


def _tables(text: str) -> list[list[str]]:
    blocks, current = [], []
    for line in text.splitlines():
        if line.startswith("|"):
            current.append(line)
        elif current:
            blocks.append(current)
            current = []
    if current:
        blocks.append(current)
    return blocks


def test_markdown_tables_are_well_formed(report: fa.AuditResult, markdown: str) -> None:
    tables = _tables(markdown)
    assert len(tables) >= 4  # parameters, likelihoods, estimators, tolerances
    for table in tables:
        assert re.fullmatch(r"\| ---(:?) (\| -{3}:? )*\|", table[1]), table[1]
        widths = {_pipe_count(line) for line in table}
        assert len(widths) == 1, table
    headers = [t[0] for t in tables]
    assert any(h.startswith("| parameter |") for h in headers)
    assert any(h.startswith("| quantity |") for h in headers)
    assert any(h.startswith("| tolerance |") for h in headers)
    for name in report.parameters.index:
        assert f"| {name} |" in markdown


def test_markdown_verdict_findings_and_caution(report: fa.AuditResult, markdown: str) -> None:
    assert markdown.startswith("## forecastaudit: ")
    assert f"**Verdict:** {content.VERDICT_LABELS[report.verdict]['symbol']}" in markdown
    assert content.VERDICT_LABELS[report.verdict]["word"] in markdown.splitlines()[0]
    for finding in report.findings_of(severity="fail") + report.findings_of(severity="warn"):
        assert escape_markdown(finding.message) in markdown
    infos = report.findings_of(severity="info")
    if infos:
        assert "<details>" in markdown and f"{len(infos)} finding" in markdown
    assert escape_markdown(CAUTION) in markdown
    assert "### Provenance" in markdown
    assert report.series.fingerprint in markdown


def test_markdown_escapes_hostile_strings(hostile: fa.AuditResult) -> None:
    text = render_markdown(hostile)
    assert "<script>" not in text and "<b>" not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;&amp;" in text
    assert "a \\| pipe and a newline" in text


def test_escape_markdown() -> None:
    assert escape_markdown("a|b") == "a\\|b"
    assert escape_markdown("<x> & y") == "&lt;x&gt; &amp; y"
    assert escape_markdown("two\nlines") == "two lines"
    assert escape_markdown("2*pi [link]") == "2\\*pi \\[link\\]"
    assert escape_markdown("ma_lag1") == "ma_lag1"  # intraword underscores stay readable


# ---------------------------------------------------------------------- both formats
def _html_titles(page: str) -> list[str]:
    return [html_text.unescape(t) for t in re.findall(r'<h2 id="[^"]+-title">(.*?)</h2>', page)]


def _markdown_titles(text: str) -> list[str]:
    return [line[len("### ") :] for line in text.splitlines() if line.startswith("### ")]


@pytest.mark.parametrize("variant", ["full", "bare"])
def test_html_and_markdown_have_the_same_sections(
    report: fa.AuditResult, html: str, markdown: str, variant: str
) -> None:
    if variant == "bare":  # sections without data are left out of both formats alike
        report = dataclasses.replace(report, spread=None, residual_tests=None, forecasts={})
        html, markdown = render_html(report), render_markdown(report)
    titles = _html_titles(html)
    assert titles == _markdown_titles(markdown)
    assert titles == [s.title for s in SECTIONS if s.title in titles]
    assert titles[0] == "Verdict" and titles[-1] == "Caution"
    assert {"Findings", "Parameters", "Plots", "Tolerances", "Provenance"} <= set(titles)
    if variant == "bare":
        assert "Forecasts" not in titles and "Residual checks" not in titles
    # The same intro, directly under the heading, in both formats.
    for section in SECTIONS:
        if section.intro and section.title in titles:
            heading = f'<h2 id="{section.id}-title">{_escaped(section.title)}</h2>'
            assert f"{heading}\n<p>{_escaped(section.intro)}</p>" in html
            intro = escape_markdown(section.intro)
            assert f"### {section.title}\n\n{intro}\n" in markdown


def test_markdown_describes_every_figure(report: fa.AuditResult, markdown: str) -> None:
    for plot in plots.report_plots(report):
        assert f"- **{escape_markdown(plot.title)}.** {escape_markdown(plot.alt)}" in markdown
    assert "![" not in markdown and "data:image" not in markdown


# ---------------------------------------------------------------------- content
def test_format_number() -> None:
    assert content.format_number(float("nan")) == content.MISSING
    assert content.format_number(None) == content.MISSING
    assert content.format_number(-0.0) == "0"
    assert content.format_number(True) == "yes"
    assert content.format_number(0.0004, "pvalue") == "<0.001"
    assert content.format_number(378.551829, "loglike") == "378.5518"
    assert content.format_number(-0.350223071, "param") == "-0.35022"
    assert content.column_kind([2950.55, 12.0]) == "fixed1"
    assert content.column_kind([0.0567, 8.2]) == "fixed4"


def test_parameter_table_flags_values_beyond_tolerance(report: fa.AuditResult) -> None:
    params = report.parameters.copy()
    name = params.index[0]
    se = params.at[name, "reference_se"]
    params.at[name, "statsmodels-sarimax"] = params.at[name, "reference"] + 10 * se
    params.at[name, "statsforecast"] = params.at[name, "reference"]
    table = content.parameter_table(dataclasses.replace(report, parameters=params))
    columns = list(table.columns)
    row = next(r for r in table.rows if r.header == name)
    assert row.cells[columns.index("statsmodels-sarimax")].flag == "beyond"
    assert row.cells[columns.index("statsforecast")].flag is None
    assert all(r.cells[columns.index("reference")].flag is None for r in table.rows)
    assert any(content.FLAG_MARKS["beyond"][1] in note for note in table.all_notes)


def test_likelihood_table_flags_the_gap(report: fa.AuditResult) -> None:
    table = content.likelihood_table(report)
    gap_row = next(r for r in table.rows if r.header.startswith("gap to the best"))
    gaps = report.likelihoods["gap_to_best"]
    for key, cell in zip(table.columns, gap_row.cells, strict=True):
        expected = gaps[key] > report.tolerances.loglike_atol
        assert (cell.flag == "beyond") == bool(expected), key


# ---------------------------------------------------------------------- plots
def test_plots_are_png_with_alt_text_and_leave_no_state(report: fa.AuditResult) -> None:
    import matplotlib
    import matplotlib.pyplot as plt

    backend = matplotlib.get_backend()
    before = plt.get_fignums()
    made = plots.report_plots(report)
    assert {p.id for p in made} >= {"plot-parameters", "plot-series", "plot-forecasts"}
    for plot in made:
        assert plot.png[:8] == b"\x89PNG\r\n\x1a\n"
        assert plot.data_uri.startswith("data:image/png;base64,")
        assert plot.alt and plot.title and plot.caption
    assert plt.get_fignums() == before
    assert matplotlib.get_backend() == backend


def test_parameter_plot_alt_names_every_parameter(report: fa.AuditResult) -> None:
    plot = plots.parameter_plot(report)
    assert plot is not None
    for name in report.parameters.index:
        assert name in plot.alt


def test_series_plot_survives_mathtext_characters(report: fa.AuditResult) -> None:
    named = dataclasses.replace(report, series=dataclasses.replace(report.series, name="$x_1$ $"))
    assert plots.series_plot(named).png[:4] == b"\x89PNG"


def test_likelihood_profile_figure() -> None:
    t = np.linspace(-0.2, 1.2, 15)
    plot = plots.likelihood_profile_figure(t, 10.0 - (t - 0.5) ** 2, "a", "b", tolerance=0.01)
    assert plot.png[:4] == b"\x89PNG"
    assert "from a to b" in plot.alt


def _drawn_styles(
    monkeypatch: pytest.MonkeyPatch, draw: Callable[[], plots.Plot | None]
) -> dict[str, tuple[str, str]]:
    """The colour and marker of each estimator's markers in the figure ``draw()`` makes."""
    from matplotlib.colors import to_hex
    from matplotlib.figure import Figure

    seen: dict[str, tuple[str, str]] = {}
    real = plots.figure_to_png

    def record(figure: Figure) -> str:
        for ax in figure.axes:
            ticks = zip(ax.get_yticks(), ax.get_yticklabels(), strict=True)
            rows = {round(t): label.get_text() for t, label in ticks}
            for line in ax.get_lines():
                if line.get_marker() in (None, "None", ""):
                    continue
                label = line.get_label()
                if label.startswith("_"):  # a dot chart's point: named by its row
                    label = rows.get(round(line.get_ydata()[0]), label)
                seen[label] = (to_hex(line.get_color()), line.get_marker())
        return real(figure)

    with monkeypatch.context() as patch:
        patch.setattr(plots, "figure_to_png", record)
        assert draw() is not None
    return seen


def test_estimator_styles_are_one_per_key() -> None:
    styles = plots.estimator_styles(["statsforecast", "reference", "statsmodels-sarimax"])
    assert styles["reference"] == plots.REFERENCE_STYLE
    assert styles["reference"]["marker"] not in plots.MARKERS
    assert styles["statsforecast"] == {"color": "#1f4e79", "marker": "o", "linestyle": "-"}
    assert styles["statsmodels-sarimax"] == {"color": "#b5541b", "marker": "s", "linestyle": "--"}
    # A key's style depends on the keys given, never on which of them a figure draws.
    assert plots.estimator_styles(["statsforecast", "statsmodels-sarimax"]) == styles


def test_every_plot_draws_a_key_in_its_one_style(
    report: fa.AuditResult, monkeypatch: pytest.MonkeyPatch
) -> None:
    styles = plots.report_styles(report)
    assert list(styles) == ["reference", "statsmodels-sarimax", "statsforecast"]
    # The grid lists its points in another order than the parameter plot lists its rows.
    grid = report.likelihood_grid
    assert grid is not None and set(grid["points"]) == {"reference", "statsforecast"}
    turned = dataclasses.replace(
        report, likelihood_grid={**grid, "points": dict(reversed(grid["points"].items()))}
    )
    in_parameters = _drawn_styles(monkeypatch, lambda: plots.parameter_plot(turned))
    in_grid = _drawn_styles(monkeypatch, lambda: plots.likelihood_grid_plot(turned))
    in_forecasts = _drawn_styles(monkeypatch, lambda: plots.forecast_plot(turned))
    expected = {k: (v["color"], v["marker"]) for k, v in styles.items()}
    assert in_parameters == expected
    assert in_grid == {k: expected[k] for k in ("reference", "statsforecast")}
    assert in_grid["statsforecast"] == in_parameters["statsforecast"] == ("#b5541b", "s")
    assert in_grid["reference"] == in_parameters["reference"] == ("#1d2733", "*")
    assert {k: in_forecasts[k] for k in ("statsmodels-sarimax", "statsforecast")} == {
        k: expected[k] for k in ("statsmodels-sarimax", "statsforecast")
    }


def test_long_unspaced_runs_alone_may_break_in_print() -> None:
    from forecastaudit.report.html import breakable

    digest = "d68b242c7f23882e16ee5dd451a1a0101666850dbc88a95024600f17185e4487"
    assert str(breakable(f"<b>x</b> {digest} seasonal")) == (
        f'&lt;b&gt;x&lt;/b&gt; <span class="long">{digest}</span> seasonal'
    )
    assert str(breakable("ARIMA(0,1,1)x(0,1,2)12 and -2.5468")) == (
        "ARIMA(0,1,1)x(0,1,2)12 and -2.5468"
    )


# ---------------------------------------------------------------------- in a browser
def test_page_loads_in_headless_chromium(report: fa.AuditResult, html: str) -> None:
    if shutil.which(CHROMIUM) is None:
        pytest.skip(
            f"{CHROMIUM} is not installed; the browser check of the HTML report did not run"
        )
    with tempfile.TemporaryDirectory() as folder:
        page = Path(folder) / "audit.html"
        page.write_text(html, encoding="utf-8")
        profile = Path(folder) / "profile"
        result = subprocess.run(
            [
                CHROMIUM,
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--disable-quic",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                f"--user-data-dir={profile}",
                "--dump-dom",
                page.as_uri(),
            ],
            capture_output=True,
            text=True,
            timeout=120,
            check=False,
        )
    dom = result.stdout
    assert result.returncode == 0, result.stderr[-2000:]
    assert re.search(
        rf'<span class="badge {report.verdict} big">.*?{VERDICT_WORD[report.verdict]}</span>', dom
    )
    assert dom.count('src="data:image/png;base64,') == html.count('src="data:image/png;base64,')
    assert 'id="caution"' in dom


# ---------------------------------------------------------------------- verdict and policy
def _section(page: str, section_id: str) -> str:
    found = re.search(rf'<section id="{section_id}".*?</section>', page, re.S)
    assert found is not None, section_id
    return found.group(0)


def _markdown_section(text: str, title: str) -> str:
    start = text.index(f"### {title}\n")
    end = text.find("\n### ", start + 1)
    return text[start : end if end > 0 else len(text)]


@pytest.mark.parametrize("outcome", ["pass", "pass-with-notes", "fail"])
def test_verdict_says_what_the_outcome_means(report: fa.AuditResult, outcome: str) -> None:
    infos = report.findings_of(severity="info")
    extra = {
        "pass": [],
        "pass-with-notes": [Finding("reference-fit", "warn", None, None, "look at this")],
        "fail": [Finding("fit-failed", "fail", "statsforecast", None, "it broke")],
    }[outcome]
    variant = dataclasses.replace(report, findings=[*extra, *infos])
    assert variant.verdict == outcome
    block = _section(render_html(variant), "verdict")
    assert f'<span class="badge {outcome} big">' in block
    assert _escaped(content.VERDICT_MEANINGS[outcome]) in block
    assert "Production estimator" in block and _escaped(variant.production) in block
    verdict = _markdown_section(render_markdown(variant), "Verdict")
    word = content.VERDICT_LABELS[outcome]["word"]
    assert f"{word}. {escape_markdown(content.VERDICT_MEANINGS[outcome])}" in verdict
    assert f"**Production estimator:** {escape_markdown(variant.production)}" in verdict


def test_every_verdict_badge_has_a_style() -> None:
    css = (Path(fa.__file__).parent / "report" / "templates" / "style.css").read_text()
    compact = (Path(fa.__file__).parent / "report" / "templates" / "compact.html.j2").read_text()
    for outcome in content.VERDICT_LABELS:
        assert f".badge.{outcome} {{" in css
        assert f".verdict.{outcome} {{" in css
        assert f".fa-compact .fa-{outcome} {{" in compact


def test_policy_section_in_both_formats(report: fa.AuditResult, html: str, markdown: str) -> None:
    assert report.production
    block = _section(html, "policy")
    assert _escaped(report.production) in block
    for condition in report.policy["fails_when"]:
        assert _escaped(condition) in block
    assert 'id="table-materiality-thresholds"' in block and 'id="table-materiality"' in block
    for key in report.materiality:
        assert f'<th scope="row">{_escaped(key)}' in block
    assert f"{_escaped(report.production)} (production)" in block
    text = _markdown_section(markdown, "Policy")
    assert f"**Production estimator:** {escape_markdown(report.production)}" in text
    for condition in report.policy["fails_when"]:
        assert f"  - {escape_markdown(condition)}" in text
    for key in report.materiality:
        assert f"| {escape_markdown(key)}" in text
    # The policy section stands just before the tolerances, in both formats.
    titles = _markdown_titles(markdown)
    assert titles.index("Policy") + 1 == titles.index("Tolerances")
    assert html.index('id="policy"') < html.index('id="tolerances"')


def test_materiality_table_flags_measures_beyond_their_threshold(report: fa.AuditResult) -> None:
    measured = {
        "statsmodels-sarimax": {
            "forecast_se": 0.01,
            "forecast_percent": 0.02,
            "width_ratio": 1.001,
            "accuracy_difference": float("nan"),
            "material": False,
            "reasons": [],
        },
        "statsforecast": {
            "forecast_se": 0.9,
            "forecast_percent": 0.3,
            "width_ratio": 0.9,
            "accuracy_difference": 0.01,
            "material": True,
            "reasons": ["point forecasts 0.90 SE apart (threshold 0.5)"],
        },
    }
    table = content.materiality_table(dataclasses.replace(report, materiality=measured))
    assert table is not None
    rows = {r.header: r for r in table.rows}
    assert set(rows) == {"statsmodels-sarimax (production)", "statsforecast"}
    flags = [c.flag for c in rows["statsforecast"].cells]
    assert flags == ["material", None, "material", None, None]
    assert rows["statsforecast"].cells[-1].text == "yes"
    assert rows["statsmodels-sarimax (production)"].cells[-1].text == "no"
    assert rows["statsforecast"].cells[3].text == "1.00%"
    assert any("0.90 SE apart" in note for note in table.all_notes)
    assert content.materiality_table(dataclasses.replace(report, materiality={})) is None


def test_a_finding_about_several_wrappers_names_them_all(report: fa.AuditResult) -> None:
    shared = Finding(
        "default-overridden",
        "warn",
        "pmdarima",
        "with_intercept",
        "one finding for two wrappers",
        {"members": ["pmdarima", "sktime"]},
    )
    variant = dataclasses.replace(report, findings=[shared, *report.findings])
    page = render_html(variant)
    assert page.count("one finding for two wrappers") == 1
    assert '<span class="finding-who">pmdarima, sktime &middot; with_intercept</span>' in page
    text = render_markdown(variant)
    assert text.count("one finding for two wrappers") == 1
    assert "`default-overridden` (pmdarima, sktime, with_intercept)" in text
    assert "pmdarima, sktime" in render_compact_html(variant)


# ---------------------------------------------------------------------- the demo audit
@pytest.fixture(scope="module")
def demo() -> fa.AuditResult:
    """The demo audit with every estimator (four wrappers of one engine among them)."""
    return fa.audit(fa.load_demo(), fa.DEMO_SPEC)


def _wrappers(audit: fa.AuditResult, engine: str) -> list[str]:
    return [k for k, e in audit.estimates.items() if e.engine == engine and e.ok]


def test_demo_plots_draw_one_entry_per_engine(demo: fa.AuditResult) -> None:
    wrappers = _wrappers(demo, "statsmodels-statespace")
    if len(wrappers) < 2:
        pytest.skip("fewer than two statsmodels-engine wrappers are installed")
    plot = plots.parameter_plot(demo)
    assert plot is not None
    for key in wrappers:
        assert len(re.findall(rf"(?<![\w-]){re.escape(key)}(?![\w-])", plot.alt)) == 1, key
    entry = f"statsmodels-statespace ({len(wrappers)} wrappers): {', '.join(wrappers)}"
    assert entry in plot.alt
    entries = plots.estimator_entries(demo, [k for k in demo.parameters if k != "reference_se"])
    assert [e.keys for e in entries if len(e.keys) > 1] == [tuple(wrappers)]
    assert ("reference",) in [e.keys for e in entries]
    forecasts = plots.forecast_plot(demo)
    assert forecasts is not None and entry in forecasts.alt
    assert f"({len(wrappers)} wrappers) is {', '.join(wrappers)}" in plot.caption


def test_wrappers_with_different_estimates_stay_apart(demo: fa.AuditResult) -> None:
    wrappers = _wrappers(demo, "statsmodels-statespace")
    if len(wrappers) < 2:
        pytest.skip("fewer than two statsmodels-engine wrappers are installed")
    params = demo.parameters.copy()
    params.iloc[0, params.columns.get_loc(wrappers[-1])] *= 1 + 1e-6
    moved = dataclasses.replace(demo, parameters=params)
    entries = plots.estimator_entries(moved, list(params.columns.drop("reference_se")))
    assert (wrappers[-1],) in [e.keys for e in entries]
    assert tuple(wrappers[:-1]) in [e.keys for e in entries]


def test_demo_verdict_badge_is_pass_with_notes(demo: fa.AuditResult) -> None:
    assert demo.verdict == "pass-with-notes"
    page = render_html(demo)
    block = _section(page, "verdict")
    assert '<span class="badge pass-with-notes big">' in block
    assert content.VERDICT_LABELS["pass-with-notes"]["word"] in block
    assert _escaped(content.VERDICT_MEANINGS["pass-with-notes"]) in block
    assert demo.production and _escaped(demo.production) in _section(page, "policy")
