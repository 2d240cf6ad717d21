"""Panel baselines: what a baseline keeps, and drift series by series (seeded data)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from forecastaudit.errors import PanelError
from forecastaudit.panel import audit_panel
from forecastaudit.record.panel_baseline import (
    compare_panel_to_baseline,
    load_panel_baseline,
    panel_baseline,
    write_panel_baseline,
)

ENGINES = ["statsmodels-sarimax", "statsforecast"]


def _panel(shift: dict[str, float] | None = None, names=("north", "south", "east")) -> pd.DataFrame:
    shift = shift or {}
    frames = []
    for k, name in enumerate(names):
        rng = np.random.default_rng(50 + k)
        x = np.zeros(96)
        for t in range(1, 96):
            x[t] = 0.6 * x[t - 1] + rng.normal()
        months = pd.period_range("2017-01", periods=96, freq="M").astype(str)
        frames.append(
            pd.DataFrame({"depot": name, "month": months, "units": 30 + x + shift.get(name, 0.0)})
        )
    return pd.concat(frames, ignore_index=True)


def _run(table: pd.DataFrame):
    return audit_panel(
        table, "ARIMA(1,0,0) +mean", ENGINES, id_column="depot", workers=1, reports=False
    )


@pytest.fixture(scope="module")
def first():
    return _run(_panel())


def test_same_panel_has_no_drift_and_baseline_is_small(first, tmp_path: Path) -> None:
    path = write_panel_baseline(first, tmp_path / "depots.panel.json")
    document = load_panel_baseline(path)
    assert sorted(document["series"]) == ["east", "north", "south"]
    kept = len(json.dumps(document["series"]["north"]))
    full = len(json.dumps(first.record("north")))
    # A passing series' record in a panel has no profiles or grid (they are mapped for
    # failing series only); the baseline keeps about a quarter of what is left.
    assert kept < full / 3
    drift = compare_panel_to_baseline(path, _run(_panel()))
    assert drift.verdict == "no drift"
    assert drift.passed
    assert set(drift.table["state"]) == {"no drift"}


def test_drift_is_reported_for_the_moved_series_only(first) -> None:
    document = panel_baseline(first)
    drift = compare_panel_to_baseline(document, _run(_panel({"east": 2.0})))
    assert not drift.passed
    assert drift.ids("drift beyond tolerance") == ["east"]
    assert drift.table.index[0] == "east"
    assert drift.table.loc["east", "data"] == "changed"
    assert drift.table.loc["north", "state"] == "no drift"
    # The level moved by 2.0: the largest move is reported in words with its tolerance.
    assert "tolerance" in drift.table.loc["east", "largest"]
    assert "east: drift beyond tolerance" in str(drift)


def test_drift_text_says_the_data_changed_and_how_many_quantities_moved(first) -> None:
    """One series' last 6 months raised by 25%: its line says its data changed, how many
    quantities moved beyond tolerance, and the largest three of them, largest first."""
    table = _panel()
    raised = (table["depot"] == "east") & (table["month"] >= "2024-07")
    table.loc[raised, "units"] *= 1.25
    drift = compare_panel_to_baseline(panel_baseline(first), _run(table))
    assert drift.ids("drift beyond tolerance") == ["east"]
    assert drift.ids_with_changed_data() == ["east"]
    beyond = drift.drifts["east"].beyond
    count = int(drift.table.loc["east", "beyond"])
    assert count == len(beyond) > 3
    # The largest moves against their tolerance, computed from the comparison itself.
    ratio = (beyond["change"].abs() / beyond["tolerance"]).sort_values(
        ascending=False, kind="stable"
    )
    top = beyond.loc[ratio.index[:3]]
    expected = [
        f"    {r.estimator} {r.quantity} {r.change:+.4g} (tolerance {r.tolerance:.3g})"
        for r in top.itertuples()
    ]
    lines = str(drift).splitlines()
    assert (
        "The data changed in 1 of 3 series (fingerprints differ from the baseline's)" in (lines[2])
    )
    at = lines.index(
        f"  east: drift beyond tolerance: data changed (fingerprints differ); {count} "
        "quantities beyond tolerance, the largest:"
    )
    assert lines[at + 1 : at + 4] == expected
    assert lines[at + 4] == f"    ... and {count - 3} more"
    # The table's "largest" is the first of them.
    assert expected[0].strip() == drift.table.loc["east", "largest"]
    # A forecast one step ahead moved up with the raised data, by more than its tolerance.
    first_move = top.iloc[0]
    assert first_move["quantity"] == "forecast_step1"
    assert first_move["change"] > 0 and first_move["new"] > first_move["old"]


def test_added_and_removed_series_fail(first) -> None:
    document = panel_baseline(first)
    drift = compare_panel_to_baseline(document, _run(_panel(names=("north", "south", "west"))))
    assert drift.ids("new series") == ["west"]
    assert drift.ids("missing now") == ["east"]
    assert not drift.passed


def test_bad_baseline_files_are_refused(tmp_path: Path, first) -> None:
    bad = tmp_path / "bad.panel.json"
    bad.write_text('{"baseline": "forecastaudit-panel-baseline", "version": 1, "series": NaN}')
    with pytest.raises(PanelError, match="non-standard JSON value NaN"):
        load_panel_baseline(bad)
    bad.write_text('{"spec": {}}')
    with pytest.raises(PanelError, match="not a forecastaudit panel baseline"):
        compare_panel_to_baseline(bad, first)
    bad.write_bytes(b"\x00\xff\xfe")
    with pytest.raises(PanelError, match="Cannot read the panel baseline"):
        load_panel_baseline(bad)
