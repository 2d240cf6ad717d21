"""Reports a reviewer can attach to a change request: printed, dated, readable.

* A report with order-search tables printed to PDF by headless Chromium keeps every column
  (the PDF's text, read with pypdf, holds every column heading).
* Printed, the findings for information are there (with or without scripts), and no number
  or ordinary word of a table is broken across lines.
* Order-search tables are labelled by model or search, never by a raw position, and the
  "within 2 units" table lists only those candidates.
* Ordinary coefficients are never written in scientific notation.
* Findings for information are collapsed by default.
* Dates read as periods (2009-01, 1998Q1), not midnight timestamps.
* Results have a short ``repr`` outside Jupyter.
* The model-choice comparison has HTML and Markdown reports too.
"""

from __future__ import annotations

import dataclasses
import re
import shutil
import subprocess
import tempfile
import unicodedata
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import forecastaudit as fa
from forecastaudit.diagnosis.findings import Finding
from forecastaudit.model_choice import ModelChoiceResult
from forecastaudit.report import content
from forecastaudit.report.html import LONG_RUN
from forecastaudit.search.order_search import audit_order_search

CHROMIUM = "/usr/bin/chromium"


@pytest.fixture(scope="module")
def searched() -> fa.AuditResult:
    """The demo audit (statsforecast and statsmodels) with statsforecast's order search
    and the exhaustive reference search attached: the report's widest tables."""
    y = fa.load_demo()
    result = fa.audit(
        y, fa.DEMO_SPEC, ["statsforecast", "statsmodels-sarimax"], production="statsforecast"
    )
    search = audit_order_search(
        y,
        transform=result.spec.transform,
        searches=["statsforecast"],
        estimators=["statsforecast"],
        name=result.series.name,
        specified=result.spec,
    )
    return dataclasses.replace(result, order_search=search)


def _print_to_pdf(html: str, folder: Path) -> Path:
    page, pdf = folder / "report.html", folder / "report.pdf"
    page.write_text(html, encoding="utf-8")
    run = subprocess.run(
        [
            CHROMIUM,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            f"--user-data-dir={folder / 'profile'}",
            "--no-pdf-header-footer",
            f"--print-to-pdf={pdf}",
            page.as_uri(),
        ],
        capture_output=True,
        text=True,
        timeout=180,
        check=False,
    )
    assert run.returncode == 0 and pdf.exists(), run.stderr[-2000:]
    return pdf


def _pdf_text(html: str) -> str:
    """The text of ``html`` printed to PDF by headless Chromium (skips without it)."""
    if shutil.which(CHROMIUM) is None:
        pytest.skip(f"{CHROMIUM} is not installed; the printed report was not checked")
    pypdf = pytest.importorskip("pypdf", reason="pypdf reads the printed PDF's text")
    with tempfile.TemporaryDirectory() as folder:
        pdf = _print_to_pdf(html, Path(folder))
        return "\n".join(page.extract_text() for page in pypdf.PdfReader(pdf).pages)


@pytest.fixture(scope="module")
def printed(searched: fa.AuditResult) -> str:
    """The text of the searched audit's report printed to PDF."""
    return _pdf_text(searched.to_html())


def _squeezed(text: str) -> str:
    # NFKC undoes the ligatures the PDF's fonts use ("ﬀ" in "differencing", "ﬁ").
    return re.sub(r"\s+", "", unicodedata.normalize("NFKC", text))


def test_printed_report_keeps_every_column_of_the_order_search_tables(
    searched: fa.AuditResult, printed: str
) -> None:
    tables = content.order_search_tables(searched)
    assert {t.id for t in tables} >= {"order-search-selections", "order-search-candidates"}
    printed = _squeezed(printed)
    # Every heading of every order-search column, whether it prints as a column heading
    # or (in a turned table) as a row heading.
    search = searched.order_search
    expected = set()
    for name in ("selections", "differencing_tests", "candidates", "default_constant"):
        frame = getattr(search, name)
        for column in frame.columns:
            if name == "candidates" and column == "within_2":
                continue  # the table lists only those; the column would say "yes" throughout
            if any(isinstance(v, dict | list) for v in frame[column]):
                continue  # kept in the record, not in a table
            if column == "reason" and frame[column].isna().all():
                continue  # no default fit failed: the column is left out
            # The heading the report gives it (plain words for the terse names).
            expected.add(content._ORDER_HEADINGS.get(str(column), str(column).replace("_", " ")))
    missing = sorted(h for h in expected if _squeezed(h) not in printed)
    assert not missing, f"columns lost on paper: {missing}"
    # The table cells print too: the selected model and the best candidate.
    assert _squeezed(search.selections["selected"].iloc[0]) in printed


def test_printed_report_holds_the_findings_for_information(
    searched: fa.AuditResult, printed: str
) -> None:
    info = searched.findings_of(severity="info")
    assert len(info) == 5
    text = _squeezed(printed)
    missing = [f.message for f in info if _squeezed(f.message) not in text]
    assert not missing, f"findings for information left off the paper: {missing}"
    assert _squeezed(f"For information ({len(info)})") in text


def _print_script(html: str) -> str:
    """The page's one script: inline, it opens the closed <details> for printing only."""
    scripts = re.findall(r"<script([^>]*)>(.*?)</script>", html, re.S)
    assert len(scripts) == 1 and scripts[0][0] == "", scripts
    body = scripts[0][1]
    assert 'addEventListener("beforeprint"' in body and 'addEventListener("afterprint"' in body
    assert "d.open = true" in body and "d.open = false" in body
    return body


def test_pages_with_details_open_them_for_print(searched: fa.AuditResult) -> None:
    page = searched.to_html()
    assert "<details" in page
    choice = _choice().to_html()
    assert "<details" in choice
    assert _print_script(page) == _print_script(choice)
    assert "details::details-content { content-visibility: visible; }" in page


def test_printed_wide_table_breaks_no_number_or_word(searched: fa.AuditResult) -> None:
    """The differencing decisions of four stacks (as an audit with ``order_search=True``
    writes them), printed from the page with its script removed."""
    search = searched.order_search
    stacks = ("pmdarima", "statsforecast", "sktime", "sktime-statsforecast")
    tests = pd.concat(
        [search.differencing_tests.assign(search=s) for s in stacks], ignore_index=True
    )
    wide = dataclasses.replace(
        searched, order_search=dataclasses.replace(search, differencing_tests=tests)
    )
    every = content.order_search_tables(wide)
    tables = [t for t in every if t.id.startswith("order-search-differencing")]
    assert tables[0].corner == "search" and len(tables[0].rows) == 12  # not turned
    page = wide.to_html()
    without_script = page.replace(f"<script>{_print_script(page)}</script>", "")
    assert "<script" not in without_script
    text = unicodedata.normalize("NFKC", _pdf_text(without_script))
    # The words printed from the differencing tables' caption to the next table's.
    after = every[every.index(tables[-1]) + 1]
    start = text.index(tables[0].caption)
    words = set(text[start : text.index(after.caption.split(":")[0], start)].split())
    # Known numbers of the table, whole: the KPSS statistic and the seasonal strength.
    assert {"1.4915", "0.9268", "0.0278", "0.64000"} <= words
    for table in tables:
        for heading in table.columns:
            assert _squeezed(heading) in _squeezed(text), heading
            assert set(heading.split()) <= words, heading
        for row in table.rows:
            for cell in row.cells:
                broken = [w for w in cell.text.split() if len(w) < LONG_RUN and w not in words]
                assert not broken, (row.header, cell.text, broken)
    # The page's own style opens the findings for information without the script.
    info = wide.findings_of(severity="info")
    assert info and all(_squeezed(f.message) in _squeezed(text) for f in info)


def test_order_search_tables_have_no_raw_positions(searched: fa.AuditResult) -> None:
    for table in content.order_search_tables(searched):
        headers = [r.header for r in table.rows if not r.group]
        assert not any(h.isdigit() for h in headers), (table.id, headers)
        if table.id == "order-search-candidates":
            assert table.corner == "model" or "model" in table.columns


def test_within_two_units_table_lists_only_those_candidates(searched: fa.AuditResult) -> None:
    candidates = searched.order_search.candidates
    within = candidates[candidates["delta_aicc"] <= 2.0]
    assert 0 < len(within) < len(candidates)  # the filter has something to do
    table = next(
        t for t in content.order_search_tables(searched) if t.id == "order-search-candidates"
    )
    # The table is turned (few rows, many columns): its columns are the models.
    shown = set(table.columns) if table.corner == "model" else {r.header for r in table.rows}
    assert shown == set(within["model"])
    assert any(f"{len(within)} of {len(candidates)} candidates" in n for n in table.notes)


@pytest.mark.parametrize(
    ("value", "kind", "text"),
    [
        (0.0000167123, "param", "0.000016712"),
        (-0.000251, "param", "-0.000251"),
        (2.5e-5, "general", "0.000025"),
        (-0.350223071, "param", "-0.35022"),
        (123456.789, "param", "123457"),
        (1e-12, "param", "1e-12"),  # beyond ordinary magnitudes the exponent stays
    ],
)
def test_no_scientific_notation_for_ordinary_numbers(value: float, kind: str, text: str) -> None:
    assert content.format_number(value, kind) == text


def test_information_findings_are_collapsed(searched: fa.AuditResult) -> None:
    html = searched.to_html()
    info = searched.findings_of(severity="info")
    assert info, "the demo audit has findings for information"
    block = re.search(r'<details class="finding-group info-group">(.*?)</details>', html, re.S)
    assert block is not None and "<details open" not in html
    assert block.group(1).count('<li class="info">') == len(info)
    assert '<li class="info">' not in html.replace(block.group(0), "")


def test_dates_are_shown_as_periods() -> None:
    rng = np.random.default_rng(9)
    y = pd.Series(
        100 + np.cumsum(rng.normal(size=48)),
        index=pd.date_range("2009-01-01", periods=48, freq="MS"),
    )
    result = fa.audit(y, "ARIMA(0,1,1)x(0,1,1)12", ["statsforecast"])
    summary = content.summary(result)
    assert (summary.first, summary.last) == ("2009-01", "2012-12")
    forecast = content.forecast_table(result)
    assert forecast is not None and forecast.rows[0].cells[0].text == "2013-01"
    assert "00:00:00" not in result.to_html() and "00:00:00" not in result.to_markdown()
    quarters = pd.Series(
        y.to_numpy()[:24], index=pd.date_range("1998-01-01", periods=24, freq="QS")
    )
    assert fa.audit(quarters, "ARIMA(0,1,1)", ["statsforecast"]).series.display_labels()[0] == (
        "1998Q1"
    )


def test_repr_is_short_outside_jupyter(searched: fa.AuditResult) -> None:
    text = repr(searched)
    assert len(text) < 300 and text.startswith("<AuditResult ARIMA(")
    assert searched.verdict in text
    assert len(repr(searched.order_search)) < 300


# ---------------------------------------------------------------------- model choice
def _choice(hostile: str = "") -> ModelChoiceResult:
    models = [fa.ModelSpec.parse("ARIMA(0,1,1)"), fa.ModelSpec.parse("ARIMA(1,1,0)")]
    labels = [str(m) for m in models]
    rows = []
    for model, mase in zip(labels, (0.81, 0.93), strict=True):
        for key in ("statsforecast", "statsmodels-sarimax" + hostile):
            rows.append(
                {"model": model, "estimator": key, "status": "ok", "d": 1, "D": 0, "mase": mase,
                 "rmse": 2 * mase, "mae": 1.5 * mase, "aicc": 300 + mase}
            )  # fmt: skip
    scores = pd.DataFrame(rows)
    mase = scores.pivot(index="estimator", columns="model", values="mase")[labels]
    ranks = mase.rank(axis=1, method="min").astype(int)
    aicc = scores.pivot(index="estimator", columns="model", values="aicc")[labels].rank(axis=1)
    finding = Finding(
        "ranking-stable", "info", None, "mase", f"Every implementation ranks the models{hostile}."
    )
    return ModelChoiceResult(
        specs=models,
        holdout=6,
        origins=2,
        scores=scores,
        mase_ranks=ranks,
        aicc_ranks=aicc,
        preferred={k: labels[0] for k in ranks.index},
        stable=True,
        findings=[finding],
    )


def test_model_choice_html_report() -> None:
    html = _choice().to_html()
    assert html.startswith("<!DOCTYPE html>")
    assert "Same ranking in every implementation" in html
    assert 'id="table-model-choice-mase-ranks"' in html
    assert 'id="table-model-choice-scores"' in html
    assert 'id="table-model-choice-aicc-ranks"' in html
    assert "ARIMA(1,1,0)" in html and _print_script(html)  # the one script: for print
    assert fa.CAUTION.split(",")[0] in html


def test_model_choice_reports_escape_names() -> None:
    hostile = "<script>alert(1)</script>|"
    html = _choice(hostile).to_html()
    assert "<script>alert" not in html and "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    markdown = _choice(hostile).to_markdown()
    assert "<script>" not in markdown and "&lt;script&gt;" in markdown
    assert "\\|" in markdown


def test_model_choice_markdown_report() -> None:
    text = _choice().to_markdown()
    assert text.startswith("## Model choice: Same ranking in every implementation")
    assert "| estimator | ARIMA(0,1,1) | ARIMA(1,1,0) |" in text.replace("\\", "")
    assert "### Findings" in text and "### Caution" in text


def test_compare_models_command_writes_html_and_markdown(tmp_path: Path) -> None:
    from forecastaudit.cli import main

    rng = np.random.default_rng(4)
    y = 100 + np.cumsum(rng.normal(size=48))
    dates = pd.period_range("2015-01", periods=48, freq="M").astype(str)
    data = tmp_path / "units.csv"
    pd.DataFrame({"month": dates, "units": y}).to_csv(data, index=False)
    out = tmp_path / "choice.json"
    code = main(
        ["compare-models", str(data), "--model", "ARIMA(0,1,1)", "--model", "ARIMA(1,1,0)",
         "--holdout", "6", "--estimators", "statsforecast", "--out", str(out)]
    )  # fmt: skip
    assert code in (0, 1)
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "choice.html",
        "choice.json",
        "choice.md",
        "units.csv",
    ]
    assert "Model choice across implementations" in (tmp_path / "choice.html").read_text()
    assert (tmp_path / "choice.md").read_text().startswith("## Model choice:")
