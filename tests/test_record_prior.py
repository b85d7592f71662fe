"""The record's prior on the proxy at a minimum, and its combination with the projection.

Outside references: the Student-t predictive distribution of a new draw from a normal
sample with unknown mean and variance (Gelman et al. 2013, *Bayesian Data Analysis*, 3rd
ed., sects. 3.2-3.3), computed here with scipy.stats.t; the posterior of a normal likelihood
times that prior integrated with scipy.integrate.quad, independently of the member weighting.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, optimize, stats

from polarflux.emergence import FluxScaleFit
from polarflux.projection import PRIOR_DOF, PRIOR_LOG_SD, record_prior, shrink_to_prior


def test_prior_is_the_student_t_predictive_of_the_log_values():
    values = [2.0, 3.1, 2.4, 1.7]
    logs = np.log(values)
    n = len(values)
    plain = record_prior(values, prior_dof=0)  # no prior on the spread: the textbook t predictive
    assert plain["dof"] == n - 1
    assert plain["log_mean"] == pytest.approx(logs.mean())
    assert plain["log_scale"] == pytest.approx(logs.std(ddof=1) * math.sqrt(1 + 1 / n))
    prior = record_prior(values)  # with the scaled inverse chi-square prior on the spread
    assert prior["dof"] == n - 1 + PRIOR_DOF
    pooled = (PRIOR_DOF * PRIOR_LOG_SD**2 + (n - 1) * logs.var(ddof=1)) / (PRIOR_DOF + n - 1)
    assert prior["log_scale"] == pytest.approx(math.sqrt(pooled * (1 + 1 / n)))
    # a sign, a NaN and a zero do not count: magnitudes at real minima only
    assert record_prior([-2.0, 3.1, 2.4, 1.7, np.nan, 0.0])["log_mean"] == pytest.approx(prior["log_mean"])
    assert record_prior([2.0, 3.0]) is None


def _posterior_median(m, s, prior):
    """Median of N(m, s^2) x t prior in log space, by quadrature (scipy), not by the members."""
    t = stats.t(prior["dof"], loc=prior["log_mean"], scale=prior["log_scale"])

    def density(x):
        return stats.norm.pdf(x, m, s) * t.pdf(x)

    lo, hi = m - 10 * s, m + 10 * s
    total = integrate.quad(density, lo, hi, points=[m, prior["log_mean"]], limit=200)[0]
    return optimize.brentq(lambda q: integrate.quad(density, lo, q, limit=200)[0] / total - 0.5, lo, hi)


@pytest.mark.parametrize("m, s", [(math.log(2.0), 0.30), (math.log(0.9), 0.15), (math.log(4.0), 0.45)])
def test_members_weighted_by_the_prior_reach_the_posterior_of_bayes_rule(m, s):
    prior = record_prior([2.0, 3.1, 2.4, 1.7])
    members = np.exp(m + s * stats.norm.ppf((np.arange(20000) + 0.5) / 20000))
    moved, info = shrink_to_prior(np.random.default_rng(0).permutation(members), prior)
    assert math.log(np.median(moved)) == pytest.approx(_posterior_median(m, s, prior), abs=0.01)
    assert info["median_after"] == pytest.approx(np.median(moved))


def test_three_minima_that_agree_closely_do_not_pin_the_next_one():
    prior = record_prior([2.45, 2.50, 2.48])
    assert prior["log_scale"] > 0.8 * PRIOR_LOG_SD
    m, s = math.log(2.9), 0.10  # a projection 17 % above them
    members = np.exp(m + s * stats.norm.ppf((np.arange(4000) + 0.5) / 4000))
    moved, _ = shrink_to_prior(members, prior)
    assert math.log(np.median(moved)) == pytest.approx(_posterior_median(m, s, prior), abs=0.01)
    assert np.median(moved) > 2.75


def test_a_cycle_unlike_the_record_is_pulled_back_less_than_a_normal_prior_would():
    """The t prior flattens far from the record's minima: a projection 4 scales away moves a little."""
    prior = record_prior([2.0, 3.1, 2.4, 2.7], prior_dof=0)
    m, s = math.log(0.9), 0.13
    members = np.exp(m + s * stats.norm.ppf((np.arange(4000) + 0.5) / 4000))
    moved, _ = shrink_to_prior(members, prior)
    shift = math.log(np.median(moved)) - m
    w = prior["log_scale"] ** 2 / (prior["log_scale"] ** 2 + s**2)
    normal_shift = (1 - w) * (prior["log_mean"] - m)
    assert 0 < shift < 0.5 * normal_shift


def test_members_keep_their_order_and_without_a_prior_are_unchanged():
    rng = np.random.default_rng(3)
    members = np.exp(rng.normal(0.5, 0.3, 500))
    moved, _ = shrink_to_prior(members, record_prior([1.0, 1.5, 2.0]))
    assert np.array_equal(np.argsort(moved), np.argsort(members))
    same, info = shrink_to_prior(members, None)
    assert np.array_equal(same, members) and info["median_after"] == info["median_before"]


def test_the_lead_error_sets_the_members_spread_before_the_prior_weighs_them():
    """With a prior too wide to matter, the members come out with the projection's error at this lead."""
    rng = np.random.default_rng(4)
    members = np.exp(rng.normal(0.3, 0.05, 4000))
    wide = {"log_mean": 0.3, "log_scale": 100.0, "dof": 3, "minima": 4}
    moved, info = shrink_to_prior(members, wide, log_sd=0.4)
    assert np.std(np.log(moved)) == pytest.approx(0.4, rel=0.03)
    assert info["projection_log_sd"] == pytest.approx(0.4)
    # a record on which the projection erred less than its members spread narrows them, prior or not
    for prior in (wide, None):
        narrow, _ = shrink_to_prior(members, prior, log_sd=0.01)
        assert np.std(np.log(narrow)) == pytest.approx(0.01, rel=0.03)
        assert np.mean(np.log(narrow)) == pytest.approx(np.mean(np.log(members)), abs=0.002)


def _fit_with(hindcasts):
    return FluxScaleFit(flux_scale=0.0, standard_error=0.0, relative_rms=0.0, relative_rms_without=0.0,
                        ensemble_relative_sd=0.0, hindcasts=tuple(hindcasts))


def test_projection_log_error_grows_with_lead_as_fitted_on_the_earlier_minima():
    # (minimum, lead, measured, projected without, projected with)
    fit = _fit_with([(2050.0, 2.0, 2.0, 0.0, 2.0 * math.exp(0.2)), (2061.0, 4.0, 1.0, 0.0, math.exp(-0.8))])
    a = math.sqrt(((0.2 / 2.0) ** 2 + (0.8 / 4.0) ** 2) / 2)
    assert fit.log_error_per_year == pytest.approx(a)
    assert fit.log_error_at(3.0, upper=False) == pytest.approx(3.0 * a)
    assert fit.log_error_at(-1.0) == 0.0
    # the upper bound: two minima, two degrees of freedom; chi2_0.16(2) = -2 ln 0.84 in closed form
    assert fit.minima == 2
    assert fit.log_error_at(3.0) == pytest.approx(3.0 * a * math.sqrt(2 / (-2 * math.log(0.84))))
    # a projection of the wrong sign counts as a factor-10 miss
    wrong = _fit_with([(2050.0, 2.0, 2.0, 0.0, -0.5)])
    assert wrong.log_error_per_year == pytest.approx(math.log(10.0) / 2.0)
