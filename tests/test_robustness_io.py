"""Robustness of reading: broken files give one plain line that says what to change.

Small files crafted in tmp_path (invented values). Expected behaviour is the project's rule
(README): exit 2 with one line ``error: <file>[:<line>[:<column>]]: <what>``, no traceback.
"""

from __future__ import annotations

import pytest
from _robust_sites import write_site

import lakebalance as lb
from lakebalance.cli import main
from lakebalance.errors import DataQualityWarning, InputError, UnitError
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
        _ = lb.open_site(site).records
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
        _ = lb.open_site(site).records
    assert info.value.line == 2
    assert "decimal comma" in info.value.message


def test_extra_text_column_without_header_is_still_read(tmp_path):
    """Extra fields at the end of a row are ignored (docs/data-files.md): a trailing quality
    letter must not be taken for the decimals of a number."""
    site = write_site(tmp_path)
    inflow = tmp_path / "inflow.csv"
    lines = inflow.read_text().splitlines()
    inflow.write_text("\n".join([lines[0]] + [ln + ",A" for ln in lines[1:]]) + "\n")
    records = lb.open_site(site).records
    assert records.daily["inflow"].notna().all()
    assert records.daily["inflow"].iloc[0] == pytest.approx(0.2, abs=1e-12)


def test_weekly_stage_and_monthly_meter_totals_are_warned_about(tmp_path):
    """A staff gauge read weekly and a meter read monthly: the reader keeps each reading on its
    own day (docs/data-files.md), so it says plainly what that means for the balance."""
    import warnings

    import pandas as pd

    site = write_site(tmp_path, days=140)
    stage = tmp_path / "stage.csv"
    pd.read_csv(stage).iloc[::7].to_csv(stage, index=False)
    months = pd.date_range("2021-01-31", periods=12, freq="ME")
    pd.DataFrame({"date": months.strftime("%Y-%m-%d"), "value": 3000.0}).to_csv(
        tmp_path / "meter.csv", index=False
    )
    text = site.read_text().replace(
        "[uncertainty]", '[series.withdrawal]\nfile = "meter.csv"\nunits = "m3"\n\n[uncertainty]'
    )
    site.write_text(text)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        _ = lb.open_site(site).records
    messages = [str(w.message) for w in caught if issubclass(w.category, DataQualityWarning)]
    assert any("series.stage: readings about every 7 days" in m for m in messages)
    assert any("withdrawal" in m and "not spread over them" in m for m in messages)
