"""What several commands share: exit codes, option checks, measuring with a bar, the scenario."""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from .._progress import Progress

EXIT_OK, EXIT_SOME_FAILED, EXIT_USAGE = 0, 1, 2


def check_measure_options(args, parser: argparse.ArgumentParser) -> None:
    if not 0.0 < args.cap < 90.0:
        parser.error(f"--cap {args.cap:g}: must lie strictly between 0 and 90 degrees")
    if args.jobs < 1:
        parser.error(f"--jobs {args.jobs}: must be at least 1")
    if getattr(args, "plane", None) is not None and args.plane < 0:
        parser.error(f"--plane {args.plane}: must be 0 or more (0 is the first plane)")
    args.plane = getattr(args, "plane", None) if getattr(args, "plane", None) is not None \
        else getattr(args, "planes", None)


def run_measurement(files, problems, args, label: str, quiet: bool = False):
    """Measure files with a progress bar; print one line per failure; return the record and its rows."""
    from ..record import Failure, iter_measurements, rows_to_dataset

    progress = Progress(len(files), label=label, enabled=None if not quiet else False)
    failures = list(problems)
    for failure in problems:
        progress.message(f"polarflux: {failure}")
    rows = []
    for path, row, error in iter_measurements(files, args.cap, args.fill, args.field, args.jobs,
                                              plane=getattr(args, "plane", None)):
        if error is None:
            rows.append(row)
        else:
            failures.append(Failure(path, error))
            progress.message(f"polarflux: {failures[-1]}")
        progress.step(failed=error is not None)
    progress.close()
    return rows_to_dataset(rows, cap_deg=args.cap, fill=args.fill, field=args.field, failures=failures), rows


def scenario_settings(args, parser: argparse.ArgumentParser):
    from ..synthetic import settings_for

    if args.cycles < 1:
        parser.error(f"--cycles {args.cycles}: must be at least 1")
    if args.years is not None and not args.years > 0:
        parser.error(f"--years {args.years:g}: must be a positive number of years")
    return settings_for(args.resolution, seed=args.seed, cycles=args.cycles, duration_years=args.years,
                        preset=getattr(args, "preset", None))


def generate_scenario(folder: Path, settings, force: bool) -> dict:
    """Write the invented scenario into ``folder`` with a progress bar; return its truth."""
    from ..synthetic import write_scenario

    progress = Progress(1, label="generating scenario", unit="step")

    def report(done: int, total: int) -> None:
        progress.total = total
        progress.step()

    truth = write_scenario(folder, settings, progress=report, force=force)
    progress.close()
    return truth


def bases(path: Path) -> tuple[str, ...]:
    """Folders against which a record's relative map paths are tried: here, beside it, above it."""
    path = Path(path).resolve()  # "rec.nc".parent.parent is "." again; the folder above needs the full path
    return ("", str(path.parent), str(path.parent.parent))


def parse_date(text: str | None, option: str, parser: argparse.ArgumentParser):
    """``YYYY-MM-DD`` (or ``YYYY-MM``) as datetime64[ns], or None; a usage error names the option."""
    if not text:
        return None
    try:
        return np.datetime64(text, "ns")
    except ValueError:
        parser.error(f"{option} {text!r}: expected a date YYYY-MM-DD")
    return None


def outputs_for(prefix: Path, suffixes: dict[str, str], force: bool) -> dict[str, Path]:
    """Output paths PREFIX+suffix, each checked before any work starts (nothing is overwritten silently)."""
    from .._io import check_writable

    outputs = {key: prefix.with_name(prefix.name + suffix) for key, suffix in suffixes.items()}
    for path in outputs.values():
        check_writable(path, force)
    return outputs
