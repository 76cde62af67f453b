"""The site file (TOML) and the frozen :class:`Site` it becomes.

Each section of the site file is a frozen dataclass below; its fields *are* the schema. A generic
validator reads the type hints, so that every key is checked the same way: an unknown key is an
error that names the file, the line and the nearest valid key; a wrong type or a missing required
key is an error too. Paths are relative to the site file. See ``docs/site-file.md``.

Quantities that carry a unit in the site file can be written as a number in the documented unit,
or as a string with its own unit (``spill = "41.2 ft"``); :func:`quantity` converts them.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import math
import os
import re
import tomllib
import types
import typing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal, get_args, get_origin

from .balance import UncertaintyOptions
from .drawdown.options import DemandRule, DrawdownOptions
from .errors import ConfigError, OptionError, UnitError, suggest
from .evaporation.options import EvaporationOptions
from .fieldchecks import FieldCheckOptions
from .flags import FlagOptions
from .operations import OperatingRules
from .options import Options, setting
from .outlet.options import OutletComponent, OutletOptions
from .outlet.periods import RatingPeriod
from .periods import Period
from .qa import QAOptions
from .records import Correction
from .report.options import ReportOptions
from .seepage import SeepageOptions
from .storage import DatedSurvey, StorageOptions
from .vocabulary import SERIES_ROLES

__all__ = [
    "SiteInfo",
    "SeriesSpec",
    "StorageOptions",
    "DatedSurvey",
    "OutletComponent",
    "OutletOptions",
    "RatingPeriod",
    "UncertaintyOptions",
    "EvaporationOptions",
    "QAOptions",
    "FlagOptions",
    "SeepageOptions",
    "DemandRule",
    "DrawdownOptions",
    "Correction",
    "Period",
    "FieldCheckOptions",
    "ReportOptions",
    "Site",
    "SERIES_ROLES",
    "load_site",
    "parse_site",
]


Statistic = Literal["mean", "sum", "min", "max", "first", "last", "median"]


# --------------------------------------------------------------------------------------------
# Sections
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SiteInfo(Options):
    """``[site]``: where the lake is and how its days and years are counted."""

    name: str
    latitude: float | None = setting(None, unit="degrees north", low=-90.0, high=90.0)
    longitude: float | None = setting(None, unit="degrees east", low=-180.0, high=360.0)
    elevation: float | None = setting(None, unit="m", low=-500.0, high=9000.0)  # air pressure
    # first month of the reporting year (1 = calendar year)
    water_year_start: int = setting(1, unit="month", low=1, high=12)
    timezone: str = "UTC"  # IANA zone whose midnight bounds a day
    # seed for every random draw unless the command line gives one (numpy takes 0 to 2**128-1)
    seed: int = setting(12345, unit="-", low=0)


def _thousands_rule(value: str) -> str | None:
    allowed = (",", ".", " ", "'", "\u00a0", "\u202f")
    if value in allowed:
        return None
    return "be one of ',', '.', ' ', \"'\" (or a no-break space)"


@dataclass(frozen=True)
class SeriesSpec(Options):
    """``[series.<role>]`` or ``[[series.<role>]]``: one gauge series in one file."""

    file: Path
    units: str
    value: str = "value"  # column holding the values (name, or 1-based number as a string)
    date: str = "date"  # column holding the timestamps
    time: str | None = None  # optional separate time-of-day column
    name: str | None = None  # label when a role has several series (default: file stem)
    format: str | None = None  # strftime format of the dates, e.g. "%d/%m/%Y %H:%M"
    # 03/04/2020 is 3 April when true; inferred from the dates when absent (a field above 12)
    dayfirst: bool | None = None
    delimiter: str | None = None  # CSV field delimiter (sniffed when absent)
    decimal: str = "."  # decimal mark ("," for decimal comma)
    # thousands separator of the numbers ("," "." " " or "'"); none when absent
    thousands: str | None = setting(None, rule=_thousands_rule)
    encoding: str | None = None  # text encoding (UTF-8 or a byte-order mark when absent)
    sheet: str | None = None  # Excel sheet name (first sheet when absent)
    statistic: Statistic | None = None  # how sub-daily readings make a day (default by role)
    source_timezone: str | None = None  # zone of naive timestamps (default: the site's zone)
    # share of a day's expected readings needed for a daily value
    coverage: float = setting(0.8, unit="-", low=0.0, high=1.0)
    # gauge resolution in the series' units (stage: for QA/uncertainty)
    resolution: float | None = setting(None, unit="series unit", low=0.0, low_open=True)
    role: str = ""  # filled in from the table name; not written by users
    key: str = ""  # column name in Records.daily; filled in

    def __post_init__(self) -> None:
        super().__post_init__()
        if self.thousands is not None and self.thousands == self.decimal:
            raise OptionError(
                "thousands",
                f"'thousands' = {self.thousands!r} is also the decimal mark; a number could not "
                "be read from it unambiguously",
            )


@dataclass(frozen=True)
class Site:
    """A validated site file. Built by :func:`load_site`; paths are absolute."""

    path: Path  # the site file
    site: SiteInfo
    series: tuple[SeriesSpec, ...] = ()
    storage: StorageOptions | None = None
    outlet: OutletOptions | None = None
    levels: dict[str, float] = field(default_factory=dict)  # name -> stage, m
    uncertainty: UncertaintyOptions = field(default_factory=UncertaintyOptions)
    evaporation: EvaporationOptions = field(default_factory=EvaporationOptions)
    qa: QAOptions = field(default_factory=QAOptions)
    flags: FlagOptions = field(default_factory=FlagOptions)
    seepage: SeepageOptions = field(default_factory=SeepageOptions)
    drawdown: DrawdownOptions = field(default_factory=DrawdownOptions)
    operations: OperatingRules = field(default_factory=OperatingRules)
    correction: tuple[Correction, ...] = ()
    period: tuple[Period, ...] = ()  # [[period]]: ice and offset periods (lakebalance.periods)
    field_checks: FieldCheckOptions = field(default_factory=FieldCheckOptions)
    report: ReportOptions = field(default_factory=ReportOptions)

    @property
    def base_dir(self) -> Path:
        """Folder of the site file (relative paths are resolved against it)."""
        return self.path.parent

    def series_of(self, role: str) -> tuple[SeriesSpec, ...]:
        """The series declared for ``role`` (empty when none)."""
        return tuple(s for s in self.series if s.role == role)


# --------------------------------------------------------------------------------------------
# Generic validation
# --------------------------------------------------------------------------------------------
_TOP_SECTIONS = {
    "site": SiteInfo,
    "storage": StorageOptions,
    "outlet": OutletOptions,
    "uncertainty": UncertaintyOptions,
    "evaporation": EvaporationOptions,
    "qa": QAOptions,
    "flags": FlagOptions,
    "seepage": SeepageOptions,
    "drawdown": DrawdownOptions,
    "field_checks": FieldCheckOptions,
    "operations": OperatingRules,
    "report": ReportOptions,
}
_INTERNAL_FIELDS = {"role", "key"}


class _Ctx:
    def __init__(self, path: Path, text: str) -> None:
        self.path = path
        self.lines = text.splitlines()

    def line_of(self, where: str, key: str | None = None) -> int | None:
        """Best-effort line of ``key`` inside table ``where`` (dotted), or of the table header."""
        parts = [p for p in re.split(r"\.|\[\d+\]", where) if p]
        header = None
        pat = r"^\s*\[\[?\s*" + r"\s*\.\s*".join(map(re.escape, parts)) + r"\s*\]\]?\s*(#.*)?$"
        # the n-th table of an array of tables ("name[n]" at the end of where)
        nth = re.search(r"\[(\d+)\]$", where)
        skip = int(nth.group(1)) if nth else 0
        for i, ln in enumerate(self.lines):
            if parts and re.match(pat, ln):
                if skip:
                    skip -= 1
                    continue
                header = i
                if key is None:
                    return i + 1
                for j in range(i + 1, len(self.lines)):
                    if re.match(r"^\s*\[", self.lines[j]):
                        break
                    if re.match(rf"^\s*{re.escape(key)}\s*=", self.lines[j]):
                        return j + 1
        if key is not None:
            for i, ln in enumerate(self.lines):
                if re.match(rf"^\s*(\w+\.)*{re.escape(key)}\s*=", ln):
                    return i + 1
        if header is None and len(parts) > 1:  # a key of an inline table: the table's line
            return self.line_of(".".join(parts[:-1]), parts[-1])
        return None if header is None else header + 1

    def error(self, msg: str, where: str, key: str | None = None) -> ConfigError:
        return ConfigError(msg, file=self.path, line=self.line_of(where, key))


def site_key_line(site: Site, where: str, key: str | None = None) -> int | None:
    """Best-effort line of ``key`` in table ``where`` (dotted, e.g. ``"outlet"``) of the site
    file, for an error found after loading (None when the file cannot be read again)."""
    try:
        text = site.path.read_text(encoding="utf-8-sig")
    except OSError:
        return None
    return _Ctx(site.path, text).line_of(where, key)


def _type_name(tp: Any) -> str:
    origin = get_origin(tp)
    if tp is type(None):
        return "nothing"
    if origin is Literal:
        return " or ".join(repr(a) for a in get_args(tp))
    if origin in (typing.Union, types.UnionType):
        return " or ".join(_type_name(a) for a in get_args(tp) if a is not type(None))
    if origin in (list, tuple):
        return "a list"
    if origin is dict:
        return "a table"
    return {
        str: "a string",
        int: "a whole number",
        float: "a number",
        bool: "true or false",
        Path: "a file path",
    }.get(tp, getattr(tp, "__name__", str(tp)))


def _coerce(tp: Any, value: Any, ctx: _Ctx, where: str, key: str) -> Any:
    origin = get_origin(tp)
    full = f"{where}.{key}" if where else key
    if origin in (typing.Union, types.UnionType):
        errors = []
        for alt in get_args(tp):
            if alt is type(None):
                continue
            try:
                return _coerce(alt, value, ctx, where, key)
            except ConfigError as exc:
                errors.append(exc)
        if len(errors) == 1:  # one type and None: that type's own message
            raise errors[0]
        raise ctx.error(f"'{full}' must be {_type_name(tp)}, got {value!r}", where, key)
    if origin is Literal:
        allowed = get_args(tp)
        if value not in allowed:
            hint = suggest(str(value), [str(a) for a in allowed])
            raise ctx.error(
                f"'{full}' must be one of {', '.join(map(repr, allowed))}, got {value!r}{hint}",
                where,
                key,
            )
        return value
    if origin is tuple and dataclasses.is_dataclass(get_args(tp)[0]):
        item = get_args(tp)[0]
        if isinstance(value, dict):
            value = [value]
        if not isinstance(value, list):
            raise ctx.error(f"'{full}' must be a table or an array of tables", where, key)
        return tuple(_build(item, v, ctx, f"{full}[{i}]") for i, v in enumerate(value))
    if origin is list:
        (item,) = get_args(tp)
        if not isinstance(value, list):
            raise ctx.error(f"'{full}' must be a list, got {value!r}", where, key)
        return [_coerce(item, v, ctx, where, key) for v in value]
    if origin is dict:
        _, vt = get_args(tp)
        if not isinstance(value, dict):
            raise ctx.error(f"'{full}' must be a table, got {value!r}", where, key)
        return {str(k): _coerce(vt, v, ctx, full, str(k)) for k, v in value.items()}
    if dataclasses.is_dataclass(tp):
        return _build(tp, value, ctx, full)
    if tp is bool:
        if not isinstance(value, bool):
            raise ctx.error(f"'{full}' must be true or false, got {value!r}", where, key)
        return value
    if tp is int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise ctx.error(f"'{full}' must be a whole number, got {value!r}", where, key)
        return value
    if tp is float:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise ctx.error(f"'{full}' must be a number, got {value!r}", where, key)
        if not math.isfinite(value):  # TOML allows nan and inf; no key of ours means them
            raise ctx.error(f"'{full}' must be a finite number, got {value!r}", where, key)
        return float(value)
    if tp is str:
        if isinstance(value, _dt.date | _dt.datetime):
            return value.isoformat()
        if not isinstance(value, str):
            raise ctx.error(f"'{full}' must be a string, got {value!r}", where, key)
        return value
    if tp is Path:
        if not isinstance(value, str) or not value:
            raise ctx.error(f"'{full}' must be a file path, got {value!r}", where, key)
        p = Path(value).expanduser()
        # realpath, not resolve(): a symbolic-link loop is the reader's one-line error
        return p if p.is_absolute() else Path(os.path.realpath(ctx.path.parent / p))
    raise ctx.error(f"'{full}': unsupported type {tp!r}", where, key)  # pragma: no cover


def _build(cls: type, table: Any, ctx: _Ctx, where: str) -> Any:
    if not isinstance(table, dict):
        raise ctx.error(f"'{where}' must be a table, got {table!r}", where)
    hints = typing.get_type_hints(cls)
    fields = {f.name: f for f in dataclasses.fields(cls) if f.name not in _INTERNAL_FIELDS}
    if cls is Site:
        fields.pop("path", None)
    kwargs: dict[str, Any] = {}
    for key, value in table.items():
        if key not in fields:
            raise ctx.error(
                f"unknown key '{key}' in [{where}]{suggest(key, fields)}",
                where,
                key,
            )
        kwargs[key] = _coerce(hints[key], value, ctx, where, key)
    for name, f in fields.items():
        if (
            name not in kwargs
            and f.default is dataclasses.MISSING
            and f.default_factory is dataclasses.MISSING  # type: ignore[misc]
        ):
            raise ctx.error(f"missing required key '{name}' in [{where}]", where)
    try:
        return cls(**kwargs)
    except OptionError as exc:  # a declared range: an OptionError on the key's own line
        name = exc.option
        full = f"{where}.{name}" if where else name
        raise OptionError(
            name,
            exc.message.replace(f"'{name}'", f"'{full}'", 1),
            file=ctx.path,
            line=ctx.line_of(where, name),
        ) from None


def quantity(value: float | str, unit: str, kind: str, what: str) -> float:
    """A site-file number in ``unit``, or a string with its own unit, in the internal unit of ``kind``."""
    from .units import conversion

    if isinstance(value, int | float) and not isinstance(value, bool):
        if not math.isfinite(value):
            raise UnitError(f"{what}: expected a finite number, got {value!r}")
        return float(conversion(unit, kind, what).apply(float(value)))
    m = re.match(r"^\s*([-+]?\d*\.?\d+(?:[eE][-+]?\d+)?)\s*(.+?)\s*$", str(value))
    if not m:
        raise UnitError(f"{what}: expected a number with a unit, got {value!r}")
    return float(conversion(m.group(2), kind, what).apply(float(m.group(1))))


def parse_site(data: dict[str, Any], path: Path, text: str = "") -> Site:
    """Validate a parsed site-file table and build the :class:`Site` (paths resolved against ``path``)."""
    ctx = _Ctx(path, text)
    valid = [*_TOP_SECTIONS, "series", "levels", "correction", "period"]
    for key in data:
        if key not in valid:
            raise ctx.error(f"unknown section [{key}]{suggest(key, valid)}", key)
    if "site" not in data:
        raise ConfigError("missing required section [site]", file=path)
    kwargs: dict[str, Any] = {}
    for key, cls in _TOP_SECTIONS.items():
        if key in data:
            kwargs[key] = _build(cls, data[key], ctx, key)
    series: list[SeriesSpec] = []
    raw_series = data.get("series", {})
    if not isinstance(raw_series, dict):
        raise ctx.error("[series] must be a table of roles, e.g. [series.stage]", "series")
    for role, entries in raw_series.items():
        if role not in SERIES_ROLES:
            raise ctx.error(
                f"unknown series role '{role}'{suggest(role, SERIES_ROLES)}; roles are "
                + ", ".join(SERIES_ROLES),
                f"series.{role}",
            )
        items = entries if isinstance(entries, list) else [entries]
        specs = [
            _build(SeriesSpec, item, ctx, f"series.{role}" + (f"[{i}]" if len(items) > 1 else ""))
            for i, item in enumerate(items)
        ]
        names: set[str] = set()
        for spec in specs:
            name = spec.name or (spec.file.stem if len(specs) > 1 else role)
            if name in names:
                raise ctx.error(
                    f"two [[series.{role}]] share the name '{name}'; give each a distinct 'name'",
                    f"series.{role}",
                )
            names.add(name)
            key = role if len(specs) == 1 else f"{role}:{name}"
            series.append(dataclasses.replace(spec, role=role, key=key, name=name))
    if role_count := sum(1 for s in series if s.role == "stage"):
        if role_count > 1:
            raise ctx.error("only one stage series can be given", "series.stage")
    levels: dict[str, float] = {}
    raw_levels = data.get("levels", {})
    if not isinstance(raw_levels, dict):
        raise ctx.error("[levels] must be a table of name = stage", "levels")
    for name, value in raw_levels.items():
        if isinstance(value, bool) or not isinstance(value, int | float | str):
            raise ctx.error(
                f"level '{name}' must be a stage in m or a string like '41.2 ft'", "levels", name
            )
        try:
            levels[name] = quantity(value, "m", "length", f"levels.{name}")
        except UnitError as exc:
            raise ctx.error(exc.message, "levels", name) from None
    if "correction" in data:
        kwargs["correction"] = _coerce(
            tuple[Correction, ...], data["correction"], ctx, "", "correction"
        )
    if "period" in data:
        kwargs["period"] = _coerce(tuple[Period, ...], data["period"], ctx, "", "period")
        keys = [s.key for s in series]
        for i, p in enumerate(kwargs["period"]):
            if p.series not in keys:
                raise ctx.error(
                    f"[[period]] {p.describe()} names series {p.series!r}, which the site file "
                    f"does not declare{suggest(p.series, keys)}",
                    f"period[{i}]",
                    "series",
                )
    return Site(path=path, series=tuple(series), levels=levels, **kwargs)


def _check_nesting(text: str, path: Path) -> None:
    """Stop a site file whose arrays and inline tables nest deeper than
    :data:`~lakebalance.io.files.MAX_TOML_DEPTH` (TOML parsers recurse per level).

    Brackets and braces are counted outside strings and comments; a table header counts as
    its brackets, which close on the same line.
    """
    from .errors import LimitError
    from .io.files import MAX_TOML_DEPTH

    if text.count("[") + text.count("{") <= MAX_TOML_DEPTH:
        return
    depth = 0
    line = 1
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if c == "\n":
            line += 1
        elif c == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
            continue
        elif c in "\"'":
            quote = text[i : i + 3] if text[i : i + 3] in ('"""', "'''") else c
            j = i + len(quote)
            while j < n:
                if text[j] == "\\" and c == '"':
                    j += 2
                    continue
                if text.startswith(quote, j):
                    break
                if text[j] == "\n":
                    if len(quote) == 1:
                        break
                    line += 1
                j += 1
            i = j + len(quote)
            continue
        elif c in "[{":
            depth += 1
            if depth > MAX_TOML_DEPTH:
                raise LimitError(
                    f"arrays and tables nest deeper than {MAX_TOML_DEPTH} levels",
                    file=path,
                    line=line,
                )
        elif c in "]}":
            depth = max(0, depth - 1)
        i += 1


def load_site(path: str | Path) -> Site:
    """Read and validate a site file.

    Parameters
    ----------
    path : str or Path
        The TOML site file.

    Raises
    ------
    ConfigError
        When the file cannot be read, is not TOML, or does not follow the schema.
    LimitError
        Not a regular file (a FIFO, device or folder), over 10 MiB, or nesting arrays and inline
        tables deeper than 32 levels.
    """
    from .io.files import MAX_SITE_FILE_BYTES, read_input

    given = Path(path).expanduser()
    try:
        raw = read_input(given, "site file", limit=MAX_SITE_FILE_BYTES, error=ConfigError)
    except ConfigError as exc:  # missing, a link loop, no permission
        reason = exc.message.removeprefix("site file: ")
        raise ConfigError(f"cannot read site file ({reason})", file=exc.file) from None
    path = Path(os.path.realpath(given))
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise ConfigError(
            f"site file is not UTF-8 text (byte 0x{raw[exc.start]:02x})", file=path, line=line
        ) from None
    _check_nesting(text, path)
    try:
        data = tomllib.loads(text)
    except RecursionError:  # pragma: no cover - _check_nesting stops such files first
        raise ConfigError("the site file nests too deeply", file=path) from None
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+), column (\d+)", str(exc))
        line, col = (int(m.group(1)), int(m.group(2))) if m else (None, None)
        msg = re.sub(r"\s*\(at line \d+, column \d+\)", "", str(exc))
        raise ConfigError(f"not valid TOML: {msg}", file=path, line=line, column=col) from None
    return parse_site(data, path, text)
