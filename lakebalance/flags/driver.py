"""The one driver: :func:`detect_flags` runs the detectors in turn over one context."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from ..records import Correction
from ..stats import Z95 as _Z95
from ..units import MM_PER_M
from .context import MIN_RESIDUAL_DAYS, column, term_throughput
from .datum import aftermath_shape, lasting_outflow_change, stage_steps_near
from .drift import norm_ppf, trend_test
from .events import describe_flows, groups, is_high
from .level import usual_level_fit
from .options import FlagOptions
from .result import Flag, FlagKind, Flags
from .robust import cusum_runs, noise_scale, quiet_nan_warnings, rolling_robust_z, span_mean
from .segments import change_points, date_run, segment_flag
from .stage import flow_adjusted_stage_change, gauged_net_flow, stage_step_anomaly

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd


def detect_flags(
    daily: pd.DataFrame,
    options: FlagOptions | None = None,
    *,
    sigma_m3: pd.Series | np.ndarray | None = None,
    corrections: tuple[Correction, ...] = (),
    exclude: pd.Series | np.ndarray | None = None,
) -> Flags:
    """Flag the unexplained residual and the stage record of a daily balance.

    Parameters
    ----------
    daily : DataFrame
        Daily balance on a regular daily index: ``residual_m3`` (m³/d, positive = unexplained
        gain, NaN where unknown) is required; ``stage_m`` (m), ``area_m2`` (m²),
        ``inflow_m3``, ``rain_m3``, ``outflow_m3``, ``evaporation_m3`` (m³/d) are used for the
        evidence when present.
    options : FlagOptions, optional
        Thresholds (the ``[flags]`` section of the site file).
    sigma_m3 : Series or ndarray, optional
        1-σ uncertainty of each day's residual from the balance's uncertainty band (m³/d). Without
        it the significance is measured against the noise of the residual itself.
    corrections : tuple of Correction
        The corrections of the site file already applied to the records (reported, and used to
        mark matching flags as accepted).
    exclude : Series or ndarray of bool, optional
        Days left out of every detector (e.g. a stage flat-line already reported by the checks
        on the raw series).

    Returns
    -------
    Flags

    Notes
    -----
    1. *Events* (spikes and datum shifts): days whose residual has a robust z-score
       |z| > ``outlier_threshold`` (rolling window ``outlier_window``), and days whose stage
       change Δh has one where the residual is unknown. Events within ``spike_days`` of each
       other are merged. When the stage steps on an event day, the event is a datum shift if the
       step is not undone within the event (net step ≥ half the largest cumulative step) and a
       stage spike otherwise; with no stage step it is a spike of a flow term.
    2. *Level shifts and runs*: change points of the residual with event days left out
       (:func:`change_points`, segments of at least ``min_run_days``). The usual level is the
       length-weighted median of the segment means; a segment away from it is a run when both of
       its ends are change points and a level shift when it reaches either end of the record.
       Segments starting at a datum shift are its aftermath and become its evidence.
    3. *Runs* missed by the segmentation: two-sided CUSUM (:func:`cusum_runs`) of
       (residual − usual level) / (noise · √ratio).
    4. *Drift*: a linear trend, tested with Newey–West errors, inside segments of at least
       ``drift_min_days``; reported when p < ``drift_alpha``.

    Significance: |V| / sqrt(Σ σ_t²) over the flagged days, with σ_t the band's daily 1-σ
    (``sigma_m3``) or the residual's robust noise times the square root of the long-run variance
    ratio. Days are taken as independent in the band, a systematic error common to the whole
    record is part of the usual level.
    """
    import pandas as pd

    options = options or FlagOptions()
    if "residual_m3" not in daily.columns:
        from .errors import LakebalanceError

        raise LakebalanceError("the daily balance has no 'residual_m3' column to flag")
    index = daily.index
    r = daily["residual_m3"].to_numpy(dtype=float).copy()
    n = r.size
    if exclude is not None:
        left_out = np.asarray(exclude, dtype=bool)
        if left_out.shape != r.shape:
            raise ValueError("exclude must have one value per day of the balance")
        r[left_out] = np.nan
    n_valid = int(np.isfinite(r).sum())
    if n_valid < MIN_RESIDUAL_DAYS:
        # Without residuals the noise scale has nothing to stand on and every stage step would
        # be "significant" against a placeholder noise of 1 m³/d.
        from .errors import FitError

        raise FitError(
            f"only {n_valid} of {n} day(s) have a residual (at least {MIN_RESIDUAL_DAYS} needed "
            "to flag it): the record is too short, a term is missing on the other days, or a "
            "term's record does not overlap the stage record (see 'lakebalance check')"
        )
    stage = column(daily, "stage_m")
    area = column(daily, "area_m2")
    inflow = column(daily, "inflow_m3")
    rain = column(daily, "rain_m3")
    outflow = column(daily, "outflow_m3")
    evaporation = column(daily, "evaporation_m3")
    if sigma_m3 is not None:
        band = np.asarray(sigma_m3, dtype=float)
        if band.shape != r.shape:
            raise ValueError("sigma_m3 must have one value per day of the balance")
        band_source = "balance uncertainty band"
    else:
        band = None
        band_source = "noise of the residual (no uncertainty band given)"

    def iso(i: int) -> str:
        return pd.Timestamp(index[i]).date().isoformat()

    mean_area = np.nanmean(area) if area is not None and np.isfinite(area).any() else float("nan")

    def depth_mm(volume: float, a: int, b: int) -> float:
        if area is None:
            return float("nan")
        with quiet_nan_warnings():
            ar = np.nanmean(area[a : b + 1])
        if not np.isfinite(ar) or ar <= 0:
            ar = mean_area
        return float(volume / ar * MM_PER_M) if np.isfinite(ar) and ar > 0 else float("nan")

    # ---- noise scale of each day (for detection) -------------------------------------------
    _, med_r, _ = rolling_robust_z(r, options.outlier_window)
    dev0 = r - med_r
    scale_m3 = noise_scale(dev0, term_throughput(daily), window=3 * options.outlier_window)
    z_w = dev0 / scale_m3
    noise = float(np.nanmedian(scale_m3))

    # ---- step 1: events --------------------------------------------------------------------
    out_r = np.abs(z_w) > options.outlier_threshold
    throughput = term_throughput(daily)
    if stage is not None:
        net_flow = gauged_net_flow(daily)
        if net_flow is not None and area is not None:
            # steps the gauged flows explain (storms) are taken out before looking for steps
            # the area of a day with no balance is taken from the nearest day that has one
            area_near = pd.Series(area).ffill().bfill().to_numpy()
            adjusted = flow_adjusted_stage_change(stage, net_flow, area_near)
            step_adj = stage_step_anomaly(stage[0] + np.nancumsum(np.nan_to_num(adjusted)))
            step_adj = np.where(np.isfinite(adjusted), step_adj, np.nan)
        else:
            step_adj = None
        step = stage_step_anomaly(stage)
        z_h = step / noise_scale(step, throughput, window=3 * options.outlier_window)
        if step_adj is not None:
            # the step left once the day's gauged flows are taken out (a storm the gauges see
            # leaves none); its scale grows with the throughput, as the mid-day rule is rough
            # when the outflow bends sharply within a flood day
            z_adj = step_adj / noise_scale(step_adj, throughput, window=3 * options.outlier_window)
            use_adj = np.isfinite(z_adj)
            step = np.where(use_adj, step_adj, step)
            z_h = np.where(use_adj, z_adj, z_h)
        step = np.nan_to_num(step)
        # a step is judged by the balance of its own day: none there, nothing to confirm it
        jump = (np.abs(np.nan_to_num(z_h)) > options.outlier_threshold) & np.isfinite(r)
    else:
        z_h = None
        step = np.zeros(n)
        jump = np.zeros(n, dtype=bool)
    event_mask = out_r | jump
    events = groups(event_mask, gap=max(0, options.spike_days - 1))

    def sigma_of(a: int, b: int, ratio: float) -> float:
        if band is not None:
            s = band[a : b + 1]
            s = s[np.isfinite(s)]
            if s.size:
                return float(math.sqrt(np.sum(s**2)))
        ok = np.isfinite(r[a : b + 1])
        if not ok.any():
            return float(noise * math.sqrt(ratio))
        return float(math.sqrt(ratio * np.sum(scale_m3[a : b + 1][ok] ** 2)))

    flags: list[Flag] = []
    datum_starts: list[int] = []
    by_lasting: set[int] = set()
    for a, b in events:  # loop over events (few)
        anomaly = r[a : b + 1] - med_r[a : b + 1]
        cum = np.cumsum(step[a : b + 1])
        peak = float(cum[np.argmax(np.abs(cum))]) if cum.size else 0.0
        net = float(cum[-1]) if cum.size else 0.0
        stage_jump = bool(jump[a : b + 1].any())
        jumps = a + np.flatnonzero(jump[a : b + 1])
        first_jump = int(jumps[0]) if stage_jump else a
        last_jump = int(jumps[-1]) if stage_jump else b
        evidence: list[str] = []
        implied = float("nan")
        reversed_ = False
        if stage_jump:
            a_area = area[first_jump] if area is not None else float("nan")
            implied = peak * a_area if np.isfinite(a_area) else float("nan")
            # The shape of the steps: a step away and a step back of like size is a bad reading
            # (spike); a single step that stays is a shift of the gauge zero.
            sizes = step[jumps]
            up, down = sizes[sizes > 0], sizes[sizes < 0]
            reversed_ = bool(
                up.size
                and down.size
                and min(up.max(), -down.min()) >= 0.5 * max(up.max(), -down.min())
            )
            if reversed_:
                peak = float(step[first_jump])  # the step away from the true stage
                net = float(np.sum(sizes))
            else:
                peak = net = float(np.sum(sizes))
            a_area = area[first_jump] if area is not None else float("nan")
            implied = peak * a_area if np.isfinite(a_area) else float("nan")
            # does the balance see the storage jump the step implies? (running sums over the
            # event and a day each side: the day-boundary rule spreads a step over two days)
            lo_i, hi_i = max(a - 1, 0), min(b + 2, n)
            seen = np.nan_to_num(r[lo_i:hi_i] - med_r[lo_i:hi_i])
            if np.isfinite(r[a : b + 1]).any() and np.isfinite(implied):
                c_seen = np.cumsum(seen)
                if reversed_:
                    mirrored = float(np.max(np.abs(c_seen)))
                    stage_jump = mirrored >= 0.25 * abs(implied)
                else:
                    mirrored = abs(float(c_seen[-1]))
                    stage_jump = abs(c_seen[-1] - implied) <= 0.5 * abs(implied)
                # and the mirror must stand out of the residual's noise on those days (storm
                # days are noisy: a flood's timing error is no stage fault)
                sd = math.sqrt(float(np.nansum(scale_m3[lo_i:hi_i] ** 2)))
                stage_jump = stage_jump and mirrored >= options.outlier_threshold * sd
            elif np.isfinite(implied):
                stage_jump = False  # no balance on those days to confirm the step
            if not stage_jump and not reversed_ and np.isfinite(r[a : b + 1]).any():
                # a storm on the day hides the mirror: the step may still show by what it does
                # to the outflow computed from the shifted stage, a change that lasts
                lasting = lasting_outflow_change(r, stage, outflow, first_jump, net, scale_m3)
                if lasting is not None:
                    stage_jump = True
                    evidence.append(lasting)
                    by_lasting.add(first_jump)
        if not stage_jump and not out_r[a : b + 1].any():
            continue  # a stage step that the flows explain: nothing to flag
        if stage_jump:
            evidence.append(
                f"the stage stepped by {peak:+.3f} m on {iso(first_jump)} "
                f"(robust z {z_h[first_jump]:+.1f} of the daily change)"
            )
            if np.isfinite(implied):
                evidence.append(
                    f"a storage change of {implied:+,.0f} m³ in the balance, which the "
                    "residual mirrors"
                )
            flow_note = describe_flows(
                inflow, rain, first_jump, options.outlier_window, iso, jump_m3=implied
            )
            if flow_note:
                evidence.append(flow_note)
        if stage_jump and not reversed_:
            # datum shift: the step stays
            kind: FlagKind = "datum_shift"
            volume = float(np.nansum(anomaly)) if np.isfinite(anomaly).any() else implied
            evidence.append(
                f"the step was not undone within {options.spike_days} day(s) "
                f"(net {net:+.3f} m of {peak:+.3f} m)"
            )
            corr = Correction(
                series="stage",
                kind="offset",
                start=iso(first_jump),
                end=None,
                value=float(-net),
                reason=f"gauge datum shift of {net:+.3f} m flagged by lakebalance",
            )
            accepted = any(
                c.series == "stage" and c.start == corr.start and c.kind == "offset"
                for c in corrections
            )
            flags.append(
                Flag(
                    kind=kind,
                    start=iso(first_jump),
                    end=iso(first_jump),
                    series="stage",
                    volume_m3=volume,
                    depth_mm=depth_mm(volume, a, b),
                    rate_m3_per_day=volume / (b - a + 1),
                    significance=abs(volume) / sigma_of(a, b, 1.0),
                    significant=abs(volume) / sigma_of(a, b, 1.0) > _Z95,
                    cause="gauge datum shift",
                    hint=(
                        "A one-day storage jump with no matching flow, and the stage stays "
                        f"offset by {net:+.3f} m: check the gauge zero, staff plate or logger "
                        "(re-installation, survey) and, if confirmed, accept the offset."
                    ),
                    evidence=tuple(evidence),
                    magnitude_m=float(net),
                    correction=corr,
                    accepted=accepted,
                )
            )
            datum_starts.append(first_jump)
        else:
            if stage_jump:
                # the bad reading appears in the residual as the storage jump it implies
                volume = float(peak * area[first_jump]) if area is not None else float("nan")
                if not np.isfinite(volume):
                    volume = float(np.nansum(anomaly))
                cause = "bad stage reading"
                series = "stage"
                evidence.append(
                    f"the stage came back within the event (net {net:+.3f} m of {peak:+.3f} m)"
                )
                hint = (
                    "The stage stepped and came back: a bad reading (logger glitch, wave, "
                    "debris on the sensor). Check the raw readings; the paired residuals cancel."
                )
                magnitude: float | None = float(peak)
            else:
                lo_i, hi_i = max(a - 1, 0), min(b + 2, n)
                around = r[lo_i:hi_i] - med_r[lo_i:hi_i]
                biggest = float(np.nanmax(np.abs(around))) if np.isfinite(around).any() else 0.0
                if abs(float(np.nansum(around))) < 0.5 * biggest:
                    # a gain at once undone by a loss (or the reverse): water moved between
                    # days by the day-boundary timing, not a volume; nothing to flag
                    continue
                if stage is not None and any(
                    0 <= i < n and np.isfinite(stage[i]) and not np.isfinite(r[i])
                    for i in (a - 1, b + 1)
                ):
                    # the storage change of this day takes half the stage change into a day
                    # with a stage but no balance (the record's last day, a missing term):
                    # the loss that would undo a timing gain cannot be seen, so no flag
                    continue
                volume = float(np.nansum(anomaly))
                series = "residual"
                magnitude = None
                rain_big = is_high(rain, a, b, options.outlier_window)
                if volume > 0 and rain_big:
                    cause = "ungauged storm inflow"
                    hint = (
                        "An unexplained gain on a rainy day with no stage step: runoff from an "
                        "ungauged area, or under-read rain or inflow."
                    )
                else:
                    cause = "spike in a flow term"
                    hint = (
                        "An unexplained "
                        + ("gain" if volume > 0 else "loss")
                        + " on a day with no stage step: check the inflow, withdrawal and release "
                        "readings of that day (a spike or a missing decimal)."
                    )
                zmax = float(np.nanmax(np.abs(z_w[a : b + 1])))
                evidence.append(f"residual robust z up to {zmax:.1f} with no stage step")
            if not np.isfinite(volume):
                volume = 0.0
            sig = abs(volume) / sigma_of(a, b, 1.0)
            if series == "stage":
                # the bad readings lie between the step away and the step back
                a_flag, b_flag = first_jump, max(first_jump, last_jump - 1)
            else:
                a_flag, b_flag = a, b
            flags.append(
                Flag(
                    kind="spike",
                    start=iso(a_flag),
                    end=iso(b_flag),
                    series=series,
                    volume_m3=volume,
                    depth_mm=depth_mm(volume, a, b),
                    rate_m3_per_day=volume / (b - a + 1),
                    significance=sig,
                    significant=sig > _Z95,
                    cause=cause,
                    hint=hint,
                    evidence=tuple(evidence),
                    magnitude_m=magnitude,
                )
            )

    # ---- step 2: change points on the standardised residual ---------------------------------
    clean = r.copy()
    for a, b in events:
        clean[a : b + 1] = np.nan
    shifts_found = tuple(d for d in datum_starts if d not in by_lasting)
    shapes = {}
    for f in flags:
        if f.kind == "datum_shift" and f.magnitude_m is not None:
            j = int(index.get_loc(pd.Timestamp(f.start)))
            shape = aftermath_shape(stage, outflow, j, f.magnitude_m)
            if shape is not None:
                shapes[j] = shape
    baseline_t, baseline_note, shift_steps = usual_level_fit(
        clean, stage, scale_m3, shifts_found, shapes
    )
    dev = clean - baseline_t  # m³/d
    dev_w = dev / scale_m3  # (-)
    cps = change_points(
        dev_w,
        penalty=options.penalty,
        min_size=options.min_run_days,
        method=options.change_method,
    )
    # a run lowers (or raises) the stage too: refit the usual level without the segments that
    # depart from it, so that the stage term does not absorb them, and segment again
    calm = clean.copy()
    for (a, b), m in zip(cps.segments, cps.means):
        valid = int(np.isfinite(dev_w[a : b + 1]).sum())
        if valid and abs(m) * math.sqrt(valid / cps.ratio) >= options.run_threshold:
            calm[a : b + 1] = np.nan
    if (
        np.isfinite(calm).sum() >= max(30, n // 4)
        and np.isfinite(calm).sum() < np.isfinite(clean).sum()
    ):
        level_t, note, steps_t = usual_level_fit(calm, stage, scale_m3, shifts_found, shapes)
        if np.isfinite(level_t).any():
            baseline_t, baseline_note, shift_steps = level_t, note, steps_t
            dev = clean - baseline_t
            dev_w = dev / scale_m3
            cps = change_points(
                dev_w,
                penalty=options.penalty,
                min_size=options.min_run_days,
                method=options.change_method,
            )
    for j, c in shift_steps.items():  # the aftermath of each datum shift, as fitted
        k = next(i for i, f in enumerate(flags) if f.kind == "datum_shift" and f.start == iso(j))
        extra = f"the residual's usual level changed by {c:+,.0f} m³/d from that day on" + (
            ", as the outflow is computed from the shifted stage" if outflow is not None else ""
        )
        flags[k] = replace_flag(flags[k], evidence=(*flags[k].evidence, extra))
    ratio = cps.ratio
    with quiet_nan_warnings():
        means_r = np.array([np.nanmean(clean[a : b + 1]) for a, b in cps.segments])
    baseline = float(np.nanmedian(baseline_t)) if np.isfinite(baseline_t).any() else 0.0
    covered = np.zeros(n, dtype=bool)

    def strength(a: int, b: int) -> tuple[int, float]:
        """Days and z-score of a departure; 0 when it is too small to matter."""
        valid = int(np.isfinite(dev_w[a : b + 1]).sum())
        if valid == 0:
            return 0, 0.0
        total_w = float(np.nansum(dev_w[a : b + 1]))
        z = abs(total_w) / math.sqrt(ratio * valid)
        # the same test on the mean volume per day (m³/d), weighted by the inverse variance:
        # a steady offtake or inflow of so many m³/d is seen best on the quiet days, and the
        # noisy storm days inside the run neither hide it nor make it
        ok = np.isfinite(dev[a : b + 1])
        w = 1.0 / scale_m3[a : b + 1][ok] ** 2
        z_m3 = abs(float(np.sum(w * dev[a : b + 1][ok]))) / math.sqrt(ratio * float(np.sum(w)))
        if abs(total_w) / valid < options.min_run_effect:
            return valid, 0.0
        return valid, min(z, z_m3)

    aftermath_sign: float | None = None
    aftermath_of = -1
    for seg_i, ((a, b), mean) in enumerate(zip(cps.segments, means_r)):
        days_valid, z_seg = strength(a, b)
        if days_valid < options.min_run_days or z_seg < options.run_threshold:
            continue
        volume = float(np.nansum(dev[a : b + 1]))
        # a smaller step of the gauge zero, seen mainly by its effect on the outflow?
        j = None
        seg_sign = float(np.sign(mean - span_mean(baseline_t, a, b)))
        in_chain = aftermath_sign is not None and seg_sign == aftermath_sign
        for cand in (
            stage_steps_near(a, z_h, step, options) if z_h is not None and not in_chain else []
        ):
            # the residual must mirror the storage jump of the step (no matching flow)
            seen = float(np.nansum(dev0[max(cand - 1, 0) : cand + 2]))
            jump_m3 = float(step[cand] * area[cand]) if area is not None else float("nan")
            if abs(seen - jump_m3) <= 0.5 * abs(jump_m3):
                j = cand
                break
        if j is not None and not any(abs(j - d) <= options.spike_days + 1 for d in datum_starts):
            net = float(step[j])
            corr = Correction(
                series="stage",
                kind="offset",
                start=iso(j),
                end=None,
                value=-net,
                reason=f"gauge datum shift of {net:+.3f} m flagged by lakebalance",
            )
            vol_j = float(net * area[j]) if area is not None else float("nan")
            flags.append(
                Flag(
                    kind="datum_shift",
                    start=iso(j),
                    end=iso(j),
                    series="stage",
                    volume_m3=vol_j,
                    depth_mm=net * MM_PER_M,
                    rate_m3_per_day=vol_j,
                    significance=abs(float(z_h[j])),
                    significant=abs(float(z_h[j])) > _Z95,
                    cause="gauge datum shift",
                    hint=(
                        f"The stage stepped by {net:+.3f} m with no matching flow and the "
                        "residual changed level from that day: check the gauge zero, staff plate "
                        "or logger and, if confirmed, accept the offset."
                    ),
                    evidence=(
                        f"the stage stepped by {net:+.3f} m on {iso(j)} against the change of "
                        f"the days around it (robust z {float(z_h[j]):+.1f})",
                    ),
                    magnitude_m=net,
                    correction=corr,
                    accepted=any(
                        c.series == "stage" and c.start == corr.start for c in corrections
                    ),
                )
            )
            datum_starts.append(j)
        # aftermath of a datum shift: the first departure after it, and later ones of its sign
        after = [d for d in datum_starts if abs(a - d) <= options.spike_days + 1]
        if (
            not after
            and aftermath_sign is not None
            and np.sign(mean - span_mean(baseline_t, a, b)) == aftermath_sign
        ):
            after = [aftermath_of]
        if after and aftermath_sign is None:
            aftermath_sign = float(np.sign(mean - span_mean(baseline_t, a, b)))
            aftermath_of = after[0]
        if after:
            k = next(
                i
                for i, f in enumerate(flags)
                if f.kind == "datum_shift" and f.start == iso(after[0])
            )
            f = flags[k]
            extra = (
                f"then the residual changed by {mean - span_mean(baseline_t, a, b):+,.0f} m³/d from {iso(a)} to "
                f"{iso(b)} ({days_valid} d)"
                + (
                    ", as the outflow is computed from the shifted stage"
                    if outflow is not None
                    else ""
                )
            )
            flags[k] = replace_flag(f, evidence=(*f.evidence, extra))
            covered[a : b + 1] = True
            continue
        bounded = 0 < seg_i < len(cps.segments) - 1
        if bounded:
            a, b = date_run(dev, scale_m3, a, b, reach=options.min_run_days)
            volume = float(np.nansum(dev[a : b + 1]))
            days_valid = int(np.isfinite(dev[a : b + 1]).sum())
            with quiet_nan_warnings():
                mean = float(np.nanmean(clean[a : b + 1]))
        flags.append(
            segment_flag(
                "run" if bounded else "level_shift",
                a,
                b,
                volume,
                days_valid,
                span_mean(baseline_t, a, b),
                float(mean),
                iso,
                depth_mm,
                sigma_of,
                ratio,
                step,
                z_h,
                clean,
                outflow,
                evaporation,
                options,
            )
        )
        covered[a : b + 1] = True

    # ---- step 3: CUSUM runs ----------------------------------------------------------------
    for a, b, _sign in cusum_runs(
        dev_w / math.sqrt(ratio), slack=options.cusum_slack, threshold=options.cusum_threshold
    ):
        if covered[a : b + 1].any() or any(
            abs(a - d) <= options.spike_days + 1 for d in datum_starts
        ):
            continue
        days_valid, z_run = strength(a, b)
        if days_valid < options.min_run_days or z_run < options.run_threshold:
            continue
        volume = float(np.nansum(dev[a : b + 1]))
        with quiet_nan_warnings():
            mean = float(np.nanmean(clean[a : b + 1]))
        flags.append(
            segment_flag(
                "run",
                a,
                b,
                volume,
                days_valid,
                span_mean(baseline_t, a, b),
                mean,
                iso,
                depth_mm,
                sigma_of,
                ratio,
                step,
                z_h,
                clean,
                outflow,
                evaporation,
                options,
                detector="CUSUM",
            )
        )
        covered[a : b + 1] = True

    # ---- step 4: drift inside long segments ------------------------------------------------
    for a, b in cps.segments:
        if b - a + 1 < options.drift_min_days:
            continue
        res = trend_test(dev[a : b + 1])  # departure from the usual level (shift steps out)
        if res is None:
            continue
        slope, p_value = res
        if p_value >= options.drift_alpha:
            continue
        days = b - a + 1
        t = np.arange(days) - (days - 1) / 2.0
        volume = float(slope * np.sum(t[t > 0]))  # second half's excess over the segment mean
        flags.append(
            Flag(
                kind="drift",
                start=iso(a),
                end=iso(b),
                series="residual",
                volume_m3=volume,
                depth_mm=depth_mm(volume, a, b),
                rate_m3_per_day=float(slope),
                significance=float(abs(norm_ppf(p_value / 2.0))),
                significant=bool(p_value < 0.05),
                cause="drift",
                hint=(
                    "The residual trends steadily: a drifting sensor (stage logger, flow meter), "
                    "a rating that changes slowly (weed growth, sedimentation) or a slowly "
                    "changing groundwater exchange."
                ),
                evidence=(
                    f"trend of {slope:+,.1f} m³/d per day over {days} d "
                    f"(Newey–West p = {p_value:.2g})",
                    f"{volume:+,.0f} m³ in the second half above the segment's mean level",
                ),
            )
        )

    flags.sort(key=lambda f: (f.start, f.kind))
    return Flags(
        items=tuple(flags),
        residual_m3=daily["residual_m3"].copy(),
        baseline_m3=float(baseline),
        noise_m3=float(noise),
        ratio=float(ratio),
        penalty=float(cps.penalty),
        change_points=tuple(iso(i) for i in cps.starts),
        corrections=tuple(corrections),
        band_source=band_source,
        usual_level=baseline_note,
        options=options,
    )


def replace_flag(f: Flag, **changes) -> Flag:
    import dataclasses

    return dataclasses.replace(f, **changes)
