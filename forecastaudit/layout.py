"""The parameter layout of a model: the one owner of the canonical parameter vector.

For a :class:`~forecastaudit.spec.ModelSpec` the layout knows the canonical names in their
order, which names form which lag-polynomial factor (regular AR, seasonal AR, regular MA,
seasonal MA) with its sign and lag step, how the factors multiply out, where their roots
lie, and whether the model is stationary and invertible. No other module builds a name such
as ``sar_lag24`` or walks the coefficients by hand; they ask :func:`layout_of`.

In the canonical convention::

    phi(B)   = 1 - ar_lag1 B - ... - ar_lagp B^p        Phi(B^m)   = 1 - sar_lag{m} B^m - ...
    theta(B) = 1 + ma_lag1 B + ... + ma_lagq B^q        Theta(B^m) = 1 + sma_lag{m} B^m + ...

The names, in vector order, are the regular AR terms, the seasonal AR terms, the regular MA
terms, the seasonal MA terms, ``mu`` (with a mean), the regressor coefficients
``x_<column>``, and last ``sigma2``.

This module is at the foundation level: it imports only numpy, :mod:`forecastaudit.spec`
and :mod:`forecastaudit.errors`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property, lru_cache
from types import MappingProxyType
from typing import Literal

import numpy as np

from forecastaudit.spec import ModelSpec

__all__ = [
    "BLOCKS",
    "Factor",
    "ParameterLayout",
    "is_stationary_polynomial",
    "lag_polynomial_root_moduli",
    "lag_polynomial_roots",
    "layout_of",
    "polynomial_roots",
]

#: Block keys of :meth:`ParameterLayout.split`, in vector order (``"sigma2"`` comes last
#: when present).
BLOCKS: tuple[str, ...] = ("ar", "sar", "ma", "sma", "mu", "x")

_EPS = float(np.finfo(float).eps)
_TINY = float(np.finfo(float).tiny)


# ====================================================================== roots
def lag_polynomial_roots(poly: Sequence[float] | np.ndarray) -> np.ndarray:
    """Roots of a lag polynomial ``c_0 + c_1 z + ... + c_k z^k`` (coefficients ascending).

    The one root routine of forecastaudit. Trailing coefficients that are zero or
    negligible are dropped first: a coefficient is negligible when its magnitude is at most
    the machine epsilon times the largest magnitude, or below the smallest normal float.
    On the closed unit disk such a term is smaller than the rounding of the largest term,
    so it moves no root that decides stationarity or invertibility; kept, it makes
    ``numpy.roots`` divide by a subnormal number (``1e-310``) and fail.

    Parameters
    ----------
    poly : array_like
        Coefficients of ``z^0, z^1, ...``; for a factor of the model, ``z`` is ``B`` or, for
        a seasonal factor in its own variable, ``B^m``.

    Returns
    -------
    numpy.ndarray
        The roots, as ``numpy.roots`` gives them (real or complex). Empty (complex) for a
        constant polynomial. All NaN, one per nominal degree, when a coefficient is not
        finite or the eigenvalue computation fails. Never raises.
    """
    values = np.asarray(poly, dtype=float).ravel()
    if values.size and not np.all(np.isfinite(values)):
        return np.full(values.size - 1, complex(math.nan, math.nan))
    magnitude = np.abs(values)
    largest = float(magnitude.max()) if values.size else 0.0
    kept = np.flatnonzero(magnitude > max(_EPS * largest, _TINY))
    trimmed = values[: kept[-1] + 1] if kept.size else values[:0]
    if trimmed.size <= 1:
        return np.empty(0, dtype=complex)
    try:
        return np.roots(trimmed[::-1])  # numpy.roots wants the highest power first
    except (np.linalg.LinAlgError, ValueError, FloatingPointError):
        return np.full(trimmed.size - 1, complex(math.nan, math.nan))


def lag_polynomial_root_moduli(poly: Sequence[float] | np.ndarray) -> np.ndarray:
    """Moduli of the roots of a lag polynomial; see :func:`lag_polynomial_roots`.

    Stationarity (AR) and invertibility (MA) need every modulus above 1. A constant
    polynomial gives an empty array.
    """
    return np.abs(lag_polynomial_roots(poly))


def is_stationary_polynomial(ar: Sequence[float] | np.ndarray) -> bool:
    """Whether ``1 - a_1 z - ... - a_k z^k`` has every root outside the unit circle.

    The step-down (Schur-Cohn) recursion: ``r_k = a_k`` must satisfy ``|r_k| < 1`` and
    ``a_j <- (a_j + r_k a_{k-j}) / (1 - r_k^2)`` gives the polynomial of degree ``k - 1``;
    the same recursion as the partial autocorrelations of
    :func:`forecastaudit.reference.parameterisation.ar_to_pacf`. It needs no roots, so it
    is exact on the boundary (a unit root is not stationary) and unaffected by subnormal
    coefficients.

    Parameters
    ----------
    ar : array_like
        ``a_1 .. a_k`` in AR form. An MA factor ``1 + b_1 z + ...`` is invertible exactly
        when ``-b`` passes (see :meth:`Factor.ar_form`).

    Returns
    -------
    bool
        False as well when a coefficient is NaN or infinite.
    """
    values = np.asarray(ar, dtype=float).ravel()
    if values.size > 8:  # vectorised for the long expanded polynomials
        a = values.copy()
        while a.size:
            value = a[-1]
            if not abs(value) < 1.0:  # also catches NaN
                return False
            a = (a[:-1] + value * a[-2::-1]) / (1.0 - value * value)
        return True
    # Plain Python floats: faster than numpy for the short factors of a spec.
    b = [float(v) for v in values]
    while b:
        value = b[-1]
        if not abs(value) < 1.0:  # also catches NaN
            return False
        scale = 1.0 - value * value
        b = [(b[j] + value * b[-2 - j]) / scale for j in range(len(b) - 1)]
    return True


# ====================================================================== factors
@dataclass(frozen=True)
class Factor:
    """One lag-polynomial factor of the model and the canonical names of its coefficients.

    The factor is ``1 + sign * (c_1 B^step + c_2 B^(2 step) + ...)`` with ``c_i`` the values
    of ``names`` in order.

    Attributes
    ----------
    kind : {"ar", "ma"}
        Autoregressive or moving-average.
    seasonal : bool
        Whether the factor is in ``B^m`` (seasonal) or in ``B`` (regular).
    names : tuple of str
        Canonical names of its coefficients, lowest lag first; empty when the spec has no
        such terms.
    step : int
        Lag between consecutive terms: 1, or the period m for a seasonal factor.
    sign : {-1, 1}
        -1 for AR (``phi(B) = 1 - ar_lag1 B - ...``), +1 for MA (``theta(B) = 1 + ma_lag1 B
        + ...``).
    """

    kind: Literal["ar", "ma"]
    seasonal: bool
    names: tuple[str, ...]
    step: int
    sign: int

    @property
    def key(self) -> str:
        """Short key: ``"ar"``, ``"sar"``, ``"ma"`` or ``"sma"``."""
        return ("s" if self.seasonal else "") + self.kind

    @property
    def order(self) -> int:
        """Number of coefficients (p, P, q or Q)."""
        return len(self.names)

    @property
    def lags(self) -> tuple[int, ...]:
        """The lags in ``B`` of the coefficients: ``step, 2 step, ...``."""
        return tuple(self.step * i for i in range(1, self.order + 1))

    @property
    def description(self) -> str:
        """Words for a reader: ``"regular AR"``, ``"seasonal MA"`` ..."""
        return f"{'seasonal' if self.seasonal else 'regular'} {self.kind.upper()}"

    @property
    def region(self) -> str:
        """The region its roots must keep to: ``"stationary"`` (AR) or ``"invertible"`` (MA)."""
        return "stationary" if self.kind == "ar" else "invertible"

    def values(self, params: Mapping[str, float]) -> np.ndarray:
        """The coefficients ``c_1 .. c_k`` read from canonical ``params`` (KeyError if absent)."""
        return np.array([float(params[name]) for name in self.names], dtype=float)

    def ar_form(self, values: Sequence[float] | np.ndarray) -> np.ndarray:
        """The factor's coefficients in AR form: ``a`` with factor ``1 - a_1 z - ...``.

        The values themselves for an AR factor, their negatives for an MA one. The map is its
        own inverse, so it also turns AR-form coefficients back into values.
        """
        return -self.sign * np.asarray(values, dtype=float)

    def reduced_polynomial(self, values: Sequence[float] | np.ndarray) -> np.ndarray:
        """The factor in its own variable (``B``, or ``B^m`` when seasonal), ascending."""
        return np.concatenate(([1.0], self.sign * np.asarray(values, dtype=float)))

    def lag_polynomial(self, values: Sequence[float] | np.ndarray) -> np.ndarray:
        """The factor as coefficients of ``B^0, B^1, ...`` (zeros between seasonal lags)."""
        coefs = np.asarray(values, dtype=float)
        poly = np.zeros(coefs.size * self.step + 1)
        poly[0] = 1.0
        if coefs.size:
            poly[self.step :: self.step] = coefs if self.sign > 0 else -coefs
        return poly


# ====================================================================== layout
@dataclass(frozen=True)
class ParameterLayout:
    """Names, blocks, polynomials and roots of the canonical parameters of one model.

    Prefer :func:`layout_of`, which builds each layout once.

    Parameters
    ----------
    spec : ModelSpec
        The model; its orders and period fix the factor blocks and ``spec.mean`` whether
        ``mu`` is a parameter.
    regressors : tuple of str
        Regressor columns, in order; each adds a coefficient ``x_<column>`` after ``mu``.
        :func:`layout_of` passes ``spec.regressors``.

    Attributes
    ----------
    factors : tuple of Factor
        Regular AR, seasonal AR, regular MA, seasonal MA, always all four (a factor with no
        terms has empty ``names``).
    coefficient_names : tuple of str
        The free coefficients in vector order (sigma2 excluded).
    parameter_names : tuple of str
        ``coefficient_names`` then ``"sigma2"``.
    """

    spec: ModelSpec
    regressors: tuple[str, ...] = ()
    factors: tuple[Factor, ...] = field(init=False, repr=False)
    coefficient_names: tuple[str, ...] = field(init=False, repr=False)
    parameter_names: tuple[str, ...] = field(init=False, repr=False)

    def __post_init__(self) -> None:
        spec = self.spec
        if isinstance(self.regressors, str):
            raise TypeError("regressors must be a tuple of column names, not a single string.")
        set_ = object.__setattr__
        set_(self, "regressors", tuple(str(column) for column in self.regressors))
        m = spec.m
        factors = (
            Factor("ar", False, tuple(f"ar_lag{i}" for i in range(1, spec.p + 1)), 1, -1),
            Factor("ar", True, tuple(f"sar_lag{i * m}" for i in range(1, spec.P + 1)), m, -1),
            Factor("ma", False, tuple(f"ma_lag{j}" for j in range(1, spec.q + 1)), 1, 1),
            Factor("ma", True, tuple(f"sma_lag{j * m}" for j in range(1, spec.Q + 1)), m, 1),
        )
        names = (
            *(name for factor in factors for name in factor.names),
            *self.mean_names,
            *self.regressor_names,
        )
        set_(self, "factors", factors)
        set_(self, "coefficient_names", names)
        set_(self, "parameter_names", (*names, "sigma2"))

    # ------------------------------------------------------------------ names
    @cached_property
    def mean_names(self) -> tuple[str, ...]:
        """``("mu",)`` when the spec estimates a mean, else empty."""
        return ("mu",) if self.spec.mean else ()

    @cached_property
    def regressor_names(self) -> tuple[str, ...]:
        """``x_<column>`` for each regressor, in order."""
        return tuple(f"x_{column}" for column in self.regressors)

    @cached_property
    def block_names(self) -> Mapping[str, tuple[str, ...]]:
        """The names in each block of :meth:`split`, by block key (:data:`BLOCKS` order)."""
        blocks = {factor.key: factor.names for factor in self.factors}
        blocks["mu"] = self.mean_names
        blocks["x"] = self.regressor_names
        return MappingProxyType(blocks)  # read-only: layouts are shared through the cache

    @property
    def n_coefficients(self) -> int:
        """Number of free coefficients (sigma2 excluded)."""
        return len(self.coefficient_names)

    @property
    def ar_degree(self) -> int:
        """Degree of the expanded AR polynomial ``phi(B) Phi(B^m)``: ``p + m P``."""
        return sum(factor.order * factor.step for factor in self.ar_factors)

    @property
    def ma_degree(self) -> int:
        """Degree of the expanded MA polynomial ``theta(B) Theta(B^m)``: ``q + m Q``."""
        return sum(factor.order * factor.step for factor in self.ma_factors)

    def names(self, *, include_sigma2: bool = False) -> tuple[str, ...]:
        """The names of the vector form: coefficients, and ``sigma2`` when asked."""
        return self.parameter_names if include_sigma2 else self.coefficient_names

    def factor(self, key: str) -> Factor:
        """The factor with key ``"ar"``, ``"sar"``, ``"ma"`` or ``"sma"``."""
        for factor in self.factors:
            if factor.key == key:
                return factor
        raise KeyError(f"No factor {key!r}; the factors are 'ar', 'sar', 'ma' and 'sma'.")

    @cached_property
    def ar_factors(self) -> tuple[Factor, ...]:
        """The regular and seasonal AR factors."""
        return tuple(factor for factor in self.factors if factor.kind == "ar")

    @cached_property
    def ma_factors(self) -> tuple[Factor, ...]:
        """The regular and seasonal MA factors."""
        return tuple(factor for factor in self.factors if factor.kind == "ma")

    # ------------------------------------------------------------------ blocks
    def split(self, params: Mapping[str, float]) -> dict[str, np.ndarray]:
        """The canonical parameters as one float array per block.

        Parameters
        ----------
        params : mapping
            Canonical name to value; every coefficient of the layout must be present.

        Returns
        -------
        dict
            Keys :data:`BLOCKS` (``"ar"``, ``"sar"``, ``"ma"``, ``"sma"``, ``"mu"``, ``"x"``),
            each array in the block's name order and possibly empty, then ``"sigma2"`` (one
            value) when ``params`` holds it. Other entries of ``params`` are ignored.

        Raises
        ------
        KeyError
            When a coefficient of the layout is missing.
        """
        missing = [name for name in self.coefficient_names if name not in params]
        if missing:
            raise KeyError(f"Parameters {missing} of {self.spec} are missing.")
        out = {
            key: np.array([float(params[name]) for name in names], dtype=float)
            for key, names in self.block_names.items()
        }
        if "sigma2" in params:
            out["sigma2"] = np.array([float(params["sigma2"])])
        return out

    def join(self, blocks: Mapping[str, Sequence[float] | np.ndarray]) -> dict[str, float]:
        """Inverse of :meth:`split`: canonical parameters in vector order.

        Parameters
        ----------
        blocks : mapping
            Block key to values. A block of the layout with no names may be left out;
            ``"sigma2"`` is optional (one value) and comes last in the result.

        Raises
        ------
        ValueError
            When a block key is unknown, a non-empty block is missing, or a block has the
            wrong number of values.
        """
        expected = self.block_names
        unknown = [key for key in blocks if key not in expected and key != "sigma2"]
        if unknown:
            raise ValueError(f"Unknown blocks {unknown}; the blocks are {[*BLOCKS, 'sigma2']}.")
        out: dict[str, float] = {}
        for key, names in (*expected.items(), ("sigma2", ("sigma2",))):
            if key not in blocks:
                if names and key != "sigma2":
                    raise ValueError(f"Block {key!r} ({', '.join(names)}) is missing.")
                continue
            values = np.asarray(blocks[key], dtype=float).ravel()
            if values.size != len(names):
                raise ValueError(
                    f"Block {key!r} of {self.spec} needs {len(names)} values "
                    f"({', '.join(names) or 'none'}), got {values.size}."
                )
            out.update(zip(names, values.tolist(), strict=True))
        return out

    def to_vector(self, params: Mapping[str, float], *, include_sigma2: bool = False) -> np.ndarray:
        """The values of ``params`` as one float vector in name order (KeyError if absent)."""
        return np.array(
            [float(params[name]) for name in self.names(include_sigma2=include_sigma2)],
            dtype=float,
        )

    def from_vector(
        self, x: Sequence[float] | np.ndarray, *, include_sigma2: bool = False
    ) -> dict[str, float]:
        """Inverse of :meth:`to_vector`: canonical name to value, in name order.

        Raises
        ------
        ValueError
            When ``x`` does not have one value per name.
        """
        names = self.names(include_sigma2=include_sigma2)
        values = np.asarray(x, dtype=float).ravel()
        if values.size != len(names):
            raise ValueError(
                f"{self.spec} has {len(names)} values in this vector form ({', '.join(names)}), "
                f"got {values.size}."
            )
        return dict(zip(names, values.tolist(), strict=True))

    # ------------------------------------------------------------------ polynomials
    def factor_polynomials(self, params: Mapping[str, float]) -> dict[str, np.ndarray]:
        """Each factor as coefficients of ``B^0, B^1, ...``, by factor key."""
        return {f.key: f.lag_polynomial(f.values(params)) for f in self.factors}

    def ar_polynomial(self, params: Mapping[str, float]) -> np.ndarray:
        """Expanded AR polynomial ``phi(B) Phi(B^m)`` as coefficients of B^0, B^1, ...

        The first entry is 1 and the others carry the convention's minus sign: for an AR(1)
        with ``ar_lag1 = 0.6`` it is ``[1, -0.6]``.
        """
        regular, seasonal = self.ar_factors
        return np.convolve(
            regular.lag_polynomial(regular.values(params)),
            seasonal.lag_polynomial(seasonal.values(params)),
        )

    def ma_polynomial(self, params: Mapping[str, float]) -> np.ndarray:
        """Expanded MA polynomial ``theta(B) Theta(B^m)`` as coefficients of B^0, B^1, ..."""
        regular, seasonal = self.ma_factors
        return np.convolve(
            regular.lag_polynomial(regular.values(params)),
            seasonal.lag_polynomial(seasonal.values(params)),
        )

    def expanded_coefficients(self, params: Mapping[str, float]) -> tuple[np.ndarray, np.ndarray]:
        """The expanded polynomials without their leading 1, as the likelihood takes them.

        Returns
        -------
        (numpy.ndarray, numpy.ndarray)
            ``a`` with ``phi(B)Phi(B^m) = 1 - a_1 B - ...`` and ``b`` with
            ``theta(B)Theta(B^m) = 1 + b_1 B + ...``.
        """
        return -self.ar_polynomial(params)[1:], self.ma_polynomial(params)[1:]

    # ------------------------------------------------------------------ roots
    def roots(self, params: Mapping[str, float]) -> dict[str, np.ndarray]:
        """Roots of each factor in its own variable (``B``, or ``B^m`` when seasonal).

        Returns
        -------
        dict
            ``{"ar": ..., "sar": ..., "ma": ..., "sma": ...}``; empty arrays for factors with
            no terms (or only negligible ones). See :func:`lag_polynomial_roots`.
        """
        return {
            f.key: lag_polynomial_roots(f.reduced_polynomial(f.values(params)))
            for f in self.factors
        }

    def root_moduli(self, params: Mapping[str, float]) -> dict[str, np.ndarray]:
        """Moduli of the roots of each factor, by factor key (see :meth:`roots`)."""
        return {key: np.abs(roots) for key, roots in self.roots(params).items()}

    def min_root_modulus(self, params: Mapping[str, float]) -> dict[str, float]:
        """The smallest root modulus of each factor: below 1 + margin is near the boundary.

        Infinite for a factor without roots; NaN when its coefficients are not finite.
        """
        return {
            key: float(np.min(moduli)) if moduli.size else math.inf
            for key, moduli in self.root_moduli(params).items()
        }

    # ------------------------------------------------------------------ regions
    def is_stationary(self, params: Mapping[str, float]) -> bool:
        """Whether every AR factor is stationary (step-down test, factor by factor)."""
        return all(is_stationary_polynomial(f.ar_form(f.values(params))) for f in self.ar_factors)

    def is_invertible(self, params: Mapping[str, float]) -> bool:
        """Whether every MA factor is invertible (step-down test, factor by factor)."""
        return all(is_stationary_polynomial(f.ar_form(f.values(params))) for f in self.ma_factors)


# ====================================================================== access
@lru_cache(maxsize=256)
def _cached_layout(spec: ModelSpec) -> ParameterLayout:
    return ParameterLayout(spec, regressors=spec.regressors)


def layout_of(spec: ModelSpec) -> ParameterLayout:
    """The parameter layout of ``spec`` (regressors from ``spec.regressors``), built once per spec.

    A :class:`ModelSpec` is a frozen dataclass, so equal specs share one cached layout; an
    unhashable stand-in is laid out afresh on every call.
    """
    try:
        return _cached_layout(spec)
    except TypeError:  # lru_cache could not hash the spec
        return ParameterLayout(spec, regressors=tuple(spec.regressors))


def polynomial_roots(spec: ModelSpec, params: Mapping[str, float]) -> dict[str, np.ndarray]:
    """Roots of each factor: regular AR and MA in B, seasonal AR and MA in B^m.

    Shorthand for ``layout_of(spec).roots(params)``.

    Returns
    -------
    dict
        ``{"ar": ..., "sar": ..., "ma": ..., "sma": ...}``, roots of each factor in its own
        variable. Stationarity and invertibility need every modulus above 1.
    """
    return layout_of(spec).roots(params)
