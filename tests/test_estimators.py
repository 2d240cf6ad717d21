"""The estimator adapters, by real fits: agreement, published values, constants, conversions,
and what happens when a library is missing, fails or warns.

Measured versions behind the stated facts: statsmodels 0.15, pmdarima 2.1.1, sktime 1.2,
statsforecast 2.1.1 (see estimator-facts.md). Tolerances are stated beside each check.
"""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pytest

from forecastaudit import ModelSpec
from forecastaudit.adapters.registry import available_estimators, get_adapter
from forecastaudit.adapters.statsforecast_arima import StatsforecastArima
from forecastaudit.conventions import (
    box_jenkins_ma_to_canonical,
    difference,
    information_criteria,
    parameter_names,
    trend_scale,
)
from forecastaudit.reference.fit import ReferenceFit, fit_reference

STATESPACE = ("statsmodels-sarimax", "statsmodels-arima", "pmdarima", "sktime")
AIRLINE = ModelSpec((0, 1, 1), (0, 1, 1), 12)


def _fit_all(y, spec, keys=None):
    return {key: get_adapter(key).fit(y, spec) for key in keys or available_estimators()}


def _exact_loglike_of_differenced(w, ma_poly_params, order, seasonal_order, sigma2):
    """Exact Gaussian log-likelihood of the differenced series at given parameters.

    General-purpose library: statsmodels SARIMAX on w with no differencing and a stationary
    initialisation (equal to the dense multivariate-normal log-density; estimator-facts.md).
    """
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    model = SARIMAX(w, order=order, seasonal_order=seasonal_order, trend="n")
    return float(model.loglike(np.r_[ma_poly_params, sigma2]))


def _statsmodels_own_loglike(y, params):
    """statsmodels SARIMAX's own log-likelihood of the airline model at given parameters.

    SARIMAX with its defaults (approximate diffuse prior, 13 observations burned) is the
    objective all four statsmodels-engine adapters maximise on this model (no constant; same
    signs: ``ma.L1`` = ma_lag1, ``ma.S.L12`` = sma_lag12). No optimiser runs, so the value is
    deterministic to ~1e-10 at fixed parameters (estimator-facts.md).
    """
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    model = SARIMAX(y, order=(0, 1, 1), seasonal_order=(0, 1, 1, 12))
    return float(model.loglike([params["ma_lag1"], params["sma_lag12"], params["sigma2"]]))


# Where statsmodels' default L-BFGS stops (factr 1e7, pgtol 1e-5, maxiter 50, numerical
# score) is not portable: it stops when one step improves -llf/n by less than
# factr * eps = 2.2e-9 relative, at a point that depends on rounding. On the log airline model
# it stopped at llf 244.6964851 here and at 244.69647978 on another CPU (estimator-facts.md);
# with the data perturbed at 1e-13 relative (300 seeded runs, measured here) the median gap
# to its own optimum is 5e-6, and about 1 run in 100 stops 0.011 short with ma_lag1 0.012 off.
# So a statsmodels-engine estimate is held to published values only when it is within
# STOPPING_SLACK of its own optimum; a gap of 1e-3 moves a coefficient by at most about
# se * sqrt(2 * 1e-3) = 0.004 here (quadratic approximation, se 0.09). Beyond it the estimate
# must be measurably short of that optimum, the case the audit reports as stopped short.
STOPPING_SLACK = 1e-3


@pytest.fixture(scope="module")
def airline_fits(log_airline):
    return _fit_all(log_airline, AIRLINE)


@pytest.fixture(scope="module")
def airline_optimum(log_airline) -> ReferenceFit:
    """The reference optimum: portable, its multi-start L-BFGS-B (ftol 1e-15, gtol 1e-10)
    ends within 1e-13 in log-likelihood and 2e-8 in the coefficients from 41 starts
    (measured)."""
    return fit_reference(log_airline, AIRLINE)


@pytest.fixture(scope="module")
def nile_fits(nile):
    return _fit_all(nile, ModelSpec((0, 1, 1)))


# ---------------------------------------------------------------------- log airline


def test_every_estimator_fits_the_airline_model(airline_fits):
    assert list(airline_fits) == [*STATESPACE, "statsforecast"]
    for key, estimate in airline_fits.items():
        assert estimate.status == "ok", (key, estimate.reason)
        assert list(estimate.params) == parameter_names(AIRLINE) == [
            "ma_lag1", "sma_lag12", "sigma2",
        ]  # fmt: skip
        assert estimate.n_w == 131 and estimate.k == 3
        assert estimate.converged is not None and estimate.version
        json.dumps(estimate.to_dict())  # the record form is plain JSON
    assert {airline_fits[k].engine for k in STATESPACE} == {"statsmodels-statespace"}
    assert airline_fits["statsforecast"].engine != "statsmodels-statespace"


def test_statsmodels_engine_adapters_agree(airline_fits):
    # Four wrappers of one engine: they must agree (1e-3 absolute in the coefficients,
    # 1e-3 relative in sigma2); this is a consistency check, not independent evidence.
    first = airline_fits["statsmodels-sarimax"].params
    for key in STATESPACE[1:]:
        params = airline_fits[key].params
        assert params["ma_lag1"] == pytest.approx(first["ma_lag1"], abs=1e-3), key
        assert params["sma_lag12"] == pytest.approx(first["sma_lag12"], abs=1e-3), key
        assert params["sigma2"] == pytest.approx(first["sigma2"], rel=1e-3), key


def _assert_series_g(params, label):
    # Box, Jenkins & Reinsel, Time Series Analysis: Forecasting and Control, ch. 9, Series G,
    # log airline ARIMA(0,1,1)x(0,1,1)12: theta = 0.40, Theta = 0.61 in the book's minus-sign
    # MA convention (recalled from memory, per check-values.md). The book minimises the sum
    # of squares; these estimators maximise the exact likelihood, which is known to give a
    # smaller Theta (about 0.56, check-values.md). So theta is asserted to 0.01 (the book's
    # rounding plus optimiser slack) and Theta only to 0.06: the gap is the objective, not an
    # error, and a tighter tolerance would assert the wrong thing.
    assert params["ma_lag1"] == pytest.approx(box_jenkins_ma_to_canonical(0.40), abs=0.01), label
    assert params["sma_lag12"] == pytest.approx(box_jenkins_ma_to_canonical(0.61), abs=0.06), label
    # Exact ML: Theta about 0.56 (check-values.md, rounded to two decimals).
    assert params["sma_lag12"] == pytest.approx(-0.56, abs=0.01), label
    # Residual variance about 0.00134 (check-values.md, recalled from memory).
    assert params["sigma2"] == pytest.approx(0.00134, rel=0.02), label


def test_box_jenkins_series_g_values_are_recovered(airline_fits, airline_optimum, log_airline):
    assert (box_jenkins_ma_to_canonical(0.40), box_jenkins_ma_to_canonical(0.61)) == (-0.40, -0.61)
    _assert_series_g(airline_optimum.params, "reference optimum")
    best = _statsmodels_own_loglike(log_airline, airline_optimum.params)
    for key in STATESPACE:
        estimate = airline_fits[key]
        short = best - estimate.loglike_native
        # No estimate lies above its own objective's optimum (1e-6: the optimum of
        # statsmodels' objective and the exact one differ by its diffuse prior, ~1e-6).
        assert short > -1e-6, key
        if short <= STOPPING_SLACK:  # at its optimum, within the slack (see STOPPING_SLACK)
            _assert_series_g(estimate.params, key)
        else:  # stopped short: near the optimum, and lower by its own likelihood
            for name in ("ma_lag1", "sma_lag12"):
                assert estimate.params[name] == pytest.approx(
                    airline_optimum.params[name], abs=0.05
                ), key


def test_statsforecast_airline_difference_is_an_optimiser_gap(
    airline_fits, airline_optimum, log_airline
):
    # statsforecast (CSS-ML, its own engine) lands farther from the optimum than the 0.01
    # tolerance above (measured with statsforecast 2.1.1: ma_lag1 -0.3772 against -0.4018,
    # scipy status 2). Re-scored under one exact likelihood (statsmodels SARIMAX on the
    # differenced series, stationary start), its point is lower: an optimiser that stopped
    # short, not a different model. It was compared with statsmodels' own stopping point;
    # both stopping points move between machines, so it is compared with the reference
    # optimum (portable), and the stopped-short case is checked whenever it occurs.
    sf, best = airline_fits["statsforecast"], airline_optimum.params
    w = difference(log_airline, AIRLINE)
    score = {
        name: _exact_loglike_of_differenced(
            w, [p["ma_lag1"], p["sma_lag12"]], (0, 0, 1), (0, 0, 1, 12), p["sigma2"]
        )
        for name, p in (("statsforecast", sf.params), ("optimum", best))
    }
    # A property of an optimum: no estimate scores higher (the reference fit ends within
    # 1e-13 of it; the two exact likelihoods agree to ~1e-10).
    assert score["statsforecast"] <= score["optimum"] + 1e-8
    gap = max(abs(sf.params[name] - best[name]) for name in ("ma_lag1", "sma_lag12"))
    if gap > 0.01:  # the measured case: farther than the tolerance, so lower and flagged
        assert score["statsforecast"] < score["optimum"]
        assert sf.converged is False and sf.optimizer["code"] != 0
    assert sf.params["ma_lag1"] == pytest.approx(best["ma_lag1"], abs=0.05)
    assert sf.params["sma_lag12"] == pytest.approx(best["sma_lag12"], abs=0.05)


# ---------------------------------------------------------------------- Nile, local level


def test_nile_matches_the_local_level_ml_values(nile_fits):
    # Durbin & Koopman, Time Series Analysis by State Space Methods, 2nd ed. (2012), section
    # 2.10: Nile local level ML estimates sigma2_eps = 15099, sigma2_eta = 1469.1.
    # Closed form: the local level y_t = a_t + eps_t, a_t = a_{t-1} + eta_t has
    # dy_t = eta_t + eps_t - eps_{t-1}, with gamma_0 = sigma2_eta + 2 sigma2_eps and
    # gamma_1 = -sigma2_eps. An MA(1) u_t = a_t + ma a_{t-1} has gamma_0 = sigma2 (1 + ma^2),
    # gamma_1 = sigma2 ma. Equating gamma_1/gamma_0: ma/(1 + ma^2) = -1/(q + 2),
    # q = sigma2_eta/sigma2_eps, so ma^2 + (q + 2) ma + 1 = 0 with invertible root
    # ma = (sqrt(q^2 + 4q) - 2 - q)/2, and sigma2 = gamma_1/ma = -sigma2_eps/ma.
    sigma2_eps, sigma2_eta = 15099.0, 1469.1
    q = sigma2_eta / sigma2_eps
    ma = (math.sqrt(q * q + 4 * q) - 2 - q) / 2
    sigma2 = -sigma2_eps / ma
    assert ma == pytest.approx(-0.73295, abs=1e-5)
    assert sigma2 == pytest.approx(20600, rel=1e-3)
    assert ma**2 + (q + 2) * ma + 1 == pytest.approx(0.0, abs=1e-12)
    # The published variances have five significant figures, and the estimator's optimum
    # sits ~1e-4 from the exact one: 2e-3 on ma and 1% on sigma2.
    for key in STATESPACE:
        params = nile_fits[key].params
        assert params["ma_lag1"] == pytest.approx(ma, abs=2e-3), key
        assert params["sigma2"] == pytest.approx(sigma2, rel=0.01), key


def test_nile_statsforecast_is_either_there_or_says_it_stopped(nile_fits, nile):
    # Measured with statsforecast 2.1.1: ma_lag1 = -0.7534 with scipy status 2 (precision
    # loss), 0.02 from the ML value. An estimate outside the 2e-3 tolerance must come with
    # a lower exact log-likelihood (re-scored by statsmodels) and a non-converged flag.
    sf, sm = nile_fits["statsforecast"], nile_fits["statsmodels-arima"]
    assert sf.status == "ok"
    gap = abs(sf.params["ma_lag1"] - sm.params["ma_lag1"])
    if gap > 2e-3:
        w = np.diff(nile)
        ll = {
            name: _exact_loglike_of_differenced(
                w, [e.params["ma_lag1"]], (0, 0, 1), (0, 0, 0, 0), e.params["sigma2"]
            )
            for name, e in (("statsforecast", sf), ("statsmodels", sm))
        }
        assert ll["statsforecast"] < ll["statsmodels"]
        assert sf.converged is False
        assert sf.optimizer["code"] != 0 and sf.optimizer["message"]
    assert gap < 0.05


# ---------------------------------------------------------------------- signs


def test_signs_of_ar_and_ma_by_simulation():
    # ARMA(1,1) with ar_lag1 = 0.6, ma_lag1 = +0.4 in our convention, simulated with
    # statsmodels ArmaProcess (general-purpose library; ar=[1, -0.6], ma=[1, 0.4]), seeded.
    # Sampling tolerance 0.15 on n = 500 (about three standard errors; asymptotic standard
    # errors of ARMA(1,1) estimates recalled from memory): enough to catch a flipped sign.
    from statsmodels.tsa.arima_process import ArmaProcess

    y = ArmaProcess([1.0, -0.6], [1.0, 0.4]).generate_sample(
        500, distrvs=np.random.default_rng(11).standard_normal
    )
    for key, estimate in _fit_all(y, ModelSpec((1, 0, 1))).items():
        assert estimate.status == "ok", key
        assert estimate.params["ar_lag1"] == pytest.approx(0.6, abs=0.15), key
        assert estimate.params["ma_lag1"] == pytest.approx(0.4, abs=0.15), key


# ---------------------------------------------------------------------- constants


def test_ar1_mean_agrees_and_is_the_simulated_mean(ar1_mean10):
    y, truth = ar1_mean10
    spec = ModelSpec((1, 0, 0), mean=True)
    fits = _fit_all(y, spec)
    mus = {key: e.params["mu"] for key, e in fits.items() if e.ok}
    assert set(mus) == set(available_estimators())  # every estimator fits a mean at d+D=0
    assert max(mus.values()) - min(mus.values()) < 0.05
    # Sampling tolerance: the sample mean of an AR(1) has asymptotic variance
    # sigma2 / ((1 - phi)^2 n) (long-run variance; Hamilton 1994, section 7.2, recalled from
    # memory): SE = 1 / (0.4 sqrt(300)) = 0.144; three standard errors.
    se = math.sqrt(truth["sigma2"]) / ((1 - truth["ar_lag1"]) * math.sqrt(truth["n"]))
    for key, mu in mus.items():
        assert mu == pytest.approx(truth["mu"], abs=3 * se), key
        assert mu == pytest.approx(float(np.mean(y)), abs=0.05), key
    # The conversions behind mu, from each library's own number:
    sarimax = fits["statsmodels-sarimax"]
    c, phi = sarimax.native_params["intercept"], sarimax.native_params["ar.L1"]
    assert sarimax.params["mu"] == pytest.approx(c / (1 - phi), rel=1e-12)  # mu = c / phi(1)
    assert (
        fits["statsmodels-arima"].params["mu"] == fits["statsmodels-arima"].native_params["const"]
    )
    assert fits["statsforecast"].params["mu"] == fits["statsforecast"].native_params["intercept"]
    for key in ("pmdarima", "sktime"):
        native = fits[key].native_params
        assert fits[key].params["mu"] == pytest.approx(
            native["intercept"] / (1 - native["ar.L1"]), rel=1e-12
        )


@pytest.mark.parametrize("order", [(0, 1, 0), (1, 1, 0)])
def test_drift_is_mu_and_consistent(random_walk_drift, order):
    y, truth = random_walk_drift
    spec = ModelSpec(order, mean=True)
    fits = _fit_all(y, spec)
    assert all(e.ok for e in fits.values())
    mus = {key: e.params["mu"] for key, e in fits.items()}
    # Consistency across estimators: 0.05 x drift.
    assert max(mus.values()) - min(mus.values()) < 0.05 * truth["drift"]
    # Sampling tolerance for the drift of a random walk: SE = sigma / sqrt(n - 1) = 0.058;
    # three standard errors (closed form for the mean of i.i.d. increments).
    for key, mu in mus.items():
        assert mu == pytest.approx(truth["drift"], abs=3 / math.sqrt(truth["n"] - 1)), key
    if order == (0, 1, 0):
        # Closed form: for ARIMA(0,1,0) the ML drift is the mean of the differences,
        # (y_n - y_1) / (n - 1). Tolerance for optimiser stopping, from statsmodels' default
        # L-BFGS criterion: it may stop once a step improves -llf/n (1.43 here) by less than
        # factr * eps = 2.2e-9 relative, 3.2e-9 absolute, which with the curvature 1/sigma2
        # (about 1) in mu allows a drift error up to sqrt(2 * 3.2e-9) = 8e-5. 5e-4 is six times
        # that and 0.01 of the drift's standard error (0.058); measured here: 5e-6.
        closed = (y[-1] - y[0]) / (len(y) - 1)
        for key, mu in mus.items():
            assert mu == pytest.approx(closed, abs=5e-4), key
    # Native names and their conversions with d = 1 (trend scale 1): statsforecast's drift
    # and statsmodels-arima's x1 are the slope per period, equal to mu.
    assert trend_scale(spec) == 1.0
    assert fits["statsforecast"].params["mu"] == fits["statsforecast"].native_params["drift"]
    assert fits["statsmodels-arima"].params["mu"] == fits["statsmodels-arima"].native_params["x1"]


def test_seasonal_drift_is_m_times_the_slope():
    # d = 0, D = 1, m = 4: mu (the mean of y_t - y_{t-4}) is 4 x the slope per period.
    # Seeded: y_t = 0.5 t + a fixed quarterly pattern + AR(1) noise (phi 0.5), n = 200.
    rng = np.random.default_rng(5)
    n = 200
    e = rng.standard_normal(n)
    x = np.zeros(n)
    for i in range(1, n):
        x[i] = 0.5 * x[i - 1] + e[i]
    y = 0.5 * np.arange(n) + np.tile([3.0, -1.0, 0.0, -2.0], n // 4) + x
    spec = ModelSpec((1, 0, 0), (0, 1, 0), 4, mean=True)
    fits = _fit_all(y, spec)
    assert trend_scale(spec) == 4.0
    assert fits["statsforecast"].params["mu"] == pytest.approx(
        4 * fits["statsforecast"].native_params["drift"], rel=1e-14
    )
    assert fits["statsmodels-arima"].params["mu"] == pytest.approx(
        4 * fits["statsmodels-arima"].native_params["x1"], rel=1e-14
    )
    mus = [e.params["mu"] for e in fits.values()]
    assert max(mus) - min(mus) < 0.05 * 2.0  # 0.05 x mu, with mu = 4 x 0.5 = 2
    for mu in mus:
        # Seasonal difference of 0.5 t is exactly 2; sampling tolerance 0.3 (about three
        # standard errors of a mean of 196 AR-differenced values, common practice, no source).
        assert mu == pytest.approx(2.0, abs=0.3)


def test_no_constant_is_added_without_a_mean(airline_fits):
    # pmdarima and sktime add an intercept by default (with_intercept=True); without a mean
    # in the spec the adapters must switch it off and record the overridden default.
    for key in ("pmdarima", "sktime"):
        estimate = airline_fits[key]
        assert estimate.overridden_defaults == {"with_intercept": True}, key
        assert estimate.options[key]["with_intercept"] is False, key
        assert "intercept" not in estimate.native_params, key
        assert not any(name.startswith("extra:") for name in estimate.params), key
        assert estimate.fitted_model is None, key
    for key in ("statsmodels-sarimax", "statsmodels-arima", "statsforecast"):
        assert airline_fits[key].fitted_model is None
        assert not set(airline_fits[key].native_params) & {"intercept", "const", "drift"}


def test_default_constants_without_differencing_are_overridden(ar1_mean10):
    # tsa.arima ARIMA adds a constant by default when d + D = 0.
    estimate = get_adapter("statsmodels-arima").fit(ar1_mean10.values, ModelSpec((1, 0, 0)))
    assert estimate.overridden_defaults == {"trend": "c"}
    assert "const" not in estimate.native_params
    # statsforecast's include_mean defaults to True, which applies when d + D = 0.
    sf = get_adapter("statsforecast").fit(ar1_mean10.values, ModelSpec((1, 0, 0)))
    assert sf.overridden_defaults == {"include_mean": True}
    assert sf.options["statsforecast"]["include_mean"] is False and list(sf.native_params) == [
        "ar1"
    ]


# ---------------------------------------------------------------------- sigma2 and criteria


def test_statsforecast_sigma2_is_converted_to_ml(airline_fits):
    estimate = airline_fits["statsforecast"]
    n_w, n_coef = 131, 2
    # ML = reported x (n_w - n_coef) / n_w (divisor measured in statsforecast 2.1).
    assert estimate.params["sigma2"] == pytest.approx(
        estimate.sigma2_reported * (n_w - n_coef) / n_w, rel=1e-13
    )
    # Reported value from estimator-facts.md: 0.00136941. It is SSR / (n_w - 2) at the point
    # where statsforecast's BFGS stopped (scipy status 2, precision loss), and that point is
    # not portable. Between that point and the exact optimum the same definition moves by
    # 3e-4 relative (0.00136900 at the optimum, measured), so 1e-3 holds wherever it stops
    # in between and still tells it from the ML value 0.00134795 (1.6% lower).
    assert estimate.sigma2_reported == pytest.approx(0.00136941, rel=1e-3)
    # Independent of the divisor: the library's own residuals give SSR / n_w.
    residuals = np.asarray(estimate.native.model_["residuals"], dtype=float)
    assert estimate.params["sigma2"] == pytest.approx(np.nansum(residuals**2) / n_w, rel=1e-10)
    assert "degrees-of-freedom adjusted" in estimate.sigma2_definition
    # statsmodels reports the ML value directly.
    sarimax = airline_fits["statsmodels-sarimax"]
    assert sarimax.sigma2_reported == sarimax.params["sigma2"]


def test_criteria_native_and_canonical(airline_fits, log_airline):
    n_w, k = len(log_airline) - 13, 3
    for key, estimate in airline_fits.items():
        expected = information_criteria(estimate.loglike_native, k, n_w)
        for name in ("aic", "aicc", "bic"):
            assert estimate.criteria[name] == pytest.approx(expected[name], rel=1e-13), key
        assert estimate.criteria["aic"] == pytest.approx(
            -2 * estimate.loglike_native + 2 * k, rel=1e-13
        )
        # Every library counts n_w = 131 and k = 3 in aic and bic ...
        assert estimate.criteria_native["aic"] == pytest.approx(expected["aic"], rel=1e-10), key
        assert estimate.criteria_native["bic"] == pytest.approx(expected["bic"], rel=1e-10), key
    # ... and all but pmdarima in aicc: pmdarima's aicc() uses n = len(y) = 144
    # (estimator-facts.md: -483.2215 against -483.2040 on this model).
    pm = airline_fits["pmdarima"]
    n = len(log_airline)
    assert pm.criteria_native["aicc"] == pytest.approx(
        pm.criteria_native["aic"] + 2 * k * (k + 1) / (n - k - 1), rel=1e-12
    )
    # Closed form, whatever the log-likelihood: the two n differ by
    # 2k(k+1) (1/(144-k-1) - 1/(131-k-1)) = -0.0175478.
    assert pm.criteria_native["aicc"] - pm.criteria["aicc"] == pytest.approx(
        2 * k * (k + 1) * (1 / (n - k - 1) - 1 / (n_w - k - 1)), rel=1e-9
    )
    assert 2 * k * (k + 1) * (1 / (n - k - 1) - 1 / (n_w - k - 1)) == pytest.approx(
        -0.0175478, abs=1e-7
    )
    for key in ("statsmodels-sarimax", "statsmodels-arima", "sktime", "statsforecast"):
        estimate = airline_fits[key]
        assert estimate.criteria_native["aicc"] == pytest.approx(
            estimate.criteria["aicc"], rel=1e-10
        ), key


def test_statsmodels_loglike_at_fixed_parameters_and_at_its_stop(
    airline_fits, airline_optimum, log_airline
):
    # The default fit's log-likelihood was asserted to 1e-6 (244.6964851, estimator-facts.md)
    # until another CPU stopped at 244.69647978: where L-BFGS stops is not portable (see
    # STOPPING_SLACK). Portable instead: statsmodels' own likelihood at fixed parameters, its
    # value at the reference optimum, and where the fit stopped relative to that optimum.
    fixed = {"ma_lag1": -0.4018, "sma_lag12": -0.5569, "sigma2": 0.001348}
    at_fixed = _statsmodels_own_loglike(log_airline, fixed)
    # Measured with statsmodels 0.15 (a regression value; no optimiser involved).
    assert at_fixed == pytest.approx(244.6964861342, abs=1e-8)
    # Independent: the exact Gaussian likelihood of the differenced series at the same
    # parameters (statsmodels SARIMAX on w, stationary start, equal to the dense
    # multivariate-normal density; check-values.md) differs only by the approximate diffuse
    # prior, about 1e-6 (estimator-facts.md: 244.6964851 against 244.6964844).
    w = difference(log_airline, AIRLINE)
    exact = _exact_loglike_of_differenced(
        w, [fixed["ma_lag1"], fixed["sma_lag12"]], (0, 0, 1), (0, 0, 1, 12), fixed["sigma2"]
    )
    assert exact == pytest.approx(244.6964864541, abs=1e-8)  # measured, statsmodels 0.15
    assert at_fixed == pytest.approx(exact, abs=1e-5)
    # At the reference optimum (portable to 2e-8 in the coefficients, where the likelihood is
    # flat to first order): statsmodels' own optimum value, and pmdarima's and the canonical
    # AICc there are the values of estimator-facts.md (-483.2215 and -483.2040, four
    # decimals).
    best = _statsmodels_own_loglike(log_airline, airline_optimum.params)
    assert best == pytest.approx(244.6964873, abs=1e-6)  # measured, statsmodels 0.15
    k, n, n_w = 3, len(log_airline), len(log_airline) - 13
    assert -2 * best + 2 * k + 2 * k * (k + 1) / (n - k - 1) == pytest.approx(-483.2215, abs=1e-4)
    assert information_criteria(best, k, n_w)["aicc"] == pytest.approx(-483.2040, abs=1e-4)
    for key in STATESPACE:
        estimate = airline_fits[key]
        # What the adapter reports is the library's likelihood at the estimate it reports.
        assert estimate.loglike_native == pytest.approx(
            _statsmodels_own_loglike(log_airline, estimate.params), rel=1e-12
        ), key
        # A property of an optimum: no estimate is above it (1e-6: diffuse prior, above).
        assert estimate.loglike_native <= best + 1e-6, key
        # Where it stopped: 2e-6 below the optimum here, 8e-6 on the other CPU, at most 0.011
        # in 300 perturbed runs (STOPPING_SLACK); 0.05 is five times the audit's default
        # loglike tolerance, so a fit beyond it is far outside anything measured.
        assert estimate.loglike_native > best - 0.05, key
    sarimax = airline_fits["statsmodels-sarimax"]
    assert (sarimax.n_used_native, sarimax.k_counted_native) == (131, 3)


# ---------------------------------------------------------------------- status handling


def test_unsupported_mean_with_two_differences(log_airline):
    spec = ModelSpec((0, 1, 1), (0, 1, 1), 12, mean=True)
    estimate = get_adapter("statsforecast").fit(log_airline, spec)
    assert estimate.status == "unsupported"
    assert "d + D = 2" in estimate.reason and "[0, 1]" in estimate.reason
    assert estimate.params == {} and estimate.seconds == 0.0 and estimate.native is None


def test_missing_package_is_unavailable(monkeypatch, log_airline):
    monkeypatch.setattr(StatsforecastArima, "module", "forecastaudit_no_such_module")
    monkeypatch.setattr(StatsforecastArima, "package", "forecastaudit-no-such-package")
    estimate = get_adapter("statsforecast").fit(log_airline, AIRLINE)
    assert estimate.status == "unavailable"
    assert estimate.reason.startswith(
        "forecastaudit_no_such_module could not be imported (ModuleNotFoundError"
    )
    assert estimate.version is None and estimate.params == {}


def test_unavailable_through_availability(monkeypatch, log_airline):
    monkeypatch.setattr(
        StatsforecastArima, "availability", classmethod(lambda cls: "not installed here")
    )
    estimate = get_adapter("statsforecast").fit(log_airline, AIRLINE)
    assert (estimate.status, estimate.reason) == ("unavailable", "not installed here")


def test_library_exception_is_a_failed_estimate(log_airline, monkeypatch):
    # The library's own error, raised inside its fit, becomes a failed estimate.
    import statsforecast.models

    def refuse(self, y, X=None):
        raise ValueError("Not enough data to fit the model")

    monkeypatch.setattr(statsforecast.models.ARIMA, "fit", refuse)
    estimate = get_adapter("statsforecast").fit(log_airline, AIRLINE)
    assert estimate.status == "failed"
    assert estimate.reason == "ValueError: Not enough data to fit the model"
    assert "Traceback" in estimate.output and "Not enough data" in estimate.output
    assert estimate.params == {}


def test_series_shorter_than_the_differencing_is_refused_before_the_library(log_airline):
    estimate = get_adapter("statsforecast").fit(log_airline[:10], AIRLINE)
    assert estimate.status == "failed"
    assert "no longer than the 13 used up by differencing" in estimate.reason


def test_printed_output_is_captured(log_airline, capsys):
    class Noisy(StatsforecastArima):  # not registered: a local variant for this test only
        def _fit(self, request):
            print("fitting now")
            return super()._fit(request)

    fitted = Noisy().fit(log_airline, AIRLINE)
    assert fitted.status == "ok" and fitted.output == "fitting now"
    assert capsys.readouterr().out == ""


def test_warnings_are_captured_and_not_emitted():
    # A constant series: statsmodels' optimiser cannot converge and says so
    # (ConvergenceWarning, estimator-facts.md); sktime adds its own FutureWarning.
    y = np.ones(60)  # measured: ConvergenceWarning at this level (not at every constant)
    spec = ModelSpec((1, 0, 0), mean=True)
    with warnings.catch_warnings(record=True) as escaped:
        warnings.simplefilter("always")
        fits = _fit_all(y, spec, ["statsmodels-sarimax", "sktime"])
    assert escaped == []
    for key, estimate in fits.items():
        categories = {w.category for w in estimate.warnings}
        assert "ConvergenceWarning" in categories, key
        assert all(w.message and w.source for w in estimate.warnings)
    sarimax = fits["statsmodels-sarimax"].warnings
    assert any("failed to converge" in w.message for w in sarimax)
    assert fits["statsmodels-sarimax"].to_dict()["warnings"][0]["category"] == (
        "ConvergenceWarning"
    )


def test_series_no_longer_than_the_differencing_does_not_crash(log_airline):
    estimate = get_adapter("statsmodels-sarimax").fit(log_airline[:13], AIRLINE)
    assert estimate.status in {"ok", "failed"}
    assert math.isnan(estimate.criteria.get("bic", math.nan))
