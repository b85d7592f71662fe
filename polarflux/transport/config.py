"""Transport runs described by a TOML file (``polarflux transport CONFIG.toml``).

Sections and keys (all optional unless said; units as in :class:`FluxTransport`)::

    [model]
    nlat = 180               # rows, equal steps in latitude
    nlon = 360               # columns
    diffusivity = 250.0      # km^2/s
    flow_speed = 11.0        # m/s, peak of the default poleward flow
    rotation = "default"     # "default" (Snodgrass 1983), "none", or [A, B, C] in microrad/s
    decay_time = 5.0         # years; leave out (or "none") for no decay
    axisymmetric = false

    [run]
    years = 11.0
    step_days = 1.0
    save_every_days = 27.2753
    cap_latitude = 60.0      # degrees, for the polar mean fields in the output

    [initial]                # exactly one of map / dipole / polar / uniform
    map = "cr2400.fits"      # a synoptic map (path relative to this file)
    field = "radial"         # with map: "radial" or "los"
    dipole = 5.0             # G: Br = dipole * sin(latitude)
    polar = 10.0             # G: Br = polar * sin(latitude)^8 (sign kept by hemisphere)
    uniform = 0.0            # G

    [[region]]               # any number of bipolar regions
    time = 0.5               # years from the start; at least 0 and less than [run] years
    latitude = 20.0          # degrees
    longitude = 100.0        # degrees (Carrington)
    flux = 1e22              # Mx of the leading polarity; its sign is the polarity
    separation = 5.0         # degrees
    tilt = "joy"             # degrees, or "joy" for Joy's law
    width = 3.0              # degrees
"""

from __future__ import annotations

import math
import os
import tomllib
from pathlib import Path

import numpy as np

from ..errors import PolarfluxError, SettingsError
from .model import CARRINGTON_PERIOD_DAYS, FluxTransport, _steps
from .sources import BipolarRegion, joy_tilt

__all__ = ["load_run", "TransportRun"]

_MODEL_KEYS = {"nlat": int, "nlon": int, "diffusivity": float, "flow_speed": float, "rotation": object,
               "decay_time": object, "axisymmetric": bool}
_RUN_KEYS = {"years": float, "step_days": float, "save_every_days": float, "cap_latitude": float}
_INITIAL_KEYS = {"map": str, "field": str, "dipole": float, "polar": float, "uniform": float}
_REGION_KEYS = {"time": float, "latitude": float, "longitude": float, "flux": float, "separation": float,
                "tilt": object, "width": float}
_REQUIRED_REGION = ("time", "latitude", "longitude", "flux")


class TransportRun:
    """A model, its initial state, regions and run settings, read from a config file.

    ``regions`` holds every [[region]] of the file; :func:`load_run` refuses one
    that would emerge after the run's end, so all of them are deposited.
    """

    def __init__(self, model: FluxTransport, initial, regions: list[BipolarRegion], run: dict, source: str):
        self.model, self.initial, self.regions, self.settings, self.source = model, initial, regions, run, source

    def run(self, progress=None):
        return self.model.run(self.initial, sources=self.regions, progress=progress, **self.settings)

    @property
    def steps(self) -> int:
        return _steps(self.settings["years"], self.settings["step_days"])[0]


def _toml(value) -> str:
    """A value written as TOML writes it (double-quoted strings, lower-case booleans)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    return str(value)


def _check(table: dict, allowed: dict, where: str, source: str) -> dict:
    """Keys of one table, checked against ``allowed`` (key -> type); ``where`` names the table as written."""
    if not isinstance(table, dict):
        raise SettingsError(f"{source}: {where} must be a table")
    unknown = sorted(set(table) - set(allowed))
    if unknown:
        raise SettingsError(
            f"{source}: unknown key(s) in {where}: {', '.join(unknown)}; known: {', '.join(allowed)}"
        )
    out = {}
    for key, value in table.items():
        kind = allowed[key]
        if kind is float:
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                raise SettingsError(f"{source}: {where} {key} = {_toml(value)} must be a finite number")
            value = float(value)
        elif kind is int:
            if isinstance(value, bool) or not isinstance(value, int):
                raise SettingsError(f"{source}: {where} {key} = {_toml(value)} must be a whole number")
        elif kind is bool:
            if not isinstance(value, bool):
                raise SettingsError(f"{source}: {where} {key} = {_toml(value)} must be true or false")
        elif kind is str:
            if not isinstance(value, str):
                raise SettingsError(f"{source}: {where} {key} = {_toml(value)} must be a string in quotes")
        out[key] = value
    return out


def _require(ok: bool, source: str, where: str, key: str, value, expected: str) -> None:
    if not ok:
        raise SettingsError(f"{source}: {where} {key} = {_toml(value)} must be {expected}")


def _model(table: dict, source: str) -> FluxTransport:
    """The [model] table as a FluxTransport; every check speaks of the TOML keys."""
    settings = _check(table, _MODEL_KEYS, "[model]", source)
    for key, least in (("nlat", 4), ("nlon", 1)):
        if key in settings:
            _require(settings[key] >= least, source, "[model]", key, settings[key], f"a whole number, at least {least}")
    if "diffusivity" in settings:
        _require(settings["diffusivity"] >= 0, source, "[model]", "diffusivity", settings["diffusivity"],
                 "zero or a positive number of km^2/s")
    rotation = settings.get("rotation", "default")
    if isinstance(rotation, str) and rotation.lower() in ("default", "none"):
        rotation = None if rotation.lower() == "none" else "default"
    else:
        _require(isinstance(rotation, list) and len(rotation) == 3
                 and all(isinstance(c, (int, float)) and not isinstance(c, bool) for c in rotation),
                 source, "[model]", "rotation", rotation, '"default", "none" or three numbers [A, B, C] in microrad/s')
        rotation = tuple(float(c) for c in rotation)
    settings["rotation"] = rotation
    decay = settings.get("decay_time")
    if isinstance(decay, str) and decay.lower() == "none":
        decay = None
    elif decay is not None:
        _require(not isinstance(decay, bool) and isinstance(decay, (int, float)) and math.isfinite(decay)
                 and decay > 0, source, "[model]", "decay_time", decay,
                 'a positive number of years, or "none" (or left out) for no decay')
    settings["decay_time"] = decay
    try:
        return FluxTransport(**settings)
    except SettingsError as exc:  # a check above should have caught it; keep the file in the message
        raise SettingsError(f"{source}: [model] {exc}") from None


def _run(table: dict, source: str) -> dict:
    run = {"years": 11.0, "step_days": 1.0, "save_every_days": CARRINGTON_PERIOD_DAYS, "cap_latitude": 60.0}
    run.update(_check(table, _RUN_KEYS, "[run]", source))
    for key, unit in (("years", "years"), ("step_days", "days"), ("save_every_days", "days")):
        _require(run[key] > 0, source, "[run]", key, run[key], f"a positive number of {unit}")
    _require(0.0 < run["cap_latitude"] < 90.0, source, "[run]", "cap_latitude", run["cap_latitude"],
             "degrees strictly between 0 and 90")
    return run


def _initial(table: dict, base: Path, source: str):
    chosen = [k for k in ("map", "dipole", "polar", "uniform") if k in table]
    if len(chosen) != 1:
        got = ", ".join(chosen) if chosen else "none"
        raise SettingsError(f"{source}: [initial] needs exactly one of map, dipole, polar, uniform (got {got})")
    kind = chosen[0]
    if "field" in table and kind != "map":
        raise SettingsError(f"{source}: [initial] field goes with map only")
    if kind == "map":
        from ..maps import read_map

        field = table.get("field", "radial")
        _require(field in ("radial", "los"), source, "[initial]", "field", field, '"radial" or "los"')
        path = Path(table["map"])
        if not path.is_absolute():
            path = base / path
        try:
            return read_map(path, field=field)
        except PolarfluxError as exc:
            raise SettingsError(f'{source}: [initial] map = "{table["map"]}" (read as {path}): {exc}') from None
    value = table[kind]
    if kind == "dipole":
        return lambda lat, lon: value * np.sin(np.deg2rad(lat)) + 0.0 * lon
    if kind == "polar":
        return lambda lat, lon: value * np.sign(lat) * np.sin(np.deg2rad(lat)) ** 8 + 0.0 * lon
    return lambda lat, lon: np.full(np.broadcast(lat, lon).shape, value)


def _region(table: dict, index: int, years: float, source: str) -> BipolarRegion:
    """The ``index``-th [[region]] (from 0); it must emerge within the run of ``years``."""
    where = f"[[region]] number {index + 1}"
    t = _check(table, _REGION_KEYS, where, source)
    missing = [k for k in _REQUIRED_REGION if k not in t]
    if missing:
        raise SettingsError(f"{source}: {where} lacks {', '.join(missing)}")
    # A region at or after the end would never be deposited: refuse it rather than count it silently.
    if t["time"] >= years:
        raise SettingsError(
            f"{source}: {where} has time = {t['time']:g}, at or after the end of the run ([run] years = "
            f"{years:g}), so it would never emerge: move it into the run or lengthen the run"
        )
    _require(t["time"] >= 0, source, where, "time", t["time"], "zero or later (years from the start of the run)")
    _require(-90.0 < t["latitude"] < 90.0, source, where, "latitude", t["latitude"],
             "degrees strictly between -90 and 90")
    if "separation" in t:
        _require(t["separation"] >= 0, source, where, "separation", t["separation"], "zero or positive degrees")
    if "width" in t:
        _require(t["width"] > 0, source, where, "width", t["width"], "positive degrees")
    tilt = t.pop("tilt", 0.0)
    if isinstance(tilt, str) and tilt.lower() == "joy":
        tilt = joy_tilt(t["latitude"])
    else:
        _require(not isinstance(tilt, (bool, str)) and isinstance(tilt, (int, float)) and math.isfinite(tilt),
                 source, where, "tilt", tilt, 'degrees or "joy"')
    try:
        return BipolarRegion(tilt=float(tilt), **t)
    except SettingsError as exc:  # a check above should have caught it; keep the file in the message
        raise SettingsError(f"{source}: {where}: {exc}") from None


_NOT_A_RUN = "not a TOML run description"
_SIGNATURES = ((b"\x89HDF\r\n\x1a\n", "a netCDF-4/HDF5 file"), (b"CDF\x01", "a netCDF file"),
               (b"CDF\x02", "a netCDF file"), (b"SIMPLE  =", "a FITS file"))


def _read_toml(source: str) -> dict:
    """The parsed TOML of ``source``; anything that is not a TOML text is one SettingsError naming the file."""
    path = Path(source)
    if path.is_dir():
        raise SettingsError(f"{source}: a folder, {_NOT_A_RUN}")
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise SettingsError(f"{source}: no such file") from None
    except OSError as exc:
        raise SettingsError(f"{source}: cannot read ({exc.strerror or exc})") from None
    if not data.strip():
        raise SettingsError(f"{source}: empty file, {_NOT_A_RUN}")
    for magic, kind in _SIGNATURES:
        if data.startswith(magic):
            raise SettingsError(f"{source}: {kind}, {_NOT_A_RUN}")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise SettingsError(f"{source}: a binary file, {_NOT_A_RUN}") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"{source}: {_NOT_A_RUN}: not valid TOML ({exc})") from None


def load_run(path: str | os.PathLike) -> TransportRun:
    """Read a transport run from a TOML file.

    Raises
    ------
    SettingsError
        One line naming the file and the problem: a missing file, a folder, an
        empty or binary file or a file that is not TOML, an unknown section or
        key, a value out of range (named as ``[table] key = value``), or a
        ``[[region]]`` whose time lies outside the run (it would never emerge).
    """
    source = os.fspath(path)
    config = _read_toml(source)
    unknown = sorted(set(config) - {"model", "run", "initial", "region"})
    if unknown:
        raise SettingsError(f"{source}: unknown section(s) {', '.join(unknown)}; known: model, run, initial, region")
    model = _model(config.get("model", {}), source)
    run = _run(config.get("run", {}), source)
    if "initial" not in config:
        raise SettingsError(f"{source}: [initial] is missing (map, dipole, polar or uniform)")
    initial = _initial(_check(config["initial"], _INITIAL_KEYS, "[initial]", source), Path(source).parent, source)
    regions_table = config.get("region", [])
    if not isinstance(regions_table, list):
        raise SettingsError(f"{source}: regions are written as [[region]] tables")
    regions = [_region(r, i, run["years"], source) for i, r in enumerate(regions_table)]
    return TransportRun(model, initial, regions, run, source)
