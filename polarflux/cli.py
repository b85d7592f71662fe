"""The ``polarflux`` command: a thin layer over the library."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ._progress import Progress
from ._version import __version__
from .errors import PolarfluxError
from .measure import FILL_METHODS

EXIT_OK, EXIT_SOME_FAILED, EXIT_USAGE = 0, 1, 2
_DEMO_MARKER = ".polarflux-demo"


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="polarflux",
        description="Polar-cap magnetic flux from Carrington-rotation synoptic maps.",
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
    measure.add_argument("--force", action="store_true", help="overwrite an existing output")
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
        help="generate (or reuse) the invented scenario and measure its whole archive",
        description="Generate the invented scenario (or reuse it), measure every map, and save the record "
        "and a figure of the polar fields.",
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
    parser.add_argument("--jobs", type=int, default=1, metavar="N", help="processes to use (default: 1)")


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
    from .record import expand_inputs, write_record

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
    ds, rows = _run_measurement(files, problems, args, "measuring", quiet=args.quiet)
    write_record(ds, out, force=args.force)
    failed = ds.attrs["failed_count"]
    if not args.quiet:
        print(f"measured {len(rows)} of {len(files)} maps, {failed} failed; record written to {out}",
              file=sys.stderr)
    return EXIT_OK if failed == 0 else EXIT_SOME_FAILED


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


def _prepare_demo_folder(folder: Path) -> None:
    if folder.exists() and not (folder / _DEMO_MARKER).exists():
        if not folder.is_dir() or any(folder.iterdir()):
            raise PolarfluxError(
                f"{folder}: exists and is not a polarflux demo folder; choose another with --out DIR"
            )
    folder.mkdir(parents=True, exist_ok=True)
    (folder / _DEMO_MARKER).write_text("made by polarflux demo; the demo rewrites what is in this folder\n")


def _demo(args, parser) -> int:
    import json

    import numpy as np

    from .plots import plot_polar_fields
    from .record import expand_inputs, write_record

    _check_options(args, parser)
    settings = _scenario_settings(args, parser)
    folder = Path(args.out)
    _prepare_demo_folder(folder)
    scenario = folder / "scenario"
    saved = scenario / "scenario.toml"
    if saved.exists() and (scenario / "truth.json").exists() and saved.read_text() == settings.to_toml():
        truth = json.loads((scenario / "truth.json").read_text())
        print(f"reusing the invented scenario in {scenario} (same settings)")
    else:
        truth = _generate(scenario, settings, force=True)
        print(f"generated the invented scenario in {scenario}: {len(truth['maps'])} maps, "
              f"{truth['years']:.1f} years, seed {settings.seed} (no real data)")
    files, problems = expand_inputs([scenario / "maps"])
    ds, rows = _run_measurement(files, problems, args, "measuring")
    csv_path = write_record(ds, folder / "polar_record.csv", force=True)
    nc_path = write_record(ds, folder / "polar_record.nc", force=True)
    series = _truth_series(scenario / "truth_series.csv")
    fig = plot_polar_fields(ds, truth=series,
                            caption=f"polarflux demo: invented scenario in {scenario} (seed {settings.seed}); "
                            "thin black lines: noise-free truth")
    figure = folder / "polar_fields.png"
    fig.savefig(figure, dpi=120)
    print(_cycles_table(truth))
    print(f"measured {len(rows)} of {len(files)} maps, {ds.attrs['failed_count']} failed; "
          f"cap poleward of {args.cap:g} deg, fill={args.fill}")
    last = ds.isel(time=-1)
    print(f"latest map ({np.datetime_as_string(last['time'].values, unit='D')}, {last['instrument'].values}): "
          f"north {float(last['mean_field'].sel(hemisphere='north')):.2f} G, "
          f"south {float(last['mean_field'].sel(hemisphere='south')):.2f} G, "
          f"axial dipole {float(last['axial_dipole']):.2f} G")
    print(f"outputs: record {csv_path} and {nc_path}; figure {figure}; truth {scenario / 'truth.json'}")
    return EXIT_OK if ds.attrs["failed_count"] == 0 else EXIT_SOME_FAILED


def _truth_series(path: Path) -> dict:
    import csv

    import numpy as np

    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    return {
        "time": np.array([np.datetime64(r["time"][:23]) for r in rows]),
        "north": np.array([float(r["north_mean_field_g"]) for r in rows]),
        "south": np.array([float(r["south_mean_field_g"]) for r in rows]),
    }


def _cycles_table(truth: dict) -> str:
    head = f"{'cycle':>5} {'start':>7} {'max':>7} {'amplitude':>9} {'dipole at start':>15}  (years from start; truth)"
    lines = [head]
    for c in truth["cycles"]:
        peak = "-" if c["maximum_years"] is None else f"{c['maximum_years']:.2f}"
        lines.append(f"{c['cycle']:>5} {c['start_years']:>7.2f} {peak:>7} {c['amplitude']:>9.1f} "
                     f"{c['precursor_dipole_g']:>13.2f} G")
    return "\n".join(lines)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
