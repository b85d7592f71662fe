"""One record across instruments, and the yearly viewing correction.

Cross-calibration
-----------------
Where two instruments measured the same Carrington rotations, the scale factor k
that brings an instrument onto the reference (reference = k x instrument) is
fitted by Deming regression through the origin, which allows for errors in both
measures (Deming 1943, *Statistical Adjustment of Data*; the orthogonal-distance
case with equal error variances, as ODRPACK's orthogonal distance regression
solves it, Boggs & Rogers 1990). The closed form for error-variance ratio delta
(y over x) with uncentred sums Sxx, Syy, Sxy is

    k = (Syy - delta Sxx + sqrt((Syy - delta Sxx)^2 + 4 delta Sxy^2)) / (2 Sxy).

The ratio delta is not taken as 1: two instruments are rarely equally noisy, and
with the wrong ratio the slope is pulled towards one of the two ordinary
regressions (attenuated by the noise of the one taken as exact), the more so the
weaker the fields of the overlap (near a minimum, through a reversal). Each
instrument's noise is estimated from its own record, per quantity, as the robust
standard deviation of second differences over consecutive rotations,
1.4826 MAD(y[i-1] - 2 y[i] + y[i+1]) / sqrt(6) (the polar fields change little
over three rotations; a straight line has no second difference), and delta is the
ratio of their squares (``error_ratio``; 1 where either cannot be estimated). On
the hard invented worlds, where the reference (finer) instrument is three times
quieter and the overlap spans a minimum, delta = 1 put the dipole's factor 5 %
low on average and up to 25 % low on a single world.

Its uncertainty is the standard deviation of k over bootstrap resamples of the
rotation pairs (2000 resamples, fixed seed), with a 95 % percentile interval.
Factors are fitted for the north cap, the south cap, both caps together and the
axial dipole (a whole-map quantity); published cross-calibrations find the factor
depends on field strength and position on the disk (Pietarila et al. 2012;
Virtanen & Mursula 2019), so the record reports whether the per-cap factors
differ from the joint one by more than their uncertainties allow.

Viewing correction
------------------
Seen from near the ecliptic each pole is best seen once a year (B0 = +7.25 deg
for the north, -7.25 deg for the south), and hidden beyond the limb in part
while it is tilted away: the loss is one-sided. The default correction models
the measured value as true x (1 + c a), a = max(0, -B0 towards that pole) in
degrees, fits c from each hemisphere's deviations from its 13-rotation running
mean (which holds the year's mean loss, so both the swing and the mean shortfall
are removed), and divides the measures by 1 + c a. A record whose unseen pole
was filled (``fill="temporal"`` or ``"profile"``) has little left to remove. Unlike a yearly
running mean it keeps the time resolution of the record, which matters near a
reversal. ``viewing="annual"`` uses the 13-rotation running mean instead, and
``viewing="none"`` leaves the measures as they are. B0 comes from
``sunpy.coordinates.sun.B0`` at each map time.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from .errors import SettingsError
from .maps import quiet_time_warnings
from .timeseries import RECORD_MIN_COUNT, running_mean

__all__ = ["ScaleFactor", "deming_through_origin", "cross_calibrate", "merge_instruments", "VIEWING_METHODS"]

VIEWING_METHODS = ("b0", "annual", "none")
_QUANTITIES = ("north", "south", "polar", "axial_dipole")


@dataclass(frozen=True)
class ScaleFactor:
    """reference = factor x instrument, fitted on ``pairs`` rotations seen by both.

    ``error_ratio``: the ratio of the reference's noise variance to the instrument's
    that the Deming fit used (from each one's own record; see the module notes).
    """

    instrument: str
    reference: str
    quantity: str
    factor: float
    uncertainty: float
    low95: float
    high95: float
    pairs: int
    error_ratio: float = 1.0


def deming_through_origin(x, y, delta: float = 1.0) -> float:
    """Slope k of y = k x with errors in both x and y (error-variance ratio delta = var(y) / var(x))."""
    x, y = np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)
    sxx, syy, sxy = np.sum(x * x, axis=-1), np.sum(y * y, axis=-1), np.sum(x * y, axis=-1)
    d = syy - delta * sxx
    return (d + np.sqrt(d * d + 4.0 * delta * sxy * sxy)) / (2.0 * sxy)


def _fit(x: np.ndarray, y: np.ndarray, delta: float = 1.0, seed: int = 0, resamples: int = 2000):
    k = float(deming_through_origin(x, y, delta))
    rng = np.random.default_rng(seed)
    index = rng.integers(0, x.size, size=(resamples, x.size))
    boot = deming_through_origin(x[index], y[index], delta)
    return k, float(np.std(boot, ddof=1)), float(np.percentile(boot, 2.5)), float(np.percentile(boot, 97.5))


_MAD_TO_SIGMA = 1.4826
_MIN_TRIPLES = 10  # fewer runs of three consecutive rotations estimate no noise
_ERROR_RATIO_RANGE = (1e-3, 1e3)


def noise_sd(values: np.ndarray, rotations: np.ndarray) -> float:
    """One instrument's noise (standard deviation) in ``values``, from second differences over consecutive rotations.

    1.4826 MAD(y[i-1] - 2 y[i] + y[i+1]) / sqrt(6): for independent noise of standard
    deviation s the second difference has variance 6 s^2, and a trend that is
    straight over three rotations leaves none. NaN with fewer than 10 such runs.
    """
    values = np.asarray(values, dtype=np.float64)
    rotations = np.asarray(rotations, dtype=np.int64)
    order = np.argsort(rotations, kind="stable")
    v, r = values[order], rotations[order]
    if v.size < 3:
        return float("nan")
    consecutive = (np.diff(r)[:-1] == 1) & (np.diff(r)[1:] == 1) & (r[:-2] >= 0)
    second = (v[:-2] - 2.0 * v[1:-1] + v[2:])[consecutive]
    second = second[np.isfinite(second)]
    if second.size < _MIN_TRIPLES:
        return float("nan")
    return float(_MAD_TO_SIGMA * np.median(np.abs(second - np.median(second))) / np.sqrt(6.0))


def _error_ratio(var_ref: float, var_inst: float) -> float:
    """var(reference noise) / var(instrument noise) for the Deming fit; 1 where either is unknown."""
    if not (np.isfinite(var_ref) and np.isfinite(var_inst) and var_ref > 0 and var_inst > 0):
        return 1.0
    return float(np.clip(var_ref / var_inst, *_ERROR_RATIO_RANGE))


def _pairs(record, instrument: str, reference: str):
    """Index pairs (instrument entry, reference entry) of the rotations both measured."""
    rotations = record["carrington_rotation"].values
    names = np.array([str(x) for x in record["instrument"].values])
    ref = {int(r): i for i, r in enumerate(rotations) if names[i] == reference and r >= 0}
    return [(i, ref[int(r)]) for i, r in enumerate(rotations) if names[i] == instrument and int(r) in ref]


def cross_calibrate(record, reference: str | None = None) -> list[ScaleFactor]:
    """Scale factors of every other instrument onto ``reference`` (default: the one with most maps)."""
    names = [str(x) for x in record["instrument"].values]
    instruments = sorted(set(names), key=lambda n: (-names.count(n), n))
    if reference is None:
        reference = instruments[0]
    if reference not in instruments:
        raise SettingsError(f"reference instrument {reference!r} is not in the record ({', '.join(instruments)})")
    mean = record["mean_field"].values
    dipole = record["axial_dipole"].values
    rotations = record["carrington_rotation"].values
    names_array = np.array(names)
    out = []
    for inst in instruments:
        if inst == reference:
            continue
        pairs = _pairs(record, inst, reference)
        if len(pairs) < 3:
            raise SettingsError(
                f"instrument {inst!r} shares only {len(pairs)} rotations with {reference!r}; "
                "at least 3 are needed to cross-calibrate"
            )
        a, b = np.array([p[0] for p in pairs]), np.array([p[1] for p in pairs])
        data = {
            "north": (mean[a, 0], mean[b, 0]),
            "south": (mean[a, 1], mean[b, 1]),
            "polar": (mean[a].ravel(), mean[b].ravel()),
            "axial_dipole": (dipole[a], dipole[b]),
        }
        # each instrument's noise variance per quantity, from its own record; both caps: the two summed
        variances = {q: tuple(noise_sd(column[names_array == n], rotations[names_array == n]) ** 2
                              for n in (reference, inst))
                     for q, column in (("north", mean[:, 0]), ("south", mean[:, 1]), ("axial_dipole", dipole))}
        variances["polar"] = tuple(np.add(variances["north"], variances["south"]))
        ratios = {q: _error_ratio(*v) for q, v in variances.items()}
        for quantity in _QUANTITIES:
            x, y = data[quantity]
            good = np.isfinite(x) & np.isfinite(y)
            k, sd, lo, hi = _fit(x[good], y[good], ratios[quantity])
            out.append(ScaleFactor(inst, reference, quantity, k, sd, lo, hi, int(good.sum()), ratios[quantity]))
    return out


def _band_factors_needed(factors: list[ScaleFactor]) -> bool:
    by = {f.quantity: f for f in factors}
    joint = by["polar"]
    for name in ("north", "south", "axial_dipole"):
        f = by[name]
        if abs(f.factor - joint.factor) > 2.0 * np.hypot(f.uncertainty, joint.uncertainty):
            return True
    return False


def _b0_degrees(times: np.ndarray) -> np.ndarray:
    from astropy.time import Time
    from sunpy.coordinates.sun import B0

    with quiet_time_warnings():
        return np.atleast_1d(B0(Time(times.astype("datetime64[ns]"), scale="utc")).to_value("deg"))


def merge_instruments(record, reference: str | None = None, per_band: bool = False, viewing: str = "b0"):
    """One record on the reference instrument's scale, one entry per rotation, with the viewing correction.

    Parameters
    ----------
    record : xarray.Dataset
        From :func:`polarflux.measure_archive` (any number of instruments).
    reference : str, optional
        Instrument whose scale the record takes (default: the one with most maps).
    per_band : bool
        Apply the north and south cap factors separately instead of the joint polar factor.
    viewing : {"b0", "annual", "none"}
        Viewing correction (see the module notes); the default regresses on B0.

    Returns
    -------
    xarray.Dataset
        ``mean_field``, ``signed_flux`` (time, hemisphere) and ``axial_dipole`` on
        the reference scale, one entry per Carrington rotation (missing rotations
        are entries of NaN, so gaps stay gaps); ``mean_field_corrected``, ``signed_flux_corrected`` after
        the viewing correction; ``b0`` (deg); ``instruments`` (how many measured the
        rotation). Factors, their uncertainties and the B0 coefficients are in the
        attributes (``scale_factors`` as JSON).
    """
    import json

    import xarray as xr

    if viewing not in VIEWING_METHODS:
        raise SettingsError(f"viewing={viewing!r} is not one of {VIEWING_METHODS}")
    names = np.array([str(x) for x in record["instrument"].values])
    instruments = sorted(set(names.tolist()))
    factors = cross_calibrate(record, reference) if len(instruments) > 1 else []
    reference = factors[0].reference if factors else (instruments[0] if instruments else "")
    scale_cap = np.ones((names.size, 2))
    scale_dipole = np.ones(names.size)
    for f in factors:
        rows = names == f.instrument
        if f.quantity == "axial_dipole":
            scale_dipole[rows] = f.factor
        elif per_band and f.quantity in ("north", "south"):
            scale_cap[rows, 0 if f.quantity == "north" else 1] = f.factor
        elif not per_band and f.quantity == "polar":
            scale_cap[rows, :] = f.factor
    mean = record["mean_field"].values * scale_cap
    flux = record["signed_flux"].values * scale_cap
    fill_error = (record["fill_error"].values if "fill_error" in record else np.full(mean.shape, np.nan)) * scale_cap
    dipole = record["axial_dipole"].values * scale_dipole

    # one entry per rotation: the mean over the instruments that measured it
    rotations = record["carrington_rotation"].values.astype(np.int64)
    times = record["time"].values
    keys = np.where(rotations >= 0, rotations, -(np.arange(rotations.size) + 1))
    unique, inverse, counts = np.unique(keys, return_inverse=True, return_counts=True)

    def per_rotation(values):
        total = np.zeros((unique.size,) + values.shape[1:])
        np.add.at(total, inverse, values)
        return total / counts.reshape((-1,) + (1,) * (values.ndim - 1))
    t = np.array([times[inverse == k].astype("datetime64[ns]").astype(np.int64).mean() for k in range(unique.size)])
    t = t.astype("datetime64[ns]")
    order = np.argsort(t)
    mean_r, flux_r, dipole_r, fill_r = (per_rotation(v)[order] for v in (mean, flux, dipole, fill_error))
    t = t[order]
    rotation_numbers = unique[order]
    counts = counts[order]
    # Missing rotations become entries of NaN, so that gaps stay gaps in what follows.
    known = rotation_numbers >= 0
    if known.sum() > 1 and np.all(rotation_numbers == np.sort(rotation_numbers)):
        full = np.arange(rotation_numbers[known][0], rotation_numbers[known][-1] + 1)
        if full.size > known.sum():
            where = np.searchsorted(full, rotation_numbers[known])
            def spread(values):
                grown = np.full((full.size,) + values.shape[1:], np.nan)
                grown[where] = values[known]
                return grown
            period = np.median(np.diff(t[known].astype(np.int64)) / np.diff(rotation_numbers[known]))
            t_full = (t[known][0].astype(np.int64) + (full - full[0]) * period).astype("datetime64[ns]")
            t_full[where] = t[known]
            mean_r, flux_r, dipole_r, fill_r = spread(mean_r), spread(flux_r), spread(dipole_r), spread(fill_r)
            grown_counts = np.zeros(full.size, dtype=np.int64)
            grown_counts[where] = counts[known]
            t, rotation_numbers, counts = t_full, full, grown_counts
    b0 = _b0_degrees(t)
    corrected_mean, corrected_flux, coefficients = _viewing_correction(mean_r, flux_r, b0, viewing)

    attrs = dict(record.attrs)
    attrs.update({
        "reference_instrument": reference,
        "scale_factors": json.dumps([asdict(f) for f in factors]),
        "band_factors_needed": int(any(_band_factors_needed([f for f in factors if f.instrument == i])
                                       for i in {f.instrument for f in factors})),
        "per_band": int(per_band),
        "viewing_correction": viewing,
        "fill": str(record.attrs.get("fill", "")),
        "b0_coefficients": json.dumps(coefficients),
        "calibration_method": "Deming regression through the origin (equal error variances), bootstrap errors",
    })
    data_vars = {
        "mean_field": (("time", "hemisphere"), mean_r, {"units": "G", "long_name": "polar-cap mean field, reference scale"}),
        "signed_flux": (("time", "hemisphere"), flux_r, {"units": "Mx", "long_name": "polar-cap signed flux, reference scale"}),
        "mean_field_corrected": (("time", "hemisphere"), corrected_mean,
                                 {"units": "G", "long_name": f"mean field, viewing correction {viewing}"}),
        "signed_flux_corrected": (("time", "hemisphere"), corrected_flux,
                                  {"units": "Mx", "long_name": f"signed flux, viewing correction {viewing}"}),
        "axial_dipole": (("time",), dipole_r, {"units": "G", "long_name": "axial dipole, reference scale"}),
        "fill_error": (("time", "hemisphere"), fill_r,
                       {"units": "G", "long_name": "uncertainty of the cap mean field from the fill of its unseen part, "
                        "reference scale (NaN: not known)"}),
        "b0": (("time",), b0, {"units": "deg", "long_name": "heliographic latitude of the observer (B0)"}),
        "instruments": (("time",), counts, {"long_name": "instruments that measured the rotation (0: missing)"}),
        "carrington_rotation": (("time",), rotation_numbers, {"long_name": "Carrington rotation number"}),
    }
    return xr.Dataset(data_vars, coords={"time": t, "hemisphere": ["north", "south"]}, attrs=attrs)


def _viewing_correction(mean: np.ndarray, flux: np.ndarray, b0: np.ndarray, viewing: str):
    if viewing == "none":
        return mean.copy(), flux.copy(), {}
    out_mean, out_flux = np.empty_like(mean), np.empty_like(flux)
    coefficients = {}
    for j, hemisphere in enumerate(("north", "south")):
        trend = running_mean(mean[:, j], 13, RECORD_MIN_COUNT)
        if viewing == "annual":
            out_mean[:, j] = trend
            out_flux[:, j] = running_mean(flux[:, j], 13, RECORD_MIN_COUNT)
            continue
        # only the pole tilted away from the observer loses flux (beyond the limb): the measured value
        # is true x (1 + c a), a = max(0, -B0 towards this pole); the 13-rotation trend holds the
        # year's mean loss too, true x (1 + c a_mean), so the deviation from it is
        # trend x c' (a - a_mean) with c' = c / (1 + c a_mean)
        away = np.maximum(0.0, -b0 if hemisphere == "north" else b0)
        away_mean = running_mean(away, 13, RECORD_MIN_COUNT)
        regressor = trend * (away - away_mean)
        good = np.isfinite(regressor) & np.isfinite(mean[:, j])
        slope = float(np.sum(regressor[good] * (mean[good, j] - trend[good])) / np.sum(regressor[good] ** 2)) \
            if good.sum() > 3 and np.sum(regressor[good] ** 2) > 0 else 0.0
        known = np.isfinite(away_mean)
        c = slope / (1.0 - slope * float(away_mean[known].mean())) if known.any() else 0.0
        coefficients[hemisphere] = c
        ratio = np.maximum(1.0 + c * away, 0.2)  # never more than five-fold
        out_mean[:, j] = mean[:, j] / ratio
        out_flux[:, j] = flux[:, j] / ratio
    return out_mean, out_flux, coefficients
