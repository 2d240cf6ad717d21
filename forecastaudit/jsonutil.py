"""One conversion of Python, numpy and pandas values to JSON-ready values, for the package.

Standard JSON has no NaN or infinity. Two policies, one function:

* ``nonfinite="null"`` (records and reports): NaN and +-infinity become ``null``; a reader
  sees "no value".
* ``nonfinite="tagged"`` (estimates that must round-trip): NaN becomes ``null`` and
  +-infinity the strings ``"inf"`` / ``"-inf"``; :func:`real` reads them back exactly.
"""

from __future__ import annotations

import math
from typing import Any, Literal

import numpy as np

__all__ = ["is_finite_number", "optional_real", "real", "to_plain"]

NonFinite = Literal["null", "tagged"]


def to_plain(value: Any, *, nonfinite: NonFinite = "null") -> Any:
    """JSON-ready form of ``value``.

    Dicts (keys become strings), lists, tuples, numpy arrays and scalars, pandas
    timestamps and plain Python values are converted recursively; anything else becomes its
    ``repr``. Non-finite floats follow ``nonfinite`` (see the module docstring).
    """
    if isinstance(value, dict):
        return {str(k): to_plain(v, nonfinite=nonfinite) for k, v in value.items()}
    if isinstance(value, list | tuple | set | frozenset):
        items = sorted(value, key=repr) if isinstance(value, set | frozenset) else value
        return [to_plain(v, nonfinite=nonfinite) for v in items]
    if isinstance(value, np.ndarray):
        return to_plain(value.tolist(), nonfinite=nonfinite)
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        number = float(value)
        if math.isfinite(number):
            return number
        if nonfinite == "tagged" and not math.isnan(number):
            return "inf" if number > 0 else "-inf"
        return None
    if value is None or isinstance(value, str):
        return value
    isoformat = getattr(value, "isoformat", None)
    if callable(isoformat):
        return str(isoformat())
    return repr(value)


def real(value: Any) -> float:
    """A float back from :func:`to_plain` (``null`` -> NaN, ``"inf"``/``"-inf"`` -> +-inf)."""
    if value is None:
        return math.nan
    if isinstance(value, str):
        if value in ("inf", "-inf"):
            return math.inf if value == "inf" else -math.inf
        raise ValueError(f"not a number: {value!r}")
    return float(value)


def optional_real(value: Any) -> float | None:
    """Like :func:`real`, but ``null`` stays None (for values that may be absent)."""
    return None if value is None else real(value)


def is_finite_number(value: Any) -> bool:
    """True for a real, finite number (bools and non-numbers are not)."""
    if isinstance(value, bool | np.bool_) or value is None:
        return False
    try:
        return math.isfinite(float(value))
    except (TypeError, ValueError):
        return False
