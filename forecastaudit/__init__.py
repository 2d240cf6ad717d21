"""forecastaudit: audit one seasonal ARIMA specification across several estimators."""

from .errors import (
    EstimatorError,
    ForecastAuditError,
    RecordError,
    SeriesError,
    SpecError,
    ToleranceError,
)
from .spec import ModelSpec

__version__ = "0.1.0"

__all__ = [
    "EstimatorError",
    "ForecastAuditError",
    "ModelSpec",
    "RecordError",
    "SeriesError",
    "SpecError",
    "ToleranceError",
    "__version__",
]
