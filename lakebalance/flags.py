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
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

import numpy as np

from .options import Options, setting
from .records import Correction
from .stats import MAD_TO_SIGMA, newey_west_lags, robust_sigma
from .stats import Z95 as _Z95
from .units import MM_PER_M

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

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

FlagKind = Literal["spike", "datum_shift", "level_shift", "run", "drift"]


@dataclass(frozen=True)
class FlagOptions(Options):
    """``[flags]``: detection of unexplained residuals."""

    outlier_threshold: float = setting(5.0, unit="-", low=0.0, low_open=True)  # robust z
    outlier_window: int = setting(31, unit="days", low=3)  # centred rolling median/MAD window
    spike_days: int = setting(3, unit="days", low=1)  # a stage step undone within = a spike
    penalty: float | None = setting(None, unit="(m3/d)^2", low=0.0, low_open=True)  # default BIC
    change_method: Literal["pelt", "binseg"] = "pelt"  # change-point search
    min_run_days: int = setting(14, unit="days", low=2)  # shortest run or level-shift segment
    run_threshold: float = setting(4.0, unit="-", low=0.0, low_open=True)  # z of a run's volume
    min_run_effect: float = setting(0.5, unit="sigma", low=0.0)  # smallest mean departure
    cusum_slack: float = setting(0.5, unit="sigma", low=0.0)  # CUSUM reference value k
    cusum_threshold: float = setting(10.0, unit="sigma", low=0.0, low_open=True)  # CUSUM h
    drift_min_days: int = setting(180, unit="days", low=10)  # shortest segment tested for drift
    drift_alpha: float = setting(
        0.001, unit="-", low=0.0, high=1.0, low_open=True, high_open=True
    )  # significance level of the drift test
    shift_stage_z: float = setting(2.0, unit="-", low=0.0)  # robust z of a mirrored stage step


# --------------------------------------------------------------------------------------------
# Pure detectors
# --------------------------------------------------------------------------------------------
def rolling_robust_z(
    values: np.ndarray | pd.Series, window: int = 31, *, floor: float | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Robust z-score of each value against its centred rolling median and MAD (Hampel identifier).

    Parameters
    ----------
    values : ndarray or Series
        A regular series (one value per day), any unit; NaN allowed.
    window : int
        Odd number of values in the centred window (-); an even number is made odd.
    floor : float, optional
        Smallest scale used, in the unit of ``values`` (default: half the robust standard
        deviation of the deviations from the rolling median), so that a quiet spell does not
        turn ordinary noise into outliers.

    Returns
    -------
    z, median, scale : ndarray
        ``z = (x − median) / scale`` (-), the rolling median and the rolling scale
        ``max(1.4826 · MAD, floor)`` in the unit of ``values``.

    Notes
    -----
    z_t = (x_t − med_{W(t)}) / (1.4826 · med_{W(t)} |x_s − med_{W(t)}|), W(t) the ``window`` values
    centred on t (shrunk at the ends). The windows are built at once with a strided view, so no
    loop runs over the values.

    References
    ----------
    Hampel, F. R. (1974), JASA 69, 383–393. Pearson, R. K. (2002). Outliers in process modeling and
    identification. IEEE Trans. Control Systems Technology 10(1), 55–63.
    """
    x = np.asarray(values, dtype=float)
    window = max(3, int(window) | 1)
    half = window // 2
    padded = np.concatenate([np.full(half, np.nan), x, np.full(half, np.nan)])
    windows = np.lib.stride_tricks.sliding_window_view(padded, window)
    with np.errstate(all="ignore"), _quiet_nan_warnings():
        med = np.nanmedian(windows, axis=1)
        mad = np.nanmedian(np.abs(windows - med[:, None]), axis=1)
    scale = MAD_TO_SIGMA * mad
    if floor is None:
        floor = 0.5 * robust_sigma(x - med)
    if not np.isfinite(floor) or floor <= 0:
        floor = np.finfo(float).tiny
    scale = np.where(np.isfinite(scale), np.maximum(scale, floor), np.nan)
    with np.errstate(all="ignore"):
        z = (x - med) / scale
    return z, med, scale


def long_run_variance_ratio(values: np.ndarray, lags: int | None = None) -> float:
    """Ratio of the long-run variance to the variance of a series (Bartlett kernel), at least 1.

    Parameters
    ----------
    values : ndarray
        Deviations from a fitted level (any unit); NaN are dropped.
    lags : int, optional
        Bartlett truncation lag (default ``floor(4 (n/100)^(2/9))``, Newey & West, 1994).

    Returns
    -------
    float
        ``1 + 2 Σ_{j=1..L} (1 − j/(L+1)) ρ_j`` (-), floored at 1.

    Notes
    -----
    The variance of a mean of n autocorrelated values is about ratio · σ² / n; scaling a
    change-point penalty and a CUSUM by it keeps autocorrelated noise from passing for shifts.

    References
    ----------
    Newey, W. K. & West, K. D. (1987). Econometrica 55(3), 703–708, eq. (2). Newey, W. K. &
    West, K. D. (1994). Rev. Econ. Stud. 61(4), 631–653.
    """
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    n = x.size
    if n < 4:
        return 1.0
    x = x - x.mean()
    var = float(np.dot(x, x) / n)
    if var <= 0:
        return 1.0
    if lags is None:
        lags = newey_west_lags(n)
    lags = max(0, min(lags, n - 2))
    total = 0.0
    for j in range(1, lags + 1):  # loop over lags, not over values
        rho = float(np.dot(x[j:], x[:-j]) / n) / var
        total += (1.0 - j / (lags + 1.0)) * rho
    return max(1.0, 1.0 + 2.0 * total)


def noise_scale(
    deviation_m3: np.ndarray,
    throughput_m3: np.ndarray | None = None,
    *,
    bins: int = 10,
    window: int = 93,
) -> np.ndarray:
    """Day-to-day noise scale (1-σ) of the residual, growing with the flow through the lake.

    Parameters
    ----------
    deviation_m3 : ndarray
        Residual minus its rolling median (m³/d); NaN allowed.
    throughput_m3 : ndarray, optional
        Sum of the absolute gauged terms of each day (m³/d): inflows, rain, evaporation, outflow,
        withdrawals, releases (not the storage change, which a bad stage reading inflates).
    bins : int
        Quantile classes of throughput.
    window : int
        Rolling window (days) used when no throughput is given.

    Returns
    -------
    ndarray
        Scale (m³/d) of each day, at least a tenth of the record's robust scale.

    Notes
    -----
    The errors of the gauged terms are roughly proportional to the terms, so the residual is
    heteroscedastic: large on flood days, small in dry spells. The scale of a throughput class is
    1.4826 · median |deviation| of its days (Hampel, 1974); the classes are made non-decreasing in
    throughput and interpolated linearly between class medians (clamped at the ends). Without a
    throughput it is the centred rolling MAD scale over ``window`` days. Common practice, no
    source, for the binning.
    """
    d = np.asarray(deviation_m3, dtype=float)
    overall = robust_sigma(d)
    if not np.isfinite(overall) or overall <= 0:
        overall = float(np.nanstd(d)) if np.isfinite(d).any() else 1.0
        overall = overall if overall > 0 else 1.0
    out = None
    if throughput_m3 is not None:
        g = np.asarray(throughput_m3, dtype=float)
        ok = np.isfinite(d) & np.isfinite(g)
        if ok.sum() >= 20 * bins:
            edges = np.unique(np.quantile(g[ok], np.linspace(0.0, 1.0, bins + 1)))
            cls = np.clip(np.searchsorted(edges, g[ok], side="right") - 1, 0, len(edges) - 2)
            centres, scales = [], []
            for c in range(len(edges) - 1):  # loop over classes
                members = cls == c
                if members.sum() >= 10:
                    centres.append(float(np.median(g[ok][members])))
                    scales.append(MAD_TO_SIGMA * float(np.median(np.abs(d[ok][members]))))
            if len(centres) >= 2:
                scales_arr = np.maximum.accumulate(np.asarray(scales))
                out = np.interp(g, centres, scales_arr)
                out = np.where(np.isfinite(out), out, overall)
    if out is None:
        _, _, out = rolling_robust_z(d, window)
        out = np.where(np.isfinite(out), out, overall)
    return np.maximum(out, 0.1 * overall)


def usual_level(
    residual_m3: np.ndarray,
    stage_m: np.ndarray | None,
    scale_m3: np.ndarray,
    *,
    shifts: tuple[int, ...] = (),
) -> tuple[np.ndarray, str]:
    """The residual's usual level on each day: a robust straight line in stage (m³/d).

    Parameters
    ----------
    residual_m3 : ndarray
        Daily residual (m³/d) with flagged days set to NaN.
    stage_m : ndarray or None
        Daily stage (m); None gives a constant level.
    scale_m3 : ndarray
        Noise scale of each day (m³/d), used as weights.
    shifts : tuple of int
        Positions of gauge datum shifts found on the stage record; the level may step there.

    Returns
    -------
    level : ndarray
        Usual level (m³/d) of each day (NaN where the stage is missing).
    note : str
        The fitted line in words.

    Notes
    -----
    A lake that exchanges water with the ground shows a residual of about −k (h − h0) (see
    :mod:`lakebalance.seepage`), so the usual level is fitted as a + b (h − h̄) + Σ_j c_j 1[t ≥ t_j]
    by Huber's robust regression (Huber, 1981; statsmodels ``RLM``) of residual / scale on
    1 / scale, (h − h̄) / scale and the step indicators / scale. Departures from it, not from a
    constant, are what the run and shift detectors look for, so that slow stage-driven changes
    are not flagged. A step c_j at a datum shift t_j is the shift's aftermath: the outflow and
    area are computed from the shifted stage, so the residual changes level from that day on
    and stays there (common practice, no source); fitting it keeps the aftermath from passing
    for a level shift or from tilting the usual level of the rest of the record.
    """
    level, note, _ = _usual_level_fit(residual_m3, stage_m, scale_m3, shifts)
    return level, note


def _usual_level_fit(
    residual_m3: np.ndarray,
    stage_m: np.ndarray | None,
    scale_m3: np.ndarray,
    shifts: tuple[int, ...] = (),
    shapes: dict[int, np.ndarray] | None = None,
) -> tuple[np.ndarray, str, dict[int, float]]:
    """:func:`usual_level` and the fitted step (m³/d) at each datum shift position.

    ``shapes`` gives, for a shift position, the regressor of its aftermath (m³/d, zero before
    it) used in place of the plain indicator; its fitted step is reported as the coefficient
    times the regressor's mean after the shift.
    """
    r = np.asarray(residual_m3, dtype=float)
    s = np.asarray(scale_m3, dtype=float)
    ok = np.isfinite(r) & np.isfinite(s) & (s > 0)
    h = None
    if stage_m is not None:
        h = np.asarray(stage_m, dtype=float)
        ok &= np.isfinite(h)
    if ok.sum() < 30:
        med = float(np.nanmedian(r)) if np.isfinite(r).any() else 0.0
        return np.full(r.shape, med), f"constant {med:,.0f} m³/d", {}
    import statsmodels.api as sm

    t = np.arange(r.size)
    # a step is fitted only with enough days on both sides of it
    steps = [
        int(j)
        for j in sorted(set(shifts))
        if (ok & (t < j)).sum() >= 30 and (ok & (t >= j)).sum() >= 30
    ]
    shapes = shapes or {}
    indicators = [
        np.asarray(shapes[j], dtype=float) if j in shapes else (t >= j).astype(float) for j in steps
    ]
    columns = [np.ones(r.size)]
    slope = h is not None and np.ptp(h[ok]) > 0
    h_mean = float(np.mean(h[ok])) if slope else 0.0
    if slope:
        columns.append(h - h_mean)
    columns += indicators
    design = np.column_stack(columns)
    fit = sm.RLM(r[ok] / s[ok], design[ok] / s[ok][:, None], M=sm.robust.norms.HuberT()).fit()
    params = np.asarray(fit.params, dtype=float)
    with np.errstate(invalid="ignore"):
        level = design @ params
    if not slope:
        level = np.where(np.isfinite(level), level, params[0])
    fitted_steps = {
        j: float(c) * (float(np.nanmean(x[t >= j])) if j in shapes else 1.0)
        for j, c, x in zip(steps, params[len(params) - len(steps) :], indicators)
    }
    note = f"{params[0]:,.0f}"
    if slope:
        note += f" {params[1]:+,.0f} (h − {h_mean:.2f} m)"
    if steps:
        note += "".join(f" {c:+,.0f} after a datum shift" for c in fitted_steps.values())
    return level, note + " m³/d", fitted_steps


def stage_step_anomaly(stage_m: np.ndarray, neighbours: int = 3) -> np.ndarray:
    """Daily stage change minus the median change of the neighbouring days (m).

    Parameters
    ----------
    stage_m : ndarray
        Daily stage (m).
    neighbours : int
        Days on each side whose changes make the expected change.

    Returns
    -------
    ndarray
        ``Δh_t − median(Δh_{t−k..t−1}, Δh_{t+1..t+k})`` (m); NaN where Δh_t is unknown.

    Notes
    -----
    The local median follows a rise or a recession, so a step of the gauge zero shows as a
    one-day anomaly of its own size, and a one-day bad reading as a pair of opposite anomalies.
    Common practice, no source.
    """
    h = np.asarray(stage_m, dtype=float)
    dh = np.diff(h, prepend=np.nan)
    k = max(1, int(neighbours))
    padded = np.concatenate([np.full(k, np.nan), dh, np.full(k, np.nan)])
    windows = np.lib.stride_tricks.sliding_window_view(padded, 2 * k + 1).copy()
    windows[:, k] = np.nan
    with _quiet_nan_warnings():
        expected = np.nanmedian(windows, axis=1)
    return dh - expected


def flow_adjusted_stage_change(
    stage_m: np.ndarray, net_flow_m3: np.ndarray, area_m2: np.ndarray
) -> np.ndarray:
    """Daily stage change minus the change the gauged flows explain (m).

    Parameters
    ----------
    stage_m : ndarray
        Daily mean stage (m).
    net_flow_m3 : ndarray
        Net gauged volume into the lake of each day (m³/d): inflows + rain − evaporation −
        outflow − withdrawals − releases; NaN where a term is unknown.
    area_m2 : ndarray
        Lake area of each day (m²).

    Returns
    -------
    ndarray
        ``Δh_t − (N_{t−1} + N_t) / (2 A_t)`` (m); the plain ``Δh_t`` where the flows are unknown.

    Notes
    -----
    A daily mean stage sits at mid-day, so the change from day t−1 to day t holds the second
    half of day t−1's net flow and the first half of day t's (the same mid-day convention as the
    balance's start and end stages). A storm that the gauges see then leaves no step in the
    adjusted change, while a bad reading or a move of the gauge zero does. Common practice, no
    source.
    """
    h = np.asarray(stage_m, dtype=float)
    net = np.asarray(net_flow_m3, dtype=float)
    a = np.asarray(area_m2, dtype=float)
    dh = np.diff(h, prepend=np.nan)
    prev = np.concatenate([[np.nan], net[:-1]])
    with np.errstate(all="ignore"):
        explained = 0.5 * (prev + net) / a
    return np.where(np.isfinite(explained) & (a > 0), dh - explained, dh)


def _net_flow(daily: pd.DataFrame) -> np.ndarray | None:
    """Net gauged volume into the lake of each day (m³/d) from the terms known that day.

    A term missing on a day counts as zero that day (a storm seen by the inflow gauge is still
    taken out when the outflow of the last day is unknown); NaN when no term is known.
    """
    signs = {
        "inflow_m3": 1.0,
        "rain_m3": 1.0,
        "evaporation_m3": -1.0,
        "outflow_m3": -1.0,
        "withdrawal_m3": -1.0,
        "release_m3": -1.0,
    }
    names = [c for c in signs if c in daily.columns]
    if not names:
        return None
    terms = daily[names].to_numpy(dtype=float) * np.array([signs[c] for c in names])
    known = np.isfinite(terms).any(axis=1)
    return np.where(known, np.nansum(terms, axis=1), np.nan)


def _stage_steps_near(a: int, z_h: np.ndarray, step: np.ndarray, options: FlagOptions) -> list[int]:
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


def _throughput(daily: pd.DataFrame) -> np.ndarray | None:
    names = [
        c
        for c in daily.columns
        if c in ("inflow_m3", "rain_m3", "evaporation_m3", "outflow_m3", "withdrawal_m3")
        or c == "release_m3"
    ]
    if not names:
        return None
    values = np.abs(daily[names].to_numpy(dtype=float))
    # the terms known on a day (an unknown outflow on the last day must not hide its storm)
    g = np.where(np.isfinite(values).any(axis=1), np.nansum(values, axis=1), np.nan)
    # a day of rising or falling flows carries the timing errors of the day boundaries too
    change = np.abs(np.diff(g, prepend=np.nan))
    change_next = np.abs(np.diff(g, append=np.nan))
    return g + np.nan_to_num(change) + np.nan_to_num(change_next)


@dataclass(frozen=True)
class ChangePoints:
    """Result of :func:`change_points`.

    ``starts`` are the positions (in the input, NaN included) where a new segment begins;
    ``segments`` the ``(first, last)`` positions of every segment (inclusive), ``means`` their
    means, ``penalty`` the penalty used (unit of the values squared), ``sigma`` the noise scale
    (unit of the values) and ``ratio`` the long-run variance ratio applied (-).
    """

    starts: tuple[int, ...]
    segments: tuple[tuple[int, int], ...]
    means: tuple[float, ...]
    penalty: float
    sigma: float
    ratio: float
    method: str


def change_points(
    values: np.ndarray | pd.Series,
    *,
    penalty: float | None = None,
    min_size: int = 2,
    method: Literal["pelt", "binseg"] = "pelt",
    autocorrelation: bool = True,
) -> ChangePoints:
    """Level shifts in a series: penalised least-squares segmentation of its mean.

    Parameters
    ----------
    values : ndarray or Series
        The series (any unit); NaN values are skipped and positions refer to the input.
    penalty : float, optional
        Cost added per change point, in the unit of ``values`` squared. Default: BIC-like,
        ``2 σ̂² ln n`` with σ̂ the robust standard deviation of first differences divided by √2,
        multiplied by the long-run variance ratio of the segmented series when
        ``autocorrelation`` is true.
    min_size : int
        Shortest segment (values).
    method : {"pelt", "binseg"}
        Exact search by pruned exact linear time (PELT) or approximate binary segmentation.
    autocorrelation : bool
        Re-run with the penalty scaled by the long-run variance ratio of the deviations from the
        first segmentation (only with the default penalty).

    Returns
    -------
    ChangePoints

    Notes
    -----
    Minimises Σ_segments Σ_t (x_t − x̄_seg)² + β·(number of change points). A change point adds
    two parameters (a location and a mean); with Gaussian noise of variance σ² the BIC
    (Schwarz, 1978) gives β = 2 σ² ln n. The first-difference estimate of σ (σ̂ = MAD(Δx)/√2) is
    not inflated by the shifts themselves.

    References
    ----------
    Killick, R., Fearnhead, P. & Eckley, I. A. (2012). Optimal detection of changepoints with a
    linear computational cost. JASA 107, 1590–1598. Scott, A. J. & Knott, M. (1974). Biometrics
    30, 507–512. Truong, C., Oudre, L. & Vayatis, N. (2020). Selective review of offline change
    point detection methods. Signal Processing 167, 107299 (the ``ruptures`` library).
    """
    import ruptures as rpt

    x = np.asarray(values, dtype=float)
    positions = np.flatnonzero(np.isfinite(x))
    y = x[positions]
    n = y.size
    min_size = max(1, int(min_size))
    if n < 2 * min_size:
        mean = float(np.mean(y)) if n else float("nan")
        seg = ((int(positions[0]), int(positions[-1])),) if n else ()
        return ChangePoints((), seg, (mean,) if n else (), float("nan"), float("nan"), 1.0, method)
    sigma = robust_sigma(np.diff(y)) / math.sqrt(2.0)
    if not np.isfinite(sigma) or sigma <= 0:
        sigma = float(np.std(y)) or 1.0

    def run(pen: float) -> list[int]:
        if method == "pelt":
            algo = rpt.KernelCPD(kernel="linear", min_size=min_size).fit(y)
        else:
            algo = rpt.Binseg(model="l2", min_size=min_size, jump=1).fit(y)
        return [int(b) for b in algo.predict(pen=pen)]

    ratio = 1.0
    if penalty is None:
        pen = 2.0 * sigma**2 * math.log(n)
        breaks = run(pen)
        if autocorrelation:
            ratio = long_run_variance_ratio(_deviations(y, breaks))
            if ratio > 1.0:
                pen *= ratio
                breaks = run(pen)
    else:
        pen = float(penalty)
        breaks = run(pen)
    bounds = [0, *breaks]
    segments = tuple(
        (int(positions[a]), int(positions[b - 1])) for a, b in zip(bounds[:-1], bounds[1:])
    )
    means = tuple(float(np.mean(y[a:b])) for a, b in zip(bounds[:-1], bounds[1:]))
    starts = tuple(int(positions[b]) for b in breaks[:-1])
    return ChangePoints(starts, segments, means, float(pen), float(sigma), float(ratio), method)


def _deviations(y: np.ndarray, breaks: list[int]) -> np.ndarray:
    out = np.empty_like(y)
    a = 0
    for b in breaks:  # loop over segments
        out[a:b] = y[a:b] - y[a:b].mean()
        a = b
    return out


def cusum(z: np.ndarray, slack: float = 0.5) -> tuple[np.ndarray, np.ndarray]:
    """Two-sided tabular CUSUM of a standardised series.

    Parameters
    ----------
    z : ndarray
        Standardised values (-), in-control mean 0 and standard deviation 1; NaN adds nothing.
    slack : float
        Reference value k (-), half the shift (in standard deviations) to be detected quickly.

    Returns
    -------
    upper, lower : ndarray
        S⁺_t and S⁻_t (-), both ≥ 0.

    Notes
    -----
    S⁺_t = max(0, S⁺_{t−1} + z_t − k), S⁻_t = max(0, S⁻_{t−1} − z_t − k), S_0 = 0. The recursion
    is computed without a loop from its closed form S_t = C_t − min(0, min_{s≤t} C_s), with
    C_t the cumulative sum of the increments (Lindley's recursion).

    References
    ----------
    Page, E. S. (1954). Continuous inspection schemes. Biometrika 41, 100–115. Montgomery, D. C.
    (2009). Introduction to Statistical Quality Control, 6th ed., §9.1, eqs. (9.2)–(9.3).
    """
    z = np.asarray(z, dtype=float)

    def one_sided(inc: np.ndarray) -> np.ndarray:
        c = np.cumsum(inc)
        return c - np.minimum(np.minimum.accumulate(c), 0.0)

    up = np.where(np.isfinite(z), z - slack, 0.0)
    down = np.where(np.isfinite(z), -z - slack, 0.0)
    return one_sided(up), one_sided(down)


def cusum_runs(
    z: np.ndarray, *, slack: float = 0.5, threshold: float = 8.0
) -> list[tuple[int, int, int]]:
    """Sustained departures found by the tabular CUSUM: ``(first, last, sign)`` positions.

    Parameters
    ----------
    z : ndarray
        Standardised values (-).
    slack : float
        Reference value k (-).
    threshold : float
        Decision interval h (-): a run is signalled when S⁺ or S⁻ exceeds it.

    Returns
    -------
    list of (int, int, int)
        For each signalled excursion: the first position after the sum last left zero (the
        estimated start), the position of its peak (the estimated end) and +1 for an upward run,
        −1 for a downward one.

    Notes
    -----
    The start is the usual CUSUM change-time estimate (the last time the sum was zero before the
    signal; Montgomery, 2009, §9.1.2); the end is taken where the sum peaks, after which the
    departure no longer accumulates.
    """
    runs: list[tuple[int, int, int]] = []
    upper, lower = cusum(z, slack)
    for s, sign in ((upper, 1), (lower, -1)):
        positive = s > 0
        if not positive.any():
            continue
        edges = np.diff(np.concatenate([[0], positive.astype(np.int8), [0]]))
        starts = np.flatnonzero(edges == 1)
        stops = np.flatnonzero(edges == -1)  # exclusive
        for a, b in zip(starts, stops):  # loop over excursions, not over values
            peak = a + int(np.argmax(s[a:b]))
            if s[peak] > threshold:
                runs.append((int(a), int(peak), sign))
    return sorted(runs)


def refine_run(
    departure: np.ndarray, first: int, last: int, *, slack: float = 0.5, reach: int = 14
) -> tuple[int, int]:
    """Refine the ends of a run found by the segmentation with one-sided CUSUMs.

    Parameters
    ----------
    departure : ndarray
        Standardised departure from the usual level (-); NaN adds nothing.
    first, last : int
        Positions of the run's first and last day from the segmentation.
    slack : float
        CUSUM reference value k (-).
    reach : int
        Days searched before ``first`` and after ``last``.

    Returns
    -------
    (int, int)
        Refined first and last positions.

    Notes
    -----
    In the run's direction s = sign(Σ departure), the start is the day after the last zero of
    the CUSUM S_t = max(0, S_{t−1} + s·x_t − k) run forward from ``first − reach`` to its peak
    (the CUSUM change-time estimate, Page, 1954; Montgomery, 2009, §9.1.2); the end is found the
    same way on the reversed series from ``last + reach``.
    """
    x = np.asarray(departure, dtype=float)
    n = x.size
    sign = 1.0 if np.nansum(x[first : last + 1]) >= 0 else -1.0

    def start_of(seq: np.ndarray) -> int:
        up, _ = cusum(sign * seq, slack)
        peak = int(np.argmax(up))
        zeros = np.flatnonzero(up[: peak + 1] == 0)
        return int(zeros[-1]) + 1 if zeros.size else 0

    lo = max(0, first - reach)
    new_first = lo + start_of(x[lo : last + 1])
    hi = min(n, last + reach + 1)
    new_last = hi - 1 - start_of(x[new_first:hi][::-1])
    if new_last - new_first < 1:
        return first, last
    return new_first, new_last


def date_run(
    departure_m3: np.ndarray, scale_m3: np.ndarray, first: int, last: int, *, reach: int = 14
) -> tuple[int, int]:
    """Maximum-likelihood ends of a run of constant mean departure from the usual level.

    Parameters
    ----------
    departure_m3 : ndarray
        Residual minus its usual level (m³/d); NaN adds nothing.
    scale_m3 : ndarray
        Noise scale (1-σ) of each day (m³/d).
    first, last : int
        Positions of the run's first and last day from the segmentation.
    reach : int
        Days by which either end may move (-).

    Returns
    -------
    (int, int)
        The first and last positions that maximise the likelihood ratio.

    Notes
    -----
    With independent normal errors of known σ_t and a usual level of 0 outside the run, a run
    of unknown mean μ on [s, e] raises the log-likelihood by (Σ w_t d_t)² / (2 Σ w_t),
    w_t = 1/σ_t², at μ̂ = Σ w_t d_t / Σ w_t (the generalised likelihood ratio of a mean shift;
    Hinkley, 1970). The start is chosen with the end fixed, then the end with the new start,
    each within ``reach`` days of the segmentation's.

    References
    ----------
    Hinkley, D. V. (1970). Inference about the change-point in a sequence of random variables.
    Biometrika 57(1), 1–17.
    """
    d = np.asarray(departure_m3, dtype=float)
    s = np.asarray(scale_m3, dtype=float)
    ok = np.isfinite(d) & np.isfinite(s) & (s > 0)
    w = np.where(ok, 1.0 / np.where(ok, s, 1.0) ** 2, 0.0)
    wd = np.where(ok, w * np.where(ok, d, 0.0), 0.0)
    n = d.size
    cw = np.concatenate([[0.0], np.cumsum(w)])
    cwd = np.concatenate([[0.0], np.cumsum(wd)])

    def gain(starts: np.ndarray, ends: np.ndarray) -> np.ndarray:
        sw = cw[ends + 1] - cw[starts]
        swd = cwd[ends + 1] - cwd[starts]
        with np.errstate(all="ignore"):
            return np.where(sw > 0, swd**2 / sw, -np.inf)

    starts = np.arange(max(0, first - reach), min(last, first + reach) + 1)
    if starts.size:
        first = int(starts[np.argmax(gain(starts, np.full(starts.size, last)))])
    ends = np.arange(max(first, last - reach), min(n - 1, last + reach) + 1)
    if ends.size:
        last = int(ends[np.argmax(gain(np.full(ends.size, first), ends))])
    return first, last


# --------------------------------------------------------------------------------------------
# Result objects
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Flag:
    """One dated, sized and explained flag.

    Attributes
    ----------
    kind : {"spike", "datum_shift", "level_shift", "run", "drift"}
        What the detectors saw.
    start, end : str
        ISO dates of the first and last flagged day.
    series : str
        ``"residual"`` or ``"stage"`` (the record the evidence comes from).
    volume_m3 : float
        Signed unexplained volume over the flag (m³; positive = gain): the sum of the residual's
        departure from its usual level. For a stage spike or datum shift, the storage jump the
        stage step implies on its first day.
    depth_mm : float
        ``volume_m3`` over the mean lake area of the flagged days (mm).
    rate_m3_per_day : float
        Mean departure per flagged day (m³/d).
    significance : float
        |volume| / its 1-σ uncertainty (-), from the balance's uncertainty band when one was
        given, else from the noise of the residual itself (see :attr:`Flags.band_source`).
    significant : bool
        ``significance`` above the two-sided 95 % normal quantile (1.96).
    cause : str
        Likely cause in a few words ("gauge datum shift", "unmetered withdrawal", ...).
    hint : str
        One plain sentence on the likely cause and what to check.
    evidence : tuple of str
        The facts behind the hint.
    magnitude_m : float or None
        Stage step (m) of a datum shift or stage spike.
    correction : Correction or None
        The ``[[correction]]`` a user may accept (datum shifts); never applied here.
    accepted : bool
        A matching correction is already in the site file.
    """

    kind: FlagKind
    start: str
    end: str
    series: str
    volume_m3: float
    depth_mm: float
    rate_m3_per_day: float
    significance: float
    significant: bool
    cause: str
    hint: str
    evidence: tuple[str, ...] = ()
    magnitude_m: float | None = None
    correction: Correction | None = None
    accepted: bool = False

    @property
    def days(self) -> int:
        """Number of calendar days from ``start`` to ``end`` inclusive."""
        import pandas as pd

        return int((pd.Timestamp(self.end) - pd.Timestamp(self.start)).days) + 1

    def correction_toml(self) -> str:
        """The ``[[correction]]`` table a user would paste into the site file ('' when none)."""
        c = self.correction
        if c is None:
            return ""
        lines = [
            "[[correction]]",
            f'series = "{c.series}"',
            f'kind = "{c.kind}"',
            f'start = "{c.start}"',
        ]
        if c.end:
            lines.append(f'end = "{c.end}"')
        lines += [f"value = {c.value:.4f}", f'reason = "{c.reason}"']
        return "\n".join(lines)


@dataclass(frozen=True, eq=False)
class Flags:
    """All flags of one record, with the settings and scales behind them.

    ``items`` are ordered by start date. ``baseline_m3`` is the usual level of the residual
    (m³/d, the length-weighted median of segment means), ``noise_m3`` the robust day-to-day scale
    (m³/d), ``ratio`` the long-run variance ratio (-), ``change_points`` the ISO dates where a
    level-shift segment begins, ``corrections`` the ``[[correction]]`` tables of the site file in
    force (already applied to the records), ``band_source`` says what the significance is
    measured against.
    """

    items: tuple[Flag, ...]
    residual_m3: pd.Series = field(repr=False)
    baseline_m3: float = float("nan")
    noise_m3: float = float("nan")
    ratio: float = 1.0
    penalty: float = float("nan")
    change_points: tuple[str, ...] = ()
    corrections: tuple[Correction, ...] = ()
    band_source: str = "residual noise"
    usual_level: str = ""
    options: FlagOptions = field(default_factory=FlagOptions)

    def __len__(self) -> int:
        return len(self.items)

    def __iter__(self):
        return iter(self.items)

    def of_kind(self, kind: str) -> tuple[Flag, ...]:
        """The flags of one kind."""
        return tuple(f for f in self.items if f.kind == kind)

    def mask(self, index: pd.DatetimeIndex | None = None) -> pd.Series:
        """True on every day covered by a flag (index defaults to the residual's)."""
        import pandas as pd

        idx = self.residual_m3.index if index is None else index
        out = np.zeros(len(idx), dtype=bool)
        values = idx.values
        for f in self.items:  # loop over flags
            out |= (values >= np.datetime64(f.start)) & (values <= np.datetime64(f.end))
        return pd.Series(out, index=idx, name="flagged")

    def to_frame(self) -> pd.DataFrame:
        """One row per flag (columns as :class:`Flag`; evidence joined with '; ')."""
        import pandas as pd

        rows = []
        for f in self.items:
            rows.append(
                {
                    "kind": f.kind,
                    "start": f.start,
                    "end": f.end,
                    "days": f.days,
                    "series": f.series,
                    "volume_m3": f.volume_m3,
                    "depth_mm": f.depth_mm,
                    "rate_m3_per_day": f.rate_m3_per_day,
                    "significance": f.significance,
                    "significant": f.significant,
                    "cause": f.cause,
                    "hint": f.hint,
                    "evidence": "; ".join(f.evidence),
                    "magnitude_m": f.magnitude_m,
                    "accepted": f.accepted,
                }
            )
        cols = [
            "kind",
            "start",
            "end",
            "days",
            "series",
            "volume_m3",
            "depth_mm",
            "rate_m3_per_day",
            "significance",
            "significant",
            "cause",
            "hint",
            "evidence",
            "magnitude_m",
            "accepted",
        ]
        return pd.DataFrame(rows, columns=cols)

    def to_dict(self) -> dict:
        """A JSON-ready summary (used by ``lakebalance flags --json``)."""
        idx = self.residual_m3.index
        return {
            "period": [
                None if len(idx) == 0 else idx[0].date().isoformat(),
                None if len(idx) == 0 else idx[-1].date().isoformat(),
            ],
            "baseline_m3_per_day": self.baseline_m3,
            "usual_level": self.usual_level,
            "noise_m3_per_day": self.noise_m3,
            "long_run_variance_ratio": self.ratio,
            "change_point_penalty": self.penalty,
            "change_points": list(self.change_points),
            "significance_against": self.band_source,
            "corrections_in_force": [
                {
                    "series": c.series,
                    "kind": c.kind,
                    "start": c.start,
                    "end": c.end,
                    "value": c.value,
                    "reason": c.reason,
                }
                for c in self.corrections
            ],
            "flags": [
                {
                    **{
                        k: getattr(f, k)
                        for k in (
                            "kind",
                            "start",
                            "end",
                            "series",
                            "volume_m3",
                            "depth_mm",
                            "rate_m3_per_day",
                            "significance",
                            "significant",
                            "cause",
                            "hint",
                            "magnitude_m",
                            "accepted",
                        )
                    },
                    "days": f.days,
                    "evidence": list(f.evidence),
                    "correction": f.correction_toml() or None,
                }
                for f in self.items
            ],
            "note": NOTE,
        }

    def summary(self) -> str:
        """Plain text: one paragraph per flag, then the corrections in force."""
        idx = self.residual_m3.index
        out = []
        if len(idx):
            out.append(
                f"Residual flags, {idx[0].date()} to {idx[-1].date()}: {len(self.items)} flag(s); "
                f"usual residual {self.usual_level or f'{self.baseline_m3:,.0f} m³/d'}, typical noise "
                f"{self.noise_m3:,.0f} m³/d; significance against the {self.band_source}."
            )
        for i, f in enumerate(self.items, 1):
            sig = "significant" if f.significant else "not significant"
            out.append(
                f"\n{i}. {f.kind} {f.start}"
                + ("" if f.end == f.start else f" to {f.end}")
                + f" ({f.days} d): {f.volume_m3:+,.0f} m³ ({f.depth_mm:+.1f} mm over the lake), "
                f"{f.significance:.1f} σ, {sig}.\n   Likely cause: {f.cause}. {f.hint}"
            )
            for e in f.evidence:
                out.append(f"   - {e}")
            if f.accepted:
                out.append("   Correction accepted in the site file (applied to the records).")
            elif f.correction is not None:
                out.append("   To accept the correction, add to the site file:")
                out.extend("     " + ln for ln in f.correction_toml().splitlines())
        if self.corrections:
            out.append("\nCorrections in force (from the site file, applied to the records):")
            for c in self.corrections:
                span = c.start + (f" to {c.end}" if c.end else " onwards")
                out.append(f"  - {c.series}: {c.kind} {c.value:+.4f} from {span}. {c.reason}")
        out.append("\n" + NOTE)
        return "\n".join(out)

    def __str__(self) -> str:  # pragma: no cover - convenience
        return self.summary()


NOTE = (
    "Flags are statistical pointers for review, not findings of fault; they never alter the data. "
    "Where a flag bears on dam safety, public water supply or flood levels, confirm it on site and "
    "defer to local codes and a licensed professional."
)


# --------------------------------------------------------------------------------------------
# The combined detector
# --------------------------------------------------------------------------------------------
def _quiet_nan_warnings():
    import warnings

    class _Ctx:
        def __enter__(self):
            self._w = warnings.catch_warnings()
            self._w.__enter__()
            warnings.simplefilter("ignore", RuntimeWarning)

        def __exit__(self, *exc):
            return self._w.__exit__(*exc)

    return _Ctx()


def _groups(mask: np.ndarray, gap: int = 0) -> list[tuple[int, int]]:
    """Runs of True positions ``(first, last)``, merging runs separated by ≤ ``gap`` False."""
    pos = np.flatnonzero(mask)
    if pos.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(pos) > gap + 1)
    firsts = np.concatenate([[pos[0]], pos[breaks + 1]])
    lasts = np.concatenate([pos[breaks], [pos[-1]]])
    return [(int(a), int(b)) for a, b in zip(firsts, lasts)]


def _column(daily: pd.DataFrame, name: str) -> np.ndarray | None:
    if name in daily.columns:
        return daily[name].to_numpy(dtype=float)
    return None


#: Fewest days with a residual that the detectors work on (common practice, no source: a noise
#: scale and a rolling median need a handful of values).
MIN_RESIDUAL_DAYS = 10


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
    stage = _column(daily, "stage_m")
    area = _column(daily, "area_m2")
    inflow = _column(daily, "inflow_m3")
    rain = _column(daily, "rain_m3")
    outflow = _column(daily, "outflow_m3")
    evaporation = _column(daily, "evaporation_m3")
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
        with _quiet_nan_warnings():
            ar = np.nanmean(area[a : b + 1])
        if not np.isfinite(ar) or ar <= 0:
            ar = mean_area
        return float(volume / ar * MM_PER_M) if np.isfinite(ar) and ar > 0 else float("nan")

    # ---- noise scale of each day (for detection) -------------------------------------------
    _, med_r, _ = rolling_robust_z(r, options.outlier_window)
    dev0 = r - med_r
    scale_m3 = noise_scale(dev0, _throughput(daily), window=3 * options.outlier_window)
    z_w = dev0 / scale_m3
    noise = float(np.nanmedian(scale_m3))

    # ---- step 1: events --------------------------------------------------------------------
    out_r = np.abs(z_w) > options.outlier_threshold
    throughput = _throughput(daily)
    if stage is not None:
        net_flow = _net_flow(daily)
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
    events = _groups(event_mask, gap=max(0, options.spike_days - 1))

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
            flow_note = _flow_note(
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
                rain_big = _is_high(rain, a, b, options.outlier_window)
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
    baseline_t, baseline_note, shift_steps = _usual_level_fit(
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
        level_t, note, steps_t = _usual_level_fit(calm, stage, scale_m3, shifts_found, shapes)
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
        flags[k] = _replace(flags[k], evidence=(*flags[k].evidence, extra))
    ratio = cps.ratio
    with _quiet_nan_warnings():
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
        seg_sign = float(np.sign(mean - _mean(baseline_t, a, b)))
        in_chain = aftermath_sign is not None and seg_sign == aftermath_sign
        for cand in (
            _stage_steps_near(a, z_h, step, options) if z_h is not None and not in_chain else []
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
            and np.sign(mean - _mean(baseline_t, a, b)) == aftermath_sign
        ):
            after = [aftermath_of]
        if after and aftermath_sign is None:
            aftermath_sign = float(np.sign(mean - _mean(baseline_t, a, b)))
            aftermath_of = after[0]
        if after:
            k = next(
                i
                for i, f in enumerate(flags)
                if f.kind == "datum_shift" and f.start == iso(after[0])
            )
            f = flags[k]
            extra = (
                f"then the residual changed by {mean - _mean(baseline_t, a, b):+,.0f} m³/d from {iso(a)} to "
                f"{iso(b)} ({days_valid} d)"
                + (
                    ", as the outflow is computed from the shifted stage"
                    if outflow is not None
                    else ""
                )
            )
            flags[k] = _replace(f, evidence=(*f.evidence, extra))
            covered[a : b + 1] = True
            continue
        bounded = 0 < seg_i < len(cps.segments) - 1
        if bounded:
            a, b = date_run(dev, scale_m3, a, b, reach=options.min_run_days)
            volume = float(np.nansum(dev[a : b + 1]))
            days_valid = int(np.isfinite(dev[a : b + 1]).sum())
            with _quiet_nan_warnings():
                mean = float(np.nanmean(clean[a : b + 1]))
        flags.append(
            _segment_flag(
                "run" if bounded else "level_shift",
                a,
                b,
                volume,
                days_valid,
                _mean(baseline_t, a, b),
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
        with _quiet_nan_warnings():
            mean = float(np.nanmean(clean[a : b + 1]))
        flags.append(
            _segment_flag(
                "run",
                a,
                b,
                volume,
                days_valid,
                _mean(baseline_t, a, b),
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
        res = _trend_test(dev[a : b + 1])  # departure from the usual level (shift steps out)
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
                significance=float(abs(_norm_ppf(p_value / 2.0))),
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


def _mean(x: np.ndarray, a: int, b: int) -> float:
    with _quiet_nan_warnings():
        return float(np.nanmean(x[a : b + 1]))


def _replace(f: Flag, **changes) -> Flag:
    import dataclasses

    return dataclasses.replace(f, **changes)


def _weighted_median(values: np.ndarray, weights: np.ndarray) -> float:
    order = np.argsort(values)
    v, w = values[order], weights[order]
    c = np.cumsum(w)
    return float(v[np.searchsorted(c, 0.5 * c[-1])])


def _is_high(x: np.ndarray | None, a: int, b: int, window: int) -> bool:
    if x is None:
        return False
    z, _, _ = rolling_robust_z(x, window)
    seg = z[a : b + 1]
    return bool(np.isfinite(seg).any() and np.nanmax(seg) > 3.0)


def _flow_note(inflow, rain, i: int, window: int, iso, jump_m3: float = float("nan")) -> str:
    """Inflow and rain of day ``i`` against their usual values and the storage jump (m³)."""
    extra = 0.0
    parts = []
    for name, x in (("inflow", inflow), ("rain", rain)):
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


def _segment_flag(
    kind,
    a,
    b,
    volume,
    days_valid,
    baseline,
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
    detector="change-point search",
) -> Flag:
    """A run or level-shift flag with its likely cause and evidence."""
    rate = volume / days_valid
    evidence = [
        f"mean residual {mean:+,.0f} m³/d against a usual {baseline:+,.0f} m³/d over "
        f"{days_valid} d ({detector})"
    ]
    if z_h is not None:
        near = [i for i in (a - 1, a, a + 1, b, b + 1) if 0 <= i < len(step)]
        zmax = float(np.nanmax(np.abs(np.nan_to_num(z_h[near])))) if near else 0.0
        evidence.append(
            f"no stage step at its start or end (largest robust z of the daily change {zmax:.1f})"
            if zmax <= options.outlier_threshold
            else f"a stage step at its start or end (robust z {zmax:.1f})"
        )
    seg = clean[a : b + 1]
    cause = None
    for name, x in (("outflow", outflow), ("evaporation", evaporation)):
        if x is None:
            continue
        xs = x[a : b + 1]
        ok = np.isfinite(seg) & np.isfinite(xs)
        if ok.sum() < 10 or np.nanstd(xs[ok]) == 0 or np.nanmean(np.abs(xs[ok])) == 0:
            continue
        share = abs(rate) / float(np.nanmean(np.abs(xs[ok])))
        rho = float(np.corrcoef(seg[ok], xs[ok])[0, 1])
        if abs(rho) >= 0.5 and share <= 1.0:
            evidence.append(
                f"the residual follows the {name} (correlation {rho:+.2f}); the departure is "
                f"{100 * share:.0f} % of the mean {name}"
            )
            cause = cause or ("rating shift" if name == "outflow" else "evaporation bias")
    if cause == "rating shift":
        hint = (
            "The unexplained term scales with the outflow: the outlet control may have changed "
            "(weeds, debris, erosion, gate work). Check with new gaugings and refit the rating."
        )
    elif cause == "evaporation bias":
        hint = (
            "The unexplained term scales with the evaporation: the evaporation method or its "
            "coefficient (pan coefficient, weather station) may be biased over this period."
        )
    elif rate < 0:
        cause = "unmetered withdrawal"
        hint = (
            "A sustained unexplained loss with no stage jump: an unmetered withdrawal (pumping, "
            "irrigation offtake), a leak or a metered outflow not in the records."
            if kind == "run"
            else "The residual moved to a lower level and stayed: a new unmetered withdrawal, "
            "a changed outlet or gauge, or more seepage."
        )
    else:
        cause = "unmetered inflow"
        hint = (
            "A sustained unexplained gain with no stage jump: an ungauged inflow (stream, return "
            "flow, transfer) or a groundwater gain."
            if kind == "run"
            else "The residual moved to a higher level and stayed: an ungauged inflow, a changed "
            "gauge or a change in the groundwater exchange."
        )
    sig = abs(volume) / sigma_of(a, b, ratio)
    return Flag(
        kind=kind,
        start=iso(a),
        end=iso(b),
        series="residual",
        volume_m3=float(volume),
        depth_mm=depth_mm(volume, a, b),
        rate_m3_per_day=float(rate),
        significance=float(sig),
        significant=bool(sig > _Z95),
        cause=cause,
        hint=hint,
        evidence=tuple(evidence),
    )


def _trend_test(y: np.ndarray) -> tuple[float, float] | None:
    """Slope (unit per step) and two-sided Newey–West p-value of a linear trend."""
    ok = np.isfinite(y)
    if ok.sum() < 10:
        return None
    import statsmodels.api as sm

    t = np.arange(y.size, dtype=float)[ok]
    n = int(ok.sum())
    lags = newey_west_lags(n)
    fit = sm.OLS(y[ok], sm.add_constant(t)).fit(cov_type="HAC", cov_kwds={"maxlags": lags})
    return float(fit.params[1]), float(fit.pvalues[1])


def _norm_ppf(p: float) -> float:
    from scipy.special import ndtri as _ndtri  # standard normal quantile; lighter than scipy.stats

    return float(_ndtri(max(p, 1e-300)))
