"""Input validation and normalisation of the series to audit.

Everything the estimators see passes through :func:`prepare_series` once. It never modifies
the caller's object: values are copied into a read-only float array.
"""

from __future__ import annotations

import dataclasses
import hashlib
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.conventions import difference
from forecastaudit.errors import RegressorError, SeriesError
from forecastaudit.spec import ModelSpec
from forecastaudit.validation import echo, limit_error, plain, whole_number

__all__ = [
    "PreparedRegressors",
    "PreparedSeries",
    "conventional_periods",
    "period_from_frequency",
    "prepare_future_regressors",
    "prepare_regressors",
    "prepare_series",
    "with_regressors",
]

# Seasonal period implied by a pandas frequency, keyed by the offset's base code (the part
# before any "-" anchor such as "-DEC" or "-SUN"), old and new pandas spellings both. Case
# matters: "MS" is month start but "ms" is milliseconds, "min" is minutes.
_PERIOD_BY_CODE = {
    **dict.fromkeys(("M", "ME", "MS", "BM", "BME", "BMS", "CBM", "CBME", "CBMS"), 12),
    **dict.fromkeys(("Q", "QE", "QS", "BQ", "BQE", "BQS"), 4),
    "W": 52,
    "D": 7,
    **dict.fromkeys(("B", "C"), 5),
    **dict.fromkeys(("h", "H"), 24),
    **dict.fromkeys(("Y", "YE", "YS", "A", "AS", "BY", "BYE", "BYS", "BA", "BAS"), 1),
}
# Further cycles a model may name on such an index without saying so twice: hourly data
# have a weekly cycle as well as a daily one, daily data a yearly one as well as a weekly one.
# Any other period on a dated index (a quarterly model on monthly data) must be confirmed
# with period=.
_OTHER_CYCLES = {24: (168,), 7: (365,)}
_FREQ_RE = re.compile(r"^(?P<n>\d*)(?P<code>[A-Za-z]+)(?:-[A-Za-z]+)?$")


def period_from_frequency(freq: str | None) -> int | None:
    """The usual seasonal period for a pandas frequency string, or None when unknown.

    Monthly data give 12, quarterly 4, weekly 52, daily 7 (weekly cycle), business-daily 5,
    hourly 24 and yearly 1. A multiple such as ``"2ME"`` (every two months) has no
    conventional period and gives None, as do sub-hourly frequencies. The string is read
    directly rather than through pandas' parser, so deprecated spellings that a PeriodIndex
    still reports (``"M"``, ``"Q-DEC"``) raise no warning.
    """
    if not freq:
        return None
    if not isinstance(freq, str):
        freq = getattr(freq, "freqstr", None)
        if not freq:
            return None
    match = _FREQ_RE.match(freq.strip())
    if not match or match["n"] not in ("", "1"):
        return None
    return _PERIOD_BY_CODE.get(match["code"])


def conventional_periods(freq: str | None) -> tuple[int, ...]:
    """The seasonal periods a model may have on an index of frequency ``freq`` unconfirmed.

    The usual period (:func:`period_from_frequency`) first, then the other cycles of that
    frequency: hourly 24 and 168 (a week of hours), daily 7 and 365. Empty when the
    frequency has no conventional period.
    """
    usual = period_from_frequency(freq)
    if usual is None:
        return ()
    return (usual, *_OTHER_CYCLES.get(usual, ()))


@dataclass(frozen=True, eq=False)
class PreparedSeries:
    """A validated series: values on the original scale, its index, period and fingerprint.

    Attributes
    ----------
    values : numpy.ndarray
        Read-only float64 copy of the observations, original scale.
    index : pandas.Index or None
        The time index when one was given (DatetimeIndex or PeriodIndex), else None.
    name : str
        A display name (the Series name, or ``"y"``).
    period : int or None
        Seasonal period in use: the explicit one, else the one implied by the frequency.
    frequency : str or None
        The pandas frequency string of the index, when there is one.
    fingerprint : str
        SHA-256 hex digest of the values (float64, little-endian) and of the index labels,
        so two records can tell whether they were made from the same data.
    notes : tuple of str
        What happened to the input on its way in that a reviewer should know (integers too
        large to hold exactly as float64 numbers). Each becomes a finding of the audit.
    """

    values: np.ndarray
    index: pd.Index | None
    name: str
    period: int | None
    frequency: str | None
    fingerprint: str
    notes: tuple[str, ...] = ()

    def __len__(self) -> int:
        return int(self.values.size)

    def transformed(self, spec: ModelSpec) -> np.ndarray:
        """The values after the spec's transform (a new array; log or Box-Cox).

        Raises
        ------
        SeriesError
            When a log or Box-Cox transform meets a value that is not strictly positive.
        """
        lam = spec.boxcox_lambda
        if lam is None:
            return self.values.copy()
        if np.any(self.values <= 0):
            bad = int(np.argmax(self.values <= 0))
            raise SeriesError(
                f"The {spec.transform} transform needs strictly positive values, but "
                f"observation {bad} of '{plain(self.name)}' is {float(self.values[bad])!r}. "
                "Remove the transform from the model, or shift the data deliberately before "
                "the audit."
            )
        if lam == 0.0:
            return np.log(self.values)
        with np.errstate(over="ignore", invalid="ignore"):
            out = (np.power(self.values, lam) - 1.0) / lam
        if not np.all(np.isfinite(out)):
            bad = int(np.argmax(~np.isfinite(out)))
            raise SeriesError(
                f"The {spec.transform} transform overflows at observation {bad} of "
                f"'{plain(self.name)}' ({float(self.values[bad])!r} to the power {lam:g}). "
                "Use a smaller lambda or the log transform, or rescale the series first."
            )
        return out

    def future_index(self, steps: int) -> pd.Index:
        """Index labels of the ``steps`` periods after the last observation."""
        if isinstance(self.index, pd.DatetimeIndex | pd.PeriodIndex) and self.frequency:
            start = self.index[-1]
            rng = (
                pd.period_range(start=start, periods=steps + 1, freq=self.frequency)
                if isinstance(self.index, pd.PeriodIndex)
                else pd.date_range(start=start, periods=steps + 1, freq=self.frequency)
            )
            return rng[1:]
        return pd.RangeIndex(len(self), len(self) + steps)

    def future_labels(self, steps: int) -> list[str]:
        """Display labels of the ``steps`` forecast periods (:meth:`future_index`), or the
        step numbers 1..steps when the index cannot be extended (labels are a courtesy)."""
        try:
            return self.display_labels(self.future_index(steps))
        except (ValueError, TypeError, AttributeError, OverflowError):
            return [str(h) for h in range(1, steps + 1)]

    def labels(self) -> list[str]:
        """Index labels as strings (positions when there is no time index)."""
        if self.index is None:
            return [str(i) for i in range(len(self))]
        return [str(label) for label in self.index]

    def display_labels(self, index: pd.Index | None = None) -> list[str]:
        """Labels as a reader expects them: periods, not midnight timestamps.

        Monthly dates read ``2009-01``, quarterly ``1998Q1``, yearly ``2009``, daily and
        weekly ``2009-01-31``; timestamps with a time of day keep it. ``index`` defaults to
        the series' own (pass :meth:`future_index` for forecast dates).
        """
        index = self.index if index is None else index
        if index is None:
            return [str(i) for i in range(len(self))]
        return display_labels(index, self.frequency)


def display_labels(index: pd.Index, frequency: str | None = None) -> list[str]:
    """Time labels as periods where the frequency is monthly or coarser (see
    :meth:`PreparedSeries.display_labels`); other labels as text."""
    if isinstance(index, pd.PeriodIndex):
        return [str(label) for label in index]
    if not isinstance(index, pd.DatetimeIndex):
        return [str(label) for label in index]
    freq = frequency or index.freqstr
    code = _FREQ_RE.match(freq.strip()) if freq else None
    base = code["code"] if code else ""
    if base in _PERIOD_BY_CODE and _PERIOD_BY_CODE[base] in (12, 4, 1):
        period_code = {12: "M", 4: "Q", 1: "Y"}[_PERIOD_BY_CODE[base]]
        try:
            return [str(p) for p in index.to_period(period_code)]
        except (ValueError, TypeError):
            pass
    if len(index) and bool((index == index.normalize()).all()):
        return [label.strftime("%Y-%m-%d") for label in index]
    return [str(label) for label in index]


def _as_values(y: Any, name: str) -> tuple[np.ndarray, pd.Index | None, str, tuple[str, ...]]:
    index: pd.Index | None = None
    if isinstance(y, pd.DataFrame):
        if y.shape[1] != 1:
            raise SeriesError(
                f"Got a DataFrame with {y.shape[1]} columns; pass one column, e.g. df['sales']."
            )
        y = y.iloc[:, 0]
    if isinstance(y, pd.Series):
        if y.name is not None:
            name = str(y.name)
        if isinstance(y.index, pd.DatetimeIndex | pd.PeriodIndex):
            index = y.index.copy()
        raw = y.to_numpy(copy=True)
    elif isinstance(y, np.ndarray):
        raw = np.array(y, copy=True)
    elif isinstance(y, Sequence) and not isinstance(y, str | bytes):
        raw = np.array(list(y), dtype=object)
    else:
        raise SeriesError(
            f"Cannot audit an object of type {type(y).__name__}; pass a pandas Series, a "
            "one-dimensional numpy array or a list of numbers."
        )
    if raw.ndim != 1:
        raise SeriesError(
            f"The series must be one-dimensional, got shape {raw.shape}; pass one column."
        )
    if raw.dtype == bool or (
        raw.dtype == object and any(isinstance(v, bool | np.bool_) for v in raw)
    ):
        raise SeriesError("The series holds True/False values; pass numbers.")
    if raw.dtype.kind in "mM":
        raise SeriesError(
            f"'{plain(name)}' holds {'durations' if raw.dtype.kind == 'm' else 'dates'} "
            f"({raw.dtype}), not numbers; pass the quantity to audit (the dates belong in "
            "the index)."
        )
    if raw.dtype.kind in "iu":
        values = raw.astype(float)
        inexact = np.flatnonzero(np.abs(raw.astype(object)) > _EXACT_INTEGER)
        return values, index, name, _precision_notes(inexact, raw, name)
    if raw.dtype.kind == "f":
        values = raw.astype(float)
    else:
        values = np.empty(raw.size)
        for i, item in enumerate(raw):
            # numpy counts timedelta64 as an integer type; a duration is not an observation.
            if isinstance(item, int | float | np.integer | np.floating) and not isinstance(
                item, bool | np.timedelta64
            ):
                try:
                    values[i] = float(item)
                except OverflowError:
                    raise SeriesError(
                        f"Observation {i} of '{plain(name)}' is too large for a float64 number."
                    ) from None
            elif item is None or item is pd.NA or item is pd.NaT:
                values[i] = math.nan
            else:
                raise _not_a_number(raw, i, name)
        big = [
            i
            for i, item in enumerate(raw)
            if isinstance(item, int | np.integer)
            and not isinstance(item, bool)
            and abs(int(item)) > _EXACT_INTEGER
        ]
        return values, index, name, _precision_notes(np.asarray(big, dtype=int), raw, name)
    return values, index, name, ()


#: Largest integer every one below which float64 holds exactly (2**53).
_EXACT_INTEGER = 2**53


def _precision_notes(positions: np.ndarray, raw: np.ndarray, name: str) -> tuple[str, ...]:
    """A note when integers beyond 2**53 were rounded to the nearest float64 value."""
    inexact = [int(p) for p in positions if float(raw[p]) != int(raw[p])]
    if not inexact:
        return ()
    first = inexact[0]
    return (
        f"{len(inexact)} observation(s) of '{plain(name)}' are integers beyond 2**53 that a "
        f"float64 number cannot hold exactly (first: observation {first}, {int(raw[first])}, "
        f"held as {float(raw[first])!r}); every estimator computes in float64, so the audit "
        "used the rounded values. Subtract a baseline or change units first to keep every "
        "digit.",
    )


def _parses_as_number(item: Any) -> bool:
    try:
        float(item)
    except (TypeError, ValueError):
        return False
    return True


def _not_a_number(raw: np.ndarray, first: int, name: str) -> SeriesError:
    """The error for an entry that is not a number, naming the entry that will not convert.

    Numbers stored as text ('12') are refused too (estimators differ in whether they cast
    them), but the message then points at the first entry that is not a number at all.
    """
    item = raw[first]
    if isinstance(item, str) and _parses_as_number(item):
        for j in range(first, raw.size):
            other = raw[j]
            if isinstance(other, str) and not _parses_as_number(other):
                return SeriesError(
                    f"Observation {j} of '{plain(name)}' is {echo(other)} (str), not a "
                    "number, and the column holds numbers as text (observation "
                    f"{first} is {echo(item)}). Convert it to numbers first (e.g. "
                    "pandas.to_numeric) and decide what to do with "
                    "entries that do not convert."
                )
        return SeriesError(
            f"'{plain(name)}' holds numbers as text (observation {first} is {echo(item)}); "
            "convert the column to numbers first (e.g. pandas.to_numeric)."
        )
    return SeriesError(
        f"Observation {first} of '{plain(name)}' is {echo(item)} ({type(item).__name__}), not a "
        "number. Convert the column to numbers first (e.g. pandas.to_numeric) and "
        "decide what to do with entries that do not convert."
    )


def _check_finite(values: np.ndarray, name: str) -> None:
    bad = ~np.isfinite(values)
    if bad.any():
        positions = np.flatnonzero(bad)
        shown = ", ".join(str(p) for p in positions[:5]) + (" ..." if positions.size > 5 else "")
        raise SeriesError(
            f"'{name}' has {positions.size} missing or infinite value(s) at position(s) {shown}. "
            "The estimators treat gaps differently (some skip them silently, some change "
            "method), so the audit needs a complete series: fill or trim the gaps first."
        )


def _check_index(index: pd.Index, name: str) -> str | None:
    if index.hasnans:
        positions = np.flatnonzero(index.isna())
        raise SeriesError(
            f"'{name}' has missing timestamps (NaT) at position(s) "
            f"{', '.join(str(p) for p in positions[:5])}; every observation needs its date."
        )
    if index.has_duplicates:
        dup = index[index.duplicated()][0]
        raise SeriesError(f"'{name}' has duplicate timestamps (first: {dup}); keep one per period.")
    if not index.is_monotonic_increasing:
        raise SeriesError(
            f"The timestamps of '{name}' are not in increasing order; sort the series "
            "(series.sort_index()) before the audit."
        )
    if isinstance(index, pd.PeriodIndex):
        freq = index.freqstr
        expected = pd.period_range(index[0], periods=len(index), freq=index.freq)
        if not index.equals(expected):
            raise SeriesError(
                f"The periods of '{name}' are not consecutive (frequency {freq}); fill the "
                "missing periods first."
            )
        return freq
    freq = index.freqstr if index.freq is not None else None
    if freq is None and len(index) < 3:
        raise SeriesError(
            f"'{name}' has {len(index)} timestamp(s), too few to tell its frequency (pandas "
            "needs three); give its index a frequency (e.g. series.asfreq('MS')) or a "
            "PeriodIndex, or pass more observations."
        )
    if freq is None:
        freq = pd.infer_freq(index)
    if freq is None:
        raise SeriesError(
            f"The dates of '{name}' are irregular: no single frequency fits them. Resample to "
            "a regular frequency (e.g. series.asfreq('MS')) and fill the gaps first."
        )
    return freq


def _fingerprint(values: np.ndarray, index: pd.Index | None) -> str:
    digest = hashlib.sha256()
    digest.update(np.ascontiguousarray(values, dtype="<f8").tobytes())
    if index is not None:
        digest.update("\n".join(str(label) for label in index).encode("utf-8"))
    return digest.hexdigest()


def prepare_series(
    y: Any,
    *,
    period: int | None = None,
    name: str | None = None,
) -> PreparedSeries:
    """Validate and normalise a series for the audit.

    Parameters
    ----------
    y : pandas.Series, numpy.ndarray or sequence of numbers
        The observations in time order. A Series may carry a DatetimeIndex or PeriodIndex,
        whose frequency then gives the seasonal period; any other index is read as positions.
    period : int, optional
        Explicit seasonal period; overrides the one implied by the index frequency.
    name : str, optional
        Display name; defaults to the Series name or ``"y"``.

    Returns
    -------
    PreparedSeries

    Raises
    ------
    SeriesError
        On non-numeric, missing or infinite values, duplicate, unsorted or irregular
        timestamps, or an invalid period.
    """
    if name is not None and not isinstance(name, str):
        raise SeriesError(f"name must be a string, got {type(name).__name__}.")
    values, index, label, notes = _as_values(y, name or "y")
    if name is not None:
        label = name
    shown = plain(label)
    if values.size == 0:
        raise SeriesError("The series is empty; pass the observations to audit.")
    limit_error(f"The length of '{shown}'", values.size, "observations", SeriesError)
    _check_finite(values, shown)
    frequency = _check_index(index, shown) if index is not None else None
    if period is not None:
        period = whole_number(
            period, "period", minimum=1, error=SeriesError, example="12 for monthly data"
        )
        limit_error("The seasonal period", period, "period", SeriesError)
    else:
        period = period_from_frequency(frequency)
    values.setflags(write=False)
    return PreparedSeries(
        values=values,
        index=index,
        name=label,
        period=period,
        frequency=frequency,
        fingerprint=_fingerprint(values, index),
        notes=notes,
    )


def check_length(series: PreparedSeries, spec: ModelSpec) -> None:
    """Raise :class:`SeriesError` when ``series`` is too short for ``spec``."""
    need = spec.minimum_length()
    if len(series) < need:
        raise SeriesError(
            f"'{plain(series.name)}' has {len(series)} observations, but {spec} needs at "
            f"least {need}: "
            f"{spec.lost_to_differencing} are used up by differencing and "
            f"{spec.n_coefficients + 1} parameters (with sigma2) must be estimated from the "
            "rest with some to spare. Use a longer series or a smaller model."
        )
    if spec.period and spec.P + spec.Q > 0 and len(series) < 2 * spec.period:
        raise SeriesError(
            f"'{plain(series.name)}' has {len(series)} observations, fewer than two "
            "seasonal cycles "
            f"(2 x {spec.period}); seasonal terms cannot be estimated. Use at least "
            f"{2 * spec.period} observations or drop the seasonal terms."
        )


# ====================================================================== regressors
@dataclass(frozen=True, eq=False)
class PreparedRegressors:
    """Validated regressor values, aligned with the series, in the spec's column order.

    Attributes
    ----------
    values : numpy.ndarray
        Read-only float64 copy, shape ``(n, k)``: one row per observation, one column per
        regressor of the spec (True/False flags as 1/0).
    columns : tuple of str
        The column names, in the spec's order.
    fingerprint : str
        SHA-256 hex digest of the column names and values, so that the audit record's data
        fingerprint covers the regressors.
    """

    values: np.ndarray
    columns: tuple[str, ...]
    fingerprint: str

    def __len__(self) -> int:
        return int(self.values.shape[0])

    def head(self, n: int) -> np.ndarray:
        """The first ``n`` rows (a training window of a holdout origin), as a new array."""
        return np.array(self.values[:n], dtype=float, copy=True)

    def rows(self, start: int, stop: int) -> np.ndarray:
        """Rows ``start`` to ``stop - 1`` (the future values of a holdout origin)."""
        return np.array(self.values[start:stop], dtype=float, copy=True)


def _regressor_frame(x: Any, what: str) -> pd.DataFrame:
    if isinstance(x, pd.Series):
        x = x.to_frame()
    if not isinstance(x, pd.DataFrame):
        raise RegressorError(
            f"The {what} must be a pandas DataFrame with one column per regressor, indexed like "
            f"the series; got {type(x).__name__}."
        )
    duplicated = sorted({str(c) for c in x.columns[x.columns.duplicated()]})
    if duplicated:
        raise RegressorError(
            f"The {what} has more than one column named {duplicated}; keep one of each."
        )
    return x


def _regressor_values(frame: pd.DataFrame, columns: Sequence[str], what: str) -> np.ndarray:
    """The named columns as a float (n, k) array: a copy, never a view of the caller's data."""
    present = [str(c) for c in frame.columns]
    missing = [c for c in columns if c not in present]
    if missing:
        raise RegressorError(
            f"The {what} has no column {', '.join(map(repr, missing))}, which the model names; "
            f"its columns are {present}. Add the column or remove it from the model."
        )
    out = np.empty((len(frame), len(columns)))
    for j, column in enumerate(columns):
        col = frame[next(c for c in frame.columns if str(c) == column)]
        kind = col.dtype.kind
        if kind == "b":
            out[:, j] = col.to_numpy(dtype=float, copy=True)
        elif kind in "iuf":
            out[:, j] = col.to_numpy(dtype=float, na_value=np.nan, copy=True)
        else:
            try:
                out[:, j] = pd.to_numeric(col, errors="raise").to_numpy(dtype=float)
                numeric_text = True
            except (TypeError, ValueError):
                numeric_text = False
            raise RegressorError(
                f"Regressor {column!r} in the {what} holds {col.dtype} values, not numbers"
                + (" (numbers stored as text)" if numeric_text else "")
                + "; convert the column to numbers first (e.g. pandas.to_numeric)."
            )
        bad = ~np.isfinite(out[:, j])
        if bad.any():
            positions = np.flatnonzero(bad)
            labels = ", ".join(str(frame.index[p]) for p in positions[:5])
            raise RegressorError(
                f"Regressor {column!r} in the {what} has {positions.size} missing or infinite "
                f"value(s), at {labels}{', ...' if positions.size > 5 else ''}; the estimators "
                "cannot fit or forecast with gaps in a regressor: fill them first."
            )
    return out


def _first_difference_in_index(a: pd.Index, b: pd.Index) -> str:
    for i, (left, right) in enumerate(zip(a, b, strict=False)):
        if left != right:
            return f"position {i}: {left} in the series, {right} in the regressors"
    return f"lengths {len(a)} and {len(b)}"


def _regressor_fingerprint(values: np.ndarray, columns: Sequence[str]) -> str:
    digest = hashlib.sha256()
    digest.update("\n".join(columns).encode("utf-8"))
    digest.update(np.ascontiguousarray(values, dtype="<f8").tobytes())
    return digest.hexdigest()


def prepare_regressors(
    x: Any, series: PreparedSeries, spec: ModelSpec
) -> PreparedRegressors | None:
    """Validate the regressors given at fit time against the series and the spec.

    Parameters
    ----------
    x : pandas.DataFrame or None
        One column per regressor named in ``spec.regressors`` (other columns are ignored),
        one row per observation. With a series indexed by dates or periods the index must be
        the series' index, label for label; otherwise the rows are matched by position and
        there must be one per observation.
    series : PreparedSeries
    spec : ModelSpec

    Returns
    -------
    PreparedRegressors or None
        None when the spec names no regressors and none are given.

    Raises
    ------
    RegressorError
        When the spec names regressors and none are given (or the reverse); a named column
        is absent; the rows do not line up with the series; a value is missing, infinite or
        not a number; a column is constant; or the columns, differenced as the series is
        (with the constant of ``+mean``), are linearly dependent.
    """
    columns = spec.regressors
    if x is None:
        if columns:
            raise RegressorError(
                f"The model {spec} names the regressors {', '.join(columns)}, but no regressor "
                "values were given; pass them as a DataFrame (regressors=...) aligned on the "
                "series' index."
            )
        return None
    if not columns:
        raise RegressorError(
            f"Regressor values were given, but the model {spec} names no regressor; add "
            "+x(column,...) to the model (ModelSpec(regressors=(...))) or leave them out."
        )
    frame = _regressor_frame(x, "regressor table")
    if series.index is not None:
        if not isinstance(frame.index, type(series.index)) or not frame.index.equals(series.index):
            raise RegressorError(
                f"The regressors' index does not match the index of '{series.name}' (first "
                f"difference at {_first_difference_in_index(series.index, frame.index)}). Give "
                "one row per observation, with the same dates (e.g. regressors.reindex("
                "series.index), then fill any gap)."
            )
    elif len(frame) != len(series):
        raise RegressorError(
            f"The regressors have {len(frame)} rows but '{series.name}' has {len(series)} "
            "observations; give one row per observation, in the same order."
        )
    values = _regressor_values(frame, columns, "regressor table")
    for j, column in enumerate(columns):
        if float(np.ptp(values[:, j])) == 0.0:
            raise RegressorError(
                f"Regressor {column!r} is constant ({float(values[0, j])!r} throughout); a "
                "constant is not a regressor. Use +mean for a constant term, or drop the column."
            )
    _check_rank(values, columns, spec)
    values.setflags(write=False)
    return PreparedRegressors(values, tuple(columns), _regressor_fingerprint(values, columns))


def _check_rank(values: np.ndarray, columns: Sequence[str], spec: ModelSpec) -> None:
    """Refuse regressors that, differenced like the series, are linearly dependent.

    The regression is identified by the differenced regressors (with a column of ones for
    ``mu``): a linear trend with d = 1 becomes a constant, indistinguishable from ``mu``.
    Columns are added one at a time; the first that does not raise the rank (numpy's
    ``matrix_rank`` default tolerance, singular values below ``max(n, k) eps s_max``) is
    named with the ones it depends on.
    """
    design = [difference(values[:, j], spec) for j in range(values.shape[1])]
    names = list(columns)
    if spec.mean:
        design.insert(0, np.ones_like(design[0]))
        names.insert(0, "the constant (+mean)")
    matrix = np.column_stack(design)
    scale = np.max(np.abs(matrix), axis=0)
    scale[scale == 0.0] = 1.0
    matrix = matrix / scale
    for k in range(1, matrix.shape[1] + 1):
        if np.linalg.matrix_rank(matrix[:, :k]) < k:
            earlier = ", ".join(repr(n) if not n.startswith("the ") else n for n in names[: k - 1])
            after = " after differencing" if spec.lost_to_differencing else ""
            raise RegressorError(
                f"Regressor {names[k - 1]!r} is a linear combination of "
                f"{earlier or 'nothing (it is zero)'}{after}, so their coefficients cannot be "
                "told apart. Drop one of them"
                + (
                    " (a trend regressor with differencing duplicates +mean, which is already "
                    "the drift)"
                    if spec.lost_to_differencing and spec.mean
                    else ""
                )
                + "."
            )


def prepare_future_regressors(
    x: Any, series: PreparedSeries, regressors: PreparedRegressors | None, steps: int
) -> np.ndarray | None:
    """The regressor values for the ``steps`` periods after the series, validated.

    Parameters
    ----------
    x : pandas.DataFrame or None
        The regressor columns for the future periods. With a series indexed by dates or
        periods, its first ``steps`` labels must be the ``steps`` periods after the last
        observation; otherwise its first ``steps`` rows are used. Further rows are ignored.
    series : PreparedSeries
    regressors : PreparedRegressors or None
        The fit-time regressors (their columns are the ones needed); None without regressors.
    steps : int
        Forecast steps.

    Returns
    -------
    numpy.ndarray or None
        A new ``(steps, k)`` float array, or None without regressors.

    Raises
    ------
    RegressorError
        When future values are needed and missing, too few, misaligned, missing a column,
        or not finite numbers.
    """
    if regressors is None:
        return None
    columns = regressors.columns
    if x is None:
        raise RegressorError(
            f"Forecasting {steps} steps with regressors needs their future values: pass a "
            f"DataFrame with the columns {', '.join(columns)} for the {steps} periods after "
            "the series (future_regressors=..., or --future on the command line)."
        )
    frame = _regressor_frame(x, "future regressor table")
    if len(frame) < steps:
        raise RegressorError(
            f"The future regressor table has {len(frame)} row(s), but forecasting {steps} "
            f"steps needs {steps}; give the regressors for every forecast period (or forecast "
            "fewer steps)."
        )
    frame = frame.iloc[:steps]
    if series.index is not None:
        expected = series.future_index(steps)
        if not frame.index.equals(expected):
            raise RegressorError(
                "The future regressors' index does not continue the series: expected the "
                f"periods {expected[0]} to {expected[-1]} (first difference at "
                f"{_first_difference_in_index(expected, frame.index)})."
            )
    return _regressor_values(frame, columns, "future regressor table")


def with_regressors(
    series: PreparedSeries, regressors: PreparedRegressors | None
) -> PreparedSeries:
    """``series`` with a fingerprint that covers the regressors too (itself without any).

    The combined fingerprint is the SHA-256 of the two digests, so two records made from
    the same series with different regressors have different data fingerprints.
    """
    if regressors is None:
        return series
    combined = hashlib.sha256(f"{series.fingerprint}\n{regressors.fingerprint}".encode())
    return dataclasses.replace(series, fingerprint=combined.hexdigest())
