"""Command line: ``forecastaudit <command> ...``.

Exit codes: 0 the audit passed; 1 the audit ran and at least one finding is beyond
tolerance (severity ``fail``); 2 a usage or input error (nothing was written).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from forecastaudit.errors import ForecastAuditError, SeriesError

EXIT_PASS = 0
EXIT_FINDINGS = 1
EXIT_USAGE = 2

RECORD_NAME = "forecastaudit-record.json"
HTML_NAME = "forecastaudit-report.html"
MARKDOWN_NAME = "forecastaudit-report.md"

_EPILOG = """exit codes:
  0  the audit passed (no finding beyond tolerance); 'demo' also when it ran at all
  1  the audit ran; at least one finding is beyond tolerance
  2  usage or input error; nothing was written
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


def read_table(path: str | Path) -> pd.DataFrame:
    """Read a CSV or Parquet file (by its suffix: .parquet or .pq, else CSV)."""
    path = Path(path)
    if not path.exists():
        raise SeriesError(f"No such file: {path}.")
    suffix = path.suffix.lower()
    try:
        return pd.read_parquet(path) if suffix in {".parquet", ".pq"} else pd.read_csv(path)
    except Exception as exc:
        raise SeriesError(f"Cannot read {path}: {type(exc).__name__}: {exc}") from exc


def read_series(path: str | Path, column: str | None, date_column: str | None = None) -> pd.Series:
    """Read one column of a CSV or Parquet file as a Series indexed by its date column.

    Without ``date_column`` the first column is used as dates when it parses as dates. A
    long-format file of many series (dates that repeat, or an id column first) is refused
    with a pointer to the ``panel`` command.
    """
    from forecastaudit.panel.data import looks_like_panel

    path = Path(path)
    frame = read_table(path)
    if date_column is None or date_column in frame.columns:
        why = looks_like_panel(frame, date_column)
        if why is not None:
            raise SeriesError(
                f"{path} looks like a panel of many series in long format: {why}. Audit it "
                "with 'forecastaudit panel FILE --model ... --id-column COLUMN', or give a "
                "file of one series (one row per period)."
            )
    if column is None:
        numeric = [c for c in frame.columns if pd.api.types.is_numeric_dtype(frame[c])]
        if len(numeric) != 1:
            raise SeriesError(
                f"{path} has columns {list(frame.columns)}; choose one with --column."
            )
        column = numeric[0]
    if column not in frame.columns:
        raise SeriesError(f"{path} has no column {column!r}; its columns: {list(frame.columns)}.")
    dates = date_column
    if dates is None and frame.columns[0] != column:
        candidate = frame.columns[0]
        parsed = pd.to_datetime(frame[candidate], errors="coerce")
        if parsed.notna().all():
            dates = candidate
    series = frame[column].copy()
    if dates is not None:
        if dates not in frame.columns:
            raise SeriesError(f"{path} has no date column {dates!r}.")
        parsed = pd.to_datetime(frame[dates], errors="coerce")
        if parsed.isna().any():
            bad = frame[dates][parsed.isna()].iloc[0]
            raise SeriesError(f"Date column {dates!r} has a value that is not a date: {bad!r}.")
        series.index = pd.DatetimeIndex(parsed, name=dates)
        freq = pd.infer_freq(series.index) if len(series) >= 3 else None
        if freq is not None:
            series = series.asfreq(freq)
    series.name = column
    return series


def _write_outputs(report: Any, out: Path) -> list[Path]:
    from forecastaudit.files import write_text_atomic

    # Render everything first, so a rendering error leaves no partial set of files.
    texts = {
        RECORD_NAME: report.to_json(),
        HTML_NAME: report.to_html(),
        MARKDOWN_NAME: report.to_markdown(),
    }
    return [write_text_atomic(out / name, text) for name, text in texts.items()]


def _finish(report: object, out: Path | None) -> int:
    print(report)
    if out is not None:
        for path in _write_outputs(report, out):
            print(f"wrote {path}")
    return EXIT_PASS if report.passed else EXIT_FINDINGS  # type: ignore[attr-defined]


def _demo_exit(code: int) -> int:
    # The demo shows what an audit finds; a failing verdict is its result, not an error.
    return EXIT_PASS if code == EXIT_FINDINGS else code


def _cmd_demo(args: argparse.Namespace) -> int:
    from forecastaudit.demo import DEMO_SPEC, load_demo
    from forecastaudit.pipeline import audit

    series = load_demo()
    print(
        "Demo: monthly red-cell units issued by the (fictional) Ashgrove Regional Blood "
        f"Service, {series.index[0]} to {series.index[-1]}; model {DEMO_SPEC}.\n"
    )
    report = audit(series, DEMO_SPEC, holdout=12, origins=2, progress=not args.quiet)
    return _demo_exit(_finish(report, Path(args.out)))


def _cmd_audit(args: argparse.Namespace) -> int:
    from forecastaudit.pipeline import audit
    from forecastaudit.spec import ModelSpec

    spec = ModelSpec.parse(args.model)  # a bad model text is reported before the data is read
    series = read_series(args.data, args.column, args.date_column)
    estimators = args.estimators.split(",") if args.estimators else None
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
        production=args.production,
    )
    return _finish(report, Path(args.out) if args.out else None)


def _cmd_panel(args: argparse.Namespace) -> int:
    from forecastaudit.panel import audit_panel
    from forecastaudit.spec import ModelSpec

    spec = ModelSpec.parse(args.model)
    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise ForecastAuditError(f"--out {out} is a file; give a folder for the panel's outputs.")
    frame = read_table(args.data)
    estimators: Any = args.estimators
    if estimators not in (None, "independent", "all"):
        estimators = estimators.split(",")
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
        production=args.production,
        workers=args.workers,
        client=args.scheduler,
        time_limit=args.time_limit,
        out=out,
        fresh=args.fresh,
        progress=not args.quiet,
    )
    print(result)
    print(
        f"\nwrote {out} (panel-report.html, panel-report.md, panel-summary.csv, "
        f"panel-store.jsonl, series/)"
    )
    return EXIT_PASS if result.passed else EXIT_FINDINGS


def _cmd_compare_models(args: argparse.Namespace) -> int:
    from forecastaudit.files import write_text_atomic
    from forecastaudit.model_choice import compare_models
    from forecastaudit.record.document import dumps
    from forecastaudit.spec import ModelSpec

    specs = [ModelSpec.parse(text) for text in args.model]
    if len(specs) < 2:
        raise ForecastAuditError("compare-models needs at least two --model options.")
    series = read_series(args.data, args.column, args.date_column)
    estimators = args.estimators.split(",") if args.estimators else None
    result = compare_models(
        series,
        specs,
        holdout=args.holdout,
        origins=args.origins,
        estimators=estimators,
        period=args.period,
    )
    print(result)
    if args.out:
        print(f"wrote {write_text_atomic(args.out, dumps(result.to_dict()))}")
    return EXIT_PASS if result.stable else EXIT_FINDINGS


def _cmd_drift(args: argparse.Namespace) -> int:
    from forecastaudit.files import write_text_atomic
    from forecastaudit.record.changes import compare_records
    from forecastaudit.record.document import dumps

    drift = compare_records(args.old, args.new)
    print(drift)
    if args.out:
        print(f"wrote {write_text_atomic(args.out, dumps(drift.to_dict()))}")
    return EXIT_PASS if drift.passed else EXIT_FINDINGS


def _cmd_estimators(args: argparse.Namespace) -> int:
    from forecastaudit.adapters.registry import available_estimators, get_adapter

    for key in available_estimators():
        adapter = get_adapter(key)
        missing = adapter.availability()
        state = "available" if missing is None else f"unavailable: {missing}"
        print(
            f"{key:22} {adapter.package} {adapter.version() or '-':10} "
            f"engine {adapter.engine:24} {state}"
        )
    return EXIT_PASS


def _add_command(
    sub: Any, name: str, summary: str, passed: str = "the audit passed"
) -> argparse.ArgumentParser:
    """A sub-command whose help ends with the exit codes, exit 0 meaning ``passed``."""
    return sub.add_parser(
        name,
        help=summary,
        epilog=_EPILOG.replace("the audit passed", passed),
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
        default="statsmodels-sarimax",
        help="the estimator the team ships; the verdict is about it (default: %(default)s)",
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
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    demo = _add_command(sub, "demo", "audit the built-in demo series and write its record")
    demo.add_argument("--out", default="demo-output", help="output folder (default: %(default)s)")
    demo.add_argument("--quiet", action="store_true", help="no progress bar")
    demo.set_defaults(func=_cmd_demo)

    run = _add_command(sub, "audit", "audit one column of a CSV or Parquet file")
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
        "--order-search",
        action="store_true",
        help="also audit every installed automatic order search on this series (slow)",
    )
    run.add_argument("--out", help="output folder for the record (default: print only)")
    run.add_argument("--quiet", action="store_true", help="no progress bar")
    run.set_defaults(func=_cmd_audit)

    panel = _add_command(
        sub,
        "panel",
        "audit every series of a long-format file (one row per series and period)",
        passed="every series passed",
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

    drift = _add_command(
        sub,
        "drift",
        "compare two audit records (e.g. before and after a library upgrade)",
        passed="nothing drifted beyond tolerance",
    )
    drift.add_argument("old", help="the signed-off record (JSON)")
    drift.add_argument("new", help="the new record (JSON)")
    drift.add_argument("--out", help="write the drift table as JSON to this file")
    drift.set_defaults(func=_cmd_drift)

    choose = _add_command(
        sub,
        "compare-models",
        "is the ranking of candidate models the same in every implementation?",
        passed="the ranking is the same everywhere",
    )
    _add_data_arguments(choose, "column to use (default: the only numeric column)")
    choose.add_argument(
        "--model", action="append", required=True, help="a candidate model (repeat, 2 or more)"
    )
    choose.add_argument("--holdout", type=int, required=True, help="steps held out per origin")
    choose.add_argument("--origins", type=int, default=1, help="holdout windows (default: 1)")
    _add_period_and_estimators(choose, "comma-separated estimator keys (default: all)")
    choose.add_argument("--out", help="write the comparison as JSON to this file")
    choose.set_defaults(func=_cmd_compare_models)

    est = sub.add_parser("estimators", help="list the estimators, their versions and engines")
    est.set_defaults(func=_cmd_estimators)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``forecastaudit`` command; returns the exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args))
    except ForecastAuditError as exc:
        print(f"forecastaudit: error: {exc}", file=sys.stderr)
        return EXIT_USAGE


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
