"""Lagsight's visual style, shared by the Vega-Lite specifications and the rendered images."""
from __future__ import annotations

#: Spike colour by zone (see charts.zones).
ZONE_COLOURS = {"inside": "#5B6770", "marginal": "#D98E04", "far": "#B3261E"}
ZONE_LABELS = {"inside": "inside the band", "marginal": "marginally outside", "far": "far outside (> 3 se)"}
BAND_FILL = "#E6DCC3"  # the band: a warm sand region behind the spikes
BAND_EDGE = "#CDBE98"
SEASONAL = "#2E7D6B"  # seasonal lags: a teal marker under the axis and a faint column
SEASONAL_COLUMN = "#DCEFE9"
LINE = "#2F4B66"  # series lines
GRID = "#ECEAE4"
TEXT = "#2B2B2B"
BACKGROUND = "#FFFFFF"
FONT = "DejaVu Sans"
