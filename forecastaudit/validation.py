"""Checkers for arguments, shared by the Python API, the command line, panels and the plugin.

One checker per kind of argument, so every entry point gives the same message for the same
mistake: whole numbers (numpy integers accepted, True/False and fractions refused),
interval levels, and the limits on work and memory. :func:`echo` shows a caller's value in
a message: shortened, and with terminal control characters escaped, so a hostile column
name or a 1 MB model text cannot flood or repaint the terminal.
"""

from __future__ import annotations

import math
import numbers
import os
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, fields, replace
from typing import Any

import numpy as np

from forecastaudit.errors import ForecastAuditError, SpecError

__all__ = [
    "Limits",
    "check_levels",
    "current_limits",
    "echo",
    "level_label",
    "limits_changed",
    "plain",
    "set_limits",
    "whole_number",
]

#: Longest echo of a caller's value in a message (characters).
ECHO_CHARS = 80


def plain(text: Any, limit: int = ECHO_CHARS) -> str:
    """``text`` as a string fit to print inside a message.

    Control characters (terminal escape sequences among them) are written as escapes
    (``\\x1b``), and a text longer than ``limit`` is cut, saying how long it was.
    """
    text = str(text)
    out = []
    for char in text[: limit + 1]:
        code = ord(char)
        if code < 0x20 or 0x7F <= code < 0xA0 or char in "\u2028\u2029":
            out.append(char.encode("unicode_escape").decode("ascii"))
        else:
            out.append(char)
    shown = "".join(out)
    if len(text) > limit:
        shown = f"{shown[:limit]}... ({len(text):,} characters)"
    return shown


def echo(value: Any, limit: int = ECHO_CHARS) -> str:
    """A short, safe ``repr`` of ``value`` for a message (see :func:`plain`)."""
    if isinstance(value, str) and len(value) > limit:
        return f"{plain(repr(value[:limit]), limit + 20)}... ({len(value):,} characters)"
    try:
        text = repr(value)
    except Exception:  # a hostile __repr__ must not hide the real error
        text = f"<{type(value).__name__}>"
    return plain(text, limit)


def whole_number(
    value: Any,
    what: str,
    *,
    minimum: int | None = None,
    error: type[ForecastAuditError] = SpecError,
    example: str = "",
) -> int:
    """``value`` as an int when it is a whole number (Python or numpy integer).

    True/False and fractions (1.7, also 12.0 as a float) are refused rather than coerced:
    ``min_independent_engines=1.7`` must not silently become 1.

    Raises
    ------
    ForecastAuditError
        Of type ``error``, naming ``what``, the value and what to pass instead.
    """
    hint = f" (e.g. {example})" if example else ""
    wanted = (
        "a positive whole number"
        if minimum == 1
        else "a whole number"
        if minimum is None
        else f"a whole number >= {minimum}"
    )
    if isinstance(value, bool | np.bool_) or not isinstance(value, numbers.Integral):
        kind = "True/False" if isinstance(value, bool | np.bool_) else type(value).__name__
        raise error(f"{what} must be {wanted}{hint}, got {echo(value)} ({kind}).")
    number = int(value)
    if minimum is not None and number < minimum:
        raise error(f"{what} must be {wanted}{hint}, got {number}.")
    return number


def level_label(level: float) -> str:
    """How an interval level is written in tables, records and column names (``"95"``)."""
    return f"{float(level):g}"


def check_levels(levels: Any) -> tuple[float, ...]:
    """Interval levels in percent, sorted, each above 1 and below 100.

    A level of 1 or less is refused as a probable fraction (0.95 meant as 95%). True/False
    are refused (``(True,)`` is not a 1% interval), and so are two levels that
    would be written alike (``95`` and ``95.0000001``), since they would overwrite each
    other in the record's keys and the report's columns.
    """
    if isinstance(levels, str | bytes) or not _iterable(levels):
        raise SpecError(
            f"levels must be a sequence of numbers in percent, e.g. (80, 95); got {echo(levels)}."
        )
    values: list[float] = []
    for item in levels:
        if isinstance(item, bool | np.bool_) or not isinstance(item, numbers.Real):
            raise SpecError(
                f"levels must be numbers in percent, e.g. (80, 95); got {echo(item)} in "
                f"{echo(levels)}."
            )
        value = float(item)
        if not math.isfinite(value) or not 0 < value < 100:
            raise SpecError(
                f"levels must lie strictly between 0 and 100 (percent); got {echo(levels)}."
            )
        if value <= 1.0:
            # 0.95 is a 95% interval written as a fraction far more often than a 0.95% one.
            hint = f"; for {100 * value:g}% give {100 * value:g}" if value < 1.0 else ""
            raise SpecError(
                f"levels are in percent, and {value:g} would be a {value:g}% interval{hint} "
                "(levels must exceed 1 and stay below 100)."
            )
        values.append(value)
    if not values:
        raise SpecError("levels is empty; give at least one level in percent, e.g. (80, 95).")
    unique = sorted(set(values))
    labels: dict[str, float] = {}
    for value in unique:
        label = level_label(value)
        if label in labels:
            raise SpecError(
                f"The levels {labels[label]!r} and {value!r} are both written {label}% in the "
                "record and the report, so one would overwrite the other; give levels that "
                "differ in their first six significant digits."
            )
        labels[label] = value
    return tuple(unique)


def _iterable(value: Any) -> bool:
    try:
        iter(value)
    except TypeError:
        return False
    return True


# ====================================================================== limits on work
_ENV = "FORECASTAUDIT_MAX_"


@dataclass(frozen=True)
class Limits:
    """Caps on the work and memory one audit may ask for.

    Each cap protects against a request that would allocate far more memory than a
    machine has (the reference forecast holds an (n + horizon)-square covariance matrix;
    a seasonal period m puts polynomials of degree m P and m Q, and state vectors of that
    size in the libraries, into every fit). The defaults are generous for business series
    (common practice, no source: weekly-in-hours is 168, daily-in-a-year 366).

    Change them for a session with :func:`set_limits` (or :func:`limits_changed` for a
    block), or before the process starts with the environment variables
    ``FORECASTAUDIT_MAX_HORIZON``, ``FORECASTAUDIT_MAX_PERIOD``,
    ``FORECASTAUDIT_MAX_OBSERVATIONS`` and ``FORECASTAUDIT_MAX_LAGS`` (these reach the
    command line and the plugin too).

    Attributes
    ----------
    horizon : int
        Most steps forecast (also per holdout origin). Default 1,000.
    period : int
        Largest seasonal period. Default 1,000.
    observations : int
        Longest series. Default 1,000,000.
    lags : int
        Largest lag of a model term, ``p + m P`` and ``q + m Q``: the reference likelihood
        solves a system of that size and the libraries carry state vectors of it. Default
        3,000.
    """

    horizon: int = 1_000
    period: int = 1_000
    observations: int = 1_000_000
    lags: int = 3_000


def _from_environment() -> Limits:
    changes: dict[str, int] = {}
    for item in fields(Limits):
        raw = os.environ.get(_ENV + item.name.upper())
        if raw is None or not raw.strip():
            continue
        try:
            changes[item.name] = int(raw)
        except ValueError:
            raise SpecError(
                f"The environment variable {_ENV}{item.name.upper()} is {echo(raw)}; set it to "
                "a whole number or unset it."
            ) from None
    return replace(Limits(), **changes)


_current: Limits | None = None


def current_limits() -> Limits:
    """The limits in force (see :class:`Limits`)."""
    global _current
    if _current is None:
        _current = _from_environment()
    return _current


def set_limits(**changes: int) -> Limits:
    """Change some limits for this process; returns the limits in force before.

    Examples
    --------
    >>> before = set_limits(horizon=5000)
    >>> current_limits().horizon
    5000
    >>> _ = set_limits(**vars(before))
    """
    global _current
    before = current_limits()
    names = {item.name for item in fields(Limits)}
    for name, value in changes.items():
        if name not in names:
            raise SpecError(
                f"Unknown limit {echo(name)}; known limits: {', '.join(sorted(names))}."
            )
        whole_number(value, f"The limit {name}", minimum=1)
    _current = replace(before, **{k: int(v) for k, v in changes.items()})
    return before


@contextmanager
def limits_changed(**changes: int) -> Iterator[Limits]:
    """Change some limits inside a ``with`` block (see :func:`set_limits`)."""
    before = set_limits(**changes)
    try:
        yield current_limits()
    finally:
        set_limits(**vars(before))


def limit_error(what: str, value: int, name: str, error: type[ForecastAuditError]) -> None:
    """Raise ``error`` when ``value`` exceeds the limit ``name``, saying how to raise it."""
    cap = getattr(current_limits(), name)
    if value > cap:
        raise error(
            f"{what} is {value:,}, above the limit of {cap:,} ({name}), which keeps an audit "
            "within the memory and time of an ordinary machine. Ask for less, or raise the "
            f"limit deliberately: forecastaudit.set_limits({name}={value}) in Python, or the "
            f"environment variable {_ENV}{name.upper()}={value}."
        )
