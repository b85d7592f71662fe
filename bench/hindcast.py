"""Hindcasts of the forecast over several invented worlds, scored against each world's truth.

For each seed, an invented world is generated (the default world, or a named preset of
``polarflux.synthetic.PRESETS``) on a coarse grid so that the bench fits in minutes, its
maps are measured, and the forecast is made as of calendar dates from 4 years before to
2 years after each minimum of the world's sunspot series (the minima come from the series,
never from the truth; each forecast sees only what existed on its date). The outcomes
come from the world's truth.json. Prints the table by lead, one summary line, and the
wall time with the number of cores.

    python bench/hindcast.py [--preset hard] [--seeds 5] [--cycles 5] [--every 6M] [--jobs 2] [--regions]
                             [--members 100] [--grid coarse|low] [--dask local|ADDRESS] [--out PREFIX]
                             [--law linear proportional] [--worlds DIR]

``--worlds DIR`` keeps the generated worlds in DIR (``DIR/<preset>-<grid>-<cycles>-cycles-world<seed>``) and reuses those
already there, so that two versions of the forecast can be scored on the same worlds; a kept world
whose ``record.nc`` was removed is measured again (to score a change of the measurement).
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import replace

import numpy as np

import polarflux as pf
from polarflux.events import find_cycle_extrema
from polarflux.hindcast import (
    forecast_dates,
    format_lead_table,
    hindcast,
    lead_table,
    summarise,
    summary_line,
    write_hindcast,
)
from polarflux.synthetic import settings_for, write_scenario

#: A grid coarser than the scenario's "low" resolution: the model at 2 degrees and 2-day
#: steps, instruments at 40 and 60 rows (the forecast's own projection grid is unchanged).
COARSE = {"model": (60, 120), "instruments": (40, 60), "step_days": 2.0}


def world_settings(preset: str | None, seed: int, cycles: int, grid: str):
    settings = settings_for("low", preset=preset, cycles=cycles, seed=seed)
    if grid == "coarse":
        rows = COARSE["instruments"]
        settings = replace(settings, model_nlat=COARSE["model"][0], model_nlon=COARSE["model"][1],
                           step_days=COARSE["step_days"],
                           instruments=tuple(replace(i, nlat=n, nlon=2 * n)
                                             for i, n in zip(settings.instruments, rows, strict=True)))
    return settings


def make_world(args: tuple) -> tuple[str, float]:
    """Generate one world into ``folder`` and measure it; returns the folder and the seconds taken."""
    folder, preset, seed, cycles, grid = args
    start = time.perf_counter()
    settings = world_settings(preset, seed, cycles, grid)
    if not os.path.exists(os.path.join(folder, "truth.json")):  # a kept world without its record is measured again
        write_scenario(folder, settings)
    field = "los" if getattr(settings, "observation", "radial") != "radial" else "radial"
    record = pf.measure_archive([os.path.join(folder, "maps")], field=field)
    pf.write_record(record, os.path.join(folder, "record.nc"))
    return folder, time.perf_counter() - start


def world_regions(folder: str):
    """A world's regions.csv as the forecast reads it (worlds made before it had a date column: from its years)."""
    import csv
    import json

    from polarflux.regions import Regions, read_regions
    from polarflux.timeseries import to_decimal_year

    path = os.path.join(folder, "regions.csv")
    with open(path, encoding="utf-8") as handle:
        header = handle.readline()
    if "date" in header.split(","):
        return read_regions(path)
    with open(os.path.join(folder, "truth.json"), encoding="utf-8") as handle:
        start = json.load(handle)["start"]
    start_year = float(to_decimal_year(np.array([np.datetime64(start[:19])]))[0][0])
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    return Regions(np.array([start_year + float(r["years"]) for r in rows]),
                   np.array([float(r["latitude"]) for r in rows]), np.sign([float(r["flux_mx"]) for r in rows]))


def dates_around_minima(record, t, v, every: str, before: float = 4.0, after: float = 2.0) -> np.ndarray:
    """Grid dates (where three cycles can calibrate) within [minimum - before, minimum + after] of a minimum
    of the whole sunspot series."""
    minima = find_cycle_extrema(t, v).minima.times
    grid = forecast_dates(record, t, v, every=every)
    near = np.zeros(grid.shape, dtype=bool)
    for m in minima:
        near |= (grid >= m - before) & (grid <= m + after)
    return grid[near]


def main() -> None:
    import xarray as xr

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--preset", default=None, help="a world of polarflux.synthetic.PRESETS (default world if not given)")
    parser.add_argument("--seeds", type=int, default=5)
    parser.add_argument("--first-seed", type=int, default=101)
    parser.add_argument("--cycles", type=int, default=5)
    parser.add_argument("--every", default="6M", help="date grid step (3M, 6M, 1Y, ...)")
    parser.add_argument("--members", type=int, default=100)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--grid", choices=("coarse", "low"), default="coarse")
    parser.add_argument("--dask", default=None, help="'local' or a dask.distributed scheduler address")
    parser.add_argument("--out", default=None, help="write the CSV tables and figures with this prefix")
    parser.add_argument("--law", nargs="+", default=["linear"], choices=("linear", "proportional"),
                        help="the precursor law(s): each is scored on the same worlds and dates")
    parser.add_argument("--regions", action="store_true",
                        help="each forecast also sees the world's regions.csv (forecast --regions)")
    parser.add_argument("--worlds", default=None,
                        help="keep the worlds in this folder and reuse those already made there")
    args = parser.parse_args()
    seeds = list(range(args.first_seed, args.first_seed + args.seeds))
    clock = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        home = args.worlds or tmp
        os.makedirs(home, exist_ok=True)
        work = [(os.path.join(home, f"{args.preset or 'default'}-{args.grid}-{args.cycles}-cycles-world{s}"), args.preset, s, args.cycles, args.grid) for s in seeds]
        ready = [w for w in work if os.path.exists(os.path.join(w[0], "record.nc"))]
        with ProcessPoolExecutor(max_workers=args.jobs) as pool:
            fresh = dict(zip((w[0] for w in work if w not in ready),
                             pool.map(make_world, [w for w in work if w not in ready]), strict=True))
        made = [fresh.get(w[0], (w[0], 0.0)) for w in work]
        generated = time.perf_counter() - clock
        print(f"worlds: {len(seeds)} x {args.cycles} cycles, preset {args.preset or 'default'}, {args.grid} grid, "
              f"seeds {seeds[0]}-{seeds[-1]}; generated and measured in {generated:.0f} s "
              f"(each {min(s for _, s in made):.0f}-{max(s for _, s in made):.0f} s of one core)")
        results = {law: [] for law in args.law}
        for (folder, _), seed in zip(made, seeds, strict=True):
            record = pf.read_record(os.path.join(folder, "record.nc"))
            t, v = pf.read_sunspots(os.path.join(folder, "sunspots.csv"))
            dates = dates_around_minima(record, t, v, args.every)
            for law in args.law:
                start = time.perf_counter()
                extra = {"regions": world_regions(folder)} if args.regions else {}
                result = hindcast(record, (t, v), dates, members=args.members, seed=seed, jobs=args.jobs,
                                  dask=args.dask, truth=os.path.join(folder, "truth.json"), law=law, **extra)
                every = summarise(result)
                print(f"  seed {seed}, {law} law: {every['forecasts']} forecasts ({every['failures']} failed, "
                      f"{every['scored']} scored) in {time.perf_counter() - start:.0f} s")
                labels = np.array([f"seed {seed} {c}" if c else "" for c in result["cycle"].values], dtype=str)
                results[law].append(result.assign(world=("date", np.full(result.sizes["date"], seed)),
                                                  cycle=("date", labels)))
        tables = {law: xr.concat(rows, dim="date") for law, rows in results.items()}
    wall = time.perf_counter() - clock
    for law, table in tables.items():
        print()
        print(f"precursor law: {law}")
        print(format_lead_table(lead_table(table)))
        print()
        print(summary_line(table))
        outside = summarise(table)["forecasts"] - sum(r["forecasts"] for r in lead_table(table, outside=False))
        if outside:
            print(f"({outside} forecasts fall outside the lead bins: their date is near a minimum of the series but "
                  "the truth's minimum of the cycle forecast lies elsewhere)")
    print(f"wall time {wall:.0f} s on {args.jobs} process(es) of {os.cpu_count()} cores "
          f"(worlds {generated:.0f} s, forecasts {wall - generated:.0f} s)")
    if args.out:
        for law, table in tables.items():
            for path in write_hindcast(table, f"{args.out}_{law}" if len(tables) > 1 else args.out, force=True):
                print(f"wrote {path}")


if __name__ == "__main__":
    main()
