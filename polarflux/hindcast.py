"""Hindcasts: the forecast as it would have been made on many past dates, scored against what followed.

What a forecast on a date may see
---------------------------------
Each forecast is given only what existed on its date, cut here before the
forecast is called (the forecast's own ``as_of`` is not relied on):

* a synoptic map once its Carrington rotation has ended: the record's map time is
  the middle of the rotation, so a map counts from its time plus half a rotation
  (27.2753 / 2 days) on;
* a sunspot number once its period has ended: a monthly mean from the first day of
  the next calendar month, a yearly mean from the next first of January (other
  cadences: the time plus one step);
* calibration pairs (polar proxy at a minimum, amplitude of the cycle after it) only
  as the forecast finds them in the cut record and the cut sunspot series. A
  calibration passed in by hand (``calibration=``) is used as given.

Scores
------
Where the outcome is known (the next cycle's maximum of the 13-month smoothed
sunspot number in the whole series, or the amplitudes of a scenario's truth), each
forecast gets its error and relative error, its probability integral transform
(PIT: the fraction of the Monte Carlo sample below the outcome), whether the
outcome lies inside the 68 % and 95 % ranges, and its continuous ranked
probability score (CRPS) of the sample. Summaries by lead (the forecast date minus
the minimum that starts the cycle forecast) give the median absolute relative
error, coverage with its exact binomial 95 % interval (Clopper & Pearson 1934), and
the CRPS skill against climatology: a normal distribution with the mean and
standard deviation of the earlier cycles' amplitudes.

References
----------
Gneiting, T. & Raftery, A. E. 2007, J. Am. Stat. Assoc. 102, 359 (CRPS, its kernel
form for a sample and its closed form for a normal distribution).
Gneiting, T., Balabdaoui, F. & Raftery, A. E. 2007, J. R. Stat. Soc. B 69, 243
(PIT histograms and calibration).
Clopper, C. J. & Pearson, E. S. 1934, Biometrika 26, 404 (binomial intervals).
"""

from __future__ import annotations

import json
import math
import os
import re
from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from pathlib import Path

import numpy as np

from ._version import __version__
from .cutoff import (  # noqa: F401 - re-exported: part of this module's names
    _HOUR_NS,
    ROTATION_DAYS,
    cut_record,
    cut_sunspots,
    map_available,
    sunspot_available,
)
from .errors import PolarfluxError, SettingsError
from .events import find_cycle_extrema, from_decimal_year, to_decimal_year
from .scores import (  # noqa: F401 - re-exported: part of this module's names
    LEAD_EDGES,
    crps_normal,
    crps_sample,
    format_lead_table,
    lead_table,
    summarise,
    summary_line,
)

__all__ = [
    "ROTATION_DAYS",
    "LEAD_EDGES",
    "hindcast",
    "write_hindcast",
    "forecast_dates",
    "cut_record",
    "cut_sunspots",
    "outcomes_from_series",
    "outcomes_from_truth",
    "crps_sample",
    "crps_normal",
    "lead_table",
    "summarise",
    "summary_line",
]

#: A cycle's amplitude joins the climatology this long after its maximum (the series must
#: have passed the maximum before it is known, as ``find_cycle_extrema`` has it).
KNOWN_AFTER_YEARS = 2.0


# --------------------------------------------------------------------------- what a date may see


def _years(values) -> np.ndarray:
    """Decimal years of floats, datetime64 values or ISO date strings."""
    arr = np.atleast_1d(np.asarray(values))
    if arr.dtype.kind in "US" or arr.dtype == object:
        try:
            arr = arr.astype("datetime64[ns]")
        except ValueError:
            arr = arr.astype(np.float64)
    return to_decimal_year(arr)[0]


# --------------------------------------------------------------------------- dates


def _parse_every(every) -> tuple[int, str]:
    if isinstance(every, (int, float)) and not isinstance(every, bool):
        months = float(every) * 12.0
        if months <= 0 or abs(months - round(months)) > 1e-9:
            raise SettingsError(f"every={every!r}: a number is years and must be a whole number of months")
        return int(round(months)), "M"
    match = re.fullmatch(r"\s*(\d+)\s*([MYD])\s*", str(every), flags=re.IGNORECASE)
    if not match or int(match.group(1)) < 1:
        raise SettingsError(f"every={every!r}: expected a step like 3M (months), 1Y (years) or 27D (days)")
    return int(match.group(1)), match.group(2).upper()


def _grid(start: float, end: float, every) -> np.ndarray:
    """Calendar dates from ``start`` to ``end``: first days of months on multiples of N months (3M gives
    January, April, July, October), first days of years, or every N days from ``start``."""
    n, unit = _parse_every(every)
    first, last = from_decimal_year(np.array([start, end]), True)
    if unit == "D":
        step = np.timedelta64(n * 86400, "s").astype("timedelta64[ns]")
        count = int((last - first) // step) + 1
        dates = first + step * np.arange(max(count, 0))
    else:
        months = n * (12 if unit == "Y" else 1)
        m0 = int((first - _HOUR_NS).astype("datetime64[M]").astype(np.int64)) + 1  # first month start >= start
        m0 += (-m0) % months
        m1 = int(last.astype("datetime64[M]").astype(np.int64))
        dates = np.arange(m0, m1 + 1, months).astype("datetime64[M]").astype("datetime64[ns]")
    years = to_decimal_year(dates)[0]
    return years[(years >= start) & (years <= end)]


def _calibration_cycles(t_rec: np.ndarray, t_ssn: np.ndarray, v_ssn: np.ndarray) -> int:
    """Cycles a forecast could calibrate on: minima the record covers, each with the maximum after it known.

    A cheap look-ahead of what the forecast will find (the record's 13-rotation
    running mean needs 9 entries around a minimum); the forecast decides for itself.
    """
    if t_ssn.size < 26 or t_rec.size < 13:
        return 0
    minima, maxima = find_cycle_extrema(t_ssn, v_ssn)
    count = 0
    half = 6.5 * ROTATION_DAYS / 365.25
    for k, m in enumerate(minima.times):
        covered = np.count_nonzero(np.abs(t_rec - m) <= half) >= 9 and t_rec[0] <= m <= t_rec[-1]
        nxt = minima.times[k + 1] if k + 1 < minima.times.size else np.inf
        known = np.any((maxima.times > m) & (maxima.times <= nxt))
        count += bool(covered and known)
    return count


def forecast_dates(record, sunspot_times, sunspot_values, every="3M", start=None, end=None,
                   min_cycles: int = 3, skipped: list | None = None) -> np.ndarray:
    """The default hindcast dates: a calendar grid across the record where enough cycles can calibrate.

    Parameters
    ----------
    record : xarray.Dataset
        The measured record.
    sunspot_times, sunspot_values : array-like
        Decimal years and sunspot numbers.
    every : str or float
        Grid step: ``"3M"`` (months), ``"1Y"`` (years), ``"27D"`` (days), or years as a number.
    start, end : decimal year, datetime64 or ISO date, optional
        Limits (default: the first map's time to the end of the last map's rotation).
    min_cycles : int
        Calibration cycles needed, each judged from what existed on the date only.
    skipped : list, optional
        Receives the grid dates left out (too few calibration cycles by then).

    Returns
    -------
    ndarray
        Decimal years. Nothing here looks at any truth or at data after each date.
    """
    times = record["time"].values.astype("datetime64[ns]")
    times = np.sort(times[~np.isnat(times)])
    if times.size == 0:
        raise SettingsError("the record holds no dated map")
    t_rec = to_decimal_year(times)[0]
    available = to_decimal_year(map_available(times))[0]
    t_ssn = np.asarray(sunspot_times, dtype=np.float64)
    v_ssn = np.asarray(sunspot_values, dtype=np.float64)
    lo = float(t_rec[0]) if start is None else float(_years(start)[0])
    hi = float(available[-1]) if end is None else float(_years(end)[0])
    grid = _grid(lo, hi, every)
    keep = []
    for date in grid:
        ts, vs = cut_sunspots(t_ssn, v_ssn, date)
        keep.append(_calibration_cycles(t_rec[available <= date], ts, vs) >= min_cycles)
    keep = np.array(keep, dtype=bool)
    if skipped is not None and grid.size:
        skipped.extend(float(d) for d in grid[~keep])
    return grid[keep] if grid.size else grid


# --------------------------------------------------------------------------- one forecast


def _date_seed(seed: int, date: float) -> int:
    """A seed per date that does not depend on the order or the worker the forecast runs in."""
    hours = int(round(date * 365.25 * 24.0))
    return int(np.random.SeedSequence([int(seed), hours]).generate_state(1)[0])


def _forecast_at(record, t_ssn, v_ssn, date: float, members: int, seed: int, options: dict) -> dict:
    """One forecast on what existed on ``date``; failures come back as rows with their reason."""
    from .forecast import forecast_from_record

    past = cut_record(record, date)
    ts, vs = cut_sunspots(t_ssn, v_ssn, date)
    row = {"date": float(date), "status": "failed", "reason": "", "maps_used": int(past.sizes["time"]),
           "sunspot_values_used": int(ts.size), "sample": None}
    if past.sizes["time"]:
        row["last_map"] = float(to_decimal_year(past["time"].values.max()[None])[0][0])
    try:
        if past.sizes["time"] == 0:
            raise SettingsError("no map's rotation had ended by this date")
        if ts.size < 2:
            raise SettingsError("no sunspot numbers before this date")
        result = forecast_from_record(past, ts, vs, as_of=float(date), members=members,
                                      seed=_date_seed(seed, date), **options)
    except PolarfluxError as exc:
        row["reason"] = str(exc)
        return row
    except Exception as exc:  # an unexpected failure must not end the batch
        row["reason"] = f"unexpected {type(exc).__name__}: {exc}"
        return row
    amplitude = result["forecast"]["amplitude"]
    row.update({
        "status": "ok",
        "calibration_cycles": len(result["calibration"]["pairs"]),
        **{k: float(amplitude[k]) for k in ("median", "low68", "high68", "low95", "high95")},
        "maximum_time": float(result["forecast"]["maximum_time"]["median"]),
        "forecast_minimum": float(result["projection"]["minimum_time"]["median"]),
        "projection": str(result["projection"]["method"]).split(" from ")[0].split(" (")[0],
        "sample": np.asarray(result["samples"]["amplitude"], dtype=np.float64),
    })
    return row


def _forecast_batch(payload: tuple, dates: Sequence[float]) -> list[dict]:
    record, t_ssn, v_ssn, members, seed, options = payload
    return [_forecast_at(record, t_ssn, v_ssn, d, members, seed, options) for d in dates]


def _pool_batch(args: tuple) -> list[dict]:
    payload, dates = args
    return _forecast_batch(payload, dates)


def _run(payload: tuple, dates: np.ndarray, jobs: int, dask: str | None, progress) -> list[dict]:
    """Forecast every date serially, in a process pool or on a dask.distributed cluster."""
    total = int(dates.size)
    rows: list[dict] = []

    def tick(done_rows):
        rows.extend(done_rows)
        if progress is not None:
            progress(len(rows), total)

    if total == 0:
        return rows
    if dask:
        _run_dask(payload, dates, jobs, dask, tick)
    elif jobs <= 1 or total < 2:
        for d in dates:
            tick(_forecast_batch(payload, [d]))
    else:
        size = max(1, min(8, total // (3 * jobs)))
        batches = [dates[i: i + size] for i in range(0, total, size)]
        with ProcessPoolExecutor(max_workers=int(jobs)) as pool:
            futures = [pool.submit(_pool_batch, (payload, b)) for b in batches]
            for future in as_completed(futures):
                tick(future.result())
    return sorted(rows, key=lambda r: r["date"])


def _run_dask(payload: tuple, dates: np.ndarray, jobs: int, address: str, tick) -> None:
    """Batches of dates as dask tasks; the record and sunspot series travel to each worker once."""
    from ._cluster import dask_client

    with dask_client(address, jobs) as client:
        from dask.distributed import as_completed as dask_completed

        workers = max(1, len(client.scheduler_info().get("workers", {})) or int(jobs))
        size = max(1, min(8, dates.size // (3 * workers) or 1))
        shared = client.scatter(payload, broadcast=True)
        batches = [list(map(float, dates[i: i + size])) for i in range(0, dates.size, size)]
        futures = client.map(_forecast_batch, [shared] * len(batches), batches, pure=False)
        for future in dask_completed(futures):
            tick(future.result())
            future.release()


# --------------------------------------------------------------------------- outcomes


def outcomes_from_series(times, values) -> list[dict]:
    """Cycles of the whole sunspot series: each maximum of the 13-month smoothed number and its minimum.

    Returns one dict per cycle with a minimum before its maximum: ``cycle`` (label),
    ``minimum``, ``maximum_time`` (decimal years) and ``amplitude``.
    """
    minima, maxima = find_cycle_extrema(np.asarray(times, dtype=np.float64), np.asarray(values, dtype=np.float64))
    out = []
    for k, m in enumerate(minima.times):
        after = np.flatnonzero(maxima.times > m)
        nxt = minima.times[k + 1] if k + 1 < minima.times.size else np.inf
        if after.size and maxima.times[after[0]] < nxt:
            i = after[0]
            out.append({"cycle": f"minimum {m:.2f}", "minimum": float(m),
                        "maximum_time": float(maxima.times[i]), "amplitude": float(maxima.values[i])})
    return out


def outcomes_from_truth(truth) -> list[dict]:
    """Cycles of a scenario's truth (``truth.json`` or its dict): amplitude, minimum and maximum in decimal years.

    The minimum is the truth's ``minimum_years`` (else the cycle's start); a maximum
    beyond the scenario (``None``) is taken 4 years after the minimum for choosing
    targets only (common practice: a typical rise time).
    """
    if not isinstance(truth, dict):
        from ._kinds import check_input_file

        path = os.fspath(truth)
        check_input_file(path, "a scenario's truth.json", accept=("json",))
        try:
            with open(path, encoding="utf-8") as handle:
                truth = json.load(handle)
        except OSError as exc:
            raise PolarfluxError(f"{path}: cannot open ({exc.strerror or exc})") from None
        except json.JSONDecodeError as exc:
            raise PolarfluxError(f"{path}: is not JSON ({exc.msg}, line {exc.lineno})") from None
        if "cycles" not in truth or "start" not in truth:
            raise PolarfluxError(f"{path}: is not a scenario truth (needs 'start' and 'cycles')")
    origin = np.datetime64(str(truth["start"]).replace("Z", ""), "ns")

    def year(offset):
        if offset is None:
            return None
        return float(to_decimal_year((origin + np.timedelta64(int(round(offset * 365.25 * 86400e9)), "ns"))[None])
                     [0][0])

    out = []
    entries = list(truth["cycles"]) + ([truth["next_cycle"]] if truth.get("next_cycle") else [])
    for c in entries:
        minimum = year(c.get("minimum_years") if c.get("minimum_years") is not None else c["start_years"])
        peak = year(c.get("maximum_years"))
        out.append({"cycle": f"cycle {c['cycle']}", "minimum": minimum,
                    "maximum_time": peak if peak is not None else minimum + 4.0,
                    "amplitude": float(c["amplitude"])})
    return sorted(out, key=lambda c: c["minimum"])


def _target(date: float, outcomes: list[dict]) -> dict | None:
    """The cycle a forecast on ``date`` is about: the first whose maximum lies after the date."""
    for c in outcomes:
        if c["maximum_time"] > date:
            return c
    return None


# --------------------------------------------------------------------------- scores


def _climatology(date: float, outcomes: list[dict]) -> tuple[float, float, int]:
    """Mean and standard deviation of the amplitudes known on ``date`` (maxima two years past)."""
    known = [c["amplitude"] for c in outcomes if c["maximum_time"] + KNOWN_AFTER_YEARS <= date]
    if len(known) < 2:
        return math.nan, math.nan, len(known)
    return float(np.mean(known)), float(np.std(known, ddof=1)), len(known)


def _score(row: dict, target: dict | None, climate: tuple[float, float, int]) -> dict:
    out = {"cycle": "", "outcome": math.nan, "outcome_minimum": math.nan, "outcome_maximum": math.nan,
           "lead": math.nan, "error": math.nan, "relative_error": math.nan, "pit": math.nan,
           "inside68": math.nan, "inside95": math.nan, "crps": math.nan,
           "climatology_mean": climate[0], "climatology_sd": climate[1], "climatology_cycles": climate[2],
           "crps_climatology": math.nan}
    if target is None:
        return out
    y = target["amplitude"]
    out.update(cycle=target["cycle"], outcome=y, outcome_minimum=target["minimum"],
               outcome_maximum=target["maximum_time"], lead=row["date"] - target["minimum"])
    out["crps_climatology"] = float(crps_normal(climate[0], climate[1], y))
    if row["status"] != "ok":
        return out
    sample = row["sample"]
    out.update(error=row["median"] - y, relative_error=(row["median"] - y) / y,
               pit=float(np.mean(sample < y) + 0.5 * np.mean(sample == y)),
               inside68=float(row["low68"] <= y <= row["high68"]),
               inside95=float(row["low95"] <= y <= row["high95"]),
               crps=crps_sample(sample, y))
    return out


# --------------------------------------------------------------------------- the batch


_NUMERIC = ("maps_used", "sunspot_values_used", "last_map", "calibration_cycles", "median", "low68", "high68",
            "low95", "high95", "maximum_time", "forecast_minimum", "outcome", "outcome_minimum", "outcome_maximum",
            "lead", "error", "relative_error", "pit", "inside68", "inside95", "crps", "climatology_mean",
            "climatology_sd", "climatology_cycles", "crps_climatology")
_TEXT = ("status", "reason", "projection", "cycle")
_UNITS = {"date": "year", "last_map": "year", "maximum_time": "year", "forecast_minimum": "year",
          "outcome_minimum": "year", "outcome_maximum": "year", "lead": "year",
          **{k: "sunspot number" for k in ("median", "low68", "high68", "low95", "high95", "outcome", "error",
                                            "crps", "climatology_mean", "climatology_sd", "crps_climatology")}}


def hindcast(record, sunspots, dates=None, *, every="3M", start=None, end=None, jobs: int = 1,
             dask: str | None = None, members: int = 200, seed: int = 0, truth=None,
             progress: Callable[[int, int], None] | None = None, **forecast_options):
    """Forecasts as of many dates, each on what existed then, scored where the outcome is known.

    Parameters
    ----------
    record : xarray.Dataset
        The measured record (:func:`polarflux.measure_archive` or :func:`polarflux.read_record`).
    sunspots : (times, values) or path
        Decimal years and sunspot numbers, or a CSV for :func:`polarflux.read_sunspots`.
    dates : array-like, optional
        Forecast dates (decimal years, datetime64 or ISO dates). By default a calendar
        grid (:func:`forecast_dates`) across the record wherever three calibration
        cycles exist by the date; never taken from a truth.
    every, start, end
        The default grid's step (``"3M"``, ``"1Y"``, ``"27D"``) and limits.
    jobs : int
        Worker processes (a process pool when above 1).
    dask : str, optional
        ``"local"`` (a LocalCluster of ``jobs`` workers) or a dask.distributed scheduler address.
    members, seed : int
        Monte Carlo members of each forecast; base seed (each date draws its own seed from it).
    truth : dict or path, optional
        A scenario's truth (``truth.json``): outcomes from it instead of the sunspot series.
    progress : callable, optional
        ``progress(done, total)`` after each finished forecast.
    **forecast_options
        Passed to :func:`polarflux.forecast.forecast_from_record` (``proxy``, ``viewing``,
        ``bases``, ``calibration``, ``regions``).

    Returns
    -------
    xarray.Dataset
        Dim ``date`` (decimal years), one entry per forecast: its status and failure reason,
        what it saw, the amplitude median and 68/95 % ranges, the outcome, lead and scores
        (see the module notes), and the Monte Carlo sample ``amplitude_sample(date, member)``.
    """
    import xarray as xr

    from .events import read_sunspots

    if int(jobs) < 1:
        raise SettingsError(f"jobs={jobs} must be at least 1")
    if int(members) < 10:
        raise SettingsError(f"members={members} must be at least 10")
    source = "sunspot series"
    if isinstance(sunspots, (str, os.PathLike)):
        source = os.fspath(sunspots)
        t_ssn, v_ssn = read_sunspots(sunspots)
    else:
        t_ssn, v_ssn = (np.asarray(a, dtype=np.float64) for a in sunspots)
    # the outcomes first: a truth file that cannot be read fails before the long run, not after it
    outcomes = outcomes_from_truth(truth) if truth is not None else outcomes_from_series(t_ssn, v_ssn)
    skipped: list[float] = []
    if dates is None:
        dates = forecast_dates(record, t_ssn, v_ssn, every=every, start=start, end=end, skipped=skipped)
        if dates.size == 0:
            raise SettingsError(f"no forecast date every {every}: on no date between the limits do the record and "
                                f"{source} hold three cycles to calibrate on (a minimum the record covers, "
                                "with the maximum after it known)")
    else:
        dates = np.unique(_years(dates))
        if not np.all(np.isfinite(dates)):
            raise SettingsError("forecast dates must be finite")
    payload = (record, t_ssn, v_ssn, int(members), int(seed), dict(forecast_options))
    rows = _run(payload, np.asarray(dates, dtype=np.float64), int(jobs), dask, progress)
    n = len(rows)
    data = {k: np.full(n, np.nan) for k in _NUMERIC}
    text = {k: [""] * n for k in _TEXT}
    sample = np.full((n, int(members)), np.nan)
    for i, row in enumerate(rows):
        row.update(_score(row, _target(row["date"], outcomes), _climatology(row["date"], outcomes)))
        for k in _NUMERIC:
            value = row.get(k)
            data[k][i] = math.nan if value is None else value
        for k in _TEXT:
            text[k][i] = str(row.get(k) or "")
        if row["sample"] is not None:
            sample[i, : row["sample"].size] = row["sample"][: int(members)]
    date_values = np.array([r["date"] for r in rows], dtype=np.float64)
    utc = from_decimal_year(date_values, True) + _HOUR_NS
    variables = {k: (("date",), data[k], {"units": _UNITS[k]} if k in _UNITS else {}) for k in _NUMERIC}
    variables.update({k: (("date",), np.array(v, dtype=str)) for k, v in text.items()})
    variables["date_utc"] = (("date",), np.array([str(d)[:10] for d in utc.astype("datetime64[D]")], dtype=str))
    variables["amplitude_sample"] = (("date", "member"), sample, {"units": "sunspot number"})
    return xr.Dataset(variables, coords={"date": ("date", date_values, {"units": "year (decimal)"})}, attrs={
        "title": "hindcast: forecasts as of past dates, scored against what followed",
        "outcome_source": "truth" if truth is not None else f"13-month smoothed maxima of {source}",
        "sunspots": source, "members": int(members), "seed": int(seed),
        "forecast_options": json.dumps({k: (v if isinstance(v, (str, int, float, bool)) else repr(v))
                                        for k, v in forecast_options.items()}),
        "created_by": f"polarflux {__version__}",
        # grid dates left out: fewer than three cycles to calibrate on had existed by then
        "dates_skipped": ", ".join(str(d)[:10] for d in from_decimal_year(np.array(skipped, dtype=np.float64), True)
                                   .astype("datetime64[D]")) if skipped else "",
    })


# --------------------------------------------------------------------------- outputs


def write_hindcast(result, prefix, force: bool = False, caption: str | None = None) -> list[Path]:
    """Write the table of every forecast (CSV), the table by lead (CSV) and the figures.

    Files: ``PREFIX_hindcast.csv`` (columns :data:`polarflux._hindcast_plots.CSV_COLUMNS`),
    ``PREFIX_hindcast_leads.csv``, ``PREFIX_hindcast_pit.png``, ``PREFIX_hindcast_error_lead.png``
    and ``PREFIX_hindcast_<cycle>.png`` per cycle forecast. Every output is checked before
    any is written; each is written atomically and an existing one is replaced only with ``force``.

    Returns
    -------
    list of Path
        The files written.

    Raises
    ------
    OutputExistsError
        When an output exists and ``force`` is False (nothing is written then).
    """
    from ._hindcast_plots import write_outputs

    return write_outputs(result, prefix, force=force, caption=caption)
