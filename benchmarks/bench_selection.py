"""Speed of our bounded exhaustive reference search against pmdarima's stepwise search.

On the natural log of the airline passengers series (``sktime.datasets.load_airline()``,
period 12), times in the same run (1) pmdarima's ``auto_arima`` with its own defaults
(stepwise, as its users run it) and (2) our exhaustive search under the reference AICc
(:func:`forecastaudit.search.exhaustive_reference_search`) within the differencing
choices pmdarima and statsforecast make on this series, ``p, q <= 2``, ``P, Q <= 1``, with
and without a constant where d + D <= 1. The ratio ours / pmdarima is reported with
whether it meets the 0.5 target, and how many worker processes our search used.

Exit status is non-zero only on an error, never on a missed target. Results go to
``benchmarks/results/selection.json``.

Run: ``PYTHONPATH=. python benchmarks/bench_selection.py``
"""

from __future__ import annotations

import os

# One BLAS thread for both sides: these are small problems, and on a busy machine
# multithreaded BLAS turns each likelihood call into thread contention. Set before numpy is
# imported; an explicit setting in the environment wins.
for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")

import json  # noqa: E402
import platform  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

from forecastaudit._version import __version__  # noqa: E402
from forecastaudit.adapters.registry import get_search  # noqa: E402
from forecastaudit.search.exhaustive import exhaustive_reference_search  # noqa: E402

TARGET_RATIO = 0.5
RESULTS = Path(__file__).resolve().parent / "results" / "selection.json"


def main() -> int:
    from sktime.datasets import load_airline

    y = np.log(load_airline().to_numpy(dtype=float))
    pmdarima = get_search("pmdarima").run(y, 12)
    if not pmdarima.ok:
        print(f"pmdarima's search did not run: {pmdarima.reason}", file=sys.stderr)
        return 1
    statsforecast = get_search("statsforecast").run(y, 12)
    choices = {(pmdarima.spec.d, pmdarima.spec.D)}
    if statsforecast.ok:
        choices.add((statsforecast.spec.d, statsforecast.spec.D))
    started = time.perf_counter()
    table, info = exhaustive_reference_search(y, 12, choices)
    ours = time.perf_counter() - started
    ratio = ours / pmdarima.seconds
    met = ratio <= TARGET_RATIO
    print("Order search on the log airline series, period 12")
    print(
        f"  pmdarima auto_arima (stepwise, defaults): {pmdarima.seconds:8.2f} s, "
        f"{pmdarima.candidates} candidates, selects {pmdarima.selected}"
    )
    if statsforecast.ok:
        print(
            f"  statsforecast AutoARIMA (defaults):      {statsforecast.seconds:8.2f} s, "
            f"{statsforecast.candidates} candidates, selects {statsforecast.selected}"
        )
    print(
        f"  reference exhaustive search:              {ours:8.2f} s, "
        f"{info['candidates']} candidates, {info['n_jobs']} process(es)"
    )
    print(
        f"  ratio ours / pmdarima: {ratio:.3f} (target <= {TARGET_RATIO}): "
        f"{'met' if met else 'NOT met'}"
    )
    result = {
        "benchmark": "selection",
        "series": "log airline passengers (sktime.datasets.load_airline), period 12",
        "pmdarima_seconds": pmdarima.seconds,
        "pmdarima_candidates": pmdarima.candidates,
        "pmdarima_selected": pmdarima.selected,
        "statsforecast_seconds": statsforecast.seconds if statsforecast.ok else None,
        "statsforecast_candidates": statsforecast.candidates if statsforecast.ok else None,
        "reference_seconds": ours,
        "reference_candidates": info["candidates"],
        "reference_processes": info["n_jobs"],
        "reference_bounds": info["bounds"],
        "differencing": info["differencing"],
        "ratio": ratio,
        "target_ratio": TARGET_RATIO,
        "target_met": met,
        "best_by_differencing": {
            f"d={d}, D={D}": group.iloc[0]["model"] for (d, D), group in table.groupby(["d", "D"])
        },
        "versions": {
            "forecastaudit": __version__,
            "pmdarima": pmdarima.version,
            "statsforecast": statsforecast.version,
            "python": platform.python_version(),
        },
        "blas_threads": os.environ.get("OPENBLAS_NUM_THREADS"),
        "machine": platform.platform(),
    }
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps(result, indent=2) + "\n")
    print(f"written {RESULTS}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
