"""Reading statsmodels state-space results: shared by the adapters whose engine it is.

statsmodels' SARIMAX and ARIMA, pmdarima's ARIMA and sktime's ARIMA forecaster all end in a
``statsmodels.tsa.statespace.sarimax.SARIMAXResults``; this module turns one into canonical
values. Only adapters of that engine import it.
"""

from __future__ import annotations

import re
from typing import Any, Literal

import numpy as np

from forecastaudit.adapters.protocol import FitOutput, ForecastOutput
from forecastaudit.conventions import intercept_to_mean, mean_to_intercept, trend_scale
from forecastaudit.layout import layout_of
from forecastaudit.spec import ModelSpec

#: How the statsmodels state-space models regress (measured, statsmodels 0.15: SARIMAX and
#: tsa.arima ARIMA with exog fit ``y_t = x_t' beta + u_t`` with ``u_t`` the SARIMA process,
#: the default ``mle_regression=True``; on a seeded series with d = 1 the coefficients
#: recover the levels effects). Their constant is a term of its own.
REGRESSION_NOTE = (
    "regression on the levels with ARIMA errors (statsmodels' default for exog): the "
    "regression coefficients keep their meaning in levels; the constant is a separate term"
)

INTERVAL_METHOD = (
    "Gaussian: point forecast +/- z x the Kalman-filter forecast standard error at the "
    "maximum-likelihood sigma2 (parameter uncertainty not included)"
)

ENGINE = "statsmodels-statespace"

MeanKind = Literal["intercept", "mean", "trend"]

_LAG_NAME = re.compile(r"^(ar|ma)\.(S\.)?L(\d+)$")


def regressor_positions(names: list[str], spec: ModelSpec) -> dict[int, str]:
    """Position in the parameter vector -> canonical name, for each regressor of the spec.

    statsmodels lays out the state-space parameters as the trend (or, in tsa.arima, the
    trend columns of its regression), then the regressors, then the lag terms and sigma2.
    The regressors are therefore the last ``k`` names before the first lag term (or sigma2).
    They are mapped by position, never by name: statsmodels names an array's columns ``x1,
    x2, ...`` and calls a trend on t ``x1`` too, and a column may be named like a native term.
    """
    canonical = layout_of(spec).regressor_names
    if not canonical:
        return {}
    first_lag = next(
        (i for i, name in enumerate(names) if _LAG_NAME.match(name) or name == "sigma2"),
        len(names),
    )
    start = first_lag - len(canonical)
    if start < 0:
        raise RuntimeError(f"fewer regression terms than regressors among {names}")
    return {start + j: name for j, name in enumerate(canonical)}


def canonical_coefficients(
    names: list[str],
    values: np.ndarray,
    spec: ModelSpec,
    mean_kind: MeanKind,
    constant_name: str | None = None,
) -> tuple[dict[str, float], dict[str, float], list[str]]:
    """Map statsmodels parameter names and values to canonical coefficients.

    Parameters
    ----------
    names, values
        ``result.model.param_names`` and ``result.params``.
    spec : ModelSpec
    mean_kind : {"intercept", "mean", "trend"}
        How the constant enters: ``intercept`` is SARIMAX's ``c`` in
        ``phi(B)Phi(B^m) w_t = c + ...`` (so mu = c / (phi(1)Phi(1))); ``mean`` is a regression
        constant equal to mu (tsa.arima ARIMA with no differencing); ``trend`` is the
        coefficient of ``t^(d+D)`` in a regression with ARIMA errors (mu = (d+D)! m^D b).
    constant_name : str, optional
        The native name of the constant, given by the adapter that set the model up
        (``"intercept"`` by default for SARIMAX). It is never guessed from the names:
        statsmodels calls both a trend and the first regressor ``x1``.

    Returns
    -------
    params : dict
        Canonical coefficients (no sigma2).
    extra_terms : dict
        Fitted terms the spec did not ask for, under their native names.
    notes : list of str
        The conversions made, in plain words.
    """
    constant_name = constant_name or {"intercept": "intercept", "mean": "const"}.get(mean_kind)
    params: dict[str, float] = {}
    extra: dict[str, float] = {}
    constant: float | None = None
    regressors = regressor_positions(names, spec)
    for position, (name, value) in enumerate(
        zip(names, np.asarray(values, dtype=float), strict=True)
    ):
        match = _LAG_NAME.match(name)
        if position in regressors:
            params[regressors[position]] = float(value)
        elif match:
            kind, seasonal, lag = match.groups()
            prefix = ("s" if seasonal else "") + kind
            params[f"{prefix}_lag{lag}"] = float(value)
        elif spec.mean and name == constant_name:
            constant = float(value)
        elif name != "sigma2":
            extra[name] = float(value)  # a term the spec did not ask for
    notes: list[str] = []
    if spec.mean:
        if constant is None:
            raise RuntimeError(f"no constant {constant_name!r} among the fitted parameters {names}")
        if mean_kind == "intercept":
            params["mu"] = intercept_to_mean(constant, spec, params)
            notes.append(
                f"mu = {constant_name} / (phi(1) Phi(1)) = {constant:.6g} / "
                f"{constant / params['mu'] if params['mu'] else float('nan'):.6g}"
            )
        elif mean_kind == "trend":
            scale = trend_scale(spec)
            params["mu"] = constant * scale
            notes.append(
                f"mu = {scale:g} x {constant_name} (coefficient of t^{spec.n_differences} in "
                "levels, after differencing)"
            )
        else:
            params["mu"] = constant
    return params, extra, notes


def loglike_definition(result: Any) -> str:
    """Describe how this result's log-likelihood is defined, from the model's own settings."""
    model = result.model
    burn = int(result.loglikelihood_burn)
    if getattr(model, "simple_differencing", False):
        where = "the differenced series (simple differencing)"
    else:
        where = "the undifferenced series, differencing kept in the state vector"
    init = getattr(model.ssm, "initialization", None)
    diffuse = getattr(init, "approximate_diffuse_variance", None) if init is not None else None
    prior = (
        f"approximate diffuse prior (variance {diffuse:g}) on the non-stationary states"
        if diffuse
        else "the model's default initialisation"
    )
    if getattr(model.ssm, "_initialization", None) == "diffuse" or getattr(
        model, "use_exact_diffuse", False
    ):
        prior = "exact diffuse initialisation"
    return (
        f"exact Gaussian by Kalman filter on {where}, {prior}; the first {burn} observations "
        "are not counted; 2*pi constant included; at the estimated sigma2"
    )


def read_result(
    result: Any, spec: ModelSpec, mean_kind: MeanKind, constant_name: str | None = None
) -> dict[str, Any]:
    """Everything the adapters need from a SARIMAXResults, in plain values."""
    names = list(result.model.param_names)
    values = np.asarray(result.params, dtype=float)
    params, extra, conversions = canonical_coefficients(
        names, values, spec, mean_kind, constant_name
    )
    native = dict(zip(names, values.tolist(), strict=True))
    retvals = dict(getattr(result, "mle_retvals", None) or {})
    settings = dict(getattr(result, "mle_settings", None) or {})
    optimizer = {
        "method": settings.get("optimizer"),
        "maxiter": settings.get("maxiter"),
        "converged": retvals.get("converged"),
        "iterations": retvals.get("iterations"),
        "warnflag": retvals.get("warnflag"),
        "function_calls": retvals.get("fcalls"),
        "final_objective": retvals.get("fopt"),
    }
    converged = retvals.get("converged")
    return {
        "params": params,
        "extra_terms": extra,
        "native_params": native,
        "sigma2": float(native.get("sigma2", result.scale)),
        "loglike": float(result.llf),
        "loglike_definition": loglike_definition(result),
        "n_used": int(result.nobs_effective),
        "k_counted": int(result.df_model),
        "criteria": {
            "aic": float(result.aic),
            "aicc": float(result.aicc),
            "bic": float(result.bic),
        },
        "converged": None if converged is None else bool(converged),
        "optimizer": optimizer,
        "model_options": dict(result.model._get_init_kwds()),
        "fit_options": {
            "method": settings.get("optimizer"),
            "maxiter": settings.get("maxiter"),
            "start_params": "library default (conditional least squares)",
        },
        "conversions": conversions,
    }


def to_fit_output(
    result: Any,
    spec: ModelSpec,
    mean_kind: MeanKind,
    *,
    constant_name: str | None = None,
    options: dict[str, dict[str, Any]] | None = None,
    criteria: dict[str, float] | None = None,
    n_used: int | None = None,
    notes: list[str] | None = None,
    overridden_defaults: dict[str, Any] | None = None,
    native: Any = None,
) -> FitOutput:
    """A :class:`FitOutput` from a SARIMAXResults.

    ``options`` are the wrapper's own resolved options, by namespace, placed before the
    statsmodels ones;
    ``criteria`` and ``n_used`` replace statsmodels' when a wrapper reports its own.
    """
    read = read_result(result, spec, mean_kind, constant_name)
    return FitOutput(
        params=read["params"],
        native_params=read["native_params"],
        sigma2_reported=read["sigma2"],
        sigma2_kind="maximum-likelihood",
        sigma2_definition="maximum likelihood (a parameter of the fit)",
        sigma2_ml=read["sigma2"],
        loglike=read["loglike"],
        loglike_definition=read["loglike_definition"],
        n_used=read["n_used"] if n_used is None else n_used,
        k_counted=read["k_counted"],
        criteria=read["criteria"] if criteria is None else criteria,
        converged=read["converged"],
        optimizer=read["optimizer"],
        options={
            **(options or {}),
            "statsmodels": {**read["model_options"], **read["fit_options"]},
        },
        extra_terms=read["extra_terms"],
        conversions=read["conversions"],
        notes=list(notes or []),
        overridden_defaults=dict(overridden_defaults or {}),
        native=result if native is None else native,
    )


def native_vector(
    param_names: list[str],
    spec: ModelSpec,
    params: dict[str, float],
    mean_kind: MeanKind = "intercept",
    constant_name: str | None = None,
) -> np.ndarray:
    """Canonical parameters as a statsmodels state-space parameter vector, in its order.

    The inverse of :func:`canonical_coefficients` with the same ``mean_kind`` and
    ``constant_name``: by default SARIMAX's ``trend='c'`` intercept
    ``c = mu phi(1) Phi(1)``; ``"mean"`` a regression constant equal to mu (``const``);
    ``"trend"`` the coefficient b = mu / ((d+D)! m^D) of ``t^(d+D)``, whose native name the
    adapter that set the model up gives (statsmodels calls it ``x1``).

    Raises
    ------
    KeyError
        For a native parameter with no canonical counterpart (a term the spec did not ask
        for): no value is made up for it.
    """
    constant_name = constant_name or {"intercept": "intercept", "mean": "const"}.get(mean_kind)
    values = []
    regressors = regressor_positions(param_names, spec)
    for position, name in enumerate(param_names):
        match = _LAG_NAME.match(name)
        if position in regressors:
            values.append(params[regressors[position]])
        elif match:
            kind, seasonal, lag = match.groups()
            values.append(params[f"{'s' if seasonal else ''}{kind}_lag{lag}"])
        elif name == "sigma2":
            values.append(params["sigma2"])
        elif spec.mean and name == constant_name:
            if mean_kind == "intercept":
                values.append(mean_to_intercept(params["mu"], spec, params))
            elif mean_kind == "trend":
                values.append(params["mu"] / trend_scale(spec))
            else:
                values.append(params["mu"])
        else:
            raise KeyError(f"no canonical value for statsmodels parameter {name!r}")
    return np.array(values, dtype=float)


def model_loglike(
    model: Any,
    spec: ModelSpec,
    params: dict[str, float],
    mean_kind: MeanKind = "intercept",
    constant_name: str | None = None,
) -> float:
    """A statsmodels state-space model's own log-likelihood at canonical ``params``.

    ``model.loglike`` on the model object as the library built it for its fit: the same
    initialisation (approximate diffuse prior on the non-stationary states by default),
    burn-in, 2*pi constant, and sigma2 taken from ``params`` (the model's scale is not
    concentrated unless the model itself says so).
    """
    vector = native_vector(list(model.param_names), spec, params, mean_kind, constant_name)
    return float(model.loglike(vector))


def statespace_forecast(
    result: Any, steps: int, levels: tuple[float, ...], future: Any = None
) -> ForecastOutput:
    """Forecast and Gaussian intervals from a SARIMAXResults, as its users get them.

    ``future`` holds the regressors' values over the forecast periods (``(steps, k)``, in
    the fit's column order), when the model has regressors; they are passed as a DataFrame
    named like the fit's last ``k`` regression columns (tsa.arima ARIMA puts its trend
    columns first and builds their future values itself).
    """
    if future is None:
        forecast = result.get_forecast(steps)
    else:
        import pandas as pd

        values = np.asarray(future, dtype=float)
        columns = list(result.model.exog_names)[-values.shape[1] :]
        forecast = result.get_forecast(steps, exog=pd.DataFrame(values, columns=columns))
    lower, upper = {}, {}
    for level in levels:
        bounds = np.asarray(forecast.conf_int(alpha=1.0 - level / 100.0))
        lower[level], upper[level] = bounds[:, 0], bounds[:, 1]
    names = list(result.model.param_names)
    return ForecastOutput(
        mean=np.asarray(forecast.predicted_mean, dtype=float),
        lower=lower,
        upper=upper,
        se=np.asarray(forecast.se_mean, dtype=float),
        interval_method=INTERVAL_METHOD,
        sigma2_used=float(np.asarray(result.params)[names.index("sigma2")]),
        residuals=np.asarray(result.resid, dtype=float),
    )
