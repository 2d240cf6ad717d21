"""Figures for the reports: matplotlib on the Agg canvas, returned as base64 PNG.

Every function builds its own :class:`matplotlib.figure.Figure` on a
:class:`~matplotlib.backends.backend_agg.FigureCanvasAgg` (pyplot is never used, so no
global figure state or backend choice leaks into the caller's session) and returns a
:class:`Plot` carrying the image and its alternative text, or None when the report holds no
data for it. Figures are released as soon as they are drawn.

Colours come from :data:`PALETTE`; estimators are told apart by marker and line style as
well as colour, so the figures read in greyscale and with colour-vision deficiencies. Each
estimator keeps one style in every figure of a report (:func:`estimator_styles`), and the
reference optimum always has :data:`REFERENCE_STYLE`.

Figures are drawn per engine, not per wrapper: wrappers of one engine that return the same
estimate (:func:`estimator_entries`) are one entry, labelled with the engine and the number
of wrappers, and the alternative text and caption name every wrapper. The reference optimum
is always its own entry.
"""

from __future__ import annotations

import base64
import io
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from forecastaudit.estimate import ORIGINS, REFERENCE_KEY
from forecastaudit.jsonutil import is_finite_number as _finite

if TYPE_CHECKING:
    from forecastaudit.result import AuditResult

__all__ = [
    "PALETTE",
    "REFERENCE_STYLE",
    "Entry",
    "Plot",
    "estimator_entries",
    "estimator_styles",
    "figure_to_png",
    "forecast_plot",
    "likelihood_grid_plot",
    "likelihood_profile_figure",
    "likelihood_profile_plots",
    "parameter_plot",
    "report_plots",
    "report_styles",
    "residual_autocorrelation_plot",
    "series_plot",
]


# Our own palette: dark, well separated hues that keep contrast on white paper.
PALETTE: dict[str, str] = {
    "ink": "#1d2733",
    "muted": "#5b6676",
    "grid": "#d9dee5",
    "series": "#1f4e79",
    "reference": "#1d2733",
    "band_inner": "#9fb7d0",
    "band_outer": "#dbe5f0",
    "spread": "#b5541b",
    "holdout": "#efe7d6",
}
ESTIMATOR_COLOURS: tuple[str, ...] = (
    "#1f4e79",  # deep blue
    "#b5541b",  # burnt orange
    "#2f7d5b",  # green
    "#7a3e8e",  # plum
    "#8a6d1f",  # ochre
    "#3c8fa8",  # teal
    "#a23a4f",  # berry
)
MARKERS: tuple[str, ...] = ("o", "s", "^", "D", "v", "P", "X")
LINESTYLES: tuple[Any, ...] = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (1, 1)), (0, (3, 2)))

_DPI = 110


@dataclass(frozen=True)
class Plot:
    """One rendered figure.

    Attributes
    ----------
    id : str
        Stable identifier (used as the HTML id).
    title : str
        Heading shown above the figure.
    alt : str
        Alternative text describing what the figure shows, for screen readers.
    caption : str
        How to read the figure.
    png_base64 : str
        The PNG image, base64 encoded.
    """

    id: str
    title: str
    alt: str
    caption: str
    png_base64: str

    @property
    def data_uri(self) -> str:
        """The image as a ``data:`` URI for an ``<img src>``."""
        return f"data:image/png;base64,{self.png_base64}"

    @property
    def png(self) -> bytes:
        """The PNG bytes."""
        return base64.b64decode(self.png_base64)


# ---------------------------------------------------------------------- helpers
def _new_figure(width: float, height: float) -> Figure:
    figure = Figure(figsize=(width, height), dpi=_DPI, layout="constrained")
    FigureCanvasAgg(figure)
    return figure


def figure_to_png(figure: Figure) -> str:
    """Draw ``figure`` to PNG and return it base64 encoded; the figure is released after.

    Parameters
    ----------
    figure : matplotlib.figure.Figure
        A figure attached to an Agg canvas (as made by the functions of this module).
    """
    buffer = io.BytesIO()
    try:
        figure.savefig(buffer, format="png", dpi=_DPI, facecolor="white")
    finally:
        figure.clear()
    return base64.b64encode(buffer.getvalue()).decode("ascii")


def _slug(text: str) -> str:
    return "".join(c if c.isalnum() else "-" for c in str(text)).strip("-").lower() or "x"


def _label(text: Any) -> str:
    """User text safe for matplotlib: a '$' would otherwise start mathematical notation."""
    return " ".join(str(text).split()).replace("$", r"\$")


def _style_axes(ax: Any) -> None:
    ax.grid(True, color=PALETTE["grid"], linewidth=0.7)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(PALETTE["muted"])
    ax.tick_params(colors=PALETTE["ink"], labelsize=9)


def _time_axis(report: AuditResult, positions: np.ndarray) -> np.ndarray | Any:
    """x values for observation positions: timestamps when the series has a time index."""
    import pandas as pd

    index = report.series.index
    if isinstance(index, pd.PeriodIndex):
        return index.to_timestamp()[positions]
    if isinstance(index, pd.DatetimeIndex):
        return index[positions]
    return positions


def _future_axis(report: AuditResult, steps: int) -> np.ndarray | Any:
    import pandas as pd

    future = report.series.future_index(steps)
    if isinstance(future, pd.PeriodIndex):
        return future.to_timestamp()
    if isinstance(future, pd.DatetimeIndex):
        return future
    return np.asarray(future)


# ---------------------------------------------------------------------- one style per key
#: The reference optimum's style in every figure; its star marker is no estimator's.
REFERENCE_STYLE: dict[str, Any] = {"color": PALETTE["reference"], "marker": "*", "linestyle": "-"}


def estimator_styles(keys: Sequence[str]) -> dict[str, dict[str, Any]]:
    """One colour, marker and line style per estimator key.

    The keys other than the reference take the colours, markers and line styles in turn, in
    the order given; the reference optimum always has :data:`REFERENCE_STYLE`. Every figure
    of a report draws with the styles of :func:`report_styles`, so a key looks the same in
    each of them.
    """
    styles = {REFERENCE_KEY: REFERENCE_STYLE}
    for key in keys:
        if key in styles:
            continue
        position = len(styles) - 1
        styles[key] = {
            "color": ESTIMATOR_COLOURS[position % len(ESTIMATOR_COLOURS)],
            "marker": MARKERS[position % len(MARKERS)],
            "linestyle": LINESTYLES[position % len(LINESTYLES)],
        }
    return styles


def report_styles(report: AuditResult) -> dict[str, dict[str, Any]]:
    """The styles of every key a figure of ``report`` can draw: the audit's estimators in the
    audit's order, then any other key of its parameters, forecasts, profiles or grid."""
    grid = report.likelihood_grid or {}
    keys = [
        *report.estimates,
        *report.parameters.columns.drop("reference_se", errors="ignore"),
        *report.forecasts,
        *report.profiles,
        *grid.get("points", {}),
    ]
    return estimator_styles([str(k) for k in keys])


# ---------------------------------------------------------------------- one entry per engine
#: Estimates of two wrappers of one engine are the same when every parameter agrees to this
#: relative difference.
SAME_ESTIMATE_RTOL = 1e-9


@dataclass(frozen=True)
class Entry:
    """One thing drawn in a figure: an estimator, or the wrappers of one engine that return
    the same estimate.

    Attributes
    ----------
    keys : tuple of str
        The estimator keys drawn as this entry, in the audit's order.
    engine : str or None
        Their engine.
    origin : str
        Where the estimate was made (``fitted``, ``imported``, ``environment``); an entry
        not fitted here says so in its label.
    """

    keys: tuple[str, ...]
    engine: str | None = None
    origin: str = "fitted"
    title: str = ""

    @property
    def key(self) -> str:
        """The first key (whose data the figure draws)."""
        return self.keys[0]

    @property
    def label(self) -> str:
        """Short label for ticks and legends: the key (with its origin when it was not fitted
        here), or the engine and how many wrappers."""
        if len(self.keys) == 1:
            if self.origin == "fitted":
                return self.keys[0]
            return self.title or f"{self.keys[0]} ({ORIGINS.get(self.origin, self.origin)})"
        return f"{self.engine} ({len(self.keys)} wrappers)"

    @property
    def full(self) -> str:
        """The label naming every wrapper, for alternative texts and captions."""
        if len(self.keys) == 1:
            return self.label
        return f"{self.label}: {', '.join(self.keys)}"


def _same_vector(a: np.ndarray, b: np.ndarray) -> bool:
    if a.shape != b.shape or not np.isfinite(a).any():
        return False
    return bool(np.allclose(a, b, rtol=SAME_ESTIMATE_RTOL, atol=0.0, equal_nan=True))


def estimator_entries(
    report: AuditResult,
    keys: Sequence[str],
    same: Callable[[str, str], bool] | None = None,
) -> list[Entry]:
    """The entries a figure draws for ``keys``: one per engine whose wrappers agree.

    Wrappers of one engine whose canonical parameters agree to :data:`SAME_ESTIMATE_RTOL`
    (relative) are one entry; so are they only if ``same(first_key, key)`` holds too, when
    given (a figure of forecasts also asks the forecasts to agree). The reference optimum
    and estimators without parameters are entries of their own. Order: first appearance.
    """
    frame = report.parameters
    groups: list[list[str]] = []
    engines: list[str | None] = []
    origins: dict[str, str] = {}
    titles: dict[str, str] = {}
    for key in keys:
        estimate = report.estimates.get(key)
        engine = getattr(estimate, "engine", None) if estimate is not None else None
        origins[key] = str(getattr(estimate, "origin", "fitted"))
        titles[key] = str(getattr(estimate, "column", key))
        vector = frame[key].to_numpy(dtype=float) if key in frame.columns else None
        placed = False
        if key != REFERENCE_KEY and engine and vector is not None:
            for group, group_engine in zip(groups, engines, strict=True):
                first = group[0]
                if (
                    group_engine == engine
                    and origins[first] == origins[key]
                    and first != REFERENCE_KEY
                    and first in frame.columns
                    and _same_vector(frame[first].to_numpy(dtype=float), vector)
                    and (same is None or same(first, key))
                ):
                    group.append(key)
                    placed = True
                    break
        if not placed:
            groups.append([key])
            engines.append(engine)
    return [
        Entry(tuple(str(k) for k in group), engine, origins[group[0]], titles[group[0]])
        for group, engine in zip(groups, engines, strict=True)
    ]


def _entries_sentence(entries: Sequence[Entry]) -> str:
    """A caption sentence naming the wrappers behind each merged entry, or ''."""
    merged = [e for e in entries if len(e.keys) > 1]
    if not merged:
        return ""
    return (
        " Wrappers of one engine that return the same estimate are drawn once: "
        + "; ".join(f"{e.label} is {', '.join(e.keys)}" for e in merged)
        + "."
    )


# ---------------------------------------------------------------------- parameters
def parameter_plot(report: AuditResult) -> Plot | None:
    """Each parameter per estimator, against +-1 and +-2 reference standard errors.

    One panel per parameter; estimators are rows. The vertical line is the reference
    optimum, the darker band +-1 reference standard error around it and the lighter band
    +-2. Parameters without a finite reference standard error are drawn without bands.
    Returns None when no estimator produced parameters.
    """
    frame = report.parameters
    keys = [
        k
        for k in frame.columns
        if k != "reference_se" and np.isfinite(frame[k].to_numpy(dtype=float)).any()
    ]
    if not keys:
        return None
    names = list(frame.index)
    entries = estimator_entries(report, keys)
    styles = report_styles(report)
    order = list(reversed(entries))  # first estimator on top
    figure = _new_figure(8.6, 0.9 + len(names) * (0.55 + 0.32 * len(entries)))
    axes = figure.subplots(len(names), 1, squeeze=False)[:, 0]
    outside: list[str] = []
    for ax, name in zip(axes, names, strict=True):
        _style_axes(ax)
        ref = frame.at[name, REFERENCE_KEY] if REFERENCE_KEY in frame.columns else math.nan
        se = frame.at[name, "reference_se"] if "reference_se" in frame.columns else math.nan
        if _finite(ref) and _finite(se) and se > 0:
            ax.axvspan(
                ref - 2 * se,
                ref + 2 * se,
                color=PALETTE["band_outer"],
                lw=0,
                label="\u00b12 reference SE",
            )
            ax.axvspan(
                ref - se, ref + se, color=PALETTE["band_inner"], lw=0, label="\u00b11 reference SE"
            )
        if _finite(ref):
            ax.axvline(ref, color=PALETTE["reference"], lw=1.2, label="reference optimum")
        for row, entry in enumerate(order):
            value = frame.at[name, entry.key]
            if not _finite(value):
                continue
            style = styles[entry.key]
            ax.plot(
                [value],
                [row],
                linestyle="none",
                marker=style["marker"],
                markersize=9 if entry.key == REFERENCE_KEY else 7,
                color=style["color"],
                markeredgecolor="white",
                markeredgewidth=0.6,
            )
            if _finite(ref) and _finite(se) and se > 0 and abs(value - ref) > 2 * se:
                outside.append(f"{entry.label} ({name})")
        ax.set_yticks(range(len(order)))
        ax.set_yticklabels([_label(e.label) for e in order], fontsize=9)
        ax.set_ylim(-0.7, len(order) - 0.3)
        title = _label(name)
        if _finite(se):
            title += f"   (reference {ref:.5g}, SE {se:.3g})"
        ax.set_title(title, loc="left", fontsize=10, color=PALETTE["ink"])
    handles, labels = axes[0].get_legend_handles_labels()
    if handles:
        figure.legend(
            handles, labels, loc="outside lower center", ncols=3, frameon=False, fontsize=9
        )
    png = figure_to_png(figure)
    alt = (
        f"Dot chart of {len(names)} parameters ({', '.join(names)}) as estimated by "
        f"{'; '.join(e.full for e in entries)}, each against the reference optimum with bands "
        "of one and two reference standard errors. "
        + (
            f"Outside two standard errors: {', '.join(outside)}."
            if outside
            else "Every estimate lies within two reference standard errors."
        )
    )
    return Plot(
        id="plot-parameters",
        title="Parameter estimates against the reference standard errors",
        alt=alt,
        caption=(
            "Each row is an estimator, or one engine whose wrappers return the same estimate. "
            "The vertical line is the reference optimum; the dark band is \u00b11 reference "
            "standard error around it, the light band \u00b12." + _entries_sentence(entries)
        ),
        png_base64=png,
    )


# ---------------------------------------------------------------------- the series
def series_plot(report: AuditResult) -> Plot:
    """The series on its original scale; the held-out part shaded when there is a holdout."""
    values = np.asarray(report.series.values, dtype=float)
    positions = np.arange(values.size)
    x = _time_axis(report, positions)
    figure = _new_figure(8.6, 3.0)
    ax = figure.subplots()
    _style_axes(ax)
    held = 0
    if report.holdout is not None:
        held = int(report.holdout.horizon) * len(report.holdout.origins)
        if 0 < held < values.size:
            ax.axvspan(
                x[values.size - held],
                x[values.size - 1],
                color=PALETTE["holdout"],
                lw=0,
                label="held out for the holdout",
            )
    ax.plot(x, values, color=PALETTE["series"], lw=1.4, label=_label(report.series.name))
    ax.set_ylabel("original scale", fontsize=9, color=PALETTE["ink"])
    if held:
        figure.legend(loc="outside upper left", ncols=2, frameon=False, fontsize=9)
    else:
        ax.set_title(_label(report.series.name), loc="left", fontsize=10, color=PALETTE["ink"])
    png = figure_to_png(figure)
    labels = report.series.display_labels()
    alt = (
        f"Line chart of the series {report.series.name} on its original scale: "
        f"{values.size} observations from {labels[0]} to {labels[-1]}, ranging from "
        f"{np.min(values):.6g} to {np.max(values):.6g}."
        + (f" The last {held} observations are shaded as held out." if held else "")
    )
    return Plot(
        id="plot-series",
        title="The series",
        alt=alt,
        caption="The observations as given, before any transform.",
        png_base64=png,
    )


# ---------------------------------------------------------------------- forecasts
def forecast_plot(report: AuditResult, history: int | None = None) -> Plot | None:
    """Forecasts with intervals at the reference optimum and the implementation spread.

    Parameters
    ----------
    report : AuditResult
    history : int, optional
        Observations of history to show before the forecasts (default three seasonal
        periods, or 36).

    Returns
    -------
    Plot or None
        None when the report holds no forecasts.
    """
    forecasts = report.forecasts
    if not forecasts:
        return None
    base_key = REFERENCE_KEY if REFERENCE_KEY in forecasts else next(iter(forecasts))
    base = forecasts[base_key]
    steps = int(np.asarray(base.median).size)
    values = np.asarray(report.series.values, dtype=float)
    shown = min(values.size, history or (3 * report.spec.m if report.spec.m > 1 else 36))
    positions = np.arange(values.size - shown, values.size)
    x_hist = _time_axis(report, positions)
    x_future = _future_axis(report, steps)

    figure = _new_figure(8.6, 3.8)
    ax = figure.subplots()
    _style_axes(ax)
    ax.plot(x_hist, values[positions], color=PALETTE["muted"], lw=1.3, label="observed")
    levels = sorted(base.lower, reverse=True)
    fills = (PALETTE["band_outer"], PALETTE["band_inner"])
    for i, level in enumerate(levels):
        ax.fill_between(
            x_future,
            base.lower[level],
            base.upper[level],
            lw=0,
            color=fills[min(i, len(fills) - 1)],
            label=f"{level:g}% interval ({_label(base_key)})",
        )
    spread = report.spread
    if spread is not None and {"lowest", "highest"} <= set(spread.columns):
        ax.fill_between(
            x_future,
            spread["lowest"].to_numpy(),
            spread["highest"].to_numpy(),
            facecolor="none",
            edgecolor=PALETTE["spread"],
            hatch="////",
            lw=0.8,
            label="spread across engines",
        )

    def same_forecast(a: str, b: str) -> bool:
        return _same_vector(
            np.asarray(forecasts[a].median, dtype=float),
            np.asarray(forecasts[b].median, dtype=float),
        )

    entries = estimator_entries(report, list(forecasts), same_forecast)
    styles = report_styles(report)
    for entry in entries:
        key, fc = entry.key, forecasts[entry.key]
        if key == REFERENCE_KEY:
            ax.plot(
                x_future,
                fc.median,
                color=REFERENCE_STYLE["color"],
                lw=1.8,
                zorder=2.5,  # under the estimators' markers, which often sit on it
                label="reference optimum",
            )
            continue
        style = styles[key]
        ax.plot(
            x_future,
            fc.median,
            color=style["color"],
            lw=1.0,
            linestyle=style["linestyle"],
            marker=style["marker"],
            markersize=3.5,
            zorder=3,
            label=_label(entry.label),
        )
    ax.set_ylabel("original scale", fontsize=9, color=PALETTE["ink"])
    figure.legend(loc="outside right center", frameon=False, fontsize=8)
    png = figure_to_png(figure)
    widest = max(base.lower) if base.lower else None
    alt = (
        f"Line chart of the last {shown} observations and {steps} steps of point forecasts "
        f"from {'; '.join(e.full for e in entries)}"
        + (f", with the {widest:g}% interval at {base_key}" if widest is not None else "")
        + "; the hatched band is the range of point forecasts across independent engines."
    )
    single = spread is not None and len(spread.attrs.get("engines", [])) < 2
    if single:
        alt += " Only one engine forecast, so there is no spread between implementations."
    elif spread is not None and "spread_share_of_interval" in spread.columns:
        alt += (
            f" The spread is at most {100 * float(spread['spread_share_of_interval'].max()):.1f}%"
            " of the interval width."
        )
    return Plot(
        id="plot-forecasts",
        title="Forecasts and the spread across implementations",
        alt=alt,
        caption=(
            "Shaded: prediction intervals at the reference optimum. Hatched: lowest to highest "
            "point forecast across independent engines. A spread that is small beside the "
            "interval does not change any decision the forecast supports."
            + _entries_sentence(entries)
        ),
        png_base64=png,
    )


# ---------------------------------------------------------------------- residuals
def _autocorrelations(x: np.ndarray, lags: int) -> np.ndarray:
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)] - np.mean(x[np.isfinite(x)])
    denominator = float(np.dot(x, x))
    if denominator == 0.0:
        return np.zeros(lags)
    return np.array([np.dot(x[:-h], x[h:]) / denominator for h in range(1, lags + 1)])


def residual_autocorrelation_plot(report: AuditResult, key: str | None = None) -> Plot | None:
    """Autocorrelations of one estimate's one-step residuals with approximate 95% bounds.

    Parameters
    ----------
    report : AuditResult
    key : str, optional
        Whose residuals (default the reference optimum, else the first estimator with
        residuals).

    Returns
    -------
    Plot or None
        None when no residuals were kept.
    """
    available = {
        k: fc.residuals
        for k, fc in report.forecasts_transformed.items()
        if getattr(fc, "residuals", None) is not None
    }
    if not available:
        return None
    if key is None:
        key = REFERENCE_KEY if REFERENCE_KEY in available else next(iter(available))
    if key not in available:
        return None
    residuals = np.asarray(available[key], dtype=float)[report.spec.lost_to_differencing :]
    n = int(np.isfinite(residuals).sum())
    if n < 4:
        return None
    lags = min(2 * report.spec.m if report.spec.m > 1 else 20, n // 2)
    acf = _autocorrelations(residuals, lags)
    bound = 1.96 / math.sqrt(n)
    figure = _new_figure(8.6, 2.8)
    ax = figure.subplots()
    _style_axes(ax)
    lag_axis = np.arange(1, lags + 1)
    ax.axhspan(-bound, bound, color=PALETTE["band_outer"], lw=0, label="\u00b11.96/\u221an")
    ax.vlines(lag_axis, 0, acf, color=PALETTE["series"], lw=2)
    ax.plot(lag_axis, acf, "o", color=PALETTE["series"], markersize=3.5)
    outside = lag_axis[np.abs(acf) > bound]
    ax.plot(
        outside,
        acf[np.abs(acf) > bound],
        "s",
        color=PALETTE["spread"],
        markersize=6,
        markerfacecolor="none",
        label="outside the bounds",
    )
    ax.axhline(0, color=PALETTE["muted"], lw=0.8)
    ax.set_xlabel("lag", fontsize=9, color=PALETTE["ink"])
    ax.set_ylabel("autocorrelation", fontsize=9, color=PALETTE["ink"])
    if report.spec.m > 1:
        ax.set_xticks([t for t in lag_axis if t % report.spec.m == 0 or t == 1])
    figure.legend(loc="outside upper left", ncols=2, frameon=False, fontsize=8)
    png = figure_to_png(figure)
    alt = (
        f"Bar chart of the residual autocorrelations of {key} at lags 1 to {lags}, with "
        f"bounds of plus and minus {bound:.3f}. "
        + (
            f"Outside the bounds at lag{'s' if outside.size > 1 else ''} "
            f"{', '.join(str(int(t)) for t in outside)}."
            if outside.size
            else "No lag lies outside the bounds."
        )
    )
    return Plot(
        id="plot-residual-autocorrelation",
        title=f"Residual autocorrelations ({key})",
        alt=alt,
        caption=(
            "One-step residuals after the start-up values lost to differencing. Bars outside "
            "the shaded band (marked with squares) are autocorrelations the model leaves."
        ),
        png_base64=png,
    )


# ---------------------------------------------------------------------- likelihood profile
def likelihood_profile_figure(
    t: Sequence[float],
    loglike: Sequence[float],
    label_a: str,
    label_b: str,
    tolerance: float | None = None,
) -> Plot:
    """The log-likelihood along the straight line between two estimates.

    Parameters
    ----------
    t : sequence of float
        Positions on the line: 0 is estimate ``a``, 1 is estimate ``b`` (values outside
        [0, 1] extend the line).
    loglike : sequence of float
        The reference log-likelihood at each position.
    label_a, label_b : str
        Names of the two estimates.
    tolerance : float, optional
        The log-likelihood tolerance, drawn as a band below the highest value.
    """
    t_arr = np.asarray(t, dtype=float)
    ll = np.asarray(loglike, dtype=float)
    figure = _new_figure(8.6, 3.0)
    ax = figure.subplots()
    _style_axes(ax)
    best = float(np.nanmax(ll))
    if tolerance is not None:
        ax.axhspan(
            best - tolerance,
            best,
            color=PALETTE["band_outer"],
            lw=0,
            label="within the tolerance of the best",
        )
    ax.plot(t_arr, ll, color=PALETTE["series"], lw=1.5)
    for position, label in ((0.0, label_a), (1.0, label_b)):
        ax.axvline(position, color=PALETTE["muted"], lw=0.8, linestyle="--")
        ax.annotate(
            _label(label),
            (position, 1.0),
            xycoords=("data", "axes fraction"),
            ha="center",
            va="bottom",
            fontsize=8,
            color=PALETTE["ink"],
        )
    ax.set_xlabel(
        f"position on the line from {_label(label_a)} (0) to {_label(label_b)} (1)", fontsize=9
    )
    ax.set_ylabel("reference log-likelihood", fontsize=9)
    if tolerance is not None:
        ax.legend(frameon=False, fontsize=8, loc="lower center")
    png = figure_to_png(figure)
    drop = best - float(np.nanmin(ll[(t_arr >= 0) & (t_arr <= 1)])) if t_arr.size else math.nan
    return Plot(
        id=f"plot-profile-{label_a}-{label_b}",
        title=f"Log-likelihood between {label_a} and {label_b}",
        alt=(
            f"Line chart of the reference log-likelihood along the line from {label_a} to "
            f"{label_b}; between them it falls at most {drop:.4g} below its highest value."
        ),
        caption=(
            "A flat curve means the data do not tell the two estimates apart; a dip between "
            "them means two separate optima."
        ),
        png_base64=png,
    )


def likelihood_profile_plots(report: AuditResult) -> list[Plot]:
    """One profile per disagreeing estimate: the reference log-likelihood along the line
    from the reference optimum (t = 0) to that estimate (t = 1)."""
    plots = []
    for entry in estimator_entries(report, list(report.profiles)):
        frame = report.profiles[entry.key]
        plot = likelihood_profile_figure(
            frame["t"].to_numpy(),
            frame["profiled_loglike"].to_numpy(),
            REFERENCE_KEY,
            entry.label,
            report.tolerances.loglike_atol,
        )
        alt = plot.alt
        if len(entry.keys) > 1:
            alt = alt.replace(entry.label, entry.full, 1)
        plots.append(
            Plot(
                id=f"plot-profile-{_slug(entry.key)}",
                title=f"Likelihood between the reference optimum and {entry.label}",
                alt=alt,
                caption=plot.caption + _entries_sentence([entry]),
                png_base64=plot.png_base64,
            )
        )
    return plots


def likelihood_grid_plot(report: AuditResult) -> Plot | None:
    """Contours of the profiled reference log-likelihood over a model's two coefficients,
    with every disagreeing estimate and the reference optimum marked."""
    grid = report.likelihood_grid
    if grid is None:
        return None
    x, y = np.asarray(grid["x"]), np.asarray(grid["y"])
    z = np.asarray(grid["profiled_loglike"], dtype=float)
    best = float(np.nanmax(z))
    figure = _new_figure(6.4, 4.6)
    ax = figure.subplots()
    _style_axes(ax)
    # Contours at fixed drops below the best: 0.5 and 2 are about the 1- and 2-standard-
    # error regions of one parameter (likelihood-ratio, chi-square with 1 df / 2).
    drops = [8.0, 4.5, 2.0, 0.5]
    levels = [best - d for d in drops if best - d > np.nanmin(z)]
    if levels:
        contours = ax.contour(x, y, z, levels=levels, colors=PALETTE["series"], linewidths=1.0)
        ax.clabel(contours, fmt=lambda v: f"-{best - v:g}", fontsize=7)
    points = grid.get("points", {})
    entries = estimator_entries(report, list(points))
    styles = report_styles(report)
    for entry in entries:
        point = points[entry.key]
        style = styles[entry.key]
        ax.plot(
            point[grid["names"][0]],
            point[grid["names"][1]],
            marker=style["marker"],
            color=style["color"],
            linestyle="none",
            markersize=9 if entry.key == REFERENCE_KEY else 7,
            label=_label(entry.label),
        )
    ax.set_xlabel(grid["names"][0])
    ax.set_ylabel(grid["names"][1])
    ax.legend(fontsize=8, frameon=False, loc="best")
    names = " and ".join(grid["names"])
    return Plot(
        id="plot-likelihood-grid",
        title=f"Reference log-likelihood over {names}",
        alt=(
            f"Contour plot of the profiled reference log-likelihood over {names}; contours "
            "mark drops of 0.5, 2, 4.5 and 8 below the best value; markers show "
            f"{'; '.join(e.full for e in entries) or 'no estimate'}."
        ),
        caption=(
            "One closed set of contours means one optimum; long parallel contours mean a "
            "ridge (weak identification); two sets mean two optima." + _entries_sentence(entries)
        ),
        png_base64=figure_to_png(figure),
    )


# ---------------------------------------------------------------------- all of them
def report_plots(report: AuditResult) -> list[Plot]:
    """Every figure the report has data for, in reading order."""
    made = [
        parameter_plot(report),
        series_plot(report),
        forecast_plot(report),
        residual_autocorrelation_plot(report),
        *likelihood_profile_plots(report),
        likelihood_grid_plot(report),
    ]
    return [plot for plot in made if plot is not None]
