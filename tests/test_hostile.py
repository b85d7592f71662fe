"""Hostile and broken input: every file gets a specific one-line verdict, the batch goes on, nothing is lost.

The corpus is built here (nothing binary is committed). Valid-but-odd files have a
documented, correct result; broken ones a named error. Property-based tests
(hypothesis) check the header reader and the measures on random valid grids.
"""

from __future__ import annotations

import os
import re

import numpy as np
import pytest
from astropy.io import fits
from conftest import cea_header, write_fits
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import polarflux as pf
from polarflux.cli import main

NLAT, NLON = 90, 180


def good_data(seed=0):
    return np.random.default_rng(seed).normal(0, 5, (NLAT, NLON)).astype(np.float32)


def build_corpus(folder):
    """Broken and odd inputs; returns {file name: expected message fragment or None (valid)}."""
    folder.mkdir(parents=True, exist_ok=True)
    expect = {}

    def put(name, data, header=None, message=None, compress=False):
        write_fits(folder / name, data, header if header is not None else cea_header(NLAT, NLON), compress=compress)
        expect[name] = message

    (folder / "empty.fits").write_bytes(b"")
    expect["empty.fits"] = "empty file"
    (folder / "notes.fits").write_text("observing log, not a map\n" * 50)
    expect["notes.fits"] = "not a readable FITS file"
    put("good.fits", good_data())
    raw = (folder / "good.fits").read_bytes()
    (folder / "cut_header.fits").write_bytes(raw[:1500])
    expect["cut_header.fits"] = "not a readable FITS file"
    (folder / "cut_data.fits").write_bytes(raw[: 2880 * 2 + 20000])
    expect["cut_data.fits"] = "not a readable FITS file"
    header_text = raw[:2880].decode("ascii")
    no_end = header_text.replace("END" + " " * 77, " " * 80).encode("ascii")
    (folder / "no_end.fits").write_bytes(no_end + raw[2880:])
    expect["no_end.fits"] = "not a readable FITS file"
    mismatch = raw[:2880].decode("ascii").replace(f"NAXIS2  = {NLAT:>20}", f"NAXIS2  = {NLAT * 2:>20}")
    (folder / "naxis_mismatch.fits").write_bytes(mismatch.encode("ascii") + raw[2880:])
    expect["naxis_mismatch.fits"] = "not a readable FITS file"
    put("line.fits", np.ones(NLON, np.float32), {"BUNIT": "G"}, "no 2-D image")
    put("cube.fits", np.ones((3, NLAT, NLON), np.float32), message="a cube of 3 maps (realizations); measure one with --plane N")
    put("all_nan.fits", np.full((NLAT, NLON), np.nan, np.float32), message="all values are missing")
    put("all_zero.fits", np.zeros((NLAT, NLON), np.float32))  # valid: zero flux, full coverage
    inf = good_data(1)
    inf[10, 10], inf[11, 11] = np.inf, -np.inf
    put("infinite.fits", inf)  # valid: the two pixels become missing
    absurd = good_data(2)
    absurd[40, 40] = 1e30
    put("absurd.fits", absurd, message="implausible field values up to 1e+30 G")
    scaled = fits.PrimaryHDU(np.full((NLAT, NLON), 100, np.int16))
    for k, v in cea_header(NLAT, NLON).items():
        scaled.header[k] = v
    scaled.header["BSCALE"], scaled.header["BZERO"], scaled.header["BLANK"] = 0.5, 10.0, -32768
    scaled.data[0, :] = -32768
    scaled.writeto(folder / "scaled_int.fits")
    expect["scaled_int.fits"] = None  # valid: 60 G with the first row missing
    put("half_sphere.fits", good_data(), cea_header(NLAT, NLON, CDELT2=1 / NLAT, CRPIX2=0.5),
        "latitude axis does not span the sphere")
    put("unknown_ctype.fits", good_data(), cea_header(NLAT, NLON, CTYPE1="HPLN-TAN", CTYPE2="HPLT-TAN"),
        "unknown latitude axis type")
    put("narrow_lon.fits", np.ones((NLAT, 120), np.float32), message="longitude axis does not span 360")
    put("same_rot_a.fits", good_data(3), cea_header(NLAT, NLON, CAR_ROT=2500))
    put("same_rot_b.fits", good_data(4), cea_header(NLAT, NLON, CAR_ROT=2500))  # valid: both kept
    (folder / "looks_like_a_map.fits").mkdir()  # a folder: skipped by the folder search, refused by name
    os.symlink("loop.fits", folder / "loop.fits")
    expect["loop.fits"] = "cannot open"
    sub = folder / "sub"
    sub.mkdir()
    os.symlink("..", sub / "back")  # a loop of folders: never followed
    put("tile.fits.fz", good_data(5), compress=True)
    gz = fits.HDUList([fits.PrimaryHDU(), fits.CompImageHDU(good_data(6), header=fits.Header(cea_header(NLAT, NLON)),
                                                            compression_type="GZIP_1")])
    gz.writeto(folder / "bad_tile.fits.fz")
    broken = bytearray((folder / "bad_tile.fits.fz").read_bytes())
    for i in range(len(broken) - 20000, len(broken) - 19000):
        broken[i] ^= 0x5A
    (folder / "bad_tile.fits.fz").write_bytes(bytes(broken))
    expect["bad_tile.fits.fz"] = "not a readable FITS file"
    put("ünïcödé_карта_地图.fits", good_data(7))  # valid: non-ASCII name
    long_name = "l" * 200 + ".fits"
    put(long_name, good_data(8))  # valid: very long name
    return expect


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile") / "archive"
    return folder, build_corpus(folder)


def test_each_input_gets_its_own_verdict_one_line_each(corpus):
    folder, expect = corpus
    for name, message in expect.items():
        path = folder / name
        if message is None:
            m = pf.read_map(path)
            assert m.shape[0] == NLAT
        else:
            with pytest.raises(pf.MapFormatError) as info:
                pf.read_map(path)
            text = str(info.value)
            assert "\n" not in text, name
            assert text.startswith(str(path)), name
            assert message in text, (name, text)


def test_valid_odd_files_have_the_documented_results(corpus):
    folder, _ = corpus
    zero = pf.measure_caps(pf.read_map(folder / "all_zero.fits"))
    assert zero.north.signed_flux.value == 0.0 and zero.north.coverage == pytest.approx(1.0)
    inf = pf.read_map(folder / "infinite.fits")
    assert np.isnan(inf.br).sum() == 2
    scaled = pf.read_map(folder / "scaled_int.fits")
    assert np.all(np.isnan(scaled.br[0])) and np.all(scaled.br[1:] == 60.0)


def test_the_batch_goes_on_lists_every_failure_and_keeps_outputs(corpus, tmp_path, capsys):
    folder, expect = corpus
    ledger = tmp_path / "ledger.sqlite"
    out = tmp_path / "record.csv"
    out.write_text("last month's record\n")
    assert main(["measure", str(folder), "--out", str(out), "--ledger", str(ledger), "--jobs", "1"]) == 2
    assert out.read_text() == "last month's record\n"  # never overwritten without --force
    status = main(["measure", str(folder), str(folder / "looks_like_a_map.fits"), "--out", str(tmp_path / "new.csv"),
                   "--ledger", str(ledger), "--jobs", "2"])
    err = capsys.readouterr().err
    assert status == 1
    bad = [name for name, message in expect.items() if message is not None]
    for name in bad:
        lines = [line for line in err.splitlines() if name in line]
        assert len(lines) == 1, (name, lines)
        assert lines[0].startswith("polarflux: ")
    assert "looks_like_a_map.fits: folder holds no FITS files" in err  # a folder named like a map
    good = [name for name, message in expect.items() if message is None]
    rows = (tmp_path / "new.csv").read_text(encoding="utf-8").splitlines()
    assert len(rows) == 1 + len(good)
    assert any("ünïcödé" in r for r in rows) and any("l" * 200 in r for r in rows)
    assert re.search(rf"measured {len(good)} of \d+ maps", err)
    import sqlite3

    with sqlite3.connect(ledger) as db:
        errors = db.execute("SELECT COUNT(*) FROM measurements WHERE error IS NOT NULL").fetchone()[0]
    assert errors >= len(bad) - 1  # the symlink loop cannot be opened to hash: it is not in the ledger
    netcdf = tmp_path / "new.nc"
    assert main(["measure", str(folder), "--out", str(netcdf), "--ledger", str(ledger), "--quiet"]) == 1
    assert "ünïcödé" in "".join(pf.read_record(netcdf)["source"].values.tolist())


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root reads files without permission")
def test_unreadable_file(tmp_path):
    path = write_fits(tmp_path / "locked.fits", good_data(), cea_header(NLAT, NLON))
    os.chmod(path, 0)
    with pytest.raises(pf.MapFormatError, match="locked.fits: cannot open"):
        pf.read_map(path)


# --------------------------------------------------------------------------- properties

grids = st.sampled_from(["sine-latitude", "equal-angle"])
sizes = st.tuples(st.integers(4, 120).map(lambda n: 2 * n), st.integers(1, 90).map(lambda n: 2 * n))


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(grid=grids, size=sizes, seed=st.integers(0, 2**32 - 1), scale=st.floats(-50, 50).filter(lambda x: abs(x) > 1e-3),
       caps=st.tuples(st.floats(5, 85), st.floats(5, 85)).filter(lambda c: abs(c[0] - c[1]) > 1e-3))
def test_measures_are_additive_symmetric_and_linear(grid, size, seed, scale, caps):
    from conftest import band_flux_reference

    rng = np.random.default_rng(seed)
    br = rng.normal(0, 10, size)
    m = pf.SynopticMap.from_array(br, grid=grid)
    low, high = sorted(caps)
    outer, inner = pf.measure_caps(m, low).north, pf.measure_caps(m, high).north
    # the band between the caps, by exact cell areas written out independently of the package
    direct = band_flux_reference(br, m.lat_edges, m.lon_edges, low, high)
    total = abs(outer.unsigned_flux.value) + abs(direct) + 1.0
    assert outer.signed_flux.value - inner.signed_flux.value == pytest.approx(direct, abs=1e-9 * total)
    scaled = pf.measure_caps(pf.SynopticMap.from_array(scale * br, grid=grid), low)
    assert scaled.north.signed_flux.value == pytest.approx(scale * outer.signed_flux.value, rel=1e-9, abs=1e-9 * total)
    assert scaled.north.unsigned_flux.value == pytest.approx(abs(scale) * outer.unsigned_flux.value, rel=1e-9)
    mirrored = pf.measure_caps(pf.SynopticMap.from_array(br[::-1], grid=grid), low)
    assert mirrored.south.signed_flux.value == pytest.approx(outer.signed_flux.value, rel=1e-9, abs=1e-9 * total)
    assert pf.axial_dipole(pf.SynopticMap.from_array(-br, grid=grid)).value == pytest.approx(
        -pf.axial_dipole(m).value, rel=1e-12, abs=1e-12)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(nlat=st.integers(6, 60).map(lambda n: 2 * n), nlon=st.integers(2, 90).map(lambda n: 4 * n),
       shift=st.integers(0, 400), flip_lat=st.booleans(), flip_lon=st.booleans(), sine_units=st.booleans(),
       kind=st.sampled_from(["CEA", "CAR"]))
def test_header_reader_places_every_valid_grid(tmp_path_factory, nlat, nlon, shift, flip_lat, flip_lon,
                                                sine_units, kind):
    folder = tmp_path_factory.mktemp("prop")
    j, i = np.mgrid[0:nlat, 0:nlon]
    data = (i + 400.0 * j).astype(np.float32)  # below the plausibility limit for up to 120 rows
    dlon = 360.0 / nlon
    start = (shift * dlon) % 360.0
    if kind == "CEA":
        step = 2.0 / nlat if sine_units else (360.0 / np.pi) / nlat
        header = {"CTYPE1": "CRLN-CEA", "CTYPE2": "CRLT-CEA", "CUNIT2": "Sine Latitude" if sine_units else "deg"}
        if not sine_units:
            header["PV2_1"] = 1.0
        expected_lat = np.rad2deg(np.arcsin(np.linspace(-1 + 1 / nlat, 1 - 1 / nlat, nlat)))
    else:
        step = 180.0 / nlat
        header = {"CTYPE1": "CRLN-CAR", "CTYPE2": "CRLT-CAR", "CUNIT2": "deg"}
        expected_lat = np.linspace(-90 + step / 2, 90 - step / 2, nlat)
    header.update({"CUNIT1": "deg", "BUNIT": "G", "CRPIX1": 1.0, "CRVAL1": start + dlon / 2, "CDELT1": dlon,
                   "CRPIX2": (nlat + 1) / 2, "CRVAL2": 0.0, "CDELT2": step})
    if flip_lat:
        data = data[::-1]
        header["CDELT2"] = -step
    if flip_lon:
        data = data[:, ::-1]
        header["CRPIX1"] = float(nlon)
        header["CDELT1"] = -dlon
    m = pf.read_map(write_fits(folder / "m.fits", data, header))
    np.testing.assert_allclose(m.lat, expected_lat, atol=1e-9)
    assert np.all(np.diff(m.lon) > 0) and m.lon[0] < dlon and m.lon_edges[-1] - m.lon_edges[0] == pytest.approx(360)
    assert m.lat_edges[0] == -90 and m.lat_edges[-1] == 90
    # every pixel keeps its value: the file's row/column are recovered from the data
    row = np.rint(m.br // 400).astype(int)
    assert np.all(np.diff(row[:, 0]) != 0)
