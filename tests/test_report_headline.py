"""The report's first page speaks of one stage: an open datum shift beside the residual, the
outlook's start, infilled totals. Simulated lakes of tests/lakefamilies.py (invented; the planted
shift is the known truth)."""

from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest
from lakefamilies import Fault, simulate

from lakebalance.report.build import make_report

SHIFT_DAY = "2002-06-15"


@pytest.fixture(scope="module")
def shifted(tmp_path_factory):
    """A flow-through lake with a +60 mm datum shift and quarterly staff readings (±3 mm)."""
    root = tmp_path_factory.mktemp("shifted")
    sim = simulate("flow_through", 21, root, [Fault("datum_shift", SHIFT_DAY, 1, 0.06)], years=3)
    truth = pd.Series(sim.truth["stage_true_m"], index=sim.truth["dates"])
    rng = np.random.default_rng(21)
    days = truth.index[::91]
    staff = truth[days].to_numpy() + rng.uniform(-0.003, 0.003, days.size)
    pd.DataFrame(
        {"date": (days + pd.Timedelta(hours=10)).strftime("%Y-%m-%d %H:%M"), "value": staff}
    ).to_csv(root / "staff.csv", index=False)
    text = sim.site_file.read_text(encoding="utf-8").replace("draws = 200", "draws = 20")
    text += '\n[series.staff_gauge]\nfile = "staff.csv"\nunits = "m"\n'
    text += '\n[drawdown]\nscenario = "replay"\nmembers = 5\ndays = 30\n'
    sim.site_file.write_text(text, encoding="utf-8")
    return sim


def _summary(out):
    return json.loads((out / "summary.json").read_text(encoding="utf-8"))


def test_open_shift_beside_the_residual_and_outlook_at_year_end(shifted, tmp_path):
    """--year 2002 (the year of the shift): the first page names the shift right after the
    residual with what the field checks say of it, and the outlook starts on the year's last day
    from the corrected stage (within 10 mm of the simulated truth)."""
    make_report(shifted.site_file, tmp_path / "r", year=2002, draws=20, members=5)
    doc = _summary(tmp_path / "r")
    words = doc["summary"]
    i = next(k for k, s in enumerate(words) if s.startswith("The balance closed"))
    assert "see the datum shift below" in words[i]
    m = re.match(r"This residual includes a gauge datum shift of ([+-]\d\.\d+) m", words[i + 1])
    # sized by the field checks: within the two checks' error (2 × 3 mm) of the planted 60 mm
    assert m and abs(float(m.group(1)) - 0.06) <= 0.006
    assert SHIFT_DAY in words[i + 1] and "field checks" in words[i + 1]
    # a flag the field checks contradict is said to be so, and not proposed
    for s in words:
        if "contradicted by the field checks" in s:
            assert "not proposed" in s and "[[correction]]" not in s
    head = doc["headline"]
    # the residual with the shift the checks find applied, as if accepted: the balance closed
    # again. A logger reading high inflates the rated outflow of every later day, hence the
    # residual (residual = storage change - measured terms), so the corrected one is lower
    confirmed = next(s for s in words if s.startswith("With the datum shift"))
    assert "not yet accepted" in confirmed
    assert head["residual_confirmed_m3"] < head["residual_m3"]
    assert head["outlook_start"] == "2002-09-30"
    truth = pd.Series(shifted.truth["stage_true_m"], index=shifted.truth["dates"])
    assert head["outlook_start_stage_m"] == pytest.approx(truth["2002-09-30"], abs=0.01)
    outlook = next(s for s in words if s.startswith("The drawdown outlook starts"))
    assert "2002-09-30" in outlook and "as the field checks propose" in outlook
    odds = doc["tables"]["drawdown-odds"]["title"]
    assert "2002-09-30" in odds


def test_outlook_left_out_when_the_year_has_no_last_stage(shifted, tmp_path):
    """With no stage on the year's last day the outlook is left out, and the first page says
    why."""
    site = shifted.site_file
    root = site.parent
    stage = pd.read_csv(root / "stage.csv")
    stage = stage[stage["date"] != "2003-09-30"]
    stage.to_csv(root / "stage_gap.csv", index=False)
    text = site.read_text(encoding="utf-8").replace('file = "stage.csv"', 'file = "stage_gap.csv"')
    other = root / "site_gap.toml"
    other.write_text(text, encoding="utf-8")
    make_report(other, tmp_path / "g", year=2003, draws=20, members=5)
    doc = _summary(tmp_path / "g")
    assert any(
        s.startswith("The drawdown outlook is left out: there is no recorded stage on 2003-09-30")
        for s in doc["summary"]
    )
    assert "forecast" in doc["unavailable"]
