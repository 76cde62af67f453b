"""read_table: small strict tables (storage relations, gaugings) from crafted CSV and XLSX files.

Expected values are the crafted cells themselves; line and column numbers are counted by hand
in the crafted text (common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from lakebalance.errors import InputError
from lakebalance.io.tables import read_table

COLS = {"stage": "level", "area": "area"}


def test_comments_blank_lines_and_file_lines(write):
    p = write("t.csv", "# survey of an invented lake\nlevel,area\n\n1.0,10\n# note\n2.5,20\n")
    t = read_table(p, COLS, what="storage table")
    assert t["stage"].tolist() == [1.0, 2.5]
    assert t["area"].tolist() == [10.0, 20.0]
    assert t["_line"].tolist() == [4, 6]
    assert t["_line"].dtype.kind == "i"


def test_semicolon_and_decimal_comma_are_sniffed(write):
    p = write("t.csv", "level;area\n1,5;100,25\n2,0;200\n")
    t = read_table(p, COLS, what="storage table", decimal=",")
    np.testing.assert_allclose(t["stage"], [1.5, 2.0])
    np.testing.assert_allclose(t["area"], [100.25, 200.0])


def test_tab_delimited(write):
    p = write("t.txt", "level\tarea\n1\t2\n3\t4\n")
    assert read_table(p, COLS, what="t")["area"].tolist() == [2.0, 4.0]


def test_text_in_a_number_names_line_and_column(write):
    p = write("t.csv", "id,level,area\na,1,10\nb,2,ten\n")
    with pytest.raises(InputError) as err:
        read_table(p, COLS, what="storage table")
    e = err.value
    assert (e.line, e.column) == (3, 3)
    assert "'ten' is not a number" in e.message
    assert e.one_line().startswith(f"error: {p}:3:3: ")


def test_missing_column_suggests_the_nearest(write):
    p = write("t.csv", "level,aera\n1,2\n")
    with pytest.raises(InputError, match="did you mean 'aera'") as err:
        read_table(p, COLS, what="storage table")
    assert err.value.line == 1


def test_wrong_delimiter_declared_hints_at_the_right_one(write):
    p = write("t.csv", "level;area\n1;2\n")
    with pytest.raises(InputError, match="is the delimiter ';'"):
        read_table(p, COLS, what="t", delimiter=",")


def test_header_only_file(write):
    p = write("t.csv", "level,area\n")
    with pytest.raises(InputError, match="header but no data rows") as err:
        read_table(p, COLS, what="t")
    assert err.value.line == 1


def test_empty_file(write):
    p = write("t.csv", "")
    with pytest.raises(InputError, match="empty"):
        read_table(p, COLS, what="t")


def test_binary_file(tmp_path):
    p = tmp_path / "t.csv"
    p.write_bytes(bytes(range(256)) * 8)
    with pytest.raises(InputError, match="binary"):
        read_table(p, COLS, what="t")


def test_workbook_with_a_csv_suffix(tmp_path):
    p = tmp_path / "t.csv"
    pd.DataFrame({"level": [1.0], "area": [2.0]}).to_excel(tmp_path / "w.xlsx", index=False)
    p.write_bytes((tmp_path / "w.xlsx").read_bytes())
    with pytest.raises(InputError, match="xlsx"):
        read_table(p, COLS, what="t")


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="not found"):
        read_table(tmp_path / "nope.csv", COLS, what="t")


@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "utf-16"])
def test_encodings_are_sniffed(write, encoding):
    p = write("t.csv", "Höhe,Fläche\n1,2\n3,4\n", encoding=encoding)
    t = read_table(p, {"stage": "Höhe", "area": "Fläche"}, what="t")
    assert t["area"].tolist() == [2.0, 4.0]


def test_cp1252_is_read_when_declared_and_named_when_not(write):
    """Windows-1252 is not guessed (a UTF-8 file with one stray byte would be misread whole):
    undeclared, the first byte that is not UTF-8 is an error naming its line (issue 18)."""
    p = write("t.csv", "level,area\n1,2\nHöhe,Fläche\n", encoding="cp1252")
    with pytest.raises(InputError, match="0xf6 is not UTF-8.*encoding = 'cp1252'") as err:
        read_table(p, COLS, what="t")
    assert err.value.line == 3
    p = write("u.csv", "Höhe,Fläche\n1,2\n3,4\n", encoding="cp1252")
    t = read_table(p, {"stage": "Höhe", "area": "Fläche"}, what="t", encoding="cp1252")
    assert t["area"].tolist() == [2.0, 4.0]


def test_declared_encoding_that_does_not_fit_names_the_line(tmp_path):
    p = tmp_path / "t.csv"
    p.write_bytes(b"level,area\n1,2\n3,\xff\n")
    with pytest.raises(InputError, match="cannot be decoded") as err:
        read_table(p, COLS, what="t", encoding="utf-8")
    assert err.value.line == 3


def test_quoted_fields_with_delimiters_and_newlines(write):
    p = write("t.csv", 'note,level,area\n"a, b",1,2\n"two\nlines",3,4\n"x",5,6\n')
    t = read_table(p, COLS, what="t")
    assert t["stage"].tolist() == [1.0, 3.0, 5.0]
    assert t["_line"].tolist() == [2, 3, 5]


def test_column_by_number(write):
    p = write("t.csv", "a,b,c\n1,2,3\n")
    t = read_table(p, {"stage": "3"}, what="t")
    assert t["stage"].tolist() == [3.0]


def test_date_columns_day_first(write):
    p = write("g.csv", "date,stage,discharge\n03/04/2021,1.2,0.5\n13/04/2021,1.3,0.6\n")
    t = read_table(
        p,
        {"date": "date", "stage": "stage", "discharge": "discharge"},
        what="gaugings",
        dayfirst=True,
        date_columns=("date",),
    )
    assert list(t["date"]) == [pd.Timestamp("2021-04-03"), pd.Timestamp("2021-04-13")]


def test_a_bad_date_names_line_and_column(write):
    p = write("g.csv", "date,stage\n2021-04-03,1\nyesterday,2\n")
    with pytest.raises(InputError, match="'yesterday' is not a date") as err:
        read_table(p, {"date": "date", "stage": "stage"}, what="g", date_columns=("date",))
    assert (err.value.line, err.value.column) == (3, 1)


def test_rows_with_every_cell_empty_are_dropped_partial_rows_keep_nan(write):
    p = write("t.csv", "level,area\n1,2\n,\n3,\n")
    t = read_table(p, COLS, what="t")
    assert t["_line"].tolist() == [2, 4]
    assert np.isnan(t["area"].iloc[1])


def test_inf_is_not_a_number(write):
    p = write("t.csv", "level,area\n1,inf\n")
    with pytest.raises(InputError, match="not a number"):
        read_table(p, COLS, what="t")


# ---- Excel -------------------------------------------------------------------------------
def _workbook(path, rows, title="Survey"):
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = title
    for r, row in rows.items():
        for c, v in enumerate(row, start=1):
            ws.cell(row=r, column=c, value=v)
    wb.save(path)
    return path


def test_xlsx_rows_are_spreadsheet_rows(tmp_path):
    p = _workbook(
        tmp_path / "s.xlsx", {3: ["level", "area"], 4: [1.0, 10], 5: ["2", 20], 7: [3, 30]}
    )
    t = read_table(p, COLS, what="t", sheet="Survey")
    assert t["stage"].tolist() == [1.0, 2.0, 3.0]
    assert t["_line"].tolist() == [4, 5, 7]


def test_xlsx_text_in_a_number_cell(tmp_path):
    p = _workbook(tmp_path / "s.xlsx", {1: ["level", "area"], 2: [1.0, 10], 3: [2.0, "n/a"]})
    with pytest.raises(InputError, match="'n/a' is not a number") as err:
        read_table(p, COLS, what="t")
    assert (err.value.line, err.value.column) == (3, 2)


def test_xlsx_missing_sheet_lists_the_sheets(tmp_path):
    p = _workbook(tmp_path / "s.xlsx", {1: ["level", "area"], 2: [1, 2]})
    with pytest.raises(InputError, match="'Survey'"):
        read_table(p, COLS, what="t", sheet="Survey 2")


def test_not_a_workbook(tmp_path):
    p = tmp_path / "s.xlsx"
    p.write_text("level,area\n1,2\n")
    with pytest.raises(InputError, match="not a readable .xlsx"):
        read_table(p, COLS, what="t")
