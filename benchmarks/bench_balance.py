"""Benchmark: 100 years of daily closure with 1,000 Monte Carlo draws (target: at most 2 s).

Synthetic record (invented, no real lake): a basin whose area grows with stage, a power-law
outlet with a fitted-style parameter covariance, two tributaries, rain, evaporation and a
withdrawal. Prints the closure time, the Monte Carlo time and their sum.

Run: ``python benchmarks/bench_balance.py``
"""

from __future__ import annotations

import time

import numpy as np
import pandas as pd

from lakebalance.balance import (
    ClosureOptions,
    DailyTerms,
    OutletParameters,
    TermErrors,
    add_uncertainty,
    close_daily,
)

YEARS = 100
DRAWS = 1000
TARGET_S = 2.0


def _inputs(rng: np.random.Generator):
    idx = pd.date_range("1925-01-01", periods=int(YEARS * 365.25), freq="D", name="date")
    n = len(idx)
    doy = idx.dayofyear.to_numpy()
    stage = 10.0 + 0.8 * np.sin(2 * np.pi * doy / 365.25) + 0.05 * rng.standard_normal(n)

    def area(h):
        return 2.0e6 * (1 + 0.05 * (np.asarray(h) - 8.0))

    def volume(h):
        x = np.asarray(h) - 8.0
        return 2.0e6 * (x + 0.025 * x**2)

    params = np.array([12.0, 9.5, 1.6])  # C, e, b

    def discharge_with(p, h):
        p = np.asarray(p)
        shape = (p.shape[0],) + (1,) * (np.ndim(h) - 1)
        c, e, b = (p[:, j].reshape(shape) for j in range(3))
        return c * np.clip(np.asarray(h) - e, 0, None) ** b

    def outflow(h):
        return params[0] * np.clip(np.asarray(h) - params[1], 0, None) ** params[2]

    cov = np.diag([0.5, 0.01, 0.02]) ** 2
    flow = lambda scale: pd.Series(scale * (1 + 0.5 * rng.random(n)), idx)  # noqa: E731
    terms = DailyTerms(
        stage_m=pd.Series(stage, idx),
        inflow_m3s={"north": flow(3.0), "south": flow(1.5)},
        rain_m=pd.Series(0.002 * rng.random(n), idx),
        evaporation_m=pd.Series(0.003 + 0.001 * rng.random(n), idx),
        withdrawal_m3s=pd.Series(0.3, idx),
    )
    outlet = OutletParameters(values=params, discharge_with=discharge_with, cov=cov)
    return terms, area, volume, outflow, outlet


def _warm_up(area, volume, outflow, outlet) -> float:
    """One-time start-up (unit registry, scipy.special, numpy kernels) on a 2-year record."""
    t = time.perf_counter()
    idx = pd.date_range("2000-01-01", periods=730, freq="D", name="date")
    terms = DailyTerms(stage_m=pd.Series(10.0, idx), inflow_m3s={"a": pd.Series(1.0, idx)})
    bal = close_daily(terms, volume_fn=volume, area_fn=area, outflow_fn=outflow)
    bal = add_uncertainty(bal, area_fn=area, outflow_fn=outflow, outlet=outlet, draws=10,
                          rng=np.random.default_rng(0))  # fmt: skip
    bal.monthly()
    return time.perf_counter() - t


def main() -> None:
    rng = np.random.default_rng(20240601)
    terms, area, volume, outflow, outlet = _inputs(rng)
    opts = ClosureOptions(water_year_start=10)
    startup = _warm_up(area, volume, outflow, outlet)
    t0 = time.perf_counter()
    bal = close_daily(terms, volume_fn=volume, area_fn=area, outflow_fn=outflow, options=opts)
    t1 = time.perf_counter()
    bal = add_uncertainty(
        bal,
        area_fn=area,
        outflow_fn=outflow,
        outlet=outlet,
        errors=TermErrors(),
        draws=DRAWS,
        rng=np.random.default_rng(1),
    )
    t2 = time.perf_counter()
    monthly = bal.monthly()
    annual = bal.water_years()
    t3 = time.perf_counter()
    total = t3 - t0
    print(f"days: {len(bal.daily)}  draws: {DRAWS}  months: {len(monthly)}  years: {len(annual)}")
    print(f"start-up:    {startup:7.3f} s  (one-time imports and unit registry, not counted)")
    print(f"closure:     {t1 - t0:7.3f} s")
    print(f"monte carlo: {t2 - t1:7.3f} s")
    print(f"tables:      {t3 - t2:7.3f} s")
    print(
        f"total:       {total:7.3f} s  (target <= {TARGET_S:.1f} s; ratio {total / TARGET_S:.2f})"
    )


if __name__ == "__main__":
    main()
