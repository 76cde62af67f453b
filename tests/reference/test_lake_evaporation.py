"""The lake method and the open-water pieces against their published forms, limits and hand
calculations.

Sources named beside each check: de Bruin (1982) for the equilibrium temperature and time
constant; Sweers (1976) as written by McJannet et al. (2008) for the wind function (from memory);
the neutral log profile (Brutsaert 1982) worked by hand; FAO-56 Table 12 and its notes (from
memory); Taylor et al. (1996) for the albedo of water (from memory); Edinger, Duttweiler and Geyer
(1968) for the typical heat-exchange coefficient of a water surface (from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lakebalance.evaporation import (
    EvaporationOptions,
    estimate_lake_evaporation,
    fetch_from_area,
    lake_heat,
    open_water_coefficient,
    penman_monteith_open_water,
    sweers_wind_function,
    wind_over_water,
)
from lakebalance.evaporation.atmosphere import (
    psychrometric_constant,
    saturation_vapour_pressure,
)
from lakebalance.evaporation.equilibrium import (
    WATER_HEAT_CAPACITY,
    equilibrium_temperature,
    wet_bulb_temperature,
)
from lakebalance.evaporation.openwater import (
    diffuse_fraction,
    direct_beam_albedo,
    log_profile_wind,
    water_albedo,
)
from lakebalance.evaporation.radiation import STEFAN_BOLTZMANN

P = 96.5  # kPa, air pressure of a site near 400 m


def _climate(years: int = 1, *, mean_c=12.0, amp_c=10.0, rn_mean=8.0, rn_amp=7.0, wind=3.0):
    """One invented year of smooth mid-latitude climate, repeated ``years`` times (arrays)."""
    doy = np.tile(np.arange(1, 366), years)
    phase = np.sin(2 * np.pi * (doy - 110) / 365.0)
    ta = mean_c + amp_c * phase
    rn = rn_mean + rn_amp * np.sin(2 * np.pi * (doy - 80) / 365.0)
    es = saturation_vapour_pressure(ta)
    ea = 0.7 * es
    gamma = psychrometric_constant(P)
    transfer = gamma * sweers_wind_function(np.full(doy.size, wind), 5e6)
    return doy, ta, rn, es, ea, transfer


# --- the lake method's limits --------------------------------------------------------------
def test_zero_depth_reproduces_the_no_storage_penman_monteith_value():
    """Depth → 0: no heat store, the lake method is Penman-Monteith with N = 0 (issue check)."""
    _, ta, rn, es, ea, h = _climate()
    pm = penman_monteith_open_water(rn, ta, es, ea, h, P)
    flat = lake_heat(rn, ta, es, ea, h, P, 0.0)
    np.testing.assert_allclose(flat.evaporation_mm, pm, rtol=1e-12)
    np.testing.assert_allclose(flat.storage, 0.0, atol=1e-12)
    thin = lake_heat(rn, ta, es, ea, h, P, 0.01)  # 1 cm of water: almost no storage
    np.testing.assert_allclose(thin.evaporation_mm, pm, rtol=0, atol=0.01)


def test_deep_lake_keeps_its_annual_total_and_shifts_the_seasons():
    """A 10 m lake (deep in FAO-56's classes, > 5 m): annual total within a few % of the
    no-storage total; less in spring, more in autumn (FAO-56 Table 12 notes; de Bruin 1982: the
    deep lake's seasonal lag)."""
    doy, ta, rn, es, ea, h = _climate(years=2)
    deep = lake_heat(rn, ta, es, ea, h, P, 10.0)
    year2 = slice(365, 730)
    e, e0 = deep.evaporation_mm[year2], deep.no_storage_mm[year2]
    assert abs(e.sum() / e0.sum() - 1.0) < 0.05
    month = pd.date_range("2021-01-01", periods=365, freq="D").month.to_numpy()
    spring = np.isin(month, (4, 5))
    autumn = np.isin(month, (10, 11))
    assert e[spring].sum() < 0.8 * e0[spring].sum()
    assert e[autumn].sum() > 1.2 * e0[autumn].sum()
    # the water is warmest weeks after its equilibrium temperature (lag of the seasonal cycle:
    # atan(ωτ)/ω for a first-order store, about 19 days for τ ≈ 20 days)
    lag = np.argmax(deep.water_temperature_c[year2]) - np.argmax(deep.equilibrium_c[year2])
    assert 10 < lag < 40


@settings(max_examples=30, deadline=None)
@given(
    mean_c=st.floats(12.0, 22.0),
    amp_c=st.floats(0.0, 8.0),
    rn_amp=st.floats(0.0, 6.0),
    wind=st.floats(0.5, 8.0),
    depth=st.floats(0.2, 80.0),
)
def test_stored_heat_returns_to_its_start_over_a_year_of_repeated_climate(
    mean_c, amp_c, rn_amp, wind, depth
):
    """Energy conservation (property): over each year of a climate that repeats, the heat stored
    sums to zero and the water ends the year at the temperature it started from (the periodic
    start); ΣN = ρ_w c_w z (T_end − T_start) exactly (analytic identity of the scheme)."""
    _, ta, rn, es, ea, h = _climate(years=2, mean_c=mean_c, amp_c=amp_c, rn_amp=rn_amp, wind=wind)
    heat = lake_heat(rn, ta, es, ea, h, P, depth)
    tw = heat.water_temperature_c
    assert np.all(tw > 0.0)  # the floor at 0 °C is not reached in these climates
    scale = WATER_HEAT_CAPACITY * depth * max(float(np.ptp(tw)), 1.0)
    for year in (slice(0, 365), slice(365, 730)):
        assert abs(heat.storage[year].sum()) < 1e-6 * scale
    assert tw[364] == pytest.approx(heat.initial_c, abs=1e-7)
    total = heat.storage.sum()
    assert total == pytest.approx(WATER_HEAT_CAPACITY * depth * (tw[-1] - heat.initial_c), abs=1e-6)


# --- de Bruin's equilibrium temperature, by hand --------------------------------------------
def test_wet_bulb_solves_the_psychrometer_equation():
    """FAO-56 eq. 15 with γ of eq. 8: e°(T_n) − γ (T_a − T_n) = e_a, solved by bisection here."""
    ta, ea = 25.0, 1.5
    gamma = 0.665e-3 * P
    lo, hi = -10.0, 25.0
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        if 0.6108 * math.exp(17.27 * mid / (mid + 237.3)) - gamma * (ta - mid) - ea > 0:
            hi = mid
        else:
            lo = mid
    assert float(wet_bulb_temperature(ta, ea, P)) == pytest.approx(lo, abs=1e-6)


def test_equilibrium_temperature_zeroes_the_surface_energy_balance():
    """de Bruin (1982): T_e is the surface temperature at which the water gains no heat. His
    closed form T_e = T_n + Q*_n / k_n (linearised about the wet-bulb temperature) is checked by
    hand; the default refines it until the full balance Q*(T) − λE(T) − H(T) is zero."""
    ta, ea, rn, u10 = 18.0, 1.2, 12.0, 3.0
    gamma = 0.665e-3 * P
    h = gamma * float(sweers_wind_function(u10, 5e6))

    def e_sat(t):
        return 0.6108 * math.exp(17.27 * t / (t + 237.3))

    def balance(t):  # MJ m-2 d-1 into the water; emissivity 1, as the scheme
        q = rn + STEFAN_BOLTZMANN * ((ta + 273.16) ** 4 - (t + 273.16) ** 4)
        return q - h / gamma * (e_sat(t) - ea) - h * (t - ta)

    tn = float(wet_bulb_temperature(ta, ea, P))
    delta_n = 4098 * e_sat(tn) / (tn + 237.3) ** 2
    k_n = 4 * STEFAN_BOLTZMANN * (tn + 273.16) ** 3 + h * (delta_n + gamma) / gamma
    q_n = rn + STEFAN_BOLTZMANN * ((ta + 273.16) ** 4 - (tn + 273.16) ** 4)
    te_lin, k_lin = equilibrium_temperature(rn, ta, ea, P, h, linear=True)
    assert float(te_lin) == pytest.approx(tn + q_n / k_n, abs=1e-9)
    assert float(k_lin) == pytest.approx(k_n, rel=1e-12)
    te, k = equilibrium_temperature(rn, ta, ea, P, h)
    assert abs(balance(float(te))) < 1e-8
    assert abs(float(te) - float(te_lin)) < 3.0  # the closed form is a good first step
    delta_e = 4098 * e_sat(float(te)) / (float(te) + 237.3) ** 2
    k_e = 4 * STEFAN_BOLTZMANN * (float(te) + 273.16) ** 3 + h * (delta_e + gamma) / gamma
    assert float(k) == pytest.approx(k_e, rel=1e-12)


def test_heat_exchange_coefficient_is_that_of_a_water_surface():
    """Typical surface heat-exchange coefficients of lakes are 20-50 W m⁻² K⁻¹ at moderate wind
    (Edinger, Duttweiler and Geyer 1968; from memory); the time constant of a 10 m layer is then
    of the order of a month (ρ c z / k)."""
    gamma = float(psychrometric_constant(P))
    h = gamma * float(sweers_wind_function(3.5, 5e6))
    _, k = equilibrium_temperature(10.0, 20.0, 1.4, P, h)
    watts = float(k) / 0.0864  # MJ m-2 d-1 K-1 -> W m-2 K-1
    assert 20.0 <= watts <= 50.0
    tau = WATER_HEAT_CAPACITY * 10.0 / float(k)
    assert 15.0 <= tau <= 60.0


# --- the fetch-aware wind function ------------------------------------------------------------
def test_sweers_wind_function_at_two_areas():
    """Sweers (1976) as McJannet et al. (2008) write it (from memory):
    f(u) = (5/A)^0.05 (3.80 + 1.57 u₁₀) MJ m⁻² d⁻¹ kPa⁻¹, A in km², which is Sweers'
    (5/A)^0.05 (4.4 + 1.82 u) W m⁻² hPa⁻¹ (× 0.0864 MJ d⁻¹ W⁻¹ × 10 hPa kPa⁻¹)."""
    u = np.array([0.0, 2.0, 5.0])
    at_5 = sweers_wind_function(u, 5e6)  # 5 km², the reference area: factor 1
    np.testing.assert_allclose(at_5, 3.80 + 1.57 * u)
    np.testing.assert_allclose(at_5, (4.4 + 1.82 * u) * 0.864, rtol=2e-3)
    at_500 = sweers_wind_function(u, 500e6)  # 500 km²: (0.01)^0.05 = 0.7943
    np.testing.assert_allclose(at_500 / at_5, 0.7943, rtol=1e-4)
    small = sweers_wind_function(u, 0.05e6)  # a 5 ha pond: (100)^0.05 = 1.2589
    np.testing.assert_allclose(small / at_5, 1.2589, rtol=1e-4)


def test_fetch_of_a_round_lake():
    """A circle of area A has diameter √(4A/π): 1 km² -> 1128.4 m (geometry)."""
    assert float(fetch_from_area(1e6)) == pytest.approx(1128.38, abs=0.01)


def test_log_profile_reduction_worked_by_hand():
    """Neutral log profile u(z₂) = u(z₁) ln(z₂/z₀)/ln(z₁/z₀) (Brutsaert 1982), by hand:
    5 m/s at 10 m over water (z₀ = 0.0002 m): ln(10⁴) = 9.2103, ln(5×10⁴) = 10.8198, so
    u₂ = 5 × 9.2103 / 10.8198 = 4.2562 m/s. From a land anemometer at 10 m (z₀ = 0.03 m) through
    60 m: ln(2000) = 7.6009, ln(333.33) = 5.8091, ln(3×10⁵) = 12.6115, so
    u₂ = 5 × 7.6009/5.8091 × 9.2103/12.6115 = 4.7779 m/s. FAO-56 eq. 47 (grass) gives
    5 × 4.87 / ln(672.58) = 3.7405 m/s: water is smoother, the wind near it faster."""
    assert float(log_profile_wind(5.0, 10.0, 2.0, 2e-4)) == pytest.approx(4.2562, abs=1e-4)
    water = wind_over_water(5.0, 10.0, exposure="water")
    assert float(water) == pytest.approx(5 * 9.2103 / 10.8198, abs=1e-4)
    land = wind_over_water(5.0, 10.0, exposure="land")
    assert float(land) == pytest.approx(5 * 7.6009 / 5.8091 * 9.2103 / 12.6115, abs=2e-4)
    assert float(land) > 5 * 4.87 / math.log(67.8 * 10 - 5.42)


# --- FAO-56 open-water coefficients -----------------------------------------------------------
def test_fao56_table12_open_water_coefficients_by_depth_class():
    """FAO-56 Table 12 and notes (from memory): < 2 m, 1.05; > 5 m temperate, 0.65 while the
    water gains heat (spring) and 1.25 while it releases it (autumn); seasons flip south."""
    doy = np.array([105, 288])  # 15 April, 15 October
    np.testing.assert_allclose(open_water_coefficient(doy, 1.0, 46.0), [1.05, 1.05])
    np.testing.assert_allclose(open_water_coefficient(doy, 10.0, 46.0), [0.65, 1.25], atol=2e-3)
    np.testing.assert_allclose(open_water_coefficient(doy, 10.0, -35.0), [1.25, 0.65], atol=2e-3)
    mid = open_water_coefficient(doy, 3.5, 46.0)  # halfway between the classes
    np.testing.assert_allclose(mid, [(1.05 + 0.65) / 2, (1.05 + 1.25) / 2], atol=2e-3)


# --- albedo by sun angle ----------------------------------------------------------------------
def test_direct_beam_albedo_of_water():
    """Taylor et al. (1996) (from memory): 0.037/(1.1 μ^1.4 + 0.15); 0.0296 overhead, about
    0.065 at 60° zenith; rising towards grazing incidence as the Fresnel reflectance does."""
    assert float(direct_beam_albedo(1.0)) == pytest.approx(0.0296, abs=1e-4)
    assert float(direct_beam_albedo(0.5)) == pytest.approx(0.037 / (1.1 * 0.5**1.4 + 0.15))
    assert 0.06 < float(direct_beam_albedo(0.5)) < 0.07
    mus = np.linspace(0.05, 1.0, 20)
    assert np.all(np.diff(direct_beam_albedo(mus)) < 0)


def test_daily_water_albedo_by_season():
    """The daily albedo of water at 46° N: near 0.06 in summer (the usual constant; from memory),
    higher in winter with the low sun; all diffuse light on an overcast day gives the diffuse
    albedo; Erbs et al. (1982): clear days are 14 % diffuse."""
    from lakebalance.evaporation.radiation import extraterrestrial_radiation

    doy = np.array([172, 355])
    ra = extraterrestrial_radiation(46.0, doy)
    clear = water_albedo(46.0, doy, 0.75 * ra, ra)
    assert 0.04 < clear[0] < 0.075
    assert clear[1] > clear[0] + 0.03
    overcast = water_albedo(46.0, doy, 0.05 * ra, ra, diffuse_albedo=0.06)
    np.testing.assert_allclose(overcast, 0.06, atol=0.002)
    assert float(diffuse_fraction(0.8, np.deg2rad(70.0))) == pytest.approx(0.143)


# --- the method in the estimate ---------------------------------------------------------------
def _weather(days: int = 730) -> pd.DataFrame:
    rng = np.random.default_rng(5)
    index = pd.date_range("2020-10-01", periods=days, freq="D", name="date")
    season = np.sin(2 * np.pi * (index.day_of_year.to_numpy() - 110) / 365.0)
    tmean = 6 + 13 * season + rng.normal(0, 2, days)
    return pd.DataFrame(
        {
            "tmax": tmean + 5,
            "tmin": tmean - 5,
            "rh_max": np.full(days, 90.0),
            "rh_min": np.full(days, 50.0),
            "wind": np.clip(3 + rng.normal(0, 1, days), 0.3, None),
            "solar": np.clip(15 + 11 * season + rng.normal(0, 3, days), 1, None),
            "pan": np.clip(3 + 2.5 * season, 0.2, None) / 1000.0,
        },
        index=index,
    )


def test_lake_method_in_the_estimate_keeps_negative_days_and_is_preferred():
    weather = _weather()
    opts = EvaporationOptions(wind_height=10.0, mean_depth=6.0, lake_area=2e6)
    result = estimate_lake_evaporation(weather, opts, latitude_deg=46.0, elevation_m=400.0)
    assert result.method == "equilibrium_temperature"  # auto: the lake method before the pan
    assert (result.depth_m < 0).any()  # heat released into cold dry air: kept, not clipped
    heat = result.lake_heat
    assert heat is not None and set(heat.columns) >= {"water_temperature_c", "heat_storage_mj_m2"}
    years = result.water_years()
    assert list(years.index) == [2021, 2022]
    assert (years["days"] == 365).all()
    spread = result.spread()
    assert (spread["methods"] >= 4).all() and (spread["relative_sd"] > 0).all()
    no_geometry = estimate_lake_evaporation(
        weather, EvaporationOptions(wind_height=10.0), latitude_deg=46.0, elevation_m=400.0
    )
    assert "equilibrium_temperature" not in no_geometry.available
    assert no_geometry.method == "pan"


def test_hargreaves_is_a_grass_reference_given_an_open_water_coefficient():
    """FAO-56: K_c applies to ET₀ of eq. 52 as to that of eq. 6 (a grass reference)."""
    weather = _weather(365)
    base = EvaporationOptions(wind_height=10.0)
    one = estimate_lake_evaporation(weather, base, latitude_deg=46.0, elevation_m=400.0)
    given_k = EvaporationOptions(wind_height=10.0, hargreaves_coefficient=0.84)
    two = estimate_lake_evaporation(weather, given_k, latitude_deg=46.0, elevation_m=400.0)
    ratio = two.by_method["hargreaves"] / one.by_method["hargreaves"]
    np.testing.assert_allclose(ratio.dropna(), 0.84 / 1.05)
    assert any("hargreaves" in n and "coefficient" in n for n in one.notes)


def test_ice_days_give_sublimation_and_the_frozen_pan_is_not_filled():
    weather = _weather(365)
    frozen = (weather.index >= "2021-01-05") & (weather.index <= "2021-02-20")
    weather.loc[frozen, "pan"] = np.nan  # the pan log says ICE
    opts = EvaporationOptions(
        wind_height=10.0,
        ice="declared",
        ice_periods=[["2021-01-05", "2021-02-20"]],
        ice_sublimation=0.2,
    )
    result = estimate_lake_evaporation(weather, opts, latitude_deg=46.0, elevation_m=400.0)
    assert int(result.ice.sum()) == int(frozen.sum())
    np.testing.assert_allclose(result.by_method.loc[frozen].to_numpy(), 0.2e-3)
    assert not result.filled_by_method.loc[frozen].any().any()  # not filled as open water
    assert result.water_years()["ice_days"].sum() == frozen.sum()
    open_days = result.by_method.loc[~frozen, "pan"]
    assert not np.allclose(open_days, 0.2e-3)


def test_ice_inferred_from_air_temperature_by_the_stated_rule():
    from lakebalance.evaporation import ice_mask_from_air_temperature

    index = pd.date_range("2021-01-01", periods=120, freq="D")
    tmean = pd.Series(np.where(np.arange(120) < 60, -5.0, 5.0), index=index)
    mask = ice_mask_from_air_temperature(tmean, window_days=30, threshold_c=0.0)
    # frozen while the mean of the 30 days ending on the day is below 0 °C: until day 60 + 14;
    # the first 14 days have less than half a window and are open
    assert mask[14:74].all() and not mask[:14].any() and not mask[75:].any()


def test_precipitation_on_ice_held_until_break_up_keeps_the_total():
    from lakebalance.evaporation import precipitation_on_ice

    index = pd.date_range("2021-01-01", periods=10, freq="D")
    rain = pd.Series(np.full(10, 0.002), index=index)
    ice = np.zeros(10, dtype=bool)
    ice[2:5] = True
    held = precipitation_on_ice(rain, ice, "at_break_up")
    assert held.sum() == pytest.approx(rain.sum())
    assert (held.iloc[2:5] == 0).all() and held.iloc[5] == pytest.approx(0.008)
    assert precipitation_on_ice(rain, ice, "as_it_falls") is rain


def test_deep_lake_seasonal_shift_is_at_least_that_of_fao56_table12():
    """Published figures (FAO-56 Table 12 and notes, from memory): deep temperate water runs at
    0.65/1.05 of the shallow coefficient while it gains heat and 1.25/1.05 while it releases it.
    The lake method at 10 m, against itself at 1 m, shifts spring down and autumn up at least
    that much (it follows the heat store day by day, the table gives season means)."""
    weather = _weather(365 * 3)
    ratio = {}
    for depth in (1.0, 10.0):
        opts = EvaporationOptions(wind_height=10.0, mean_depth=depth, lake_area=5e6)
        r = estimate_lake_evaporation(weather, opts, latitude_deg=46.0, elevation_m=400.0)
        ratio[depth] = r.by_method["equilibrium_temperature"].groupby(r.by_method.index.month).sum()
    shift = ratio[10.0] / ratio[1.0]
    assert shift[[4, 5]].max() < 0.65 / 1.05
    assert shift[[10, 11]].min() > 1.25 / 1.05


def test_mixed_depth_cap_limits_the_heat_store():
    weather = _weather(365 * 2)
    deep = EvaporationOptions(wind_height=10.0, mean_depth=40.0, lake_area=5e6)
    capped = EvaporationOptions(
        wind_height=10.0, mean_depth=40.0, lake_area=5e6, mixed_depth_max=8.0
    )
    eight = EvaporationOptions(wind_height=10.0, mean_depth=8.0, lake_area=5e6)
    run = {
        k: estimate_lake_evaporation(weather, w_opts, latitude_deg=46.0, elevation_m=400.0)
        for k, w_opts in (("deep", deep), ("capped", capped), ("eight", eight))
    }
    col = "equilibrium_temperature"
    np.testing.assert_allclose(run["capped"].by_method[col], run["eight"].by_method[col])
    assert (run["capped"].lake_heat["mixed_depth_m"] == 8.0).all()
    assert (run["capped"].lake_heat["mean_depth_m"] == 40.0).all()
    assert not np.allclose(run["deep"].by_method[col], run["eight"].by_method[col])


def test_fao56_route_by_depth_class_follows_table12():
    """FAO-56 route with open_water_class = "by_depth": ET₀ times the Table 12 coefficient of
    each day's depth class (from memory), here against the constant-coefficient route."""
    weather = _weather(365)
    const = EvaporationOptions(wind_height=10.0, open_water_coefficient=1.0, mean_depth=12.0)
    by_depth = EvaporationOptions(wind_height=10.0, open_water_class="by_depth", mean_depth=12.0)
    a = estimate_lake_evaporation(weather, const, latitude_deg=46.0, elevation_m=400.0)
    b = estimate_lake_evaporation(weather, by_depth, latitude_deg=46.0, elevation_m=400.0)
    doy = weather.index.day_of_year.to_numpy()
    expected = open_water_coefficient(doy, 12.0, 46.0)
    ratio = (b.by_method["fao56"] / a.by_method["fao56"]).to_numpy()
    ok = np.isfinite(ratio) & (a.by_method["fao56"].to_numpy() > 1e-5)
    np.testing.assert_allclose(ratio[ok], expected[ok], rtol=1e-9)
    with pytest.raises(Exception, match="mean depth"):
        estimate_lake_evaporation(
            weather,
            EvaporationOptions(wind_height=10.0, open_water_class="by_depth"),
            latitude_deg=46.0,
            elevation_m=400.0,
        )


def test_sun_angle_albedo_enters_the_net_radiation():
    """With albedo_model = "sun_angle" the open-water methods use the daily albedo of
    openwater.water_albedo (Taylor et al. 1996; from memory); winter days reflect more."""
    weather = _weather(365)
    base = EvaporationOptions(wind_height=10.0)
    sun = EvaporationOptions(wind_height=10.0, albedo_model="sun_angle")
    a = estimate_lake_evaporation(weather, base, latitude_deg=46.0, elevation_m=400.0)
    b = estimate_lake_evaporation(weather, sun, latitude_deg=46.0, elevation_m=400.0)
    assert "albedo" in b.inputs and "albedo" not in a.inputs
    month = weather.index.month
    winter = (month == 12) | (month == 1)
    assert (
        b.by_method.loc[winter, "priestley_taylor"].sum()
        < a.by_method.loc[winter, "priestley_taylor"].sum()
    )
