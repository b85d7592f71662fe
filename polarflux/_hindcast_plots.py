"""Figures and files of a hindcast (:func:`polarflux.hindcast.hindcast`); figures are made without pyplot."""

from __future__ import annotations

import os
import re
from pathlib import Path

import numpy as np

from .events import from_decimal_year
from .plots import _new_axes, add_forecast_caption

__all__ = ["plot_cycle_evolution", "plot_pit", "plot_error_by_lead", "hindcast_outputs", "write_outputs",
           "CSV_COLUMNS"]

_FORECAST = "#1f5fa6"
_OUTCOME = "#c45a12"


def _dates(years) -> np.ndarray:
    return from_decimal_year(np.asarray(years, dtype=np.float64), True)


def plot_cycle_evolution(result, cycle: str, ax=None, caption: str | None = None):
    """How the forecast of one cycle evolved: median and 68/95 % ranges against the date it was made.

    The outcome is a horizontal line, the minimum that starts the cycle a vertical
    line; dates whose forecast failed are marked along the bottom.
    """
    fig, ax = _new_axes(ax, size=(9, 4.8))
    pick = result["cycle"].values == cycle
    ok = pick & (result["status"].values == "ok")
    when = _dates(result["date"].values[ok])
    ax.fill_between(when, result["low95"].values[ok], result["high95"].values[ok], color=_FORECAST, alpha=0.15,
                    linewidth=0, label="95 % range")
    ax.fill_between(when, result["low68"].values[ok], result["high68"].values[ok], color=_FORECAST, alpha=0.3,
                    linewidth=0, label="68 % range")
    ax.plot(when, result["median"].values[ok], color=_FORECAST, marker="o", markersize=3, linewidth=1.2,
            label="forecast median")
    outcome = result["outcome"].values[pick]
    if outcome.size and np.isfinite(outcome[0]):
        ax.axhline(float(outcome[0]), color=_OUTCOME, linewidth=1.5, linestyle="--",
                   label=f"outcome {float(outcome[0]):.0f}")
    minimum = result["outcome_minimum"].values[pick]
    if minimum.size and np.isfinite(minimum[0]):
        ax.axvline(_dates(minimum[:1])[0], color="0.3", linestyle=":", linewidth=1.2, label="minimum")
    failed = pick & (result["status"].values != "ok")
    if failed.any():
        ax.plot(_dates(result["date"].values[failed]), np.zeros(int(failed.sum())), linestyle="none", marker="x",
                color="#a01010", label="forecast failed")
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("date the forecast was made (UTC)")
    ax.set_ylabel("cycle amplitude (13-month smoothed sunspot number)")
    ax.set_title(f"Next-cycle amplitude forecast by the date it was made ({cycle})")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize="x-small", borderaxespad=0.0)
    add_forecast_caption(fig, caption)
    return fig


def plot_pit(result, ax=None, caption: str | None = None, bins: int = 10):
    """Histogram of the PIT values of the scored forecasts; a calibrated forecast is flat (dashed line)."""
    fig, ax = _new_axes(ax, size=(6.5, 4.5))
    pit = result["pit"].values
    pit = pit[np.isfinite(pit)]
    counts, _, _ = ax.hist(pit, bins=np.linspace(0.0, 1.0, bins + 1), color=_FORECAST, edgecolor="white",
                           label="forecasts")
    ax.axhline(pit.size / bins, color=_OUTCOME, linestyle="--", linewidth=1.2, label="calibrated (uniform)")
    ax.set_xlim(0.0, 1.0)
    ax.set_xlabel("PIT: fraction of the forecast sample below the outcome")
    ax.set_ylabel("forecasts per bin")
    ax.set_title(f"PIT histogram ({pit.size} scored forecasts)")
    ax.set_ylim(0.0, 1.35 * max(float(counts.max(initial=0)), pit.size / bins, 1.0))  # room above the bars
    ax.legend(loc="upper center", fontsize="x-small", ncols=2)
    add_forecast_caption(fig, caption)
    return fig


def plot_error_by_lead(result, ax=None, caption: str | None = None, edges=None):
    """Relative error of the median (percent) against lead, with the median |error| per lead bin."""
    from .scores import LEAD_EDGES

    edges = np.asarray(LEAD_EDGES if edges is None else edges, dtype=np.float64)
    fig, ax = _new_axes(ax, size=(8, 4.5))
    lead = result["lead"].values
    rel = 100.0 * result["relative_error"].values
    good = np.isfinite(lead) & np.isfinite(rel)
    ax.plot(lead[good], rel[good], linestyle="none", marker="o", markersize=3, color=_FORECAST, alpha=0.6,
            label="forecast (median - outcome) / outcome")
    centres, medians = [], []
    for a, b in zip(edges[:-1], edges[1:], strict=True):
        inside = good & (lead >= a) & (lead <= b if b == edges[-1] else lead < b)
        if inside.any():
            centres.append(0.5 * (a + b))
            medians.append(float(np.median(np.abs(rel[inside]))))
    ax.plot(centres, medians, color=_OUTCOME, marker="s", linewidth=1.5, label="median |relative error| per bin")
    ax.axhline(0.0, color="0.6", linewidth=0.8)
    ax.axvline(0.0, color="0.3", linestyle=":", linewidth=1.0, label="minimum")
    low = min(edges[0], float(np.min(lead[good]))) if good.any() else edges[0]
    high = max(edges[-1], float(np.max(lead[good]))) if good.any() else edges[-1]
    ax.set_xlim(low - 0.25, high + 0.25)  # every forecast shown, also those outside the bins
    ax.set_xlabel("lead: forecast date minus the minimum that starts the cycle (years)")
    ax.set_ylabel("relative error of the median (%)")
    ax.set_title("Forecast error against lead")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize="x-small", borderaxespad=0.0)
    add_forecast_caption(fig, caption)
    return fig


CSV_COLUMNS = ("date", "date_utc", "status", "reason", "maps_used", "last_map", "sunspot_values_used",
               "calibration_cycles", "projection", "median", "low68", "high68", "low95", "high95", "maximum_time",
               "forecast_minimum", "cycle", "outcome", "outcome_minimum", "outcome_maximum", "lead", "error",
               "relative_error", "pit", "inside68", "inside95", "crps", "climatology_mean", "climatology_sd",
               "climatology_cycles", "crps_climatology")


def _cell(value) -> str:
    if isinstance(value, (float, np.floating)):
        return "" if not np.isfinite(value) else repr(float(value))
    return str(value)


def _safe(label: str) -> str:
    return re.sub(r"[^A-Za-z0-9.]+", "_", label).strip("_") or "cycle"


def hindcast_outputs(result, prefix) -> dict:
    """The files :func:`write_hindcast` makes, by kind: csv, leads, pit, error_lead and one per cycle."""
    prefix = os.fspath(prefix)
    out = {"csv": Path(f"{prefix}_hindcast.csv"), "leads": Path(f"{prefix}_hindcast_leads.csv"),
           "pit": Path(f"{prefix}_hindcast_pit.png"), "error_lead": Path(f"{prefix}_hindcast_error_lead.png")}
    for label in dict.fromkeys(str(c) for c in result["cycle"].values if str(c)):
        out[f"cycle:{label}"] = Path(f"{prefix}_hindcast_{_safe(label)}.png")
    return out


def write_outputs(result, prefix, force: bool = False, caption: str | None = None) -> list[Path]:
    """What :func:`polarflux.hindcast.write_hindcast` does (see there)."""
    import csv

    from ._io import atomic_path, check_writable
    from .report import save_figure
    from .scores import lead_table, summarise

    paths = hindcast_outputs(result, prefix)
    for path in paths.values():
        check_writable(path, force)
    caption = caption or (f"hindcast of the polarflux forecast; outcomes: {result.attrs.get('outcome_source')}; "
                          f"{result.attrs.get('created_by', '')}")
    with atomic_path(paths["csv"], force=force) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(CSV_COLUMNS)
        for i in range(result.sizes["date"]):
            writer.writerow([_cell(result["date"].values[i]) if c == "date" else _cell(result[c].values[i])
                             for c in CSV_COLUMNS])
    with atomic_path(paths["leads"], force=force) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["lead_from", "lead_to", "forecasts", "failures", "scored", "median_abs_relative_error",
                         "coverage68", "coverage68_low", "coverage68_high", "coverage95", "coverage95_low",
                         "coverage95_high", "crps", "crps_climatology", "crps_skill"])
        for r in [*lead_table(result), summarise(result)]:
            a, b = r["lead_range"] or ("all", "all")
            writer.writerow([a, b, r["forecasts"], r["failures"], r["scored"],
                             _cell(r["median_abs_relative_error"]), *map(_cell, r["coverage68"]),
                             *map(_cell, r["coverage95"]), _cell(r["crps"]), _cell(r["crps_climatology"]),
                             _cell(r["crps_skill"])])
    save_figure(plot_pit(result, caption=caption), paths["pit"], force=force)
    save_figure(plot_error_by_lead(result, caption=caption), paths["error_lead"], force=force)
    for kind, path in paths.items():
        if kind.startswith("cycle:"):
            save_figure(plot_cycle_evolution(result, kind[6:], caption=caption), path, force=force)
    return list(paths.values())
