"""Numbers for people: one formatting layer for every human output (CLI, HTML, PDF).

Machine outputs (CSV, JSON) keep full precision in SI with the unit in each name; what a person
reads goes through here, so that one report speaks one set of display units, with digits chosen
per quantity:

* stage and levels to the gauge resolution (1 mm gives three decimals in m);
* volumes, flows, areas and depths to 3 significant digits (4 when the value is large), with
  thousands separators, in a display unit chosen once per report (``SI`` or ``US`` customary);
* percentages whole, or to one decimal below 10 %;
* probabilities as "in 4 of 18 years" when they count cases, else a percentage with its basis.

Column names of the SI tables (``residual_p05_m3``) become headers in words with their display
unit (``residual, 5th percentile (thousand m³)``) through one mapping, :func:`header`.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Literal

from .units import from_si

__all__ = [
    "DisplayUnits",
    "SI",
    "US",
    "number",
    "quantity",
    "stage",
    "percent",
    "count_of",
    "header",
    "display_units",
    "Rule",
    "Formatter",
    "column_kind",
    "convert",
    "axis_label",
    "text_table",
]

System = Literal["SI", "US"]


@dataclass(frozen=True)
class DisplayUnits:
    """The display unit of each quantity kind, with the scale shown in headers.

    Parameters
    ----------
    system : {"SI", "US"}
        The unit system.
    length, volume, flow, depth, area : (str, str) or (str, str, float)
        ``(pint unit, label[, scale])`` of each kind, e.g. ``("m**3", "thousand m³", 1e-3)``:
        the value in the pint unit times ``scale`` is shown under ``label``.
    """

    system: System
    length: tuple
    volume: tuple
    flow: tuple
    depth: tuple
    area: tuple

    def of(self, kind: str) -> tuple[str, str]:
        """``(pint unit, label)`` of a quantity kind."""
        entry = getattr(self, kind)
        return entry[0], entry[1]

    def scale(self, kind: str) -> float:
        """The multiple shown (``1e-3`` for thousands)."""
        entry = getattr(self, kind)
        return float(entry[2]) if len(entry) > 2 else 1.0


SI = DisplayUnits(
    "SI",
    length=("m", "m"),
    volume=("m**3", "thousand m³", 1e-3),
    flow=("m**3/s", "m³/s"),
    depth=("mm", "mm"),
    area=("km**2", "km²"),
)
US = DisplayUnits(
    "US",
    length=("ft", "ft"),
    volume=("acre_foot", "acre-ft"),
    flow=("ft**3/s", "cfs"),
    depth=("inch", "in"),
    area=("acre", "acres"),
)


def display_units(system: str) -> DisplayUnits:
    """The display units of ``"SI"`` or ``"US"`` (US customary)."""
    return {"SI": SI, "US": US}[system]


_SI_KIND = {
    "length": "length",
    "volume": "volume",
    "flow": "flow",
    "depth": "depth",
    "area": "area",
}


def _to_display(value_si: float, kind: str, units: DisplayUnits) -> float:
    unit, _ = units.of(kind)
    si_kind = "length" if kind == "depth" else _SI_KIND[kind]
    return float(from_si([value_si], si_kind, unit)[0]) * units.scale(kind)


def convert(values_si, kind: str, units: DisplayUnits = SI):
    """SI values (m, m³, m³/s, m for depths, m²) as numbers in the display unit of ``kind``
    (an array for figures' axes; the unit label is :func:`axis_label`'s)."""
    import numpy as np

    unit, _ = units.of(kind)
    si_kind = "length" if kind == "depth" else _SI_KIND[kind]
    arr = np.asarray(values_si, dtype=float)
    return np.asarray(from_si(arr.ravel(), si_kind, unit), float).reshape(arr.shape) * units.scale(
        kind
    )


def axis_label(words: str, kind: str, units: DisplayUnits = SI, per: str = "") -> str:
    """An axis label in words with the display unit: ``stage (m)``, ``volume (acre-ft per
    month)``."""
    unit = units.of(kind)[1]
    return f"{words} ({unit}{' ' + per if per else ''})"


def number(value: float, digits: int = 3, *, decimals: int | None = None) -> str:
    """``value`` to ``digits`` significant digits (or fixed ``decimals``) with thousands separators;
    a dash for NaN or None.

    Large values keep every integer digit (``1,234,567`` at 3 digits is ``1,230,000``); small ones
    never go to scientific notation.
    """
    if value is None or not math.isfinite(float(value)):
        return "–"
    x = float(value)
    if decimals is None:
        if x == 0:
            return "0"
        order = math.floor(math.log10(abs(x)))
        x = round(x, digits - 1 - order)
        if x != 0:  # rounding may carry into the next power of ten (99.96 -> 100.0)
            order = math.floor(math.log10(abs(x)))
        decimals = max(digits - 1 - order, 0)
    text = f"{x:,.{decimals}f}"
    return text.lstrip("-") if re.fullmatch(r"-0(\.0*)?", text) else text


def quantity(
    value_si: float, kind: str, units: DisplayUnits = SI, *, digits: int | None = None
) -> str:
    """A volume, flow, depth or area (SI) in the display unit, to 3 significant digits (4 from
    1,000 up), without the unit (the header or the sentence says it)."""
    if value_si is None or not math.isfinite(float(value_si)):
        return "–"
    x = _to_display(float(value_si), kind, units)
    if digits is None:
        digits = 4 if abs(x) >= 1000 else 3
    return number(x, digits)


def stage(value_m: float, units: DisplayUnits = SI, resolution_m: float = 0.001) -> str:
    """A stage (m on the gauge datum) to the gauge resolution, in the display length unit."""
    if value_m is None or not math.isfinite(float(value_m)):
        return "–"
    x = _to_display(float(value_m), "length", units)
    step = _to_display(float(resolution_m), "length", units)
    decimals = max(0, -math.floor(math.log10(step) + 1e-9)) if step > 0 else 3
    return number(x, decimals=decimals)


def percent(value: float) -> str:
    """A percentage: whole, or to one decimal below 10 % (``7.5 %``, ``42 %``)."""
    if value is None or not math.isfinite(float(value)):
        return "–"
    x = float(value)
    return f"{number(x, decimals=1 if abs(x) < 10 else 0)} %"


def count_of(k: int, n: int, what: str = "years") -> str:
    """A probability that counts cases, as a person says it: ``in 4 of 18 years``."""
    return f"in {int(k)} of {int(n)} {what}"


#: Words of the SI column names of the balance, dynamics, seepage and drawdown tables, and the
#: kind of their unit. One mapping for every header a person reads.
_WORDS: dict[str, str] = {
    "storage_change": "storage change",
    "storage_start": "storage at the start",
    "storage_end": "storage at the end",
    "storage": "storage",
    "inflow": "gauged inflow",
    "rain": "rain on the lake",
    "evaporation": "evaporation",
    "outflow": "outlet outflow",
    "withdrawal": "withdrawals",
    "release": "releases",
    "residual": "residual (unexplained)",
    "mean_area": "mean lake area",
    "area": "lake area",
    "stage": "stage",
    "closure_error": "residual share of gains",
    "complete_days": "days with every term",
    "days": "days",
    "p_gain": "chance the residual is a gain",
    "p_nonzero": "confidence the residual is not zero",
    "nonzero_confidence": "confidence the residual is not zero",
    "volume_above_dead": "volume above the dead level",
    "mean_storage": "mean storage",
    "residence_outflow": "residence time, outflow only",
    "residence_losses": "residence time, all losses",
    "response_time": "response (e-folding) time",
    "max_inflow": "largest sustained inflow",
    "within_range": "within the relation's range",
    "probability": "chance of reaching it",
    "members_reaching": "ensemble members reaching it",
    "reach_10pct": "10 % of members there by",
    "reach_50pct": "50 % of members there by",
    "reach_90pct": "90 % of members there by",
    "probability_restricted": "chance, with restrictions",
    "probability_unrestricted": "chance, without restrictions",
    "median_days_restricted": "median time to reach it, with restrictions",
    "median_days_unrestricted": "median time to reach it, without restrictions",
    "median_restricted": "median time to reach it, with restrictions",
    "median_unrestricted": "median time to reach it, without restrictions",
    "seepage": "seepage",
    "seepage_low": "seepage, 95 % low",
    "seepage_high": "seepage, 95 % high",
    "seepage_depth": "seepage depth",
    "within_fitted_stages": "within the stages fitted",
    "filled_days": "days filled",
    "stderr": "standard error",
    "ci95_low": "95 % interval, low",
    "ci95_high": "95 % interval, high",
    "water_year": "water year",
    "significance": "significance (z)",
    "accepted": "accepted correction",
}
_PERCENTILE = re.compile(r"_p(\d{1,2})$")
_SUFFIX_KIND = {
    "_m3": "volume",
    "_m3s": "flow",
    "_mm": "depth",
    "_mm_d": "depth_rate",
    "_m2": "area",
    "_m": "length",
    "_days": "days",
}


def header(column: str, units: DisplayUnits = SI) -> str:
    """Words and display unit of an SI column name (``residual_p05_m3`` →
    ``residual (unexplained), 5th percentile (thousand m³)``); unknown names are returned with
    underscores as spaces."""
    name = column
    unit = ""
    if name in _WORDS and name.endswith("_days"):  # a count of days named in full
        return _WORDS[name]
    if name.endswith("_pct"):
        name, unit = name[: -len("_pct")], "%"
    for suffix, kind in sorted(_SUFFIX_KIND.items(), key=lambda kv: -len(kv[0])):
        if name.endswith(suffix):
            name, unit = name[: -len(suffix)], _unit_label(kind, units)
            break
    tail = ""
    m = _PERCENTILE.search(name)
    if m:
        name = name[: m.start()]
        p = int(m.group(1))
        tail = f", {p}{_ordinal(p)} percentile"
    tributary = ""
    if ":" in name:
        name, tributary = name.split(":", 1)
        tributary = f" ({tributary.replace('_', ' ')})"
    words = _WORDS.get(name, name.replace("_", " "))
    return f"{words}{tributary}{tail}" + (f" ({unit})" if unit else "")


def _unit_label(kind: str, units: DisplayUnits) -> str:
    if kind == "days":
        return "days"
    if kind == "depth_rate":
        return f"{units.of('depth')[1]}/d"
    return units.of(kind)[1]


def column_kind(column: str) -> str | None:
    """The quantity kind of an SI column name from its unit suffix (``volume`` for ``_m3``,
    ``flow`` for ``_m3s``, ``depth`` for ``_mm``, ``depth_rate`` for ``_mm_d``, ``area`` for
    ``_m2``, ``length`` for ``_m``, ``days``, ``percent`` for ``_pct``), None without one."""
    if column.endswith("_pct"):
        return "percent"
    for suffix, kind in sorted(_SUFFIX_KIND.items(), key=lambda kv: -len(kv[0])):
        if column.endswith(suffix):
            return kind
    return None


#: SI unit of each column kind as the tables hold it (depths in mm, as the balance gives them).
SI_UNIT = {
    "volume": "m³",
    "flow": "m³/s",
    "depth": "mm",
    "depth_rate": "mm/d",
    "area": "m²",
    "length": "m",
    "days": "d",
    "percent": "%",
}


@dataclass(frozen=True)
class Rule:
    """How one column or number is shown: its kind, display unit, digits and the rule in words.

    ``digits`` is the number of significant digits (``None`` with ``decimals`` fixed); ``factor``
    takes the SI value (as the tables hold it) to the display unit.
    """

    kind: str
    unit: str
    factor: float
    digits: int | None
    decimals: int | None
    words: str

    def to_dict(self) -> dict:
        """The rule as JSON: kind, display unit, factor from SI, digits or decimals, words."""
        return {
            "kind": self.kind,
            "unit": self.unit,
            "factor_from_si": self.factor,
            "significant_digits": self.digits,
            "decimals": self.decimals,
            "rule": self.words,
        }


@dataclass(frozen=True)
class Formatter:
    """The display of one report: its units and the stage gauge's resolution.

    Every header and every number a person reads comes from :meth:`header`, :meth:`rule` and
    :meth:`cell`; the SI column names stay in CSV and JSON.
    """

    units: DisplayUnits = SI
    stage_resolution_m: float = 0.001

    def header(self, column: str) -> str:
        """The column's header in words with its display unit."""
        return header(column, self.units)

    def rule(self, column: str, sample: object = None) -> Rule:
        """The display rule of a column (``sample``, one of its values, tells integer columns)."""
        kind = column_kind(column)
        if kind == "length":
            step = _to_display(self.stage_resolution_m, "length", self.units)
            dec = max(0, -math.floor(math.log10(step) + 1e-9)) if step > 0 else 3
            return Rule(
                "length",
                self.units.of("length")[1],
                _to_display(1.0, "length", self.units),
                None,
                dec,
                f"to the gauge resolution ({dec} decimals)",
            )
        if kind in ("volume", "flow", "area", "depth", "depth_rate"):
            base = "depth" if kind == "depth_rate" else kind
            per_si = 1e-3 if base == "depth" else 1.0  # the tables hold depths in mm
            return Rule(
                kind,
                _unit_label(kind, self.units),
                _to_display(per_si, base, self.units),
                3,
                None,
                "3 significant digits, 4 from 1,000 up",
            )
        if kind == "percent":
            return Rule("percent", "%", 1.0, None, None, "whole, one decimal below 10")
        if kind == "days":
            return Rule("days", "days", 1.0, 3, None, "3 significant digits, 4 from 1,000 up")
        if isinstance(sample, int | bool) or column in ("water_year", "days", "complete_days"):
            return Rule("count", "", 1.0, None, 0, "whole number")
        return Rule("number", "", 1.0, 4, None, "4 significant digits")

    def format(self, rule: Rule, value: object) -> str:
        """The text of ``value`` (SI, as the table holds it) under ``rule``."""
        if value is None:
            return "–"
        if isinstance(value, bool):
            return "yes" if value else "no"
        if isinstance(value, str):
            return value
        try:
            x = float(value)  # type: ignore[arg-type]
        except (TypeError, ValueError):
            return str(value)
        if not math.isfinite(x):
            return "–"
        if rule.kind == "percent":  # the header or the tile says %
            return number(x, decimals=1 if abs(x) < 10 else 0)
        if rule.kind == "count":
            return f"{int(round(x))}"
        x = x * rule.factor
        if rule.decimals is not None:
            return number(x, decimals=rule.decimals)
        digits = rule.digits or 3
        if rule.kind != "number" and abs(x) >= 1000:
            digits = 4
        return number(x, digits)

    def cell(self, column: str, value: object) -> str:
        """The text of one cell of column ``column``."""
        return self.format(self.rule(column, value), value)

    def value(self, column: str, value: float) -> str:
        """A number with its unit, for a sentence: ``4,593 thousand m³``."""
        rule = self.rule(column, value)
        text = self.format(rule, value)
        if not rule.unit or text == "–":
            return text
        return f"{text} {rule.unit}"


def _ordinal(n: int) -> str:
    if 10 <= n % 100 <= 20:
        return "th"
    return {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")


def text_table(
    frame, fmt: Formatter | None = None, *, width: int = 120, index: bool = True,
    header_width: int = 14,
) -> str:  # fmt: skip
    """A table for a terminal: headers in words with their display unit (wrapped over a few
    lines), numbers by the display rules, at most ``width`` characters a line; columns that do
    not fit go into a further block that repeats the first column.

    Parameters
    ----------
    frame : pandas.DataFrame
        SI values under unit-bearing column names; its index is the first column when ``index``.
    fmt : Formatter, optional
        Display units and stage resolution (default SI, 1 mm).
    width : int
        Largest line length, characters.
    header_width : int
        Width a header is wrapped to when its cells are narrower.
    """
    import textwrap

    import pandas as pd

    fmt = fmt or Formatter()
    data = frame.reset_index() if index else frame.reset_index(drop=True)
    if index and frame.index.name is None:
        data = data.rename(columns={data.columns[0]: ""})
    columns = []
    for c in data.columns:
        values = [v.item() if hasattr(v, "item") else v for v in data[c].tolist()]
        if isinstance(values[0] if values else None, pd.Timestamp):
            cells = [v.strftime("%Y-%m-%d") for v in values]
        elif pd.api.types.is_numeric_dtype(data[c]) and not pd.api.types.is_bool_dtype(data[c]):
            sample = next((v for v in values if v is not None and v == v), None)
            rule = fmt.rule(str(c), sample)
            cells = [fmt.format(rule, v) for v in values]
        else:
            cells = [
                "–" if v is None else ("yes" if v else "no") if isinstance(v, bool) else str(v)
                for v in values
            ]
        numeric = pd.api.types.is_numeric_dtype(data[c])
        cell_w = max([len(x) for x in cells] + [1])
        title = fmt.header(str(c)) if str(c) else ""
        unit = ""
        m = re.search(r" (\([^()]*\))$", title)
        if m:  # the unit on a line of its own
            title, unit = title[: m.start()], m.group(1)
        w = max(cell_w, len(unit), min(header_width, len(title)),
                *(len(word) for word in title.split() or [""]))  # fmt: skip
        lines = (textwrap.wrap(title, w) or [""]) + ([unit] if unit else [])
        columns.append((lines, cells, w, numeric))
    first, rest = columns[0], columns[1:]
    blocks: list[list] = []
    current: list = []
    used = first[2]
    for col in rest:
        if current and used + 2 + col[2] > width:
            blocks.append(current)
            current, used = [], first[2]
        current.append(col)
        used += 2 + col[2]
    blocks.append(current)
    out: list[str] = []
    for block in blocks:
        cols = [first, *block]
        depth = max(len(c[0]) for c in cols)
        for i in range(depth):
            parts = []
            for lines, _, w, numeric in cols:
                text = lines[i - (depth - len(lines))] if i >= depth - len(lines) else ""
                parts.append(text.rjust(w) if numeric else text.ljust(w))
            out.append("  ".join(parts).rstrip())
        for r in range(len(first[1])):
            parts = [
                (cells[r].rjust(w) if numeric else cells[r].ljust(w))
                for _, cells, w, numeric in cols
            ]
            out.append("  ".join(parts).rstrip())
        out.append("")
    return "\n".join(out).rstrip("\n")
