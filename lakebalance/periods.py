"""Declared periods of a record: ice on the gauge or the outlet, an offset of the stage sensor.

A site file declares each period as one ``[[period]]`` table (see ``docs/site-file.md``)::

    [[period]]
    kind = "ice"                 # ice cover: the outlet's open-water rating does not hold
    start = 2023-01-09
    end = 2023-02-20
    outflow = "fraction"         # or "interpolate" (the default), or "rating"
    fraction = 0.6               # of the open-water rating (with outflow = "fraction")

    [[period]]
    kind = "offset"              # the stage sensor reads high or low by a constant
    start = 2022-07-01
    end = 2022-07-24
    offset_from = "checks"       # or "balance" or "steps", or give 'offset' (m) directly

This module is pure (no file reading, no pandas import at module level): the site-file loader
builds :class:`Period` objects, and every step that needs them (the records, the balance, lake
evaporation under ice) imports :func:`days_of` and :func:`periods_of_kind` from here.

Estimates made for the days of a period are *graded* estimated, with the method in words
(:data:`lakebalance.grades.ESTIMATED`); nothing here is silent.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from .errors import OptionError
from .options import Options, iso_date, setting

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = [
    "Period",
    "PeriodKind",
    "days_of",
    "periods_of_kind",
    "period_outflow",
    "offset_from_steps",
    "offset_from_checks",
    "offset_from_balance",
    "correct_offset_periods",
]

#: ``ice``: ice on the lake or the control (outflow estimated, evaporation reduced by the
#: evaporation step); ``offset``: the stage sensor reads off by a constant (estimated and
#: removed); ``fouled``: the sensor is fouled (weed, silt) and reads off like ``offset``.
PeriodKind = Literal["ice", "offset", "fouled"]


@dataclass(frozen=True)
class Period(Options):
    """``[[period]]``: a dated stretch of the record with its own handling.

    Parameters
    ----------
    kind : {"ice", "offset", "fouled"}
        What happened (see :data:`PeriodKind`).
    start, end : str
        ISO dates of the first and the last day of the period (inclusive).
    series : str
        The series key whose readings are affected (default ``"stage"``).
    outflow : {"interpolate", "fraction", "rating"}
        How the outflow of the period's days is estimated: linear in time between the open-water
        outflow of the day before and the day after (``interpolate``, the default for ice), a
        stated ``fraction`` of the open-water rating, or the rating as it is (``rating``, the
        default for offset periods, whose stage is corrected first).
    fraction : float, optional
        Share (0–1) of the open-water rating's outflow, with ``outflow = "fraction"``.
    offset : float, optional
        The sensor's offset, m (reading minus true stage), when known; else it is estimated.
    offset_from : {"checks", "balance", "steps"}
        How an unknown offset is estimated: the mean difference of the field checks inside the
        period (``checks``, the default when there are any), the offset that best removes its
        mark from the daily balance residual (``balance``, the default otherwise:
        :func:`offset_from_balance`), or the stage steps at the period's two ends (``steps``,
        for a record with no balance).
    outflow_error : float
        Relative 1-σ error of an estimated outflow (-), added to the residual's random error on
        the period's days (default 0.25: estimates of discharge under ice are usually rated
        poor, from memory).
    reason : str
        Words for the report.
    """

    kind: PeriodKind
    start: str = setting(rule=iso_date)
    end: str = setting(rule=iso_date)
    series: str = "stage"
    outflow: Literal["interpolate", "fraction", "rating"] | None = None
    fraction: float | None = setting(None, unit="-", low=0.0, high=1.0)
    offset: float | None = setting(None, unit="m", low=-10.0, high=10.0)
    offset_from: Literal["checks", "balance", "steps"] | None = None
    outflow_error: float = setting(0.25, unit="-", low=0.0, high=2.0)
    reason: str = ""

    def __post_init__(self) -> None:
        super().__post_init__()
        if str(self.end)[:10] < str(self.start)[:10]:
            raise OptionError(
                "end", f"'end' ({self.end}) must not be before 'start' ({self.start})"
            )
        if self.how_outflow == "fraction" and self.fraction is None:
            raise OptionError("fraction", "'fraction' is needed with outflow = 'fraction'")
        if self.fraction is not None and self.how_outflow != "fraction":
            raise OptionError("fraction", "'fraction' applies only with outflow = 'fraction'")
        if self.kind == "ice" and (self.offset is not None or self.offset_from is not None):
            raise OptionError(
                "offset", "an ice period carries no stage offset; declare an 'offset' period"
            )

    @property
    def how_outflow(self) -> str:
        """The outflow handling in force (``outflow``, or the kind's default)."""
        if self.outflow is not None:
            return self.outflow
        return "interpolate" if self.kind == "ice" else "rating"

    @property
    def first(self) -> _dt.date:
        """The first day."""
        return _dt.date.fromisoformat(str(self.start)[:10])

    @property
    def last(self) -> _dt.date:
        """The last day."""
        return _dt.date.fromisoformat(str(self.end)[:10])

    def describe(self) -> str:
        """The period in words, e.g. ``"ice 2023-01-09 to 2023-02-20"``."""
        return f"{self.kind} {self.first} to {self.last}" + (
            f" ({self.reason})" if self.reason else ""
        )


def periods_of_kind(periods: Sequence[Period], *kinds: str) -> tuple[Period, ...]:
    """The periods of the given kinds (all when no kind is given), in site-file order."""
    return tuple(p for p in periods if not kinds or p.kind in kinds)


def days_of(period: Period | Sequence[Period], index: pd.DatetimeIndex) -> np.ndarray:
    """Boolean mask of the days of ``index`` (daily, tz-naive) inside the period(s)."""
    import pandas as pd

    items = [period] if isinstance(period, Period) else list(period)
    out = np.zeros(len(index), dtype=bool)
    for p in items:
        out |= (index >= pd.Timestamp(p.first)) & (index <= pd.Timestamp(p.last))
    return out


def period_outflow(
    outflow_m3: np.ndarray, mask: np.ndarray, how: str, fraction: float | None = None
) -> np.ndarray:
    """Outflow of the days in ``mask`` estimated as declared; other days unchanged.

    Parameters
    ----------
    outflow_m3 : ndarray
        Daily outflow by the open-water rating, m³/d.
    mask : ndarray of bool
        The period's days (one contiguous run or several).
    how : {"interpolate", "fraction", "rating"}
        ``interpolate``: linear in time between the open-water outflow of the last day before and
        the first day after each run (held flat at an end of the record); ``fraction``:
        ``fraction`` × the open-water outflow; ``rating``: unchanged.
    fraction : float, optional
        Share of the open-water outflow (-).

    Returns
    -------
    ndarray
        m³/d. A run with no open-water neighbour on either side is NaN (nothing to interpolate).

    Notes
    -----
    Interpolating the discharge across an ice period, or scaling the open-water rating, are the
    two usual estimates of winter discharge under ice when no winter gauging is made (common
    practice, no source).
    """
    q = np.asarray(outflow_m3, dtype=float).copy()
    mask = np.asarray(mask, dtype=bool)
    if how == "rating" or not mask.any():
        return q
    if how == "fraction":
        if fraction is None:
            raise OptionError("fraction", "'fraction' is needed with outflow = 'fraction'")
        q[mask] = float(fraction) * q[mask]
        return q
    if how != "interpolate":
        raise OptionError("outflow", f"unknown outflow handling {how!r}")
    n = q.size
    edges = np.flatnonzero(np.diff(np.r_[0, mask.astype(int), 0]))
    for a, b in zip(edges[::2], edges[1::2], strict=True):  # run a..b-1
        left = a - 1 if a > 0 and np.isfinite(q[a - 1]) else None
        right = b if b < n and np.isfinite(q[b]) else None
        if left is None and right is None:
            q[a:b] = np.nan
        elif left is None:
            q[a:b] = q[right]
        elif right is None:
            q[a:b] = q[left]
        else:
            w = (np.arange(a, b) - left) / (right - left)
            q[a:b] = (1.0 - w) * q[left] + w * q[right]
    return q


def offset_from_steps(stage_m: np.ndarray, mask: np.ndarray, window: int = 7) -> float:
    """The sensor offset of one period sized from the stage steps at its two ends, m.

    Parameters
    ----------
    stage_m : ndarray
        Daily stage as recorded, m.
    mask : ndarray of bool
        One contiguous run of days: the period.
    window : int
        Days on each side whose day-to-day changes give the lake's own change, days.

    Returns
    -------
    float
        Reading minus true stage, m (NaN when neither end has a recorded day on both sides).

    Notes
    -----
    At the start the record jumps by δ on top of the lake's own change, and back by δ at the end;
    the lake's own change is the median day-to-day change in ``window`` days around each end. The
    two ends give δ₁ = Δh_start − m₁ and δ₂ = −(Δh_end − m₂), and δ is their mean (or the one
    available). This is the step the daily balance residual shows as an unexplained gain on the
    first day and a loss after the last (common practice, no source).
    """
    h = np.asarray(stage_m, dtype=float)
    idx = np.flatnonzero(np.asarray(mask, dtype=bool))
    if idx.size == 0:
        return float("nan")
    a, b = int(idx[0]), int(idx[-1])
    dh = np.diff(h)  # dh[k] = h[k+1] - h[k]
    estimates = []

    def own(k: int) -> float:
        lo, hi = max(0, k - window), min(dh.size, k + window + 1)
        around = np.r_[dh[lo:k], dh[k + 1 : hi]]
        around = around[np.isfinite(around)]
        return float(np.median(around)) if around.size else 0.0

    if a >= 1 and np.isfinite(dh[a - 1]):
        estimates.append(dh[a - 1] - own(a - 1))
    if b + 1 < h.size and np.isfinite(dh[b]):
        estimates.append(-(dh[b] - own(b)))
    return float(np.mean(estimates)) if estimates else float("nan")


def offset_from_balance(
    residual_with: Callable[[float], np.ndarray],
    mask: np.ndarray,
    window: int = 15,
    trial_m: float = 0.01,
) -> float:
    """The sensor offset of one period that best removes its mark from the balance residual, m.

    Parameters
    ----------
    residual_with : callable
        δ (m) → the daily balance residual (m³/d) with δ taken off the stage of the period's days.
    mask : ndarray of bool
        The period's days (one contiguous run).
    window : int
        Days on each side of the period that enter the fit, days.
    trial_m : float
        The offset (m) at which the residual's sensitivity is taken.

    Returns
    -------
    float
        Reading minus true stage, m (NaN when the residual has too few days).

    Notes
    -----
    An offset δ adds to the residual a known pattern δ g_d: the storage jumps at the two ends
    (±A δ) and, inside, the outflow the rating gives for the offset stage (−T dQ/dh δ).
    With g = (r(δ₁) − r(0)) / δ₁ and the residual's usual level c over the window, δ̂ is the least
    squares solution of r(0)_d = c + δ g_d + noise on the period and ``window`` days each side
    (residual linear in a small offset; common practice, no source).
    """
    m = np.asarray(mask, dtype=bool)
    idx = np.flatnonzero(m)
    if idx.size == 0:
        return float("nan")
    lo, hi = max(0, idx[0] - window), min(m.size, idx[-1] + window + 1)
    r0 = np.asarray(residual_with(0.0), dtype=float)[lo:hi]
    r1 = np.asarray(residual_with(trial_m), dtype=float)[lo:hi]
    g = (r1 - r0) / trial_m
    ok = np.isfinite(r0) & np.isfinite(g)
    if ok.sum() < 4 or not np.any(np.abs(g[ok]) > 0):
        return float("nan")
    x = np.column_stack([np.ones(int(ok.sum())), g[ok]])
    coef, *_ = np.linalg.lstsq(x, r0[ok], rcond=None)
    return float(-coef[1])


def offset_from_checks(differences_m: np.ndarray) -> float:
    """The sensor offset of a period from the field checks made inside it, m.

    ``differences_m`` are logger minus check readings (m) of the checks in the period; the offset
    is their mean (NaN when there is none).
    """
    d = np.asarray(differences_m, dtype=float)
    d = d[np.isfinite(d)]
    return float(d.mean()) if d.size else float("nan")


def correct_offset_periods(
    stage_m: np.ndarray,
    index: pd.DatetimeIndex,
    periods: Sequence[Period],
    check_times: pd.DatetimeIndex | None = None,
    check_differences_m: np.ndarray | None = None,
    residual_with: Callable[[np.ndarray], np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray, list[tuple[Period, float, str]]]:
    """The stage with the offset of each ``offset`` or ``fouled`` period removed.

    Parameters
    ----------
    stage_m : ndarray
        Daily stage as recorded, m.
    index : pandas.DatetimeIndex
        Its days.
    periods : sequence of Period
        All declared periods (others than offset and fouled are ignored).
    check_times, check_differences_m : optional
        Times of the field checks and logger minus check at each, m.
    residual_with : callable, optional
        Corrected daily stage (m) → the daily balance residual (m³/d) with it; needed for
        ``offset_from = "balance"`` (the default when there is no check inside a period).

    Returns
    -------
    stage : ndarray
        Corrected daily stage, m.
    method : ndarray of str
        Per day, the estimate's method in words ('' where not corrected).
    applied : list of (Period, float, str)
        Each period with the offset removed (m; NaN when it could not be sized) and how it was
        had.
    """
    import pandas as pd

    h = np.asarray(stage_m, dtype=float).copy()
    method = np.full(h.size, "", dtype=object)
    applied: list[tuple[Period, float, str]] = []
    for p in periods_of_kind(periods, "offset", "fouled"):
        mask = days_of(p, index)
        inside = np.zeros(0, dtype=float)
        if check_times is not None and check_differences_m is not None:
            t = pd.DatetimeIndex(check_times).normalize()
            sel = (t >= pd.Timestamp(p.first)) & (t <= pd.Timestamp(p.last))
            inside = np.asarray(check_differences_m, dtype=float)[sel]
        how = p.offset_from or (
            "checks"
            if np.isfinite(inside).any()
            else ("balance" if residual_with is not None else "steps")
        )
        if p.offset is not None:
            delta, words = float(p.offset), "declared offset"
        elif how == "checks":
            delta = offset_from_checks(inside)
            words = f"offset sized from {int(np.isfinite(inside).sum())} field checks"
        elif how == "balance":
            if residual_with is None:
                raise OptionError(
                    "offset_from",
                    f"{p.describe()}: offset_from = 'balance' needs a storage relation",
                )
            base = h.copy()

            def trial(delta: float, base=base, mask=mask) -> np.ndarray:
                return residual_with(np.where(mask, base - delta, base))

            delta = offset_from_balance(trial, mask)
            words = "offset sized from the balance residual around the period"
        else:
            delta = offset_from_steps(stage_m, mask)
            words = "offset sized from the stage steps at the period's ends"
        applied.append((p, delta, words))
        if np.isfinite(delta):
            h[mask] = h[mask] - delta
            method[mask & np.isfinite(h)] = f"stage corrected: {words} ({delta * 1000:+.0f} mm)"
    return h, method, applied
