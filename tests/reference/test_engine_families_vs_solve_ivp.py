"""The drawdown engine on four lake families against scipy's ``solve_ivp``.

Reference: :func:`scipy.integrate.solve_ivp`, method LSODA (Hindmarsh 1983; Petzold 1983:
automatic switching between Adams and BDF, suited to stiff and non-stiff days alike),
``rtol = 1e-10``, ``atol = 1e-12`` (m), integrating the same ordinary differential equation day
by day from the continuous laws (not the engine's tables). Restriction decisions are made on the
reference's own day-start stage by :func:`enginelakes.reference_cut`, written independently of
:class:`lakebalance.operations.RestrictionState`. Check: at most 1 mm of stage difference along
the year and after 365 days, and the same restriction share on every day.

Families (tests/enginelakes.py, invented): slow, stiff, a stiff pond crossing its sill, a
flow-through lake near its power-law
sill whose members cross the sill many times, a gated reservoir with a release table by month
and stage, an environmental minimum, spill, monthly demand and two restriction levels with
hysteresis, monthly triggers and lags.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from enginelakes import FAMILIES, MONTHS, reference_member  # noqa: E402

from lakebalance.drawdown.engine import simulate  # noqa: E402

MEMBERS = 2


def _run(lake, inflow, net, **kw):
    restriction = lake.rules.restriction if lake.rules is not None else ()
    return simulate(
        lake.tables(), lake.start_m, inflow, net, lake.demand_m3s, restriction=restriction,
        months=MONTHS[: inflow.shape[0]], **kw,
    )  # fmt: skip


@pytest.mark.parametrize("name", list(FAMILIES))
def test_engine_within_1mm_of_solve_ivp_lsoda_rtol_1e10_after_365_days(name):
    lake = FAMILIES[name]
    rng = np.random.default_rng(3)
    inflow, net = lake.forcing(rng, MEMBERS)
    res = _run(lake, inflow, net)
    for m in range(MEMBERS):
        ref, cuts = reference_member(lake, inflow[:, m], net[:, m], "LSODA", 1e-10, 1e-12)
        err = np.abs(res.stage_m[:, m] - ref)
        assert err[-1] <= 1e-3, (name, m, err[-1])
        assert err.max() <= 1e-3, (name, m, err.max())
        assert np.array_equal(cuts, res.cut[:, m]), (name, m)
    if name in (
        "sill",
        "stiff_sill",
    ):  # the case the check is about: the members cross the sill often
        crossings = np.sum(np.diff(np.sign(res.stage_m - lake.sill_e), axis=0) != 0, axis=0)
        assert crossings.min() >= 4
        assert res.corrected_member_days > 0
    if name == "gated":  # restrictions come and go, with days held by the hysteresis
        on = res.cut > 0
        assert on.any() and (~on).any()
        assert np.any(np.diff(on.astype(int), axis=0) < 0)  # lifted at least once
        h_start = res.stage_m[:-1]
        held = on & (h_start >= 16.8) & (h_start < 17.2) & (MONTHS[:, None] < 5)
        assert held.any()  # in force above the trigger: hysteresis at work


def test_grid_path_alone_matches_solve_ivp_near_the_sill():
    """The fallback (the exact path of the tables' piecewise-linear law) on every member-day of
    the sill family: ``err_m = 0`` sends all days through the corrections to the grid path."""
    lake = FAMILIES["sill"]
    rng = np.random.default_rng(5)
    inflow, net = lake.forcing(rng, 1, days=120)
    res = _run(lake, inflow, net, err_m=0.0)
    assert res.refined_member_days == 120
    ref, _ = reference_member(lake, inflow[:, 0], net[:, 0], "LSODA", 1e-10, 1e-12)
    assert np.max(np.abs(res.stage_m[:, 0] - ref)) <= 1e-3


def test_rating_variants_and_members_are_independent():
    """Members with their own rating variant (outlet coefficient scaled) match solve_ivp run
    with that coefficient: the variant rows are read per member."""
    lake = FAMILIES["sill"]
    rng = np.random.default_rng(11)
    inflow, net = lake.forcing(rng, 2, days=150)
    scales = np.array([0.8, 1.25])
    res = simulate(
        lake.tables(scales), lake.start_m, inflow, net, 0.0, variant=np.array([1, 0]),
        months=MONTHS[:150],
    )  # fmt: skip
    for m, s in enumerate(scales[[1, 0]]):
        ref, _ = reference_member(lake, inflow[:, m], net[:, m], "LSODA", 1e-10, 1e-12, scale=s)
        assert np.max(np.abs(res.stage_m[:, m] - ref)) <= 1e-3
