"""The command line: measure, demo, exit status, and the README's commands."""

from __future__ import annotations

import csv
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

from polarflux.cli import main
from polarflux.demo import write_demo_archive

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def maps(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cli") / "maps"
    write_demo_archive(folder, n_maps=4, seed=3, nlat=90, nlon=180)
    return folder


def test_measure_folder_to_csv(maps, tmp_path, capsys):
    out = tmp_path / "record.csv"
    assert main(["measure", str(maps), "--out", str(out)]) == 0
    rows = list(csv.DictReader(open(out, newline="")))
    assert len(rows) == 4 and rows[0]["cap_deg"] == "60.0"
    err = capsys.readouterr().err
    assert "measured 4 of 4 maps, 0 failed" in err
    assert "\r" not in err  # no progress bar when stderr is not a terminal


def test_measure_reports_bad_files_and_goes_on(maps, tmp_path, capsys):
    bad = tmp_path / "bad.fits"
    bad.write_text("not fits")
    out = tmp_path / "record.nc"
    status = main(["measure", str(maps), str(bad), "--out", str(out), "--cap", "55", "--fill", "profile"])
    err = capsys.readouterr().err
    assert status == 1
    assert re.search(r"^polarflux: .*bad.fits: not a readable FITS file", err, re.M)
    assert "measured 4 of 5 maps, 1 failed" in err
    import xarray as xr

    with xr.open_dataset(out) as ds:
        assert ds.sizes["time"] == 4 and ds.attrs["cap_deg"] == 55.0


def test_existing_output_is_not_overwritten_without_force(maps, tmp_path, capsys):
    out = tmp_path / "keep.csv"
    out.write_text("precious\n")
    assert main(["measure", str(maps), "--out", str(out)]) == 2
    assert "pass --force" in capsys.readouterr().err
    assert out.read_text() == "precious\n"
    assert main(["measure", str(maps), "--out", str(out), "--force"]) == 0
    assert out.read_text().startswith("source,instrument")


@pytest.mark.parametrize(
    "args",
    [["measure", "--out", "x.csv"], ["measure", "m.fits", "--out", "x.txt"], ["measure", "m.fits", "--out",
     "x.csv", "--cap", "95"], ["frobnicate"]],
)
def test_bad_usage_exits_2(args, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    with pytest.raises(SystemExit) as exc:
        main(args)
    assert exc.value.code == 2


def test_no_inputs_found_exits_2(tmp_path):
    with pytest.raises(SystemExit) as exc:
        main(["measure", str(tmp_path / "nothing*.fits"), "--out", str(tmp_path / "o.csv")])
    assert exc.value.code == 2
    assert not (tmp_path / "o.csv").exists()


def test_demo_writes_record_and_figure(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out), "--maps", "5"]) == 0
    text = capsys.readouterr().out
    assert "measured 5 of 5 maps, 0 failed" in text
    assert (out / "polar_record.csv").exists() and (out / "polar_record.nc").exists()
    assert (out / "polar_fields.png").stat().st_size > 10_000
    assert len(list((out / "maps").glob("*.fits"))) == 5
    # a second run replaces its own folder; a foreign folder is refused
    assert main(["demo", "--out", str(out), "--maps", "3"]) == 0
    assert len(list((out / "maps").glob("*.fits"))) == 3
    foreign = tmp_path / "mine"
    foreign.mkdir()
    (foreign / "thesis.tex").write_text("x")
    assert main(["demo", "--out", str(foreign)]) == 2
    assert (foreign / "thesis.tex").exists()


def test_python_dash_m_runs_the_command():
    done = subprocess.run([sys.executable, "-m", "polarflux", "--version"], capture_output=True, text=True)
    assert done.returncode == 0 and done.stdout.startswith("polarflux ")


def _readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text()
    return re.findall(r"```(?:sh|bash)\n(.*?)```", text, re.S)


def test_readme_test_command_is_what_ci_runs():
    ci = (ROOT / ".ci" / "run").read_text()
    blocks = _readme_commands()
    test_lines = [line.strip() for block in blocks for line in block.splitlines() if "pytest" in line]
    assert test_lines, "README gives no test command"
    command = test_lines[0].split("&&")[-1].strip()
    assert command in ci


def test_readme_demo_command_runs(tmp_path):
    # The README's first block installs and runs the demo; run its demo part here.
    first = _readme_commands()[0]
    demo = [part.strip() for line in first.splitlines() for part in line.split("&&") if "polarflux demo" in part]
    assert demo, "README's first command does not run the demo"
    env = dict(os.environ)
    bindir = os.path.dirname(sys.executable)
    env["PATH"] = bindir + os.pathsep + env.get("PATH", "")
    done = subprocess.run(demo[0], shell=True, cwd=tmp_path, capture_output=True, text=True, env=env)
    assert done.returncode == 0, done.stderr
    assert "measured 27 of 27 maps, 0 failed" in done.stdout
