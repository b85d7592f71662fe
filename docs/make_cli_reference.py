"""Write docs/cli.md from the polarflux command's own parser: python docs/make_cli_reference.py"""

from pathlib import Path

from polarflux.cli import command_reference

if __name__ == "__main__":
    target = Path(__file__).resolve().parent / "cli.md"
    target.write_text(command_reference(), encoding="utf-8")
    print(f"written {target}")
