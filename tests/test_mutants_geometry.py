"""Areas, cap fractions and the conservative regrid against closed forms written out here.

Sources:
  * the area of a latitude-longitude cell, R^2 (lon2 - lon1) (sin lat2 - sin lat1), and of a polar cap,
    2 pi R^2 (1 - sin c) (Archimedes' hat-box theorem; common practice), checked also by
    ``scipy.integrate.quad`` of 2 pi R^2 cos(lat) over latitude;
  * the solar radius: ``astropy.constants.R_sun`` (IAU 2015 nominal, 695,700 km);
  * an area-weighted remap of piecewise-constant cells: each destination cell is the sum over source
    cells of value x overlap area, divided by its own area (common practice), computed below by brute
    force over interval overlaps, independently of the package's running integrals.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from astropy import constants
from astropy import units as u
from scipy import integrate

from polarflux.errors import SettingsError
from polarflux.geometry import (
    as_degrees,
    cap_row_fraction,
    cell_areas,
    regrid_conservative,
    sine_edges,
    spherical_cap_area,
)

R_CM = constants.R_sun.to_value(u.cm)  # astropy: IAU 2015 nominal solar radius


def test_as_degrees_names_the_setting_by_default():
    assert as_degrees(0.5 * u.rad) == pytest.approx(math.degrees(0.5), rel=1e-15)
    with pytest.raises(SettingsError, match=r"^angle='north'"):
        as_degrees("north")
    with pytest.raises(SettingsError, match=r"^angle=3\.0 m is not an angle"):
        as_degrees(3.0 * u.m)


def test_single_precision_edges_give_double_precision_sines_and_areas():
    """Edges read from a float32 axis: the sines and widths of those float32 values, in float64."""
    lat32 = np.array([-90.0, -60.3, -12.7, 0.0, 33.1, 89.9, 90.0], dtype=np.float32)
    lon32 = np.array([0.0, 0.3, 117.7, 360.0], dtype=np.float32)
    expected = [math.sin(math.radians(float(v))) for v in lat32]
    np.testing.assert_allclose(sine_edges(lat32), expected, rtol=1e-15, atol=1e-16)
    areas = cell_areas(lat32, lon32)
    for j in range(lat32.size - 1):
        for i in range(lon32.size - 1):
            width = math.radians(float(lon32[i + 1]) - float(lon32[i]))
            exact = R_CM**2 * width * (expected[j + 1] - expected[j])
            assert areas[j, i] == pytest.approx(exact, rel=1e-13)


def test_cell_areas_add_up_to_the_sphere_and_match_the_closed_form():
    lat = np.linspace(-90.0, 90.0, 7)
    lon = np.linspace(0.0, 360.0, 5)
    areas = cell_areas(lat, lon)
    assert areas.shape == (6, 4)
    assert areas.sum() == pytest.approx(4.0 * math.pi * R_CM**2, rel=1e-14)  # 6.08e22 cm^2
    # the cell from 30 to 60 degrees north and 90 degrees wide: R^2 (pi/2) (sin 60 - sin 30)
    assert areas[4, 1] == pytest.approx(R_CM**2 * (math.pi / 2) * (math.sqrt(3) / 2 - 0.5), rel=1e-14)


@pytest.mark.parametrize("cap", [30.0, 60.0, 75.0])
def test_spherical_cap_area_is_the_closed_form_and_the_integral(cap):
    closed = 2.0 * math.pi * R_CM**2 * (1.0 - math.sin(math.radians(cap)))
    quad, _ = integrate.quad(lambda lat: 2.0 * math.pi * R_CM**2 * math.cos(lat), math.radians(cap), math.pi / 2)
    assert spherical_cap_area(cap) == pytest.approx(closed, rel=1e-14)
    assert spherical_cap_area(cap) == pytest.approx(quad, rel=1e-12)
    # 60 degrees: a quarter of a hemisphere's... 2 pi R^2 (1 - 0.866) = 0.134 of the hemisphere (from the form)
    assert spherical_cap_area(cap, radius_cm=1.0) == pytest.approx(2.0 * math.pi * (1.0 - math.sin(math.radians(cap))))


def test_cap_fractions_are_zero_outside_the_cap_and_exact_at_its_edge():
    lat = np.array([-90.0, -70.0, -50.0, -20.0, 20.0, 50.0, 70.0, 90.0])
    c = math.sin(math.radians(60.0))
    north = cap_row_fraction(lat, 60.0, "north")
    south = cap_row_fraction(lat, 60.0, "south")
    cut = (math.sin(math.radians(70.0)) - c) / (math.sin(math.radians(70.0)) - math.sin(math.radians(50.0)))
    np.testing.assert_allclose(north, [0, 0, 0, 0, 0, cut, 1], rtol=1e-14, atol=0)
    np.testing.assert_allclose(south, [1, cut, 0, 0, 0, 0, 0], rtol=1e-14, atol=0)


@pytest.mark.parametrize("cap", [0.0, -5.0, 90.0, 90.5])
def test_cap_latitude_must_lie_strictly_inside_the_hemisphere(cap):
    with pytest.raises(SettingsError, match="strictly between 0 and 90"):
        cap_row_fraction(np.linspace(-90, 90, 5), cap, "north")


def test_a_cap_of_half_a_degree_is_nearly_the_hemisphere():
    lat = np.array([-90.0, 0.0, 1.0, 90.0])
    north = cap_row_fraction(lat, 0.5, "north")
    s1 = math.sin(math.radians(1.0))
    np.testing.assert_allclose(north, [0.0, (s1 - math.sin(math.radians(0.5))) / s1, 1.0], rtol=1e-13)


def _overlap(a0, a1, b0, b1):
    return max(0.0, min(a1, b1) - max(a0, b0))


def _brute_force_regrid(values, slat, slon, dlat, dlon):
    """Sum of value x overlap area over source cells; longitudes periodic with 360 degrees."""
    ss, ds = [math.sin(math.radians(v)) for v in slat], [math.sin(math.radians(v)) for v in dlat]
    out = np.zeros((len(dlat) - 1, len(dlon) - 1))
    for j in range(len(dlat) - 1):
        for i in range(len(dlon) - 1):
            total = 0.0
            for q in range(len(slat) - 1):
                wlat = _overlap(ss[q], ss[q + 1], ds[j], ds[j + 1])
                if wlat == 0.0:
                    continue
                for p in range(len(slon) - 1):
                    wlon = sum(_overlap(slon[p] + k * 360.0, slon[p + 1] + k * 360.0, dlon[i], dlon[i + 1])
                               for k in (-2, -1, 0, 1, 2))
                    total += values[q, p] * wlat * wlon
            out[j, i] = total / ((ds[j + 1] - ds[j]) * (dlon[i + 1] - dlon[i]))
    return out


@pytest.mark.parametrize("src_start, dst_start", [(0.0, 0.0), (40.0, -100.0), (-180.0, 25.0)])
def test_regrid_is_the_area_weighted_mean_of_overlapping_cells(src_start, dst_start):
    rng = np.random.default_rng(11)
    slat = np.array([-90.0, -41.0, -3.0, 22.0, 64.0, 90.0])
    slon = src_start + np.array([0.0, 50.0, 130.0, 200.0, 290.0, 360.0])
    dlat = np.array([-90.0, -60.0, -10.0, 30.0, 90.0])
    dlon = dst_start + np.array([0.0, 75.0, 160.0, 255.0, 360.0])
    values = rng.normal(0.0, 5.0, (slat.size - 1, slon.size - 1))
    got = regrid_conservative(values, slat, slon, dlat, dlon)
    np.testing.assert_allclose(got, _brute_force_regrid(values, slat, slon, dlat, dlon), rtol=1e-10, atol=1e-12)


def test_regrid_of_single_precision_input_works_in_double_precision():
    """A float32 map and float32 edges (as read from a FITS file) regrid like their float64 values."""
    rng = np.random.default_rng(12)
    slat32 = np.array([-90.0, -41.3, -3.7, 22.1, 64.9, 90.0], dtype=np.float32)
    slon32 = np.array([0.0, 50.7, 130.1, 200.9, 290.3, 360.0], dtype=np.float32)
    dlon32 = np.array([-90.0, 33.3, 100.1, 190.7, 270.0], dtype=np.float32)  # float32 widths would round
    dlat = np.array([-90.0, -60.0, -10.0, 30.0, 90.0])
    values32 = rng.normal(0.0, 5.0, (5, 5)).astype(np.float32)
    got = regrid_conservative(values32, slat32, slon32, dlat, dlon32)
    assert got.dtype == np.float64
    ref = _brute_force_regrid(values32.astype(np.float64), slat32.astype(np.float64), slon32.astype(np.float64),
                              dlat, dlon32.astype(np.float64))
    np.testing.assert_allclose(got, ref, rtol=1e-12, atol=1e-12)
