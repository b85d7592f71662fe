"""Data cubes of realizations (model-ensemble maps) through measure: one plane, or all with their spread.

Reference: each plane holds an analytic polar field a_k sin^8(latitude) (odd in latitude),
whose cap mean has the closed form a_k (1 - s0^9) / (9 (1 - s0)), s0 = sin(60 deg); the
mean and sample standard deviation over the planes are computed here from those closed
forms (numpy), not by polarflux.
"""

import csv

import numpy as np
import pytest
from conftest import cea_header, write_fits

import polarflux as pf
from polarflux.cli import main

AMPLITUDES = np.array([8.0, 9.5, 10.0, 11.0, 12.5])


def closed_form_mean(a, cap=60.0):
    s0 = np.sin(np.deg2rad(cap))
    return a * (1 - s0**9) / (9 * (1 - s0))


@pytest.fixture()
def cube(tmp_path):
    grid = pf.SynopticMap.from_array(np.zeros((360, 720)))
    s = np.sin(np.deg2rad(grid.lat))
    shape = np.sign(s) * np.abs(s) ** 8
    data = np.stack([np.repeat((a * shape)[:, None], 720, axis=1) for a in AMPLITUDES]).astype(np.float64)
    # a model product's header: no DATE-OBS, its time in T_REC, the rotation in CAR_ROT
    header = cea_header(360, 720, CAR_ROT=2450, T_REC="2043-05-02T12:00:00", INSTRUME="ENSEMBLE-X")
    del header["DATE-OBS"]
    return write_fits(tmp_path / "ensemble.fits", data, header)


def read_rows(path):
    with open(path, newline="") as handle:
        return list(csv.DictReader(handle))


def test_all_planes_give_the_mean_and_the_spread(cube, tmp_path):
    out = tmp_path / "record.csv"
    assert main(["measure", cube, "--planes", "all", "--out", str(out), "--ledger", "none", "--quiet"]) == 0
    (row,) = read_rows(out)
    truth = closed_form_mean(AMPLITUDES)
    # pixel-centre samples of sin^8 on 360 rows: within 1e-3 of the closed form
    assert float(row["north_mean_field_g"]) == pytest.approx(truth.mean(), rel=1e-3)
    assert float(row["south_mean_field_g"]) == pytest.approx(-truth.mean(), rel=1e-3)
    assert float(row["north_spread_g"]) == pytest.approx(np.std(truth, ddof=1), rel=1e-3)
    assert float(row["planes"]) == 5
    assert row["instrument"] == "ENSEMBLE-X" and row["carrington_rotation"] == "2450"
    assert row["time"].startswith("2043-05-02T12:00")


def test_one_plane(cube, tmp_path):
    out = tmp_path / "record.csv"
    assert main(["measure", cube, "--plane", "3", "--out", str(out), "--ledger", "none", "--quiet"]) == 0
    (row,) = read_rows(out)
    assert float(row["north_mean_field_g"]) == pytest.approx(closed_form_mean(AMPLITUDES[3]), rel=1e-3)
    assert row["north_spread_g"] == "nan" and float(row["planes"]) == 1


def test_a_cube_without_a_plane_is_named_and_the_rest_goes_on(cube, tmp_path, capsys):
    plain = write_fits(tmp_path / "plain.fits", np.ones((90, 180), np.float32), cea_header(90, 180))
    out = tmp_path / "record.csv"
    assert main(["measure", cube, plain, "--out", str(out), "--ledger", "none"]) == 1
    err = capsys.readouterr().err
    assert "ensemble.fits: a cube of 5 maps" in err and "--plane N" in err and "--planes all" in err
    assert len(read_rows(out)) == 1


def test_a_plane_outside_the_cube_and_a_negative_plane(cube, tmp_path, capsys):
    out = tmp_path / "record.csv"
    assert main(["measure", cube, "--plane", "9", "--out", str(out), "--ledger", "none"]) == 2
    assert "ensemble.fits" in capsys.readouterr().err and not out.exists()
    with pytest.raises(SystemExit) as stop:
        main(["measure", cube, "--plane", "-1", "--out", str(out)])
    assert stop.value.code == 2
    assert "--plane -1" in capsys.readouterr().err


def test_planes_through_the_library_and_the_ledger(cube, tmp_path):
    record = pf.measure_archive([cube], plane="all", ledger=tmp_path / "ledger.sqlite")
    again = pf.measure_archive([cube], plane="all", ledger=tmp_path / "ledger.sqlite")
    one = pf.measure_archive([cube], plane=0, ledger=tmp_path / "ledger.sqlite")
    assert int(record["planes"].values[0]) == 5 and int(one["planes"].values[0]) == 1
    np.testing.assert_allclose(again["mean_field"].values, record["mean_field"].values)
    assert one["mean_field"].values[0, 0] == pytest.approx(closed_form_mean(AMPLITUDES[0]), rel=1e-3)
    assert record["spread"].values[0, 0] > 0
