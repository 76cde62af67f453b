"""Field checks: staff-gauge readings against the stage logger, and the corrections they size.

At each visit the observer reads the staff gauge (or surveys the water surface) on the gauge
datum; the logger's reading at the same time should agree. A difference that changes between two
visits is a fault of the logger: a *step* (the datum moved on one day: a knock, a re-installed
sensor) or a *drift* (the sensor creeping between the visits). This module compares the checks
with the logger, sizes the correction of each stretch between two checks, proposes each as a
``[[correction]]`` with its evidence, and judges the datum shifts the residual flags found:
confirmed by the checks, contradicted by them (not proposed), or not checked.

The shapes are those of hydrometric practice (a correction prorated in time between visits, or a
shift applied from a dated event; USGS Techniques and Methods 3-A19, Sauer and Turnipseed 2010,
and WMO-No. 1044, 2010, ch. 5), in our own words.

Pure: pandas Series and frames in, frozen results out; no file reading.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from .options import Options, setting
from .records import Correction, correction_values
from .results import Summary

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = [
    "FieldCheckOptions",
    "Proposal",
    "ShiftJudgment",
    "FieldChecks",
    "compare_checks",
    "size_corrections",
    "judge_shifts",
    "apply_corrections",
]


@dataclass(frozen=True)
class FieldCheckOptions(Options):
    """``[field_checks]``: how check readings are compared with the logger.

    Parameters
    ----------
    reading_error : float
        Largest error of one check reading, m (half the width of its error band: a staff read to
        the nearest 5 mm has 2.5 mm, wave action adds to it). Differences within twice this
        (the error of a difference of two checks) are not a change.
    step_z : float
        Robust z-score of a day-to-day change of the logger above which it is taken as the step
        that explains a change of the check differences (-).
    """

    reading_error: float = setting(0.003, unit="m", low=0.0, high=0.5, low_open=True)
    step_z: float = setting(5.0, unit="-", low=2.0, high=100.0)


Shape = Literal["offset", "step", "drift"]


@dataclass(frozen=True)
class Proposal:
    """One proposed correction of the logger between two field checks.

    Attributes
    ----------
    shape : {"offset", "step", "drift"}
        A constant difference, a step on one day (``step_day``), or a drift between the checks.
    first_check, last_check : str
        ISO times of the two checks that bound it.
    corrections : tuple of Correction
        The ``[[correction]]`` tables that apply it (a step gives one or two offsets).
    evidence : tuple of str
        The check readings, the logger at those times, the step found in the logger.
    accepted : bool
        Every one of its corrections is in the site file (then applied).
    step_day : str or None
        ISO date of a step.
    """

    shape: Shape
    first_check: str
    last_check: str
    corrections: tuple[Correction, ...]
    evidence: tuple[str, ...] = ()
    accepted: bool = False
    step_day: str | None = None

    def toml(self) -> str:
        """The ``[[correction]]`` tables to paste into the site file."""
        out = []
        for c in self.corrections:
            lines = [
                "[[correction]]",
                f'series = "{c.series}"',
                f'kind = "{c.kind}"',
                f"start = {c.start}",
                f"end = {c.end}",
                f"value = {c.value:+.4f}",
            ]
            if c.end_value is not None:
                lines.append(f"end_value = {c.end_value:+.4f}")
            lines.append(f'reason = "{c.reason}"')
            out.append("\n".join(lines))
        return "\n\n".join(out)


@dataclass(frozen=True)
class ShiftJudgment:
    """What the field checks say of one datum shift found by the residual flags.

    ``status`` is ``"confirmed"`` (the check differences change by the flagged step, within their
    error), ``"contradicted"`` (they do not change: not proposed), ``"different"`` (they change,
    by another amount) or ``"unchecked"`` (no check on one side). ``check_step_m`` is the change
    of logger-minus-check across it (m; NaN when unchecked).
    """

    day: str
    flagged_step_m: float
    status: Literal["confirmed", "contradicted", "different", "unchecked"]
    check_step_m: float
    detail: str


@dataclass(frozen=True)
class FieldChecks:
    """The field checks of a record and what they propose.

    Attributes
    ----------
    comparison : pandas.DataFrame
        One row per check: ``time``, ``check_m``, ``logger_m``, ``difference_m`` (logger minus
        check, m) and ``logger_from`` (how the logger value was had).
    proposals : tuple of Proposal
        The corrections proposed between consecutive checks whose difference exceeds the
        tolerance.
    judgments : tuple of ShiftJudgment
        The residual flags' datum shifts, judged by the checks.
    tolerance_m : float
        2 × ``reading_error`` (m): the largest difference of two checks that is noise.
    notes : tuple of str
    """

    comparison: pd.DataFrame
    proposals: tuple[Proposal, ...] = ()
    judgments: tuple[ShiftJudgment, ...] = ()
    tolerance_m: float = 0.006
    notes: tuple[str, ...] = ()

    @property
    def corrections(self) -> tuple[Correction, ...]:
        """Every proposed correction, in time order."""
        return tuple(c for p in self.proposals for c in p.corrections)

    def judgment(self, day: str) -> ShiftJudgment | None:
        """The judgment of the flagged shift on ``day`` (ISO), if there is one."""
        return next((j for j in self.judgments if j.day == day), None)

    def to_frame(self) -> pd.DataFrame:
        """The comparison table."""
        return self.comparison

    def to_dict(self) -> dict:
        """The JSON form (m, ISO times)."""
        rows = self.comparison.assign(time=self.comparison["time"].astype(str))
        return {
            "checks": rows.to_dict(orient="records"),
            "tolerance_m": self.tolerance_m,
            "proposals": [
                {
                    "shape": p.shape,
                    "first_check": p.first_check,
                    "last_check": p.last_check,
                    "step_day": p.step_day,
                    "accepted": p.accepted,
                    "evidence": list(p.evidence),
                    "corrections": [c.__dict__ for c in p.corrections],
                }
                for p in self.proposals
            ],
            "judgments": [j.__dict__ for j in self.judgments],
            "notes": list(self.notes),
        }

    def summary(self) -> Summary:
        """The checks, the proposals and the judgments in words."""
        d = self.comparison["difference_m"].to_numpy(dtype=float)
        lines = [
            f"{len(d)} field checks; logger minus check from {np.nanmin(d) * 1000:+.0f} to "
            f"{np.nanmax(d) * 1000:+.0f} mm (noise up to ±{self.tolerance_m * 1000:.0f} mm)"
            if len(d)
            else "no field check"
        ]
        for p in self.proposals:
            status = "accepted, applied" if p.accepted else "proposed"
            lines.append(f"  {p.shape} {p.first_check[:10]} to {p.last_check[:10]}: {status}")
            lines += [f"    {e}" for e in p.evidence]
        for j in self.judgments:
            lines.append(f"  flagged shift {j.day}: {j.status} ({j.detail})")
        lines += list(self.notes)
        return Summary("\n".join(lines), "field checks")


# --------------------------------------------------------------------------------------------
def compare_checks(
    checks_m: pd.Series, logger_daily_m: pd.Series, logger_subdaily_m: pd.Series | None = None
) -> pd.DataFrame:
    """The logger at the time of each check.

    Parameters
    ----------
    checks_m : pandas.Series
        Check readings on the gauge datum, m, indexed by their (tz-naive, site-zone) times.
    logger_daily_m : pandas.Series
        The logger's daily mean stage, m (daily index).
    logger_subdaily_m : pandas.Series, optional
        The logger's readings, m, by time: when given, the logger is interpolated linearly to the
        check's time (within 6 h of a reading); else the check day's mean is used, and
        ``within_day_m`` (half the day's change, the mean of the changes from the day before
        and to the day after) says how far a reading at one time of the day may lie from it.

    Returns
    -------
    pandas.DataFrame
        Columns ``time``, ``check_m``, ``logger_m``, ``difference_m`` (logger − check),
        ``logger_from``, ``within_day_m`` (m; 0 when read at the check's time).
    """
    import pandas as pd

    times = pd.DatetimeIndex(checks_m.index)
    check = checks_m.to_numpy(dtype=float)
    logger = np.full(len(times), np.nan)
    how = np.array(["daily mean"] * len(times), dtype=object)
    within = np.zeros(len(times))
    if logger_subdaily_m is not None and len(logger_subdaily_m):
        sub = logger_subdaily_m.dropna().sort_index()
        t = pd.DatetimeIndex(sub.index).as_unit("ns").asi8.astype(float)
        x = times.as_unit("ns").asi8.astype(float)
        at = np.interp(x, t, sub.to_numpy(dtype=float), left=np.nan, right=np.nan)
        pos = np.searchsorted(t, x)
        near = np.minimum(
            np.abs(x - t[np.clip(pos - 1, 0, t.size - 1)]),
            np.abs(t[np.clip(pos, 0, t.size - 1)] - x),
        )
        ok = np.isfinite(at) & (near <= 6 * 3600e9)
        logger[ok] = at[ok]
        how[ok] = "reading interpolated to the check's time"
    rest = ~np.isfinite(logger)
    if rest.any():
        days = times[rest].normalize()
        logger[rest] = logger_daily_m.reindex(days).to_numpy(dtype=float)
        # a reading at one time of the day against the day's mean: they may differ by up to
        # about half the day's change (the mean change of the days around it)
        around = logger_daily_m.reindex(
            pd.date_range(days.min() - pd.Timedelta(days=1), days.max() + pd.Timedelta(days=1))
        )
        before = around.reindex(days - pd.Timedelta(days=1)).to_numpy(dtype=float)
        after = around.reindex(days + pd.Timedelta(days=1)).to_numpy(dtype=float)
        change = np.abs(after - before) / 2.0
        within[rest] = np.where(np.isfinite(change), 0.5 * change, 0.0)
    return pd.DataFrame(
        {
            "time": times,
            "check_m": check,
            "logger_m": logger,
            "difference_m": logger - check,
            "logger_from": how,
            "within_day_m": within,
        }
    )


def _located_step(
    stage_m: np.ndarray,
    k0: int,
    k1: int,
    change_m: float,
    z: float,
    candidates: Sequence[int],
) -> int | None:
    """The day in (k0, k1] on which the logger jumps by about ``change_m``, or None.

    A candidate day (a flagged datum shift) is taken when it lies inside; otherwise the day whose
    day-to-day change of the stage, less the median of the 15 days around it (the lake's own
    change), has the sign of ``change_m``, at least half its size and a robust z-score (median
    absolute deviation × 1.4826 of those departures over the record) of at least ``z``. Used
    when there is no balance to choose with (:func:`_step_or_drift`).
    """
    inside = [c for c in candidates if k0 < c <= k1]
    if inside:
        return int(inside[0])
    dh = np.diff(stage_m)  # dh[k-1] = h[k] - h[k-1]
    if np.isfinite(dh).sum() < 15:
        return None
    from numpy.lib.stride_tricks import sliding_window_view

    padded = np.r_[np.full(7, np.nan), dh, np.full(7, np.nan)]
    with np.errstate(all="ignore"):
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            local = np.nanmedian(sliding_window_view(padded, 15), axis=1)
    dep = dh - local
    finite = dep[np.isfinite(dep)]
    scale = 1.4826 * float(np.median(np.abs(finite - np.median(finite))))
    seg = dep[k0:k1]  # days k0+1 .. k1
    if seg.size == 0 or not np.isfinite(seg).any():
        return None
    score = np.where(np.sign(seg) == np.sign(change_m), np.abs(seg), 0.0)
    score = np.nan_to_num(score)
    j = int(np.argmax(score))
    if score[j] >= 0.5 * abs(change_m) and score[j] >= z * max(scale, 1e-12):
        return k0 + 1 + j
    return None


def _step_or_drift(
    stage_m: np.ndarray,
    k0: int,
    k1: int,
    c0: float,
    c1: float,
    candidates: Sequence[int],
    residual_with: Callable[[np.ndarray], np.ndarray],
) -> int | None:
    """The step day in (k0, k1] that best closes the balance, or None when a drift closes it
    better; near a flagged datum shift (``candidates``) always a step, on the best of the days
    within two of the flag's date.

    Each hypothesis (a step from c0 to c1 on each day, or a drift linear from c0 to c1) corrects
    the stage between the two checks; the balance residual is closed with it and its spread
    (sum of squares about its mean) over the days strictly between the checks is compared. The
    balance explains the lake's own rises, so a storm is not taken for a step; a datum shift of
    an outlet lake also moves the outflow of every later day, which the residual shows.
    """
    inside = [c for c in candidates if k0 < c <= k1]
    span = k1 - k0
    window = slice(k0 + 1, k1)

    def spread(correction: np.ndarray) -> float:
        trial = stage_m.copy()
        trial[k0:k1] = trial[k0:k1] + correction
        r = np.asarray(residual_with(trial), dtype=float)[window]
        r = r[np.isfinite(r)]
        return float(np.sum((r - r.mean()) ** 2)) if r.size > 2 else float("inf")

    j = np.arange(span)
    if inside:
        # a datum shift the residual flags dated: the step goes on the day within two days of
        # that date (the flags' dating tolerance) that best closes the balance
        near = [k for k in range(inside[0] - 2, inside[0] + 3) if k0 < k < k1]
        costs = [spread(np.where(j < k - k0, c0, c1)) for k in near]
        return int(near[int(np.argmin(costs))]) if near else int(inside[0])
    drift = spread(c0 + (c1 - c0) * j / span)
    best, best_k = float("inf"), None
    for k in range(k0 + 1, k1):
        cost = spread(np.where(j < k - k0, c0, c1))
        if cost < best:
            best, best_k = cost, k
    return best_k if best_k is not None and best < drift else None


def size_corrections(
    comparison: pd.DataFrame,
    logger_daily_m: pd.Series,
    options: FieldCheckOptions = FieldCheckOptions(),
    *,
    series: str = "stage",
    step_days: Sequence[str] = (),
    accepted: Sequence[Correction] = (),
    residual_with: Callable[[np.ndarray], np.ndarray] | None = None,
) -> tuple[Proposal, ...]:
    """Size the correction of each stretch between two consecutive checks.

    Parameters
    ----------
    comparison : pandas.DataFrame
        From :func:`compare_checks`.
    logger_daily_m : pandas.Series
        The logger's daily stage, m (where steps are looked for).
    options : FieldCheckOptions
    series : str
        The series key the corrections apply to.
    step_days : sequence of str
        ISO dates of datum shifts already found (residual flags): a step is put there first.
    accepted : sequence of Correction
        The site file's corrections, to mark proposals accepted.
    residual_with : callable, optional
        Daily stage (m, on ``logger_daily_m``'s days) → the daily balance residual (m³/d) closed
        with it: when given, the balance chooses between a step and a drift
        (:func:`_step_or_drift`); else steps are looked for in the stage alone.

    Returns
    -------
    tuple of Proposal

    Notes
    -----
    With c_i = −(logger − check) at check i, the stretch from check i to check i+1 is corrected
    by the constant (c_i + c_{i+1})/2 when |c_{i+1} − c_i| ≤ 2 ``reading_error``; when the
    change exceeds ε_i + ε_{i+1} (ε_i = ``reading_error`` plus the check's ``within_day_m`` when
    it was compared with a daily mean) and the logger shows a step of that size between the two
    checks, by a step (c_i before the step day, c_{i+1} from it); else by a drift linear in time
    from c_i to c_{i+1}. Stretches
    whose two ends are both within 2ε_i of zero are left; consecutive offsets that agree within
    2 ``reading_error`` are one. The corrected stage then differs from the
    truth by a weighted mean of two check errors (weights ≥ 0 that sum to 1), so by at most ε
    when each check is within ±ε of the true stage and the fault has the shape used.
    """
    import pandas as pd

    comp = comparison[np.isfinite(comparison["difference_m"].to_numpy(dtype=float))]
    comp = comp.sort_values("time")
    if len(comp) < 2:
        return ()
    index = pd.DatetimeIndex(logger_daily_m.index)
    stage = logger_daily_m.to_numpy(dtype=float)
    tol = 2.0 * options.reading_error
    eps = options.reading_error + (
        comp["within_day_m"].to_numpy(dtype=float) if "within_day_m" in comp else 0.0
    ) * np.ones(len(comp))
    days = pd.DatetimeIndex(comp["time"]).normalize()
    k = index.get_indexer(days)
    c = -comp["difference_m"].to_numpy(dtype=float)
    cand = [int(i) for i in index.get_indexer(pd.DatetimeIndex(list(step_days))) if i >= 0]
    out: list[Proposal] = []
    n = len(comp)
    for i in range(n - 1):
        if k[i] < 0 or k[i + 1] < 0 or k[i + 1] <= k[i]:
            continue
        tol = eps[i] + eps[i + 1]  # the largest difference of the two checks' errors
        if abs(c[i]) <= 2 * eps[i] and abs(c[i + 1]) <= 2 * eps[i + 1]:
            continue
        t0, t1 = str(comp["time"].iloc[i]), str(comp["time"].iloc[i + 1])
        last = k[i + 1] if i == n - 2 else k[i + 1] - 1  # the last stretch ends on its check
        d0, d1 = index[k[i]].date().isoformat(), index[last].date().isoformat()
        change = c[i + 1] - c[i]
        evidence = [
            f"check {t0[:16]}: staff {comp['check_m'].iloc[i]:.3f} m, logger "
            f"{comp['logger_m'].iloc[i]:.3f} m ({comp['logger_from'].iloc[i]})",
            f"check {t1[:16]}: staff {comp['check_m'].iloc[i + 1]:.3f} m, logger "
            f"{comp['logger_m'].iloc[i + 1]:.3f} m ({comp['logger_from'].iloc[i + 1]})",
        ]
        why = f"field checks {t0[:10]} and {t1[:10]}"
        step = None
        if abs(change) > tol:
            if residual_with is not None:
                step = _step_or_drift(
                    stage, int(k[i]), int(k[i + 1]), c[i], c[i + 1], cand, residual_with
                )
            else:
                step = _located_step(stage, int(k[i]), int(k[i + 1]), -change, options.step_z, cand)
        if abs(change) <= 2.0 * options.reading_error:  # the two readings' own error: constant
            shape: Shape = "offset"
            value = 0.5 * (c[i] + c[i + 1])
            corrs = (Correction(series, "offset", d0, d1, round(float(value), 6), reason=why),)
            evidence.append(f"constant difference: correction {value * 1000:+.1f} mm")
        elif step is not None:
            shape = "step"
            s = index[step].date().isoformat()
            before = index[step - 1].date().isoformat()
            parts = []
            if abs(c[i]) > 2 * eps[i] and step - 1 >= k[i]:
                parts.append(
                    Correction(series, "offset", d0, before, round(float(c[i]), 6), reason=why)
                )
            parts.append(Correction(series, "offset", s, d1, round(float(c[i + 1]), 6), reason=why))
            corrs = tuple(parts)
            jump = stage[step] - stage[step - 1]
            evidence.append(
                f"the logger steps by {jump * 1000:+.0f} mm on {s}; the checks say "
                f"{-change * 1000:+.0f} mm"
                + ("; a step there closes the balance better than a drift" if residual_with else "")
            )
        else:
            shape = "drift"
            span = k[i + 1] - k[i]
            end_value = c[i] + change * (last - k[i]) / span
            corrs = (
                Correction(
                    series, "drift", d0, d1, round(float(c[i]), 6), end_value=round(float(end_value), 6),
                    reason=why,
                ),
            )  # fmt: skip
            evidence.append(
                f"no step in the logger: drift of {change * 1000:+.0f} mm over {span} days"
            )
        ok = all(
            any(a.series == x.series and a.kind == x.kind and a.start == x.start for a in accepted)
            for x in corrs
        )
        out.append(
            Proposal(
                shape,
                t0,
                t1,
                corrs,
                tuple(evidence),
                ok,
                index[step].date().isoformat() if step is not None else None,
            )  # fmt: skip
        )
    return _merge_offsets(tuple(out), 2.0 * options.reading_error)


def _merge_offsets(props: tuple[Proposal, ...], tol: float) -> tuple[Proposal, ...]:
    """Consecutive constant offsets whose values agree within ``tol`` (m) as one offset (the
    mean of their values, weighted by their days): one ``[[correction]]`` for one state of the
    logger."""
    import pandas as pd

    out: list[Proposal] = []
    for p in props:
        prev = out[-1] if out else None
        if (
            prev is not None
            and p.shape == "offset"
            and prev.shape == "offset"
            and prev.corrections[-1].end is not None
            and pd.Timestamp(prev.corrections[-1].end) + pd.Timedelta(days=1)
            == pd.Timestamp(p.corrections[0].start)
            and abs(prev.corrections[0].value - p.corrections[0].value) <= tol
        ):
            a, b = prev.corrections[0], p.corrections[0]
            na = (pd.Timestamp(a.end) - pd.Timestamp(a.start)).days + 1
            nb = (pd.Timestamp(b.end) - pd.Timestamp(b.start)).days + 1
            value = round((a.value * na + b.value * nb) / (na + nb), 6)
            merged = Correction(
                a.series, "offset", a.start, b.end, value,
                reason=f"field checks {prev.first_check[:10]} to {p.last_check[:10]}",
            )  # fmt: skip
            evidence = (*prev.evidence[:-1], *p.evidence[1:-1], f"constant difference over "
                        f"the checks: correction {value * 1000:+.1f} mm")  # fmt: skip
            out[-1] = Proposal(
                "offset", prev.first_check, p.last_check, (merged,), evidence,
                prev.accepted and p.accepted,
            )  # fmt: skip
        else:
            out.append(p)
    return tuple(out)


def judge_shifts(
    comparison: pd.DataFrame,
    shifts: Sequence[tuple[str, float]],
    options: FieldCheckOptions = FieldCheckOptions(),
) -> tuple[ShiftJudgment, ...]:
    """Judge datum shifts found by the residual flags against the field checks.

    Parameters
    ----------
    comparison : pandas.DataFrame
        From :func:`compare_checks`.
    shifts : sequence of (str, float)
        ISO day and stage step (m, positive = the record jumps up) of each flagged shift.
    options : FieldCheckOptions

    Notes
    -----
    With the last check before the day and the first from it, the change of logger − check is
    Δ. A real step of s gives Δ = s ± (ε_i + ε_j) (each check's error, see
    :func:`size_corrections`); with τ = ε_i + ε_j the shift is *confirmed* when |Δ − s| ≤
    τ + |s|/4 and |Δ| > τ, *contradicted* when |Δ| ≤ τ (the logger kept its datum, as far as the
    checks can tell) and |s| > τ, *different* otherwise; *unchecked* with no check on one side.
    """
    import pandas as pd

    comp = comparison[np.isfinite(comparison["difference_m"].to_numpy(dtype=float))]
    comp = comp.sort_values("time")
    t = pd.DatetimeIndex(comp["time"])
    d = comp["difference_m"].to_numpy(dtype=float)
    eps = options.reading_error + (
        comp["within_day_m"].to_numpy(dtype=float) if "within_day_m" in comp else 0.0
    ) * np.ones(len(comp))
    out = []
    for day, s in shifts:
        ts = pd.Timestamp(day)
        before = np.flatnonzero(t < ts)
        after = np.flatnonzero(t >= ts + pd.Timedelta(days=1))
        if not before.size or not after.size:
            out.append(
                ShiftJudgment(day, s, "unchecked", float("nan"), "no field check on one side")
            )
            continue
        i, j = before[-1], after[0]
        tol = float(eps[i] + eps[j])
        delta = float(d[j] - d[i])
        span = f"checks {t[i].date()} and {t[j].date()}"
        if abs(delta) > tol and abs(delta - s) <= tol + 0.25 * abs(s):
            status, detail = "confirmed", f"{span} differ by {delta * 1000:+.0f} mm"
        elif abs(delta) <= tol and abs(s) > tol:
            status = "contradicted"
            detail = f"{span} agree within {tol * 1000:.0f} mm: the logger kept its datum"
        else:
            status = "different"
            detail = f"{span} differ by {delta * 1000:+.0f} mm, the flag says {s * 1000:+.0f} mm"
        out.append(ShiftJudgment(day, s, status, delta, detail))
    return tuple(out)


def apply_corrections(stage_m: pd.Series, corrections: Sequence[Correction]) -> pd.Series:
    """``stage_m`` with each correction added (as the reader applies ``[[correction]]``)."""
    import pandas as pd

    index = stage_m.index
    values = stage_m.to_numpy(dtype=float).copy()
    for corr in corrections:
        values = values + correction_values(corr, index)
    return pd.Series(values, index=index, name=stage_m.name)
