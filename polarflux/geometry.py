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
