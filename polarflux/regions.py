"""A cycle minimum confirmed by its new regions, before the sunspot series can confirm it.

The smoothed sunspot series confirms a minimum only about a year after it (half the 13-month
window, then a sustained rise: :data:`polarflux.events.CONFIRM_YEARS`). Where the user keeps a
list of active regions with their latitudes and leading polarities, the new cycle shows itself
sooner: its regions emerge at high latitude with the leading polarity reversed (Hale's law), and
the minimum is about when they come to outnumber the old cycle's (Harvey & White 1999, J. Geophys.
Res. 104, 19759; Hathaway 2015, Living Rev. Sol. Phys. 12, 4: from memory). This module counts both kinds in
a sliding half-year window and dates the minimum at the centre of the first window in which the
new cycle's regions outnumber the old's, once the two windows after it (a month apart, both ended by
the forecast date) agree.

Regions file (CSV): a time column ``date`` (YYYY-MM-DD) or ``year`` (decimal year), ``latitude``
(degrees, north positive), and the leading polarity as ``leading_polarity`` (+1 or -1) or as the
sign of ``flux_mx`` (the leading spot's signed flux). Other columns are ignored.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np

from .errors import PolarfluxError

__all__ = ["Regions", "read_regions", "RegionMinimum", "region_crossing", "minimum_from_regions",
           "NEW_CYCLE_LATITUDE", "WINDOW_YEARS"]

#: New-cycle regions counted only at or above this |latitude| (degrees): the new cycle starts near
#: 25-30 degrees while the old one ends below 15 (common practice; from memory), so an old
#: region with the wrong (anti-Hale) leading polarity is not taken for a new one.
NEW_CYCLE_LATITUDE = 20.0
#: The counting window (years).
WINDOW_YEARS = 0.5
#: At least this many new-cycle regions in the window before the crossing counts.
MIN_NEW = 5
#: Windows that must agree after the first, a month apart, before the minimum is confirmed.
AGREE_MONTHS = 2
#: The offset's spread assumed before the record's minima speak (years) and its weight (minima):
#: on our invented worlds the crossing, shifted by the record's mean offset, missed the minimum by
#: 0.36 yr rms (13 minima of five worlds, 1-3 earlier minima each).
PRIOR_SD_YEARS = 0.4
PRIOR_DOF = 2
REGION_WORDS = ("a regions CSV (columns date or year, latitude, and leading_polarity or flux_mx)")


@dataclass(frozen=True)
class Regions:
    """Active regions: emergence times (decimal years), latitudes (degrees), leading polarity (+1/-1)."""

    times: np.ndarray
    latitude: np.ndarray
    leading: np.ndarray

    def until(self, year: float) -> Regions:
        """The regions that had emerged by ``year``."""
        keep = self.times <= year
        return Regions(self.times[keep], self.latitude[keep], self.leading[keep])


def read_regions(path: str | os.PathLike) -> Regions:
    """Read a regions CSV (see the module's description); errors name the file and the line."""
    from ._kinds import read_csv_table
    from .timeseries import to_decimal_year

    source, fields, rows = read_csv_table(path, REGION_WORDS, accept=("csv", "text", "sunspots"))
    polarity = "leading_polarity" if "leading_polarity" in fields else "flux_mx" if "flux_mx" in fields else None
    if not ({"date", "year"} & set(fields)) or "latitude" not in fields or polarity is None:
        raise PolarfluxError(f"{source}: needs columns date (or year), latitude, and leading_polarity (or "
                             f"flux_mx); found {', '.join(repr(f) for f in fields) or 'none'}")
    times, lats, leading = [], [], []
    for line, row in rows:
        try:
            if "date" in fields and (row.get("date") or "").strip():
                when = np.datetime64((row["date"] or "").strip()[:10], "D")
                times.append(float(to_decimal_year(np.array([when]))[0][0]))
            else:
                times.append(float(row.get("year") or "nan"))
            lats.append(float(row["latitude"]))
            value = float(row[polarity])
        except (TypeError, ValueError, KeyError):
            raise PolarfluxError(f"{source}: line {line}: date or year, latitude and {polarity} must be "
                                 "a date and numbers") from None
        if not np.isfinite(times[-1]):
            raise PolarfluxError(f"{source}: line {line}: no date or year")
        if not np.isfinite(value) or value == 0 or not np.isfinite(lats[-1]) or abs(lats[-1]) > 90:
            raise PolarfluxError(f"{source}: line {line}: {polarity} must be a non-zero number and "
                                 "latitude within +/-90 degrees")
        leading.append(float(np.sign(value)))
    if not times:
        raise PolarfluxError(f"{source}: holds no regions; expected {REGION_WORDS}")
    order = np.argsort(times, kind="stable")
    return Regions(np.array(times)[order], np.array(lats)[order], np.array(leading)[order])


@dataclass(frozen=True)
class RegionMinimum:
    """A minimum dated by region counts.

    ``crossing`` is the centre of the first window in which the new cycle's regions outnumber
    the old's, ``confirmed`` the date the following windows confirmed it, ``time`` the minimum's
    date (the crossing less the mean offset of crossings from the series' earlier minima) and
    ``uncertainty_years`` its standard uncertainty; ``offsets`` are those earlier offsets.
    """

    time: float
    uncertainty_years: float
    crossing: float
    confirmed: float
    new_regions: int
    old_regions: int
    old_north_leading: int
    offsets: tuple[float, ...] = ()


def region_crossing(regions: Regions, last_minimum: float, as_of: float,
                    window: float = WINDOW_YEARS) -> RegionMinimum | None:
    """The crossing of the new cycle's regions over the old's, as seen by ``as_of``, or None.

    The old cycle's orientation (leading polarity in the north) is the majority of its regions'
    ``leading x sign(latitude)`` from 1.5 years after ``last_minimum`` to 1.5 years before
    ``as_of`` (at least 20 regions, else None). Old-cycle regions have that orientation; new-cycle
    regions the reverse, at |latitude| >= :data:`NEW_CYCLE_LATITUDE`. In windows of ``window``
    years ending each month from 5 years after ``last_minimum``, the minimum is the centre of the
    first window in which the new regions (at least :data:`MIN_NEW`) outnumber the old, when the
    :data:`AGREE_MONTHS` windows after it, all ended by ``as_of``, say the same. Its ``time`` is
    the crossing itself and its uncertainty half a window (see :func:`minimum_from_regions`).
    """
    r = regions.until(as_of)
    orientation = r.leading * np.sign(r.latitude)
    settled = (r.times >= last_minimum + 1.5) & (r.times <= as_of - 1.5)
    if settled.sum() < 20:
        return None
    old_sign = 1 if (orientation[settled] > 0).sum() >= (orientation[settled] < 0).sum() else -1
    is_old = orientation == old_sign
    is_new = (orientation == -old_sign) & (np.abs(r.latitude) >= NEW_CYCLE_LATITUDE)
    ends = np.arange(last_minimum + 5.0, as_of + 1e-9, 1.0 / 12.0)
    counts = [(int(np.sum(is_new & (r.times > e - window) & (r.times <= e))),
               int(np.sum(is_old & (r.times > e - window) & (r.times <= e)))) for e in ends]
    ahead = [new >= MIN_NEW and new > old for new, old in counts]
    for k in range(len(ends) - AGREE_MONTHS):
        if all(ahead[k:k + AGREE_MONTHS + 1]):
            crossing = float(ends[k] - window / 2.0)
            return RegionMinimum(time=crossing, uncertainty_years=window / 2.0, crossing=crossing,
                                 confirmed=float(ends[k + AGREE_MONTHS]), new_regions=counts[k][0],
                                 old_regions=counts[k][1], old_north_leading=old_sign)
    return None


def minimum_from_regions(regions: Regions, minima, as_of: float) -> RegionMinimum | None:
    """The coming minimum by the regions known on ``as_of``, calibrated on the series' earlier minima.

    ``minima`` are the sunspot series' minima confirmed by ``as_of`` (decimal years). The coming
    minimum's crossing is looked for after the last of them. Each earlier minimum whose crossing the
    regions show (looked for as on two years after it, or on ``as_of`` if sooner) gives an offset,
    crossing minus minimum: where the series and the regions date minima differently (the
    latitude cut, the window, how the cycles overlap), the record's own minima say by how much. The
    minimum is the crossing less the offsets' mean. Its uncertainty pools the offsets' spread with
    :data:`PRIOR_SD_YEARS` (weighted as :data:`PRIOR_DOF` minima), so one or two earlier minima that
    happen to agree do not make it look exact, times sqrt(1 + 1/n) for the mean's own error (n
    offsets); without an earlier minimum the crossing is taken unshifted with the prior's uncertainty.
    """
    minima = sorted(float(m) for m in minima if m <= as_of)
    if not minima:
        return None
    found = region_crossing(regions, minima[-1], as_of)
    if found is None:
        return None
    offsets = []
    for before, at in zip(minima[:-1], minima[1:], strict=True):
        earlier = region_crossing(regions, before, min(at + 2.0, as_of))
        if earlier is not None and abs(earlier.crossing - at) < 2.0:
            offsets.append(earlier.crossing - at)
    shift = float(np.mean(offsets)) if offsets else 0.0
    squares = float(np.sum((np.asarray(offsets) - shift) ** 2)) if offsets else 0.0
    spread = np.sqrt((squares + PRIOR_DOF * PRIOR_SD_YEARS**2) / (max(len(offsets) - 1, 0) + PRIOR_DOF))
    if offsets:  # the mean offset is itself uncertain: a prediction's sqrt(1 + 1/n)
        spread *= math.sqrt(1.0 + 1.0 / len(offsets))
    return RegionMinimum(time=found.crossing - shift, uncertainty_years=float(spread),
                         crossing=found.crossing, confirmed=found.confirmed, new_regions=found.new_regions,
                         old_regions=found.old_regions, old_north_leading=found.old_north_leading,
                         offsets=tuple(offsets))
