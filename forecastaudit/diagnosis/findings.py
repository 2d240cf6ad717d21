"""Findings: one per disagreement, event or caveat, written for a reviewer.

Each finding has a kind from :data:`KINDS` (names of our own, each with a one-line
explanation for the report), a severity, the estimator it concerns (or None for the audit as
a whole), the quantity it is about, a plain-language message and the numbers behind it.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any, Literal

from forecastaudit.jsonutil import to_plain as _finite_or_none

__all__ = ["KINDS", "SEVERITIES", "Finding"]

Severity = Literal["info", "warn", "fail"]
SEVERITIES: tuple[Severity, ...] = ("info", "warn", "fail")

KINDS: dict[str, str] = {
    "unavailable": "The estimator's package is not installed, so it took no part.",
    "input-precision": (
        "Some observations could not be held exactly as 64-bit floating-point numbers "
        "(integers beyond 2**53); every estimator, and the audit, used the rounded values."
    ),
    "unsupported": "The estimator cannot fit this specification; nothing was fitted.",
    "fit-failed": "The estimator raised an error or returned nothing usable.",
    "not-converged": "The estimator's own optimiser did not report convergence.",
    "library-warnings": "The estimator raised warnings during the fit (kept, not shown).",
    "default-overridden": (
        "The specification overrode a library default that would have changed the model."
    ),
    "convention-difference": (
        "The native values differ from the canonical ones only by convention (sign, "
        "intercept versus mean, drift); they agree after conversion."
    ),
    "definition-difference": (
        "A reported quantity (log-likelihood, criteria, sigma2) differs only because the "
        "estimator defines it differently; under the reference definitions it agrees."
    ),
    "stopped-short": (
        "The estimator's optimiser stopped before the optimum of its own objective: its own "
        "likelihood is higher at the reference optimum than at its estimate."
    ),
    "objective-differs": (
        "The estimator maximises another objective than the exact likelihood of the "
        "differenced series (a prior or initialisation, conditioning, burn-in, scale): "
        "under its own likelihood its estimate is the better point."
    ),
    "short-of-optimum": (
        "The estimate is below the reference optimum; whether its optimiser stopped short "
        "or its objective differs cannot be told, because the estimator cannot evaluate its "
        "own likelihood at given parameters."
    ),
    "flat-likelihood": (
        "The estimate lies well away from the optimum in standard errors, yet its "
        "likelihood is almost as high: the likelihood is flatter than its curvature at the "
        "optimum says (a ridge); the data do not pin down this direction."
    ),
    "parameter-disagreement": (
        "Parameters differ from the reference optimum beyond tolerance and no other finding "
        "explains it."
    ),
    "near-boundary": (
        "A root of an AR or MA polynomial lies on or near the unit circle (the edge of the "
        "stationary or invertible region)."
    ),
    "possible-overdifferencing": (
        "An MA root near 1 after differencing suggests the series was differenced once too "
        "often (common practice, no source)."
    ),
    "implied-trend": (
        "A non-zero mean with two or more differences implies a polynomial trend in levels."
    ),
    "different-model": "The estimator fitted terms the specification did not ask for.",
    "forecast-difference": (
        "Point forecasts differ from those at the reference optimum beyond tolerance, in "
        "units of the forecast standard error."
    ),
    "interval-difference": (
        "Prediction intervals are wider or narrower than those at the reference optimum "
        "beyond tolerance (often a different sigma2 definition)."
    ),
    "holdout-failure": "The estimator could not be fitted or forecast at a holdout origin.",
    "reference-fit": "A caveat about the reference fit itself (convergence, standard errors).",
    "engine-count": (
        "How many independent engines (the reference counts as one) corroborate the "
        "production estimate, and why each other engine does or does not count."
    ),
    "production-estimate": (
        "Whether the estimate of the production estimator (the one the team ships) is at "
        "the reference optimum, and whether any shortfall matters for its forecasts."
    ),
    "search-failed": "An automatic order search could not run or returned no model.",
    "search-disagreement": (
        "Automatic order searches selected different models; the causes are found by "
        "re-running one search with one setting harmonised at a time."
    ),
    "differencing-decision": (
        "The stacks' unit-root or seasonal tests chose different numbers of differences on "
        "the same data."
    ),
    "search-rank": (
        "Where a search's choice ranks by reference AICc among the candidates with its "
        "differencing (within 2 units = substantial support, Burnham & Anderson 2002)."
    ),
    "default-adds-constant": (
        "Called with its defaults for this order, the library would add a constant, which "
        "changes the model (with d + D >= 2, a polynomial trend in levels)."
    ),
    "rule-of-thumb": "An advisory on the selected model (common practice, no source).",
    "residual-autocorrelation": (
        "A fit's residuals fail the Ljung-Box test of no autocorrelation (Ljung & Box 1978) "
        "at the stated level: the model leaves structure in the data that it does not use."
    ),
    "interval-below-zero": (
        "On a series whose every value is positive, a prediction interval reaches below "
        "zero: the model puts probability on impossible values (a log or Box-Cox transform "
        "cannot)."
    ),
    "outside-support-band": (
        "The specified model is more than 2 AICc units above the best candidate with the "
        "same differencing in the exhaustive reference search (Burnham & Anderson 2002): "
        "other orders have substantially more support."
    ),
    "ranking-flip": (
        "The ranking of candidate models differs between implementations: the choice of "
        "model depends on which one is used."
    ),
    "ranking-stable": "Every implementation ranks the candidate models the same way.",
    "candidate-off-optimum": (
        "An implementation's estimate of a candidate model is below that model's reference "
        "optimum: its scores in the comparison are of that fit, not of the model."
    ),
    "declared-conventions": (
        "Whether the conventions declared for an imported estimate (MA sign, constant, "
        "sigma2, log-likelihood scale) make its reported log-likelihood equal the reference "
        "log-likelihood at its parameters; when they do not, which declarations would."
    ),
}


@dataclass(frozen=True)
class Finding:
    """One finding of an audit.

    Attributes
    ----------
    kind : str
        One of :data:`KINDS`.
    severity : {"info", "warn", "fail"}
        ``fail`` findings make the audit fail; ``warn`` asks the reviewer to look;
        ``info`` is recorded for completeness.
    estimator : str or None
        The estimator key the finding is about, or None for the audit as a whole.
    quantity : str or None
        The quantity concerned (a canonical parameter name, ``loglike``, ``aicc`` ...).
    message : str
        A plain-language explanation for a reviewer who has never opened the code.
    values : dict
        The numbers behind the finding.
    """

    kind: str
    severity: Severity
    estimator: str | None
    quantity: str | None
    message: str
    values: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ValueError(f"unknown finding kind {self.kind!r}")
        if self.severity not in SEVERITIES:
            raise ValueError(f"unknown severity {self.severity!r}")

    @property
    def estimators(self) -> list[str]:
        """Every estimator the finding is about: the wrappers of one engine that share it
        (``values["members"]``), or the one estimator, or none."""
        members = self.values.get("members")
        if members:
            return list(members)
        return [self.estimator] if self.estimator else []

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (non-finite numbers become None)."""
        return {
            "kind": self.kind,
            "severity": self.severity,
            "estimator": self.estimator,
            "quantity": self.quantity,
            "message": self.message,
            "values": {k: _finite_or_none(v) for k, v in self.values.items()},
        }

    def __str__(self) -> str:
        who = f" [{self.estimator}]" if self.estimator else ""
        return f"{self.severity.upper():4} {self.kind}{who}: {self.message}"


def select_findings(
    findings: Iterable[Finding], *, severity: str | None = None, kind: str | None = None
) -> list[Finding]:
    """The findings of one severity and/or kind, in their order (the one filter used by
    every result type)."""
    return [
        f
        for f in findings
        if (severity is None or f.severity == severity) and (kind is None or f.kind == kind)
    ]
