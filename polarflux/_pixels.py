"""Pixels of a map and their per-row sums, read from a FITS file in one pass.

Row blocks come straight from the file (plain, or gzip through :mod:`gzip`),
are put in map order (south row first, longitude ascending) in the map's final
native array, scaled (``BSCALE``/``BZERO``), cleaned (``BLANK``, ``MISSING``,
NaN and inf become NaN) and summed per row while in cache; the DATASUM /
CHECKSUM word sums come from the same bytes. Nothing is memory-mapped: a file
cut short is refused by name. Tile-compressed images and bzip2/zip files are
left to astropy's decoder (:func:`astropy_image`).

References: FITS Standard 4.0 (IAU FITS Working Group 2018), sections 3-5
(headers, data, BITPIX, BSCALE/BZERO/BLANK) and appendix J (CHECKSUM/DATASUM).
"""

from __future__ import annotations

import contextlib
import gzip
import math
import re
import sys
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

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
                total += _swapped_word_sum(dest)
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


def _word_sum(raw: np.ndarray) -> int:
    """Plain (unfolded) sum of the big-endian 32-bit words of the bytes ``raw``, zero-padded to a whole word."""
    extra = raw.size % 4
    if extra:
        raw = np.concatenate([raw, np.zeros(4 - extra, np.uint8)])
    return int(np.add.reduce(raw.view(">u4"), dtype=np.uint64)) if raw.size else 0


def _swapped_word_sum(values: np.ndarray) -> int:
    """:func:`_word_sum` of the file bytes of 4- or 8-byte ``values`` byte-swapped to native order: on a
    little-endian machine their native 32-bit words are the file's (8-byte values' in swapped pairs)."""
    if sys.byteorder != "little":
        return _word_sum(values.view(np.uint8))
    return int(np.add.reduce(values.view(np.uint32), dtype=np.uint64))


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


# --------------------------------------------------------------------------- FITS structure


class _Unreadable(Exception):
    """Not a FITS file this reader can walk; the message says why, in one line."""


_BITPIX = {8: ">u1", 16: ">i2", 32: ">i4", 64: ">i8", -32: ">f4", -64: ">f8"}
_KEYWORD = re.compile(r"[A-Z0-9_-]{1,8}\Z")
_INT = re.compile(r"[+-]?\d+\Z")
_FLOAT = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[EeDd][+-]?\d+)?\Z")
_COMMENTARY = ("COMMENT", "HISTORY", "")
_RECORD, _CARD, _END_CARD = 2880, 80, "END" + " " * 77
#: Keywords describing an HDU's own structure: never inherited from the primary header.
_STRUCTURAL = frozenset("SIMPLE XTENSION BITPIX NAXIS EXTEND PCOUNT GCOUNT GROUPS BSCALE BZERO BLANK CHECKSUM "
                        "DATASUM EXTNAME EXTVER EXTLEVEL INHERIT COMMENT HISTORY".split()) | {""}


@dataclass
class FitsImage:
    """An image in a file: keywords (as ``dict(astropy.io.fits.Header.items())``), numpy ``shape``
    ``(..., NAXIS2, NAXIS1)``, data ``offset`` in the (decompressed) file, plain sum of the header's
    32-bit words, and the keywords of a data-less primary header before this extension."""

    header: dict
    shape: tuple[int, ...]
    bitpix: int
    offset: int
    header_sum: int
    primary: dict = field(default_factory=dict)

    @property
    def raw_dtype(self) -> np.dtype:
        return np.dtype(_BITPIX[self.bitpix])

    @property
    def nbytes(self) -> int:
        return math.prod(self.shape) * abs(self.bitpix) // 8

    @property
    def nplanes(self) -> int:
        return math.prod(self.shape[:-2])


def open_fits(source: str):
    """A binary file object on ``source``'s FITS bytes (gzip decompressed as read); None for bzip2 or zip."""
    f = open(source, "rb", buffering=0)
    magic = f.read(4)
    f.seek(0)
    if magic[:2] == b"\x1f\x8b" or magic[:3] == b"BZh" or magic == b"PK\x03\x04":
        f.close()
        return gzip.GzipFile(source, "rb") if magic[:2] == b"\x1f\x8b" else None  # closes its own file
    return f


def is_gzip(f) -> bool:  # offsets then count decompressed bytes: the file's size says nothing
    return isinstance(f, gzip.GzipFile)


def _read_exact(f, view: memoryview) -> int:
    """Fill ``view`` from ``f``; the number of bytes read (fewer only at the end of the file)."""
    done = 0
    while done < len(view):
        n = f.readinto(view[done:])
        if not n:
            break
        done += n
    return done


def _parse_header(text: str) -> dict | None:
    """The header's keywords and values as ``dict(astropy.io.fits.Header.items())`` gives them, or None.

    Parses the cards maps carry (FITS standard 4.0, section 4.2: strings, logicals,
    integers, reals, commentary, undefined values); None hands anything else
    (CONTINUE, HIERARCH, complex numbers, malformed cards) to astropy.
    """
    header: dict = {}
    for start in range(0, len(text), _CARD):
        card = text[start : start + _CARD]
        keyword = card[:8].rstrip()
        if keyword == "END":
            break
        if keyword in _COMMENTARY:
            header[keyword] = card[8:].rstrip()
            continue
        if card[8:10] != "= " or not _KEYWORD.match(keyword):
            return None
        value = card[10:].lstrip()
        if value.startswith("'"):
            close = 0
            while True:
                close = value.find("'", close + 1)
                if close < 0:
                    return None
                if value[close + 1 : close + 2] != "'":
                    break
                close += 1
            rest = value[close + 1 :].strip()
            if rest and not rest.startswith("/"):
                return None
            header[keyword] = value[1:close].replace("''", "'").rstrip()
            continue
        value = value.split("/", 1)[0].strip()
        if not value:
            header[keyword] = None
        elif value in ("T", "F"):
            header[keyword] = value == "T"
        elif _INT.match(value):
            header[keyword] = int(value)
        elif _FLOAT.match(value):
            header[keyword] = float(value.replace("D", "E").replace("d", "e"))
        else:
            return None
    return header


def _astropy_header(text: str) -> dict:
    """Parse with astropy (the reference library), its warnings on bad cards taken as errors."""
    from astropy.io import fits
    from astropy.utils.exceptions import AstropyUserWarning

    with warnings.catch_warnings():
        warnings.simplefilter("error", AstropyUserWarning)
        try:
            return dict(fits.Header.fromstring(text).items())
        except Exception as exc:
            raise _Unreadable(f"bad header card: {first_line(exc)}") from None


def _read_header(f, first: bool) -> tuple[dict, int, int] | None:
    """One header: (keywords, plain sum of its 32-bit words, length in bytes); None after the last HDU."""
    records: list[str] = []
    while True:
        record = f.read(_RECORD)
        if not record and not records:
            return None
        if len(record) < _RECORD:
            raise _Unreadable("the file ends inside a header")
        if not records and record[:9] != (b"SIMPLE  =" if first else b"XTENSION="):
            if first:
                raise _Unreadable("it does not start with SIMPLE =")
            return None  # bytes after the last HDU are ignored, as astropy ignores them
        try:
            text = record.decode("ascii")
        except UnicodeDecodeError:
            text = ""
        if not text.isprintable():
            raise _Unreadable("no END card closes the header")
        records.append(text)
        end = next((i for i in range(0, _RECORD, _CARD) if text[i : i + _CARD] == _END_CARD), -1)
        if end >= 0:
            break
    text = "".join(records)
    header = _parse_header(text)
    if header is None:
        header = _astropy_header(text[: len(text) - _RECORD + end + _CARD])
    return header, _word_sum(np.frombuffer(text.encode("ascii"), np.uint8)), len(text)


def _integer(header: Mapping, key: str, default: int | None = None) -> int:
    value = header.get(key, default)
    if isinstance(value, bool) or not isinstance(value, int):
        raise _Unreadable(f"{key}={value!r} is not an integer")
    return value


def _data_size(header: Mapping) -> tuple[tuple[int, ...], int]:
    """(numpy shape, bytes with padding) of an HDU's data, from its structural keywords."""
    bitpix, naxis = _integer(header, "BITPIX"), _integer(header, "NAXIS")
    if bitpix not in _BITPIX:
        raise _Unreadable(f"BITPIX={bitpix} is not one of 8, 16, 32, 64, -32, -64")
    axes = [_integer(header, f"NAXIS{i}") for i in range(1, min(naxis, 999) + 1)]
    if not 0 <= naxis <= 999 or any(n < 0 for n in axes):
        raise _Unreadable(f"NAXIS={naxis} or an NAXISn is out of range")
    if naxis == 0:
        return (), 0
    groups = header.get("GROUPS") is True and axes[0] == 0
    size = abs(bitpix) // 8 * _integer(header, "GCOUNT", 1) * (
        _integer(header, "PCOUNT", 0) + math.prod(axes[1:] if groups else axes))
    return tuple(reversed(axes)), -(-size // _RECORD) * _RECORD


def find_image(f) -> FitsImage | str | None:
    """The first HDU holding an image of 2 or more non-empty dimensions: a :class:`FitsImage`,
    "tile-compressed" (astropy decodes those) or None. ``_Unreadable``: not FITS, or cut in a header."""
    position, first, primary = 0, True, {}
    while (read := _read_header(f, first)) is not None:
        header, header_sum, length = read
        position += length
        shape, size = _data_size(header)
        xtension = str(header.get("XTENSION", "")).strip()
        if first and not shape:
            primary = header
        if xtension == "BINTABLE" and header.get("ZIMAGE") is True:
            return "tile-compressed"
        if (first and header.get("GROUPS") is not True or xtension == "IMAGE") and len(shape) >= 2 and all(shape):
            return FitsImage(header, shape, header["BITPIX"], position, header_sum, {} if first else primary)
        first = False
        position += size
        f.seek(position)
    return None


# --------------------------------------------------------------------------- files astropy decodes


@contextlib.contextmanager
def refusals(source: str):
    """Turn what a broken file raises into one-line MapFormatErrors naming it."""
    try:
        yield
    except (MapFormatError, SettingsError):
        raise
    except _Unreadable as exc:
        raise MapFormatError(f"{source}: not a readable FITS file ({exc})") from None
    except PermissionError:
        raise MapFormatError(f"{source}: cannot open (permission denied)") from None
    except Exception as exc:  # astropy raises OSError, ValueError, TypeError, warnings; gzip EOFError, ...
        text = str(exc).lower()
        if "checksum verification failed" in text or "datasum verification failed" in text:
            raise MapFormatError(f"{source}: damaged: its CHECKSUM/DATASUM do not match the contents "
                                 f"({first_line(exc)})") from None
        raise MapFormatError(f"{source}: not a readable FITS file ({first_line(exc)})") from None


def inherit(header: Mapping, primary: Mapping) -> dict:
    """``header`` with the keywords of a data-less primary header it lacks (unless ``INHERIT = F``)."""
    merged = dict(header)
    if primary and header.get("INHERIT") is not False:
        for key, value in primary.items():
            if key not in merged and key not in _STRUCTURAL:
                merged[key] = value
    return merged


def astropy_image(source: str, pixels: bool):
    """Header, primary header, decoded data (None without ``pixels``) and shape of a tile-compressed,
    bzip2 or zip file, read by astropy, which verifies CHECKSUM / DATASUM where present."""
    from astropy.io import fits
    from astropy.utils.exceptions import AstropyUserWarning

    with warnings.catch_warnings():
        # Truncation and header damage arrive as astropy warnings; treat them as errors.
        warnings.simplefilter("error", AstropyUserWarning)
        with fits.open(source, memmap=False, lazy_load_hdus=True, checksum=pixels) as hdul:
            primary = {}
            for number, hdu in enumerate(hdul):
                if number == 0 and int(hdu.header.get("NAXIS", 0)) == 0:
                    primary = dict(hdu.header.items())
                if not getattr(hdu, "is_image", False) or int(hdu.header.get("NAXIS", 0)) < 2:
                    continue
                shape = hdu.shape
                if len(shape) < 2 or not all(shape):
                    continue
                data = hdu.data if pixels else None
                return dict(hdu.header.items()), primary if number else {}, data, shape
    raise MapFormatError(f"{source}: no 2-D image in any HDU")


def first_line(exc: BaseException) -> str:
    """The first line of an exception's message, without astropy's advice on keywords."""
    text = str(exc).strip().splitlines()
    if not text:
        return type(exc).__name__
    return text[0].split(". If this is really a FITS file")[0].rstrip(".")
