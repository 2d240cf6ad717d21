"""Speed and memory of panel audits: local processes, a Dask cluster, overhead, streaming.

On the seeded demo panel (``forecastaudit.generate_demo_panel``: the fictional Ashgrove
Regional Blood Service's supply lines, 120 months each) with the demo model and the panel's
default estimators (one per engine, plus the reference fit), this measures in one run:

1. 2 local worker processes against 1 (inline) on the same ``SPEED_SERIES`` series: the
   throughput ratio (target at least 1.8).
2. A Dask ``LocalCluster`` (2 worker processes of 1 thread, started here) against 2 local
   processes: the throughput ratio (target at least 0.85).
3. The panel audit run inline against the raw fits of the same engines on the same series
   (each library called directly with its adapter's options, forecasts with 80% and 95%
   intervals, and our reference fit started from their estimates, serially under one BLAS
   thread): the time ratio (target at most 1.15).
4. Peak memory of a panel audit of ``BIG`` series against one of ``SMALL`` series (target at
   most 1.2): each in a fresh interpreter on 2 local processes, writing to a temporary
   folder; the peak resident set of the main process, where results arrive. A worker holds
   one series at a time whatever the panel's size; its peak is not measured here (workers
   are children of the start-up server, so the main process cannot read their usage).

The backends of (1) and (2) are started before the timing and kept across rounds (their
start-up, printed separately, is paid once per run whatever its size). Rounds are
interleaved after one warm-up round; ratios are of the best round, medians printed beside.
Series per second per core are printed for every configuration. Each round also runs a
CPU-bound probe inline and on the two local workers: when two processes of this session get
less than two cores' worth of CPU (a machine shared with other work), no parallel target
can be met, and the script says so.

Exit status is non-zero only on an error (including summaries that disagree between
configurations), never on a missed target. Results go to ``benchmarks/results/panel.json``.

Run: ``PYTHONPATH=. python benchmarks/bench_panel.py`` (``FORECASTAUDIT_BENCH_QUICK=1`` runs a
small version that checks the script, not the targets).
"""

from __future__ import annotations

import os

for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")

import json  # noqa: E402
import platform  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402
from typing import Any  # noqa: E402

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))

from bench_seam import RAW_FITS, spin_on  # noqa: E402

import forecastaudit as fa  # noqa: E402
from forecastaudit.demo import DEMO_SPEC, generate_demo_panel  # noqa: E402
from forecastaudit.panel import audit_panel, independent_estimators  # noqa: E402
from forecastaudit.run import DaskBackend, ProcessBackend  # noqa: E402
from forecastaudit.series import prepare_series  # noqa: E402
from forecastaudit.spec import ModelSpec  # noqa: E402

TARGET_TWO_WORKERS = 1.8
TARGET_DASK = 0.85
TARGET_OVERHEAD = 1.15
TARGET_MEMORY = 1.2
SPEED_SERIES = 40
SMALL, BIG = 200, 1000
WORKERS = 2
ROUNDS = 3
if os.environ.get("FORECASTAUDIT_BENCH_QUICK"):  # a quick look at the script itself
    SPEED_SERIES, SMALL, BIG, ROUNDS = 8, 20, 60, 1
LEVELS = (80.0, 95.0)
CAPACITY_WARNING = 0.6
RESULTS = ROOT / "benchmarks" / "results" / "panel.json"
COLUMNS = {"id_column": "supply_line", "time_column": "month", "value_column": "units"}

MEMORY_RUN = """
import resource, sys, tempfile
from forecastaudit.demo import DEMO_SPEC, generate_demo_panel
from forecastaudit.panel import audit_panel

if __name__ == "__main__":
    table = generate_demo_panel(hospitals={hospitals})
    with tempfile.TemporaryDirectory() as folder:
        result = audit_panel(table, DEMO_SPEC, id_column="supply_line", time_column="month",
                             value_column="units", workers={workers}, out=folder)
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(len(result.summary), own, result.seconds)
"""


def first_lines(table: pd.DataFrame, series: int) -> pd.DataFrame:
    keep = table["supply_line"].drop_duplicates().iloc[:series]
    return table[table["supply_line"].isin(keep)]


def run_panel(table: pd.DataFrame, workers: Any = None, client: Any = None) -> tuple[float, Any]:
    started = time.perf_counter()
    result = audit_panel(table, DEMO_SPEC, workers=workers, client=client, reports=False, **COLUMNS)
    return time.perf_counter() - started, result


def summary_problems(first: Any, second: Any, label: str) -> list[str]:
    """Where two panel summaries differ (order, verdicts, causes, gaps to 1e-6)."""
    a, b = first.summary, second.summary
    if list(a.index) != list(b.index):
        return [f"{label}: the series come in another order"]
    problems = []
    for column in ("verdict", "cause"):
        if column in a and not a[column].equals(b[column]):
            problems.append(f"{label}: column {column} differs")
    for column in a.columns:
        if pd.api.types.is_float_dtype(a[column]) and not column.endswith("seconds"):
            x, y = a[column].to_numpy(), b[column].to_numpy()
            if not np.allclose(x, y, rtol=0, atol=1e-6, equal_nan=True):
                problems.append(f"{label}: column {column} differs")
    return problems


def raw_panel(table: pd.DataFrame, spec: ModelSpec, keys: list[str]) -> float:
    """The raw fits of the same engines on the same series, serially; wall seconds."""
    from threadpoolctl import threadpool_limits

    from forecastaudit.reference.fit import fit_reference

    started = time.perf_counter()
    with threadpool_limits(limits=1), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for _, frame in table.groupby("supply_line", sort=False):
            y = prepare_series(frame["units"].to_numpy(dtype=float), period=spec.period)
            y_t = np.array(y.transformed(spec), dtype=float)
            starts = {}
            for key in keys:
                coefficients, _ = RAW_FITS[key](y_t.copy(), spec, spec.m)
                starts[key] = coefficients
            fit_reference(y_t, spec, starts)
    return time.perf_counter() - started


def memory_run(series: int, workers: int) -> dict[str, float]:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH")]))
    with tempfile.TemporaryDirectory() as folder:
        script = Path(folder) / "memory_run.py"
        script.write_text(MEMORY_RUN.format(hospitals=series // 4, workers=workers))
        completed = subprocess.run(
            [sys.executable, str(script)], cwd=ROOT, env=env, capture_output=True, text=True
        )
    if completed.returncode != 0:
        raise RuntimeError(f"the memory run failed: {completed.stderr.strip()[-2000:]}")
    count, own, seconds = completed.stdout.split()[-3:]
    return {
        "series": int(count),
        "main_peak_mib": int(own) / 1024,
        "seconds": float(seconds),
    }


def per_core(series: int, seconds: float, cores: int) -> float:
    return series / seconds / cores


def main() -> int:
    from dask.distributed import Client, LocalCluster

    spec = DEMO_SPEC if isinstance(DEMO_SPEC, ModelSpec) else ModelSpec.parse(str(DEMO_SPEC))
    keys = independent_estimators("statsmodels-sarimax")
    print(
        f"forecastaudit {fa.__version__}, Python {platform.python_version()}, "
        f"{os.cpu_count()} CPUs; estimators {', '.join(keys)} and the reference fit"
    )
    table = first_lines(generate_demo_panel(hospitals=SPEED_SERIES // 4), SPEED_SERIES)
    problems: list[str] = []

    started = time.perf_counter()
    processes = ProcessBackend(WORKERS)
    spin_on(processes)
    process_start = time.perf_counter() - started
    started = time.perf_counter()
    cluster = LocalCluster(
        n_workers=WORKERS, threads_per_worker=1, processes=True, dashboard_address=None
    )
    client = Client(cluster)
    dask = DaskBackend(client)
    dask_start = time.perf_counter() - started
    print(
        f"start-up (paid once per run): {WORKERS} local processes {process_start:.1f} s, "
        f"Dask LocalCluster({WORKERS}) {dask_start:.1f} s"
    )

    times: dict[str, list[float]] = {"inline": [], "processes": [], "dask": [], "raw": []}
    spins: dict[str, list[float]] = {"inline": [], "processes": []}
    results: dict[str, Any] = {}
    try:
        for round_ in range(ROUNDS + 1):
            for label, kwargs in (
                ("inline", {"workers": 1}),
                ("processes", {"workers": processes}),
                ("dask", {"client": client}),
            ):
                seconds, result = run_panel(table, **kwargs)
                if round_:
                    times[label].append(seconds)
                results[label] = result
            seconds = raw_panel(table, spec, keys)
            if round_:
                times["raw"].append(seconds)
            from bench_seam import SPIN_ITEMS, SPIN_STEPS, spin

            t0 = time.perf_counter()
            for _ in range(SPIN_ITEMS):
                spin(SPIN_STEPS)
            t1 = time.perf_counter()
            spin_on(processes)
            t2 = time.perf_counter()
            if round_:
                spins["inline"].append(t1 - t0)
                spins["processes"].append(t2 - t1)
            print(
                f"round {round_}{' (warm-up)' if not round_ else ''}: "
                + ", ".join(f"{k} {v[-1]:.1f} s" for k, v in times.items() if v and round_)
            )
    finally:
        dask.close()
        client.close()
        cluster.close()
        processes.close()
    problems += summary_problems(results["inline"], results["processes"], "processes")
    problems += summary_problems(results["inline"], results["dask"], "dask")

    best = {k: min(v) for k, v in times.items()}
    median = {k: statistics.median(v) for k, v in times.items()}
    two = best["inline"] / best["processes"]
    dask_ratio = best["processes"] / best["dask"]
    overhead = best["inline"] / best["raw"]
    capacity = min(spins["processes"]) / min(spins["inline"])
    n = SPEED_SERIES
    print(
        f"\nseries per second per core ({n} series): inline "
        f"{per_core(n, best['inline'], 1):.2f}, {WORKERS} processes "
        f"{per_core(n, best['processes'], WORKERS):.2f}, Dask "
        f"{per_core(n, best['dask'], WORKERS):.2f}; raw fits {per_core(n, best['raw'], 1):.2f}"
    )
    print(
        f"1. {WORKERS} local workers against 1: {two:.2f}x throughput (median "
        f"{median['inline'] / median['processes']:.2f}x), target >= {TARGET_TWO_WORKERS}"
    )
    print(
        f"2. Dask LocalCluster({WORKERS}) against {WORKERS} local processes: {dask_ratio:.2f} "
        f"of the throughput (median {median['processes'] / median['dask']:.2f}), "
        f"target >= {TARGET_DASK}"
    )
    print(
        f"3. panel audit against the raw fits: {overhead:.2f}x the time (median "
        f"{median['inline'] / median['raw']:.2f}x), target <= {TARGET_OVERHEAD}"
    )
    if capacity > CAPACITY_WARNING:
        print(
            f"   note: the CPU probe on {WORKERS} workers took {capacity:.2f} of its inline "
            "time: this session did not get two cores' worth of CPU, so no parallel target "
            "can be met in this run"
        )

    small = memory_run(SMALL, WORKERS)
    big = memory_run(BIG, WORKERS)
    memory = big["main_peak_mib"] / small["main_peak_mib"]
    print(
        f"4. peak memory of the main process at {big['series']} series "
        f"({big['main_peak_mib']:.0f} MiB) against {small['series']} "
        f"({small['main_peak_mib']:.0f} MiB): {memory:.2f}x, target <= {TARGET_MEMORY}; "
        f"{per_core(big['series'], big['seconds'], WORKERS):.2f} series/s/core at "
        f"{big['series']} series"
    )

    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(
        json.dumps(
            {
                "series": n,
                "workers": WORKERS,
                "rounds": ROUNDS,
                "estimators": keys,
                "seconds": times,
                "cpu_probe": spins,
                "startup_seconds": {"processes": process_start, "dask": dask_start},
                "ratios": {
                    "two_workers": two,
                    "dask": dask_ratio,
                    "overhead": overhead,
                    "memory": memory,
                    "cpu_probe": capacity,
                },
                "targets": {
                    "two_workers": TARGET_TWO_WORKERS,
                    "dask": TARGET_DASK,
                    "overhead": TARGET_OVERHEAD,
                    "memory": TARGET_MEMORY,
                },
                "memory": {"small": small, "big": big},
                "problems": problems,
            },
            indent=1,
        )
    )
    if problems:
        print("PROBLEMS:\n" + "\n".join(problems))
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
