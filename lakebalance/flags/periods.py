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
    period runs from ``s`` to ``e − 1``; its correction adds ``−m₁`` over those days.
    """
    import pandas as pd

    out = sorted(flags, key=lambda f: f.start)
    # a step away may have been read as a bad stage reading when the record is noisy there
    shifts = [
        f
        for f in out
        if f.magnitude_m is not None
        and (f.kind == "datum_shift" or (f.kind == "spike" and f.series == "stage"))
    ]
    used: set[int] = set()
    periods: list[tuple[Flag, Flag]] = []
    limit = ctx.options.offset_max_days
    for i, first in enumerate(shifts):
        if id(first) in used:
            continue
        for second in shifts[i + 1 :]:
            if id(second) in used:
                continue
            gap = (pd.Timestamp(second.start) - pd.Timestamp(first.start)).days
            if gap > limit:
                break
            if second.kind != "datum_shift" or gap < 2:
                continue
            m1, m2 = float(first.magnitude_m), float(second.magnitude_m)
            if np.sign(m1) != np.sign(m2) and abs(m1 + m2) <= 0.5 * max(abs(m1), abs(m2)):
                periods.append((first, second))
                used.update((id(first), id(second)))
                break
    if not periods:
        return out
    for first, second in periods:
        start = pd.Timestamp(first.start)
        end = pd.Timestamp(second.start) - pd.Timedelta(days=1)
        inside = [
            f
            for f in out
            if f is not first
            and f is not second
            and f.kind in ("run", "level_shift", "spike")
            and pd.Timestamp(f.start) >= start - pd.Timedelta(days=2)
            and pd.Timestamp(f.end) <= end + pd.Timedelta(days=2)
        ]
        m1 = float(first.magnitude_m)
        evidence = [
            f"the stage stepped by {m1:+.3f} m on {first.start} and by "
            f"{float(second.magnitude_m):+.3f} m on {second.start}: read off by about "
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
        sig = min(first.significance, second.significance)
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
        drop = {id(first), id(second), *(id(f) for f in inside)}
        out = [f for f in out if id(f) not in drop] + [merged]
    return sorted(out, key=lambda f: (f.start, f.kind))


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
