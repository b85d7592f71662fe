"""Events of the record: smoothing, cycle minima and maxima, polar reversals.

Times inside this module are decimal years (2054.5 is the middle of 2054); the
public functions accept decimal years or ``numpy.datetime64`` values and return
the same kind they were given.
"""

from __future__ import annotations

import csv
import math
import os
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from .errors import PolarfluxError, SettingsError

__all__ = [
    "smooth_13_month",
    "running_mean",
    "find_cycle_extrema",
    "find_reversals",
    "read_sunspots",
    "Extrema",
    "CycleExtrema",
    "Reversal",
    "to_decimal_year",
    "from_decimal_year",
    "record_events",
]

_WEIGHTS_13 = np.array([0.5] + [1.0] * 11 + [0.5]) / 12.0


def smooth_13_month(values) -> np.ndarray:
    """The 13-month running mean with half weights at both ends (the trade's standard smoothing).

    S_i = (x_{i-6} / 2 + x_{i-5} + ... + x_{i+5} + x_{i+6} / 2) / 12 for a monthly
    series. Where the 13-month window is incomplete (the first and last six
    months) or holds a missing value, the result is NaN: gaps stay gaps.
    """
    x = np.asarray(values, dtype=np.float64)
    out = np.full(x.shape, np.nan)
    if x.size < 13:
        return out
    filled = np.where(np.isnan(x), 0.0, x)
    smooth = np.convolve(filled, _WEIGHTS_13, mode="valid")
    holes = np.convolve(np.isnan(x).astype(float), np.ones(13), mode="valid") > 0
    smooth[holes] = np.nan
    out[6:-6] = smooth
    return out


def running_mean(values, n: int, min_count: int | None = None) -> np.ndarray:
    """Centred running mean over ``n`` samples (odd n) of the finite values in each window.

    A window needs at least ``min_count`` finite values (default: all ``n``);
    otherwise, and where the window runs past either end, the result is NaN.
    Missing values are never taken as zeros.
    """
    n = int(n)
    if n < 1 or n % 2 == 0:
        raise SettingsError(f"running mean length {n} must be a positive odd number")
    need = n if min_count is None else int(min_count)
    if not 1 <= need <= n:
        raise SettingsError(f"min_count={min_count} must lie between 1 and {n}")
    x = np.asarray(values, dtype=np.float64)
    out = np.full(x.shape, np.nan)
    if x.size < n:
        return out
    half = n // 2
    finite = np.isfinite(x)
    sums = np.convolve(np.where(finite, x, 0.0), np.ones(n), mode="valid")
    counts = np.convolve(finite.astype(float), np.ones(n), mode="valid")
    mean = np.divide(sums, counts, out=np.full(sums.shape, np.nan), where=counts >= need)
    out[half: x.size - half] = mean
    return out


#: Entries a 13-rotation running mean of the record needs: two thirds of the window,
#: so that a missing rotation or two do not open a gap a year wide.
RECORD_MIN_COUNT = 9


# --------------------------------------------------------------------------- times


def to_decimal_year(times) -> tuple[np.ndarray, bool]:
    """Decimal years of ``times`` (floats or datetime64); the flag says they were datetimes."""
    arr = np.asarray(times)
    if np.issubdtype(arr.dtype, np.datetime64):
        ns = arr.astype("datetime64[ns]")
        years = ns.astype("datetime64[Y]")
        start = years.astype("datetime64[ns]")
        end = (years + 1).astype("datetime64[ns]")
        fraction = (ns - start).astype(np.float64) / (end - start).astype(np.float64)
        out = years.astype(np.int64) + 1970 + fraction
        out[np.isnat(ns)] = np.nan
        return out.astype(np.float64), True
    return arr.astype(np.float64), False


def from_decimal_year(years, as_datetime: bool):
    years = np.asarray(years, dtype=np.float64)
    if not as_datetime:
        return years
    whole = np.floor(years)
    start = (whole - 1970).astype(np.int64).astype("datetime64[Y]").astype("datetime64[ns]")
    end = (whole - 1970 + 1).astype(np.int64).astype("datetime64[Y]").astype("datetime64[ns]")
    span = (end - start).astype(np.float64)
    return start + ((years - whole) * span).astype(np.int64).astype("timedelta64[ns]")


# --------------------------------------------------------------------------- cycles


class Extrema(NamedTuple):
    times: np.ndarray
    values: np.ndarray


class CycleExtrema(NamedTuple):
    """Minima and maxima of a sunspot series; unpack as ``minima, maxima = ...``."""

    minima: Extrema
    maxima: Extrema


def _cadence_years(t: np.ndarray) -> float:
    steps = np.diff(t)
    if steps.size == 0 or np.any(steps <= 0):
        raise SettingsError("times must be strictly increasing")
    return float(np.median(steps))


def find_cycle_extrema(times, values, min_separation_years: float = 7.0) -> CycleExtrema:
    """Solar-cycle minima and maxima of a sunspot-number series (monthly or yearly).

    Monthly series (steps under two months) are smoothed with
    :func:`smooth_13_month` first; yearly series are used as they are (each
    value already averages a year). A minimum is the lowest smoothed value within
    ``min_separation_years`` / 2 either side; minima closer than
    ``min_separation_years`` keep the lower. At either end of the series a low
    point counts only if it is under a tenth of the highest value within one
    separation of it (so a declining phase is not taken for a minimum). Between
    consecutive minima the maximum is the highest smoothed value; after the last
    minimum, the highest value counts as a maximum once the series is two years
    past it and below half of it. Values are those of the smoothed series.

    Returns
    -------
    CycleExtrema
        ``minima`` and ``maxima``, each ``(times, values)``, times in the kind given.
    """
    t, as_datetime = to_decimal_year(times)
    x = np.asarray(values, dtype=np.float64)
    if t.shape != x.shape or t.ndim != 1:
        raise SettingsError(f"times and values must be 1-D and of the same length ({t.shape} vs {x.shape})")
    cadence = _cadence_years(t)
    smooth = smooth_13_month(x) if cadence < 2.0 / 12.0 else x.copy()
    half = 0.5 * min_separation_years
    usable = np.flatnonzero(np.isfinite(smooth))
    candidates = []
    for i in usable:
        window = (t >= t[i] - half) & (t <= t[i] + half) & np.isfinite(smooth)
        if smooth[i] > np.min(smooth[window]):
            continue
        inner = (t[i] - t[usable[0]] >= cadence * 0.99) and (t[usable[-1]] - t[i] >= cadence * 0.99)
        if not inner:
            # At either end of the series a low point is a minimum only if it is deep:
            # under a tenth of the activity within a cycle-length on the inner side.
            near = (np.abs(t - t[i]) <= min_separation_years) & np.isfinite(smooth)
            if smooth[i] > 0.1 * np.max(smooth[near]):
                continue
        candidates.append(i)
    minima: list[int] = []
    for i in sorted(candidates, key=lambda k: smooth[k]):
        if all(abs(t[i] - t[j]) >= min_separation_years for j in minima):
            minima.append(i)
    minima.sort()
    maxima = []
    for a, b in zip(minima[:-1], minima[1:], strict=True):
        segment = np.arange(a, b + 1)
        segment = segment[np.isfinite(smooth[segment])]
        maxima.append(int(segment[np.argmax(smooth[segment])]))
    if minima:
        # after the last minimum: a maximum that the series has clearly left behind
        # (two years later and below half of it) is known already
        tail = np.arange(minima[-1], x.size)
        tail = tail[np.isfinite(smooth[tail])]
        if tail.size:
            peak = int(tail[np.argmax(smooth[tail])])
            after = tail[tail > peak]
            if after.size and t[after[-1]] - t[peak] >= 2.0 and smooth[after[-1]] < 0.5 * smooth[peak]:
                maxima.append(peak)
    mins = Extrema(from_decimal_year(t[minima], as_datetime), smooth[minima])
    maxs = Extrema(from_decimal_year(t[maxima], as_datetime), smooth[maxima])
    return CycleExtrema(mins, maxs)


def read_sunspots(path: str | os.PathLike) -> tuple[np.ndarray, np.ndarray]:
    """Read a sunspot-number series from CSV.

    Columns (a header row is required): ``date`` (ISO date, ``YYYY-MM-DD`` or
    ``YYYY-MM``) or ``year`` (decimal year), and ``sunspot_number``. Monthly or
    yearly rows, in increasing time. Empty ``sunspot_number`` cells are gaps.

    Returns decimal years and values. Raises PolarfluxError naming the file and the
    line for missing columns, non-numeric values or times out of order.
    """
    source = os.fspath(path)
    try:
        handle = open(source, newline="", encoding="utf-8")
    except OSError as exc:
        raise PolarfluxError(f"{source}: cannot open ({exc.strerror or exc})") from None
    with handle:
        reader = csv.DictReader(handle)
        fields = [f.strip().lower() for f in (reader.fieldnames or [])]
        reader.fieldnames = fields
        if "sunspot_number" not in fields or not ({"date", "year"} & set(fields)):
            raise PolarfluxError(
                f"{source}: needs columns 'date' (or 'year') and 'sunspot_number'; found {', '.join(fields) or 'none'}"
            )
        times, values = [], []
        for line, row in enumerate(reader, start=2):
            try:
                if "date" in fields and row.get("date"):
                    times.append(float(to_decimal_year(np.array([np.datetime64(row["date"].strip(), "D")]))[0][0]))
                else:
                    times.append(float(row["year"]))
            except (ValueError, TypeError):
                raise PolarfluxError(f"{source}: line {line}: time {row.get('date') or row.get('year')!r} "
                                     "is not a date or a year") from None
            text = (row.get("sunspot_number") or "").strip()
            try:
                values.append(float(text) if text else math.nan)
            except ValueError:
                raise PolarfluxError(f"{source}: line {line}: sunspot_number {text!r} is not a number") from None
    t = np.array(times)
    if t.size < 2:
        raise PolarfluxError(f"{source}: needs at least two rows")
    bad = np.flatnonzero(np.diff(t) <= 0)
    if bad.size:
        raise PolarfluxError(f"{source}: line {bad[0] + 3}: times must increase (row {bad[0] + 3} is not after "
                             "the row before it)")
    return t, np.array(values)


# --------------------------------------------------------------------------- reversals


@dataclass(frozen=True)
class Reversal:
    """A polar reversal: the sign change of the smoothed signed polar flux.

    ``time`` is the middle of the window from the first to the last crossing of
    zero within ``merge_years`` of each other; a single crossing has a window of
    zero width (plus the sampling interval). ``new_sign`` is the sign afterwards.
    """

    hemisphere: str
    time: float
    earliest: float
    latest: float
    crossings: int
    new_sign: int


def _crossings(t: np.ndarray, y: np.ndarray) -> list[tuple[float, int]]:
    good = np.flatnonzero(np.isfinite(y))
    out = []
    for a, b in zip(good[:-1], good[1:], strict=True):
        if y[a] == 0.0:
            continue
        if np.sign(y[a]) != np.sign(y[b]) and y[b] != 0.0:
            crossing = t[a] + (t[b] - t[a]) * y[a] / (y[a] - y[b])
            out.append((float(crossing), int(np.sign(y[b]))))
    return out


def find_reversals(record, variable: str = "signed_flux", smoothing: int = 13, merge_years: float = 2.0):
    """Polar reversals per hemisphere of a record: where the smoothed polar flux changes sign.

    Parameters
    ----------
    record : xarray.Dataset
        A record with ``variable`` (time, hemisphere). A record of several
        instruments is first brought onto one scale with
        :func:`polarflux.calibration.merge_instruments` (default settings).
    variable : str
        "signed_flux" or "mean_field" (or a corrected version of either).
    smoothing : int
        Running mean over this many entries (13 rotations, about a year, which also
        averages out the yearly viewing wobble).
    merge_years : float
        Crossings closer than this are one reversal with an uncertainty window.

    Returns
    -------
    dict
        ``{"north": [Reversal, ...], "south": [...]}``, times in decimal years.
    """
    instruments = {str(x) for x in record["instrument"].values} if "instrument" in record else set()
    if len(instruments) > 1:  # several instruments: bring them onto one scale first
        from .calibration import merge_instruments

        record = merge_instruments(record)
    t, _ = to_decimal_year(record["time"].values)
    out = {}
    for hemisphere in ("north", "south"):
        y = running_mean(record[variable].sel(hemisphere=hemisphere).values, smoothing,
                         min(smoothing, RECORD_MIN_COUNT))
        crossings = _crossings(t, y)
        groups: list[list[tuple[float, int]]] = []
        for crossing in crossings:
            if groups and crossing[0] - groups[-1][-1][0] < merge_years:
                groups[-1].append(crossing)
            else:
                groups.append([crossing])
        reversals = []
        for g in groups:
            if len(g) % 2 == 0:
                continue  # crossed and crossed back: no lasting change of sign
            first, last = g[0][0], g[-1][0]
            reversals.append(Reversal(hemisphere, 0.5 * (first + last), first, last, len(g), g[-1][1]))
        out[hemisphere] = reversals
    return out


# --------------------------------------------------------------------------- the events of a record


def record_events(record, sunspot_times=None, sunspot_values=None, variable: str = "mean_field_corrected",
                  smoothing: int = 13) -> dict:
    """Reversals, minima and maxima, and the polar fields at each minimum, as plain data.

    Parameters
    ----------
    record : xarray.Dataset
        A merged record (:func:`polarflux.calibration.merge_instruments`) or any
        record of one instrument holding ``variable`` and ``axial_dipole``.
    sunspot_times, sunspot_values : array-like, optional
        A sunspot-number series (decimal years): its minima and maxima are found
        with :func:`find_cycle_extrema`, and the polar fields read at each minimum.
    variable : str
        The polar measure to read (default: the viewing-corrected mean field).

    Returns
    -------
    dict
        ``reversals`` (per hemisphere, decimal years with windows), ``reversal_lags``
        (south minus north, years), ``minima`` and ``maxima`` (times, values), and
        ``at_minima``: for each minimum the smoothed north and south polar fields,
        the axial dipole, and the north-south asymmetry (|N| - |S|) / (|N| + |S|).
    """
    flux_variable = variable.replace("mean_field", "signed_flux")
    if flux_variable not in record:
        flux_variable = variable
    reversals = find_reversals(record, flux_variable, smoothing=smoothing)
    t, _ = to_decimal_year(record["time"].values)
    need = min(smoothing, RECORD_MIN_COUNT)
    smooth = {h: running_mean(record[variable].sel(hemisphere=h).values, smoothing, need)
              for h in ("north", "south")}
    dipole = running_mean(record["axial_dipole"].values, smoothing, need)
    out = {
        "variable": variable,
        "smoothing_entries": smoothing,
        "reversals": {h: [vars(r) for r in rs] for h, rs in reversals.items()},
        "reversal_lags": _lags(reversals),
        "minima": [],
        "maxima": [],
        "at_minima": [],
    }
    if sunspot_times is not None:
        minima, maxima = find_cycle_extrema(sunspot_times, sunspot_values)
        out["minima"] = [{"time": float(a), "sunspot_number": float(b)} for a, b in zip(*minima, strict=True)]
        out["maxima"] = [{"time": float(a), "sunspot_number": float(b)} for a, b in zip(*maxima, strict=True)]
        for when in minima.times:
            if not (t[0] <= when <= t[-1]):
                continue
            north = _interp(when, t, smooth["north"])
            south = _interp(when, t, smooth["south"])
            asym = (abs(north) - abs(south)) / (abs(north) + abs(south)) if np.isfinite(north + south) else math.nan
            out["at_minima"].append({"time": float(when), "north": north, "south": south,
                                     "axial_dipole": _interp(when, t, dipole), "asymmetry": asym})
    return out


def _interp(when: float, t: np.ndarray, y: np.ndarray) -> float:
    good = np.isfinite(y)
    if good.sum() < 2 or when < t[good][0] or when > t[good][-1]:
        return math.nan
    return float(np.interp(when, t[good], y[good]))


def _lags(reversals: dict) -> list[dict]:
    """Pair each northern reversal with the nearest southern one (within 3 years): lag = south - north."""
    lags = []
    for n in reversals["north"]:
        near = [s for s in reversals["south"] if abs(s.time - n.time) < 3.0]
        if near:
            s = min(near, key=lambda r: abs(r.time - n.time))
            lags.append({"north": n.time, "south": s.time, "lag_years": s.time - n.time})
    return lags
