"""A small invented map archive for the demo command and the tests.

Until the full synthetic scenario exists, the demo measures maps made here on
the fly: an invented Sun in a future epoch (from 2041), observed by an invented
instrument ("PFX-DEMO magnetograph"), whose polar fields weaken and reverse over
two years, with bipolar active regions at low latitudes, pixel noise, and the
pole tilted away from the observer (from the B0 angle) missing from the map.
Nothing here is real data.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np
from astropy.time import Time

from .maps import SynopticMap, quiet_time_warnings, write_map

__all__ = ["DEMO_START", "DEMO_INSTRUMENT", "demo_map", "write_demo_archive"]

DEMO_START = "2041-01-01T00:00:00"
DEMO_INSTRUMENT = "PFX-DEMO magnetograph"

#: Polar field (G, at the pole) of each hemisphere at the start, and the time of
#: its reversal in years from the start: the north reverses first.
_POLAR_START = {"north": 7.0, "south": -8.0}
_REVERSAL_YEARS = {"north": 1.1, "south": 1.6}
_NOISE_G = 2.0


def _polar_amplitude(hemisphere: str, years: float) -> float:
    start = _POLAR_START[hemisphere]
    return start * (1.0 - years / _REVERSAL_YEARS[hemisphere])


def demo_map(
    rotation: int, years: float, rng: np.random.Generator, nlat: int = 180, nlon: int = 360
) -> SynopticMap:
    """One demo map on a sine-latitude grid; ``years`` since the demo start."""
    from sunpy.coordinates.sun import B0, carrington_rotation_time

    with quiet_time_warnings():
        time = carrington_rotation_time(rotation + 0.5).utc
        b0 = float(B0(time).to_value("deg"))
    base = SynopticMap.from_array(np.zeros((nlat, nlon)), carrington_rotation=rotation)
    lat = np.deg2rad(base.lat)[:, None]
    lon = np.deg2rad(base.lon)[None, :]
    sine = np.sin(lat)
    north = _polar_amplitude("north", years)
    south = _polar_amplitude("south", years)
    # Polar fields concentrated toward the poles (sin^8 profile), one amplitude per hemisphere.
    br = np.where(sine > 0, north, south) * sine**8 * np.ones_like(lon)

    # Bipolar regions: leading polarity opposite in the two hemispheres, leader
    # slightly equatorward (tilted), each pair flux balanced.
    n_regions = int(rng.integers(4, 9))
    for _ in range(n_regions):
        hemisphere = 1.0 if rng.random() < 0.5 else -1.0
        centre_lat = hemisphere * np.deg2rad(rng.uniform(8.0, 28.0))
        centre_lon = rng.uniform(0.0, 2.0 * math.pi)
        amplitude = rng.lognormal(mean=math.log(60.0), sigma=0.5)
        half = np.deg2rad(4.0)
        tilt = np.deg2rad(0.5 * abs(np.rad2deg(centre_lat))) * hemisphere
        for sign, offset in ((1.0, +1.0), (-1.0, -1.0)):
            plat = centre_lat - offset * half * math.sin(tilt)
            plon = centre_lon + offset * half * math.cos(tilt) / math.cos(centre_lat)
            dlon = np.angle(np.exp(1j * (lon - plon)))
            dist2 = (lat - plat) ** 2 + (dlon * np.cos(lat)) ** 2
            br = br + sign * hemisphere * amplitude * np.exp(-dist2 / (2 * np.deg2rad(2.0) ** 2))
    br = br + rng.normal(0.0, _NOISE_G, size=br.shape)

    # The pole tilted away from the observer is poorly seen: drop its last rows.
    limit = 90.0 - (2.0 + 1.5 * abs(b0))
    hidden = base.lat < -limit if b0 > 0 else base.lat > limit
    br[hidden, :] = np.nan
    return SynopticMap.from_array(
        br, carrington_rotation=rotation, time=time, instrument=DEMO_INSTRUMENT, source=f"demo CR {rotation}"
    )


def write_demo_archive(
    folder: str | os.PathLike,
    n_maps: int = 27,
    seed: int = 2041,
    nlat: int = 180,
    nlon: int = 360,
    progress=None,
) -> list[Path]:
    """Write ``n_maps`` consecutive demo rotations as FITS files into ``folder``.

    The same seed gives the same maps. Returns the file paths in rotation order.
    """
    from sunpy.coordinates.sun import carrington_rotation_number

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    with quiet_time_warnings():
        start = Time(DEMO_START, scale="utc")
        first = int(math.floor(float(carrington_rotation_number(start)))) + 1
    paths = []
    for k in range(n_maps):
        rotation = first + k
        years = k * 27.2753 / 365.25
        m = demo_map(rotation, years, rng, nlat=nlat, nlon=nlon)
        path = folder / f"pfxdemo_cr{rotation}.fits"
        write_map(m, path, force=True, extra={"TELESCOP": "PFX demo network (invented)"})
        paths.append(path)
        if progress is not None:
            progress(str(path), None)
    return paths
