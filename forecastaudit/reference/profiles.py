"""Likelihood profiles: along the line between two estimates, and on a grid of two coefficients."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from forecastaudit.conventions import difference
from forecastaudit.layout import layout_of
from forecastaudit.reference.fit import _differenced_regressors, _mu_scale, _regression_block
from forecastaudit.reference.likelihood import evaluate
from forecastaudit.spec import ModelSpec


# ====================================================================== profiles
def profile_line(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    params_a: Mapping[str, float],
    params_b: Mapping[str, float],
    n_points: int = 41,
    *,
    t_range: tuple[float, float] = (-0.25, 1.25),
    regressors: np.ndarray | None = None,
) -> pd.DataFrame:
    """The reference likelihood along the straight line from one estimate to another.

    Every parameter (sigma2 included) moves as ``(1 - t) a + t b``; t = 0 is ``params_a``
    and t = 1 is ``params_b``. A flat curve means the data do not tell the two apart; a dip
    between them means two separate optima.

    Parameters
    ----------
    y_transformed, spec
        The series (after the spec's transform, before differencing) and the model, as in
        :func:`~forecastaudit.reference.likelihood.evaluate`.
    params_a, params_b : mapping
        Canonical parameters of the two estimates.
    n_points : int
        Number of positions.
    t_range : (float, float)
        First and last position.
    regressors : numpy.ndarray, optional
        Regressor values, shape ``(n, k)``, when the spec has regressors (their
        coefficients move along the line like every other parameter).

    Returns
    -------
    pandas.DataFrame
        Columns ``t``, ``loglike`` (at the interpolated sigma2), ``profiled_loglike``, and
        one column per canonical parameter. Points outside the stationary region have
        ``-inf``; points where the interpolated sigma2 is not positive have a NaN
        ``loglike``.
    """
    layout = layout_of(spec)
    names = layout.parameter_names
    a = layout.to_vector(params_a, include_sigma2=True)
    b = layout.to_vector(params_b, include_sigma2=True)
    t = np.linspace(t_range[0], t_range[1], int(n_points))
    rows = []
    for position in t:
        point = layout.from_vector((1.0 - position) * a + position * b, include_sigma2=True)
        value = evaluate(y_transformed, spec, point, regressors=regressors)
        rows.append(
            {
                "t": float(position),
                "loglike": value.loglike,
                "profiled_loglike": value.profiled_loglike,
                **point,
            }
        )
    return pd.DataFrame(rows, columns=["t", "loglike", "profiled_loglike", *names])


def profile_grid(
    y_transformed: Sequence[float] | np.ndarray,
    spec: ModelSpec,
    params: Mapping[str, float],
    names: tuple[str, str],
    ranges: tuple[tuple[float, float], tuple[float, float]] | None = None,
    n: int = 31,
    *,
    regressors: np.ndarray | None = None,
) -> dict[str, Any]:
    """The reference likelihood on a grid of two parameters, the others held fixed.

    Parameters
    ----------
    y_transformed, spec
        The series (after the spec's transform, before differencing) and the model, as in
        :func:`~forecastaudit.reference.likelihood.evaluate`.
    params : mapping
        Canonical parameters; all but the two named stay at these values.
    names : (str, str)
        The two canonical names on the grid's x and y axes.
    ranges : ((float, float), (float, float)), optional
        Lower and upper ends of each axis. By default (common practice, no source): +-0.2
        around an AR/MA coefficient, +-4 naive standard errors ``std(w)/sqrt(n_w)`` around
        ``mu`` (``std(w)/(std(Delta x) sqrt(n_w))`` around a regression coefficient), and 0.7
        to 1.4 times ``sigma2``.
    n : int
        Points per axis.
    regressors : numpy.ndarray, optional
        Regressor values, shape ``(n, k)``, when the spec has regressors.

    Returns
    -------
    dict
        ``names`` (the pair), ``x`` and ``y`` (axis values, 1-D arrays), ``loglike`` and
        ``profiled_loglike`` (2-D arrays, shape ``(len(y), len(x))``, row i at ``y[i]``).
        ``profiled_loglike`` concentrates sigma2 out and does not move with a sigma2 axis.
    """
    all_names = list(layout_of(spec).parameter_names)
    for name in names:
        if name not in all_names:
            raise ValueError(f"{name!r} is not a parameter of {spec}; choose from {all_names}.")
    w = difference(np.asarray(y_transformed, dtype=float).ravel(), spec)
    if ranges is None:
        block = _regression_block(spec, w, _differenced_regressors(spec, regressors, w.size))
        scales = dict(zip(block.names, block.scale.tolist(), strict=True))
        ranges = (
            _default_range(names[0], float(params[names[0]]), w, scales.get(names[0])),
            _default_range(names[1], float(params[names[1]]), w, scales.get(names[1])),
        )
    x = np.linspace(ranges[0][0], ranges[0][1], int(n))
    y = np.linspace(ranges[1][0], ranges[1][1], int(n))
    loglike = np.empty((y.size, x.size))
    profiled = np.empty((y.size, x.size))
    base = {name: float(params[name]) for name in all_names}
    for i, y_value in enumerate(y):
        for j, x_value in enumerate(x):
            point = {**base, names[0]: float(x_value), names[1]: float(y_value)}
            value = evaluate(y_transformed, spec, point, regressors=regressors)
            loglike[i, j], profiled[i, j] = value.loglike, value.profiled_loglike
    return {"names": tuple(names), "x": x, "y": y, "loglike": loglike, "profiled_loglike": profiled}


def _default_range(
    name: str, value: float, w: np.ndarray, scale: float | None = None
) -> tuple[float, float]:
    if name == "sigma2":
        return 0.7 * value, 1.4 * value
    if name == "mu" or scale is not None:
        half = 4.0 * (_mu_scale(w) if scale is None else scale) / math.sqrt(max(w.size, 1))
        return value - half, value + half
    return value - 0.2, value + 0.2
