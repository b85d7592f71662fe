"""Surface flux transport against analytic solutions and an independent integrator.

Outside references used here:
  * diffusion on a sphere: a spherical harmonic of degree l decays as
    exp(-eta l (l + 1) t / R^2) (standard result; Legendre functions from scipy.special);
  * steady state of flow plus diffusion, B ~ exp((R / eta) integral of v dlat), which for
    v = v0 sin 2 lat is exp(-(R v0 / 2 eta) cos 2 lat) (DeVore, Sheeley & Boris 1984;
    Sheeley 2005, Living Rev. Sol. Phys. 2, 5);
  * scipy.integrate.solve_ivp on the same semi-discrete equations (method of lines);
  * R is astropy.constants.R_sun (IAU 2015 nominal solar radius).
"""

from __future__ import annotations

import numpy as np
import pytest
from astropy import constants
from scipy.special import lpmv

import polarflux as pf
from polarflux.transport import BipolarRegion, joy_tilt, region_field
from polarflux.transport.model import _Grid

R = constants.R_sun.to_value("m")
YEAR = 365.25 * 86400.0
NO_FLOW = {"flow_profile": lambda lat: np.zeros_like(lat), "rotation": None}


def harmonic(l, m, lat, lon):
    """Real spherical harmonic pattern P_l^m(sin lat) cos(m lon) (unnormalised)."""
    return lpmv(m, l, np.sin(np.deg2rad(lat))) * np.cos(m * np.deg2rad(lon))


def fit_amplitudes(field, patterns, weights):
    """Least-squares amplitudes of ``patterns`` in ``field`` with quadrature ``weights``."""
    gram = np.array([[np.sum(p * q * weights) for q in patterns] for p in patterns])
    rhs = np.array([np.sum(field * p * weights) for p in patterns])
    return np.linalg.solve(gram, rhs)


MODES = [(l, m) for l in (1, 2, 3) for m in range(l + 1)]


def test_diffusion_of_spherical_harmonics_2d():
    eta = 250.0
    model = pf.FluxTransport(nlat=180, nlon=360, diffusivity=eta, **NO_FLOW)
    lat, lon = np.meshgrid(model.lat, model.lon, indexing="ij")
    patterns = [harmonic(l, m, lat, lon) for l, m in MODES]
    amplitudes = np.linspace(1.0, 2.0, len(MODES))
    initial = sum(a * p for a, p in zip(amplitudes, patterns, strict=True))
    out = model.run(initial, years=10.0, step_days=1.0, save_every_days=365.25 * 5)
    weights = np.cos(np.deg2rad(lat))
    start = fit_amplitudes(out.br.values[0], patterns, weights)
    end = fit_amplitudes(out.br.values[-1], patterns, weights)
    t = out.time.values[-1] * YEAR
    for (l, m), a0, a1 in zip(MODES, start, end, strict=True):
        expected = np.exp(-eta * 1e6 * l * (l + 1) * t / R**2)
        assert abs(a1 / a0 / expected - 1) < 1e-3, (l, m, a1 / a0, expected)


def test_diffusion_of_zonal_harmonics_axisymmetric():
    eta = 250.0
    model = pf.FluxTransport(nlat=180, diffusivity=eta, axisymmetric=True, **NO_FLOW)
    patterns = [lpmv(0, l, np.sin(np.deg2rad(model.lat))) for l in (1, 2, 3)]
    out = model.run(sum(patterns), years=10.0, step_days=1.0, save_every_days=3650)
    weights = np.cos(np.deg2rad(model.lat))
    start = fit_amplitudes(out.br.values[0], patterns, weights)
    end = fit_amplitudes(out.br.values[-1], patterns, weights)
    t = out.time.values[-1] * YEAR
    for l, a0, a1 in zip((1, 2, 3), start, end, strict=True):
        expected = np.exp(-eta * 1e6 * l * (l + 1) * t / R**2)
        assert abs(a1 / a0 / expected - 1) < 1e-3


def test_rigid_rotation_shifts_a_pattern_exactly():
    rng = np.random.default_rng(0)
    initial = rng.normal(0, 5, (36, 72))
    # 1 degree per day on a 5-degree grid: 50 days shift the pattern by 10 columns.
    model = pf.FluxTransport(nlat=36, nlon=72, diffusivity=0.0, flow_profile=lambda lat: 0 * lat,
                             rotation=lambda lat: np.ones_like(lat))
    out = model.run(initial, years=50 / 365.25, step_days=1.0, save_every_days=50)
    np.testing.assert_allclose(out.br.values[-1], np.roll(initial, 10, axis=1), rtol=0, atol=1e-12)


def test_differential_rotation_shifts_each_row_by_its_own_rate():
    lat_rates = {}

    def rates(lat):
        r = np.where(np.abs(lat) < 45, 2.0, -1.0)  # deg/day: forward at low, backward at high latitudes
        lat_rates["r"] = r
        return r

    rng = np.random.default_rng(1)
    initial = rng.normal(0, 1, (18, 36))
    model = pf.FluxTransport(nlat=18, nlon=36, diffusivity=0.0, flow_profile=lambda lat: 0 * lat, rotation=rates)
    out = model.run(initial, years=20 / 365.25, step_days=2.0, save_every_days=20)
    shifts = (lat_rates["r"] * 20 / 10).astype(int)  # 10-degree columns
    expected = np.stack([np.roll(row, k) for row, k in zip(initial, shifts, strict=True)])
    np.testing.assert_allclose(out.br.values[-1], expected, atol=1e-12)


def test_flow_and_diffusion_relax_to_the_closed_form_steady_state():
    eta, v0 = 500.0, 2.0
    model = pf.FluxTransport(nlat=180, diffusivity=eta, axisymmetric=True, rotation=None,
                             flow_profile=lambda lat: v0 * np.sin(np.deg2rad(2 * lat)))
    out = model.run(np.full(180, 1.0), years=80.0, step_days=5.0, save_every_days=365.25 * 40)
    k = R * v0 / (2 * eta * 1e6)
    lat = np.deg2rad(model.lat)
    grid = model.grid
    shape = np.exp(-k * np.cos(2 * lat))
    closed = shape * (np.sum(grid.ds) / np.sum(shape * grid.ds))  # same total flux as B = 1
    final = out.br.values[-1]
    assert np.max(np.abs(final - closed)) / np.max(closed) < 1e-3
    flux = out.total_signed_flux.values
    assert np.all(np.abs(flux / flux[0] - 1) < 1e-12)
    assert final[-1] > 2 * final[90]  # flux concentrated at the poles


def _mixed_setup(axisymmetric: bool):
    model = pf.FluxTransport(nlat=90, nlon=180, diffusivity=300.0, flow_speed=15.0, decay_time=None,
                             axisymmetric=axisymmetric)
    regions = [
        BipolarRegion.with_joy_tilt(0.1, 20.0, 40.0, 3e22, separation=6.0),
        BipolarRegion.with_joy_tilt(0.35, -15.0, 200.0, -2e22, separation=4.0),
        BipolarRegion(0.8, 30.0, 300.0, 5e21, separation=8.0, tilt=-10.0),
    ]

    def initial(lat, lon):
        return 0.8 + 4.0 * np.sin(np.deg2rad(lat)) ** 7 + 2.0 * np.cos(np.deg2rad(lon)) * np.cos(np.deg2rad(lat))

    return model, regions, initial


def test_total_flux_is_conserved_and_axisymmetric_run_is_the_m0_part():
    model, regions, initial = _mixed_setup(False)
    full = model.run(initial, years=1.5, step_days=1.0, sources=regions)
    flux = full.total_signed_flux.values
    assert np.all(np.abs(flux / flux[0] - 1) < 1e-12)
    assert full.total_unsigned_flux.values.max() > 1.2 * full.total_unsigned_flux.values[0]
    axi_model, _, _ = _mixed_setup(True)
    axi = axi_model.run(initial, years=1.5, step_days=1.0, sources=regions)
    mean = full.br.values.mean(axis=2)
    scale = np.abs(mean).max()
    assert np.max(np.abs(axi.br.values - mean)) < 1e-12 * scale
    for name in ("axial_dipole", "north_mean_field", "south_mean_field"):
        np.testing.assert_allclose(axi[name].values, full[name].values, rtol=0, atol=1e-12 * scale)


def test_output_measures_are_the_archive_measures():
    model, regions, initial = _mixed_setup(False)
    out = model.run(initial, years=0.5, step_days=2.0, sources=regions, cap_latitude=55.0)
    lat_edges, lon_edges = model.grid.lat_edges, model.grid.lon_edges
    for i in (0, len(out.time) - 1):
        m = pf.SynopticMap(out.br.values[i], lat_edges, lon_edges, grid="equal-angle")
        caps = pf.measure_caps(m, 55.0)
        assert out.north_mean_field.values[i] == pytest.approx(caps.north.mean_field.value, rel=1e-12, abs=1e-14)
        assert out.south_mean_field.values[i] == pytest.approx(caps.south.mean_field.value, rel=1e-12, abs=1e-14)
        assert out.axial_dipole.values[i] == pytest.approx(pf.axial_dipole(m).value, rel=1e-12, abs=1e-14)
    assert out.br.attrs["units"] == "G" and out.time.attrs["units"] == "yr"


def test_tilted_bipole_builds_a_dipole_of_the_expected_sign():
    # A northern bipole whose leading polarity is positive (Hale's law for a cycle
    # that reverses a positive north polar field), tilted by Joy's law: the
    # following, negative polarity lies poleward and is carried to the pole, so the
    # axial dipole it leaves is negative (common practice). Parameters: eta 250
    # km^2/s and an 11 m/s flow, as in Cameron et al. (2010).
    model = pf.FluxTransport(nlat=90, nlon=180, diffusivity=250.0, flow_speed=11.0)
    region = BipolarRegion.with_joy_tilt(0.0, 15.0, 120.0, 1e22, separation=6.0)
    out = model.run(np.zeros((90, 180)), years=6.0, step_days=2.0, sources=[region])
    assert out.axial_dipole.values[-1] < 0
    assert out.north_mean_field.values[-1] < 0
    mirrored = BipolarRegion.with_joy_tilt(0.0, -15.0, 120.0, -1e22, separation=6.0)  # Hale: opposite in the south
    out2 = model.run(np.zeros((90, 180)), years=6.0, step_days=2.0, sources=[mirrored])
    assert out2.axial_dipole.values[-1] == pytest.approx(out.axial_dipole.values[-1], rel=0.05)
    assert out2.south_mean_field.values[-1] > 0


def _method_of_lines(nlat, nlon, eta_km2, flow, rotation_deg_day, y0, t_end):
    """The transport equation's finite-volume semi-discretisation, written out here, integrated by solve_ivp."""
    from scipy.integrate import solve_ivp

    eta = eta_km2 * 1e6
    edges = np.deg2rad(np.linspace(-90, 90, nlat + 1))
    centres = 0.5 * (edges[1:] + edges[:-1])
    dlat = edges[1] - edges[0]
    area = np.diff(np.sin(edges))
    cos_e = np.cos(edges)
    cos_e[[0, -1]] = 0.0
    v = flow(np.rad2deg(edges))
    omega = np.deg2rad(rotation_deg_day(np.rad2deg(centres))) / 86400.0
    m = np.arange(nlon // 2 + 1)

    def rhs(t, y):
        b = (y[: y.size // 2] + 1j * y[y.size // 2:]).reshape(nlat, -1)
        face = np.zeros((nlat + 1, b.shape[1]), dtype=complex)
        mean = 0.5 * (b[1:] + b[:-1])
        grad = (b[1:] - b[:-1]) / dlat
        face[1:-1] = cos_e[1:-1, None] * (v[1:-1, None] * mean / R - eta * grad / R**2)
        db = -(face[1:] - face[:-1]) / area[:, None]
        db += (-1j * m[None, :] * omega[:, None] - eta * m[None, :] ** 2 / (R**2 * np.cos(centres)[:, None] ** 2)) * b
        return np.concatenate([db.real.ravel(), db.imag.ravel()])

    coefficients = np.fft.rfft(y0, axis=1) / nlon
    y = np.concatenate([coefficients.real.ravel(), coefficients.imag.ravel()])
    sol = solve_ivp(rhs, (0, t_end), y, method="DOP853", rtol=1e-11, atol=1e-13)
    z = sol.y[:, -1]
    c = (z[: z.size // 2] + 1j * z[z.size // 2:]).reshape(nlat, -1)
    return np.fft.irfft(c * nlon, n=nlon, axis=1)


def test_agrees_with_solve_ivp_within_the_second_order_time_error():
    nlat, nlon = 30, 8
    rng = np.random.default_rng(5)
    y0 = rng.normal(0, 1, (nlat, nlon)) + 3 * np.sin(np.deg2rad(np.linspace(-87, 87, nlat)))[:, None]
    # the profiles written out here from their papers, not taken from the package: van Ballegooijen,
    # Cartledge & Priest 1998 (ApJ 501, 866) v = v0 sin(2.4 lat) poleward, zero beyond 75 degrees;
    # Snodgrass 1983 (ApJ 270, 288) magnetic rotation 2.902 - 0.464 sin^2 - 0.328 sin^4 microrad/s,
    # seen from the Carrington frame (sidereal period 25.38 days)
    def flow(lat):
        lat = np.asarray(lat, dtype=float)
        return np.where(np.abs(lat) < 75.0, 15.0 * np.sin(np.deg2rad(2.4 * lat)), 0.0)

    def rotation(lat):
        s2 = np.sin(np.deg2rad(np.asarray(lat, dtype=float))) ** 2
        return (2.902 - 0.464 * s2 - 0.328 * s2**2) * 1e-6 * 180.0 / np.pi * 86400.0 - 360.0 / 25.38

    reference = _method_of_lines(nlat, nlon, 600.0, flow, rotation, y0, 0.5 * YEAR)
    errors = []
    for step in (4.0, 2.0):
        model = pf.FluxTransport(nlat=nlat, nlon=nlon, diffusivity=600.0, flow_speed=15.0)
        out = model.run(y0, years=0.5, step_days=step, save_every_days=1000)
        errors.append(np.max(np.abs(out.br.values[-1] - reference)) / np.max(np.abs(reference)))
    assert errors[1] < 1e-4
    assert 3.0 < errors[0] / errors[1] < 5.0  # second order in time


def test_bipolar_region_geometry_and_balance():
    assert joy_tilt(20.0) == 10.0 and joy_tilt(-20.0) == 10.0  # Li & Ulrich (2012): 0.5 deg per deg
    north = BipolarRegion.with_joy_tilt(0.0, 20.0, 100.0, 1e22, separation=30.0, width=2.0)
    (lat_l, lon_l), (lat_f, lon_f) = north.polarity_centres()
    assert lat_l < lat_f and lon_l > lon_f  # leading: nearer the equator, ahead in rotation
    south = BipolarRegion.with_joy_tilt(0.0, -20.0, 100.0, 1e22, separation=6.0)
    (lat_l, _), (lat_f, _) = south.polarity_centres()
    assert lat_l > lat_f
    g = _Grid(90, 180)
    field = region_field(north, g.lat, g.lon, g.solid_angle())
    flux = field * g.solid_angle() * (constants.R_sun.to_value("cm")) ** 2
    assert abs(flux.sum()) < 1e-12 * np.abs(flux).sum()
    assert flux[flux > 0].sum() == pytest.approx(1e22, rel=1e-9)  # patches 30 degrees apart barely overlap
    with pytest.raises(pf.SettingsError):
        BipolarRegion(0.0, 95.0, 0.0, 1e22)


def test_initial_state_from_a_synoptic_map_conserves_flux_and_fills_the_poles():
    rng = np.random.default_rng(8)
    m = pf.SynopticMap.from_array(rng.normal(0, 3, (120, 240)) + 0.5)
    br = m.br.copy()
    br[m.lat > 80] = np.nan
    gappy = pf.SynopticMap.from_array(br)
    model = pf.FluxTransport(nlat=90, nlon=180)
    field = model.initial_field(gappy)
    assert np.all(np.isfinite(field))
    filled = pf.fill_polar_gaps(gappy, 60)
    from polarflux.geometry import cell_areas

    before = np.sum(filled.br * cell_areas(gappy.lat_edges, gappy.lon_edges))
    after = np.sum(field * cell_areas(model.grid.lat_edges, model.grid.lon_edges))
    assert after == pytest.approx(before, rel=1e-12)


def test_ensemble_matches_single_axisymmetric_runs():
    etas, speeds, taus = [250.0, 500.0, 400.0], [11.0, 15.0, 8.0], [None, 5.0, 10.0]
    ensemble = pf.TransportEnsemble(nlat=90, diffusivity=etas, flow_speed=speeds,
                                    decay_time=[np.inf if t is None else t for t in taus])
    initial = 5 * np.sin(np.deg2rad(np.linspace(-89, 89, 90))) ** 3
    region = BipolarRegion.with_joy_tilt(0.2, 18.0, 50.0, 2e22)
    out = ensemble.run(initial, years=2.0, step_days=1.0, sources=[region])
    assert out.br.dims == ("member", "time", "lat")
    for i, (eta, v, tau) in enumerate(zip(etas, speeds, taus, strict=True)):
        single = pf.FluxTransport(nlat=90, diffusivity=eta, flow_speed=v, decay_time=tau, axisymmetric=True)
        ref = single.run(initial, years=2.0, step_days=1.0, sources=[region])
        np.testing.assert_allclose(out.br.values[i], ref.br.values, rtol=0, atol=1e-10 * np.abs(ref.br.values).max())
        np.testing.assert_allclose(out.axial_dipole.values[i], ref.axial_dipole.values, rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("kwargs", [{"diffusivity": -1}, {"decay_time": 0}, {"nlat": 2}, {"rotation": "fast"},
                                    {"flow_profile": 3.0}])
def test_bad_settings_are_refused(kwargs):
    with pytest.raises(pf.SettingsError):
        pf.FluxTransport(**kwargs)


def test_bad_initial_array_is_refused():
    with pytest.raises(pf.SettingsError, match="does not match the model grid"):
        pf.FluxTransport(nlat=18, nlon=36).run(np.zeros((10, 10)), years=0.1)
