"""The main job: fit one specification through every estimator and audit the results."""

from __future__ import annotations

import dataclasses
import datetime as _dt
import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.adapters.protocol import FitRequest
from forecastaudit.adapters.registry import DEFAULT_PRODUCTION, adapter_class, available_estimators
from forecastaudit.conventions import (
    coefficient_names,
    difference,
    information_criteria,
    parameter_names,
)
from forecastaudit.diagnosis.declarations import check_declarations, declaration_finding
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
from forecastaudit.errors import (
    EnvironmentSetupError,
    EstimatorError,
    ImportRecordError,
    SeriesError,
    SpecError,
)
from forecastaudit.estimate import REFERENCE_ENGINE, REFERENCE_KEY, Estimate, Forecast
from forecastaudit.fitting import (
    DEFAULT_TIME_LIMIT,
    OwnLikelihoodTask,
    fit_tasks,
    run_fits,
    run_own_loglikes,
)
from forecastaudit.imported import (
    ImportRecord,
    imported_estimate,
    imported_forecast,
    read_import,
)
from forecastaudit.result import AuditResult
from forecastaudit.run import Backend, make_backend
from forecastaudit.series import (
    PreparedSeries,
    check_length,
    conventional_periods,
    prepare_future_regressors,
    prepare_regressors,
    prepare_series,
    with_regressors,
)
from forecastaudit.spec import ModelSpec
from forecastaudit.validation import check_levels, echo, limit_error, plain, whole_number

#: The production estimator when the caller names none (see :func:`audit`).

#: When the reference likelihood is mapped over a two-coefficient model's surface.
GRID_CHOICES = ("always", "on-failure")


def _parse_spec(spec: ModelSpec | str) -> ModelSpec:
    if isinstance(spec, str):
        spec = ModelSpec.parse(spec)
    if not isinstance(spec, ModelSpec):
        raise SpecError(
            f"spec must be a ModelSpec or its text form, got {type(spec).__name__}; e.g. "
            "fa.ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12)."
        )
    return spec


def _resolve_spec(spec: ModelSpec | str, series_period: int | None) -> ModelSpec:
    spec = _parse_spec(spec)
    if spec.period is None and series_period is not None and series_period > 1:
        spec = spec.with_period(series_period)
    return spec


def resolve_series_and_spec(
    y: Any, spec: ModelSpec | str, period: Any, name: str | None
) -> tuple[PreparedSeries, ModelSpec]:
    """The prepared series and the spec with its period, agreeing on that period.

    The period fitted is the one recorded. It comes from the model, the ``period`` argument
    or the series' index, in that order of precedence, and where two of them give a period
    they must agree: a ``period`` argument that contradicts the model is refused, and so is
    a model whose period is not a cycle of the index (a quarterly model on monthly data, a
    period-12 model on daily data) unless ``period`` confirms it deliberately. Hourly data
    may have period 24 or 168 and daily data 7 or 365 without confirmation.
    """
    parsed = _parse_spec(spec)
    _check_work(parsed)
    if period is not None:
        period = whole_number(
            period, "period", minimum=1, error=SeriesError, example="12 for monthly data"
        )
        if parsed.period is not None and period != parsed.period:
            raise SpecError(
                f"period={period} contradicts the model {parsed}, whose period is "
                f"{parsed.period}; give the period once (in the model or as period=), or make "
                "them agree."
            )
    series = prepare_series(y, period=period if period is not None else parsed.period, name=name)
    usual = conventional_periods(series.frequency)
    if period is None and parsed.period is not None and usual and parsed.period not in usual:
        periods = " or ".join(map(str, usual))
        raise SpecError(
            f"The model {parsed} has period {parsed.period}, but the index of "
            f"'{plain(series.name)}' has frequency {series.frequency}, whose period is "
            f"{periods}. Write the model with period {usual[0]}, or pass "
            f"period={parsed.period} to fit period {parsed.period} on this index deliberately."
        )
    resolved = _resolve_spec(parsed, series.period)
    _check_work(resolved)
    if resolved.period is not None and series.period != resolved.period:
        series = dataclasses.replace(series, period=resolved.period)
    return series, resolved


def _check_work(spec: ModelSpec) -> None:
    """Refuse a model whose size would exhaust memory (see :class:`~forecastaudit.Limits`)."""
    limit_error("The seasonal period", spec.m, "period", SpecError)
    ar_lag = spec.p + spec.m * spec.P
    ma_lag = spec.q + spec.m * spec.Q
    limit_error(f"The largest lag of {spec}", max(ar_lag, ma_lag), "lags", SpecError)


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
    likelihood_grid: str = "always",
    regressors: pd.DataFrame | None = None,
    future_regressors: pd.DataFrame | None = None,
    imported: Sequence[Any] | None = None,
    environments: Mapping[str, Any] | Sequence[str] | str | None = None,
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
    likelihood_grid : {"always", "on-failure"}
        When to map the reference likelihood over its two coefficients (a model with
        exactly two; 961 evaluations, about a third of a small audit's time) for the
        report's surface plot, and the reference likelihood's profiles towards the estimates
        that stopped short: ``"always"`` (the default), or only when the audit fails
        (``"on-failure"``, what panels use: they write reports for failing series only).
    regressors : pandas.DataFrame, optional
        The regressor values when the spec names regressors (``ModelSpec(regressors=...)`` or
        ``+x(price,promo)``): a regression on the levels with ARIMA errors. One column per
        named regressor (others are ignored), indexed like the series (with a date or period
        index, the same labels; otherwise one row per observation, in order). Not
        transformed. Each holdout origin fits on the rows before it and forecasts with the
        held-out rows as known future values. Not modified.
    future_regressors : pandas.DataFrame, optional
        The regressors over the ``horizon`` periods after the series (at least ``horizon``
        rows, indexed by those periods when the series has dates); required with
        regressors. Not modified.
    imported : sequence of path, mapping or ImportRecord, optional
        Estimates made by software that does not run here, as import records (see
        :func:`forecastaudit.imported.read_import` and docs/estimates-made-elsewhere.md).
        Each must be of ``spec``; it joins the audit as a column named by its label, marked
        as imported: normalised to the canonical convention, re-scored, compared, and its
        declared conventions checked against its reported log-likelihood. It has no
        holdout (nothing can be refitted here). An imported label may be ``production``.
    environments : mapping, sequence of str or str, optional
        Other Python environments (made by ``forecastaudit environment create``, see
        :mod:`forecastaudit.environments`) to run estimators in, beside those of this one:
        ``{"statsmodels-0.14": "statsmodels-sarimax"}`` (a key or a list of keys per
        environment), or environment names (every estimator that can run elsewhere). Each
        becomes a column ``<key>@<environment>`` with the environment's library version;
        its estimates' provenance carries the environment's package versions.

    Returns
    -------
    AuditResult

    Raises
    ------
    SpecError, SeriesError, RegressorError, EstimatorError, ToleranceError
        On invalid input, before anything is fitted.
    """
    if tolerances is None:
        tol = Tolerances()
    elif isinstance(tolerances, Tolerances):
        tol = tolerances
    else:
        tol = Tolerances.from_dict(dict(tolerances))
    series, spec = resolve_series_and_spec(y, spec, period, name)
    check_length(series, spec)
    y_t = series.transformed(spec)
    _check_magnitude(y_t, series.name, spec)
    _check_not_constant(y_t, series.name, spec)
    keys = _resolve_estimators(estimators)
    keys += [k for k in _resolve_environments(environments) if k not in keys]
    records = _resolve_imports(imported, spec, keys)
    steps = (
        _check_steps(horizon, "horizon") if horizon is not None else (spec.m if spec.m > 1 else 12)
    )
    prepared_x = prepare_regressors(regressors, series, spec)
    future_x = prepare_future_regressors(future_regressors, series, prepared_x, steps)
    series = with_regressors(series, prepared_x)  # the data fingerprint covers them
    if prepared_x is not None and order_search:
        raise SpecError(
            "The order-search audit does not take regressors yet (the libraries' searches are "
            "run on the series alone); audit the specified model with regressors, and the "
            "order search separately without them."
        )
    level_tuple = _check_levels(levels)
    if holdout is not None:
        holdout, origins = _check_holdout(series, spec, holdout, origins)
    elif (
        not (isinstance(origins, int | np.integer) and not isinstance(origins, bool))
        or origins != 1
    ):
        raise SpecError(
            f"origins={echo(origins)} has no effect without holdout: pass holdout=H to score "
            "forecasts at each origin, or leave origins at 1."
        )
    if likelihood_grid not in GRID_CHOICES:
        raise SpecError(
            f"likelihood_grid must be one of {', '.join(map(repr, GRID_CHOICES))}, "
            f"not {likelihood_grid!r}."
        )

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
            production=_resolve_production(production, keys, [r.label for r in records]),
            backend=backend,
            time_limit=time_limit,
            progress=progress,
            likelihood_grid=likelihood_grid,
            x=None if prepared_x is None else prepared_x.values,
            x_future=future_x,
            records=records,
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
    likelihood_grid: str = "always",
    x: np.ndarray | None = None,
    x_future: np.ndarray | None = None,
    records: Sequence[ImportRecord] = (),
) -> AuditResult:
    n_w = len(series) - spec.lost_to_differencing
    # Fit stage: every estimator fits and forecasts where it runs; plain values come back.
    outcomes = run_fits(
        fit_tasks(
            keys,
            y_t,
            spec,
            steps=steps,
            levels=level_tuple,
            regressors=x,
            future_regressors=x_future,
        ),
        backend,
        time_limit=time_limit,
        progress=f"fitting {spec}" if progress else None,
    )
    estimates = {key: o.estimate for key, o in zip(keys, outcomes, strict=True)}
    library_forecasts = {key: o.forecast for key, o in zip(keys, outcomes, strict=True)}
    early: list[Finding] = []
    # Estimates made elsewhere join as columns of their own, already canonical.
    for record in records:
        estimates[record.label] = _imported(record, y_t, spec, n_w, x)
        fc, problem = _imported_forecast(record, spec, steps, level_tuple)
        library_forecasts[record.label] = fc
        if problem:
            early.append(Finding("fit-failed", "warn", record.label, "forecast", problem))

    # Reference stage: a multi-start reference fit, then every estimate re-scored.
    from forecastaudit import reference as _reference

    ok = {k: e for k, e in estimates.items() if e.ok}
    # The reference starts from the fits made here only: an imported estimate is judged by
    # the reference, and its declarations may be wrong.
    starts = {k: dict(e.params) for k, e in ok.items() if k in keys}
    fit = _reference.fit_reference(y_t, spec, starts, regressors=x)
    reference = _reference_estimate(spec, fit, n_w)
    standard_errors = {k: float(v) for k, v in fit.standard_errors.items()}
    scored = {k: _reference.evaluate(y_t, spec, e.params, regressors=x) for k, e in ok.items()}
    scored[REFERENCE_KEY] = _reference.evaluate(y_t, spec, reference.params, regressors=x)
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
        y_t, spec, reference.params, steps, level_tuple, regressors=x, future_regressors=x_future
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
            regressors=x,
        )
        for key, reason in holdout_result.failures.items():
            early.append(Finding("holdout-failure", "warn", key, "holdout", reason))

    # Each estimator judged against its own objective, and every disagreement measured in
    # decision units, before the diagnosis.
    fitted_here = {k: e for k, e in estimates.items() if k in keys}
    own = _own_objectives(fitted_here, y_t, spec, reference.params, backend, time_limit, x)
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
        fitted_here, rescores, reference, standard_errors, own, y_t, spec, backend, time_limit, x
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
    findings += [Finding("input-precision", "warn", None, "data", note) for note in series.notes]
    for record in records:
        check = check_declarations(
            record, y_t, spec, float(best), gap_tolerance=tol.loglike_atol, regressors=x
        )
        findings.append(
            declaration_finding(check, record, production=production in (record.label, None))
        )
    # The estimates the profiles go towards, as diagnosed (before wrappers' findings merge).
    disagreeing = list(findings)
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
    grid = None
    profiles: dict[str, pd.DataFrame] = {}
    # Evidence for the report's plots; a panel maps it only for the series it reports on.
    if likelihood_grid == "always" or any(f.severity == "fail" for f in findings):
        profiles = _likelihood_profiles(_reference, y_t, spec, estimates, reference, disagreeing, x)
        grid = _likelihood_grid(_reference, y_t, spec, estimates, reference, profiles, x)
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
            **({"imported": [r.label for r in records]} if records else {}),
        },
        materiality={k: m.to_dict() for k, m in materiality.items()},
        created=_dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
        future_regressors=None if x_future is None else np.array(x_future, dtype=float),
    )


def _resolve_environments(
    environments: Mapping[str, Any] | Sequence[str] | str | None,
) -> list[str]:
    """The keys of the estimators to run in other environments (their adapters made here)."""
    from forecastaudit.adapters.other_environment import SUPPORTED, environment_adapter
    from forecastaudit.adapters.registry import register_transient
    from forecastaudit.environments import get_environment

    if environments is None:
        return []
    if isinstance(environments, str):
        environments = [environments]
    if not isinstance(environments, Mapping | Sequence):
        raise EnvironmentSetupError(
            f"environments must be a mapping or a list of environment names, not "
            f"{type(environments).__name__}; e.g. {{'statsmodels-0.14': 'statsmodels-sarimax'}}."
        )
    items = (
        list(environments.items())
        if isinstance(environments, Mapping)
        else [(name, None) for name in environments]
    )
    keys = []
    for name, libraries in items:
        if not isinstance(name, str) or not (
            libraries is None
            or isinstance(libraries, str)
            or (isinstance(libraries, Sequence) and all(isinstance(k, str) for k in libraries))
        ):
            raise EnvironmentSetupError(
                "environments must map an environment name to an estimator key, a list of "
                "keys or None (every estimator that can run there), or list environment "
                f"names; got {name!r}: {libraries!r}."
            )
        get_environment(name)  # raises naming the environments there are
        wanted = (
            list(SUPPORTED)
            if libraries is None
            else [libraries]
            if isinstance(libraries, str)
            else list(libraries)
        )
        for library in wanted:
            cls = environment_adapter(name, library)
            register_transient(cls)
            keys.append(cls.key)
    return keys


def _resolve_imports(
    imported: Sequence[Any] | None, spec: ModelSpec, keys: Sequence[str]
) -> list[ImportRecord]:
    """Read every import record, and check it is of the audited model under a free label."""
    if imported is None:
        return []
    if isinstance(imported, str | bytes) or not isinstance(imported, Sequence):
        imported = [imported]
    records = [read_import(item) for item in imported]
    taken = {*keys, REFERENCE_KEY}
    for record in records:
        if record.spec != spec:
            raise ImportRecordError(
                f"The import record {record.label} ({record.source}) is of {record.spec}, "
                f"but the audit is of {spec}. Import estimates of the audited model only."
            )
        if record.label in taken:
            raise ImportRecordError(
                f"The import record {record.source} has the label {record.label!r}, which "
                "another estimate of this audit already uses; give it a label of its own "
                "(the 'label' field, or '# label:' in the CSV form)."
            )
        taken.add(record.label)
    return records


def _imported(
    record: ImportRecord,
    y_t: np.ndarray,
    spec: ModelSpec,
    n_w: int,
    x: np.ndarray | None = None,
) -> Estimate:
    """The canonical estimate of a record; a missing sigma2 is the maximum-likelihood one at
    its coefficients."""
    from forecastaudit import reference as _reference

    estimate = imported_estimate(record, n_w)
    if not math.isfinite(estimate.params["sigma2"]):
        trial = _reference.evaluate(y_t, spec, {**estimate.params, "sigma2": 1.0}, regressors=x)
        estimate.params["sigma2"] = float(trial.sigma2_hat)
        estimate.notes.append(
            "The record reports no sigma2: the maximum-likelihood value at its coefficients "
            "is used."
        )
    if math.isfinite(estimate.loglike_native):
        estimate.criteria = information_criteria(estimate.loglike_native, estimate.k or 0, n_w)
    return estimate


def _imported_forecast(
    record: ImportRecord, spec: ModelSpec, steps: int, levels: tuple[float, ...]
) -> tuple[Forecast | None, str]:
    """A record's forecasts cut to the audit's horizon, or None and why they are left out."""
    fc = imported_forecast(record, spec, levels)
    if fc is None:
        return None, ""
    missing = [level for level in levels if level not in fc.lower]
    if fc.steps < steps or missing:
        why = (
            f"{fc.steps} steps for a horizon of {steps}"
            if fc.steps < steps
            else f"no {', '.join(f'{v:g}%' for v in missing)} interval"
        )
        return None, (
            f"{record.label}'s forecasts are left out of the comparison: the import record "
            f"gives {why}. Give forecasts for every step and interval level of the audit "
            "(or audit with its horizon and levels)."
        )
    if fc.steps > steps:
        fc.mean, fc.se = fc.mean[:steps], fc.se[:steps]
        fc.lower = {k: v[:steps] for k, v in fc.lower.items()}
        fc.upper = {k: v[:steps] for k, v in fc.upper.items()}
        fc.steps = steps
    return fc, ""


def _resolve_production(
    production: str | None, keys: list[str], imported: Sequence[str] = ()
) -> str | None:
    if production is None:
        return None
    if isinstance(production, str) and production in imported:
        return str(production)
    if not isinstance(production, str):
        raise EstimatorError(
            f"production must be an estimator key (e.g. 'statsmodels-sarimax'), got "
            f"{type(production).__name__}."
        )
    if production in keys:
        return str(production)
    if production is DEFAULT_PRODUCTION:  # not named by the caller: the first estimator run
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
    x: np.ndarray | None = None,
) -> dict[str, OwnObjective]:
    """Each estimator's own likelihood at its estimate and at the reference optimum."""
    keys = [k for k, e in estimates.items() if e.ok and adapter_class(k).capabilities.own_loglike]
    request = FitRequest(np.asarray(y_t, dtype=float), spec, x)
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
    x: np.ndarray | None = None,
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
    outcomes = run_fits(
        fit_tasks(keys, y_t / scale, spec, regressors=x), backend, time_limit=time_limit
    )
    remedies = {}
    for key, outcome in zip(keys, outcomes, strict=True):
        e = outcome.estimate
        if not e.ok:
            remedies[key] = f"Re-run on the series divided by {scale:g}: {e.status} ({e.reason})."
            continue
        # The ARMA coefficients do not depend on the scale; mu, the regression coefficients
        # and sigma2 scale with it.
        worst = max(
            (
                abs(e.params[n] - reference.params[n]) / standard_errors[n]
                for n in coefficient_names(spec)
                if n != "mu"
                and not n.startswith("x_")
                and math.isfinite(standard_errors.get(n, math.nan))
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
    return check_levels(levels)


def _likelihood_profiles(
    reference_module: Any,
    y_t: Any,
    spec: ModelSpec,
    estimates: Mapping[str, Estimate],
    reference: Estimate,
    findings: list[Finding],
    x: np.ndarray | None = None,
) -> dict[str, pd.DataFrame]:
    """Profiles towards every disagreeing estimate."""
    disagreeing = [
        f.estimator
        for f in findings
        if f.kind in {"stopped-short", "flat-likelihood"} and f.estimator in estimates
    ]
    profiles: dict[str, pd.DataFrame] = {}
    for key in dict.fromkeys(disagreeing):
        profiles[key] = reference_module.profile_line(
            y_t, spec, reference.params, estimates[key].params, n_points=41, regressors=x
        )
    return profiles


def _likelihood_grid(
    reference_module: Any,
    y_t: Any,
    spec: ModelSpec,
    estimates: Mapping[str, Estimate],
    reference: Estimate,
    profiles: Mapping[str, pd.DataFrame],
    x: np.ndarray | None = None,
) -> dict[str, Any] | None:
    """The reference likelihood on a grid around every disagreeing estimate (a model with
    exactly two coefficients; None otherwise)."""
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
            y_t,
            spec,
            reference.params,
            tuple(coefficients),
            ranges=tuple(ranges),
            n=31,
            regressors=x,
        )
        grid["points"] = {REFERENCE_KEY: dict(reference.params)} | {
            k: dict(estimates[k].params) for k in profiles
        }
    return grid


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
    steps = whole_number(value, f"{what} (steps)", minimum=1, example="12")
    limit_error(f"{what.capitalize()}", steps, "horizon", SpecError)
    return steps


def _check_magnitude(y_t: np.ndarray, name: str, spec: ModelSpec) -> None:
    """Refuse values so large or so small that squares and variances leave float64.

    Sums of squares of values near 1e300 overflow, and variances of values near 1e-300
    underflow to zero, before any estimator or scipy routine can say so. Rescaling by the
    caller is exact in effect (ARMA coefficients do not change; mu and sigma2 scale), so the
    audit asks for it rather than guessing.
    """
    top = float(np.max(np.abs(y_t))) if y_t.size else 0.0
    what = "the series" if spec.transform is None else f"the {spec.transform} series"
    if top > MAX_MAGNITUDE:
        raise SeriesError(
            f"Values of {what} '{plain(name)}' reach {top:.3g}, beyond {MAX_MAGNITUDE:g}: their "
            "squares overflow float64 inside every estimator. Divide the series by a power "
            "of ten first (ARMA coefficients do not change; mu scales with it and sigma2 "
            "with its square), or use the log transform."
        )
    w = difference(y_t, spec)
    spread = float(np.max(np.abs(w - np.mean(w)))) if w.size else 0.0
    if 0.0 < spread < MIN_SPREAD:
        raise SeriesError(
            f"The {'differenced ' if spec.lost_to_differencing else ''}values of {what} "
            f"'{plain(name)}' vary by at most {spread:.3g}, below {MIN_SPREAD:g}: their "
            "variance underflows float64. Multiply the series by a power of ten first (ARMA "
            "coefficients do not change; mu scales with it and sigma2 with its square)."
        )


#: Largest magnitude of a (transformed) value accepted: its square stays far from overflow.
MAX_MAGNITUDE = 1e100
#: Smallest spread of the differenced values accepted: its square stays far from underflow.
MIN_SPREAD = 1e-100


def _check_holdout(
    series: PreparedSeries, spec: ModelSpec, holdout: Any, origins: Any
) -> tuple[int, int]:
    holdout = _check_steps(holdout, "holdout")
    origins = whole_number(origins, "origins", minimum=1, example="3")
    need = spec.minimum_length()
    train = len(series) - holdout * origins
    if train < need:
        raise SeriesError(
            f"A holdout of {origins} x {holdout} leaves {train} observations to fit on; {spec} "
            f"needs at least {need}. Hold out fewer observations or use fewer origins."
        )
    return holdout, origins


def _forecast_at_reference(
    y_t: Any,
    spec: ModelSpec,
    params: Mapping[str, float],
    steps: int,
    levels: tuple[float, ...],
    *,
    regressors: np.ndarray | None = None,
    future_regressors: np.ndarray | None = None,
) -> Forecast:
    """Forecast at the reference optimum with the reference model's own predictor."""
    from forecastaudit import reference as _reference

    fc = _reference.best_linear_forecast(
        y_t,
        spec,
        params,
        steps,
        levels,
        regressors=regressors,
        future_regressors=future_regressors,
    )
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
    regressors: np.ndarray | None = None,
) -> HoldoutResult:
    from forecastaudit import reference as _reference

    def reference_forecaster(
        train_t: Any,
        estimates: Mapping[str, Estimate],
        steps: int,
        regressors: np.ndarray | None = None,
        future_regressors: np.ndarray | None = None,
    ) -> Forecast | None:
        starts = {k: dict(e.params) for k, e in estimates.items() if e.ok}
        fit = _reference.fit_reference(train_t, spec, starts, regressors=regressors)
        params = {name: float(fit.params[name]) for name in parameter_names(spec)}
        return _forecast_at_reference(
            train_t,
            spec,
            params,
            steps,
            levels,
            regressors=regressors,
            future_regressors=future_regressors,
        )

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
        regressors=regressors,
    )
