"""A third-party adapter from a package of its own: registered, conformant, audited.

``tests/plugin_packages/inhouse`` holds the package ``inhouse_adapters`` and its
``inhouse_adapters-0.1.dist-info``, whose ``entry_points.txt`` registers
``inhouse-dense = inhouse_adapters:DenseGaussianAdapter`` in the ``forecastaudit.adapters``
group (the worked example of docs/adapters.md). With the folder on ``sys.path`` the registry
finds it as it finds an installed distribution. It is kept apart from the faulty adapters so
that audits of those never meet it.
"""

from __future__ import annotations

import contextlib
import importlib
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest

import forecastaudit as fa
from forecastaudit.adapters import registry
from forecastaudit.testing import check_adapter

FOLDER = Path(__file__).parent / "plugin_packages" / "inhouse"
KEY = "inhouse-dense"


@contextlib.contextmanager
def inhouse_on_path() -> Iterator[None]:
    """The package's folder on ``sys.path`` and the registry refreshed, for the block."""
    try:
        with pytest.MonkeyPatch.context() as patch:
            patch.syspath_prepend(str(FOLDER))
            registry.refresh()
            yield
    finally:
        for name in [m for m in sys.modules if m == "inhouse_adapters"]:
            del sys.modules[name]
        importlib.invalidate_caches()
        registry.refresh()


@pytest.fixture(scope="module")
def inhouse() -> Iterator[type]:
    with inhouse_on_path():
        yield registry.adapter_class(KEY)


def test_registered_through_the_entry_point_group(inhouse: type) -> None:
    assert KEY in fa.available_estimators()
    assert inhouse.__module__ == "inhouse_adapters"
    # The version is the distribution's, read from its dist-info METADATA.
    assert inhouse().version() == "0.1"
    assert "inhouse-adapters" in registry.adapter_packages()


def test_passes_check_adapter(inhouse: type) -> None:
    lines = check_adapter(inhouse)
    assert "check_fit_seasonal: passed" in lines
    assert "check_own_loglike: passed" in lines
    assert "check_worker_fit: passed" in lines
    assert any(line.startswith("check_forecast: not-applicable") for line in lines)


def test_appears_in_an_audit(inhouse: type) -> None:
    result = fa.audit(
        fa.load_demo(), fa.DEMO_SPEC, estimators=["statsmodels-sarimax", KEY], horizon=12
    )
    e = result.estimates[KEY]
    assert e.ok, e.reason
    assert e.package == "inhouse-adapters" and e.version == "0.1"
    assert e.engine == "inhouse-dense-gaussian"
    # Its own exact likelihood is the reference's: its Nelder-Mead fit reaches the
    # reference optimum (an optimum of the same objective, within the audit's tolerance).
    assert result.likelihoods.at[KEY, "gap_to_best"] < result.tolerances.loglike_atol
    assert KEY in result.parameters.columns
    assert "inhouse-dense-gaussian" in result.independent_engines
    record = result.to_dict()
    assert record["provenance"]["estimators"][KEY]["version"] == "0.1"
