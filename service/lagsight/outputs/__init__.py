"""Answers out: the report shape, the brief batch result, chart data, Vega-Lite, SVG/PNG images, CSV and JSON bytes.

May import consult, inputs (the prepared series), the engine and the shared modules; never Flask.
"""
