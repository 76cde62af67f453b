"""The daily steps of the stage record: the step anomaly and the change the gauged flows explain."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from .robust import quiet_nan_warnings

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd


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
    with quiet_nan_warnings():
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


def gauged_net_flow(daily: pd.DataFrame) -> np.ndarray | None:
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
