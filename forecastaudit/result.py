"""The result of an audit: estimates, tables, findings and the verdict."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.diagnosis.findings import Finding, select_findings
from forecastaudit.diagnosis.forecasts import (
    OriginalScaleForecast,
)
from forecastaudit.diagnosis.holdout import HoldoutResult
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import Estimate, Forecast
from forecastaudit.series import PreparedSeries
from forecastaudit.spec import ModelSpec

CAUTION = (
    "Agreement between implementations is evidence about the numerics of the fit, not proof "
    "that the model is fit for its purpose. Whether it may be used is for the organisation's "
    "model-risk policy and for qualified review to decide, above all where forecasts drive "
    "staffing, financial, health or safety decisions."
)


@dataclass
class AuditResult:
    """The result of :func:`audit`.

    Attributes
    ----------
    spec : ModelSpec
        The specification audited (with the period in use).
    series : PreparedSeries
        The validated input (original scale).
    tolerances : Tolerances
        The tolerances the verdict was reached under.
    estimates : dict of str to Estimate
        Every estimator asked for, by key, whatever its status, plus ``"reference"`` (the
        reference optimum) when the reference fit ran.
    parameters : pandas.DataFrame
        Canonical parameters: rows are canonical names, columns estimator keys, with the
        reference standard errors in ``reference_se``.
    likelihoods : pandas.DataFrame
        Per estimator: native and reference log-likelihood, gap to the best, n, k and the
        criteria as reported and on the canonical definition.
    findings : list of Finding
        Most severe first.
    forecasts : dict of str to OriginalScaleForecast
        Forecasts from the full series on the original scale (median and bias-adjusted mean,
        intervals), per estimator and for the reference optimum.
    spread : pandas.DataFrame or None
        Per horizon, the range of point forecasts across independent engines beside the
        reference interval width.
    residual_tests : pandas.DataFrame or None
        Ljung-Box tests of each estimator's residuals.
    holdout : HoldoutResult or None
        Holdout accuracy and pairwise comparisons, when a holdout was asked for.
    profiles : dict of str to pandas.DataFrame
        For each estimator whose estimate disagrees with the reference optimum, the
        reference log-likelihood along the straight line from the optimum (t = 0) to that
        estimate (t = 1): one peak, a ridge, or two optima.
    likelihood_grid : dict or None
        For models with two coefficients, the reference log-likelihood on a grid of both
        around the optimum (``names``, ``x``, ``y``, ``loglike``, ``profiled_loglike``).
    order_search : forecastaudit.search.OrderSearchAudit or None
        The order-search audit, when ``order_search=True``.
    created : str
        UTC time the audit finished (ISO 8601).
    signoff : dict or None
        The reviewer's sign-off (see :meth:`sign_off`).
    invocation : dict or None
        How the audit was started, when the command line started it: ``command_line`` (the
        arguments) and ``input_file`` (``name``, ``sha256`` and ``bytes`` of the data file).
    future_regressors : numpy.ndarray or None
        The regressor values the forecasts assume, ``(horizon, k)`` in ``spec.regressors``
        order; None without regressors. Kept in the record with their SHA-256.
        Written into the record's provenance.
    """

    spec: ModelSpec
    series: PreparedSeries
    tolerances: Tolerances
    estimates: dict[str, Estimate]
    parameters: pd.DataFrame
    likelihoods: pd.DataFrame
    findings: list[Finding]
    standard_errors: dict[str, float] = field(default_factory=dict)
    reference_starts: list[dict[str, Any]] = field(default_factory=list)
    forecasts: dict[str, OriginalScaleForecast] = field(default_factory=dict)
    forecasts_transformed: dict[str, Forecast] = field(default_factory=dict)
    spread: pd.DataFrame | None = None
    residual_tests: pd.DataFrame | None = None
    holdout: HoldoutResult | None = None
    profiles: dict[str, pd.DataFrame] = field(default_factory=dict)
    likelihood_grid: dict[str, Any] | None = None
    order_search: Any = None
    options: dict[str, Any] = field(default_factory=dict)
    materiality: dict[str, dict[str, Any]] = field(default_factory=dict)
    created: str = ""
    signoff: dict[str, str] | None = None
    invocation: dict[str, Any] | None = None
    future_regressors: np.ndarray | None = None

    # ------------------------------------------------------------------ verdict
    @property
    def passed(self) -> bool:
        """True for the outcomes ``pass`` and ``pass-with-notes``: no finding fails."""
        return not any(f.severity == "fail" for f in self.findings)

    @property
    def verdict(self) -> str:
        """``"pass"``, ``"pass-with-notes"`` or ``"fail"``.

        ``fail``: a finding fails under the stated policy (see :attr:`policy`).
        ``pass-with-notes``: nothing fails, and some findings ask a reviewer to look
        (severity ``warn``): another engine's shortfall, a model finding, a difference
        within the materiality thresholds. ``pass``: nothing beyond information.
        """
        if not self.passed:
            return "fail"
        return "pass-with-notes" if any(f.severity == "warn" for f in self.findings) else "pass"

    @property
    def production(self) -> str | None:
        """The production estimator the verdict is about (None: every estimator)."""
        return self.options.get("production")

    @property
    def policy(self) -> dict[str, Any]:
        """The stated policy: the production estimator and what makes the audit fail."""
        tol = self.tolerances
        production = self.production or "every estimator"
        return {
            "production": self.production,
            "fails_when": [
                f"the production estimate ({production}) is beyond tolerance of the reference "
                "optimum and the difference is material",
                f"fewer than {tol.min_independent_engines} independent engines (the reference "
                "counts as one) corroborate the production estimate",
                "the production estimator produced no estimate, or fitted a different model",
                *(
                    ["another engine's disagreement is beyond tolerance and material"]
                    if tol.fail_on_other_engines
                    else []
                ),
                *(["a finding about the model itself"] if tol.fail_on_model_findings else []),
            ],
            "materiality": {
                "forecast_se": tol.material_forecast_se,
                "forecast_percent": tol.material_forecast_percent,
                "width_rtol": tol.material_width_rtol,
                "accuracy_rtol": tol.material_accuracy_rtol,
            },
        }

    @property
    def independent_engines(self) -> list[str]:
        """Independent engines (the reference counts as one) corroborating the production
        estimate."""
        for f in self.findings:
            if f.kind == "engine-count":
                return list(f.values.get("agreeing", []))
        return []

    def findings_of(self, *, severity: str | None = None, kind: str | None = None) -> list[Finding]:
        """Findings filtered by severity and/or kind (keywords)."""
        return select_findings(self.findings, severity=severity, kind=kind)

    # ------------------------------------------------------------------ sign-off
    def sign_off(
        self,
        *,
        reviewer: str,
        decision: str,
        policy_reference: str,
        comments: str = "",
        date: str | None = None,
    ) -> None:
        """Record a reviewer's decision; it goes into the record and the reports.

        The fields are those of :func:`forecastaudit.add_signoff`. A record written
        afterwards carries the block; a signature made on that record covers it.

        Raises
        ------
        RecordError
            When a field is empty or invalid, or the audit has a sign-off already.
        """
        from forecastaudit.errors import RecordError
        from forecastaudit.record.signing import check_decision, signoff_block

        if self.signoff is not None:
            raise RecordError(
                "This audit has a sign-off already; an audit is signed off once. Re-run the "
                "audit for a new review."
            )
        block = signoff_block(
            reviewer=reviewer,
            decision=decision,
            policy_reference=policy_reference,
            comments=comments,
            date=date,
        )
        check_decision(block, self.verdict)
        self.signoff = block

    # ------------------------------------------------------------------ output
    def to_dict(self, *, created: str | None = None, timings: bool = True) -> dict[str, Any]:
        """The audit record as a plain dictionary (see ``record.build_record``)."""
        from forecastaudit.record.document import build_record

        return build_record(self, created=created, timings=timings)

    def to_json(
        self, path: str | None = None, *, created: str | None = None, timings: bool = True
    ) -> str:
        """The audit record as JSON text; also written (atomically) to ``path`` if given.

        ``created`` fixes the creation time and ``timings=False`` leaves out wall-clock
        times, so that identical inputs give identical bytes.
        """
        from forecastaudit.files import write_text_atomic
        from forecastaudit.record.document import dumps

        text = dumps(self.to_dict(created=created, timings=timings))
        if path is not None:
            write_text_atomic(path, text)
        return text

    def to_html(self, path: str | None = None) -> str:
        """The full HTML report (one self-contained file); also written to ``path`` if given."""
        from forecastaudit.files import write_text_atomic
        from forecastaudit.report.html import render_html

        text = render_html(self)
        if path is not None:
            write_text_atomic(path, text)
        return text

    def to_markdown(self, path: str | None = None) -> str:
        """The Markdown report, for pasting into a change request; written to ``path`` if given."""
        from forecastaudit.files import write_text_atomic
        from forecastaudit.report.markdown import render_markdown

        text = render_markdown(self)
        if path is not None:
            write_text_atomic(path, text)
        return text

    def __repr__(self) -> str:
        # Short outside Jupyter (which shows _repr_html_): the full dump ran to 68 KB.
        counts = {s: len(self.findings_of(severity=s)) for s in ("fail", "warn", "info")}
        keys = [k for k in self.estimates if k != "reference"]
        return (
            f"<AuditResult {self.spec} on {self.series.name!r} (n={len(self.series)}): "
            f"{self.verdict}; {counts['fail']} fail, {counts['warn']} warn, {counts['info']} "
            f"info; estimators {', '.join(keys) or 'none'}>"
        )

    def _repr_html_(self) -> str:
        from forecastaudit.report.html import render_compact_html

        return render_compact_html(self)

    def __str__(self) -> str:
        lines = [
            f"forecastaudit: {self.spec} on '{self.series.name}' "
            f"({len(self.series)} observations) -> {self.verdict.upper()}",
            "",
        ]
        with pd.option_context("display.width", 120, "display.max_columns", 20):
            lines += ["Parameters (canonical convention):", self.parameters.to_string(), ""]
            cols = ["status", "loglike_native", "loglike_reference", "gap_to_best", "aicc"]
            lines += ["Log-likelihoods:", self.likelihoods[cols].to_string(), ""]
        counts = {s: len(self.findings_of(severity=s)) for s in ("fail", "warn", "info")}
        lines.append(
            f"Findings: {counts['fail']} fail, {counts['warn']} warn, {counts['info']} info"
        )
        lines += [f"  {f}" for f in self.findings if f.severity != "info"]
        lines += ["", CAUTION]
        return "\n".join(lines)


#: The old name of :class:`AuditResult`, kept so existing code goes on working.
AuditReport = AuditResult
