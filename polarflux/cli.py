"""The ``polarflux`` command: a thin layer over the library."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

from ._progress import Progress
from ._version import __version__
from .errors import PolarfluxError
from .measure import FILL_METHODS

EXIT_OK, EXIT_SOME_FAILED, EXIT_USAGE = 0, 1, 2


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
        "cycle's amplitude and time of maximum with 68 %% and 95 %% ranges. Writes PREFIX.json, "
        "PREFIX_fan.png and PREFIX_calibration.png. A forecast is probabilistic.",
    )
    forecast.add_argument("record", metavar="RECORD", help="a record from 'polarflux measure' (.nc or .csv)")
    forecast.add_argument("--sunspots", required=True, metavar="FILE.csv",
                          help="sunspot numbers: columns date (or year) and sunspot_number")
    forecast.add_argument("--calibration", metavar="FILE.csv",
                          help="calibration pairs: columns cycle, proxy, next_amplitude, source")
    forecast.add_argument("--proxy", choices=("axial_dipole", "mean_field"), default="axial_dipole",
                          help="polar proxy at minimum (default: axial_dipole)")
    forecast.add_argument("--members", type=int, default=300, metavar="N", help="ensemble members (default: 300)")
    forecast.add_argument("--seed", type=int, default=0, help="random seed of the ensemble (default: 0)")
    forecast.add_argument("--as-of", metavar="DATE", help="forecast as on this date (YYYY-MM-DD): a hindcast")
    forecast.add_argument("--out", metavar="PREFIX", help="output prefix (default: RECORD without suffix + _forecast)")
    forecast.add_argument("--force", action="store_true", help="overwrite existing outputs")

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
    return parser


def _add_scenario_options(parser: argparse.ArgumentParser) -> None:
    from .synthetic import RESOLUTIONS

    parser.add_argument("--seed", type=int, default=2051, help="random seed (default: %(default)s)")
    parser.add_argument("--cycles", type=int, default=4, metavar="K", help="solar cycles (default: 4)")
    parser.add_argument("--resolution", choices=tuple(RESOLUTIONS), default="standard",
                        help="model and map grids (default: standard: model 1 degree, maps 2 and 1 degree)")
    parser.add_argument("--years", type=float, default=None, metavar="Y",
                        help="stop the scenario after Y years (default: when the last cycle ends)")


def _add_measure_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--cap", type=float, default=60.0, metavar="DEG",
                        help="cap boundary latitude in degrees (default: 60)")
    parser.add_argument("--fill", choices=FILL_METHODS, default="none",
                        help="missing polar pixels: 'none' integrates what is observed, "
                        "'profile' fills them from the observed latitude profile (default: none)")
    parser.add_argument("--field", choices=("radial", "los"), default="radial",
                        help="the maps hold radial or line-of-sight field (default: radial)")
    from .record import available_cores

    parser.add_argument("--jobs", type=int, default=available_cores(), metavar="N",
                        help="processes to use (default: the cores available)")


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        if args.command == "measure":
            return _measure(args, parser)
        if args.command == "demo":
            return _demo(args, parser)
        if args.command == "transport":
            return _transport(args, parser)
        if args.command == "synth":
            return _synth(args, parser)
        if args.command == "events":
            return _events(args, parser)
        if args.command == "forecast":
            return _forecast(args, parser)
        if args.command == "plot":
            return _plot(args, parser)
        if args.command == "report":
            return _report(args, parser)
    except PolarfluxError as exc:
        print(f"polarflux: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("polarflux: interrupted; nothing was written", file=sys.stderr)
        return 130
    parser.error(f"unknown command {args.command}")
    return EXIT_USAGE


def _check_options(args, parser: argparse.ArgumentParser) -> None:
    if not 0.0 < args.cap < 90.0:
        parser.error(f"--cap {args.cap:g}: must lie strictly between 0 and 90 degrees")
    if args.jobs < 1:
        parser.error(f"--jobs {args.jobs}: must be at least 1")


def _run_measurement(files, problems, args, label: str, quiet: bool = False):
    """Measure files with a progress bar; print one line per failure; return the record."""
    from .record import Failure, iter_measurements, rows_to_dataset

    progress = Progress(len(files), label=label, enabled=None if not quiet else False)
    failures = list(problems)
    for failure in problems:
        progress.message(f"polarflux: {failure}")
    rows = []
    for path, row, error in iter_measurements(files, args.cap, args.fill, args.field, args.jobs):
        if error is None:
            rows.append(row)
        else:
            failures.append(Failure(path, error))
            progress.message(f"polarflux: {failures[-1]}")
        progress.step(failed=error is not None)
    progress.close()
    return rows_to_dataset(rows, cap_deg=args.cap, fill=args.fill, field=args.field, failures=failures), rows


def _measure(args, parser) -> int:
    from ._io import check_writable
    from .ledger import Ledger, default_ledger_path
    from .record import expand_inputs, measure_with_ledger, rows_to_dataset, write_record

    _check_options(args, parser)
    out = Path(args.out)
    if out.suffix.lower() not in (".csv", ".nc"):
        parser.error(f"--out {out}: must end in .csv or .nc")
    check_writable(out, args.force)
    files, problems = expand_inputs(args.inputs)
    if not files:
        for failure in problems:
            print(f"polarflux: {failure}", file=sys.stderr)
        parser.error("no input files found")
    if args.ledger and args.ledger.lower() == "none":
        if args.dask:
            parser.error("--dask needs a ledger (leave out --ledger none)")
        ds, rows = _run_measurement(files, problems, args, "measuring", quiet=args.quiet)
        write_record(ds, out, force=args.force)
        failed = ds.attrs["failed_count"]
        if not args.quiet:
            print(f"measured {len(rows)} of {len(files)} maps, {failed} failed; record written to {out}",
                  file=sys.stderr)
        return EXIT_OK if failed == 0 else EXIT_SOME_FAILED
    ledger_path = Path(args.ledger) if args.ledger else default_ledger_path()
    progress = Progress(len(files), label="measuring", enabled=None if not args.quiet else False)
    for failure in problems:
        progress.message(f"polarflux: {failure}")
    known_failures = []

    def report(path: str, error: str | None, new: bool) -> None:
        if error is not None:
            if new:
                progress.message(f"polarflux: {error if path in error else f'{path}: {error}'}")
            else:
                known_failures.append(path)
        progress.step(failed=error is not None)

    with Ledger(ledger_path) as ledger:
        run = measure_with_ledger(files, ledger, args.cap, args.fill, args.field, args.jobs, args.dask,
                                  on_result=report)
    progress.close()
    failures = list(problems) + run.failures
    ds = rows_to_dataset(run.rows, cap_deg=args.cap, fill=args.fill, field=args.field, failures=failures)
    write_record(ds, out, force=args.force)
    if not args.quiet:
        if known_failures:
            print(f"{len(known_failures)} file(s) failed in earlier runs and were not tried again "
                  f"(their reasons are in the ledger {ledger_path})", file=sys.stderr)
        print(f"measured {len(run.rows)} of {len(files)} maps ({run.measured - run.new_failures} new, "
              f"{run.reused - len(known_failures)} from the ledger), {len(failures)} failed; "
              f"record written to {out}", file=sys.stderr)
    return EXIT_OK if not failures else EXIT_SOME_FAILED


def _transport(args, parser) -> int:
    from ._io import atomic_path, check_writable
    from .transport.config import load_run

    out = Path(args.out)
    if out.suffix.lower() != ".nc":
        parser.error(f"--out {out}: a transport run is written as netCDF (.nc)")
    check_writable(out, args.force)
    job = load_run(args.config)
    progress = Progress(job.steps, label="transport")
    last = [0]

    def report(step: int, total: int) -> None:
        for _ in range(step - last[0]):
            progress.step()
        last[0] = step

    ds = job.run(progress=report)
    progress.close()
    ds.attrs["config"] = str(args.config)
    with atomic_path(out, force=args.force) as tmp:
        ds.to_netcdf(tmp, engine="netcdf4")
    end = ds.isel(time=-1)
    print(f"ran {ds.attrs['years']:g} years in {job.steps} steps with {len(job.regions)} regions; "
          f"at the end: north {float(end.north_mean_field):.3f} G, south {float(end.south_mean_field):.3f} G, "
          f"axial dipole {float(end.axial_dipole):.3f} G")
    print(f"written to {out}")
    return EXIT_OK


def _events(args, parser) -> int:
    import json

    from ._io import atomic_path, check_writable
    from .calibration import merge_instruments
    from .events import read_sunspots, record_events
    from .plots import plot_record_events
    from .record import read_record

    record_path = Path(args.record)
    prefix = Path(args.out) if args.out else record_path.with_name(record_path.stem + "_events")
    outputs = {k: prefix.with_name(prefix.name + suffix) for k, suffix in
               (("json", ".json"), ("csv", ".csv"), ("png", ".png"), ("nc", "_merged.nc"))}
    for path in outputs.values():
        check_writable(path, args.force)
    if not record_path.exists():
        parser.error(f"{record_path}: no such record")
    record = read_record(record_path)
    merged = merge_instruments(record, reference=args.reference, per_band=args.per_band, viewing=args.viewing)
    sunspots = read_sunspots(args.sunspots) if args.sunspots else (None, None)
    found = record_events(merged, *sunspots)
    found["record"] = str(record_path)
    found["scale_factors"] = json.loads(merged.attrs["scale_factors"])
    found["reference_instrument"] = merged.attrs["reference_instrument"]
    found["band_factors_needed"] = bool(merged.attrs["band_factors_needed"])
    found["viewing_correction"] = args.viewing
    print(_events_table(found))
    with atomic_path(outputs["json"], force=args.force) as tmp:
        tmp.write_text(json.dumps(found, indent=1, default=float), encoding="utf-8")
    with atomic_path(outputs["csv"], force=args.force) as tmp:
        tmp.write_text(_events_csv(found), encoding="utf-8")
    with atomic_path(outputs["nc"], force=args.force) as tmp:
        merged.to_netcdf(tmp, engine="netcdf4")
    fig = plot_record_events(merged, found, caption=f"polarflux events: {record_path}")
    with atomic_path(outputs["png"], force=args.force) as tmp:
        fig.savefig(tmp, dpi=120, format="png")
    print("outputs: " + ", ".join(str(p) for p in outputs.values()))
    return EXIT_OK


def _forecast(args, parser) -> int:

    from ._io import check_writable
    from .events import read_sunspots
    from .forecast import forecast_from_record, read_calibration
    from .record import read_record

    record_path = Path(args.record)
    prefix = Path(args.out) if args.out else record_path.with_name(record_path.stem + "_forecast")
    outputs = {"json": prefix.with_name(prefix.name + ".json"), "fan": prefix.with_name(prefix.name + "_fan.png"),
               "calibration": prefix.with_name(prefix.name + "_calibration.png")}
    for path in outputs.values():
        check_writable(path, args.force)
    if args.members < 10:
        parser.error("--members must be at least 10")
    if not record_path.exists():
        parser.error(f"{record_path}: no such record")
    as_of = None
    if args.as_of:
        try:
            as_of = np.datetime64(args.as_of, "ns")
        except ValueError:
            parser.error(f"--as-of {args.as_of!r}: expected a date YYYY-MM-DD")
    record = read_record(record_path)
    t, v = read_sunspots(args.sunspots)
    calibration = read_calibration(args.calibration) if args.calibration else None
    result = forecast_from_record(record, t, v, proxy=args.proxy, calibration=calibration, as_of=as_of,
                                  members=args.members, seed=args.seed,
                                  bases=("", str(record_path.parent), str(record_path.parent.parent)))
    print(_forecast_text(result))
    _write_forecast(result, t, v, outputs, args.force, caption=f"polarflux forecast: {record_path}")
    print("outputs: " + ", ".join(str(p) for p in outputs.values()))
    return EXIT_OK


def _write_forecast(result, t, v, outputs, force, caption, truth_amplitude=None) -> None:
    import json

    from ._io import atomic_path
    from .forecast import public_result
    from .plots import plot_calibration, plot_forecast_fan

    public = public_result(result)
    with atomic_path(outputs["json"], force=force) as tmp:
        tmp.write_text(json.dumps(public, indent=1, default=float), encoding="utf-8")
    for key, fig in (("fan", plot_forecast_fan(result, t, v, caption=caption, truth_amplitude=truth_amplitude)),
                     ("calibration", plot_calibration(result, caption=caption))):
        with atomic_path(outputs[key], force=force) as tmp:
            fig.savefig(tmp, dpi=120, format="png")


def _forecast_text(result: dict) -> str:
    cal, proj, fc = result["calibration"], result["projection"], result["forecast"]
    a, m = fc["amplitude"], fc["maximum_time"]
    lines = [
        f"forecast as of {_date(result['as_of'])}, proxy |{result['proxy']}| at minimum",
        f"calibration: amplitude = {cal['intercept']:.1f} + {cal['slope']:.1f} x proxy on {len(cal['pairs'])} cycles "
        f"(standard errors {', '.join(f'{x:.1f}' for x in cal['standard_errors'])}; residual sd {cal['residual_sd']:.1f})",
        "hindcast errors (leave one out, predicted - actual): "
        + ", ".join(f"{p['cycle']}: {e:+.1f}" for p, e in zip(cal["pairs"], cal["loo_errors"], strict=True))
        + f"; rms {cal['loo_rms']:.1f}",
        f"projection: {proj['method']} ({proj['members']} members); proxy at minimum "
        f"{proj['proxy_at_minimum']['median']:.2f} (95 %: {proj['proxy_at_minimum']['low95']:.2f}-"
        f"{proj['proxy_at_minimum']['high95']:.2f}); minimum {_date(proj['minimum_time']['median'])}",
        f"next cycle amplitude: {a['median']:.0f} (68 %: {a['low68']:.0f}-{a['high68']:.0f}; "
        f"95 %: {a['low95']:.0f}-{a['high95']:.0f})",
        f"next maximum: {_date(m['median'])} (68 %: {_date(m['low68'])} to {_date(m['high68'])}; "
        f"95 %: {_date(m['low95'])} to {_date(m['high95'])})",
        "caution: " + result["caution"],
    ]
    return "\n".join(lines)


def _bases(path: Path) -> tuple[str, ...]:
    """Folders against which a record's relative map paths are tried: here, beside it, above it."""
    return ("", str(path.parent), str(path.parent.parent))


def _plot(args, parser) -> int:
    from ._io import check_writable
    from .report import analyse, figures, save_figure

    out = Path(args.out)
    if out.suffix.lower() not in (".png", ".pdf", ".svg"):
        parser.error(f"--out {out}: figures are written as .png, .pdf or .svg")
    check_writable(out, args.force)
    source = Path(args.input)
    if not source.exists():
        parser.error(f"{source}: no such file")
    caption = f"polarflux plot {args.kind}: {source}"
    if args.kind == "map":
        from .maps import read_map
        from .plots import plot_map

        fig = plot_map(read_map(source), cap_latitude=args.cap, caption=caption)
    elif args.kind == "butterfly" and _is_transport_run(source):
        import xarray as xr

        from .plots import plot_butterfly

        with xr.open_dataset(source) as run:
            br = run["br"].values
            profiles = br.mean(axis=-1) if br.ndim == 3 else br
            edges = np.sin(np.deg2rad(np.linspace(-90.0, 90.0, run.sizes["lat"] + 1)))
            fig = plot_butterfly(run["time"].values, edges, profiles, caption=caption,
                                 title="Magnetic butterfly diagram (transport run)")
    else:
        from .events import read_sunspots
        from .record import read_record

        if args.kind in ("fan", "calibration") and not args.sunspots:
            parser.error(f"plot {args.kind} needs --sunspots FILE.csv")
        sunspots = read_sunspots(args.sunspots) if args.sunspots else None
        analysis = analyse(read_record(source), sunspots, bases=_bases(source))
        made = figures(analysis, kinds=(args.kind,), caption=caption)
        if args.kind not in made:
            reason = analysis["forecast_error"] or "no readable maps in the record"
            raise PolarfluxError(f"{source}: cannot draw '{args.kind}': {reason}")
        fig = made[args.kind]
    save_figure(fig, out, force=args.force)
    print(f"written to {out}")
    return EXIT_OK


def _is_transport_run(path: Path) -> bool:
    if path.suffix.lower() != ".nc":
        return False
    import xarray as xr

    with xr.open_dataset(path) as ds:
        return "br" in ds and "lat" in ds.dims


def _report(args, parser) -> int:
    from ._io import check_writable
    from .events import read_sunspots
    from .record import read_record
    from .report import analyse, figures, write_report

    out = Path(args.out)
    if out.suffix.lower() not in (".html", ".htm"):
        parser.error(f"--out {out}: the report is an .html page")
    check_writable(out, args.force)
    record_path = Path(args.record)
    if not record_path.exists():
        parser.error(f"{record_path}: no such record")
    sunspots = read_sunspots(args.sunspots) if args.sunspots else None
    analysis = analyse(read_record(record_path), sunspots, bases=_bases(record_path))
    figs = figures(analysis, caption=f"polarflux report: {record_path}")
    write_report(out, analysis, figs, title=f"Polar-field report: {record_path.name}", source=str(record_path),
                 force=args.force)
    print(f"report with {len(figs)} figures written to {out}")
    if analysis["forecast"] is not None:
        print("caution: " + analysis["forecast"]["caution"])
    return EXIT_OK


def _date(year: float) -> str:

    from .events import from_decimal_year

    if year != year:  # NaN
        return "-"
    return str(np.datetime_as_string(from_decimal_year(np.array([year]), True)[0], unit="D"))


def _events_table(found: dict) -> str:
    lines = []
    for f in found["scale_factors"]:
        lines.append(f"scale {f['instrument']} -> {f['reference']} ({f['quantity']}): {f['factor']:.4f} "
                     f"+/- {f['uncertainty']:.4f} (95 %: {f['low95']:.4f}-{f['high95']:.4f}, {f['pairs']} rotations)")
    if found["scale_factors"]:
        lines.append("separate cap factors needed: " + ("yes" if found["band_factors_needed"] else
                                                        "no (one polar factor fits both caps and the dipole)"))
    lines.append(f"{'event':<18} {'hemisphere':<10} {'date':<10}  {'window':<23}  value")
    for hemisphere in ("north", "south"):
        for r in found["reversals"][hemisphere]:
            window = f"{_date(r['earliest'])}..{_date(r['latest'])}" if r["crossings"] > 1 else "-"
            lines.append(f"{'polar reversal':<18} {hemisphere:<10} {_date(r['time']):<10}  {window:<23}  "
                         f"now {'+' if r['new_sign'] > 0 else '-'}")
    for lag in found["reversal_lags"]:
        lines.append(f"{'reversal lag':<18} {'S - N':<10} {_date(lag['north']):<10}  {'':<23}  {lag['lag_years']:+.2f} yr")
    for m in found["minima"]:
        lines.append(f"{'cycle minimum':<18} {'':<10} {_date(m['time']):<10}  {'':<23}  SSN {m['sunspot_number']:.1f}")
    for m in found["maxima"]:
        lines.append(f"{'cycle maximum':<18} {'':<10} {_date(m['time']):<10}  {'':<23}  SSN {m['sunspot_number']:.1f}")
    for a in found["at_minima"]:
        lines.append(f"{'at minimum':<18} {'N / S / D':<10} {_date(a['time']):<10}  {'':<23}  "
                     f"{a['north']:+.2f} / {a['south']:+.2f} / {a['axial_dipole']:+.2f} G, "
                     f"asymmetry {a['asymmetry']:+.2f}")
    return "\n".join(lines)


def _events_csv(found: dict) -> str:
    import csv
    import io

    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(["event", "hemisphere", "time_year", "date", "earliest_year", "latest_year", "value", "unit"])
    for hemisphere in ("north", "south"):
        for r in found["reversals"][hemisphere]:
            writer.writerow(["reversal", hemisphere, f"{r['time']:.4f}", _date(r["time"]), f"{r['earliest']:.4f}",
                             f"{r['latest']:.4f}", r["new_sign"], "new sign"])
    for kind in ("minima", "maxima"):
        for m in found[kind]:
            writer.writerow([kind[:-1] + "um", "", f"{m['time']:.4f}", _date(m["time"]), "", "",
                             f"{m['sunspot_number']:.2f}", "sunspot number"])
    for a in found["at_minima"]:
        for key, unit in (("north", "G"), ("south", "G"), ("axial_dipole", "G"), ("asymmetry", "1")):
            writer.writerow([f"{key}_at_minimum", "", f"{a['time']:.4f}", _date(a["time"]), "", "",
                             f"{a[key]:.4f}", unit])
    return buffer.getvalue()


def _scenario_settings(args, parser):
    from .synthetic import settings_for

    if args.cycles < 1:
        parser.error("--cycles must be at least 1")
    if args.years is not None and not args.years > 0:
        parser.error("--years must be positive")
    return settings_for(args.resolution, seed=args.seed, cycles=args.cycles, duration_years=args.years)


def _generate(folder: Path, settings, force: bool) -> dict:
    from .synthetic import write_scenario

    progress = Progress(1, label="generating scenario")

    def report(done: int, total: int) -> None:
        progress.total = total
        progress.step()

    truth = write_scenario(folder, settings, progress=report, force=force)
    progress.close()
    return truth


def _synth(args, parser) -> int:
    settings = _scenario_settings(args, parser)
    truth = _generate(Path(args.out), settings, args.force)
    print(f"wrote {len(truth['maps'])} invented synoptic maps ({truth['years']:.1f} years, "
          f"{len(truth['cycles'])} cycles, seed {settings.seed}) to {Path(args.out) / 'maps'}")
    print(f"truth: {Path(args.out) / 'truth.json'}; sunspot numbers: {Path(args.out) / 'sunspots.csv'}")
    return EXIT_OK


def _demo(args, parser) -> int:
    from ._demo import run_demo

    return run_demo(args, parser)


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


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
