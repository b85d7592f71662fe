"""Time per map of read_map + measure_caps + axial_dipole, as a ratio to a plain read.

The reference is ``astropy.io.fits.getdata(path)`` plus one full pass over the data
(a sum), measured in the same run on the same files, so the ratio is what the
measurement costs on top of just reading the pixels. Target: at most 1.3.

The two are timed in turns, a pass over all maps each, the order alternating from
one repeat to the next, so that both see the same machine load. Three ratios are
printed: the median of the per-repeat ratios (each from two passes a fraction of
a second apart), the ratio of the medians and the ratio of the minima; each for
the wall clock and for the CPU time of the process (which time spent waiting for
a busy shared machine's cores does not count). ``--checksum`` writes the maps
with CHECKSUM/DATASUM, which the reader then verifies (astropy's ``getdata`` does
not): compare its ``read_map`` line with a run without it for the cost.

    python bench/measure.py [--maps 20] [--nlat 1440] [--nlon 3600] [--repeats 9] [--checksum]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np
from astropy.io import fits

import polarflux as pf
from polarflux.maps import write_map


def make_maps(folder: Path, n: int, nlat: int, nlon: int, checksum: bool = False) -> list[Path]:
    rng = np.random.default_rng(0)
    paths = []
    for k in range(n):
        br = rng.normal(0.0, 10.0, (nlat, nlon)).astype(np.float32)
        br[: nlat // 40] = np.nan  # a missing polar strip, as real maps have
        m = pf.SynopticMap.from_array(br, carrington_rotation=2400 + k, time="2040-01-01")
        path = Path(write_map(m, folder / f"bench_{k:03d}.fits", dtype=np.float32))
        if checksum:
            with fits.open(path) as hdul:
                hdul.writeto(path, checksum=True, overwrite=True)
        paths.append(path)
    return paths


def plain(path: Path) -> float:
    data = fits.getdata(path)
    return float(np.sum(data))


def polar(path: Path) -> float:
    m = pf.read_map(path)
    caps = pf.measure_caps(m, 60)
    return caps.north.signed_flux.value + pf.axial_dipole(m).value


def time_each(func, paths) -> tuple[float, float]:
    """Seconds per map of ``func``: wall clock, and CPU time of this process."""
    start, cpu = time.perf_counter(), time.process_time()
    for p in paths:
        func(p)
    return (time.perf_counter() - start) / len(paths), (time.process_time() - cpu) / len(paths)


def ratios(ref: list[float], ours: list[float]) -> str:
    paired = statistics.median(b / a for a, b in zip(ref, ours, strict=True))
    return (f"{paired:.2f} median of the repeats' ratios, {statistics.median(ours) / statistics.median(ref):.2f} "
            f"of the medians, {min(ours) / min(ref):.2f} of the minima")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--maps", type=int, default=20)
    parser.add_argument("--nlat", type=int, default=1440)
    parser.add_argument("--nlon", type=int, default=3600)
    parser.add_argument("--repeats", type=int, default=9)
    parser.add_argument("--checksum", action="store_true", help="maps carry CHECKSUM/DATASUM (verified by read_map)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="polarflux-bench-") as tmp:
        paths = make_maps(Path(tmp), args.maps, args.nlat, args.nlon, args.checksum)
        time_each(plain, paths)  # warm the page cache
        ref, ours, reads = [], [], []
        for k in range(args.repeats):  # interleaved, so both see the same machine load
            if k % 2:
                ours.append(time_each(polar, paths))
                ref.append(time_each(plain, paths))
            else:
                ref.append(time_each(plain, paths))
                ours.append(time_each(polar, paths))
            reads.append(time_each(pf.read_map, paths))
        sums = "with CHECKSUM/DATASUM verified" if args.checksum else "without checksums"
        print(f"maps: {args.maps} of {args.nlon} x {args.nlat} float32 ({sums}), repeats: {args.repeats}")
        print(f"{'ms per map, median (min)':42s}{'wall clock':>16s}{'CPU time':>16s}")
        for name, runs in (("getdata + one pass", ref), ("read_map + measure_caps + axial_dipole", ours),
                           ("read_map alone", reads)):
            cells = [f"{1000 * statistics.median(x):.2f} ({1000 * min(x):.2f})" for x in zip(*runs, strict=True)]
            print(f"{name + ':':42s}{cells[0]:>16s}{cells[1]:>16s}")
        for label, index in (("wall clock", 0), ("CPU time", 1)):
            print(f"ratio, {label}: {ratios([x[index] for x in ref], [x[index] for x in ours])} (target <= 1.3)")


if __name__ == "__main__":
    main()
