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

``--blind-flow`` takes from the oracle one thing the forecast cannot know either: each cycle's own
meridional flow (the hard preset varies it with the cycle's strength and at random); its forks run
the world's base flow.
"""

from __future__ import annotations

import argparse
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
from polarflux.synthetic import _advance, _calibrate, _dipole, _model, _Run  # noqa: E402


def _law(settings, dipole: float) -> float:
    """The world's precursor law without its scatter (truth.json's ``precursor_relation``)."""
    return settings.reference_amplitude * (abs(dipole) / settings.reference_dipole) ** settings.precursor_exponent


def world_forks(args: tuple) -> list[dict]:
    """Run one world as the generator does; at each lead before each minimum, fork the emergence."""
    preset, seed, cycles, grid, leads, forks, blind_flow = args
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
        forked = {}
        for lead in sorted(leads, reverse=True):
            at = minimum - lead
            if n < 2 or at <= run.stepper.time:
                continue
            run._step_to(at)
            dipoles = []
            # the oracle knows this cycle's own flow; a blind one runs the world's base flow instead
            fork_model = _model(s, axisymmetric=False) if blind_flow else run.stepper.model
            for k in range(forks):
                fork = fork_model.stepper(run.stepper.field(), s.step_days)
                fork.steps_done = run.stepper.steps_done
                rng = np.random.default_rng([seed, 1000 + n, k, int(round(lead * 100))])
                rng_extra = np.random.default_rng([seed, 2000 + n, k, int(round(lead * 100))])
                regions = []
                for cycle in live:
                    regions += cycle_regions(cycle, s, rng, fork.time, minimum, flux_scale, rng_extra)
                regions.sort(key=lambda r: r.time)
                _advance(fork, regions, minimum)
                dipoles.append(_dipole(fork))
            forked[lead] = np.array(dipoles)
        run._step_to(minimum)
        cycle = run._start_cycle(n, minimum)
        live.append(cycle)
        new = cycle_regions(cycle, s, run.rng_regions, run.stepper.time, total_years + 1.0, flux_scale,
                            run.rng_extra_regions)
        run.regions = run.regions[:run.next_region] + sorted(run.regions[run.next_region:] + new,
                                                             key=lambda r: r.time)
        rng = np.random.default_rng([seed, 3000 + n])
        for lead, dipoles in forked.items():
            members = np.repeat([_law(s, d) for d in dipoles], 200)
            members = members * np.exp(rng.normal(0.0, s.precursor_scatter, members.size))
            low, median, high = np.percentile(members, [16.0, 50.0, 84.0])
            out.append({"seed": seed, "cycle": n, "lead": lead, "truth_dipole": cycle.precursor_dipole,
                        "log_sd": float(np.std(np.log(np.abs(dipoles)), ddof=1)),
                        "log_bias": float(np.mean(np.log(np.abs(dipoles))) - math.log(abs(cycle.precursor_dipole))),
                        "truth": cycle.amplitude, "median": float(median),
                        "relative_error": float(median / cycle.amplitude - 1.0),
                        "inside68": bool(low <= cycle.amplitude <= high)})
    return out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--preset", default="hard")
    parser.add_argument("--seeds", type=int, nargs="+", default=[101, 102, 103, 104, 105])
    parser.add_argument("--cycles", type=int, default=5)
    parser.add_argument("--grid", choices=("coarse", "low"), default="coarse")
    parser.add_argument("--leads", type=float, nargs="+", default=[4.0, 3.5, 3.0, 2.0, 1.0])
    parser.add_argument("--forks", type=int, default=24)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--blind-flow", action="store_true",
                        help="the forks run the world's base flow, not the declining cycle's own")
    args = parser.parse_args()
    preset = None if args.preset in ("default", "none") else args.preset
    began = time.perf_counter()
    work = [(preset, s, args.cycles, args.grid, args.leads, args.forks, args.blind_flow) for s in args.seeds]
    with ProcessPoolExecutor(max_workers=args.jobs) as pool:
        rows = [r for part in pool.map(world_forks, work) for r in part]
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
