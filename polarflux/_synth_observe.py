"""Observation for the invented scenario: instruments, and synoptic maps assembled at central meridian.

Private to :mod:`polarflux.synthetic`. Two ways of observing:

* ``"radial"`` (the default scenario): the radial field at mid-rotation, remapped
  onto the instrument's grid, scaled, with noise divided by cos(latitude).
* ``"los-meridian"``: as real synoptic magnetograms are made. Each longitude
  column of the map of Carrington rotation N is observed when it crosses the
  central meridian (at Carrington rotation number N + 1 - longitude / 360), with
  that moment's B0 angle, so the map holds the line-of-sight field
  Br cos(latitude - B0) of that column, and the pole tilted away from the observer
  is blank in a different number of rows in each column. The transport run
  supplies the field of the model step nearest each column's time
  (:class:`MeridianRecorder`).

Instruments have a field-dependent response (a scale that goes from ``scale`` in
weak fields to ``strong_field_scale`` in strong fields, then saturation at
``saturation_g``), their own Gaussian blur (``blur_deg``, full width at half
maximum), grid and noise.

FITS keywords of the line-of-sight maps (polarflux conventions unless standard):

``MAPFIELD = 'LOS'``, ``OBSMODE = 'CENTRAL-MERIDIAN'``; ``DATE-BEG`` / ``DATE-END``
(FITS standard 4.0 time keywords: first and last column observed); ``CRLT_OBS``
(standard: B0 at ``DATE-OBS``, mid-rotation); ``TCOL0`` ... ``TCOL3``: the column
observation time as MJD (UTC) = sum_k TCOLk x^k and ``B0COL0`` ... ``B0COL3``: the
B0 angle in degrees = sum_k B0COLk x^k, both with x = (CRLN - 180) / 180 and CRLN the
Carrington longitude of the column centre in degrees; ``TCOLERR`` (days) and
``B0COLERR`` (degrees): the largest difference between the polynomials and the
values used at the columns; ``LIMBANG``: pixels farther than this (degrees) from
the disk centre, |latitude - B0| > LIMBANG, are blank.

References
----------
Thompson, W. T. 2006, A&A 449, 791 (coordinate keywords, CRLT_OBS).
Riley, P., et al. 2014, Sol. Phys. 289, 769 (observatories' synoptic maps differ by field-dependent factors).
Pietarila, A., Bertello, L., Harvey, J. W., & Pevtsov, A. A. 2013, Sol. Phys. 282, 91 (cross-calibration
depends on field strength).
"""

from __future__ import annotations

import math

import numpy as np

from .geometry import regrid_conservative
from .maps import SynopticMap

#: Field strength (G) at which the response is half way from the weak-field scale to the strong-field scale.
RESPONSE_KNEE_G = 100.0
OBSERVATIONS = ("radial", "los-meridian")
_FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))


def is_linear(inst) -> bool:
    return inst.saturation_g is None and inst.strong_field_scale is None


def response(values: np.ndarray, inst) -> np.ndarray:
    """The instrument's reading of a field (G): s(|B|) B, then saturation B_sat tanh(. / B_sat).

    s(|B|) = scale + (strong_field_scale - scale) |B| / (|B| + RESPONSE_KNEE_G).
    """
    values = np.asarray(values, dtype=np.float64)
    strong = inst.scale if inst.strong_field_scale is None else inst.strong_field_scale
    magnitude = np.abs(values)
    out = (inst.scale + (strong - inst.scale) * magnitude / (magnitude + RESPONSE_KNEE_G)) * values
    if inst.saturation_g is not None:
        out = inst.saturation_g * np.tanh(out / inst.saturation_g)
    return out


def _blur(values: np.ndarray, grid, fwhm_deg: float) -> np.ndarray:
    from scipy.ndimage import gaussian_filter

    sigma = fwhm_deg / _FWHM_PER_SIGMA
    return gaussian_filter(values, sigma=(sigma * grid.nlat / 180.0, sigma * grid.nlon / 360.0),
                           mode=("nearest", "wrap"), truncate=3.0)


def _instrument_map(values: np.ndarray, grid, inst) -> tuple[np.ndarray, SynopticMap]:
    """Blur, response and remap of a model-grid field onto the instrument's grid."""
    m = SynopticMap.from_array(np.zeros((inst.nlat, inst.nlon)))
    if inst.blur_deg > 0:
        values = _blur(values, grid, inst.blur_deg)
    if is_linear(inst):
        br = regrid_conservative(values, grid.lat_edges, grid.lon_edges, m.lat_edges, m.lon_edges)
        br *= inst.scale
    else:  # the response acts on each fine pixel, before the map's cells average them
        br = regrid_conservative(response(values, inst), grid.lat_edges, grid.lon_edges, m.lat_edges, m.lon_edges)
    return br, m


def observe_radial(field_model: np.ndarray, model_grid, inst, rng: np.random.Generator):
    """One instrument's radial map of the model field: remap, response and noise (the caller masks the pole)."""
    br, m = _instrument_map(field_model, model_grid, inst)
    if inst.noise_g > 0:
        cosine = np.maximum(np.cos(np.deg2rad(m.lat)), 0.1)
        br += rng.normal(0.0, inst.noise_g, br.shape) / cosine[:, None]
    return br, m


def observe_los(composite_br: np.ndarray, b0_model: np.ndarray, model_grid, inst, b0_map: np.ndarray,
                limb_angle: float, rng: np.random.Generator):
    """One instrument's line-of-sight map from a composite of central-meridian columns.

    Parameters
    ----------
    composite_br : (nlat, nlon) model-grid radial field, each column at its own time.
    b0_model : (nlon,) B0 (degrees) of each model column's observation.
    b0_map : (inst.nlon,) B0 of each map column, for the blank limb.
    limb_angle : pixels with |latitude - B0| > limb_angle are blank (NaN).

    Returns the map values (line-of-sight field, G) and an empty SynopticMap of the grid.
    """
    lat = np.deg2rad(model_grid.lat)[:, None]
    los = composite_br * np.cos(lat - np.deg2rad(b0_model)[None, :])
    values, m = _instrument_map(los, model_grid, inst)
    if inst.noise_g > 0:
        values += rng.normal(0.0, inst.noise_g, values.shape)
    values[np.abs(m.lat[:, None] - b0_map[None, :]) > limb_angle] = np.nan
    return values, m


# --------------------------------------------------------------------------- central-meridian timing


class MeridianPlan:
    """When each longitude of each Carrington rotation crosses the central meridian, and B0 then.

    Times come from ``sunpy.coordinates.sun.carrington_rotation_time`` at the middle
    of every rotation (and the start of the first and the end of the last), B0 from
    ``sunpy.coordinates.sun.B0`` at those times; both are interpolated by cubic
    splines (both are smooth: a steady drift plus a year-long periodic term; nodes
    one rotation apart keep the error near 0.001 day and 0.005 degree).

    Parameters
    ----------
    numbers : Carrington rotation numbers of the scenario.
    mids : their mid-rotation times (Time), as the scenario computed them.
    b0_mids : B0 at ``mids`` in degrees.
    start : the scenario's start (Time).
    """

    def __init__(self, numbers: np.ndarray, mids, b0_mids: np.ndarray, start) -> None:
        from scipy.interpolate import CubicSpline
        from sunpy.coordinates.sun import B0, carrington_rotation_time

        self.numbers = np.asarray(numbers)
        self.start = start
        ends = np.array([self.numbers[0], self.numbers[-1] + 1.0], dtype=float)
        end_times = carrington_rotation_time(ends)
        nodes = np.concatenate([[ends[0]], self.numbers + 0.5, [ends[1]]])
        years = np.concatenate([(end_times[:1] - start).to_value("day"), (mids - start).to_value("day"),
                                (end_times[1:] - start).to_value("day")]) / 365.25
        b0 = np.concatenate([np.atleast_1d(B0(end_times[:1]).to_value("deg")), np.asarray(b0_mids, dtype=float),
                             np.atleast_1d(B0(end_times[1:]).to_value("deg"))])
        self._years = CubicSpline(nodes, years)
        self._b0 = CubicSpline(years, b0)

    def column_years(self, k: int, lon_deg: np.ndarray) -> np.ndarray:
        """Years from the start at which the columns at ``lon_deg`` of rotation index ``k`` are observed."""
        return self._years(self.numbers[k] + 1.0 - np.asarray(lon_deg) / 360.0)

    def b0(self, years: np.ndarray) -> np.ndarray:
        return self._b0(years)

    def header(self, k: int, lon_deg: np.ndarray, limb_angle: float, b0_mid: float) -> dict:
        """The FITS keywords that tell a reader each column's time and B0 (see the module docstring)."""
        from astropy.time import Time

        years = self.column_years(k, lon_deg)
        b0 = self.b0(years)
        mjd = Time(self.start).utc.mjd + years * 365.25
        x = (np.asarray(lon_deg) - 180.0) / 180.0
        base = math.floor(float(mjd.mean()))
        t_coef = np.polynomial.polynomial.polyfit(x, mjd - base, 3)
        b_coef = np.polynomial.polynomial.polyfit(x, b0, 3)
        t_err = float(np.max(np.abs(np.polynomial.polynomial.polyval(x, t_coef) - (mjd - base))))
        b_err = float(np.max(np.abs(np.polynomial.polynomial.polyval(x, b_coef) - b0)))
        t_coef[0] += base
        first, last = Time(mjd.min(), format="mjd", scale="utc"), Time(mjd.max(), format="mjd", scale="utc")
        out = {"MAPFIELD": ("LOS", "line-of-sight field"),
               "OBSMODE": ("CENTRAL-MERIDIAN", "columns observed at central meridian"),
               "DATE-BEG": (first.isot, "first column observed"), "DATE-END": (last.isot, "last column observed"),
               "CRLT_OBS": (float(b0_mid), "[deg] B0 at DATE-OBS")}
        out["TCOLNOTE"] = ("sum_k C_k x^k, x = (CRLN - 180) / 180", "TCOLk, B0COLk")
        for i, c in enumerate(t_coef):
            out[f"TCOL{i}"] = (float(c), "[d] column MJD(UTC), see TCOLNOTE")
        out["TCOLERR"] = (t_err, "[d] largest TCOL polynomial error")
        for i, c in enumerate(b_coef):
            out[f"B0COL{i}"] = (float(c), "[deg] column B0, see TCOLNOTE")
        out["B0COLERR"] = (b_err, "[deg] largest B0COL polynomial error")
        out["LIMBANG"] = (float(limb_angle), "[deg] blank where |lat - B0| > LIMBANG")
        return out


class MeridianRecorder:
    """Collects, while the transport runs, the model columns crossing the central meridian.

    Called with the stepper after every step (and once before the first); the
    field of the step nearest each column's time fills that column. Rotations whose
    columns are all in are listed in ``finished`` (rotation indices, in order).
    """

    def __init__(self, plan: MeridianPlan, grid, step_years: float, wanted) -> None:
        self.grid = grid
        wanted = np.asarray(sorted(wanted), dtype=int)
        self.b0 = {}
        steps, ks, js = [], [], []
        for k in wanted:
            years = plan.column_years(int(k), grid.lon)
            self.b0[int(k)] = plan.b0(years)
            steps.append(np.rint(years / step_years).astype(np.int64))
            ks.append(np.full(grid.nlon, k))
            js.append(np.arange(grid.nlon))
        if steps:
            steps, ks, js = np.concatenate(steps), np.concatenate(ks), np.concatenate(js)
        else:
            steps = ks = js = np.zeros(0, dtype=np.int64)
        order = np.argsort(steps, kind="stable")
        self._steps, self._k, self._j = steps[order], ks[order], js[order]
        self._next = 0
        self.composites: dict[int, np.ndarray] = {}
        self._remaining = {int(k): grid.nlon for k in wanted}
        self.finished: list[int] = []

    @property
    def last_step(self) -> int:
        return int(self._steps[-1]) if self._steps.size else 0

    def __call__(self, stepper) -> None:
        if self._next >= self._steps.size or self._steps[self._next] > stepper.steps_done:
            return
        stop = int(np.searchsorted(self._steps, stepper.steps_done, side="right"))
        field = stepper.field()
        ks, js = self._k[self._next:stop], self._j[self._next:stop]
        self._next = stop
        for k in np.unique(ks):
            cols = js[ks == k]
            k = int(k)
            composite = self.composites.setdefault(k, np.empty((self.grid.nlat, self.grid.nlon)))
            composite[:, cols] = field[:, cols]
            self._remaining[k] -= cols.size
            if self._remaining[k] == 0:
                self.finished.append(k)

    def take(self, k: int) -> tuple[np.ndarray, np.ndarray]:
        """The finished composite of rotation index ``k`` and its columns' B0 (both released here)."""
        return self.composites.pop(k), self.b0.pop(k)


def long_gaps(instruments, active: dict, settings, rng: np.random.Generator) -> dict:
    """Rotation indices each instrument misses in ``long_gaps`` gaps of ``long_gap_rotations`` rotations."""
    out = {}
    for inst in instruments:
        indices = np.asarray(active[inst.name])
        gone: set[int] = set()
        span = settings.long_gap_rotations
        if settings.long_gaps > 0 and indices.size > span + 2:
            for first in rng.integers(1, indices.size - span - 1, size=settings.long_gaps):
                gone.update(int(i) for i in indices[first:first + span])
        out[inst.name] = gone
    return out
