"""Exception types of forecastaudit.

Every error raised on bad input is one of these, so callers can catch the project's
errors apart from bugs. Each message names the problem and the fix.
"""

from __future__ import annotations

__all__ = [
    "EnvironmentSetupError",
    "EstimatorError",
    "ForecastAuditError",
    "ImportRecordError",
    "PanelError",
    "RecordError",
    "RegressorError",
    "SeriesError",
    "SpecError",
    "ToleranceError",
]


class ForecastAuditError(Exception):
    """Base class of every error forecastaudit raises on purpose."""


class SpecError(ForecastAuditError, ValueError):
    """The model specification is invalid or cannot be parsed."""


class SeriesError(ForecastAuditError, ValueError):
    """The input series cannot be audited as given (values, index or length)."""


class RegressorError(SeriesError):
    """The regressor values (at fit time or for the forecast) cannot be used as given.

    A subclass of :class:`SeriesError`: regressors are part of the data being audited.
    """


class ToleranceError(ForecastAuditError, ValueError):
    """A tolerance is missing, negative or of the wrong type."""


class EstimatorError(ForecastAuditError, ValueError):
    """An estimator key is unknown or an estimator was misused."""


class RecordError(ForecastAuditError, ValueError):
    """An audit record is malformed, tampered with or of an unsupported schema version."""


class PanelError(ForecastAuditError, ValueError):
    """A panel of series (its table, ids, specifications or store) cannot be audited as given."""


class ImportRecordError(ForecastAuditError, ValueError):
    """An import record (an estimate made elsewhere) cannot be read or does not fit the audit."""


class EnvironmentSetupError(ForecastAuditError, ValueError):
    """Another Python environment cannot be created, found or run."""
