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
    "audit_panel": "forecastaudit.panel",
    "PanelResult": "forecastaudit.panel",
    "PanelDrift": "forecastaudit.record.panel_baseline",
    "compare_panel_to_baseline": "forecastaudit.record.panel_baseline",
    "generate_demo_panel": "forecastaudit.demo",
    "PanelError": "forecastaudit.errors",
    "DEMO_SPEC": "forecastaudit.demo",
    "load_demo": "forecastaudit.demo",
    "RecordChanges": "forecastaudit.record.changes",
    "RecordDrift": "forecastaudit.record.changes",
    "compare_records": "forecastaudit.record.changes",
    "load_record": "forecastaudit.record.document",
    "add_signoff": "forecastaudit.record.signing",
    "generate_key_pair": "forecastaudit.record.signing",
    "sign_record": "forecastaudit.record.signing",
    "verify_signatures": "forecastaudit.record.signing",
    "EstimatorError": "forecastaudit.errors",
    "ForecastAuditError": "forecastaudit.errors",
    "RecordError": "forecastaudit.errors",
    "RegressorError": "forecastaudit.errors",
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
    "Limits": "forecastaudit.validation",
    "current_limits": "forecastaudit.validation",
    "limits_changed": "forecastaudit.validation",
    "set_limits": "forecastaudit.validation",
}

#: Old names kept for one release; their modules warn when they are used.
_DEPRECATED = frozenset({"RecordDrift"})

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
    "Limits",
    "ModelSpec",
    "OrderSearchAudit",
    "PanelDrift",
    "PanelError",
    "PanelResult",
    "RecordChanges",
    "RecordDrift",
    "RecordError",
    "RegressorError",
    "SeriesError",
    "SpecError",
    "ToleranceError",
    "Tolerances",
    "__version__",
    "add_signoff",
    "audit",
    "audit_order_search",
    "audit_panel",
    "available_estimators",
    "compare_models",
    "compare_panel_to_baseline",
    "compare_records",
    "current_limits",
    "generate_demo_panel",
    "generate_key_pair",
    "limits_changed",
    "load_demo",
    "load_record",
    "set_limits",
    "sign_record",
    "verify_signatures",
]


def __getattr__(name: str) -> Any:
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'forecastaudit' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    if name not in _DEPRECATED:  # a deprecated name warns on every use
        globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_PUBLIC))


if TYPE_CHECKING:
    from forecastaudit.adapters.registry import available_estimators
    from forecastaudit.demo import DEMO_SPEC, generate_demo_panel, load_demo
    from forecastaudit.diagnosis.findings import KINDS, Finding
    from forecastaudit.diagnosis.tolerances import Tolerances
    from forecastaudit.errors import (
        EstimatorError,
        ForecastAuditError,
        PanelError,
        RecordError,
        RegressorError,
        SeriesError,
        SpecError,
        ToleranceError,
    )
    from forecastaudit.estimate import Estimate, Forecast
    from forecastaudit.model_choice import compare_models
    from forecastaudit.panel import PanelResult, audit_panel
    from forecastaudit.pipeline import audit
    from forecastaudit.record.changes import RecordChanges, compare_records
    from forecastaudit.record.document import load_record
    from forecastaudit.record.panel_baseline import PanelDrift, compare_panel_to_baseline
    from forecastaudit.record.signing import (
        add_signoff,
        generate_key_pair,
        sign_record,
        verify_signatures,
    )
    from forecastaudit.result import CAUTION, AuditReport, AuditResult
    from forecastaudit.search.order_search import OrderSearchAudit, audit_order_search
    from forecastaudit.spec import ModelSpec
