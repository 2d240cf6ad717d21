"""forecastaudit: audit one seasonal ARIMA specification across several estimators.

>>> import forecastaudit as fa
>>> report = fa.audit(series, fa.ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12,
...                                        transform="log"))          # doctest: +SKIP
>>> report.passed, report.findings, report.parameters                   # doctest: +SKIP
"""

__version__ = "0.1.0"

from .audit import CAUTION, AuditReport, audit
from .demo import DEMO_SPEC, load_demo
from .drift import RecordDrift, compare_records
from .errors import (
    EstimatorError,
    ForecastAuditError,
    RecordError,
    SeriesError,
    SpecError,
    ToleranceError,
)
from .estimators import Estimate, available_estimators
from .findings import KINDS, Finding
from .record import load_record
from .selection import OrderSearchAudit, audit_order_search, compare_models
from .spec import ModelSpec
from .tolerances import Tolerances

__all__ = [
    "CAUTION",
    "DEMO_SPEC",
    "KINDS",
    "AuditReport",
    "Estimate",
    "EstimatorError",
    "Finding",
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
