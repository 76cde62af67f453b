"""The balance on the invented demo reservoir against its planted truth (data_demo/truth.json,
written by data_demo/make_demo.py, which does not import lakebalance)."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from lakebalance import open_site


@pytest.fixture(scope="module")
def demo(request):
    from pathlib import Path

    root = Path(__file__).resolve().parents[1] / "data_demo"
    if not (root / "site.toml").exists():
        pytest.fail("data_demo/site.toml is missing: run data_demo/make_demo.py")
    truth = json.loads((root / "truth.json").read_text())
    daily = pd.read_csv(root / "truth_daily.csv", parse_dates=["date"], index_col="date")
    balance = open_site(root / "site.toml").balance
    return balance, truth, daily


def _month(date: str) -> pd.Timestamp:
    return pd.Timestamp(date).to_period("M").to_timestamp()


def _masked_months(index: pd.DatetimeIndex, problems: dict) -> pd.Series:
    """Months touched by a planted problem (gap, stuck sensor, spikes, the uncorrected datum
    shift and every month after it, the unmetered withdrawal, the weather gap)."""
    mask = pd.Series(False, index=index)
    for key in ("stage_gap", "stuck_sensor", "unmetered_withdrawal", "weather_gap"):
        p = problems[key]
        mask |= (index >= _month(p["start"])) & (index <= _month(p["end"]))
    for spike in problems["spikes"]:
        mask |= index == _month(spike["date"])
    mask |= index >= _month(problems["datum_shift"]["start"])
    return mask


def test_monthly_bands_cover_the_true_unexplained_volume(demo):
    """Planted problems masked, the 5-95% band of the monthly residual holds the volume the
    balance cannot see (the planted net seepage loss, truth_daily.csv) in >= 90% of months."""
    balance, truth, daily = demo
    m = balance.monthly()
    m = m[m["complete_days"] > 0]
    keep = ~_masked_months(m.index, truth["problems"])
    m = m[keep]
    assert len(m) >= 150
    month = daily.index.to_period("M").to_timestamp()
    true_residual = -daily["seepage_m3"].groupby(month).sum().reindex(m.index)
    inside = (m["residual_p05_m3"] <= true_residual) & (true_residual <= m["residual_p95_m3"])
    assert inside.mean() >= 0.90


def test_unmetered_withdrawal_shows_as_a_negative_residual(demo):
    """The planted unmetered withdrawal: the residual over its dates, less the residual rate of
    the 60 days either side, is minus its volume within 20% (truth.json)."""
    balance, truth, _ = demo
    p = truth["problems"]["unmetered_withdrawal"]
    start, end = pd.Timestamp(p["start"]), pd.Timestamp(p["end"])
    r = balance.daily["residual_m3"]
    window = r.loc[start:end]
    assert window.notna().all()
    around = pd.concat(
        [r.loc[start - pd.Timedelta(days=60) : start - pd.Timedelta(days=1)],
         r.loc[end + pd.Timedelta(days=1) : end + pd.Timedelta(days=60)]]
    )  # fmt: skip
    anomaly = window.sum() - around.mean() * len(window)
    assert anomaly == pytest.approx(-p["volume_m3"], rel=0.20)


def test_stage_gap_days_are_missing_and_counted(demo):
    balance, truth, _ = demo
    gap = truth["problems"]["stage_gap"]
    d = balance.daily.loc[gap["start"] : gap["end"]]
    assert d["residual_m3"].isna().all()
    assert balance.missing_days >= gap["days"]


def test_annual_terms_match_the_planted_truth(demo):
    """Gauged inflow and metered withdrawal per water year as planted (truth.json, annual):
    within 1% (the records are the truth, converted from ML/d, WaterML and xlsx)."""
    balance, truth, _ = demo
    wy = balance.water_years()
    checked = 0
    for year, row in truth["annual"].items():
        y = int(year)
        if y not in wy.index or wy.loc[y, "complete_days"] < 360:
            continue
        share = wy.loc[y, "complete_days"] / wy.loc[y, "days"]
        assert wy.loc[y, "inflow_m3"] == pytest.approx(row["inflow_m3"] * share, rel=0.01)
        assert wy.loc[y, "withdrawal_m3"] == pytest.approx(row["withdrawal_m3"] * share, rel=0.01)
        checked += 1
    assert checked >= 15


def test_balance_command_on_the_demo(demo_site_path, tmp_path, capsys):
    from lakebalance.cli import main

    assert main(["balance", str(demo_site_path), "--out", str(tmp_path), "--draws", "100"]) == 0
    text = capsys.readouterr().out
    assert "water years" in text and "caution" in text
    monthly = pd.read_csv(tmp_path / "balance_monthly.csv")
    assert {"residual_p05_m3", "residual_p95_m3"} <= set(monthly.columns)
    assert len(pd.read_parquet(tmp_path / "balance_daily.parquet")) == 6574
