"""Reading Carrington-rotation synoptic maps.

A synoptic map is a full-surface picture of the photospheric field in the
Carrington frame: longitude along the first FITS axis, latitude along the
second. Archives disagree on how they write the latitude axis, so the reader
decides the grid from the axis span (``NAXIS2 * CDELT2``) rather than from one
keyword:

* cylindrical equal-area (``CRLN-CEA`` / ``CRLT-CEA``) with the latitude step in
  sine latitude: span 2 (``CUNIT2`` "Sine Latitude", or missing);
* cylindrical equal-area with the latitude axis in degrees and ``PV2_1`` = lambda,
  as the FITS WCS standard writes it (Thompson 2006, A&A 449, 791, section 5.5):
  span 360 / (pi lambda);
* equal-angle (``CRLN-CAR`` / ``CRLT-CAR`` or plain ``Long`` / ``Lat``): span 180.

Anything else is refused with :class:`~polarflux.errors.MapFormatError`.
"""

from __future__ import annotations

import os
from collections.abc import Iterator, Mapping
from typing import Any

import numpy as np
from astropy import units as u
from astropy.time import Time

from ._header import parse_header_time, quiet_time_warnings
from ._pixels import RowStatistics, _row_statistics, plane_index
from ._reader import PLAUSIBLE_MAX_G, ImageFile, MapParts, parts_from_array
from .errors import MapFormatError
from .los import FIELDS, LOS_MAX_FACTOR

__all__ = ["SynopticMap", "read_map", "read_planes", "count_planes", "write_map", "map_header", "parse_header_time", "quiet_time_warnings", "GRIDS", "LOS_MAX_FACTOR", "PLAUSIBLE_MAX_G"]

GRIDS = ("sine-latitude", "equal-angle")


class SynopticMap:
    """One Carrington-rotation synoptic map of the radial field.

    Attributes
    ----------
    br : ndarray, shape (nlat, nlon)
        Radial field in Gauss, float64, NaN where there is no data. Row 0 is the
        southernmost row, column 0 the smallest longitude.
    lat_edges, lon_edges : ndarray
        Cell edges in degrees, ascending; ``lat_edges`` runs from -90 to +90.
    lat, lon : ndarray
        Pixel-centre latitude and longitude in degrees, as the file's header
        places them.
    carrington_rotation : int or None
    time : astropy.time.Time or None
        Time the map stands for (the header's observation time, else the middle
        of its Carrington rotation).
    instrument, grid, source : str
        ``grid`` is "sine-latitude" (equal-area rows) or "equal-angle".
    header : dict
        The header keywords the map was read from (upper-case keys).
    los_b0, los_b0_how : ndarray or None, str
        For a map read as line-of-sight field: each column's B0 angle (degrees)
        used to convert it to radial field, and where that B0 came from.
    plane : int or None
        Index of the map in its file's cube of realizations (:func:`read_planes`); None for a 2-D map.

    The constructor copies ``br`` (``copy=False`` hands the array over: do not
    change it afterwards except through ``m.br``).

    Notes
    -----
    A map read from a float32 file keeps its pixels as float32 until ``br`` is
    first used, which then converts them to float64 once; the measures work on
    the stored pixels directly (accumulating in float64), so measuring an
    archive never doubles its memory traffic.
    """

    def __init__(
        self,
        br: Any,
        lat_edges: Any,
        lon_edges: Any,
        carrington_rotation: int | None = None,
        time: Time | None = None,
        instrument: str = "",
        grid: str = "sine-latitude",
        source: str = "",
        lat: Any = None,
        lon: Any = None,
        header: dict | None = None,
        copy: bool = True,
    ) -> None:
        if isinstance(br, u.Quantity):
            br = br.to_value(u.G)
        values = np.asarray(br)
        if values.dtype not in (np.float32, np.float64) or not values.dtype.isnative:
            values = values.astype(np.float64)
        elif copy:
            # The map keeps sums of its pixels: it must own them.
            values = values.copy()
        self._values = values
        self._row_stats: RowStatistics | None = None
        self.lat_edges = np.asarray(lat_edges, dtype=np.float64)
        self.lon_edges = np.asarray(lon_edges, dtype=np.float64)
        self.carrington_rotation = carrington_rotation
        self.time = time
        self.instrument = instrument
        self.grid = grid
        self.source = source
        self.header = dict(header or {})
        self.los_b0: np.ndarray | None = None
        self.los_b0_how = ""
        self.plane: int | None = None
        name = self.source or "map"
        if values.ndim != 2:
            raise MapFormatError(f"{name}: br must be 2-D (lat, lon), got shape {values.shape}")
        nlat, nlon = values.shape
        if self.lat_edges.shape != (nlat + 1,) or self.lon_edges.shape != (nlon + 1,):
            raise MapFormatError(
                f"{name}: edges do not match data shape {values.shape}: "
                f"{self.lat_edges.size} latitude and {self.lon_edges.size} longitude edges"
            )
        if np.any(np.diff(self.lat_edges) <= 0) or np.any(np.diff(self.lon_edges) <= 0):
            raise MapFormatError(f"{name}: cell edges must be strictly ascending")
        if self.grid not in GRIDS:
            raise MapFormatError(f"{name}: unknown grid {self.grid!r}; expected one of {GRIDS}")
        self.lat = np.asarray(
            _centres_from_edges(self.lat_edges, self.grid) if lat is None else lat, dtype=np.float64
        )
        self.lon = np.asarray(
            0.5 * (self.lon_edges[:-1] + self.lon_edges[1:]) if lon is None else lon, dtype=np.float64
        )

    @property
    def br(self) -> np.ndarray:
        """Radial field, Gauss, float64 [lat, lon]; NaN where there is no data."""
        if self._values.dtype != np.float64:
            self._values = self._values.astype(np.float64)
        self._row_stats = None  # the caller may change the array in place
        return self._values

    @br.setter
    def br(self, value: Any) -> None:
        value = np.asarray(value, dtype=np.float64)
        if value.shape != self._values.shape:
            raise MapFormatError(f"{self.source or 'map'}: new br shape {value.shape} != {self._values.shape}")
        self._values = value
        self._row_stats = None

    @property
    def values(self) -> np.ndarray:
        """The stored pixels (float32 or float64) without conversion; do not modify."""
        return self._values

    def row_statistics(self) -> RowStatistics:
        """Per row: sum and sum of absolute values of the finite pixels, and their count."""
        if self._row_stats is None:
            self._row_stats = _row_statistics(self._values)
        return self._row_stats

    @property
    def shape(self) -> tuple[int, int]:
        return self._values.shape

    def __repr__(self) -> str:
        return (
            f"SynopticMap(shape={self.shape}, grid={self.grid!r}, "
            f"carrington_rotation={self.carrington_rotation}, time={None if self.time is None else self.time.isot}, "
            f"instrument={self.instrument!r}, source={self.source!r})"
        )

    @property
    def sin_lat_edges(self) -> np.ndarray:
        """Sine of the latitude edges, exactly -1 and +1 at the poles."""
        s = np.sin(np.deg2rad(self.lat_edges))
        s[0], s[-1] = -1.0, 1.0
        return s

    @classmethod
    def from_array(
        cls,
        br: Any,
        grid: str = "sine-latitude",
        carrington_rotation: int | None = None,
        time: Any = None,
        instrument: str = "",
        source: str = "",
        lon_start: float = 0.0,
    ) -> SynopticMap:
        """Wrap a full-surface array (row 0 southernmost) as a synoptic map.

        Parameters
        ----------
        br : array-like, shape (nlat, nlon)
            Radial field in Gauss (or a Quantity convertible to Gauss).
        grid : {"sine-latitude", "equal-angle"}
            "sine-latitude": rows equally spaced in sin(latitude) from -1 to 1;
            "equal-angle": rows equally spaced in latitude from -90 to 90 degrees.
        carrington_rotation, time, instrument, source
            Metadata; ``time`` is anything :class:`astropy.time.Time` accepts.
        lon_start : float
            Longitude of the first column's western edge, degrees.
        """
        if isinstance(br, u.Quantity):
            br = br.to_value(u.G)
        br = np.array(br, dtype=np.float64)
        if br.ndim != 2:
            raise MapFormatError(f"{source or 'array'}: expected a 2-D array, got shape {br.shape}")
        nlat, nlon = br.shape
        if grid == "sine-latitude":
            s = np.linspace(-1.0, 1.0, nlat + 1)
            lat_edges = np.rad2deg(np.arcsin(s))
        elif grid == "equal-angle":
            lat_edges = np.linspace(-90.0, 90.0, nlat + 1)
        else:
            raise MapFormatError(f"{source or 'array'}: unknown grid {grid!r}; expected one of {GRIDS}")
        lon_edges = lon_start + np.linspace(0.0, 360.0, nlon + 1)
        if time is not None and not isinstance(time, Time):
            with quiet_time_warnings():
                time = Time(time, scale="utc")
        return cls(br, lat_edges, lon_edges, carrington_rotation, time, instrument, grid, source, copy=False)


def _centres_from_edges(lat_edges: np.ndarray, grid: str) -> np.ndarray:
    if grid == "sine-latitude":
        s = np.sin(np.deg2rad(lat_edges))
        return np.rad2deg(np.arcsin(0.5 * (s[:-1] + s[1:])))
    return 0.5 * (lat_edges[:-1] + lat_edges[1:])


# --------------------------------------------------------------------------- reading


def read_map(
    path: Any,
    field: str = "auto",
    plane: int | None = None,
    los_max_factor: float = LOS_MAX_FACTOR,
) -> SynopticMap:
    """Read one synoptic map.

    Parameters
    ----------
    path : str, os.PathLike or sunpy.map.GenericMap
        A FITS file (plain, gzip-compressed or tile-compressed; the first image
        HDU holding 2-D or more data is used), or a sunpy map whose ``meta``
        follows the same header conventions.
    field : {"radial", "los", "auto"}
        "radial": radial field. "los": line-of-sight field, converted to radial by
        dividing by cos(latitude - B0) (see :mod:`polarflux.los`), the factor capped
        at ``los_max_factor``. "auto" (the default, as for the measure command):
        "los" where the header's MAPFIELD says line of sight, else "radial".
    plane : int, optional
        For a cube (3-D or more: a stack of realizations), the index of the map
        to read, counted over the planes in file order (the slowest FITS axis
        first). A cube of more than one map is refused without it; see
        :func:`read_planes` to read them all.
    los_max_factor : float
        Cap of the 1/cos(latitude - B0) factor for ``field="los"``.

    Returns
    -------
    SynopticMap
        ``plane`` is set for a map read from a cube, None otherwise.

    Raises
    ------
    MapFormatError
        Naming the file, when it is not FITS, empty, truncated, damaged (its
        CHECKSUM/DATASUM do not match), has no 2-D image, an unknown
        projection, a latitude axis not spanning the sphere, a longitude axis
        not spanning 360 degrees, only missing values, or an unknown unit; or
        when it is a cube and no valid ``plane`` was named.

    Notes
    -----
    A plain or gzip file is read once, in blocks of rows (never memory-mapped),
    the row sums the measures need taken as the blocks arrive; ``DATASUM`` and
    ``CHECKSUM``, where present, are verified on the same bytes.
    """
    _check_field(field, path)
    if hasattr(path, "meta") and hasattr(path, "data"):
        header = {str(k).upper(): v for k, v in dict(path.meta).items()}
        source = str(header.get("FILENAME", "") or "sunpy map")
        return _assemble(parts_from_array(header, np.asarray(path.data), plane, source, field, los_max_factor))
    with ImageFile(os.fspath(path)) as image:
        index = plane_index(image.shape, plane, image.source)
        return _assemble(image.read(index, field, los_max_factor, verify=True))


def read_planes(path: Any, field: str = "auto", los_max_factor: float = LOS_MAX_FACTOR) -> Iterator[SynopticMap]:
    """Read every map of a cube (a stack of realizations), each once, in file order.

    Parameters
    ----------
    path : str or os.PathLike
        A FITS file, as for :func:`read_map`. A 2-D map yields itself once.
    field : {"radial", "los", "auto"}
        As for :func:`read_map`.
    los_max_factor : float
        As for :func:`read_map`.

    Yields
    ------
    SynopticMap
        One per plane, ``plane`` its index (0, 1, ...; None for a 2-D file).
        Every plane carries the cube's time, Carrington rotation and instrument
        from the header (a cube's realizations stand for the same rotation).

    Raises
    ------
    MapFormatError
        As :func:`read_map`, when the first map is asked for (the file is opened
        then). Where the header has ``DATASUM`` or ``CHECKSUM``, they are
        verified over all planes before the first map is yielded, so a damaged
        cube yields nothing.

    """
    _check_field(field, path)
    with ImageFile(os.fspath(path)) as image:
        image.verify_all()
        for index in range(image.nplanes) if len(image.shape) > 2 else (None,):
            yield _assemble(image.read(index, field, los_max_factor, verify=False))


def count_planes(path: Any) -> int:
    """Number of maps in a FITS file: the planes of a cube, 1 for a 2-D map.

    Only the headers are read, so this is cheap on a large cube.

    Raises
    ------
    MapFormatError
        Naming the file, when it is not FITS, has no 2-D image, or is cut short
        inside a header.
    """
    with ImageFile(os.fspath(path), pixels=False) as image:
        return image.nplanes


def _check_field(field: str, path: Any) -> None:
    if field not in FIELDS:
        raise MapFormatError(f"{path}: unknown field {field!r}; expected one of {', '.join(FIELDS)}")


def _assemble(parts: MapParts) -> SynopticMap:
    """The map of what the reader found (its pixels handed over, not copied)."""
    lat_axis, lon_axis = parts.lat_axis, parts.lon_axis  # shared by the maps of a grid: each gets copies
    m = SynopticMap(
        br=parts.values,
        lat_edges=lat_axis.edges.copy(),
        lon_edges=lon_axis.edges.copy(),
        carrington_rotation=parts.rotation,
        time=parts.time,
        instrument=parts.instrument,
        grid=lat_axis.grid,
        source=parts.source,
        lat=lat_axis.centres.copy(),
        lon=lon_axis.centres.copy(),
        header=parts.header,
        copy=False,
    )
    m._row_stats = parts.stats
    m.los_b0, m.los_b0_how, m.plane = parts.los_b0, parts.los_b0_how, parts.plane
    return m


# --------------------------------------------------------------------------- writing


def map_header(m: SynopticMap) -> dict:
    """FITS WCS header keywords (Thompson 2006) describing ``m``'s grid and metadata.

    Sine-latitude grids are written as ``CRLN-CEA`` / ``CRLT-CEA`` with the
    latitude axis in degrees and ``PV2_1 = 1``; equal-angle grids as
    ``CRLN-CAR`` / ``CRLT-CAR``. Both need a regular grid over the whole sphere.
    """
    nlat, nlon = m.br.shape
    dlon = np.diff(m.lon_edges)
    if not np.allclose(dlon, 360.0 / nlon, rtol=0, atol=1e-9 * 360):
        raise MapFormatError(f"{m.source or 'map'}: longitude grid must be regular over 360 degrees to write")
    header = {
        "WCSNAME": "Carrington heliographic",
        "CTYPE1": "CRLN-CEA" if m.grid == "sine-latitude" else "CRLN-CAR",
        "CTYPE2": "CRLT-CEA" if m.grid == "sine-latitude" else "CRLT-CAR",
        "CUNIT1": "deg",
        "CUNIT2": "deg",
        "CRPIX1": (nlon + 1) / 2.0,
        "CRVAL1": float(m.lon_edges[0] + 180.0),
        "CDELT1": 360.0 / nlon,
        "CRPIX2": (nlat + 1) / 2.0,
        "CRVAL2": 0.0,
        "CDELT2": (360.0 / np.pi) / nlat if m.grid == "sine-latitude" else 180.0 / nlat,
        "BUNIT": "G",
    }
    if m.grid == "sine-latitude":
        header["PV2_1"] = 1.0
    if m.carrington_rotation is not None:
        header["CAR_ROT"] = int(m.carrington_rotation)
    if m.time is not None:
        with quiet_time_warnings():
            header["DATE-OBS"] = m.time.utc.isot
    if m.instrument:
        header["INSTRUME"] = m.instrument
    return header


def write_map(
    m: SynopticMap,
    path: str | os.PathLike,
    force: bool = False,
    dtype: Any = np.float32,
    extra: Mapping | None = None,
    compress: bool = False,
) -> str:
    """Write ``m`` as a FITS file that :func:`read_map` and ``sunpy.map.Map`` read back.

    Parameters
    ----------
    m : SynopticMap
    path : path
        Output file; written atomically, never overwritten unless ``force``.
    dtype : numpy dtype
        Data type on disk (float32 by default, as archives store maps).
    extra : mapping, optional
        More header keywords (for example ``TELESCOP``, ``OBSERVER``).
    compress : bool
        Write a tile-compressed image in the first extension (empty primary HDU).
    """
    from astropy.io import fits

    from ._io import atomic_path

    header = fits.Header()
    for key, value in {**map_header(m), **dict(extra or {})}.items():
        header[key] = value
    data = np.asarray(m.br, dtype=dtype)
    with atomic_path(path, force=force) as tmp:
        if compress:
            hdul = fits.HDUList([fits.PrimaryHDU(), fits.CompImageHDU(data=data, header=header)])
        else:
            hdul = fits.HDUList([fits.PrimaryHDU(data=data, header=header)])
        hdul.writeto(tmp, overwrite=True)
    return os.fspath(path)
