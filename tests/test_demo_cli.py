"""The demo data, the record file and the command line."""

from __future__ import annotations

import json
import shlex
import shutil
from pathlib import Path

import pandas as pd
import pytest

import forecastaudit as fa
from forecastaudit.cli import (
    EXIT_FINDINGS,
    EXIT_PASS,
    EXIT_USAGE,
    HTML_NAME,
    MARKDOWN_NAME,
    RECORD_NAME,
    main,
)
from forecastaudit.demo import generate_demo_series


def test_shipped_demo_matches_its_generator() -> None:
    pd.testing.assert_series_equal(fa.load_demo(), generate_demo_series(), check_index_type=False)
    demo = fa.load_demo()
    assert len(demo) == 180
    assert str(demo.index[0]) == "2011-01" and str(demo.index[-1]) == "2025-12"
    assert (demo > 0).all()


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> tuple[int, Path]:
    out = tmp_path_factory.mktemp("demo")
    code = main(["demo", "--out", str(out), "--quiet"])
    return code, out


def test_demo_command_writes_a_record(demo_run: tuple[int, Path]) -> None:
    code, out = demo_run
    assert code == EXIT_PASS  # the demo exits 0 whenever it ran
    record = fa.load_record(out / RECORD_NAME)
    assert record["spec"]["text"] == str(fa.DEMO_SPEC)
    assert record["provenance"]["data"]["n"] == 180
    assert record["verdict"] in {"pass", "pass-with-notes", "fail"}
    assert not [p for p in out.iterdir() if p.name.endswith(".tmp")]
    html = (out / HTML_NAME).read_text()
    assert "red_cell_units" in html and "not proof" in html
    assert "not proof" in (out / MARKDOWN_NAME).read_text()


def test_audit_command_on_a_csv(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    csv = tmp_path / "units.csv"
    fa.load_demo().to_timestamp().to_frame().to_csv(csv, index_label="month")
    out = tmp_path / "out"
    code = main(
        [
            "audit",
            str(csv),
            "--column",
            "red_cell_units",
            "--model",
            "ARIMA(0,1,1)x(0,1,1)12 +log",
            "--estimators",
            "statsmodels-sarimax,statsmodels-arima",
            "--tolerance",
            "min_independent_engines=3",
            "--out",
            str(out),
            "--quiet",
        ]
    )
    # Two wrappers of one engine and the reference cannot meet a policy of three engines.
    assert code == EXIT_FINDINGS
    record = json.loads((out / RECORD_NAME).read_text())
    assert record["provenance"]["data"]["period"] == 12
    assert record["verdict"] == "fail"
    code = main(
        [
            "audit",
            str(csv),
            "--model",
            "ARIMA(0,1,1)x(0,1,1)12 +log",
            "--estimators",
            "statsmodels-sarimax",
            "--tolerance",
            "min_independent_engines=1",
            "--quiet",
        ]
    )
    assert code == EXIT_PASS
    assert "PASS" in capsys.readouterr().out


def test_usage_errors_exit_2_and_write_nothing(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "out"
    code = main(
        ["audit", str(tmp_path / "missing.csv"), "--model", "ARIMA(1,0,0)", "--out", str(out)]
    )
    assert code == EXIT_USAGE
    assert "No such file" in capsys.readouterr().err
    csv = tmp_path / "bad.csv"
    csv.write_text("month,units\n2020-01,1\n2020-02,x\n")
    code = main(
        ["audit", str(csv), "--column", "units", "--model", "ARIMA(1,0,0)", "--out", str(out)]
    )
    assert code == EXIT_USAGE
    code = main(["audit", str(csv), "--column", "units", "--model", "ARMA(1,0)", "--out", str(out)])
    assert code == EXIT_USAGE
    assert "Cannot read the model" in capsys.readouterr().err
    assert not out.exists()


def test_help_lists_commands_and_exit_codes(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as stop:
        main(["--help"])
    assert stop.value.code == 0
    text = capsys.readouterr().out
    for word in ("demo", "audit", "estimators", "exit codes"):
        assert word in text


def test_estimators_command_lists_engines(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["estimators"]) == EXIT_PASS
    text = capsys.readouterr().out
    assert "statsforecast-arima" in text and "statsmodels-statespace" in text


def _readme_commands() -> list[list[str]]:
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text()
    section = readme.split("## On the command line", 1)[1]
    block = section.split("```", 2)[1]
    joined = block.replace("\\\n", " ")
    return [shlex.split(line) for line in joined.splitlines() if line.startswith("forecastaudit ")]


def test_readme_command_line_examples_run(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    commands = _readme_commands()
    assert {c[1] for c in commands} == {"demo", "audit", "changes", "compare-models", "estimators"}
    data = tmp_path / "forecastaudit" / "data"
    data.mkdir(parents=True)
    source = Path(fa.__file__).parent / "data" / "ashgrove_red_cell_units.csv"
    shutil.copy(source, data / source.name)
    monkeypatch.chdir(tmp_path)
    for command in commands:
        code = main([*command[1:], *(["--quiet"] if command[1] in {"demo", "audit"} else [])])
        assert code in {EXIT_PASS, EXIT_FINDINGS}, command
    assert (tmp_path / "audit-output" / HTML_NAME).exists()


def test_order_search_joins_the_audit_record_and_reports(tmp_path: Path) -> None:
    # Nile without a period: the searches are cheap (no seasonal part).
    from statsmodels.datasets import nile

    volume = nile.load_pandas().data["volume"].to_numpy()
    report = fa.audit(
        volume,
        "ARIMA(0,1,1)",
        estimators=["statsmodels-sarimax", "statsforecast"],
        order_search=True,
    )
    record = json.loads(report.to_json())
    assert record["options"]["order_search"] is True
    searched = {row["search"] for row in record["order_search"]["selections"]}
    assert searched >= {"pmdarima", "statsforecast"}
    assert any(f["kind"] == "search-rank" for f in record["findings"])
    html = report.to_html()
    assert "Order searches" in html and "Automatic order searches" in html
    markdown = report.to_markdown()
    assert "Automatic order searches" in markdown
    # Terse column names get plain headings, and ranks are said to be within a differencing.
    assert "rank within its differencing" in markdown and "| rank |" not in markdown
    assert "observations after differencing" in markdown and "| n w |" not in markdown
    assert "each choice has its own best model at rank 1" in markdown
    defaults = record["order_search"]["default_constant"]
    assert all(row["default_adds"] is not None or row["reason"] for row in defaults)
