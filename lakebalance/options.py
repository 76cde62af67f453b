"""Options objects: small frozen dataclasses whose fields declare their unit and valid range once.

Each step keeps its options next to its code (``FlagOptions`` in :mod:`lakebalance.flags`,
``SeepageOptions`` in :mod:`lakebalance.seepage`, ...). A field is declared with :func:`setting`,
which records its unit and range in the field's metadata; :class:`Options` checks every field when
the object is made, so the Python API raises a :class:`~lakebalance.errors.OptionError` (a
``ValueError``) that names the option, and the site-file loader turns the same error into one with
the file and the line of the key.

Example
-------
>>> from dataclasses import dataclass
>>> @dataclass(frozen=True)
... class SmoothingOptions(Options):
...     window: int = setting(7, unit="days", low=1)
>>> SmoothingOptions(window=0)
Traceback (most recent call last):
...
lakebalance.errors.OptionError: 'window' must be at least 1 (days), got 0
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from typing import Any

from .errors import OptionError

__all__ = ["setting", "Options", "check_ranges", "describe_option", "iso_date"]

_MISSING = dataclasses.MISSING


def setting(
    default: Any = _MISSING,
    *,
    unit: str = "-",
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
    high_open: bool = False,
    rule: Callable[[Any], str | None] | None = None,
    default_factory: Any = _MISSING,
) -> Any:
    """A dataclass field that declares its unit and its valid range.

    Parameters
    ----------
    default, default_factory
        As for :func:`dataclasses.field`.
    unit : str
        The unit of the value as the site file and the Python API take it (``"-"`` when
        dimensionless, ``"days"``, ``"m"``, ``"m3/s"``, ...).
    low, high : float, optional
        Inclusive bounds (exclusive with ``low_open`` / ``high_open``). A list value is checked
        element by element; ``None`` (an unset optional value) is never checked.
    rule : callable, optional
        Extra check: returns a message (completing "'name' must ...") or None when the value is
        valid.
    """
    meta = {
        "unit": unit,
        "low": low,
        "high": high,
        "low_open": low_open,
        "high_open": high_open,
        "rule": rule,
    }
    if default_factory is not _MISSING:
        return dataclasses.field(default_factory=default_factory, metadata=meta)
    if default is _MISSING:
        return dataclasses.field(metadata=meta)
    return dataclasses.field(default=default, metadata=meta)


def iso_date(value: str | None) -> str | None:
    """Rule for a date option: None or an ISO date (``YYYY-MM-DD``, a time after it allowed);
    else what it must be."""
    import datetime as _dt

    if value is None:
        return None
    try:
        _dt.date.fromisoformat(str(value)[:10])
    except ValueError:
        return "be an ISO date (YYYY-MM-DD)"
    return None


def _num(x: float) -> str:
    """A bound in words: whole numbers of five digits or more with thousands separators."""
    if float(x).is_integer() and abs(x) >= 10_000:
        return f"{int(x):,}"
    return f"{x:g}"


def _range_text(meta: dict) -> str:
    lo, hi = meta.get("low"), meta.get("high")
    lo_word = "above" if meta.get("low_open") else "at least"
    hi_word = "below" if meta.get("high_open") else "at most"
    if lo is not None and hi is not None:
        if not meta.get("low_open") and not meta.get("high_open"):
            return f"between {_num(lo)} and {_num(hi)}"
        left = "(" if meta.get("low_open") else "["
        right = ")" if meta.get("high_open") else "]"
        return f"in {left}{_num(lo)}, {_num(hi)}{right}"
    if lo is not None:
        return f"{lo_word} {_num(lo)}"
    if hi is not None:
        return f"{hi_word} {_num(hi)}"
    return ""


def describe_option(f: dataclasses.Field) -> tuple[str, str]:
    """``(unit, range in words)`` of an options field (empty strings when undeclared)."""
    meta = dict(f.metadata)
    return str(meta.get("unit", "")), _range_text(meta)


def _out_of_range(value: float, meta: dict) -> bool:
    lo, hi = meta.get("low"), meta.get("high")
    if isinstance(value, float) and not math.isfinite(value):
        return True
    if lo is not None and (value <= lo if meta.get("low_open") else value < lo):
        return True
    if hi is not None and (value >= hi if meta.get("high_open") else value > hi):
        return True
    return False


def check_ranges(obj: Any) -> None:
    """Check every declared field of the dataclass ``obj``; raise :class:`OptionError` on the first
    value out of range."""
    for f in dataclasses.fields(obj):
        meta = f.metadata
        if not meta or "unit" not in meta:
            continue
        value = getattr(obj, f.name)
        if value is None:
            continue
        values = value if isinstance(value, list | tuple) else [value]
        unit = meta.get("unit") or "-"
        unit_text = "" if unit == "-" else f" ({unit})"
        for v in values:
            if isinstance(v, bool) or not isinstance(v, int | float):
                continue
            if _out_of_range(v, meta):
                raise OptionError(
                    f.name, f"'{f.name}' must be {_range_text(meta)}{unit_text}, got {v!r}"
                )
        rule = meta.get("rule")
        if rule is not None:
            problem = rule(value)
            if problem:
                raise OptionError(f.name, f"'{f.name}' must {problem}, got {value!r}")


class Options:
    """Mixin of the options dataclasses: declared ranges are checked when the object is made."""

    def __post_init__(self) -> None:
        check_ranges(self)
