"""Ensembles of axisymmetric transport runs: many parameter sets evolved together.

The axisymmetric (m = 0) part of the surface flux transport model carries the polar
fields and the axial dipole exactly (see :mod:`polarflux.transport.model`); an
ensemble evolves one latitude profile per member with one tridiagonal solve per step
for all members at once.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np

from ..errors import SettingsError
from ..maps import SynopticMap
from .model import (
    _DAY,
    _YEAR,
    CARRINGTON_PERIOD_DAYS,
    _flow_profile,
    _frame_measures,
    _Grid,
    _initial_field,
    _latitude_operator,
    _save_steps,
    _sorted_sources,
    _steps,
)
from .sources import BipolarRegion, region_field

__all__ = ["TransportEnsemble"]


class TransportEnsemble:
    """Many axisymmetric transport models at once, one per member, vectorised.

    Parameters
    ----------
    nlat : int
        Grid rows (equal steps in latitude).
    diffusivity, flow_speed, decay_time : float or array-like
        Per member (broadcast together): km^2/s, m/s (peak of the default flow or
        scale of ``flow_profile``'s shape) and years (``np.inf`` or None for no decay).
    flow_profile : callable, optional
        f(lat_deg) -> northward speed in m/s for a peak of 1 m/s; scaled by
        ``flow_speed`` per member. Default: van Ballegooijen et al. (1998) shape.

    The scheme is that of :class:`FluxTransport` for the m = 0 mode.
    """

    def __init__(self, nlat: int = 180, diffusivity=250.0, flow_speed=11.0, decay_time=None,
                 flow_profile: Callable | None = None) -> None:
        self.grid = _Grid(nlat, 1)
        decay = np.inf if decay_time is None else decay_time
        eta, speed, tau = np.broadcast_arrays(
            np.asarray(diffusivity, dtype=np.float64), np.asarray(flow_speed, dtype=np.float64),
            np.asarray(decay, dtype=np.float64))
        self.diffusivity, self.flow_speed, self.decay_time = (np.atleast_1d(x).ravel().copy() for x in (eta, speed, tau))
        if np.any(self.diffusivity < 0) or np.any(self.decay_time <= 0):
            raise SettingsError("ensemble diffusivities must be >= 0 and decay times > 0")
        self.shape = _flow_profile(1.0, flow_profile)

    @property
    def members(self) -> int:
        return self.diffusivity.size

    def _initial_rows(self, initial, lat_edges, grid) -> np.ndarray:
        """Each member's initial profile on the model rows, shape (nlat, members)."""
        if callable(initial) and not isinstance(initial, SynopticMap):
            profile = initial
            initial = lambda lat, lon: profile(lat)  # noqa: E731 - the ensemble's callables take latitude only
        if isinstance(initial, SynopticMap) or callable(initial) or np.ndim(initial) != 2:
            rows = _initial_field(initial, self.grid, lat_edges, grid)  # (nlat, 1)
            return np.repeat(rows, self.members, axis=1)
        profiles = np.asarray(initial)
        if profiles.shape[0] != self.members:
            raise SettingsError(
                f"initial profiles of shape {profiles.shape}: a 2-D initial state holds one profile per member, "
                f"({self.members}, rows); for a map pass the SynopticMap"
            )
        return np.column_stack([_initial_field(p, self.grid, lat_edges, grid)[:, 0] for p in profiles])

    def run(self, initial, years: float = 11.0, step_days: float = 1.0,
            save_every_days: float = CARRINGTON_PERIOD_DAYS, cap_latitude: float = 60.0,
            sources: Sequence[BipolarRegion] | None = None, nlon_sources: int = 360,
            lat_edges=None, grid: str | None = None, deposit: Callable | None = None):
        """Evolve every member from ``initial``.

        Parameters
        ----------
        initial : SynopticMap, ndarray or callable
            A map (its longitude mean is taken, after the same polar filling and
            flux-conserving regridding as :meth:`FluxTransport.run`), a latitude
            profile (rows,) shared by all members, profiles (members, rows), or
            f(lat_deg) -> Gauss evaluated at the cell centres. Profiles holding
            NaN or inf (a longitude mean of a map with unseen polar rows) are
            refused with the number of rows missing: pass the map itself, or fill
            it with :func:`polarflux.fill_polar_gaps` first.
        years, step_days, save_every_days, cap_latitude, sources
            As in :meth:`FluxTransport.run`; ``nlon_sources`` columns are used to
            deposit each region before its longitude mean is taken.
        lat_edges : array-like, optional
            Latitude edges (degrees, -90 to 90) of the profile rows; the profiles
            are regridded to the model rows conserving flux.
        grid : {"sine-latitude", "equal-angle"}, optional
            Names the profile rows' grid instead of ``lat_edges``. A profile
            without ``lat_edges`` or ``grid`` is read as the model's own
            equal-angle rows and must have exactly ``nlat`` of them (a
            sine-latitude profile of that length cannot be told apart from its
            values, so it must be named).
        deposit : callable, optional
            f(lat_edges, t0, t1) -> field (G) of shape (nlat, members) or None: flux
            added per member for what emerges from ``t0`` to ``t1`` years after the start
            (for example :class:`polarflux.emergence.LateEmergence`'s ``deposit``).

        Returns
        -------
        xarray.Dataset
            ``br`` (member, time, lat) and the polar mean fields and axial dipole (member, time).
        """
        import xarray as xr

        g = self.grid
        k = self.members
        nsteps, step_days = _steps(years, step_days)
        dt = step_days * _DAY
        saves = _save_steps(nsteps, step_days, save_every_days)
        b = self._initial_rows(initial, lat_edges, grid)  # (nlat, k)
        flow = np.asarray(self.shape(g.lat_edges), dtype=np.float64)[:, None] * self.flow_speed[None, :]
        lower, diag, upper = _latitude_operator(g, self.diffusivity * 1e6, flow)
        half = 0.5 * dt
        decay = np.exp(-half / (self.decay_time * _YEAR))[None, :]
        solve = _Thomas(-half * lower, 1.0 - half * diag, -half * upper)
        regions = _sorted_sources(sources)
        fine = _Grid(g.nlat, nlon_sources)
        next_region = 0
        frames = np.empty((len(saves), g.nlat, k))
        saved = 0
        save_at = set(saves.tolist())
        for step in range(nsteps + 1):
            if step in save_at:
                frames[saved] = b
                saved += 1
            if step == nsteps:
                break
            t_end = (step + 1) * step_days / 365.25
            while next_region < len(regions) and regions[next_region].time < t_end:
                b += region_field(regions[next_region], fine.lat, fine.lon, fine.solid_angle()).mean(axis=1)[:, None]
                next_region += 1
            if deposit is not None:
                added = deposit(g.lat_edges, step * step_days / 365.25, t_end)
                if added is not None:
                    b += added
            b *= decay
            rhs = (1.0 + half * diag) * b
            rhs[1:] += half * lower[1:] * b[:-1]
            rhs[:-1] += half * upper[:-1] * b[1:]
            b = solve(rhs)
            b *= decay
        frames = np.transpose(frames, (2, 0, 1))  # member, time, lat
        times = saves * step_days / 365.25
        values, attrs = _frame_measures(frames, g.lat_edges, cap_latitude, axisymmetric=True)
        series = {name: (("member", "time"), values[name], attrs[name]) for name in values}
        return xr.Dataset(
            {"br": (("member", "time", "lat"), frames, {"units": "G", "long_name": "radial magnetic field"}),
             "diffusivity": (("member",), self.diffusivity, {"units": "km2 s-1"}),
             "flow_speed": (("member",), self.flow_speed, {"units": "m s-1"}),
             "decay_time": (("member",), self.decay_time, {"units": "yr"}),
             **series},
            coords={"member": np.arange(k), "time": ("time", times, {"units": "yr"}),
                    "lat": ("lat", g.lat, {"units": "deg"})},
            attrs={"title": "axisymmetric surface flux transport ensemble", "cap_deg": float(cap_latitude),
                   "step_days": float(step_days), "years": float(years)},
        )


class _Thomas:
    """Tridiagonal solves for many systems at once (one per column), factorised once.

    Bands have shape (n, k): ``lower[j]`` multiplies x[j-1], ``upper[j]`` x[j+1].
    No pivoting: the Crank-Nicolson matrices here are diagonally dominant.
    """

    def __init__(self, lower: np.ndarray, diag: np.ndarray, upper: np.ndarray) -> None:
        n = diag.shape[0]
        self.lower = lower
        self.c = np.empty_like(diag)
        self.inv = np.empty_like(diag)
        self.inv[0] = 1.0 / diag[0]
        self.c[0] = upper[0] * self.inv[0]
        for j in range(1, n):
            self.inv[j] = 1.0 / (diag[j] - lower[j] * self.c[j - 1])
            self.c[j] = upper[j] * self.inv[j]

    def __call__(self, rhs: np.ndarray) -> np.ndarray:
        n = rhs.shape[0]
        x = np.empty_like(rhs)
        x[0] = rhs[0] * self.inv[0]
        lower, inv, c = self.lower, self.inv, self.c
        for j in range(1, n):
            x[j] = (rhs[j] - lower[j] * x[j - 1]) * inv[j]
        for j in range(n - 2, -1, -1):
            x[j] -= c[j] * x[j + 1]
        return x
