"""The model specification: what is fitted, independent of any estimator.

A :class:`ModelSpec` names the regular and seasonal orders, the period, whether the mean of
the differenced series is estimated, the transform applied before fitting, and the names of
exogenous columns. It has a text form such as ``ARIMA(0,1,1)x(0,1,1)12 +mean +log`` that
:meth:`ModelSpec.parse` reads back, so a specification can travel through a command line, a
pytest ini file or an audit record without loss.
"""

from __future__ import annotations

import math
import numbers
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from forecastaudit.errors import SpecError

__all__ = ["ModelSpec"]

_ORDER_RE = re.compile(
    r"""^\s*ARIMA\s*\(\s*(?P<p>\d+)\s*,\s*(?P<d>\d+)\s*,\s*(?P<q>\d+)\s*\)
        (?:\s*x\s*\(\s*(?P<P>\d+)\s*,\s*(?P<D>\d+)\s*,\s*(?P<Q>\d+)\s*\)\s*(?P<m>\d+))?
        (?P<rest>.*)$""",
    re.IGNORECASE | re.VERBOSE,
)
_BOXCOX_RE = re.compile(r"^boxcox\(\s*(?P<lam>[-+0-9.eE]+)\s*\)$", re.IGNORECASE)
_EXOG_RE = re.compile(r"^exog\((?P<cols>[^)]*)\)$", re.IGNORECASE)


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
        raise SpecError(f"{what} must be a tuple of three integers, got the text {value!r}.")
    try:
        items = tuple(value)
    except TypeError:
        raise SpecError(f"{what} must be a tuple of three integers, got {value!r}.") from None
    if len(items) != 3:
        raise SpecError(f"{what} must have three entries, got {len(items)}: {value!r}.")
    out = []
    for name, item in zip(("first", "second", "third"), items, strict=True):
        whole = _whole_number(item)
        if whole is None:
            raise SpecError(f"The {name} entry of {what} must be a whole number, got {item!r}.")
        if whole < 0:
            raise SpecError(f"The {name} entry of {what} must not be negative, got {item!r}.")
        out.append(whole)
    return out[0], out[1], out[2]


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
                f"Unknown transform {transform!r}. Use None, 'log', or a Box-Cox transform "
                "written ('boxcox', lambda) or 'boxcox(0.5)'."
            )
        try:
            lam = float(match["lam"])
        except ValueError:
            raise SpecError(
                f"The Box-Cox lambda in {transform!r} is not a number; write e.g. 'boxcox(0.5)'."
            ) from None
    elif isinstance(transform, tuple) and len(transform) == 2 and transform[0] == "boxcox":
        lam = transform[1]
    else:
        raise SpecError(
            f"Unknown transform {transform!r}. Use None, 'log', ('boxcox', lambda) or "
            "'boxcox(0.5)'."
        )
    if (
        isinstance(lam, bool | np.bool_)
        or not isinstance(lam, numbers.Real)
        or not math.isfinite(float(lam))
    ):
        raise SpecError(f"The Box-Cox lambda must be a finite number, got {lam!r}.")
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
    exog : tuple of str
        Names of exogenous regressor columns. Not supported yet: a non-empty tuple raises.

    Examples
    --------
    >>> spec = ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12, transform="log")
    >>> str(spec)
    'ARIMA(0,1,1)x(0,1,1)12 +log'
    >>> ModelSpec.parse(str(spec)) == spec
    True
    """

    order: tuple[int, int, int] = (0, 0, 0)
    seasonal: tuple[int, int, int] = (0, 0, 0)
    period: int | None = None
    mean: bool = False
    transform: str | None = None
    exog: tuple[str, ...] = field(default=())

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "order", _check_order(self.order, "order (p, d, q)"))
        set_(self, "seasonal", _check_order(self.seasonal, "seasonal (P, D, Q)"))
        if self.period is not None:
            period = _whole_number(self.period)
            if period is None:
                raise SpecError(f"period must be a whole number, got {self.period!r}.")
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
            raise SpecError(f"mean must be True or False, got {self.mean!r}.")
        set_(self, "mean", bool(self.mean))
        set_(self, "transform", _normalise_transform(self.transform))
        if isinstance(self.exog, str):
            raise SpecError("exog must be a tuple of column names, not a single string.")
        exog = () if self.exog is None else tuple(self.exog)
        if exog:
            raise SpecError(f"Exogenous regressors {exog} are not supported yet; fit without exog.")
        set_(self, "exog", exog)

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
        """Free coefficients, sigma2 excluded: p + q + P + Q (+1 with a mean)."""
        return self.p + self.q + self.P + self.Q + int(self.mean) + len(self.exog)

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
            ``+mean``, ``+log`` and ``+boxcox(lambda)``, separated by spaces.

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
        match = _ORDER_RE.match(text)
        if not match:
            raise SpecError(
                f"Cannot read the model {text!r}. Write it as ARIMA(p,d,q), optionally "
                "followed by x(P,D,Q)m and markers, e.g. 'ARIMA(0,1,1)x(0,1,1)12 +mean +log'."
            )
        order = (int(match["p"]), int(match["d"]), int(match["q"]))
        seasonal, period = (0, 0, 0), None
        if match["m"] is not None:
            seasonal = (int(match["P"]), int(match["D"]), int(match["Q"]))
            period = int(match["m"])
        mean, transform = False, None
        for token in match["rest"].split():
            if not token.startswith("+"):
                raise SpecError(
                    f"Unexpected {token!r} in model {text!r}: markers start with '+', "
                    "e.g. +mean, +log, +boxcox(0.5)."
                )
            marker = token[1:].lower()
            if marker == "mean":
                mean = True
            elif marker == "log" or _BOXCOX_RE.match(marker):
                if transform is not None:
                    raise SpecError(f"Model {text!r} names more than one transform.")
                transform = marker
            else:
                raise SpecError(
                    f"Unknown marker {token!r} in model {text!r}; known markers are +mean, "
                    "+log and +boxcox(lambda)."
                )
        return cls(order=order, seasonal=seasonal, period=period, mean=mean, transform=transform)

    def to_dict(self) -> dict[str, Any]:
        """A plain dictionary (JSON-ready) with the text form beside the fields."""
        return {
            "text": str(self),
            "order": list(self.order),
            "seasonal": list(self.seasonal),
            "period": self.period,
            "mean": self.mean,
            "transform": self.transform,
            "exog": list(self.exog),
        }

    def with_period(self, period: int | None) -> ModelSpec:
        """A copy with ``period`` set (used when the period comes from the series)."""
        return ModelSpec(
            order=self.order,
            seasonal=self.seasonal,
            period=period,
            mean=self.mean,
            transform=self.transform,
            exog=self.exog,
        )
