"""The ``polarflux`` command: a thin layer over the library."""

from __future__ import annotations

import argparse
import os
import shutil
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

    demo = commands.add_parser(
        "demo",
        help="make a small invented map archive and measure it",
        description="Write an invented archive of synoptic maps (no real data), measure it, "
        "and save the record and a figure.",
    )
    demo.add_argument("--out", default="polarflux-demo", metavar="DIR",
                      help="folder for the demo maps and results (default: %(default)s)")
    demo.add_argument("--maps", type=int, default=27, metavar="N", help="rotations to make (default: 27)")
    demo.add_argument("--seed", type=int, default=2041, help="random seed (default: %(default)s)")
    _add_measure_options(demo)
    return parser


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


def _prepare_demo_folder(folder: Path) -> None:
    if folder.exists():
        if not (folder / _DEMO_MARKER).exists():
            if folder.is_dir() and not any(folder.iterdir()):
                pass
            else:
                raise PolarfluxError(
                    f"{folder}: exists and is not a polarflux demo folder; choose another with --out DIR"
                )
        else:
            shutil.rmtree(folder)
    folder.mkdir(parents=True, exist_ok=True)
    (folder / _DEMO_MARKER).write_text("made by polarflux demo; the demo replaces this folder on each run\n")


def _demo(args, parser) -> int:
    from .demo import write_demo_archive
    from .plots import plot_polar_fields
    from .record import write_record

    _check_options(args, parser)
    if args.maps < 1:
        parser.error("--maps must be at least 1")
    folder = Path(args.out)
    _prepare_demo_folder(folder)
    maps = folder / "maps"
    progress = Progress(args.maps, label="writing demo maps")
    paths = write_demo_archive(maps, n_maps=args.maps, seed=args.seed,
                               progress=lambda path, error: progress.step())
    progress.close()
    print(f"wrote {len(paths)} invented synoptic maps (seed {args.seed}) to {maps}")
    ds, rows = _run_measurement([os.fspath(p) for p in paths], [], args, "measuring")
    csv_path = write_record(ds, folder / "polar_record.csv", force=True)
    nc_path = write_record(ds, folder / "polar_record.nc", force=True)
    print(_table(ds))
    fig = plot_polar_fields(ds, caption=f"polarflux demo: invented maps in {maps} (seed {args.seed})")
    figure = folder / "polar_fields.png"
    fig.savefig(figure, dpi=120)
    print(f"measured {len(rows)} of {len(paths)} maps, {ds.attrs['failed_count']} failed; "
          f"cap poleward of {args.cap:g} deg, fill={args.fill}")
    print(f"record: {csv_path} and {nc_path}; figure: {figure}")
    return EXIT_OK if ds.attrs["failed_count"] == 0 else EXIT_SOME_FAILED


def _table(ds) -> str:
    import numpy as np

    head = (f"{'CR':>5}  {'date':10}  {'north G':>8} {'cover':>5}  {'south G':>8} {'cover':>5}  "
            f"{'dipole G':>8}")
    lines = [head, "-" * len(head)]
    for i in range(ds.sizes["time"]):
        n = ds.isel(time=i)
        date = np.datetime_as_string(n["time"].values, unit="D")
        lines.append(
            f"{int(n['carrington_rotation']):>5}  {date:10}  "
            f"{float(n['mean_field'].sel(hemisphere='north')):>8.3f} "
            f"{float(n['coverage'].sel(hemisphere='north')):>5.2f}  "
            f"{float(n['mean_field'].sel(hemisphere='south')):>8.3f} "
            f"{float(n['coverage'].sel(hemisphere='south')):>5.2f}  "
            f"{float(n['axial_dipole']):>8.3f}"
        )
    return "\n".join(lines)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
