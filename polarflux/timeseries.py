"""Time series helpers: decimal years, the 13-month smoothing and running means.

Decimal years are the unit of time inside the record analysis (2054.5 is the
middle of 2054); these functions convert to and from ``numpy.datetime64``.
"""

from __future__ import annotations

import numpy as np

from .errors import SettingsError

__all__ = ["smooth_13_month", "running_mean", "RECORD_MIN_COUNT", "to_decimal_year", "from_decimal_year",
           "format_date"]

_WEIGHTS_13 = np.array([0.5] + [1.0] * 11 + [0.5]) / 12.0


def smooth_13_month(values) -> np.ndarray:
    """The 13-month running mean with half weights at both ends (the trade's standard smoothing).

    S_i = (x_{i-6} / 2 + x_{i-5} + ... + x_{i+5} + x_{i+6} / 2) / 12 for a monthly
    series. Where the 13-month window is incomplete (the first and last six
    months) or holds a missing value, the result is NaN: gaps stay gaps.
    """
    x = np.asarray(values, dtype=np.float64)
    out = np.full(x.shape, np.nan)
    if x.size < 13:
        return out
    filled = np.where(np.isnan(x), 0.0, x)
    smooth = np.convolve(filled, _WEIGHTS_13, mode="valid")
    holes = np.convolve(np.isnan(x).astype(float), np.ones(13), mode="valid") > 0
    smooth[holes] = np.nan
    out[6:-6] = smooth
    return out


def running_mean(values, n: int, min_count: int | None = None) -> np.ndarray:
    """Centred running mean over ``n`` samples (odd n) of the finite values in each window.

    A window needs at least ``min_count`` finite values (default: all ``n``);
    otherwise, and where the window runs past either end, the result is NaN.
    Missing values are never taken as zeros.
    """
    n = int(n)
    if n < 1 or n % 2 == 0:
        raise SettingsError(f"running mean length {n} must be a positive odd number")
    need = n if min_count is None else int(min_count)
    if not 1 <= need <= n:
        raise SettingsError(f"min_count={min_count} must lie between 1 and {n}")
    x = np.asarray(values, dtype=np.float64)
    out = np.full(x.shape, np.nan)
    if x.size < n:
        return out
    half = n // 2
    finite = np.isfinite(x)
    sums = np.convolve(np.where(finite, x, 0.0), np.ones(n), mode="valid")
    counts = np.convolve(finite.astype(float), np.ones(n), mode="valid")
    mean = np.divide(sums, counts, out=np.full(sums.shape, np.nan), where=counts >= need)
    out[half: x.size - half] = mean
    return out


#: Entries a 13-rotation running mean of the record needs: two thirds of the window,
#: so that a missing rotation or two do not open a gap a year wide.
RECORD_MIN_COUNT = 9


def to_decimal_year(times) -> tuple[np.ndarray, bool]:
    """Decimal years of ``times`` (floats or datetime64); the flag says they were datetimes."""
    arr = np.asarray(times)
    if np.issubdtype(arr.dtype, np.datetime64):
        ns = arr.astype("datetime64[ns]")
        years = ns.astype("datetime64[Y]")
        start = years.astype("datetime64[ns]")
        end = (years + 1).astype("datetime64[ns]")
        fraction = (ns - start).astype(np.float64) / (end - start).astype(np.float64)
        out = years.astype(np.int64) + 1970 + fraction
        out[np.isnat(ns)] = np.nan
        return out.astype(np.float64), True
    return arr.astype(np.float64), False


def from_decimal_year(years, as_datetime: bool):
    years = np.asarray(years, dtype=np.float64)
    if not as_datetime:
        return years
    whole = np.floor(years)
    start = (whole - 1970).astype(np.int64).astype("datetime64[Y]").astype("datetime64[ns]")
    end = (whole - 1970 + 1).astype(np.int64).astype("datetime64[Y]").astype("datetime64[ns]")
    span = (end - start).astype(np.float64)
    return start + ((years - whole) * span).astype(np.int64).astype("timedelta64[ns]")


def format_date(year: float) -> str:
    """``YYYY-MM-DD`` of a decimal year, or "-" for NaN (tables and reports)."""
    if not np.isfinite(year):
        return "-"
    # to the nearest minute first: a date read as midnight must not print as the day before
    moment = from_decimal_year(np.array([year]), True)[0] + np.timedelta64(30, "s")
    return str(np.datetime_as_string(moment.astype("datetime64[m]"), unit="D"))
