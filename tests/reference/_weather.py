"""Invented weather and the comparison helpers shared by the pyet reference checks (test code).

The weather is a mid-latitude year made by a seeded random generator (not any real station).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from lakebalance.evaporation import EvaporationOptions, estimate_lake_evaporation

RTOL = 0.01  # 1 % day by day
ATOL_MM = 1e-6  # mm/d, for days where both are (clipped to) zero


def invented_year(seed: int = 20240611, days: int = 365) -> pd.DataFrame:
    """A year of invented daily weather for a mid-latitude lake (not any real station)."""
    rng = np.random.default_rng(seed)
    index = pd.date_range("2021-01-01", periods=days, freq="D", name="date")
    season = np.sin(2 * np.pi * (index.day_of_year.to_numpy() - 110) / 365.0)
    tmean = 10.0 + 11.0 * season + rng.normal(0, 2.5, days)
    spread = np.clip(9.0 + 3.0 * season + rng.normal(0, 2.0, days), 2.0, None)
    tmax, tmin = tmean + spread / 2, tmean - spread / 2
    rh_max = np.clip(88 + rng.normal(0, 5, days), 60, 100)
    rh_min = np.clip(rh_max - 25 - 10 * season + rng.normal(0, 6, days), 15, None)
    cloud = rng.uniform(0.0, 1.0, days)
    # solar: from a clear-sky envelope times a random cloudiness factor in [0.3, 1]
    lat = np.deg2rad(46.2)
    j = index.day_of_year.to_numpy()
    dr = 1 + 0.033 * np.cos(2 * np.pi * j / 365)
    dec = 0.409 * np.sin(2 * np.pi * j / 365 - 1.39)
    ws = np.arccos(-np.tan(lat) * np.tan(dec))
    ra = 37.586 * dr * (ws * np.sin(lat) * np.sin(dec) + np.cos(lat) * np.cos(dec) * np.sin(ws))
    solar = (0.3 + 0.7 * (1 - cloud)) * 0.76 * ra
    sunshine = np.clip((1 - cloud) * 24 / np.pi * ws * 0.95, 0, None)
    wind10 = np.clip(rng.gamma(3.0, 1.1, days), 0.3, None)
    dewpoint = tmin - np.abs(rng.normal(1.5, 1.0, days))
    return pd.DataFrame(
        {
            "tmax": tmax,
            "tmin": tmin,
            "tmean": 0.5 * (tmax + tmin),
            "rh_max": rh_max,
            "rh_min": rh_min,
            "rh": 0.5 * (rh_max + rh_min),
            "dewpoint": dewpoint,
            "solar": solar,
            "sunshine": sunshine,
            "wind": wind10,
        },
        index=index,
    )


LATITUDE, ELEVATION = 46.2, 420.0  # invented site


def ours(weather: pd.DataFrame, method: str, **kw) -> pd.Series:
    latitude, elevation = kw.pop("latitude", LATITUDE), kw.pop("elevation", ELEVATION)
    options = EvaporationOptions(
        method=method,
        open_water_coefficient=1.0,  # compare the bare FAO-56 ET0
        fill="none",
        **kw,
    )
    res = estimate_lake_evaporation(weather, options, latitude_deg=latitude, elevation_m=elevation)
    return res.by_method[method] * 1000.0  # m/d -> mm/d (test-side, for comparison only)


def assert_agree(a: pd.Series, b: pd.Series) -> float:
    a, b = a.to_numpy(dtype=float), np.asarray(b, dtype=float)
    assert np.isfinite(a).all() and np.isfinite(b).all()
    np.testing.assert_allclose(a, b, rtol=RTOL, atol=ATOL_MM)
    return float(np.nanmax(np.abs(a - b) / np.maximum(np.abs(b), 1e-9)))


def _pyet_common(w: pd.DataFrame, humidity: str) -> dict:
    kw = dict(
        tmax=w["tmax"],
        tmin=w["tmin"],
        elevation=ELEVATION,
        lat=float(np.deg2rad(LATITUDE)),
    )
    if humidity == "extremes":
        kw.update(rhmax=w["rh_max"], rhmin=w["rh_min"])
    elif humidity == "mean":
        kw.update(rh=w["rh"])
    return kw
