"""Four invented lake families for the drawdown engine, shared by its reference tests and
``benchmarks/bench_engine_families.py``.

* ``slow`` — a wide lake (response time of weeks) with a power-law outlet above 1 m;
* ``stiff`` — a small pond whose outlet responds within the hour;
* ``stiff_sill`` — the stiff pond with an inflow about its evaporation, so that its members fall
  below the sill and rise back into the stiff range a couple of dozen times a year (paths that
  arrive late at a quasi-equilibrium);
* ``sill`` — a flow-through lake sitting near its power-law sill ``Q = 25 (h - 10)^1.6``, with
  seepage, whose dry-season inflow is about its evaporation, so that members cross the sill
  often (the case where the engine's one-step linear model is poorest: ``g''`` grows as
  ``(h - e)^(b - 2)``);
* ``gated`` — a reservoir with a gate release by month and stage, a minimum environmental
  release, a weir spill over its crest, a monthly demand and two restriction levels with
  monthly triggers, restore levels and lags.

Each family gives its laws (vectorised numpy functions), a forcing generator (autocorrelated
log-normal inflow, evaporation and rain, seeded), the engine's tables, a reference integration of
one member by :func:`scipy.integrate.solve_ivp` day by day (restriction decisions made on the
reference's own stage by :func:`reference_cut`, written independently of
:class:`lakebalance.operations.RestrictionState`) and the bare one-step numpy loop used as the
benchmarks' yardstick. Invented data only.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from lakebalance.drawdown.engine import build_tables
from lakebalance.operations import (
    OperatingRules,
    ReleaseRule,
    RestrictionLevel,
    SpillRule,
)

DAY = 86400.0
#: 365 days from 1 January of a common year: the calendar month of each day.
MONTHS = np.repeat(np.arange(1, 13), [31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31])


@dataclass(frozen=True)
class EngineLake:
    """One invented lake: laws, forcing level and operating rules."""

    name: str
    area_top_m2: float  # A(h) = area_top (h / depth)^shape
    depth_m: float
    shape: float
    sill_c: float  # outlet Q = c (h - e)^b above e
    sill_e: float
    sill_b: float
    seepage_k: float  # m³/s per m above seepage_h0
    seepage_h0: float
    inflow_m3s: float  # median inflow
    inflow_sd: float  # sd of the AR(1) log inflow
    evaporation_m: float  # per day
    start_m: float
    stage_max_m: float
    demand_m3s: float = 0.0
    rules: OperatingRules | None = None
    notes: str = ""
    extra: dict = field(default_factory=dict)

    def area(self, h: np.ndarray) -> np.ndarray:
        x = np.clip(np.asarray(h, dtype=float) / self.depth_m, 1e-3, None)
        return self.area_top_m2 * x**self.shape

    def outlet(self, h: np.ndarray) -> np.ndarray:
        """Outlet law plus spill (m³/s)."""
        h = np.asarray(h, dtype=float)
        q = self.sill_c * np.clip(h - self.sill_e, 0.0, None) ** self.sill_b
        if self.rules is not None and self.rules.spill is not None:
            q = q + self.rules.spill.spill_m3s(h)
        return q

    def seepage(self, h: np.ndarray) -> np.ndarray:
        return self.seepage_k * (np.asarray(h, dtype=float) - self.seepage_h0)

    def gate(self, h: np.ndarray, month: int) -> np.ndarray:
        """Gate release of the calendar month (m³/s), environmental minimum included."""
        if self.rules is None or self.rules.release is None:
            return np.zeros_like(np.asarray(h, dtype=float))
        return self.rules.gate_release_by_month(np.atleast_1d(h))[month - 1]

    def tables(self, variants: np.ndarray | None = None):
        """Engine tables; ``variants`` (k,) scale the outlet coefficient (rating variants)."""
        if variants is None:
            out = self.outlet
        else:

            def out(h):
                base = self.outlet(h)
                sill = self.sill_c * np.clip(h - self.sill_e, 0.0, None) ** self.sill_b
                return np.stack([base + (s - 1.0) * sill for s in variants])

        gate = None
        if self.rules is not None and self.rules.release is not None:
            gate = self.rules.gate_release_by_month
        return build_tables(
            self.area,
            out,
            stage_min_m=0.0,
            stage_max_m=self.stage_max_m,
            seepage=self.seepage,
            gate_release=gate,
        )

    def forcing(self, rng: np.random.Generator, members: int, days: int = 365):
        """(inflow m³/s, net rain minus evaporation m/day), each (days, members)."""
        z = np.zeros((days, members))
        shocks = rng.normal(0.0, self.inflow_sd * np.sqrt(1 - 0.85**2), (days, members))
        z[0] = rng.normal(0.0, self.inflow_sd, members)
        for d in range(1, days):
            z[d] = 0.85 * z[d - 1] + shocks[d]
        season = 1.0 - 0.5 * np.sin(np.linspace(0.0, np.pi, days))[:, None]
        inflow = self.inflow_m3s * season * np.exp(z)
        evap = self.evaporation_m * (1.0 + 0.5 * np.sin(np.linspace(0.0, np.pi, days)))[:, None]
        rain = (rng.random((days, members)) < 0.12) * rng.gamma(2.0, 0.004, (days, members))
        return inflow, rain - evap


def _gated_rules() -> OperatingRules:
    return OperatingRules(
        environmental_release=0.3,
        release=ReleaseRule(
            stages=[14.0, 17.0, 19.0],
            release=[[0.5, 1.5, 4.0], [0.3, 1.0, 3.0], [0.5, 2.0, 5.0]],
            months=[1, 5, 10],
        ),
        spill=SpillRule(crest=19.0, length=25.0, coefficient=1.7),
        restriction=(
            RestrictionLevel(
                trigger=[16.8] * 4 + [17.0] * 5 + [16.8] * 3,
                restore=[17.0] * 4 + [17.2] * 5 + [17.0] * 3,
                cut=0.2,
                lag=3,
                name="level 1",
            ),
            RestrictionLevel(trigger=16.4, restore=16.8, cut=0.5, lag=7, name="level 2"),
        ),
    )


FAMILIES: dict[str, EngineLake] = {
    "slow": EngineLake(
        "slow", area_top_m2=6.0e7, depth_m=8.0, shape=0.6, sill_c=5.0, sill_e=1.0, sill_b=1.6,
        seepage_k=0.0, seepage_h0=0.0, inflow_m3s=2.0, inflow_sd=0.6, evaporation_m=0.004,
        start_m=1.5, stage_max_m=8.0, demand_m3s=0.1,
    ),
    "stiff": EngineLake(
        "stiff", area_top_m2=4.0e4, depth_m=8.0, shape=0.6, sill_c=20.0, sill_e=1.0,
        sill_b=1.6, seepage_k=0.0, seepage_h0=0.0, inflow_m3s=3.0, inflow_sd=0.6,
        evaporation_m=0.004, start_m=1.5, stage_max_m=8.0, demand_m3s=0.15,
    ),
    "stiff_sill": EngineLake(
        "stiff_sill", area_top_m2=4.0e4, depth_m=8.0, shape=0.6, sill_c=20.0, sill_e=1.0,
        sill_b=1.6, seepage_k=0.0, seepage_h0=0.0, inflow_m3s=0.0008, inflow_sd=1.0,
        evaporation_m=0.004, start_m=1.5, stage_max_m=8.0,
    ),
    "sill": EngineLake(
        "sill", area_top_m2=1.5e6, depth_m=14.0, shape=1.3, sill_c=25.0, sill_e=10.0,
        sill_b=1.6, seepage_k=0.002, seepage_h0=6.0, inflow_m3s=0.08, inflow_sd=1.0,
        evaporation_m=0.003, start_m=10.05, stage_max_m=15.0,
    ),
    "gated": EngineLake(
        "gated", area_top_m2=5.0e6, depth_m=22.0, shape=1.5, sill_c=0.0, sill_e=22.0,
        sill_b=1.5, seepage_k=0.004, seepage_h0=8.0, inflow_m3s=2.5, inflow_sd=0.8,
        evaporation_m=0.0035, start_m=17.2, stage_max_m=22.0, demand_m3s=0.6,
        rules=_gated_rules(),
    ),
}  # fmt: skip


def reference_cut(lake: EngineLake, stage_m: float, month: int, state: list[dict]) -> float:
    """Cut share of a day from the day-start stage, for one member, in plain Python.

    An independent reading of the restriction rule (see :mod:`lakebalance.operations`): each
    level is ``off``, ``pending`` (with the days waited) or ``on``; on at or above the restore
    level it goes off, pending is cancelled there, below the trigger off turns pending, and a
    pending level whose wait reached its lag turns on that day.
    """
    if lake.rules is None:
        return 0.0
    if not state:
        state.extend({"mode": "off", "waited": 0} for _ in lake.rules.restriction)
    cut = 0.0
    for lv, st in zip(lake.rules.restriction, state):
        trig = lv.trigger_by_month()[month - 1]
        rest = lv.restore_by_month()[month - 1]
        if st["mode"] in ("on", "pending") and stage_m >= rest:
            st["mode"] = "off"
        if st["mode"] == "off" and stage_m < trig:
            st["mode"], st["waited"] = "pending", 0
        if st["mode"] == "pending":
            if st["waited"] >= lv.lag:
                st["mode"] = "on"
            else:
                st["waited"] += 1
        if st["mode"] == "on":
            cut = max(cut, lv.cut)
    return cut


def reference_member(
    lake: EngineLake,
    inflow: np.ndarray,
    net: np.ndarray,
    method: str = "LSODA",
    rtol: float = 1e-10,
    atol: float = 1e-12,
    scale: float = 1.0,
) -> tuple[np.ndarray, np.ndarray]:
    """One member by :func:`scipy.integrate.solve_ivp` day by day: (stage path (days + 1,),
    cut share of each day (days,)). ``scale`` multiplies the outlet coefficient."""
    from scipy.integrate import solve_ivp

    h = lake.start_m
    path, cuts, state = [h], [], []
    for d in range(inflow.size):
        month = int(MONTHS[d % 365])
        cut = reference_cut(lake, h, month, state)
        demand = lake.demand_m3s * (1.0 - cut)

        def rhs(t, y, d=d, month=month, demand=demand):
            sill = lake.sill_c * np.clip(y - lake.sill_e, 0.0, None) ** lake.sill_b
            q = lake.outlet(y) + (scale - 1.0) * sill + lake.gate(y, month) + lake.seepage(y)
            return net[d] / DAY + (inflow[d] - demand - q) / lake.area(y)

        sol = solve_ivp(rhs, (0.0, DAY), [h], method=method, rtol=rtol, atol=atol)
        h = float(sol.y[0, -1])
        path.append(h)
        cuts.append(cut)
    return np.array(path), np.array(cuts)


def bare_loop(
    lake: EngineLake, inflow: np.ndarray, net: np.ndarray, implicit: bool = False
) -> np.ndarray:
    """One step per day with ``np.interp`` on a 1 mm table of area and outflow (and the month's
    gate release and the restriction cut where the lake has them): the floor of what a numpy
    loop over the members costs for the same physics. It is not accurate.

    ``implicit=False``: explicit Euler, two (three with a gate) look-ups a day. On a stiff lake
    it is unstable and its members sit at the table's ends, where ``np.interp`` (whose search
    starts from the previous point's cell) costs next to nothing, so its time is no yardstick
    there. ``implicit=True``: linearly implicit Euler, ``h + dt g / (1 - dt g')`` with ``g'``
    from the outflow table's slope (one more look-up), stable on every lake. The stage is kept on
    the table either way.
    """
    grid = np.arange(0.0, lake.stage_max_m + 0.0005, 0.001)
    a_tab = lake.area(grid)
    q_tab = lake.outlet(grid) + lake.seepage(grid)
    gate = lake.rules.gate_release_by_month(grid) if lake.rules and lake.rules.release else None
    if implicit:
        slope = np.gradient(q_tab if gate is None else q_tab + gate.mean(axis=0), grid)
    rules = lake.rules.restriction_state(inflow.shape[1]) if lake.rules else None
    h = np.full(inflow.shape[1], lake.start_m)
    for d in range(inflow.shape[0]):
        month = int(MONTHS[d % 365])
        q = np.interp(h, grid, q_tab)
        if gate is not None:
            q += np.interp(h, grid, gate[month - 1])
        demand = lake.demand_m3s
        if rules is not None and lake.rules.restriction:
            demand = demand * (1.0 - rules.step(h, month))
        area = np.interp(h, grid, a_tab)
        step = net[d] + (inflow[d] - demand - q) * DAY / area
        if implicit:
            step /= 1.0 + DAY * np.interp(h, grid, slope) / area
        h = h + step
        np.clip(h, 0.0, lake.stage_max_m, out=h)
    return h
