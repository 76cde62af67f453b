"""Generate the demo data of Vessilow Reservoir, an invented lake in the invented Marrendale valley.

Everything here is invented: the lake, the valley, the streams, the weather and the utility. The
data come from a small, physically consistent forward simulation of our own, written independently
of the ``lakebalance`` package (it imports nothing from it, so that the package's recovery of the
planted truth is a real test):

1. **Weather** (daily, water years 2005-2022): seasonal temperature with AR(1) anomalies, rain as a
   two-state Markov chain of wet and dry days with gamma amounts, sunshine fraction, humidity from a
   dew point, and 3-hourly wind at 10 m.
2. **Open-water evaporation** by the Penman (1948) equation in its SI form with the wind function
   2.6 (1 + 0.54 u2) mm d-1 kPa-1, net radiation after Allen et al. (1998, FAO-56: eqs 21, 37-39),
   open-water albedo 0.06, computed from the *rounded* values written to the weather files, so that a
   correct implementation reproduces it.
3. **Two tributaries**: a soil bucket per catchment (daily), its runoff split into a quick and a slow
   linear reservoir routed hourly, plus a small deep baseflow.
4. **The lake**, stepped hourly with the classical fourth-order Runge-Kutta method on the stage:
   ``A(h) dh/dt = Q_in + (P - E) A(h) - Q_sill(h) - Q_spill(h) - k (h - h0) - W - W_unmetered``,
   with a compound outlet (power-law sill ``C (h - e)^b`` plus a weir spillway
   ``Cw L (h - crest)^1.5``), linear seepage, metered withdrawals with drought restrictions, and an
   unmetered withdrawal in one summer. Every term is integrated over each step with the same
   Runge-Kutta weights, so the true daily volumes close the balance to round-off.
5. **Gauge files** in several layouts and units, with planted problems (a gap, a stuck sensor,
   spikes, a datum shift, non-numeric tokens, a weather gap), spot gaugings with 5 % lognormal
   noise, and a bathymetric survey as a stage-area table and as contour polygons.

The truth (parameters, problem dates and sizes) goes to ``truth.json``; the true daily terms to
``truth_daily.csv``; the true storage relation to ``truth_storage.csv``.

Run ``python data_demo/make_demo.py [--out DIR]`` (about 10 s). The seed is fixed, so two runs give
the same numbers. The generator converts units itself on purpose: it plays the part of the gauge
owners who export in their own units, and must not share code with the package it tests.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import re
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240917
START = "2004-10-01"  # first day (local), start of water year 2005
END = "2022-09-30"  # last day (local), end of water year 2022
TIMEZONE = "Etc/GMT-1"  # fixed UTC+1, no daylight saving
UTC_OFFSET_H = 1

LATITUDE = 46.42  # degrees north (invented place)
LONGITUDE = 15.37  # degrees east (invented place)
ELEVATION = 412.0  # m above sea level, lake surface (air pressure)
DATUM_OFFSET = 402.35  # m; stage = elevation - DATUM_OFFSET (gauge zero)
EPSG = 32633  # WGS 84 / UTM zone 33N for the contours

# ---- basin geometry (stage on the gauge datum, m) --------------------------------------------
BED_STAGE = 0.0  # m, deepest point of the basin
TOP_STAGE = 17.5  # m, top of the surveyed range
R_TOP = 900.0  # m, mean shore radius at the top stage
SHAPE_P = 1.4  # (-), outer area ~ (h - bed)^p
LOBE_A, LOBE_B = 0.25, 0.10  # (-), r(theta) = R (1 + a cos 2 theta + b sin 3 theta)
ISLAND_X = 330.0  # m, island centre east of the lake centre
ISLAND_SUMMIT = 15.0  # m, island summit stage
ISLAND_COEF = 40.0  # m, island radius = coef * (summit - h)^0.6
ISLAND_JOIN = 6.0  # m, below this stage an isthmus joins the island to the east shore
ISTHMUS_WIDTH = 60.0  # m, width of the isthmus at the bed
TRUTH_STEP = 0.02  # m, stage step of the true storage table
CENTRE_E, CENTRE_N = 528_740.0, 5_141_260.0  # m, UTM 33N lake centre (invented place)

# ---- outlet and seepage ------------------------------------------------------------------------
SILL_C, SILL_E, SILL_B = 1.6, 10.0, 1.7  # m^(3-b)/s, m, (-)
SPILL_CW, SPILL_CREST, SPILL_LENGTH = 1.70, 12.9, 25.0  # m^0.5/s, m, m
SEEP_K, SEEP_H0 = 0.0045, 1.5  # m^2/s, m: seepage loss = k (h - h0) in m^3/s
# outlet works: the sill rebuilt, a new rating from this day on (the spillway untouched)
OUTLET_WORKS = {"date": "2021-05-03", "C": 1.9, "e": 10.15, "b": 1.65}
# ice on the sill: its outflow is this share of the open-water law over these days
ICE = ("2021-01-11", "2021-02-14")
ICE_FRACTION = 0.55
# field checks: the staff gauge read at quarterly visits, within +-3 mm of the true stage
FIELD_CHECK_ERROR_M = 0.003
# repeat survey: a flat deposit of silt over the deepest part of the bed, nothing above it
FIRST_SURVEY_DATE = "2004-08-24"
SECOND_SURVEY = {"date": "2021-09-14", "deposit_m": 2.0}

LEVELS = {
    "dead": 4.0,
    "intake": 6.0,
    "sill": SILL_E,
    "spill": SPILL_CREST,
    "dam_crest": 16.5,
}

# ---- withdrawals (public supply) -------------------------------------------------------------
DEMAND_M3S = [0.23, 0.23, 0.24, 0.25, 0.28, 0.32, 0.36, 0.35, 0.30, 0.26, 0.24, 0.23]  # Jan..Dec
RESTRICTIONS = [(9.0, 0.15), (7.5, 0.30)]  # (trigger stage m, demand cut) on yesterday's stage
UNMETERED = {"start": "2019-07-09", "end": "2019-08-05", "rate_m3s": 0.075}

# ---- planted problems in the stage record -------------------------------------------------------
STAGE_NOISE_M = 0.0015  # m, 1-sigma gauge noise before rounding to mm
STAGE_GAP = ("2011-01-12", "2011-02-22")
STUCK = ("2013-08-05", "2013-08-24")
SPIKES = {
    "2006-05-14": 0.42,
    "2008-11-02": -0.35,
    "2012-06-21": 0.55,
    "2016-02-09": -0.48,
    "2018-09-30": 0.38,
}
DATUM_SHIFT = {"start": "2020-03-17", "offset_m": 0.080}
WEATHER_GAP = ("2009-04-03", "2009-04-09")
DROUGHT = ("2014-10-01", "2017-09-30")  # water years 2015-2017: rain reduced
DROUGHT_RAIN_OCCURRENCE = 0.42  # (-) factor on the chance of a wet day after a dry one
DROUGHT_RAIN_AMOUNT = 0.65  # (-) factor on wet-day amounts
PAN_COEFFICIENT = [0.80, 0.78, 0.75, 0.72, 0.70, 0.68, 0.68, 0.70, 0.73, 0.76, 0.80, 0.82]

TRIBUTARIES = {
    # name: catchment km2, soil capacity mm, quick share, quick k h, slow k d, deep baseflow m3/s
    "tamsby_brook": dict(area_km2=68.0, smax=160.0, quick=0.6, kq_h=30.0, ks_d=45.0, deep=0.05),
    "wrenholt_creek": dict(area_km2=41.0, smax=120.0, quick=0.7, kq_h=16.0, ks_d=25.0, deep=0.02),
}

SIGMA_SB = 4.903e-9  # MJ K-4 m-2 d-1, Stefan-Boltzmann (FAO-56)
GSC = 0.0820  # MJ m-2 min-1, solar constant (FAO-56 eq. 21)
LAMBDA = 2.45  # MJ/kg, latent heat of vaporisation (FAO-56)
ALBEDO = 0.06  # (-), open water
WIND_HEIGHT = 10.0  # m, anemometer height


# =============================================================================================
# Geometry
# =============================================================================================
def outer_radius(h: float) -> float:
    """Mean shore radius (m) of the outer shoreline at stage h (m)."""
    return (
        R_TOP * max(h - BED_STAGE, 0.0) ** (SHAPE_P / 2) / (TOP_STAGE - BED_STAGE) ** (SHAPE_P / 2)
    )


def island_radius(h: float) -> float:
    """Radius (m) of the island at stage h (m); 0 above the summit."""
    return ISLAND_COEF * max(ISLAND_SUMMIT - h, 0.0) ** 0.6


def shoreline(h: float, n: int = 480):
    """The water-surface polygon (shapely) at stage h (m), in local metres around the centre."""
    from shapely.geometry import Point, Polygon, box

    theta = np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    r = outer_radius(h) * (1 + LOBE_A * np.cos(2 * theta) + LOBE_B * np.sin(3 * theta))
    poly = Polygon(np.column_stack([r * np.cos(theta), r * np.sin(theta)]))
    ri = island_radius(h)
    if ri > 0:
        land = Point(ISLAND_X, 0.0).buffer(ri, quad_segs=64)
        if h < ISLAND_JOIN:
            w = ISTHMUS_WIDTH * (ISLAND_JOIN - h) / (ISLAND_JOIN - BED_STAGE) / 2
            land = land.union(box(ISLAND_X, -w, 5000.0, w))
        poly = poly.difference(land)
    return poly


def true_storage() -> pd.DataFrame:
    """The true stage-area-volume table: area from the polygons, volume exact for linear area."""
    stage = np.round(np.arange(BED_STAGE, TOP_STAGE + 1e-9, TRUTH_STEP), 6)
    area = np.array([shoreline(h).area if h > BED_STAGE else 0.0 for h in stage])
    volume = np.concatenate([[0.0], np.cumsum(np.diff(stage) * (area[1:] + area[:-1]) / 2)])
    return pd.DataFrame({"stage_m": stage, "area_m2": area, "volume_m3": volume})


def volume_of(storage: pd.DataFrame, stage_m: np.ndarray) -> np.ndarray:
    """Exact volume (m3) at stage_m (m) for area linear in stage between table rows."""
    st, ar, vo = (storage[c].to_numpy() for c in ("stage_m", "area_m2", "volume_m3"))
    j = np.clip(np.searchsorted(st, stage_m, side="right") - 1, 0, len(st) - 2)
    dh = stage_m - st[j]
    slope = (ar[j + 1] - ar[j]) / (st[j + 1] - st[j])
    return vo[j] + ar[j] * dh + 0.5 * slope * dh**2


# =============================================================================================
# Weather and evaporation
# =============================================================================================
def saturation_vp(t: np.ndarray) -> np.ndarray:
    """Saturation vapour pressure (kPa) at t (degC), FAO-56 eq. 11."""
    return 0.6108 * np.exp(17.27 * t / (t + 237.3))


def extraterrestrial(doy: np.ndarray, lat_deg: float) -> tuple[np.ndarray, np.ndarray]:
    """Ra (MJ m-2 d-1) and daylight hours N (h), FAO-56 eqs 21-25 and 34."""
    phi = math.radians(lat_deg)
    dr = 1 + 0.033 * np.cos(2 * np.pi * doy / 365)
    delta = 0.409 * np.sin(2 * np.pi * doy / 365 - 1.39)
    ws = np.arccos(-np.tan(phi) * np.tan(delta))
    ra = (
        24
        * 60
        / np.pi
        * GSC
        * dr
        * (ws * np.sin(phi) * np.sin(delta) + np.cos(phi) * np.cos(delta) * np.sin(ws))
    )
    return ra, 24 / np.pi * ws


def penman_open_water(w: pd.DataFrame, wind10_ms: np.ndarray) -> np.ndarray:
    """Open-water Penman (1948) evaporation (mm/d) from daily weather (see module docstring).

    ``w`` holds tmax, tmin (degC), rh_max, rh_min (%), solar (MJ m-2 d-1); ``wind10_ms`` the daily
    mean wind at 10 m (m/s), brought to 2 m by the FAO-56 log profile (eq. 47).
    """
    tmax, tmin = w["tmax"].to_numpy(), w["tmin"].to_numpy()
    tmean = (tmax + tmin) / 2
    es = (saturation_vp(tmax) + saturation_vp(tmin)) / 2  # eq. 12
    ea = (saturation_vp(tmin) * w["rh_max"] / 100 + saturation_vp(tmax) * w["rh_min"] / 100) / 2
    ea = ea.to_numpy()  # eq. 17
    delta = 4098 * saturation_vp(tmean) / (tmean + 237.3) ** 2  # eq. 13
    pressure = 101.3 * ((293 - 0.0065 * ELEVATION) / 293) ** 5.26  # eq. 7
    gamma = 0.000665 * pressure  # eq. 8
    doy = w.index.day_of_year.to_numpy()
    ra, _ = extraterrestrial(doy, LATITUDE)
    rso = (0.75 + 2e-5 * ELEVATION) * ra  # eq. 37
    rs = w["solar"].to_numpy()
    rns = (1 - ALBEDO) * rs  # eq. 38
    ratio = np.clip(rs / rso, 0.25, 1.0)
    rnl = (
        SIGMA_SB
        * ((tmax + 273.16) ** 4 + (tmin + 273.16) ** 4)
        / 2
        * (0.34 - 0.14 * np.sqrt(ea))
        * (1.35 * ratio - 0.35)
    )  # eq. 39
    rn = rns - rnl
    u2 = wind10_ms * 4.87 / np.log(67.8 * WIND_HEIGHT - 5.42)  # eq. 47
    fu = 2.6 * (1 + 0.54 * u2)  # mm d-1 kPa-1
    return (delta * rn / LAMBDA + gamma * fu * (es - ea)) / (delta + gamma)


def make_weather(rng: np.random.Generator, days: pd.DatetimeIndex) -> dict:
    """Daily weather (rounded as a station reports it), hourly rain, 3-hourly wind."""
    n = len(days)
    doy = days.day_of_year.to_numpy()
    season = np.cos(2 * np.pi * (doy - 201) / 365.25)  # +1 late July, -1 late January
    drought = (days >= DROUGHT[0]) & (days <= DROUGHT[1])

    # rain occurrence: two-state Markov chain; amounts gamma
    p_wd = 0.30 - 0.06 * season  # wet after dry
    p_wd = np.where(drought, p_wd * DROUGHT_RAIN_OCCURRENCE, p_wd)
    p_ww = 0.62 - 0.05 * season
    u = rng.random(n)
    wet = np.zeros(n, dtype=bool)
    for i in range(1, n):  # a Markov chain: sequential by nature (6,570 days)
        wet[i] = u[i] < (p_ww[i] if wet[i - 1] else p_wd[i])
    mean_mm = 6.3 + 1.7 * season
    amount = rng.gamma(0.8, mean_mm / 0.8)
    storm = rng.random(n) < 0.04  # a heavy-rain day among the wet days
    amount = np.where(storm, rng.gamma(2.0, 20.0, n), amount)
    water_year = days.year + (days.month >= 10)
    wetness = np.exp(rng.normal(0, 0.18, water_year.max() - water_year.min() + 1))
    amount = amount * wetness[water_year - water_year.min()]
    amount = np.where(drought, amount * DROUGHT_RAIN_AMOUNT, amount)
    rain_day = np.where(wet, np.round(np.maximum(amount, 0.2), 1), 0.0)

    # hourly rain: each wet day's total falls uniformly over a few consecutive hours
    start_h = rng.integers(0, 20, n)
    dur_h = np.minimum(rng.integers(2, 13, n), 24 - start_h)
    hours = np.arange(24)
    inside = (hours[None, :] >= start_h[:, None]) & (hours[None, :] < (start_h + dur_h)[:, None])
    rain_hourly = np.where(inside, (rain_day / dur_h)[:, None], 0.0)  # mm per hour

    # temperature: seasonal mean + AR(1) anomaly; drought years warmer
    anom = np.zeros(n)
    eps = rng.normal(0, 2.0, n)
    for i in range(1, n):
        anom[i] = 0.75 * anom[i - 1] + eps[i]
    tmean = 9.6 + 8.6 * season + anom + np.where(drought, 0.8, 0.0)
    dtr = 9.5 + 3.0 * season - 3.5 * wet + rng.normal(0, 1.0, n)
    dtr = np.clip(dtr, 2.0, 18.0)
    tmax = np.round(tmean + dtr / 2, 1)
    tmin = np.round(tmean - dtr / 2, 1)

    # humidity from a dew point below tmin
    dep = np.where(wet, 0.3, 0.6 + 0.9 * (1 + season)) + np.abs(rng.normal(0, 0.6, n))
    td = tmin - dep
    rh_max = np.round(np.minimum(100 * saturation_vp(td) / saturation_vp(tmin), 100.0), 0)
    rh_min = np.round(np.clip(100 * saturation_vp(td) / saturation_vp(tmax), 15.0, 100.0), 0)

    # solar radiation by the Angstrom relation, FAO-56 eq. 35
    ra, _ = extraterrestrial(doy, LATITUDE)
    frac = np.where(wet, rng.beta(1.2, 6.0, n), rng.beta(2.2 + 0.8 * season, 2.6, n))
    solar = np.round((0.25 + 0.50 * frac) * ra, 2)

    # wind at 10 m, every 3 hours (local 00, 03, ..., 21): daily level AR(1) + diurnal cycle
    level = np.zeros(n)
    e2 = rng.normal(0, 0.35, n)
    for i in range(1, n):
        level[i] = 0.6 * level[i - 1] + e2[i]
    daily_ms = np.exp(np.log(3.1 - 0.5 * season) + level - 0.06)
    slots = np.arange(0, 24, 3)
    diurnal = 1 + 0.25 * np.cos(2 * np.pi * (slots - 15) / 24)
    wind3h_ms = daily_ms[:, None] * diurnal[None, :] * np.exp(rng.normal(0, 0.15, (n, 8)))
    wind3h_kmh = np.round(wind3h_ms * 3.6, 1)
    wind_daily_ms = wind3h_kmh.mean(axis=1) / 3.6

    daily = pd.DataFrame(
        {"tmax": tmax, "tmin": tmin, "rh_max": rh_max, "rh_min": rh_min, "solar": solar},
        index=days,
    )
    return {
        "daily": daily,
        "rain_day_mm": rain_day,
        "rain_hourly_mm": rain_hourly,
        "wind3h_kmh": wind3h_kmh,
        "wind_daily_ms": wind_daily_ms,
        "wet": wet,
    }


# =============================================================================================
# Catchments
# =============================================================================================
def tributary_hourly(
    rain_day_mm: np.ndarray,
    rain_hourly_mm: np.ndarray,
    pet_mm: np.ndarray,
    p: dict,
) -> np.ndarray:
    """Hourly mean flow (m3/s) of one tributary: soil bucket, quick and slow linear reservoirs."""
    from scipy.signal import lfilter

    n = len(rain_day_mm)
    s = 0.45 * p["smax"]
    runoff = np.zeros(n)
    for i in range(n):  # soil moisture bucket: sequential by nature
        r = rain_day_mm[i] * (s / p["smax"]) ** 2
        s = s + rain_day_mm[i] - r
        s = s - min(s, pet_mm[i] * s / p["smax"])
        if s > p["smax"]:
            r += s - p["smax"]
            s = p["smax"]
        runoff[i] = r
    share = np.divide(
        rain_hourly_mm,
        rain_day_mm[:, None],
        out=np.zeros_like(rain_hourly_mm),
        where=rain_day_mm[:, None] > 0,
    )
    runoff_h = (runoff[:, None] * share).ravel()  # mm per hour
    to_m3s = p["area_km2"] * 1e6 / 1000 / 3600  # (mm/h) -> m3/s
    aq = math.exp(-1.0 / p["kq_h"])
    a_s = math.exp(-1.0 / (24 * p["ks_d"]))
    quick = lfilter([1 - aq], [1, -aq], p["quick"] * runoff_h)
    slow0 = 0.8 * (1 - p["quick"]) * runoff.mean() / 24  # start near the slow store's mean
    slow = lfilter([1 - a_s], [1, -a_s], (1 - p["quick"]) * runoff_h, zi=[a_s * slow0])[0]
    return (quick + slow) * to_m3s + p["deep"]


# =============================================================================================
# The lake
# =============================================================================================
def simulate_lake(
    storage: pd.DataFrame,
    inflow_h: np.ndarray,
    rain_h_mm: np.ndarray,
    evap_day_mm: np.ndarray,
    demand_day_m3s: np.ndarray,
    unmetered_day_m3s: np.ndarray,
    h_start: float,
    sill_day: np.ndarray,
    ice_day: np.ndarray,
) -> dict:
    """Hourly RK4 of the lake stage with every term integrated over each step.

    Returns daily arrays: metered withdrawal (m3, rounded to 1 m3 as the meter reads), stage at
    each day's end (m), daily mean stage (m), and daily volumes (m3) of each term; plus the
    hourly stage path (m, at the start of each hour). ``sill_day`` holds the sill's (C, e, b) of
    each day (the works change them) and ``ice_day`` the share of its open-water outflow.
    """
    st = storage["stage_m"].to_numpy()
    ar = storage["area_m2"].to_numpy()
    z0, dz = float(st[0]), float(st[1] - st[0])
    last = len(st) - 2

    def area(h: float) -> float:
        j = min(max(int((h - z0) / dz), 0), last)
        return ar[j] + (ar[j + 1] - ar[j]) * (h - st[j]) / dz

    def losses(h: float, d: int) -> tuple[float, float, float]:
        c, e, b = sill_day[d]
        q_sill = ice_day[d] * c * (h - e) ** b if h > e else 0.0
        q_spill = SPILL_CW * SPILL_LENGTH * (h - SPILL_CREST) ** 1.5 if h > SPILL_CREST else 0.0
        return q_sill, q_spill, SEEP_K * (h - SEEP_H0)

    n = len(evap_day_mm)
    dt = 3600.0
    out = {
        k: np.zeros(n)
        for k in (
            "stage_end",
            "stage_mean",
            "inflow",
            "rain",
            "evaporation",
            "sill",
            "spillway",
            "seepage",
            "withdrawal",
            "unmetered",
        )
    }
    stage_hourly = np.zeros(n * 24)
    h = h_start
    h_yesterday = h_start
    for d in range(n):
        cut = 0.0
        for trigger, c in RESTRICTIONS:
            if h_yesterday < trigger:
                cut = max(cut, c)
        w_m3 = round(demand_day_m3s[d] * (1 - cut) * 86400.0)
        w = w_m3 / 86400.0
        wu = unmetered_day_m3s[d]
        e = evap_day_mm[d] / 1000 / 86400.0  # m/s
        acc = np.zeros(7)  # hdt, rain, evap, sill, spill, seep, (spare)
        for j in range(24):
            k = d * 24 + j
            stage_hourly[k] = h
            qin = inflow_h[k]
            p = rain_h_mm[k] / 1000 / 3600.0  # m/s
            hs = (h, 0.0, 0.0, 0.0)
            ks = []
            for stage_k, frac in ((h, 0.0), (None, 0.5), (None, 0.5), (None, 1.0)):
                hk = h if stage_k is not None else h + frac * dt * ks[-1][0]
                a = area(hk)
                qs, qw, qg = losses(hk, d)
                net = qin - w - wu - qs - qw - qg + (p - e) * a
                ks.append((net / a, hk, p * a, e * a, qs, qw, qg))
            del hs
            wts = (1.0, 2.0, 2.0, 1.0)
            slope = sum(wt * kk[0] for wt, kk in zip(wts, ks)) / 6
            for m in range(1, 7):
                acc[m - 1] += dt * sum(wt * kk[m] for wt, kk in zip(wts, ks)) / 6
            h = h + dt * slope
        out["stage_end"][d] = h
        out["stage_mean"][d] = acc[0] / 86400.0
        out["rain"][d] = acc[1]
        out["evaporation"][d] = acc[2]
        out["sill"][d] = acc[3]
        out["spillway"][d] = acc[4]
        out["seepage"][d] = acc[5]
        out["inflow"][d] = inflow_h[d * 24 : (d + 1) * 24].sum() * dt
        out["withdrawal"][d] = w_m3
        out["unmetered"][d] = wu * 86400.0
        h_yesterday = out["stage_mean"][d]
    out["stage_hourly"] = stage_hourly
    return out


# =============================================================================================
# Writers
# =============================================================================================
def write_waterml(path: Path, days: pd.DatetimeIndex, values_m3s: np.ndarray, name: str) -> None:
    """Daily mean flows as a WaterML 2.0 MeasurementTimeseries (time = start of the local day)."""
    off = f"+{UTC_OFFSET_H:02d}:00"
    t0 = days[0].strftime("%Y-%m-%dT00:00:00") + off
    t1 = (days[-1] + pd.Timedelta(days=1)).strftime("%Y-%m-%dT00:00:00") + off
    head = f"""<?xml version="1.0" encoding="UTF-8"?>
<wml2:Collection xmlns:wml2="http://www.opengis.net/waterml/2.0"
 xmlns:gml="http://www.opengis.net/gml/3.2" xmlns:om="http://www.opengis.net/om/2.0"
 xmlns:xlink="http://www.w3.org/1999/xlink" gml:id="marrendale.{name}">
<wml2:metadata><wml2:DocumentMetadata gml:id="doc.{name}">
<wml2:generationDate>2022-10-15T09:00:00{off}</wml2:generationDate>
<wml2:generationSystem>Marrendale Water Board gauge archive (invented)</wml2:generationSystem>
</wml2:DocumentMetadata></wml2:metadata>
<wml2:observationMember><om:OM_Observation gml:id="obs.{name}">
<om:phenomenonTime><gml:TimePeriod gml:id="period.{name}"><gml:beginPosition>{t0}</gml:beginPosition><gml:endPosition>{t1}</gml:endPosition></gml:TimePeriod></om:phenomenonTime>
<om:resultTime><gml:TimeInstant gml:id="result.{name}"><gml:timePosition>2022-10-15T09:00:00{off}</gml:timePosition></gml:TimeInstant></om:resultTime>
<om:procedure xlink:href="urn:marrendale:procedure:daily-mean-discharge"/>
<om:observedProperty xlink:href="urn:marrendale:property:discharge" xlink:title="Discharge"/>
<om:featureOfInterest xlink:href="urn:marrendale:station:{name}" xlink:title="{name.replace("_", " ").title()} at the lake inlet"/>
<om:result><wml2:MeasurementTimeseries gml:id="ts.{name}">
<wml2:defaultPointMetadata><wml2:DefaultTVPMeasurementMetadata><wml2:uom code="m3/s"/><wml2:interpolationType xlink:href="http://www.opengis.net/def/waterml/2.0/interpolationType/AverageSucc" xlink:title="Average in succeeding interval"/></wml2:DefaultTVPMeasurementMetadata></wml2:defaultPointMetadata>
"""
    stamps = days.strftime("%Y-%m-%dT00:00:00") + off
    pts = "".join(
        f"<wml2:point><wml2:MeasurementTVP><wml2:time>{t}</wml2:time><wml2:value>{v:.4f}</wml2:value></wml2:MeasurementTVP></wml2:point>\n"
        for t, v in zip(stamps, values_m3s)
    )
    tail = "</wml2:MeasurementTimeseries></om:result></om:OM_Observation></wml2:observationMember>\n</wml2:Collection>\n"
    path.write_text(head + pts + tail, encoding="utf-8")


def write_xlsx(path: Path, df: pd.DataFrame, sheet: str) -> None:
    """An Excel sheet with fixed document properties (so reruns differ only in zip timestamps)."""
    import datetime as dt

    with pd.ExcelWriter(path, engine="openpyxl") as xw:
        df.to_excel(xw, sheet_name=sheet, index=False)
        props = xw.book.properties
        props.creator = "Marrendale Water Board (invented)"
        props.created = props.modified = dt.datetime(2022, 10, 15, 9, 0, 0)
    _fix_zip_times(path)


def _fix_zip_times(path: Path) -> None:
    """Rewrite a zip container with fixed entry times, so reruns give identical bytes."""
    import zipfile

    with zipfile.ZipFile(path) as zin:
        entries = [(i, zin.read(i.filename)) for i in zin.infolist()]
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zout:
        for info, data in entries:
            if info.filename == "docProps/core.xml":  # openpyxl stamps the save time
                data = re.sub(
                    rb"(<dcterms:modified[^>]*>)[^<]*", rb"\g<1>2022-10-15T09:00:00Z", data
                )
            fixed = zipfile.ZipInfo(info.filename, date_time=(2022, 10, 15, 9, 0, 0))
            fixed.compress_type = zipfile.ZIP_DEFLATED
            fixed.external_attr = info.external_attr
            zout.writestr(fixed, data)


def write_contours(path: Path, levels_elev: np.ndarray) -> None:
    """Bathymetric contours: one polygon (with the island as a hole) per elevation (m a.s.l.)."""
    import geopandas as gpd
    from shapely import affinity

    geoms, elev = [], []
    for z in levels_elev:
        h = z - DATUM_OFFSET
        g = shoreline(h)
        if g.is_empty:
            continue
        geoms.append(affinity.translate(g, CENTRE_E, CENTRE_N))
        elev.append(round(float(z), 2))
    gdf = gpd.GeoDataFrame({"elevation": elev}, geometry=geoms, crs=f"EPSG:{EPSG}")
    if path.exists():
        path.unlink()
    gdf.to_file(path, layer="depth_contours", driver="GPKG", engine="pyogrio")
    import sqlite3

    con = sqlite3.connect(path)  # fixed time stamps, so reruns give identical bytes
    con.execute("UPDATE gpkg_contents SET last_change = '2022-10-15T09:00:00.000Z'")
    con.commit()
    con.execute("VACUUM")
    con.close()


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# =============================================================================================
# Main
# =============================================================================================
def generate(out: Path, changes: bool = False) -> dict:
    """Write every demo file into ``out`` and return the truth (also written to truth.json).

    With ``changes`` the outlet is rebuilt (:data:`OUTLET_WORKS`, with a re-rating campaign) and
    ice sits on the sill (:data:`ICE`): a variant for trying dated ratings and ice periods (see
    README.md), not the shipped demo, whose other files it changes from the works on.
    """
    rng = np.random.default_rng(SEED)
    out.mkdir(parents=True, exist_ok=True)
    days = pd.date_range(START, END, freq="D", name="date")
    n = len(days)

    # -- storage
    storage = true_storage()

    # -- weather and evaporation
    wx = make_weather(rng, days)
    evap_mm = penman_open_water(wx["daily"], wx["wind_daily_ms"])
    land_pet = np.maximum(0.85 * evap_mm, 0.0)  # catchment evapotranspiration demand, mm/d

    # -- tributaries (hourly)
    inflows = {
        name: tributary_hourly(wx["rain_day_mm"], wx["rain_hourly_mm"], land_pet, p)
        for name, p in TRIBUTARIES.items()
    }
    # daily means as the gauges report them (rounded), and the hourly path scaled so that
    # its daily mean equals the reported value exactly (the gauge is taken as right)
    q1_day = np.round(inflows["tamsby_brook"].reshape(n, 24).mean(axis=1) * 86.4, 2)  # ML/d
    q2_day = np.round(inflows["wrenholt_creek"].reshape(n, 24).mean(axis=1), 4)  # m3/s
    q1_h = inflows["tamsby_brook"].reshape(n, 24)
    q1_h = (q1_h * (q1_day / 86.4 / q1_h.mean(axis=1))[:, None]).ravel()
    q2_h = inflows["wrenholt_creek"].reshape(n, 24)
    q2_h = (q2_h * (q2_day / q2_h.mean(axis=1))[:, None]).ravel()

    # -- withdrawals
    month = days.month.to_numpy()
    demand = np.asarray(DEMAND_M3S)[month - 1]
    weekend = days.day_of_week.to_numpy() >= 5
    demand = demand * np.where(weekend, 0.93, 1.0) * np.exp(rng.normal(0, 0.05, n))
    unmet = np.where(
        (days >= UNMETERED["start"]) & (days <= UNMETERED["end"]), UNMETERED["rate_m3s"], 0.0
    )

    # -- the lake (the sill's law changes with the works; ice reduces its outflow)
    works = (days >= OUTLET_WORKS["date"]) & changes
    sill_day = np.where(
        works[:, None],
        [OUTLET_WORKS["C"], OUTLET_WORKS["e"], OUTLET_WORKS["b"]],
        [SILL_C, SILL_E, SILL_B],
    )
    ice_mask = (days >= ICE[0]) & (days <= ICE[1]) & changes
    ice_day = np.where(ice_mask, ICE_FRACTION, 1.0)
    sim = simulate_lake(
        storage,
        q1_h + q2_h,
        wx["rain_hourly_mm"].ravel(),
        evap_mm,
        demand,
        unmet,
        h_start=10.55,
        sill_day=sill_day,
        ice_day=ice_day,
    )
    stage_mean = sim["stage_mean"]

    # ---------------------------------------------------------------- stage file
    stage_obs = np.round(stage_mean + rng.normal(0, STAGE_NOISE_M, n), 3)
    shift_mask = days >= DATUM_SHIFT["start"]
    stage_obs = np.round(stage_obs + np.where(shift_mask, DATUM_SHIFT["offset_m"], 0.0), 3)
    stuck_mask = (days >= STUCK[0]) & (days <= STUCK[1])
    stuck_value = stage_obs[np.flatnonzero(stuck_mask)[0] - 1]
    stage_obs[stuck_mask] = stuck_value
    for d, size in SPIKES.items():
        stage_obs[days.get_loc(pd.Timestamp(d))] = round(
            stage_obs[days.get_loc(pd.Timestamp(d))] + size, 3
        )
    gap_mask = (days >= STAGE_GAP[0]) & (days <= STAGE_GAP[1])
    gauges = out / "gauges"
    weather = out / "weather"
    survey = out / "survey"
    for folder in (gauges, weather, survey):
        folder.mkdir(exist_ok=True)
    pd.DataFrame({"date": days.strftime("%Y-%m-%d"), "stage_m": stage_obs})[~gap_mask].to_csv(
        gauges / "stage_daily.csv", index=False, float_format="%.3f"
    )

    # ---------------------------------------------------------------- tributary files
    pd.DataFrame({"Date": days.strftime("%Y-%m-%d"), "Flow (ML/d)": q1_day}).to_csv(
        gauges / "tamsby_brook_mld.csv", index=False, float_format="%.2f"
    )
    write_waterml(gauges / "wrenholt_creek_wml2.xml", days, q2_day, "wrenholt_creek")

    # ---------------------------------------------------------------- weather files
    pd.DataFrame({"date": days.strftime("%Y-%m-%d"), "rain_mm": wx["rain_day_mm"]}).to_csv(
        weather / "rain_daily.csv", index=False, float_format="%.1f"
    )
    wgap = (days >= WEATHER_GAP[0]) & (days <= WEATHER_GAP[1])
    wd = wx["daily"].copy()
    wd.insert(0, "date", days.strftime("%Y-%m-%d"))
    wd = wd.rename(
        columns={
            "tmax": "tmax_c",
            "tmin": "tmin_c",
            "rh_max": "rh_max_pct",
            "rh_min": "rh_min_pct",
            "solar": "solar_mj_m2",
        }
    )
    wd[~wgap].to_csv(weather / "station_daily.csv", index=False)
    # wind: 3-hourly readings at local 00..21 h, written with UTC timestamps
    stamps_local = np.repeat(days.values, 8) + np.tile(np.arange(0, 24, 3) * 3600, n).astype(
        "timedelta64[s]"
    )
    stamps_utc = pd.DatetimeIndex(stamps_local) - pd.Timedelta(hours=UTC_OFFSET_H)
    wind_keep = ~np.repeat(wgap, 8)
    pd.DataFrame(
        {
            "time": stamps_utc.strftime("%Y-%m-%dT%H:%M:%S+00:00")[wind_keep],
            "wind_kmh": wx["wind3h_kmh"].ravel()[wind_keep],
        }
    ).to_csv(weather / "wind_3h_utc.csv", index=False, float_format="%.1f")

    # pan: semicolon-delimited, decimal comma, "ICE" on frozen days, a few "n/a"
    kp = np.asarray(PAN_COEFFICIENT)[month - 1]
    pan = np.round(np.maximum(evap_mm, 0.0) / kp * np.exp(rng.normal(0, 0.08, n)), 1)
    tokens = pd.Series([f"{v:.1f}".replace(".", ",") for v in pan])
    ice = (wx["daily"]["tmax"].to_numpy() < 1.0) & (month <= 3) | (
        (wx["daily"]["tmax"].to_numpy() < 1.0) & (month >= 11)
    )
    tokens[ice] = "ICE"
    na_idx = np.sort(rng.choice(np.flatnonzero(~ice & ~wgap), 6, replace=False))
    tokens[na_idx] = "n/a"
    pd.DataFrame({"date": days.strftime("%Y-%m-%d"), "pan_mm": tokens.to_numpy()}).to_csv(
        weather / "pan_class_a.csv", index=False, sep=";"
    )

    # ---------------------------------------------------------------- withdrawals (XLSX)
    (out / "meters").mkdir(exist_ok=True)
    write_xlsx(
        out / "meters" / "withdrawals.xlsx",
        pd.DataFrame({"Day": days.to_pydatetime(), "Volume m3": sim["withdrawal"].astype(int)}),
        sheet="Meter readings",
    )

    # ---------------------------------------------------------------- gaugings
    if changes:
        # the hydrographer's visits before the ice and the works are those of the lake as it
        # was (the same path up to then), chosen on the open-water path of the whole record; the
        # works are followed by a re-rating campaign of their own
        sim_open = simulate_lake(
            storage, q1_h + q2_h, wx["rain_hourly_mm"].ravel(), evap_mm, demand, unmet,
            h_start=10.55, sill_day=np.tile([SILL_C, SILL_E, SILL_B], (n, 1)), ice_day=np.ones(n),
        )  # fmt: skip
        before, _ = make_gaugings(
            rng, days, sim_open["stage_hourly"], stuck_mask | gap_mask, sill_day, "record"
        )
        kept = pd.to_datetime(before["date"], format="%d/%m/%Y %H:%M") < pd.Timestamp(ICE[0])
        after, _ = make_gaugings(
            np.random.default_rng([SEED, 5]), days, sim["stage_hourly"],
            stuck_mask | gap_mask | ice_mask, sill_day, "rerating",
        )  # fmt: skip
        gaugings = pd.concat([before[kept], after], ignore_index=True)
    else:
        gaugings, _ = make_gaugings(
            rng, days, sim["stage_hourly"], stuck_mask | gap_mask, sill_day, "record"
        )
    gauging_info = gauging_summary(gaugings)
    gaugings.to_csv(out / "gaugings.csv", index=False)

    # ---------------------------------------------------------------- field checks
    # a stream of its own, so that the other files do not depend on the visits
    staff, staff_info = make_field_checks(np.random.default_rng([SEED, 7]), days, sim)
    staff.to_csv(gauges / "staff_readings.csv", index=False)

    # ---------------------------------------------------------------- survey
    tab_stage = np.round(np.arange(0.0, 17.0 + 1e-9, 0.5), 2)
    tab_area = np.interp(tab_stage, storage["stage_m"], storage["area_m2"])
    pd.DataFrame({"stage_m": tab_stage, "area_ha": np.round(tab_area / 1e4, 1)}).to_csv(
        survey / "stage_area.csv", index=False, float_format="%.2f"
    )
    # the resurvey: the bed is silted flat up to the deposit's top, the basin above unchanged
    bed2 = BED_STAGE + SECOND_SURVEY["deposit_m"]
    tab2 = np.r_[bed2, tab_stage[tab_stage > bed2]]
    area2 = np.interp(tab2, storage["stage_m"], storage["area_m2"])
    pd.DataFrame({"stage_m": tab2, "area_ha": np.round(area2 / 1e4, 1)}).to_csv(
        survey / "stage_area_2021.csv", index=False, float_format="%.2f"
    )
    contour_elev = np.round(np.arange(402.5, 419.5 + 1e-9, 0.5), 2)
    write_contours(survey / "bathymetry.gpkg", contour_elev)
    storage.to_csv(out / "truth_storage.csv", index=False, float_format="%.3f")

    # ---------------------------------------------------------------- truth
    vol = volume_of(storage, sim["stage_end"])
    truth_daily = pd.DataFrame(
        {
            "date": days.strftime("%Y-%m-%d"),
            "stage_mean_m": stage_mean,
            "stage_end_m": sim["stage_end"],
            "storage_end_m3": vol,
            "inflow_tamsby_brook_m3": q1_day * 1000.0,
            "inflow_wrenholt_creek_m3": q2_day * 86400.0,
            "rain_m3": sim["rain"],
            "evaporation_m3": sim["evaporation"],
            "outflow_sill_m3": sim["sill"],
            "outflow_spillway_m3": sim["spillway"],
            "seepage_m3": sim["seepage"],
            "withdrawal_m3": sim["withdrawal"],
            "unmetered_withdrawal_m3": sim["unmetered"],
            "evaporation_mm": evap_mm,
            "stage_observed_m": np.where(gap_mask, np.nan, stage_obs),
        }
    )
    for col in truth_daily.columns[1:]:
        digits = 6 if col.endswith("_m") else 4 if col.endswith("_mm") else 2
        truth_daily[col] = truth_daily[col].round(digits)
    truth_daily.to_csv(out / "truth_daily.csv", index=False)

    token_count = {t: int((tokens == t).sum()) for t in ("ICE", "n/a")}
    token_dates = {
        t: [d.strftime("%Y-%m-%d") for d in days[(tokens == t).to_numpy()]] for t in ("n/a",)
    }
    truth = build_truth(days, sim, storage, evap_mm, gauging_info, token_count, stuck_value)
    truth["field_checks"] = staff_info
    if changes:
        truth["outlet"]["works"] = {
            **OUTLET_WORKS,
            "meaning": "the sill law Q = C (h - e)^b from this day on; the spillway is unchanged",
        }
        truth["ice"] = {
            "start": ICE[0],
            "end": ICE[1],
            "sill_outflow_fraction": ICE_FRACTION,
            "days": int(ice_mask.sum()),
            "sill_outflow_m3": float(sim["sill"][ice_mask].sum()),
        }
    truth["storage"]["surveys"] = {
        "first": {"date": FIRST_SURVEY_DATE, "file": "survey/stage_area.csv"},
        "second": {
            "date": SECOND_SURVEY["date"],
            "file": "survey/stage_area_2021.csv",
            "deposit_m": SECOND_SURVEY["deposit_m"],
            "how": "a flat deposit over the bed up to its top; areas above it unchanged",
            "capacity_lost_m3": float(volume_of(storage, np.array([bed2]))[0]),
        },
    }
    truth["problems"]["non_numeric"]["dates"] = token_dates
    truth["daily_mean_timing"] = timing_error(storage, truth_daily)
    truth["files"] = {
        str(p.relative_to(out)): sha256(p)
        for p in sorted(out.rglob("*"))
        if p.is_file()
        and p.suffix not in (".py", ".md", ".toml", ".json")
        and "__pycache__" not in p.parts
    }
    (out / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")
    return truth


def timing_error(storage: pd.DataFrame, td: pd.DataFrame) -> dict:
    """How well daily means can close the balance at best (true terms, noise-free mean stage).

    The change of storage between two consecutive daily mean stages is compared with the mean of
    the two days' true net terms. Within-day timing of rain and floods makes the difference; it
    telescopes over longer periods.
    """
    h = td["stage_mean_m"].to_numpy()
    area = np.interp(h, storage["stage_m"], storage["area_m2"])
    net = (
        td["inflow_tamsby_brook_m3"]
        + td["inflow_wrenholt_creek_m3"]
        + td["rain_m3"]
        - td["evaporation_m3"]
        - td["outflow_sill_m3"]
        - td["outflow_spillway_m3"]
        - td["seepage_m3"]
        - td["withdrawal_m3"]
        - td["unmetered_withdrawal_m3"]
    ).to_numpy()
    dv = np.diff(volume_of(storage, h))
    err_mm = (dv - (net[:-1] + net[1:]) / 2) / area[:-1] * 1000.0
    dates = pd.DatetimeIndex(pd.to_datetime(td["date"].iloc[:-1]))
    monthly = pd.Series(err_mm, index=dates).resample("MS").sum().abs()
    q = np.abs(err_mm)
    return {
        "method": (
            "V(mean stage of day t+1) - V(mean stage of day t) against the mean of the true net "
            "terms of days t and t+1, in mm over the lake area"
        ),
        "daily_abs_mm": {
            "median": float(np.median(q)),
            "p90": float(np.quantile(q, 0.9)),
            "max": float(q.max()),
        },
        "monthly_abs_mm": {"median": float(monthly.median()), "p90": float(monthly.quantile(0.9))},
    }


def make_gaugings(
    rng: np.random.Generator,
    days: pd.DatetimeIndex,
    stage_hourly: np.ndarray,
    bad_days: np.ndarray,
    sill_day: np.ndarray,
    campaign: str = "record",
) -> tuple[pd.DataFrame, dict]:
    """Spot gaugings at daytime hours, stratified over the stage range, 5 % lognormal noise;
    after the outlet works a re-rating campaign over the new sill's range.

    The hydrographer reads the staff gauge (true stage, to the mm), so gaugings carry neither the
    logger's noise nor its datum shift. Each gauging follows the sill law of its day.
    """
    hours = np.arange(len(stage_hourly))
    hour_of_day = hours % 24
    daytime = (hour_of_day >= 9) & (hour_of_day <= 16) & ~np.repeat(bad_days, 24)
    bins = [
        (SILL_E - 3.0, SILL_E - 0.05, 4),  # below the sill: zero flow
        (10.05, 10.25, 4),
        (10.25, 10.5, 4),
        (10.5, 10.75, 4),
        (10.75, 11.0, 4),
        (11.0, 11.4, 4),
        (11.4, 11.9, 3),
        (11.9, 12.3, 3),
        (12.3, SPILL_CREST, 3),
        (SPILL_CREST + 0.10, 20.0, 5),  # on the spillway: flood gaugings at the day's peak
    ]
    anytime = ~np.repeat(bad_days, 24) & (hour_of_day >= 6) & (hour_of_day <= 20)
    after_works = np.repeat(days >= OUTLET_WORKS["date"], 24)
    e2 = OUTLET_WORKS["e"]
    rerating = [(e2 - 1.0, e2 - 0.05, 1, True), (e2 + 0.05, e2 + 0.3, 3, True),
                (e2 + 0.3, e2 + 0.6, 3, True), (e2 + 0.6, SPILL_CREST, 3, True)]  # fmt: skip
    rows = []
    used_days: set[int] = set()
    chosen = [(*b, False) for b in bins] if campaign == "record" else rerating
    for lo, hi, count, *late in chosen:
        flood = lo > SPILL_CREST
        when = (anytime if flood else daytime) & (after_works if late[0] else True)
        cand = np.flatnonzero(when & (stage_hourly > lo) & (stage_hourly <= hi))
        cand = np.array([c for c in cand if c // 24 not in used_days])
        if len(cand) == 0:
            continue
        # spread over distinct days
        cdays = np.unique(cand // 24)
        if flood:  # hydrographers go out for the big floods: the highest peaks, then others
            peak = np.array([stage_hourly[cand[cand // 24 == dd]].max() for dd in cdays])
            order = cdays[np.argsort(-peak)]
            rest = order[count - 2 :]
            extra = rng.choice(rest, min(2, len(rest)), replace=False) if len(rest) else []
            pick_days = np.concatenate([order[: count - 2], extra]).astype(int)
        else:
            pick_days = rng.choice(cdays, min(count, len(cdays)), replace=False)
        for dd in pick_days:
            that_day = cand[cand // 24 == dd]
            hh = that_day[np.argmax(stage_hourly[that_day])] if flood else rng.choice(that_day)
            used_days.add(int(dd))
            h = float(stage_hourly[hh])
            c, e, b = sill_day[hh // 24]
            q = c * max(h - e, 0.0) ** b
            q += SPILL_CW * SPILL_LENGTH * max(h - SPILL_CREST, 0.0) ** 1.5
            q_obs = q * math.exp(rng.normal(0, 0.05)) if q > 0 else 0.0
            ts = days[hh // 24] + pd.Timedelta(hours=int(hh % 24), minutes=int(rng.integers(0, 60)))
            rows.append((ts, round(h, 3), round(q_obs * 1000.0)))
    rows.sort()
    df = pd.DataFrame(
        {
            "date": [r[0].strftime("%d/%m/%Y %H:%M") for r in rows],
            "stage_m": [f"{r[1]:.3f}" for r in rows],
            "discharge_ls": [r[2] for r in rows],
        }
    )
    return df, gauging_summary(df)


def gauging_summary(df: pd.DataFrame) -> dict:
    """What the gaugings file holds, for truth.json."""
    stages = df["stage_m"].astype(float).to_numpy()
    return {
        "count": len(df),
        "zero_flow": int((stages <= SILL_E).sum()),
        "on_spillway": int((stages > SPILL_CREST).sum()),
        "stage_range_m": [float(stages.min()), float(stages.max())],
        "noise": "lognormal, sigma 0.05 of ln(Q) (about 5 %)",
        "stage_source": "staff gauge (true stage, to the mm): no logger noise, no datum shift",
    }


def make_field_checks(
    rng: np.random.Generator, days: pd.DatetimeIndex, sim: dict
) -> tuple[pd.DataFrame, dict]:
    """Quarterly staff-gauge readings: a visit early in January, April, July and October, in the
    morning, reading the true stage within +-FIELD_CHECK_ERROR_M (uniform), to the mm.

    The staff gauge is on the gauge datum, so its readings carry neither the logger's noise nor
    its datum shift.
    """
    hourly = sim["stage_hourly"]
    rows = []
    for year in range(days[0].year, days[-1].year + 1):
        for month in (1, 4, 7, 10):
            day = pd.Timestamp(year, month, 1) + pd.Timedelta(days=int(rng.integers(3, 12)))
            if day < days[0] or day > days[-1]:
                continue
            hour = int(rng.integers(9, 12))
            minute = int(rng.integers(0, 60))
            k = int(days.get_loc(day)) * 24 + hour
            true = hourly[k] + (hourly[k + 1] - hourly[k]) * minute / 60.0
            error = rng.uniform(-FIELD_CHECK_ERROR_M, FIELD_CHECK_ERROR_M)
            rows.append((day + pd.Timedelta(hours=hour, minutes=minute), round(true + error, 3)))
    df = pd.DataFrame(
        {
            "date": [r[0].strftime("%Y-%m-%d %H:%M") for r in rows],
            "staff_m": [f"{r[1]:.3f}" for r in rows],
        }
    )
    info = {
        "file": "gauges/staff_readings.csv",
        "count": len(rows),
        "error": f"uniform within +-{FIELD_CHECK_ERROR_M} m of the true stage, then to the mm",
        "visits": "quarterly, early January, April, July and October, 09:00-12:00 local",
    }
    return df, info


def _runs(mask: np.ndarray, days: pd.DatetimeIndex) -> list[tuple[str, str, int]]:
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(idx) > 1)
    starts = np.concatenate([[idx[0]], idx[breaks + 1]])
    ends = np.concatenate([idx[breaks], [idx[-1]]])
    return [
        (days[s].strftime("%Y-%m-%d"), days[e].strftime("%Y-%m-%d"), int(e - s + 1))
        for s, e in zip(starts, ends)
    ]


def build_truth(days, sim, storage, evap_mm, gauging_info, tokens, stuck_value) -> dict:
    """The planted truth, as plain JSON-able values."""
    stage_mean = sim["stage_mean"]
    hourly = sim["stage_hourly"]
    wy = days.year + (days.month >= 10)
    spill_days = sim["spillway"] > 0
    drought_mask = (days >= DROUGHT[0]) & (days <= DROUGHT[1])
    low = int(np.argmin(stage_mean))
    below_sill = stage_mean < SILL_E
    return {
        "about": (
            "Planted truth of the invented Vessilow Reservoir demo (Marrendale valley, invented). "
            "Stages in m on the gauge datum; flows m3/s; volumes m3; dates are local days "
            f"({TIMEZONE})."
        ),
        "seed": SEED,
        "period": {"start": START, "end": END, "days": len(days), "water_year_start": 10},
        "site": {
            "latitude": LATITUDE,
            "longitude": LONGITUDE,
            "elevation_m": ELEVATION,
            "timezone": TIMEZONE,
            "datum_offset_m": DATUM_OFFSET,
            "crs": f"EPSG:{EPSG}",
        },
        "levels": LEVELS,
        "outlet": {
            "form": "compound",
            "sill": {"form": "power", "C": SILL_C, "e": SILL_E, "b": SILL_B},
            "spillway": {
                "form": "weir",
                "Cw": SPILL_CW,
                "crest": SPILL_CREST,
                "length": SPILL_LENGTH,
            },
            "spill_days": int(spill_days.sum()),
            "spill_events": [
                {"start": s, "end": e, "days": k} for s, e, k in _runs(spill_days, days)
            ],
            "max_stage_m": float(hourly.max()),
        },
        "seepage": {
            "model": "linear",
            "k": SEEP_K,
            "h0": SEEP_H0,
            "meaning": "net loss to groundwater, m3/s = k (h - h0)",
            "rate_at_sill_m3s": SEEP_K * (SILL_E - SEEP_H0),
        },
        "storage": {
            "model": (
                "outer shore r(theta) = R (1 + a cos 2theta + b sin 3theta), "
                "R = R_top ((h - bed)/(top - bed))^(p/2); island of radius "
                "coef (summit - h)^0.6 centred island_x east of the centre, joined to the east "
                "shore by an isthmus below join_stage; area from the polygons, volume integrated "
                "exactly for area linear between truth_storage.csv rows"
            ),
            "bed_stage": BED_STAGE,
            "top_stage": TOP_STAGE,
            "R_top": R_TOP,
            "p": SHAPE_P,
            "a": LOBE_A,
            "b": LOBE_B,
            "island_x": ISLAND_X,
            "island_summit_stage": ISLAND_SUMMIT,
            "island_coef": ISLAND_COEF,
            "island_join_stage": ISLAND_JOIN,
            "isthmus_width_m": ISTHMUS_WIDTH,
            "table_file": "truth_storage.csv",
            "area_at_sill_m2": float(np.interp(SILL_E, storage["stage_m"], storage["area_m2"])),
            "volume_at_sill_m3": float(volume_of(storage, np.array([SILL_E]))[0]),
            "survey_table": "survey/stage_area.csv: every 0.5 m of stage, area in ha to 0.1 ha",
            "survey_contours": (
                "survey/bathymetry.gpkg layer depth_contours: every 0.5 m of elevation "
                "402.5-419.5 m a.s.l., island as a hole from 6 m stage upward"
            ),
        },
        "evaporation": {
            "method": "penman",
            "wind_function": "2.6 (1 + 0.54 u2) mm/d/kPa",
            "albedo": ALBEDO,
            "wind_height_m": WIND_HEIGHT,
            "lambda_MJ_kg": LAMBDA,
            "pan_coefficient_monthly": PAN_COEFFICIENT,
            "pan_noise": "lognormal, sigma 0.08",
            "mean_annual_mm": float(evap_mm.sum() / (len(days) / 365.25)),
        },
        "withdrawal": {
            "demand_m3s_monthly": DEMAND_M3S,
            "restrictions": [{"trigger": t, "cut": c} for t, c in RESTRICTIONS],
            "restricted_days": int(
                (
                    sim["withdrawal"] < 0.99 * np.asarray(DEMAND_M3S)[days.month - 1] * 86400 * 0.85
                ).sum()
            ),
        },
        "gaugings": gauging_info,
        "problems": {
            "stage_gap": {
                "start": STAGE_GAP[0],
                "end": STAGE_GAP[1],
                "days": int(((days >= STAGE_GAP[0]) & (days <= STAGE_GAP[1])).sum()),
                "how": "rows missing from gauges/stage_daily.csv",
            },
            "stuck_sensor": {
                "start": STUCK[0],
                "end": STUCK[1],
                "days": int(((days >= STUCK[0]) & (days <= STUCK[1])).sum()),
                "value_m": float(stuck_value),
                "how": (
                    "the genuine reading of the day before (start - 1 day) repeated exactly, so a "
                    "flat-line detector sees days + 1 identical values from start - 1 day"
                ),
            },
            "spikes": [{"date": d, "size_m": s} for d, s in SPIKES.items()],
            "datum_shift": {
                "start": DATUM_SHIFT["start"],
                "offset_m": DATUM_SHIFT["offset_m"],
                "how": "added to every stage reading from this day on; not corrected in the file",
            },
            "unmetered_withdrawal": {
                "start": UNMETERED["start"],
                "end": UNMETERED["end"],
                "rate_m3s": UNMETERED["rate_m3s"],
                "days": int(sim["unmetered"].astype(bool).sum()),
                "volume_m3": float(sim["unmetered"].sum()),
            },
            "drought": {
                "start": DROUGHT[0],
                "end": DROUGHT[1],
                "water_years": sorted({int(y) for y in wy[drought_mask]}),
                "rain_occurrence_factor": DROUGHT_RAIN_OCCURRENCE,
                "rain_amount_factor": DROUGHT_RAIN_AMOUNT,
                "lowest_stage_m": float(stage_mean[low]),
                "lowest_date": days[low].strftime("%Y-%m-%d"),
                "below_sill": [
                    {"start": s, "end": e, "days": k} for s, e, k in _runs(below_sill, days)
                ],
            },
            "weather_gap": {
                "start": WEATHER_GAP[0],
                "end": WEATHER_GAP[1],
                "how": "rows missing from weather/station_daily.csv and weather/wind_3h_utc.csv",
            },
            "non_numeric": {"file": "weather/pan_class_a.csv", "tokens": tokens},
        },
        "annual": {
            str(int(y)): {
                "mean_stage_m": float(stage_mean[wy == y].mean()),
                "min_stage_m": float(stage_mean[wy == y].min()),
                "max_stage_m": float(stage_mean[wy == y].max()),
                "inflow_m3": float(sim["inflow"][wy == y].sum()),
                "rain_m3": float(sim["rain"][wy == y].sum()),
                "evaporation_m3": float(sim["evaporation"][wy == y].sum()),
                "outflow_m3": float((sim["sill"] + sim["spillway"])[wy == y].sum()),
                "seepage_m3": float(sim["seepage"][wy == y].sum()),
                "withdrawal_m3": float(sim["withdrawal"][wy == y].sum()),
                "unmetered_withdrawal_m3": float(sim["unmetered"][wy == y].sum()),
            }
            for y in np.unique(wy)
        },
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent)
    parser.add_argument(
        "--outlet-works-and-ice",
        action="store_true",
        help="write the variant with the sill rebuilt in 2021 and ice on it that winter "
        "(not the shipped demo; use another --out)",
    )
    args = parser.parse_args(argv)
    truth = generate(args.out, changes=args.outlet_works_and_ice)
    p = truth["problems"]["drought"]
    print(
        f"wrote {args.out}: {truth['period']['days']} days, lowest stage "
        f"{p['lowest_stage_m']:.2f} m on {p['lowest_date']}, "
        f"{truth['outlet']['spill_days']} spill days, {truth['gaugings']['count']} gaugings"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
