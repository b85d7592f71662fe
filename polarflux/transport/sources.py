"""Emerging bipolar magnetic regions, deposited as two smooth, flux-balanced patches."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import SettingsError
from ..geometry import SOLAR_RADIUS_CM

__all__ = ["BipolarRegion", "joy_tilt", "JOY_SLOPE", "region_field"]

#: Joy's law slope: mean tilt grows by about 0.5 degree per degree of latitude
#: (Li & Ulrich 2012, ApJ 758, 115, from some 30,600 sunspot magnetic tilts).
JOY_SLOPE = 0.5


def joy_tilt(latitude_deg: float, slope: float = JOY_SLOPE) -> float:
    """Mean tilt (degrees, leading polarity toward the equator) at a latitude, by Joy's law.

    The linear form tilt = 0.5 |latitude| of Li & Ulrich (2012, ApJ 758, 115).
    """
    return slope * abs(float(latitude_deg))


@dataclass(frozen=True)
class BipolarRegion:
    """One bipolar magnetic region, emerging at ``time``.

    Attributes
    ----------
    time : float
        Emergence time, years from the start of the run.
    latitude, longitude : float
        Centre of the region, degrees (Carrington longitude).
    flux : float
        Flux of the leading polarity in Mx; its sign is the leading polarity. The
        following polarity carries the opposite flux, so the region adds no net flux.
    separation : float
        Angular distance between the two polarities' centres, degrees.
    tilt : float
        Angle of the axis from the east-west direction, degrees; positive puts the
        leading polarity nearer the equator (Joy's sense) in either hemisphere.
    width : float
        Gaussian width (standard deviation) of each polarity patch, degrees;
        at least one grid row is used on coarse grids.

    The leading polarity lies at the larger longitude (ahead in the direction of rotation).
    """

    time: float
    latitude: float
    longitude: float
    flux: float
    separation: float = 5.0
    tilt: float = 0.0
    width: float = 3.0

    def __post_init__(self) -> None:
        if not -90.0 < self.latitude < 90.0:
            raise SettingsError(f"region latitude {self.latitude} must lie strictly between -90 and 90")
        if self.separation < 0 or self.width <= 0:
            raise SettingsError(f"region separation {self.separation} and width {self.width} must be positive")
        if not all(math.isfinite(x) for x in (self.time, self.longitude, self.flux, self.tilt)):
            raise SettingsError("region time, longitude, flux and tilt must be finite numbers")

    @classmethod
    def with_joy_tilt(cls, time, latitude, longitude, flux, separation=5.0, width=3.0, slope=JOY_SLOPE):
        """A region whose tilt follows Joy's law (:func:`joy_tilt`)."""
        return cls(time, latitude, longitude, flux, separation, joy_tilt(latitude, slope), width)

    def polarity_centres(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """((lat, lon) of the leading polarity, (lat, lon) of the following), degrees."""
        half = 0.5 * self.separation
        toward_equator = -1.0 if self.latitude >= 0 else 1.0
        tilt = math.radians(self.tilt)
        dlat = half * math.sin(tilt) * toward_equator
        dlon = half * math.cos(tilt) / math.cos(math.radians(self.latitude))
        leading = (self.latitude + dlat, self.longitude + dlon)
        following = (self.latitude - dlat, self.longitude - dlon)
        return leading, following


def _patch(lat_c: np.ndarray, lon_c: np.ndarray, centre: tuple[float, float], width_deg: float) -> np.ndarray:
    """Gaussian of great-circle distance from ``centre`` at cell centres (lat, lon) in degrees."""
    lat0, lon0 = np.deg2rad(centre[0]), np.deg2rad(centre[1])
    lat = np.deg2rad(lat_c)[:, None]
    lon = np.deg2rad(lon_c)[None, :]
    cos_d = np.sin(lat) * np.sin(lat0) + np.cos(lat) * np.cos(lat0) * np.cos(lon - lon0)
    d = np.arccos(np.clip(cos_d, -1.0, 1.0))
    return np.exp(-0.5 * (d / np.deg2rad(width_deg)) ** 2)


def region_field(
    region: BipolarRegion, lat_c: np.ndarray, lon_c: np.ndarray, cell_solid_angle: np.ndarray
) -> np.ndarray:
    """Radial field (G) of one region on a grid; its net flux is zero to round-off.

    Each polarity is a Gaussian patch, computed within six widths of its centre
    and normalised on the grid itself to carry exactly +/- ``flux``, so the
    deposit conserves the total signed flux.
    ``cell_solid_angle`` is the solid angle of each cell (sr), shape (nlat, nlon).
    """
    spacing = float(np.min(np.diff(lat_c))) if lat_c.size > 1 else 180.0
    width = max(region.width, spacing)
    leading, following = region.polarity_centres()
    field = np.zeros(cell_solid_angle.shape)
    radius2 = SOLAR_RADIUS_CM**2
    reach = 6.0 * width + spacing  # beyond 6 widths the Gaussian is below 1e-7 of its peak
    for centre, flux in ((leading, region.flux), (following, -region.flux)):
        rows = np.flatnonzero(np.abs(lat_c - centre[0]) <= reach)
        if rows.size == 0:
            rows = np.array([int(np.argmin(np.abs(lat_c - centre[0])))])
        band = slice(int(rows[0]), int(rows[-1]) + 1)
        patch = _patch(lat_c[band], lon_c, centre, width)
        weight = float(np.sum(patch * cell_solid_angle[band])) * radius2
        field[band] += patch * (flux / weight)
    return field
