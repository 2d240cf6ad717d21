"""pytest plugin: audit models in a modelling repository's test suite, against baselines.

Registered through the ``pytest11`` entry point, so installing forecastaudit is enough.

Use the ``model_audit`` fixture::

    def test_demand_model(model_audit):
        model_audit(series, "ARIMA(0,1,1)x(0,1,1)12 +log", name="demand")

The call runs :func:`forecastaudit.pipeline`, fails the test with a findings table when any
finding is beyond tolerance, and compares the record with the stored baseline
``<baseline folder>/<name>.json``: a missing baseline fails (unless regeneration is asked
for), a drifted one fails with the drift table. Baselines are written atomically.

Options (command line, with ini equivalents):

``--audit-baselines DIR`` / ``audit_baselines``
    Folder of baseline records (default ``audit-baselines`` beside the rootdir's ini file).
``--audit-update-baselines`` / ``audit_update_baselines``
    Write (or overwrite) the baselines from this run, deliberately.
``--audit-estimators KEYS`` / ``audit_estimators``
    Comma-separated estimator keys (default: all installed).
``--audit-tolerance NAME=VALUE`` / ``audit_tolerances``
    Override a tolerance (repeatable; the ini takes one per line).

Mark long audits with ``@pytest.mark.slow_audit`` and deselect them with
``-m "not slow_audit"``.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

__all__ = ["model_audit"]


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("forecastaudit", "forecast model audits (forecastaudit)")
    group.addoption(
        "--audit-baselines",
        dest="audit_baselines",
        default=None,
        metavar="DIR",
        help="folder of baseline audit records",
    )
    group.addoption(
        "--audit-update-baselines",
        dest="audit_update_baselines",
        action="store_true",
        default=None,
        help="write the baselines from this run (deliberate regeneration)",
    )
    group.addoption(
        "--audit-estimators",
        dest="audit_estimators",
        default=None,
        metavar="KEYS",
        help="comma-separated estimator keys",
    )
    group.addoption(
        "--audit-production",
        dest="audit_production",
        default=None,
        metavar="KEY",
        help="the production estimator the verdict is about (default statsmodels-sarimax)",
    )
    group.addoption(
        "--audit-tolerance",
        dest="audit_tolerance",
        action="append",
        default=None,
        metavar="NAME=VALUE",
        help="override a tolerance",
    )
    parser.addini("audit_baselines", "folder of baseline audit records", default="audit-baselines")
    parser.addini(
        "audit_update_baselines", "write the baselines from this run", type="bool", default=False
    )
    parser.addini("audit_estimators", "comma-separated estimator keys", default="")
    parser.addini("audit_production", "the production estimator the verdict is about", default="")
    parser.addini(
        "audit_tolerances", "tolerance overrides, NAME=VALUE per line", type="linelist", default=[]
    )


def pytest_configure(config: pytest.Config) -> None:
    config.addinivalue_line("markers", "slow_audit: a model audit that takes long to run")


class _Settings:
    def __init__(self, config: pytest.Config) -> None:
        folder = config.getoption("audit_baselines") or config.getini("audit_baselines")
        base = Path(config.inipath).parent if config.inipath else Path(config.rootpath)
        self.baselines = (base / folder).resolve()
        update = config.getoption("audit_update_baselines")
        self.update = bool(
            update if update is not None else config.getini("audit_update_baselines")
        )
        keys = config.getoption("audit_estimators") or config.getini("audit_estimators")
        self.estimators = [k.strip() for k in keys.split(",") if k.strip()] or None
        production = config.getoption("audit_production") or config.getini("audit_production")
        self.production: str | None = production.strip() or None
        items = config.getoption("audit_tolerance") or config.getini("audit_tolerances")
        from forecastaudit.diagnosis.tolerances import parse_overrides
        from forecastaudit.errors import ToleranceError

        try:
            self.tolerances: dict[str, Any] = parse_overrides(list(items), where="audit tolerance")
        except ToleranceError as exc:
            raise pytest.UsageError(str(exc)) from None


def _baseline_name(name: str) -> str:
    safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in name)
    if not safe or safe.startswith("."):
        raise ValueError(f"cannot use {name!r} as a baseline name; use letters, digits, - or _")
    return f"{safe}.json"


@pytest.fixture
def model_audit(request: pytest.FixtureRequest) -> Callable[..., Any]:
    """Run an audit, fail on findings beyond tolerance, and check it against its baseline.

    Returns a function ``model_audit(y, spec, *, name=None, baseline=True, **audit_kwargs)``
    that returns the :class:`forecastaudit.AuditResult`. ``name`` names the baseline file
    (default: the test's name); ``baseline=False`` skips the baseline check. Keyword
    arguments go to :func:`forecastaudit.pipeline`; ``estimators`` and ``tolerances`` default
    to the plugin's settings.
    """
    from forecastaudit.files import write_text_atomic
    from forecastaudit.pipeline import audit
    from forecastaudit.record.changes import compare_records
    from forecastaudit.record.document import load_record
    from forecastaudit.testing import findings_table

    settings = _Settings(request.config)

    def run(
        y: Any, spec: Any, *, name: str | None = None, baseline: bool = True, **kwargs: Any
    ) -> Any:
        kwargs.setdefault("estimators", settings.estimators)
        if settings.production:
            kwargs.setdefault("production", settings.production)
        tolerances = kwargs.pop("tolerances", None)
        if tolerances is None and settings.tolerances:
            tolerances = settings.tolerances
        report = audit(y, spec, tolerances=tolerances, **kwargs)
        if not report.passed:
            pytest.fail(
                f"Audit of {report.spec} on '{report.series.name}' found problems beyond "
                f"tolerance:\n{findings_table(report)}",
                pytrace=False,
            )
        if not baseline:
            return report
        path = settings.baselines / _baseline_name(name or request.node.name)
        if settings.update:
            write_text_atomic(path, report.to_json())
            return report
        if not path.exists():
            pytest.fail(
                f"No baseline record {path}. Review this audit, then create the baseline "
                "deliberately with: pytest --audit-update-baselines",
                pytrace=False,
            )
        drift = compare_records(load_record(path), report.to_dict())
        if not drift.passed:
            pytest.fail(
                f"The audit drifted from its baseline {path}:\n{drift}\nIf the change is "
                "intended and reviewed, regenerate with: pytest --audit-update-baselines",
                pytrace=False,
            )
        return report

    return run
