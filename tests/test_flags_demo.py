"""The invented demo reservoir: planted problems recovered by ``Lake.flags`` and the commands.

Truth from ``data_demo/truth.json`` (written by the demo generator with the planted dates).
"""

from __future__ import annotations

import json
import warnings

import pandas as pd
import pytest

from lakebalance import Lake, load_site
from lakebalance.cli import main
from lakebalance.errors import LakebalanceWarning


@pytest.fixture(scope="module")
def demo(request):
    from pathlib import Path

    path = Path(__file__).resolve().parents[1] / "data_demo" / "site.toml"
    if not path.exists():
        pytest.fail("data_demo/site.toml is missing: run data_demo/make_demo.py")
    site = load_site(path)
    lake = Lake(site)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LakebalanceWarning)
        balance = lake.balance
        flags = lake.flags
    truth = json.loads((path.parent / "truth.json").read_text(encoding="utf-8"))
    return site, lake, balance, flags, truth


def _planted(truth):
    p = truth["problems"]
    out = [("spike", s["date"]) for s in p["spikes"]]
    out.append(("datum_shift", p["datum_shift"]["start"]))
    out.append(("run", p["unmetered_withdrawal"]["start"]))
    return out


def test_planted_problems_flagged_within_two_days_with_the_right_kind(demo):
    _, _, _, flags, truth = demo
    for kind, date in _planted(truth):
        day = pd.Timestamp(date)
        hits = [f for f in flags.of_kind(kind) if abs((pd.Timestamp(f.start) - day).days) <= 2]
        assert hits, f"{kind} {date}: {flags.to_frame()[['kind', 'start', 'cause']]}"
    run = [f for f in flags.of_kind("run") if f.cause == "unmetered withdrawal"]
    assert run and run[0].volume_m3 < 0


def test_at_most_one_false_flag_per_five_years(demo):
    _, _, balance, flags, truth = demo
    planted = [pd.Timestamp(d) for _, d in _planted(truth)]
    false = [
        f for f in flags if not any(abs((pd.Timestamp(f.start) - d).days) <= 2 for d in planted)
    ]
    years = len(balance.daily) / 365.25
    assert len(false) <= years / 5, flags.to_frame()[["kind", "start", "cause"]]


def test_datum_shift_proposes_the_offset(demo):
    _, _, _, flags, truth = demo
    shift = flags.of_kind("datum_shift")[0]
    offset = truth["problems"]["datum_shift"]["offset_m"]
    assert shift.correction.value == pytest.approx(-offset, abs=0.03)
    assert not shift.accepted


def test_seepage_runs_and_reports(demo):
    site, lake, balance, flags, truth = demo
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LakebalanceWarning)
        fit = lake.seepage
    lo, hi = fit.conf_int()["k"]
    assert lo <= truth["seepage"]["k"] <= hi
    table = fit.rate_table()
    assert {"sill", "spill"} <= set(table["name"])


@pytest.mark.parametrize("command", ["flags", "seepage"])
def test_commands_print_json(demo, command, capsys, tmp_path):
    site = demo[0]
    code = main([command, str(site.path), "--json", "--out", str(tmp_path)])
    assert code == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["seed"] == site.site.seed
    assert "licensed professional" in doc["note"]
    assert all(p.startswith(str(tmp_path)) for p in doc["written"])
