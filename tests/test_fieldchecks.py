"""Field checks against the logger: sizing steps and drifts, judging flagged shifts.

The corrections are the usual shapes of hydrometric practice (a shift applied from a dated
event, a correction prorated in time between two visits: USGS Techniques and Methods 3-A19,
Sauer and Turnipseed 2010). The truth is analytic (a simulated record with a planted step and a
planted linear drift), so each check has a known answer.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from lakebalance.fieldchecks import (
    FieldCheckOptions,
    apply_corrections,
    compare_checks,
    judge_shifts,
    size_corrections,
)
from lakebalance.records import Correction, correction_values

NOISE_M = 0.003  # half-width of the check readings' error, m


def _record(seed: int):
    """Three years of daily stage, a +25 mm step on day 300 and a drift of +0.2 mm/day from
    the check on day 540 on, with quarterly checks (every 91 days) read to within ±3 mm."""
    rng = np.random.default_rng(seed)
    index = pd.date_range("2021-01-01", periods=3 * 365, freq="D", name="date")
    t = np.arange(len(index))
    truth = 8.0 + 0.6 * np.sin(2 * np.pi * t / 365.25) + np.cumsum(rng.normal(0, 0.002, t.size))
    check_days = np.arange(0, len(index), 91)
    step_day, drift_from = 300, int(check_days[6])
    offset = np.where(t >= step_day, 0.025, 0.0) + np.where(
        t >= drift_from, 0.0002 * (t - drift_from), 0.0
    )
    logger = pd.Series(truth + offset, index=index, name="stage")
    # a staff reading on the day, with a bounded reading error (uniform within ±3 mm)
    times = index[check_days] + pd.Timedelta(hours=11)
    checks = pd.Series(truth[check_days] + rng.uniform(-NOISE_M, NOISE_M, check_days.size), times)
    return index, pd.Series(truth, index=index), logger, checks, check_days, step_day


@pytest.mark.parametrize("seed", range(1, 41))
def test_step_and_drift_corrected_within_the_check_error(seed):
    """Corrected stage within 3 mm of the truth between the first and the last check.

    The tolerance follows from the check noise: the correction on a day between two checks is a
    weighted mean (weights ≥ 0 summing to 1) of the two checks' errors, each within ±3 mm, so
    the corrected stage is within 3 mm of the truth when the fault has the shape used (a step
    located on its day, a drift linear between checks). Analytic truth (simulated record).
    """
    index, truth, logger, checks, check_days, step_day = _record(seed)
    comp = compare_checks(checks, logger)
    props = size_corrections(comp, logger, FieldCheckOptions(reading_error=NOISE_M))
    shapes = [p.shape for p in props]
    assert "step" in shapes and "drift" in shapes
    step = next(p for p in props if p.shape == "step")
    assert step.step_day == index[step_day].date().isoformat()
    corrected = apply_corrections(logger, [c for p in props for c in p.corrections])
    between = slice(int(check_days[0]), int(check_days[-1]) + 1)
    err = (corrected - truth).to_numpy()[between]
    assert np.max(np.abs(err)) <= NOISE_M + 1e-9
    # and the uncorrected record is well outside it
    assert np.max(np.abs((logger - truth).to_numpy()[between])) > 0.05


def test_clean_record_proposes_nothing():
    """A logger that agrees with every check within the noise gets no proposal (common
    practice, no source: differences within the readings' error are not corrected)."""
    index, truth, _, checks, _, _ = _record(7)
    comp = compare_checks(checks, truth.rename("stage"))
    assert size_corrections(comp, truth, FieldCheckOptions(reading_error=NOISE_M)) == ()


def test_flagged_shift_confirmed_or_contradicted():
    """A flagged step that the checks see is confirmed; one they do not see is contradicted."""
    index, truth, logger, checks, check_days, step_day = _record(3)
    comp = compare_checks(checks, logger)
    real = index[step_day].date().isoformat()
    fake = index[100].date().isoformat()  # inside a stretch with no change
    out = judge_shifts(comp, [(real, 0.025), (fake, -0.03), ("2020-06-01", 0.02)])
    assert [j.status for j in out] == ["confirmed", "contradicted", "unchecked"]
    assert out[0].check_step_m == pytest.approx(0.025, abs=2 * NOISE_M)


def test_logger_interpolated_to_the_check_time():
    """With sub-daily logger readings the logger is read at the check's own time."""
    times = pd.date_range("2022-03-01", periods=48, freq="h")
    sub = pd.Series(np.linspace(5.0, 5.47, 48), index=times)
    daily = sub.resample("D").mean()
    checks = pd.Series([5.105], index=[pd.Timestamp("2022-03-01 10:30")])
    comp = compare_checks(checks, daily, sub)
    assert comp["logger_m"].iloc[0] == pytest.approx(5.105)
    assert comp["logger_from"].iloc[0].startswith("reading interpolated")


def test_drift_correction_values_linear_in_time():
    """A drift correction goes linearly from value on start to end_value on end."""
    idx = pd.date_range("2022-01-01", periods=11, freq="D")
    c = Correction("stage", "drift", "2022-01-01", "2022-01-11", 0.0, end_value=0.010)
    v = correction_values(c, idx)
    assert v == pytest.approx(np.linspace(0, 0.010, 11))
    with pytest.raises(ValueError, match="end_value"):
        Correction("stage", "drift", "2022-01-01", None, 0.0)


def test_lake_reads_staff_gauge_and_proposes(tmp_path):
    """Through the analysis object: a simulated lake (tests/lakefamilies.py) with a planted
    +40 mm datum shift and quarterly staff readings; the field checks propose a step on the
    shift's day, and the residual flag of that shift (if any) is judged confirmed."""
    from lakefamilies import Fault, simulate

    from lakebalance.analysis import open_site

    sim = simulate("flow_through", 5, tmp_path, [Fault("datum_shift", "2002-06-15", 1, 0.04)],
                   years=2)  # fmt: skip
    truth = pd.Series(sim.truth["stage_true_m"], index=sim.truth["dates"])
    rng = np.random.default_rng(5)
    days = truth.index[::91]
    staff = truth[days].to_numpy() + rng.uniform(-NOISE_M, NOISE_M, days.size)
    pd.DataFrame(
        {"date": (days + pd.Timedelta(hours=10)).strftime("%Y-%m-%d %H:%M"), "value": staff}
    ).to_csv(tmp_path / "staff.csv", index=False)
    text = sim.site_file.read_text(encoding="utf-8").replace("draws = 200", "draws = 0")
    text += '\n[series.staff_gauge]\nfile = "staff.csv"\nunits = "m"\n'
    sim.site_file.write_text(text, encoding="utf-8")
    lake = open_site(sim.site_file, draws=0)
    fc = lake.field_checks
    assert fc is not None and len(fc.comparison) == days.size
    steps = [p for p in fc.proposals if p.shape == "step"]
    assert steps and steps[0].step_day == "2002-06-15"
    assert not any(p.accepted for p in fc.proposals)
    for j in fc.judgments:
        if j.day == "2002-06-15":
            assert j.status == "confirmed"
    assert "[[correction]]" in steps[0].toml()
    assert "field checks" in str(fc.summary())
