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
         "latitude 100"),
        ("[initial]\ndipole = 1\n[[region]]\ntime = 0.1\nlatitude = 10\nlongitude = 0\nflux = 1e21\ntilt = 'x'\n",
         "tilt"),
        ("this is = = not toml", "not valid TOML"),
    ],
)
def test_bad_configs_name_the_file_and_the_key(tmp_path, text, message):
    path = write(tmp_path, text, "bad.toml")
    with pytest.raises(pf.SettingsError, match=f"bad.toml: .*{message}"):
        load_run(path)
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
