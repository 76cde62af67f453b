"""Sub-daily records across a daylight-saving change (invented 15-minute stage logs).

Reference for the clock change: the IANA time zone database shipped with Python (zoneinfo /
tzdata), an independent library; Europe/Berlin leaves summer time at 03:00 CEST on 31 October
2021 and America/Denver at 02:00 MDT on 7 November 2021 (EU Directive 2000/84/EC; US Energy
Policy Act of 2005, both the usual last/first-Sunday rules).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import lakebalance as lb

SITE = """[site]
name = "Clock Pond (invented)"
timezone = "{zone}"

[series.stage]
file = "stage.csv"
date = "time"
units = "m"
{extra}
"""


def _write(tmp_path, stamps: list[str], values: np.ndarray, zone: str, extra: str = ""):
    pd.DataFrame({"time": stamps, "value": values}).to_csv(tmp_path / "stage.csv", index=False)
    (tmp_path / "site.toml").write_text(SITE.format(zone=zone, extra=extra))
    return lb.open_site(tmp_path / "site.toml").records


def _kinds(records):
    return {f.kind for f in records.findings}


def test_offset_stamps_over_the_autumn_change_are_not_duplicates(tmp_path):
    """Stamps with their UTC offset: 02:15+02:00 and 02:15+01:00 are an hour apart."""
    t = pd.date_range(
        "2021-10-30", "2021-11-02", freq="15min", tz="Europe/Berlin", inclusive="left"
    )
    stamps = [s[:-2] + ":" + s[-2:] for s in t.strftime("%Y-%m-%dT%H:%M:%S%z")]
    values = 2.0 + 0.001 * np.arange(len(t))  # a steady rise: no two readings equal
    records = _write(tmp_path, stamps, values, "Europe/Berlin")
    assert not _kinds(records) & {"out_of_order", "duplicate", "conflicting_duplicate"}
    day = records.daily["stage"]
    # the 25-hour day keeps all of its 100 readings; its mean is the mean of those readings
    local = t.tz_localize(None)
    on_day = (local >= "2021-10-31") & (local < "2021-11-01")
    assert on_day.sum() == 100
    assert day.loc["2021-10-31"] == pytest.approx(values[on_day].mean(), abs=1e-12)


def test_utc_stamps_for_a_site_on_summer_time(tmp_path):
    t = pd.date_range("2021-10-30", "2021-11-02", freq="15min", tz="UTC", inclusive="left")
    values = 2.0 + 0.001 * np.arange(len(t))
    records = _write(
        tmp_path,
        list(t.strftime("%Y-%m-%d %H:%M")),
        values,
        "Europe/Berlin",
        'source_timezone = "UTC"',
    )
    assert not _kinds(records) & {"out_of_order", "duplicate", "conflicting_duplicate"}


def test_naive_local_wall_clock_repeating_its_autumn_hour_in_order(tmp_path):
    """A logger on local wall time writes 01:00-01:45 twice (Denver, 7 November 2021); in file
    order the two passes are told apart instead of being set missing as conflicts."""
    t = pd.date_range(
        "2021-11-06", "2021-11-09", freq="15min", tz="America/Denver", inclusive="left"
    )
    values = 3.0 + 0.001 * np.arange(len(t))
    records = _write(
        tmp_path, list(t.tz_localize(None).strftime("%Y-%m-%d %H:%M")), values, "America/Denver"
    )
    assert not _kinds(records) & {"out_of_order", "duplicate", "conflicting_duplicate"}
    local = t.tz_localize(None)
    on_day = (local >= "2021-11-07") & (local < "2021-11-08")
    assert records.daily["stage"].loc["2021-11-07"] == pytest.approx(values[on_day].mean())
