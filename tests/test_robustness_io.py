"""Robustness of reading: broken files give one plain line that says what to change.

Small files crafted in tmp_path (invented values). Expected behaviour is the project's rule
(README): exit 2 with one line ``error: <file>[:<line>[:<column>]]: <what>``, no traceback.
"""

from __future__ import annotations

import pytest
from _robust_sites import write_site

import lakebalance as lb
from lakebalance.cli import main
from lakebalance.errors import InputError, UnitError
from lakebalance.units import parse_unit


@pytest.mark.parametrize("text", ["m3/sec/", "m3/s)", "ft^"])
def test_malformed_unit_says_so_instead_of_empty_parentheses(text):
    with pytest.raises(UnitError) as info:
        parse_unit(text)
    assert "()" not in info.value.message
    assert "not a valid unit expression" in info.value.message


def test_undefined_unit_keeps_the_registry_reason():
    with pytest.raises(UnitError, match="'furlongs_per_week' is not defined"):
        parse_unit("furlongs_per_week")


def test_undeclared_decimal_comma_is_named(tmp_path, capsys):
    site = write_site(tmp_path)
    stage = tmp_path / "stage.csv"
    stage.write_text(stage.read_text().replace(",", ";").replace(".", ","))
    with pytest.raises(InputError, match="decimal comma\\? set decimal = ','"):
        lb.load_records(lb.load_site(site))
    assert main(["check", str(site)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "e.g. '1,0" in err[0]


def test_decimal_comma_in_a_comma_delimited_file_is_stopped_at_its_line(tmp_path):
    """'1,25' split by the delimiter would silently be read as 1 (the extra field dropped)."""
    site = write_site(tmp_path)
    inflow = tmp_path / "inflow.csv"
    lines = inflow.read_text().splitlines()
    inflow.write_text("\n".join([lines[0]] + [ln.replace(".", ",") for ln in lines[1:]]) + "\n")
    with pytest.raises(InputError) as info:
        lb.load_records(lb.load_site(site))
    assert info.value.line == 2
    assert "decimal comma" in info.value.message


def test_extra_text_column_without_header_is_still_read(tmp_path):
    """Extra fields at the end of a row are ignored (docs/data-files.md): a trailing quality
    letter must not be taken for the decimals of a number."""
    site = write_site(tmp_path)
    inflow = tmp_path / "inflow.csv"
    lines = inflow.read_text().splitlines()
    inflow.write_text("\n".join([lines[0]] + [ln + ",A" for ln in lines[1:]]) + "\n")
    records = lb.load_records(lb.load_site(site))
    assert records.daily["inflow"].notna().all()
    assert records.daily["inflow"].iloc[0] == pytest.approx(0.2, abs=1e-12)
