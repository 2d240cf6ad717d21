"""Assertion helpers for audits in a modelling repository's own tests, and the adapter
conformance suite.

Numbers are compared with numpy's semantics: ``|actual - expected| <= atol + rtol * |expected|``.
Each helper raises ``AssertionError`` with a message a reviewer can read without the code.

:func:`check_adapter` runs every check of :data:`ADAPTER_CHECKS` on an estimator adapter,
built-in or third-party, the way scikit-learn's ``check_estimator`` checks an estimator::

    from forecastaudit.testing import check_adapter

    def test_my_adapter_keeps_the_protocol():
        check_adapter(MyAdapter, expected_failures={"check_own_loglike": "why, measured"})
"""

from __future__ import annotations

import dataclasses
import json
import math
import numbers
import os
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Any, Literal, get_args

import numpy as np

from forecastaudit.adapters.protocol import Capabilities, EstimatorAdapter, FitRequest
from forecastaudit.conventions import parameter_names
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.estimate import Estimate, Sigma2Kind, estimate_schema
from forecastaudit.record.changes import RecordChanges, compare_records
from forecastaudit.result import AuditResult
from forecastaudit.run import Backend
from forecastaudit.spec import ModelSpec

__all__ = [
    "ADAPTER_CHECKS",
    "AdapterCheckResult",
    "AdapterUnderCheck",
    "adapter_check_names",
    "assert_audit_passes",
    "assert_estimators_agree",
    "assert_no_drift",
    "assert_parameters_close",
    "check_adapter",
    "findings_table",
    "run_adapter_checks",
]


def findings_table(report: AuditResult, severities: Iterable[str] = ("fail", "warn")) -> str:
    """The findings of the given severities as an aligned plain-text table."""
    wanted = set(severities)
    rows = [f for f in report.findings if f.severity in wanted]
    if not rows:
        return "(no findings)"
    width_kind = max(len(f.kind) for f in rows)
    width_est = max(len(f.estimator or "-") for f in rows)
    lines = [f"{'severity':8}  {'kind':{width_kind}}  {'estimator':{width_est}}  message"]
    for f in rows:
        lines.append(
            f"{f.severity:8}  {f.kind:{width_kind}}  {f.estimator or '-':{width_est}}  {f.message}"
        )
    return "\n".join(lines)


def assert_audit_passes(report: AuditResult) -> None:
    """Fail unless the audit's verdict is pass; the message lists fail and warn findings."""
    if not report.passed:
        raise AssertionError(
            f"Audit of {report.spec} on '{report.series.name}' failed:\n" + findings_table(report)
        )


def _close(actual: float, expected: float, rtol: float, atol: float) -> bool:
    return bool(np.isclose(actual, expected, rtol=rtol, atol=atol, equal_nan=False))


def assert_parameters_close(
    report: AuditResult,
    expected: Mapping[str, float],
    *,
    rtol: float = 1e-7,
    atol: float = 0.0,
    estimators: Iterable[str] | None = None,
) -> None:
    """Every listed estimator's canonical parameters are close to ``expected``.

    Parameters
    ----------
    expected : mapping
        Canonical names (``ma_lag1``, ``sigma2`` ...) to values.
    estimators : iterable of str, optional
        Estimator keys; default the reference optimum only.
    """
    keys = list(estimators) if estimators is not None else ["reference"]
    problems = []
    for key in keys:
        e = report.estimates.get(key)
        if e is None or not e.ok:
            problems.append(f"{key}: no estimate ({e.status if e else 'not run'})")
            continue
        for name, value in expected.items():
            if name not in e.params:
                problems.append(f"{key}: no parameter {name!r}")
            elif not _close(e.params[name], value, rtol, atol):
                problems.append(f"{key}: {name} = {e.params[name]:.6g}, expected {value:.6g}")
    if problems:
        raise AssertionError(
            f"Parameters not within rtol={rtol:g}, atol={atol:g}:\n" + "\n".join(problems)
        )


def assert_estimators_agree(
    report: AuditResult,
    estimators: Iterable[str] | None = None,
    *,
    rtol: float = 0.0,
    atol: float = 1e-3,
) -> None:
    """The listed estimators' canonical parameters agree pairwise (default: all that fitted)."""
    table = report.parameters.drop(columns=["reference_se"], errors="ignore")
    keys = (
        list(estimators)
        if estimators is not None
        else [k for k, e in report.estimates.items() if e.ok]
    )
    missing = [k for k in keys if k not in table or not report.estimates[k].ok]
    if missing:
        raise AssertionError(f"No estimate from {', '.join(missing)}.")
    problems = []
    first = keys[0]
    for key in keys[1:]:
        for name in table.index:
            a, b = float(table.at[name, key]), float(table.at[name, first])
            if not _close(a, b, rtol, atol):
                problems.append(f"{name}: {key} {a:.6g} vs {first} {b:.6g}")
    if problems:
        raise AssertionError(
            f"Estimators disagree beyond rtol={rtol:g}, atol={atol:g}:\n" + "\n".join(problems)
        )


def assert_no_drift(
    old: dict[str, Any] | str | os.PathLike[str],
    new: dict[str, Any] | str | os.PathLike[str] | AuditResult,
    tolerances: Tolerances | None = None,
) -> RecordChanges:
    """Fail when ``new`` drifted from ``old`` beyond tolerance; return the drift otherwise."""
    if isinstance(new, AuditResult):
        new = new.to_dict()
    drift = compare_records(old, new, tolerances)
    if not drift.passed:
        raise AssertionError(str(drift))
    return drift


# ---------------------------------------------------------------------------- conformance
#
# A conformance suite for estimator adapters, in the spirit of scikit-learn's
# ``check_estimator``: one call that an adapter author (built-in or third-party) runs to learn
# whether the adapter keeps the protocol the rest of the audit relies on.

#: Relative tolerance between the log-likelihood an adapter reports and its own likelihood
#: evaluated again at the reported parameters: the same function at the same point, so only
#: rounding separates them.
OWN_LOGLIKE_RTOL = 1e-6

#: Tolerance between parameters fitted inline and in a worker process: the same computation
#: on the same numbers, so only a change of thread count could separate them.
WORKER_PARAMS_TOL = 1e-8

#: Seconds the worker-process check allows for starting workers and fitting both series.
WORKER_TIME_LIMIT = 300.0

#: Forecast steps and interval levels (percent) asked of adapters that forecast.
CHECK_STEPS = 12
CHECK_LEVELS = (80.0, 95.0)

CheckStatus = Literal["passed", "failed", "expected-failure", "not-applicable"]


class NotApplicable(Exception):  # noqa: N818 - a verdict, not an error
    """Raised by a check that does not apply to the adapter (the reason is its message)."""


@dataclass(frozen=True)
class AdapterCheckResult:
    """The outcome of one conformance check of one adapter.

    Attributes
    ----------
    name : str
        The check's name (its function name, e.g. ``"check_fit_seasonal"``).
    status : {"passed", "failed", "expected-failure", "not-applicable"}
        ``expected-failure``: listed in ``expected_failures``, so not run; ``not-applicable``:
        the adapter's declared capabilities leave nothing to check.
    message : str
        What failed, the reason the failure is expected, or why the check does not apply.
    """

    name: str
    status: CheckStatus
    message: str = ""

    def __str__(self) -> str:
        return f"{self.name}: {self.status}" + (f" ({self.message})" if self.message else "")


@dataclass(frozen=True)
class _Case:
    """One seeded series and the spec fitted to it."""

    label: str
    y: np.ndarray
    spec: ModelSpec


def _ar1_series() -> np.ndarray:
    """Seeded stationary AR(1) with mean 10: y_t - 10 = 0.5 (y_{t-1} - 10) + e_t, n = 120."""
    rng = np.random.default_rng(20240901)
    e = rng.standard_normal(120)
    x = np.empty(120)
    x[0] = e[0] / np.sqrt(1.0 - 0.5**2)  # drawn from the stationary distribution
    for t in range(1, 120):
        x[t] = 0.5 * x[t - 1] + e[t]
    return 10.0 + x


def _seasonal_series() -> np.ndarray:
    """Seeded ARIMA(0,1,1)x(0,1,1)12, ma_lag1 = -0.4, sma_lag12 = -0.6, sigma2 = 1, n = 96."""
    rng = np.random.default_rng(20240902)
    n, m = 96, 12
    e = rng.standard_normal(n + m + 1)
    # w_t = (1 + ma1 B)(1 + sma B^12) e_t in the canonical (plus) sign convention.
    w = e[m + 1 :] - 0.4 * e[m:-1] - 0.6 * e[1:-m] + 0.24 * e[: -m - 1]
    y = np.zeros(n)
    for t in range(n):
        # Undo (1 - B)(1 - B^12): y_t = w_t + y_{t-1} + y_{t-12} - y_{t-13}.
        y[t] = w[t] + (y[t - 1] if t >= 1 else 0.0)
        y[t] += (y[t - m] if t >= m else 0.0) - (y[t - m - 1] if t >= m + 1 else 0.0)
    return 100.0 + y


class AdapterUnderCheck:
    """An adapter and what the checks share: its seeded cases and its fits, made once.

    Parameters
    ----------
    adapter : EstimatorAdapter or type
        The adapter instance, or its class (instantiated without arguments, as a worker
        process does).
    backend : Backend, optional
        Worker processes for :func:`check_worker_fit` (default: two new local workers).
    """

    def __init__(self, adapter: Any, backend: Backend | None = None) -> None:
        self.cls: type = adapter if isinstance(adapter, type) else type(adapter)
        self.backend = backend
        self._given = None if isinstance(adapter, type) else adapter
        self._instance: Any = None
        self._fits: dict[str, Estimate] = {}
        self._arrays: dict[str, np.ndarray] = {}

    @property
    def adapter(self) -> Any:
        """The instance under check (the one given, or one made from the class)."""
        if self._given is not None:
            return self._given
        if self._instance is None:
            self._instance = self.cls()
        return self._instance

    @property
    def name(self) -> str:
        """The adapter's key, or its class name when it has none."""
        return str(getattr(self.cls, "key", self.cls.__name__))

    def cases(self) -> list[_Case]:
        """The two seeded fits every adapter must manage: an AR(1) and a seasonal model.

        The AR(1) carries a mean when the adapter declares one with no differencing.
        """
        caps = getattr(self.cls, "capabilities", None)
        mean = isinstance(caps, Capabilities) and 0 in caps.mean_differences
        return [
            _Case("AR(1) on 120 points", _ar1_series(), ModelSpec(order=(1, 0, 0), mean=mean)),
            _Case(
                "ARIMA(0,1,1)x(0,1,1)12 on 96 points",
                _seasonal_series(),
                ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12),
            ),
        ]

    def fit(self, case: _Case) -> Estimate:
        """The adapter's inline estimate of ``case`` (fitted once, on a private copy)."""
        if case.label not in self._fits:
            self._arrays[case.label] = case.y.copy()
            estimate = self.adapter.fit(FitRequest(self._arrays[case.label], case.spec))
            if not isinstance(estimate, Estimate):
                raise AssertionError(
                    f"fit() returned {type(estimate).__name__}, not an Estimate, for {case.label}."
                )
            self._fits[case.label] = estimate
        return self._fits[case.label]

    def given(self, case: _Case) -> np.ndarray:
        """The array handed to the adapter by :meth:`fit` for ``case``, as it is now."""
        self.fit(case)
        return self._arrays[case.label]

    def fitted(self, case: _Case) -> Estimate:
        """Like :meth:`fit`, but a check that needs an estimate fails when there is none."""
        estimate = self.fit(case)
        if not estimate.ok:
            raise AssertionError(
                f"{case.spec} ({case.label}) did not fit: status {estimate.status!r}, "
                f"{estimate.reason or 'no reason given'}"
            )
        return estimate


def _nonempty_text(value: Any) -> bool:
    return isinstance(value, str) and bool(value.strip())


def check_class_attributes(subject: AdapterUnderCheck) -> None:
    """The class declares what the registry and the audit read without calling it.

    A subclass of :class:`~forecastaudit.adapters.protocol.EstimatorAdapter`, with ``kind``
    ``"fit"``, non-empty text ``key``, ``engine``, ``package``, ``module`` and
    ``description``, and ``capabilities`` a
    :class:`~forecastaudit.adapters.protocol.Capabilities` whose ``mean_differences`` are
    whole numbers >= 0.
    """
    cls = subject.cls
    problems = []
    if not issubclass(cls, EstimatorAdapter):
        problems.append(
            f"{cls.__qualname__} is not a subclass of EstimatorAdapter (the protocol's shared "
            "fit, capture and support checks would be missing)"
        )
    kind = getattr(cls, "kind", None)
    if kind != "fit":
        problems.append(f"kind is {kind!r}, expected 'fit'")
    for name in ("key", "engine", "package", "module", "description"):
        value = getattr(cls, name, None)
        if not _nonempty_text(value):
            problems.append(f"{name} is {value!r}, expected non-empty text")
    caps = getattr(cls, "capabilities", None)
    if not isinstance(caps, Capabilities):
        problems.append(f"capabilities is {caps!r}, expected a Capabilities instance")
    elif not isinstance(caps.mean_differences, frozenset) or not all(
        isinstance(s, int) and not isinstance(s, bool) and s >= 0 for s in caps.mean_differences
    ):
        problems.append(
            "capabilities.mean_differences must be a frozenset of whole numbers >= 0, got "
            f"{caps.mean_differences!r}"
        )
    if problems:
        raise AssertionError("; ".join(problems))


def check_library_calls(subject: AdapterUnderCheck) -> None:
    """``version()`` and ``availability()`` answer on an instance, with the right types.

    ``version()`` is text or None; ``availability()`` is None (the library imports) or the
    reason it does not. An unavailable library fails this check: nothing else can be checked.
    """
    adapter = subject.adapter
    version = adapter.version()
    if version is not None and not isinstance(version, str):
        raise AssertionError(f"version() returned {version!r}, expected text or None")
    missing = adapter.availability()
    if missing is not None:
        if not isinstance(missing, str):
            raise AssertionError(f"availability() returned {missing!r}, expected None or text")
        raise AssertionError(f"the library is not available here: {missing}")


def _check_canonical(case: _Case, estimate: Estimate, cls: type) -> list[str]:
    """Everything a fitted estimate must satisfy, as a list of problems."""
    spec, problems = case.spec, []
    expected = parameter_names(spec)
    names = list(estimate.params)
    if names != expected:
        extra = [n for n in names if n not in expected]
        missing = [n for n in expected if n not in names]
        detail = []
        if extra:
            detail.append(f"unexpected {extra}")
        if missing:
            detail.append(f"missing {missing}")
        if not detail:
            detail.append("in another order")
        problems.append(f"parameters {names}, expected {expected} ({'; '.join(detail)})")
    not_finite = [n for n, v in estimate.params.items() if not math.isfinite(v)]
    if not_finite:
        problems.append(f"non-finite values for {not_finite}")
    if not estimate.sigma2 > 0:
        problems.append(f"sigma2 = {estimate.sigma2!r}, expected a positive number")
    if estimate.sigma2_kind not in get_args(Sigma2Kind):
        problems.append(
            f"sigma2_kind {estimate.sigma2_kind!r} is not one of {list(get_args(Sigma2Kind))}"
        )
    n_w = len(case.y) - spec.lost_to_differencing
    if estimate.n_w != n_w:
        problems.append(f"n_w = {estimate.n_w!r}, expected {n_w} (n - d - mD)")
    if estimate.k != len(expected):
        problems.append(f"k = {estimate.k!r}, expected {len(expected)} (coefficients + sigma2)")
    if not isinstance(estimate.options, dict) or not estimate.options:
        problems.append(f"options {estimate.options!r} is not a non-empty dict of namespaces")
    else:
        flat = [
            ns
            for ns, values in estimate.options.items()
            if not isinstance(ns, str) or not isinstance(values, dict)
        ]
        if flat:
            problems.append(
                f"options are not namespaced by library: {flat!r} do not map a library name "
                "to a dict of its options"
            )
    for name in ("key", "engine", "package"):
        if getattr(estimate, name) != getattr(cls, name, None):
            problems.append(
                f"estimate.{name} = {getattr(estimate, name)!r}, but the class declares "
                f"{getattr(cls, name, None)!r}"
            )
    if estimate.spec != spec:
        problems.append(f"estimate.spec is {estimate.spec}, expected {spec}")
    return problems


def _check_case_fit(subject: AdapterUnderCheck, index: int) -> None:
    case = subject.cases()[index]
    estimate = subject.fitted(case)
    problems = _check_canonical(case, estimate, subject.cls)
    if problems:
        raise AssertionError(f"{case.spec} ({case.label}): " + "; ".join(problems))


def check_fit_ar1(subject: AdapterUnderCheck) -> None:
    """A seeded AR(1) (with a mean where the adapter can fit one at d + D = 0) fits.

    Status ``ok``; exactly the canonical parameter names of the spec, in order
    (:func:`forecastaudit.conventions.parameter_names`); all finite; sigma2 > 0; a valid
    ``sigma2_kind``; ``n_w = n - d - mD`` and ``k`` = coefficients + 1; options namespaced
    (a dict of dicts); key, engine, package and spec as declared and asked.
    """
    _check_case_fit(subject, 0)


def check_fit_seasonal(subject: AdapterUnderCheck) -> None:
    """A seeded ARIMA(0,1,1)x(0,1,1)12 on 96 points fits; as :func:`check_fit_ar1`."""
    _check_case_fit(subject, 1)


def _unsupported_case(subject: AdapterUnderCheck) -> _Case | None:
    """A spec with a mean at a d + D in 0..2 the adapter does not declare, or None."""
    caps = subject.cls.capabilities
    outside = [s for s in (2, 1, 0) if s not in caps.mean_differences]
    if not outside:
        return None
    ar1, seasonal = subject.cases()
    orders = {
        0: (ar1.y, ModelSpec(order=(1, 0, 0), mean=True)),
        1: (seasonal.y, ModelSpec(order=(0, 1, 1), seasonal=(0, 0, 0), period=12, mean=True)),
        2: (seasonal.y, ModelSpec(order=(0, 1, 1), seasonal=(0, 1, 1), period=12, mean=True)),
    }
    y, spec = orders[outside[0]]
    return _Case(f"a mean with d + D = {spec.n_differences}", y, spec)


def check_unsupported_spec(subject: AdapterUnderCheck) -> None:
    """A mean at a d + D outside ``capabilities.mean_differences`` is refused, not raised.

    Status ``unsupported`` with a reason. Not applicable when the adapter declares a mean
    for every d + D in 0..2.
    """
    case = _unsupported_case(subject)
    if case is None:
        raise NotApplicable("the adapter declares a mean for every d + D in 0..2")
    estimate = subject.adapter.fit(FitRequest(case.y.copy(), case.spec))
    if estimate.status != "unsupported" or not _nonempty_text(estimate.reason):
        raise AssertionError(
            f"{case.spec} ({case.label}, not in mean_differences "
            f"{sorted(subject.cls.capabilities.mean_differences)}) gave status "
            f"{estimate.status!r} with reason {estimate.reason!r}; expected 'unsupported' "
            "with a reason"
        )


def check_input_not_modified(subject: AdapterUnderCheck) -> None:
    """The caller's array is left as it was by fit, forecast and the own likelihood.

    Both call forms are tried: ``fit(y, spec)`` on the AR(1) and ``fit(FitRequest(y, spec))``
    on the seasonal series, each followed by a forecast and ``loglike_at`` where the
    capabilities declare them.
    """
    adapter, caps = subject.adapter, subject.cls.capabilities
    ar1, seasonal = subject.cases()
    y_ar1 = ar1.y.copy()
    calls = [("fit(y, spec)", ar1, y_ar1, adapter.fit(y_ar1, ar1.spec))]
    estimate = subject.fit(seasonal)
    calls.append(("fit(FitRequest(y, spec))", seasonal, subject.given(seasonal), estimate))
    problems = []
    for form, case, y, estimate in calls:
        steps = [form]
        if estimate.ok and caps.forecast:
            adapter.forecast(estimate, CHECK_STEPS, CHECK_LEVELS)
            steps.append("forecast")
        if estimate.ok and caps.own_loglike:
            adapter.loglike_at(FitRequest(y, case.spec), dict(estimate.params))
            steps.append("loglike_at")
        if not np.array_equal(y, case.y):
            changed = int(np.sum(y != case.y))
            problems.append(
                f"{' + '.join(steps)} on {case.label} changed {changed} of the caller's "
                f"{len(y)} values"
            )
    if problems:
        raise AssertionError("; ".join(problems))


def _first_difference(before: Any, after: Any, where: str) -> str | None:
    """Where ``after`` differs from ``before``, NaN equal to NaN; None when they are equal.

    Containers must keep their kind (a tuple that comes back as a list is a difference).
    """
    if isinstance(before, dict) or isinstance(after, dict):
        if not (isinstance(before, dict) and isinstance(after, dict)):
            return f"{where}: {before!r} came back as {after!r}"
        if set(before) != set(after):
            lost = sorted(map(str, set(before) - set(after)))
            gained = sorted(map(str, set(after) - set(before)))
            return f"{where}: keys lost {lost}, keys gained {gained}"
        for key in before:
            found = _first_difference(before[key], after[key], f"{where}.{key}")
            if found:
                return found
        return None
    if isinstance(before, list | tuple) or isinstance(after, list | tuple):
        if type(before) is not type(after):
            return (
                f"{where}: {type(before).__name__} {before!r} came back as "
                f"{type(after).__name__} {after!r}"
            )
        if len(before) != len(after):
            return f"{where}: {len(before)} items came back as {len(after)}"
        for i, (a, b) in enumerate(zip(before, after, strict=True)):
            found = _first_difference(a, b, f"{where}[{i}]")
            if found:
                return found
        return None
    both_numbers = all(
        isinstance(v, numbers.Real) and not isinstance(v, bool | np.bool_) for v in (before, after)
    )
    if both_numbers and math.isnan(before) and math.isnan(after):
        return None
    try:
        same = bool(before == after)
    except Exception:  # an object without a usable equality did not survive
        same = False
    return None if same else f"{where}: {before!r} came back as {after!r}"


def check_estimate_round_trip(subject: AdapterUnderCheck) -> None:
    """``Estimate.from_dict(e.to_dict())`` equals ``e`` in every field except ``native``.

    NaN counts as equal to NaN; containers must keep their kind. An estimate that does not
    survive its record loses information between the worker and the audit, or between the
    audit and its record.
    """
    problems = []
    for case in subject.cases():
        estimate = subject.fitted(case)
        back = Estimate.from_dict(estimate.to_dict())
        for f in dataclasses.fields(Estimate):
            if f.name == "native":
                continue
            found = _first_difference(getattr(estimate, f.name), getattr(back, f.name), f.name)
            if found:
                problems.append(f"{case.label}: {found}")
    if problems:
        raise AssertionError("; ".join(problems))


def check_estimate_json(subject: AdapterUnderCheck) -> None:
    """``to_dict()`` follows the estimate schema and is strict JSON (no NaN or infinity).

    Checked for the fitted estimates and, where there is one, the unsupported one. The
    schema is :func:`forecastaudit.estimate.estimate_schema`.
    """
    import jsonschema

    validator = jsonschema.Draft202012Validator(estimate_schema())
    estimates = [(case.label, subject.fitted(case)) for case in subject.cases()]
    unsupported = _unsupported_case(subject)
    if unsupported is not None:
        estimates.append(
            (
                unsupported.label,
                subject.adapter.fit(FitRequest(unsupported.y.copy(), unsupported.spec)),
            )
        )
    problems = []
    for label, estimate in estimates:
        data = estimate.to_dict()
        for error in sorted(validator.iter_errors(data), key=lambda e: list(e.absolute_path)):
            where = "/".join(map(str, error.absolute_path)) or "(top level)"
            problems.append(f"{label}: at {where}: {error.message}")
        try:
            json.dumps(data, allow_nan=False)
        except (TypeError, ValueError) as exc:
            problems.append(f"{label}: not strict JSON ({type(exc).__name__}: {exc})")
    if problems:
        raise AssertionError("; ".join(problems))


def check_forecast(subject: AdapterUnderCheck) -> None:
    """A forecast of 12 steps at 80% and 95% from the seasonal fit is well formed.

    Status ``ok``; mean, bounds and standard errors of length 12, all finite; lower < mean
    < upper at every step; the 95% interval strictly wider than the 80% one. Not applicable
    when the adapter does not declare ``forecast``.
    """
    if not subject.cls.capabilities.forecast:
        raise NotApplicable("the adapter does not declare forecast")
    case = subject.cases()[1]
    forecast = subject.adapter.forecast(subject.fitted(case), CHECK_STEPS, CHECK_LEVELS)
    if not forecast.ok:
        raise AssertionError(f"status {forecast.status!r}: {forecast.reason}")
    problems = []
    arrays = {"mean": forecast.mean, "se": forecast.se}
    for level in CHECK_LEVELS:
        for side, bounds in (("lower", forecast.lower), ("upper", forecast.upper)):
            if level not in bounds:
                problems.append(f"no {side} bound at {level:g}% (levels {sorted(bounds)})")
            else:
                arrays[f"{side} {level:g}%"] = bounds[level]
    for label, values in arrays.items():
        values = np.asarray(values, dtype=float)
        if values.shape != (CHECK_STEPS,):
            problems.append(f"{label} has shape {values.shape}, expected ({CHECK_STEPS},)")
        elif not np.all(np.isfinite(values)):
            problems.append(f"{label} has non-finite values")
    if problems:
        raise AssertionError("; ".join(problems))
    mean = np.asarray(forecast.mean, dtype=float)
    for level in CHECK_LEVELS:
        lower, upper = forecast.lower[level], forecast.upper[level]
        if not (np.all(lower < mean) and np.all(mean < upper)):
            problems.append(f"the {level:g}% interval does not contain the mean at every step")
    narrow, wide = CHECK_LEVELS
    if not (
        np.all(forecast.lower[wide] < forecast.lower[narrow])
        and np.all(forecast.upper[wide] > forecast.upper[narrow])
    ):
        problems.append(f"the {wide:g}% interval is not wider than the {narrow:g}% one everywhere")
    if problems:
        raise AssertionError("; ".join(problems))


def check_own_loglike(subject: AdapterUnderCheck) -> None:
    """The adapter's own likelihood at its own estimate gives back its reported value.

    ``loglike_at`` at the estimate's parameters is finite and within
    :data:`OWN_LOGLIKE_RTOL` (relative) of ``loglike_native``: the same objective at the same
    point. Not applicable without ``own_loglike``. An adapter whose reported log-likelihood
    is a different objective from the one it evaluates fails this check by design, and
    should list it in ``expected_failures`` with that reason.
    """
    if not subject.cls.capabilities.own_loglike:
        raise NotApplicable("the adapter does not declare own_loglike")
    problems = []
    for case in subject.cases():
        estimate = subject.fitted(case)
        value = subject.adapter.loglike_at(FitRequest(case.y.copy(), case.spec), estimate.params)
        reported = estimate.loglike_native
        if not math.isfinite(value):
            problems.append(f"{case.label}: loglike_at gave {value!r}")
        elif not abs(value - reported) <= OWN_LOGLIKE_RTOL * abs(reported):
            problems.append(
                f"{case.label}: loglike_at gave {value:.10g}, the fit reported {reported:.10g} "
                f"(relative difference {abs(value - reported) / abs(reported):.2g}, "
                f"tolerance {OWN_LOGLIKE_RTOL:g})"
            )
    if problems:
        raise AssertionError("; ".join(problems))


def check_worker_fit(subject: AdapterUnderCheck) -> None:
    """The fit runs in worker processes and gives the inline parameters, to 1e-8.

    Both seeded fits go through :func:`forecastaudit.fitting.run_fits` with two local
    workers (or the backend given to :func:`check_adapter`). This needs the adapter class
    to be importable by its module and name and constructible without arguments, since a
    worker makes its own instance.
    """
    from forecastaudit.fitting import FitTask, run_fits

    cases = subject.cases()
    tasks = [
        FitTask(
            key=subject.name,
            request=FitRequest(case.y.copy(), case.spec),
            label=f"{subject.name} {case.label}",
            adapter=subject.cls,
        )
        for case in cases
    ]
    backend = subject.backend if subject.backend is not None else 2
    outcomes = run_fits(tasks, backend=backend, time_limit=WORKER_TIME_LIMIT)
    problems = []
    for case, outcome in zip(cases, outcomes, strict=True):
        inline, worker = subject.fitted(case), outcome.estimate
        if not worker.ok:
            problems.append(f"{case.label}: in a worker, status {worker.status!r}: {worker.reason}")
            continue
        if list(worker.params) != list(inline.params):
            problems.append(
                f"{case.label}: parameters {list(worker.params)} in a worker, "
                f"{list(inline.params)} inline"
            )
            continue
        far = {
            name: (worker.params[name], value)
            for name, value in inline.params.items()
            if not abs(worker.params[name] - value) <= WORKER_PARAMS_TOL * max(1.0, abs(value))
        }
        if far:
            shown = ", ".join(f"{n} {w!r} vs {i!r}" for n, (w, i) in far.items())
            problems.append(f"{case.label}: worker vs inline differ: {shown}")
    if problems:
        raise AssertionError("; ".join(problems))


def check_reference_loglike(subject: AdapterUnderCheck) -> None:
    """The reference log-likelihood at each estimate is finite.

    :func:`forecastaudit.reference.evaluate` re-scores the estimate under the package's own
    exact likelihood; a non-finite value means parameters outside the stationary region,
    a non-positive sigma2, or parameters in another convention.
    """
    from forecastaudit.reference import evaluate

    problems = []
    for case in subject.cases():
        estimate = subject.fitted(case)
        value = evaluate(case.y, case.spec, estimate.params).loglike
        if not math.isfinite(value):
            problems.append(f"{case.label}: reference log-likelihood {value!r}")
    if problems:
        raise AssertionError("; ".join(problems))


def _regressor_case() -> tuple[np.ndarray, np.ndarray, np.ndarray, ModelSpec]:
    """The seeded AR(1) plus 2 x a seeded regressor (a random walk), and 12 future values.

    ``y_t = 10 + 2 x_t + u_t`` with ``u_t`` the AR(1) of :func:`_ar1_series` minus its mean:
    a regression on the levels with AR(1) errors (the canonical form).
    """
    rng = np.random.default_rng(20240903)
    x = np.cumsum(rng.standard_normal(132))[:, None]
    y = _ar1_series() + 2.0 * x[:120, 0]
    return y, x[:120], x[120:], ModelSpec(order=(1, 0, 0), mean=True, regressors=("driver",))


def check_regressors(subject: AdapterUnderCheck) -> None:
    """Regressors are fitted as declared, or refused as ``unsupported``.

    An adapter declaring ``capabilities.regressors`` fits ``ARIMA(1,0,0) +mean +x(driver)``
    on a seeded regression with AR(1) errors (true coefficient 2): the estimate has
    ``x_driver`` within 0.2 of 2 (about five of its standard errors on these data; a wrong
    sign, a scale or a regression on the differences is far off), leaves the regressor
    values it was given untouched, and, when it forecasts, forecasts with the 12 future
    values. An adapter without it returns ``unsupported`` with a reason.
    """
    y, x, future, spec = _regressor_case()
    caps = subject.cls.capabilities
    request = FitRequest(y.copy(), spec, x.copy())
    estimate = subject.adapter.fit(request)
    if not caps.regressors:
        if estimate.status != "unsupported" or not _nonempty_text(estimate.reason):
            raise AssertionError(
                f"{spec} gave status {estimate.status!r} ({estimate.reason!r}) from an adapter "
                "that does not declare regressors; expected 'unsupported' with a reason"
            )
        return
    if not estimate.ok:
        raise AssertionError(f"{spec} did not fit: {estimate.status} ({estimate.reason})")
    value = estimate.params.get("x_driver", math.nan)
    if not abs(value - 2.0) < 0.2:
        raise AssertionError(f"x_driver = {value!r}, expected about 2 (the seeded coefficient)")
    if not np.array_equal(request.regressors, x):
        raise AssertionError("the adapter modified the regressor values it was given")
    if caps.forecast:
        forecast = subject.adapter.forecast(estimate, 12, CHECK_LEVELS, future.copy())
        if not forecast.ok or forecast.mean.shape != (12,):
            raise AssertionError(f"forecast with future regressors failed: {forecast.reason}")


#: Every conformance check, in the order they run.
ADAPTER_CHECKS: tuple[Callable[[AdapterUnderCheck], None], ...] = (
    check_class_attributes,
    check_library_calls,
    check_fit_ar1,
    check_fit_seasonal,
    check_unsupported_spec,
    check_input_not_modified,
    check_estimate_round_trip,
    check_estimate_json,
    check_forecast,
    check_own_loglike,
    check_worker_fit,
    check_reference_loglike,
    check_regressors,
)


def adapter_check_names() -> list[str]:
    """The names of the conformance checks, the keys ``expected_failures`` may use."""
    return [check.__name__ for check in ADAPTER_CHECKS]


def run_adapter_checks(
    adapter: Any,
    *,
    expected_failures: Mapping[str, str] | None = None,
    checks: Iterable[str] | None = None,
    backend: Backend | None = None,
) -> list[AdapterCheckResult]:
    """Run the conformance checks on an adapter and return every outcome; never raises
    for a failing check.

    Parameters
    ----------
    adapter : EstimatorAdapter, type or AdapterUnderCheck
        The adapter instance or class, or an :class:`AdapterUnderCheck` (whose fits are
        then kept for checks of your own; its backend is used).
    expected_failures : mapping of str to str, optional
        Check name to the reason it is expected to fail; those checks are not run and are
        reported as ``expected-failure`` with the reason.
    checks : iterable of str, optional
        Run only these checks (default: all of :data:`ADAPTER_CHECKS`).
    backend : Backend, optional
        Worker processes for :func:`check_worker_fit`; default two new local workers, started
        and stopped by the check. Pass one backend when checking many adapters, so the
        workers (and the libraries they imported) are kept between adapters.

    Returns
    -------
    list of AdapterCheckResult
        One per check, in the order of :data:`ADAPTER_CHECKS`.

    Raises
    ------
    ValueError
        When ``expected_failures`` or ``checks`` name a check that does not exist, or a
        reason is empty.
    """
    known = adapter_check_names()
    expected = dict(expected_failures or {})
    wanted = known if checks is None else list(checks)
    unknown = sorted((set(expected) | set(wanted)) - set(known))
    if unknown:
        raise ValueError(f"Unknown adapter checks {unknown}; the checks are: {', '.join(known)}.")
    blank = sorted(name for name, reason in expected.items() if not _nonempty_text(reason))
    if blank:
        raise ValueError(f"Give the reason each check is expected to fail; none for {blank}.")
    subject = (
        adapter if isinstance(adapter, AdapterUnderCheck) else AdapterUnderCheck(adapter, backend)
    )
    results = []
    for check in ADAPTER_CHECKS:
        name = check.__name__
        if name not in wanted:
            continue
        if name in expected:
            results.append(AdapterCheckResult(name, "expected-failure", expected[name]))
            continue
        try:
            check(subject)
        except NotApplicable as exc:
            results.append(AdapterCheckResult(name, "not-applicable", str(exc)))
        except Exception as exc:  # every failure is reported, whatever its kind
            message = (
                str(exc) if isinstance(exc, AssertionError) else (f"{type(exc).__name__}: {exc}")
            )
            results.append(AdapterCheckResult(name, "failed", message or type(exc).__name__))
        else:
            results.append(AdapterCheckResult(name, "passed"))
    return results


def check_adapter(
    adapter: Any,
    *,
    expected_failures: Mapping[str, str] | None = None,
    checks: Iterable[str] | None = None,
    backend: Backend | None = None,
) -> list[str]:
    """Check that an estimator adapter keeps the protocol; raise listing every failure.

    The conformance suite for adapter authors: the checks of :data:`ADAPTER_CHECKS`
    (declared attributes, library calls, two seeded fits in the canonical convention, a
    refused unsupported spec, the caller's array untouched, the estimate's record form,
    forecasts, the adapter's own likelihood, a fit in worker processes, the reference
    likelihood at the estimate). Checks that do not apply to the declared capabilities are
    reported as not applicable.

    Parameters
    ----------
    adapter : EstimatorAdapter, type or AdapterUnderCheck
        The adapter instance, or its class (or an :class:`AdapterUnderCheck`, see
        :func:`run_adapter_checks`).
    expected_failures : mapping of str to str, optional
        Check name (see :func:`adapter_check_names`) to the reason it is expected to fail:
        not run, and reported with the reason.
    checks : iterable of str, optional
        Run only these checks (default: all).
    backend : Backend, optional
        Worker processes for :func:`check_worker_fit` (default: two new local workers). As
        with any use of worker processes, a script that calls this must do so under
        ``if __name__ == "__main__":``.

    Returns
    -------
    list of str
        One line per check: ``"<name>: passed"``, ``"<name>: not-applicable (<why>)"`` or
        ``"<name>: expected-failure (<reason>)"``.

    Raises
    ------
    AssertionError
        When any check not listed in ``expected_failures`` fails; the message lists every
        failing check with what failed.
    ValueError
        When ``expected_failures`` or ``checks`` name an unknown check.

    Examples
    --------
    >>> from forecastaudit.adapters.statsmodels_arima import StatsmodelsArima
    >>> lines = check_adapter(StatsmodelsArima, checks=["check_class_attributes"])
    >>> lines
    ['check_class_attributes: passed']
    """
    results = run_adapter_checks(
        adapter, expected_failures=expected_failures, checks=checks, backend=backend
    )
    failed = [r for r in results if r.status == "failed"]
    if failed:
        name = (
            adapter.name
            if isinstance(adapter, AdapterUnderCheck)
            else getattr(adapter, "key", None) or getattr(adapter, "__name__", repr(adapter))
        )
        raise AssertionError(
            f"Adapter {name} failed {len(failed)} of {len(results)} conformance checks:\n"
            + "\n".join(f"- {r.name}: {r.message}" for r in failed)
        )
    return [str(r) for r in results]
