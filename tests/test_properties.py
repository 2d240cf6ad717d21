"""Properties that hold for any input (hypothesis), not only for the examples in other files.

* Conventions round trip: every conversion has an inverse that gives the value back.
* An estimate audited against itself passes: an estimator whose estimate is the reference
  optimum has no finding beyond information about it.
* The order of the estimators never changes the findings.
* Scaling the series by c scales mu by c and sigma2 by c**2 and leaves the ARMA
  coefficients as they are: exactly for the likelihood at given parameters (a closed form:
  the Gaussian density of c w at (c mu, c**2 sigma2) is that of w less n_w log c), and, for
  the optimum, within the optimiser's own convergence.

Example counts are small: each reference fit takes tens of milliseconds.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from forecastaudit import conventions, reference
from forecastaudit.diagnosis.diagnose import CAUSE_KINDS, diagnose, merge_wrapper_findings
from forecastaudit.diagnosis.rescore import Rescore
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import Estimate
from forecastaudit.spec import ModelSpec

FEW = settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _arma_series(seed: int, n: int, ar: float, ma: float, mu: float) -> np.ndarray:
    """A seeded ARMA(1,1) with mean mu, started from its stationary distribution's scale."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(n + 100)
    x = np.zeros(n + 100)
    for t in range(1, n + 100):
        x[t] = ar * x[t - 1] + e[t] + ma * e[t - 1]
    return mu + x[100:]


# ---------------------------------------------------------------------- conventions
coefficient = st.floats(-0.95, 0.95, allow_nan=False)


@FEW
@given(c=st.floats(-1e3, 1e3), a1=coefficient, s1=coefficient, d=st.integers(0, 1))
def test_intercept_and_mean_round_trip(c: float, a1: float, s1: float, d: int) -> None:
    spec = ModelSpec((1, d, 0), (1, 0, 0), period=4, mean=True)
    params = {"ar_lag1": a1, "sar_lag4": s1}
    mu = conventions.intercept_to_mean(c, spec, params)
    assert conventions.mean_to_intercept(mu, spec, params) == pytest.approx(c, rel=1e-12, abs=1e-9)


@FEW
@given(theta=st.lists(st.floats(-10, 10, allow_nan=False), min_size=1, max_size=4))
def test_box_jenkins_ma_sign_round_trip(theta: list[float]) -> None:
    canonical = conventions.box_jenkins_ma_to_canonical(theta)
    back = conventions.canonical_ma_to_box_jenkins(canonical)
    np.testing.assert_array_equal(back, theta)


@FEW
@given(s=st.floats(1e-6, 1e6), n=st.integers(5, 5_000), k=st.integers(0, 4))
def test_sigma2_definitions_round_trip(s: float, n: int, k: int) -> None:
    adjusted = conventions.ml_to_df_adjusted_sigma2(s, n, k)
    assert conventions.df_adjusted_to_ml_sigma2(adjusted, n, k) == pytest.approx(s, rel=1e-12)


@FEW
@given(
    p=st.integers(0, 2),
    q=st.integers(0, 2),
    values=st.lists(st.floats(-0.9, 0.9), min_size=6, max_size=6),
    mu=st.floats(-100, 100),
    sigma2=st.floats(1e-4, 1e4),
)
def test_estimate_round_trips_through_its_dict(
    p: int, q: int, values: list[float], mu: float, sigma2: float
) -> None:
    spec = ModelSpec((p, 0, q), (1, 0, 0), period=12, mean=True)
    names = conventions.coefficient_names(spec)
    params = {name: v for name, v in zip(names, values, strict=False) if name != "mu"}
    params |= {"mu": mu, "sigma2": sigma2}
    estimate = _estimate("e", "engine", spec, params)
    back = Estimate.from_dict(estimate.to_dict())
    assert back.params == estimate.params
    assert back.spec == estimate.spec
    assert back.to_dict() == estimate.to_dict()


# ---------------------------------------------------------------------- the diagnosis
SPEC = ModelSpec((1, 0, 1), mean=True)


def _estimate(key: str, engine: str, spec: ModelSpec, params: dict[str, float]) -> Estimate:
    return Estimate(
        key=key,
        engine=engine,
        package=key,
        version="0",
        status="ok",
        spec=spec,
        params=dict(params),
        sigma2_reported=params["sigma2"],
        loglike_native=0.0,
        n_w=100,
        k=len(params),
        converged=True,
    )


def _reference_and_rescores(y: np.ndarray, spec: ModelSpec, estimates: dict[str, Estimate]):
    fit = reference.fit_reference(y, spec, {k: e.params for k, e in estimates.items()})
    ref = _estimate("reference", "forecastaudit-reference", spec, fit.params)
    scored = {k: reference.evaluate(y, spec, e.params) for k, e in estimates.items()}
    scored["reference"] = reference.evaluate(y, spec, fit.params)
    best = max(s.profiled_loglike for s in scored.values())
    rescores = {
        k: Rescore(s.loglike, s.profiled_loglike, best - s.profiled_loglike)
        for k, s in scored.items()
    }
    return fit, ref, rescores


@FEW
@given(
    seed=st.integers(0, 10_000),
    n=st.integers(80, 200),
    ar=st.floats(-0.7, 0.7),
    ma=st.floats(-0.6, 0.6),
)
def test_an_estimate_audited_against_itself_passes(seed: int, n: int, ar: float, ma: float):
    y = _arma_series(seed, n, ar, ma, mu=10.0)
    first = reference.fit_reference(y, SPEC)
    # The estimator reports exactly the reference optimum: nothing may be said against it.
    estimates = {"self": _estimate("self", "engine-a", SPEC, first.params)}
    fit, ref, rescores = _reference_and_rescores(y, SPEC, estimates)
    findings = diagnose(
        SPEC, estimates, rescores, ref, fit.standard_errors, Tolerances(), production="self"
    )
    against_self = [f for f in findings if f.estimator == "self" and f.severity in {"fail", "warn"}]
    assert against_self == [], [str(f) for f in against_self]
    assert not any(f.kind in CAUSE_KINDS for f in findings if f.estimator == "self")
    assert not any(f.severity == "fail" for f in findings)


@FEW
@given(
    seed=st.integers(0, 10_000),
    shifts=st.lists(st.floats(-0.3, 0.3), min_size=4, max_size=4),
    data=st.data(),
)
def test_the_order_of_the_estimators_never_changes_the_findings(
    seed: int, shifts: list[float], data: st.DataObject
) -> None:
    y = _arma_series(seed, 120, 0.5, 0.3, mu=5.0)
    best = reference.fit_reference(y, SPEC).params
    # Four estimators, two of them wrappers of one engine, at points around the optimum.
    engines = {"a": "one", "b": "one", "c": "two", "d": "three"}
    estimates = {
        key: _estimate(
            key,
            engine,
            SPEC,
            {**best, "ar_lag1": best["ar_lag1"] + shift * 0.2, "ma_lag1": best["ma_lag1"]},
        )
        for (key, engine), shift in zip(engines.items(), shifts, strict=True)
    }
    fit, ref, rescores = _reference_and_rescores(y, SPEC, estimates)

    def findings_for(order: list[str]) -> list[str]:
        chosen = {k: estimates[k] for k in order}
        found = diagnose(
            SPEC,
            chosen,
            {**{k: rescores[k] for k in order}, "reference": rescores["reference"]},
            ref,
            fit.standard_errors,
            Tolerances(),
            production="a",
        )
        merged = merge_wrapper_findings(found, chosen)
        return sorted(
            f"{f.kind}|{f.severity}|{f.estimator}|{sorted(f.estimators)}|{f.message}"
            for f in merged
        )

    order = data.draw(st.permutations(list(engines)))
    assert findings_for(order) == findings_for(list(engines))


# ---------------------------------------------------------------------- scaling the series
@FEW
@given(
    seed=st.integers(0, 10_000),
    exponent=st.integers(-6, 6),
    mantissa=st.floats(1.0, 9.99),
    ar=st.floats(-0.7, 0.7),
    ma=st.floats(-0.6, 0.6),
)
def test_likelihood_at_scaled_parameters_is_the_closed_form(
    seed: int, exponent: int, mantissa: float, ar: float, ma: float
) -> None:
    """At fixed parameters: l(c y; c mu, c^2 sigma2, same ARMA) = l(y; mu, sigma2) - n_w ln c."""
    c = mantissa * 10.0**exponent
    y = _arma_series(seed, 100, ar, ma, mu=3.0)
    params = {"ar_lag1": ar, "ma_lag1": ma, "mu": 3.0, "sigma2": 1.0}
    scaled = {**params, "mu": c * 3.0, "sigma2": c**2}
    at_y = reference.evaluate(y, SPEC, params)
    at_cy = reference.evaluate(c * y, SPEC, scaled)
    n_w = y.size
    assert at_cy.loglike == pytest.approx(at_y.loglike - n_w * math.log(c), rel=1e-10, abs=1e-8)
    assert at_cy.profiled_loglike == pytest.approx(
        at_y.profiled_loglike - n_w * math.log(c), rel=1e-10, abs=1e-8
    )


@FEW
@given(
    seed=st.integers(0, 10_000),
    exponent=st.integers(-4, 4),
    ar=st.floats(-0.7, 0.7),
    ma=st.floats(-0.5, 0.5),
)
def test_scaling_the_series_scales_mu_and_sigma2_only(
    seed: int, exponent: int, ar: float, ma: float
) -> None:
    """The optima on y and on c y correspond: asserted on the likelihood (each optimum is
    at least as good as the other one mapped across, within the optimiser's convergence)
    and on the coefficients within a small fraction of their standard errors."""
    c = 10.0**exponent
    y = _arma_series(seed, 150, ar, ma, mu=20.0)
    on_y = reference.fit_reference(y, SPEC)
    on_cy = reference.fit_reference(c * y, SPEC)
    n_w = y.size
    # The fit's own tolerance is on the profiled log-likelihood per observation (L-BFGS-B
    # ftol, scaled by n); 1e-6 per observation is looser than it, and far tighter than any
    # difference the audit reports.
    slack = 1e-6 * n_w
    mapped = {**on_y.params, "mu": c * on_y.params["mu"], "sigma2": c**2 * on_y.params["sigma2"]}
    assert (
        on_cy.profiled_loglike >= reference.evaluate(c * y, SPEC, mapped).profiled_loglike - slack
    )
    assert on_y.profiled_loglike + 0.0 == pytest.approx(
        on_cy.profiled_loglike + n_w * math.log(c), abs=slack
    )
    for name in ("ar_lag1", "ma_lag1"):
        se = on_y.standard_errors[name]
        assert abs(on_cy.params[name] - on_y.params[name]) <= 0.05 * se + 1e-6, name
    assert on_cy.params["mu"] / c == pytest.approx(
        on_y.params["mu"], rel=1e-3, abs=0.05 * on_y.standard_errors["mu"]
    )
    assert on_cy.params["sigma2"] / c**2 == pytest.approx(on_y.params["sigma2"], rel=1e-3)
