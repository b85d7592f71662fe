"""Hindcasts: what each date may see, the scores, the summaries, the outputs and the parallel runs.

Sources:
  * CRPS: properscoring 0.1 (PyPI, ``crps_ensemble`` and ``crps_gaussian``) as the reference
    library; the closed form for a normal written out from Gneiting & Raftery (2007, JASA 102,
    359, eq. 5); and the CRPS's definition, the integral of (F(x) - H(x - y))^2, integrated
    numerically with scipy.integrate.quad.
  * Binomial intervals: the Clopper & Pearson (1934, Biometrika 26, 404) interval written with
    beta-distribution quantiles (scipy.stats.beta).
  * 13-month smoothing: the trade's definition (half weights at both ends; common practice),
    written out here.
  * A Carrington rotation lasts 27.2753 days (synodic; common practice); a map's time is the
    middle of its rotation (the record's convention).
The record and sunspot series below are invented for the tests.
"""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest

import polarflux as pf
from polarflux.errors import OutputExistsError
from polarflux.events import from_decimal_year, to_decimal_year
from polarflux.hindcast import (
    crps_normal,
    crps_sample,
    cut_record,
    cut_sunspots,
    forecast_dates,
    hindcast,
    lead_table,
    outcomes_from_series,
    outcomes_from_truth,
    summarise,
    summary_line,
    write_hindcast,
)
from polarflux.record import rows_to_dataset

ROTATION_DAYS = 27.2753
START = 2000.0
PERIOD = 11.0
AMPLITUDES = [120.0, 90.0, 150.0, 110.0, 135.0, 100.0]  # cycle k starts at START + k * PERIOD


def _hwr(months, amplitude):
    """Hathaway, Wilson & Reichmann (1994) cycle shape scaled to peak near ``amplitude`` (c = 0.71)."""
    b = 27.12 + 25.15 / (1000.0 * 0.002) ** 0.25
    x = np.clip(months, 0.0, None)
    shape = x**3 / (np.exp((x / b) ** 2) - 0.71)
    peak = np.max((np.arange(0, 200.0, 0.1)) ** 3 / (np.exp((np.arange(0, 200.0, 0.1) / b) ** 2) - 0.71))
    return amplitude * shape / peak


def invented_sunspots():
    """Monthly sunspot numbers, dated on the 15th of each month, of six invented cycles."""
    months = np.arange(np.datetime64("2000-01"), np.datetime64("2066-01"))
    days = months.astype("datetime64[D]") + np.timedelta64(14, "D")
    t = to_decimal_year(days)[0]
    v = sum(_hwr((t - (START + k * PERIOD)) * 12.0, a) for k, a in enumerate(AMPLITUDES))
    rng = np.random.default_rng(5)
    return t, v + rng.normal(0.0, 2.0, v.size) + 3.0


def invented_record(sources=("nowhere/missing.fits",)):
    """One entry per rotation, 2000-2060: a dipole that reverses each cycle, |D| at minimum = A(next) / 60."""
    step = np.timedelta64(int(ROTATION_DAYS * 86400), "s")
    times = np.arange(np.datetime64("2000-01-14T12:00:00"), np.datetime64("2060-06-01"), step)
    t = to_decimal_year(times.astype("datetime64[ns]"))[0]
    rng = np.random.default_rng(9)
    rows = []
    for i, (when, year) in enumerate(zip(times, t, strict=True)):
        k = int((year - START) // PERIOD)
        u = (year - START - k * PERIOD) / PERIOD
        x = 0.5 * (1.0 - math.cos(math.pi * u))
        a_now = AMPLITUDES[min(k, len(AMPLITUDES) - 1)] / 60.0
        a_next = AMPLITUDES[min(k + 1, len(AMPLITUDES) - 1)] / 60.0
        dipole = (-1) ** k * (a_now * (1.0 - x) - a_next * x) + rng.normal(0.0, 0.02)
        north, south = 4.0 * dipole, -4.0 * dipole
        rows.append({"source": sources[i % len(sources)], "instrument": "TEST", "carrington_rotation": 1000 + i,
                     "time": str(when), "cap_deg": 60.0,
                     "north_signed_flux_mx": north * 1e22, "north_unsigned_flux_mx": abs(north) * 1e22,
                     "north_mean_field_g": north, "north_coverage": 1.0,
                     "south_signed_flux_mx": south * 1e22, "south_unsigned_flux_mx": abs(south) * 1e22,
                     "south_mean_field_g": south, "south_coverage": 1.0, "axial_dipole_g": dipole})
    return rows_to_dataset(rows, cap_deg=60.0, fill="none", field="radial")


@pytest.fixture(scope="module")
def world():
    t, v = invented_sunspots()
    return invented_record(), t, v


FORECAST_COLUMNS = ("status", "reason", "maps_used", "last_map", "sunspot_values_used", "calibration_cycles",
                    "projection", "median", "low68", "high68", "low95", "high95", "maximum_time",
                    "forecast_minimum", "amplitude_sample")


def _same(a, b, columns=None):
    """Two hindcast tables hold the same forecasts (every column, or those given; the samples too)."""
    assert list(a["date"].values) == list(b["date"].values)
    for name in columns or a.data_vars:
        x, y = a[name].values, b[name].values
        if x.dtype.kind in "fc":
            np.testing.assert_array_equal(x, y, err_msg=name)
        else:
            assert list(x) == list(y), name


# --------------------------------------------------------------------------- what a date may see


def test_a_map_counts_once_its_rotation_has_ended(world):
    record = world[0]
    t = record["time"].values[40]
    half = np.timedelta64(int(0.5 * ROTATION_DAYS * 86400), "s")
    just_before = to_decimal_year((t + half - np.timedelta64(1, "h"))[None])[0][0]
    just_after = to_decimal_year((t + half + np.timedelta64(1, "h"))[None])[0][0]
    assert cut_record(record, just_before)["time"].values[-1] == record["time"].values[39]
    assert cut_record(record, just_after)["time"].values[-1] == t
    # the map's own time is not enough: half a rotation must have passed
    assert t not in cut_record(record, to_decimal_year(t[None])[0][0] + 1e-6)["time"].values


@pytest.mark.parametrize("day", ["01", "15", "28"])
def test_a_sunspot_month_counts_once_it_has_ended(day):
    months = np.arange(np.datetime64("2040-01"), np.datetime64("2043-01"))
    t = to_decimal_year(np.array([np.datetime64(f"{m}-{day}") for m in months]))[0]
    v = np.arange(t.size, dtype=float)
    april_1st = to_decimal_year(np.array([np.datetime64("2041-04-01")]))[0][0]
    kept_t, kept_v = cut_sunspots(t, v, april_1st)
    assert kept_v[-1] == 14.0  # March 2041 (index 14) has ended on 1 April; April has not
    kept_t, _ = cut_sunspots(t, v, april_1st - 1e-6)
    assert kept_t.size == 14


def test_a_yearly_mean_counts_once_its_year_has_ended():
    t = np.arange(1900.0, 1950.0)  # yearly means labelled by their year (statsmodels' convention)
    v = np.arange(t.size, dtype=float)
    assert cut_sunspots(t, v, 1930.0)[1][-1] == 29.0  # 1929 ended on 1 January 1930
    assert cut_sunspots(t, v, 1930.99)[1][-1] == 29.0
    assert cut_sunspots(t + 0.5, v, 1930.0)[1][-1] == 29.0  # mid-year labels too


def _garbage(record, t, v, date, before=False):
    """Everything not yet complete on ``date`` (or, with ``before``, the year before it) made garbage."""
    half = np.timedelta64(int(0.5 * ROTATION_DAYS * 86400), "s")
    ends = to_decimal_year(record["time"].values + half)[0]
    spoil = (ends > date) if not before else (ends > date - 1.0) & (ends <= date)
    rng = np.random.default_rng(1)
    bad = record.copy(deep=True)
    for name in ("mean_field", "signed_flux", "unsigned_flux"):
        bad[name].values[spoil] = rng.normal(0.0, 1e3, (int(spoil.sum()), 2))
    bad["axial_dipole"].values[spoil] = rng.normal(0.0, 1e3, int(spoil.sum()))
    bad["source"].values[spoil] = "garbage.fits"
    month_end = (from_decimal_year(t, True).astype("datetime64[M]") + 1).astype("datetime64[ns]")
    late = to_decimal_year(month_end)[0] > date if not before else (t > date - 1.0) & (t < date - 0.2)
    return bad, t, np.where(late, rng.uniform(0.0, 900.0, t.size), v)


def test_garbage_after_each_date_changes_nothing(world, tiny_scenario):
    """Every map and sunspot month not complete on the date replaced by garbage: identical forecasts.

    The maps behind the record are real FITS files (the tiny scenario's), so the forecast's
    transport projection reads them; the garbage entries point at a FITS file of absurd field.
    """
    folder, _ = tiny_scenario
    maps = sorted(str(p) for p in (folder / "maps").rglob("*.fits"))
    record = invented_record(sources=maps)
    _, t, v = world
    garbage_map = folder / "garbage.fits"
    if not garbage_map.exists():
        pf.maps.write_map(pf.SynopticMap.from_array(np.full((60, 120), 5e3), instrument="TEST"), garbage_map)
    kinds = []
    for date in (2046.3, 2051.62):  # a cycle rising from its measured minimum, and one projected by transport
        bad, tb, vb = _garbage(record, t, v, date)
        bad["source"].values[bad["source"].values == "garbage.fits"] = str(garbage_map)
        a = hindcast(record, (t, v), [date], members=40, seed=3)
        b = hindcast(bad, (tb, vb), [date], members=40, seed=3)
        assert a["status"].values[0] == "ok", a["reason"].values[0]
        kinds.append(str(a["projection"].values[0]))
        _same(a, b, FORECAST_COLUMNS)  # the outcome and climatology come from the whole series: they may differ
        # the check can fail: garbage in the year before the date does change the forecast
        spoilt, ts, vs = _garbage(record, t, v, date, before=True)
        worse = hindcast(spoilt, (ts, vs), [date], members=40, seed=3)
        assert worse["median"].values[0] != a["median"].values[0] or worse["status"].values[0] != "ok"
    assert "measured at the minimum" in kinds[0] and "transport" in kinds[1]  # both paths were tried


# --------------------------------------------------------------------------- dates and failures


def test_default_dates_are_a_calendar_grid_where_three_cycles_can_calibrate(world):
    record, t, v = world
    dates = forecast_dates(record, t, v)
    months = from_decimal_year(dates, True) + np.timedelta64(1, "h")
    assert set((months.astype("datetime64[M]").astype(int) % 12 + 1).tolist()) <= {1, 4, 7, 10}
    assert np.all(months.astype("datetime64[D]") == months.astype("datetime64[M]").astype("datetime64[D]"))
    # three minima the record covers (2000.5, 2011.5, 2022.5), each with the maximum after it
    # known: the third maximum (about 2026.5) is known once the series is two years past it
    assert 2028.5 < dates[0] < 2031.0
    first = hindcast(record, (t, v), [dates[0] - 0.25, dates[0]], members=20)
    assert list(first["status"].values) == ["failed", "ok"]
    assert first["calibration_cycles"].values[1] == 3
    assert dates[-1] <= 2060.5
    assert np.allclose(np.diff(dates), 0.25, atol=0.01)
    yearly = forecast_dates(record, t, v, every="1Y", start="2045-01-01", end=2050.5)
    assert np.allclose(yearly, [2045.0, 2046.0, 2047.0, 2048.0, 2049.0, 2050.0])
    # dates asked for where three cycles had not yet ended are left out, and named
    skipped = []
    early = forecast_dates(record, t, v, every="1Y", start="2027-01-01", end=2032.5, skipped=skipped)
    assert np.allclose(np.sort(np.r_[early, skipped]), [2027.0, 2028.0, 2029.0, 2030.0, 2031.0, 2032.0])
    assert skipped and max(skipped) < early.min()
    run = hindcast(record, (t, v), every="1Y", start="2027-01-01", end=2032.5, members=20)
    assert run.attrs["dates_skipped"].split(", ")[0] == "2027-01-01"
    assert len(run.attrs["dates_skipped"].split(", ")) == len(skipped)
    with pytest.raises(pf.SettingsError, match="every"):
        forecast_dates(record, t, v, every="quarterly")


def test_no_date_with_three_cycles_is_one_clear_error(world):
    record, t, v = world
    short = record.isel(time=slice(0, 13 * 20))  # 2000-2019: two minima covered, never three
    with pytest.raises(pf.SettingsError, match="no forecast date every 3M.*three cycles"):
        hindcast(short, (t, v))


def test_a_failing_date_is_recorded_and_the_batch_goes_on(world):
    record, t, v = world
    result = hindcast(record, (t, v), [2005.0, 2046.0], members=30)
    assert list(result["status"].values) == ["failed", "ok"]
    assert "three cycles" in str(result["reason"].values[0]) or "shorter" in str(result["reason"].values[0])
    assert np.isnan(result["median"].values[0]) and np.isfinite(result["median"].values[1])
    assert summarise(result)["failures"] == 1


# --------------------------------------------------------------------------- scores


def test_crps_of_a_sample_matches_properscoring():
    properscoring = pytest.importorskip("properscoring")  # reference library (PyPI properscoring 0.1)
    rng = np.random.default_rng(2)
    for n in (1, 2, 7, 300):
        sample = rng.gamma(4.0, 30.0, n)
        for y in (0.0, 50.0, 120.0, 400.0):
            assert crps_sample(sample, y) == pytest.approx(properscoring.crps_ensemble(y, sample), rel=1e-10)


def test_crps_of_a_normal_matches_the_closed_form_the_integral_and_properscoring():
    from scipy import integrate, stats

    properscoring = pytest.importorskip("properscoring")
    for mu, sd, y in ((100.0, 20.0, 100.0), (100.0, 20.0, 150.0), (80.0, 5.0, 61.0)):
        z = (y - mu) / sd  # Gneiting & Raftery (2007) eq. 5, written out
        closed = sd * (z * (2 * stats.norm.cdf(z) - 1) + 2 * stats.norm.pdf(z) - 1 / math.sqrt(math.pi))
        below, _ = integrate.quad(lambda x, m=mu, s=sd: stats.norm.cdf(x, m, s) ** 2, mu - 12 * sd, y)
        above, _ = integrate.quad(lambda x, m=mu, s=sd: (1 - stats.norm.cdf(x, m, s)) ** 2, y, mu + 12 * sd)
        assert crps_normal(mu, sd, y) == pytest.approx(closed, rel=1e-12)
        assert crps_normal(mu, sd, y) == pytest.approx(below + above, rel=1e-7)
        assert crps_normal(mu, sd, y) == pytest.approx(properscoring.crps_gaussian(y, mu, sd), rel=1e-10)
        big = np.random.default_rng(3).normal(mu, sd, 20000)
        assert crps_sample(big, y) == pytest.approx(closed, rel=0.03)


def test_scores_against_a_truth(world):
    record, t, v = world
    origin = "2000-01-01T00:00:00"
    cycles = [{"cycle": k + 1, "start_years": k * PERIOD + 0.01, "minimum_years": k * PERIOD,
               "maximum_years": k * PERIOD + 4.0, "amplitude": a} for k, a in enumerate(AMPLITUDES)]
    truth = {"start": origin, "cycles": cycles}
    dates = [2040.0, 2042.5, 2045.25]
    result = hindcast(record, (t, v), dates, members=60, seed=4, truth=truth)
    targets = outcomes_from_truth(truth)
    assert [c["cycle"] for c in targets] == [f"cycle {k + 1}" for k in range(6)]
    for i, date in enumerate(dates):
        # the first cycle whose maximum is after the date: cycle 5 (max 2048) for all three
        assert result["cycle"].values[i] == "cycle 5"
        y = AMPLITUDES[4]
        assert result["outcome"].values[i] == y
        assert result["lead"].values[i] == pytest.approx(date - 2044.0, abs=2e-3)
        sample = result["amplitude_sample"].values[i]
        assert result["error"].values[i] == pytest.approx(result["median"].values[i] - y)
        assert result["relative_error"].values[i] == pytest.approx((result["median"].values[i] - y) / y)
        assert result["pit"].values[i] == pytest.approx(np.mean(sample < y))
        assert result["inside95"].values[i] == float(result["low95"].values[i] <= y <= result["high95"].values[i])
        # climatology: cycles whose maximum is two years past on the date (maxima 2004 ... 2037)
        known = [a for k, a in enumerate(AMPLITUDES) if START + k * PERIOD + 4.0 + 2.0 <= date]
        assert result["climatology_mean"].values[i] == pytest.approx(np.mean(known))
        assert result["climatology_sd"].values[i] == pytest.approx(np.std(known, ddof=1))


def test_outcomes_from_the_series_are_its_smoothed_maxima():
    t, v = invented_sunspots()
    weights = np.array([0.5] + [1.0] * 11 + [0.5]) / 12.0  # the 13-month smoothing, written out
    smooth = np.full(v.size, np.nan)
    smooth[6:-6] = np.convolve(v, weights, mode="valid")
    found = outcomes_from_series(t, v)
    assert len(found) == len(AMPLITUDES)  # the series ends in 2066, well past the last maximum (2059)
    for c in found:
        window = (t > c["minimum"]) & (t < c["minimum"] + 9.0)
        assert c["amplitude"] == pytest.approx(np.nanmax(smooth[window]), rel=1e-9)
        assert c["minimum"] < c["maximum_time"] < c["minimum"] + 6.0


def _table(**columns):
    import xarray as xr

    n = len(columns["lead"])
    base = {"status": ["ok"] * n, "outcome": [100.0] * n}
    base.update(columns)
    return xr.Dataset({k: (("date",), np.asarray(v)) for k, v in base.items()},
                      coords={"date": np.arange(n, dtype=float)})


def test_summaries_by_lead_with_clopper_pearson_intervals():
    from scipy import stats

    lead = [-3.5, -3.2, -1.5, -1.2, -0.7, 0.4, 1.5, 1.99, 2.0]
    inside68 = [1, 0, 1, 1, 0, 1, 0, 0, 1]
    inside95 = [1, 1, 1, 1, 1, 1, 0, 1, 1]
    rel = [0.1, -0.3, 0.05, 0.2, -0.1, 0.4, -0.5, 0.6, 0.3]
    crps = [5.0, 9.0, 3.0, 4.0, 6.0, 8.0, 20.0, 25.0, 10.0]
    clim = [10.0] * 9
    table = _table(lead=lead, inside68=inside68, inside95=inside95, relative_error=rel, crps=crps,
                   crps_climatology=clim, status=["ok"] * 8 + ["failed"])
    rows = lead_table(table)
    assert [r["lead_range"] for r in rows][0] == (-4.0, -3.0)
    first = rows[0]
    assert first["scored"] == 2 and first["median_abs_relative_error"] == pytest.approx(0.2)
    k, n = 1, 2  # Clopper-Pearson from beta quantiles
    low, high = stats.beta.ppf(0.025, k, n - k + 1), stats.beta.ppf(0.975, k + 1, n - k)
    assert first["coverage68"] == pytest.approx((0.5, low, high))
    assert first["crps_skill"] == pytest.approx(1.0 - 7.0 / 10.0)
    last = rows[-1]  # [1, 2] closed: 1.5 and 1.99 scored, 2.0 failed
    assert (last["scored"], last["failures"]) == (2, 1)
    everything = summarise(table)
    assert everything["forecasts"] == 9 and everything["scored"] == 8
    assert everything["coverage95"][0] == pytest.approx(7 / 8)
    line = summary_line(table)
    assert "9 forecasts, 1 failed" in line and "CRPS skill" in line
    from polarflux.scores import format_lead_table

    text = format_lead_table(rows + [{**rows[0], "scored": 0, "median_abs_relative_error": np.nan, "crps": np.nan,
                                      "crps_climatology": np.nan, "crps_skill": np.nan}])
    assert "20.0%" in text.splitlines()[1] and "0.30" in text.splitlines()[1]
    assert "nan" not in text and text.splitlines()[-1].split()[-1] == "n/a"  # an empty bin says so


# --------------------------------------------------------------------------- outputs


def test_write_hindcast_tables_and_figures(world, tmp_path):
    record, t, v = world
    dates = [2040.0, 2045.0, 2050.0]
    result = hindcast(record, (t, v), dates, members=40)
    written = write_hindcast(result, tmp_path / "run")
    names = {p.name for p in written}
    assert {"run_hindcast.csv", "run_hindcast_leads.csv", "run_hindcast_pit.png",
            "run_hindcast_error_lead.png"} <= names
    with open(tmp_path / "run_hindcast.csv", newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert [float(r["date"]) for r in rows] == pytest.approx(dates, abs=1e-9)
    assert rows[0]["status"] == "ok" and float(rows[0]["median"]) == pytest.approx(result["median"].values[0])
    assert {r["cycle"] for r in rows} == set(result["cycle"].values)
    cycle_figures = [n for n in names if n.startswith("run_hindcast_minimum")]
    assert len(cycle_figures) == len(set(result["cycle"].values))
    before = (tmp_path / "run_hindcast.csv").read_bytes()
    with pytest.raises(OutputExistsError):
        write_hindcast(result, tmp_path / "run")
    assert (tmp_path / "run_hindcast.csv").read_bytes() == before


def test_figures_draw_what_the_table_holds(world):
    from polarflux._hindcast_plots import plot_cycle_evolution, plot_error_by_lead, plot_pit

    record, t, v = world
    result = hindcast(record, (t, v), [2040.0, 2041.0, 2042.0, 2042.5], members=40)
    cycle = str(result["cycle"].values[0])
    fig = plot_cycle_evolution(result, cycle, caption="invented record")
    ax = fig.axes[0]
    median = [line for line in ax.lines if line.get_label() == "forecast median"][0]
    pick = result["cycle"].values == cycle
    np.testing.assert_allclose(median.get_ydata(), result["median"].values[pick])
    outcome = [line for line in ax.lines if line.get_label().startswith("outcome")][0]
    assert outcome.get_ydata()[0] == pytest.approx(result["outcome"].values[pick][0])
    assert "minimum" in [line.get_label() for line in ax.lines]
    assert "sunspot number" in ax.get_ylabel() and "date" in ax.get_xlabel()
    assert any("invented record" in text.get_text() for text in fig.texts)
    assert ax.get_ylim()[0] == 0.0
    for figure in (fig, plot_pit(result), plot_error_by_lead(result)):  # the caution at every figure's foot
        assert any("official space-weather forecasts" in text.get_text().replace("\n", " ") for text in figure.texts)

    pit = plot_pit(result).axes[0]
    heights = [p.get_height() for p in pit.patches]
    assert sum(heights) == np.isfinite(result["pit"].values).sum()
    assert pit.get_xlim() == (0.0, 1.0) and "PIT" in pit.get_xlabel()
    assert pit.get_ylim()[1] >= 1.3 * max(heights)  # room for the legend above the tallest bar

    err = plot_error_by_lead(result).axes[0]
    points = err.lines[0]
    np.testing.assert_allclose(points.get_xdata(), result["lead"].values)
    np.testing.assert_allclose(points.get_ydata(), 100 * result["relative_error"].values)
    assert "(%)" in err.get_ylabel() and "years" in err.get_xlabel()


# --------------------------------------------------------------------------- parallel


def test_pool_and_dask_give_the_serial_table(world):
    pytest.importorskip("dask.distributed")
    record, t, v = world
    dates = [2040.0, 2043.0, 2046.0, 2049.5]
    calls = []
    serial = hindcast(record, (t, v), dates, members=30, seed=8, progress=lambda d, n: calls.append((d, n)))
    assert calls[-1] == (4, 4) and len(calls) == 4
    _same(serial, hindcast(record, (t, v), dates, members=30, seed=8, jobs=2))
    _same(serial, hindcast(record, (t, v), dates, members=30, seed=8, jobs=2, dask="local"))


def test_the_hindcast_command_writes_what_the_library_finds(world, tmp_path, capsys):
    """`polarflux hindcast` on a record and a sunspot file: the printed summary matches the CSV it writes."""
    import csv as csvmodule

    from polarflux.cli import main
    from polarflux.record import write_record

    record, t, v = world
    rec = write_record(record, tmp_path / "rec.csv")
    ssn = tmp_path / "ssn.csv"
    dates = np.datetime_as_string(from_decimal_year(t, True), unit="D")
    ssn.write_text("date,sunspot_number\n" + "".join(f"{d},{x:.2f}\n" for d, x in zip(dates, v, strict=True)))
    args = ["hindcast", str(rec), "--sunspots", str(ssn), "--from", "2045-01-01", "--to", "2046-12-31",
            "--every", "6M", "--members", "20", "--jobs", "1", "--out", str(tmp_path / "h")]
    assert main(args) == 0
    out = capsys.readouterr().out
    with open(tmp_path / "h_hindcast.csv", newline="") as handle:
        rows = list(csvmodule.DictReader(handle))
    assert len(rows) == 4  # 2045-01, 2045-07, 2046-01, 2046-07
    assert f"{len(rows)} forecasts, 0 failed" in out and "caution:" in out
    assert (tmp_path / "h_hindcast_pit.png").exists()
    assert main(args) == 2  # outputs exist: not replaced without --force
    assert "--force" in capsys.readouterr().err


def test_forecasts_outside_the_lead_bins_get_rows_of_their_own():
    """The table's rows add up to every forecast with a known lead (none silently left out)."""
    lead = [-6.0, -3.5, 0.5, 3.0, 3.5]
    table = _table(lead=lead, inside68=[1] * 5, inside95=[1] * 5, relative_error=[0.1] * 5, crps=[1.0] * 5,
                   crps_climatology=[2.0] * 5, status=["ok"] * 5)
    rows = lead_table(table)
    assert rows[0]["lead_range"] == (-np.inf, -4.0) and rows[0]["forecasts"] == 1
    assert rows[-1]["lead_range"] == (2.0, np.inf) and rows[-1]["forecasts"] == 2
    assert sum(r["forecasts"] for r in rows) == 5
    assert sum(r["forecasts"] for r in lead_table(table, outside=False)) == 2
