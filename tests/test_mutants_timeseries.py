"""Smoothing and running means against their formulas written out here (mutants the other tests missed).

Sources:
  * the 13-month running mean with half weights at the ends, S_i = (x_{i-6}/2 + x_{i-5} + ... +
    x_{i+5} + x_{i+6}/2) / 12 (common practice: the sunspot-index smoothing);
  * a centred running mean over n (odd) samples: the arithmetic mean of the window (common practice),
    computed here with ``math.fsum`` on the finite values.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import polarflux as pf
from polarflux.errors import SettingsError


def _window_mean(x, i, n, need):
    window = [v for v in x[i - n // 2: i + n // 2 + 1] if math.isfinite(v)]
    return math.fsum(window) / len(window) if len(window) >= need else math.nan


def test_thirteen_values_give_one_smoothed_value_in_the_middle():
    x = np.arange(1.0, 14.0) ** 2  # 13 months
    s = pf.smooth_13_month(x)
    expected = (0.5 * x[0] + math.fsum(x[1:12]) + 0.5 * x[12]) / 12.0  # the formula, common practice
    assert s[6] == pytest.approx(expected, rel=1e-14)
    assert np.isnan(np.delete(s, 6)).all() and s.dtype == np.float64
    assert np.isnan(pf.smooth_13_month(x[:12])).all()  # twelve months: no complete window


@pytest.mark.parametrize("n", [1, 3, 5])
def test_running_mean_of_exactly_n_values_and_of_odd_lengths(n):
    x = np.array([3.0, -1.0, 4.0, 1.0, -5.0][:n])
    r = pf.running_mean(x, n)
    assert r[n // 2] == pytest.approx(math.fsum(x) / n, rel=1e-15)
    assert r.dtype == np.float64 and np.isnan(np.delete(r, n // 2)).all()
    if n == 1:  # a window of one is the series itself
        np.testing.assert_array_equal(pf.running_mean(x, 1), x)


@pytest.mark.parametrize("n", [0, -1, 2, 4, 6])
def test_running_mean_refuses_even_or_non_positive_lengths(n):
    with pytest.raises(SettingsError, match="positive odd"):
        pf.running_mean(np.ones(20), n)


def test_running_mean_min_count_one_uses_any_finite_value_and_bounds_are_checked():
    x = np.array([np.nan, np.nan, 2.0, np.nan, np.nan, 8.0, np.nan])
    r = pf.running_mean(x, 3, min_count=1)
    expected = [_window_mean(x, i, 3, 1) if 1 <= i <= 5 else math.nan for i in range(x.size)]
    np.testing.assert_allclose(r, expected, rtol=1e-15, equal_nan=True)
    for bad in (0, 4):
        with pytest.raises(SettingsError, match="min_count"):
            pf.running_mean(x, 3, min_count=bad)


def test_running_mean_ends_are_nan_floats_and_the_middle_is_the_window_mean():
    rng = np.random.default_rng(4)
    x = rng.normal(10.0, 3.0, 40)
    x[[7, 8, 30]] = np.nan
    r = pf.running_mean(x, 7, min_count=5)
    assert r.dtype == np.float64
    expected = [_window_mean(x, i, 7, 5) if 3 <= i < 37 else math.nan for i in range(x.size)]
    np.testing.assert_allclose(r, expected, rtol=1e-13, equal_nan=True)
