"""Deliberately faulty estimator adapters, registered through the entry-point group.

Not installed: ``tests/test_faulty_adapters.py`` puts ``tests/plugin_packages`` on
``sys.path``, where ``faulty_adapters-0.1.dist-info`` makes :mod:`importlib.metadata` find
the distribution ``faulty-adapters`` and its ``forecastaudit.adapters`` entry points. The
fourth entry point names a module that does not exist, to show that a broken entry point
is reported without stopping the others.
"""

from __future__ import annotations

import math
import time

from forecastaudit.adapters.protocol import Capabilities, EstimatorAdapter, FitOutput, FitRequest
from forecastaudit.conventions import coefficient_names

__all__ = ["HangingAdapter", "NanAdapter", "RaisingAdapter"]


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
