"""Order-search audit and model-choice stability.

:func:`audit_order_search` runs every installed automatic order search with its own
defaults, records what each selected and how it decided, decomposes every disagreement into
its causes by re-running one search with one setting harmonised at a time, and runs our own
bounded exhaustive search under the reference likelihood (AICc on the canonical definition)
within each differencing choice a search made. Information criteria do not compare models
with different differencing, because the likelihoods are of different series (common
practice, no source); so the ranking is made within each choice. Candidates within 2 AICc
units of the best have substantial support (Burnham, K.P., Anderson, D.R. (2002), *Model
Selection and Multimodel Inference*, 2nd ed., section 2.6).

:func:`compare_models` asks whether the *choice* between candidate models depends on the
implementation: each candidate is fitted by every estimator and scored on a holdout, and
the ranking is compared across implementations.
"""

from __future__ import annotations

import itertools
import math
import time
from collections.abc import Iterable, Mapping, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .conventions import information_criteria
from .errors import SpecError
from .estimators import get_adapter
from .estimators.base import _plain
from .estimators.search_base import (
    SearchOutcome,
    SearchSettings,
    available_searches,
    get_search,
)
from .findings import Finding
from .series import prepare_series
from .spec import ModelSpec
from .tolerances import Tolerances

__all__ = [
    "ModelChoiceResult",
    "OrderSearchAudit",
    "audit_order_search",
    "compare_models",
    "exhaustive_reference_search",
]

#: Burnham & Anderson (2002), section 2.6: within 2 AICc units = substantial support.
SUPPORT_BAND = 2.0
#: The settings harmonised one at a time, in this order.
HARMONISED = ("d", "D", "criterion", "constant", "stepwise")
#: A search whose default run took longer than this many seconds is not re-run.
RERUN_LIMIT = 15.0
# Rules of thumb (common practice, no source).
LARGE_PQ = 4  # p + q at or above this is large
SUM_NEAR_ONE = 0.1  # |1 - sum(ar)| or |1 + sum(ma)| below this is "near"


def _key(spec: ModelSpec | None) -> tuple[Any, ...] | None:
    """What makes two selections the same model (orders, period and constant)."""
    if spec is None:
        return None
    return (spec.order, spec.seasonal, spec.m, spec.mean)


def _text(spec: ModelSpec | None) -> str:
    if spec is None:
        return ""
    return str(ModelSpec(spec.order, spec.seasonal, spec.period, mean=spec.mean))


def _records(frame: pd.DataFrame | None) -> list[dict[str, Any]]:
    """A DataFrame as JSON-ready records (numpy to Python, NaN to None)."""
    if frame is None or frame.empty:
        return []
    out = []
    for row in frame.reset_index(drop=frame.index.name is None).to_dict(orient="records"):
        out.append({str(k): _json(v) for k, v in row.items()})
    return out


def _json(value: Any) -> Any:
    value = _plain(value)
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, list):
        return [_json(v) for v in value]
    if isinstance(value, dict):
        return {k: _json(v) for k, v in value.items()}
    return value


def _setting_value(outcome: SearchOutcome, name: str) -> Any:
    spec = outcome.spec
    if name == "d":
        return spec.d if spec is not None else None
    if name == "D":
        return spec.D if spec is not None else None
    if name == "criterion":
        return outcome.criterion
    if name == "constant":
        return outcome.constant_rule
    return outcome.stepwise


# ====================================================================== exhaustive search
def _fit_candidate(job: tuple[np.ndarray, ModelSpec]) -> dict[str, Any]:
    """Reference fit of one candidate (module level, so a process pool can run it)."""
    from . import reference

    y_t, spec = job
    started = time.perf_counter()
    n_w = len(y_t) - spec.lost_to_differencing
    k = spec.n_coefficients + 1
    try:
        fit = reference.fit_reference(y_t, spec, None)
        loglike, converged, params, note = float(fit.loglike), bool(fit.converged), fit.params, ""
    except Exception as exc:  # a candidate that cannot be fitted is recorded, not fatal
        loglike, converged, params, note = math.nan, False, {}, f"{type(exc).__name__}: {exc}"
    criteria = information_criteria(loglike, k, n_w)
    return {
        "loglike": loglike,
        "k": k,
        "n_w": n_w,
        **criteria,
        "converged": converged,
        "params": {str(a): float(b) for a, b in params.items()},
        "note": note,
        "seconds": time.perf_counter() - started,
    }


def _blas_threads(limit: int) -> Any:
    """Limit BLAS threads: the likelihoods are small problems, and on a busy machine a
    multithreaded BLAS turns each call into thread contention (measured: 36 reference fits
    of the airline model take about 2 s with one thread and several times that with the
    default threads under load)."""
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # threadpoolctl comes with scikit-learn; without it, no limit
        import contextlib

        return contextlib.nullcontext()
    return threadpool_limits(limits=limit)


def _one_blas_thread() -> None:
    """Process-pool initializer: one BLAS thread in each worker."""
    global _WORKER_LIMIT
    _WORKER_LIMIT = _blas_threads(1)


_WORKER_LIMIT: Any = None


def _grid(
    d: int, D: int, m: int, max_p: int, max_q: int, max_P: int, max_Q: int
) -> list[ModelSpec]:
    seasonal_p = range(max_P + 1) if m > 1 else range(1)
    seasonal_q = range(max_Q + 1) if m > 1 else range(1)
    # A constant only where it is a level mean, a drift or m x a drift (d + D <= 1): with
    # two or more differences it implies a polynomial trend (common practice, no source).
    constants = (False, True) if d + D <= 1 else (False,)
    period = m if m > 1 else None
    return [
        ModelSpec((p, d, q), (P, D, Q), period, mean=c)
        for p, q, P, Q, c in itertools.product(
            range(max_p + 1), range(max_q + 1), seasonal_p, seasonal_q, constants
        )
    ]


def exhaustive_reference_search(
    y_transformed: np.ndarray,
    period: int | None,
    differencing: Iterable[tuple[int, int]],
    *,
    max_p: int = 2,
    max_q: int = 2,
    max_P: int = 1,
    max_Q: int = 1,
    extra: Iterable[ModelSpec] = (),
    n_jobs: int | None = None,
) -> tuple[pd.DataFrame, dict[str, Any]]:
    """Our own bounded exhaustive search under the reference AICc.

    Every model with ``p <= max_p``, ``q <= max_q``, ``P <= max_P``, ``Q <= max_Q`` is
    fitted by :func:`forecastaudit.reference.fit_reference` within each ``(d, D)`` given,
    with and without a constant when ``d + D <= 1``. AICc is canonical
    (:func:`forecastaudit.conventions.information_criteria`, k = coefficients + 1,
    n = n_w). Candidates are ranked within their differencing only (information criteria do
    not compare models with different differencing: common practice, no source).

    Parameters
    ----------
    y_transformed : numpy.ndarray
        The series after the transform.
    period : int or None
        Seasonal period.
    differencing : iterable of (d, D)
        The differencing choices to search within.
    max_p, max_q, max_P, max_Q : int
        Bounds of the grid.
    extra : iterable of ModelSpec
        Models fitted besides the grid (e.g. a search's choice outside the bounds), marked
        ``in_grid = False``.
    n_jobs : int, optional
        Worker processes (default 1: in this process, with one BLAS thread).

    Returns
    -------
    table : pandas.DataFrame
        One row per candidate: ``model``, ``d``, ``D``, ``p``, ``q``, ``P``, ``Q``,
        ``constant``, ``k``, ``n_w``, ``loglike``, ``aic``, ``aicc``, ``bic``,
        ``delta_aicc``, ``rank``, ``within_2``, ``in_grid``, ``converged``, ``seconds``,
        ``params`` (dict), ``note``.
    info : dict
        ``seconds`` (wall time), ``n_jobs``, ``candidates``, ``bounds``.
    """
    m = int(period) if period and period > 1 else 1
    choices = sorted({(int(d), int(D)) for d, D in differencing})
    specs: list[ModelSpec] = []
    in_grid: list[bool] = []
    seen: set[Any] = set()
    for d, D in choices:
        for spec in _grid(d, D, m, max_p, max_q, max_P, max_Q):
            seen.add(_key(spec))
            specs.append(spec)
            in_grid.append(True)
    for spec in extra:
        plain = ModelSpec(spec.order, spec.seasonal, spec.period, mean=spec.mean)
        if _key(plain) not in seen and (plain.d, plain.D) in choices:
            seen.add(_key(plain))
            specs.append(plain)
            in_grid.append(False)
    y = np.asarray(y_transformed, dtype=float)
    jobs = [(y, spec) for spec in specs]
    workers = n_jobs if n_jobs is not None else 1
    started = time.perf_counter()
    if workers > 1 and len(jobs) > 1:
        # Most expensive first (more coefficients), so the pool ends together.
        order = sorted(range(len(jobs)), key=lambda i: -specs[i].n_coefficients)
        with ProcessPoolExecutor(max_workers=workers, initializer=_one_blas_thread) as pool:
            done = list(pool.map(_fit_candidate, [jobs[i] for i in order], chunksize=1))
        results: list[dict[str, Any]] = [{}] * len(jobs)
        for i, result in zip(order, done, strict=True):
            results[i] = result
    else:
        with _blas_threads(1):
            results = [_fit_candidate(job) for job in jobs]
    seconds = time.perf_counter() - started
    rows = []
    for spec, grid_member, result in zip(specs, in_grid, results, strict=True):
        rows.append(
            {
                "model": _text(spec),
                "d": spec.d,
                "D": spec.D,
                "p": spec.p,
                "q": spec.q,
                "P": spec.P,
                "Q": spec.Q,
                "constant": spec.mean,
                **{k: result[k] for k in ("k", "n_w", "loglike", "aic", "aicc", "bic")},
                "in_grid": grid_member,
                "converged": result["converged"],
                "seconds": result["seconds"],
                "params": result["params"],
                "note": result["note"],
            }
        )
    table = pd.DataFrame(rows)
    if not table.empty:
        best = table.groupby(["d", "D"])["aicc"].transform("min")
        table["delta_aicc"] = table["aicc"] - best
        table["rank"] = (
            table.groupby(["d", "D"])["aicc"].rank(method="min", na_option="bottom").astype(int)
        )
        table["within_2"] = table["delta_aicc"] <= SUPPORT_BAND
        table = table.sort_values(["d", "D", "rank", "model"]).reset_index(drop=True)
    info = {
        "seconds": seconds,
        "n_jobs": workers,
        "candidates": len(specs),
        "bounds": {"max_p": max_p, "max_q": max_q, "max_P": max_P, "max_Q": max_Q},
        "differencing": [list(c) for c in choices],
    }
    return table, info


# ====================================================================== the audit
@dataclass
class OrderSearchAudit:
    """The result of :func:`audit_order_search`.

    Attributes
    ----------
    series_name : str
        Display name of the series.
    n : int
        Observations.
    period : int or None
        Seasonal period.
    transform : str or None
        Transform applied before every search.
    searches : dict of str to SearchOutcome
        Each library's search with its own defaults, by key.
    selections : pandas.DataFrame
        Per search: status, selected model, d, D, constant, criterion and its value as the
        library reports it, the criterion's definition, candidates fitted, seconds,
        constant rule, stepwise, and the selection's reference AICc, rank and distance to the
        best within its differencing.
    differencing_tests : pandas.DataFrame
        Every step of every search's differencing decisions (test, series, statistic,
        p-value, threshold, lags and lag rule, whether it asks for a difference).
    decomposition : pandas.DataFrame
        One row per harmonised re-run: the pair of searches that disagree, the setting
        harmonised, its two values, the search re-run, what it selected then, and whether
        that reproduces the other search's selection.
    candidates : pandas.DataFrame
        The exhaustive reference search (see :func:`exhaustive_reference_search`), with the
        searches that chose each candidate in ``chosen_by``.
    default_constant : pandas.DataFrame
        For each selected order without a constant, what each fit adapter's library would
        add if called with its defaults.
    timings : pandas.DataFrame
        Seconds and candidates of each search beside our exhaustive search.
    findings : list of Finding
        Most severe first.
    """

    series_name: str
    n: int
    period: int | None
    transform: str | None
    searches: dict[str, SearchOutcome]
    selections: pd.DataFrame
    differencing_tests: pd.DataFrame
    decomposition: pd.DataFrame
    candidates: pd.DataFrame
    default_constant: pd.DataFrame
    timings: pd.DataFrame
    findings: list[Finding]
    exhaustive: dict[str, Any] = field(default_factory=dict)
    reruns: list[SearchOutcome] = field(default_factory=list)

    def supported(self, d: int, D: int) -> pd.DataFrame:
        """Candidates within 2 AICc units of the best with ``d`` and ``D`` differences."""
        c = self.candidates
        return c[(c["d"] == d) & (c["D"] == D) & c["within_2"]]

    def findings_of(self, kind: str | None = None, severity: str | None = None) -> list[Finding]:
        """Findings filtered by kind and/or severity."""
        return [
            f
            for f in self.findings
            if (kind is None or f.kind == kind) and (severity is None or f.severity == severity)
        ]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (numpy values to Python, NaN to None)."""
        candidates = self.candidates.drop(columns=["params"], errors="ignore")
        return {
            "series": {"name": self.series_name, "n": self.n},
            "period": self.period,
            "transform": self.transform,
            "searches": {k: o.to_dict() for k, o in self.searches.items()},
            "selections": _records(self.selections),
            "differencing_tests": _records(self.differencing_tests),
            "decomposition": _records(self.decomposition),
            "exhaustive": _json(self.exhaustive),
            "candidates": _records(candidates),
            "default_constant": _records(self.default_constant),
            "timings": _records(self.timings),
            "findings": [f.to_dict() for f in self.findings],
        }

    def __str__(self) -> str:
        lines = [
            f"Order-search audit of '{self.series_name}' ({self.n} observations, period "
            f"{self.period}, transform {self.transform})",
            "",
        ]
        with pd.option_context("display.width", 140, "display.max_columns", 20):
            cols = [
                c
                for c in (
                    "status",
                    "selected",
                    "criterion",
                    "criterion_value",
                    "candidates",
                    "seconds",
                    "reference_aicc",
                    "rank",
                    "delta_aicc",
                )
                if c in self.selections
            ]
            lines += ["Selections:", self.selections[cols].to_string(), ""]
            if not self.differencing_tests.empty:
                cols = [
                    "search",
                    "decision",
                    "applied_to",
                    "statistic",
                    "p_value",
                    "threshold",
                    "lags",
                    "says_difference",
                ]
                lines += ["Differencing tests:", self.differencing_tests[cols].to_string(), ""]
            if not self.decomposition.empty:
                cols = ["searches", "setting", "rerun", "to", "selected", "reproduces_other"]
                lines += ["Harmonised re-runs:", self.decomposition[cols].to_string(), ""]
            lines += ["Timings (seconds):", self.timings.to_string(), ""]
        lines.append(f"Findings ({len(self.findings)}):")
        lines += [f"  {f}" for f in self.findings]
        return "\n".join(lines)


def _tests_summary(outcome: SearchOutcome, decision: str) -> str:
    steps = [t for t in outcome.tests if t.decision == decision]
    value = _setting_value(outcome, "d" if decision == "regular" else "D")
    if not steps:
        decided = outcome.d_decided_by if decision == "regular" else outcome.D_decided_by
        how = "fixed" if decided == "fixed" else "decided without a reported test"
        return f"{outcome.key}: {how}, {'d' if decision == 'regular' else 'D'}={value}"
    parts = []
    for t in steps:
        if math.isfinite(t.p_value):
            measure = f"statistic {t.statistic:.4g}, p = {t.p_value:.4g} vs alpha {t.threshold:g}"
        else:
            measure = f"statistic {t.statistic:.4g} vs threshold {t.threshold:.4g}"
        lag = f", {t.lags} lags by {t.lag_rule.split(';')[0]}" if t.lags is not None else ""
        parts.append(
            f"{t.test.split(' (')[0]} on the {t.applied_to}{lag}: {measure} -> "
            f"{'difference' if t.says_difference else 'no difference'}"
        )
    letter = "d" if decision == "regular" else "D"
    return f"{outcome.key} ({letter}={value}): " + "; ".join(parts)


def _rerun(
    cache: dict[tuple[str, SearchSettings], SearchOutcome],
    key: str,
    y_t: np.ndarray,
    m: int,
    settings: SearchSettings,
) -> SearchOutcome:
    if (key, settings) not in cache:
        cache[(key, settings)] = get_search(key).run(y_t, m, settings)
    return cache[(key, settings)]


def _decompose(
    outcomes: Mapping[str, SearchOutcome],
    y_t: np.ndarray,
    m: int,
    rerun_limit: float,
) -> tuple[pd.DataFrame, list[Finding], list[SearchOutcome]]:
    ok = [o for o in outcomes.values() if o.ok]
    rows: list[dict[str, Any]] = []
    findings: list[Finding] = []
    cache: dict[tuple[str, SearchSettings], SearchOutcome] = {}
    # One representative per distinct selection (the first in order): a wrapper that selects
    # what another search selects adds no disagreement of its own.
    groups: dict[Any, list[SearchOutcome]] = {}
    for o in ok:
        groups.setdefault(_key(o.spec), []).append(o)
    members = {g[0].key: [o.key for o in g[1:]] for g in groups.values()}
    for a, b in itertools.combinations([g[0] for g in groups.values()], 2):
        pair = f"{a.key} / {b.key}"
        differing = [s for s in HARMONISED if _setting_value(a, s) != _setting_value(b, s)]
        rerun, other = (a, b) if a.seconds <= b.seconds else (b, a)
        causes: list[str] = []
        details: list[str] = []
        for decision, setting in (("regular", "d"), ("seasonal", "D")):
            if setting in differing:
                details.append(
                    f"The {decision}-differencing decisions differ: "
                    f"{_tests_summary(a, decision)}. {_tests_summary(b, decision)}."
                )
        if "criterion" in differing:
            details.append(
                f"Criteria differ: {a.key} minimises {a.criterion} ({a.criterion_definition}); "
                f"{b.key} minimises {b.criterion} ({b.criterion_definition})."
            )
        if "constant" in differing:
            details.append(
                f"Constant handling differs: {a.key} '{a.constant_rule}', {b.key} "
                f"'{b.constant_rule}'."
            )
        if rerun.seconds > rerun_limit:
            rows.append(
                {
                    "searches": pair,
                    "setting": ", ".join(differing) or "none",
                    "rerun": rerun.key,
                    "from": None,
                    "to": None,
                    "selected": None,
                    "reproduces_other": None,
                    "changed": None,
                    "status": "skipped",
                    "note": (
                        f"not re-run: both searches took longer than {rerun_limit:g} s "
                        f"({rerun.key}: {rerun.seconds:.1f} s); raise rerun_limit to re-run"
                    ),
                }
            )
        else:
            plans = [(s, {s: _setting_value(other, s)}) for s in differing]
            if len(differing) > 1:
                plans.append(
                    (
                        "all of " + ", ".join(differing),
                        {s: _setting_value(other, s) for s in differing},
                    )
                )
            for label, change in plans:
                result = _rerun(cache, rerun.key, y_t, m, SearchSettings(**change))
                reproduces = result.ok and _key(result.spec) == _key(other.spec)
                rows.append(
                    {
                        "searches": pair,
                        "setting": label,
                        "rerun": rerun.key,
                        "from": ", ".join(str(_setting_value(rerun, s)) for s in change),
                        "to": ", ".join(str(v) for v in change.values()),
                        "selected": result.selected if result.ok else None,
                        "reproduces_other": bool(reproduces),
                        "changed": bool(result.ok and _key(result.spec) != _key(rerun.spec)),
                        "status": result.status,
                        "note": result.reason,
                        "candidates": result.candidates,
                        "seconds": result.seconds,
                    }
                )
                if reproduces and len(change) == 1:
                    causes.append(label)
        if causes:
            explained = (
                f"Harmonising {' or '.join(causes)} alone makes {rerun.key} select "
                f"{other.selected}, {other.key}'s choice: "
                f"{'that setting explains' if len(causes) == 1 else 'each of these explains'} "
                "the disagreement."
            )
        elif not differing:
            explained = (
                "Every harmonised setting is the same: the difference comes from the engines' "
                "likelihoods and optimisers, which lead the stepwise paths apart."
            )
        else:
            explained = (
                "No single harmonised setting reproduces the other's choice; see the "
                "combined re-run and the exhaustive reference search."
            )
        findings.append(
            Finding(
                "search-disagreement",
                "warn",
                None,
                "order",
                f"{_with_members(a.key, members)} select{'s' if not members[a.key] else ''} "
                f"{a.selected}; {_with_members(b.key, members)} "
                f"select{'s' if not members[b.key] else ''} {b.selected}. "
                + " ".join(details)
                + " "
                + explained,
                {
                    "searches": [a.key, b.key],
                    "same_selection_as": {a.key: members[a.key], b.key: members[b.key]},
                    "selected": [a.selected, b.selected],
                    "differing_settings": differing,
                    "causes": causes,
                },
            )
        )
    table = pd.DataFrame(rows)
    return table, findings, list(cache.values())


def _with_members(key: str, members: Mapping[str, list[str]]) -> str:
    others = members.get(key, [])
    return key if not others else f"{key} (and {', '.join(others)})"


def _default_constant_check(
    y_t: np.ndarray, specs: Iterable[ModelSpec], estimators: Iterable[str] | None
) -> tuple[pd.DataFrame, list[Finding]]:
    """What each fit adapter's library would add to each order when called with defaults."""
    from .estimators import available_estimators

    keys = list(estimators) if estimators is not None else available_estimators()
    rows, findings = [], []
    for spec in specs:
        plain = ModelSpec(spec.order, spec.seasonal, spec.period, mean=False)
        s = plain.n_differences
        implied = {0: "a non-zero level mean", 1: "a linear trend in levels (a drift)"}.get(
            s, f"a polynomial trend of degree {s} in levels"
        )
        for key in keys:
            estimate = get_adapter(key).fit(y_t, plain)
            added = dict(estimate.overridden_defaults)
            rows.append(
                {
                    "model": _text(plain),
                    "estimator": key,
                    "status": estimate.status,
                    "default_adds": ", ".join(f"{k}={v!r}" for k, v in added.items()) or None,
                    "implies": implied if added else None,
                }
            )
            if added:
                findings.append(
                    Finding(
                        "default-adds-constant",
                        "warn" if s >= 2 else "info",
                        key,
                        "mu",
                        f"Called with its defaults for {_text(plain)}, {key} would add a "
                        f"constant ({', '.join(f'{k}={v!r}' for k, v in added.items())}): with "
                        f"d + D = {s} that is {implied}. forecastaudit passes the option "
                        "explicitly; a user who does not gets a different model.",
                        {"model": _text(plain), "defaults": _json(added), "d_plus_D": s},
                    )
                )
    return pd.DataFrame(rows), findings


def _advisories(spec: ModelSpec, params: Mapping[str, float], who: str) -> list[Finding]:
    """Rules of thumb on one selected model (common practice, no source)."""
    out: list[Finding] = []
    text = _text(spec)

    def add(message: str, values: dict[str, Any]) -> None:
        out.append(
            Finding(
                "rule-of-thumb",
                "info",
                None,
                "order",
                f"{text} ({who}): {message} (common practice, no source).",
                {"model": text, **values},
            )
        )

    if spec.d > 1 or spec.D > 1:
        add(
            f"{spec.d} regular and {spec.D} seasonal differences; more than one of either is "
            "rarely needed",
            {"d": spec.d, "D": spec.D},
        )
    if spec.p + spec.q >= LARGE_PQ:
        add(
            f"p + q = {spec.p + spec.q} is large; a simpler model may forecast as well",
            {"p_plus_q": spec.p + spec.q},
        )
    if spec.P > 1 or spec.Q > 1:
        add(
            f"seasonal orders P={spec.P}, Q={spec.Q} above 1 are rarely needed",
            {"P": spec.P, "Q": spec.Q},
        )
    for prefix, diff, kind in (("ma", spec.d, "regular"), ("sma", spec.D, "seasonal")):
        total = sum(v for k, v in params.items() if k.startswith(f"{prefix}_lag"))
        if diff >= 1 and any(k.startswith(f"{prefix}_lag") for k in params):
            if abs(1.0 + total) < SUM_NEAR_ONE:
                add(
                    f"the {kind} MA coefficients sum to {total:.3f}, near -1, after {kind} "
                    "differencing: a sign of over-differencing",
                    {f"{prefix}_sum": total},
                )
    for prefix, kind in (("ar", "regular"), ("sar", "seasonal")):
        total = sum(v for k, v in params.items() if k.startswith(f"{prefix}_lag"))
        if any(k.startswith(f"{prefix}_lag") for k in params) and abs(1.0 - total) < SUM_NEAR_ONE:
            add(
                f"the {kind} AR coefficients sum to {total:.3f}, near 1: a sign of a missing "
                f"{kind} difference",
                {f"{prefix}_sum": total},
            )
    return out


def audit_order_search(
    y: Any,
    period: int | None = None,
    *,
    transform: str | None = None,
    searches: Iterable[str] | None = None,
    max_p: int = 2,
    max_q: int = 2,
    max_P: int = 1,
    max_Q: int = 1,
    estimators: Iterable[str] | None = None,
    rerun_limit: float = RERUN_LIMIT,
    n_jobs: int | None = None,
    check_defaults: bool = True,
    name: str | None = None,
) -> OrderSearchAudit:
    """Audit the automatic order searches of every installed stack on one series.

    Parameters
    ----------
    y : pandas.Series, numpy.ndarray or sequence of numbers
        The series on its original scale.
    period : int, optional
        Seasonal period (default: from the series' frequency).
    transform : None, "log" or a Box-Cox transform, optional
        Applied once before every search (as in :class:`forecastaudit.ModelSpec`).
    searches : iterable of str, optional
        Search keys (see :func:`forecastaudit.estimators.search_base.available_searches`);
        default all. Each runs with its library's own defaults.
    max_p, max_q, max_P, max_Q : int
        Bounds of our exhaustive reference search (not of the libraries' searches). A
        search's choice outside them is fitted as well, so its rank is defined.
    estimators : iterable of str, optional
        Fit adapters asked in the default-constant check (default all).
    rerun_limit : float
        A search whose default run took longer than this (seconds) is not re-run for the
        decomposition; the cheaper search of each disagreeing pair is the one re-run.
    n_jobs : int, optional
        Worker processes for the exhaustive search (default 1, in this process).
    check_defaults : bool
        Run the default-constant check through the fit adapters.
    name : str, optional
        Display name of the series.

    Returns
    -------
    OrderSearchAudit
    """
    series = prepare_series(y, period=period, name=name)
    m = series.period if series.period and series.period > 1 else 1
    base_spec = ModelSpec(period=m if m > 1 else None, transform=transform)
    y_t = series.transformed(base_spec)
    keys = list(searches) if searches is not None else available_searches()
    if not keys:
        raise SpecError("searches is empty; pass None for every installed search.")
    outcomes = {key: get_search(key).run(y_t, m) for key in keys}
    findings: list[Finding] = []
    for o in outcomes.values():
        if o.status != "ok":
            findings.append(
                Finding(
                    "search-failed",
                    "warn",
                    o.key,
                    "order",
                    f"{o.key}'s order search is {o.status}: {o.reason}",
                    {"status": o.status},
                )
            )
        elif o.warnings:
            findings.append(
                Finding(
                    "library-warnings",
                    "info",
                    o.key,
                    "order",
                    f"{o.key}'s order search raised {len(o.warnings)} warning(s); first: "
                    f"{o.warnings[0].category}: {o.warnings[0].message[:200]}",
                    {"count": len(o.warnings)},
                )
            )
    ok = {k: o for k, o in outcomes.items() if o.ok}

    decomposition, disagreements, reruns = _decompose(outcomes, y_t, m, rerun_limit)
    findings += disagreements

    choices = {(o.spec.d, o.spec.D) for o in ok.values() if o.spec is not None}
    candidates, info = exhaustive_reference_search(
        y_t,
        m,
        choices,
        max_p=max_p,
        max_q=max_q,
        max_P=max_P,
        max_Q=max_Q,
        extra=[o.spec for o in ok.values() if o.spec is not None],
        n_jobs=n_jobs,
    )
    chosen: dict[str, list[str]] = {}
    for o in ok.values():
        chosen.setdefault(_text(o.spec), []).append(o.key)
    if not candidates.empty:
        candidates["chosen_by"] = [
            ", ".join(chosen.get(t, [])) or None for t in candidates["model"]
        ]

    selection_rows = []
    for key, o in outcomes.items():
        row: dict[str, Any] = {
            "search": key,
            "engine": o.engine,
            "status": o.status,
            "selected": o.selected or None,
            "d": o.spec.d if o.spec else None,
            "D": o.spec.D if o.spec else None,
            "constant": o.spec.mean if o.spec else None,
            "d_decided_by": o.d_decided_by or None,
            "D_decided_by": o.D_decided_by or None,
            "criterion": o.criterion or None,
            "criterion_value": o.criterion_value,
            "criterion_definition": o.criterion_definition or None,
            "constant_rule": o.constant_rule or None,
            "stepwise": o.stepwise,
            "candidates": o.candidates,
            "seconds": o.seconds,
        }
        if o.ok and not candidates.empty:
            match = candidates[candidates["model"] == _text(o.spec)].iloc[0]
            same = candidates[(candidates["d"] == o.spec.d) & (candidates["D"] == o.spec.D)]
            best = same.iloc[0]
            best_grid = same[same["in_grid"]]["aicc"].min()
            row.update(
                {
                    "reference_aicc": float(match["aicc"]),
                    "rank": int(match["rank"]),
                    "of": len(same),
                    "delta_aicc": float(match["delta_aicc"]),
                    "best_in_differencing": best["model"],
                    "best_aicc": float(best["aicc"]),
                    "grid_best_aicc": float(best_grid),
                }
            )
            supported = same[same["within_2"]]["model"].tolist()
            inside = bool(match["within_2"])
            findings.append(
                Finding(
                    "search-rank",
                    "info" if inside else "warn",
                    key,
                    "aicc",
                    f"{key}'s choice {o.selected} ranks {int(match['rank'])} of {len(same)} "
                    f"by reference AICc among models with d={o.spec.d}, D={o.spec.D} "
                    f"({float(match['delta_aicc']):.2f} above the best, {best['model']}); "
                    + (
                        "within the 2-unit band of substantial support"
                        if inside
                        else "outside the 2-unit band of substantial support"
                    )
                    + f" (Burnham & Anderson 2002). Supported: {', '.join(supported)}.",
                    {
                        "rank": int(match["rank"]),
                        "delta_aicc": float(match["delta_aicc"]),
                        "best": best["model"],
                        "supported": supported,
                    },
                )
            )
            findings += _advisories(o.spec, match["params"], key)
        selection_rows.append(row)
    selections = pd.DataFrame(selection_rows).set_index("search")

    test_rows = [{"search": o.key, **t.to_dict()} for o in outcomes.values() for t in o.tests]
    differencing_tests = pd.DataFrame(test_rows)
    _differencing_findings(ok, findings)

    default_table = pd.DataFrame()
    if check_defaults and ok:
        distinct = {_key(o.spec): o.spec for o in ok.values() if o.spec is not None}
        plain = {(s.order, s.seasonal, s.m): s for s in distinct.values()}
        default_table, default_findings = _default_constant_check(y_t, plain.values(), estimators)
        findings += default_findings

    timings = pd.DataFrame(
        [
            {
                "search": k,
                "seconds": o.seconds,
                "candidates": o.candidates,
                "processes": 1,
            }
            for k, o in outcomes.items()
        ]
        + [
            {
                "search": "reference exhaustive",
                "seconds": info["seconds"],
                "candidates": info["candidates"],
                "processes": info["n_jobs"],
            }
        ]
    ).set_index("search")
    order = {"fail": 0, "warn": 1, "info": 2}
    findings.sort(key=lambda f: order[f.severity])
    return OrderSearchAudit(
        series_name=series.name,
        n=len(series),
        period=m if m > 1 else None,
        transform=base_spec.transform,
        searches=outcomes,
        selections=selections,
        differencing_tests=differencing_tests,
        decomposition=decomposition,
        candidates=candidates,
        default_constant=default_table,
        timings=timings,
        findings=findings,
        exhaustive=info,
        reruns=reruns,
    )


def _differencing_findings(ok: Mapping[str, SearchOutcome], findings: list[Finding]) -> None:
    for decision, letter in (("regular", "d"), ("seasonal", "D")):
        values = {k: _setting_value(o, letter) for k, o in ok.items()}
        if len(set(values.values())) > 1:
            findings.append(
                Finding(
                    "differencing-decision",
                    "warn",
                    None,
                    letter,
                    f"The {decision}-differencing decisions differ on the same data: "
                    + "; ".join(_tests_summary(o, decision) for o in ok.values())
                    + ". Information criteria cannot settle this: they do not compare models "
                    "with different differencing (common practice, no source).",
                    {"values": values},
                )
            )


# ====================================================================== model choice
@dataclass
class ModelChoiceResult:
    """The result of :func:`compare_models`.

    Attributes
    ----------
    specs : list of ModelSpec
        The candidate models, in the order given.
    holdout, origins : int
        Holdout length per origin and number of origins.
    scores : pandas.DataFrame
        One row per (model, estimator): holdout ``mase``, ``rmse``, ``mae``, the reference
        ``aicc`` at that estimator's estimate, ``d``, ``D`` and the status.
    mase_ranks : pandas.DataFrame
        Rank of each model (columns) within each implementation (rows) by holdout MASE.
    aicc_ranks : pandas.DataFrame
        Rank by reference AICc within each group of models that share their differencing
        (columns ``<model>``), per implementation; NaN where a model has no partner.
    preferred : dict of str to str
        Per implementation, the model with the lowest holdout MASE.
    stable : bool
        True when every implementation ranks the models the same way by MASE.
    findings : list of Finding
    reports : dict of str to AuditReport
        The audit of each model (memory only, not in :meth:`to_dict`).
    """

    specs: list[ModelSpec]
    holdout: int
    origins: int
    scores: pd.DataFrame
    mase_ranks: pd.DataFrame
    aicc_ranks: pd.DataFrame
    preferred: dict[str, str]
    stable: bool
    findings: list[Finding]
    seconds: float = 0.0
    reports: dict[str, Any] = field(default_factory=dict, repr=False)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (numpy values to Python, NaN to None)."""
        return {
            "models": [s.to_dict() for s in self.specs],
            "holdout": self.holdout,
            "origins": self.origins,
            "scores": _records(self.scores),
            "mase_ranks": {
                str(k): {str(c): _json(v) for c, v in row.items()}
                for k, row in self.mase_ranks.iterrows()
            },
            "aicc_ranks": {
                str(k): {str(c): _json(v) for c, v in row.items()}
                for k, row in self.aicc_ranks.iterrows()
            },
            "preferred": dict(self.preferred),
            "stable": self.stable,
            "findings": [f.to_dict() for f in self.findings],
            "seconds": self.seconds,
        }

    def __str__(self) -> str:
        lines = [
            f"Model choice over {len(self.specs)} models, holdout {self.origins} x "
            f"{self.holdout}: {'same ranking in every implementation' if self.stable else 'RANKING DIFFERS between implementations'}",  # noqa: E501
            "",
        ]
        with pd.option_context("display.width", 140, "display.max_columns", 20):
            lines += ["Rank by holdout MASE:", self.mase_ranks.to_string(), ""]
            cols = ["model", "estimator", "mase", "rmse", "aicc"]
            lines += ["Scores:", self.scores[cols].to_string(index=False), ""]
        lines += [f"  {f}" for f in self.findings]
        return "\n".join(lines)


def compare_models(
    y: Any,
    specs: Sequence[ModelSpec | str],
    *,
    holdout: int,
    origins: int = 1,
    estimators: Iterable[str] | None = None,
    tolerances: Tolerances | Mapping[str, float] | None = None,
    period: int | None = None,
) -> ModelChoiceResult:
    """Does the choice between candidate models depend on the implementation?

    Each model is audited with :func:`forecastaudit.audit` (every estimator and the
    reference optimum, with the same holdout and origins); the models are ranked within
    each implementation by pooled holdout MASE (Hyndman & Koehler 2006) and, among models
    that share their differencing, by reference AICc at each implementation's estimate. A
    ranking that differs between implementations is a finding.

    Parameters
    ----------
    y : pandas.Series, numpy.ndarray or sequence of numbers
        The series on its original scale.
    specs : sequence of ModelSpec or str
        Two or more candidate models (same transform for the likelihoods to compare).
    holdout : int
        Observations held out per origin.
    origins : int
        Rolling origins (default 1).
    estimators : iterable of str, optional
        Estimator keys (default all).
    tolerances : Tolerances or mapping, optional
        ``accuracy_rtol`` decides whether a flip between close MASE values is a warning.
    period : int, optional
        Seasonal period when the series' index does not give one.

    Returns
    -------
    ModelChoiceResult
    """
    from .audit import audit

    parsed = [ModelSpec.parse(s) if isinstance(s, str) else s for s in specs]
    if len(parsed) < 2:
        raise SpecError("compare_models needs at least two models to compare.")
    tol = (
        tolerances
        if isinstance(tolerances, Tolerances)
        else Tolerances.from_dict(dict(tolerances or {}))
    )
    started = time.perf_counter()
    reports: dict[str, Any] = {}
    rows = []
    for spec in parsed:
        report = audit(y, spec, estimators, tol, period=period, holdout=holdout, origins=origins)
        label = str(report.spec)
        reports[label] = report
        accuracy = report.holdout.accuracy if report.holdout is not None else pd.DataFrame()
        for key, estimate in report.estimates.items():
            has = key in accuracy.index
            rows.append(
                {
                    "model": label,
                    "estimator": key,
                    "status": estimate.status,
                    "d": report.spec.d,
                    "D": report.spec.D,
                    "mase": float(accuracy.loc[key, "mase"]) if has else math.nan,
                    "rmse": float(accuracy.loc[key, "rmse"]) if has else math.nan,
                    "mae": float(accuracy.loc[key, "mae"]) if has else math.nan,
                    "aicc": float(estimate.criteria.get("aicc", math.nan))
                    if estimate.ok
                    else math.nan,
                }
            )
    scores = pd.DataFrame(rows)
    labels = list(reports)
    mase = scores.pivot(index="estimator", columns="model", values="mase")[labels]
    complete = mase.dropna()
    mase_ranks = complete.rank(axis=1, method="min").astype(int)
    orderings = {
        key: tuple(row.sort_values(kind="stable").index) for key, row in complete.iterrows()
    }
    preferred = {key: order[0] for key, order in orderings.items()}
    stable = len(set(orderings.values())) <= 1
    findings: list[Finding] = []
    if not stable:
        groups: dict[tuple[str, ...], list[str]] = {}
        for key, order in orderings.items():
            groups.setdefault(order, []).append(key)
        # Is the flip larger than the accuracy tolerance anywhere?
        beyond = False
        for key, row in complete.iterrows():
            best = row.min()
            others_first = {preferred[k] for k in preferred} - {preferred[key]}
            for label in others_first:
                if row[label] > best * (1.0 + tol.accuracy_rtol):
                    beyond = True
        findings.append(
            Finding(
                "ranking-flip",
                "warn" if beyond else "info",
                None,
                "mase",
                "The ranking of the models by holdout MASE differs between implementations: "
                + "; ".join(
                    f"{', '.join(keys)} rank {' < '.join(order)}" for order, keys in groups.items()
                )
                + (
                    ". The MASE gaps exceed the accuracy tolerance "
                    f"({100 * tol.accuracy_rtol:g}%): the choice of model depends on the "
                    "implementation."
                    if beyond
                    else ". Every gap is within the accuracy tolerance "
                    f"({100 * tol.accuracy_rtol:g}%)."
                ),
                {
                    "orderings": {k: list(v) for k, v in orderings.items()},
                    "beyond_tolerance": beyond,
                },
            )
        )
    elif orderings:
        first = next(iter(orderings.values()))
        findings.append(
            Finding(
                "ranking-stable",
                "info",
                None,
                "mase",
                f"Every implementation ({', '.join(orderings)}) ranks the models the same by "
                f"holdout MASE: {' < '.join(first)}.",
                {"ordering": list(first)},
            )
        )
    # Reference AICc ranks, only among models that share their differencing.
    aicc = scores.pivot(index="estimator", columns="model", values="aicc")[labels]
    aicc_ranks = pd.DataFrame(index=aicc.index, columns=labels, dtype=float)
    diff_of = {str(r.spec): (r.spec.d, r.spec.D) for r in reports.values()}
    for choice in set(diff_of.values()):
        members = [lab for lab in labels if diff_of[lab] == choice]
        if len(members) < 2:
            continue
        aicc_ranks[members] = aicc[members].rank(axis=1, method="min")
        sub = aicc[members].dropna()
        orders = {tuple(row.sort_values(kind="stable").index) for _, row in sub.iterrows()}
        if len(orders) > 1:
            findings.append(
                Finding(
                    "ranking-flip",
                    "warn",
                    None,
                    "aicc",
                    f"Among the models with d={choice[0]}, D={choice[1]} the ranking by "
                    "reference AICc at each implementation's estimate differs between "
                    "implementations.",
                    {"orderings": [list(o) for o in orders]},
                )
            )
    return ModelChoiceResult(
        specs=[r.spec for r in reports.values()],
        holdout=holdout,
        origins=origins,
        scores=scores,
        mase_ranks=mase_ranks,
        aicc_ranks=aicc_ranks,
        preferred=preferred,
        stable=stable,
        findings=findings,
        seconds=time.perf_counter() - started,
        reports=reports,
    )
