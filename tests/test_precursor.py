"""The precursor laws against statsmodels, and the flag on a slope that contradicts the relation.

Sources:
  * statsmodels OLS and get_prediction(...).summary_frame (reference prediction intervals): the
    proportional law is OLS of ln(amplitude / |proxy|) on a constant, its prediction interval for
    a new cycle that of a new observation;
  * precursor physics (common practice, following Schatten et al. 1978 and Munoz-Jaramillo et al.
    2013): a stronger polar field at minimum gives a stronger next cycle.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import polarflux as pf
from polarflux.precursor import ProportionalFit
from polarflux.tables import forecast_text


def test_proportional_law_matches_statsmodels_in_log_space():
    rng = np.random.default_rng(8)
    x = rng.uniform(0.8, 3.5, 5)
    y = 60 * x * np.exp(rng.normal(0, 0.15, x.size))
    fit = pf.fit_precursor(x, y, law="proportional")
    assert isinstance(fit, ProportionalFit) and fit.law == "proportional"
    r = np.log(y) - np.log(x)
    ref = sm.OLS(r, np.ones((x.size, 1))).fit()
    np.testing.assert_allclose(fit.coefficients, ref.params, rtol=1e-10)
    np.testing.assert_allclose(fit.standard_errors, ref.bse, rtol=1e-10)
    assert fit.residual_sd == pytest.approx(np.sqrt(ref.scale), rel=1e-10)
    x0 = np.array([1.0, 2.2, 4.0])
    p = fit.predict(x0)
    for level, low, high in ((0.95, p.low95, p.high95), (0.6826894921370859, p.low68, p.high68)):
        frame = ref.get_prediction(np.ones((x0.size, 1))).summary_frame(alpha=1 - level)
        np.testing.assert_allclose(low, x0 * np.exp(frame["obs_ci_lower"].to_numpy()), rtol=1e-8)
        np.testing.assert_allclose(high, x0 * np.exp(frame["obs_ci_upper"].to_numpy()), rtol=1e-8)
    np.testing.assert_allclose(p.median, x0 * np.exp(ref.params[0]), rtol=1e-10)
    # draws follow the same distribution: their quantiles match the intervals
    draws = fit.sample(np.full(40_000, 2.2), np.random.default_rng(1))
    assert np.quantile(draws, [0.025, 0.975]) == pytest.approx([p.low95[1], p.high95[1]], rel=0.03)
    # leave-one-out: the refit without each cycle predicts it
    for i in range(x.size):
        keep = np.arange(x.size) != i
        k = np.exp(np.mean(r[keep]))
        assert fit.loo_errors[i] == pytest.approx(k * x[i] - y[i], rel=1e-10)


def test_proportional_law_refuses_a_non_positive_amplitude():
    with pytest.raises(pf.PolarfluxError, match="positive amplitudes"):
        pf.fit_precursor([1.0, 2.0, 3.0], [50.0, 0.0, 120.0], law="proportional")


def test_a_negative_slope_is_flagged_loudly():
    fit = pf.fit_precursor([1.0, 2.0, 3.0, 4.0], [150.0, 120.0, 140.0, 90.0])
    assert fit.slope < 0
    assert "not positive" in fit.warning and "contradicts" in fit.warning
    good = pf.fit_precursor([1.0, 2.0, 3.0, 4.0], [60.0, 120.0, 170.0, 250.0])
    assert good.warning == ""
    result = {"as_of": 2090.0, "proxy": "axial_dipole", "caution": "c",
              "calibration": {"law": "linear", "intercept": fit.intercept, "slope": fit.slope,
                              "standard_errors": fit.standard_errors.tolist(), "residual_sd": fit.residual_sd,
                              "pairs": [{"cycle": k} for k in range(4)], "loo_errors": fit.loo_errors.tolist(),
                              "loo_rms": fit.loo_rms, "warning": fit.warning},
              "projection": {"method": "m", "members": 10, "proxy_at_minimum": {"median": 1, "low95": 0, "high95": 2},
                             "minimum_time": {"median": 2091.0}},
              "forecast": {"amplitude": {k: 100.0 for k in ("median", "low68", "high68", "low95", "high95")},
                           "maximum_time": {k: 2095.0 for k in ("median", "low68", "high68", "low95", "high95")}}}
    text = forecast_text(result)
    assert "WARNING: the fitted slope" in text.splitlines()[2]


def test_unknown_law_refused():
    with pytest.raises(pf.PolarfluxError, match="law 'cubic'"):
        pf.fit_precursor([1.0, 2.0, 3.0], [50.0, 80.0, 120.0], law="cubic")
