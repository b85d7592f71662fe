"""The structure of a FITS file: its headers (keywords, values, word sums) and where an image's
data lie; the files astropy decodes (tile-compressed, bzip2, zip); one-line refusals of broken files.

:mod:`polarflux._pixels` reads the data themselves.

References: FITS Standard 4.0 (IAU FITS Working Group 2018), sections 3-4 (file
organisation, headers and their cards) and appendix J (CHECKSUM/DATASUM word sums).
"""

from __future__ import annotations

import contextlib
import gzip
import math
import re
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from .errors import MapFormatError, SettingsError


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


def _word_sum(raw: np.ndarray) -> int:
    """Plain (unfolded) sum of the big-endian 32-bit words of the bytes ``raw``, zero-padded to a whole word."""
    extra = raw.size % 4
    if extra:
        raw = np.concatenate([raw, np.zeros(4 - extra, np.uint8)])
    return int(np.add.reduce(raw.view(">u4"), dtype=np.uint64)) if raw.size else 0


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
