"""The images' visual language (outputs/style.py, render.py, stability_image.py): bars and a shaded band, integer
lag ticks, date labels that never overlap, filled values ringed, a legend in the shared words, nothing dashed."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from matplotlib.collections import LineCollection, PolyCollection
from matplotlib.colors import to_hex
from matplotlib.patches import Rectangle

from lagsight.outputs import render, stability_image, style

URL = "/v1/diagnostics"
#: matplotlib's first default colour and the pure blue of other plotting defaults (both recalled from memory):
#: the images use neither.
DEFAULT_BLUES = ("#1f77b4", "#0000ff")


def _body(n: int, freq: str | None, seed: int = 3, **extra) -> dict:
    rng = np.random.default_rng(seed)
    x = np.zeros(n)
    e = rng.standard_normal(n)
    for t in range(1, n):
        x[t] = 0.4 * x[t - 1] + e[t]
    body = {"values": x.round(4).tolist(), **extra}
    if freq:
        body["timestamps"] = [t.isoformat() for t in pd.date_range("2021-01-01", periods=n, freq=freq)]
    return body


def _figure(report: dict, chart: str):
    matplotlib = render.matplotlib_parts()[0]
    with matplotlib.rc_context(render.RC):
        return render.figure(report, chart)


def _label_boxes(ax) -> list:
    """Pixel boxes of the visible, non-empty x tick labels of ``ax`` (the figure drawn first)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = ax.figure
    canvas = FigureCanvasAgg(fig)
    fig.draw(canvas.get_renderer())
    renderer = canvas.get_renderer()
    return sorted((t.get_window_extent(renderer) for t in ax.get_xticklabels() if t.get_visible() and t.get_text()),
                  key=lambda b: b.x0)


def _assert_apart(boxes: list) -> None:
    assert len(boxes) >= 2
    for a, b in zip(boxes, boxes[1:]):
        assert a.x1 <= b.x0, (a, b)


@pytest.mark.parametrize("n,freq,chart", [(12, "D", "time_plot"), (30, "h", "time_plot"), (2400, "h", "time_plot"),
                                          (1500, "D", "panel"), (240, "MS", "time_plot"), (3000, "min", "panel")],
                         ids=["12-days", "30-hours", "2400-hours", "1500-days", "20-years-monthly", "3000-minutes"])
def test_date_labels_never_overlap(client, n, freq, chart):
    report = client.post(URL, json=_body(n, freq, max_lag=10, charts=True)).get_json()
    fig = _figure(report, chart)
    _assert_apart(_label_boxes(fig.axes[0]))


@pytest.mark.parametrize("n,freq", [(120, "D"), (1400, "h")])
def test_stability_image_date_labels_never_overlap(client, n, freq):
    answer = client.post("/v1/stability", json=_body(n, freq) | {"window": 40}).get_json()
    matplotlib = render.matplotlib_parts()[0]
    with matplotlib.rc_context(render.RC):
        fig = stability_image.figure(answer)
    _assert_apart(_label_boxes(fig.axes[1]))


@pytest.mark.parametrize("max_lag", [3, 7, 60])
def test_lag_ticks_are_whole_numbers_and_bars_one_per_lag(client, max_lag):
    report = client.post(URL, json=_body(200, None, max_lag=max_lag, charts=True)).get_json()
    fig = _figure(report, "correlogram")
    ax = fig.axes[0]
    ticks = [t for t in ax.get_xticks() if ax.get_xlim()[0] <= t <= ax.get_xlim()[1]]
    assert ticks and all(float(t).is_integer() for t in ticks)
    _assert_apart(_label_boxes(ax))
    bars = [p for p in ax.patches if isinstance(p, Rectangle)]
    assert len(bars) == max_lag
    assert {round(b.get_width(), 6) for b in bars} == {style.BAR_WIDTH}
    assert not [c for c in ax.collections if isinstance(c, LineCollection)]  # no stems
    assert not [line for line in ax.lines if line.get_marker() not in (None, "None", "", "D")]  # no dots on tops


def test_band_is_a_shaded_region_and_bars_take_the_zone_colours(client):
    e = np.random.default_rng(0).standard_normal(247)
    x = e[7:] + 0.5 * e[:-7]  # a seeded seasonal MA(1) at lag 7
    report = client.post(URL, json={"values": x.round(4).tolist(), "period": 7, "max_lag": 21, "charts": True}).get_json()
    ax = _figure(report, "correlogram").axes[0]
    bands = [c for c in ax.collections if isinstance(c, PolyCollection)]
    assert len(bands) == 1 and to_hex(bands[0].get_facecolor()[0]) == style.BAND_FILL
    assert bands[0].get_linewidth()[0] == 0  # no outline, never lines
    far, marginal = set(report["acf"]["far"]), set(report["acf"]["marginal"])
    assert far and marginal  # the invented series has both
    for bar in (p for p in ax.patches if isinstance(p, Rectangle)):
        lag = round(bar.get_x() + bar.get_width() / 2)
        if lag in marginal:  # hollow, outlined in the far colour
            assert to_hex(bar.get_facecolor()) == style.BACKGROUND
            assert to_hex(bar.get_edgecolor()) == style.PALETTE["far"]
        else:
            assert to_hex(bar.get_facecolor()) == style.PALETTE["far" if lag in far else "inside"]
    diamonds = [line for line in ax.lines if line.get_marker() == "D"]
    assert len(diamonds) == 1 and list(diamonds[0].get_xdata()) == [7, 14, 21]
    assert to_hex(diamonds[0].get_color()) == style.SEASONAL
    words = [t.get_text() for t in ax.get_legend().get_texts()]
    assert words == ["95% " + style.LABELS["band"], style.LABELS["inside"], style.LABELS["marginal"],
                     style.LABELS["far"], style.LABELS["seasonal"]]


def test_filled_values_are_ringed_on_the_time_plot(client):
    body = _body(90, "D", missing="interpolate")
    gaps = [5, 6, 40, 71]
    for i in gaps:
        body["values"][i] = None
    report = client.post(URL, json=body | {"charts": True}).get_json()
    assert report["charts"]["time_plot"]["filled"] == gaps and report["missing"]["interpolated"] == len(gaps)
    ax = _figure(report, "time_plot").axes[0]
    rings = [line for line in ax.lines if line.get_marker() == "o"]
    assert len(rings) == 1 and len(rings[0].get_xdata()) == len(gaps)
    assert to_hex(rings[0].get_markerfacecolor()) == style.BACKGROUND
    assert to_hex(rings[0].get_markeredgecolor()) == style.FILLED
    assert [t.get_text() for t in ax.get_legend().get_texts()] == [style.LABELS["line"], style.LABELS["filled"]]
    spec = client.post(URL, json=body, query_string={"vega_lite": "true"}).get_json()["charts"]["time_plot"]["vega_lite"]
    assert [i for i, row in enumerate(spec["data"]["values"]) if row["filled"]] == gaps
    assert spec["layer"][1]["mark"]["stroke"] == style.FILLED  # the Vega-Lite specification rings them too
    untouched = client.post(URL, json=_body(90, "D", charts=True)).get_json()
    assert untouched["charts"]["time_plot"]["filled"] == []


@pytest.mark.parametrize("chart", ["correlogram", "panel"])
def test_svg_has_nothing_dashed_and_no_default_blue(client, chart):
    body = _body(200, "D", max_lag=30)
    svg = client.post(URL, json=body, query_string={"format": "svg", "chart": chart}).get_data(as_text=True).lower()
    assert "dasharray" not in svg
    for colour in DEFAULT_BLUES:
        assert colour not in svg
    for colour in (style.BAND_FILL, style.PALETTE["inside"], style.LINE if chart == "panel" else style.BAND_FILL):
        assert colour in svg
    stability = client.post("/v1/stability", json=body | {"window": 40}, query_string={"format": "svg"})
    assert "dasharray" not in stability.get_data(as_text=True)
