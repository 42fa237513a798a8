"""SVG and PNG images of the report's charts, drawn with matplotlib in Lagsight's style (style.py).

The band is a shaded region behind the bars (never lines); each bar is coloured by its zone (inside the
band; far outside, beyond 3 standard errors); a bar just outside the band is hollow with a red outline;
seasonal lags get a diamond under the axis. The time plot marks values filled in by interpolation with
rings and missing values with ticks under the plot. Lag ticks are integers; date ticks are thinned until
no two labels touch. Charts: ``correlogram``, ``pacf``, ``time_plot``, ``periodogram`` and ``panel``
(time plot, correlogram and PACF together).

matplotlib is imported on first use and drives its object API directly (no pyplot
state), so concurrent requests in threads do not share a figure.
"""
from __future__ import annotations

import io

import numpy as np

from lagsight.outputs import style

DPI = 110
_RC = {
    "font.family": style.FONT, "font.size": 9, "axes.edgecolor": style.PALETTE["rule"], "axes.linewidth": 0.8,
    "axes.labelcolor": style.TEXT, "xtick.color": style.MUTED, "ytick.color": style.MUTED,
    "xtick.labelcolor": style.TEXT, "ytick.labelcolor": style.TEXT,
    "svg.hashsalt": "lagsight", "svg.fonttype": "path",
}


def _mpl():
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    return matplotlib, Figure, Line2D, Patch


def _tidy(ax) -> None:
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.grid(axis="y", color=style.GRID, linewidth=0.8)
    ax.set_axisbelow(True)


def _floats(values: list) -> np.ndarray:
    return np.array([np.nan if v is None else v for v in values], dtype=float)


def legend_handles(zones, seasonal: bool, confidence: float) -> list:
    """The correlogram legend: the band, each zone drawn, and the seasonal mark when there is one."""
    _, _, Line2D, Patch = _mpl()
    band = f"{confidence * 100:g}% {style.LABELS['band']}"
    handles = [Patch(facecolor=style.BAND_FILL, edgecolor="none", label=band)]
    for zone in ("inside", "marginal", "far"):
        if zone in zones:
            hollow = zone == "marginal"
            handles.append(Patch(facecolor=style.BACKGROUND if hollow else style.ZONE_COLOURS[zone],
                                 edgecolor=style.ZONE_COLOURS[zone], linewidth=style.OUTLINE_WIDTH if hollow else 0,
                                 label=style.LABELS[zone]))
    if seasonal:
        handles.append(Line2D([], [], color=style.SEASONAL, marker="D", markersize=5, linestyle="none",
                              label=style.LABELS["seasonal"]))
    return handles


def _correlogram(ax, block: dict, title: str, confidence: float, legend: bool = True) -> None:
    from matplotlib.ticker import MaxNLocator

    lags = np.asarray(block["lags"], dtype=float)
    values, lower, upper = _floats(block["values"]), _floats(block["lower"]), _floats(block["upper"])
    edges = np.concatenate([lags - 0.5, [lags[-1] + 0.5]])
    ax.fill_between(edges, np.append(lower, lower[-1]), np.append(upper, upper[-1]), step="post",
                    facecolor=style.BAND_FILL, edgecolor="none", linewidth=0, zorder=1)
    ax.axhline(0.0, color=style.TEXT, linewidth=0.8, zorder=2)
    zones = [z or "inside" for z in block["zone"]]
    heights = np.nan_to_num(values)
    solid = np.array([z != "marginal" for z in zones])
    ax.bar(lags[solid], heights[solid], width=style.BAR_WIDTH, color=[style.ZONE_COLOURS[z] for z, s in
                                                                      zip(zones, solid) if s], linewidth=0, zorder=3)
    if (~solid).any():
        ax.bar(lags[~solid], heights[~solid], width=style.BAR_WIDTH, facecolor=style.BACKGROUND,
               edgecolor=style.ZONE_COLOURS["marginal"], linewidth=style.OUTLINE_WIDTH, zorder=3)
    seasonal_lags = [lag for lag, s in zip(block["lags"], block["seasonal"]) if s]
    top = np.nanmax(np.abs(np.concatenate([values, upper]))) if values.size else 1.0
    limit = min(1.05, max(0.2, 1.15 * float(top)))
    ax.set_ylim(-limit, limit)
    if seasonal_lags:
        ax.plot(seasonal_lags, [-limit] * len(seasonal_lags), linestyle="none", marker="D", markersize=5.5,
                color=style.SEASONAL, clip_on=False, zorder=5)
    ax.set_xlim(0.3, lags[-1] + 0.7)
    ax.xaxis.set_major_locator(MaxNLocator(nbins=12, integer=True, min_n_ticks=1))
    ax.set_xlabel("lag")
    ax.set_title(title, loc="left", fontsize=10, color=style.TEXT, fontweight="bold")
    _tidy(ax)
    if legend:
        handles = legend_handles(set(zones), bool(seasonal_lags), confidence)
        ax.legend(handles=handles, loc="lower right", bbox_to_anchor=(1.0, 1.0), fontsize=7.5, frameon=False,
                  ncol=min(3, len(handles)), borderaxespad=0.2, handlelength=1.4, columnspacing=1.2)


def date_axis(ax) -> None:
    """Date ticks on a time axis: a concise label per tick, thinned until no two labels touch (checked on
    the drawn text boxes, so call it once the figure's layout is final; tests draw long and short series)."""
    from matplotlib.dates import AutoDateLocator, ConciseDateFormatter

    for most in (8, 6, 5, 4, 3):
        locator = AutoDateLocator(minticks=2, maxticks=most)
        ax.xaxis.set_major_locator(locator)
        ax.xaxis.set_major_formatter(ConciseDateFormatter(locator, show_offset=True))
        if not labels_overlap(ax):
            return


def labels_overlap(ax) -> bool:
    """Whether any two visible x tick labels of ``ax`` overlap once drawn (their boxes, in pixels)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = ax.figure
    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    renderer = fig.canvas.get_renderer()
    fig.draw_without_rendering()
    boxes = sorted((t.get_window_extent(renderer) for t in ax.get_xticklabels()
                    if t.get_visible() and t.get_text()), key=lambda b: b.x0)
    return any(a.x1 + 2 > b.x0 for a, b in zip(boxes, boxes[1:]))


def _time_plot(ax, block: dict, title: str) -> None:
    from matplotlib.ticker import MaxNLocator

    _, _, Line2D, _ = _mpl()
    y = _floats(block["values"])
    if block["x_kind"] == "time":
        import pandas as pd

        x = pd.to_datetime(pd.Series(block["x"]), format="ISO8601", utc=True).dt.tz_localize(None).to_numpy()
    else:
        x = np.asarray(block["x"], dtype=float)
    ax.plot(x, y, color=style.LINE, linewidth=1.1, zorder=2)
    handles = [Line2D([], [], color=style.LINE, linewidth=1.1, label=style.LABELS["line"])]
    filled = np.asarray(block.get("filled") or [], dtype=np.int64)
    if filled.size:
        ax.plot(x[filled], y[filled], linestyle="none", marker="o", markersize=5, markerfacecolor=style.BACKGROUND,
                markeredgecolor=style.FILLED, markeredgewidth=1.4, zorder=3)
        handles.append(Line2D([], [], linestyle="none", marker="o", markersize=5, markerfacecolor=style.BACKGROUND,
                              markeredgecolor=style.FILLED, markeredgewidth=1.4, label=style.LABELS["filled"]))
    missing = np.isnan(y)
    if missing.any() and (~missing).any():
        ax.plot(x[missing], np.full(missing.sum(), np.nanmin(y)), linestyle="none", marker="|", markersize=7,
                markeredgewidth=1.6, color=style.MISSING, zorder=3)
        handles.append(Line2D([], [], linestyle="none", marker="|", markersize=7, markeredgewidth=1.6,
                              color=style.MISSING, label=style.LABELS["missing"]))
    ax.legend(handles=handles, loc="lower right", bbox_to_anchor=(1.0, 1.0), fontsize=7.5, frameon=False,
              ncol=len(handles), borderaxespad=0.2)
    ax.set_title(title, loc="left", fontsize=10, color=style.TEXT, fontweight="bold")
    ax.set_xlabel("time" if block["x_kind"] == "time" else "position")
    _tidy(ax)
    if block["x_kind"] != "time":
        ax.xaxis.set_major_locator(MaxNLocator(nbins=10, integer=True))


def _periodogram(fig, block: dict, title: str) -> None:
    if not block["frequencies"]:
        ax = fig.subplots()
        ax.set_axis_off()
        ax.set_title(title, loc="left", fontsize=10, color=style.TEXT, fontweight="bold")
        ax.text(0.5, 0.5, block["note"] or "No periodogram for this series.", ha="center", va="center",
                fontsize=9, color=style.TEXT, wrap=True, transform=ax.transAxes)
        return
    top, bottom = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [1, 1.3]})
    f = np.asarray(block["frequencies"], dtype=float)
    top.plot(f, np.asarray(block["power"], dtype=float), color=style.LINE, linewidth=1.0)
    top.set_ylabel("power")
    top.set_title(title, loc="left", fontsize=10, color=style.TEXT, fontweight="bold")
    if block["lower"]:
        bottom.fill_between(f, block["lower"], block["upper"], facecolor=style.BAND_FILL, edgecolor="none",
                            linewidth=0, label="band")
    bottom.step(f, block["cumulative"], where="post", color=style.LINE, linewidth=1.2, label="cumulative")
    bottom.set_ylim(0, 1)
    bottom.set_ylabel("cumulative")
    bottom.set_xlabel("frequency (cycles per observation)")
    bottom.legend(loc="upper left", fontsize=7.5, frameon=False)
    _tidy(top)
    _tidy(bottom)


def _footer(fig, report: dict) -> None:
    text = (f"n = {report['n']}, max lag {report['max_lag']}, {report['confidence'] * 100:g}% band"
            + (f", period {report['period']}" if report["period"] else "")
            + (f"  |  {report['verdict']['summary']}" if report.get("verdict") else ""))
    fig.text(0.01, 0.005, text[:170], fontsize=7, color=style.MUTED, ha="left", va="bottom")


def figure(report: dict, chart: str):
    """The matplotlib Figure of one chart of a report (drawn by :func:`render`)."""
    _, Figure, _, _ = _mpl()
    charts = report["charts"]
    time_axes = []
    if chart == "panel":
        fig = Figure(figsize=(8.4, 8.2), dpi=DPI, facecolor=style.BACKGROUND)
        axes = fig.subplots(3, 1, gridspec_kw={"hspace": 0.6})
        _time_plot(axes[0], charts["time_plot"], "Series analysed")
        time_axes.append(axes[0])
        _correlogram(axes[1], charts["correlogram"], "Autocorrelation", report["confidence"])
        _correlogram(axes[2], charts["pacf"], "Partial autocorrelation", report["confidence"], legend=False)
    elif chart == "periodogram":
        fig = Figure(figsize=(8.4, 4.6), dpi=DPI, facecolor=style.BACKGROUND)
        _periodogram(fig, charts["periodogram"], "Periodogram")
    else:
        fig = Figure(figsize=(8.4, 3.4), dpi=DPI, facecolor=style.BACKGROUND)
        ax = fig.subplots()
        if chart == "time_plot":
            _time_plot(ax, charts["time_plot"], "Series analysed")
            time_axes.append(ax)
        else:
            title = "Autocorrelation" if chart == "correlogram" else "Partial autocorrelation"
            _correlogram(ax, charts[chart], title, report["confidence"])
    _footer(fig, report)
    if report.get("name"):
        fig.text(0.01, 0.995, str(report["name"])[:120], fontsize=11, color=style.TEXT, ha="left", va="top")
    top = {"panel": 0.9, "periodogram": 0.88}.get(chart, 0.78)
    fig.subplots_adjust(left=0.08, right=0.98, top=top, bottom=0.17 if chart != "panel" else 0.08)
    if charts["time_plot"]["x_kind"] == "time":
        for ax in time_axes:
            date_axis(ax)
    return fig


def render(report: dict, chart: str, fmt: str) -> bytes:
    """The image of one chart of a report, as SVG text or PNG bytes."""
    matplotlib = _mpl()[0]
    with matplotlib.rc_context(_RC):
        fig = figure(report, chart)
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, dpi=DPI, metadata={"Date": None} if fmt == "svg" else {"Software": "Lagsight"})
    return buf.getvalue()


def warm() -> None:
    """Import matplotlib and draw one small PNG and SVG, so its modules, fonts and caches are loaded now.

    gunicorn's master calls this before it forks (serving/gunicorn_conf.py): every worker then shares them
    instead of each loading about 30 MiB on its first image, which would also count against the worker's
    idle size when it gives memory back (serving/heap.py).
    """
    matplotlib, Figure, _, _ = _mpl()
    with matplotlib.rc_context(_RC):
        fig = Figure(figsize=(1, 1), dpi=DPI)
        fig.subplots().plot([0, 1], [0, 1])
        fig.text(0.5, 0.5, "0", fontsize=9)
        for fmt in ("png", "svg"):
            fig.savefig(io.BytesIO(), format=fmt, dpi=DPI)


#: The style settings and helpers, for other images drawn the same way (outputs/stability_image.py).
RC, matplotlib_parts, tidy = _RC, _mpl, _tidy
