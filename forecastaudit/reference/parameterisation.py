"""Stationary and invertible parameterisation through partial autocorrelations.

Jones (1980), Technometrics 22; Monahan (1984), Biometrika 71: any unconstrained vector maps
to a stationary (invertible) factor and back.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from forecastaudit.layout import lag_polynomial_roots, layout_of
from forecastaudit.spec import ModelSpec


# ====================================================================== PACF transforms
def pacf_to_ar(pacf: Sequence[float] | np.ndarray) -> np.ndarray:
    """AR coefficients from partial autocorrelations by the Durbin-Levinson recursion.

    ``a^(k)_k = r_k`` and ``a^(k)_j = a^(k-1)_j - r_k a^(k-1)_{k-j}``, j < k. Every vector
    of partial autocorrelations in (-1, 1)^p gives a stationary ``1 - a_1 B - ... - a_p
    B^p`` and every stationary polynomial arises once (Barndorff-Nielsen, O., Schou, G.
    (1973), J. Multivariate Analysis 3; Jones, R.H. (1980), Technometrics 22, 389-395;
    Monahan, J.F. (1984), Biometrika 71, 403-404).

    Parameters
    ----------
    pacf : array_like
        Partial autocorrelations ``r_1 .. r_p``.

    Returns
    -------
    numpy.ndarray
        ``a_1 .. a_p`` in the convention ``phi(B) = 1 - a_1 B - ...``.
    """
    r = np.asarray(pacf, dtype=float).ravel()
    a = np.empty(0)
    for value in r:
        a = np.concatenate((a - value * a[::-1], [value]))
    return a


def ar_to_pacf(ar: Sequence[float] | np.ndarray) -> np.ndarray:
    """Partial autocorrelations of ``1 - a_1 B - ... - a_p B^p`` (inverse Durbin-Levinson).

    The step-down recursion ``r_k = a^(k)_k``, ``a^(k-1)_j = (a^(k)_j + r_k a^(k)_{k-j}) /
    (1 - r_k^2)``; the polynomial is stationary exactly when every ``|r_k| < 1`` (references
    as in :func:`pacf_to_ar`; the step-down form is the Schur-Cohn test).

    Returns
    -------
    numpy.ndarray
        ``r_1 .. r_p``. When the recursion meets ``|r_k| >= 1`` (not stationary) the
        entries it could not reach are NaN and the reached ones are kept.
    """
    a = np.asarray(ar, dtype=float).ravel().copy()
    p = a.size
    r = np.full(p, np.nan)
    for k in range(p, 0, -1):
        value = a[-1]
        r[k - 1] = value
        if not abs(value) < 1.0:
            break
        a = (a[:-1] + value * a[-2::-1]) / (1.0 - value * value)
    return r


def unconstrained_to_pacf(x: Sequence[float] | np.ndarray) -> np.ndarray:
    """Map reals onto (-1, 1) by ``x / sqrt(1 + x^2)``.

    Any smooth increasing bijection works (Jones 1980 used a logistic form); this one keeps
    floating-point precision further towards +-1 than ``tanh`` (``tanh(20)`` is already 1.0).
    """
    x = np.asarray(x, dtype=float)
    return x / np.sqrt(1.0 + x * x)


def pacf_to_unconstrained(r: Sequence[float] | np.ndarray) -> np.ndarray:
    """Inverse of :func:`unconstrained_to_pacf`: ``r / sqrt(1 - r^2)`` for ``|r| < 1``."""
    r = np.asarray(r, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return r / np.sqrt(1.0 - r * r)


def to_unconstrained(spec: ModelSpec, params: Mapping[str, float]) -> np.ndarray:
    """Unconstrained reals for the coefficients of ``spec``, in ``coefficient_names`` order.

    Each factor (regular AR, seasonal AR, regular MA, seasonal MA) maps separately to its
    partial autocorrelations (:func:`ar_to_pacf`; an MA factor ``1 + b_1 B + ...`` is
    invertible exactly when the AR-form coefficients ``-b`` are stationary) and then to
    reals (:func:`pacf_to_unconstrained`). ``mu`` and the regression coefficients
    ``x_<column>`` pass through unchanged.

    Returns
    -------
    numpy.ndarray
        Non-finite entries appear for a factor outside the stationary or invertible region;
        use :func:`pull_inside` first.
    """
    layout = layout_of(spec)
    out: list[float] = []
    for factor in layout.factors:
        if factor.order:
            coefs = factor.ar_form(factor.values(params))
            out.extend(pacf_to_unconstrained(ar_to_pacf(coefs)).tolist())
    out.extend(float(params.get(name, 0.0)) for name in layout.mean_names)
    out.extend(float(params.get(name, 0.0)) for name in layout.regressor_names)
    return np.array(out, dtype=float)


def from_unconstrained(spec: ModelSpec, x: Sequence[float] | np.ndarray) -> dict[str, float]:
    """Inverse of :func:`to_unconstrained`: canonical coefficients (sigma2 excluded)."""
    layout = layout_of(spec)
    values = np.asarray(x, dtype=float).ravel()
    parts = []
    position = 0
    for factor in layout.factors:
        if factor.order:
            block = values[position : position + factor.order]
            parts.append(factor.ar_form(pacf_to_ar(unconstrained_to_pacf(block))))
            position += factor.order
    parts.append(values[position : position + len(layout.mean_names) + len(layout.regressor_names)])
    return layout.from_vector(np.concatenate(parts))


def pull_inside(
    spec: ModelSpec, params: Mapping[str, float], margin: float = 1e-3
) -> tuple[dict[str, float], bool]:
    """Move each factor into the stationary / invertible region, just inside its boundary.

    A factor whose roots (in ``B``, or in ``B^m`` for a seasonal factor) all lie at modulus
    at least ``1 / (1 - margin)`` is left alone. Otherwise roots inside the unit circle are
    reflected to ``1 / conj(root)`` (for an MA factor this is the invertible representation
    with the same autocorrelations) and roots still closer than ``1 / (1 - margin)`` are
    pushed out radially to that modulus. Used on starting values only.

    Returns
    -------
    (dict, bool)
        The coefficients (sigma2 and mu copied when present) and whether anything moved.
    """
    out = {name: float(value) for name, value in params.items()}
    moved = False
    limit = 1.0 / (1.0 - margin)
    for factor in layout_of(spec).factors:
        if not factor.order:
            continue
        coefs = factor.ar_form(factor.values(params))
        pacf = ar_to_pacf(coefs)
        if np.all(np.abs(pacf) < 1.0 - margin):
            continue
        roots = lag_polynomial_roots(np.concatenate(([1.0], -coefs)))
        roots = np.where(np.abs(roots) < 1.0, 1.0 / np.conj(roots), roots)
        modulus = np.abs(roots)
        roots = np.where(modulus < limit, roots * (limit / modulus), roots)
        fixed = np.real(np.poly(1.0 / roots))  # prod (1 - B / root), ascending in B
        new = np.zeros(factor.order)
        new[: fixed.size - 1] = -fixed[1:]
        if np.array_equal(new, coefs):
            continue  # near the edge by its partial autocorrelations, but no root to move
        out.update(zip(factor.names, factor.ar_form(new).tolist(), strict=True))
        moved = True
    return out, moved
