"""Reading a panel: a long table (or a mapping of series) into one series per id.

A panel arrives in one of two shapes:

* a long-format :class:`pandas.DataFrame` with one row per series and period: an id column,
  a time column and a value column (any other columns are ignored);
* a mapping of id to series (:class:`pandas.Series` with a date or period index, or arrays).

Each series comes out sorted by time, with a :class:`pandas.PeriodIndex` when its dates
have one regular frequency. Problems of the table as a whole (a missing column, values that
are not numbers, a repeated id and period) raise :class:`~forecastaudit.errors.PanelError`
before anything is fitted. Problems of one series (gaps, too few observations) are left to
the audit of that series, which reports them for that series only.

Nothing here modifies the caller's objects.
"""

from __future__ import annotations

import hashlib
import warnings
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.errors import ForecastAuditError, PanelError
from forecastaudit.spec import ModelSpec

__all__ = ["PanelSeries", "looks_like_panel", "read_panel", "resolve_specs"]

#: Ids are shown in tables and used in file names; longer ones are refused.
MAX_ID_CHARS = 200


@dataclass(frozen=True)
class PanelSeries:
    """One series of a panel, ready to audit.

    Attributes
    ----------
    id : str
        The series id as text.
    series : pandas.Series
        The observations in time order (a copy; the caller's data is not touched).
    spec : ModelSpec
        The model to audit on this series.
    digest : str
        SHA-256 of the values, the index and the model text: a series whose digest is in
        the store of an earlier run has been audited already.
    """

    id: str
    series: pd.Series
    spec: ModelSpec
    digest: str


def _digest(series: pd.Series, spec: ModelSpec) -> str:
    h = hashlib.sha256()
    h.update(np.ascontiguousarray(series.to_numpy(dtype=float), dtype="<f8").tobytes())
    h.update("\n".join(str(label) for label in series.index).encode("utf-8"))
    h.update(str(spec).encode("utf-8"))
    return h.hexdigest()


def _check_id(raw: Any) -> str:
    text = str(raw)
    if not text.strip():
        raise PanelError(f"A series id is empty ({raw!r}); give every series a non-empty id.")
    if len(text) > MAX_ID_CHARS:
        raise PanelError(
            f"A series id has {len(text)} characters (at most {MAX_ID_CHARS}): "
            f"{text[:40]!r}...; shorten the ids."
        )
    return text


def _as_time_index(values: pd.Series, column: str) -> pd.Index:
    """The time column as a PeriodIndex or DatetimeIndex (all values must be times).

    Read as one series' file is read (:func:`forecastaudit.reading.parse_time_column`):
    periods written as text (``2011-01``, ``1998Q1``) are periods, numbers are never taken
    for timestamps, and timestamps with different UTC offsets are refused rather than
    shifted into one zone (where monthly dates would stop being regular).
    """
    from forecastaudit.errors import SeriesError
    from forecastaudit.reading import parse_time_column

    try:
        return parse_time_column(values, column, "the panel table")
    except SeriesError as exc:
        raise PanelError(
            f"{exc} Name the right column with time_column (--date-column) if this is not it."
        ) from None


def _regular(index: pd.Index) -> pd.Index:
    """A DatetimeIndex with one inferable frequency as a PeriodIndex; otherwise as it is."""
    if isinstance(index, pd.PeriodIndex) or len(index) < 3:
        return index
    try:
        freq = pd.infer_freq(index)
    except (TypeError, ValueError):
        freq = None
    if freq is None:
        return index
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return index.to_period(freq)
        except (ValueError, TypeError):
            return pd.DatetimeIndex(index, freq=freq)


def _pick_columns(
    frame: pd.DataFrame,
    id_column: str | None,
    time_column: str | None,
    value_column: str | None,
) -> tuple[str, str, str]:
    columns = [str(c) for c in frame.columns]
    if id_column is None:
        raise PanelError(
            f"Name the column that identifies each series with id_column (--id-column); "
            f"the table's columns: {columns}."
        )
    for what, name in (("id_column", id_column), ("time_column", time_column),
                       ("value_column", value_column)):  # fmt: skip
        if name is not None and name not in frame.columns:
            raise PanelError(f"The table has no column {name!r} ({what}); its columns: {columns}.")
    rest = [c for c in frame.columns if c != id_column]
    if time_column is None:
        candidates = [c for c in rest if c != value_column and _looks_like_time(frame[c])]
        if not candidates:
            raise PanelError(
                f"No column of dates or periods found; name it with time_column "
                f"(--date-column). The table's columns: {columns}."
            )
        time_column = candidates[0]
    if value_column is None:
        numeric = [
            c for c in rest
            if c != time_column and pd.api.types.is_numeric_dtype(frame[c])
            and not pd.api.types.is_bool_dtype(frame[c])
        ]  # fmt: skip
        if len(numeric) != 1:
            raise PanelError(
                f"Name the column of values with value_column (--column); numeric columns "
                f"besides the id and time: {[str(c) for c in numeric]}."
            )
        value_column = numeric[0]
    if len({id_column, time_column, value_column}) < 3:
        raise PanelError(
            f"id_column, time_column and value_column must be three different columns; got "
            f"{id_column!r}, {time_column!r}, {value_column!r}."
        )
    return id_column, time_column, value_column


def _looks_like_time(values: pd.Series) -> bool:
    """Whether a column holds dates or periods (as :mod:`forecastaudit.reading` decides)."""
    from forecastaudit.reading import looks_like_dates

    return looks_like_dates(values)


def _from_frame(
    frame: pd.DataFrame,
    id_column: str | None,
    time_column: str | None,
    value_column: str | None,
) -> dict[str, pd.Series]:
    if frame.columns.has_duplicates:
        dup = frame.columns[frame.columns.duplicated()][0]
        raise PanelError(f"The table has two columns named {dup!r}; rename one.")
    if frame.empty:
        raise PanelError("The panel table has no rows; pass the observations to audit.")
    ids, times, values = _pick_columns(frame, id_column, time_column, value_column)
    if frame[ids].isna().any():
        row = int(np.flatnonzero(frame[ids].isna().to_numpy())[0])
        raise PanelError(f"The id column {ids!r} is empty in row {row}; every row needs its id.")
    column = frame[values]
    if not pd.api.types.is_numeric_dtype(column) or pd.api.types.is_bool_dtype(column):
        numbers = pd.to_numeric(column, errors="coerce")
        bad = (numbers.isna() & column.notna()).to_numpy()
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise PanelError(
                f"The value column {values!r} has an entry that is not a number: "
                f"{column.iloc[row]!r} (row {row}); fix it or name the right column."
            )
        column = numbers
    index = _as_time_index(frame[times], times)
    table = pd.DataFrame(
        {"id": frame[ids].map(_check_id).to_numpy(), "value": column.to_numpy(dtype=float)},
        index=index,
    )
    repeated = pd.Index(list(zip(table["id"], table.index, strict=True))).duplicated()
    if repeated.any():
        first = int(np.flatnonzero(repeated)[0])
        raise PanelError(
            f"Series {table['id'].iloc[first]!r} has two rows for {table.index[first]}; keep "
            "one row per series and period."
        )
    out: dict[str, pd.Series] = {}
    for key, part in table.groupby("id", sort=False):
        series = part["value"].sort_index()
        series.index = _regular(series.index)
        series.index.name = times
        series.name = str(key)
        out[str(key)] = series
    return out


def _from_mapping(data: Mapping[Any, Any]) -> dict[str, pd.Series]:
    out: dict[str, pd.Series] = {}
    for raw, values in data.items():
        key = _check_id(raw)
        if key in out:
            raise PanelError(f"Two series have the id {key!r} once written as text; rename one.")
        if isinstance(values, pd.Series):
            series = values.copy()
            if isinstance(series.index, pd.DatetimeIndex) and series.index.freq is None:
                series.index = _regular(series.index)
        elif isinstance(values, pd.DataFrame):
            raise PanelError(
                f"Series {key!r} is a DataFrame; give each id one Series (or pass a long "
                "table with id_column)."
            )
        else:
            try:
                series = pd.Series(np.array(values, dtype=float, copy=True))
            except (TypeError, ValueError):
                raise PanelError(
                    f"Series {key!r} is not a sequence of numbers ({type(values).__name__}); "
                    "give a pandas Series or an array of numbers."
                ) from None
        series.name = key
        out[key] = series
    return out


def resolve_specs(
    spec: ModelSpec | str | Mapping[Any, ModelSpec | str], ids: list[str]
) -> dict[str, ModelSpec]:
    """One parsed specification per id: the same for all, or one per series from a mapping.

    Raises
    ------
    PanelError
        If a mapping lacks some ids or names ids that are not in the panel.
    SpecError
        If a model text does not parse.
    """
    if isinstance(spec, ModelSpec | str):
        parsed = spec if isinstance(spec, ModelSpec) else ModelSpec.parse(spec)
        return dict.fromkeys(ids, parsed)
    if not isinstance(spec, Mapping):
        raise PanelError(
            "spec must be a ModelSpec, a model text such as 'ARIMA(0,1,1)x(0,1,1)12 +log', "
            f"or a mapping of series id to one of those; got {type(spec).__name__}."
        )
    given = {_check_id(k): v for k, v in spec.items()}
    missing = [i for i in ids if i not in given]
    if missing:
        shown = ", ".join(repr(i) for i in missing[:5]) + (" ..." if len(missing) > 5 else "")
        raise PanelError(
            f"spec has no model for {len(missing)} series ({shown}); give one for every id."
        )
    unknown = [k for k in given if k not in set(ids)]
    if unknown:
        raise PanelError(
            f"spec names series that are not in the panel: {', '.join(map(repr, unknown[:5]))}."
        )
    out: dict[str, ModelSpec] = {}
    for key in ids:
        value = given[key]
        try:
            out[key] = value if isinstance(value, ModelSpec) else ModelSpec.parse(value)
        except ForecastAuditError as exc:
            raise type(exc)(f"The model of series {key!r}: {exc}") from None
    return out


def read_panel(
    data: pd.DataFrame | Mapping[Any, Any],
    spec: ModelSpec | str | Mapping[Any, ModelSpec | str],
    *,
    id_column: str | None = None,
    time_column: str | None = None,
    value_column: str | None = None,
) -> list[PanelSeries]:
    """Split a panel into its series, each with its model.

    Parameters
    ----------
    data : pandas.DataFrame or mapping
        A long table (``id_column`` required) or a mapping of id to series.
    spec : ModelSpec, str or mapping
        One model for every series, or a mapping of id to model.
    id_column, time_column, value_column : str, optional
        Columns of a long table. Without ``time_column`` the first column of dates is used;
        without ``value_column`` the only numeric column left.

    Returns
    -------
    list of PanelSeries
        In the order the ids first appear.

    Raises
    ------
    PanelError
        On a table or mapping that cannot be split into series.
    """
    if isinstance(data, pd.DataFrame):
        series = _from_frame(data, id_column, time_column, value_column)
    elif isinstance(data, Mapping):
        if id_column is not None or time_column is not None or value_column is not None:
            raise PanelError(
                "id_column, time_column and value_column apply to a long table; a mapping "
                "of id to series needs none of them."
            )
        series = _from_mapping(data)
    else:
        raise PanelError(
            "data must be a long-format DataFrame (one row per series and period) or a "
            f"mapping of series id to series; got {type(data).__name__}."
        )
    if not series:
        raise PanelError("The panel has no series; pass at least one.")
    ids = list(series)
    specs = resolve_specs(spec, ids)
    return [PanelSeries(i, series[i], specs[i], _digest(series[i], specs[i])) for i in ids]


def looks_like_panel(frame: pd.DataFrame, date_column: str | None = None) -> str | None:
    """Why a table read for one series looks like a long-format panel, or None.

    A table is taken for a panel when its dates repeat (several series share each period),
    or when its first column is not dates but another column is and the first column
    repeats values (an id column).
    """
    columns = list(frame.columns)
    if not columns or frame.empty:
        return None
    dates = date_column
    if dates is None:
        dates = next((c for c in columns if _looks_like_time(frame[c])), None)
    if dates is None or dates not in frame.columns:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        parsed = pd.to_datetime(frame[dates].astype(str), errors="coerce")
    if parsed.notna().all() and parsed.duplicated().any():
        first = frame[dates][parsed.duplicated()].iloc[0]
        return f"its dates repeat (first repeated: {first!r} in column {dates!r})"
    first = columns[0]
    if first != dates and not _looks_like_time(frame[first]) and frame[first].duplicated().any():
        return (
            f"its first column {first!r} is not dates, repeats its values and column "
            f"{dates!r} holds dates"
        )
    return None
