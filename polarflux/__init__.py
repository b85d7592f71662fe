"""polarflux: polar magnetic fields from synoptic maps, as a precursor of the next solar cycle.

The public API is what this module exports; everything else may change.
"""

from ._version import __version__
from .calibration import cross_calibrate, merge_instruments
from .errors import MapFormatError, OutputExistsError, PolarfluxError, SettingsError
from .events import (
    find_cycle_extrema,
    find_reversals,
    read_sunspots,
    record_events,
    running_mean,
    smooth_13_month,
)
from .forecast import CAUTION, fit_precursor, forecast_from_record
from .maps import SynopticMap, read_map
from .measure import CapMeasure, CapPair, axial_dipole, fill_polar_gaps, measure_caps
from .record import measure_archive, read_record, write_record
from .transport import BipolarRegion, FluxTransport, TransportEnsemble, joy_tilt

__all__ = [
    "__version__",
    "PolarfluxError",
    "MapFormatError",
    "SettingsError",
    "OutputExistsError",
    "SynopticMap",
    "read_map",
    "CapMeasure",
    "CapPair",
    "measure_caps",
    "axial_dipole",
    "fill_polar_gaps",
    "measure_archive",
    "read_record",
    "write_record",
    "FluxTransport",
    "TransportEnsemble",
    "BipolarRegion",
    "joy_tilt",
    "smooth_13_month",
    "running_mean",
    "find_cycle_extrema",
    "find_reversals",
    "read_sunspots",
    "record_events",
    "cross_calibrate",
    "merge_instruments",
    "fit_precursor",
    "forecast_from_record",
    "CAUTION",
]
