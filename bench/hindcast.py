"""Hindcast coverage of the forecast over a long invented scenario.

For every cycle after the first three, forecast its amplitude from the maps up to two
years before the minimum that starts it, and compare with the scenario's truth. Prints
each hindcast and the fraction of cycles whose truth falls inside the 95 % (and 68 %)
range: an honest uncertainty covers the truth in about 95 % (68 %) of cycles.

    python bench/hindcast.py [--cycles 16] [--seed 77] [--members 150]
"""

from __future__ import annotations

import argparse
import tempfile
import time

import numpy as np

import polarflux as pf
from polarflux.forecast import forecast_from_record
from polarflux.synthetic import settings_for, write_scenario


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cycles", type=int, default=16)
    parser.add_argument("--seed", type=int, default=77)
    parser.add_argument("--members", type=int, default=150)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        start_clock = time.perf_counter()
        truth = write_scenario(tmp, settings_for("low", cycles=args.cycles, seed=args.seed))
        record = pf.measure_archive([f"{tmp}/maps"])
        t, v = pf.read_sunspots(f"{tmp}/sunspots.csv")
        print(f"scenario: {args.cycles} cycles at low resolution, {record.sizes['time']} maps, "
              f"{time.perf_counter() - start_clock:.0f} s")
        start = 2051.0
        targets = truth["cycles"][3:] + [truth["next_cycle"]]
        in95 = in68 = 0
        errors = []
        for target in targets:
            r = forecast_from_record(record, t, v, as_of=start + target["start_years"] - 2.0,
                                     members=args.members, seed=target["cycle"])
            a = r["forecast"]["amplitude"]
            errors.append(a["median"] - target["amplitude"])
            in95 += a["low95"] <= target["amplitude"] <= a["high95"]
            in68 += a["low68"] <= target["amplitude"] <= a["high68"]
            print(f"cycle {target['cycle']:>2}: truth {target['amplitude']:6.1f}  forecast {a['median']:6.1f} "
                  f"(68 %: {a['low68']:6.1f}-{a['high68']:6.1f}; 95 %: {a['low95']:6.1f}-{a['high95']:6.1f}) "
                  f"on {len(r['calibration']['pairs'])} calibration cycles")
        n = len(targets)
        print(f"coverage: 95 % range {in95}/{n} = {in95 / n:.2f} (target >= 0.90); 68 % range {in68}/{n} = "
              f"{in68 / n:.2f}; rms error {np.sqrt(np.mean(np.square(errors))):.1f}")


if __name__ == "__main__":
    main()
