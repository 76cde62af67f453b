"""``lakebalance check``: exit codes and the one-line ``error:`` messages on crafted inputs.

Each unusable input must give exit code 2 and exactly one stderr line
``error: <file>[:<line>[:<column>]]: <what>``, never a traceback (the command-line contract of
the project's design, common practice for command-line tools, no source).
"""

from __future__ import annotations

import json
import re
import subprocess
import sys

import pytest

from lakebalance.cli import main

SITE = """[site]
name = "Invented Pond"
timezone = "UTC"

[series.stage]
file = "s.csv"
value = "stage_m"
units = "{units}"
{extra}
"""

GOOD = "date,stage_m\n2021-01-01,1.00\n2021-01-02,1.01\n2021-01-03,1.02\n"


def make(
    tmp_path, data: str | bytes = GOOD, units: str = "m", extra: str = "", site: str | None = None
):
    p = tmp_path / "s.csv"
    if isinstance(data, bytes):
        p.write_bytes(data)
    else:
        p.write_text(data, encoding="utf-8")
    s = tmp_path / "site.toml"
    s.write_text(
        site if site is not None else SITE.format(units=units, extra=extra), encoding="utf-8"
    )
    return s


def run(capsys, site, *args):
    code = main(["check", str(site), *args])
    out, err = capsys.readouterr()
    return code, out, err


def one_error(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    assert lines[0].startswith("error: ")
    return lines[0]


def test_good_site_exits_0_with_accounting(tmp_path, capsys):
    code, out, err = run(capsys, make(tmp_path))
    assert code == 0
    assert "row accounting" in out and "3 =" in re.sub(r"\s+", " ", out)
    assert "period:   2021-01-01 to 2021-01-03, 3 days" in out


def test_json_document(tmp_path, capsys):
    code, out, _ = run(capsys, make(tmp_path, GOOD + "2021-01-02,1.5\n"), "--json")
    assert code == 0
    doc = json.loads(out)
    (series,) = doc["series"]
    assert series["key"] == "stage" and series["days"] == 3
    # the repeated row comes after 2021-01-03 in the file: out of order, then in conflict
    assert [f["kind"] for f in series["findings"]] == ["out_of_order", "conflicting_duplicate"]
    assert doc["accounting"][0] == {
        "series": "stage",
        "file": str(tmp_path / "s.csv"),
        "read": 4,
        "used": 2,
        "flagged": 0,
        "rejected": 2,
    }


def test_conflicting_duplicates_are_reported_not_fatal(tmp_path, capsys):
    code, out, _ = run(capsys, make(tmp_path, GOOD + "2021-01-02,1.30\n"))
    assert code == 0
    assert "conflicting_duplicate" in out and "set missing" in out


def test_text_in_numbers_is_reported_by_token(tmp_path, capsys):
    code, out, _ = run(capsys, make(tmp_path, GOOD + "2021-01-04,ICE\n2021-01-05,ICE\n"))
    assert code == 0
    assert "non_numeric" in out and "token 'ICE'" in out and "n=2" in out


@pytest.mark.parametrize(
    ("data", "extra", "pattern"),
    [
        # wrong delimiter declared: the header is one field
        (
            "date;stage_m\n2021-01-01;1\n",
            'delimiter = ","',
            r"s\.csv:1: .*no column 'date'.*delimiter ';'",
        ),
        # header-only file
        ("date,stage_m\n", "", r"s\.csv:1: .*header but no data rows"),
        # binary file
        (bytes(range(256)) * 16, "", r"s\.csv: binary file"),
        # missing column
        ("date,level\n2021-01-01,1\n", "", r"s\.csv:1: .*no column 'stage_m'"),
        # empty file
        ("", "", r"s\.csv: .*empty"),
        # no date parses
        ("date,stage_m\nmonday,1\ntuesday,2\n", "", r"s\.csv:2:1: .*no date parses"),
    ],
)
def test_unusable_input_files_exit_2_with_one_error_line(tmp_path, capsys, data, extra, pattern):
    code, _, err = run(capsys, make(tmp_path, data, extra=extra))
    assert code == 2
    assert re.search(pattern, one_error(err)), err


def test_wrong_unit_names_the_site_file_line(tmp_path, capsys):
    code, _, err = run(capsys, make(tmp_path, units="m3/s"))
    assert code == 2
    line = one_error(err)
    assert re.search(r"site\.toml:8: series\.stage: unit 'm3/s'", line), line


def test_unknown_unit(tmp_path, capsys):
    code, _, err = run(capsys, make(tmp_path, units="metres of mercury"))
    assert code == 2
    assert "site.toml:8:" in one_error(err)


def test_typo_in_a_site_file_key(tmp_path, capsys):
    site = SITE.format(units="m", extra="").replace('value = "stage_m"', 'valeu = "stage_m"')
    code, _, err = run(capsys, make(tmp_path, site=site))
    assert code == 2
    line = one_error(err)
    assert re.search(r"site\.toml:7: unknown key 'valeu'.*did you mean 'value'", line), line


def test_missing_data_file(tmp_path, capsys):
    site = SITE.format(units="m", extra="").replace('"s.csv"', '"nope.csv"')
    code, _, err = run(capsys, make(tmp_path, site=site))
    assert code == 2
    assert "nope.csv: series.stage: file not found" in one_error(err)


def test_installed_command_prints_no_traceback(tmp_path):
    """The real process: exit status 2 and a single stderr line."""
    site = make(tmp_path, "date,stage_m\n")
    proc = subprocess.run(
        [sys.executable, "-m", "lakebalance", "check", str(site)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and proc.stderr.startswith("error: ")


def test_stage_above_the_storage_relation_is_reported(tmp_path, capsys):
    (tmp_path / "st.csv").write_text("stage,area\n0,0\n1,1000\n2,3000\n", encoding="utf-8")
    data = "date,stage_m\n2021-01-01,1.5\n2021-01-02,2.5\n2021-01-03,2.6\n2021-01-04,1.9\n"
    site = SITE.format(units="m", extra="") + '\n[storage]\nfile = "st.csv"\n'
    code, out, _ = run(capsys, make(tmp_path, data, site=site), "--json")
    assert code == 0
    found = [f for f in json.loads(out)["series"][0]["findings"] if f["kind"] == "outside_storage"]
    assert [(f["first"], f["last"], f["count"]) for f in found] == [("2021-01-02", "2021-01-03", 2)]


def test_unknown_time_zone_names_the_site_file_line(tmp_path, capsys):
    site = SITE.format(units="m", extra="").replace('timezone = "UTC"', 'timezone = "Mars/Base"')
    code, _, err = run(capsys, make(tmp_path, site=site))
    assert code == 2
    assert re.search(r"site\.toml:3: 'timezone' = 'Mars/Base' is not a time zone", one_error(err))
