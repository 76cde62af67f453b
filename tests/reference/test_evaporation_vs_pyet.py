"""lakebalance's Penman, Priestley-Taylor, FAO-56 and Hargreaves against an independent library.

Reference library: pyet 1.5.0 (Vremec, Collenteur and Birk, 2024; PyPI ``pyet``), installed only
in the reference environment (`pip install -e ".[reference]"`; `.ci/run` runs this file there,
since pyet caps pandas below 3). The same comparisons run in the main suite against pyet's
outputs kept as a file (test_evaporation_vs_pyet_fixtures.py). Over a year of daily weather the
two must agree within 1 % day by day.

Both sides get the same inputs and constants:

- Penman: pyet's ``penman`` writes the wind function as ``aw + bw u2`` multiplying
  ``γ (es - ea)/(Δ + γ)``; lakebalance's f(u2) = 2.6 (1 + 0.54 u2) mm/d/kPa is passed as
  ``aw = 2.6, bw = 2.6 × 0.54``. Both use λ(T) = 2.501 - 0.002361 T and γ = 0.665e-3 P.
- Open-water albedo 0.06 is passed to pyet for Penman and Priestley-Taylor (pyet's default is the
  grass 0.23, which stays for FAO-56).
- Hargreaves: FAO-56 eq. 52 converts R_a with 0.408 mm per MJ m⁻² (λ = 2.45 MJ/kg); pyet divides
  by λ(T). That deliberate difference is removed by scaling pyet's value by 0.408 λ(T).
- Negative values are clipped to 0 on both sides (pyet's ``clip_zero``; lakebalance's
  ``clip_negative``).

The weather is invented (a mid-latitude year with a seeded random generator), and, when the demo
site's records can be read, the demo weather too.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

pyet = pytest.importorskip("pyet", minversion="1.5")

from _weather import (  # noqa: E402
    ELEVATION,
    LATITUDE,
    _pyet_common,
    assert_agree,
    invented_year,
    ours,
)

from lakebalance.evaporation import wind_at_2m  # noqa: E402


@pytest.mark.parametrize(("radiation", "humidity"), [("solar", "extremes"), ("sunshine", "mean")])
def test_penman_open_water_vs_pyet_1_5(radiation, humidity):
    """Penman (1948) open water vs pyet 1.5.0 ``penman`` within 1 % on each of 365 days."""
    w = invented_year()
    drop = ["sunshine" if radiation == "solar" else "solar", "dewpoint"]
    drop += ["rh"] if humidity == "extremes" else ["rh_max", "rh_min"]
    mine = ours(w.drop(columns=drop), "penman", wind_height=10.0)
    u2 = pd.Series(wind_at_2m(w["wind"], 10.0), index=w.index)
    rad = {"rs": w["solar"]} if radiation == "solar" else {"n": w["sunshine"]}
    ref = pyet.penman(
        w["tmean"], u2, aw=2.6, bw=2.6 * 0.54, albedo=0.06, **rad, **_pyet_common(w, humidity)
    )
    assert_agree(mine, ref)


def test_penman_with_dewpoint_vs_pyet_1_5():
    """Penman with e_a from the dewpoint (FAO-56 eq. 14) vs pyet 1.5.0 given the same e_a."""
    w = invented_year()
    mine = ours(w.drop(columns=["rh", "rh_max", "rh_min", "sunshine"]), "penman")
    ea = 0.6108 * np.exp(17.27 * w["dewpoint"] / (w["dewpoint"] + 237.3))
    ref = pyet.penman(
        w["tmean"], w["wind"], rs=w["solar"], aw=2.6, bw=1.404, albedo=0.06, ea=ea,
        **_pyet_common(w, "none"),
    )  # fmt: skip
    assert_agree(mine, ref)


@pytest.mark.parametrize(("radiation", "humidity"), [("solar", "extremes"), ("sunshine", "mean")])
def test_priestley_taylor_vs_pyet_1_5(radiation, humidity):
    """Priestley-Taylor (alpha 1.26, albedo 0.06) vs pyet 1.5.0 ``priestley_taylor``."""
    w = invented_year()
    drop = ["sunshine" if radiation == "solar" else "solar", "dewpoint", "wind"]
    drop += ["rh"] if humidity == "extremes" else ["rh_max", "rh_min"]
    mine = ours(w.drop(columns=drop), "priestley_taylor")
    rad = {"rs": w["solar"]} if radiation == "solar" else {"n": w["sunshine"]}
    ref = pyet.priestley_taylor(
        w["tmean"], alpha=1.26, albedo=0.06, **rad, **_pyet_common(w, humidity)
    )
    assert_agree(mine, ref)


@pytest.mark.parametrize(("radiation", "humidity"), [("solar", "extremes"), ("sunshine", "mean")])
def test_fao56_et0_vs_pyet_1_5(radiation, humidity):
    """FAO-56 Penman-Monteith ET0 (grass albedo 0.23) vs pyet 1.5.0 ``pm_fao56``."""
    w = invented_year()
    drop = ["sunshine" if radiation == "solar" else "solar", "dewpoint"]
    drop += ["rh"] if humidity == "extremes" else ["rh_max", "rh_min"]
    mine = ours(w.drop(columns=drop), "fao56")
    rad = {"rs": w["solar"]} if radiation == "solar" else {"n": w["sunshine"]}
    ref = pyet.pm_fao56(w["tmean"], w["wind"], **rad, **_pyet_common(w, humidity))
    assert_agree(mine, ref)


def test_hargreaves_vs_pyet_1_5():
    """Hargreaves (FAO-56 eq. 52) vs pyet 1.5.0 ``hargreaves`` rescaled from 1/λ(T) to 0.408."""
    w = invented_year()[["tmax", "tmin"]]
    with pytest.warns(Warning):
        mine = ours(w, "hargreaves")
    tmean = 0.5 * (w["tmax"] + w["tmin"])
    ref = pyet.hargreaves(tmean, w["tmax"], w["tmin"], lat=float(np.deg2rad(LATITUDE)))
    ref = ref * 0.408 * pyet.calc_lambda(tmean)
    assert_agree(mine, ref)


def test_southern_hemisphere_and_low_latitude_vs_pyet_1_5():
    """The same agreement at 34° S (seasons reversed) and 5° N, FAO-56 ET0 and Priestley-Taylor."""
    w = invented_year(seed=7).drop(columns=["sunshine", "dewpoint", "rh"])
    for lat in (-34.0, 5.0):
        kw = dict(tmax=w["tmax"], tmin=w["tmin"], rhmax=w["rh_max"], rhmin=w["rh_min"])
        kw.update(elevation=ELEVATION, lat=float(np.deg2rad(lat)), rs=w["solar"])
        ref = pyet.pm_fao56(w["tmean"], w["wind"], **kw)
        assert_agree(ours(w, "fao56", latitude=lat), ref)
        ref = pyet.priestley_taylor(w["tmean"], albedo=0.06, **kw)
        assert_agree(ours(w, "priestley_taylor", latitude=lat), ref)


DEMO_SITE = Path(__file__).resolve().parents[2] / "data_demo" / "site.toml"


def _demo_weather():
    # the demo is part of the package: a missing or unreadable demo is a failure, not a skip
    import lakebalance

    site = lakebalance.load_site(DEMO_SITE)
    records = lakebalance.Lake(site).records
    return site, records


def test_demo_weather_one_year_vs_pyet_1_5():
    """Every computed method on one year of the demo site's weather vs pyet 1.5.0, within 1 %."""
    site, records = _demo_weather()
    import lakebalance

    res = lakebalance.Lake.with_results(site, records=records).evaporation
    daily = records.daily
    need = {"tmax", "tmin"}
    assert need <= set(daily.columns) and site.site.latitude is not None
    # one year of days on which no input was filled
    ok = ~res.filled_by_method.any(axis=1)
    days = ok[ok].index[:365]
    w = daily.loc[days]
    lat = float(np.deg2rad(site.site.latitude))
    elev = site.site.elevation or 0.0
    tmean = w["tmean"] if "tmean" in w else 0.5 * (w["tmax"] + w["tmin"])
    kw = dict(tmax=w["tmax"], tmin=w["tmin"], lat=lat, elevation=elev)
    if "dewpoint" in w:
        hum = {"ea": 0.6108 * np.exp(17.27 * w["dewpoint"] / (w["dewpoint"] + 237.3))}
    elif {"rh_max", "rh_min"} <= set(w.columns):
        hum = {"rhmax": w["rh_max"], "rhmin": w["rh_min"]}
    elif "rh" in w:
        hum = {"rh": w["rh"]}
    else:
        hum = {}
    rad = {"rs": w["solar"]} if "solar" in w else {"n": w["sunshine"]} if "sunshine" in w else None
    opts = site.evaporation
    u2 = wind_at_2m(w["wind"], opts.wind_height) if "wind" in w else None
    got = res.by_method.loc[days] * 1000.0
    checked = 0
    if rad is not None and "penman" in got and opts.heat_storage_lag == 0:
        ref = pyet.penman(tmean, u2, aw=2.6, bw=1.404, albedo=opts.albedo, **rad, **kw, **hum)
        assert_agree(got["penman"], ref)
        ref = pyet.pm_fao56(tmean, u2, **rad, **kw, **hum) * opts.open_water_coefficient
        assert_agree(got["fao56"], ref)
        checked += 2
    if rad is not None and "priestley_taylor" in got and "ea" not in hum:
        if opts.heat_storage_lag == 0:
            ref = pyet.priestley_taylor(
                tmean, alpha=opts.alpha, albedo=opts.albedo, **rad, **kw, **hum
            )
            assert_agree(got["priestley_taylor"], ref)
            checked += 1
    # as lake evaporation, Hargreaves' grass reference carries a coefficient: the site's
    # hargreaves_coefficient, else the FAO-56 route's (constant here; by depth it varies)
    k = opts.hargreaves_coefficient
    if k is None and opts.open_water_class == "constant":
        k = opts.open_water_coefficient
    if "hargreaves" in got and k is not None:
        t = 0.5 * (w["tmax"] + w["tmin"])
        ref = pyet.hargreaves(t, w["tmax"], w["tmin"], lat=lat) * 0.408 * pyet.calc_lambda(t)
        assert_agree(got["hargreaves"], ref * k)
        checked += 1
    assert checked >= 1
