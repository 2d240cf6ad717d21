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
