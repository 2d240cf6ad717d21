"""The model specification: what is fitted, independent of any estimator.

A :class:`ModelSpec` names the regular and seasonal orders, the period, whether the mean of
the differenced series is estimated, the transform applied before fitting, and the names of
the regressor columns (regression with ARIMA errors). It has a text form such as
``ARIMA(0,1,1)x(0,1,1)12 +mean +x(price,promo) +log`` that :meth:`ModelSpec.parse` reads back,
so a specification can travel through a command line, a pytest ini file or an audit record
without loss.
"""

from __future__ import annotations

import math
import numbers
import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from forecastaudit.errors import SpecError
from forecastaudit.validation import echo

__all__ = ["ModelSpec"]

_ORDER_RE = re.compile(
    r"""^\s*ARIMA\s*\(\s*(?P<p>\d+)\s*,\s*(?P<d>\d+)\s*,\s*(?P<q>\d+)\s*\)
        (?:\s*x\s*\(\s*(?P<P>\d+)\s*,\s*(?P<D>\d+)\s*,\s*(?P<Q>\d+)\s*\)\s*(?P<m>\d*))?
        (?P<rest>.*)$""",
    re.IGNORECASE | re.VERBOSE,
)
#: Longest model text read (characters); a longer one is refused before it is parsed.
MAX_TEXT_CHARS = 1_000
#: Most digits in one order or period of a model text (Python refuses to convert 4,300).
MAX_ORDER_DIGITS = 6
#: Largest Box-Cox lambda (in absolute value) accepted.
MAX_BOXCOX_LAMBDA = 5.0
_BOXCOX_RE = re.compile(r"^boxcox\(\s*(?P<lam>[-+0-9.eE]+)\s*\)$", re.IGNORECASE)
_REGRESSORS_RE = re.compile(r"^x\((?P<cols>[^)]*)\)$", re.IGNORECASE)
#: A regressor column name: it appears in canonical names (``x_<column>``) and in the model
#: text (``+x(price,promo)``), so it keeps to letters, digits, ``_``, ``.`` and ``-``.
_COLUMN_RE = re.compile(r"^[A-Za-z0-9_][A-Za-z0-9_.\-]*$")
_PARENTHESES_RE = re.compile(r"\(([^)]*)\)")


def _whole_number(item: Any) -> int | None:
    """``item`` as an int when it is a finite whole number (numpy scalars included), else None.

    True/False are not numbers here: ``order=(True, 0, 0)`` is a mistake, not an AR(1).
    """
    if isinstance(item, bool | np.bool_):
        return None
    if isinstance(item, numbers.Integral):
        return int(item)
    if isinstance(item, numbers.Real):
        value = float(item)
        if math.isfinite(value) and value == int(value):
            return int(value)
    return None


def _check_order(value: Any, what: str) -> tuple[int, int, int]:
    if isinstance(value, str):
        raise SpecError(f"{what} must be a tuple of three integers, got the text {echo(value)}.")
    if isinstance(value, set | frozenset | dict) or not isinstance(value, Sequence | np.ndarray):
        # A set has no order: {0, 1, 2} could be read as any of six models.
        raise SpecError(
            f"{what} must be a tuple of three integers in that order, e.g. (0, 1, 1); got "
            f"{echo(value)} ({type(value).__name__})."
        )
    items = tuple(value)
    if len(items) != 3:
        raise SpecError(f"{what} must have three entries, got {len(items)}: {echo(value)}.")
    out = []
    for name, item in zip(("first", "second", "third"), items, strict=True):
        whole = _whole_number(item)
        if whole is None:
            raise SpecError(f"The {name} entry of {what} must be a whole number, got {echo(item)}.")
        if whole < 0:
            raise SpecError(f"The {name} entry of {what} must not be negative, got {echo(item)}.")
        if whole >= 10**MAX_ORDER_DIGITS:
            # Python cannot even print an integer of 4,300 digits without a setting.
            digits = f"{len(str(whole)):,}" if whole < 10**4000 else "thousands of"
            raise SpecError(
                f"The {name} entry of {what} has {digits} digits; orders are small whole "
                "numbers, e.g. (0, 1, 1)."
            )
        out.append(whole)
    return out[0], out[1], out[2]


def _check_regressors(value: Any, what: str) -> tuple[str, ...]:
    """The regressor column names as a tuple of distinct, well-formed strings."""
    if value is None:
        return ()
    if isinstance(value, str):
        raise SpecError(
            f"{what} must be a tuple of column names, not a single string: write "
            f"{what}=({value!r},)."
        )
    try:
        names = tuple(value)
    except TypeError:
        raise SpecError(f"{what} must be a tuple of column names, got {value!r}.") from None
    for name in names:
        if not isinstance(name, str) or not _COLUMN_RE.match(name):
            raise SpecError(
                f"Regressor column {name!r} cannot be used: a column name must be text made of "
                "letters, digits, '_', '.' or '-' (it becomes part of the coefficient name "
                "x_<column> and of the model text). Rename the column first."
            )
    duplicated = sorted({name for name in names if names.count(name) > 1})
    if duplicated:
        raise SpecError(f"Regressor columns {duplicated} are named more than once; name each once.")
    return names


def _normalise_transform(transform: Any) -> str | None:
    """Return None, ``"log"`` or ``"boxcox(<lambda>)"`` for any accepted spelling."""
    if transform is None or (isinstance(transform, str) and transform.strip().lower() == "none"):
        return None
    lam: float | None = None
    if isinstance(transform, str):
        text = transform.strip().lower()
        if text == "log":
            return "log"
        match = _BOXCOX_RE.match(text)
        if not match:
            raise SpecError(
                f"Unknown transform {echo(transform)}. Use None, 'log', or a Box-Cox transform "
                "written ('boxcox', lambda) or 'boxcox(0.5)'."
            )
        try:
            lam = float(match["lam"])
        except ValueError:
            raise SpecError(
                f"The Box-Cox lambda in {echo(transform)} is not a number; write e.g. "
                "'boxcox(0.5)'."
            ) from None
    elif isinstance(transform, tuple) and len(transform) == 2 and transform[0] == "boxcox":
        lam = transform[1]
    else:
        raise SpecError(
            f"Unknown transform {echo(transform)}. Use None, 'log', ('boxcox', lambda) or "
            "'boxcox(0.5)'."
        )
    if (
        isinstance(lam, bool | np.bool_)
        or not isinstance(lam, numbers.Real)
        or not math.isfinite(float(lam))
    ):
        raise SpecError(f"The Box-Cox lambda must be a finite number, got {echo(lam)}.")
    if abs(float(lam)) > MAX_BOXCOX_LAMBDA:
        # y ** 400 overflows float64 for any y above 6; lambdas in use lie within about
        # [-2, 2] (common practice, no source).
        raise SpecError(
            f"The Box-Cox lambda {float(lam)!r} is outside [-{MAX_BOXCOX_LAMBDA:g}, "
            f"{MAX_BOXCOX_LAMBDA:g}]: powers that large overflow or lose every digit. Use a "
            "lambda such as 0.5, or 'log'."
        )
    if lam == 0:
        return "log"  # Box-Cox with lambda 0 is the log transform; one spelling for one model.
    return f"boxcox({float(lam)!r})"


@dataclass(frozen=True)
class ModelSpec:
    """A seasonal ARIMA specification in the canonical convention.

    Parameters
    ----------
    order : tuple of int
        ``(p, d, q)``: the regular autoregressive order, the number of regular differences,
        and the regular moving-average order.
    seasonal : tuple of int
        ``(P, D, Q)``: the seasonal autoregressive order, the number of seasonal differences
        (at lag ``period``), and the seasonal moving-average order.
    period : int, optional
        The seasonal period m (12 for monthly data with a yearly cycle). Required when any
        seasonal term is present; may be given without seasonal terms (it is then used only
        for seasonal-naive scaling of accuracy measures). When None, :func:`forecastaudit.pipeline`
        takes it from the series' frequency.
    mean : bool
        Estimate ``mu``, the mean of the differenced series. With no differencing it is the
        level mean; with one regular difference it is the drift per period; with one seasonal
        difference it is m times the drift per period. With two or more differences in all a
        non-zero ``mu`` implies a polynomial trend in levels: allowed, but flagged.
    transform : None, "log", ("boxcox", lambda) or "boxcox(lambda)"
        Transform applied by forecastaudit, once, before any estimator sees the data.
        Box-Cox with lambda 0 is stored as ``"log"``.
    regressors : tuple of str
        Names of the regressor columns, in order (regression with ARIMA errors, on the
        levels: ``y_t = b'x_t + u_t`` with ``u_t`` the seasonal ARIMA process; see
        :mod:`forecastaudit.conventions`). Each adds a coefficient ``x_<column>``. The
        values are passed to the audit as a DataFrame aligned on the series' index.
    exog : tuple of str
        The same as ``regressors`` (the older name, still accepted). After construction both
        fields hold the same tuple.

    Examples
    --------
    >>> spec = ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12, transform="log")
    >>> str(spec)
    'ARIMA(0,1,1)x(0,1,1)12 +log'
    >>> ModelSpec.parse(str(spec)) == spec
    True
    >>> str(ModelSpec(order=(1, 0, 1), mean=True, regressors=("price", "promo")))
    'ARIMA(1,0,1) +mean +x(price,promo)'
    """

    order: tuple[int, int, int] = (0, 0, 0)
    seasonal: tuple[int, int, int] = (0, 0, 0)
    period: int | None = None
    mean: bool = False
    transform: str | None = None
    regressors: tuple[str, ...] = field(default=())
    exog: tuple[str, ...] = field(default=(), repr=False)

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "order", _check_order(self.order, "order (p, d, q)"))
        set_(self, "seasonal", _check_order(self.seasonal, "seasonal (P, D, Q)"))
        if self.period is not None:
            period = _whole_number(self.period)
            if period is None:
                raise SpecError(f"period must be a whole number, got {echo(self.period)}.")
            set_(self, "period", period)
        if any(self.seasonal):
            if self.period is None:
                raise SpecError(
                    f"Seasonal terms {self.seasonal} need a period: pass period=m "
                    "(for example 12 for monthly data), or a series with a regular frequency."
                )
            if self.period < 2:
                raise SpecError(
                    f"Seasonal terms {self.seasonal} need a period of at least 2, got "
                    f"{self.period}. Remove the seasonal terms or give the real period."
                )
        elif self.period is not None and self.period < 1:
            raise SpecError(f"period must be at least 1, got {self.period}.")
        if not isinstance(self.mean, bool | np.bool_):
            raise SpecError(f"mean must be True or False, got {echo(self.mean)}.")
        set_(self, "mean", bool(self.mean))
        set_(self, "transform", _normalise_transform(self.transform))
        regressors = _check_regressors(self.regressors, "regressors")
        exog = _check_regressors(self.exog, "exog")
        if regressors and exog and regressors != exog:
            raise SpecError(
                f"regressors={regressors} and exog={exog} differ; exog is the older name of "
                "regressors, so pass one of them."
            )
        set_(self, "regressors", regressors or exog)
        set_(self, "exog", regressors or exog)

    # ------------------------------------------------------------------ views
    @property
    def p(self) -> int:
        """Regular AR order."""
        return self.order[0]

    @property
    def d(self) -> int:
        """Number of regular differences."""
        return self.order[1]

    @property
    def q(self) -> int:
        """Regular MA order."""
        return self.order[2]

    @property
    def P(self) -> int:  # noqa: N802 - the trade's own letter
        """Seasonal AR order."""
        return self.seasonal[0]

    @property
    def D(self) -> int:  # noqa: N802
        """Number of seasonal differences."""
        return self.seasonal[1]

    @property
    def Q(self) -> int:  # noqa: N802
        """Seasonal MA order."""
        return self.seasonal[2]

    @property
    def m(self) -> int:
        """The seasonal period, or 1 when none is set."""
        return self.period or 1

    @property
    def n_differences(self) -> int:
        """``d + D``: the total number of differences (the degree of the implied trend)."""
        return self.d + self.D

    @property
    def lost_to_differencing(self) -> int:
        """``d + m D``: observations used up by differencing."""
        return self.d + self.m * self.D

    @property
    def boxcox_lambda(self) -> float | None:
        """The Box-Cox lambda (0.0 for log), or None without a transform."""
        if self.transform is None:
            return None
        if self.transform == "log":
            return 0.0
        return float(self.transform[len("boxcox(") : -1])

    @property
    def n_coefficients(self) -> int:
        """Free coefficients, sigma2 excluded: p + q + P + Q (+1 with a mean, +1 a regressor)."""
        return self.p + self.q + self.P + self.Q + int(self.mean) + len(self.regressors)

    def minimum_length(self) -> int:
        """Fewest observations the spec can be estimated from.

        The differenced series must keep more observations than there are free
        parameters (coefficients plus sigma2), with at least one to spare, so that the
        information criteria (AICc in particular) are defined.
        """
        return self.lost_to_differencing + self.n_coefficients + 3

    # ------------------------------------------------------------------ text
    def __str__(self) -> str:
        text = f"ARIMA({self.p},{self.d},{self.q})"
        if any(self.seasonal) or self.period is not None:
            text += f"x({self.P},{self.D},{self.Q}){self.m}"
        if self.mean:
            text += " +mean"
        if self.regressors:
            text += f" +x({','.join(self.regressors)})"
        if self.transform is not None:
            text += f" +{self.transform}"
        return text

    @classmethod
    def parse(cls, text: str) -> ModelSpec:
        """Read a specification from its text form.

        Parameters
        ----------
        text : str
            ``ARIMA(p,d,q)`` optionally followed by ``x(P,D,Q)m``, then any of the markers
            ``+mean``, ``+x(column,column,...)`` (regressors), ``+log`` and
            ``+boxcox(lambda)``, separated by spaces.

        Returns
        -------
        ModelSpec

        Raises
        ------
        SpecError
            When the text does not follow that form.

        Examples
        --------
        >>> ModelSpec.parse("ARIMA(1,0,0) +mean").mean
        True
        """
        if not isinstance(text, str):
            raise SpecError(f"A model text must be a string, got {type(text).__name__}.")
        shown = echo(text)
        if len(text) > MAX_TEXT_CHARS:
            raise SpecError(
                f"The model text has {len(text):,} characters (at most {MAX_TEXT_CHARS:,}): "
                f"{shown}. Write it as ARIMA(p,d,q), optionally followed by x(P,D,Q)m and "
                "markers, e.g. 'ARIMA(0,1,1)x(0,1,1)12 +log'."
            )
        match = _ORDER_RE.match(text)
        if not match:
            raise SpecError(
                f"Cannot read the model {shown}. Write it as ARIMA(p,d,q), optionally "
                "followed by x(P,D,Q)m and markers, e.g. 'ARIMA(0,1,1)x(0,1,1)12 +mean +log'."
            )
        for group in ("p", "d", "q", "P", "D", "Q", "m"):
            digits = match[group]
            if digits is not None and len(digits) > MAX_ORDER_DIGITS:
                raise SpecError(
                    f"The model {shown} has a {len(digits):,}-digit number where an order or "
                    "a period belongs; write orders as small whole numbers, e.g. "
                    "ARIMA(1,1,1)x(0,1,1)12."
                )
        order = (int(match["p"]), int(match["d"]), int(match["q"]))
        seasonal, period = (0, 0, 0), None
        if match["P"] is not None:
            if not match["m"]:
                raise SpecError(
                    f"The seasonal part of the model {shown} has no period: write the period "
                    "right after it, e.g. x(0,1,1)12 for monthly data with a yearly cycle."
                )
            seasonal = (int(match["P"]), int(match["D"]), int(match["Q"]))
            period = int(match["m"])
        mean, transform = False, None
        regressors: tuple[str, ...] = ()
        # Spaces inside parentheses do not split a marker: "+x(price, promo)" is one token.
        rest = _PARENTHESES_RE.sub(lambda m: "(" + "".join(m[1].split()) + ")", match["rest"])
        for token in rest.split():
            if not token.startswith("+"):
                raise SpecError(
                    f"Unexpected {echo(token, 40)} in model {shown}: markers start with '+', "
                    "e.g. +mean, +x(price,promo), +log, +boxcox(0.5)."
                )
            marker = token[1:].lower()
            columns = _REGRESSORS_RE.match(token[1:])
            if marker == "mean":
                mean = True
            elif columns:
                if regressors:
                    raise SpecError(f"Model {shown} has more than one +x(...) marker; use one.")
                regressors = tuple(c for c in columns["cols"].split(",") if c)
                if not regressors:
                    raise SpecError(
                        f"The marker {echo(token, 40)} in model {shown} names no column; write "
                        "e.g. "
                        "+x(price,promo)."
                    )
            elif marker == "log" or _BOXCOX_RE.match(marker):
                if transform is not None:
                    raise SpecError(
                        f"Model {shown} names more than one transform; keep one of them."
                    )
                transform = marker
            else:
                raise SpecError(
                    f"Unknown marker {echo(token, 40)} in model {shown}; known markers are "
                    "+mean, +x(column,...), +log and +boxcox(lambda)."
                )
        return cls(
            order=order,
            seasonal=seasonal,
            period=period,
            mean=mean,
            transform=transform,
            regressors=regressors,
        )

    def to_dict(self) -> dict[str, Any]:
        """A plain dictionary (JSON-ready) with the text form beside the fields."""
        return {
            "text": str(self),
            "order": list(self.order),
            "seasonal": list(self.seasonal),
            "period": self.period,
            "mean": self.mean,
            "transform": self.transform,
            "regressors": list(self.regressors),
            "exog": list(self.regressors),  # the older name, kept for earlier readers
        }

    def with_period(self, period: int | None) -> ModelSpec:
        """A copy with ``period`` set (used when the period comes from the series)."""
        return ModelSpec(
            order=self.order,
            seasonal=self.seasonal,
            period=period,
            mean=self.mean,
            transform=self.transform,
            regressors=self.regressors,
        )
