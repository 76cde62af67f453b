"""Outputs contained in ``--out``, never over an input, never a mix of two runs; formula-safe tables
(issue 18).

Sites are the small invented lakes of ``_robust_sites``. Outside references: OWASP "CSV
Injection" (a cell beginning with ``=``, ``+``, ``-``, ``@``, tab or carriage return is run as a
formula by spreadsheet programs; the common defence is a leading apostrophe); ECMA-376 Part 1
§18.3.1.4 (a cell of type ``s``/``inlineStr`` holds text and is never evaluated) read back with
openpyxl, an independent reader; RFC 3986 §4.2 (a reference without a scheme is a relative path).
"""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from _robust_sites import write_site
from conftest import ROOT

from lakebalance.cli import main
from lakebalance.errors import OutputError
from lakebalance.io.output import (
    MARKER,
    OutputFolder,
    formula_safe,
    neutralise,
    slug,
    unique_slugs,
    write_csv,
    write_xlsx,
)


def _digests(folder: Path) -> dict[str, str]:
    return {
        p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir() if p.is_file()
    }


def _one_error(capsys) -> str:
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "Traceback" not in err[0], err
    return err[0]


# ---- never beside or over the inputs ------------------------------------------------------
@pytest.mark.parametrize("command", ["report", "balance", "storage", "flags"])
def test_out_in_the_input_folder_is_refused_and_the_inputs_stay(tmp_path, capsys, command):
    """``report --out <the data folder>`` overwrote the input storage.csv with its own table."""
    site = write_site(tmp_path / "data")
    before = _digests(site.parent)
    assert main([command, str(site), "--out", str(site.parent)]) == 2
    line = _one_error(capsys)
    assert "holds an input of this run" in line
    assert _digests(site.parent) == before
    assert main([command, str(site), "--out", str(tmp_path)]) == 2  # a parent folder too
    assert "holds an input" in _one_error(capsys)


def test_a_compared_survey_is_an_input_too(tmp_path, capsys):
    site = write_site(tmp_path / "data")
    other = tmp_path / "elsewhere" / "survey.csv"
    other.parent.mkdir()
    other.write_bytes((site.parent / "storage.csv").read_bytes())
    assert main(["storage", str(site), "--compare", str(other), "--out", str(other.parent)]) == 2
    assert "survey.csv" in _one_error(capsys)


def test_paths_leaving_the_folder_are_refused(tmp_path):
    out = OutputFolder(tmp_path / "out")
    for name in ("../x.csv", "/etc/x.csv", "a/../../x.csv", "", "."):
        with pytest.raises(OutputError):
            out.path(name)
    os.symlink(tmp_path, tmp_path / "out" / "link")  # a link inside --out leading out of it
    with pytest.raises(OutputError, match="outside --out"):
        out.path("link/x.csv")
    assert out.path("tables/x.csv") == tmp_path / "out" / "tables" / "x.csv"


def test_an_input_reached_through_a_link_is_never_overwritten(tmp_path):
    data = tmp_path / "data.csv"
    data.write_text("a\n1\n")
    out = OutputFolder(tmp_path / "out", inputs=[data])
    os.symlink(data, tmp_path / "out" / "table.csv")
    with pytest.raises(OutputError):
        out.path("table.csv")


# ---- a report folder is replaced whole ------------------------------------------------------
def test_a_report_replaces_its_earlier_folder_whole(tmp_path):
    site = write_site(tmp_path / "data")
    out = tmp_path / "report"
    assert main(["report", str(site), "--out", str(out)]) == 0
    (out / "stale_from_an_older_version.csv").write_text("x\n")
    assert main(["report", str(site), "--out", str(out)]) == 0
    assert not (out / "stale_from_an_older_version.csv").exists()
    assert (out / MARKER).is_file() and (out / "report.html").is_file()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".report.")]


def test_a_folder_lakebalance_did_not_write_is_not_replaced(tmp_path, capsys):
    site = write_site(tmp_path / "data")
    mine = tmp_path / "my documents"
    mine.mkdir()
    (mine / "thesis.docx").write_text("years of work")
    assert main(["report", str(site), "--out", str(mine)]) == 2
    assert "did not write" in _one_error(capsys)
    assert (mine / "thesis.docx").read_text() == "years of work"


def test_a_killed_report_leaves_the_earlier_folder_as_it_was(tmp_path):
    """The run is killed (SIGKILL) while it writes report.html: the earlier report is intact and
    nothing of the killed run is in it."""
    site = write_site(tmp_path / "data")
    out = tmp_path / "report"
    assert main(["report", str(site), "--out", str(out)]) == 0
    before = _digests(out)
    script = (
        "import os, signal, lakebalance.io.output as o\n"
        "real = o.write_text\n"
        "def dying(path, text):\n"
        "    if str(path).endswith('report.html'):\n"
        "        os.kill(os.getpid(), signal.SIGKILL)\n"
        "    return real(path, text)\n"
        "o.write_text = dying\n"
        "from lakebalance.cli import main\n"
        f"main(['report', {str(site)!r}, '--out', {str(out)!r}, '--seed', '99'])\n"
    )
    proc = subprocess.run(
        [sys.executable, "-c", script],
        env={**os.environ, "PYTHONPATH": str(ROOT)},
        capture_output=True,
        timeout=300,
    )
    assert proc.returncode == -signal.SIGKILL
    assert _digests(out) == before
    # the killed run's temporary sibling is left behind; the next run removes it (its process is
    # gone) and leaves a sibling of a live process alone
    stale = [p for p in tmp_path.iterdir() if p.name.endswith(".partial")]
    assert len(stale) == 1
    live = tmp_path / f".report.{os.getpid()}.abcd.partial"
    live.mkdir()
    assert main(["report", str(site), "--out", str(out)]) == 0
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == [live.name]


# ---- names from user text ---------------------------------------------------------------------
@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("../../etc/passwd", "etc-passwd"),
        ("javascript:alert(1)", "javascript-alert-1"),
        ("Lac d'Été (Nord)", "lac-d-ete-nord"),
        ("CON", "con-"),
        ("...", "site"),
        ("a" * 200, "a" * 60),
    ],
)
def test_slugs_are_plain_names(text, expected):
    assert slug(text) == expected


def test_colliding_slugs_get_a_suffix_and_a_note():
    got = unique_slugs(["Lake", "lake", "LAKE!", "other"])
    assert [s for s, _ in got] == ["lake", "lake-2", "lake-3", "other"]
    assert got[0][1] is None and "'lake' was taken by 'Lake'" in got[1][1]


# ---- formula-safe tables ----------------------------------------------------------------------
HOSTILE_CELLS = [
    '=HYPERLINK("http://example.invalid","x")',
    "+1+2",
    "-2+3",
    "@SUM(A1)",
    "\tx",
    "\rx",
]


def test_csv_text_cells_that_would_run_get_an_apostrophe(tmp_path):
    frame = pd.DataFrame(
        {"level": [*HOSTILE_CELLS, "spill", "-1.5"], "stage_m": [-1.0, 2, 3, 4, 5, 6, 7, -8.25]}
    )
    frame = frame.rename(columns={"stage_m": "=cmd|' /C calc'!A0"})
    write_csv(tmp_path / "t.csv", frame, index=False)
    back = pd.read_csv(tmp_path / "t.csv", keep_default_na=False)
    expected = ["'" + c.replace("\r", "\n") for c in HOSTILE_CELLS]  # a bare CR would split a row
    assert list(back["level"][:6]) == expected
    assert back["level"][6] == "spill" and back["level"][7] == "-1.5"  # a number as text stays
    assert back.columns[1] == "'=cmd|' /C calc'!A0"
    assert back.iloc[:, 1].tolist() == [-1.0, 2, 3, 4, 5, 6, 7, -8.25]  # numbers stay numbers


def test_xlsx_text_cells_are_string_cells_and_numbers_stay_numbers(tmp_path):
    import openpyxl

    frame = pd.DataFrame({"level": HOSTILE_CELLS, "stage_m": [-1.0, 2, 3, 4, 5, 6]})
    write_xlsx(tmp_path / "t.xlsx", {"levels: a/b": frame.set_index("level")})
    ws = openpyxl.load_workbook(tmp_path / "t.xlsx").worksheets[0]
    assert ws.title == "levels_ a_b"  # ':' and '/' are not allowed in sheet names
    rows = list(ws.iter_rows(min_row=2))
    for cell, text in zip((r[0] for r in rows), HOSTILE_CELLS, strict=True):
        assert cell.data_type == "s" and cell.value == text
    assert rows[0][1].data_type == "n" and rows[0][1].value == -1


def test_neutralise_leaves_other_values():
    assert neutralise(-3.5) == -3.5 and neutralise("ok") == "ok" and neutralise(None) is None
    assert formula_safe(pd.DataFrame({"a": [1, 2]})).equals(pd.DataFrame({"a": [1, 2]}))


def test_level_names_reach_the_table_files_neutralised(tmp_path, capsys):
    """A level named ``=HYPERLINK(...)`` in the site file (the issue's case) is text in the
    drawdown tables, whose columns are the level names."""
    import csv

    hostile = '=HYPERLINK("http://example.invalid/x","open me")'
    site = write_site(tmp_path / "data", extra_toml=f"\n[levels]\n'{hostile}' = 2.0\n")
    out = tmp_path / "out"
    argv = ["drawdown", str(site), "--scenario", "constant", "--days", "30", "--out", str(out)]
    assert main(argv) == 0, capsys.readouterr().err
    table = out / "drawdown_probability_below.csv"
    with open(table, newline="", encoding="utf-8") as fh:
        cells = [c for row in csv.reader(fh) for c in row]
    assert "'" + hostile in cells
    assert not [c for c in cells if c.startswith(("=", "+", "@", "\t", "\r"))]
