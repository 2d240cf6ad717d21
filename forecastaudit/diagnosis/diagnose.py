"""Aligned tables, gaps to the best optimum, and a diagnosis of every disagreement.

Everything here works on canonical values only: it never branches on an estimator's name,
only on what the estimates declare (engine, status, definitions, conversions).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from forecastaudit.conventions import coefficient_names
from forecastaudit.diagnosis.findings import Finding
from forecastaudit.diagnosis.materiality import Materiality
from forecastaudit.diagnosis.rescore import Rescore, canonical_criteria
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import REFERENCE_ENGINE, REFERENCE_KEY, Estimate
from forecastaudit.layout import layout_of
from forecastaudit.spec import ModelSpec

#: A root within this distance of the unit circle is "at the edge" of its region: a fixed
#: property of the diagnosis (the kind of a finding never depends on tolerances; the
#: tolerance ``root_margin`` sets only its severity).
EDGE = 0.02


def _boundary_findings(
    spec: ModelSpec, key: str, params: Mapping[str, float], tol: Tolerances, *, outside_only: bool
) -> list[Finding]:
    findings = []
    layout = layout_of(spec)
    all_roots = layout.roots(params)
    smallest_moduli = layout.min_root_modulus(params)
    model_severity = "fail" if tol.fail_on_model_findings else "warn"
    for factor in layout.factors:
        roots = all_roots[factor.key]
        if roots.size == 0:
            continue
        smallest = smallest_moduli[factor.key]
        word, region = factor.description, factor.region
        # An MA root near 1 cancels a difference of the same kind (regular or seasonal).
        differenced = 0 if factor.kind != "ma" else spec.D if factor.seasonal else spec.d
        near_one = roots[(np.abs(roots - 1.0) < 2 * EDGE + 0.03)]
        # Over-differencing is a property of the model and the data: said once, of the
        # reference optimum, not again for every estimate near it; it replaces the
        # edge-of-region finding of the same factor (one finding per cause).
        if differenced and near_one.size and not outside_only:
            kind_of = "seasonal" if factor.seasonal else "regular"
            instead = (
                "one seasonal difference fewer (D - 1) with a seasonal AR term, or fixed "
                "seasonal effects as regressors"
                if factor.seasonal
                else "one regular difference fewer (d - 1), with a mean if the series has a "
                "level, or a trend regressor"
            )
            findings.append(
                Finding(
                    kind="possible-overdifferencing",
                    severity=model_severity,
                    estimator=key,
                    quantity=factor.key,
                    message=(
                        f"At the exact-likelihood optimum the {word} polynomial has a root at "
                        f"{near_one[0].real:.4f} (modulus {smallest:.4f}), on the edge of the "
                        f"{region} region, after {kind_of} differencing: the MA term cancels "
                        "the difference, a sign that the specified model differences the "
                        "series once too often (common practice, no source). This is a "
                        "finding about the model, not about any implementation; estimates "
                        "and standard errors at the edge are unreliable and implementations "
                        f"that keep parameters inside the region differ here. Try {instead}, "
                        "and compare the candidates on a holdout (information criteria do "
                        "not compare models with different differencing)."
                    ),
                    values={"root": float(near_one[0].real), "min_root_modulus": smallest},
                )
            )
            continue
        if smallest < 1.0 or (not outside_only and smallest < 1.0 + EDGE):
            where = "outside" if smallest < 1.0 else "at the edge of"
            severity = "warn" if smallest < 1.0 + tol.root_margin else "info"
            findings.append(
                Finding(
                    kind="near-boundary",
                    severity=severity,
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
    return findings


# ---------------------------------------------------------------------- diagnosis
def _status_findings(e: Estimate) -> list[Finding]:
    if e.status in ("unavailable", "unsupported"):
        return [Finding(e.status, "info", e.key, None, e.reason)]
    if e.status == "timed-out":
        message = f"{e.key} gave no result within the time limit and was stopped: {e.reason}"
        return [Finding("fit-failed", "warn", e.key, None, message, {"status": e.status})]
    if e.status == "failed":
        message = f"{e.key} could not fit the model: {e.reason}"
        return [Finding("fit-failed", "warn", e.key, None, message, {"output": e.output[-2000:]})]
    return []


def _optimizer_text(optimizer: Mapping[str, Any]) -> str:
    """What an optimiser reported, in words: ``method lbfgs, iterations 45, ...``; a real
    number to 6 significant digits (a message is read, the record keeps every digit)."""
    return ", ".join(
        f"{k} {v:.6g}" if isinstance(v, float) else f"{k} {v}"
        for k, v in optimizer.items()
        if v is not None
    )


def _event_findings(e: Estimate) -> list[Finding]:
    findings = []
    if e.converged is False:
        detail = _optimizer_text(e.optimizer)
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
                f"n = {e.n_used_native}, k = {e.k_counted_native}"
                + (f", except as its notes say: {' '.join(e.notes)}" if e.notes else "."),
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


def _breaches(gap: float, moved: Mapping[str, Mapping[str, float]], tol: Tolerances) -> str:
    """Which stated tolerances an estimate is beyond, by name, with value and limit."""
    parts = []
    if gap > tol.loglike_atol:
        parts.append(f"log-likelihood gap {gap:.4g} > loglike_atol {tol.loglike_atol:g}")
    for name, d in moved.items():
        if name == "sigma2":
            parts.append(
                f"sigma2 {abs(d['difference']) / abs(d['reference']):.2%} apart > sigma2_rtol "
                f"{tol.sigma2_rtol:.2%}"
            )
        elif math.isfinite(d["in_standard_errors"]):
            parts.append(
                f"{name} {abs(d['in_standard_errors']):.2f} reference SEs from the optimum > "
                f"parameter_se_fraction {tol.parameter_se_fraction:g} (or parameter_atol "
                f"{tol.parameter_atol:g})"
            )
        else:
            parts.append(
                f"{name} {abs(d['difference']):.3g} from the optimum > parameter_atol "
                f"{tol.parameter_atol:g}"
            )
    return "; ".join(parts) or "none"


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


#: The kinds that name why an estimate disagrees with the reference optimum.
CAUSE_KINDS = frozenset(
    {"stopped-short", "objective-differs", "short-of-optimum", "flat-likelihood"}
)

#: Below this distance from the optimum, in reference standard errors, a coefficient's
#: difference says nothing about the curvature (a fixed property of the diagnosis).
FLAT_MIN_DISTANCE = 0.1

#: Numerical resolution of a log-likelihood evaluation, in log-likelihood units: gaps below
#: it are rounding, not disagreement. A property of the arithmetic, not a tolerance.
RESOLUTION = 1e-6


@dataclass(frozen=True)
class OwnObjective:
    """An estimator's own log-likelihood at its estimate and at the reference optimum."""

    at_estimate: float
    at_reference: float

    @property
    def known(self) -> bool:
        return math.isfinite(self.at_estimate) and math.isfinite(self.at_reference)


def _resolution(*values: float) -> float:
    return RESOLUTION * max([1.0, *(abs(v) for v in values if math.isfinite(v))])


def _in_standard_errors(
    spec: ModelSpec, e: Estimate, best: Mapping[str, float], standard_errors: Mapping[str, float]
) -> dict[str, float]:
    out = {}
    for name in coefficient_names(spec):
        se = standard_errors.get(name, math.nan)
        if se and math.isfinite(se):
            out[name] = (e.params[name] - best[name]) / se
    return out


def classify(
    spec: ModelSpec,
    e: Estimate,
    rescore: Rescore,
    reference: Estimate,
    standard_errors: Mapping[str, float],
    own: OwnObjective | None,
) -> str | None:
    """The cause of an estimate's disagreement with the reference optimum, or None.

    Decided from the likelihoods and their curvature only, never from a tolerance:

    * flat likelihood: the estimate is at least a tenth of a reference standard error away
      in some coefficient, yet its gap is under a quarter of what the curvature at the
      optimum predicts (half the sum of squared distances in standard errors) *and* inside
      the 95% likelihood-ratio region of the optimum (a gap under half the 0.95 quantile of
      chi-squared with one degree of freedom per coefficient), where the data do not tell
      the two apart. Far from the optimum the quadratic prediction is no guide, and a gap of
      many units is never "flat": it is decided by the own likelihood below;
    * otherwise, a gap above the numerical resolution is ``stopped-short`` when the
      estimator's own likelihood is higher at the reference optimum than at its estimate,
      ``objective-differs`` when it is not, and ``short-of-optimum`` when its own
      likelihood cannot be evaluated;
    * no gap and no distance: agreement (None).
    """
    distance = _in_standard_errors(spec, e, reference.params, standard_errors)
    largest = max((abs(v) for v in distance.values()), default=0.0)
    predicted = 0.5 * sum(v * v for v in distance.values())
    gap = max(rescore.gap, 0.0)
    if largest >= FLAT_MIN_DISTANCE and gap < min(0.25 * predicted, _region(len(distance))):
        return "flat-likelihood"
    if gap <= _resolution(rescore.profiled_loglike):
        return None
    if own is None or not own.known:
        return "short-of-optimum"
    if own.at_reference > own.at_estimate + _resolution(own.at_estimate):
        return "stopped-short"
    return "objective-differs"


def _region(coefficients: int) -> float:
    """Half the 0.95 quantile of chi-squared with ``coefficients`` degrees of freedom: the
    largest log-likelihood gap inside the 95% likelihood-ratio region of the optimum
    (Wilks' large-sample result; 1.92 for one coefficient, 3.0 for two)."""
    from scipy.stats import chi2

    return 0.5 * float(chi2.ppf(0.95, max(coefficients, 1)))


def _objective_words(e: Estimate) -> tuple[str, str]:
    """How an estimator's objective differs (from its declared definition), and the remedy."""
    definition = e.loglike_definition.lower()
    if "diffuse" in definition and "exact diffuse" not in definition:
        return (
            "its likelihood puts an approximate diffuse prior on the non-stationary states, "
            "which is informative when the series' level is large",
            "rescale the series (divide it by a power of ten) or fit it on a log or Box-Cox "
            "scale; the library's exact diffuse initialisation or simple differencing also "
            "removes the prior",
        )
    if "css" in definition or "conditional" in definition:
        return (
            "it maximises a conditional (sum-of-squares) objective, not the exact likelihood",
            "use the library's exact maximum-likelihood method",
        )
    if "burn" in definition or "not counted" in definition:
        return (
            "its likelihood leaves out start-up observations (a burn-in)",
            "use the library's option that counts every observation after differencing",
        )
    return (
        f"its own objective is defined as: {e.loglike_definition or 'not stated'}",
        "check the library's likelihood options against the exact likelihood",
    )


def _severity(
    key: str, beyond: bool, material: bool, production: str | None, tol: Tolerances
) -> str:
    """Severity under the policy: a disagreement fails only when it is beyond tolerance and
    material, and it is the production estimator's (or the policy fails other engines)."""
    if not beyond:
        return "info"
    if material and (key == production or production is None or tol.fail_on_other_engines):
        return "fail"
    return "warn"


def diagnose(
    spec: ModelSpec,
    estimates: Mapping[str, Estimate],
    rescores: Mapping[str, Rescore],
    reference: Estimate | None,
    standard_errors: Mapping[str, float],
    tol: Tolerances,
    *,
    production: str | None = None,
    own: Mapping[str, OwnObjective] | None = None,
    materiality: Mapping[str, Materiality] | None = None,
    remedies: Mapping[str, str] | None = None,
) -> list[Finding]:
    """One finding per cause, most severe first.

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
        Tolerances and policy: they set severities only, never the kind of a finding.
    production : str, optional
        The estimator the team ships. Its disagreements fail the audit when they are beyond
        tolerance and material; other engines' are notes unless the policy says otherwise.
        None: every estimator is judged as if it were the production one.
    own : mapping, optional
        Estimator key -> its own log-likelihood at its estimate and at the reference optimum.
    materiality : mapping, optional
        Estimator key -> its disagreement in decision units.
    remedies : mapping, optional
        Estimator key -> the outcome of re-running it with the remedy for its objective.
    """
    own = own or {}
    materiality = materiality or {}
    remedies = remedies or {}
    findings: list[Finding] = []
    causes: dict[str, str | None] = {}
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
        cause = classify(spec, e, rescore, reference, standard_errors, own.get(key))
        causes[key] = cause
        differences = _parameter_differences(spec, e, reference.params, standard_errors, tol)
        beyond = rescore.gap > tol.loglike_atol or bool(differences)
        found = materiality.get(key)
        material = found.material if found is not None else beyond
        if cause is None:
            continue  # agreement to the numerical resolution: no cause, whatever the tolerance
        severity = _severity(key, beyond, material, production, tol)
        if cause == "flat-likelihood" and severity == "fail":
            severity = "warn"  # as good as the optimum under the likelihood: a note
        finding = _cause_finding(
            key,
            e,
            cause,
            rescore,
            differences,
            own.get(key),
            found,
            remedies.get(key),
            severity,
            tol,
        )
        findings.append(finding)
    if reference is not None:
        findings += _reference_findings(spec, reference, rescores, standard_errors, tol)
        findings += _production_findings(
            estimates, rescores, reference, standard_errors, tol, production, causes, materiality
        )
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
    findings = merge_wrapper_findings(findings, estimates)
    order = {"fail": 0, "warn": 1, "info": 2}
    return sorted(findings, key=lambda f: order[f.severity])


def _stopping_remedy(optimizer: Mapping[str, Any]) -> str:
    """What to change in the library's fit when its optimiser stopped short."""
    limit, used = optimizer.get("maxiter"), optimizer.get("iterations")
    if isinstance(limit, int) and isinstance(used, int) and used >= limit:
        return (
            f"Remedy: it used all {limit} iterations allowed; raise the iteration limit "
            "(maxiter) of the library's fit."
        )
    return (
        "Remedy: raise the iteration limit or tighten the convergence tolerance of the "
        "library's fit, or start it from the reference optimum."
    )


def _cause_finding(
    key: str,
    e: Estimate,
    cause: str,
    rescore: Rescore,
    differences: Mapping[str, Mapping[str, float]],
    own: OwnObjective | None,
    found: Materiality | None,
    remedy: str | None,
    severity: str,
    tol: Tolerances,
) -> Finding:
    described = _describe_differences(differences)
    gap = f"{rescore.gap:.4g} log-likelihood units below the reference optimum"
    within = f" (tolerance {tol.loglike_atol:g})" if rescore.gap > tol.loglike_atol else ""
    if cause == "stopped-short":
        optimiser = _optimizer_text(e.optimizer)
        message = (
            f"{key}'s estimate is {gap}{within}, and under its own likelihood the reference "
            f"optimum is {own.at_reference - own.at_estimate:.4g} units better than its "
            "estimate: its optimiser stopped short of its own optimum "
            f"({optimiser or 'no optimiser report'}). {_stopping_remedy(e.optimizer)}"
        )
    elif cause == "objective-differs":
        how, fix = _objective_words(e)
        message = (
            f"{key}'s estimate is {gap}{within}, but under its own likelihood its estimate is "
            f"{own.at_estimate - own.at_reference:.4g} units better than the reference "
            f"optimum: its optimiser reached its own optimum, and its objective differs from "
            f"the exact likelihood: {how}. Remedy: {fix}." + (f" {remedy}" if remedy else "")
        )
    elif cause == "short-of-optimum":
        message = (
            f"{key}'s estimate is {gap}{within}. It cannot evaluate its own likelihood at "
            "given parameters, so whether its optimiser stopped short or its objective "
            "differs cannot be told."
        )
    else:
        message = (
            f"{key}'s estimate is {gap}, yet lies far from the optimum in reference standard "
            "errors: the likelihood is flat in this direction, so the data do not decide "
            "between these values."
        )
    if described:
        message += f" Parameters: {described}."
    if found is not None:
        message += f" Materiality: {found.describe()}."
    values: dict[str, Any] = {"gap": rescore.gap, "differences": dict(differences)}
    if own is not None:
        values["own_loglike"] = {"estimate": own.at_estimate, "reference": own.at_reference}
    if found is not None:
        values["materiality"] = found.to_dict()
    return Finding(cause, severity, key, "loglike", message, values)


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


def _agrees(
    spec: ModelSpec,
    e: Estimate,
    other: Mapping[str, float],
    gap_difference: float,
    standard_errors: Mapping[str, float],
    tol: Tolerances,
) -> bool:
    fake = Estimate(
        key=e.key,
        engine=e.engine,
        package=e.package,
        version=e.version,
        status="ok",
        params=dict(e.params),
    )
    return abs(gap_difference) <= tol.loglike_atol and not _parameter_differences(
        spec, fake, other, standard_errors, tol
    )


def _production_findings(
    estimates: Mapping[str, Estimate],
    rescores: Mapping[str, Rescore],
    reference: Estimate,
    standard_errors: Mapping[str, float],
    tol: Tolerances,
    production: str | None,
    causes: Mapping[str, str | None],
    materiality: Mapping[str, Materiality],
) -> list[Finding]:
    """The three questions of the verdict: is the production estimate at the optimum, is it
    corroborated by enough independent engines, and does any disagreement matter."""
    spec = reference.spec
    assert spec is not None
    findings: list[Finding] = []
    shipped = estimates.get(production) if production else None
    if production is not None and (shipped is None or not shipped.ok):
        why = shipped.reason if shipped is not None else "it was not run"
        findings.append(
            Finding(
                "production-estimate",
                "fail",
                production,
                None,
                f"The production estimator {production} produced no estimate ({why}), so the "
                "model it ships cannot be signed off on this audit.",
            )
        )
        return findings
    # The point the other engines are compared with: the production estimate, or the
    # reference optimum when no production estimator is declared.
    # A production estimate whose difference from the optimum is not material stands with
    # the optimum: engines at the optimum corroborate it in decision units.
    immaterial = False
    if shipped is not None:
        target, target_gap = shipped.params, rescores[production].gap
        cause = causes.get(production)
        found = materiality.get(production)
        moved = _parameter_differences(spec, shipped, reference.params, standard_errors, tol)
        beyond = target_gap > tol.loglike_atol or bool(moved)
        if not beyond:
            message = (
                f"The production estimate ({production}) is at the reference optimum within "
                f"tolerance (gap {target_gap:.2g} log-likelihood units)."
            )
            severity = "info"
        else:
            material = found.material if found is not None else True
            immaterial = not material
            severity = "fail" if material else "warn"
            message = (
                f"The production estimate ({production}) is not at the reference optimum "
                f"(gap {target_gap:.4g} log-likelihood units; cause: {cause or 'parameters'})"
                + f". Beyond tolerance: {_breaches(target_gap, moved, tol)}"
                + (f"; {found.describe()}" if found is not None else "")
                + (
                    ". It fails the audit because the difference is material."
                    if material
                    else ". The difference is not material, so it is a note."
                )
            )
        findings.append(
            Finding(
                "production-estimate",
                severity,
                production,
                "loglike",
                message,
                {"gap": target_gap, "cause": cause, "beyond_tolerance": beyond},
            )
        )
    else:
        target, target_gap = reference.params, 0.0
    agreeing: dict[str, list[str]] = {}
    reasons: dict[str, str] = {}
    for key, e in estimates.items():
        if key == production:
            continue
        if not e.ok:
            reasons.setdefault(e.engine, f"{key}: {e.status} ({e.reason[:120]})")
            continue
        if e.fitted_model:
            reasons.setdefault(e.engine, f"{key}: fitted a different model")
            continue
        diff = rescores[key].gap - target_gap
        at_optimum = _agrees(spec, e, reference.params, rescores[key].gap, standard_errors, tol)
        if _agrees(spec, e, target, diff, standard_errors, tol) or (immaterial and at_optimum):
            agreeing.setdefault(e.engine, []).append(key)
        else:
            cause = causes.get(key) or "parameters differ"
            reasons.setdefault(
                e.engine, f"{key}: {cause} ({rescores[key].gap:.3g} units below the optimum)"
            )
    engines = set(agreeing)
    if shipped is not None:
        engines.add(shipped.engine)
        if immaterial or _agrees(spec, shipped, reference.params, target_gap, standard_errors, tol):
            engines.add(REFERENCE_ENGINE)
        else:
            reasons[REFERENCE_ENGINE] = "reference: the production estimate is not at its optimum"
    else:
        engines.add(REFERENCE_ENGINE)
    for engine in engines:
        reasons.pop(engine, None)
    enough = len(engines) >= tol.min_independent_engines
    # When the production estimate itself fails the first question, that is the cause;
    # the count is then stated, not counted as a second failure.
    counted_already = any(f.severity == "fail" for f in findings)
    listing = "; ".join(
        f"{engine} ({', '.join(keys)})" for engine, keys in sorted(agreeing.items())
    )
    not_counted = "; ".join(reasons[k] for k in sorted(reasons))
    subject = f"the production estimate ({production})" if shipped else "the reference optimum"
    findings.append(
        Finding(
            "engine-count",
            "info" if enough or counted_already else "fail",
            None,
            None,
            f"{len(engines)} independent engine(s) corroborate {subject} (the reference "
            "counts as one when it agrees; wrappers of one engine count once; required: "
            f"{tol.min_independent_engines})."
            + (
                " That is fewer than required, but not a second failure: the production "
                "estimate's own finding already fails the audit."
                if not enough and counted_already
                else ""
            )
            + (
                " The production estimate differs from the optimum by an amount that is not "
                "material, so engines at the optimum corroborate it in decision units."
                if immaterial
                else ""
            )
            + (f" Agreeing: {listing}." if listing else "")
            + (f" Not counted: {not_counted}." if not_counted else ""),
            {
                "agreeing": sorted(engines),
                "not_counted": dict(sorted(reasons.items())),
                "required": tol.min_independent_engines,
            },
        )
    )
    return findings


def merge_wrapper_findings(
    findings: list[Finding], estimates: Mapping[str, Estimate]
) -> list[Finding]:
    """One finding per cause: the same finding about wrappers of one engine that returned
    the same estimate is kept once, naming every wrapper."""
    groups: dict[tuple[Any, ...], list[Finding]] = {}
    order: list[tuple[Any, ...]] = []
    for f in findings:
        e = estimates.get(f.estimator or "")
        if e is None or not e.ok:
            identity: tuple[Any, ...] = ("single", id(f))
        else:
            params = tuple(sorted((k, round(v, 9)) for k, v in e.params.items()))
            text = f.message.replace(e.key, "{estimator}")
            identity = (e.engine, params, f.kind, f.severity, f.quantity, text)
        if identity not in groups:
            groups[identity] = []
            order.append(identity)
        groups[identity].append(f)
    merged = []
    for identity in order:
        group = groups[identity]
        if len(group) == 1:
            merged.append(group[0])
            continue
        keys = [f.estimator for f in group if f.estimator]
        first = group[0]
        engine = estimates[first.estimator or ""].engine
        others = keys[1:]
        names = ", ".join(others[:-1]) + (" and " if len(others) > 1 else "") + others[-1]
        message = (
            f"{first.message} The same holds for {names}: wrappers of the same engine "
            f"({engine}) with the same estimate, so this is one finding."
        )
        merged.append(
            Finding(
                first.kind,
                first.severity,
                first.estimator,
                first.quantity,
                message,
                {**first.values, "members": keys},
            )
        )
    return merged


def with_policy_severity(
    findings: list[Finding],
    materiality: Mapping[str, Materiality],
    production: str | None,
    tol: Tolerances,
    explained: set[str],
) -> list[Finding]:
    """Forecast and interval differences get their severity from the policy: beyond
    tolerance, they fail only when material and about the production estimator."""
    out = []
    for f in findings:
        found = materiality.get(f.estimator or "")
        if f.severity != "info" and found is not None:
            severity = _severity(f.estimator or "", True, found.material, production, tol)
            if f.estimator in explained:
                # The estimate's cause finding already states these differences in its
                # materiality: kept for the detail, not counted again.
                severity = "info"
            f = dataclasses.replace(f, severity=severity)
        out.append(f)
    return out
