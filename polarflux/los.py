"""Line-of-sight synoptic maps: each column's B0 angle and the conversion to radial field.

A synoptic map built from central-meridian observations holds, in each longitude
column, the line-of-sight field seen when that column crossed the central
meridian. For a radial field B_r the line of sight meets the local vertical at
the angle (latitude - B0), B0 being the heliographic latitude of the observer at
that moment, so

    B_los = B_r cos(latitude - B0),   B_r = B_los / cos(latitude - B0).

B0 swings by +-7.25 degrees over the year and by up to about 3 degrees within one
rotation, so each column has its own. :func:`column_b0` takes it, in this order,
from

1. ``B0COL0`` ... ``B0COL3``: a polynomial in x = (CRLN - 180) / 180 giving each
   column's B0 in degrees (polarflux's own keywords, written by its scenario
   generator);
2. ``TCOL0`` ... ``TCOL3``: the same polynomial form for each column's
   observation time as MJD (UTC), B0 then from ``sunpy.coordinates.sun.B0``;
3. the Carrington rotation number N: the column at Carrington longitude L
   crosses the central meridian at rotation number N + 1 - L / 360
   (``sunpy.coordinates.sun.carrington_rotation_time``), B0 at that time;
4. one value for all columns: ``CRLT_OBS`` (FITS WCS, Thompson 2006) or B0 at
   the map's time.

Near the limb the divisor goes to zero and noise would be blown up; the factor
1 / cos(latitude - B0) is capped at ``max_factor`` (10 by default: 84.3 degrees
from the disk centre). Pixels beyond the limb are normally blank in the file.

References
----------
Thompson, W. T. 2006, A&A 449, 791 (``CRLT_OBS``; heliographic coordinates).
Svalgaard, L., Duvall, T. L., Jr., & Scherrer, P. H. 1978, Sol. Phys. 58, 225
(polar fields are close to radial, which the conversion assumes).
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping

import numpy as np

from .errors import MapFormatError

__all__ = ["column_b0", "los_to_radial", "row_shape_integrals", "cap_shape_exponent", "field_in_header", "FIELDS", "LOS_MAX_FACTOR"]

#: What a map holds: "auto" reads the header (:func:`field_in_header`), "radial" and "los" say it.
FIELDS = ("auto", "radial", "los")
#: Header values of ``MAPFIELD`` (polarflux's keyword for what a map holds) meaning line of sight.
_LOS_WORDS = ("LOS", "LINE-OF-SIGHT", "LINE OF SIGHT", "BLOS")

#: Largest factor 1/cos(latitude - B0) applied when converting line-of-sight field to radial.
#: 10 corresponds to 84.3 degrees from the disk centre; farther out the factor is held at 10.
LOS_MAX_FACTOR = 10.0

_NODES = 13  # B0 is taken at this many times across a rotation and interpolated (smooth to 0.001 deg)


def _polynomial(header: Mapping, prefix: str) -> list[float] | None:
    coefficients = []
    for k in range(10):
        value = header.get(f"{prefix}{k}")
        if value is None:
            break
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            return None
        coefficients.append(float(value))
    return coefficients or None


def _b0_at_mjd(mjd: np.ndarray) -> np.ndarray:
    from astropy.time import Time
    from sunpy.coordinates.sun import B0

    from ._header import quiet_time_warnings

    with quiet_time_warnings():
        return np.atleast_1d(B0(Time(np.asarray(mjd, dtype=float), format="mjd", scale="utc")).to_value("deg"))


@functools.lru_cache(maxsize=256)
def _rotation_b0_nodes(rotation: int) -> tuple[np.ndarray, np.ndarray]:
    """B0 (deg) at _NODES fractions of Carrington rotation ``rotation``, from its start to its end."""
    from sunpy.coordinates.sun import carrington_rotation_time

    from ._header import quiet_time_warnings

    fractions = np.linspace(0.0, 1.0, _NODES)
    with quiet_time_warnings():
        ends = carrington_rotation_time(np.array([rotation, rotation + 1.0])).utc.mjd
    # the synodic rate changes by under 0.2 % within one rotation: time is linear in the fraction to
    # about 0.03 day, which moves B0 by under 0.005 degree
    mjd = ends[0] + fractions * (ends[1] - ends[0])
    return fractions, _b0_at_mjd(mjd)


def column_b0(header: Mapping, lon: np.ndarray, rotation: int | None, time, source: str = "map"):
    """Each column's B0 angle (degrees) and a sentence saying where it came from.

    Parameters
    ----------
    header : mapping
        The map's header keywords (upper case).
    lon : array
        Carrington longitude of each column's centre, degrees.
    rotation : int or None
        The map's Carrington rotation number.
    time : astropy.time.Time or None
        The map's time.
    source : str
        The file, for messages.

    Returns
    -------
    b0 : ndarray, shape (nlon,)
    how : str
        For example "per column, from the column times (TCOLk) through sunpy.coordinates.sun.B0".
    """
    lon = np.asarray(lon, dtype=float) % 360.0
    x = (lon - 180.0) / 180.0
    coefficients = _polynomial(header, "B0COL")
    if coefficients is not None:
        return np.polynomial.polynomial.polyval(x, coefficients), "per column, from the header's B0COLk polynomial"
    coefficients = _polynomial(header, "TCOL")
    if coefficients is not None:
        mjd = np.polynomial.polynomial.polyval(x, coefficients)
        if np.all(np.isfinite(mjd)) and np.all((mjd > -100_000) & (mjd < 500_000)):
            nodes = np.linspace(mjd.min(), mjd.max(), _NODES)
            return (np.interp(mjd, nodes, _b0_at_mjd(nodes)),
                    "per column, from the header's column times (TCOLk) through sunpy.coordinates.sun.B0")
    if rotation is not None:
        try:
            fractions, b0 = _rotation_b0_nodes(int(rotation))
        except Exception as exc:  # ERFA refuses dates it cannot represent
            raise MapFormatError(f"{source}: rotation {rotation} gives no usable date for B0 ({exc})") from None
        return (np.interp(1.0 - lon / 360.0, fractions, b0),
                f"per column, from each column's central-meridian time in rotation {rotation} "
                "through sunpy.coordinates.sun.B0")
    value = header.get("CRLT_OBS")
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value) and abs(value) <= 8:
        return np.full(lon.shape, float(value)), "one value for the map, from CRLT_OBS"
    if time is not None:
        return (np.full(lon.shape, float(_b0_at_mjd(np.array([time.utc.mjd]))[0])),
                "one value for the map, B0 at the map's time through sunpy.coordinates.sun.B0")
    raise MapFormatError(f"{source}: line-of-sight map with no way to know B0: no B0COLk, TCOLk, Carrington "
                         "rotation, CRLT_OBS or map time in its header")


def los_to_radial(values: np.ndarray, lat: np.ndarray, b0: np.ndarray, max_factor: float = LOS_MAX_FACTOR,
                  block_rows: int = 64, lat_edges: np.ndarray | None = None, shape_caps: bool = True) -> None:
    """Divide line-of-sight field by cos(latitude - B0), in place, the factor capped at ``max_factor``.

    ``values`` is (nlat, nlon) float64, ``lat`` the row latitudes and ``b0`` the
    column B0 angles, both in degrees. With ``lat_edges`` (nlat + 1, degrees) the
    divisor is the area average of cos(latitude - B0) over each row,

        <cos(phi - B0)> = [(sin(2b - B0) - sin(2a - B0)) / 4 + (b - a) cos(B0) / 2] / (sin b - sin a)

    for a row from a to b: a row's value is the average of B_r cos(phi - B0) over
    its area, so this is exact for a field uniform over the row, where the cosine at
    the row's centre is not (the rows next to a pole of a coarse sine-latitude
    grid span 10 degrees or more). Works in blocks of rows, so the factor array
    never takes the map's whole size.

    A row's value is the average of B_r cos(phi - B0) over it, so where B_r rises
    steeply across a row (the polar caps of a coarse grid: a sin^20 cap read on 90
    sine-latitude rows comes out 2-3 % low with the uniform divisor) the divisor
    must be weighted by B_r itself. With ``lat_edges`` and ``shape_caps``, each
    cap's rows reaching poleward of :data:`SHAPE_FROM_DEG` are divided again by

        (cos B0 I1 + sin B0 I2) / I0     (:func:`row_shape_integrals`)

    for the shape |sin phi|^n fitted to the cap's row means
    (:func:`cap_shape_exponent`; sin^8 where no shape fits: a cap of mixed sign,
    near a reversal). n = 0 is the uniform divisor above. On a 90-row grid this
    takes sin^20-sin^40 caps from 1.5-6 % low to within 0.3 % (tests/test_los.py).
    """
    if not max_factor >= 1.0:
        raise ValueError(f"max_factor must be at least 1, got {max_factor}")
    floor = 1.0 / max_factor
    b0_rad = np.deg2rad(np.asarray(b0, dtype=float))[None, :]
    lat_rad = np.deg2rad(np.asarray(lat, dtype=float))
    edges = None if lat_edges is None else np.deg2rad(np.asarray(lat_edges, dtype=float))
    polar = []
    if edges is not None and shape_caps:
        reach = np.maximum(np.abs(edges[:-1]), np.abs(edges[1:]))
        for sign in (1, -1):
            picked = np.flatnonzero((reach > np.deg2rad(SHAPE_FROM_DEG)) & (sign * (edges[:-1] + edges[1:]) > 0))
            if picked.size:
                polar.append((values[picked].copy(), picked))
    for start in range(0, values.shape[0], block_rows):
        rows = slice(start, start + block_rows)
        if edges is None:
            cosine = np.cos(lat_rad[rows, None] - b0_rad)
        else:
            a = edges[:-1][rows, None]
            b = edges[1:][rows, None]
            cosine = ((np.sin(2 * b - b0_rad) - np.sin(2 * a - b0_rad)) / 4 + (b - a) * np.cos(b0_rad) / 2) \
                / (np.sin(b) - np.sin(a))
        values[rows] /= np.maximum(cosine, floor)
    if edges is not None and shape_caps:
        for raw, picked in polar:
            _shape_cap_rows(values, raw, picked, edges, b0_rad, floor)


#: Exponents n tried for the cap's shape |sin latitude|^n inside its rows (0: uniform within each row).
SHAPE_EXPONENTS = tuple(range(0, 81, 2))
#: Rows reaching poleward of this |latitude| (degrees) take the shaped divisor.
SHAPE_FROM_DEG = 60.0
#: The shape taken where none can be fitted: the polar field's sin^8 fall-off (Svalgaard et al. 1978).
SHAPE_PRIOR = 8
_SHAPE_MIN_R2 = 0.5
_SHAPE_MIN_ROWS = 3  # two rows pin no shape down (B_p and n fit any two); a 40-row map's cap has three
_GAUSS = np.polynomial.legendre.leggauss(16)


def row_shape_integrals(a: np.ndarray, b: np.ndarray, n: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Over rows from latitude ``a`` to ``b`` (radians), with w = |sin phi|^n:

    I0 = int w cos phi dphi,  I1 = int w cos^2 phi dphi,  I2 = int w sin phi cos phi dphi.

    I0 and I2 in closed form, I1 by 16-point Gauss-Legendre quadrature in latitude
    (smooth there; in sin(latitude) it has a square-root end point). A row's
    line-of-sight value over its radial one is then (cos B0 I1 + sin B0 I2) / I0.
    """
    sa, sb = np.sin(a), np.sin(b)
    i0 = (np.sign(sb) * np.abs(sb) ** (n + 1) - np.sign(sa) * np.abs(sa) ** (n + 1)) / (n + 1)
    i2 = (np.abs(sb) ** (n + 2) - np.abs(sa) ** (n + 2)) / (n + 2)
    x, w = _GAUSS
    phi = 0.5 * (a + b)[..., None] + 0.5 * (b - a)[..., None] * x
    i1 = 0.5 * (b - a) * ((np.abs(np.sin(phi)) ** n * np.cos(phi) ** 2) @ w)
    return i0, i1, i2


def cap_shape_exponent(row_means: np.ndarray, a: np.ndarray, b: np.ndarray) -> int:
    """The exponent n of SHAPE_EXPONENTS whose B_p |sin|^n best fits a cap's row means.

    Rows are weighted by their area; where the best fit explains less than half of the
    rows' variance about zero (a cap of mixed sign, near a reversal) or fewer than
    three rows are seen, :data:`SHAPE_PRIOR` (sin^8).
    """
    good = np.isfinite(row_means)
    if good.sum() < _SHAPE_MIN_ROWS:
        return SHAPE_PRIOR
    y, a, b = row_means[good], a[good], b[good]
    area = np.abs(np.sin(b) - np.sin(a))
    best, best_n = np.inf, 0
    for n in SHAPE_EXPONENTS:
        f = np.abs(row_shape_integrals(a, b, n)[0]) / area
        bp = np.sum(area * y * f) / np.sum(area * f * f)
        residual = np.sum(area * (y - bp * f) ** 2)
        if residual < best:
            best, best_n = residual, n
    return best_n if best <= (1.0 - _SHAPE_MIN_R2) * np.sum(area * y * y) else SHAPE_PRIOR


def _shape_cap_rows(values, raw, picked, edges, b0_rad, floor) -> None:
    """Divide one cap's rows again, by cos(latitude - B0) averaged with the cap's fitted shape as weight."""
    a, b = edges[:-1][picked], edges[1:][picked]
    for _ in range(2):  # the shape from the plain division, then from the shaped one
        rows = values[picked]
        counts = np.isfinite(rows).sum(axis=1)
        means = np.full(picked.size, np.nan)
        enough = counts >= 0.5 * values.shape[1]
        means[enough] = np.nansum(rows[enough], axis=1) / counts[enough]
        n = cap_shape_exponent(means, a, b)
        if n == 0:
            return
        i0, i1, i2 = row_shape_integrals(a, b, n)
        cosine = (np.cos(b0_rad) * i1[:, None] + np.sin(b0_rad) * i2[:, None]) / i0[:, None]
        values[picked] = raw / np.maximum(cosine, floor)


def field_in_header(header: Mapping) -> str:
    """"los" when the header's ``MAPFIELD`` says line of sight ("LOS", "LINE-OF-SIGHT", "BLOS"), else "radial"."""
    value = str(header.get("MAPFIELD", "") or "").strip().upper()
    return "los" if value in _LOS_WORDS else "radial"
