"""Figures. Each function returns a matplotlib Figure and accepts an optional Axes."""

from __future__ import annotations

import numpy as np

__all__ = [
    "plot_polar_fields",
    "plot_record_events",
    "plot_forecast_fan",
    "plot_calibration",
    "plot_butterfly",
    "plot_map",
    "butterfly_profiles",
    "instrument_eras",
    "cap_field_label",
    "signed_colormap",
    "colorbar_extend",
    "NO_DATA_COLOUR",
    "UNCORRECTED",
    "HEMISPHERE_STYLE",
    "SIGNED_COLOURS",
]

#: Line colours per hemisphere: a blue and an orange that stay apart for colour-blind
#: readers; line styles and markers keep them apart in grey-scale print too.
HEMISPHERE_STYLE = {
    "north": {"color": "#1f5fa6", "linestyle": "-"},
    "south": {"color": "#c45a12", "linestyle": "--"},
}
_INSTRUMENT_MARKERS = ("o", "s", "^", "D", "v")


def _new_axes(ax, size=(11, 4.8)):
    """The Axes given, or a new Figure made without pyplot (so nothing keeps it alive once dropped)."""
    from matplotlib.figure import Figure

    if ax is not None:
        return ax.figure, ax
    fig = Figure(figsize=size, layout="constrained")
    return fig, fig.add_subplot()


def cap_field_label(ds) -> str:
    """The y-label of a polar-field figure, naming the cap latitude the record was measured with."""
    try:
        cap = float(ds.attrs.get("cap_deg", np.nan))
    except (TypeError, ValueError):
        cap = np.nan
    where = f"poleward of ±{cap:g}°" if np.isfinite(cap) else "of the polar caps"
    return f"mean radial field {where} (G)"


def _instrument_names(ds) -> list[str]:
    return list(dict.fromkeys(str(x) for x in ds["instrument"].values)) if "instrument" in ds else []


def plot_polar_fields(ds, ax=None, caption: str | None = None, truth=None, title: str | None = None):
    """Mean polar-cap field of both hemispheres against time, per instrument, with the axial dipole.

    The record is drawn as measured: with more than one instrument each stays on
    its own scale, which the title and the legend say.

    Parameters
    ----------
    ds : xarray.Dataset
        A record from :func:`polarflux.measure_archive`.
    ax : matplotlib Axes, optional
        Draw into this Axes; a new Figure is made otherwise.
    caption : str, optional
        Small text under the axes naming the source of the data.
    truth : mapping, optional
        ``{"time": datetime64 array, "north": ..., "south": ...}``: a reference
        (for example the noise-free truth of a synthetic scenario) drawn as thin lines.
    title : str, optional
        Replaces the default title.
    """
    fig, ax = _new_axes(ax)
    times = ds["time"].values
    names = np.array([str(x) for x in ds["instrument"].values]) if "instrument" in ds else None
    instruments = _instrument_names(ds) or [""]
    several = len(instruments) > 1
    for hemisphere, style in HEMISPHERE_STYLE.items():
        values = ds["mean_field"].sel(hemisphere=hemisphere).values
        for k, name in enumerate(instruments):
            pick = names == name if name else slice(None)
            label = f"{hemisphere} cap" + (f", {name}" if several else "")
            ax.plot(times[pick], values[pick], marker=_INSTRUMENT_MARKERS[k % len(_INSTRUMENT_MARKERS)],
                    markersize=2.5, linewidth=0.8, label=label, **style)
        if truth is not None:
            ax.plot(truth["time"], truth[hemisphere], color="black", linewidth=0.6,
                    linestyle=style["linestyle"], alpha=0.7)
    ax.plot(times, ds["axial_dipole"].values, color="0.35", linestyle=":", linewidth=1.0, label="axial dipole")
    if truth is not None:
        ax.plot([], [], color="black", linewidth=0.6, label="truth (noise-free)")
    default = ("Polar-cap mean field, uncorrected: each instrument on its own scale" if several
               else "Polar-cap mean field")
    _finish(fig, ax, cap_field_label(ds), title or default, caption,
            legend_title=UNCORRECTED if several else None)
    return fig


#: The legend title of a record drawn with each instrument on its own scale.
UNCORRECTED = "uncorrected:\neach instrument\non its own scale"


def _finish(fig, ax, ylabel: str, title: str, caption: str | None, legend_title: str | None = None):
    """Zero line, time axis label, legend outside on the right, caption: the look of the field plots."""
    ax.axhline(0.0, color="0.6", linewidth=0.8)
    ax.set_xlabel("time (UTC)")
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    legend = ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize="x-small", borderaxespad=0.0,
                       title=legend_title, title_fontsize="x-small")
    legend.get_title().set_multialignment("left")
    if caption:
        _add_caption(fig, caption)
    return fig


#: The caution every figure showing a forecast carries, at its foot.
FIGURE_CAUTION = ("Forecasts are probabilistic: operations that affect crew or spacecraft safety follow the "
                  "responsible agencies' official space-weather forecasts and local rules.")


def add_forecast_caption(fig, caption: str | None) -> None:
    """The caption (if any), then the forecast caution, at the figure's foot."""
    _add_caption(fig, f"{caption.rstrip('. ')}. {FIGURE_CAUTION}" if caption else FIGURE_CAUTION)


def _add_caption(fig, caption: str) -> None:
    """Small grey text along the bottom edge, wrapped to the figure's width, with room kept for it."""
    import textwrap

    width = max(60, int(fig.get_figwidth() * 17))  # x-small characters per inch of figure, about
    lines = textwrap.wrap(caption, width, break_on_hyphens=False) or [""]
    engine = fig.get_layout_engine()
    if engine is not None and hasattr(engine, "set"):
        bottom = 0.045 + 0.03 * (len(lines) - 1)
        engine.set(rect=(0.0, bottom, 1.0, 1.0 - bottom))
    fig.text(0.01, 0.008, "\n".join(lines), fontsize="x-small", color="0.35", ha="left", va="bottom")


def plot_record_events(record, events: dict | None = None, ax=None, caption: str | None = None, eras=None):
    """Polar mean fields of a merged record, raw and smoothed, with reversals and minima marked.

    Parameters
    ----------
    record : xarray.Dataset
        From :func:`polarflux.calibration.merge_instruments`.
    events : dict, optional
        From :func:`polarflux.events.record_events`; reversals are drawn as vertical
        lines in each hemisphere's colour and style, minima as grey dotted lines.
    eras : dict, optional
        ``{instrument: (first time, last time)}`` (datetime64): each instrument's era is
        shaded (alternating grey tones and hatches), the overlaps darker.
    """
    import json

    from .timeseries import RECORD_MIN_COUNT, from_decimal_year, running_mean

    fig, ax = _new_axes(ax)
    times = record["time"].values
    for k, (name, (first, last)) in enumerate((eras or {}).items()):
        ax.axvspan(first, last, color="0.5", alpha=0.08 + 0.04 * (k % 2), hatch="//" if k % 2 else None,
                   linewidth=0, label=f"{name} era")
    variable = (events or {}).get("variable", "mean_field_corrected")
    if variable not in record:
        variable = "mean_field"
    smoothing = int((events or {}).get("smoothing_entries", 13))
    for hemisphere, style in HEMISPHERE_STYLE.items():
        raw = record["mean_field"].sel(hemisphere=hemisphere).values
        ax.plot(times, raw, marker=".", markersize=2, linewidth=0, color=style["color"], alpha=0.45,
                label=f"{hemisphere}, per rotation")
        smooth = running_mean(record[variable].sel(hemisphere=hemisphere).values, smoothing,
                              min(smoothing, RECORD_MIN_COUNT))
        ax.plot(times, smooth, linewidth=1.6, label=f"{hemisphere}, {smoothing}-rotation mean (corrected)", **style)
    if events:
        as_dt = np.issubdtype(times.dtype, np.datetime64)
        for hemisphere, style in HEMISPHERE_STYLE.items():
            for k, r in enumerate(events["reversals"][hemisphere]):
                when = from_decimal_year(np.array([r["time"]]), as_dt)[0]
                ax.axvline(when, color=style["color"], linestyle=style["linestyle"], linewidth=1.0,
                           label=f"{hemisphere} reversal" if k == 0 else None)
        for k, m in enumerate(events["minima"]):
            when = from_decimal_year(np.array([m["time"]]), as_dt)[0]
            ax.axvline(when, color="0.4", linestyle=":", linewidth=1.2, label="cycle minimum" if k == 0 else None)
    factors = json.loads(record.attrs.get("scale_factors", "[]") or "[]")
    scale = f"merged onto {record.attrs['reference_instrument']}'s scale" if factors else None
    return _finish(fig, ax, cap_field_label(record), "Polar-field record: reversals and minima", caption,
                   legend_title=scale)


def _cycle_curves(amplitudes, minima, times):
    """HWR cycle-shape curves (sunspot number against decimal years) for sampled amplitudes and minima."""
    from .synthetic import _shape_for_amplitude, cycle_shape

    grid = np.linspace(max(5.0, float(np.min(amplitudes))), max(10.0, float(np.max(amplitudes))), 30)
    a_grid = np.array([_shape_for_amplitude(a) for a in grid])
    a = np.interp(np.clip(amplitudes, grid[0], grid[-1]), grid, a_grid)
    months = (times[None, :] - np.asarray(minima)[:, None]) * 12.0
    curves = np.array([cycle_shape(m, ak) for m, ak in zip(months, a, strict=True)])
    scale = np.asarray(amplitudes) / np.maximum(curves.max(axis=1), 1e-9)
    return curves * scale[:, None]


def plot_forecast_fan(result: dict, sunspot_times, sunspot_values, ax=None, caption: str | None = None,
                      truth_amplitude: float | None = None):
    """Fan chart: the sunspot record, then the forecast cycle's 68 % and 95 % ranges, against dates."""
    from .events import from_decimal_year, smooth_13_month

    def dates(years):
        return from_decimal_year(np.asarray(years, dtype=np.float64), True)

    fig, ax = _new_axes(ax)
    from .cutoff import cut_sunspots

    # only what the forecast knew: the values whose month had ended, smoothed without later data
    t, v = cut_sunspots(np.asarray(sunspot_times), np.asarray(sunspot_values), result["as_of"])
    history = t >= result["as_of"] - 25.0
    ax.plot(dates(t[history]), v[history], color="0.6", linewidth=0.6, label="sunspot number")
    smooth = smooth_13_month(v) if t.size > 1 and np.median(np.diff(t)) < 2 / 12 else v
    ax.plot(dates(t[history]), smooth[history], color="black", linewidth=1.2,
            label="13-month smoothed")
    samples = result["samples"]
    minima = np.asarray(samples.get("minimum_time", samples["maximum_time"] - 4.0))
    # far enough to show the whole 95 % range of the time of maximum, and the decline after it
    end = max(result["as_of"] + 8.0, float(result["forecast"]["maximum_time"]["high95"]) + 3.0)
    future = np.linspace(result["as_of"], end, 240)
    count = min(400, samples["amplitude"].size)
    curves = _cycle_curves(samples["amplitude"][:count], minima[:count], future)
    declining = (result.get("projection") or {}).get("declining_cycle")
    if declining:  # the old cycle's fitted decline runs on under the new cycle's rise
        from .emergence import DecliningCycle

        old = DecliningCycle(**declining)(future)
        curves = curves + old[None, :]
        ax.plot(dates(future), old, color="black", linestyle="--", linewidth=1.0,
                label="declining cycle (fitted shape)")
    low95, low68, mid, high68, high95 = np.percentile(curves, [2.5, 16, 50, 84, 97.5], axis=0)
    ax.fill_between(dates(future), low95, high95, color="#1f5fa6", alpha=0.18, label="95 % range")
    ax.fill_between(dates(future), low68, high68, color="#1f5fa6", alpha=0.35, label="68 % range")
    ax.plot(dates(future), mid, color="#1f5fa6", linewidth=1.5,
            label="median at each date")
    amp = result["forecast"]["amplitude"]
    peak = result["forecast"]["maximum_time"]
    ax.errorbar(dates([peak["median"]]), [amp["median"]],
                yerr=[[amp["median"] - amp["low95"]], [amp["high95"] - amp["median"]]], fmt="o",
                color="#c45a12", capsize=3, label="next maximum (median, 95 %)")
    ax.hlines(amp["median"], dates([peak["low95"]])[0], dates([peak["high95"]])[0], color="#c45a12",
              linewidth=3, alpha=0.5, label="time of maximum, 95 %")
    if truth_amplitude is not None:
        ax.axhline(truth_amplitude, color="#c45a12", linestyle=":", linewidth=1.0, label="truth amplitude")
    ax.axvline(dates([result["as_of"]])[0], color="0.4", linestyle="--", linewidth=0.8, label="forecast date")
    ax.set_xlabel("time (UTC)")
    ax.set_ylabel("sunspot number")
    ax.set_title("Next-cycle forecast (probabilistic; see the caution)")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize="x-small", borderaxespad=0.0)
    note = ("Only data that existed on the forecast date; the smoothed line stops six months before it. The median "
            "curve peaks below the median amplitude because members peak at different times.")
    add_forecast_caption(fig, f"{caption}. {note}" if caption else note)
    return fig


def plot_calibration(result: dict, ax=None, caption: str | None = None):
    """The calibration pairs, the fitted line with its 68 % and 95 % prediction bands, and the projection."""
    fig, ax = _new_axes(ax, size=(7.5, 5))
    fit = result["fit"]
    x = fit.proxy
    span = np.linspace(0.0, max(float(np.max(x)), result["projection"]["proxy_at_minimum"]["high95"]) * 1.15, 100)
    p = fit.predict(span)
    # amplitudes are non-negative: the bands (and the line) stop at zero instead of running below it
    low95, low68, high68, high95 = (np.maximum(np.asarray(v, dtype=np.float64), 0.0)
                                    for v in (p.low95, p.low68, p.high68, p.high95))
    median = np.where(np.asarray(p.median) >= 0.0, p.median, np.nan)
    ax.fill_between(span, low95, high95, color="#1f5fa6", alpha=0.15, label="95 % prediction band")
    ax.fill_between(span, low68, high68, color="#1f5fa6", alpha=0.3, label="68 % prediction band")
    ax.plot(span, median, color="#1f5fa6", label=f"fit: {fit.describe()}")
    ax.plot(x, fit.amplitude, "ks", markersize=5, label="calibration cycles")
    for xi, yi, label in zip(x, fit.amplitude, fit.labels or [""] * x.size, strict=True):
        ax.annotate(str(label), (xi, yi), textcoords="offset points", xytext=(4, 4), fontsize="x-small")
    proj = result["projection"]["proxy_at_minimum"]
    amp = result["forecast"]["amplitude"]
    ax.errorbar([proj["median"]], [amp["median"]], xerr=[[proj["median"] - proj["low95"]], [proj["high95"] - proj["median"]]],
                yerr=[[amp["median"] - amp["low95"]], [amp["high95"] - amp["median"]]], fmt="o", color="#c45a12",
                capsize=3, label="forecast (median, 95 %)")
    unit = "G"
    ax.set_xlabel(f"|{result['proxy'].replace('_', ' ')}| at minimum ({unit})")
    ax.set_ylabel("amplitude of the next cycle (sunspot number)")
    ax.set_title("Precursor calibration")
    ax.set_ylim(bottom=0.0)
    ax.legend(loc="upper left", fontsize="x-small")
    add_forecast_caption(fig, caption)
    return fig


# --------------------------------------------------------------------------- signed-field images

#: The project's colour scale for signed field, used symmetric about zero: dark blue
#: (negative) through a near-white zero to orange (positive). Blue against orange stays
#: apart for the common colour-vision deficiencies, and the two ends differ in lightness
#: (dark blue against mid orange), so the sign survives grey-scale print too.
SIGNED_COLOURS = ("#0b2a59", "#3d6fb0", "#9cc0e6", "#f4f4f4", "#f6c48e", "#e58a33", "#b4520e")


#: Where a signed-field image has no data (hidden pole, missing pixels): a neutral mid grey,
#: darker than the near-white of zero field, so a gap never reads as "no field".
NO_DATA_COLOUR = "#8c8c8c"


def signed_colormap():
    """The signed-field colour map (see :data:`SIGNED_COLOURS`); missing data draws as :data:`NO_DATA_COLOUR`."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("polarflux_signed", SIGNED_COLOURS, N=256).with_extremes(
        bad=NO_DATA_COLOUR)


def _symmetric_limit(values, quantile: float = 98.0) -> float:
    finite = np.abs(np.asarray(values)[np.isfinite(values)])
    limit = float(np.percentile(finite, quantile)) if finite.size else 0.0
    return limit if limit > 0 else 1.0


def colorbar_extend(values, vmin: float, vmax: float) -> str:
    """The colour bar's ``extend`` for these limits: an arrow at each end the limits clip."""
    finite = np.asarray(values, dtype=np.float64)
    finite = finite[np.isfinite(finite)]
    below = bool(finite.size) and float(finite.min()) < vmin
    above = bool(finite.size) and float(finite.max()) > vmax
    return {(True, True): "both", (True, False): "min", (False, True): "max"}.get((below, above), "neither")


def _signed_image(fig, ax, x_edges, y_edges, values, label: str):
    """A signed-field mesh: symmetric limits, grey where there is no data, a colour bar with clip arrows."""
    from matplotlib.patches import Patch

    values = np.asarray(values, dtype=np.float64)
    limit = _symmetric_limit(values)
    mesh = ax.pcolormesh(x_edges, y_edges, np.ma.masked_invalid(values), cmap=signed_colormap(),
                         vmin=-limit, vmax=limit, shading="flat")
    colorbar = fig.colorbar(mesh, ax=ax, pad=0.01, extend=colorbar_extend(values, -limit, limit))
    colorbar.set_label(label)
    ticks = np.array([-90, -60, -30, 0, 30, 60, 90])
    ax.set_yticks(np.sin(np.deg2rad(ticks)))
    ax.set_yticklabels([f"{v:d}°" for v in ticks])
    ax.set_ylim(-1.0, 1.0)
    ax.set_ylabel("latitude (sine-latitude scale)")
    handles = [Patch(facecolor=NO_DATA_COLOUR, edgecolor="0.3", linewidth=0.5, label="no data")] \
        if not np.all(np.isfinite(values)) else []
    return mesh, handles


def _legend_above(ax, handles) -> None:
    """A legend above the axes at the right, beside a left-aligned title: it hides no data."""
    if handles:
        ax.legend(handles=handles, loc="lower right", bbox_to_anchor=(1.0, 1.005), borderaxespad=0.0,
                  fontsize="x-small", ncols=len(handles), frameon=False)


def butterfly_profiles(record, nrows: int = 90, bases=("",)):
    """Longitude-averaged radial field per map of a record, on ``nrows`` equal sine-latitude rows.

    A row of the output is NaN where the map has data in less than half of it (a
    hidden pole); otherwise it is the mean of the map's finite pixels there, so a
    row half-seen is not pulled towards zero. Each map stays on its own scale.

    Returns (times, sine-latitude edges, profiles[time, row]); maps that cannot be read are skipped.
    """
    import os

    from .errors import PolarfluxError
    from .geometry import regrid_conservative
    from .maps import read_map

    s_edges = np.linspace(-1.0, 1.0, nrows + 1)
    lat_edges = np.rad2deg(np.arcsin(s_edges))
    times, rows = [], []
    for i, source in enumerate(record["source"].values):
        paths = [os.path.join(b, str(source)) for b in bases]
        path = next((p for p in paths if os.path.exists(p)), None)
        if path is None:
            continue
        try:
            m = read_map(path)
        except PolarfluxError:
            continue
        finite = np.isfinite(m.values)
        # area-weighted: sums of field and of seen fraction per map row, regridded conserving both
        seen = finite.mean(axis=1)
        mean_of_row = np.where(finite, m.values, 0.0).sum(axis=1, dtype=np.float64) / finite.shape[1]
        field = regrid_conservative(mean_of_row[:, None], m.lat_edges, [0, 360], lat_edges, [0, 360])[:, 0]
        cover = regrid_conservative(seen[:, None], m.lat_edges, [0, 360], lat_edges, [0, 360])[:, 0]
        with np.errstate(invalid="ignore", divide="ignore"):
            rows.append(np.where(cover > 0.5, field / cover, np.nan))
        times.append(record["time"].values[i])
    return np.array(times, dtype="datetime64[ns]"), s_edges, np.array(rows)


def plot_butterfly(times, sine_edges, profiles, ax=None, caption: str | None = None, title: str | None = None):
    """Magnetic butterfly diagram: longitude-averaged radial field against time and sine latitude.

    Missing data (a hidden pole, a gap between maps) is drawn in :data:`NO_DATA_COLOUR`
    and named in a legend above the axes; the colour bar has an arrow at each end its
    symmetric limits clip.

    Parameters
    ----------
    times : datetime64 array (or decimal years)
    sine_edges : array, len nrows + 1
        Row edges in sin(latitude).
    profiles : array (time, row)
        Longitude-averaged radial field, G; NaN where there is no data.
    """
    import matplotlib.dates as mdates

    fig, ax = _new_axes(ax, size=(11, 4.8))
    profiles = np.asarray(profiles, dtype=np.float64)
    t = np.asarray(times)
    if np.issubdtype(t.dtype, np.datetime64):
        x = mdates.date2num(t.astype("datetime64[ms]").astype(object))
        ax.xaxis_date()
        xlabel = "time (UTC)"
    else:
        x = t.astype(np.float64)
        xlabel = "time (years)"
    x_edges, columns = _columns_with_gaps(x, profiles)
    _, handles = _signed_image(fig, ax, x_edges, sine_edges, columns.T, "longitude-averaged radial field (G)")
    ax.set_xlabel(xlabel)
    ax.set_title(title or "Magnetic butterfly diagram", loc="left")
    _legend_above(ax, handles)
    if caption:
        _add_caption(fig, caption)
    return fig


def _columns_with_gaps(x: np.ndarray, profiles: np.ndarray):
    """Column edges of one cadence step around each time, and the profiles with NaN columns in the gaps.

    Neighbours closer than 1.2 steps share an edge half-way between them; a longer
    gap (a missing rotation) gets a column of NaN, so it draws as no data instead
    of being covered by stretched neighbours.
    """
    x = np.asarray(x, dtype=np.float64)
    order = np.argsort(x, kind="stable")
    x, profiles = x[order], profiles[order]
    steps = np.diff(x)
    steps = steps[steps > 0]
    half = 0.6 * (float(np.median(steps)) if steps.size else 1.0)
    mid = 0.5 * (x[1:] + x[:-1])
    left = np.concatenate([[x[0] - half], np.maximum(x[1:] - half, mid)])
    right = np.concatenate([np.minimum(x[:-1] + half, mid), [x[-1] + half]])
    gap = np.append(left[1:] > right[:-1], False)  # a no-data column after column i
    edges = [left[0]]
    columns = []
    for i in range(x.size):
        edges.append(right[i])
        columns.append(profiles[i])
        if gap[i]:
            edges.append(left[i + 1])
            columns.append(np.full(profiles.shape[1], np.nan))
    return np.array(edges), np.array(columns)


def plot_map(m, ax=None, cap_latitude: float = 60.0, caption: str | None = None):
    """Quick look at one synoptic map on a sine-latitude axis, with the polar-cap boundaries drawn.

    The legend (cap boundaries, no data) sits above the axes, so it hides no part of the map.
    """
    from matplotlib.lines import Line2D

    from .maps import quiet_time_warnings

    fig, ax = _new_axes(ax, size=(10, 4.6))
    _, handles = _signed_image(fig, ax, m.lon_edges, np.sin(np.deg2rad(m.lat_edges)), m.values, "radial field (G)")
    boundary = dict(color="black", linestyle="--", linewidth=1.0)
    for sign in (1, -1):
        ax.axhline(sign * np.sin(np.deg2rad(cap_latitude)), **boundary)
    handles.insert(0, Line2D([], [], label=f"polar-cap boundary (±{cap_latitude:g}°)", **boundary))
    ax.set_xlabel("Carrington longitude (deg)")
    with quiet_time_warnings():
        when = "" if m.time is None else f", {m.time.utc.isot[:10]}"
    rotation = "" if m.carrington_rotation is None else f"CR {m.carrington_rotation}"
    ax.set_title(f"Synoptic map {rotation}{when} {m.instrument}".strip(), loc="left")
    _legend_above(ax, handles)
    _add_caption(fig, caption or f"source: {m.source}")
    return fig


def instrument_eras(record) -> dict:
    """``{instrument: (first map time, last map time)}`` of a measured record."""
    names = np.array([str(x) for x in record["instrument"].values])
    times = record["time"].values
    return {name: (times[names == name].min(), times[names == name].max()) for name in dict.fromkeys(names)}
