"""The spread budget of a forecast's Monte Carlo (polarflux.budget) against variances known in closed form."""

from __future__ import annotations

import numpy as np
import pytest

from polarflux.budget import spread_budget
from polarflux.precursor import fit_precursor


def test_shares_of_independent_terms_are_their_variances():
    # A = a + b x + e with x = 2 + 0.1 d1 + 0.2 d2 (d1, d2 standard normal, independent) and e the
    # calibration's predictive draw: Var A = b^2 (0.01 + 0.04) + Var e, each term its own share
    # (variances of independent sums add: common practice)
    rng = np.random.default_rng(5)
    fit = fit_precursor([1.0, 2.0, 3.0, 4.0, 2.5, 3.5], [60.0, 110.0, 150.0, 210.0, 125.0, 170.0])
    n = 40000
    d1, d2 = rng.standard_normal(n), rng.standard_normal(n)
    proxy = 2.0 + 0.1 * d1 + 0.2 * d2
    amplitude = fit.sample(proxy, rng)
    b = fit.slope
    total = np.var(amplitude)
    budget = spread_budget(fit, amplitude, proxy, {"one": d1, "two": d2, "constant": np.ones(n)})
    assert sum(budget.values()) == pytest.approx(1.0)
    assert budget["one"] == pytest.approx(b**2 * 0.01 / total, abs=0.01)
    assert budget["two"] == pytest.approx(b**2 * 0.04 / total, abs=0.01)
    assert budget["calibration (precursor law and its scatter)"] == pytest.approx(1 - b**2 * 0.05 / total, abs=0.01)
    assert "constant" not in budget
    assert budget["other (interactions, nonlinearity)"] < 0.01


def test_a_term_the_amplitude_does_not_depend_on_gets_no_share():
    rng = np.random.default_rng(6)
    fit = fit_precursor([1.0, 2.0, 3.0, 4.0], [50.0, 100.0, 160.0, 200.0])
    n = 20000
    d = rng.standard_normal(n)
    unrelated = rng.standard_normal(n)
    proxy = 2.5 + 0.3 * d
    budget = spread_budget(fit, fit.sample(proxy, rng), proxy, {"driver": d, "unrelated": unrelated})
    assert budget["unrelated"] < 0.002
    assert budget["driver"] > 0.2
