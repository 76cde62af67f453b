"""The error model's AR(1) day-to-day part (lakebalance.errormodel)."""

from __future__ import annotations

import numpy as np
import pytest

from lakebalance.errormodel import ResidualErrors, ar1_quadratic


def _model(n: int, phi: float, sd: np.ndarray) -> ResidualErrors:
    zeros = np.zeros(n)
    return ResidualErrors(
        random_sd_m3=sd,
        systematic_m3=np.zeros((0, n)),
        period=np.zeros(n, dtype=np.int64),
        area_m3=zeros,
        boundary_prev_m3=zeros,
        boundary_next_m3=zeros,
        resolution_m=0.0,
        ok=np.ones(n, dtype=bool),
        random_ar1=phi,
    )


def test_ar1_quadratic_equals_the_dense_correlation_matrix():
    # Box & Jenkins (1976) §3.2.4: the autocorrelation of an AR(1) is rho_k = phi^k
    rng = np.random.default_rng(0)
    u = rng.normal(size=(3, 60))
    phi = 0.6
    lag = np.abs(np.subtract.outer(np.arange(60), np.arange(60)))
    assert ar1_quadratic(u, phi) == pytest.approx(u @ phi**lag @ u.T, rel=1e-12)
    assert ar1_quadratic(u, 0.0) == pytest.approx(u @ u.T)


def test_variance_of_a_long_sum_grows_by_the_ar1_factor():
    # the variance of a sum of n AR(1) values of unit variance tends to n (1 + phi) / (1 - phi)
    # (Box & Jenkins, 1976, the long-run variance of an AR(1)), up to end effects of order 1/n
    n, phi = 4000, 0.6
    model = _model(n, phi, np.ones(n))
    var = model.sd_of_window(0, n - 1, ("random",)) ** 2
    exact = n * (1 + phi) / (1 - phi) - 2 * phi * (1 - phi**n) / (1 - phi) ** 2
    assert var == pytest.approx(exact, rel=1e-9)
    assert var / n == pytest.approx((1 + phi) / (1 - phi), rel=2e-3)
    # the daily variance is not changed by the autocorrelation
    assert model.daily_sd()[0] == pytest.approx(1.0)


def test_the_monte_carlo_draws_the_same_ar1():
    # the balance's Monte Carlo uses the model's phi: the monthly bands' width matches the exact
    # variance of the month's sum (normal 5-95 % band: width = 2 * 1.645 sd)
    import pandas as pd

    from lakebalance.balance import DailyTerms, TermErrors, add_uncertainty, close_daily

    n = 400
    rng = np.random.default_rng(1)
    idx = pd.date_range("2019-10-01", periods=n, freq="D", name="date")
    terms = DailyTerms(
        stage_m=pd.Series(5 + 0.2 * np.sin(np.arange(n) / 20), idx),
        inflow_m3s={"in": pd.Series(1 + rng.random(n), idx)},
    )
    area = lambda h: np.full(np.shape(h), 1.0e6)  # noqa: E731
    bal = close_daily(terms, volume_fn=lambda h: 1.0e6 * np.asarray(h), area_fn=area)
    errors = TermErrors(inflow=0.1, systematic=0.0, area=0.0, stage_resolution_m=0.0,
                        daily_autocorrelation=0.7)  # fmt: skip
    out = add_uncertainty(bal, area_fn=area, errors=errors, draws=4000,
                          rng=np.random.default_rng(2))  # fmt: skip
    model = out.error_model
    assert model.random_ar1 == 0.7
    months = out.monthly()
    for m in ("2020-01", "2020-06"):
        row = months.loc[pd.Timestamp(m + "-01")]
        days = np.flatnonzero(idx.to_period("M") == pd.Period(m))
        sd = model.sd_of_window(days[0], days[-1])
        width = row["residual_p95_m3"] - row["residual_p05_m3"]
        assert width / (2 * 1.6449) == pytest.approx(sd, rel=0.06)
        # and independent days would have given a band about sqrt((1+phi)/(1-phi)) narrower
        assert sd > 2.0 * np.sqrt(np.sum(model.random_sd_m3[days] ** 2))


def test_autocorrelation_out_of_range_is_refused():
    with pytest.raises(ValueError):
        _model(5, 1.0, np.ones(5))
