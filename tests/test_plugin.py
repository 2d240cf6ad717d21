"""The pytest plugin, tested in temporary projects with pytest's own pytester."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import forecastaudit as fa


@pytest.fixture(autouse=True, scope="module")
def _libraries_imported_once() -> None:
    """pytester's in-process runs restore ``sys.modules`` afterwards, and numpy's compiled
    modules cannot be loaded twice in one process: so every module the inner audits use is
    imported here, in this process, first (by one small audit of the same kind)."""
    y = 20 + np.random.default_rng(0).normal(size=60)
    fa.audit(y, "ARIMA(1,0,0) +mean", estimators=["statsmodels-sarimax", "statsforecast"])


INI = """
[pytest]
audit_estimators = statsmodels-sarimax,statsforecast
"""

TEST_FILE = """
import numpy as np

def series():
    rng = np.random.default_rng(3)
    x = np.zeros(150)
    for t in range(1, 150):
        x[t] = 0.5 * x[t - 1] + rng.normal()
    return 20 + x + SHIFT

def test_model(model_audit):
    model_audit(series(), "ARIMA(1,0,0) +mean", name="ar1-model")
"""


def _project(pytester: pytest.Pytester, shift: float = 0.0) -> None:
    pytester.makeini(INI)
    pytester.makepyfile(test_model=TEST_FILE.replace("SHIFT", repr(shift)))


def test_missing_baseline_fails_and_is_created_only_on_request(pytester: pytest.Pytester) -> None:
    _project(pytester)
    result = pytester.runpytest()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*No baseline record*--audit-update-baselines*"])
    baseline = pytester.path / "audit-baselines" / "ar1-model.json"
    assert not baseline.exists()
    result = pytester.runpytest("--audit-update-baselines")
    result.assert_outcomes(passed=1)
    assert json.loads(baseline.read_text())["spec"]["text"] == "ARIMA(1,0,0) +mean"
    result = pytester.runpytest()
    result.assert_outcomes(passed=1)


def test_drifted_baseline_fails_and_regeneration_updates_it(pytester: pytest.Pytester) -> None:
    _project(pytester)
    pytester.runpytest("--audit-update-baselines").assert_outcomes(passed=1)
    baseline = pytester.path / "audit-baselines" / "ar1-model.json"
    before = json.loads(baseline.read_text())
    # New data (the level moved by 1.5): the re-fit drifts from the signed-off record.
    _project(pytester, shift=1.5)
    result = pytester.runpytest()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*drifted from its baseline*", "*DIFFERENT*"])
    pytester.runpytest("--audit-update-baselines").assert_outcomes(passed=1)
    after = json.loads(baseline.read_text())
    assert after["content_sha256"] != before["content_sha256"]
    pytester.runpytest().assert_outcomes(passed=1)


def test_injected_disagreement_fails_with_findings(pytester: pytest.Pytester) -> None:
    pytester.makeini(
        INI.replace("statsmodels-sarimax,statsforecast", "statsmodels-sarimax,shifted")
    )
    pytester.makeconftest(
        """
from forecastaudit.adapters.registry import register_estimator
from forecastaudit.adapters.statsmodels_sarimax import StatsmodelsSarimax

@register_estimator
class Shifted(StatsmodelsSarimax):
    key = "shifted"
    engine = "test-engine"
    description = "SARIMAX with its AR coefficient moved by 0.2"

    def _fit(self, request):
        out = super()._fit(request)
        out.params = {**out.params, "ar_lag1": out.params["ar_lag1"] + 0.2}
        return out

    def _forecast(self, native, steps, levels):
        # Its forecasts move with it, so the disagreement is material.
        out = super()._forecast(native, steps, levels)
        out.mean = out.mean + 2.0
        out.lower = {k: v + 2.0 for k, v in out.lower.items()}
        out.upper = {k: v + 2.0 for k, v in out.upper.items()}
        return out
"""
    )
    pytester.makepyfile(test_model=TEST_FILE.replace("SHIFT", "0.0"))
    # The shifted adapter is the production estimator: its disagreement fails the audit.
    result = pytester.runpytest_subprocess("--audit-production", "shifted")
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(
        ["*found problems beyond tolerance*", "*production-estimate*shifted*"]
    )


def test_marker_and_options_are_registered(pytester: pytest.Pytester) -> None:
    result = pytester.runpytest("--markers")
    result.stdout.fnmatch_lines(["*slow_audit*"])
    result = pytester.runpytest("--help")
    result.stdout.fnmatch_lines(["*--audit-baselines*", "*--audit-update-baselines*"])


PANEL_TEST_FILE = """
import numpy as np
import pandas as pd

def panel():
    rows = []
    for k, name in enumerate(["north depot", "south depot", "east depot"]):
        rng = np.random.default_rng(10 + k)
        x = np.zeros(120)
        for t in range(1, 120):
            x[t] = 0.5 * x[t - 1] + rng.normal()
        values = 40 + x + (SHIFT if name == "east depot" else 0.0)
        months = pd.period_range("2016-01", periods=120, freq="M").astype(str)
        rows.append(pd.DataFrame({"depot": name, "month": months, "units": values}))
    return pd.concat(rows, ignore_index=True)

def test_depots(panel_audit):
    panel_audit(panel(), "ARIMA(1,0,0) +mean", id_column="depot", name="depots", workers=1)
"""


def test_panel_baseline_one_file_and_drift_by_series(pytester: pytest.Pytester) -> None:
    pytester.makeini(INI)
    pytester.makepyfile(test_panel_drift_check=PANEL_TEST_FILE.replace("SHIFT", "0.0"))
    result = pytester.runpytest()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*No panel baseline*depots.panel.json*--audit-update-baselines*"])
    pytester.runpytest("--audit-update-baselines").assert_outcomes(passed=1)
    baseline = pytester.path / "audit-baselines" / "depots.panel.json"
    document = json.loads(baseline.read_text())
    assert sorted(document["series"]) == ["east depot", "north depot", "south depot"]
    assert list(pytester.path.joinpath("audit-baselines").iterdir()) == [baseline]
    pytester.runpytest().assert_outcomes(passed=1)
    # New data for one depot only: the drift names that series and no other.
    pytester.makepyfile(test_panel_drift_check=PANEL_TEST_FILE.replace("SHIFT", "1.5"))
    result = pytester.runpytest()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(
        [
            "*panel drifted from its baseline*",
            "*The data changed in 1 of 3 series (fingerprints differ from the baseline's)*",
            "*east depot: drift beyond tolerance: data changed (fingerprints differ); "
            "* quantities beyond tolerance, the largest:",
            "    reference mu +1.5 (tolerance 0.021)",
            "*... and * more",
            "*If the new data of east depot and the drift are intended and reviewed, "
            "regenerate with: pytest --audit-update-baselines*",
        ]
    )
    assert "north depot: drift" not in result.stdout.str()


def test_trusted_keys_require_a_signed_baseline(pytester: pytest.Pytester) -> None:
    from forecastaudit.record.document import dumps, load_record

    _project(pytester)
    fa.generate_key_pair(pytester.path / "reviewer.pem", pytester.path / "reviewer.pub.pem")
    pytester.runpytest("--audit-update-baselines").assert_outcomes(passed=1)
    baseline = pytester.path / "audit-baselines" / "ar1-model.json"
    result = pytester.runpytest("--audit-trusted-key", "reviewer.pub.pem")
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*cannot be used*is not signed*"])
    signed = fa.sign_record(load_record(baseline), pytester.path / "reviewer.pem")
    baseline.write_text(dumps(signed), encoding="utf-8")
    result = pytester.runpytest("--audit-trusted-key", "reviewer.pub.pem")
    result.assert_outcomes(passed=1)
    result.stdout.fnmatch_lines(["*baselines must be signed by one of 1 trusted key(s)*"])


def test_a_trusted_key_that_is_not_a_key_is_a_usage_error(pytester: pytest.Pytester) -> None:
    _project(pytester)
    (pytester.path / "bad.pem").write_text("not a key")
    result = pytester.runpytest("--audit-trusted-key", "bad.pem")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*--audit-trusted-key*not a readable PEM public key*"])


# Where relative paths are read from. pytest's rootdir moves (an option's value that is an
# existing path counts when pytest picks it), so the plugin never uses it: command-line paths
# are read from the directory pytest was started in, ini paths from the ini file's folder.

ESTIMATORS = ("--audit-estimators", "statsmodels-sarimax,statsforecast")


def _signed_project_without_ini(
    pytester: pytest.Pytester, monkeypatch: pytest.MonkeyPatch
) -> tuple[Path, Path]:
    """A project folder ``plugin/`` (no ini file anywhere) holding one signed baseline, a
    reviewer's key pair in the sibling folder ``sig/``, and the working directory in
    ``plugin/``. Returns the project folder and its baseline file."""
    from forecastaudit.record.document import dumps, load_record

    project = pytester.mkdir("plugin")
    (project / "test_model.py").write_text(TEST_FILE.replace("SHIFT", "0.0"))
    keys = pytester.mkdir("sig")
    fa.generate_key_pair(keys / "reviewer.pem", keys / "reviewer.pub.pem")
    monkeypatch.chdir(project)
    pytester.runpytest(*ESTIMATORS, "--audit-update-baselines").assert_outcomes(passed=1)
    baseline = project / "audit-baselines" / "ar1-model.json"
    signed = fa.sign_record(load_record(baseline), keys / "reviewer.pem")
    baseline.write_text(dumps(signed), encoding="utf-8")
    return project, baseline


def test_a_relative_key_on_the_command_line_is_read_from_the_start_directory(
    pytester: pytest.Pytester, monkeypatch: pytest.MonkeyPatch
) -> None:
    project, baseline = _signed_project_without_ini(pytester, monkeypatch)
    assert baseline.parent == project / "audit-baselines"
    result = pytester.runpytest(*ESTIMATORS, "--audit-trusted-key", "../sig/reviewer.pub.pem")
    result.assert_outcomes(passed=1)
    result.stdout.fnmatch_lines(
        [f"forecastaudit: baselines {project / 'audit-baselines'}; *1 trusted key(s)"]
    )
    # A path that is right from the parent folder, but not from here, is a usage error that
    # says where it was looked for.
    result = pytester.runpytest(*ESTIMATORS, "--audit-trusted-key", "sig/reviewer.pub.pem")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(
        [
            f"*Cannot read the public key {project / 'sig' / 'reviewer.pub.pem'}:*"
            f"given on the command line is read from {project};*"
        ]
    )


def test_an_absolute_key_elsewhere_does_not_move_the_baseline_folder(
    pytester: pytest.Pytester, monkeypatch: pytest.MonkeyPatch
) -> None:
    project, _ = _signed_project_without_ini(pytester, monkeypatch)
    key = pytester.path / "sig" / "reviewer.pub.pem"
    result = pytester.runpytest(*ESTIMATORS, "--audit-trusted-key", str(key))
    # The key's path made pytest pick the common parent as its rootdir ...
    result.stdout.fnmatch_lines([f"rootdir: {pytester.path}*"])
    # ... yet the baselines are still read from the folder pytest was started in.
    result.stdout.fnmatch_lines([f"forecastaudit: baselines {project / 'audit-baselines'};*"])
    result.assert_outcomes(passed=1)
    assert not (pytester.path / "audit-baselines").exists()


def test_ini_paths_are_read_from_the_ini_files_folder(
    pytester: pytest.Pytester, monkeypatch: pytest.MonkeyPatch
) -> None:
    from forecastaudit.record.document import dumps, load_record

    pytester.makeini(INI + "audit_baselines = records\naudit_trusted_keys = sig/reviewer.pub.pem\n")
    keys = pytester.mkdir("sig")
    fa.generate_key_pair(keys / "reviewer.pem", keys / "reviewer.pub.pem")
    tests = pytester.mkdir("tests")
    (tests / "test_model.py").write_text(TEST_FILE.replace("SHIFT", "0.0"))
    monkeypatch.chdir(tests)
    pytester.runpytest("--audit-update-baselines").assert_outcomes(passed=1)
    baseline = pytester.path / "records" / "ar1-model.json"
    assert sorted(p.name for p in (pytester.path / "records").iterdir()) == ["ar1-model.json"]
    assert not (tests / "records").exists()
    # The unsigned baseline fails against the ini file's key: the key was found and used.
    result = pytester.runpytest()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*cannot be used*is not signed*"])
    signed = fa.sign_record(load_record(baseline), keys / "reviewer.pem")
    baseline.write_text(dumps(signed), encoding="utf-8")
    result = pytester.runpytest()
    result.assert_outcomes(passed=1)
    result.stdout.fnmatch_lines(
        [f"forecastaudit: baselines {pytester.path / 'records'}; *1 trusted key(s)"]
    )
    # The same key named on the command line is read from where pytest was started (tests/).
    result = pytester.runpytest("--audit-trusted-key", "../sig/reviewer.pub.pem")
    result.assert_outcomes(passed=1)
