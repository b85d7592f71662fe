"""The transport command and its TOML configuration."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import polarflux as pf
from polarflux.cli import main
from polarflux.maps import write_map
from polarflux.transport.config import load_run

GOOD = """
[model]
nlat = 36
nlon = 72
diffusivity = 300.0
flow_speed = 12.0
rotation = "default"
decay_time = 8.0

[run]
years = 1.0
step_days = 5.0
save_every_days = 50.0
cap_latitude = 65.0

[initial]
dipole = 4.0

[[region]]
time = 0.2
latitude = 18.0
longitude = 80.0
flux = 2e22
tilt = "joy"

[[region]]
time = 0.4
latitude = -12.0
longitude = 200.0
flux = -1e22
separation = 4.0
tilt = 3.0
"""


def write(tmp_path, text, name="run.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_config_builds_the_model_it_describes(tmp_path):
    job = load_run(write(tmp_path, GOOD))
    m = job.model
    assert (m.grid.nlat, m.grid.nlon, m.diffusivity, m.flow_speed, m.decay_time) == (36, 72, 300.0, 12.0, 8.0)
    assert len(job.regions) == 2 and job.regions[0].tilt == pytest.approx(9.0)
    assert job.settings["cap_latitude"] == 65.0
    direct = m.run(job.initial, years=1.0, step_days=5.0, save_every_days=50.0, cap_latitude=65.0,
                   sources=job.regions)
    assert job.run().equals(direct)


def test_transport_command_writes_netcdf(tmp_path, capsys):
    out = tmp_path / "run.nc"
    assert main(["transport", str(write(tmp_path, GOOD)), "--out", str(out)]) == 0
    assert "axial dipole" in capsys.readouterr().out
    with xr.open_dataset(out) as ds:
        assert ds.br.dims == ("time", "lat", "lon") and ds.br.attrs["units"] == "G"
        assert ds.attrs["cap_deg"] == 65.0
    assert main(["transport", str(write(tmp_path, GOOD)), "--out", str(out)]) == 2  # no silent overwrite


def test_initial_map_path_is_relative_to_the_config(tmp_path):
    m = pf.SynopticMap.from_array(np.full((60, 120), 2.0))
    write_map(m, tmp_path / "start.fits")
    job = load_run(write(tmp_path, '[model]\nnlat = 30\nnlon = 60\n[initial]\nmap = "start.fits"\n'))
    np.testing.assert_allclose(job.model.initial_field(job.initial), 2.0, rtol=1e-6)


@pytest.mark.parametrize(
    "text,message",
    [
        ("[model]\nspeed = 3\n[initial]\ndipole = 1\n", "unknown key.*speed"),
        ("[modle]\n[initial]\ndipole = 1\n", "unknown section.*modle"),
        ("[model]\nnlat = 'many'\n[initial]\ndipole = 1\n", "nlat.*whole number"),
        ("[model]\ndiffusivity = -5.0\n[initial]\ndipole = 1\n", "diffusivity"),
        ("[run]\nyears = 1\n", r"\[initial\] is missing"),
        ("[initial]\ndipole = 1\nuniform = 2\n", "exactly one of"),
        ("[initial]\ndipole = 1\n[[region]]\ntime = 0.1\nlatitude = 10\n", "lacks longitude, flux"),
        ("[initial]\ndipole = 1\n[[region]]\ntime = 0.1\nlatitude = 100\nlongitude = 0\nflux = 1e21\n",
         r"latitude = 100.0 must be degrees strictly between -90 and 90"),
        ("[initial]\ndipole = 1\n[[region]]\ntime = 0.1\nlatitude = 10\nlongitude = 0\nflux = 1e21\ntilt = 'x'\n",
         "tilt"),
        ("this is = = not toml", "not a TOML run description: not valid TOML"),
        ("[run]\nyears = -1\n[initial]\ndipole = 1\n", r"\[run\] years = -1.0 must be a positive number of years"),
        ("[run]\nstep_days = 0\n[initial]\ndipole = 1\n", r"\[run\] step_days = 0.0 must be a positive number"),
        ("[run]\ncap_latitude = 90\n[initial]\ndipole = 1\n", r"cap_latitude = 90.0 must be degrees strictly"),
        ("[model]\ndecay_time = -2\n[initial]\ndipole = 1\n",
         r"\[model\] decay_time = -2 must be a positive number of years, or \"none\" \(or left out\)"),
        ("[model]\ndecay_time = true\n[initial]\ndipole = 1\n", r"decay_time = true must be a positive number"),
        ("[model]\nrotation = \"fast\"\n[initial]\ndipole = 1\n",
         r"\[model\] rotation = \"fast\" must be \"default\", \"none\" or three numbers"),
        ("[model]\nnlat = 2\n[initial]\ndipole = 1\n", r"\[model\] nlat = 2 must be a whole number, at least 4"),
        ("[model]\naxisymmetric = 1\n[initial]\ndipole = 1\n", "axisymmetric = 1 must be true or false"),
        ("[initial]\nmap = \"m.fits\"\nfield = \"radiall\"\n", r"field = \"radiall\" must be \"radial\" or \"los\""),
        ("[initial]\ndipole = 1\n[[region]]\ntime = -0.1\nlatitude = 10\nlongitude = 0\nflux = 1e21\n",
         r"\[\[region\]\] number 1 time = -0.1 must be zero or later"),
        ("[initial]\ndipole = 1\n[[region]]\ntime = 0.1\nlatitude = 10\nlongitude = 0\nflux = 1e21\nwidth = 0\n",
         r"\[\[region\]\] number 1 width = 0.0 must be positive degrees"),
    ],
)
def test_bad_configs_name_the_file_and_the_key(tmp_path, text, message):
    path = write(tmp_path, text, "bad.toml")
    with pytest.raises(pf.SettingsError, match=f"bad.toml: .*{message}") as caught:
        load_run(path)
    words = str(caught.value).split(" (")[0]  # the TOML parser's own words come in brackets
    # TOML words, not Python's: no None/True/False, no keyword=value, no single-quoted reprs
    assert "\n" not in words and not any(w in words for w in ("None", "True", "False", "force", "'"))
    assert main(["transport", str(path), "--out", str(tmp_path / "x.nc")]) == 2
    assert not (tmp_path / "x.nc").exists()


def test_the_readme_config_example_uses_the_real_keys(tmp_path):
    import re
    from pathlib import Path

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text()
    block = re.search(r"```toml\n(.*?)```", readme, re.S).group(1)
    block = block.replace('map = "cr2400.fits"', "dipole = 5.0").replace('field = "radial"', "")
    job = load_run(write(tmp_path, block))
    assert job.model.grid.nlat == 180 and job.model.decay_time == 5.0 and len(job.regions) == 1


REGIONS_AFTER_THE_END = """
[run]
years = 1.0
step_days = 5.0
[initial]
dipole = 1.0
[[region]]
time = 0.5
latitude = 15.0
longitude = 10.0
flux = 1e22
[[region]]
time = 1.0
latitude = -15.0
longitude = 10.0
flux = 1e22
"""


def test_a_region_after_the_end_of_the_run_is_refused(tmp_path, capsys):
    path = write(tmp_path, REGIONS_AFTER_THE_END, "late.toml")
    with pytest.raises(pf.SettingsError) as caught:
        load_run(path)
    message = str(caught.value)
    assert message.startswith(str(path) + ": [[region]] number 2 has time = 1, at or after the end of the run")
    assert "[run] years = 1)" in message and "\n" not in message
    assert main(["transport", str(path), "--out", str(tmp_path / "late.nc")]) == 2
    assert "[[region]] number 2" in capsys.readouterr().err
    assert not (tmp_path / "late.nc").exists()
    inside = write(tmp_path, REGIONS_AFTER_THE_END.replace("time = 1.0", "time = 0.99"), "inside.toml")
    job = load_run(inside)
    assert len(job.regions) == 2 and job.run().attrs["regions"] == 2  # both deposited, both counted


def _not_toml_files(tmp_path):
    """Each wrong kind of file given as a TOML run, with the words its message must hold."""
    record = tmp_path / "record.nc"
    xr.Dataset({"north_mean_field": ("time", np.zeros(3))}).to_netcdf(record, engine="netcdf4")
    fits = tmp_path / "map.fits"
    write_map(pf.SynopticMap.from_array(np.zeros((20, 40))), fits)
    binary = tmp_path / "blob.toml"
    binary.write_bytes(bytes(range(256)) * 4)
    empty = tmp_path / "empty.toml"
    empty.write_bytes(b"")
    csv = tmp_path / "sunspots.csv"
    csv.write_text("time,value\n2020.5,31.0\n")
    folder = tmp_path / "folder"
    folder.mkdir()
    return [(record, "a netCDF-4/HDF5 file, not a TOML run description"),
            (fits, "a FITS file, not a TOML run description"),
            (binary, "a binary file, not a TOML run description"),
            (empty, "empty file, not a TOML run description"),
            (csv, "not a TOML run description: not valid TOML"),
            (folder, "a folder, not a TOML run description"),
            (tmp_path / "missing.toml", "no such file")]


def test_files_that_are_not_toml_runs_are_one_line_errors(tmp_path, capsys):
    for path, words in _not_toml_files(tmp_path):
        with pytest.raises(pf.SettingsError) as caught:
            load_run(path)
        message = str(caught.value)
        assert message.startswith(f"{path}: ") and words in message and "\n" not in message
        assert main(["transport", str(path), "--out", str(tmp_path / "x.nc")]) == 2
        err = capsys.readouterr().err
        assert str(path) in err and words in err and "Traceback" not in err
        assert not (tmp_path / "x.nc").exists()
