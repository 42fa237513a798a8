"""SVG and PNG images of the report's charts, drawn with matplotlib in Lagsight's style.

The band is a shaded region behind the spikes; each spike is coloured by its zone
(inside the band, marginally outside, far outside beyond 3 standard errors); seasonal
lags get a faint column and a marker under the axis. Charts: ``correlogram``, ``pacf``,
``time_plot``, ``periodogram`` and ``panel`` (time plot, correlogram and PACF together).

matplotlib is imported on first use and drives its object API directly (no pyplot
state), so concurrent requests in threads do not share a figure.
"""
from __future__ import annotations

import io

import numpy as np

from lagsight.outputs import style

DPI = 110
_RC = {
    "font.family": style.FONT, "font.size": 9, "axes.edgecolor": "#9A968C", "axes.linewidth": 0.8,
    "axes.labelcolor": style.TEXT, "xtick.color": style.TEXT, "ytick.color": style.TEXT,
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


def _correlogram(ax, block: dict, title: str, confidence: float, legend: bool = True) -> None:
    _, _, Line2D, Patch = _mpl()
    lags = np.asarray(block["lags"], dtype=float)
    values = np.array([np.nan if v is None else v for v in block["values"]], dtype=float)
    lower = np.array([np.nan if v is None else v for v in block["lower"]], dtype=float)
    upper = np.array([np.nan if v is None else v for v in block["upper"]], dtype=float)
    edges = np.concatenate([lags - 0.5, [lags[-1] + 0.5]])
    ax.fill_between(edges, np.append(lower, lower[-1]), np.append(upper, upper[-1]), step="post",
                    color=style.BAND_FILL, edgecolor=style.BAND_EDGE, linewidth=0.6, zorder=1)
    for lag, seasonal in zip(block["lags"], block["seasonal"]):
        if seasonal:
            ax.axvspan(lag - 0.42, lag + 0.42, color=style.SEASONAL_COLUMN, zorder=0.5, linewidth=0)
    ax.axhline(0.0, color=style.TEXT, linewidth=0.8, zorder=2)
    zones = block["zone"]
    colours = [style.ZONE_COLOURS.get(z or "inside") for z in zones]
    ax.vlines(lags, 0.0, np.nan_to_num(values), colors=colours, linewidth=2.4 if lags.size <= 60 else 1.2, zorder=3)
    ax.scatter(lags, values, c=colours, s=16 if lags.size <= 60 else 5, zorder=4, linewidths=0)
    seasonal_lags = [lag for lag, s in zip(block["lags"], block["seasonal"]) if s]
    top = np.nanmax(np.abs(np.concatenate([values, upper]))) if values.size else 1.0
    limit = min(1.05, max(0.2, 1.15 * float(top)))
    ax.set_ylim(-limit, limit)
    if seasonal_lags:
        ax.plot(seasonal_lags, [-limit] * len(seasonal_lags), linestyle="none", marker="^", markersize=7,
                color=style.SEASONAL, clip_on=False, zorder=5)
    ax.set_xlim(0.3, lags[-1] + 0.7)
    ax.set_xlabel("lag")
    ax.set_title(title, loc="left", fontsize=10, color=style.TEXT, fontweight="bold")
    _tidy(ax)
    if legend:
        handles = [Patch(facecolor=style.BAND_FILL, edgecolor=style.BAND_EDGE, label=f"{confidence * 100:g}% band")]
        handles += [Line2D([], [], color=style.ZONE_COLOURS[z], linewidth=2.4, label=style.ZONE_LABELS[z])
                    for z in ("inside", "marginal", "far") if z in zones]
        if seasonal_lags:
            handles.append(Line2D([], [], color=style.SEASONAL, marker="^", linestyle="none", label="seasonal lag"))
        ax.legend(handles=handles, loc="lower right", bbox_to_anchor=(1.0, 1.0), fontsize=7.5, frameon=False,
                  ncol=len(handles), borderaxespad=0.2, handlelength=1.6, columnspacing=1.2)


def _time_plot(ax, block: dict, title: str) -> None:
    y = np.array([np.nan if v is None else v for v in block["values"]], dtype=float)
    if block["x_kind"] == "time":
        import pandas as pd

        x = pd.to_datetime(pd.Series(block["x"]), format="ISO8601", utc=True).dt.tz_localize(None).to_numpy()
    else:
        x = np.asarray(block["x"], dtype=float)
    ax.plot(x, y, color=style.LINE, linewidth=1.1)
    missing = np.isnan(y)
    if missing.any() and (~missing).any():
        ax.plot(x[missing], np.full(missing.sum(), np.nanmin(y)), linestyle="none", marker="|", markersize=6,
                color=style.ZONE_COLOURS["marginal"], label="missing")
        ax.legend(loc="upper right", fontsize=7.5, frameon=False)
    ax.set_title(title, loc="left", fontsize=10, color=style.TEXT, fontweight="bold")
    ax.set_xlabel("time" if block["x_kind"] == "time" else "position")
    _tidy(ax)


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
        bottom.fill_between(f, block["lower"], block["upper"], color=style.BAND_FILL, edgecolor=style.BAND_EDGE,
                            linewidth=0.6, label="band")
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
    fig.text(0.01, 0.005, text[:170], fontsize=7, color="#6B675E", ha="left", va="bottom")


def render(report: dict, chart: str, fmt: str) -> bytes:
    """The image of one chart of a report, as SVG text or PNG bytes."""
    matplotlib, Figure, _, _ = _mpl()
    charts = report["charts"]
    name = ""
    with matplotlib.rc_context(_RC):
        if chart == "panel":
            fig = Figure(figsize=(8.4, 8.2), dpi=DPI, facecolor=style.BACKGROUND)
            axes = fig.subplots(3, 1, gridspec_kw={"hspace": 0.55})
            _time_plot(axes[0], charts["time_plot"], "Series analysed" + name)
            _correlogram(axes[1], charts["correlogram"], "Autocorrelation", report["confidence"])
            _correlogram(axes[2], charts["pacf"], "Partial autocorrelation", report["confidence"], legend=False)
        elif chart == "periodogram":
            fig = Figure(figsize=(8.4, 4.6), dpi=DPI, facecolor=style.BACKGROUND)
            _periodogram(fig, charts["periodogram"], "Periodogram" + name)
        else:
            fig = Figure(figsize=(8.4, 3.4), dpi=DPI, facecolor=style.BACKGROUND)
            ax = fig.subplots()
            if chart == "time_plot":
                _time_plot(ax, charts["time_plot"], "Series analysed" + name)
            else:
                title = ("Autocorrelation" if chart == "correlogram" else "Partial autocorrelation") + name
                _correlogram(ax, charts[chart], title, report["confidence"])
        _footer(fig, report)
        if report.get("name"):
            fig.text(0.01, 0.995, str(report["name"])[:120], fontsize=11, color=style.TEXT, ha="left", va="top")
        top = {"panel": 0.92, "periodogram": 0.88}.get(chart, 0.8)
        fig.subplots_adjust(left=0.08, right=0.98, top=top, bottom=0.17 if chart != "panel" else 0.08)
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
