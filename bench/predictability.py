"""How well can anything know a world's dipole at minimum, and so its next cycle, L years ahead?

The hindcast bench (``bench/hindcast.py``) scores the forecast against the world's truth. This
bench asks what the best possible forecast would score in the same worlds: an oracle that knows
the whole surface field at the forecast date, the world's own transport, every cycle's amplitude,
timing and flow, the emergence statistics and the precursor law with its scatter, and does not know
only which regions will still emerge. It re-runs the generator's own Sun from the forecast date to
the minimum ``--forks`` times, each with fresh draws of the regions still to come (the same
statistics, the generator's own ``cycle_regions``), and forecasts the next cycle's amplitude from
each fork's dipole through the world's precursor law and its log-normal scatter.

What no method can beat in these worlds is printed by lead: the spread of ln |dipole at minimum|
among the forks, and the oracle's median |relative error| of the amplitude (its median against the
truth), with its 68 % coverage. Compare with ``bench/hindcast.py``'s table by lead.

    python bench/predictability.py [--preset hard] [--seeds 101 102 ...] [--cycles 5]
                                   [--leads 4 3.5 3 2 1] [--forks 24] [--jobs 2] [--blind-flow]
                                   [--hindcast HINDCAST.csv]

``--hindcast`` forks at the dates of a ``bench/hindcast.py`` CSV instead and prints, by that
bench's lead bins, the forecast's median |relative error| beside the oracle's at the same dates.

``--blind-flow`` takes from the oracle one thing the forecast cannot know either: each cycle's own
meridional flow (the hard preset varies it with the cycle's strength and at random); its forks run
the world's base flow.
"""

from __future__ import annotations

import argparse
import csv
import math
import os
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

sys.path.insert(0, os.path.dirname(__file__))

from hindcast import world_settings  # noqa: E402  (the hindcast bench's worlds, grid and all)

from polarflux._synth_emerge import _Cycle, _shape_for_amplitude, cycle_regions  # noqa: E402
from polarflux.scores import LEAD_EDGES  # noqa: E402
from polarflux.synthetic import _advance, _calibrate, _dipole, _model, _Run  # noqa: E402


def _law(settings, dipole: float) -> float:
    """The world's precursor law without its scatter (truth.json's ``precursor_relation``)."""
    return settings.reference_amplitude * (abs(dipole) / settings.reference_dipole) ** settings.precursor_exponent


def world_forks(args: tuple) -> list[dict]:
    """Run one world as the generator does and fork the emergence at each date asked for.

    ``when`` maps a cycle number to the dates (years from the world's start) to fork at before
    that cycle's minimum; None asks for ``leads`` before every minimum from the second cycle on.
    A date at or after the minimum needs no fork: the oracle knows the dipole there.
    """
    preset, seed, cycles, grid, leads, forks, blind_flow, when = args
    s = world_settings(preset, seed, cycles, grid)
    with tempfile.TemporaryDirectory() as tmp:
        run = _Run(Path(tmp), s, force=True)  # its random streams, exactly as generate() draws them
    flux_scale, start_profile = _calibrate(s)
    periods = np.clip(run.rng_cycles.normal(s.mean_period, s.period_scatter, s.cycles + 1),
                      s.mean_period - 1.2, s.mean_period + 1.2)
    starts = np.concatenate([[-periods[0]], np.cumsum(np.concatenate([[0.0], periods[1:]]))])
    total_years = float(starts[-1])
    model = _model(s, axisymmetric=False)
    run.flow_speed = s.flow_speed
    run.stepper = model.stepper(np.repeat(start_profile[:, None], model.grid.nlon, axis=1), s.step_days)
    run.recorder = None
    live = [_Cycle(0, float(starts[0]), s.reference_amplitude, _shape_for_amplitude(s.reference_amplitude), -1,
                   flow_speed=s.flow_speed)]
    run.regions = cycle_regions(live[0], s, run.rng_regions, 0.0, total_years + 1.0, flux_scale,
                                run.rng_extra_regions)
    run.next_region = 0
    out = []
    for n in range(1, s.cycles + 1):
        minimum = float(starts[n])
        if when is None:
            dates = [minimum - lead for lead in leads] if n >= 2 else []
        else:
            dates = list(when.get(n, []))
        forked = {}
        for at in sorted(d for d in dates if run.stepper.time < d < minimum):
            run._step_to(at)
            dipoles = []
            # the oracle knows this cycle's own flow; a blind one runs the world's base flow instead
            fork_model = _model(s, axisymmetric=False) if blind_flow else run.stepper.model
            for k in range(forks):
                fork = fork_model.stepper(run.stepper.field(), s.step_days)
                fork.steps_done = run.stepper.steps_done
                rng = np.random.default_rng([seed, 1000 + n, k, int(round(at * 1000))])
                rng_extra = np.random.default_rng([seed, 2000 + n, k, int(round(at * 1000))])
                regions = []
                for cycle in live:
                    regions += cycle_regions(cycle, s, rng, fork.time, minimum, flux_scale, rng_extra)
                regions.sort(key=lambda r: r.time)
                _advance(fork, regions, minimum)
                dipoles.append(_dipole(fork))
            forked[at] = np.array(dipoles)
        run._step_to(minimum)
        cycle = run._start_cycle(n, minimum)
        live.append(cycle)
        new = cycle_regions(cycle, s, run.rng_regions, run.stepper.time, total_years + 1.0, flux_scale,
                            run.rng_extra_regions)
        run.regions = run.regions[:run.next_region] + sorted(run.regions[run.next_region:] + new,
                                                             key=lambda r: r.time)
        for d in dates:  # at or after the minimum: the dipole is known
            if d >= minimum:
                forked[d] = np.array([cycle.precursor_dipole])
        rng = np.random.default_rng([seed, 3000 + n])
        for at, dipoles in sorted(forked.items()):
            members = np.repeat([_law(s, d) for d in dipoles], max(1, 4800 // dipoles.size))
            members = members * np.exp(rng.normal(0.0, s.precursor_scatter, members.size))
            low, median, high = np.percentile(members, [16.0, 50.0, 84.0])
            out.append({"seed": seed, "cycle": n, "at": at, "lead": minimum - at,
                        "truth_dipole": cycle.precursor_dipole,
                        "log_sd": float(np.std(np.log(np.abs(dipoles)), ddof=1)) if dipoles.size > 1 else 0.0,
                        "log_bias": float(np.mean(np.log(np.abs(dipoles))) - math.log(abs(cycle.precursor_dipole))),
                        "truth": cycle.amplitude, "median": float(median),
                        "relative_error": float(median / cycle.amplitude - 1.0),
                        "inside68": bool(low <= cycle.amplitude <= high)})
    return out


def hindcast_dates(path: str, start_year: float) -> tuple[dict, list[dict]]:
    """The forecast dates of a ``bench/hindcast.py`` CSV, per seed and cycle, as years from the start."""
    rows = []
    with open(path, newline="", encoding="utf-8") as handle:
        for row in csv.DictReader(handle):
            label = (row.get("cycle") or "").split()
            if row.get("status") != "ok" or len(label) != 4 or not row.get("relative_error"):
                continue
            rows.append({"seed": int(label[1]), "cycle": int(label[3]), "at": float(row["date"]) - start_year,
                         "lead": float(row["lead"]), "relative_error": float(row["relative_error"])})
    when: dict = {}
    for r in rows:
        when.setdefault(r["seed"], {}).setdefault(r["cycle"], []).append(r["at"])
    return when, rows


def paired_table(oracle: list[dict], forecasts: list[dict], seeds) -> None:
    """The oracle beside the forecast at the same dates, by the hindcast's lead bins."""
    by_key = {(r["seed"], r["cycle"], round(r["at"], 4)): r for r in oracle}
    pairs = [(f, by_key.get((f["seed"], f["cycle"], round(f["at"], 4)))) for f in forecasts if f["seed"] in seeds]
    pairs = [(f, o) for f, o in pairs if o is not None]
    print(f"{'lead (yr)':>13} {'n':>4} {'forecast med|rel err|':>22} {'oracle med|rel err|':>20}")
    for a, b in zip(LEAD_EDGES[:-1], LEAD_EDGES[1:], strict=True):
        pick = [(f, o) for f, o in pairs if a <= f["lead"] < b]
        if pick:
            print(f"{a:+5.1f} to {b:+4.1f} {len(pick):>4} {100 * np.median([abs(f['relative_error']) for f, _ in pick]):>21.1f}% "
                  f"{100 * np.median([abs(o['relative_error']) for _, o in pick]):>19.1f}%")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--preset", default="hard")
    parser.add_argument("--seeds", type=int, nargs="+", default=[101, 102, 103, 104, 105])
    parser.add_argument("--cycles", type=int, default=5)
    parser.add_argument("--grid", choices=("coarse", "low"), default="coarse")
    parser.add_argument("--leads", type=float, nargs="+", default=[4.0, 3.5, 3.0, 2.0, 1.0])
    parser.add_argument("--forks", type=int, default=24)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--hindcast", metavar="CSV",
                        help="fork at the dates of a bench/hindcast.py CSV (same preset, cycles and grid) and "
                        "print the oracle beside that forecast, by its lead bins")
    parser.add_argument("--blind-flow", action="store_true",
                        help="the forks run the world's base flow, not the declining cycle's own")
    args = parser.parse_args()
    preset = None if args.preset in ("default", "none") else args.preset
    began = time.perf_counter()
    when, forecasts = {}, []
    if args.hindcast:
        from polarflux.timeseries import to_decimal_year

        start = world_settings(preset, args.seeds[0], args.cycles, args.grid).start
        start_year = float(to_decimal_year(np.array([np.datetime64(start[:19])]))[0][0])
        when, forecasts = hindcast_dates(args.hindcast, start_year)
    work = [(preset, s, args.cycles, args.grid, args.leads, args.forks, args.blind_flow,
             when.get(s, {}) if args.hindcast else None) for s in args.seeds]
    with ProcessPoolExecutor(max_workers=args.jobs) as pool:
        rows = [r for part in pool.map(world_forks, work) for r in part]
    if args.hindcast:
        print(f"oracle ({args.forks} forks) beside the forecasts of {args.hindcast}, at the same dates")
        paired_table(rows, forecasts, set(args.seeds))
        print(f"wall time {time.perf_counter() - began:.0f} s")
        return 0
    print(f"worlds: {len(args.seeds)} x {args.cycles} cycles, preset {args.preset}, {args.grid} grid; "
          f"{args.forks} forks of the emergence from each forecast date"
          + ("; the forks run the world's base flow (blind to each cycle's own)" if args.blind_flow else ""))
    print(f"{'lead (yr)':>9} {'n':>3} {'sd ln|D| forks':>15} {'mean bias':>10} {'oracle med|rel err|':>20} "
          f"{'68 % coverage':>14}")
    for lead in sorted(args.leads, reverse=True):
        pick = [r for r in rows if r["lead"] == lead]
        if not pick:
            continue
        errors = np.abs([r["relative_error"] for r in pick])
        print(f"{lead:>9.1f} {len(pick):>3} {np.median([r['log_sd'] for r in pick]):>15.3f} "
              f"{np.mean([r['log_bias'] for r in pick]):>+10.3f} {100 * np.median(errors):>19.1f}% "
              f"{np.mean([r['inside68'] for r in pick]):>14.2f}")
    print("per forecast (seed cycle lead: oracle median / truth, relative error):")
    for r in rows:
        print(f"  {r['seed']} {r['cycle']} {r['lead']:.1f}: {r['median']:.0f} / {r['truth']:.0f} "
              f"({100 * r['relative_error']:+.0f} %), sd ln|D| {r['log_sd']:.3f}")
    print(f"wall time {time.perf_counter() - began:.0f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
