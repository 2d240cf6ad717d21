"""The check that an imported estimate's declared conventions are right.

An import record says what its values mean: the MA sign, the kind of constant, the kind of
sigma2, the scale of its log-likelihood (:class:`forecastaudit.imported.Declarations`).
Declared wrongly, the canonical values are wrong and every comparison with them is
meaningless, so the declarations are checked against the record's own numbers: its reported
log-likelihood must equal the reference log-likelihood at its parameters, to within what
the typed digits allow. When it does not, every other declaration is tried and the ones that
make the numbers agree are named. A record without a log-likelihood is checked, more
weakly, by whether its estimate is at the reference optimum under its declarations.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from decimal import Decimal
from typing import Any

import numpy as np

from forecastaudit.diagnosis.findings import Finding
from forecastaudit.errors import ImportRecordError
from forecastaudit.imported import (
    Declarations,
    ImportRecord,
    alternative_declarations,
    normalise,
)
from forecastaudit.spec import ModelSpec

__all__ = ["DeclarationCheck", "DeclarationTrial", "check_declarations", "declaration_finding"]

#: Relative resolution of a log-likelihood evaluation (a property of the arithmetic).
RESOLUTION = 1e-6


@dataclass(frozen=True)
class DeclarationTrial:
    """The record's numbers under one set of declarations.

    Attributes
    ----------
    declarations : Declarations
    loglike : float
        The reference log-likelihood at the parameters these declarations give, on the
        declared scale, at the given sigma2 (profiled when the record gives none).
    profiled : float
        The same with sigma2 profiled out, on the transformed scale.
    mismatch : float
        Reported minus reference log-likelihood (NaN without a reported one).
    allowance : float
        How far the two may differ because of the digits typed: half a unit in the last
        digit of the reported value, plus the change of the reference value when each
        parameter moves by half a unit in its last digit.
    gap : float
        The reference optimum minus ``profiled``.
    """

    declarations: Declarations
    loglike: float
    profiled: float
    mismatch: float
    allowance: float
    gap: float

    @property
    def agrees(self) -> bool:
        """The reported log-likelihood equals the reference one within the allowance."""
        return math.isfinite(self.mismatch) and abs(self.mismatch) <= self.allowance

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "declarations": self.declarations.to_dict(),
            "reference_loglike": self.loglike,
            "mismatch": self.mismatch,
            "allowance": self.allowance,
            "gap": self.gap,
        }


@dataclass(frozen=True)
class DeclarationCheck:
    """The outcome of checking one import record's declarations.

    Attributes
    ----------
    label : str
    reported : float
        The reported log-likelihood (NaN when none).
    basis : {"loglike", "optimum"}
        What the check compares: the reported log-likelihood, or (without one) the gap to
        the reference optimum.
    declared : DeclarationTrial
    fitting : list of DeclarationTrial
        Other declarations that make the numbers agree, fewest changes first.
    consistent : bool or None
        Whether the declared conventions agree; None when nothing can be told (no reported
        log-likelihood and no declaration puts the estimate at the optimum).
    n_w : int
        Observations after differencing.
    """

    label: str
    reported: float
    basis: str
    declared: DeclarationTrial
    fitting: list[DeclarationTrial]
    consistent: bool | None
    n_w: int = 0


def _half_unit(value: float) -> float:
    """Half a unit in the last digit of ``value`` as written (its shortest repr)."""
    if not math.isfinite(value):
        return math.nan
    exponent = Decimal(repr(float(value))).normalize().as_tuple().exponent
    return 0.5 * 10.0 ** int(exponent) if isinstance(exponent, int) else 0.0


def _score(
    record: ImportRecord,
    declarations: Declarations,
    y_t: np.ndarray,
    spec: ModelSpec,
    n_w: int,
    regressors: np.ndarray | None = None,
) -> tuple[float, float]:
    """Reference log-likelihood on the declared scale (at the given or profiled sigma2), and
    the profiled one on the transformed scale."""
    from forecastaudit.reference import evaluate

    normalised = normalise(record, declarations, n_w=n_w)
    params = dict(normalised.params)
    given = normalised.sigma2_given
    params.setdefault("sigma2", 1.0)
    ev = evaluate(y_t, spec, params, regressors=regressors)
    original = declarations.loglike_scale == "original"
    if given:
        value = ev.loglike_original_scale if original else ev.loglike
    else:
        value = ev.profiled_loglike_original_scale if original else ev.profiled_loglike
    return float(value), float(ev.profiled_loglike)


def _trial(
    record: ImportRecord,
    declarations: Declarations,
    y_t: np.ndarray,
    spec: ModelSpec,
    n_w: int,
    optimum: float,
    regressors: np.ndarray | None = None,
) -> DeclarationTrial | None:
    try:
        value, profiled = _score(record, declarations, y_t, spec, n_w, regressors)
    except ImportRecordError:
        return None  # a declaration these values cannot be in (an intercept with a unit root)
    allowance = RESOLUTION * max(1.0, abs(value)) if math.isfinite(value) else math.nan
    if math.isfinite(record.loglike):
        allowance += _half_unit(record.loglike)
    # The typed digits of each parameter: move it by half a unit in its last digit.
    for name, typed in record.parameters.items():
        step = _half_unit(typed)
        if not step:
            continue
        moved = dataclasses.replace(record, parameters={**record.parameters, name: typed + step})
        try:
            shifted, _ = _score(moved, declarations, y_t, spec, n_w, regressors)
        except ImportRecordError:
            continue
        if math.isfinite(shifted) and math.isfinite(value):
            allowance += abs(shifted - value)
    mismatch = record.loglike - value if math.isfinite(record.loglike) else math.nan
    return DeclarationTrial(
        declarations=declarations,
        loglike=value,
        profiled=profiled,
        mismatch=mismatch,
        allowance=allowance,
        gap=optimum - profiled,
    )


def check_declarations(
    record: ImportRecord,
    y_t: np.ndarray,
    spec: ModelSpec,
    optimum: float,
    *,
    gap_tolerance: float,
    regressors: np.ndarray | None = None,
) -> DeclarationCheck:
    """Check an import record's declarations against its own numbers.

    Parameters
    ----------
    record : ImportRecord
    y_t : numpy.ndarray
        The audited series after the transform.
    spec : ModelSpec
        The audited model (the record's).
    optimum : float
        The reference optimum (profiled log-likelihood).
    gap_tolerance : float
        Without a reported log-likelihood, the gap to the optimum under which an estimate
        counts as at the optimum (the audit's log-likelihood tolerance).
    regressors : numpy.ndarray, optional
        The regressor columns of a model with regressors, after the transform's rows
        (shape ``(n, k)``, in ``spec.regressors`` order).

    Returns
    -------
    DeclarationCheck
    """
    n_w = len(y_t) - spec.lost_to_differencing
    trials: list[DeclarationTrial] = []
    seen: set[tuple[Any, ...]] = set()
    reported = math.isfinite(record.loglike)
    own = record.declarations
    for declarations in alternative_declarations(record):
        if not reported and (
            declarations.sigma2 != own.sigma2 or declarations.loglike_scale != own.loglike_scale
        ):
            continue  # without a log-likelihood only the coefficients can be checked
        trial = _trial(record, declarations, y_t, spec, n_w, optimum, regressors)
        if trial is None:
            continue
        # Declarations that give the same numbers (intercept and mean without AR terms)
        # cannot be told apart: keep the first, which is the declared one where it is.
        fingerprint = (round(trial.loglike, 9), round(trial.profiled, 9))
        if fingerprint in seen and trial.declarations != record.declarations:
            continue
        seen.add(fingerprint)
        trials.append(trial)
    declared, others = trials[0], trials[1:]

    def changes(trial: DeclarationTrial) -> int:
        return len(trial.declarations.differences(record.declarations))

    if reported:
        basis = "loglike"
        consistent: bool | None = declared.agrees
        fitting = sorted(
            (t for t in others if t.agrees), key=lambda t: (changes(t), abs(t.mismatch))
        )
    else:
        basis = "optimum"
        at_optimum = [t for t in others if t.gap <= gap_tolerance]
        fitting = sorted(at_optimum, key=lambda t: (changes(t), t.gap))
        if declared.gap <= gap_tolerance:
            consistent = True
        else:
            consistent = False if fitting else None
    return DeclarationCheck(
        label=record.label,
        reported=record.loglike,
        basis=basis,
        declared=declared,
        fitting=fitting,
        consistent=consistent,
        n_w=n_w,
    )


def _changed(trial: DeclarationTrial, declared: Declarations) -> str:
    parts = [
        f"{name} {new!r} instead of {old!r}"
        for name, (new, old) in trial.declarations.differences(declared).items()
    ]
    return ", ".join(parts)


def declaration_finding(
    check: DeclarationCheck, record: ImportRecord, *, production: bool
) -> Finding:
    """The finding of one declaration check, written for a reviewer.

    Consistent declarations are a note; declarations that another set explains fail the
    audit when the import is the production estimate (a warning otherwise): the canonical
    values, and every comparison with them, are wrong until the record is corrected.
    """
    label, declared = check.label, check.declared
    said = record.declarations.describe()
    values: dict[str, Any] = {
        "basis": check.basis,
        "reported_loglike": check.reported,
        "declared": declared.to_dict(),
        "fitting": [t.to_dict() for t in check.fitting],
    }
    if not math.isfinite(declared.loglike):
        against = (
            "under them its parameters lie outside the stationary or invertible region, "
            "where the reference likelihood is not defined"
        )
    elif check.basis == "loglike":
        against = (
            f"its reported log-likelihood {check.reported:.4f} against the reference "
            f"{declared.loglike:.4f} at its parameters (difference {declared.mismatch:+.3g}; "
            f"its typed digits allow {declared.allowance:.2g})"
        )
    else:
        against = (
            f"it reports no log-likelihood, so the check is weaker: its estimate is "
            f"{declared.gap:.4g} log-likelihood units below the reference optimum"
        )
    if check.consistent:
        message = f"The declared conventions of {label} ({said}) are consistent: {against}."
        if check.fitting:
            also = "; ".join(_changed(t, record.declarations) for t in check.fitting)
            message += (
                f" The numbers cannot tell them from other declarations that agree as well "
                f"({also}); confirm them with the software's documentation."
            )
        return Finding("declared-conventions", "info", label, "conventions", message, values)
    if check.fitting:
        best = check.fitting[0]
        how = (
            f"the reference then gives {best.loglike:.4f} (difference {best.mismatch:+.3g})"
            if check.basis == "loglike"
            else f"the estimate is then {best.gap:.3g} units from the reference optimum"
        )
        message = (
            f"The declared conventions of {label} ({said}) do not fit its numbers: {against}. "
            f"Declaring {_changed(best, record.declarations)} makes them consistent: {how}. "
            "Correct the conventions in the import record and audit again; until then its "
            "canonical values, and every comparison with them, are wrong."
        )
        if len(check.fitting) > 1:
            others = "; ".join(_changed(t, record.declarations) for t in check.fitting[1:])
            message += f" Also consistent: {others}."
        return Finding(
            "declared-conventions",
            "fail" if production else "warn",
            label,
            "conventions",
            message,
            values,
        )
    if check.consistent is None:
        message = (
            f"The declared conventions of {label} ({said}) cannot be checked: {against}, and "
            "no other declaration puts it at the optimum either (its optimiser may have "
            "stopped short). Add the software's reported log-likelihood to the record."
        )
        return Finding("declared-conventions", "warn", label, "conventions", message, values)
    if not math.isfinite(declared.loglike):
        message = (
            f"The declared conventions of {label} ({said}) cannot be checked: {against}, and "
            "no other declaration of the MA sign, constant, sigma2 or scale makes its numbers "
            "agree. Check the values typed and their signs."
        )
        return Finding("declared-conventions", "warn", label, "conventions", message, values)
    hint = ""
    constant = 0.5 * check.n_w * math.log(2.0 * math.pi)
    if math.isfinite(declared.mismatch) and abs(declared.mismatch - constant) <= max(
        declared.allowance, 1e-3
    ):
        hint = (
            f" The difference is n_w ln(2 pi) / 2 = {constant:.4f}: the software leaves the "
            "2*pi constant out of its log-likelihood."
        )
    message = (
        f"The declared conventions of {label} ({said}) do not reproduce its reported "
        f"log-likelihood: {against}, and no other declaration of the MA sign, constant, "
        "sigma2 or scale does. The difference is likely the software's own definition of "
        "the likelihood (a conditional sum of squares, a diffuse prior, a burn-in, a "
        f"constant left out); its stated definition: {record.loglike_definition or 'none'}." + hint
    )
    return Finding("declared-conventions", "warn", label, "conventions", message, values)
