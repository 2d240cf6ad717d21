"""Why two order searches chose differently: re-runs with one setting harmonised at a time."""

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
