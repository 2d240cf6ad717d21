"""forecastaudit: audit one seasonal ARIMA specification across several estimators.

>>> import forecastaudit as fa
>>> result = fa.audit(series, fa.ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12,
...                                        transform="log"))          # doctest: +SKIP
>>> result.passed, result.findings, result.parameters                   # doctest: +SKIP

The package root is lazy (PEP 562): ``import forecastaudit`` loads nothing heavy; each
public name is imported from its module on first use.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from forecastaudit._version import __version__

#: Public name -> the module that defines it.
_PUBLIC: dict[str, str] = {
    "CAUTION": "forecastaudit.result",
    "AuditResult": "forecastaudit.result",
    "AuditReport": "forecastaudit.result",
    "audit": "forecastaudit.pipeline",
    "DEMO_SPEC": "forecastaudit.demo",
    "load_demo": "forecastaudit.demo",
    "RecordDrift": "forecastaudit.record.changes",
    "compare_records": "forecastaudit.record.changes",
    "load_record": "forecastaudit.record.document",
    "EstimatorError": "forecastaudit.errors",
    "ForecastAuditError": "forecastaudit.errors",
    "RecordError": "forecastaudit.errors",
    "SeriesError": "forecastaudit.errors",
    "SpecError": "forecastaudit.errors",
    "ToleranceError": "forecastaudit.errors",
    "Estimate": "forecastaudit.estimate",
    "Forecast": "forecastaudit.estimate",
    "available_estimators": "forecastaudit.adapters.registry",
    "KINDS": "forecastaudit.diagnosis.findings",
    "Finding": "forecastaudit.diagnosis.findings",
    "OrderSearchAudit": "forecastaudit.search.order_search",
    "audit_order_search": "forecastaudit.search.order_search",
    "compare_models": "forecastaudit.model_choice",
    "ModelSpec": "forecastaudit.spec",
    "Tolerances": "forecastaudit.diagnosis.tolerances",
}

__all__ = [
    "CAUTION",
    "DEMO_SPEC",
    "KINDS",
    "AuditReport",
    "AuditResult",
    "Estimate",
    "EstimatorError",
    "Finding",
    "Forecast",
    "ForecastAuditError",
    "ModelSpec",
    "OrderSearchAudit",
    "RecordDrift",
    "RecordError",
    "SeriesError",
    "SpecError",
    "ToleranceError",
    "Tolerances",
    "__version__",
    "audit",
    "audit_order_search",
    "available_estimators",
    "compare_models",
    "compare_records",
    "load_demo",
    "load_record",
]


def __getattr__(name: str) -> Any:
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'forecastaudit' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_PUBLIC))


if TYPE_CHECKING:
    from forecastaudit.adapters.registry import available_estimators
    from forecastaudit.demo import DEMO_SPEC, load_demo
    from forecastaudit.diagnosis.findings import KINDS, Finding
    from forecastaudit.diagnosis.tolerances import Tolerances
    from forecastaudit.errors import (
        EstimatorError,
        ForecastAuditError,
        RecordError,
        SeriesError,
        SpecError,
        ToleranceError,
    )
    from forecastaudit.estimate import Estimate, Forecast
    from forecastaudit.model_choice import compare_models
    from forecastaudit.pipeline import audit
    from forecastaudit.record.changes import RecordDrift, compare_records
    from forecastaudit.record.document import load_record
    from forecastaudit.result import CAUTION, AuditReport, AuditResult
    from forecastaudit.search.order_search import OrderSearchAudit, audit_order_search
    from forecastaudit.spec import ModelSpec
