"""Reading one series from a file (CSV or Parquet), as the command line does.

The file is read as it is: nothing is sorted, filled or resampled behind the caller's back.
A time column is recognised only when it holds dates or periods as text (``2011-01-31``,
``2011-01``, ``1998Q1``) or as a date type; a column of integers is never taken for
timestamps. Problems get a :class:`~forecastaudit.errors.SeriesError` that names the file,
the column (or the line) and the fix; no pandas warning or traceback reaches the caller.

A CSV file is checked as text before pandas reads it (a binary file, one saved as UTF-16 or
in another encoding than UTF-8, an empty file), and after: a row with more or fewer fields
than the header, a header with no data rows. Such files are refused, never guessed at.
"""

from __future__ import annotations

import codecs
import csv
import re
import warnings
from collections.abc import Iterator, Sequence
from contextlib import closing
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


# Suffixes from which pandas infers a compressed CSV; such files are binary by design.
_COMPRESSED = (".gz", ".bz2", ".zip", ".xz", ".zst", ".tar")
# How some common binary files begin, and what they are.
_SIGNATURES: tuple[tuple[bytes, str], ...] = (
    (b"PAR1", "a Parquet file"),
    (b"\x89PNG", "a PNG image"),
    (b"\xff\xd8\xff", "a JPEG image"),
    (b"%PDF", "a PDF document"),
    (b"PK\x03\x04", "a ZIP archive (an .xlsx workbook is one)"),
    (b"\xd0\xcf\x11\xe0", "an older Office file (such as .xls)"),
    (b"\x1f\x8b", "gzip-compressed data"),
)
# Bytes read to tell text from binary data.
_SNIFF_BYTES = 8192
# Share of characters of those bytes that may be unreadable or control characters in a
# text file (our choice: a CSV in another encoding has a few; binary data has many).
_BINARY_SHARE = 0.1
_SAVE_AS_UTF8 = "Save the file as UTF-8 (a spreadsheet calls it 'CSV UTF-8') and re-run."
_ONE_FIELD_PER_COLUMN = (
    "Give every row one field per column of the header (look for a stray comma or a value "
    "in the wrong place; a missing value is an empty field)."
)


def read_table(path: str | Path) -> pd.DataFrame:
    """Read a CSV or Parquet file (by its suffix: .parquet or .pq, else CSV).

    Parameters
    ----------
    path : str or Path
        The file. A CSV file must be UTF-8 text with a header row; a suffix of a
        compressed file (``.gz``, ``.zip``, ...) reads it compressed, as pandas does.

    Returns
    -------
    pandas.DataFrame
        The table as it is in the file, with a default (position) index.

    Raises
    ------
    SeriesError
        When the file is missing, a folder, empty, binary, not UTF-8, has a row with more
        or fewer fields than its header, or has no data rows; the message names the file,
        the line where there is one, and the fix.
    """
    path = Path(path)
    where = plain(path)
    if not path.exists():
        raise SeriesError(f"No such file: {where}; check the path.")
    if path.is_dir():
        raise SeriesError(f"{where} is a folder; give the CSV or Parquet file in it.")
    suffix = path.suffix.lower()
    if suffix in {".parquet", ".pq"}:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                frame = pd.read_parquet(path)
        except Exception as exc:
            raise SeriesError(
                f"Cannot read {where} as Parquet: {type(exc).__name__}: {plain(exc, 200)}. "
                "Check that it is a Parquet file (a .parquet or .pq suffix reads Parquet, "
                "any other CSV)."
            ) from None
        if len(frame) == 0:
            raise SeriesError(
                f"{where} has columns ({_listed(frame.columns)}) but no rows; give a file "
                "with one row per period."
            )
        return frame
    if not suffix.endswith(_COMPRESSED):
        _check_text(path, where)
    frame = _read_csv(path, where)
    if len(frame) == 0:
        raise SeriesError(
            f"{where} has a header but no data rows (columns: {_listed(frame.columns)}); "
            "add one row per period below the header."
        )
    return frame


def _listed(columns: Any) -> str:
    return ", ".join(echo(c, 40) for c in list(columns)[:20])


def _check_text(path: Path, where: str) -> None:
    """Refuse a file that is empty or holds binary data, before pandas reads it."""
    with path.open("rb") as handle:
        head = handle.read(_SNIFF_BYTES)
    if not head.strip():
        raise SeriesError(
            f"{where} is empty; give a CSV file with a header row and one row per period."
        )
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise SeriesError(f"{where} is saved as UTF-16 text, which is not read. {_SAVE_AS_UTF8}")
    kind = next((what for start, what in _SIGNATURES if head.startswith(start)), None)
    if kind is None and b"\x00" not in head:
        text = codecs.getincrementaldecoder("utf-8")(errors="replace").decode(head, final=False)
        odd = sum(
            1
            for char in text
            if char == "\ufffd" or (ord(char) < 0x20 and char not in "\t\n\r\f\v") or char == "\x7f"
        )
        if odd <= _BINARY_SHARE * max(len(text), 1):
            return
    shown = f", and it begins as {kind} does" if kind else ""
    fix = (
        "If it is a Parquet file, give it a .parquet or .pq suffix; else give a CSV file."
        if kind == "a Parquet file"
        else "Give a CSV file (plain text, one row per period) or a .parquet file."
    )
    raise SeriesError(
        f"{where} does not look like a text CSV file (it holds binary data{shown}). {fix}"
    )


def _read_csv(path: Path, where: str) -> pd.DataFrame:
    """``pandas.read_csv`` with its errors and warnings turned into our messages."""
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            # index_col=False: a row with an extra field must not turn the first column
            # into the index (pandas' guess when the first data row is the longer one).
            frame = pd.read_csv(path, index_col=False)
    except pd.errors.EmptyDataError:
        raise SeriesError(
            f"{where} is empty; give a CSV file with a header row and one row per period."
        ) from None
    except pd.errors.ParserError as exc:
        raise _parser_problem(path, where, exc) from None
    except UnicodeDecodeError:
        raise _encoding_problem(path, where) from None
    except Exception as exc:
        raise SeriesError(
            f"Cannot read {where} as CSV: {type(exc).__name__}: {plain(exc, 200)}. Check that "
            "it is a table with a header row (a .parquet or .pq suffix reads Parquet, any "
            "other CSV)."
        ) from None
    # pandas drops the extra fields of rows longer than the header with a warning, and
    # fills the missing fields of shorter rows with NaN without one.
    longer = any(issubclass(w.category, pd.errors.ParserWarning) for w in caught)
    shorter = frame.shape[1] > 1 and bool(frame.iloc[:, -1].isna().any())
    if longer or shorter:
        found = _first_ragged_line(path, short_only=not longer)
        if found is not None:
            raise _ragged(where, *found)
    return frame


def _records(path: Path) -> Iterator[tuple[int, list[str]]]:
    """The line each non-blank record of a CSV file starts on, and its fields.

    Read with Python's own CSV reader, which counts the lines of a quoted field that spans
    several; blank lines (which pandas skips) are skipped. Stops at a record it cannot read.
    """
    with path.open(encoding="utf-8-sig", errors="replace", newline="") as handle:
        reader = csv.reader(handle)
        start = 1
        try:
            for fields in reader:
                line, start = start, reader.line_num + 1
                if fields and not (len(fields) == 1 and not fields[0].strip()):
                    yield line, fields
        except csv.Error:
            return


def _first_ragged_line(path: Path, *, short_only: bool = False) -> tuple[int, int, int] | None:
    """(line, fields, fields of the header) of the first row with the wrong number of fields.

    A row is wrong when it has fewer fields than the header, or (unless ``short_only``) more
    of them with text in the extra ones: empty extra fields (a comma at the end of every
    line) are dropped by pandas, and so they are not counted.
    """
    with closing(_records(path)) as records:
        header = next(records, None)
        if header is None:
            return None
        expected = len(header[1])
        for line, fields in records:
            if len(fields) < expected:
                return line, len(fields), expected
            if not short_only and any(f.strip() for f in fields[expected:]):
                return line, len(fields), expected
    return None


def _ragged(where: str, line: int, count: int, expected: int) -> SeriesError:
    noun = "field" if count == 1 else "fields"
    separator = (
        " A header of one field often means the columns are separated by ';' or tabs (and "
        "decimals written with commas): save the file with comma separators and decimal "
        "points."
        if expected == 1
        else ""
    )
    return SeriesError(
        f"Line {line} of {where} has {count} {noun}, but the header has {expected}. "
        f"{_ONE_FIELD_PER_COLUMN}{separator}"
    )


def _parser_problem(path: Path, where: str, exc: Exception) -> SeriesError:
    """Our message for a ``pandas.errors.ParserError``."""
    text = str(exc)
    fields = re.search(r"Expected (\d+) fields? in line (\d+), saw (\d+)", text)
    if fields is not None:
        found = _first_ragged_line(path)
        if found is None:  # our reader disagrees; pandas' own count is the next best
            expected, line, count = (int(g) for g in fields.groups())
            found = (line, count, expected)
        return _ragged(where, *found)
    if "EOF inside string" in text:
        return SeriesError(
            f'{where} has a quote (") that is never closed{_unclosed_quote(path)}; close it, '
            "or remove it."
        )
    detail = plain(text.replace("Error tokenizing data. C error: ", "").strip(), 200)
    return SeriesError(
        f"{where} cannot be read as CSV ({detail}); check that it is a table with a header "
        "row and one row per line, its fields separated by commas."
    )


def _unclosed_quote(path: Path) -> str:
    """' (the field starting on line N)' for the quoted field that is never closed."""
    with path.open(encoding="utf-8-sig", errors="replace", newline="") as handle:
        reader = csv.reader(handle, strict=True)
        start = 1
        try:
            for _ in reader:
                start = reader.line_num + 1
        except csv.Error:
            return f" (in the row that starts on line {start})"
    return ""


def _encoding_problem(path: Path, where: str) -> SeriesError:
    """Our message for a file that is not UTF-8, naming the first line that is not."""
    with path.open("rb") as handle:
        for number, raw in enumerate(handle, start=1):
            if number == 1:
                raw = raw.removeprefix(codecs.BOM_UTF8)
            try:
                raw.decode("utf-8")
            except UnicodeDecodeError as exc:
                return SeriesError(
                    f"{where} is not UTF-8 text: line {number} has the byte "
                    f"0x{raw[exc.start]:02X}, which UTF-8 does not allow there. {_SAVE_AS_UTF8}"
                )
    return SeriesError(f"{where} is not UTF-8 text. {_SAVE_AS_UTF8}")


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
    regressors read from the same file); a column of numbers with text in it counts as one
    of them, and is refused naming the first text value and its line.

    Parameters
    ----------
    path : str or Path
        A CSV or Parquet file, read by :func:`read_table`.
    column : str or None
        The column of values; None for the only numeric one.
    date_column : str, optional
        The column of dates; by default the first column that holds dates.
    exclude : sequence of str, optional
        Columns that are not the values (the regressors), when ``column`` is None.

    Returns
    -------
    pandas.Series
        The values, named ``column``, indexed by the dates when there are any.

    Raises
    ------
    SeriesError
        When the file cannot be read (see :func:`read_table`), or its columns or dates
        cannot be used; the message names the file, the column or line, and the fix.
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
        mixed = _text_among_numbers(
            frame, [c for c in frame.columns if c != dates and str(c) not in exclude]
        )
        if mixed:
            raise _text_problem(path, where, frame, mixed)
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


def _text_among_numbers(frame: pd.DataFrame, names: Sequence[Any]) -> dict[Any, pd.Series]:
    """The text columns of ``names`` that hold mostly numbers: each with its text values.

    "Mostly" is at least half of the values that are not missing (our choice): a column of
    numbers with a typo in it, not a column of labels with a few numbers among them.
    """
    out: dict[Any, pd.Series] = {}
    for name in names:
        values = frame[name]
        if not _is_text(values):
            continue
        given = values.dropna()
        if given.empty:
            continue
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            numbers = pd.to_numeric(given.astype(str).str.strip(), errors="coerce")
        readable = numbers.notna()
        if readable.mean() >= 0.5 and not readable.all():
            out[name] = given[~readable.to_numpy()]
    return out


def _text_problem(
    path: Path, where: str, frame: pd.DataFrame, mixed: dict[Any, pd.Series]
) -> SeriesError:
    """The message for columns of numbers with text in them, naming the first of each."""
    lines = _data_lines(path, len(frame))
    parts = []
    for name, text in list(mixed.items())[:3]:
        row = frame.index.get_loc(text.index[0])
        place = f"line {lines[row]}" if lines is not None else f"data row {row + 1}"
        more = f" (and {len(text) - 1} more)" if len(text) > 1 else ""
        column = f" in {echo(name, 40)}" if len(mixed) > 1 else ""
        parts.append(f"{echo(text.iloc[0], 40)} on {place}{more}{column}")
    if len(mixed) == 1:
        head = f"Column {echo(next(iter(mixed)), 40)} of {where} holds numbers but also text"
    else:
        head = f"Columns {_listed(mixed)} of {where} hold numbers but also text"
    values = "the value" if sum(len(text) for text in mixed.values()) == 1 else "those values"
    return SeriesError(
        f"{head}: {'; '.join(parts)}. Correct {values} (a missing value is an empty field), "
        "or choose the column to audit with --column."
    )


def _data_lines(path: Path, rows: int) -> list[int] | None:
    """The line each data row of a CSV file starts on (None for Parquet, or if unsure)."""
    if path.suffix.lower() in {".parquet", ".pq"} or path.suffix.lower().endswith(_COMPRESSED):
        return None
    lines = [line for line, _ in _records(path)][1:]
    return lines if len(lines) == rows else None


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
