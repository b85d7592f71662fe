"""Truth and tables of the invented scenario: closed-form truth integrals, truth.json, CSV files.

Private to :mod:`polarflux.synthetic`. The truth integrals are written here, apart
from :mod:`polarflux.measure`, so that checks of the measurement against the
truth stay independent.
"""

from __future__ import annotations

import csv
import math
from dataclasses import asdict
from pathlib import Path

import numpy as np
from astropy import units as u
from astropy.time import Time

from ._io import atomic_path
from .maps import quiet_time_warnings
from .transport import BipolarRegion

NETWORK = "Meridian Synoptic Network (invented)"
TRUTH_CAP_DEG = 60.0


def truth_measures(profile: np.ndarray, lat_edges: np.ndarray, cap_deg: float = TRUTH_CAP_DEG) -> dict:
    """North and south polar-cap mean fields and axial dipole (G) of a longitude-averaged radial field.

    Closed-form weights on cells between latitudes a < b (x = sin latitude, edges
    at +/-90 degrees exactly +/-1): the cap poleward of c holds the fraction
    (min(x_b, 1) - max(x_a, sin c))+ of a row in d(sin latitude), and its area is
    1 - sin c; the axial dipole (3 / 4 pi) * integral of Br sin(latitude) dOmega is
    (3 / 4) sum_j B_j (x_b^2 - x_a^2). Written here, apart from the measurement
    code, so that checks of the measurement against the truth stay independent.

    References
    ----------
    Jackson, J. D. 1999, Classical Electrodynamics, 3rd ed., sec. 3.1 (Legendre
    expansion: the l = 1 coefficient of Br is (3/4 pi) integral of Br cos(theta) dOmega).
    """
    x = np.sin(np.radians(np.asarray(lat_edges, dtype=np.float64)))
    x[0], x[-1] = -1.0, 1.0
    low, high = x[:-1], x[1:]
    c = math.sin(math.radians(cap_deg))
    north = np.clip(high - np.maximum(low, c), 0.0, None)
    south = np.clip(np.minimum(high, -c) - low, 0.0, None)
    profile = np.asarray(profile, dtype=np.float64)
    return {"north_mean_field": float(profile @ north) / (1.0 - c),
            "south_mean_field": float(profile @ south) / (1.0 - c),
            "axial_dipole": 0.75 * float(profile @ (high**2 - low**2))}


def _write_text(path: Path, text: str, force: bool) -> None:
    with atomic_path(path, force=force) as tmp:
        tmp.write_text(text, encoding="utf-8")


def _write_series(path: Path, series) -> None:
    with atomic_path(path, force=True) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["carrington_rotation", "time", "years", "north_mean_field_g", "south_mean_field_g",
                         "axial_dipole_g"])
        writer.writerows(series)


def _write_regions(path: Path, regions: list[BipolarRegion], cycle_of: dict, start: str) -> None:
    """Every region: its date (and years from the start), place, leading flux (signed), size, tilt and cycle."""
    years = np.array([r.time for r in regions], dtype=np.float64)
    with quiet_time_warnings():
        dates = (Time(start, scale="utc") + years * 365.25 * u.day).utc.isot if years.size else []
    with atomic_path(path, force=True) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["date", "years", "latitude", "longitude", "flux_mx", "separation_deg", "tilt_deg", "cycle"])
        for date, r in zip(dates, regions, strict=True):
            writer.writerow([date[:10], f"{r.time:.5f}", f"{r.latitude:.3f}", f"{r.longitude:.3f}", f"{r.flux:.4e}",
                             f"{r.separation:.3f}", f"{r.tilt:.3f}", cycle_of[id(r)]])


def _monthly_sunspots(cycles, total_years: float):
    """Months (years from the start) and the clean total and northern sunspot numbers."""
    months = np.arange(0.5, total_years * 12.0, 1.0) / 12.0
    north = sum(c.north_share * c.rate(months) for c in cycles)
    return months, sum(c.rate(months) for c in cycles), north


def _write_sunspots(path: Path, cycles, settings, total_years: float) -> None:
    """Monthly sunspot numbers with noise: the total, and its northern and southern parts.

    The noisy total is split in the ratio of the clean hemispheric numbers, rounded
    to tenths so that north + south equals the total exactly as written.
    """
    rng = np.random.default_rng([settings.seed, 6])
    years, clean, clean_north = _monthly_sunspots(cycles, total_years)
    noisy = np.clip(clean * (1.0 + rng.normal(0.0, 0.12, clean.size)) + rng.normal(0.0, 4.0, clean.size), 0.0, None)
    share = np.divide(clean_north, clean, out=np.full(clean.size, 0.5), where=clean > 0)
    start = Time(settings.start, scale="utc")
    with quiet_time_warnings():
        dates = (start + years * 365.25 * u.day).utc.isot
    with atomic_path(path, force=True) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["date", "sunspot_number", "sunspot_number_north", "sunspot_number_south"])
        for date, value, part in zip(dates, noisy, share, strict=True):
            total = f"{value:.1f}"
            tenths = round(float(total) * 10)
            north = min(tenths, round(float(value) * part * 10))
            writer.writerow([date[:10], total, f"{north / 10:.1f}", f"{(tenths - north) / 10:.1f}"])


def _smooth_13(values: np.ndarray) -> np.ndarray:
    kernel = np.ones(13)
    kernel[0] = kernel[-1] = 0.5
    kernel /= kernel.sum()
    return np.convolve(values, kernel, mode="same")


def _truth(settings, cycles, series, starts, total_years, flux_scale, missing, numbers, written) -> dict:
    years_m, clean, _ = _monthly_sunspots(cycles, total_years)
    smooth = _smooth_13(clean)
    t = np.array([row[2] for row in series])
    north = np.array([row[3] for row in series])
    south = np.array([row[4] for row in series])
    dipole = np.array([row[5] for row in series])
    records = []
    for cycle in cycles[1:]:
        window = (years_m > cycle.start - 2.0) & (years_m < cycle.start + 2.0) & (years_m > 0.6) & (
            years_m < total_years - 0.6)
        minimum = float(years_m[window][np.argmin(smooth[window])]) if window.any() else None
        peak = cycle.peak_time()
        entry = {
            "cycle": cycle.number,
            "start_years": cycle.start,
            "amplitude": cycle.amplitude,
            "maximum_years": peak if peak < total_years else None,
            "minimum_years": minimum,
            "north_leading_polarity": cycle.north_leading,
            "precursor_dipole_g": cycle.precursor_dipole,
            "random_factor": cycle.factor,
            "north_share": cycle.north_share,
            "flow_speed_m_s": cycle.flow_speed,
        }
        if minimum is not None and t.size:
            entry["north_mean_field_at_minimum_g"] = float(np.interp(minimum, t, north))
            entry["south_mean_field_at_minimum_g"] = float(np.interp(minimum, t, south))
            entry["axial_dipole_at_minimum_g"] = float(np.interp(minimum, t, dipole))
        for name, values in (("north", north), ("south", south)):
            entry[f"{name}_reversal_years"] = _reversal(t, values, cycle.start + 1.0, cycle.start + 9.0)
        records.append(entry)
    return {
        "about": "truth of the invented polarflux scenario; nothing here is real data",
        "network": NETWORK,
        "start": settings.start,
        "years": total_years,
        "seed": settings.seed,
        "truth_measures": f"radial field; caps poleward of {TRUTH_CAP_DEG:g} degrees and the axial dipole, "
                          "closed-form weights on the model grid (polarflux.synthetic.truth_measures)",
        "precursor_relation": {
            "form": "amplitude[n+1] = reference_amplitude * (|axial dipole at start of n+1| / reference_dipole)"
                    "^exponent * exp(N(0, scatter))",
            "reference_amplitude": settings.reference_amplitude,
            "reference_dipole_g": settings.reference_dipole,
            "exponent": settings.precursor_exponent,
            "log_scatter": settings.precursor_scatter,
        },
        "transport": {"diffusivity_km2_s": settings.diffusivity, "flow_speed_m_s": settings.flow_speed,
                      "flow_cutoff_latitude_deg": settings.flow_cutoff_latitude,
                      "decay_time_years": settings.decay_time},
        "observation": settings.observation,
        "flux_scale": flux_scale,
        "cycles": records,
        "instruments": [asdict(i) for i in settings.instruments],
        "missing_rotations": sorted(int(numbers[i]) for i in missing),
        "maps": written,
    }


def _reversal(t: np.ndarray, values: np.ndarray, t_from: float, t_to: float) -> float | None:
    """Last sign change of a noise-free polar series within a window (the reversal), years."""
    inside = np.flatnonzero((t >= t_from) & (t <= t_to))
    if inside.size < 2:
        return None
    v = values[inside]
    changes = np.flatnonzero(np.sign(v[1:]) != np.sign(v[:-1]))
    if changes.size == 0:
        return None
    i = inside[changes[-1]]
    return float(t[i] + (t[i + 1] - t[i]) * values[i] / (values[i] - values[i + 1]))
