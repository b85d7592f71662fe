"""Events of the record: smoothing, cycle minima and maxima, polar reversals.

Times inside this module are decimal years (2054.5 is the middle of 2054); the
public functions accept decimal years or ``numpy.datetime64`` values and return
the same kind they were given.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from .calibration import merge_instruments
from .errors import SettingsError
from .sunspots import read_sunspots
from .timeseries import (
    RECORD_MIN_COUNT,
    from_decimal_year,
    running_mean,
    smooth_13_month,
    to_decimal_year,
)

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


#: Near the end of a series a minimum is declared only after the smoothed series has risen from
#: it for this long (years) ...
CONFIRM_YEARS = 0.5
#: ... and by this fraction of the series' highest smoothed value.
CONFIRM_RISE = 0.05


def find_cycle_extrema(times, values, min_separation_years: float = 7.0) -> CycleExtrema:
    """Solar-cycle minima and maxima of a sunspot-number series (monthly or yearly).

    Monthly series (steps under two months) are smoothed with
    :func:`smooth_13_month` first; yearly series are used as they are (each
    value already averages a year). A minimum is the lowest smoothed value within
    ``min_separation_years`` / 2 either side; minima closer than
    ``min_separation_years`` keep the lower. Within half a separation of the end
    of the series a low point counts only once the smoothed series has risen from
    it for :data:`CONFIRM_YEARS` (for yearly values: one year) and by
    :data:`CONFIRM_RISE` of its highest value, so the decline of a cycle is never
    taken for its minimum; only data up to the series' end are used. The first
    value of a series counts only if it is under a tenth of the highest value
    within one separation after it. Between
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
    peak_all = float(np.max(smooth[usable])) if usable.size else 0.0
    confirm = max(CONFIRM_YEARS, cadence * 0.99)
    for i in usable:
        window = (t >= t[i] - half) & (t <= t[i] + half) & np.isfinite(smooth)
        if smooth[i] > np.min(smooth[window]):
            continue
        if t[usable[-1]] - t[i] < half:
            # The window runs past the end of the series: the low point is a minimum only once the
            # series has risen from it (common practice: a minimum is confirmed months after it,
            # once the new cycle's activity grows); until then it may be the old cycle's decline.
            later = t[usable[-1]] - t[i]
            if later < confirm or smooth[usable[-1]] - smooth[i] < CONFIRM_RISE * peak_all:
                continue
        elif t[i] - t[usable[0]] < cadence * 0.99:
            # The first value: a minimum only if deep, under a tenth of the activity within a
            # cycle-length after it (so a series that starts in a decline does not begin with one).
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


# --------------------------------------------------------------------------- reversals


@dataclass(frozen=True)
class Reversal:
    """A polar reversal: the sign change of the smoothed signed polar flux.

    ``time`` is the middle of the first and last crossings of zero of the smoothed
    series within ``merge_years`` of each other (``crossings`` counts them), each
    crossing refined by a local quadratic (see :func:`find_reversals`);
    ``earliest`` to ``latest`` is the window in which single maps show either sign
    (see :func:`find_reversals`). ``new_sign`` is the sign afterwards.
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


def _refine_crossing(t: np.ndarray, y: np.ndarray, crossing: float, half_width: float) -> float:
    """The zero nearest ``crossing`` of a quadratic fitted to the unsmoothed ``y`` within ``half_width`` of it.

    A running mean moves the zero of a curved series (by about c w^2 / (12 b) for
    y = b (t - t0) + c (t - t0)^2 and a window of w years); a local quadratic over the
    same span does not (local polynomial smoothing, as Savitzky & Golay 1964). Kept as
    it is where fewer than 5 values lie in the span or the quadratic has no zero in it.
    """
    near = (np.abs(t - crossing) <= half_width) & np.isfinite(y) & np.isfinite(t)
    if near.sum() < 5:
        return crossing
    x = t[near] - crossing
    scale = float(np.max(np.abs(y[near]))) or 1.0
    roots = np.roots(np.polyfit(x, y[near] / scale, 2))
    roots = roots[np.isreal(roots)].real
    roots = roots[np.abs(roots) <= half_width]
    return float(crossing + roots[np.argmin(np.abs(roots))]) if roots.size else crossing


def find_reversals(record, variable: str = "signed_flux", smoothing: int = 13, merge_years: float = 2.0,
                   window_years: float = 1.0):
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
        Crossings of the smoothed series closer than this are one reversal.
    window_years : float
        The reversal's window (``earliest`` to ``latest``) spans its smoothed
        crossings and every sign change of the single maps' values within this
        many years of them: the time in which the cap shows either sign.

    Each crossing of the running mean is then refined to the zero of a quadratic
    fitted to the unsmoothed values over the same span (:func:`_refine_crossing`):
    the running mean alone moved the reversals of the invented worlds' noise-free
    records by up to 0.13 yr where the polar field curves through zero, the
    refinement by at most 0.03 yr (``bench/polar_accuracy.py --noise-scale 0``).

    Returns
    -------
    dict
        ``{"north": [Reversal, ...], "south": [...]}``, times in decimal years.
    """
    instruments = {str(x) for x in record["instrument"].values} if "instrument" in record else set()
    if len(instruments) > 1:  # several instruments: bring them onto one scale first
        record = merge_instruments(record)
    t, _ = to_decimal_year(record["time"].values)
    step = float(np.median(np.diff(t))) if t.size > 1 else 0.0
    half_width = 0.5 * smoothing * step
    out = {}
    for hemisphere in ("north", "south"):
        values = record[variable].sel(hemisphere=hemisphere).values
        y = running_mean(values, smoothing, min(smoothing, RECORD_MIN_COUNT))
        crossings = sorted((_refine_crossing(t, values, c, half_width), sign) for c, sign in _crossings(t, y))
        groups: list[list[tuple[float, int]]] = []
        for crossing in crossings:
            if groups and crossing[0] - groups[-1][-1][0] < merge_years:
                groups[-1].append(crossing)
            else:
                groups.append([crossing])
        raw = [c[0] for c in _crossings(t, values)]
        reversals = []
        for g in groups:
            if len(g) % 2 == 0:
                continue  # crossed and crossed back: no lasting change of sign
            first, last = g[0][0], g[-1][0]
            # the window: where the single maps already (or still) show either sign
            near = [c for c in raw if first - window_years <= c <= last + window_years]
            earliest, latest = min([first, *near]), max([last, *near])
            reversals.append(Reversal(hemisphere, 0.5 * (first + last), earliest, latest, len(g), g[-1][1]))
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
        "fill": str(record.attrs.get("fill", "")),
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
            if not np.isfinite(north) and not np.isfinite(south):
                continue  # the smoothed record does not reach this minimum (its first or last half-year)
            asym = (abs(north) - abs(south)) / (abs(north) + abs(south)) if np.isfinite(north + south) else math.nan
            entry = {"time": float(when), "north": north, "south": south,
                     "axial_dipole": _interp(when, t, dipole), "asymmetry": asym}
            if "fill_error" in record:  # the fill's uncertainty of the smoothed value: the maps' mean
                for j, h in enumerate(("north", "south")):
                    error = running_mean(record["fill_error"].values[:, j], smoothing, need)
                    entry[f"{h}_fill_error"] = _interp(when, t, error)
            out["at_minima"].append(entry)
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
