"""Published accuracy measures and tests against their papers' formulas.

Each expected value is computed here, by hand or from the formula as printed in the paper,
not by calling forecastaudit's own code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from forecastaudit.diagnosis.metrics import (
    diebold_mariano,
    interval_score,
    ljung_box,
    mase_scale,
    point_accuracy,
)


def test_mase_hand_example() -> None:
    # Hyndman & Koehler (2006), IJF 22: MASE = MAE / in-sample MAE of the seasonal naive
    # forecast. Training 1..8 with period 4: naive errors y_t - y_{t-4} are all 4, so the
    # scale is 4; forecasts off by 1 and 3 give MAE 2 and MASE 0.5 (by hand).
    train = np.arange(1.0, 9.0)
    scale = mase_scale(train, 4)
    assert scale == 4.0
    acc = point_accuracy(np.array([10.0, 10.0]), np.array([9.0, 13.0]), scale)
    assert acc["mae"] == 2.0
    assert acc["mase"] == 0.5
    assert acc["rmse"] == pytest.approx(math.sqrt((1 + 9) / 2))
    assert acc["mape"] == pytest.approx(100 * (0.1 + 0.3) / 2)
    assert math.isnan(point_accuracy(np.array([0.0, 1.0]), np.array([1.0, 1.0]), 1.0)["mape"])


def test_interval_score_hand_example() -> None:
    # Gneiting & Raftery (2007), JASA 102, section 6.2, at alpha = 0.05 (95%):
    # inside: width only; below: width + (2/alpha)(l - y); above: width + (2/alpha)(y - u).
    lower, upper = np.array([0.0, 0.0, 0.0]), np.array([2.0, 2.0, 2.0])
    y = np.array([1.0, -1.0, 3.5])
    got = interval_score(y, lower, upper, 95.0)
    assert got == pytest.approx([2.0, 2.0 + 40.0 * 1.0, 2.0 + 40.0 * 1.5])


def _dm_by_hand(e1: np.ndarray, e2: np.ndarray, h: int) -> tuple[float, float, float]:
    # Diebold & Mariano (1995), JBES 13, and Harvey, Leybourne & Newbold (1997), IJF 13,
    # written out from the papers' formulas.
    d = e1**2 - e2**2
    T = len(d)
    dbar = sum(d) / T
    gam = []
    for k in range(h):
        gam.append(sum((d[t] - dbar) * (d[t - k] - dbar) for t in range(k, T)) / T)
    V = (gam[0] + 2 * sum(gam[1:])) / T
    dm = dbar / math.sqrt(V)
    dm_star = dm * math.sqrt((T + 1 - 2 * h + h * (h - 1) / T) / T)
    p = 2 * stats.t.sf(abs(dm_star), df=T - 1)
    return dm, dm_star, p


@pytest.mark.parametrize("h", [1, 3])
def test_diebold_mariano_matches_the_papers(h: int) -> None:
    e1 = np.array([1.0, -2.0, 0.5, 1.5, -1.0, 2.5, -0.5, 1.0, 0.0, -1.5])
    e2 = np.array([0.5, -1.0, 0.5, 1.0, -1.5, 1.0, 0.0, 0.5, 0.5, -1.0])
    dm, dm_star, p = _dm_by_hand(e1, e2, h)
    got = diebold_mariano(e1, e2, horizon=h)
    assert got.statistic == pytest.approx(dm, rel=1e-12)
    assert got.corrected_statistic == pytest.approx(dm_star, rel=1e-12)
    assert got.p_value == pytest.approx(p, rel=1e-12)
    assert not got.variance_fallback


def test_diebold_mariano_defined_when_variance_not_positive() -> None:
    # Alternating loss differentials have a strongly negative lag-1 autocovariance, so with
    # h = 2 the estimate gamma_0 + 2 gamma_1 is negative: the documented fallback is the
    # lag-0 variance (h = 1 form).
    e1 = np.array([2.0, 0.0] * 6)
    e2 = np.array([0.0, 1.0] * 6)
    got = diebold_mariano(e1, e2, horizon=2)
    assert got.variance_fallback
    d = e1**2 - e2**2
    expected = d.mean() / math.sqrt(np.var(d) / d.size)
    assert got.statistic == pytest.approx(expected)
    same = diebold_mariano(e1, e1, horizon=1)
    assert math.isnan(same.statistic) and same.p_value == 1.0


def test_ljung_box_matches_statsmodels() -> None:
    # Ljung & Box (1978), Biometrika 65, cross-checked with statsmodels' acorr_ljungbox
    # (a general-purpose library) with model_df = p + q + P + Q.
    from statsmodels.stats.diagnostic import acorr_ljungbox

    x = np.random.default_rng(3).normal(size=150)
    ours = ljung_box(x, lags=24, model_df=2)
    theirs = acorr_ljungbox(x, lags=[24], model_df=2)
    assert ours.statistic == pytest.approx(float(theirs["lb_stat"].iloc[0]), rel=1e-10)
    assert ours.p_value == pytest.approx(float(theirs["lb_pvalue"].iloc[0]), rel=1e-8)
    assert ours.df == 22


def test_diebold_mariano_needs_twice_the_horizon() -> None:
    # With T = h the correction factor sqrt((T + 1 - 2h + h(h-1)/T) / T) is 0 (closed form):
    # the test is reported as undefined rather than as a spurious p = 1.
    e1, e2 = np.arange(12.0), np.arange(12.0)[::-1]
    got = diebold_mariano(e1, e2, horizon=12)
    assert math.isnan(got.statistic) and math.isnan(got.p_value)
    assert "more forecast origins" in got.note
