"""Sunspot-number series: reading them from the files people keep.

Two layouts are read:

* CSV with a header row: ``date`` (ISO ``YYYY-MM-DD`` or ``YYYY-MM``) or ``year``
  (decimal year), ``sunspot_number``, and optionally the hemispheric columns
  ``sunspot_number_north`` and ``sunspot_number_south``. A spreadsheet's UTF-8
  byte-order mark is accepted.
* The semicolon-separated, headerless layout of the standard sunspot-number files
  (common practice): monthly rows ``year; month; decimal year; value; ...`` and
  yearly rows ``decimal year; value; ...``.

Empty cells and negative values (-1 is the usual missing-value code) are gaps (NaN).
"""

from __future__ import annotations

import csv
import math
import os
from typing import NamedTuple

import numpy as np

from ._kinds import check_input_file
from .errors import PolarfluxError
from .timeseries import to_decimal_year

__all__ = ["read_sunspots", "read_sunspot_series", "SunspotSeries"]

SUNSPOT_WORDS = ("a sunspot-number series (CSV with columns date or year, and sunspot_number; or the "
                 "semicolon-separated standard layout)")

_HEMISPHERE_COLUMNS = {"north": "sunspot_number_north", "south": "sunspot_number_south"}


class SunspotSeries(NamedTuple):
    """A sunspot-number series: times in decimal years, the total, and each hemisphere where given."""

    times: np.ndarray
    total: np.ndarray
    north: np.ndarray | None
    south: np.ndarray | None

    @property
    def hemispheric(self) -> tuple[np.ndarray, np.ndarray] | None:
        """(north, south) when the file gave both hemispheres' numbers, else None."""
        return None if self.north is None or self.south is None else (self.north, self.south)


def read_sunspots(path: str | os.PathLike) -> tuple[np.ndarray, np.ndarray]:
    """Read a sunspot-number series (decimal years, values); see :func:`read_sunspot_series`."""
    series = read_sunspot_series(path)
    return series.times, series.total


def read_sunspot_series(path: str | os.PathLike) -> SunspotSeries:
    """Read a sunspot-number series, with its hemispheric columns where the file has them.

    Raises
    ------
    PolarfluxError
        One line naming the file and the line or column that is wrong, or what the file
        is instead (a record, a binary file, an empty file, ...).
    """
    source = os.fspath(path)
    check_input_file(source, SUNSPOT_WORDS, accept=("sunspots", "csv", "text"))
    try:
        with open(source, newline="", encoding="utf-8-sig") as handle:  # -sig: spreadsheets write a BOM
            lines = handle.read().splitlines()
    except OSError as exc:
        raise PolarfluxError(f"{source}: cannot open ({exc.strerror or exc})") from None
    except UnicodeDecodeError:
        raise PolarfluxError(f"{source}: not a text file; expected {SUNSPOT_WORDS}") from None
    content = [(n, line) for n, line in enumerate(lines, start=1) if line.strip()]
    if not content:
        raise PolarfluxError(f"{source}: holds no rows; expected {SUNSPOT_WORDS}")
    if ";" in content[0][1] and _is_number(content[0][1].split(";")[0]):
        return _checked(source, _parse_semicolon(source, content), first_line=content[0][0])
    return _checked(source, _parse_csv(source, lines), first_line=2)


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _value(text: str | None) -> float:
    """A cell's value; empty or negative (the missing-value code) is a gap."""
    text = (text or "").strip()
    if not text:
        return math.nan
    value = float(text)
    return value if value >= 0.0 else math.nan


def _is_monthly(cells: list[str]) -> bool:
    """``year; month; decimal year; value``: the third cell is the middle of that month."""
    try:
        year, month, decimal = float(cells[0]), float(cells[1]), float(cells[2])
    except (ValueError, IndexError):
        return False
    return (len(cells) >= 4 and year.is_integer() and month.is_integer() and 1 <= month <= 12
            and abs(decimal - (year + (month - 0.5) / 12.0)) < 0.05)


def _parse_semicolon(source: str, content: list[tuple[int, str]]) -> SunspotSeries:
    times, values = [], []
    monthly = _is_monthly([c.strip() for c in content[0][1].split(";")])
    for n, line in content:
        cells = [c.strip() for c in line.split(";")]
        try:
            if monthly:
                year, month = int(float(cells[0])), int(float(cells[1]))
                middle = np.datetime64(f"{year:04d}-{month:02d}", "D") + np.timedelta64(14, "D")
                times.append(float(to_decimal_year(np.array([middle]))[0][0]))
                values.append(_value(cells[3]))
            else:
                times.append(float(cells[0]))
                values.append(_value(cells[1]))
        except (ValueError, IndexError):
            raise PolarfluxError(f"{source}: line {n}: expected 'year; month; decimal year; value; ...' (monthly) "
                                 "or 'decimal year; value; ...' (yearly)") from None
    return SunspotSeries(np.array(times), np.array(values), None, None)


def _parse_csv(source: str, lines: list[str]) -> SunspotSeries:
    reader = csv.DictReader(lines)
    fields = [f.strip().lower() for f in (reader.fieldnames or [])]
    reader.fieldnames = fields
    if "sunspot_number" not in fields or not ({"date", "year"} & set(fields)):
        raise PolarfluxError(
            f"{source}: needs columns 'date' (or 'year') and 'sunspot_number', or the semicolon-separated "
            f"standard layout; found columns {', '.join(repr(f) for f in fields) or 'none'}"
        )
    hemispheres = {h: c for h, c in _HEMISPHERE_COLUMNS.items() if c in fields}
    times: list[float] = []
    values: dict[str, list[float]] = {"total": [], **{h: [] for h in hemispheres}}
    for line, row in enumerate(reader, start=2):
        try:
            if "date" in fields and row.get("date"):
                times.append(float(to_decimal_year(np.array([np.datetime64(row["date"].strip(), "D")]))[0][0]))
            else:
                times.append(float(row["year"]))
        except (ValueError, TypeError):
            raise PolarfluxError(f"{source}: line {line}: time {row.get('date') or row.get('year')!r} "
                                 "is not a date or a year") from None
        for key, column in (("total", "sunspot_number"), *((h, c) for h, c in hemispheres.items())):
            try:
                values[key].append(_value(row.get(column)))
            except ValueError:
                raise PolarfluxError(f"{source}: line {line}: {column} {row.get(column)!r} is not a number") from None
    arrays = {key: np.array(v) for key, v in values.items()}
    return SunspotSeries(np.array(times), arrays["total"], arrays.get("north"), arrays.get("south"))


def _checked(source: str, series: SunspotSeries, first_line: int) -> SunspotSeries:
    t = series.times
    if t.size < 2:
        raise PolarfluxError(f"{source}: needs at least two rows")
    bad = np.flatnonzero(np.diff(t) <= 0)
    if bad.size:
        line = first_line + bad[0] + 1
        raise PolarfluxError(f"{source}: line {line}: times must increase (it is not after the row before it)")
    return series
