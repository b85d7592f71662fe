"""Speed of the surface flux transport model, measured in one run.

Prints:
  * the time of an 11-year, 1-day-step 2-D run on a 180 x 360 grid (target: under 5 s);
  * the ratio of one model step (a Stepper step, timed over 1000 steps) to a naive
    reference step made of one real FFT pair over the grid plus one LAPACK zgtsv call
    per longitude mode (target: at most 0.5);
  * the time of a 1000-member axisymmetric ensemble over 11 years (target: under 30 s).

    python bench/transport.py [--members 1000] [--years 11]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from scipy.linalg import lapack

import polarflux as pf


def naive_step_seconds(nlat: int, nlon: int, repeats: int = 200) -> float:
    rng = np.random.default_rng(0)
    field = rng.normal(size=(nlat, nlon))
    nmodes = nlon // 2 + 1
    dl = np.full(nlat - 1, -0.1 + 0.0j)
    d = np.full(nlat, 1.2 + 0.01j)
    du = np.full(nlat - 1, -0.1 + 0.0j)
    start = time.perf_counter()
    for _ in range(repeats):
        spectrum = np.fft.rfft(field, axis=1)
        for m in range(nmodes):
            lapack.zgtsv(dl, d, du, spectrum[:, m])
        field = np.fft.irfft(spectrum, n=nlon, axis=1)
    return (time.perf_counter() - start) / repeats


def initial(lat, lon):
    return 5.0 * np.sin(np.deg2rad(lat)) ** 7 + 2.0 * np.cos(np.deg2rad(lon)) * np.cos(np.deg2rad(lat))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--members", type=int, default=1000)
    parser.add_argument("--years", type=float, default=11.0)
    args = parser.parse_args()

    model = pf.FluxTransport(nlat=180, nlon=360)
    regions = [pf.BipolarRegion.with_joy_tilt(0.1 * k, 15.0 * (-1) ** k, 37.0 * k, 1e22) for k in range(50)]
    start = time.perf_counter()
    out = model.run(initial, years=args.years, step_days=1.0, sources=regions)
    full = time.perf_counter() - start
    nsteps = int(round(args.years * 365.25))
    stepper = model.stepper(initial, 1.0)
    stepper.step(50)  # warm up
    start = time.perf_counter()
    stepper.step(1000)
    per_step = (time.perf_counter() - start) / 1000  # the step alone, as the reference is a step alone
    naive = naive_step_seconds(180, 360)
    print(f"2-D run, 180 x 360, {args.years:g} years of 1-day steps ({nsteps} steps, {len(out.time)} frames, "
          f"50 regions): {full:.2f} s (target < 5 s), {1000 * full / nsteps:.3f} ms per step all included")
    print(f"one model step: {1000 * per_step:.3f} ms; naive FFT pair + zgtsv per mode: {1000 * naive:.3f} ms; "
          f"ratio {per_step / naive:.2f} (target <= 0.5)")

    rng = np.random.default_rng(1)
    k = args.members
    ensemble = pf.TransportEnsemble(nlat=180, diffusivity=rng.uniform(250, 600, k),
                                    flow_speed=rng.uniform(8, 15, k), decay_time=rng.uniform(5, 10, k))
    lat = np.linspace(-89.5, 89.5, 180)
    start = time.perf_counter()
    ensemble.run(5.0 * np.sin(np.deg2rad(lat)) ** 7, years=args.years, step_days=1.0)
    print(f"axisymmetric ensemble, {k} members, 180 rows, {args.years:g} years of 1-day steps: "
          f"{time.perf_counter() - start:.2f} s (target < 30 s)")


if __name__ == "__main__":
    main()
