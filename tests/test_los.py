"""Line-of-sight maps: each column's B0 and the conversion to radial field.

References: the analytic projection of a radial field onto the line of sight,
B_los = B_r cos(latitude - B0) for a pixel at central meridian (spherical geometry,
common practice for synoptic maps built from central-meridian data); B0 and the
Carrington rotation times from ``sunpy.coordinates.sun`` (a general reference
library, computed here independently of polarflux's own interpolation).
"""

import numpy as np
import pytest
from astropy.time import Time
from conftest import cea_header, write_fits
from sunpy.coordinates.sun import B0, carrington_rotation_time

import polarflux as pf
from polarflux.los import column_b0


def sin8_field(lat_deg, amplitude=10.0):
    """A polar field of 10 G sin^8(latitude) in the north, -10 G in the south (odd in latitude)."""
    s = np.sin(np.deg2rad(lat_deg))
    return amplitude * np.sign(s) * s**8


SUBROWS = 64


def cell_average(func, lat_edges):
    """Area average over each row of func(latitude in degrees) -> (nlat, ncol), by equal-area sub-rows.

    Sub-rows equally spaced in sin(latitude) have equal areas, so their plain mean is the area
    mean (midpoint rule in sin(latitude), error well under 1e-4 here).
    """
    s = np.sin(np.deg2rad(lat_edges))
    s[0], s[-1] = -1.0, 1.0
    out = 0.0
    for k in range(SUBROWS):
        sk = s[:-1] + (k + 0.5) / SUBROWS * np.diff(s)
        out = out + func(np.rad2deg(np.arcsin(sk))[:, None])
    return out / SUBROWS


def los_map(tmp_path, name, b0_columns, limb=None, **keys):
    """The line-of-sight map of sin8_field seen with B0 per column: each pixel the area average of
    B_r cos(latitude - B0) over its cell, as an instrument's pixel is; beyond ``limb`` blank.
    Returns the file, the grid, and the cell averages of the radial field itself."""
    m = pf.SynopticMap.from_array(np.zeros((360, 720)))
    b0 = np.asarray(b0_columns)[None, :]
    los = cell_average(lambda lat: sin8_field(lat) * np.cos(np.deg2rad(lat - b0)), m.lat_edges)
    radial = cell_average(lambda lat: sin8_field(lat) * np.ones_like(b0), m.lat_edges)
    if limb is not None:
        los[np.abs(m.lat[:, None] - b0) > limb] = np.nan
    path = write_fits(tmp_path / name, los.astype(np.float64), cea_header(360, 720, **keys))
    return path, m, radial


def cap_mean_truth(amplitude=10.0, cap=60.0):
    """Closed form: mean of amplitude sin^8 over the cap = amplitude (1 - s0^9) / (9 (1 - s0))."""
    s0 = np.sin(np.deg2rad(cap))
    return amplitude * (1 - s0**9) / (9 * (1 - s0))


@pytest.mark.parametrize("b0", [7.25, -7.25, 3.0])
def test_radial_field_comes_back_from_its_projection_at_any_b0(tmp_path, b0):
    # blank beyond 84 degrees from the disk centre, where the factor (9.6) is still below its cap
    path, m, radial = los_map(tmp_path, "los.fits", np.full(720, b0), limb=84.0, B0COL0=b0)
    got = pf.read_map(path, field="los")
    seen = np.isfinite(got.br)
    # exact for a field uniform over a pixel; sin^8 varies within the pixels: within 0.3 % of 10 G
    np.testing.assert_allclose(got.br[seen], radial[seen], atol=0.03)
    assert seen.mean() > 0.9
    if abs(b0) > 6.0:
        # the pole tilted towards the observer is seen whole: its cap mean is the closed form's
        toward = pf.measure_caps(got)["north" if b0 > 0 else "south"]
        assert toward.coverage == 1.0
        assert abs(toward.mean_field.value) == pytest.approx(cap_mean_truth(), rel=1e-3)


def test_a_coarse_pixel_row_needs_the_row_averaged_cosine(tmp_path):
    # 90 sine-latitude rows: the last spans 77.9-90 degrees. A uniform 10 G radial field seen at
    # B0 = +7.25: the cosine at the row centre is 3 % off for that row, the row average exact.
    m = pf.SynopticMap.from_array(np.zeros((90, 180)))
    los = cell_average(lambda lat: 10.0 * np.cos(np.deg2rad(lat - 7.25)) * np.ones((1, 180)), m.lat_edges)
    path = write_fits(tmp_path / "coarse.fits", los, cea_header(90, 180, B0COL0=7.25))
    got = pf.read_map(path, field="los")
    assert got.br[-1, 0] == pytest.approx(10.0, rel=1e-4)
    centre = los[-1, 0] / np.cos(np.deg2rad(m.lat[-1] - 7.25))
    assert abs(centre / 10.0 - 1) > 0.025


def test_dividing_by_cos_latitude_alone_would_be_far_off(tmp_path):
    # the numbers: 1.47x the truth at B0 = +7.25 (north) with 1/cos(latitude)
    path, m, _ = los_map(tmp_path, "los.fits", np.full(720, 7.25), B0COL0=7.25)
    raw = pf.read_map(path).br
    old = raw / np.maximum(np.cos(np.deg2rad(m.lat)), 0.1)[:, None]
    old_mean = pf.measure_caps(pf.SynopticMap.from_array(old)).north.mean_field.value
    new_mean = pf.measure_caps(pf.read_map(path, field="los")).north.mean_field.value
    assert old_mean / cap_mean_truth() > 1.3
    assert abs(new_mean / cap_mean_truth() - 1) < 0.01


def test_b0_per_column_from_the_rotation_number_matches_sunpy(tmp_path):
    # no B0 keywords: each column's central-meridian time in rotation 2200 (sunpy: the column at
    # longitude L crosses at rotation number N + 1 - L / 360), then sunpy's B0 at that time
    path, m, _ = los_map(tmp_path, "los.fits", np.zeros(720), CAR_ROT=2200, **{"DATE-OBS": "2018-02-10T00:00:00"})
    got = pf.read_map(path, field="los")
    assert "rotation 2200" in got.los_b0_how
    cols = np.arange(0, 720, 37)
    times = carrington_rotation_time(2200 + 1 - m.lon[cols] / 360.0)
    expected = B0(times).to_value("deg")
    np.testing.assert_allclose(got.los_b0[cols], expected, atol=0.01)
    assert np.ptp(got.los_b0) > 0.3  # B0 changes across the rotation: one value would not do


def test_b0_from_column_times(tmp_path):
    # TCOLk: column time as MJD polynomial in x = (CRLN - 180) / 180 (linear here)
    start = Time("2031-03-01T00:00:00", scale="utc").mjd
    keys = {"TCOL0": start + 13.6, "TCOL1": -13.6}
    path, m, _ = los_map(tmp_path, "los.fits", np.zeros(720), **keys)
    got = pf.read_map(path, field="los")
    assert "TCOLk" in got.los_b0_how
    mjd = start + 13.6 - 13.6 * (m.lon - 180) / 180
    cols = np.arange(5, 720, 50)
    expected = B0(Time(mjd[cols], format="mjd", scale="utc")).to_value("deg")
    np.testing.assert_allclose(got.los_b0[cols], expected, atol=0.005)


def test_varying_b0_columns_and_a_hidden_pole(tmp_path):
    # B0 from -7 to -4 across the map: the north pole is hidden beyond the limb; what is seen is exact
    b0 = np.linspace(-7.0, -4.0, 720)
    x = (pf.SynopticMap.from_array(np.zeros((2, 720))).lon - 180) / 180
    coefficients = np.polynomial.polynomial.polyfit(x, b0, 1)
    path, m, radial = los_map(tmp_path, "los.fits", b0, limb=82.0, B0COL0=coefficients[0],
                              B0COL1=coefficients[1])
    got = pf.read_map(path, field="los")
    np.testing.assert_allclose(got.los_b0, b0, atol=1e-9)
    seen = np.isfinite(got.br)
    np.testing.assert_allclose(got.br[seen], radial[seen], atol=0.03)
    assert not seen[-1].any()  # the pole itself is not seen


def test_a_los_map_with_no_way_to_know_b0_is_refused(tmp_path):
    header = cea_header(90, 180)
    del header["CAR_ROT"], header["DATE-OBS"]
    path = write_fits(tmp_path / "blind.fits", np.ones((90, 180), np.float32), header)
    with pytest.raises(pf.MapFormatError, match="blind.fits.*B0"):
        pf.read_map(path, field="los")


def test_column_b0_prefers_the_header_polynomial():
    lon = np.array([0.5, 180.0, 359.5])
    b0, how = column_b0({"B0COL0": 1.0, "B0COL1": 2.0, "CRLT_OBS": 5.0}, lon, 2200, None)
    np.testing.assert_allclose(b0, 1.0 + 2.0 * (lon - 180) / 180)
    assert "B0COLk" in how
    b0, how = column_b0({"CRLT_OBS": 5.0}, lon, None, None)
    assert np.all(b0 == 5.0) and "CRLT_OBS" in how


@pytest.mark.parametrize("n", [0, 8, 40])
def test_row_shape_integrals_match_quadrature(n):
    # reference: scipy.integrate.quad of the three integrals as defined, on a coarse polar row, an
    # equatorial one and a southern one
    from scipy.integrate import quad

    from polarflux.los import row_shape_integrals

    rows = np.deg2rad([[77.88, 90.0], [10.0, 12.0], [-90.0, -77.88], [58.0, 66.0]])
    i0, i1, i2 = row_shape_integrals(rows[:, 0], rows[:, 1], n)

    def w(p):
        return abs(np.sin(p)) ** n

    for k, (a, b) in enumerate(rows):
        assert i0[k] == pytest.approx(quad(lambda p: w(p) * np.cos(p), a, b)[0], rel=1e-9, abs=1e-15)
        assert i1[k] == pytest.approx(quad(lambda p: w(p) * np.cos(p) ** 2, a, b)[0], rel=1e-9, abs=1e-15)
        assert i2[k] == pytest.approx(quad(lambda p: w(p) * np.sin(p) * np.cos(p), a, b)[0], rel=1e-9, abs=1e-15)


def _steep_cap_los(n, b0, nrows=90, ncols=36, limb=82.0):
    """A 10 G |sin|^n cap (odd) seen at B0 on a coarse sine grid: each row the area average of
    B_r cos(latitude - B0), by scipy.integrate.quad in latitude (area element cos(latitude))."""
    from scipy.integrate import quad

    m = pf.SynopticMap.from_array(np.zeros((nrows, ncols)))
    e = np.deg2rad(m.lat_edges)
    b = np.deg2rad(b0)
    rows = np.array([quad(lambda p: 10 * np.sign(p) * abs(np.sin(p)) ** n * np.cos(p - b) * np.cos(p), e[k], e[k + 1])[0]
                     / (np.sin(e[k + 1]) - np.sin(e[k])) for k in range(nrows)])
    los = np.repeat(rows[:, None], ncols, axis=1)
    los[np.abs(m.lat - b0) > limb] = np.nan
    return m, los


@pytest.mark.parametrize("n,b0", [(20, 7.0), (40, 5.0), (40, 0.0), (20, -5.0)])
def test_a_steep_cap_on_a_coarse_grid_comes_back(tmp_path, n, b0):
    # The top row of 90 sine-latitude rows spans 77.9-90 degrees; a field rising steeply across it
    # needs the divisor weighted by the field itself. Truth over the seen rows from the first row
    # centred poleward of 60 degrees, in closed form: 10 (s1^(n+1) - s0^(n+1)) / ((n + 1)(s1 - s0))
    # with s0, s1 the sines of their outer edges (rows beyond 82 degrees from the disk centre unseen).
    from polarflux.los import los_to_radial

    m, los = _steep_cap_los(n, b0)
    path = write_fits(tmp_path / "steep.fits", los, cea_header(90, 36, B0COL0=b0))
    got = pf.read_map(path, field="los")
    rows = np.flatnonzero((m.lat >= 60.0) & np.isfinite(los[:, 0]))
    assert np.all(np.diff(rows) == 1) and rows.size >= 4
    s = np.sin(np.deg2rad(m.lat_edges))
    s0, s1 = s[rows[0]], min(1.0, s[rows[-1] + 1])
    truth = 10 * (s1 ** (n + 1) - s0 ** (n + 1)) / ((n + 1) * (s1 - s0))
    w = np.diff(s)[rows]
    assert np.sum(got.br[rows, 0] * w) / w.sum() == pytest.approx(truth, rel=3e-3)
    plain = los.copy()
    los_to_radial(plain, m.lat, np.full(36, b0), lat_edges=m.lat_edges, shape_caps=False)
    assert abs(np.sum(plain[rows, 0] * w) / w.sum() / truth - 1) > 0.01  # what the shape removes


@pytest.mark.parametrize("n,b0", [(24, 6.0), (24, 1.0), (8, 3.0)])
def test_a_steep_cap_on_forty_rows_is_fitted_from_its_three_rows(tmp_path, n, b0):
    # 40 sine-latitude rows: the cap's rows span 58.2-64.2, 64.2-71.8 and 71.8-90 degrees, three
    # rows, all seen at these B0. Their area-weighted mean over the three rows against the closed
    # form 10 (1 - s0^(n+1)) / ((n + 1)(1 - s0)), s0 = 0.85 the sine of the lowest row's edge (analytic
    # projection, quadrature). The sin^8 prior instead of a fit read a sin^24 cap 4-9 % low.
    m, los = _steep_cap_los(n, b0, nrows=40, ncols=36)
    path = write_fits(tmp_path / "steep40.fits", los, cea_header(40, 36, B0COL0=b0))
    got = pf.read_map(path, field="los")
    rows = np.arange(37, 40)
    s = np.sin(np.deg2rad(m.lat_edges))
    assert s[37] == pytest.approx(0.85) and np.isfinite(los[rows, 0]).all()
    truth = 10 * (1 - s[37] ** (n + 1)) / ((n + 1) * (1 - s[37]))
    w = np.diff(s)[rows]
    assert np.sum(got.br[rows, 0] * w) / w.sum() == pytest.approx(truth, rel=5e-3)
    if n != 8:  # what the sin^8 prior would have given: several per cent low
        from polarflux.los import row_shape_integrals

        a, b = np.deg2rad(m.lat_edges[rows]), np.deg2rad(m.lat_edges[rows + 1])
        i0, i1, i2 = row_shape_integrals(a, b, 8)
        fixed = los[rows, 0] * i0 / (np.cos(np.deg2rad(b0)) * i1 + np.sin(np.deg2rad(b0)) * i2)
        assert np.sum(fixed * w) / w.sum() / truth - 1 < -0.03


def test_the_cap_shape_is_fitted_where_one_fits_and_the_sin8_prior_taken_where_none_does():
    from polarflux.los import SHAPE_PRIOR, cap_shape_exponent, row_shape_integrals

    e = np.deg2rad(pf.SynopticMap.from_array(np.zeros((90, 4))).lat_edges)[-8:]
    a, b = e[:-1], e[1:]
    area = np.sin(b) - np.sin(a)
    for n in (6, 24):  # exact row means of 5 |sin|^n: the exponent comes back
        assert cap_shape_exponent(5 * row_shape_integrals(a, b, n)[0] / area, a, b) == n
    # a cap near its reversal, or too few rows: no shape fits, the sin^8 fall-off is taken
    mixed = np.array([3.0, -2.0, 4.0, -3.5, 2.5, -4.0, 3.0])
    assert SHAPE_PRIOR == 8
    assert cap_shape_exponent(mixed, a, b) == SHAPE_PRIOR
    assert cap_shape_exponent(np.array([np.nan, np.nan, 1.0, 2.0, np.nan, np.nan, np.nan]), a, b) == SHAPE_PRIOR


def test_read_map_follows_the_header_by_default(tmp_path):
    # a library call with no field given reads MAPFIELD as the measure command does: a line-of-sight
    # map is not returned as if it were radial
    path, m, radial = los_map(tmp_path, "los.fits", np.full(720, 5.0), limb=84.0, B0COL0=5.0, MAPFIELD="LOS")
    plain = pf.read_map(path)
    np.testing.assert_array_equal(plain.br, pf.read_map(path, field="los").br)
    assert "B0COLk" in plain.los_b0_how
    assert not np.allclose(plain.br, pf.read_map(path, field="radial").br, equal_nan=True)
