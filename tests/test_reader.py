"""The one-pass FITS reader against astropy.io.fits (the reference library), and data cubes.

Pixels must be bit for bit what ``astropy.io.fits.getdata`` returns, put in map
order (south row first, longitude ascending, as ``astropy.wcs`` places the
pixels); row sums must be the sums of those pixels; broken and damaged files
are refused by name in one line; every plane of a cube carries the cube's
time, rotation and instrument.
"""

from __future__ import annotations

import gzip
import math
import os

import numpy as np
import pytest
from astropy.io import fits
from astropy.wcs import WCS
from conftest import cea_header, write_fits

import polarflux as pf
from polarflux import _fits, _pixels
from polarflux.maps import count_planes, read_planes


@pytest.fixture
def small_blocks(monkeypatch):
    """Blocks of 4 rows, so that small test maps cross many block boundaries."""
    monkeypatch.setattr(_pixels, "_BLOCK_BYTES", 1)


def finite_or_nan(data):
    data = np.asarray(data)
    return np.where(np.isfinite(data), data, np.nan) if data.dtype.kind == "f" else data


def check_row_sums(m, expected_pixels):
    """Row sums and counts of the map against its reference pixels (already in map order).

    Two references: the same reduction (numpy's einsum over each row, missing pixels
    as 0) over astropy's pixels, which must agree bit for bit; and the exact sum
    (math.fsum, Python's standard library) in float64, which must agree to the
    precision of the stored pixels (float32 rounding of a few 1e-8 of the row's
    unsigned sum; the bound 1e-6 leaves room).
    """
    ref = np.ascontiguousarray(expected_pixels)  # rows in memory, as a map stores them
    finite = np.isfinite(ref)
    stats = m.row_statistics()
    np.testing.assert_array_equal(stats.counts, finite.sum(axis=1))
    np.testing.assert_array_equal(stats.sums, np.einsum("ij->i", np.where(finite, ref, 0).astype(m.values.dtype)))
    for row in range(ref.shape[0]):
        values = ref[row][finite[row]].astype(np.float64)
        exact = math.fsum(values)
        scale = math.fsum(np.abs(values)) + 1e-300
        assert abs(stats.sums[row] - exact) <= 1e-6 * scale, row
        every = slice(row, row + 1)
        assert abs(stats.abs_sums(every)[0] - scale) <= 1e-6 * scale + 1e-300, row


def noisy(shape, seed=0, dtype=np.float32):
    data = np.random.default_rng(seed).normal(0.0, 20.0, shape).astype(dtype)
    data[..., :2, :] = np.nan                 # a missing polar strip
    data[..., 5, 7] = np.inf                  # stray non-finite pixels become missing
    data[..., 6, 3] = -np.inf
    data[..., 8, ::3] = np.nan                # a row partly seen
    return data


# --------------------------------------------------------------------------- pixels as astropy reads them


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_float_pixels_and_row_sums_match_astropy(tmp_path, small_blocks, dtype):
    data = noisy((36, 90), dtype=dtype)
    path = write_fits(tmp_path / "f.fits", data, cea_header(36, 90))
    m = pf.read_map(path)
    ref = finite_or_nan(fits.getdata(path))  # astropy: the reference reader
    assert m.values.dtype == dtype
    np.testing.assert_array_equal(m.values, ref)
    check_row_sums(m, ref)


def scaled_int(tmp_path, name, raw, bscale, bzero, blank, header=None):
    hdu = fits.PrimaryHDU(raw)
    for key, value in (header or cea_header(*raw.shape[-2:])).items():
        hdu.header[key] = value
    if bscale is not None:
        hdu.header["BSCALE"], hdu.header["BZERO"] = bscale, bzero
    if blank is not None:
        hdu.header["BLANK"] = blank
    path = tmp_path / name
    hdu.writeto(path)
    return path


@pytest.mark.parametrize("dtype,bscale,bzero,blank", [
    (np.int16, 0.37, -12.5, -32768),     # the usual integer archive form
    (np.int16, None, None, -32768),      # BLANK alone
    (np.int32, 1e-3, 5.0, -2147483647),
    (np.int32, None, None, None),        # plain integers
    (np.uint8, 0.5, -60.0, 255),
    (np.int64, 2.0, 0.0, None),
])
def test_integer_pixels_with_scaling_and_blank_match_astropy(tmp_path, small_blocks, dtype, bscale, bzero, blank):
    rng = np.random.default_rng(3)
    info = np.iinfo(dtype)
    raw = rng.integers(max(info.min + 1, -20000), min(info.max, 20000), (36, 90)).astype(dtype)
    if blank is not None:
        raw[0] = blank
        raw[10, ::4] = blank
    path = scaled_int(tmp_path, "i.fits", raw, bscale, bzero, blank)
    m = pf.read_map(path)
    # astropy scales 8/16-bit integers in float32 and 32/64-bit ones in float64, BLANK -> NaN
    ref = np.asarray(fits.getdata(path))
    np.testing.assert_array_equal(m.values.astype(ref.dtype) if ref.dtype.kind in "iu" else m.values, ref)
    assert m.values.dtype == (np.float32 if np.dtype(dtype).itemsize <= 2 else np.float64)
    check_row_sums(m, ref.astype(m.values.dtype))


def test_blank_zero_is_missing_as_the_fits_standard_says(tmp_path):
    """FITS standard 4.0, section 4.4.2.5: BLANK gives the raw value of undefined pixels (astropy 8 skips 0)."""
    raw = np.arange(36 * 90, dtype=np.int16).reshape(36, 90) % 50
    path = scaled_int(tmp_path, "b0.fits", raw, 2.0, 1.0, 0)
    m = pf.read_map(path)
    assert np.all(np.isnan(m.values[raw == 0]))
    np.testing.assert_array_equal(m.values[raw != 0], (raw[raw != 0] * np.float32(2.0) + np.float32(1.0)))


def test_unsigned_16_bit_convention(tmp_path):
    """BZERO = 32768 with BSCALE = 1 stores unsigned 16-bit values (FITS standard 4.0, section 5.3)."""
    values = np.array([[0, 1, 32768, 65535] * 45] * 36, dtype=np.uint16)
    path = tmp_path / "u16.fits"
    hdu = fits.PrimaryHDU(values)  # astropy writes BZERO = 32768
    for key, value in cea_header(36, 180).items():
        hdu.header[key] = value
    hdu.writeto(path)
    assert fits.getheader(path)["BZERO"] == 32768
    np.testing.assert_array_equal(pf.read_map(path).values, values.astype(np.float32))


def test_a_large_map_over_many_blocks_of_the_default_size(tmp_path):
    nlat, nlon = 721, 1440  # 4 MB of float32: several default blocks, and a short last block
    data = noisy((nlat, nlon), seed=9)
    path = write_fits(tmp_path / "big.fits", data, cea_header(nlat, nlon))
    m = pf.read_map(path)
    ref = finite_or_nan(fits.getdata(path))
    np.testing.assert_array_equal(m.values, ref)
    check_row_sums(m, ref)


def wcs_order(path, drop_last=False):
    """Reference pixels in map order, placed by astropy.wcs: rows by latitude, columns by longitude mod 360."""
    header = fits.getheader(path)
    data = np.asarray(fits.getdata(path))
    ny, nx = data.shape
    w = WCS(header)
    w.wcs.bounds_check(False, False)  # a synoptic map's columns run a full turn from the reference pixel
    lon, _ = w.pixel_to_world_values(np.arange(nx), np.zeros(nx))
    _, lat = w.pixel_to_world_values(np.zeros(ny), np.arange(ny))
    if drop_last:
        data, lon = data[:, :-1], lon[:-1]
    return data[np.argsort(lat)][:, np.argsort(np.mod(lon, 360.0))]


def car_header(nlat, nlon, **extra):
    header = {"CTYPE1": "CRLN-CAR", "CTYPE2": "CRLT-CAR", "CUNIT1": "deg", "CUNIT2": "deg",
              "CRPIX1": 1.0, "CRVAL1": 0.5 * 360 / nlon, "CDELT1": 360.0 / nlon,
              "CRPIX2": (nlat + 1) / 2, "CRVAL2": 0.0, "CDELT2": 180.0 / nlat, "BUNIT": "G", "CAR_ROT": 2400}
    header.update(extra)
    return header


@pytest.mark.parametrize("flip_lon,flip_lat,crval1,drop_last", [
    (True, True, 0.5 * 4, False),        # both axes descending
    (False, False, 101.0, False),        # longitude starting mid-map: columns rolled
    (True, False, 251.0, False),         # descending and rolled
    (False, True, 101.0, True),          # last column repeats the first meridian
])
@pytest.mark.parametrize("kind", ["float32", "int16"])
def test_flipped_and_rolled_axes_place_pixels_as_astropy_wcs_does(tmp_path, small_blocks, flip_lon, flip_lat, crval1,
                                                                   drop_last, kind):
    nlat, nlon = 45, 90
    ncols = nlon + 1 if drop_last else nlon
    j, i = np.mgrid[0:nlat, 0:ncols]
    codes = (i + 1000 * j).astype(np.float32) / 10.0  # each value names its file pixel
    header = car_header(nlat, nlon, CRVAL1=crval1, CDELT1=(-4.0 if flip_lon else 4.0),
                        CDELT2=(-4.0 if flip_lat else 4.0))
    if kind == "int16":
        raw = (i + 100 * j).astype(np.int16)
        raw[3, 5] = -32768
        path = scaled_int(tmp_path, "o.fits", raw, 0.5, 1.0, -32768, header=header)
    else:
        path = write_fits(tmp_path / "o.fits", codes, header)
    m = pf.read_map(path)
    expected = wcs_order(path, drop_last)
    np.testing.assert_array_equal(m.values, expected)
    check_row_sums(m, expected.astype(m.values.dtype))


def test_gzip_file_reads_as_the_plain_file(tmp_path, small_blocks):
    data = noisy((36, 90))
    plain = write_fits(tmp_path / "p.fits", data, cea_header(36, 90))
    packed = tmp_path / "p.fits.gz"
    packed.write_bytes(gzip.compress(open(plain, "rb").read()))
    np.testing.assert_array_equal(pf.read_map(packed).values, pf.read_map(plain).values)
    np.testing.assert_array_equal(pf.read_map(packed).values, finite_or_nan(fits.getdata(packed)))


def test_reading_gzip_files_leaves_no_file_open(tmp_path):
    plain = write_fits(tmp_path / "p.fits", noisy((36, 90)), cea_header(36, 90))
    packed = tmp_path / "p.fits.gz"
    packed.write_bytes(gzip.compress(open(plain, "rb").read()))
    fd_dir = "/proc/self/fd"
    if not os.path.isdir(fd_dir):
        pytest.skip("needs /proc to count open files")
    before = len(os.listdir(fd_dir))
    kept = [pf.read_map(packed) for _ in range(50)] + [m for _ in range(50) for m in read_planes(packed)]
    assert len(os.listdir(fd_dir)) <= before + 1 and len(kept) == 100


def test_the_pixels_are_read_from_the_file_once(tmp_path, monkeypatch):
    data = noisy((90, 180))
    hdul = fits.HDUList([fits.PrimaryHDU(data=data, header=fits.Header(cea_header(90, 180)))])
    path = tmp_path / "once.fits"
    hdul.writeto(path, checksum=True)  # with DATASUM: verified on the same bytes
    read = []
    original = _pixels._read_exact

    def counting(f, view):
        n = original(f, view)
        read.append(n)
        return n

    monkeypatch.setattr(_pixels, "_read_exact", counting)
    pf.read_map(path)
    assert sum(read) == data.nbytes


# --------------------------------------------------------------------------- refusals


@pytest.mark.parametrize("cut", [2880 + 4, 2880 + 4 * 90 * 7 + 3, -1])
@pytest.mark.parametrize("packed", [False, True])
def test_truncated_data_is_refused_by_name_in_one_line(tmp_path, small_blocks, cut, packed):
    whole = open(write_fits(tmp_path / "w.fits", noisy((36, 90)), cea_header(36, 90)), "rb").read()
    data_end = 2880 + 36 * 90 * 4
    body = whole[: data_end + cut if cut < 0 else cut]
    path = tmp_path / ("cut.fits.gz" if packed else "cut.fits")
    path.write_bytes(gzip.compress(body) if packed else body)
    with pytest.raises(pf.MapFormatError) as info:
        pf.read_map(path)
    text = str(info.value)
    assert text.startswith(f"{path}: not a readable FITS file") and "\n" not in text
    if not packed:
        assert "truncated" in text


def test_a_gzip_stream_cut_short_is_refused_by_name(tmp_path):
    plain = write_fits(tmp_path / "w.fits", noisy((36, 90)), cea_header(36, 90))
    packed = gzip.compress(open(plain, "rb").read())
    path = tmp_path / "cut.fits.gz"
    path.write_bytes(packed[: len(packed) // 2])
    with pytest.raises(pf.MapFormatError, match=r"cut.fits.gz: not a readable FITS file"):
        pf.read_map(path)


def checksummed(tmp_path, data, name="sum.fits", header=None):
    path = tmp_path / name
    hdu = fits.PrimaryHDU(data=data, header=fits.Header(header or cea_header(*data.shape[-2:])))
    fits.HDUList([hdu]).writeto(path, checksum=True)
    return path


def data_start(raw: bytes) -> int:
    return (raw.rfind(b"END" + b" " * 77) // 2880 + 1) * 2880


@pytest.mark.parametrize("dtype,shape", [(np.float32, (36, 90)), (np.int16, (3, 35, 91)), (np.uint8, (2, 33, 91))])
def test_datasum_as_astropy_writes_it_is_verified(tmp_path, small_blocks, dtype, shape):
    """FITS standard 4.0 appendix J: DATASUM is the ones' complement sum of the data's 32-bit words.

    astropy computes the reference DATASUM when writing; odd-sized integer planes
    do not start on whole words, so the whole data unit is summed for a plane.
    """
    header = cea_header(shape[-2], 90)
    data = (np.arange(math.prod(shape)) % 97).astype(dtype).reshape(shape)
    good = checksummed(tmp_path, data, header={**header, "CDELT1": 360.0 / shape[-1], "CRPIX1": (shape[-1] + 1) / 2})
    plane = {} if len(shape) == 2 else {"plane": shape[0] - 1}
    pf.read_map(good, **plane)  # intact: accepted
    raw = bytearray(good.read_bytes())
    raw[data_start(bytes(raw)) + 1] ^= 0x04  # a bit of the FIRST plane's data
    bad = tmp_path / "bad.fits"
    bad.write_bytes(bytes(raw))
    with pytest.raises(pf.MapFormatError, match=r"bad.fits: damaged: its CHECKSUM/DATASUM do not match"):
        pf.read_map(bad, **plane)  # the damage is outside the plane read, and still found


@pytest.mark.parametrize("blocks", ["default", "small"])
@pytest.mark.parametrize("dtype,shape", [(np.float32, (35, 91)), (np.float64, (33, 90)), (np.float32, (3, 35, 91))])
def test_datasum_of_random_floats_as_astropy_writes_it_is_verified(tmp_path, monkeypatch, blocks, dtype, shape):
    """FITS standard 4.0 appendix J, reference DATASUM from astropy's writer: random floats fill both halves
    of the 64-bit lanes the reader sums the words in (their sums wrap), odd rows leave a word over."""
    if blocks == "small":
        monkeypatch.setattr(_pixels, "_BLOCK_BYTES", 1)
    data = np.random.default_rng(7).normal(0.0, 1e3, shape).astype(dtype)
    header = {**cea_header(shape[-2], 90), "CDELT1": 360.0 / shape[-1], "CRPIX1": (shape[-1] + 1) / 2}
    good = checksummed(tmp_path, data, header=header)
    plane = {} if len(shape) == 2 else {"plane": 1}
    assert np.array_equal(pf.read_map(good, **plane).values, data if len(shape) == 2 else data[1])
    raw = bytearray(good.read_bytes())
    raw[data_start(bytes(raw)) + 4 * data[..., 0, :].size + 2] ^= 0x10  # a bit of the first plane's second row
    bad = tmp_path / "bad.fits"
    bad.write_bytes(bytes(raw))
    with pytest.raises(pf.MapFormatError, match=r"bad.fits: damaged: its CHECKSUM/DATASUM do not match"):
        pf.read_map(bad, **plane)


def test_word_sums_in_64_bit_lanes_are_exact():
    """The plain sum of 32-bit words (FITS standard 4.0 appendix J), against Python's exact integers:
    odd counts, the largest words (every lane sum wraps), a start not on a multiple of 8 bytes."""
    rng = np.random.default_rng(3)
    for n in (1, 2, 3, 7, 1000, 1001):
        words = rng.integers(0, 2**32, n, dtype=np.uint64).astype(np.uint32)
        words[: n // 3] = 0xFFFFFFFF
        shifted = np.zeros(4 * n + 4, np.uint8)
        shifted[4:] = words.view(np.uint8)
        for native in (words, shifted[4:].view(np.uint32)):
            assert _pixels._swapped_word_sum(native.view(np.float32)) == sum(int(w) for w in words), n


def test_a_changed_header_fails_its_checksum(tmp_path):
    good = checksummed(tmp_path, np.ones((36, 90), np.float32), header=cea_header(36, 90, OBSERVER="desk"))
    raw = good.read_bytes().replace(b"'desk", b"'dusk")
    bad = tmp_path / "hdr.fits"
    bad.write_bytes(raw)
    with pytest.raises(pf.MapFormatError, match=r"hdr.fits: damaged: .*CHECKSUM of the header and data"):
        pf.read_map(bad)


def test_a_damaged_cube_yields_no_plane(tmp_path):
    cube = np.stack([np.full((36, 90), k, np.float32) for k in range(3)])
    raw = bytearray(checksummed(tmp_path, cube, "c.fits", cea_header(36, 90)).read_bytes())
    raw[data_start(bytes(raw)) + 2 * 36 * 90 * 4 + 9] ^= 0x10  # in the last plane
    bad = tmp_path / "bad_cube.fits"
    bad.write_bytes(bytes(raw))
    planes = read_planes(bad)
    with pytest.raises(pf.MapFormatError, match="bad_cube.fits: damaged"):
        next(planes)


# --------------------------------------------------------------------------- headers


@pytest.mark.filterwarnings("ignore::astropy.io.fits.verify.VerifyWarning")  # astropy's notes on some shipped cards
def test_header_cards_parse_as_astropy_parses_them():
    """Every header sunpy ships for its tests (real instruments' headers), parsed as astropy does."""
    import sunpy.data.test

    folder = os.path.dirname(sunpy.data.test.__file__)
    fast = 0
    for name in sorted(f for f in os.listdir(folder) if f.endswith(".header")):
        header = fits.Header.fromtextfile(os.path.join(folder, name))
        text = header.tostring()
        parsed = _fits._parse_header(text)
        if parsed is None:  # a card only astropy parses (CONTINUE, HIERARCH, ...): it is handed over
            continue
        fast += 1
        assert parsed == dict(fits.Header.fromstring(text).items()), name
    assert fast >= 20


def test_unusual_cards_parse_as_astropy_parses_them():
    cards = ["SIMPLE  =                    T", "STR     = 'it''s here  ' / quoted quote", "EMPTY   =",
             "NOVALUE =                      / only a comment", "DEXP    =             1.5D+02", "LOWER   = 2.5e-3",
             "INT     =                 +007", "POINT   =                  -3.", "BARE    = .5", "BLANKSTR= '   '",
             "COMMENT   spaced comment", "HISTORY once", "        keyword-less text", "LOGIC   =                    F"]
    text = "".join(c.ljust(80) for c in cards) + "END".ljust(80)
    text = text.ljust(2880)
    assert _fits._parse_header(text) == dict(fits.Header.fromstring(text).items())
    assert _fits._parse_header(text.replace("LOGIC   =", "CONTINUE  ")) is None  # left to astropy


# --------------------------------------------------------------------------- cubes


def cube_header(nlat, nlon, **extra):
    header = cea_header(nlat, nlon, INSTRUME="ENSEMBLE-7", **extra)
    del header["DATE-OBS"], header["CAR_ROT"]
    header["DATE-AVG"] = "2041-03-10T06:00:00"  # FITS 4.0 sec. 9.4: the map's mean time, no DATE-OBS
    return header


def expect_metadata(m):
    from sunpy.coordinates.sun import carrington_rotation_number

    assert m.time is not None and m.time.utc.isot.startswith("2041-03-10T06:00")
    # the rotation from the map time, by sunpy's Carrington rotation numbers (reference)
    assert m.carrington_rotation == int(math.floor(float(carrington_rotation_number(m.time))))
    assert m.instrument == "ENSEMBLE-7"


def test_every_plane_of_a_cube_is_read_once_with_the_cubes_metadata(tmp_path, small_blocks):
    cube = noisy((4, 36, 90), seed=4)
    path = write_fits(tmp_path / "ens.fits", cube, cube_header(36, 90))
    assert count_planes(path) == 4
    ref = fits.getdata(path)
    maps = list(read_planes(path))
    assert [m.plane for m in maps] == [0, 1, 2, 3]
    for k, m in enumerate(maps):
        np.testing.assert_array_equal(m.values, finite_or_nan(ref[k]))
        check_row_sums(m, finite_or_nan(ref[k]))
        expect_metadata(m)
        assert m.source == str(path)
    single = pf.read_map(path, plane=2)
    assert single.plane == 2
    np.testing.assert_array_equal(single.values, maps[2].values)
    expect_metadata(single)


def test_a_4d_cube_counts_its_planes_slowest_axis_first(tmp_path):
    cube = np.arange(2 * 3 * 36 * 90, dtype=np.float32).reshape(2, 3, 36, 90) / 100.0
    path = write_fits(tmp_path / "c4.fits", cube, cea_header(36, 90))
    assert count_planes(path) == 6
    ref = fits.getdata(path).reshape(6, 36, 90)
    for k, m in enumerate(read_planes(path)):
        np.testing.assert_array_equal(m.values, ref[k])


@pytest.mark.parametrize("inherit", [True, None, False])
def test_cube_in_an_extension_takes_the_primary_headers_metadata(tmp_path, inherit):
    """The FITS keyword-inheritance convention: a data-less primary header's keywords apply to the extension."""
    header = cube_header(36, 90)
    meta = {key: header.pop(key) for key in ("INSTRUME", "DATE-AVG")}
    ext = fits.Header(header)
    if inherit is not None:
        ext["INHERIT"] = inherit
    cube = np.stack([np.full((36, 90), k, np.float32) for k in range(3)])
    path = tmp_path / "ext.fits"
    fits.HDUList([fits.PrimaryHDU(header=fits.Header(meta)), fits.ImageHDU(cube, header=ext)]).writeto(path)
    m = pf.read_map(path, plane=1)
    assert np.all(m.values == 1.0)
    if inherit is False:
        assert m.time is None and m.instrument == ""
    else:
        expect_metadata(m)
        assert all(p.instrument == "ENSEMBLE-7" for p in read_planes(path))


def test_a_tile_compressed_cube_reads_every_plane(tmp_path):
    cube = np.stack([np.full((36, 90), 2.0 * k, np.float32) for k in range(3)])
    path = write_fits(tmp_path / "ens.fits.fz", cube, cube_header(36, 90), compress=True)
    assert count_planes(path) == 3
    maps = list(read_planes(path))
    assert [float(m.values[0, 0]) for m in maps] == [0.0, 2.0, 4.0]
    expect_metadata(maps[1])


def test_a_2d_map_is_one_plane(tmp_path):
    path = write_fits(tmp_path / "flat.fits", np.ones((36, 90), np.float32), cea_header(36, 90))
    assert count_planes(path) == 1
    (m,) = list(read_planes(path))
    assert m.plane is None and pf.read_map(path).plane is None


def test_plane_outside_the_cube_and_a_wrong_plane_argument(tmp_path):
    path = write_fits(tmp_path / "c.fits", np.zeros((3, 36, 90), np.float32), cea_header(36, 90))
    with pytest.raises(pf.MapFormatError, match=r"c.fits: plane=3 asked for, but the cube holds 3 maps \(planes 0-2\)"):
        pf.read_map(path, plane=3)
    with pytest.raises(pf.SettingsError, match="plane='1'"):
        pf.read_map(path, plane="1")
    with pytest.raises(pf.MapFormatError, match="c.fits: a cube of 3 maps"):
        pf.read_map(path)


def test_a_plane_without_data_is_refused_naming_the_file_and_plane(tmp_path):
    cube = np.ones((3, 36, 90), np.float32)
    cube[1] = np.nan
    path = write_fits(tmp_path / "c.fits", cube, cea_header(36, 90))
    planes = read_planes(path)
    assert next(planes).plane == 0
    with pytest.raises(pf.MapFormatError, match=r"^.*c.fits \(plane 1\): all values are missing"):
        next(planes)
