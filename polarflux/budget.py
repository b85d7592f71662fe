"""Which uncertainty makes how much of a forecast's spread: the budget of its Monte Carlo.

Every source of uncertainty enters the one Monte Carlo of :func:`polarflux.forecast.
forecast_from_record` as a draw per member: the calibration's predictive distribution
(the precursor law's parameters and scatter), the transport parameters (projection
physics), the date of the minimum, the late emergence's regions, the anchor's line,
the fill of the unseen pole, the cross-calibration of the anchor map's instrument, and
the projection's misfit on the record's earlier minima. The budget splits the variance
of the amplitude among them:

* the calibration's share is the variance the predictive draw adds to the amplitudes
  the members' proxies give through the fitted law (Var A - Var A0, A0 the law's median
  at each member's proxy);
* the rest, Var A0, is split by a linear regression of A0 on the members' drawn
  quantities (each group standardised): a group's share is the variance of its part of
  the fitted sum (first-order, variance-based; Saltelli et al. 2008, *Global Sensitivity
  Analysis: The Primer*, Wiley, ch. 1, standardised regression coefficients), and what
  the regression leaves (interactions, nonlinearity) is listed as such.

Shares are fractions of Var A and sum to 1.
"""

from __future__ import annotations

import numpy as np

__all__ = ["spread_budget"]


def spread_budget(fit, amplitudes, proxy, drivers: dict) -> dict[str, float]:
    """Each term's share of the amplitude's variance (fractions summing to 1).

    Parameters
    ----------
    fit : the precursor fit (``predict(x).median``)
    amplitudes, proxy : array (members,)
        The Monte Carlo's amplitudes and the proxies that made them.
    drivers : dict of name -> array (members,) or (members, k)
        The quantities drawn per member, grouped by term; constant ones get no share.
    """
    amplitudes = np.asarray(amplitudes, dtype=np.float64)
    total = float(np.var(amplitudes))
    if not total > 0:
        return {}
    a0 = np.asarray(fit.predict(np.abs(np.asarray(proxy, dtype=np.float64))).median, dtype=np.float64)
    varied = float(np.var(a0))
    out = {"calibration (precursor law and its scatter)": max(total - varied, 0.0)}
    columns, owners = [], []
    for name, values in drivers.items():
        x = np.asarray(values, dtype=np.float64)
        x = x.reshape(x.shape[0], -1)
        for j in range(x.shape[1]):
            col = np.where(np.isfinite(x[:, j]), x[:, j], 0.0)
            if np.std(col) > 0:
                columns.append((col - col.mean()) / col.std())
                owners.append(name)
    explained = 0.0
    if columns and varied > 0:
        design = np.column_stack(columns)
        beta, *_ = np.linalg.lstsq(design, a0 - a0.mean(), rcond=None)
        for name in dict.fromkeys(owners):
            idx = [k for k, o in enumerate(owners) if o == name]
            share = float(np.var(design[:, idx] @ beta[idx]))
            out[name] = share
            explained += share
    out["other (interactions, nonlinearity)"] = max(varied - explained, 0.0)
    norm = sum(out.values())
    return {k: v / norm for k, v in out.items()} if norm > 0 else {}
