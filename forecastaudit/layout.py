"""tmp"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from forecastaudit.spec import ModelSpec


# ---------------------------------------------------------------------- roots
def _factor_roots(coefs: list[float], sign: float) -> np.ndarray:
    """Roots (in the factor's own variable) of 1 + sign*(c1 z + c2 z^2 + ...)."""
    poly = np.array([1.0, *(sign * c for c in coefs)])
    trimmed = np.trim_zeros(poly, "b")
    if trimmed.size <= 1:
        return np.empty(0, dtype=complex)
    return np.roots(trimmed[::-1])


def polynomial_roots(spec: ModelSpec, params: Mapping[str, float]) -> dict[str, np.ndarray]:
    """Roots of each factor: regular AR and MA in B, seasonal AR and MA in B^m.

    Returns
    -------
    dict
        ``{"ar": ..., "sar": ..., "ma": ..., "sma": ...}``, complex roots of each factor in
        its own variable. Stationarity and invertibility need every modulus above 1.
    """
    m = spec.m
    return {
        "ar": _factor_roots([params[f"ar_lag{i}"] for i in range(1, spec.p + 1)], -1.0),
        "sar": _factor_roots([params[f"sar_lag{i * m}"] for i in range(1, spec.P + 1)], -1.0),
        "ma": _factor_roots([params[f"ma_lag{j}"] for j in range(1, spec.q + 1)], 1.0),
        "sma": _factor_roots([params[f"sma_lag{j * m}"] for j in range(1, spec.Q + 1)], 1.0),
    }
