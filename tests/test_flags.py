"""Residual flags: the detectors against their definitions and against simulated lakes.

The simulated lakes are closed with the project's own daily balance (``close_daily``) from a
forward model whose problems are planted, so the expected dates and kinds are known exactly
(analytic truth of the simulation, no outside source needed beyond the definitions cited).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lakebalance import detect_flags
from lakebalance.balance import DailyTerms, close_daily
from lakebalance.config import FlagOptions
from lakebalance.flags import (
    MAD_TO_SIGMA,
    cusum,
    cusum_runs,
    flow_adjusted_stage_change,
    robust_sigma,
    rolling_robust_z,
    stage_step_anomaly,
)

AREA = 1.5e6  # m², vertical-walled test basin


# -------------------------------------------------------------------------------------------
# the pure detectors
# -------------------------------------------------------------------------------------------
def _cusum_by_recursion(z, k):
    up = np.zeros(len(z))
    down = np.zeros(len(z))
    su = sd = 0.0
    for i, x in enumerate(z):
        su = max(0.0, su + x - k)
        sd = max(0.0, sd - x - k)
        up[i], down[i] = su, sd
    return up, down


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.floats(-5, 5, allow_nan=False), min_size=1, max_size=200),
    st.floats(0.0, 2.0),
)
def test_cusum_equals_page_1954_recursion(values, k):
    """Page (1954); Montgomery (2009) eqs. 9.2–9.3: S_t = max(0, S_{t-1} ± z_t − k)."""
    z = np.array(values)
    up, down = cusum(z, k)
    ref_up, ref_down = _cusum_by_recursion(z, k)
    np.testing.assert_allclose(up, ref_up, atol=1e-9)
    np.testing.assert_allclose(down, ref_down, atol=1e-9)


def test_mad_scale_constant_is_inverse_normal_quartile():
    """1 / Φ⁻¹(3/4) (Hampel, 1974), checked against scipy's normal quantile."""
    from scipy.stats import norm

    assert MAD_TO_SIGMA == pytest.approx(1.0 / norm.ppf(0.75), rel=1e-12)


def test_robust_sigma_is_consistent_for_the_normal_law_and_ignores_outliers():
    """Scaled MAD is consistent for a normal law (Hampel, 1974) and, with its 50 % breakdown
    point (from memory), hardly moves under 2.5 % gross outliers."""
    rng = np.random.default_rng(1)
    x = rng.normal(0.0, 3.0, 200_000)
    assert robust_sigma(x) == pytest.approx(3.0, rel=0.01)
    x[:5000] = 1e6  # 2.5 % gross outliers
    assert robust_sigma(x) == pytest.approx(3.0, rel=0.05)


def test_rolling_z_flags_an_isolated_outlier_only():
    """Simulated known answer: one 12-sigma outlier in white noise is the only |z| > 5."""
    rng = np.random.default_rng(2)
    x = rng.normal(0.0, 1.0, 400)
    x[200] += 12.0
    z, _, _ = rolling_robust_z(x, 31)
    assert np.argmax(np.abs(z)) == 200
    assert (np.abs(z) > 5).sum() == 1


def test_cusum_runs_dates_a_sustained_shift():
    """Simulated known answer: a 1.5-sigma shift over days 400-459 is one run dated to within
    5 days (tabular CUSUM, Page, 1954)."""
    rng = np.random.default_rng(3)
    z = rng.normal(0.0, 1.0, 1000)
    z[400:460] -= 1.5
    runs = cusum_runs(z, slack=0.5, threshold=10.0)
    assert len(runs) == 1
    first, last, sign = runs[0]
    assert sign == -1 and abs(first - 400) <= 5 and abs(last - 459) <= 5


def test_stage_step_anomaly_sees_a_step_in_a_recession():
    """Analytic: a steady 5 cm/d recession with an 8 cm datum step on day 15; the anomaly is
    the step itself, exactly."""
    h = 10.0 - 0.05 * np.arange(30.0)
    h[15:] += 0.08  # gauge zero moved up 8 cm while the lake falls 5 cm a day
    a = stage_step_anomaly(h)
    assert np.nanargmax(np.abs(a)) == 15
    assert a[15] == pytest.approx(0.08, abs=1e-12)


def test_flow_adjusted_stage_change_is_zero_for_explained_storms_and_keeps_a_datum_step():
    """Analytic: in a vertical-walled lake with a net flow N_t constant within each day, the
    daily mean stage is h_start,t + N_t / (2A), so mean_t − mean_{t−1} = (N_{t−1} + N_t) / (2A)
    exactly; whatever the storms, the adjusted change is zero, and a 4 cm move of the gauge
    zero on day 40 is left as exactly 4 cm on that day."""
    rng = np.random.default_rng(5)
    n, area = 120, 2.0e6
    net = rng.normal(0.0, 20_000.0, n) + (rng.random(n) < 0.1) * rng.gamma(2.0, 1e5, n)
    start = 7.0 + np.concatenate([[0.0], np.cumsum(net[:-1])]) / area
    mean = start + net / (2.0 * area)
    adj = flow_adjusted_stage_change(mean, net, np.full(n, area))
    np.testing.assert_allclose(adj[1:], 0.0, atol=1e-12)
    shifted = mean.copy()
    shifted[40:] += 0.04
    adj = flow_adjusted_stage_change(shifted, net, np.full(n, area))
    assert adj[40] == pytest.approx(0.04, abs=1e-12)
    np.testing.assert_allclose(np.delete(adj[1:], 39), 0.0, atol=1e-12)


def test_usual_level_fits_the_step_a_datum_shift_leaves_in_the_residual():
    """Simulated known answer: residual = 500 − 2000 (h − h̄) + 3000·1[t ≥ 300] + noise; the
    robust fit (Huber, 1981) with the shift position recovers the step and the stage slope."""
    from lakebalance.flags import usual_level

    rng = np.random.default_rng(6)
    n = 600
    h = 9.5 + 0.3 * np.sin(np.arange(n) / 40.0)
    r = 500.0 - 2000.0 * (h - h.mean()) + 3000.0 * (np.arange(n) >= 300)
    r = r + rng.normal(0.0, 300.0, n)
    level, note = usual_level(r, h, np.full(n, 300.0), shifts=(300,))
    assert level[400] - level[200] == pytest.approx(3000.0 - 2000.0 * (h[400] - h[200]), abs=150.0)
    assert "after a datum shift" in note


# -------------------------------------------------------------------------------------------
# simulated lakes with planted problems
# -------------------------------------------------------------------------------------------
def simulate(seed, years=5, problems=True):
    """A vertical-walled lake with a linear outlet, gauged inflow, rain and evaporation.

    Returns the closed daily balance and the planted truth. Forward model at 24 sub-steps a day
    (so the daily balance has the usual day-boundary errors); gauge noise: inflow 5 %, stage
    1 mm; planted (when ``problems``): a bad stage reading, an unmetered withdrawal of 0.06 m³/s
    for 40 days and a gauge datum shift of +0.06 m.
    """
    rng = np.random.default_rng(seed)
    n = 365 * years
    idx = pd.date_range("2001-01-01", periods=n, name="date")
    t = np.arange(n)
    storm = rng.random(n) < 0.08
    inflow = 0.4 + 0.2 * np.sin(2 * np.pi * t / 365) + storm * rng.gamma(2.0, 1.0, n)
    inflow = np.convolve(inflow, np.exp(-np.arange(10) / 2.0), mode="full")[:n] / 2.5
    rain = storm * rng.gamma(1.5, 0.004, n)  # m/d
    evap = (3.0 + 2.0 * np.sin(2 * np.pi * (t - 100) / 365)) / 1000.0  # m/d
    unmetered = np.zeros(n)
    truth = {}
    if problems:
        unmetered[500:540] = 0.06
        truth["run"] = idx[500]
    c, e = 1.2, 9.0  # m²/s, m: Q = c (h − e)
    sub = 24
    h = 10.0
    means = np.empty(n)
    for d in range(n):  # forward model (test code, not the library)
        acc = 0.0
        for _ in range(sub):
            q = c * max(h - e, 0.0)
            dv = (inflow[d] - q - unmetered[d]) * 86400 / sub + (rain[d] - evap[d]) * AREA / sub
            h += dv / AREA
            acc += h
        means[d] = acc / sub
    stage = np.round(means + rng.normal(0, 0.001, n), 3)
    if problems:
        stage[300] += 0.30  # bad reading
        truth["spike"] = idx[300]
        stage[1200:] += 0.06  # datum shift
        truth["datum_shift"] = idx[1200]
    gauged = inflow * (1 + 0.05 * rng.standard_normal(n))
    terms = DailyTerms(
        stage_m=pd.Series(stage, index=idx),
        inflow_m3s={"creek": pd.Series(gauged, index=idx)},
        rain_m=pd.Series(rain, index=idx),
        evaporation_m=pd.Series(evap, index=idx),
    )
    balance = close_daily(
        terms,
        volume_fn=lambda x: AREA * np.asarray(x, dtype=float),
        area_fn=lambda x: np.full(np.shape(x), AREA),
        outflow_fn=lambda x: c * np.clip(np.asarray(x, dtype=float) - e, 0.0, None),
    )
    return balance.daily, truth


@pytest.fixture(scope="module")
def planted():
    return simulate(11)


def test_planted_problems_found_with_the_right_kind_within_two_days(planted):
    daily, truth = planted
    flags = detect_flags(daily)
    for kind, date in truth.items():
        hits = [f for f in flags.of_kind(kind) if abs((pd.Timestamp(f.start) - date).days) <= 2]
        assert hits, f"{kind} of {date.date()} not flagged: {flags.to_frame()[['kind', 'start']]}"
    assert flags.of_kind("run")[0].cause == "unmetered withdrawal"
    assert flags.of_kind("run")[0].volume_m3 < 0
    shift = flags.of_kind("datum_shift")[0]
    assert shift.magnitude_m == pytest.approx(0.06, abs=0.02)
    assert shift.correction is not None and shift.correction.value == pytest.approx(-0.06, abs=0.02)
    assert "[[correction]]" in shift.correction_toml()


def test_at_most_one_false_flag_per_five_years(planted):
    daily, truth = planted
    flags = detect_flags(daily)
    false = [
        f
        for f in flags
        if not any(abs((pd.Timestamp(f.start) - d).days) <= 2 for d in truth.values())
    ]
    assert len(false) <= 1, flags.to_frame()[["kind", "start", "end", "cause"]]


@pytest.mark.parametrize("seed", [21, 22, 23])
def test_clean_lake_gives_at_most_one_flag_per_five_years(seed):
    daily, _ = simulate(seed, problems=False)
    flags = detect_flags(daily)
    assert len(flags) <= 1, flags.to_frame()[["kind", "start", "end", "cause"]]


def test_flags_never_alter_the_data(planted):
    daily, _ = planted
    before = daily.copy()
    detect_flags(daily)
    pd.testing.assert_frame_equal(daily, before)


def test_exclude_and_options(planted):
    daily, truth = planted
    left_out = daily.index == truth["spike"]
    left_out |= daily.index == truth["spike"] + pd.Timedelta(days=1)
    left_out |= daily.index == truth["spike"] - pd.Timedelta(days=1)
    flags = detect_flags(daily, exclude=left_out)
    assert not any(abs((pd.Timestamp(f.start) - truth["spike"]).days) <= 2 for f in flags)
    strict = detect_flags(daily, FlagOptions(outlier_threshold=50.0, run_threshold=50.0))
    assert len(strict) < len(detect_flags(daily))


def test_outputs_are_json_ready(planted):
    import json

    from lakebalance._json import dumps

    daily, _ = planted
    flags = detect_flags(daily)
    doc = json.loads(dumps(flags.to_dict()))
    assert {f["kind"] for f in doc["flags"]} >= {"spike", "run", "datum_shift"}
    assert "licensed professional" in doc["note"]
    assert flags.mask().sum() >= sum(1 for _ in flags)


def test_flags_follow_the_result_protocol(planted):
    """The project's result protocol (lakebalance/results.py): summary() is a Summary that prints
    as its text and renders as HTML, to_frame() has one row per flag (common practice, no
    source)."""
    from lakebalance.results import Result, Summary

    daily, _ = planted
    flags = detect_flags(daily)
    text = flags.summary()
    assert isinstance(flags, Result)
    assert isinstance(text, Summary) and text.title == "flags"
    first, last = daily.index[0].date(), daily.index[-1].date()
    assert text.startswith(f"Residual flags, {first} to {last}: {len(flags)} flag(s)")
    assert "<pre>" in text._repr_html_()
    assert len(flags.to_frame()) == len(flags) > 0


def test_held_out_seeds_found_and_false_flags():
    """Simulated known answer on seeds 46-55, not used while the detectors were changed.

    Stated thresholds (not tuned to these seeds): at least 80 % of the planted problems found
    within 2 days with the right kind; at most 4 false flags per 5-year lake on average where
    problems are planted, and at most 1.5 on the same lakes without them. Measured with this
    code: 90 %, 3.2 and 0.7.
    """
    seeds = range(46, 56)
    found = planted_n = false_n = clean_n = 0
    for seed in seeds:
        daily, truth = simulate(seed)
        flags = detect_flags(daily)
        for kind, date in truth.items():
            planted_n += 1
            found += any(abs((pd.Timestamp(f.start) - date).days) <= 2 for f in flags.of_kind(kind))
        false_n += sum(
            not any(abs((pd.Timestamp(f.start) - d).days) <= 2 for d in truth.values())
            for f in flags
        )
        clean_n += len(detect_flags(simulate(seed, problems=False)[0]))
    assert found / planted_n >= 0.8
    assert false_n / len(seeds) <= 4.0
    assert clean_n / len(seeds) <= 1.5
