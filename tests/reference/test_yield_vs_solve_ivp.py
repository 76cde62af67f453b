"""Firm yield by simulation against an independent integration of the same lake.

scipy's ``solve_ivp`` (LSODA, rtol 1e-9, atol 1e-9 m) integrates the balance day by day with the
day's forcing constant, a widening basin, a power-law outlet and a weir spillway; a demand fails
when the stage falls below the failure level plus the intake's 1 cm (an event of the
integration). The firm yield found by the engine must be met by the reference integration at
0.1 % below it and fail at 0.1 % above it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.integrate import solve_ivp

from lakebalance.drawdown.yield_ import RecordForcing, firm_yield
from lakebalance.laws import LakeLaws

DAY = 86400.0
A0 = 4.0e5  # m²
FAIL = 1.5  # m
H0 = 4.0  # m


def _area(h):
    return A0 * (1.0 + 0.3 * np.maximum(np.asarray(h, dtype=float), 0.0)) ** 1.2


def _outflow(h):
    h = np.asarray(h, dtype=float)
    return 0.8 * np.clip(h - 3.5, 0.0, None) ** 1.6 + 30.0 * np.clip(h - 4.5, 0.0, None) ** 1.5


def _volume(h):
    # integral of the area from 0 (closed form of the power law)
    h = np.maximum(np.asarray(h, dtype=float), 0.0)
    return A0 / (0.3 * 2.2) * ((1.0 + 0.3 * h) ** 2.2 - 1.0)


def _record(days: int = 730) -> RecordForcing:
    rng = np.random.default_rng(5)
    z = np.zeros(days)
    for d in range(1, days):
        z[d] = 0.85 * z[d - 1] + rng.normal(0.0, 0.35)
    inflow = 0.6 * np.exp(z)
    inflow[150:330] *= 0.15  # a long dry spell
    inflow[500:620] *= 0.3
    net = -0.004 + (rng.random(days) < 0.2) * 0.012  # m/day
    dates = pd.date_range("2010-01-01", periods=days, freq="D")
    return RecordForcing(dates, inflow, net, np.zeros(days), {})


def _meets(f: RecordForcing, demand: float) -> bool:
    """Reference: does the demand keep the stage above the failure level + 1 cm all record?"""
    h = H0
    limit = FAIL + 0.01

    def low(t, y, *args):
        return y[0] - limit

    low.terminal = True
    for d in range(f.days):
        q, a = f.inflow_m3s[d], f.net_depth_m[d] / DAY

        def rhs(t, y, q=q, a=a):
            return [a + (q - demand - float(_outflow(y[0]))) / float(_area(y[0]))]

        sol = solve_ivp(rhs, (0.0, DAY), [h], method="LSODA", rtol=1e-9, atol=1e-9, events=low)
        if sol.status == 1:
            return False
        h = float(sol.y[0, -1])
    return True


def test_firm_yield_matches_an_independent_integration():
    laws = LakeLaws(
        area=_area, volume=_volume, outflow=_outflow, stage_range_m=(0.0, 8.0), levels={}
    )
    f = _record()
    fy = firm_yield(laws, f, failure_level_m=FAIL, start_stage_m=H0, rtol=1e-4)
    assert fy.demand_m3s > 0.05
    assert _meets(f, fy.demand_m3s * 0.999)
    assert not _meets(f, fy.demand_m3s * 1.001)
