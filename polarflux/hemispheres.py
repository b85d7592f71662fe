"""Hemispheric forecasts: each polar cap with its own hemisphere's next cycle.

When the sunspot file has hemispheric columns (``sunspot_number_north``,
``sunspot_number_south``), each calibration cycle gives two pairs: the north cap's
smoothed mean field at the minimum with the highest 13-month smoothed northern sunspot
number of the cycle that follows, and the same for the south. The two hemispheres of
the Sun's cycles peak at different times and with different strengths, and each
hemisphere's polar field at minimum precedes its own next cycle (Munoz-Jaramillo et al.
2013, ApJL 767, L25; Svalgaard & Kamide 2013, ApJ 763, 23: from memory).

The pairs are fitted with the forecast's precursor law (:func:`polarflux.precursor.fit_precursor`)
and each cap's projected field at the coming minimum goes through it. The two pairs of one
cycle are not independent (both follow the same cycle), so the fit's standard errors are
somewhat optimistic; the total forecast does not use these pairs.
"""

from __future__ import annotations

import numpy as np

from .precursor import fit_precursor
from .precursor import sample_summary as _summary

__all__ = ["hemispheric_pairs", "hemispheric_forecast"]

HEMISPHERES = ("north", "south")


def _smoothed(times: np.ndarray, values: np.ndarray) -> np.ndarray:
    from .timeseries import smooth_13_month

    cadence = float(np.median(np.diff(times))) if times.size > 1 else 1.0
    return smooth_13_month(values) if cadence < 2.0 / 12.0 else np.asarray(values, dtype=np.float64)


def hemispheric_pairs(pairs: list[dict], events: dict, times, north, south) -> list[dict]:
    """Two calibration pairs per cycle of ``pairs`` (from :func:`polarflux.forecast.calibration_from_events`).

    Each cycle's hemispheric amplitude is the highest smoothed value of that hemisphere's
    series from the cycle's minimum to the next minimum (or, for the last cycle, to the end of
    the series, once that hemisphere's highest value is two years behind it); the proxy is the
    cap's own smoothed mean field there.
    Cycles whose hemispheric series has no smoothed value in that span are left out.
    """
    t = np.asarray(times, dtype=np.float64)
    series = {"north": _smoothed(t, np.asarray(north, dtype=np.float64)),
              "south": _smoothed(t, np.asarray(south, dtype=np.float64))}
    minima = [m["time"] for m in events.get("minima", [])]
    at_minima = {round(a["time"], 6): a for a in events.get("at_minima", [])}
    out = []
    for pair in pairs:
        at = at_minima.get(round(float(pair.get("minimum", np.nan)), 6))
        if at is None:
            continue
        later = [m for m in minima if m > at["time"] + 1.0]
        end = later[0] if later else t[-1] + 1.0
        span = (t >= at["time"]) & (t <= end)
        for h in HEMISPHERES:
            values = series[h][span]
            field = abs(at[h])
            if not np.isfinite(values).any() or not (np.isfinite(field) and field > 0):
                continue
            if not later:  # the last cycle: its hemisphere's maximum must be two years behind the series' end
                good = np.flatnonzero(np.isfinite(values))
                if t[span][good[-1]] - t[span][good[np.argmax(values[good])]] < 2.0:
                    continue
            out.append({"cycle": f"{pair['cycle']}{h[0].upper()}", "hemisphere": h, "minimum": at["time"],
                        "proxy": float(field), "next_amplitude": float(np.nanmax(values)), "source": "record"})
    return out


def hemispheric_forecast(pairs: list[dict], projected: dict, law: str, seed: int) -> dict:
    """Fit the hemispheric pairs and forecast each hemisphere from its cap's projected field.

    ``projected`` maps ``north`` and ``south`` to each member's cap field at the coming
    minimum, in the record's conventions. Returns the law's description, the pairs, each
    hemisphere's amplitude summary (median, 68 and 95 % ranges), or ``why`` it was not made.
    """
    from .errors import SettingsError

    hemispheres_in = {p["hemisphere"] for p in pairs}
    if len(pairs) < 3 or hemispheres_in != set(HEMISPHERES):
        return {"pairs": pairs, "why": f"{len(pairs)} hemispheric pairs, from both hemispheres at least three needed"}
    try:
        fit = fit_precursor([p["proxy"] for p in pairs], [p["next_amplitude"] for p in pairs],
                            labels=[p["cycle"] for p in pairs], law=law)
    except SettingsError as exc:
        return {"pairs": pairs, "why": str(exc)}
    rng = np.random.default_rng(seed)
    out = {"pairs": pairs, "law": fit.law, "description": fit.describe(), "warning": fit.warning,
           "slope": fit.slope, "intercept": fit.intercept, "residual_sd": fit.residual_sd,
           "standard_errors": fit.standard_errors.tolist(),
           "loo_rms": fit.loo_rms, "why": None}
    for h in HEMISPHERES:
        field = np.abs(np.asarray(projected[h], dtype=np.float64))
        out[h] = {"proxy_at_minimum": _summary(field),
                  "amplitude": _summary(np.clip(fit.sample(field, rng), 0.0, None))}
    return out
