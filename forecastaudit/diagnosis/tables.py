"""Aligned tables: canonical parameters and log-likelihoods, one column or row per estimate."""

from __future__ import annotations

import math
from collections.abc import Mapping

import pandas as pd

from forecastaudit.conventions import parameter_names
from forecastaudit.diagnosis.rescore import Rescore, canonical_criteria
from forecastaudit.estimate import Estimate
from forecastaudit.spec import ModelSpec


# ---------------------------------------------------------------------- tables
def parameter_table(
    spec: ModelSpec,
    estimates: Mapping[str, Estimate],
    standard_errors: Mapping[str, float] | None = None,
) -> pd.DataFrame:
    """Canonical parameters: rows are canonical names, columns are estimator keys.

    Estimates without parameters (failed, unavailable, unsupported) appear as all-NaN
    columns, so nothing silently disappears. A ``reference_se`` column is added when standard
    errors are given.
    """
    names = parameter_names(spec)
    table = pd.DataFrame(
        {key: [e.params.get(n, math.nan) for n in names] for key, e in estimates.items()},
        index=pd.Index(names, name="parameter"),
    )
    if standard_errors is not None:
        table["reference_se"] = [standard_errors.get(n, math.nan) for n in names]
    return table


def likelihood_table(
    estimates: Mapping[str, Estimate], rescores: Mapping[str, Rescore]
) -> pd.DataFrame:
    """Log-likelihoods, n, k and criteria per estimator: as reported and canonical.

    Columns ``*_native`` are the estimator's own numbers under its own definitions; the
    others are on the canonical definition (reference likelihood, k = coefficients + 1,
    n = n_w).
    """
    rows = {}
    for key, e in estimates.items():
        r = rescores.get(key)
        canonical = canonical_criteria(e, r)
        rows[key] = {
            "status": e.status,
            "loglike_native": e.loglike_native,
            "loglike_reference": r.loglike if r else math.nan,
            "profiled_reference": r.profiled_loglike if r else math.nan,
            "gap_to_best": r.gap if r else math.nan,
            "n_native": e.n_used_native,
            "k_native": e.k_counted_native,
            "n": e.n_w,
            "k": e.k,
            "aic_native": e.criteria_native.get("aic", math.nan),
            "aicc_native": e.criteria_native.get("aicc", math.nan),
            "bic_native": e.criteria_native.get("bic", math.nan),
            "aic": canonical.get("aic", math.nan),
            "aicc": canonical.get("aicc", math.nan),
            "bic": canonical.get("bic", math.nan),
            "sigma2_reported": e.sigma2_reported,
            "sigma2_ml": e.sigma2,
            "converged": e.converged,
            "seconds": e.seconds,
        }
    table = pd.DataFrame.from_dict(rows, orient="index")
    table.index.name = "estimator"
    return table
