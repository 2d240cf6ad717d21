"""The result of a panel audit: the summary, the causes counted over series, the store."""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from forecastaudit.panel.summary import NOT_AUDITED, CauseCount

__all__ = ["PanelResult"]

VERDICTS = ("fail", NOT_AUDITED, "pass-with-notes", "pass")


@dataclass
class PanelResult:
    """The result of :func:`~forecastaudit.panel.audit_panel`.

    Attributes
    ----------
    summary : pandas.DataFrame
        One row per series, indexed by id, most serious first (see
        :mod:`forecastaudit.panel.summary` for the order and the columns).
    causes : list of CauseCount
        Findings counted over series, the production estimator's material ones first.
    settings : dict
        The audit settings every series shared.
    seconds : float
        Wall time of the run (0 for a result read back from a store).
    backend : str
        Where the series ran: ``"inline"``, ``"processes"`` or ``"dask"``.
    workers : int
        How many series ran at once.
    resumed : int
        Series taken from an earlier run's store instead of audited again.
    folder : pathlib.Path or None
        The output folder, when the panel was written to one.
    entries : dict
        Per series id, what the store keeps in memory (the summary row with every
        estimator's gap and forecast difference, the counted findings, the sketch of a
        failing series); the full records stay in the store (see :meth:`record`).
    """

    summary: pd.DataFrame
    causes: list[CauseCount]
    settings: dict[str, Any]
    seconds: float = 0.0
    backend: str = "inline"
    workers: int = 1
    resumed: int = 0
    folder: Path | None = None
    entries: dict[str, dict[str, Any]] = field(default_factory=dict, repr=False)
    _store: Any = field(default=None, repr=False)

    # ------------------------------------------------------------------ verdict
    @property
    def counts(self) -> dict[str, int]:
        """Series per verdict (``"not-audited"`` for series whose audit did not finish)."""
        found = self.summary["verdict"].value_counts() if len(self.summary) else {}
        return {v: int(found.get(v, 0)) for v in VERDICTS}

    @property
    def passed(self) -> bool:
        """True when every series passes (with or without notes)."""
        counts = self.counts
        return counts["fail"] == 0 and counts[NOT_AUDITED] == 0

    @property
    def verdict(self) -> str:
        """``"fail"`` when a series fails or was not audited; otherwise ``"pass-with-notes"``
        when any series passes with notes, else ``"pass"`` (the words of a single audit)."""
        counts = self.counts
        if not self.passed:
            return "fail"
        return "pass-with-notes" if counts["pass-with-notes"] else "pass"

    @property
    def failing(self) -> list[str]:
        """Ids of the series that fail, most serious first."""
        return list(self.summary.index[self.summary["verdict"] == "fail"])

    @property
    def not_audited(self) -> list[str]:
        """Ids of the series whose audit did not finish, with the reason in ``summary``."""
        return list(self.summary.index[self.summary["verdict"] == NOT_AUDITED])

    def cause_sentences(self) -> list[str]:
        """The cause counts in words, most important first."""
        total = int((self.summary["status"] == "audited").sum()) if len(self.summary) else 0
        return [c.sentence(total) for c in self.causes]

    def sketches(self) -> dict[str, dict[str, Any]]:
        """Entries of the failing series that carry a sketch, most serious first."""
        return {
            i: self.entries[i] for i in self.failing if (self.entries.get(i) or {}).get("sketch")
        }

    def engine_measures(self, measure: str) -> dict[str, list[float]]:
        """Per estimator, ``measure`` (``"gap"`` or ``"forecast_se"``) over audited series."""
        out: dict[str, list[float]] = {}
        for entry in self.entries.values():
            engines = (entry.get("row") or {}).get("engines") or {}
            for key, values in engines.items():
                value = values.get(measure)
                if isinstance(value, int | float) and math.isfinite(value):
                    out.setdefault(key, []).append(float(value))
        return out

    def record(self, series_id: str) -> dict[str, Any] | None:
        """The full audit record of one series (a dict; None when it was not audited)."""
        if self._store is None:
            raise ValueError("This panel result has no store to read records from.")
        return self._store.record(str(series_id))

    # ------------------------------------------------------------------ output
    def to_dict(self) -> dict[str, Any]:
        """Summary, cause counts, verdict counts and settings as plain values."""
        from forecastaudit.jsonutil import to_plain

        frame = self.summary.reset_index()
        return to_plain(
            {
                "counts": self.counts,
                "passed": self.passed,
                "verdict": self.verdict,
                "causes": [c.to_dict() | {"sentence": s}
                           for c, s in zip(self.causes, self.cause_sentences(), strict=True)],
                "summary": frame.to_dict(orient="records"),
                "settings": self.settings,
                "seconds": self.seconds,
                "backend": self.backend,
                "workers": self.workers,
            }
        )  # fmt: skip

    def to_html(self, path: str | os.PathLike[str] | None = None) -> str:
        """The panel report as one self-contained HTML file; written to ``path`` if given."""
        from forecastaudit.files import write_text_atomic
        from forecastaudit.report.panel import render_panel_html

        text = render_panel_html(self)
        if path is not None:
            write_text_atomic(path, text)
        return text

    def to_markdown(self, path: str | os.PathLike[str] | None = None) -> str:
        """The panel report in Markdown; written to ``path`` if given."""
        from forecastaudit.files import write_text_atomic
        from forecastaudit.report.panel import render_panel_markdown

        text = render_panel_markdown(self)
        if path is not None:
            write_text_atomic(path, text)
        return text

    def __str__(self) -> str:
        counts = self.counts
        lines = [
            f"forecastaudit panel: {len(self.summary)} series -> {self.verdict.upper()}",
            "  " + ", ".join(f"{n} {v}" for v, n in counts.items()),
        ]
        sentences = self.cause_sentences()
        if sentences:
            lines += ["", "Causes across the panel:"]
            lines += [f"  - {s}" for s in sentences[:12]]
            if len(sentences) > 12:
                lines.append(f"  ... and {len(sentences) - 12} more (see the report)")
        worst = self.summary[self.summary["verdict"].isin(["fail", NOT_AUDITED])].head(10)
        if len(worst):
            cols = ["verdict", "cause", "cause_estimator", "production_gap",
                    "production_forecast_se"]  # fmt: skip
            with pd.option_context("display.width", 120, "display.max_colwidth", 40):
                lines += ["", "Most serious series:", worst[cols].to_string()]
        return "\n".join(lines)

    def __repr__(self) -> str:
        counts = ", ".join(f"{v}={n}" for v, n in self.counts.items())
        return f"<PanelResult {len(self.summary)} series: {counts}>"

    def _repr_html_(self) -> str:
        from forecastaudit.report.panel import render_panel_compact

        return render_panel_compact(self)
