"""``polarflux measure``: an archive of maps into one record, with the measurement ledger."""

from __future__ import annotations

import sys
from pathlib import Path

from .._progress import Progress
from ._common import EXIT_OK, EXIT_SOME_FAILED, EXIT_USAGE, check_measure_options, run_measurement


def measure(args, parser) -> int:
    from .._io import check_writable
    from ..ledger import Ledger, default_ledger_path
    from ..record import expand_inputs, measure_with_ledger, rows_to_dataset, write_record

    check_measure_options(args, parser)
    out = Path(args.out)
    if out.suffix.lower() not in (".csv", ".nc"):
        parser.error(f"--out {out}: must end in .csv or .nc")
    check_writable(out, args.force)
    files, problems = expand_inputs(args.inputs)
    if not files:
        for failure in problems:
            print(f"polarflux measure: {failure}", file=sys.stderr)
        print("polarflux measure: error: no input files found; nothing written", file=sys.stderr)
        return EXIT_USAGE
    if args.ledger and args.ledger.lower() == "none":
        if args.dask:
            parser.error("--dask needs a ledger (leave out --ledger none)")
        ds, rows = run_measurement(files, problems, args, "measuring", quiet=args.quiet)
        if not rows:
            return _nothing_measured(len(files))
        write_record(ds, out, force=args.force)
        failed = ds.attrs["failed_count"]
        if not args.quiet:
            _print_duplicates(ds)
            print(f"measured {len(rows)} of {len(files)} maps, {failed} failed; {_settings_words(ds)}; "
                  f"record written to {out}",
                  file=sys.stderr)
        return EXIT_OK if failed == 0 else EXIT_SOME_FAILED
    ledger_path = Path(args.ledger) if args.ledger else default_ledger_path()
    progress = Progress(len(files), label="measuring", enabled=None if not args.quiet else False)
    for failure in problems:
        progress.message(f"polarflux: {failure}")
    known_failures: list[str] = []

    def report(path: str, error: str | None, new: bool) -> None:
        if error is not None:
            line = error if path in error else f"{path}: {error}"
            if new:
                progress.message(f"polarflux: {line}")
            else:
                known_failures.append(line)
        progress.step(failed=error is not None)

    with Ledger(ledger_path) as ledger:
        run = measure_with_ledger(files, ledger, args.cap, args.fill, args.field, args.jobs, args.dask,
                                  on_result=report, retry_failed=args.retry_failed, plane=args.plane)
    progress.close()
    failures = list(problems) + run.failures
    if not run.rows:
        return _nothing_measured(len(files))
    ds = rows_to_dataset(run.rows, cap_deg=args.cap, fill=args.fill, field=args.field, failures=failures)
    write_record(ds, out, force=args.force)
    if not args.quiet:
        _print_duplicates(ds)
        if known_failures:
            shown = known_failures[:10]
            more = len(known_failures) - len(shown)
            print(f"{len(known_failures)} file(s) failed in earlier runs and were not tried again "
                  "(add --retry-failed to try them again):", file=sys.stderr)
            for line in shown:
                print(f"  {line}", file=sys.stderr)
            if more:
                print(f"  ... and {more} more", file=sys.stderr)
        print(f"measured {len(run.rows)} of {len(files)} maps ({run.measured - run.new_failures} new, "
              f"{run.reused - len(known_failures)} from the ledger), {len(failures)} failed; {_settings_words(ds)}; "
              f"record written to {out}", file=sys.stderr)
    return EXIT_OK if not failures else EXIT_SOME_FAILED


def _settings_words(ds) -> str:
    """What the numbers are: the field read and, for line-of-sight maps, where B0 came from; the fill."""
    field = ds.attrs.get("field", "")
    words = f"field {field or 'radial'}"
    if "los" in field and ds.attrs.get("b0_used"):
        words += f" (B0 {ds.attrs['b0_used']})"
    return words + f"; unseen polar parts filled: {ds.attrs.get('fill') or 'none'}"


def _nothing_measured(count: int) -> int:
    print(f"polarflux measure: error: none of the {count} input file(s) could be measured (see above); "
          "no record written", file=sys.stderr)
    return EXIT_USAGE


def _print_duplicates(ds) -> None:
    notes = [n for n in str(ds.attrs.get("duplicates", "")).splitlines() if n]
    for note in notes:
        print(f"polarflux measure: {note}", file=sys.stderr)
    if notes:
        print(f"{len(notes)} duplicate file(s): each map is in the record once", file=sys.stderr)
