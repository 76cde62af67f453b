"""Hindcast scores and the hindcast itself.

Brier score and CRPS are checked against the reference library properscoring 0.1 (a test
dependency; Gneiting & Raftery 2007 CRPS of an ensemble) on the same numbers; Murphy's (1973)
decomposition is exact when each probability bin holds one value; the hindcast is checked on a
lake whose every year is the same (a perfect outlook, its scores zero) and on one with a single
wet year that only the year's own future holds (left out, so the outlook cannot see it).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import properscoring as ps
import pytest

from lakebalance.drawdown import build_tables, simulate
from lakebalance.drawdown.hindcast import (
    _murphy,
    brier_score,
    crps_ensemble,
    hindcast_starts,
    reliability_table,
    run_hindcast,
)
from lakebalance.laws import LakeLaws


def test_brier_score_matches_properscoring():
    rng = np.random.default_rng(3)
    p = rng.uniform(size=50)
    o = (rng.uniform(size=50) < 0.4).astype(int)
    np.testing.assert_allclose(brier_score(p, o), ps.brier_score(o, p), rtol=0, atol=1e-15)
    assert brier_score([0.2, 0.7, 0.5], [0, 1, 1]) == pytest.approx([0.04, 0.09, 0.25])
    with pytest.raises(ValueError):
        brier_score([1.2], [1])


def test_crps_ensemble_matches_properscoring():
    rng = np.random.default_rng(11)
    obs = rng.normal(size=30)
    ens = rng.normal(0.3, 1.5, size=(30, 17))
    np.testing.assert_allclose(crps_ensemble(obs, ens), ps.crps_ensemble(obs, ens), rtol=1e-12)
    # the same numbers worked once with properscoring 0.1: 0.16875
    assert crps_ensemble(0.5, [0.1, 0.4, 0.9, 1.3]) == pytest.approx(0.16875, abs=1e-12)
    assert ps.crps_ensemble(0.5, np.array([0.1, 0.4, 0.9, 1.3])) == pytest.approx(0.16875)
    # one member: the absolute error (closed form, common practice, no source)
    assert crps_ensemble(2.0, [3.5]) == pytest.approx(1.5)
    # ties and NaN members (left out)
    x = np.array([1.0, 1.0, 2.0, np.nan])
    assert crps_ensemble(1.2, x) == pytest.approx(ps.crps_ensemble(1.2, x[:3]))


def test_reliability_table_and_murphy_decomposition():
    # one probability per bin: BS = REL - RES + UNC exactly (Murphy 1973)
    p = np.array([0, 0, 0.2, 0.2, 0.2, 0.4, 0.6, 0.6, 0.8, 1.0, 1.0, 0.4])
    o = np.array([0, 1, 0, 0, 1, 1, 1, 0, 1, 1, 1, 0])
    table = reliability_table(p, o)
    assert table["forecasts"].tolist() == [2, 3, 2, 2, 1, 2]
    assert table["observed_frequency"].tolist() == pytest.approx([0.5, 1 / 3, 0.5, 0.5, 1, 1])
    base = o.mean()
    rel, res, unc = _murphy(table, base, p.size)
    assert brier_score(p, o).mean() == pytest.approx(rel - res + unc, abs=1e-12)


# ---- the hindcast on simulated lakes --------------------------------------------------------
AREA = 2.0e5  # m²


def _laws(levels):
    return LakeLaws(
        area=lambda h: np.full(np.shape(h), AREA),
        volume=lambda h: AREA * np.asarray(h, dtype=float),
        outflow=lambda h: 0.5 * np.maximum(np.asarray(h, dtype=float) - 1.0, 0.0),
        stage_range_m=(0.0, 10.0),
        levels=levels,
    )


def _truth(laws, inflow: pd.Series, h0: float) -> pd.Series:
    tables = build_tables(
        laws.area, laws.outflow, stage_min_m=laws.min_stage_m, stage_max_m=laws.max_stage_m
    )
    q = inflow.to_numpy()[:, None]
    res = simulate(tables, h0, q, np.zeros_like(q))
    # the end of the day before the first is the start state; day i ends at res.stage_m[i + 1]
    return pd.Series(res.stage_m[1:, 0], index=inflow.index, name="stage")


@pytest.mark.parametrize("days", [120, 500])  # within a year, and a horizon of over a year
def test_hindcast_of_a_lake_whose_years_repeat_is_perfect(days):
    # inflow by calendar month, the same every year: every replayed year is the year that came,
    # so the outlook's probabilities are 0 or 1 and right, and its CRPS is zero (common
    # practice: a perfect forecast scores 0)
    dates = pd.date_range("2001-01-01", "2006-12-31", freq="D")
    monthly = np.array([1.8, 1.6, 1.4, 1.0, 0.6, 0.3, 0.1, 0.1, 0.3, 0.8, 1.4, 1.8])
    inflow = pd.Series(monthly[dates.month - 1], index=dates)
    laws = _laws({"high": 4.4, "low": 2.0})
    stage = _truth(
        laws, inflow, 4.0
    )  # the outlook sees the forcing of other years, not their stage
    hist = pd.DataFrame({"inflow_m3s": inflow})
    starts = hindcast_starts(stage, days, every=61)
    hc = run_hindcast(laws, hist, stage, days=days, starts=starts)
    assert hc.starts == len(starts) > 15
    ev = hc.events
    assert set(ev["probability"].unique()) <= {0.0, 1.0}
    assert (ev["probability"] == ev["happened"]).all()
    assert ev["happened"].sum() > 0
    if days < 365:  # within a season some levels are reached and some not
        assert (ev["happened"] == 0).sum() > 0
    assert (hc.skill["brier"] == 0).all()
    assert hc.crps_m == pytest.approx(0.0, abs=1e-4)
    assert hc.crps_skill_persistence == pytest.approx(1.0, abs=1e-3)


def test_hindcast_leaves_the_start_s_own_future_out():
    # dry every year but one wet spring that only 2004 had: started on 1 March 2004, no
    # replayed year may be 2004 itself, so no member rises to the high level that the record
    # reached; started a year later, 2004 is a replayed year among the others
    dates = pd.date_range("2001-01-01", "2007-12-31", freq="D")
    q = np.full(dates.size, 0.2)
    wet = (dates >= "2004-03-10") & (dates < "2004-04-20")
    q[wet] = 3.0
    inflow = pd.Series(q, index=dates)
    laws = _laws({"high": 3.0})
    stage = _truth(laws, inflow, 1.4)
    hist = pd.DataFrame({"inflow_m3s": inflow})
    starts = pd.DatetimeIndex(["2004-03-01", "2005-03-01"])
    hc = run_hindcast(laws, hist, stage, days=90, starts=starts)
    e = hc.events.set_index("start")
    assert e.loc["2004-03-01", "happened"] == 1 and e.loc["2004-03-01", "probability"] == 0.0
    assert e.loc["2005-03-01", "happened"] == 0
    assert e.loc["2005-03-01", "probability"] == pytest.approx(1.0 / hc.members_per_start)
