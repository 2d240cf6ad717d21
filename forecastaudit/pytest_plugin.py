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
    Folder of baseline records (default ``audit-baselines``: beside the ini file when there
    is one, else in the directory pytest was started in).
``--audit-update-baselines`` / ``audit_update_baselines``
    Write (or overwrite) the baselines from this run, deliberately.
``--audit-estimators KEYS`` / ``audit_estimators``
    Comma-separated estimator keys (default: all installed).
``--audit-tolerance NAME=VALUE`` / ``audit_tolerances``
    Override a tolerance (repeatable; the ini takes one per line).

``--audit-trusted-key FILE`` / ``audit_trusted_keys``
    A reviewer's Ed25519 public key (PEM; repeatable, the ini takes one per line). When
    given, every baseline must carry a valid signature by one of these keys (see
    ``forecastaudit sign``); an unsigned or edited baseline fails its test. Baselines written
    with ``--audit-update-baselines`` are unsigned until a reviewer signs them.
``--audit-workers N`` / ``audit_workers``
    Series audited at once by ``panel_audit`` (default: the machine's cores).

Relative paths (the baseline folder and the trusted keys) are resolved as follows:

- given on the command line (or in ``PYTEST_ADDOPTS``): against the directory pytest was
  started in (``config.invocation_params.dir``);
- given in the ini file (or with ``-o NAME=VALUE``), and the default baseline folder:
  against the ini file's folder (``config.inipath.parent``), or, when there is no ini file,
  against the directory pytest was started in.

pytest's rootdir plays no part: it can move when an option's value is an existing path
(an absolute key file elsewhere, say), and the baseline folder must not move with it.
Absolute paths are used as they are.

Panels have the ``panel_audit`` fixture::

    def test_supply_lines(panel_audit):
        panel_audit(table, "ARIMA(0,1,1)x(0,1,1)12 +log", id_column="supply_line",
                    name="supply-lines")

It runs :func:`forecastaudit.audit_panel`, fails the test when any series fails or
could not be audited (listing them, most serious first), and compares the panel with its
baseline: one file ``<baseline folder>/<name>.panel.json`` per panel holding the compared
parts of every series' record; the drift is reported series by series (series that moved beyond
tolerance, appeared or disappeared fail the test).

Mark long audits with ``@pytest.mark.slow_audit`` and deselect them with
``-m "not slow_audit"``.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

__all__ = ["model_audit", "panel_audit"]


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("forecastaudit", "forecast model audits (forecastaudit)")
    group.addoption(
        "--audit-baselines",
        dest="audit_baselines",
        default=None,
        metavar="DIR",
        help="folder of baseline audit records (a relative path is read from the directory "
        "pytest was started in)",
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
    group.addoption(
        "--audit-workers",
        dest="audit_workers",
        default=None,
        metavar="N",
        help="series audited at once by panel_audit (default: the machine's cores)",
    )
    group.addoption(
        "--audit-trusted-key",
        dest="audit_trusted_key",
        action="append",
        default=None,
        metavar="FILE",
        help="a reviewer's public key (PEM); baselines must then be signed by one (repeatable; "
        "a relative path is read from the directory pytest was started in)",
    )
    parser.addini(
        "audit_trusted_keys",
        "reviewers' public key files (PEM), one per line, relative to the ini file's folder; "
        "baselines must be signed by one",
        type="linelist",
        default=[],
    )
    parser.addini("audit_workers", "series audited at once by panel_audit", default="")
    parser.addini(
        "audit_baselines",
        "folder of baseline audit records, relative to the ini file's folder",
        default="audit-baselines",
    )
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
    # Settings are read and checked once, here: a bad value is a usage error at start-up
    # (pytest exits with its usage-error code), not an error inside every test.
    config.stash[_SETTINGS] = _Settings(config)


def pytest_report_header(config: pytest.Config) -> list[str] | None:
    settings = config.stash.get(_SETTINGS, None)
    if settings is None or not settings.configured:
        return None
    return [
        f"forecastaudit: baselines {settings.baselines}"
        + (" (updating)" if settings.update else "")
        + (f"; estimators {', '.join(settings.estimators)}" if settings.estimators else "")
        + (
            f"; baselines must be signed by one of {len(settings.trusted_keys)} trusted key(s)"
            if settings.trusted_keys
            else ""
        )
    ]


#: Longest baseline name (characters): file systems refuse names of more than 255 bytes,
#: and the panel suffix and the atomic write's temporary prefix need room.
MAX_BASELINE_NAME = 150


class _Settings:
    """The plugin's options, read from the command line and the ini file, all checked."""

    def __init__(self, config: pytest.Config) -> None:
        opt, ini = config.getoption, config.getini
        folder = opt("audit_baselines")
        base = _path_base(config, from_command_line=bool(folder))
        self.baselines = (base / str(folder or ini("audit_baselines"))).resolve()
        if self.baselines.exists() and not self.baselines.is_dir():
            raise pytest.UsageError(
                f"The audit baseline folder {self.baselines} is a file; point "
                "--audit-baselines (ini audit_baselines) at a folder."
            )
        update = opt("audit_update_baselines")
        self.update = bool(update if update is not None else ini("audit_update_baselines"))
        keys = opt("audit_estimators") or ini("audit_estimators")
        self.estimators = [k.strip() for k in str(keys).split(",") if k.strip()] or None
        production = opt("audit_production") or ini("audit_production")
        self.production: str | None = str(production).strip() or None
        items = opt("audit_tolerance") or ini("audit_tolerances")
        self.tolerances: dict[str, Any] = {}
        workers = str(opt("audit_workers") or ini("audit_workers") or "").strip()
        self.workers: int | None = None
        if workers:
            if not workers.isdigit() or int(workers) < 1:
                raise pytest.UsageError(
                    f"--audit-workers (ini audit_workers) must be a whole number of at least 1, "
                    f"not {workers[:40]!r}."
                )
            self.workers = int(workers)
        from_command_line = bool(opt("audit_trusted_key"))
        key_files = opt("audit_trusted_key") or ini("audit_trusted_keys")
        keys_base = _path_base(config, from_command_line=from_command_line)
        self.trusted_keys: list[Any] | None = None
        if key_files:
            from forecastaudit.errors import RecordError
            from forecastaudit.record.signing import load_public_key

            try:
                self.trusted_keys = [
                    load_public_key((keys_base / str(f)).resolve()) for f in key_files
                ]
            except RecordError as exc:
                hint = ""
                if not all(Path(str(f)).is_absolute() for f in key_files):
                    given = (
                        "on the command line"
                        if from_command_line
                        else f"in the ini file {config.inipath}"
                        if config.inipath
                        else "with -o"
                    )
                    hint = (
                        f" A relative key path given {given} is read from {keys_base}; give "
                        "the path from there, or an absolute one."
                    )
                raise pytest.UsageError(
                    f"--audit-trusted-key (ini audit_trusted_keys): {exc}{hint}"
                ) from None
        self.configured = bool(
            opt("audit_baselines")
            or self.estimators
            or self.production
            or items
            or workers
            or key_files
        )
        # The checks below import parts of forecastaudit: only when an option asks for them,
        # so a session that does not use the plugin pays nothing.
        if items:
            from forecastaudit.diagnosis.tolerances import Tolerances, parse_overrides
            from forecastaudit.errors import ToleranceError

            try:
                self.tolerances = parse_overrides(list(items), where="audit tolerance")
                Tolerances.from_dict(self.tolerances)  # each value in its range, too
            except ToleranceError as exc:
                raise pytest.UsageError(str(exc)) from None
        chosen = list(self.estimators or []) + ([self.production] if self.production else [])
        if chosen:
            from forecastaudit.adapters.registry import adapter_class
            from forecastaudit.errors import EstimatorError

            for key in chosen:
                try:
                    adapter_class(key)
                except EstimatorError as exc:
                    raise pytest.UsageError(
                        f"--audit-estimators / --audit-production (ini audit_estimators, "
                        f"audit_production): {exc}"
                    ) from None


_SETTINGS = pytest.StashKey[_Settings]()


def _path_base(config: pytest.Config, *, from_command_line: bool) -> Path:
    """The folder a relative path option is resolved against.

    Parameters
    ----------
    config : pytest.Config
        The session's configuration.
    from_command_line : bool
        Whether the value came from the command line (or ``PYTEST_ADDOPTS``) rather than
        from the ini file, ``-o`` or the option's default.

    Returns
    -------
    Path
        The directory pytest was started in for command-line values; otherwise the ini
        file's folder, or the directory pytest was started in when there is no ini file.
        Never the rootdir, which moves when an option's value is an existing path.
    """
    if not from_command_line and config.inipath is not None:
        return Path(config.inipath).parent
    return Path(config.invocation_params.dir)


def _settings(config: pytest.Config) -> _Settings:
    settings = config.stash.get(_SETTINGS, None)
    if settings is None:  # the plugin was loaded after configuration (pytester in-process)
        settings = config.stash[_SETTINGS] = _Settings(config)
    return settings


def _baseline_name(name: str) -> str:
    from forecastaudit.errors import RecordError

    safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in str(name))
    if not safe or safe.startswith("."):
        raise RecordError(
            f"Cannot use {str(name)[:40]!r} as a baseline name; use letters, digits, - or _ "
            "(name=... in the call)."
        )
    if len(safe.encode("utf-8")) > MAX_BASELINE_NAME:
        raise RecordError(
            f"The baseline name {safe[:40]!r}... has {len(safe)} characters (at most "
            f"{MAX_BASELINE_NAME}, so that its file name fits every file system); pass a "
            "shorter name=... ."
        )
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
    from forecastaudit.errors import RecordError
    from forecastaudit.files import write_text_atomic
    from forecastaudit.pipeline import audit
    from forecastaudit.record.changes import compare_records
    from forecastaudit.record.document import load_record
    from forecastaudit.testing import findings_table

    settings = _settings(request.config)

    def run(
        y: Any, spec: Any, *, name: str | None = None, baseline: bool = True, **kwargs: Any
    ) -> Any:
        kwargs.setdefault("estimators", settings.estimators)
        if settings.production:
            kwargs.setdefault("production", settings.production)
        tolerances = kwargs.pop("tolerances", None)
        if tolerances is None and settings.tolerances:
            tolerances = settings.tolerances
        # The baseline's name is checked before the audit runs and before anything is written.
        path = settings.baselines / _baseline_name(name or request.node.name) if baseline else None
        report = audit(y, spec, tolerances=tolerances, **kwargs)
        if not report.passed:
            pytest.fail(
                f"Audit of {report.spec} on '{report.series.name}' found problems beyond "
                f"tolerance:\n{findings_table(report)}",
                pytrace=False,
            )
        if path is None:
            return report
        if settings.update:
            write_text_atomic(path, report.to_json())
            return report
        if not path.exists():
            pytest.fail(
                f"No baseline record {path}. Review this audit, then create the baseline "
                "deliberately with: pytest --audit-update-baselines",
                pytrace=False,
            )
        problem = None
        try:
            old = load_record(path, trusted_keys=settings.trusted_keys)
        except RecordError as exc:
            problem = f"The baseline {path} cannot be used: {exc}"
        if problem is not None:  # failed outside the handler, so the message shows once
            pytest.fail(problem, pytrace=False)
        drift = compare_records(old, report.to_dict())
        if not drift.passed:
            pytest.fail(
                f"The audit drifted from its baseline {path}:\n{drift}\nIf the change is "
                "intended and reviewed, regenerate with: pytest --audit-update-baselines",
                pytrace=False,
            )
        return report

    return run


def _failing_table(result: Any, limit: int = 20) -> str:
    shown = result.summary[result.summary["verdict"].isin(["fail", "not-audited"])]
    cols = [c for c in ("verdict", "cause") if c in shown.columns]
    text = shown[cols].head(limit).to_string()
    if len(shown) > limit:
        text += f"\n... and {len(shown) - limit} more series"
    return text


@pytest.fixture
def panel_audit(request: pytest.FixtureRequest) -> Callable[..., Any]:
    """Run a panel audit, fail on series that do not pass, and check it against its baseline.

    Returns a function ``panel_audit(data, spec, *, name=None, baseline=True,
    require_pass=True, **audit_panel_kwargs)`` that returns the
    :class:`forecastaudit.PanelResult`. ``name`` names the baseline file
    ``<name>.panel.json`` (default: the test's name). Series that pass with notes pass;
    ``require_pass=False`` also accepts series that fail or could not be audited (the
    baseline still catches drift). Keyword arguments go to
    :func:`forecastaudit.audit_panel`; ``estimators``, ``tolerances``, ``production`` and
    ``workers`` default to the plugin's settings.
    """
    from forecastaudit.panel import audit_panel
    from forecastaudit.record.panel_baseline import compare_panel_to_baseline, write_panel_baseline

    settings = _settings(request.config)

    def run(
        data: Any,
        spec: Any,
        *,
        name: str | None = None,
        baseline: bool = True,
        require_pass: bool = True,
        **kwargs: Any,
    ) -> Any:
        stem = _baseline_name(name or request.node.name)[: -len(".json")] if baseline else ""
        if settings.estimators is not None:
            kwargs.setdefault("estimators", settings.estimators)
        if settings.production:
            kwargs.setdefault("production", settings.production)
        if settings.workers is not None:
            kwargs.setdefault("workers", settings.workers)
        if kwargs.get("tolerances") is None and settings.tolerances:
            kwargs["tolerances"] = settings.tolerances
        kwargs.setdefault("reports", False)
        result = audit_panel(data, spec, **kwargs)
        if require_pass and (result.failing or result.not_audited):
            pytest.fail(
                f"Panel audit of {len(result.summary)} series: {len(result.failing)} fail, "
                f"{len(result.not_audited)} not audited; series that do not pass:\n"
                f"{_failing_table(result)}\n" + "\n".join(result.cause_sentences()),
                pytrace=False,
            )
        if not baseline:
            return result
        path = settings.baselines / f"{stem}.panel.json"
        if settings.update:
            write_panel_baseline(result, path)
            return result
        if not path.exists():
            pytest.fail(
                f"No panel baseline {path}. Review this panel audit, then create the baseline "
                "deliberately with: pytest --audit-update-baselines",
                pytrace=False,
            )
        drift = compare_panel_to_baseline(path, result)
        if not drift.passed:
            # Each series says whether its data changed, how many quantities moved beyond
            # tolerance and the largest moves (PanelDrift's text form).
            changed = drift.ids_with_changed_data()
            intended = (
                f"If the new data of {', '.join(changed[:5])}"
                + (f" and {len(changed) - 5} more" if len(changed) > 5 else "")
                + " and the drift are intended and reviewed"
                if changed
                else "If the change is intended and reviewed"
            )
            pytest.fail(
                f"The panel drifted from its baseline {path}:\n{drift}\n{intended}, "
                "regenerate with: pytest --audit-update-baselines",
                pytrace=False,
            )
        return result

    return run
