"""The report and its figures in every case the analysis chain returns: merged or not, with or without sunspots."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402

import polarflux as pf  # noqa: E402
from polarflux.analysis import analyse  # noqa: E402
from polarflux.report import NO_FORECAST_CAUTION, figure_caption, figures, report_html  # noqa: E402


@pytest.fixture(scope="module")
def record(tiny_scenario):
    folder, _ = tiny_scenario
    return pf.measure_archive([folder / "maps"])


@pytest.fixture(scope="module")
def unmerged(record):
    """The tiny record split between two instruments that share no rotation: it cannot be merged."""
    names = np.where(np.arange(record.sizes["time"]) < record.sizes["time"] // 2, "MSN-A", "MSN-Z")
    split = record.assign(instrument=("time", names))
    result = analyse(split, None)
    assert result["merged"] is None and result["events"] is None and "shares" in result["merge_error"]
    return result


def test_figures_of_a_record_that_cannot_be_merged(unmerged):
    drawn = figures(unmerged, caption="tiny")
    assert set(drawn) == {"polar", "butterfly", "map"}
    cap = unmerged["record"].attrs["cap_deg"]
    polar = drawn["polar"].axes[0]
    assert f"{cap:g}°" in polar.get_ylabel()
    assert "not cross-calibrated" in polar.get_title() and "own scale" in polar.get_legend().get_title().get_text()
    labels = [line.get_label() for line in polar.lines]
    assert "north cap, MSN-A" in labels and "north cap, MSN-Z" in labels
    # the reason reaches the figure itself, for 'polarflux plot polar'
    assert any(unmerged["merge_error"] in t.get_text() for t in drawn["polar"].texts)
    butterfly = drawn["butterfly"].axes[0]
    title = butterfly.get_title(loc="left")  # the legend sits above the axes on the right
    assert "own scale" in title and "MSN-Z" in title
    assert butterfly.collections[0].get_array().shape[1] >= unmerged["record"].sizes["time"]


def test_report_of_a_record_that_cannot_be_merged_says_why(unmerged):
    drawn = figures(unmerged)
    page = report_html(unmerged, drawn, "tiny", "tiny.nc")
    reason = unmerged["merge_error"].replace("'", "&#x27;")
    assert page.count(reason) >= 3  # cross-calibration, events, and the polar figure's caption
    assert "No events" in page and "<th>window</th>" not in page
    assert "This forecast" not in page and NO_FORECAST_CAUTION.split(".")[0] in page
    assert page.count("<figcaption>") == 3
    assert "each instrument on its own scale" in figure_caption("polar", unmerged)
    assert "each instrument on its own scale" in figure_caption("butterfly", unmerged)


def test_report_without_sunspots_speaks_of_what_it_has(record):
    result = analyse(record, None)
    page = report_html(result, {}, "tiny", "tiny.nc")
    assert "this forecast" not in page.lower()
    assert "No forecast was made: no sunspot series was given" in page
    assert "Cycle minima and maxima need a sunspot series" in page


def test_captions_are_sentences_naming_cap_maps_and_scale(record):
    result = analyse(record, None)
    text = figure_caption("polar", result)
    n = record.sizes["time"]
    assert f"±{record.attrs['cap_deg']:g}°" in text and f"{n} maps of 1 instrument" in text
    assert "13-rotation running mean" in text and "reversals" in text
    assert "cycle minima" not in text  # none without a sunspot series
    assert "grey: no data" in figure_caption("butterfly", result)


def test_events_table_shows_a_reversal_window_only_when_it_has_width(record):
    result = analyse(record, None)
    events = dict(result["events"])
    events["reversals"] = {
        "north": [{"hemisphere": "north", "time": 2054.5, "earliest": 2054.0, "latest": 2055.0, "crossings": 1,
                   "new_sign": -1}],
        "south": [{"hemisphere": "south", "time": 2055.0, "earliest": 2055.0, "latest": 2055.0, "crossings": 1,
                   "new_sign": 1}],
    }
    events["reversal_lags"] = []
    events["at_minima"] = [{"time": 2051.0, "north": 5.0, "south": float("nan"), "axial_dipole": 2.0,
                            "asymmetry": float("nan")}]
    page = report_html({**result, "events": events}, {}, "tiny", "tiny.nc")
    rows = [r for r in page.split("<tr>") if "polar reversal" in r]
    assert len(rows) == 2
    # decimal years 2054.0 and 2055.0 are the first days of those years (a calendar fact)
    assert "<td>2054-01-01 to 2055-01-01</td>" in rows[0]
    assert "<td></td>" in rows[1] and " to 2055" not in rows[1]  # earliest == latest: no range
    assert "nan" not in page.lower().replace("nanosecond", "")
    assert "+5.00 / – / +2.00 G" in page
    # the fill's uncertainty at a minimum, as the terminal's table gives it
    events["at_minima"] = [{**events["at_minima"][0], "north_fill_error": 0.26, "south_fill_error": float("nan")}]
    page = report_html({**result, "events": events}, {}, "tiny", "tiny.nc")
    assert "+5.00 ± 0.26 / – / +2.00 G" in page


def test_plot_commands_draw_a_record_that_cannot_be_merged(unmerged, tmp_path, capsys):
    from matplotlib.image import imread

    from polarflux.cli import main
    from polarflux.record import write_record

    path = write_record(unmerged["record"], tmp_path / "split.nc")
    for kind in ("polar", "butterfly"):
        out = tmp_path / f"{kind}.png"
        assert main(["plot", kind, str(path), "--out", str(out)]) == 0, capsys.readouterr().err
        assert imread(out).shape[0] > 300  # a drawn figure, read back as an image
    assert main(["report", str(path), "--out", str(tmp_path / "r.html")]) == 0
    assert "No events" in (tmp_path / "r.html").read_text()
