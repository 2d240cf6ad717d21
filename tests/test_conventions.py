"""The canonical convention: polynomial algebra, constants, differencing, criteria, variances,
and the mapping of native parameter names to canonical ones and back.

Sources are named beside each check. Box-Jenkins sign convention (theta(B) = 1 - theta_1 B
- ..., phi(B) = 1 - phi_1 B - ...): Box, Jenkins & Reinsel, *Time Series Analysis:
Forecasting and Control*, chapter 3 (recalled from memory).
"""

from __future__ import annotations

import math
import warnings
from typing import ClassVar
from unittest import mock

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from forecastaudit import ModelSpec
from forecastaudit.adapters._statespace import canonical_coefficients
from forecastaudit.adapters.registry import get_adapter
from forecastaudit.conventions import (
    ar_polynomial,
    box_jenkins_ma_to_canonical,
    canonical_ma_to_box_jenkins,
    coefficient_names,
    df_adjusted_to_ml_sigma2,
    difference,
    information_criteria,
    intercept_to_mean,
    ma_polynomial,
    mean_to_intercept,
    ml_to_df_adjusted_sigma2,
    parameter_names,
    polynomial_roots_modulus,
    trend_scale,
)

# ---------------------------------------------------------------------- names


def test_coefficient_names_write_seasonal_lags_out():
    spec = ModelSpec((2, 1, 1), (2, 1, 1), 12, mean=True)
    assert coefficient_names(spec) == [
        "ar_lag1", "ar_lag2", "sar_lag12", "sar_lag24", "ma_lag1", "sma_lag12", "mu",
    ]  # fmt: skip
    assert parameter_names(spec)[-1] == "sigma2"
    assert parameter_names(ModelSpec()) == ["sigma2"]


# ---------------------------------------------------------------------- polynomials


def test_seasonal_ar_polynomial_hand_multiplied():
    # (1 - 0.5B)(1 - 0.3B^12) = 1 - 0.5B - 0.3B^12 + 0.15B^13   (multiplied out by hand)
    spec = ModelSpec((1, 0, 0), (1, 0, 0), 12)
    poly = ar_polynomial(spec, {"ar_lag1": 0.5, "sar_lag12": 0.3})
    expected = np.zeros(14)
    expected[[0, 1, 12, 13]] = [1.0, -0.5, -0.3, 0.15]
    np.testing.assert_allclose(poly, expected, atol=1e-15)


def test_seasonal_ma_polynomial_hand_multiplied():
    # (1 + 0.4B)(1 - 0.6B^12) = 1 + 0.4B - 0.6B^12 - 0.24B^13   (multiplied out by hand)
    spec = ModelSpec((0, 1, 1), (0, 1, 1), 12)
    poly = ma_polynomial(spec, {"ma_lag1": 0.4, "sma_lag12": -0.6})
    expected = np.zeros(14)
    expected[[0, 1, 12, 13]] = [1.0, 0.4, -0.6, -0.24]
    np.testing.assert_allclose(poly, expected, atol=1e-15)


def test_second_order_factors_hand_multiplied():
    # (1 - a1 B - a2 B^2)(1 - s1 B^4 - s2 B^8), multiplied out by hand:
    # 1 - a1 B - a2 B^2 - s1 B^4 + a1 s1 B^5 + a2 s1 B^6 - s2 B^8 + a1 s2 B^9 + a2 s2 B^10
    a1, a2, s1, s2 = 0.3, -0.2, 0.5, 0.1
    spec = ModelSpec((2, 0, 2), (2, 0, 2), 4)
    params = {"ar_lag1": a1, "ar_lag2": a2, "sar_lag4": s1, "sar_lag8": s2,
              "ma_lag1": a1, "ma_lag2": a2, "sma_lag4": s1, "sma_lag8": s2}  # fmt: skip
    expected_ar = np.zeros(11)
    expected_ar[[0, 1, 2, 4, 5, 6, 8, 9, 10]] = [
        1, -a1, -a2, -s1, a1 * s1, a2 * s1, -s2, a1 * s2, a2 * s2,
    ]  # fmt: skip
    np.testing.assert_allclose(ar_polynomial(spec, params), expected_ar, atol=1e-15)
    # The MA side has plus signs: (1 + a1 B + a2 B^2)(1 + s1 B^4 + s2 B^8).
    expected_ma = np.zeros(11)
    expected_ma[[0, 1, 2, 4, 5, 6, 8, 9, 10]] = [
        1, a1, a2, s1, a1 * s1, a2 * s1, s2, a1 * s2, a2 * s2,
    ]  # fmt: skip
    np.testing.assert_allclose(ma_polynomial(spec, params), expected_ma, atol=1e-15)


def test_polynomials_match_statsmodels_reduced_polynomials():
    # General-purpose library: statsmodels SARIMAX multiplies the factors itself
    # (polynomial_reduced_ar / polynomial_reduced_ma of a result at given parameters).
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    spec = ModelSpec((2, 0, 1), (1, 0, 2), 4)
    params = {"ar_lag1": 0.4, "ar_lag2": -0.25, "sar_lag4": 0.3,
              "ma_lag1": 0.5, "sma_lag4": -0.2, "sma_lag8": 0.15}  # fmt: skip
    model = SARIMAX(np.zeros(50), order=(2, 0, 1), seasonal_order=(1, 0, 2, 4))
    native = dict.fromkeys(model.param_names, 1.0)
    native.update({"ar.L1": 0.4, "ar.L2": -0.25, "ar.S.L4": 0.3,
                   "ma.L1": 0.5, "ma.S.L4": -0.2, "ma.S.L8": 0.15})  # fmt: skip
    result = model.smooth([native[name] for name in model.param_names])
    np.testing.assert_allclose(ar_polynomial(spec, params), result.polynomial_reduced_ar)
    np.testing.assert_allclose(ma_polynomial(spec, params), result.polynomial_reduced_ma)


def test_no_terms_is_the_unit_polynomial():
    np.testing.assert_array_equal(ar_polynomial(ModelSpec(), {}), [1.0])
    np.testing.assert_array_equal(ma_polynomial(ModelSpec(), {}), [1.0])
    assert polynomial_roots_modulus(np.array([1.0])).size == 0


def test_roots_modulus_closed_form():
    # 1 - 0.5B has its root at B = 2; 1 + 0.5B - 0.0B^2 trailing zero trimmed: root at -2.
    np.testing.assert_allclose(polynomial_roots_modulus(np.array([1.0, -0.5])), [2.0])
    np.testing.assert_allclose(polynomial_roots_modulus(np.array([1.0, 0.5, 0.0])), [2.0])
    # 1 - 0.25 B^2: roots +-2.
    np.testing.assert_allclose(polynomial_roots_modulus(np.array([1.0, 0.0, -0.25])), [2.0, 2.0])


# ---------------------------------------------------------------------- constants


def test_intercept_to_mean_closed_form():
    # AR(1): c = mu (1 - phi) (closed form of the stationary mean).
    spec = ModelSpec((1, 0, 0), mean=True)
    assert intercept_to_mean(4.0, spec, {"ar_lag1": 0.6}) == pytest.approx(10.0, rel=1e-15)
    assert mean_to_intercept(10.0, spec, {"ar_lag1": 0.6}) == pytest.approx(4.0, rel=1e-15)
    # Seasonal: phi(1) Phi(1) = (1 - 0.5)(1 - 0.3) = 0.35.
    seasonal = ModelSpec((1, 0, 0), (1, 0, 0), 12, mean=True)
    params = {"ar_lag1": 0.5, "sar_lag12": 0.3}
    assert intercept_to_mean(0.7, seasonal, params) == pytest.approx(2.0, rel=1e-14)
    # No AR terms: the intercept is the mean.
    assert intercept_to_mean(0.25, ModelSpec((0, 1, 1), mean=True), {"ma_lag1": 0.3}) == 0.25


@given(
    c=st.floats(-1e6, 1e6),
    a1=st.floats(-0.45, 0.45),
    a2=st.floats(-0.45, 0.45),
    s1=st.floats(-0.9, 0.9),
)
def test_intercept_and_mean_are_inverse(c, a1, a2, s1):
    spec = ModelSpec((2, 0, 0), (1, 0, 0), 4, mean=True)
    params = {"ar_lag1": a1, "ar_lag2": a2, "sar_lag4": s1}
    mu = intercept_to_mean(c, spec, params)
    assert mean_to_intercept(mu, spec, params) == pytest.approx(c, rel=1e-12, abs=1e-9)


def test_intercept_at_a_unit_root_has_no_mean():
    with pytest.raises(ZeroDivisionError, match="unit root"):
        intercept_to_mean(1.0, ModelSpec((1, 0, 0), mean=True), {"ar_lag1": 1.0})


@pytest.mark.parametrize(
    ("order", "seasonal", "period", "scale"),
    [
        ((0, 0, 0), (0, 0, 0), None, 1.0),
        ((0, 1, 0), (0, 0, 0), None, 1.0),  # drift b per period: mu = b
        ((0, 0, 0), (0, 1, 0), 12, 12.0),  # (1 - B^12) b t = 12 b
        ((0, 2, 0), (0, 0, 0), None, 2.0),  # (1 - B)^2 b t^2 = 2 b
        ((0, 1, 0), (0, 1, 0), 12, 24.0),  # (1 - B)(1 - B^12) b t^2 = 2! 12 b
        ((0, 1, 0), (0, 2, 0), 4, 96.0),  # 3! 4^2
    ],
)
def test_trend_scale_is_what_differencing_leaves_of_a_trend(order, seasonal, period, scale):
    spec = ModelSpec(order, seasonal, period)
    assert trend_scale(spec) == scale
    # Closed form by direct differencing: (1-B)^d (1-B^m)^D applied to b t^(d+D) is the
    # constant (d+D)! m^D b.
    b, t = 0.37, np.arange(200, dtype=float)
    w = difference(b * t**spec.n_differences, spec)
    np.testing.assert_allclose(w, scale * b, rtol=1e-9)


# ---------------------------------------------------------------------- differencing


def test_difference_matches_numpy_and_pandas(log_airline):
    y = log_airline.copy()
    regular = difference(y, ModelSpec((0, 2, 0)))
    np.testing.assert_allclose(regular, np.diff(y, n=2), rtol=0, atol=1e-15)
    seasonal = difference(y, ModelSpec((0, 0, 0), (0, 1, 0), 12))
    np.testing.assert_allclose(seasonal, pd.Series(y).diff(12).dropna().to_numpy(), atol=1e-15)
    both = difference(y, ModelSpec((0, 1, 0), (0, 1, 0), 12))
    expected = pd.Series(y).diff(12).diff().dropna().to_numpy()
    assert both.size == 144 - 13
    np.testing.assert_allclose(both, expected, atol=1e-15)
    np.testing.assert_array_equal(y, log_airline)  # input untouched
    np.testing.assert_array_equal(difference(y, ModelSpec()), y)
    assert difference(y, ModelSpec()) is not y


# ---------------------------------------------------------------------- criteria


def test_information_criteria_hand_example():
    # l = -100, k = 3, n = 50: AIC = 200 + 6 = 206; AICc = 206 + 2*3*4/46; BIC = 200 + 3 ln 50
    # (formulas: Akaike 1974, IEEE Trans. Automatic Control 19; Hurvich & Tsai 1989,
    # Biometrika 76; Schwarz 1978, Annals of Statistics 6).
    ic = information_criteria(-100.0, 3, 50)
    assert ic["aic"] == pytest.approx(206.0, rel=1e-15)
    assert ic["aicc"] == pytest.approx(206.0 + 24.0 / 46.0, rel=1e-15)
    assert ic["aicc"] == pytest.approx(206.52173913043478, rel=1e-15)
    assert ic["bic"] == pytest.approx(200.0 + 3.0 * math.log(50.0), rel=1e-15)
    assert ic["bic"] == pytest.approx(211.73606901628444, rel=1e-15)


def test_information_criteria_match_statsmodels_eval_measures():
    # General-purpose library: statsmodels.tools.eval_measures (aic, aicc, bic).
    from statsmodels.tools import eval_measures

    llf, k, n = 244.6964851399868, 3, 131
    ic = information_criteria(llf, k, n)
    assert ic["aic"] == pytest.approx(eval_measures.aic(llf, n, k), rel=1e-14)
    assert ic["aicc"] == pytest.approx(eval_measures.aicc(llf, n, k), rel=1e-14)
    assert ic["bic"] == pytest.approx(eval_measures.bic(llf, n, k), rel=1e-14)


def test_information_criteria_edge_cases():
    assert information_criteria(1.0, 3, 4)["aicc"] == math.inf  # n - k - 1 = 0
    assert all(math.isnan(v) for v in information_criteria(math.nan, 3, 50).values())
    assert all(math.isnan(v) for v in information_criteria(-math.inf, 3, 50).values())


def test_information_criteria_with_no_observations_do_not_raise():
    ic = information_criteria(0.0, 3, 0)
    assert math.isnan(ic["bic"]) and not math.isfinite(ic["aicc"])
    ic = information_criteria(0.0, 3, -3)
    assert math.isnan(ic["bic"])


# ---------------------------------------------------------------------- sigma2


def test_df_adjusted_sigma2_both_ways():
    # SSR = 10 over n = 50 observations, 2 subtracted: adjusted 10/48, ML 10/50 (definitions).
    assert df_adjusted_to_ml_sigma2(10.0 / 48.0, 50, 2) == pytest.approx(0.2, rel=1e-15)
    assert ml_to_df_adjusted_sigma2(0.2, 50, 2) == pytest.approx(10.0 / 48.0, rel=1e-15)
    # The measured statsforecast pair on the log airline model (estimator-facts.md):
    # 0.001369412170497855 reported, n_w = 131, 2 coefficients -> 0.0013485051144597198.
    assert df_adjusted_to_ml_sigma2(0.001369412170497855, 131, 2) == pytest.approx(
        0.0013485051144597198, rel=1e-14
    )


@given(s=st.floats(1e-8, 1e8), n=st.integers(2, 10_000), k=st.integers(0, 50))
def test_df_adjusted_sigma2_round_trip(s, n, k):
    if k >= n:
        return
    there = ml_to_df_adjusted_sigma2(s, n, k)
    assert there == pytest.approx(s * n / (n - k), rel=1e-15)
    assert df_adjusted_to_ml_sigma2(there, n, k) == pytest.approx(s, rel=1e-13)


# ---------------------------------------------------------------------- Box-Jenkins MA signs


def test_box_jenkins_ma_sign():
    # Series G airline model: published theta = 0.40, Theta = 0.61 (Box, Jenkins & Reinsel,
    # ch. 9, recalled from memory) are ma_lag1 = -0.40, sma_lag12 = -0.61 here.
    assert box_jenkins_ma_to_canonical(0.40) == -0.40
    assert isinstance(box_jenkins_ma_to_canonical(0.40), float)
    np.testing.assert_array_equal(box_jenkins_ma_to_canonical([0.40, 0.61]), [-0.40, -0.61])
    np.testing.assert_array_equal(canonical_ma_to_box_jenkins(np.array([-0.4, 0.2])), [0.4, -0.2])
    assert canonical_ma_to_box_jenkins(box_jenkins_ma_to_canonical(0.123)) == 0.123


# ---------------------------------------------------------------------- native conventions
#
# The round trip Box-Jenkins -> canonical -> native -> canonical -> Box-Jenkins must be the
# identity for every native convention:
#   * statsmodels SARIMAX names (ar.L1, ma.S.L12, intercept c = mu phi(1) Phi(1)), read back
#     by forecastaudit.adapters._statespace.canonical_coefficients;
#   * statsmodels tsa.arima names (const = mu without differencing; x1 = coefficient of
#     t^(d+D), mu = (d+D)! m^D x1), read back by the same function;
#   * statsforecast names (ar1, sar1, ma1, sma1, intercept = mu, drift with mu = m^D drift).
#     The statsforecast mapping lives inside StatsforecastArima._fit, so it is exercised
#     through the adapter with statsforecast.models.ARIMA replaced by a stub that returns
#     the chosen coefficients under the library's names. This runs the adapter's real
#     mapping code on arbitrary values, which a real fit cannot; that the stub's names are
#     the library's is checked by a real fit in test_statsforecast_names_from_a_real_fit.


def _statsmodels_native(spec, canonical, kind):
    """Native names and values for ``canonical``; names come from statsmodels itself."""
    from statsmodels.tsa.arima.model import ARIMA
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    seasonal = (*spec.seasonal, spec.period or 0)
    y = np.zeros(4 * spec.m + 20)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # constructing on zeros may warn; names are all we need
        if kind == "intercept":
            model = SARIMAX(y, order=spec.order, seasonal_order=seasonal,
                            trend="c" if spec.mean else "n")  # fmt: skip
        else:
            s = spec.n_differences
            trend = "n" if not spec.mean else ("c" if s == 0 else [0] * s + [1])
            model = ARIMA(y, order=spec.order, seasonal_order=seasonal, trend=trend)
    values = []
    for name in model.param_names:
        if name.startswith(("ar.", "ma.")):
            kind_, *rest = name.split(".")
            seasonal_term = rest[0] == "S"
            lag = int(rest[-1][1:])
            values.append(canonical[("s" if seasonal_term else "") + f"{kind_}_lag{lag}"])
        elif name == "intercept":
            values.append(mean_to_intercept(canonical["mu"], spec, canonical))
        elif name == "const":
            values.append(canonical["mu"])
        elif name == "x1":
            values.append(canonical["mu"] / trend_scale(spec))
        elif name == "sigma2":
            values.append(1.0)
        else:
            raise AssertionError(f"unexpected statsmodels name {name}")
    return list(model.param_names), np.array(values)


class _StubStatsforecastArima:
    """Stands in for statsforecast.models.ARIMA: its fit returns ``coef`` unchanged."""

    coef: ClassVar[dict[str, float]] = {}

    def __init__(
        self,
        order=(0, 0, 0),
        season_length=1,
        seasonal_order=(0, 0, 0),
        include_mean=True,
        include_drift=False,
    ):
        self.order, self.season_length, self.seasonal_order = order, season_length, seasonal_order
        self.include_mean, self.include_drift = include_mean, include_drift

    def fit(self, y):
        n_w = len(y) - self.order[1] - self.season_length * self.seasonal_order[1]
        self.model_ = {
            "coef": dict(self.coef), "nobs": n_w, "mask": [True] * len(self.coef),
            "sigma2": 1.0, "loglik": -1.0, "aic": 0.0, "aicc": 0.0, "bic": 0.0, "code": 0,
        }  # fmt: skip
        return self


def _statsforecast_native(spec, canonical):
    """The coefficients under statsforecast's names, in the library's order."""
    m = spec.m
    coef = {f"ar{i}": canonical[f"ar_lag{i}"] for i in range(1, spec.p + 1)}
    coef |= {f"ma{j}": canonical[f"ma_lag{j}"] for j in range(1, spec.q + 1)}
    coef |= {f"sar{i}": canonical[f"sar_lag{i * m}"] for i in range(1, spec.P + 1)}
    coef |= {f"sma{j}": canonical[f"sma_lag{j * m}"] for j in range(1, spec.Q + 1)}
    if spec.mean and spec.n_differences == 0:
        coef["intercept"] = canonical["mu"]
    elif spec.mean:
        coef["drift"] = canonical["mu"] / trend_scale(spec)
    return coef


@st.composite
def box_jenkins_models(draw):
    p, q, P, Q = (draw(st.integers(0, 2)) for _ in range(4))
    d, D = draw(st.integers(0, 2)), draw(st.integers(0, 1))
    seasonal_terms = P or Q or D
    # statsmodels rejects a period at or below a regular order (a lag in both factors), and
    # so does common practice; the period is kept above p and q.
    period = draw(st.integers(max(2, p + 1, q + 1), 12)) if seasonal_terms else None
    spec = ModelSpec((p, d, q), (P, D, Q), period, mean=draw(st.booleans()))
    m = spec.m
    # AR values keep phi(1) Phi(1) away from zero, so a mean exists.
    ar = st.floats(-0.45, 0.45)
    bj = {f"ar_lag{i}": draw(ar) for i in range(1, p + 1)}
    bj |= {f"sar_lag{i * m}": draw(ar) for i in range(1, P + 1)}
    theta = st.floats(-2.0, 2.0)  # Box-Jenkins MA values, any sign, invertible or not
    bj |= {f"ma_lag{j}": draw(theta) for j in range(1, q + 1)}
    bj |= {f"sma_lag{j * m}": draw(theta) for j in range(1, Q + 1)}
    if spec.mean:
        bj["mu"] = draw(st.floats(-1e3, 1e3))
    return spec, bj


def _bj_to_canonical(bj):
    return {k: box_jenkins_ma_to_canonical(v) if "ma_lag" in k else v for k, v in bj.items()}


def _canonical_to_bj(canonical):
    return {k: canonical_ma_to_box_jenkins(v) if "ma_lag" in k else v for k, v in canonical.items()}


def _assert_same(a, b):
    assert set(a) == set(b)
    for name in a:
        assert a[name] == pytest.approx(b[name], rel=1e-12, abs=1e-12), name


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(box_jenkins_models())
def test_box_jenkins_round_trip_through_statsmodels_names(model):
    spec, bj = model
    canonical = _bj_to_canonical(bj)
    for kind, mean_kind in (("intercept", "intercept"), ("arima", None)):
        names, values = _statsmodels_native(spec, canonical, kind)
        if mean_kind is None:
            mean_kind = "mean" if spec.n_differences == 0 else "trend"
        # The adapter names the constant it set up; statsmodels calls a trend "x1".
        constant = "x1" if mean_kind == "trend" else None
        back, extra, _notes = canonical_coefficients(names, values, spec, mean_kind, constant)
        assert extra == {}
        _assert_same(back, canonical)
        _assert_same(_canonical_to_bj(back), bj)


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(box_jenkins_models())
def test_box_jenkins_round_trip_through_statsforecast_names(model):
    spec, bj = model
    canonical = _bj_to_canonical(bj)
    adapter = get_adapter("statsforecast")
    if spec.mean and spec.n_differences >= 2:
        # statsforecast offers no such constant: the adapter says so and fits nothing.
        assert adapter.fit(np.zeros(60), spec).status == "unsupported"
        return
    coef = _statsforecast_native(spec, canonical)
    stub = type("Stub", (_StubStatsforecastArima,), {"coef": coef})
    with mock.patch("statsforecast.models.ARIMA", stub):
        estimate = adapter.fit(np.zeros(spec.minimum_length() + 30), spec)
    assert estimate.status == "ok", estimate.reason
    back = {k: v for k, v in estimate.params.items() if k != "sigma2"}
    _assert_same(back, canonical)
    _assert_same(_canonical_to_bj(back), bj)
    assert estimate.fitted_model is None  # no term beyond the spec


def test_statsmodels_constant_not_in_the_spec_is_kept_as_an_extra_term():
    spec = ModelSpec((1, 1, 0))  # no mean asked for
    params, extra, _ = canonical_coefficients(
        ["intercept", "ar.L1", "sigma2"], np.array([0.01, 0.5, 1.0]), spec, "intercept"
    )
    assert params == {"ar_lag1": 0.5}
    assert extra == {"intercept": 0.01}


def test_statsmodels_first_regressor_is_not_read_as_the_constant():
    # statsmodels names the first regressor "x1", as it names a trend; only the name the
    # adapter gave is the constant.
    spec = ModelSpec((1, 1, 0), mean=True)
    params, extra, _ = canonical_coefficients(
        ["x1", "drift", "ar.L1", "sigma2"],
        np.array([3.0, 0.2, 0.5, 1.0]),
        spec,
        "trend",
        "drift",
    )
    assert params["mu"] == pytest.approx(0.2) and extra == {"x1": 3.0}


def test_statsmodels_missing_constant_is_an_error():
    with pytest.raises(RuntimeError, match="no constant 'const' among the fitted parameters"):
        canonical_coefficients(
            ["ar.L1", "sigma2"], np.array([0.5, 1.0]), ModelSpec((1, 0, 0), mean=True), "mean"
        )


def test_statsforecast_names_from_a_real_fit():
    # The stub above assumes statsforecast's names; a real fit confirms them.
    rng = np.random.default_rng(3)
    y = 5.0 + rng.standard_normal(200)
    spec = ModelSpec((2, 0, 1), (1, 0, 1), 4, mean=True)
    estimate = get_adapter("statsforecast").fit(y, spec)
    assert estimate.status == "ok", estimate.reason
    native = estimate.native_params
    assert list(native) == ["ar1", "ar2", "ma1", "sar1", "sma1", "intercept"]
    assert estimate.params["ar_lag2"] == native["ar2"]
    assert estimate.params["sar_lag4"] == native["sar1"]
    assert estimate.params["sma_lag4"] == native["sma1"]
    assert estimate.params["mu"] == native["intercept"]
