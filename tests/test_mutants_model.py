"""The transport model's grid and step against closed forms written out here (mutants the other tests missed).

Sources:
  * the longitudinal part of the surface flux transport equation (Sheeley 2005, Living Rev. Sol. Phys.
    2, 5, eq. of the radial field in the rotating frame): a Fourier mode b_m of one row evolves as
    exp(t (-i m Omega - eta m^2 / (R^2 cos^2 lat) - 1 / tau)), rotation Omega, diffusivity eta, decay tau;
  * exponential decay of the field with time constant tau (Schrijver, DeRosa & Title 2002, ApJ 577, 1006);
  * a zonal harmonic P_1(sin lat) diffuses as exp(-2 eta t / R^2) (standard result);
  * Snodgrass (1983) magnetic-feature rotation, (A, B, C) = (2.902, -0.464, -0.328) microrad/s (from
    memory), in a frame turning 360 degrees in 25.38 days (common practice);
  * R: ``astropy.constants.R_sun`` (IAU 2015 nominal solar radius); cell areas R^2 dlon (sin b - sin a);
  * the latitudinal scheme as the model documents it (finite volumes, DeVore, Sheeley & Boris 1984;
    Crank-Nicolson): face flux F = cos(lat_f) [v_f (B_j + B_j+1) / 2 / R - eta (B_j+1 - B_j) / (R^2 dlat)],
    zero at the poles, (sin lat_j+1/2 - sin lat_j-1/2) dB_j/dt = F_j-1/2 - F_j+1/2, one step
    (I - dt/2 L)^-1 (I + dt/2 L); written out below with numpy only.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from astropy import constants

import polarflux as pf
from polarflux.errors import SettingsError
from polarflux.transport import BipolarRegion
from polarflux.transport.model import Stepper, model_grid

R_M = constants.R_sun.to_value("m")
DAY = 86400.0
YEAR = 365.25 * DAY
STILL = {"diffusivity": 0.0, "flow_profile": lambda lat: np.zeros_like(lat), "rotation": None}


def test_grid_sizes_and_edges():
    with pytest.raises(SettingsError, match="at least 4 latitude rows"):
        pf.FluxTransport(nlat=3, nlon=8)
    with pytest.raises(SettingsError, match="at least 4 latitude rows"):
        pf.FluxTransport(nlat=8, nlon=0)
    small = pf.FluxTransport(nlat=4, nlon=1, **STILL)  # the smallest grid runs
    assert small.run(np.ones((4, 1)), years=0.1, step_days=5.0).br.shape[1:] == (4, 1)
    lat_edges, lon_edges = model_grid(6, 8)
    np.testing.assert_allclose(lat_edges, [-90, -60, -30, 0, 30, 60, 90], rtol=0, atol=1e-12)
    np.testing.assert_allclose(lon_edges, np.arange(9) * 45.0, rtol=0, atol=1e-12)
    model = pf.FluxTransport(nlat=6, nlon=8, **STILL)
    np.testing.assert_allclose(model.lon, 22.5 + 45.0 * np.arange(8), rtol=0, atol=1e-12)
    np.testing.assert_allclose(model.lat, [-75, -45, -15, 15, 45, 75], rtol=0, atol=1e-12)


def test_an_odd_number_of_columns_rotates_exactly():
    """Nine 40-degree columns at 1 degree per day: 80 days move the pattern two columns."""
    rng = np.random.default_rng(5)
    initial = rng.normal(0, 3, (8, 9))
    model = pf.FluxTransport(nlat=8, nlon=9, diffusivity=0.0, flow_profile=lambda lat: 0 * lat,
                             rotation=lambda lat: np.ones_like(lat))
    out = model.run(initial, years=80 / 365.25, step_days=2.0, save_every_days=80)
    np.testing.assert_allclose(out.br.values[-1], np.roll(initial, 2, axis=1), rtol=0, atol=1e-12)


def test_zero_modes_stay_zero_under_rotation():
    """A pattern of one longitudinal mode rotated rigidly: cos(lon - 30 degrees) after 30 days."""
    model = pf.FluxTransport(nlat=6, nlon=12, diffusivity=0.0, flow_profile=lambda lat: 0 * lat,
                             rotation=lambda lat: np.ones_like(lat))
    out = model.run(lambda lat, lon: np.cos(np.deg2rad(lon)) + 0 * lat, years=30 / 365.25, step_days=1.0,
                    save_every_days=30)
    expected = np.cos(np.deg2rad(model.lon - 30.0))[None, :].repeat(6, axis=0)
    np.testing.assert_allclose(out.br.values[-1], expected, rtol=0, atol=1e-12)


def test_decay_is_exponential_with_the_decay_time():
    rng = np.random.default_rng(6)
    initial = rng.normal(0, 3, (8, 10))
    tau = 2.5
    model = pf.FluxTransport(nlat=8, nlon=10, decay_time=tau, **STILL)
    out = model.run(initial, years=3.0, step_days=10.0, save_every_days=365.25)
    for t, frame in zip(out.time.values, out.br.values, strict=True):
        np.testing.assert_allclose(frame, initial * math.exp(-t / tau), rtol=1e-12, atol=1e-14)


def test_row_factor_is_the_exact_longitudinal_solution():
    eta, tau, dt = 300.0, 4.0, 10.0 * DAY
    model = pf.FluxTransport(nlat=12, nlon=16, diffusivity=eta, decay_time=tau)
    factor = model._row_factor(dt)
    assert factor.shape == (12, 9)
    for j, lat in enumerate(model.lat):
        s2 = math.sin(math.radians(lat)) ** 2
        omega_deg_day = (2.902 - 0.464 * s2 - 0.328 * s2 * s2) * math.degrees(1e-6) * 86400.0 - 360.0 / 25.38
        omega = math.radians(omega_deg_day) / DAY
        for m in range(9):
            rate = -1j * m * omega - eta * 1e6 * m * m / (R_M**2 * math.cos(math.radians(lat)) ** 2) - 1 / (tau * YEAR)
            assert factor[j, m] == pytest.approx(np.exp(rate * dt), rel=1e-12, abs=1e-30), (j, m)


def test_the_latitude_step_is_crank_nicolson_of_the_documented_finite_volumes():
    eta, dt, nlat = 500.0, 10.0 * DAY, 36
    model = pf.FluxTransport(nlat=nlat, nlon=4, diffusivity=eta, rotation=None,
                             flow_profile=lambda lat: 8.0 * np.sin(np.deg2rad(2.0 * lat)))
    edges = np.linspace(-90.0, 90.0, nlat + 1)
    dlat = math.radians(180.0 / nlat)
    cos_f = np.cos(np.deg2rad(edges))
    v_f = 8.0 * np.sin(np.deg2rad(2.0 * edges))
    ds = np.diff(np.sin(np.deg2rad(edges)))
    operator = np.zeros((nlat, nlat))
    for face in range(1, nlat):  # interior faces; the polar ones carry nothing
        south, north = face - 1, face
        advect = cos_f[face] * v_f[face] / (2.0 * R_M)  # times (B_south + B_north)
        diffuse = cos_f[face] * eta * 1e6 / (R_M**2 * dlat)  # times (B_north - B_south)
        flux = np.zeros(nlat)
        flux[[south, north]] = [advect + diffuse, advect - diffuse]
        operator[north] += flux / ds[north]  # F enters the cell to its north ...
        operator[south] -= flux / ds[south]  # ... and leaves the one to its south
    eye = np.eye(nlat)
    expected = np.linalg.solve(eye - 0.5 * dt * operator, eye + 0.5 * dt * operator)
    np.testing.assert_allclose(model._crank_nicolson(dt), expected, rtol=1e-11, atol=1e-14)


def test_rotation_given_in_single_precision_is_integrated_in_double():
    """A callable may return float32 degrees per day: the phase after 1000 days is that of its value."""
    rate = np.float32(1.3)
    model = pf.FluxTransport(nlat=4, nlon=8, diffusivity=0.0, flow_profile=lambda lat: 0 * lat,
                             rotation=lambda lat: np.full(np.shape(lat), rate, dtype=np.float32))
    out = model.run(lambda lat, lon: np.cos(np.deg2rad(lon)) + 0 * lat, years=1000 / 365.25, step_days=1.0,
                    save_every_days=1000)
    shift = float(rate) * 1000.0  # degrees
    expected = np.cos(np.deg2rad(model.lon - shift))[None, :].repeat(4, axis=0)
    np.testing.assert_allclose(out.br.values[-1], expected, rtol=0, atol=1e-10)


def test_high_modes_near_the_poles_are_damped_to_nothing():
    """m = 180 in the polar rows: exp(-eta m^2 t / (R^2 cos^2 lat)) is below 1e-300 after half a day."""
    model = pf.FluxTransport(nlat=180, nlon=360, diffusivity=250.0, flow_profile=lambda lat: 0 * lat, rotation=None)
    lat, column = np.meshgrid(model.lat, np.arange(360), indexing="ij")
    checker = np.where(np.abs(lat) > 89.0, np.where(column % 2 == 0, 1.0, -1.0), 0.0)  # the m = 180 mode
    stepper = model.stepper(checker, step_days=1.0)
    stepper.step()
    field = stepper.field()
    assert np.all(np.isfinite(field))
    assert np.max(np.abs(field[[0, -1]] - field[[0, -1]].mean(axis=1, keepdims=True))) < 1e-12


def test_a_field_of_any_strength_diffuses_alike():
    """The equation is linear: a dipole of 1e-20 G decays as exp(-2 eta t / R^2), like one of 1 G."""
    eta = 500.0
    model = pf.FluxTransport(nlat=90, diffusivity=eta, axisymmetric=True, flow_profile=lambda lat: 0 * lat,
                             rotation=None)
    initial = 1e-20 * np.sin(np.deg2rad(model.lat))
    out = model.run(initial, years=5.0, step_days=5.0, save_every_days=365.25 * 5)
    t = out.time.values[-1] * YEAR
    ratio = out.axial_dipole.values[-1] / out.axial_dipole.values[0]
    assert ratio == pytest.approx(math.exp(-2.0 * eta * 1e6 * t / R_M**2), rel=1e-3)
    assert abs(out.axial_dipole.values[0]) > 0.9e-20


def test_stepper_counts_its_steps_from_zero_and_refuses_a_zero_step():
    model = pf.FluxTransport(nlat=6, nlon=4, **STILL)
    stepper = Stepper(model, np.ones((6, 4)))
    assert stepper.time == 0.0
    stepper.step()
    assert stepper.time == pytest.approx(1 / 365.25, rel=1e-15)  # one day: the default step
    stepper.step(2)
    stepper.step(2)
    assert stepper.steps_done == 5 and stepper.time == pytest.approx(5 / 365.25, rel=1e-15)
    for bad in (0.0, -1.0):
        with pytest.raises(SettingsError, match="must be positive"):
            Stepper(model, np.ones((6, 4)), step_days=bad)


def test_deposited_region_carries_its_flux_in_each_polarity():
    model = pf.FluxTransport(nlat=90, nlon=180, **STILL)
    stepper = model.stepper(np.zeros((90, 180)))
    stepper.add_regions([BipolarRegion(0.0, 20.0, 100.0, 4e21, separation=30.0, width=2.0)])
    field = stepper.field()
    lat_edges, lon_edges = np.linspace(-90.0, 90.0, 91), np.linspace(0.0, 360.0, 181)  # the equal-angle grid
    areas = (R_M * 100.0) ** 2 * np.outer(np.diff(np.sin(np.deg2rad(lat_edges))), np.deg2rad(np.diff(lon_edges)))
    assert np.sum(np.where(field > 0, field, 0.0) * areas) == pytest.approx(4e21, rel=1e-6)
    assert np.sum(np.where(field < 0, field, 0.0) * areas) == pytest.approx(-4e21, rel=1e-6)
