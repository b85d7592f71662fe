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

__all__ = ["FIGURE_KINDS", "figures", "figure_caption", "save_figure", "write_report", "report_html"]

FIGURE_KINDS = ("polar", "butterfly", "map", "fan", "calibration")


def figures(analysis: dict, kinds=FIGURE_KINDS, caption: str = "", truth_amplitude=None) -> dict:
    """Every figure kind that the analysis allows, as matplotlib Figures keyed by kind.

    Without a merged record (``analysis["merged"]`` None: the instruments could not be
    cross-calibrated) the polar figure shows each instrument on its own scale and
    says why; the butterfly diagram and the map need no cross-calibration.
    :func:`figure_caption` says in words what each figure shows.
    """
    from .maps import read_map
    from .plots import (
        butterfly_profiles,
        instrument_eras,
        plot_butterfly,
        plot_calibration,
        plot_forecast_fan,
        plot_map,
        plot_polar_fields,
        plot_record_events,
    )

    record = analysis["record"]
    merged = analysis.get("merged")
    out = {}
    if "polar" in kinds:
        if merged is not None:
            out["polar"] = plot_record_events(merged, analysis["events"], caption=caption,
                                              eras=instrument_eras(record))
        else:
            why = f"not cross-calibrated: {analysis.get('merge_error') or 'no merged record'}"
            out["polar"] = plot_polar_fields(
                record, caption=f"{caption}; {why}" if caption else why,
                title="Polar-cap mean field, instruments not cross-calibrated: each on its own scale")
    if "butterfly" in kinds:
        times, edges, profiles = butterfly_profiles(record, bases=analysis["bases"])
        if len(times):
            names = _instruments(record)
            title = ("Magnetic butterfly diagram, each instrument on its own scale (" + "; ".join(
                f"{name} {str(first)[:4]}–{str(last)[:4]}" for name, (first, last) in instrument_eras(record).items())
                + ")") if len(names) > 1 else None
            out["butterfly"] = plot_butterfly(times, edges, profiles, caption=caption, title=title)
    if "map" in kinds:
        latest = _latest_map(record, analysis["bases"])
        if latest is not None:
            out["map"] = plot_map(read_map(latest), cap_latitude=_cap(record),
                                  caption=f"{caption}; map {latest}" if caption else None)
    forecast = analysis["forecast"]
    if forecast is not None and analysis["sunspots"] is not None:
        if "fan" in kinds:
            out["fan"] = plot_forecast_fan(forecast, *analysis["sunspots"], caption=caption or None,
                                           truth_amplitude=truth_amplitude)
        if "calibration" in kinds:
            out["calibration"] = plot_calibration(forecast, caption=caption or None)
    return out


def _instruments(record) -> list[str]:
    return list(dict.fromkeys(str(x) for x in record["instrument"].values)) if "instrument" in record else []


def _cap(record) -> float:
    return float(record.attrs.get("cap_deg", 60.0))


def _maps_of(record) -> str:
    names = _instruments(record)
    count = record.sizes["time"]
    return (f"{count} map{'s' if count != 1 else ''} of {len(names)} instrument{'s' if len(names) != 1 else ''} "
            f"({', '.join(names)})" if names else f"{count} maps")


def figure_caption(kind: str, analysis: dict) -> str:
    """One sentence saying what figure ``kind`` of :func:`figures` shows, and from what."""
    record, merged, events, fc = analysis["record"], analysis.get("merged"), analysis.get("events"), \
        analysis.get("forecast")
    cap, several = _cap(record), len(_instruments(record)) > 1
    if kind == "polar" and merged is not None:
        smoothing = int((events or {}).get("smoothing_entries", 13))
        scale = f", merged onto {merged.attrs.get('reference_instrument')}'s scale" if several else ""
        viewing = merged.attrs.get("viewing_correction", "none")
        marks = ["reversals"] + (["cycle minima"] if events and events["minima"] else [])
        return (f"Polar-cap mean fields poleward of ±{cap:g}° from {_maps_of(record)}{scale}; points: single "
                f"rotations; lines: {smoothing}-rotation running mean after the viewing correction ({viewing}); "
                f"vertical lines: {' and '.join(marks)}" + ("; shading: instrument eras." if several else "."))
    if kind == "polar":
        return (f"Polar-cap mean fields poleward of ±{cap:g}° and the axial dipole from {_maps_of(record)}, each "
                f"instrument on its own scale (uncorrected): the instruments could not be cross-calibrated "
                f"({analysis.get('merge_error') or 'no merged record'}), so no events are marked.")
    if kind == "butterfly":
        scale = ", each instrument on its own scale (no cross-calibration applied)" if several else ""
        return (f"Longitude-averaged radial field against time and sine latitude from the readable maps among "
                f"{_maps_of(record)}{scale}; grey: no data (hidden poles, missing rotations); colour bar arrows: "
                f"values beyond the symmetric 98th-percentile limits.")
    if kind == "map":
        latest = _latest_map(record, analysis["bases"])
        return (f"Radial field of the latest readable map ({latest}) on a sine-latitude axis, with the polar-cap "
                f"boundaries at ±{cap:g}°; grey: no data.")
    if kind == "fan" and fc is not None:
        return (f"Sunspot number up to the forecast date {format_date(fc['as_of'])} (monthly and 13-month "
                f"smoothed) and the next cycle's median with 68 % and 95 % ranges from "
                f"{fc['projection']['members']} Monte Carlo members; proxy |{fc['proxy'].replace('_', ' ')}| at "
                f"minimum. Probabilistic: see the caution.")
    if kind == "calibration" and fc is not None:
        return (f"Next-cycle amplitude against |{fc['proxy'].replace('_', ' ')}| at the preceding minimum for "
                f"{len(fc['calibration']['pairs'])} calibration cycles, the fitted line with its 68 % and 95 % "
                f"prediction bands (clipped at zero), and this forecast's projected proxy and amplitude.")
    return kind


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


#: The caution of a report that holds no forecast: it speaks of what the page has.
NO_FORECAST_CAUTION = (
    "This report holds measurements and the events found in them, not a forecast. A forecast of the next "
    "cycle made from these polar fields would be probabilistic; operations that affect crew or spacecraft "
    "safety must follow the responsible agencies' official space-weather forecasts and local rules."
)


def _signed(value: float, unit: str = "") -> str:
    return f"{value:+.2f}{unit}" if np.isfinite(value) else "–"


def _calibration_html(events: dict) -> str:
    factors = events["scale_factors"]
    if not factors:
        return "<p>One instrument: no cross-calibration needed.</p>"
    out = _table(
        ["instrument", "onto", "quantity", "factor", "1σ", "95 % range", "rotations", "noise variance ratio"],
        [[f["instrument"], f["reference"], f["quantity"], f"{f['factor']:.4f}", f"{f['uncertainty']:.4f}",
          f"{f['low95']:.4f}–{f['high95']:.4f}", f["pairs"], f"{f.get('error_ratio', 1.0):.3g}"] for f in factors],
    )
    return out + ("<p>Noise variance ratio: the reference's noise variance over the instrument's, each from "
                  "the second differences of its own record, which the Deming fit weighs the two by.</p>"
                  "<p>Separate cap factors needed: " + ("yes" if events["band_factors_needed"] else
                  "no (one polar factor fits both caps and the dipole)") + ".</p>")


def _events_html(events: dict, have_sunspots: bool) -> str:
    """The events table; a reversal's window (earliest to latest) shows when it spans more than a day."""
    rows = []
    for hemisphere in ("north", "south"):
        for r in events["reversals"][hemisphere]:
            first, last = format_date(r["earliest"]), format_date(r["latest"])
            window = f"{first} to {last}" if r["earliest"] < r["latest"] and first != last else ""
            rows.append(["polar reversal", hemisphere, format_date(r["time"]), window,
                         "to +" if r["new_sign"] > 0 else "to −"])
    for lag in events["reversal_lags"]:
        rows.append(["reversal lag (S − N)", "", format_date(lag["north"]), "", f"{lag['lag_years']:+.2f} yr"])
    for m in events["minima"]:
        rows.append(["cycle minimum", "", format_date(m["time"]), "", f"SSN {m['sunspot_number']:.1f}"])
    for m in events["maxima"]:
        rows.append(["cycle maximum", "", format_date(m["time"]), "", f"SSN {m['sunspot_number']:.1f}"])
    for a in events["at_minima"]:
        north, south = (_signed(a[h]) + (f" ± {a[h + '_fill_error']:.2f}" if np.isfinite(
            a.get(h + "_fill_error", np.nan)) else "") for h in ("north", "south"))  # as the terminal's table
        rows.append(["polar fields at minimum", "N / S / dipole", format_date(a["time"]), "",
                     f"{north} / {south} / {_signed(a['axial_dipole'], ' G')}; "
                     f"asymmetry {_signed(a['asymmetry'])}"])
    out = _table(["event", "hemisphere", "date", "window", "value"], rows) if rows else \
        "<p>No polar reversal in the record.</p>"
    if not have_sunspots:
        out += "<p>Cycle minima and maxima need a sunspot series; none was given.</p>"
    return out


def report_html(analysis: dict, figs: dict, title: str, source: str) -> str:
    """The report page as a string (see :func:`write_report`)."""
    from .forecast import CAUTION

    record, events = analysis["record"], analysis.get("events")
    names = [str(x) for x in record["instrument"].values]
    times = record["time"].values
    summary = _table(
        ["record", "maps", "instruments", "first map", "last map", "cap", "fill", "failed files"],
        [[source, record.sizes["time"], ", ".join(f"{n} ({names.count(n)})" for n in dict.fromkeys(names)),
          str(times.min())[:10], str(times.max())[:10], f"poleward of {record.attrs.get('cap_deg', 60)}°",
          record.attrs.get("fill", ""), record.attrs.get("failed_count", 0)]],
    )
    if events is None:
        why = html.escape(analysis.get("merge_error") or "no merged record")
        calibration = (f"<p>The instruments could not be brought onto one scale: {why}. The figures show each "
                       "instrument on its own scale.</p>")
        events_table = (f"<p>No events: reversals are found in a record merged onto one scale, which this "
                        f"record could not be ({why}).</p>")
    else:
        calibration = _calibration_html(events)
        events_table = _events_html(events, analysis.get("sunspots") is not None)
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
        forecast = f"<p>No forecast was made: {html.escape(reason)}.</p>"
    caution = CAUTION if fc is not None else NO_FORECAST_CAUTION
    figure_html = "".join(
        f'<figure><img alt="{html.escape(kind)} figure" src="data:image/png;base64,{_png(fig)}"/>'
        f"<figcaption>{html.escape(figure_caption(kind, analysis))}</figcaption></figure>"
        for kind, fig in figs.items())
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
        f"<section id='caution' class='caution'><h2>Caution</h2><p>{html.escape(caution)}</p></section>"
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
