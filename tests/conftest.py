"""Shared helpers: maps of known fields on both grid kinds, and FITS files built from headers."""

from __future__ import annotations

import numpy as np
import pytest
from astropy.io import fits

import polarflux as pf


def cell_mean_sine(m: pf.SynopticMap) -> np.ndarray:
    """Cell-area average of sin(latitude) per row: (sin a + sin b) / 2 on any grid."""
    s = m.sin_lat_edges
    return 0.5 * (s[:-1] + s[1:])


def field_map(values_per_row, nlon: int, grid: str) -> pf.SynopticMap:
    values_per_row = np.asarray(values_per_row, dtype=float)
    return pf.SynopticMap.from_array(np.repeat(values_per_row[:, None], nlon, axis=1), grid=grid)


def blank_map(nlat: int, nlon: int, grid: str) -> pf.SynopticMap:
    return pf.SynopticMap.from_array(np.zeros((nlat, nlon)), grid=grid)


def write_fits(path, data, header: dict | fits.Header, compress: bool = False) -> str:
    hdr = fits.Header(header) if not isinstance(header, fits.Header) else header.copy()
    for key in ("CHECKSUM", "DATASUM", "NAXIS", "NAXIS1", "NAXIS2", "NAXIS3", "BITPIX", "SIMPLE", "EXTEND"):
        hdr.remove(key, ignore_missing=True, remove_all=True)
    if compress:
        hdul = fits.HDUList([fits.PrimaryHDU(), fits.CompImageHDU(data=data, header=hdr)])
    else:
        hdul = fits.HDUList([fits.PrimaryHDU(data=data, header=hdr)])
    hdul.writeto(path, overwrite=True)
    return str(path)


def cea_header(nlat: int = 180, nlon: int = 360, **extra) -> dict:
    """A plain sine-latitude CEA header (latitude step in sine latitude, as many archives write)."""
    header = {
        "CTYPE1": "CRLN-CEA", "CTYPE2": "CRLT-CEA",
        "CUNIT1": "deg", "CUNIT2": "Sine Latitude",
        "CRPIX1": (nlon + 1) / 2, "CRVAL1": 180.0, "CDELT1": 360.0 / nlon,
        "CRPIX2": (nlat + 1) / 2, "CRVAL2": 0.0, "CDELT2": 2.0 / nlat,
        "BUNIT": "G", "CAR_ROT": 2400, "DATE-OBS": "2040-05-01T00:00:00",
    }
    header.update(extra)
    return header


@pytest.fixture
def index_data():
    """Data whose values encode their own FITS (row, column): value = (column + 1000 * row) / 10.

    Divided by ten so that maps of up to 360 rows stay below the plausibility limit (1e5 G).
    """

    def make(nlat: int, nlon: int) -> np.ndarray:
        j, i = np.mgrid[0:nlat, 0:nlon]
        return ((i + 1000.0 * j) / 10.0).astype(np.float32)

    return make


def decode_index(values):
    """(row, column) of the file pixel each value came from (see ``index_data``)."""
    code = np.rint(np.asarray(values, dtype=np.float64) * 10.0).astype(np.int64)
    return code // 1000, code % 1000


@pytest.fixture(scope="session")
def tiny_scenario(tmp_path_factory):
    """A half-year of the invented scenario at low resolution: six maps of one instrument."""
    from polarflux.synthetic import settings_for, write_scenario

    folder = tmp_path_factory.mktemp("tiny_scenario")
    settings = settings_for("low", cycles=1, duration_years=0.5, seed=7, missing_rotations=1)
    truth = write_scenario(folder, settings)
    return folder, truth


@pytest.fixture(scope="session")
def three_cycles(tmp_path_factory):
    """Three cycles of the invented scenario at low resolution, with both instruments (overlap 22-26 yr)."""
    from polarflux.synthetic import settings_for, write_scenario

    folder = tmp_path_factory.mktemp("three_cycles")
    truth = write_scenario(folder, settings_for("low", cycles=3, seed=11))
    return folder, truth


@pytest.fixture(scope="session")
def hindcast_scenario(tmp_path_factory):
    """Five cycles of the invented scenario at low resolution, measured: folder, truth, record, sunspots."""
    from polarflux.synthetic import settings_for, write_scenario

    folder = tmp_path_factory.mktemp("hindcast")
    truth = write_scenario(folder, settings_for("low", cycles=5, seed=31))
    record = pf.measure_archive([folder / "maps"])
    t, v = pf.read_sunspots(folder / "sunspots.csv")
    return folder, truth, record, t, v


@pytest.fixture(autouse=True)
def _private_cache(tmp_path_factory, monkeypatch):
    """Every test gets its own cache folder, so the default measurement ledger is never shared."""
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path_factory.mktemp("cache")))


def band_flux_reference(br, lat_edges, lon_edges, low_deg: float, high_deg: float) -> float:
    """Signed flux (Mx) of ``br`` (G, rows south to north) between two northern latitudes, computed here.

    Exact cell areas written out (a cell between latitudes a < b and longitudes p < q has area
    R^2 (q - p)(sin b - sin a); the part of a row inside [low, high] is its overlap in sin(latitude)),
    with R the IAU 2015 nominal solar radius from astropy.constants (a reference library), so that
    no function of the package under test enters the reference.
    """
    from astropy import constants

    radius_cm = constants.R_sun.to_value("cm")
    a, b = np.deg2rad(np.asarray(lat_edges[:-1], float)), np.deg2rad(np.asarray(lat_edges[1:], float))
    lo = np.maximum(a, np.deg2rad(low_deg))
    hi = np.minimum(b, np.deg2rad(high_deg))
    weight = np.where(hi > lo, np.sin(hi) - np.sin(lo), 0.0)
    dlon = np.deg2rad(np.diff(np.asarray(lon_edges, float)))
    return float(radius_cm**2 * np.sum(weight * (np.asarray(br, float) @ dlon)))
