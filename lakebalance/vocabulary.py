"""The words of the trade, declared once: the series roles of a site file and the balance terms.

Every module that names a role or a term reads it here: the site-file loader (which roles
exist), the units layer (the kind, hence the internal unit, of each role), the checks on raw
series (which roles cannot be negative, physical bounds, which are states that a stuck sensor
repeats, which are smooth enough for spike checks), the balance (its term columns and signs), the
flags, the commands and the report (labels).

Ranges are in the internal units of :data:`lakebalance.units.INTERNAL_UNITS` (SI; weather in the
units of the equations that use it). ``bounds`` are physical limits of a single reading (outside
them a reading is rejected); ``plausible`` are generous limits of a series' daily values (a series
wholly or mostly beyond them is probably in another unit than declared). Where a limit comes from
a recalled record value it says "from memory"; otherwise it is common practice, no source.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

__all__ = [
    "Role",
    "Term",
    "ROLES",
    "SERIES_ROLES",
    "SPARSE_ROLES",
    "TERMS",
    "TERM_BY_NAME",
    "MEASURED_TERMS",
    "term_label",
]

INF = math.inf


@dataclass(frozen=True)
class Role:
    """A series role of the site file (``[series.<name>]``).

    Parameters
    ----------
    name : str
        The role's key in the site file.
    kind : str
        Its kind (a key of :data:`lakebalance.units.INTERNAL_UNITS`), which fixes its internal unit.
    label : str
        Words for people.
    non_negative : bool
        A negative reading is impossible (it is rejected).
    bounds : (float, float)
        Physical limits of one reading, internal units (outside: rejected).
    plausible : (float, float)
        Generous limits of the daily values, internal units (outside: the unit is doubtful).
    state : bool
        A state of the lake or the air, which a stuck sensor repeats (flows and depths are left
        out: zero or a constant pumping rate are legitimately constant).
    smooth : bool
        Smooth enough for the spike check (event-driven or gusty series are not: a robust z-score
        would flag every storm or cloudy day).
    typical : (float, float)
        Range of the typical daily value, internal units: of the positive days for a
        non-negative role (a dry creek or a rainless day says nothing of the unit), of every day
        otherwise. A series wholly beyond it was probably read in the wrong unit
        (:mod:`lakebalance.unitcheck` names the likely intended one).
    sparse : bool
        A few readings a year by design (field checks): no gap findings, no warning that the
        readings are coarse, and the readings are kept with their times.
    """

    name: str
    kind: str
    label: str
    non_negative: bool = False
    bounds: tuple[float, float] = (-INF, INF)
    plausible: tuple[float, float] = (-INF, INF)
    state: bool = False
    smooth: bool = False
    typical: tuple[float, float] = (-INF, INF)
    sparse: bool = False


# Typical daily values (common practice, no source; the limits are generous on purpose): a flow
# that is metered or gauged at all is above 1e-6 m³/s (86 L/d) on its flowing days and below the
# largest rivers' mean flow; lake or pan evaporation on its positive days between 0.2 and 50 mm;
# rain on rainy days between a gauge's 0.1 mm resolution and 0.5 m; a daily mean wind between
# 0.1 and 20 m/s; daily solar radiation between 0.5 and 45 MJ m⁻² d⁻¹; air temperatures with
# typical values between -60 and 45 °C.
FLOW = (1.0e-6, 3.0e5)  # m³/s
EVAP = (2.0e-4, 0.05)  # m/d
TEMPERATURE = (-60.0, 45.0)  # °C

#: Every series role, in the order the documentation lists them.
ROLES: dict[str, Role] = {
    r.name: r
    for r in (
        Role("stage", "length", "lake stage", state=True, smooth=True),  # any datum: no range
        # staff-gauge (or surveyed) readings of the same stage on the gauge datum, made at visits
        Role("staff_gauge", "length", "staff-gauge check reading", sparse=True),
        # 3e5 m³/s: above the largest rivers' mean daily flow (from memory)
        Role("inflow", "flow", "gauged inflow", True, plausible=(0.0, 3.0e5), typical=FLOW),
        Role(
            "rain", "depth", "rain", True, plausible=(0.0, 2.0), typical=(1e-4, 0.5)
        ),  # 2 m/d: record
        Role("evaporation", "depth", "lake evaporation", True, plausible=(0.0, 0.1), typical=EVAP),
        Role("pan", "depth", "pan evaporation", True, plausible=(0.0, 0.1), typical=EVAP),
        Role(
            "withdrawal", "flow", "metered withdrawal", True, plausible=(0.0, 3.0e5), typical=FLOW
        ),
        Role("release", "flow", "metered release", True, plausible=(0.0, 3.0e5), typical=FLOW),
        # air temperature beyond the recorded extremes (from memory)
        Role(
            "tmax",
            "temperature",
            "maximum air temperature",
            bounds=(-90.0, 60.0),
            state=True,
            smooth=True,
            typical=TEMPERATURE,
        ),  # fmt: skip
        Role(
            "tmin",
            "temperature",
            "minimum air temperature",
            bounds=(-90.0, 60.0),
            state=True,
            smooth=True,
            typical=TEMPERATURE,
        ),  # fmt: skip
        Role(
            "tmean",
            "temperature",
            "mean air temperature",
            bounds=(-90.0, 60.0),
            state=True,
            smooth=True,
            typical=TEMPERATURE,
        ),  # fmt: skip
        Role("rh", "humidity", "relative humidity", True, (0.0, 100.0), state=True),
        Role("rh_max", "humidity", "maximum relative humidity", True, (0.0, 100.0), state=True),
        Role("rh_min", "humidity", "minimum relative humidity", True, (0.0, 100.0), state=True),
        Role(
            "dewpoint",
            "temperature",
            "dew point",
            bounds=(-90.0, 40.0),
            state=True,
            smooth=True,
            typical=TEMPERATURE,
        ),  # fmt: skip
        Role(
            "wind",
            "speed",
            "wind speed",
            True,
            plausible=(0.0, 20.0),
            state=True,
            typical=(0.1, 20.0),
        ),
        # 50 MJ m⁻² d⁻¹: above the radiation at the top of the atmosphere (FAO-56 Annex 2)
        Role(
            "solar",
            "radiation",
            "solar radiation",
            True,
            plausible=(0.0, 50.0),
            state=True,
            typical=(0.5, 45.0),
        ),
        Role("sunshine", "duration", "bright sunshine", True, (0.0, 24.0)),  # h/d by definition
    )
}

#: The role names, in order.
SERIES_ROLES: tuple[str, ...] = tuple(ROLES)

#: Roles read a few times a year by design (field checks), kept with their reading times.
SPARSE_ROLES: frozenset[str] = frozenset(r for r, v in ROLES.items() if v.sparse)


@dataclass(frozen=True)
class Term:
    """A term of the daily balance.

    Parameters
    ----------
    name : str
        The term (``"inflow"``, ``"outflow"``, ...).
    sign : {1, -1, 0}
        +1 a gain of the lake, −1 a loss, 0 neither (storage change, residual).
    label : str
        Words for people.
    role : str, optional
        The series role it is measured by, when it is measured directly.
    """

    name: str
    sign: Literal[1, -1, 0]
    label: str
    role: str | None = None

    @property
    def column(self) -> str:
        """The balance table's column: daily volume, m³."""
        return f"{self.name}_m3"


#: The terms of the balance, in the order of its table: gains, losses, then the two sides.
TERMS: tuple[Term, ...] = (
    Term("inflow", 1, "gauged inflow", "inflow"),
    Term("rain", 1, "rain on the lake", "rain"),
    Term("evaporation", -1, "evaporation", "evaporation"),
    Term("outflow", -1, "outlet outflow"),
    Term("withdrawal", -1, "withdrawals", "withdrawal"),
    Term("release", -1, "releases", "release"),
    Term("storage_change", 0, "storage change"),
    Term("residual", 0, "residual (unexplained)"),
)

TERM_BY_NAME: dict[str, Term] = {t.name: t for t in TERMS}

#: The measured terms (gains and losses), in table order.
MEASURED_TERMS: tuple[str, ...] = tuple(t.name for t in TERMS if t.sign != 0)


def term_label(column: str) -> str:
    """The label of a balance column (``"outflow_m3"`` → ``"outlet outflow"``)."""
    name = column.removesuffix("_m3").removesuffix("_mm")
    term = TERM_BY_NAME.get(name)
    return term.label if term is not None else name.replace("_", " ")
