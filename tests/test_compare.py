"""Diagnosis of disagreements, on constructed estimates (no fitting).

These check the decision rules of ``compare.diagnose`` on hand-made numbers; the checks of
the whole audit against published values are in ``test_audit.py``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from forecastaudit.diagnosis.diagnose import OwnObjective, diagnose
from forecastaudit.diagnosis.rescore import Rescore
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import CapturedWarning, Estimate
from forecastaudit.layout import polynomial_roots
from forecastaudit.spec import ModelSpec

SPEC = ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12)
BEST = {"ma_lag1": -0.40, "sma_lag12": -0.56, "sigma2": 0.00135}
SE = {"ma_lag1": 0.09, "sma_lag12": 0.07, "sigma2": 0.00017}


def _estimate(key: str, engine: str, params: dict[str, float], **kw: object) -> Estimate:
    defaults: dict[str, object] = {
        "package": key,
        "version": "0",
        "status": "ok",
        "spec": SPEC,
        "params": dict(params),
        "sigma2_reported": params["sigma2"],
        "sigma2_definition": "maximum likelihood (a parameter of the fit)",
        "loglike_native": 244.70,
        "n_used_native": 131,
        "k_counted_native": 3,
        "criteria_native": {},
        "n_w": 131,
        "k": 3,
        "converged": True,
    }
    defaults.update(kw)
    return Estimate(key=key, engine=engine, **defaults)  # type: ignore[arg-type]


def _reference() -> Estimate:
    return _estimate("reference", "forecastaudit-reference", BEST)


def _run(
    estimates: dict[str, Estimate], rescores: dict[str, Rescore], tol: Tolerances | None = None
):
    return diagnose(SPEC, estimates, rescores, _reference(), SE, tol or Tolerances())


def _kinds(findings, estimator=None):
    return {(f.kind, f.severity) for f in findings if estimator is None or f.estimator == estimator}


def test_agreeing_independent_engines_pass():
    estimates = {
        "a": _estimate("a", "engine-1", BEST),
        "b": _estimate("b", "engine-2", {**BEST, "ma_lag1": -0.4005}),
    }
    rescores = {k: Rescore(244.70, 244.70, 0.0) for k in estimates}
    findings = _run(estimates, rescores)
    assert not [f for f in findings if f.severity == "fail"]
    count = next(f for f in findings if f.kind == "engine-count")
    # The reference counts as one independent engine (documented policy).
    assert count.values["agreeing"] == ["engine-1", "engine-2", "forecastaudit-reference"]


def test_wrappers_of_one_engine_count_once():
    estimates = {
        "a": _estimate("a", "engine-1", BEST),
        "b": _estimate("b", "engine-1", BEST),
    }
    rescores = {k: Rescore(244.70, 244.70, 0.0) for k in estimates}
    findings = _run(estimates, rescores, Tolerances(min_independent_engines=3))
    count = next(f for f in findings if f.kind == "engine-count")
    assert count.severity == "fail"
    assert count.values["agreeing"] == ["engine-1", "forecastaudit-reference"]


def test_stopped_short_is_named_with_its_gap():
    short = {"ma_lag1": -0.377, "sma_lag12": -0.572, "sigma2": 0.001349}
    estimates = {
        "a": _estimate("a", "engine-1", BEST),
        "b": _estimate("b", "engine-2", short, converged=False, optimizer={"code": 2}),
    }
    rescores = {"a": Rescore(244.70, 244.70, 0.0), "b": Rescore(244.64, 244.65, 0.05)}
    # Under its own likelihood the optimum is better than its estimate: its optimiser
    # stopped short of its own objective.
    own = {"b": OwnObjective(at_estimate=250.0, at_reference=250.05)}
    findings = diagnose(SPEC, estimates, rescores, _reference(), SE, Tolerances(), own=own)
    kinds = _kinds(findings, "b")
    assert ("stopped-short", "fail") in kinds
    assert ("not-converged", "warn") in kinds
    stopped = next(f for f in findings if f.kind == "stopped-short")
    assert stopped.values["gap"] == pytest.approx(0.05)
    # 0.023 / 0.09 standard errors, beyond the default tenth of a standard error
    assert stopped.values["differences"]["ma_lag1"]["in_standard_errors"] == pytest.approx(
        0.023 / 0.09
    )


def test_equal_likelihood_different_parameters_is_a_flat_direction():
    moved = {**BEST, "ma_lag1": -0.45}
    estimates = {"a": _estimate("a", "engine-1", BEST), "b": _estimate("b", "engine-2", moved)}
    rescores = {"a": Rescore(244.70, 244.70, 0.0), "b": Rescore(244.70, 244.698, 0.002)}
    findings = _run(estimates, rescores)
    assert ("flat-likelihood", "warn") in _kinds(findings, "b")
    assert ("stopped-short", "fail") not in _kinds(findings, "b")


def test_far_estimate_with_a_large_gap_is_not_flat():
    """Ten standard errors away in each coefficient with a gap of 20 units: the curvature at
    the optimum predicts 100, so the quadratic test alone would call it flat; but 20 units
    is far outside the 95% likelihood-ratio region (3.0 units for two coefficients), so the
    data do decide, and the own likelihood names the cause: the optimiser stopped short."""
    far = {"ma_lag1": -0.40 + 10 * 0.09, "sma_lag12": -0.56 + 10 * 0.07, "sigma2": 0.0016}
    estimates = {
        "a": _estimate("a", "engine-1", BEST),
        "b": _estimate("b", "engine-2", far, converged=False, optimizer={"maxiter": 50}),
    }
    rescores = {"a": Rescore(244.70, 244.70, 0.0), "b": Rescore(224.70, 224.70, 20.0)}
    own = {"b": OwnObjective(at_estimate=230.0, at_reference=250.0)}
    findings = diagnose(SPEC, estimates, rescores, _reference(), SE, Tolerances(), own=own)
    kinds = {kind for kind, _ in _kinds(findings, "b")}
    assert "stopped-short" in kinds and "flat-likelihood" not in kinds
    # Within the region, the same distance with a gap of 2 units stays flat.
    rescores["b"] = Rescore(242.70, 242.70, 2.0)
    findings = diagnose(SPEC, estimates, rescores, _reference(), SE, Tolerances(), own=own)
    assert "flat-likelihood" in {kind for kind, _ in _kinds(findings, "b")}


def test_own_objective_separates_stopping_short_from_another_objective():
    short = {**BEST, "sma_lag12": -0.40}
    estimates = {
        "b": _estimate("b", "engine-2", short, loglike_definition="approximate diffuse prior")
    }
    rescores = {"b": Rescore(240.0, 240.0, 4.0)}
    higher_at_optimum = {"b": OwnObjective(at_estimate=-10.0, at_reference=-6.0)}
    lower_at_optimum = {"b": OwnObjective(at_estimate=-6.0, at_reference=-10.0)}
    for own, kind in (
        (higher_at_optimum, "stopped-short"),
        (lower_at_optimum, "objective-differs"),
    ):
        found = diagnose(SPEC, estimates, rescores, _reference(), SE, Tolerances(), own=own)
        assert kind in {f.kind for f in found if f.estimator == "b"}
    # Without its own likelihood, the audit says it cannot tell.
    found = diagnose(SPEC, estimates, rescores, _reference(), SE, Tolerances())
    assert "short-of-optimum" in {f.kind for f in found if f.estimator == "b"}


def test_tolerance_in_standard_errors_with_absolute_floor():
    tol = Tolerances()
    assert tol.parameter_tolerance(0.09) == pytest.approx(0.009)
    assert tol.parameter_tolerance(0.001) == tol.parameter_atol
    assert tol.parameter_tolerance(math.nan) == tol.parameter_atol


def test_definition_differences_are_explained_not_failed():
    e = _estimate(
        "b",
        "engine-2",
        BEST,
        loglike_native=232.75,
        loglike_definition="exact diffuse initialisation",
        sigma2_reported=0.00136941,
        sigma2_kind="df-adjusted",
        sigma2_definition="SSR / (n_w - 2), degrees-of-freedom adjusted",
        criteria_native={"aicc": -483.2215},
        n_used_native=144,
    )
    estimates = {"a": _estimate("a", "engine-1", BEST), "b": e}
    # pmdarima's aicc() with n = len(y) = 144 against n_w = 131 on the log airline model:
    # -483.2215 against -483.2040 (measured, estimator-facts.md).
    rescores = {"a": Rescore(244.70, 244.70, 0.0), "b": Rescore(244.6964851, 244.6964851, 0.0)}
    findings = _run(estimates, rescores)
    quantities = {f.quantity for f in findings if f.kind == "definition-difference"}
    assert quantities == {"loglike", "criteria", "sigma2"}
    assert all(f.severity == "info" for f in findings if f.kind == "definition-difference")


def test_extra_terms_are_a_different_model():
    e = _estimate(
        "b", "engine-2", BEST, fitted_model="ARIMA(0,1,1)x(0,1,1)12 with extra terms: intercept"
    )
    estimates = {"a": _estimate("a", "engine-1", BEST), "b": e}
    rescores = {k: Rescore(244.70, 244.70, 0.0) for k in estimates}
    findings = _run(estimates, rescores)
    assert ("different-model", "fail") in _kinds(findings, "b")
    count = next(f for f in findings if f.kind == "engine-count")
    assert count.values["agreeing"] == ["engine-1", "forecastaudit-reference"]


def test_status_and_event_findings():
    estimates = {
        "a": _estimate(
            "a", "engine-1", BEST, warnings=[CapturedWarning("UserWarning", "x", "f:1")]
        ),
        "gone": Estimate("gone", "engine-9", "gone", None, "unavailable", reason="not installed"),
        "broken": Estimate("broken", "engine-8", "broken", "1", "failed", reason="ValueError: x"),
    }
    rescores = {"a": Rescore(244.70, 244.70, 0.0)}
    kinds = _kinds(_run(estimates, rescores))
    assert ("unavailable", "info") in kinds
    assert ("fit-failed", "warn") in kinds
    assert ("library-warnings", "info") in kinds


def test_ma_root_near_one_after_differencing_flags_overdifferencing():
    # ma_lag1 = -0.99: theta(B) = 1 - 0.99 B has its root at 1/0.99 = 1.0101, within the
    # default margin of the unit circle (closed form).
    near = {**BEST, "ma_lag1": -0.99}
    reference = _estimate("reference", "forecastaudit-reference", near)
    estimates = {"a": _estimate("a", "engine-1", near)}
    findings = diagnose(SPEC, estimates, {"a": Rescore(1.0, 1.0, 0.0)}, reference, SE, Tolerances())
    kinds = _kinds(findings, "reference")
    # One finding per cause: the over-differencing finding replaces the edge-of-region one.
    assert ("possible-overdifferencing", "warn") in kinds
    assert ("near-boundary", "warn") not in kinds


def test_polynomial_roots_closed_form():
    # (1 - 0.5 B): root 2; seasonal MA 1 + 0.25 B^12 in its own variable: root -4.
    spec = ModelSpec(order=(1, 0, 0), seasonal=(0, 0, 1), period=12)
    roots = polynomial_roots(spec, {"ar_lag1": 0.5, "sma_lag12": 0.25})
    assert np.allclose(roots["ar"], [2.0])
    assert np.allclose(roots["sma"], [-4.0])
    assert roots["ma"].size == 0


def test_implied_trend_with_two_differences():
    spec = ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12, mean=True)
    params = {**BEST, "mu": 0.001}
    reference = Estimate("reference", "r", "r", "0", "ok", spec=spec, params=params, n_w=131, k=4)
    findings = diagnose(spec, {}, {}, reference, SE, Tolerances())
    assert ("implied-trend", "warn") in _kinds(findings)
