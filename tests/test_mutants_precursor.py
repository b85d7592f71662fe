"""The precursor laws against statsmodels and closed forms (mutants the other tests missed).

Sources:
  * statsmodels OLS (parameters, standard errors, residual scale, prediction intervals of a new
    observation via get_prediction(...).summary_frame);
  * leave-one-out refits in closed form: with three cycles the line through the other two points;
    through the origin the slope sum(x y) / sum(x^2) of the others (least squares, common practice);
  * draws from the predictive distribution have the quantiles of the stated intervals (Student t with
    the fit's degrees of freedom; scipy.stats.t).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

import polarflux as pf
from polarflux.errors import SettingsError

X3 = np.array([1.2, 2.0, 3.1])
Y3 = np.array([80.0, 115.0, 170.0])


def test_three_cycles_fit_like_statsmodels_and_leave_one_out_is_the_line_through_the_other_two():
    fit = pf.fit_precursor(X3, Y3)
    ref = sm.OLS(Y3, sm.add_constant(X3)).fit()
    np.testing.assert_allclose(fit.coefficients, ref.params, rtol=1e-10)
    assert fit.dof == 1 and fit.residual_sd == pytest.approx(np.sqrt(ref.scale), rel=1e-10)
    np.testing.assert_allclose(fit.standard_errors, ref.bse, rtol=1e-10)
    for i in range(3):
        j, k = [n for n in range(3) if n != i]
        slope = (Y3[j] - Y3[k]) / (X3[j] - X3[k])
        assert fit.loo_errors[i] == pytest.approx(Y3[j] + slope * (X3[i] - X3[j]) - Y3[i], rel=1e-10)


def test_through_the_origin_keeps_its_pairs_and_labels_and_refits_through_the_origin():
    x = np.array([-1.0, 1.7, -2.4, 3.0])  # the proxy's sign alternates: its magnitude is fitted
    y = np.array([60.0, 118.0, 150.0, 205.0])
    fit = pf.fit_precursor(x, y, through_origin=True, labels=["c1", "c2", "c3", "c4"])
    np.testing.assert_array_equal(fit.proxy, np.abs(x))
    np.testing.assert_array_equal(fit.amplitude, y)
    assert fit.labels == ["c1", "c2", "c3", "c4"]
    ref = sm.OLS(y, np.abs(x)[:, None]).fit()
    assert fit.slope == pytest.approx(ref.params[0], rel=1e-12)
    ax = np.abs(x)
    for i in range(4):
        keep = np.arange(4) != i
        slope = np.sum(ax[keep] * y[keep]) / np.sum(ax[keep] ** 2)
        assert fit.loo_errors[i] == pytest.approx(slope * ax[i] - y[i], rel=1e-10)
    linear = pf.fit_precursor(x, y, labels=("a", "b", "c", "d"))
    assert linear.labels == ["a", "b", "c", "d"]


def test_single_precision_pairs_are_fitted_in_double_precision():
    rng = np.random.default_rng(2)
    x32 = rng.uniform(0.8, 3.5, 6).astype(np.float32)
    y32 = (30 + 50 * x32 + rng.normal(0, 8, 6)).astype(np.float32)
    fit = pf.fit_precursor(x32, y32)
    ref = sm.OLS(y32.astype(np.float64), sm.add_constant(x32.astype(np.float64))).fit()
    np.testing.assert_allclose(fit.coefficients, ref.params, rtol=1e-11)
    assert fit.residual_sd == pytest.approx(np.sqrt(ref.scale), rel=1e-11)


@pytest.mark.parametrize("proxy, amplitude, message", [
    ([1.0, 2.0, 3.0, 4.0], [50.0, 60.0, 70.0], "equal length"),
    ([1.0, 2.0, 3.0], [50.0, np.nan, 70.0], "NaN"),
    ([1.0, np.inf, 3.0], [50.0, 60.0, 70.0], "NaN"),
])
def test_pairs_that_cannot_be_fitted_are_refused(proxy, amplitude, message):
    with pytest.raises(SettingsError, match=message):
        pf.fit_precursor(proxy, amplitude)


def test_linear_draws_have_the_quantiles_of_the_t_intervals():
    fit = pf.fit_precursor([1.0, 1.6, 2.1, 2.5, 3.0, 3.4], [70.0, 95.0, 130.0, 150.0, 160.0, 190.0])
    p = fit.predict(2.0)
    draws = fit.sample(np.full(40_000, 2.0), np.random.default_rng(3))
    q = stats.t.ppf([0.025, 0.5, 0.975], fit.dof)  # four degrees of freedom
    # Monte Carlo error of these quantiles from 40,000 draws: about 0.04 standard errors
    np.testing.assert_allclose(np.quantile(draws, [0.025, 0.5, 0.975]), p.median + q * p.se, rtol=0,
                               atol=0.15 * p.se)
    assert np.std(draws[:5]) > 0  # every draw its own


def test_proportional_law_with_amplitudes_and_proxies_below_one_matches_statsmodels():
    x = np.array([0.3, 0.55, 0.8, 0.45])  # e.g. proxies in units where they are below one
    y = np.array([0.6, 1.2, 1.5, 0.95])
    fit = pf.fit_precursor(x, y, law="proportional", labels=["a", "b", "c", "d"])
    r = np.log(y) - np.log(x)
    ref = sm.OLS(r, np.ones((4, 1))).fit()
    np.testing.assert_allclose(fit.coefficients, ref.params, rtol=1e-12)
    np.testing.assert_array_equal(fit.amplitude, y)
    assert fit.labels == ["a", "b", "c", "d"]


def test_proportional_law_refuses_a_zero_proxy():
    with pytest.raises(SettingsError, match="non-zero proxy"):
        pf.fit_precursor([0.0, 1.0, 2.0], [50.0, 60.0, 70.0], law="proportional")


def test_proportional_predictions_keep_the_shape_of_x_and_work_in_double_precision():
    x = np.array([1.0, 1.6, 2.1, 2.5, 3.0])
    y = np.array([70.0, 95.0, 130.0, 150.0, 160.0])
    fit = pf.fit_precursor(x, y, law="proportional")
    k = np.exp(np.mean(np.log(y / x)))  # the closed form of ln k: the mean log ratio
    one = fit.predict(2.2)
    assert np.ndim(one.median) == 0 and isinstance(one.median, np.floating)
    assert float(one.median) == pytest.approx(k * 2.2, rel=1e-12)
    grid = np.array([[1.0, 2.1], [2.5, 4.0]])
    assert fit.predict(grid).high95.shape == (2, 2)
    x32 = np.array([1.3, 2.7, 3.3], dtype=np.float32)
    np.testing.assert_allclose(fit.predict(x32).median, k * x32.astype(np.float64), rtol=1e-13)
