"""The command line: measure, demo, exit status, and the README's commands."""

from __future__ import annotations

import csv
import re
import subprocess
import sys
from pathlib import Path

import pytest

from polarflux.cli import main

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def maps(tiny_scenario):
    return tiny_scenario[0] / "maps"


def test_measure_folder_to_csv(maps, tmp_path, capsys):
    out = tmp_path / "record.csv"
    assert main(["measure", str(maps), "--out", str(out)]) == 0
    rows = list(csv.DictReader(open(out, newline="")))
    assert len(rows) == 6 and rows[0]["cap_deg"] == "60.0"
    err = capsys.readouterr().err
    assert "measured 6 of 6 maps (6 new, 0 from the ledger), 0 failed" in err
    assert "\r" not in err  # no progress bar when stderr is not a terminal


def test_measure_reports_bad_files_and_goes_on(maps, tmp_path, capsys):
    bad = tmp_path / "bad.fits"
    bad.write_text("not fits")
    out = tmp_path / "record.nc"
    status = main(["measure", str(maps), str(bad), "--out", str(out), "--cap", "55", "--fill", "profile"])
    err = capsys.readouterr().err
    assert status == 1
    assert re.search(r"^polarflux: .*bad.fits: not a readable FITS file", err, re.M)
    assert "measured 6 of 7 maps (6 new, 0 from the ledger), 1 failed" in err
    import xarray as xr

    with xr.open_dataset(out) as ds:
        assert ds.sizes["time"] == 6 and ds.attrs["cap_deg"] == 55.0


def test_existing_output_is_not_overwritten_without_force(maps, tmp_path, capsys):
    out = tmp_path / "keep.csv"
    out.write_text("precious\n")
    assert main(["measure", str(maps), "--out", str(out)]) == 2
    assert "add --force to replace it" in capsys.readouterr().err
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


def test_no_inputs_found_exits_2(tmp_path, capsys):
    assert main(["measure", str(tmp_path / "nothing*.fits"), "--out", str(tmp_path / "o.csv")]) == 2
    err = capsys.readouterr().err
    assert "nothing*.fits: no such file" in err and "no input files found" in err and "usage:" not in err
    assert not (tmp_path / "o.csv").exists()


def test_demo_writes_record_and_figure(tmp_path, capsys):
    out = tmp_path / "demo"
    small = ["--resolution", "low", "--cycles", "1", "--years", "0.6"]
    assert main(["demo", "--out", str(out), *small]) == 0
    text = capsys.readouterr().out
    assert re.search(r"measured (\d+) of \1 maps, 0 failed", text)
    assert "generated the invented scenario" in text and "outputs:" in text
    assert (out / "polar_record.csv").exists() and (out / "polar_record.nc").exists()
    assert (out / "polar_fields.png").stat().st_size > 10_000
    assert (out / "scenario" / "truth.json").exists()
    # a second run with the same settings reuses the scenario; a foreign folder is refused
    assert main(["demo", "--out", str(out), *small]) == 0
    assert "reusing the invented scenario" in capsys.readouterr().out
    foreign = tmp_path / "mine"
    foreign.mkdir()
    (foreign / "thesis.tex").write_text("x")
    assert main(["demo", "--out", str(foreign), *small]) == 2
    assert (foreign / "thesis.tex").exists()


def test_synth_writes_a_scenario_and_refuses_to_overwrite(tmp_path, capsys):
    out = tmp_path / "scen"
    args = ["synth", "--out", str(out), "--resolution", "low", "--cycles", "1", "--years", "0.3", "--seed", "3"]
    assert main(args) == 0
    assert "invented synoptic maps" in capsys.readouterr().out
    for name in ("truth.json", "truth_series.csv", "regions.csv", "sunspots.csv", "scenario.toml"):
        assert (out / name).exists()
    assert main(args) == 2
    assert main([*args, "--force"]) == 0


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


def test_readme_command_summary_lists_every_option_and_no_other():
    # the README's summary block against the parser itself: an option added without the README, or
    # left in the README after it went, fails here
    from polarflux.cli._parser import build_parser

    text = (ROOT / "README.md").read_text()
    block = text[text.index("polarflux measure INPUT"):]
    block = block[:block.index("```")]
    listed, current = {}, None
    for line in block.splitlines():
        start = re.match(r"polarflux (\w+)", line)
        if start:
            current = start.group(1)
        if current:
            listed.setdefault(current, set()).update(re.findall(r"--[a-z][a-z0-9-]*", line))
    commands = next(a for a in build_parser()._actions if a.__class__.__name__ == "_SubParsersAction").choices
    for name, sub in commands.items():
        options = {o for a in sub._actions for o in a.option_strings if o.startswith("--") and o != "--help"}
        assert listed.get(name) == options, (name, sorted(options ^ listed.get(name, set())))
