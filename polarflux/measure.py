"""Polar-cap flux, mean polar field and axial dipole of one synoptic map."""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from astropy import units as u

from .errors import SettingsError
from .geometry import (
    HEMISPHERES,
    SOLAR_RADIUS_CM,
    as_degrees,
    cap_row_fraction,
    dipole_row_weights,
    sine_edges,
)
from .maps import SynopticMap

__all__ = [
    "CapMeasure",
    "CapPair",
    "measure_caps",
    "axial_dipole",
    "fill_polar_gaps",
    "profile_measures",
    "FILL_METHODS",
    "PROFILE_EXPONENT",
]

FILL_METHODS = ("none", "profile")

_CM2 = u.cm**2  # built once: composing a unit costs more than measuring a cap

#: Exponent n of the polar-field profile B(latitude) = B_p sin^n(latitude) used to
#: fill polar gaps. Svalgaard, Duvall & Scherrer (1978, Sol. Phys. 58, 225) found
#: the polar field falling off as cos^8 of colatitude; n = 8 (recalled from memory,
#: consistent with their abstract: about 1 mT at the pole and 0.2 mT at 55 degrees).
PROFILE_EXPONENT = 8


@dataclass(frozen=True)
class CapMeasure:
    """Measures of one polar cap.

    Attributes
    ----------
    hemisphere : str
    signed_flux, unsigned_flux : Quantity [Mx]
    mean_field : Quantity [G]
        Signed flux divided by the whole cap area.
    area : Quantity [cm2]
        Area of the cap poleward of the cap latitude.
    coverage : float
        Fraction of the cap area holding finite (observed) data, before any fill.
    """

    hemisphere: str
    signed_flux: u.Quantity
    unsigned_flux: u.Quantity
    mean_field: u.Quantity
    area: u.Quantity
    coverage: float


@dataclass(frozen=True)
class CapPair:
    """Both polar caps of one map, measured poleward of ``cap_latitude`` (degrees)."""

    north: CapMeasure
    south: CapMeasure
    cap_latitude: float
    fill: str

    def __getitem__(self, hemisphere: str) -> CapMeasure:
        return {"north": self.north, "south": self.south}[hemisphere]


def _check_fill(fill: str) -> None:
    if fill not in FILL_METHODS:
        raise SettingsError(f"fill={fill!r} is not one of {FILL_METHODS}")


def _lon_widths(m: SynopticMap) -> np.ndarray:
    return _lon_grid(_key(m.lon_edges))[0]


def _key(edges) -> bytes:
    """A grid's edges as the key of its cached geometry."""
    return np.ascontiguousarray(edges, dtype=np.float64).tobytes()


@functools.lru_cache(maxsize=16)
def _lon_grid(lon_edges: bytes) -> tuple[np.ndarray, float | None]:
    """Column widths (radians) of a longitude grid, given as its edges' bytes, and their common
    value on a regular grid (else None); kept per grid, as an archive's maps share a few."""
    dlon = np.deg2rad(np.diff(np.frombuffer(lon_edges)))
    dlon.flags.writeable = False
    regular = float(np.ptp(dlon)) <= 1e-12 * float(dlon.max())
    return dlon, float(dlon[0]) if regular else None


def _lon_integrals(m: SynopticMap, rows: slice = slice(None), absolute: bool = False, lon_grid=None):
    """Per row: integral over longitude of B (or |B|) on observed pixels, and observed width.

    Both in radians of longitude (times G for the first); missing pixels add
    nothing. On a regular longitude grid the signed integrals come from the map's
    cached row sums, so that measuring reads an archive's pixels from memory once.
    ``lon_grid``: ``m``'s :func:`_lon_grid`, when the caller has it.
    """
    dlon, step = lon_grid or _lon_grid(_key(m.lon_edges))
    if step is not None:
        stats = m.row_statistics()
        sums = stats.abs_sums(rows) if absolute else stats.sums[rows]
        return sums * step, stats.counts[rows] * step
    values = m.values[rows]
    finite = np.isfinite(values)
    clean = np.where(finite, values, 0.0).astype(np.float64)
    if absolute:
        np.abs(clean, out=clean)
    return clean @ dlon, finite @ dlon


def _contiguous(mask: np.ndarray) -> slice:
    """The slice of rows where ``mask`` holds (a cap's rows are contiguous)."""
    rows = np.flatnonzero(mask)
    if rows.size == 0:
        return slice(0, 0)
    return slice(int(rows[0]), int(rows[-1]) + 1)


def measure_caps(m: SynopticMap, cap_latitude=60, fill: str = "none") -> CapPair:
    """Signed and unsigned flux, mean field, area and coverage of both polar caps.

    Parameters
    ----------
    m : SynopticMap
    cap_latitude : float or Quantity
        Cap boundary, degrees latitude (the caps are poleward of +/- this).
    fill : {"none", "profile"}
        "none": integrate the observed pixels only; missing pixels add nothing and
        ``coverage`` tells how much of the cap was seen. "profile": fill missing
        cap pixels first (:func:`fill_polar_gaps`).

    Returns
    -------
    CapPair

    Notes
    -----
    Cells are integrated with their exact spherical areas; a row cut by the cap
    boundary counts with the exact fraction of its area inside the cap.
    """
    _check_fill(fill)
    cap = as_degrees(cap_latitude, "cap_latitude")
    if not 0.0 < cap < 90.0:
        raise SettingsError(f"cap_latitude={cap} must lie strictly between 0 and 90 degrees")
    target = fill_polar_gaps(m, cap) if fill == "profile" else m
    grid = _lon_grid(_key(m.lon_edges))
    total_width = float(grid[0].sum())
    results = {}
    for hemisphere, (rows, w, w_sum) in zip(HEMISPHERES, _cap_rows(_key(m.lat_edges), cap), strict=True):
        signed_rows, seen_rows = _lon_integrals(target, rows, lon_grid=grid)
        unsigned_rows, _ = _lon_integrals(target, rows, absolute=True, lon_grid=grid)
        if target is not m:  # coverage is of the observed pixels, before the fill
            _, seen_rows = _lon_integrals(m, rows, lon_grid=grid)
        signed = float(w @ signed_rows)
        unsigned = float(w @ unsigned_rows)
        area = w_sum * total_width
        seen = float(w @ seen_rows)
        results[hemisphere] = CapMeasure(
            hemisphere=hemisphere,
            signed_flux=u.Quantity(signed, u.Mx),
            unsigned_flux=u.Quantity(unsigned, u.Mx),
            mean_field=u.Quantity(signed / area, u.G),
            area=u.Quantity(area, _CM2),
            coverage=min(1.0, seen / area),
        )
    return CapPair(results["north"], results["south"], cap, fill)


def axial_dipole(m: SynopticMap, fill: str = "none", cap_latitude=60) -> u.Quantity:
    """Axial dipole moment of the radial field, in Gauss.

    D = (3 / 4 pi) * integral of B_r sin(latitude) dOmega over the sphere, the
    coefficient g_1^0 of B_r = sum g_l^0 P_l(sin latitude) (so a field
    B_r = B_0 sin(latitude) has D = B_0).

    Parameters
    ----------
    m : SynopticMap
    fill : {"none", "profile"}
        "none": missing pixels add nothing. "profile": missing pixels poleward of
        ``cap_latitude`` are filled first (:func:`fill_polar_gaps`); missing
        pixels elsewhere still add nothing.
    cap_latitude : float or Quantity
        Used only with ``fill="profile"``.

    Notes
    -----
    Each row is weighted by the exact integral of sin(latitude) over it,
    (sin^2 b - sin^2 a) / 2; the field is taken as constant over a cell, so the
    result converges as the square of the row width for smooth fields.
    """
    _check_fill(fill)
    target = fill_polar_gaps(m, as_degrees(cap_latitude, "cap_latitude")) if fill == "profile" else m
    integrals, _ = _lon_integrals(target)
    moment = _dipole_weights(_key(m.lat_edges)) @ integrals
    return u.Quantity(3.0 / (4.0 * np.pi) * float(moment), u.G)


@functools.lru_cache(maxsize=16)
def _dipole_weights(lat_edges: bytes) -> np.ndarray:
    """:func:`~polarflux.geometry.dipole_row_weights` of a grid given as its edges' bytes, kept per grid."""
    weights = dipole_row_weights(np.frombuffer(lat_edges))
    weights.flags.writeable = False
    return weights


@functools.lru_cache(maxsize=32)
def _cap_rows(lat_edges: bytes, cap: float) -> tuple:
    """Per hemisphere: the cap's rows (a slice), their cap areas (cm2 per radian of longitude)
    and the sum of those, for a grid given as its edges' bytes; kept per grid and cap."""
    lat_edges_deg = np.frombuffer(lat_edges)
    out = []
    for hemisphere in HEMISPHERES:
        weight = _cap_weights(lat_edges_deg, cap, hemisphere) * SOLAR_RADIUS_CM**2
        rows = _contiguous(weight > 0)
        w = weight[rows]
        w.flags.writeable = False
        out.append((rows, w, float(w.sum())))
    return tuple(out)


def _cap_weights(lat_edges, cap: float, hemisphere: str) -> np.ndarray:
    """Per row: the row's cap area in units of R^2 per radian of longitude (fraction x d sin)."""
    return cap_row_fraction(lat_edges, cap, hemisphere) * np.diff(sine_edges(lat_edges))


def profile_measures(profiles, lat_edges, cap_latitude=60) -> dict:
    """Polar-cap mean fields and axial dipole of longitude-averaged fields, vectorised.

    The same quantities as :func:`measure_caps` (``mean_field``) and
    :func:`axial_dipole` give for a fully observed map, computed from its
    longitude averages: the caps and the dipole only see the axisymmetric part.

    Parameters
    ----------
    profiles : array-like, shape (..., nlat)
        Longitude-averaged radial field, Gauss, row 0 southernmost.
    lat_edges : array-like, shape (nlat + 1,)
    cap_latitude : float or Quantity

    Returns
    -------
    dict of ndarray, shape (...)
        ``north_mean_field``, ``south_mean_field``, ``axial_dipole`` (all G).
    """
    cap = as_degrees(cap_latitude, "cap_latitude")
    profiles = np.asarray(profiles, dtype=np.float64)
    out = {}
    for hemisphere in HEMISPHERES:
        weight = _cap_weights(lat_edges, cap, hemisphere)
        out[f"{hemisphere}_mean_field"] = profiles @ (weight / weight.sum())
    # (3 / 4 pi) * 2 pi * sum(row mean * row weight)
    out["axial_dipole"] = 1.5 * (profiles @ dipole_row_weights(lat_edges))
    return out


def fill_polar_gaps(m: SynopticMap, cap_latitude=60, exponent: int = PROFILE_EXPONENT) -> SynopticMap:
    """Fill missing pixels poleward of ``cap_latitude`` from the observed profile.

    In each hemisphere, a row of the cap that holds some data has its missing
    pixels set to the row's observed (longitude) mean. Rows with no data at all
    take the profile B(latitude) = B_p |sin(latitude)|^n, with B_p fitted by
    weighted least squares to the observed row means of that cap (weights: the
    observed area of each row). A cap with no data at all stays missing.

    Returns a new SynopticMap; ``m`` is not changed.

    References
    ----------
    Svalgaard, L., Duvall, T. L., Jr., & Scherrer, P. H. 1978, Sol. Phys. 58, 225:
    the polar field falls off as cos^n of colatitude with n near 8.
    """
    cap = as_degrees(cap_latitude, "cap_latitude")
    br = m.values.astype(np.float64)  # a copy: m is not changed
    dlon = _lon_widths(m)
    ds = np.diff(sine_edges(m.lat_edges))
    profile = np.abs(np.sin(np.deg2rad(m.lat))) ** exponent
    for hemisphere in HEMISPHERES:
        rows = np.flatnonzero(cap_row_fraction(m.lat_edges, cap, hemisphere) > 0)
        sub = br[rows]
        missing = ~np.isfinite(sub)
        if not missing.any():
            continue
        seen_width = (~missing) @ dlon
        row_sum = np.where(missing, 0.0, sub) @ dlon
        has_data = seen_width > 0
        row_mean = np.divide(row_sum, seen_width, out=np.full(rows.size, np.nan), where=has_data)
        if has_data.any():
            weight = seen_width[has_data] * ds[rows][has_data]
            shape = profile[rows][has_data]
            amplitude = float(np.sum(weight * shape * row_mean[has_data]) / np.sum(weight * shape**2))
            row_mean[~has_data] = amplitude * profile[rows][~has_data]
            br[rows] = np.where(missing, row_mean[:, None], sub)
    return SynopticMap(
        br=br,
        lat_edges=m.lat_edges,
        lon_edges=m.lon_edges,
        carrington_rotation=m.carrington_rotation,
        time=m.time,
        instrument=m.instrument,
        grid=m.grid,
        source=m.source,
        lat=m.lat,
        lon=m.lon,
        header=m.header,
        copy=False,
    )
