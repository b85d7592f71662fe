"""The declining cycle's late emergence (polarflux.emergence), against closed forms and quadrature."""

from __future__ import annotations

import math

import numpy as np
import pytest
from astropy.constants import R_sun
from scipy.integrate import quad

from polarflux.emergence import (
    ANTI_HALE_FRACTION,
    REGIONS_PER_SSN_YEAR,
    SEPARATION_DEG,
    DecliningCycle,
    LateEmergence,
    unit_ring_pair,
)

R_CM = R_sun.to_value("cm")  # astropy's IAU 2015 nominal solar radius


def _hwr(months, a):
    """Hathaway, Wilson & Reichmann 1994 (Sol. Phys. 151, 177), eq. 1 with their b(a) and c = 0.71, written out."""
    b = 27.12 + 25.15 / (1000.0 * a) ** 0.25
    x = np.clip(months, 0.0, None)
    return np.where(x > 0, a * x**3 / (np.exp((x / b) ** 2) - 0.71), 0.0)


def test_ring_pair_carries_its_flux_and_the_dipole_of_the_continuous_bands():
    edges = np.linspace(-90.0, 90.0, 721)
    latitude, tilt, width = 20.0, 10.0, 3.0
    field = unit_ring_pair(edges, latitude, tilt, width)
    area = 2 * math.pi * R_CM**2 * np.diff(np.sin(np.deg2rad(edges)))  # exact ring areas (closed form)
    assert np.sum(field * area) == pytest.approx(0.0, abs=1e-9)  # flux-balanced
    dipole = 3.0 / (4 * math.pi * R_CM**2) * np.sum(field * area * np.sin(np.deg2rad(0.5 * (edges[:-1] + edges[1:]))))
    # the same bands as continuous functions, integrated by quadrature: each band a Gaussian in latitude
    # normalised to 1 Mx over the sphere, the following one poleward by separation x sin(tilt) / 2
    half = 0.5 * SEPARATION_DEG * math.sin(math.radians(tilt))
    expected = 0.0
    for sign, centre in ((1.0, latitude + half), (-1.0, latitude - half)):
        g = lambda p, c=centre: math.exp(-0.5 * ((math.degrees(p) - c) / width) ** 2)  # noqa: E731
        norm = quad(lambda p, g=g: g(p) * math.cos(p), -math.pi / 2, math.pi / 2, points=[math.radians(centre)])[0]
        moment = quad(lambda p, g=g: g(p) * math.cos(p) * math.sin(p), -math.pi / 2, math.pi / 2,
                      points=[math.radians(centre)])[0]
        expected += sign * 3.0 / (4 * math.pi * R_CM**2) * moment / norm
    assert expected > 0  # following polarity poleward: a positive north following polarity builds a positive dipole
    assert dipole == pytest.approx(expected, rel=0.01)


def test_declining_cycle_recovers_a_written_out_hwr_curve():
    start, a = 2030.3, 0.0025
    t = 2030.0 + np.arange(0, 12 * 8) / 12.0 + 1 / 24.0  # monthly means up to 8 years after
    values = _hwr((t - start) * 12.0, a)
    cycle = DecliningCycle.fit(t, values, last_minimum=2030.2, now=2037.0)
    later = np.array([2037.5, 2038.5, 2039.5])
    truth = _hwr((later - start) * 12.0, a)
    assert cycle.start == pytest.approx(start, abs=0.15)
    assert np.allclose(cycle(later), truth, rtol=0.08)


def test_expected_deposits_follow_the_count_the_flux_and_hale_signs():
    edges = np.linspace(-90.0, 90.0, 181)
    area = 2 * math.pi * R_CM**2 * np.diff(np.sin(np.deg2rad(edges)))
    flat = lambda years: np.full(np.shape(years), 50.0)  # noqa: E731 - a steady sunspot number of 50
    late = LateEmergence(flat, cycle_start=2030.0, north_sign=-1.0, flux_scale=2e21, now=2036.0, members=3,
                         random=False)
    added = late.deposit(edges, 0.0, 0.1)
    # the closed form for thin rings: a region of flux F per polarity, following polarity at
    # latitude l + h and leading at l - h, adds 3 F (sin(l + h) - sin(l - h)) / (4 pi R^2) to the axial
    # dipole in either hemisphere (the south mirrors both latitude and sign). Expected regions: 2 per
    # unit SSN per year x 50 x 0.1 yr, the Hale majority less the anti-Hale minority; mean latitude
    # 28 exp(-months / 90) deg (Hathaway 2011, Sol. Phys. 273, 221), tilt 0.5 x latitude (Li & Ulrich
    # 2012, ApJ 758, 115). The bands' Gaussian width (6.3 deg) lowers the moment by about
    # exp(-sigma^2 / 2) = 0.994, within the tolerance.
    regions = REGIONS_PER_SSN_YEAR * 50.0 * 0.1 * (1 - 2 * ANTI_HALE_FRACTION)
    months = (2036.05 - 2030.0) * 12.0
    lat = 28.0 * math.exp(-months / 90.0)
    h = 0.5 * SEPARATION_DEG * math.sin(math.radians(0.5 * lat))
    expected = -regions * 1e21 * 3.0 / (4 * math.pi * R_CM**2) * (math.sin(math.radians(lat + h))
                                                                    - math.sin(math.radians(lat - h)))
    centres = np.sin(np.deg2rad(0.5 * (edges[:-1] + edges[1:])))
    dipole = 3.0 / (4 * math.pi * R_CM**2) * np.sum(added[:, 0] * area * centres)
    assert dipole == pytest.approx(expected, rel=0.03)  # negative: north following polarity negative
    assert np.allclose(added[:, 0], added[:, 2])


def test_random_deposits_average_to_the_expected_one():
    edges = np.linspace(-90.0, 90.0, 181)
    flat = lambda years: np.full(np.shape(years), 40.0)  # noqa: E731
    kwargs = dict(cycle_start=2030.0, north_sign=1.0, flux_scale=2e21, now=2037.0, members=4000)
    expected = LateEmergence(flat, random=False, **kwargs).deposit(edges, 0.0, 0.5)
    drawn = LateEmergence(flat, random=True, seed=3, **kwargs).deposit(edges, 0.0, 0.5)
    sines = np.sin(np.deg2rad(edges[:-1] + 0.5)) * np.diff(np.sin(np.deg2rad(edges)))
    d_expected = sines @ expected[:, 0]
    d_drawn = sines @ drawn
    se = np.std(d_drawn, ddof=1) / math.sqrt(d_drawn.size)
    assert abs(np.mean(d_drawn) - d_expected) < 4 * se
    assert np.std(d_drawn) > 0.1 * abs(d_expected)  # tilt scatter, counts and fluxes spread the members
