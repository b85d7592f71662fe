"""The projection of the polar field to the coming minimum: the transport ensemble and its anchor.

Used by :mod:`polarflux.forecast` (the whole forecast) and :mod:`polarflux.emergence` (the
late-emergence flux fitted on the record's earlier minima). See the forecast module's notes.
"""

from __future__ import annotations

import os

import numpy as np

from .errors import PolarfluxError

__all__ = ["project_to_minimum", "record_prior", "shrink_to_prior"]


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


#: The spread of ln |proxy| at minima assumed before the record speaks, and its weight in cycles
#: (from memory: the Sun's polar fields at the minima measured since the 1970s differ by up to a
#: factor of two, a log standard deviation of about 0.25).
PRIOR_LOG_SD = 0.25
PRIOR_DOF = 2


def record_prior(values, prior_log_sd: float = PRIOR_LOG_SD, prior_dof: int = PRIOR_DOF) -> dict | None:
    """The record's own distribution of the proxy at a minimum, in log space (None with fewer than three).

    ``values`` are the proxy's magnitudes measured at the record's minima so far. Their logs
    are taken as normal with unknown mean (flat prior) and variance (scaled inverse chi-square
    prior: ``prior_log_sd`` with ``prior_dof`` degrees of freedom, so that three minima that
    happen to agree closely cannot claim the next one will too). The next one then follows a
    Student t with prior_dof + n - 1 degrees of freedom about the sample mean, with the scale
    sqrt((prior_dof prior_log_sd^2 + (n - 1) s^2) / (prior_dof + n - 1)) sqrt(1 + 1/n)
    (Gelman et al. 2013, *Bayesian Data Analysis*, 3rd ed., sect. 3.3; s the sample standard
    deviation).
    """
    v = np.abs(np.asarray(values, dtype=np.float64))
    v = v[np.isfinite(v) & (v > 0)]
    if v.size < 3:
        return None
    logs = np.log(v)
    n = v.size
    dof = prior_dof + n - 1
    pooled = (prior_dof * prior_log_sd**2 + (n - 1) * logs.var(ddof=1)) / dof
    return {"log_mean": float(logs.mean()), "log_scale": float(np.sqrt(pooled * (1.0 + 1.0 / n))),
            "dof": int(dof), "minima": int(n)}


def shrink_to_prior(values, prior: dict | None, log_sd: float | None = None) -> tuple[np.ndarray, dict]:
    """Combine a projected proxy ensemble with the record's prior (Bayes' rule by weighting the members).

    The members stand for the likelihood of ln |proxy| (the projection's spread under a flat
    prior). With ``log_sd`` (the error the projection is expected to make at this lead, from
    the record's earlier minima) they are first brought to that log spread about their log
    mean, wider or narrower. Each is then weighted by the prior's density
    (:func:`record_prior`, a Student t: far from the record's minima it flattens, so a cycle
    unlike the earlier ones is pulled back little), and every member moves to the weighted distribution's quantile at its own
    rank, which keeps their order (and so what drives them). Without a prior they are only
    brought to ``log_sd``; with neither they come back unchanged.

    Returns
    -------
    (ndarray, dict)
        The members' new magnitudes, and what the combination did: the medians before and after,
        the log spread used, the prior's median and the weights' effective number of members.
    """
    v = np.abs(np.asarray(values, dtype=np.float64))
    info = {"median_before": float(np.median(v)) if v.size else None, "median_after": None,
            "projection_log_sd": None, "prior_median": None, "effective_members": None}
    if v.size < 2 or not np.all(v > 0) or (prior is None and log_sd is None):
        info["median_after"] = info["median_before"]
        return v, info
    logs = np.log(v)
    m, spread = float(logs.mean()), float(logs.std(ddof=1))
    s = spread if log_sd is None else float(log_sd)
    stretched = m + (logs - m) * (s / spread) if spread > 0 else logs
    info["projection_log_sd"] = s
    if prior is None:
        out = np.exp(stretched)
        info["median_after"] = float(np.median(out))
        return out, info
    nu = prior["dof"]
    z = (stretched - prior["log_mean"]) / prior["log_scale"]
    weights = (1.0 + z**2 / nu) ** (-0.5 * (nu + 1.0))
    order = np.argsort(stretched, kind="stable")
    w = weights[order] / weights.sum()
    centres = np.cumsum(w) - 0.5 * w  # the weighted distribution's quantile at each sorted member
    ranks = (np.arange(v.size) + 0.5) / v.size
    out = np.empty_like(v)
    out[order] = np.exp(np.interp(ranks, centres, stretched[order]))
    info.update(median_after=float(np.median(out)), prior_median=float(np.exp(prior["log_mean"])),
                effective_members=float(weights.sum() ** 2 / np.sum(weights**2)))
    return out, info


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

    The merged record's viewing-corrected polar mean field (mean of north and minus south), each
    cap's (``north``, ``south``, magnitudes) and the axial dipole, each on the reference scale with
    its own factor (as the merge applied them), smoothed as a straight line fitted to the last 13 rotations up to ``when`` and taken at
    ``when`` (a centred 13-rotation mean, as at the calibration's minima, needs half a year of
    later data). The errors are the line's standard error there.
    """
    from .timeseries import to_decimal_year

    t, _ = to_decimal_year(merged["time"].values)
    now = float(to_decimal_year(np.array([when], dtype="datetime64[ns]"))[0][0])
    corrected = merged["mean_field_corrected"].values
    series = {"mean_field": 0.5 * (corrected[:, 0] - corrected[:, 1]), "axial_dipole": merged["axial_dipole"].values,
              "north": corrected[:, 0], "south": corrected[:, 1]}
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
