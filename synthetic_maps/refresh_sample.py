"""Refresh the committed sample of the invented scenario from the generator's defaults.

    python synthetic_maps/refresh_sample.py            # generate the default scenario, then copy
    python synthetic_maps/refresh_sample.py --from DIR # copy from a scenario already generated

Copies the settings, the truth, the sunspot series, the noise-free polar series and four
maps: the first MSN-A map, one rotation seen by both instruments, and the last MSN-B map.
"""

from __future__ import annotations

import argparse
import json
import shutil
import tempfile
from pathlib import Path

from polarflux.synthetic import settings_for, write_scenario

HERE = Path(__file__).resolve().parent
FILES = ("scenario.toml", "truth.json", "sunspots.csv", "truth_series.csv")


def pick_maps(truth: dict) -> list[str]:
    maps = truth["maps"]
    a = [m for m in maps if "/MSN-A/" in m]
    b = [m for m in maps if "/MSN-B/" in m]
    both = sorted({Path(m).name.split("_cr")[1] for m in a} & {Path(m).name.split("_cr")[1] for m in b})
    middle = both[len(both) // 2]
    shared = [m for m in a + b if m.endswith("_cr" + middle)]
    return [a[0], *shared, b[-1]]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--from", dest="source", default=None, help="a scenario folder to copy from")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        source = Path(args.source) if args.source else Path(tmp)
        if args.source is None:
            write_scenario(source, settings_for("standard"))
        if (source / "scenario.toml").read_text() != settings_for("standard").to_toml():
            raise SystemExit(f"{source}: not the default scenario settings")
        truth = json.loads((source / "truth.json").read_text())
        for name in FILES:
            shutil.copyfile(source / name, HERE / name)
        shutil.rmtree(HERE / "maps", ignore_errors=True)
        for relative in pick_maps(truth):  # "maps/<instrument>/<file>"
            (HERE / relative).parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(source / relative, HERE / relative)
    print(f"sample refreshed in {HERE}")


if __name__ == "__main__":
    main()
