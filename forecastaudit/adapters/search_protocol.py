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

from abc import ABC, abstractmethod
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np

from forecastaudit.adapters.capture import _run_captured
from forecastaudit.adapters.protocol import LibraryBound
from forecastaudit.estimate import DifferencingTest, SearchOutcome, SearchSettings
from forecastaudit.spec import ModelSpec


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
    seconds : float, optional
        Wall time of the library's search alone, when the adapter did more work after it
        (recomputing the differencing tests); None: the whole call is the search.
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
    seconds: float | None = None
    native: Any = None


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

    kind: ClassVar[str] = "search"
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
        if call.failed:
            return SearchOutcome(**base, **call.failure("search"))
        result: SearchResult = call.result
        seconds = float(call.seconds if result.seconds is None else result.seconds)
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
            native=result.native,
            **call.kept(seconds),
        )

    @abstractmethod
    def _run(self, y: np.ndarray, m: int, settings: SearchSettings) -> SearchResult:
        """Translate the settings, call the library's search, translate the result.

        An adapter that recomputes the differencing tests after the search gives the
        search's own wall time in :attr:`SearchResult.seconds`.
        """


def count_trace_lines(output: str, pattern: str) -> int:
    """Number of lines of a library's printed trace that start with ``pattern``."""
    return sum(1 for line in output.splitlines() if line.strip().startswith(pattern))
