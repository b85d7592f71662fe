"""Figures and the report, rendered headless (Agg); what can be read back from the artists is checked."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.dates as mdates  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402

import polarflux as pf  # noqa: E402
from polarflux.analysis import analyse  # noqa: E402
from polarflux.events import from_decimal_year  # noqa: E402
from polarflux.plots import SIGNED_COLOURS, signed_colormap  # noqa: E402
from polarflux.report import FIGURE_KINDS, figures, report_html, save_figure  # noqa: E402


@pytest.fixture(scope="module")
def analysis(three_cycles):
    folder, truth = three_cycles
    record = pf.measure_archive([folder / "maps"])
    result = analyse(record, pf.read_sunspots(folder / "sunspots.csv"), members=60,
                     as_of=2051.0 + truth["next_cycle"]["start_years"] - 2.0)
    return result


@pytest.fixture(scope="module")
def drawn(analysis):
    return figures(analysis, caption="test caption")


def test_every_kind_is_drawn_with_labelled_axes_and_units(drawn):
    assert set(drawn) == set(FIGURE_KINDS)
    units = {"polar": "(G)", "butterfly": "(sine-latitude scale)", "map": "(deg)", "fan": "sunspot number",
             "calibration": "(G)"}
    for kind, fig in drawn.items():
        ax = fig.axes[0]
        assert ax.get_xlabel() and ax.get_ylabel(), kind
        assert units[kind] in ax.get_xlabel() + ax.get_ylabel(), kind
        assert any("test caption" in t.get_text() or "source" in t.get_text() for t in fig.texts), kind


def test_time_axes_carry_dates(drawn):
    for kind in ("polar", "butterfly", "fan"):
        ax = drawn[kind].axes[0]
        assert "UTC" in ax.get_xlabel()
        labels = [t.get_text() for t in ax.get_xticklabels()]
        assert any(label[:2] in ("20", "21") for label in labels), labels


def test_reversals_and_minima_are_marked_at_their_times(analysis, drawn):
    ax = drawn["polar"].axes[0]
    vertical = [line for line in ax.lines if len(set(np.atleast_1d(line.get_xdata()))) == 1]
    xs = np.array([mdates.date2num(np.atleast_1d(line.get_xdata())[0]) for line in vertical])
    events = analysis["events"]
    wanted = [r["time"] for h in ("north", "south") for r in events["reversals"][h]] + \
             [m["time"] for m in events["minima"]]
    assert len(vertical) >= len(wanted)
    for year in wanted:
        when = mdates.date2num(from_decimal_year(np.array([year]), True)[0].astype("datetime64[ms]").astype(object))
        assert np.min(np.abs(xs - when)) < 1.0  # within a day
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "north reversal" in legend and "cycle minimum" in legend and any("era" in t for t in legend)


def test_signed_images_are_symmetric_about_zero(drawn):
    for kind in ("butterfly", "map"):
        mesh = drawn[kind].axes[0].collections[0]
        assert mesh.norm.vmin == -mesh.norm.vmax and mesh.norm.vmax > 0
        assert "(G)" in drawn[kind].axes[1].get_ylabel()  # the colour bar


def test_signed_colour_scale_survives_grey_scale_print():
    from matplotlib.colors import to_rgb

    def luminance(colour):
        r, g, b = to_rgb(colour)
        return 0.2126 * r + 0.7152 * g + 0.0722 * b  # Rec. 709 luma (common practice)

    ends = [luminance(SIGNED_COLOURS[0]), luminance(SIGNED_COLOURS[len(SIGNED_COLOURS) // 2]),
            luminance(SIGNED_COLOURS[-1])]
    assert ends[1] > 0.9  # zero is near white
    assert abs(ends[0] - ends[2]) > 0.15  # the two signs differ in grey
    cmap = signed_colormap()
    assert cmap(0.5)[:3] == pytest.approx(to_rgb(SIGNED_COLOURS[3]), abs=0.01)


@pytest.mark.parametrize("suffix", [".png", ".pdf", ".svg"])
def test_figures_save_in_each_format(drawn, tmp_path, suffix):
    path = save_figure(drawn["polar"], tmp_path / f"polar{suffix}")
    assert path.stat().st_size > 5_000
    with pytest.raises(pf.OutputExistsError):
        save_figure(drawn["polar"], path)


def test_report_holds_every_section(analysis, drawn):
    page = report_html(analysis, drawn, "test report", "record.nc")
    for section in ("record", "calibration", "events", "forecast", "caution", "figures"):
        assert f"id='{section}'" in page
    assert page.count("<img") == len(drawn)
    assert "official space-weather forecasts" in page
    assert "polar reversal" in page and "cycle minimum" in page and "95 % range" in page
    assert "data:image/png;base64," in page  # self-contained


def test_plot_and_report_commands(three_cycles, tmp_path, capsys):
    from polarflux.cli import main

    folder, truth = three_cycles
    record = tmp_path / "record.nc"
    assert main(["measure", str(folder / "maps"), "--out", str(record), "--quiet"]) == 0
    sunspots = str(folder / "sunspots.csv")
    map_file = str(folder / truth["maps"][-1])
    for kind, source, extra in (("polar", record, []), ("butterfly", record, []), ("map", map_file, []),
                                ("calibration", record, ["--sunspots", sunspots])):
        out = tmp_path / f"{kind}.png"
        assert main(["plot", kind, str(source), "--out", str(out), *extra]) == 0
        assert out.stat().st_size > 10_000
    with pytest.raises(SystemExit):
        main(["plot", "fan", str(record), "--out", str(tmp_path / "fan.png")])  # needs --sunspots
    report = tmp_path / "report.html"
    assert main(["report", str(record), "--sunspots", sunspots, "--out", str(report)]) == 0
    assert "<section id='forecast'>" in report.read_text()
    assert main(["report", str(record), "--out", str(report)]) == 2  # no silent overwrite


def test_butterfly_of_a_transport_run(tmp_path):
    from polarflux.cli import main

    model = pf.FluxTransport(nlat=36, nlon=72)
    run = model.run(lambda lat, lon: 5 * np.sin(np.deg2rad(lat)) ** 7, years=1.0, step_days=5.0,
                    sources=[pf.BipolarRegion.with_joy_tilt(0.1, 20.0, 30.0, 3e22)])
    path = tmp_path / "run.nc"
    run.to_netcdf(path)
    assert main(["plot", "butterfly", str(path), "--out", str(tmp_path / "b.png")]) == 0
    assert (tmp_path / "b.png").stat().st_size > 5_000
    # read back what is drawn: one cell per (row, step) holding the run's longitude average, rows
    # placed at the sines of the run's latitude edges (half-way between its row centres, +-90 at the ends)
    from matplotlib.collections import QuadMesh

    from polarflux.cli._commands import _run_butterfly

    fig = _run_butterfly(path, "test")
    (mesh,) = [c for c in fig.axes[0].collections if isinstance(c, QuadMesh)]
    drawn = np.ma.getdata(mesh.get_array()).reshape(run.sizes["lat"], -1)
    expected = run["br"].values.mean(axis=-1).T
    assert drawn.shape == expected.shape  # a regular run: no gap columns
    np.testing.assert_allclose(drawn, expected, rtol=1e-12)
    lat = run["lat"].values
    edges = np.concatenate([[-90.0], 0.5 * (lat[:-1] + lat[1:]), [90.0]])
    y = mesh.get_coordinates()[:, 0, 1]
    np.testing.assert_allclose(y, np.sin(np.deg2rad(edges)), atol=1e-12)


def test_command_reference_is_generated_from_the_parser():
    from pathlib import Path

    from polarflux.cli import command_reference

    page = Path(__file__).resolve().parents[1] / "docs" / "cli.md"
    assert page.read_text() == command_reference(), "run python docs/make_cli_reference.py"


# --------------------------------------------------------------------------- what each figure says (issue 12)
# Small records and maps built here, so these checks need no scenario.

def _record(instruments, cap=70.0, n=24):
    """A hand-made record: north +3 G, south -2 G, dipole 1 G, one map per 27.2753 days."""
    import xarray as xr

    times = np.datetime64("2040-01-01T00:00", "ns") + (np.arange(n) * 27.2753 * 86400e9).astype("timedelta64[ns]")
    mean = np.column_stack([np.full(n, 3.0) + np.arange(n) * 0.01, np.full(n, -2.0)])
    return xr.Dataset(
        {"mean_field": (("time", "hemisphere"), mean), "signed_flux": (("time", "hemisphere"), mean * 1e21),
         "axial_dipole": (("time",), np.ones(n)),
         "instrument": (("time",), np.array([instruments[i * len(instruments) // n] for i in range(n)])),
         "source": (("time",), np.array([f"m{i}.fits" for i in range(n)]))},
        coords={"time": times, "hemisphere": ["north", "south"]}, attrs={"cap_deg": cap})


def _draw(fig):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig).draw()
    return fig.canvas.get_renderer()


def test_polar_y_labels_name_the_cap_latitude_of_the_record():
    from polarflux.plots import plot_polar_fields, plot_record_events

    record = _record(["A"], cap=70.0)
    for fig in (plot_polar_fields(record), plot_record_events(record)):
        label = fig.axes[0].get_ylabel()
        assert "70°" in label and "(G)" in label, label
        assert "60" not in label


def test_a_record_of_several_instruments_is_drawn_as_uncorrected():
    from polarflux.plots import plot_polar_fields

    record = _record(["A", "B"])
    ax = plot_polar_fields(record).axes[0]
    assert "uncorrected" in ax.get_title() and "own scale" in ax.get_title()
    assert "own scale" in ax.get_legend().get_title().get_text()
    by_label = {line.get_label(): line for line in ax.lines}
    b_rows = record["instrument"].values == "B"
    # each instrument is drawn with its own values, as measured (no factor applied)
    np.testing.assert_array_equal(by_label["north cap, B"].get_ydata(),
                                  record["mean_field"].sel(hemisphere="north").values[b_rows])
    one = plot_polar_fields(_record(["A"])).axes[0]
    assert "uncorrected" not in one.get_title() and not one.get_legend().get_title().get_text()


def test_missing_data_in_a_butterfly_is_grey_not_white_and_gaps_stay_gaps():
    from matplotlib.colors import to_rgba

    from polarflux.plots import NO_DATA_COLOUR, plot_butterfly

    rotation = 27.2753
    days = np.array([0, 1, 2, 4, 5]) * rotation  # rotation 3 is missing
    times = np.datetime64("2040-01-01", "ns") + (days * 86400e9).astype("timedelta64[ns]")
    edges = np.linspace(-1, 1, 11)
    profiles = np.tile(np.linspace(-1, 1, 10), (5, 1))
    profiles[::2, -1] = np.nan  # the north pole hidden in every other map
    fig = plot_butterfly(times, edges, profiles)
    mesh = fig.axes[0].collections[0]
    assert mesh.cmap.get_bad() == pytest.approx(to_rgba(NO_DATA_COLOUR))
    assert np.mean(to_rgba(NO_DATA_COLOUR)[:3]) < 0.75  # grey, far from the near-white of zero field
    data = mesh.get_array()
    # five map columns and one no-data column in the gap; the NaN cells are masked (drawn in the bad colour)
    assert data.shape == (10, 6)
    assert data.mask[:, 3].all() and data.mask.sum() == 10 + 3
    x_edges = mesh.get_coordinates()[0, :, 0]
    assert x_edges[4] - x_edges[3] == pytest.approx(0.8 * rotation)  # the gap's width in days
    assert "no data" in [t.get_text() for t in fig.axes[0].get_legend().get_texts()]


@pytest.mark.parametrize(("low", "high", "extend"), [(-50.0, 50.0, "both"), (0.0, 50.0, "max"),
                                                     (-50.0, 0.0, "min"), (0.0, 0.0, "neither")])
def test_colour_bars_carry_arrows_where_the_limits_clip(low, high, extend):
    from polarflux.plots import plot_map

    rng = np.random.default_rng(1)
    br = np.where(rng.uniform(-1.0, 1.0, (30, 60)) > 0, 1.0, -1.0)  # |B| = 1 G: the limit is 1 G, nothing clips
    if low:
        br[0, 0] = low
    if high:
        br[-1, -1] = high
    mesh = plot_map(pf.SynopticMap.from_array(br)).axes[0].collections[0]
    assert mesh.norm.vmax == pytest.approx(1.0)
    assert mesh.colorbar.extend == extend


def test_map_legend_hides_no_part_of_the_north_cap():
    from matplotlib.transforms import Bbox

    from polarflux.plots import plot_map

    br = np.zeros((90, 180))
    br[-2:, :] = np.nan
    fig = plot_map(pf.SynopticMap.from_array(br), cap_latitude=60.0)
    renderer = _draw(fig)
    ax = fig.axes[0]
    legend = ax.get_legend()
    texts = [t.get_text() for t in legend.get_texts()]
    assert "polar-cap boundary (±60°)" in texts and "no data" in texts
    cap = Bbox(ax.transData.transform([(0.0, np.sin(np.deg2rad(60.0))), (360.0, 1.0)]))
    assert not legend.get_window_extent(renderer).overlaps(cap)
    assert ax.get_ylim() == pytest.approx((-1.0, 1.0))


def test_calibration_bands_stop_at_zero():
    from matplotlib.collections import PolyCollection

    from polarflux.plots import plot_calibration

    fit = pf.fit_precursor([1.0, 1.5, 2.0, 2.5], [40.0, 90.0, 150.0, 170.0])
    assert fit.predict(0.0).low95 < 0  # unclipped, the band runs below zero here
    result = {"fit": fit, "proxy": "axial_dipole",
              "projection": {"proxy_at_minimum": {"median": 2.0, "low95": 1.6, "high95": 2.4}},
              "forecast": {"amplitude": {"median": 140.0, "low95": 90.0, "high95": 190.0}}}
    ax = plot_calibration(result).axes[0]
    bands = [c for c in ax.collections if isinstance(c, PolyCollection)]
    assert len(bands) == 2
    for band in bands:
        y = np.concatenate([p.vertices[:, 1] for p in band.get_paths()])
        assert y.min() == pytest.approx(0.0, abs=1e-9)
    assert ax.get_ylim()[0] == 0.0
    fitted = next(line for line in ax.lines if line.get_label().startswith("fit"))
    y = np.asarray(fitted.get_ydata(), dtype=float)
    assert np.nanmin(y) >= 0 and np.isnan(y[0])  # the line ends where the fit reaches zero
    assert "official space-weather forecasts" in ax.figure.texts[-1].get_text().replace("\n", " ")


def test_butterfly_rows_are_missing_exactly_where_the_map_has_no_data(tmp_path):
    """A hidden pole of k rows (as B0 hides it, varying map to map) leaves k rows of no data, no more."""
    import astropy.units as u
    from astropy.time import Time

    from polarflux.maps import write_map
    from polarflux.plots import butterfly_profiles

    rows = np.linspace(-3.0, 3.0, 90)
    paths = []
    for k, hidden in enumerate((0, 1, 2)):
        br = np.repeat(rows[:, None], 36, axis=1)
        br[90 - hidden:, :] = np.nan
        br[:, 0] += 0.5  # a longitude structure: the profile is the row mean
        m = pf.SynopticMap.from_array(br, carrington_rotation=2400 + k, time=Time("2040-01-01") + 27.2753 * k * u.day,
                                      instrument="A")
        paths.append(write_map(m, tmp_path / f"m{k}.fits"))
    record = _record(["A"], n=3).assign(source=("time", np.array(paths)))
    _, edges, profiles = butterfly_profiles(record, nrows=90)
    assert profiles.shape == (3, 90)
    for k, hidden in enumerate((0, 1, 2)):
        assert np.isnan(profiles[k]).sum() == hidden
        seen = 90 - hidden
        np.testing.assert_allclose(profiles[k, :seen], rows[:seen] + 0.5 / 36, rtol=0, atol=1e-5)


def test_fan_chart_draws_only_what_existed_and_reaches_past_the_maximum():
    # read back from the artists: no sunspot point after the forecast date, the smoothed line stops
    # six months before it (13-month smoothing needs six later months), the time axis runs past the
    # 95 % range of the time of maximum
    from matplotlib.dates import date2num

    from polarflux.plots import plot_forecast_fan
    from polarflux.timeseries import from_decimal_year

    t = 2040.0 + (np.arange(12 * 30) + 0.5) / 12.0
    v = 80.0 * np.clip(np.sin(2 * np.pi * (t - 2040.0) / 11.0), 0, None) + 5.0
    rng = np.random.default_rng(0)
    n = 300
    minimum = np.full(n, 2062.5)
    amplitude = rng.normal(120.0, 20.0, n)
    maximum = minimum + rng.normal(4.5, 1.0, n)
    summary = {k: float(np.percentile(amplitude, q)) for k, q in
               (("median", 50), ("low68", 16), ("high68", 84), ("low95", 2.5), ("high95", 97.5))}
    peak = {k: float(np.percentile(maximum, q)) for k, q in
            (("median", 50), ("low68", 16), ("high68", 84), ("low95", 2.5), ("high95", 97.5))}
    as_of = 2061.3
    result = {"as_of": as_of, "samples": {"amplitude": amplitude, "minimum_time": minimum, "maximum_time": maximum},
              "forecast": {"amplitude": summary, "maximum_time": peak}}
    fig = plot_forecast_fan(result, t, v)
    ax = fig.axes[0]
    lines = {line.get_label(): line for line in ax.get_lines()}
    as_of_num = date2num(from_decimal_year(np.array([as_of]), True)[0])
    raw_x = date2num(lines["sunspot number"].get_xdata())
    assert raw_x.max() <= as_of_num
    smooth = lines["13-month smoothed"]
    x, y = date2num(smooth.get_xdata()), np.asarray(smooth.get_ydata(), float)
    last = x[np.isfinite(y)].max()
    assert as_of_num - last > 0.45 * 365.25  # days
    assert ax.get_xlim()[1] >= date2num(from_decimal_year(np.array([peak["high95"]]), True)[0])
    median_curve = np.asarray(lines["median at each date"].get_ydata(), float)
    assert median_curve.max() <= summary["median"] + 1e-9  # what the caption says
    assert "members peak at different times" in fig.texts[-1].get_text().replace("\n", " ")
    # the caution at the foot, with or without a caption of the caller's
    for figure in (fig, plot_forecast_fan(result, t, v, caption="invented record")):
        foot = figure.texts[-1].get_text().replace("\n", " ")
        assert "official space-weather forecasts" in foot and "crew or spacecraft" in foot


def test_fan_chart_continues_the_declining_cycle_under_the_new_one():
    # the old cycle's fitted decline is drawn, and the fan starts from it, not from zero: at the forecast
    # date the median curve equals the written-out HWR shape (Hathaway, Wilson & Reichmann 1994,
    # b = 27.12 + 25.15 / (1000 a)^(1/4), c = 0.71) of the declining cycle there
    from polarflux.plots import plot_forecast_fan

    t = 2040.0 + (np.arange(12 * 30) + 0.5) / 12.0
    v = 80.0 * np.clip(np.sin(2 * np.pi * (t - 2040.0) / 11.0), 0, None) + 5.0
    n = 200
    amplitude = np.full(n, 120.0)
    minimum = np.full(n, 2063.0)
    maximum = minimum + 4.5
    summary = {k: 120.0 for k in ("median", "low68", "high68", "low95", "high95")}
    peak = {k: 2067.5 for k in ("median", "low68", "high68", "low95", "high95")}
    start, a, scale = 2052.0, 0.0025, 1.1
    result = {"as_of": 2060.5, "samples": {"amplitude": amplitude, "minimum_time": minimum, "maximum_time": maximum},
              "forecast": {"amplitude": summary, "maximum_time": peak},
              "projection": {"declining_cycle": {"start": start, "shape_a": a, "scale": scale}}}
    fig = plot_forecast_fan(result, t, v)
    lines = {line.get_label(): line for line in fig.axes[0].get_lines()}
    assert "declining cycle (fitted shape)" in lines
    x = (2060.5 - start) * 12.0
    b = 27.12 + 25.15 / (1000.0 * a) ** 0.25
    expected = scale * a * x**3 / (np.exp((x / b) ** 2) - 0.71)
    median = np.asarray(lines["median at each date"].get_ydata(), float)
    assert expected > 5.0
    assert median[0] == pytest.approx(expected, rel=1e-6)
