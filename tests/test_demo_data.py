"""The bundled demo data (invented Vessilow Reservoir): reproducible, consistent with its site files,
and with its planted truth.

The demo data are invented by ``data_demo/make_demo.py``. These tests check that the generator is
deterministic, that every file the site files name is there with the named columns, and that
``truth.json`` / ``truth_daily.csv`` describe the files (so later recovery tests have a fair target).
The one outside reference here is the Penman evaporation, checked against the independent ``pyet``
library (a test-only dependency).
"""

from __future__ import annotations

import importlib.util
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from lakebalance import load_site

DEMO = Path(__file__).resolve().parents[1] / "data_demo"
NS = {
    "wml2": "http://www.opengis.net/waterml/2.0",
    "gml": "http://www.opengis.net/gml/3.2",
    "om": "http://www.opengis.net/om/2.0",
}


@pytest.fixture(scope="module")
def truth() -> dict:
    return json.loads((DEMO / "truth.json").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def truth_daily() -> pd.DataFrame:
    return pd.read_csv(DEMO / "truth_daily.csv", parse_dates=["date"]).set_index("date")


@pytest.fixture(scope="module")
def site():
    return load_site(DEMO / "site.toml")


def _generator():
    spec = importlib.util.spec_from_file_location("make_demo", DEMO / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _read_columns(spec) -> list[str]:
    suffix = spec.file.suffix.lower()
    if suffix == ".xlsx":
        return list(pd.read_excel(spec.file, sheet_name=spec.sheet, nrows=0).columns)
    sep = spec.delimiter or ","
    return list(pd.read_csv(spec.file, sep=sep, nrows=0).columns)


# ---------------------------------------------------------------------------------------------
# Site files
# ---------------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", ["site.toml", "site_contours.toml"])
def test_site_files_load_and_name_existing_files_and_columns(name):
    site = load_site(DEMO / name)
    roles = {s.role for s in site.series}
    assert {"stage", "inflow", "rain", "pan", "withdrawal", "wind", "solar"} <= roles
    assert len(site.series_of("inflow")) == 2
    for spec in site.series:
        assert spec.file.exists(), spec.file
        if spec.file.suffix.lower() == ".xml":
            continue  # WaterML: checked in its own test
        cols = _read_columns(spec)
        assert spec.value in cols, (spec.file, spec.value, cols)
        assert spec.date in cols, (spec.file, spec.date, cols)
    assert site.storage.file.exists()
    assert site.outlet.gaugings.exists()
    gcols = list(pd.read_csv(site.outlet.gaugings, nrows=0).columns)
    assert {site.outlet.date, site.outlet.stage, site.outlet.discharge} <= set(gcols)
    assert site.outlet.form == "compound"
    forms = {c.name: c.form for c in site.outlet.component}
    assert forms == {"sill": "power", "spillway": "weir"}


def test_contour_site_differs_only_in_storage():
    a, b = load_site(DEMO / "site.toml"), load_site(DEMO / "site_contours.toml")
    assert a.storage.source == "table" and b.storage.source == "contours"
    assert a.series == b.series and a.outlet == b.outlet and a.levels == b.levels
    assert a.site == b.site and a.drawdown == b.drawdown and a.evaporation == b.evaporation
    assert a.storage.datum_offset == b.storage.datum_offset


def test_truth_matches_site_file(site, truth):
    assert site.site.latitude == truth["site"]["latitude"]
    assert site.site.elevation == truth["site"]["elevation_m"]
    assert site.site.timezone == truth["site"]["timezone"]
    assert site.site.water_year_start == truth["period"]["water_year_start"] == 10
    assert site.site.seed == truth["seed"]
    assert site.storage.datum_offset == truth["site"]["datum_offset_m"]
    assert site.levels == pytest.approx(truth["levels"])
    spill = next(c for c in site.outlet.component if c.name == "spillway")
    assert spill.length == truth["outlet"]["spillway"]["length"]
    assert spill.fixed["crest"] == truth["outlet"]["spillway"]["crest"]
    assert site.levels["sill"] == truth["outlet"]["sill"]["e"]
    assert site.evaporation.pan_coefficient == truth["evaporation"]["pan_coefficient_monthly"]
    assert site.evaporation.albedo == truth["evaporation"]["albedo"]
    assert site.evaporation.wind_height == truth["evaporation"]["wind_height_m"]
    assert site.drawdown.demand == truth["withdrawal"]["demand_m3s_monthly"]
    assert [(r.trigger, r.cut) for r in site.drawdown.restriction] == [
        (r["trigger"], r["cut"]) for r in truth["withdrawal"]["restrictions"]
    ]


# ---------------------------------------------------------------------------------------------
# Reproducibility
# ---------------------------------------------------------------------------------------------
def test_committed_files_match_their_recorded_checksums(truth):
    import hashlib

    assert truth["files"], "truth.json lists no files"
    for rel, digest in truth["files"].items():
        assert hashlib.sha256((DEMO / rel).read_bytes()).hexdigest() == digest, rel


def _rounded(obj):
    """Floats to 12 significant digits, recursively (round-off across library versions)."""
    if isinstance(obj, float):
        return float(f"{obj:.12g}")
    if isinstance(obj, dict):
        return {k: _rounded(v) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_rounded(v) for v in obj]
    return obj


def test_generator_is_deterministic_and_reproduces_the_committed_data(tmp_path, truth):
    import geopandas as gpd

    _generator().generate(tmp_path)
    new_truth = json.loads((tmp_path / "truth.json").read_text(encoding="utf-8"))

    # Numbers may differ in the last digits between library versions (summation order of
    # pandas' reductions); everything else must be identical.
    def comparable(t: dict) -> dict:
        files = {k: v for k, v in t["files"].items() if not k.endswith(".xlsx")}
        return _rounded({**t, "files": files})

    assert comparable(new_truth) == comparable(truth)
    for rel in truth["files"]:
        if rel.endswith(".xlsx"):
            continue  # a workbook's zip metadata varies by openpyxl version: its cells are compared below
        assert (tmp_path / rel).read_bytes() == (DEMO / rel).read_bytes(), rel
    pd.testing.assert_frame_equal(
        pd.read_excel(tmp_path / "meters/withdrawals.xlsx"),
        pd.read_excel(DEMO / "meters/withdrawals.xlsx"),
    )
    a = gpd.read_file(tmp_path / "survey/bathymetry.gpkg")
    b = gpd.read_file(DEMO / "survey/bathymetry.gpkg")
    assert list(a["elevation"]) == list(b["elevation"])
    assert all(x.equals_exact(y, 1e-6) for x, y in zip(a.geometry, b.geometry))


def test_demo_is_small():
    total = sum(p.stat().st_size for p in DEMO.rglob("*") if p.is_file())
    assert total < 5.5e6, total


# ---------------------------------------------------------------------------------------------
# The truth against the files
# ---------------------------------------------------------------------------------------------
def test_true_daily_terms_close_the_balance(truth_daily):
    """The forward model conserves mass: storage change = sum of the true terms (to round-off)."""
    d = truth_daily
    gains = d["inflow_tamsby_brook_m3"] + d["inflow_wrenholt_creek_m3"] + d["rain_m3"]
    losses = (
        d["evaporation_m3"]
        + d["outflow_sill_m3"]
        + d["outflow_spillway_m3"]
        + d["seepage_m3"]
        + d["withdrawal_m3"]
        + d["unmetered_withdrawal_m3"]
    )
    err = (d["storage_end_m3"].diff() - (gains - losses)).iloc[1:]
    assert err.abs().max() < 5.0  # m³ per day, against daily terms of 1e5 m³ and more
    assert (gains - losses).abs().iloc[1:].median() > 1e3


def test_true_storage_relation_and_volumes_agree(truth_daily, truth):
    st = pd.read_csv(DEMO / "truth_storage.csv")
    assert np.all(np.diff(st["stage_m"]) > 0) and np.all(np.diff(st["area_m2"]) >= 0)
    # volume is the trapezoid integral of area (area linear between rows)
    v = np.concatenate(
        [
            [0],
            np.cumsum(
                np.diff(st["stage_m"])
                * (st["area_m2"][1:].to_numpy() + st["area_m2"][:-1].to_numpy())
                / 2
            ),
        ]
    )
    np.testing.assert_allclose(st["volume_m3"], v, rtol=0, atol=1.0)
    # storage at each day's end lies between the table volumes bracketing that stage
    h = truth_daily["stage_end_m"].to_numpy()
    lo = np.interp(np.floor(h / 0.02) * 0.02, st["stage_m"], st["volume_m3"])
    hi = np.interp(np.ceil(h / 0.02) * 0.02, st["stage_m"], st["volume_m3"])
    vol = truth_daily["storage_end_m3"].to_numpy()
    assert np.all(vol >= lo - 1.0) and np.all(vol <= hi + 1.0)
    assert truth["storage"]["volume_at_sill_m3"] == pytest.approx(
        np.interp(10.0, st["stage_m"], st["volume_m3"]), rel=1e-4
    )


def test_stage_file_is_true_path_plus_noise_plus_planted_problems(truth, truth_daily):
    obs = pd.read_csv(DEMO / "gauges/stage_daily.csv", parse_dates=["date"]).set_index("date")
    obs = obs["stage_m"].reindex(truth_daily.index)
    p = truth["problems"]
    days = truth_daily.index
    gap = (days >= p["stage_gap"]["start"]) & (days <= p["stage_gap"]["end"])
    stuck = (days >= p["stuck_sensor"]["start"]) & (days <= p["stuck_sensor"]["end"])
    spikes = days.isin(pd.to_datetime([s["date"] for s in p["spikes"]]))
    shifted = days >= p["datum_shift"]["start"]
    assert obs[gap].isna().all() and obs[~gap].notna().all()
    assert gap.sum() == p["stage_gap"]["days"] >= 14
    assert (obs[stuck] == p["stuck_sensor"]["value_m"]).all() and 14 <= stuck.sum() <= 21
    diff = obs - truth_daily["stage_mean_m"] - np.where(shifted, p["datum_shift"]["offset_m"], 0)
    clean = ~(gap | stuck | spikes)
    assert diff[clean].abs().max() < 0.008  # m: 1.5 mm noise, rounded to the mm
    assert 0.0012 < diff[clean].std() < 0.0020
    assert abs(diff[clean].mean()) < 0.0002
    for s in p["spikes"]:
        assert diff[pd.Timestamp(s["date"])] == pytest.approx(s["size_m"], abs=0.008)
    assert p["datum_shift"]["offset_m"] == pytest.approx(0.08)
    # the file agrees with truth_daily's copy of the observed stage
    np.testing.assert_allclose(obs[~gap], truth_daily["stage_observed_m"][~gap], atol=5e-7)


def test_unit_conversions_of_the_flow_files(truth_daily):
    """ML/d and m³/s files against the true daily volumes (1 ML = 1000 m³, 1 d = 86400 s)."""
    from lxml import etree

    t1 = pd.read_csv(DEMO / "gauges/tamsby_brook_mld.csv", parse_dates=["Date"]).set_index("Date")
    np.testing.assert_allclose(
        t1["Flow (ML/d)"].to_numpy() * 1000.0, truth_daily["inflow_tamsby_brook_m3"], atol=0.01
    )
    doc = etree.parse(str(DEMO / "gauges/wrenholt_creek_wml2.xml"))
    assert doc.getroot().tag == "{http://www.opengis.net/waterml/2.0}Collection"
    assert doc.find(".//wml2:MeasurementTimeseries//wml2:uom", NS).get("code") == "m3/s"
    times = [e.text for e in doc.iterfind(".//wml2:MeasurementTVP/wml2:time", NS)]
    values = np.array(
        [float(e.text) for e in doc.iterfind(".//wml2:MeasurementTVP/wml2:value", NS)]
    )
    assert len(times) == len(truth_daily) and all(t.endswith("T00:00:00+01:00") for t in times)
    np.testing.assert_allclose(values * 86400.0, truth_daily["inflow_wrenholt_creek_m3"], atol=0.01)
    meter = pd.read_excel(DEMO / "meters/withdrawals.xlsx", sheet_name="Meter readings")
    np.testing.assert_array_equal(meter["Volume m3"].to_numpy(), truth_daily["withdrawal_m3"])


def test_wind_file_is_three_hourly_with_utc_offsets():
    w = pd.read_csv(DEMO / "weather/wind_3h_utc.csv")
    t = pd.to_datetime(w["time"])
    assert str(t.dt.tz) == "UTC"
    steps = t.diff().dropna().value_counts()
    assert steps.index[0] == pd.Timedelta(hours=3)
    local = t.dt.tz_convert("Etc/GMT-1")
    assert set(local.dt.hour) == {0, 3, 6, 9, 12, 15, 18, 21}


def test_pan_file_has_decimal_comma_and_tokens(truth):
    pan = pd.read_csv(DEMO / "weather/pan_class_a.csv", sep=";", dtype=str, keep_default_na=False)
    tokens = truth["problems"]["non_numeric"]["tokens"]
    assert (pan["pan_mm"] == "ICE").sum() == tokens["ICE"] > 0
    assert (pan["pan_mm"] == "n/a").sum() == tokens["n/a"] > 0
    numbers = pan["pan_mm"][~pan["pan_mm"].isin(["ICE", "n/a"])]
    assert numbers.str.fullmatch(r"\d+,\d").all()


def test_gaugings_span_the_range_with_five_percent_lognormal_noise(truth):
    g = pd.read_csv(DEMO / "gaugings.csv")
    dates = pd.to_datetime(g["date"], format="%d/%m/%Y %H:%M")
    assert dates.is_monotonic_increasing and len(g) >= 30
    o, s = truth["outlet"]["sill"], truth["outlet"]["spillway"]
    h = g["stage_m"].to_numpy()
    q_true = o["C"] * np.clip(h - o["e"], 0, None) ** o["b"]
    q_true += s["Cw"] * s["length"] * np.clip(h - s["crest"], 0, None) ** 1.5
    q_obs = g["discharge_ls"].to_numpy() / 1000.0  # L/s -> m³/s
    zero = h <= o["e"]
    assert zero.sum() >= 3 and np.all(q_obs[zero] == 0)
    assert (h > s["crest"]).sum() >= 3
    assert (h > s["crest"] + 0.3).sum() >= 1  # a real head on the spillway
    logr = np.log(q_obs[~zero] / q_true[~zero])
    assert abs(logr.mean()) < 0.03 and 0.03 < logr.std(ddof=1) < 0.08
    assert truth["gaugings"]["count"] == len(g)


def test_survey_table_and_contours_match_the_true_storage(truth):
    import geopandas as gpd

    st = pd.read_csv(DEMO / "truth_storage.csv")
    tab = pd.read_csv(DEMO / "survey/stage_area.csv")
    true_tab = np.interp(tab["stage_m"], st["stage_m"], st["area_m2"]) / 1e4
    assert np.max(np.abs(tab["area_ha"] - true_tab)) <= 0.05 + 1e-9  # rounded to 0.1 ha
    gdf = gpd.read_file(DEMO / "survey/bathymetry.gpkg", layer="depth_contours")
    assert gdf.crs.to_epsg() == 32633 and gdf.crs.is_projected
    stage = gdf["elevation"] - truth["site"]["datum_offset_m"]
    true_area = np.interp(stage, st["stage_m"], st["area_m2"])
    big = true_area > 1e5
    np.testing.assert_allclose(gdf.area[big], true_area[big], rtol=2e-3)
    holes = np.array([len(g.interiors) if g.geom_type == "Polygon" else 0 for g in gdf.geometry])
    with_island = stage[holes > 0]
    assert len(with_island) >= 5
    assert with_island.min() >= truth["storage"]["island_join_stage"] - 1e-9
    assert with_island.max() < truth["storage"]["island_summit_stage"]


def test_drought_spills_and_period(truth, truth_daily):
    years = truth_daily.index.year + (truth_daily.index.month >= 10)
    assert len(np.unique(years)) >= 15
    d = truth["problems"]["drought"]
    assert len(d["water_years"]) >= 2
    lv = truth["levels"]
    assert lv["intake"] < d["lowest_stage_m"] < lv["sill"] - 2.0
    in_drought = (truth_daily.index >= d["start"]) & (
        truth_daily.index <= pd.Timestamp(d["end"]) + pd.Timedelta(days=60)
    )
    assert truth_daily["stage_mean_m"].idxmin() in truth_daily.index[in_drought]
    dry = truth_daily["outflow_sill_m3"][in_drought] == 0
    assert dry.sum() > 150  # the outlet stops flowing for months
    spills = truth["outlet"]["spill_events"]
    spill_years = {int(e["start"][:4]) + (int(e["start"][5:7]) >= 10) for e in spills}
    assert 3 <= len(spills) <= 15 and 2 <= len(spill_years) <= 6
    u = truth["problems"]["unmetered_withdrawal"]
    assert truth_daily["unmetered_withdrawal_m3"].sum() == pytest.approx(u["volume_m3"])
    assert u["volume_m3"] == pytest.approx(u["rate_m3s"] * 86400 * u["days"])


def test_penman_evaporation_agrees_with_pyet(truth_daily):
    """Independent reference library: pyet 1.5 ``penman`` (Penman 1948; Valiantzas 2006 form) with
    the wind function 2.6 (1 + 0.54 u2), albedo 0.06 and FAO-56 radiation, on the demo weather files.
    pyet uses a temperature-dependent latent heat where the generator uses 2.45 MJ/kg (FAO-56),
    hence the 2.5 % tolerance."""
    pyet = pytest.importorskip("pyet")
    w = pd.read_csv(DEMO / "weather/station_daily.csv", parse_dates=["date"]).set_index("date")
    wind = pd.read_csv(DEMO / "weather/wind_3h_utc.csv")
    local = pd.to_datetime(wind["time"]).dt.tz_convert("Etc/GMT-1").dt.tz_localize(None)
    u10 = (wind["wind_kmh"] / 3.6).groupby(local.dt.floor("D").to_numpy()).mean().reindex(w.index)
    u2 = u10 * 4.87 / np.log(67.8 * 10.0 - 5.42)  # FAO-56 eq. 47
    e = pyet.penman(
        (w["tmax_c"] + w["tmin_c"]) / 2,
        u2,
        rs=w["solar_mj_m2"],
        tmax=w["tmax_c"],
        tmin=w["tmin_c"],
        rhmax=w["rh_max_pct"],
        rhmin=w["rh_min_pct"],
        elevation=412.0,
        lat=math.radians(46.42),
        aw=2.6,
        bw=2.6 * 0.54,
        albedo=0.06,
        clip_zero=False,
    )
    mine = truth_daily["evaporation_mm"].reindex(w.index)
    assert (e - mine).abs().max() < 0.1  # mm/d
    big = mine > 1.0
    assert ((e[big] - mine[big]) / mine[big]).abs().max() < 0.025
    annual = truth_daily["evaporation_mm"].sum() / (len(truth_daily) / 365.25)
    assert 700 < annual < 1300  # mm/yr: temperate open water, common practice, no source
