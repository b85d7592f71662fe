"""Cycle minima and maxima of series whose extrema are known by construction (mutants the other tests missed).

Sources:
  * a cosine of period P sampled monthly has its minima at whole periods, and the 13-month running mean
    with half weights at the ends (common practice) scales its swing by the filter's gain
    G = sum_k w_k cos(2 pi k / (12 P)), w = (1/2, 1, ..., 1, 1/2) / 12, written out below;
  * the rules of a cycle minimum as the trade states them and ``find_cycle_extrema`` documents them
    (common practice): the lowest smoothed value within half the minimum separation either side
    (a closed window), minima at least that separation apart, the deeper kept; near the end of the
    series a low point counts once the series has risen from it for half a year (yearly values: one
    year) and by 5 % of its highest value; the first value only if under a tenth of the highest value
    within one separation; after the last minimum a maximum counts once the series is two years past
    it and below half of it. Each series below is built so that one rule decides, at its boundary.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import polarflux as pf
from polarflux.errors import SettingsError

STEP = 0.5  # half-year samples: used as they are (not smoothed), and every boundary below is a sample


def _grid(start, end, step=STEP):
    return start + step * np.arange(int(round((end - start) / step)) + 1)


def _rising_with_dips(dips, start=2000.0, end=2030.0):
    """A strictly rising background (no minimum of its own but its first value) with dips placed in it."""
    t = _grid(start, end)
    v = 100.0 + 2.0 * (t - start)
    for when, value in dips.items():
        v[np.isclose(t, when)] = value
    return t, v


def _filter_gain(period_years):
    w = np.array([0.5] + [1.0] * 11 + [0.5]) / 12.0
    return float(sum(wk * math.cos(2 * math.pi * k / (12 * period_years)) for wk, k in zip(w, range(-6, 7),
                                                                                                strict=True)))


def test_monthly_cosine_extrema_at_whole_periods_with_the_filtered_swing():
    t = 1995.5 + np.arange(int(44.5 * 12) + 1) / 12.0
    x = 100.0 * (1.0 - np.cos(2 * np.pi * (t - 2000.0) / 11.0))
    minima, maxima = pf.find_cycle_extrema(t, x)
    np.testing.assert_allclose(minima.times, [2000.0, 2011.0, 2022.0, 2033.0], atol=1e-9)
    np.testing.assert_allclose(maxima.times, [2005.5, 2016.5, 2027.5], atol=1e-9)
    g = _filter_gain(11.0)  # 0.9947 (written-out filter)
    np.testing.assert_allclose(minima.values, 100.0 * (1.0 - g), rtol=1e-9)
    np.testing.assert_allclose(maxima.values, 100.0 * (1.0 + g), rtol=1e-9)


def test_datetime_input_gives_datetime_extrema():
    t = 1995.5 + np.arange(int(44.5 * 12) + 1) / 12.0
    x = 100.0 * (1.0 - np.cos(2 * np.pi * (t - 2000.0) / 11.0))
    months = np.datetime64("1995-07") + np.arange(t.size).astype("timedelta64[M]")
    minima, maxima = pf.find_cycle_extrema(months.astype("datetime64[ns]"), x)
    assert minima.times.dtype.kind == "M" and maxima.times.dtype.kind == "M"
    assert list(minima.times.astype("datetime64[M]")) == [np.datetime64(f"{y}-01") for y in (2000, 2011, 2022, 2033)]
    assert minima.values.shape == (4,)


def test_steps_of_two_months_are_used_as_they_are_and_shorter_ones_smoothed():
    rng = np.random.default_rng(3)
    for step, smoothed in ((2.0 / 12.0, False), (1.9 / 12.0, True)):
        t = 2000.0 + step * np.arange(int(30 / step))
        x = 100.0 * (1.0 - np.cos(2 * np.pi * (t - 2000.0) / 10.0)) + rng.uniform(0, 5, t.size) + 20.0
        minima, _ = pf.find_cycle_extrema(t, x)
        w = np.array([0.5] + [1.0] * 11 + [0.5]) / 12.0  # the 13-entry filter, written out
        expected = np.full(t.size, np.nan)
        expected[6:-6] = np.convolve(x, w, mode="valid")
        reference = expected if smoothed else x
        for when, value in zip(minima.times, minima.values, strict=True):
            assert value == pytest.approx(reference[np.argmin(np.abs(t - when))], rel=1e-12), (step, when)
        assert len(minima.times) >= 2


def test_a_median_step_of_exactly_two_months_is_used_as_it_is():
    two_months = 2.0 / 12.0
    steps = np.where(np.arange(179) % 2 == 0, 0.15, 0.18)  # around two months, alternating
    steps[0] = two_months  # ... and exactly two months once: the median step (89 shorter, 89 longer)
    t = np.concatenate([[0.0], np.cumsum(steps)])
    assert np.median(np.diff(t)) == two_months
    rng = np.random.default_rng(5)
    x = 100.0 * (1.0 - np.cos(2 * np.pi * t / 10.0)) + rng.uniform(0, 5, t.size) + 20.0
    minima, _ = pf.find_cycle_extrema(t, x)
    assert len(minima.times) >= 2
    for when, value in zip(minima.times, minima.values, strict=True):
        assert value == x[np.argmin(np.abs(t - when))]  # the raw value: not smoothed


def test_seven_and_a_half_year_cycles_are_all_found_with_the_default_separation():
    t = _grid(2000.0, 2046.0)
    x = 100.0 * (1.0 - np.cos(2 * np.pi * (t - 2002.5) / 7.5)) + 5.0
    minima, _ = pf.find_cycle_extrema(t, x)
    np.testing.assert_allclose(minima.times, [2002.5, 2010.0, 2017.5, 2025.0, 2032.5, 2040.0], atol=1e-9)


@pytest.mark.parametrize("dips", [{2010.0: 50.0, 2013.5: 30.0, 2017.0: 10.0}, {2010.0: 10.0, 2013.5: 30.0, 2017.0: 50.0}])
def test_the_window_is_closed_a_lower_value_half_a_separation_away_counts(dips):
    t, v = _rising_with_dips(dips)
    minima, _ = pf.find_cycle_extrema(t, v)
    deepest = min(dips, key=dips.get)
    np.testing.assert_allclose(minima.times, [deepest], atol=1e-9)


def test_minima_exactly_one_separation_apart_are_both_kept_and_the_deeper_wins_within_it():
    t, v = _rising_with_dips({2010.0: 10.0, 2017.0: 20.0})
    np.testing.assert_allclose(pf.find_cycle_extrema(t, v).minima.times, [2010.0, 2017.0], atol=1e-9)
    t, v = _rising_with_dips({2010.0: 30.0, 2014.0: 10.0})  # both lowest within 3.5 years; 4 apart
    np.testing.assert_allclose(pf.find_cycle_extrema(t, v).minima.times, [2014.0], atol=1e-9)


def _ending_after_a_low(values_after, step=1.0, low=10.0, peak=100.0):
    """A decline from ``peak`` to ``low`` then ``values_after``: the low point near the series' end."""
    before = np.linspace(peak, low + 30.0, 8)
    v = np.concatenate([before, [low], values_after])
    return 2000.0 + step * np.arange(v.size), v, 2000.0 + step * before.size


@pytest.mark.parametrize("after, counted", [
    ([12.0, 15.0], True),          # risen by exactly 5 % of the highest value (100), for 2 years
    ([12.0, 14.0], False),         # 4 %: not yet
    ([12.0, 20.0], True),          # the last value decides, not the one before it
    ([90.0, 50.0, 12.0], False),   # risen early, back down by the end: not yet a minimum
    ([40.0], True),                # one year after a minimum of yearly values: confirmed
])
def test_a_low_point_near_the_end_counts_once_the_series_has_risen(after, counted):
    t, v, when = _ending_after_a_low(after)
    minima, _ = pf.find_cycle_extrema(t, v)
    assert (when in minima.times) == counted, (after, minima.times)


@pytest.mark.parametrize("step, samples_after, counted", [(0.2, 2, False), (0.25, 2, True)])
def test_half_a_year_of_rise_is_needed_near_the_end(step, samples_after, counted):
    """0.4 years after the low: too soon; exactly 0.5 years: enough (both risen far more than 5 %)."""
    t, v, when = _ending_after_a_low([60.0] * samples_after, step=step)
    minima, _ = pf.find_cycle_extrema(t, v)
    assert (np.any(np.isclose(minima.times, when))) == counted


def test_a_low_point_exactly_half_a_separation_before_the_end_is_not_near_the_end():
    t = _grid(2000.0, 2013.5)
    v = 200.0 - 19.0 * (t - 2000.0)             # declines to 10 at 2010
    v[t > 2010.0] = 10.0 + 0.5 * (t[t > 2010.0] - 2010.0)   # then rises by 1.75 (< 5 % of 200) in 3.5 years
    np.testing.assert_allclose(pf.find_cycle_extrema(t, v).minima.times, [2010.0], atol=1e-9)


@pytest.mark.parametrize("first, later_peak, counted", [
    (15.0, 200.0, False),  # 15 % of the highest value within a separation (100): not deep
    (8.0, 100.0, True),    # 8 %: deep
    (10.0, 100.0, True),   # exactly a tenth: counts
])
def test_the_first_value_counts_only_if_deep(first, later_peak, counted):
    t = _grid(2000.0, 2030.0)
    v = first + (100.0 - first) * np.sin(np.pi * (t - 2000.0) / 10.0) ** 2  # minima at 2000, 2010, 2020
    v[np.isclose(t, 2015.0)] = later_peak  # beyond one separation from the first value
    minima, _ = pf.find_cycle_extrema(t, v)
    assert (2000.0 in minima.times) == counted
    assert 2010.0 in minima.times and 2020.0 in minima.times  # later minima are found either way


def test_the_highest_value_exactly_one_separation_after_the_first_counts():
    t = _grid(2000.0, 2030.0)
    v = 15.0 + 85.0 * np.sin(np.pi * (t - 2000.0) / 10.0) ** 2
    v[np.isclose(t, 2007.0)] = 200.0  # exactly 7 years on: within one separation, so 15 is under a tenth of it
    assert 2000.0 in pf.find_cycle_extrema(t, v).minima.times


@pytest.mark.parametrize("second_gap", [1.0, 0.99])
def test_the_second_value_is_not_held_to_the_first_values_rule(second_gap):
    t = np.concatenate([[0.0, second_gap], 2.0 + np.arange(28.0)])
    v = 30.0 + 70.0 * np.sin(np.pi * (t - second_gap) / 10.0) ** 2
    v[0] = 40.0
    minima, _ = pf.find_cycle_extrema(t, v)
    assert minima.times[0] == pytest.approx(second_gap)  # a shallow minimum, but not the first value


def test_the_maximum_is_the_highest_value_between_minima_even_next_to_them():
    # slow rise, sudden fall: the highest value is the last before the minimum
    t = _grid(2000.0, 2035.0)
    phase = np.mod(t - 2000.0, 10.0)
    v = np.where(phase == 0.0, 10.0, 10.0 + 9.0 * phase)
    minima, maxima = pf.find_cycle_extrema(t, v)  # the first value (10) is not under a tenth of 73
    np.testing.assert_allclose(minima.times, [2010.0, 2020.0, 2030.0], atol=1e-9)
    np.testing.assert_allclose(maxima.times, [2019.5, 2029.5], atol=1e-9)
    # sudden rise, slow fall, each cycle stronger: the next cycle's first value is not this cycle's maximum
    amplitude = np.where(t < 2010.0, 100.0, np.where(t < 2020.0, 150.0, 200.0))
    v = np.where(phase == 0.0, 10.0, 10.0 + amplitude * (1.0 - phase / 10.0))
    minima, maxima = pf.find_cycle_extrema(t, v)  # here the first value is under a tenth of 105
    np.testing.assert_allclose(minima.times, [2000.0, 2010.0, 2020.0, 2030.0], atol=1e-9)
    np.testing.assert_allclose(maxima.times, [2000.5, 2010.5, 2020.5], atol=1e-9)
    np.testing.assert_allclose(maxima.values, [10.0 + 0.95 * a for a in (100.0, 150.0, 200.0)], rtol=1e-12)


@pytest.mark.parametrize("tail, counted", [
    ([90.0, 80.0, 70.0, 60.0, 40.0], True),    # 2.5 years on and below half
    ([90.0, 40.0], False),                     # 1 year on: too soon, though below half
    ([90.0, 80.0, 70.0, 40.0], True),          # exactly 2 years on
    ([90.0, 80.0, 70.0, 60.0, 50.0], False),   # exactly half: not below it
    ([95.0, 90.0, 85.0, 80.0, 75.0, 70.0], False),  # 3 years on, still at 70 %
])
def test_a_maximum_after_the_last_minimum_counts_once_left_behind(tail, counted):
    t = _grid(2000.0, 2010.0 + STEP * len(tail))
    v = np.concatenate([np.interp(_grid(2000.0, 2010.0), [2000.0, 2005.0, 2010.0], [60.0, 5.0, 100.0]), tail])
    minima, maxima = pf.find_cycle_extrema(t, v)
    np.testing.assert_allclose(minima.times, [2005.0], atol=1e-9)
    assert list(maxima.times) == ([2010.0] if counted else [])
    if counted:
        assert maxima.values[0] == 100.0


@pytest.mark.parametrize("times", [[2000.0, 2001.0, 2001.0, 2002.0], [2000.0, 2002.0, 2001.0], [2000.0]])
def test_times_must_increase_strictly(times):
    with pytest.raises(SettingsError, match="strictly increasing"):
        pf.find_cycle_extrema(times, np.ones(len(times)))


def test_short_series_and_mismatched_lengths():
    minima, maxima = pf.find_cycle_extrema([2000.0, 2001.0], [5.0, 6.0])  # two values: risen a year by 1/6
    assert list(minima.times) == [2000.0] and maxima.times.size == 0
    months = 2000.0 + np.arange(12) / 12.0  # under 13 months: the smoothed series is empty
    assert pf.find_cycle_extrema(months, np.arange(12.0)).minima.times.size == 0
    with pytest.raises(SettingsError, match="same length"):
        pf.find_cycle_extrema([2000.0, 2001.0, 2002.0], [1.0, 2.0])
