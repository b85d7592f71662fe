"""Mutation run over the core numerics: how many small plausible bugs the tests catch.

Each group below is one module (or the part of it that computes): its functions are
mutated by mutmut (operators, constants, comparisons, arguments, one at a time) and
each mutant is run against the group's own selection of fast test files; mutmut runs
only the tests that called the mutated function, stopping at the first failure. A
mutant that no test fails "survived"; every survivor is either killed by a test or
explained as equivalent in ``EQUIVALENT`` below (found by its changed line, so the
list survives edits elsewhere in the file).

Not part of CI and not run by pytest. From the repository root, with the dev extra:

    python bench/mutation.py [--jobs 2] [--groups geometry measure ...] [--out bench/mutation_survivors.md]

Every group runs in its own copy of the working tree (polarflux/, tests/, ...) under a
temporary folder, so the files being edited here are never touched; ``--rev HEAD``
copies a commit instead (others' edits in progress stay out). The summary
table, the run time, the load average seen during the run and every survivor are
written to ``--out``; the exit status is 1 if a survivor is neither killed nor
explained. mutmut mutates code inside undecorated functions only: module-level
constants (the Carrington rate, the smoothing weights) and the ``lru_cache``'d
per-grid helpers of measure.py are outside its reach; lines that raise an error
(message text) are not mutated either. polarflux's caches are emptied before every
test (``_mutation_plugin.py``), or a result cached by the unmutated code would hide
the mutant.
"""

from __future__ import annotations

import argparse
import io
import os
import shutil
import subprocess
import sys
import tarfile
import tempfile
import threading
import time
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
COPIED = ("polarflux", "tests", "pyproject.toml", "synthetic_maps")


@dataclass(frozen=True)
class Group:
    name: str
    path: str  # the module file
    functions: tuple[str, ...]  # "f" or "Class.method"; "*" for every function of the module
    tests: tuple[str, ...]  # pytest paths or node ids


def _events(*names: str) -> tuple[str, ...]:
    return tuple(f"tests/test_events.py::{n}" for n in names)


FAST_TRANSPORT = (
    "tests/test_transport.py::test_diffusion_of_zonal_harmonics_axisymmetric",
    "tests/test_transport.py::test_rigid_rotation_shifts_a_pattern_exactly",
    "tests/test_transport.py::test_differential_rotation_shifts_each_row_by_its_own_rate",
    "tests/test_transport.py::test_flow_and_diffusion_relax_to_the_closed_form_steady_state",
    "tests/test_transport.py::test_agrees_with_solve_ivp_within_the_second_order_time_error",
    "tests/test_transport_defaults.py",
)

GROUPS = (
    Group("geometry", "polarflux/geometry.py", ("*",),
          ("tests/test_measure.py", "tests/test_transport_inputs.py", "tests/test_mutants_geometry.py")),
    Group("measure", "polarflux/measure.py",
          ("measure_caps", "axial_dipole", "_lon_integrals", "_lon_widths", "_key", "_contiguous", "_cap_weights",
           "profile_measures", "fill_polar_gaps"),
          ("tests/test_measure.py", "tests/test_mutants_measure.py")),
    Group("profiles", "polarflux/transport/profiles.py", ("*",),
          FAST_TRANSPORT + ("tests/test_mutants_profiles.py",)),
    Group("model", "polarflux/transport/model.py",
          ("_Grid.__init__", "_latitude_operator", "FluxTransport._row_factor", "FluxTransport._crank_nicolson",
           "FluxTransport._spectral", "FluxTransport._field", "Stepper.__init__", "Stepper.step"),
          FAST_TRANSPORT + ("tests/test_mutants_model.py",)),
    Group("calibration", "polarflux/calibration.py", ("deming_through_origin", "_fit"),
          _events("test_deming_regression_against_a_known_slope") + ("tests/test_mutants_calibration.py",)),
    Group("events", "polarflux/events.py", ("find_cycle_extrema", "_cadence_years"),
          _events("test_minima_of_the_yearly_record_match_the_published_minima",
                  "test_a_series_cut_before_a_published_minimum_reports_no_minimum_at_the_cut",
                  "test_a_declining_phase_at_the_end_is_not_a_minimum") + ("tests/test_mutants_events.py",)),
    Group("timeseries", "polarflux/timeseries.py", ("smooth_13_month", "running_mean"),
          _events("test_smooth_13_month_is_the_standard_formula", "test_gaps_stay_gaps")
          + ("tests/test_mutants_timeseries.py",)),
    Group("precursor", "polarflux/precursor.py", ("*",),
          ("tests/test_precursor.py",
           "tests/test_forecast.py::test_precursor_fit_matches_statsmodels",
           "tests/test_forecast.py::test_predict_gives_scalars_for_a_scalar_and_arrays_for_an_array",
           "tests/test_forecast.py::test_leave_one_out_errors_are_refits_without_each_cycle",
           "tests/test_forecast.py::test_fewer_than_three_cycles_are_refused",
           "tests/test_mutants_precursor.py")),
)

#: Lines never mutated: raising an error (the message text is not numerics).
DO_NOT_MUTATE = (r"^\s*raise ",)

#: Survivors that no test can kill: (module file, function, the changed line as mutmut writes it,
#: stripped) -> why the mutant computes the same thing as the original.
EQUIVALENT: dict[tuple[str, str, str], str] = {}


def _module(path: str) -> str:
    return path[:-3].replace("/", ".")


def _pattern(group: Group, function: str) -> str:
    module = _module(group.path)
    if function == "*":
        return f"{module}.*"
    if "." in function:
        cls, method = function.split(".")
        return f"{module}.x\u01c1{cls}\u01c1{method}__mutmut_*"
    return f"{module}.x_{function}__mutmut_*"


def _function_of(name: str) -> str:
    """'polarflux.geometry.x_sine_edges__mutmut_3' -> 'sine_edges'; methods as 'Class.method'."""
    tail = name.rsplit(".", 1)[-1].split("__mutmut_")[0]
    if tail.startswith("x_"):
        return tail[2:]
    return ".".join(part for part in tail[1:].split("\u01c1") if part)


def _toml_list(values) -> str:
    return "[" + ", ".join('"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"' for v in values) + "]"


def _prepare(group: Group, folder: Path, rev: str | None) -> None:
    if rev:  # a committed state: others' edits in progress in the working tree stay out
        archive = subprocess.run(["git", "archive", "--format=tar", rev, "--", *COPIED], cwd=ROOT, check=True,
                                 capture_output=True).stdout
        with tarfile.open(fileobj=io.BytesIO(archive)) as tar:
            tar.extractall(folder, filter="data")
    for name in [] if rev else COPIED:
        source = ROOT / name
        if source.is_dir():
            shutil.copytree(source, folder / name, ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
        elif source.exists():
            shutil.copy2(source, folder / name)
    missing = [t.split("::")[0] for t in group.tests if not (folder / t.split("::")[0]).exists()]
    if missing:
        raise SystemExit(f"group {group.name}: test files missing: {', '.join(missing)}")
    with open(folder / "pyproject.toml", "a", encoding="utf-8") as f:
        f.write(
            "\n[tool.mutmut]\n"
            'source_paths = ["polarflux"]\n'
            f'only_mutate = ["{group.path}"]\n'
            f"do_not_mutate_patterns = {_toml_list(DO_NOT_MUTATE)}\n"
            f"pytest_add_cli_args_test_selection = {_toml_list(group.tests)}\n"
            'pytest_add_cli_args = ["-p", "no:cacheprovider", "-p", "_mutation_plugin"]\n'
            'also_copy = ["synthetic_maps"]\n'
        )


def _mutmut(folder: Path, *args: str, log: Path | None = None) -> str:
    command = [str(Path(sys.executable).with_name("mutmut")), *args]
    # the plugin that empties polarflux's per-grid caches before each test (see _mutation_plugin.py)
    path = os.pathsep.join(filter(None, [str(folder.parent / "_plugin"), os.environ.get("PYTHONPATH")]))
    env = dict(os.environ, PYTHONDONTWRITEBYTECODE="1", PYTHONPATH=path)
    if log is None:
        return subprocess.run(command, cwd=folder, env=env, check=True, capture_output=True, text=True).stdout
    with open(log, "w", encoding="utf-8") as out:
        done = subprocess.run(command, cwd=folder, env=env, stdout=out, stderr=subprocess.STDOUT, text=True)
    if done.returncode != 0:
        raise SystemExit(f"mutmut {' '.join(args[:1])} failed in {folder} (exit {done.returncode}); see {log}")
    return ""


def _changed_line(diff: str) -> str:
    added = [line[1:].strip() for line in diff.splitlines() if line.startswith("+") and not line.startswith("+++")]
    return " / ".join(added)


class LoadSampler(threading.Thread):
    """Samples the 1-minute load average every 15 s (two cores: above 2 the run waited for others)."""

    def __init__(self) -> None:
        super().__init__(daemon=True)
        self.samples: list[float] = []
        self._halt = threading.Event()

    def run(self) -> None:
        while not self._halt.wait(15.0):
            self.samples.append(os.getloadavg()[0])

    def stop(self) -> None:
        self._halt.set()


def run_group(group: Group, base: Path, jobs: int, rev: str | None = None) -> dict:
    folder = base / group.name
    folder.mkdir(parents=True)
    _prepare(group, folder, rev)
    patterns = [_pattern(group, f) for f in group.functions]
    start = time.monotonic()
    _mutmut(folder, "run", "--max-children", str(jobs), *patterns, log=base / f"{group.name}.log")
    seconds = time.monotonic() - start
    import fnmatch

    statuses = {}
    for line in _mutmut(folder, "results", "--all", "true").splitlines():
        name, _, status = line.strip().rpartition(": ")
        if name and any(fnmatch.fnmatchcase(name, p) for p in patterns):
            statuses[name] = status
    survivors = []
    for name, status in sorted(statuses.items(), key=lambda kv: (kv[0].split("__mutmut_")[0],
                                                                int(kv[0].rsplit("_", 1)[-1]))):
        if status == "killed":
            continue
        line = _changed_line(_mutmut(folder, "show", name))
        reason = EQUIVALENT.get((group.path, _function_of(name), line), "")
        survivors.append((name, status, line, reason))
    return {"group": group, "seconds": seconds, "statuses": statuses, "survivors": survivors}


def report(results: list[dict], loads: list[float], total_seconds: float, jobs: int, command: str) -> str:
    version = metadata.version("mutmut")
    lines = [
        "# Mutation run over the core numerics",
        "",
        f"Written by `{command}` (mutmut {version}, Python {sys.version.split()[0]}, "
        f"{jobs} workers) on {time.strftime('%Y-%m-%d %H:%M')}.",
        "",
        f"Whole run: {total_seconds / 60:.1f} min. Load average (1 min) during the run: "
        + (f"mean {sum(loads) / len(loads):.2f}, max {max(loads):.2f} over {len(loads)} samples "
           f"on {os.cpu_count()} cores" if loads else "not sampled (run too short)")
        + " (above the core count the run shared the machine and its times are inflated).",
        "",
        "| module | functions | mutants | killed | survived | timeout | no tests | other | equivalent | score | min |",
        "|---|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|",
    ]
    all_total = all_killed = all_equivalent = 0
    for r in results:
        g, st = r["group"], r["statuses"]
        counts = {k: sum(1 for v in st.values() if v == k) for k in ("killed", "survived", "timeout", "no tests")}
        other = len(st) - sum(counts.values())
        equivalent = sum(1 for s in r["survivors"] if s[3])
        total = len(st)
        score = counts["killed"] / total if total else float("nan")
        all_total, all_killed, all_equivalent = all_total + total, all_killed + counts["killed"], all_equivalent + equivalent
        functions = "all" if g.functions == ("*",) else ", ".join(g.functions)
        lines.append(f"| `{g.path}` | {functions} | {total} | {counts['killed']} | {counts['survived']} | "
                     f"{counts['timeout']} | {counts['no tests']} | {other} | {equivalent} | {score:.1%} | "
                     f"{r['seconds'] / 60:.1f} |")
    if all_total:
        lines += ["", f"Killed {all_killed} of {all_total} ({all_killed / all_total:.1%}); "
                  f"{all_equivalent} survivors explained as equivalent; killed among the rest: "
                  f"{all_killed / max(1, all_total - all_equivalent):.1%}."]
    lines += ["", "## Survivors", "",
              "Every mutant not killed (timeouts count as killed by mutmut's own rules only if listed so above), "
              "with its changed line and, if equivalent, why.", ""]
    for r in results:
        for name, status, line, reason in r["survivors"]:
            lines.append(f"- `{name}` ({status}): `{line}` — {reason or '**UNEXPLAINED**'}")
    lines += ["", "## Test selections", ""]
    for r in results:
        lines.append(f"- {r['group'].name}: " + ", ".join(f"`{t}`" for t in r["group"].tests))
    return "\n".join(lines) + "\n"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--jobs", type=int, default=2, help="mutants run at once (default 2)")
    parser.add_argument("--groups", nargs="+", choices=[g.name for g in GROUPS], help="only these groups")
    parser.add_argument("--out", type=Path, default=ROOT / "bench" / "mutation_survivors.md")
    parser.add_argument("--keep", action="store_true", help="keep the working copies (to inspect mutants)")
    parser.add_argument("--rev", help="mutate and test this git revision (e.g. HEAD) instead of the working tree")
    parser.add_argument("--existing-only", action="store_true",
                        help="leave out the tests/test_mutants_*.py files (the score before them)")
    args = parser.parse_args(argv)
    groups = [g for g in GROUPS if not args.groups or g.name in args.groups]
    if args.existing_only:
        groups = [Group(g.name, g.path, g.functions, tuple(t for t in g.tests if "test_mutants_" not in t))
                  for g in groups]
    base = Path(tempfile.mkdtemp(prefix="polarflux-mutation-"))
    (base / "_plugin").mkdir()
    shutil.copy2(Path(__file__).with_name("_mutation_plugin.py"), base / "_plugin")
    sampler = LoadSampler()
    sampler.start()
    start = time.monotonic()
    results = []
    try:
        for group in groups:
            print(f"{group.name}: mutating {group.path} ...", flush=True)
            r = run_group(group, base, args.jobs, args.rev)
            st = r["statuses"]
            killed = sum(1 for v in st.values() if v == "killed")
            print(f"    {killed}/{len(st)} killed, {len(r['survivors'])} not, {r['seconds']:.0f} s", flush=True)
            results.append(r)
    finally:
        sampler.stop()
        if args.keep:
            print(f"working copies kept in {base}")
        else:
            shutil.rmtree(base, ignore_errors=True)
    total = time.monotonic() - start
    command = "python bench/mutation.py" + (" " + " ".join(argv if argv is not None else sys.argv[1:])).rstrip()
    text = report(results, sampler.samples, total, args.jobs, command.strip())
    tmp = args.out.with_suffix(".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(args.out)
    print(text)
    unexplained = sum(1 for r in results for s in r["survivors"] if not s[3])
    print(f"written {args.out}; {unexplained} survivors unexplained; {total / 60:.1f} min")
    return 1 if unexplained else 0


if __name__ == "__main__":
    sys.exit(main())
