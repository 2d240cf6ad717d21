"""Model-choice stability: does the ranking of candidate models depend on the implementation?

Each candidate is fitted by every estimator and scored on a holdout, and the ranking is
compared across implementations.
"""

from __future__ import annotations

import datetime as _dt
import math
import time
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from forecastaudit.diagnosis.findings import Finding
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.errors import SpecError
from forecastaudit.jsonutil import to_plain
from forecastaudit.search.common import _json, _records
from forecastaudit.spec import ModelSpec
from forecastaudit.validation import echo, whole_number


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
        and their transform (columns ``<model>``), per implementation; NaN where a model has
        no partner.
    preferred : dict of str to str
        Per implementation, the model with the lowest holdout MASE.
    stable : bool
        True when every implementation ranks the models the same way by MASE.
    findings : list of Finding
    reports : dict of str to AuditResult
        The audit of each model (memory only, not in :meth:`to_dict`).
    created : str
        UTC time the comparison finished (ISO 8601).
    invocation : dict or None
        How the comparison was started, when the command line started it (the arguments
        and the input files' names and SHA-256).

    ``scores`` also has, per (model, estimator), ``gap``: the estimate's log-likelihood
    below that model's reference optimum, and ``audit_verdict``: that model's audit verdict.
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
    created: str = ""
    invocation: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (numpy values to Python, NaN to None), with what a reviewer needs
        to tie it to its data and software: the time, versions and the data fingerprint."""
        from forecastaudit.record.document import provenance

        first = next(iter(self.reports.values()), None)
        return {
            "record": "forecastaudit-model-choice",
            "created": self.created,
            **({"provenance": to_plain(provenance(first))} if first is not None else {}),
            # Each candidate's data fingerprint (with the regressor columns it uses).
            "fingerprints": {
                label: report.series.fingerprint for label, report in self.reports.items()
            },
            **({"invocation": to_plain(self.invocation)} if self.invocation else {}),
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

    def to_html(self, path: str | None = None) -> str:
        """The model-choice report as one self-contained HTML page; written to ``path``."""
        from forecastaudit.files import write_text_atomic
        from forecastaudit.report.model_choice import render_model_choice_html

        text = render_model_choice_html(self)
        if path is not None:
            write_text_atomic(path, text)
        return text

    def to_markdown(self, path: str | None = None) -> str:
        """The model-choice report in Markdown, for a change request; written to ``path``."""
        from forecastaudit.files import write_text_atomic
        from forecastaudit.report.model_choice import render_model_choice_markdown

        text = render_model_choice_markdown(self)
        if path is not None:
            write_text_atomic(path, text)
        return text

    def __repr__(self) -> str:
        return (
            f"<ModelChoiceResult {len(self.specs)} models, holdout {self.origins} x "
            f"{self.holdout}: {'same ranking' if self.stable else 'ranking differs'}>"
        )

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
    holdout: int | None,
    origins: int = 1,
    estimators: Iterable[str] | None = None,
    tolerances: Tolerances | Mapping[str, float] | None = None,
    period: int | None = None,
    regressors: pd.DataFrame | None = None,
    future_regressors: pd.DataFrame | None = None,
) -> ModelChoiceResult:
    """Does the choice between candidate models depend on the implementation?

    Each model is audited with :func:`forecastaudit.pipeline` (every estimator and the
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
    regressors, future_regressors : pandas.DataFrame, optional
        The regressor columns, over the series and over the forecast horizon after it, for
        candidates that name regressors (``+x(price,promo)``); each such candidate uses its
        own columns of these frames, and candidates without regressors use none. As in
        :func:`forecastaudit.audit`, holdout forecasts use the held-out rows as known
        future values. Models with different regressors and the same differencing are
        fitted to the same data, so their AICc values compare. Not modified.

    Returns
    -------
    ModelChoiceResult
    """
    from forecastaudit.pipeline import audit

    if isinstance(specs, str | ModelSpec) or not isinstance(specs, Sequence):
        raise SpecError(
            "specs must be a list of two or more models, e.g. ['ARIMA(0,1,1)x(0,1,1)12', "
            f"'ARIMA(1,1,0)x(0,1,1)12'], got {echo(specs)}."
        )
    parsed = [ModelSpec.parse(s) if isinstance(s, str) else s for s in specs]
    if len(parsed) < 2:
        raise SpecError("compare_models needs at least two models to compare.")
    if holdout is None:
        # Without a holdout there is no accuracy to rank by, and "every implementation
        # ranks the models the same" would be said of no ranking at all.
        raise SpecError(
            "compare_models ranks models by holdout accuracy and needs holdout=H (steps "
            "held out per origin), e.g. holdout=12."
        )
    holdout = whole_number(holdout, "holdout", minimum=1, example="12")
    origins = whole_number(origins, "origins", minimum=1, example="3")
    tol = (
        tolerances
        if isinstance(tolerances, Tolerances)
        else Tolerances.from_dict(dict(tolerances or {}))
    )
    if (regressors is not None or future_regressors is not None) and not any(
        spec.regressors for spec in parsed
    ):
        raise SpecError(
            "Regressors were given, but no candidate model names any: add the columns to the "
            "models that use them, e.g. 'ARIMA(1,0,1) +mean +x(price,promo)'."
        )
    started = time.perf_counter()
    reports: dict[str, Any] = {}
    rows = []
    for spec in parsed:
        uses = bool(spec.regressors)
        report = audit(
            y,
            spec,
            estimators,
            tol,
            period=period,
            holdout=holdout,
            origins=origins,
            regressors=regressors if uses else None,
            future_regressors=future_regressors if uses else None,
        )
        label = str(report.spec)
        reports[label] = report
        accuracy = report.holdout.accuracy if report.holdout is not None else pd.DataFrame()
        gaps = report.likelihoods["gap_to_best"] if "gap_to_best" in report.likelihoods else {}
        for key, estimate in report.estimates.items():
            has = key in accuracy.index
            gap = float(gaps[key]) if key in gaps and estimate.ok else math.nan
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
                    "gap": gap,
                    "audit_verdict": report.verdict,
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
    # A ranking is only as good as the fits behind it: an implementation whose estimate of a
    # candidate is short of that candidate's optimum ranks a worse fit, not the model.
    short = scores[(scores["estimator"] != "reference") & (scores["gap"] > tol.loglike_atol)]
    short_words = "; ".join(
        f"{row.estimator} on {row.model} ({row.gap:.4g} units)" for row in short.itertuples()
    )
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
                )
                + (
                    " Part of it may be the fits rather than the models: these estimates are "
                    f"below their model's reference optimum: {short_words}. See each model's "
                    "audit for the cause."
                    if short_words
                    else ""
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
    if short_words:
        findings.append(
            Finding(
                "candidate-off-optimum",
                "warn",
                None,
                "loglike",
                "Some implementations' estimates of a candidate are below that candidate's "
                f"reference optimum by more than {tol.loglike_atol:g} log-likelihood units: "
                f"{short_words}. Their scores rank those fits, not the models; see each "
                "model's audit (reports) for the cause.",
                {
                    "estimates": [
                        {"model": row.model, "estimator": row.estimator, "gap": row.gap}
                        for row in short.itertuples()
                    ]
                },
            )
        )
    # Reference AICc ranks, only among models that share their differencing and their
    # transform: likelihoods of differently differenced or transformed series do not compare.
    aicc = scores.pivot(index="estimator", columns="model", values="aicc")[labels]
    aicc_ranks = pd.DataFrame(index=aicc.index, columns=labels, dtype=float)
    diff_of = {
        str(r.spec): (r.spec.d, r.spec.D, r.spec.transform or "none") for r in reports.values()
    }
    for choice in sorted(set(diff_of.values())):
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
                    f"Among the models with d={choice[0]}, D={choice[1]} and transform "
                    f"{choice[2]} the ranking by "
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
        created=_dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
    )
