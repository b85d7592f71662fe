"""Cross-calibration of two instruments that are not equally noisy.

References: Deming regression through the origin against the minimum of its own
definition, sum (y - k x)^2 / (s_y^2 + k^2 s_x^2) (Deming 1943), found by
scipy.optimize (a general reference library);
the noise of a series from its second differences (variance 6 s^2 for independent noise
of standard deviation s, von Neumann et al. 1941, common practice for a smooth signal).
"""

import numpy as np
import pytest
import xarray as xr

from polarflux.calibration import cross_calibrate, deming_through_origin, noise_sd

ROTATION_YEARS = 27.2753 / 365.25  # synodic Carrington rotation (common practice)


def two_instruments(rng, factor=0.85, noise_ref=0.1, noise_inst=0.6, overlap=(300, 360)):
    """A record: the reference on rotations 0-499, the other instrument on ``overlap`` reading truth / factor.

    The truth is a polar field of 3 G passing through zero inside the overlap (a minimum,
    weak fields: where the error ratio matters most); the axial dipole is half of it."""
    t = np.arange(500) * ROTATION_YEARS
    truth = 3.0 * np.sin(2 * np.pi * (t - t[330]) / 22.0 + 0.3)
    rows = []
    for name, lo, hi, scale, noise in (("REF", 0, 500, 1.0, noise_ref),
                                       ("INST", *overlap, 1.0 / factor, noise_inst)):
        for r in range(lo, hi):
            rows.append((name, r, scale * truth[r] + rng.normal(0, noise), -scale * truth[r] + rng.normal(0, noise),
                         0.5 * scale * truth[r] + rng.normal(0, noise / 2)))
    name, rot, north, south, dipole = zip(*rows, strict=True)
    return xr.Dataset({"mean_field": (("time", "hemisphere"), np.stack([north, south], axis=1)),
                       "axial_dipole": (("time",), np.array(dipole)),
                       "carrington_rotation": (("time",), np.array(rot)),
                       "instrument": (("time",), np.array(name))},
                      coords={"hemisphere": ["north", "south"]})


def test_deming_with_the_error_ratio_is_the_minimum_of_its_definition():
    from scipy.optimize import minimize_scalar

    rng = np.random.default_rng(4)
    truth = rng.uniform(-3, 3, 80)
    x, y = truth / 0.85 + rng.normal(0, 0.6, 80), truth + rng.normal(0, 0.1, 80)
    best = minimize_scalar(lambda k: np.sum((y - k * x) ** 2) / (0.1**2 + k**2 * 0.6**2), bounds=(0.1, 3.0),
                           method="bounded", options={"xatol": 1e-10})
    assert deming_through_origin(x, y, (0.1 / 0.6) ** 2) == pytest.approx(best.x, rel=1e-6)
    assert abs(deming_through_origin(x, y) - best.x) > 0.01  # the equal-noise slope is another one


def test_noise_is_estimated_from_second_differences():
    rng = np.random.default_rng(5)
    rotations = np.arange(400)
    smooth = 5 * np.sin(2 * np.pi * rotations * ROTATION_YEARS / 11.0)
    for s in (0.1, 0.6):
        estimates = [noise_sd(smooth + rng.normal(0, s, 400), rotations) for _ in range(30)]
        assert np.mean(estimates) == pytest.approx(s, rel=0.05)
    # runs broken by gaps are not differenced across them; too few runs give no estimate
    assert np.isnan(noise_sd(np.ones(12), np.arange(0, 24, 2)))


def test_the_factor_of_a_noisier_instrument_over_weak_fields_is_not_attenuated():
    rng = np.random.default_rng(6)
    fitted, equal, ratios = [], [], []
    for _ in range(40):
        record = two_instruments(rng)
        polar = next(f for f in cross_calibrate(record, reference="REF") if f.quantity == "polar")
        ratios.append(polar.error_ratio)
        fitted.append(polar.factor)
        ok = record["instrument"].values == "INST"
        ref = record["mean_field"].values[~ok][300:360]
        equal.append(deming_through_origin(record["mean_field"].values[ok].ravel(), ref.ravel()))
    assert np.median(ratios) == pytest.approx((0.1 / 0.6) ** 2, rel=0.2)
    assert np.mean(fitted) == pytest.approx(0.85, rel=0.015)
    assert np.mean(equal) < 0.85 * 0.95  # what the equal-noise assumption gave: attenuated by the noisier one
