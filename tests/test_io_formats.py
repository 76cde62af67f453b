"""The one table of input formats: every reader finds its format by the file's suffix there, and
a suffix it does not know is one clear error naming the file and the suffixes that would do.

Expected values are the crafted files themselves (common practice, no source).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from lakebalance.config import SeriesSpec, StorageOptions
from lakebalance.errors import InputError
from lakebalance.io import formats
from lakebalance.io.formats import FORMATS, Format, format_of, reader, suffixes
from lakebalance.io.series import read_raw_series
from lakebalance.io.storage import read_storage, source_of
from lakebalance.io.tables import read_table

CSV = "date,value\n2021-01-01,1.5\n2021-01-02,1.6\n"


def _spec(path: Path) -> SeriesSpec:
    return SeriesSpec(file=path, units="m", role="stage", key="stage")


def test_every_suffix_belongs_to_one_format_and_every_format_reads_something():
    seen = [s for f in FORMATS for s in f.suffixes]
    assert len(seen) == len(set(seen))
    assert all(s.startswith(".") and s == s.lower() for s in seen)
    for f in FORMATS:
        assert any(f.reads(k) for k in formats.KINDS), f.name
        for kind in formats.KINDS:
            if f.reads(kind):
                assert callable(f.function(kind))


@pytest.mark.parametrize(
    ("name", "kind", "function"),
    [
        ("a.csv", "series", "read_csv_series"),
        ("a.TSV", "series", "read_csv_series"),
        ("a.xlsx", "series", "read_excel_series"),
        ("a.wml2", "series", "read_waterml2_series"),
        ("a.dat", "table", "_text_table"),
        ("a.xlsm", "table", "_excel_table"),
        ("a.gpkg", "vector", "read_layer"),
        ("a.geojson", "vector", "read_layer"),
    ],
)
def test_the_suffix_chooses_the_reader(name, kind, function):
    assert reader(Path(name), kind, "test").__name__ == function


def test_an_unknown_suffix_is_one_error_naming_the_file_and_the_known_suffixes(write):
    path = write("stage.data", CSV)
    with pytest.raises(InputError) as err:
        read_raw_series(_spec(path), "series stage")
    e = err.value
    assert e.file == str(path)
    assert "unknown file suffix '.data'" in e.message
    for s in suffixes("series"):
        assert s in e.message
    assert ".gpkg" not in e.message  # a layer holds no series: not offered
    with pytest.raises(InputError, match="unknown file suffix '.data'") as err:
        read_table(path, {"stage": "date"}, what="storage table")
    assert err.value.file == str(path)


def test_a_file_without_suffix_says_so(write):
    path = write("stage", CSV)
    with pytest.raises(InputError, match="the file has no suffix; a gauge series is read from"):
        read_raw_series(_spec(path), "series stage")


def test_a_format_that_does_not_hold_the_kind(write):
    xml = write("survey.xml", "<a/>")
    with pytest.raises(InputError, match=r"a WaterML 2.0 document \(.xml\) holds no table"):
        read_table(xml, {"stage": "level"}, what="storage table")
    layer = write("stage.gpkg", "")
    with pytest.raises(InputError, match=r"a vector layer \(.gpkg\) holds no gauge series"):
        read_raw_series(_spec(layer), "series stage")
    table = write("contours.csv", "level,area\n1,2\n")
    options = StorageOptions(source="contours", file=table)
    with pytest.raises(InputError, match=r"delimited text \(.csv\) holds no vector layer"):
        read_storage(options)


def test_the_comparison_survey_kind_follows_the_table(write):
    assert source_of(Path("b.XLSX")) == "table"
    assert source_of(Path("b.shp")) == "contours"
    with pytest.raises(InputError, match="cannot tell a table from a vector layer"):
        source_of(Path("b.pdf"))


def test_a_new_format_is_one_entry(write, monkeypatch):
    """An invented suffix added to the table (read as delimited text) is read by every reader."""
    path = write("stage.lbv", CSV)
    assert format_of(path) is None
    invented = Format(
        "invented text", (".lbv",), series="csv:read_csv_series", table="formats:_text_table"
    )
    monkeypatch.setattr(formats, "FORMATS", (*FORMATS, invented))
    raw = read_raw_series(_spec(path), "series stage")
    assert raw.values.tolist() == [1.5, 1.6] and raw.lines.tolist() == [2, 3]
    table = read_table(path, {"v": "value"}, what="test table")
    assert table["v"].tolist() == [1.5, 1.6]
