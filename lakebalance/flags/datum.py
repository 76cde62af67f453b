"""Gauge datum shifts: the one builder of a datum-shift flag, the lone stage steps near a change of
the residual, the aftermath a shift leaves in the computed outflow, and the lasting change that
shows a shift hidden by a storm.

A datum shift is seen two ways: as a one-day storage jump that the residual mirrors (an event,
:mod:`lakebalance.flags.events`), or, for a smaller step, by the level change it leaves in the
residual through the outflow computed from the shifted stage (a segment,
:mod:`lakebalance.flags.segments`). Both build their flag with :func:`datum_shift_flag`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Literal

import numpy as np

from ..records import Correction
from ..stats import Z95
from ..units import MM_PER_M
from .result import Flag
from .robust import rolling_robust_z

if TYPE_CHECKING:  # pragma: no cover
    from .context import FlagContext
    from .options import FlagOptions

#: How a datum shift was seen, and the hint each way gives (``{net}``: the step in m).
_HINTS = {
    "storage jump": (
        "A one-day storage jump with no matching flow, and the stage stays offset by {net:+.3f} m: "
        "check the gauge zero, staff plate or logger (re-installation, survey) and, if confirmed, "
        "accept the offset."
    ),
    "level change": (
        "The stage stepped by {net:+.3f} m with no matching flow and the residual changed level "
        "from that day: check the gauge zero, staff plate or logger and, if confirmed, accept the "
        "offset."
    ),
}


def datum_shift_flag(
    ctx: FlagContext,
    day: int,
    net_m: float,
    *,
    volume_m3: float,
    depth_mm: float,
    rate_m3_per_day: float,
    significance: float,
    seen_by: Literal["storage jump", "level change"],
    evidence: Sequence[str],
) -> Flag:
    """The flag of a gauge datum shift of ``net_m`` (m) on day ``day``, with its correction.

    Both ways a shift is seen build their flag here: as the one-day storage jump the residual
    mirrors (:mod:`lakebalance.flags.events`) and as the level change it leaves through the
    outflow computed from the shifted stage (:func:`level_change_shift`).

    Parameters
    ----------
    ctx : FlagContext
        The record (dates, corrections in force).
    day : int
        Position of the shift's first day.
    net_m : float
        Net stage step (m); the proposed correction is a stage offset of −``net_m``.
    volume_m3 : float
        Unexplained volume of the flag (m³).
    depth_mm : float
        That volume over the lake (mm).
    rate_m3_per_day : float
        Mean departure per flagged day (m³/d).
    significance : float
        |volume| over its 1-σ uncertainty, or the robust z of the stage step (-).
    seen_by : {"storage jump", "level change"}
        How the shift was seen; chooses the hint.
    evidence : sequence of str
        The facts behind the hint.

    Returns
    -------
    Flag
        Of kind ``"datum_shift"`` on the stage series, with its :class:`~lakebalance.records.
        Correction` (``[[correction]]`` kind ``offset``, series ``stage``, start ``day``, value
        −``net_m``), accepted when the site file already has it (:func:`is_accepted`).
    """
    corr = Correction(
        series="stage",
        kind="offset",
        start=ctx.iso(day),
        end=None,
        value=float(-net_m),
        reason=f"gauge datum shift of {net_m:+.3f} m flagged by lakebalance",
    )
    return Flag(
        kind="datum_shift",
        start=ctx.iso(day),
        end=ctx.iso(day),
        series="stage",
        volume_m3=volume_m3,
        depth_mm=depth_mm,
        rate_m3_per_day=rate_m3_per_day,
        significance=significance,
        significant=significance > Z95,
        cause="gauge datum shift",
        hint=_HINTS[seen_by].format(net=net_m),
        evidence=tuple(evidence),
        magnitude_m=float(net_m),
        correction=corr,
        accepted=is_accepted(corr, ctx.corrections),
    )


def is_accepted(proposed: Correction, corrections: Sequence[Correction]) -> bool:
    """A site-file correction of the same series and kind starts on the proposed start day.

    A ``[[correction]]`` of kind ``offset`` on series ``stage`` adds ``value`` (m) to the stage
    readings from ``start`` on (to ``end`` when given) as the records are read, so a shift still
    found on that day is what the accepted offset left of the step: value and end are not
    compared. The kind is always ``offset`` (the only kind a correction can have), so the two
    ways a shift is seen share this one rule.
    """
    return any(
        c.series == proposed.series and c.start == proposed.start and c.kind == proposed.kind
        for c in corrections
    )


def with_evidence(flags: Sequence[Flag], day_iso: str, text: str) -> list[Flag]:
    """``flags`` with ``text`` added to the evidence of the datum shift that starts on ``day_iso``."""
    import dataclasses

    out = list(flags)
    k = next(i for i, f in enumerate(out) if f.kind == "datum_shift" and f.start == day_iso)
    out[k] = dataclasses.replace(out[k], evidence=(*out[k].evidence, text))
    return out


def outflow_note(ctx: FlagContext) -> str:
    """Why a shift changes the residual, when the outflow is computed from the stage."""
    return (
        ", as the outflow is computed from the shifted stage" if ctx.outflow_m3 is not None else ""
    )


def mirrored_stage_step(ctx: FlagContext, a: int) -> int | None:
    """The lone stage step near day ``a`` whose storage jump the residual mirrors, if any.

    The residual summed over the step's day and a day each side must be within half of the
    storage jump the step implies (step × area): no gauged flow matches it.
    """
    if ctx.step_z is None:
        return None
    dev0, area = ctx.departure_m3, ctx.area_m2
    for cand in stage_steps_near(a, ctx.step_z, ctx.step_m, ctx.options):
        if ctx.too_small_for_a_shift(float(ctx.step_m[cand])):
            continue
        seen = float(np.nansum(dev0[max(cand - 1, 0) : cand + 2]))
        jump_m3 = float(ctx.step_m[cand] * area[cand]) if area is not None else float("nan")
        if abs(seen - jump_m3) <= 0.5 * abs(jump_m3):
            return cand
    return None


def level_change_shift(ctx: FlagContext, day: int) -> Flag:
    """The datum-shift flag of a stage step on ``day`` seen by the level change that follows it."""
    net = float(ctx.step_m[day])
    area = ctx.area_m2
    volume = float(net * area[day]) if area is not None else float("nan")
    z = float(ctx.step_z[day]) if ctx.step_z is not None else float("nan")
    return datum_shift_flag(
        ctx,
        day,
        net,
        volume_m3=volume,
        depth_mm=net * MM_PER_M,
        rate_m3_per_day=volume,
        significance=abs(z),
        seen_by="level change",
        evidence=(
            f"the stage stepped by {net:+.3f} m on {ctx.iso(day)} against the change of "
            f"the days around it (robust z {z:+.1f})",
        ),
    )


def stage_steps_near(a: int, z_h: np.ndarray, step: np.ndarray, options: FlagOptions) -> list[int]:
    """Days of lone stage steps (|z| ≥ ``shift_stage_z``, not undone) near ``a``, nearest first."""
    span = options.spike_days + 1
    lo, hi = max(a - span, 0), min(a + span + 1, len(z_h))
    out = []
    for j in sorted(range(lo, hi), key=lambda i: abs(i - a)):  # a few days
        if not np.isfinite(z_h[j]) or abs(z_h[j]) < options.shift_stage_z:
            continue
        after = step[j + 1 : j + 1 + options.spike_days]
        if np.any((np.sign(after) == -np.sign(step[j])) & (np.abs(after) >= 0.5 * abs(step[j]))):
            continue  # undone by a step back of like size: a bad reading, not a shift
        out.append(j)
    return out


def aftermath_shape(
    stage_m: np.ndarray | None, outflow_m3: np.ndarray | None, day: int, step_m: float
) -> np.ndarray | None:
    """Change of the computed outflow caused by a gauge datum shift, day by day (m³/d).

    Parameters
    ----------
    stage_m : ndarray or None
        Daily recorded stage (m), shifted by ``step_m`` from ``day`` on.
    outflow_m3 : ndarray or None
        Daily outflow computed from the recorded stage (m³/d).
    day : int
        Position of the shift.
    step_m : float
        Size of the shift (m).

    Returns
    -------
    ndarray or None
        Q̂(h_t) − Q̂(h_t − δ) from ``day`` on and 0 before (m³/d); None when the outflow is
        unknown or does not vary with the stage.

    Notes
    -----
    The outflow of every day is the outlet law applied to the recorded stage, before the shift
    as after it, so Q̂ is read off the record itself: the outflow against the recorded stage of
    all days (sorted by stage, ties averaged, linear interpolation, clamped at the record's
    ends). The shape then follows the outlet law: it vanishes while the lake is below the
    outlet's sill and grows where the outlet's curve is steep. Common practice, no source.
    """
    if stage_m is None or outflow_m3 is None or not np.isfinite(step_m) or step_m == 0:
        return None
    h = np.asarray(stage_m, dtype=float)
    q = np.asarray(outflow_m3, dtype=float)
    ok = np.isfinite(h) & np.isfinite(q)
    if ok.sum() < 10 or np.ptp(h[ok]) <= 0 or np.ptp(q[ok]) <= 0:
        return None
    hs, inverse = np.unique(h[ok], return_inverse=True)
    qs = np.bincount(inverse, weights=q[ok]) / np.bincount(inverse)
    qs = np.maximum.accumulate(qs)  # an outlet passes more water at a higher stage
    with np.errstate(invalid="ignore"):
        shape = np.interp(h, hs, qs) - np.interp(h - step_m, hs, qs)
    after = np.arange(h.size) >= day
    shape = np.where(after & np.isfinite(h), shape, 0.0)
    return shape if np.any(shape != 0) else None


def lasting_outflow_change(
    residual_m3: np.ndarray,
    stage_m: np.ndarray | None,
    outflow_m3: np.ndarray | None,
    day: int,
    step_m: float,
    scale_m3: np.ndarray,
    *,
    window: int = 90,
    gap: int = 3,
    z_min: float = 4.0,
) -> str | None:
    """Evidence that a stage step of ``step_m`` on ``day`` is a move of the gauge zero, from the
    lasting change it leaves in the residual through the computed outflow; None when not seen.

    Parameters
    ----------
    residual_m3 : ndarray
        Daily residual (m³/d).
    stage_m : ndarray or None
        Daily stage (m).
    outflow_m3 : ndarray or None
        Daily outflow computed from the recorded stage (m³/d).
    day : int
        Position of the stage step.
    step_m : float
        Net stage step (m).
    scale_m3 : ndarray
        Noise scale of each day's residual (m³/d).
    window : int
        Days on each side compared (-).
    gap : int
        Days next to the step left out on each side (the step's own storage jump and the
        day-boundary spread of a storm).
    z_min : float
        Smallest z-score of the expected change against the noise of the comparison (-).

    Returns
    -------
    str or None
        The evidence in words when the residual changed by the expected amount, else None.

    Notes
    -----
    If the gauge zero moves by δ, the outflow computed from the recorded stage rises by about
    (dQ/dh) δ from that day on while the true outflow does not, so the residual rises by
    ΔR ≈ (dQ/dh) δ and stays there (common practice, no source). dQ/dh (m³/d per m) is the
    least-squares slope of the outflow on the stage over the ``window`` days each side. The
    observed change is the difference of the inverse-variance weighted means (weights 1/σ_t²,
    σ_t the day's noise scale) of the residual after and before, each day first winsorised at
    3 σ_t from its 31-day rolling median so that storms and spikes do not carry it; it must be
    within half of ΔR, with |ΔR| at least ``z_min`` times the standard error of the difference,
    √(1/Σw_after + 1/Σw_before) (days taken as independent; common practice, no source).
    """
    if stage_m is None or outflow_m3 is None or not np.isfinite(step_m) or step_m == 0:
        return None
    r = np.asarray(residual_m3, dtype=float)
    h = np.asarray(stage_m, dtype=float)
    q = np.asarray(outflow_m3, dtype=float)
    sc = np.asarray(scale_m3, dtype=float)
    n = r.size
    # storms and spikes: each day winsorised at 3 noise scales from its rolling median
    _, med, _ = rolling_robust_z(r, 31)
    r = np.clip(r, med - 3.0 * sc, med + 3.0 * sc)

    def side(sl: slice) -> tuple[float, float, int]:
        x, s = r[sl], sc[sl]
        ok = np.isfinite(x) & np.isfinite(s) & (s > 0)
        if not ok.any():
            return float("nan"), float("nan"), 0
        w = 1.0 / s[ok] ** 2
        return float(np.sum(w * x[ok]) / np.sum(w)), float(np.sum(w)), int(ok.sum())

    mean_b, w_b, m_b = side(slice(max(0, day - gap - window), max(0, day - gap)))
    mean_a, w_a, m_a = side(slice(min(n, day + gap + 1), min(n, day + gap + 1 + window)))
    m = min(m_b, m_a)
    if m < max(10, window // 3):
        return None
    lo, hi = max(0, day - window), min(n, day + window + 1)
    hq, qq = h[lo:hi], q[lo:hi]
    ok = np.isfinite(hq) & np.isfinite(qq)
    if ok.sum() < 10 or np.ptp(hq[ok]) <= 0:
        return None
    slope = float(np.polyfit(hq[ok], qq[ok], 1)[0])  # m³/d per m
    expected = slope * step_m
    observed = mean_a - mean_b
    se = math.sqrt(1.0 / w_a + 1.0 / w_b)
    if not (np.isfinite(se) and se > 0) or abs(expected) < z_min * se:
        return None
    if abs(observed - expected) > 0.5 * abs(expected):
        return None
    return (
        f"the residual then rose by {observed:+,.0f} m³/d for the following {m} d, as a "
        f"{step_m:+.3f} m move of the gauge zero raises the computed outflow by "
        f"{expected:+,.0f} m³/d (outflow slope {slope:,.0f} m³/d per m)"
    )


def hidden_shifts(
    ctx: FlagContext, clean_m3: np.ndarray, known: dict[int, float], *, z_min: float = 8.0
) -> list[int]:
    """Datum shifts no event saw, found by the aftermath they leave in the computed outflow.

    On a lake whose outflow is computed from the stage, a gauge zero that moves by δ on day j
    raises the computed outflow by Q̂(h_t) − Q̂(h_t − δ) from then on (:func:`aftermath_shape`),
    a change that follows the stage; a storm on day j can hide the step itself from the event
    detector. Each stage step of at least twice the resolution and |robust z| ≥
    ``shift_stage_z`` is tried as a regressor beside the usual level a + b (h − h̄) (weighted
    least squares, weights 1/scale²); it is a datum shift when its coefficient lies within half
    of 1 (the residual changed by what the shift predicts) and its t-value, with the long-run
    variance ratio of the weighted residuals, is at least ``z_min``. The best is taken, then the
    search is repeated with it in the level, up to three shifts. The aftermath of the shifts
    already ``known`` (position → step, m) is in the level from the start. Common practice, no
    source.

    Returns
    -------
    list of int
        Positions of the shifts found.
    """
    from .robust import long_run_variance_ratio

    if ctx.stage_m is None or ctx.outflow_m3 is None or ctx.step_z is None:
        return []
    h, r, sc = ctx.stage_m, np.asarray(clean_m3, dtype=float), ctx.scale_m3
    ok = np.isfinite(h) & np.isfinite(r) & np.isfinite(sc) & (sc > 0)
    if ok.sum() < 90:
        return []
    w = np.where(ok, 1.0 / np.where(ok, sc, 1.0) ** 2, 0.0)
    sw = np.sqrt(w)
    h_mean = float(np.mean(h[ok]))
    cols = [np.ones(ctx.n), np.where(ok, h - h_mean, 0.0)]
    for j, step in known.items():
        x = aftermath_shape(h, ctx.outflow_m3, j, float(step))
        if x is not None:
            cols.append(np.where(ok, x, 0.0))
    res_min = 2.0 * ctx.resolution_m
    cum = np.cumsum(ok)
    near = ctx.options.spike_days + 1
    cand = [
        int(j)
        for j in np.flatnonzero(
            (np.abs(np.nan_to_num(ctx.step_z)) >= 1.0) & (np.abs(ctx.step_m) >= max(res_min, 1e-9))
        )
        if cum[j] >= 30 and cum[-1] - cum[j] >= 30
    ]
    found: list[int] = []
    for _ in range(3):  # a few shifts at most
        taken = list(known) + found
        base = np.column_stack(cols)
        best = None
        for j in cand:  # loop over candidate days (a few per cent of the record)
            if any(abs(j - d) <= near for d in taken):
                continue
            x = aftermath_shape(h, ctx.outflow_m3, j, float(ctx.step_m[j]))
            if x is None:
                continue
            design = np.column_stack([base, np.where(ok, x, 0.0)]) * sw[:, None]
            y = np.where(ok, r, 0.0) * sw
            coef, *_ = np.linalg.lstsq(design, y, rcond=None)
            c = float(coef[-1])
            if not 0.5 <= c <= 1.5:
                continue
            resid = (y - design @ coef)[ok]
            dof = max(int(ok.sum()) - design.shape[1], 1)
            s2 = float(resid @ resid) / dof * long_run_variance_ratio(resid)
            try:
                cov = np.linalg.inv(design.T @ design) * s2
            except np.linalg.LinAlgError:
                continue
            tval = c / np.sqrt(max(cov[-1, -1], 1e-300))
            if tval >= z_min and (best is None or tval > best[1]):
                best = (j, tval, np.where(ok, x, 0.0))
        if best is None:
            break
        found.append(best[0])
        cols.append(best[2])
    return found
