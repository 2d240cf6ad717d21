"""Shared data for the tests: shipped datasets and seeded simulations.

The airline passengers series is the copy shipped with sktime
(``sktime.datasets.load_airline()``, Box, Jenkins & Reinsel's Series G); the Nile series is
the copy shipped with statsmodels (``statsmodels.datasets.nile``). The simulations are
seeded, so every run sees the same numbers.
"""

from __future__ import annotations

from typing import NamedTuple

import cryptography.hazmat.primitives.asymmetric.ed25519
import cryptography.hazmat.primitives.serialization  # noqa: F401
import numpy as np
import pandas as pd
import pytest

# pytester's in-process runs (tests/test_plugin*.py) restore ``sys.modules`` afterwards. A
# library with compiled parts first imported inside such a run is then imported a second
# time, and its classes no longer match those its compiled module holds: cryptography then
# refuses its own ``NoEncryption()``. Importing it here, before any inner run, keeps one copy.


class Simulated(NamedTuple):
    """A simulated series and the values it was generated with."""

    values: np.ndarray
    truth: dict[str, float]


@pytest.fixture(scope="session")
def log_airline_series() -> pd.Series:
    """Natural log of the monthly airline passengers 1949-1960, with its monthly PeriodIndex."""
    from sktime.datasets import load_airline

    series = load_airline()
    return np.log(series)


@pytest.fixture(scope="session")
def log_airline(log_airline_series: pd.Series) -> np.ndarray:
    """The log airline series as a plain float array (144 values)."""
    return log_airline_series.to_numpy(dtype=float, copy=True)


@pytest.fixture(scope="session")
def nile() -> np.ndarray:
    """Annual flow of the Nile at Aswan, 1871-1970 (100 values), as a float array."""
    from statsmodels.datasets import nile

    return nile.load_pandas().data["volume"].to_numpy(dtype=float, copy=True)


@pytest.fixture(scope="session")
def ar1_mean10() -> Simulated:
    """Seeded stationary AR(1): y_t - 10 = 0.6 (y_{t-1} - 10) + e_t, e_t ~ N(0, 1), n = 300.

    The first value is drawn from the stationary distribution N(10, 1/(1 - 0.6^2)), so there
    is no start-up transient.
    """
    phi, mu, n = 0.6, 10.0, 300
    rng = np.random.default_rng(20240611)
    e = rng.standard_normal(n)
    x = np.empty(n)
    x[0] = e[0] / np.sqrt(1.0 - phi**2)
    for t in range(1, n):
        x[t] = phi * x[t - 1] + e[t]
    return Simulated(mu + x, {"mu": mu, "ar_lag1": phi, "sigma2": 1.0, "n": n})


@pytest.fixture(scope="session")
def random_walk_drift() -> Simulated:
    """Seeded random walk with drift: y_t = y_{t-1} + 0.5 + e_t, e_t ~ N(0, 1), y_0 = 100."""
    drift, n = 0.5, 300
    rng = np.random.default_rng(20240612)
    steps = drift + rng.standard_normal(n)
    return Simulated(100.0 + np.cumsum(steps), {"drift": drift, "sigma2": 1.0, "n": n})
