"""Timestamps of gauge files: parsing (ISO, a declared format, day-first) and the site's day boundary.

A reading belongs to the local calendar day of the site's ``timezone``. Zone-aware timestamps
(``2021-03-04T10:00:00+02:00``, ``...Z``) are converted to that zone; naive ones are taken to be in
``source_timezone`` (default: the site's zone) and converted likewise. The result is naive local
time of the site, which is what the daily index is made of.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ConfigError

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = ["parse_timestamps", "to_site_time", "resolve_day_order"]

_DMY = re.compile(r"^\s*(\d{1,2})[./\-](\d{1,2})[./\-](\d{2,4})(?!\d)")


def resolve_day_order(
    cells: object,
    declared: bool | None,
    *,
    key: str,
    file: object = None,
    lines: object = None,
    column: object = None,
) -> tuple[bool, str | None]:
    """The day/month order of numeric dates such as ``03/04/2021``, declared or inferred.

    A first field above 12 can only be a day, a second field above 12 only a day too. When the
    order is not declared it is inferred from the cells; when it is declared and a cell
    contradicts it, reading stops (a third of the rows rejected and the rest silently misread is
    what a wrong order does otherwise).

    Parameters
    ----------
    cells : array-like
        The date cells (strings; other cells are ignored).
    declared : bool or None
        ``dayfirst`` from the site file, or None when not given.
    key : str
        The site-file key that sets the order, for messages (e.g. ``"[series.stage] dayfirst"``).
    file, lines, column
        Where the cells come from (``lines``: 1-based line of each cell), for the error.

    Returns
    -------
    dayfirst : bool
        The order to read with.
    note : str or None
        What was inferred, or that the order could not be told and was taken month first, in
        words (None when the order was declared, or no cell is a numeric day/month date).

    Raises
    ------
    InputError
        A declared order that a cell contradicts, or cells of both orders.
    """
    import pandas as pd

    from ..errors import InputError

    s = pd.Series(cells).reset_index(drop=True)
    text = s[s.map(lambda v: isinstance(v, str))].astype(str)
    if text.empty:
        return bool(declared), None
    parts = text.str.extract(_DMY)
    ok = parts[0].notna()
    if not ok.any():
        return bool(declared), None
    first = parts.loc[ok, 0].astype(int)
    second = parts.loc[ok, 1].astype(int)
    day_first_rows = first.index[first > 12]
    month_first_rows = second.index[second > 12]

    def where(i: int) -> dict:
        line = None
        if lines is not None:
            line = int(np.asarray(lines)[i])
        return {"file": file, "line": line, "column": column}

    if len(day_first_rows) and len(month_first_rows):
        i, j = int(day_first_rows[0]), int(month_first_rows[0])
        raise InputError(
            f"dates of both day/month orders: {text[i]!r} is day first, {text[j]!r} month "
            f"first; make the file consistent, or give 'format'",
            **where(max(i, j)),
        )
    if declared is None:
        if len(day_first_rows):
            i = int(day_first_rows[0])
            return True, (
                f"day/month order not declared; read day first, as {text[i].strip()!r} shows "
                f"(set {key} = true to state it)"
            )
        if len(month_first_rows):
            i = int(month_first_rows[0])
            return False, (
                f"day/month order not declared; read month first, as {text[i].strip()!r} shows "
                f"(set {key} = false to state it)"
            )
        i = int(first.index[0])
        return False, (
            f"day/month order not declared and not told by the dates (no field above 12, e.g. "
            f"{text[i].strip()!r}); read month first: set {key} to state it"
        )
    if declared is False and len(day_first_rows):
        i = int(day_first_rows[0])
        raise InputError(
            f"{text[i].strip()!r} cannot be month first ({int(first[i])} is not a month) but the "
            f"dates are declared month first; set {key} = true",
            **where(i),
        )
    if declared is True and len(month_first_rows):
        i = int(month_first_rows[0])
        raise InputError(
            f"{text[i].strip()!r} cannot be day first ({int(second[i])} is not a month) but the "
            f"dates are declared day first; set {key} = false",
            **where(i),
        )
    return bool(declared), None


_AWARE = re.compile(r"(?:[zZ]|[+-]\d\d:?\d\d)\s*$")
_ISO_START = re.compile(r"^\s*\d{4}-\d{1,2}-\d{1,2}")


def _sample(strings: pd.Series, n: int = 200) -> list[str]:
    nonnull = strings.dropna()
    if len(nonnull) <= 2 * n:
        return list(nonnull)
    return list(nonnull.iloc[:n]) + list(nonnull.iloc[-n:])


def parse_timestamps(
    values: object,
    *,
    format: str | None = None,
    dayfirst: bool = False,
    time: object | None = None,
    timezone: str = "UTC",
    source_timezone: str | None = None,
    absolute: bool = False,
) -> tuple[pd.DatetimeIndex, np.ndarray] | tuple[pd.DatetimeIndex, np.ndarray, pd.DatetimeIndex]:
    """Parse date (and optional time-of-day) cells to naive timestamps on the site's clock.

    Parameters
    ----------
    values : array-like
        Date or date-time cells: strings, or datetime objects (spreadsheets).
    format : str, optional
        ``strftime`` format of the strings (of date and time joined by one space when ``time`` is
        given). Without it ISO 8601 is tried first, then a format inferred from the cells with
        ``dayfirst``.
    dayfirst : bool
        ``03/04/2021`` is 3 April when True, 4 March when False.
    time : array-like, optional
        Time-of-day cells of a separate column.
    timezone : str
        IANA zone of the site (its midnight bounds a day).
    source_timezone : str, optional
        IANA zone of naive timestamps (default: ``timezone``).
    absolute : bool
        Also return a clock without daylight-saving jumps, for ordering readings and finding
        repeated ones.

    Returns
    -------
    timestamps : pandas.DatetimeIndex
        Naive local time of the site; NaT where a cell does not parse.
    bad : numpy.ndarray of bool
        True where a non-empty cell did not parse.
    ordering : pandas.DatetimeIndex
        Only with ``absolute``: naive UTC for cells with an offset and for naive cells of another
        ``source_timezone``; for naive cells on the site's clock, UTC with the repeated autumn
        hour told apart by the order of the rows, or the site's local time when the order does
        not tell.

    Notes
    -----
    Daylight-saving ambiguities of naive timestamps in a zone other than the site's are resolved
    as standard time, and non-existent times are shifted forward (common practice, no source).
    """
    import pandas as pd

    s = pd.Series(values) if not isinstance(values, pd.Series) else values.reset_index(drop=True)
    if time is not None:
        t = pd.Series(time).reset_index(drop=True)
        if t.dtype == object:
            t = t.map(lambda v: v.isoformat() if hasattr(v, "isoformat") else v)
        d = s
        if pd.api.types.is_datetime64_any_dtype(d) or d.map(type).eq(pd.Timestamp).any():
            d = pd.to_datetime(d, errors="coerce").dt.strftime("%Y-%m-%d")
        elif d.dtype == object:
            d = d.map(lambda v: v.date().isoformat() if hasattr(v, "date") else v)
        s = d.astype("string").str.strip() + " " + t.astype("string").str.strip()
    empty = s.isna().to_numpy()
    if pd.api.types.is_datetime64_any_dtype(s):
        parsed = pd.DatetimeIndex(s)
    else:
        if s.dtype != object:
            s = s.astype(object).where(~pd.Series(empty)).map(str, na_action="ignore")
        sample = _sample(s)
        if any(hasattr(v, "year") for v in sample):  # spreadsheet datetimes
            parsed = pd.DatetimeIndex(
                pd.to_datetime(s.map(_cell_text, na_action="ignore"), errors="coerce")
            )
        else:
            if any(isinstance(v, str) and v != v.strip() for v in sample) or any(
                isinstance(v, str) and not v.strip() for v in sample
            ):
                s = s.str.strip().replace("", np.nan)
                empty = s.isna().to_numpy()
                sample = _sample(s)
            aware = any(_AWARE.search(str(v)) for v in sample)
            if format is not None:
                parsed = pd.DatetimeIndex(
                    pd.to_datetime(s, format=format, errors="coerce", utc=aware)
                )
            else:
                parsed = None
                iso = sum(bool(_ISO_START.match(str(v))) for v in sample)
                if sample and iso >= 0.5 * len(sample):
                    parsed = pd.DatetimeIndex(
                        pd.to_datetime(s, format="ISO8601", errors="coerce", utc=aware)
                    )
                if parsed is None or parsed.isna().sum() > empty.sum() + 0.5 * (~empty).sum():
                    import warnings

                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        parsed = pd.DatetimeIndex(
                            pd.to_datetime(s, dayfirst=dayfirst, errors="coerce", utc=aware)
                        )
    parsed = _within_clock_range(parsed)
    bad = np.asarray(parsed.isna()) & ~empty
    local = to_site_time(parsed, timezone, source_timezone).as_unit("ns")
    if not absolute:
        return local, bad
    return local, bad, _ordering_clock(parsed, local, timezone, source_timezone)


# Timestamps the daily index can hold (nanosecond clock), with a day of margin for the
# conversion to the site's zone: a cell such as "-11" that a parser reads as the year -11 is a
# date that did not parse, not a reading from antiquity.
_EARLIEST = "1677-09-23"
_LATEST = "2262-04-10"


def _within_clock_range(parsed: pd.DatetimeIndex) -> pd.DatetimeIndex:
    """``parsed`` with timestamps outside the nanosecond clock's range set to NaT."""
    import pandas as pd

    idx = pd.DatetimeIndex(parsed)
    if len(idx) == 0:
        return idx
    naive = idx.tz_localize(None) if idx.tz is not None else idx
    low, high = pd.Timestamp(_EARLIEST), pd.Timestamp(_LATEST)
    outside = np.asarray((naive < low) | (naive > high))
    if not outside.any():
        return idx
    return idx.where(~outside)


def _ordering_clock(
    parsed: pd.DatetimeIndex, local: pd.DatetimeIndex, timezone: str, source_timezone: str | None
) -> pd.DatetimeIndex:
    """Naive UTC where the cells fix the instant (an offset, or another source zone), else the
    site's local time (see :func:`parse_timestamps`)."""
    import pandas as pd

    idx = pd.DatetimeIndex(parsed)
    if idx.tz is not None:
        return idx.tz_convert("UTC").tz_localize(None).as_unit("ns")
    if source_timezone and source_timezone != timezone:
        aware = idx.tz_localize(
            source_timezone,
            ambiguous=np.zeros(len(idx), dtype=bool),
            nonexistent="shift_forward",
        )
        return aware.tz_convert("UTC").tz_localize(None).as_unit("ns")
    try:
        # A logger on local wall time writes the autumn hour twice, in order: 'infer' tells the
        # two apart from that order (it raises when it cannot, e.g. rows out of order).
        aware = idx.tz_localize(timezone, ambiguous="infer", nonexistent="shift_forward")
    except Exception:  # pytz/zoneinfo raise several types for an ambiguity left unresolved
        return local
    return aware.tz_convert("UTC").tz_localize(None).as_unit("ns")


def _cell_text(v: object) -> object:
    """A spreadsheet cell as something :func:`pandas.to_datetime` reads (datetimes pass)."""
    return v if hasattr(v, "year") else str(v)


def to_site_time(
    timestamps: pd.DatetimeIndex, timezone: str, source_timezone: str | None = None
) -> pd.DatetimeIndex:
    """Naive local time of ``timezone`` for aware or naive (``source_timezone``) timestamps."""
    import pandas as pd

    idx = pd.DatetimeIndex(timestamps)
    try:
        if idx.tz is not None:
            return idx.tz_convert(timezone).tz_localize(None)
        if source_timezone and source_timezone != timezone:
            local = idx.tz_localize(
                source_timezone,
                ambiguous=np.zeros(len(idx), dtype=bool),
                nonexistent="shift_forward",
            )
            return local.tz_convert(timezone).tz_localize(None)
    except Exception as exc:  # unknown zone names come from zoneinfo/pytz with several types
        if "zone" in str(exc).lower() or "tz" in str(exc).lower():
            raise ConfigError(
                f"unknown time zone ({exc}); use an IANA name such as 'Europe/Paris'"
            ) from None
        raise
    return idx
