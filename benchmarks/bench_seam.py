"""Speed of the execution seam: an audit with two worker processes, and the audit's overhead.

On the demo series (``forecastaudit.load_demo()``, ``forecastaudit.DEMO_SPEC``) with a
rolling holdout of 4 origins x 12 months and every installed estimator, this times in the
same run, interleaved round by round after one warm-up round:

1. ``audit(..., workers=2)`` against ``audit(..., workers=1)`` (target ratio <= 0.65).
   ``workers=2`` makes a fresh :class:`~forecastaudit.run.ProcessBackend` per audit, as a
   caller gets it, so every audit pays for starting two workers (forked from the fork
   server, which imports the estimator libraries once per interpreter: in the warm-up round
   here, whose times are printed). For information only, two more configurations separate
   that start-up from the parallel work: a ``ProcessBackend(2)`` kept across audits (workers
   started once), and a fresh ``ProcessBackend(2, start_method="fork")`` per audit (workers
   start with the libraries this process has already imported); and, once each, one audit
   with ``workers=1`` and with ``workers=2`` in a fresh interpreter, which is what one run
   of the command line costs (imports and fork server included). The estimates of every
   in-process configuration must agree with ``workers=1`` to 1e-8 (checked, reported).
2. ``audit(..., workers=1)`` against the raw library calls the audit makes (target ratio
   <= 1.10): for the full series and every holdout origin, each library called directly
   with the options its adapter passes (statsmodels SARIMAX ``fit(disp=False)``,
   statsmodels tsa ARIMA ``fit()``, pmdarima ``ARIMA.fit``, sktime ``ARIMA.fit``,
   statsforecast ``ARIMA.fit``), then its own forecast with 80% and 95% intervals, serially
   under ``threadpool_limits(1)``. The raw estimates must agree with the audit's to 1e-8.
   One further audit, with timers wrapped around its stages (in this process only; no
   package code changes), says where the audit's time goes beyond the raw fits.

Ratios are of the best (fastest) of the timed repeats; the ratio of medians is printed
beside them. Both sides of (2) run in this process, so (2) is also given in this process's
CPU time, which other work on the machine inflates less than wall time. Each round also
times a CPU-bound pure-Python loop inline and on the kept two-worker backend: on a machine
busy with other sessions' work, two processes of this session may get no more CPU than one
(the kernel shares CPU between sessions), and then no parallel target can be met; the
script says so when it measures that.

Exit status is non-zero only on an error (including estimates that disagree), never on a
missed target. Results go to ``benchmarks/results/seam.json``.

Run: ``PYTHONPATH=. python benchmarks/bench_seam.py``
"""

from __future__ import annotations

import os

# One BLAS thread everywhere: the worker processes and the inline backend limit themselves
# to one, and the raw baseline must run the same way. Set before numpy is imported; an
# explicit setting in the environment wins.
for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")

import importlib.metadata  # noqa: E402
import json  # noqa: E402
import platform  # noqa: E402
import re  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from collections import defaultdict  # noqa: E402
from collections.abc import Callable  # noqa: E402
from pathlib import Path  # noqa: E402
from typing import Any  # noqa: E402

import numpy as np  # noqa: E402

import forecastaudit as fa  # noqa: E402
from forecastaudit._version import __version__  # noqa: E402
from forecastaudit.conventions import coefficient_names  # noqa: E402
from forecastaudit.series import prepare_series  # noqa: E402
from forecastaudit.spec import ModelSpec  # noqa: E402

# The estimator libraries are imported inside the functions that call them, not here:
# every worker process runs this script's top level when it starts, and should import no
# more than a caller's script would.

TARGET_PARALLEL = 0.65
TARGET_OVERHEAD = 1.10
WORKERS = 2
HOLDOUT = 12
ORIGINS = 4
LEVELS = (80.0, 95.0)
REPEATS = 4
PARAM_TOLERANCE = 1e-8
# The CPU-bound probe: SPIN_ITEMS loops of SPIN_STEPS additions (about 0.15 s each, idle).
SPIN_ITEMS = 4
SPIN_STEPS = 5_000_000
# Two workers finishing the probe in more than this fraction of the inline time means the
# machine did not give this session two cores' worth of CPU.
CAPACITY_WARNING = 0.6
LIBRARIES = ("numpy", "scipy", "statsmodels", "pmdarima", "sktime", "statsforecast")
ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "benchmarks" / "results" / "seam.json"
# One audit in a fresh interpreter, as the command line runs it: imports and the fork server
# included. Timed from outside, once per worker count.
ONE_SHOT = (
    "import forecastaudit as fa\n"
    "if __name__ == '__main__':\n"
    "    fa.audit(fa.load_demo(), fa.DEMO_SPEC, holdout={holdout}, origins={origins}, "
    "workers={workers})\n"
)

_STATESPACE_NAME = re.compile(r"^(ar|ma)\.(S\.)?L(\d+)$")
_STATSFORECAST_NAME = re.compile(r"^(ar|ma|sar|sma)(\d+)$")


# ---------------------------------------------------------------------- the raw baseline
def _statespace_coefficients(result: Any) -> dict[str, float]:
    """Canonical AR/MA coefficients from a statsmodels state-space result (no constant)."""
    out = {}
    for name, value in zip(result.model.param_names, np.asarray(result.params), strict=True):
        match = _STATESPACE_NAME.match(name)
        if match:
            kind, seasonal, lag = match.groups()
            out[f"{'s' if seasonal else ''}{kind}_lag{lag}"] = float(value)
    return out


def _statsmodels_arima_trend(spec: ModelSpec) -> str | list[int]:
    # As the statsmodels-arima adapter sets it: a trend on t^(d+D) carries the mean.
    if not spec.mean:
        return "n"
    if spec.n_differences == 0:
        return "c"
    if spec.n_differences == 1:
        return "t"
    return [0] * spec.n_differences + [1]


def raw_statsmodels_sarimax(y: np.ndarray, spec: ModelSpec, steps: int) -> tuple[dict, Any]:
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    result = SARIMAX(
        y,
        order=spec.order,
        seasonal_order=(*spec.seasonal, spec.period or 0),
        trend="c" if spec.mean else "n",
    ).fit(disp=False)
    forecast = result.get_forecast(steps)
    for level in LEVELS:
        forecast.conf_int(alpha=1.0 - level / 100.0)
    return _statespace_coefficients(result), np.asarray(forecast.predicted_mean)


def raw_statsmodels_arima(y: np.ndarray, spec: ModelSpec, steps: int) -> tuple[dict, Any]:
    from statsmodels.tsa.arima.model import ARIMA

    result = ARIMA(
        y,
        order=spec.order,
        seasonal_order=(*spec.seasonal, spec.period or 0),
        trend=_statsmodels_arima_trend(spec),
    ).fit()
    forecast = result.get_forecast(steps)
    for level in LEVELS:
        forecast.conf_int(alpha=1.0 - level / 100.0)
    return _statespace_coefficients(result), np.asarray(forecast.predicted_mean)


def raw_pmdarima(y: np.ndarray, spec: ModelSpec, steps: int) -> tuple[dict, Any]:
    from pmdarima.arima import ARIMA

    model = ARIMA(
        order=spec.order,
        seasonal_order=(*spec.seasonal, spec.period or 0),
        with_intercept=spec.mean,
    )
    model.fit(y)
    mean = None
    for level in LEVELS:  # pmdarima gives one interval level per predict() call
        mean, _ = model.predict(n_periods=steps, return_conf_int=True, alpha=1.0 - level / 100.0)
    return _statespace_coefficients(model.arima_res_), np.asarray(mean)


def raw_sktime(y: np.ndarray, spec: ModelSpec, steps: int) -> tuple[dict, Any]:
    import pandas as pd
    from sktime.forecasting.arima import ARIMA

    forecaster = ARIMA(
        order=spec.order,
        seasonal_order=(*spec.seasonal, spec.period or 0),
        with_intercept=spec.mean,
    )
    forecaster.fit(pd.Series(y))
    fh = list(range(1, steps + 1))
    mean = forecaster.predict(fh=fh)
    forecaster.predict_interval(fh=fh, coverage=[level / 100.0 for level in LEVELS])
    result = forecaster._forecaster.arima_res_  # the pmdarima model sktime holds
    return _statespace_coefficients(result), np.asarray(mean)


def raw_statsforecast(y: np.ndarray, spec: ModelSpec, steps: int) -> tuple[dict, Any]:
    from statsforecast.models import ARIMA

    s = spec.n_differences
    model = ARIMA(
        order=spec.order,
        season_length=spec.m,
        seasonal_order=spec.seasonal,
        include_mean=spec.mean and s == 0,
        include_drift=spec.mean and s == 1,
    )
    model.fit(y)
    out = model.predict(h=steps, level=[int(level) for level in LEVELS])
    coefficients = {}
    for name, value in model.model_["coef"].items():
        match = _STATSFORECAST_NAME.match(str(name))
        if match:
            kind, i = match.group(1), int(match.group(2))
            coefficients[f"{kind}_lag{i * spec.m if kind.startswith('s') else i}"] = float(value)
    return coefficients, np.asarray(out["mean"])


RAW_FITS: dict[str, Callable[[np.ndarray, ModelSpec, int], tuple[dict, Any]]] = {
    "statsmodels-sarimax": raw_statsmodels_sarimax,
    "statsmodels-arima": raw_statsmodels_arima,
    "pmdarima": raw_pmdarima,
    "sktime": raw_sktime,
    "statsforecast": raw_statsforecast,
}


def raw_series(y: Any, spec: ModelSpec) -> list[tuple[str, np.ndarray, int]]:
    """The transformed series the audit fits: the full series, then each holdout origin."""
    values = prepare_series(y, period=spec.period).values
    n = values.size
    jobs = [("full", prepare_series(values, period=spec.period).transformed(spec), spec.m)]
    for i in range(ORIGINS):
        start = n - HOLDOUT * (ORIGINS - i)
        train = prepare_series(values[:start], period=spec.period).transformed(spec)
        jobs.append((f"origin {start}", train, HOLDOUT))
    return jobs


def run_raw(jobs: list[tuple[str, np.ndarray, int]], spec: ModelSpec, keys: list[str]) -> dict:
    """Every raw fit and forecast, serially with one BLAS thread; wall and CPU per library."""
    from threadpoolctl import threadpool_limits

    seconds: dict[str, float] = defaultdict(float)
    cpu: dict[str, float] = defaultdict(float)
    values: dict[tuple[str, str], tuple[dict, Any]] = {}
    with threadpool_limits(limits=1), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for label, y_t, steps in jobs:
            for key in keys:
                started, started_cpu = time.perf_counter(), time.process_time()
                values[(label, key)] = RAW_FITS[key](np.array(y_t, dtype=float), spec, steps)
                seconds[key] += time.perf_counter() - started
                cpu[key] += time.process_time() - started_cpu
    return {"seconds": dict(seconds), "cpu": dict(cpu), "values": values}


def spin(steps: int) -> int:
    """Pure-Python CPU-bound work (module level, so worker processes can run it)."""
    total = 0
    for i in range(steps):
        total += i * i
    return total


def startup_cpu(_: Any) -> float:
    """CPU seconds a worker has used once the estimator libraries are imported.

    Run as the first item of a fresh worker: its whole life so far is starting up (the
    fork server's child, this script's top level run again, the adapters' libraries).
    """
    from forecastaudit.adapters.registry import adapter_class, available_estimators

    for key in available_estimators():
        adapter_class(key)().availability()  # imports the library, as the first fit would
    return time.process_time()


def one_shot(workers: int) -> float:
    """Wall seconds of one audit in a fresh interpreter (start to exit)."""
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH")]))
    code = ONE_SHOT.format(holdout=HOLDOUT, origins=ORIGINS, workers=workers)
    started = time.perf_counter()
    completed = subprocess.run(
        [sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True, text=True
    )
    elapsed = time.perf_counter() - started
    if completed.returncode != 0:
        raise RuntimeError(f"the one-shot audit failed: {completed.stderr.strip()[-2000:]}")
    return elapsed


def spin_on(backend: Any) -> list[int]:
    """The CPU-bound probe on a backend's workers; raises if any item did not run."""
    outcomes = backend.map(spin, [SPIN_STEPS] * SPIN_ITEMS)
    failed = [f"{o.status}: {o.error}" for o in outcomes if not o.ok]
    if failed:
        raise RuntimeError(f"the CPU probe failed in the workers: {failed[0]}")
    return [o.value for o in outcomes]


# ---------------------------------------------------------------------- checks
def estimate_differences(first: Any, second: Any) -> list[str]:
    """Where two audit results' estimates differ by more than the tolerance."""
    problems = []
    if set(first.estimates) != set(second.estimates):
        return [f"different estimators: {sorted(first.estimates)} vs {sorted(second.estimates)}"]
    for key, a in first.estimates.items():
        b = second.estimates[key]
        if a.status != b.status:
            problems.append(f"{key}: status {a.status} vs {b.status}")
            continue
        for name, value in (a.params or {}).items():
            other = (b.params or {}).get(name, np.nan)
            if not abs(value - other) <= PARAM_TOLERANCE:
                problems.append(f"{key} {name}: {value!r} vs {other!r}")
    return problems


def raw_differences(raw: dict, result: Any, spec: ModelSpec) -> list[str]:
    """Where the raw fits differ from the audit's (full-series coefficients, holdout means)."""
    problems = []
    values = raw["values"]
    for (label, key), (coefficients, mean) in values.items():
        if label == "full":
            estimate = result.estimates[key]
            for name in coefficient_names(spec):
                ours = (estimate.params or {}).get(name, np.nan)
                if not abs(coefficients.get(name, np.nan) - ours) <= PARAM_TOLERANCE:
                    problems.append(f"{key} {name}: raw {coefficients.get(name)!r} vs {ours!r}")
        else:
            start = int(label.split()[1])
            i = result.holdout.origins.index(start)
            fc = result.holdout.forecasts[i].get(key)
            # The holdout keeps the back-transformed forecast: exp of the log-scale mean.
            if fc is None or not np.allclose(np.exp(mean), fc.median, rtol=1e-8, atol=0.0):
                problems.append(f"{key} at {label}: holdout point forecasts differ")
    return problems


# ---------------------------------------------------------------------- stage timers
class StageTimers:
    """Exclusive wall and CPU time per stage, from wrappers put around functions for one run.

    A wrapped call's time goes to its label minus the time of wrapped calls inside it, so
    the labels add up to the time spent inside any wrapped function.
    """

    def __init__(self) -> None:
        self.seconds: dict[str, float] = defaultdict(float)
        self.cpu: dict[str, float] = defaultdict(float)
        self.calls: dict[str, int] = defaultdict(int)
        self._stack: list[list[Any]] = []
        self._restore: list[tuple[Any, str, Any]] = []
        self.missing: list[str] = []

    def inside(self, label: str) -> bool:
        return any(frame[0] == label for frame in self._stack)

    def wrap(self, owner: Any, name: str, label: str | Callable[..., str | None]) -> None:
        original = getattr(owner, name, None)
        if original is None:
            self.missing.append(f"{owner.__name__}.{name}")
            return

        def timed(*args: Any, **kwargs: Any) -> Any:
            which = label(*args, **kwargs) if callable(label) else label
            if which is None:  # counted in its caller's stage
                return original(*args, **kwargs)
            frame = [which, 0.0, 0.0]
            self._stack.append(frame)
            started, started_cpu = time.perf_counter(), time.process_time()
            try:
                return original(*args, **kwargs)
            finally:
                elapsed = time.perf_counter() - started
                elapsed_cpu = time.process_time() - started_cpu
                self._stack.pop()
                self.seconds[which] += elapsed - frame[1]
                self.cpu[which] += elapsed_cpu - frame[2]
                self.calls[which] += 1
                if self._stack:
                    self._stack[-1][1] += elapsed
                    self._stack[-1][2] += elapsed_cpu

        self._restore.append((owner, name, original))
        setattr(owner, name, timed)

    def restore(self) -> None:
        for owner, name, original in reversed(self._restore):
            setattr(owner, name, original)
        self._restore.clear()


HOLDOUT_STAGE = "holdout: accuracy metrics and tests"
REMEDY_STAGE = "remedy check: rescaled refits"
#: What each adapter method run inside the capture is called in the stage table.
_CAPTURED = {
    "_fit": "library fit",
    "_forecast": "library forecast",
    "_loglike_at": "own likelihood at given parameters (check)",
    "_forecast_at": "forecast at given parameters (check)",
}


def library_label(key: str, what: str) -> str:
    """The stage label of one library call made for the fits the raw baseline also makes."""
    return f"unit {key}: {what}"


def instrumented_audit(y: Any, spec: ModelSpec) -> tuple[float, float, StageTimers]:
    """One inline audit with timers around its stages; (wall seconds, CPU seconds, timers).

    Functions the package does not have (it changes while this runs) are skipped and listed
    in ``timers.missing``; their time lands in their caller's stage.
    """
    import forecastaudit.adapters.protocol as protocol
    import forecastaudit.diagnosis.holdout as holdout
    import forecastaudit.fitting as fitting
    import forecastaudit.pipeline as pipeline
    import forecastaudit.reference as reference

    timers = StageTimers()

    def context(label: str) -> str:
        if timers.inside(REMEDY_STAGE):
            return f"{REMEDY_STAGE}: {label}"
        if timers.inside(HOLDOUT_STAGE) and not label.startswith("unit "):
            return f"holdout: {label}"
        return label

    def captured(func: Any, *args: Any) -> str:
        key = getattr(getattr(func, "__self__", None), "key", "?")
        what = _CAPTURED.get(getattr(func, "__name__", ""), "other library call")
        return context(library_label(key, what))

    def top_level(label: str) -> Callable[..., str | None]:
        return lambda *a, **k: None if timers._stack else label

    timers.wrap(protocol, "_run_captured", captured)
    timers.wrap(
        fitting, "fit_unit", lambda task: context(library_label(task.key, "adapter around it"))
    )
    timers.wrap(
        fitting,
        "own_loglike_unit",
        lambda task: context(f"unit {task.key}: own-likelihood adapter"),
    )
    for owner, name in (
        (pipeline, "run_fits"),
        (pipeline, "run_own_loglikes"),
        (holdout, "run_fits"),
    ):
        timers.wrap(owner, name, lambda *a, **k: context("execution seam: inline backend"))
    timers.wrap(pipeline, "_run_holdout", HOLDOUT_STAGE)
    timers.wrap(pipeline, "_check_remedies", REMEDY_STAGE)
    timers.wrap(pipeline, "_own_objectives", "own likelihoods at the reference optimum")
    timers.wrap(reference, "fit_reference", lambda *a, **k: context("reference fits"))
    timers.wrap(pipeline, "_forecast_at_reference", lambda *a, **k: context("reference forecasts"))
    timers.wrap(reference, "evaluate", top_level("rescoring under the reference likelihood"))
    timers.wrap(pipeline, "diagnose", "diagnosis")
    timers.wrap(pipeline, "measure_materiality", "materiality in decision units")
    timers.wrap(pipeline, "_likelihood_profiles", "likelihood profiles and grid")
    for name in ("back_transform", "spread_band", "forecast_findings", "residual_checks"):
        timers.wrap(pipeline, name, top_level("forecast checks and residual tests"))
    for name in ("parameter_table", "likelihood_table", "canonical_criteria"):
        timers.wrap(pipeline, name, "tables")
    try:
        started, started_cpu = time.perf_counter(), time.process_time()
        fa.audit(y, spec, holdout=HOLDOUT, origins=ORIGINS, workers=1)
        total = time.perf_counter() - started
        total_cpu = time.process_time() - started_cpu
    finally:
        timers.restore()
    return total, total_cpu, timers


# ---------------------------------------------------------------------- main
def _version(package: str) -> str | None:
    try:
        return importlib.metadata.version(package)
    except importlib.metadata.PackageNotFoundError:
        return None


def main() -> int:
    from forecastaudit.adapters.registry import adapter_class
    from forecastaudit.run import ProcessBackend

    y = fa.load_demo()
    spec = fa.DEMO_SPEC
    keys = [key for key in fa.available_estimators() if key in RAW_FITS]
    jobs = raw_series(y, spec)
    load_before = os.getloadavg()
    print(
        f"Execution seam on the demo series ({len(y)} months), {spec}, holdout {ORIGINS} x "
        f"{HOLDOUT}, estimators: {', '.join(fa.available_estimators())}"
    )
    print(f"  {os.cpu_count()} cores; load average before: {load_before[0]:.2f}")

    # The fork server is shared by the whole interpreter and imports what the backend that
    # starts it asks for; this one asks for what audit() asks for (the adapters' libraries),
    # so the order of the configurations does not change what the workers start with.
    kept = ProcessBackend(WORKERS, preload=[adapter_class(key).module for key in keys])
    results: dict[str, Any] = {}
    raw_runs: list[dict] = []
    w1, w2 = "workers=1", f"workers={WORKERS}"
    kept_name = f"kept ProcessBackend({WORKERS})"
    fork_name = f"fresh ProcessBackend({WORKERS}, fork)"
    spin_inline, spin_workers = "CPU probe, inline", f"CPU probe, {WORKERS} kept workers"

    def audit_with(workers: Any) -> Callable[[], Any]:
        return lambda: fa.audit(y, spec, holdout=HOLDOUT, origins=ORIGINS, workers=workers)

    def audit_forked() -> Any:
        with ProcessBackend(WORKERS, start_method="fork") as backend:
            return audit_with(backend)()

    configurations: dict[str, Callable[[], Any]] = {
        w1: audit_with(1),
        "raw fits": lambda: raw_runs.append(run_raw(jobs, spec, keys)),
        w2: audit_with(WORKERS),
        kept_name: audit_with(kept),
        fork_name: audit_forked,
        spin_inline: lambda: [spin(SPIN_STEPS) for _ in range(SPIN_ITEMS)],
        spin_workers: lambda: spin_on(kept),
    }
    audits = {w1, w2, kept_name, fork_name}
    times: dict[str, list[float]] = {name: [] for name in configurations}
    cpu_times: dict[str, list[float]] = {name: [] for name in configurations}
    warm_up: dict[str, float] = {}
    names = list(configurations)
    try:
        # Round 0 is the warm-up (imports, the fork server, worker start-up of the kept
        # backend); each timed round runs every configuration once, in a rotated order.
        for round_ in range(REPEATS + 1):
            order = names[round_ % len(names) :] + names[: round_ % len(names)]
            for name in order:
                started, started_cpu = time.perf_counter(), time.process_time()
                value = configurations[name]()
                elapsed = time.perf_counter() - started
                elapsed_cpu = time.process_time() - started_cpu
                if round_ == 0:
                    warm_up[name] = elapsed
                else:
                    times[name].append(elapsed)
                    cpu_times[name].append(elapsed_cpu)
                    if name in audits:
                        results[name] = value
            if round_ == 0:
                raw_runs.clear()
                print("  warm-up round done", flush=True)
    finally:
        kept.close()

    # CPU a fresh worker spends starting up, a few times on one-worker backends.
    starts = []
    for _ in range(REPEATS):
        with ProcessBackend(1) as fresh:
            outcome = fresh.map(startup_cpu, [None])[0]
        if not outcome.ok:
            print(f"error: the start-up probe failed: {outcome.error}", file=sys.stderr)
            return 1
        starts.append(outcome.value)
    start_cpu = min(starts)
    fresh_interpreter = {workers: one_shot(workers) for workers in (1, WORKERS)}

    best = {name: min(values) for name, values in times.items()}
    median = {name: statistics.median(values) for name, values in times.items()}
    best_cpu = {name: min(values) for name, values in cpu_times.items()}

    # Both sides did the same work.
    problems = []
    for name in (w2, kept_name, fork_name):
        problems += [f"{name}: {p}" for p in estimate_differences(results[w1], results[name])]
    raw_problems = raw_differences(raw_runs[-1], results[w1], spec)
    n_compared = sum(len(e.params or {}) for e in results[w1].estimates.values())
    if problems or raw_problems:
        for problem in problems + raw_problems:
            print(f"error: results differ: {problem}", file=sys.stderr)
        return 1

    print(
        f"\n{'configuration':<34} {'warm-up (s)':>11} {'best (s)':>9} {'median (s)':>11} "
        f"{'CPU here (s)':>13}  runs (s)"
    )
    for name in names:
        runs = ", ".join(f"{t:.2f}" for t in times[name])
        print(
            f"{name:<34} {warm_up[name]:>11.2f} {best[name]:>9.2f} {median[name]:>11.2f} "
            f"{best_cpu[name]:>13.2f}  {runs}"
        )
    print(
        "  CPU here: the least CPU time this process used in one run (the worker processes' "
        "CPU is not in it)"
    )
    n_fits = len(jobs) * len(keys)
    print(
        f"  raw fits: {n_fits} fits and forecasts ({len(keys)} libraries x {len(jobs)} series), "
        f"{n_fits / best['raw fits']:.1f} per second at best"
    )

    parallel = best[w2] / best[w1]
    parallel_kept = best[kept_name] / best[w1]
    parallel_fork = best[fork_name] / best[w1]
    capacity = best[spin_workers] / best[spin_inline]
    overhead = best[w1] / best["raw fits"]
    overhead_cpu = best_cpu[w1] / best_cpu["raw fits"]
    parallel_met = parallel <= TARGET_PARALLEL
    overhead_met = overhead <= TARGET_OVERHEAD
    print("\nRatios of best times (ratio of medians in brackets)")
    print(
        f"  1. {w2} / workers=1: {parallel:.3f} ({median[w2] / median[w1]:.3f}) "
        f"target <= {TARGET_PARALLEL}: {'PASS' if parallel_met else 'MISS'}"
    )
    print(
        f"     (information) kept backend / workers=1: {parallel_kept:.3f} "
        f"({median[kept_name] / median[w1]:.3f}); fresh forked backend / workers=1: "
        f"{parallel_fork:.3f} ({median[fork_name] / median[w1]:.3f})"
    )
    print(
        f"     starting {WORKERS} workers (forkserver) costs each audit about "
        f"{best[w2] - best[kept_name]:.2f} s wall (best {w2} - best kept); one fresh worker "
        f"uses {start_cpu:.2f} s CPU before its first fit (least of {REPEATS}; forked from the "
        "fork server, which has the libraries imported)"
    )
    print(
        f"     one audit in a fresh interpreter (imports and fork server included, one run "
        f"each): workers=1 {fresh_interpreter[1]:.2f} s, {w2} {fresh_interpreter[WORKERS]:.2f} "
        f"s, ratio {fresh_interpreter[WORKERS] / fresh_interpreter[1]:.3f}"
    )
    print(
        f"     estimates identical to {PARAM_TOLERANCE:g}: yes ({n_compared} parameters over "
        f"{len(results[w1].estimates)} estimates, in each of the three process configurations)"
    )
    print(
        f"     CPU probe: {WORKERS} workers take {capacity:.2f} of the inline time "
        f"(ideal {1 / WORKERS:.2f})"
        + (
            f"; MACHINE BUSY: this session did not get {WORKERS} cores, so the parallel "
            "ratio measures the machine, not the package"
            if capacity > CAPACITY_WARNING
            else ""
        )
    )
    print(
        f"  2. audit workers=1 / raw fits: {overhead:.3f} "
        f"({median[w1] / median['raw fits']:.3f}) target <= {TARGET_OVERHEAD}: "
        f"{'PASS' if overhead_met else 'MISS'}"
    )
    print(
        f"     in CPU time of this process (both run inline; less inflated by other work on the "
        f"machine than wall time): {overhead_cpu:.3f}: "
        f"{'PASS' if overhead_cpu <= TARGET_OVERHEAD else 'MISS'}"
    )
    print(
        f"     raw fits agree with the audit to {PARAM_TOLERANCE:g}: yes (full-series "
        "coefficients; holdout point forecasts)"
    )

    # Where the audit's time goes, from one more audit with timers on its stages.
    # The raw fits are run again right after it, so the two are compared at the same load.
    total, total_cpu, timers = instrumented_audit(y, spec)
    raw_cpu = run_raw(jobs, spec, keys)["cpu"]
    rest = "other (validation, result assembly, unwrapped code)"
    stages = dict(timers.seconds)
    stages[rest] = total - sum(stages.values())
    stages_cpu = dict(timers.cpu)
    stages_cpu[rest] = total_cpu - sum(stages_cpu.values())

    def in_audit(key: str, *whats: str) -> float:
        return sum(stages_cpu.get(library_label(key, what), 0.0) for what in whats)

    per_library = {key: in_audit(key, "library fit", "library forecast") for key in keys}
    per_adapter = {key: in_audit(key, "adapter around it") for key in keys}
    library, adapters = sum(per_library.values()), sum(per_adapter.values())
    print(
        f"\nWhere one workers=1 audit's time goes ({total:.2f} s wall, {total_cpu:.2f} s CPU; "
        "timers on its stages, shares of CPU)"
    )
    print(f"  {'stage':<68} {'wall (s)':>8} {'CPU (s)':>8} {'share':>6} {'calls':>6}")
    for label, seconds in sorted(stages_cpu.items(), key=lambda item: -item[1]):
        calls = timers.calls.get(label, "")
        print(
            f"  {label:<68} {stages[label]:>8.3f} {seconds:>8.3f} {seconds / total_cpu:>6.1%} "
            f"{calls!s:>6}"
        )
    if timers.missing:
        print(f"  (not in the package now, not timed apart: {', '.join(timers.missing)})")
    beyond = total_cpu - library - adapters
    print(
        f"  CPU: the library fits and forecasts the raw baseline also makes {library:.2f} s (raw "
        f"fits run right after: {sum(raw_cpu.values()):.2f} s); adapters around them "
        f"{adapters:.2f} s; everything else the audit adds {beyond:.2f} s "
        f"({beyond / total_cpu:.1%} of the audit)"
    )
    print(
        f"  {'library (CPU, 5 fits + forecasts)':<36} {'raw (s)':>8} {'in the audit (s)':>17} "
        f"{'adapter (s)':>12}"
    )
    for key in keys:
        print(
            f"  {key:<36} {raw_cpu[key]:>8.3f} {per_library[key]:>17.3f} {per_adapter[key]:>12.3f}"
        )
    share_units = (library + adapters) / total_cpu
    bound = 1 - share_units + share_units / WORKERS
    idle_estimate = bound + start_cpu / total_cpu
    print(
        f"  {share_units:.0%} of the audit's CPU is in the fit units on the seam, so {WORKERS} "
        f"workers cannot bring it below {bound:.2f} of workers=1 on an idle machine, even "
        f"with workers kept; with {WORKERS} fresh workers starting side by side "
        f"({start_cpu:.2f} s CPU each) the estimate is {idle_estimate:.2f} (from CPU times, "
        "not a measurement)"
    )
    load_after = os.getloadavg()
    print(f"  load average after: {load_after[0]:.2f}")

    record = {
        "benchmark": "seam",
        "series": "demo (forecastaudit.load_demo), log transform",
        "model": str(spec),
        "holdout": HOLDOUT,
        "origins": ORIGINS,
        "estimators": fa.available_estimators(),
        "repeats": REPEATS,
        "ratio_of": "best times",
        "times_seconds": times,
        "warm_up_seconds": warm_up,
        "cpu_seconds_this_process": cpu_times,
        "parallel_ratio": parallel,
        "parallel_ratio_medians": median[w2] / median[w1],
        "parallel_ratio_kept_backend": parallel_kept,
        "parallel_ratio_fresh_fork_backend": parallel_fork,
        "cpu_probe_ratio": capacity,
        "worker_startup_cpu_seconds": starts,
        "fresh_interpreter_seconds": {str(k): v for k, v in fresh_interpreter.items()},
        "parallel_bound_kept_workers": bound,
        "parallel_estimate_idle_machine": idle_estimate,
        "machine_busy": capacity > CAPACITY_WARNING,
        "parallel_target": TARGET_PARALLEL,
        "parallel_target_met": parallel_met,
        "overhead_ratio": overhead,
        "overhead_ratio_medians": median[w1] / median["raw fits"],
        "overhead_ratio_cpu": overhead_cpu,
        "overhead_target": TARGET_OVERHEAD,
        "overhead_target_met": overhead_met,
        "estimates_identical": True,
        "raw_cpu_seconds_by_library": raw_cpu,
        "stage_seconds": stages,
        "stage_cpu_seconds": stages_cpu,
        "instrumented_audit_seconds": total,
        "instrumented_audit_cpu_seconds": total_cpu,
        "load_average": {"before": load_before[0], "after": load_after[0]},
        "versions": {
            "python": platform.python_version(),
            "forecastaudit": __version__,
            **{name: _version(name) for name in LIBRARIES},
        },
        "machine": platform.platform(),
        "cores": os.cpu_count(),
        "blas_threads": os.environ.get("OPENBLAS_NUM_THREADS"),
    }
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps(record, indent=2) + "\n")
    print(f"wrote {RESULTS}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
