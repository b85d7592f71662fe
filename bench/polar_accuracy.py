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

Each bin's median carries its bootstrap standard error (maps resampled within the bin),
and the spread its own, so that a spread can be told from the scatter of single maps.
``--noise-scale`` makes a twin of the world with every instrument's noise scaled
(0: noise-free; the same Sun, gaps and B0): what is left at 0 is the method's own
error, the rest comes from the instruments' noise. Several ``--seed`` values give one
line per world and a pooled line.

    python bench/polar_accuracy.py [--world DIR] [--preset hard] [--seed 7 [8 ...]] [--cycles 3]
                                   [--resolution standard] [--fill none profile temporal]
                                   [--viewing b0] [--jobs 2] [--linear-instruments]
                                   [--noise-scale 1.0]

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
from polarflux.fill import RECORD_FILLS
from polarflux.synthetic import settings_for, write_scenario
from polarflux.timeseries import running_mean, to_decimal_year

B0_BINS = np.array([-7.5, -4.5, -1.5, 1.5, 4.5, 7.5])
BOOTSTRAP = 500


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
        smooth_m = running_mean(measured, 13, 7)
        smooth_t = running_mean(true, 13, 7)
        strong = np.abs(smooth_t) >= np.nanmax(np.abs(smooth_t)) / 3
        err = np.abs(smooth_m[strong] / smooth_t[strong] - 1)
        err = err[np.isfinite(err)]
        single = measured / true
        b0 = merged["b0"].values[have] * (1 if h == "north" else -1)
        strong1 = np.abs(true) >= np.nanmax(np.abs(true)) / 3
        medians, boots = [], []
        rng = np.random.default_rng(0)
        for lo, hi in zip(B0_BINS[:-1], B0_BINS[1:], strict=True):
            sel = strong1 & (b0 >= lo) & (b0 < hi) & np.isfinite(single)
            values = single[sel]
            medians.append(float(np.median(values)) if values.size >= 3 else np.nan)
            boots.append(np.median(rng.choice(values, (BOOTSTRAP, values.size)), axis=1) if values.size >= 3
                         else np.full(BOOTSTRAP, np.nan))
        boots = np.array(boots)
        boot_spread = np.nanmax(boots, axis=0) - np.nanmin(boots, axis=0)
        reversals = [r.time for r in find_reversals(merged, variable="mean_field_corrected")[h]]
        offsets = []
        for tr in truth_reversals[h]:
            if t_truth[0] + 1 < tr < t_truth[-1] - 1:
                offsets.append(min((abs(r - tr) for r in reversals), default=np.inf))
        out[h] = {"median": float(np.median(err)), "p90": float(np.percentile(err, 90)),
                  "within3": float(np.mean(err <= 0.03)), "bins": medians,
                  "bins_se": np.nanstd(boots, axis=1).tolist(), "errors": err,
                  "b0_spread": float(np.nanmax(medians) - np.nanmin(medians)),
                  "b0_spread_se": float(np.nanstd(boot_spread)), "reversals": offsets}
    return out


def make_world(folder: Path, args, seed: int) -> Path:
    if (folder / "truth.json").exists():
        return folder
    start = time.perf_counter()
    settings = settings_for(args.resolution, preset=args.preset, seed=seed, cycles=args.cycles)
    instruments = []
    for i in settings.instruments:
        i = replace(i, noise_g=i.noise_g * args.noise_scale)
        if args.linear_instruments:
            i = replace(i, scale=1.0, strong_field_scale=None, saturation_g=None)
        instruments.append(i)
    write_scenario(folder, replace(settings, instruments=tuple(instruments)), force=True)
    print(f"world {folder} made in {time.perf_counter() - start:.0f} s")
    return folder


def print_line(label: str, h: str, r: dict) -> None:
    bins = " ".join(f"{b:5.3f}({1000 * e:.0f})" for b, e in zip(r["bins"], r["bins_se"], strict=True))
    offsets = " ".join(f"{o:.2f}" for o in r["reversals"])
    print(f"{label:18s} {h:5s} {100 * r['median']:6.1f}% {100 * r['p90']:5.1f}% {100 * r['within3']:4.0f}%  "
          f"{bins}  {100 * r['b0_spread']:4.1f}+-{100 * r['b0_spread_se']:.1f}%  {offsets}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--world", type=Path, default=None, help="an existing world's folder (else one is made)")
    parser.add_argument("--preset", default="hard")
    parser.add_argument("--seed", type=int, nargs="+", default=[7])
    parser.add_argument("--cycles", type=int, default=3)
    parser.add_argument("--resolution", default="standard")
    parser.add_argument("--fill", nargs="+", default=list(RECORD_FILLS), choices=RECORD_FILLS)
    parser.add_argument("--viewing", default="b0")
    parser.add_argument("--field", default="auto")
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--linear-instruments", action="store_true",
                        help="instruments with scale 1 and a linear response (noise, blur, grid and gaps kept): "
                        "what is left is the geometry of seeing the poles")
    parser.add_argument("--noise-scale", type=float, default=1.0,
                        help="every instrument's noise times this (0: the noise-free twin of the world)")
    args = parser.parse_args()
    if args.world is not None and len(args.seed) > 1:
        parser.error("--world names one world: give one --seed (or none)")
    tag = ("" if args.noise_scale == 1.0 else f"-noise{args.noise_scale:g}") + ("-linear" if args.linear_instruments else "")
    worlds = [make_world(args.world or Path(f"/tmp/polarflux-accuracy-{args.preset}-{seed}{tag}"), args, seed)
              for seed in args.seed]
    print(f"worlds: {', '.join(str(w) for w in worlds)}")
    print(f"viewing correction {args.viewing}; B0 bins {B0_BINS.tolist()} (deg, towards the pole); "
          "each bin's median (its standard error, 1/1000)")
    print(f"{'fill / world':18s} {'cap':5s} {'13-rot |err| median':>7s} {'p90':>6s} {'<=3%':>5s}  "
          f"single maps / truth by B0 bin, spread +- its standard error, reversal offsets (yr)")
    for fill in args.fill:
        start = time.perf_counter()
        pooled = {"north": [], "south": []}
        for world, seed in zip(worlds, args.seed, strict=True):
            result = compare(world, fill, args.viewing, args.field, args.jobs)
            for h, r in result.items():
                print_line(f"{fill} seed {seed}" if len(worlds) > 1 else fill, h, r)
                pooled[h].append(r)
        if len(worlds) > 1:
            for h, rs in pooled.items():
                err = np.concatenate([r["errors"] for r in rs])
                offsets = np.concatenate([r["reversals"] for r in rs])
                print(f"{fill + ' pooled':18s} {h:5s} {100 * np.median(err):6.1f}% {100 * np.percentile(err, 90):5.1f}% "
                      f"{100 * np.mean(err <= 0.03):4.0f}%  B0 spread median "
                      f"{100 * np.median([r['b0_spread'] for r in rs]):.1f}%; reversals: median "
                      f"{np.median(offsets):.2f} yr, {np.sum(offsets > 0.1)} of {offsets.size} beyond 0.1 yr")
        print(f"{'':18s} ({time.perf_counter() - start:.0f} s)")


if __name__ == "__main__":
    main()
