"""Time the hard preset's scenario against the default scenario, in one run, and print the ratio.

    python bench/synth.py                    # 4 cycles at standard resolution (the target: ratio < 2)
    python bench/synth.py --resolution low --cycles 2

Each world is generated into a temporary folder; the process CPU time and the wall
time of each are printed with the ratio hard / default.
"""

from __future__ import annotations

import argparse
import tempfile
import time

from polarflux.synthetic import settings_for, write_scenario


def timed(settings) -> tuple[float, float, int]:
    with tempfile.TemporaryDirectory() as tmp:
        wall, cpu = time.perf_counter(), time.process_time()
        truth = write_scenario(tmp, settings)
        return time.perf_counter() - wall, time.process_time() - cpu, len(truth["maps"])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--resolution", default="standard")
    parser.add_argument("--cycles", type=int, default=4)
    parser.add_argument("--seed", type=int, default=2051)
    parser.add_argument("--preset", default="hard")
    args = parser.parse_args()
    rows = {}
    for name, preset in (("default", None), (args.preset, args.preset)):
        rows[name] = timed(settings_for(args.resolution, seed=args.seed, cycles=args.cycles, preset=preset))
        wall, cpu, maps = rows[name]
        print(f"{name:>8}: {wall:7.1f} s wall, {cpu:7.1f} s CPU, {maps} maps")
    base, hard = rows["default"], rows[args.preset]
    print(f"ratio {args.preset}/default: {hard[0] / base[0]:.2f} (wall), {hard[1] / base[1]:.2f} (CPU); target < 2")


if __name__ == "__main__":
    main()
