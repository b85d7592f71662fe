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


def test_command_reference_is_generated_from_the_parser():
    from pathlib import Path

    from polarflux.cli import command_reference

    page = Path(__file__).resolve().parents[1] / "docs" / "cli.md"
    assert page.read_text() == command_reference(), "run python docs/make_cli_reference.py"
