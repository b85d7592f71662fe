"""Reading synoptic maps: header conventions, orientation, units, and refusals."""

from __future__ import annotations

import datetime
import os
import warnings

import numpy as np
import pytest
from astropy import units as u
from astropy.io import fits
from conftest import cea_header, decode_index, write_fits

import polarflux as pf
from polarflux.maps import write_map

SUNPY_TEST_DATA = None


def sunpy_test_header(name: str) -> fits.Header:
    import sunpy.data.test

    return fits.Header.fromtextfile(os.path.join(os.path.dirname(sunpy.data.test.__file__), name))


def sunpy_pixel_coordinates(path, nlat, nlon):
    """Pixel-centre Carrington longitude and latitude of every column and row, from sunpy.map."""
    import sunpy.map

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sm = sunpy.map.Map(path)
        lon = sm.pixel_to_world(np.arange(nlon) * u.pix, np.zeros(nlon) * u.pix).lon.to_value(u.deg)
        lat = sm.pixel_to_world(np.zeros(nlat) * u.pix, np.arange(nlat) * u.pix).lat.to_value(u.deg)
    return np.mod(lon, 360.0), lat, sm


def check_against_sunpy(path, data, nlat, nlon):
    """Every pixel of read_map's map sits at the coordinates sunpy gives its file pixel."""
    m = pf.read_map(path)
    lon, lat, sm = sunpy_pixel_coordinates(path, nlat, nlon)
    row, col = decode_index(m.br)
    assert np.all(np.diff(m.lat) > 0) and np.all(np.diff(m.lon) > 0)
    assert np.max(np.abs(m.lat[:, None] - lat[row])) < 1e-6
    dlon = (m.lon[None, :] - lon[col] + 180.0) % 360.0 - 180.0
    assert np.max(np.abs(dlon)) < 1e-6
    return m, sm


# Source of these checks: the real instruments' synoptic-map headers that sunpy
# ships in sunpy/data/test/, read by sunpy.map.Map (which applies the FITS WCS
# CEA convention of Thompson 2006, A&A 449, 791) for the same file.
@pytest.mark.parametrize("name", ["hmi_synoptic.header", "gong_synoptic.header"])
def test_real_headers_place_pixels_as_sunpy_does(tmp_path, index_data, name):
    from sunpy.coordinates.sun import carrington_rotation_number

    header = sunpy_test_header(name)
    nlat, nlon = header["NAXIS2"], header["NAXIS1"]
    data = index_data(nlat, nlon)
    path = write_fits(tmp_path / f"{name}.fits", data, header)
    m, sm = check_against_sunpy(path, data, nlat, nlon)
    assert m.grid == "sine-latitude"
    assert m.lat_edges[0] == -90 and m.lat_edges[-1] == 90
    number = float(carrington_rotation_number(m.time))
    assert abs(number - m.carrington_rotation) <= 1.0
    assert m.carrington_rotation == header.get("CAR_ROT")


def test_mdi_header_as_shipped_is_refused_and_its_consistent_form_reads(tmp_path, index_data):
    # The shipped MDI header keeps the 1/144 sine-latitude step of a larger map but
    # says 360 rows: 360 x 0.006944 = 2.5, which spans more than the sphere.
    header = sunpy_test_header("mdi_synoptic.header")
    data = index_data(header["NAXIS2"], header["NAXIS1"])
    bad = write_fits(tmp_path / "mdi_as_shipped.fits", data, header)
    with pytest.raises(pf.MapFormatError, match="mdi_as_shipped.fits.*does not span the sphere"):
        pf.read_map(bad)
    nlat = 288  # 2 / (1/144)
    header["CRPIX2"] = (nlat + 1) / 2
    data = index_data(nlat, header["NAXIS1"])
    good = write_fits(tmp_path / "mdi_consistent.fits", data, header)
    m, _ = check_against_sunpy(good, data, nlat, header["NAXIS1"])
    assert m.carrington_rotation == 2099
    assert m.time.utc.isot.startswith("2010-07-27T00:08")  # T_OBS is TAI; UTC is 34 s earlier


def test_hmi_carrington_time_axis_reduces_to_longitude(tmp_path, index_data):
    # CRVAL1 = 795420 is Carrington time 360 x 2210 - 180: the central meridian of
    # the map is longitude 180, and longitude grows as the axis value falls.
    header = sunpy_test_header("hmi_synoptic.header")
    header.remove("CAR_ROT")
    data = index_data(header["NAXIS2"], header["NAXIS1"])
    path = write_fits(tmp_path / "hmi_no_rot.fits", data, header)
    m = pf.read_map(path)
    assert m.carrington_rotation == 2210
    # file column 0 holds Carrington time 795599.7, i.e. longitude 0.3
    first = int(decode_index(m.br[0, 0])[1])
    assert first == 0 and m.lon[0] == pytest.approx(0.3, abs=1e-9)


def test_sunpy_genericmap_is_accepted(tmp_path, index_data):
    import sunpy.map

    header = sunpy_test_header("gong_synoptic.header")
    data = index_data(180, 360)
    path = write_fits(tmp_path / "gong.fits", data, header)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sm = sunpy.map.Map(path)
    a = pf.read_map(path)
    b = pf.read_map(sm)
    np.testing.assert_array_equal(a.br, b.br)
    np.testing.assert_allclose(a.lat, b.lat)


# --------------------------------------------------------------------------- conventions


def test_sine_units_and_degree_units_give_the_same_map(tmp_path):
    rng = np.random.default_rng(0)
    data = rng.normal(0, 5, (180, 360)).astype(np.float32)
    sine = write_fits(tmp_path / "sine.fits", data, cea_header())
    no_unit = dict(cea_header())
    del no_unit["CUNIT2"]
    bare = write_fits(tmp_path / "bare.fits", data, no_unit)
    deg = dict(cea_header(CUNIT2="deg", CDELT2=(360 / np.pi) / 180, PV2_1=1.0))
    degrees = write_fits(tmp_path / "deg.fits", data, deg)
    lam = dict(cea_header(CUNIT2="deg", CDELT2=(360 / (np.pi * 0.5)) / 180, PV2_1=0.5))
    lam_path = write_fits(tmp_path / "lam.fits", data, lam)
    maps = [pf.read_map(p) for p in (sine, bare, degrees, lam_path)]
    for m in maps[1:]:
        np.testing.assert_array_equal(m.br, maps[0].br)
        np.testing.assert_allclose(m.lat, maps[0].lat, atol=1e-9)
        np.testing.assert_allclose(m.lat_edges, maps[0].lat_edges, atol=1e-9)
        assert m.grid == "sine-latitude"


def test_flipped_axes_and_shifted_longitudes_read_the_same(tmp_path):
    rng = np.random.default_rng(3)
    data = rng.normal(0, 5, (180, 360)).astype(np.float32)
    ref = pf.read_map(write_fits(tmp_path / "ref.fits", data, cea_header(CRPIX1=0.5, CRVAL1=0.0)))
    # Latitude axis written north-first, longitude axis written east-to-west.
    flipped = data[::-1, ::-1]
    hdr = cea_header(CRPIX1=0.5, CRVAL1=360.0, CDELT1=-1.0, CRPIX2=0.5, CRVAL2=1.0, CDELT2=-2 / 180)
    m = pf.read_map(write_fits(tmp_path / "flip.fits", flipped, hdr))
    np.testing.assert_array_equal(m.br, ref.br)
    np.testing.assert_allclose(m.lat, ref.lat, atol=1e-9)
    np.testing.assert_allclose(m.lon, ref.lon, atol=1e-9)
    # A map starting at longitude 100 is rolled so that columns ascend from the smallest longitude.
    rolled = np.roll(data, -100, axis=1)
    m2 = pf.read_map(write_fits(tmp_path / "roll.fits", rolled, cea_header(CRPIX1=0.5, CRVAL1=100.0)))
    np.testing.assert_array_equal(m2.br, ref.br)
    np.testing.assert_allclose(m2.lon_edges, ref.lon_edges, atol=1e-9)


def test_duplicated_last_meridian_is_dropped(tmp_path):
    data = np.tile(np.arange(361, dtype=np.float32) % 360, (180, 1))
    hdr = cea_header(nlon=360, CRPIX1=1.0, CRVAL1=0.0, CDELT1=1.0)
    m = pf.read_map(write_fits(tmp_path / "wrap.fits", data, hdr))
    assert m.br.shape == (180, 360)
    assert m.lon[0] == 0.0 and m.lon[-1] == 359.0


@pytest.mark.parametrize("ctypes", [("CRLN-CAR", "CRLT-CAR"), ("Long", "Lat")])
def test_equal_angle_maps(tmp_path, ctypes):
    data = np.zeros((180, 360), dtype=np.float32)
    data[:, :] = np.arange(180)[:, None]
    hdr = {"CTYPE1": ctypes[0], "CTYPE2": ctypes[1], "CUNIT1": "deg", "CUNIT2": "deg",
           "CRPIX1": 180.5, "CRVAL1": 180.0, "CDELT1": 1.0, "CRPIX2": 90.5, "CRVAL2": 0.0,
           "CDELT2": 1.0, "BUNIT": "Gauss", "CARROT": 2300}
    m = pf.read_map(write_fits(tmp_path / "car.fits", data, hdr))
    assert m.grid == "equal-angle"
    np.testing.assert_allclose(m.lat_edges, np.linspace(-90, 90, 181))
    np.testing.assert_allclose(m.lat, np.arange(-89.5, 90))
    assert m.carrington_rotation == 2300
    assert m.time is not None  # derived from the rotation


@pytest.mark.parametrize(
    "bunit,factor",
    [("G", 1.0), ("Gauss", 1.0), ("Mx/cm^2", 1.0), ("Mx cm-2", 1.0), ("T", 1e4), ("nT", 1e-5)],
)
def test_units(tmp_path, bunit, factor):
    data = np.full((90, 180), 2.0, dtype=np.float32)
    m = pf.read_map(write_fits(tmp_path / "u.fits", data, cea_header(90, 180, BUNIT=bunit)))
    np.testing.assert_allclose(m.br, 2.0 * factor, rtol=1e-7)


def test_missing_bunit_warns_and_reads_gauss(tmp_path):
    hdr = cea_header(90, 180)
    del hdr["BUNIT"]
    path = write_fits(tmp_path / "nounit.fits", np.ones((90, 180), np.float32), hdr)
    with pytest.warns(UserWarning, match="no BUNIT"):
        m = pf.read_map(path)
    assert np.all(m.br == 1.0)


def test_integer_data_with_blank_and_scaling(tmp_path):
    raw = np.full((90, 180), 100, dtype=np.int16)
    raw[0, :] = -32768
    hdu = fits.PrimaryHDU(raw)
    for k, v in cea_header(90, 180).items():
        hdu.header[k] = v
    hdu.header["BSCALE"] = 0.5
    hdu.header["BZERO"] = 10.0
    hdu.header["BLANK"] = -32768
    path = tmp_path / "int.fits"
    hdu.writeto(path)
    m = pf.read_map(path)
    assert m.br.dtype == np.float64
    assert np.all(np.isnan(m.br[0])) and np.all(m.br[1:] == 60.0)


def test_nonfinite_values_become_nan(tmp_path):
    data = np.ones((90, 180), np.float32)
    data[5, 5], data[6, 6], data[7, 7] = np.inf, -np.inf, np.nan
    m = pf.read_map(write_fits(tmp_path / "inf.fits", data, cea_header(90, 180)))
    assert np.isnan(m.br).sum() == 3


def test_tile_compressed_map_in_first_extension(tmp_path):
    rng = np.random.default_rng(5)
    data = rng.normal(0, 5, (180, 360)).astype(np.float32)
    plain = pf.read_map(write_fits(tmp_path / "plain.fits", data, cea_header()))
    packed = pf.read_map(write_fits(tmp_path / "packed.fits.fz", data, cea_header(), compress=True))
    assert packed.grid == "sine-latitude"
    # Float tile compression quantises; the reader must return what astropy decodes.
    decoded = fits.getdata(tmp_path / "packed.fits.fz", ext=1).astype(np.float64)
    np.testing.assert_array_equal(packed.br, decoded)
    assert np.max(np.abs(packed.br - plain.br)) < 1.0


def test_cube_needs_a_plane(tmp_path):
    cube = np.stack([np.full((90, 180), k, np.float32) for k in range(3)])
    path = write_fits(tmp_path / "cube.fits", cube, cea_header(90, 180))
    # one message for both users: the command line's options and the Python argument
    with pytest.raises(pf.MapFormatError, match=r"cube.fits: a cube of 3 maps \(realizations\); measure one with "
                       r"--plane N \(plane=N in Python\) or all with --planes all"):
        pf.read_map(path)
    assert np.all(pf.read_map(path, plane=2).br == 2.0)
    assert pf.read_map(path, plane=2).plane == 2


def test_los_field_is_divided_by_cos_latitude_minus_b0_with_a_cap(tmp_path):
    # B0COL0 = 0: every column seen from the solar equator, so the divisor is cos(latitude)
    data = np.ones((180, 360), np.float32)
    path = write_fits(tmp_path / "los.fits", data, cea_header(B0COL0=0.0))
    radial = pf.read_map(path, field="los")
    # the divisor: cos(latitude) averaged over each row's area, here by scipy's quadrature
    from scipy.integrate import quad

    mean_cos = np.array([quad(lambda p: np.cos(p) ** 2, a, b)[0] / (np.sin(b) - np.sin(a))
                         for a, b in np.deg2rad(np.c_[radial.lat_edges[:-1], radial.lat_edges[1:]])])
    expected = 1.0 / np.maximum(mean_cos, 1 / pf.maps.LOS_MAX_FACTOR)
    # rows reaching past 60 degrees take a divisor weighted by the cap's shape (tests/test_los.py)
    plain = np.maximum(np.abs(radial.lat_edges[:-1]), np.abs(radial.lat_edges[1:])) <= 60.0
    np.testing.assert_allclose(radial.br[plain, 0], expected[plain], rtol=1e-9)
    assert radial.br.max() <= pf.maps.LOS_MAX_FACTOR
    assert "B0COLk" in radial.los_b0_how
    # On a 1-degree equal-angle grid the last rows (89.5 degrees) reach the cap.
    hdr = {"CTYPE1": "CRLN-CAR", "CTYPE2": "CRLT-CAR", "CRPIX1": 0.5, "CRVAL1": 0, "CDELT1": 1,
           "CRPIX2": 90.5, "CRVAL2": 0, "CDELT2": 1, "BUNIT": "G", "B0COL0": 0.0}
    car = pf.read_map(write_fits(tmp_path / "los_car.fits", np.ones((180, 360), np.float32), hdr), field="los")
    assert car.br.max() == pytest.approx(pf.maps.LOS_MAX_FACTOR, rel=1e-12)
    mean_cos = quad(lambda p: np.cos(p) ** 2, 0.0, np.deg2rad(1.0))[0] / np.sin(np.deg2rad(1.0))
    assert car.br[90, 0] == pytest.approx(1 / mean_cos, rel=1e-9)


def test_time_from_drms_style_tai_and_date_obs(tmp_path):
    a = pf.read_map(write_fits(tmp_path / "a.fits", np.ones((90, 180), np.float32),
                               cea_header(90, 180, **{"DATE-OBS": "", "T_OBS": "2040.05.01_00:00:37_TAI"})))
    b = pf.read_map(write_fits(tmp_path / "b.fits", np.ones((90, 180), np.float32),
                               cea_header(90, 180, **{"DATE-OBS": "2040-05-01", "TIME-OBS": "06:30"})))
    assert abs((a.time - pf.read_map(write_fits(tmp_path / "c.fits", np.ones((90, 180), np.float32),
                                                cea_header(90, 180))).time).sec) < 1e-3
    assert b.time.isot == "2040-05-01T06:30:00.000"


def test_write_map_round_trip_both_grids(tmp_path):
    rng = np.random.default_rng(9)
    for grid in ("sine-latitude", "equal-angle"):
        m = pf.SynopticMap.from_array(rng.normal(0, 3, (60, 120)), grid=grid, carrington_rotation=2450,
                                      time="2042-03-04T05:06:07", instrument="test imager")
        path = write_map(m, tmp_path / f"{grid}.fits", dtype=np.float64)
        r = pf.read_map(path)
        np.testing.assert_array_equal(r.br, m.br)
        np.testing.assert_allclose(r.lat_edges, m.lat_edges, atol=1e-9)
        np.testing.assert_allclose(r.lon_edges, m.lon_edges, atol=1e-9)
        assert (r.grid, r.carrington_rotation, r.instrument) == (grid, 2450, "test imager")
        assert r.time.isot == "2042-03-04T05:06:07.000"
        with pytest.raises(pf.OutputExistsError):
            write_map(m, path)


# --------------------------------------------------------------------------- refusals


def _good_file(tmp_path, name="good.fits"):
    return write_fits(tmp_path / name, np.ones((90, 180), np.float32), cea_header(90, 180))


def test_refuses_text_file(tmp_path):
    path = tmp_path / "notes.fits"
    path.write_text("this is not a FITS file\n" * 200)
    with pytest.raises(pf.MapFormatError, match="notes.fits: not a readable FITS file"):
        pf.read_map(path)


def test_refuses_empty_file(tmp_path):
    path = tmp_path / "empty.fits"
    path.write_bytes(b"")
    with pytest.raises(pf.MapFormatError, match="empty.fits: empty file"):
        pf.read_map(path)


@pytest.mark.parametrize("keep", [1000, 2880 + 5000])
def test_refuses_truncated_file(tmp_path, keep):
    good = _good_file(tmp_path)
    raw = open(good, "rb").read()
    path = tmp_path / f"cut{keep}.fits"
    path.write_bytes(raw[:keep])
    with pytest.raises(pf.MapFormatError, match=f"cut{keep}.fits: not a readable FITS file"):
        pf.read_map(path)


def test_refuses_missing_file(tmp_path):
    with pytest.raises(pf.MapFormatError, match="nowhere.fits: cannot open"):
        pf.read_map(tmp_path / "nowhere.fits")


def test_refuses_file_without_2d_image(tmp_path):
    one_d = write_fits(tmp_path / "line.fits", np.ones(360, np.float32), {"BUNIT": "G"})
    with pytest.raises(pf.MapFormatError, match="line.fits: no 2-D image"):
        pf.read_map(one_d)
    table = tmp_path / "table.fits"
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(
        [fits.Column(name="x", format="E", array=np.ones(3))])]).writeto(table)
    with pytest.raises(pf.MapFormatError, match="table.fits: no 2-D image"):
        pf.read_map(table)


@pytest.mark.parametrize("ctype", [("HPLN-TAN", "HPLT-TAN"), ("CRLN-AIT", "CRLT-AIT"), ("RA---CEA", "DEC--CEA")])
def test_refuses_unknown_projection(tmp_path, ctype):
    path = write_fits(tmp_path / "proj.fits", np.ones((90, 180), np.float32),
                      cea_header(90, 180, CTYPE1=ctype[0], CTYPE2=ctype[1]))
    with pytest.raises(pf.MapFormatError, match="proj.fits: unknown (longitude|latitude) axis type"):
        pf.read_map(path)


def test_refuses_latitude_axis_not_spanning_the_sphere(tmp_path):
    # 90 rows of 1/90 in sine latitude: only the northern hemisphere
    path = write_fits(tmp_path / "half.fits", np.ones((90, 180), np.float32),
                      cea_header(90, 180, CDELT2=1 / 90, CRPIX2=0.5, CRVAL2=0.0))
    with pytest.raises(pf.MapFormatError, match="half.fits: latitude axis does not span the sphere"):
        pf.read_map(path)
    car = write_fits(tmp_path / "band.fits", np.ones((120, 360), np.float32),
                     {"CTYPE1": "CRLN-CAR", "CTYPE2": "CRLT-CAR", "CRPIX1": 0.5, "CRVAL1": 0, "CDELT1": 1,
                      "CRPIX2": 60.5, "CRVAL2": 0, "CDELT2": 1, "BUNIT": "G"})
    with pytest.raises(pf.MapFormatError, match="band.fits: latitude axis does not span the sphere"):
        pf.read_map(car)


def test_refuses_longitude_axis_not_spanning_360(tmp_path):
    path = write_fits(tmp_path / "narrow.fits", np.ones((180, 300), np.float32), cea_header(180, 360))
    with pytest.raises(pf.MapFormatError, match="narrow.fits: longitude axis does not span 360"):
        pf.read_map(path)


def test_refuses_all_missing(tmp_path):
    path = write_fits(tmp_path / "nan.fits", np.full((90, 180), np.nan, np.float32), cea_header(90, 180))
    with pytest.raises(pf.MapFormatError, match="nan.fits: all values are missing"):
        pf.read_map(path)


def test_refuses_unknown_unit(tmp_path):
    for bunit in ("counts", "km/s", "furlongs"):
        path = write_fits(tmp_path / "unit.fits", np.ones((90, 180), np.float32), cea_header(90, 180, BUNIT=bunit))
        with pytest.raises(pf.MapFormatError, match=f"unit.fits: unknown unit BUNIT='{bunit}'"):
            pf.read_map(path)


def test_refuses_directory(tmp_path):
    folder = tmp_path / "looks_like.fits"
    folder.mkdir()
    with pytest.raises(pf.MapFormatError, match="looks_like.fits: is a directory"):
        pf.read_map(folder)


def test_error_is_a_polarflux_error():
    assert issubclass(pf.MapFormatError, pf.PolarfluxError)


def test_maps_kept_alive_hold_no_file_handles(tmp_path):
    # Archives hold thousands of files: each map's pixels are copied out and its file closed.
    path = write_map(pf.SynopticMap.from_array(np.ones((90, 180))), tmp_path / "one.fits")
    fd_dir = "/proc/self/fd"
    if not os.path.isdir(fd_dir):
        pytest.skip("needs /proc to count open files")
    before = len(os.listdir(fd_dir))
    kept = [pf.read_map(path) for _ in range(200)]
    assert len(os.listdir(fd_dir)) <= before + 1
    assert kept[0].values.flags.owndata  # a copy, not a view into a file buffer


@pytest.mark.parametrize("compress", [False, True])
def test_checksums_are_verified_when_present(tmp_path, compress):
    """FITS standard 4.0, appendix J (CHECKSUM/DATASUM): a file whose bytes changed after writing is refused."""
    from astropy.io import fits
    from conftest import cea_header

    data = np.full((36, 72), 3.0, dtype=np.float32)
    hdr = fits.Header(cea_header(36, 72))
    hdu = fits.CompImageHDU(data=data, header=hdr) if compress else fits.PrimaryHDU(data=data, header=hdr)
    hdul = fits.HDUList([fits.PrimaryHDU(), hdu] if compress else [hdu])
    good = tmp_path / "good.fits"
    hdul.writeto(good, checksum=True)
    assert b"CHECKSUM=" in good.read_bytes() and b"DATASUM =" in good.read_bytes()
    assert np.allclose(pf.read_map(good).br, 3.0)
    raw = bytearray(good.read_bytes())
    last_header = raw.rfind(b"END" + b" " * 77)
    data_start = (last_header // 2880 + 1) * 2880
    raw[data_start + 40] ^= 0x01  # one bit of the data: still a number
    bad = tmp_path / "bad.fits"
    bad.write_bytes(bytes(raw))
    with pytest.raises(pf.MapFormatError, match=r"bad.fits: .*(CHECKSUM/DATASUM|not a readable)"):
        pf.read_map(bad)


@pytest.mark.parametrize("keys,expected", [
    ({"DATE-AVG": "2040-05-14T12:00:00"}, "2040-05-14T12:00"),                          # FITS 4.0 sec. 9.4
    ({"DATE-BEG": "2040-05-01T00:00:00", "DATE-END": "2040-05-28T00:00:00"}, "2040-05-14T12:00"),
    # MJD 0 is 1858-11-17 00:00 (MJD = JD - 2400000.5, IAU definition), counted here with datetime
    ({"MJD-OBS": (datetime.date(2040, 5, 14) - datetime.date(1858, 11, 17)).days + 0.5}, "2040-05-14T12:00"),
    ({"T_REC": "2040.05.14_12:00:00_TAI"}, "2040-05-14T11:59"),
])
def test_map_time_from_the_standard_time_keywords(tmp_path, keys, expected):
    from conftest import cea_header, write_fits

    header = cea_header(36, 72, **keys)
    del header["DATE-OBS"], header["CAR_ROT"]
    m = pf.read_map(write_fits(tmp_path / "t.fits", np.zeros((36, 72), np.float32), header))
    assert m.time.utc.isot.startswith(expected)


def test_header_times_are_the_times_astropy_parses():
    """Reference: astropy's ISO 8601 parser (``Time(text, format="isot", scale="utc")``), to the bit:
    days of a quick path and days it must leave to astropy (month ends, a leap second, before 1972)."""
    from astropy.time import Time

    from polarflux.maps import parse_header_time, quiet_time_warnings

    rng = np.random.default_rng(14)
    texts = ["2016-12-31T23:59:60", "2016-12-31T23:59:60.5", "2016-12-31T12:00:00", "2015-06-30T18:00:00",
             "1971-06-15T12:00:00", "1960-03-03T03:03:03",
             "2040-01-01T00:00:00.000", "2040-02-27T23:59:59.999999999", "2040-02-28T00:00:00", "2024-02-29T06:00",
             "2041-05-14_12:00:00Z", "2041.05.14_12:00:00_UTC", "1972-01-01T00:00:00"]
    for _ in range(300):
        year, month, day = rng.integers(1950, 2300), rng.integers(1, 13), rng.integers(1, 29)
        hour, minute, second = rng.integers(0, 24), rng.integers(0, 60), rng.integers(0, 60)
        digits = "".join(str(k) for k in rng.integers(0, 10, rng.integers(0, 10)))
        texts.append(f"{year:04d}-{month:02d}-{day:02d}T{hour:02d}:{minute:02d}:{second:02d}" + (f".{digits}" if digits else ""))
    with quiet_time_warnings():
        for text in texts:
            iso = text.replace("_", "T").replace(".", "-", 2).rstrip("Z").removesuffix("TUTC") if "_" in text else text
            expected, got = Time(iso, format="isot", scale="utc"), parse_header_time(text)
            assert (got.jd1, got.jd2, got.format, got.scale) == (expected.jd1, expected.jd2, "isot", "utc"), text
            assert got.isot == expected.isot, text


def test_a_map_without_time_is_refused_by_the_archive_with_the_keywords_it_lacked(tmp_path):
    """DATE is the file's creation date (FITS standard 4.0, sec. 4.4.2.1), never the map's time."""
    from conftest import cea_header, write_fits

    from polarflux.record import measure_file

    header = cea_header(36, 72, DATE="2041-01-01T00:00:00")
    del header["DATE-OBS"], header["CAR_ROT"]
    path = write_fits(tmp_path / "timeless.fits", np.zeros((36, 72), np.float32), header)
    assert pf.read_map(path).time is None  # a library user may still read it
    with pytest.raises(pf.MapFormatError, match=r"timeless.fits: the map has no time: none of DATE-OBS.*CAR_ROT"):
        measure_file(path)
