"""Harder invented worlds: each setting's effect, checked against an outside reference where one exists.

Sources named beside the checks:
  * line-of-sight projection of a radial field at the central meridian: Br cos(latitude - B0)
    (spherical geometry, common practice), with B0, L0 and the Carrington rotation times
    from sunpy.coordinates.sun (a reference library);
  * Hale's polarity law (leading polarities opposite in the two hemispheres, alternating from
    cycle to cycle) and Joy's law (tilt growing with latitude): common practice;
  * a bipolar region's contribution to the axial dipole grows as its flux times the
    latitude separation of its polarities (Petrovay, Nagy & Yeates 2020, J. Space Weather
    Space Clim. 10, 50; from memory);
  * the precursor power law is recovered by a log-log ordinary least-squares fit (statsmodels);
  * the anti-Hale fraction by a binomial test (scipy.stats.binomtest).
"""

from __future__ import annotations

import csv
import json
import math
import warnings
from dataclasses import replace

import numpy as np
import pytest
from astropy import units as u
from astropy.time import Time

import polarflux as pf
from polarflux import _synth_observe as observe
from polarflux._synth_emerge import _Cycle, _shape_for_amplitude, cycle_regions
from polarflux.synthetic import (
    PRESETS,
    Instrument,
    ScenarioSettings,
    settings_for,
    truth_measures,
    write_scenario,
)
from polarflux.transport import FluxTransport


def read_csv(path):
    with open(path, newline="") as handle:
        return list(csv.DictReader(handle))


@pytest.fixture(scope="module")
def hard_world(tmp_path_factory):
    """A year and a half of the hard preset on small grids, both instruments on, many regions."""
    folder = tmp_path_factory.mktemp("hard_world")
    base = settings_for("low", preset="hard", cycles=1, duration_years=1.5, seed=17, model_nlat=60, model_nlon=120,
                        regions_per_unit_day=0.03, anti_hale_fraction=0.2, hemispheric_asymmetry=0.3)
    instruments = (replace(base.instruments[0], nlat=40, nlon=120),
                   replace(base.instruments[1], nlat=60, nlon=120, start_year=0.0))
    settings = replace(base, instruments=instruments)
    truth = write_scenario(folder, settings)
    return folder, truth, settings


def column_times(header, lon):
    x = (np.asarray(lon) - 180.0) / 180.0
    mjd = np.polynomial.polynomial.polyval(x, [header[f"TCOL{k}"] for k in range(4)])
    b0 = np.polynomial.polynomial.polyval(x, [header[f"B0COL{k}"] for k in range(4)])
    return Time(mjd, format="mjd", scale="utc"), b0


# --------------------------------------------------------------------------- presets and settings


def test_the_hard_preset_turns_every_harder_setting_on_and_the_default_stays():
    hard = settings_for("standard", preset="hard")
    default = settings_for("standard")
    assert "hard" in PRESETS
    assert default == replace(ScenarioSettings(), model_nlat=180, model_nlon=360)
    assert default.observation == "radial" and default.precursor_exponent == 1.0
    # transport truth outside the forecast's prior ranges (diffusivity 250-600 km2/s, default flow profile)
    assert hard.diffusivity > 600 and hard.flow_cutoff_latitude != 75.0 and hard.flow_cycle_sensitivity > 0
    assert hard.observation == "los-meridian" and hard.long_gaps > 0 and hard.anti_hale_fraction > 0
    assert hard.large_regions_per_cycle > 0 and hard.hemispheric_asymmetry > 0 and hard.precursor_exponent != 1.0
    assert all(i.saturation_g and i.blur_deg > 0 for i in hard.instruments)
    assert settings_for("low", preset="hard", diffusivity=300.0).diffusivity == 300.0  # changes win
    with pytest.raises(pf.SettingsError, match="preset 'nope'"):
        settings_for(preset="nope")
    with pytest.raises(pf.SettingsError, match="observation"):
        settings_for(observation="sideways")


def test_hard_settings_round_trip_through_toml(tmp_path):
    settings = settings_for("low", preset="hard", seed=4)
    path = tmp_path / "s.toml"
    path.write_text(settings.to_toml())
    assert ScenarioSettings.from_toml(path) == settings
    path.write_text(settings.to_toml().replace("blur_deg", "blurr_deg", 1))
    with pytest.raises(pf.SettingsError, match="s.toml: unknown instrument setting"):
        ScenarioSettings.from_toml(path)


# --------------------------------------------------------------------------- transport truth


def test_flow_profile_shape_follows_the_cutoff_setting():
    from polarflux.synthetic import _model

    lat = np.linspace(-89.5, 89.5, 180)
    for cutoff in (60.0, 90.0):
        settings = settings_for("low", flow_cutoff_latitude=cutoff, flow_speed=14.0)
        model = _model(settings, axisymmetric=True)
        # v0 sin(pi lat / cutoff) poleward of the equator, zero beyond the cutoff
        # (the form of van Ballegooijen, Cartledge & Priest 1998, ApJ 501, 866)
        expected = np.where(np.abs(lat) < cutoff, 14.0 * np.sin(np.pi * lat / cutoff), 0.0)
        np.testing.assert_allclose(model.flow(lat), expected, atol=1e-12)
        assert abs(lat[np.argmax(model.flow(lat))] - cutoff / 2) < 1.0
    model = _model(settings_for("low", diffusivity=700.0, decay_time=6.0), axisymmetric=True)
    assert model.diffusivity == 700.0 and model.decay_time == 6.0


@pytest.fixture(scope="module")
def many_cycles(tmp_path_factory):
    """Five cycles on a coarse grid, no maps: only the truth, for the laws between cycles."""
    folder = tmp_path_factory.mktemp("many_cycles")
    settings = settings_for("low", preset="hard", cycles=5, seed=5, model_nlat=36, model_nlon=72, instruments=(),
                            step_days=5.0, regions_per_unit_day=0.002, precursor_scatter=0.02,
                            precursor_exponent=1.6, flow_cycle_scatter=0.0, missing_rotations=0, long_gaps=0,
                            observation="radial")
    return folder, write_scenario(folder, settings), settings


def test_meridional_flow_is_weaker_in_stronger_cycles(many_cycles):
    _, truth, settings = many_cycles
    amplitude = np.array([c["amplitude"] for c in truth["cycles"]])
    flow = np.array([c["flow_speed_m_s"] for c in truth["cycles"]])
    assert np.ptp(flow) > 0.5  # it changes from cycle to cycle
    order = np.argsort(amplitude)
    assert np.all(np.diff(flow[order]) < 0)  # published sense: weaker flow in stronger cycles
    expected = settings.flow_speed * (amplitude / settings.reference_amplitude) ** -settings.flow_cycle_sensitivity
    np.testing.assert_allclose(flow, expected, rtol=1e-12)


# --------------------------------------------------------------------------- precursor law


def test_precursor_exponent_is_recovered_by_a_log_log_fit(many_cycles):
    import statsmodels.api as sm

    _, truth, settings = many_cycles
    dipole = np.abs([c["precursor_dipole_g"] for c in truth["cycles"]])
    amplitude = np.array([c["amplitude"] for c in truth["cycles"]])
    assert np.log(dipole.max() / dipole.min()) > 0.3  # enough lever arm for the fit
    fit = sm.OLS(np.log(amplitude), sm.add_constant(np.log(dipole))).fit()
    low, high = fit.conf_int(alpha=0.01)[1]
    assert low <= settings.precursor_exponent <= high
    assert not low <= 1.0 <= high  # the linear law of the default world is excluded
    assert abs(fit.params[1] - 1.6) < 0.15


def test_sunspot_file_has_hemispheric_columns_summing_to_the_total(hard_world, many_cycles):
    from polarflux.sunspots import read_sunspots

    for folder, _truth, _ in (hard_world, many_cycles):
        path = folder / "sunspots.csv"
        rows = read_csv(path)
        assert list(rows[0])[:2] == ["date", "sunspot_number"]
        assert list(rows[0])[2:] == ["sunspot_number_north", "sunspot_number_south"]
        for row in rows:
            tenths = [round(float(row[k]) * 10) for k in ("sunspot_number", "sunspot_number_north",
                                                          "sunspot_number_south")]
            assert tenths[0] == tenths[1] + tenths[2] and min(tenths) >= 0
        times, values = read_sunspots(path)
        np.testing.assert_allclose(values, [float(r["sunspot_number"]) for r in rows])
    # each cycle's activity is split between the hemispheres as its truth says
    folder, truth, _ = many_cycles
    rows = read_csv(folder / "sunspots.csv")
    years = (np.arange(len(rows)) + 0.5) / 12.0
    shares = [c["north_share"] for c in truth["cycles"]]
    assert np.std(shares) > 0.03
    for c, next_c in zip(truth["cycles"][:-1], truth["cycles"][1:], strict=True):
        inside = (years > c["start_years"] + 3.0) & (years < next_c["start_years"] - 1.0)
        north = sum(float(rows[i]["sunspot_number_north"]) for i in np.flatnonzero(inside))
        total = sum(float(rows[i]["sunspot_number"]) for i in np.flatnonzero(inside))
        assert north / total == pytest.approx(c["north_share"], abs=0.03)


# --------------------------------------------------------------------------- emergence


def _regions(settings, seed=0, amplitude=140.0):
    cycle = _Cycle(1, 0.0, amplitude, _shape_for_amplitude(amplitude), 1)
    return cycle_regions(cycle, settings, np.random.default_rng(seed), 0.0, 12.0, 1.0,
                         np.random.default_rng(seed + 1))


def test_anti_hale_fraction_is_observed_in_regions_csv(hard_world):
    from scipy.stats import binomtest

    folder, _, settings = hard_world
    rows = read_csv(folder / "regions.csv")
    by_cycle = {}
    for r in rows:
        # leading polarity in the north: flux sign times hemisphere sign
        by_cycle.setdefault(int(r["cycle"]), []).append(np.sign(float(r["flux_mx"])) * np.sign(float(r["latitude"])))
    anti = total = 0
    for signs in by_cycle.values():
        signs = np.array(signs)
        hale = 1.0 if (signs > 0).sum() >= (signs < 0).sum() else -1.0  # Hale's law: the majority
        anti += int((signs != hale).sum())
        total += signs.size
    assert total > 150
    assert binomtest(anti, total, settings.anti_hale_fraction).pvalue > 0.001
    assert anti / total > 0.1  # far above the default world's none


def test_tilt_scatter_setting_sets_the_scatter_about_joys_law():
    for scatter in (5.0, 15.0):
        regions = _regions(settings_for("low", tilt_scatter=scatter))
        lat = np.abs([r.latitude for r in regions])
        tilt = np.array([r.tilt for r in regions])
        slope, intercept = np.polyfit(lat, tilt, 1)
        assert 0.2 < slope < 0.8  # Joy's law: tilt grows with latitude (0.5 per degree, Li & Ulrich 2012)
        assert np.std(tilt - (slope * lat + intercept)) == pytest.approx(scatter, rel=0.1)


def test_very_large_regions_carry_much_of_the_dipole():
    def contribution(r):
        # a region's share of the axial dipole: flux x latitude separation of its polarities, weighted
        # toward low latitudes where less of the leading flux cancels across the equator
        # (Petrovay, Nagy & Yeates 2020, J. Space Weather Space Clim. 10, 50; the form from memory)
        return r.flux * np.sign(r.latitude) * r.separation * math.sin(math.radians(r.tilt)) * math.exp(
            -r.latitude**2 / (2 * 10.0**2))

    plain = settings_for("low", tilt_scatter=15.0)
    large = replace(plain, large_regions_per_cycle=3.0, large_region_flux=1e23)
    shares = []
    for seed in range(8):
        without = _regions(plain, seed=10 * seed)
        with_large = _regions(large, seed=10 * seed)
        known = {(r.time, r.latitude, r.longitude) for r in without}
        big = [r for r in with_large if (r.time, r.latitude, r.longitude) not in known]
        assert len(with_large) == len(without) + len(big)  # the other regions are the same
        typical = np.median([abs(contribution(r)) for r in without])
        assert all(abs(contribution(r)) > 20 * typical for r in big if abs(math.sin(math.radians(r.tilt))) > 0.1)
        shares.append(abs(sum(map(contribution, big))) / abs(sum(map(contribution, with_large))))
    assert np.median(shares) > 0.05 and max(shares) > 0.15  # occasionally a few regions set much of it


def test_hemispheric_asymmetry_moves_regions_between_hemispheres():
    north = []
    for share in (0.3, 0.7):
        cycle = _Cycle(1, 0.0, 140.0, _shape_for_amplitude(140.0), 1, north_share=share)
        regions = cycle_regions(cycle, settings_for("low"), np.random.default_rng(3), 0.0, 12.0, 1.0)
        north.append(np.mean([r.latitude > 0 for r in regions]))
    assert north[0] == pytest.approx(0.3, abs=0.03) and north[1] == pytest.approx(0.7, abs=0.03)


# --------------------------------------------------------------------------- observation


def test_line_of_sight_factor_is_the_projection_at_central_meridian_with_each_columns_b0():
    """A steady uniform radial field of 1 G observed column by column over one rotation."""
    from sunpy.coordinates.sun import B0, carrington_rotation_number, carrington_rotation_time

    start = Time("2051-05-20T00:00:00", scale="utc")  # early June: B0 crosses zero, changing fastest
    first = int(math.floor(float(carrington_rotation_number(start)))) + 1
    numbers = np.array([first, first + 1])
    mids = carrington_rotation_time(numbers + 0.5)
    plan = observe.MeridianPlan(numbers, mids, B0(mids).to_value("deg"), start)
    model = FluxTransport(nlat=360, nlon=180, diffusivity=0.0, flow_speed=0.0, rotation=None, decay_time=None)
    stepper = model.stepper(np.ones((360, 180)), 1.0)
    recorder = observe.MeridianRecorder(plan, model.grid, 1.0 / 365.25, [0])
    recorder(stepper)
    while not recorder.finished:
        stepper.step()
        recorder(stepper)
    composite, b0_model = recorder.take(0)
    inst = Instrument("T", 90, 180, 1.0, 0.0, 0.0, 1e9)
    lon = model.grid.lon
    b0_map = plan.b0(plan.column_years(0, lon))
    values, m = observe.observe_los(composite, b0_model, model.grid, inst, b0_map, 82.0, np.random.default_rng(0))
    columns = np.arange(0, 180, 15)
    # reference: the time sunpy gives for each column's central-meridian passage, and sunpy's B0 then
    times = carrington_rotation_time(numbers[0] + 1.0 - lon[columns] / 360.0)
    beta = np.deg2rad(B0(times).to_value("deg"))
    a, b = np.deg2rad(m.lat_edges[:-1])[:, None], np.deg2rad(m.lat_edges[1:])[:, None]

    def primitive(x):  # integral of cos(x - beta) cos(x) dx
        return 0.5 * x * np.cos(beta) + 0.25 * np.sin(2 * x - beta)

    expected = (primitive(b) - primitive(a)) / (np.sin(b) - np.sin(a))  # cell mean of cos(lat - B0) in d(sin lat)
    expected[np.abs(m.lat[:, None] - np.rad2deg(beta)[None, :]) > 82.0] = np.nan
    # 0.5-degree model cells remapped onto the map's rows: a first-order error of about 1e-3 at most
    np.testing.assert_allclose(values[:, columns], expected, atol=1.5e-3)
    assert np.ptp(np.rad2deg(beta)) > 2.0  # B0 changed across the map
    # the hidden pole changes across the map: with the limb through the southernmost row at the median
    # B0, that row is blank exactly in the columns whose own B0 tilts the south pole farther away
    limb = -m.lat[0] + float(np.median(np.rad2deg(beta)))
    values, _ = observe.observe_los(composite, b0_model, model.grid, inst, b0_map, limb, np.random.default_rng(0))
    blank = np.isnan(values[0, columns])
    np.testing.assert_array_equal(blank, m.lat[0] - np.rad2deg(beta) < -limb)
    assert 0 < blank.sum() < blank.size


def test_map_headers_give_each_columns_time_and_b0(hard_world):
    from sunpy.coordinates.sun import B0, L0

    folder, truth, _ = hard_world
    maps = [p for p in truth["maps"] if "MSN-B" in p]
    from astropy.io import fits

    for relative in (maps[0], maps[-1]):
        header = fits.getheader(folder / relative)
        assert header["MAPFIELD"] == "LOS" and header["OBSMODE"] == "CENTRAL-MERIDIAN"
        m = pf.read_map(folder / relative, field="los")
        lon = m.lon[::10]
        times, b0 = column_times(header, lon)
        # sunpy: the central-meridian longitude at each column's time is the column's longitude
        l0 = L0(times).to_value("deg")
        assert np.max(np.abs((l0 - lon + 180.0) % 360.0 - 180.0)) < 0.05
        np.testing.assert_allclose(b0, B0(times).to_value("deg"), atol=0.01)
        assert Time(header["DATE-BEG"]) < m.time < Time(header["DATE-END"])
        assert header["TCOLERR"] < 1e-4 and header["B0COLERR"] < 1e-3
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            import sunpy.map

            assert sunpy.map.Map(folder / relative).data.shape == m.shape


def test_instrument_response_saturates_and_its_scale_depends_on_field_strength():
    weak_strong = np.array([2.0, 20.0, 200.0, 2000.0])
    a = Instrument("A", 10, 20, 1.0, 0.0, 0, 1, saturation_g=600.0, strong_field_scale=0.8)
    b = Instrument("B", 10, 20, 0.85, 0.0, 0, 1, saturation_g=1500.0, strong_field_scale=1.0)
    ra, rb = observe.response(weak_strong, a), observe.response(-weak_strong, b)
    assert ra[0] == pytest.approx(2.0, rel=0.02) and -rb[0] == pytest.approx(0.85 * 2.0, rel=0.02)
    assert ra[-1] < 600.0 and -rb[-1] < 1500.0  # saturation
    ratio = ra / -rb
    assert ratio[0] > 1.1 and ratio[-1] < 0.5  # one instrument's scale against the other changes with field
    assert np.all(np.diff(ratio) < 0)
    linear = Instrument("L", 10, 20, 0.85, 0.0, 0, 1)
    np.testing.assert_allclose(observe.response(weak_strong, linear), 0.85 * weak_strong)


def test_instruments_have_their_own_noise_and_blur():
    from polarflux.transport.model import _Grid

    grid = _Grid(90, 180)
    zero = np.zeros((90, 180))
    inst = Instrument("N", 90, 180, 1.0, 4.0, 0, 1)
    values, m = observe.observe_los(zero, np.zeros(180), grid, inst, np.zeros(180), 90.0, np.random.default_rng(1))
    # line-of-sight noise does not grow toward the poles (it is not divided by cos(latitude))
    assert values[np.abs(m.lat) < 30].std() == pytest.approx(4.0, rel=0.1)
    assert values[np.abs(m.lat) > 60].std() == pytest.approx(4.0, rel=0.15)
    spot = zero.copy()
    spot[45, 90] = 100.0
    sharp, _ = observe.observe_los(spot, np.zeros(180), grid, replace(inst, noise_g=0.0), np.zeros(180), 90.0,
                                   np.random.default_rng(1))
    blurred, _ = observe.observe_los(spot, np.zeros(180), grid, replace(inst, noise_g=0.0, blur_deg=6.0),
                                     np.zeros(180), 90.0, np.random.default_rng(1))
    assert blurred.max() < 0.3 * sharp.max()
    area = np.diff(m.sin_lat_edges)[:, None]
    assert (blurred * area).sum() == pytest.approx((sharp * area).sum(), rel=0.02)  # blur keeps the flux


def test_long_gaps_leave_months_without_maps(hard_world):
    folder, truth, settings = hard_world
    for name, gone in truth["long_gaps"].items():
        assert len(gone) >= settings.long_gap_rotations
        files = {p for p in truth["maps"] if f"/{name}/" in p}
        for number in gone:
            assert f"maps/{name}/{name.lower()}_cr{number}.fits" not in files
        runs = np.split(np.array(gone), np.flatnonzero(np.diff(gone) > 1) + 1)
        assert all(r.size >= settings.long_gap_rotations for r in runs)  # several months each


# --------------------------------------------------------------------------- truth


def test_truth_integrals_match_the_analytic_dipole_and_cap_means():
    """Br = D sin(latitude) (a pure axial dipole): dipole D, cap mean D (1 + sin c) / 2 (analytic)."""
    edges = np.linspace(-90.0, 90.0, 181)
    s = np.sin(np.deg2rad(edges))
    profile = 2.0 * 0.5 * (s[:-1] + s[1:])  # exact cell means of 2 sin(latitude) in d(sin latitude)
    out = truth_measures(profile, edges, 60.0)
    assert out["axial_dipole"] == pytest.approx(2.0, rel=1e-4)
    c = math.sin(math.radians(60.0))
    assert out["north_mean_field"] == pytest.approx(2.0 * (1 + c) / 2, rel=1e-9)
    assert out["south_mean_field"] == pytest.approx(-2.0 * (1 + c) / 2, rel=1e-9)


def test_hard_truth_says_what_the_radial_field_was(hard_world):
    folder, truth, settings = hard_world
    assert truth["observation"] == "los-meridian"
    assert truth["transport"]["diffusivity_km2_s"] == settings.diffusivity
    assert truth["precursor_relation"]["exponent"] == settings.precursor_exponent
    series = read_csv(folder / "truth_series.csv")
    assert len(series) >= 15
    assert json.loads((folder / "truth.json").read_text())["maps"] == truth["maps"]
    for row in series:
        assert abs(float(row["axial_dipole_g"])) < 10.0
    # line-of-sight maps see less than the radial truth near the poles: cos(latitude - B0) is small there
    first = [p for p in truth["maps"] if "MSN-B" in p][0]
    m = pf.read_map(folder / first, field="radial")
    row = next(r for r in series if int(r["carrington_rotation"]) == m.carrington_rotation)
    for hemisphere in ("north", "south"):
        seen = getattr(pf.measure_caps(m, cap_latitude=60), hemisphere).mean_field.to_value(u.G)
        radial = float(row[f"{hemisphere}_mean_field_g"])
        assert abs(seen) < 0.8 * abs(radial)
