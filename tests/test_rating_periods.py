"""Dated ratings (lakebalance.outlet.periods): simulated gaugings from two known power laws.

The intervals are the fit's own Wald intervals (Student t; Seber & Wild 1989, §5.1); their
coverage is checked against the known truth over seeded replicates (calibration, as for every
interval of the project: it should hold the truth at least 90 % of the time).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from lakebalance.errors import FitError
from lakebalance.outlet.laws import power_law
from lakebalance.outlet.periods import RatingPeriod, fit_rating_periods

BEFORE = {"C": 12.0, "e": 10.0, "b": 1.6}  # Q = C (h - e)^b, m^(3-b)/s, m, -
AFTER = {"C": 18.0, "e": 10.25, "b": 1.5}  # after works on the sill (invented)
WORKS = "2015-06-01"


def q_of(p, h):
    return p["C"] * np.clip(h - p["e"], 0, None) ** p["b"]


def _gaugings(rng, n=20, error=0.05):
    d1 = pd.Timestamp("2012-01-01") + pd.to_timedelta(np.sort(rng.choice(1200, n, False)), "D")
    d2 = pd.Timestamp(WORKS) + pd.to_timedelta(np.sort(rng.choice(1200, n, False)), "D")
    h1 = rng.uniform(10.2, 11.6, n)
    h2 = rng.uniform(10.45, 11.8, n)
    q1 = q_of(BEFORE, h1) * np.exp(error * rng.standard_normal(n))
    q2 = q_of(AFTER, h2) * np.exp(error * rng.standard_normal(n))
    return np.r_[h1, h2], np.r_[q1, q2], np.r_[d1.values, d2.values]


def test_each_period_truth_inside_its_intervals_in_90_percent_of_replicates():
    """60 seeded replicates of 20 gaugings per period (5 % lognormal error): every parameter of
    each period lies inside its 95 % interval in at least 90 % of the replicates."""
    hits = {(k, n): 0 for k in (0, 1) for n in ("C", "e", "b")}
    reps = 60
    for seed in range(reps):
        rng = np.random.default_rng(seed)
        h, q, d = _gaugings(rng)
        dated = fit_rating_periods(power_law(), h, q, d, [RatingPeriod(WORKS)])
        assert dated.starts == (None, WORKS)
        for k, truth in enumerate((BEFORE, AFTER)):
            ci = dated.fits[k].conf_int()
            for n in ("C", "e", "b"):
                hits[(k, n)] += ci[n][0] <= truth[n] <= ci[n][1]
    coverage = {key: v / reps for key, v in hits.items()}
    assert min(coverage.values()) >= 0.9, coverage


def test_on_days_uses_each_days_rating():
    rng = np.random.default_rng(1)
    h, q, d = _gaugings(rng, n=25, error=0.01)
    dated = fit_rating_periods(power_law(), h, q, d, [RatingPeriod(WORKS, reason="sill rebuilt")])
    days = pd.DatetimeIndex(["2014-01-01", "2016-01-01"])
    got = dated.on_days(np.array([11.0, 11.0]), days)
    assert got[0] == pytest.approx(q_of(BEFORE, 11.0), rel=0.02)
    assert got[1] == pytest.approx(q_of(AFTER, 11.0), rel=0.02)
    assert dated.discharge(11.0) == pytest.approx(got[1])
    assert "2 rating periods" in str(dated.summary())


def test_linear_shift_between_two_gaugings_recovered():
    """Weed growth: from the gauging of 2017-03-01 the control's stage shift grows linearly to
    −0.08 m at the gauging of 2017-09-01 (Q = f(h + s(t))). The shift of each gauging is found
    within its 95 % interval, in at least 90 % of 40 seeded replicates, and the shift midway is
    interpolated linearly."""
    inside = 0
    reps = 40
    for seed in range(reps):
        rng = np.random.default_rng(100 + seed)
        n = 20
        dates = pd.Timestamp("2016-01-01") + pd.to_timedelta(
            np.sort(rng.choice(420, n, False)), "D"
        )
        h = rng.uniform(10.5, 11.6, n)
        q = q_of(AFTER, h) * np.exp(0.03 * rng.standard_normal(n))
        h_a, h_b = 11.0, 11.1
        q_a = q_of(AFTER, h_a) * np.exp(0.03 * rng.standard_normal())
        q_b = q_of(AFTER, h_b - 0.08) * np.exp(0.03 * rng.standard_normal())
        H = np.r_[h, h_a, h_b]
        Q = np.r_[q, q_a, q_b]
        D = np.r_[dates.values, np.datetime64("2017-03-01"), np.datetime64("2017-09-01")]
        p = RatingPeriod("2016-01-01", shift_from="2017-03-01", shift_to="2017-09-01")
        dated = fit_rating_periods(power_law(), H, Q, D, [p])
        sh = dated.shifts[-1]
        lo, hi = sh.interval("to")
        inside += lo <= -0.08 <= hi
        mid = sh.at(pd.DatetimeIndex(["2017-06-01"]))[0]
        frac = (pd.Timestamp("2017-06-01") - pd.Timestamp("2017-03-01")).days / 184
        assert mid == pytest.approx(sh.value_from_m + frac * (sh.value_to_m - sh.value_from_m))
    assert inside / reps >= 0.9


def test_period_without_gaugings_is_named():
    rng = np.random.default_rng(2)
    h, q, d = _gaugings(rng)
    with pytest.raises(FitError, match="rating from 2030-01-01"):
        fit_rating_periods(power_law(), h, q, d, [RatingPeriod(WORKS), RatingPeriod("2030-01-01")])
    with pytest.raises(ValueError, match="go together"):
        RatingPeriod(WORKS, shift_from="2016-01-01")


def test_lake_with_a_rating_period(tmp_path):
    """Through the analysis object: a simulated lake (tests/lakefamilies.py) whose outlet is
    re-rated from a date; the balance applies each day's rating and lake.rating is the latest."""
    from lakefamilies import simulate

    from lakebalance.analysis import open_site

    sim = simulate("flow_through", 8, tmp_path, [], years=2)
    g = pd.read_csv(tmp_path / "gaugings.csv")
    g["date"] = pd.to_datetime(g["date"])
    start = str(g["date"].iloc[len(g) // 2].date())
    text = sim.site_file.read_text(encoding="utf-8").replace("draws = 200", "draws = 0")
    text += f'\n[[outlet.period]]\nstart = {start}\nreason = "sill cleared"\n'
    sim.site_file.write_text(text, encoding="utf-8")
    lake = open_site(sim.site_file, draws=0)
    dated = lake.ratings
    assert dated is not None and dated.starts == (None, start)
    assert lake.rating is dated.latest
    d = lake.balance.daily
    days = pd.DatetimeIndex(d.index)
    before = days < pd.Timestamp(start)
    h = d["stage_m"].to_numpy()
    # on a steady day the outflow is about T·Q(h) of that day's own period
    q0 = dated.fits[0].discharge(h) * 86400
    q1 = dated.fits[1].discharge(h) * 86400
    out = d["outflow_m3"].to_numpy()
    ok = np.isfinite(out)
    err0 = np.nanmedian(np.abs(out - q0)[before & ok] / q0[before & ok])
    err1 = np.nanmedian(np.abs(out - q1)[before & ok] / q1[before & ok])
    assert err0 < err1 or np.allclose(q0, q1, rtol=1e-3)
    assert any("rating periods" in n for n in lake.balance.notes)


def test_keep_holds_parameters_of_the_previous_period():
    """A parameter named in 'keep' is held at the previous period's estimate (not refitted)."""
    rng = np.random.default_rng(3)
    h, q, d = _gaugings(rng)
    dated = fit_rating_periods(power_law(), h, q, d, [RatingPeriod(WORKS, keep=["b"])])
    assert dated.fits[1].params["b"] == dated.fits[0].params["b"]
    assert dict(zip(dated.fits[1].param_names, dated.fits[1].free))["b"] is False
    with pytest.raises(FitError, match="not parameters"):
        fit_rating_periods(power_law(), h, q, d, [RatingPeriod(WORKS, keep=["Cw"])])
