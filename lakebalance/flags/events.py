"""Single-day events: residual outliers and stage steps, told apart as spikes and datum shifts.

An event is a run of days (merged within ``spike_days``) whose residual is an outlier or whose
stage step is. :func:`read_stage_step` reads the stage over the event (is the step mirrored in
the residual, undone within the event, or shown by a lasting change of the outflow?), and
:func:`event_flag` makes the flag: a datum shift when the step stays, a bad stage reading when
it comes back, a spike of a flow term when the stage did not step.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..stats import Z95
from .datum import datum_shift_flag, hidden_shifts, lasting_outflow_change, level_change_shift
from .result import Flag
from .robust import rolling_robust_z

if TYPE_CHECKING:  # pragma: no cover
    from .context import FlagContext


@dataclass(frozen=True)
class Events:
    """What the event detector found.

    ``spans`` are the ``(first, last)`` positions of every event (flagged or not), ``flags``
    their flags in time order, ``datum_starts`` the positions of the datum shifts found and
    ``by_lasting`` those of them seen only by the lasting change of the outflow.
    """

    spans: tuple[tuple[int, int], ...]
    flags: tuple[Flag, ...]
    datum_starts: tuple[int, ...]
    by_lasting: frozenset[int]


@dataclass(frozen=True)
class StageStep:
    """The stage over one event.

    ``seen`` is true when the stage stepped and the balance confirms the step (the residual
    mirrors the storage jump, or the outflow changes lastingly); ``reversed`` when a step away is
    followed by a step back of like size; ``peak_m`` the step away from the true stage and
    ``net_m`` the net step (m); ``implied_m3`` the storage jump of the peak step (m³; NaN when
    unknown); ``first`` and ``last`` the positions of the first and last outlying step (the
    event's ends without one); ``evidence`` what the lasting change showed; ``lasting`` whether
    the step was seen that way only.
    """

    seen: bool
    reversed: bool
    peak_m: float
    net_m: float
    implied_m3: float
    first: int
    last: int
    evidence: tuple[str, ...] = ()
    lasting: bool = False


def find_events(ctx: FlagContext) -> Events:
    """Group the outlying days into events and flag each (step 1 of :func:`detect_flags`).

    Parameters
    ----------
    ctx : FlagContext
        The record: residual outliers and outlying stage steps.

    Returns
    -------
    Events
        Every event's span (days within ``spike_days`` merged), the spike and datum-shift
        flags, and the positions of the datum shifts.
    """
    spans = groups(ctx.outlier | ctx.jump, gap=max(0, ctx.options.spike_days - 1))
    flags: list[Flag] = []
    datum_starts: list[int] = []
    by_lasting: set[int] = set()
    for a, b in spans:  # loop over events (few)
        step = read_stage_step(ctx, a, b)
        if step.lasting:
            by_lasting.add(step.first)
        flag = event_flag(ctx, a, b, step)
        if flag is None or not _significant_event(ctx, flag):
            continue
        flags.append(flag)
        if flag.kind == "datum_shift":
            datum_starts.append(step.first)
    return Events(tuple(spans), tuple(flags), tuple(datum_starts), frozenset(by_lasting))


def with_hidden_shifts(ctx: FlagContext, events: Events) -> Events:
    """``events`` with the datum shifts found by their aftermath alone
    (:func:`~lakebalance.flags.datum.hidden_shifts`) added as flags and shift positions."""
    import dataclasses

    clean = ctx.residual_m3.copy()
    for a, b in events.spans:
        clean[a : b + 1] = np.nan
    import pandas as pd

    known = {
        int(ctx.index.get_loc(pd.Timestamp(f.start))): float(f.magnitude_m)
        for f in events.flags
        if f.kind == "datum_shift" and f.magnitude_m is not None
    }
    for d in events.datum_starts:
        known.setdefault(int(d), float(ctx.step_m[d]))
    found = hidden_shifts(ctx, clean, known)
    if not found:
        return events
    flags = list(events.flags)
    for j in found:
        f = level_change_shift(ctx, j)
        evidence = (*f.evidence, "the residual changed from that day by what the shifted stage "
                    "does to the computed outflow (fitted beside the usual level)")  # fmt: skip
        flags.append(dataclasses.replace(f, evidence=evidence))
    flags.sort(key=lambda f: f.start)
    return dataclasses.replace(
        events, flags=tuple(flags), datum_starts=tuple(sorted((*events.datum_starts, *found)))
    )


def _significant_event(ctx: FlagContext, flag: Flag) -> bool:
    """Whether an event's volume stands out of the error model (always, without one).

    A spike of a flow term rests on the residual alone: it must reach
    ``significance_threshold``. A stage event (bad reading, datum shift) also has its own
    outlying stage step, so its storage jump need only reach the two-sided 95 % quantile.
    """
    if ctx.errors is None:
        return True
    need = ctx.options.significance_threshold if flag.series == "residual" else Z95
    return flag.significance >= need


def read_stage_step(ctx: FlagContext, a: int, b: int) -> StageStep:
    """How the stage moved over the event ``a``..``b`` and whether the balance confirms it.

    Parameters
    ----------
    ctx : FlagContext
        The record.
    a, b : int
        Positions of the event's first and last day.

    Returns
    -------
    StageStep
        The steps' shape (undone or not), their peak and net size (m), the storage jump they
        imply (m³) and whether the residual mirrors it within half (or, for a step that stays,
        the outflow changes lastingly, :func:`~lakebalance.flags.lasting_outflow_change`).
    """
    r, med_r, step, jump, area = ctx.residual_m3, ctx.median_m3, ctx.step_m, ctx.jump, ctx.area_m2
    cum = np.cumsum(step[a : b + 1])
    peak = float(cum[np.argmax(np.abs(cum))]) if cum.size else 0.0
    net = float(cum[-1]) if cum.size else 0.0
    jumps = a + np.flatnonzero(jump[a : b + 1])
    if not jumps.size:
        return StageStep(False, False, peak, net, float("nan"), a, b)
    first_jump, last_jump = int(jumps[0]), int(jumps[-1])
    # The shape of the steps: a step away and a step back of like size is a bad reading
    # (spike); a single step that stays is a shift of the gauge zero.
    sizes = step[jumps]
    up, down = sizes[sizes > 0], sizes[sizes < 0]
    reversed_ = bool(
        up.size and down.size and min(up.max(), -down.min()) >= 0.5 * max(up.max(), -down.min())
    )
    if reversed_:
        peak = float(step[first_jump])  # the step away from the true stage
        net = float(np.sum(sizes))
    else:
        peak = net = float(np.sum(sizes))
    a_area = area[first_jump] if area is not None else float("nan")
    implied = peak * a_area if np.isfinite(a_area) else float("nan")
    # does the balance see the storage jump the step implies? (running sums over the event and
    # a day each side: the day-boundary rule spreads a step over two days)
    seen_step = True
    lo_i, hi_i = max(a - 1, 0), min(b + 2, ctx.n)
    seen = np.nan_to_num(r[lo_i:hi_i] - med_r[lo_i:hi_i])
    has_balance = bool(np.isfinite(r[a : b + 1]).any())
    if has_balance and np.isfinite(implied):
        c_seen = np.cumsum(seen)
        if reversed_:
            mirrored = float(np.max(np.abs(c_seen)))
            seen_step = mirrored >= 0.25 * abs(implied)
        else:
            mirrored = abs(float(c_seen[-1]))
            seen_step = abs(c_seen[-1] - implied) <= 0.5 * abs(implied)
        # and the mirror must stand out of the residual's noise on those days (storm days are
        # noisy: a flood's timing error is no stage fault). A bad reading's mirror is the
        # running sum up to its peak (with daily-mean boundaries, half the jump on the day
        # before and half undone the day after), judged over those days only; the outlying
        # stage step is evidence of its own, so the mirror needs 3 noise scales, not 5
        if reversed_:
            peak_at = int(np.argmax(np.abs(c_seen)))
            sd = math.sqrt(float(np.nansum(ctx.scale_m3[lo_i : lo_i + peak_at + 1] ** 2)))
            need = min(3.0, ctx.options.outlier_threshold)
        else:
            sd = math.sqrt(float(np.nansum(ctx.scale_m3[lo_i:hi_i] ** 2)))
            need = ctx.options.outlier_threshold
        seen_step = seen_step and mirrored >= need * sd
    elif np.isfinite(implied):
        seen_step = False  # no balance on those days to confirm the step
    if not seen_step and not reversed_ and has_balance:
        # a storm on the day hides the mirror: the step may still show by what it does to the
        # outflow computed from the shifted stage, a change that lasts
        lasting = lasting_outflow_change(
            r, ctx.stage_m, ctx.outflow_m3, first_jump, net, ctx.scale_m3
        )
        if lasting is not None:
            return StageStep(
                True, reversed_, peak, net, implied, first_jump, last_jump, (lasting,), True
            )
    return StageStep(bool(seen_step), reversed_, peak, net, implied, first_jump, last_jump)


def event_flag(ctx: FlagContext, a: int, b: int, step: StageStep) -> Flag | None:
    """The flag of the event ``a``..``b``: datum shift, bad stage reading or flow spike.

    Parameters
    ----------
    ctx : FlagContext
        The record.
    a, b : int
        Positions of the event's first and last day.
    step : StageStep
        How the stage moved over the event (:func:`read_stage_step`).

    Returns
    -------
    Flag or None
        A datum shift when the confirmed step stays, a bad stage reading when it comes back, a
        spike of a flow term when the stage did not step; None for a stage step the flows
        explain or a gain at once undone by a loss (day-boundary timing).
    """
    if not step.seen and not ctx.outlier[a : b + 1].any():
        return None  # a stage step that the flows explain: nothing to flag
    evidence = list(step.evidence)
    if step.seen:
        evidence.append(
            f"the stage stepped by {step.peak_m:+.3f} m on {ctx.iso(step.first)} "
            f"(robust z {ctx.step_z[step.first]:+.1f} of the daily change)"
        )
        if np.isfinite(step.implied_m3):
            evidence.append(
                f"a storage change of {step.implied_m3:+,.0f} m³ in the balance, which the "
                "residual mirrors"
            )
        note = describe_flows(ctx, step.first, jump_m3=step.implied_m3)
        if note:
            evidence.append(note)
    if step.seen and not step.reversed and ctx.too_small_for_a_shift(step.net_m):
        return _flow_spike(ctx, a, b, list(step.evidence))  # no step the gauge can resolve
    if step.seen and not step.reversed:
        return _event_datum_shift(ctx, a, b, step, evidence)
    if step.seen:
        return _bad_stage_reading(ctx, a, b, step, evidence)
    return _flow_spike(ctx, a, b, evidence)


def _event_datum_shift(
    ctx: FlagContext, a: int, b: int, step: StageStep, evidence: list[str]
) -> Flag:
    """A datum shift seen by the one-day storage jump it puts in the residual."""
    anomaly = ctx.residual_m3[a : b + 1] - ctx.median_m3[a : b + 1]
    volume = float(np.nansum(anomaly)) if np.isfinite(anomaly).any() else step.implied_m3
    evidence.append(
        f"the step was not undone within {ctx.options.spike_days} day(s) "
        f"(net {step.net_m:+.3f} m of {step.peak_m:+.3f} m)"
    )
    return datum_shift_flag(
        ctx,
        step.first,
        step.net_m,
        volume_m3=volume,
        depth_mm=ctx.depth_mm(volume, a, b),
        rate_m3_per_day=volume / (b - a + 1),
        significance=abs(volume) / ctx.sigma_of(a, b, 1.0),
        seen_by="storage jump",
        evidence=evidence,
    )


def _bad_stage_reading(
    ctx: FlagContext, a: int, b: int, step: StageStep, evidence: list[str]
) -> Flag:
    """A stage spike: the stage stepped and came back within the event."""
    area = ctx.area_m2
    # the bad reading appears in the residual as the storage jump it implies
    volume = float(step.peak_m * area[step.first]) if area is not None else float("nan")
    if not np.isfinite(volume):
        volume = float(np.nansum(ctx.residual_m3[a : b + 1] - ctx.median_m3[a : b + 1]))
    evidence.append(
        f"the stage came back within the event (net {step.net_m:+.3f} m of {step.peak_m:+.3f} m)"
    )
    hint = (
        "The stage stepped and came back: a bad reading (logger glitch, wave, debris on the "
        "sensor). Check the raw readings; the paired residuals cancel."
    )
    # the bad readings lie between the step away and the step back
    shown = (step.first, max(step.first, step.last - 1))
    return _spike_flag(
        ctx,
        (a, b),
        shown,
        volume,
        series="stage",
        cause="bad stage reading",
        hint=hint,
        evidence=evidence,
        magnitude_m=float(step.peak_m),
    )


def _flow_spike(ctx: FlagContext, a: int, b: int, evidence: list[str]) -> Flag | None:
    """A spike of a flow term: an outlying residual with no stage step (None when it is only
    water moved between days)."""
    r, med_r, stage, n = ctx.residual_m3, ctx.median_m3, ctx.stage_m, ctx.n
    lo_i, hi_i = max(a - 1, 0), min(b + 2, n)
    around = r[lo_i:hi_i] - med_r[lo_i:hi_i]
    biggest = float(np.nanmax(np.abs(around))) if np.isfinite(around).any() else 0.0
    if abs(float(np.nansum(around))) < 0.5 * biggest:
        # a gain at once undone by a loss (or the reverse): water moved between days by the
        # day-boundary timing, not a volume; nothing to flag
        return None
    if stage is not None and any(
        0 <= i < n and np.isfinite(stage[i]) and not np.isfinite(r[i]) for i in (a - 1, b + 1)
    ):
        # the storage change of this day takes half the stage change into a day with a stage
        # but no balance (the record's last day, a missing term): the loss that would undo a
        # timing gain cannot be seen, so no flag
        return None
    volume = float(np.nansum(r[a : b + 1] - med_r[a : b + 1]))
    if volume > 0 and is_high(ctx.rain_m3, a, b, ctx.options.outlier_window):
        cause = "ungauged storm inflow"
        hint = (
            "An unexplained gain on a rainy day with no stage step: runoff from an ungauged "
            "area, or under-read rain or inflow."
        )
    else:
        cause = "spike in a flow term"
        hint = (
            "An unexplained "
            + ("gain" if volume > 0 else "loss")
            + " on a day with no stage step: check the inflow, withdrawal and release "
            "readings of that day (a spike or a missing decimal)."
        )
    zmax = float(np.nanmax(np.abs(ctx.z[a : b + 1])))
    evidence.append(f"residual robust z up to {zmax:.1f} with no stage step")
    return _spike_flag(
        ctx,
        (a, b),
        (a, b),
        volume,
        series="residual",
        cause=cause,
        hint=hint,
        evidence=evidence,
        magnitude_m=None,
    )


def _spike_flag(
    ctx: FlagContext,
    event: tuple[int, int],
    shown: tuple[int, int],
    volume: float,
    *,
    series: str,
    cause: str,
    hint: str,
    evidence: Sequence[str],
    magnitude_m: float | None,
) -> Flag:
    """The spike flag of the event ``event`` dated ``shown`` (first and last positions)."""
    a, b = event
    if not np.isfinite(volume):
        volume = 0.0
    sig = abs(volume) / ctx.sigma_of(a, b, 1.0)
    return Flag(
        kind="spike",
        start=ctx.iso(shown[0]),
        end=ctx.iso(shown[1]),
        series=series,
        volume_m3=volume,
        depth_mm=ctx.depth_mm(volume, a, b),
        rate_m3_per_day=volume / (b - a + 1),
        significance=sig,
        significant=sig > Z95,
        cause=cause,
        hint=hint,
        evidence=tuple(evidence),
        magnitude_m=magnitude_m,
    )


def groups(mask: np.ndarray, gap: int = 0) -> list[tuple[int, int]]:
    """Runs of True positions ``(first, last)``, merging runs separated by ≤ ``gap`` False."""
    pos = np.flatnonzero(mask)
    if pos.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(pos) > gap + 1)
    firsts = np.concatenate([[pos[0]], pos[breaks + 1]])
    lasts = np.concatenate([pos[breaks], [pos[-1]]])
    return [(int(a), int(b)) for a, b in zip(firsts, lasts)]


def is_high(x: np.ndarray | None, a: int, b: int, window: int) -> bool:
    """Some day of ``a``..``b`` has a robust z-score of ``x`` above 3 (``window``-day median)."""
    if x is None:
        return False
    z, _, _ = rolling_robust_z(x, window)
    seg = z[a : b + 1]
    return bool(np.isfinite(seg).any() and np.nanmax(seg) > 3.0)


def describe_flows(ctx: FlagContext, i: int, jump_m3: float = float("nan")) -> str:
    """Inflow and rain of day ``i`` against their usual values and the storage jump (m³)."""
    window = ctx.options.outlier_window
    extra = 0.0
    parts = []
    for name, x in (("inflow", ctx.inflow_m3), ("rain", ctx.rain_m3)):
        if x is None or not np.isfinite(x[i]):
            continue
        _, med, _ = rolling_robust_z(x, window)
        usual = float(med[i]) if np.isfinite(med[i]) else 0.0
        extra += float(x[i]) - usual
        parts.append(f"{name} {x[i]:,.0f} m³ (usual {usual:,.0f} m³)")
    if not parts:
        return ""
    text = " and ".join(parts) + " that day"
    if np.isfinite(jump_m3) and abs(extra) < 0.5 * abs(jump_m3):
        return f"no matching flow: {text}, against a storage jump of {jump_m3:+,.0f} m³"
    return text
