"""Archive measurement: the record Dataset, CSV/netCDF output, and failures that do not stop a batch."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest

import polarflux as pf
from polarflux.record import CSV_COLUMNS, expand_inputs, measure_file

DESIGN_COLUMNS = (
    "source, instrument, carrington_rotation, time, cap_deg, north_signed_flux_mx, "
    "north_unsigned_flux_mx, north_mean_field_g, north_coverage, south_signed_flux_mx, "
    "south_unsigned_flux_mx, south_mean_field_g, south_coverage, axial_dipole_g"
).split(", ")


@pytest.fixture(scope="module")
def archive(tiny_scenario):
    folder, truth = tiny_scenario
    paths = sorted((folder / "maps").rglob("*.fits"))
    assert len(paths) == 6
    return folder, paths


def test_csv_columns_are_the_public_contract():
    assert list(CSV_COLUMNS[: len(DESIGN_COLUMNS)]) == DESIGN_COLUMNS


def test_measure_archive_dataset(archive):
    folder, paths = archive
    ds = pf.measure_archive([folder / "maps"], cap_latitude=60, fill="none")
    assert dict(ds.sizes) == {"time": 6, "hemisphere": 2, "band": 30}  # 1-degree bands from 60 to 90
    assert list(ds["hemisphere"].values) == ["north", "south"]
    assert ds["signed_flux"].attrs["units"] == "Mx" and ds["mean_field"].attrs["units"] == "G"
    assert ds["axial_dipole"].dims == ("time",)
    assert np.all(np.diff(ds["time"].values).astype(np.int64) > 0)
    assert list(ds["carrington_rotation"].values) == sorted(ds["carrington_rotation"].values)
    # Each entry is the measure of its own map.
    m = pf.read_map(paths[2])
    caps = pf.measure_caps(m, 60)
    i = list(ds["source"].values).index(str(paths[2]))
    assert ds["signed_flux"].values[i, 0] == caps.north.signed_flux.value
    assert ds["axial_dipole"].values[i] == pf.axial_dipole(m).value
    assert ds.attrs["failed_count"] == 0


def test_parallel_gives_the_serial_record(archive):
    folder, _ = archive
    serial = pf.measure_archive([folder / "maps"], jobs=1, fill="profile")
    parallel = pf.measure_archive([folder / "maps"], jobs=2, fill="profile")
    assert serial.equals(parallel)


def test_bad_file_is_listed_and_the_rest_measured(archive, tmp_path):
    folder, paths = archive
    broken = tmp_path / "broken.fits"
    broken.write_bytes(open(paths[0], "rb").read()[:4000])
    ds = pf.measure_archive([*paths, broken, tmp_path / "absent*.fits"])
    assert ds.sizes["time"] == 6
    assert ds.attrs["failed_count"] == 2
    lines = ds.attrs["failures"].splitlines()
    assert any("broken.fits: not a readable FITS file" in line for line in lines)
    assert any("absent*.fits: no such file" in line for line in lines)


def test_csv_and_netcdf_round_trip(archive, tmp_path):
    folder, _ = archive
    ds = pf.measure_archive([folder / "maps"])
    csv_path = pf.write_record(ds, tmp_path / "r.csv")
    nc_path = pf.write_record(ds, tmp_path / "r.nc")
    with open(csv_path, newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert len(rows) == 6 and list(rows[0]) == list(CSV_COLUMNS)
    assert float(rows[0]["north_mean_field_g"]) == ds["mean_field"].values[0, 0]
    for path in (csv_path, nc_path):
        back = pf.read_record(path)
        np.testing.assert_array_equal(back["signed_flux"].values, ds["signed_flux"].values)
        np.testing.assert_array_equal(back["time"].values.astype("datetime64[ms]"),
                                      ds["time"].values.astype("datetime64[ms]"))
        assert back["mean_field"].attrs["units"] == "G"
        assert back["carrington_rotation"].dtype.kind == "i"
        np.testing.assert_array_equal(back["carrington_rotation"].values, ds["carrington_rotation"].values)
    with pytest.raises(pf.OutputExistsError):
        pf.write_record(ds, csv_path)
    pf.write_record(ds, csv_path, force=True)


def test_expand_inputs_folders_patterns_and_missing(archive, tmp_path):
    folder, paths = archive
    files, problems = expand_inputs([folder / "maps", str(folder / "maps" / "*" / "*.fits"), tmp_path / "none"])
    assert files == [str(p) for p in paths]  # duplicates removed, stable order
    assert len(problems) == 1 and "none" in str(problems[0])


def test_measure_file_row_has_every_column(archive):
    _, paths = archive
    row = measure_file(str(paths[0]))
    assert set(CSV_COLUMNS) <= set(row)


def test_the_same_map_twice_is_measured_once_and_named(tmp_path, capsys):
    """A copy and a gzip of a map are one map: one row, and both extra files named as duplicates."""
    import gzip
    import shutil

    from polarflux.cli import main

    sample = sorted((Path(__file__).resolve().parents[1] / "synthetic_maps" / "maps").rglob("*.fits"))
    folder = tmp_path / "maps"
    folder.mkdir()
    for path in sample:
        shutil.copy(path, folder / path.name)
    shutil.copy(sample[0], folder / "copy_of_first.fits")
    with open(sample[1], "rb") as src, gzip.open(folder / (sample[1].name + ".gz"), "wb") as dst:
        dst.write(src.read())
    out = tmp_path / "rec.csv"
    assert main(["measure", str(folder), "--out", str(out), "--ledger", "none", "--jobs", "1"]) == 0
    err = capsys.readouterr().err
    rows = out.read_text().strip().splitlines()[1:]
    assert len(rows) == len(sample)
    assert "the same map as" in err and "2 duplicate file(s)" in err
    record = pf.read_record(out)
    assert record.sizes["time"] == len(sample)
