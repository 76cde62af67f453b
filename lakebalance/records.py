"""The loaded gauge records of one site: one daily table in SI, with QA findings and row accounting.

:class:`Records` is a pure data object; ``lakebalance.io`` builds it from the files of a site.
Columns of :attr:`Records.daily` are series keys: the role (``"stage"``, ``"rain"``) when a role has
one series, ``"<role>:<name>"`` (``"inflow:north_creek"``) when it has several. Values are in the
internal units of :data:`lakebalance.units.INTERNAL_UNITS` for the role's kind: stage in m, flows in
m³/s (daily mean), depths in m per day, temperatures in °C, humidity in %, wind in m/s, solar
radiation in MJ m⁻² d⁻¹, sunshine in h per day. A missing day is NaN, never zero.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import pandas as pd

    from .config import Site

__all__ = ["Correction", "Finding", "RowAccount", "SeriesInfo", "Records", "correction_values"]


@dataclass(frozen=True)
class Correction:
    """``[[correction]]``: a user-accepted correction of a series (e.g. a gauge datum shift).

    ``kind = "offset"`` adds ``value`` to every reading from ``start`` to ``end``; ``kind =
    "drift"`` adds an amount that goes linearly in time from ``value`` on ``start`` to
    ``end_value`` on ``end`` (a sensor drifting between two field checks; both dates needed).
    """

    series: str  # series key, e.g. "stage"
    kind: Literal["offset", "drift"] = "offset"
    start: str = ""  # ISO date of the first corrected day
    end: str | None = None  # ISO date of the last corrected day (open when absent)
    value: float = 0.0  # in the series' internal unit (m for stage) added to the record
    end_value: float | None = None  # drift: the amount added on 'end'
    reason: str = ""

    def __post_init__(self) -> None:
        from .errors import OptionError

        if self.kind == "drift" and (self.end_value is None or not self.start or not self.end):
            raise OptionError(
                "end_value", "a correction of kind 'drift' needs 'start', 'end' and 'end_value'"
            )
        if self.kind == "offset" and self.end_value is not None:
            raise OptionError("end_value", "'end_value' applies only to kind = 'drift'")


def correction_values(corr: Correction, times: pd.DatetimeIndex) -> np.ndarray:
    """The amount ``corr`` adds at each of ``times`` (series' internal unit), zero outside it.

    For a drift, linear in time from ``value`` at 00:00 of ``start`` to ``end_value`` at 00:00
    of ``end`` (days of a daily index are stamped at 00:00, so day ``end`` gets ``end_value``),
    held at ``end_value`` through the rest of the day ``end``.
    """
    import numpy as np
    import pandas as pd

    times = pd.DatetimeIndex(times)
    start = pd.Timestamp(corr.start) if corr.start else times.min()
    end = pd.Timestamp(corr.end) if corr.end else times.max()
    inside = (times >= start) & (times < end.normalize() + pd.Timedelta(days=1))
    if corr.kind == "offset":
        return np.where(inside, float(corr.value), 0.0)
    span = (end - start).total_seconds()
    w = np.clip((times - start).total_seconds() / span, 0.0, 1.0) if span > 0 else 1.0
    v = float(corr.value) + (float(corr.end_value) - float(corr.value)) * np.asarray(w)
    return np.where(inside, v, 0.0)


FindingKind = Literal[
    "gap",
    "duplicate",
    "conflicting_duplicate",
    "out_of_order",
    "non_numeric",
    "negative",
    "out_of_range",
    "spike",
    "flatline",
    "stuck",
    "low_coverage",
    "implausible_units",
    "unparsed_date",
    "empty",
    "outside_storage",
]


@dataclass(frozen=True)
class Finding:
    """One QA finding on one series.

    ``first`` and ``last`` are ISO dates (or timestamps) of the affected readings; ``count`` how
    many readings or days; ``action`` what was done (``"kept, flagged"``, ``"set missing"``,
    ``"merged"``, ``"rejected"``, ``"none"``); ``detail`` plain words, e.g. the tokens seen.
    """

    series: str
    kind: str
    first: str | None
    last: str | None
    count: int
    action: str
    detail: str = ""


@dataclass(frozen=True)
class RowAccount:
    """Row accounting of one input file: ``read == used + flagged + rejected`` always holds."""

    series: str
    file: str
    read: int
    used: int
    flagged: int
    rejected: int

    def __post_init__(self) -> None:
        if self.read != self.used + self.flagged + self.rejected:
            raise ValueError(
                f"row accounting of {self.file} does not add up: {self.read} read != "
                f"{self.used} used + {self.flagged} flagged + {self.rejected} rejected"
            )


@dataclass(frozen=True)
class SeriesInfo:
    """What was loaded for one series key."""

    key: str
    role: str
    name: str
    file: str
    declared_units: str
    internal_units: str
    statistic: str
    first: str | None = None  # first date with a value
    last: str | None = None  # last date with a value
    days: int = 0  # days in the period first..last
    missing: int = 0  # days without a value in that period
    flagged: int = 0  # days whose value is kept but flagged
    rejected: int = 0  # input rows rejected


@dataclass(frozen=True)
class Records:
    """Daily records of a site (see the module docstring for columns and units).

    ``flags`` has the same index and columns as ``daily``: True where the daily value is kept but
    doubtful (a spike, a flat-line, low coverage). ``subdaily_stage`` holds the raw stage readings
    (m, timestamps in the site's zone) when stage came sub-daily, for balance terms that need the
    stage at day boundaries; None otherwise. ``check_readings`` holds the field-check readings
    (role ``staff_gauge``, m on the gauge datum, with their times) when there are any.
    ``estimated`` has columns of series keys whose values were estimated (e.g. the stage of a
    declared offset period, :mod:`lakebalance.periods`): the method in words on those days,
    ``""`` elsewhere; None when nothing was estimated.
    """

    site: Site
    daily: pd.DataFrame
    flags: pd.DataFrame
    series: tuple[SeriesInfo, ...] = ()
    findings: tuple[Finding, ...] = ()
    accounting: tuple[RowAccount, ...] = ()
    subdaily_stage: pd.Series | None = field(default=None, repr=False)
    check_readings: pd.Series | None = field(default=None, repr=False)
    estimated: pd.DataFrame | None = field(default=None, repr=False)

    def keys(self, role: str) -> list[str]:
        """Series keys of ``role`` in the order of the site file."""
        return [s.key for s in self.series if s.role == role]

    def has(self, role: str) -> bool:
        """True when at least one series of ``role`` was loaded."""
        return bool(self.keys(role))

    def total(self, role: str) -> pd.Series:
        """Sum of all series of ``role`` per day; NaN on a day where any of them is missing."""
        keys = self.keys(role)
        if not keys:
            raise KeyError(f"no series of role {role!r}")
        return (
            self.daily[keys]
            .sum(axis=1, min_count=len(keys))
            .where(self.daily[keys].notna().all(axis=1))
            .rename(role)
        )

    def mean(self, role: str) -> pd.Series | None:
        """Day-by-day mean of the series of ``role`` (NaN skipped), or None when there is none.

        Several gauges of one weather role (two rain gauges, two thermometers) are averaged.
        """
        keys = self.keys(role) if self.series else [role]
        keys = [k for k in keys if k in self.daily.columns]
        if not keys:
            return None
        return self.daily[keys].mean(axis=1, skipna=True)

    def flatline_days(self, series: str, index: pd.DatetimeIndex) -> np.ndarray:
        """Days of ``index`` inside a flat-line of ``series`` found by the checks (already
        reported as findings)."""
        import numpy as np
        import pandas as pd

        out = np.zeros(len(index), dtype=bool)
        for f in self.findings:
            if f.series == series and f.kind == "flatline" and f.first and f.last:
                out |= (index >= pd.Timestamp(f.first[:10])) & (index <= pd.Timestamp(f.last[:10]))
        return out

    def to_frame(self) -> pd.DataFrame:
        """The daily table (:attr:`daily`, SI)."""
        return self.daily

    def to_dict(self, extra_findings: tuple[Finding, ...] = ()) -> dict:
        """The JSON document of ``lakebalance check --json``: period, each series with its
        findings, the row accounting (``extra_findings`` are checks made beside the records, e.g.
        stage outside the storage relation)."""
        findings = list(self.findings) + list(extra_findings)
        index = self.daily.index
        fields = (
            "key", "role", "name", "file", "declared_units", "internal_units", "statistic",
            "first", "last", "days", "missing", "flagged", "rejected",
        )  # fmt: skip
        return {
            "site": self.site.site.name,
            "site_file": str(self.site.path),
            "timezone": self.site.site.timezone,
            "period": {
                "first": index[0].date().isoformat() if len(index) else None,
                "last": index[-1].date().isoformat() if len(index) else None,
            },
            "series": [
                {
                    **{k: getattr(s, k) for k in fields},
                    "findings": [f for f in findings if f.series == s.key],
                }
                for s in self.series
            ],
            "accounting": list(self.accounting),
        }
