"""The demo command: the invented scenario, measured, read, forecast and reported, beside its truth."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import PolarfluxError
from ..tables import cycles_table, events_table, forecast_text
from ..timeseries import format_date
from ._common import (
    EXIT_OK,
    EXIT_SOME_FAILED,
    check_measure_options,
    generate_scenario,
    run_measurement,
    scenario_settings,
)

_DEMO_MARKER = ".polarflux-demo"


def _prepare_demo_folder(folder: Path) -> None:
    if folder.exists() and not (folder / _DEMO_MARKER).exists():
        if not folder.is_dir() or any(folder.iterdir()):
            raise PolarfluxError(
                f"{folder}: exists and is not a polarflux demo folder; choose another with --out DIR"
            )
    folder.mkdir(parents=True, exist_ok=True)
    (folder / _DEMO_MARKER).write_text("made by polarflux demo; the demo rewrites what is in this folder\n")


def demo(args, parser) -> int:
    import json

    from ..plots import plot_polar_fields
    from ..record import expand_inputs, write_record

    check_measure_options(args, parser)
    settings = scenario_settings(args, parser)
    folder = Path(args.out)
    _prepare_demo_folder(folder)
    scenario = folder / "scenario"
    saved = scenario / "scenario.toml"
    if saved.exists() and (scenario / "truth.json").exists() and saved.read_text() == settings.to_toml():
        truth = json.loads((scenario / "truth.json").read_text())
        print(f"reusing the invented scenario in {scenario} (same settings)")
    else:
        truth = generate_scenario(scenario, settings, force=True)
        print(f"generated the invented scenario in {scenario}: {len(truth['maps'])} maps, "
              f"{truth['years']:.1f} years, seed {settings.seed} (no real data)")
    files, problems = expand_inputs([scenario / "maps"])
    if settings.observation != "radial" and args.field == "radial":
        print("the scenario's maps hold line-of-sight field: measured with --field los")
        args.field = "los"
    ds, rows = run_measurement(files, problems, args, "measuring")
    csv_path = write_record(ds, folder / "polar_record.csv", force=True)
    nc_path = write_record(ds, folder / "polar_record.nc", force=True)
    series = _truth_series(scenario / "truth_series.csv")
    fig = plot_polar_fields(ds, truth=series,
                            caption=f"polarflux demo: invented scenario in {scenario} (seed {settings.seed}); "
                            "thin black lines: noise-free truth; the record as measured, before cross-calibration "
                            "(each instrument on its own scale)")
    figure = folder / "polar_fields.png"
    fig.savefig(figure, dpi=120)
    print(cycles_table(truth))
    print(f"measured {len(rows)} of {len(files)} maps, {ds.attrs['failed_count']} failed; "
          f"cap poleward of {args.cap:g} deg, fill={args.fill}")
    last = ds.isel(time=-1)
    print(f"latest map ({str(last['time'].values)[:10]}, {last['instrument'].values}): "
          f"north {float(last['mean_field'].sel(hemisphere='north')):.2f} G, "
          f"south {float(last['mean_field'].sel(hemisphere='south')):.2f} G, "
          f"axial dipole {float(last['axial_dipole']):.2f} G")
    report = _demo_analysis(ds, scenario, folder, truth)
    print(f"outputs: record {csv_path} and {nc_path}; figures {figure} and {folder / 'figure_*.png'}; "
          f"events {folder / 'polar_events.json'}; forecast {folder / 'forecast.json'}; report {report}; "
          f"truth {scenario / 'truth.json'}")
    return EXIT_OK if ds.attrs["failed_count"] == 0 else EXIT_SOME_FAILED


def _demo_analysis(ds, scenario: Path, folder: Path, truth: dict) -> Path:
    """Events, forecast and report of the demo record, each beside the scenario's truth."""
    import json

    from .._io import atomic_path
    from ..analysis import analyse
    from ..events import to_decimal_year
    from ..report import figures, save_figure, write_report
    from ..sunspots import read_sunspot_series

    start = float(to_decimal_year(np.datetime64(truth["start"][:19]).reshape(1))[0][0])
    target = truth.get("next_cycle") or truth["cycles"][-1]
    as_of = start + target["start_years"] - 2.0  # forecast from the maps two years before the minimum
    series = read_sunspot_series(scenario / "sunspots.csv")
    analysis = analyse(ds, (series.times, series.total), as_of=as_of, hemispheric=series.hemispheric)
    found = analysis["events"]
    print(events_table(found))
    scales = {i["name"]: i["scale"] for i in truth["instruments"]}
    for f in found["scale_factors"]:
        if f["quantity"] == "polar":
            print(f"truth: {f['instrument']} -> {f['reference']} scale {scales[f['reference']] / scales[f['instrument']]:.4f}")
    for c in truth["cycles"]:
        for h in ("north", "south"):
            found_times = [r["time"] - start for r in found["reversals"][h]]
            if c[f"{h}_reversal_years"] is not None and found_times:
                nearest = min(found_times, key=lambda x: abs(x - c[f"{h}_reversal_years"]))
                print(f"truth: cycle {c['cycle']} {h} reversal {format_date(start + c[f'{h}_reversal_years'])}, "
                      f"found {format_date(start + nearest)}")
    with atomic_path(folder / "polar_events.json", force=True) as tmp:
        tmp.write_text(json.dumps(found, indent=1, default=float), encoding="utf-8")
    result = analysis["forecast"]
    if result is not None:
        print(f"the demo forecasts as of {format_date(as_of)}, two years before the scenario's minimum, so the truth "
              "below can check a forecast made ahead of it; polarflux forecast without --as-of uses the latest data")
        print(forecast_text(result))
        print(f"truth: cycle {target['cycle']} amplitude {target['amplitude']:.0f}, maximum "
              f"{format_date(start + target['maximum_years'])} (the scenario's own relation, with its random factor "
              f"{target['random_factor']:.3f})")
        from ..forecast import public_result

        public = public_result(result)
        with atomic_path(folder / "forecast.json", force=True) as tmp:
            tmp.write_text(json.dumps(public, indent=1, default=float), encoding="utf-8")
    else:
        print(f"no forecast: {analysis['forecast_error']}")
    figs = figures(analysis, caption="polarflux demo: invented scenario (no real data)",
                   truth_amplitude=target["amplitude"])
    for kind, fig in figs.items():
        save_figure(fig, folder / f"figure_{kind}.png", force=True)
    return write_report(folder / "report.html", analysis, figs, force=True, source=str(folder / "polar_record.nc"),
                        title="Polar-field report: the invented demo scenario (no real data)")


def _truth_series(path: Path) -> dict:
    import csv


    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    return {
        "time": np.array([np.datetime64(r["time"][:23]) for r in rows]),
        "north": np.array([float(r["north_mean_field_g"]) for r in rows]),
        "south": np.array([float(r["south_mean_field_g"]) for r in rows]),
    }
