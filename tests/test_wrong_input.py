"""Every command, fed every wrong kind of input: one line naming the file and the problem, exit 2, no traceback.

The kinds: a synoptic map, a record, a transport run, a CSV of something else, a binary file, an empty
file, a missing file and a folder, each in every file slot of every command where it does not belong.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest

from polarflux.cli import main

SAMPLE = Path(__file__).resolve().parents[1] / "synthetic_maps"

RUN_TOML = """
[model]
nlat = 18
nlon = 36
[run]
years = 0.1
step_days = 5.0
save_every_days = 10.0
[initial]
dipole = 2.0
"""


@pytest.fixture(scope="module")
def kinds(tmp_path_factory):
    """One file of each kind (and the good inputs the other slots need)."""
    folder = tmp_path_factory.mktemp("kinds")
    maps = sorted((SAMPLE / "maps").rglob("*.fits"))
    good = {"map": folder / "map.fits"}
    shutil.copy(maps[0], good["map"])
    assert main(["measure", *map(str, maps), "--out", str(folder / "record.nc"), "--ledger", "none",
                 "--quiet", "--jobs", "1"]) == 0
    good["record"] = folder / "record.nc"
    (folder / "run.toml").write_text(RUN_TOML, encoding="utf-8")
    assert main(["transport", str(folder / "run.toml"), "--out", str(folder / "run.nc")]) == 0
    good["run"] = folder / "run.nc"
    good["toml"] = folder / "run.toml"
    good["sunspots"] = SAMPLE / "sunspots.csv"
    wrong = dict(good)
    (folder / "other.csv").write_text("station,temperature\nA,12.5\nB,13.0\n", encoding="utf-8")
    wrong["csv"] = folder / "other.csv"
    (folder / "noise.nc").write_bytes(np.random.default_rng(1).bytes(4000))
    wrong["binary"] = folder / "noise.nc"
    (folder / "empty.csv").write_bytes(b"")
    wrong["empty"] = folder / "empty.csv"
    wrong["missing"] = folder / "not-there.nc"
    (folder / "truth.json").write_text('{"cycles": [], "maps": []}\n', encoding="utf-8")
    wrong["json"] = folder / "truth.json"
    (folder / "a-folder.nc").mkdir()
    wrong["folder"] = folder / "a-folder.nc"
    return good, wrong


def _slots(good: dict, tmp: Path) -> dict[str, tuple]:
    """Command lines with one file slot each; the slot's own right kinds are not fed to it."""
    out = str(tmp / "out")
    return {
        "transport CONFIG": (lambda f: ["transport", f, "--out", out + ".nc"], {"toml"}),
        "events RECORD": (lambda f: ["events", f, "--out", out], {"record"}),
        "events --sunspots": (lambda f: ["events", str(good["record"]), "--sunspots", f, "--out", out], {"sunspots"}),
        "forecast RECORD": (lambda f: ["forecast", f, "--sunspots", str(good["sunspots"]), "--out", out,
                                       "--members", "10"], {"record"}),
        "forecast --sunspots": (lambda f: ["forecast", str(good["record"]), "--sunspots", f, "--out", out,
                                           "--members", "10"], {"sunspots"}),
        "forecast --calibration": (lambda f: ["forecast", str(good["record"]), "--sunspots", str(good["sunspots"]),
                                              "--calibration", f, "--out", out, "--members", "10"], set()),
        "plot polar": (lambda f: ["plot", "polar", f, "--out", out + ".png"], {"record"}),
        "plot butterfly": (lambda f: ["plot", "butterfly", f, "--out", out + ".png"], {"record", "run"}),
        "plot map": (lambda f: ["plot", "map", f, "--out", out + ".png"], {"map"}),
        "plot fan": (lambda f: ["plot", "fan", f, "--sunspots", str(good["sunspots"]), "--out", out + ".png"],
                     {"record"}),
        "plot --sunspots": (lambda f: ["plot", "fan", str(good["record"]), "--sunspots", f, "--out", out + ".png"],
                            {"sunspots"}),
        "hindcast RECORD": (lambda f: ["hindcast", f, "--sunspots", str(good["sunspots"]), "--out", out,
                                       "--members", "10", "--jobs", "1"], {"record"}),
        "hindcast --sunspots": (lambda f: ["hindcast", str(good["record"]), "--sunspots", f, "--out", out,
                                           "--members", "10", "--jobs", "1"], {"sunspots"}),
        "hindcast --truth": (lambda f: ["hindcast", str(good["record"]), "--sunspots", str(good["sunspots"]),
                                        "--truth", f, "--out", out, "--members", "10", "--jobs", "1"], {"json"}),
        "report RECORD": (lambda f: ["report", f, "--out", out + ".html"], {"record"}),
        "report --sunspots": (lambda f: ["report", str(good["record"]), "--sunspots", f, "--out", out + ".html"],
                              {"sunspots"}),
    }


WRONG_KINDS = ("map", "record", "run", "toml", "sunspots", "csv", "json", "binary", "empty", "missing", "folder")


def test_every_command_refuses_every_wrong_kind_in_one_line(kinds, tmp_path, capsys):
    good, wrong = kinds
    capsys.readouterr()
    checked, problems = 0, []
    for slot, (command, right) in _slots(good, tmp_path).items():
        for kind in WRONG_KINDS:
            if kind in right:
                continue
            path = str(wrong[kind])
            status = main(command(path))
            captured = capsys.readouterr()
            lines = [line for line in captured.err.splitlines() if line.strip()]
            checked += 1
            if (status != 2 or len(lines) != 1 or Path(path).name not in lines[0]
                    or "Traceback" in captured.err or captured.out.strip()):
                problems.append(f"{slot} <- {kind}: status {status}, stderr {captured.err!r}, "
                                f"stdout {captured.out[:200]!r}")
            for leftover in tmp_path.glob("out*"):
                problems.append(f"{slot} <- {kind}: left an output {leftover.name}")
                leftover.unlink()
    assert checked >= 100
    assert problems == [], "\n".join(problems)


def test_messages_say_what_the_file_is(kinds, tmp_path, capsys):
    """The line says what was found and what was expected, in plain words."""
    good, wrong = kinds
    capsys.readouterr()
    assert main(["plot", "polar", str(wrong["run"]), "--out", str(tmp_path / "x.png")]) == 2
    err = capsys.readouterr().err
    assert "transport run" in err and "expected a polar-field record" in err
    assert main(["events", str(good["record"]), "--sunspots", str(wrong["record"]), "--out", str(tmp_path / "e")]) == 2
    err = capsys.readouterr().err
    assert "polar-field record" in err and "expected a sunspot-number series" in err
    assert main(["forecast", str(wrong["binary"]), "--sunspots", str(good["sunspots"]),
                 "--out", str(tmp_path / "f")]) == 2
    assert "binary file" in capsys.readouterr().err


def test_an_existing_output_is_refused_in_command_words(kinds, tmp_path, capsys):
    good, _ = kinds
    target = tmp_path / "fig.png"
    target.write_bytes(b"keep me")
    assert main(["plot", "polar", str(good["record"]), "--out", str(target)]) == 2
    err = capsys.readouterr().err
    assert "--force" in err and "force=True" not in err and "fig.png" in err
    assert target.read_bytes() == b"keep me"


def test_a_sub_command_error_prints_the_sub_command_usage(kinds, tmp_path, capsys):
    good, _ = kinds
    with pytest.raises(SystemExit) as stop:
        main(["forecast", str(good["record"]), "--sunspots", str(good["sunspots"]), "--members", "3",
              "--out", str(tmp_path / "f")])
    assert stop.value.code == 2
    err = capsys.readouterr().err
    assert err.startswith("usage: polarflux forecast") and "--members 3" in err


@pytest.mark.parametrize("kind", ["record", "run", "csv", "binary", "empty", "missing", "folder"])
def test_measure_names_an_input_that_is_no_map_and_writes_nothing(kinds, tmp_path, capsys, kind):
    """A batch reports each bad input on its own line; with no map measured at all it writes nothing (exit 2)."""
    _, wrong = kinds
    out = tmp_path / "rec.csv"
    status = main(["measure", str(wrong[kind]), "--out", str(out), "--ledger", "none", "--jobs", "1"])
    err = capsys.readouterr().err
    assert status == 2 and not out.exists() and "Traceback" not in err
    assert Path(wrong[kind]).name in err.splitlines()[0]


def test_a_wrong_input_is_named_before_an_existing_output(kinds, tmp_path, capsys):
    """Fixing one error should not reveal another that was there all along: inputs are checked first."""
    good, wrong = kinds
    (tmp_path / "ev.json").write_text("{}")
    assert main(["events", str(good["record"]), "--sunspots", str(wrong["record"]), "--out", str(tmp_path / "ev")]) == 2
    err = capsys.readouterr().err
    assert "expected a sunspot-number series" in err and "exists already" not in err
