"""The estimator protocol: what every adapter declares and returns.

An adapter reads top to bottom as "translate the spec -> call the library -> translate the
result". The shared work (availability, support checks from declared capabilities, timing,
warning and output capture, turning exceptions into a failed estimate) lives here, once, in
:meth:`EstimatorAdapter.fit`; adapters implement only :meth:`EstimatorAdapter._fit`.
"""

from __future__ import annotations

import importlib
import importlib.metadata
import math
from abc import ABC, abstractmethod
from dataclasses import dataclass, field
from typing import Any, ClassVar, Literal

import numpy as np

from forecastaudit.adapters.capture import _Captured, _run_captured
from forecastaudit.conventions import coefficient_names, information_criteria, parameter_names
from forecastaudit.errors import EstimatorError
from forecastaudit.estimate import Estimate, Forecast, Sigma2Kind
from forecastaudit.jsonutil import to_plain
from forecastaudit.spec import ModelSpec

_FOUND_VERSIONS: dict[str, str] = {}


def installed_version(package: str) -> str | None:
    """The installed version of ``package``, or None when it is not installed.

    A version once found is kept for the life of the process (asking the package metadata
    costs milliseconds, and every record asks for several); a package not found is asked
    again next time, so one installed later is seen.
    """
    found = _FOUND_VERSIONS.get(package)
    if found is None:
        try:
            found = importlib.metadata.version(package)
        except importlib.metadata.PackageNotFoundError:
            return None
        _FOUND_VERSIONS[package] = found
    return found


@dataclass(frozen=True)
class Capabilities:
    """What an adapter can do, declared as data and checked once, by the protocol.

    Every field is enforced: the protocol refuses (status ``unsupported``, with the reason)
    a spec that needs something the adapter does not declare, and calls the optional
    methods only where they are declared.

    Attributes
    ----------
    mean_differences : frozenset of int
        Values of d + D for which the adapter can estimate ``mu`` (the mean of the
        differenced series). Empty when it cannot fit a mean at all. A spec with a mean and
        another d + D is ``unsupported``.
    regressors : bool
        Whether regressors (regression with ARIMA errors) are accepted. A spec with
        regressors and an adapter without this is ``unsupported``.
    regression_form : {"levels", "differences", ""}
        How the library regresses, measured: ``"levels"`` is the canonical regression of the
        series on the regressors in levels with ARIMA errors (the regressors differenced
        with the series); ``"differences"`` regresses the differenced series on the
        regressors as given, a different model, so a spec with regressors and differencing
        is ``unsupported`` there. Empty without regressors.
    constant_separate : bool
        Whether the library's constant (intercept, mean or drift) is a term of its own
        beside the regression coefficients, as ``mu`` is here (rather than a column the user
        must add to the regressors).
    forecast : bool
        Whether the adapter forecasts, with intervals, from its own fit
        (:meth:`EstimatorAdapter._forecast`). Without it no forecast is asked for.
    own_loglike : bool
        Whether the adapter can evaluate the library's own log-likelihood, with the same
        initialisation and conditioning as its fit, at given canonical parameters
        (:meth:`EstimatorAdapter._loglike_at`): this separates "its optimiser stopped short"
        from "its objective differs".
    forecast_at_params : bool
        Whether the adapter can filter and forecast at given canonical parameters
        (:meth:`EstimatorAdapter._forecast_at`), used to check the reference predictor
        against a general-purpose Kalman filter.
    """

    mean_differences: frozenset[int] = frozenset()
    regressors: bool = False
    regression_form: Literal["levels", "differences", ""] = ""
    constant_separate: bool = True
    forecast: bool = True
    own_loglike: bool = False
    forecast_at_params: bool = False

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "mean_differences": sorted(self.mean_differences),
            "regressors": self.regressors,
            "regression_form": self.regression_form,
            "constant_separate": self.constant_separate,
            "forecast": self.forecast,
            "own_loglike": self.own_loglike,
            "forecast_at_params": self.forecast_at_params,
        }


@dataclass(frozen=True)
class FitRequest:
    """What an adapter is asked to fit: plain values only, so a request crosses processes.

    Attributes
    ----------
    y : numpy.ndarray
        The series after the transform (the adapter gets its own copy).
    spec : ModelSpec
        The model to fit.
    regressors : numpy.ndarray or None
        The regressor values, shape ``(n, k)``, columns in ``spec.regressors`` order (not
        transformed); None when the spec has none.
    """

    y: np.ndarray
    spec: ModelSpec
    regressors: np.ndarray | None = None

    def copy(self) -> FitRequest:
        """A request with its own copies of the arrays (what an adapter is handed)."""
        return FitRequest(
            np.array(self.y, dtype=float, copy=True),
            self.spec,
            None if self.regressors is None else np.array(self.regressors, dtype=float),
        )

    def regressor_frame(self, rows: np.ndarray | None = None) -> Any:
        """The regressors (or ``rows`` of future values) as a DataFrame named by the spec."""
        import pandas as pd

        values = self.regressors if rows is None else rows
        return pd.DataFrame(np.asarray(values, dtype=float), columns=list(self.spec.regressors))

    @property
    def n_w(self) -> int:
        """Observations left after differencing."""
        return len(self.y) - self.spec.lost_to_differencing


@dataclass
class FitOutput:
    """What an adapter's ``_fit`` hands back, already in the canonical convention.

    Attributes
    ----------
    params : dict
        Canonical coefficients (``coefficient_names(spec)``), without sigma2.
    native_params : dict
        The library's own names and values, untouched.
    sigma2_reported : float
        The innovation variance as the library reports it.
    sigma2_kind : {"maximum-likelihood", "df-adjusted"}
        Whether the reported variance is the maximum-likelihood one or a
        degrees-of-freedom-adjusted one.
    sigma2_definition : str
        What the reported variance is, in plain words (the divisor used).
    sigma2_ml : float
        The maximum-likelihood variance, converted where the library reports another one.
    loglike : float
        The log-likelihood as the library reports it.
    loglike_definition : str
        How the library defines it (initialisation, burn-in, constants, which n).
    n_used : int
        Observations the library's criteria count.
    k_counted : int
        Parameters the library's criteria count.
    criteria : dict
        The library's own ``aic``, ``aicc``, ``bic`` (NaN where not offered).
    converged : bool or None
        The optimiser's own verdict (None when the library gives none).
    optimizer : dict
        The optimiser's message, code, iterations, as the library reports them.
    options : dict of str to dict
        Every option used, resolved (those set from the spec and the library defaults), in
        one namespace per library: ``{"pmdarima": {...}, "statsmodels": {...}}``, the
        called library first.
    extra_terms : dict
        Terms the library fitted that the spec did not ask for, under their native names
        (the audit then reports that a different model was fitted).
    conversions : list of str
        Conversions made on the way to the canonical convention, in plain words.
    notes : list of str
        Other remarks on how the library defines what it reports.
    fitted_model : str
        The model actually fitted, in our text form, when it differs from the spec.
    overridden_defaults : dict
        Library defaults that the spec overrode, with the default's value, e.g.
        ``{"with_intercept": True}`` when the library would have added a constant.
    native : object
        The library's result object (kept in memory only, never written to a record).
    """

    params: dict[str, float]
    native_params: dict[str, float]
    sigma2_reported: float
    sigma2_kind: Sigma2Kind
    sigma2_definition: str
    sigma2_ml: float
    loglike: float
    loglike_definition: str
    n_used: int
    k_counted: int
    criteria: dict[str, float]
    converged: bool | None
    optimizer: dict[str, Any]
    options: dict[str, dict[str, Any]]
    extra_terms: dict[str, float] = field(default_factory=dict)
    conversions: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    fitted_model: str | None = None
    overridden_defaults: dict[str, Any] = field(default_factory=dict)
    native: Any = None


@dataclass
class ForecastOutput:
    """What an adapter's forecast hands back, on the scale the library was given.

    Attributes
    ----------
    mean : numpy.ndarray
        Point forecasts for steps 1..h.
    lower, upper : dict of float to numpy.ndarray
        Interval bounds by level in percent (80.0, 95.0, ...).
    se : numpy.ndarray or None
        Forecast standard errors when the library gives them.
    interval_method : str
        How the library builds its intervals.
    sigma2_used : float
        The innovation variance the intervals use.
    residuals : numpy.ndarray or None
        In-sample one-step residuals (full length; the start-up values are dropped later).
    """

    mean: np.ndarray
    lower: dict[float, np.ndarray]
    upper: dict[float, np.ndarray]
    se: np.ndarray | None
    interval_method: str
    sigma2_used: float
    residuals: np.ndarray | None = None


def _forecast_from(key: str, steps: int, levels: tuple[float, ...], call: _Captured) -> Forecast:
    from scipy.stats import norm

    if call.failed:
        return Forecast(key=key, steps=steps, levels=levels, **call.failure("forecast"))
    out: ForecastOutput = call.result
    se, derived = out.se, False
    if se is None:
        widest = max(levels)
        z = norm.ppf(0.5 + widest / 200.0)
        se, derived = (out.upper[widest] - out.lower[widest]) / (2.0 * z), True
    return Forecast(
        key=key,
        status="ok",
        steps=steps,
        levels=levels,
        mean=np.asarray(out.mean, dtype=float),
        lower={k: np.asarray(v, dtype=float) for k, v in out.lower.items()},
        upper={k: np.asarray(v, dtype=float) for k, v in out.upper.items()},
        se=np.asarray(se, dtype=float),
        se_derived=derived,
        interval_method=out.interval_method,
        sigma2_used=float(out.sigma2_used),
        residuals=None if out.residuals is None else np.asarray(out.residuals, dtype=float),
        **call.kept(),
    )


def _regressor_problem(request: FitRequest) -> str:
    """Why the request's regressors do not fit its spec, or an empty string."""
    k = len(request.spec.regressors)
    x = request.regressors
    if not k:
        return "" if x is None else "regressor values were given, but the spec names none"
    if x is None:
        return f"the spec names {k} regressor(s) but no regressor values were given"
    shape = np.shape(x)
    if len(shape) != 2 or shape[1] != k or shape[0] != len(request.y):
        return (
            f"the regressor values have shape {shape}; the spec needs ({len(request.y)}, {k}) "
            "(one row per observation, one column per regressor)"
        )
    return ""


class LibraryBound:
    """Version and availability of the library an adapter calls (``package``, ``module``).

    Both are asked of the adapter instance, not its class: an adapter that runs the library
    elsewhere (another environment, another machine) answers for where it runs.
    """

    package: ClassVar[str]
    module: ClassVar[str]

    def version(self) -> str | None:
        """Installed version of the package, or None when it is not installed."""
        return installed_version(self.package)

    def availability(self) -> str | None:
        """None when the library imports; otherwise the reason it does not."""
        try:
            importlib.import_module(self.module)
        except Exception as exc:  # any import failure makes the adapter unavailable
            return f"{self.module} could not be imported ({type(exc).__name__}: {exc})"
        return None


class EstimatorAdapter(LibraryBound, ABC):
    """Base class of the estimator adapters.

    Subclasses set the class attributes and implement :meth:`_fit` (and, where their
    capabilities say so, :meth:`_forecast`, :meth:`_loglike_at`, :meth:`_forecast_at`).
    Everything else (availability, support checks against the declared capabilities,
    timing, capture of warnings and printed output, conversion of exceptions into a failed
    estimate) is done here once.

    Attributes
    ----------
    kind : str
        ``"fit"`` (registry kind).
    key : str
        Estimator key used in reports and by callers.
    engine : str
        Engine lineage; wrappers of the same engine share it.
    package : str
        Distribution name whose version is recorded.
    module : str
        Module imported to check availability.
    description : str
        One line: which class of which library is called.
    capabilities : Capabilities
        What the adapter can do; every field is enforced here.
    """

    kind: ClassVar[str] = "fit"
    key: ClassVar[str]
    engine: ClassVar[str]
    package: ClassVar[str]
    module: ClassVar[str]
    description: ClassVar[str]
    capabilities: ClassVar[Capabilities]

    # ------------------------------------------------------------------ declared checks
    def unsupported_reason(self, spec: ModelSpec) -> str | None:
        """None when the declared capabilities cover ``spec``; otherwise why not."""
        caps = self.capabilities
        if spec.mean and spec.n_differences not in caps.mean_differences:
            return (
                f"{self.description} cannot estimate a mean of the differenced series with "
                f"d + D = {spec.n_differences} (it can with d + D in "
                f"{sorted(caps.mean_differences) or 'no case'})."
            )
        if spec.regressors and not caps.regressors:
            return f"{self.description} does not take regressors."
        if spec.regressors and caps.regression_form == "differences" and spec.n_differences:
            return (
                f"{self.description} regresses the differenced series on the regressors as "
                "given, a different model from the regression on the levels with ARIMA errors "
                "that the spec asks for; no conversion of its coefficients exists."
            )
        return None

    def _base(self, spec: ModelSpec) -> dict[str, Any]:
        return {
            "key": self.key,
            "engine": self.engine,
            "package": self.package,
            "version": self.version(),
            "spec": spec,
        }

    # ------------------------------------------------------------------ the fit
    def fit(self, y: np.ndarray | FitRequest, spec: ModelSpec | None = None) -> Estimate:
        """Fit a request (or ``spec`` to ``y``, already transformed); the canonical estimate.

        Never raises for a library failure: the estimate's status says what happened.
        """
        request = y if isinstance(y, FitRequest) else FitRequest(np.asarray(y), spec)
        spec = request.spec
        base = self._base(spec)
        missing = self.availability()
        if missing is not None:
            return Estimate(**base, status="unavailable", reason=missing)
        unsupported = self.unsupported_reason(spec)
        if unsupported is not None:
            return Estimate(**base, status="unsupported", reason=unsupported)
        if request.n_w <= 0:
            return Estimate(
                **base,
                status="failed",
                reason=(
                    f"the series ({len(request.y)} observations) is no longer than the "
                    f"{spec.lost_to_differencing} used up by differencing; nothing was fitted"
                ),
            )
        problem = _regressor_problem(request)
        if problem:
            return Estimate(**base, status="failed", reason=problem)
        own = request.copy()
        call = _run_captured(self._fit, own)
        if call.failed:
            return Estimate(**base, **call.failure("fit"))
        return self._estimate_from(call.result, base, spec, request.n_w, call)

    def _estimate_from(
        self, result: FitOutput, base: dict[str, Any], spec: ModelSpec, n_w: int, call: _Captured
    ) -> Estimate:
        names = coefficient_names(spec)
        native_params = {str(k_): float(v) for k_, v in result.native_params.items()}

        def failed(reason: str) -> Estimate:
            return Estimate(
                **base, status="failed", reason=reason, native_params=native_params, **call.kept()
            )

        missing = [name for name in names if name not in result.params]
        if missing:
            return failed(f"the fit returned no value for {', '.join(missing)}")
        params = {name: float(result.params[name]) for name in names}
        params["sigma2"] = float(result.sigma2_ml)
        not_finite = [name for name, value in params.items() if not math.isfinite(value)]
        if not_finite:
            # A library that reports success with NaN or infinite values has not fitted.
            return failed(
                "the library reported a fit but returned non-finite values for "
                f"{', '.join(not_finite)}; nothing usable was estimated"
            )
        ordered = {name: params[name] for name in parameter_names(spec)}
        extra = {str(k_): float(v) for k_, v in result.extra_terms.items()}
        # Canonical names beyond the spec are terms it did not ask for: never dropped.
        extra.update({str(k_): float(v) for k_, v in result.params.items() if k_ not in params})
        fitted_model = result.fitted_model
        if extra and fitted_model is None:
            fitted_model = f"{spec} with extra terms: {', '.join(sorted(extra))}"
        k = len(names) + 1
        return Estimate(
            **base,
            status="ok",
            params=ordered,
            native_params=native_params,
            extra_terms=extra,
            sigma2_reported=float(result.sigma2_reported),
            sigma2_kind=result.sigma2_kind,
            sigma2_definition=result.sigma2_definition,
            loglike_native=float(result.loglike),
            loglike_definition=result.loglike_definition,
            n_used_native=int(result.n_used),
            k_counted_native=int(result.k_counted),
            criteria_native={k_: float(v) for k_, v in result.criteria.items()},
            criteria=information_criteria(result.loglike, k, n_w),
            n_w=n_w,
            k=k,
            converged=result.converged,
            # Plain JSON values from here on, so the estimate round-trips exactly.
            optimizer=to_plain(result.optimizer, nonfinite="tagged"),
            options={
                str(ns): to_plain(dict(values), nonfinite="tagged")
                for ns, values in result.options.items()
            },
            conversions=list(result.conversions),
            notes=list(result.notes),
            fitted_model=fitted_model,
            overridden_defaults=to_plain(dict(result.overridden_defaults), nonfinite="tagged"),
            native=result.native,
            **call.kept(),
        )

    @abstractmethod
    def _fit(self, request: FitRequest) -> FitOutput:
        """Translate the spec, call the library on ``request.y``, translate the result."""

    # ------------------------------------------------------------------ forecasts
    def forecast(
        self,
        estimate: Estimate,
        steps: int,
        levels: tuple[float, ...],
        future_regressors: np.ndarray | None = None,
    ) -> Forecast:
        """Forecast ``steps`` ahead from a fitted estimate, with intervals at ``levels`` (%).

        Uses the library's own forecast and interval method, as its users would; needs the
        library's fitted object, so it runs where the fit ran. With regressors,
        ``future_regressors`` (shape ``(steps, k)``) are their values over the forecast
        periods and are required. Never raises for a library failure; the forecast's status
        says what happened.
        """
        if not self.capabilities.forecast:
            reason = f"{self.description} does not forecast (declared in its capabilities)"
            return Forecast(self.key, "failed", steps, levels, reason=reason)
        if not estimate.ok or estimate.native is None:
            reason = f"no fitted model to forecast from ({estimate.status})"
            return Forecast(self.key, "failed", steps, levels, reason=reason)
        if estimate.spec is not None and estimate.spec.regressors:
            if future_regressors is None or len(future_regressors) < steps:
                reason = (
                    f"forecasting {steps} steps with regressors needs their {steps} future "
                    "values; none or too few were given"
                )
                return Forecast(self.key, "failed", steps, levels, reason=reason)
            future = np.array(future_regressors[:steps], dtype=float)
            call = _run_captured(self._forecast, estimate.native, steps, levels, future=future)
        else:  # adapters written before regressors take three arguments
            call = _run_captured(self._forecast, estimate.native, steps, levels)
        return _forecast_from(self.key, steps, levels, call)

    def loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        """The library's own log-likelihood of ``request`` at canonical ``params``.

        Same initialisation, conditioning and scale as the library's fit (``own_loglike``
        adapters only). NaN when the library cannot evaluate it there.

        Raises
        ------
        EstimatorError
            When the adapter does not declare ``own_loglike``.
        """
        self._require("own_loglike", "evaluate its own likelihood at given parameters")
        call = _run_captured(self._loglike_at, request.copy(), params)
        return math.nan if call.failed else float(call.result)

    def forecast_at(
        self,
        y: np.ndarray,
        spec: ModelSpec,
        params: dict[str, float],
        steps: int,
        levels: tuple[float, ...],
        *,
        regressors: np.ndarray | None = None,
        future_regressors: np.ndarray | None = None,
    ) -> Forecast:
        """Filter ``y`` at given canonical parameters and forecast (``forecast_at_params``).

        With regressors in the spec, ``regressors`` (``(n, k)``) and ``future_regressors``
        (``(steps, k)``) are their values over the sample and the forecast periods.
        """
        self._require("forecast_at_params", "forecast at given parameters")
        extra: dict[str, Any] = {}
        if spec.regressors:
            extra = {
                "regressors": np.array(regressors, dtype=float),
                "future": np.array(future_regressors, dtype=float),
            }
        call = _run_captured(
            self._forecast_at,
            np.array(y, dtype=float, copy=True),
            spec,
            params,
            steps,
            levels,
            **extra,
        )
        return _forecast_from(self.key, steps, levels, call)

    def _require(self, capability: str, action: str) -> None:
        """Raise :class:`EstimatorError` unless the adapter declares ``capability``."""
        if not getattr(self.capabilities, capability):
            raise EstimatorError(f"{self.key} cannot {action}.")

    def _forecast(
        self,
        native: Any,
        steps: int,
        levels: tuple[float, ...],
        future: np.ndarray | None = None,
    ) -> ForecastOutput:
        """Forecast with the library from its fitted object ``native``.

        ``future`` (the regressors over the forecast periods, ``(steps, k)``) is passed only
        when the spec has regressors.
        """
        raise NotImplementedError(f"{self.key} does not forecast")

    def _loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        """The library's own log-likelihood at canonical ``params`` (``own_loglike`` only)."""
        raise NotImplementedError(f"{self.key} cannot evaluate its own likelihood")

    def _forecast_at(
        self,
        y: np.ndarray,
        spec: ModelSpec,
        params: dict[str, float],
        steps: int,
        levels: tuple[float, ...],
    ) -> ForecastOutput:
        raise NotImplementedError(f"{self.key} cannot forecast at given parameters")
