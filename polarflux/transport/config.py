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
    time = 0.5               # years from the start
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

from ..errors import SettingsError
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
    """A model, its initial state, regions and run settings, read from a config file."""

    def __init__(self, model: FluxTransport, initial, regions: list[BipolarRegion], run: dict, source: str):
        self.model, self.initial, self.regions, self.settings, self.source = model, initial, regions, run, source

    def run(self, progress=None):
        return self.model.run(self.initial, sources=self.regions, progress=progress, **self.settings)

    @property
    def steps(self) -> int:
        return _steps(self.settings["years"], self.settings["step_days"])[0]


def _check(table: dict, allowed: dict, where: str, source: str) -> dict:
    if not isinstance(table, dict):
        raise SettingsError(f"{source}: [{where}] must be a table")
    unknown = sorted(set(table) - set(allowed))
    if unknown:
        raise SettingsError(
            f"{source}: unknown key(s) in [{where}]: {', '.join(unknown)}; known: {', '.join(allowed)}"
        )
    out = {}
    for key, value in table.items():
        kind = allowed[key]
        if kind is float:
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                raise SettingsError(f"{source}: [{where}] {key} = {value!r} must be a finite number")
            value = float(value)
        elif kind is int:
            if isinstance(value, bool) or not isinstance(value, int):
                raise SettingsError(f"{source}: [{where}] {key} = {value!r} must be a whole number")
        elif kind is bool:
            if not isinstance(value, bool):
                raise SettingsError(f"{source}: [{where}] {key} = {value!r} must be true or false")
        elif kind is str:
            if not isinstance(value, str):
                raise SettingsError(f"{source}: [{where}] {key} = {value!r} must be a string")
        out[key] = value
    return out


def _initial(table: dict, base: Path, source: str):
    chosen = [k for k in ("map", "dipole", "polar", "uniform") if k in table]
    if len(chosen) != 1:
        raise SettingsError(f"{source}: [initial] needs exactly one of map, dipole, polar, uniform (got {chosen})")
    kind = chosen[0]
    if "field" in table and kind != "map":
        raise SettingsError(f"{source}: [initial] field goes with map only")
    if kind == "map":
        from ..maps import read_map

        path = Path(table["map"])
        if not path.is_absolute():
            path = base / path
        return read_map(path, field=table.get("field", "radial"))
    value = table[kind]
    if kind == "dipole":
        return lambda lat, lon: value * np.sin(np.deg2rad(lat)) + 0.0 * lon
    if kind == "polar":
        return lambda lat, lon: value * np.sign(lat) * np.sin(np.deg2rad(lat)) ** 8 + 0.0 * lon
    return lambda lat, lon: np.full(np.broadcast(lat, lon).shape, value)


def _region(table: dict, index: int, source: str) -> BipolarRegion:
    where = f"region {index + 1}"
    t = _check(table, _REGION_KEYS, where, source)
    missing = [k for k in _REQUIRED_REGION if k not in t]
    if missing:
        raise SettingsError(f"{source}: [[region]] number {index + 1} lacks {', '.join(missing)}")
    tilt = t.pop("tilt", 0.0)
    if isinstance(tilt, str):
        if tilt.lower() != "joy":
            raise SettingsError(f"{source}: [{where}] tilt = {tilt!r} must be degrees or \"joy\"")
        tilt = joy_tilt(t["latitude"])
    elif isinstance(tilt, bool) or not isinstance(tilt, (int, float)):
        raise SettingsError(f"{source}: [{where}] tilt = {tilt!r} must be degrees or \"joy\"")
    try:
        return BipolarRegion(tilt=float(tilt), **t)
    except SettingsError as exc:
        raise SettingsError(f"{source}: [{where}] {exc}") from None


def load_run(path: str | os.PathLike) -> TransportRun:
    """Read a transport run from a TOML file; every problem is a SettingsError naming the file."""
    source = os.fspath(path)
    try:
        with open(source, "rb") as handle:
            config = tomllib.load(handle)
    except FileNotFoundError:
        raise SettingsError(f"{source}: no such file") from None
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"{source}: not valid TOML ({exc})") from None
    unknown = sorted(set(config) - {"model", "run", "initial", "region"})
    if unknown:
        raise SettingsError(f"{source}: unknown section(s) {', '.join(unknown)}; known: model, run, initial, region")
    model_settings = _check(config.get("model", {}), _MODEL_KEYS, "model", source)
    rotation = model_settings.get("rotation", "default")
    if isinstance(rotation, str):
        rotation = None if rotation.lower() == "none" else rotation
    model_settings["rotation"] = rotation
    decay = model_settings.get("decay_time")
    if isinstance(decay, str) and decay.lower() == "none":
        model_settings["decay_time"] = None
    elif decay is not None and (isinstance(decay, bool) or not isinstance(decay, (int, float))):
        raise SettingsError(f"{source}: [model] decay_time = {decay!r} must be years or \"none\"")
    try:
        model = FluxTransport(**model_settings)
    except SettingsError as exc:
        raise SettingsError(f"{source}: [model] {exc}") from None
    run = {"years": 11.0, "step_days": 1.0, "save_every_days": CARRINGTON_PERIOD_DAYS, "cap_latitude": 60.0}
    run.update(_check(config.get("run", {}), _RUN_KEYS, "run", source))
    if "initial" not in config:
        raise SettingsError(f"{source}: [initial] is missing (map, dipole, polar or uniform)")
    initial = _initial(_check(config["initial"], _INITIAL_KEYS, "initial", source), Path(source).parent, source)
    regions_table = config.get("region", [])
    if not isinstance(regions_table, list):
        raise SettingsError(f"{source}: regions are written as [[region]] tables")
    regions = [_region(r, i, source) for i, r in enumerate(regions_table)]
    return TransportRun(model, initial, regions, run, source)
