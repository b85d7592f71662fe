"""Fuzz the map reader's header handling with hypothesis: any header either reads or is refused cleanly.

Random headers are drawn from the keywords the reader looks at (axis types, units, steps,
reference pixels and values, PV2_1, BUNIT, times, rotation numbers, BLANK, MISSING) with
random, often hostile values (NaN, inf, huge, zero, negative, strings), written with a small
image to a FITS file and read. The only acceptable outcomes are a SynopticMap or a
MapFormatError naming the file; anything else is a bug and stops the run.

    python bench/fuzz_headers.py [--examples 2000]
"""

from __future__ import annotations

import argparse
import tempfile
import warnings
from pathlib import Path

import numpy as np
from astropy.io import fits
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import polarflux as pf

NUMBERS = st.one_of(st.floats(allow_nan=True, allow_infinity=False, width=32), st.integers(-10**6, 10**6),
                    st.sampled_from([0.0, -1.0, 1.0, 2.0 / 90, 360.0 / np.pi / 90, 1.0, 4.0, 180.5, 90.5, 795420.0]))
TEXT = st.sampled_from(["CRLN-CEA", "CRLT-CEA", "CRLN-CAR", "CRLT-CAR", "Long", "Lat", "HPLN-TAN", "RA---CEA",
                        "Sine Latitude", "deg", "G", "Gauss", "Mx/cm^2", "T", "nT", "counts", "", "2050-01-01",
                        "2050.01.01_00:00:00_TAI", "yesterday", "x" * 60])
KEYS = ["CTYPE1", "CTYPE2", "CUNIT1", "CUNIT2", "CDELT1", "CDELT2", "CRPIX1", "CRPIX2", "CRVAL1", "CRVAL2",
        "PV2_1", "BUNIT", "DATE-OBS", "T_OBS", "CAR_ROT", "CARROT", "MISSING", "PC1_2", "CD2_2"]
SHAPES = st.sampled_from([(90, 180), (180, 360), (45, 90), (90, 181), (10, 10), (1, 180), (90, 1)])


def base_header() -> dict:
    return {"CTYPE1": "CRLN-CEA", "CTYPE2": "CRLT-CEA", "CUNIT1": "deg", "CUNIT2": "Sine Latitude",
            "CDELT1": 2.0, "CDELT2": 2.0 / 90, "CRPIX1": 90.5, "CRPIX2": 45.5, "CRVAL1": 180.0, "CRVAL2": 0.0,
            "BUNIT": "G"}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--examples", type=int, default=2000)
    args = parser.parse_args()
    outcome = {"read": 0, "refused": 0}
    folder = Path(tempfile.mkdtemp(prefix="polarflux-fuzz-"))

    @settings(max_examples=args.examples, deadline=None, database=None,
              suppress_health_check=list(HealthCheck))
    @given(changes=st.dictionaries(st.sampled_from(KEYS), st.one_of(NUMBERS, TEXT), max_size=6),
           drop=st.lists(st.sampled_from(KEYS), max_size=3), shape=SHAPES, fill=NUMBERS)
    def attempt(changes, drop, shape, fill):
        header = {**base_header(), **changes}
        for key in drop:
            header.pop(key, None)
        value = float(fill) if np.isfinite(float(fill)) else np.nan
        data = np.full(shape, value, dtype=np.float32)
        path = folder / "fuzz.fits"
        hdu = fits.PrimaryHDU(data)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for key, val in header.items():
                try:
                    hdu.header[key] = val
                except (ValueError, TypeError):
                    pass  # astropy itself refuses the card; such a file cannot be written
            hdu.writeto(path, overwrite=True, output_verify="silentfix")
            try:
                pf.read_map(path)
                outcome["read"] += 1
            except pf.MapFormatError as exc:
                assert str(exc).startswith(str(path)), exc
                assert "\n" not in str(exc), exc
                outcome["refused"] += 1

    attempt()
    total = outcome["read"] + outcome["refused"]
    print(f"fuzzed {total} headers: {outcome['read']} read, {outcome['refused']} refused with a MapFormatError, "
          "no other exception")


if __name__ == "__main__":
    main()
