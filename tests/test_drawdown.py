"""The drawdown engine, scenarios and forecast on laws with known answers.

Analytic references (each named where used):
* linear reservoir, dh/dt = (I - k (h - e)) / A with A constant: h(t) = h* + (h0 - h*) exp(-k t / A),
  h* = e + I / k (e.g. Chow, Maidment & Mays, 1988, Applied Hydrology, section 8.2);
* prismatic lake without outlet: dh/dt = (I - D)/A + (P - E): a straight line (mass balance,
  common practice, no source);
* weir equilibrium: Cw L (h - crest)^1.5 = I (broad-crested weir law, e.g. Bos, 1989, Discharge
  Measurement Structures, eq. 1-38 form).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lakebalance.drawdown import ForecastPlan, build_forcing, build_tables, run_forecast, simulate
from lakebalance.laws import LakeLaws

DAY = 86400.0


def _const_area(a):
    return lambda h: np.full_like(np.asarray(h, dtype=float), a)


def _zero(h):
    return np.zeros_like(np.asarray(h, dtype=float))


def test_linear_reservoir_matches_the_exponential_solution():
    """Linear reservoir (Chow, Maidment & Mays, 1988, sec. 8.2): the step is exact for a linear
    law, so the only error is the tables' (a linear law is interpolated exactly)."""
    area, k, e, inflow, h0 = 3.0e5, 2.5, 1.0, 4.0, 2.5
    tables = build_tables(
        _const_area(area),
        lambda h: k * np.maximum(np.asarray(h) - e, 0.0),
        stage_min_m=0.0,
        stage_max_m=6.0,
    )
    days = 60
    res = simulate(tables, h0, np.full((days, 1), inflow), np.zeros((days, 1)))
    t = np.arange(days + 1) * DAY
    hstar = e + inflow / k
    exact = hstar + (h0 - hstar) * np.exp(-k * t / area)
    assert np.max(np.abs(res.stage_m[:, 0] - exact)) < 1e-9


@settings(max_examples=30, deadline=None)
@given(
    inflow=st.floats(0.0, 5.0),
    demand=st.floats(0.0, 3.0),
    net_mm=st.floats(-8.0, 8.0),
    h0=st.floats(5.0, 9.0),
)
def test_mass_balance_of_a_prismatic_lake_without_outlet(inflow, demand, net_mm, h0):
    """Mass balance (common practice, no source): no outlet, vertical walls, the stage moves by
    (I - D) dt / A + (P - E) each day, exactly, while it stays above the dead level."""
    area = 1.0e7
    tables = build_tables(_const_area(area), _zero, stage_min_m=0.0, stage_max_m=20.0, floor_m=1.0)
    days = 30
    res = simulate(
        tables, h0, np.full((days, 1), inflow), np.full((days, 1), net_mm / 1000.0), demand
    )
    rate = (inflow - demand) * DAY / area + net_mm / 1000.0
    expected = h0 + rate * np.arange(days + 1)
    assert np.all(expected > 1.05)  # strategies keep the lake above the intake ramp
    np.testing.assert_allclose(res.stage_m[:, 0], expected, atol=1e-9)


def test_weir_spill_settles_on_its_equilibrium_within_the_day():
    """Weir law Cw L (h - crest)^1.5 = I at equilibrium; a small pond over a long crest responds
    in minutes, so every day ends on the equilibrium of that day's inflow (stiff outlet)."""
    cw, length, crest = 1.7, 40.0, 5.0
    tables = build_tables(
        _const_area(2.0e4),
        lambda h: cw * length * np.clip(np.asarray(h) - crest, 0.0, None) ** 1.5,
        stage_min_m=0.0,
        stage_max_m=8.0,
    )
    inflow = np.array([5.0, 50.0, 0.5, 20.0, 80.0, 3.0])[:, None]
    res = simulate(tables, 5.3, inflow, np.zeros_like(inflow))
    eq = crest + (inflow[:, 0] / (cw * length)) ** (2.0 / 3.0)
    np.testing.assert_allclose(res.stage_m[1:, 0], eq, atol=2e-5)


def test_withdrawals_stop_at_the_dead_level_and_the_lake_stops_at_empty():
    """No inflow, a large demand: the stage settles just above the dead level (intake ramp of
    1 cm) and never below; with evaporation too, it stops at the empty lake."""
    tables = build_tables(_const_area(1.0e5), _zero, stage_min_m=0.0, stage_max_m=10.0, floor_m=2.0)
    days = 40
    res = simulate(tables, 3.0, np.zeros((days, 1)), np.zeros((days, 1)), 2.0)
    assert res.stage_m.min() >= 2.0
    assert res.stage_m[-1, 0] < 2.01
    assert res.withdrawal_m3s[-1, 0] < 0.01 * 2.0
    res = simulate(tables, 3.0, np.zeros((days, 1)), np.full((days, 1), -0.1), 2.0)
    assert res.stage_m.min() == pytest.approx(0.0)


def test_restriction_cuts_demand_below_its_trigger():
    """Restriction rule: the largest cut of the rules whose trigger is above the day's start
    stage; with vertical walls and no outlet the slope changes by exactly the cut."""
    area = 1.0e6
    tables = build_tables(_const_area(area), _zero, stage_min_m=0.0, stage_max_m=20.0)
    days = 40
    res = simulate(
        tables,
        10.0,
        np.zeros((days, 1)),
        np.zeros((days, 1)),
        1.0,
        restriction=[(9.5, 0.2), (9.0, 0.5)],
    )
    h = res.stage_m[:, 0]
    for d in range(days):
        cut = 0.5 if h[d] < 9.0 else 0.2 if h[d] < 9.5 else 0.0
        assert res.cut[d, 0] == cut
        assert h[d] - h[d + 1] == pytest.approx((1.0 - cut) * DAY / area, rel=1e-9)


def test_crossing_days_are_sub_daily_and_directional():
    """Crossing time inside a day from the path integral (prismatic lake: exact line)."""
    area = 1.0e6
    tables = build_tables(_const_area(area), _zero, stage_min_m=0.0, stage_max_m=20.0)
    rate = 0.0864  # m per day with D = 1 m³/s over 1 km²
    res = simulate(
        tables,
        np.array([10.0, 8.0]),
        np.array([[0.0, 2.0]] * 20),
        np.zeros((20, 2)),
        1.0,
        levels={"nine": 9.0},
    )
    # member 0 falls (10 -> 9 in 1/rate days); member 1 rises at the same rate (8 -> 9)
    np.testing.assert_allclose(res.crossing_day["nine"], [1.0 / rate, 1.0 / rate], rtol=1e-9)


# ---- scenarios --------------------------------------------------------------------------------
def _history(years=6, seed=3):
    idx = pd.date_range("2010-01-01", periods=365 * years + 2, freq="D", name="date")
    rng = np.random.default_rng(seed)
    doy = idx.day_of_year.to_numpy()
    inflow = 2.0 + np.sin(2 * np.pi * doy / 365.0) + 0.1 * idx.year.to_numpy() % 7
    return pd.DataFrame(
        {
            "inflow_m3s": inflow * np.exp(rng.normal(0, 0.2, idx.size)),
            "rain_m": rng.gamma(0.3, 0.004, idx.size),
            "evaporation_m": 0.003 + 0.002 * np.sin(2 * np.pi * (doy - 80) / 365.0),
            "withdrawal_m3s": np.full(idx.size, 0.4),
        },
        index=idx,
    )


def test_replay_members_are_the_historical_years():
    hist = _history()
    f = build_forcing(hist, pd.Timestamp("2016-03-31"), 90, "replay")
    assert f.labels == ("2010", "2011", "2012", "2013", "2014", "2015")
    y = f.labels.index("2012")
    expected = hist.loc["2012-04-01":"2012-06-29", "inflow_m3s"].to_numpy()
    np.testing.assert_allclose(f.inflow_m3s[:, y], expected)
    np.testing.assert_allclose(
        f.evaporation_m[:, y], hist.loc["2012-04-01":"2012-06-29", "evaporation_m"].to_numpy()
    )


def test_bootstrap_blocks_come_whole_from_one_year():
    hist = _history()
    f = build_forcing(
        hist,
        pd.Timestamp("2016-03-31"),
        90,
        "stochastic",
        members=50,
        rng=np.random.default_rng(1),
        block_days=30,
    )
    replay = build_forcing(hist, pd.Timestamp("2016-03-31"), 90, "replay")
    for m in range(50):
        for b in range(3):
            block = f.inflow_m3s[30 * b : 30 * (b + 1), m]
            hits = [
                np.allclose(block, replay.inflow_m3s[30 * b : 30 * (b + 1), y])
                for y in range(replay.members)
            ]
            assert any(hits)
            # rain and evaporation of the block come from the same year
            y = hits.index(True)
            np.testing.assert_allclose(
                f.rain_m[30 * b : 30 * (b + 1), m], replay.rain_m[30 * b : 30 * (b + 1), y]
            )


def test_ar1_recovers_a_known_autocorrelation():
    """AR(1) (Box & Jenkins, 1976, ch. 3): a log-inflow series made with phi = 0.8 is fitted
    back within 0.05, and the simulated anomalies keep that lag-one correlation."""
    rng = np.random.default_rng(11)
    n = 365 * 12
    z = np.zeros(n)
    for t in range(1, n):
        z[t] = 0.8 * z[t - 1] + rng.normal(0, 0.3)
    idx = pd.date_range("2000-01-01", periods=n, freq="D")
    hist = pd.DataFrame({"inflow_m3s": 3.0 * np.exp(z)}, index=idx)
    f = build_forcing(hist, idx[-1], 365, "stochastic", members=400, rng=rng, method="ar1")
    phi = float(f.notes[0].split("phi = ")[1].split(",")[0])
    assert abs(phi - 0.8) < 0.05
    eps = float(hist["inflow_m3s"].quantile(0.01))  # the offset the model uses before the log
    lz = np.log(f.inflow_m3s + eps)
    lz = lz - lz.mean(axis=1, keepdims=True)
    r1 = np.mean(np.sum(lz[1:] * lz[:-1], axis=0) / np.sum(lz * lz, axis=0))
    assert abs(r1 - 0.8) < 0.08


def test_constant_scenario_and_forecast_odds():
    """A prismatic lake at constant zero inflow falls on a straight line: the odds of each level
    are 0 or 1 and the crossing day is exact (mass balance, common practice, no source)."""
    hist = _history()
    f = build_forcing(hist, pd.Timestamp("2016-03-31"), 100, "constant", inflow_m3s=0.0)
    area = 2.0e6
    # take evaporation and rain out to keep the line exact
    import dataclasses

    f = dataclasses.replace(
        f, rain_m=np.zeros_like(f.rain_m), evaporation_m=np.zeros_like(f.rain_m)
    )
    laws = LakeLaws(
        area=_const_area(area),
        volume=lambda h: area * np.asarray(h),
        outflow=_zero,
        stage_range_m=(0.0, 20.0),
        levels={"a": 9.0, "b": 2.0},
    )
    plan = ForecastPlan(
        start=pd.Timestamp("2016-03-31"),
        start_stage_m=10.0,
        scenario="constant",
        dead_level_m=1.0,
        demand_m3s=1.0,
    )
    fc = run_forecast(laws, f, plan)
    days_a = 1.0 / (DAY / area)
    assert fc.level("a").probability == 1.0
    assert fc.level("a").days_50 == pytest.approx(days_a, rel=1e-9)
    assert fc.level("b").probability == 0.0
    assert fc.probability_below["a"].iloc[-1] == 1.0
    assert fc.volume_percentiles["p50"].iloc[0] == pytest.approx(9.0 * area)
    text = " ".join(fc.sentences())
    assert "falls to the a level (9.00 m) on 24 April 2016" in text  # 23.15 days after 31 March
    assert "licensed professionals" in text


def test_forecast_runs_the_sites_operating_rules():
    """Prismatic lake, no inflow, rain or evaporation: a gate release of 1 m³/s in every month
    (table flat in stage), an environmental minimum of 0.5 m³/s below it and a spill of nothing
    below its crest lower the stage on a straight line, 1 m³/s / A (mass balance, common
    practice, no source); the rules' restriction level gives a restricted and an unrestricted
    run."""
    import dataclasses

    from lakebalance.operations import (
        DemandSchedule,
        OperatingRules,
        ReleaseRule,
        RestrictionLevel,
        SpillRule,
    )

    hist = _history()
    f = build_forcing(hist, pd.Timestamp("2016-03-31"), 100, "constant", inflow_m3s=0.0)
    f = dataclasses.replace(
        f, rain_m=np.zeros_like(f.rain_m), evaporation_m=np.zeros_like(f.rain_m)
    )
    area = 2.0e6
    laws = LakeLaws(
        area=_const_area(area),
        volume=lambda h: area * np.asarray(h),
        outflow=_zero,
        stage_range_m=(0.0, 20.0),
        levels={"a": 9.0},
    )
    ops = OperatingRules(
        environmental_release=0.5,
        release=ReleaseRule(stages=[0.0, 20.0], release=[[1.0, 1.0]]),
        spill=SpillRule(crest=15.0, length=10.0),
        demand=DemandSchedule(value=0.0),
        restriction=(RestrictionLevel(trigger=9.5, restore=9.8, cut=0.5, lag=2),),
    )
    plan = ForecastPlan(
        start=pd.Timestamp("2016-03-31"),
        start_stage_m=10.0,
        scenario="constant",
        dead_level_m=1.0,
        demand_m3s=3.0,  # replaced by the rules' demand (none)
        operations=ops,
    )
    fc = run_forecast(laws, f, plan)
    assert fc.level("a").days_50 == pytest.approx(area / DAY, rel=1e-9)
    assert fc.restricted and fc.unrestricted is not None
    assert np.allclose(fc.stage_m[:, 0], 10.0 - np.arange(101) * DAY / area)
