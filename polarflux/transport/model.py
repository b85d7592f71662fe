"""Surface flux transport of the radial field, spectral in longitude, implicit in latitude.

Equation
--------
In the frame rotating at the Carrington rate, the radial field B(lat, lon, t) obeys

    dB/dt = - Omega(lat) dB/dlon
            - 1/(R cos lat) d/dlat (v(lat) cos lat B)
            + eta [ 1/(R^2 cos lat) d/dlat (cos lat dB/dlat) + 1/(R^2 cos^2 lat) d^2B/dlon^2 ]
            - B / tau + S

with Omega the differential rotation relative to the Carrington rate, v the
northward meridional flow, eta the supergranular diffusivity, tau an optional
decay time and S the emerging bipolar regions.

Scheme
------
* Longitude: the state is kept as real-FFT coefficients b_m(lat) (normalised so
  that b_0 is the longitude average). Every Fourier mode evolves on its own, so
  the axisymmetric model is exactly the m = 0 part of the 2-D model.
* Rotation, longitudinal diffusion and decay act row by row and mode by mode:
  they are applied exactly, as the factor exp(dt (-i m Omega - eta m^2 / (R^2
  cos^2 lat) - 1/tau)). A rigid rotation therefore shifts a pattern exactly.
* Latitude: conservative finite volumes on an equal-angle grid. The face flux
  F = cos(lat) [v B / R - eta dB/dlat / R^2] uses the mean of the two adjacent
  cells for B and their difference for dB/dlat (second order); F is zero at both
  poles, so the total signed flux sum(B_j (sin lat_j+1/2 - sin lat_j-1/2)) is
  conserved to round-off. This operator is the same real tridiagonal matrix for
  every mode; it is stepped by Crank-Nicolson (second order, unconditionally
  stable), factorised once (LAPACK ``dgttrf``) and applied to all modes at once
  (``dgttrs``) each step.
* The two parts are combined by Strang splitting (half a step of the exact row
  factor, a Crank-Nicolson step, half a step of the row factor): second order in
  time. Overall the scheme is second order in latitude and time and spectral in
  longitude.
* Bipolar regions are added (in spectral form) at the start of the step in which
  they emerge; each carries zero net flux on the grid.

For ensembles the same scheme runs for many axisymmetric members at once, each
with its own diffusivity, flow speed and decay time (:class:`TransportEnsemble`);
their matrices are factorised once and solved together.

References
----------
DeVore, C. R., Sheeley, N. R., Jr., & Boris, J. P. 1984, Sol. Phys. 92, 1;
Sheeley, N. R., Jr. 2005, Living Rev. Sol. Phys. 2, 5 (the surface flux transport model).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence

import numpy as np
from scipy.linalg import solve

from ..errors import SettingsError
from ..geometry import SOLAR_RADIUS_CM, cap_row_fraction, regrid_conservative
from ..maps import SynopticMap
from ..measure import fill_polar_gaps, profile_measures
from .profiles import flow_profile as _flow_profile
from .profiles import rotation_profile
from .sources import BipolarRegion, region_field

__all__ = ["FluxTransport", "Stepper", "model_grid"]

_R_M = SOLAR_RADIUS_CM / 100.0  # solar radius in metres (IAU 2015 nominal, astropy.constants)
_DAY = 86400.0
_YEAR = 365.25 * _DAY
CARRINGTON_PERIOD_DAYS = 27.2753  # synodic Carrington rotation (common practice)
# Factors, matrix entries and state values below this fraction of the largest are
# set to zero: left alone, decaying high modes end as subnormal floating-point
# numbers, a hundred times slower to compute with; at 1e-30 of the largest value
# they are far below the round-off (1e-16) of the field itself.
_NEGLIGIBLE = 1e-30


class _Grid:
    """Equal-angle finite-volume grid: cells, faces and their geometry."""

    def __init__(self, nlat: int, nlon: int) -> None:
        if int(nlat) < 4 or int(nlon) < 1:
            raise SettingsError(f"grid {nlat} x {nlon}: need at least 4 latitude rows and 1 longitude column")
        self.nlat, self.nlon = int(nlat), int(nlon)
        self.lat_edges = np.linspace(-90.0, 90.0, self.nlat + 1)
        self.lon_edges = np.linspace(0.0, 360.0, self.nlon + 1)
        self.lat = 0.5 * (self.lat_edges[:-1] + self.lat_edges[1:])
        self.lon = 0.5 * (self.lon_edges[:-1] + self.lon_edges[1:])
        self.dlat = np.deg2rad(180.0 / self.nlat)
        s = np.sin(np.deg2rad(self.lat_edges))
        s[0], s[-1] = -1.0, 1.0
        self.ds = np.diff(s)  # cell "area" in d(sin lat)
        self.cos_face = np.cos(np.deg2rad(self.lat_edges))
        self.cos_face[0] = self.cos_face[-1] = 0.0
        self.cos_centre = np.cos(np.deg2rad(self.lat))
        self.modes = np.arange(self.nlon // 2 + 1)

    def solid_angle(self) -> np.ndarray:
        return np.outer(self.ds, np.full(self.nlon, 2.0 * np.pi / self.nlon))


def model_grid(nlat: int = 180, nlon: int = 360) -> tuple[np.ndarray, np.ndarray]:
    """Latitude and longitude cell edges (degrees) of the transport model's grid."""
    g = _Grid(nlat, nlon)
    return g.lat_edges, g.lon_edges


def _latitude_operator(grid: _Grid, eta: np.ndarray, flow_faces: np.ndarray):
    """Tridiagonal bands (lower, diagonal, upper) of the latitudinal operator L, per member.

    ``eta`` (m^2/s) has shape (k,) and ``flow_faces`` (m/s, northward at the faces)
    shape (nlat + 1, k). Returns three arrays (nlat, k) with L b = d b / dt.
    """
    alpha = grid.cos_face[:, None] * flow_faces / (2.0 * _R_M)
    beta = grid.cos_face[:, None] * eta[None, :] / (_R_M**2 * grid.dlat)
    alpha[0] = alpha[-1] = 0.0
    beta[0] = beta[-1] = 0.0
    area = grid.ds[:, None]
    lower = (alpha[:-1] + beta[:-1]) / area  # coefficient of b_{j-1}
    diag = (alpha[:-1] - beta[:-1] - alpha[1:] - beta[1:]) / area
    upper = (beta[1:] - alpha[1:]) / area  # coefficient of b_{j+1}
    return lower, diag, upper


GRID_NAMES = ("sine-latitude", "equal-angle")


def _source_lat_edges(nrows: int, lat_edges, grid: str | None) -> np.ndarray:
    """Latitude edges (degrees) of an array's rows, from ``lat_edges`` or a grid name."""
    if lat_edges is not None and grid is not None:
        raise SettingsError("give the initial rows' grid once: lat_edges or grid, not both")
    if grid is not None:
        if grid == "sine-latitude":
            return np.rad2deg(np.arcsin(np.linspace(-1.0, 1.0, nrows + 1)))
        if grid == "equal-angle":
            return np.linspace(-90.0, 90.0, nrows + 1)
        raise SettingsError(f"grid={grid!r}: expected one of {', '.join(GRID_NAMES)}")
    edges = np.asarray(lat_edges, dtype=np.float64)
    if edges.shape != (nrows + 1,):
        raise SettingsError(f"lat_edges has {edges.size} values; the initial array's {nrows} rows need {nrows + 1}")
    if not (edges[0] == -90.0 and edges[-1] == 90.0 and np.all(np.diff(edges) > 0)):
        raise SettingsError("lat_edges must ascend from -90 to +90 degrees")
    return edges


def _missing_rows_message(values: np.ndarray, lat_edges) -> str:
    """How many rows of an initial array hold NaN or inf, and how to fill them."""
    bad = ~np.all(np.isfinite(values.reshape(values.shape[0], -1)), axis=1)
    where = ""
    if lat_edges is not None:
        centre = 0.5 * (np.asarray(lat_edges)[:-1] + np.asarray(lat_edges)[1:])
        where = f" ({np.count_nonzero(bad & (centre > 0))} north, {np.count_nonzero(bad & (centre <= 0))} south)"
    return (
        f"the initial state has no data (NaN or inf) in {np.count_nonzero(bad)} of its {values.shape[0]} "
        f"latitude rows{where}; pass the SynopticMap itself (its polar gaps are filled as measure_caps(fill="
        "'profile') does), or fill the map with polarflux.fill_polar_gaps before taking its longitude mean"
    )


def _initial_field(initial, grid: _Grid, lat_edges=None, row_grid: str | None = None) -> np.ndarray:
    """Turn an initial state into the model grid's field, (nlat, nlon) in Gauss.

    The one path from a user's initial state to model rows, for :class:`FluxTransport`
    and :class:`TransportEnsemble` alike (the ensemble's grid has one column).

    * A :class:`~polarflux.maps.SynopticMap` (its grid is known): missing polar
      pixels filled by :func:`~polarflux.measure.fill_polar_gaps` (cap 60 degrees),
      other gaps taken as zero field, then regridded conserving flux. A map with a
      whole cap unobserved is refused.
    * A callable f(lat_deg, lon_deg) -> Gauss, evaluated at the cell centres.
    * An array (nrows,) or (nrows, ncols), row 0 southernmost, columns spanning
      0-360 degrees of longitude. With ``lat_edges`` (degrees, nrows + 1 values
      from -90 to 90) or ``row_grid`` ("sine-latitude" or "equal-angle", rows
      spanning pole to pole) it is regridded conserving flux. Without either, an
      array cannot say its grid, so it is read as the model's own rows and must
      have exactly the model's shape; any other shape is refused.
    * NaN or inf in an array is refused with the number of rows missing.
    """
    if isinstance(initial, SynopticMap):
        return _map_field(initial, grid)
    if callable(initial):
        if lat_edges is not None or row_grid is not None:
            raise SettingsError("lat_edges and grid describe an initial array; a function is evaluated on the model grid")
        lat, lon = np.meshgrid(grid.lat, grid.lon, indexing="ij")
        values = np.asarray(initial(lat, lon), dtype=np.float64)
        values = np.broadcast_to(values, (grid.nlat, grid.nlon)).copy()
        if not np.all(np.isfinite(values)):
            raise SettingsError(_missing_rows_message(values, grid.lat_edges))
        return values
    try:
        values = np.array(initial, dtype=np.float64)
    except (TypeError, ValueError):
        raise SettingsError(
            f"initial state of type {type(initial).__name__}: expected a SynopticMap, an array or a function"
        ) from None
    if values.ndim not in (1, 2) or values.shape[0] < 1:
        raise SettingsError(f"initial array of shape {values.shape}: expected (rows,) or (rows, columns)")
    stated = lat_edges is not None or row_grid is not None
    edges = _source_lat_edges(values.shape[0], lat_edges, row_grid) if stated else None
    if not np.all(np.isfinite(values)):
        raise SettingsError(_missing_rows_message(values, edges if stated else None))
    if stated:
        table = values[:, None] if values.ndim == 1 else values
        lon_edges = np.linspace(0.0, 360.0, table.shape[1] + 1)
        return regrid_conservative(table, edges, lon_edges, grid.lat_edges, grid.lon_edges)
    if values.shape == (grid.nlat,):
        return np.repeat(values[:, None], grid.nlon, axis=1)
    if values.shape == (grid.nlat, grid.nlon):
        return values
    model_shape = f"({grid.nlat},)" if grid.nlon == 1 else f"({grid.nlat},) or ({grid.nlat}, {grid.nlon})"
    raise SettingsError(
        f"initial array of shape {values.shape} does not match the model grid {model_shape}; "
        "an array on another grid must say so: pass lat_edges=... or grid='sine-latitude' / 'equal-angle'"
    )


def _map_field(m: SynopticMap, grid: _Grid) -> np.ndarray:
    """A synoptic map on the model grid: polar gaps filled, other gaps zero, flux conserved."""
    filled = fill_polar_gaps(m, 60.0)
    values = filled.values.astype(np.float64)
    # fill_polar_gaps leaves a cap with no data at all missing: zero there would be an invented polar field
    unseen = [hemisphere for hemisphere in ("north", "south")
              if np.isnan(values[cap_row_fraction(m.lat_edges, 60.0, hemisphere) > 0]).all()]
    if unseen:
        raise SettingsError(
            f"{m.source or 'map'}: no data poleward of 60 degrees {' and '.join(unseen)}: "
            "the polar field cannot be filled from the map; give a map that sees the caps"
        )
    values[~np.isfinite(values)] = 0.0  # gaps outside the caps: no flux assumed
    return regrid_conservative(values, m.lat_edges, m.lon_edges, grid.lat_edges, grid.lon_edges)


def _sorted_sources(sources: Iterable[BipolarRegion] | None) -> list[BipolarRegion]:
    regions = list(sources or [])
    for r in regions:
        if not isinstance(r, BipolarRegion):
            raise SettingsError(f"sources must be BipolarRegion objects, got {type(r).__name__}")
    return sorted(regions, key=lambda r: r.time)


def _steps(years: float, step_days: float) -> tuple[int, float]:
    """Number of steps and the step (days), adjusted so that whole steps end exactly at ``years``."""
    if not years > 0 or not step_days > 0:
        raise SettingsError(f"years={years} and step_days={step_days} must be positive")
    nsteps = max(1, int(round(years * 365.25 / step_days)))
    return nsteps, years * 365.25 / nsteps


def _save_steps(nsteps: int, step_days: float, save_every_days: float) -> np.ndarray:
    if save_every_days <= 0:
        raise SettingsError(f"save_every_days={save_every_days} must be positive")
    times = np.arange(0.0, nsteps * step_days + 0.5 * step_days, save_every_days)
    steps = np.clip(np.rint(times / step_days).astype(int), 0, nsteps)
    return np.unique(np.append(steps, nsteps))  # the final state is always saved


class FluxTransport:
    """Surface flux transport model of the radial field on an equal-angle grid.

    Parameters
    ----------
    nlat, nlon : int
        Grid rows (equal steps in latitude) and columns (equal steps in longitude).
    diffusivity : float
        Supergranular diffusivity eta, km^2/s (published values 250-600: 250 in
        Cameron et al. 2010, ApJ 719, 264 and Jiang et al. 2014; 500-600 in Wang,
        Nash & Sheeley 1989 and Wang et al. 2002).
    flow_speed : float
        Peak poleward speed of the default meridional flow, m/s.
    flow_profile : callable, optional
        f(lat_deg) -> northward speed in m/s; replaces the default profile
        (van Ballegooijen, Cartledge & Priest 1998: v0 sin(2.4 lat) below 75 degrees).
    rotation : "default", None, callable or (A, B, C)
        Differential rotation relative to the Carrington frame ("default": Snodgrass
        1983 magnetic features; a callable returns degrees per day).
    decay_time : float or None
        Exponential decay time of the field, years (5-10 in Schrijver, DeRosa &
        Title 2002, ApJ 577, 1006); None for no decay.
    axisymmetric : bool
        Evolve only the longitude average (the m = 0 mode).
    """

    def __init__(
        self,
        nlat: int = 180,
        nlon: int = 360,
        diffusivity: float = 250.0,
        flow_speed: float = 11.0,
        flow_profile: Callable | None = None,
        rotation="default",
        decay_time: float | None = None,
        axisymmetric: bool = False,
    ) -> None:
        self.grid = _Grid(nlat, nlon)
        self.diffusivity = float(diffusivity)
        if not self.diffusivity >= 0:
            raise SettingsError(f"diffusivity={diffusivity} km^2/s must be zero or positive")
        if decay_time is not None and not float(decay_time) > 0:
            raise SettingsError(f"decay_time={decay_time}: expected a positive number of years, or None for no decay")
        self.flow_speed = float(flow_speed)
        self.flow = _flow_profile(self.flow_speed, flow_profile)
        self.rotation = rotation_profile(rotation)
        self.decay_time = None if decay_time is None else float(decay_time)
        self.axisymmetric = bool(axisymmetric)
        self._flow_is_default = flow_profile is None
        self._rotation_setting = rotation

    # ------------------------------------------------------------------ pieces
    @property
    def lat(self) -> np.ndarray:
        return self.grid.lat

    @property
    def lon(self) -> np.ndarray:
        return self.grid.lon

    def _modes(self) -> np.ndarray:
        return self.grid.modes[:1] if self.axisymmetric else self.grid.modes

    def _row_factor(self, dt: float) -> np.ndarray:
        """exp(dt (-i m Omega - eta m^2/(R^2 cos^2) - 1/tau)), shape (nlat, nmodes)."""
        g = self.grid
        m = self._modes()[None, :].astype(np.float64)
        rate = np.zeros((g.nlat, m.shape[1]), dtype=np.complex128)
        if self.rotation is not None:
            omega = np.deg2rad(np.asarray(self.rotation(g.lat), dtype=np.float64)) / _DAY  # rad/s
            rate -= 1j * m * omega[:, None]
        eta = self.diffusivity * 1e6
        rate -= eta * m**2 / (_R_M**2 * g.cos_centre[:, None] ** 2)
        if self.decay_time is not None:
            rate -= 1.0 / (self.decay_time * _YEAR)
        factor = np.exp(rate * dt)
        factor[np.abs(factor) < _NEGLIGIBLE] = 0.0  # no subnormal numbers, which are very slow
        return factor

    def _crank_nicolson(self, dt: float) -> np.ndarray:
        """The Crank-Nicolson step (I - dt/2 L)^-1 (I + dt/2 L) as one dense real matrix.

        L is the same for every longitude mode, so the step for all modes at once is
        one matrix product; the matrix is formed once per run (an LU solve).
        """
        g = self.grid
        flow = np.asarray(self.flow(g.lat_edges), dtype=np.float64).reshape(-1, 1)
        lower, diag, upper = (x[:, 0] for x in _latitude_operator(g, np.array([self.diffusivity * 1e6]), flow))
        operator = np.diag(diag) + np.diag(lower[1:], -1) + np.diag(upper[:-1], 1)
        eye = np.eye(g.nlat)
        step = solve(eye - 0.5 * dt * operator, eye + 0.5 * dt * operator)
        step[np.abs(step) < _NEGLIGIBLE * np.abs(step).max()] = 0.0
        return step

    def _spectral(self, field: np.ndarray) -> np.ndarray:
        """Real-FFT coefficients normalised so that mode 0 is the longitude mean."""
        coefficients = np.fft.rfft(field, axis=1) / self.grid.nlon
        return coefficients[:, :1].copy() if self.axisymmetric else coefficients

    def _field(self, state: np.ndarray) -> np.ndarray:
        if self.axisymmetric:
            return state[:, :1].real.copy()
        return np.fft.irfft(state * self.grid.nlon, n=self.grid.nlon, axis=1)

    def initial_field(self, initial, lat_edges=None, grid: str | None = None) -> np.ndarray:
        """The initial radial field on the model grid (nlat, nlon), Gauss.

        ``initial``, ``lat_edges`` and ``grid`` as in :meth:`run`.
        """
        return _initial_field(initial, self.grid, lat_edges, grid)

    # ------------------------------------------------------------------ run
    def run(
        self,
        initial,
        years: float = 11.0,
        step_days: float = 1.0,
        sources: Sequence[BipolarRegion] | None = None,
        save_every_days: float = CARRINGTON_PERIOD_DAYS,
        cap_latitude: float = 60.0,
        progress: Callable[[int, int], None] | None = None,
        lat_edges=None,
        grid: str | None = None,
    ):
        """Evolve ``initial`` for ``years`` and return the saved states.

        Parameters
        ----------
        initial : SynopticMap, ndarray or callable
            A map (regridded onto the model grid conserving flux; missing polar
            pixels filled as ``measure_caps(fill="profile")`` does, other gaps taken
            as zero; a map with a whole cap unobserved is refused), an array
            (rows,) or (rows, columns) with row 0 southernmost, or
            f(lat_deg, lon_deg) -> Gauss evaluated at the cell centres. An array
            holding NaN or inf is refused (fill the map first, or pass the map).
        lat_edges : array-like, optional
            Latitude edges (degrees, -90 to 90, rows + 1 values) of an initial
            array's rows; the array is then regridded conserving flux.
        grid : {"sine-latitude", "equal-angle"}, optional
            Names the grid of an initial array's rows instead of ``lat_edges``.
            An array without ``lat_edges`` or ``grid`` is read as rows of the
            model's own equal-angle grid and must have its exact shape (nlat,) or
            (nlat, nlon): an array cannot tell its grid, so a sine-latitude
            profile of the same length must be named as such.
        years, step_days : float
            Length of the run and the time step; the step is adjusted slightly so
            that a whole number of steps ends exactly at ``years``.
        sources : sequence of BipolarRegion, optional
        save_every_days : float
            Interval between saved states (default: one Carrington rotation).
        cap_latitude : float
            Cap boundary for the polar mean fields in the output, degrees.
        progress : callable, optional
            Called as ``progress(step, nsteps)`` now and then.

        Returns
        -------
        xarray.Dataset
            ``br`` (time, lat[, lon]) in G; ``axial_dipole``, ``north_mean_field``,
            ``south_mean_field``, ``total_signed_flux``, ``total_unsigned_flux`` (time);
            coordinates ``time`` (years from the start), ``lat``, ``lon`` (degrees, cell centres).
        """
        nsteps, step_days = _steps(years, step_days)
        saves = _save_steps(nsteps, step_days, save_every_days)
        stepper = self.stepper(self.initial_field(initial, lat_edges, grid), step_days)
        regions = _sorted_sources(sources)
        next_region = 0
        frames = []
        report_every = max(1, nsteps // 100)
        save_at = set(saves.tolist())
        for step in range(nsteps + 1):
            if step in save_at:
                frames.append(stepper.field())
            if step == nsteps:
                break
            next_region = stepper.step_with_regions(regions, next_region)
            if progress is not None and (step % report_every == 0):
                progress(step, nsteps)
        if progress is not None:
            progress(nsteps, nsteps)
        times = saves * step_days / 365.25
        # regions emerging at or after the end are never deposited, so they are not counted
        return self._dataset(np.stack(frames), times, cap_latitude, years, step_days, next_region)

    def stepper(self, initial, step_days: float = 1.0) -> Stepper:
        """A :class:`Stepper` holding the model state, for runs driven step by step."""
        return Stepper(self, initial, step_days)

    def _dataset(self, frames: np.ndarray, times: np.ndarray, cap_latitude: float, years, step_days, nregions):
        import xarray as xr

        g = self.grid
        br = frames[:, :, 0] if self.axisymmetric else frames
        values, attrs = _frame_measures(br, g.lat_edges, cap_latitude, self.axisymmetric)
        series = {name: (("time",), values[name], attrs[name]) for name in values}
        dims = ("time", "lat") if self.axisymmetric else ("time", "lat", "lon")
        coords = {
            "time": ("time", times, {"units": "yr", "long_name": "time from the start of the run"}),
            "lat": ("lat", g.lat, {"units": "deg", "long_name": "latitude (cell centre)"}),
        }
        if not self.axisymmetric:
            coords["lon"] = ("lon", g.lon, {"units": "deg", "long_name": "Carrington longitude (cell centre)"})
        data_vars = {"br": (dims, br, {"units": "G", "long_name": "radial magnetic field"})}
        data_vars.update(series)
        attrs = {
            "title": "surface flux transport run",
            "diffusivity_km2_s": self.diffusivity,
            "flow": f"default (van Ballegooijen et al. 1998), peak {self.flow_speed:g} m/s"
            if self._flow_is_default else "user profile",
            "rotation": str(self._rotation_setting) if not callable(self._rotation_setting) else "user profile",
            "decay_time_yr": "none" if self.decay_time is None else self.decay_time,
            "axisymmetric": int(self.axisymmetric),
            "years": float(years),
            "step_days": float(step_days),
            "cap_deg": float(cap_latitude),
            "regions": int(nregions),  # regions deposited during the run
        }
        return xr.Dataset(data_vars, coords=coords, attrs=attrs)


class Stepper:
    """The state of a :class:`FluxTransport` model, advanced one fixed step at a time.

    For callers that decide what emerges as the run goes (the synthetic scenario)
    or that sample the field at their own times. :meth:`FluxTransport.run` is
    built on it.
    """

    def __init__(self, model: FluxTransport, initial, step_days: float = 1.0) -> None:
        if not step_days > 0:
            raise SettingsError(f"step_days={step_days} must be positive")
        self.model = model
        self.step_days = float(step_days)
        self.steps_done = 0
        dt = self.step_days * _DAY
        self._half = model._row_factor(0.5 * dt)
        self._matrix = model._crank_nicolson(dt)
        self._solid = model.grid.solid_angle()
        # The complex mode coefficients viewed as real numbers are columns that the
        # latitude step treats alike: one real matrix product advances every mode.
        self._state = np.ascontiguousarray(model._spectral(model.initial_field(initial)))
        self._other = np.empty_like(self._state)

    @property
    def time(self) -> float:
        """Years since the start."""
        return self.steps_done * self.step_days / 365.25

    def field(self) -> np.ndarray:
        """The radial field now, on the model grid: (nlat, nlon), or (nlat, 1) if axisymmetric."""
        return self.model._field(self._state)

    def add_regions(self, regions: Iterable[BipolarRegion]) -> None:
        """Deposit bipolar regions now (each adds zero net flux)."""
        regions = list(regions)
        if not regions:
            return
        g = self.model.grid
        deposit = np.zeros((g.nlat, g.nlon))
        for region in regions:
            deposit += region_field(region, g.lat, g.lon, self._solid)
        self._state += self.model._spectral(deposit)

    def step_with_regions(self, regions: Sequence[BipolarRegion], index: int = 0) -> int:
        """Deposit ``regions[index:]`` that emerge before this step ends, take the step, return the next index.

        ``regions`` must be sorted by time.
        """
        t_end = (self.steps_done + 1) * self.step_days / 365.25
        start = index
        while index < len(regions) and regions[index].time < t_end:
            index += 1
        self.add_regions(regions[start:index])
        self.step()
        return index

    def step(self, count: int = 1) -> None:
        """Advance ``count`` steps (Strang splitting: half row factor, Crank-Nicolson, half row factor)."""
        state, other, half, matrix = self._state, self._other, self._half, self._matrix
        for _ in range(int(count)):
            state *= half
            np.matmul(matrix, state.view(np.float64), out=other.view(np.float64))
            state, other = other, state
            state *= half
            flat = state.view(np.float64)
            magnitude = np.abs(flat, out=other.view(np.float64))
            flat[magnitude < _NEGLIGIBLE * magnitude.max()] = 0.0
        self._state, self._other = state, other
        self.steps_done += int(count)


def _frame_measures(frames: np.ndarray, lat_edges, cap_latitude: float, axisymmetric: bool):
    """Polar mean fields, axial dipole and total fluxes of saved frames (..., lat) or (..., lat, lon).

    The caps and the dipole come from :func:`polarflux.measure.profile_measures`,
    the archive measures' own weights applied to the longitude averages.
    """
    from ..geometry import cell_areas

    if axisymmetric:
        profiles, full = frames, frames[..., None]
    else:
        profiles, full = frames.mean(axis=-1), frames
    nlon = full.shape[-1]
    values = profile_measures(profiles, lat_edges, cap_latitude)
    areas = cell_areas(lat_edges, np.linspace(0.0, 360.0, nlon + 1))
    values["total_signed_flux"] = np.einsum("...jk,jk->...", full, areas)
    values["total_unsigned_flux"] = np.einsum("...jk,jk->...", np.abs(full), areas)
    attrs = {
        "axial_dipole": {"units": "G", "long_name": "axial dipole moment"},
        "north_mean_field": {"units": "G", "long_name": f"mean radial field poleward of {cap_latitude:g} N"},
        "south_mean_field": {"units": "G", "long_name": f"mean radial field poleward of {cap_latitude:g} S"},
        "total_signed_flux": {"units": "Mx", "long_name": "total signed flux over the sphere"},
        "total_unsigned_flux": {"units": "Mx", "long_name": "total unsigned flux over the sphere"},
    }
    return {name: values[name] for name in attrs}, attrs
