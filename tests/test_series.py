"""Input validation of the series (prepare_series, check_length, period_from_frequency).

The conventional periods (12 for monthly, 4 quarterly, 52 weekly, 7 daily, ...) are common
practice, no source.
"""

from __future__ import annotations

import re
import warnings

import numpy as np
import pandas as pd
import pytest

from forecastaudit import ModelSpec, SeriesError
from forecastaudit.series import check_length, period_from_frequency, prepare_series

# ---------------------------------------------------------------------- period from the index


@pytest.mark.parametrize(
    ("index", "period", "frequency"),
    [
        (pd.date_range("2000-01-01", periods=30, freq="MS"), 12, "MS"),
        (pd.date_range("2000-01-31", periods=30, freq="ME"), 12, "ME"),
        (pd.period_range("2000-01", periods=30, freq="M"), 12, "M"),
        (pd.period_range("2000Q1", periods=30, freq="Q"), 4, "Q-DEC"),
        (pd.date_range("2000-01-02", periods=30, freq="W"), 52, "W-SUN"),
        (pd.date_range("2000-01-01", periods=30, freq="D"), 7, "D"),
        (pd.date_range("2000-01-03", periods=30, freq="B"), 5, "B"),
        (pd.date_range("2000-01-01", periods=30, freq="h"), 24, "h"),
        (pd.date_range("2000-12-31", periods=30, freq="YE"), 1, "YE-DEC"),
    ],
)
def test_period_from_the_index(index, period, frequency):
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no pandas deprecation warning may reach the caller
        prepared = prepare_series(pd.Series(np.arange(30.0) + 1, index=index))
    assert prepared.period == period
    assert prepared.frequency == frequency
    assert prepared.index.equals(index)


def test_frequency_is_inferred_when_the_index_has_none():
    index = pd.DatetimeIndex(pd.date_range("2001-01-01", periods=24, freq="MS").tolist())
    assert index.freq is None
    prepared = prepare_series(pd.Series(np.ones(24), index=index))
    assert (prepared.frequency, prepared.period) == ("MS", 12)


def test_explicit_period_overrides_the_index():
    index = pd.date_range("2000-01-01", periods=60, freq="D")
    assert prepare_series(pd.Series(np.ones(60), index=index), period=365).period == 365
    assert prepare_series(np.ones(10), period=4).period == 4


@pytest.mark.parametrize("bad", [0, -1, 2.5, "12", True])
def test_invalid_explicit_period(bad):
    with pytest.raises(SeriesError, match="period must be a positive whole number"):
        prepare_series(np.ones(10), period=bad)


@pytest.mark.parametrize(
    ("freq", "period"),
    [
        ("M", 12), ("ME", 12), ("MS", 12), ("BME", 12), ("Q-DEC", 4), ("QS-JAN", 4),
        ("BQE-MAR", 4), ("W-MON", 52), ("D", 7), ("B", 5), ("h", 24), ("H", 24),
        ("YE-DEC", 1), ("A-DEC", 1), ("BYE-DEC", 1), ("1ME", 12),
        # No conventional period: multiples, sub-hourly and semi-monthly frequencies.
        ("2ME", None), ("min", None), ("ms", None), ("s", None), ("SME", None),
        ("not a frequency", None), (None, None), ("", None),
    ],
)  # fmt: skip
def test_period_from_frequency_table(freq, period):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert period_from_frequency(freq) == period


def test_period_from_frequency_takes_an_offset():
    assert period_from_frequency(pd.offsets.MonthBegin()) == 12


def test_conventional_periods_add_the_longer_cycles():
    from forecastaudit.series import conventional_periods

    assert conventional_periods("h") == (24, 168)
    assert conventional_periods("D") == (7, 365)
    assert conventional_periods("MS") == (12,)
    assert conventional_periods("min") == ()


def test_weekly_cycle_of_hourly_data_needs_no_confirmation():
    """A period-168 model on an hourly index is fitted as written; a period of 6 on monthly
    data is still refused, naming the periods the index has."""
    import forecastaudit as fa
    from forecastaudit.errors import SpecError
    from forecastaudit.pipeline import resolve_series_and_spec

    hours = pd.date_range("2026-03-02", periods=24 * 7 * 3, freq="h")
    hourly = pd.Series(np.sin(np.arange(hours.size) * 2 * np.pi / 168), index=hours)
    series, spec = resolve_series_and_spec(hourly, "ARIMA(1,0,0)x(0,1,1)168", None, None)
    assert spec.period == 168 and series.period == 168
    months = pd.period_range("2015-01", periods=60, freq="M")
    monthly = pd.Series(np.arange(60.0), index=months)
    with pytest.raises(SpecError, match=r"whose period is 12\. Write the model with period 12"):
        fa.audit(monthly, "ARIMA(0,1,1)x(0,1,1)6", estimators=["statsforecast"])
    with pytest.raises(SpecError, match="whose period is 24 or 168"):
        resolve_series_and_spec(hourly, "ARIMA(0,1,1)x(0,1,1)12", None, None)


# ---------------------------------------------------------------------- plain inputs


def test_numpy_and_list_inputs():
    from_array = prepare_series(np.array([1, 2, 3, 4], dtype=np.int32))
    from_list = prepare_series([1, 2.5, np.float32(3), np.int64(4)])
    assert from_array.values.dtype == np.float64
    np.testing.assert_array_equal(from_array.values, [1.0, 2.0, 3.0, 4.0])
    np.testing.assert_array_equal(from_list.values, [1.0, 2.5, 3.0, 4.0])
    assert from_array.index is None and from_array.period is None
    assert from_array.frequency is None and from_array.name == "y"
    assert from_list.labels() == ["0", "1", "2", "3"]


def test_names():
    s = pd.Series([1.0, 2.0], name="sales")
    assert prepare_series(s).name == "sales"
    assert prepare_series(s, name="units").name == "units"
    assert prepare_series([1.0, 2.0], name="units").name == "units"


def test_a_one_column_frame_is_a_series():
    frame = pd.DataFrame({"units": [1.0, 2.0, 3.0]})
    prepared = prepare_series(frame)
    assert prepared.name == "units"
    np.testing.assert_array_equal(prepared.values, [1.0, 2.0, 3.0])


def test_a_non_time_index_is_read_as_positions():
    prepared = prepare_series(pd.Series([1.0, 2.0, 3.0], index=["a", "b", "c"]))
    assert prepared.index is None and prepared.labels() == ["0", "1", "2"]


# ---------------------------------------------------------------------- bad values


def test_nan_and_inf_name_their_positions():
    y = np.arange(20.0)
    y[[3, 11]] = np.nan
    y[15] = np.inf
    with pytest.raises(
        SeriesError,
        match=r"3 missing or infinite value\(s\) at position\(s\) "
        r"3, 11, 15\.",
    ):
        prepare_series(y)
    many = np.full(10, np.nan)
    with pytest.raises(SeriesError, match=r"position\(s\) 0, 1, 2, 3, 4 \.\.\."):
        prepare_series(many)


def test_missing_entries_of_every_kind():
    for gap in (None, pd.NA, np.nan):
        with pytest.raises(SeriesError, match=r"at position\(s\) 1\."):
            prepare_series([1.0, gap, 3.0])
    with pytest.raises(SeriesError, match=r"at position\(s\) 2\."):
        prepare_series(pd.Series([1, 2, None, 4], dtype="Int64"))


def test_non_numeric_strings():
    with pytest.raises(SeriesError, match=r"Observation 2 of 'y' is 'n/a' \(str\), not a number"):
        prepare_series([1.0, 2.0, "n/a", 4.0])
    with pytest.raises(
        SeriesError,
        match=r"'sales' holds numbers as text \(observation 0 is "
        r"'12'\); convert the column to numbers first",
    ):
        prepare_series(pd.Series(["12", "13"], name="sales"))
    with pytest.raises(SeriesError, match="holds numbers as text"):
        prepare_series(np.array(["1.0", "2.0"]))
    # Text numbers with one entry that is not a number: the message names that entry.
    with pytest.raises(
        SeriesError,
        match=r"Observation 2 of 'units' is 'x' \(str\), not a "
        r"number, and the column holds numbers as text \(observation 0 is '1'\)",
    ):
        prepare_series(pd.Series(["1", "2", "x", "4"], name="units"))


def test_dates_and_durations_are_not_observations():
    with pytest.raises(SeriesError, match=r"holds durations \(timedelta64\[ns\]\), not numbers"):
        prepare_series(pd.Series(pd.to_timedelta([1, 2, 3], unit="D")))
    with pytest.raises(SeriesError, match=r"holds dates \(datetime64\[ns\]\), not numbers"):
        prepare_series(pd.Series(pd.date_range("2000-01-01", periods=3)))
    # numpy counts timedelta64 as an integer type; it must still be refused.
    with pytest.raises(SeriesError, match=r"is np\.timedelta64.*not a number"):
        prepare_series(np.array([np.timedelta64(1, "D")], dtype=object))


def test_a_number_too_large_for_float64():
    with pytest.raises(SeriesError, match="Observation 0 of 'y' is too large for a float64"):
        prepare_series([10**400, 1])


def test_booleans():
    for y in (
        [True, False, True],
        np.array([True, False]),
        pd.Series([1.0, True], dtype=object),
        np.array([np.True_, 1.0], dtype=object),
    ):
        with pytest.raises(SeriesError, match="holds True/False values; pass numbers"):
            prepare_series(y)


def test_two_dimensional_input():
    with pytest.raises(SeriesError, match=r"one-dimensional, got shape \(3, 2\)"):
        prepare_series(np.ones((3, 2)))
    with pytest.raises(SeriesError, match=r"one-dimensional, got shape \(2, 2\)"):
        prepare_series([[1.0, 2.0], [3.0, 4.0]])
    with pytest.raises(SeriesError, match="DataFrame with 2 columns; pass one column"):
        prepare_series(pd.DataFrame({"a": [1.0], "b": [2.0]}))
    with pytest.raises(SeriesError, match=r"one-dimensional, got shape \(\)"):
        prepare_series(np.array(3.0))


def test_objects_that_are_not_series():
    for y in (3.0, "1,2,3", {"a": 1.0}):
        with pytest.raises(SeriesError, match="Cannot audit an object of type"):
            prepare_series(y)


def test_empty():
    for y in ([], np.array([]), pd.Series([], dtype=float)):
        with pytest.raises(SeriesError, match="The series is empty"):
            prepare_series(y)


# ---------------------------------------------------------------------- bad index


def test_duplicate_timestamps():
    index = pd.DatetimeIndex(["2000-01-01", "2000-02-01", "2000-02-01", "2000-03-01"])
    with pytest.raises(SeriesError, match="duplicate timestamps \\(first: 2000-02-01"):
        prepare_series(pd.Series(np.ones(4), index=index))


def test_missing_timestamps():
    index = pd.DatetimeIndex(["2000-01-01", None, "2000-03-01", "2000-04-01"])
    with pytest.raises(SeriesError, match=r"missing timestamps \(NaT\) at position\(s\) 1;"):
        prepare_series(pd.Series(np.ones(4), index=index))
    periods = pd.PeriodIndex(["2000-01", None, "2000-03"], freq="M")
    with pytest.raises(SeriesError, match=r"missing timestamps \(NaT\)"):
        prepare_series(pd.Series(np.ones(3), index=periods))


def test_unsorted_timestamps():
    index = pd.date_range("2000-01-01", periods=5, freq="MS")[[0, 2, 1, 3, 4]]
    with pytest.raises(SeriesError, match=r"not in increasing order; sort the series"):
        prepare_series(pd.Series(np.ones(5), index=index))


def test_irregular_timestamps():
    index = pd.DatetimeIndex(["2000-01-01", "2000-01-02", "2000-01-05", "2000-01-06"])
    with pytest.raises(SeriesError, match="irregular: no single frequency fits them"):
        prepare_series(pd.Series(np.ones(4), index=index))


def test_gap_in_a_period_index():
    index = pd.period_range("2000-01", periods=6, freq="M").delete(3)
    with pytest.raises(SeriesError, match=r"not consecutive \(frequency M\); fill the missing"):
        prepare_series(pd.Series(np.ones(5), index=index))


# ---------------------------------------------------------------------- length


def test_too_short_for_the_spec_states_the_minimum():
    spec = ModelSpec((0, 1, 1), (0, 1, 1), 12)
    need = 1 + 12 + 2 + 3  # lost to differencing + coefficients + 3 (sigma2 and spare)
    assert spec.minimum_length() == need
    check_length(prepare_series(np.ones(30)), spec)
    expected = (
        f"has 17 observations, but {spec} needs at least {need}: 13 are used up by "
        "differencing and 3 parameters"
    )
    with pytest.raises(SeriesError, match=re.escape(expected)):
        check_length(prepare_series(np.ones(need - 1)), spec)


def test_seasonal_terms_need_two_cycles():
    spec = ModelSpec((0, 0, 0), (1, 0, 0), 12)
    assert spec.minimum_length() == 4
    with pytest.raises(SeriesError, match=r"fewer than two seasonal cycles \(2 x 12\)"):
        check_length(prepare_series(np.ones(23)), spec)
    check_length(prepare_series(np.ones(24)), spec)


# ---------------------------------------------------------------------- transforms


def test_log_of_non_positive_data():
    prepared = prepare_series(np.array([1.0, 2.0, 0.0, -1.0]), name="units")
    with pytest.raises(
        SeriesError,
        match=r"log transform needs strictly positive values, but "
        r"observation 2 of 'units' is 0.0",
    ):
        prepared.transformed(ModelSpec(transform="log"))
    with pytest.raises(SeriesError, match=r"boxcox\(0.5\) transform needs strictly positive"):
        prepared.transformed(ModelSpec(transform=("boxcox", 0.5)))
    np.testing.assert_array_equal(prepared.transformed(ModelSpec()), prepared.values)


def test_transforms_closed_form():
    # Box-Cox: (y^lambda - 1) / lambda, and ln y at lambda 0 (Box & Cox 1964, JRSS B 26).
    y = np.array([0.5, 1.0, 4.0, 9.0])
    prepared = prepare_series(y)
    np.testing.assert_allclose(prepared.transformed(ModelSpec(transform="log")), np.log(y))
    np.testing.assert_allclose(
        prepared.transformed(ModelSpec(transform=("boxcox", 0.5))), 2.0 * (np.sqrt(y) - 1.0)
    )
    out = prepared.transformed(ModelSpec())
    out[0] = 99.0  # a new array, not a view of the read-only values
    assert prepared.values[0] == 0.5


# ---------------------------------------------------------------------- the caller's data


def test_the_callers_array_is_never_modified():
    y = np.array([3.0, 1.0, 2.0, 5.0])
    before = y.copy()
    prepared = prepare_series(y)
    assert not np.shares_memory(prepared.values, y)
    y[0] = -100.0  # a later change by the caller does not reach the prepared series
    assert prepared.values[0] == 3.0
    np.testing.assert_array_equal(y[1:], before[1:])
    assert y.flags.writeable


def test_a_series_view_is_never_modified(log_airline_series):
    original = log_airline_series.copy()
    frame = pd.DataFrame(
        {"v": log_airline_series.to_numpy(copy=True)}, index=log_airline_series.index
    )
    view = frame["v"].iloc[12:]
    base_before = frame.copy()
    prepared = prepare_series(view)
    prepared.transformed(ModelSpec(transform=("boxcox", 0.5)))
    pd.testing.assert_frame_equal(frame, base_before)
    assert view.to_numpy().flags.writeable
    assert not np.shares_memory(prepared.values, frame["v"].to_numpy())
    prepare_series(log_airline_series)
    pd.testing.assert_series_equal(log_airline_series, original)


def test_values_are_read_only():
    prepared = prepare_series([1.0, 2.0, 3.0])
    assert not prepared.values.flags.writeable
    with pytest.raises(ValueError, match="read-only"):
        prepared.values[0] = 5.0


# ---------------------------------------------------------------------- fingerprint


def test_fingerprint(log_airline_series):
    a = prepare_series(log_airline_series)
    b = prepare_series(log_airline_series.copy())
    assert a.fingerprint == b.fingerprint and len(a.fingerprint) == 64
    changed = log_airline_series.copy()
    changed.iloc[70] += 1e-12
    assert prepare_series(changed).fingerprint != a.fingerprint
    # The same values as a plain array carry no index labels, so the fingerprint differs.
    assert prepare_series(log_airline_series.to_numpy()).fingerprint != a.fingerprint
    assert prepare_series([1, 2, 3]).fingerprint == prepare_series([1.0, 2.0, 3.0]).fingerprint


def test_future_index(log_airline_series):
    prepared = prepare_series(log_airline_series)
    future = prepared.future_index(3)
    assert list(future.astype(str)) == ["1961-01", "1961-02", "1961-03"]
    assert list(prepare_series(np.ones(5)).future_index(2)) == [5, 6]
