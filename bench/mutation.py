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

_SIN90 = "np.sin(np.deg2rad(+-90.0)) is exactly +-1.0 in float64: the line only states it"
_TWO_D = "the only caller passes 2-D arrays, where axis +1 is axis -1 and shape[:+1] is shape[:-1]"
_AS_FLOAT64 = "np.dtype(None) is float64: the same conversion"
_PROMOTED = ("the values only meet float64 arrays, which promote them exactly (float32 and integers are exact "
             "in float64), before any arithmetic")
_NEGLIGIBLE_CUT = ("moves the cut for negligible numbers (1e-30 of the largest) by a factor near one or onto its "
               "boundary: what changes lies 14 orders below round-off")
_SAME_CACHE = "lon_grid is the map's own _lon_grid, which the callee looks up itself when not given"
_STRICT = "both sequences have the same length by construction, so strict only checks what always holds"
_COPY = "the filled pixels are a new array already: copying it again or not changes nothing"
_ZERO_ROWS = "the rows this adds or keeps have cap weight exactly 0 (clip(c) - clip(c)), so the sums are the same"
_NEVER_EMPTY = "unreachable: 0 < cap < 90, so the polar row always has a positive cap weight"
_UNREAD = "overwritten before use: rows without data get the profile value whenever the cap holds any data"
_SYMMETRIC = "Student t is symmetric: the draw has the same distribution (the contract) either way"
_STATISTICAL = ("another seed or one resample more is an equally valid bootstrap: no reference can prefer one "
                "(the seed stays fixed; test_bootstrap_is_reproducible)")

#: Survivors that no test can kill: (module file, function, the changed line as mutmut writes it,
#: stripped[, the unchanged line above it, where two mutants write the same line]) -> why the mutant
#: computes the same thing as the original.
EQUIVALENT: dict[tuple[str, ...], str] = {
    ("polarflux/geometry.py", "sine_edges", "s[lat_edges_deg == +90.0] = -1.0"): _SIN90,
    ("polarflux/geometry.py", "sine_edges", "s[lat_edges_deg == -91.0] = -1.0"): _SIN90,
    ("polarflux/geometry.py", "sine_edges", "s[lat_edges_deg == 91.0] = 1.0"): _SIN90,
    ("polarflux/geometry.py", "_cumulative", "moved = np.moveaxis(values * widths, axis, +1)"): _TWO_D,
    ("polarflux/geometry.py", "_cumulative", "out = np.zeros(moved.shape[:+1] + (moved.shape[-1] + 1,))"): _TWO_D,
    ("polarflux/geometry.py", "_cumulative", "out = np.zeros(moved.shape[:-1] + (moved.shape[+1] + 1,))"): _TWO_D,
    ("polarflux/geometry.py", "_cumulative", "np.cumsum(moved, axis=+1, out=out[..., 1:])"): _TWO_D,
    ("polarflux/geometry.py", "_cumulative", "return np.moveaxis(out, +1, axis)"): _TWO_D,
    ("polarflux/geometry.py", "regrid_conservative", "values = np.asarray(values, dtype=None)"): _PROMOTED,
    ("polarflux/geometry.py", "regrid_conservative", "values = np.asarray(values, )"): _PROMOTED,
    ("polarflux/geometry.py", "regrid_conservative", "return np.diff(at_edges, ) / np.diff(dst_lon)[None, :]"):
        "np.diff's default axis is the last: axis 1 of the 2-D array",
    ("polarflux/geometry.py", "_interp_rows",
     'index = np.clip(np.searchsorted(x, x_new, side="right") - 1, None, len(x) - 2)'):
        "x_new never lies below x[0]: latitude sines both start at exactly -1, longitudes are first reduced into "
        "the source's period (no grid offset on a 0.1-degree lattice gives one below)",
    ("polarflux/geometry.py", "_interp_rows", "index = np.clip(np.searchsorted(x, x_new, ) - 1, 0, len(x) - 2)"):
        "at an x_new equal to a source edge the other interval gives frac exactly 1 and the same table value",
    ("polarflux/measure.py", "_key", "return np.ascontiguousarray(edges, dtype=None).tobytes()"):
        "a map's edges are float64 already (SynopticMap converts them)",
    ("polarflux/measure.py", "_key", "return np.ascontiguousarray(edges, ).tobytes()"):
        "a map's edges are float64 already (SynopticMap converts them)",
    ("polarflux/measure.py", "_lon_integrals", "clean = np.where(finite, values, 0.0).astype(None)"): _AS_FLOAT64,
    ("polarflux/measure.py", "_contiguous", "return slice(None, 0)"): _NEVER_EMPTY,
    ("polarflux/measure.py", "_contiguous", "return slice(0, None)"): _NEVER_EMPTY,
    ("polarflux/measure.py", "_contiguous", "return slice(0)"): _NEVER_EMPTY,
    ("polarflux/measure.py", "_contiguous", "return slice(0, )"): _NEVER_EMPTY,
    ("polarflux/measure.py", "_contiguous", "return slice(1, 0)"): _NEVER_EMPTY,
    ("polarflux/measure.py", "_contiguous", "return slice(0, 1)"): _NEVER_EMPTY,
    ("polarflux/measure.py", "_contiguous", "return slice(None, int(rows[-1]) + 1)"): _ZERO_ROWS,
    ("polarflux/measure.py", "_contiguous", "return slice(int(rows[0]), None)"): _ZERO_ROWS,
    ("polarflux/measure.py", "_contiguous", "return slice(int(rows[-1]) + 1)"): _ZERO_ROWS,
    ("polarflux/measure.py", "_contiguous", "return slice(int(rows[0]), int(rows[-1]) + 2)"): _ZERO_ROWS,
    ("polarflux/measure.py", "measure_caps",
     "for hemisphere, (rows, w, w_sum) in zip(HEMISPHERES, _cap_rows(_key(m.lat_edges), cap), strict=None):"): _STRICT,
    ("polarflux/measure.py", "measure_caps",
     "for hemisphere, (rows, w, w_sum) in zip(HEMISPHERES, _cap_rows(_key(m.lat_edges), cap), ):"): _STRICT,
    ("polarflux/measure.py", "measure_caps",
     "for hemisphere, (rows, w, w_sum) in zip(HEMISPHERES, _cap_rows(_key(m.lat_edges), cap), strict=False):"):
        _STRICT,
    ("polarflux/measure.py", "measure_caps", "signed_rows, seen_rows = _lon_integrals(target, rows, lon_grid=None)"):
        _SAME_CACHE,
    ("polarflux/measure.py", "measure_caps", "signed_rows, seen_rows = _lon_integrals(target, rows, )"): _SAME_CACHE,
    ("polarflux/measure.py", "measure_caps",
     "unsigned_rows, _ = _lon_integrals(target, rows, absolute=True, lon_grid=None)"): _SAME_CACHE,
    ("polarflux/measure.py", "measure_caps", "unsigned_rows, _ = _lon_integrals(target, rows, absolute=True, )"):
        _SAME_CACHE,
    ("polarflux/measure.py", "measure_caps", "_, seen_rows = _lon_integrals(m, rows, lon_grid=None)"): _SAME_CACHE,
    ("polarflux/measure.py", "measure_caps", "_, seen_rows = _lon_integrals(m, rows, )"): _SAME_CACHE,
    ("polarflux/measure.py", "profile_measures", "profiles = np.asarray(profiles, dtype=None)"): _PROMOTED,
    ("polarflux/measure.py", "profile_measures", "profiles = np.asarray(profiles, )"): _PROMOTED,
    ("polarflux/measure.py", "fill_polar_gaps", "br = m.values.astype(None)  # a copy: m is not changed"):
        _AS_FLOAT64,
    ("polarflux/measure.py", "fill_polar_gaps",
     "row_mean = np.divide(row_sum, seen_width, out=None, where=has_data)"): _UNREAD,
    ("polarflux/measure.py", "fill_polar_gaps", "row_mean = np.divide(row_sum, seen_width, where=has_data)"): _UNREAD,
    ("polarflux/measure.py", "fill_polar_gaps",
     "row_mean = np.divide(row_sum, seen_width, out=np.full(rows.size, None), where=has_data)"): _UNREAD,
    ("polarflux/measure.py", "fill_polar_gaps", "copy=None,"): _COPY,
    ("polarflux/measure.py", "fill_polar_gaps", ")", "header=m.header,"): _COPY + " (the line copy=False removed)",
    ("polarflux/measure.py", "fill_polar_gaps", "copy=True,"): _COPY,
    ("polarflux/transport/profiles.py", "van_ballegooijen_flow",
     "return np.where(np.abs(lat) <= cutoff_deg, speed, 0.0)"):
        "at exactly the cut-off, 75 degrees, the law itself gives v0 sin(180 degrees) = 0 (1e-15 m/s in float64)",
    ("polarflux/transport/model.py", "_Grid.__init__", "self.cos_face[0] = self.cos_face[-1] = None"):
        "the polar faces' coefficients are set to zero in _latitude_operator, the only reader of cos_face",
    ("polarflux/transport/model.py", "_Grid.__init__", "self.cos_face[0] = self.cos_face[-1] = 1.0"):
        "the polar faces' coefficients are set to zero in _latitude_operator, the only reader of cos_face",
    ("polarflux/transport/model.py", "FluxTransport._row_factor", "m = self._modes()[None, :].astype(None)"):
        _AS_FLOAT64,
    ("polarflux/transport/model.py", "FluxTransport._row_factor",
     "factor[np.abs(factor) <= _NEGLIGIBLE] = 0.0  # no subnormal numbers, which are very slow"): _NEGLIGIBLE_CUT,
    ("polarflux/transport/model.py", "FluxTransport._crank_nicolson",
     "flow = np.asarray(self.flow(g.lat_edges), dtype=None).reshape(-1, 1)"): _PROMOTED,
    ("polarflux/transport/model.py", "FluxTransport._crank_nicolson",
     "flow = np.asarray(self.flow(g.lat_edges), ).reshape(-1, 1)"): _PROMOTED,
    ("polarflux/transport/model.py", "FluxTransport._crank_nicolson",
     "flow = np.asarray(self.flow(g.lat_edges), dtype=np.float64).reshape(-2, 1)"):
        "numpy reads any negative size in reshape as 'the rest'",
    ("polarflux/transport/model.py", "FluxTransport._crank_nicolson",
     "step[np.abs(step) <= _NEGLIGIBLE * np.abs(step).max()] = 0.0"): _NEGLIGIBLE_CUT,
    ("polarflux/transport/model.py", "FluxTransport._crank_nicolson",
     "step[np.abs(step) < _NEGLIGIBLE / np.abs(step).max()] = 0.0"):
        _NEGLIGIBLE_CUT + " (the step matrix's largest entry is near one)",
    ("polarflux/transport/model.py", "FluxTransport._spectral", "coefficients = np.fft.rfft(field, ) / self.grid.nlon"):
        "rfft's default axis is the last: axis 1 of the 2-D field",
    ("polarflux/transport/model.py", "FluxTransport._spectral",
     "return coefficients[:, :2].copy() if self.axisymmetric else coefficients"):
        "the extra column is carried but never read (field() takes column 0; it could only move the negligible-"
        "number cut if it exceeded the mean field 1e30-fold)",
    ("polarflux/transport/model.py", "FluxTransport._field", "return state[:, :2].real.copy()"):
        "an axisymmetric state has one column: [:, :2] is [:, :1]",
    ("polarflux/transport/model.py", "FluxTransport._field",
     "return np.fft.irfft(state * self.grid.nlon, n=self.grid.nlon, )"):
        "irfft's default axis is the last: axis 1 of the 2-D state",
    ("polarflux/transport/model.py", "Stepper.step",
     "np.matmul(matrix, state.view(None), out=other.view(np.float64))"): _AS_FLOAT64,
    ("polarflux/transport/model.py", "Stepper.step",
     "np.matmul(matrix, state.view(np.float64), out=other.view(None))"): _AS_FLOAT64,
    ("polarflux/transport/model.py", "Stepper.step", "flat = state.view(None)"): _AS_FLOAT64,
    ("polarflux/transport/model.py", "Stepper.step", "magnitude = np.abs(flat, out=other.view(None))"): _AS_FLOAT64,
    ("polarflux/transport/model.py", "Stepper.step", "magnitude = np.abs(flat, out=None)"):
        "a new array instead of the spare one: the same values",
    ("polarflux/transport/model.py", "Stepper.step", "magnitude = np.abs(flat, )"):
        "a new array instead of the spare one: the same values",
    ("polarflux/transport/model.py", "Stepper.step", "flat[magnitude <= _NEGLIGIBLE * magnitude.max()] = 0.0"):
        _NEGLIGIBLE_CUT,
    ("polarflux/calibration.py", "_fit", "def _fit(x: np.ndarray, y: np.ndarray, seed: int = 1, resamples: int = 2000):"):
        _STATISTICAL,
    ("polarflux/calibration.py", "_fit", "def _fit(x: np.ndarray, y: np.ndarray, seed: int = 0, resamples: int = 2001):"):
        _STATISTICAL,
    ("polarflux/calibration.py", "_fit", "index = rng.integers(x.size, size=(resamples, x.size))"):
        "integers(n) draws from [0, n) like integers(0, n), from the same stream",
    ("polarflux/events.py", "find_cycle_extrema", "x = np.asarray(values, dtype=None)"):
        "float32 or integer values keep their dtype in the returned values but compare, order and subtract as "
        "their float64 copies (monthly ones are smoothed in float64)",
    ("polarflux/events.py", "find_cycle_extrema", "x = np.asarray(values, )"):
        "float32 or integer values keep their dtype in the returned values but compare, order and subtract as "
        "their float64 copies (monthly ones are smoothed in float64)",
    ("polarflux/events.py", "find_cycle_extrema",
     "peak_all = float(np.max(smooth[usable])) if usable.size else 1.0"):
        "with no usable value the loop that reads peak_all never runs",
    ("polarflux/events.py", "find_cycle_extrema", "break",
     "if later < confirm or smooth[usable[-1]] - smooth[i] < CONFIRM_RISE * peak_all:"):
        "once a low point near the end is refused, every later one is too: it is no lower (the first lies in its "
        "window), has risen less and for less time",
    ("polarflux/events.py", "find_cycle_extrema", "for a, b in zip(minima[:-1], minima[1:], strict=None):"): _STRICT,
    ("polarflux/events.py", "find_cycle_extrema", "for a, b in zip(minima[:-1], minima[1:], ):"): _STRICT,
    ("polarflux/events.py", "find_cycle_extrema", "for a, b in zip(minima[:-1], minima[1:], strict=False):"): _STRICT,
    ("polarflux/events.py", "find_cycle_extrema", "after = tail[tail >= peak]"):
        "adds the peak itself, which changes after[-1] only when the peak is last, and then 0 years is not 2",
    ("polarflux/timeseries.py", "smooth_13_month", "x = np.asarray(values, dtype=None)"): _PROMOTED,
    ("polarflux/timeseries.py", "smooth_13_month", "x = np.asarray(values, )"): _PROMOTED,
    ("polarflux/timeseries.py", "smooth_13_month", "filled = np.where(None, 0.0, x)"):
        "what fills a missing month only reaches windows that are set to NaN as holes",
    ("polarflux/timeseries.py", "smooth_13_month", "filled = np.where(np.isnan(x), 1.0, x)"):
        "what fills a missing month only reaches windows that are set to NaN as holes",
    ("polarflux/timeseries.py", "smooth_13_month",
     'holes = np.convolve(np.isnan(x).astype(None), np.ones(13), mode="valid") > 0'): _AS_FLOAT64,
    ("polarflux/timeseries.py", "smooth_13_month", "smooth[holes] = None"): "None stored in a float array is NaN",
    ("polarflux/timeseries.py", "running_mean", "x = np.asarray(values, dtype=None)"): _PROMOTED,
    ("polarflux/timeseries.py", "running_mean", "x = np.asarray(values, )"): _PROMOTED,
    ("polarflux/timeseries.py", "running_mean",
     'counts = np.convolve(finite.astype(None), np.ones(n), mode="valid")'): _AS_FLOAT64,
    ("polarflux/timeseries.py", "running_mean",
     "mean = np.divide(sums, counts, out=np.full(sums.shape, None), where=counts >= need)"):
        "the None left where a window is short becomes NaN when stored in the float result",
    ("polarflux/precursor.py", "fit_precursor", "y = np.asarray(amplitude, dtype=None)"): _PROMOTED,
    ("polarflux/precursor.py", "fit_precursor", "y = np.asarray(amplitude, )"): _PROMOTED,
    ("polarflux/precursor.py", "PrecursorFit._design", "x = np.atleast_1d(np.asarray(x, dtype=None))"): _PROMOTED,
    ("polarflux/precursor.py", "PrecursorFit._design", "x = np.atleast_1d(np.asarray(x, ))"): _PROMOTED,
    ("polarflux/precursor.py", "PrecursorFit.predict",
     "design = self._design(np.ravel(np.asarray(x, dtype=None)))"): "_design converts to float64 itself",
    ("polarflux/precursor.py", "PrecursorFit.predict", "design = self._design(np.ravel(np.asarray(x, )))"):
        "_design converts to float64 itself",
    ("polarflux/precursor.py", "PrecursorFit.predict",
     'se = self.residual_sd * np.sqrt(1.0 + np.einsum("IJ,JK,IK->I", design, self._inverse, design))'):
        "einsum takes capital letters as subscripts too: the same contraction",
    ("polarflux/precursor.py", "PrecursorFit.sample",
     "return p.median - p.se * rng.standard_t(self.dof, size=np.shape(p.median))"): _SYMMETRIC,
    ("polarflux/precursor.py", "ProportionalFit.predict",
     "se = self.residual_sd * math.sqrt(1.0 + 1.0 / self.proxy.size) / np.ones_like(centre)"):
        "dividing by ones is multiplying by ones",
    ("polarflux/precursor.py", "ProportionalFit.sample",
     "return p.median / np.exp(p.se * rng.standard_t(self.dof, size=np.shape(p.median)))"): _SYMMETRIC,
}


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
    beside = Path(sys.executable).with_name("mutmut")
    program = str(beside) if beside.exists() else shutil.which("mutmut")
    if program is None:
        raise SystemExit("mutmut is not installed here: pip install -e '.[dev]' (the dev extra has it)")
    command = [program, *args]
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


def _line_before(diff: str) -> str:
    """The unchanged line just above the change (tells apart two mutants that write the same line)."""
    lines = diff.splitlines()
    for i, line in enumerate(lines):
        if line.startswith(("-", "+")) and not line.startswith(("---", "+++")):
            return lines[i - 1][1:].strip() if i and lines[i - 1].startswith(" ") else ""
    return ""


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
        if status in DETECTED:
            continue
        diff = _mutmut(folder, "show", name)
        line, key = _changed_line(diff), (group.path, _function_of(name))
        reason = EQUIVALENT.get((*key, line, _line_before(diff))) or EQUIVALENT.get((*key, line), "")
        survivors.append((name, status, line, reason))
    return {"group": group, "seconds": seconds, "statuses": statuses, "survivors": survivors}


#: mutmut's verdicts that count as the tests catching the mutant (a timeout: the tests hung or ran far
#: past their time on it).
DETECTED = ("killed", "timeout")


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
        "Score: killed and timed out over all mutants; equivalent survivors are listed below with the reason, "
        "and the last column leaves them out.",
        "",
        "| module | functions | mutants | killed | timeout | survived | no tests | other | equivalent | "
        "score | score less equivalent | min |",
        "|---|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|",
    ]
    all_total = all_detected = all_equivalent = 0
    for r in results:
        g, st = r["group"], r["statuses"]
        counts = {k: sum(1 for v in st.values() if v == k) for k in ("killed", "timeout", "survived", "no tests")}
        other = len(st) - sum(counts.values())
        equivalent = sum(1 for s in r["survivors"] if s[3])
        total = len(st)
        detected = counts["killed"] + counts["timeout"]
        all_total, all_detected, all_equivalent = all_total + total, all_detected + detected, all_equivalent + equivalent
        functions = "all" if g.functions == ("*",) else ", ".join(g.functions)
        lines.append(f"| `{g.path}` | {functions} | {total} | {counts['killed']} | {counts['timeout']} | "
                     f"{counts['survived']} | {counts['no tests']} | {other} | {equivalent} | "
                     f"{detected / max(1, total):.1%} | {detected / max(1, total - equivalent):.1%} | "
                     f"{r['seconds'] / 60:.1f} |")
    if all_total:
        lines += ["", f"All: {all_detected} of {all_total} mutants detected ({all_detected / all_total:.1%}); "
                  f"{all_equivalent} survivors explained as equivalent; detected among the rest: "
                  f"{all_detected / max(1, all_total - all_equivalent):.1%}."]
    lines += ["", "## Survivors", "", "Every mutant not detected, with its changed line and, if equivalent, why.", ""]
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
            detected = sum(1 for v in st.values() if v in DETECTED)
            print(f"    {detected}/{len(st)} detected, {len(r['survivors'])} not, {r['seconds']:.0f} s", flush=True)
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
