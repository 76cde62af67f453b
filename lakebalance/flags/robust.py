"""Robust statistics of the detectors: the rolling robust z-score (Hampel identifier), the
long-run variance ratio, the heteroscedastic noise scale of the residual and the tabular CUSUM.

The scaled median absolute deviation (:func:`~lakebalance.stats.robust_sigma`, ``MAD_TO_SIGMA``,
shared with the QA of the raw series) and the Newey–West lag rule (shared with the seepage fit)
live in :mod:`lakebalance.stats`.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..stats import MAD_TO_SIGMA, newey_west_lags, robust_sigma

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd


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
    with np.errstate(all="ignore"), quiet_nan_warnings():
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


def quiet_nan_warnings():
    """A context in which numpy's RuntimeWarnings (mean of an all-NaN slice, ...) are silenced."""
    import warnings

    class _Ctx:
        def __enter__(self):
            self._w = warnings.catch_warnings()
            self._w.__enter__()
            warnings.simplefilter("ignore", RuntimeWarning)

        def __exit__(self, *exc):
            return self._w.__exit__(*exc)

    return _Ctx()


def span_mean(x: np.ndarray, a: int, b: int) -> float:
    """Mean of ``x[a..b]`` (inclusive) ignoring NaN (NaN when all are)."""
    with quiet_nan_warnings():
        return float(np.nanmean(x[a : b + 1]))
