"""Ice cover on the lake: which days are frozen, and what that does to evaporation.

The computation takes a boolean daily mask (:func:`ice_mask_from_periods` makes one from dated
periods, :func:`ice_mask_from_air_temperature` infers one from the air temperature by a stated
rule). Under ice:

- evaporation is the sublimation of the ice, small and constant (``[evaporation]
  ice_sublimation``, mm/d, default 0.1: of the order reported for lake ice in winter, from
  memory), for every method;
- the lake method's water keeps its temperature (the ice insulates it) and stores no heat;
- gaps of the pan record on frozen days (the ``ICE`` days of a pan log) are not filled from the
  open-water climatology: the pan is frozen because the lake is, and the day is an ice day.

Rain and snow on the ice are handled by :func:`precipitation_on_ice`: by default they count on
the day they fall (a floating ice sheet carries the snow, so the stage, which weighs the whole
column, rises with it); ``"at_break_up"`` holds what falls on the ice until the first open day,
for gauges whose stage does not feel the load of the ice (e.g. a frozen stilling well).

Where dated periods come from: ``[evaporation] ice = "declared"`` reads ``ice_periods`` (a list of
``[start, end]`` dates, both inclusive) for now. A site-wide declaration of dated periods
(``[[period]]`` tables, module ``lakebalance.periods``) is to replace it: its ice periods plug in
as the ``ice_mask`` argument of :func:`~lakebalance.evaporation.lake.estimate_lake_evaporation`
(made by :func:`ice_mask_from_periods`), in :meth:`lakebalance.analysis.Lake._evaporation`.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
import pandas as pd

from ..errors import ConfigError

__all__ = [
    "ice_mask_from_periods",
    "ice_mask_from_air_temperature",
    "precipitation_on_ice",
    "ICE_RULE",
]

#: The stated rule of ``ice = "from_air_temperature"``, in words.
ICE_RULE = (
    "ice on a day when the mean air temperature of the {window} days ending on it is below "
    "{threshold:g} °C (a rule of thumb: a lake freezes some weeks into the frost and thaws some "
    "weeks after it; common practice, no source)"
)


def ice_mask_from_periods(
    index: pd.DatetimeIndex,
    periods: Iterable[tuple[object, object]],
    *,
    site_file: str | None = None,
) -> np.ndarray:
    """Daily ice mask from dated periods.

    Parameters
    ----------
    index : pandas.DatetimeIndex
        The days.
    periods : iterable of (start, end)
        Dates (anything :func:`pandas.Timestamp` reads), both inclusive.
    site_file : str, optional
        Named in the error for a period that cannot be read.

    Returns
    -------
    ndarray of bool
        True on the days inside any period.
    """
    days = pd.DatetimeIndex(index).normalize()
    mask = np.zeros(len(days), dtype=bool)
    for period in periods:
        try:
            start, end = period
            lo, hi = pd.Timestamp(start), pd.Timestamp(end)
        except (TypeError, ValueError) as exc:
            raise ConfigError(
                f"[evaporation] ice_periods: {period!r} is not a [start, end] pair of dates",
                file=site_file,
            ) from exc
        if hi < lo:
            raise ConfigError(
                f"[evaporation] ice_periods: {period!r} ends before it starts", file=site_file
            )
        mask |= (days >= lo) & (days <= hi)
    return mask


def ice_mask_from_air_temperature(
    tmean_c: pd.Series, window_days: int = 30, threshold_c: float = 0.0
) -> np.ndarray:
    """Daily ice mask inferred from the air temperature (the rule of :data:`ICE_RULE`).

    Parameters
    ----------
    tmean_c : pandas.Series
        Daily mean air temperature, °C (DatetimeIndex); missing days are skipped by the mean.
    window_days : int
        Length of the trailing window, days.
    threshold_c : float
        Temperature below which the trailing mean means ice, °C.

    Returns
    -------
    ndarray of bool
    """
    trailing = tmean_c.rolling(int(window_days), min_periods=max(1, int(window_days) // 2)).mean()
    return (trailing < threshold_c).to_numpy()


def precipitation_on_ice(
    precipitation_m: pd.Series, ice: np.ndarray, rule: str = "as_it_falls"
) -> pd.Series:
    """Precipitation on the lake as the balance counts it when the lake is frozen.

    Parameters
    ----------
    precipitation_m : pandas.Series
        Daily precipitation on the lake, m/d.
    ice : ndarray of bool
        Daily ice mask of the same days.
    rule : {"as_it_falls", "at_break_up"}
        ``as_it_falls``: unchanged. ``at_break_up``: what falls on ice days is added to the first
        open day after the ice (or to the last day of the record if the ice lasts to its end).

    Returns
    -------
    pandas.Series
        Daily precipitation, m/d; the total over the record is unchanged.
    """
    if rule == "as_it_falls" or not np.any(ice):
        return precipitation_m
    if rule != "at_break_up":
        raise ValueError("rule must be 'as_it_falls' or 'at_break_up'")
    values = precipitation_m.to_numpy(dtype=float).copy()
    ice = np.asarray(ice, dtype=bool)
    held = 0.0
    for i in np.flatnonzero(ice | (np.r_[False, ice[:-1]])):  # ice days and the day after each
        if ice[i]:
            if np.isfinite(values[i]):
                held += values[i]
                values[i] = 0.0
        elif held:
            values[i] = (values[i] if np.isfinite(values[i]) else 0.0) + held
            held = 0.0
    if held:
        values[-1] = (values[-1] if np.isfinite(values[-1]) else 0.0) + held
    return pd.Series(values, index=precipitation_m.index, name=precipitation_m.name)
