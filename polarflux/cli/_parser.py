"""The ``polarflux`` command line: every sub-command, its options and their help."""

from __future__ import annotations

import argparse

from .._version import __version__
from ..fill import DEFAULT_FILL, RECORD_FILLS
from ..los import FIELDS

__all__ = ["build_parser", "command_reference"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="polarflux",
        description="Polar magnetic fields from Carrington-rotation synoptic maps: measure an archive, read "
        "the record, evolve the field with surface flux transport, and forecast the next solar cycle "
        "(probabilistic; operations follow the official space-weather forecasts).",
    )
    parser.add_argument("--version", action="version", version=f"polarflux {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)

    measure = commands.add_parser(
        "measure",
        help="measure the polar caps of every map and write one record",
        description="Measure polar-cap flux, mean polar field and axial dipole of every synoptic map.",
    )
    measure.add_argument("inputs", nargs="+", metavar="INPUT",
                         help="FITS files, folders (searched recursively) or glob patterns")
    measure.add_argument("--out", required=True, metavar="FILE",
                         help="output record: FILE.csv (one row per map) or FILE.nc (netCDF)")
    _add_measure_options(measure)
    measure.add_argument("--ledger", metavar="PATH",
                         help="measurement ledger (SQLite): maps already measured with the same settings are "
                         "not measured again (default: the user's cache folder; 'none' for no ledger)")
    measure.add_argument("--retry-failed", action="store_true",
                         help="measure again the files that failed in earlier runs (after repairing them)")
    measure.add_argument("--dask", metavar="ADDRESS",
                         help="measure on a dask.distributed cluster: a scheduler address, or 'local'")
    measure.add_argument("--force", action="store_true",
                         help="overwrite an existing output (the monthly update: rebuilt from the ledger)")
    measure.add_argument("--quiet", action="store_true", help="no progress bar and no summary line")

    transport = commands.add_parser(
        "transport",
        help="run a surface flux transport model described by a TOML file",
        description="Evolve the radial field with the surface flux transport model; the TOML keys "
        "are listed in README.md.",
    )
    transport.add_argument("config", metavar="CONFIG.toml", help="model, run, initial state and regions")
    transport.add_argument("--out", required=True, metavar="FILE.nc", help="output netCDF file")
    transport.add_argument("--force", action="store_true", help="overwrite an existing output")

    events = commands.add_parser(
        "events",
        help="calibrate a record across instruments and find reversals, minima and polar fields at minima",
        description="Bring a record onto one instrument's scale, correct the yearly viewing swing, and "
        "find the polar reversals; with a sunspot series, the cycle minima and maxima and the polar "
        "fields at each minimum. Prints a table and writes PREFIX.json, PREFIX.csv, PREFIX.png and "
        "PREFIX_merged.nc.",
    )
    events.add_argument("record", metavar="RECORD", help="a record from 'polarflux measure' (.nc or .csv)")
    events.add_argument("--sunspots", metavar="FILE.csv",
                        help="sunspot numbers: columns date (or year) and sunspot_number, monthly or yearly")
    events.add_argument("--reference", metavar="INSTRUMENT", help="instrument whose scale the record takes "
                        "(default: the one with most maps)")
    events.add_argument("--per-band", action="store_true", help="separate north and south cap scale factors")
    events.add_argument("--viewing", choices=("b0", "annual", "none"), default="b0",
                        help="yearly viewing correction (default: b0, a regression on the B0 angle)")
    events.add_argument("--out", metavar="PREFIX", help="output prefix (default: RECORD without its suffix + _events)")
    events.add_argument("--force", action="store_true", help="overwrite existing outputs")

    forecast = commands.add_parser(
        "forecast",
        help="project the polar field to the coming minimum and forecast the next cycle",
        description="Calibrate the precursor relation on the record's own cycles (or a calibration CSV), "
        "project the polar field to the coming minimum with a transport ensemble, and forecast the next "
        "cycle's amplitude and time of maximum with 68 % and 95 % ranges. Writes PREFIX.json, "
        "PREFIX_fan.png and PREFIX_calibration.png. A forecast is probabilistic.",
    )
    forecast.add_argument("record", metavar="RECORD", help="a record from 'polarflux measure' (.nc or .csv)")
    forecast.add_argument("--sunspots", required=True, metavar="FILE.csv",
                          help="sunspot numbers: columns date (or year) and sunspot_number")
    forecast.add_argument("--calibration", metavar="FILE.csv",
                          help="calibration pairs: columns cycle, proxy, next_amplitude, source")
    from ..precursor import DEFAULT_LAW, LAWS

    forecast.add_argument("--law", choices=LAWS, default=DEFAULT_LAW,
                          help="precursor law: 'linear' (amplitude = a + b x proxy, least squares) or 'proportional' "
                          f"(amplitude = k x proxy with a log-normal scatter: one parameter) (default: {DEFAULT_LAW})")
    forecast.add_argument("--proxy", choices=("axial_dipole", "mean_field"), default="axial_dipole",
                          help="polar proxy at minimum (default: axial_dipole)")
    forecast.add_argument("--regions", metavar="FILE.csv",
                          help="active regions (columns date or year, latitude, and leading_polarity or flux_mx): "
                          "a minimum the new cycle's regions confirm (high latitude, reversed leading polarity, "
                          "outnumbering the old cycle's) is used before the sunspot series can confirm it")
    forecast.add_argument("--members", type=int, default=1000, metavar="N", help="ensemble members (default: 1000)")
    forecast.add_argument("--seed", type=int, default=0, help="random seed of the ensemble (default: 0)")
    forecast.add_argument("--as-of", metavar="DATE", help="forecast as on this date (YYYY-MM-DD): a hindcast")
    forecast.add_argument("--out", metavar="PREFIX", help="output prefix (default: RECORD without suffix + _forecast)")
    forecast.add_argument("--force", action="store_true", help="overwrite existing outputs")

    from ..record import available_cores

    hindcast = commands.add_parser(
        "hindcast",
        help="forecasts as of many past dates, each on what existed then, scored against what followed",
        description="Forecast as of many dates (default: every three months across the record, wherever three "
        "earlier cycles allow a calibration), each seeing only the maps whose rotation had ended and the "
        "sunspot months that had ended by its date; score each where the outcome is known (the sunspot "
        "series, or a scenario's truth.json) by error, PIT, 68 % / 95 % coverage and CRPS, summarised by "
        "lead. Writes PREFIX_hindcast.csv, PREFIX_hindcast_leads.csv and figures.",
    )
    hindcast.add_argument("record", metavar="RECORD", help="a record from 'polarflux measure' (.nc or .csv)")
    hindcast.add_argument("--sunspots", required=True, metavar="FILE.csv", help="sunspot numbers")
    hindcast.add_argument("--every", default="3M", metavar="STEP",
                          help="spacing of the forecast dates: 3M (months), 1Y (years), 27D (days) (default: 3M)")
    hindcast.add_argument("--from", dest="start", metavar="DATE", help="first forecast date (YYYY-MM-DD)")
    hindcast.add_argument("--to", dest="end", metavar="DATE", help="last forecast date (YYYY-MM-DD)")
    hindcast.add_argument("--truth", metavar="truth.json",
                          help="an invented scenario's truth: outcomes from it instead of the sunspot series")
    hindcast.add_argument("--regions", metavar="FILE.csv",
                          help="active regions, as for 'polarflux forecast --regions': each forecast sees those "
                          "emerged by its date")
    hindcast.add_argument("--members", type=int, default=200, metavar="N",
                          help="Monte Carlo members of each forecast (default: 200)")
    hindcast.add_argument("--seed", type=int, default=0, help="random seed (default: 0)")
    hindcast.add_argument("--jobs", type=int, default=available_cores(), metavar="N",
                          help="processes to use (default: the cores available)")
    hindcast.add_argument("--dask", metavar="ADDRESS",
                          help="run the forecasts on a dask.distributed cluster: a scheduler address, or 'local'")
    hindcast.add_argument("--out", metavar="PREFIX", help="output prefix (default: RECORD without its suffix)")
    hindcast.add_argument("--force", action="store_true", help="overwrite existing outputs")

    plot = commands.add_parser(
        "plot",
        help="draw one figure: polar, butterfly, map, fan or calibration",
        description="Draw one figure. polar: the merged polar-field record with reversals, minima and "
        "instrument eras (INPUT: a record); butterfly: longitude-averaged field against time and latitude "
        "(INPUT: a record whose maps are readable, or a transport run .nc); map: one synoptic map with the "
        "cap boundaries (INPUT: a FITS map); fan and calibration: the forecast (INPUT: a record, with "
        "--sunspots).",
    )
    plot.add_argument("kind", choices=("polar", "butterfly", "map", "fan", "calibration"))
    plot.add_argument("input", metavar="INPUT", help="a record (.nc/.csv), a transport run (.nc) or a FITS map")
    plot.add_argument("--out", required=True, metavar="FILE", help="FILE.png, FILE.pdf or FILE.svg")
    plot.add_argument("--sunspots", metavar="FILE.csv", help="sunspot numbers (polar: minima; fan, calibration)")
    plot.add_argument("--cap", type=float, default=60.0, metavar="DEG", help="cap boundary for 'map' (default: 60)")
    plot.add_argument("--force", action="store_true", help="overwrite an existing output")

    report = commands.add_parser(
        "report",
        help="write the one-page report: record, events, forecast, caution and figures",
        description="Write one self-contained HTML page with the record summary, the cross-calibration, "
        "the events table, the forecast with its intervals, the caution, and every figure embedded.",
    )
    report.add_argument("record", metavar="RECORD", help="a record from 'polarflux measure' (.nc or .csv)")
    report.add_argument("--sunspots", metavar="FILE.csv", help="sunspot numbers (minima and the forecast)")
    report.add_argument("--out", required=True, metavar="FILE.html", help="the report page")
    report.add_argument("--force", action="store_true", help="overwrite an existing output")

    synth = commands.add_parser(
        "synth",
        help="write the invented multi-cycle scenario: synoptic maps plus their truth",
        description="Generate the invented scenario (no real data): an archive of synoptic maps from two "
        "invented instruments, with truth.json, truth_series.csv, regions.csv and sunspots.csv beside it.",
    )
    synth.add_argument("--out", required=True, metavar="DIR", help="folder for the scenario")
    _add_scenario_options(synth)
    synth.add_argument("--force", action="store_true", help="replace a scenario already in DIR")

    demo = commands.add_parser(
        "demo",
        help="generate (or reuse) the invented scenario, measure it, read the record, forecast, report",
        description="Generate the invented scenario (or reuse it), measure every map, read the record, "
        "forecast the next cycle from two years before its minimum, and write the report and every "
        "figure, each beside the scenario's truth.",
    )
    demo.add_argument("--out", default="polarflux-demo", metavar="DIR",
                      help="folder for the scenario and results (default: %(default)s)")
    _add_scenario_options(demo)
    _add_measure_options(demo)
    for name, sub in commands.choices.items():
        sub.set_defaults(command_parser=sub, command_name=name)
    return parser


def _add_scenario_options(parser: argparse.ArgumentParser) -> None:
    from ..synthetic import PRESETS, RESOLUTIONS

    parser.add_argument("--seed", type=int, default=2051, help="random seed (default: %(default)s)")
    parser.add_argument("--cycles", type=int, default=4, metavar="K", help="solar cycles (default: 4)")
    parser.add_argument("--resolution", choices=tuple(RESOLUTIONS), default="standard",
                        help="model and map grids (default: standard: model 1 degree, maps 2 and 1 degree)")
    parser.add_argument("--years", type=float, default=None, metavar="Y",
                        help="stop the scenario after Y years (default: when the last cycle ends)")
    parser.add_argument("--preset", choices=tuple(PRESETS), default=None,
                        help="a harder world: 'hard' turns on transport unlike the forecast's priors, "
                        "anti-Hale and very large regions, a non-linear precursor law, line-of-sight maps "
                        "assembled over each rotation, saturating instruments and long gaps (default: none, "
                        "the demo's world; docs/methods.md lists the settings)")


def _add_measure_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--cap", type=float, default=60.0, metavar="DEG",
                        help="cap boundary latitude in degrees (default: 60)")
    parser.add_argument("--fill", choices=RECORD_FILLS, default=DEFAULT_FILL,
                        help="the unseen part of the polar caps: 'none' integrates what is observed, "
                        "'profile' fills it from each map's latitude profile, 'temporal' from the same "
                        f"instrument's maps where it was well seen, interpolated in time (default: {DEFAULT_FILL})")
    parser.add_argument("--field", choices=FIELDS, default="auto",
                        help="the maps hold radial or line-of-sight (los) field; 'auto' reads line of sight where "
                        "the header says MAPFIELD = 'LOS' (default: auto)")
    cubes = parser.add_mutually_exclusive_group()
    cubes.add_argument("--plane", type=int, metavar="N",
                       help="for data cubes of realizations (model-ensemble maps): measure plane N of each "
                       "(0 is the first)")
    cubes.add_argument("--planes", choices=("all",),
                       help="for data cubes: 'all' measures every realization; the record holds their mean and "
                       "their spread (north_spread_g, south_spread_g, axial_dipole_spread_g)")
    from ..record import available_cores

    parser.add_argument("--jobs", type=int, default=available_cores(), metavar="N",
                        help="processes to use (default: the cores available)")


def command_reference() -> str:
    """The command reference in Markdown, made from the parser itself (docs/cli.md is this text)."""
    import os

    parser = build_parser()
    columns = os.environ.get("COLUMNS")
    os.environ["COLUMNS"] = "100"  # argparse wraps to the terminal: fix the width so the text is stable
    try:
        sections = ["# Command reference", "",
                    "Generated from the `polarflux` parser by `python docs/make_cli_reference.py`; "
                    "a test fails when this page and the parser disagree.", "",
                    "```text", parser.format_help().rstrip(), "```", ""]
        for action in parser._subparsers._group_actions:  # noqa: SLF001 - argparse keeps them here
            for name, sub in action.choices.items():
                sections += [f"## polarflux {name}", "", "```text", sub.format_help().rstrip(), "```", ""]
    finally:
        if columns is None:
            os.environ.pop("COLUMNS", None)
        else:
            os.environ["COLUMNS"] = columns
    return "\n".join(sections)
