"""Balance closure and lake dynamics checked against analytic solutions.

Sources:
- Torricelli's law for a vertical-walled basin draining through an orifice, Q = K sqrt(h - e):
  A dh/dt = -K sqrt(h - e)  =>  sqrt(h - e) = sqrt(h0 - e) - K t / (2A), i.e.
  t(h) = (2A/K)(sqrt(h0 - e) - sqrt(h - e)) (analytic solution of the storage equation).
- The linear reservoir, Q = k (h - e) with a constant net inflow F on a constant area A:
  h(t) = h* + (h0 - h*) exp(-k t / A), h* = e + F/k; time constant A/k, so 95% of the way is
  reached after (A/k) ln 20 (analytic solution of a linear first-order ODE).
- The difference of two independent U(-r/2, r/2) deviates has the triangular density on
  (-r, r); its p-quantile below the median is -r (1 - sqrt(2p)) (analytic).
- A sum of independent normal errors is normal; its 95% quantile is 1.6449 sigma
  (standard normal table).
- Doubling the area leaves every equilibrium stage unchanged and doubles the response time
  (common practice, no source; it follows from A dh/dt = I - L(h)).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lakebalance.balance import (
    ClosureOptions,
    DailyTerms,
    OutletParameters,
    TermErrors,
    add_uncertainty,
    close_daily,
)
from lakebalance.dynamics import LakeModel

T = 86400.0  # s per day
Z95 = 1.6448536269514722  # standard normal 95% quantile (standard normal table)


def _orifice(K: float, e: float):
    return lambda h: K * np.sqrt(np.clip(np.asarray(h) - e, 0.0, None))


def _linear(k: float, e: float):
    return lambda h: k * np.clip(np.asarray(h) - e, 0.0, None)


def torricelli_records(A=2.0e6, K=1.0, e=0.5, h0=3.0, days=60, start="2021-03-01"):
    """Daily means and midnight stages of a Torricelli drain, exactly (analytic)."""
    u0 = math.sqrt(h0 - e)
    c = K / (2 * A)  # d sqrt(h-e)/dt, m^0.5/s
    t = np.arange(days + 1) * T
    assert u0 - c * t[-1] > 0, "record must end before the basin reaches the orifice"
    boundary = e + (u0 - c * t) ** 2
    mean = e + ((u0 - c * t[:-1]) ** 3 - (u0 - c * t[1:]) ** 3) / (3 * c * T)
    idx = pd.date_range(start, periods=days, freq="D", name="date")
    bidx = pd.date_range(start, periods=days + 1, freq="D")
    return pd.Series(mean, idx), pd.Series(boundary, bidx)


def linear_records(A=5.0e5, k=2.0, e=1.0, h0=1.2, inflow=3.0, rain=0.004, evap=0.006,
                   withdrawal=0.4, days=90, start="2020-09-15"):  # fmt: skip
    """Daily means and midnight stages of a linear reservoir filling from h0 (analytic)."""
    F = inflow + (rain - evap) * A / T - withdrawal  # net constant inflow, m³/s
    h_eq = e + F / k
    lam = k / A
    t = np.arange(days + 1) * T
    boundary = h_eq + (h0 - h_eq) * np.exp(-lam * t)
    mean = h_eq + (h0 - h_eq) * (np.exp(-lam * t[:-1]) - np.exp(-lam * t[1:])) / (lam * T)
    idx = pd.date_range(start, periods=days, freq="D", name="date")
    bidx = pd.date_range(start, periods=days + 1, freq="D")
    const = lambda v: pd.Series(v, idx)  # noqa: E731
    terms = DailyTerms(
        stage_m=pd.Series(mean, idx),
        inflow_m3s={"creek": const(inflow * 0.7), "brook": const(inflow * 0.3)},
        rain_m=const(rain),
        evaporation_m=const(evap),
        withdrawal_m3s=const(withdrawal),
        boundary_stage_m=pd.Series(boundary, bidx),
    )
    assert mean.min() > e
    return terms


def test_torricelli_drain_closes_to_1e_9_relative():
    """Torricelli's law, analytic records: the daily residual is < 1e-9 of the daily outflow."""
    A, K, e = 2.0e6, 1.0, 0.5
    mean, boundary = torricelli_records(A=A, K=K, e=e)
    bal = close_daily(
        DailyTerms(stage_m=mean, boundary_stage_m=boundary),
        volume_fn=lambda h: A * np.asarray(h),
        area_fn=lambda h: np.full(np.shape(h), A),
        outflow_fn=_orifice(K, e),
    )
    d = bal.daily
    assert d["complete"].all()
    rel = (d["residual_m3"].abs() / d["outflow_m3"]).max()
    assert rel < 1e-9
    # and the outflow volume equals the analytic storage loss A (h_s - h_e)
    loss = A * (boundary.to_numpy()[:-1] - boundary.to_numpy()[1:])
    np.testing.assert_allclose(d["outflow_m3"].to_numpy(), loss, rtol=1e-10)


def test_rating_at_daily_mean_stage_would_be_biased():
    """Torricelli: Q at the daily mean stage is not the daily mean Q (Jensen); the path is."""
    A, K, e = 2.0e5, 1.0, 0.5  # a small basin drains fast: strong curvature within a day
    mean, boundary = torricelli_records(A=A, K=K, e=e, h0=3.0, days=5)
    naive = _orifice(K, e)(mean.to_numpy()) * T
    true = A * (boundary.to_numpy()[:-1] - boundary.to_numpy()[1:])
    assert np.max(np.abs(naive / true - 1)) > 1e-6  # what the quadratic path avoids
    bal = close_daily(
        DailyTerms(stage_m=mean, boundary_stage_m=boundary),
        volume_fn=lambda h: A * np.asarray(h),
        area_fn=lambda h: np.full(np.shape(h), A),
        outflow_fn=_orifice(K, e),
    )
    np.testing.assert_allclose(bal.daily["outflow_m3"].to_numpy(), true, rtol=1e-10)


def test_linear_reservoir_closes_to_1e_9_relative():
    """Linear reservoir with inflows, rain, evaporation, withdrawal: residual < 1e-9 relative."""
    A, k, e = 5.0e5, 2.0, 1.0
    terms = linear_records(A=A, k=k, e=e)
    bal = close_daily(
        terms,
        volume_fn=lambda h: A * np.asarray(h),
        area_fn=lambda h: np.full(np.shape(h), A),
        outflow_fn=_linear(k, e),
        options=ClosureOptions(water_year_start=10),
    )
    d = bal.daily
    scale = d["outflow_m3"] + d["inflow_m3"]
    assert (d["residual_m3"].abs() / scale).max() < 1e-9
    wy = bal.water_years()
    assert list(wy.index) == [2020, 2021]  # water year starting October, labelled by its end
    assert (wy["residual_m3"].abs() / wy["inflow_m3"]).max() < 1e-9


def test_fourth_order_boundary_rule_beats_adjacent_mean_on_daily_means_only():
    """Linear reservoir from daily means only: the fourth-order interface estimate
    (Colella and Woodward, 1984, eq. 1.6) is far closer than the mean of adjacent days."""
    A, k, e = 5.0e5, 2.0, 1.0
    terms = linear_records(A=A, k=k, e=e)
    errs = {}
    for rule in ("adjacent_mean", "fourth_order"):
        bal = close_daily(
            DailyTerms(**{**terms.__dict__, "boundary_stage_m": None}),
            volume_fn=lambda h: A * np.asarray(h),
            area_fn=lambda h: np.full(np.shape(h), A),
            outflow_fn=_linear(k, e),
            options=ClosureOptions(boundary_rule=rule),
        )
        d = bal.daily
        rel = (d["residual_m3"].abs() / d["inflow_m3"]).to_numpy()
        errs[rule] = (np.nanmax(rel[3:-3]), np.nanmax(rel))  # interior days, all days
    assert errs["adjacent_mean"][1] < 2e-2
    assert errs["fourth_order"][0] < errs["adjacent_mean"][0] / 20
    assert errs["fourth_order"][1] < errs["adjacent_mean"][1]  # ends: one-sided third order


def test_torricelli_drain_time_matches_analytic():
    """t(h) = (2A/K)(sqrt(h0 - e) - sqrt(h - e)) (Torricelli), both by quadrature and solve_ivp."""
    A, K, e, h0 = 2.0e6, 1.0, 0.5, 3.0
    lake = LakeModel(area_fn=lambda h: np.full(np.shape(h), A), outflow_fn=_orifice(K, e),
                     stage_range_m=(0.0, 5.0))  # fmt: skip
    for h in (2.5, 1.5, 0.6):
        expected = 2 * A / K * (math.sqrt(h0 - e) - math.sqrt(h - e))
        assert lake.time_between(0.0, h0, h) == pytest.approx(expected, rel=1e-8)
    days = np.array([1.0, 10.0, 40.0])
    u = math.sqrt(h0 - e) - K * days * T / (2 * A)
    np.testing.assert_allclose(lake.simulate(0.0, h0, days), e + u**2, rtol=1e-7)
    assert lake.cease_to_flow_stage() == pytest.approx(e, abs=1e-8)
    assert lake.minimum_inflow_to_flow() == pytest.approx(0.0, abs=1e-6)


def test_linear_reservoir_response_and_time_to_95_percent():
    """Linear reservoir: tau = A/k at every stage, h* = e + I/k, t95 = (A/k) ln 20 (analytic)."""
    A, k, e, inflow = 5.0e5, 2.0, 1.0, 3.0
    lake = LakeModel(area_fn=lambda h: np.full(np.shape(h), A), outflow_fn=_linear(k, e),
                     stage_range_m=(0.0, 10.0))  # fmt: skip
    eq = lake.equilibrium(inflow)
    assert eq.status == "ok"
    assert eq.stage_m == pytest.approx(e + inflow / k, abs=1e-9)
    assert eq.response_time_s == pytest.approx(A / k, rel=1e-6)
    assert lake.time_to_fraction(inflow, 1.2) == pytest.approx(A / k * math.log(20), rel=1e-7)
    wi = lake.what_if(inflow, 1.2, demand_m3s=1.0, label="more demand")
    assert wi.equilibrium.stage_m == pytest.approx(e + (inflow - 1.0) / k, abs=1e-9)
    assert wi.time_to_95_s == pytest.approx(A / k * math.log(20), rel=1e-7)
    assert lake.inflow_for_stage(3.0) == pytest.approx(k * (3.0 - e))


@settings(max_examples=40, deadline=None)
@given(
    c=st.floats(0.5, 50.0),
    e=st.floats(0.0, 2.0),
    b=st.floats(0.5, 2.5),
    inflow=st.floats(0.01, 20.0),
    seep=st.floats(0.0, 0.5),
    area=st.floats(1e4, 1e7),
    slope=st.floats(0.0, 0.3),
)
def test_doubling_area_keeps_equilibrium_and_doubles_tau(c, e, b, inflow, seep, area, slope):
    """Common practice, no source: equilibrium independent of area, tau proportional to it."""

    def area_fn(h, s=1.0):
        return s * area * (1 + slope * np.asarray(h))

    def outflow(h):
        return c * np.clip(np.asarray(h) - e, 0.0, None) ** b

    def seepage(h):
        return seep * np.clip(np.asarray(h), 0.0, None)

    one = LakeModel(area_fn=area_fn, outflow_fn=outflow, seepage_fn=seepage,
                    stage_range_m=(0.0, 60.0))  # fmt: skip
    two = LakeModel(area_fn=lambda h: area_fn(h, 2.0), outflow_fn=outflow, seepage_fn=seepage,
                    stage_range_m=(0.0, 60.0))  # fmt: skip
    e1, e2 = one.equilibrium(inflow), two.equilibrium(inflow)
    assert e1.status == e2.status
    if e1.status == "ok":
        assert e2.stage_m == pytest.approx(e1.stage_m, abs=1e-9)
        assert e2.response_time_s == pytest.approx(2 * e1.response_time_s, rel=1e-6)
    h = np.linspace(0.5, 5.0, 7)
    np.testing.assert_allclose(two.response_time_s(h), 2 * one.response_time_s(h), rtol=1e-9)


def _flat_balance(days=365, A=1.0e6, inflow=2.0, start="2019-01-01", **terms):
    idx = pd.date_range(start, periods=days, freq="D", name="date")
    bidx = pd.date_range(start, periods=days + 1, freq="D")
    t = DailyTerms(
        stage_m=pd.Series(5.0, idx),
        inflow_m3s={"creek": pd.Series(inflow, idx)},
        boundary_stage_m=pd.Series(5.0, bidx),
        **terms,
    )
    return close_daily(t, volume_fn=lambda h: A * np.asarray(h),
                       area_fn=lambda h: np.full(np.shape(h), A))  # fmt: skip


def test_stage_resolution_band_is_triangular():
    """Only the stage gauge's resolution r: residual error A(δe − δs), δ ~ U(±r/2): triangular;
    its 5% quantile is −A r (1 − sqrt(0.1)) daily, and monthly too (boundaries telescope)."""
    A, r = 1.0e6, 0.003
    bal = _flat_balance(A=A, inflow=0.0)
    errs = TermErrors(inflow=0, rain=0, evaporation=0, withdrawal=0, release=0, area=0,
                      stage_resolution_m=r)  # fmt: skip
    out = add_uncertainty(bal, area_fn=lambda h: np.full(np.shape(h), A), errors=errs,
                          draws=4000, rng=np.random.default_rng(7))  # fmt: skip
    expected = A * r * (1 - math.sqrt(0.1))
    lo = out.daily["residual_p05_m3"]
    hi = out.daily["residual_p95_m3"]
    assert lo.mean() == pytest.approx(-expected, rel=0.01)
    assert hi.mean() == pytest.approx(expected, rel=0.01)
    m = out.monthly()
    np.testing.assert_allclose(m["residual_p05_m3"], -expected, rtol=0.06)
    np.testing.assert_allclose(m["residual_p95_m3"], expected, rtol=0.06)


@pytest.mark.parametrize("systematic", [0.0, 1.0])
def test_inflow_error_band_is_normal(systematic):
    """Inflow relative error σ only: annual band ±1.645 σ sqrt(Σ I_d²) when day-independent,
    ±1.645 σ Σ I_d when persistent through the year (sums of normals, standard normal table)."""
    sigma, inflow = 0.1, 2.0
    bal = _flat_balance(inflow=inflow)
    errs = TermErrors(inflow=sigma, rain=0, evaporation=0, withdrawal=0, release=0, area=0,
                      stage_resolution_m=0.0, systematic=systematic)  # fmt: skip
    out = add_uncertainty(bal, area_fn=lambda h: np.full(np.shape(h), 1e6), errors=errs,
                          draws=4000, rng=np.random.default_rng(3))  # fmt: skip
    daily_vol = inflow * T
    n = len(bal.daily)
    sd = sigma * daily_vol * (math.sqrt(n) if systematic == 0.0 else n)
    wy = out.water_years()
    # residual = ΔV − inflow = −Σ I (the basin holds a constant stage); the band is around it
    centre = -inflow * T * n
    assert wy["residual_m3"].iloc[0] == pytest.approx(centre)
    assert wy["residual_p95_m3"].iloc[0] - centre == pytest.approx(Z95 * sd, rel=0.06)
    assert centre - wy["residual_p05_m3"].iloc[0] == pytest.approx(Z95 * sd, rel=0.06)
    assert wy["p_nonzero"].iloc[0] == pytest.approx(1.0)
    day_sd = sigma * daily_vol
    assert (out.daily["residual_p95_m3"] - out.daily["residual_m3"]).mean() == pytest.approx(
        Z95 * day_sd, rel=0.03
    )


def test_rating_coefficient_error_band():
    """Orifice Q = K sqrt(h − e) with σ_K only: outflow is linear in K, so the residual's band
    is ±1.645 (σ_K/K) O exactly (normal quantile)."""
    A, K, e = 2.0e6, 1.0, 0.5
    mean, boundary = torricelli_records(A=A, K=K, e=e, days=30)
    law = _orifice(K, e)
    bal = close_daily(
        DailyTerms(stage_m=mean, boundary_stage_m=boundary),
        volume_fn=lambda h: A * np.asarray(h),
        area_fn=lambda h: np.full(np.shape(h), A),
        outflow_fn=law,
    )

    def discharge_with(p, h):
        p = np.asarray(p)
        shape = (p.shape[0],) + (1,) * (np.ndim(h) - 1)
        return p[:, 0].reshape(shape) * np.sqrt(
            np.clip(np.asarray(h) - p[:, 1].reshape(shape), 0.0, None)
        )

    sk = 0.05
    outlet = OutletParameters(values=np.array([K, e]), discharge_with=discharge_with,
                              cov=np.diag([sk**2, 0.0]))  # fmt: skip
    errs = TermErrors(inflow=0, rain=0, evaporation=0, withdrawal=0, release=0, area=0,
                      stage_resolution_m=0.0)  # fmt: skip
    out = add_uncertainty(bal, area_fn=lambda h: np.full(np.shape(h), A), outflow_fn=law,
                          outlet=outlet, errors=errs, draws=4000, rating_variants=4000,
                          rng=np.random.default_rng(11))  # fmt: skip
    total = bal.daily["outflow_m3"].sum()
    m = out.water_years().iloc[0]
    assert m["residual_p95_m3"] == pytest.approx(Z95 * sk / K * total, rel=0.06)
    assert m["residual_p05_m3"] == pytest.approx(-Z95 * sk / K * total, rel=0.06)


def test_subdaily_outflow_matches_the_exact_integral_of_a_flood_day():
    """A flood wave passing within one day, h(t) = 10 + 0.8 sin²(π t / T), over a power-law
    sill Q = 5 (h − 9.6)^1.6: the outflow from 15-minute readings equals the exact integral
    (scipy.integrate.quad) within the trapezoidal rule's error bound T Δt² max|Q̈| / 12 (any
    numerical analysis text), while the daily path through the boundaries and the daily mean
    misses the peak by far more."""
    from scipy.integrate import quad

    from lakebalance.balance import subdaily_outflow_m3

    C, e, b, amp = 5.0, 9.6, 1.6, 0.8

    def stage(t):
        return 10.0 + amp * np.sin(np.pi * t / T) ** 2

    def law(h):
        return C * np.clip(np.asarray(h) - e, 0.0, None) ** b

    exact, _ = quad(lambda t: law(stage(t)), 0.0, T, epsabs=1e-6, limit=200)
    dt = 900.0
    times = pd.date_range("2022-05-01", "2022-05-02", freq="15min")  # both midnights
    readings = pd.Series(stage((times - times[0]).total_seconds().to_numpy()), index=times)
    day = pd.DatetimeIndex(["2022-05-01"])
    got = subdaily_outflow_m3(readings, day, law)[0]
    t = np.linspace(0, T, 20001)
    q = law(stage(t))
    qdd = np.gradient(np.gradient(q, t), t)
    bound = T * dt**2 * np.abs(qdd).max() / 12.0
    assert abs(got - exact) <= bound
    assert abs(got - exact) / exact < 1e-3
    # the daily path: boundaries at 10.0 m, daily mean 10.4 m
    idx = pd.date_range("2022-04-30", periods=3, freq="D", name="date")
    mean = pd.Series([10.0, 10.0 + amp / 2, 10.0], index=idx)
    boundary = pd.Series(10.0, index=idx.append(pd.DatetimeIndex(["2022-05-03"])))
    bal = close_daily(DailyTerms(stage_m=mean, boundary_stage_m=boundary),
                      volume_fn=lambda h: 1e6 * np.asarray(h),
                      area_fn=lambda h: np.full(np.shape(h), 1e6), outflow_fn=law)  # fmt: skip
    path_error = abs(bal.daily["outflow_m3"].iloc[1] - exact)
    assert path_error > 10 * abs(got - exact)
    with_readings = close_daily(
        DailyTerms(stage_m=mean, boundary_stage_m=boundary, subdaily_stage_m=readings),
        volume_fn=lambda h: 1e6 * np.asarray(h), area_fn=lambda h: np.full(np.shape(h), 1e6),
        outflow_fn=law,
    )  # fmt: skip
    assert with_readings.daily["outflow_m3"].iloc[1] == pytest.approx(got)
    assert any("from the rating applied to each sub-daily" in n for n in with_readings.notes)
