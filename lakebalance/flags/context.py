"""What every detector reads, worked out once from the daily balance."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd


def column(daily: pd.DataFrame, name: str) -> np.ndarray | None:
    if name in daily.columns:
        return daily[name].to_numpy(dtype=float)
    return None


def term_throughput(daily: pd.DataFrame) -> np.ndarray | None:
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


#: Fewest days with a residual that the detectors work on (common practice, no source: a noise
#: scale and a rolling median need a handful of values).
MIN_RESIDUAL_DAYS = 10
