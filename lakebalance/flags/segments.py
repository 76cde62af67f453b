"""Segments of the residual: level shifts, runs, and the datum shifts seen by the level change they
leave (steps 2 and 3 of :func:`~lakebalance.flags.detect_flags`).

:func:`segment_residual` fits the residual's usual level with the event days left out and
segments the departure from it (:class:`Segmentation`); :func:`segment_flags` turns the segments
that depart from the usual level into level shifts and runs, or into the aftermath of a datum
shift; :func:`cusum_flags` adds the runs the segmentation missed.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..stats import Z95
from .changepoints import ChangePoints, change_points, date_run
from .datum import (
    aftermath_shape,
    level_change_shift,
    mirrored_stage_step,
    outflow_note,
    with_evidence,
)
from .level import LevelDesign, usual_level_fit
from .result import Flag
from .robust import cusum_runs, quiet_nan_warnings, span_mean

if TYPE_CHECKING:  # pragma: no cover
    from .context import FlagContext
    from .events import Events


@dataclass(frozen=True, eq=False)
class Segmentation:
    """The residual's usual level and the segments of its departure from it.

    Attributes
    ----------
    clean_m3 : ndarray
        Residual with the event days left out (m³/d).
    level_m3 : ndarray
        Usual level of each day (m³/d, :func:`~lakebalance.flags.usual_level`).
    level_note : str
        The fitted usual level in words.
    shift_steps : dict of int to float
        Fitted step (m³/d) of the usual level at each datum shift position.
    departure_m3 : ndarray
        ``clean_m3 − level_m3`` (m³/d).
    departure_z : ndarray
        ``departure_m3`` over the noise scale (-).
    change : ChangePoints
        The segments of ``departure_z``.
    segment_means_m3 : ndarray
        Mean of ``clean_m3`` over each segment (m³/d).
    baseline_m3 : float
        Median of the usual level (m³/d).
    design : LevelDesign or None
        The regression of the usual level (for the error of a departure from it).
    """

    clean_m3: np.ndarray
    level_m3: np.ndarray
    level_note: str
    shift_steps: dict[int, float]
    departure_m3: np.ndarray
    departure_z: np.ndarray
    change: ChangePoints
    segment_means_m3: np.ndarray
    baseline_m3: float
    design: LevelDesign | None = None

    @property
    def ratio(self) -> float:
        """Long-run variance ratio of the departure (-)."""
        return self.change.ratio


def segment_residual(ctx: FlagContext, events: Events) -> Segmentation:
    """Fit the usual level with the events left out and segment the departure from it.

    Parameters
    ----------
    ctx : FlagContext
        The record.
    events : Events
        What step 1 found: its days are left out, its datum shifts step the usual level.

    Returns
    -------
    Segmentation

    Notes
    -----
    A run lowers (or raises) the stage too: the usual level is fitted again without the segments
    that depart from it, so that the stage term does not absorb them, and the departure is
    segmented again.
    """
    import pandas as pd

    options = ctx.options
    clean = ctx.residual_m3.copy()
    for a, b in events.spans:
        clean[a : b + 1] = np.nan
    shifts_found = tuple(d for d in events.datum_starts if d not in events.by_lasting)
    shapes = {}
    for f in events.flags:
        if f.kind == "datum_shift" and f.magnitude_m is not None:
            j = int(ctx.index.get_loc(pd.Timestamp(f.start)))
            shape = aftermath_shape(ctx.stage_m, ctx.outflow_m3, j, f.magnitude_m)
            if shape is not None:
                shapes[j] = shape
    level, note, steps, design = usual_level_fit(
        clean, ctx.stage_m, ctx.scale_m3, shifts_found, shapes
    )
    dev_w, cps = _segment(ctx, clean, level)
    calm = clean.copy()
    for (a, b), m in zip(cps.segments, cps.means):
        valid = int(np.isfinite(dev_w[a : b + 1]).sum())
        if valid and abs(m) * math.sqrt(valid / cps.ratio) >= options.run_threshold:
            calm[a : b + 1] = np.nan
    n_calm = np.isfinite(calm).sum()
    if n_calm >= max(30, ctx.n // 4) and n_calm < np.isfinite(clean).sum():
        level_t, note_t, steps_t, design_t = usual_level_fit(
            calm, ctx.stage_m, ctx.scale_m3, shifts_found, shapes
        )
        if np.isfinite(level_t).any():
            level, note, steps, design = level_t, note_t, steps_t, design_t
            dev_w, cps = _segment(ctx, clean, level)
    with quiet_nan_warnings():
        means = np.array([np.nanmean(clean[a : b + 1]) for a, b in cps.segments])
    return Segmentation(
        clean_m3=clean,
        level_m3=level,
        level_note=note,
        shift_steps=steps,
        departure_m3=clean - level,
        departure_z=dev_w,
        change=cps,
        segment_means_m3=means,
        baseline_m3=float(np.nanmedian(level)) if np.isfinite(level).any() else 0.0,
        design=design,
    )


def _segment(
    ctx: FlagContext, clean: np.ndarray, level: np.ndarray
) -> tuple[np.ndarray, ChangePoints]:
    """The standardised departure of ``clean`` from ``level`` and its change points."""
    dev_w = (clean - level) / ctx.scale_m3
    options = ctx.options
    cps = change_points(
        dev_w,
        penalty=options.penalty,
        min_size=options.min_run_days,
        method=options.change_method,
    )
    return dev_w, cps


def fitted_aftermath(ctx: FlagContext, seg: Segmentation, flags: Sequence[Flag]) -> list[Flag]:
    """``flags`` with the fitted step of the usual level added to each datum shift's evidence."""
    out = list(flags)
    for j, c in seg.shift_steps.items():  # the aftermath of each datum shift, as fitted
        text = f"the residual's usual level changed by {c:+,.0f} m³/d from that day on"
        out = with_evidence(out, ctx.iso(j), text + outflow_note(ctx))
    return out


def strength(ctx: FlagContext, seg: Segmentation, a: int, b: int) -> tuple[int, float]:
    """Days with a residual and z-score of the departure over ``a``..``b``; 0 when it is too
    small to matter (mean departure below ``min_run_effect`` noise scales)."""
    dev, dev_w, ratio = seg.departure_m3, seg.departure_z, seg.ratio
    valid = int(np.isfinite(dev_w[a : b + 1]).sum())
    if valid == 0:
        return 0, 0.0
    total_w = float(np.nansum(dev_w[a : b + 1]))
    z = abs(total_w) / math.sqrt(ratio * valid)
    # the same test on the mean volume per day (m³/d), weighted by the inverse variance: a
    # steady offtake or inflow of so many m³/d is seen best on the quiet days, and the noisy
    # storm days inside the run neither hide it nor make it
    ok = np.isfinite(dev[a : b + 1])
    w = 1.0 / ctx.scale_m3[a : b + 1][ok] ** 2
    z_m3 = abs(float(np.sum(w * dev[a : b + 1][ok]))) / math.sqrt(ratio * float(np.sum(w)))
    if abs(total_w) / valid < ctx.options.min_run_effect:
        return valid, 0.0
    return valid, min(z, z_m3)


def significance(ctx: FlagContext, seg: Segmentation, a: int, b: int, volume: float) -> float:
    """|volume| (m³) of the departure over ``a``..``b`` over its 1-σ uncertainty (-)
    (:meth:`FlagContext.sigma_of_departure`)."""
    valid = np.isfinite(seg.departure_m3)
    sd = ctx.sigma_of_departure(a, b, valid, seg.design, seg.ratio)
    return abs(volume) / sd if sd > 0 else float("inf")


def passes_model(ctx: FlagContext, seg: Segmentation, a: int, b: int) -> bool:
    """Whether the departure over ``a``..``b`` reaches ``significance_threshold`` against the
    error model (always true without one)."""
    if ctx.errors is None:
        return True
    volume = float(np.nansum(seg.departure_m3[a : b + 1]))
    return significance(ctx, seg, a, b, volume) >= ctx.options.significance_threshold


def segment_flags(
    ctx: FlagContext, seg: Segmentation, flags: Sequence[Flag], datum_starts: Sequence[int]
) -> tuple[list[Flag], np.ndarray, list[int]]:
    """Level shifts, runs and the datum shifts seen by the level change they leave.

    A segment that departs from the usual level by at least ``run_threshold`` (and
    ``min_run_effect``) over ``min_run_days`` is, in turn:

    * the aftermath of a datum shift when it starts within ``spike_days + 1`` days of one (a
      lone stage step whose storage jump the residual mirrors is taken as a new datum shift
      first, except at the start of the record's first segment, where nothing changed), or when it follows such an aftermath with the same sign: it becomes evidence of
      the shift;
    * a run when both of its ends are change points (its ends then dated by
      :func:`~lakebalance.flags.date_run`), else a level shift.

    Returns
    -------
    flags : list of Flag
        ``flags`` with the new flags appended (and datum shifts' evidence extended).
    covered : ndarray of bool
        Days covered by a segment taken.
    datum_starts : list of int
        ``datum_starts`` with the new datum shifts.
    """
    options = ctx.options
    near = options.spike_days + 1
    flags, datum_starts = list(flags), list(datum_starts)
    covered = np.zeros(ctx.n, dtype=bool)
    chain: tuple[float, int] | None = None  # sign and position of a datum shift's aftermath
    segments = seg.change.segments
    for seg_i, ((a, b), mean) in enumerate(zip(segments, seg.segment_means_m3)):
        days_valid, z_seg = strength(ctx, seg, a, b)
        if days_valid < options.min_run_days or z_seg < options.run_threshold:
            continue
        change = mean - span_mean(seg.level_m3, a, b)
        sign = float(np.sign(change))
        in_chain = chain is not None and sign == chain[0]
        # a smaller step of the gauge zero, seen mainly by its effect on the outflow? Only where
        # the residual changed: the first segment starts with the record, not at a change
        j = None if in_chain or seg_i == 0 else mirrored_stage_step(ctx, a)
        if j is not None and not any(abs(j - d) <= near for d in datum_starts):
            flags.append(level_change_shift(ctx, j))
            datum_starts.append(j)
        # aftermath of a datum shift: the first departure after it, and later ones of its sign
        after = [d for d in datum_starts if abs(a - d) <= near]
        if not after and in_chain:
            after = [chain[1]]
        if after and chain is None:
            chain = (sign, after[0])
        if after:
            text = (
                f"then the residual changed by {change:+,.0f} m³/d from {ctx.iso(a)} to "
                f"{ctx.iso(b)} ({days_valid} d)"
            )
            flags = with_evidence(flags, ctx.iso(after[0]), text + outflow_note(ctx))
            covered[a : b + 1] = True
            continue
        bounded = 0 < seg_i < len(segments) - 1
        if bounded:
            a, b = date_run(seg.departure_m3, ctx.scale_m3, a, b, reach=options.min_run_days)
            days_valid = int(np.isfinite(seg.departure_m3[a : b + 1]).sum())
        if not passes_model(ctx, seg, a, b):
            continue
        flags.append(segment_flag(ctx, seg, "run" if bounded else "level_shift", a, b, days_valid))
        covered[a : b + 1] = True
    return flags, covered, datum_starts


def cusum_flags(
    ctx: FlagContext, seg: Segmentation, covered: np.ndarray, datum_starts: Sequence[int]
) -> list[Flag]:
    """Runs the segmentation missed: two-sided CUSUM of the departure over noise · √ratio.

    A run is kept when it overlaps no day already ``covered``, starts away from every datum
    shift and passes the :func:`strength` test.
    """
    options = ctx.options
    near = options.spike_days + 1
    covered = covered.copy()
    flags = []
    for a, b, _sign in cusum_runs(
        seg.departure_z / math.sqrt(seg.ratio),
        slack=options.cusum_slack,
        threshold=options.cusum_threshold,
    ):
        if covered[a : b + 1].any() or any(abs(a - d) <= near for d in datum_starts):
            continue
        # the CUSUM's start lags a change and its peak is not the end: date both ends
        a, b = date_run(seg.departure_m3, ctx.scale_m3, a, b, reach=options.min_run_days)
        if covered[a : b + 1].any():
            continue
        days_valid, z_run = strength(ctx, seg, a, b)
        if days_valid < options.min_run_days or z_run < options.run_threshold:
            continue
        if not passes_model(ctx, seg, a, b):
            continue
        flags.append(segment_flag(ctx, seg, "run", a, b, days_valid, detector="CUSUM"))
        covered[a : b + 1] = True
    return flags


def segment_flag(
    ctx: FlagContext,
    seg: Segmentation,
    kind: str,
    a: int,
    b: int,
    days_valid: int,
    *,
    detector: str = "change-point search",
) -> Flag:
    """A run or level-shift flag over days ``a``..``b`` with its likely cause and evidence.

    Parameters
    ----------
    ctx : FlagContext
        The record.
    seg : Segmentation
        The usual level and the departure from it.
    kind : {"run", "level_shift"}
        A run has change points at both ends; a level shift reaches an end of the record.
    a, b : int
        Positions of the first and last day.
    days_valid : int
        Days with a residual in ``a``..``b``.
    detector : str
        What found it, for the evidence.

    Returns
    -------
    Flag
        Volume (m³), depth (mm), rate (m³/d), significance (-) and a cause: the outflow or the
        evaporation when the residual follows it, else an unmetered withdrawal or inflow.

    Notes
    -----
    The volume is the summed departure from the usual level; the significance is |volume| over
    its 1-σ uncertainty with the long-run variance ratio (:meth:`FlagContext.sigma_of`).
    """
    volume = float(np.nansum(seg.departure_m3[a : b + 1]))
    with quiet_nan_warnings():
        mean = float(np.nanmean(seg.clean_m3[a : b + 1]))
    baseline = span_mean(seg.level_m3, a, b)
    rate = volume / days_valid
    evidence = [
        f"mean residual {mean:+,.0f} m³/d against a usual {baseline:+,.0f} m³/d over "
        f"{days_valid} d ({detector})"
    ]
    z_h, step = ctx.step_z, ctx.step_m
    if z_h is not None:
        near = [i for i in (a - 1, a, a + 1, b, b + 1) if 0 <= i < len(step)]
        zmax = float(np.nanmax(np.abs(np.nan_to_num(z_h[near])))) if near else 0.0
        evidence.append(
            f"no stage step at its start or end (largest robust z of the daily change {zmax:.1f})"
            if zmax <= ctx.options.outlier_threshold
            else f"a stage step at its start or end (robust z {zmax:.1f})"
        )
    cause = _follows_a_term(ctx, seg, a, b, rate, evidence)
    cause, hint = _segment_hint(kind, cause, rate)
    sig = significance(ctx, seg, a, b, volume)
    return Flag(
        kind=kind,
        start=ctx.iso(a),
        end=ctx.iso(b),
        series="residual",
        volume_m3=float(volume),
        depth_mm=ctx.depth_mm(volume, a, b),
        rate_m3_per_day=float(rate),
        significance=float(sig),
        significant=bool(sig > Z95),
        cause=cause,
        hint=hint,
        evidence=tuple(evidence),
    )


def _follows_a_term(
    ctx: FlagContext, seg: Segmentation, a: int, b: int, rate: float, evidence: list[str]
) -> str | None:
    """``"rating shift"`` or ``"evaporation bias"`` when the residual over ``a``..``b`` follows
    the outflow or the evaporation (|correlation| ≥ 0.5) and the departure ``rate`` (m³/d) is at
    most the term's mean; None otherwise. Each term it follows adds to ``evidence``."""
    seg_r = seg.clean_m3[a : b + 1]
    cause = None
    for name, x in (("outflow", ctx.outflow_m3), ("evaporation", ctx.evaporation_m3)):
        if x is None:
            continue
        xs = x[a : b + 1]
        ok = np.isfinite(seg_r) & np.isfinite(xs)
        if ok.sum() < 10 or np.nanstd(xs[ok]) == 0 or np.nanmean(np.abs(xs[ok])) == 0:
            continue
        share = abs(rate) / float(np.nanmean(np.abs(xs[ok])))
        rho = float(np.corrcoef(seg_r[ok], xs[ok])[0, 1])
        if abs(rho) >= 0.5 and share <= 1.0:
            evidence.append(
                f"the residual follows the {name} (correlation {rho:+.2f}); the departure is "
                f"{100 * share:.0f} % of the mean {name}"
            )
            cause = cause or ("rating shift" if name == "outflow" else "evaporation bias")
    return cause


def _segment_hint(kind: str, cause: str | None, rate: float) -> tuple[str, str]:
    """The cause (a term it follows, else by the sign of the departure) and its hint."""
    if cause == "rating shift":
        return cause, (
            "The unexplained term scales with the outflow: the outlet control may have changed "
            "(weeds, debris, erosion, gate work). Check with new gaugings and refit the rating."
        )
    if cause == "evaporation bias":
        return cause, (
            "The unexplained term scales with the evaporation: the evaporation method or its "
            "coefficient (pan coefficient, weather station) may be biased over this period."
        )
    if rate < 0:
        return "unmetered withdrawal", (
            "A sustained unexplained loss with no stage jump: an unmetered withdrawal (pumping, "
            "irrigation offtake), a leak or a metered outflow not in the records."
            if kind == "run"
            else "The residual moved to a lower level and stayed: a new unmetered withdrawal, "
            "a changed outlet or gauge, or more seepage."
        )
    return "unmetered inflow", (
        "A sustained unexplained gain with no stage jump: an ungauged inflow (stream, return "
        "flow, transfer) or a groundwater gain."
        if kind == "run"
        else "The residual moved to a higher level and stayed: an ungauged inflow, a changed "
        "gauge or a change in the groundwater exchange."
    )
