"""A minimum confirmed by the new cycle's regions before the sunspot series can confirm it.

Sources:
  * closed form: two linear emergence rates (the old cycle's falling, the new one's rising) cross at
    a known date;
  * Hale's law and the new cycle's high latitudes (common practice; Harvey & White 1999, J. Geophys.
    Res. 104, 19759, from memory);
  * the invented scenario's truth (truth.json: its cycles' minima) and its own regions.csv.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

import polarflux as pf
from polarflux.errors import PolarfluxError
from polarflux.forecast import forecast_from_record
from polarflux.regions import Regions, minimum_from_regions, read_regions, region_crossing
from polarflux.timeseries import from_decimal_year


def _times(rate_integral_inverse, count):
    return np.array([rate_integral_inverse((k + 0.5) / count) for k in range(count)])


def _cycle_pair(t0, old_sign=1, count=200):
    """Old regions falling linearly to zero over [t0, t0 + 4], new ones rising over the same span.

    Old rate R (1 - u), new rate R u with u = (t - t0) / 4: they cross at t0 + 2 (closed form).
    Old regions at 8 degrees, new at 28 degrees, alternately north and south.
    """
    # cumulative fraction of the old: 1 - (1 - u)^2, of the new: u^2
    old = _times(lambda f: t0 + 4.0 * (1.0 - np.sqrt(1.0 - f)), count)
    new = _times(lambda f: t0 + 4.0 * np.sqrt(f), count)
    hemi_old = np.where(np.arange(count) % 2 == 0, 1.0, -1.0)
    hemi_new = -hemi_old
    times = np.concatenate([old, new])
    lat = np.concatenate([8.0 * hemi_old, 28.0 * hemi_new])
    # leading polarity: old_sign in the north (times the hemisphere), reversed for the new cycle
    leading = np.concatenate([old_sign * hemi_old, -old_sign * hemi_new])
    return times, lat, leading


def _regions(*parts):
    t = np.concatenate([p[0] for p in parts])
    order = np.argsort(t)
    return Regions(t[order], np.concatenate([p[1] for p in parts])[order], np.concatenate([p[2] for p in parts])[order])


def _settled(t0, t1, old_sign, count=100):
    """The old cycle in full swing between its minimum and decline: low and mid latitudes, Hale's law."""
    t = np.linspace(t0, t1, count)
    hemi = np.where(np.arange(count) % 2 == 0, 1.0, -1.0)
    return t, 15.0 * hemi, old_sign * hemi


def test_crossing_of_two_linear_rates_is_found_at_its_closed_form_date():
    regions = _regions(_settled(2001.0, 2006.0, +1), _cycle_pair(2006.0, old_sign=+1))
    found = region_crossing(regions, last_minimum=2000.0, as_of=2010.0)
    assert found is not None and found.old_north_leading == 1
    # the window's centre where the counts cross: t0 + 2, to the month the windows step by
    assert found.crossing == pytest.approx(2008.0, abs=1.0 / 12.0 + 1e-9)
    assert found.confirmed > found.crossing and found.new_regions > found.old_regions
    # before the following windows agree (as of the crossing's window end) nothing is confirmed
    assert region_crossing(regions, 2000.0, found.confirmed - 1.0 / 12.0) is None
    # the opposite Hale orientation is read from the data, not assumed
    flipped = Regions(regions.times, regions.latitude, -regions.leading)
    assert region_crossing(flipped, 2000.0, 2010.0).old_north_leading == -1


def test_old_regions_of_the_wrong_polarity_at_low_latitude_are_not_taken_for_new_ones():
    t, lat, leading = _cycle_pair(2006.0)
    old = np.abs(lat) < 10
    anti = np.where(old & (np.arange(t.size) % 4 == 0), -1.0, 1.0)  # a quarter of the old regions anti-Hale
    regions = _regions(_settled(2001.0, 2006.0, +1), (t, lat, leading * anti))
    found = region_crossing(regions, 2000.0, 2010.0)
    # fewer old regions counted, so the crossing comes earlier, but not before the new cycle is there
    assert 2007.2 < found.crossing <= 2008.0 + 1.0 / 12.0


def test_earlier_minima_calibrate_the_offset_between_crossing_and_minimum():
    # three cycles of 11 years, each crossing 2 years after its block starts, each series minimum
    # 0.3 yr before its crossing: the coming minimum is dated 0.3 yr before its crossing
    parts, minima = [], [1990.0]
    sign = 1
    for k in range(3):
        start = 1990.0 + 11.0 * k
        parts += [_settled(start + 1.0, start + 7.0, sign), _cycle_pair(start + 7.0, old_sign=sign)]
        minima.append(start + 9.0 - 0.3)  # crossing at start + 9
        sign = -sign
    regions = _regions(*parts)
    known = minima[:-1]  # the last one is not yet confirmed by the series
    found = minimum_from_regions(regions, known, as_of=minima[-1] + 1.2)
    assert found is not None and len(found.offsets) == 2
    np.testing.assert_allclose(found.offsets, 0.3, atol=1.0 / 12.0 + 1e-9)
    assert found.time == pytest.approx(minima[-1], abs=1.0 / 12.0 + 1e-9)
    # two agreeing offsets do not make it exact: the prior's 0.4 yr (as two minima) keeps the uncertainty
    # up, the pooled variance of a normal sample with a scaled inverse-chi2 prior, times sqrt(1 + 1/n)
    # for the mean's own error (Gelman et al. 2013, Bayesian Data Analysis, 3rd ed., sect. 3.3)
    squares = float(np.sum((np.array(found.offsets) - np.mean(found.offsets)) ** 2))
    pooled = math.sqrt((squares + 2 * 0.4**2) / (1 + 2))
    assert found.uncertainty_years == pytest.approx(pooled * math.sqrt(1.5))
    assert found.uncertainty_years > 0.35


def test_read_regions_by_date_or_year_and_by_flux_sign_or_polarity(tmp_path):
    a = tmp_path / "a.csv"
    a.write_text("date,latitude,flux_mx,tilt_deg\n2090-03-01,25.0,-3e21,5\n2090-01-01,-10.0,2e21,4\n")
    r = read_regions(a)
    assert r.times[0] < r.times[1] and list(r.leading) == [1.0, -1.0] and list(r.latitude) == [-10.0, 25.0]
    b = tmp_path / "b.csv"
    b.write_text("year,latitude,leading_polarity\n2090.1,25,1\n2090.2,-25,-1\n")
    assert list(read_regions(b).leading) == [1.0, -1.0]
    bad = tmp_path / "bad.csv"
    bad.write_text("year,latitude,leading_polarity\n2090.1,25,1\n2090.2,north,-1\n")
    with pytest.raises(PolarfluxError, match=r"bad\.csv: line 3"):
        read_regions(bad)
    for name, text in (("nodate.csv", "date,latitude,flux_mx\n2090-03-01,25.0,-3e21\n,10.0,2e21\n"),
                       ("nan.csv", "year,latitude,leading_polarity\n2090.1,25,1\n2090.2,25,nan\n"),
                       ("nanyear.csv", "year,latitude,leading_polarity\n2090.1,25,1\nnan,25,1\n")):
        (tmp_path / name).write_text(text)
        with pytest.raises(PolarfluxError, match=name.replace(".", r"\.") + ": line 3"):
            read_regions(tmp_path / name)
    wrong = tmp_path / "ssn.csv"
    wrong.write_text("date,sunspot_number\n2090-01-15,30\n")
    with pytest.raises(PolarfluxError, match=r"ssn\.csv: needs columns date \(or year\), latitude"):
        read_regions(wrong)


def test_scenario_minimum_confirmed_by_regions_before_the_series(hindcast_scenario, tmp_path, capsys):
    # a year after cycle 4's minimum the 13-month smoothed series cannot confirm it yet (it needs
    # half a year of window and half a year of rise, and more where the rise is slow); the scenario's
    # regions date it within twice their stated uncertainty of the truth
    folder, truth, record, t, v = hindcast_scenario
    regions = read_regions(folder / "regions.csv")
    minimum = 2051.0 + truth["cycles"][3]["minimum_years"]
    as_of = minimum + 1.0
    with_regions = forecast_from_record(record, t, v, as_of=as_of, members=200, seed=1, regions=regions)
    plain = forecast_from_record(record, t, v, as_of=as_of, members=200, seed=1)
    found = with_regions["phase"]["minimum_from_regions"]
    assert plain["phase"]["phase"] != "rising"  # the series alone has not confirmed the minimum
    assert found is not None and plain["phase"]["minimum_from_regions"] is None
    assert abs(found["time"] - minimum) < 2.0 * found["uncertainty_years"]
    assert found["confirmed"] <= as_of
    assert abs(with_regions["projection"]["minimum_time"]["median"] - found["time"]) < 0.1
    assert "confirmed by" in with_regions["phase"]["text"]

    from polarflux.cli import main

    path = tmp_path / "record.nc"
    pf.write_record(record, path)
    date = str(from_decimal_year(np.array([as_of]), True)[0])[:10]
    assert main(["forecast", str(path), "--sunspots", str(folder / "sunspots.csv"), "--regions",
                 str(folder / "regions.csv"), "--as-of", date, "--members", "60"]) == 0
    out = capsys.readouterr().out
    assert "new-cycle regions" in out
    saved = json.loads((tmp_path / "record_forecast.json").read_text())
    assert saved["phase"]["minimum_from_regions"]["new_regions"] >= 5


def test_hindcast_passes_the_regions_to_each_forecast(hindcast_scenario, tmp_path):
    # hindcast dates about a year after cycle 4's minimum: with --regions each forecast's minimum is the
    # one the regions date as on its date (see the test above), without it the cycle-length prior's
    import csv

    from polarflux.cli import main
    from polarflux.cutoff import cut_sunspots

    folder, truth, record, t, v = hindcast_scenario
    minimum = 2051.0 + truth["cycles"][3]["minimum_years"]
    first, last = (str(from_decimal_year(np.array([minimum + x]), True)[0])[:10] for x in (1.0, 1.3))
    path = tmp_path / "record.nc"
    pf.write_record(record, path)
    rows = {}
    for name, extra in (("with", ["--regions", str(folder / "regions.csv")]), ("without", [])):
        assert main(["hindcast", str(path), "--sunspots", str(folder / "sunspots.csv"), "--from", first, "--to", last,
                     "--members", "40", "--jobs", "1", "--out", str(tmp_path / name), *extra]) == 0
        with open(tmp_path / f"{name}_hindcast.csv", newline="") as handle:
            rows[name] = [r for r in csv.DictReader(handle) if r["status"] == "ok"]
    assert rows["with"] and len(rows["with"]) == len(rows["without"])
    regions = read_regions(folder / "regions.csv")
    for with_row, without_row in zip(rows["with"], rows["without"], strict=True):
        date = float(with_row["date"])
        seen = cut_sunspots(t, v, date)  # the series as the forecast saw it
        expected = minimum_from_regions(regions, pf.find_cycle_extrema(*seen).minima.times, date)
        assert expected is not None
        assert abs(float(with_row["forecast_minimum"]) - expected.time) < 0.1
        assert abs(float(without_row["forecast_minimum"]) - expected.time) > 0.1


def test_regions_that_confirm_nothing_leave_the_forecast_as_it_was(hindcast_scenario):
    folder, truth, record, t, v = hindcast_scenario
    minimum = 2051.0 + truth["cycles"][3]["minimum_years"]
    early = read_regions(folder / "regions.csv").until(minimum - 3.0)  # nothing of the new cycle yet
    as_of = minimum + 1.0
    plain = forecast_from_record(record, t, v, as_of=as_of, members=100, seed=5)
    quiet = forecast_from_record(record, t, v, as_of=as_of, members=100, seed=5, regions=early)
    assert quiet["phase"]["minimum_from_regions"] is None
    assert quiet["forecast"]["amplitude"] == plain["forecast"]["amplitude"]
    assert quiet["projection"]["minimum_time"] == plain["projection"]["minimum_time"]
    assert "do not yet outnumber" in quiet["phase"]["text"] and "outnumber" not in plain["phase"]["text"]
