"""Change points and run dating: penalised least-squares segmentation of a series' mean (PELT or
binary segmentation through ``ruptures``) and the ends of a run by CUSUM or likelihood ratio."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from ..stats import robust_sigma
from .robust import cusum, long_run_variance_ratio

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd


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
    Hinkley, 1970), maximised jointly over both ends, each within ``reach`` days of the
    segmentation's.

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
    ends = np.arange(max(first, last - reach), min(n - 1, last + reach) + 1)
    if not (starts.size and ends.size):
        return first, last
    # both ends at once over the (2 reach + 1)² grid (a few hundred sums from the cumulative
    # sums): moving one end alone can lock the other to a noisy day
    gs, ge = np.meshgrid(starts, ends, indexing="ij")
    g = np.where(ge >= gs, gain(gs.ravel(), ge.ravel()).reshape(gs.shape), -np.inf)
    i, j = np.unravel_index(int(np.argmax(g)), g.shape)
    return int(starts[i]), int(ends[j])
