"""Why two order searches chose differently: re-runs with one setting harmonised at a time.

Two searches of different engines may differ in anything (tests, criteria, likelihoods,
optimisers); their disagreement is decomposed by re-running one with one setting harmonised
at a time. Two wrappers of one engine run the same code, so when they choose differently
the cause is in what each passes to it: their resolved defaults are compared first
(:func:`default_differences`) and the differing ones reported as the cause.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.adapters.registry import get_search
from forecastaudit.diagnosis.findings import Finding
from forecastaudit.estimate import SearchOutcome, SearchSettings
from forecastaudit.search.common import _key

#: The settings harmonised one at a time, in this order.
HARMONISED = ("d", "D", "criterion", "constant", "stepwise")


#: A search whose default run took longer than this many seconds is not re-run.
RERUN_LIMIT = 15.0

#: Resolved fields of a search compared between wrappers of one engine, before the bounds
#: and the options (canonical meaning, whatever the wrapper calls them).
RESOLVED = ("criterion", "constant_rule", "stepwise")

#: Options that say how a search reports, not what it searches: not compared.
NOT_COMPARED = frozenset({"trace", "verbose", "suppress_warnings", "error_action", "n_jobs"})


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


def _same(a: Any, b: Any) -> bool:
    """Equality that tolerates arrays, NaN and values that do not compare."""
    if a is b:
        return True
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    try:
        equal = a == b
        if isinstance(equal, np.ndarray):
            return bool(equal.all()) and np.shape(a) == np.shape(b)
        return bool(equal)
    except Exception:  # values of no common type: compare their text
        return repr(a) == repr(b)


def default_differences(a: SearchOutcome, b: SearchOutcome) -> dict[str, tuple[Any, Any]]:
    """The resolved settings in which two searches differ, as ``name -> (a's, b's)``.

    In order: :data:`RESOLVED` (``criterion``, ``constant_rule``, ``stepwise``), then each
    order bound (``bounds.<name>``), then each option both record under the same name
    (``options.<name>``; options only one of them names are not comparable and are left
    out, as are the reporting options in :data:`NOT_COMPARED`). Meant for wrappers of one
    engine, where these are the only way their searches can differ.
    """
    out: dict[str, tuple[Any, Any]] = {}
    for name in RESOLVED:
        va, vb = getattr(a, name), getattr(b, name)
        if not _same(va, vb):
            out[name] = (va, vb)
    for name in [*a.bounds, *(k for k in b.bounds if k not in a.bounds)]:
        va, vb = a.bounds.get(name), b.bounds.get(name)
        if not _same(va, vb):
            out[f"bounds.{name}"] = (va, vb)
    for name in a.options:
        if name in NOT_COMPARED or name not in b.options:
            continue
        va, vb = a.options[name], b.options[name]
        if not _same(va, vb):
            out[f"options.{name}"] = (va, vb)
    return out


def _shown(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _decompose(
    outcomes: Mapping[str, SearchOutcome],
    y_t: np.ndarray,
    m: int,
    rerun_limit: float,
) -> tuple[pd.DataFrame, list[Finding], list[SearchOutcome]]:
    """Decompose every disagreement between searches into its causes.

    Searches are grouped by their selection (in order). For each pair of selections: one
    cross-engine decomposition between the first two searches of different engines (a
    wrapper that selects what another search selects adds no disagreement of its own), and,
    for every engine with wrappers on both sides, one same-engine decomposition between its
    first wrapper on each side, whose cause is their differing defaults.
    """
    ok = [o for o in outcomes.values() if o.ok]
    rows: list[dict[str, Any]] = []
    findings: list[Finding] = []
    cache: dict[tuple[str, SearchSettings], SearchOutcome] = {}
    groups: dict[Any, list[SearchOutcome]] = {}
    for o in ok:
        groups.setdefault(_key(o.spec), []).append(o)
    for side_a, side_b in itertools.combinations(list(groups.values()), 2):
        cross = next(((a, b) for a in side_a for b in side_b if a.engine != b.engine), None)
        if cross is not None:
            a, b = cross
            members = {
                a.key: [o.key for o in side_a if o is not a],
                b.key: [o.key for o in side_b if o is not b],
            }
            pair_rows, finding = _pair(a, b, members, False, y_t, m, rerun_limit, cache)
            rows += pair_rows
            findings.append(finding)
        engines_b = {o.engine for o in side_b}
        for engine in dict.fromkeys(o.engine for o in side_a if o.engine in engines_b):
            a = next(o for o in side_a if o.engine == engine)
            b = next(o for o in side_b if o.engine == engine)
            members = {a.key: [], b.key: []}
            pair_rows, finding = _pair(a, b, members, True, y_t, m, rerun_limit, cache)
            rows += pair_rows
            findings.append(finding)
    table = pd.DataFrame(rows)
    return table, findings, list(cache.values())


def _pair(
    a: SearchOutcome,
    b: SearchOutcome,
    members: Mapping[str, list[str]],
    same_engine: bool,
    y_t: np.ndarray,
    m: int,
    rerun_limit: float,
    cache: dict[tuple[str, SearchSettings], SearchOutcome],
) -> tuple[list[dict[str, Any]], Finding]:
    """The harmonised re-runs and the finding of one disagreeing pair of searches."""
    rows: list[dict[str, Any]] = []
    pair = f"{a.key} / {b.key}"
    differing = [s for s in HARMONISED if _setting_value(a, s) != _setting_value(b, s)]
    defaults = default_differences(a, b) if same_engine else {}
    rerun, other = (a, b) if a.seconds <= b.seconds else (b, a)
    causes: list[str] = []
    details: list[str] = []
    if same_engine:
        if defaults:
            details.append(
                f"{a.key} and {b.key} are wrappers of one engine ({a.engine}): wrappers of "
                "one engine chose differently because their defaults differ: "
                + "; ".join(
                    f"{name} {_shown(va)} ({a.key}) vs {_shown(vb)} ({b.key})"
                    for name, (va, vb) in defaults.items()
                )
                + "."
            )
        else:
            details.append(
                f"{a.key} and {b.key} are wrappers of one engine ({a.engine}), yet every "
                "resolved option both record is the same: the difference lies in what a "
                "wrapper does that it does not record as an option (how it passes the "
                "data, options under names of its own); see their options in the record."
            )
    for decision, setting in (("regular", "d"), ("seasonal", "D")):
        if setting in differing:
            details.append(
                f"The {decision}-differencing decisions differ: "
                f"{_tests_summary(a, decision)}. {_tests_summary(b, decision)}."
            )
    if "criterion" in differing and not same_engine:
        details.append(
            f"Criteria differ: {a.key} minimises {a.criterion} ({a.criterion_definition}); "
            f"{b.key} minimises {b.criterion} ({b.criterion_definition})."
        )
    if "constant" in differing and not same_engine:
        details.append(
            f"Constant handling differs: {a.key} '{a.constant_rule}', {b.key} '{b.constant_rule}'."
        )
    if rerun.seconds > rerun_limit:
        rows.append(
            {
                "searches": pair,
                "same_engine": same_engine,
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
                    "same_engine": same_engine,
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
    elif same_engine and defaults and not differing:
        explained = (
            "None of the differing defaults is among the settings that can be harmonised "
            f"({', '.join(HARMONISED)}), so no re-run isolates one of them."
        )
    elif same_engine and not defaults:
        explained = ""
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
    values: dict[str, Any] = {
        "searches": [a.key, b.key],
        "same_selection_as": {a.key: members[a.key], b.key: members[b.key]},
        "selected": [a.selected, b.selected],
        "differing_settings": differing,
        "same_engine": same_engine,
        "engines": [a.engine, b.engine],
        # Cross-engine: the harmonised settings that alone reproduce the other's choice.
        # Same engine: the differing defaults (the only way one engine's wrappers differ).
        "causes": list(defaults) if same_engine else causes,
        "reproduced_by": causes,
    }
    if same_engine:
        values["differing_defaults"] = {
            name: [_shown(va), _shown(vb)] for name, (va, vb) in defaults.items()
        }
    finding = Finding(
        "search-disagreement",
        "warn",
        None,
        "order",
        f"{_with_members(a.key, members)} select{'s' if not members[a.key] else ''} "
        f"{a.selected}; {_with_members(b.key, members)} "
        f"select{'s' if not members[b.key] else ''} {b.selected}. "
        + " ".join(details)
        + (" " + explained if explained else ""),
        values,
    )
    return rows, finding


def _with_members(key: str, members: Mapping[str, list[str]]) -> str:
    others = members.get(key, [])
    return key if not others else f"{key} (and {', '.join(others)})"
