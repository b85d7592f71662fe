"""Measuring whole archives into one record (an ``xarray.Dataset``) and writing it.

The record has one entry per map along ``time`` and the two polar caps along
``hemisphere``. It writes to CSV (one row per map, the columns of
:data:`CSV_COLUMNS`) and to netCDF (the Dataset itself, units and long names as
attributes). Files that cannot be read are listed, never fatal.
"""

from __future__ import annotations

import csv
import glob
import os
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ._io import atomic_path
from ._version import __version__
from .errors import PolarfluxError, SettingsError
from .fill import DEFAULT_FILL, RECORD_FILLS, band_edges, refill
from .geometry import HEMISPHERES, as_degrees
from .los import FIELDS
from .rows import check_plane, measure_file

__all__ = [
    "CSV_COLUMNS",
    "FITS_SUFFIXES",
    "Failure",
    "expand_inputs",
    "measure_file",
    "iter_measurements",
    "measure_archive",
    "measure_with_ledger",
    "available_cores",
    "rows_to_dataset",
    "write_record",
    "read_record",
]

FITS_SUFFIXES = (".fits", ".fts", ".fit", ".fz", ".fits.gz", ".fts.gz", ".fit.gz")

CSV_COLUMNS = (
    "source",
    "instrument",
    "carrington_rotation",
    "time",
    "cap_deg",
    "north_signed_flux_mx",
    "north_unsigned_flux_mx",
    "north_mean_field_g",
    "north_coverage",
    "south_signed_flux_mx",
    "south_unsigned_flux_mx",
    "south_mean_field_g",
    "south_coverage",
    "axial_dipole_g",
    "north_fill_error_g",
    "south_fill_error_g",
    "field",
    "fill",
    "north_spread_g",
    "south_spread_g",
    "axial_dipole_spread_g",
    "planes",
)
#: Columns holding numbers (the rest are text).
NUMERIC_COLUMNS = tuple(c for c in CSV_COLUMNS[5:] if c not in ("field", "fill"))
#: Columns a record written before the fill uncertainty may lack (read as NaN or unknown).
_OPTIONAL_COLUMNS = CSV_COLUMNS[CSV_COLUMNS.index("north_fill_error_g"):]

# Dataset variable -> (CSV column suffix, units, long name)
_CAP_VARIABLES = {
    "signed_flux": ("signed_flux_mx", "Mx", "signed magnetic flux poleward of the cap latitude"),
    "unsigned_flux": ("unsigned_flux_mx", "Mx", "unsigned magnetic flux poleward of the cap latitude"),
    "mean_field": ("mean_field_g", "G", "mean radial field of the polar cap (signed flux / cap area)"),
    "coverage": ("coverage", "1", "fraction of the polar cap area with observed data"),
    "fill_error": ("fill_error_g", "G", "uncertainty of the cap mean field from the fill of its unseen part"),
    "spread": ("spread_g", "G", "standard deviation of the cap mean field over a cube's realizations (NaN: one map)"),
}


@dataclass(frozen=True)
class Failure:
    """A file that could not be measured, and why (one line)."""

    source: str
    reason: str

    def __str__(self) -> str:
        return self.reason if self.reason.startswith(self.source) else f"{self.source}: {self.reason}"


def _is_fits_name(name: str) -> bool:
    lower = name.lower()
    return lower.endswith(FITS_SUFFIXES)


def expand_inputs(inputs: Iterable[str | os.PathLike]) -> tuple[list[str], list[Failure]]:
    """Turn files, folders (searched recursively for FITS names) and glob patterns into files.

    Returns the files in a stable order without duplicates, and a Failure for
    every input that names nothing.
    """
    files: list[str] = []
    problems: list[Failure] = []
    seen: set[str] = set()

    def add(path: str) -> None:
        key = os.path.realpath(path)
        if key not in seen:
            seen.add(key)
            files.append(path)

    for item in inputs:
        text = os.fspath(item)
        if os.path.isdir(text):
            found = []
            for root, dirs, names in os.walk(text, followlinks=False):
                dirs.sort()
                found.extend(os.path.join(root, n) for n in names if _is_fits_name(n))
            if not found:
                problems.append(Failure(text, f"{text}: folder holds no FITS files"))
            for path in sorted(found):
                add(path)
        elif os.path.lexists(text):
            add(text)
        else:
            matches = sorted(glob.glob(text, recursive=True))
            if not matches:
                problems.append(Failure(text, f"{text}: no such file, and no file matches it as a pattern"))
            for path in matches:
                if os.path.isdir(path):
                    problems.append(Failure(path, f"{path}: is a directory matched by a pattern; skipped"))
                else:
                    add(path)
    return files, problems


def _measure_or_fail(args: tuple) -> tuple[str, dict | None, str | None]:
    path, cap, fill, field, plane = args[:5]
    try:
        return path, measure_file(path, cap, fill, field, plane), None
    except PolarfluxError as exc:
        return path, None, str(exc)
    except Exception as exc:  # an unexpected failure must not end the batch
        return path, None, f"{path}: unexpected {type(exc).__name__}: {exc}"


def _check_settings(cap_latitude, fill: str, field: str, jobs: int, plane=None) -> float:
    cap = as_degrees(cap_latitude, "cap_latitude")
    if not 0.0 < cap < 90.0:
        raise SettingsError(f"cap latitude {cap} must lie strictly between 0 and 90 degrees")
    if fill not in RECORD_FILLS:
        raise SettingsError(f"fill={fill!r} is not one of {RECORD_FILLS}")
    if field not in FIELDS:
        raise SettingsError(f"field={field!r} is not one of {FIELDS}")
    if int(jobs) < 1:
        raise SettingsError(f"jobs={jobs} must be at least 1")
    check_plane(plane)
    return cap


def available_cores() -> int:
    """Cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _measure_and_hash(item: tuple):
    """Measure one map and, when asked (item[5]), hash its bytes too: (path, row, error, digest)."""
    path, row, error = _measure_or_fail(item)
    digest = None
    if len(item) > 5 and item[5]:
        from .ledger import file_digest

        try:
            digest = file_digest(path)
        except OSError:
            digest = None
    return path, row, error, digest


def _measure_batch(items: list[tuple]) -> list[tuple]:
    """Measure a batch of maps in a worker; only small rows travel back."""
    return [_measure_and_hash(item) for item in items]


def _dispatch(work: list[tuple], jobs: int, dask: str | None = None) -> Iterator[tuple[str, dict | None, str | None]]:
    """Results of ``work`` as they complete: serially, in a process pool, or on a dask cluster."""
    if not work:
        return
    if dask:
        yield from _dispatch_dask(work, jobs, dask)
        return
    if jobs == 1 or len(work) < 2:
        for item in work:
            yield _measure_and_hash(item)
        return
    chunk = max(1, min(16, len(work) // (4 * int(jobs))))
    with ProcessPoolExecutor(max_workers=int(jobs)) as pool:
        yield from pool.map(_measure_and_hash, work, chunksize=chunk)


def _dispatch_dask(work: list[tuple], jobs: int, address: str):
    """Batches of maps as dask tasks; each worker process reduces its batch to rows (dask's own guidance:
    tasks big enough that their overhead stays small, no arrays shipped back, process workers for GIL-bound work).
    """
    from ._cluster import dask_client

    with dask_client(address, jobs) as client:
        from dask.distributed import as_completed as dask_completed

        workers = max(1, len(client.scheduler_info().get("workers", {})) or int(jobs))
        size = max(1, min(64, len(work) // (4 * workers) or 1))
        batches = [work[i: i + size] for i in range(0, len(work), size)]
        futures = client.map(_measure_batch, batches, pure=False)
        for future in dask_completed(futures):
            yield from future.result()
            future.release()


def iter_measurements(
    paths: Iterable[str],
    cap_latitude=60,
    fill: str = DEFAULT_FILL,
    field: str = "auto",
    jobs: int = 1,
    dask: str | None = None,
    plane=None,
) -> Iterator[tuple[str, dict | None, str | None]]:
    """Measure maps, yielding ``(path, row, None)`` or ``(path, None, reason)`` as each completes.

    ``jobs > 1`` uses a pool of processes; ``dask`` ("local" or a scheduler address)
    a dask.distributed cluster. Only small rows cross process boundaries.
    """
    cap = _check_settings(cap_latitude, fill, field, jobs, plane)
    work = [(os.fspath(p), cap, fill, field, plane) for p in paths]
    for outcome in _dispatch(work, int(jobs), dask):
        yield outcome[:3]


@dataclass
class LedgerRun:
    """What a ledger-backed run did: rows of every input in order, and the failures."""

    rows: list[dict]
    failures: list[Failure]
    measured: int
    reused: int
    new_failures: int


def measure_with_ledger(files: list[str], ledger, cap_latitude=60, fill: str = DEFAULT_FILL, field: str = "auto",
                        jobs: int = 1, dask: str | None = None, on_result=None,
                        retry_failed: bool = False, plane=None) -> LedgerRun:
    """Measure the files the ledger does not know yet, commit each result, and return every input's row.

    ``on_result(path, error_or_None, new)`` is called for each file (``new`` False when
    the ledger already held it). ``retry_failed`` measures again the files whose earlier
    attempt failed (after a repair, or a new version of polarflux).
    """
    from .ledger import file_digest, settings_key

    cap = _check_settings(cap_latitude, fill, field, jobs, plane)
    settings = settings_key(cap, fill, field, plane)
    known: dict[str, tuple] = {}
    todo, meta, failures = [], {}, []
    for path in files:
        try:
            stat = os.stat(path)
        except OSError as exc:
            failures.append(Failure(path, f"{path}: cannot open ({exc.strerror or exc})"))
            if on_result:
                on_result(path, failures[-1].reason, True)
            continue
        digest = ledger.known_digest(path, stat)
        if digest is None and int(jobs) == 1 and not dask:
            try:
                digest = file_digest(path)  # serially: look the content up before measuring it
            except OSError as exc:
                failures.append(Failure(path, f"{path}: cannot open ({exc.strerror or exc})"))
                if on_result:
                    on_result(path, failures[-1].reason, True)
                continue
        meta[path] = (digest, stat)
        hit = None if digest is None else ledger.lookup(digest, settings)
        if hit is None or retry_failed and hit[1] is not None:
            todo.append((path, cap, fill, field, plane, digest is None))
        else:
            known[path] = hit
            if on_result:
                on_result(path, hit[1], False)
    results = dict(known)
    new_failures = 0
    for outcome in _dispatch(todo, int(jobs), dask):
        path, row, error = outcome[:3]
        digest, stat = meta[path]
        if digest is None:  # hashed in the worker, beside the measurement
            digest = outcome[3]
            if digest is None:
                error = error or f"{path}: cannot read it to hash"
                digest = f"unreadable:{path}"
        ledger.store(digest, settings, path, stat, row, error)
        results[path] = (row, error)
        new_failures += error is not None
        if on_result:
            on_result(path, error, True)
    rows = []
    for path in files:
        if path not in results:
            continue
        row, error = results[path]
        if error is not None:
            failures.append(Failure(path, error if path in error else f"{path}: {error}"))
        else:
            rows.append({**row, "source": path})
    return LedgerRun(rows, failures, len(todo), len(known), new_failures)


def measure_archive(
    paths: Iterable[str | os.PathLike],
    cap_latitude=60,
    jobs: int = 1,
    fill: str = DEFAULT_FILL,
    field: str = "auto",
    progress: Callable[[str, str | None], None] | None = None,
    ledger=None,
    dask: str | None = None,
    plane=None,
):
    """Measure every map and return the record as an ``xarray.Dataset``.

    Parameters
    ----------
    paths : iterable of paths
        Files, folders or glob patterns (see :func:`expand_inputs`).
    cap_latitude : float or Quantity
        Cap boundary in degrees.
    jobs : int
        Processes to use.
    fill, field
        As for :func:`~polarflux.measure.measure_caps` and :func:`~polarflux.maps.read_map`.
    progress : callable, optional
        Called as ``progress(path, error_or_None)`` after each file.
    ledger : path or Ledger, optional
        A measurement ledger (:class:`polarflux.ledger.Ledger`): maps it already holds
        with these settings are not measured again, and new results are committed.
    dask : str, optional
        "local" or a dask.distributed scheduler address to measure on.
    plane : int or "all", optional
        For cubes of realizations: measure plane N of each, or all of them (the record
        then holds their mean, and their spread in ``spread`` and ``axial_dipole_spread``;
        see :func:`polarflux.rows.measure_file`).

    Returns
    -------
    xarray.Dataset
        Dims ``time`` (one entry per measured map, sorted by time) and
        ``hemisphere`` ("north", "south"). Files that failed are listed in
        ``attrs["failures"]`` (one "file: reason" per line) and counted in
        ``attrs["failed_count"]``.
    """
    files, failures = expand_inputs(paths)
    cap = as_degrees(cap_latitude, "cap_latitude")
    if ledger is not None:
        from .ledger import Ledger

        book = ledger if isinstance(ledger, Ledger) else Ledger(ledger)
        try:
            run = measure_with_ledger(files, book, cap, fill, field, jobs, dask,
                                      on_result=None if progress is None else (lambda p, e, new: progress(p, e)),
                                      plane=plane)
        finally:
            if book is not ledger:
                book.close()
        return rows_to_dataset(run.rows, cap_deg=cap, fill=fill, field=field, failures=failures + run.failures)
    rows = []
    for path, row, error in iter_measurements(files, cap_latitude, fill, field, jobs, dask, plane):
        if error is None:
            rows.append(row)
        else:
            failures.append(Failure(path, error))
        if progress is not None:
            progress(path, error)
    return rows_to_dataset(rows, cap_deg=cap, fill=fill, field=field, failures=failures)


def rows_to_dataset(rows: list[dict], cap_deg: float, fill: str, field: str, failures: Iterable[Failure] = ()):
    """Build the record Dataset from measurement rows (the CSV columns).

    With ``fill="temporal"`` the rows' unseen polar bands are filled here, from the
    record (:func:`polarflux.fill.temporal_fill`, per instrument and hemisphere).
    """
    import xarray as xr

    def sort_key(row: dict):
        return (row["time"] is None, row["time"] or "", row["source"])

    rows, duplicates = _drop_duplicates(sorted(rows, key=sort_key))
    times = np.array(
        [np.datetime64(r["time"], "ns") if r["time"] else np.datetime64("NaT", "ns") for r in rows],
        dtype="datetime64[ns]",
    )
    has_bands = bool(rows) and all("north_band_mean_g" in r for r in rows)
    data_vars = {}
    for name, (suffix, units, long_name) in _CAP_VARIABLES.items():
        values = np.array(
            [[r.get(f"{h}_{suffix}", np.nan) for h in HEMISPHERES] for r in rows], dtype=np.float64
        ).reshape(len(rows), len(HEMISPHERES))
        data_vars[name] = (("time", "hemisphere"), values, {"units": units, "long_name": long_name})
    data_vars["axial_dipole"] = (
        ("time",),
        np.array([r["axial_dipole_g"] for r in rows], dtype=np.float64),
        {"units": "G", "long_name": "axial dipole moment (3/4pi) integral of Br sin(latitude) dOmega"},
    )
    data_vars["axial_dipole_spread"] = (
        ("time",), np.array([r.get("axial_dipole_spread_g", np.nan) for r in rows], dtype=np.float64),
        {"units": "G", "long_name": "standard deviation of the axial dipole over a cube's realizations (NaN: one map)"})
    data_vars["planes"] = (("time",), np.array([int(r.get("planes", 1) or 1) for r in rows], dtype=np.int64),
                           {"long_name": "maps (realizations) the entry is the mean of"})
    if has_bands:
        edges = band_edges(float(cap_deg))
        for name, key, units, long_name in (
                ("band_mean_field", "band_mean_g", "G", "mean field of the seen part of each latitude band"),
                ("band_abs_field", "band_abs_g", "G", "mean |field| of the seen part of each latitude band"),
                ("band_coverage", "band_coverage", "1", "fraction of each latitude band with observed data")):
            values = np.array([[r[f"{h}_{key}"] for h in HEMISPHERES] for r in rows], dtype=np.float64)
            data_vars[name] = (("time", "hemisphere", "band"), values.reshape(len(rows), 2, edges.size - 1),
                               {"units": units, "long_name": long_name})
    data_vars["carrington_rotation"] = (
        ("time",),
        np.array([-1 if r["carrington_rotation"] is None else int(r["carrington_rotation"]) for r in rows],
                 dtype=np.int64),
        {"long_name": "Carrington rotation number", "comment": "-1 where the map gives none"},
    )
    data_vars["source"] = (("time",), np.array([r["source"] for r in rows], dtype=str),
                           {"long_name": "input file"})
    data_vars["instrument"] = (("time",), np.array([r["instrument"] for r in rows], dtype=str),
                               {"long_name": "instrument"})
    data_vars["map_field"] = (("time",), np.array([r.get("field") or "" for r in rows], dtype=str),
                              {"long_name": "what the map held: radial or line-of-sight (los) field"})
    fills_used = sorted({r.get("fill") or "" for r in rows} - {""})
    fill = fill or (fills_used[0] if len(fills_used) == 1 else "")
    fields_used = sorted({r.get("field") or "" for r in rows} - {""})
    failures = list(failures)
    attrs = {
        "title": "polar-cap magnetic flux record",
        "cap_deg": float(cap_deg),
        "fill": fill,
        "fill_uncertainty": FILL_UNCERTAINTY.get(fill, ""),
        "field": field if field and field != "auto" else "+".join(fields_used) or field,
        "b0_used": "; ".join(sorted({r.get("b0_how") or "" for r in rows} - {""})),
        "failed_count": len(failures),
        "failures": "\n".join(str(f) for f in failures),
        "duplicate_count": len(duplicates),
        "duplicates": "\n".join(duplicates),
        "created_by": f"polarflux {__version__}",
    }
    coords = {
        "time": ("time", times, {"long_name": "map time (UTC)"}),
        "hemisphere": ("hemisphere", np.array(HEMISPHERES, dtype=str)),
    }
    if has_bands:
        coords["band"] = ("band", band_edges(float(cap_deg))[:-1],
                          {"units": "deg", "long_name": "|latitude| of the band's equatorward edge"})
    ds = xr.Dataset(data_vars, coords=coords, attrs=attrs)
    if fill == "temporal" and has_bands:
        ds = refill(ds)
    return ds


#: What the fill uncertainty column means, by fill (see polarflux.fill).
FILL_UNCERTAINTY = {
    "none": "unseen area x mean field of the most poleward band seen",
    "profile": "half the difference of profile fills with sin^4 and sin^12",
    "temporal": "half the band's change between well-seen maps, plus its map-to-map noise",
}


def _drop_duplicates(rows: list[dict]) -> tuple[list[dict], list[str]]:
    """Keep one row per map: files with the same instrument, rotation, time and every measured value
    are one map (a copy, or the same map compressed), kept once and named as duplicates."""
    kept: dict[tuple, dict] = {}
    notes = []
    for row in rows:
        key = (row["instrument"], row["carrington_rotation"], row["time"],
               *(repr(float(row.get(c, np.nan))) for c in NUMERIC_COLUMNS[:9]))
        if key in kept:
            notes.append(f"{row['source']}: the same map as {kept[key]['source']}; measured once")
        else:
            kept[key] = row
    return list(kept.values()), notes


def _dataset_rows(ds) -> Iterator[dict]:
    for i in range(ds.sizes["time"]):
        t = ds["time"].values[i]
        rotation = int(ds["carrington_rotation"].values[i])
        row = {
            "source": str(ds["source"].values[i]),
            "instrument": str(ds["instrument"].values[i]),
            "carrington_rotation": "" if rotation < 0 else rotation,
            "time": "" if np.isnat(t) else np.datetime_as_string(t, unit="ms"),
            "cap_deg": repr(float(ds.attrs["cap_deg"])),
        }
        for name, (suffix, _, _) in _CAP_VARIABLES.items():
            for j, hemisphere in enumerate(HEMISPHERES):
                row[f"{hemisphere}_{suffix}"] = repr(float(ds[name].values[i, j]))
        row["axial_dipole_g"] = repr(float(ds["axial_dipole"].values[i]))
        row["axial_dipole_spread_g"] = repr(float(ds["axial_dipole_spread"].values[i])) \
            if "axial_dipole_spread" in ds else "nan"
        row["planes"] = int(ds["planes"].values[i]) if "planes" in ds else 1
        row["field"] = str(ds["map_field"].values[i]) if "map_field" in ds else str(ds.attrs.get("field", ""))
        row["fill"] = str(ds.attrs.get("fill", ""))
        yield row


def write_record(ds, path: str | os.PathLike, force: bool = False) -> Path:
    """Write the record to ``.csv`` or ``.nc``, atomically; refuse to overwrite unless ``force``."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".csv", ".nc"):
        raise SettingsError(f"{path}: output must end in .csv or .nc")
    with atomic_path(path, force=force) as tmp:
        if suffix == ".csv":
            with open(tmp, "w", newline="", encoding="utf-8") as handle:
                writer = csv.DictWriter(handle, fieldnames=CSV_COLUMNS)
                writer.writeheader()
                writer.writerows(_dataset_rows(ds))
        else:
            ds.to_netcdf(tmp, engine="netcdf4")
    return path


RECORD_WORDS = "a polar-field record (.nc or .csv written by 'polarflux measure')"


def read_record(path: str | os.PathLike):
    """Read a record written by :func:`write_record` (``.nc`` or ``.csv``) as a Dataset.

    Raises
    ------
    PolarfluxError
        One line naming the file and what it is instead (missing, a folder, a map, a
        transport run, a sunspot series, a binary file, ...) or which column or line is wrong.
    """
    import xarray as xr

    from ._kinds import check_input_file

    path = Path(path)
    kind = check_input_file(path, RECORD_WORDS, accept=("record", "csv"))
    if path.suffix.lower() == ".nc" or kind == "record" and path.suffix.lower() != ".csv":
        try:
            with xr.open_dataset(path, engine="netcdf4") as ds:
                return ds.load()
        except (OSError, ValueError, RuntimeError) as exc:
            raise PolarfluxError(f"{path}: cannot be read as a netCDF record ({exc})") from None
    try:
        with open(path, newline="", encoding="utf-8-sig") as handle:
            reader = csv.DictReader(handle)
            missing = [c for c in CSV_COLUMNS if c not in (reader.fieldnames or ()) and c not in _OPTIONAL_COLUMNS]
            if missing:
                raise PolarfluxError(f"{path}: not a polarflux record; missing columns {', '.join(missing)}")
            raw = list(reader)
    except UnicodeDecodeError:
        raise PolarfluxError(f"{path}: not a text file; expected {RECORD_WORDS}") from None
    rows = []
    for line, r in enumerate(raw, start=2):
        row = dict(r)
        try:
            row["carrington_rotation"] = int(r["carrington_rotation"]) if r["carrington_rotation"] else None
            row["time"] = r["time"] or None
            if row["time"] is not None:
                np.datetime64(row["time"], "ns")
            for column in NUMERIC_COLUMNS:
                row[column] = float(r[column]) if r.get(column) not in (None, "") else float("nan")
            row["field"], row["fill"] = r.get("field") or "", r.get("fill") or ""
        except (ValueError, TypeError):
            raise PolarfluxError(f"{path}: line {line}: not a valid record row (a number or time cannot be "
                                 "read)") from None
        rows.append(row)
    cap = float(raw[0]["cap_deg"]) if raw else float("nan")
    return rows_to_dataset(rows, cap_deg=cap, fill="", field="")
