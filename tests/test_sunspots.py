"""Sunspot files as people have them: spreadsheet CSV with a byte-order mark, the semicolon-separated
standard layout, hemispheric columns, -1 as the missing-value code."""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.datasets import sunspots as yearly_sunspots

import polarflux as pf
from polarflux.sunspots import read_sunspot_series

# The monthly layout (common practice for the standard files): year; month; decimal year; value;
# standard deviation; number of observations; definitive flag. Rows below are invented.
MONTHLY = """2061;   1;2061.042;   12.3;   2.1;  900;1
2061;   2;2061.123;   -1.0;  -1.0;   -1;1
2061;   3;2061.204;   15.0;   2.4;  910;1
"""


def test_semicolon_monthly_layout_with_missing_code(tmp_path):
    path = tmp_path / "monthly.txt"
    path.write_text(MONTHLY)
    t, v = pf.read_sunspots(path)
    assert v[0] == 12.3 and np.isnan(v[1]) and v[2] == 15.0  # -1 is a gap, not data
    # times are mid-month (the 15th), so they agree with the file's own decimal years to half a day
    assert np.allclose(t, [2061.042, 2061.123, 2061.204], atol=0.002)


def test_semicolon_yearly_layout_matches_statsmodels_yearly_numbers(tmp_path):
    """Yearly numbers 1700-2008 shipped by statsmodels, written in the yearly semicolon layout."""
    data = yearly_sunspots.load_pandas().data
    lines = [f"{y + 0.5:.1f};{v:6.1f}; -1.0;   -1;1" for y, v in zip(data["YEAR"], data["SUNACTIVITY"], strict=True)]
    path = tmp_path / "yearly.csv"
    path.write_text("\n".join(lines) + "\n")
    t, v = pf.read_sunspots(path)
    assert t.size == len(data) == 309
    assert np.allclose(t, data["YEAR"].to_numpy() + 0.5) and np.allclose(v, data["SUNACTIVITY"].to_numpy())


def test_spreadsheet_csv_with_byte_order_mark(tmp_path):
    path = tmp_path / "export.csv"
    path.write_bytes("\ufeffdate,sunspot_number\n2050-01-15,3\n2050-02-15,4\n".encode())
    t, v = pf.read_sunspots(path)
    assert list(v) == [3.0, 4.0]


def test_hemispheric_columns_are_read_and_sum_to_the_total(tmp_path):
    path = tmp_path / "hemi.csv"
    path.write_text("date,sunspot_number,sunspot_number_north,sunspot_number_south\n"
                    "2050-01-15,10,6,4\n2050-02-15,-1,-1,-1\n2050-03-15,7,2,5\n")
    s = read_sunspot_series(path)
    assert np.allclose(s.north[[0, 2]] + s.south[[0, 2]], s.total[[0, 2]])
    assert np.isnan(s.total[1]) and np.isnan(s.north[1]) and np.isnan(s.south[1])
    plain = tmp_path / "plain.csv"
    plain.write_text("date,sunspot_number\n2050-01-15,3\n2050-02-15,4\n")
    assert read_sunspot_series(plain).north is None


@pytest.mark.parametrize("text,message", [
    ("2061;   1;2061.042;   x;\n2061; 2;2061.1;3;\n", "line 1: expected 'year; month"),
    ("2061;1;2061.042;3\n2060;12;2060.96;4\n", "line 2: times must increase"),
    ("\ufeffwhen,ssn\n2050-01,3\n", "found columns 'when', 'ssn'"),
])
def test_bad_layouts_are_refused_with_the_line(tmp_path, text, message):
    path = tmp_path / "ssn.csv"
    path.write_text(text)
    with pytest.raises(pf.PolarfluxError, match=f"ssn.csv: .*{message}"):
        pf.read_sunspots(path)
