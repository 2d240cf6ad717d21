"""One conversion of Python, numpy and pandas values to JSON-ready values, for the whole package."""

from __future__ import annotations

from typing import Any

import numpy as np


def _plain(value: Any) -> Any:
    """Turn numpy scalars, arrays and tuples into JSON-ready Python values."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    if value is None or isinstance(value, bool | int | float | str):
        return value
    return repr(value)
