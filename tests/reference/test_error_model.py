"""The residual's error model checked against the variance of sums of random variables.

Sources (analytic, standard results of probability):
- Var(Σ_d X_d) for X_d = σ T (√ρ Z + √(1−ρ) ε_d), with one Z for the whole period and independent
  ε_d: N (1−ρ) σ² T² + ρ σ² T² N² (variance of a sum of correlated normals).
- A U(−r/2, r/2) deviate has variance r²/12; a sum of day residuals over days a..b telescopes to
  A (δ_b+1 − δ_a), variance A² r²/6.
- A persistent part held per water year adds (Σ_{d∈y} w_d c_d)² per year instead of one square
  over the record.
- Orifice Q = K √(h − e) is linear in K, so the rating part of a window's variance is exactly
  (σ_K / K)² O² (O the window's outflow volume), within the sampling error of the variants.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from test_balance_analytic import _flat_balance, _orifice, torricelli_records

from lakebalance.balance import (
    DailyTerms,
    OutletParameters,
    TermErrors,
    add_uncertainty,
    close_daily,
    residual_errors,
)

T = 86400.0  # s per day
NONE = dict(inflow=0, rain=0, evaporation=0, withdrawal=0, release=0, area=0)


def _area(A):
    return lambda h: np.full(np.shape(h), A)


@pytest.mark.parametrize("rho", [0.0, 0.3, 1.0])
def test_window_variance_of_a_persistent_and_random_term(rho):
    sigma, inflow = 0.1, 2.0
    bal = _flat_balance(days=730, inflow=inflow)
    errs = TermErrors(**{**NONE, "inflow": sigma}, stage_resolution_m=0.0, systematic=rho)
    model = residual_errors(bal, area_fn=_area(1e6), errors=errs, rng=np.random.default_rng(1))
    for n in (1, 30, 400):
        expected = n * (1 - rho) * (sigma * inflow * T) ** 2 + rho * (sigma * inflow * T * n) ** 2
        assert model.sd_of_window(100, 100 + n - 1) ** 2 == pytest.approx(expected, rel=1e-9)


def test_persistent_part_per_water_year_restarts_each_year():
    sigma, inflow = 0.1, 2.0
    bal = _flat_balance(days=730, inflow=inflow, start="2019-01-01")
    base = dict(**{**NONE, "inflow": sigma}, stage_resolution_m=0.0, systematic=1.0)
    rec = residual_errors(bal, area_fn=_area(1e6), errors=TermErrors(**base),
                          rng=np.random.default_rng(1))  # fmt: skip
    per = residual_errors(bal, area_fn=_area(1e6),
                          errors=TermErrors(**base, systematic_period="water_year"),
                          rng=np.random.default_rng(1))  # fmt: skip
    v = sigma * inflow * T
    # 2019-12-02..2020-01-30: 30 days in each calendar year
    first = int(np.flatnonzero(bal.daily.index == pd.Timestamp("2019-12-02"))[0])
    assert rec.sd_of_window(first, first + 59) ** 2 == pytest.approx((60 * v) ** 2, rel=1e-9)
    assert per.sd_of_window(first, first + 59) ** 2 == pytest.approx(2 * (30 * v) ** 2, rel=1e-9)


def test_stage_resolution_telescopes_over_a_window():
    A, r = 1.0e6, 0.003
    bal = _flat_balance(A=A, inflow=0.0)
    errs = TermErrors(**NONE, stage_resolution_m=r)
    model = residual_errors(bal, area_fn=_area(A), errors=errs, rng=np.random.default_rng(1))
    assert model.sd_of_window(10, 10) ** 2 == pytest.approx(A**2 * r**2 / 6, rel=1e-9)
    assert model.sd_of_window(10, 70) ** 2 == pytest.approx(A**2 * r**2 / 6, rel=1e-9)


def test_rating_part_of_a_window_is_linear_in_the_coefficient():
    A, K, e, sk = 2.0e6, 1.0, 0.5, 0.05
    mean, boundary = torricelli_records(A=A, K=K, e=e, days=30)
    law = _orifice(K, e)
    bal = close_daily(DailyTerms(stage_m=mean, boundary_stage_m=boundary),
                      volume_fn=lambda h: A * np.asarray(h), area_fn=_area(A),
                      outflow_fn=law)  # fmt: skip

    def discharge_with(p, h):
        p = np.asarray(p)
        shape = (p.shape[0],) + (1,) * (np.ndim(h) - 1)
        return p[:, 0].reshape(shape) * np.sqrt(
            np.clip(np.asarray(h) - p[:, 1].reshape(shape), 0.0, None)
        )

    outlet = OutletParameters(values=np.array([K, e]), discharge_with=discharge_with,
                              cov=np.diag([sk**2, 0.0]))  # fmt: skip
    errs = TermErrors(**NONE, stage_resolution_m=0.0)
    model = residual_errors(bal, area_fn=_area(A), outflow_fn=law, outlet=outlet, errors=errs,
                            rng=np.random.default_rng(5), rating_variants=4000)  # fmt: skip
    total = bal.daily["outflow_m3"].to_numpy()
    expected = sk / K * total[5:25].sum()
    # 4000 variants: the sample sd is within about 3 standard errors (1/sqrt(2 V) = 1.1 %)
    assert model.sd_of_window(5, 24, ("rating",)) == pytest.approx(expected, rel=0.035)
    assert model.sd_of_window(5, 24, ("random", "systematic", "area")) == 0.0


def test_the_monte_carlo_bands_draw_from_the_same_model():
    """The annual band of the draws matches ±1.645 sd of the model's analytic variance."""
    sigma, inflow = 0.1, 2.0
    bal = _flat_balance(days=365, inflow=inflow)
    errs = TermErrors(**{**NONE, "inflow": sigma, "area": 0.02}, stage_resolution_m=0.003,
                      systematic=0.5)  # fmt: skip
    out = add_uncertainty(bal, area_fn=_area(1e6), errors=errs, draws=4000,
                          rng=np.random.default_rng(9))  # fmt: skip
    sd = out.error_model.sd_of_window(0, len(bal.daily) - 1)
    wy = out.water_years().iloc[0]
    half = 0.5 * (wy["residual_p95_m3"] - wy["residual_p05_m3"])
    assert half == pytest.approx(1.6448536269514722 * sd, rel=0.05)
    ones = np.ones(len(bal.daily))
    assert out.error_model.covariance_of_sums(np.vstack([ones, 2 * ones])) == pytest.approx(
        np.array([[1, 2], [2, 4]]) * sd**2, rel=1e-9
    )
    assert math.isfinite(out.error_model.to_dict()["record_sum_sd_m3"])
