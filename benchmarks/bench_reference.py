"""Speed of the reference likelihood against statsmodels SARIMAX at the same parameters.

For seeded simulated ARIMA(1,1,1)x(0,1,1)12 series of n = 130, 500 and 2000 observations,
times one reference evaluation (:func:`forecastaudit.reference.evaluate`: differencing,
polynomial expansion and the exact likelihood) against ``SARIMAX(y, order=(1, 1, 1),
seasonal_order=(0, 1, 1, 12), simple_differencing=True).loglike(params)`` with the model built
once outside the timed loop. Both are timed in this run, best of several repeats, and the
ratio ours / statsmodels is reported with whether it meets the 0.5 target. A second table
times the dense and banded paths on short series, which is how ``DENSE_THRESHOLD`` was chosen.

Exit status is non-zero only on an error (including the two values disagreeing), never on a
missed target. Results go to ``benchmarks/results/reference_loglike.json``.

Run: ``PYTHONPATH=. python benchmarks/bench_reference.py``
"""

from __future__ import annotations

import os

# One BLAS thread for both sides: these are small problems, and on a busy machine
# multithreaded BLAS turns a 100-microsecond call into tens of milliseconds of contention.
# Set before numpy is imported; an explicit setting in the environment wins.
for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")

import json  # noqa: E402
import platform  # noqa: E402
import sys  # noqa: E402
import timeit  # noqa: E402
import warnings  # noqa: E402
from collections.abc import Callable  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import scipy  # noqa: E402
import statsmodels  # noqa: E402
from scipy.signal import lfilter  # noqa: E402
from statsmodels.tsa.statespace.sarimax import SARIMAX  # noqa: E402

from forecastaudit import ModelSpec  # noqa: E402
from forecastaudit._version import __version__  # noqa: E402
from forecastaudit.reference.likelihood import DENSE_THRESHOLD, evaluate  # noqa: E402

TARGET_RATIO = 0.5
LENGTHS = (130, 500, 2000)
SCAN_LENGTHS = (15, 20, 25, 30, 40, 60, 130)
SPEC = ModelSpec((1, 1, 1), (0, 1, 1), 12)
PARAMS = {"ar_lag1": 0.3, "ma_lag1": -0.4, "sma_lag12": -0.6, "sigma2": 1.0}
RESULTS = Path(__file__).resolve().parent / "results" / "reference_loglike.json"


def simulate(n: int, seed: int) -> np.ndarray:
    """A seeded ARIMA(1,1,1)x(0,1,1)12 series of length n (ARMA part after a burn-in)."""
    rng = np.random.default_rng(seed)
    burn = 200
    e = rng.standard_normal(n + burn)
    ar_poly = np.array([1.0, -PARAMS["ar_lag1"]])
    ma_poly = np.convolve([1.0, PARAMS["ma_lag1"]], np.r_[1.0, np.zeros(11), PARAMS["sma_lag12"]])
    w = lfilter(ma_poly, ar_poly, e)[burn:]
    integrate = np.convolve([1.0, -1.0], np.r_[1.0, np.zeros(11), -1.0])
    return lfilter([1.0], integrate, w)


def best_time(func: Callable[[], object], repeat: int = 7) -> float:
    """Best per-call time over ``repeat`` runs, each long enough (timeit's autorange)."""
    timer = timeit.Timer(func)
    number, _ = timer.autorange()
    return min(timer.repeat(repeat=repeat, number=number)) / number


def main() -> int:
    rows = []
    print(f"Reference loglike vs statsmodels SARIMAX loglike, {SPEC}")
    print(f"{'n':>6} {'ours (ms)':>10} {'statsmodels (ms)':>17} {'ratio':>7} {'path':>7}  target")
    for n in LENGTHS:
        y = simulate(n, seed=n)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            model = SARIMAX(y, order=(1, 1, 1), seasonal_order=(0, 1, 1, 12),
                            simple_differencing=True)  # fmt: skip
        theirs_params = np.array(
            [PARAMS["ar_lag1"], PARAMS["ma_lag1"], PARAMS["sma_lag12"], PARAMS["sigma2"]]
        )
        ours_value = evaluate(y, SPEC, PARAMS)
        theirs_value = float(model.loglike(theirs_params))
        if not np.isclose(ours_value.loglike, theirs_value, rtol=1e-8, atol=0.0):
            print(f"error: values differ at n={n}: {ours_value.loglike!r} vs {theirs_value!r}")
            return 1
        ours = best_time(lambda y=y: evaluate(y, SPEC, PARAMS))
        theirs = best_time(lambda model=model, p=theirs_params: model.loglike(p))
        ratio = ours / theirs
        met = ratio <= TARGET_RATIO
        rows.append(
            {
                "n": n,
                "n_w": ours_value.n,
                "ours_seconds": ours,
                "statsmodels_seconds": theirs,
                "ratio": ratio,
                "path": ours_value.method,
                "meets_target": met,
                "loglike": ours_value.loglike,
            }
        )
        print(f"{n:>6} {ours * 1e3:>10.3f} {theirs * 1e3:>17.3f} {ratio:>7.3f} "
              f"{ours_value.method:>7}  {'met' if met else 'MISSED'}")  # fmt: skip

    print(f"\nDense Toeplitz vs banded (Ansley) path; DENSE_THRESHOLD = {DENSE_THRESHOLD}")
    print(f"{'n_w':>6} {'dense (us)':>11} {'banded (us)':>12}")
    scan = []
    for n_w in SCAN_LENGTHS:
        y = simulate(n_w + SPEC.lost_to_differencing, seed=1000 + n_w)
        dense = best_time(lambda y=y: evaluate(y, SPEC, PARAMS, method="dense"))
        banded = best_time(lambda y=y: evaluate(y, SPEC, PARAMS, method="banded"))
        scan.append({"n_w": n_w, "dense_seconds": dense, "banded_seconds": banded})
        print(f"{n_w:>6} {dense * 1e6:>11.1f} {banded * 1e6:>12.1f}")

    all_met = all(row["meets_target"] for row in rows)
    verdict = "met at every n" if all_met else "MISSED at some n"
    print(f"\nTarget ratio <= {TARGET_RATIO}: {verdict}")
    record = {
        "benchmark": "reference_loglike",
        "model": str(SPEC),
        "params": PARAMS,
        "target_ratio": TARGET_RATIO,
        "all_targets_met": all_met,
        "rows": rows,
        "dense_threshold": DENSE_THRESHOLD,
        "path_scan": scan,
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
            "forecastaudit": __version__,
        },
        "machine": platform.machine(),
        "blas_threads": os.environ.get("OPENBLAS_NUM_THREADS"),
    }
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    RESULTS.write_text(json.dumps(record, indent=2) + "\n")
    print(f"wrote {RESULTS}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
