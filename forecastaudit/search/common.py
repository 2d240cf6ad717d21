"""Small helpers shared by the order-search modules."""

from __future__ import annotations

from typing import Any

import pandas as pd

from forecastaudit.jsonutil import to_plain as _json
from forecastaudit.spec import ModelSpec


def _key(spec: ModelSpec | None) -> tuple[Any, ...] | None:
    """What makes two selections the same model (orders, period and constant)."""
    if spec is None:
        return None
    return (spec.order, spec.seasonal, spec.m, spec.mean)


def _text(spec: ModelSpec | None) -> str:
    if spec is None:
        return ""
    return str(ModelSpec(spec.order, spec.seasonal, spec.period, mean=spec.mean))


def _records(frame: pd.DataFrame | None) -> list[dict[str, Any]]:
    """A DataFrame as JSON-ready records (numpy to Python, NaN to None)."""
    if frame is None or frame.empty:
        return []
    out = []
    for row in frame.reset_index(drop=frame.index.name is None).to_dict(orient="records"):
        out.append({str(k): _json(v) for k, v in row.items()})
    return out
