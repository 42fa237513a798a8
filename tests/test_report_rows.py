"""The report's list building: the per-row Python path for small groups agrees with the array path."""
from __future__ import annotations

import math

import numpy as np
import pytest

from lagsight.engine.bands import Band
from lagsight.outputs.report import _SMALL_ARRAY, _Correlograms, _finite_rows, _rows


def _band(centre: np.ndarray, se: np.ndarray) -> Band:
    return Band("white_noise", 1.959963984540054, centre, se)


def test_small_groups_classify_lags_like_the_array_path():
    rng = np.random.default_rng(11)
    m, K = 40, 12
    assert m * K > _SMALL_ARRAY >= K  # the whole group takes the array path, each row alone the list path
    lags = list(range(1, K + 1))
    centre = rng.normal(scale=0.01, size=(m, K))
    se = rng.uniform(0.05, 0.2, size=(m, K))
    values = rng.normal(scale=0.3, size=(m, K))
    band = _band(centre, se)
    values[0, :4] = band.lower[0, :4]  # exactly on the band: inside
    values[1, :4] = band.upper[1, :4]
    values[2, :4] = centre[2, :4] + 3.0 * se[2, :4]  # at the "far" boundary, up to rounding
    values[3, :4] = np.nextafter(centre[3, :4] + 3.0 * se[3, :4], np.inf)
    values[4, 5] = np.nan  # a non-finite value sends its row to the array path as well
    whole = _Correlograms(lags, values, band)
    assert any(whole.outside) and any(whole.far)
    for i in range(m):
        alone = _Correlograms(lags, values[i : i + 1], _band(centre[i : i + 1], se[i : i + 1]))
        assert alone.outside[0] == whole.outside[i] and alone.far[0] == whole.far[i], i
        assert alone.values[0] == whole.values[i] or i == 4
    assert whole.values[4][5] is None


@pytest.mark.parametrize("shape", [(1, 5), (3, 100)])
def test_rows_replace_non_finite_values_with_none(shape):
    a = np.arange(math.prod(shape), dtype=np.float64).reshape(shape)
    assert _finite_rows(a) == (a.tolist(), True)
    a[0, 1], a[-1, -1] = np.inf, np.nan
    rows, finite = _finite_rows(a)
    assert not finite and rows[0][1] is None and rows[-1][-1] is None and rows[0][0] == 0.0
    big = np.full(shape, 1e308)  # the sum overflows although every value is finite
    assert _rows(big) == big.tolist()
