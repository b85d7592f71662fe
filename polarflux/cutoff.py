"""What existed on a date: the maps and sunspot values a forecast made then may see.

* A synoptic map once its Carrington rotation has ended: the record's map time is the
  middle of the rotation, so a map counts from its time plus half a rotation
  (27.2753 / 2 days) on.
* A sunspot number once its period has ended: a monthly mean from the first day of the
  next calendar month, a yearly mean from the next first of January (other cadences:
  the time plus one step).

A record cut at a date has its temporal fill made again from the maps it keeps
(:func:`polarflux.fill.refill`), so no later map enters through the fill.
"""

from __future__ import annotations

import numpy as np

from .fill import refill
from .timeseries import from_decimal_year, to_decimal_year

__all__ = ["ROTATION_DAYS", "map_available", "cut_record", "sunspot_available", "cut_sunspots", "data_end"]

#: Mean synodic Carrington rotation period, days.
ROTATION_DAYS = 27.2753
_HOUR_NS = np.timedelta64(3600 * 10**9, "ns")


def map_available(times) -> np.ndarray:
    """When each map becomes available: its mid-rotation time plus half a rotation (datetime64[ns])."""
    half = np.timedelta64(int(round(0.5 * ROTATION_DAYS * 86400e9)), "ns")
    return np.asarray(times).astype("datetime64[ns]") + half


def cut_record(record, date: float):
    """The record entries whose rotation had ended on ``date`` (decimal year), their fill made from them alone."""
    date_ns = from_decimal_year(np.array([date]), True)[0]
    keep = np.flatnonzero(map_available(record["time"].values) <= date_ns)
    return refill(record.isel(time=keep))  # a temporal fill from the maps that existed then


def sunspot_available(times) -> np.ndarray:
    """Decimal year at which each sunspot value's period has ended.

    Monthly series (median step under two months): the first day of the next
    calendar month. Yearly series (median step 0.9 to 1.1 years): the next first of
    January. Any other cadence: the time plus one median step.
    """
    t = np.asarray(times, dtype=np.float64)
    if t.size < 2:
        return t.copy()
    step = float(np.median(np.diff(t)))
    # an hour's margin: a first-of-month date must not round into the month before
    moments = from_decimal_year(t, True) + _HOUR_NS
    if step < 2.0 / 12.0:
        ends = (moments.astype("datetime64[M]") + 1).astype("datetime64[ns]")
    elif 0.9 <= step <= 1.1:
        ends = (moments.astype("datetime64[Y]") + 1).astype("datetime64[ns]")
    else:
        return t + step
    return to_decimal_year(ends)[0]


def cut_sunspots(times, values, date: float) -> tuple[np.ndarray, np.ndarray]:
    """The sunspot values whose month (or year) had ended on ``date``."""
    t = np.asarray(times, dtype=np.float64)
    v = np.asarray(values, dtype=np.float64)
    keep = sunspot_available(t) <= date
    return t[keep], v[keep]




def data_end(record, sunspot_times) -> float:
    """Decimal year by which the last map and the last sunspot value both exist (the latest "now")."""
    ends = []
    if record.sizes.get("time", 0):
        times = record["time"].values.astype("datetime64[ns]")
        times = times[~np.isnat(times)]
        if times.size:
            ends.append(float(to_decimal_year(map_available(times[-1:]))[0][0]))
    t = np.asarray(sunspot_times, dtype=np.float64)
    if t.size:
        ends.append(float(sunspot_available(t)[-1]))
    return max(ends) if ends else float("nan")
