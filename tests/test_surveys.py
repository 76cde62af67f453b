"""Repeat surveys interpolated in time (lakebalance.surveys), checked on an exact solid.

The basin is a frustum of a right circular cone, A(z) = π (r₀ + k z)², whose volume between two
levels is the frustum formula (any handbook of mensuration); the "frustum" integration of a survey
of it is exact. The deposit is a flat layer on the bed growing linearly in time (the usual
constant-rate assumption between resurveys; common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from lakebalance.balance import DailyTerms, close_daily
from lakebalance.storage import StorageCurve
from lakebalance.surveys import DatedStorage

R0, K, TOP = 50.0, 30.0, 12.0  # m, m/m, m


def area(z):
    return np.pi * (R0 + K * np.asarray(z, dtype=float)) ** 2


def exact_volume(z0, z1):
    """∫ A dz from z0 to z1 (m³): π/(3k) [(r₀ + k z₁)³ − (r₀ + k z₀)³]."""
    return np.pi / (3 * K) * ((R0 + K * z1) ** 3 - (R0 + K * z0) ** 3)


def survey(bed_m: float) -> StorageCurve:
    levels = np.r_[bed_m, np.arange(np.floor(bed_m / 0.5) + 1, TOP / 0.5 + 1) * 0.5]
    return StorageCurve.from_areas(levels, area(levels), base_volume_m3=0.0, below="clamp")


def test_mid_date_capacity_of_a_silting_cone_within_0_1_percent():
    """Two surveys ten years apart, a 0.8 m flat deposit between them: the interpolated capacity
    at the top on the mid date is within 0.1 % of the exact capacity above a 0.4 m deposit."""
    dated = DatedStorage(("2010-01-01", "2020-01-01"), (survey(0.0), survey(0.8)))
    assert dated.curves[0].volume(np.array([TOP]))[0] == pytest.approx(exact_volume(0, TOP))
    mid = "2015-01-01"  # 1826 of 3652 days
    exact = exact_volume(0.4, TOP)
    got = dated.capacity(TOP, mid)
    assert abs(got / exact - 1) < 1e-3
    lost = dated.capacity_lost(TOP)[0]
    assert lost["lost_m3"] == pytest.approx(exact_volume(0.0, 0.8), rel=1e-9)
    assert lost["lost_m3_per_year"] == pytest.approx(lost["lost_m3"] / (3652 / 365.25))
    assert "lost" in str(dated.summary())


def test_weights_hold_at_the_ends_and_sum_to_one():
    dated = DatedStorage(
        ("2010-01-01", "2012-01-01", "2016-01-01"), (survey(0.0), survey(0.2), survey(0.6))
    )
    w = dated.weights(pd.DatetimeIndex(["2009-05-01", "2011-01-01", "2014-01-01", "2030-01-01"]))
    assert w.sum(axis=1) == pytest.approx(1.0)
    assert w[0] == pytest.approx([1, 0, 0]) and w[-1] == pytest.approx([0, 0, 1])
    assert w[1, :2] == pytest.approx([0.5, 0.5], abs=2e-3)
    with pytest.raises(ValueError, match="increasing"):
        DatedStorage(("2012-01-01", "2010-01-01"), (survey(0.0), survey(0.2)))


def test_balance_does_not_read_silting_as_a_storage_change():
    """At a constant stage the storage change is zero on every day with each day's relation,
    although the storage at that stage falls as the basin fills (analytic: dV = 0 at fixed h)."""
    dated = DatedStorage(("2010-01-01", "2020-01-01"), (survey(0.0), survey(0.8)))
    idx = pd.date_range("2012-01-01", periods=400, freq="D", name="date")
    terms = DailyTerms(stage_m=pd.Series(8.0, index=idx))
    b = close_daily(terms, volume_fn=dated.volume_relation(), area_fn=dated.area_relation())
    d = b.daily
    assert np.nanmax(np.abs(d["storage_change_m3"].to_numpy())) < 1e-6
    storage = d["storage_m3"].to_numpy()
    assert storage[-1] < storage[0]  # the capacity at 8 m shrank
    expected = dated.volume(np.array([8.0]), [idx[-1]])[0]
    assert storage[-1] == pytest.approx(expected)


def test_lake_with_a_second_survey(tmp_path):
    """Through the analysis object: a simulated lake (tests/lakefamilies.py) resurveyed a year in
    with 0.5 m of flat deposit on the bed. Above the new bed the areas are unchanged, so the daily
    storage change is the same as with one survey (dV/dh = A), while the storage at a stage is
    lower by what the sediment took, in proportion to the time since the first survey."""
    from lakefamilies import simulate

    from lakebalance.analysis import open_site

    sim = simulate("flow_through", 4, tmp_path, [], years=2)
    table = pd.read_csv(tmp_path / "storage.csv")
    later = table[table["stage"] >= 0.5]
    later.to_csv(tmp_path / "storage_2003.csv", index=False)
    text = sim.site_file.read_text(encoding="utf-8").replace("draws = 200", "draws = 0")
    one = open_site(sim.site_file, draws=0).balance.daily
    text = text.replace("[storage]\n", "[storage]\ndate = 2001-10-01\n", 1)
    text += '\n[[storage.survey]]\ndate = 2002-10-01\nfile = "storage_2003.csv"\n'
    sim.site_file.write_text(text, encoding="utf-8")
    lake = open_site(sim.site_file, draws=0)
    assert lake.surveys is not None and lake.surveys.dates == ("2001-10-01", "2002-10-01")
    assert lake.storage is lake.surveys.latest
    two = lake.balance.daily
    dv1, dv2 = one["storage_change_m3"], two["storage_change_m3"]
    ok = dv1.notna() & dv2.notna()
    assert np.allclose(dv1[ok], dv2[ok], rtol=1e-9, atol=1e-3)
    lost = float(lake.surveys.curves[0].volume(np.array([0.5]))[0])
    gap = (one["storage_m3"] - two["storage_m3"]).dropna()
    assert gap.iloc[-1] == pytest.approx(lost, rel=1e-6)  # after the second survey: all of it
    assert gap.loc["2002-04-01"] == pytest.approx(lost * 182 / 365, rel=1e-6)
    assert any("surveys" in n for n in lake.balance.notes)


def test_first_page_states_the_capacity_lost():
    """The report's first page states the capacity lost between the last two surveys at the
    spill level (the cone of the tests above: exact frustum volume of the deposit)."""
    from types import SimpleNamespace

    from lakebalance.report.headline import survey_sentence

    dated = DatedStorage(("2010-01-01", "2020-01-01"), (survey(0.0), survey(0.8)))
    run = SimpleNamespace(
        get=lambda step: dated if step == "surveys" else None,
        site=SimpleNamespace(levels={"spill": 11.0}),
    )
    text, numbers = survey_sentence(run)
    lost = exact_volume(0.0, 0.8)
    assert numbers["capacity_lost_m3"] == pytest.approx(lost, abs=1.0)
    assert f"{lost:,.0f} m³ less below the spill level (11.00 m)" in text
