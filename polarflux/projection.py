"""The projection of the polar field to the coming minimum: the transport ensemble and its anchor.

Used by :mod:`polarflux.forecast` (the whole forecast) and :mod:`polarflux.emergence` (the
late-emergence flux fitted on the record's earlier minima). See the forecast module's notes.
"""

from __future__ import annotations

import os

import numpy as np

from .errors import PolarfluxError

__all__ = ["project_to_minimum"]


def project_to_minimum(profile, lat_edges, now: float, last_minimum: float, members: int = 300,
                       seed: int = 0, nlat: int = 180, cap_latitude: float = 60.0,
                       cycle_length=(11.0, 0.8), earliest: float | None = None, late=None) -> dict:
    """Evolve a latitude profile to each member's date of minimum with an axisymmetric ensemble.

    Parameters
    ----------
    profile : array-like
        Longitude-averaged radial field now (G), on ``lat_edges`` (degrees), no NaN.
    now, last_minimum : float
        Decimal years.
    members, seed : int
    cycle_length : (mean, sd)
        Years from the last minimum to the next.
    earliest : float, optional
        The earliest the coming minimum can be (decimal year): the normal distribution of the
        cycle length is truncated there (a minimum earlier than that would already be
        confirmed by the data). Default: one rotation after ``now``. Members whose minimum is
        before ``now`` keep the field of ``now``.

    Returns
    -------
    dict of ndarray (members,)
        ``minimum`` (decimal year), ``axial_dipole``, ``north``, ``south``, ``mean_field``
        at each member's minimum, and the drawn ``diffusivity``, ``flow_speed``, ``decay_time``.
    """
    from .measure import profile_measures

    rng, eta, speed, tau = _ensemble_draws(members, seed)
    from scipy.stats import truncnorm

    low = now + 27.2753 / 365.25 if earliest is None else float(earliest)
    mean, sd = cycle_length
    a = (low - last_minimum - mean) / sd
    if a > 8.0:  # far past the usual length: within a rotation or so of the bound
        minimum = low + rng.exponential(sd / a, members)
    else:
        minimum = last_minimum + mean + sd * truncnorm.ppf(rng.uniform(0.0, 1.0, members), a, np.inf)
    horizon = max(float(minimum.max() - now), 27.2753 / 365.25)
    run, start, edges = _evolve(profile, lat_edges, eta, speed, tau, horizon, nlat, cap_latitude,
                                None if late is None else late.deposit)
    when = now + run["time"].values
    out = {"minimum": minimum, "diffusivity": eta, "flow_speed": speed, "decay_time": tau}
    for name, var in (("axial_dipole", "axial_dipole"), ("north", "north_mean_field"), ("south", "south_mean_field")):
        series = run[var].values
        out[name] = np.array([np.interp(minimum[k], when, series[k]) for k in range(members)])
    out["mean_field"] = 0.5 * (np.abs(out["north"]) + np.abs(out["south"]))
    measures = profile_measures(start, edges, cap_latitude)
    out["now"] = {k: float(v) for k, v in measures.items()}
    return out


def _ensemble_draws(members: int, seed: int):
    """The ensemble's transport parameters: diffusivity (km^2/s), peak flow (m/s), decay time (yr)."""
    rng = np.random.default_rng(seed)
    eta = rng.uniform(250.0, 600.0, members)
    speed = rng.uniform(8.0, 15.0, members)
    tau = np.where(rng.random(members) < 0.25, np.inf, rng.uniform(5.0, 10.0, members))
    return rng, eta, speed, tau


def _model_rows(profile, lat_edges, nlat: int):
    """A latitude profile regridded (flux-conserving) onto the model's rows; the rows and their edges."""
    from .geometry import regrid_conservative
    from .transport.model import model_grid

    edges, _ = model_grid(nlat, 1)
    rows = regrid_conservative(np.asarray(profile, dtype=np.float64)[:, None], lat_edges, [0.0, 360.0],
                               edges, [0.0, 360.0])[:, 0]
    return rows, edges


def _evolve(profile, lat_edges, eta, speed, tau, years: float, nlat: int, cap_latitude: float, deposit=None):
    """Run the axisymmetric ensemble from a profile; the run, the start on the model rows, the model edges."""
    from .transport import TransportEnsemble

    start, edges = _model_rows(profile, lat_edges, nlat)
    ensemble = TransportEnsemble(nlat=nlat, diffusivity=eta, flow_speed=speed, decay_time=tau)
    run = ensemble.run(start, years=years, step_days=5.0, save_every_days=27.2753, cap_latitude=cap_latitude,
                       deposit=deposit)
    return run, start, edges


def _run_batch(runs, members: int, seed: int, cap_latitude: float, nlat: int = 180):
    """Several projections in one ensemble run, each with ``members`` parameter draws.

    ``runs``: (profile, lat_edges, years, source or None) each, the source a
    :class:`~polarflux.emergence.LateEmergence` of ``members`` members. Returns each
    run's member dipoles after its own years, shape (runs, members), and each start's model dipole.
    """
    from .measure import profile_measures
    from .transport import TransportEnsemble

    _, eta, speed, tau = _ensemble_draws(members, seed)
    starts = []
    for profile, lat_edges, _years, _source in runs:
        rows, edges = _model_rows(profile, lat_edges, nlat)
        starts.append(rows)
    initial = np.repeat(np.array(starts), members, axis=0)  # (runs x members, rows)
    sources = [(i, source, years) for i, (_p, _e, years, source) in enumerate(runs) if source is not None]

    def deposit(lat_edges, t0, t1):
        out = np.zeros((len(lat_edges) - 1, initial.shape[0]))
        for i, source, years in sources:
            if t0 < years:
                added = source.deposit(lat_edges, t0, t1)
                if added is not None:
                    out[:, i * members:(i + 1) * members] = added
        return out

    ensemble = TransportEnsemble(nlat=nlat, diffusivity=np.tile(eta, len(runs)), flow_speed=np.tile(speed, len(runs)),
                                 decay_time=np.tile(tau, len(runs)))
    longest = max(r[2] for r in runs)
    run = ensemble.run(initial, years=longest, step_days=5.0, save_every_days=27.2753, cap_latitude=cap_latitude,
                       lat_edges=edges, deposit=deposit if sources else None)
    times, dipole = run["time"].values, run["axial_dipole"].values
    out = np.array([[np.interp(r[2], times, dipole[i * members + m]) for m in range(members)]
                    for i, r in enumerate(runs)])
    return out, np.array([profile_measures(rows, edges, cap_latitude)["axial_dipole"] for rows in starts])


def _latest_profile(record, merged, as_of_ns, bases=("",)):
    """Longitude-averaged field of the latest readable map at or before ``as_of``, on the reference scale."""
    import json

    from .maps import read_map
    from .measure import fill_polar_gaps

    listed = json.loads(merged.attrs.get("scale_factors", "[]"))
    factors = {(f["instrument"], f["quantity"]): f["factor"] for f in listed}
    # each factor's relative uncertainty: what bringing this map's instrument onto the reference adds
    relative = {(f["instrument"], f["quantity"]): abs(f["uncertainty"] / f["factor"]) if f["factor"] else 0.0
                for f in listed}
    fields = record["map_field"].values.astype(str) if "map_field" in record else None
    times = record["time"].values.astype("datetime64[ns]")
    for i in np.argsort(times)[::-1]:
        if times[i] > as_of_ns:
            continue
        candidates = [os.path.join(b, str(record["source"].values[i])) for b in bases]
        found = [c for c in candidates if os.path.exists(c)]
        if not found:
            continue
        path = found[0]
        field = fields[i] if fields is not None and fields[i] in ("radial", "los") else "radial"
        try:  # read as the record read it: line-of-sight maps converted to radial field
            m = fill_polar_gaps(read_map(path, field=field), float(record.attrs.get("cap_deg", 60.0)))
        except PolarfluxError:
            continue
        values = np.where(np.isfinite(m.values), m.values, np.nan)
        profile = np.nanmean(values, axis=1)
        profile = np.where(np.isfinite(profile), profile, 0.0)
        instrument = str(record["instrument"].values[i])
        anchor = _anchor(merged, times[i])
        anchor["cross_calibration"] = {"mean_field": relative.get((instrument, "polar"), 0.0),
                                       "axial_dipole": relative.get((instrument, "axial_dipole"), 0.0)}
        return profile * factors.get((instrument, "polar"), 1.0), m.lat_edges, path, times[i], anchor
    return None


def _anchor(merged, when) -> dict:
    """The proxies the projection is anchored to, as the calibration sees them, and their errors.

    The merged record's viewing-corrected polar mean field (mean of north and minus south) and
    axial dipole, each on the reference scale with its own factor (as the merge applied them),
    smoothed as a straight line fitted to the last 13 rotations up to ``when`` and taken at
    ``when`` (a centred 13-rotation mean, as at the calibration's minima, needs half a year of
    later data). The errors are the line's standard error there.
    """
    from .timeseries import to_decimal_year

    t, _ = to_decimal_year(merged["time"].values)
    now = float(to_decimal_year(np.array([when], dtype="datetime64[ns]"))[0][0])
    corrected = merged["mean_field_corrected"].values
    series = {"mean_field": 0.5 * (corrected[:, 0] - corrected[:, 1]), "axial_dipole": merged["axial_dipole"].values}
    out, errors = {}, {}
    for name, y in series.items():
        good = np.flatnonzero(np.isfinite(y) & (t <= now + 1e-9))[-13:]
        if good.size < 4:
            out[name], errors[name] = (abs(float(y[good[-1]])) if good.size else np.nan), 0.0
            continue
        design = np.column_stack([np.ones(good.size), t[good] - now])
        beta, *_ = np.linalg.lstsq(design, y[good], rcond=None)
        residual = y[good] - design @ beta
        cov = np.linalg.inv(design.T @ design) * float(residual @ residual) / (good.size - 2)
        out[name], errors[name] = abs(float(beta[0])), float(np.sqrt(cov[0, 0]))
    out["errors"] = errors
    return out
