"""Operating rules (lakebalance.operations): restriction hysteresis and lag on a hand-made stage
path, monthly triggers, the release table, demand schedules, and site-file errors with lines.

Expected values are worked out by hand in each test from the rules in the module docstring
(common practice of trigger/restore drought rules, no source).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from lakebalance.config import parse_site
from lakebalance.drawdown.engine import build_tables, simulate
from lakebalance.errors import ConfigError, OptionError
from lakebalance.operations import (
    DemandSchedule,
    OperatingRules,
    ReleaseRule,
    RestrictionLevel,
    RestrictionState,
    SpillRule,
)


def _cuts(levels, stages, months=None):
    state = RestrictionState.start(levels, 1)
    months = months if months is not None else [1] * len(stages)
    return [float(state.step(np.array([h]), m)[0]) for h, m in zip(stages, months)]


def test_hysteresis_and_lag_on_a_hand_made_stage_path():
    """Trigger 10 m, restore 10.5 m, lag 2 days, cut 30 %. Day by day (stage at the day's start):
    0: 11.0 off; 1: 9.9 below the trigger, called (waited 0); 2: 9.8 waited 1; 3: 10.2 waited 2
    = lag, in force (above the trigger but below the restore level: hysteresis); 4: 10.4 still in
    force; 5: 10.6 at/above restore, lifted; 6: 9.5 called; 7: 10.7 call cancelled; 8: 9.0
    called; 9: 9.0 waiting; 10: 9.0 in force."""
    level = RestrictionLevel(trigger=10.0, restore=10.5, lag=2, cut=0.3)
    stages = [11.0, 9.9, 9.8, 10.2, 10.4, 10.6, 9.5, 10.7, 9.0, 9.0, 9.0]
    expected = [0, 0, 0, 0.3, 0.3, 0, 0, 0, 0, 0, 0.3]
    assert _cuts([level], stages) == pytest.approx(expected)


def test_without_restore_or_lag_the_cut_follows_the_trigger():
    """No hysteresis, no lag: cut exactly on the days that start below the trigger."""
    level = RestrictionLevel(trigger=10.0, cut=0.25)
    stages = [11.0, 9.9, 9.8, 10.2, 10.0, 9.99]
    assert _cuts([level], stages) == pytest.approx([0, 0.25, 0.25, 0, 0, 0.25])


def test_two_levels_take_the_largest_cut():
    """Level 1 (trigger 10, cut 0.2) and level 2 (trigger 9, cut 0.5), no lag."""
    levels = [RestrictionLevel(trigger=10.0, cut=0.2), RestrictionLevel(trigger=9.0, cut=0.5)]
    assert _cuts(levels, [9.5, 8.5, 9.5, 10.5]) == pytest.approx([0.2, 0.5, 0.2, 0.0])


def test_monthly_trigger_levels():
    """A control curve: trigger 10 m from January to June, 11 m from July. A stage of 10.5 m is
    above the curve in June and below it in July."""
    level = RestrictionLevel(trigger=[10.0] * 6 + [11.0] * 6, cut=0.4)
    assert _cuts([level], [10.5, 10.5, 10.5], months=[5, 6, 7]) == pytest.approx([0, 0, 0.4])


def test_engine_applies_monthly_triggers_on_their_calendar_days():
    """A lake with no flows at all keeps its stage (10.5 m); with the control curve above, the
    engine's cut is 0 on the 181 days of January to June of a common year and 0.4 on the 184
    days from 1 July."""
    tables = build_tables(lambda h: np.full_like(h, 1e6), lambda h: 0.0 * h, stage_min_m=0.0,
                          stage_max_m=20.0)  # fmt: skip
    months = np.repeat(np.arange(1, 13), [31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31])
    level = RestrictionLevel(trigger=[10.0] * 6 + [11.0] * 6, cut=0.4)
    res = simulate(tables, 10.5, np.zeros((365, 2)), np.zeros((365, 2)), 0.0,
                   restriction=[level], months=months)  # fmt: skip
    assert np.all(res.stage_m == 10.5)
    assert np.all(res.cut[:181] == 0.0)
    assert np.all(res.cut[181:] == 0.4)


def test_engine_asks_for_months_when_a_rule_varies_by_month():
    tables = build_tables(lambda h: np.full_like(h, 1e6), lambda h: 0.0 * h, stage_min_m=0.0,
                          stage_max_m=20.0)  # fmt: skip
    level = RestrictionLevel(trigger=[10.0] * 6 + [11.0] * 6, cut=0.4)
    with pytest.raises(ValueError, match="months"):
        simulate(tables, 10.5, np.zeros((3, 1)), np.zeros((3, 1)), 0.0, restriction=[level])


def test_release_table_by_month_and_stage():
    """Rows from January, May and October; linear in stage, held beyond the ends:
    March at 15.5 m: halfway between 0.5 and 1.5 = 1.0; July at 18 m: halfway between 1.0 and
    3.0 = 2.0; December at 20 m (above the table): 5.0; February at 13 m (below): 0.5."""
    rule = ReleaseRule(
        stages=[14.0, 17.0, 19.0],
        release=[[0.5, 1.5, 4.0], [0.3, 1.0, 3.0], [0.5, 2.0, 5.0]],
        months=[1, 5, 10],
    )
    got = rule.release_m3s(np.array([15.5, 18.0, 20.0, 13.0]), np.array([3, 7, 12, 2]))
    assert got == pytest.approx([1.0, 2.0, 5.0, 0.5])
    ops = OperatingRules(environmental_release=0.8, release=rule)
    rows = ops.gate_release_by_month(np.array([14.0]))
    assert rows[:, 0] == pytest.approx([0.8] * 4 + [0.8] * 5 + [0.8] * 3)  # the minimum holds
    assert ops.gate_release_by_month(np.array([19.0]))[:, 0] == pytest.approx(
        [4.0] * 4 + [3.0] * 5 + [5.0] * 3
    )


def test_months_not_starting_in_january_wrap_round_the_year():
    """Rows from April and October: January to March take the October row."""
    rule = ReleaseRule(stages=[1.0], release=[[1.0], [2.0]], months=[4, 10])
    assert rule.by_month()[:, 0] == pytest.approx([2, 2, 2, 1, 1, 1, 1, 1, 1, 2, 2, 2])


def test_spill_is_the_weir_law():
    """Q = 1.7 * 25 * 0.4^1.5 = 10.752 m³/s at 0.4 m over the crest (arithmetic)."""
    spill = SpillRule(crest=19.0, length=25.0, coefficient=1.7)
    assert spill.spill_m3s(np.array([18.0, 19.4]))[1] == pytest.approx(10.7517, rel=1e-4)
    assert spill.spill_m3s(np.array([18.0]))[0] == 0.0


def test_demand_schedules():
    dates = pd.date_range("2024-02-27", periods=4, freq="D")  # 2024 is a leap year
    assert DemandSchedule(value=0.5).demand_m3s(dates) == pytest.approx([0.5] * 4)
    monthly = DemandSchedule(monthly=[float(m) for m in range(1, 13)])
    assert monthly.demand_m3s(dates) == pytest.approx([2, 2, 2, 3])
    daily = DemandSchedule(daily=[float(d) for d in range(365)])  # value = day of year - 1
    # 27 Feb = 57, 28 Feb = 58, 29 Feb takes 28 Feb's, 1 Mar of a leap year = 59 again
    assert daily.demand_m3s(dates) == pytest.approx([57, 58, 58, 59])
    dated = pd.Series([1.0, 3.0], index=pd.to_datetime(["2023-02-28", "2024-02-28"]))
    from_file = DemandSchedule(file=Path("demand.csv")).demand_m3s(dates, dated)
    # 27 Feb: no value that day of the year, file mean 2.0; 28 Feb 2024: its own value 3.0;
    # 29 Feb and 1 Mar: the day of year 60 and 61 have no values: the mean
    assert from_file == pytest.approx([2.0, 3.0, 2.0, 2.0])
    assert DemandSchedule().demand_m3s(dates) is None


@pytest.mark.parametrize(
    ("kwargs", "word"),
    [
        ({"trigger": 10.0, "cut": 1.2}, "cut"),
        ({"trigger": 10.0, "cut": 0.2, "restore": 9.0}, "restore"),
        ({"trigger": [10.0, 11.0], "cut": 0.2}, "trigger"),
        ({"trigger": 10.0, "cut": 0.2, "lag": -1}, "lag"),
    ],
)
def test_out_of_range_restriction_is_an_option_error(kwargs, word):
    with pytest.raises(OptionError, match=word):
        RestrictionLevel(**kwargs)


def test_release_table_shape_errors():
    with pytest.raises(OptionError, match="rows"):
        ReleaseRule(stages=[1.0, 2.0], release=[[1.0]])
    with pytest.raises(OptionError, match="stages"):
        ReleaseRule(stages=[2.0, 1.0], release=[[1.0, 1.0]])
    with pytest.raises(OptionError, match="one of"):
        DemandSchedule(value=1.0, monthly=[1.0] * 12)


SITE = """[site]
name = "Invented lake"

[operations]
environmental_release = 0.3

[operations.release]
stages = [14.0, 17.0, 19.0]
months = [1, 5, 10]
release = [[0.5, 1.5, 4.0], [0.3, 1.0, 3.0], [0.5, 2.0, 5.0]]

[operations.demand]
monthly = [0.5, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0, 1.0, 0.8, 0.6, 0.5, 0.5]

[[operations.restriction]]
name = "level 1"
trigger = 16.8
restore = 17.2
cut = 0.2
lag = 3

[[operations.restriction]]
trigger = [16.0, 16.0, 16.0, 16.2, 16.4, 16.4, 16.4, 16.4, 16.2, 16.0, 16.0, 16.0]
restore = 16.8
cut = 0.5
"""


def _parse(text):
    import tomllib

    return parse_site(tomllib.loads(text), Path("/invented/site.toml"), text)


def test_operations_table_parses():
    ops = _parse(SITE).operations
    assert ops.environmental_release == 0.3
    assert ops.release.months == [1, 5, 10]
    assert ops.demand.monthly[6] == 1.0
    assert [r.cut for r in ops.restriction] == [0.2, 0.5]
    assert ops.restriction[1].trigger_by_month()[4] == 16.4


def test_out_of_range_rule_names_its_site_file_line():
    """The second restriction's cut (line 25 of the file) is out of range."""
    text = SITE.replace("cut = 0.5", "cut = 1.5")
    with pytest.raises(ConfigError) as info:
        _parse(text)
    assert info.value.line == 25
    assert "operations.restriction[1].cut" in str(info.value)
    text = SITE.replace("lag = 3", "lag = 400")
    with pytest.raises(ConfigError) as info:
        _parse(text)
    assert info.value.line == 20


def test_demand_file_is_read_like_a_series_in_its_units(tmp_path):
    """``[operations.demand] file`` in ML/d: 86.4 ML/d = 1 m³/s (1 ML = 1000 m³, 86,400 s a day;
    NIST SP 811 units), read relative to the site file and used on its dates."""
    import tomllib

    from lakebalance.analysis import _read_demand_file

    (tmp_path / "demand.csv").write_text("date,value\n2021-07-01,86.4\n2021-07-02,43.2\n")
    text = (
        '[site]\nname = "Invented lake"\n\n[operations.demand]\n'
        'file = "demand.csv"\nunits = "ML/d"\n'
    )
    site = parse_site(tomllib.loads(text), tmp_path / "site.toml", text)
    dated = _read_demand_file(site)
    assert dated.to_numpy() == pytest.approx([1.0, 0.5])
    dates = pd.date_range("2021-07-01", periods=3, freq="D")
    got = site.operations.demand.demand_m3s(dates, dated)
    assert got == pytest.approx([1.0, 0.5, 0.75])  # 3 July: none that day of year, the mean
