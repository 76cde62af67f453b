"""Site-file validation: every key checked, errors name file, line and the nearest valid key."""

from __future__ import annotations

import pytest

import lakebalance as lb
from lakebalance.errors import ConfigError, UnitError

GOOD = """
[site]
name = "Test lake"
latitude = 45.5
elevation = 300
water_year_start = 10
timezone = "Europe/Paris"

[series.stage]
file = "stage.csv"
units = "cm"

[[series.inflow]]
file = "north.csv"
units = "ML/d"

[[series.inflow]]
file = "east.csv"
units = "L/s"
name = "east"

[levels]
spill = 12.5
intake = "30 ft"

[outlet]
form = "compound"
[[outlet.component]]
name = "sill"
form = "power"
[[outlet.component]]
name = "spillway"
form = "weir"
length = 20.0

[[correction]]
series = "stage"
start = 2012-05-01
value = 0.05
"""


def test_good_site_parses_and_resolves_paths(write, tmp_path):
    site = lb.load_site(write("site.toml", GOOD))
    assert site.site.name == "Test lake"
    assert site.site.water_year_start == 10
    keys = [s.key for s in site.series]
    assert keys == ["stage", "inflow:north", "inflow:east"]
    assert site.series[0].file == (tmp_path / "stage.csv").resolve()
    assert [c.name for c in site.outlet.component] == ["sill", "spillway"]
    assert site.correction[0].start == "2012-05-01"
    # 30 ft = 9.144 m exactly (NIST SP 811: 1 ft = 0.3048 m exactly)
    assert site.levels["intake"] == pytest.approx(9.144, abs=1e-12)
    assert site.levels["spill"] == 12.5


@pytest.mark.parametrize(
    "old,new,needle,line",
    [
        ("water_year_start", "water_yearstart", "did you mean 'water_year_start'", 6),
        ('units = "cm"', 'unit = "cm"', "did you mean 'units'", 11),
        ('form = "compound"', 'form = "compund"', "did you mean 'compound'", 27),
        ("length = 20.0", 'length = "long"', "must be a number", 34),
        ("[levels]", "[level]", "did you mean 'levels'", 22),
        ("[series.stage]", "[series.stag]", "did you mean 'stage'", 9),
        ("latitude = 45.5", 'latitude = "north"', "must be a number", 4),
    ],
)
def test_bad_keys_name_file_line_and_suggestion(write, old, new, needle, line):
    path = write("site.toml", GOOD.replace(old, new, 1))
    with pytest.raises(ConfigError) as info:
        lb.load_site(path)
    err = info.value
    assert needle in err.message
    assert err.file == str(path)
    assert err.line == line
    assert err.one_line().startswith(f"error: {path}:{line}: ")


def test_missing_required_key(write):
    path = write("site.toml", GOOD.replace('name = "Test lake"\n', "", 1))
    with pytest.raises(ConfigError, match="missing required key 'name'"):
        lb.load_site(path)


def test_invalid_toml_has_line_and_column(write):
    path = write("site.toml", "[site]\nname = \n")
    with pytest.raises(ConfigError) as info:
        lb.load_site(path)
    assert info.value.line == 2
    assert info.value.column is not None


def test_missing_file_is_config_error(tmp_path):
    with pytest.raises(ConfigError, match="cannot read site file"):
        lb.load_site(tmp_path / "nope.toml")


def test_level_with_wrong_unit(write):
    path = write("site.toml", GOOD.replace('intake = "30 ft"', 'intake = "30 kg"'))
    with pytest.raises(ConfigError, match="levels.intake"):
        lb.load_site(path)


def test_unit_error_is_lakebalance_error():
    from lakebalance.units import conversion

    with pytest.raises(UnitError, match="series.inflow"):
        conversion("mm", "flow", "series.inflow")
