"""A catalogue of bad inputs across the entry points, one row each.

Every row calls one public entry point (the Python API, panels, model choice, the order
search, the series and file readers, tolerances, limits, record loading) with one bad input
and asserts four things:

* the error is the project's own type (:mod:`forecastaudit.errors`), never another
  library's exception;
* the message names the fix: a keyword of the remedy (or, where the remedy is plain from
  the problem, of the problem) appears in it;
* the caller's objects are unchanged (compared with a deep copy taken before the call);
* no file appears: the call runs in an empty working folder and, where it has an output
  folder, points it at an empty folder, and both stay empty.

Every input is refused before anything is fitted, so the table runs in seconds. The pytest
plugin's settings are checked the same way at the end, through ``pytester``: a bad setting is
a usage error at start-up, and nothing is written.
"""

from __future__ import annotations

import copy
import json
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

import forecastaudit as fa
from forecastaudit.diagnosis.tolerances import Tolerances, parse_overrides
from forecastaudit.errors import (
    EstimatorError,
    ForecastAuditError,
    PanelError,
    RecordError,
    SeriesError,
    SpecError,
    ToleranceError,
)
from forecastaudit.reading import read_series
from forecastaudit.spec import ModelSpec

MODEL = "ARIMA(0,1,1)x(0,1,1)12"


def monthly(n: int = 48, seed: int = 7, level: float = 100.0) -> pd.Series:
    """A seeded random walk with a monthly PeriodIndex (invented data)."""
    rng = np.random.default_rng(seed)
    values = level + np.cumsum(rng.normal(size=n))
    return pd.Series(values, index=pd.period_range("2015-01", periods=n, freq="M"), name="units")


def daily(n: int = 60) -> pd.Series:
    """A seeded random walk with a daily DatetimeIndex (invented data)."""
    values = 100 + np.cumsum(np.random.default_rng(3).normal(size=n))
    return pd.Series(values, index=pd.date_range("2020-01-01", periods=n, freq="D"))


def long_table() -> pd.DataFrame:
    """A small long-format panel of two series (invented data)."""
    frames = []
    for i, key in enumerate(("north", "south")):
        y = monthly(36, seed=i)
        frames.append(pd.DataFrame({"line": key, "month": y.index, "units": y.to_numpy()}))
    return pd.concat(frames, ignore_index=True)


# ---------------------------------------------------------------------- files used as input
def _csv(folder: Path, name: str, frame: pd.DataFrame) -> Path:
    path = folder / name
    frame.to_csv(path, index=False)
    return path


def _monthly_frame(n: int = 24) -> pd.DataFrame:
    y = monthly(n)
    return pd.DataFrame({"date": y.index.to_timestamp().strftime("%Y-%m-%d"), "units": y.values})


def csv_descending(folder: Path) -> Path:
    return _csv(folder, "descending.csv", _monthly_frame().iloc[::-1])


def csv_mixed_offsets(folder: Path) -> Path:
    frame = _monthly_frame()
    months = pd.to_datetime(frame["date"]).dt.month
    offsets = np.where(months.between(4, 10), "+02:00", "+01:00")
    frame["date"] = frame["date"] + "T00:00:00" + offsets
    return _csv(folder, "offsets.csv", frame)


def csv_two_numeric(folder: Path) -> Path:
    frame = _monthly_frame()
    frame["\x1b[31mred\x1b[0m"] = frame["units"] * 2
    return _csv(folder, "two.csv", frame)


def csv_bad_date(folder: Path) -> Path:
    frame = _monthly_frame()
    frame.loc[5, "date"] = "not a date"
    return _csv(folder, "bad-date.csv", frame)


def csv_long(folder: Path) -> Path:
    table = long_table()
    table["month"] = table["month"].astype(str)
    return _csv(folder, "long.csv", table)


def csv_integer_dates(folder: Path) -> Path:
    frame = _monthly_frame()
    frame["date"] = np.arange(len(frame))
    return _csv(folder, "integers.csv", frame)


def record_file(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def record_of_other_version(folder: Path) -> Path:
    return record_file(
        folder,
        "old.json",
        json.dumps({"record": "forecastaudit-record", "schema_version": "0.1"}),
    )


# ---------------------------------------------------------------------- the table
@dataclass
class Case:
    """One bad input: what to call, with what, and what must come back."""

    id: str
    call: Callable[..., Any]
    args: Callable[[Path], tuple[tuple[Any, ...], dict[str, Any]]]
    error: type[ForecastAuditError]
    fix: str
    out: bool = field(default=False)  # pass out=<empty folder> as a keyword


def case(
    id: str,
    call: Callable[..., Any],
    *args: Any,
    error: type[ForecastAuditError],
    fix: str,
    files: Callable[[Path], Any] | None = None,
    out: bool = False,
    **kwargs: Any,
) -> Case:
    """A row; ``files`` makes an input file in the inputs folder, passed first."""

    def build(folder: Path) -> tuple[tuple[Any, ...], dict[str, Any]]:
        made = (files(folder),) if files is not None else ()
        return made + tuple(a() if callable(a) and a in FACTORIES else a for a in args), dict(
            (k, v() if callable(v) and v in FACTORIES else v) for k, v in kwargs.items()
        )

    return Case(id, call, build, error, fix, out)


FACTORIES = {monthly, daily, long_table}
audit = fa.audit
only = ["statsforecast"]

CASES = [
    # --- model specification (Python objects and text)
    case("spec-wrong-type", audit, monthly, 123, error=SpecError, fix="ModelSpec"),
    case("spec-text-garbage", audit, monthly, "SARIMA(0,1,1)", error=SpecError,
         fix="Write it as ARIMA"),
    case("spec-seasonal-without-period", ModelSpec.parse, "ARIMA(0,1,1)x(0,1,1)",
         error=SpecError, fix="write the period right after it"),
    case("spec-900-digit-order", ModelSpec.parse, "ARIMA(" + "9" * 900 + ",0,0)",
         error=SpecError, fix="small whole numbers"),
    case("spec-1mb-text", ModelSpec.parse, "ARIMA(0,1,1) " + "x" * 1_000_000,
         error=SpecError, fix="Write it as ARIMA"),
    case("spec-unknown-marker", ModelSpec.parse, "ARIMA(0,1,1) +drift", error=SpecError,
         fix="known markers"),
    case("spec-two-transforms", ModelSpec.parse, "ARIMA(0,1,1) +log +boxcox(0.5)",
         error=SpecError, fix="keep one"),
    case("spec-boxcox-400", ModelSpec.parse, "ARIMA(0,1,1) +boxcox(400)", error=SpecError,
         fix="lambda such as 0.5"),
    case("spec-boxcox-not-a-number", ModelSpec.parse, "ARIMA(0,1,1) +boxcox(.)",
         error=SpecError, fix="write e.g."),
    case("spec-order-set", ModelSpec, {0, 1, 2}, error=SpecError, fix="in that order"),
    case("spec-order-two-entries", ModelSpec, [0, 1], error=SpecError, fix="three entries"),
    case("spec-order-negative", ModelSpec, (0, -1, 1), error=SpecError, fix="not be negative"),
    case("spec-order-bool", ModelSpec, (True, 0, 0), error=SpecError, fix="whole number"),
    case("spec-order-5000-digit-int", ModelSpec, (10**5000, 0, 0), error=SpecError,
         fix="small whole numbers"),
    case("spec-order-fraction", ModelSpec, (0.5, 0, 0), error=SpecError, fix="whole number"),
    case("spec-seasonal-no-period", ModelSpec, (0, 1, 1), (0, 1, 1), error=SpecError,
         fix="pass period=m"),
    case("spec-mean-not-bool", ModelSpec, (0, 1, 1), mean="yes", error=SpecError,
         fix="True or False"),
    case("spec-exog-one-string", ModelSpec, (0, 1, 1), exog="price", error=SpecError,
         fix="write exog=('price',)"),
    case("spec-regressor-twice", ModelSpec, (0, 1, 1), regressors=("a", "a"), error=SpecError,
         fix="name each once"),
    case("spec-unknown-transform", ModelSpec, (0, 1, 1), transform="sqrt", error=SpecError,
         fix="Use None, 'log'"),
    # --- the period: argument, model and index must agree
    case("period-contradicts-model", audit, monthly, MODEL, only, period=4, error=SpecError,
         fix="give the period once"),
    case("quarterly-model-on-monthly-data", audit, monthly, "ARIMA(0,1,1)x(0,1,1)4", only,
         error=SpecError, fix="pass period=4"),
    case("monthly-model-on-daily-index", audit, daily, MODEL, only, error=SpecError,
         fix="pass period=12"),
    case("period-fraction", audit, monthly, "ARIMA(0,1,1)", only, period=12.5,
         error=SeriesError, fix="whole number"),
    case("period-100000", audit, np.arange(10.0), "ARIMA(0,1,1)", only, period=100_000,
         error=SeriesError, fix="set_limits(period="),
    case("model-period-100000", audit, np.arange(10.0),
         ModelSpec((0, 0, 1), (0, 0, 1), period=100_000), only, error=SpecError,
         fix="set_limits(period="),
    # --- horizon, levels, holdout
    case("horizon-zero", audit, monthly, MODEL, only, horizon=0, error=SpecError,
         fix="positive whole number"),
    case("horizon-fraction", audit, monthly, MODEL, only, horizon=1.5, error=SpecError,
         fix="whole number"),
    case("horizon-bool", audit, monthly, MODEL, only, horizon=True, error=SpecError,
         fix="whole number"),
    case("horizon-1000000", audit, monthly, MODEL, only, horizon=1_000_000, error=SpecError,
         fix="set_limits(horizon="),
    case("levels-bool", audit, monthly, MODEL, only, levels=(True,), error=SpecError,
         fix="numbers in percent"),
    case("levels-written-alike", audit, monthly, MODEL, only, levels=(95, 95.0000001),
         error=SpecError, fix="differ in their first six"),
    case("levels-zero", audit, monthly, MODEL, only, levels=(0, 95), error=SpecError,
         fix="strictly between 0 and 100"),
    case("levels-text", audit, monthly, MODEL, only, levels="95", error=SpecError,
         fix="sequence of numbers"),
    case("levels-empty", audit, monthly, MODEL, only, levels=(), error=SpecError,
         fix="at least one level"),
    case("levels-fraction", audit, monthly, MODEL, only, levels=(0.8, 0.95), error=SpecError,
         fix="for 80% give 80"),
    case("origins-without-holdout", audit, monthly, MODEL, only, origins=3, error=SpecError,
         fix="pass holdout=H"),
    case("holdout-too-long", audit, monthly, MODEL, only, holdout=12, origins=3,
         error=SeriesError, fix="Hold out fewer"),
    case("origins-zero", audit, monthly, MODEL, only, holdout=6, origins=0, error=SpecError,
         fix="positive whole number"),
    case("likelihood-grid-unknown", audit, monthly, MODEL, only, likelihood_grid="sometimes",
         error=SpecError, fix="must be one of"),
    # --- estimators
    case("estimator-unknown", audit, monthly, MODEL, ["no-such-library"], error=EstimatorError,
         fix="forecastaudit estimators"),
    case("estimators-empty", audit, monthly, MODEL, [], error=EstimatorError,
         fix="pass None for all"),
    case("estimators-reference", audit, monthly, MODEL, ["reference"], error=EstimatorError,
         fix="leave it out"),
    case("production-not-run", audit, monthly, MODEL, only, production="pmdarima",
         error=EstimatorError, fix="add it to estimators"),
    # Named explicitly, even the default's name is never swapped for another estimator.
    case("production-default-name-not-run", audit, monthly, MODEL, only,
         production="statsmodels-sarimax", error=EstimatorError, fix="add it to estimators"),
    # --- tolerances
    case("tolerance-unknown", audit, monthly, MODEL, only, {"loglike": 1}, error=ToleranceError,
         fix="known:"),
    case("tolerance-negative", Tolerances, loglike_atol=-1.0, error=ToleranceError,
         fix="not negative"),
    case("tolerance-engines-fraction", Tolerances, min_independent_engines=1.7,
         error=ToleranceError, fix="whole number"),
    case("tolerance-engines-text-fraction", parse_overrides, ["min_independent_engines=1.7"],
         where="--tolerance", error=ToleranceError, fix="min_independent_engines=2"),
    case("tolerance-policy-not-bool", Tolerances, fail_on_other_engines="yes",
         error=ToleranceError, fix="True or False"),
    case("tolerance-override-no-equals", parse_overrides, ["loglike_atol"], where="--tolerance",
         error=ToleranceError, fix="NAME=VALUE"),
    # --- the series
    case("series-text", audit, "1,2,3", MODEL, error=SeriesError, fix="pass a pandas Series"),
    case("series-2d", audit, np.ones((30, 2)), MODEL, error=SeriesError, fix="pass one column"),
    case("series-frame-two-columns", audit, pd.DataFrame({"a": range(30), "b": range(30)}),
         "ARIMA(0,1,1)", error=SeriesError, fix="pass one column"),
    case("series-bools", audit, [True, False] * 20, "ARIMA(0,1,1)", error=SeriesError,
         fix="pass numbers"),
    case("series-nan", audit, np.r_[np.arange(30.0), np.nan], "ARIMA(0,1,1)", error=SeriesError,
         fix="fill or trim the gaps"),
    case("series-inf", audit, np.r_[np.arange(30.0), np.inf], "ARIMA(0,1,1)", error=SeriesError,
         fix="fill or trim the gaps"),
    case("series-numbers-as-text", audit, ["1", "2", "3"] * 10, "ARIMA(0,1,1)",
         error=SeriesError, fix="pandas.to_numeric"),
    case("series-empty", audit, [], "ARIMA(0,1,1)", error=SeriesError,
         fix="pass the observations"),
    case("series-too-short", audit, monthly(10), MODEL, error=SeriesError,
         fix="Use a longer series"),
    case("series-constant", audit, np.full(40, 5.0), "ARIMA(1,0,0) +mean", only,
         error=SeriesError, fix="Check the data"),
    case("series-unsorted-dates", audit,
         pd.Series(np.arange(30.0), index=pd.date_range("2020", periods=30, freq="D")[::-1]),
         "ARIMA(0,1,1)", error=SeriesError, fix="sort the series"),
    case("series-duplicate-dates", audit,
         pd.Series(np.arange(4.0), index=pd.to_datetime(["2020-01-01"] * 2 + ["2020-01-02"] * 2)),
         "ARIMA(0,1,1)", error=SeriesError, fix="keep one per period"),
    case("series-one-dated-point", audit,
         pd.Series([4.0], index=pd.DatetimeIndex(["2020-01-01"])), "ARIMA(0,0,0)",
         error=SeriesError, fix="asfreq"),
    case("series-irregular-dates", audit,
         pd.Series(np.arange(5.0), index=pd.to_datetime(
             ["2020-01-01", "2020-01-02", "2020-01-05", "2020-01-06", "2020-02-01"])),
         "ARIMA(0,0,0)", error=SeriesError, fix="Resample"),
    case("series-log-of-zero", audit, np.r_[0.0, np.arange(1.0, 40.0)], "ARIMA(0,1,1) +log",
         error=SeriesError, fix="Remove the transform"),
    case("series-boxcox-overflow", audit, np.linspace(1e70, 2e70, 40), "ARIMA(0,1,1) +boxcox(5)",
         error=SeriesError, fix="smaller lambda"),
    case("series-near-1e300", audit, np.linspace(1e300, 2e300, 40), "ARIMA(0,1,1)", only,
         error=SeriesError, fix="Divide the series"),
    case("series-near-1e-300", audit, np.cumsum(np.linspace(1e-300, 3e-300, 40)),
         "ARIMA(0,1,1)", only, error=SeriesError, fix="Multiply the series"),
    case("series-of-dates", audit, pd.Series(pd.date_range("2020", periods=30)), "ARIMA(0,1,1)",
         error=SeriesError, fix="the dates belong in the index"),
    case("series-name-not-text", audit, monthly, MODEL, only, name=12, error=SeriesError,
         fix="must be a string"),
    # --- one series read from a file
    case("csv-missing", read_series, Path("/no/such/folder/file.csv"), None, error=SeriesError,
         fix="check the path"),
    case("csv-folder", read_series, Path("/"), None, error=SeriesError, fix="give the CSV"),
    case("csv-descending-dates", read_series, None, files=csv_descending, error=SeriesError,
         fix="oldest first"),
    case("csv-mixed-utc-offsets", read_series, None, files=csv_mixed_offsets,
         error=SeriesError, fix="without offsets"),
    case("csv-two-numeric-columns", read_series, None, files=csv_two_numeric,
         error=SeriesError, fix="--column"),
    case("csv-no-such-column", read_series, "sales", files=csv_two_numeric, error=SeriesError,
         fix="its columns"),
    case("csv-bad-date", read_series, "units", files=csv_bad_date, error=SeriesError,
         fix="fix it"),
    case("csv-long-format", read_series, "units", files=csv_long, error=SeriesError,
         fix="forecastaudit panel"),
    case("csv-integer-date-column", read_series, "units", "date", files=csv_integer_dates,
         error=SeriesError, fix="write its dates as text"),
    # --- panels
    case("panel-no-id-column", fa.audit_panel, long_table, MODEL, only, error=PanelError,
         fix="id_column", out=True),
    case("panel-wrong-type", fa.audit_panel, 42, MODEL, only, error=PanelError,
         fix="long-format DataFrame", out=True),
    case("panel-origins-without-holdout", fa.audit_panel, long_table, MODEL, only,
         id_column="line", origins=2, error=SpecError, fix="pass holdout=H", out=True),
    case("panel-models-missing-ids", fa.audit_panel, long_table, {"north": MODEL}, only,
         id_column="line", error=PanelError, fix="give one for every id", out=True),
    case("panel-levels-alike", fa.audit_panel, long_table, MODEL, only, id_column="line",
         levels=(80, 80.0000001), error=SpecError, fix="differ in their first six", out=True),
    # --- model choice and the order search
    case("compare-one-model", fa.compare_models, monthly, [MODEL], holdout=6, error=SpecError,
         fix="at least two"),
    case("compare-no-holdout", fa.compare_models, monthly, [MODEL, "ARIMA(1,1,0)x(0,1,1)12"],
         holdout=None, error=SpecError, fix="holdout=H"),
    case("compare-models-as-text", fa.compare_models, monthly, MODEL, holdout=6,
         error=SpecError, fix="list of two or more"),
    case("order-search-bound-too-large", fa.audit_order_search, monthly, max_p=50,
         error=SpecError, fix="Use max_p <="),
    case("order-search-bound-negative", fa.audit_order_search, monthly, max_q=-1,
         error=SpecError, fix="whole number"),
    # --- limits
    case("limit-unknown", fa.set_limits, sizes=3, error=SpecError, fix="known limits"),
    case("limit-zero", fa.set_limits, horizon=0, error=SpecError, fix="positive whole number"),
    # --- records (obviously bad files)
    case("record-missing", fa.load_record, Path("/no/such/record.json"), error=RecordError,
         fix="No such file"),
    case("record-empty", fa.load_record, files=lambda f: record_file(f, "e.json", ""),
         error=RecordError, fix="not valid JSON"),
    case("record-a-list", fa.load_record, files=lambda f: record_file(f, "l.json", "[1, 2]"),
         error=RecordError, fix="not a forecastaudit record"),
    case("record-truncated", fa.load_record,
         files=lambda f: record_file(f, "t.json", '{"record": "forecastaudit-record", '),
         error=RecordError, fix="not valid JSON"),
    case("record-other-version", fa.load_record, files=record_of_other_version,
         error=RecordError, fix="re-run the audit"),
]  # fmt: skip


def _same(a: Any, b: Any) -> bool:
    """Deep equality that understands pandas and numpy objects (and their metadata)."""
    if isinstance(a, pd.Series | pd.DataFrame):
        return (
            type(a) is type(b)
            and a.equals(b)
            and a.index.equals(b.index)
            and type(a.index) is type(b.index)
            and getattr(a, "name", None) == getattr(b, "name", None)
            and str(getattr(a.index, "freq", None)) == str(getattr(b.index, "freq", None))
        )
    if isinstance(a, np.ndarray):
        return (
            isinstance(b, np.ndarray)
            and a.dtype == b.dtype
            and a.shape == b.shape
            and np.array_equal(a, b, equal_nan=a.dtype.kind == "f")
            and a.flags.writeable == b.flags.writeable
        )
    if isinstance(a, dict):
        return isinstance(b, dict) and a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a)
    if isinstance(a, list | tuple | set | frozenset):
        if type(a) is not type(b) or len(a) != len(b):
            return False
        if isinstance(a, set | frozenset):
            return a == b
        return all(_same(x, y) for x, y in zip(a, b, strict=True))
    return bool(a == b) or (repr(a) == repr(b))


def _files(folder: Path) -> list[str]:
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


def test_the_catalogue_has_at_least_sixty_cases() -> None:
    ids = [c.id for c in CASES]
    assert len(ids) == len(set(ids)), "case ids must be unique"
    assert len(CASES) >= 60


@pytest.mark.parametrize("bad", CASES, ids=[c.id for c in CASES])
def test_bad_input(bad: Case, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    inputs, work, out = tmp_path / "inputs", tmp_path / "work", tmp_path / "out"
    for folder in (inputs, work, out):
        folder.mkdir()
    args, kwargs = bad.args(inputs)
    if bad.out:
        kwargs["out"] = out / "result"
    before_args, before_kwargs = copy.deepcopy(args), copy.deepcopy(kwargs)
    inputs_before = _files(inputs)
    monkeypatch.chdir(work)

    with pytest.raises(ForecastAuditError) as caught:
        bad.call(*args, **kwargs)

    error = caught.value
    assert isinstance(error, bad.error), f"{type(error).__name__}: {error}"
    message = str(error)
    assert bad.fix.lower() in message.lower(), message
    assert "\x1b" not in message, "terminal escape sequences must be escaped"
    assert len(message) < 2_000, "a message echoes at most a short part of the input"
    assert all(_same(a, b) for a, b in zip(args, before_args, strict=True))
    assert _same(kwargs, before_kwargs)
    assert _files(work) == [] and _files(out) == []
    assert _files(inputs) == inputs_before


# ---------------------------------------------------------------------- the plugin's settings
PLUGIN_TEST = """
def test_model(model_audit):
    pass
"""


@pytest.mark.parametrize(
    ("options", "fix"),
    [
        (["--audit-workers=0"], "whole number of at least 1"),
        (["--audit-workers=two"], "whole number of at least 1"),
        (["--audit-tolerance=loglike_atol"], "NAME=VALUE"),
        (["--audit-tolerance=nonsense=1"], "known:"),
        (["--audit-tolerance=min_independent_engines=1.7"], "min_independent_engines=2"),
        (["--audit-tolerance=loglike_atol=-1"], "not negative"),
        (["--audit-estimators=no-such-library"], "forecastaudit estimators"),
        (["--audit-production=no-such-library"], "forecastaudit estimators"),
        (["--audit-baselines=a-file.txt"], "at a folder"),
    ],
    ids=[
        "workers-zero",
        "workers-text",
        "tolerance-no-value",
        "tolerance-unknown",
        "tolerance-engines-fraction",
        "tolerance-negative",
        "estimators-unknown",
        "production-unknown",
        "baselines-a-file",
    ],
)
def test_bad_plugin_setting_is_a_usage_error(
    pytester: pytest.Pytester, options: list[str], fix: str
) -> None:
    """Checked once at configure time: pytest's usage-error exit code, no test runs."""
    pytester.makepyfile(test_model=PLUGIN_TEST)
    pytester.path.joinpath("a-file.txt").write_text("not a folder\n")
    before = _files(pytester.path)
    result = pytester.runpytest_inprocess(*options)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    assert fix in "\n".join(result.errlines + result.outlines)
    after = [p for p in _files(pytester.path) if "__pycache__" not in p]
    assert after == [p for p in before if "__pycache__" not in p]


def test_long_baseline_name_fails_before_the_audit_and_writes_nothing(
    pytester: pytest.Pytester,
) -> None:
    """A 300-character name would exceed the file system's limit (OSError) after the
    baseline folder had been made; it is refused first, with the fix."""
    pytester.makepyfile(
        test_model=f"""
def test_model(model_audit):
    model_audit([1.0, 2.0], "ARIMA(0,1,1)", name="{"n" * 300}")
"""
    )
    result = pytester.runpytest_inprocess("--audit-update-baselines")
    result.assert_outcomes(failed=1)
    assert "pass a shorter name" in result.stdout.str()
    assert "RecordError" in result.stdout.str()
    assert not (pytester.path / "audit-baselines").exists()
