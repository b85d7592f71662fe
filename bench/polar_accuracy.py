"""How close the measured polar fields come to an invented world's truth, fill by fill.

Generates (or reuses) a world, measures its maps with the measure command's settings
(default: its defaults), brings the instruments onto one scale with the events
command's defaults, and compares with the world's noise-free truth (truth_series.csv,
truth.json):

* 13-rotation running means of the polar mean field against the same means of the
  truth: the median and 90th percentile of |measured / truth - 1| where the truth is
  at least a third of its largest value (away from reversals, where a ratio means
  nothing), and the share within 3 %;
* single maps against the truth at their rotation, in bins of the hemisphere's B0
  (positive: that pole tilted towards the observer): the median ratio per bin, and the
  largest minus the smallest of those medians;
* polar reversals (events' smoothed crossings) against the truth's reversals.

    python bench/polar_accuracy.py [--world DIR] [--preset hard] [--seed 7] [--cycles 3]
                                   [--resolution standard] [--fill none profile temporal]
                                   [--viewing b0] [--jobs 2] [--linear-instruments]

The printout is the evidence for the measure command's default fill (docs/methods.md).
"""

from __future__ import annotations

import argparse
import json
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

import polarflux as pf
from polarflux.calibration import merge_instruments
from polarflux.events import find_reversals
from polarflux.measure import FILL_METHODS
from polarflux.synthetic import settings_for, write_scenario
from polarflux.timeseries import running_mean, to_decimal_year

B0_BINS = np.array([-7.5, -4.5, -1.5, 1.5, 4.5, 7.5])


def truth_of(world: Path):
    rows = np.genfromtxt(world / "truth_series.csv", delimiter=",", names=True, dtype=None, encoding="utf-8")
    t, _ = to_decimal_year(np.array(rows["time"], dtype="datetime64[ns]"))
    truth = json.loads((world / "truth.json").read_text())
    start, _ = to_decimal_year(np.array([truth["start"]], dtype="datetime64[ns]"))
    reversals = {h: [start[0] + c[f"{h}_reversal_years"] for c in truth["cycles"] if c.get(f"{h}_reversal_years")]
                 for h in ("north", "south")}
    return rows["carrington_rotation"], t, {"north": rows["north_mean_field_g"], "south": rows["south_mean_field_g"]}, \
        reversals


def compare(world: Path, fill: str, viewing: str, field: str, jobs: int) -> dict:
    rotations, t_truth, truth, truth_reversals = truth_of(world)
    record = pf.measure_archive([world / "maps"], fill=fill, field=field, jobs=jobs)
    merged = merge_instruments(record, viewing=viewing)
    out = {}
    by_rotation = {int(r): k for k, r in enumerate(rotations)}
    index = np.array([by_rotation.get(int(r), -1) for r in merged["carrington_rotation"].values])
    have = index >= 0
    for h in ("north", "south"):
        measured = merged["mean_field_corrected"].sel(hemisphere=h).values[have]
        true = truth[h][index[have]]
        sign = np.sign(np.nanmedian(true[np.abs(true) > 0.5 * np.nanmax(np.abs(true))]))
        smooth_m = running_mean(measured, 13, 7)
        smooth_t = running_mean(true, 13, 7)
        strong = np.abs(smooth_t) >= np.nanmax(np.abs(smooth_t)) / 3
        err = np.abs(smooth_m[strong] / smooth_t[strong] - 1)
        err = err[np.isfinite(err)]
        single = measured / true
        b0 = merged["b0"].values[have] * (1 if h == "north" else -1)
        strong1 = np.abs(true) >= np.nanmax(np.abs(true)) / 3
        medians = []
        for lo, hi in zip(B0_BINS[:-1], B0_BINS[1:], strict=True):
            sel = strong1 & (b0 >= lo) & (b0 < hi) & np.isfinite(single)
            medians.append(float(np.median(single[sel])) if sel.sum() >= 3 else np.nan)
        reversals = [r.time for r in find_reversals(merged, variable="mean_field_corrected")[h]]
        offsets = []
        for tr in truth_reversals[h]:
            if t_truth[0] + 1 < tr < t_truth[-1] - 1:
                offsets.append(min((abs(r - tr) for r in reversals), default=np.inf))
        out[h] = {"median": float(np.median(err)), "p90": float(np.percentile(err, 90)),
                  "within3": float(np.mean(err <= 0.03)), "bins": medians,
                  "b0_spread": float(np.nanmax(medians) - np.nanmin(medians)), "reversals": offsets}
        del sign
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--world", type=Path, default=None, help="an existing world's folder (else one is made)")
    parser.add_argument("--preset", default="hard")
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--cycles", type=int, default=3)
    parser.add_argument("--resolution", default="standard")
    parser.add_argument("--fill", nargs="+", default=list(FILL_METHODS))
    parser.add_argument("--viewing", default="b0")
    parser.add_argument("--field", default="auto")
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--linear-instruments", action="store_true",
                        help="instruments with scale 1 and a linear response (noise, blur, grid and gaps kept): "
                        "what is left is the geometry of seeing the poles")
    args = parser.parse_args()
    world = args.world
    if world is None or not (world / "truth.json").exists():
        world = world or Path(f"/tmp/polarflux-accuracy-{args.preset}-{args.seed}")
        start = time.perf_counter()
        settings = settings_for(args.resolution, preset=args.preset, seed=args.seed, cycles=args.cycles)
        if args.linear_instruments:
            settings = replace(settings, instruments=tuple(
                replace(i, scale=1.0, strong_field_scale=None, saturation_g=None) for i in settings.instruments))
        write_scenario(world, settings, force=True)
        print(f"world {world} made in {time.perf_counter() - start:.0f} s")
    print(f"world {world}; viewing correction {args.viewing}; B0 bins {B0_BINS.tolist()} (deg, towards the pole)")
    print(f"{'fill':9s} {'cap':5s} {'13-rot |err| median':>19s} {'p90':>6s} {'<=3%':>5s}  "
          f"{'single maps / truth by B0 bin':36s} {'spread':>6s}  reversal offsets (yr)")
    for fill in args.fill:
        start = time.perf_counter()
        result = compare(world, fill, args.viewing, args.field, args.jobs)
        for h, r in result.items():
            bins = " ".join(f"{b:6.3f}" for b in r["bins"])
            offsets = " ".join(f"{o:.2f}" for o in r["reversals"])
            print(f"{fill:9s} {h:5s} {100 * r['median']:18.1f}% {100 * r['p90']:5.1f}% {100 * r['within3']:4.0f}%  "
                  f"{bins:36s} {100 * r['b0_spread']:5.1f}%  {offsets}")
        print(f"{'':9s} ({time.perf_counter() - start:.0f} s)")


if __name__ == "__main__":
    main()
