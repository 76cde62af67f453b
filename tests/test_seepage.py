"""Seepage from the balance residual: coverage on simulated lakes with a known seepage law.

The records are simulated with a forward daily model whose net loss to the ground is exactly
k (h − h0) (the analytic truth of the simulation); the balance residual is then built from
gauge-like records (inflow with 10 % AR(1) error, stage rounded to 1 mm), as a user would have.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from lakebalance import FitError, fit_seepage, select_days
from lakebalance.config import SeepageOptions
from lakebalance.errors import DataQualityWarning

K_TRUE = 0.02  # m²/s
H0_TRUE = 96.0  # m


def simulate(rng, days=730, k=K_TRUE, h0=H0_TRUE):
    """Stage and residual (m³/d) of a lake with area 1e6 + 2e5 (h − 95) m² and no outlet."""
    h = np.empty(days + 1)
    h[0] = 100.0
    t = np.arange(days)
    inflow = rng.gamma(2.0, 0.05, days)  # m³/s
    evap = (3 + 2 * np.sin(2 * np.pi * t / 365)) / 1000  # m/d
    for i in range(days):  # forward model (test code)
        area = 1e6 + 2e5 * (h[i] - 95)
        dv = (inflow[i] - k * (h[i] - h0)) * 86400 - evap[i] * area
        h[i + 1] = h[i] + dv / area
    observed = np.round(h / 0.001) * 0.001
    err = np.zeros(days)
    w = rng.normal(0, 0.1, days)
    for i in range(1, days):
        err[i] = 0.6 * err[i - 1] + w[i]
    area = 1e6 + 2e5 * (observed - 95)
    storage = 1e6 * (observed - 95) + 1e5 * (observed - 95) ** 2
    residual = np.diff(storage) - (inflow * (1 + err) * 86400 - evap * area[:-1])
    return observed[:-1], residual


def test_true_k_inside_95_percent_interval_in_at_least_90_of_100_replicates():
    """Coverage of the Newey–West interval of k (issue check: >= 90 % of 100 seeded records)."""
    hits = 0
    for seed in range(100):
        stage, residual = simulate(np.random.default_rng(seed))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataQualityWarning)
            fit = fit_seepage(stage, residual)
        lo, hi = fit.conf_int()["k"]
        hits += lo <= K_TRUE <= hi
    assert hits >= 90


def test_recovers_the_law_and_rates():
    """Records simulated from a known seepage law k (h - h0): the fit recovers it (known truth
    of the simulation); unit columns by NIST SP 811 factors."""
    stage, residual = simulate(np.random.default_rng(7), days=3000)
    fit = fit_seepage(stage, residual, area_stage_m=stage, area_m2=1e6 + 2e5 * (stage - 95))
    assert fit.k == pytest.approx(K_TRUE, rel=0.2)
    assert fit.h0 == pytest.approx(H0_TRUE, abs=1.5)
    h = np.array([[97.0, 99.0], [100.0, 101.0]])
    assert fit.rate_m3s(h).shape == (2, 2)
    table = fit.rate_table({"top": 101.0})
    # 1 L = 1e-3 m³ and 1 d = 86 400 s (NIST SP 811, appendix B)
    np.testing.assert_allclose(table["L_per_s"], table["m3_per_day"] / 86.4, rtol=1e-12)
    row = table.iloc[-1]
    area = 1e6 + 2e5 * (min(101.0, stage.max()) - 95)
    assert row["mm_per_day"] == pytest.approx(row["m3_per_day"] / area * 1000, rel=1e-9)
    assert not row["within_fitted_stages"] or stage.max() >= 101.0


def test_constant_model_is_the_mean_loss():
    """Analytic: least squares on a constant alone is the sample mean (common practice, no
    source)."""
    rng = np.random.default_rng(3)
    residual = -86400 * 0.05 + rng.normal(0, 2000, 500)
    fit = fit_seepage(np.full(500, 10.0), residual, model="constant")
    assert fit.params["rate"] == pytest.approx(-residual.mean() / 86400, rel=1e-12)
    assert fit.k == 0.0 and np.isnan(fit.h0)


def test_warns_when_the_loss_cannot_be_told_from_zero():
    rng = np.random.default_rng(4)
    stage = 10 + np.sin(np.arange(400) / 30)
    with pytest.warns(DataQualityWarning, match="cannot be told from zero"):
        fit = fit_seepage(stage, rng.normal(0, 5000, 400))
    assert fit.notes
    with pytest.warns(DataQualityWarning, match="other terms"):
        fit_seepage(
            stage, -86400 * 0.01 + rng.normal(0, 100, 400), other_sigma_m3=np.full(400, 5000.0)
        )


def test_too_few_days_is_a_fit_error():
    with pytest.raises(FitError):
        fit_seepage(np.arange(5.0), np.zeros(5))


def test_select_days_counts_each_reason():
    idx = pd.date_range("2020-01-01", periods=10, name="date")
    daily = pd.DataFrame(
        {
            "residual_m3": [1.0] * 9 + [np.nan],
            "stage_m": 10.0,
            "area_m2": 1e6,
            "rain_m3": [0, 0, 5000, 0, 0, 0, 0, 0, 0, 0],  # 5 mm on day 3
            "outflow_m3": [0, 0, 0, 10, 0, 0, 0, 0, 0, 0],
        },
        index=idx,
    )
    flagged = pd.Series(idx == "2020-01-06", index=idx)
    options = SeepageOptions(end="2020-01-09", rain_buffer=0)
    mask, counts = select_days(daily, options, flagged=flagged)
    assert counts == {
        "considered": 10,
        "no residual or stage": 1,
        "after end": 0,
        "rain": 1,
        "outlet spilling": 1,
        "flagged": 1,
    }
    assert mask.sum() == 6
    # The default also leaves out the day either side of a rainy day (its storage change comes
    # from boundary stages estimated from the neighbouring daily means).
    mask, counts = select_days(daily, SeepageOptions(end="2020-01-09"), flagged=flagged)
    assert counts["next to a rainy day"] == 2
    assert counts["outlet spilling"] == 0  # day 4 already left out as next to the rain
    assert mask.sum() == 5
    assert not mask.iloc[1] and not mask.iloc[3]


def test_persistent_errors_widen_the_rate_interval_as_their_variance_says():
    """Constant model: the rate is the mean loss; a bias common to the days adds its variance
    to the regression's exactly (variance of a mean plus an independent shift, analytic)."""
    rng = np.random.default_rng(4)
    stage = 100.0 + 0.01 * rng.standard_normal(400)
    residual = -86400 * (0.05 + 0.02 * rng.standard_normal(400))  # m³/d: loss 0.05 m³/s
    bias_sd = 0.03 * 86400  # m³/d, one persistent deviate for every day (record-wide)

    def persistent(weights):
        s = weights.sum(axis=1) * bias_sd
        return np.outer(s, s)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        plain = fit_seepage(stage, residual, model="constant")
        full = fit_seepage(stage, residual, model="constant", persistent_cov_m6=persistent)
    assert full.params["rate"] == plain.params["rate"]
    assert full.stderr["rate"] ** 2 == pytest.approx(plain.stderr["rate"] ** 2 + 0.03**2, rel=1e-9)
    assert full.persistent_errors and not plain.persistent_errors
    assert full.to_dict()["interval_includes_persistent_errors"]


def test_h0_is_reported_only_when_the_days_separate_it_from_k():
    rng = np.random.default_rng(5)
    stage = 100.0 + 2.0 * np.sin(np.arange(500) / 40.0)  # 4 m of spread
    loss = 0.02 * (stage - 96.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        clear = fit_seepage(stage, -86400 * (loss + 0.005 * rng.standard_normal(500)))
        flat = fit_seepage(stage, -86400 * (0.08 + 0.05 * rng.standard_normal(500)))
    assert clear.h0_identified and clear.law_supported
    assert "h0" in clear.to_dict()["parameters"]
    assert not flat.h0_identified and "h0" not in flat.to_dict()["parameters"]
    assert "h0 not reported" in flat.summary()


def test_a_law_that_cannot_be_told_from_zero_is_not_carried_without_a_choice(tmp_path):
    """[seepage] in_forecasts = 'auto' leaves out a law whose k is not positive and told from
    zero, with a warning naming the choices; 'constant' carries the rate at the mean stage."""
    import lakebalance as lb
    from lakebalance.laws import LakeLaws

    site = lb.load_site(_write_tiny_site(tmp_path))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataQualityWarning)
        flat = fit_seepage(
            np.linspace(1.0, 3.0, 200),
            np.full(200, -864.0) + np.random.default_rng(1).normal(0, 100, 200),
        )
    storage = lb.Lake(site).storage
    lake = lb.Lake.with_results(site, seepage=flat, rating=None)
    with pytest.warns(DataQualityWarning, match="in_forecasts = 'constant'"):
        laws, why = lake.laws()
    assert laws.seepage is None and "not positive" in why
    import dataclasses

    constant = dataclasses.replace(
        site, seepage=dataclasses.replace(site.seepage, in_forecasts="constant")
    )
    laws, why = lb.Lake.with_results(constant, seepage=flat, rating=None).laws()
    assert why is None and isinstance(laws, LakeLaws)
    np.testing.assert_allclose(laws.seepage(np.array([1.0, 5.0])), flat.constant_rate_m3s())
    assert storage is not None


def _write_tiny_site(root):
    from _robust_sites import write_site

    return write_site(root)
