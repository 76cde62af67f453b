"""One gauge series from its file to checked daily values in SI, with findings and row accounting.

The steps, in order (each vectorised over readings):

1. read the cells (CSV, Excel or WaterML 2.0, by file suffix: :mod:`lakebalance.io.formats`);
2. parse timestamps to the site's clock; rows whose date does not parse are rejected and reported
   with their file lines (a file where no date parses is an :class:`~lakebalance.errors.InputError`);
3. parse numbers; non-numeric cells are rejected and counted by token (``n/a``, ``ICE``, ``<0.01``);
4. convert to SI through :func:`lakebalance.units.conversion`; impossible values (negative flows
   and depths, humidity above 100 %) are rejected;
5. sort by time (out-of-order rows reported), merge repeated equal readings, set conflicting
   repeated readings missing (neither is chosen);
6. spikes (robust rolling median/MAD) on smooth state series: kept and flagged, or removed;
7. make days: sub-daily readings are aggregated by the role's statistic when a day holds at least
   ``coverage`` of its expected readings (expected from the typical reading interval), otherwise
   the day is missing (``low_coverage``); daily data pass through;
8. daily checks: gaps, flat-lines (stuck sensor) on state series, implausible units;
9. user-accepted corrections of the site file (``[[correction]]``), recorded as findings.

Row accounting: every row read is used, flagged (kept, doubtful) or rejected.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .. import qa
from ..config import SeriesSpec, Site
from ..errors import ConfigError, InputError, UnitError
from ..records import Finding, RowAccount, SeriesInfo, correction_values
from ..units import INTERNAL_UNITS, ROLE_KINDS, SECONDS_PER_DAY, Conversion, conversion
from ..vocabulary import SPARSE_ROLES
from ._raw import RawSeries
from .tables import ambiguity_error, ambiguous_numbers, to_numbers

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = [
    "DEFAULT_STATISTICS",
    "LoadedSeries",
    "read_raw_series",
    "default_statistic",
    "aggregate_daily",
    "load_series",
]

#: Statistic of a day of sub-daily readings by role, for states and rates; amounts (a depth or
#: volume per reading) are always summed.
DEFAULT_STATISTICS = {"tmax": "max", "tmin": "min", "rh_max": "max", "rh_min": "min"}

_USED, _FLAGGED, _REJECTED = 0, 1, 2
_NS_PER_DAY = 86_400_000_000_000


@dataclass(frozen=True)
class LoadedSeries:
    """Daily values of one series (SI) with its flags, findings and row accounting."""

    info: SeriesInfo
    daily: pd.Series
    flags: pd.Series
    findings: tuple[Finding, ...]
    account: RowAccount
    subdaily: pd.Series | None = None


def read_raw_series(spec: SeriesSpec, what: str) -> RawSeries:
    """Read the cells of a series with the reader of its file's format.

    The suffix decides (:data:`lakebalance.io.formats.FORMATS`): ``.csv``/``.txt``/``.tsv``/
    ``.dat`` delimited text, ``.xlsx``/``.xlsm`` workbooks, ``.xml``/``.wml``/``.wml2`` WaterML
    2.0 documents; any other suffix is an :class:`~lakebalance.errors.InputError`.
    """
    from .formats import reader

    return reader(spec.file, "series", what)(spec, what)


def default_statistic(role: str, conv: Conversion) -> str:
    """How sub-daily readings of ``role`` in a unit make a day: sum amounts, else by role/mean."""
    if conv.amount:
        return "sum"
    return DEFAULT_STATISTICS.get(role, "mean")


def aggregate_daily(
    times_ns: np.ndarray, values: np.ndarray, statistic: str
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Aggregate time-sorted readings into calendar days.

    Parameters
    ----------
    times_ns : numpy.ndarray of int64
        Timestamps (naive local time) in ns since the epoch, in time order (the repeated hour
        when the clocks go back stays inside its day, so days never decrease).
    values : numpy.ndarray of float
        Readings (no NaN), any unit.
    statistic : str
        ``mean``, ``sum``, ``min``, ``max``, ``first``, ``last`` or ``median``.

    Returns
    -------
    days : numpy.ndarray of int64
        Days (since the epoch) holding readings.
    daily : numpy.ndarray of float
        The statistic of each day.
    counts : numpy.ndarray of int64
        Readings per day.
    """
    day = np.floor_divide(times_ns, _NS_PER_DAY)
    if day.size == 0:
        return day, np.zeros(0), np.zeros(0, dtype=np.int64)
    starts = np.concatenate(([0], np.flatnonzero(np.diff(day)) + 1))
    counts = np.diff(np.concatenate((starts, [day.size])))
    if statistic == "sum":
        daily = np.add.reduceat(values, starts)
    elif statistic == "mean":
        daily = np.add.reduceat(values, starts) / counts
    elif statistic == "min":
        daily = np.minimum.reduceat(values, starts)
    elif statistic == "max":
        daily = np.maximum.reduceat(values, starts)
    elif statistic == "first":
        daily = values[starts]
    elif statistic == "last":
        daily = values[starts + counts - 1]
    elif statistic == "median":
        import pandas as pd

        daily = pd.Series(values).groupby(day).median().to_numpy()
    else:  # pragma: no cover - the site-file schema only allows the names above
        raise ConfigError(f"unknown statistic {statistic!r}")
    return day[starts], daily.astype(float), counts.astype(np.int64)


def _iso(ns: int | np.integer | None) -> str | None:
    import pandas as pd

    if ns is None:
        return None
    ts = pd.Timestamp(int(ns))
    return ts.date().isoformat() if ts == ts.normalize() else ts.isoformat()


def _iso_day(day: int | np.integer) -> str:
    return str(np.datetime64(int(day), "D"))


def _site_line(site: Site, spec: SeriesSpec, key: str) -> int | None:
    """Line of ``key`` in the site file's table of ``spec`` (best effort, for messages)."""
    try:
        lines = site.path.read_text(encoding="utf-8-sig").splitlines()
    except OSError:
        return None
    header = re.compile(rf"^\s*\[\[?\s*series\s*\.\s*{re.escape(spec.role)}\s*\]\]?")
    index = [s.key for s in site.series if s.role == spec.role].index(spec.key)
    seen = -1
    for i, ln in enumerate(lines):
        if header.match(ln):
            seen += 1
            if seen != index:
                continue
            for j in range(i + 1, len(lines)):
                if re.match(r"^\s*\[", lines[j]):
                    break
                if re.match(rf"^\s*{re.escape(key)}\s*=", lines[j]):
                    return j + 1
            return i + 1
    return None


def check_zone(name: str, site: Site, spec: SeriesSpec | None = None) -> None:
    """Raise a :class:`ConfigError` naming the site-file line when ``name`` is no IANA zone."""
    import zoneinfo

    try:
        zoneinfo.ZoneInfo(name)
        return
    except (zoneinfo.ZoneInfoNotFoundError, ValueError, TypeError):
        pass
    if spec is not None:
        line, key = _site_line(site, spec, "source_timezone"), "source_timezone"
    else:
        key, line = "timezone", None
        try:
            text = site.path.read_text(encoding="utf-8-sig").splitlines()
        except OSError:
            text = []
        for i, ln in enumerate(text):
            if re.match(r"^\s*timezone\s*=", ln):
                line = i + 1
                break
    raise ConfigError(
        f"'{key}' = {name!r} is not a time zone; use an IANA name such as 'Europe/Vienna' or "
        "'Etc/GMT-1' (UTC+1)",
        file=site.path,
        line=line,
    )


def _resolve_units(site: Site, spec: SeriesSpec, raw: RawSeries, kind: str, what: str) -> str:
    """The unit of the readings: the site file's, or the document's when the site says "file";
    both must agree when both are given."""
    declared = spec.units.strip()
    line = _site_line(site, spec, "units")
    if declared.lower() == "file":
        if raw.units is None:
            raise ConfigError(
                f"{what}: units = 'file' but {spec.file.name} declares no unit",
                file=site.path,
                line=line,
            )
        return raw.units
    try:
        mine = conversion(declared, kind, what)
    except UnitError as exc:
        raise UnitError(exc.message, file=site.path, line=line) from None
    if raw.units is not None:
        try:
            theirs = conversion(raw.units, kind, what)
        except UnitError as exc:
            raise UnitError(exc.message, file=raw.file) from None
        if not (
            np.isclose(mine.scale, theirs.scale, rtol=1e-9, atol=0)
            and np.isclose(mine.offset, theirs.offset, rtol=1e-9, atol=1e-12)
            and mine.amount == theirs.amount
        ):
            raise UnitError(
                f"{what}: the site file declares {declared!r} but the document says "
                f"{raw.units!r}; fix one (or write units = 'file')",
                file=site.path,
                line=line,
            )
    return declared


def _lines_text(file: str, lines: np.ndarray, limit: int = 5) -> str:
    shown = ", ".join(f"{file}:{int(n)}" for n in lines[:limit])
    more = f" (+{len(lines) - limit} more)" if len(lines) > limit else ""
    return shown + more


def load_series(spec: SeriesSpec, site: Site) -> LoadedSeries:
    """Read, check and aggregate one series of ``site`` to daily SI values.

    Parameters
    ----------
    spec : SeriesSpec
        The series as declared in the site file.
    site : Site
        The site (time zone, QA thresholds, corrections).

    Returns
    -------
    LoadedSeries

    Raises
    ------
    InputError
        The file is unusable (binary, empty, header-only, missing column, no date parses).
    UnitError
        The declared unit is unknown or of the wrong dimension (names the site-file line).
    """
    import pandas as pd

    role, key = spec.role, spec.key
    what = f"series.{role}" + (f" '{spec.name}'" if key != role else "")
    kind = ROLE_KINDS[role]
    raw = read_raw_series(spec, what)
    units = _resolve_units(site, spec, raw, kind, what)
    conv = conversion(units, kind, what)
    statistic = spec.statistic or default_statistic(role, conv)
    if conv.amount and statistic != "sum":
        raise ConfigError(
            f"{what}: {units!r} is an amount per reading, so readings are summed; "
            f"statistic = {statistic!r} does not apply",
            file=site.path,
            line=_site_line(site, spec, "statistic"),
        )
    rows = _Rows(key, raw.file, raw.lines, np.zeros(len(raw.lines), dtype=np.int8), [])
    stamps = _parse_dates(rows, raw, spec, site, what)
    values, bad_num = _parse_values(rows, raw, spec, stamps, what)
    si = conv.apply(values)
    _reject_impossible(rows, role, si, stamps.t_ns)
    keep = _ordered_readings(rows, stamps, si)
    readings = _Readings(stamps.t_ns[keep], si[keep], keep)
    steps = np.diff(stamps.a_ns[keep])
    steps = steps[steps > 0]
    interval_s = float(np.median(steps)) / 1e9 if steps.size else SECONDS_PER_DAY
    subdaily = interval_s < 0.9 * SECONDS_PER_DAY
    sparse = role in SPARSE_ROLES  # field checks: a few readings a year by design
    if interval_s >= 1.9 * SECONDS_PER_DAY and steps.size >= 10 and not sparse:
        _warn_coarse(what, rows.file, interval_s / SECONDS_PER_DAY, conv.amount)
    resolution = None
    if spec.resolution is not None:
        resolution = abs(float(conv.scale)) * float(spec.resolution)
    check_spikes = role in qa.SPIKE_ROLES
    spike_days = np.zeros(0, dtype=np.int64)
    if check_spikes and subdaily:
        readings, spike_days = _subdaily_spikes(rows, readings, site, resolution)
    day = _daily_values(
        rows, readings, stamps, spec, statistic, conv, interval_s if subdaily else None
    )
    if day is None:
        example = str(raw.values[bad_num].iloc[0]).strip() if bad_num.any() else None
        raise InputError(
            f"{what}: no usable reading in the file{_why_none(rows.findings, example)}",
            file=rows.file,
        )
    if spike_days.size:
        day.flags[spike_days[np.isin(spike_days, day.days)] - day.days.min()] = True
    if check_spikes and not subdaily:
        _daily_spikes(rows, readings, day, site, resolution)
    _daily_checks(
        rows, stamps, readings, day, site, role=role, units=units, sparse=sparse,
        resolution=resolution,
    )  # fmt: skip
    sub = (
        pd.Series(readings.r_val, index=pd.DatetimeIndex(readings.r_ns), name=key)
        if (role == "stage" and subdaily) or sparse
        else None
    )
    sub = _apply_corrections(rows, day, site, sub, sparse=sparse, kind=kind)
    return _loaded(rows, day, spec, role=role, units=units, statistic=statistic, sub=sub)


@dataclass
class _Rows:
    """The rows of one file while it is read: each row's status (used, flagged, rejected) and
    the findings so far (module-private working state of :func:`load_series`)."""

    key: str
    file: str
    lines: np.ndarray
    status: np.ndarray
    findings: list[Finding]

    def add(self, kind_: str, first, last, count: int, action: str, detail: str = "") -> None:
        self.findings.append(Finding(self.key, kind_, first, last, int(count), action, detail))


@dataclass(frozen=True)
class _Stamps:
    """Each row's time: ``t_ns`` on the site's local clock (days and dates in messages),
    ``a_ns`` without daylight-saving jumps (order, repeats, intervals), ``nat`` no date."""

    t_ns: np.ndarray
    a_ns: np.ndarray
    nat: np.ndarray


@dataclass(frozen=True)
class _Readings:
    """The readings kept, in time order: local times (ns), SI values, and their row indices."""

    r_ns: np.ndarray
    r_val: np.ndarray
    keep: np.ndarray


@dataclass
class _Days:
    """The daily series being built: first day, day numbers with readings, values and flags."""

    index: pd.DatetimeIndex
    days: np.ndarray
    full: np.ndarray
    flags: np.ndarray


def _parse_dates(rows: _Rows, raw: RawSeries, spec: SeriesSpec, site: Site, what: str) -> _Stamps:
    """Step 2: timestamps on the site's clock; rows without a parsable date are rejected."""
    from .dates import parse_timestamps

    role, file, lines, n = spec.role, rows.file, rows.lines, len(rows.lines)
    add, status = rows.add, rows.status
    check_zone(site.site.timezone, site)
    if spec.source_timezone:
        check_zone(spec.source_timezone, site, spec)

    dayfirst, order_note = spec.dayfirst, None
    if spec.format is None:
        from .dates import resolve_day_order

        dayfirst, order_note = resolve_day_order(
            raw.dates,
            spec.dayfirst,
            key=f"[series.{role}] dayfirst",
            file=file,
            lines=lines,
            column=raw.date_column,
        )
    if order_note:
        add("date_order", None, None, n, "inferred", order_note)
    stamps, bad_date, ordering = parse_timestamps(
        raw.dates,
        format=spec.format,
        dayfirst=bool(dayfirst),
        time=raw.times,
        timezone=site.site.timezone,
        source_timezone=spec.source_timezone,
        absolute=True,
    )
    t_ns = stamps.as_unit("ns").asi8.copy()  # site's local clock: days and dates in messages
    a_ns = ordering.as_unit(
        "ns"
    ).asi8.copy()  # no daylight-saving jumps: order, repeats and intervals
    nat = np.asarray(stamps.isna())
    if nat.all():
        first_bad = np.flatnonzero(bad_date)
        i = int(first_bad[0]) if first_bad.size else 0
        cell = raw.dates.iloc[i] if n else ""
        hint = " (set 'format' or 'dayfirst' in the site file)" if spec.format is None else ""
        raise InputError(
            f"{what}: no date parses, e.g. {str(cell).strip()!r}{hint}",
            file=file,
            line=int(lines[i]) if n else None,
            column=raw.date_column,
        )
    if bad_date.any():
        status[bad_date] = _REJECTED
        add(
            "unparsed_date",
            None,
            None,
            bad_date.sum(),
            "rejected",
            f"dates that do not parse at {_lines_text(file, lines[bad_date])}",
        )
    no_date = nat & ~bad_date
    if no_date.any():
        status[no_date] = _REJECTED
        add(
            "empty",
            None,
            None,
            no_date.sum(),
            "rejected",
            f"rows without a date at {_lines_text(file, lines[no_date])}",
        )

    return _Stamps(t_ns, a_ns, nat)


def _parse_values(
    rows: _Rows, raw: RawSeries, spec: SeriesSpec, stamps: _Stamps, what: str
) -> tuple[np.ndarray, np.ndarray]:
    """Step 3: numbers (a value the delimiter settings leave ambiguous stops the reading);
    non-numeric and empty cells are rejected, counted by token."""
    role, file, lines, add, status = spec.role, rows.file, rows.lines, rows.add, rows.status
    t_ns, nat = stamps.t_ns, stamps.nat
    unclear = ambiguous_numbers(raw.values, raw.decimal, spec.thousands)
    if unclear.any():
        i = int(np.flatnonzero(unclear)[0])
        raise ambiguity_error(
            raw.values.iloc[i],
            raw.decimal,
            what=what,
            key_hint=f"set {{}} in [series.{role}] if that is what it is",
            file=file,
            line=int(lines[i]),
            column=raw.value_column,
        )
    values, bad_num = to_numbers(raw.values, raw.decimal, spec.thousands)
    bad_num &= ~nat
    if bad_num.any():
        status[bad_num] = _REJECTED
        bad_idx = np.flatnonzero(bad_num)
        bad_tokens = raw.values.iloc[bad_idx].astype(str).str.strip().to_numpy()
        for token, count in qa.token_counts(raw.values, bad_num).items():
            tn = t_ns[bad_idx[bad_tokens == token]] if token != "(other)" else t_ns[bad_idx]
            add(
                "non_numeric",
                _iso(tn.min()) if tn.size else None,
                _iso(tn.max()) if tn.size else None,
                count,
                "rejected",
                f"token {token!r}",
            )
    no_value = np.isnan(values) & ~bad_num & ~nat
    if no_value.any():
        status[no_value] = _REJECTED
        tn = t_ns[no_value]
        add(
            "empty",
            _iso(tn.min()),
            _iso(tn.max()),
            no_value.sum(),
            "rejected",
            "rows without a value",
        )

    return values, bad_num


def _reject_impossible(rows: _Rows, role: str, si: np.ndarray, t_ns: np.ndarray) -> None:
    """Step 4: values impossible for the role (negative flows, humidity above 100 %)."""
    add, status = rows.add, rows.status
    negative, out_range = qa.out_of_bounds(role, si)
    for mask, kind_, words in (
        (negative, "negative", "negative values are impossible for this role"),
        (out_range, "out_of_range", "outside the physical range of this role"),
    ):
        mask &= status == _USED
        if mask.any():
            status[mask] = _REJECTED
            tn = t_ns[mask]
            add(kind_, _iso(tn.min()), _iso(tn.max()), mask.sum(), "rejected", words)


def _ordered_readings(rows: _Rows, stamps: _Stamps, si: np.ndarray) -> np.ndarray:
    """Step 5: sort by time, merge repeated equal readings, set conflicting repeats missing;
    returns the row indices kept, in time order."""
    add, status, file, lines = rows.add, rows.status, rows.file, rows.lines
    t_ns, a_ns = stamps.t_ns, stamps.a_ns
    valid = np.flatnonzero(status == _USED)
    dup = qa.order_and_duplicates(a_ns[valid].view("datetime64[ns]"), si[valid])
    if dup.out_of_order:
        add(
            "out_of_order",
            _iso(t_ns[valid].min()),
            _iso(t_ns[valid].max()),
            dup.out_of_order,
            "sorted",
            "rows earlier than a row above them",
        )
    if dup.merged.any():
        tn = t_ns[valid[dup.merged]]
        add(
            "duplicate",
            _iso(tn.min()),
            _iso(tn.max()),
            dup.merged.sum(),
            "merged",
            "repeated equal readings",
        )
    if dup.conflict.any():
        status[valid[dup.conflict]] = _REJECTED
        ct = t_ns[valid[dup.conflict]]  # local clock for the message
        add(
            "conflicting_duplicate",
            _iso(ct.min()),
            _iso(ct.max()),
            len(dup.conflict_times),
            "set missing",
            f"{int(dup.conflict.sum())} readings at {len(dup.conflict_times)} timestamps disagree; "
            "none was chosen "
            f"(e.g. {_lines_text(file, np.sort(lines[valid[dup.conflict]]), 4)})",
        )
    keep = valid[dup.order]
    keep = keep[~dup.merged[dup.order] & ~dup.conflict[dup.order]]
    return keep


def _subdaily_spikes(
    rows: _Rows, readings: _Readings, site: Site, resolution: float | None
) -> tuple[_Readings, np.ndarray]:
    """Step 6 on sub-daily readings: spikes kept and flagged (their days returned) or removed."""
    add, status = rows.add, rows.status
    r_ns, r_val, keep = readings.r_ns, readings.r_val, readings.keep
    spike_days = np.zeros(0, dtype=np.int64)
    spk = qa.spikes(r_val, site.qa.spike_window, site.qa.spike_threshold, resolution)
    if spk.any():
        tn = r_ns[spk]
        remove = site.qa.spikes == "remove"
        sday = np.floor_divide(tn, _NS_PER_DAY)
        uday = np.unique(sday)
        # one finding per run of consecutive spike days; count = spike readings
        breaks = np.flatnonzero(np.diff(uday) > 1) + 1
        for group in np.split(uday, breaks):
            in_group = (sday >= group[0]) & (sday <= group[-1])
            add(
                "spike",
                _iso(tn[in_group].min()),
                _iso(tn[in_group].max()),
                in_group.sum(),
                "removed" if remove else "kept, flagged",
                "isolated reading: robust z-score above threshold, back at once",
            )
        if remove:
            status[keep[spk]] = _REJECTED
            r_ns, r_val, keep = r_ns[~spk], r_val[~spk], keep[~spk]
        else:
            status[keep[spk]] = _FLAGGED
            spike_days = uday
    return _Readings(r_ns, r_val, keep), spike_days


def _daily_values(
    rows: _Rows,
    readings: _Readings,
    stamps: _Stamps,
    spec: SeriesSpec,
    statistic: str,
    conv: Conversion,
    interval_s: float | None,
) -> _Days | None:
    """Step 7: the readings made into days (a sub-daily day needs ``coverage`` of its expected
    readings, ``interval_s`` apart); None when no day has a reading."""
    import pandas as pd

    add, status = rows.add, rows.status
    r_ns, r_val, keep, t_ns = readings.r_ns, readings.r_val, readings.keep, stamps.t_ns
    kind = ROLE_KINDS[spec.role]
    subdaily = interval_s is not None
    days, daily_vals, counts = aggregate_daily(r_ns, r_val, statistic)
    if conv.amount and kind == "flow":
        daily_vals = daily_vals / SECONDS_PER_DAY  # m³ per day -> m³/s
    low_days = np.zeros(0, dtype=np.int64)
    if subdaily:
        expected = SECONDS_PER_DAY / float(interval_s)
        low = counts < spec.coverage * expected
        if low.any():
            low_days = days[low]
            row_day = np.floor_divide(t_ns[keep], _NS_PER_DAY)
            status[keep[np.isin(row_day, low_days)]] = _REJECTED
            daily_vals = np.where(low, np.nan, daily_vals)
    if days.size == 0:
        return None
    index = pd.date_range(_iso_day(days.min()), _iso_day(days.max()), freq="D", name="date")
    full = np.full(len(index), np.nan)
    pos = days - days.min()
    full[pos] = daily_vals
    flags = np.zeros(len(index), dtype=bool)
    if low_days.size:
        low_mask = np.zeros(len(index), dtype=bool)
        low_mask[low_days - days.min()] = True
        for a, b in qa.runs(low_mask):
            add(
                "low_coverage",
                index[a].date().isoformat(),
                index[b - 1].date().isoformat(),
                b - a,
                "set missing",
                f"fewer than {spec.coverage:.0%} of {expected:.4g} expected readings a day",
            )
    return _Days(index, days, full, flags)


def _daily_spikes(
    rows: _Rows, readings: _Readings, day: _Days, site: Site, resolution: float | None
) -> None:
    """Step 6 on daily values: spikes kept and flagged, or removed."""
    add, status = rows.add, rows.status
    r_ns, keep = readings.r_ns, readings.keep
    index, days, full, flags = day.index, day.days, day.full, day.flags
    spk = qa.spikes(full, site.qa.spike_window, site.qa.spike_threshold, resolution)
    if spk.any():
        which = np.flatnonzero(spk)
        row_day = np.floor_divide(r_ns, _NS_PER_DAY) - days.min()
        picked = keep[np.isin(row_day, which)]
        if site.qa.spikes == "remove":
            full[spk] = np.nan
            status[picked] = _REJECTED
            action = "removed"
        else:
            flags |= spk
            status[picked] = np.where(status[picked] == _USED, _FLAGGED, status[picked])
            action = "kept, flagged"
        for a, b in qa.runs(spk):
            add(
                "spike",
                index[a].date().isoformat(),
                index[b - 1].date().isoformat(),
                b - a,
                action,
                "isolated reading: robust z-score above threshold, back at once",
            )


def _daily_checks(
    rows: _Rows,
    stamps: _Stamps,
    readings: _Readings,
    day: _Days,
    site: Site,
    *,
    role: str,
    units: str,
    sparse: bool,
    resolution: float | None,
) -> None:
    """Step 8: gaps, flat-lines (stuck sensor) on state series, implausible units."""
    add, status, key, kind = rows.add, rows.status, rows.key, ROLE_KINDS[role]
    t_ns, nat = stamps.t_ns, stamps.nat
    r_ns, keep = readings.r_ns, readings.keep
    index, days, full, flags = day.index, day.days, day.full, day.flags
    # gaps: days without any row in the file (days whose rows were rejected are reported by
    # the rejection findings, low-coverage days by their own)
    row_days = np.floor_divide(t_ns[~nat], _NS_PER_DAY) - days.min()
    row_days = row_days[(row_days >= 0) & (row_days < len(index))]
    gap_mask = np.ones(len(index), dtype=bool)
    gap_mask[row_days] = False
    for a, b in qa.runs(gap_mask & (not sparse)):
        add(
            "gap",
            index[a].date().isoformat(),
            index[b - 1].date().isoformat(),
            b - a,
            "left missing",
            "days without any reading in the file",
        )
    if role in qa.STATE_ROLES:
        finite = full[np.isfinite(full)]
        tol = 1e-9 * max(1.0, float(np.median(np.abs(finite)))) if finite.size else 0.0
        for a, b in qa.flatlines(full, site.qa.flatline_days, tol):
            # the first value of the run is the last good reading; the repeats are doubtful
            a1 = a + 1
            flags[a1:b] = True
            row_day = np.floor_divide(r_ns, _NS_PER_DAY) - days.min()
            picked = keep[(row_day >= a1) & (row_day < b)]
            status[picked] = np.where(status[picked] == _USED, _FLAGGED, status[picked])
            add(
                "flatline",
                index[a1].date().isoformat(),
                index[b - 1].date().isoformat(),
                b - a1,
                "kept, flagged",
                f"{b - a} identical daily values ({full[a]:.6g} {INTERNAL_UNITS[kind]}) from "
                f"{index[a].date().isoformat()}: stuck sensor? the repeats are flagged",
            )
    if role in qa.STATE_ROLES and role == "stage":
        # shorter runs of repeats that end with a catch-up step: a sensor stuck while the lake
        # moved (the flags then weigh them against the balance)
        res = resolution or 0.0
        for a, b in qa.stuck_runs(full, site.qa.stuck_days, res):
            if b - a >= site.qa.flatline_days:
                continue  # already a flat-line
            add(
                "stuck",
                index[a + 1].date().isoformat(),
                index[b - 1].date().isoformat(),
                b - a - 1,
                "kept",
                f"{b - a} identical daily values ({full[a]:.6g} {INTERNAL_UNITS[kind]}) from "
                f"{index[a].date().isoformat()}, then a step of {full[b] - full[a]:+.3g} "
                f"{INTERNAL_UNITS[kind]} on {index[b].date().isoformat()}: stuck sensor?",
            )
    reason = qa.implausible_units(role, full)
    if not reason:
        from ..unitcheck import intended_unit

        reason = intended_unit(role, full, units)
        if reason:
            import warnings

            from ..errors import DataQualityWarning

            warnings.warn(f"{key}: {reason}", DataQualityWarning, stacklevel=2)
    if reason:
        add(
            "implausible_units",
            index[0].date().isoformat(),
            index[-1].date().isoformat(),
            int(np.isfinite(full).sum()),
            "none",
            f"declared {units!r}: {reason}",
        )


def _apply_corrections(
    rows: _Rows, day: _Days, site: Site, sub: pd.Series | None, *, sparse: bool, kind: str
) -> pd.Series | None:
    """Step 9: the site file's accepted corrections of this series; returns the sub-daily
    readings with them applied (the daily values are corrected in place)."""
    import pandas as pd

    add, key, index, full = rows.add, rows.key, day.index, day.full
    for corr in site.correction:
        if corr.series != key:
            continue
        start = pd.Timestamp(corr.start) if corr.start else index[0]
        end = pd.Timestamp(corr.end) if corr.end else index[-1]
        span = (index >= start) & (index <= end)
        full = np.where(span & np.isfinite(full), full + correction_values(corr, index), full)
        if sub is not None and not sparse:
            in_span = (sub.index >= start) & (sub.index < end + pd.Timedelta(days=1))
            sub = sub.where(~in_span, sub + correction_values(corr, sub.index))
        add(
            "correction",
            start.date().isoformat(),
            end.date().isoformat(),
            int((span & np.isfinite(full)).sum()),
            "applied",
            f"{corr.kind} {corr.value:+.6g}"
            + (f" to {corr.end_value:+.6g}" if corr.kind == "drift" else "")
            + f" {INTERNAL_UNITS[kind]}"
            + (f": {corr.reason}" if corr.reason else ""),
        )
    day.full = full
    return sub


def _loaded(
    rows: _Rows,
    day: _Days,
    spec: SeriesSpec,
    *,
    role: str,
    units: str,
    statistic: str,
    sub: pd.Series | None,
) -> LoadedSeries:
    """The series read: daily values, flags, findings and the row accounting."""
    import pandas as pd

    key, file, status, n = rows.key, rows.file, rows.status, len(rows.lines)
    index, full, flags, kind = day.index, day.full, day.flags, ROLE_KINDS[role]
    daily = pd.Series(full, index=index, name=key)
    used = int(np.count_nonzero(status == _USED))
    flagged_rows = int(np.count_nonzero(status == _FLAGGED))
    rejected = int(np.count_nonzero(status == _REJECTED))
    account = RowAccount(key, file, n, used, flagged_rows, rejected)
    has = np.flatnonzero(np.isfinite(full))
    info = SeriesInfo(
        key=key,
        role=role,
        name=spec.name or key,
        file=file,
        declared_units=units,
        internal_units=INTERNAL_UNITS[kind] + ("/day" if kind == "depth" else ""),
        statistic=statistic,
        first=index[has[0]].date().isoformat() if has.size else None,
        last=index[has[-1]].date().isoformat() if has.size else None,
        days=int(has[-1] - has[0] + 1) if has.size else 0,
        missing=int(np.isnan(full[has[0] : has[-1] + 1]).sum()) if has.size else 0,
        flagged=int(flags.sum()),
        rejected=rejected,
    )
    return LoadedSeries(
        info=info,
        daily=daily,
        flags=pd.Series(flags, index=index, name=key),
        findings=tuple(rows.findings),
        account=account,
        subdaily=sub,
    )


def _why_none(findings: list[Finding], example: str | None) -> str:
    """Why a file gave no usable reading, from its findings and the first value that is not a
    number (empty string when nothing says)."""
    import re

    rejected = [f for f in findings if f.action == "rejected" and f.count]
    if not rejected:
        return ""
    counts: dict[str, int] = {}
    for f in rejected:
        counts[f.kind] = counts.get(f.kind, 0) + f.count
    kind = max(counts, key=counts.__getitem__)
    text = f": {counts[kind]} row(s) rejected as {kind.replace('_', ' ')}"
    if kind == "non_numeric" and example is not None:
        text += f", e.g. {example!r}"
        if re.fullmatch(r"[-+]?\d*,\d+", example):
            text += " (a decimal comma? set decimal = ',')"
    return text


def _warn_coarse(what: str, file: str, every_days: float, amount: bool) -> None:
    """Warn that readings several days apart are not spread over the days between them."""
    import warnings

    from ..errors import DataQualityWarning

    if amount:
        effect = (
            "each reading is taken as the amount of its own day; a total over several days is "
            "not spread over them (give daily amounts)"
        )
    else:
        effect = "each reading is its own day's value and the days between are missing"
    warnings.warn(
        f"{what}: readings about every {every_days:.3g} days ({file}): {effect}",
        DataQualityWarning,
        stacklevel=3,
    )
