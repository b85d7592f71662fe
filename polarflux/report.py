"""The figures of a record, and the one-page report that holds them.

:func:`figures` draws every kind from an analysis (:func:`polarflux.analysis.analyse`); :func:`write_report`
writes one self-contained HTML page (figures embedded as PNG) with the record
summary, the cross-calibration, the events, the forecast with its intervals and
the caution.
"""

from __future__ import annotations

import base64
import html
import io
import os
from pathlib import Path

import numpy as np

from ._io import atomic_path
from ._version import __version__
from .errors import PolarfluxError
from .timeseries import format_date

__all__ = ["FIGURE_KINDS", "figures", "save_figure", "write_report", "report_html"]

FIGURE_KINDS = ("polar", "butterfly", "map", "fan", "calibration")


def figures(analysis: dict, kinds=FIGURE_KINDS, caption: str = "", truth_amplitude=None) -> dict:
    """Every figure kind that the analysis allows, as matplotlib Figures keyed by kind."""
    from .maps import read_map
    from .plots import (
        butterfly_profiles,
        instrument_eras,
        plot_butterfly,
        plot_calibration,
        plot_forecast_fan,
        plot_map,
        plot_record_events,
    )

    record = analysis["record"]
    out = {}
    if "polar" in kinds:
        out["polar"] = plot_record_events(analysis["merged"], analysis["events"], caption=caption,
                                          eras=instrument_eras(record))
    if "butterfly" in kinds:
        times, edges, profiles = butterfly_profiles(record, bases=analysis["bases"])
        if len(times):
            out["butterfly"] = plot_butterfly(times, edges, profiles, caption=caption)
    if "map" in kinds:
        latest = _latest_map(record, analysis["bases"])
        if latest is not None:
            out["map"] = plot_map(read_map(latest), cap_latitude=float(record.attrs.get("cap_deg", 60.0)),
                                  caption=f"{caption}; map {latest}" if caption else None)
    forecast = analysis["forecast"]
    if forecast is not None and analysis["sunspots"] is not None:
        if "fan" in kinds:
            out["fan"] = plot_forecast_fan(forecast, *analysis["sunspots"], caption=caption or None,
                                           truth_amplitude=truth_amplitude)
        if "calibration" in kinds:
            out["calibration"] = plot_calibration(forecast, caption=caption or None)
    return out


def _latest_map(record, bases) -> str | None:
    order = np.argsort(record["time"].values)[::-1]
    for i in order:
        for base in bases:
            path = os.path.join(base, str(record["source"].values[i]))
            if os.path.exists(path):
                return path
    return None


def save_figure(fig, path, force: bool = False) -> Path:
    """Write a figure atomically; the format follows the suffix (.png, .pdf, .svg)."""
    path = Path(path)
    kind = path.suffix.lower().lstrip(".")
    if kind not in ("png", "pdf", "svg"):
        raise PolarfluxError(f"{path}: figures are written as .png, .pdf or .svg")
    with atomic_path(path, force=force) as tmp:
        fig.savefig(tmp, format=kind, dpi=120)
    return path


def _png(fig) -> str:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110)
    return base64.b64encode(buffer.getvalue()).decode("ascii")


def _table(header, rows) -> str:
    head = "".join(f"<th>{html.escape(str(h))}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{html.escape(str(c))}</td>" for c in row) + "</tr>" for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def report_html(analysis: dict, figs: dict, title: str, source: str) -> str:
    """The report page as a string (see :func:`write_report`)."""
    from .forecast import CAUTION

    record, events = analysis["record"], analysis["events"]
    names = [str(x) for x in record["instrument"].values]
    times = record["time"].values
    summary = _table(
        ["record", "maps", "instruments", "first map", "last map", "cap", "fill", "failed files"],
        [[source, record.sizes["time"], ", ".join(f"{n} ({names.count(n)})" for n in dict.fromkeys(names)),
          str(times.min())[:10], str(times.max())[:10], f"poleward of {record.attrs.get('cap_deg', 60)}°",
          record.attrs.get("fill", ""), record.attrs.get("failed_count", 0)]],
    )
    calibration = _table(
        ["instrument", "onto", "quantity", "factor", "1σ", "95 % range", "rotations"],
        [[f["instrument"], f["reference"], f["quantity"], f"{f['factor']:.4f}", f"{f['uncertainty']:.4f}",
          f"{f['low95']:.4f}–{f['high95']:.4f}", f["pairs"]] for f in events["scale_factors"]],
    ) if events["scale_factors"] else "<p>One instrument: no cross-calibration needed.</p>"
    if events["scale_factors"]:
        calibration += ("<p>Separate cap factors needed: " + ("yes" if events["band_factors_needed"] else
                        "no (one polar factor fits both caps and the dipole)") + ".</p>")
    rows = []
    for hemisphere in ("north", "south"):
        for r in events["reversals"][hemisphere]:
            window = f"{format_date(r['earliest'])} to {format_date(r['latest'])}" if r["crossings"] > 1 else ""
            rows.append(["polar reversal", hemisphere, format_date(r["time"]), window, "+" if r["new_sign"] > 0 else "−"])
    for lag in events["reversal_lags"]:
        rows.append(["reversal lag (S − N)", "", format_date(lag["north"]), "", f"{lag['lag_years']:+.2f} yr"])
    for m in events["minima"]:
        rows.append(["cycle minimum", "", format_date(m["time"]), "", f"SSN {m['sunspot_number']:.1f}"])
    for m in events["maxima"]:
        rows.append(["cycle maximum", "", format_date(m["time"]), "", f"SSN {m['sunspot_number']:.1f}"])
    for a in events["at_minima"]:
        rows.append(["polar fields at minimum", "N / S / dipole", format_date(a["time"]), "",
                     f"{a['north']:+.2f} / {a['south']:+.2f} / {a['axial_dipole']:+.2f} G; "
                     f"asymmetry {a['asymmetry']:+.2f}"])
    events_table = _table(["event", "hemisphere", "date", "window", "value"], rows)
    fc = analysis["forecast"]
    if fc is not None:
        a, mx, cal = fc["forecast"]["amplitude"], fc["forecast"]["maximum_time"], fc["calibration"]
        forecast = _table(
            ["quantity", "median", "68 % range", "95 % range"],
            [["next-cycle amplitude (sunspot number)", f"{a['median']:.0f}", f"{a['low68']:.0f}–{a['high68']:.0f}",
              f"{a['low95']:.0f}–{a['high95']:.0f}"],
             ["time of the next maximum", format_date(mx["median"]), f"{format_date(mx['low68'])} to {format_date(mx['high68'])}",
              f"{format_date(mx['low95'])} to {format_date(mx['high95'])}"]],
        )
        forecast += (f"<p>As of {format_date(fc['as_of'])}; proxy |{html.escape(fc['proxy'])}| at minimum; "
                     f"calibration amplitude = {cal['intercept']:.1f} + {cal['slope']:.1f} × proxy on "
                     f"{len(cal['pairs'])} cycles, leave-one-out rms error {cal['loo_rms']:.1f}; projection: "
                     f"{html.escape(fc['projection']['method'])}.</p>")
    else:
        reason = analysis["forecast_error"] or "no sunspot series was given"
        forecast = f"<p>No forecast: {html.escape(reason)}.</p>"
    figure_html = "".join(
        f'<figure><img alt="{html.escape(kind)} figure" src="data:image/png;base64,{_png(fig)}"/>'
        f"<figcaption>{html.escape(kind)}</figcaption></figure>" for kind, fig in figs.items())
    style = ("body{font-family:sans-serif;max-width:1100px;margin:2em auto;color:#222}"
             "table{border-collapse:collapse;margin:0.5em 0}td,th{border:1px solid #bbb;padding:3px 8px;"
             "font-size:0.9em}th{background:#eee}img{max-width:100%}.caution{border:2px solid #b4520e;"
             "padding:0.6em 1em;background:#fff6ee}figure{margin:1em 0}")
    return (
        f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'><title>{html.escape(title)}</title>"
        f"<style>{style}</style></head><body><h1>{html.escape(title)}</h1>"
        f"<section id='record'><h2>Record</h2>{summary}</section>"
        f"<section id='calibration'><h2>Cross-calibration</h2>{calibration}</section>"
        f"<section id='events'><h2>Events</h2>{events_table}</section>"
        f"<section id='forecast'><h2>Forecast</h2>{forecast}</section>"
        f"<section id='caution' class='caution'><h2>Caution</h2><p>{html.escape(CAUTION)}</p></section>"
        f"<section id='figures'><h2>Figures</h2>{figure_html}</section>"
        f"<footer><p>Made by polarflux {__version__}.</p></footer></body></html>"
    )


def write_report(path, analysis: dict, figs: dict, title: str, source: str, force: bool = False) -> Path:
    """Write the one-page report (self-contained HTML) atomically."""
    path = Path(path)
    text = report_html(analysis, figs, title, source)
    with atomic_path(path, force=force) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return path
