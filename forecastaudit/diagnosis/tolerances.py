"""Tolerances: when do two implementations agree?

Every default is stated here with its reason, recorded in the audit record, and can be
overridden by the caller (``Tolerances(parameter_atol=0.01)`` or ``tol.replace(...)``).
"""

from __future__ import annotations

import dataclasses
import math
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np

from forecastaudit.errors import ToleranceError
from forecastaudit.validation import echo, whole_number

__all__ = ["Tolerances"]

# Why each default is what it is; shown in reports and written into the record.
REASONS: dict[str, str] = {
    "parameter_se_fraction": (
        "Two estimates of a coefficient agree when they differ by at most this fraction of "
        "the reference standard error: a tenth of a standard error does not change any "
        "inference drawn from the coefficient (common practice, no source)."
    ),
    "parameter_atol": (
        "Absolute floor of the coefficient tolerance, for coefficients whose standard error "
        "is tiny or unknown: default optimiser stopping rules leave differences of about "
        "1e-4 (measured: statsmodels' default fit stops about 1e-4 short of the optimum)."
    ),
    "sigma2_rtol": (
        "Relative tolerance on the maximum-likelihood innovation variance: 1% is below the "
        "sampling error of a variance from any series this tool is meant for (the relative "
        "standard error of a variance from n observations is about sqrt(2/n), 12% at n=131)."
    ),
    "loglike_atol": (
        "Largest shortfall, in log-likelihood units, of an estimate below the best reference "
        "value before it counts as having stopped short: 0.01 is 0.02 AIC units, a hundredth "
        "of the 2-unit difference that Burnham & Anderson (2002) treat as meaningful."
    ),
    "forecast_se_fraction": (
        "Point forecasts agree when they differ by at most this fraction of the forecast "
        "standard error at the reference optimum, at every step: a tenth of a standard error "
        "is invisible beside the forecast's own uncertainty (common practice, no source)."
    ),
    "interval_width_rtol": (
        "Relative tolerance on the width of prediction intervals against those at the "
        "reference optimum: 2% (common practice, no source)."
    ),
    "accuracy_rtol": (
        "Between two records, a holdout accuracy measure (MAE, RMSE, MASE, coverage, "
        "interval score) has drifted when it moves by more than 1% of its value (common "
        "practice, no source)."
    ),
    "root_margin": (
        "A root of an AR or MA polynomial whose modulus is below 1 + root_margin is treated "
        "as on the boundary of the stationary or invertible region (common practice, no "
        "source)."
    ),
    "min_independent_engines": (
        "The production estimate must be corroborated by at least this many independent "
        "engines, itself included (wrappers of one engine count once). forecastaudit's "
        "reference counts as one: it is independent code, checked against closed forms and "
        "published values. The default 2 is the production engine and one other."
    ),
    "material_forecast_se": (
        "A point-forecast difference is material beyond this many forecast standard errors "
        "at any step: half a standard error visibly moves a forecast inside its own interval "
        "(common practice, no source)."
    ),
    "material_forecast_percent": (
        "A point-forecast difference is material beyond this percentage of the point, on the "
        "original scale: 1% of a plan is what planning decisions are usually rounded to "
        "(common practice, no source)."
    ),
    "material_width_rtol": (
        "An interval-width difference is material beyond this relative amount: 5% changes "
        "safety stocks and staffing buffers sized from the intervals (common practice, no "
        "source)."
    ),
    "material_accuracy_rtol": (
        "A holdout accuracy (MASE) difference is material beyond this relative amount "
        "(common practice, no source)."
    ),
    "fail_on_other_engines": (
        "When true, a material disagreement of an engine other than the production one "
        "fails the audit; by default it is a note telling the team what a switch would do."
    ),
    "fail_on_model_findings": (
        "When true, findings about the model itself (an optimum on the invertibility "
        "boundary, residual autocorrelation, intervals crossing zero on a positive series, "
        "the specified model outside the support band of the order search) fail the audit; "
        "by default they are notes for the modeller."
    ),
}


@dataclass(frozen=True)
class Tolerances:
    """Stated tolerances of an audit, with documented defaults.

    Parameters
    ----------
    parameter_se_fraction : float
        Coefficients agree when ``|a - b| <= max(parameter_atol, parameter_se_fraction * se)``
        with ``se`` the reference standard error. Default 0.1.
    parameter_atol : float
        Absolute floor of the coefficient tolerance. Default 2e-3.
    sigma2_rtol : float
        Relative tolerance on sigma2. Default 0.01.
    loglike_atol : float
        Allowed shortfall below the best reference log-likelihood. Default 0.01.
    forecast_se_fraction : float
        Point forecasts agree within this fraction of the reference forecast standard error.
        Default 0.1.
    interval_width_rtol : float
        Relative tolerance on interval widths. Default 0.02.
    accuracy_rtol : float
        Relative drift allowed in holdout accuracy measures between records. Default 0.01.
    root_margin : float
        Roots with modulus below ``1 + root_margin`` are on the boundary. Default 0.02.
    min_independent_engines : int
        Independent engines, the production engine and the reference included, that must
        agree with the production estimate. Default 2.
    material_forecast_se : float
        Materiality threshold of a point-forecast difference, in forecast standard errors.
        Default 0.5.
    material_forecast_percent : float
        Materiality threshold of a point-forecast difference, in percent of the point.
        Default 1.0.
    material_width_rtol : float
        Materiality threshold of an interval-width difference (relative). Default 0.05.
    material_accuracy_rtol : float
        Materiality threshold of a holdout MASE difference (relative). Default 0.05.
    fail_on_other_engines : bool
        Whether another engine's material disagreement fails the audit. Default False.
    fail_on_model_findings : bool
        Whether findings about the model itself fail the audit. Default False.

    Notes
    -----
    The reasons for each default are in
    :data:`forecastaudit.diagnosis.tolerances.REASONS` and in the audit record.
    """

    parameter_se_fraction: float = 0.1
    parameter_atol: float = 2e-3
    sigma2_rtol: float = 0.01
    loglike_atol: float = 0.01
    forecast_se_fraction: float = 0.1
    interval_width_rtol: float = 0.02
    accuracy_rtol: float = 0.01
    root_margin: float = 0.02
    min_independent_engines: int = 2
    material_forecast_se: float = 0.5
    material_forecast_percent: float = 1.0
    material_width_rtol: float = 0.05
    material_accuracy_rtol: float = 0.05
    fail_on_other_engines: bool = False
    fail_on_model_findings: bool = False

    def __post_init__(self) -> None:
        for item in dataclasses.fields(self):
            value = getattr(self, item.name)
            if item.name.startswith("fail_on_"):
                if not isinstance(value, bool):
                    raise ToleranceError(f"{item.name} must be True or False, got {value!r}.")
                continue
            if item.name == "min_independent_engines":
                # A fraction is refused, not truncated: 1.7 engines must not become 1.
                count = whole_number(
                    value,
                    "min_independent_engines",
                    minimum=1,
                    error=ToleranceError,
                    example="2",
                )
                object.__setattr__(self, item.name, count)
                continue
            if isinstance(value, bool | np.bool_) or not isinstance(value, numbers.Real):
                raise ToleranceError(f"Tolerance {item.name} must be a number, got {echo(value)}.")
            value = float(value)
            object.__setattr__(self, item.name, value)
            if not math.isfinite(value) or value < 0:
                raise ToleranceError(
                    f"Tolerance {item.name} must be finite and not negative, got {value!r}."
                )

    def replace(self, **changes: Any) -> Tolerances:
        """A copy with some tolerances changed; unknown names raise :class:`ToleranceError`."""
        known = {item.name for item in dataclasses.fields(self)}
        unknown = sorted(set(changes) - known)
        if unknown:
            raise ToleranceError(
                f"Unknown tolerance(s) {', '.join(unknown)}; known: {', '.join(sorted(known))}."
            )
        return dataclasses.replace(self, **changes)

    @classmethod
    def from_dict(cls, values: dict[str, Any] | None) -> Tolerances:
        """Build from a mapping of overrides (as read from a record or an ini file)."""
        return cls().replace(**(values or {}))

    def parameter_tolerance(self, standard_error: float | None) -> float:
        """The tolerance on one coefficient with the given reference standard error."""
        if standard_error is None or not math.isfinite(standard_error):
            return self.parameter_atol
        return max(self.parameter_atol, self.parameter_se_fraction * standard_error)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready values."""
        return dataclasses.asdict(self)

    def describe(self) -> dict[str, dict[str, Any]]:
        """Each tolerance with its value, its default and the reason for the default."""
        default = Tolerances()
        return {
            name: {"value": value, "default": getattr(default, name), "reason": REASONS[name]}
            for name, value in self.to_dict().items()
        }


def parse_overrides(items: list[str] | tuple[str, ...] | None, *, where: str) -> dict[str, Any]:
    """Tolerance overrides from ``NAME=VALUE`` texts (the CLI and the pytest plugin).

    Numbers for numeric tolerances, a whole number for ``min_independent_engines``,
    ``true``/``false`` for the policy switches. Raises :class:`ToleranceError` naming the
    problem and ``where`` it came from.
    """
    known = {item.name: item for item in dataclasses.fields(Tolerances)}
    out: dict[str, Any] = {}
    for item in items or []:
        name, sep, value = (part.strip() for part in str(item).partition("="))
        if not sep or not name:
            raise ToleranceError(
                f"{where} expects NAME=VALUE (e.g. loglike_atol=0.05), got {item!r}."
            )
        if name not in known:
            raise ToleranceError(
                f"{where}: unknown tolerance {name!r}; known: {', '.join(sorted(known))}."
            )
        if name.startswith("fail_on_"):
            if value.lower() not in ("true", "false"):
                raise ToleranceError(f"{where} {name}: use true or false, got {value!r}.")
            out[name] = value.lower() == "true"
            continue
        try:
            number = float(value)
        except ValueError:
            raise ToleranceError(f"{where} {name}: {value!r} is not a number.") from None
        if name == "min_independent_engines":
            if not number.is_integer() or not value.strip().lstrip("+").isdigit():
                raise ToleranceError(
                    f"{where} {name}: {echo(value)} is not a whole number of engines; write "
                    "e.g. min_independent_engines=2."
                )
            out[name] = int(value)
        else:
            out[name] = number
    return out
