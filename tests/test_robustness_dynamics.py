"""Robustness of dynamics and flags when a term's record does not overlap the stage record.

Invented sites from ``tests/_robust_sites.py``; expected behaviour is the README's rule: a usable
result, or exit 2 with one ``error:`` line and no traceback.
"""

from __future__ import annotations

import pytest
from _robust_sites import write_site

import lakebalance as lb
from lakebalance.cli import main
from lakebalance.errors import FitError, RangeError


def test_dynamics_without_overlapping_inflow_asks_for_one(tmp_path, capsys):
    site_path = write_site(tmp_path, inflow_shift_days=3000)
    site = lb.load_site(site_path)
    with pytest.raises(RangeError, match="--inflow"):
        lb.Lake(site).dynamics()
    assert main(["dynamics", str(site_path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: ")


def test_dynamics_with_a_given_inflow_runs_on_a_lake_without_outlet(tmp_path, capsys):
    """No outlet and no losses: any positive sustained inflow fills the lake beyond its range
    (a closed basin without losses has no equilibrium, mass conservation, no source needed)."""
    site_path = write_site(tmp_path, inflow_shift_days=3000)
    assert main(["dynamics", str(site_path), "--inflow", "0.2", "--json"]) == 0
    out = capsys.readouterr().out
    assert "above_range" in out


def test_flags_on_a_balance_without_any_residual_is_an_error(tmp_path, capsys):
    """Every day misses its inflow: no residual to flag. Before the fix the stage steps were
    reported as dozens of 'significant' flags against a placeholder noise of 1 m³/d."""
    site_path = write_site(tmp_path, inflow_shift_days=3000)
    site = lb.load_site(site_path)
    with pytest.raises(FitError, match="have a residual"):
        _ = lb.Lake(site).flags
    assert main(["flags", str(site_path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "0 of 120 day(s)" in err[0]


def test_dynamics_text_of_a_lake_without_outlet_or_levels_has_no_nan(tmp_path, capsys):
    """A terminal lake with no [levels]: the summary says so in words ("nan m" and an
    'Empty DataFrame' dump before the fix)."""
    site_path = write_site(tmp_path, days=60)
    assert main(["dynamics", str(site_path)]) == 0
    out = capsys.readouterr().out
    assert "nan" not in out.lower().replace("nans", "")
    assert "Empty DataFrame" not in out
    assert "no outlet rating" in out


def test_time_to_95_percent_under_an_orifice_law_matches_the_analytic_integral():
    """dh/dt = (I - K sqrt(h - e)) / A with constant A: with u = sqrt(h - e), separation of
    variables gives t = (2A/K) [-(u1 - u0) - (I/K) ln((I - K u1) / (I - K u0))] (analytic,
    common practice, no source). The orifice site once leaked scipy's round-off notice here."""
    import math
    import warnings

    import numpy as np

    from lakebalance.dynamics import LakeModel

    area, k, e, inflow = 3.0e5, 1.2, -0.5, 2.0  # m², m^2.5/s, m, m³/s (invented)
    lake = LakeModel(
        area_fn=lambda h: np.full(np.shape(h), area),
        outflow_fn=lambda h: k * np.sqrt(np.clip(np.asarray(h) - e, 0.0, None)),
        stage_range_m=(0.0, 6.0),
    )
    h_eq = (inflow / k) ** 2 + e
    h0 = 0.3
    target = h0 + 0.95 * (h_eq - h0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        t = lake.time_to_fraction(inflow, h0, 0.95)
    u0, u1 = math.sqrt(h0 - e), math.sqrt(target - e)
    exact = (2 * area / k) * (
        -(u1 - u0) - inflow / k * math.log((inflow - k * u1) / (inflow - k * u0))
    )
    assert t == pytest.approx(exact, rel=1e-6)


def test_levels_far_outside_the_storage_relation_warn_once(tmp_path, capsys):
    site_path = write_site(tmp_path, days=60, extra_toml='\n[levels]\nflood = "40 m"\n')
    assert main(["dynamics", str(site_path)]) == 0
    err = capsys.readouterr().err
    assert err.count("storage relation") == 1
    assert "flood 40 m" in err
