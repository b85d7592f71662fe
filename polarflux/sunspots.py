"""Sunspot-number series: reading them from the files people keep."""

from __future__ import annotations

import csv
import math
import os

import numpy as np

from ._kinds import check_input_file
from .errors import PolarfluxError
from .timeseries import to_decimal_year

__all__ = ["read_sunspots"]

SUNSPOT_WORDS = "a sunspot-number series (CSV with columns date or year, and sunspot_number)"


def read_sunspots(path: str | os.PathLike) -> tuple[np.ndarray, np.ndarray]:
    """Read a sunspot-number series from CSV.

    Columns (a header row is required): ``date`` (ISO date, ``YYYY-MM-DD`` or
    ``YYYY-MM``) or ``year`` (decimal year), and ``sunspot_number``. Monthly or
    yearly rows, in increasing time. Empty ``sunspot_number`` cells are gaps.

    Returns decimal years and values. Raises PolarfluxError naming the file and the
    line for missing columns, non-numeric values or times out of order.
    """
    source = os.fspath(path)
    check_input_file(source, SUNSPOT_WORDS, accept=("sunspots", "csv", "text"))
    try:
        handle = open(source, newline="", encoding="utf-8-sig")  # -sig: spreadsheets write a byte-order mark
    except OSError as exc:
        raise PolarfluxError(f"{source}: cannot open ({exc.strerror or exc})") from None
    try:
        with handle:
            return _parse(source, handle)
    except UnicodeDecodeError:
        raise PolarfluxError(f"{source}: not a text file; expected {SUNSPOT_WORDS}") from None


def _parse(source: str, handle) -> tuple[np.ndarray, np.ndarray]:
    reader = csv.DictReader(handle)
    fields = [f.strip().lower() for f in (reader.fieldnames or [])]
    reader.fieldnames = fields
    if "sunspot_number" not in fields or not ({"date", "year"} & set(fields)):
        raise PolarfluxError(
            f"{source}: needs columns 'date' (or 'year') and 'sunspot_number'; found {', '.join(fields) or 'none'}"
        )
    times, values = [], []
    for line, row in enumerate(reader, start=2):
        try:
            if "date" in fields and row.get("date"):
                times.append(float(to_decimal_year(np.array([np.datetime64(row["date"].strip(), "D")]))[0][0]))
            else:
                times.append(float(row["year"]))
        except (ValueError, TypeError):
            raise PolarfluxError(f"{source}: line {line}: time {row.get('date') or row.get('year')!r} "
                                 "is not a date or a year") from None
        text = (row.get("sunspot_number") or "").strip()
        try:
            values.append(float(text) if text else math.nan)
        except ValueError:
            raise PolarfluxError(f"{source}: line {line}: sunspot_number {text!r} is not a number") from None
    t = np.array(times)
    if t.size < 2:
        raise PolarfluxError(f"{source}: needs at least two rows")
    bad = np.flatnonzero(np.diff(t) <= 0)
    if bad.size:
        raise PolarfluxError(f"{source}: line {bad[0] + 3}: times must increase (row {bad[0] + 3} is not after "
                             "the row before it)")
    return t, np.array(values)
