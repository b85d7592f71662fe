"""Surface flow profiles: differential rotation and meridional flow.

Rotation is given relative to the Carrington frame (the model runs in it);
meridional flow as the northward speed in m/s, so a poleward flow is positive
in the north and negative in the south.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np

from ..errors import SettingsError

__all__ = [
    "CARRINGTON_RATE_DEG_PER_DAY",
    "SNODGRASS_1983_MAGNETIC",
    "rotation_profile",
    "snodgrass_rotation",
    "flow_profile",
    "van_ballegooijen_flow",
]

#: Sidereal Carrington rotation rate: 360 degrees in 25.38 days (the definition of
#: the Carrington rotation; common practice).
CARRINGTON_RATE_DEG_PER_DAY = 360.0 / 25.38

_MICRORAD_PER_S_IN_DEG_PER_DAY = np.rad2deg(1e-6) * 86400.0

#: Snodgrass (1983, ApJ 270, 288) rotation of magnetic features,
#: Omega = A + B sin^2(lat) + C sin^4(lat), in microradians per second
#: (A, B, C = 2.902, -0.464, -0.328; values recalled from memory).
SNODGRASS_1983_MAGNETIC = (2.902, -0.464, -0.328)


def snodgrass_rotation(lat_deg, coefficients: Sequence[float] = SNODGRASS_1983_MAGNETIC) -> np.ndarray:
    """Angular velocity relative to the Carrington frame, degrees per day.

    Parameters
    ----------
    lat_deg : array-like
        Latitude in degrees.
    coefficients : (A, B, C)
        Sidereal rate A + B sin^2 + C sin^4 in microradians per second.

    References
    ----------
    Snodgrass, H. B. 1983, ApJ 270, 288 (magnetic-feature rotation).
    """
    a, b, c = (float(x) for x in coefficients)
    s2 = np.sin(np.deg2rad(np.asarray(lat_deg, dtype=np.float64))) ** 2
    sidereal = (a + b * s2 + c * s2 * s2) * _MICRORAD_PER_S_IN_DEG_PER_DAY
    return sidereal - CARRINGTON_RATE_DEG_PER_DAY


def rotation_profile(rotation) -> Callable[[np.ndarray], np.ndarray] | None:
    """Turn the ``rotation`` setting into f(lat_deg) -> deg/day relative to Carrington, or None.

    ``"default"``: Snodgrass (1983) magnetic features; ``None`` or ``"none"``: no
    rotation; a callable; or three coefficients (A, B, C) in microradians per
    second of the sidereal rate A + B sin^2 + C sin^4.
    """
    if rotation is None or (isinstance(rotation, str) and rotation.lower() == "none"):
        return None
    if isinstance(rotation, str):
        if rotation.lower() == "default":
            return snodgrass_rotation
        raise SettingsError(f"rotation={rotation!r}: expected 'default', None, a callable or (A, B, C)")
    if callable(rotation):
        return rotation
    try:
        coefficients = tuple(float(x) for x in rotation)
    except TypeError:
        raise SettingsError(f"rotation={rotation!r}: expected 'default', None, a callable or (A, B, C)") from None
    if len(coefficients) != 3:
        raise SettingsError(f"rotation coefficients {coefficients}: expected three (A, B, C)")
    return lambda lat: snodgrass_rotation(lat, coefficients)


def van_ballegooijen_flow(lat_deg, flow_speed: float = 11.0, cutoff_deg: float = 75.0) -> np.ndarray:
    """Poleward meridional flow v = v0 sin(2.4 lat) below +/-75 degrees, zero above (m/s, northward).

    References
    ----------
    van Ballegooijen, A. A., Cartledge, N. P., & Priest, E. R. 1998, ApJ 501, 866.
    """
    lat = np.asarray(lat_deg, dtype=np.float64)
    speed = flow_speed * np.sin(np.deg2rad(2.4 * lat))
    return np.where(np.abs(lat) < cutoff_deg, speed, 0.0)


def flow_profile(flow_speed: float, flow: Callable | None) -> Callable[[np.ndarray], np.ndarray]:
    """The meridional flow as f(lat_deg) -> northward m/s: the default profile scaled, or ``flow``."""
    if flow is None:
        return lambda lat: van_ballegooijen_flow(lat, flow_speed)
    if not callable(flow):
        raise SettingsError(f"flow_profile={flow!r}: expected None or a callable f(lat_deg) -> m/s")
    return flow
