"""The main job: fit one specification through every estimator and audit the results."""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.adapters.protocol import FitRequest
from forecastaudit.adapters.registry import adapter_class, available_estimators
from forecastaudit.conventions import (
    coefficient_names,
    difference,
    information_criteria,
    parameter_names,
)
from forecastaudit.diagnosis.diagnose import (
    CAUSE_KINDS,
    OwnObjective,
    classify,
    diagnose,
    merge_wrapper_findings,
    with_policy_severity,
)
from forecastaudit.diagnosis.findings import Finding
from forecastaudit.diagnosis.forecasts import (
    back_transform,
    forecast_findings,
    point_kind,
    positive_interval_findings,
    residual_checks,
    residual_findings,
    spread_band,
)
from forecastaudit.diagnosis.holdout import HoldoutResult, run_holdout
from forecastaudit.diagnosis.materiality import measure_materiality
from forecastaudit.diagnosis.rescore import Rescore, canonical_criteria
from forecastaudit.diagnosis.tables import likelihood_table, parameter_table
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.errors import EstimatorError, SeriesError, SpecError
from forecastaudit.estimate import REFERENCE_ENGINE, REFERENCE_KEY, Estimate, Forecast
from forecastaudit.fitting import (
    DEFAULT_TIME_LIMIT,
    OwnLikelihoodTask,
    fit_tasks,
    run_fits,
    run_own_loglikes,
)
from forecastaudit.result import AuditResult
from forecastaudit.run import Backend, make_backend
from forecastaudit.series import PreparedSeries, check_length, prepare_series
from forecastaudit.spec import ModelSpec

#: The production estimator when the caller names none (see :func:`audit`).
DEFAULT_PRODUCTION = "statsmodels-sarimax"


def _resolve_spec(spec: ModelSpec | str, series_period: int | None) -> ModelSpec:
    if isinstance(spec, str):
        spec = ModelSpec.parse(spec)
    if not isinstance(spec, ModelSpec):
        raise SpecError(
            f"spec must be a ModelSpec or its text form, got {type(spec).__name__}; e.g. "
            "fa.ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12)."
        )
    if spec.period is None and series_period is not None and series_period > 1:
        spec = spec.with_period(series_period)
    return spec


def _resolve_estimators(estimators: Iterable[str] | None) -> list[str]:
    if estimators is None:
        return available_estimators()
    if isinstance(estimators, str):
        estimators = [estimators]
    keys = list(dict.fromkeys(estimators))
    if not keys:
        raise EstimatorError("estimators is empty; pass None for all, or a list of keys.")
    if REFERENCE_KEY in keys:
        raise EstimatorError(
            "'reference' is forecastaudit's own fit and always runs; leave it out of estimators."
        )
    for key in keys:
        adapter_class(key)  # raises EstimatorError naming the known keys
    return keys


def _reference_estimate(spec: ModelSpec, fit: Any, n_w: int) -> Estimate:
    params = {name: float(fit.params[name]) for name in parameter_names(spec)}
    k = len(params)
    return Estimate(
        key=REFERENCE_KEY,
        engine=REFERENCE_ENGINE,
        package="forecastaudit",
        version=_version(),
        status="ok",
        spec=spec,
        params=params,
        sigma2_reported=params["sigma2"],
        sigma2_definition="maximum likelihood (profiled)",
        loglike_native=float(fit.loglike),
        loglike_definition=(
            "exact Gaussian log-likelihood of the differenced series (forecastaudit's "
            "reference), 2*pi constant included, at the maximum-likelihood sigma2"
        ),
        n_used_native=n_w,
        k_counted_native=k,
        criteria_native=information_criteria(float(fit.loglike), k, n_w),
        criteria=information_criteria(float(fit.loglike), k, n_w),
        n_w=n_w,
        k=k,
        converged=bool(fit.converged),
        optimizer={"message": fit.message},
        options={"starts": [s.get("label") for s in _start_rows(fit)]},
        seconds=float(fit.seconds),
        native=fit,
    )


def _start_rows(fit: Any) -> list[dict[str, Any]]:
    rows = []
    for item in getattr(fit, "start_results", []):
        row = item if isinstance(item, Mapping) else vars(item)
        rows.append({k: v for k, v in row.items()})
    return rows


def _version() -> str:
    from forecastaudit._version import __version__

    return __version__


def audit(
    y: Any,
    spec: ModelSpec | str,
    estimators: Iterable[str] | None = None,
    tolerances: Tolerances | Mapping[str, float] | None = None,
    *,
    period: int | None = None,
    name: str | None = None,
    horizon: int | None = None,
    levels: Sequence[float] = (80.0, 95.0),
    holdout: int | None = None,
    origins: int = 1,
    order_search: bool = False,
    progress: bool = False,
    workers: int | Backend | None = None,
    time_limit: float | None = DEFAULT_TIME_LIMIT,
    production: str | None = DEFAULT_PRODUCTION,
) -> AuditResult:
    """Fit ``spec`` through every estimator, re-score under the reference likelihood, diagnose.

    Parameters
    ----------
    y : pandas.Series, numpy.ndarray or sequence of numbers
        The series on its original scale, in time order, without gaps. It is not modified.
    spec : ModelSpec or str
        The model, e.g. ``ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12,
        transform="log")`` or its text form ``"ARIMA(0,1,1)x(0,1,1)12 +log"``.
    estimators : iterable of str, optional
        Estimator keys to run (see :func:`forecastaudit.available_estimators`); default all.
        A library that is not installed is reported as ``unavailable`` and the audit goes on.
    tolerances : Tolerances or mapping, optional
        Tolerances of the verdict; a mapping overrides some of the defaults.
    period : int, optional
        Seasonal period of the series when the index does not imply one (or to override it).
    name : str, optional
        Display name of the series.
    horizon : int, optional
        Steps to forecast from the full series (default: the period, or 12 without one).
    levels : sequence of float
        Prediction-interval levels in percent (default 80 and 95).
    holdout : int, optional
        Hold out this many final observations per origin: fit on the rest, forecast them and
        score every estimator's accuracy (MAE, RMSE, MAPE, MASE, coverage, interval score).
    origins : int
        Number of forecast origins for the holdout (rolling origin): the last
        ``origins * holdout`` observations are split into consecutive windows, each
        forecast from a fit on everything before it. Default 1.
    order_search : bool
        Also audit every installed automatic order search on this series (with the spec's
        period and transform): selections, the causes of their disagreements, and an
        exhaustive search under the reference AICc (see
        :func:`forecastaudit.search.audit_order_search`). Slow: pmdarima's own search
        alone takes tens of seconds on a monthly series.
    progress : bool
        Show progress bars (tqdm) over the fits and the holdout origins.
    workers : int or execution backend, optional
        Where the fits run: None or 1 in this process (one BLAS thread while fitting);
        N >= 2 in N local worker processes, which fit the estimators (and the holdout
        origins) concurrently; or an execution backend from :mod:`forecastaudit.run`,
        reused as it is (e.g. across several audits).
    production : str, optional
        The estimator the team ships (default ``"statsmodels-sarimax"``, the engine behind
        four of the five built-in adapters; when it is not among ``estimators``, the first
        of them). The verdict is about it: is its estimate at the reference optimum, is it
        corroborated by enough independent engines (the reference counts as one), and does
        any disagreement matter for its forecasts. Other engines' problems are notes unless
        the policy (``Tolerances.fail_on_other_engines``) says otherwise. None judges every
        estimator as if it were the production one.
    time_limit : float, optional
        Seconds one estimator's fit and forecast may take, where the backend can stop it
        (worker processes; a fit in this process cannot be stopped). Past it the estimator
        is reported ``timed-out`` and the audit goes on. Default 600; None for no limit.

    Returns
    -------
    AuditResult

    Raises
    ------
    SpecError, SeriesError, EstimatorError, ToleranceError
        On invalid input, before anything is fitted.
    """
    if tolerances is None:
        tol = Tolerances()
    elif isinstance(tolerances, Tolerances):
        tol = tolerances
    else:
        tol = Tolerances.from_dict(dict(tolerances))
    if period is None and isinstance(spec, ModelSpec):
        period = spec.period
    series = prepare_series(y, period=period, name=name)
    spec = _resolve_spec(spec, series.period)
    check_length(series, spec)
    y_t = series.transformed(spec)
    _check_not_constant(y_t, series.name, spec)
    keys = _resolve_estimators(estimators)
    steps = (
        _check_steps(horizon, "horizon") if horizon is not None else (spec.m if spec.m > 1 else 12)
    )
    level_tuple = _check_levels(levels)
    if holdout is not None:
        _check_holdout(series, spec, holdout, origins)

    # Worker processes start from a server that has the libraries imported already, so a
    # library's import time does not count against a fit's time limit.
    preload = [adapter_class(key).module for key in keys]
    backend = make_backend(workers, preload=preload)
    try:
        return _audit_stages(
            series,
            spec,
            y_t,
            keys,
            tol,
            steps,
            level_tuple,
            holdout,
            origins,
            order_search,
            production=_resolve_production(production, keys),
            backend=backend,
            time_limit=time_limit,
            progress=progress,
        )
    finally:
        if not isinstance(workers, Backend):
            backend.close()


def _audit_stages(
    series: PreparedSeries,
    spec: ModelSpec,
    y_t: np.ndarray,
    keys: list[str],
    tol: Tolerances,
    steps: int,
    level_tuple: tuple[float, ...],
    holdout: int | None,
    origins: int,
    order_search: bool,
    *,
    production: str | None,
    backend: Backend,
    time_limit: float | None,
    progress: bool,
) -> AuditResult:
    n_w = len(series) - spec.lost_to_differencing
    # Fit stage: every estimator fits and forecasts where it runs; plain values come back.
    outcomes = run_fits(
        fit_tasks(keys, y_t, spec, steps=steps, levels=level_tuple),
        backend,
        time_limit=time_limit,
        progress=f"fitting {spec}" if progress else None,
    )
    estimates = {key: o.estimate for key, o in zip(keys, outcomes, strict=True)}
    library_forecasts = {key: o.forecast for key, o in zip(keys, outcomes, strict=True)}

    # Reference stage: a multi-start reference fit, then every estimate re-scored.
    from forecastaudit import reference as _reference

    ok = {k: e for k, e in estimates.items() if e.ok}
    starts = {k: dict(e.params) for k, e in ok.items()}
    fit = _reference.fit_reference(y_t, spec, starts)
    reference = _reference_estimate(spec, fit, n_w)
    standard_errors = {k: float(v) for k, v in fit.standard_errors.items()}
    scored = {k: _reference.evaluate(y_t, spec, e.params) for k, e in ok.items()}
    scored[REFERENCE_KEY] = _reference.evaluate(y_t, spec, reference.params)
    best = max(s.profiled_loglike for s in scored.values())
    rescores = {
        k: Rescore(
            loglike=float(s.loglike),
            profiled_loglike=float(s.profiled_loglike),
            gap=float(best - s.profiled_loglike),
        )
        for k, s in scored.items()
    }
    all_estimates = {**estimates, REFERENCE_KEY: reference}

    # Forecasts from the full series, with each library's own intervals.
    early: list[Finding] = []
    transformed: dict[str, Forecast] = {}
    for key, e in estimates.items():
        fc = library_forecasts.get(key)
        if e.ok and fc is not None:
            if fc.ok:
                transformed[key] = fc
            else:
                early.append(
                    Finding(
                        "fit-failed",
                        "warn",
                        key,
                        "forecast",
                        f"{key} could not forecast: {fc.reason}",
                    )
                )
    transformed[REFERENCE_KEY] = _forecast_at_reference(
        y_t, spec, reference.params, steps, level_tuple
    )
    forecasts = {k: back_transform(fc, spec) for k, fc in transformed.items()}

    holdout_result = None
    if holdout:
        holdout_result = _run_holdout(
            series,
            spec,
            keys,
            holdout,
            origins,
            level_tuple,
            backend=backend,
            time_limit=time_limit,
            progress=progress,
        )
        for key, reason in holdout_result.failures.items():
            early.append(Finding("holdout-failure", "warn", key, "holdout", reason))

    # Each estimator judged against its own objective, and every disagreement measured in
    # decision units, before the diagnosis.
    own = _own_objectives(estimates, y_t, spec, reference.params, backend, time_limit)
    accuracy = (
        holdout_result.accuracy["mase"].to_dict()
        if holdout_result is not None and "mase" in holdout_result.accuracy
        else None
    )
    materiality = {
        key: measure_materiality(key, transformed, forecasts, REFERENCE_KEY, tol, accuracy)
        for key, e in estimates.items()
        if e.ok
    }
    remedies = _check_remedies(
        estimates, rescores, reference, standard_errors, own, y_t, spec, backend, time_limit
    )
    findings = diagnose(
        spec,
        estimates,
        rescores,
        reference,
        standard_errors,
        tol,
        production=production,
        own=own,
        materiality=materiality,
        remedies=remedies,
    )
    findings += early
    profiles, grid = _likelihood_profiles(_reference, y_t, spec, estimates, reference, findings)
    engines = {k: all_estimates[k].engine for k in forecasts}
    spread = spread_band(forecasts, engines, REFERENCE_KEY, max(level_tuple)) if forecasts else None
    findings += with_policy_severity(
        forecast_findings(forecasts, transformed, estimates, REFERENCE_KEY, tol),
        materiality,
        production,
        tol,
        {f.estimator for f in findings if f.kind in CAUSE_KINDS and f.estimator},
    )
    residuals = {k: fc.residuals for k, fc in transformed.items() if fc.residuals is not None}
    residual_table = residual_checks(residuals, spec, len(series)) if residuals else None
    # Findings about the model itself (notes unless the policy fails them).
    findings += residual_findings(residual_table, tol)
    findings += positive_interval_findings(forecasts, series.values, spec, tol)

    search_result = None
    if order_search:
        from forecastaudit.search.order_search import audit_order_search

        search_result = audit_order_search(
            series.values,
            spec.period,
            transform=spec.transform,
            estimators=keys,
            name=series.name,
            n_jobs=backend,
            specified=spec,
            tol=tol,
        )
        findings += search_result.findings
    order = {"fail": 0, "warn": 1, "info": 2}
    findings = merge_wrapper_findings(findings, estimates)
    findings.sort(key=lambda f: order[f.severity])
    for key, e in all_estimates.items():
        if key in rescores and e.ok and e.n_w:
            e.criteria = canonical_criteria(e, rescores[key])
    return AuditResult(
        spec=spec,
        series=series,
        tolerances=tol,
        estimates=all_estimates,
        parameters=parameter_table(spec, all_estimates, standard_errors),
        likelihoods=likelihood_table(all_estimates, rescores),
        findings=findings,
        standard_errors=standard_errors,
        reference_starts=_start_rows(fit),
        forecasts=forecasts,
        forecasts_transformed=transformed,
        spread=spread,
        residual_tests=residual_table,
        holdout=holdout_result,
        profiles=profiles,
        likelihood_grid=grid,
        order_search=search_result,
        options={
            "estimators": keys,
            "horizon": steps,
            "levels": list(level_tuple),
            "holdout": holdout,
            "origins": origins if holdout else None,
            "order_search": order_search,
            "point_forecast": point_kind(spec),
            "production": production,
        },
        materiality={k: m.to_dict() for k, m in materiality.items()},
        created=_dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
    )


def _resolve_production(production: str | None, keys: list[str]) -> str | None:
    if production is None:
        return None
    if not isinstance(production, str):
        raise EstimatorError(
            f"production must be an estimator key (e.g. 'statsmodels-sarimax'), got "
            f"{type(production).__name__}."
        )
    if production in keys:
        return production
    if production == DEFAULT_PRODUCTION:
        return keys[0]
    raise EstimatorError(
        f"The production estimator {production!r} is not among the estimators run "
        f"({', '.join(keys)}); add it to estimators, or name one of those as production."
    )


def _own_objectives(
    estimates: Mapping[str, Estimate],
    y_t: np.ndarray,
    spec: ModelSpec,
    optimum: Mapping[str, float],
    backend: Backend,
    time_limit: float | None,
) -> dict[str, OwnObjective]:
    """Each estimator's own likelihood at its estimate and at the reference optimum."""
    keys = [k for k, e in estimates.items() if e.ok and adapter_class(k).capabilities.own_loglike]
    request = FitRequest(np.asarray(y_t, dtype=float), spec)
    tasks = [
        OwnLikelihoodTask(k, request, (dict(estimates[k].params), dict(optimum)), adapter_class(k))
        for k in keys
    ]
    values = run_own_loglikes(tasks, backend, time_limit=time_limit)
    return {
        k: OwnObjective(at_estimate=v[0], at_reference=v[1])
        for k, v in zip(keys, values, strict=True)
    }


def _check_remedies(
    estimates: Mapping[str, Estimate],
    rescores: Mapping[str, Rescore],
    reference: Estimate,
    standard_errors: Mapping[str, float],
    own: Mapping[str, OwnObjective],
    y_t: np.ndarray,
    spec: ModelSpec,
    backend: Backend,
    time_limit: float | None,
) -> dict[str, str]:
    """Re-run once, rescaled, each estimator whose objective differs through a prior that
    depends on the series' scale: does the rescaled fit reproduce the reference optimum?"""
    keys = [
        k
        for k, e in estimates.items()
        if e.ok
        and k in rescores
        and classify(spec, e, rescores[k], reference, standard_errors, own.get(k))
        == "objective-differs"
        and "diffuse" in e.loglike_definition
        and "exact diffuse" not in e.loglike_definition
    ]
    level = float(np.median(np.abs(y_t))) if len(y_t) else 0.0
    if not keys or level < 100.0:
        return {}
    scale = 10.0 ** math.floor(math.log10(level))
    outcomes = run_fits(fit_tasks(keys, y_t / scale, spec), backend, time_limit=time_limit)
    remedies = {}
    for key, outcome in zip(keys, outcomes, strict=True):
        e = outcome.estimate
        if not e.ok:
            remedies[key] = f"Re-run on the series divided by {scale:g}: {e.status} ({e.reason})."
            continue
        # Coefficients do not depend on the scale; mu and sigma2 scale with it.
        worst = max(
            (
                abs(e.params[n] - reference.params[n]) / standard_errors[n]
                for n in coefficient_names(spec)
                if n != "mu" and math.isfinite(standard_errors.get(n, math.nan))
            ),
            default=0.0,
        )
        remedies[key] = (
            f"Checked: refitted on the series divided by {scale:g}, {key}'s coefficients are "
            f"within {worst:.3f} reference standard errors of the reference optimum"
            + (
                ", so the rescaled fit agrees."
                if worst < 0.1
                else ", so rescaling alone is not enough."
            )
        )
    return remedies


def _check_levels(levels: Sequence[float]) -> tuple[float, ...]:
    try:
        values = tuple(sorted({float(v) for v in levels}))
    except (TypeError, ValueError):
        raise SpecError(
            f"levels must be numbers in percent, e.g. (80, 95); got {levels!r}."
        ) from None
    if not values or any(not 0 < v < 100 for v in values):
        raise SpecError(f"levels must lie strictly between 0 and 100 (percent); got {levels!r}.")
    return values


def _likelihood_profiles(
    reference_module: Any,
    y_t: Any,
    spec: ModelSpec,
    estimates: Mapping[str, Estimate],
    reference: Estimate,
    findings: list[Finding],
) -> tuple[dict[str, pd.DataFrame], dict[str, Any] | None]:
    """Profiles towards every disagreeing estimate, and a grid for two-coefficient models."""
    disagreeing = [
        f.estimator
        for f in findings
        if f.kind in {"stopped-short", "flat-likelihood"} and f.estimator in estimates
    ]
    profiles: dict[str, pd.DataFrame] = {}
    for key in dict.fromkeys(disagreeing):
        profiles[key] = reference_module.profile_line(
            y_t, spec, reference.params, estimates[key].params, n_points=41
        )
    coefficients = coefficient_names(spec)
    grid = None
    if len(coefficients) == 2:
        points = [reference.params] + [estimates[k].params for k in profiles]
        ranges = []
        for name in coefficients:
            values = [float(p[name]) for p in points]
            # Cover every disagreeing estimate with room around it (common practice, no
            # source): at least +-0.1 around the optimum for coefficients.
            low, high = min(values), max(values)
            half = max(0.1, 0.75 * (high - low))
            ranges.append((low - half, high + half))
        grid = reference_module.profile_grid(
            y_t, spec, reference.params, tuple(coefficients), ranges=tuple(ranges), n=31
        )
        grid["points"] = {REFERENCE_KEY: dict(reference.params)} | {
            k: dict(estimates[k].params) for k in profiles
        }
    return profiles, grid


def _check_not_constant(y_t: np.ndarray, name: str, spec: ModelSpec) -> None:
    """Refuse a series that is constant after the transform and differencing.

    Its innovation variance is zero, so no likelihood exists; the libraries then fit
    silently degenerate models (statsforecast: zero-width intervals, no warning).
    """
    w = difference(y_t, spec)
    if w.size and float(np.ptp(w)) == 0.0:
        what = "the series" if spec.lost_to_differencing == 0 else "the differenced series"
        raise SeriesError(
            f"{what.capitalize()} of '{name}' is constant ({w[0]!r} throughout), so "
            f"{spec} has nothing to estimate (its innovation variance would be zero). Check "
            "the data, or use fewer differences."
        )


def _check_steps(value: Any, what: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise SpecError(f"{what} must be a whole number of steps >= 1, got {value!r}.")
    return value


def _check_holdout(series: PreparedSeries, spec: ModelSpec, holdout: Any, origins: Any) -> None:
    _check_steps(holdout, "holdout")
    _check_steps(origins, "origins")
    need = spec.minimum_length()
    train = len(series) - holdout * origins
    if train < need:
        raise SeriesError(
            f"A holdout of {origins} x {holdout} leaves {train} observations to fit on; {spec} "
            f"needs at least {need}. Hold out fewer observations or use fewer origins."
        )


def _forecast_at_reference(
    y_t: Any, spec: ModelSpec, params: Mapping[str, float], steps: int, levels: tuple[float, ...]
) -> Forecast:
    """Forecast at the reference optimum with the reference model's own predictor."""
    from forecastaudit import reference as _reference

    fc = _reference.best_linear_forecast(y_t, spec, params, steps, levels)
    return Forecast(
        key=REFERENCE_KEY,
        status="ok",
        steps=steps,
        levels=levels,
        mean=fc.mean,
        lower=fc.lower,
        upper=fc.upper,
        se=fc.se,
        interval_method=f"{fc.method}; at the reference optimum",
        sigma2_used=fc.sigma2,
        residuals=fc.residuals,
    )


def _run_holdout(
    series: PreparedSeries,
    spec: ModelSpec,
    keys: list[str],
    horizon: int,
    origins: int,
    levels: tuple[float, ...],
    *,
    backend: Backend,
    time_limit: float | None,
    progress: bool = False,
) -> HoldoutResult:
    from forecastaudit import reference as _reference

    def reference_forecaster(
        train_t: Any, estimates: Mapping[str, Estimate], steps: int
    ) -> Forecast | None:
        starts = {k: dict(e.params) for k, e in estimates.items() if e.ok}
        fit = _reference.fit_reference(train_t, spec, starts)
        params = {name: float(fit.params[name]) for name in parameter_names(spec)}
        return _forecast_at_reference(train_t, spec, params, steps, levels)

    return run_holdout(
        series.values,
        spec,
        keys,
        horizon,
        origins,
        levels,
        reference_forecaster,
        REFERENCE_KEY,
        backend=backend,
        time_limit=time_limit,
        progress=progress,
        engines={key: adapter_class(key).engine for key in keys},
    )
