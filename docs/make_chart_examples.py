"""Draw the example chart images in docs/charts/ from an invented, seeded scenario.

Run from the repository root with the project's venv: ``.venv/bin/python docs/make_chart_examples.py``.
The scenario: an orchard co-operative's monthly cider-sales forecast residuals, 12 years,
with a leftover yearly echo and short-term memory, and three months missing (a till outage).
The missing months are analysed pairwise, except for the periodogram, which needs them filled.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from lagsight import create_app

OUT = Path(__file__).resolve().parent / "charts"


def payload() -> dict:
    rng = np.random.default_rng(20261202)
    n = 144
    e = rng.standard_normal(n + 12)
    x = np.empty(n)
    for t in range(n):
        x[t] = 0.45 * (x[t - 1] if t else 0.0) + e[t + 12] + 0.55 * e[t]
    values = [round(float(v) * 140.0, 1) for v in x]
    for i in (40, 41, 97):
        values[i] = None
    stamps = [d.date().isoformat() for d in pd.date_range("2014-01-01", periods=n, freq="MS")]
    return {"name": "orchard co-op: monthly cider sales, forecast residuals (litres)", "values": values,
            "timestamps": stamps, "missing": "pairwise", "model_df": 2}


def main() -> None:
    OUT.mkdir(exist_ok=True)
    client = create_app({"TESTING": True}).test_client()
    body = payload()
    for chart in ("correlogram", "pacf", "time_plot", "periodogram", "panel"):
        # The periodogram needs an evenly spaced, complete series: that example fills the gaps.
        sent = body | {"missing": "interpolate"} if chart == "periodogram" else body
        r = client.post("/v1/diagnostics", json=sent, query_string={"format": "png", "chart": chart})
        assert r.status_code == 200, r.get_data(as_text=True)
        (OUT / f"{chart}.png").write_bytes(r.data)
    r = client.post("/v1/diagnostics", json=body, query_string={"format": "svg"})
    (OUT / "correlogram.svg").write_bytes(r.data)


if __name__ == "__main__":
    main()
