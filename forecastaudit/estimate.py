"""Plain estimate types that cross process boundaries: estimates, forecasts, search outcomes."""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from forecastaudit.errors import EstimatorError
from forecastaudit.jsonutil import _plain
from forecastaudit.spec import ModelSpec

Status = Literal["ok", "failed", "unavailable", "unsupported"]


@dataclass(frozen=True)
class CapturedWarning:
    """A warning an estimator raised during the fit, kept for the record."""

    category: str
    message: str
    source: str

    def to_dict(self) -> dict[str, str]:
        """JSON-ready form."""
        return {"category": self.category, "message": self.message, "source": self.source}


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
    status : {"ok", "failed", "unavailable", "unsupported"}
        ``ok``: fitted. ``failed``: the library raised or returned nothing usable.
        ``unavailable``: the package is not installed. ``unsupported``: the library cannot
        fit this spec (reason given); nothing was fitted.
    reason : str
        Why the status is not ``ok`` (empty when it is).
    params : dict
        Canonical parameters including ``sigma2`` (the maximum-likelihood variance).
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
    options: dict[str, Any] = field(default_factory=dict)
    conversions: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    fitted_model: str | None = None
    overridden_defaults: dict[str, Any] = field(default_factory=dict)
    warnings: list[CapturedWarning] = field(default_factory=list)
    output: str = ""
    seconds: float = 0.0
    native: Any = field(default=None, repr=False, compare=False)

    @property
    def ok(self) -> bool:
        """True when the estimator produced an estimate."""
        return self.status == "ok"

    @property
    def sigma2(self) -> float:
        """The maximum-likelihood innovation variance (NaN when not fitted)."""
        return self.params.get("sigma2", math.nan)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (the native result object is left out)."""
        return {
            "key": self.key,
            "engine": self.engine,
            "package": self.package,
            "version": self.version,
            "status": self.status,
            "reason": self.reason,
            "params": dict(self.params),
            "native_params": dict(self.native_params),
            "sigma2_reported": self.sigma2_reported,
            "sigma2_definition": self.sigma2_definition,
            "loglike_native": self.loglike_native,
            "loglike_definition": self.loglike_definition,
            "n_used_native": self.n_used_native,
            "k_counted_native": self.k_counted_native,
            "criteria_native": dict(self.criteria_native),
            "criteria": dict(self.criteria),
            "n_w": self.n_w,
            "k": self.k,
            "converged": self.converged,
            "optimizer": _plain(self.optimizer),
            "options": _plain(self.options),
            "conversions": list(self.conversions),
            "notes": list(self.notes),
            "fitted_model": self.fitted_model,
            "overridden_defaults": _plain(self.overridden_defaults),
            "warnings": [w.to_dict() for w in self.warnings],
            "output": self.output,
            "seconds": self.seconds,
        }


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
        """JSON-ready form (transformed scale)."""
        return {
            "key": self.key,
            "status": self.status,
            "reason": self.reason,
            "steps": self.steps,
            "levels": list(self.levels),
            "mean": _plain(self.mean),
            "se": _plain(self.se),
            "se_derived": self.se_derived,
            "lower": {f"{k:g}": _plain(v) for k, v in self.lower.items()},
            "upper": {f"{k:g}": _plain(v) for k, v in self.upper.items()},
            "interval_method": self.interval_method,
            "sigma2_used": self.sigma2_used,
            "warnings": [w.to_dict() for w in self.warnings],
            "seconds": self.seconds,
        }


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
        """JSON-ready form (NaN becomes None)."""
        return {k: _finite(v) for k, v in dataclasses.asdict(self).items()}


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
        """JSON-ready form (the library's object and its trace text are left out)."""
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
            "criterion_value": _finite(self.criterion_value),
            "criterion_definition": self.criterion_definition,
            "candidates": self.candidates,
            "d_decided_by": self.d_decided_by,
            "D_decided_by": self.D_decided_by,
            "tests": [t.to_dict() for t in self.tests],
            "constant_rule": self.constant_rule,
            "stepwise": self.stepwise,
            "bounds": _plain(self.bounds),
            "options": _plain(self.options),
            "notes": list(self.notes),
            "warnings": [w.to_dict() for w in self.warnings],
            "seconds": self.seconds,
        }


def _finite(value: Any) -> Any:
    if isinstance(value, float | np.floating):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    return value
