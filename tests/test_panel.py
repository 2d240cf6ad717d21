"""Panels: ``audit_panel`` over the demo supply lines, on every backend, with faults and resumes.

The full demo panel (240 supply lines) is audited once for the module; smaller panels check
that the three ways of running series (inline, local processes, a Dask cluster) agree, that
a hanging or crashing series is reported and tried again on resume, that the store survives
a cut last line, and that bad input is refused before anything is fitted.

Optimiser stop positions depend on the machine's floating point and BLAS, so the planted
lines are checked by which series fail and why, never by the digits of the gap.
"""

from __future__ import annotations

import contextlib
import importlib
import json
import re
import shutil
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from forecastaudit.adapters import registry
from forecastaudit.demo import PANEL_PLANTED, generate_demo_panel
from forecastaudit.errors import PanelError
from forecastaudit.panel import audit_panel
from forecastaudit.panel.data import looks_like_panel
from forecastaudit.panel.store import STORE_NAME

MODEL = "ARIMA(0,1,1)x(0,1,1)12 +log"
COLUMNS = {"id_column": "supply_line", "value_column": "units"}
PRODUCTION = "statsmodels-sarimax"
PLUGIN_FOLDER = Path(__file__).parent / "plugin_packages"
MARKER = "faulty-marker"

#: Supply lines of the small panel: three hospitals' lines and one planted line.
SMALL_LINES = [
    *(
        f"H00{h} {p}"
        for h in (1, 2, 3)
        for p in ("red-cells", "platelets", "plasma", "cryoprecipitate")
    ),
    "H013 red-cells",
]
SMALL_LINES.remove("H003 cryoprecipitate")
#: Ordinary (not planted) lines that fail as well. Measured with statsmodels' default fit
#: on this 2-core x86_64 machine: on "H032 red-cells" statsmodels-sarimax stops 0.065
#: log-likelihood units short, its forecasts are only 0.058 SE off but its 95% intervals
#: are 18% wider than at the optimum, which is material. The gap is small, so another
#: machine may stop elsewhere: allowed, never required, and always after the planted lines.
ORDINARY_FAILING = {"H032 red-cells"}
EXACT_COLUMNS = ["verdict", "cause", "cause_estimator", "status"]
CLOSE_COLUMNS = ["production_gap", "production_forecast_se"]


def _store_lines(folder: Path) -> list[str]:
    return (folder / STORE_NAME).read_text(encoding="utf-8").splitlines()


def _as_series(frame: pd.DataFrame, line: str) -> pd.Series:
    part = frame[frame["supply_line"] == line]
    index = pd.PeriodIndex(part["month"], freq="M", name="month")
    return pd.Series(part["units"].to_numpy(dtype=float), index=index, name=line)


@contextlib.contextmanager
def marker_plugin() -> Iterator[None]:
    """The test plugin folder on ``sys.path`` (so ``faulty-marker`` is registered).

    On exit the folder and its module are gone and the registry is read again, so no later
    test meets the marker adapter among the installed estimators.
    """
    try:
        with pytest.MonkeyPatch.context() as patch:
            patch.syspath_prepend(str(PLUGIN_FOLDER))
            registry.refresh()
            yield
    finally:
        sys.modules.pop("faulty_adapters", None)
        importlib.invalidate_caches()
        registry.refresh()


# --------------------------------------------------------------------------- full panel
@pytest.fixture(scope="module")
def full_panel(tmp_path_factory: pytest.TempPathFactory) -> Any:
    """The 240-line demo panel audited once on two worker processes (about 90 s here)."""
    folder = tmp_path_factory.mktemp("full-panel")
    frame = generate_demo_panel(hospitals=60)
    result = audit_panel(frame, MODEL, workers=2, out=folder, **COLUMNS)
    return result, folder, frame


@pytest.mark.slow
def test_full_panel_puts_the_planted_lines_first(full_panel: Any) -> None:
    result, _, frame = full_panel
    summary = result.summary
    assert len(summary) == frame["supply_line"].nunique() == 240
    assert (summary["status"] == "audited").all(), summary[summary["status"] != "audited"]
    planted = set(PANEL_PLANTED)
    top = summary.iloc[: len(planted)]
    assert set(top.index) == planted
    assert (top["verdict"] == "fail").all()
    assert (top["cause"] == "stopped-short").all()
    assert (top["cause_estimator"] == PRODUCTION).all()
    assert top["production_material"].astype(bool).all()
    assert (top["rank"] == 0).all()
    others = summary.iloc[len(planted) :]
    extra = others[others["verdict"] == "fail"]
    assert set(extra.index) <= ORDINARY_FAILING, extra
    assert (extra["cause"] == "stopped-short").all() and (
        extra["cause_estimator"] == PRODUCTION).all()  # fmt: skip
    assert result.failing == [*top.index, *extra.index]
    assert result.counts["fail"] == len(planted) + len(extra)
    assert result.resumed == 0 and result.backend == "processes" and result.workers == 2


@pytest.mark.slow
def test_full_panel_first_cause_names_production_and_planted_ids(full_panel: Any) -> None:
    result, _, _ = full_panel
    first = result.cause_sentences()[0]
    assert first.startswith(f"The production estimator ({PRODUCTION}) stopped short"), first
    assert "of 240 series" in first
    for line in PANEL_PLANTED:
        assert line in first, first
    count = result.causes[0]
    assert (count.kind, count.production) == ("stopped-short", True)
    assert set(PANEL_PLANTED) <= set(count.material) <= set(PANEL_PLANTED) | ORDINARY_FAILING
    assert set(count.material) == set(result.failing)


@pytest.mark.slow
def test_full_panel_files(full_panel: Any) -> None:
    result, folder, _ = full_panel
    for name in ("panel-report.html", "panel-report.md", "panel-summary.csv", STORE_NAME):
        assert (folder / name).is_file() and (folder / name).stat().st_size > 0, name
    reports = result.summary["report"].dropna()
    assert set(reports.index) == set(result.failing)
    assert set(PANEL_PLANTED) <= set(reports.index)
    written = {p.relative_to(folder).as_posix() for p in (folder / "series").glob("*.html")}
    assert written == set(reports)
    # Header and one line per series.
    assert len(_store_lines(folder)) == 1 + 240
    csv = pd.read_csv(folder / "panel-summary.csv", index_col="series")
    assert list(csv.index) == list(result.summary.index)
    markdown = (folder / "panel-report.md").read_text(encoding="utf-8")
    assert all(line in markdown for line in PANEL_PLANTED)


@pytest.mark.slow
def test_full_panel_report_in_headless_chromium(full_panel: Any, tmp_path: Path) -> None:
    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if browser is None:
        pytest.skip("chromium is not installed: the panel report's script is not run")
    _, folder, _ = full_panel
    page = (folder / "panel-report.html").resolve().as_uri()
    base = [browser, "--headless", "--no-sandbox", "--disable-gpu",
            f"--user-data-dir={tmp_path / 'profile'}"]  # fmt: skip
    dumped = subprocess.run(
        [*base, "--dump-dom", page], capture_output=True, text=True, timeout=120, check=True
    ).stdout
    body = dumped.split('id="series-table"', 1)[1].split("</tbody>", 1)[0]
    assert len(re.findall(r"<tr data-verdict=", body)) == 240
    # The filter script ran on load and counted the rows it shows.
    assert "240 of 240 series shown" in dumped
    png = tmp_path / "panel.png"
    subprocess.run(
        [*base, f"--screenshot={png}", "--window-size=1280,1600", page],
        capture_output=True,
        timeout=120,
        check=True,
    )
    assert png.is_file() and png.stat().st_size > 1000
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


# --------------------------------------------------------------------------- backends
@pytest.fixture(scope="module")
def small_frame() -> pd.DataFrame:
    frame = generate_demo_panel(hospitals=15)
    return frame[frame["supply_line"].isin(SMALL_LINES)].reset_index(drop=True)


@pytest.fixture(scope="module")
def small_runs(small_frame: pd.DataFrame, tmp_path_factory: pytest.TempPathFactory) -> Any:
    """The small panel inline, on two processes and on a two-worker Dask cluster."""
    distributed = pytest.importorskip("distributed")
    runs: dict[str, Any] = {}
    for name, workers in (("inline", 1), ("processes", 2)):
        folder = tmp_path_factory.mktemp(name)
        runs[name] = (audit_panel(small_frame, MODEL, workers=workers, out=folder, **COLUMNS),
                      folder)  # fmt: skip
    folder = tmp_path_factory.mktemp("dask")
    with (
        distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                 dashboard_address=None) as cluster,
        distributed.Client(cluster) as client,
    ):  # fmt: skip
        runs["dask"] = (audit_panel(small_frame, MODEL, client=client, out=folder, **COLUMNS),
                        folder)  # fmt: skip
    return runs


@pytest.mark.slow
def test_backends_give_the_same_summary(small_runs: dict[str, Any]) -> None:
    inline = small_runs["inline"][0]
    assert (inline.backend, inline.workers) == ("inline", 1)
    assert (small_runs["processes"][0].backend, small_runs["processes"][0].workers) == (
        "processes", 2)  # fmt: skip
    assert (small_runs["dask"][0].backend, small_runs["dask"][0].workers) == ("dask", 2)
    expected = inline.summary
    assert len(expected) == len(SMALL_LINES) == 12
    assert (expected["status"] == "audited").all()
    # The planted line fails on the production estimator's early stop; nothing else fails.
    assert expected.index[0] == "H013 red-cells"
    assert tuple(expected.iloc[0][["verdict", "cause", "cause_estimator"]]) == (
        "fail", "stopped-short", PRODUCTION)  # fmt: skip
    assert inline.failing == ["H013 red-cells"]
    for name in ("processes", "dask"):
        other = small_runs[name][0].summary
        assert list(other.index) == list(expected.index), name
        pd.testing.assert_frame_equal(other[EXACT_COLUMNS], expected[EXACT_COLUMNS])
        for column in CLOSE_COLUMNS:
            np.testing.assert_allclose(
                other[column].to_numpy(dtype=float),
                expected[column].to_numpy(dtype=float),
                rtol=1e-6,
                err_msg=f"{name} {column}",
            )


def test_store_resumes_after_a_cut_last_line(
    small_runs: dict[str, Any], small_frame: pd.DataFrame, tmp_path: Path
) -> None:
    source = small_runs["processes"][1]
    folder = tmp_path / "cut"
    shutil.copytree(source, folder)
    path = folder / STORE_NAME
    lines = path.read_bytes().splitlines(keepends=True)
    assert len(lines) == 1 + 12
    cut_id = json.loads(lines[-1])["id"]
    path.write_bytes(b"".join(lines[:-1]) + lines[-1][: len(lines[-1]) // 2])
    result = audit_panel(small_frame, MODEL, workers=1, out=folder, **COLUMNS)
    assert result.resumed == 11
    after = _store_lines(folder)
    # The cut line was dropped and only the cut series was audited again.
    assert len(after) == 1 + 12
    assert json.loads(after[-1])["id"] == cut_id
    assert [json.loads(x)["id"] for x in after[1:-1]] == [json.loads(x)["id"]
                                                          for x in lines[1:-1]]  # fmt: skip
    expected = small_runs["processes"][0].summary
    pd.testing.assert_frame_equal(result.summary[EXACT_COLUMNS], expected[EXACT_COLUMNS])


# --------------------------------------------------------------------------- faults
@pytest.mark.slow
def test_hanging_and_crashing_series_then_resume(tmp_path: Path) -> None:
    frame = generate_demo_panel(hospitals=2)
    lines = ["H001 red-cells", "H001 platelets", "H001 plasma", "H002 red-cells",
             "H002 plasma"]  # fmt: skip
    good = {line: _as_series(frame, line) for line in lines}
    hang, crash = "H001 plasma", "H002 red-cells"
    marked = {k: v.copy() for k, v in good.items()}
    marked[hang].iloc[0] = 4242.0
    marked[crash].iloc[0] = 6666.0
    folder = tmp_path / "faults"
    with marker_plugin():
        first = audit_panel(marked, MODEL, estimators=[PRODUCTION, MARKER], workers=2,
                            time_limit=20, out=folder)  # fmt: skip
        summary = first.summary
        assert summary.loc[hang, "status"] == "timed-out"
        assert summary.loc[crash, "status"] == "crashed"
        assert (summary.loc[[hang, crash], "verdict"] == "not-audited").all()
        rest = [line for line in lines if line not in (hang, crash)]
        assert (summary.loc[rest, "status"] == "audited").all(), summary.loc[rest, "error"]
        assert set(first.not_audited) == {hang, crash}
        assert len(_store_lines(folder)) == 1 + 5

        second = audit_panel(good, MODEL, estimators=[PRODUCTION, MARKER], workers=2,
                             time_limit=20, out=folder)  # fmt: skip
    assert second.resumed == len(rest) == 3
    new = [json.loads(x) for x in _store_lines(folder)[1 + 5 :]]
    assert sorted(e["id"] for e in new) == sorted([hang, crash])
    assert all(e["status"] == "audited" for e in new)
    assert (second.summary["status"] == "audited").all()
    assert second.not_audited == []
    assert MARKER not in registry.available_estimators()


# --------------------------------------------------------------------------- settings
def test_resume_refuses_other_settings(tmp_path: Path) -> None:
    frame = generate_demo_panel(hospitals=1)
    one = {"H001 plasma": _as_series(frame, "H001 plasma")}
    folder = tmp_path / "settings"
    first = audit_panel(one, MODEL, estimators=[PRODUCTION], workers=1, out=folder)
    assert first.resumed == 0 and first.summary.loc["H001 plasma", "status"] == "audited"
    again = audit_panel(one, MODEL, estimators=[PRODUCTION], workers=1, out=folder)
    assert again.resumed == 1
    with pytest.raises(PanelError, match=r"changed: tolerances\).*fresh=True"):
        audit_panel(one, MODEL, estimators=[PRODUCTION], workers=1, out=folder,
                    tolerances={"parameter_atol": 0.05})  # fmt: skip
    fresh = audit_panel(one, MODEL, estimators=[PRODUCTION], workers=1, out=folder,
                        tolerances={"parameter_atol": 0.05}, fresh=True)  # fmt: skip
    assert fresh.resumed == 0
    assert fresh.settings["tolerances"]["parameter_atol"] == 0.05
    assert len(_store_lines(folder)) == 1 + 1


# --------------------------------------------------------------------------- input errors
@pytest.fixture
def tiny_frame() -> pd.DataFrame:
    return generate_demo_panel(hospitals=1)


def _refused(frame: pd.DataFrame, match: str, spec: Any = MODEL, **columns: Any) -> None:
    before = frame.copy(deep=True)
    with pytest.raises(PanelError, match=match):
        audit_panel(frame, spec, estimators=[PRODUCTION], workers=1, **columns)
    pd.testing.assert_frame_equal(frame, before)


def test_missing_id_column_is_refused(tiny_frame: pd.DataFrame) -> None:
    _refused(tiny_frame, r"Name the column that identifies each series with id_column",
             value_column="units")  # fmt: skip


def test_unknown_column_is_refused(tiny_frame: pd.DataFrame) -> None:
    _refused(tiny_frame, r"no column 'unit' \(value_column\); its columns",
             id_column="supply_line", value_column="unit")  # fmt: skip


def test_repeated_row_is_refused(tiny_frame: pd.DataFrame) -> None:
    frame = pd.concat([tiny_frame, tiny_frame.iloc[[7]]], ignore_index=True)
    # Text months are parsed as dates first, so the message shows 2016-08-01 00:00:00.
    _refused(frame, r"'H001 red-cells' has two rows for 2016-08.*; keep one row per series "
             "and period", **COLUMNS)  # fmt: skip


def test_non_numeric_value_is_refused(tiny_frame: pd.DataFrame) -> None:
    frame = tiny_frame.astype({"units": object})
    frame.loc[5, "units"] = "n/a"
    _refused(frame, r"not a number: 'n/a' \(row 5\); fix it", **COLUMNS)


def test_empty_table_is_refused(tiny_frame: pd.DataFrame) -> None:
    # With the time column named: without it, an empty table is refused for having no
    # column of dates (the emptiness check comes after the column guess; reported).
    _refused(tiny_frame.iloc[0:0], r"no rows; pass the observations", time_column="month",
             **COLUMNS)  # fmt: skip


def test_spec_mapping_missing_an_id_is_refused(tiny_frame: pd.DataFrame) -> None:
    ids = tiny_frame["supply_line"].unique().tolist()
    specs = dict.fromkeys(ids[:-1], MODEL)
    _refused(tiny_frame, rf"spec has no model for 1 series \('{ids[-1]}'\); give one for "
             "every id", spec=specs, **COLUMNS)  # fmt: skip


def test_short_series_is_an_input_error_and_html_escapes_ids(tmp_path: Path) -> None:
    frame = generate_demo_panel(hospitals=1)
    odd = "<b>x</b>&"
    panel = {odd: _as_series(frame, "H001 plasma"),
             "too-short": _as_series(frame, "H001 platelets").iloc[:10]}  # fmt: skip
    result = audit_panel(panel, MODEL, estimators=[PRODUCTION], workers=1, out=tmp_path)
    summary = result.summary
    assert summary.loc[odd, "status"] == "audited"
    assert summary.loc["too-short", "status"] == "input-error"
    assert summary.loc["too-short", "verdict"] == "not-audited"
    assert summary.loc["too-short", "error"]
    html = (tmp_path / "panel-report.html").read_text(encoding="utf-8")
    assert "&lt;b&gt;x&lt;/b&gt;&amp;" in html
    assert odd not in html


# --------------------------------------------------------------------------- detection
def test_looks_like_panel(tiny_frame: pd.DataFrame) -> None:
    reason = looks_like_panel(generate_demo_panel(hospitals=2))
    assert reason is not None and "dates repeat" in reason and "'month'" in reason
    one = tiny_frame[tiny_frame["supply_line"] == "H001 plasma"][["month", "units"]]
    assert looks_like_panel(one) is None
