"""Every estimate re-scored under the reference likelihood, and its canonical criteria."""

from __future__ import annotations

from dataclasses import dataclass

from forecastaudit.conventions import information_criteria
from forecastaudit.estimate import Estimate


@dataclass(frozen=True)
class Rescore:
    """An estimate re-scored under the reference likelihood.

    Attributes
    ----------
    loglike : float
        Reference log-likelihood at the estimate's coefficients and its own sigma2.
    profiled_loglike : float
        Reference log-likelihood at its coefficients with sigma2 profiled out: the best any
        sigma2 can do with those coefficients.
    gap : float
        Best profiled reference value found (over all estimates and the reference fit)
        minus this estimate's profiled value; positive means the estimate is short of it.
    """

    loglike: float
    profiled_loglike: float
    gap: float


def canonical_criteria(e: Estimate, rescore: Rescore | None) -> dict[str, float]:
    """AIC, AICc and BIC of an estimate on the canonical definition: the reference
    log-likelihood at its parameters, k = coefficients + 1, n = n_w (empty without them)."""
    if rescore is None or not e.n_w:
        return {}
    return information_criteria(rescore.loglike, e.k or 0, e.n_w)
