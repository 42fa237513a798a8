"""Vega-Lite (v6) specifications of the report's charts, on request (``vega_lite=true``).

Each specification carries its data inline, so a portal can embed it with any Vega-Lite
renderer and no second call. The look follows :mod:`lagsight.outputs.style`: the band is a shaded
region, bars are coloured by zone (a bar just outside the band hollow with an outline), seasonal lags
carry a diamond under the axis.
"""
from __future__ import annotations

from lagsight.outputs import style

SCHEMA = "https://vega.github.io/schema/vega-lite/v6.json"
WIDTH, HEIGHT = 560, 220

_ZONE_SCALE = {"domain": list(style.ZONE_COLOURS), "range": list(style.ZONE_COLOURS.values())}


def _base(title: str, data: list[dict]) -> dict:
    return {
        "$schema": SCHEMA,
        "title": {"text": title, "anchor": "start", "color": style.TEXT},
        "width": WIDTH,
        "height": HEIGHT,
        "data": {"values": data},
        "config": {"view": {"stroke": None}, "axis": {"gridColor": style.GRID, "labelColor": style.TEXT,
                                                      "titleColor": style.TEXT}},
    }


def correlogram(block: dict, title: str, axis_title: str) -> dict:
    """Bars from zero coloured by zone, over the band as a shaded area; seasonal lags marked."""
    half = style.BAR_WIDTH / 2
    rows = [
        {"lag": lag, "from": lag - half, "to": lag + half, "value": v, "lower": lo, "upper": hi, "zone": z,
         "seasonal": s}
        for lag, v, lo, hi, z, s in zip(block["lags"], block["values"], block["lower"], block["upper"],
                                        block["zone"], block["seasonal"])
    ]
    x = {"field": "lag", "type": "quantitative", "title": "lag", "axis": {"tickMinStep": 1, "format": "d"}}
    bar_x = {"field": "from", "type": "quantitative", "title": "lag", "axis": {"tickMinStep": 1, "format": "d"}}
    y = {"field": "value", "type": "quantitative", "title": axis_title}
    tooltip = [{"field": "lag"}, {"field": "value", "format": ".3f"},
               {"field": "upper", "title": "band", "format": ".3f"}, {"field": "zone"}]
    spec = _base(title, rows)
    spec["layer"] = [
        {"mark": {"type": "area", "color": style.BAND_FILL, "opacity": 1, "interpolate": "step-after"},
         "encoding": {"x": x, "y": {"field": "lower", "type": "quantitative"}, "y2": {"field": "upper"}}},
        {"mark": {"type": "rule", "color": style.TEXT, "strokeWidth": 0.8}, "encoding": {"y": {"datum": 0}}},
        {"transform": [{"filter": "datum.zone !== 'marginal'"}], "mark": {"type": "rect"},
         "encoding": {"x": bar_x, "x2": {"field": "to"}, "y": y, "y2": {"datum": 0},
                      "color": {"field": "zone", "type": "nominal", "scale": _ZONE_SCALE, "title": "bar"},
                      "tooltip": tooltip}},
        {"transform": [{"filter": "datum.zone === 'marginal'"}],
         "mark": {"type": "rect", "fill": style.BACKGROUND, "stroke": style.ZONE_COLOURS["marginal"],
                  "strokeWidth": style.OUTLINE_WIDTH},
         "encoding": {"x": bar_x, "x2": {"field": "to"}, "y": y, "y2": {"datum": 0}, "tooltip": tooltip}},
        {"transform": [{"filter": "datum.seasonal"}],
         "mark": {"type": "point", "shape": "diamond", "filled": True, "color": style.SEASONAL, "size": 50,
                  "yOffset": 8},
         "encoding": {"x": x, "y": {"value": HEIGHT}}},
    ]
    return spec


def time_plot(block: dict, title: str) -> dict:
    """The series as a line; values filled in by interpolation ringed."""
    filled = set(block.get("filled") or [])
    rows = [{"x": x, "value": v, "filled": i in filled} for i, (x, v) in enumerate(zip(block["x"], block["values"]))]
    spec = _base(title, rows)
    x_type = "temporal" if block["x_kind"] == "time" else "quantitative"
    encoding = {"x": {"field": "x", "type": x_type, "title": "time" if x_type == "temporal" else "position"},
                "y": {"field": "value", "type": "quantitative", "title": "value", "scale": {"zero": False}}}
    spec["encoding"] = encoding
    spec["layer"] = [
        {"mark": {"type": "line", "color": style.LINE, "strokeWidth": 1.4, "point": False}},
        {"transform": [{"filter": "datum.filled"}],
         "mark": {"type": "point", "shape": "circle", "filled": True, "fill": style.BACKGROUND,
                  "stroke": style.FILLED, "strokeWidth": 1.4, "size": 40}},
    ]
    return spec


def periodogram(block: dict, title: str) -> dict:
    rows = [{"frequency": f, "power": p, "cumulative": c}
            for f, p, c in zip(block["frequencies"], block["power"], block["cumulative"])]
    if block["lower"] and block["upper"]:
        for row, lo, hi in zip(rows, block["lower"], block["upper"]):
            row["lower"], row["upper"] = lo, hi
    x = {"field": "frequency", "type": "quantitative", "title": "frequency (cycles per observation)"}
    power = {"width": WIDTH, "height": HEIGHT // 2 + 30, "mark": {"type": "line", "color": style.LINE},
             "encoding": {"x": x, "y": {"field": "power", "type": "quantitative", "title": "power"}}}
    layers = [{"mark": {"type": "line", "color": style.LINE, "interpolate": "step-after"},
               "encoding": {"x": x, "y": {"field": "cumulative", "type": "quantitative",
                                          "title": "cumulative", "scale": {"domain": [0, 1]}}}}]
    if block["lower"]:
        layers.insert(0, {"mark": {"type": "area", "color": style.BAND_FILL, "opacity": 0.9, "clip": True},
                          "encoding": {"x": x, "y": {"field": "lower", "type": "quantitative"},
                                       "y2": {"field": "upper"}}})
    cumulative = {"width": WIDTH, "height": HEIGHT, "layer": layers}
    spec = _base(title, rows)
    del spec["width"], spec["height"]
    spec["vconcat"] = [power, cumulative]
    return spec


def attach(charts: dict, name: str | None) -> dict:
    """Fill each chart's ``vega_lite`` with its specification (in place); returns ``charts``."""
    label = f" - {name}" if name else ""
    charts["time_plot"]["vega_lite"] = time_plot(charts["time_plot"], "Series analysed" + label)
    charts["correlogram"]["vega_lite"] = correlogram(charts["correlogram"], "Autocorrelation" + label,
                                                     "autocorrelation")
    charts["pacf"]["vega_lite"] = correlogram(charts["pacf"], "Partial autocorrelation" + label,
                                              "partial autocorrelation")
    if charts["periodogram"]["frequencies"]:
        charts["periodogram"]["vega_lite"] = periodogram(charts["periodogram"], "Periodogram" + label)
    return charts
