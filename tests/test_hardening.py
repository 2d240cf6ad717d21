"""Inputs that used to change the audit silently, crash it, or leak other libraries' noise.

Each test names the defect it guards against. Bad inputs that are simply refused are in
``tests/test_bad_inputs.py``; these are the cases where the right answer is an audit that
goes on, a value taken as meant, or a finding that says what happened.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import forecastaudit as fa
from forecastaudit import validation
from forecastaudit.errors import SpecError
from forecastaudit.reading import read_series
from forecastaudit.record.document import validate_record
from forecastaudit.series import prepare_series


def _walk(n: int, seed: int, *, freq: str = "M", start: str = "2012-01") -> pd.Series:
    rng = np.random.default_rng(seed)
    return pd.Series(
        200 + np.cumsum(rng.normal(size=n)), index=pd.period_range(start, periods=n, freq=freq)
    )


@pytest.fixture(scope="module")
def no_forecast_audit() -> fa.AuditResult:
    """Every chosen estimator is unsupported (statsforecast cannot estimate a mean with
    d + D = 2), so no implementation forecasts: the audit used to crash on an empty
    ``np.vstack``."""
    rng = np.random.default_rng(11)
    y = pd.Series(
        100 + np.cumsum(np.cumsum(rng.normal(size=60))),
        index=pd.period_range("2010-01", periods=60, freq="M"),
    )
    return fa.audit(y, "ARIMA(0,2,1) +mean", ["statsforecast"])


def test_audit_goes_on_when_no_estimator_forecasts(no_forecast_audit: fa.AuditResult) -> None:
    result = no_forecast_audit
    assert result.estimates["statsforecast"].status == "unsupported"
    assert result.spread is None
    kinds = {(f.kind, f.estimator) for f in result.findings}
    assert ("unsupported", "statsforecast") in kinds
    # The production estimator produced nothing, so the model it ships cannot be signed off.
    assert result.verdict == "fail"
    assert "reference" in result.forecasts


def test_audit_without_forecasts_still_writes_every_output(
    no_forecast_audit: fa.AuditResult,
) -> None:
    record = json.loads(no_forecast_audit.to_json())
    validate_record(record)
    assert "unsupported" in no_forecast_audit.to_html()
    assert "unsupported" in no_forecast_audit.to_markdown()
    assert len(repr(no_forecast_audit)) < 2_000


def test_numpy_integers_are_whole_numbers() -> None:
    """horizon=np.int64(12) was refused; numpy integers are whole numbers like any other."""
    assert validation.whole_number(np.int64(12), "horizon", minimum=1) == 12
    assert type(validation.whole_number(np.int32(3), "horizon", minimum=1)) is int
    assert fa.Tolerances(min_independent_engines=np.int64(3)).min_independent_engines == 3
    assert fa.Tolerances(loglike_atol=np.float32(0.5)).loglike_atol == 0.5


def test_levels_are_sorted_once_each() -> None:
    assert validation.check_levels([95, 80, 95.0, np.float64(80)]) == (80.0, 95.0)
    with pytest.raises(SpecError, match="both written 95%"):
        validation.check_levels((95, 95.0000001))


def test_the_recorded_period_is_the_period_fitted() -> None:
    """A model period confirmed by the period argument is fitted and recorded as given,
    even where the index implies another (here: period 6 on monthly data)."""
    y = _walk(60, 2)
    result = fa.audit(y, "ARIMA(0,1,1)x(0,1,1)6", ["statsforecast"], period=6)
    assert result.spec.period == 6
    assert result.series.period == 6
    assert json.loads(result.to_json())["provenance"]["data"]["period"] == 6


def test_period_argument_gives_a_plain_array_its_period() -> None:
    y = _walk(60, 3).to_numpy()
    result = fa.audit(y, "ARIMA(0,1,1)", ["statsforecast"], period=12)
    assert result.spec.period == 12 and result.series.period == 12


def test_integers_beyond_2_53_are_marked() -> None:
    """int64 values that float64 cannot hold exactly are rounded by every estimator; the
    audit says so in an input-precision finding."""
    base = 2**60
    rng = np.random.default_rng(5)
    y = np.asarray(base + np.cumsum(rng.integers(-(2**40), 2**40, size=48)), dtype=np.int64)
    assert any(float(v) != int(v) for v in y)  # some really lose digits
    series = prepare_series(y)
    assert series.notes and "2**53" in series.notes[0]
    result = fa.audit(y, "ARIMA(0,1,1)", ["statsforecast"])
    notes = [f for f in result.findings if f.kind == "input-precision"]
    assert len(notes) == 1 and notes[0].severity == "warn"
    assert "rounded values" in notes[0].message


def test_small_integers_are_not_marked() -> None:
    series = prepare_series(np.arange(40, dtype=np.int64))
    assert series.notes == ()


def test_limits_can_be_raised_deliberately(monkeypatch: pytest.MonkeyPatch) -> None:
    from forecastaudit.pipeline import _check_steps

    with pytest.raises(SpecError, match="above the limit of 1,000"):
        _check_steps(1_500, "horizon")
    with fa.limits_changed(horizon=2_000):
        assert _check_steps(1_500, "horizon") == 1_500
    assert fa.current_limits().horizon == 1_000
    # The environment variable is read when the limits are first needed.
    monkeypatch.setattr(validation, "_current", None)
    monkeypatch.setenv("FORECASTAUDIT_MAX_HORIZON", "5000")
    assert fa.current_limits().horizon == 5_000
    monkeypatch.setattr(validation, "_current", None)
    monkeypatch.setenv("FORECASTAUDIT_MAX_HORIZON", "lots")
    with pytest.raises(SpecError, match="FORECASTAUDIT_MAX_HORIZON"):
        fa.current_limits()
    monkeypatch.setattr(validation, "_current", None)


def test_echo_escapes_and_shortens() -> None:
    assert validation.plain("\x1b[31mred") == "\\x1b[31mred"
    long = validation.echo("x" * 1_000_000)
    assert len(long) < 120 and "1,000,000 characters" in long


# ---------------------------------------------------------------------- the CSV reader
def _write(path: Path, frame: pd.DataFrame) -> Path:
    frame.to_csv(path, index=False)
    return path


def test_quarterly_strings_become_quarters_without_warnings(tmp_path: Path) -> None:
    y = _walk(24, 4, freq="Q", start="1998Q1")
    path = _write(tmp_path / "q.csv", pd.DataFrame({"quarter": y.index.astype(str), "v": y}))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # pandas' "could not infer format" used to leak
        series = read_series(path, None)
    assert isinstance(series.index, pd.PeriodIndex)
    assert series.index.freqstr.startswith("Q")
    assert str(series.index[0]) == "1998Q1"
    assert prepare_series(series).period == 4


def test_integer_id_column_is_not_read_as_timestamps(tmp_path: Path) -> None:
    """An integer column first used to be parsed as nanoseconds after 1970."""
    y = _walk(24, 5)
    frame = pd.DataFrame(
        {"row": np.arange(24), "date": y.index.to_timestamp().strftime("%Y-%m-%d"), "v": y}
    )
    series = read_series(_write(tmp_path / "ids.csv", frame), "v")
    assert isinstance(series.index, pd.DatetimeIndex)
    assert series.index[0] == pd.Timestamp("2012-01-01")
    assert series.index.freqstr == "MS"


def test_one_utc_offset_is_accepted_and_dropped(tmp_path: Path) -> None:
    y = _walk(24, 6)
    dates = y.index.to_timestamp().strftime("%Y-%m-%dT00:00:00+00:00")
    series = read_series(_write(tmp_path / "utc.csv", pd.DataFrame({"d": dates, "v": y})), "v")
    assert series.index.tz is None and series.index[0] == pd.Timestamp("2012-01-01")


# ---------------------------------------------------------------------- model choice
def test_model_choice_does_not_rank_aicc_across_transforms() -> None:
    """Likelihoods of a series and of its log do not compare: no AICc rank between them."""
    y = _walk(48, 8)
    result = fa.compare_models(
        y, ["ARIMA(0,1,1)", "ARIMA(0,1,1) +log"], holdout=6, estimators=["statsforecast"]
    )
    assert result.aicc_ranks.isna().all().all()
    assert not any(f.quantity == "aicc" for f in result.findings)


# ---------------------------------------------------------------------- panels read alike
def test_panel_time_column_is_read_like_one_series_file() -> None:
    """Quarters as text become quarters (pandas used to warn and guess month starts);
    mixed UTC offsets are refused rather than shifted out of a regular frequency."""
    from forecastaudit.errors import PanelError
    from forecastaudit.panel.data import read_panel

    quarters = pd.period_range("2001Q1", periods=12, freq="Q").astype(str)
    table = pd.DataFrame(
        {
            "site": ["a"] * 12 + ["b"] * 12,
            "quarter": list(quarters) * 2,
            "units": np.arange(24.0) + 100,
        }
    )
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        panel = read_panel(table, "ARIMA(0,1,1)", id_column="site")
    assert all(isinstance(p.series.index, pd.PeriodIndex) for p in panel)
    assert str(panel[0].series.index[0]) == "2001Q1"
    shifted = table.assign(
        quarter=[
            f"{q[:4]}-{3 * int(q[-1]) - 2:02d}-01T00:00:00+0{1 + i % 2}:00"
            for i, q in enumerate(table["quarter"])
        ]
    )
    with pytest.raises(PanelError, match="different UTC offsets"):
        read_panel(shifted, "ARIMA(0,1,1)", id_column="site")
