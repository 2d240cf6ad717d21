"""Materiality: does a disagreement matter for the decisions the forecasts drive?

A numerical disagreement (a log-likelihood gap, a coefficient a tenth of a standard error
away) is measured against the tolerances. Whether it *matters* is measured in decision
units, against the materiality thresholds of the stated policy
(:class:`~forecastaudit.diagnosis.tolerances.Tolerances`):

* the point forecast's largest difference from the forecast at the reference optimum, in
  forecast standard errors and in percent of the point (on the original scale);
* the ratio of interval widths at the widest level;
* the relative difference of holdout accuracy (MASE), when a holdout ran.

A disagreement that moves none of these beyond its threshold is not material.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from forecastaudit.diagnosis.forecasts import OriginalScaleForecast
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import Forecast

__all__ = ["Materiality", "measure_materiality"]


@dataclass
class Materiality:
    """One estimate's disagreement with the reference optimum, in decision units.

    Attributes
    ----------
    forecast_se : float
        Largest absolute point-forecast difference, in reference forecast standard errors
        (transformed scale), over the horizon; NaN without forecasts.
    forecast_percent : float
        Largest absolute point-forecast difference on the original scale, in percent of the
        reference point forecast.
    width_ratio : float
        Interval width at the widest level over the reference width, at the step where it is
        farthest from 1.
    accuracy_difference : float
        Relative difference of holdout MASE against the reference (NaN without a holdout).
    material : bool
        Whether any measure is beyond its threshold.
    reasons : list of str
        The measures beyond their thresholds, in words.
    """

    forecast_se: float = math.nan
    forecast_percent: float = math.nan
    width_ratio: float = math.nan
    accuracy_difference: float = math.nan
    material: bool = False
    reasons: list[str] = field(default_factory=list)

    def describe(self) -> str:
        """One sentence: the measures, and whether they are material."""
        parts = []
        if math.isfinite(self.forecast_se):
            parts.append(
                f"point forecasts up to {self.forecast_se:.2f} forecast standard errors "
                f"({self.forecast_percent:.2f}% of the point) from those at the optimum"
            )
        if math.isfinite(self.width_ratio):
            parts.append(f"interval widths {100 * (self.width_ratio - 1):+.1f}%")
        if math.isfinite(self.accuracy_difference):
            parts.append(f"holdout MASE {100 * self.accuracy_difference:+.1f}%")
        if not parts:
            return "its materiality could not be measured (no forecast)"
        verdict = (
            "material: " + "; ".join(self.reasons)
            if self.material
            else "not material for the decisions the forecasts drive"
        )
        return ", ".join(parts) + f" ({verdict})"

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "forecast_se": self.forecast_se,
            "forecast_percent": self.forecast_percent,
            "width_ratio": self.width_ratio,
            "accuracy_difference": self.accuracy_difference,
            "material": self.material,
            "reasons": list(self.reasons),
        }


def measure_materiality(
    key: str,
    transformed: Mapping[str, Forecast],
    original: Mapping[str, OriginalScaleForecast],
    reference_key: str,
    tol: Tolerances,
    accuracy: Mapping[str, float] | None = None,
) -> Materiality:
    """Measure one estimate's disagreement with the reference optimum in decision units.

    Parameters
    ----------
    key : str
        The estimator.
    transformed, original : mapping
        Forecasts on the transformed and the original scale, by estimator key.
    reference_key : str
        Key of the forecast at the reference optimum.
    tol : Tolerances
        The policy's materiality thresholds (``material_*``).
    accuracy : mapping, optional
        Holdout MASE by estimator key.
    """
    out = Materiality()
    fc, ref = transformed.get(key), transformed.get(reference_key)
    if fc is None or ref is None or not fc.ok or not ref.ok:
        return out
    with np.errstate(divide="ignore", invalid="ignore"):
        in_se = np.abs(fc.mean - ref.mean) / ref.se
        out.forecast_se = float(np.nanmax(in_se)) if in_se.size else math.nan
        point, ref_point = original.get(key), original.get(reference_key)
        if point is not None and ref_point is not None:
            percent = 100.0 * np.abs(point.median - ref_point.median) / np.abs(ref_point.median)
            out.forecast_percent = float(np.nanmax(percent)) if percent.size else math.nan
        widest = max(ref.levels)
        if widest in fc.upper and widest in ref.upper:
            ratio = (fc.upper[widest] - fc.lower[widest]) / (ref.upper[widest] - ref.lower[widest])
            out.width_ratio = float(ratio[int(np.nanargmax(np.abs(ratio - 1.0)))])
    if accuracy and key in accuracy and reference_key in accuracy:
        base = accuracy[reference_key]
        if base and math.isfinite(base):
            out.accuracy_difference = float(accuracy[key] / base - 1.0)
    # Each check: the value, its threshold, and the words for both, in the same unit.
    checks = (
        (out.forecast_se, tol.material_forecast_se, "point forecasts {:.2f} SE apart", "{:g}"),
        (
            out.forecast_percent,
            tol.material_forecast_percent,
            "point forecasts {:.2f}% apart",
            "{:g}%",
        ),
        (
            abs(out.width_ratio - 1.0) if math.isfinite(out.width_ratio) else math.nan,
            tol.material_width_rtol,
            "interval widths {:.1%} apart",
            "{:.3g%}",
        ),
        (
            abs(out.accuracy_difference),
            tol.material_accuracy_rtol,
            "holdout MASE {:.1%} apart",
            "{:.3g%}",
        ),
    )
    for value, threshold, words, unit in checks:
        if math.isfinite(value) and value > threshold:
            shown = f"{100.0 * threshold:.3g}%" if unit == "{:.3g%}" else unit.format(threshold)
            out.reasons.append(words.format(value) + f" (threshold {shown})")
    out.material = bool(out.reasons)
    return out
