"""The invented demo scenario: a multi-cycle synoptic-map archive with a known truth.

An invented Sun in a future epoch (from 2051), observed by an invented network
(the "Meridian Synoptic Network", instruments MSN-A and MSN-B). Nothing here is
real data. The scenario is made in four parts:

1. Emergence. Each cycle's sunspot number follows the rise-and-decay shape of
   Hathaway, Wilson & Reichmann (1994, Sol. Phys. 151, 177),
   R(t) = a (t - t0)^3 / (exp((t - t0)^2 / b^2) - c), t in months, c = 0.71 and
   b = 27.12 + 25.15 / (1000 a)^(1/4) (coefficients recalled from memory; b ties the
   rise time to the amplitude, as the Waldmeier effect has it). Regions emerge
   at a rate proportional to R, at latitudes drifting toward the equator as
   28 exp(-(t - t0) / 90 months) degrees (Hathaway 2011, Sol. Phys. 273, 221;
   from memory) with a scatter of 4 degrees; fluxes are log-normal (the form of
   the sunspot-area distribution of Baumann & Solanki 2005, A&A 443, 1061;
   median and width our own); tilts follow Joy's law (0.5 |lat|, Li & Ulrich 2012)
   with a 10-degree scatter, reduced for strong cycles (tilt quenching: the mean
   tilt falls as cycles get stronger, Dasi-Espuig et al. 2010, A&A 518, A7); the
   leading polarity is opposite in the two hemispheres and alternates from cycle
   to cycle (Hale's law). Each cycle starts while the previous one still emerges
   near the equator.
2. Feedback. The amplitude of cycle n + 1 is the reference amplitude times the
   axial dipole that the transport model produced when cycle n + 1 starts (at
   minimum), divided by the reference dipole, times a log-normal random factor:
   the precursor relation holds with a known scatter. A short axisymmetric run of
   reference cycles first sets the flux scale so that a reference cycle leaves
   the reference dipole, and supplies the polar field the scenario starts from.
3. Transport. :class:`~polarflux.transport.FluxTransport` evolves the field (2-D).
4. Observation. Once per Carrington rotation the field is remapped onto each
   active instrument's sine-latitude grid (conserving flux), scaled by the
   instrument's flux scale, and given line-of-sight noise divided by
   cos(latitude) (the maps hold radial field, so the noise grows toward the
   poles); the pole tilted away from the observer (from the B0 angle,
   ``sunpy.coordinates.sun.B0``) loses its last rows; a few rotations are missing.

Outputs (``write_scenario``): ``maps/<instrument>/*.fits``, ``truth.json`` (cycles,
minima, maxima, amplitudes, reversals, polar fields at minima, the precursor
relation), ``truth_series.csv`` (noise-free polar fields per rotation),
``sunspots.csv`` (monthly sunspot number: ``date,sunspot_number``) and
``scenario.toml`` (the settings).
"""

from __future__ import annotations

import csv
import json
import math
import os
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path

import numpy as np
from astropy import units as u
from astropy.time import Time

from ._io import atomic_path
from ._version import __version__
from .errors import SettingsError
from .geometry import regrid_conservative
from .maps import SynopticMap, quiet_time_warnings, write_map
from .measure import profile_measures
from .transport import BipolarRegion, FluxTransport, joy_tilt

__all__ = ["Instrument", "ScenarioSettings", "write_scenario", "settings_for", "cycle_shape", "NETWORK", "RESOLUTIONS"]

NETWORK = "Meridian Synoptic Network (invented)"
_HWR_C = 0.71
_MONTH = 365.25 / 12.0  # days


@dataclass(frozen=True)
class Instrument:
    """An invented magnetograph: its map grid, flux scale, noise and years of operation."""

    name: str
    nlat: int
    nlon: int
    scale: float
    noise_g: float
    start_year: float
    end_year: float


@dataclass(frozen=True)
class ScenarioSettings:
    """Everything that makes a scenario; the same settings give the same files."""

    seed: int = 2051
    cycles: int = 4
    start: str = "2051-01-01T00:00:00"
    duration_years: float | None = None  # None: until the last cycle's end
    model_nlat: int = 180
    model_nlon: int = 360
    step_days: float = 1.0
    diffusivity: float = 250.0
    flow_speed: float = 11.0
    decay_time: float | None = 10.0
    reference_amplitude: float = 140.0
    reference_dipole: float = 2.5
    precursor_scatter: float = 0.10
    mean_period: float = 11.0
    period_scatter: float = 0.6
    regions_per_unit_day: float = 0.012
    flux_median: float = 2e21
    flux_sigma_ln: float = 0.9
    latitude_scatter: float = 4.0
    tilt_scatter: float = 10.0
    missing_rotations: int = 4
    hidden_pole_limit: float = 82.0
    instruments: tuple[Instrument, ...] = field(
        default=(
            Instrument("MSN-A", 90, 180, 1.0, 3.0, 0.0, 26.0),
            Instrument("MSN-B", 180, 360, 0.85, 2.0, 22.0, 1e9),
        )
    )

    def to_toml(self) -> str:
        lines = ["# polarflux synthetic scenario settings (an invented Sun; no real data)"]
        plain = {k: v for k, v in asdict(self).items() if k != "instruments"}
        for key, value in plain.items():
            if value is None:
                lines.append(f'{key} = "none"')
            else:
                lines.append(f"{key} = {json.dumps(value)}")
        for inst in self.instruments:
            lines.append("\n[[instruments]]")
            lines.extend(f"{k} = {json.dumps(v)}" for k, v in asdict(inst).items())
        return "\n".join(lines) + "\n"

    @classmethod
    def from_toml(cls, path: str | os.PathLike) -> ScenarioSettings:
        import tomllib

        with open(path, "rb") as handle:
            data = tomllib.load(handle)
        known = {f for f in cls.__dataclass_fields__}
        unknown = sorted(set(data) - known)
        if unknown:
            raise SettingsError(f"{path}: unknown scenario setting(s) {', '.join(unknown)}")
        if "instruments" in data:
            data["instruments"] = tuple(Instrument(**i) for i in data["instruments"])
        for key in ("duration_years", "decay_time"):
            if data.get(key) == "none":
                data[key] = None
        return cls(**data)


# --------------------------------------------------------------------------- cycles


def _hwr_b(a: float) -> float:
    return 27.12 + 25.15 / (1000.0 * a) ** 0.25


def cycle_shape(months: np.ndarray, a: float) -> np.ndarray:
    """Hathaway, Wilson & Reichmann (1994) sunspot-number shape; zero before the start."""
    x = np.clip(np.asarray(months, dtype=np.float64), 0.0, None)
    b = _hwr_b(a)
    with np.errstate(over="ignore"):
        value = a * x**3 / (np.exp((x / b) ** 2) - _HWR_C)
    return np.where(x > 0, value, 0.0)


def _shape_for_amplitude(amplitude: float) -> float:
    """The HWR parameter a whose curve peaks at ``amplitude``."""
    months = np.linspace(0.0, 200.0, 4001)
    low, high = 1e-5, 1.0
    for _ in range(80):
        mid = math.sqrt(low * high)
        if cycle_shape(months, mid).max() < amplitude:
            low = mid
        else:
            high = mid
    return math.sqrt(low * high)


@dataclass
class _Cycle:
    number: int
    start: float  # years from the scenario start
    amplitude: float
    a: float
    north_leading: int  # sign of the leading polarity in the north
    precursor_dipole: float | None = None
    factor: float = 1.0

    def rate(self, years: np.ndarray) -> np.ndarray:
        return cycle_shape((np.asarray(years) - self.start) * 12.0, self.a)

    def peak_time(self) -> float:
        months = np.linspace(0.0, 200.0, 20001)
        return self.start + months[int(np.argmax(cycle_shape(months, self.a)))] / 12.0


def _quench(amplitude: float, reference: float) -> float:
    """Tilt factor: 1 for the reference amplitude, smaller for stronger cycles."""
    return 2.0 / (1.0 + amplitude / reference)


def _cycle_regions(cycle: _Cycle, settings: ScenarioSettings, rng: np.random.Generator, t_from: float,
                   t_to: float, flux_scale: float) -> list[BipolarRegion]:
    """The regions a cycle emerges between two times, one Poisson draw per day."""
    days = np.arange(math.ceil(t_from * 365.25), math.floor(t_to * 365.25))
    if days.size == 0:
        return []
    years = days / 365.25
    counts = rng.poisson(settings.regions_per_unit_day * cycle.rate(years))
    quench = _quench(cycle.amplitude, settings.reference_amplitude)
    regions = []
    for year, count in zip(years[counts > 0], counts[counts > 0], strict=True):
        for _ in range(int(count)):
            months = (year - cycle.start) * 12.0
            mean_lat = 28.0 * math.exp(-months / 90.0)
            lat = abs(mean_lat + rng.normal(0.0, settings.latitude_scatter))
            lat = min(max(lat, 2.0), 45.0)
            hemisphere = 1 if rng.random() < 0.5 else -1
            flux = settings.flux_median * math.exp(rng.normal(0.0, settings.flux_sigma_ln)) * flux_scale
            separation = float(np.clip(4.0 * (flux / flux_scale / 3e21) ** 0.3, 2.0, 12.0))
            tilt = joy_tilt(lat) * quench + rng.normal(0.0, settings.tilt_scatter)
            leading = cycle.north_leading * hemisphere
            regions.append(BipolarRegion(
                time=float(year + rng.random() / 365.25), latitude=hemisphere * lat,
                longitude=float(rng.uniform(0.0, 360.0)), flux=leading * flux, separation=separation,
                tilt=float(tilt), width=3.0))
    regions.sort(key=lambda r: r.time)
    return regions


# --------------------------------------------------------------------------- calibration


def _model(settings: ScenarioSettings, axisymmetric: bool) -> FluxTransport:
    return FluxTransport(nlat=settings.model_nlat, nlon=settings.model_nlon, diffusivity=settings.diffusivity,
                         flow_speed=settings.flow_speed, decay_time=settings.decay_time,
                         axisymmetric=axisymmetric)


def _calibrate(settings: ScenarioSettings) -> tuple[float, np.ndarray]:
    """Flux scale that makes reference cycles leave the reference dipole, and that minimum's profile.

    Three reference cycles of the reference amplitude are run axisymmetrically from
    zero field; the dipole at the third minimum sets the scale (transport is linear
    in the field). Returns the scale and the scaled latitude profile at that minimum,
    signed so that its north polar field is positive.
    """
    rng = np.random.default_rng([settings.seed, 1])
    model = _model(settings, axisymmetric=True)
    stepper = model.stepper(np.zeros(settings.model_nlat), settings.step_days)
    a = _shape_for_amplitude(settings.reference_amplitude)
    cycles = [_Cycle(k, k * settings.mean_period, settings.reference_amplitude, a, (-1) ** k) for k in range(3)]
    end = 3 * settings.mean_period
    regions = []
    for cycle in cycles:
        regions += _cycle_regions(cycle, settings, rng, cycle.start, end, 1.0)
    regions.sort(key=lambda r: r.time)
    _advance(stepper, regions, end)
    profile = stepper.field()[:, 0]
    dipole = float(profile_measures(profile, model.grid.lat_edges)["axial_dipole"])
    if dipole == 0.0:
        raise SettingsError("scenario calibration produced no dipole; check the emergence settings")
    scale = settings.reference_dipole / abs(dipole)
    return scale, profile * scale * (1.0 if profile[-1] > 0 else -1.0)


def _advance(stepper, regions: list[BipolarRegion], until_years: float, start_index: int = 0) -> int:
    """Step until ``until_years``, depositing the regions that emerge on the way; return the next index."""
    index = start_index
    step_years = stepper.step_days / 365.25
    while stepper.time + 0.5 * step_years < until_years:
        index = stepper.step_with_regions(regions, index)
    return index


# --------------------------------------------------------------------------- scenario


def _rotations(settings: ScenarioSettings, years: float):
    """Carrington rotation numbers and mid-rotation times (years from the start) of the scenario."""
    from sunpy.coordinates.sun import carrington_rotation_number, carrington_rotation_time

    with quiet_time_warnings():
        start = Time(settings.start, scale="utc")
        first = int(math.floor(float(carrington_rotation_number(start)))) + 1
        count = int(years * 365.25 / 27.2753) + 2
        numbers = np.arange(first, first + count)
        mids = carrington_rotation_time(numbers + 0.5)
        offsets = (mids - start).to_value("day") / 365.25
    keep = (offsets >= 0) & (offsets <= years)
    return numbers[keep], offsets[keep], mids[keep]


def _observe(field_model: np.ndarray, model_grid, inst: Instrument, rng: np.random.Generator):
    """One instrument's map of the model field: remap, scale and noise (the hidden pole is masked by the caller)."""
    m = SynopticMap.from_array(np.zeros((inst.nlat, inst.nlon)))
    br = regrid_conservative(field_model, model_grid.lat_edges, model_grid.lon_edges, m.lat_edges, m.lon_edges)
    br *= inst.scale
    if inst.noise_g > 0:
        cosine = np.maximum(np.cos(np.deg2rad(m.lat)), 0.1)
        br += rng.normal(0.0, inst.noise_g, br.shape) / cosine[:, None]
    return br, m


def write_scenario(out: str | os.PathLike, settings: ScenarioSettings | None = None, progress=None,
                   force: bool = False) -> dict:
    """Generate the scenario into folder ``out`` and return its truth (also written as truth.json).

    ``progress(done, total)`` is called once per rotation. An existing ``truth.json``
    is not overwritten unless ``force``.
    """
    with quiet_time_warnings():
        return _write_scenario(Path(out), settings or ScenarioSettings(), progress, force)


def _write_scenario(out: Path, settings: ScenarioSettings, progress, force: bool) -> dict:
    from sunpy.coordinates.sun import B0

    if settings.cycles < 1:
        raise SettingsError(f"cycles={settings.cycles} must be at least 1")
    if (out / "truth.json").exists() and not force:
        raise SettingsError(f"{out}: holds a scenario already; pass force to replace it")
    out.mkdir(parents=True, exist_ok=True)

    rng_cycles = np.random.default_rng([settings.seed, 2])
    rng_regions = np.random.default_rng([settings.seed, 3])
    rng_noise = np.random.default_rng([settings.seed, 4])
    rng_missing = np.random.default_rng([settings.seed, 5])

    flux_scale, start_profile = _calibrate(settings)
    periods = np.clip(rng_cycles.normal(settings.mean_period, settings.period_scatter, settings.cycles + 1),
                      settings.mean_period - 1.2, settings.mean_period + 1.2)
    starts = np.concatenate([[-periods[0]], np.cumsum(np.concatenate([[0.0], periods[1:]]))])
    # starts[0] is the previous cycle (its tail overlaps the first minimum); starts[k] cycle k
    total_years = float(starts[-1]) if settings.duration_years is None else float(settings.duration_years)
    if not total_years > 0:
        raise SettingsError("the scenario must last a positive number of years")

    model = _model(settings, axisymmetric=False)
    grid = model.grid
    # Cycle 1's northern leading polarity is positive: it reverses a positive north polar field.
    stepper = model.stepper(np.repeat(start_profile[:, None], grid.nlon, axis=1), settings.step_days)
    a_ref = _shape_for_amplitude(settings.reference_amplitude)
    cycles = [_Cycle(0, float(starts[0]), settings.reference_amplitude, a_ref, -1)]
    regions = _cycle_regions(cycles[0], settings, rng_regions, 0.0, total_years + 1.0, flux_scale)
    cycle_of = {id(r): 0 for r in regions}
    numbers, offsets, mids = _rotations(settings, total_years)
    b0 = np.atleast_1d(B0(mids).to_value("deg"))
    interior = np.arange(1, max(1, len(numbers) - 1))
    missing = set(rng_missing.choice(interior, size=min(settings.missing_rotations, interior.size),
                                     replace=False).tolist()) if interior.size else set()
    series, written, next_region = [], [], 0
    next_cycle = 1

    for k, (number, t_map) in enumerate(zip(numbers, offsets, strict=True)):
        # cycles that start before this map: set their amplitude from the dipole at their start
        while next_cycle <= settings.cycles and starts[next_cycle] <= t_map:
            next_region = _advance(stepper, regions, float(starts[next_cycle]), next_region)
            dipole = float(profile_measures(stepper.field().mean(axis=1), grid.lat_edges)["axial_dipole"])
            factor = math.exp(rng_cycles.normal(0.0, settings.precursor_scatter))
            amplitude = settings.reference_amplitude * abs(dipole) / settings.reference_dipole * factor
            cycle = _Cycle(next_cycle, float(starts[next_cycle]), amplitude, _shape_for_amplitude(amplitude),
                           (-1) ** (next_cycle + 1), precursor_dipole=dipole, factor=factor)
            cycles.append(cycle)
            new = _cycle_regions(cycle, settings, rng_regions, stepper.time, total_years + 1.0, flux_scale)
            cycle_of.update({id(r): cycle.number for r in new})
            regions = regions[:next_region] + sorted(regions[next_region:] + new, key=lambda r: r.time)
            next_cycle += 1
        next_region = _advance(stepper, regions, float(t_map), next_region)
        truth_field = stepper.field()
        measures = profile_measures(truth_field.mean(axis=1), grid.lat_edges)
        series.append((int(number), mids[k].utc.isot, float(t_map), float(measures["north_mean_field"]),
                       float(measures["south_mean_field"]), float(measures["axial_dipole"])))
        if k not in missing:
            for inst in settings.instruments:
                if inst.start_year <= t_map < inst.end_year:
                    written.append(_write_observation(out, inst, truth_field, grid, float(b0[k]), int(number),
                                                      mids[k], settings, rng_noise))
        if progress is not None:
            progress(k + 1, len(numbers))

    truth = _truth(settings, cycles, series, starts, total_years, flux_scale, missing, numbers, written)
    truth["periods_years"] = [float(p) for p in np.diff(starts)]
    if settings.duration_years is None:
        # the cycle the archive ends before: its amplitude is already decided by the dipole now
        next_region = _advance(stepper, regions, float(starts[-1]), next_region)
        dipole = float(profile_measures(stepper.field().mean(axis=1), grid.lat_edges)["axial_dipole"])
        factor = math.exp(rng_cycles.normal(0.0, settings.precursor_scatter))
        amplitude = settings.reference_amplitude * abs(dipole) / settings.reference_dipole * factor
        peak = _Cycle(settings.cycles + 1, float(starts[-1]), amplitude, _shape_for_amplitude(amplitude), 1)
        truth["next_cycle"] = {"cycle": settings.cycles + 1, "start_years": float(starts[-1]), "amplitude": amplitude,
                               "maximum_years": peak.peak_time(), "precursor_dipole_g": dipole,
                               "random_factor": factor}
    _write_regions(out / "regions.csv", regions[:next_region], cycle_of)
    _write_text(out / "truth.json", json.dumps(truth, indent=1), force=True)
    _write_series(out / "truth_series.csv", series)
    _write_sunspots(out / "sunspots.csv", cycles, settings, total_years)
    _write_text(out / "scenario.toml", settings.to_toml(), force=True)
    return truth


def _write_observation(out: Path, inst: Instrument, truth_field, grid, b0: float, number: int, mid: Time,
                       settings: ScenarioSettings, rng: np.random.Generator) -> str:
    br, m = _observe(truth_field, grid, inst, rng)
    # The pole tilted away from the observer (B0 < 0: the north) is poorly seen.
    north_limit = settings.hidden_pole_limit + b0
    south_limit = settings.hidden_pole_limit - b0
    br[m.lat > north_limit] = np.nan
    br[m.lat < -south_limit] = np.nan
    mapped = SynopticMap.from_array(br, carrington_rotation=number, time=mid, instrument=inst.name)
    folder = out / "maps" / inst.name
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"{inst.name.lower()}_cr{number}.fits"
    extra = {"TELESCOP": NETWORK, "OBSERVER": "invented", "CONTENT": "synoptic map of radial field (synthetic)",
             "ORIGIN": f"polarflux {__version__} synthetic scenario, seed {settings.seed}"}
    write_map(mapped, path, force=True, extra=extra)
    return str(path.relative_to(out))


def _write_text(path: Path, text: str, force: bool) -> None:
    with atomic_path(path, force=force) as tmp:
        tmp.write_text(text, encoding="utf-8")


def _write_series(path: Path, series) -> None:
    with atomic_path(path, force=True) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["carrington_rotation", "time", "years", "north_mean_field_g", "south_mean_field_g",
                         "axial_dipole_g"])
        writer.writerows(series)


def _write_regions(path: Path, regions: list[BipolarRegion], cycle_of: dict) -> None:
    with atomic_path(path, force=True) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["years", "latitude", "longitude", "flux_mx", "separation_deg", "tilt_deg", "cycle"])
        for r in regions:
            writer.writerow([f"{r.time:.5f}", f"{r.latitude:.3f}", f"{r.longitude:.3f}", f"{r.flux:.4e}",
                             f"{r.separation:.3f}", f"{r.tilt:.3f}", cycle_of[id(r)]])


def _monthly_sunspots(cycles, total_years: float):
    months = np.arange(0.5, total_years * 12.0, 1.0) / 12.0
    return months, sum(c.rate(months) for c in cycles)


def _write_sunspots(path: Path, cycles, settings: ScenarioSettings, total_years: float) -> None:
    rng = np.random.default_rng([settings.seed, 6])
    years, clean = _monthly_sunspots(cycles, total_years)
    noisy = np.clip(clean * (1.0 + rng.normal(0.0, 0.12, clean.size)) + rng.normal(0.0, 4.0, clean.size), 0.0, None)
    start = Time(settings.start, scale="utc")
    with quiet_time_warnings():
        dates = (start + years * 365.25 * u.day).utc.isot
    with atomic_path(path, force=True) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["date", "sunspot_number"])
        for date, value in zip(dates, noisy, strict=True):
            writer.writerow([date[:10], f"{value:.1f}"])


def _smooth_13(values: np.ndarray) -> np.ndarray:
    kernel = np.ones(13)
    kernel[0] = kernel[-1] = 0.5
    kernel /= kernel.sum()
    return np.convolve(values, kernel, mode="same")


def _truth(settings, cycles, series, starts, total_years, flux_scale, missing, numbers, written) -> dict:
    years_m, clean = _monthly_sunspots(cycles, total_years)
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
        "precursor_relation": {
            "form": "amplitude[n+1] = reference_amplitude * |axial dipole at start of n+1| / reference_dipole "
                    "* exp(N(0, scatter))",
            "reference_amplitude": settings.reference_amplitude,
            "reference_dipole_g": settings.reference_dipole,
            "log_scatter": settings.precursor_scatter,
        },
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


RESOLUTIONS = {
    # model grid, then each instrument's (nlat, nlon)
    "low": ((90, 180), ((60, 120), (90, 180))),
    "standard": ((180, 360), ((90, 180), (180, 360))),
    "high": ((360, 720), ((180, 360), (360, 720))),
}


def settings_for(resolution: str = "standard", **changes) -> ScenarioSettings:
    """Default settings at one of the :data:`RESOLUTIONS`, with other fields changed."""
    if resolution not in RESOLUTIONS:
        raise SettingsError(f"resolution {resolution!r} is not one of {', '.join(RESOLUTIONS)}")
    (nlat, nlon), grids = RESOLUTIONS[resolution]
    base = ScenarioSettings()
    instruments = tuple(replace(i, nlat=g[0], nlon=g[1]) for i, g in zip(base.instruments, grids, strict=True))
    return replace(base, model_nlat=nlat, model_nlon=nlon, instruments=instruments, **changes)
