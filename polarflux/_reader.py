"""From a map's file to its parts: oriented pixels with their row sums, grid axes, time,
rotation number, instrument, and the line-of-sight conversion.

:mod:`polarflux.maps` assembles the parts into a ``SynopticMap`` (``read_map``,
``read_planes``, ``count_planes``); the pixels themselves are read by
:mod:`polarflux._pixels` and the header conventions are :mod:`polarflux._header`'s.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from astropy.time import Time

from . import _fits, _pixels
from ._fits import astropy_image, first_line, inherit, refusals
from ._header import (
    _gauss_per_unit,
    _LatAxis,
    _latitude_axis,
    _LonAxis,
    _longitude_axis,
    _map_time,
    _rotation_number,
    quiet_time_warnings,
)
from ._pixels import RowStatistics, _row_statistics, oriented_copy, plane_index
from .errors import MapFormatError
from .los import field_in_header

#: Plausibility limit of a synoptic map's field, Gauss: far above any photospheric field
#: (sunspot umbrae reach a few kG), so a map beyond it carries a unit or scaling error.
PLAUSIBLE_MAX_G = 1e5

_INSTRUMENT_KEYS = ("INSTRUME", "TELESCOP", "ORIGIN")


@dataclass
class MapParts:
    """What a ``SynopticMap`` is made of, as read: pixels in map order (Gauss) with their row
    statistics, the header, its axes, and the metadata worked out from it."""

    values: np.ndarray
    stats: RowStatistics
    header: dict
    lat_axis: _LatAxis
    lon_axis: _LonAxis
    time: Time | None
    rotation: int | None
    instrument: str
    source: str
    plane: int | None = None
    los_b0: np.ndarray | None = None
    los_b0_how: str = ""


class ImageFile:
    """The first image of a FITS file: header, axes, and reading of its planes.

    Plain and gzip files are walked by :mod:`polarflux._pixels` and each plane
    read once from the file; tile-compressed (and bzip2/zip) files are decoded
    by astropy, with its CHECKSUM/DATASUM verification. Keywords of a data-less
    primary header apply to an image in an extension unless it says
    ``INHERIT = F`` (the FITS keyword-inheritance convention), so a product
    that keeps its times and instrument in the primary header is read whole.
    """

    def __init__(self, source: str, pixels: bool = True) -> None:
        self.source = source
        self._file = None
        self._decoded: np.ndarray | None = None
        self._meta: dict = {}  # time, rotation, column B0: the same for every plane
        if os.path.isdir(source):
            raise MapFormatError(f"{source}: is a directory, not a FITS file")
        try:
            size = os.path.getsize(source)
        except OSError as exc:
            raise MapFormatError(f"{source}: cannot open ({exc.strerror or exc})") from None
        if size == 0:
            raise MapFormatError(f"{source}: empty file")
        try:
            self._open(pixels)
        except BaseException:
            self.close()
            raise

    def _open(self, pixels: bool) -> None:
        source = self.source
        with refusals(source):
            self._file = _fits.open_fits(source)
            found = _fits.find_image(self._file) if self._file is not None else "astropy"
            if found is None:
                raise MapFormatError(f"{source}: no 2-D image in any HDU")
            if isinstance(found, str):  # tile-compressed, bzip2 or zip: astropy decodes
                self.close()
                header, primary, self._decoded, shape = astropy_image(source, pixels)
                self.image = None
            else:
                self.image = found
                header, primary, shape = found.header, found.primary, found.shape
                if not _fits.is_gzip(self._file) and os.path.getsize(source) < found.offset + found.nbytes:
                    raise _pixels.truncated(source, found, os.path.getsize(source))
        self.header = inherit(header, primary)
        self.shape = tuple(int(n) for n in shape)
        self.nplanes = int(np.prod(self.shape[:-2]))
        self.lat_axis, self.lon_axis = axes(self.header, self.shape, source)

    def __enter__(self) -> ImageFile:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        if self._file is not None:
            self._file.close()
            self._file = None

    def verify_all(self) -> None:
        """Check DATASUM/CHECKSUM over the whole data unit now (when the header has them)."""
        if self.image is not None and _pixels.wants_checksum(self.image):
            with refusals(self.source):
                _pixels.check_sums(self.image, _pixels.data_sum(self._file, self.image, self.source), self.source)

    def read(self, index: int | None, field: str, los_max_factor: float, verify: bool) -> MapParts:
        """The parts of map ``index`` (None: the 2-D image), its pixels read once."""
        source, lat_axis, lon_axis = self.source, self.lat_axis, self.lon_axis
        if "time" not in self._meta:  # header work first, while the interpreter's data are still in cache
            self._meta["time"], self._meta["rotation"] = _time_and_rotation(self.header, lon_axis, source)
        if self.image is None:
            data = self._decoded.reshape((-1,) + self.shape[-2:])[index or 0]
            values, stats = oriented_copy(data, self.header, lat_axis, lon_axis)
        else:
            image = self.image
            layout = _pixels.Layout(lat_axis.flip, lon_axis.flip, lon_axis.drop_last, lon_axis.roll)
            with refusals(source):
                scaling = _pixels.scaling_for(image.bitpix, self.header)
                values, stats = _pixels.read_plane(
                    self._file, image, index or 0, layout, scaling, source,
                    verify=verify and _pixels.wants_checksum(image),
                )
        label = source if index is None else f"{source} (plane {index})"  # what a refusal names
        parts = build_parts(values, stats, self.header, lat_axis, lon_axis, label, field, los_max_factor, self._meta)
        parts.source, parts.plane = source, index
        return parts


def parts_from_array(header: Mapping, data: np.ndarray, plane: int | None, source: str, field: str,
                     los_max_factor: float) -> MapParts:
    """The parts of a map held in memory (a sunpy map): its plane selected, the axes read from the
    header, and the pixels copied out in map order."""
    if data.ndim < 2:
        raise MapFormatError(f"{source}: no 2-D image (data has {data.ndim} dimension(s))")
    index = plane_index(data.shape, plane, source)
    if index is not None:
        data = data.reshape((-1,) + data.shape[-2:])[index]
    lat_axis, lon_axis = axes(header, data.shape, source)
    values, stats = oriented_copy(data, header, lat_axis, lon_axis)
    return build_parts(values, stats, header, lat_axis, lon_axis, source, field, los_max_factor)


#: The keywords :func:`~polarflux._header._latitude_axis` and ``_longitude_axis`` read.
_AXIS_KEYS = ("CTYPE2", "CDELT2", "CD2_2", "PC2_1", "CD2_1", "PC2_2", "CRPIX2", "CRVAL2", "PV2_1",
              "CTYPE1", "CDELT1", "CD1_1", "PC1_2", "CD1_2", "PC1_1", "CRPIX1", "CRVAL1")
_ABSENT = object()
_axes_cache: dict = {}
_unit_cache: dict[str, float] = {}  # BUNIT -> Gauss per unit


def axes(header: Mapping, shape: tuple[int, ...], source: str) -> tuple[_LatAxis, _LonAxis]:
    """The latitude and longitude axes of an image of ``shape`` (``(..., NAXIS2, NAXIS1)``).

    Kept per grid (the axis keywords and sizes): an archive's maps share a few
    grids, and working them out costs more than reading the keywords. Refusals
    are never kept, so each names its own file.
    """
    key = (shape[-2], shape[-1], *(header.get(k, _ABSENT) for k in _AXIS_KEYS))
    try:
        found = _axes_cache.get(key)
    except TypeError:  # an unhashable keyword value: work the axes out
        key, found = None, None
    if found is None:
        lat_axis = _latitude_axis(header, shape[-2], source)
        lon_axis = _longitude_axis(header, shape[-1], source)
        if lat_axis.projection != lon_axis.projection:
            raise MapFormatError(
                f"{source}: longitude and latitude axes disagree on the projection "
                f"({header.get('CTYPE1')!r}, {header.get('CTYPE2')!r})"
            )
        found = lat_axis, lon_axis
        if key is not None:
            if len(_axes_cache) >= 64:
                _axes_cache.clear()
            for axis in found:
                for array in (axis.edges, axis.centres):
                    array.flags.writeable = False  # shared by every map of the grid
            _axes_cache[key] = found
    return found


def build_parts(
    values: np.ndarray,
    stats: RowStatistics,
    header: Mapping,
    lat_axis: _LatAxis,
    lon_axis: _LonAxis,
    source: str,
    field: str,
    los_max_factor: float,
    cache: dict | None = None,
) -> MapParts:
    """The parts of a map of oriented pixels: unit, plausibility, time, rotation, instrument,
    line-of-sight conversion.

    ``cache`` keeps what depends on the header only (time, rotation, column B0)
    between the planes of one cube.
    """
    bunit = header.get("BUNIT")
    factor = _unit_cache.get(bunit) if isinstance(bunit, str) else None
    if factor is None:  # parsing a unit costs more than reading the pixels' header
        factor = _gauss_per_unit(header, source)
        if isinstance(bunit, str) and bunit.strip() and len(_unit_cache) < 64:
            _unit_cache[bunit] = factor
    if stats.counts.sum() == 0:
        raise MapFormatError(f"{source}: all values are missing (NaN, BLANK or inf)")
    # Plausibility: a row whose sum exceeds the limit times its length holds an absurd value.
    suspicious = np.flatnonzero(~(np.abs(stats.sums * factor) <= PLAUSIBLE_MAX_G * values.shape[1]))
    if suspicious.size:
        peak = float(np.nanmax(np.abs(values[suspicious]))) * abs(factor)
        if not peak <= PLAUSIBLE_MAX_G:
            raise MapFormatError(
                f"{source}: implausible field values up to {peak:.3g} G (plausibility limit {PLAUSIBLE_MAX_G:.0e} G; "
                "a unit or scaling error?)"
            )
    if (factor != 1.0 or field == "los") and values.dtype != np.float64:
        values = values.astype(np.float64)  # scaled pixels keep full precision
    if factor != 1.0:
        values *= factor
        stats.scale(values, factor)
    cache = {} if cache is None else cache
    if "time" not in cache:
        cache["time"], cache["rotation"] = _time_and_rotation(header, lon_axis, source)
    time, rotation = cache["time"], cache["rotation"]
    los_b0, los_b0_how = None, ""
    if field == "los" or field == "auto" and field_in_header(header) == "los":
        from .los import column_b0, los_to_radial

        if "los_b0" not in cache:
            cache["los_b0"] = column_b0(header, lon_axis.centres, rotation, time, source)
        los_b0, los_b0_how = cache["los_b0"]
        los_to_radial(values, lat_axis.centres, los_b0, los_max_factor, lat_edges=lat_axis.edges)
        stats = _row_statistics(values)
    instrument = ""
    for key in _INSTRUMENT_KEYS:
        if str(header.get(key, "")).strip():
            instrument = str(header[key]).strip()
            break
    return MapParts(values, stats, dict(header), lat_axis, lon_axis, time, rotation, instrument, source,
                    los_b0=los_b0, los_b0_how=los_b0_how)


def _time_and_rotation(header: Mapping, lon_axis: _LonAxis, source: str):
    with quiet_time_warnings():
        time = _map_time(header, source)
        rotation = _rotation_number(header, lon_axis.rotation, time, source)
        if rotation is not None and not 0 < rotation < 100_000:
            raise MapFormatError(f"{source}: Carrington rotation {rotation} is outside 1-99999")
        if time is None and rotation is not None:
            from sunpy.coordinates.sun import carrington_rotation_time

            try:
                time = carrington_rotation_time(rotation + 0.5).utc
            except Exception as exc:  # ERFA refuses dates it cannot represent
                raise MapFormatError(f"{source}: rotation {rotation} gives no usable date ({first_line(exc)})") from None
    return time, rotation
