"""Pixels of a map and their per-row sums, taken while the pixels are copied out of a file."""

from __future__ import annotations

import numpy as np

__all__ = ["RowStatistics"]


class RowStatistics:
    """Per-row sums over the finite pixels of a map (float64), and their counts.

    Sums of absolute values are computed only for the rows asked for (the polar
    caps), once, and kept.
    """

    def __init__(self, values: np.ndarray, sums: np.ndarray, counts: np.ndarray) -> None:
        self._values = values
        self.sums = sums
        self.counts = counts
        self._abs_sums = np.full(sums.shape, np.nan)

    def abs_sums(self, rows: slice) -> np.ndarray:
        """Sum of |pixel| over the finite pixels of each row in ``rows``."""
        cached = self._abs_sums[rows]
        todo = np.flatnonzero(np.isnan(cached))
        if todo.size:
            start = rows.start or 0
            sub = self._values[start + todo[0] : start + todo[-1] + 1]
            if np.all(self.counts[start + todo[0] : start + todo[-1] + 1] == sub.shape[1]):
                result = np.abs(sub).sum(axis=1)
            else:
                result = np.abs(np.where(np.isfinite(sub), sub, 0.0)).sum(axis=1)
            cached[todo[0] : todo[-1] + 1] = result
        return cached

    def scale(self, values: np.ndarray, factor) -> None:
        """Follow the pixels after they were replaced by ``values`` = old x ``factor`` (> 0)."""
        self._values = values
        self.sums *= factor
        self._abs_sums *= factor


_BLOCK_ROWS = 64  # rows copied and summed at once: small enough to stay in cache


def _block_statistics(block: np.ndarray, sums: np.ndarray, counts: np.ndarray, clean: bool) -> None:
    """Row sums and finite counts of ``block``; with ``clean``, non-finite pixels become NaN in place.

    Rows are summed by numpy's pairwise summation in the pixels' own precision
    (for float32 an error near 1e-7 of the row's unsigned sum, the precision of
    the stored pixels); only rows holding NaN or inf take the slower masked pass.
    """
    sums[:] = block.sum(axis=1)
    bad = ~np.isfinite(sums)
    if bad.any():
        sub = block[bad]
        finite = np.isfinite(sub)
        sums[bad] = np.where(finite, sub, 0.0).sum(axis=1)
        counts[bad] = finite.sum(axis=1)
        if clean:
            block[bad] = np.where(finite, sub, np.nan)


def _row_statistics(values: np.ndarray) -> RowStatistics:
    """Row statistics of a map's pixels without changing them."""
    nlat, nlon = values.shape
    sums, counts = np.empty(nlat), np.full(nlat, nlon, dtype=np.int64)
    for start in range(0, nlat, _BLOCK_ROWS):
        rows = slice(start, start + _BLOCK_ROWS)
        _block_statistics(values[rows], sums[rows], counts[rows], clean=False)
    return RowStatistics(values, sums, counts)


def _copy_with_statistics(
    view: np.ndarray, dtype, roll: int, sentinels: tuple[float, ...]
) -> tuple[np.ndarray, RowStatistics]:
    """Copy ``view`` (columns rolled left by ``roll``) into a new native array, block by block.

    Each block is summed while it is in cache, so the copy and the row sums cost
    about one pass over the pixels. Sentinel values and non-finite pixels become
    NaN in the copy.
    """
    nlat, nlon = view.shape
    out = np.empty((nlat, nlon), dtype=dtype)
    sums, counts = np.empty(nlat), np.full(nlat, nlon, dtype=np.int64)
    for start in range(0, nlat, _BLOCK_ROWS):
        rows = slice(start, min(start + _BLOCK_ROWS, nlat))
        block = out[rows]
        if roll:
            block[:, : nlon - roll] = view[rows, roll:]
            block[:, nlon - roll :] = view[rows, :roll]
        else:
            block[...] = view[rows]
        for value in sentinels:
            block[block == value] = np.nan
        _block_statistics(block, sums[rows], counts[rows], clean=True)
    return out, RowStatistics(out, sums, counts)
