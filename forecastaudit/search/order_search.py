"""The order-search audit: each library's search, the causes of their disagreements, and
our exhaustive search under the reference AICc (see :mod:`forecastaudit.search`)."""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.adapters.registry import available_searches
from forecastaudit.diagnosis.findings import Finding, select_findings
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.errors import SpecError
from forecastaudit.estimate import SearchOutcome
from forecastaudit.fitting import SearchTask, fit_tasks, run_fits, run_searches
from forecastaudit.layout import layout_of
from forecastaudit.run import Backend, make_backend
from forecastaudit.search.common import _json, _key, _records, _text
from forecastaudit.search.decomposition import (
    RERUN_LIMIT,
    _decompose,
    _setting_value,
    _tests_summary,
)
from forecastaudit.search.exhaustive import SUPPORT_BAND, exhaustive_reference_search
from forecastaudit.series import prepare_series
from forecastaudit.spec import ModelSpec
from forecastaudit.validation import whole_number

#: Largest bound of one kind of term in the exhaustive reference search.
MAX_SEARCH_ORDER = 5

# Rules of thumb (common practice, no source).
LARGE_PQ = 4  # p + q at or above this is large


SUM_NEAR_ONE = 0.1  # |1 - sum(ar)| or |1 + sum(ma)| below this is "near"


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

    def findings_of(self, *, severity: str | None = None, kind: str | None = None) -> list[Finding]:
        """Findings filtered by severity and/or kind (keywords, as on the audit result)."""
        return select_findings(self.findings, severity=severity, kind=kind)

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

    def __repr__(self) -> str:
        return (
            f"<OrderSearchAudit {self.series_name!r} (n={self.n}, period {self.period}): "
            f"{len(self.searches)} searches, {len(self.findings)} findings>"
        )

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


def _default_constant_check(
    y_t: np.ndarray,
    specs: Iterable[ModelSpec],
    estimators: Iterable[str] | None,
    backend: Backend | int | None = None,
) -> tuple[pd.DataFrame, list[Finding]]:
    """What each fit adapter's library would add to each order when called with defaults."""
    from forecastaudit.adapters.registry import available_estimators

    keys = list(estimators) if estimators is not None else available_estimators()
    rows, findings = [], []
    for spec in specs:
        plain = ModelSpec(spec.order, spec.seasonal, spec.period, mean=False)
        s = plain.n_differences
        implied = {0: "a non-zero level mean", 1: "a linear trend in levels (a drift)"}.get(
            s, f"a polynomial trend of degree {s} in levels"
        )
        fitted = run_fits(fit_tasks(keys, y_t, plain, label="defaults check"), backend)
        for key, outcome in zip(keys, fitted, strict=True):
            estimate = outcome.estimate
            added = dict(estimate.overridden_defaults)
            rows.append(
                {
                    "model": _text(plain),
                    "estimator": key,
                    "status": estimate.status,
                    "default_adds": (
                        ", ".join(f"{k}={v!r}" for k, v in added.items())
                        if added
                        else ("nothing" if estimate.ok else None)
                    ),
                    "implies": implied if added else None,
                    "reason": None if estimate.ok else str(estimate.reason or "")[:160],
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
    # Sums of each factor's coefficients, over those ``params`` holds (a failed fit holds
    # none): the MA factors first, then the AR ones.
    layout = layout_of(spec)
    for factor in (*layout.ma_factors, *layout.ar_factors):
        values = [params[name] for name in factor.names if name in params]
        if not values:
            continue
        total = sum(values)
        kind = "seasonal" if factor.seasonal else "regular"
        if factor.kind == "ma":
            differenced = spec.D if factor.seasonal else spec.d
            if differenced >= 1 and abs(1.0 + total) < SUM_NEAR_ONE:
                add(
                    f"the {kind} MA coefficients sum to {total:.3f}, near -1, after {kind} "
                    "differencing: a sign of over-differencing",
                    {f"{factor.key}_sum": total},
                )
        elif abs(1.0 - total) < SUM_NEAR_ONE:
            add(
                f"the {kind} AR coefficients sum to {total:.3f}, near 1: a sign of a missing "
                f"{kind} difference",
                {f"{factor.key}_sum": total},
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
    n_jobs: int | Backend | None = None,
    check_defaults: bool = True,
    name: str | None = None,
    specified: ModelSpec | None = None,
    tol: Tolerances | None = None,
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
        Search keys (see :func:`forecastaudit.adapters.search_base.available_searches`);
        default all. Each runs with its library's own defaults.
    max_p, max_q, max_P, max_Q : int
        Bounds of our exhaustive reference search (not of the libraries' searches). A
        search's choice outside them is fitted as well, so its rank is defined.
    estimators : iterable of str, optional
        Fit adapters asked in the default-constant check (default all).
    rerun_limit : float
        A search whose default run took longer than this (seconds) is not re-run for the
        decomposition; the cheaper search of each disagreeing pair is the one re-run.
    n_jobs : int or execution backend, optional
        Where the searches, the default-constant fits and the exhaustive search run: None
        or 1 in this process, N >= 2 in N local worker processes, or a backend from
        :mod:`forecastaudit.run`, reused as it is.
    check_defaults : bool
        Run the default-constant check through the fit adapters.
    name : str, optional
        Display name of the series.
    specified : ModelSpec, optional
        The model the audit was asked about. Its differencing is searched as well and the
        model itself fitted, so that it is ranked by reference AICc among the candidates
        with its own d and D (recorded in ``exhaustive["specified"]`` and the candidates'
        ``specified`` column); more than 2 AICc units above the best of them gives an
        ``outside-support-band`` finding (Burnham & Anderson 2002, section 2.6). Its
        transform must be ``transform`` and its period this series' period.
    tol : Tolerances, optional
        Sets only the severity of findings about the model (``fail_on_model_findings``);
        default :class:`Tolerances()`.

    Returns
    -------
    OrderSearchAudit
    """
    for label, bound in (("max_p", max_p), ("max_q", max_q), ("max_P", max_P), ("max_Q", max_Q)):
        whole_number(bound, label, minimum=0, example="2")
        if bound > MAX_SEARCH_ORDER:
            raise SpecError(
                f"{label}={bound} asks the exhaustive search for more than "
                f"{MAX_SEARCH_ORDER} terms of one kind; the candidates grow with the product "
                f"of the bounds. Use {label} <= {MAX_SEARCH_ORDER}."
            )
    series = prepare_series(y, period=period, name=name)
    m = series.period if series.period and series.period > 1 else 1
    base_spec = ModelSpec(period=m if m > 1 else None, transform=transform)
    y_t = series.transformed(base_spec)
    tol = tol if tol is not None else Tolerances()
    wanted = _specified_plain(specified, m, base_spec.transform)
    keys = list(searches) if searches is not None else available_searches()
    if not keys:
        raise SpecError("searches is empty; pass None for every installed search.")
    owned = not isinstance(n_jobs, Backend)
    backend = make_backend(n_jobs)  # one set of workers for every stage of this audit
    searched = run_searches([SearchTask(key, y_t, m) for key in keys], backend)
    outcomes = dict(zip(keys, searched, strict=True))
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
    extra = [o.spec for o in ok.values() if o.spec is not None]
    if wanted is not None:
        choices.add((wanted.d, wanted.D))
        extra.append(wanted)
    candidates, info = exhaustive_reference_search(
        y_t,
        m,
        choices,
        max_p=max_p,
        max_q=max_q,
        max_P=max_P,
        max_Q=max_Q,
        extra=extra,
        n_jobs=backend,
    )
    chosen: dict[str, list[str]] = {}
    for o in ok.values():
        chosen.setdefault(_text(o.spec), []).append(o.key)
    if not candidates.empty:
        candidates["chosen_by"] = [
            ", ".join(chosen.get(t, [])) or None for t in candidates["model"]
        ]
        if wanted is not None:
            candidates["specified"] = candidates["model"] == _text(wanted)
            placed, band_findings = _support_band(wanted, candidates, tol)
            info["specified"] = placed
            findings += band_findings

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
        default_table, default_findings = _default_constant_check(
            y_t, plain.values(), estimators, backend
        )
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
    if owned:
        backend.close()
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


def _specified_plain(
    specified: ModelSpec | None, m: int, transform: str | None
) -> ModelSpec | None:
    """The specified model's orders and constant at this search's period (no transform)."""
    if specified is None:
        return None
    if not isinstance(specified, ModelSpec):
        raise SpecError(f"specified must be a ModelSpec, got {type(specified).__name__}.")
    if specified.transform != transform:
        raise SpecError(
            f"The specified model {specified} has transform {specified.transform}, but the "
            f"order searches run on the series with transform {transform}: AICc values of "
            "differently transformed series do not compare."
        )
    if specified.period is not None and any(specified.seasonal) and specified.m != m:
        raise SpecError(
            f"The specified model {specified} has period {specified.m}, but the order "
            f"searches run with period {m}."
        )
    return ModelSpec(specified.order, specified.seasonal, m if m > 1 else None, specified.mean)


def _support_band(
    wanted: ModelSpec, candidates: pd.DataFrame, tol: Tolerances
) -> tuple[dict[str, Any], list[Finding]]:
    """Where the specified model ranks by reference AICc among the candidates with its own
    differencing, and an ``outside-support-band`` finding when it is more than
    :data:`~forecastaudit.search.exhaustive.SUPPORT_BAND` units above the best.

    Burnham, K.P., Anderson, D.R. (2002), *Model Selection and Multimodel Inference*, 2nd
    ed., section 2.6: models within 2 AICc units of the best have substantial support.
    Only candidates with the same (d, D) are compared: information criteria do not compare
    models with different differencing (common practice, no source). Whether a finding is
    made depends on the fixed band only; ``tol.fail_on_model_findings`` sets its severity.
    """
    text = _text(wanted)
    same = candidates[(candidates["d"] == wanted.d) & (candidates["D"] == wanted.D)]
    match = same[same["model"] == text]
    if match.empty:
        return {"model": text, "status": "not fitted"}, []
    row = match.iloc[0]
    best = same.iloc[0]
    delta = float(row["delta_aicc"])
    placed: dict[str, Any] = {
        "model": text,
        "d": wanted.d,
        "D": wanted.D,
        "aicc": float(row["aicc"]),
        "rank": int(row["rank"]),
        "of": len(same),
        "delta_aicc": delta,
        "best": best["model"],
        "best_aicc": float(best["aicc"]),
        "within_band": bool(row["within_2"]),
        "status": "ranked" if np.isfinite(delta) else f"not ranked: {row['note'] or 'no AICc'}",
    }
    if not np.isfinite(delta) or delta <= SUPPORT_BAND:
        return placed, []
    supported = same[same["within_2"]]["model"].tolist()
    finding = Finding(
        "outside-support-band",
        "fail" if tol.fail_on_model_findings else "warn",
        None,
        "aicc",
        f"The specified model {text} ranks {int(row['rank'])} of {len(same)} by reference "
        f"AICc among the candidates with d={wanted.d}, D={wanted.D} in the exhaustive "
        f"reference search: {delta:.2f} AICc units above the best, {best['model']}, outside "
        f"the {SUPPORT_BAND:g}-unit band of substantial support (Burnham & Anderson 2002, "
        f"section 2.6). Supported: {', '.join(supported)}. This is a finding about the "
        "model, not about any implementation. Only models with the same differencing are "
        "ranked against it: information criteria do not compare models with different "
        "differencing (common practice, no source); compare those on a holdout.",
        {
            "model": text,
            "rank": int(row["rank"]),
            "of": len(same),
            "delta_aicc": delta,
            "best": best["model"],
            "best_aicc": float(best["aicc"]),
            "supported": supported,
            "band": SUPPORT_BAND,
        },
    )
    return placed, [finding]


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
