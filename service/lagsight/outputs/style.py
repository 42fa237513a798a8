"""Lagsight's visual language: the one style definition of the page's charts and the rendered images.

The page reads it as CSS custom properties (:func:`css`, served at ``GET /static/style.css``); the SVG/PNG
images (render.py, stability_image.py) and the Vega-Lite specifications read the names below.

The look, by element:

- the band: a shaded region, stepped lag by lag, with no outline and never drawn as lines;
- correlations: bars of ``BAR_WIDTH`` of a lag, filled in the ``inside`` colour inside the band and
  in the ``far`` colour beyond 3 standard errors; a bar just outside the band is hollow, outlined in
  the ``far`` colour;
- seasonal lags: a diamond under the lag axis;
- the series: a line, points filled in by interpolation drawn as rings on it, missing points as a
  short tick under the plot;
- integer lag ticks; date ticks thinned until no two labels touch;
- a legend naming every mark shown.
"""
from __future__ import annotations

#: Named colours; the page gets each as ``--ls-<name>``.
PALETTE = {
    "ink": "#1d2430",  # text and the zero line
    "muted": "#4a5567",  # secondary text and tick labels
    "paper": "#ffffff",
    "wash": "#f5f3f8",  # panel backgrounds on the page
    "rule": "#cfc9da",  # borders
    "grid": "#ebe7f1",
    "band": "#e4dcf2",  # the shaded band: a pale heather
    "inside": "#1f5c5a",  # bars inside the band: deep spruce
    "far": "#b3261e",  # bars far outside the band, and the outline of bars just outside: brick red
    "seasonal": "#a05a00",  # seasonal-lag diamonds: burnt ochre
    "line": "#1f5c5a",  # the series line
    "filled": "#6b3fa0",  # rings on interpolated points: plum
    "missing": "#a05a00",  # ticks under missing points
    "change": "#6b3fa0",  # change lines of the stability image
}

#: Shapes and sizes shared by both drawings.
SHAPES = {
    "bar-width": 0.62,  # bar width as a fraction of one lag
    "bar-round": 0.18,  # corner radius of a bar on the page, as a fraction of its width (the images square it)
    "outline-width": 1.6,  # the outline of a hollow bar, in points
    "seasonal-mark": "diamond",
    "filled-mark": "ring",
    "missing-mark": "tick",
    "font": "DejaVu Sans",
}

#: Legend texts, the same words on the page and in the images.
LABELS = {
    "band": "band: inside it, consistent with white noise",
    "inside": "inside the band",
    "marginal": "just outside the band",
    "far": "far outside (over 3 standard errors)",
    "seasonal": "seasonal lag",
    "line": "series",
    "filled": "filled-in value",
    "missing": "missing value",
}

# Names read by the image and Vega-Lite code.
ZONE_COLOURS = {"inside": PALETTE["inside"], "marginal": PALETTE["far"], "far": PALETTE["far"]}
ZONE_LABELS = {zone: LABELS[zone] for zone in ("inside", "marginal", "far")}
BAND_FILL = PALETTE["band"]
SEASONAL = PALETTE["seasonal"]
LINE = PALETTE["line"]
GRID = PALETTE["grid"]
TEXT = PALETTE["ink"]
MUTED = PALETTE["muted"]
BACKGROUND = PALETTE["paper"]
FILLED = PALETTE["filled"]
MISSING = PALETTE["missing"]
CHANGE = PALETTE["change"]
BAR_WIDTH = SHAPES["bar-width"]
OUTLINE_WIDTH = SHAPES["outline-width"]
FONT = SHAPES["font"]


def variables() -> dict[str, str]:
    """Every setting as a CSS custom property: name -> value (numbers as plain numbers, texts quoted)."""
    out = {f"--ls-{name}": value for name, value in PALETTE.items()}
    for name, value in SHAPES.items():
        out[f"--ls-{name}"] = f"{value:g}" if isinstance(value, float) else f'"{value}"'
    for name, text in LABELS.items():
        out[f"--ls-label-{name}"] = f'"{text}"'
    return out


def css() -> str:
    """The style sheet the page loads before its own: one ``:root`` rule of custom properties."""
    lines = [f"  {name}: {value};" for name, value in variables().items()]
    head = "/* Lagsight's chart style, generated from lagsight/outputs/style.py. */\n"
    return head + ":root {\n" + "\n".join(lines) + "\n}\n"
