"""Gauge series from crafted .xlsx workbooks (datetime cells, text cells, sheets)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import openpyxl
import pytest

import lakebalance as lb
from lakebalance.errors import InputError


def workbook(path, rows, title="Meter readings"):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Notes"
    ws["A1"] = "readings are on the next sheet"
    ws2 = wb.create_sheet(title)
    for r in rows:
        ws2.append(r)
    wb.save(path)


def load(tmp_path, body):
    p = tmp_path / "site.toml"
    p.write_text('[site]\nname = "Invented Pond"\n\n' + body, encoding="utf-8")
    return lb.open_site(p).records


BODY = (
    '[series.withdrawal]\nfile = "m.xlsx"\nsheet = "Meter readings"\ndate = "Day"\n'
    'value = "Volume m3"\nunits = "m3"\n'
)


def test_datetime_cells_and_daily_volumes(tmp_path):
    workbook(
        tmp_path / "m.xlsx",
        [["Day", "Volume m3"], [dt.datetime(2021, 1, 1), 8640.0], [dt.datetime(2021, 1, 2), 17280]],
    )
    rec = load(tmp_path, BODY)
    # 8640 m³ in a day of 86 400 s = 0.1 m³/s
    np.testing.assert_allclose(rec.daily["withdrawal"], [0.1, 0.2], rtol=1e-12)


def test_text_dates_and_tokens_in_cells(tmp_path):
    workbook(
        tmp_path / "m.xlsx",
        [
            ["Day", "Volume m3"],
            ["2021-01-01", 8640],
            ["2021-01-02", "meter fault"],
            ["2021-01-03", "8640"],
        ],
    )
    rec = load(tmp_path, BODY)
    assert np.isnan(rec.daily.loc["2021-01-02", "withdrawal"])
    f = [f for f in rec.findings if f.kind == "non_numeric"][0]
    assert (f.detail, f.first) == ("token 'meter fault'", "2021-01-02")
    assert rec.daily.loc["2021-01-03", "withdrawal"] == pytest.approx(0.1)


def test_unknown_sheet(tmp_path):
    workbook(
        tmp_path / "m.xlsx", [["Day", "Volume m3"], [dt.datetime(2021, 1, 1), 1.0]], title="Other"
    )
    with pytest.raises(InputError, match="no sheet 'Meter readings'"):
        load(tmp_path, BODY)


def test_header_only_sheet(tmp_path):
    workbook(tmp_path / "m.xlsx", [["Day", "Volume m3"]])
    with pytest.raises(InputError, match="no data rows") as err:
        load(tmp_path, BODY)
    assert err.value.line == 1
