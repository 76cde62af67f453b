"""The one unit layer: a single pint registry, the internal units, and conversion at ingest.

Internally lakebalance works in SI:

============  =====================  ==========================================
kind          internal unit          used for
============  =====================  ==========================================
length        m                      stage, elevation, head
depth         m (per day)            rain, evaporation, pan (daily totals)
flow          m³/s                   inflow, withdrawal, release, discharge
area          m²                     lake area
volume        m³                     storage, daily volumes
temperature   °C                     tmax, tmin, tmean, dewpoint
humidity      % (0–100)              rh, rh_max, rh_min
pressure      kPa                    air pressure, vapour pressure
speed         m/s                    wind
radiation     MJ m⁻² d⁻¹             solar (daily total)
duration      h (per day)            sunshine hours
============  =====================  ==========================================

Weather quantities keep the units their equations use (FAO-56, Allen et al. 1998):
those are the only non-base units inside the computation, and they are declared here once.

Everything is converted through :func:`to_si` (or :func:`factor`) and nowhere else.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import cache
from typing import TYPE_CHECKING, Literal

import numpy as np

from .errors import UnitError
from .vocabulary import ROLES

if TYPE_CHECKING:  # pragma: no cover
    import pint

__all__ = [
    "Kind",
    "INTERNAL_UNITS",
    "ROLE_KINDS",
    "SECONDS_PER_DAY",
    "MM_PER_M",
    "Conversion",
    "registry",
    "parse_unit",
    "conversion",
    "to_si",
    "from_si",
    "factor",
]

Kind = Literal[
    "length",
    "depth",
    "flow",
    "area",
    "volume",
    "temperature",
    "humidity",
    "pressure",
    "speed",
    "radiation",
    "duration",
]

MM_PER_M = 1000.0  # mm/m; depths over the lake are reported in mm
SECONDS_PER_DAY = 86400.0  # s/d; a calendar day (DST days are taken as 24 h, documented)

#: Internal unit of each kind (pint spelling).
INTERNAL_UNITS: dict[str, str] = {
    "length": "m",
    "depth": "m",  # per day
    "flow": "m**3/s",
    "area": "m**2",
    "volume": "m**3",
    "temperature": "degC",
    "humidity": "percent",
    "pressure": "kPa",
    "speed": "m/s",
    "radiation": "MJ/m**2/day",
    "duration": "hour",  # per day
}

#: The kind of each series role of the site file (declared in :mod:`lakebalance.vocabulary`).
ROLE_KINDS: dict[str, str] = {name: role.kind for name, role in ROLES.items()}

# Spellings users write that pint does not know, mapped to pint's (case-sensitive, whole token).
_ALIASES: list[tuple[str, str]] = [
    (r"acre[- ]?(?:ft|feet|foot)", "acre_foot"),
    (r"\bcfs\b", "ft**3/s"),
    (r"\bcumecs?\b", "m**3/s"),
    (r"US ?gal(?:lon)?s?", "gallon"),
    (r"\bgpm\b", "gallon/minute"),
    (r"\bMGD\b", "1e6*gallon/day"),
    (r"\bMLD\b", "ML/day"),
    (r"°C|deg ?C\b|\bC\b(?=$)", "degC"),
    (r"°F|deg ?F\b|\bF\b(?=$)", "degF"),
    (r"%", "percent"),
    (r"²", "**2"),
    (r"³", "**3"),
    (r"\bhrs?\b", "hour"),
    (r"\b(m|km|cm|mm|ft|in|yd|mi|mile)([23])\b", r"\1**\2"),
    (r"\bmi\b", "mile"),
]


@cache
def registry() -> pint.UnitRegistry:
    """The single pint registry of lakebalance (created on first use; pint is imported lazily)."""
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define("fraction = [] = frac")
    return ureg


def _normalise(text: str) -> str:
    out = text.strip()
    for pattern, repl in _ALIASES:
        out = re.sub(pattern, repl, out)
    return out


@cache
def parse_unit(text: str) -> pint.Quantity:
    """Parse a unit as users write it (``"ML/d"``, ``"ft³/s"``, ``"acre-ft/d"``, ``"%"``).

    Returns a pint Quantity of magnitude one unit (or a scaled one, e.g. ``"MGD"`` = 1e6 gallon/day).

    Raises
    ------
    UnitError
        When the text is not a unit.
    """
    if not isinstance(text, str) or not text.strip():
        raise UnitError(f"a unit is required, got {text!r}")
    ureg = registry()
    try:
        norm = _normalise(text)
        q = (
            ureg.parse_expression(norm)
            if "*" in norm.split("/")[0][:4]
            else ureg.Quantity(1.0, norm)
        )
    except Exception as exc:  # pint raises several unrelated types
        # pint's own errors say which name is undefined; a tokenizer or assertion error from a
        # malformed expression ('m3/sec/', 'm3/s)') carries no useful text of its own.
        detail = str(exc).strip() if type(exc).__module__.startswith("pint") else ""
        raise UnitError(
            f"unknown unit {text!r} ({detail or 'not a valid unit expression'}; write units "
            "as e.g. m3/s, ft3/s, ML/d, mm, degC)"
        ) from None
    return q


@dataclass(frozen=True)
class Conversion:
    """How the values of one declared unit become internal values.

    ``internal = values * scale + offset``. ``amount`` is True when each reading is an
    amount accumulated over its interval (mm of rain, m³ metered), so that sub-daily readings are
    summed to make a day; False for states and rates (stage, m³/s, mm/d), which are averaged.
    For an amount of a flow kind (a volume per reading) the daily sum is in m³ and is divided by
    :data:`SECONDS_PER_DAY` to give m³/s.
    """

    unit: str
    kind: str
    scale: float
    offset: float
    amount: bool

    def apply(self, values: np.ndarray) -> np.ndarray:
        """Convert an array of values in the declared unit (see class docstring)."""
        values = np.asarray(values, dtype=float)
        if self.offset == 0.0:
            return values * self.scale
        return values * self.scale + self.offset


def _scale_offset(q_from: pint.Quantity, to: str) -> tuple[float, float]:
    ureg = registry()
    zero = ureg.Quantity(0.0 * q_from.magnitude, q_from.units).to(to).magnitude
    one = ureg.Quantity(q_from.magnitude, q_from.units).to(to).magnitude
    return float(one - zero), float(zero)


@cache
def conversion(unit: str, kind: str, what: str = "series") -> Conversion:
    """The conversion of ``unit`` to the internal unit of ``kind``.

    Parameters
    ----------
    unit : str
        The declared unit, as users write it.
    kind : str
        One of :data:`INTERNAL_UNITS`.
    what : str
        Names the series in error messages.

    Raises
    ------
    UnitError
        When the unit is unknown or has the wrong dimension for ``kind``.
    """
    if kind not in INTERNAL_UNITS:
        raise UnitError(f"{what}: unknown quantity kind {kind!r}")
    try:
        u = parse_unit(unit)
    except UnitError as exc:
        raise UnitError(f"{what}: {exc.message}") from None
    ureg = registry()
    dim = u.dimensionality
    target = INTERNAL_UNITS[kind]

    def same(t: str) -> bool:
        return dim == ureg.Quantity(1.0, t).dimensionality

    if kind == "depth":
        if same("m"):
            s, o = _scale_offset(u, "m")
            return Conversion(unit, kind, s, o, True)
        if same("m/s"):
            s, o = _scale_offset(u, "m/day")
            return Conversion(unit, kind, s, o, False)
    elif kind == "flow":
        if same("m**3/s"):
            s, o = _scale_offset(u, "m**3/s")
            return Conversion(unit, kind, s, o, False)
        if same("m**3"):
            s, o = _scale_offset(u, "m**3")
            return Conversion(unit, kind, s, o, True)
    elif kind == "radiation":
        if same("W/m**2"):
            s, o = _scale_offset(u, "MJ/m**2/day")
            return Conversion(unit, kind, s, o, False)
        if same("J/m**2"):
            s, o = _scale_offset(u, "MJ/m**2")
            return Conversion(unit, kind, s, o, True)
    elif kind == "duration":
        if same("hour"):
            s, o = _scale_offset(u, "hour")
            return Conversion(unit, kind, s, o, True)
    elif kind == "humidity":
        if not dim:
            s, o = _scale_offset(u, "percent")
            return Conversion(unit, kind, s, o, False)
    elif same(target):
        s, o = _scale_offset(u, target)
        return Conversion(unit, kind, s, o, False)
    expected = {
        "depth": "a depth (mm, in) or a depth rate (mm/d, in/d)",
        "flow": "a flow (m³/s, L/s, ML/d, ft³/s, acre-ft/d, gallon/min) or a volume per reading (m³, ML)",
        "radiation": "an energy flux (W/m², MJ/m²/d) or an energy per area per reading (MJ/m²)",
        "humidity": "a percentage (%) or a fraction",
        "duration": "hours (h)",
    }.get(kind, f"a unit convertible to {target}")
    raise UnitError(f"{what}: unit {unit!r} is not {expected}")


def to_si(values: np.ndarray, unit: str, kind: str, what: str = "series") -> np.ndarray:
    """Convert ``values`` in ``unit`` to the internal unit of ``kind`` (see :func:`conversion`).

    Amount units (a depth or volume per reading) come back as an amount in m or m³ per reading;
    the daily aggregation turns them into daily values.
    """
    return conversion(unit, kind, what).apply(values)


def factor(unit_from: str, unit_to: str) -> float:
    """Multiplicative factor from one unit to another (no offset units).

    Example
    -------
    >>> round(factor("acre_foot", "m**3"), 2)
    1233.49
    """
    try:
        return float((parse_unit(unit_from) / parse_unit(unit_to)).to("").magnitude)
    except UnitError:
        raise
    except Exception as exc:
        raise UnitError(f"cannot convert {unit_from!r} to {unit_to!r} ({exc})") from None


def from_si(values: np.ndarray, kind: str, unit: str) -> np.ndarray:
    """Convert internal values of ``kind`` to ``unit`` for output (rates only, e.g. m³/s to L/s)."""
    ureg = registry()
    target = parse_unit(unit)
    internal = ureg.Quantity(1.0, INTERNAL_UNITS[kind])
    s, o = _scale_offset(internal, str(target.units))
    return (np.asarray(values, dtype=float) * s + o) / target.magnitude
