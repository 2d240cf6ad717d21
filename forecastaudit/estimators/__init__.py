"""Estimator adapters, one file each, behind one protocol (:mod:`.base`).

Importing this package registers every built-in adapter; a missing library does not stop
the import (the adapter then reports ``unavailable``).
"""

import importlib

from .base import (
    Capabilities,
    CapturedWarning,
    Estimate,
    EstimatorAdapter,
    FitOutput,
    available_estimators,
    get_adapter,
    register_estimator,
)

# Imported in this order to register the adapters; the order is the report's column order.
BUILT_IN = (
    "statsmodels_sarimax",
    "statsmodels_arima",
    "pmdarima_arima",
    "sktime_arima",
    "statsforecast_arima",
)
for _module in BUILT_IN:
    importlib.import_module(f"{__name__}.{_module}")

__all__ = [
    "Capabilities",
    "CapturedWarning",
    "Estimate",
    "EstimatorAdapter",
    "FitOutput",
    "available_estimators",
    "get_adapter",
    "register_estimator",
]
