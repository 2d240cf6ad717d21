"""Stationary and invertible parameterisation through partial autocorrelations.

Jones (1980), Technometrics 22; Monahan (1984), Biometrika 71: any unconstrained vector maps
to a stationary (invertible) factor and back.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from forecastaudit.conventions import (
    coefficient_names,
)
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


def _is_stationary(ar: np.ndarray) -> bool:
    """Step-down (Schur-Cohn) test; plain Python floats for the short factors of a spec."""
    if ar.size > 8:
        return bool(np.all(np.abs(ar_to_pacf(ar)) < 1.0))  # NaN compares False
    a = [float(v) for v in ar]
    while a:
        value = a[-1]
        if not abs(value) < 1.0:  # also catches NaN
            return False
        scale = 1.0 - value * value
        a = [(a[j] + value * a[-2 - j]) / scale for j in range(len(a) - 1)]
    return True


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


def _factors(spec: ModelSpec) -> list[tuple[list[str], float]]:
    """The four lag-polynomial factors: their canonical names and the sign turning them into
    AR form (``1 - sum c_i B^i``): +1 for AR factors, -1 for MA ones (our MA sign is plus)."""
    m = spec.m
    return [
        ([f"ar_lag{i}" for i in range(1, spec.p + 1)], 1.0),
        ([f"sar_lag{i * m}" for i in range(1, spec.P + 1)], 1.0),
        ([f"ma_lag{j}" for j in range(1, spec.q + 1)], -1.0),
        ([f"sma_lag{j * m}" for j in range(1, spec.Q + 1)], -1.0),
    ]


def to_unconstrained(spec: ModelSpec, params: Mapping[str, float]) -> np.ndarray:
    """Unconstrained reals for the coefficients of ``spec``, in ``coefficient_names`` order.

    Each factor (regular AR, seasonal AR, regular MA, seasonal MA) maps separately to its
    partial autocorrelations (:func:`ar_to_pacf`; an MA factor ``1 + b_1 B + ...`` is
    invertible exactly when the AR-form coefficients ``-b`` are stationary) and then to
    reals (:func:`pacf_to_unconstrained`). ``mu`` passes through unchanged.

    Returns
    -------
    numpy.ndarray
        Non-finite entries appear for a factor outside the stationary or invertible region;
        use :func:`pull_inside` first.
    """
    out: list[float] = []
    for names, sign in _factors(spec):
        if names:
            coefs = sign * np.array([float(params[name]) for name in names])
            out.extend(pacf_to_unconstrained(ar_to_pacf(coefs)).tolist())
    if spec.mean:
        out.append(float(params.get("mu", 0.0)))
    return np.array(out, dtype=float)


def from_unconstrained(spec: ModelSpec, x: Sequence[float] | np.ndarray) -> dict[str, float]:
    """Inverse of :func:`to_unconstrained`: canonical coefficients (sigma2 excluded)."""
    values = np.asarray(x, dtype=float).ravel()
    out: dict[str, float] = {}
    position = 0
    for names, sign in _factors(spec):
        if names:
            block = values[position : position + len(names)]
            coefs = sign * pacf_to_ar(unconstrained_to_pacf(block))
            out.update(zip(names, coefs.tolist(), strict=True))
            position += len(names)
    if spec.mean:
        out["mu"] = float(values[position])
    return {name: out[name] for name in coefficient_names(spec)}


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
    for names, sign in _factors(spec):
        if not names:
            continue
        coefs = sign * np.array([float(params[name]) for name in names])
        pacf = ar_to_pacf(coefs)
        if np.all(np.abs(pacf) < 1.0 - margin):
            continue
        poly = np.trim_zeros(np.concatenate(([1.0], -coefs)), "b")
        roots = np.roots(poly[::-1])
        roots = np.where(np.abs(roots) < 1.0, 1.0 / np.conj(roots), roots)
        modulus = np.abs(roots)
        roots = np.where(modulus < limit, roots * (limit / modulus), roots)
        fixed = np.real(np.poly(1.0 / roots))  # prod (1 - B / root), ascending in B
        new = np.zeros(len(names))
        new[: fixed.size - 1] = -fixed[1:]
        if np.array_equal(new, coefs):
            continue  # near the edge by its partial autocorrelations, but no root to move
        out.update(zip(names, (sign * new).tolist(), strict=True))
        moved = True
    return out, moved
