"""The worker side of an estimator run in another Python environment.

A stand-alone module: it imports nothing from forecastaudit and needs only the standard
library, numpy and the estimator library of the environment it runs in, so it works in a
virtual environment with older versions of them (``forecastaudit environment create``). The
audit runs it by path, in isolated mode (``python -I environment_worker.py``), and talks to
it through its standard input and output, one JSON message per line:

* request ``{"op": "versions"}`` -> ``{"ok": true, "versions": {...}}``: the interpreter and
  the versions of numpy, scipy, pandas and the estimator libraries installed there;
* request ``{"op": "fit", "library": "statsmodels-sarimax", "y": [...], "order": [p, d, q],
  "seasonal": [P, D, Q], "period": m, "mean": bool}`` -> the library's native results (names,
  values, log-likelihood, counts, criteria, optimiser report, resolved options, residuals)
  and a ``fit`` id; the fitted object stays here;
* request ``{"op": "forecast", "fit": id, "steps": h, "levels": [80, 95]}`` -> the library's
  own forecast from that fit;
* request ``{"op": "loglike", "library": ..., "y": ..., (model), ...}`` -> the library's
  own log-likelihood at each set of native parameters: for statsmodels ``"names"`` and
  ``"vectors"`` (the model's parameter names are checked against ``names``), for
  statsforecast ``"fixed"`` (one mapping of its coefficient names per point; every
  coefficient must end up fixed);
* request ``{"op": "close"}``, or the end of the input, ends the worker.

A request that fails gives ``{"ok": false, "error": "...", "trace": "..."}``; every warning
and anything printed during a call come back with its answer. Non-finite numbers are
written as ``null`` (NaN) and ``"inf"`` / ``"-inf"``. The conversion of the native values to
the canonical convention is made by the adapter in the audit's own environment
(:mod:`forecastaudit.adapters.other_environment`), with the same code as the built-in
adapter of the library, so the two columns differ only by what the library versions do.
"""

import contextlib
import io
import json
import math
import platform
import sys
import traceback
import warnings

PROTOCOL = 1
_FITS = {}


def _plain(value):
    """JSON-ready values, non-finite floats tagged as forecastaudit's estimates do."""
    import numpy as np

    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        number = float(value)
        if math.isfinite(number):
            return number
        if math.isnan(number):
            return None
        return "inf" if number > 0 else "-inf"
    if value is None or isinstance(value, str):
        return value
    if hasattr(value, "__array__"):  # a pandas Series or another array-like
        return _plain(np.asarray(value).tolist())
    return repr(value)


def _version(name):
    from importlib import metadata

    try:
        return metadata.version(name)
    except metadata.PackageNotFoundError:
        return None


def versions():
    """The interpreter and the numerical packages installed in this environment."""
    names = ("numpy", "scipy", "pandas", "statsmodels", "statsforecast", "pmdarima", "sktime")
    return {
        "python": platform.python_version(),
        "implementation": platform.python_implementation(),
        "executable": sys.executable,
        "packages": {name: _version(name) for name in names},
    }


# ---------------------------------------------------------------------- statsmodels SARIMAX
def _sarimax(message):
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    return SARIMAX(
        [float(v) for v in message["y"]],
        order=tuple(message["order"]),
        seasonal_order=(*message["seasonal"], message["period"] or 0),
        trend="c" if message["mean"] else "n",
    )


def _sarimax_fit(message):
    import numpy as np

    model = _sarimax(message)
    result = model.fit(disp=False)
    fit_id = str(len(_FITS) + 1)
    _FITS[fit_id] = result
    init = getattr(model.ssm, "initialization", None)
    settings = dict(getattr(result, "mle_settings", None) or {})
    return {
        "fit": fit_id,
        "param_names": list(model.param_names),
        "params": np.asarray(result.params, dtype=float),
        "scale": float(result.scale),
        "llf": float(result.llf),
        "nobs_effective": int(result.nobs_effective),
        "df_model": int(result.df_model),
        "aic": float(result.aic),
        "aicc": float(result.aicc),
        "bic": float(result.bic),
        "loglikelihood_burn": int(result.loglikelihood_burn),
        "simple_differencing": bool(getattr(model, "simple_differencing", False)),
        "approximate_diffuse_variance": getattr(init, "approximate_diffuse_variance", None),
        "initialization": getattr(model.ssm, "_initialization", None),
        "use_exact_diffuse": bool(getattr(model, "use_exact_diffuse", False)),
        "mle_retvals": dict(getattr(result, "mle_retvals", None) or {}),
        "mle_settings": {k: v for k, v in settings.items() if k in ("optimizer", "maxiter")},
        "init_kwds": dict(model._get_init_kwds()),
        "resid": np.asarray(result.resid, dtype=float),
    }


def _sarimax_forecast(result, steps, levels):
    import numpy as np

    forecast = result.get_forecast(steps)
    lower, upper = {}, {}
    for level in levels:
        bounds = np.asarray(forecast.conf_int(alpha=1.0 - level / 100.0))
        lower[repr(float(level))], upper[repr(float(level))] = bounds[:, 0], bounds[:, 1]
    names = list(result.model.param_names)
    return {
        "mean": np.asarray(forecast.predicted_mean, dtype=float),
        "se": np.asarray(forecast.se_mean, dtype=float),
        "lower": lower,
        "upper": upper,
        "sigma2_used": float(np.asarray(result.params)[names.index("sigma2")]),
    }


def _sarimax_loglike(message):
    import numpy as np

    model = _sarimax(message)
    names = list(model.param_names)
    if names != list(message["names"]):
        raise ValueError(f"the model's parameters are {names}, not {message['names']}")
    return [float(model.loglike(np.asarray(v, dtype=float))) for v in message["vectors"]]


# ---------------------------------------------------------------------- statsforecast ARIMA
_MODEL_KEYS = ("coef", "mask", "sigma2", "loglik", "aic", "aicc", "bic", "nobs", "code")


def _statsforecast(message, **options):
    from statsforecast.models import ARIMA

    order, seasonal = list(message["order"]), list(message["seasonal"])
    differences = order[1] + seasonal[1]
    return ARIMA(
        order=tuple(order),
        season_length=message["period"] or 1,
        seasonal_order=tuple(seasonal),
        include_mean=bool(message["mean"]) and differences == 0,
        include_drift=bool(message["mean"]) and differences == 1,
        **options,
    )


def _statsforecast_fit(message):
    import inspect

    import numpy as np
    from statsforecast.models import ARIMA

    model = _statsforecast(message)
    model.fit(np.asarray(message["y"], dtype=float))
    fit_id = str(len(_FITS) + 1)
    _FITS[fit_id] = model
    fit = model.model_
    options = {
        name: getattr(model, name)
        for name in inspect.signature(ARIMA.__init__).parameters
        if name != "self" and hasattr(model, name)
    }
    return {
        "fit": fit_id,
        "model_": {key: fit[key] for key in _MODEL_KEYS},
        "residuals": np.asarray(fit["residuals"], dtype=float),
        "options": options,
    }


def _statsforecast_forecast(model, steps, levels):
    named = [int(level) if float(level).is_integer() else level for level in levels]
    import numpy as np

    out = model.predict(h=steps, level=named)
    return {
        # Bounds come back as pandas Series in some versions: plain arrays from here on.
        "out": {str(k): np.asarray(v, dtype=float) for k, v in out.items()},
        "sigma2": float(model.model_["sigma2"]),
        "residuals": model.model_["residuals"],
    }


def _statsforecast_loglike(message):
    import numpy as np

    values = []
    for fixed in message["fixed"]:
        model = _statsforecast(message, method="ML", fixed=dict(fixed))
        model.fit(np.asarray(message["y"], dtype=float))
        fit = model.model_
        free = [name for name, is_free in zip(fit["coef"], fit["mask"], strict=True) if is_free]
        if free or set(fit["coef"]) != set(fixed):
            raise ValueError(
                f"statsforecast did not fix every coefficient (free: {free}; asked "
                f"{sorted(fixed)}, got {sorted(fit['coef'])})"
            )
        values.append(float(fit["loglik"]))
    return values


LIBRARIES = {
    "statsmodels-sarimax": {
        "fit": _sarimax_fit,
        "forecast": _sarimax_forecast,
        "loglike": _sarimax_loglike,
    },
    "statsforecast": {
        "fit": _statsforecast_fit,
        "forecast": _statsforecast_forecast,
        "loglike": _statsforecast_loglike,
    },
}


# ---------------------------------------------------------------------- the loop
def _library(message):
    name = message.get("library")
    if name not in LIBRARIES:
        raise ValueError(f"this worker cannot run {name!r}; it runs {sorted(LIBRARIES)}")
    return LIBRARIES[name]


def handle(message):
    """The answer to one request (its ``ok`` and payload)."""
    op = message.get("op")
    if op == "versions":
        return {"versions": versions(), "protocol": PROTOCOL}
    if op == "fit":
        return _library(message)["fit"](message)
    if op == "forecast":
        result = _FITS[str(message["fit"])]
        library = LIBRARIES[message.get("library", "statsmodels-sarimax")]
        return library["forecast"](result, int(message["steps"]), list(message["levels"]))
    if op == "loglike":
        return {"values": _library(message)["loglike"](message)}
    raise ValueError(f"unknown request {op!r}")


def _answer(message):
    out, err = io.StringIO(), io.StringIO()
    with (
        warnings.catch_warnings(record=True) as caught,
        contextlib.redirect_stdout(out),
        contextlib.redirect_stderr(err),
    ):
        warnings.simplefilter("always")
        try:
            payload = {"ok": True, **handle(message)}
        except Exception as exc:  # the library's failure goes back as a value
            payload = {
                "ok": False,
                "error": f"{type(exc).__name__}: {exc}",
                "trace": traceback.format_exc(limit=4),
            }
    payload["warnings"] = [
        {
            "category": w.category.__name__,
            "message": str(w.message),
            "source": f"{w.filename}:{w.lineno}",
        }
        for w in caught
    ]
    payload["output"] = (out.getvalue() + err.getvalue()).strip()
    return payload


def main(stdin=None, stdout=None):
    """Answer requests, one JSON line each, until ``close`` or the end of the input."""
    stdin = stdin or sys.stdin
    stdout = stdout or sys.stdout
    for line in stdin:
        if not line.strip():
            continue
        try:
            message = json.loads(line)
        except ValueError as exc:
            answer = {"ok": False, "error": f"not a JSON request: {exc}", "trace": ""}
        else:
            if message.get("op") == "close":
                break
            answer = _answer(message)
        stdout.write(json.dumps(_plain(answer), allow_nan=False) + "\n")
        stdout.flush()


if __name__ == "__main__":
    main()
