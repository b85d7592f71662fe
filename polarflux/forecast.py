"""The forecast: project the polar field to the coming minimum and predict the next cycle.

Precursor calibration
---------------------
The amplitude of the next cycle is regressed on a polar proxy at the minimum
before it (the axial dipole, the mean polar field, or the polar flux) by ordinary
least squares, with the classical Student-t prediction intervals and leave-one-out
hindcast errors (:func:`fit_precursor`). A stronger polar field at minimum gives
a stronger next cycle (Schatten et al. 1978, GRL 5, 411; Munoz-Jaramillo et al.
2013, ApJL 767, L25): the slope must come out positive.

Projection
----------
Before the minimum the polar field is not yet final. The latest map's longitude
average (polar gaps filled as ``measure_caps(fill="profile")`` does, scaled onto
the record's reference instrument) is evolved by an ensemble of axisymmetric
surface flux transport models (:class:`~polarflux.transport.TransportEnsemble`)
to each member's date of minimum. The projected proxy is scaled by the ratio of
the anchor (the merged record's viewing-corrected proxy, smoothed by a line over
the last 13 rotations, at the map's time) to the model's proxy at the start, so
that it carries the record's conventions (fill, grid, hidden pole, scale factors)
that the calibration was made with. After a minimum, while the new cycle rises,
that cycle is forecast from the proxy measured at its minimum instead. Members draw the diffusivity (250-600 km^2/s),
the peak flow speed (8-15 m/s), the decay time (5-10 years, or none) and the date
of the minimum (the last minimum plus a cycle length of 11.0 +/- 0.8 years,
truncated at the earliest date the minimum can have without being confirmed yet).
The declining cycle's remaining regions emerge in every member
(:mod:`polarflux.emergence`), their flux per region fitted on the record's own
earlier minima. The projection's error on those minima, as a function of lead, widens the
members where it exceeds their spread, and the record's own distribution of the proxy at its
minima (a Student-t prior) then weighs them: far from the minimum the forecast leans on the
record (:func:`~polarflux.projection.shrink_to_prior`).

Forecast
--------
Monte Carlo: each member's projected proxy goes through the calibration's
predictive distribution (a Student-t draw around the fitted line) to one
amplitude; the distribution gives the median and the 68 % and 95 % ranges. The
time of maximum follows from the amplitude by the rise-and-decay cycle shape of
Hathaway, Wilson & Reichmann (1994, Sol. Phys. 151, 177), whose width b depends on
the amplitude (the Waldmeier effect), with a scatter of 0.5 years (our choice).

A forecast is probabilistic. Operations that affect crew or spacecraft safety
follow the responsible agencies' official space-weather forecasts and local
rules, not this tool.
"""

from __future__ import annotations

import math
import os

import numpy as np

from .budget import spread_budget
from .errors import PolarfluxError, SettingsError
from .precursor import DEFAULT_LAW, LAWS, PrecursorFit, Prediction, ProportionalFit, fit_precursor
from .precursor import sample_summary as _summary
from .projection import _latest_profile, project_to_minimum, record_prior, shrink_to_prior

__all__ = [
    "CAUTION",
    "PrecursorFit",
    "ProportionalFit",
    "Prediction",
    "fit_precursor",
    "LAWS",
    "calibration_from_events",
    "read_calibration",
    "project_to_minimum",
    "forecast_next_cycle",
    "rise_time_years",
    "forecast_from_record",
]

CAUTION = (
    "This forecast is probabilistic: the next cycle may fall outside the ranges given. "
    "Operations that affect crew or spacecraft safety must follow the responsible agencies' "
    "official space-weather forecasts and local rules, not this tool."
)


# --------------------------------------------------------------------------- calibration sets


def calibration_from_events(events: dict, proxy: str = "axial_dipole") -> list[dict]:
    """Calibration pairs from :func:`polarflux.events.record_events` of a record with a sunspot series.

    Each minimum with a measured proxy pairs with the maximum that follows it (the
    highest 13-month smoothed sunspot number before the next minimum, or after the
    last minimum once the series has clearly passed it).
    """
    if proxy not in ("axial_dipole", "north", "south", "mean_field"):
        raise SettingsError(f"proxy {proxy!r}: expected axial_dipole, mean_field, north or south")
    pairs = []
    maxima = events.get("maxima", [])
    for k, at in enumerate(events.get("at_minima", [])):
        later = [m for m in maxima if m["time"] > at["time"]]
        nxt = [m["time"] for m in events.get("minima", []) if m["time"] > at["time"] + 1.0]
        if not later or (nxt and later[0]["time"] > nxt[0]):
            continue
        value = _proxy_at(at, proxy)
        if np.isfinite(value):
            pairs.append({"cycle": k + 1, "minimum": at["time"], "proxy": float(value),
                          "next_amplitude": float(later[0]["sunspot_number"]), "source": "record"})
    return pairs


def read_calibration(path: str | os.PathLike) -> list[dict]:
    """Read calibration pairs from CSV with columns ``cycle, proxy, next_amplitude, source``."""
    from ._kinds import read_csv_table

    expected = "a calibration CSV (columns cycle, proxy, next_amplitude, source)"
    source, fields, rows = read_csv_table(path, expected)
    missing = [c for c in ("cycle", "proxy", "next_amplitude") if c not in fields]
    if missing:
        raise PolarfluxError(f"{source}: missing column(s) {', '.join(missing)} "
                             "(expected cycle, proxy, next_amplitude, source)")
    pairs = []
    for line, row in rows:
        try:
            pairs.append({"cycle": row["cycle"].strip(), "proxy": float(row["proxy"]),
                          "next_amplitude": float(row["next_amplitude"]),
                          "source": (row.get("source") or "").strip()})
        except (TypeError, ValueError):
            raise PolarfluxError(f"{source}: line {line}: proxy and next_amplitude must be numbers") from None
    if not pairs:
        raise PolarfluxError(f"{source}: holds no calibration pairs; expected {expected}")
    return pairs


# --------------------------------------------------------------------------- forecast


def rise_time_years(amplitude) -> np.ndarray:
    """Years from minimum to maximum for a cycle of ``amplitude`` (Hathaway, Wilson & Reichmann 1994 shape)."""
    from .synthetic import _shape_for_amplitude, cycle_shape

    months = np.linspace(0.0, 200.0, 4001)
    amplitude = np.atleast_1d(np.asarray(amplitude, dtype=np.float64))
    grid = np.linspace(max(5.0, amplitude.min()), max(amplitude.max(), 10.0), 40)
    rises = np.array([months[np.argmax(cycle_shape(months, _shape_for_amplitude(a)))] / 12.0 for a in grid])
    return np.interp(np.clip(amplitude, grid[0], grid[-1]), grid, rises)


def forecast_next_cycle(fit: PrecursorFit, projected_proxy, minimum_times, seed: int = 1,
                        rise_scatter_years: float = 0.5) -> dict:
    """Combine projected proxies with the calibration's predictive distribution by Monte Carlo.

    Returns the amplitude and time-of-maximum distributions (median, 68 % and 95 %
    ranges), the samples, and the caution text.
    """
    rng = np.random.default_rng(seed)
    proxy = np.abs(np.asarray(projected_proxy, dtype=np.float64))
    amplitudes = np.clip(fit.sample(proxy, rng), 0.0, None)
    rise = rise_time_years(np.maximum(amplitudes, 5.0)) + rng.normal(0.0, rise_scatter_years, amplitudes.size)
    peak = np.asarray(minimum_times, dtype=np.float64) + rise
    return {
        "amplitude": _summary(amplitudes),
        "maximum_time": _summary(peak),
        "minimum_time": _summary(np.asarray(minimum_times, dtype=np.float64)),
        "proxy": _summary(proxy),
        "samples": {"amplitude": amplitudes, "maximum_time": peak,
                    "minimum_time": np.asarray(minimum_times, dtype=np.float64)},
        "caution": CAUTION,
    }


def _rising_cycle(events: dict, last_minimum: float, as_of_year: float, proxy: str,
                  passed_peak: float | None) -> dict | None:
    """The measured proxy at the last minimum when the cycle it began is rising, else None.

    Rising: the cycle has not passed its maximum (``passed_peak`` is None, see
    :func:`_passed_peak`). The proxy is the smoothed record's value at the minimum
    (``events["at_minima"]``); its relative error combines the fill uncertainty there and the
    hemispheres' asymmetry (the proxy is not better known than the two caps agree), at least
    5 % (our choice).
    """
    if passed_peak is not None:
        return None  # past its maximum: the next cycle is the one to forecast
    at = [a for a in events.get("at_minima", []) if abs(a["time"] - last_minimum) < 1e-6]
    if not at or as_of_year <= last_minimum:
        return None
    a = at[0]
    north, south = abs(a["north"]), abs(a["south"])
    values = {"axial_dipole": abs(a["axial_dipole"]), "mean_field": 0.5 * (north + south),
              "north": a["north"], "south": a["south"]}
    if not all(np.isfinite(values[k]) and values[k] != 0 for k in (proxy, "north", "south")):
        return None
    fill = np.nanmean([a.get("north_fill_error", np.nan) / north, a.get("south_fill_error", np.nan) / south]) \
        if np.isfinite([a.get("north_fill_error", np.nan), a.get("south_fill_error", np.nan)]).any() else 0.0
    asymmetry = abs(north - south) / (north + south)
    values["relative_error"] = float(max(0.05, np.hypot(np.nan_to_num(fill), asymmetry)))
    return values


def _passed_peak(events: dict, last_minimum: float, t_ssn, v_ssn) -> float | None:
    """Time of the maximum the cycle begun at ``last_minimum`` has passed, or None while it rises.

    Passed: a maximum in ``events`` after the minimum, or the (13-month smoothed) series since
    the minimum has its highest value more than half a year (or one step of a coarser series)
    before its last value.
    """
    from .timeseries import smooth_13_month

    known = [m["time"] for m in events.get("maxima", []) if m["time"] > last_minimum]
    if known:
        return float(known[0])
    t = np.asarray(t_ssn, dtype=np.float64)
    v = np.asarray(v_ssn, dtype=np.float64)
    cadence = float(np.median(np.diff(t))) if t.size > 1 else 1.0
    smooth = smooth_13_month(v) if cadence < 2.0 / 12.0 else v
    since = np.flatnonzero(np.isfinite(smooth) & (t >= last_minimum))
    if since.size < 2:
        return None
    peak = since[np.argmax(smooth[since])]
    return float(t[peak]) if t[since[-1]] - t[peak] > max(0.5, 1.01 * cadence) else None


def _log_spread(values) -> float:
    """Standard deviation of ln |values| over the non-zero ones (0 with fewer than two)."""
    v = np.abs(np.asarray(values, dtype=np.float64))
    v = v[v > 0]
    return float(np.std(np.log(v), ddof=1)) if v.size > 1 else 0.0


def _date_log_spread(values, minimum_times) -> float:
    """The part of ln |values|' spread that follows the members' dates of minimum (a straight-line fit)."""
    v = np.abs(np.asarray(values, dtype=np.float64))
    t = np.asarray(minimum_times, dtype=np.float64)
    keep = v > 0
    if keep.sum() < 3 or np.std(t[keep]) == 0:
        return 0.0
    slope = np.polyfit(t[keep], np.log(v[keep]), 1)[0]
    return float(abs(slope) * np.std(t[keep], ddof=1))


def _proxy_at(at: dict, proxy: str) -> float:
    """The proxy's magnitude in one entry of ``record_events``' ``at_minima``."""
    if proxy == "mean_field":
        return 0.5 * (abs(at["north"]) + abs(at["south"]))
    return abs(at[proxy])


def _fill_relative_error(merged) -> float:
    """The fill uncertainty of the latest year of the merged record, relative to its mean polar field."""
    if "fill_error" not in merged:
        return 0.0
    error = merged["fill_error"].values[-13:].ravel()
    field = np.abs(merged["mean_field"].values[-13:]).ravel()
    good = np.isfinite(error) & np.isfinite(field)
    if not good.any() or not np.mean(field[good]) > 0:
        return 0.0
    return float(min(np.mean(error[good]) / np.mean(field[good]), 1.0))


def _late_emergence(past, merged, events, t_ssn, v_ssn, bases, last_minimum, as_of_year, now, members, seed, cap):
    """The late-emergence fit on the record's earlier minima and the source for this projection (or Nones)."""
    from .emergence import DecliningCycle, LateEmergence, fit_flux_scale

    fit = fit_flux_scale(past, merged, events, t_ssn, v_ssn, bases, seed=seed, cap_latitude=cap)
    if fit is None or not fit.flux_scale > 0:
        return fit, None
    at = [a for a in events.get("at_minima", []) if abs(a["time"] - last_minimum) < 1e-6]
    if at and np.isfinite(at[0]["north"]) and at[0]["north"] != 0:
        north_sign = -np.sign(at[0]["north"])  # the declining cycle reverses the field it started with
    else:
        recent = merged["mean_field_corrected"].sel(hemisphere="north").values[-13:]
        north_sign = np.sign(np.nanmean(recent)) or 1.0
    cycle = DecliningCycle.fit(t_ssn, v_ssn, last_minimum, as_of_year)
    return fit, LateEmergence(cycle, last_minimum, north_sign, fit.flux_scale, now, members, seed=seed + 3)


def public_result(result: dict) -> dict:
    """A forecast result without its Monte Carlo samples and fit object: what the JSON output holds."""
    return {k: v for k, v in result.items() if k not in ("samples", "fit")}


def forecast_from_record(record, sunspot_times, sunspot_values, proxy: str = "axial_dipole",
                         calibration: list[dict] | None = None, as_of=None, members: int = 1000, seed: int = 0,
                         viewing: str = "b0", bases=("",), law: str = DEFAULT_LAW, hemispheric=None,
                         regions=None) -> dict:
    """The whole forecast from a measured record and a sunspot series.

    Parameters
    ----------
    record : xarray.Dataset
        From :func:`polarflux.measure_archive` (its ``source`` paths are read for the
        latest map; without a readable map the projection keeps the latest proxy).
    sunspot_times, sunspot_values : array-like
        Decimal years and sunspot numbers.
    proxy : {"axial_dipole", "mean_field"}
        Polar proxy at minimum.
    calibration : list of dict, optional
        Pairs from :func:`read_calibration`; by default they come from the record itself.
    as_of : datetime64 or decimal year, optional
        Forecast as if it were this date (a hindcast): only maps whose rotation had ended and
        sunspot means whose month (or year) had ended enter (:mod:`polarflux.cutoff`). Default:
        when the latest map and sunspot value both exist.
    bases : sequence of str
        Folders against which relative map paths of the record are tried.
    law : {"linear", "proportional"}
        The precursor law (:mod:`polarflux.precursor`).
    hemispheric : (array-like, array-like), optional
        Northern and southern sunspot numbers on ``sunspot_times``: each cap is then also
        calibrated on, and forecast for, its own hemisphere (:mod:`polarflux.hemispheres`).
    regions : polarflux.regions.Regions, optional
        Active regions with latitudes and leading polarities: a minimum the new cycle's regions
        confirm (:func:`polarflux.regions.minimum_from_regions`) before the sunspot series can is
        taken as the coming minimum's date. Only regions emerged by the forecast date enter.

    Returns
    -------
    dict
        ``calibration`` (pairs, coefficients, standard errors, hindcast errors), ``projection``,
        ``forecast`` (amplitude and time of maximum, median and 68/95 % ranges), ``hemispheres``
        (None without hemispheric sunspot numbers) and ``caution``.
    """
    from .calibration import merge_instruments
    from .cutoff import cut_record, cut_sunspots, data_end
    from .events import CONFIRM_YEARS, from_decimal_year, record_events, to_decimal_year
    from .timeseries import format_date

    t_ssn = np.asarray(sunspot_times, dtype=np.float64)
    v_ssn = np.asarray(sunspot_values, dtype=np.float64)
    end = data_end(record, t_ssn)
    if as_of is None:
        as_of_year = end  # now: when the latest map and sunspot value both exist
    elif isinstance(as_of, (float, int)):
        as_of_year = float(as_of)
    else:
        as_of_year = float(to_decimal_year(np.array([as_of], dtype="datetime64[ns]"))[0][0])
    as_of_ns = from_decimal_year(np.array([as_of_year]), True)[0]
    # only what existed on the date: a map once its rotation has ended, a sunspot value once its
    # month (or year) has; a temporal fill made again from the maps kept
    past = cut_record(record, as_of_year)
    hemi_ssn = None if hemispheric is None else [cut_sunspots(t_ssn, h, as_of_year)[1] for h in hemispheric]
    t_ssn, v_ssn = cut_sunspots(t_ssn, v_ssn, as_of_year)
    if past.sizes["time"] < 13:
        times = np.sort(record["time"].values.astype("datetime64[ns]"))
        times = times[~np.isnat(times)]
        first = f" (its first map is from {str(times[0])[:10]})" if times.size else ""
        raise SettingsError(f"the record before the forecast date {format_date(as_of_year)} holds "
                            f"{past.sizes['time']} maps, fewer than a year of rotations (13){first}")
    merged = merge_instruments(past, viewing=viewing)
    events = record_events(merged, t_ssn, v_ssn)
    pairs = calibration if calibration is not None else calibration_from_events(events, proxy)
    fit = fit_precursor([p["proxy"] for p in pairs], [p["next_amplitude"] for p in pairs],
                        labels=[p["cycle"] for p in pairs], law=law)
    minima = [m["time"] for m in events["minima"] if m["time"] <= as_of_year]
    if not minima:
        raise SettingsError("no cycle minimum in the sunspot series before the forecast date")
    fill_relative = 0.0
    late_fit = None
    shrink = None
    by_regions = None
    regions_looked = False  # whether the regions were asked for a minimum (only while one is coming)
    peak = _passed_peak(events, minima[-1], t_ssn, v_ssn)
    rising = _rising_cycle(events, minima[-1], as_of_year, proxy, peak)
    latest = None if rising is not None else _latest_profile(past, merged, as_of_ns, bases)
    if rising is not None:
        # the minimum has passed and the new cycle's maximum is not yet known: the cycle now rising is
        # the one forecast, from the proxy measured at its minimum (no projection needed)
        fill_relative = _fill_relative_error(merged)
        rng = np.random.default_rng(seed + 2)
        draw = rng.normal(0.0, rising["relative_error"], members)
        scale = np.maximum(1.0 + draw, 0.1)
        drivers = {"proxy measured at the minimum": draw}
        projection = {"minimum": np.full(members, minima[-1]), proxy: rising[proxy] * scale,
                      "north": rising["north"] * scale, "south": rising["south"] * scale}
        now = minima[-1]
        projection_kind = (f"measured at the minimum of {format_date(minima[-1])} (the cycle now rising; its "
                           f"smoothed {proxy} with a {100 * rising['relative_error']:.0f} % error)")
    elif latest is not None:
        profile, edges, path, when, measured = latest
        now = float(to_decimal_year(np.array([when]))[0][0])
        # the coming minimum is not confirmed yet: it is after the forecast date less the time the
        # series needs to confirm one (half the 13-month smoothing window, then CONFIRM_YEARS of rise)
        earliest = max(minima[-1] + 1.0, as_of_year - (0.5 + CONFIRM_YEARS))
        cycle_length = (11.0, 0.8)
        if regions is not None:
            from .regions import WINDOW_YEARS, minimum_from_regions

            by_regions = minimum_from_regions(regions, minima, as_of_year)
            regions_looked = True
            if by_regions is not None:  # the new cycle's regions confirm a minimum the series cannot yet
                cycle_length = (by_regions.time - minima[-1], by_regions.uncertainty_years)
                earliest = minima[-1] + 1.0
        cap = float(record.attrs.get("cap_deg", 60.0))
        late_fit, late = _late_emergence(past, merged, events, t_ssn, v_ssn, bases, minima[-1], as_of_year, now,
                                         members, seed, cap)
        projection = project_to_minimum(profile, edges, now, minima[-1], members=members, seed=seed,
                                        cap_latitude=cap, earliest=earliest, late=late, cycle_length=cycle_length)
        start = projection["now"]
        model_now = {"axial_dipole": abs(start["axial_dipole"]),
                     "mean_field": 0.5 * (abs(start["north_mean_field"]) + abs(start["south_mean_field"]))}
        anchor_ratio = measured[proxy] / model_now[proxy] if model_now[proxy] > 0 and measured[proxy] > 0 else 1.0
        projection[proxy] = np.abs(projection[proxy]) * anchor_ratio
        anchored = np.abs(projection[proxy]).copy()  # what the draws, the misfit and the prior change below
        # the anchor is only as good as the fill of the caps' unseen part and the smoothing of the last
        # year's values: each member's scale is drawn from both
        fill_relative = _fill_relative_error(merged)
        anchor_relative = measured["errors"][proxy] / measured[proxy] if measured[proxy] > 0 else 0.0
        # the anchor map's instrument brought onto the reference scale: its factor's uncertainty
        cross = measured.get("cross_calibration", {}).get(proxy, 0.0)
        rng = np.random.default_rng(seed + 2)
        scales = {name: rng.normal(0.0, sd, members) if sd > 0 else np.zeros(members)
                  for name, sd in (("fill of the unseen pole", fill_relative), ("anchor", anchor_relative),
                                   ("cross-calibration", cross))}
        projection[proxy] = projection[proxy] * np.maximum(np.prod([1.0 + d for d in scales.values()], axis=0), 0.1)
        # the members' spread is the transport ensemble's idea of the projection's error; the record's own
        # hindcasts say what it was at this lead on earlier minima (ensemble calibration on past forecasts,
        # as in Gneiting et al. 2005): bring the members to that log spread, plus what the unknown date of
        # the minimum adds (the hindcasts knew their minima), and never below the anchor's own error
        lead = float(np.median(projection["minimum"])) - now
        lead_error = late_fit.log_error_at(lead) if late_fit is not None else None
        target = None
        if lead_error is not None:
            target = max(math.hypot(lead_error, _date_log_spread(projection[proxy], projection["minimum"])),
                         math.sqrt(fill_relative**2 + anchor_relative**2 + cross**2))
            spread = _log_spread(projection[proxy])
            if target > spread:  # wider: an extra draw per member, a term of the budget of its own
                extra = math.sqrt(target**2 - spread**2)
                misfit = rng.normal(0.0, extra, members)
                scales["projection's error at this lead on earlier minima"] = misfit
                projection[proxy] = np.abs(projection[proxy]) * np.exp(misfit)
        # then what the record's minima so far say of the proxy (its prior) weighs the members: far from
        # the minimum, where the projection knows little, the forecast leans on the record
        prior = record_prior([_proxy_at(a, proxy) for a in events.get("at_minima", [])])
        projection[proxy], shrink = shrink_to_prior(projection[proxy], prior, log_sd=target)
        shrink["lead_log_error"] = lead_error
        shrink["lead_years"] = lead
        # each cap anchored to its own smoothed field, then changed member by member as the proxy was
        changed = np.divide(projection[proxy], anchored, out=np.ones(members), where=anchored > 0)
        for h in ("north", "south"):
            model_h = abs(start[f"{h}_mean_field"])
            # near a cap's reversal its field is not known better than its error: the proxy's ratio then
            ratio = measured[h] / model_h if model_h > 0 and measured[h] > 2.0 * measured["errors"][h] else anchor_ratio
            projection[h] = projection[h] * ratio * changed
        drivers = {"projection physics (diffusivity, flow, decay)": np.column_stack(
                       [projection["diffusivity"], projection["flow_speed"], 1.0 / projection["decay_time"]]),
                   "date of minimum": projection["minimum"],
                   **({"late emergence": late.dipole_added} if late is not None else {}), **scales}
        projection_kind = (f"transport ensemble from {path}, anchored to the record's smoothed, viewing-corrected "
                           f"{proxy} there ({100 * anchor_relative:.0f} % error); " + (
                               late_fit.describe() if late_fit is not None else
                               "late emergence left out (fewer than two earlier minima to fit its flux on): "
                               "the projection is low by what the declining cycle still emerges"))
        if shrink["prior_median"] is not None and abs(shrink["median_after"] / shrink["median_before"] - 1.0) >= 0.005:
            projection_kind += (f"; {lead:.1f} years before the minimum (where the projection erred by "
                                f"{100 * (lead_error or 0.0):.0f} % in log on earlier minima), the record's "
                                f"{prior['minima']} minima ({proxy} median "
                                f"{shrink['prior_median']:.2f}) move the projection's median from {shrink['median_before']:.2f} to "
                                f"{shrink['median_after']:.2f}")
    else:  # no map to start from: keep the latest smoothed proxy, with its recent spread
        values = np.abs(merged["axial_dipole"].values if proxy == "axial_dipole"
                        else np.nanmean(np.abs(merged["mean_field_corrected"].values), axis=1))
        recent = values[np.isfinite(values)][-13:]
        rng = np.random.default_rng(seed)
        minimum = np.maximum(minima[-1] + rng.normal(11.0, 0.8, members), as_of_year + 0.08)
        projection = {"minimum": minimum, proxy: rng.normal(recent.mean(), recent.std(ddof=1), members)}
        drivers = {"persistence of the latest proxy": projection[proxy], "date of minimum": minimum}
        now, projection_kind = as_of_year, "persistence of the latest proxy (no readable map)"
    result = forecast_next_cycle(fit, projection[proxy], projection["minimum"], seed=seed + 1)
    declining = None
    if rising is None:  # the old cycle's decline, fitted on the series so far: it overlaps the new one's rise
        from .emergence import DecliningCycle

        fitted = DecliningCycle.fit(t_ssn, v_ssn, minima[-1], as_of_year)
        declining = {"start": fitted.start, "shape_a": fitted.shape_a, "scale": fitted.scale}
    budget = spread_budget(fit, result["samples"]["amplitude"], projection[proxy], drivers)
    hemispheres = None
    if hemi_ssn is not None:
        from .hemispheres import hemispheric_forecast, hemispheric_pairs

        if calibration is not None:
            hemispheres = {"pairs": [], "why": "a calibration file was given: the hemispheric pairs come only "
                                               "from the record's own cycles"}
        elif "north" not in projection:
            hemispheres = {"pairs": [], "why": "no map to project the caps from"}
        else:
            hemispheres = hemispheric_forecast(hemispheric_pairs(pairs, events, t_ssn, *hemi_ssn),
                                               projection, law, seed + 5)
    if rising is not None:
        phase = {"phase": "rising", "cycle_start": minima[-1],
                 "text": f"the cycle that began at the minimum of {format_date(minima[-1])} (rising, its maximum "
                         "not yet in the sunspot series)"}
    else:
        why = (f"past its maximum of about {format_date(peak)}" if peak is not None else
               "too young: the smoothed polar field at its minimum is not measured yet")
        start = float(result["minimum_time"]["median"])
        if by_regions is not None:
            which = (f"the minimum of about {format_date(by_regions.time)} (+/- {by_regions.uncertainty_years:.1f} yr), "
                     f"confirmed by {by_regions.new_regions} new-cycle regions against {by_regions.old_regions} old "
                     f"in the half-year to {format_date(by_regions.crossing + WINDOW_YEARS / 2.0)}, "
                     "not yet by the sunspot series")
        else:
            # a minimum the projection dates before the forecast date is past, only not yet confirmed by the series
            which = ("the coming minimum" if start > as_of_year else
                     f"the minimum of about {format_date(start)}, not yet confirmed by the sunspot series")
            if regions_looked:
                which += "; the new cycle's regions do not yet outnumber the old's"
        phase = {"phase": "declining" if peak is not None else "minimum",
                 "cycle_start": start,
                 "minimum_from_regions": None if by_regions is None else {
                     "time": by_regions.time, "uncertainty_years": by_regions.uncertainty_years,
                     "crossing": by_regions.crossing, "confirmed": by_regions.confirmed,
                     "new_regions": by_regions.new_regions, "old_regions": by_regions.old_regions,
                     "earlier_offsets_years": list(by_regions.offsets)},
                 "text": f"the next cycle, after {which} (the cycle that began at {format_date(minima[-1])} "
                         f"is {why})"}
    return {
        "as_of": as_of_year,
        "proxy": proxy,
        "phase": phase,
        "calibration": {
            "pairs": pairs,
            "law": fit.law,
            "description": fit.describe(),
            "warning": fit.warning,
            "through_origin": fit.through_origin,
            "intercept": fit.intercept,
            "slope": fit.slope,
            "standard_errors": fit.standard_errors.tolist(),
            "residual_sd": fit.residual_sd,
            "loo_errors": fit.loo_errors.tolist(),
            "loo_rms": fit.loo_rms,
        },
        "projection": {"method": projection_kind, "from": now, "members": int(np.size(projection["minimum"])),
                       "fill_relative_error": fill_relative,
                       "late_emergence": None if late_fit is None else late_fit.as_dict(),
                       "record_prior": shrink,
                       "declining_cycle": declining,
                       "proxy_at_minimum": result["proxy"], "minimum_time": result["minimum_time"],
                       **{f"{name}_at_minimum": _summary(projection[name])
                          for name in ("north", "south", "axial_dipole") if name in projection}},
        "forecast": {"amplitude": result["amplitude"], "maximum_time": result["maximum_time"],
                     "spread_budget": budget},
        "hemispheres": hemispheres,
        "samples": result["samples"],
        "fit": fit,
        "caution": CAUTION,
    }
