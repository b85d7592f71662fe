"""Archive throughput and memory: maps per second serially and with --jobs 2, and peak memory.

Writes N invented maps of 360 x 180 (float32, sine latitude), then times
`polarflux measure` on them in fresh processes with a fresh ledger each time:
serially (--jobs 1) and with --jobs 2, printing maps per second and the speed-up
(target: at least 1.7 on two cores). Peak memory is the largest resident size of
any process of the run (the command or one of its workers; getrusage), shown at
two archive sizes (target: under 500 MB whatever the size).

    python bench/archive.py [--maps 2000] [--small 500]
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

import polarflux as pf
from polarflux.maps import write_map


def make_maps(folder: Path, n: int) -> None:
    rng = np.random.default_rng(0)
    folder.mkdir(parents=True, exist_ok=True)
    for k in range(n):
        br = rng.normal(0.0, 5.0, (180, 360)).astype(np.float32)
        m = pf.SynopticMap.from_array(br, carrington_rotation=3000 + k, time="2060-01-01T00:00:00")
        write_map(m, folder / f"b{k:05d}.fits")


def run(folder: Path, jobs: int, work: Path, tag: str) -> tuple[float, float]:
    """Seconds and the peak resident size (MB) of one measuring run in a fresh process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    start = time.perf_counter()
    done = subprocess.run(
        [sys.executable, "-m", "polarflux", "measure", str(folder), "--jobs", str(jobs), "--quiet",
         "--ledger", str(work / f"{tag}.sqlite"), "--out", str(work / f"{tag}.csv")],
        capture_output=True, text=True)
    seconds = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(done.stderr)
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss  # KB on Linux; the largest so far
    return seconds, max(peak, before) / 1024.0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--maps", type=int, default=2000)
    parser.add_argument("--small", type=int, default=500)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="polarflux-archive-") as tmp:
        work = Path(tmp)
        small, large = work / "small", work / "large"
        make_maps(small, args.small)
        make_maps(large, args.maps)
        t_small, peak_small = run(small, 1, work, "small")
        t1, peak1 = run(large, 1, work, "serial")
        t2, peak2 = run(large, 2, work, "jobs2")
        print(f"{args.maps} maps of 360 x 180: serial {args.maps / t1:.0f} maps/s ({t1:.1f} s), "
              f"--jobs 2 {args.maps / t2:.0f} maps/s ({t2:.1f} s); speed-up {t1 / t2:.2f} (target >= 1.7)")
        print(f"peak memory of the largest process: {peak_small:.0f} MB at {args.small} maps, "
              f"{peak1:.0f} MB at {args.maps} maps serial, {peak2:.0f} MB with --jobs 2 (target < 500 MB)")
        print("(getrusage keeps the largest child so far: each figure is at least the one before it)")


if __name__ == "__main__":
    main()
