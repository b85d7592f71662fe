"""Header conventions of synoptic maps: axes, units, times and rotation numbers.

Split from :mod:`polarflux.maps` (which re-exports the public names); see that
module's notes for how the grid is decided from the axis span.
"""

from __future__ import annotations

import contextlib
import datetime
import math
import re
import warnings
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
from astropy import units as u
from astropy.time import Time

from .errors import MapFormatError

_ROTATION_KEYS = ("CAR_ROT", "CARROT")
@contextlib.contextmanager
def quiet_time_warnings():
    """Silence ERFA's warnings for times beyond its tables.

    Map times after the last announced leap second ("dubious year") or after 2100
    (the Earth ephemeris "date outside the range 1900-2100", still good to far
    better than the B0 angle needs) would otherwise warn on every conversion; the
    demo scenario lies in a future epoch.
    """
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=".*dubious year.*")
        warnings.filterwarnings("ignore", message=".*date outside.*range 1900-2100.*")
        yield


_DRMS_TIME = re.compile(
    r"^\s*(\d{4})[.\-](\d{2})[.\-](\d{2})[_T ](\d{2}):(\d{2})(?::(\d{2}(?:\.\d*)?))?"
    r"\s*(?:_?(TAI|UTC|UT|Z))?\s*$",
    re.IGNORECASE,
)


# --------------------------------------------------------------------------- axes


@dataclass
class _LatAxis:
    edges: np.ndarray
    centres: np.ndarray
    grid: str
    flip: bool
    projection: str


@dataclass
class _LonAxis:
    edges: np.ndarray
    centres: np.ndarray
    flip: bool
    roll: int
    drop_last: bool
    rotation: int | None
    projection: str


def _projection(ctype: str, kind: str, source: str) -> str:
    """Return "CEA", "CAR" or "" (a plain linear axis) for a CTYPE value."""
    text = ctype.strip().upper()
    lon_names = ("CRLN", "LONG", "LON", "CARRINGTON LONGITUDE")
    lat_names = ("CRLT", "LAT", "CARRINGTON LATITUDE")
    names = lon_names if kind == "longitude" else lat_names
    if text in names:
        return ""
    base, _, proj = text.partition("-")
    proj = proj.strip("-")
    if base in ("CRLN", "CRLT") and base in names and proj in ("CEA", "CAR"):
        return proj
    raise MapFormatError(
        f"{source}: unknown {kind} axis type CTYPE{1 if kind == 'longitude' else 2}={ctype!r}; "
        "expected CRLN-CEA/CRLT-CEA, CRLN-CAR/CRLT-CAR or Long/Lat"
    )


def _number(header: Mapping, key: str, source: str, default: float | None = None) -> float:
    value = header.get(key, default)
    if value is None:
        raise MapFormatError(f"{source}: header keyword {key} is missing")
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise MapFormatError(f"{source}: header keyword {key}={value!r} is not a number") from None
    if not math.isfinite(number):
        raise MapFormatError(f"{source}: header keyword {key}={value!r} is not finite")
    return number


def _step(header: Mapping, axis: int, source: str) -> float:
    if f"CDELT{axis}" in header:
        step = _number(header, f"CDELT{axis}", source)
    elif f"CD{axis}_{axis}" in header:
        step = _number(header, f"CD{axis}_{axis}", source)
    else:
        raise MapFormatError(f"{source}: header keyword CDELT{axis} is missing")
    other = 3 - axis
    for key in (f"PC{axis}_{other}", f"CD{axis}_{other}"):
        if key in header and _number(header, key, source) != 0.0:
            raise MapFormatError(f"{source}: rotated pixel axes ({key}) are not a synoptic map grid")
    if f"PC{axis}_{axis}" in header:
        step *= _number(header, f"PC{axis}_{axis}", source)
    if step == 0.0:
        raise MapFormatError(f"{source}: CDELT{axis} is zero")
    return step


def _latitude_axis(header: Mapping, nlat: int, source: str) -> _LatAxis:
    projection = _projection(str(header.get("CTYPE2", "")), "latitude", source)
    step = _step(header, 2, source)
    crpix = _number(header, "CRPIX2", source)
    crval = _number(header, "CRVAL2", source, 0.0)
    span = nlat * abs(step)
    tolerance = 0.5 * abs(step)  # header values are often rounded: allow half a pixel
    pixel = np.arange(1, nlat + 1, dtype=np.float64)
    edge_pixel = np.arange(0.5, nlat + 1.0, dtype=np.float64)

    if projection == "CEA":
        lam = _number(header, "PV2_1", source, 1.0)
        if lam <= 0:
            raise MapFormatError(f"{source}: PV2_1={lam} must be positive for CEA")
        if abs(span - 2.0) <= tolerance:
            # Step given in sine latitude (CUNIT2 "Sine Latitude", or absent).
            to_sine = 1.0
        elif abs(span - 360.0 / (math.pi * lam)) <= tolerance:
            if crval != 0.0:
                raise MapFormatError(f"{source}: oblique CEA (CRVAL2={crval}) is not a synoptic map")
            to_sine = lam * math.pi / 180.0
        else:
            raise MapFormatError(
                f"{source}: latitude axis does not span the sphere: NAXIS2 x CDELT2 = {span:.6g}, "
                f"expected 2 (sine latitude) or {360.0 / (math.pi * lam):.6g} (degrees, PV2_1={lam:g})"
            )
        sine_c = (crval + step * (pixel - crpix)) * to_sine
        sine_e = (crval + step * (edge_pixel - crpix)) * to_sine
        tol_sine = tolerance * to_sine
        _check_ends(sine_e, -1.0, 1.0, tol_sine, "sin(latitude)", source)
        sine_e = np.clip(sine_e, -1.0, 1.0)
        centres = np.rad2deg(np.arcsin(np.clip(sine_c, -1.0, 1.0)))
        edges = np.rad2deg(np.arcsin(sine_e))
        grid = "sine-latitude"
    else:
        if abs(span - 180.0) > tolerance:
            raise MapFormatError(
                f"{source}: latitude axis does not span the sphere: NAXIS2 x CDELT2 = {span:.6g} "
                "degrees, expected 180"
            )
        if projection == "CAR" and crval != 0.0:
            raise MapFormatError(f"{source}: oblique CAR (CRVAL2={crval}) is not a synoptic map")
        centres = crval + step * (pixel - crpix)
        edges = crval + step * (edge_pixel - crpix)
        _check_ends(edges, -90.0, 90.0, tolerance, "degrees", source)
        edges = np.clip(edges, -90.0, 90.0)
        grid = "equal-angle"

    flip = step < 0
    if flip:
        centres, edges = centres[::-1], edges[::-1]
    edges = edges.copy()
    edges[0], edges[-1] = -90.0, 90.0
    return _LatAxis(edges, np.ascontiguousarray(centres), grid, flip, projection)


def _check_ends(edges: np.ndarray, low: float, high: float, tol: float, unit: str, source: str) -> None:
    first, last = float(min(edges[0], edges[-1])), float(max(edges[0], edges[-1]))
    if abs(first - low) > tol or abs(last - high) > tol:
        raise MapFormatError(
            f"{source}: latitude axis does not span the sphere: it runs from {first:.6g} to "
            f"{last:.6g} {unit}, expected {low:g} to {high:g}"
        )


def _longitude_axis(header: Mapping, nlon: int, source: str) -> _LonAxis:
    projection = _projection(str(header.get("CTYPE1", "")), "longitude", source)
    step = _step(header, 1, source)
    crpix = _number(header, "CRPIX1", source)
    crval = _number(header, "CRVAL1", source, 0.0)
    width = abs(step)
    span = nlon * width
    drop_last = False
    if abs(span - 360.0) > 0.5 * width:
        if nlon > 1 and abs(span - width - 360.0) <= 0.5 * width:
            drop_last = True  # first and last columns are the same meridian
            nlon -= 1
        else:
            raise MapFormatError(
                f"{source}: longitude axis does not span 360 degrees: NAXIS1 x CDELT1 = {span:.6g}"
            )
    values = crval + step * (np.arange(1, nlon + 1, dtype=np.float64) - crpix)
    rotation = None
    if abs(crval) > 720.0:
        # Cumulative Carrington time: value = 360 x rotation - longitude.
        middle = crval + step * ((nlon + 1) / 2.0 - crpix)
        rotation = int(math.ceil(middle / 360.0))
        longitudes = -values
        ascending = step < 0
    else:
        longitudes = values
        ascending = step > 0
    flip = not ascending
    if flip:
        longitudes = longitudes[::-1]
    reduced = np.mod(longitudes, 360.0)
    roll = int(np.argmin(reduced))
    start = reduced[roll]
    centres = start + width * np.arange(nlon)
    edges = start - 0.5 * width + width * np.arange(nlon + 1)
    return _LonAxis(edges, centres, flip, roll, drop_last, rotation, projection)


# --------------------------------------------------------------------------- metadata


def _gauss_per_unit(header: Mapping, source: str) -> float:
    bunit = header.get("BUNIT")
    if bunit is None or not str(bunit).strip():
        warnings.warn(f"{source}: no BUNIT keyword; taking the data as Gauss", stacklevel=4)
        return 1.0
    text = str(bunit).strip()
    try:
        unit = u.Unit(text, parse_strict="raise")
        return float(unit.to(u.G))
    except (ValueError, u.UnitsError, TypeError):
        raise MapFormatError(
            f"{source}: unknown unit BUNIT={text!r}; expected a magnetic flux density "
            "(G, Gauss, Mx/cm^2, T, nT)"
        ) from None


_MJD_ZERO = datetime.date(1858, 11, 17).toordinal()  # MJD 0 (MJD = JD - 2400000.5, IAU definition)
_SECONDS = re.compile(r"\d{2}(?:\.\d{1,9})?\Z")


def _utc_on_a_plain_day(year: str, month: str, day: str, hour: str, minute: str, second: str) -> Time | None:
    """``Time(f"{year}-{month}-{day}T{hour}:{minute}:{second}", format="isot", scale="utc")``: the
    same jd1, jd2 and format, built from the day's number and fraction without parsing the text
    again or calling ERFA (whose warnings on years past its leap-second table cost more than the
    time itself, on every map of a future epoch).

    Only for days of exactly 86400 s: before the 28th (TAI - UTC changes only at the start of a
    month: no leap second), and from 1972 (whole leap seconds only; older UTC, which also drifted
    against TAI, is left to astropy). There the two parts are
    ERFA ``dtf2d``'s, 2400000.5 + MJD and (60 (60 h + m) + s) / 86400. None elsewhere and for any
    value out of range: the caller then asks astropy, which decides as before.
    """
    y, mo, d, h, mi = int(year), int(month), int(day), int(hour), int(minute)
    if y < 1972 or d >= 28 or h > 23 or mi > 59 or not _SECONDS.match(second):
        return None
    seconds = float(second)
    if seconds >= 60.0:
        return None
    try:
        mjd = datetime.date(y, mo, d).toordinal() - _MJD_ZERO
    except ValueError:
        return None
    time = Time(2400000.5 + mjd, (60.0 * (60 * h + mi) + seconds) / 86400.0, format="jd", scale="utc")
    time.format = "isot"
    return time


def parse_header_time(value: Any) -> Time | None:
    """Parse a header time: ISO 8601, or the ``YYYY.MM.DD_hh:mm:ss_TAI`` form."""
    if value is None:
        return None
    text = str(value).strip()
    if not text:
        return None
    match = _DRMS_TIME.match(text)
    if match:
        year, month, day, hour, minute, second, scale = match.groups()
        second = second or "00"
        if (scale or "").upper() != "TAI" and (quick := _utc_on_a_plain_day(year, month, day, hour, minute, second)):
            return quick
        iso = f"{year}-{month}-{day}T{hour}:{minute}:{second}"
        scale = "tai" if (scale or "").upper() == "TAI" else "utc"
        return Time(iso, format="isot", scale=scale).utc
    try:
        return Time(text.rstrip("Z"), scale="utc")
    except ValueError:
        return None


#: Keywords a map's time is read from, in order (FITS standard 4.0 section 9 for DATE-*, MJD-*;
#: T_OBS / T_REC and DATE_OBS as map products write them). ``DATE`` is the file's creation date
#: (FITS standard), not the map's, and is never used. Without any of them the time is the middle
#: of the map's Carrington rotation.
TIME_KEYS = ("DATE-OBS", "DATE_OBS", "DATE-AVG", "DATE-BEG", "MJD-AVG", "MJD-OBS", "T_OBS", "T_REC")


def _map_time(header: Mapping, source: str) -> Time | None:
    date_obs = str(header.get("DATE-OBS", "") or "").strip()
    if date_obs:
        time_obs = str(header.get("TIME-OBS", "") or "").strip()
        if "T" not in date_obs.upper() and time_obs:
            date_obs = f"{date_obs}T{time_obs}"
        parsed = parse_header_time(date_obs)
        if parsed is not None:
            return parsed
    begin, end = parse_header_time(header.get("DATE-BEG")), parse_header_time(header.get("DATE-END"))
    for key in TIME_KEYS[1:]:
        if key == "DATE-BEG" and begin is not None and end is not None:
            return begin + 0.5 * (end - begin)
        value = header.get(key)
        if key.startswith("MJD-"):
            if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value):
                return Time(float(value), format="mjd", scale="utc")
            continue
        parsed = parse_header_time(value)
        if parsed is not None:
            return parsed
    return None


def _rotation_number(header: Mapping, from_axis: int | None, time: Time | None, source: str) -> int | None:
    for key in _ROTATION_KEYS:
        value = header.get(key)
        if value is None or isinstance(value, bool):
            continue
        try:
            number = float(value)
        except (TypeError, ValueError):
            continue
        if math.isfinite(number) and number > 0:
            return int(round(number))
    if from_axis is not None:
        return from_axis
    if time is not None:
        from sunpy.coordinates.sun import carrington_rotation_number

        return int(math.floor(float(carrington_rotation_number(time))))
    return None
