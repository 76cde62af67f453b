"""The simulated lake families (tests/lakefamilies.py) are usable as a user's records: each is
read, rated and closed by the tool, and its truth is what the balance leaves unexplained within
the error model's band (the calibration studies in validation/ measure how often)."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from lakefamilies import FAMILIES, Fault, plant, seepage_m3s, simulate

import lakebalance as lb


@pytest.mark.parametrize("name", sorted(FAMILIES))
def test_each_family_closes_to_its_truth(tmp_path, name):
    sim = simulate(name, 7, tmp_path / name, years=2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        lake = lb.open_site(sim.site_file, draws=50)
        balance = lake.balance
    d = balance.daily
    ok = d["complete"].to_numpy()
    assert ok.mean() > 0.95
    true_loss = seepage_m3s(sim.family, sim.truth["stage_true_m"]) * 86400.0
    true_loss = pd.Series(true_loss, index=sim.truth["dates"]).reindex(d.index).to_numpy()
    w = ok.astype(float)
    z = (np.nansum(d["residual_m3"].to_numpy() * w) + np.nansum(true_loss * w)) / (
        balance.error_model.sd_of_sum(w)
    )
    assert abs(z) < 3.5  # one seeded lake; the rate of |z| < 1.96 is the validation study's
    if sim.family.outlet != "none":
        assert lake.rating is not None
    if sim.family.units == "US":
        assert lake.records.subdaily_stage is not None


def test_planted_faults_are_in_the_records(tmp_path):
    rng = np.random.default_rng(3)
    faults = plant("seepage", rng, ["spike", "datum_shift"], {"spike": 0.2, "datum_shift": 0.05},
                   years=3)  # fmt: skip
    sim = simulate("seepage", 3, tmp_path / "s", faults, years=3)
    stage = pd.read_csv(tmp_path / "s" / "stage.csv", index_col=0, parse_dates=True)["value"]
    true = pd.Series(sim.truth["stage_true_m"], index=sim.truth["dates"])
    error = stage - true
    spike, shift = faults
    assert error.loc[spike.start] == pytest.approx(0.2, abs=0.01)
    after = error.loc[pd.Timestamp(shift.start) + pd.Timedelta(days=5) :]
    before = error.loc[: pd.Timestamp(shift.start) - pd.Timedelta(days=5)].drop(spike.start)
    assert after.median() - before.median() == pytest.approx(0.05, abs=0.003)
    assert isinstance(faults[0], Fault)
