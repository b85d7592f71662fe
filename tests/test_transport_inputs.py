"""Initial states of transport runs: maps, profiles on named grids, gaps, and what is refused.

References used below (none comes from the code under test):
  * axial dipole of B = B0 sin(latitude): (3 / 4 pi) * integral of B0 sin^2(lat) dOmega
    = (3 / 4 pi) * B0 * 2 pi * 2/3 = B0 exactly (closed form);
  * a degree-l spherical harmonic decays under pure diffusion as exp(-eta l (l + 1) t / R^2)
    (eigenvalues of the Laplacian on the sphere, common practice);
  * solar radius 695,700 km (IAU 2015 Resolution B3 nominal value);
  * cell averages of B0 sin(lat) over a row between sines a and b, averaged in d(sin lat),
    are B0 (a + b) / 2 (the integral of s ds, exact).
"""

from __future__ import annotations

import numpy as np
import pytest

import polarflux as pf
from polarflux.transport.sources import BipolarRegion

B0 = 5.0
R_SUN_M = 695_700e3  # IAU 2015 nominal solar radius


def sine_grid_dipole(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Cell averages of B0 sin(lat) on n sine-latitude rows, and their edges (degrees)."""
    s = np.linspace(-1.0, 1.0, n + 1)
    return B0 * 0.5 * (s[:-1] + s[1:]), np.rad2deg(np.arcsin(s))


@pytest.mark.parametrize("how", ["grid", "lat_edges"])
def test_a_sine_latitude_profile_keeps_its_dipole(how):
    profile, edges = sine_grid_dipole(180)
    stated = {"grid": "sine-latitude"} if how == "grid" else {"lat_edges": edges}
    out = pf.TransportEnsemble(nlat=180).run(profile, years=0.1, step_days=5.0, **stated)
    # closed form: the axial dipole of B0 sin(lat) is B0; read as equal-angle rows it would be 3.75 G
    assert float(out.axial_dipole[0, 0]) == pytest.approx(B0, rel=2e-4)


def test_a_sine_latitude_profile_decays_as_the_l1_harmonic():
    profile, _ = sine_grid_dipole(120)
    eta_km2_s = 500.0
    ensemble = pf.TransportEnsemble(nlat=180, diffusivity=eta_km2_s, flow_speed=0.0)
    out = ensemble.run(profile, years=2.0, step_days=1.0, grid="sine-latitude")
    t_s = out.time.values * 365.25 * 86400.0
    expected = B0 * np.exp(-eta_km2_s * 1e6 * 2.0 * t_s / R_SUN_M**2)  # l = 1: l (l + 1) = 2
    assert expected[-1] < 0.9 * B0  # the decay is large enough to tell a wrong rate
    np.testing.assert_allclose(out.axial_dipole.values[0], expected, rtol=5e-4)


def test_flux_transport_regrids_a_2d_array_on_a_named_grid():
    profile, _ = sine_grid_dipole(90)
    field = np.repeat(profile[:, None], 40, axis=1)
    out = pf.FluxTransport(nlat=60, nlon=36).run(field, years=0.05, step_days=5.0, grid="sine-latitude")
    assert float(out.axial_dipole[0]) == pytest.approx(B0, rel=1e-3)


def test_the_ensemble_accepts_a_synoptic_map_as_flux_transport_does():
    profile, _ = sine_grid_dipole(180)
    m = pf.SynopticMap.from_array(np.repeat(profile[:, None], 360, axis=1), grid="sine-latitude")
    ensemble = pf.TransportEnsemble(nlat=90, diffusivity=[250.0, 400.0], flow_speed=[11.0, 14.0])
    out = ensemble.run(m, years=0.5, step_days=2.0)
    assert out.axial_dipole.values[:, 0] == pytest.approx([B0, B0], rel=1e-3)  # closed form
    single = pf.FluxTransport(nlat=90, nlon=8, diffusivity=400.0, flow_speed=14.0, axisymmetric=True)
    ref = single.run(m, years=0.5, step_days=2.0)
    np.testing.assert_allclose(out.br.values[1], ref.br.values, rtol=0, atol=1e-12 * B0)


def longitude_mean_of_a_gappy_map() -> tuple[pf.SynopticMap, np.ndarray, int]:
    profile, _ = sine_grid_dipole(180)
    br = np.repeat(profile[:, None], 360, axis=1)
    lat = np.rad2deg(np.arcsin(0.5 * (np.linspace(-1, 1, 181)[:-1] + np.linspace(-1, 1, 181)[1:])))
    hidden = lat > 78.0  # the hidden pole of a real map
    br[hidden] = np.nan
    m = pf.SynopticMap.from_array(br, grid="sine-latitude")
    return m, br.mean(axis=1), int(np.count_nonzero(hidden))


def test_a_longitude_mean_with_missing_polar_rows_is_refused_with_the_count():
    m, mean, hidden = longitude_mean_of_a_gappy_map()
    assert hidden > 0
    with pytest.raises(pf.SettingsError, match=rf"in {hidden} of its 180 latitude rows \({hidden} north, 0 south\)"
                       r".*fill_polar_gaps"):
        pf.TransportEnsemble(nlat=180).run(mean, years=0.1, grid="sine-latitude")
    with pytest.raises(pf.SettingsError, match=rf"in {hidden} of its 180 latitude rows.*fill_polar_gaps"):
        pf.TransportEnsemble(nlat=180).run(mean, years=0.1)  # on the model grid: still refused
    with pytest.raises(pf.SettingsError, match="latitude rows.*fill_polar_gaps"):
        pf.FluxTransport(nlat=180, nlon=360).run(m.br, years=0.1, grid="sine-latitude")


def test_the_two_ways_to_fill_give_finite_runs():
    m, _, _ = longitude_mean_of_a_gappy_map()
    ensemble = pf.TransportEnsemble(nlat=90)
    from_map = ensemble.run(m, years=0.2, step_days=5.0)
    filled = pf.fill_polar_gaps(m, 60)
    from_mean = ensemble.run(filled.br.mean(axis=1), years=0.2, step_days=5.0, lat_edges=m.lat_edges)
    assert np.all(np.isfinite(from_map.br)) and np.all(np.isfinite(from_mean.axial_dipole))
    np.testing.assert_allclose(from_mean.br.values, from_map.br.values, rtol=0, atol=1e-12 * B0)


def test_a_map_with_a_whole_cap_unseen_is_refused():
    profile, _ = sine_grid_dipole(60)
    br = np.repeat(profile[:, None], 120, axis=1)
    m = pf.SynopticMap.from_array(br, grid="sine-latitude", source="blind.fits")
    br[m.lat < -55.0] = np.nan
    blind = pf.SynopticMap.from_array(br, grid="sine-latitude", source="blind.fits")
    with pytest.raises(pf.SettingsError, match="blind.fits: no data poleward of 60 degrees south"):
        pf.TransportEnsemble(nlat=30).run(blind, years=0.1)
    with pytest.raises(pf.SettingsError, match="blind.fits: no data poleward of 60 degrees south"):
        pf.FluxTransport(nlat=30, nlon=12).run(blind, years=0.1)


@pytest.mark.parametrize(
    "initial,kwargs,message",
    [
        (np.zeros(45), {}, r"shape \(45,\) does not match the model grid \(90,\).*grid='sine-latitude'"),
        (np.zeros(45), {"grid": "gaussian"}, "grid='gaussian': expected one of sine-latitude, equal-angle"),
        (np.zeros(45), {"lat_edges": np.linspace(-90, 90, 45)}, "lat_edges has 45 values.*need 46"),
        (np.zeros(45), {"lat_edges": np.linspace(-80, 90, 46)}, "ascend from -90 to \\+90"),
        (np.zeros(45), {"grid": "equal-angle", "lat_edges": np.linspace(-90, 90, 46)}, "not both"),
        (np.zeros((4, 90)), {}, r"one profile per member, \(3, rows\)"),
        ("dipole", {}, "expected a SynopticMap, an array or a function"),
        (lambda lat: np.where(lat > 85, np.nan, 1.0), {}, "no data.*in 2 of its 90 latitude rows"),
    ],
)
def test_initial_states_that_cannot_be_read_are_refused(initial, kwargs, message):
    with pytest.raises(pf.SettingsError, match=message):
        pf.TransportEnsemble(nlat=90, diffusivity=[250.0, 300.0, 350.0]).run(initial, years=0.1, **kwargs)


def test_per_member_profiles_on_a_named_grid():
    profile, _ = sine_grid_dipole(60)
    ensemble = pf.TransportEnsemble(nlat=90, diffusivity=[250.0, 300.0])
    out = ensemble.run(np.stack([profile, -2.0 * profile]), years=0.1, step_days=5.0, grid="sine-latitude")
    assert out.axial_dipole.values[:, 0] == pytest.approx([B0, -2.0 * B0], rel=1e-3)  # closed form


def test_a_region_after_the_end_is_not_counted():
    model = pf.FluxTransport(nlat=36, nlon=72)
    inside = BipolarRegion(0.1, 20.0, 90.0, 1e22)
    after = BipolarRegion(0.9, 20.0, 90.0, 1e22)
    out = model.run(np.zeros(36), years=0.5, step_days=5.0, sources=[inside, after])
    assert out.attrs["regions"] == 1
