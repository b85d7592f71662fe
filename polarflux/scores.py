"""Scores of probabilistic forecasts: CRPS, coverage with binomial intervals, summaries by lead.

References
----------
Gneiting, T. & Raftery, A. E. 2007, J. Am. Stat. Assoc. 102, 359 (CRPS, its kernel
form for a sample and its closed form for a normal distribution).
Clopper, C. J. & Pearson, E. S. 1934, Biometrika 26, 404 (binomial intervals).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

__all__ = ["LEAD_EDGES", "crps_sample", "crps_normal", "summarise", "lead_table", "format_lead_table",
           "summary_line"]

#: Lead bins (years, date minus the minimum that starts the cycle forecast).
LEAD_EDGES = (-4.0, -3.0, -2.0, -1.0, 0.0, 1.0, 2.0)


def crps_sample(sample, outcome: float) -> float:
    """CRPS of the empirical distribution of ``sample`` at ``outcome``: E|X - y| - E|X - X'| / 2.

    Computed from the sorted sample in O(n log n) (Gneiting & Raftery 2007, eq. 21;
    the ensemble's own distribution function, all pairs counted).
    """
    x = np.sort(np.asarray(sample, dtype=np.float64))
    x = x[np.isfinite(x)]
    n = x.size
    if n == 0 or not np.isfinite(outcome):
        return math.nan
    spread = 2.0 * np.sum((2.0 * np.arange(n) - n + 1.0) * x) / n**2
    return float(np.mean(np.abs(x - outcome)) - 0.5 * spread)


def crps_normal(mean, sd, outcome) -> np.ndarray:
    """CRPS of a normal N(mean, sd^2) at ``outcome`` in closed form (Gneiting & Raftery 2007, eq. 5)."""
    from scipy import stats

    mean, sd, y = (np.asarray(a, dtype=np.float64) for a in (mean, sd, outcome))
    with np.errstate(divide="ignore", invalid="ignore"):
        z = (y - mean) / sd
        return sd * (z * (2.0 * stats.norm.cdf(z) - 1.0) + 2.0 * stats.norm.pdf(z) - 1.0 / math.sqrt(math.pi))


def _proportion(k: int, n: int) -> tuple[float, float, float]:
    """Fraction and its exact (Clopper-Pearson) binomial 95 % interval."""
    if n == 0:
        return math.nan, math.nan, math.nan
    from scipy import stats

    ci = stats.binomtest(int(k), int(n)).proportion_ci(0.95, method="exact")
    return k / n, float(ci.low), float(ci.high)


def summarise(result, lead_range: tuple[float, float] | None = None) -> dict:
    """Scores of the forecasts whose lead lies in ``[low, high)`` (all forecasts when None).

    Returns
    -------
    dict
        ``forecasts``, ``failures``, ``scored``, ``median_abs_relative_error``,
        ``coverage68`` and ``coverage95`` (fraction, low, high: exact binomial 95 %
        interval), ``crps`` (mean), ``crps_climatology`` (mean over the same forecasts)
        and ``crps_skill`` = 1 - crps / crps_climatology.
    """
    lead = result["lead"].values
    pick = np.ones(lead.shape, dtype=bool) if lead_range is None else (lead >= lead_range[0]) & (
        lead < lead_range[1])
    ok = result["status"].values == "ok"
    scored = pick & ok & np.isfinite(result["outcome"].values)
    n = int(scored.sum())
    rel = np.abs(result["relative_error"].values[scored])
    both = scored & np.isfinite(result["crps_climatology"].values)
    crps = float(np.mean(result["crps"].values[both])) if both.any() else math.nan
    climate = float(np.mean(result["crps_climatology"].values[both])) if both.any() else math.nan
    return {
        "lead_range": lead_range,
        "forecasts": int(pick.sum()),
        "failures": int((pick & ~ok).sum()),
        "scored": n,
        "median_abs_relative_error": float(np.median(rel)) if n else math.nan,
        "coverage68": _proportion(int(np.sum(result["inside68"].values[scored] > 0.5)), n),
        "coverage95": _proportion(int(np.sum(result["inside95"].values[scored] > 0.5)), n),
        "crps": crps,
        "crps_climatology": climate,
        "crps_skill": 1.0 - crps / climate if climate > 0 else math.nan,
    }


def lead_table(result, edges: Sequence[float] = LEAD_EDGES, outside: bool = True) -> list[dict]:
    """:func:`summarise` per lead bin ``[edges[i], edges[i + 1])``, the last bin closed.

    With ``outside``, forecasts whose lead falls before the first edge or after the last
    get a row of their own (only when there are any), so the rows add up to every forecast
    with a known lead.
    """
    rows = []
    lead = result["lead"].values
    if outside and np.any(lead < edges[0]):
        rows.append(summarise(result, (-np.inf, edges[0])))
    for k, (a, b) in enumerate(zip(edges[:-1], edges[1:], strict=True)):
        rows.append(summarise(result, (a, b + (1e-9 if k == len(edges) - 2 else 0.0))))
        rows[-1]["lead_range"] = (a, b)
    if outside and np.any(lead > edges[-1] + 1e-9):
        rows.append(summarise(result, (edges[-1] + 1e-9, np.inf)))
        rows[-1]["lead_range"] = (edges[-1], np.inf)
    return rows


def _fmt_cov(c: tuple[float, float, float]) -> str:
    return "   n/a          " if not np.isfinite(c[0]) else f"{c[0]:.2f} [{c[1]:.2f}, {c[2]:.2f}]"


def format_lead_table(rows: list[dict]) -> str:
    """The table by lead as plain text."""
    lines = [f"{'lead (yr)':>13} {'n':>4} {'fail':>4} {'med|rel err|':>12} {'68 % coverage':>18} "
             f"{'95 % coverage':>18} {'CRPS':>7} {'CRPS clim':>9} {'skill':>6}"]
    for r in rows:
        a, b = r["lead_range"]
        lines.append(f"{a:+5.1f} to {b:+4.1f} {r['scored']:>4} {r['failures']:>4} "
                     f"{_num(100 * r['median_abs_relative_error'], '.1f', '%'):>12} {_fmt_cov(r['coverage68']):>18} "
                     f"{_fmt_cov(r['coverage95']):>18} {_num(r['crps'], '.1f'):>7} "
                     f"{_num(r['crps_climatology'], '.1f'):>9} {_num(r['crps_skill'], '.2f'):>6}")
    return "\n".join(lines)


def _num(value, spec: str, suffix: str = "") -> str:
    """A number as text, "n/a" where there is none (a lead bin with no scored forecast)."""
    return f"{value:{spec}}{suffix}" if value is not None and math.isfinite(value) else "n/a"


def summary_line(result, window: tuple[float, float] = (-2.0, 1.0)) -> str:
    """One line: forecasts, failures, median |relative error| (all and in ``window``), coverage, CRPS skill."""
    every = summarise(result)
    inner = summarise(result, window)
    return (f"{every['forecasts']} forecasts, {every['failures']} failed, {every['scored']} scored; "
            f"median |relative error| {100 * every['median_abs_relative_error']:.1f} % (all), "
            f"{100 * inner['median_abs_relative_error']:.1f} % (leads {window[0]:+g} to {window[1]:+g} yr); "
            f"68 % coverage {_fmt_cov(every['coverage68'])}; 95 % coverage {_fmt_cov(every['coverage95'])}; "
            f"CRPS skill {every['crps_skill']:.2f}")
