"""Wording a manager can quote (issue 14, part 2): exact intervals against scipy, the rule of
what an ensemble can support, and the sentences of the forecast."""

from __future__ import annotations

import pytest
from scipy.stats import binomtest

from lakebalance.drawdown.support import (
    MIN_YEARS_FOR_CHANCE,
    can_quote_chance,
    clopper_pearson,
    percentile_supported,
    successes,
)


@pytest.mark.parametrize(
    ("k", "n"), [(0, 18), (1, 18), (4, 18), (7, 18), (18, 18), (3, 5), (50, 200)]
)
def test_clopper_pearson_matches_scipy_binomtest_exact(k, n):
    """Clopper & Pearson (1934) exact interval against scipy.stats.binomtest(...).proportion_ci(
    method='exact') (reference library)."""
    ref = binomtest(k, n).proportion_ci(confidence_level=0.95, method="exact")
    lo, hi = clopper_pearson(k, n)
    assert lo == pytest.approx(ref.low, abs=1e-12)
    assert hi == pytest.approx(ref.high, abs=1e-12)


def test_clopper_pearson_rejects_impossible_counts():
    with pytest.raises(ValueError):
        clopper_pearson(5, 4)
    with pytest.raises(ValueError):
        clopper_pearson(0, 0)


def test_support_rule():
    """The stated project rule (lakebalance.drawdown.support): the 5-95 % points need 20 years,
    10-90 % 10, quartiles 4; the median always; "x % chance" from 20 years."""
    assert MIN_YEARS_FOR_CHANCE == 20
    assert not percentile_supported(5, 19) and percentile_supported(5, 20)
    assert percentile_supported(95, 20) and not percentile_supported(95, 18)
    assert not percentile_supported(10, 9) and percentile_supported(10, 10)
    assert not percentile_supported(25, 3) and percentile_supported(25, 4)
    assert percentile_supported(50, 1) and percentile_supported(50, None)
    assert not can_quote_chance(18) and can_quote_chance(20) and not can_quote_chance(None)
    assert successes(0.39, 18) == 7 and successes(1.2, 5) == 5


# ---- the forecast's sentences -----------------------------------------------------------------
import dataclasses  # noqa: E402

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

from lakebalance.drawdown import ForecastPlan, build_forcing, run_forecast  # noqa: E402
from lakebalance.laws import LakeLaws  # noqa: E402

AREA = 1.0e6  # m², a prismatic lake


def _laws(levels):
    return LakeLaws(
        area=lambda h: np.full_like(np.asarray(h, dtype=float), AREA),
        volume=lambda h: AREA * np.asarray(h),
        outflow=lambda h: np.zeros_like(np.asarray(h, dtype=float)),
        stage_range_m=(0.0, 20.0),
        levels=levels,
    )


def _years_record(flows):
    """One constant inflow per calendar year (m³/s), then the start year to 31 March."""
    parts = [
        pd.Series(q, index=pd.date_range(f"{2000 + i}-01-01", f"{2000 + i}-12-31"))
        for i, q in enumerate(flows)
    ]
    y = 2000 + len(flows)
    parts.append(pd.Series(1.0, index=pd.date_range(f"{y}-01-01", f"{y}-03-31")))
    s = pd.concat(parts)
    return pd.DataFrame({"inflow_m3s": s, "rain_m": 0.0, "evaporation_m": 0.0}), pd.Timestamp(
        f"{y}-03-31"
    )


def _run(flows, scenario="replay", members=1, **kw):
    hist, start = _years_record(flows)
    f = build_forcing(
        hist, start, 100, scenario, members=members, rng=np.random.default_rng(0), **kw
    )
    # demand 1 m³/s: a year of inflow q changes the stage by (q - 1) 86400 / AREA per day, so a
    # year with q < 0.5 falls from 10 m below 5.68 m within 100 days and one with q >= 0.5 does not
    plan = ForecastPlan(start=start, start_stage_m=10.0, scenario=scenario, demand_m3s=1.0)
    return run_forecast(_laws({"low": 5.68}), f, plan)


def test_replay_reads_as_a_count_of_years_with_its_exact_interval():
    """4 of 18 years fall below the level (by construction: mass balance of a prismatic lake,
    common practice): the sentence says "in 4 of 18 years" with the Clopper-Pearson interval
    (scipy binomtest exact), and no "x % chance" from 18 years."""
    flows = [0.2, 0.3, 0.1, 0.4] + [2.0] * 14
    fc = _run(flows)
    o = fc.level("low")
    assert (o.years_reached, o.years_total) == (4, 18)
    ref = binomtest(4, 18).proportion_ci(method="exact")
    assert o.interval == pytest.approx((ref.low, ref.high), abs=1e-12)
    text = " ".join(fc.sentences())
    assert "in 4 of 18 years" in text and "Replaying the 18 historical years" in text
    assert "95 % interval 6.4–48 %" in text  # scipy: 0.0641-0.4764, as display.percent words it
    assert "chance" not in text.replace("a chance to quote", "")
    # the 5 and 95 % points are beyond what 18 years support; 10 % and 90 % are within
    end = fc.stage_percentiles.iloc[-1]
    assert np.isnan(end["p5"]) and np.isnan(end["p95"]) and np.isfinite(end["p10"])
    assert "p5, p95 not shown" in fc.summary()
    assert fc.to_dict()["levels"]["low"]["years_reached"] == 4


def test_members_from_few_years_give_counts_not_chances():
    """A bootstrap of 18 years with 400 members: the sentence names the members and the 18 years
    behind them, gives the share with the interval on 18 years, and declines to call it a
    chance (the rule of lakebalance.drawdown.support)."""
    flows = [0.2, 0.3, 0.1, 0.4] + [2.0] * 14
    fc = _run(flows, "stochastic", members=400, method="bootstrap", block_days=30)
    assert fc.independent_years == 18 and fc.members == 400
    text = " ".join(fc.sentences())
    assert "of the 400 members" in text and "made from 18 historical years" in text
    assert "too few to quote as a chance (the rule needs 20)" in text
    k = successes(fc.level("low").probability, 18)
    ref = binomtest(k, 18).proportion_ci(method="exact")
    assert fc.level("low").interval == pytest.approx((ref.low, ref.high), abs=1e-12)


def test_members_from_enough_years_are_quoted_as_a_chance():
    flows = [0.2, 0.3, 0.1, 0.4, 0.45] + [2.0] * 20  # 25 years
    fc = _run(flows, "stochastic", members=500, method="bootstrap", block_days=30)
    text = " ".join(fc.sentences())
    assert "chance (95 % interval" in text and "on 25 independent years" in text
    assert np.isfinite(fc.stage_percentiles.iloc[-1]["p5"])


def test_outlook_says_which_uncertainties_it_carries():
    flows = [0.2, 0.3] + [2.0] * 10
    fc = _run(flows)
    assert any("weather of 12 historical years" in c for c in fc.carried)
    assert any("evaporation" in c for c in fc.not_carried)
    assert any("climate change" in c for c in fc.not_carried)
    text = " ".join(fc.sentences())
    assert "This outlook carries" in text and "It does not carry" in text


def test_seepage_law_is_drawn_per_variant_from_its_covariance():
    """The sampled seepage laws have the fit's mean and covariance (multivariate normal draws,
    checked on 4,000 draws against the given covariance)."""
    from lakebalance.drawdown import sample_model_uncertainty

    class Fit:  # the attributes a SeepageFit offers to the sampler
        coef = np.array([0.3, 0.05])
        coef_cov = np.array([[0.01, 0.002], [0.002, 0.0009]])
        mean_stage_m = 5.0

        def _design(self, h):
            h = np.asarray(h, dtype=float)
            return np.stack([np.ones_like(h), h - self.mean_stage_m], axis=-1)

    s = sample_model_uncertainty(
        None, 10, 0.1, 4000, np.random.default_rng(3), seepage=Fit(), seepage_constant=False
    )
    grid = np.array([5.0, 7.0])
    rates = s.seepage_variants(grid)  # (variants, n)
    assert rates.shape == (4000, 2)
    assert rates[:, 0].mean() == pytest.approx(0.3, abs=0.01)
    assert rates[:, 0].std() == pytest.approx(0.1, rel=0.05)
    # at h = 7: x = (1, 2), var = 0.01 + 4 * 0.002 + 4 * 0.0009
    assert rates[:, 1].std() == pytest.approx(np.sqrt(0.01 + 0.008 + 0.0036), rel=0.05)
    assert any("seepage" in c for c in s.carried)
    # the tables take the drawn laws as rows beside one rating (engine broadcast)
    from lakebalance.drawdown import build_tables

    few = sample_model_uncertainty(
        None, 10, 0.1, 50, np.random.default_rng(4), seepage=Fit(), seepage_constant=True
    )
    t = build_tables(
        lambda h: np.full_like(np.asarray(h, dtype=float), AREA),
        lambda h: np.zeros_like(np.asarray(h, dtype=float)),
        stage_min_m=0.0, stage_max_m=10.0, seepage=few.seepage_variants,
    )  # fmt: skip
    assert t.variants == 50
    # the constant rate (at the mean stage) is the same on every stage of a row
    assert np.ptp(t.outflow_m3s, axis=1).max() == 0.0 and np.ptp(t.outflow_m3s[:, 0]) > 0
    _ = dataclasses  # used by other tests of this module


def test_key_sentences_pick_the_levels_some_runs_reach():
    flows = [0.2, 0.3, 0.1, 0.4] + [2.0] * 14
    hist, start = _years_record(flows)
    f = build_forcing(hist, start, 100, "replay")
    plan = ForecastPlan(start=start, start_stage_m=10.0, scenario="replay", demand_m3s=1.0)
    fc = run_forecast(_laws({"low": 5.68, "never": 1.0}), f, plan)
    key = fc.key_sentences(3)
    assert len(key) == 1 and "low level" in key[0] and "in 4 of 18 years" in key[0]
    parts = fc.level_sentences()
    assert "in none of them" in parts["never"][0]
    assert fc.sentences()[: len(parts["low"]) + 1] == [*parts["low"], *parts["never"]]
