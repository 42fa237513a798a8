"""An SVG or PNG image of a stability answer, in Lagsight's style (see render.py).

Two panels over the windows, each window drawn at its last value: the lag-1 autocorrelation with the
white-noise band of one window as a shaded region (windows judged not white noise marked in the "far"
colour), and the variance. Changes found are vertical lines through both, in the style's change colour
for the structure and its ochre for the variance (solid: the style draws no dashed lines).
"""
from __future__ import annotations

import io

import numpy as np

from lagsight.outputs import style
from lagsight.outputs.render import DPI, RC, date_axis, matplotlib_parts, tidy

#: Colours of the change lines by kind, and their widths: a structure line is wider and drawn first, so a
#: variance change at the same place shows inside it.
CHANGE_COLOURS = {"structure": style.CHANGE, "variance": style.SEASONAL}
CHANGE_WIDTHS = {"structure": 3.4, "variance": 1.4}


def _numbers(values: list) -> np.ndarray:
    return np.array([np.nan if v is None else v for v in values], dtype=float)


def _times(stamps: list) -> np.ndarray:
    import pandas as pd

    return pd.to_datetime(pd.Series(stamps), format="ISO8601", utc=True).dt.tz_localize(None).to_numpy()


def figure(answer: dict):
    """The matplotlib Figure of ``answer`` (the JSON answer of /v1/stability); draw it inside ``RC``."""
    _, Figure, _, _ = matplotlib_parts()
    chart = answer["chart"]
    windows = answer["windows"]
    timed = chart["x_kind"] == "time"
    x = _times([w["end_time"] for w in windows]) if timed else np.array([w["end"] - 1 for w in windows], dtype=float)
    r1 = _numbers(chart["lag1_autocorrelation"])
    variance = _numbers(chart["variance"])
    flagged = np.array([v is False for v in chart["white_noise"]])
    found = answer["changes"]["found"] or []
    changes = [(_times([c["time"]])[0] if timed else c["index"] - 0.5, c["kind"]) for c in found]
    fig = Figure(figsize=(8.4, 5.6), dpi=DPI, facecolor=style.BACKGROUND)
    top, bottom = fig.subplots(2, 1, sharex=True, gridspec_kw={"hspace": 0.25})
    top.axhspan(chart["lower"], chart["upper"], facecolor=style.BAND_FILL, edgecolor="none", zorder=0.5, linewidth=0,
                label="band of one window")
    top.axhline(0.0, color=style.TEXT, linewidth=0.8)
    top.plot(x, r1, color=style.LINE, linewidth=1.2, zorder=2)
    top.scatter(x[~flagged], r1[~flagged], s=12, color=style.ZONE_COLOURS["inside"], zorder=3,
                label="judged white noise")
    top.scatter(x[flagged], r1[flagged], s=16, color=style.ZONE_COLOURS["far"], zorder=3, label="not white noise")
    top.set_ylabel("lag-1 autocorrelation")
    top.set_title(f"Windows of {answer['window']} values, every {answer['step']}", loc="left", fontsize=10)
    bottom.plot(x, variance, color=style.LINE, linewidth=1.2)
    bottom.set_ylabel("variance")
    bottom.set_xlabel("last value of the window" + ("" if timed else " (index)"))
    drawn = set()
    for at, kind in sorted(changes, key=lambda c: c[1] != "structure"):
        for ax in (top, bottom):
            ax.axvline(at, color=CHANGE_COLOURS.get(kind, style.CHANGE), linewidth=CHANGE_WIDTHS.get(kind, 1.4),
                       zorder=1 if kind == "structure" else 1.1,
                       label=f"{kind} change" if ax is top and kind not in drawn else None)
        drawn.add(kind)
    top.legend(loc="upper left", fontsize=7.5, frameon=False, ncol=3)
    tidy(top)
    tidy(bottom)
    text = " ".join(answer["reading"])
    fig.text(0.01, 0.005, text[:170], fontsize=7, color=style.MUTED, ha="left", va="bottom")
    if answer.get("name"):
        fig.text(0.01, 0.995, str(answer["name"])[:120], fontsize=11, color=style.TEXT, ha="left", va="top")
    fig.subplots_adjust(left=0.09, right=0.98, top=0.9, bottom=0.12)
    if timed:
        date_axis(bottom)
    return fig


def render(answer: dict, fmt: str) -> bytes:
    """The image of ``answer`` (the JSON answer of /v1/stability) as SVG text or PNG bytes."""
    matplotlib = matplotlib_parts()[0]
    with matplotlib.rc_context(RC):
        fig = figure(answer)
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, dpi=DPI, metadata={"Date": None} if fmt == "svg" else {"Software": "Lagsight"})
    return buf.getvalue()
