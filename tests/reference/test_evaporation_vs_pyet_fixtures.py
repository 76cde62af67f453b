"""Penman, Priestley-Taylor, FAO-56 and Hargreaves against pyet 1.5.0's outputs kept as a file.

Reference library: pyet 1.5.0 (Vremec, Collenteur and Birk, 2024; PyPI ``pyet``). Its outputs on
the invented weather of ``_weather.py`` were generated once by
``tests/reference/data/make_pyet_reference.py`` into ``data/pyet_1_5_0_reference.csv`` (mm/d), so
that the main suite runs on the pandas a plain install gives users (pyet caps pandas below 3).
The constants both sides share are listed in test_evaporation_vs_pyet.py; within 1 % day by day.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest
from _weather import assert_agree, invented_year, ours

REFERENCE = Path(__file__).resolve().parent / "data" / "pyet_1_5_0_reference.csv"


@pytest.fixture(scope="module")
def pyet_out() -> pd.DataFrame:
    return pd.read_csv(REFERENCE, comment="#", index_col=0, parse_dates=True)


@pytest.mark.parametrize(("radiation", "humidity"), [("solar", "extremes"), ("sunshine", "mean")])
@pytest.mark.parametrize("method", ["penman", "priestley_taylor", "fao56"])
def test_method_vs_pyet_1_5_outputs(pyet_out, method, radiation, humidity):
    w = invented_year()
    drop = ["sunshine" if radiation == "solar" else "solar", "dewpoint"]
    drop += ["rh"] if humidity == "extremes" else ["rh_max", "rh_min"]
    if method == "priestley_taylor":
        drop.append("wind")
    kw = {"wind_height": 10.0} if method == "penman" else {}
    mine = ours(w.drop(columns=drop), method, **kw)
    assert_agree(mine, pyet_out[f"{method}_{radiation}_{humidity}"])


def test_penman_with_dewpoint_vs_pyet_1_5_outputs(pyet_out):
    w = invented_year()
    mine = ours(w.drop(columns=["rh", "rh_max", "rh_min", "sunshine"]), "penman")
    assert_agree(mine, pyet_out["penman_dewpoint"])


def test_hargreaves_vs_pyet_1_5_outputs(pyet_out):
    w = invented_year()[["tmax", "tmin"]]
    with pytest.warns(Warning):
        mine = ours(w, "hargreaves")
    assert_agree(mine, pyet_out["hargreaves"])


@pytest.mark.parametrize("lat", [-34.0, 5.0])
def test_other_latitudes_vs_pyet_1_5_outputs(pyet_out, lat):
    w = invented_year(seed=7).drop(columns=["sunshine", "dewpoint", "rh"])
    assert_agree(ours(w, "fao56", latitude=lat), pyet_out[f"fao56_seed7_lat{lat:g}"])
    assert_agree(
        ours(w, "priestley_taylor", latitude=lat), pyet_out[f"priestley_taylor_seed7_lat{lat:g}"]
    )
