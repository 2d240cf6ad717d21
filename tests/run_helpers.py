"""Module-level functions for ``tests/test_run.py``.

Worker processes import functions by module name, so the functions the tests run in
workers live here, in a module importable through the parent's ``sys.path`` (pytest puts
``tests/`` on it; the process backend passes that path on to its workers).
"""

from __future__ import annotations

import os
import signal
import sys
import threading
import time
from typing import Any


def square(x: float) -> float:
    """Return ``x * x``."""
    return x * x


def square_or_hang(x: Any) -> Any:
    """Sleep a minute when given ``"hang"``; square anything else."""
    if x == "hang":
        time.sleep(60)
    return x * x


def square_or_exit(x: Any) -> Any:
    """Exit the process at once with code 3 when given ``"exit"``; square anything else."""
    if x == "exit":
        os._exit(3)
    return x * x


def square_or_kill(x: Any) -> Any:
    """Kill this process with SIGKILL when given ``"kill"``; square anything else."""
    if x == "kill":
        os.kill(os.getpid(), signal.SIGKILL)
        time.sleep(10)
    return x * x


def square_or_raise(x: Any) -> Any:
    """Raise ``ValueError`` when given a negative number; square anything else."""
    if x < 0:
        raise ValueError(f"negative input {x}")
    return x * x


def return_lock(x: Any) -> Any:
    """Return something that cannot be pickled."""
    return threading.Lock()


def blas_threads(x: Any) -> list[tuple[str, int]]:
    """Load numpy and report ``(library, num_threads)`` for every BLAS pool loaded."""
    import numpy  # noqa: F401
    from threadpoolctl import threadpool_info

    return [
        (info["internal_api"], info["num_threads"])
        for info in threadpool_info()
        if info["user_api"] == "blas"
    ]


def thread_variables(x: Any) -> dict[str, str | None]:
    """The thread-count environment variables as this process sees them."""
    names = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
    return {name: os.environ.get(name) for name in names}


def process_id(x: Any) -> int:
    """The id of the process that runs this."""
    return os.getpid()


def sleep_then_square(x: float) -> float:
    """Sleep ``x`` tenths of a second, then return ``x * x``."""
    time.sleep(x / 10)
    return x * x


def search_path(x: Any) -> list[str]:
    """This process's ``sys.path``."""
    return list(sys.path)
