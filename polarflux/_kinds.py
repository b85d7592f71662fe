"""What kind of file a user handed us, told from its first bytes, for error messages that help.

A record given where a sunspot series belongs, or a transport run given as a
record, should be refused with a sentence that says what the file is and what
was expected, not with a decoding error from deep inside a reader.
"""

from __future__ import annotations

import os
import re
from pathlib import Path

__all__ = ["file_kind", "KIND_WORDS", "check_input_file", "read_csv_table"]

#: How each kind is named in messages.
KIND_WORDS = {
    "missing": "no such file",
    "folder": "a folder, not a file",
    "empty": "an empty file",
    "fits": "a FITS file",
    "netcdf": "a netCDF file",
    "record": "a polar-field record",
    "transport-run": "a transport run (from 'polarflux transport')",
    "sunspots": "a sunspot series (CSV)",
    "toml": "a TOML file",
    "json": "a JSON file",
    "csv": "a CSV file",
    "text": "a text file",
    "binary": "a binary file",
}

_HDF5 = b"\x89HDF\r\n\x1a\n"


def _head(path: Path, size: int = 4096) -> bytes:
    with open(path, "rb") as handle:
        return handle.read(size)


def file_kind(path: str | os.PathLike) -> str:
    """One of the keys of :data:`KIND_WORDS`, judged from the name and the first bytes.

    netCDF files are opened (header only) to tell a record from a transport run.
    """
    path = Path(path)
    if not path.exists():
        return "missing"
    if path.is_dir():
        return "folder"
    try:
        head = _head(path)
    except OSError:
        return "missing"
    if not head:
        return "empty"
    if head.startswith(b"SIMPLE  =") or head[:2] == b"\x1f\x8b" and ".fit" in path.name.lower():
        return "fits"
    if head.startswith((_HDF5, b"CDF\x01", b"CDF\x02", b"CDF\x05")):
        return _netcdf_kind(path)
    try:
        text = head.decode("utf-8-sig")
    except UnicodeDecodeError:
        return "binary"
    if "\x00" in text:
        return "binary"
    first = text.lstrip().splitlines()[0].lower() if text.strip() else ""
    suffix = path.suffix.lower()
    if "north_mean_field_g" in first and "source" in first:
        return "record"
    if suffix == ".toml":
        return "toml"
    if suffix == ".json" or first.startswith("{"):
        return "json"
    if "sunspot" in first:
        return "sunspots"
    if suffix == ".csv" or "," in first or ";" in first:
        return "csv"
    if re.match(r"^\s*(\[|[a-z_][\w.-]*\s*=)", first):
        return "toml"
    return "text"


def _netcdf_kind(path: Path) -> str:
    try:
        import netCDF4

        with netCDF4.Dataset(path) as nc:
            names = set(nc.variables)
            dims = set(nc.dimensions)
    except (OSError, RuntimeError, ValueError):
        return "binary"
    if "br" in names and "lat" in dims:
        return "transport-run"
    if {"mean_field", "axial_dipole"} <= names and "hemisphere" in dims:
        return "record"
    return "netcdf"


def check_input_file(path: str | os.PathLike, expected: str, accept: tuple[str, ...]) -> str:
    """Return the file's kind if it is one of ``accept``; else raise a one-line PolarfluxError.

    ``expected`` names what the caller wanted, e.g. "a polar-field record (.nc or .csv from
    'polarflux measure')".
    """
    from .errors import PolarfluxError

    kind = file_kind(path)
    if kind in accept:
        return kind
    raise PolarfluxError(f"{path}: {KIND_WORDS[kind]}; expected {expected}")


def read_csv_table(path: str | os.PathLike, expected: str,
                   accept: tuple[str, ...] = ("csv", "text")) -> tuple[str, list[str], list[tuple[int, dict]]]:
    """A user's CSV: its name, its column names (stripped, lower case) and its rows with their line numbers.

    The file is checked with :func:`check_input_file` first; a file that cannot be opened or is
    not text is refused in one line naming it and ``expected``.
    """
    import csv

    from .errors import PolarfluxError

    source = os.fspath(path)
    check_input_file(source, expected, accept=accept)
    try:
        with open(source, newline="", encoding="utf-8-sig") as handle:
            reader = csv.DictReader(handle)
            fields = [f.strip().lower() for f in reader.fieldnames or []]
            reader.fieldnames = fields
            rows = list(enumerate(reader, start=2))
    except OSError as exc:
        raise PolarfluxError(f"{source}: cannot open ({exc.strerror or exc})") from None
    except UnicodeDecodeError:
        raise PolarfluxError(f"{source}: not a text file; expected {expected}") from None
    return source, fields, rows
