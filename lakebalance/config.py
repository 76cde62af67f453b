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
import re
import tomllib
import types
import typing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal, get_args, get_origin

from .errors import ConfigError, UnitError, suggest

__all__ = [
    "SiteInfo",
    "SeriesSpec",
    "StorageOptions",
    "OutletComponent",
    "OutletOptions",
    "UncertaintyOptions",
    "EvaporationOptions",
    "QAOptions",
    "FlagOptions",
    "SeepageOptions",
    "DemandRule",
    "DrawdownOptions",
    "Correction",
    "ReportOptions",
    "Site",
    "SERIES_ROLES",
    "load_site",
    "parse_site",
]

SERIES_ROLES = (
    "stage",
    "inflow",
    "rain",
    "evaporation",
    "pan",
    "withdrawal",
    "release",
    "tmax",
    "tmin",
    "tmean",
    "rh",
    "rh_max",
    "rh_min",
    "dewpoint",
    "wind",
    "solar",
    "sunshine",
)

Statistic = Literal["mean", "sum", "min", "max", "first", "last", "median"]


# --------------------------------------------------------------------------------------------
# Sections
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SiteInfo:
    """``[site]``: where the lake is and how its days and years are counted."""

    name: str
    latitude: float | None = None  # decimal degrees, north positive
    longitude: float | None = None  # decimal degrees, east positive
    elevation: float | None = None  # m above sea level (for air pressure)
    water_year_start: int = 1  # first month of the reporting year (1 = calendar year)
    timezone: str = "UTC"  # IANA zone whose midnight bounds a day
    seed: int = 12345  # seed for every random draw unless the command line gives one


@dataclass(frozen=True)
class SeriesSpec:
    """``[series.<role>]`` or ``[[series.<role>]]``: one gauge series in one file."""

    file: Path
    units: str
    value: str = "value"  # column holding the values (name, or 1-based number as a string)
    date: str = "date"  # column holding the timestamps
    time: str | None = None  # optional separate time-of-day column
    name: str | None = None  # label when a role has several series (default: file stem)
    format: str | None = None  # strftime format of the dates, e.g. "%d/%m/%Y %H:%M"
    dayfirst: bool = False  # 03/04/2020 is 3 April when true
    delimiter: str | None = None  # CSV field delimiter (sniffed when absent)
    decimal: str = "."  # decimal mark ("," for decimal comma)
    encoding: str | None = None  # text encoding (sniffed when absent: BOM, utf-8, cp1252)
    sheet: str | None = None  # Excel sheet name (first sheet when absent)
    statistic: Statistic | None = None  # how sub-daily readings make a day (default by role)
    source_timezone: str | None = None  # zone of naive timestamps (default: the site's zone)
    coverage: float = 0.8  # share of a day's expected readings needed for a daily value (-)
    resolution: float | None = (
        None  # gauge resolution in the series' units (stage: for QA/uncertainty)
    )
    role: str = ""  # filled in from the table name; not written by users
    key: str = ""  # column name in Records.daily; filled in


@dataclass(frozen=True)
class StorageOptions:
    """``[storage]``: the stage-area-storage relation of the basin."""

    source: Literal["table", "contours", "outline"] = "table"
    file: Path | None = None  # table (CSV/XLSX) or vector layer (GPKG/SHP/GeoJSON)
    sheet: str | None = None  # Excel sheet of a table
    layer: str | None = None  # layer of a multi-layer vector file
    stage: str = "stage"  # table column of stage
    area: str = "area"  # table column of area
    volume: str | None = None  # table column of volume (integrated from area when absent)
    stage_units: str = "m"
    area_units: str = "m**2"
    volume_units: str = "m**3"
    elevation_field: str = "elevation"  # contour attribute holding the elevation
    elevation_units: str = "m"
    datum_offset: float = 0.0  # m; stage = elevation - datum_offset
    integration: Literal["prismoidal", "average_end_area"] = "prismoidal"
    below: Literal["error", "clamp", "extend"] = "clamp"  # policy below the lowest level
    above: Literal["error", "clamp", "extend"] = "extend"  # policy above the highest level
    max_depth: float | None = None  # m, outline source: depth from outline level to bottom
    shape_exponent: float = 1.0  # outline source: area(z) ∝ ((z - z_bottom)/depth)^p
    outline_stage: float | None = None  # m, outline source: stage of the outline shoreline
    bottom: float | None = None  # m, stage of the deepest point (area 0) below the lowest level
    volume_tolerance: float = 0.01  # (-) table volume vs integrated area: allowed share of range
    compare: Path | None = None  # a second survey (table or contour layer) to compare against
    delimiter: str | None = None  # CSV field delimiter of a table (sniffed when absent)
    decimal: str = "."  # decimal mark of a CSV table


@dataclass(frozen=True)
class OutletComponent:
    """``[[outlet.component]]``: one control of a compound outlet (acting in parallel)."""

    name: str
    form: Literal["power", "weir", "vnotch", "orifice"] = "power"
    fixed: dict[str, float] = field(default_factory=dict)  # parameter -> value (SI)
    initial: dict[str, float] = field(default_factory=dict)  # parameter -> starting value (SI)
    bounds: dict[str, list[float]] = field(default_factory=dict)  # parameter -> [lo, hi] (SI)
    length: float | None = None  # m, weir crest length (weir form)
    angle: float | None = None  # degrees, notch angle (vnotch form)
    upper: float | None = None  # m, segmented rating: this law applies up to this stage


@dataclass(frozen=True)
class OutletOptions:
    """``[outlet]``: gaugings and the control form of the outlet rating."""

    gaugings: Path | None = None  # CSV/XLSX of spot gaugings
    sheet: str | None = None
    date: str = "date"
    stage: str = "stage"
    discharge: str = "discharge"
    stage_units: str = "m"
    discharge_units: str = "m**3/s"
    delimiter: str | None = None
    decimal: str = "."
    dayfirst: bool = False
    form: Literal["power", "weir", "vnotch", "orifice", "compound", "segmented"] = "power"
    residuals: Literal["log", "linear"] = "log"
    weights: str | None = None  # optional gaugings column of weights
    fixed: dict[str, float] = field(
        default_factory=dict
    )  # single-law form: parameter -> value (SI)
    initial: dict[str, float] = field(default_factory=dict)
    bounds: dict[str, list[float]] = field(default_factory=dict)
    length: float | None = None  # m, weir crest length
    angle: float | None = None  # degrees, V-notch angle
    component: tuple[OutletComponent, ...] = ()  # compound/segmented controls
    shift_date: str | None = None  # ISO date for a before/after rating-shift test
    bootstrap: int = 0  # bootstrap refits for prediction intervals (0 = delta method only)


@dataclass(frozen=True)
class UncertaintyOptions:
    """``[uncertainty]``: relative (1-sigma) errors per term and Monte Carlo settings."""

    inflow: float | None = None  # relative error (-) of gauged inflows
    rain: float | None = None  # relative error (-) of rain depth
    evaporation: float | None = None  # relative error (-) of lake evaporation
    withdrawal: float | None = None  # relative error (-) of metered withdrawals
    release: float | None = None  # relative error (-) of metered releases
    stage_resolution: float | None = None  # m, resolution of the stage gauge
    area: float | None = None  # relative error (-) of the storage relation's area
    draws: int = 1000  # Monte Carlo draws
    systematic: float | None = None  # share (0-1) of a term's error variance lasting a water year
    boundary_rule: Literal["adjacent_mean", "fourth_order"] = (
        "adjacent_mean"  # day-boundary stage from daily means where no sub-daily record
    )


@dataclass(frozen=True)
class EvaporationOptions:
    """``[evaporation]``: which method makes lake evaporation, and its coefficients."""

    method: Literal["auto", "given", "pan", "penman", "priestley_taylor", "fao56", "hargreaves"] = (
        "auto"
    )
    pan_coefficient: float | list[float] = 0.7  # (-) constant or 12 monthly values
    albedo: float = 0.06  # (-) open water
    alpha: float = 1.26  # (-) Priestley-Taylor coefficient
    open_water_coefficient: float = 1.05  # (-) factor on FAO-56 reference ET
    wind_height: float = 2.0  # m, height of the wind measurement
    heat_storage_lag: float = 0.0  # days, first-order lag on available energy (0 = off)
    fill: Literal["climatology", "none"] = "climatology"  # missing weather days
    angstrom_a: float = 0.25  # (-) Angstrom a_s, solar radiation from sunshine (FAO-56 eq. 35)
    angstrom_b: float = 0.50  # (-) Angstrom b_s
    clip_negative: bool = True  # set negative computed evaporation (condensation) to 0


@dataclass(frozen=True)
class QAOptions:
    """``[qa]``: thresholds of the checks on raw series."""

    spike_window: int = 7  # readings in the rolling median window
    spike_threshold: float = 6.0  # robust z-score above which a reading is a spike
    flatline_days: int = 10  # identical consecutive daily values that make a flat-line
    spikes: Literal["flag", "remove"] = "flag"  # keep spikes (flagged) or set them missing


@dataclass(frozen=True)
class FlagOptions:
    """``[flags]``: detection of unexplained residuals."""

    outlier_threshold: float = 5.0  # robust z-score of an isolated outlier (-)
    outlier_window: int = 31  # days in the centred rolling median/MAD window
    spike_days: int = 3  # days within which a stage step that is undone counts as a spike
    penalty: float | None = None  # change-point penalty, (m³/d)² (default: BIC-like from the data)
    change_method: Literal["pelt", "binseg"] = "pelt"  # change-point search
    min_run_days: int = 14  # shortest persistent run or level-shift segment reported (days)
    run_threshold: float = 4.0  # z-score of a run's volume against the residual noise (-)
    min_run_effect: float = 0.5  # smallest mean departure of a run, in noise sigmas (-)
    cusum_slack: float = 0.5  # CUSUM reference value k, in noise standard deviations (-)
    cusum_threshold: float = 10.0  # CUSUM decision interval h, in noise standard deviations (-)
    drift_min_days: int = 180  # shortest segment tested for a linear drift (days)
    drift_alpha: float = 0.001  # significance level of the drift test (-)
    shift_stage_z: float = 2.0  # robust z of a mirrored stage step at a level change (-)


@dataclass(frozen=True)
class SeepageOptions:
    """``[seepage]``: net groundwater exchange estimated from the residual."""

    model: Literal["linear", "constant"] = "linear"
    start: str | None = None  # ISO date, first day used
    end: str | None = None  # ISO date, last day used
    max_rain: float = 0.0005  # m/d, days with more rain are not used
    rain_buffer: int = 1  # days before and after a rainy day also left out (-)
    exclude_spill: bool = True  # leave out days when the outlet spills
    exclude_flags: bool = True  # leave out flagged days


@dataclass(frozen=True)
class DemandRule:
    """``[[drawdown.restriction]]``: below ``trigger`` (m, stage) demand is cut by ``cut`` (-)."""

    trigger: float
    cut: float


@dataclass(frozen=True)
class DrawdownOptions:
    """``[drawdown]``: defaults of the drought forecast."""

    scenario: Literal["replay", "percentile", "stochastic", "constant"] = "replay"
    members: int = 1000
    days: int = 365
    percentile: float = 10.0  # % non-exceedance of inflow (percentile scenario)
    inflow: float = 0.0  # m³/s, constant scenario
    demand: float | list[float] | None = None  # m³/s, constant or 12 monthly values
    environmental_release: float = 0.0  # m³/s, minimum release kept while above dead level
    restriction: tuple[DemandRule, ...] = ()
    sample_uncertainty: bool = False  # draw rating and evaporation errors per member
    start: str | None = None  # ISO date of the start (default: last day with a recorded stage)
    start_stage: float | None = None  # m, stage at the start (default: recorded stage that day)
    stochastic: Literal["bootstrap", "ar1"] = "bootstrap"  # model of the stochastic scenario
    block_days: int = 30  # days, block length of the bootstrap
    dead_level: str | None = None  # [levels] name below which draws stop (default "dead")
    rating_variants: int = 200  # sampled ratings shared by the members (sample_uncertainty)
    seepage: bool = True  # include the seepage law estimated from the balance residual


@dataclass(frozen=True)
class Correction:
    """``[[correction]]``: a user-accepted correction of a series (e.g. a gauge datum shift)."""

    series: str  # series key, e.g. "stage"
    kind: Literal["offset"] = "offset"
    start: str = ""  # ISO date of the first corrected day
    end: str | None = None  # ISO date of the last corrected day (open when absent)
    value: float = 0.0  # in the series' internal unit (m for stage) added to the record
    reason: str = ""


@dataclass(frozen=True)
class ReportOptions:
    """``[report]``: annual report settings."""

    year: int | None = None  # water year to report (default: last complete one)
    title: str | None = None


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
    correction: tuple[Correction, ...] = ()
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
        for i, ln in enumerate(self.lines):
            if parts and re.match(pat, ln):
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
        return None if header is None else header + 1

    def error(self, msg: str, where: str, key: str | None = None) -> ConfigError:
        return ConfigError(msg, file=self.path, line=self.line_of(where, key))


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
        return p if p.is_absolute() else (ctx.path.parent / p).resolve()
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
    return cls(**kwargs)


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


#: Ranges of the [site] keys (inclusive), checked with the key's line.
_SITE_RANGES = {
    "latitude": (-90.0, 90.0, "decimal degrees, north positive"),
    "longitude": (-180.0, 360.0, "decimal degrees, east positive"),
    "water_year_start": (1, 12, "the first month of the reporting year"),
}


def _check_site_ranges(info: SiteInfo, ctx: _Ctx) -> None:
    for key, (lo, hi, meaning) in _SITE_RANGES.items():
        value = getattr(info, key)
        if value is not None and not lo <= value <= hi:
            raise ctx.error(
                f"'site.{key}' must be between {lo:g} and {hi:g} ({meaning}), got {value!r}",
                "site",
                key,
            )


def parse_site(data: dict[str, Any], path: Path, text: str = "") -> Site:
    """Validate a parsed site-file table and build the :class:`Site` (paths resolved against ``path``)."""
    ctx = _Ctx(path, text)
    valid = [*_TOP_SECTIONS, "series", "levels", "correction"]
    for key in data:
        if key not in valid:
            raise ctx.error(f"unknown section [{key}]{suggest(key, valid)}", key)
    if "site" not in data:
        raise ConfigError("missing required section [site]", file=path)
    kwargs: dict[str, Any] = {}
    for key, cls in _TOP_SECTIONS.items():
        if key in data:
            kwargs[key] = _build(cls, data[key], ctx, key)
    if "site" in kwargs:
        _check_site_ranges(kwargs["site"], ctx)
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
    return Site(path=path, series=tuple(series), levels=levels, **kwargs)


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
    """
    path = Path(path).expanduser().resolve()
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read site file ({exc.strerror})", file=path) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ConfigError("site file is not UTF-8 text", file=path) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+), column (\d+)", str(exc))
        line, col = (int(m.group(1)), int(m.group(2))) if m else (None, None)
        msg = re.sub(r"\s*\(at line \d+, column \d+\)", "", str(exc))
        raise ConfigError(f"not valid TOML: {msg}", file=path, line=line, column=col) from None
    return parse_site(data, path, text)
