"""Exact areas on the sphere for latitude-longitude grids.

A cell between latitudes a < b and longitudes p < q has area
R^2 (q - p) (sin b - sin a) (p, q in radians), so every integral over cells
only needs the sines of the latitude edges. A cell cut by a cap boundary at
latitude c counts with its exact fractional area (sin b - sin c) / (sin b - sin a):
exact on any grid, sine-latitude included.
"""

from __future__ import annotations

import numpy as np
from astropy import constants
from astropy import units as u

from .errors import SettingsError

__all__ = [
    "SOLAR_RADIUS_CM",
    "sine_edges",
    "cell_areas",
    "cap_row_fraction",
    "spherical_cap_area",
    "dipole_row_weights",
    "as_degrees",
    "regrid_conservative",
]

#: Solar radius in cm: astropy.constants.R_sun (IAU 2015 nominal, 695,700 km).
SOLAR_RADIUS_CM = float(constants.R_sun.to_value(u.cm))

HEMISPHERES = ("north", "south")


def as_degrees(value, name: str = "angle") -> float:
    """A float in degrees from a float (degrees) or an angle Quantity."""
    if isinstance(value, u.Quantity):
        try:
            return float(value.to_value(u.deg))
        except u.UnitsError:
            raise SettingsError(f"{name}={value} is not an angle") from None
    try:
        return float(value)
    except (TypeError, ValueError):
        raise SettingsError(f"{name}={value!r} is not a number of degrees") from None


def sine_edges(lat_edges_deg: np.ndarray) -> np.ndarray:
    """sin(latitude) at the edges, exactly -1 / +1 at edges of -90 / +90 degrees."""
    lat_edges_deg = np.asarray(lat_edges_deg, dtype=np.float64)
    s = np.sin(np.deg2rad(lat_edges_deg))
    s[lat_edges_deg == -90.0] = -1.0
    s[lat_edges_deg == 90.0] = 1.0
    return s


def cell_areas(lat_edges_deg, lon_edges_deg, radius_cm: float = SOLAR_RADIUS_CM) -> np.ndarray:
    """Area of every cell in cm^2, shape (nlat, nlon)."""
    ds = np.diff(sine_edges(lat_edges_deg))
    dlon = np.deg2rad(np.diff(np.asarray(lon_edges_deg, dtype=np.float64)))
    return radius_cm**2 * np.outer(ds, dlon)


def cap_row_fraction(lat_edges_deg, cap_latitude_deg: float, hemisphere: str) -> np.ndarray:
    """Fraction of each row's area that lies in the polar cap, shape (nlat,).

    The north cap is latitude >= cap_latitude, the south cap latitude <= -cap_latitude.
    """
    if not 0.0 < cap_latitude_deg < 90.0:
        raise SettingsError(f"cap latitude {cap_latitude_deg} must lie strictly between 0 and 90 degrees")
    s = sine_edges(lat_edges_deg)
    low, high = s[:-1], s[1:]
    c = np.sin(np.deg2rad(cap_latitude_deg))
    if hemisphere == "north":
        inside = np.clip(high, c, None) - np.clip(low, c, None)
    elif hemisphere == "south":
        inside = np.clip(high, None, -c) - np.clip(low, None, -c)
    else:
        raise SettingsError(f"hemisphere {hemisphere!r} must be 'north' or 'south'")
    return inside / (high - low)


def spherical_cap_area(cap_latitude_deg: float, radius_cm: float = SOLAR_RADIUS_CM) -> float:
    """Area of the cap poleward of ``cap_latitude_deg``: 2 pi R^2 (1 - sin c), cm^2."""
    return 2.0 * np.pi * radius_cm**2 * (1.0 - np.sin(np.deg2rad(cap_latitude_deg)))


def dipole_row_weights(lat_edges_deg) -> np.ndarray:
    """Integral of sin(latitude) d(sin latitude) over each row: (sin^2 b - sin^2 a) / 2."""
    s = sine_edges(lat_edges_deg)
    return 0.5 * (s[1:] ** 2 - s[:-1] ** 2)


def _cumulative(values: np.ndarray, widths: np.ndarray, axis: int) -> np.ndarray:
    """Running integral of ``values * widths`` along ``axis`` at the cell edges (first edge 0)."""
    moved = np.moveaxis(values * widths, axis, -1)
    out = np.zeros(moved.shape[:-1] + (moved.shape[-1] + 1,))
    np.cumsum(moved, axis=-1, out=out[..., 1:])
    return np.moveaxis(out, -1, axis)


def regrid_conservative(values, src_lat_edges, src_lon_edges, dst_lat_edges, dst_lon_edges) -> np.ndarray:
    """Area-weighted remap of cell averages between latitude-longitude grids, conserving flux.

    Each destination cell gets the exact area-weighted mean of the source cells it
    overlaps (source values held constant over their cells). Latitude is
    integrated in sin(latitude), so cell areas are exact; longitude is periodic,
    and both grids must span the whole sphere. NaN must be removed first.

    Returns an array of shape (len(dst_lat_edges) - 1, len(dst_lon_edges) - 1).
    """
    values = np.asarray(values, dtype=np.float64)
    src_s, dst_s = sine_edges(src_lat_edges), sine_edges(dst_lat_edges)
    # latitude: integral in d(sin lat), interpolated at the new edges, differenced
    cum = _cumulative(values, np.diff(src_s)[:, None], axis=0)
    along_lat = np.diff(_interp_rows(dst_s, src_s, cum), axis=0) / np.diff(dst_s)[:, None]
    # longitude: periodic running integral
    src_lon = np.asarray(src_lon_edges, dtype=np.float64)
    dst_lon = np.asarray(dst_lon_edges, dtype=np.float64)
    widths = np.diff(src_lon)
    cum_lon = _cumulative(along_lat, widths[None, :], axis=1)
    total = cum_lon[:, -1:]
    period = src_lon[-1] - src_lon[0]
    shifted = dst_lon - src_lon[0]
    turns = np.floor(shifted / period)
    local = shifted - turns * period + src_lon[0]
    at_edges = _interp_rows(local, src_lon, cum_lon.T).T + turns[None, :] * total
    return np.diff(at_edges, axis=1) / np.diff(dst_lon)[None, :]


def _interp_rows(x_new: np.ndarray, x: np.ndarray, table: np.ndarray) -> np.ndarray:
    """Linear interpolation of each column of ``table`` (rows at ``x``) to ``x_new``."""
    index = np.clip(np.searchsorted(x, x_new, side="right") - 1, 0, len(x) - 2)
    frac = (x_new - x[index]) / (x[index + 1] - x[index])
    return table[index] * (1.0 - frac)[:, None] + table[index + 1] * frac[:, None]
