"""Emergence for the invented scenario: cycle shapes, bipolar regions, the precursor law, per-cycle flow.

Private to :mod:`polarflux.synthetic`. Every random draw that the default scenario
makes comes from the generator it always used, in the same order; the settings
that make harder worlds (anti-Hale regions, very large regions, hemispheric
asymmetry, cycle-to-cycle flow) draw from generators of their own, and only when
they are switched on, so the default scenario's numbers do not change.

References
----------
Hathaway, D. H., Wilson, R. M., & Reichmann, E. J. 1994, Sol. Phys. 151, 177 (cycle shape).
Hathaway, D. H. 2011, Sol. Phys. 273, 221 (equatorward drift of the emergence latitude).
Baumann, I., & Solanki, S. K. 2005, A&A 443, 1061 (log-normal region sizes).
Li, J., & Ulrich, R. K. 2012, ApJ 758, 115 (Joy's law slope).
Dasi-Espuig, M., Solanki, S. K., Krivova, N. A., Cameron, R., & Penuela, T. 2010, A&A 518, A7 (tilt quenching).
Wang, Y.-M., & Sheeley, N. R., Jr. 1989, Sol. Phys. 124, 81 (anti-Hale regions, tilt scatter).
Jiang, J., Cameron, R. H., & Schuessler, M. 2015, ApJL 808, L28 (single large regions and the polar field).
Nagy, M., Lemerle, A., Labonville, F., Petrovay, K., & Charbonneau, P. 2017, Sol. Phys. 292, 167 ("rogue" regions).
Hathaway, D. H., & Rightmire, L. 2010, Science 327, 1350 (meridional flow faster near a weak-cycle minimum).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .transport import BipolarRegion, joy_tilt

_HWR_C = 0.71
#: Years of a cycle's activity that the scenario follows (200 months).
CYCLE_SPAN_YEARS = 200.0 / 12.0


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
    north_share: float = 0.5  # fraction of the cycle's activity in the north
    flow_speed: float | None = None  # peak meridional flow while this cycle is the newest, m/s

    def rate(self, years: np.ndarray) -> np.ndarray:
        return cycle_shape((np.asarray(years) - self.start) * 12.0, self.a)

    def peak_time(self) -> float:
        months = np.linspace(0.0, 200.0, 20001)
        return self.start + months[int(np.argmax(cycle_shape(months, self.a)))] / 12.0


def _quench(amplitude: float, reference: float) -> float:
    """Tilt factor: 1 for the reference amplitude, smaller for stronger cycles."""
    return 2.0 / (1.0 + amplitude / reference)


def precursor_amplitude(settings, dipole: float, factor: float) -> float:
    """The precursor law: reference_amplitude * (|D| / reference_dipole)^p * factor.

    Written so that p = 1 gives bit for bit the linear law of the default scenario.
    """
    p = settings.precursor_exponent
    return settings.reference_amplitude * abs(dipole) ** p / settings.reference_dipole ** p * factor


def cycle_extras(settings, amplitude: float, rng: np.random.Generator) -> tuple[float, float]:
    """Per-cycle north share of the activity and peak meridional flow (m/s).

    The share is 0.5 (1 + A) with the normalised asymmetry A = (N - S) / (N + S)
    drawn from N(0, hemispheric_asymmetry), kept within +/-0.6. The flow is
    flow_speed (amplitude / reference_amplitude)^(-flow_cycle_sensitivity) times a
    log-normal factor of width flow_cycle_scatter: weaker flow in stronger cycles.
    Nothing is drawn while both settings are zero.
    """
    share = 0.5
    if settings.hemispheric_asymmetry > 0:
        share = 0.5 * (1.0 + float(np.clip(rng.normal(0.0, settings.hemispheric_asymmetry), -0.6, 0.6)))
    speed = settings.flow_speed
    if settings.flow_cycle_sensitivity != 0 or settings.flow_cycle_scatter > 0:
        speed = settings.flow_speed * (amplitude / settings.reference_amplitude) ** (-settings.flow_cycle_sensitivity)
        if settings.flow_cycle_scatter > 0:
            speed *= math.exp(rng.normal(0.0, settings.flow_cycle_scatter))
    return share, speed


def _separation(flux_over_scale: float) -> float:
    return float(np.clip(4.0 * (flux_over_scale / 3e21) ** 0.3, 2.0, 12.0))


def cycle_regions(cycle: _Cycle, settings, rng: np.random.Generator, t_from: float, t_to: float,
                  flux_scale: float, rng_extra: np.random.Generator | None = None) -> list[BipolarRegion]:
    """The regions a cycle emerges between two times, one Poisson draw per day.

    ``rng`` makes every draw of the default scenario; ``rng_extra`` the anti-Hale
    flips and the very large regions, when those settings are on.
    """
    days = np.arange(math.ceil(t_from * 365.25), math.floor(t_to * 365.25))
    if days.size == 0:
        return []
    years = days / 365.25
    rate = cycle.rate(years)
    counts = rng.poisson(settings.regions_per_unit_day * rate)
    quench = _quench(cycle.amplitude, settings.reference_amplitude)
    anti_hale = settings.anti_hale_fraction if rng_extra is not None else 0.0
    regions = []
    for year, count in zip(years[counts > 0], counts[counts > 0], strict=True):
        for _ in range(int(count)):
            months = (year - cycle.start) * 12.0
            mean_lat = 28.0 * math.exp(-months / 90.0)
            lat = abs(mean_lat + rng.normal(0.0, settings.latitude_scatter))
            lat = min(max(lat, 2.0), 45.0)
            hemisphere = 1 if rng.random() < cycle.north_share else -1
            flux = settings.flux_median * math.exp(rng.normal(0.0, settings.flux_sigma_ln)) * flux_scale
            separation = _separation(flux / flux_scale)
            tilt = joy_tilt(lat) * quench + rng.normal(0.0, settings.tilt_scatter)
            leading = cycle.north_leading * hemisphere
            if anti_hale > 0 and rng_extra.random() < anti_hale:
                leading = -leading
            regions.append(BipolarRegion(
                time=float(year + rng.random() / 365.25), latitude=hemisphere * lat,
                longitude=float(rng.uniform(0.0, 360.0)), flux=leading * flux, separation=separation,
                tilt=float(tilt), width=3.0))
    if rng_extra is not None and settings.large_regions_per_cycle > 0:
        regions += _large_regions(cycle, settings, rng_extra, years, rate, quench, flux_scale)
    regions.sort(key=lambda r: r.time)
    return regions


def _large_regions(cycle: _Cycle, settings, rng: np.random.Generator, years: np.ndarray, rate: np.ndarray,
                   quench: float, flux_scale: float) -> list[BipolarRegion]:
    """Occasional very large regions: Poisson in number, emerging where the cycle is active.

    Their expected number over a whole cycle is ``large_regions_per_cycle``; their
    leading-polarity flux is ``large_region_flux`` (scaled like every region) times a
    log-normal factor of width 0.3; latitude, hemisphere and tilt follow the same laws
    as the other regions (Joy's law with quenching and the same tilt scatter), so the
    tilt of one of them can set much of the dipole the cycle leaves.
    """
    whole = np.linspace(0.0, CYCLE_SPAN_YEARS, 2001)
    total = float(np.trapezoid(cycle.rate(cycle.start + whole), whole))
    inside = float(rate.sum()) / 365.25
    if total <= 0 or inside <= 0:
        return []
    count = rng.poisson(settings.large_regions_per_cycle * min(inside / total, 1.0))
    out = []
    for year in rng.choice(years, size=count, p=rate / rate.sum()):
        months = (year - cycle.start) * 12.0
        lat = min(max(abs(28.0 * math.exp(-months / 90.0) + rng.normal(0.0, settings.latitude_scatter)), 2.0), 45.0)
        hemisphere = 1 if rng.random() < cycle.north_share else -1
        flux = settings.large_region_flux * math.exp(rng.normal(0.0, 0.3)) * flux_scale
        leading = cycle.north_leading * hemisphere
        if rng.random() < settings.anti_hale_fraction:
            leading = -leading
        out.append(BipolarRegion(
            time=float(year + rng.random() / 365.25), latitude=hemisphere * lat,
            longitude=float(rng.uniform(0.0, 360.0)), flux=leading * flux,
            separation=_separation(flux / flux_scale), tilt=float(joy_tilt(lat) * quench
                                                                 + rng.normal(0.0, settings.tilt_scatter)),
            width=3.0))
    return out
