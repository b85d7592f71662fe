"""The flux the declining cycle still emerges before its minimum, as a source for the projection.

Regions that emerge in the last years of a cycle still build the coming minimum's
polar fields and axial dipole: Joy's law puts their following polarity (which has
the sign of the new polar fields) poleward of their leading polarity, and part of
the leading flux of low-latitude regions cancels across the equator. Surface flux
transport forecasts made years before a minimum therefore let the rest of the
cycle emerge (Cameron, Jiang & Schuessler 2016, ApJL 823, L22; Hathaway & Upton
2016, JGR 121, 10744; Iijima et al. 2017, A&A 607, L2). Here:

* **How much emerges.** The declining cycle's 13-month smoothed sunspot number is
  extrapolated with the Hathaway, Wilson & Reichmann (1994, Sol. Phys. 151, 177)
  shape, its start and amplitude fitted to the series since the last minimum
  (:class:`DecliningCycle`). Regions emerge at ``REGIONS_PER_SSN_YEAR`` per unit of
  sunspot number per year (a Poisson draw per step and member), half in each
  hemisphere.
* **Where and how.** Mean emergence latitude 28 exp(-months / 90) degrees after the
  cycle's start (Hathaway 2011, Sol. Phys. 273, 221) with a scatter of
  ``LATITUDE_SCATTER_DEG``; tilt by Joy's law, 0.5 |latitude| (Li & Ulrich 2012,
  ApJ 758, 115) with a Gaussian scatter of ``TILT_SCATTER_DEG`` (Jiang, Cameron &
  Schuessler 2014, ApJ 791, 5, measured a scatter of this size for large groups);
  ``ANTI_HALE_FRACTION`` of the regions with the leading polarity reversed (Li &
  Ulrich 2012 found over 90 % following Hale's law); region fluxes log-normal with
  a width of ``FLUX_SIGMA_LN`` in ln (our choice).
* **In one dimension.** The axisymmetric ensemble sees the longitude mean of each
  region: two rings of opposite sign, ``SEPARATION_DEG`` apart along the tilt
  direction (so sin(tilt) x that apart in latitude), each a Gaussian band of
  ``RING_WIDTH_DEG`` plus the latitude scatter. Per member and step the tilts,
  fluxes and Hale signs of that step's regions are drawn and only their summed
  dipole-building strength is kept (the regions are small against the bands, so
  the band shape is the step's mean).
* **The flux scale from the user's own archive.** The flux per region is not
  assumed: :func:`fit_flux_scale` hindcasts the record's earlier minima (the
  projection started 2-4 years before each, with and without a unit source) and
  takes the least-squares scale that brings the projected dipoles onto the
  measured ones. Its residuals are how the projection did on those minima, and
  they widen the forecast's spread. Without two such minima the late emergence is
  left out, and the forecast says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .geometry import dipole_row_weights

__all__ = ["DecliningCycle", "LateEmergence", "fit_flux_scale", "unit_ring_pair"]

REGIONS_PER_SSN_YEAR = 2.0  # regions per unit of smoothed sunspot number per year (our estimate)
LATITUDE_SCATTER_DEG = 6.0  # scatter of emergence latitudes about the mean (our choice)
TILT_SCATTER_DEG = 15.0  # Jiang, Cameron & Schuessler 2014, ApJ 791, 5 (large groups; from memory)
ANTI_HALE_FRACTION = 0.05  # Li & Ulrich 2012: over 90 % follow Hale's law; 5 % our choice
FLUX_SIGMA_LN = 0.8  # width of the log-normal region flux distribution (our choice)
SEPARATION_DEG = 5.0  # polarity separation along the tilt (degrees of heliocentric angle; our choice)
RING_WIDTH_DEG = 2.0  # Gaussian width of each polarity's band (our choice)
JOY_SLOPE = 0.5  # Li & Ulrich 2012, ApJ 758, 115
_MEAN_FACTOR = math.exp(0.5 * FLUX_SIGMA_LN**2)  # mean of the log-normal flux factor


@dataclass(frozen=True)
class DecliningCycle:
    """The declining cycle's smoothed sunspot number, extrapolated with the HWR 1994 shape."""

    start: float  # decimal year the shape starts
    shape_a: float  # the HWR amplitude parameter
    scale: float  # multiplies the shape (1 when the fit is the plain HWR curve)

    @classmethod
    def fit(cls, t_ssn, v_ssn, last_minimum: float, now: float) -> DecliningCycle:
        """Fit start and amplitude to the 13-month smoothed series from ``last_minimum`` to ``now``."""
        from scipy.optimize import least_squares

        from .synthetic import _shape_for_amplitude, cycle_shape
        from .timeseries import smooth_13_month

        t = np.asarray(t_ssn, dtype=np.float64)
        v = np.asarray(v_ssn, dtype=np.float64)
        cadence = float(np.median(np.diff(t))) if t.size > 1 else 1.0
        smooth = smooth_13_month(v) if cadence < 2.0 / 12.0 else v
        keep = np.isfinite(smooth) & (t >= last_minimum - 0.5) & (t <= now)
        ts, ys = t[keep], smooth[keep]
        peak = float(np.max(ys)) if ys.size else 100.0
        a0 = _shape_for_amplitude(max(peak, 5.0))
        if ys.size < 6:
            return cls(last_minimum, a0, 1.0)

        def residual(p):
            start, log_a = p
            return cycle_shape((ts - start) * 12.0, math.exp(log_a)) - ys

        fit = least_squares(residual, [last_minimum, math.log(a0)],
                            bounds=([last_minimum - 1.5, math.log(a0) - 3.0], [last_minimum + 1.5, math.log(a0) + 3.0]))
        start, log_a = fit.x
        # the shape's tail must meet the last smoothed value: scale the extrapolation to it
        last = cycle_shape(np.array([(ts[-1] - start) * 12.0]), math.exp(log_a))[0]
        scale = float(np.clip(ys[-1] / last, 0.5, 2.0)) if last > 1.0 and ys[-1] > 0 else 1.0
        return cls(float(start), float(math.exp(log_a)), scale)

    def __call__(self, years) -> np.ndarray:
        from .synthetic import cycle_shape

        return self.scale * cycle_shape((np.asarray(years, dtype=np.float64) - self.start) * 12.0, self.shape_a)


def unit_ring_pair(lat_edges, latitude: float, tilt: float, width: float) -> np.ndarray:
    """Longitude-mean field (G) of a region with 1 Mx in each polarity, north hemisphere, positive following.

    ``latitude`` and ``tilt`` in degrees; each polarity a Gaussian band of ``width``
    degrees, the following one poleward by SEPARATION_DEG x sin(tilt). Rows on
    ``lat_edges`` (degrees); each band normalised to carry exactly its flux.
    """
    from .geometry import SOLAR_RADIUS_CM

    edges = np.asarray(lat_edges, dtype=np.float64)
    centre = 0.5 * (edges[:-1] + edges[1:])
    area = 2.0 * math.pi * SOLAR_RADIUS_CM**2 * np.diff(np.sin(np.deg2rad(edges)))
    half = 0.5 * SEPARATION_DEG * math.sin(math.radians(tilt))
    out = np.zeros(centre.size)
    for sign, where in ((1.0, latitude + half), (-1.0, latitude - half)):
        g = np.exp(-0.5 * ((centre - where) / width) ** 2)
        out += sign * g / float(np.sum(g * area))
    return out


class LateEmergence:
    """Per-member deposits of the declining cycle's remaining regions for an axisymmetric ensemble.

    Parameters
    ----------
    cycle : DecliningCycle
    cycle_start : float
        The last minimum (decimal year): the clock of the emergence latitudes.
    north_sign : float
        Sign of the following polarity in the north (the sign of the polar field the
        declining cycle builds there); the south has the opposite.
    flux_scale : float
        Mean unsigned flux per region (Mx, both polarities together), from :func:`fit_flux_scale`.
    now : float
        Decimal year of the ensemble's start.
    members, seed : int
    random : bool
        False: every member gets the expected deposit (no Poisson, tilt or flux scatter).
    """

    def __init__(self, cycle: DecliningCycle, cycle_start: float, north_sign: float, flux_scale: float,
                 now: float, members: int, seed: int = 0, random: bool = True) -> None:
        self.cycle, self.cycle_start, self.north_sign = cycle, float(cycle_start), float(np.sign(north_sign) or 1.0)
        self.flux_scale, self.now, self.members = float(flux_scale), float(now), int(members)
        self.rng = np.random.default_rng(seed) if random else None
        self._profiles: dict[int, np.ndarray] = {}
        #: each member's deposits summed as axial dipole (G, at the time of deposit): for the spread budget
        self.dipole_added = np.zeros(self.members)

    def deposit(self, lat_edges, t0: float, t1: float) -> np.ndarray | None:
        """Field (G) to add for the regions emerging from ``t0`` to ``t1`` years after ``now``, (nlat, members)."""
        mid = self.now + 0.5 * (t0 + t1)
        ssn = float(self.cycle(np.array([mid]))[0])
        if not ssn > 0:
            return None
        expected = 0.5 * REGIONS_PER_SSN_YEAR * ssn * (t1 - t0)  # per hemisphere
        months = max(mid - self.cycle_start, 0.0) * 12.0
        latitude = 28.0 * math.exp(-months / 90.0)
        joy = JOY_SLOPE * latitude
        width = math.hypot(RING_WIDTH_DEG, LATITUDE_SCATTER_DEG)
        key = round(latitude * 100)
        edges = np.asarray(lat_edges, dtype=np.float64)
        if key not in self._profiles:
            # a unit tilt's pair and the derivative of the pair in tilt at the Joy tilt (its scatter)
            pair = unit_ring_pair(edges, latitude, joy, width)
            slope = (unit_ring_pair(edges, latitude, joy + 1.0, width) - unit_ring_pair(edges, latitude, joy - 1.0,
                                                                                            width)) / 2.0
            self._profiles[key] = (pair, slope)
        pair, slope = self._profiles[key]
        out = np.zeros((edges.size - 1, self.members))
        flux = 0.5 * self.flux_scale  # each polarity
        for hemisphere in (1.0, -1.0):
            # the Joy part: count x Hale x flux; the scatter part: the summed tilt deviations
            if self.rng is None:
                joy_part, scatter_part = np.full(self.members, expected * (1 - 2 * ANTI_HALE_FRACTION)), 0.0
            else:
                counts = self._strength_counts(expected)
                joy_part, scatter_part = counts
            profile = pair if hemisphere > 0 else -pair[::-1]
            tilt_profile = slope if hemisphere > 0 else -slope[::-1]
            sign = self.north_sign  # the north's following polarity; the mirror flips the south's sign already
            out += sign * flux * (profile[:, None] * joy_part[None, :]
                                  + (tilt_profile[:, None] * scatter_part[None, :] if self.rng is not None else 0.0))
        # axial dipole of a longitude-mean field: 3/2 times the integral of B sin(latitude) d(sin latitude)
        self.dipole_added += 1.5 * dipole_row_weights(edges) @ out
        return out

    def _strength_counts(self, expected: float) -> tuple[np.ndarray, np.ndarray]:
        """Per member: summed Hale sign x flux factor (the Joy part) and summed tilt deviations x flux (degrees)."""
        counts = self.rng.poisson(expected, self.members)
        total = int(counts.sum())
        joy, scatter = np.zeros(self.members), np.zeros(self.members)
        if total:
            owner = np.repeat(np.arange(self.members), counts)
            flux = np.exp(self.rng.normal(0.0, FLUX_SIGMA_LN, total)) / _MEAN_FACTOR
            hale = np.where(self.rng.random(total) < ANTI_HALE_FRACTION, -1.0, 1.0)
            np.add.at(joy, owner, flux * hale)
            np.add.at(scatter, owner, flux * hale * self.rng.normal(0.0, TILT_SCATTER_DEG, total))
        return joy, scatter


#: Flux per region of the unit source used to fit the scale (Mx); the fit is linear in it.
_UNIT_FLUX = 1e21


@dataclass(frozen=True)
class FluxScaleFit:
    """The late-emergence flux scale fitted on the record's earlier minima, and how the projection did there."""

    flux_scale: float  # mean unsigned flux per region, both polarities (Mx)
    standard_error: float
    relative_rms: float  # rms of (measured - projected) / measured dipole at those minima, with emergence
    relative_rms_without: float  # the same, the projection without emergence
    ensemble_relative_sd: float  # the ensemble's own spread there (transport parameters), relative
    hindcasts: tuple  # (minimum, lead in years, measured, projected without, projected with) per hindcast

    @property
    def extra_relative_error(self) -> float:
        """The part of the hindcast misfit the ensemble's own spread does not cover (0 if none)."""
        return float(math.sqrt(max(self.relative_rms**2 - self.ensemble_relative_sd**2, 0.0)))

    @property
    def log_error_per_year(self) -> float:
        """a in the projection's log error a x lead, fitted on these hindcasts: sqrt(mean((ln(projected /
        measured) / lead)^2)). A projection of the wrong sign, or below a tenth of the measured dipole,
        counts as a factor-10 miss (its log is undefined or unbounded)."""
        rows = [(h[1], h[2], h[4]) for h in self.hindcasts if h[1] > 0]
        if not rows:
            return 0.0
        lead, measured, projected = (np.array(c, dtype=np.float64) for c in zip(*rows, strict=True))
        ratio = np.abs(projected) / measured
        # a projection of the wrong sign or below a tenth of the measured dipole: count it as a factor-10 miss
        logs = np.log(np.where(np.sign(projected) == np.sign(measured), np.maximum(ratio, 0.1), 0.1))
        return float(np.sqrt(np.mean((logs / lead) ** 2)))

    @property
    def minima(self) -> int:
        """How many earlier minima the hindcasts come from."""
        return len({round(h[0], 6) for h in self.hindcasts})

    def log_error_at(self, lead_years: float, upper: bool = True) -> float:
        """The projection's log error expected at a lead (years before the minimum): a x lead.

        With ``upper`` (the default), a is raised to its one-sided 84 % upper bound, as for a
        standard deviation estimated from k degrees of freedom: a sqrt(k / chi2_0.16(k)), with k
        the number of earlier minima (the hindcasts of one minimum at several leads share its
        measured dipole and its cycle, so they are not independent). A few lucky hindcasts then
        cannot make the forecast overconfident.
        """
        a = self.log_error_per_year
        if upper and self.minima > 0:
            from scipy.stats import chi2

            a *= math.sqrt(self.minima / chi2.ppf(0.16, self.minima))
        return a * max(float(lead_years), 0.0)

    def as_dict(self) -> dict:
        """Plain data for the forecast's JSON output."""
        return {"flux_scale_mx": self.flux_scale, "standard_error_mx": self.standard_error,
                "relative_rms": self.relative_rms, "relative_rms_without": self.relative_rms_without,
                "ensemble_relative_sd": self.ensemble_relative_sd, "extra_relative_error": self.extra_relative_error,
                "log_error_per_year": self.log_error_per_year,
                "hindcasts": [dict(zip(("minimum", "lead_years", "measured", "without", "with"), h, strict=True))
                              for h in self.hindcasts]}

    def describe(self) -> str:
        minima = sorted({round(h[0], 2) for h in self.hindcasts})
        if not self.flux_scale > 0:
            return (f"late emergence fitted to zero on {len(self.hindcasts)} hindcasts of {len(minima)} earlier minima "
                    "(there the projection without it already reached or passed the measured dipoles); there "
                    f"the projected dipole was off by {100 * self.relative_rms:.0f} % rms")
        return (f"late emergence: {self.flux_scale:.2e} Mx per region (+/- {self.standard_error:.1e}), fitted on "
                f"{len(self.hindcasts)} hindcasts of {len(minima)} earlier minima; there the projected dipole was "
                f"off by {100 * self.relative_rms:.0f} % rms with it, {100 * self.relative_rms_without:.0f} % without")


def _smoothed_rate(t_ssn, v_ssn):
    from .timeseries import smooth_13_month

    t = np.asarray(t_ssn, dtype=np.float64)
    v = np.asarray(v_ssn, dtype=np.float64)
    cadence = float(np.median(np.diff(t))) if t.size > 1 else 1.0
    smooth = smooth_13_month(v) if cadence < 2.0 / 12.0 else v
    good = np.isfinite(smooth)
    return lambda years: np.interp(years, t[good], np.maximum(smooth[good], 0.0))


def fit_flux_scale(past, merged, events, t_ssn, v_ssn, bases=("",), leads=(2.0, 3.0, 4.0), members: int = 24,
                   seed: int = 0, cap_latitude: float = 60.0) -> FluxScaleFit | None:
    """Fit the late-emergence flux scale on the record's earlier minima (None without two of them).

    For each earlier minimum T and lead L, the map nearest before T - L is projected to T
    by the ensemble (parameters drawn as the forecast draws them), without sources and with
    a unit source that follows the sunspot series actually observed from T - L to T; the
    projections are anchored as the forecast anchors them. The scale is the least-squares
    factor of the unit source's dipole that takes the projections onto the record's
    smoothed dipole at T.
    """
    from .events import from_decimal_year, to_decimal_year
    from .projection import _latest_profile, _run_batch

    minima = [m["time"] for m in events.get("minima", [])]
    at = {round(a["time"], 6): a for a in events.get("at_minima", [])}
    rate = _smoothed_rate(t_ssn, v_ssn)
    setups = []
    for k, minimum in enumerate(minima):
        a = at.get(round(minimum, 6))
        if a is None or not (np.isfinite(a["axial_dipole"]) and np.isfinite(a["north"]) and a["axial_dipole"] != 0):
            continue
        start = minima[k - 1] if k > 0 else minimum - 11.0
        for lead in leads:
            when = minimum - lead
            if when - start < 3.0:
                continue
            latest = _latest_profile(past, merged, from_decimal_year(np.array([when]), True)[0], bases)
            if latest is None:
                continue
            profile, edges, _path, t_map, anchor = latest
            now = float(to_decimal_year(np.array([t_map]))[0][0])
            if minimum - now < 1.0 or not anchor["axial_dipole"] > 0:
                continue
            # drawn as the forecast draws them, so the fitted members' spread includes the emergence's
            unit = LateEmergence(rate, start, np.sign(a["north"]), _UNIT_FLUX, now, members,
                                 seed=seed + 7 + len(setups))
            setups.append((minimum, lead, a, profile, edges, now, anchor, unit))
    if len({round(x[0], 6) for x in setups}) < 2:
        return None
    # every hindcast without and with the unit source in one ensemble run (members each)
    runs = [(x[3], x[4], x[0] - x[5], None) for x in setups] + [(x[3], x[4], x[0] - x[5], x[7]) for x in setups]
    dipoles, model_now = _run_batch(runs, members, seed, cap_latitude)
    rows, used = [], set()
    n = len(setups)
    for i, (minimum, lead, a, _p, _e, _now, anchor, _u) in enumerate(setups):
        if not abs(model_now[i]) > 0:
            continue
        factor = anchor["axial_dipole"] / abs(model_now[i]) * np.sign(a["axial_dipole"])
        d0 = dipoles[i] * factor
        d1 = (dipoles[n + i] - dipoles[i]) * factor
        rows.append((minimum, lead, abs(a["axial_dipole"]), d0, d1))
        used.add(round(minimum, 6))
    if len(used) < 2:
        return None
    measured = np.array([r[2] for r in rows])
    d0 = np.array([np.mean(r[3]) for r in rows])
    d1 = np.array([np.mean(r[4]) for r in rows])
    q = float(max(np.sum((measured - d0) * d1) / np.sum(d1**2), 0.0)) if np.sum(d1**2) > 0 else 0.0
    projected = d0 + q * d1
    resid = measured - projected
    spread = np.array([np.std(r[3] + q * r[4], ddof=1) for r in rows])
    se = float(np.sqrt(np.sum(resid**2) / max(len(rows) - 1, 1) / np.sum(d1**2))) if np.sum(d1**2) > 0 else 0.0
    return FluxScaleFit(
        flux_scale=q * _UNIT_FLUX, standard_error=se * _UNIT_FLUX,
        relative_rms=float(np.sqrt(np.mean((resid / measured) ** 2))),
        relative_rms_without=float(np.sqrt(np.mean(((measured - d0) / measured) ** 2))),
        ensemble_relative_sd=float(np.sqrt(np.mean((spread / measured) ** 2))),
        hindcasts=tuple((float(r[0]), float(r[1]), float(r[2]), float(d0[i]), float(projected[i]))
                        for i, r in enumerate(rows)))
