"""The command line's tables are for people: at most 120 characters a line, no scientific
notation, headers in words, and numbers that are the CSV's values rounded by the display rules
(a terminal line of 120 characters is a common width; common practice, no source)."""

from __future__ import annotations

import re
import subprocess
import sys

import pandas as pd
import pytest
from conftest import DEMO, ROOT

SITE = DEMO / "site.toml"
SCIENTIFIC = re.compile(r"\d[.,]?\d*e[+-]\d+", re.I)


def _cli(*args: str) -> str:
    proc = subprocess.run(
        [sys.executable, "-m", "lakebalance", *args], capture_output=True, text=True,
        timeout=600, cwd=ROOT,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    return proc.stdout


@pytest.mark.parametrize(
    "command", ["storage", "evaporation", "dynamics", "rating", "flags", "check"]
)
def test_tables_fit_120_characters(command):
    """Every line within 120 characters (prose folded, tables laid out to fit) and no number in
    scientific notation (common practice, no source: people read 17,320,000 m³, not 1.73e+07)."""
    import re

    text = _cli(command, str(SITE))
    for line in text.splitlines():
        assert len(line) <= 120, (command, line)
        assert not re.search(r"\d[eE][+-]\d", line), (command, line)


def test_balance_table_is_the_csv_rounded(tmp_path):
    """``lakebalance balance``: lines within 120 characters, no e-notation in its tables, no
    code-like headers, and the water-year inflow of each year is the CSV's value in thousand m³
    to 3 significant digits (4 from 1,000 up)."""
    text = _cli("balance", str(SITE), "--draws", "20", "--out", str(tmp_path))
    lines = text.splitlines()
    assert max(len(line) for line in lines) <= 120
    start = lines.index("water years (residual also as a depth over the mean lake area):")
    end = lines.index("months:")
    table = lines[start + 1 : end]
    assert not any(SCIENTIFIC.search(line) for line in table)
    assert not any("_m3" in line or "p_nonzero" in line for line in table)
    csv = pd.read_csv(tmp_path / "balance_water_years.csv", index_col=0)
    head_rows = [i for i, line in enumerate(table) if line.startswith("water year")]
    first_block = table[head_rows[0] + 1 : table.index("", head_rows[0])]
    header = "\n".join(table[: head_rows[0] + 1])
    assert "gauged inflow" in header and "(thousand m³)" in header
    # the gauged inflow is the 5th column of the first block (after days and the storages)
    for line in first_block:
        cells = line.split()
        year, inflow = int(cells[0]), float(cells[5].replace(",", ""))
        x = csv.loc[year, "inflow_m3"] / 1e3
        digits = 4 if abs(x) >= 1000 else 3
        assert inflow == float(f"{x:.{digits}g}"), (year, inflow, x)
