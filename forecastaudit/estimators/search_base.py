"""The order-search protocol: what every automatic order search declares and returns.

A search adapter runs one library's automatic order search *with that library's own
defaults* (as its users run it) and reports, in canonical terms, what it selected and how it
decided: the differencing decisions with the library's own unit-root or seasonal tests on
the same data, the criterion as the library reports it, the constant rule, the number of
candidates fitted and the time. :class:`SearchSettings` is the only way to change an option,
and it is used only by the order-search audit, to harmonise one setting at a time.

Shared work (availability, timing, capture of warnings and printed output, turning an
exception into a failed outcome) is done once in :meth:`SearchAdapter.run`; adapters
implement :meth:`SearchAdapter._run`.
"""

from __future__ import annotations

import dataclasses
import importlib
import importlib.metadata
import math
from abc import ABC, abstractmethod
from dataclasses import dataclass, field
from typing import Any, ClassVar, Literal

import numpy as np

from ..errors import EstimatorError
from ..spec import ModelSpec
from .base import CapturedWarning, LibraryBound, _plain, _run_captured

__all__ = [
    "CONSTANT_RULES",
    "DifferencingTest",
    "SearchAdapter",
    "SearchOutcome",
    "SearchResult",
    "SearchSettings",
    "available_searches",
    "get_search",
    "register_search",
]

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
class SearchResult:
    """What an adapter's ``_run`` hands back, in canonical terms.

    Attributes
    ----------
    order, seasonal : tuple of int
        The selected ``(p, d, q)`` and ``(P, D, Q)``.
    constant : bool
        Whether the selected model carries a constant (mean, drift or intercept).
    criterion : str
        ``"aic"``, ``"aicc"`` or ``"bic"``: what the search minimised.
    criterion_value : float
        Its value for the selected model, as the library reports it.
    criterion_definition : str
        How the library computes it (which n, which k).
    candidates : int or None
        Number of candidate models fitted (None when the library does not say).
    d_decided_by, D_decided_by : str
        ``"test"`` when the library's test chose the order, ``"fixed"`` when it was given.
    tests : list of DifferencingTest
        Each step of the differencing decisions, recomputed with the library's own tests
        on the same data (empty for an order that was fixed).
    constant_rule : str
        The canonical constant handling in force (a key of :data:`CONSTANT_RULES`).
    stepwise : bool
        Whether the search was stepwise.
    bounds : dict
        ``max_p``, ``max_q``, ``max_P``, ``max_Q`` and ``max_order`` in force.
    options : dict
        Every option of the library call, resolved.
    notes : list of str
        Remarks on how the library decided (in plain words).
    native : object
        The library's fitted object (memory only).
    """

    order: tuple[int, int, int]
    seasonal: tuple[int, int, int]
    constant: bool
    criterion: str
    criterion_value: float
    criterion_definition: str
    candidates: int | None
    d_decided_by: str
    D_decided_by: str
    tests: list[DifferencingTest]
    constant_rule: str
    stepwise: bool
    bounds: dict[str, Any]
    options: dict[str, Any]
    notes: list[str] = field(default_factory=list)
    native: Any = None


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


class SearchAdapter(LibraryBound, ABC):
    """Base class of the order-search adapters.

    Attributes
    ----------
    key : str
        Search key used in reports.
    engine : str
        Engine lineage of the candidate fits; wrappers of one engine share it.
    package : str
        Distribution whose version is recorded.
    module : str
        Module imported to check availability.
    description : str
        One line: which function or class of which library is called.
    """

    key: ClassVar[str]
    engine: ClassVar[str]
    package: ClassVar[str]
    module: ClassVar[str]
    description: ClassVar[str]

    def run(
        self,
        y_transformed: np.ndarray,
        period: int | None,
        settings: SearchSettings | None = None,
    ) -> SearchOutcome:
        """Run the library's search on ``y_transformed`` (already transformed).

        Parameters
        ----------
        y_transformed : numpy.ndarray
            The series after the transform, in time order.
        period : int or None
            The seasonal period m (None or 1: a non-seasonal search).
        settings : SearchSettings, optional
            Overrides of the library's defaults; None runs the search as its users do.

        Returns
        -------
        SearchOutcome
            Never raises for a library failure: the status says what happened.
        """
        settings = settings or SearchSettings()
        base = {
            "key": self.key,
            "engine": self.engine,
            "package": self.package,
            "version": self.version(),
            "settings": settings,
        }
        missing = self.availability()
        if missing is not None:
            return SearchOutcome(**base, status="unavailable", reason=missing)
        y = np.array(y_transformed, dtype=float, copy=True)
        m = int(period) if period and period > 1 else 1
        call = _run_captured(self._run, y, m, settings)
        if call.error or call.result is None:
            return SearchOutcome(
                **base,
                status="failed",
                reason=call.error or "the search returned nothing",
                warnings=call.warnings,
                output=(call.output + "\n" + call.trace).strip(),
                seconds=call.seconds,
            )
        result: SearchResult = call.result
        seconds = float(result.options.pop("_search_seconds", call.seconds))
        spec = ModelSpec(
            order=result.order,
            seasonal=result.seasonal,
            period=m if m > 1 else None,
            mean=bool(result.constant),
        )
        return SearchOutcome(
            **base,
            status="ok",
            spec=spec,
            criterion=result.criterion,
            criterion_value=float(result.criterion_value),
            criterion_definition=result.criterion_definition,
            candidates=result.candidates,
            d_decided_by=result.d_decided_by,
            D_decided_by=result.D_decided_by,
            tests=list(result.tests),
            constant_rule=result.constant_rule,
            stepwise=bool(result.stepwise),
            bounds=dict(result.bounds),
            options=dict(result.options),
            notes=list(result.notes),
            warnings=call.warnings,
            output=call.output,
            seconds=seconds,
            native=result.native,
        )

    @abstractmethod
    def _run(self, y: np.ndarray, m: int, settings: SearchSettings) -> SearchResult:
        """Translate the settings, call the library's search, translate the result.

        An adapter that recomputes the differencing tests after the search stores the
        search's own wall time in ``options["_search_seconds"]`` (removed by :meth:`run`).
        """


# ---------------------------------------------------------------------- registry
_REGISTRY: dict[str, type[SearchAdapter]] = {}

# Imported on first use, in this order (the report's column order).
BUILT_IN = ("search_pmdarima", "search_sktime", "search_statsforecast")
_loaded = False


def _load_built_in() -> None:
    global _loaded
    if not _loaded:
        _loaded = True
        for name in BUILT_IN:
            importlib.import_module(f"{__package__}.{name}")


def register_search(cls: type[SearchAdapter]) -> type[SearchAdapter]:
    """Class decorator adding a search adapter to the registry under its ``key``."""
    if not getattr(cls, "key", None):
        raise EstimatorError(f"{cls.__name__} has no key; set the class attribute 'key'.")
    _REGISTRY[cls.key] = cls
    return cls


def available_searches() -> list[str]:
    """Keys of every registered order search, in registration order."""
    _load_built_in()
    return list(_REGISTRY)


def get_search(key: str) -> SearchAdapter:
    """A search adapter instance for ``key``.

    Raises
    ------
    EstimatorError
        For an unknown key, listing the known ones.
    """
    _load_built_in()
    try:
        return _REGISTRY[key]()
    except KeyError:
        known = ", ".join(_REGISTRY)
        raise EstimatorError(f"Unknown order search {key!r}; known searches: {known}.") from None


def count_trace_lines(output: str, pattern: str) -> int:
    """Number of lines of a library's printed trace that start with ``pattern``."""
    return sum(1 for line in output.splitlines() if line.strip().startswith(pattern))
