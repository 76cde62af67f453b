"""``lakebalance yield`` and ``lakebalance hindcast`` on the invented demo: what a manager is
promised (a firm yield with its critical period, a storage–yield curve, a skill table) is there
and consistent (common practice, no source: the relations checked hold for any lake)."""

from __future__ import annotations

import contextlib
import io
import json
import warnings
from pathlib import Path

import pandas as pd

from lakebalance.cli import main

DEMO = Path(__file__).resolve().parents[1] / "data_demo" / "site.toml"


def _json(*args: str) -> dict:
    buf = io.StringIO()
    with warnings.catch_warnings(), contextlib.redirect_stdout(buf):
        warnings.simplefilter("ignore")
        assert main([*args, "--json", "--no-progress"]) == 0
    return json.loads(buf.getvalue())


def test_yield_on_the_demo(tmp_path):
    doc = _json("yield", str(DEMO), "--tolerance", "0.02", "--out", str(tmp_path))
    firm = doc["firm_yield"]
    assert 0 < firm["firm_yield_m3s"] < firm["mean_inflow_m3s"]
    cp = firm["critical_period"]
    start, end = pd.Timestamp(cp["start"]), pd.Timestamp(cp["end"])
    assert pd.Timestamp(firm["record"]["start"]) <= start < end
    assert end <= pd.Timestamp(firm["record"]["end"])
    assert firm["lowest_date"] == cp["end"]
    # at the firm yield the stage comes down to the failure level (within the tolerance's worth)
    assert firm["lowest_stage_m"] - firm["failure_level_m"] < 0.5
    curve = doc["storage_yield"]["curve"]
    storage = [c["storage_m3"] for c in curve]
    assert len(curve) == 9 and storage == sorted(storage)
    perf = doc["performance"]
    for p in (perf["restriction"], perf["failure"]):
        assert 0 <= p["reliability_days"] <= 1
    assert perf["failure"]["reliability_days"] >= perf["restriction"]["reliability_days"]
    assert doc["days_of_supply"]["sentence"]
    for name in ("storage_yield.png", "firm_yield_stage.png", "storage_yield.csv"):
        assert (tmp_path / name).stat().st_size > 0


def test_hindcast_on_the_demo(tmp_path):
    doc = _json("hindcast", str(DEMO), "--days", "120", "--every", "365", "--out", str(tmp_path))
    assert doc["starts"] >= 15
    rows = {(r["level"], r["direction"]): r for r in doc["skill"]}
    assert any(r["starts"] > 0 for r in rows.values())
    for r in rows.values():
        assert 0 <= r["brier"] <= 1 and r["starts"] >= r["happened"] >= 0
    assert sum(r["forecasts"] for r in doc["reliability"]) == sum(r["starts"] for r in doc["skill"])
    assert doc["stage_at_horizon"]["crps_m"] >= 0
    assert (tmp_path / "hindcast_reliability.png").stat().st_size > 0
