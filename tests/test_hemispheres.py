"""Hemispheric forecasts: each cap against its own hemisphere's next cycle.

Sources:
  * statsmodels OLS and get_prediction(...).summary_frame (reference regression and prediction
    intervals on the doubled pairs);
  * closed form: the peak of a smooth bump that the 13-month running mean barely changes;
  * the invented scenario's own hemispheric sunspot numbers (what happened after the forecast date).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import statsmodels.api as sm

import polarflux as pf
from polarflux.forecast import forecast_from_record
from polarflux.hemispheres import hemispheric_forecast, hemispheric_pairs
from polarflux.sunspots import read_sunspot_series


def _bump(t, start, peak_time, height, end):
    """A sin^2 cycle from ``start`` to ``end`` peaking at ``peak_time`` with ``height``."""
    out = np.zeros_like(t)
    rise = (t >= start) & (t <= peak_time)
    fall = (t > peak_time) & (t <= end)
    out[rise] = height * np.sin(0.5 * np.pi * (t[rise] - start) / (peak_time - start)) ** 2
    out[fall] = height * np.cos(0.5 * np.pi * (t[fall] - peak_time) / (end - peak_time)) ** 2
    return out


def test_pairs_take_each_hemispheres_own_maximum_and_cap():
    t = 2000.0 + (np.arange(12 * 34) + 0.5) / 12.0
    # three cycles; the hemispheres peak at different times and heights
    north = (_bump(t, 2000, 2004.0, 60, 2011) + _bump(t, 2011, 2015.5, 90, 2022)
             + _bump(t, 2022, 2026.0, 40, 2033.9))
    south = (_bump(t, 2000, 2005.0, 80, 2011) + _bump(t, 2011, 2014.5, 70, 2022)
             + _bump(t, 2022, 2027.0, 55, 2033.9))
    events = {"minima": [{"time": 2000.5}, {"time": 2011.0}, {"time": 2022.0}],
              "at_minima": [{"time": 2011.0, "north": 3.0, "south": -2.0},
                            {"time": 2022.0, "north": -1.5, "south": 2.5}]}
    pairs = [{"cycle": 2, "minimum": 2011.0}, {"cycle": 3, "minimum": 2022.0}]
    got = {p["cycle"]: p for p in hemispheric_pairs(pairs, events, t, north, south)}
    assert set(got) == {"2N", "2S", "3N", "3S"}
    # closed form: the bumps' heights (a broad sin^2 peak loses well under 1 % to the 13-month mean)
    for label, height, cap in (("2N", 90, 3.0), ("2S", 70, 2.0), ("3N", 40, 1.5), ("3S", 55, 2.5)):
        assert got[label]["next_amplitude"] == pytest.approx(height, rel=0.01)
        assert got[label]["proxy"] == cap
    # a cap not measured at its minimum gives no pair for that hemisphere only
    events["at_minima"][1]["north"] = float("nan")
    assert {p["cycle"] for p in hemispheric_pairs(pairs, events, t, north, south)} == {"2N", "2S", "3S"}


@pytest.mark.parametrize("law", ["linear", "proportional"])
def test_hemispheric_fit_and_forecast_match_statsmodels(law):
    rng = np.random.default_rng(11)
    caps = rng.uniform(1.0, 4.0, 10)
    amplitude = 18.0 * caps * np.exp(rng.normal(0.0, 0.12, caps.size))
    pairs = [{"cycle": f"{k // 2 + 1}{'NS'[k % 2]}", "hemisphere": ("north", "south")[k % 2],
              "proxy": float(c), "next_amplitude": float(a)} for k, (c, a) in enumerate(zip(caps, amplitude, strict=True))]
    members = 40000
    projected = {"north": np.full(members, 2.0), "south": np.full(members, 3.0)}
    out = hemispheric_forecast(pairs, projected, law, seed=2)
    assert out["why"] is None
    if law == "linear":
        ref = sm.OLS(amplitude, sm.add_constant(caps)).fit()
        np.testing.assert_allclose([out["intercept"], out["slope"]], ref.params, rtol=1e-8)
        frames = {h: ref.get_prediction(np.array([[1.0, x]])) for h, x in (("north", 2.0), ("south", 3.0))}
        scale = 1.0
    else:  # ln A = ln k + ln cap: an intercept-only OLS on ln(A / cap)
        ref = sm.OLS(np.log(amplitude / caps), np.ones((caps.size, 1))).fit()
        assert out["slope"] == pytest.approx(np.exp(ref.params[0]), rel=1e-8)
        frames = {h: ref.get_prediction(np.ones((1, 1))) for h in ("north", "south")}
        scale = None
    for h, x in (("north", 2.0), ("south", 3.0)):
        a = out[h]["amplitude"]
        for level, low, high in ((0.6826894921370859, "low68", "high68"), (0.95, "low95", "high95")):
            frame = frames[h].summary_frame(alpha=1 - level)
            lo, hi = frame["obs_ci_lower"].iloc[0], frame["obs_ci_upper"].iloc[0]
            if scale is None:  # log space back to amplitude: the quantiles map one to one
                lo, hi = x * np.exp(lo), x * np.exp(hi)
            # Monte Carlo quantiles of 40000 draws: within 1.5 % of the closed-form t interval
            assert a[low] == pytest.approx(lo, rel=0.015, abs=0.5)
            assert a[high] == pytest.approx(hi, rel=0.015)


def test_too_few_pairs_or_one_hemisphere_are_said_not_forecast():
    pairs = [{"cycle": f"{k}N", "hemisphere": "north", "proxy": 1.0 + k, "next_amplitude": 20.0 + 10 * k}
             for k in range(5)]
    out = hemispheric_forecast(pairs, {"north": np.ones(10), "south": np.ones(10)}, "linear", seed=0)
    assert out["why"] and "north" not in out


@pytest.fixture(scope="module")
def world(hindcast_scenario):
    folder, truth, record, _, _ = hindcast_scenario
    return folder, truth, record, read_sunspot_series(folder / "sunspots.csv")


def test_forecast_of_each_hemisphere_holds_what_it_then_did(world):
    # two years before cycle 4's minimum, each hemisphere's forecast against the maximum its own
    # sunspot numbers then reached (the scenario's data after the forecast date)
    folder, truth, record, series = world
    start, end = (2051.0 + truth["cycles"][k]["minimum_years"] for k in (3, 4))
    as_of = start - 2.0
    result = forecast_from_record(record, series.times, series.total, as_of=as_of, members=300, seed=4,
                                  hemispheric=(series.north, series.south))
    hemi = result["hemispheres"]
    assert hemi["why"] is None and len(hemi["pairs"]) >= 4
    assert {p["cycle"][-1] for p in hemi["pairs"]} == {"N", "S"}
    assert all(p["minimum"] < as_of for p in hemi["pairs"])
    smooth = {h: pf.smooth_13_month(getattr(series, h)) for h in ("north", "south")}
    cycle = (series.times > start) & (series.times < end)
    for h in ("north", "south"):
        happened = float(np.nanmax(smooth[h][cycle]))
        a = hemi[h]["amplitude"]
        assert a["low95"] <= happened <= a["high95"], (h, a, happened)
    # the total forecast does not change with the hemispheric pairs
    plain = forecast_from_record(record, series.times, series.total, as_of=as_of, members=300, seed=4)
    assert plain["hemispheres"] is None
    assert plain["forecast"]["amplitude"] == result["forecast"]["amplitude"]


def test_forecast_command_prints_and_saves_the_hemispheres(world, tmp_path, capsys):
    from polarflux.cli import main

    folder, truth, record, series = world
    path = tmp_path / "record.nc"
    pf.write_record(record, path)
    assert main(["forecast", str(path), "--sunspots", str(folder / "sunspots.csv"), "--members", "60"]) == 0
    out = capsys.readouterr().out
    line = next(x for x in out.splitlines() if x.startswith("hemispheres"))
    assert "north" in line and "south" in line and "68 %" in line
    saved = json.loads((tmp_path / "record_forecast.json").read_text())
    assert saved["hemispheres"]["north"]["amplitude"]["median"] > 0
    # a file without hemispheric columns: no hemispheric forecast, said by its absence
    total_only = tmp_path / "total.csv"
    total_only.write_text("year,sunspot_number\n" + "\n".join(
        f"{y:.4f},{v:.1f}" for y, v in zip(series.times, series.total, strict=True)) + "\n")
    assert main(["forecast", str(path), "--sunspots", str(total_only), "--members", "60", "--force"]) == 0
    assert "hemispheres" not in capsys.readouterr().out


def test_each_cap_is_projected_in_the_records_own_terms(world):
    # half a year before cycle 4's minimum little changes: each cap's projected field at the minimum
    # must be near what the record itself then measured at that minimum (its smoothed, viewing-
    # corrected cap field), sign and all; a cap left in the model's units or swapped with the other
    # would not be
    from polarflux.calibration import merge_instruments
    from polarflux.events import record_events

    folder, truth, record, series = world
    events = record_events(merge_instruments(record), series.times, series.total)
    minimum = 2051.0 + truth["cycles"][3]["minimum_years"]
    at = min(events["at_minima"], key=lambda a: abs(a["time"] - minimum))
    result = forecast_from_record(record, series.times, series.total, as_of=at["time"] - 0.5, members=200, seed=2,
                                  hemispheric=(series.north, series.south))
    for h in ("north", "south"):
        projected = result["projection"][f"{h}_at_minimum"]["median"]
        assert projected == pytest.approx(at[h], rel=0.2), (h, projected, at[h])
