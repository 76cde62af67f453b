"""Scenarios that keep persistence and see the present (issue 14, part 1), checked against
definitions and reference libraries named in each test."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from lakebalance.drawdown import build_forcing
from lakebalance.drawdown.scenarios import horizon_volumes

DAY = 86400.0


def _ar1_record(phi=0.9, n=365 * 10, seed=5):
    rng = np.random.default_rng(seed)
    z = np.zeros(n)
    for t in range(1, n):
        z[t] = phi * z[t - 1] + rng.normal(0, 0.3)
    idx = pd.date_range("2000-01-01", periods=n, freq="D")
    return pd.DataFrame({"inflow_m3s": 3.0 * np.exp(z)}, index=idx)


def test_ar1_starts_from_the_anomaly_on_the_start_day_inside_the_record():
    """AR(1) forecast (Box & Jenkins, 1976, ch. 3, eq. 3.2.3 form): the conditional mean of the
    anomaly k days ahead is phi**k z0, where z0 is the anomaly on the start day. A start inside
    the record must take that day's anomaly, not the record's last one: the ensemble mean of
    day 1 is phi z0 (within sampling error of 2,000 members)."""
    hist = _ar1_record()
    lq = np.log(hist["inflow_m3s"])
    # two starts inside the record: one in a wet spell, one in a dry spell
    dev = lq - lq.rolling(31, center=True).mean()
    wet, dry = dev.iloc[400:-400].idxmax(), dev.iloc[400:-400].idxmin()
    rng = np.random.default_rng(2)
    means = {}
    for name, start in (("wet", wet), ("dry", dry)):
        f = build_forcing(hist, start, 5, "stochastic", members=2000, rng=rng, method="ar1")
        note = next(n for n in f.notes if "AR(1)" in n)
        assert f"anomaly of {start.date()}" in note
        eps = float(hist["inflow_m3s"].quantile(0.01))
        means[name] = float(np.mean(np.log(f.inflow_m3s[0] + eps)))
    # the wet start's first day is wetter than the dry start's (the last anomaly of the record
    # would give both the same distribution)
    assert means["wet"] > means["dry"] + 0.5


def test_ar1_start_with_no_inflow_near_the_start_is_the_mean():
    hist = _ar1_record(n=400)
    start = hist.index[-1] + pd.Timedelta(days=30)
    f = build_forcing(
        hist, start, 5, "stochastic", members=10, rng=np.random.default_rng(0), method="ar1"
    )
    assert any("started from the mean" in n for n in f.notes)


def _stepped_record(levels):
    """One constant inflow per year (m³/s): years 2000.. in the given order, then the start year
    recorded to 31 March only (so that its future is not a member)."""
    parts = []
    for i, q in enumerate(levels):
        idx = pd.date_range(f"{2000 + i}-01-01", f"{2000 + i}-12-31", freq="D")
        parts.append(pd.Series(q, index=idx))
    y = 2000 + len(levels)
    parts.append(pd.Series(5.0, index=pd.date_range(f"{y}-01-01", f"{y}-03-31", freq="D")))
    s = pd.concat(parts)
    rng = np.random.default_rng(0)
    return pd.DataFrame(
        {
            "inflow_m3s": s,
            "evaporation_m": 0.003 + 0.001 * rng.random(s.size),
            "rain_m": 0.0,
        }
    )


@pytest.mark.parametrize(
    ("percentile", "rank"),
    [(10.0, 1), (30.0, 3), (50.0, 5), (90.0, 9)],
)
def test_percentile_is_the_horizon_volume_at_its_weibull_non_exceedance(percentile, rank):
    """Nine years whose horizon volumes have a known order (a shuffled constant inflow per
    year): the Weibull plotting position i/(n+1) (Weibull, 1939; e.g. Chow, Maidment & Mays,
    1988, Applied Hydrology, table 11.2.1) puts the 10 % non-exceedance on the driest year
    (i = 1 of 9), 30 % on the third, 50 % on the fifth. The scenario is that year, unscaled, with
    its own evaporation."""
    flows = [5.0, 2.0, 8.0, 1.0, 9.0, 4.0, 7.0, 3.0, 6.0]
    hist = _stepped_record(flows)  # the last year holds the start
    start = pd.Timestamp("2009-03-31")
    f = build_forcing(hist, start, 90, "percentile", percentile=percentile)
    assert f.members == 1
    want_q = sorted(flows)[rank - 1]
    year = 2000 + flows.index(want_q)
    np.testing.assert_allclose(f.inflow_m3s[:, 0], want_q)
    assert str(year) in f.labels[0] and "horizon inflow volume" in f.labels[0]
    np.testing.assert_allclose(
        f.evaporation_m[:, 0],
        hist.loc[f"{year}-04-01" : f"{year}-06-29", "evaporation_m"].to_numpy(),
    )
    assert any("non-exceedance" in n and "90 days" in n for n in f.notes)


def test_percentile_between_years_is_a_scaled_pattern_of_the_exact_volume():
    """Between plotting positions the target is numpy's Weibull interpolation (checked here by
    hand: p = 15 % of 9 years is position 1.5, halfway between the two driest years), and the
    nearest year's pattern is scaled to give exactly that volume."""
    flows = [5.0, 2.0, 8.0, 1.0, 9.0, 4.0, 7.0, 3.0, 6.0]
    hist = _stepped_record(flows)
    f = build_forcing(hist, pd.Timestamp("2009-03-31"), 90, "percentile", percentile=15.0)
    target = 1.5 * 90 * DAY  # halfway between 1 and 2 m³/s over 90 days
    assert horizon_volumes(f.inflow_m3s)[0] == pytest.approx(target, rel=1e-12)


def test_percentile_outside_what_the_years_resolve_says_so():
    flows = [5.0, 2.0, 8.0, 1.0]
    hist = _stepped_record(flows)
    f = build_forcing(hist, pd.Timestamp("2004-03-31"), 60, "percentile", percentile=5.0)
    np.testing.assert_allclose(f.inflow_m3s, 1.0)
    assert any("driest year of the record" in n for n in f.notes)
