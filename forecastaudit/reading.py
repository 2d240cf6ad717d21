"""Reading one series from a file (CSV or Parquet), as the command line does.

The file is read as it is: nothing is sorted, filled or resampled behind the caller's back.
A time column is recognised only when it holds dates or periods as text (``2011-01-31``,
``2011-01``, ``1998Q1``) or as a date type; a column of integers is never taken for
timestamps. Problems get a :class:`~forecastaudit.errors.SeriesError` that names the file,
the column and the fix; no pandas warning or traceback reaches the caller.
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from forecastaudit.errors import SeriesError
from forecastaudit.series import display_labels
from forecastaudit.validation import echo, plain

__all__ = ["looks_like_dates", "parse_time_column", "read_regressors", "read_series", "read_table"]

# A UTC offset at the end of a timestamp: Z, +01:00, -0500, +01.
_OFFSET_RE = re.compile(r"(?:Z|[+-]\d{2}(?::?\d{2})?)$")
# Periods written as text: quarters (1998Q1, 1998-Q1) and months (2011-01).
_PERIOD_TEXT = r"\d{4}[-/ ]?Q[1-4]|\d{4}-\d{2}"


def read_table(path: str | Path) -> pd.DataFrame:
    """Read a CSV or Parquet file (by its suffix: .parquet or .pq, else CSV)."""
    path = Path(path)
    if not path.exists():
        raise SeriesError(f"No such file: {plain(path)}; check the path.")
    if path.is_dir():
        raise SeriesError(f"{plain(path)} is a folder; give the CSV or Parquet file in it.")
    suffix = path.suffix.lower()
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if suffix in {".parquet", ".pq"}:
                return pd.read_parquet(path)
            return pd.read_csv(path)
    except Exception as exc:
        raise SeriesError(
            f"Cannot read {plain(path)} as {'Parquet' if suffix in {'.parquet', '.pq'} else 'CSV'}"
            f": {type(exc).__name__}: {plain(exc, 200)}. Check that it is a table with a header "
            "row (a .parquet or .pq suffix reads Parquet, any other CSV)."
        ) from None


def _is_text(values: pd.Series) -> bool:
    return values.dtype == object or pd.api.types.is_string_dtype(values)


def parse_time_column(values: pd.Series, column: str, where: str) -> pd.Index:
    """A column of dates or periods as a DatetimeIndex or PeriodIndex.

    Periods written as text (``1998Q1``, ``2011-01``) become a PeriodIndex without pandas'
    "could not infer format" warning. Numbers are refused (pandas would read the integer
    2011 as 2011 nanoseconds after 1970), and so are timestamps with different UTC offsets
    (a file written across a change of daylight-saving time), whose dates would shift when
    converted to one zone.

    Raises
    ------
    SeriesError
        Naming ``where`` (the file), the column and the fix.
    """
    name = plain(column)
    if isinstance(values.dtype, pd.PeriodDtype):
        return pd.PeriodIndex(values, name=column)
    if pd.api.types.is_datetime64_any_dtype(values):
        index = pd.DatetimeIndex(values, name=column)
        return index.tz_localize(None) if index.tz is not None else index
    if pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values):
        raise SeriesError(
            f"Column {name!r} of {where} holds numbers, not dates; write its dates as text "
            "(2011-01-31, 2011-01 or 1998Q1), or name the date column with --date-column."
        )
    if values.isna().any():
        row = int(values.isna().to_numpy().argmax())
        raise SeriesError(
            f"Column {name!r} of {where} has no date in row {row}; every row needs its date."
        )
    text = values.astype(str).str.strip()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # Periods first: "1998Q1" and "2011-01" say their frequency themselves.
        if text.str.fullmatch(_PERIOD_TEXT).all():
            try:
                periods = pd.Index([pd.Period(item) for item in text], name=column)
            except (ValueError, TypeError):
                periods = None
            if isinstance(periods, pd.PeriodIndex):
                return periods
        offsets = {m.group(0) for m in text.map(_OFFSET_RE.search) if m is not None}
        if len(offsets) > 1:
            shown = ", ".join(sorted(offsets)[:3])
            raise SeriesError(
                f"Column {name!r} of {where} has timestamps with different UTC offsets "
                f"({shown}), so their dates would shift when put in one time zone. Write them "
                "without offsets (local dates), or all in one offset (e.g. UTC)."
            )
        try:
            parsed = pd.to_datetime(text, errors="coerce")
        except (ValueError, TypeError) as exc:
            raise SeriesError(
                f"Column {name!r} of {where} cannot be read as dates ({plain(exc, 120)}); write "
                "them as 2011-01-31, 2011-01 or 1998Q1."
            ) from None
    if parsed.isna().any():
        bad = text[parsed.isna()].iloc[0]
        raise SeriesError(
            f"Column {name!r} of {where} has a value that is not a date: {echo(bad)}; fix it, "
            "or name the date column with --date-column."
        )
    index = pd.DatetimeIndex(parsed, name=column)
    return index.tz_localize(None) if index.tz is not None else index


def looks_like_dates(values: pd.Series) -> bool:
    """Whether a column holds dates: a date type, or text that reads as dates throughout.

    Loose on purpose: a column that looks like dates but has a problem (mixed UTC offsets,
    a typo in a few rows) is taken as the date column, so that :func:`parse_time_column`
    names the problem instead of the dates being dropped without a word. Four in five
    values must read as dates (common practice, no source).
    """
    if isinstance(values.dtype, pd.PeriodDtype) or pd.api.types.is_datetime64_any_dtype(values):
        return True
    if not _is_text(values) or values.empty:
        return False
    text = values.dropna().astype(str).str.strip()
    if text.empty:
        return False
    if text.str.fullmatch(_PERIOD_TEXT).mean() >= 0.8:
        return True
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            parsed = pd.to_datetime(text, errors="coerce", utc=True, format="mixed")
        except (ValueError, TypeError):
            return False
    return bool(parsed.notna().mean() >= 0.8)


def read_series(
    path: str | Path,
    column: str | None,
    date_column: str | None = None,
    *,
    exclude: Sequence[str] = (),
) -> pd.Series:
    """Read one column of a CSV or Parquet file as a Series indexed by its date column.

    Without ``date_column`` the first column is used as dates when it holds dates. A
    long-format file of many series (dates that repeat, or an id column first) is refused
    with a pointer to the ``panel`` command. Dates must increase from row to row. Without
    ``column`` the only numeric column is read, leaving out those in ``exclude`` (the
    regressors read from the same file).
    """
    from forecastaudit.panel.data import looks_like_panel

    path = Path(path)
    where = plain(path)
    frame = read_table(path)
    if frame.columns.has_duplicates:
        dup = frame.columns[frame.columns.duplicated()][0]
        raise SeriesError(f"{where} has two columns named {echo(dup)}; rename one.")
    columns = ", ".join(echo(c, 40) for c in frame.columns[:20])
    if date_column is None or date_column in frame.columns:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            why = looks_like_panel(frame, date_column)
        if why is not None:
            raise SeriesError(
                f"{where} looks like a panel of many series in long format: {plain(why, 200)}. "
                "Audit it with 'forecastaudit panel FILE --model ... --id-column COLUMN', or "
                "give a file of one series (one row per period)."
            )
    dates = date_column
    if dates is None:
        # The first column of dates; a column of numbers (an id, a year) never counts.
        dates = next((c for c in frame.columns if c != column and looks_like_dates(frame[c])), None)
    if column is None:
        numeric = [
            c
            for c in frame.columns
            if c != dates
            and str(c) not in exclude
            and pd.api.types.is_numeric_dtype(frame[c])
            and not pd.api.types.is_bool_dtype(frame[c])
        ]
        if len(numeric) != 1:
            raise SeriesError(
                f"{where} has {len(numeric)} numeric columns besides the dates (columns: "
                f"{columns}); choose one with --column."
            )
        column = numeric[0]
    if column not in frame.columns:
        raise SeriesError(f"{where} has no column {echo(column)}; its columns: {columns}.")
    series = frame[column].copy()
    if dates is not None:
        if dates not in frame.columns:
            raise SeriesError(f"{where} has no date column {echo(dates)}; its columns: {columns}.")
        if dates == column:
            raise SeriesError(
                f"The date column and the value column of {where} are both {echo(column)}; "
                "name two different columns."
            )
        index = parse_time_column(frame[dates], dates, where)
        if len(index) > 1 and index.is_monotonic_decreasing and not index.has_duplicates:
            ends = display_labels(index[[0, -1]])
            raise SeriesError(
                f"The dates of {where} run backwards (newest first: {ends[0]} down to "
                f"{ends[1]}); sort the file by {plain(dates)!r}, oldest first."
            )
        series.index = _with_frequency(index) if index.is_monotonic_increasing else index
    series.name = column
    return series


def read_regressors(
    path: str | Path, columns: Sequence[str], date_column: str | None = None
) -> pd.DataFrame:
    """Read regressor columns of a CSV or Parquet file, indexed by its date column.

    The dates are found and read as :func:`read_series` reads them (the first column that
    holds dates, or ``date_column``), so regressors read from the series' own file line up
    with it, and a file of future values is indexed by the periods it covers. Alignment,
    gaps and the other checks are :func:`forecastaudit.series.prepare_regressors`'s.

    Raises
    ------
    RegressorError
        When a named column is not in the file.
    SeriesError
        When the file cannot be read or its dates cannot be parsed.
    """
    from forecastaudit.errors import RegressorError

    path = Path(path)
    where = plain(path)
    frame = read_table(path)
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        listed = ", ".join(echo(c, 40) for c in frame.columns[:20])
        raise RegressorError(
            f"{where} has no regressor column {', '.join(echo(c) for c in missing)}; its "
            f"columns: {listed}."
        )
    dates = date_column
    if dates is None:
        dates = next(
            (c for c in frame.columns if c not in columns and looks_like_dates(frame[c])), None
        )
    out = frame[list(columns)].copy()
    if dates is not None:
        if dates not in frame.columns:
            raise SeriesError(f"{where} has no date column {echo(dates)}.")
        index = parse_time_column(frame[dates], dates, where)
        out.index = _with_frequency(index)
    return out


def _with_frequency(index: Any) -> Any:
    """A dated index with the frequency pandas infers from it (unchanged when none)."""
    if not isinstance(index, pd.DatetimeIndex) or len(index) < 3:
        return index
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            freq = pd.infer_freq(index)
        except (TypeError, ValueError):
            freq = None
    return index if freq is None else pd.DatetimeIndex(index, freq=freq)
