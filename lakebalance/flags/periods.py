"""Stage faults that last a while and end: offset periods (two datum shifts that undo each other)
and stuck sensors (a run of repeated readings while the balance says the lake moved).

An *offset period* is a stretch of the stage record read off by a constant (an ice cover lifting
a float, a fouled or displaced sensor, a staff plate re-set and later put back): a step away and,
within ``offset_max_days``, a step back of like size. It is reported as ONE flag with both ends
and one ``[[correction]]`` with a start and an end, not as two unrelated datum shifts.

A *stuck sensor* repeats its last reading: the daily stage is the same for several days while
the gauged flows move water in or out. On those days the storage change is zero, so the residual
is minus the gauged net flow; summed over the run it is judged against the error model of the
same days (the balance "says the lake moved"), common practice, no source.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from ..records import Correction
from ..stats import Z95
from .datum import is_accepted
from .result import Flag

if TYPE_CHECKING:  # pragma: no cover
    from .context import FlagContext


def offset_periods(ctx: FlagContext, flags: Sequence[Flag]) -> list[Flag]:
    """``flags`` with each pair of datum shifts that undo each other merged into one
    ``offset_period`` flag, and the runs between them taken as its evidence.

    A shift of ``m₁`` (m) on day ``s`` and a later one of ``m₂`` on day ``e`` pair when
    ``e − s ≤ offset_max_days``, the signs differ and ``|m₁ + m₂| ≤ ½ max(|m₁|, |m₂|)``. The
    step away may have been read as a bad stage reading, and the step back as a spike of the
    residual (a storm hides it in the stage record): their storage jumps (m³) are then
    compared by the same rule. The period runs from ``s`` to ``e − 1``; its correction adds
    ``−m₁`` over those days.
    """
    import pandas as pd

    out = sorted(flags, key=lambda f: f.start)
    shifts = [
        f
        for f in out
        if (f.magnitude_m is not None and f.kind in ("datum_shift", "spike"))
        or (f.kind == "spike" and f.series == "residual")
    ]
    used: set[int] = set()
    # (step away, its end day as a position, the step back in m, the flag of the step back)
    periods: list[tuple[Flag, int, float, Flag | None]] = []
    limit = ctx.options.offset_max_days
    for i, first in enumerate(shifts):
        if id(first) in used or first.magnitude_m is None or first.series != "stage":
            continue
        s0 = int(ctx.index.get_loc(pd.Timestamp(first.start)))
        m1 = float(first.magnitude_m)
        found = None
        for second in shifts[i + 1 :]:
            if id(second) in used:
                continue
            gap = (pd.Timestamp(second.start) - pd.Timestamp(first.start)).days
            if gap > limit:
                break
            if gap < 2:
                continue
            if second.kind == "datum_shift" and second.magnitude_m is not None:
                a1, a2 = m1, float(second.magnitude_m)
                back = a2
            elif first.kind == "spike":
                continue  # a bad reading came back already: only a datum shift undoes it
            elif second.kind == "spike" and second.series == "residual":
                # a storm hid the step back in the stage record: the residual's spike undoes
                # the first step's storage jump
                a1, a2 = float(first.volume_m3), float(second.volume_m3)
                back = -m1 * abs(a2 / a1) if a1 else -m1
            else:
                continue
            if like_undoing(a1, a2):
                found = (int(ctx.index.get_loc(pd.Timestamp(second.start))), back, second)
                break
        if found is None and first.kind == "datum_shift":
            # the step back in the stage record alone: after a shift the balance confirmed, an
            # outlying stage step of like size and opposite sign is its undoing
            e = stage_step_back(ctx, s0, m1, limit)
            if e is not None:
                found = (e, float(ctx.step_m[e]), None)
        if found is not None:
            periods.append((first, found[0], found[1], found[2]))
            used.add(id(first))
            if found[2] is not None:
                used.add(id(found[2]))
    if not periods:
        return out
    for first, e_pos, back, second in periods:
        start = pd.Timestamp(first.start)
        end = pd.Timestamp(ctx.iso(e_pos)) - pd.Timedelta(days=1)
        inside = [
            f
            for f in out
            if f is not first
            and f is not second
            and f.kind in ("run", "level_shift", "spike", "datum_shift")
            and pd.Timestamp(f.start) >= start - pd.Timedelta(days=2)
            and pd.Timestamp(f.end) <= end + pd.Timedelta(days=2)
        ]
        m1 = float(first.magnitude_m)
        evidence = [
            f"the stage stepped by {m1:+.3f} m on {first.start} and by "
            f"{back:+.3f} m on {ctx.iso(e_pos)}: read off by about "
            f"{m1:+.3f} m for {(end - start).days + 1} d",
            *first.evidence,
            *(f"then: {f.kind} {f.start} to {f.end} ({f.volume_m3:+,.0f} m³)" for f in inside),
        ]
        corr = Correction(
            series="stage",
            kind="offset",
            start=first.start,
            end=end.date().isoformat(),
            value=-m1,
            reason=f"stage read off by {m1:+.3f} m over a period, flagged by lakebalance",
        )
        sig = first.significance if second is None else min(first.significance, second.significance)
        merged = Flag(
            kind="offset_period",
            start=first.start,
            end=end.date().isoformat(),
            series="stage",
            volume_m3=first.volume_m3,
            depth_mm=first.depth_mm,
            rate_m3_per_day=first.rate_m3_per_day,
            significance=sig,
            significant=sig > Z95,
            cause="stage offset over a period",
            hint=(
                "The stage stepped away and came back by a like amount: the gauge read off "
                "over this period (ice on the float or sensor, fouling, a displaced or re-set "
                "sensor). Check the field notes; if confirmed, accept the offset with its start "
                "and end."
            ),
            evidence=tuple(evidence),
            magnitude_m=m1,
            correction=corr,
            accepted=is_accepted(corr, ctx.corrections),
        )
        drop = {id(first), *(id(f) for f in inside)} | (set() if second is None else {id(second)})
        out = [f for f in out if id(f) not in drop] + [merged]
    return sorted(out, key=lambda f: (f.start, f.kind))


def like_undoing(a1: float, a2: float) -> bool:
    """Two steps (or storage jumps) of opposite sign and like size: |a₁ + a₂| ≤ ½ max(|a₁|, |a₂|)."""
    return bool(np.sign(a1) != np.sign(a2) and abs(a1 + a2) <= 0.5 * max(abs(a1), abs(a2)))


def stage_step_back(ctx: FlagContext, start: int, step_m: float, limit: int) -> int | None:
    """The first day within ``limit`` days after ``start`` whose stage step is an outlier
    (|robust z| above ``outlier_threshold``) that undoes ``step_m`` (:func:`like_undoing`)."""
    if ctx.step_z is None:
        return None
    z = np.nan_to_num(ctx.step_z)
    last = min(ctx.n - 1, start + limit)
    for e in range(start + 2, last + 1):  # loop over days of one period (few hundred)
        if abs(z[e]) > ctx.options.outlier_threshold and like_undoing(step_m, float(ctx.step_m[e])):
            return e
    return None


def repeated_runs(stage_m: np.ndarray, min_days: int, resolution_m: float) -> list[tuple[int, int]]:
    """Runs ``(first, last)`` of at least ``min_days`` daily stages equal within half the gauge
    resolution (the first day is the last good reading; the repeats follow it)."""
    h = np.asarray(stage_m, dtype=float)
    if h.size < 2:
        return []
    tol = max(0.5 * resolution_m, 1e-9)
    same = np.abs(np.diff(h)) <= tol  # NaN breaks a run
    edges = np.diff(np.concatenate([[0], same.astype(np.int8), [0]]))
    starts = np.flatnonzero(edges == 1)
    stops = np.flatnonzero(edges == -1)  # same[k] joins day k and k + 1
    return [(int(a), int(b)) for a, b in zip(starts, stops) if b - a + 1 >= min_days]


def stuck_flags(ctx: FlagContext, flags: Sequence[Flag]) -> list[Flag]:
    """Stuck-sensor flags: runs of at least ``stuck_days`` repeated daily stages over which the
    residual summed (minus its usual median) reaches ``stuck_threshold`` against the error
    model (lower than a run's, as the repeats are evidence of their own): the gauged flows moved the lake while the stage did not.

    The flag covers the repeated days (from the day after the last good reading to the last
    repeat); flags on the day the sensor came back (its catch-up step) or inside the run are
    taken as its evidence.
    """
    import pandas as pd

    out = list(flags)
    if ctx.stage_m is None:
        return out
    res = float(ctx.errors.resolution_m) if ctx.errors is not None else 0.0
    for a0, b in repeated_runs(ctx.stage_m, ctx.options.stuck_days, res):
        a = a0 + 1  # the first repeat
        # the day of the last good reading takes half the run's first boundary: summed with
        r = ctx.residual_m3[a0 : b + 1]
        if np.isfinite(r).sum() < max(2, (b - a0 + 1) // 2):
            continue
        volume = float(np.nansum(r - ctx.median_m3[a0 : b + 1]))
        sig = abs(volume) / ctx.sigma_of(a0, b, 1.0)
        if sig < ctx.options.stuck_threshold:
            continue
        start, end = pd.Timestamp(ctx.iso(a)), pd.Timestamp(ctx.iso(b))
        near = pd.Timedelta(days=ctx.options.spike_days + 1)
        inside = [
            f
            for f in out
            if pd.Timestamp(f.start) >= start - near and pd.Timestamp(f.end) <= end + near
        ]
        moved = -volume / ctx.area_m2[a] if ctx.area_m2 is not None else float("nan")
        evidence = [
            f"the daily stage repeated {ctx.stage_m[a0]:.3f} m for {b - a0 + 1} days",
            f"the gauged flows moved about {moved:+.3f} m of lake over those days "
            f"({volume:+,.0f} m³ unexplained, {sig:.1f} σ under the error model)",
            *(f"the sensor's return: {f.kind} on {f.start}" for f in inside),
        ]
        drop = {id(f) for f in inside}
        out = [f for f in out if id(f) not in drop]
        out.append(
            Flag(
                kind="stuck",
                start=ctx.iso(a),
                end=ctx.iso(b),
                series="stage",
                volume_m3=volume,
                depth_mm=ctx.depth_mm(volume, a, b),
                rate_m3_per_day=volume / (b - a + 1),
                significance=float(sig),
                significant=bool(sig > Z95),
                cause="stuck stage sensor",
                hint=(
                    "The stage repeated the same value while the gauged flows moved the lake: a "
                    "stuck float, a frozen or clogged sensor, or a logger repeating its last "
                    "reading. Check the raw readings; leave these days out or fill them."
                ),
                evidence=tuple(evidence),
                magnitude_m=float(moved) if np.isfinite(moved) else None,
            )
        )
    return sorted(out, key=lambda f: (f.start, f.kind))


__all__ = ["offset_periods", "stuck_flags", "repeated_runs"]
