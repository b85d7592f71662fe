"""The commands that read a record or a run and print or draw what the library finds in it."""

from __future__ import annotations

import json
from pathlib import Path

from .._io import atomic_path
from .._progress import Progress
from ..errors import PolarfluxError
from ._common import EXIT_OK, bases, generate_scenario, outputs_for, parse_date, scenario_settings


def transport(args, parser) -> int:
    from .._io import check_writable
    from ..transport.config import load_run

    out = Path(args.out)
    if out.suffix.lower() != ".nc":
        parser.error(f"--out {out}: a transport run is written as netCDF (.nc)")
    check_writable(out, args.force)
    job = load_run(args.config)
    progress = Progress(job.steps, label="transport", unit="step")
    last = [0]

    def report(step: int, total: int) -> None:
        progress.step(count=step - last[0])
        last[0] = step

    ds = job.run(progress=report)
    progress.close()
    ds.attrs["config"] = str(args.config)
    with atomic_path(out, force=args.force) as tmp:
        ds.to_netcdf(tmp, engine="netcdf4")
    end = ds.isel(time=-1)
    print(f"ran {ds.attrs['years']:g} years in {job.steps} steps with {_count(len(job.regions), 'region')}; "
          f"at the end: north {float(end.north_mean_field):.3f} G, south {float(end.south_mean_field):.3f} G, "
          f"axial dipole {float(end.axial_dipole):.3f} G")
    print(f"written to {out}")
    return EXIT_OK


def events(args, parser) -> int:
    from ..calibration import merge_instruments
    from ..events import read_sunspots, record_events
    from ..plots import plot_record_events
    from ..record import read_record
    from ..tables import events_csv, events_table

    record_path = Path(args.record)
    record = read_record(record_path)
    sunspots = read_sunspots(args.sunspots) if args.sunspots else (None, None)
    prefix = Path(args.out) if args.out else record_path.with_name(record_path.stem + "_events")
    outputs = outputs_for(prefix, {"json": ".json", "csv": ".csv", "png": ".png", "nc": "_merged.nc"}, args.force)
    merged = merge_instruments(record, reference=args.reference, per_band=args.per_band, viewing=args.viewing)
    found = record_events(merged, *sunspots)
    found["record"] = str(record_path)
    found["scale_factors"] = json.loads(merged.attrs["scale_factors"])
    found["reference_instrument"] = merged.attrs["reference_instrument"]
    found["band_factors_needed"] = bool(merged.attrs["band_factors_needed"])
    found["viewing_correction"] = args.viewing
    print(events_table(found))
    with atomic_path(outputs["json"], force=args.force) as tmp:
        tmp.write_text(json.dumps(found, indent=1, default=float), encoding="utf-8")
    with atomic_path(outputs["csv"], force=args.force) as tmp:
        tmp.write_text(events_csv(found), encoding="utf-8")
    with atomic_path(outputs["nc"], force=args.force) as tmp:
        merged.to_netcdf(tmp, engine="netcdf4")
    fig = plot_record_events(merged, found, caption=f"polarflux events: {record_path}")
    with atomic_path(outputs["png"], force=args.force) as tmp:
        fig.savefig(tmp, dpi=120, format="png")
    print("outputs: " + ", ".join(str(p) for p in outputs.values()))
    return EXIT_OK


def forecast(args, parser) -> int:
    from ..forecast import forecast_from_record, read_calibration
    from ..record import read_record
    from ..regions import read_regions
    from ..sunspots import read_sunspot_series
    from ..tables import forecast_text

    if args.members < 10:
        parser.error(f"--members {args.members}: must be at least 10")
    as_of = parse_date(args.as_of, "--as-of", parser)
    record_path = Path(args.record)
    record = read_record(record_path)
    series = read_sunspot_series(args.sunspots)
    t, v = series.times, series.total
    if as_of is not None:
        import numpy as np

        from ..cutoff import data_end
        from ..timeseries import format_date, to_decimal_year

        end = data_end(record, t)
        if float(to_decimal_year(np.array([as_of], dtype="datetime64[ns]"))[0][0]) > end + 1e-9:
            parser.error(f"--as-of {args.as_of}: after the end of the data ({format_date(end)}, when the latest map "
                         "and sunspot value exist); leave it out to forecast from the latest data")
    calibration = read_calibration(args.calibration) if args.calibration else None
    regions = read_regions(args.regions) if args.regions else None
    prefix = Path(args.out) if args.out else record_path.with_name(record_path.stem + "_forecast")
    outputs = outputs_for(prefix, {"json": ".json", "fan": "_fan.png", "calibration": "_calibration.png"},
                          args.force)
    result = forecast_from_record(record, t, v, proxy=args.proxy, calibration=calibration, as_of=as_of, law=args.law,
                                  members=args.members, seed=args.seed, bases=bases(record_path),
                                  hemispheric=series.hemispheric, regions=regions)
    print(forecast_text(result))
    write_forecast(result, t, v, outputs, args.force, caption=f"polarflux forecast: {record_path}")
    print("outputs: " + ", ".join(str(p) for p in outputs.values()))
    return EXIT_OK


def write_forecast(result, t, v, outputs, force, caption, truth_amplitude=None) -> None:
    """The forecast's JSON, fan chart and calibration figure, each written atomically."""
    from ..forecast import public_result
    from ..plots import plot_calibration, plot_forecast_fan

    public = public_result(result)
    with atomic_path(outputs["json"], force=force) as tmp:
        tmp.write_text(json.dumps(public, indent=1, default=float), encoding="utf-8")
    for key, fig in (("fan", plot_forecast_fan(result, t, v, caption=caption, truth_amplitude=truth_amplitude)),
                     ("calibration", plot_calibration(result, caption=caption))):
        with atomic_path(outputs[key], force=force) as tmp:
            fig.savefig(tmp, dpi=120, format="png")


def plot(args, parser) -> int:
    from .._io import check_writable
    from .._kinds import check_input_file
    from ..analysis import analyse
    from ..report import figures, save_figure

    out = Path(args.out)
    if out.suffix.lower() not in (".png", ".pdf", ".svg"):
        parser.error(f"--out {out}: figures are written as .png, .pdf or .svg")
    source = Path(args.input)
    caption = f"polarflux plot {args.kind}: {source}"
    if args.kind == "map":
        from ..maps import read_map
        from ..plots import plot_map

        check_input_file(source, "a synoptic map (FITS)", accept=("fits",))
        m = read_map(source)
        check_writable(out, args.force)
        fig = plot_map(m, cap_latitude=args.cap, caption=caption)
    elif args.kind == "butterfly" and check_input_file(
            source, "a record (.nc or .csv from 'polarflux measure') or a transport run (.nc)",
            accept=("record", "csv", "transport-run")) == "transport-run":
        check_writable(out, args.force)
        fig = _run_butterfly(source, caption)
    else:
        from ..events import read_sunspots
        from ..record import read_record

        if args.kind in ("fan", "calibration") and not args.sunspots:
            parser.error(f"plot {args.kind} needs --sunspots FILE.csv")
        record = read_record(source)
        sunspots = read_sunspots(args.sunspots) if args.sunspots else None
        check_writable(out, args.force)
        analysis = analyse(record, sunspots, bases=bases(source))
        made = figures(analysis, kinds=(args.kind,), caption=caption)
        if args.kind not in made:
            reason = analysis["forecast_error"] or "no readable maps in the record"
            raise PolarfluxError(f"{source}: cannot draw '{args.kind}': {reason}")
        fig = made[args.kind]
    save_figure(fig, out, force=args.force)
    print(f"written to {out}")
    return EXIT_OK


def _run_butterfly(source: Path, caption: str):
    import numpy as np
    import xarray as xr

    from ..plots import plot_butterfly

    with xr.open_dataset(source) as run:
        br = run["br"].values
        profiles = br.mean(axis=-1) if br.ndim == 3 else br
        edges = np.sin(np.deg2rad(np.linspace(-90.0, 90.0, run.sizes["lat"] + 1)))
        return plot_butterfly(run["time"].values, edges, profiles, caption=caption,
                              title="Magnetic butterfly diagram (transport run)")


def report(args, parser) -> int:
    from .._io import check_writable
    from ..analysis import analyse
    from ..events import read_sunspots
    from ..record import read_record
    from ..report import figures, write_report

    out = Path(args.out)
    if out.suffix.lower() not in (".html", ".htm"):
        parser.error(f"--out {out}: the report is an .html page")
    record_path = Path(args.record)
    record = read_record(record_path)
    sunspots = read_sunspots(args.sunspots) if args.sunspots else None
    check_writable(out, args.force)
    analysis = analyse(record, sunspots, bases=bases(record_path))
    figs = figures(analysis, caption=f"polarflux report: {record_path}")
    write_report(out, analysis, figs, title=f"Polar-field report: {record_path.name}", source=str(record_path),
                 force=args.force)
    print(f"report with {len(figs)} figures written to {out}")
    if analysis["forecast"] is not None:
        print("caution: " + analysis["forecast"]["caution"])
    return EXIT_OK


def synth(args, parser) -> int:
    settings = scenario_settings(args, parser)
    truth = generate_scenario(Path(args.out), settings, args.force)
    print(f"wrote {len(truth['maps'])} invented synoptic maps ({truth['years']:.1f} years, "
          f"{_count(len(truth['cycles']), 'cycle')}, seed {settings.seed}) to {Path(args.out) / 'maps'}")
    print(f"truth: {Path(args.out) / 'truth.json'}; sunspot numbers: {Path(args.out) / 'sunspots.csv'}")
    if settings.observation != "radial":
        print("the maps hold line-of-sight field observed at the central meridian: measure them with --field los")
    return EXIT_OK


def hindcast(args, parser) -> int:
    from .. import hindcast as hc
    from ..events import read_sunspots
    from ..record import read_record

    if args.members < 10:
        parser.error(f"--members {args.members}: must be at least 10")
    if args.jobs < 1:
        parser.error(f"--jobs {args.jobs}: must be at least 1")
    start = parse_date(args.start, "--from", parser)
    end = parse_date(args.end, "--to", parser)
    record_path = Path(args.record)
    prefix = Path(args.out) if args.out else record_path.with_suffix("")
    record = read_record(record_path)
    sunspots = read_sunspots(args.sunspots)
    truth = args.truth  # a path: read (and refused by name) before the forecasts run
    options = {"bases": bases(record_path)}
    if args.regions:
        from ..regions import read_regions

        options["regions"] = read_regions(args.regions)
    # the tables and the summary figures, checked before the long run (the per-cycle figures are
    # checked again, with these, before anything is written)
    outputs_for(prefix, {k: f"_hindcast{k}" for k in (".csv", "_leads.csv", "_pit.png", "_error_lead.png")},
                args.force)
    progress = Progress(1, label="hindcast", unit="forecast")

    def report(done: int, total: int) -> None:
        progress.total = total
        progress.step(count=done - progress.done)

    result = hc.hindcast(record, sunspots, every=args.every, start=start, end=end, jobs=args.jobs, dask=args.dask,
                         members=args.members, seed=args.seed, truth=truth, progress=report, **options)
    progress.close()
    written = hc.write_hindcast(result, prefix, force=args.force, caption=f"polarflux hindcast: {record_path}")
    print(hc.format_lead_table(hc.lead_table(result)))
    print(hc.summary_line(result))
    if result.attrs.get("dates_skipped"):
        print(f"dates left out (fewer than three cycles to calibrate on had ended by then): "
              f"{result.attrs['dates_skipped']}")
    print("outputs: " + ", ".join(str(p) for p in written))
    print("caution: hindcast scores describe the method on past cycles; a forecast is probabilistic, and "
          "operations follow the official space-weather forecasts.")
    return EXIT_OK


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" + ("" if n == 1 else "s")
