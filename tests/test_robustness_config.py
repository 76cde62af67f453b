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


@pytest.mark.parametrize(
    ("section", "line", "needle"),
    [
        ("uncertainty", "systematic = 1.5", "'uncertainty.systematic' must be between 0 and 1"),
        ("drawdown", "members = 0", "'drawdown.members' must be between 1 and 1,000,000"),
        ("drawdown", "block_days = -1", "'drawdown.block_days' must be at least 1"),
        ("flags", "min_run_days = 0", "'flags.min_run_days' must be at least 2"),
        ("evaporation", "albedo = 1.5", "'evaporation.albedo' must be between 0 and 1"),
        ("evaporation", "pan_coefficient = [0.7, 0.7, -0.7]", "'evaporation.pan_coefficient'"),
        ("seepage", "rain_buffer = -1", "'seepage.rain_buffer' must be at least 0"),
    ],
)
def test_options_out_of_their_declared_range_name_the_key_and_line(
    tmp_path, capsys, section, line, needle
):
    """Each options field declares its range once (lakebalance.options.setting); the site file
    reports a value outside it with the key's own line (common practice, no source)."""
    site = write_site(tmp_path)
    text = site.read_text()
    header = f"[{section}]\n"
    text = (
        text.replace(header, header + line + "\n")
        if header in text
        else text + "\n" + header + line + "\n"
    )
    site.write_text(text)
    lines = text.splitlines()
    assert main(["check", str(site)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and needle in err[0], err
    assert err[0].startswith(f"error: {site}:{lines.index(line) + 1}:")


def test_options_objects_refuse_out_of_range_values_in_python():
    """The Python API gets a ValueError naming the option (the same declared range)."""
    from lakebalance.balance import UncertaintyOptions
    from lakebalance.drawdown.options import DrawdownOptions
    from lakebalance.flags import FlagOptions

    with pytest.raises(ValueError, match="'draws' must be between 0 and 1,000,000"):
        UncertaintyOptions(draws=-3)
    with pytest.raises(ValueError, match="'draws' must be 0 \\(no bands\\) or at least 2"):
        UncertaintyOptions(draws=1)
    with pytest.raises(ValueError, match="'members' must be between 1 and 1,000,000"):
        DrawdownOptions(members=0)
    with pytest.raises(ValueError, match="'drift_alpha' must be in \\(0, 1\\)"):
        FlagOptions(drift_alpha=1.5)
