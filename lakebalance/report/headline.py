"""What the report's first page must say so that every part of one report speaks of one stage.

* A gauge datum shift that the flags found but the site file has not accepted (or that the field
  checks do not confirm) is named beside the residual it affects, with its size and what the
  field checks say of it (:func:`open_shifts`).
* The drawdown outlook starts from the corrected stage when the field checks confirm a shift
  still in force at its start, else from the recorded stage with the reason (:func:`plan_outlook`).
* A report of a chosen year (``--year``) starts its outlook at the end of that year, or leaves it
  out with the reason (no stage that day).
* The year's totals are given measured-only and infilled, with the share estimated
  (:func:`graded_sentence`).

The functions read a :class:`~lakebalance.analysis.Lake` and return plain data and sentences; the
report's layout is :mod:`lakebalance.report.build`'s.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..display import number

if TYPE_CHECKING:  # pragma: no cover
    from ..analysis import Lake

__all__ = [
    "open_shifts",
    "plan_outlook",
    "shift_sentences",
    "graded_sentence",
    "graded_numbers",
    "confirmed_corrections",
    "residual_with",
    "confirmed_sentence",
    "survey_sentence",
]

_STATUS_WORDS = {
    "confirmed": "confirmed by the field checks",
    "contradicted": "contradicted by the field checks (they show no change of the datum)",
    "different": "seen by the field checks with another size",
    "unchecked": "not checked: no field check on one side of it",
    "found by the field checks": "found by the field checks (the residual flags did not see it)",
    None: "not checked: no field checks in the record",
}


def _step_value(checks: Any, day: str) -> float | None:
    """The correction (m) the field checks give from a step on ``day`` on: the step's value
    after it and the offsets that continue it (consecutive, agreeing within their tolerance),
    weighted by their days; None when the checks propose no step there."""
    props = list(checks.proposals) if checks is not None else []
    at = next((i for i, p in enumerate(props) if p.shape == "step" and p.step_day == day), None)
    if at is None:
        return None
    first = props[at].corrections[-1]
    parts = [first]
    end = first.end
    for p in props[at + 1 :]:
        c = p.corrections[0]
        if p.shape != "offset" or end is None:
            break
        if pd.Timestamp(c.start) != pd.Timestamp(end) + pd.Timedelta(days=1):
            break
        if abs(c.value - first.value) > checks.tolerance_m:
            break
        parts.append(c)
        end = c.end
    days = [(pd.Timestamp(c.end) - pd.Timestamp(c.start)).days + 1 for c in parts]
    return float(np.average([c.value for c in parts], weights=days))


def open_shifts(run: Lake, last_day: str) -> list[dict[str, Any]]:
    """Datum shifts flagged on or before ``last_day`` (ISO) and not accepted in the site file.

    Each: ``day``, ``step_m`` (the record's jump, m), ``volume_m3`` (the storage jump it puts in
    the residual that day), ``status`` (the field checks' judgment, or None without checks),
    ``correction_m`` (the ``[[correction]]`` value that undoes it).
    """
    flags = run.get("flags")
    checks = run.get("field_checks")
    out = []
    for f in flags.of_kind("datum_shift") if flags is not None else ():
        if f.accepted or f.start > last_day or f.magnitude_m is None:
            continue
        judgment = checks.judgment(f.start) if checks is not None else None
        status = None if judgment is None else judgment.status
        value = None if f.correction is None else float(f.correction.value)
        measured = _step_value(checks, f.start) if status == "confirmed" else None
        out.append(
            {
                "day": f.start,
                # confirmed: the size the field checks measure, else the flag's own
                "step_m": round(-measured if measured is not None else float(f.magnitude_m), 4),
                "volume_m3": round(float(f.volume_m3), 0),
                "status": status,
                "correction_m": None
                if value is None
                else round(measured if measured is not None else value, 4),
            }
        )
    # steps the field checks find where the flags saw none
    flagged = {x["day"] for x in out}
    balance = run.get("balance")
    for p in checks.proposals if checks is not None else ():
        if p.shape != "step" or p.accepted or p.step_day is None or p.step_day > last_day:
            continue
        if p.step_day in flagged:
            continue
        after = _step_value(checks, p.step_day)
        before = p.corrections[0].value if len(p.corrections) > 1 else 0.0
        step = -(after - before)
        area = np.nan
        if balance is not None and pd.Timestamp(p.step_day) in balance.daily.index:
            area = float(balance.daily.loc[pd.Timestamp(p.step_day), "area_m2"])
        out.append(
            {
                "day": p.step_day,
                "step_m": round(step, 4),
                "volume_m3": round(step * area, 0) if math.isfinite(area) else 0.0,
                "status": "found by the field checks",
                "correction_m": round(-step, 4),
            }
        )
    return sorted(out, key=lambda x: x["day"])


def shift_sentences(shifts: list[dict[str, Any]], first_day: str) -> list[str]:
    """The first page's words on the open shifts: those of the year beside its residual, those
    before it as still in the record; those the field checks contradict last, not proposed."""
    out, contradicted = [], []
    for s in shifts:
        if s["status"] == "contradicted":
            contradicted.append(s["day"])
            continue
        status = _STATUS_WORDS.get(s["status"], s["status"])
        accept = (
            f' If it is real, add [[correction]] series = "stage", start = {s["day"]}, value = '
            f"{s['correction_m']:+.3f}."
            if s["correction_m"] is not None and s["status"] != "contradicted"
            else ""
        )
        seen = "found" if s["status"] == "found by the field checks" else "flagged"
        if s["day"] >= first_day:
            out.append(
                f"This residual includes a gauge datum shift of {s['step_m']:+.3f} m {seen} on "
                f"{s['day']} and not accepted in the site file, {status}: its storage jump alone "
                f"is {'+' if s['volume_m3'] > 0 else ''}{number(s['volume_m3'] / 1e3, 4)} thousand m³ of the residual, and it biases the "
                f"outflow of every later day.{accept}"
            )
        else:
            out.append(
                f"The stage record still carries a gauge datum shift of {s['step_m']:+.3f} m "
                f"{seen} on {s['day']}, not accepted and {status}; it biases this year's stage "
                f"and outflow.{accept}"
            )
    if contradicted:
        out.append(
            f"The datum shift{'s' if len(contradicted) > 1 else ''} flagged on "
            f"{', '.join(contradicted)} {'are' if len(contradicted) > 1 else 'is'} contradicted by "
            "the field checks (the logger kept its datum) and not proposed as a correction; the "
            "residual there has another cause."
        )
    return out


def plan_outlook(run: Lake, days: pd.DatetimeIndex, explicit_year: bool) -> dict[str, Any]:
    """Where the outlook starts and why.

    Parameters
    ----------
    run : Lake
    days : pandas.DatetimeIndex
        The reported year's days.
    explicit_year : bool
        The year was asked for (``--year``): the outlook starts at its last day.

    Returns
    -------
    dict
        ``start`` (ISO or None = the last recorded stage), ``start_stage_m`` (m or None = the
        record's), ``sentence`` (the first page's words).
    """
    records = run.records
    stage = records.daily["stage"] if "stage" in records.daily.columns else None
    if stage is None or not stage.notna().any():
        return {"start": None, "start_stage_m": None, "sentence": ""}
    start_ts = days[-1] if explicit_year else pd.Timestamp(stage.last_valid_index())
    start = start_ts.strftime("%Y-%m-%d")
    recorded = float(stage.get(start_ts, np.nan))
    plan: dict[str, Any] = {"start": start if explicit_year else None, "start_stage_m": None}
    if run.site.drawdown.start is not None and not explicit_year:
        plan["sentence"] = f"The outlook starts on {run.site.drawdown.start} ([drawdown] start)."
        return plan
    if not math.isfinite(recorded):
        plan["sentence"] = (
            f"The drawdown outlook is left out: there is no recorded stage on {start}, the last "
            "day of the reported year, to start it from."
        )
        return plan
    where = "the end of the reported year" if explicit_year else "the last recorded day"
    checks = run.get("field_checks")
    if checks is not None and len(checks.comparison):
        return {**plan, **_from_checks(checks, start_ts, recorded, where)}
    shifts = [s for s in open_shifts(run, start) if s["correction_m"] is not None]
    confirmed = [s for s in shifts if s["status"] == "confirmed"]
    doubtful = [s for s in shifts if s["status"] not in ("confirmed", "contradicted")]
    if confirmed and not doubtful:
        h0 = recorded + sum(s["correction_m"] for s in confirmed)
        plan["start_stage_m"] = round(h0, 4)
        days_text = ", ".join(s["day"] for s in confirmed)
        plan["sentence"] = (
            f"The drawdown outlook starts on {start} ({where}) from {h0:.3f} m: the recorded "
            f"{recorded:.3f} m corrected for the datum shift of {days_text} that the field checks "
            "confirm."
        )
    elif doubtful:
        total = sum(s["correction_m"] for s in doubtful)
        days_text = ", ".join(s["day"] for s in doubtful)
        plan["sentence"] = (
            f"The drawdown outlook starts on {start} ({where}) from the recorded {recorded:.3f} m, "
            f"not corrected: the datum shift flagged on {days_text} is not confirmed; if it is "
            f"real, the true start is {recorded + total:.3f} m."
        )
    else:
        plan["sentence"] = (
            f"The drawdown outlook starts on {start} ({where}) from the recorded {recorded:.3f} m."
        )
    return plan


def _from_checks(checks: Any, start: pd.Timestamp, recorded: float, where: str) -> dict:
    """The outlook's start stage from the field checks' proposed corrections not yet accepted:
    the correction in force on the start day, or the last stretch's held after the last check."""
    from ..records import correction_values

    day = start.strftime("%Y-%m-%d")
    open_props = [p for p in checks.proposals if not p.accepted]
    total = sum(
        float(correction_values(c, pd.DatetimeIndex([start]))[0])
        for p in open_props
        for c in p.corrections
    )
    last_check = pd.Timestamp(checks.comparison["time"].max())
    held = ""
    if total == 0.0 and open_props and start > last_check:
        last = open_props[-1]
        if pd.Timestamp(last.last_check) >= last_check:
            c = last.corrections[-1]
            total = float(c.end_value if c.end_value is not None else c.value)
            held = f", held from the last field check ({last_check.date()})"
    if abs(total) < 1e-9:
        return {
            "start_stage_m": None,
            "sentence": f"The drawdown outlook starts on {day} ({where}) from the recorded "
            f"{recorded:.3f} m, which the field checks leave uncorrected.",
        }
    h0 = recorded + total
    return {
        "start_stage_m": round(h0, 4),
        "sentence": f"The drawdown outlook starts on {day} ({where}) from {h0:.3f} m: the "
        f"recorded {recorded:.3f} m corrected by {total * 1000:+.0f} mm as the field checks "
        f"propose{held} (not yet accepted in the site file).",
    }


def confirmed_corrections(run: Lake, last_day: str) -> list:
    """The corrections of the datum shifts the field checks confirm (or find) up to ``last_day``
    (ISO) that the site file has not accepted: from the step's day on (as the first page's
    ``[[correction]]`` would apply it), by the size the checks measure."""
    from ..records import Correction

    out = []
    for s in open_shifts(run, last_day):
        if s["status"] in ("confirmed", "found by the field checks") and s["correction_m"]:
            out.append(
                Correction(
                    "stage",
                    "offset",
                    s["day"],
                    None,
                    float(s["correction_m"]),
                    reason="datum shift confirmed by the field checks",
                )  # fmt: skip
            )
    return out


def residual_with(run: Lake, corrections: list, year: int) -> dict[str, Any]:
    """The year's residual (m³) and closure (% of gains) with ``corrections`` applied to the
    records as if accepted: the balance closed again (no bands) on the corrected records."""
    import dataclasses

    from ..analysis import Lake

    if not corrections:
        return {}
    site = dataclasses.replace(run.site, correction=(*run.site.correction, *corrections))
    other = Lake(site, seed=run.seed, draws=0)
    balance = other.get("balance")
    if balance is None:
        return {}
    wy = balance.water_years()
    if year not in wy.index:
        return {}
    row = wy.loc[year]
    res, pct = float(row["residual_m3"]), float(row["closure_error_pct"])
    return {
        "residual_confirmed_m3": round(res, 0) if math.isfinite(res) else None,
        "closure_confirmed_percent": round(pct, 1) if math.isfinite(pct) else None,
    }


def confirmed_sentence(numbers: dict[str, Any], n: int) -> str:
    """The first page's words on the residual with the confirmed shifts applied."""
    res = numbers.get("residual_confirmed_m3")
    if res is None:
        return ""
    pct = numbers.get("closure_confirmed_percent")
    text = (
        f"With the datum shift{'s' if n > 1 else ''} the field checks confirm applied (as the "
        f"[[correction]] above would, not yet accepted in the site file), the residual of the "
        f"year is {'+' if res > 0 else ''}{number(res / 1e3, 4)} thousand m³"
    )
    if pct is not None:
        text += f" ({abs(pct):.1f} % of the measured gains)"
    return text + "."


def survey_sentence(run: Lake) -> tuple[str, dict[str, Any]]:
    """The first page's words on the capacity lost between the last two surveys, at the spill
    level (the ``[levels]`` entry ``spill``, else the top of the last survey), and its numbers."""
    surveys = run.get("surveys")
    if surveys is None or len(surveys.dates) < 2:
        return "", {}
    level = run.site.levels.get("spill", surveys.latest.max_stage_m)
    name = "the spill level" if "spill" in run.site.levels else "the top of the survey"
    row = surveys.capacity_lost(float(level))[-1]
    numbers = {
        "capacity_lost_m3": round(row["lost_m3"], 0),
        "capacity_lost_share": round(row["lost_share"], 4),
    }
    text = (
        f"The survey of {row['to']} holds {row['lost_m3']:,.0f} m³ less below {name} "
        f"({float(level):.2f} m) than that of {row['from']} ({100 * row['lost_share']:.2f} %, "
        f"{row['lost_m3_per_year']:,.0f} m³ a year); the balance closes each day with the "
        "relation interpolated in time between the surveys."
    )
    return text, numbers


def graded_numbers(run: Lake, year: int) -> dict[str, Any]:
    """The year's infilled totals, the days with an estimate and the share estimated."""
    balance = run.get("balance")
    if balance is None or balance.grades is None:
        return {}
    g = balance.graded_water_years()
    if year not in g.index:
        return {}
    row = g.loc[year]

    def r(x: Any, d: int) -> float | None:
        v = float(x)
        return round(v, d) if math.isfinite(v) else None

    return {
        "days_with_estimate": int(row["residual_estimated_days"]),
        "days_missing": int(row["residual_missing_days"]),
        "inflow_infilled_m3": r(row["inflow_infilled_m3"], 0),
        "inflow_estimated_share": r(row["inflow_estimated_share"], 3),
        "residual_infilled_m3": r(row["residual_infilled_m3"], 0),
        "residual_estimated_share": r(row["residual_estimated_share"], 3),
    }


def graded_sentence(numbers: dict[str, Any], days: int) -> str:
    """The first page's words on the infilled totals."""
    if not numbers or not numbers.get("days_with_estimate"):
        return ""
    text = (
        f"With the {numbers['days_with_estimate']} days that have an estimated term filled in "
        f"(of {days}; {numbers['days_missing']} still missing), the residual is "
        f"{number(numbers['residual_infilled_m3'] / 1e3, 4)} thousand m³"
        if numbers.get("residual_infilled_m3") is not None
        else ""
    )
    if text and numbers.get("inflow_infilled_m3") is not None:
        share = numbers.get("inflow_estimated_share") or 0.0
        text += (
            f" and gauged inflow {number(numbers['inflow_infilled_m3'] / 1e3, 4)} thousand m³, "
            f"{100 * share:.1f} % of it estimated"
        )
    return text + "; the totals above are measured-only." if text else ""
