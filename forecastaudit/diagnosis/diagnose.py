"""Aligned tables, gaps to the best optimum, and a diagnosis of every disagreement.

Everything here works on canonical values only: it never branches on an estimator's name,
only on what the estimates declare (engine, status, definitions, conversions).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from forecastaudit.conventions import coefficient_names
from forecastaudit.diagnosis.findings import Finding
from forecastaudit.diagnosis.rescore import Rescore, canonical_criteria
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import REFERENCE_KEY, Estimate
from forecastaudit.layout import layout_of
from forecastaudit.spec import ModelSpec


def _boundary_findings(
    spec: ModelSpec, key: str, params: Mapping[str, float], tol: Tolerances, *, outside_only: bool
) -> list[Finding]:
    findings = []
    layout = layout_of(spec)
    all_roots = layout.roots(params)
    smallest_moduli = layout.min_root_modulus(params)
    for factor in layout.factors:
        roots = all_roots[factor.key]
        if roots.size == 0:
            continue
        smallest = smallest_moduli[factor.key]
        word, region = factor.description, factor.region
        if smallest < 1.0 or (not outside_only and smallest < 1.0 + tol.root_margin):
            where = "outside" if smallest < 1.0 else "at the edge of"
            findings.append(
                Finding(
                    kind="near-boundary",
                    severity="warn",
                    estimator=key,
                    quantity=factor.key,
                    message=(
                        f"The {word} polynomial of {key} has a root of modulus {smallest:.4f}, "
                        f"{where} the {region} region (modulus 1). Estimates and standard "
                        "errors near this edge are unreliable, and implementations that keep "
                        "parameters inside the region differ here."
                    ),
                    values={"min_root_modulus": smallest, "margin": tol.root_margin},
                )
            )
        # An MA root near 1 cancels a difference of the same kind (regular or seasonal).
        differenced = 0 if factor.kind != "ma" else spec.D if factor.seasonal else spec.d
        near_one = roots[(np.abs(roots - 1.0) < 2 * tol.root_margin + 0.03)]
        # Over-differencing is a property of the model and the data: said once, of the
        # reference optimum, not again for every estimate near it.
        if differenced and near_one.size and not outside_only:
            findings.append(
                Finding(
                    kind="possible-overdifferencing",
                    severity="warn",
                    estimator=key,
                    quantity=factor.key,
                    message=(
                        f"The {word} polynomial of {key} has a root at {near_one[0].real:.4f}, "
                        f"near 1, after {'seasonal' if factor.seasonal else 'regular'} "
                        "differencing: the MA term nearly cancels a difference, which suggests "
                        "the series was differenced once too often (common practice, no "
                        "source)."
                    ),
                    values={"root": float(near_one[0].real)},
                )
            )
    return findings


# ---------------------------------------------------------------------- diagnosis
def _status_findings(e: Estimate) -> list[Finding]:
    if e.status == "unavailable":
        return [Finding("unavailable", "info", e.key, None, e.reason)]
    if e.status == "unsupported":
        return [Finding("unsupported", "info", e.key, None, e.reason)]
    if e.status == "timed-out":
        return [
            Finding(
                "fit-failed",
                "warn",
                e.key,
                None,
                f"{e.key} gave no result within the time limit and was stopped: {e.reason}",
                {"status": e.status},
            )
        ]
    if e.status == "failed":
        return [
            Finding(
                "fit-failed",
                "warn",
                e.key,
                None,
                f"{e.key} could not fit the model: {e.reason}",
                {"output": e.output[-2000:]},
            )
        ]
    return []


def _event_findings(e: Estimate) -> list[Finding]:
    findings = []
    if e.converged is False:
        detail = ", ".join(f"{k} {v}" for k, v in e.optimizer.items() if v is not None)
        findings.append(
            Finding(
                "not-converged",
                "warn",
                e.key,
                None,
                f"The optimiser of {e.key} did not report convergence ({detail}). Its "
                "estimate is kept and judged under the reference likelihood below.",
                dict(e.optimizer),
            )
        )
    if e.warnings:
        shown = "; ".join(f"{w.category}: {w.message[:160]}" for w in e.warnings[:3])
        more = f" (and {len(e.warnings) - 3} more)" if len(e.warnings) > 3 else ""
        findings.append(
            Finding(
                "library-warnings",
                "info",
                e.key,
                None,
                f"{e.key} raised {len(e.warnings)} warning(s) during the fit: {shown}{more}",
                {"count": len(e.warnings)},
            )
        )
    for option, default in e.overridden_defaults.items():
        resolved = e.option(option, "see record")
        findings.append(
            Finding(
                "default-overridden",
                "info",
                e.key,
                option,
                f"{e.key}'s default {option}={default!r} would have changed the model; the "
                f"specification set it instead (resolved value: {resolved!r}).",
                {"default": default},
            )
        )
    if e.fitted_model:
        findings.append(
            Finding(
                "different-model",
                "fail",
                e.key,
                None,
                f"{e.key} fitted a different model than specified: {e.fitted_model}.",
            )
        )
    if e.conversions:
        findings.append(
            Finding(
                "convention-difference",
                "info",
                e.key,
                None,
                f"{e.key}'s native values were converted to the canonical convention: "
                + "; ".join(e.conversions),
            )
        )
    return findings


def _beyond_rounding(a: float, b: float) -> bool:
    # Definition differences are explained whenever they show beyond rounding: they are
    # information for the reviewer, not part of the verdict, so no tolerance applies.
    return math.isfinite(a) and math.isfinite(b) and abs(a - b) > 1e-6 * max(1.0, abs(b))


def _definition_findings(e: Estimate, rescore: Rescore) -> list[Finding]:
    findings = []
    diff = e.loglike_native - rescore.loglike
    if _beyond_rounding(e.loglike_native, rescore.loglike):
        findings.append(
            Finding(
                "definition-difference",
                "info",
                e.key,
                "loglike",
                f"{e.key} reports log-likelihood {e.loglike_native:.4f}; the reference "
                f"definition gives {rescore.loglike:.4f} at the same parameters "
                f"(difference {diff:+.4f}). Its definition: {e.loglike_definition}.",
                {"native": e.loglike_native, "reference": rescore.loglike, "difference": diff},
            )
        )
    canonical = canonical_criteria(e, rescore)
    differing = {
        name: (e.criteria_native[name], canonical[name])
        for name in ("aic", "aicc", "bic")
        if name in e.criteria_native and _beyond_rounding(e.criteria_native[name], canonical[name])
    }
    if differing:
        listed = "; ".join(f"{n} {a:.4f} vs {b:.4f}" for n, (a, b) in differing.items())
        findings.append(
            Finding(
                "definition-difference",
                "info",
                e.key,
                "criteria",
                f"{e.key}'s own information criteria differ from the canonical ones (k = "
                f"{e.k} with sigma2, n = {e.n_w} after differencing): {listed}. It counts "
                f"n = {e.n_used_native}, k = {e.k_counted_native}."
                + (f" {' '.join(e.notes)}" if e.notes else ""),
                {n: {"native": a, "canonical": b} for n, (a, b) in differing.items()},
            )
        )
    if e.sigma2_kind != "maximum-likelihood" and e.sigma2_reported != e.sigma2:
        findings.append(
            Finding(
                "definition-difference",
                "info",
                e.key,
                "sigma2",
                f"{e.key} reports sigma2 = {e.sigma2_reported:.6g}, defined as "
                f"{e.sigma2_definition}; the maximum-likelihood value is {e.sigma2:.6g} "
                f"({100 * (e.sigma2_reported / e.sigma2 - 1):+.2f}%). Its intervals use the "
                "reported value.",
                {"reported": e.sigma2_reported, "ml": e.sigma2},
            )
        )
    return findings


def _parameter_differences(
    spec: ModelSpec,
    e: Estimate,
    best: Mapping[str, float],
    standard_errors: Mapping[str, float],
    tol: Tolerances,
) -> dict[str, dict[str, float]]:
    out = {}
    for name in coefficient_names(spec):
        diff = e.params[name] - best[name]
        se = standard_errors.get(name, math.nan)
        allowed = tol.parameter_tolerance(se)
        if abs(diff) > allowed:
            out[name] = {
                "estimate": e.params[name],
                "reference": best[name],
                "difference": diff,
                "tolerance": allowed,
                "in_standard_errors": diff / se if se and math.isfinite(se) else math.nan,
            }
    s_diff = e.params["sigma2"] - best["sigma2"]
    if abs(s_diff) > tol.sigma2_rtol * abs(best["sigma2"]):
        out["sigma2"] = {
            "estimate": e.params["sigma2"],
            "reference": best["sigma2"],
            "difference": s_diff,
            "tolerance": tol.sigma2_rtol * abs(best["sigma2"]),
            "in_standard_errors": math.nan,
        }
    return out


def _describe_differences(differences: Mapping[str, Mapping[str, float]]) -> str:
    parts = []
    for name, d in differences.items():
        se = d["in_standard_errors"]
        in_se = f", {abs(se):.2f} reference standard errors" if math.isfinite(se) else ""
        parts.append(
            f"{name} {d['estimate']:.5g} against {d['reference']:.5g} "
            f"(difference {d['difference']:+.3g}{in_se})"
        )
    return "; ".join(parts)


def diagnose(
    spec: ModelSpec,
    estimates: Mapping[str, Estimate],
    rescores: Mapping[str, Rescore],
    reference: Estimate | None,
    standard_errors: Mapping[str, float],
    tol: Tolerances,
) -> list[Finding]:
    """One finding per disagreement, event or caveat, most severe first.

    Parameters
    ----------
    spec : ModelSpec
    estimates : mapping
        Estimator key -> Estimate (the reference excluded).
    rescores : mapping
        Estimator key -> Rescore under the reference likelihood (ok estimates only).
    reference : Estimate or None
        The reference optimum, when the reference fit ran.
    standard_errors : mapping
        Reference standard errors by canonical name.
    tol : Tolerances
    """
    findings: list[Finding] = []
    agreeing_engines: set[str] = set()
    for key, e in estimates.items():
        findings += _status_findings(e)
        if not e.ok:
            continue
        findings += _event_findings(e)
        rescore = rescores.get(key)
        if rescore is None:
            continue
        findings += _definition_findings(e, rescore)
        findings += _boundary_findings(spec, key, e.params, tol, outside_only=True)
        if reference is None:
            continue
        differences = _parameter_differences(spec, e, reference.params, standard_errors, tol)
        described = _describe_differences(differences)
        if rescore.gap > tol.loglike_atol:
            optimiser = ", ".join(f"{k} {v}" for k, v in e.optimizer.items() if v is not None)
            findings.append(
                Finding(
                    "stopped-short",
                    "fail",
                    key,
                    "loglike",
                    f"{key}'s estimate is {rescore.gap:.4f} log-likelihood units below the "
                    f"reference optimum (tolerance {tol.loglike_atol:g}): its optimiser stopped "
                    f"before the optimum ({optimiser or 'no optimiser report'})."
                    + (f" Parameters: {described}." if described else ""),
                    {"gap": rescore.gap, "differences": differences},
                )
            )
        elif differences:
            findings.append(
                Finding(
                    "flat-likelihood",
                    "warn",
                    key,
                    ",".join(differences),
                    f"{key}'s parameters differ from the reference optimum beyond tolerance "
                    f"({described}) while its reference log-likelihood is within "
                    f"{tol.loglike_atol:g} of the best: the likelihood is flat in this "
                    "direction, so the data do not decide between these values.",
                    {"gap": rescore.gap, "differences": differences},
                )
            )
        elif not e.fitted_model:  # a different model is not agreement, whatever its values
            agreeing_engines.add(e.engine)
    if reference is not None:
        findings += _reference_findings(spec, reference, rescores, standard_errors, tol)
        findings.append(_engine_count(estimates, agreeing_engines, tol))
    if spec.mean and spec.n_differences >= 2:
        findings.append(
            Finding(
                "implied-trend",
                "warn",
                None,
                "mu",
                f"The model has a mean with d + D = {spec.n_differences} differences: a "
                f"non-zero mu is a polynomial trend of degree {spec.n_differences} in levels, "
                "which forecasts grow without bound. Make sure this is intended.",
            )
        )
    order = {"fail": 0, "warn": 1, "info": 2}
    return sorted(findings, key=lambda f: order[f.severity])


def _reference_findings(
    spec: ModelSpec,
    reference: Estimate,
    rescores: Mapping[str, Rescore],
    standard_errors: Mapping[str, float],
    tol: Tolerances,
) -> list[Finding]:
    findings = _boundary_findings(spec, REFERENCE_KEY, reference.params, tol, outside_only=False)
    missing_se = [
        n for n in coefficient_names(spec) if not math.isfinite(standard_errors.get(n, math.nan))
    ]
    if missing_se:
        findings.append(
            Finding(
                "reference-fit",
                "warn",
                REFERENCE_KEY,
                ",".join(missing_se),
                "The reference standard errors of "
                + ", ".join(missing_se)
                + " could not be computed (the numerical Hessian is not positive definite "
                "there); coefficient tolerances fall back to the absolute floor "
                f"{tol.parameter_atol:g}.",
            )
        )
    if reference.converged is False:
        findings.append(
            Finding(
                "reference-fit",
                "warn",
                REFERENCE_KEY,
                None,
                "The reference fit did not report convergence: "
                f"{reference.reason or reference.optimizer}.",
            )
        )
    better = {k: r for k, r in rescores.items() if r.gap < -tol.loglike_atol}
    for key, r in better.items():
        findings.append(
            Finding(
                "reference-fit",
                "warn",
                key,
                "loglike",
                f"{key}'s estimate scores {-r.gap:.4f} above the reference optimum under the "
                "reference likelihood; the reference fit did not find the best point.",
                {"gap": r.gap},
            )
        )
    return findings


def _engine_count(
    estimates: Mapping[str, Estimate], agreeing: set[str], tol: Tolerances
) -> Finding:
    engines_fitted = sorted({e.engine for e in estimates.values() if e.ok})
    wrappers = {
        engine: sorted(k for k, e in estimates.items() if e.ok and e.engine == engine)
        for engine in engines_fitted
    }
    listing = "; ".join(f"{engine}: {', '.join(keys)}" for engine, keys in wrappers.items())
    enough = len(agreeing) >= tol.min_independent_engines
    return Finding(
        "engine-count",
        "info" if enough else "fail",
        None,
        None,
        f"{len(agreeing)} of {len(engines_fitted)} independent engine(s) agree with the "
        f"reference optimum (wrappers of one engine count once; required: "
        f"{tol.min_independent_engines}). Engines and their wrappers: {listing or 'none'}.",
        {
            "agreeing": sorted(agreeing),
            "fitted": engines_fitted,
            "required": tol.min_independent_engines,
        },
    )
