"""The adapter conformance suite (``forecastaudit.testing.check_adapter``).

Every built-in adapter is run through every check; the failures expected of them are
measured, not assumed, and each carries its reason. Deliberately broken subclasses show that
the suite names the check they break. The broken adapters are module-level classes because
the worker-process check imports them by name in its workers.
"""

from __future__ import annotations

import dataclasses
import json
from collections.abc import Iterator
from typing import Any, ClassVar

import jsonschema
import numpy as np
import pytest

from forecastaudit.adapters.protocol import FitRequest
from forecastaudit.adapters.registry import adapter_class, available_estimators
from forecastaudit.adapters.statsmodels_arima import StatsmodelsArima
from forecastaudit.estimate import CapturedWarning, Estimate, estimate_schema
from forecastaudit.run import ProcessBackend
from forecastaudit.spec import ModelSpec
from forecastaudit.testing import (
    AdapterUnderCheck,
    _first_difference,
    adapter_check_names,
    check_adapter,
    run_adapter_checks,
)

#: Measured expected failures of the built-in adapters, by key: none. check_own_loglike
#: applies to all five: each one's loglike_at at its own estimate equals its reported
#: log-likelihood exactly (relative difference 0, measured).
EXPECTED_FAILURES: dict[str, dict[str, str]] = {}


@pytest.fixture(scope="module")
def backend() -> Iterator[ProcessBackend]:
    """Two workers kept for the whole module, so each library is imported in them once."""
    with ProcessBackend(2, preload=("numpy", "statsmodels.api")) as shared:
        yield shared


# ------------------------------------------------------------------ the built-in adapters
@pytest.mark.parametrize("key", available_estimators())
def test_built_in_adapter_conforms(key: str, backend: ProcessBackend) -> None:
    subject = AdapterUnderCheck(adapter_class(key), backend)
    lines = check_adapter(subject, expected_failures=EXPECTED_FAILURES.get(key))
    assert len(lines) == len(adapter_check_names())
    assert all(": failed" not in line for line in lines)
    # The round trip is exact, options included (the protocol keeps them in JSON form).
    for case in subject.cases():
        estimate = subject.fitted(case)
        plain = estimate
        back = Estimate.from_dict(estimate.to_dict())
        differences = [
            found
            for f in dataclasses.fields(Estimate)
            if f.name != "native"
            and (found := _first_difference(getattr(plain, f.name), getattr(back, f.name), f.name))
        ]
        assert differences == [], f"{key} {case.label}"


def test_built_in_capabilities_decide_what_applies() -> None:
    # statsforecast offers a mean only with d + D in {0, 1}, so its refusal is checked; the
    # statsmodels adapter offers one for every d + D, so there is nothing to refuse.
    sf = run_adapter_checks(adapter_class("statsforecast"), checks=["check_unsupported_spec"])
    sm = run_adapter_checks(
        StatsmodelsArima, checks=["check_unsupported_spec", "check_own_loglike"]
    )
    assert [r.status for r in sf] == ["passed"]
    assert [r.status for r in sm] == ["not-applicable", "passed"]


# ------------------------------------------------------------------ deliberately broken
class ExtraNameAdapter(StatsmodelsArima):
    """Adds a canonical parameter the spec does not have."""

    key = "broken-extra-name"

    def fit(self, y: Any, spec: ModelSpec | None = None) -> Estimate:
        estimate = super().fit(y, spec)
        if estimate.ok:
            estimate.params["ar_lag2"] = 0.0
        return estimate


class InputModifyingAdapter(StatsmodelsArima):
    """Centres the caller's array in place before fitting."""

    key = "broken-modifies-input"

    def fit(self, y: Any, spec: ModelSpec | None = None) -> Estimate:
        data = y.y if isinstance(y, FitRequest) else y
        data -= data.mean()
        return super().fit(y, spec)


class UndeclaredAdapter(StatsmodelsArima):
    """Forgets its description and declares capabilities as a plain dict."""

    key = "broken-declarations"
    description = ""
    capabilities: ClassVar[Any] = {"forecast": True}


def _failing(adapter: Any, backend: ProcessBackend, **kwargs: Any) -> tuple[str, set[str]]:
    """The AssertionError message of check_adapter, and the check names it lists."""
    with pytest.raises(AssertionError) as raised:
        check_adapter(adapter, backend=backend, **kwargs)
    message = str(raised.value)
    names = {line[2:].split(":")[0] for line in message.splitlines() if line.startswith("- ")}
    return message, names


def test_extra_canonical_name_fails_the_fit_checks(backend: ProcessBackend) -> None:
    message, names = _failing(ExtraNameAdapter, backend)
    assert names == {"check_fit_ar1", "check_fit_seasonal"}
    assert "unexpected ['ar_lag2']" in message
    assert message.startswith("Adapter broken-extra-name failed 2 of 13 conformance checks")


def test_modified_input_fails_the_input_check(backend: ProcessBackend) -> None:
    # An instance works as well as a class.
    message, names = _failing(InputModifyingAdapter(), backend)
    assert names == {"check_input_not_modified", "check_own_loglike"}
    assert "fit(y, spec)" in message and "fit(FitRequest(y, spec))" in message
    assert "changed 120 of the caller's 120 values" in message


def test_missing_declarations_fail_the_attribute_check(backend: ProcessBackend) -> None:
    message, names = _failing(
        UndeclaredAdapter, backend, checks=["check_class_attributes", "check_library_calls"]
    )
    assert names == {"check_class_attributes"}
    assert "description is ''" in message
    assert "expected a Capabilities instance" in message


def test_an_adapter_class_defined_in_a_function_fails_only_in_workers(
    backend: ProcessBackend,
) -> None:
    class LocalAdapter(StatsmodelsArima):
        key = "local-adapter"

    # Workers import the class by its qualified name, which a local class does not have.
    results = run_adapter_checks(
        LocalAdapter, checks=["check_fit_ar1", "check_worker_fit"], backend=backend
    )
    assert [r.status for r in results] == ["passed", "failed"]
    assert "in a worker, status 'failed'" in results[1].message


def test_expected_failures_are_reported_not_run() -> None:
    lines = check_adapter(
        StatsmodelsArima,
        expected_failures={"check_fit_ar1": "a reason"},
        checks=["check_class_attributes", "check_fit_ar1"],
    )
    assert lines == [
        "check_class_attributes: passed",
        "check_fit_ar1: expected-failure (a reason)",
    ]


def test_unknown_check_names_and_blank_reasons_are_refused() -> None:
    with pytest.raises(ValueError, match="Unknown adapter checks \\['check_fit_everything'\\]"):
        check_adapter(StatsmodelsArima, expected_failures={"check_fit_everything": "typo"})
    with pytest.raises(ValueError, match="Unknown adapter checks"):
        check_adapter(StatsmodelsArima, checks=["fit"])
    with pytest.raises(ValueError, match="reason"):
        check_adapter(StatsmodelsArima, expected_failures={"check_fit_ar1": " "})


# ------------------------------------------------------------------ the estimate schema
def test_estimate_schema_is_valid_and_strict() -> None:
    schema = estimate_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    assert schema["additionalProperties"] is False
    spec = ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12)
    timed_out = Estimate(
        key="slow",
        engine="slow-engine",
        package="slow",
        version=None,
        status="timed-out",
        reason="no result within 5 s",
        spec=spec,
        warnings=[CapturedWarning("UserWarning", "careful", "x.py:1")],
    )
    data = timed_out.to_dict()
    validator = jsonschema.Draft202012Validator(schema)
    validator.validate(data)
    json.dumps(data, allow_nan=False)
    assert set(schema["required"]) == set(data)
    # Infinities are the tagged strings; anything else in a number's place is refused.
    validator.validate({**data, "loglike_native": "-inf", "params": {"sigma2": "inf"}})
    for bad in (
        {**data, "loglike_native": "nan"},
        {**data, "status": "crashed"},
        {**data, "options": {"flat": 1}},
        {**data, "surprise": True},
        {k: v for k, v in data.items() if k != "criteria"},
    ):
        assert not validator.is_valid(bad)


def test_round_trip_keeps_non_finite_numbers() -> None:
    estimate = Estimate(
        key="k",
        engine="e",
        package="p",
        version="1",
        status="ok",
        params={"ma_lag1": -0.4, "sigma2": 1.0},
        sigma2_reported=float("inf"),
        criteria_native={"aic": float("nan"), "bic": -float("inf")},
        options={"p": {"order": [0, 1, 1]}},
    )
    back = Estimate.from_dict(estimate.to_dict())
    assert all(
        _first_difference(getattr(estimate, f.name), getattr(back, f.name), f.name) is None
        for f in dataclasses.fields(Estimate)
    )
    assert _first_difference((1, 2), [1, 2], "x") == "x: tuple (1, 2) came back as list [1, 2]"
    assert _first_difference(np.nan, float("nan"), "x") is None
