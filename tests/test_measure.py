"""Cap measures and the axial dipole against analytic integrals on the sphere.

Reference values are closed-form integrals (common practice for quadrature checks):
  uniform B over the cap poleward of c:   2 pi R^2 B (1 - sin c)
  Br = B0 sin(latitude) over that cap:     pi R^2 B0 cos^2(c)
  axial dipole of Br = B0 sin(latitude):   B0   (g_1^0 of the Legendre expansion)
R is astropy.constants.R_sun (IAU 2015 nominal solar radius).
"""

from __future__ import annotations

import numpy as np
import pytest
from astropy import constants
from astropy import units as u
from conftest import blank_map, cell_mean_sine, field_map

import polarflux as pf

R = constants.R_sun.to_value(u.cm)
GRIDS = ["sine-latitude", "equal-angle"]
SIZES = [(36, 72), (90, 180), (180, 360), (360, 720), (1440, 16)]


@pytest.mark.parametrize("grid", GRIDS)
@pytest.mark.parametrize("nlat,nlon", SIZES)
@pytest.mark.parametrize("cap", [60.0, 55.0, 70.3])
def test_uniform_field_cap_flux_is_exact(grid, nlat, nlon, cap):
    b = 3.7
    m = pf.SynopticMap.from_array(np.full((nlat, nlon), b), grid=grid)
    caps = pf.measure_caps(m, cap_latitude=cap)
    exact = 2 * np.pi * R**2 * b * (1 - np.sin(np.deg2rad(cap)))
    for hemisphere in ("north", "south"):
        c = caps[hemisphere]
        assert c.signed_flux.unit == u.Mx and c.mean_field.unit == u.G
        assert c.signed_flux.value == pytest.approx(exact, rel=1e-10)
        assert c.unsigned_flux.value == pytest.approx(exact, rel=1e-10)
        assert c.area.to_value(u.cm**2) == pytest.approx(exact / b, rel=1e-10)
        assert c.mean_field.value == pytest.approx(b, rel=1e-10)
        assert c.coverage == pytest.approx(1.0, abs=1e-12)


def test_cap_latitude_accepts_quantity():
    m = pf.SynopticMap.from_array(np.ones((90, 180)))
    a = pf.measure_caps(m, cap_latitude=60 * u.deg)
    b = pf.measure_caps(m, cap_latitude=np.pi / 3 * u.rad)
    assert a.north.signed_flux.value == pytest.approx(b.north.signed_flux.value, rel=1e-12)


@pytest.mark.parametrize("nlat", [36, 90, 180, 360, 720])
def test_sine_field_cap_flux_exact_where_cap_edge_is_a_row_edge(nlat):
    # Equal-angle rows of 180/nlat degrees put 60 degrees on a row edge: the
    # cell-mean field then integrates exactly.
    m = blank_map(nlat, 16, "equal-angle")
    m = field_map(2.5 * cell_mean_sine(m), 16, "equal-angle")
    caps = pf.measure_caps(m, 60)
    exact = np.pi * R**2 * 2.5 * np.cos(np.deg2rad(60)) ** 2
    assert caps.north.signed_flux.value == pytest.approx(exact, rel=1e-10)
    assert caps.south.signed_flux.value == pytest.approx(-exact, rel=1e-10)


@pytest.mark.parametrize("nlat", [45, 90, 180, 360, 720, 1440])
def test_sine_field_cap_flux_on_sine_grid_matches_boundary_cell_error(nlat):
    # On a sine-latitude grid 60 degrees cuts a row [a, b]. With the cell-mean field
    # (sin a + sin b)/2 held over the cut part, the integral misses exactly
    # 2 pi R^2 B0 (sin b - sin c)(sin c - sin a) / 2; that term is O(h^2) and the
    # measure converges to pi R^2 B0 cos^2(60).
    b0 = 1.0
    m = blank_map(nlat, 16, "sine-latitude")
    m = field_map(b0 * cell_mean_sine(m), 16, "sine-latitude")
    s = m.sin_lat_edges
    c = np.sin(np.deg2rad(60))
    k = np.searchsorted(s, c) - 1
    missing = 2 * np.pi * R**2 * b0 * (s[k + 1] - c) * (c - s[k]) / 2
    exact = np.pi * R**2 * b0 * np.cos(np.deg2rad(60)) ** 2
    got = pf.measure_caps(m, 60).north.signed_flux.value
    assert got == pytest.approx(exact - missing, rel=1e-10)
    h = 2.0 / nlat
    assert abs(got / exact - 1) <= h**2 + 1e-12


@pytest.mark.parametrize("grid", GRIDS)
def test_axial_dipole_of_sin_latitude_converges_to_b0(grid):
    errors = []
    sizes = [45, 90, 180, 360, 720]
    for nlat in sizes:
        m = blank_map(nlat, 8, grid)
        m = field_map(4.0 * np.sin(np.deg2rad(m.lat)), 8, grid)
        d = pf.axial_dipole(m)
        assert d.unit == u.G
        errors.append(abs(d.value / 4.0 - 1))
    ratios = np.array(errors[:-1]) / np.array(errors[1:])
    assert np.all(ratios > 3.9) and np.all(ratios < 4.1)  # second order
    assert errors[-1] < 5e-6


@pytest.mark.parametrize("nlat", [45, 90, 180, 1080])
def test_axial_dipole_on_sine_grid_has_the_midpoint_rule_error(nlat):
    # On a sine-latitude grid the quadrature is the midpoint rule for the integral of
    # s^2 over [-1, 1], whose error is -(2 h^2 / 24) * 2 with h = 2/nlat:
    # the dipole comes out as B0 (1 - 1/nlat^2) exactly.
    m = blank_map(nlat, 8, "sine-latitude")
    m = field_map(np.sin(np.deg2rad(m.lat)), 8, "sine-latitude")
    assert pf.axial_dipole(m).value == pytest.approx(1 - 1 / nlat**2, rel=1e-12)


@pytest.mark.parametrize("grid", GRIDS)
def test_axial_dipole_exact_cases(grid):
    m = blank_map(180, 36, grid)
    hemispheric = field_map(2.0 * np.sign(m.lat), 36, grid)
    # (3 / 4 pi) * 2 * integral of |sin| dOmega = (3 / 4 pi) * 2 * 2 pi = 3
    assert pf.axial_dipole(hemispheric).value == pytest.approx(3.0, rel=1e-12)
    uniform = field_map(np.full(180, 5.0), 36, grid)
    assert abs(pf.axial_dipole(uniform).value) < 1e-12
    # P_2 (quadrupole) cell means on the sine grid are symmetric: no dipole.
    quad = field_map(cell_mean_sine(m) ** 2 - 1 / 3, 36, grid)
    assert abs(pf.axial_dipole(quad).value) < 1e-12


def test_sign_and_scaling_symmetries():
    rng = np.random.default_rng(1)
    br = rng.normal(0, 10, (90, 180))
    m = pf.SynopticMap.from_array(br)
    neg = pf.SynopticMap.from_array(-3 * br)
    mirror = pf.SynopticMap.from_array(br[::-1])
    a, b, c = pf.measure_caps(m), pf.measure_caps(neg), pf.measure_caps(mirror)
    assert b.north.signed_flux.value == pytest.approx(-3 * a.north.signed_flux.value, rel=1e-12)
    assert b.north.unsigned_flux.value == pytest.approx(3 * a.north.unsigned_flux.value, rel=1e-12)
    assert c.south.signed_flux.value == pytest.approx(a.north.signed_flux.value, rel=1e-12)
    assert pf.axial_dipole(mirror).value == pytest.approx(-pf.axial_dipole(m).value, rel=1e-12)


def test_cap_flux_adds_up_over_nested_caps():
    rng = np.random.default_rng(2)
    m = pf.SynopticMap.from_array(rng.normal(0, 5, (180, 360)))
    outer = pf.measure_caps(m, 50).north
    inner = pf.measure_caps(m, 70).north
    band = pf.measure_caps(m, 50).north.signed_flux - pf.measure_caps(m, 70).north.signed_flux
    # The band 50..70 computed independently (exact cell areas written out in conftest, astropy's
    # R_sun): exact fractional weights make the two caps' difference equal to the band integral.
    from conftest import band_flux_reference

    direct = band_flux_reference(m.br, m.lat_edges, m.lon_edges, 50, 70)
    assert band.value == pytest.approx(direct, rel=1e-10)
    assert outer.area > inner.area


def test_missing_rows_reduce_coverage_and_profile_fill_restores_the_flux():
    m = blank_map(180, 360, "sine-latitude")
    sine = np.sin(np.deg2rad(m.lat))
    truth = field_map(np.where(sine > 0, 9.0, -6.0) * sine**8, 360, "sine-latitude")
    gappy = truth.br.copy()
    gappy[m.lat > 80] = np.nan            # whole rows missing near the north pole
    gappy[m.lat < -75, :100] = np.nan     # part of each row near the south pole
    g = pf.SynopticMap.from_array(gappy)
    full = pf.measure_caps(truth)
    none = pf.measure_caps(g, fill="none")
    filled = pf.measure_caps(g, fill="profile")
    assert none.north.coverage < 1 and none.south.coverage < 1
    assert filled.north.coverage == none.north.coverage  # coverage reports what was observed
    assert abs(none.north.signed_flux.value) < abs(full.north.signed_flux.value)
    # The map follows the fill model exactly, so the fill restores the flux.
    for h in ("north", "south"):
        assert filled[h].signed_flux.value == pytest.approx(full[h].signed_flux.value, rel=1e-9)
    assert pf.axial_dipole(g, fill="profile").value == pytest.approx(pf.axial_dipole(truth).value, rel=1e-9)
    assert np.isnan(g.br).sum() == np.isnan(gappy).sum()  # the input map is not changed


def test_empty_cap_stays_missing_with_zero_coverage():
    br = np.ones((90, 180))
    m = pf.SynopticMap.from_array(br)
    br[m.lat > 55] = np.nan
    g = pf.SynopticMap.from_array(br)
    caps = pf.measure_caps(g, fill="profile")
    assert caps.north.coverage == 0.0 and caps.north.signed_flux.value == 0.0
    assert caps.south.coverage == pytest.approx(1.0)


@pytest.mark.parametrize("cap", [0, 90, -10, 95])
def test_cap_latitude_out_of_range_is_refused(cap):
    m = pf.SynopticMap.from_array(np.ones((18, 36)))
    with pytest.raises(pf.SettingsError, match="cap"):
        pf.measure_caps(m, cap_latitude=cap)


def test_unknown_fill_is_refused():
    m = pf.SynopticMap.from_array(np.ones((18, 36)))
    with pytest.raises(pf.SettingsError, match="fill"):
        pf.measure_caps(m, fill="zeros")


def test_float32_maps_measure_like_float64_and_br_is_float64(tmp_path):
    from polarflux.maps import write_map

    rng = np.random.default_rng(4)
    br = rng.normal(0, 20, (180, 360))
    br[:6] = np.nan
    br[100, 5] = np.nan
    exact = pf.SynopticMap.from_array(br.astype(np.float32).astype(np.float64))
    stored = pf.read_map(write_map(pf.SynopticMap.from_array(br), tmp_path / "m.fits"))
    assert stored.values.dtype == np.float32  # kept as stored until br is used
    a, b = pf.measure_caps(exact), pf.measure_caps(stored)
    for h in ("north", "south"):
        assert b[h].signed_flux.value == pytest.approx(a[h].signed_flux.value, rel=1e-6)
        assert b[h].unsigned_flux.value == pytest.approx(a[h].unsigned_flux.value, rel=1e-6)
        assert b[h].coverage == pytest.approx(a[h].coverage, abs=1e-14)
    assert pf.axial_dipole(stored).value == pytest.approx(pf.axial_dipole(exact).value, rel=1e-5, abs=1e-9)
    assert stored.br.dtype == np.float64


def test_changing_br_in_place_is_seen_by_the_measures():
    m = pf.SynopticMap.from_array(np.ones((90, 180)))
    before = pf.measure_caps(m).north.signed_flux
    m.br[:] *= 3.0
    after = pf.measure_caps(m).north.signed_flux
    assert after.value == pytest.approx(3 * before.value, rel=1e-12)
    source = np.ones((90, 180))
    m2 = pf.SynopticMap(source, m.lat_edges, m.lon_edges)
    pf.measure_caps(m2)
    source[:] = 5.0  # the constructor copied: the map does not change
    assert pf.measure_caps(m2).north.mean_field.value == pytest.approx(1.0)
