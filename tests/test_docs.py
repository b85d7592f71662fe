"""The README and the guide run as written: the demo command, every Python snippet, every command line.

The README's demo command runs once (as a new user would, from an empty folder); the README's
Python blocks and the guide's command lines then run inside the folder it wrote.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _blocks(path: Path, language: str) -> list[str]:
    return re.findall(rf"```{language}\n(.*?)```", path.read_text(encoding="utf-8"), re.S)


def _env() -> dict:
    env = dict(os.environ)
    env["PATH"] = os.path.dirname(sys.executable) + os.pathsep + env.get("PATH", "")
    env["MPLBACKEND"] = "Agg"
    return env


def _is_setup(line: str) -> bool:
    """Lines that make a virtual environment and install: CI does that part (.ci/run)."""
    return "venv" in line or "pip install" in line


@pytest.fixture(scope="module")
def demo_folder(tmp_path_factory):
    first = _blocks(ROOT / "README.md", "sh")[0]
    demo = [part.strip() for line in first.splitlines() for part in line.split("&&") if "polarflux demo" in part]
    assert demo, "README's first command does not run the demo"
    cwd = tmp_path_factory.mktemp("readme")
    done = subprocess.run(demo[0], shell=True, cwd=cwd, capture_output=True, text=True, env=_env())
    assert done.returncode == 0, done.stderr
    return cwd / "polarflux-demo", done


def test_readme_demo_command_runs(demo_folder):
    folder, done = demo_folder
    assert re.search(r"measured (\d+) of \1 maps, 0 failed", done.stdout)
    for name in ("polar_fields.png", "polar_record.nc", "report.html", "forecast.json"):
        assert (folder / name).exists(), name
    assert "Traceback" not in done.stderr and "Warning" not in done.stderr, done.stderr[-2000:]
    assert "dubious year" not in done.stderr


def test_readme_python_snippets_run_as_written(demo_folder):
    folder, _ = demo_folder
    blocks = _blocks(ROOT / "README.md", "python")
    assert len(blocks) >= 2
    for block in blocks:
        done = subprocess.run([sys.executable, "-c", block], cwd=folder, capture_output=True, text=True,
                              env=_env())
        assert done.returncode == 0, f"README snippet failed:\n{block}\n{done.stderr[-3000:]}"


def test_guide_command_lines_run_as_written(demo_folder):
    folder, _ = demo_folder
    lines = [line.split("#")[0].strip() if " # " in line else line.strip()
             for block in _blocks(ROOT / "docs" / "guide.md", "sh") for line in block.splitlines()]
    lines = [line for line in lines if line and not _is_setup(line)]
    assert len(lines) >= 10
    for line in lines:
        done = subprocess.run(line, shell=True, cwd=folder, capture_output=True, text=True, env=_env())
        assert done.returncode == 0, f"{line}\n{done.stderr[-2000:]}"
        assert "Traceback" not in done.stderr
