"""Lake dynamics: equilibria, limits, residence times, what-ifs and the dynamics command."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

from lakebalance import LakeModel, residence_times
from lakebalance.dynamics import analyse_dynamics

T = 86400.0


def _power(c, e, b):
    return lambda h: c * np.clip(np.asarray(h) - e, 0.0, None) ** b


def _flat(area):
    return lambda h: np.full(np.shape(h), float(area))


def test_power_law_equilibrium_and_lowered_sill():
    """Q = C (h − e)^b alone: h* = e + (I/C)^(1/b) (analytic); lowering the sill by 0.5 m
    lowers h* by 0.5 m."""
    c, e, b, inflow = 4.0, 2.0, 1.6, 3.0
    lake = LakeModel(area_fn=_flat(1e6), outflow_fn=_power(c, e, b), stage_range_m=(0, 10))
    eq = lake.equilibrium(inflow)
    assert eq.stage_m == pytest.approx(e + (inflow / c) ** (1 / b), abs=1e-9)
    # tau = A / Q'(h*) with Q' = b C (h − e)^(b−1) (analytic derivative)
    slope = b * c * (eq.stage_m - e) ** (b - 1)
    assert eq.response_time_s == pytest.approx(1e6 / slope, rel=1e-6)
    wi = lake.what_if(inflow, 3.0, outflow_fn=_power(c, e - 0.5, b))
    assert wi.equilibrium.stage_m == pytest.approx(eq.stage_m - 0.5, abs=1e-9)
    assert lake.cease_to_flow_stage() == pytest.approx(e, abs=1e-8)


def test_time_to_95_percent_agrees_with_solve_ivp():
    """Two integrations of A dh/dt = I − L(h): quadrature of dt/dh and solve_ivp in time."""
    lake = LakeModel(
        area_fn=lambda h: 5e5 * (1 + 0.2 * np.asarray(h)),
        outflow_fn=_power(2.0, 1.0, 1.5),
        seepage_fn=lambda h: 0.01 * np.asarray(h),
        evaporation_m_per_d=0.004,
        rain_m_per_d=0.001,
        demand_m3s=0.2,
        stage_range_m=(0.0, 8.0),
    )
    inflow, h0 = 2.5, 1.2
    eq = lake.equilibrium(inflow)
    t95 = lake.time_to_fraction(inflow, h0)
    h_at = lake.simulate(inflow, h0, np.array([t95 / T]))[0]
    assert h_at == pytest.approx(h0 + 0.95 * (eq.stage_m - h0), abs=1e-6)


def test_no_equilibrium_in_range():
    lake = LakeModel(area_fn=_flat(1e5), outflow_fn=_power(1.0, 5.0, 1.5), demand_m3s=0.5,
                     stage_range_m=(0.0, 6.0))  # fmt: skip
    assert lake.equilibrium(100.0).status == "above_range"
    assert lake.equilibrium(0.1).status == "empties"  # the demand exceeds the inflow
    assert math.isnan(lake.time_to_fraction(100.0, 1.0))


def test_inflow_limits():
    """Analytic: at equilibrium I = C (h - e)^b + demand, so the inflow holding 4 m is
    C 2^b + demand, and the outlet flows once the inflow exceeds the demand."""
    c, e, b = 4.0, 2.0, 1.5
    lake = LakeModel(area_fn=_flat(1e6), outflow_fn=_power(c, e, b), demand_m3s=0.3,
                     stage_range_m=(0.0, 10.0))  # fmt: skip
    assert lake.inflow_for_stage(4.0) == pytest.approx(c * 2.0**b + 0.3)
    assert lake.minimum_inflow_to_flow() == pytest.approx(0.3, abs=1e-6)
    eq = lake.equilibrium(lake.inflow_for_stage(4.0))
    assert eq.stage_m == pytest.approx(4.0, abs=1e-9)


def test_residence_times():
    """Mean volume over mean outflow, and over all losses (common practice, no source)."""
    idx = pd.date_range("2020-10-01", periods=730, freq="D", name="date")
    daily = pd.DataFrame(
        {
            "storage_m3": 1.0e7,
            "outflow_m3": 1.0e5,
            "evaporation_m3": 2.0e4,
            "withdrawal_m3": 3.0e4,
            "release_m3": 0.0,
        },
        index=idx,
    )
    r = residence_times(daily, water_year_start=10)
    assert list(r.index) == [2021, 2022, "all"]
    np.testing.assert_allclose(r["residence_outflow_days"], 100.0)
    np.testing.assert_allclose(r["residence_losses_days"], 1.0e7 / 1.5e5)
    r2 = residence_times(daily, 10, seepage_m3=pd.Series(5.0e4, idx))
    np.testing.assert_allclose(r2["residence_losses_days"], 50.0)


def test_analyse_dynamics_tables():
    lake = LakeModel(area_fn=_flat(1e6), outflow_fn=_power(4.0, 2.0, 1.5),
                     stage_range_m=(0.0, 10.0))  # fmt: skip
    dyn = analyse_dynamics(lake, inflow_m3s=2.0, today="2024-01-01", today_stage_m=2.5,
                           levels={"crest": 4.0}, changes=(("more demand",
                                                             {"demand_m3s": 0.5}),))  # fmt: skip
    assert list(dyn.limits.index) == ["crest"]
    assert [w.label for w in dyn.what_if] == ["as is", "more demand"]
    assert dyn.what_if[1].equilibrium.stage_m < dyn.what_if[0].equilibrium.stage_m
    doc = dyn.to_dict()
    assert doc["equilibrium"]["status"] == "ok"
    assert "licensed professional" in dyn.summary()


def test_dynamics_command_on_the_demo(demo_site_path, capsys):
    from lakebalance.cli import main

    args = ["dynamics", str(demo_site_path), "--json", "--inflow", "150 ML/d",
            "--outlet", "sill.e=9.5", "--demand", "0.4"]  # fmt: skip
    assert main(args) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["inflow_m3s"] == pytest.approx(150e3 / T)
    labels = [w["label"] for w in doc["what_if"]]
    assert labels[0] == "as is" and len(labels) == 3
    base, lowered = doc["what_if"][0]["equilibrium"], doc["what_if"][1]["equilibrium"]
    assert lowered["stage_m"] < base["stage_m"]
    assert doc["cease_to_flow_stage_m"] == pytest.approx(10.0, abs=0.1)  # planted sill, truth
    assert main(["dynamics", str(demo_site_path), "--outlet", "nosuch=1"]) == 2
    assert "unknown rating parameter" in capsys.readouterr().err
