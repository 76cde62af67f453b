"""Robustness of the balance on lakes unlike the demo: a stage record off the storage datum.

Invented sites from ``tests/_robust_sites.py``. Expected behaviour (project rule, README "Every
command exits 0 on success and 2 when an input ... cannot be used, printing one line"): a usable
result, or exit 2 with one line ``error: <file>: <what>`` and no traceback.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from _robust_sites import write_site

import lakebalance as lb
from lakebalance.cli import main
from lakebalance.errors import ExtrapolationWarning, RangeError


def test_storage_table_of_elevations_is_an_error_naming_the_table(tmp_path, capsys):
    """A table whose stage column holds elevations (1500 m) cannot hold a stage of 1-11 m:
    every day would be clamped to the bottom and the storage change would be zero."""
    site_path = write_site(tmp_path, storage_offset_m=1500.0)
    site = lb.load_site(site_path)
    with pytest.raises(RangeError, match="wholly outside the storage relation"):
        _ = lb.Lake(site).balance
    assert main(["balance", str(site_path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: ") and "storage.csv" in err[0]
    assert "Traceback" not in err[0]


def test_stage_in_centimetres_declared_as_metres_stops_the_balance(tmp_path, capsys):
    site_path = write_site(tmp_path, stage_factor=100.0)
    assert main(["balance", str(site_path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "declared unit" in err[0]


def test_days_above_the_storage_relation_warn_once(tmp_path, capsys):
    """The stage rises past the table's top (11 m): one warning, counted in days, not one per
    evaluation (boundaries, quadrature nodes, Monte Carlo)."""
    site_path = write_site(tmp_path, days=140, extra_toml="")
    site = lb.load_site(site_path)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        balance = lb.Lake(site, draws=50).balance
    extrap = [w for w in caught if issubclass(w.category, ExtrapolationWarning)]
    assert len(extrap) == 1
    stage = balance.daily["stage_m"].to_numpy()
    n_above = int(np.count_nonzero(stage > 11.0))
    assert n_above > 0
    assert f"{n_above} of {stage.size} stages above" in str(extrap[0].message)
    # the extended relation still closes the balance of this vertical-sided lake:
    # total residual within 2 % of total inflow (analytic dV = A dh, common practice, no source)
    total_in = float(balance.daily["inflow_m3"].sum())
    assert abs(float(np.nansum(balance.daily["residual_m3"]))) < 0.02 * total_in
    assert main(["balance", str(site_path), "--draws", "20"]) == 0
    err = capsys.readouterr().err
    assert err.count("warning:") == 1
