"""Cumulative residual bands: consistent with the water-year bands drawn from the same draws."""

from __future__ import annotations

import numpy as np
import pytest

import lakebalance as lb


@pytest.fixture(scope="module")
def demo_balance():
    from conftest import DEMO

    site = lb.load_site(DEMO / "site.toml")
    return lb.Lake(site, draws=1000, seed=7).balance


def test_cumulative_band_ends_at_the_water_year_band(demo_balance):
    """The band of the residual summed over a water year, read on its last day, is the water-year
    band (same draws; nearest-rank against interpolated quantiles: within 3 % of the band width, the spacing of tail order statistics).
    Common practice, no source: a band of a sum comes from the draws of the sum, not from summing
    daily bands."""
    from lakebalance.balance import water_year_of

    d = demo_balance.daily
    wy = demo_balance.water_years()
    keys = water_year_of(d.index, demo_balance.water_year_start)
    checked = 0
    for year in wy.index:
        days = d.index[keys == year]
        if wy.loc[year, "complete_days"] < 300:
            continue
        last = d.loc[days[-1]]
        width = wy.loc[year, "residual_p95_m3"] - wy.loc[year, "residual_p05_m3"]
        assert last["cumulative_residual_p05_m3"] == pytest.approx(
            wy.loc[year, "residual_p05_m3"], abs=0.03 * width
        )
        assert last["cumulative_residual_p95_m3"] == pytest.approx(
            wy.loc[year, "residual_p95_m3"], abs=0.03 * width
        )
        checked += 1
    assert checked >= 10


def test_cumulative_band_brackets_the_cumulative_residual(demo_balance):
    d = demo_balance.daily
    lo = d["cumulative_residual_p05_m3"].to_numpy()
    hi = d["cumulative_residual_p95_m3"].to_numpy()
    assert np.all(lo[np.isfinite(lo)] <= hi[np.isfinite(lo)])
    # the band widens through the year: wider at year end than after the first week
    assert np.nanmedian(hi - lo) > 0
