"""Quality checks on gauge series: pure functions on arrays, no file access.

Each function answers one question about a series (where are the gaps, which readings repeat a
timestamp, which readings are spikes...) and returns masks, runs or counts; the readers in
:mod:`lakebalance.io` turn those answers into :class:`~lakebalance.records.Finding` objects and
into the row accounting. All are vectorised over readings.

Thresholds that come from the trade rather than from a published source are marked "common
practice, no source"; recalled physical limits are marked "from memory".
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from .options import Options, setting
from .stats import MAD_TO_SIGMA
from .vocabulary import ROLES

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from .records import Finding

__all__ = [
    "QAOptions",
    "MAD_TO_SIGMA",
    "STATE_ROLES",
    "SPIKE_ROLES",
    "NON_NEGATIVE_ROLES",
    "ROLE_BOUNDS",
    "runs",
    "token_counts",
    "DuplicateCheck",
    "order_and_duplicates",
    "out_of_bounds",
    "rolling_median",
    "spike_scores",
    "spikes",
    "returns_to_neighbours",
    "step_scale",
    "flatlines",
    "stuck_runs",
    "storm_days",
    "implausible_units",
    "outside_storage",
    "outside_storage_findings",
]


@dataclass(frozen=True)
class QAOptions(Options):
    """``[qa]``: thresholds of the checks on raw series."""

    spike_window: int = setting(7, unit="readings", low=3)  # rolling median window
    spike_threshold: float = setting(6.0, unit="-", low=0.0, low_open=True)  # robust z of a spike
    flatline_days: int = setting(10, unit="days", low=2)  # identical daily values of a flat-line
    stuck_days: int = setting(4, unit="days", low=2)  # repeats then a catch-up step: stuck
    spikes: Literal["flag", "remove"] = "flag"  # keep spikes (flagged) or set them missing


#: Roles that are states of the lake or the air (a stuck sensor repeats them); flows and depths
#: are left out because zero or a constant pumping rate are legitimately constant.
STATE_ROLES = frozenset(name for name, role in ROLES.items() if role.state)

#: Roles checked for spikes: smooth states. Inflows, rain, evaporation, wind, humidity and solar
#: radiation are event-driven or gusty, where a robust z-score would flag every storm or cloudy
#: day (common practice, no source).
SPIKE_ROLES = frozenset(name for name, role in ROLES.items() if role.smooth)

#: Roles whose values cannot be negative (a negative one is rejected).
NON_NEGATIVE_ROLES = frozenset(name for name, role in ROLES.items() if role.non_negative)

#: Physical bounds of single readings in internal units; outside them a reading is rejected
#: (declared with each role in :mod:`lakebalance.vocabulary`).
ROLE_BOUNDS: dict[str, tuple[float, float]] = {
    name: role.bounds for name, role in ROLES.items() if role.bounds != (-np.inf, np.inf)
}


def runs(mask: np.ndarray) -> np.ndarray:
    """Start and stop (exclusive) indices of the runs of True in ``mask``, shape (n_runs, 2)."""
    m = np.asarray(mask, dtype=np.int8)
    if m.size == 0:
        return np.zeros((0, 2), dtype=np.int64)
    edges = np.flatnonzero(np.diff(np.concatenate(([0], m, [0]))))
    return edges.reshape(-1, 2)


def token_counts(cells: pd.Series, bad: np.ndarray, limit: int = 20) -> dict[str, int]:
    """How often each non-numeric token occurs among the ``bad`` cells (most frequent first).

    Tokens are the stripped cell texts (``n/a``, ``ICE``, ``<0.01``); beyond ``limit`` distinct
    tokens the rest are counted together under ``"(other)"``.
    """
    import pandas as pd

    if not np.any(bad):
        return {}
    tokens = pd.Series(cells[np.asarray(bad)]).astype(str).str.strip()
    counts = tokens.value_counts()
    out = {str(k): int(v) for k, v in counts.iloc[:limit].items()}
    if len(counts) > limit:
        out["(other)"] = int(counts.iloc[limit:].sum())
    return out


@dataclass(frozen=True)
class DuplicateCheck:
    """Result of :func:`order_and_duplicates` (indices refer to the input arrays).

    ``order`` sorts the readings by time (stable); ``out_of_order`` counts readings earlier than
    one before them in the file; ``merged`` marks repeated readings equal to the kept one (dropped,
    their value is the same); ``conflict`` marks every reading of a timestamp that carries
    different values (none is chosen: all are set missing); ``conflict_times`` the distinct
    timestamps in conflict.
    """

    order: np.ndarray
    out_of_order: int
    merged: np.ndarray
    conflict: np.ndarray
    conflict_times: np.ndarray


def order_and_duplicates(
    times: np.ndarray, values: np.ndarray, tolerance: float = 0.0
) -> DuplicateCheck:
    """Sort readings by time and sort out repeated timestamps.

    Parameters
    ----------
    times : numpy.ndarray of datetime64
        Timestamps of the readings (no NaT).
    values : numpy.ndarray of float
        Values of the readings (no NaN), any unit.
    tolerance : float
        Values of one timestamp differing by at most this (same unit) count as equal.

    Returns
    -------
    DuplicateCheck
    """
    t = np.asarray(times).astype("datetime64[ns]").view(np.int64)
    v = np.asarray(values, dtype=float)
    n = len(t)
    if n == 0:
        empty = np.zeros(0, dtype=bool)
        return DuplicateCheck(np.zeros(0, np.int64), 0, empty, empty, np.zeros(0, "datetime64[ns]"))
    running_max = np.maximum.accumulate(t)
    out_of_order = int(np.count_nonzero(t[1:] < running_max[:-1]))
    order = np.argsort(t, kind="stable")
    ts = t[order]
    vs = v[order]
    same_as_prev = np.concatenate(([False], ts[1:] == ts[:-1]))
    merged = np.zeros(n, dtype=bool)
    conflict = np.zeros(n, dtype=bool)
    conflict_times = np.zeros(0, dtype="datetime64[ns]")
    if same_as_prev.any():
        group_start = ~same_as_prev
        gid = np.cumsum(group_start) - 1
        gmin = np.full(gid[-1] + 1, np.inf)
        gmax = np.full(gid[-1] + 1, -np.inf)
        np.minimum.at(gmin, gid, vs)
        np.maximum.at(gmax, gid, vs)
        size = np.bincount(gid)
        in_dup = size[gid] > 1
        differs = (gmax - gmin)[gid] > tolerance
        conflict_sorted = in_dup & differs
        merged_sorted = same_as_prev & ~differs
        merged[order] = merged_sorted
        conflict[order] = conflict_sorted
        conflict_times = np.unique(ts[conflict_sorted]).astype("datetime64[ns]")
    return DuplicateCheck(order, out_of_order, merged, conflict, conflict_times)


def out_of_bounds(role: str, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Masks of impossible readings of ``role`` (internal units): ``(negative, out_of_range)``.

    Negative flows, depths, humidities, wind speeds, radiation and sunshine are impossible;
    humidity above 100 %, sunshine above 24 h and air temperatures beyond the recorded extremes
    are out of range (see :data:`ROLE_BOUNDS`).
    """
    v = np.asarray(values, dtype=float)
    with np.errstate(invalid="ignore"):
        negative = (v < 0) if role in NON_NEGATIVE_ROLES else np.zeros(v.shape, dtype=bool)
        lo, hi = ROLE_BOUNDS.get(role, (-np.inf, np.inf))
        out_range = ((v < lo) | (v > hi)) & ~negative
    return negative, out_range


def _windows(x: np.ndarray, window: int):
    """Centred windows of ``window`` values over ``x`` (NaN-padded at the ends), in chunks."""
    from numpy.lib.stride_tricks import sliding_window_view

    h = window // 2
    padded = np.concatenate((np.full(h, np.nan), x, np.full(h, np.nan)))
    view = sliding_window_view(padded, window)  # row i is centred on x[i]
    chunk = 1 << 17
    for a in range(0, view.shape[0], chunk):  # a loop over chunks of readings, not readings
        yield a, view[a : a + chunk]


def _centred_window(window: int) -> int:
    w = max(int(window), 3)
    return w + 1 if w % 2 == 0 else w  # an even window is widened by one to centre it


def rolling_median(values: np.ndarray, window: int) -> np.ndarray:
    """Centred rolling median over ``window`` readings (NaN skipped; see :func:`hampel_parts`)."""
    import warnings

    x = np.asarray(values, dtype=float)
    w = _centred_window(window)
    out = np.full(x.size, np.nan)
    for a, v in _windows(x, w):
        nan = np.isnan(v)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            m = np.nanmedian(v, axis=1) if nan.any() else np.median(v, axis=1)
        m[(~nan).sum(axis=1) < w // 2 + 1] = np.nan
        out[a : a + len(v)] = m
    return out


def spike_scores(
    values: np.ndarray, window: int = 7, resolution: float | None = None
) -> np.ndarray:
    """Robust z-score of each reading against its centred rolling median.

    ``z_i = min(|x_i - med_i|, |x_i - (x_{i-1} + x_{i+1}) / 2|) / s`` with ``med_i`` the median
    of the centred window of ``window`` readings and ``s = 1.4826 · MAD(x_{j+1} - x_j)`` the
    robust scale of the reading-to-reading changes of the whole series (:func:`step_scale`),
    floored at half the median non-zero change and at the gauge ``resolution``. A reading must stand out both from its window's median
    and from its two neighbours: a rounded flood peak is far from the window median but close to
    its neighbours.

    Notes
    -----
    A rolling-median (Hampel) identifier (Hampel, 1974; Pearson, 2002, IEEE Trans. Control Syst.
    Technol. 10(1), eq. 6) whose scale is the MAD of the changes rather than of the levels inside
    the window: a lake that rises for days has a large spread of levels in a window but its
    day-to-day changes stay small, and an isolated wrong reading stands out against those changes
    (common practice, no source). MAD-to-sigma factor 1/Φ⁻¹(3/4) (Rousseeuw and Croux, 1993).
    """
    x = np.asarray(values, dtype=float)
    d = np.abs(np.diff(x))
    d = d[np.isfinite(d) & (d > 0)]
    typical = float(np.median(d)) if d.size else 0.0
    # quantised or steadily trending series have a MAD of changes near zero: half the typical
    # non-zero change is the least scale (common practice, no source)
    scale = max(step_scale(x), 0.5 * typical, float(resolution or 0.0))
    if scale == 0.0:
        return np.zeros(x.shape)
    prev = np.concatenate(([np.nan], x[:-1]))
    nxt = np.concatenate((x[1:], [np.nan]))
    neighbours = 0.5 * (np.where(np.isnan(prev), nxt, prev) + np.where(np.isnan(nxt), prev, nxt))
    with np.errstate(invalid="ignore"):
        dev = np.fmin(np.abs(x - rolling_median(x, window)), np.abs(x - neighbours))
        return np.nan_to_num(dev / scale, nan=0.0)


def spikes(
    values: np.ndarray,
    window: int = 7,
    threshold: float = 6.0,
    resolution: float | None = None,
    returns: bool = True,
) -> np.ndarray:
    """Mask of spikes: readings whose robust z-score (:func:`spike_scores`) exceeds ``threshold``
    and (with ``returns``) that come back at once (:func:`returns_to_neighbours`).

    Parameters
    ----------
    values : numpy.ndarray
        Readings in time order (NaN allowed), any unit.
    window : int
        Readings in the centred rolling-median window (an even number is widened by one).
    threshold : float
        Robust z-score above which a reading is a spike (-).
    resolution : float, optional
        Gauge resolution in the unit of ``values``: the z-score's scale is never below it, so
        that one resolution step on a flat stretch is not a spike.
    returns : bool
        Also require the reading to come back at once: a fast but real rise of a lake (a flood)
        moves the neighbours apart and is not a spike.
    """
    x = np.asarray(values, dtype=float)
    if np.count_nonzero(~np.isnan(x)) < max(int(window), 3):
        return np.zeros(x.shape, dtype=bool)
    found = spike_scores(x, window, resolution) > threshold
    if returns and found.any():
        found &= returns_to_neighbours(x)
        # a reading next to a gap cannot be seen to come back: the first day after a gap (or
        # the last before one) is not judged a spike (common practice, no source)
        prev = np.concatenate(([np.nan], x[:-1]))
        nxt = np.concatenate((x[1:], [np.nan]))
        found &= np.isfinite(prev) & np.isfinite(nxt)
    return found


def storm_days(gain: np.ndarray, window: int = 31, threshold: float = 3.0) -> np.ndarray:
    """Days (mask) of a storm: the gauged gain (inflow plus rain, any one unit) of the day or
    the day before stands out of its centred rolling median by more than ``threshold`` robust
    scales, or is more than twice that median.

    A lake's stage rises on such days for a reason the gauges show, and a rise consistent with
    the inflow is not a spike of the stage record (Hampel identifier on the gain, Hampel, 1974;
    the one-day lag is the lake's response, common practice, no source).
    """
    g = np.asarray(gain, dtype=float)
    med = rolling_median(g, window)
    dev = g - med
    finite = dev[np.isfinite(dev)]
    scale = MAD_TO_SIGMA * float(np.median(np.abs(finite))) if finite.size else 0.0
    with np.errstate(invalid="ignore"):
        high = (dev > threshold * max(scale, 1e-12)) | (g > 2.0 * np.abs(med))
    high = np.nan_to_num(high, nan=0).astype(bool) & np.isfinite(g)
    return high | np.concatenate(([False], high[:-1]))


def stuck_runs(
    values: np.ndarray, min_days: int, resolution: float = 0.0, factor: float = 3.0
) -> np.ndarray:
    """Runs of at least ``min_days`` identical daily values after which the series comes back
    with a step larger than ``factor`` times both the gauge ``resolution`` and the robust scale
    of the day-to-day changes: a sensor that stuck while the lake moved and then caught up.

    Returns an array (n_runs, 2) of start (the last good value) and stop (exclusive, the day
    it came back). Shorter than a flat-line (:func:`flatlines`), such a run is told from a calm
    lake by the catch-up step (common practice, no source).
    """
    x = np.asarray(values, dtype=float)
    r = flatlines(x, min_days)
    if r.size == 0:
        return r
    scale = max(step_scale(x), float(resolution or 0.0))
    keep = []
    for a, b in r:  # loop over runs (few)
        if b < x.size and np.isfinite(x[b]) and abs(x[b] - x[a]) > factor * scale:
            keep.append((a, b))
    return np.asarray(keep, dtype=np.int64).reshape(-1, 2)


def returns_to_neighbours(values: np.ndarray, ratio: float = 2.0) -> np.ndarray:
    """Mask of readings that leave and come back: outside their two neighbours by more than
    ``ratio`` times the neighbours differ from each other.

    ``|x_i - (x_{i-1} + x_{i+1}) / 2| > ratio · |x_{i+1} - x_{i-1}|``, with a missing neighbour
    replaced by the other one. A flood rise, a rounded flood peak or a drawdown step moves the
    neighbours apart and fails the test; an isolated wrong reading passes it (common practice, no
    source).
    """
    x = np.asarray(values, dtype=float)
    prev = np.concatenate(([np.nan], x[:-1]))
    nxt = np.concatenate((x[1:], [np.nan]))
    prev = np.where(np.isnan(prev), nxt, prev)
    nxt = np.where(np.isnan(nxt), prev, nxt)
    with np.errstate(invalid="ignore"):
        return np.abs(x - 0.5 * (prev + nxt)) > ratio * np.abs(nxt - prev)


def step_scale(values: np.ndarray) -> float:
    """Robust scale of the reading-to-reading changes: 1.4826 · MAD of the first differences."""
    d = np.diff(np.asarray(values, dtype=float))
    d = d[np.isfinite(d)]
    if d.size == 0:
        return 0.0
    return float(MAD_TO_SIGMA * np.median(np.abs(d - np.median(d))))


def flatlines(values: np.ndarray, min_days: int, tolerance: float = 0.0) -> np.ndarray:
    """Runs of at least ``min_days`` consecutive identical values: array (n_runs, 2) start/stop.

    A NaN breaks a run. ``tolerance`` (unit of ``values``) is the largest change still counted as
    identical (0: exact repeats, as a stuck logger writes them).
    """
    x = np.asarray(values, dtype=float)
    if x.size < 2 or min_days < 2:
        return np.zeros((0, 2), dtype=np.int64)
    same = np.abs(np.diff(x)) <= tolerance  # NaN compares False: breaks a run
    r = runs(same)
    if r.size == 0:
        return r
    r = np.column_stack((r[:, 0], r[:, 1] + 1))  # n equal steps join n + 1 values
    return r[(r[:, 1] - r[:, 0]) >= min_days]


def implausible_units(role: str, daily: np.ndarray) -> str | None:
    """Plain-words reason why daily values (internal units) of ``role`` look declared in the
    wrong unit, or None when they look plausible.

    The limits are generous physical bounds (from memory, or common practice, no source): a lake
    stage does not range over more than 100 m or move more than 1 m a day as a typical step; a
    daily mean river inflow above 300 000 m³/s exceeds the largest rivers; daily rain above 2 m
    and lake evaporation above 0.1 m/d exceed the world records; a humidity series whose maximum is
    at most 1.0 is a fraction declared as %; air temperatures with a median above 45 °C are in °F
    or K; a median daily wind above 20 m/s is in km/h or knots; daily solar radiation above
    50 MJ m⁻² d⁻¹ exceeds the radiation at the top of the atmosphere.
    """
    x = np.asarray(daily, dtype=float)
    x = x[np.isfinite(x)]
    if x.size < 3:
        return None
    p01, p50, p99 = np.percentile(x, [1, 50, 99])
    if role == "stage":
        step = np.abs(np.diff(np.asarray(daily, dtype=float)))
        step = step[np.isfinite(step)]
        typical_step = float(np.median(step)) if step.size else 0.0
        if p99 - p01 > 100.0:
            return f"stage ranges over {p99 - p01:.4g} m (1st-99th percentile); cm or mm declared as m?"
        if typical_step > 1.0:
            return (
                f"typical day-to-day stage change is {typical_step:.4g} m; cm or mm declared as m?"
            )
    elif role in ("inflow", "withdrawal", "release"):
        if p99 > 3.0e5:
            return f"daily flows reach {p99:.4g} m³/s; L/s or m³/d declared as m³/s?"
    elif role == "rain":
        if p99 > 2.0:
            return f"daily rain reaches {p99:.4g} m; mm declared as m?"
    elif role in ("evaporation", "pan"):
        if p99 > 0.1:
            return f"daily evaporation reaches {p99:.4g} m; mm declared as cm or m?"
    elif role in ("rh", "rh_max", "rh_min"):
        if x.max() <= 1.0:
            return "humidity never exceeds 1: a fraction declared as %?"
    elif role in ("tmax", "tmin", "tmean", "dewpoint"):
        if p50 > 45.0:
            return f"median temperature is {p50:.4g} °C; °F or K declared as °C?"
    elif role == "wind":
        if p50 > 20.0:
            return f"median wind is {p50:.4g} m/s; km/h or knots declared as m/s?"
    elif role == "solar":
        if p99 > 50.0:
            return f"daily solar radiation reaches {p99:.4g} MJ/m²/d; W/m² declared as MJ/m²/d?"
    elif role == "sunshine":
        if p99 > 24.0:
            return f"daily sunshine reaches {p99:.4g} h; minutes declared as hours?"
    return None


def outside_storage(stage_m: np.ndarray, min_stage_m: float, max_stage_m: float) -> np.ndarray:
    """Mask of stages (m) below the lowest or above the highest level of the storage relation."""
    h = np.asarray(stage_m, dtype=float)
    with np.errstate(invalid="ignore"):
        return (h < min_stage_m) | (h > max_stage_m)


def outside_storage_findings(
    stage_m: pd.Series, min_stage_m: float, max_stage_m: float, series: str = "stage"
) -> list[Finding]:
    """One ``outside_storage`` finding per run of days whose stage (m) lies outside the relation.

    ``stage_m`` is a daily Series indexed by date. The values are kept (action ``"kept"``): the
    storage relation's own ``below``/``above`` policy decides what its users do with them.
    """
    from .records import Finding

    h = stage_m.to_numpy(dtype=float)
    mask = outside_storage(h, min_stage_m, max_stage_m)
    out = []
    for a, b in runs(mask):
        seg = h[a:b]
        side = "below" if np.nanmax(seg) < min_stage_m else "above"
        if np.nanmin(seg) < min_stage_m and np.nanmax(seg) > max_stage_m:  # pragma: no cover
            side = "below and above"
        out.append(
            Finding(
                series,
                "outside_storage",
                stage_m.index[a].date().isoformat(),
                stage_m.index[b - 1].date().isoformat(),
                int(b - a),
                "kept",
                f"stage {side} the storage relation ({min_stage_m:.6g} to {max_stage_m:.6g} m)",
            )
        )
    return out
