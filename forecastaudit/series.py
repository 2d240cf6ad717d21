"""Input validation and normalisation of the series to audit.

Everything the estimators see passes through :func:`prepare_series` once. It never modifies
the caller's object: values are copied into a read-only float array.
"""

from __future__ import annotations

import hashlib
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.errors import SeriesError
from forecastaudit.spec import ModelSpec

__all__ = ["PreparedSeries", "period_from_frequency", "prepare_series"]

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
    """

    values: np.ndarray
    index: pd.Index | None
    name: str
    period: int | None
    frequency: str | None
    fingerprint: str

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
                f"observation {bad} of '{self.name}' is {float(self.values[bad])!r}. Remove the "
                "transform from the model, or shift the data deliberately before the audit."
            )
        if lam == 0.0:
            return np.log(self.values)
        return (np.power(self.values, lam) - 1.0) / lam

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

    def labels(self) -> list[str]:
        """Index labels as strings (positions when there is no time index)."""
        if self.index is None:
            return [str(i) for i in range(len(self))]
        return [str(label) for label in self.index]


def _as_values(y: Any, name: str) -> tuple[np.ndarray, pd.Index | None, str]:
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
            f"'{name}' holds {'durations' if raw.dtype.kind == 'm' else 'dates'} "
            f"({raw.dtype}), not numbers; pass the quantity to audit (the dates belong in "
            "the index)."
        )
    if raw.dtype.kind in "iuf":
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
                        f"Observation {i} of '{name}' is too large for a float64 number."
                    ) from None
            elif item is None or item is pd.NA or item is pd.NaT:
                values[i] = math.nan
            else:
                raise _not_a_number(raw, i, name)
    return values, index, name


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
                    f"Observation {j} of '{name}' is {other!r} (str), not a number, and the "
                    f"column holds numbers as text (observation {first} is {item!r}). Convert "
                    "it to numbers first (e.g. pandas.to_numeric) and decide what to do with "
                    "entries that do not convert."
                )
        return SeriesError(
            f"'{name}' holds numbers as text (observation {first} is {item!r}); convert the "
            "column to numbers first (e.g. pandas.to_numeric)."
        )
    return SeriesError(
        f"Observation {first} of '{name}' is {item!r} ({type(item).__name__}), not a "
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
    if freq is None and len(index) >= 3:
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
    values, index, label = _as_values(y, name or "y")
    if name is not None:
        label = name
    if values.size == 0:
        raise SeriesError("The series is empty; pass the observations to audit.")
    _check_finite(values, label)
    frequency = _check_index(index, label) if index is not None else None
    if period is not None:
        if isinstance(period, bool) or not isinstance(period, int | np.integer) or period < 1:
            raise SeriesError(f"period must be a positive whole number, got {period!r}.")
        period = int(period)
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
    )


def check_length(series: PreparedSeries, spec: ModelSpec) -> None:
    """Raise :class:`SeriesError` when ``series`` is too short for ``spec``."""
    need = spec.minimum_length()
    if len(series) < need:
        raise SeriesError(
            f"'{series.name}' has {len(series)} observations, but {spec} needs at least {need}: "
            f"{spec.lost_to_differencing} are used up by differencing and "
            f"{spec.n_coefficients + 1} parameters (with sigma2) must be estimated from the "
            "rest with some to spare. Use a longer series or a smaller model."
        )
    if spec.period and spec.P + spec.Q > 0 and len(series) < 2 * spec.period:
        raise SeriesError(
            f"'{series.name}' has {len(series)} observations, fewer than two seasonal cycles "
            f"(2 x {spec.period}); seasonal terms cannot be estimated. Use at least "
            f"{2 * spec.period} observations or drop the seasonal terms."
        )
