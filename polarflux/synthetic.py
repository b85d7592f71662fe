"""Invented worlds: multi-cycle synoptic-map archives with a known truth, from the demo's to hard ones.

An invented Sun in a future epoch (from 2051), observed by an invented network
(the "Meridian Synoptic Network", instruments MSN-A and MSN-B). Nothing here is
real data. A scenario is made in four parts:

1. Emergence. Each cycle's sunspot number follows the rise-and-decay shape of
   Hathaway, Wilson & Reichmann (1994, Sol. Phys. 151, 177); regions emerge at a
   rate proportional to it, drifting toward the equator, with log-normal fluxes,
   Joy's-law tilts (quenched in strong cycles) with scatter, and Hale's polarity
   law (details in :mod:`polarflux._synth_emerge`). Harder worlds add anti-Hale
   regions, occasional very large regions, and a north-south asymmetry of each
   cycle's activity.
2. Feedback. The amplitude of cycle n + 1 follows the precursor law
   A = A_ref (|D| / D_ref)^p exp(N(0, s)) with D the axial dipole of the model when
   the cycle starts (p = 1, s = 0.10 in the default scenario). A short
   axisymmetric run of reference cycles first sets the flux scale so that a
   reference cycle leaves D_ref, and supplies the polar field the scenario starts from.
3. Transport. :class:`~polarflux.transport.FluxTransport` evolves the field (2-D)
   with the scenario's diffusivity, flow (speed, profile and, in harder worlds, a
   speed that changes from cycle to cycle) and decay time.
4. Observation. Default: once per Carrington rotation, the radial field at
   mid-rotation on each instrument's grid. Harder worlds: line-of-sight maps
   assembled from central-meridian observations over the rotation, instruments
   with a field-dependent response, blur and noise of their own, gaps of months
   (:mod:`polarflux._synth_observe`).

The truth (polar-cap mean fields poleward of 60 degrees and the axial dipole of
the radial field) is integrated here with closed-form weights of the model grid,
independently of :mod:`polarflux.measure`, so that checks of the measurement
against it are independent.

Outputs (``write_scenario``): ``maps/<instrument>/*.fits``, ``truth.json``,
``truth_series.csv`` (noise-free polar fields per rotation), ``regions.csv``,
``sunspots.csv`` (monthly: ``date,sunspot_number,sunspot_number_north,sunspot_number_south``)
and ``scenario.toml`` (the settings).

References
----------
Hathaway, D. H., Wilson, R. M., & Reichmann, E. J. 1994, Sol. Phys. 151, 177.
Schatten, K. H., Scherrer, P. H., Svalgaard, L., & Wilcox, J. M. 1978, GRL 5, 411 (polar-field precursor).
Munoz-Jaramillo, A., Balmaceda, L. A., & DeLuca, E. E. 2013, ApJL 767, L25 (hemispheric precursors).
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import asdict, dataclass, field, fields, replace
from pathlib import Path

import numpy as np
from astropy.time import Time

from . import _synth_observe as observe
from ._synth_emerge import (
    _Cycle,
    _shape_for_amplitude,
    cycle_extras,
    cycle_regions,
    cycle_shape,
    precursor_amplitude,
)
from ._synth_truth import (
    NETWORK,
    _truth,
    _write_regions,
    _write_series,
    _write_sunspots,
    _write_text,
    truth_measures,
)
from ._version import __version__
from .errors import OutputExistsError, SettingsError
from .maps import SynopticMap, quiet_time_warnings, write_map
from .transport import BipolarRegion, FluxTransport

__all__ = ["Instrument", "ScenarioSettings", "write_scenario", "settings_for", "cycle_shape", "truth_measures",
           "NETWORK", "RESOLUTIONS", "PRESETS"]

_observe = observe.observe_radial  # the default observation, kept under its old name


@dataclass(frozen=True)
class Instrument:
    """An invented magnetograph: grid, response, noise, blur and years of operation.

    ``scale`` multiplies weak fields; ``strong_field_scale`` (None: the same) is the
    factor approached in strong fields and ``saturation_g`` (None: none) the reading
    that strong fields saturate at (:func:`polarflux._synth_observe.response`);
    ``blur_deg`` is the full width at half maximum of a Gaussian blur (degrees).
    """

    name: str
    nlat: int
    nlon: int
    scale: float
    noise_g: float
    start_year: float
    end_year: float
    saturation_g: float | None = None
    strong_field_scale: float | None = None
    blur_deg: float = 0.0


_OPTIONAL = ("duration_years", "decay_time", "saturation_g", "strong_field_scale")


@dataclass(frozen=True)
class ScenarioSettings:
    """Everything that makes a scenario; the same settings give the same files.

    The settings and the published ranges they draw on are listed in
    ``docs/methods.md`` ("Scenario settings"); the defaults are the demo scenario.
    """

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
    flow_cutoff_latitude: float = 75.0
    flow_cycle_sensitivity: float = 0.0
    flow_cycle_scatter: float = 0.0
    precursor_exponent: float = 1.0
    anti_hale_fraction: float = 0.0
    large_regions_per_cycle: float = 0.0
    large_region_flux: float = 1.5e22
    hemispheric_asymmetry: float = 0.0
    observation: str = "radial"
    long_gaps: int = 0
    long_gap_rotations: int = 5
    instruments: tuple[Instrument, ...] = field(
        default=(
            Instrument("MSN-A", 90, 180, 1.0, 3.0, 0.0, 26.0),
            Instrument("MSN-B", 180, 360, 0.85, 2.0, 22.0, 1e9),
        )
    )

    def __post_init__(self) -> None:
        problems = []
        if self.observation not in observe.OBSERVATIONS:
            problems.append(f"observation={self.observation!r} is not one of {', '.join(observe.OBSERVATIONS)}")
        if not 0.0 <= self.anti_hale_fraction <= 0.5:
            problems.append(f"anti_hale_fraction={self.anti_hale_fraction} must lie in 0-0.5")
        if not self.precursor_exponent > 0:
            problems.append(f"precursor_exponent={self.precursor_exponent} must be positive")
        if not 0.0 < self.flow_cutoff_latitude <= 90.0:
            problems.append(f"flow_cutoff_latitude={self.flow_cutoff_latitude} must lie in (0, 90] degrees")
        for name in ("precursor_scatter", "flow_cycle_scatter", "large_regions_per_cycle", "hemispheric_asymmetry",
                     "tilt_scatter", "long_gaps"):
            if getattr(self, name) < 0:
                problems.append(f"{name}={getattr(self, name)} must not be negative")
        if self.long_gap_rotations < 1:
            problems.append(f"long_gap_rotations={self.long_gap_rotations} must be at least 1")
        for inst in self.instruments:
            if inst.saturation_g is not None and not inst.saturation_g > 0:
                problems.append(f"instrument {inst.name}: saturation_g={inst.saturation_g} must be positive")
            if inst.blur_deg < 0:
                problems.append(f"instrument {inst.name}: blur_deg={inst.blur_deg} must not be negative")
        if problems:
            raise SettingsError("; ".join(problems))

    def to_toml(self) -> str:
        lines = ["# polarflux synthetic scenario settings (an invented Sun; no real data)"]
        plain = {k: v for k, v in asdict(self).items() if k != "instruments"}
        for key, value in plain.items():
            lines.append(f"{key} = {_toml_value(value)}")
        for inst in self.instruments:
            lines.append("\n[[instruments]]")
            lines.extend(f"{k} = {_toml_value(v)}" for k, v in asdict(inst).items())
        return "\n".join(lines) + "\n"

    @classmethod
    def from_toml(cls, path: str | os.PathLike) -> ScenarioSettings:
        import tomllib

        with open(path, "rb") as handle:
            data = tomllib.load(handle)
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(data) - known)
        if unknown:
            raise SettingsError(f"{path}: unknown scenario setting(s) {', '.join(unknown)}")
        inst_known = {f.name for f in fields(Instrument)}
        try:
            if "instruments" in data:
                for inst in data["instruments"]:
                    extra = sorted(set(inst) - inst_known)
                    if extra:
                        raise SettingsError(f"unknown instrument setting(s) {', '.join(extra)}")
                data["instruments"] = tuple(Instrument(**_nones(i)) for i in data["instruments"])
            return cls(**_nones(data))
        except (SettingsError, TypeError) as exc:
            raise SettingsError(f"{path}: {exc}") from None


def _toml_value(value) -> str:
    return '"none"' if value is None else json.dumps(value)


def _nones(data: dict) -> dict:
    return {k: (None if k in _OPTIONAL and v == "none" else v) for k, v in data.items()}


def _dipole(stepper) -> float:
    return truth_measures(stepper.field().mean(axis=1), stepper.model.grid.lat_edges)["axial_dipole"]


# --------------------------------------------------------------------------- calibration


def _flow_profile(settings: ScenarioSettings, speed: float):
    """None (the model's default profile, cut off at 75 degrees) or v0 sin(180 lat / cutoff) below the cutoff.

    References
    ----------
    van Ballegooijen, A. A., Cartledge, N. P., & Priest, E. R. 1998, ApJ 501, 866.
    """
    if settings.flow_cutoff_latitude == 75.0:
        return None
    cutoff = settings.flow_cutoff_latitude

    def profile(lat_deg):
        lat = np.asarray(lat_deg, dtype=np.float64)
        return np.where(np.abs(lat) < cutoff, speed * np.sin(np.radians(180.0 * lat / cutoff)), 0.0)

    return profile


def _model(settings: ScenarioSettings, axisymmetric: bool, flow_speed: float | None = None) -> FluxTransport:
    speed = settings.flow_speed if flow_speed is None else flow_speed
    return FluxTransport(nlat=settings.model_nlat, nlon=settings.model_nlon, diffusivity=settings.diffusivity,
                         flow_speed=speed, flow_profile=_flow_profile(settings, speed),
                         decay_time=settings.decay_time, axisymmetric=axisymmetric)


def _calibrate(settings: ScenarioSettings) -> tuple[float, np.ndarray]:
    """Flux scale that makes reference cycles leave the reference dipole, and that minimum's profile.

    Three reference cycles of the reference amplitude are run axisymmetrically from
    zero field; the dipole at the third minimum sets the scale (transport is linear
    in the field). Returns the scale and the scaled latitude profile at that minimum,
    signed so that its north polar field is positive.
    """
    rng = np.random.default_rng([settings.seed, 1])
    rng_extra = np.random.default_rng([settings.seed, 1, 1])
    model = _model(settings, axisymmetric=True)
    stepper = model.stepper(np.zeros(settings.model_nlat), settings.step_days)
    a = _shape_for_amplitude(settings.reference_amplitude)
    cycles = [_Cycle(k, k * settings.mean_period, settings.reference_amplitude, a, (-1) ** k) for k in range(3)]
    end = 3 * settings.mean_period
    regions = []
    for cycle in cycles:
        regions += cycle_regions(cycle, settings, rng, cycle.start, end, 1.0, rng_extra)
    regions.sort(key=lambda r: r.time)
    _advance(stepper, regions, end)
    profile = stepper.field()[:, 0]
    dipole = truth_measures(profile, model.grid.lat_edges)["axial_dipole"]
    if dipole == 0.0:
        raise SettingsError("scenario calibration produced no dipole; check the emergence settings")
    scale = settings.reference_dipole / abs(dipole)
    return scale, profile * scale * (1.0 if profile[-1] > 0 else -1.0)


def _advance(stepper, regions: list[BipolarRegion], until_years: float, start_index: int = 0,
             on_step=None) -> int:
    """Step until ``until_years``, depositing the regions that emerge on the way; return the next index.

    ``on_step(stepper)`` is called after every step.
    """
    index = start_index
    step_years = stepper.step_days / 365.25
    while stepper.time + 0.5 * step_years < until_years:
        index = stepper.step_with_regions(regions, index)
        if on_step is not None:
            on_step(stepper)
    return index


def _restart(stepper, model: FluxTransport):
    """A stepper of ``model`` (another flow) that goes on from ``stepper``'s field and time."""
    new = model.stepper(stepper.field(), stepper.step_days)
    new.steps_done = stepper.steps_done
    return new


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


def write_scenario(out: str | os.PathLike, settings: ScenarioSettings | None = None, progress=None,
                   force: bool = False) -> dict:
    """Generate the scenario into folder ``out`` and return its truth (also written as truth.json).

    ``progress(done, total)`` is called once per rotation. An existing ``truth.json``
    is not overwritten unless ``force``.
    """
    with quiet_time_warnings():
        return _Run(Path(out), settings or ScenarioSettings(), force).generate(progress)


class _Run:
    """One scenario being generated: the random streams, the cycles, the stepper and what is written."""

    def __init__(self, out: Path, settings: ScenarioSettings, force: bool) -> None:
        if settings.cycles < 1:
            raise SettingsError(f"cycles={settings.cycles} must be at least 1")
        if (out / "truth.json").exists() and not force:
            raise OutputExistsError(f"{out}: holds a scenario already and was not replaced")
        self.out, self.s = out, settings
        seed = settings.seed
        self.rng_cycles = np.random.default_rng([seed, 2])
        self.rng_regions = np.random.default_rng([seed, 3])
        self.rng_noise = np.random.default_rng([seed, 4])
        self.rng_missing = np.random.default_rng([seed, 5])
        # the harder worlds' draws, apart so that the default scenario's streams stay as they were
        self.rng_extra_cycles = np.random.default_rng([seed, 7])
        self.rng_extra_regions = np.random.default_rng([seed, 8])
        self.rng_gaps = np.random.default_rng([seed, 9])
        self.written: list[str] = []
        self.recorder = None

    # ---------------------------------------------------------------- cycles
    def _start_cycle(self, number: int, start: float) -> _Cycle:
        s = self.s
        dipole = _dipole(self.stepper)
        factor = math.exp(self.rng_cycles.normal(0.0, s.precursor_scatter))
        amplitude = precursor_amplitude(s, dipole, factor)
        share, speed = cycle_extras(s, amplitude, self.rng_extra_cycles)
        cycle = _Cycle(number, start, amplitude, _shape_for_amplitude(amplitude), (-1) ** (number + 1),
                       precursor_dipole=dipole, factor=factor, north_share=share, flow_speed=speed)
        if speed != self.flow_speed:
            self.flow_speed = speed
            self.stepper = _restart(self.stepper, _model(s, axisymmetric=False, flow_speed=speed))
        return cycle

    def _step_to(self, years: float) -> None:
        self.next_region = _advance(self.stepper, self.regions, years, self.next_region, self.recorder)

    # ---------------------------------------------------------------- main
    def generate(self, progress) -> dict:
        from sunpy.coordinates.sun import B0

        s, out = self.s, self.out
        out.mkdir(parents=True, exist_ok=True)
        flux_scale, start_profile = _calibrate(s)
        periods = np.clip(self.rng_cycles.normal(s.mean_period, s.period_scatter, s.cycles + 1),
                          s.mean_period - 1.2, s.mean_period + 1.2)
        starts = np.concatenate([[-periods[0]], np.cumsum(np.concatenate([[0.0], periods[1:]]))])
        # starts[0] is the previous cycle (its tail overlaps the first minimum); starts[k] cycle k
        total_years = float(starts[-1]) if s.duration_years is None else float(s.duration_years)
        if not total_years > 0:
            raise SettingsError("the scenario must last a positive number of years")

        model = _model(s, axisymmetric=False)
        grid = model.grid
        self.flow_speed = s.flow_speed
        # Cycle 1's northern leading polarity is positive: it reverses a positive north polar field.
        self.stepper = model.stepper(np.repeat(start_profile[:, None], grid.nlon, axis=1), s.step_days)
        a_ref = _shape_for_amplitude(s.reference_amplitude)
        cycles = [_Cycle(0, float(starts[0]), s.reference_amplitude, a_ref, -1, flow_speed=s.flow_speed)]
        regions = cycle_regions(cycles[0], s, self.rng_regions, 0.0, total_years + 1.0, flux_scale,
                                self.rng_extra_regions)
        cycle_of = {id(r): 0 for r in regions}
        self.regions, self.next_region = regions, 0
        numbers, offsets, mids = _rotations(s, total_years)
        b0 = np.atleast_1d(B0(mids).to_value("deg"))
        interior = np.arange(1, max(1, len(numbers) - 1))
        missing = set(self.rng_missing.choice(interior, size=min(s.missing_rotations, interior.size),
                                              replace=False).tolist()) if interior.size else set()
        active = {i.name: [k for k in range(len(numbers)) if i.start_year <= offsets[k] < i.end_year]
                  for i in s.instruments}
        gaps = observe.long_gaps(s.instruments, active, s, self.rng_gaps)
        observed = {k: [i for i in s.instruments if k in set(active[i.name]) and k not in gaps[i.name]]
                    for k in range(len(numbers)) if k not in missing}
        observed = {k: v for k, v in observed.items() if v}
        if s.observation == "los-meridian":
            self.plan = observe.MeridianPlan(numbers, mids, b0, Time(s.start, scale="utc"))
            self.recorder = observe.MeridianRecorder(self.plan, grid, s.step_days / 365.25, observed)
            self.recorder(self.stepper)
        series, next_cycle = [], 1

        for k, (number, t_map) in enumerate(zip(numbers, offsets, strict=True)):
            # cycles that start before this map: set their amplitude from the dipole at their start
            while next_cycle <= s.cycles and starts[next_cycle] <= t_map:
                self._step_to(float(starts[next_cycle]))
                cycle = self._start_cycle(next_cycle, float(starts[next_cycle]))
                cycles.append(cycle)
                new = cycle_regions(cycle, s, self.rng_regions, self.stepper.time, total_years + 1.0, flux_scale,
                                    self.rng_extra_regions)
                cycle_of.update({id(r): cycle.number for r in new})
                self.regions = self.regions[:self.next_region] + sorted(self.regions[self.next_region:] + new,
                                                                        key=lambda r: r.time)
                next_cycle += 1
            self._step_to(float(t_map))
            truth_field = self.stepper.field()
            measures = truth_measures(truth_field.mean(axis=1), grid.lat_edges)
            series.append((int(number), mids[k].utc.isot, float(t_map), measures["north_mean_field"],
                           measures["south_mean_field"], measures["axial_dipole"]))
            if self.recorder is None:
                for inst in observed.get(k, ()):
                    self.written.append(self._write_radial(inst, truth_field, grid, float(b0[k]), int(number),
                                                           mids[k]))
            else:
                self._write_finished(grid, numbers, mids, b0, observed)
            if progress is not None:
                progress(k + 1, len(numbers))

        truth = _truth(s, cycles, series, starts, total_years, flux_scale, missing, numbers, self.written)
        truth["periods_years"] = [float(p) for p in np.diff(starts)]
        truth["long_gaps"] = {name: sorted(int(numbers[i]) for i in gone) for name, gone in gaps.items()}
        if s.duration_years is None:
            # the cycle the archive ends before: its amplitude is already decided by the dipole now
            self._step_to(float(starts[-1]))
            dipole = _dipole(self.stepper)
            factor = math.exp(self.rng_cycles.normal(0.0, s.precursor_scatter))
            amplitude = precursor_amplitude(s, dipole, factor)
            peak = _Cycle(s.cycles + 1, float(starts[-1]), amplitude, _shape_for_amplitude(amplitude), 1)
            truth["next_cycle"] = {"cycle": s.cycles + 1, "start_years": float(starts[-1]), "amplitude": amplitude,
                                   "maximum_years": peak.peak_time(), "precursor_dipole_g": dipole,
                                   "random_factor": factor}
        if self.recorder is not None:  # the last maps end after the last mid-rotation
            self.stepper_until_recorded()
            self._write_finished(grid, numbers, mids, b0, observed)
            truth["maps"] = self.written
        _write_regions(out / "regions.csv", self.regions[:self.next_region], cycle_of, s.start)
        _write_text(out / "truth.json", json.dumps(truth, indent=1), force=True)
        _write_series(out / "truth_series.csv", series)
        _write_sunspots(out / "sunspots.csv", cycles, s, total_years)
        _write_text(out / "scenario.toml", s.to_toml(), force=True)
        return truth

    def stepper_until_recorded(self) -> None:
        while self.stepper.steps_done < self.recorder.last_step:
            self.next_region = self.stepper.step_with_regions(self.regions, self.next_region)
            self.recorder(self.stepper)

    # ---------------------------------------------------------------- maps
    def _write_finished(self, grid, numbers, mids, b0, observed) -> None:
        for k in self.recorder.finished:
            composite, b0_model = self.recorder.take(k)
            for inst in observed[k]:
                lon = (np.arange(inst.nlon) + 0.5) * 360.0 / inst.nlon
                b0_map = self.plan.b0(self.plan.column_years(k, lon))
                values, _ = observe.observe_los(composite, b0_model, grid, inst, b0_map, self.s.hidden_pole_limit,
                                                self.rng_noise)
                extra = self.plan.header(k, lon, self.s.hidden_pole_limit, float(b0[k]))
                extra["CONTENT"] = "synoptic map of line-of-sight field (synthetic)"
                self.written.append(self._save(inst, values, int(numbers[k]), mids[k], extra))
        self.recorder.finished.clear()

    def _write_radial(self, inst: Instrument, truth_field, grid, b0: float, number: int, mid: Time) -> str:
        br, m = _observe(truth_field, grid, inst, self.rng_noise)
        # The pole tilted away from the observer (B0 < 0: the north) is poorly seen.
        br[m.lat > self.s.hidden_pole_limit + b0] = np.nan
        br[m.lat < -(self.s.hidden_pole_limit - b0)] = np.nan
        return self._save(inst, br, number, mid, {"CONTENT": "synoptic map of radial field (synthetic)"})

    def _save(self, inst: Instrument, values: np.ndarray, number: int, mid: Time, extra: dict) -> str:
        mapped = SynopticMap.from_array(values, carrington_rotation=number, time=mid, instrument=inst.name)
        folder = self.out / "maps" / inst.name
        folder.mkdir(parents=True, exist_ok=True)
        path = folder / f"{inst.name.lower()}_cr{number}.fits"
        header = {"TELESCOP": NETWORK, "OBSERVER": "invented", **extra,
                  "ORIGIN": f"polarflux {__version__} synthetic scenario, seed {self.s.seed}"}
        write_map(mapped, path, force=True, extra=header)
        return str(path.relative_to(self.out))


RESOLUTIONS = {
    # model grid, then each instrument's (nlat, nlon)
    "low": ((90, 180), ((60, 120), (90, 180))),
    "standard": ((180, 360), ((90, 180), (180, 360))),
    "high": ((360, 720), ((180, 360), (360, 720))),
}

#: Named worlds: settings overrides (``"instruments"``: per-instrument overrides by name).
#: ``"hard"`` turns every harder setting on with values from the published ranges
#: listed in docs/methods.md ("Scenario settings").
PRESETS = {
    "hard": {
        "diffusivity": 700.0,
        "flow_speed": 14.0,
        "flow_cutoff_latitude": 90.0,
        "flow_cycle_sensitivity": 0.3,
        "flow_cycle_scatter": 0.10,
        "decay_time": 6.0,
        "precursor_exponent": 1.4,
        "precursor_scatter": 0.15,
        "tilt_scatter": 15.0,
        "anti_hale_fraction": 0.05,
        "large_regions_per_cycle": 3.0,
        "large_region_flux": 1e23,
        "hemispheric_asymmetry": 0.15,
        "observation": "los-meridian",
        "long_gaps": 2,
        "long_gap_rotations": 5,
        "instruments": {
            "MSN-A": {"noise_g": 4.0, "saturation_g": 600.0, "strong_field_scale": 0.8, "blur_deg": 2.0},
            "MSN-B": {"noise_g": 2.0, "saturation_g": 1500.0, "strong_field_scale": 1.0, "blur_deg": 1.0},
        },
    },
}


def settings_for(resolution: str = "standard", preset: str | None = None, **changes) -> ScenarioSettings:
    """Default settings at one of the :data:`RESOLUTIONS`, with a :data:`PRESETS` world and other fields changed.

    ``changes`` win over the preset's values.
    """
    if resolution not in RESOLUTIONS:
        raise SettingsError(f"resolution {resolution!r} is not one of {', '.join(RESOLUTIONS)}")
    if preset is not None and preset not in PRESETS:
        raise SettingsError(f"preset {preset!r} is not one of {', '.join(PRESETS)}")
    (nlat, nlon), grids = RESOLUTIONS[resolution]
    base = ScenarioSettings()
    overrides = dict(PRESETS[preset]) if preset is not None else {}
    per_instrument = overrides.pop("instruments", {})
    instruments = tuple(replace(i, nlat=g[0], nlon=g[1], **per_instrument.get(i.name, {}))
                        for i, g in zip(base.instruments, grids, strict=True))
    grid = {"model_nlat": nlat, "model_nlon": nlon, "instruments": instruments}
    return replace(base, **{**grid, **overrides, **changes})
