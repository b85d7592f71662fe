"""The analysis chain of a record: instruments merged, events found, and the forecast made once.

The commands, the report and the demo all start from :func:`analyse`.
"""

from __future__ import annotations

import json

from .calibration import merge_instruments
from .errors import PolarfluxError, SettingsError
from .events import record_events

__all__ = ["analyse"]


def analyse(record, sunspots=None, bases=("",), members: int = 1000, seed: int = 0, as_of=None,
            hemispheric=None) -> dict:
    """Merge the instruments, find the events and (with ``sunspots`` = (times, values)) forecast.

    ``hemispheric`` (northern and southern sunspot numbers on the same times) adds each
    hemisphere's forecast (:mod:`polarflux.hemispheres`).

    Returns a dict: ``record``, ``merged`` (None when the instruments cannot be brought
    onto one scale), ``merge_error`` (why not, or None), ``events`` (None without a
    merged record), ``sunspots``, ``bases``, ``forecast`` and ``forecast_error``.
    Figures that need no cross-calibration (the butterfly diagram, the map, each
    instrument on its own scale) can still be drawn when the merge fails.
    """
    result = {"record": record, "merged": None, "merge_error": None, "events": None, "sunspots": sunspots,
              "bases": bases, "forecast": None, "forecast_error": None}
    try:
        merged = merge_instruments(record)
    except SettingsError as exc:
        result["merge_error"] = str(exc)
        result["forecast_error"] = f"the record's instruments cannot be cross-calibrated: {exc}"
        return result
    found = record_events(merged, *(sunspots if sunspots is not None else (None, None)))
    found["scale_factors"] = json.loads(merged.attrs["scale_factors"])
    found["band_factors_needed"] = bool(merged.attrs["band_factors_needed"])
    result.update(merged=merged, events=found)
    if sunspots is not None:
        from .forecast import forecast_from_record  # scipy.stats on demand: only a forecast needs it

        try:
            result["forecast"] = forecast_from_record(record, *sunspots, members=members, seed=seed, as_of=as_of,
                                                      bases=bases, hemispheric=hemispheric)
        except PolarfluxError as exc:
            result["forecast_error"] = str(exc)
    return result
