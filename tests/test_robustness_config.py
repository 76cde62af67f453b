"""Robustness of the site file and command-line values: out-of-range and non-finite numbers are
one-line errors naming the line, never a traceback (README: exit 2, one ``error:`` line).

Ranges: latitude -90..90 and longitude -180..360 degrees (ISO 6709 geographic coordinates;
360 admits the 0-360 east convention, common practice, no source); months 1..12.
"""

from __future__ import annotations

import pytest
from _robust_sites import write_site

from lakebalance.cli import main


@pytest.mark.parametrize(
    ("line", "needle"),
    [
        ("latitude = 151.0", "'site.latitude' must be between -90 and 90"),
        ("latitude = nan", "'site.latitude' must be a finite number"),
        ("longitude = -200.0", "'site.longitude' must be between"),
        ("water_year_start = 13", "'site.water_year_start' must be between 1 and 12"),
        ("water_year_start = 0", "'site.water_year_start' must be between 1 and 12"),
    ],
)
def test_site_values_out_of_range(tmp_path, capsys, line, needle):
    site = write_site(tmp_path)
    text = site.read_text().replace("water_year_start = 1\n", "")
    site.write_text(text.replace("[site]\n", f"[site]\n{line}\n"))
    assert main(["check", str(site)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and needle in err[0]
    assert err[0].startswith(f"error: {site}:2:")


def test_level_that_is_not_finite(tmp_path, capsys):
    site = write_site(tmp_path, extra_toml="\n[levels]\nspill = inf\n")
    assert main(["check", str(site)]) == 2
    assert "levels.spill: expected a finite number" in capsys.readouterr().err


@pytest.mark.parametrize(
    ("argv", "needle"),
    [
        (["balance", "{site}", "--draws", "1"], "at least 2"),
        (["storage", "{site}", "--step", "1e-7"], "more than a million rows"),
        (["dynamics", "{site}", "--inflow", "nan"], "--inflow: expected a finite number"),
    ],
)
def test_command_line_values_that_cannot_be_used(tmp_path, capsys, argv, needle):
    site = write_site(tmp_path)
    assert main([a.format(site=site) for a in argv]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: ") and needle in err[0]
