"""Plain estimate types that cross process boundaries: estimates, forecasts, search outcomes.

Each has a lossless ``to_dict`` / ``from_dict`` pair: ``from_dict(x.to_dict())`` equals
``x`` in every field except the library's in-memory object (``native``), which never
leaves the process that made it. Non-finite numbers are kept exactly (see
:mod:`forecastaudit.jsonutil`). The JSON Schema of one estimate is
``forecastaudit/data/estimate.schema.json`` (:func:`estimate_schema`).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from forecastaudit.errors import EstimatorError
from forecastaudit.jsonutil import real, to_plain
from forecastaudit.spec import ModelSpec

Status = Literal["ok", "failed", "unavailable", "unsupported", "timed-out"]
#: Whether a reported innovation variance is the maximum-likelihood one or df-adjusted.
Sigma2Kind = Literal["maximum-likelihood", "df-adjusted"]
#: Where an estimate was made: fitted by an adapter in this environment, imported from a
#: record of software that does not run here, or fitted in another Python environment.
Origin = Literal["fitted", "imported", "environment"]
#: Each origin in words, for tables and reports.
ORIGINS: dict[str, str] = {
    "fitted": "fitted here",
    "imported": "imported",
    "environment": "another environment",
}


def _tagged(value: Any) -> Any:
    return to_plain(value, nonfinite="tagged")


def _spec_from_dict(data: dict[str, Any] | None) -> ModelSpec | None:
    if data is None:
        return None
    transform = data.get("transform")
    if isinstance(transform, list):
        transform = tuple(transform)
    return ModelSpec(
        order=tuple(data["order"]),
        seasonal=tuple(data["seasonal"]),
        period=data.get("period"),
        mean=bool(data.get("mean", False)),
        transform=transform,
        regressors=tuple(data.get("regressors", data.get("exog", ()))),
    )


def _reals(values: dict[str, Any]) -> dict[str, float]:
    return {str(k): real(v) for k, v in values.items()}


@dataclass(frozen=True)
class CapturedWarning:
    """A warning an estimator raised during the fit, kept for the record."""

    category: str
    message: str
    source: str

    def to_dict(self) -> dict[str, str]:
        """JSON-ready form."""
        return {"category": self.category, "message": self.message, "source": self.source}

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> CapturedWarning:
        """The inverse of :meth:`to_dict`."""
        return cls(category=data["category"], message=data["message"], source=data["source"])


@dataclass
class Estimate:
    """One estimator's fit of the spec, in the canonical convention, with its native output.

    Attributes
    ----------
    key : str
        The estimator key, e.g. ``"statsmodels-sarimax"``.
    engine : str
        The computational engine (lineage). Wrappers of one engine share it and count once
        as independent evidence.
    package, version : str
        The distribution that was called and its installed version.
    status : {"ok", "failed", "unavailable", "unsupported", "timed-out"}
        ``ok``: fitted. ``failed``: the library raised or returned nothing usable.
        ``unavailable``: the package is not installed. ``unsupported``: the library cannot
        fit this spec (reason given); nothing was fitted. ``timed-out``: no result within
        the time limit; the work was stopped.
    reason : str
        Why the status is not ``ok`` (empty when it is).
    params : dict
        Canonical parameters including ``sigma2`` (the maximum-likelihood variance).
    sigma2_kind : {"maximum-likelihood", "df-adjusted"}
        What the reported variance ``sigma2_reported`` is; ``params["sigma2"]`` is always
        the maximum-likelihood value.
    extra_terms : dict
        Terms the library fitted that the spec did not ask for (native names).
    options : dict of str to dict
        Every option of the call, resolved, one namespace per library (called one first).
    criteria : dict
        ``aic``, ``aicc``, ``bic`` on the canonical definition (k = coefficients + 1,
        n = n_w): from the library's own log-likelihood when fitted, replaced by the audit
        with the reference log-likelihood at the estimate's parameters.
    seconds : float
        Wall time of the fit.
    warnings : list of CapturedWarning
        Every warning raised during the fit (none are shown or swallowed).
    output : str
        Anything the library printed during the fit.
    origin : {"fitted", "imported", "environment"}
        Where the estimate was made (see :data:`ORIGINS`).
    provenance : dict
        Where it came from beyond the package version: the import record's source and
        digest, or the other environment's interpreter and package versions.
    """

    key: str
    engine: str
    package: str
    version: str | None
    status: Status
    reason: str = ""
    spec: ModelSpec | None = None
    params: dict[str, float] = field(default_factory=dict)
    native_params: dict[str, float] = field(default_factory=dict)
    sigma2_reported: float = math.nan
    sigma2_kind: Sigma2Kind = "maximum-likelihood"
    sigma2_definition: str = ""
    loglike_native: float = math.nan
    loglike_definition: str = ""
    n_used_native: int | None = None
    k_counted_native: int | None = None
    criteria_native: dict[str, float] = field(default_factory=dict)
    criteria: dict[str, float] = field(default_factory=dict)
    n_w: int | None = None
    k: int | None = None
    converged: bool | None = None
    optimizer: dict[str, Any] = field(default_factory=dict)
    options: dict[str, dict[str, Any]] = field(default_factory=dict)
    extra_terms: dict[str, float] = field(default_factory=dict)
    conversions: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    fitted_model: str | None = None
    overridden_defaults: dict[str, Any] = field(default_factory=dict)
    warnings: list[CapturedWarning] = field(default_factory=list)
    output: str = ""
    seconds: float = 0.0
    origin: Origin = "fitted"
    provenance: dict[str, Any] = field(default_factory=dict)
    native: Any = field(default=None, repr=False, compare=False)

    @property
    def ok(self) -> bool:
        """True when the estimator produced an estimate."""
        return self.status == "ok"

    @property
    def sigma2(self) -> float:
        """The maximum-likelihood innovation variance (NaN when not fitted)."""
        return self.params.get("sigma2", math.nan)

    def option(self, name: str, default: Any = None) -> Any:
        """A resolved option by its library name, the called library's namespace first."""
        for values in self.options.values():
            if name in values:
                return values[name]
        return default

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (the native result object is left out); see :meth:`from_dict`."""
        return {
            "key": self.key,
            "engine": self.engine,
            "package": self.package,
            "version": self.version,
            "status": self.status,
            "reason": self.reason,
            "spec": None if self.spec is None else self.spec.to_dict(),
            "params": _tagged(self.params),
            "native_params": _tagged(self.native_params),
            "extra_terms": _tagged(self.extra_terms),
            "sigma2_reported": _tagged(self.sigma2_reported),
            "sigma2_kind": self.sigma2_kind,
            "sigma2_definition": self.sigma2_definition,
            "loglike_native": _tagged(self.loglike_native),
            "loglike_definition": self.loglike_definition,
            "n_used_native": self.n_used_native,
            "k_counted_native": self.k_counted_native,
            "criteria_native": _tagged(self.criteria_native),
            "criteria": _tagged(self.criteria),
            "n_w": self.n_w,
            "k": self.k,
            "converged": self.converged,
            "optimizer": _tagged(self.optimizer),
            "options": _tagged(self.options),
            "conversions": list(self.conversions),
            "notes": list(self.notes),
            "fitted_model": self.fitted_model,
            "overridden_defaults": _tagged(self.overridden_defaults),
            "warnings": [w.to_dict() for w in self.warnings],
            "output": self.output,
            "seconds": _tagged(self.seconds),
            "origin": self.origin,
            "provenance": _tagged(self.provenance),
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> Estimate:
        """The inverse of :meth:`to_dict` (``native`` is None)."""
        return cls(
            key=data["key"],
            engine=data["engine"],
            package=data["package"],
            version=data.get("version"),
            status=data["status"],
            reason=data.get("reason", ""),
            spec=_spec_from_dict(data.get("spec")),
            params=_reals(data.get("params", {})),
            native_params=_reals(data.get("native_params", {})),
            extra_terms=_reals(data.get("extra_terms", {})),
            sigma2_reported=real(data.get("sigma2_reported")),
            sigma2_kind=data.get("sigma2_kind", "maximum-likelihood"),
            sigma2_definition=data.get("sigma2_definition", ""),
            loglike_native=real(data.get("loglike_native")),
            loglike_definition=data.get("loglike_definition", ""),
            n_used_native=data.get("n_used_native"),
            k_counted_native=data.get("k_counted_native"),
            criteria_native=_reals(data.get("criteria_native", {})),
            criteria=_reals(data.get("criteria", {})),
            n_w=data.get("n_w"),
            k=data.get("k"),
            converged=data.get("converged"),
            optimizer=dict(data.get("optimizer", {})),
            options={str(ns): dict(v) for ns, v in data.get("options", {}).items()},
            conversions=list(data.get("conversions", [])),
            notes=list(data.get("notes", [])),
            fitted_model=data.get("fitted_model"),
            overridden_defaults=dict(data.get("overridden_defaults", {})),
            warnings=[CapturedWarning.from_dict(w) for w in data.get("warnings", [])],
            output=data.get("output", ""),
            seconds=real(data.get("seconds", 0.0)),
            origin=data.get("origin", "fitted"),
            provenance=dict(data.get("provenance", {})),
        )

    @property
    def column(self) -> str:
        """The estimate's column heading: its key, with its origin when not fitted here (for
        another environment, the library version there)."""
        if self.origin == "fitted":
            return self.key
        if self.origin == "environment":
            return f"{self.key} ({self.package} {self.version or 'not installed'})"
        return f"{self.key} ({ORIGINS.get(self.origin, self.origin)})"


@dataclass
class Forecast:
    """One estimator's forecast, on the transformed scale (forecastaudit back-transforms).

    ``status`` is ``"ok"`` or ``"failed"`` (with ``reason``); ``se`` is the library's forecast
    standard error or, when it gives none, the one implied by its widest Gaussian interval.
    """

    key: str
    status: str
    steps: int
    levels: tuple[float, ...]
    mean: np.ndarray = field(default_factory=lambda: np.empty(0))
    lower: dict[float, np.ndarray] = field(default_factory=dict)
    upper: dict[float, np.ndarray] = field(default_factory=dict)
    se: np.ndarray = field(default_factory=lambda: np.empty(0))
    se_derived: bool = False
    interval_method: str = ""
    sigma2_used: float = math.nan
    residuals: np.ndarray | None = None
    reason: str = ""
    warnings: list[CapturedWarning] = field(default_factory=list)
    output: str = ""
    seconds: float = 0.0

    @property
    def ok(self) -> bool:
        """True when the forecast was produced."""
        return self.status == "ok"

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (transformed scale); see :meth:`from_dict`.

        Interval levels are keys that read back as the same float, so two levels never
        share a key.
        """
        return {
            "key": self.key,
            "status": self.status,
            "reason": self.reason,
            "steps": self.steps,
            "levels": _tagged(list(self.levels)),
            "mean": _tagged(self.mean),
            "se": _tagged(self.se),
            "se_derived": self.se_derived,
            "lower": {_level_key(k): _tagged(v) for k, v in self.lower.items()},
            "upper": {_level_key(k): _tagged(v) for k, v in self.upper.items()},
            "interval_method": self.interval_method,
            "sigma2_used": _tagged(self.sigma2_used),
            "residuals": None if self.residuals is None else _tagged(self.residuals),
            "warnings": [w.to_dict() for w in self.warnings],
            "output": self.output,
            "seconds": _tagged(self.seconds),
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> Forecast:
        """The inverse of :meth:`to_dict`."""

        def array(values: Any) -> np.ndarray:
            return np.array([real(v) for v in values], dtype=float)

        residuals = data.get("residuals")
        return cls(
            key=data["key"],
            status=data["status"],
            steps=int(data["steps"]),
            levels=tuple(real(v) for v in data.get("levels", [])),
            mean=array(data.get("mean", [])),
            lower={float(k): array(v) for k, v in data.get("lower", {}).items()},
            upper={float(k): array(v) for k, v in data.get("upper", {}).items()},
            se=array(data.get("se", [])),
            se_derived=bool(data.get("se_derived", False)),
            interval_method=data.get("interval_method", ""),
            sigma2_used=real(data.get("sigma2_used")),
            residuals=None if residuals is None else array(residuals),
            reason=data.get("reason", ""),
            warnings=[CapturedWarning.from_dict(w) for w in data.get("warnings", [])],
            output=data.get("output", ""),
            seconds=real(data.get("seconds", 0.0)),
        )


def _level_key(level: float) -> str:
    """A dictionary key for an interval level that reads back as the same float: ``"80"``
    for 80.0, and the full ``repr`` where the short form would merge two levels
    (``format(80.00000001, 'g')`` is ``"80"`` too)."""
    short = f"{float(level):g}"
    return short if float(short) == float(level) else repr(float(level))


REFERENCE_KEY = "reference"


REFERENCE_ENGINE = "forecastaudit-reference"


SearchStatus = Literal["ok", "failed", "unavailable"]


#: Canonical constant handling of a search, and what each means.
CONSTANT_RULES: dict[str, str] = {
    "auto": "a constant is considered only when d + D <= 1, and the search also tries without",
    "always": "every candidate carries a constant, whatever the differencing",
    "never": "no candidate carries a constant",
}


@dataclass(frozen=True)
class SearchSettings:
    """Canonical overrides of a search's options; None keeps the library's own default.

    Used only by the order-search audit, to harmonise one setting at a time.

    Parameters
    ----------
    d, D : int, optional
        Fix the number of regular / seasonal differences (the library's test is skipped).
    criterion : {"aic", "aicc", "bic"}, optional
        The information criterion the search minimises.
    constant : {"auto", "always", "never"}, optional
        Constant handling, see :data:`CONSTANT_RULES`.
    stepwise : bool, optional
        Stepwise search (True) or the library's full grid within the bounds (False).
    max_p, max_q, max_P, max_Q : int, optional
        Bounds on the orders searched.
    """

    d: int | None = None
    D: int | None = None
    criterion: str | None = None
    constant: str | None = None
    stepwise: bool | None = None
    max_p: int | None = None
    max_q: int | None = None
    max_P: int | None = None  # noqa: N815 - the trade's own letter
    max_Q: int | None = None  # noqa: N815

    def __post_init__(self) -> None:
        if self.criterion is not None and self.criterion not in {"aic", "aicc", "bic"}:
            raise EstimatorError(
                f"criterion must be 'aic', 'aicc' or 'bic', got {self.criterion!r}."
            )
        if self.constant is not None and self.constant not in CONSTANT_RULES:
            raise EstimatorError(
                f"constant must be one of {sorted(CONSTANT_RULES)}, got {self.constant!r}."
            )

    def changed(self) -> dict[str, Any]:
        """The settings that override a default (those not None)."""
        return {k: v for k, v in dataclasses.asdict(self).items() if v is not None}

    def replace(self, **changes: Any) -> SearchSettings:
        """A copy with some settings changed."""
        return dataclasses.replace(self, **changes)


@dataclass(frozen=True)
class DifferencingTest:
    """One step of a library's differencing decision, on the same data the search saw.

    Attributes
    ----------
    decision : {"regular", "seasonal"}
        Which differencing order the step decides.
    test : str
        The test in words (e.g. KPSS level-stationarity test, OCSB, seasonal strength).
    applied_to : str
        The series the step was applied to (levels, after one seasonal difference ...).
    differences_before : int
        Differences of this kind already taken before the step.
    statistic : float
        The test statistic (NaN when the library exposes none).
    p_value : float
        The p-value (NaN when the test has none).
    threshold : float
        The significance level or critical value the library compares against.
    lags : int or None
        Lags used by the test (or its lag selection), where it has any.
    lag_rule : str
        How the library chooses them.
    says_difference : bool
        Whether the step asks for (another) difference.
    source : str
        Where the numbers come from (the library function called).
    """

    decision: str
    test: str
    applied_to: str
    differences_before: int
    statistic: float
    p_value: float
    threshold: float
    lags: int | None
    lag_rule: str
    says_difference: bool
    source: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form; see :meth:`from_dict`."""
        return {k: _tagged(v) for k, v in dataclasses.asdict(self).items()}

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> DifferencingTest:
        """The inverse of :meth:`to_dict`."""
        values = dict(data)
        for name in ("statistic", "p_value", "threshold"):
            values[name] = real(values.get(name))
        return cls(**values)


@dataclass
class SearchOutcome:
    """One library's automatic order search, in canonical terms.

    Attributes
    ----------
    key, engine, package, version : str
        Search key, engine lineage (wrappers of one engine share it), distribution and its
        installed version.
    status : {"ok", "failed", "unavailable"}
        ``failed``: the library raised or returned nothing usable; ``unavailable``: the
        package is not installed.
    reason : str
        Why the status is not ``ok``.
    spec : ModelSpec or None
        The selected model, ``mean`` set when it carries a constant.
    settings : SearchSettings
        The overrides in force (all None for a run with the library's defaults).
    seconds : float
        Wall time of the search (the recomputed tests are not included).
    warnings : list of CapturedWarning
        Every warning raised during the search.
    output : str
        What the library printed (its trace).
    """

    key: str
    engine: str
    package: str
    version: str | None
    status: SearchStatus
    reason: str = ""
    spec: ModelSpec | None = None
    settings: SearchSettings = field(default_factory=SearchSettings)
    criterion: str = ""
    criterion_value: float = math.nan
    criterion_definition: str = ""
    candidates: int | None = None
    d_decided_by: str = ""
    D_decided_by: str = ""
    tests: list[DifferencingTest] = field(default_factory=list)
    constant_rule: str = ""
    stepwise: bool | None = None
    bounds: dict[str, Any] = field(default_factory=dict)
    options: dict[str, Any] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    warnings: list[CapturedWarning] = field(default_factory=list)
    output: str = ""
    seconds: float = 0.0
    native: Any = field(default=None, repr=False, compare=False)

    @property
    def ok(self) -> bool:
        """True when the search selected a model."""
        return self.status == "ok"

    @property
    def selected(self) -> str:
        """The selected model as text (``ARIMA(p,d,q)x(P,D,Q)m``, ``+mean`` with a constant)."""
        return str(self.spec) if self.spec is not None else ""

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (the library's object is left out); see :meth:`from_dict`."""
        return {
            "key": self.key,
            "engine": self.engine,
            "package": self.package,
            "version": self.version,
            "status": self.status,
            "reason": self.reason,
            "selected": self.selected or None,
            "spec": None if self.spec is None else self.spec.to_dict(),
            "settings": self.settings.changed(),
            "criterion": self.criterion,
            "criterion_value": _tagged(self.criterion_value),
            "criterion_definition": self.criterion_definition,
            "candidates": self.candidates,
            "d_decided_by": self.d_decided_by,
            "D_decided_by": self.D_decided_by,
            "tests": [t.to_dict() for t in self.tests],
            "constant_rule": self.constant_rule,
            "stepwise": self.stepwise,
            "bounds": _tagged(self.bounds),
            "options": _tagged(self.options),
            "notes": list(self.notes),
            "warnings": [w.to_dict() for w in self.warnings],
            "output": self.output,
            "seconds": _tagged(self.seconds),
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> SearchOutcome:
        """The inverse of :meth:`to_dict` (``native`` is None)."""
        return cls(
            key=data["key"],
            engine=data["engine"],
            package=data["package"],
            version=data.get("version"),
            status=data["status"],
            reason=data.get("reason", ""),
            spec=_spec_from_dict(data.get("spec")),
            settings=SearchSettings(**data.get("settings", {})),
            criterion=data.get("criterion", ""),
            criterion_value=real(data.get("criterion_value")),
            criterion_definition=data.get("criterion_definition", ""),
            candidates=data.get("candidates"),
            d_decided_by=data.get("d_decided_by", ""),
            D_decided_by=data.get("D_decided_by", ""),
            tests=[DifferencingTest.from_dict(t) for t in data.get("tests", [])],
            constant_rule=data.get("constant_rule", ""),
            stepwise=data.get("stepwise"),
            bounds=dict(data.get("bounds", {})),
            options=dict(data.get("options", {})),
            notes=list(data.get("notes", [])),
            warnings=[CapturedWarning.from_dict(w) for w in data.get("warnings", [])],
            output=data.get("output", ""),
            seconds=real(data.get("seconds", 0.0)),
        )


def estimate_schema() -> dict[str, Any]:
    """The JSON Schema of one estimate's :meth:`Estimate.to_dict` form."""
    import json
    from importlib import resources

    text = resources.files("forecastaudit").joinpath("data/estimate.schema.json").read_text()
    return json.loads(text)
