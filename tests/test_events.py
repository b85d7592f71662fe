"""The record analysis: smoothing, cycle extrema, cross-calibration, viewing correction, reversals.

Sources:
  * statsmodels.datasets.sunspots: yearly sunspot numbers 1700-2008 (open dataset);
  * PUBLISHED_MINIMA: the dates of solar-cycle minima 1755-2008 as the sunspot-index
    centre's cycle table lists them (values recalled from memory, to 0.1 year);
  * the 13-month running mean with half weights at the ends (common practice);
  * the invented scenario's truth sidecar (truth.json).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

import polarflux as pf
from polarflux.calibration import deming_through_origin, merge_instruments
from polarflux.events import from_decimal_year, record_events, to_decimal_year

PUBLISHED_MINIMA = [1755.2, 1766.5, 1775.5, 1784.7, 1798.3, 1810.6, 1823.3, 1833.9, 1843.5, 1856.0, 1867.2,
                    1878.9, 1890.2, 1902.0, 1913.6, 1923.6, 1933.8, 1944.2, 1954.3, 1964.9, 1976.5, 1986.8,
                    1996.4, 2008.9]


def yearly_sunspots():
    import statsmodels.api as sm

    data = sm.datasets.sunspots.load_pandas().data
    return data["YEAR"].to_numpy() + 0.5, data["SUNACTIVITY"].to_numpy()  # yearly means stand at mid-year


def test_minima_of_the_yearly_record_match_the_published_minima():
    t, v = yearly_sunspots()
    minima, maxima = pf.find_cycle_extrema(t, v)
    # the series ends with 2008, before the rise that confirmed the minimum of late 2008
    confirmable = [p for p in PUBLISHED_MINIMA if p < t[-1] - 1.0]
    for published in confirmable:
        assert np.min(np.abs(minima.times - published)) <= 1.0, published
    within = minima.times[(minima.times >= 1754) & (minima.times <= 2009)]
    assert len(within) == len(confirmable) == len(PUBLISHED_MINIMA) - 1
    assert abs(np.mean(np.diff(within)) - 11.0) <= 0.3  # common practice: cycles last about 11 years
    # one maximum between consecutive minima, and the last cycle's (2000, from memory), which the series
    # has left behind, after the last minimum
    assert len(maxima.times) == len(minima.times)
    assert np.all((maxima.times[:-1] > minima.times[:-1]) & (maxima.times[:-1] < minima.times[1:]))
    assert abs(maxima.times[-1] - 2000.3) <= 1.0


@pytest.mark.parametrize("lead", [1.0, 2.0, 3.0])
def test_a_series_cut_before_a_published_minimum_reports_no_minimum_at_the_cut(lead):
    """Cut 1, 2 and 3 years before each published minimum from 1775 on: the last minimum found is the
    one before (a declining phase is never a minimum; nothing after the cut is used)."""
    t, v = yearly_sunspots()
    for published in [p for p in PUBLISHED_MINIMA if p >= 1775]:
        cut = t < published - lead
        minima, _ = pf.find_cycle_extrema(t[cut], v[cut])
        assert minima.times[-1] < published - lead - 5.0, (published, lead, minima.times[-1])


def test_a_declining_phase_at_the_end_is_not_a_minimum():
    t, v = yearly_sunspots()
    cut = t < 2004  # ends on the decline of cycle 23 (about 40 % of its maximum)
    minima, _ = pf.find_cycle_extrema(t[cut], v[cut])
    assert minima.times[-1] < 1998


def test_smooth_13_month_is_the_standard_formula():
    rng = np.random.default_rng(3)
    x = rng.normal(50, 20, 200)
    s = pf.smooth_13_month(x)
    written = np.full(200, np.nan)
    for i in range(6, 194):
        written[i] = (0.5 * x[i - 6] + x[i - 5: i + 6].sum() + 0.5 * x[i + 6]) / 12.0
    np.testing.assert_allclose(s, written, rtol=1e-13, equal_nan=True)
    weights = np.array([0.5] + [1.0] * 11 + [0.5]) / 12.0
    np.testing.assert_allclose(s[6:-6], np.convolve(x, weights, mode="valid"), rtol=1e-13)
    assert np.all(np.isnan(s[:6])) and np.all(np.isnan(s[-6:]))


def test_gaps_stay_gaps():
    x = np.arange(40, dtype=float)
    x[20] = np.nan
    s = pf.smooth_13_month(x)
    assert np.all(np.isnan(s[14:27])) and np.isfinite(s[13]) and np.isfinite(s[27])
    r = pf.running_mean(x, 5, min_count=4)
    assert np.isfinite(r[20]) and r[20] == pytest.approx(np.mean([18, 19, 21, 22]))
    assert np.isnan(pf.running_mean(x, 5)[20])


@pytest.mark.parametrize("rate", [2.0, -2.0])
def test_a_reversal_through_a_curved_polar_field_is_at_its_zero(rate):
    # y = 5 (exp(k (t - t0)) - 1) G per Carrington rotation (27.2753 d, common practice): one zero, at
    # t0 (closed form), and a field that curves through it. A 13-rotation running mean moves the zero
    # by about k w^2 / 24 (0.08 yr here, w the window in years); the local quadratic refinement does not.
    import xarray as xr

    from polarflux.events import _crossings, find_reversals

    t0 = 2031.37
    years = t0 - 2.0 + np.arange(54) * 27.2753 / 365.25
    y = 5.0 * (np.exp(rate * (years - t0)) - 1.0)
    times = from_decimal_year(years, as_datetime=True)
    record = xr.Dataset({"mean_field": (("time", "hemisphere"), np.stack([y, -y], axis=1))},
                        coords={"time": times, "hemisphere": ["north", "south"]})
    t, _ = to_decimal_year(times)
    for hemisphere in ("north", "south"):
        found = find_reversals(record, variable="mean_field")[hemisphere]
        assert len(found) == 1 and found[0].time == pytest.approx(t0, abs=0.01)
    plain = [c for c, _ in _crossings(t, pf.running_mean(y, 13, 9))]
    assert len(plain) == 1 and abs(plain[0] - t0) > 0.05  # what the refinement removes


def test_deming_regression_against_a_known_slope():
    rng = np.random.default_rng(0)
    truth = rng.uniform(-5, 5, 400)
    x = truth + rng.normal(0, 1.0, truth.size)
    y = 1.25 * truth + rng.normal(0, 1.0, truth.size)
    # errors in both: Deming recovers the slope that least squares on x underestimates
    assert deming_through_origin(x, y) == pytest.approx(1.25, rel=0.03)
    assert np.sum(x * y) / np.sum(x * x) < 1.17
    assert deming_through_origin(x, 2 * x) == pytest.approx(2.0, rel=1e-12)


@pytest.fixture(scope="module")
def analysed(three_cycles):
    folder, truth = three_cycles
    record = pf.measure_archive([folder / "maps"])
    merged = merge_instruments(record)
    t, v = pf.read_sunspots(folder / "sunspots.csv")
    events = record_events(merged, t, v)
    start = float(to_decimal_year(np.array([np.datetime64(truth["start"][:19])]))[0][0])
    return truth, merged, events, start


def test_scale_factor_matches_the_instruments_truth(analysed):
    truth, merged, _, _ = analysed
    factors = {f["quantity"]: f for f in json.loads(merged.attrs["scale_factors"])}
    scales = {i["name"]: i["scale"] for i in truth["instruments"]}
    expected = scales["MSN-A"] / scales["MSN-B"]  # brings MSN-B onto MSN-A
    assert merged.attrs["reference_instrument"] == "MSN-A"
    polar = factors["polar"]
    assert polar["low95"] <= expected <= polar["high95"]
    assert abs(polar["factor"] - expected) < 3 * polar["uncertainty"]
    assert merged.attrs["band_factors_needed"] == 0


def test_reversals_are_within_a_year_of_the_truth(analysed):
    truth, _, events, start = analysed
    checked = 0
    for cycle in truth["cycles"]:
        for hemisphere in ("north", "south"):
            true = cycle[f"{hemisphere}_reversal_years"]
            if true is None:
                continue
            found = [r["time"] - start for r in events["reversals"][hemisphere]]
            assert min(abs(np.array(found) - true)) <= 1.0
            checked += 1
    assert checked >= 4
    assert all(abs(lag["lag_years"]) < 2 for lag in events["reversal_lags"])


def test_minima_are_within_six_months_of_the_truth(analysed):
    truth, _, events, start = analysed
    found = np.array([m["time"] for m in events["minima"]]) - start
    checked = 0
    for cycle in truth["cycles"]:
        if cycle["minimum_years"] is None or cycle["minimum_years"] < 1.0:
            continue  # the first minimum sits at the start of the series
        assert np.min(np.abs(found - cycle["minimum_years"])) <= 0.5
        checked += 1
    assert checked >= 2
    for at in events["at_minima"]:
        if np.isfinite(at["north"]):
            assert np.sign(at["north"]) == -np.sign(at["south"])  # opposite polar fields at minimum
            assert np.sign(at["axial_dipole"]) == np.sign(at["north"])


def _yearly_swing(merged, hemisphere, variable):
    """Correlation of a record's deviations from its 13-rotation mean with B0 times that mean (common practice)."""
    b0 = merged["b0"].values
    values = merged[variable].sel(hemisphere=hemisphere).values
    trend = pf.running_mean(values, 13, 9)
    good = np.isfinite(trend) & np.isfinite(values)
    return np.corrcoef(b0[good] * trend[good], values[good] - trend[good])[0, 1]


def test_viewing_correction_removes_the_yearly_swing(three_cycles, analysed):
    # measured without a fill, the hidden pole swings the caps with B0 and the correction removes it
    folder, _ = three_cycles
    unfilled = merge_instruments(pf.measure_archive([folder / "maps"], fill="none"))
    for hemisphere in ("north", "south"):
        before = _yearly_swing(unfilled, hemisphere, "mean_field")
        assert abs(before) > 0.1
        assert abs(_yearly_swing(unfilled, hemisphere, "mean_field_corrected")) < 0.5 * abs(before)
        # the default record (temporal fill) has little swing left, and the correction adds none
        _, merged, _, _ = analysed
        assert abs(_yearly_swing(merged, hemisphere, "mean_field_corrected")) < 0.1


def test_missing_rotations_are_gaps_in_the_merged_record(analysed):
    truth, merged, _, _ = analysed
    missing = set(truth["missing_rotations"])
    rotations = merged["carrington_rotation"].values
    for number in missing:
        i = int(np.flatnonzero(rotations == number)[0])
        assert merged["instruments"].values[i] == 0
        assert np.all(np.isnan(merged["mean_field"].values[i]))


def test_events_command_writes_table_json_csv_figure(three_cycles, tmp_path, capsys):
    from polarflux.cli import main

    folder, _ = three_cycles
    record = tmp_path / "record.nc"
    assert main(["measure", str(folder / "maps"), "--out", str(record), "--quiet"]) == 0
    assert main(["events", str(record), "--sunspots", str(folder / "sunspots.csv")]) == 0
    out = capsys.readouterr().out
    assert "polar reversal" in out and "cycle minimum" in out and "scale MSN-B -> MSN-A" in out
    for suffix in (".json", ".csv", ".png", "_merged.nc"):
        assert (tmp_path / f"record_events{suffix}").exists()
    found = json.loads((tmp_path / "record_events.json").read_text())
    assert found["reversals"]["north"] and found["minima"]
    assert main(["events", str(record)]) == 2  # outputs exist: no silent overwrite


@pytest.mark.parametrize(
    "text,message",
    [
        ("when,ssn\n2050-01,3\n", "needs columns"),
        ("date,sunspot_number\n2050-01-15,3\n2050-02-15,lots\n", "line 3: sunspot_number 'lots'"),
        ("date,sunspot_number\n2050-02-15,3\n2050-01-15,4\n", "line 3: times must increase"),
        ("year,sunspot_number\n2050.5,3\nlater,4\n", "line 3: time 'later'"),
    ],
)
def test_bad_sunspot_files_are_refused_with_the_line(tmp_path, text, message):
    path = tmp_path / "ssn.csv"
    path.write_text(text)
    with pytest.raises(pf.PolarfluxError, match=f"ssn.csv: .*{message}"):
        pf.read_sunspots(path)


def test_sunspot_files_with_empty_values_keep_the_gap(tmp_path):
    path = tmp_path / "ssn.csv"
    path.write_text("date,sunspot_number\n2050-01-15,3\n2050-02-15,\n2050-03-15,5\n")
    t, v = pf.read_sunspots(path)
    assert np.isnan(v[1]) and t[0] == pytest.approx(2050.0 + 14 / 365, abs=1e-9)


def test_decimal_years_round_trip():
    times = np.array(["2051-01-01T00:00", "2060-07-02T12:00", "2094-12-31T23:00"], dtype="datetime64[ns]")
    years, flag = to_decimal_year(times)
    assert flag and years[0] == 2051.0
    back = from_decimal_year(years, True)
    assert np.all(np.abs((back - times).astype(np.int64)) < 100_000)  # float64 years: good to ~15 microseconds
