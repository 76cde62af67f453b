"""Declared periods ([[period]]): ice outflow estimated as declared, offset periods sized and
removed, those days marked estimated. Simulated lakes of tests/lakefamilies.py (analytic truth:
the planted offset is known)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from lakefamilies import Fault, simulate

from lakebalance.analysis import open_site
from lakebalance.errors import ConfigError
from lakebalance.periods import Period, days_of, offset_from_steps, period_outflow


def test_period_outflow_interpolates_and_scales():
    """Interpolation is linear between the open-water neighbours; a fraction scales the rating
    (common practice, no source: the two usual estimates of discharge under ice)."""
    q = np.array([10.0, 10.0, 50.0, 50.0, 50.0, 20.0])
    mask = np.array([False, False, True, True, True, False])
    assert period_outflow(q, mask, "interpolate") == pytest.approx([10, 10, 12.5, 15, 17.5, 20])
    assert period_outflow(q, mask, "fraction", 0.5) == pytest.approx([10, 10, 25, 25, 25, 20])
    assert period_outflow(q, mask, "rating") == pytest.approx(q)
    edge = period_outflow(q, np.array([True, True, False, False, False, False]), "interpolate")
    assert edge[:2] == pytest.approx([50.0, 50.0])  # held flat at the record's start


def test_offset_from_steps_recovers_a_planted_offset():
    """A +40 mm offset on a smoothly falling record is sized from its two end steps."""
    h = 10.0 - 0.004 * np.arange(100)
    mask = (np.arange(100) >= 30) & (np.arange(100) < 60)
    assert offset_from_steps(h + 0.04 * mask, mask) == pytest.approx(0.04, abs=1e-9)


def test_period_validation():
    with pytest.raises(ValueError, match="fraction"):
        Period("ice", "2023-01-01", "2023-02-01", outflow="fraction")
    with pytest.raises(ValueError, match="before"):
        Period("offset", "2023-03-01", "2023-02-01")
    with pytest.raises(ValueError, match="ice period carries no stage offset"):
        Period("ice", "2023-01-01", "2023-02-01", offset=0.01)
    p = Period("ice", "2023-01-30", "2023-02-02")
    idx = pd.date_range("2023-01-28", periods=8, freq="D")
    assert days_of(p, idx).tolist() == [False, False, True, True, True, True, False, False]


def _lake(tmp_path, extra: str, faults=()):
    sim = simulate("flow_through", 11, tmp_path, faults, years=2)
    text = sim.site_file.read_text(encoding="utf-8")
    text = text.replace("draws = 200", "draws = 0")
    sim.site_file.write_text(text + "\n" + extra, encoding="utf-8")
    return sim, open_site(sim.site_file, draws=0)


def test_offset_period_removed_and_graded(tmp_path):
    """A planted 60 mm offset over 40 days, declared as an offset period, is sized from its end
    steps (within 5 mm: the day-to-day noise of the simulated logger), removed, and its days
    marked estimated with the method."""
    fault = Fault("offset_period", "2002-05-01", 40, 0.06)
    extra = '[[period]]\nkind = "offset"\nstart = 2002-05-01\nend = 2002-06-09\n'
    sim, lake = _lake(tmp_path, extra, [fault])
    rec = lake.records
    truth = pd.Series(sim.truth["stage_true_m"], index=sim.truth["dates"])
    inside = (rec.daily.index >= "2002-05-01") & (rec.daily.index <= "2002-06-09")
    err = (rec.daily["stage"] - truth.reindex(rec.daily.index))[inside]
    assert abs(float(err.mean())) < 0.005
    assert rec.estimated is not None
    assert (rec.estimated["stage"][inside] != "").all()
    assert (rec.estimated["stage"][~inside] == "").all()
    assert any(f.kind == "offset_period" for f in rec.findings)


def test_ice_period_outflow_fraction(tmp_path):
    """Outflow on ice days is the declared fraction of the open-water rating."""
    extra = (
        '[[period]]\nkind = "ice"\nstart = 2002-01-10\nend = 2002-02-10\n'
        'outflow = "fraction"\nfraction = 0.5\n'
    )
    sim, lake = _lake(tmp_path, extra)
    plain = open_site(sim.site_file, draws=0)
    object.__setattr__(plain.site, "period", ())
    ice = lake.balance.daily
    open_water = plain.balance.daily
    days = (ice.index >= "2002-01-10") & (ice.index <= "2002-02-10")
    assert ice["outflow_m3"][days].to_numpy() == pytest.approx(
        0.5 * open_water["outflow_m3"][days].to_numpy()
    )
    assert ice["outflow_m3"][~days].to_numpy() == pytest.approx(
        open_water["outflow_m3"][~days].to_numpy(), nan_ok=True
    )
    # the residual changes by the outflow taken off and by the evaporation, which under the
    # declared ice is the sublimation rate (the same declaration serves both terms)
    diff = (ice["residual_m3"] - open_water["residual_m3"])[days]
    d_evap = (ice["evaporation_m3"] - open_water["evaporation_m3"])[days]
    assert diff.to_numpy() == pytest.approx(
        -0.5 * open_water["outflow_m3"][days].to_numpy() + d_evap.to_numpy()
    )
    assert any("ice" in n for n in lake.balance.notes)


def test_period_naming_an_unknown_series(tmp_path):
    extra = '[[period]]\nkind = "offset"\nseries = "stages"\nstart = 2002-05-01\nend = 2002-05-09\n'
    with pytest.raises(ConfigError, match="names series 'stages'.*'stage'"):
        _lake(tmp_path, extra)


def test_offset_period_sized_from_the_field_checks_inside_it():
    """With field checks inside an offset period, the offset is their mean logger − check
    difference, removed from the period's days only (analytic)."""
    from lakebalance.periods import correct_offset_periods

    idx = pd.date_range("2022-01-01", periods=60, freq="D")
    truth = np.linspace(5.0, 5.3, 60)
    logger = truth + np.where((np.arange(60) >= 20) & (np.arange(60) < 40), 0.035, 0.0)
    p = Period("fouled", "2022-01-21", "2022-02-09")
    times = pd.DatetimeIndex(["2022-01-10 10:00", "2022-01-25 10:00", "2022-02-05 10:00"])
    diffs = np.array([0.001, 0.036, 0.034])  # logger − check at each visit (m)
    stage, method, applied = correct_offset_periods(logger, idx, [p], times, diffs)
    assert applied[0][1] == pytest.approx(0.035)
    assert "2 field checks" in applied[0][2]
    np.testing.assert_allclose(stage, truth, atol=1e-12)
    assert (method[20:40] != "").all() and (method[:20] == "").all() and (method[40:] == "").all()


def test_subdaily_outflow_applies_each_days_rating():
    """Sub-daily readings on two days with different ratings: each day's volume is its own
    rating's (an object with on_days, as dated ratings are; analytic: constant stage)."""
    from lakebalance.balance import subdaily_outflow_m3

    class TwoRatings:
        def __call__(self, h):
            return 2.0 * np.asarray(h)

        def on_days(self, h, days):
            factor = np.where(pd.DatetimeIndex(days) >= pd.Timestamp("2022-03-02"), 2.0, 1.0)
            return factor * np.asarray(h)

    times = pd.date_range("2022-03-01", "2022-03-03", freq="15min", inclusive="left")
    readings = pd.Series(1.5, index=times)
    days = pd.date_range("2022-03-01", periods=2, freq="D")
    out = subdaily_outflow_m3(readings, days, TwoRatings())
    assert out == pytest.approx([1.5 * 86400.0, 3.0 * 86400.0])


def test_ice_outflow_error_widens_the_bands(tmp_path):
    """The estimated outflow's error (outflow_error, 1 σ relative) widens the residual's band on
    the ice days only."""
    extra = (
        '[[period]]\nkind = "ice"\nstart = 2002-01-10\nend = 2002-02-10\n'
        'outflow = "fraction"\nfraction = 0.5\noutflow_error = 0.4\n'
    )
    sim, _ = _lake(tmp_path, extra)
    wide = open_site(sim.site_file, draws=200).balance.daily
    text = sim.site_file.read_text(encoding="utf-8").replace(
        "outflow_error = 0.4", "outflow_error = 0.0"
    )
    sim.site_file.write_text(text, encoding="utf-8")
    narrow = open_site(sim.site_file, draws=200).balance.daily
    width = lambda d: (d["residual_p95_m3"] - d["residual_p05_m3"]).to_numpy()  # noqa: E731
    days = (wide.index >= "2002-01-10") & (wide.index <= "2002-02-10")
    assert np.all(width(wide)[days] > width(narrow)[days])
    expected = 0.4 * np.abs(wide["outflow_m3"].to_numpy()[days])
    assert wide["outflow_estimate_sd_m3"].to_numpy()[days] == pytest.approx(expected)
