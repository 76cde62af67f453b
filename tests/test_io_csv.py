"""Gauge series from crafted text files through the public API (load_site + load_records).

Expected daily values are computed by hand from the crafted readings (the arithmetic is in each
test); unit factors are exact SI prefixes or NIST SP 811 factors.
"""

from __future__ import annotations

import textwrap

import numpy as np
import pandas as pd
import pytest

import lakebalance as lb
from lakebalance.errors import ConfigError, InputError, UnitError


def site(tmp_path, body: str, timezone: str = "UTC"):
    text = f'[site]\nname = "Invented Pond"\ntimezone = "{timezone}"\n\n' + textwrap.dedent(body)
    p = tmp_path / "site.toml"
    p.write_text(text, encoding="utf-8")
    return lb.load_site(p)


def records(tmp_path, body, **kw):
    return lb.Lake(site(tmp_path, body, **kw)).records


def kinds(rec, key=None):
    return [f.kind for f in rec.findings if key is None or f.series == key]


def test_daily_flow_in_megalitres_per_day(tmp_path, write):
    write("q.csv", "Date,Flow (ML/d)\n2021-01-01,86.4\n2021-01-02,172.8\n")
    rec = records(
        tmp_path,
        """
        [series.inflow]
        file = "q.csv"
        date = "Date"
        value = "Flow (ML/d)"
        units = "ML/d"
        """,
    )
    # 86.4 ML/d = 86 400 m³ / 86 400 s = 1 m³/s
    np.testing.assert_allclose(rec.daily["inflow"], [1.0, 2.0], rtol=1e-12)
    assert rec.daily.index.name == "date"
    assert rec.daily.index.tz is None
    assert rec.accounting[0].read == 2 == rec.accounting[0].used


def test_day_first_and_declared_format(tmp_path, write):
    write("a.csv", "day,v\n03/04/2021,1\n04/04/2021,2\n")
    write("b.csv", "day,v\n2021.04.03 09h,5\n2021.04.04 09h,6\n")
    rec = records(
        tmp_path,
        """
        [[series.inflow]]
        name = "a"
        file = "a.csv"
        date = "day"
        value = "v"
        units = "m3/s"
        dayfirst = true

        [[series.inflow]]
        name = "b"
        file = "b.csv"
        date = "day"
        value = "v"
        units = "m3/s"
        format = "%Y.%m.%d %Hh"
        """,
    )
    assert rec.daily.index[0] == pd.Timestamp("2021-04-03")
    assert rec.daily.loc["2021-04-04", "inflow:a"] == 2.0
    assert rec.daily.loc["2021-04-04", "inflow:b"] == 6.0
    # several series of one role stay separate and total() sums them
    assert rec.total("inflow").loc["2021-04-03"] == 6.0


def test_separate_time_column(tmp_path, write):
    write(
        "s.csv",
        "d,t,h\n2021-05-01,00:00,1.0\n2021-05-01,12:00,3.0\n2021-05-02,00:00,5\n2021-05-02,12:00,7\n",
    )
    rec = records(
        tmp_path,
        """
        [series.stage]
        file = "s.csv"
        date = "d"
        time = "t"
        value = "h"
        units = "m"
        """,
    )
    np.testing.assert_allclose(rec.daily["stage"], [2.0, 6.0])
    assert rec.subdaily_stage is not None and len(rec.subdaily_stage) == 4


def test_zone_aware_timestamps_go_to_the_site_day(tmp_path, write):
    # 23:30 UTC is 00:30 the next day at UTC+1 (Etc/GMT-1 is UTC+1 by the POSIX sign convention)
    write(
        "s.csv", "date,h\n2021-01-01T11:30:00Z,1\n2021-01-01T23:30:00Z,3\n2021-01-02T11:30:00Z,5\n"
    )
    rec = records(
        tmp_path,
        """
        [series.stage]
        file = "s.csv"
        value = "h"
        units = "m"
        coverage = 0.0
        """,
        timezone="Etc/GMT-1",
    )
    assert rec.daily.loc["2021-01-01", "stage"] == 1.0
    assert rec.daily.loc["2021-01-02", "stage"] == 4.0


def test_naive_timestamps_in_a_source_zone(tmp_path, write):
    write("w.csv", "time,u\n2021-01-01 21:00,10\n2021-01-01 22:00,10\n2021-01-01 23:00,20\n")
    rec = records(
        tmp_path,
        """
        [series.wind]
        file = "w.csv"
        date = "time"
        value = "u"
        units = "m/s"
        source_timezone = "UTC"
        coverage = 0.0
        """,
        timezone="Etc/GMT-2",
    )
    # UTC+2: 21:00 and 22:00 UTC are 23:00 and 00:00 local; 23:00 UTC is 01:00 local
    assert rec.daily.loc["2021-01-01", "wind"] == 10.0
    assert rec.daily.loc["2021-01-02", "wind"] == 15.0


def test_unparsed_dates_are_findings_with_file_lines(tmp_path, write):
    p = write("r.csv", "date,mm\n2021-01-01,1\nnot a date,2\n2021-01-03,3\n")
    rec = records(
        tmp_path,
        """
        [series.rain]
        file = "r.csv"
        value = "mm"
        units = "mm"
        """,
    )
    f = [f for f in rec.findings if f.kind == "unparsed_date"][0]
    assert f.count == 1 and f.action == "rejected"
    assert f"{p}:3" in f.detail
    acc = rec.accounting[0]
    assert (acc.read, acc.used, acc.rejected) == (3, 2, 1)


def test_no_date_parses_is_an_input_error(tmp_path, write):
    write("r.csv", "date,mm\nmonday,1\ntuesday,2\n")
    with pytest.raises(InputError, match="no date parses") as err:
        records(tmp_path, '[series.rain]\nfile = "r.csv"\nvalue = "mm"\nunits = "mm"\n')
    assert err.value.line == 2 and err.value.column == 1


def test_tokens_are_counted_by_token(tmp_path, write):
    write(
        "p.csv",
        "date;pan\n2021-01-01;1,5\n2021-01-02;ICE\n2021-01-03;n/a\n2021-01-04;ICE\n2021-01-05;<0,01\n2021-01-06;2,5\n",
    )
    rec = records(
        tmp_path,
        """
        [series.pan]
        file = "p.csv"
        value = "pan"
        units = "mm"
        decimal = ","
        """,
    )
    tokens = {f.detail: f.count for f in rec.findings if f.kind == "non_numeric"}
    assert tokens == {"token 'ICE'": 2, "token 'n/a'": 1, "token '<0,01'": 1}
    ice = [f for f in rec.findings if f.detail == "token 'ICE'"][0]
    assert (ice.first, ice.last) == ("2021-01-02", "2021-01-04")
    np.testing.assert_allclose(rec.daily["pan"].dropna(), [0.0015, 0.0025])
    assert rec.accounting[0].rejected == 4


def test_duplicates_equal_merged_conflicting_set_missing(tmp_path, write):
    write(
        "s.csv",
        "date,h\n2021-01-01,1.0\n2021-01-01,1.0\n2021-01-02,2.0\n2021-01-02,2.5\n2021-01-03,3\n",
    )
    rec = records(tmp_path, '[series.stage]\nfile = "s.csv"\nvalue = "h"\nunits = "m"\n')
    assert rec.daily.loc["2021-01-01", "stage"] == 1.0
    assert np.isnan(rec.daily.loc["2021-01-02", "stage"])  # neither value chosen
    dup = [f for f in rec.findings if f.kind == "duplicate"][0]
    con = [f for f in rec.findings if f.kind == "conflicting_duplicate"][0]
    assert (dup.count, dup.action) == (1, "merged")
    assert (con.first, con.count, con.action) == ("2021-01-02", 1, "set missing")
    acc = rec.accounting[0]
    assert (acc.read, acc.used, acc.flagged, acc.rejected) == (5, 3, 0, 2)


def test_out_of_order_rows_are_sorted_and_reported(tmp_path, write):
    write("s.csv", "date,h\n2021-01-03,3\n2021-01-01,1\n2021-01-02,2\n")
    rec = records(tmp_path, '[series.stage]\nfile = "s.csv"\nvalue = "h"\nunits = "m"\n')
    assert rec.daily["stage"].tolist() == [1.0, 2.0, 3.0]
    f = [f for f in rec.findings if f.kind == "out_of_order"][0]
    assert f.count == 2 and f.action == "sorted"


def test_negative_flows_are_rejected(tmp_path, write):
    write("q.csv", "date,q\n2021-01-01,1\n2021-01-02,-0.5\n2021-01-03,2\n")
    rec = records(tmp_path, '[series.inflow]\nfile = "q.csv"\nvalue = "q"\nunits = "m3/s"\n')
    assert np.isnan(rec.daily.loc["2021-01-02", "inflow"])
    f = [f for f in rec.findings if f.kind == "negative"][0]
    assert (f.first, f.count, f.action) == ("2021-01-02", 1, "rejected")


def test_stage_may_be_negative_on_its_datum(tmp_path, write):
    write("s.csv", "date,h\n2021-01-01,-0.25\n2021-01-02,-0.20\n")
    rec = records(tmp_path, '[series.stage]\nfile = "s.csv"\nvalue = "h"\nunits = "m"\n')
    assert rec.daily["stage"].tolist() == [-0.25, -0.20]


def _quarter_hours(day: str, n: int = 96) -> pd.DatetimeIndex:
    return pd.date_range(day, periods=n, freq="15min")


def test_subdaily_stage_mean_and_coverage_rule(tmp_path):
    full = _quarter_hours("2021-06-01")
    partial = _quarter_hours("2021-06-02", 70)  # 70/96 = 0.73 < 0.8
    enough = _quarter_hours("2021-06-03", 80)  # 80/96 = 0.83
    t = full.append(partial).append(enough)
    h = np.concatenate([np.full(96, 2.0), np.full(70, 3.0), np.linspace(4.0, 5.0, 80)])
    pd.DataFrame({"date": t.strftime("%Y-%m-%d %H:%M"), "h": h}).to_csv(
        tmp_path / "s.csv", index=False
    )
    rec = records(tmp_path, '[series.stage]\nfile = "s.csv"\nvalue = "h"\nunits = "cm"\n')
    assert rec.daily.loc["2021-06-01", "stage"] == pytest.approx(0.02)
    assert np.isnan(rec.daily.loc["2021-06-02", "stage"])
    assert rec.daily.loc["2021-06-03", "stage"] == pytest.approx(0.045)  # mean of 4..5 cm
    low = [f for f in rec.findings if f.kind == "low_coverage"][0]
    assert (low.first, low.last, low.count, low.action) == (
        "2021-06-02",
        "2021-06-02",
        1,
        "set missing",
    )
    acc = rec.accounting[0]
    assert acc.rejected == 70 and acc.read == 246


def test_subdaily_rain_is_summed_and_tmax_is_a_maximum(tmp_path):
    t = pd.date_range("2021-07-01", periods=48, freq="h")
    rain = np.where(np.arange(48) % 6 == 0, 0.5, 0.0)  # 4 readings of 0.5 mm a day
    temp = 10 + 10 * np.sin(np.arange(48) / 24 * 2 * np.pi)
    stamps = t.strftime("%Y-%m-%dT%H:%M")
    pd.DataFrame({"date": stamps, "mm": rain, "c": temp}).to_csv(tmp_path / "w.csv", index=False)
    rec = records(
        tmp_path,
        """
        [series.rain]
        file = "w.csv"
        value = "mm"
        units = "mm"

        [series.tmax]
        file = "w.csv"
        value = "c"
        units = "degC"
        """,
    )
    np.testing.assert_allclose(rec.daily["rain"], [0.002, 0.002])  # 4 x 0.5 mm = 2 mm
    np.testing.assert_allclose(rec.daily["tmax"], temp[:24].max())
    assert {s.key: s.statistic for s in rec.series} == {"rain": "sum", "tmax": "max"}


def test_metered_volumes_per_reading_become_a_daily_mean_flow(tmp_path):
    t = pd.date_range("2021-07-01", periods=8, freq="6h")
    pd.DataFrame({"date": t.strftime("%Y-%m-%d %H:%M"), "v": [2160.0] * 8}).to_csv(
        tmp_path / "m.csv", index=False
    )
    rec = records(tmp_path, '[series.withdrawal]\nfile = "m.csv"\nvalue = "v"\nunits = "m3"\n')
    # 4 x 2160 m³ = 8640 m³ in 86 400 s = 0.1 m³/s
    np.testing.assert_allclose(rec.daily["withdrawal"], [0.1, 0.1], rtol=1e-12)


def test_statistic_other_than_sum_for_an_amount_is_a_config_error(tmp_path, write):
    write("r.csv", "date,mm\n2021-01-01,1\n")
    with pytest.raises(ConfigError, match="amount per reading"):
        records(
            tmp_path,
            '[series.rain]\nfile = "r.csv"\nvalue = "mm"\nunits = "mm"\nstatistic = "mean"\n',
        )


def test_wrong_unit_names_the_site_file_line(tmp_path, write):
    write("q.csv", "date,q\n2021-01-01,1\n")
    with pytest.raises(UnitError, match="not a flow") as err:
        records(tmp_path, '[series.inflow]\nfile = "q.csv"\nvalue = "q"\nunits = "mm"\n')
    assert err.value.file.endswith("site.toml") and err.value.line == 8


def test_gap_and_flatline_on_daily_stage(tmp_path, write):
    days = pd.date_range("2021-01-01", periods=40)
    h = 10 + 0.01 * np.sin(np.arange(40))
    h[20:32] = h[19]  # stuck: 12 repeats of day 19's value (13 identical values)
    keep = np.ones(40, bool)
    keep[5:8] = False  # 3 days without rows
    pd.DataFrame({"date": days[keep].strftime("%Y-%m-%d"), "h": h[keep]}).to_csv(
        tmp_path / "s.csv", index=False
    )
    rec = records(tmp_path, '[series.stage]\nfile = "s.csv"\nvalue = "h"\nunits = "m"\n')
    gap = [f for f in rec.findings if f.kind == "gap"][0]
    assert (gap.first, gap.last, gap.count) == ("2021-01-06", "2021-01-08", 3)
    flat = [f for f in rec.findings if f.kind == "flatline"][0]
    assert (flat.first, flat.last, flat.count) == ("2021-01-21", "2021-02-01", 12)
    assert rec.flags["stage"].sum() == 12
    acc = rec.accounting[0]
    assert acc.flagged == 12 and acc.read == 37 == acc.used + acc.flagged + acc.rejected
    assert rec.series[0].missing == 3


def test_flat_zero_rain_is_not_a_flatline(tmp_path, write):
    days = pd.date_range("2021-01-01", periods=30).strftime("%Y-%m-%d")
    pd.DataFrame({"date": days, "mm": 0.0}).to_csv(tmp_path / "r.csv", index=False)
    rec = records(tmp_path, '[series.rain]\nfile = "r.csv"\nvalue = "mm"\nunits = "mm"\n')
    assert "flatline" not in kinds(rec)


def test_stage_in_cm_declared_as_m_is_implausible(tmp_path):
    days = pd.date_range("2021-01-01", periods=60)
    h_cm = 1000 + 300 * np.sin(np.arange(60) / 5)
    pd.DataFrame({"date": days.strftime("%Y-%m-%d"), "h": h_cm}).to_csv(
        tmp_path / "s.csv", index=False
    )
    rec = records(tmp_path, '[series.stage]\nfile = "s.csv"\nvalue = "h"\nunits = "m"\n')
    f = [f for f in rec.findings if f.kind == "implausible_units"][0]
    assert "declared 'm'" in f.detail


def test_spike_on_daily_stage_flagged_or_removed(tmp_path):
    days = pd.date_range("2021-01-01", periods=60)
    h = 10 + 0.002 * np.arange(60) + 0.001 * np.sin(np.arange(60))
    h[30] += 0.5
    pd.DataFrame({"date": days.strftime("%Y-%m-%d"), "h": h}).to_csv(
        tmp_path / "s.csv", index=False
    )
    body = '[series.stage]\nfile = "s.csv"\nvalue = "h"\nunits = "m"\n'
    rec = records(tmp_path, body)
    spike = [f for f in rec.findings if f.kind == "spike"]
    assert [(f.first, f.action) for f in spike] == [("2021-01-31", "kept, flagged")]
    assert rec.flags.loc["2021-01-31", "stage"]
    assert rec.daily.loc["2021-01-31", "stage"] == pytest.approx(h[30])
    rec2 = records(tmp_path, body + '\n[qa]\nspikes = "remove"\n')
    assert np.isnan(rec2.daily.loc["2021-01-31", "stage"])
    assert rec2.accounting[0].rejected == 1


def test_correction_offsets_are_applied_and_recorded(tmp_path, write):
    write("s.csv", "date,h\n2021-01-01,1\n2021-01-02,1\n2021-01-03,1.08\n2021-01-04,1.08\n")
    rec = records(
        tmp_path,
        """
        [series.stage]
        file = "s.csv"
        value = "h"
        units = "m"

        [[correction]]
        series = "stage"
        start = "2021-01-03"
        value = -0.08
        reason = "gauge board reset"
        """,
    )
    np.testing.assert_allclose(rec.daily["stage"], [1.0, 1.0, 1.0, 1.0])
    f = [f for f in rec.findings if f.kind == "correction"][0]
    assert (f.first, f.last, f.count, f.action) == ("2021-01-03", "2021-01-04", 2, "applied")
    assert "gauge board reset" in f.detail


def test_correction_of_an_unknown_series(tmp_path, write):
    write("s.csv", "date,h\n2021-01-01,1\n")
    with pytest.raises(ConfigError, match="did you mean 'stage'"):
        records(
            tmp_path,
            '[series.stage]\nfile = "s.csv"\nvalue = "h"\nunits = "m"\n\n'
            '[[correction]]\nseries = "stag"\nstart = "2021-01-01"\nvalue = 0.1\n',
        )


def test_union_index_keeps_missing_days_nan(tmp_path, write):
    write("a.csv", "date,h\n2021-01-01,1\n2021-01-02,1\n")
    write("b.csv", "date,mm\n2021-01-02,1\n2021-01-04,1\n")
    rec = records(
        tmp_path,
        '[series.stage]\nfile = "a.csv"\nvalue = "h"\nunits = "m"\n\n'
        '[series.rain]\nfile = "b.csv"\nvalue = "mm"\nunits = "mm"\n',
    )
    assert list(rec.daily.index.strftime("%d")) == ["01", "02", "03", "04"]
    assert rec.daily["rain"].isna().tolist() == [True, False, True, False]
    assert rec.flags.shape == rec.daily.shape


def test_large_file_fast_path_matches_the_c_parser(tmp_path):
    """Arrow reads files above 1 MB; its cells must equal pandas' C parser's."""
    from lakebalance.io._text import read_text_table

    n = 60_000
    t = pd.date_range("2000-01-01", periods=n, freq="15min")
    v = np.round(np.random.default_rng(3).normal(5, 1, n), 4)
    p = tmp_path / "big.csv"
    pd.DataFrame({"date": np.datetime_as_string(t.to_numpy(), unit="m"), "h": v}).to_csv(
        p, index=False
    )
    assert p.stat().st_size > 1_000_000
    table = read_text_table(p, {"date": "date", "value": "h"}, what="x", iso_columns=("date",))
    ref = pd.read_csv(p)
    np.testing.assert_array_equal(table.frame["value"].to_numpy(), ref["h"].to_numpy())
    assert (pd.DatetimeIndex(table.frame["date"]) == pd.DatetimeIndex(ref["date"])).all()
    assert table.lines[0] == 2 and table.lines[-1] == n + 1
