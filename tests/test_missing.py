"""Missing values: refuse, interpolate, and the pairwise (amplitude-modulated) estimator."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.tsa.stattools import acf as sm_acf
from statsmodels.tsa.stattools import acovf

from lagsight.engine.analysis import Spec, analyse
from lagsight.engine.masked import masked_acf, pair_counts

from .spec_tools import assert_valid

URL = "/v1/diagnostics"


def _co2() -> np.ndarray:
    """statsmodels.datasets.co2 (weekly Mauna Loa CO2, 2284 weeks, 59 of them missing as NaN)."""
    return sm.datasets.co2.load_pandas().data["co2"].to_numpy()


def _nile_with_holes() -> np.ndarray:
    """statsmodels.datasets.nile volumes (100 years) with a fixed set of values knocked out."""
    x = sm.datasets.nile.load_pandas().data["volume"].to_numpy(dtype=float, copy=True)
    x[[3, 4, 17, 40, 41, 42, 77, 90]] = np.nan
    return x


def _pandas_pairwise_acf(x: np.ndarray, max_lag: int) -> np.ndarray:
    """Independent computation with pandas: mean of the observed values, then for each lag the
    mean of the products over the pairs where both are observed, tapered by (n - k)/n."""
    s = pd.Series(x)
    d = s - s.mean()  # pandas skips NaN
    n = len(s)
    c = [(d * d.shift(-k)).mean() * (n - k) / n for k in range(max_lag + 1)]  # mean() skips NaN pairs
    return np.array(c[1:]) / c[0]


@pytest.mark.parametrize("data", [_co2(), _nile_with_holes()], ids=["co2", "nile-holes"])
def test_masked_acf_against_pandas_pairwise_sums_and_statsmodels(data):
    x = data[:600]
    mask = ~np.isnan(x)
    r, n_eff = masked_acf(x[None], mask[None], 20)
    # pandas: direct pairwise sums (see _pandas_pairwise_acf); agreement to rounding.
    np.testing.assert_allclose(r[0], _pandas_pairwise_acf(x, 20), rtol=0, atol=1e-12)
    # statsmodels acovf(missing="conservative", adjusted=True) is Parzen's S_k / N_k; we taper by (n - k) / n.
    n, k = x.size, np.arange(21)
    c = acovf(x, missing="conservative", adjusted=True, nlag=20, fft=False) * (n - k) / n
    np.testing.assert_allclose(r[0], c[1:] / c[0], rtol=0, atol=1e-12)
    pairs = [int((mask[: n - j] & mask[j:]).sum()) for j in range(1, 21)]
    np.testing.assert_allclose(n_eff[0], n * np.array(pairs) / (n - k[1:]), rtol=1e-12)


def test_masked_acf_with_nothing_missing_is_the_ordinary_acf():
    x = sm.datasets.nile.load_pandas().data["volume"].to_numpy(dtype=float)
    r, n_eff = masked_acf(x[None], np.ones((1, x.size), bool), 30)
    # statsmodels.tsa.stattools.acf(x, nlags=30, fft=False): the biased (divide-by-n) ACF.
    np.testing.assert_allclose(r[0], sm_acf(x, nlags=30, fft=False)[1:], rtol=0, atol=1e-13)
    assert (n_eff == x.size).all()
    spec = Spec(max_lag=30, confidence=0.95, model_df=0, test_lags=(10, 30), short_lag=10, period=None)
    full = analyse(x[None], spec)
    masked = analyse(x[None], spec, mask=np.ones((1, x.size), bool))
    np.testing.assert_allclose(masked.acf_band.upper, full.acf_band.upper, rtol=1e-14)
    for a, b in zip(masked.tests, full.tests):
        np.testing.assert_allclose(a.statistic, b.statistic, rtol=1e-12)


def test_masked_acf_is_vectorised_over_rows_and_uses_the_fft_for_long_series():
    rng = np.random.default_rng(11)
    x = rng.standard_normal((3, 5000))
    mask = rng.random((3, 5000)) > 0.2
    x[~mask] = np.nan
    r, _ = masked_acf(x, mask, 60)  # 60 lags on 5000 points: the FFT path (autocorrelation.uses_fft)
    for i in range(3):
        np.testing.assert_allclose(r[i], _pandas_pairwise_acf(x[i], 60), atol=1e-12)
    assert (pair_counts(mask, 60)[:, 0] == mask.sum(axis=1)).all()


def test_bands_and_ljung_box_keep_their_size_with_missing_values():
    """Simulated null (seeded, not a reference): white noise with 30% missing at random.
    r_k / (band / z) should be close to standard normal and Ljung-Box p-values close to uniform."""
    rng = np.random.default_rng(2024)
    m, n, K = 2000, 200, 10
    x = rng.standard_normal((m, n))
    mask = rng.random((m, n)) > 0.3
    x[~mask] = np.nan
    spec = Spec(max_lag=K, confidence=0.95, model_df=0, test_lags=(K,), short_lag=K, period=None,
                tests=("ljung_box",))
    res = analyse(x, spec, mask=mask)
    upper = res.acf_band.upper
    z = res.acf / (upper / 1.959963984540054)
    # Var of the standardised r_k is near 1 (slightly below, as for complete data: (n - k)/n).
    assert 0.88 < z.var() < 1.05
    outside = (np.abs(res.acf) > upper).mean()
    assert 0.03 < outside < 0.07  # nominal 5%
    p = res.tests[0].p_value[:, 0]
    assert 0.03 < (p < 0.05).mean() < 0.08
    # The naive band z / sqrt(n) would be far too narrow: check the effective size is used.
    assert (upper > 1.96 / np.sqrt(n) * 1.15).all()


URL_CASES = [
    ({"values": [1, None, 3, 4, 2, 5]}, "/values/1"),
    ({"values": [None, 2, 3, 4, 2, 5, None]}, "/values/0"),
]


@pytest.mark.parametrize("body,pointer", URL_CASES)
def test_refuse_is_the_default_and_points_at_the_first_missing(client, body, pointer):
    r = client.post(URL, json=body)
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == pointer
    assert "pairwise" in r.get_json()["errors"][0]["detail"]


def test_interpolate_fills_linearly_and_drops_the_ends(client):
    values = [None, 1.0, 2.0, None, None, 8.0, 3.0, 5.0, 1.0, 4.0, None]
    body = client.post(URL, json={"values": values, "missing": "interpolate", "max_lag": 3}).get_json()
    filled = np.array([1.0, 2.0, 4.0, 6.0, 8.0, 3.0, 5.0, 1.0, 4.0])  # np.interp by hand: 2 -> 8 in three steps
    # statsmodels.tsa.stattools.acf on the filled series.
    np.testing.assert_allclose(body["acf"]["values"], sm_acf(filled, nlags=3, fft=False)[1:], atol=1e-12)
    assert body["missing"]["interpolated"] == 2 and body["missing"]["dropped_at_ends"] == 2
    assert body["missing"]["count"] == 4 and body["n"] == 9 and body["n_input"] == 11
    assert any(w["code"] == "missing_ends_dropped" for w in body["warnings"])
    assert_valid(body, "Report")


def test_pairwise_report_states_effective_sizes_and_matches_the_engine(client):
    x = _nile_with_holes()
    values = [None if np.isnan(v) else float(v) for v in x]
    body = client.post(URL, json={"values": values, "missing": "pairwise", "max_lag": 12}).get_json()
    assert_valid(body, "Report")
    np.testing.assert_allclose(body["acf"]["values"], _pandas_pairwise_acf(x, 12), atol=1e-12)
    eff = np.array(body["missing"]["effective_n"])
    assert eff.shape == (12,) and (eff < 100).all() and body["n"] == 92
    half = 1.959963984540054 / np.sqrt(eff)  # z(0.975) / sqrt(n_k)
    np.testing.assert_allclose(body["acf"]["upper"], half, rtol=1e-12)
    assert "Parzen" in body["missing"]["note"]


def test_pairwise_lowers_a_default_max_lag_without_pairs_and_refuses_a_requested_one(client):
    values = [1.0, 3.0, 2.0, None, None, None, 5.0, 2.0, 4.0]  # pairs: 4 at lag 1, 2 at lag 2
    body = client.post(URL, json={"values": values, "missing": "pairwise"}).get_json()
    assert body["max_lag"] == 1 and "max_lag_lowered" in [w["code"] for w in body["warnings"]]
    r = client.post(URL, json={"values": values, "missing": "pairwise", "max_lag": 2})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/max_lag"
    alternating = [1.0, None, 2.0, None, 4.0, None, 3.0, None, 5.0]  # no pair at lag 1
    r = client.post(URL, json={"values": alternating, "missing": "pairwise"})
    assert r.status_code == 422 and "Lag 1" in r.get_json()["errors"][0]["detail"]


def test_unknown_missing_method_is_422(client):
    r = client.post(URL, json={"values": [1, 2, 3], "missing": "drop"})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/missing"


def test_too_few_observed_values_is_422(client):
    r = client.post(URL, json={"values": [1, None, None, 2], "missing": "pairwise"})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/values"
