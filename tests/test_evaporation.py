"""Behaviour of lake evaporation: method choice, missing-weather fill and flags, heat-storage lag,
pan coefficients, errors, the API and the command line.

Expected values come from analytic solutions (named in each test) or from the definitions of the
equations; the reference checks against FAO-56 and pyet are in ``tests/reference``.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import lakebalance
from lakebalance.errors import ApproximationWarning, ConfigError, UnitError
from lakebalance.evaporation import (
    EvaporationOptions,
    climatology_fill,
    estimate_lake_evaporation,
    heat_storage_lag,
    pan_to_lake,
    penman_open_water,
    priestley_taylor,
    psychrometric_constant,
    slope_vapour_pressure_curve,
    wind_at_2m,
)

LAT, ELEV = 46.2, 420.0  # invented site


def weather(days: int = 730, seed: int = 3) -> pd.DataFrame:
    """Invented daily weather, two years."""
    rng = np.random.default_rng(seed)
    index = pd.date_range("2019-01-01", periods=days, freq="D", name="date")
    season = np.sin(2 * np.pi * (index.day_of_year.to_numpy() - 110) / 365.0)
    tmean = 10 + 11 * season + rng.normal(0, 2, days)
    return pd.DataFrame(
        {
            "tmax": tmean + 5,
            "tmin": tmean - 5,
            "rh": np.clip(70 - 10 * season + rng.normal(0, 5, days), 20, 100),
            "wind": rng.gamma(3.0, 1.0, days),
            "solar": np.clip(16 + 10 * season + rng.normal(0, 3, days), 1, None),
            "pan": np.clip(0.003 + 0.003 * season, 0.0002, None),
        },
        index=index,
    )


def run(w, latitude_deg=LAT, elevation_m=ELEV, site_file=None, **options):
    """Lake evaporation of ``w`` with ``[evaporation]`` options given as keywords."""
    return estimate_lake_evaporation(
        w,
        EvaporationOptions(**options),
        latitude_deg=latitude_deg,
        elevation_m=elevation_m,
        site_file=site_file,
    )


# ---- method choice --------------------------------------------------------------------------
def test_auto_prefers_measured_then_pan_then_penman():
    w = weather()
    assert run(w).method == "pan"
    assert run(w.assign(evaporation=0.002)).method == "given"
    assert run(w.drop(columns="pan")).method == "penman"
    assert run(w.drop(columns=["pan", "wind"])).method == "priestley_taylor"
    with pytest.warns(ApproximationWarning):
        assert run(w[["tmax", "tmin"]]).method == "hargreaves"


def test_every_possible_method_is_tabulated_in_m_per_day():
    res = run(weather())
    assert res.available == ("pan", "penman", "priestley_taylor", "fao56", "hargreaves")
    # summer lake evaporation of a mid-latitude site: a few mm per day (common practice, no source)
    july = res.by_method.loc["2019-07"].mean()
    assert ((july > 0.002) & (july < 0.009)).all()
    assert res.depth_m.name == "evaporation_m"


def test_explicit_method_without_its_inputs_is_a_config_error_naming_what_is_missing():
    w = weather().drop(columns="wind")
    with pytest.raises(ConfigError, match="wind"):
        run(w, method="penman", site_file="lake.toml")
    with pytest.raises(ConfigError, match="latitude"):
        run(w, method="priestley_taylor", latitude_deg=None)
    with pytest.raises(ConfigError, match="no lake evaporation method"):
        run(weather()[["wind"]])


def test_no_humidity_uses_tmin_as_dewpoint_with_a_note():
    res = run(weather().drop(columns=["rh", "pan"]))
    assert res.method == "penman"
    assert "FAO-56 eq. 48" in res.inputs["vapour_pressure"]
    assert any("dewpoint taken" in n for n in res.notes)


def test_missing_elevation_assumes_sea_level_pressure():
    res = run(weather().drop(columns="pan"), elevation_m=None)
    assert res.inputs["pressure"].startswith("101.3 kPa")
    assert any("sea-level" in n for n in res.notes)


def test_fao56_is_reference_et_times_the_open_water_coefficient():
    w = weather().drop(columns="pan")
    a = run(w, open_water_coefficient=1.0).by_method["fao56"]
    b = run(w, open_water_coefficient=1.1).by_method["fao56"]
    np.testing.assert_allclose(b, 1.1 * a, rtol=1e-12)


def test_pan_monthly_coefficients_apply_by_calendar_month():
    w = weather()
    k = [0.6 + 0.01 * i for i in range(12)]
    res = run(w, pan_coefficient=k, method="pan")
    expected = w["pan"].to_numpy() * np.array(k)[w.index.month - 1]
    np.testing.assert_allclose(res.depth_m, expected, rtol=1e-12)
    with pytest.raises(ConfigError, match="12 monthly"):
        run(w, pan_coefficient=[0.7, 0.7])
    assert pan_to_lake(4.0, 0.7) == pytest.approx(2.8)
    assert not any("rule of thumb" in n for n in res.notes)
    assert any("rule of thumb" in n for n in run(w).notes)


# ---- missing weather --------------------------------------------------------------------------
def test_gaps_are_filled_and_flagged_never_silently():
    w = weather()
    gap = pd.date_range("2019-06-10", "2019-06-20")
    w.loc[gap, "wind"] = np.nan
    res = run(w.drop(columns="pan"))
    assert res.depth_m.notna().all()
    assert res.filled[gap].all()
    assert int(res.filled.sum()) == len(gap)
    assert not res.filled_by_method["priestley_taylor"].any()  # PT does not use wind
    assert any(f"{len(gap)} days" in n for n in res.notes)
    kept = run(w.drop(columns="pan"), fill="none")
    assert kept.depth_m[gap].isna().all() and not kept.filled.any()


def test_climatology_fill_of_a_sine_is_the_window_mean_analytic():
    """Analytic: with a whole year missing between two complete years, each day of the missing
    year is the mean of A sin(ωd) over days d-15..d+15 of the other two, i.e.
    A sin(ωd) × sin(31ω/2) / (31 sin(ω/2)) (discrete Dirichlet kernel), ω = 2π/365."""
    index = pd.date_range("2001-01-01", "2003-12-31", freq="D")  # no leap year
    d = index.day_of_year.to_numpy()
    omega = 2 * np.pi / 365
    x = 5.0 * np.sin(omega * d)
    frame = pd.DataFrame({"x": x}, index=index)
    gap = index.year == 2002
    frame.loc[gap, "x"] = np.nan
    filled, mask = climatology_fill(frame)
    gain = np.sin(31 * omega / 2) / (31 * np.sin(omega / 2))
    np.testing.assert_allclose(filled["x"][gap], gain * x[gap], atol=1e-9)
    assert mask["x"].to_numpy().tolist() == gap.tolist()
    np.testing.assert_array_equal(filled["x"][~gap], x[~gap])


def test_climatology_fill_equals_a_plain_pooled_mean_of_the_window():
    """The vectorised fill equals a direct pooled mean over the ±15-day window (brute force)."""
    rng = np.random.default_rng(5)
    index = pd.date_range("2011-11-01", "2014-03-31", freq="D")
    frame = pd.DataFrame({"x": rng.normal(size=len(index))}, index=index)
    frame.loc[rng.random(len(index)) < 0.2, "x"] = np.nan
    filled, mask = climatology_fill(frame)
    # day on a 365-day circle, 29 February sharing 28 February's slot (as documented)
    doy = index.day_of_year.to_numpy() - ((index.is_leap_year) & (index.day_of_year > 59))
    for day in index[mask["x"].to_numpy()][:60]:
        d0 = doy[index.get_loc(day)]
        dist = np.abs(doy - d0)
        near = np.minimum(dist, 365 - dist) <= 15
        expected = frame["x"][near].mean()
        assert filled.loc[day, "x"] == pytest.approx(expected, rel=1e-10)


def test_climatology_fill_falls_back_to_the_series_mean_and_keeps_empty_columns_empty():
    index = pd.date_range("2020-01-01", periods=200, freq="D")
    frame = pd.DataFrame({"x": np.r_[np.full(100, 2.0), np.full(100, np.nan)], "y": np.nan}, index)
    filled, mask = climatology_fill(frame)
    assert (filled["x"] == 2.0).all() and mask["x"].sum() == 100
    assert filled["y"].isna().all() and not mask["y"].any()


# ---- heat-storage lag -------------------------------------------------------------------------
def test_heat_storage_lag_matches_first_order_filter_response_analytic():
    """Analytic: the discrete first-order filter y_t = y_{t-1} + k (x_t - y_{t-1}) passes a
    sinusoid of frequency ω with gain k / |1 - (1 - k) e^{-iω}|, and keeps the mean."""
    tau = 30.0
    k = 1 - np.exp(-1 / tau)
    omega = 2 * np.pi / 365
    t = np.arange(365 * 10)
    x = 10 + 8 * np.sin(omega * t)
    y = heat_storage_lag(x, tau)
    gain = k / abs(1 - (1 - k) * np.exp(-1j * omega))
    last = slice(365 * 9, 365 * 10)
    amplitude = 0.5 * (y[last].max() - y[last].min())
    assert amplitude == pytest.approx(8 * gain, rel=2e-3)
    assert y[last].mean() == pytest.approx(10.0, abs=1e-3)
    assert y[last].argmax() > x[last].argmax()  # delayed
    np.testing.assert_array_equal(heat_storage_lag(x, 0.0), x)


def test_heat_storage_lag_keeps_gaps_missing_and_works_on_ensembles():
    x = np.tile(np.linspace(0, 20, 100), (3, 1))
    x[1, 40:45] = np.nan
    y = heat_storage_lag(x, 10.0, initial=0.0)
    assert np.isnan(y[1, 40:45]).all() and np.isfinite(y[0]).all()
    np.testing.assert_allclose(y[0], y[2])


def test_lag_reduces_spring_and_raises_autumn_lake_evaporation():
    w = weather(days=1095).drop(columns="pan")
    plain = run(w).by_method["penman"]
    lagged = run(w, heat_storage_lag=45.0).by_method["penman"]
    assert lagged["2020-04"].mean() < plain["2020-04"].mean()
    assert lagged["2020-10"].mean() > plain["2020-10"].mean()


# ---- equations: properties ----------------------------------------------------------------------
@settings(max_examples=60, deadline=None)
@given(
    t=st.floats(-10, 40),
    rn=st.floats(0, 25),
    deficit=st.floats(0, 3),
    u=st.floats(0, 10),
    du=st.floats(0.01, 5),
)
def test_penman_grows_with_wind_when_air_is_dry_and_reduces_to_its_parts(t, rn, deficit, u, du):
    p = 97.0
    es = 0.6108 * np.exp(17.27 * t / (t + 237.3))
    ea = es - min(deficit, es)
    e1 = penman_open_water(rn, t, es, ea, u, p)
    e2 = penman_open_water(rn, t, es, ea, u + du, p)
    assert e2 >= e1 - 1e-12
    # saturated air: only the radiation term, i.e. Priestley-Taylor with alpha = 1
    sat = penman_open_water(rn, t, es, es, u, p)
    assert sat == pytest.approx(float(priestley_taylor(rn, t, p, alpha=1.0)), rel=1e-12)
    # no energy: only the aerodynamic term with f(u) = 2.6 (1 + 0.54 u)
    d, g = slope_vapour_pressure_curve(t), psychrometric_constant(p)
    aero = penman_open_water(0.0, t, es, ea, u, p)
    assert aero == pytest.approx(float(g * 2.6 * (1 + 0.54 * u) * (es - ea) / (d + g)), abs=1e-12)


def test_wind_at_2m_is_identity_at_2m_and_rejects_impossible_heights():
    np.testing.assert_array_equal(wind_at_2m([1.0, 3.0], 2.0), [1.0, 3.0])
    assert float(wind_at_2m(3.0, 10.0)) < 3.0
    with pytest.raises(ValueError):
        wind_at_2m(3.0, 0.05)


def test_negative_evaporation_is_clipped_and_noted():
    w = weather().drop(columns="pan")
    w["solar"] = 0.05  # almost no sun: net radiation negative, humid air
    w["rh"] = 100.0
    res = run(w)
    assert (res.by_method[["penman", "priestley_taylor"]] >= 0).all().all()
    assert any("negative evaporation" in n for n in res.notes)
    raw = run(w, clip_negative=False)
    assert (raw.by_method["priestley_taylor"] < 0).any()


# ---- monthly table and units ---------------------------------------------------------------------
def test_monthly_totals_in_inches_follow_nist_sp811_factor():
    """NIST SP 811 (2008), Appendix B: 1 in = 25.4 mm exactly."""
    res = run(weather())
    mm = res.monthly("mm")
    inch = res.monthly("in")
    np.testing.assert_allclose(inch["penman"], mm["penman"] / 25.4, rtol=1e-12)
    assert mm["days"].iloc[0] == 31
    assert mm.loc["2019-01", "penman"] == pytest.approx(
        res.by_method.loc["2019-01", "penman"].sum() * 1000, rel=1e-12
    )
    diff = res.monthly_differences()
    np.testing.assert_allclose(diff["penman"], mm["penman"] - mm["pan"], rtol=1e-12)
    with pytest.raises(UnitError):
        res.monthly("kg")
    assert "method pan" in res.summary()


# ---- API --------------------------------------------------------------------------------------------
class _FlatLake:
    """A storage relation with a constant area (test double), m²."""

    def area(self, stage_m):
        return np.full(np.shape(stage_m), 2.5e6)


def test_api_lake_evaporation_with_records_and_volumes(tmp_path):
    from lakebalance.config import parse_site
    from lakebalance.records import Records, SeriesInfo

    site = parse_site(
        {"site": {"name": "Invented Tarn", "latitude": LAT, "elevation": ELEV},
         "evaporation": {"method": "auto", "wind_height": 10.0}},
        tmp_path / "site.toml",
    )  # fmt: skip
    w = weather().drop(columns="pan")
    daily = w.assign(stage=3.0, **{"rain:north": 0.001, "rain:south": 0.003})
    series = tuple(
        SeriesInfo(key=k, role=k.split(":")[0], name=k, file="x.csv", declared_units="",
                   internal_units="", statistic="mean")
        for k in daily.columns
    )  # fmt: skip
    records = Records(site=site, daily=daily, flags=daily.notna() & False, series=series)
    lake = lakebalance.Lake.with_results(site, records=records, storage=_FlatLake())
    res = lake.evaporation
    assert res.method == "penman"
    assert "10 m to 2 m" in res.inputs["wind"]
    np.testing.assert_allclose(res.evaporation_m3, res.depth_m * 2.5e6)
    np.testing.assert_allclose(res.rain_m3, 0.002 * 2.5e6)  # mean of the two gauges × area
    assert any("rain is the daily mean of 2 series" in n for n in res.notes)
    pt = lakebalance.Lake.with_results(site, records=records).evaporation_by("priestley_taylor")
    assert pt.method == "priestley_taylor" and pt.rain_m3 is None


# ---- command line ----------------------------------------------------------------------------------
def _write_site(tmp_path, extra=""):
    w = weather(days=400)
    w.index.name = "date"
    w[["tmax", "tmin", "rh", "wind", "solar"]].to_csv(tmp_path / "station.csv")
    (w[["pan"]] * 1000).rename(columns={"pan": "pan_mm"}).to_csv(tmp_path / "pan.csv")
    roles = {"tmax": "degC", "tmin": "degC", "rh": "%", "wind": "m/s", "solar": "MJ/m2/d"}
    text = f'[site]\nname = "Invented Tarn"\nlatitude = {LAT}\nelevation = {ELEV}\n{extra}\n'
    for role, unit in roles.items():
        text += f'[series.{role}]\nfile = "station.csv"\nvalue = "{role}"\nunits = "{unit}"\n'
    text += '[series.pan]\nfile = "pan.csv"\nvalue = "pan_mm"\nunits = "mm"\n'
    path = tmp_path / "site.toml"
    path.write_text(text)
    return path


def test_cli_evaporation_json_lists_pan_and_three_computed_methods(tmp_path, capsys):
    from lakebalance.cli import main

    path = _write_site(tmp_path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert main(["evaporation", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["method"] == "pan"
    assert {"pan", "penman", "priestley_taylor", "fao56"} <= set(doc["available"])
    assert len(doc["monthly"]) == 14 and "penman-pan" in doc["differences"][0]
    assert main(["evaporation", str(path), "--method", "fao56"]) == 0
    out = capsys.readouterr().out
    assert "by fao56" in out and "monthly total minus fao56's" in out and "total" in out


def test_cli_evaporation_impossible_method_is_one_error_line_exit_2(tmp_path, capsys):
    from lakebalance.cli import main

    path = _write_site(tmp_path, extra="")
    text = path.read_text().replace("[series.wind]", "[series.dewpoint_unused]")
    path.write_text(
        text.replace(
            '[series.dewpoint_unused]\nfile = "station.csv"\nvalue = "wind"\nunits = "m/s"\n', ""
        )
    )
    assert main(["evaporation", str(path), "--method", "penman"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: ") and "wind" in err[0]
