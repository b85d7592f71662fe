"""The model's default physics against the published laws, with their constants written out here.

* Rotation: Snodgrass (1983, ApJ 270, 288) magnetic-feature rate, sidereal
  Omega = 2.902 - 0.464 sin^2(lat) - 0.328 sin^4(lat) microrad/s (coefficients from memory),
  seen in the Carrington frame, which turns at the sidereal Carrington period of 25.38 days
  (the definition of the Carrington rotation; common practice). A feature turning faster than
  the frame drifts toward larger Carrington longitude (common practice).
* Meridional flow: v = v0 sin(2.4 lat) poleward below 75 degrees, zero above (van Ballegooijen,
  Cartledge & Priest 1998, ApJ 501, 866). With diffusion eta, the axisymmetric steady state of zero
  net latitudinal flux is B ~ exp((R / eta) integral_0^lat v dlat) (DeVore, Sheeley & Boris 1984),
  the integral taken here with scipy.integrate.quad.
* R: astropy.constants.R_sun (IAU 2015 nominal).
"""

from __future__ import annotations

import numpy as np
import pytest
from astropy import constants
from scipy.integrate import quad

import polarflux as pf

R = constants.R_sun.to_value("m")
CARRINGTON_SIDEREAL_DAYS = 25.38
MICRORAD_PER_S_TO_DEG_PER_DAY = 1e-6 * 180.0 / np.pi * 86400.0


def snodgrass_drift_deg_per_day(lat_deg: float) -> float:
    s2 = np.sin(np.deg2rad(lat_deg)) ** 2
    sidereal = (2.902 - 0.464 * s2 - 0.328 * s2**2) * MICRORAD_PER_S_TO_DEG_PER_DAY
    return sidereal - 360.0 / CARRINGTON_SIDEREAL_DAYS


@pytest.mark.parametrize("lat0", [0.0, 30.0, -55.0])
def test_default_rotation_is_the_published_law_in_the_carrington_frame(lat0):
    """A pattern cos(lon) in a narrow band drifts by the published rate; its phase is read with numpy's FFT."""
    days = 120.0
    model = pf.FluxTransport(nlat=180, nlon=360, diffusivity=1.0, flow_profile=lambda lat: 0.0 * lat,
                             rotation="default")

    def band(lat, lon):
        return np.exp(-(((lat - lat0) / 3.0) ** 2)) * np.cos(np.deg2rad(lon))

    out = model.run(band, years=days / 365.25, step_days=1.0, save_every_days=days)
    row = int(np.argmin(np.abs(model.lat - lat0)))
    first, last = (np.fft.rfft(out.br.values[k, row])[1] for k in (0, -1))
    shift = -np.rad2deg(np.angle(last / first))  # cos(lon - s) has phase -s
    expected = snodgrass_drift_deg_per_day(float(model.lat[row])) * days
    assert abs(_wrapped(shift - expected)) < max(0.05, 1e-3 * abs(expected))  # sheared band: 1e-3
    # a frame turning once in 27.2753 days (the synodic period) would shift by more than a degree a day
    wrong = (snodgrass_drift_deg_per_day(float(model.lat[row])) + 360.0 / CARRINGTON_SIDEREAL_DAYS
             - 360.0 / 27.2753) * days
    assert abs(_wrapped(shift - wrong)) > 50.0


def _wrapped(degrees: float) -> float:
    """An angle difference in (-180, 180]."""
    return float((degrees + 180.0) % 360.0 - 180.0)


def test_default_flow_carries_flux_poleward_to_the_published_steady_state():
    eta_km2, v0 = 600.0, 5.0
    model = pf.FluxTransport(nlat=180, diffusivity=eta_km2, flow_speed=v0, axisymmetric=True, rotation=None)
    out = model.run(np.full(180, 1.0), years=150.0, step_days=10.0, save_every_days=365.25 * 50)
    eta = eta_km2 * 1e6

    def v(lat_rad):
        return v0 * np.sin(2.4 * lat_rad) if abs(lat_rad) < np.deg2rad(75.0) else 0.0

    lat = np.deg2rad(model.lat)
    exponent = np.array([quad(v, 0.0, x, points=[np.deg2rad(75.0)] if abs(x) > np.deg2rad(75.0) else None)[0]
                         for x in lat]) * R / eta
    shape = np.exp(exponent)
    edges = np.deg2rad(np.linspace(-90.0, 90.0, 181))
    areas = np.sin(edges[1:]) - np.sin(edges[:-1])
    steady = shape * np.sum(areas) / np.sum(shape * areas)  # the total flux of B = 1 G is conserved
    final = out.br.values[-1]
    assert np.max(np.abs(final - steady)) / np.max(steady) < 0.02
    assert final[-1] > 50 * final[90] and final[0] > 50 * final[89]  # piled up at both poles, not the equator
