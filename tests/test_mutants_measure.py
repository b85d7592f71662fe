"""Cap sums, the dipole and the polar fill against closed forms written out here (mutants the other tests missed).

Sources:
  * exact cell areas on the sphere, R^2 (lon2 - lon1) (sin b - sin a), and of the part of a cell poleward
    of latitude c, R^2 (lon2 - lon1) (sin b - max(sin a, sin c)) (common practice); R is
    ``astropy.constants.R_sun`` (IAU 2015 nominal);
  * the axial dipole (3 / 4 pi) integral of B sin(lat) dOmega: a cell of constant B adds
    B (lon2 - lon1) (sin^2 b - sin^2 a) / 2 (the g_1^0 coefficient; common practice);
  * the polar fill as documented (``fill_polar_gaps``): a row's missing pixels take its observed mean;
    rows with no data take B_p |sin lat|^8 with B_p the least-squares fit to the observed row means
    weighted by observed area (Svalgaard, Duvall & Scherrer 1978 for the profile), written out below.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from astropy import constants
from astropy import units as u
from astropy.time import Time

import polarflux as pf
from polarflux.errors import SettingsError
from polarflux.measure import profile_measures

R_CM = constants.R_sun.to_value(u.cm)


def _sines(edges):
    return np.array([math.sin(math.radians(v)) for v in edges])


def _cap_area_cells(lat_edges, lon_edges, cap, hemisphere):
    """Area (cm^2) of each cell's part inside the cap, from the closed form."""
    s, c = _sines(lat_edges), math.sin(math.radians(cap))
    if hemisphere == "north":
        dsin = np.clip(s[1:], c, None) - np.clip(s[:-1], c, None)
    else:
        dsin = np.clip(s[1:], None, -c) - np.clip(s[:-1], None, -c)
    return R_CM**2 * np.outer(dsin, np.deg2rad(np.diff(lon_edges)))


def _dipole(values, lat_edges, lon_edges):
    s = _sines(lat_edges)
    w = np.outer((s[1:] ** 2 - s[:-1] ** 2) / 2.0, np.deg2rad(np.diff(lon_edges)))
    return 3.0 / (4.0 * math.pi) * float(np.nansum(values * w))


def test_the_default_cap_is_sixty_degrees_and_the_pair_says_what_it_measured():
    m = pf.SynopticMap.from_array(np.full((90, 180), 2.0))
    pair = pf.measure_caps(m)
    area = 2 * math.pi * R_CM**2 * (1 - math.sin(math.radians(60.0)))  # 8.1e21 cm^2
    assert pair.cap_latitude == 60.0 and pair.fill == "none"
    for hemisphere in ("north", "south"):
        cap = pair[hemisphere]
        assert cap.hemisphere == hemisphere
        assert cap.area.to_value(u.cm**2) == pytest.approx(area, rel=1e-12)
        assert cap.signed_flux.to_value(u.Mx) == pytest.approx(2.0 * area, rel=1e-12)
        assert cap.unsigned_flux.to_value(u.Mx) == pytest.approx(2.0 * area, rel=1e-12)
        assert cap.mean_field.to_value(u.G) == pytest.approx(2.0, rel=1e-12)


def test_a_cap_inside_one_row_and_a_cap_of_half_a_degree():
    m = pf.SynopticMap.from_array(np.ones((10, 8)), grid="equal-angle")  # 18-degree rows
    top = pf.measure_caps(m, 75.0)  # only the row from 72 to 90 degrees reaches it
    assert top.north.area.to_value(u.cm**2) == pytest.approx(2 * math.pi * R_CM**2 * (1 - math.sin(math.radians(75))),
                                                            rel=1e-12)
    wide = pf.measure_caps(m, 0.5)
    assert wide.south.area.to_value(u.cm**2) == pytest.approx(2 * math.pi * R_CM**2 * (1 - math.sin(math.radians(0.5))),
                                                             rel=1e-12)


@pytest.mark.parametrize("cap", [45.0, 62.5])
def test_a_fully_seen_cap_has_coverage_exactly_one(cap):
    m = pf.SynopticMap.from_array(np.ones((18, 36)))  # a grid where the sums round above one
    pair = pf.measure_caps(m, cap)
    assert pair.north.coverage == 1.0 and pair.south.coverage == 1.0


def test_an_irregular_longitude_grid_with_gaps_is_integrated_cell_by_cell():
    lat_edges = np.linspace(-90.0, 90.0, 13)
    lon_edges = np.array([0.0, 10.0, 35.0, 90.0, 180.0, 200.0, 300.0, 360.0])
    rng = np.random.default_rng(7)
    values = rng.normal(0.0, 8.0, (12, 7))
    values[[0, 1, 11], [2, 5, 0]] = np.nan
    m = pf.SynopticMap(values, lat_edges, lon_edges, grid="equal-angle")
    pair = pf.measure_caps(m, 55.0)
    for hemisphere in ("north", "south"):
        areas = _cap_area_cells(lat_edges, lon_edges, 55.0, hemisphere)
        seen = np.isfinite(values)
        cap = pair[hemisphere]
        assert cap.signed_flux.to_value(u.Mx) == pytest.approx(np.sum(np.where(seen, values, 0) * areas), rel=1e-12)
        assert cap.unsigned_flux.to_value(u.Mx) == pytest.approx(np.sum(np.where(seen, np.abs(values), 0) * areas),
                                                                 rel=1e-12)
        assert cap.coverage == pytest.approx(np.sum(areas[seen]) / np.sum(areas), rel=1e-12)
    assert pf.axial_dipole(m).to_value(u.G) == pytest.approx(_dipole(values, lat_edges, lon_edges), rel=1e-12)


@pytest.mark.parametrize("call", [
    lambda m: pf.measure_caps(m, cap_latitude="sixty"),
    lambda m: pf.axial_dipole(m, fill="profile", cap_latitude="sixty"),
    lambda m: pf.fill_polar_gaps(m, cap_latitude="sixty"),
    lambda m: profile_measures(np.ones(4), np.linspace(-90, 90, 5), cap_latitude="sixty"),
])
def test_a_cap_latitude_that_is_not_a_number_is_named(call):
    with pytest.raises(SettingsError, match=r"^cap_latitude='sixty' is not a number of degrees"):
        call(pf.SynopticMap.from_array(np.ones((4, 8))))


@pytest.mark.parametrize("cap", [0.0, 90.0, 90.5])
def test_a_cap_latitude_out_of_range_is_named_as_given(cap):
    with pytest.raises(SettingsError, match=rf"^cap_latitude={cap} must lie strictly between 0 and 90"):
        pf.measure_caps(pf.SynopticMap.from_array(np.ones((4, 8))), cap)


def _profile_map(grid="equal-angle", nlat=36, nlon=72, amplitude=12.0):
    """B = amplitude |sin(lat_centre)|^8 per row (the fill's own profile), fully observed."""
    m = pf.SynopticMap.from_array(np.zeros((nlat, nlon)), grid=grid)
    rows = amplitude * np.abs(np.sin(np.deg2rad(m.lat))) ** 8
    return np.repeat(rows[:, None], nlon, axis=1), m.lat_edges, m.lon_edges


def test_the_profile_fill_uses_the_cap_it_is_given():
    full, lat_edges, lon_edges = _profile_map()
    seen = full.copy()
    seen[[-1, -2, 0], :] = np.nan  # the polar rows unseen
    seen[26:30, ::2] = np.nan  # rows between 40 and 60 degrees north half seen
    m = pf.SynopticMap(seen, lat_edges, lon_edges, grid="equal-angle")
    pair = pf.measure_caps(m, 40.0, fill="profile")
    for hemisphere in ("north", "south"):
        exact = np.sum(full * _cap_area_cells(lat_edges, lon_edges, 40.0, hemisphere))
        assert pair[hemisphere].signed_flux.to_value(u.Mx) == pytest.approx(exact, rel=1e-10)
    dipole = pf.axial_dipole(m, fill="profile", cap_latitude=40.0).to_value(u.G)
    assert dipole == pytest.approx(_dipole(full, lat_edges, lon_edges), rel=1e-10)


def test_the_fill_and_the_dipole_default_to_sixty_degrees_and_no_fill():
    rows = np.linspace(-3.0, 5.0, 180)  # a field constant along each 1-degree row
    full = np.repeat(rows[:, None], 36, axis=1)
    lat_edges, lon_edges = np.linspace(-90.0, 90.0, 181), np.linspace(0.0, 360.0, 37)
    seen = full.copy()
    seen[150, :30] = np.nan  # the row from 60 to 61 degrees north, mostly unseen
    m = pf.SynopticMap(seen, lat_edges, lon_edges, grid="equal-angle")
    filled = pf.fill_polar_gaps(m)
    np.testing.assert_allclose(filled.values[150], full[150], rtol=1e-14)  # its observed mean: in the 60-degree cap
    assert pf.axial_dipole(m, fill="profile").to_value(u.G) == pytest.approx(_dipole(full, lat_edges, lon_edges),
                                                                             rel=1e-12)
    assert pf.axial_dipole(m).to_value(u.G) == pytest.approx(_dipole(seen, lat_edges, lon_edges), rel=1e-12)


def test_a_south_cap_is_filled_when_the_north_is_complete():
    full, lat_edges, lon_edges = _profile_map()
    seen = full.copy()
    seen[0, :] = np.nan
    seen[1, 10:50] = np.nan
    m = pf.SynopticMap(seen, lat_edges, lon_edges, grid="equal-angle")
    np.testing.assert_allclose(pf.fill_polar_gaps(m).values, full, rtol=1e-12)


def test_a_row_seen_over_less_than_a_radian_keeps_its_own_mean():
    rows = 1.0 + np.arange(36.0)  # constant per row, unlike the fill's profile
    full = np.repeat(rows[:, None], 72, axis=1)
    lat_edges, lon_edges = np.linspace(-90.0, 90.0, 37), np.linspace(0.0, 360.0, 73)
    seen = full.copy()
    seen[33, 8:] = np.nan  # 8 of 72 columns seen: 40 degrees, 0.70 radian
    filled = pf.fill_polar_gaps(pf.SynopticMap(seen, lat_edges, lon_edges, grid="equal-angle"))
    np.testing.assert_allclose(filled.values[33], full[33], rtol=1e-14)


def test_unseen_rows_take_the_profile_fitted_with_observed_area_weights():
    lat_edges, lon_edges = np.linspace(-90.0, 90.0, 19), np.linspace(0.0, 360.0, 37)  # 10-degree rows
    rng = np.random.default_rng(9)
    values = np.repeat(rng.uniform(2.0, 9.0, 18)[:, None], 36, axis=1)
    values[17] = np.nan  # 80-90 north unseen
    values[16, :27] = np.nan  # 70-80: a quarter seen
    values[15, :9] = np.nan  # 60-70: three quarters seen
    m = pf.SynopticMap(values, lat_edges, lon_edges, grid="equal-angle")
    filled = pf.fill_polar_gaps(m, 60.0)
    centres = np.deg2rad(0.5 * (lat_edges[:-1] + lat_edges[1:]))
    shape = np.abs(np.sin(centres)) ** 8
    s = _sines(lat_edges)
    rows = [15, 16]
    seen_width = np.array([np.sum(np.isfinite(values[j])) * math.radians(10.0) for j in rows])
    means = np.array([np.nanmean(values[j]) for j in rows])
    weight = seen_width * (s[np.array(rows) + 1] - s[rows])  # observed area of each row, per R^2
    amplitude = np.sum(weight * shape[rows] * means) / np.sum(weight * shape[rows] ** 2)
    np.testing.assert_allclose(filled.values[17], amplitude * shape[17], rtol=1e-12)


def test_the_filled_map_keeps_everything_but_its_gaps():
    full, lat_edges, lon_edges = _profile_map(nlat=18, nlon=24)
    full[-1, :5] = np.nan
    lat = 0.5 * (lat_edges[:-1] + lat_edges[1:]) + 0.01  # centres as a header might state them
    lon = 0.5 * (lon_edges[:-1] + lon_edges[1:]) - 0.02
    when = Time("2061-03-04T05:06:07", scale="utc")
    m = pf.SynopticMap(full, lat_edges, lon_edges, carrington_rotation=2500, time=when, instrument="invented",
                       grid="equal-angle", source="a.fits", lat=lat, lon=lon, header={"OBSERVER": "none"})
    filled = pf.fill_polar_gaps(m)
    assert (filled.carrington_rotation, filled.instrument, filled.grid, filled.source) == (2500, "invented",
                                                                                           "equal-angle", "a.fits")
    assert filled.time == when and filled.header == {"OBSERVER": "none"}
    np.testing.assert_array_equal(filled.lat, lat)
    np.testing.assert_array_equal(filled.lon, lon)
    assert np.all(np.isfinite(filled.values)) and np.isnan(m.values[-1, 0])  # m itself unchanged


def test_profile_measures_are_the_cap_means_and_dipole_of_the_profiles():
    lat_edges = np.linspace(-90.0, 90.0, 13)
    profiles = np.array([np.linspace(-4.0, 6.0, 12), np.cos(np.arange(12.0))])
    out = profile_measures(profiles, lat_edges)  # the default cap: 60 degrees
    s = _sines(lat_edges)
    c = math.sin(math.radians(60.0))
    north = np.clip(s[1:], c, None) - np.clip(s[:-1], c, None)
    south = np.clip(s[1:], None, -c) - np.clip(s[:-1], None, -c)
    np.testing.assert_allclose(out["north_mean_field"], profiles @ north / north.sum(), rtol=1e-12)
    np.testing.assert_allclose(out["south_mean_field"], profiles @ south / south.sum(), rtol=1e-12)
    # (3 / 4 pi) x 2 pi x sum of B (sin^2 b - sin^2 a) / 2
    np.testing.assert_allclose(out["axial_dipole"], 1.5 * profiles @ ((s[1:] ** 2 - s[:-1] ** 2) / 2), rtol=1e-12)
    at_70 = profile_measures(profiles, lat_edges, 70.0)["north_mean_field"]
    c70 = math.sin(math.radians(70.0))
    north70 = np.clip(s[1:], c70, None) - np.clip(s[:-1], c70, None)
    np.testing.assert_allclose(at_70, profiles @ north70 / north70.sum(), rtol=1e-12)
