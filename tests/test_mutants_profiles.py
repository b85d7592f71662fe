"""Flow and rotation profiles against their published formulas written out here (mutants the other tests missed).

Sources:
  * Snodgrass (1983, ApJ 270, 288), magnetic features: Omega = A + B sin^2 + C sin^4 in microradians
    per second, (A, B, C) = (2.902, -0.464, -0.328) (recalled from memory, as in the package);
  * the Carrington frame turns 360 degrees in 25.38 days (sidereal; the definition, common practice);
  * van Ballegooijen, Cartledge & Priest (1998, ApJ 501, 866): v = v0 sin(2.4 lat) below 75 degrees,
    zero above; v0 = 11 m/s is the model's documented default peak speed.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from polarflux.errors import SettingsError
from polarflux.transport.profiles import rotation_profile, snodgrass_rotation, van_ballegooijen_flow

MICRORAD_PER_S_TO_DEG_PER_DAY = math.degrees(1e-6) * 86400.0
CARRINGTON_DEG_PER_DAY = 360.0 / 25.38


def _rotation(lat_deg, a, b, c):
    s2 = math.sin(math.radians(lat_deg)) ** 2
    return (a + b * s2 + c * s2 * s2) * MICRORAD_PER_S_TO_DEG_PER_DAY - CARRINGTON_DEG_PER_DAY


LATS32 = np.array([-83.7, -41.3, -0.9, 12.1, 55.55, 74.9], dtype=np.float32)  # as a float32 grid holds them


def test_rotation_of_single_precision_latitudes_is_computed_in_double_precision():
    got = snodgrass_rotation(LATS32)
    expected = [_rotation(float(v), 2.902, -0.464, -0.328) for v in LATS32]
    np.testing.assert_allclose(got, expected, rtol=1e-13)


@pytest.mark.parametrize("word", ["none", "None", "NONE"])
def test_rotation_none_in_any_case_means_no_rotation(word):
    assert rotation_profile(word) is None
    assert rotation_profile(None) is None


def test_three_coefficients_give_the_law_with_those_coefficients():
    law = rotation_profile((2.85, -0.35, -0.45))
    lats = np.array([-70.0, -20.0, 0.0, 35.0, 80.0])
    np.testing.assert_allclose(law(lats), [_rotation(v, 2.85, -0.35, -0.45) for v in lats], rtol=1e-13)
    law_list = rotation_profile([2.85, -0.35, -0.45])
    np.testing.assert_allclose(law_list(lats), law(lats), rtol=0)


@pytest.mark.parametrize("bad", [(2.9, -0.4), (2.9, -0.4, -0.3, 0.1)])
def test_other_than_three_coefficients_are_refused(bad):
    with pytest.raises(SettingsError, match="three"):
        rotation_profile(bad)


def test_default_flow_is_eleven_metres_per_second_below_75_degrees():
    lats = np.array([-80.0, -74.9, -37.5, 0.0, 20.0, 37.5, 74.9, 75.1, 89.0])
    expected = [11.0 * math.sin(math.radians(2.4 * v)) if abs(v) < 75.0 else 0.0 for v in lats]
    np.testing.assert_allclose(van_ballegooijen_flow(lats), expected, rtol=1e-13, atol=0)
    assert van_ballegooijen_flow(np.array([37.5]))[0] == pytest.approx(11.0, rel=1e-15)  # the peak: 2.4 x 37.5 = 90


def test_flow_cut_off_can_be_moved_and_float32_latitudes_are_computed_in_double():
    lats = np.array([60.0, 70.0, 80.0])
    assert list(van_ballegooijen_flow(lats, 15.0, cutoff_deg=65.0) != 0.0) == [True, False, False]
    got = van_ballegooijen_flow(LATS32, 11.0)
    expected = [11.0 * math.sin(math.radians(2.4 * float(v))) if abs(float(v)) < 75.0 else 0.0 for v in LATS32]
    np.testing.assert_allclose(got, expected, rtol=1e-13)
