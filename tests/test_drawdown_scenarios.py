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


# ---- the persistent monthly generator ---------------------------------------------------------
MU = 1.0 + 0.8 * np.cos(2 * np.pi * (np.arange(12) - 1) / 12)  # log m³/s by calendar month
SD = 0.35 + 0.15 * np.sin(2 * np.pi * np.arange(12) / 12)
R1 = np.full(12, 0.7)


def _par1_record(years=40, seed=8):
    """Daily record whose monthly mean log inflow follows a periodic AR(1) with known mean, sd
    and lag-one correlation per month (Salas et al., 1980, ch. 5), spread over the days by
    random fragments; evaporation carries a code of its (year, month)."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal()
    parts, evap = [], []
    for y in range(1980, 1980 + years):
        for m in range(1, 13):
            z = R1[m - 1] * z + np.sqrt(1 - R1[m - 1] ** 2) * rng.standard_normal()
            mean = np.exp(MU[m - 1] + SD[m - 1] * z)
            idx = pd.date_range(f"{y}-{m:02d}-01", periods=pd.Period(f"{y}-{m:02d}").days_in_month)
            frag = rng.gamma(2.0, 1.0, idx.size)
            parts.append(pd.Series(mean * frag / frag.mean(), index=idx))
            evap.append(pd.Series(1e-6 * (100 * (y - 1900) + m), index=idx))
    return pd.DataFrame({"inflow_m3s": pd.concat(parts), "evaporation_m": pd.concat(evap)})


@pytest.fixture(scope="module")
def par1():
    from lakebalance.drawdown.persistence import monthly_generator

    hist = _par1_record()
    # start two months after the record ends: no present state, the members start stationary
    start = pd.Timestamp("2020-02-29")
    dates = pd.date_range(start + pd.Timedelta(days=1), periods=731, freq="D")
    gen = monthly_generator(hist, dates, 3000, np.random.default_rng(4))
    return hist, dates, gen


def test_monthly_generator_reproduces_monthly_means_sds_and_lag_one_correlation(par1):
    """Thomas-Fiering / periodic AR(1) (Thomas & Fiering, 1962; Salas et al., 1980, ch. 5): the
    fitted monthly mean, sd and month-to-month correlation of log inflow recover the record's
    known values within three standard errors of 40 years (mean: sd/sqrt(40); sd: 25 %; r:
    (1 - r²)/sqrt(39), the large-sample error of a correlation, e.g. Fisher 1921),
    and the simulated members reproduce the fitted values within Monte Carlo error of 3,000
    members (mean 0.05, sd 8 %, r 0.06)."""
    hist, dates, gen = par1
    p = gen.params
    assert np.all(np.abs(p["mean"].to_numpy() - MU) < 3 * SD / np.sqrt(40))
    assert np.all(np.abs(p["sd"].to_numpy() / SD - 1) < 0.25)
    assert np.all(np.abs(p["r1"].to_numpy() - R1) < 3 * (1 - R1**2) / np.sqrt(39))
    eps = float(hist["inflow_m3s"][hist["inflow_m3s"] > 0].quantile(0.01))
    x = np.log(gen.monthly_mean_m3s + eps)  # (months, members)
    months = np.array([m for _, m in gen.months])
    for m in range(1, 13):
        rows = np.flatnonzero(months == m)
        sim = x[rows].ravel()
        assert abs(sim.mean() - p.at[m, "mean"]) < 0.05
        assert abs(sim.std() / p.at[m, "sd"] - 1) < 0.08
    for j in range(1, len(gen.months)):
        m = gen.months[j][1]
        r = np.corrcoef(x[j - 1], x[j])[0, 1]
        assert abs(r - p.at[m, "r1"]) < 0.06


def test_fragments_keep_each_monthly_volume_exactly_and_the_terms_together(par1):
    """Method of fragments (e.g. Salas et al., 1980, sec. 6.3; common practice): the daily
    inflows of each whole simulated month sum to its simulated monthly volume exactly (also
    February of a leap year); the month's evaporation comes from the same historical month as
    its fragments."""
    hist, dates, gen = par1
    inflow = gen.arrays["inflow_m3s"]
    periods = pd.PeriodIndex(dates, freq="M")
    for j, (y, m) in enumerate(gen.months):
        rows = np.flatnonzero((periods.year == y) & (periods.month == m))
        if rows.size < pd.Period(year=y, month=m, freq="M").days_in_month:
            continue
        vol = inflow[rows].sum(axis=0) * DAY
        np.testing.assert_allclose(vol, gen.monthly_mean_m3s[j] * rows.size * DAY, rtol=1e-12)
    # Feb 2020 is partial here (the start); Feb 2021 whole; pick a month and check the trace
    j = [k for k, ym in enumerate(gen.months) if ym == (2020, 7)][0]
    rows = np.flatnonzero((periods.year == 2020) & (periods.month == 7))
    for member in range(5):
        code = gen.arrays["evaporation_m"][rows[0], member] / 1e-6
        y, m = 1900 + int(round(code)) // 100, int(round(code)) % 100
        assert m == 7
        src = hist.loc[f"{y}-07", "inflow_m3s"].to_numpy()
        want = src / src.mean() * gen.monthly_mean_m3s[j, member]
        np.testing.assert_allclose(inflow[rows, member], want, rtol=1e-12)


def test_monthly_generator_carries_a_dry_present_forward():
    """A start right after a very dry month gives drier first months than the climatology, with
    the fitted decay (periodic AR(1) conditional mean r z0; Salas et al., 1980, ch. 5)."""
    from lakebalance.drawdown.persistence import monthly_generator

    hist = _par1_record(years=30, seed=9)
    cut = pd.Timestamp("2009-06-30")
    hist = hist.loc[:cut].copy()
    hist.loc["2009-06-01":cut, "inflow_m3s"] *= 0.2  # a dry June
    dates = pd.date_range(cut + pd.Timedelta(days=1), periods=120, freq="D")
    gen = monthly_generator(hist, dates, 2000, np.random.default_rng(1))
    eps = float(hist["inflow_m3s"][hist["inflow_m3s"] > 0].quantile(0.01))
    z = (
        np.log(gen.monthly_mean_m3s + eps)
        - gen.params.loc[[7, 8, 9, 10], "mean"].to_numpy()[:, None]
    ) / gen.params.loc[[7, 8, 9, 10], "sd"].to_numpy()[:, None]
    mean_z = z.mean(axis=1)
    assert mean_z[0] < -1.0  # July remembers June
    assert mean_z[0] < mean_z[1] < mean_z[3] + 0.1  # and forgets with the months


def test_stochastic_monthly_scenario_through_build_forcing(par1):
    hist, _, _ = par1
    f = build_forcing(
        hist, pd.Timestamp("2019-12-31"), 90, "stochastic", members=20,
        rng=np.random.default_rng(0), method="monthly",
    )  # fmt: skip
    assert f.members == 20 and f.basis == "members" and f.method == "monthly"
    assert f.independent_years == 40
    assert any("Thomas-Fiering" in n for n in f.notes)


# ---- ESP conditioning -------------------------------------------------------------------------
def _esp_record(present=0.3):
    """20 years; the 90 days before 31 March have a year-specific level 0.25 .. 5 (m³/s); the
    present year (2020) has ``present``."""
    levels = np.linspace(0.25, 5.0, 20)[np.random.default_rng(3).permutation(20)]
    parts = []
    for i, y in enumerate(range(2000, 2021)):
        idx = pd.date_range(f"{y}-01-01", f"{y}-12-31" if y < 2020 else "2020-03-31")
        lvl = present if y == 2020 else levels[i]
        s = pd.Series(2.0, index=idx)
        s.loc[f"{y}-01-01" : f"{y}-03-31"] = lvl
        parts.append(s)
    return pd.DataFrame({"inflow_m3s": pd.concat(parts)}), levels


def test_esp_weights_favour_years_like_the_present():
    """ESP (Day, 1985) with kernel trace weights (Smith et al., 1992): the years whose
    antecedent inflow is nearest the present's weigh most, weights fall with the distance in
    log inflow, and they sum to one."""
    from lakebalance.drawdown.persistence import esp_weights

    hist, levels = _esp_record(present=0.3)
    years = list(range(2000, 2020))
    w, note = esp_weights(hist, years, pd.Timestamp("2020-03-31"), 90)
    assert w.sum() == pytest.approx(1.0)
    d = np.abs(np.log(levels) - np.log(0.3))
    order = np.argsort(d)
    assert np.all(np.diff(w[order]) <= 1e-15)  # monotone in the distance
    assert w[order[0]] > 5 * w[order[-1]]
    # 0.3 m³/s is drier than every level but 0.25: 19 of 20 years
    assert "drier than 95% of the years" in note
    # a wet present turns the weights round
    hist_wet, _ = _esp_record(present=4.8)
    w_wet, _ = esp_weights(hist_wet, years, pd.Timestamp("2020-03-31"), 90)
    assert np.argmax(w_wet) == np.argmin(np.abs(np.log(levels) - np.log(4.8)))
    assert w_wet[np.argmin(levels)] < w[np.argmin(levels)]


def test_esp_forcing_shares_members_by_weight():
    from lakebalance.drawdown.persistence import allocate_members, esp_weights

    hist, _ = _esp_record(present=0.3)
    f = build_forcing(hist, pd.Timestamp("2020-03-31"), 60, "esp", members=400)
    w, _ = esp_weights(hist, list(f.years), pd.Timestamp("2020-03-31"), 90)
    counts = np.bincount(f.member_year, minlength=len(f.years))
    assert counts.sum() == 400 and np.all(np.abs(counts - 400 * w) < 1.0)
    assert f.basis == "years" and f.independent_years == int(np.floor(1 / np.sum(w**2)))
    assert np.array_equal(allocate_members(np.array([0.5, 0.25, 0.25]), 4), [0, 0, 1, 2])
