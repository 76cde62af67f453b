"""Flags on the unexplained residual of the daily balance and on the stage record.

The residual of a day is what the gauged terms do not explain (positive = an unexplained gain, m³
per day). Four detectors look at it, each with a published method behind it:

* **isolated outliers** — robust z-score on a rolling median and median absolute deviation
  (the Hampel identifier; Hampel, 1974; Pearson, 2002), on the residual and on the daily stage
  change;
* **level shifts** — penalised change-point search on the segment means (PELT, Killick et al.,
  2012, or binary segmentation, Scott & Knott, 1974) through the ``ruptures`` library (Truong et
  al., 2020), with a BIC-like default penalty;
* **persistent runs** — the two-sided tabular CUSUM (Page, 1954) on the standardised residual;
* **drift** — a linear trend inside a segment, tested with Newey–West (1987) standard errors.

Each candidate becomes a :class:`Flag` with its dates, volume (m³), depth over the lake (mm), a
significance against the uncertainty band of the residual, and a plain-words hint at its likely
cause with the evidence for it. Flags never alter the data: a user who accepts a proposed
correction writes it as a ``[[correction]]`` table in the site file (applied when the records are
read), and :class:`Flags` lists the corrections in force.

All functions here are pure: they take pandas Series / DataFrames or ndarrays and return new
objects.

Layout, by detector family: :mod:`~lakebalance.flags.options` (``FlagOptions``),
:mod:`~lakebalance.flags.robust` (rolling robust z, noise scale, long-run variance ratio, CUSUM),
:mod:`~lakebalance.flags.stage` (the stage record's daily steps), :mod:`~lakebalance.flags.context`
(the frozen :class:`~lakebalance.flags.context.FlagContext` every detector reads),
:mod:`~lakebalance.flags.events` (single-day events: spikes, bad stage readings, datum shifts seen
as a storage jump), :mod:`~lakebalance.flags.datum` (the one datum-shift flag builder, aftermath
and lasting change of a shift), :mod:`~lakebalance.flags.level` (the usual level),
:mod:`~lakebalance.flags.changepoints` (change points, dating of runs),
:mod:`~lakebalance.flags.segments` (level shifts, runs, datum shifts seen by their aftermath),
:mod:`~lakebalance.flags.drift`, :mod:`~lakebalance.flags.periods` (offset periods with both
ends, stuck sensors), :mod:`~lakebalance.flags.result` (``Flag``, ``Flags``) and
:mod:`~lakebalance.flags.driver` (:func:`detect_flags`).
"""

from __future__ import annotations

from ..stats import MAD_TO_SIGMA, robust_sigma
from .changepoints import ChangePoints, change_points, date_run, refine_run
from .context import MIN_RESIDUAL_DAYS as MIN_RESIDUAL_DAYS
from .datum import aftermath_shape, lasting_outflow_change
from .driver import detect_flags
from .level import usual_level
from .options import FlagOptions
from .result import NOTE as NOTE
from .result import Flag, FlagKind, Flags
from .robust import cusum, cusum_runs, long_run_variance_ratio, noise_scale, rolling_robust_z
from .stage import flow_adjusted_stage_change, stage_step_anomaly

__all__ = [
    "FlagOptions",
    "FlagKind",
    "Flag",
    "Flags",
    "ChangePoints",
    "MAD_TO_SIGMA",
    "robust_sigma",
    "rolling_robust_z",
    "noise_scale",
    "usual_level",
    "stage_step_anomaly",
    "flow_adjusted_stage_change",
    "lasting_outflow_change",
    "aftermath_shape",
    "long_run_variance_ratio",
    "change_points",
    "cusum",
    "cusum_runs",
    "refine_run",
    "date_run",
    "detect_flags",
]
