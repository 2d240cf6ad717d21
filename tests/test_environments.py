"""Estimators run inside another Python environment.

Two kinds of environment are used. A *mirror* is made by hand in a temporary folder: a
virtual environment whose site-packages is this environment's own, described by an
``environment.json`` as ``forecastaudit environment create`` writes it. It has the same
library versions as here, so the subprocess, the worker module and the translation are
checked offline against the built-in adapter, to the precision of a deterministic rerun.
The slow test builds a real environment with statsmodels 0.14.1 (whose cp311 manylinux
wheels are on the package registry; numpy below 2, which that release was built against)
and audits it beside the installed statsmodels; it is skipped, with the reason, when the
package registry cannot be reached.
"""

from __future__ import annotations

import ast
import json
import math
import os
import subprocess
import sys
import urllib.request
from importlib import metadata
from pathlib import Path

import pytest

import forecastaudit as fa
from forecastaudit.adapters import environment_worker
from forecastaudit.adapters.other_environment import WORKER, environment_adapter
from forecastaudit.environments import (
    create_environment,
    describe_environments,
    get_environment,
    list_environments,
)
from forecastaudit.errors import EnvironmentSetupError
from forecastaudit.testing import check_adapter

LOCAL = "statsmodels-sarimax"
MIRRORED = "statsmodels-sarimax@mirror"


def _site_packages() -> Path:
    import sysconfig

    return Path(sysconfig.get_paths()["purelib"])


def make_mirror(root: Path, name: str = "mirror") -> Path:
    """A virtual environment sharing this one's site-packages, described as ours are."""
    env = root / name
    version = f"python{sys.version_info.major}.{sys.version_info.minor}"
    (env / "bin").mkdir(parents=True)
    (env / "lib" / version).mkdir(parents=True)
    base = getattr(sys, "_base_executable", sys.executable)
    os.symlink(base, env / "bin" / "python")
    os.symlink(_site_packages(), env / "lib" / version / "site-packages")
    (env / "pyvenv.cfg").write_text(
        f"home = {os.path.dirname(base)}\ninclude-system-site-packages = false\n"
    )
    names = ("numpy", "scipy", "pandas", "statsmodels", "statsforecast")
    installed = {n: metadata.version(n) for n in names}
    description = {
        "kind": "forecastaudit-environment",
        "name": name,
        "python": ".".join(map(str, sys.version_info[:3])),
        "requested": ["statsmodels"],
        "installed": installed,
        "created": "2026-01-01T00:00:00+00:00",
    }
    (env / "environment.json").write_text(json.dumps(description))
    return env


@pytest.fixture(scope="module")
def mirror_folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("environments")
    make_mirror(root)
    return root


@pytest.fixture(scope="module")
def mirrored_audit(mirror_folder: Path) -> fa.AuditResult:
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("FORECASTAUDIT_ENVIRONMENTS", str(mirror_folder))
        return fa.audit(
            fa.load_demo(),
            fa.DEMO_SPEC,
            estimators=[LOCAL, "statsforecast"],
            environments={"mirror": [LOCAL, "statsforecast"]},
        )


@pytest.mark.parametrize("key", [LOCAL, "statsforecast"])
def test_same_version_elsewhere_gives_the_same_estimate(
    mirrored_audit: fa.AuditResult, key: str
) -> None:
    local, other = mirrored_audit.estimates[key], mirrored_audit.estimates[f"{key}@mirror"]
    assert other.ok, other.reason
    # The same library version on the same machine, fitted in a subprocess: a deterministic
    # rerun of the same optimiser, translated by the same code (as check_worker_fit).
    for name, value in local.params.items():
        assert other.params[name] == pytest.approx(value, rel=1e-8, abs=1e-12), name
    assert other.loglike_native == pytest.approx(local.loglike_native, rel=1e-12)
    assert other.criteria_native == pytest.approx(local.criteria_native, rel=1e-12)
    assert other.loglike_definition == local.loglike_definition
    assert other.engine == local.engine  # another copy of one engine is not new evidence
    assert other.sigma2_kind == local.sigma2_kind
    assert other.options == {"environment": {"name": "mirror"}, **local.options}
    fc_local = mirrored_audit.forecasts_transformed[key]
    fc_other = mirrored_audit.forecasts_transformed[f"{key}@mirror"]
    assert fc_other.mean == pytest.approx(fc_local.mean, rel=1e-8)
    assert fc_other.se == pytest.approx(fc_local.se, rel=1e-8)


def test_provenance_and_columns(mirrored_audit: fa.AuditResult) -> None:
    other = mirrored_audit.estimates[MIRRORED]
    assert other.origin == "environment"
    assert other.version == metadata.version("statsmodels")
    assert other.provenance["environment"] == "mirror"
    assert other.provenance["packages"]["numpy"] == metadata.version("numpy")
    assert other.column == f"{MIRRORED} (statsmodels {other.version})"
    record = mirrored_audit.to_dict()
    assert record["provenance"]["estimators"][MIRRORED]["origin"] == "environment"
    assert record["estimates"][MIRRORED]["provenance"]["python"]
    markdown = mirrored_audit.to_markdown()
    assert f"{MIRRORED} (statsmodels {other.version})" in markdown


@pytest.mark.parametrize("key", [LOCAL, "statsforecast"])
def test_own_likelihood_in_the_environment(mirror_folder: Path, log_airline, key: str) -> None:
    """The library's own log-likelihood at fixed parameters, there and here, is the same."""
    from forecastaudit.adapters.protocol import FitRequest
    from forecastaudit.adapters.registry import get_adapter
    from forecastaudit.spec import ModelSpec

    spec = ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12)
    params = {"ma_lag1": -0.4, "sma_lag12": -0.6, "sigma2": 0.0014}
    cls = environment_adapter("mirror", key, str(mirror_folder))
    request = FitRequest(log_airline, spec)
    there = cls().loglike_at(request, params)
    here = get_adapter(key).loglike_at(request, params)
    assert math.isfinite(there)
    assert there == pytest.approx(here, rel=1e-12)


@pytest.mark.parametrize("key", [LOCAL, "statsforecast"])
def test_conformance_of_the_environment_adapter(
    mirror_folder: Path, monkeypatch: pytest.MonkeyPatch, key: str
) -> None:
    monkeypatch.setenv("FORECASTAUDIT_ENVIRONMENTS", str(mirror_folder))
    lines = check_adapter(environment_adapter("mirror", key))
    assert "check_worker_fit: passed" in lines
    assert "check_forecast: passed" in lines
    assert "check_own_loglike: passed" in lines


def test_worker_module_is_stand_alone(mirror_folder: Path) -> None:
    """The worker imports nothing of forecastaudit and runs by path in isolated mode."""
    tree = ast.parse(Path(environment_worker.__file__).read_text())
    imported = {
        alias.name.split(".")[0]
        for node in ast.walk(tree)
        if isinstance(node, ast.Import | ast.ImportFrom)
        for alias in (node.names if isinstance(node, ast.Import) else [ast.alias(node.module)])
    }
    assert "forecastaudit" not in imported
    assert imported <= {
        "contextlib",
        "io",
        "json",
        "math",
        "platform",
        "sys",
        "traceback",
        "warnings",
        "numpy",
        "importlib",
        "inspect",
        "statsmodels",
        "statsforecast",
    }
    interpreter = mirror_folder / "mirror" / "bin" / "python"
    done = subprocess.run(
        [str(interpreter), "-I", str(WORKER)],
        input='{"op": "versions"}\n{"op": "nonsense"}\n',
        capture_output=True,
        text=True,
        timeout=120,
        check=True,
    )
    first, second = (json.loads(line) for line in done.stdout.splitlines())
    assert first["ok"] and first["versions"]["packages"]["statsmodels"]
    assert not second["ok"] and "unknown request" in second["error"]


def test_environment_store(mirror_folder: Path) -> None:
    (found,) = list_environments(mirror_folder)
    assert found.name == "mirror" and found.version_of("statsmodels")
    with pytest.raises(EnvironmentSetupError, match="environments there: mirror"):
        get_environment("elsewhere", mirror_folder)
    with pytest.raises(EnvironmentSetupError, match="exists already"):
        create_environment("mirror", ["statsmodels==0.14.1"], folder=mirror_folder)
    with pytest.raises(EnvironmentSetupError, match="environment name"):
        create_environment("Bad Name", ["statsmodels"], folder=mirror_folder)
    with pytest.raises(EnvironmentSetupError, match="not a requirement pip understands"):
        create_environment("x", ["--index-url=http://elsewhere"], folder=mirror_folder)
    with pytest.raises(EnvironmentSetupError, match="not pip options"):
        create_environment("x", ["statsmodels; rm -rf /"], folder=mirror_folder)
    assert [e.name for e in list_environments(mirror_folder)] == ["mirror"]
    with pytest.raises(EnvironmentSetupError, match="No environment"):
        fa.audit(fa.load_demo(), fa.DEMO_SPEC, estimators=[LOCAL], environments=["nowhere"])
    with pytest.raises(EnvironmentSetupError, match="must be a mapping"):
        fa.audit(fa.load_demo(), fa.DEMO_SPEC, estimators=[LOCAL], environments=5)
    with pytest.raises(EnvironmentSetupError, match="must map an environment name"):
        fa.audit(fa.load_demo(), fa.DEMO_SPEC, estimators=[LOCAL], environments={"m": 3})


def test_cli_environment_list_and_option(mirror_folder: Path, capsys, monkeypatch) -> None:
    from forecastaudit.cli import EXIT_PASS, main

    assert main(["environment", "list", "--folder", str(mirror_folder)]) == EXIT_PASS
    assert "statsmodels-sarimax (statsmodels" in capsys.readouterr().out
    from forecastaudit.cli import _parse_environments

    assert _parse_environments(["mirror"]) == {"mirror": None}
    assert _parse_environments(["a=statsmodels-sarimax"]) == {"a": ["statsmodels-sarimax"]}


# ---------------------------------------------------------------------- broken ones
def _break(env: Path, how: str) -> Path:
    """Break a mirror's interpreter in one way. The link to this Python is removed first,
    so nothing is ever written through it."""
    python = env / "bin" / "python"
    python.unlink()
    if how == "dangling":
        python.symlink_to(env.parent / "moved-away" / "python3")
    elif how == "exits":
        python.write_text("#!/bin/sh\necho 'cannot find its libraries' >&2\nexit 3\n")
        python.chmod(0o755)
    elif how == "not-executable":
        python.write_text("not a program\n")
        python.chmod(0o644)
    return python


def test_a_file_is_not_an_environments_folder(tmp_path: Path, capsys) -> None:
    from forecastaudit.cli import EXIT_USAGE, main

    script = tmp_path / "make_data.py"
    script.write_text("print('data')\n")
    message = f"{script} is a file, not an environments folder; give the folder"
    for call in (
        lambda: list_environments(script),
        lambda: describe_environments(script),
        lambda: get_environment("mirror", script),
        lambda: create_environment("mirror", ["statsmodels==0.14.1"], folder=script),
    ):
        with pytest.raises(EnvironmentSetupError, match=message):
            call()
    assert main(["environment", "list", "--folder", str(script)]) == EXIT_USAGE
    captured = capsys.readouterr()
    assert captured.out == ""
    assert f"forecastaudit: error: {message}" in captured.err
    # A folder not made yet holds none, and the listing says it is not there yet.
    missing = tmp_path / "not-yet"
    assert list_environments(missing) == []
    assert describe_environments(missing) == (
        f"Environments in {missing}: none (the folder does not exist yet; 'forecastaudit "
        "environment create NAME PACKAGE==VERSION ...' makes it)"
    )
    assert not missing.exists()


def test_broken_environments_are_listed_with_the_reason(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.delenv("FORECASTAUDIT_ENVIRONMENTS", raising=False)
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))  # not this folder
    make_mirror(tmp_path, "good")
    python = {how: _break(make_mirror(tmp_path, how), how) for how in ("dangling", "exits")}
    python["missing"] = _break(make_mirror(tmp_path, "missing"), "missing")
    python["not-executable"] = _break(make_mirror(tmp_path, "not-executable"), "not-executable")
    older = make_mirror(tmp_path, "older")
    description = json.loads((older / "environment.json").read_text())
    (older / "environment.json").write_text(json.dumps({**description, "python": "2.7.18"}))
    (tmp_path / "unreadable").mkdir()
    (tmp_path / "unreadable" / "environment.json").write_text("{not json")
    found = {info.name: info for info in list_environments(tmp_path)}
    assert sorted(found) == [
        "dangling",
        "exits",
        "good",
        "missing",
        "not-executable",
        "older",
        "unreadable",
    ]
    assert found["good"].problem is None and not found["good"].broken
    fix = (
        "re-create it with 'forecastaudit environment create {} statsmodels --replace "
        f"--folder {tmp_path}'"
    )
    here = ".".join(map(str, sys.version_info[:3]))
    assert found["missing"].problem == (
        f"its interpreter {python['missing']} is missing; {fix.format('missing')}"
    )
    assert found["dangling"].problem == (
        f"its interpreter {python['dangling']} links to {tmp_path / 'moved-away' / 'python3'}, "
        "which does not exist (the Python it was made from was moved or removed); "
        + fix.format("dangling")
    )
    assert found["not-executable"].problem == (
        f"its interpreter {python['not-executable']} is not executable; "
        + fix.format("not-executable")
    )
    assert found["exits"].problem == (
        f"its interpreter {python['exits']} does not run (exit 3: cannot find its "
        f"libraries); {fix.format('exits')}"
    )
    assert found["older"].problem == (
        f"its interpreter {older / 'bin' / 'python'} now runs Python {here}, but the "
        "environment was made with Python 2.7.18 and its packages were installed for that; "
        + fix.format("older")
    )
    assert "has no readable environment.json" in found["unreadable"].problem
    lines = describe_environments(tmp_path).splitlines()
    assert lines[0] == f"Environments in {tmp_path}: 7 (6 broken)"
    assert lines[1] == f"{'dangling':24} BROKEN: {found['dangling'].problem}"
    assert lines[3].startswith(f"{'good':24} Python {here:8} created 2026-01-01T00:00:00+00:00; ")
    assert f"runs statsmodels-sarimax (statsmodels {metadata.version('statsmodels')})" in lines[3]
    assert lines[4] == f"{'missing':24} BROKEN: {found['missing'].problem}"
    # Naming a broken one refuses it, saying why and how to re-create it.
    with pytest.raises(EnvironmentSetupError) as raised:
        get_environment("exits", tmp_path)
    assert str(raised.value) == (
        f"The environment 'exits' ({tmp_path / 'exits'}) is broken and cannot be used: "
        f"{found['exits'].problem}."
    )
    # Unchecked, its description is still read (what the adapter reads its versions from).
    assert get_environment("exits", tmp_path, check=False).version_of("statsmodels")


def test_an_audit_asked_to_use_a_broken_environment_stops_before_fitting(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    from forecastaudit.adapters.protocol import EstimatorAdapter

    python = _break(make_mirror(tmp_path, "ghost"), "missing")
    monkeypatch.setenv("FORECASTAUDIT_ENVIRONMENTS", str(tmp_path))

    def no_fit(*args, **kwargs):
        raise AssertionError("nothing may be fitted with a broken environment named")

    monkeypatch.setattr(EstimatorAdapter, "fit", no_fit)
    expected = (
        f"The environment 'ghost' ({tmp_path / 'ghost'}) is broken and cannot be used: its "
        f"interpreter {python} is missing; re-create it with 'forecastaudit environment create "
        "ghost statsmodels --replace'."
    )
    for environments in ({"ghost": LOCAL}, ["ghost"]):
        with pytest.raises(EnvironmentSetupError) as raised:
            fa.audit(fa.load_demo(), fa.DEMO_SPEC, estimators=[LOCAL], environments=environments)
        assert str(raised.value) == expected
    # The adapter itself (made without the audit) says it is unavailable, and why.
    adapter = environment_adapter("ghost", LOCAL, str(tmp_path))()
    assert adapter.availability() == (
        f"the environment ghost is broken: its interpreter {python} is missing; re-create it "
        "with 'forecastaudit environment create ghost statsmodels --replace'"
    )


# ---------------------------------------------------------------------- the slow test
OLDER = "0.14.1"


def _registry_reason() -> str | None:
    """None when the package registry answers; otherwise why not."""
    try:
        with urllib.request.urlopen("https://pypi.org/simple/statsmodels/", timeout=15) as r:
            r.read(1)
    except Exception as exc:  # any failure to reach the registry skips the test
        return f"the package registry (pypi.org) cannot be reached: {exc}"
    return None


@pytest.mark.slow
def test_older_statsmodels_beside_the_installed_one(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    installed = metadata.version("statsmodels")
    if installed == OLDER:
        pytest.skip(f"statsmodels {OLDER} is the installed version; nothing to compare")
    reason = _registry_reason()
    if reason:
        pytest.skip(reason)
    info = create_environment(
        "statsmodels-0.14", [f"statsmodels=={OLDER}", "numpy<2"], folder=tmp_path
    )
    assert info.version_of("statsmodels") == OLDER
    assert info.version_of("numpy").startswith("1.")
    monkeypatch.setenv("FORECASTAUDIT_ENVIRONMENTS", str(tmp_path))
    result = fa.audit(
        fa.load_demo(),
        fa.DEMO_SPEC,
        estimators=[LOCAL],
        environments={"statsmodels-0.14": LOCAL},
    )
    older = result.estimates[f"{LOCAL}@statsmodels-0.14"]
    assert older.ok, older.reason
    assert older.version == OLDER and result.estimates[LOCAL].version == installed
    assert older.provenance["packages"]["numpy"] == info.version_of("numpy")
    record = result.to_dict()
    versions = {key: e["version"] for key, e in record["estimates"].items()}
    assert versions[LOCAL] == installed and versions[f"{LOCAL}@statsmodels-0.14"] == OLDER
    # Both versions fit the same exact likelihood's optimum within the audit's tolerance
    # (an optimum, not where either optimiser stopped).
    assert result.likelihoods.at[f"{LOCAL}@statsmodels-0.14", "gap_to_best"] < 0.01
