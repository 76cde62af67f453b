"""The lake method through the site: mean depth from the storage relation day by day, the balance
using it, the method spread as the evaporation error, and the command's water-year table.

The demo data are invented (data_demo/make_demo.py). What is checked here is wiring and
bookkeeping (common practice, no source); the equations are checked against their sources in
tests/reference/test_lake_evaporation.py.
"""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pytest
from conftest import ROOT

import lakebalance
from lakebalance.cli import main
from lakebalance.errors import ConfigError

SITE = ROOT / "data_demo" / "site.toml"


@pytest.fixture(scope="module")
def demo():
    return lakebalance.open_site(SITE, draws=0)


def _with(lake, section: str, **changes):
    site = lake.site
    new = dataclasses.replace(getattr(site, section), **changes)
    return lakebalance.Lake(dataclasses.replace(site, **{section: new}), draws=0)


def test_mean_depth_comes_from_the_storage_relation_each_day(demo):
    result = demo.evaporation_by("equilibrium_temperature")
    heat = result.lake_heat
    storage = demo.storage
    stage = demo.records.daily["stage"].to_numpy()
    ok = np.isfinite(stage)
    expected = storage.volume(stage[ok], warn=False) / storage.area(stage[ok])
    np.testing.assert_allclose(heat["mean_depth_m"].to_numpy()[ok], expected, rtol=1e-9)
    assert heat["mean_depth_m"].std() > 0.05  # a drawdown changes the heat store
    # the time constant follows the depth (deeper days, longer memory)
    deep = heat["mean_depth_m"] > heat["mean_depth_m"].quantile(0.9)
    shallow = heat["mean_depth_m"] < heat["mean_depth_m"].quantile(0.1)
    assert heat["time_constant_days"][deep].mean() > heat["time_constant_days"][shallow].mean()
    assert result.by_method.columns[0] == "equilibrium_temperature"


def test_the_balance_can_use_the_lake_method(demo):
    lake = _with(demo, "evaporation", method="equilibrium_temperature")
    balance = lake.balance
    assert any("equilibrium_temperature" in n for n in balance.notes)
    depth = lake.evaporation.depth_m
    area = demo.storage.area(demo.records.daily["stage"].to_numpy())
    got = balance.daily["evaporation_m3"].to_numpy()
    want = (depth.to_numpy() * area)[: got.size]
    ok = np.isfinite(got) & np.isfinite(want)
    assert ok.sum() > 6000
    np.testing.assert_allclose(got[ok], want[ok], rtol=0.02)


def test_method_spread_becomes_the_evaporation_error(demo):
    lake = _with(demo, "uncertainty", evaporation_error="method_spread")
    spread = lake.evaporation.relative_spread()
    assert spread is not None and 0.01 < spread < 0.5
    assert lake.term_errors.evaporation == pytest.approx(spread)
    assert demo.term_errors.evaporation == pytest.approx(demo.site.uncertainty.evaporation)


def test_method_spread_needs_two_methods(tmp_path):
    from lakebalance.config import parse_site

    site = parse_site(
        {"site": {"name": "Invented Tarn"}, "uncertainty": {"evaporation_error": "method_spread"}},
        tmp_path / "site.toml",
    )
    from test_evaporation import _FlatLake, weather

    from lakebalance.records import Records, SeriesInfo

    daily = weather()[["pan"]].assign(stage=3.0)
    series = tuple(
        SeriesInfo(key=k, role=k, name=k, file="x.csv", declared_units="", internal_units="",
                   statistic="mean")
        for k in daily.columns
    )  # fmt: skip
    records = Records(site=site, daily=daily, flags=daily.notna() & False, series=series)
    lake = lakebalance.Lake.with_results(site, records=records, storage=_FlatLake())
    with pytest.raises(ConfigError, match="two or more evaporation methods"):
        _ = lake.term_errors


def test_command_lists_water_years_and_the_spread(capsys):
    assert main(["evaporation", str(SITE), "--method", "equilibrium_temperature"]) == 0
    out = capsys.readouterr().out
    assert "water-year totals" in out
    assert "spread between the methods" in out
    assert "lake method: mean depth" in out
    assert main(["evaporation", str(SITE), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    years = [row["water_year"] for row in doc["water_years"]]
    assert years == list(range(2005, 2023))
    assert "equilibrium_temperature" in doc["available"]
    assert doc["spread"]["relative_sd"] > 0


def test_declared_ice_periods_of_the_record_are_ice_for_the_evaporation(tmp_path):
    """A ``[[period]] kind = "ice"`` of the record puts the lake under ice for the evaporation
    too: the lake evaporates at the sublimation rate on those days (common practice, no source:
    an ice cover stops open-water evaporation), and only there."""
    import shutil

    import numpy as np
    from conftest import ROOT

    import lakebalance as lb

    data = tmp_path / "demo"
    shutil.copytree(ROOT / "data_demo", data)
    site_file = data / "site.toml"
    text = site_file.read_text(encoding="utf-8")
    text += '\n[[period]]\nkind = "ice"\nstart = 2010-01-05\nend = 2010-02-10\n'
    site_file.write_text(text, encoding="utf-8")
    lake = lb.open_site(site_file)
    evap = lake.evaporation
    daily_mm = 1000.0 * evap.depth_m
    inside = daily_mm.loc["2010-01-05":"2010-02-10"].to_numpy()
    assert np.allclose(inside, 0.1)  # the default ice_sublimation, mm/d
    outside = daily_mm.loc["2010-03-01":"2010-03-31"].to_numpy()
    assert not np.allclose(outside, 0.1)
    assert evap.ice.loc["2010-01-05":"2010-02-10"].all()
    assert any("declared periods" in n for n in evap.notes)
