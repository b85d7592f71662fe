"""The Deming fit and its bootstrap against references outside the package (mutants the other tests missed).

Sources:
  * Deming regression through the origin minimises sum (y - k x)^2 / (delta + k^2) over k, delta the
    error-variance ratio var(y) / var(x) (Deming 1943; the profile likelihood of the errors-in-variables
    model, written out here and minimised with ``scipy.optimize.minimize_scalar``);
  * for delta = 1 it is the total-least-squares line: the direction of the largest singular vector of
    the uncentred matrix [x y] (``numpy.linalg.svd``; Golub & Van Loan, Matrix Computations, sec. 6.3);
  * the percentile bootstrap of a paired statistic: ``scipy.stats.bootstrap(..., paired=True,
    method="percentile")`` (Efron & Tibshirani 1993);
  * the sample standard deviation with n - 1 (Bessel's correction) and numpy's default percentile, the
    linear interpolation between order statistics (Hyndman & Fan 1996, definition 7): for two values
    a < b, sd = (b - a) / sqrt(2), p2.5 = a + 0.025 (b - a), p97.5 = a + 0.975 (b - a).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize, stats

from polarflux.calibration import _fit, deming_through_origin


def _reference_slope(x, y, delta):
    """Minimise the Deming objective directly (bounded, near the slope of y on x)."""
    guess = np.sum(x * y) / np.sum(x * x)

    def objective(k):
        return np.sum((y - k * x) ** 2) / (delta + k * k)

    res = optimize.minimize_scalar(objective, bounds=(0.1 * guess, 10.0 * guess), method="bounded",
                                   options={"xatol": 1e-12})
    return res.x


def _data(seed, n=60, slope=1.6):
    rng = np.random.default_rng(seed)
    truth = rng.uniform(1.0, 6.0, n)
    return truth + rng.normal(0, 0.4, n), slope * truth + rng.normal(0, 0.8, n)


@pytest.mark.parametrize("delta", [0.25, 1.0, 4.0])
def test_deming_slope_minimises_the_errors_in_variables_objective(delta):
    x, y = _data(1)
    assert deming_through_origin(x, y, delta) == pytest.approx(_reference_slope(x, y, delta), rel=1e-7)


def test_deming_slope_with_equal_variances_is_the_total_least_squares_direction():
    x, y = _data(2)
    _, _, vt = np.linalg.svd(np.column_stack([x, y]), full_matrices=False)
    assert deming_through_origin(x, y) == pytest.approx(vt[0, 1] / vt[0, 0], rel=1e-12)


def test_deming_slope_of_single_precision_measures_is_computed_in_double_precision():
    x, y = _data(4)
    x32, y32 = x.astype(np.float32), y.astype(np.float32)
    _, _, vt = np.linalg.svd(np.column_stack([x32, y32]).astype(np.float64), full_matrices=False)
    assert deming_through_origin(x32, y32) == pytest.approx(vt[0, 1] / vt[0, 0], rel=1e-12)


def test_deming_slope_of_many_rows_is_each_rows_slope():
    rows = [_data(seed, n=25) for seed in range(4)]
    x, y = np.array([r[0] for r in rows]), np.array([r[1] for r in rows])
    slopes = deming_through_origin(x, y)
    assert slopes.shape == (4,)
    for k, (xi, yi) in zip(slopes, rows, strict=True):
        assert k == pytest.approx(_reference_slope(xi, yi, 1.0), rel=1e-7)


def test_bootstrap_spread_and_percentile_interval_match_scipy():
    x, y = _data(3, n=30)
    k, sd, low, high = _fit(x, y, seed=5, resamples=200_000)
    assert k == pytest.approx(_reference_slope(x, y, 1.0), rel=1e-7)

    def statistic(a, b, axis=-1):
        sxx, syy, sxy = np.sum(a * a, axis=axis), np.sum(b * b, axis=axis), np.sum(a * b, axis=axis)
        d = syy - sxx
        return (d + np.sqrt(d * d + 4.0 * sxy * sxy)) / (2.0 * sxy)  # Deming, delta = 1 (closed form)

    ref = stats.bootstrap((x, y), statistic, paired=True, vectorized=True, n_resamples=200_000,
                          method="percentile", confidence_level=0.95, random_state=np.random.default_rng(9))
    # Monte Carlo error of each estimate at 2e5 resamples: under 1 % of the spread
    assert sd == pytest.approx(ref.standard_error, rel=0.02)
    assert abs(low - ref.confidence_interval.low) < 0.04 * sd
    assert abs(high - ref.confidence_interval.high) < 0.04 * sd


def test_bootstrap_of_exact_pairs_has_no_spread():
    x = np.array([1.0, 2.0, 3.5, 5.0])
    k, sd, low, high = _fit(x, 1.3 * x, resamples=500)
    assert (k, low, high) == pytest.approx((1.3, 1.3, 1.3), rel=1e-12)
    assert sd < 1e-12


def test_bootstrap_is_reproducible():
    """The module documents a fixed seed: the same pairs give the same uncertainty every time."""
    x, y = _data(5, n=12)
    assert _fit(x, y) == _fit(x, y)


def test_two_resamples_tie_the_spread_to_the_percentiles():
    x, y = _data(6, n=12)
    k, sd, low, high = _fit(x, y, resamples=2)
    assert high > low  # two different resamples
    a = low - 0.025 * (high - low) / 0.95  # the two slopes, back from the interpolated percentiles
    b = a + (high - low) / 0.95
    assert sd == pytest.approx((b - a) / np.sqrt(2.0), rel=1e-12)
