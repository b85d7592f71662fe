"""The invented scenario: facts of the trade, an open dataset, published magnitudes, round trips.

Sources:
  * cycle periods: yearly sunspot numbers 1700-2008 in statsmodels.datasets.sunspots;
  * polar-cap flux at minimum of order 1e22 Mx: Svalgaard, Duvall & Scherrer 1978
    (Sol. Phys. 58, 225) give about 3e22 Mx (3e14 Wb) per cap;
  * axial dipole at minimum of a few gauss: Cameron, Jiang & Schuessler 2016 and
    Jiang & Cao 2018 report about 1.8-2.5 G;
  * the rest is common practice (cycles near 11 years, emergence from about 30 degrees
    toward the equator, reversals near maximum, Hale's polarity law).
"""

from __future__ import annotations

import csv
import json
import warnings

import numpy as np
import pytest
from astropy import units as u

import polarflux as pf
from polarflux.synthetic import ScenarioSettings, settings_for, write_scenario


@pytest.fixture(scope="module")
def scenario(three_cycles):
    return three_cycles


def read_csv(path):
    with open(path, newline="") as handle:
        return list(csv.DictReader(handle))


def observed_periods_1700_2008():
    """Periods between minima of the yearly sunspot numbers (local minima at least 7 years apart)."""
    import statsmodels.api as sm

    data = sm.datasets.sunspots.load_pandas().data
    years, values = data["YEAR"].to_numpy(), data["SUNACTIVITY"].to_numpy()
    minima = []
    for i in range(1, len(values) - 1):
        window = values[max(0, i - 5): i + 6]
        if values[i] == window.min() and (not minima or years[i] - minima[-1] >= 7):
            minima.append(years[i])
    return np.diff(minima)


def test_cycles_last_about_eleven_years_and_within_the_observed_range(scenario):
    _, truth = scenario
    periods = np.array(truth["periods_years"])
    assert 10.0 <= periods.mean() <= 12.0  # common practice
    observed = observed_periods_1700_2008()
    assert 9.0 <= observed.mean() <= 12.5
    assert periods.min() >= observed.min() and periods.max() <= observed.max()


def test_rise_times_fall_within_the_observed_range(scenario):
    _, truth = scenario
    rises = [c["maximum_years"] - c["start_years"] for c in truth["cycles"] if c["maximum_years"] is not None]
    assert rises and all(2.5 <= r <= 7.0 for r in rises)  # observed rise times: roughly 3 to 7 years


def test_emergence_drifts_from_thirty_degrees_toward_the_equator(scenario):
    folder, truth = scenario
    rows = read_csv(folder / "regions.csv")
    for c in truth["cycles"][:2]:
        mine = [(float(r["years"]) - c["start_years"], abs(float(r["latitude"]))) for r in rows
                if int(r["cycle"]) == c["cycle"]]
        early = [lat for t, lat in mine if t < 2.0]
        late = [lat for t, lat in mine if 9.0 < t < 11.0]
        assert 22.0 <= np.mean(early) <= 32.0
        assert np.mean(late) <= 10.0


def test_new_cycle_regions_carry_the_opposite_leading_polarity(scenario):
    folder, truth = scenario
    rows = read_csv(folder / "regions.csv")
    signs = {}
    for r in rows:
        lat, flux, cycle = float(r["latitude"]), float(r["flux_mx"]), int(r["cycle"])
        signs.setdefault(cycle, []).append(np.sign(flux) * np.sign(lat))  # leading polarity in the north
    for cycle, values in signs.items():
        assert np.all(np.array(values) == values[0]), cycle  # Hale: opposite hemispheres, opposite leaders
    numbers = sorted(signs)
    for a, b in zip(numbers[:-1], numbers[1:], strict=True):
        assert signs[a][0] == -signs[b][0]


def test_polar_fields_reverse_within_two_years_of_maximum(scenario):
    _, truth = scenario
    checked = 0
    for c in truth["cycles"]:
        if c["maximum_years"] is None:
            continue
        for hemisphere in ("north", "south"):
            reversal = c[f"{hemisphere}_reversal_years"]
            assert reversal is not None
            assert abs(reversal - c["maximum_years"]) <= 2.0
            checked += 1
    assert checked >= 4


def test_magnitudes_at_minimum_are_realistic(scenario):
    _, truth = scenario
    from polarflux.geometry import spherical_cap_area

    cap_area = spherical_cap_area(60.0)
    for c in truth["cycles"]:
        if "axial_dipole_at_minimum_g" not in c:
            continue
        assert 1.0 <= abs(c["axial_dipole_at_minimum_g"]) <= 5.0  # a few gauss
        for hemisphere in ("north", "south"):
            flux = abs(c[f"{hemisphere}_mean_field_at_minimum_g"]) * cap_area
            assert 3e21 <= flux <= 1e23  # of order 1e22 Mx per cap


def test_noise_is_a_few_gauss_and_grows_toward_the_poles():
    from polarflux.synthetic import Instrument, _observe
    from polarflux.transport.model import _Grid

    grid = _Grid(90, 180)
    inst = Instrument("test", 90, 180, 1.0, 3.0, 0.0, 1.0)
    br, m = _observe(np.zeros((90, 180)), grid, inst, np.random.default_rng(0))
    equator = br[np.abs(m.lat) < 20].std()
    polar = br[np.abs(m.lat) > 70].std()
    assert 2.0 <= equator <= 4.0
    assert polar > 2.0 * equator


def test_precursor_relation_holds_with_its_known_scatter(scenario):
    _, truth = scenario
    rel = truth["precursor_relation"]
    for c in truth["cycles"]:
        expected = rel["reference_amplitude"] * abs(c["precursor_dipole_g"]) / rel["reference_dipole_g"]
        assert c["amplitude"] == pytest.approx(expected * c["random_factor"], rel=1e-9)
        assert abs(np.log(c["random_factor"])) < 4 * rel["log_scatter"]


def test_files_read_with_read_map_and_sunpy_at_the_same_coordinates(scenario):
    import sunpy.map

    folder, truth = scenario
    for relative in (truth["maps"][0], truth["maps"][-1]):
        path = folder / relative
        m = pf.read_map(path)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            sm = sunpy.map.Map(path)
            nlat, nlon = m.shape
            lon = sm.pixel_to_world(np.arange(nlon) * u.pix, np.zeros(nlon) * u.pix).lon.to_value(u.deg) % 360
            lat = sm.pixel_to_world(np.zeros(nlat) * u.pix, np.arange(nlat) * u.pix).lat.to_value(u.deg)
        np.testing.assert_allclose(m.lon, lon, atol=1e-6)
        np.testing.assert_allclose(m.lat, lat, atol=1e-6)
        assert m.instrument in ("MSN-A", "MSN-B") and m.carrington_rotation is not None
        assert m.time.utc.isot[:4] >= "2051"


def test_noise_free_maps_reproduce_the_truth_polar_fields(tmp_path):
    base = settings_for("low", cycles=1, duration_years=1.0, seed=5, missing_rotations=0, hidden_pole_limit=90.0)
    clean = ScenarioSettings(**{**base.__dict__, "instruments": tuple(
        type(i)(i.name, i.nlat, i.nlon, 1.0, 0.0, i.start_year, i.end_year) for i in base.instruments)})
    write_scenario(tmp_path, clean)
    ds = pf.measure_archive([tmp_path / "maps"])
    truth = read_csv(tmp_path / "truth_series.csv")
    assert ds.sizes["time"] == len(truth)
    for i, row in enumerate(truth):
        for j, hemisphere in enumerate(("north", "south")):
            assert ds["mean_field"].values[i, j] == pytest.approx(float(row[f"{hemisphere}_mean_field_g"]), rel=2e-3)
        assert ds["axial_dipole"].values[i] == pytest.approx(float(row["axial_dipole_g"]), rel=2e-3)


def test_same_seed_gives_identical_arrays_and_another_seed_does_not(tmp_path):
    settings = settings_for("low", cycles=1, duration_years=0.3, seed=21, missing_rotations=0)
    write_scenario(tmp_path / "a", settings)
    write_scenario(tmp_path / "b", settings)
    write_scenario(tmp_path / "c", settings_for("low", cycles=1, duration_years=0.3, seed=22, missing_rotations=0))
    names = sorted(p.relative_to(tmp_path / "a") for p in (tmp_path / "a").rglob("*.fits"))
    assert names
    for name in names:
        a, b = pf.read_map(tmp_path / "a" / name), pf.read_map(tmp_path / "b" / name)
        np.testing.assert_array_equal(a.values, b.values)
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()
    assert not np.array_equal(pf.read_map(tmp_path / "a" / names[0]).values,
                              pf.read_map(tmp_path / "c" / names[0]).values)
    assert json.loads((tmp_path / "a" / "truth.json").read_text()) == json.loads((tmp_path / "b" / "truth.json").read_text())


def test_an_existing_scenario_is_not_overwritten(tmp_path):
    settings = settings_for("low", cycles=1, duration_years=0.1, seed=1, missing_rotations=0)
    write_scenario(tmp_path, settings)
    with pytest.raises(pf.OutputExistsError, match="holds a scenario already"):
        write_scenario(tmp_path, settings)


def test_settings_round_trip_through_toml(tmp_path):
    for settings in (settings_for("low", cycles=2, seed=9), settings_for("high", decay_time=None, duration_years=3.0)):
        path = tmp_path / "s.toml"
        path.write_text(settings.to_toml())
        assert ScenarioSettings.from_toml(path) == settings


def test_committed_sample_is_the_default_scenario():
    from pathlib import Path

    folder = Path(__file__).resolve().parents[1] / "synthetic_maps"
    assert (folder / "scenario.toml").read_text() == settings_for("standard").to_toml()
    truth = json.loads((folder / "truth.json").read_text())
    maps = sorted((folder / "maps").rglob("*.fits"))
    assert len(maps) == 4
    for path in maps:
        m = pf.read_map(path)
        assert str(path.relative_to(folder)) in truth["maps"]
        assert np.isfinite(m.values).mean() > 0.8
    total = sum(p.stat().st_size for p in folder.rglob("*") if p.is_file())
    assert total < 3_000_000  # a few MB at most


def test_committed_sunspots_keep_their_columns_first_and_read():
    from pathlib import Path

    from polarflux.sunspots import read_sunspots

    path = Path(__file__).resolve().parents[1] / "synthetic_maps" / "sunspots.csv"
    rows = read_csv(path)
    assert list(rows[0]) == ["date", "sunspot_number", "sunspot_number_north", "sunspot_number_south"]
    times, values = read_sunspots(path)
    assert times.size == len(rows) and np.all(values >= 0)
    # the hemispheres of the default world share activity equally (no asymmetry set)
    north = sum(float(r["sunspot_number_north"]) for r in rows)
    south = sum(float(r["sunspot_number_south"]) for r in rows)
    assert north == pytest.approx(south, rel=0.01)
