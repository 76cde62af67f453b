"""Operating rules of a lake or reservoir, defined once: releases, demand and restrictions.

One rule object (:class:`OperatingRules`, the site file's ``[operations]`` table) says how the
lake is run:

* **gated release** (:class:`ReleaseRule`): the gate release (m³/s) as a table by month and
  stage, linear in stage between the table's stages (held at the ends), one row per month or per
  listed month (a row holds until the next listed month, round the year);
* **minimum environmental release** (``environmental_release``, m³/s): the gate releases at
  least this while the stage is above the dead level;
* **spill over a crest** (:class:`SpillRule`): ``Q = C L (h - crest)^n`` above the crest, added to
  the outlet law (leave it out when the fitted rating already covers the spillway);
* **demand** (:class:`DemandSchedule`): a constant, 12 monthly values, a daily pattern by day of
  the year (365 or 366 values) or a file of dated values (read by the caller);
* **restriction levels** (:class:`RestrictionLevel`): a trigger stage that may vary by month
  (a control curve), a restore stage above it (hysteresis), the share of demand cut, and the lag
  in days between the trigger and the restriction coming into force.

The module is pure (numpy only): the drawdown engine evaluates it vectorised over members; the
balance, the dynamics and a yield study can evaluate the same object (:meth:`ReleaseRule.
release_m3s`, :meth:`DemandSchedule.demand_m3s`, :class:`RestrictionState`) so that every step
of the analysis runs the lake by the same rules.

Restriction semantics (one state machine per level and member; ``h`` is the stage at the start
of the day, ``m`` its month):

1. an active restriction is lifted on the first day that starts at or above its restore level;
2. an inactive one becomes *pending* on a day that starts below its trigger ``T(m)``; a pending
   one is cancelled on a day that starts at or above the restore level ``R(m)``;
3. a pending restriction comes into force ``lag`` days after the day it became pending (the
   same day when ``lag`` is 0) and applies from that day on;
4. the demand of a day is cut by the largest share among the levels in force.

Restriction rules and their triggers are common practice in drought operation of supply
reservoirs (no single source); the hysteresis and lag follow the usual trigger/restore design.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .options import Options, setting

__all__ = [
    "ReleaseRule",
    "SpillRule",
    "DemandSchedule",
    "RestrictionLevel",
    "RestrictionState",
    "OperatingRules",
    "monthly",
]


def _twelve_or_one(value: object) -> str | None:
    if isinstance(value, list | tuple) and len(value) not in (1, 12):
        return "have 1 or 12 values (January to December)"
    return None


def monthly(value: float | Sequence[float]) -> np.ndarray:
    """Twelve monthly values (January first) from one value or twelve."""
    arr = np.atleast_1d(np.asarray(value, dtype=float))
    if arr.size == 1:
        return np.full(12, float(arr[0]))
    if arr.size != 12:
        raise ValueError("a monthly value needs 1 or 12 values (January to December)")
    return arr


def _months_rule(value: object) -> str | None:
    if value is None:
        return None
    v = list(value)  # type: ignore[call-overload]
    if any(not isinstance(m, int) or not 1 <= m <= 12 for m in v):
        return "be months 1 to 12"
    if v != sorted(set(v)):
        return "be increasing months without repeats"
    return None


def _increasing(value: object) -> str | None:
    v = list(value)  # type: ignore[call-overload]
    if len(v) < 1 or any(b <= a for a, b in zip(v, v[1:])):
        return "be one or more increasing stages"
    return None


@dataclass(frozen=True)
class ReleaseRule(Options):
    """``[operations.release]``: gate release by month and stage.

    Parameters
    ----------
    stages : list of float
        Increasing stages of the table's columns (m).
    release : list of lists of float
        Release (m³/s), one row per month in ``months`` (or 12 rows, January first; or one row
        for every month), one value per stage. Linear in stage, held beyond the end stages.
    months : list of int, optional
        Month (1–12) from which each row applies, until the next listed month (round the year).
    """

    stages: list[float] = setting(unit="m", rule=_increasing)
    release: list[list[float]] = setting(unit="m3/s")
    months: list[int] | None = setting(None, unit="month", low=1, high=12, rule=_months_rule)

    def __post_init__(self) -> None:
        super().__post_init__()
        from .errors import OptionError

        rows = [list(r) for r in self.release]
        n = len(self.stages)
        if any(len(r) != n for r in rows):
            raise OptionError("release", f"'release' rows must have {n} values (one per stage)")
        if any(v < 0 or not np.isfinite(v) for r in rows for v in r):
            raise OptionError("release", "'release' must be at least 0 (m3/s)")
        want = len(self.months) if self.months is not None else None
        if want is not None and len(rows) != want:
            raise OptionError("release", f"'release' must have {want} rows (one per month given)")
        if want is None and len(rows) not in (1, 12):
            raise OptionError("release", "'release' must have 1 or 12 rows without 'months'")

    def by_month(self) -> np.ndarray:
        """(12, stages) table: the row in force in each calendar month (m³/s)."""
        rows = np.asarray(self.release, dtype=float)
        if self.months is None:
            return np.repeat(rows, 12, axis=0) if rows.shape[0] == 1 else rows
        starts = np.asarray(self.months) - 1
        out = np.empty((12, rows.shape[1]))
        for m in range(12):
            before = np.flatnonzero(starts <= m)
            out[m] = rows[before[-1] if before.size else -1]  # before the first: the last row
        return out

    def release_m3s(self, stage_m: np.ndarray, month: np.ndarray | int) -> np.ndarray:
        """Gate release (m³/s) at stages ``stage_m`` in calendar months ``month`` (1–12)."""
        table = self.by_month()
        h = np.asarray(stage_m, dtype=float)
        m = np.broadcast_to(np.asarray(month, dtype=int), h.shape) - 1
        out = np.empty(h.shape)
        for k in np.unique(m):
            sel = m == k
            out[sel] = np.interp(h[sel], self.stages, table[k])
        return out


@dataclass(frozen=True)
class SpillRule(Options):
    """``[operations.spill]``: free spill over a crest, ``Q = coefficient · length · (h − crest)^
    exponent`` (m³/s) above the crest (broad-crested weir with n = 1.5, common practice)."""

    crest: float = setting(unit="m")
    length: float = setting(unit="m", low=0.0, low_open=True)
    coefficient: float = setting(1.7, unit="m^0.5/s", low=0.0, low_open=True, high=5.0)
    exponent: float = setting(1.5, unit="-", low=0.5, high=3.0)

    def spill_m3s(self, stage_m: np.ndarray) -> np.ndarray:
        """Spill (m³/s) at stages ``stage_m``."""
        head = np.clip(np.asarray(stage_m, dtype=float) - self.crest, 0.0, None)
        return self.coefficient * self.length * head**self.exponent


def _daily_rule(value: object) -> str | None:
    if value is not None and len(value) not in (365, 366):  # type: ignore[arg-type]
        return "have 365 or 366 values (1 January first)"
    return None


@dataclass(frozen=True)
class DemandSchedule(Options):
    """``[operations.demand]``: withdrawal demand before restrictions (m³/s); give one of
    ``value``, ``monthly``, ``daily`` or ``file``.

    ``daily`` is a pattern by day of the year (365 values: 29 February takes 28 February's;
    366: leap-year days). ``file`` names a table of dated values (columns ``date`` and
    ``value``, in ``units``; read like a ``[series]`` file, relative to the site file); its
    values are used on their dates and, outside them, the mean of the file's values on the same
    day of the year (then the file's mean). The file is read by the caller (it is handed to
    :meth:`demand_m3s` as ``dated``: this module reads no files).
    """

    value: float | None = setting(None, unit="m3/s", low=0.0)
    monthly: list[float] | None = setting(
        None, unit="m3/s", low=0.0, rule=lambda v: None if v is None else _twelve_or_one(v)
    )
    daily: list[float] | None = setting(None, unit="m3/s", low=0.0, rule=_daily_rule)
    file: Path | None = None
    units: str = "m3/s"  # of the file's values (any flow unit the series readers know)

    def __post_init__(self) -> None:
        super().__post_init__()
        from .errors import OptionError

        given = [k for k in ("value", "monthly", "daily", "file") if getattr(self, k) is not None]
        if len(given) > 1:
            raise OptionError(given[1], f"give one of value, monthly, daily or file, not {given}")

    def demand_m3s(self, dates: object, dated: object = None) -> np.ndarray | None:
        """(days,) demand (m³/s) on ``dates`` (a pandas DatetimeIndex); None when not set.

        ``dated`` is the file's series (pandas Series of m³/s indexed by date) when ``file`` is
        set.
        """
        import pandas as pd

        idx = pd.DatetimeIndex(dates)
        if self.value is not None:
            return np.full(len(idx), float(self.value))
        if self.monthly is not None:
            return monthly(self.monthly)[idx.month.to_numpy() - 1]
        if self.daily is not None:
            pattern = np.asarray(self.daily, dtype=float)
            doy = idx.day_of_year.to_numpy() - 1
            if pattern.size == 365:  # 29 February takes 28 February's value
                leap = idx.is_leap_year
                doy = np.where(leap & (doy >= 59), doy - 1, doy)
            return pattern[doy]
        if self.file is not None:
            if dated is None:
                raise ValueError("the demand file's values are needed ('dated')")
            s = pd.Series(dated, dtype=float)
            s.index = pd.DatetimeIndex(s.index).normalize()
            clim = s.groupby(s.index.day_of_year).mean()
            out = s.reindex(idx.normalize()).to_numpy()
            fill = clim.reindex(idx.day_of_year).to_numpy()
            out = np.where(np.isnan(out), fill, out)
            return np.where(np.isnan(out), float(s.mean()), out)
        return None


@dataclass(frozen=True)
class RestrictionLevel(Options):
    """``[[operations.restriction]]``: one restriction level.

    Parameters
    ----------
    trigger : float or 12 floats
        Stage (m) below which the restriction is called, constant or by month (a control curve).
    cut : float
        Share of the demand cut while the restriction is in force (-).
    restore : float or 12 floats, optional
        Stage (m) at or above which it is lifted (default: the trigger, no hysteresis); at least
        the trigger in every month.
    lag : int
        Days between the call and the restriction coming into force.
    name : str, optional
        For the outputs.
    """

    trigger: float | list[float] = setting(unit="m", rule=_twelve_or_one)
    cut: float = setting(unit="-", low=0.0, high=1.0)
    restore: float | list[float] | None = setting(None, unit="m", rule=_twelve_or_one)
    lag: int = setting(0, unit="days", low=0, high=366)
    name: str | None = None

    def __post_init__(self) -> None:
        super().__post_init__()
        from .errors import OptionError

        if self.restore is not None and np.any(self.restore_by_month() < self.trigger_by_month()):
            raise OptionError("restore", "'restore' must be at least 'trigger' in every month (m)")

    def trigger_by_month(self) -> np.ndarray:
        """(12,) trigger stage of each month (m)."""
        return monthly(self.trigger)

    def restore_by_month(self) -> np.ndarray:
        """(12,) restore stage of each month (m)."""
        return monthly(self.trigger if self.restore is None else self.restore)


@dataclass
class RestrictionState:
    """The restriction state of many members, stepped day by day (see the module's rules).

    Make it with :meth:`OperatingRules.restriction_state`; call :meth:`step` once per day with
    the stage at the day's start; it returns the share of demand cut that day.
    """

    trigger: np.ndarray  # (levels, 12) m
    restore: np.ndarray  # (levels, 12) m
    cut: np.ndarray  # (levels,) -
    lag: np.ndarray  # (levels,) days
    active: np.ndarray  # (levels, members) bool
    waited: np.ndarray  # (levels, members) days pending; -1: not pending

    @classmethod
    def start(cls, levels: Sequence[RestrictionLevel], members: int) -> RestrictionState:
        """All levels off for ``members`` members."""
        k = len(levels)
        return cls(
            trigger=np.array([lv.trigger_by_month() for lv in levels]).reshape(k, 12),
            restore=np.array([lv.restore_by_month() for lv in levels]).reshape(k, 12),
            cut=np.array([lv.cut for lv in levels], dtype=float),
            lag=np.array([lv.lag for lv in levels], dtype=int),
            active=np.zeros((k, members), dtype=bool),
            waited=np.full((k, members), -1, dtype=int),
        )

    def step(self, stage_m: np.ndarray, month: int) -> np.ndarray:
        """Advance one day from the day-start stages ``stage_m`` (members,) in calendar month
        ``month`` (1–12); returns the cut share (members,) in force that day."""
        h = np.asarray(stage_m, dtype=float)[None, :]
        trig = self.trigger[:, month - 1, None]
        rest = self.restore[:, month - 1, None]
        up = h >= rest
        self.active &= ~up  # rule 1: lifted
        pending = self.waited >= 0
        self.waited[pending & up] = -1  # rule 2: a pending call cancelled
        call = ~self.active & (self.waited < 0) & (h < trig)
        self.waited[call] = 0  # rule 2: called
        due = (self.waited >= 0) & (self.waited >= self.lag[:, None])
        self.active |= due  # rule 3: in force
        self.waited[due] = -1
        self.waited[self.waited >= 0] += 1
        if not self.cut.size:
            return np.zeros(h.shape[1])
        return (self.active * self.cut[:, None]).max(axis=0)


@dataclass(frozen=True)
class OperatingRules(Options):
    """``[operations]``: how the lake is run (see the module docstring).

    Parameters
    ----------
    environmental_release : float
        Minimum gate release while the stage is above the dead level (m³/s).
    release : ReleaseRule, optional
        Gate release by month and stage.
    spill : SpillRule, optional
        Free spill over a crest, added to the outlet law.
    demand : DemandSchedule, optional
        Withdrawal demand before restrictions.
    restriction : tuple of RestrictionLevel
        Restriction levels.
    """

    environmental_release: float = setting(0.0, unit="m3/s", low=0.0)
    release: ReleaseRule | None = None
    spill: SpillRule | None = None
    demand: DemandSchedule | None = None
    restriction: tuple[RestrictionLevel, ...] = field(default_factory=tuple)

    def gate_release_by_month(self, stage_m: np.ndarray) -> np.ndarray | None:
        """(12, n) gate release (m³/s) at stages ``stage_m`` in each month, at least the
        environmental release (None without a release table); the dead level is the caller's."""
        if self.release is None:
            return None
        table = self.release.by_month()
        h = np.asarray(stage_m, dtype=float)
        rows = np.stack([np.interp(h, self.release.stages, table[m]) for m in range(12)])
        return np.maximum(rows, self.environmental_release)

    def restriction_state(self, members: int) -> RestrictionState:
        """A fresh :class:`RestrictionState` of this rule's levels for ``members`` members."""
        return RestrictionState.start(self.restriction, members)
