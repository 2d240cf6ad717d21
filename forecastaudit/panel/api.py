"""``audit_panel``: the single-series audit mapped over a panel on the execution seam."""

from __future__ import annotations

import hashlib
import os
import re
import time
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

from forecastaudit.adapters.registry import (
    DEFAULT_PRODUCTION,
    adapter_class,
    available_estimators,
    get_adapter,
)
from forecastaudit.diagnosis.tolerances import Tolerances
from forecastaudit.errors import EstimatorError, SpecError
from forecastaudit.panel.data import PanelSeries, read_panel
from forecastaudit.panel.result import PanelResult
from forecastaudit.panel.store import MemoryStore, PanelStore
from forecastaudit.panel.summary import count_causes, summary_frame
from forecastaudit.panel.unit import SeriesJob, audit_series
from forecastaudit.run import Backend, default_workers, make_backend
from forecastaudit.spec import ModelSpec
from forecastaudit.validation import whole_number

__all__ = ["DEFAULT_SERIES_TIME_LIMIT", "audit_panel", "independent_estimators"]

#: Seconds one series' audit may take before it is stopped and reported ``timed-out``.
DEFAULT_SERIES_TIME_LIMIT = 300.0

#: File names in a panel's output folder.
HTML_NAME = "panel-report.html"
MARKDOWN_NAME = "panel-report.md"
SUMMARY_NAME = "panel-summary.csv"
SERIES_FOLDER = "series"


def independent_estimators(production: str | None = None) -> list[str]:
    """One installed estimator per engine: the production estimator for its engine, the
    first installed wrapper for every other engine.

    Wrappers of one engine add run time, not independent evidence; the reference fit (which
    always runs) is the last independent engine.

    Parameters
    ----------
    production : str, optional
        The production estimator; it represents its engine and comes first.

    Returns
    -------
    list of str
    """
    keys = available_estimators()
    if production is not None and production not in keys:
        adapter_class(production)  # raises EstimatorError naming the known keys
    ordered = ([str(production)] if production else []) + [k for k in keys if k != production]
    chosen: dict[str, str] = {}
    for key in ordered:
        engine = adapter_class(key).engine
        if engine in chosen:
            continue
        if key != production and get_adapter(key).availability() is not None:
            continue  # not installed: another wrapper of the engine may be
        chosen[engine] = key
    return list(chosen.values())


def _estimators(estimators: Any, production: str | None) -> list[str]:
    from forecastaudit.pipeline import _resolve_estimators

    if estimators is None or estimators == "independent":
        return independent_estimators(production)
    if estimators == "all":
        return available_estimators()
    return _resolve_estimators(estimators)


def _slug(series_id: str) -> str:
    plain = re.sub(r"[^A-Za-z0-9._-]+", "_", series_id).strip("._")[:60] or "series"
    return f"{plain}-{hashlib.sha256(series_id.encode('utf-8')).hexdigest()[:8]}"


def _settings(options: dict[str, Any], estimators: list[str]) -> dict[str, Any]:
    from forecastaudit._version import __version__

    return {
        "forecastaudit": __version__,
        "estimators": estimators,
        "tolerances": options["tolerances"],
        "production": options["production"],
        "horizon": options["horizon"],
        "levels": list(options["levels"]),
        "holdout": options["holdout"],
        "origins": options["origins"],
        "period": options["period"],
    }


def _write_series_files(folder: Path, series_id: str, value: dict[str, Any]) -> dict[str, str]:
    """Write a failing series' record and reports; return their paths relative to folder."""
    from forecastaudit.files import write_set
    from forecastaudit.record.document import dumps

    name = _slug(series_id)
    files: dict[str, str] = {}
    texts = {"json": dumps(value["record"]), "html": value.get("html"), "md": value.get("markdown")}
    present = {suffix: text for suffix, text in texts.items() if text is not None}
    # The record and its reports as one set: all of them, or none.
    write_set(
        folder / SERIES_FOLDER, {f"{name}.{suffix}": text for suffix, text in present.items()}
    )
    for suffix in present:
        files["markdown" if suffix == "md" else suffix] = f"{SERIES_FOLDER}/{name}.{suffix}"
    return files


def audit_panel(
    data: Any,
    spec: ModelSpec | str | Mapping[Any, ModelSpec | str],
    estimators: Iterable[str] | str | None = "independent",
    tolerances: Tolerances | Mapping[str, Any] | None = None,
    *,
    id_column: str | None = None,
    time_column: str | None = None,
    value_column: str | None = None,
    period: int | None = None,
    horizon: int | None = None,
    levels: Sequence[float] = (80.0, 95.0),
    holdout: int | None = None,
    origins: int = 1,
    production: str | None = DEFAULT_PRODUCTION,
    workers: int | Backend | None = None,
    client: Any = None,
    time_limit: float | None = DEFAULT_SERIES_TIME_LIMIT,
    out: str | os.PathLike[str] | None = None,
    fresh: bool = False,
    reports: bool = True,
    progress: bool = False,
    created: str | None = None,
) -> PanelResult:
    """Audit one specification on every series of a panel.

    Each series gets the single-series audit (:func:`forecastaudit.audit`), run where the
    execution seam puts it; the result keeps, per series, the verdict, the cause and the
    production estimator's gap and forecast difference, and counts causes over the panel.

    Parameters
    ----------
    data : pandas.DataFrame or mapping
        A long-format table, one row per series and period (name ``id_column``), or a
        mapping of series id to series. Not modified.
    spec : ModelSpec, str or mapping
        The model for every series, or a mapping of id to model.
    estimators : "independent", "all" or iterable of str
        ``"independent"`` (the default): one installed wrapper per engine, the production
        estimator for its own (see :func:`independent_estimators`): wrappers of one engine
        add cost, not independent evidence. ``"all"``: every estimator. Or a list of keys.
    tolerances : Tolerances or mapping, optional
        The policy and tolerances, as in :func:`forecastaudit.audit`.
    id_column, time_column, value_column : str, optional
        Columns of a long table (see :func:`forecastaudit.panel.read_panel`).
    period, horizon, levels, holdout, origins, production
        As in :func:`forecastaudit.audit`, shared by every series.
    workers : int or execution backend, optional
        None (the default): one local worker process per usable core (inline when there is
        only one). 1: every series in this process, one after the other. N >= 2: N local
        processes. Or a backend from :mod:`forecastaudit.run`.
    client : dask.distributed.Client or str, optional
        Run the series on a Dask cluster: a client, or a scheduler address such as
        ``"tcp://scheduler:8786"``. Leave ``workers`` at None.
    time_limit : float, optional
        Seconds one series' audit may take (default 300); past it the series is reported
        ``timed-out`` and the rest goes on. Enforced by processes and Dask, not inline.
    out : path, optional
        Output folder. Results are written to its store (``panel-store.jsonl``) as series
        finish; a later call with the same folder and settings resumes, skipping the series
        already audited. Without it, results are kept in memory.
    fresh : bool
        Ignore (and replace) a store already in ``out``.
    reports : bool
        Write the record and the HTML and Markdown reports of every failing series into
        ``out/series/`` (default True; needs ``out``).
    progress : bool
        Show a progress bar over the series.
    created : str, optional
        Fixed creation time for the series' records (for reproducible bytes).

    Returns
    -------
    PanelResult

    Raises
    ------
    PanelError, SpecError, EstimatorError, ToleranceError, ExecutionError
        On an invalid panel, options or backend, before any series is audited.
    """
    from forecastaudit.pipeline import _check_levels, _check_steps, _resolve_production

    started = time.perf_counter()
    tol = (
        tolerances
        if isinstance(tolerances, Tolerances)
        else Tolerances.from_dict(dict(tolerances or {}))
    )
    if production is not None and not isinstance(production, str):
        raise EstimatorError(
            f"production must be an estimator key or None, got {type(production).__name__}."
        )
    keys = _estimators(estimators, production)
    production = _resolve_production(production, keys)
    level_tuple = _check_levels(levels)
    steps = _check_steps(horizon, "horizon") if horizon is not None else None
    if holdout is not None:
        holdout = _check_steps(holdout, "holdout")
        origins = whole_number(origins, "origins", minimum=1, example="3")
    elif whole_number(origins, "origins", minimum=1, example="3") != 1:
        raise SpecError(
            f"origins={origins} has no effect without holdout: pass holdout=H to score "
            "forecasts at each origin, or leave origins at 1."
        )
    if period is not None:
        period = whole_number(period, "period", minimum=1, example="12 for monthly data")
    panel = read_panel(
        data, spec, id_column=id_column, time_column=time_column, value_column=value_column
    )
    options = {
        "estimators": keys,
        "tolerances": tol.to_dict(),
        "production": production,
        "horizon": steps,
        "levels": level_tuple,
        "holdout": holdout,
        "origins": origins,
        "period": period,
        # The likelihood surface is drawn in a failing series' report, the only one written.
        "likelihood_grid": "on-failure",
    }
    settings = _settings(options, keys)
    folder = Path(out) if out is not None else None
    store: MemoryStore = (
        PanelStore(folder, settings, fresh=fresh) if folder is not None else MemoryStore(settings)
    )
    try:
        done = store.finished()
        todo = [s for s in panel if done.get(s.id) != s.digest]
        resumed = len(panel) - len(todo)
        jobs = [_job(s, options, reports and folder is not None, created) for s in todo]
        if workers is None and client is None:
            workers = default_workers() if default_workers() > 1 and len(jobs) > 1 else None
        preload = [adapter_class(key).module for key in keys] + ["forecastaudit.pipeline"]
        backend = make_backend(workers, preload=preload, client=client)
        try:
            _run(backend, jobs, store, folder, time_limit, progress)
        finally:
            if not isinstance(workers, Backend):
                backend.close()
        ids = {s.id for s in panel}
        entries = [e for e in store.entries() if e["id"] in ids]
        result = PanelResult(
            summary=summary_frame(entries),
            causes=count_causes(entries),
            settings=settings,
            seconds=time.perf_counter() - started,
            backend=backend.name,
            workers=backend.workers,
            resumed=resumed,
            folder=folder,
            entries={e["id"]: e for e in entries},
            _store=store,
        )
        if folder is not None:
            _write_panel_files(result, folder)
        return result
    except BaseException:
        store.close()
        raise


def _job(
    series: PanelSeries, options: dict[str, Any], reports: bool, created: str | None
) -> SeriesJob:
    return SeriesJob(series.id, series.series, series.spec, series.digest, dict(options),
                     reports=reports, created=created)  # fmt: skip


def _run(
    backend: Backend,
    jobs: list[SeriesJob],
    store: MemoryStore,
    folder: Path | None,
    time_limit: float | None,
    progress: bool,
) -> None:
    if not jobs:
        return
    stream = backend.stream(
        audit_series,
        jobs,
        labels=[job.id for job in jobs],
        time_limit=time_limit,
        progress="series" if progress else None,
    )
    for index, outcome in stream:
        job = jobs[index]
        if outcome.ok:
            value = outcome.value
            files = {}
            if folder is not None and value.get("status") == "audited" and "html" in value:
                files = _write_series_files(folder, job.id, value)
            keep = ("id", "digest", "status", "row", "causes", "record", "error", "sketch")
            entry = {k: value.get(k) for k in keep}
            entry["seconds"] = outcome.seconds
            entry["files"] = files
        else:
            entry = {
                "id": job.id,
                "digest": job.digest,
                "status": outcome.status,
                "row": None,
                "causes": [],
                "record": None,
                "error": outcome.error or outcome.status,
                "seconds": outcome.seconds,
                "files": {},
            }
        store.append(entry)


def _write_panel_files(result: PanelResult, folder: Path) -> None:
    from forecastaudit.files import write_set

    texts = {
        SUMMARY_NAME: result.summary.to_csv(),
        HTML_NAME: result.to_html(),
        MARKDOWN_NAME: result.to_markdown(),
    }
    write_set(folder, texts)  # the summary and both reports as one set
