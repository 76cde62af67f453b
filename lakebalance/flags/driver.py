"""The one driver: :func:`detect_flags` runs the detectors in turn over one frozen context."""

from __future__ import annotations

from typing import TYPE_CHECKING

from ..records import Correction
from .context import build_context
from .drift import drift_flags
from .events import find_events, with_hidden_shifts
from .options import FlagOptions
from .periods import offset_periods, stuck_flags
from .result import Flags
from .segments import cusum_flags, fitted_aftermath, segment_flags, segment_residual

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import pandas as pd

    from ..errormodel import ResidualErrors


def detect_flags(
    daily: pd.DataFrame,
    options: FlagOptions | None = None,
    *,
    sigma_m3: pd.Series | np.ndarray | None = None,
    corrections: tuple[Correction, ...] = (),
    exclude: pd.Series | np.ndarray | None = None,
    errors: ResidualErrors | None = None,
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
    errors : ResidualErrors, optional
        The balance's error model (``Balance.error_model``). When given, the significance of
        every flag is its volume over the exact standard deviation of that volume under the
        model, and a run or level shift is kept only when it reaches
        ``significance_threshold``.

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

    1b. *Hidden datum shifts*: on a lake with a computed outflow, stage steps no event saw are
       tried as the aftermath regressor Q̂(h) − Q̂(h − δ) beside the usual level
       (:func:`~lakebalance.flags.datum.hidden_shifts`).
    5. *Offset periods*: a datum shift and its undoing within ``offset_max_days`` become one
       flag with both ends (:func:`~lakebalance.flags.periods.offset_periods`).
    6. *Stuck sensors*: repeated daily stages over which the residual says the lake moved
       (:func:`~lakebalance.flags.periods.stuck_flags`).

    Significance with ``errors``: |V| over the exact standard deviation of V under the error
    model (:meth:`FlagContext.sigma_of_departure`); runs, level shifts and flow spikes are
    kept at ``significance_threshold``, stage events at 1.96. Without it (the old rule):
    |V| / sqrt(Σ σ_t²) over the flagged days, with σ_t the band's daily 1-σ
    (``sigma_m3``) or the residual's robust noise times the square root of the long-run variance
    ratio. Days are taken as independent in the band, a systematic error common to the whole
    record is part of the usual level.
    """
    ctx = build_context(
        daily,
        options or FlagOptions(),
        sigma_m3=sigma_m3,
        corrections=corrections,
        exclude=exclude,
        errors=errors,
    )
    events = find_events(ctx)  # step 1: spikes and datum shifts
    events = with_hidden_shifts(ctx, events)  # datum shifts a storm hid from step 1
    seg = segment_residual(ctx, events)  # step 2: usual level and segments
    flags = fitted_aftermath(ctx, seg, events.flags)
    flags, covered, datum_starts = segment_flags(ctx, seg, flags, events.datum_starts)
    flags += cusum_flags(ctx, seg, covered, datum_starts)  # step 3: runs the segments missed
    flags += drift_flags(ctx, seg)  # step 4: drift inside long segments
    flags = offset_periods(ctx, flags)  # step 5: a shift and its undoing are one period
    flags = stuck_flags(ctx, flags)  # step 6: repeated stages while the lake moved
    flags.sort(key=lambda f: (f.start, f.kind))
    return Flags(
        items=tuple(flags),
        residual_m3=daily["residual_m3"].copy(),
        baseline_m3=float(seg.baseline_m3),
        noise_m3=float(ctx.noise_m3),
        ratio=float(seg.ratio),
        penalty=float(seg.change.penalty),
        change_points=tuple(ctx.iso(i) for i in seg.change.starts),
        corrections=ctx.corrections,
        band_source=ctx.band_source,
        usual_level=seg.level_note,
        options=ctx.options,
    )
