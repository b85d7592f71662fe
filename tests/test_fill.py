"""The unseen pole: latitude bands, the temporal fill and the fill uncertainty.

Reference: a hidden pole removed from an analytic field and refilled. The field is
B(latitude, t) = B_p(t) sin^12(latitude) (a shape the profile fill does not assume),
its cap mean in closed form, B_p(t) * (1 - s0^13) / (13 (1 - s0)); the pole is hidden
where |latitude - B0| > 82 degrees with B0 from ``sunpy.coordinates.sun.B0`` (a
general reference library) at each map's time.
"""

import csv

import numpy as np
import pytest
from astropy import units as u
from astropy.time import Time
from conftest import cea_header, write_fits
from sunpy.coordinates.sun import B0, carrington_rotation_number

import polarflux as pf
from polarflux.fill import band_areas, band_edges, temporal_fill

EXPONENT = 12


def amplitude(years):
    """A polar field weakening from 12 G towards zero over four years (as before a reversal)."""
    return 12.0 - 2.5 * years


def cap_mean(b_p, cap=60.0):
    s0 = np.sin(np.deg2rad(cap))
    return b_p * (1 - s0 ** (EXPONENT + 1)) / ((EXPONENT + 1) * (1 - s0))


@pytest.fixture(scope="module")
def hidden_pole_archive(tmp_path_factory):
    """Monthly radial maps of the analytic field over three years, the pole hidden by B0."""
    folder = tmp_path_factory.mktemp("hidden_pole")
    start = Time("2041-01-10T00:00:00", scale="utc")
    paths, truth = [], []
    grid = pf.SynopticMap.from_array(np.zeros((180, 360)))
    s = np.sin(np.deg2rad(grid.lat))
    for k in range(40):
        t = start + k * 27.2753 * u.day
        years = k * 27.2753 / 365.25
        b0 = float(B0(t).to_value("deg"))
        field = amplitude(years) * np.sign(s) * np.abs(s) ** EXPONENT
        data = np.repeat(field[:, None], 360, axis=1)
        data[np.abs(grid.lat - b0) > 82.0] = np.nan
        rotation = int(carrington_rotation_number(t))
        header = cea_header(180, 360, CAR_ROT=rotation, **{"DATE-OBS": t.isot})
        paths.append(write_fits(folder / f"map_{k:02d}.fits", data.astype(np.float32), header))
        truth.append((t, cap_mean(amplitude(years)), b0))
    return folder, paths, truth


def test_bands_cover_the_cap_exactly():
    edges = band_edges(60.0)
    assert edges[0] == 60.0 and edges[-1] == 90.0 and np.allclose(np.diff(edges), 1.0)
    assert band_areas(60.0).sum() == pytest.approx(1.0, abs=1e-12)
    assert band_edges(62.5)[:2].tolist() == [62.5, 63.0]


@pytest.mark.parametrize("fill", ["none", "profile", "temporal"])
def test_hidden_pole_refilled(hidden_pole_archive, fill):
    folder, paths, truth = hidden_pole_archive
    record = pf.measure_archive([folder], fill=fill)
    expected = np.array([t[1] for t in truth])
    north = record["mean_field"].sel(hemisphere="north").values
    south = -record["mean_field"].sel(hemisphere="south").values
    error = record["fill_error"].values
    hidden = record["coverage"].values < 0.999
    assert hidden.any(axis=0).all()  # each pole is hidden in some maps
    ratio = np.concatenate([north / expected, south / expected])
    actual = np.abs(np.stack([north - expected, south - expected], axis=1))
    assert record.attrs["fill"] == fill and record.attrs["fill_uncertainty"]
    if fill == "temporal":
        # refilled to within 1 % in every map between two well-seen months of its pole, whichever
        # pole was hidden (before the first and after the last such month the value is held,
        # and its uncertainty grows: checked below)
        t = np.array([(x[0] - truth[0][0]).to_value("day") / 365.25 for x in truth])
        for j, values in ((0, north), (1, south)):
            seen = np.flatnonzero(~hidden[:, j])
            inside = (t > t[seen[0]]) & (t < t[seen[-1]])
            assert np.max(np.abs(values[inside] / expected[inside] - 1)) < 0.01
        assert np.all(np.isfinite(error))
    elif fill == "none":
        # leaving the hidden rows out loses flux where the pole is tilted away
        assert np.min(ratio) < 0.95
    else:
        # the profile fill assumes sin^8: for this sin^12 field, with whole rows hidden above
        # 81.5 degrees, it falls short by up to about 9 %
        assert 0.003 < np.max(np.abs(ratio - 1)) < 0.10
    # the fill uncertainty is an honest bound: the actual error stays within twice it (plus 0.01 G
    # of float32 rounding), and it is zero where nothing was hidden
    assert np.all(actual <= 2 * error + 0.01)
    assert np.all(error[~hidden] < 1e-9)


def test_temporal_fill_travels_through_the_csv_record(hidden_pole_archive, tmp_path):
    folder, paths, truth = hidden_pole_archive
    record = pf.measure_archive([folder], fill="temporal")
    path = pf.write_record(record, tmp_path / "record.csv")
    with open(path, newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert {r["fill"] for r in rows} == {"temporal"}
    back = pf.read_record(path)
    assert back.attrs["fill"] == "temporal"
    np.testing.assert_allclose(back["fill_error"].values, record["fill_error"].values, rtol=1e-12)
    np.testing.assert_allclose(back["mean_field"].values, record["mean_field"].values, rtol=1e-12)


def test_temporal_fill_of_a_band_never_well_seen_and_of_nothing_seen():
    cap = 60.0
    nb = band_edges(cap).size - 1
    times = np.arange(6.0)
    mean = np.full((6, nb), 2.0)
    coverage = np.ones((6, nb))
    coverage[:, -1] = 0.5  # the last band is never well seen: the profile from the band before
    out = temporal_fill(times, mean, coverage, cap)
    edges = band_edges(cap)
    centres = 0.5 * (edges[:-1] + edges[1:])
    expected = band_areas(cap)[-1] * 0.5 * 2.0 * (np.sin(np.deg2rad(centres[-1])) / np.sin(np.deg2rad(centres[-2]))) ** 8
    np.testing.assert_allclose(out["mean_added"], expected, rtol=1e-12)
    nothing = temporal_fill(times, np.full((6, nb), np.nan), np.zeros((6, nb)), cap)
    assert np.all(np.isnan(nothing["mean_added"])) and np.all(np.isnan(nothing["error"]))


def test_a_record_cut_at_a_date_is_filled_from_the_maps_before_it(hidden_pole_archive):
    # the forecast-cut rule: the temporal fill of a cut record uses no map after the cut
    from polarflux.hindcast import cut_record
    from polarflux.timeseries import to_decimal_year

    folder, paths, truth = hidden_pole_archive
    full = pf.measure_archive([folder], fill="temporal")
    t, _ = to_decimal_year(full["time"].values)
    date = 0.5 * (t[17] + t[18]) + 0.5 * 27.2753 / 365.25  # maps 0..17 have ended by then
    cut = cut_record(full, date)
    assert cut.sizes["time"] == 18
    alone = pf.measure_archive(paths[:18], fill="temporal")
    np.testing.assert_allclose(cut["mean_field"].values, alone["mean_field"].values, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(cut["axial_dipole"].values, alone["axial_dipole"].values, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(cut["fill_error"].values, alone["fill_error"].values, rtol=1e-12, atol=1e-12)
    # and the full record's last cut maps differ: they were filled with later maps
    assert not np.allclose(full["mean_field"].values[:18], alone["mean_field"].values)


def test_the_local_line_between_well_seen_maps_is_a_weighted_least_squares_line():
    # reference: numpy.polyfit of degree 1 with weights sqrt(tricube) (weighted least squares,
    # Cleveland 1979 for the tricube kernel), evaluated at each target time
    from polarflux.fill import _local_line

    rng = np.random.default_rng(2)
    tg = np.sort(rng.uniform(0.0, 4.0, 40))
    vg = 3.0 - 1.2 * tg + rng.normal(0.0, 0.3, tg.size)
    at = np.array([0.5, 1.7, 2.2, 3.4])
    fitted, factor = _local_line(at, tg, vg, 0.75)
    for k, x in enumerate(at):
        w = np.clip(1 - (np.abs(tg - x) / 0.75) ** 3, 0, None) ** 3
        keep = w > 0
        line = np.polyfit(tg[keep] - x, vg[keep], 1, w=np.sqrt(w[keep]))
        assert fitted[k] == pytest.approx(line[1], rel=1e-9)
        assert 0 < factor[k] < 1  # several maps: less noise than one


def test_the_fill_noise_factor_matches_the_spread_of_the_fit():
    # the factor sqrt(sum l_i^2) times the noise is the standard deviation of the fitted value over
    # draws of independent noise (a linear combination of the values; common practice)
    from polarflux.fill import _local_line

    rng = np.random.default_rng(3)
    tg = np.sort(rng.uniform(0.0, 4.0, 30))
    at = np.array([1.0, 2.5])
    draws = np.array([_local_line(at, tg, 5.0 + 0.5 * tg + rng.normal(0, 0.4, tg.size), 0.75)[0]
                      for _ in range(4000)])
    _, factor = _local_line(at, tg, np.zeros(tg.size), 0.75)
    np.testing.assert_allclose(draws.std(axis=0), 0.4 * factor, rtol=0.05)
    np.testing.assert_allclose(draws.mean(axis=0), 5.0 + 0.5 * at, atol=0.02)  # a line comes back exactly
