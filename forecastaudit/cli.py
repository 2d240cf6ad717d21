"""Command line: ``forecastaudit <command> ...``.

Exit codes (the same for every command; each command's ``--help`` says what 0 and 1 mean
for it):

* 0 the audit passed;
* 1 the audit ran and at least one finding is beyond tolerance (severity ``fail``);
* 2 a usage or input error, found before any work where it can be (bad options, data, an
  output path that cannot be written, a record that fails its checks); nothing was written;
* 3 an internal error (a bug in forecastaudit or in a library it calls); nothing was
  written. A short message is printed; ``--debug`` shows the traceback;
* 4 no estimator produced an estimate (every one failed, was unsupported or unavailable),
  so there was nothing to audit; nothing was written.
"""

from __future__ import annotations

import argparse
import os
import sys
import traceback
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from forecastaudit import reading
from forecastaudit.errors import ForecastAuditError, SpecError
from forecastaudit.files import check_output_file, check_output_folder

EXIT_PASS = 0
EXIT_FINDINGS = 1
EXIT_USAGE = 2
EXIT_INTERNAL = 3
EXIT_NO_ESTIMATE = 4

RECORD_NAME = "forecastaudit-record.json"
HTML_NAME = "forecastaudit-report.html"
MARKDOWN_NAME = "forecastaudit-report.md"

_EPILOG = """exit codes:
  0  the audit passed (no finding beyond tolerance); 'demo' also when it ran at all
  1  the audit ran; at least one finding is beyond tolerance
  2  usage or input error; nothing was written
  3  internal error (a bug); nothing was written; 'forecastaudit --debug ...' shows
     the traceback
  4  no estimator produced an estimate, so there was nothing to audit; nothing written
"""


def _parse_tolerances(items: Sequence[str] | None) -> dict[str, Any]:
    from forecastaudit.diagnosis.tolerances import parse_overrides

    return parse_overrides(list(items or []), where="--tolerance")


def _parse_levels(text: str) -> tuple[float, ...]:
    try:
        return tuple(float(part) for part in text.split(","))
    except ValueError:
        raise ForecastAuditError(
            f"--levels expects percentages separated by commas (e.g. 80,95), got {text!r}."
        ) from None


# The readers live in forecastaudit.reading; they are re-exported here for callers of the
# command line's own helpers.
read_table = reading.read_table
read_series = reading.read_series
read_regressors = reading.read_regressors


def _regressor_columns(spec: Any, option: str | None) -> tuple[str, ...]:
    """The regressor columns: from ``--regressors`` and the model's ``+x(...)`` marker."""
    given = tuple(c.strip() for c in option.split(",") if c.strip()) if option else ()
    if given and spec.regressors and given != spec.regressors:
        raise SpecError(
            f"--regressors {','.join(given)} differs from the model's +x("
            f"{','.join(spec.regressors)}); give the regressors once, in either place."
        )
    return given or spec.regressors


class NoEstimateError(ForecastAuditError):
    """No chosen estimator produced an estimate: there is nothing to audit (exit 4)."""


def _write_outputs(report: Any, out: Path) -> list[Path]:
    from forecastaudit.files import write_set

    # Render everything first, then write the set as one: a failure leaves nothing new.
    texts = {
        RECORD_NAME: report.to_json(),
        HTML_NAME: report.to_html(),
        MARKDOWN_NAME: report.to_markdown(),
    }
    return write_set(out, texts)


def file_sha256(path: str | Path) -> dict[str, Any]:
    """Name, size and SHA-256 of an input file, for the record's provenance."""
    import hashlib

    digest = hashlib.sha256()
    size = 0
    try:
        with open(path, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
                size += len(block)
    except OSError as exc:
        raise ForecastAuditError(
            f"Cannot read the input file {path}: {exc}. Check the path and its permissions."
        ) from None
    return {"name": Path(path).name, "sha256": digest.hexdigest(), "bytes": size}


def _invocation(args: argparse.Namespace, data: str | None) -> dict[str, Any]:
    out: dict[str, Any] = {"command_line": ["forecastaudit", *args.argv]}
    if data is not None:
        out["input_file"] = file_sha256(data)
    # Every other file the audit read, so the record pins all the bytes that went into it.
    others = [("future regressor values", getattr(args, "future", None))]
    others += [("imported estimate", path) for path in getattr(args, "imports", None) or []]
    found = [{"role": role, **file_sha256(path)} for role, path in others if path]
    if found:
        out["other_files"] = found
    return out


def _require_an_estimate(report: Any) -> None:
    chosen = {k: e for k, e in report.estimates.items() if k != "reference"}
    if chosen and not any(e.status == "ok" for e in chosen.values()):
        reasons = "; ".join(
            f"{key}: {e.status}" + (f" ({str(e.reason)[:200]})" if e.reason else "")
            for key, e in chosen.items()
        )
        raise NoEstimateError(
            f"No estimator produced an estimate, so there is nothing to audit ({reasons}). "
            "Check that the estimators' libraries are installed ('forecastaudit estimators') "
            "and that the model suits the data; nothing was written."
        )


def _finish(report: Any, out: Path | None) -> int:
    _require_an_estimate(report)
    print(report)
    if out is not None:
        for path in _write_outputs(report, out):
            print(f"wrote {path}")
    return EXIT_PASS if report.passed else EXIT_FINDINGS


def _demo_exit(code: int) -> int:
    # The demo shows what an audit finds; a failing verdict is its result, not an error.
    return EXIT_PASS if code == EXIT_FINDINGS else code


def _cmd_demo(args: argparse.Namespace) -> int:
    from forecastaudit.demo import DEMO_SPEC, load_demo
    from forecastaudit.pipeline import audit

    check_output_folder(args.out)
    series = load_demo()
    print(
        "Demo: monthly red-cell units issued by the (fictional) Ashgrove Regional Blood "
        f"Service, {series.index[0]} to {series.index[-1]}; model {DEMO_SPEC}.\n"
    )
    report = audit(series, DEMO_SPEC, holdout=12, origins=2, progress=not args.quiet)
    report.invocation = _invocation(args, None)
    return _demo_exit(_finish(report, Path(args.out)))


def _cmd_audit(args: argparse.Namespace) -> int:
    from forecastaudit.pipeline import audit
    from forecastaudit.spec import ModelSpec

    if args.out:
        check_output_folder(args.out)
    spec = ModelSpec.parse(args.model)  # a bad model text is reported before the data is read
    invocation = _invocation(args, args.data)  # hashed before reading: the bytes audited
    columns = _regressor_columns(spec, args.regressors)
    if columns and not spec.regressors:
        spec = ModelSpec(
            order=spec.order,
            seasonal=spec.seasonal,
            period=spec.period,
            mean=spec.mean,
            transform=spec.transform,
            regressors=columns,
        )
    if args.future and not columns:
        raise SpecError("--future gives future regressor values, but no --regressors are named.")
    series = read_series(args.data, args.column, args.date_column, exclude=columns)
    regressors = read_regressors(args.data, columns, args.date_column) if columns else None
    future = read_regressors(args.future, columns) if args.future and columns else None
    estimators = _estimator_keys(args.estimators)
    report = audit(
        series,
        spec,
        estimators=estimators,
        tolerances=_parse_tolerances(args.tolerance),
        period=args.period,
        horizon=args.horizon,
        levels=_parse_levels(args.levels),
        holdout=args.holdout,
        origins=args.origins,
        order_search=args.order_search,
        progress=not args.quiet,
        production=_production(args),
        imported=list(args.imports or []),
        regressors=regressors,
        future_regressors=future,
        environments=_parse_environments(args.environments),
    )
    report.invocation = invocation
    return _finish(report, Path(args.out) if args.out else None)


def _estimator_keys(text: str | None) -> list[str] | None:
    """The keys of --estimators (None when the option is not given)."""
    if text is None:
        return None
    keys = [key.strip() for key in text.split(",") if key.strip()]
    if not keys:
        raise ForecastAuditError(
            "--estimators is empty. Leave it out to run every installed estimator, or give "
            "keys such as statsmodels-sarimax,statsforecast ('forecastaudit estimators' lists "
            "them)."
        )
    return keys


def _production(args: argparse.Namespace) -> str:
    """The --production value, or the default (which may give way to the first estimator
    run) when the option is not given."""
    from forecastaudit.adapters.registry import DEFAULT_PRODUCTION

    return DEFAULT_PRODUCTION if args.production is None else args.production


def _parse_environments(items: Sequence[str] | None) -> dict[str, Any] | None:
    """``--environment NAME`` (every estimator that can run there) or ``NAME=KEY,KEY``."""
    if not items:
        return None
    chosen: dict[str, Any] = {}
    for item in items:
        name, _, keys = item.partition("=")
        if not name.strip():
            raise ForecastAuditError(f"--environment expects NAME or NAME=KEY[,KEY], got {item!r}.")
        chosen[name.strip()] = [k.strip() for k in keys.split(",") if k.strip()] or None
    return chosen


def _cmd_environment_create(args: argparse.Namespace) -> int:
    from forecastaudit.environments import create_environment

    print(f"Creating the environment {args.name} with {' '.join(args.requirements)} ...")
    info = create_environment(
        args.name, list(args.requirements), folder=args.folder, replace=args.replace
    )
    print(f"created {info.path} (Python {info.python})")
    for name, version in sorted(info.installed.items()):
        print(f"  {name} {version}")
    return EXIT_PASS


def _cmd_environment_list(args: argparse.Namespace) -> int:
    from forecastaudit.environments import describe_environments

    print(describe_environments(args.folder))
    return EXIT_PASS


def _cmd_panel(args: argparse.Namespace) -> int:
    from forecastaudit.panel import audit_panel
    from forecastaudit.spec import ModelSpec

    spec = ModelSpec.parse(args.model)
    out = check_output_folder(args.out)
    frame = read_table(args.data)
    estimators: Any = args.estimators
    if estimators not in (None, "independent", "all"):
        estimators = _estimator_keys(estimators)
    result = audit_panel(
        frame,
        spec,
        estimators=estimators or "independent",
        tolerances=_parse_tolerances(args.tolerance),
        id_column=args.id_column,
        time_column=args.date_column,
        value_column=args.column,
        period=args.period,
        horizon=args.horizon,
        levels=_parse_levels(args.levels),
        holdout=args.holdout,
        origins=args.origins,
        production=_production(args),
        workers=args.workers,
        client=args.scheduler,
        time_limit=args.time_limit,
        out=out,
        fresh=args.fresh,
        progress=not args.quiet,
    )
    print(result)
    written = ["panel-report.html", "panel-report.md", "panel-summary.csv", "panel-store.jsonl"]
    if (out / "series").is_dir():
        written.append("series/ (records and reports of the series that do not pass)")
    print(f"\nwrote {out} ({', '.join(written)})")
    return EXIT_PASS if result.passed else EXIT_FINDINGS


def _cmd_compare_models(args: argparse.Namespace) -> int:
    from forecastaudit.files import write_set
    from forecastaudit.model_choice import compare_models
    from forecastaudit.record.document import dumps
    from forecastaudit.spec import ModelSpec

    if args.out:
        check_output_file(args.out)
    specs = [ModelSpec.parse(text) for text in args.model]
    if len(specs) < 2:
        raise ForecastAuditError("compare-models needs at least two --model options.")
    # The regressor columns any candidate names (+x(...)) are read from the same file.
    columns = tuple(dict.fromkeys(c for spec in specs for c in spec.regressors))
    if args.future and not columns:
        raise SpecError(
            "--future gives future regressor values, but no --model names regressors "
            "(+x(price,promo))."
        )
    invocation = _invocation(args, args.data)  # hashed before reading: the bytes compared
    series = read_series(args.data, args.column, args.date_column, exclude=columns)
    regressors = read_regressors(args.data, columns, args.date_column) if columns else None
    future = read_regressors(args.future, columns) if args.future and columns else None
    estimators = _estimator_keys(args.estimators)
    result = compare_models(
        series,
        specs,
        holdout=args.holdout,
        origins=args.origins,
        estimators=estimators,
        period=args.period,
        regressors=regressors,
        future_regressors=future,
    )
    result.invocation = invocation
    print(result)
    if args.out:
        # The JSON and, beside it, the HTML and Markdown reports (same name, other suffixes);
        # all three are rendered before any is written.
        target = Path(args.out)
        texts = {
            target.name: dumps(result.to_dict()),
            target.with_suffix(".html").name: result.to_html(),
            target.with_suffix(".md").name: result.to_markdown(),
        }
        for path in write_set(target.parent if str(target.parent) else Path("."), texts):
            print(f"wrote {path}")
    return EXIT_PASS if result.stable else EXIT_FINDINGS


def _cmd_changes(args: argparse.Namespace) -> int:
    from forecastaudit.files import write_text_atomic
    from forecastaudit.record.changes import compare_records
    from forecastaudit.record.document import dumps

    if args.command == "drift":
        print(
            "forecastaudit: warning: 'drift' is now called 'changes'; the old name goes in "
            "the next release.",
            file=sys.stderr,
        )
    targets = {"--out": args.out, "--html": args.html, "--markdown": args.markdown}
    for option, path in targets.items():
        if path:
            check_output_file(path, option)
    changes = compare_records(args.old, args.new, trusted_keys=args.trusted_key or None)
    print(changes)
    texts = {
        args.out: dumps(changes.to_dict()) if args.out else None,
        args.html: changes.to_html() if args.html else None,
        args.markdown: changes.to_markdown() if args.markdown else None,
    }  # everything rendered before anything is written
    for path, text in texts.items():
        if path and text is not None:
            print(f"wrote {write_text_atomic(path, text)}")
    return EXIT_PASS if changes.passed else EXIT_FINDINGS


def _read_record(path: str) -> dict[str, Any]:
    from forecastaudit.record.document import load_record

    return load_record(path)


def _cmd_new_key(args: argparse.Namespace) -> int:
    from forecastaudit.record.signing import generate_key_pair

    public = args.public or _public_name(args.private)
    kid = generate_key_pair(args.private, public)
    print(f"wrote private key {args.private} (readable by you only; keep it secret)")
    print(f"wrote public key {public} (share it with whoever checks your signatures)")
    print(f"key id {kid}")
    return EXIT_PASS


def _public_name(private: str) -> str:
    path = Path(private)
    stem = path.name[: -len(".pem")] if path.name.endswith(".pem") else path.name
    return str(path.with_name(f"{stem}.pub.pem"))


def signoff_sheet_names(record_file: str | Path) -> tuple[str, str]:
    """File names of the sign-off sheet written beside ``record_file`` (HTML, Markdown)."""
    stem = Path(record_file).stem
    return f"{stem}.signoff.html", f"{stem}.signoff.md"


def _cmd_sign_off(args: argparse.Namespace) -> int:
    from forecastaudit.files import write_set
    from forecastaudit.record.document import dumps
    from forecastaudit.record.signing import add_signoff
    from forecastaudit.report.signoff_sheet import render_signoff_html, render_signoff_markdown

    out = check_output_file(args.out or args.record)
    record = add_signoff(
        _read_record(args.record),
        reviewer=args.reviewer,
        decision=args.decision,
        policy_reference=args.policy,
        comments=args.comments or "",
        date=args.date,
    )
    html_name, markdown_name = signoff_sheet_names(out)
    texts = {out.name: dumps(record)}
    if not args.no_sheet:
        texts[html_name] = render_signoff_html(record, out.name)
        texts[markdown_name] = render_signoff_markdown(record, out.name)
    written = write_set(out.parent if str(out.parent) else Path("."), texts)
    from forecastaudit.validation import plain

    print(f"wrote {out}: {args.decision} by {plain(record['signoff']['reviewer'])}")
    for path in written[1:]:
        print(f"wrote {path}")
    return EXIT_PASS


def _cmd_sign(args: argparse.Namespace) -> int:
    from forecastaudit.files import write_text_atomic
    from forecastaudit.record.document import dumps
    from forecastaudit.record.signing import load_private_key, sign_record

    out = check_output_file(args.out or args.record)
    key = load_private_key(args.key)
    record = sign_record(_read_record(args.record), key)
    write_text_atomic(out, dumps(record))
    print(f"wrote {out}: signed by key {record['signatures'][-1]['key_id']}")
    return EXIT_PASS


def _cmd_verify(args: argparse.Namespace) -> int:
    from forecastaudit.record.document import load_record

    record = load_record(args.record, trusted_keys=args.trusted_key)
    from forecastaudit.record.signing import signed_body_sha256, verify_signatures
    from forecastaudit.validation import plain

    signers = verify_signatures(record, args.trusted_key)
    block = record.get("signoff")
    print(
        f"{args.record}: seal and signature valid; signed by trusted key(s) "
        f"{', '.join(signers)}; verdict {record['verdict']}; signed content SHA-256 "
        f"{signed_body_sha256(record)}"
        + (
            f"; sign-off {block['decision']} by {plain(block['reviewer'])} on {block['date']}"
            if block
            else "; no sign-off block"
        )
    )
    return EXIT_PASS


def _cmd_estimators(args: argparse.Namespace) -> int:
    from forecastaudit.adapters.registry import available_estimators, get_adapter

    for key in available_estimators():
        adapter = get_adapter(key)
        missing = adapter.availability()
        state = "available" if missing is None else f"unavailable: {missing}"
        caps = adapter.capabilities
        regression = (
            f"regressors on the {caps.regression_form or 'levels'}"
            if caps.regressors
            else "no regressors"
        )
        print(
            f"{key:22} {adapter.package + ' ' + (adapter.version() or '-'):22} "
            f"engine {adapter.engine:24} {regression:24} {state}"
        )
    return EXIT_PASS


def _exit_codes(passed: str, findings: str | None, no_estimate: bool) -> str:
    """The exit codes one command can give, in its own words."""
    lines = ["exit codes:", f"  0  {passed}"]
    if findings:
        lines.append(f"  1  {findings}")
    lines += [
        "  2  usage or input error; nothing was written",
        "  3  internal error (a bug); nothing was written; 'forecastaudit --debug ...' shows",
        "     the traceback",
    ]
    if no_estimate:
        lines.append(
            "  4  no estimator produced an estimate, so there was nothing to audit; nothing written"
        )
    return "\n".join(lines) + "\n"


def _add_command(
    sub: Any,
    name: str,
    summary: str,
    passed: str = "the audit passed (no finding beyond tolerance)",
    findings: str | None = None,
    no_estimate: bool = False,
) -> argparse.ArgumentParser:
    """A sub-command whose help ends with the exit codes it can give: 0 meaning ``passed``,
    1 meaning ``findings`` (left out when the command does not use it), 4 when it audits."""
    return sub.add_parser(
        name,
        help=summary,
        epilog=_exit_codes(passed, findings, no_estimate),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )


def _add_data_arguments(parser: argparse.ArgumentParser, column_help: str) -> None:
    """The data file, the column to read from it and its date column."""
    parser.add_argument("data", help="CSV or Parquet file, one row per period")
    parser.add_argument("--column", help=column_help)
    parser.add_argument("--date-column", help="column of dates (default: the first, if dates)")


def _add_period_and_estimators(parser: argparse.ArgumentParser, estimators_help: str) -> None:
    """The seasonal period and the estimators to run."""
    parser.add_argument("--period", type=int, help="seasonal period, if the dates do not imply it")
    parser.add_argument("--estimators", help=estimators_help)


def _add_audit_options(parser: argparse.ArgumentParser) -> None:
    """The options of one audit that ``audit`` and ``panel`` share: tolerances, the
    production estimator, the forecast horizon and levels, and the holdout."""
    parser.add_argument(
        "--tolerance",
        action="append",
        metavar="NAME=VALUE",
        help="override a tolerance, e.g. loglike_atol=0.05 (repeatable)",
    )
    parser.add_argument(
        "--production",
        help=(
            "the estimator the team ships; the verdict is about it (default: "
            "statsmodels-sarimax, or the first estimator run when it is not among them; a "
            "name given here must be among the estimators run)"
        ),
    )
    parser.add_argument("--horizon", type=int, help="steps to forecast (default: the period)")
    parser.add_argument(
        "--levels", default="80,95", help="interval levels in percent (default: %(default)s)"
    )
    parser.add_argument(
        "--holdout", type=int, help="hold out this many final observations and score forecasts"
    )
    parser.add_argument(
        "--origins",
        type=int,
        default=1,
        help="number of consecutive holdout windows (rolling origin; default: %(default)s)",
    )


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (exposed for documentation and tests)."""
    parser = argparse.ArgumentParser(
        prog="forecastaudit",
        description=(
            "Fit one seasonal ARIMA specification through several estimators, put every "
            "output on one convention, re-score it under a reference likelihood, and "
            "write an audit record."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    from forecastaudit._version import __version__

    parser.add_argument("--version", action="version", version=f"forecastaudit {__version__}")
    parser.add_argument(
        "--debug",
        action="store_true",
        help="on an internal error, show the full traceback (for a bug report)",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    demo = _add_command(
        sub,
        "demo",
        "audit the built-in demo series and write its record",
        passed="the demo ran (its verdict, printed, is its result)",
        no_estimate=True,
    )
    demo.add_argument("--out", default="demo-output", help="output folder (default: %(default)s)")
    demo.add_argument("--quiet", action="store_true", help="no progress bar")
    demo.set_defaults(func=_cmd_demo)

    run = _add_command(
        sub,
        "audit",
        "audit one column of a CSV or Parquet file",
        findings="the audit ran; at least one finding is beyond tolerance",
        no_estimate=True,
    )
    _add_data_arguments(run, "column to audit (default: the only numeric column)")
    run.add_argument(
        "--model",
        required=True,
        help="model in text form, e.g. 'ARIMA(0,1,1)x(0,1,1)12 +log'",
    )
    _add_period_and_estimators(
        run, "comma-separated estimator keys (default: all; see 'estimators')"
    )
    _add_audit_options(run)
    run.add_argument(
        "--regressors",
        help=(
            "comma-separated regressor columns of the same file (regression with ARIMA "
            "errors); or name them in the model, e.g. 'ARIMA(1,0,1) +mean +x(price,promo)'"
        ),
    )
    run.add_argument(
        "--future",
        help=(
            "CSV or Parquet file of the regressors' values over the forecast periods (dates "
            "first, one row per period, at least --horizon rows)"
        ),
    )
    run.add_argument(
        "--order-search",
        action="store_true",
        help="also audit every installed automatic order search on this series (slow)",
    )
    run.add_argument(
        "--import",
        dest="imports",
        action="append",
        metavar="FILE",
        help=(
            "an estimate made by other software, as an import record (JSON, or the "
            "name,value CSV form); audited beside the others (repeatable)"
        ),
    )
    run.add_argument(
        "--environment",
        dest="environments",
        action="append",
        metavar="NAME[=KEY,...]",
        help=(
            "also run estimators inside another Python environment made by 'environment "
            "create' (every one that can run there, or the keys given; repeatable)"
        ),
    )
    run.add_argument("--out", help="output folder for the record (default: print only)")
    run.add_argument("--quiet", action="store_true", help="no progress bar")
    run.set_defaults(func=_cmd_audit)

    panel = _add_command(
        sub,
        "panel",
        "audit every series of a long-format file (one row per series and period)",
        passed="every series passed (with or without notes)",
        findings="the panel ran; at least one series failed or could not be audited",
    )
    panel.add_argument("data", help="CSV or Parquet file, one row per series and period")
    panel.add_argument("--id-column", required=True, help="column that identifies each series")
    panel.add_argument("--column", help="column of values (default: the only numeric one left)")
    panel.add_argument("--date-column", help="column of dates (default: the first of dates)")
    panel.add_argument("--model", required=True, help="model in text form, used for every series")
    _add_period_and_estimators(
        panel,
        "'independent' (default: one wrapper per engine), 'all', or comma-separated keys",
    )
    _add_audit_options(panel)
    panel.add_argument(
        "--workers", type=int, help="local worker processes (default: one per core; 1: inline)"
    )
    panel.add_argument(
        "--scheduler", help="address of a Dask scheduler to run on (e.g. tcp://host:8786)"
    )
    panel.add_argument(
        "--time-limit",
        type=float,
        default=300.0,
        help="seconds one series may take (default: %(default)s)",
    )
    panel.add_argument("--out", required=True, help="output folder; a second run with it resumes")
    panel.add_argument(
        "--fresh", action="store_true", help="start afresh, ignoring an earlier run's results"
    )
    panel.add_argument("--quiet", action="store_true", help="no progress bar")
    panel.set_defaults(func=_cmd_panel)

    for name, summary in (
        ("changes", "changes between two audit records (e.g. before and after an upgrade)"),
        ("drift", "deprecated name of 'changes' (kept for one release)"),
    ):
        changes = _add_command(
            sub,
            name,
            summary,
            passed="nothing changed beyond tolerance",
            findings="the records compare; at least one quantity changed beyond tolerance",
        )
        changes.add_argument("old", help="the signed-off record (JSON)")
        changes.add_argument("new", help="the new record (JSON)")
        changes.add_argument("--out", help="write the changes as JSON to this file")
        changes.add_argument("--html", help="write the changes as an HTML page to this file")
        changes.add_argument("--markdown", help="write the changes as Markdown to this file")
        changes.add_argument(
            "--trusted-key",
            action="append",
            metavar="FILE",
            help="a reviewer's public key; the old record must be signed by one (repeatable)",
        )
        changes.set_defaults(func=_cmd_changes)

    choose = _add_command(
        sub,
        "compare-models",
        "is the ranking of candidate models the same in every implementation?",
        passed="the ranking is the same everywhere",
        findings="the ranking of the models differs between implementations",
    )
    _add_data_arguments(choose, "column to use (default: the only numeric column)")
    choose.add_argument(
        "--model", action="append", required=True, help="a candidate model (repeat, 2 or more)"
    )
    choose.add_argument("--holdout", type=int, required=True, help="steps held out per origin")
    choose.add_argument("--origins", type=int, default=1, help="holdout windows (default: 1)")
    choose.add_argument(
        "--future",
        help=(
            "CSV or Parquet file of the regressors' values over the forecast periods, for "
            "candidates with regressors (+x(price,promo); their columns are read from DATA)"
        ),
    )
    _add_period_and_estimators(choose, "comma-separated estimator keys (default: all)")
    choose.add_argument(
        "--out",
        help="write the comparison as JSON to this file, with HTML and Markdown reports beside it",
    )
    choose.set_defaults(func=_cmd_compare_models)

    new_key = _add_command(
        sub,
        "new-key",
        "create a reviewer's key pair for signing records (Ed25519, PEM files)",
        passed="the key pair was written",
    )
    new_key.add_argument("private", help="file for the private key (created owner-only, 0600)")
    new_key.add_argument(
        "--public", help="file for the public key (default: PRIVATE with .pub.pem)"
    )
    new_key.set_defaults(func=_cmd_new_key)

    sign_off = _add_command(
        sub,
        "sign-off",
        "write a reviewer's decision into an (unsigned) audit record",
        passed="the sign-off was written",
    )
    sign_off.add_argument("record", help="the audit record (JSON)")
    sign_off.add_argument("--reviewer", required=True, help="who reviewed the audit")
    sign_off.add_argument(
        "--decision",
        required=True,
        choices=("approved", "approved-with-conditions", "rejected"),
        help="the reviewer's decision",
    )
    sign_off.add_argument(
        "--policy", required=True, help="the model-risk policy (and section) reviewed under"
    )
    sign_off.add_argument("--comments", help="conditions, reservations or notes")
    sign_off.add_argument("--date", help="date of the decision, YYYY-MM-DD (default: today)")
    sign_off.add_argument("--out", help="write to this file instead of updating the record")
    sign_off.add_argument(
        "--no-sheet",
        action="store_true",
        help="do not write the one-page sign-off sheet (RECORD.signoff.html and .md) beside it",
    )
    sign_off.set_defaults(func=_cmd_sign_off)

    sign = _add_command(
        sub,
        "sign",
        "sign an audit record (and its sign-off) with a reviewer's private key",
        passed="the record was signed",
    )
    sign.add_argument("record", help="the audit record (JSON)")
    sign.add_argument("--key", required=True, help="the private key file from 'new-key'")
    sign.add_argument("--out", help="write to this file instead of updating the record")
    sign.set_defaults(func=_cmd_sign)

    verify = _add_command(
        sub,
        "verify",
        "check a record's seal and its signature by a trusted reviewer's key",
        passed="the record is intact and signed by a trusted key",
    )
    verify.add_argument("record", help="the audit record (JSON)")
    verify.add_argument(
        "--trusted-key",
        action="append",
        required=True,
        metavar="FILE",
        help="a reviewer's public key file (repeatable)",
    )
    verify.set_defaults(func=_cmd_verify)

    est = sub.add_parser("estimators", help="list the estimators, their versions and engines")
    est.set_defaults(func=_cmd_estimators)

    environment = sub.add_parser(
        "environment", help="other Python environments, with other library versions"
    )
    env_sub = environment.add_subparsers(dest="environment_command", metavar="ACTION")
    env_sub.required = True
    create = env_sub.add_parser(
        "create", help="build an environment with venv and pip and record what it installed"
    )
    create.add_argument("name", help="its name, e.g. statsmodels-0.14")
    create.add_argument(
        "requirements", nargs="+", help="what pip installs, e.g. statsmodels==0.14.1 'numpy<2'"
    )
    create.add_argument("--replace", action="store_true", help="replace one of that name")
    create.add_argument(
        "--folder",
        help=(
            "the environments folder (default: $FORECASTAUDIT_ENVIRONMENTS, else "
            "forecastaudit/environments under $XDG_DATA_HOME, i.e. "
            "~/.local/share/forecastaudit/environments)"
        ),
    )
    create.set_defaults(func=_cmd_environment_create)
    listing = env_sub.add_parser("list", help="list the environments and what they can run")
    listing.add_argument(
        "--folder",
        help=(
            "the environments folder (default: $FORECASTAUDIT_ENVIRONMENTS, else "
            "forecastaudit/environments under $XDG_DATA_HOME, i.e. "
            "~/.local/share/forecastaudit/environments)"
        ),
    )
    listing.set_defaults(func=_cmd_environment_list)
    parser.commands = sub.choices  # type: ignore[attr-defined]  # usage errors per command
    return parser


class _StdoutReaderMayLeave:
    """Standard output that keeps the run going when its reader goes away.

    ``forecastaudit audit ... | head -1`` closes the pipe after one line; the audit must
    still write its files and exit with its own code, not fail on the next print. Once the
    pipe is gone, output is dropped and file descriptor 1 is pointed at the null device, so
    that Python's final flush raises nothing either.
    """

    def __init__(self, stream: Any) -> None:
        self.stream = stream
        self.gone = False

    def write(self, text: str) -> int:
        if not self.gone:
            try:
                return int(self.stream.write(text))
            except BrokenPipeError:
                self._left()
        return len(text)

    def flush(self) -> None:
        if not self.gone:
            try:
                self.stream.flush()
            except BrokenPipeError:
                self._left()

    def _left(self) -> None:
        self.gone = True
        try:
            null = os.open(os.devnull, os.O_WRONLY)
            os.dup2(null, self.stream.fileno())
            os.close(null)
        except (OSError, ValueError, AttributeError):
            pass  # not a real file (a test's capture): dropping the output is enough

    def __getattr__(self, name: str) -> Any:
        return getattr(self.stream, name)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``forecastaudit`` command; returns the exit code."""
    parser = build_parser()
    # argparse exits itself: 0 after --help and --version, 2 (EXIT_USAGE) on bad usage.
    args, unknown = parser.parse_known_args(argv)
    if unknown:  # said by the command's own parser, so its usage line is the one shown
        commands = getattr(parser, "commands", {})
        (commands.get(args.command) or parser).error(f"unrecognized arguments: {' '.join(unknown)}")
    args.argv = [str(a) for a in (sys.argv[1:] if argv is None else argv)]
    guarded = _StdoutReaderMayLeave(sys.stdout)
    sys.stdout = guarded  # type: ignore[assignment]
    try:
        return _run(args)
    finally:
        guarded.flush()  # what is still buffered, while a gone reader is still caught
        sys.stdout = guarded.stream


def _run(args: argparse.Namespace) -> int:
    try:
        return int(args.func(args))
    except NoEstimateError as exc:
        print(f"forecastaudit: error: {exc}", file=sys.stderr)
        return EXIT_NO_ESTIMATE
    except ForecastAuditError as exc:
        print(f"forecastaudit: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except OSError as exc:  # the file system refused: a full disk, a permission changed
        print(
            f"forecastaudit: error: cannot read or write a file: {exc}. Nothing was written; "
            "free space or fix the permission and re-run.",
            file=sys.stderr,
        )
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("forecastaudit: interrupted; nothing was written.", file=sys.stderr)
        return 130
    except Exception as exc:
        if args.debug:
            traceback.print_exc()
        detail = str(exc).splitlines()[0][:300] if str(exc) else ""
        print(
            f"forecastaudit: internal error: {type(exc).__name__}"
            + (f": {detail}" if detail else "")
            + ". This is a bug, not a problem with your input; nothing was written. Re-run "
            "with --debug for the traceback and report it.",
            file=sys.stderr,
        )
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
