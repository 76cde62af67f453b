"""Firm yield, sequent peak, reliability/resilience/vulnerability and days of supply.

Sources beside each check: the closed-form mass balance of a prismatic lake (Rippl's mass-curve
reasoning, from memory), a hand-worked sequent-peak example (worked in the test, method of
Thomas & Burden 1963 as given in Loucks & van Beek 2017, section 11.2.2, from memory), and the
definitions of Hashimoto, Stedinger & Loucks (1982) worked by hand on a made-up sequence.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from lakebalance.drawdown.yield_ import (
    RecordForcing,
    critical_period,
    days_of_supply,
    firm_yield,
    record_performance,
    rrv,
    sequent_peak,
    storage_yield_curve,
)
from lakebalance.laws import LakeLaws

AREA = 1.0e6  # m², a prismatic lake
FULL = 10.0  # m, spill level
FAIL = 5.0  # m, failure level
K = 1000.0  # m³/s per m above the spill: a stiff linear spillway


def _laws() -> LakeLaws:
    return LakeLaws(
        area=lambda h: np.full(np.shape(h), AREA),
        volume=lambda h: AREA * np.asarray(h, dtype=float),
        outflow=lambda h: K * np.maximum(np.asarray(h, dtype=float) - FULL, 0.0),
        stage_range_m=(0.0, 20.0),
        levels={"fail": FAIL, "full": FULL},
    )


def _record(q_wet: float, q_dry: float, wet: int, dry: int, after: int) -> RecordForcing:
    dates = pd.date_range("2001-01-01", periods=wet + dry + after, freq="D")
    inflow = np.concatenate([np.full(wet, q_wet), np.full(dry, q_dry), np.full(after, q_wet)])
    z = np.zeros(dates.size)
    return RecordForcing(dates, inflow, z.copy(), z.copy(), {})


def test_firm_yield_closed_form_prismatic_lake_one_dry_spell():
    # Closed form (mass balance, from memory of Rippl's mass curve): a lake full at the start of
    # a dry spell of N days with inflow q meets D while (D - q) N 86400 <= A (h_full - h_fail).
    # The intake draws in full down to 1 cm above the failure level (engine's intake ramp), so
    # the usable depth is 10 - 5 - 0.01 m.
    wet, dry = 100, 200
    f = _record(2.0, 0.1, wet, dry, 100)
    fy = firm_yield(_laws(), f, failure_level_m=FAIL, start_stage_m=FULL, failure_level="fail")
    expected = 0.1 + AREA * (FULL - FAIL - 0.01) / (dry * 86400.0)
    assert fy.demand_m3s == pytest.approx(expected, rel=2e-3)
    assert fy.bracket_m3s[0] <= fy.bracket_m3s[1] <= fy.bracket_m3s[0] * 1.0011
    # critical period: from the last full day (end of the wet spell) to the end of the dry one
    assert fy.critical_start == f.dates[wet - 1].date()
    assert abs((fy.critical_end - f.dates[wet + dry - 1].date()).days) <= 1
    assert fy.lowest_stage_m == pytest.approx(FAIL + 0.01, abs=0.02)
    assert fy.refill_date is not None and fy.refill_date > fy.critical_end


def test_firm_yield_monthly_pattern_scales_with_the_pattern():
    # constant dry inflow: a pattern of mean 1 that is flat gives the constant answer; a pattern
    # that doubles demand in the dry months gives a lower mean firm yield (common practice)
    f = _record(2.0, 0.1, 120, 200, 60)
    flat = firm_yield(_laws(), f, failure_level_m=FAIL, start_stage_m=FULL, pattern=[1.0] * 12)
    const = firm_yield(_laws(), f, failure_level_m=FAIL, start_stage_m=FULL)
    assert flat.demand_m3s == pytest.approx(const.demand_m3s, rel=1e-3)
    peaky = firm_yield(
        _laws(), f, failure_level_m=FAIL, start_stage_m=FULL,
        pattern=[1, 1, 1, 1, 2, 2, 2, 2, 1, 1, 1, 1],
    )  # fmt: skip
    assert peaky.demand_m3s < const.demand_m3s


def test_critical_period_of_a_hand_made_path():
    # worked by hand: full at 10 m on days 0-3, falls to 6 on day 7, back to 10 on day 10
    s = np.array([10, 10, 10, 10, 9, 8, 7, 6, 7, 9, 10, 10.0])
    assert critical_period(s, 10.0) == (3, 7, 10)
    assert critical_period(s[:9], 10.0) == (3, 7, None)


def test_sequent_peak_hand_worked_example():
    # Hand-worked sequent-peak example (constructed here; the method as in Loucks & van Beek
    # 2017, section 11.2.2, from memory). Inflows Q = 2, 6, 1, 1, 5, 7, 2, 1; demand 3 per
    # period. K_t = max(0, K_{t-1} + 3 - Q_t), first pass from K0 = 0:
    #   3-2=1 -> 1; 1+3-6=-2 -> 0; 0+2 -> 2; 2+2 -> 4; 4-2 -> 2; 2-4 -> 0; 0+1 -> 1; 1+2 -> 3
    # second pass from K = 3: 3+1 -> 4; 4-3 -> 1; 1+2 -> 3; 3+2 -> 5; 5-2 -> 3; 3-4 -> 0; 1; 3
    # required storage: 5 (second pass, period 4: the deficit run 7,8 of one year into 1..4 of
    # the next, which a single pass misses: it gives 4).
    q = [2, 6, 1, 1, 5, 7, 2, 1]
    sp = sequent_peak(q, 3.0)
    expected = [1, 0, 2, 4, 2, 0, 1, 3, 4, 1, 3, 5, 3, 0, 1, 3]
    np.testing.assert_allclose(sp.deficit, expected)
    assert sp.storage == 5.0 and sp.peak == 11 and sp.start == 6
    assert sequent_peak(q, 3.0, passes=1).storage == 4.0
    # a demand no larger than every inflow needs no storage
    assert sequent_peak(q, 1.0).storage == 0.0


def test_sequent_peak_equals_the_largest_deficit_of_the_mass_curve():
    # Rippl's mass curve (from memory): the storage a demand needs, from full, is the largest
    # cumulative deficit sum(D - Q) over any run of periods; brute force over every (i, j)
    rng = np.random.default_rng(21)
    for _ in range(20):
        q = rng.gamma(1.2, 3.0, size=rng.integers(5, 40))
        d = float(rng.uniform(1.0, 5.0))
        x = d - q
        best = max(0.0, max(x[i : j + 1].sum() for i in range(x.size) for j in range(i, x.size)))
        assert sequent_peak(q, d, passes=1).storage == pytest.approx(best, abs=1e-9)
        # run twice: the largest deficit of the record joined to itself (a run may wrap round);
        # a demand above the record's inflow has no finite storage in a repeated record
        if x.sum() > 0:
            assert sequent_peak(q, d).storage == np.inf
            continue
        xx = np.concatenate([x, x])
        wrap = max(0.0, max(xx[i : j + 1].sum() for i in range(x.size) for j in range(i, xx.size)))
        assert sequent_peak(q, d).storage == pytest.approx(wrap, abs=1e-9)


def test_storage_yield_curve_rises_and_reads_the_yield_of_a_storage():
    f = _record(2.0, 0.1, 120, 200, 45)
    sy = storage_yield_curve(f, area_m2=AREA, available_m3=AREA * 4.99)
    assert np.all(np.diff(sy.storage_m3) >= 0)
    # sequent peak on the monthly net inflow: no outlet, so its yield of the same storage is at
    # least the one of the simulation (common practice, no source)
    fy = firm_yield(_laws(), f, failure_level_m=FAIL, start_stage_m=FULL)
    assert sy.yield_at_available_m3s is not None
    assert sy.yield_at_available_m3s >= fy.demand_m3s * 0.98


def test_rrv_on_a_hand_made_sequence():
    # Hashimoto et al. (1982) definitions, worked by hand on 12 days, demand 10 each day:
    # supplied 10 10 8 6 10 10 10 5 10 10 9 10 -> failure days 2,3,7,10 (4 of 12)
    # reliability 8/12; events {2,3}, {7}, {10}: 3; recoveries F->S: 3,7,10 -> 3 of 4 F days:
    # resilience 0.75; worst shortfall per event 0.4, 0.5, 0.1 -> vulnerability 1/3,
    # event deficits 6, 5, 1 -> mean 4; years: days 0-5 year 1, 6-11 year 2: both fail.
    d = np.full(12, 10.0)
    s = np.array([10, 10, 8, 6, 10, 10, 10, 5, 10, 10, 9, 10.0])
    years = np.repeat([1, 2], 6)
    p = rrv(d, s, years)
    assert p.failure_days == 4 and p.reliability_days == pytest.approx(8 / 12)
    assert p.events == 3 and p.longest_days == 2
    assert p.resilience == pytest.approx(0.75)
    assert p.vulnerability == pytest.approx((0.4 + 0.5 + 0.1) / 3)
    assert p.worst_shortfall == pytest.approx(0.5)
    assert p.mean_event_deficit == pytest.approx(4.0)
    assert p.reliability_years == 0.0 and p.failure_years == 2
    # a failure on the last day has no recovery: 1 of 2 failure days recovers
    p2 = rrv([1, 1, 1, 1], [0, 1, 1, 0])
    assert p2.resilience == pytest.approx(0.5) and p2.reliability_days == 0.5
    clean = rrv([1, 1], [1, 1])
    assert clean.resilience is None and clean.vulnerability is None and clean.reliability_days == 1


def test_record_performance_restriction_days_and_no_failure():
    # A rule that cuts by 50 % below 9 m: a demand above the firm yield is restricted on some
    # days but, cut, never fails (the cut halves the draw, which the storage carries: mass
    # balance by hand, (0.5 * 0.5 - 0.1) * 200 days * 86400 = 2.6e6 m³ < 5e6 m³ usable)
    f = _record(2.0, 0.1, 100, 200, 100)
    hist_years = 1
    rp = record_performance(
        _laws(), f, demand_m3s=0.5, restriction=[(9.0, 0.5)], failure_level_m=FAIL,
        start_stage_m=FULL, water_year_start=hist_years,
    )  # fmt: skip
    assert rp.failure.failure_days == 0
    assert 0 < rp.restriction.failure_days < 200
    assert rp.restriction.vulnerability == pytest.approx(0.5, abs=1e-6)
    # without the rule the same demand fails: (0.5 - 0.1) * 200 * 86400 = 6.9e6 m³ > 5e6 m³
    rp0 = record_performance(_laws(), f, demand_m3s=0.5, failure_level_m=FAIL, start_stage_m=FULL)
    assert rp0.failure.failure_days > 0


def test_days_of_supply_closed_form_no_inflow():
    # prismatic lake, no rain or evaporation, no inflow: supply lasts A (h0 - h_fail - 1 cm) / D
    # seconds (mass balance, common practice, no source)
    hist = pd.DataFrame(
        {"rain_m": 0.0, "evaporation_m": 0.0},
        index=pd.date_range("2000-01-01", periods=800, freq="D"),
    )
    d = 0.2
    sd = days_of_supply(
        _laws(), hist, start="2001-03-01", start_stage_m=8.0, demand_m3s=d, horizon=3000,
        failure_level_m=FAIL,
    )  # fmt: skip
    expected = AREA * (8.0 - FAIL - 0.01) / d / 86400.0  # 173.0 days
    assert sd.days is not None and abs(sd.days - expected) <= 1.0
    long = days_of_supply(
        _laws(), hist, start="2001-03-01", start_stage_m=8.0, demand_m3s=0.001, horizon=3000,
        failure_level_m=FAIL,
    )  # fmt: skip
    assert long.days is None and "beyond the horizon" in long.sentence()


def test_firm_yield_under_an_environmental_release_rule_is_less_by_that_release():
    # Mass balance (the closed form above, from memory of Rippl's mass curve): a minimum release
    # E kept downstream through the dry spell is water the intake cannot have, so the firm yield
    # falls by E (the release stops with the intake at the failure level: same usable depth).
    from lakebalance.operations import OperatingRules

    wet, dry = 100, 200
    f = _record(2.0, 0.1, wet, dry, 100)
    plain = firm_yield(_laws(), f, failure_level_m=FAIL, start_stage_m=FULL)
    rules = OperatingRules(environmental_release=0.05)
    kept = firm_yield(_laws(), f, failure_level_m=FAIL, start_stage_m=FULL, operations=rules)
    assert kept.demand_m3s == pytest.approx(plain.demand_m3s - 0.05, rel=5e-3)


def test_record_performance_uses_the_sites_restriction_levels_with_restore_and_lag():
    # The same demand and record, once with a plain (trigger, cut) pair and once with an
    # [[operations.restriction]] level of the same trigger and cut and no hysteresis: the same
    # restricted days (common practice, no source: one rule, two ways of writing it).
    from lakebalance.operations import OperatingRules, RestrictionLevel

    f = _record(2.0, 0.1, 100, 200, 100)
    args = dict(demand_m3s=0.25, failure_level_m=FAIL, start_stage_m=FULL)
    pair = record_performance(_laws(), f, restriction=[(8.0, 0.3)], **args)
    rules = OperatingRules(restriction=(RestrictionLevel(trigger=8.0, cut=0.3),))
    level = record_performance(_laws(), f, operations=rules, **args)
    assert pair.restriction.to_dict() == level.restriction.to_dict()
    assert (
        pair.restriction.to_dict() != record_performance(_laws(), f, **args).restriction.to_dict()
    )
