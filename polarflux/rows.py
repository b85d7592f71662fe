"""One record row per file: a map, one map of a cube, or every map of a cube of realizations.

A cube (3-D or more) is a stack of realizations of the same rotation (for example
a model ensemble's maps). ``plane=N`` measures one of them; ``plane="all"`` measures
every one, and the row holds their mean and, as ``*_spread_g``, the standard
deviation over the realizations of each cap's mean field and of the axial dipole
(``planes`` counts them).
"""

from __future__ import annotations

import warnings

import numpy as np

from .errors import MapFormatError, SettingsError
from .fill import DEFAULT_FILL, band_fill_error, cap_bands
from .geometry import HEMISPHERES
from .maps import quiet_time_warnings, read_map, read_planes
from .measure import axial_dipole, measure_caps

__all__ = ["measure_file", "PLANES_ALL", "check_plane"]

#: ``plane`` value asking for every map of a cube.
PLANES_ALL = "all"
_TEXT = ("source", "instrument", "carrington_rotation", "time", "field", "fill", "b0_how")


def check_plane(plane) -> int | str | None:
    """``plane`` as measure understands it: None, a plane index >= 0, or "all"."""
    if plane is None or plane == PLANES_ALL:
        return plane
    if isinstance(plane, bool) or not isinstance(plane, (int, np.integer)) or plane < 0:
        raise SettingsError(f"plane={plane!r}: expected a plane number (0, 1, ...) or 'all'")
    return int(plane)


def _map_row(m, path: str, cap_latitude: float, fill: str) -> dict:
    if m.time is None:
        from ._header import TIME_KEYS

        raise MapFormatError(f"{path}: the map has no time: none of {', '.join(TIME_KEYS)} nor a Carrington "
                             "rotation number (CAR_ROT) in its header; a record needs each map's time")
    map_fill = "none" if fill == "temporal" else fill
    caps = measure_caps(m, cap_latitude=cap_latitude, fill=map_fill)
    with quiet_time_warnings():
        time = m.time.utc.isot
    row = {
        "source": m.source,
        "instrument": m.instrument,
        "carrington_rotation": m.carrington_rotation,
        "time": time,
        "cap_deg": caps.cap_latitude,
    }
    for hemisphere in HEMISPHERES:
        cap = caps[hemisphere]
        row[f"{hemisphere}_signed_flux_mx"] = cap.signed_flux.to_value("Mx")
        row[f"{hemisphere}_unsigned_flux_mx"] = cap.unsigned_flux.to_value("Mx")
        row[f"{hemisphere}_mean_field_g"] = cap.mean_field.to_value("G")
        row[f"{hemisphere}_coverage"] = cap.coverage
    row["axial_dipole_g"] = axial_dipole(m, fill=map_fill, cap_latitude=cap_latitude).to_value("G")
    row.update(cap_bands(m, caps.cap_latitude))
    for hemisphere in HEMISPHERES:
        row[f"{hemisphere}_fill_error_g"] = (float("nan") if fill == "temporal"
                                            else band_fill_error(row, caps.cap_latitude, fill, hemisphere))
        row[f"{hemisphere}_spread_g"] = float("nan")
    row["axial_dipole_spread_g"] = float("nan")
    row["planes"] = 1
    row["field"] = "los" if m.los_b0 is not None else "radial"
    row["fill"] = fill
    row["b0_how"] = m.los_b0_how
    return row


def _combine(rows: list[dict], path: str) -> dict:
    """One row of several realizations: their mean, and the spread of the cap means and the dipole."""
    out = dict(rows[0])
    out["source"] = path
    for key in rows[0]:
        if key in _TEXT:
            continue
        values = np.array([r[key] for r in rows], dtype=float)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a band no realization saw stays NaN
            mean = np.nanmean(values, axis=0)
        out[key] = mean.tolist() if values.ndim > 1 else float(mean)
    for hemisphere in HEMISPHERES:
        means = [r[f"{hemisphere}_mean_field_g"] for r in rows]
        out[f"{hemisphere}_spread_g"] = float(np.std(means, ddof=1)) if len(rows) > 1 else float("nan")
    out["axial_dipole_spread_g"] = float(np.std([r["axial_dipole_g"] for r in rows], ddof=1)) \
        if len(rows) > 1 else float("nan")
    out["planes"] = len(rows)
    return out


def measure_file(path: str, cap_latitude: float = 60.0, fill: str = DEFAULT_FILL, field: str = "auto",
                 plane=None) -> dict:
    """Read and measure one file; return one record row (the CSV columns, and the cap's latitude bands).

    Parameters
    ----------
    path : str
    cap_latitude : float
    fill : {"temporal", "profile", "none"}
        ``"temporal"`` needs the record: the row holds the unfilled measures and the
        bands (:func:`polarflux.fill.cap_bands`) that
        :func:`polarflux.record.rows_to_dataset` fills from.
    field : {"auto", "radial", "los"}
        ``"auto"`` reads line-of-sight field where the header says so
        (:func:`polarflux.los.field_in_header`), else radial field.
    plane : int, "all" or None
        For a cube of realizations: one plane, or every plane (the row holds their
        mean and spread). A 2-D map is measured as it is with any of them but a
        plane number other than 0.
    """
    plane = check_plane(plane)
    if plane == PLANES_ALL:
        rows = [_map_row(m, path, cap_latitude, fill) for m in read_planes(path, field=field)]
        return rows[0] if len(rows) == 1 else _combine(rows, path)
    return _map_row(read_map(path, field=field, plane=plane), path, cap_latitude, fill)
