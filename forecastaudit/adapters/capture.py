"""Calling a library while keeping its warnings and printed output; errors come back as values."""

from __future__ import annotations

import contextlib
import io
import time
import traceback
import warnings
from dataclasses import dataclass
from typing import Any

from forecastaudit.estimate import CapturedWarning


@dataclass
class _Captured:
    result: Any
    error: str
    trace: str
    warnings: list[CapturedWarning]
    output: str
    seconds: float

    @property
    def failed(self) -> bool:
        """Whether the call raised or returned None."""
        return bool(self.error) or self.result is None

    def failure(self, what: str) -> dict[str, Any]:
        """The fields of a failed outcome when this call raised or returned None.

        ``what`` names the call in the reason given for an empty result ("the fit returned
        nothing"); the printed output keeps the traceback.
        """
        return {
            "status": "failed",
            "reason": self.error or f"the {what} returned nothing",
            "warnings": self.warnings,
            "output": (self.output + "\n" + self.trace).strip(),
            "seconds": self.seconds,
        }

    def kept(self, seconds: float | None = None) -> dict[str, Any]:
        """The warnings, printed output and wall time of this call, for its outcome.

        ``seconds`` replaces the call's own wall time when given.
        """
        return {
            "warnings": self.warnings,
            "output": self.output,
            "seconds": self.seconds if seconds is None else seconds,
        }


def _run_captured(func: Any, *args: Any, **kwargs: Any) -> _Captured:
    """Call ``func``, keeping its warnings and printed output; a raised error is returned."""
    out_buffer, err_buffer = io.StringIO(), io.StringIO()
    error, trace, result = "", "", None
    start = time.perf_counter()
    with (
        warnings.catch_warnings(record=True) as caught,
        contextlib.redirect_stdout(out_buffer),
        contextlib.redirect_stderr(err_buffer),
    ):
        warnings.simplefilter("always")
        try:
            result = func(*args, **kwargs)
        except Exception as exc:  # the library's failure is a finding, not a crash
            error = f"{type(exc).__name__}: {exc}"
            trace = traceback.format_exc(limit=3)
    seconds = time.perf_counter() - start
    captured = [
        CapturedWarning(
            category=w.category.__name__, message=str(w.message), source=f"{w.filename}:{w.lineno}"
        )
        for w in caught
    ]
    printed = (out_buffer.getvalue() + err_buffer.getvalue()).strip()
    return _Captured(result, error, trace, captured, printed, seconds)
