"""Whole archives: the ledger, resuming after a kill, process pools and a dask cluster."""

from __future__ import annotations

import csv
import os
import signal
import sqlite3
import subprocess
import sys
import time

import numpy as np
import pytest

import polarflux as pf
from polarflux.cli import main
from polarflux.ledger import Ledger
from polarflux.maps import write_map


def read_rows(path):
    with open(path, newline="") as handle:
        return sorted(csv.DictReader(handle), key=lambda r: r["source"])


def test_dask_local_cluster_gives_the_serial_results(tiny_scenario, tmp_path):
    from dask.distributed import LocalCluster

    folder, _ = tiny_scenario
    serial = pf.measure_archive([folder / "maps"], fill="profile")
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as cluster:
        distributed = pf.measure_archive([folder / "maps"], fill="profile", ledger=tmp_path / "l.sqlite",
                                         dask=cluster.scheduler_address)
    assert serial.drop_attrs().equals(distributed.drop_attrs())


def test_pool_and_ledger_runs_give_the_serial_results(tiny_scenario, tmp_path):
    folder, _ = tiny_scenario
    serial = pf.measure_archive([folder / "maps"])
    pooled = pf.measure_archive([folder / "maps"], jobs=2, ledger=tmp_path / "l.sqlite")
    again = pf.measure_archive([folder / "maps"], jobs=2, ledger=tmp_path / "l.sqlite")  # all from the ledger
    assert serial.drop_attrs().equals(pooled.drop_attrs()) and serial.drop_attrs().equals(again.drop_attrs())


def test_rerun_skips_known_maps_and_a_new_cap_measures_again(tiny_scenario, tmp_path, capsys):
    folder, _ = tiny_scenario
    ledger = str(tmp_path / "ledger.sqlite")
    bad = tmp_path / "extra" / "broken.fits"
    bad.parent.mkdir()
    bad.write_text("not a map")
    args = ["measure", str(folder / "maps"), str(bad), "--ledger", ledger, "--jobs", "1"]
    assert main([*args, "--out", str(tmp_path / "a.csv")]) == 1
    first = capsys.readouterr().err
    assert "(6 new, 0 from the ledger), 1 failed" in first and "broken.fits: not a readable FITS file" in first
    assert main([*args, "--out", str(tmp_path / "b.csv")]) == 1
    second = capsys.readouterr().err
    assert "(0 new, 6 from the ledger), 1 failed" in second
    # not tried again, but its reason is shown (not left in the ledger) with the way to try again
    earlier = second.split("failed in earlier runs")[1]
    assert "broken.fits: not a readable FITS file" in earlier and "--retry-failed" in second
    assert read_rows(tmp_path / "a.csv") == read_rows(tmp_path / "b.csv")
    assert main([*args, "--out", str(tmp_path / "r.csv"), "--retry-failed"]) == 1  # tried again: fails again
    retried = capsys.readouterr().err
    assert "failed in earlier runs" not in retried and "broken.fits: not a readable FITS file" in retried
    assert "(0 new, 6 from the ledger), 1 failed" in retried
    assert main([*args, "--out", str(tmp_path / "c.csv"), "--cap", "55"]) == 1
    assert "(6 new, 0 from the ledger)" in capsys.readouterr().err
    with sqlite3.connect(ledger) as db:
        assert db.execute("SELECT COUNT(*) FROM measurements").fetchone()[0] == 14  # 7 files x 2 settings


def test_default_ledger_lives_in_the_cache_folder(tiny_scenario, tmp_path, capsys):
    folder, _ = tiny_scenario
    assert main(["measure", str(folder / "maps"), "--out", str(tmp_path / "a.csv"), "--jobs", "1"]) == 0
    assert os.path.exists(os.path.join(os.environ["XDG_CACHE_HOME"], "polarflux", "ledger.sqlite"))
    assert main(["measure", str(folder / "maps"), "--out", str(tmp_path / "b.csv")]) == 0  # a new output reuses it
    assert "(0 new, 6 from the ledger)" in capsys.readouterr().err


def test_a_copied_map_is_known_by_its_content(tiny_scenario, tmp_path):
    folder, truth = tiny_scenario
    ledger = Ledger(tmp_path / "l.sqlite")
    original = str(folder / truth["maps"][0])
    copy = tmp_path / "copy.fits"
    copy.write_bytes(open(original, "rb").read())
    first = pf.record.measure_with_ledger([original], ledger)
    second = pf.record.measure_with_ledger([str(copy)], ledger)
    assert (first.measured, second.measured, second.reused) == (1, 0, 1)
    assert second.rows[0]["source"] == str(copy)  # the row names the file it was asked for
    ledger.close()


@pytest.fixture(scope="module")
def many_maps(tmp_path_factory):
    folder = tmp_path_factory.mktemp("many")
    rng = np.random.default_rng(0)
    for k in range(120):
        m = pf.SynopticMap.from_array(rng.normal(0, 5, (360, 720)), carrington_rotation=3000 + k,
                                      time=f"2060-01-{1 + k % 28:02d}T00:00:00")
        write_map(m, folder / f"m{k:03d}.fits")
    return folder


def test_a_killed_run_resumes_to_the_same_table(many_maps, tmp_path):
    ledger = tmp_path / "ledger.sqlite"
    command = [sys.executable, "-m", "polarflux", "measure", str(many_maps), "--jobs", "1", "--quiet",
               "--ledger", str(ledger)]
    process = subprocess.Popen([*command, "--out", str(tmp_path / "killed.csv")])
    deadline = time.time() + 60
    done = 0
    while time.time() < deadline and process.poll() is None:
        if ledger.exists():
            try:
                with sqlite3.connect(ledger, timeout=1) as db:
                    done = db.execute("SELECT COUNT(*) FROM measurements").fetchone()[0]
            except sqlite3.Error:
                done = 0
            if done >= 10:
                break
        time.sleep(0.01)
    process.send_signal(signal.SIGKILL)
    process.wait()
    assert 10 <= done < 120, "the run finished before it could be killed; make the maps bigger"
    assert not (tmp_path / "killed.csv").exists()  # outputs are written at the end, atomically
    resumed = subprocess.run([*command, "--out", str(tmp_path / "resumed.csv")], capture_output=True, text=True)
    assert resumed.returncode == 0, resumed.stderr
    clean = subprocess.run([*command[:-2], "--ledger", str(tmp_path / "fresh.sqlite"), "--out",
                            str(tmp_path / "clean.csv")], capture_output=True, text=True)
    assert clean.returncode == 0, clean.stderr
    rows, reference = read_rows(tmp_path / "resumed.csv"), read_rows(tmp_path / "clean.csv")
    assert len(rows) == 120 and len({r["source"] for r in rows}) == 120  # no duplicate, none missing
    assert rows == reference
