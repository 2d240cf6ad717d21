"""Deliberately faulty estimator adapters, registered through the entry-point group.

Not installed: ``tests/test_faulty_adapters.py`` puts ``tests/plugin_packages`` on
``sys.path``, where ``faulty_adapters-0.1.dist-info`` makes :mod:`importlib.metadata` find
the distribution ``faulty-adapters`` and its ``forecastaudit.adapters`` entry points. The
fourth entry point names a module that does not exist, to show that a broken entry point
is reported without stopping the others. ``faulty-marker`` (used by
``tests/test_panel.py``) is statsmodels SARIMAX except on series whose first value is a
marker: 4242 makes its fit sleep for an hour, 6666 ends the worker process.
"""

from __future__ import annotations

import math
import os
import time

from forecastaudit.adapters.protocol import Capabilities, EstimatorAdapter, FitOutput, FitRequest
from forecastaudit.adapters.statsmodels_sarimax import StatsmodelsSarimax
from forecastaudit.conventions import coefficient_names

__all__ = ["HangingAdapter", "MarkerAdapter", "NanAdapter", "RaisingAdapter"]

#: First values that make :class:`MarkerAdapter` hang or end its process.
HANG_MARKER = 4242.0
CRASH_MARKER = 6666.0


class _Faulty(EstimatorAdapter):
    """What the three share: a distribution of their own and numpy as their "library"."""

    package = "faulty-adapters"
    module = "numpy"
    capabilities = Capabilities(mean_differences=frozenset({0, 1, 2}), forecast=False)


class HangingAdapter(_Faulty):
    """Never returns from its fit (sleeps for an hour)."""

    key = "faulty-hang"
    engine = "faulty-hang"
    description = "a fit that never returns"

    def _fit(self, request: FitRequest) -> FitOutput:
        time.sleep(3600)
        raise RuntimeError("woke up after an hour")


class RaisingAdapter(_Faulty):
    """Raises from inside its fit, as a library with a bug would."""

    key = "faulty-raise"
    engine = "faulty-raise"
    description = "a fit that raises"

    def _fit(self, request: FitRequest) -> FitOutput:
        raise ValueError("faulty-raise broke on purpose: singular matrix in the optimiser")


class NanAdapter(_Faulty):
    """Reports a converged fit whose coefficients are all NaN; everything else looks fine."""

    key = "faulty-nan"
    engine = "faulty-nan"
    description = "a fit that returns NaN coefficients"

    def _fit(self, request: FitRequest) -> FitOutput:
        names = coefficient_names(request.spec)
        k = len(names) + 1
        return FitOutput(
            params={name: math.nan for name in names},
            native_params={f"coef{i}": math.nan for i in range(len(names))},
            sigma2_reported=1.0,
            sigma2_kind="maximum-likelihood",
            sigma2_definition="maximum likelihood",
            sigma2_ml=1.0,
            loglike=-100.0,
            loglike_definition="exact Gaussian",
            n_used=request.n_w,
            k_counted=k,
            criteria={"aic": 200.0 + 2 * k, "aicc": math.nan, "bic": math.nan},
            converged=True,
            optimizer={"method": "none", "message": "converged"},
            options={"faulty-adapters": {"method": "none"}},
        )


def _first_value_is(y: object, marker: float) -> bool:
    """Whether the first value, as given or after the log transform, is ``marker``."""
    first = float(y[0])  # type: ignore[index]
    return math.isclose(first, marker) or math.isclose(first, math.log(marker), rel_tol=1e-12)


class MarkerAdapter(StatsmodelsSarimax):
    """statsmodels SARIMAX, except on series that start with a marker value.

    A series whose first observation is 4242 makes the fit sleep for an hour; one that
    starts with 6666 ends the whole process at once (``os._exit``), as a crash in compiled
    code would. Any other series is fitted exactly as ``statsmodels-sarimax`` fits it.
    """

    key = "faulty-marker"
    description = "statsmodels SARIMAX that hangs or crashes on marked series"

    def _fit(self, request: FitRequest) -> FitOutput:
        if _first_value_is(request.y, HANG_MARKER):
            time.sleep(3600)
            raise RuntimeError("woke up after an hour")
        if _first_value_is(request.y, CRASH_MARKER):
            os._exit(3)
        return super()._fit(request)
