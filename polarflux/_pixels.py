"""Pixels of a map and their per-row sums, read from a FITS file in one pass.

Row blocks come straight from the file (plain, or gzip through :mod:`gzip`),
are put in map order (south row first, longitude ascending) in the map's final
native array, scaled (``BSCALE``/``BZERO``), cleaned (``BLANK``, ``MISSING``,
NaN and inf become NaN) and summed per row while in cache; the DATASUM /
CHECKSUM word sums come from the same bytes. Nothing is memory-mapped: a file
cut short is refused by name. Where the image lies in the file, and the files
astropy decodes (tile-compressed, bzip2, zip), are :mod:`polarflux._fits`'s.

References: FITS Standard 4.0 (IAU FITS Working Group 2018), sections 3-5
(data, BITPIX, BSCALE/BZERO/BLANK) and appendix J (CHECKSUM/DATASUM).
"""

from __future__ import annotations

import math
import sys
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ._fits import FitsImage, _Unreadable, _word_sum
from .errors import MapFormatError, SettingsError

__all__ = ["RowStatistics"]

_BLOCK_ROWS = 64  # rows of in-memory pixels copied and summed at once: small enough to stay in cache
_BLOCK_BYTES = 4 << 20  # bytes of one block read from a file: few system calls and Python steps, the block
#                         still in the last-level cache for its byte swap and row sums (1 MB blocks measured slower)


class RowStatistics:
    """Per-row sums over the finite pixels of a map (float64), and their counts; sums of absolute
    values only for the rows asked for (the polar caps), once, and kept."""

    def __init__(self, values: np.ndarray, sums: np.ndarray, counts: np.ndarray) -> None:
        self._values = values
        self.sums = sums
        self.counts = counts
        self._abs_sums = np.full(sums.shape, np.nan)

    def abs_sums(self, rows: slice) -> np.ndarray:
        """Sum of |pixel| over the finite pixels of each row in ``rows``.

        Complete rows are summed by BLAS ``sasum``/``dasum`` (one read of the row,
        no temporary); rows with missing pixels without them.
        """
        cached = self._abs_sums[rows]  # a view: what is filled in here is kept
        todo = np.flatnonzero(np.isnan(cached))
        if todo.size:
            from scipy.linalg.blas import dasum, sasum

            values, nlon = self._values, self._values.shape[1]
            asum = sasum if values.dtype == np.float32 else dasum
            index = (rows.start or 0) + todo
            cached[todo] = [  # plain Python numbers in the loop: numpy scalars cost more than the sums
                asum(values[i]) if found == nlon else _abs_sum_of_finite(values[i]) if found else 0.0
                for i, found in zip(index.tolist(), self.counts[index].tolist(), strict=True)
            ]
        return cached

    def scale(self, values: np.ndarray, factor) -> None:
        """Follow the pixels after they were replaced by ``values`` = old x ``factor`` (> 0)."""
        self._values = values
        self.sums *= factor
        self._abs_sums *= factor


def _abs_sum_of_finite(row: np.ndarray) -> float:
    return float(np.einsum("i->", np.abs(np.where(np.isfinite(row), row, 0.0))))


def _missing_rows(values: np.ndarray, sums: np.ndarray, counts: np.ndarray, clean: bool) -> None:
    """Sum again, without them, the rows holding NaN or inf (few: missing polar strips); ``clean``: inf -> NaN.

    Rows are summed in blocks by numpy's vectorised ``einsum`` in the pixels' precision (float32: a few
    1e-8 of the row's unsigned sum, below the pixels' own; three times faster than ``sum``'s pairwise loop).
    """
    bad = np.flatnonzero(~np.isfinite(sums))
    if not bad.size:
        return
    run = values[bad[0] : bad[-1] + 1] if bad[-1] - bad[0] + 1 == bad.size else values[bad]  # a view if contiguous
    nan_rows = np.isnan(run).all(axis=1)  # (a boolean ``all`` is several times faster than counting)
    counts[bad[nan_rows]], sums[bad[nan_rows]] = 0, 0.0  # rows of NaN only (polar strips): nothing to clean
    if not (bad := bad[~nan_rows]).size:
        return
    sub = values[bad]
    finite = np.isfinite(sub)
    counts[bad] = found = np.count_nonzero(finite, axis=1)
    sums[bad] = 0.0
    some = found > 0
    if clean:
        values[bad[~some]] = np.nan  # rows with no data at all
    if some.any():
        part, keep = sub[some], finite[some]
        sums[bad[some]] = np.einsum("ij->i", np.where(keep, part, 0.0))
        if clean:
            values[bad[some]] = np.where(keep, part, np.nan)


def _row_statistics(values: np.ndarray) -> RowStatistics:
    """Row statistics of a map's pixels without changing them."""
    nlat, nlon = values.shape
    sums, counts = np.empty(nlat), np.full(nlat, nlon, dtype=np.int64)
    for start in range(0, nlat, _BLOCK_ROWS):
        sums[start : start + _BLOCK_ROWS] = np.einsum("ij->i", values[start : start + _BLOCK_ROWS])
    _missing_rows(values, sums, counts, clean=False)
    return RowStatistics(values, sums, counts)


# --------------------------------------------------------------------------- converting blocks


@dataclass
class Layout:
    """How a file's rows and columns map onto the map's (``flip_rows``: north row first in the file;
    ``drop_last``: the last column repeats the first meridian; ``flip_cols``: longitude descends;
    ``roll``: columns rolled left by this many after the flips)."""

    flip_rows: bool
    flip_cols: bool
    drop_last: bool
    roll: int

    def columns(self, src: np.ndarray) -> np.ndarray:
        if self.drop_last:
            src = src[:, :-1]
        return src[:, ::-1] if self.flip_cols else src


@dataclass
class Scaling:
    """Physical value = raw x ``bscale`` + ``bzero``, computed in ``dtype``; raw ``blank`` and physical
    ``missing`` values become NaN."""

    dtype: np.dtype
    bscale: float = 1
    bzero: float = 0
    blank: int | None = None
    missing: float | None = None


def scaling_for(bitpix: int, header: Mapping) -> Scaling:
    """The pixel type and scaling ``astropy.io.fits.getdata`` applies, with BLANK as FITS defines it.

    Floating-point data keep their precision; 8- and 16-bit integers become
    float32 and 32- and 64-bit integers float64, scaled in that type, as
    astropy scales them. ``BLANK`` marks raw integer values as undefined, also
    0 (which astropy ignores) and under the unsigned-integer convention (FITS
    standard 4.0, sections 4.4.2.5 and 5.3).
    """
    dtype = np.dtype(np.float64 if bitpix in (-64, 32, 64) else np.float32)
    bscale, bzero = header.get("BSCALE", 1), header.get("BZERO", 0)
    for name, value in (("BSCALE", bscale), ("BZERO", bzero)):
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise _Unreadable(f"{name}={value!r} is not a finite number")
    blank = header.get("BLANK")
    if bitpix < 0 or isinstance(blank, bool) or not isinstance(blank, int):
        blank = None
    return Scaling(dtype, bscale, bzero, blank, _missing(header))


def _missing(header: Mapping) -> float | None:
    value = header.get("MISSING")
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        return None
    return float(value)


def _place(block: np.ndarray, src: np.ndarray, roll: int) -> None:
    """``block[:] = src`` with the columns rolled left by ``roll``, cast (and byte-swapped) on the way."""
    if roll:
        ncol = block.shape[1]
        np.copyto(block[:, : ncol - roll], src[:, roll:], casting="unsafe")
        np.copyto(block[:, ncol - roll :], src[:, :roll], casting="unsafe")
    else:
        np.copyto(block, src, casting="unsafe")


def _convert(block: np.ndarray, src: np.ndarray | None, roll: int, scaling: Scaling, mask: np.ndarray | None,
             sums: np.ndarray, counts: np.ndarray) -> None:
    """Fill ``block`` from the raw rows ``src`` (oriented but for the roll): scaled, cleaned and summed
    (``sums``, ``counts``: the block's rows'), rows with missing pixels too, while the block is in cache.

    ``src`` None: ``block`` already holds the raw values (floating point, in map order).

    The operations and their order are astropy's (cast, multiply by BSCALE, add
    BZERO, then BLANK), so the pixels are bit for bit the ones it returns.
    """
    if src is not None:
        _place(block, src, roll)
    if scaling.bscale != 1:
        np.multiply(block, scaling.bscale, out=block)
    if scaling.bzero != 0:
        block += scaling.bzero
    if scaling.blank is not None:
        hits = mask[: block.shape[0]]
        _place(hits, src == scaling.blank, roll)
        block[hits] = np.nan
    if scaling.missing is not None:
        block[block == scaling.missing] = np.nan
    sums[:] = np.einsum("ij->i", block)
    _missing_rows(block, sums, counts, clean=True)


def oriented_copy(data: np.ndarray, header: Mapping, lat_axis, lon_axis) -> tuple[np.ndarray, RowStatistics]:
    """One copy of pixels already in memory (a sunpy map, an image astropy decoded), in map order.

    Float32 data stay float32 (float64 on first use of ``SynopticMap.br``); other
    types become float64. Integer ``BLANK`` values, a numeric ``MISSING`` value,
    NaN and inf become NaN. Returns the copy and its row statistics.
    """
    layout = Layout(lat_axis.flip, lon_axis.flip, lon_axis.drop_last, lon_axis.roll)
    view = layout.columns(data[::-1] if layout.flip_rows else data)
    blank = header.get("BLANK")
    blank = blank if data.dtype.kind in "iu" and isinstance(blank, int) and not isinstance(blank, bool) else None
    dtype = np.float32 if data.dtype.kind == "f" and data.dtype.itemsize <= 4 else np.float64
    scaling = Scaling(np.dtype(dtype), blank=blank, missing=_missing(header))
    nlat, nlon = view.shape
    out = np.empty((nlat, nlon), dtype=dtype)
    sums, counts = np.empty(nlat), np.full(nlat, nlon, dtype=np.int64)
    mask = np.empty((_BLOCK_ROWS, nlon), dtype=bool) if blank is not None else None
    for a in range(0, nlat, _BLOCK_ROWS):
        rows = slice(a, min(a + _BLOCK_ROWS, nlat))
        _convert(out[rows], view[rows], layout.roll, scaling, mask, sums[rows], counts[rows])
    return out, RowStatistics(out, sums, counts)


def read_plane(f, image: FitsImage, plane: int, layout: Layout, scaling: Scaling, source: str,
               verify: bool) -> tuple[np.ndarray, RowStatistics]:
    """Read plane ``plane`` of ``image`` from ``f`` into a new native array in map order, with its row sums.

    Blocks of whole rows (4n: whole 32-bit words) are converted and summed while in
    cache: floating-point pixels in map order are read straight into the map's
    array and byte-swapped in place, others pass through one reused buffer. With
    ``verify``, the whole data unit is summed (a cube's other planes read, not
    kept) and DATASUM/CHECKSUM checked.
    """
    nrows, ncols = image.shape[-2:]
    raw_dtype = image.raw_dtype
    nlon = ncols - 1 if layout.drop_last else ncols
    row_bytes = ncols * raw_dtype.itemsize
    plane_bytes = nrows * row_bytes
    step = min(nrows, max(4, _BLOCK_BYTES // row_bytes // 4 * 4))
    direct = raw_dtype.kind == "f" and not (layout.flip_rows or layout.flip_cols or layout.drop_last or layout.roll)
    buf = None if direct else np.empty((step, ncols), raw_dtype)
    out = np.empty((nrows, nlon), dtype=scaling.dtype)
    flat = out.reshape(-1)
    sums, counts = np.empty(nrows), np.full(nrows, nlon, dtype=np.int64)
    mask = np.empty((step, nlon), dtype=bool) if scaling.blank is not None else None
    scratch = np.empty(step * row_bytes // 8 + 1, np.uint64) if verify and direct else None
    total, start = 0, image.offset + plane * plane_bytes
    whole = verify and plane_bytes % 4 != 0 and image.nplanes > 1
    if whole:  # planes do not start on whole 32-bit words: sum the data unit in a pass of its own
        total, verify = data_sum(f, image, source), False
    elif verify and plane:
        total += _sum_range(f, image.offset, plane * plane_bytes, source, image)
    f.seek(start)
    for a in range(0, nrows, step):
        b = min(a + step, nrows)
        n = (b - a) * row_bytes
        dest = flat[a * ncols : b * ncols] if direct else buf.reshape(-1)[: (b - a) * ncols]
        got = _read_exact(f, memoryview(dest.view(np.uint8)))
        if got < n:
            raise truncated(source, image, start + a * row_bytes + got)
        if direct:
            np.copyto(dest, dest.view(raw_dtype))  # in place: a 1-D forward cast needs no temporary
            if verify:
                total += _swapped_word_sum(dest, scratch)
            _convert(out[a:b], None, 0, scaling, mask, sums[a:b], counts[a:b])
            continue
        if verify:
            total += _word_sum(dest.view(np.uint8))
        src = layout.columns(buf[b - a - 1 :: -1] if layout.flip_rows else buf[: b - a])
        rows = slice(nrows - b, nrows - a) if layout.flip_rows else slice(a, b)
        _convert(out[rows], src, layout.roll, scaling, mask, sums[rows], counts[rows])
    if verify:
        end = start + plane_bytes
        total += _sum_range(f, end, image.offset + image.nbytes - end, source, image)
    if verify or whole:
        check_sums(image, total, source)
    return out, RowStatistics(out, sums, counts)


def truncated(source: str, image: FitsImage, ends_at: int) -> MapFormatError:
    return MapFormatError(f"{source}: not a readable FITS file (truncated: its data need "
                          f"{image.offset + image.nbytes} bytes, the file ends at {ends_at})")


def plane_index(shape: tuple[int, ...], plane: int | None, source: str) -> int | None:
    """The plane ``read_map(plane=...)`` reads from an image of ``shape``: None for a 2-D image."""
    if plane is not None and (isinstance(plane, bool) or not isinstance(plane, (int, np.integer))):
        raise SettingsError(f"plane={plane!r}: expected a whole number (0 for the first map of a cube)")
    if len(shape) == 2:
        if plane not in (None, 0):
            raise MapFormatError(f"{source}: plane={plane} asked for, but the image is one 2-D map")
        return None
    n = int(np.prod(shape[:-2]))
    if plane is None and n > 1:
        raise MapFormatError(f"{source}: a cube of {n} maps (realizations); measure one with --plane N "
                             "(plane=N in Python) or all with --planes all")
    if plane is None:
        return 0
    if not 0 <= plane < n:
        raise MapFormatError(f"{source}: plane={plane} asked for, but the cube holds {n} maps (planes 0-{n - 1})")
    return int(plane)


# --------------------------------------------------------------------------- checksums


def _swapped_word_sum(values: np.ndarray, scratch: np.ndarray | None = None) -> int:
    """:func:`_word_sum` of the file bytes of 1-D 4- or 8-byte ``values`` byte-swapped to native order: on a
    little-endian machine their native 32-bit words are the file's (8-byte values' in swapped pairs).

    The words are summed in pairs, as 64-bit lanes, without widening each word (a cast that costs more
    than the sums): the lanes' own sum (modulo 2^64) and the exact sum of their high halves give the
    sum of the low halves exactly, as long as there are fewer than 2^32 lanes. ``scratch``: a uint64
    array of at least half as many elements as there are words, for the high halves.
    """
    if sys.byteorder != "little":
        return _word_sum(values.view(np.uint8))
    words = values.view(np.uint32)
    n = words.size // 2
    total = int(words[-1]) if words.size % 2 else 0
    if not n:
        return total
    lanes = words[: 2 * n].view(np.uint64)
    high = np.right_shift(lanes, 32, out=None if scratch is None else scratch[:n])
    high_sum = int(np.add.reduce(high))
    low_sum = (int(np.add.reduce(lanes)) - (high_sum << 32)) % (1 << 64)
    return total + low_sum + high_sum


def ones_complement(total: int) -> int:
    """Fold a plain sum of 32-bit words into their 32-bit ones' complement sum (end-around carry)."""
    while total >> 32:
        total = (total & 0xFFFFFFFF) + (total >> 32)
    return total


def wants_checksum(image: FitsImage) -> bool:
    return "DATASUM" in image.header or "CHECKSUM" in image.header


def check_sums(image: FitsImage, total: int, source: str) -> None:
    """Compare DATASUM and CHECKSUM with the bytes read (FITS standard 4.0, appendix J).

    ``total``: plain sum of the data's 32-bit words. DATASUM is their ones' complement
    sum; CHECKSUM is right when the ones' complement sum of the header's and the
    data's words is negative zero (all 32 bits set).
    """
    header, datasum = image.header, ones_complement(total)
    if "DATASUM" in header:
        try:
            expected = int(str(header["DATASUM"]).strip())
        except ValueError:
            raise MapFormatError(f"{source}: damaged: DATASUM={header['DATASUM']!r} is not a number") from None
        if expected != datasum:
            raise MapFormatError(f"{source}: damaged: its CHECKSUM/DATASUM do not match the contents "
                                 f"(DATASUM {expected}, data sum {datasum})")
    if "CHECKSUM" in header and ones_complement(image.header_sum + datasum) != 0xFFFFFFFF:
        raise MapFormatError(f"{source}: damaged: its CHECKSUM/DATASUM do not match the contents "
                             "(CHECKSUM of the header and data)")


def data_sum(f, image: FitsImage, source: str) -> int:
    """Plain sum of the 32-bit words of ``image``'s whole data unit."""
    return _sum_range(f, image.offset, image.nbytes, source, image)


def _sum_range(f, start: int, nbytes: int, source: str, image: FitsImage) -> int:
    """Read ``nbytes`` from ``start`` through a buffer of whole words and sum their 32-bit words."""
    f.seek(start)
    raw = np.empty(min(max(4, _BLOCK_BYTES // 4 * 4), -(-nbytes // 4) * 4), np.uint8)  # whole words
    total, done = 0, 0
    while done < nbytes:
        n = min(raw.size, nbytes - done)
        got = _read_exact(f, memoryview(raw)[:n])
        if got < n:
            raise truncated(source, image, start + done + got)
        total += _word_sum(raw[:n])
        done += n
    return total


def _read_exact(f, view: memoryview) -> int:
    """Fill ``view`` from ``f``; the number of bytes read (fewer only at the end of the file)."""
    done = 0
    while done < len(view):
        n = f.readinto(view[done:])
        if not n:
            break
        done += n
    return done
