"""Lake dynamics: residence time, response time, equilibrium stages, inflow limits and what-ifs.

A lake with stage-dependent losses obeys the storage equation (SI, m³/s)::

    A(h) dh/dt = I − L(h),    L(h) = Q(h) + S(h) + (E − P)·A(h)/T + D

with Q the outlet discharge, S the net seepage loss, E and P the evaporation and rain depths
(m per day, T = 86 400 s), D the stage-independent demand (withdrawals and releases) and I a
sustained inflow. The equilibrium stage h* solves I = L(h*); near it the lake relaxes
exponentially with the response (e-folding) time ``tau(h) = A(h) / L'(h)``. The equilibrium
depends on the loss law and the inflow only, not on the area (when evaporation and rain are
left out); the area sets how fast the lake gets there (common practice, no source).

The time to go from h0 to h1 under a sustained inflow follows from separating the variables::

    t = ∫_{h0}^{h1} A(h) / (I − L(h)) dh

(integrated with adaptive Gauss–Kronrod quadrature; :meth:`LakeModel.simulate` integrates the
same equation in time with ``scipy.integrate.solve_ivp`` as a cross-check).

Residence time (flushing time) is mean volume over mean outflow, or over mean total losses
(common practice, no source).

Results touching flood levels or dam safety are screening estimates: confirm them under local
codes with a licensed professional.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from .results import Summary
from .stats import water_year_of
from .units import SECONDS_PER_DAY

if TYPE_CHECKING:  # pragma: no cover
    from .laws import LakeLaws

__all__ = [
    "LakeModel",
    "Equilibrium",
    "WhatIf",
    "Dynamics",
    "analyse_dynamics",
    "dynamics_of_lake",
    "mean_depth_m_per_d",
    "WhatIfRequest",
    "residence_times",
    "CAUTION",
]

Array = np.ndarray
StageFn = Callable[[Array], Array]

CAUTION = (
    "Screening estimates from the gauge records and fitted relations. Where they bear on flood "
    "levels, dam safety or public water supply, defer to local codes and a licensed professional."
)


def _zero(h: Array) -> Array:
    return np.zeros_like(np.asarray(h, dtype=float))


@dataclass(frozen=True)
class Equilibrium:
    """The equilibrium of a sustained inflow.

    Attributes
    ----------
    inflow_m3s : float
        The sustained inflow, m³/s.
    stage_m : float
        Equilibrium stage, m (NaN when none lies in the modelled range).
    status : str
        ``"ok"``; ``"above_range"`` (the lake keeps rising past the top of the relations);
        ``"empties"`` (the losses exceed the inflow down to the bottom of the relations).
    response_time_s : float
        Response time at the equilibrium stage, s.
    """

    inflow_m3s: float
    stage_m: float
    status: str
    response_time_s: float = math.nan

    @property
    def response_time_days(self) -> float:
        """Response time, days."""
        return self.response_time_s / SECONDS_PER_DAY


@dataclass(frozen=True)
class WhatIf:
    """A changed lake under a sustained inflow, from today's stage.

    Attributes
    ----------
    label : str
        What was changed.
    equilibrium : Equilibrium
        The new equilibrium.
    start_stage_m : float
        Today's stage, m.
    time_to_95_s : float
        Time to cover 95% of the way from today's stage to the new equilibrium, s (NaN when
        there is no equilibrium; 0 when already there).
    """

    label: str
    equilibrium: Equilibrium
    start_stage_m: float
    time_to_95_s: float

    @property
    def time_to_95_days(self) -> float:
        """Time to 95% of the change, days."""
        return self.time_to_95_s / SECONDS_PER_DAY


@dataclass(frozen=True)
class LakeModel:
    """A lake reduced to its stage-dependent laws, for equilibrium and response analysis.

    Parameters
    ----------
    area_fn : callable
        Lake area (m²) at stage (m), vectorised.
    outflow_fn : callable, optional
        Outlet discharge (m³/s) at stage (m); None for a lake without an outlet.
    seepage_fn : callable, optional
        Net seepage loss (m³/s, positive = leaving the lake) at stage (m).
    evaporation_m_per_d : float
        Lake evaporation depth, m per day.
    rain_m_per_d : float
        Rain depth on the lake, m per day.
    demand_m3s : float
        Stage-independent withdrawals and releases, m³/s.
    stage_range_m : tuple of float
        Lowest and highest stage where the relations hold, m.
    """

    area_fn: StageFn
    outflow_fn: StageFn | None = None
    seepage_fn: StageFn | None = None
    evaporation_m_per_d: float = 0.0
    rain_m_per_d: float = 0.0
    demand_m3s: float = 0.0
    stage_range_m: tuple[float, float] = (0.0, 10.0)

    def __post_init__(self) -> None:
        lo, hi = self.stage_range_m
        if not (math.isfinite(lo) and math.isfinite(hi) and hi > lo):
            raise ValueError(f"stage_range_m must be an increasing pair, got {self.stage_range_m}")

    # -- laws ----------------------------------------------------------------------------
    def outflow_m3s(self, stage_m: Array | float) -> Array:
        """Outlet discharge, m³/s."""
        h = np.asarray(stage_m, dtype=float)
        return _zero(h) if self.outflow_fn is None else np.asarray(self.outflow_fn(h), float)

    def net_loss_m3s(self, stage_m: Array | float) -> Array:
        """L(h) = Q(h) + S(h) + (E − P) A(h) / T + D, m³/s."""
        h = np.asarray(stage_m, dtype=float)
        loss = self.outflow_m3s(h) + self.demand_m3s
        if self.seepage_fn is not None:
            loss = loss + np.asarray(self.seepage_fn(h), dtype=float)
        net_depth = self.evaporation_m_per_d - self.rain_m_per_d
        if net_depth:
            loss = loss + net_depth / SECONDS_PER_DAY * np.asarray(self.area_fn(h), dtype=float)
        return loss

    def loss_derivative(self, stage_m: Array | float, step_m: float = 1e-4) -> Array:
        """dL/dh, m²/s (central difference with ``step_m``, m)."""
        h = np.asarray(stage_m, dtype=float)
        return (self.net_loss_m3s(h + step_m) - self.net_loss_m3s(h - step_m)) / (2 * step_m)

    def response_time_s(self, stage_m: Array | float) -> Array:
        """Response (e-folding) time tau(h) = A(h) / L'(h), s (inf where L' ≤ 0).

        Notes
        -----
        Linearising A dh/dt = I − L(h) about an equilibrium h* gives
        d(h − h*)/dt = −(L'(h*)/A(h*)) (h − h*), an exponential approach with time constant
        A/L' (common practice, no source).
        """
        h = np.asarray(stage_m, dtype=float)
        slope = self.loss_derivative(h)
        area = np.asarray(self.area_fn(h), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            return np.where(slope > 0, area / slope, np.inf)

    # -- equilibria ----------------------------------------------------------------------
    def equilibrium(self, inflow_m3s: float) -> Equilibrium:
        """The stage at which a sustained inflow (m³/s) balances every loss.

        Solved with Brent's method on I − L(h) over the modelled stage range, the bracket taken
        from a scan of 512 stages (so that a non-monotone loss finds its lowest root).
        """
        from scipy.optimize import brentq

        lo, hi = self.stage_range_m
        grid = np.linspace(lo, hi, 513)
        g = inflow_m3s - self.net_loss_m3s(grid)
        if np.all(g > 0):
            return Equilibrium(float(inflow_m3s), math.nan, "above_range")
        if g[0] <= 0 and np.all(g <= 0):
            if g[0] == 0:
                return self._eq(inflow_m3s, lo)
            return Equilibrium(float(inflow_m3s), math.nan, "empties")
        idx = np.flatnonzero(np.sign(g[:-1]) != np.sign(g[1:]))
        i = int(idx[0])
        if g[i] == 0:
            return self._eq(inflow_m3s, grid[i])
        if g[i + 1] == 0:
            return self._eq(inflow_m3s, grid[i + 1])
        root = brentq(
            lambda x: float(inflow_m3s - self.net_loss_m3s(x)),
            grid[i],
            grid[i + 1],
            xtol=1e-12,
            rtol=1e-14,
        )
        return self._eq(inflow_m3s, root)

    def _eq(self, inflow: float, stage: float) -> Equilibrium:
        return Equilibrium(
            float(inflow), float(stage), "ok", float(self.response_time_s(np.array(stage)))
        )

    def inflow_for_stage(self, stage_m: float) -> float:
        """The sustained inflow whose equilibrium is ``stage_m``: L(stage), m³/s.

        When L increases with stage, this is the largest sustained inflow that keeps the lake
        at or below ``stage_m`` (e.g. a spillway crest or a flood level).
        """
        return float(self.net_loss_m3s(np.array(stage_m, dtype=float)))

    def cease_to_flow_stage(self, tolerance_m: float = 1e-9) -> float:
        """Highest stage at which the outlet does not flow, m (NaN without an outlet)."""
        if self.outflow_fn is None:
            return math.nan
        lo, hi = self.stage_range_m
        grid = np.linspace(lo, hi, 2049)
        q = self.outflow_m3s(grid)
        flowing = np.flatnonzero(q > 0)
        if flowing.size == 0:
            return math.nan
        j = int(flowing[0])
        if j == 0:
            return float(lo)
        a, b = grid[j - 1], grid[j]
        while b - a > tolerance_m:
            mid = 0.5 * (a + b)
            if self.outflow_m3s(np.array(mid)) > 0:
                b = mid
            else:
                a = mid
        return float(a)

    def minimum_inflow_to_flow(self) -> float:
        """The smallest sustained inflow that keeps the outlet flowing: L at cease-to-flow, m³/s."""
        h = self.cease_to_flow_stage()
        return math.nan if math.isnan(h) else self.inflow_for_stage(h)

    # -- transients ----------------------------------------------------------------------
    def time_between(self, inflow_m3s: float, start_stage_m: float, end_stage_m: float) -> float:
        """Time (s) to move from one stage to another under a sustained inflow.

        Notes
        -----
        ``t = ∫ A(h) / (I − L(h)) dh`` from start to end (separation of variables); the
        integrand must keep one sign on the way (the end lies before the equilibrium).
        Returns inf when the lake never gets there.
        """
        from scipy.integrate import quad

        h0, h1 = float(start_stage_m), float(end_stage_m)
        if h0 == h1:
            return 0.0
        ends = self.net_loss_m3s(np.array([h0, h1]))
        g = inflow_m3s - ends
        direction = np.sign(h1 - h0)
        if np.any(np.sign(g) != direction):
            return math.inf

        def rate(h: float) -> float:
            return float(self.area_fn(np.array(h))) / float(
                inflow_m3s - self.net_loss_m3s(np.array(h))
            )

        import warnings

        from scipy.integrate import IntegrationWarning

        with warnings.catch_warnings():
            # quad's round-off notice is about the last digits asked for (1e-10); its own error
            # estimate says whether the value is usable, and is checked instead.
            warnings.simplefilter("ignore", IntegrationWarning)
            value, error = quad(rate, h0, h1, limit=200, epsabs=0.0, epsrel=1e-10)
        if np.isfinite(value) and value and abs(error) > 1e-3 * abs(value):
            from .errors import ApproximationWarning

            warnings.warn(
                f"time from {h0:.3f} m to {h1:.3f} m known only to about "
                f"{abs(error) / abs(value):.1%} (the inflow nearly balances the losses on the way)",
                ApproximationWarning,
                stacklevel=2,
            )
        return float(value) if value >= 0 else math.inf

    def time_to_fraction(self, inflow_m3s: float, start_stage_m: float, fraction: float = 0.95):
        """Time (s) to cover ``fraction`` of the way from a stage to the equilibrium of an inflow."""
        eq = self.equilibrium(inflow_m3s)
        if eq.status != "ok":
            return math.nan
        target = start_stage_m + fraction * (eq.stage_m - start_stage_m)
        return self.time_between(inflow_m3s, start_stage_m, target)

    def simulate(self, inflow_m3s: float, start_stage_m: float, days: Array) -> Array:
        """Stage (m) at the given times (days from start) under a sustained inflow (solve_ivp)."""
        from scipy.integrate import solve_ivp

        t = np.asarray(days, dtype=float) * SECONDS_PER_DAY
        lo, hi = self.stage_range_m

        def rhs(_t: float, y: Array) -> Array:
            h = np.clip(y, lo, hi)
            return (inflow_m3s - self.net_loss_m3s(h)) / np.asarray(self.area_fn(h), float)

        sol = solve_ivp(
            rhs, (0.0, float(t.max())), [start_stage_m], t_eval=t, rtol=1e-10, atol=1e-12,
            method="LSODA",
        )  # fmt: skip
        return sol.y[0]

    def what_if(
        self,
        inflow_m3s: float,
        start_stage_m: float,
        *,
        outflow_fn: StageFn | None = None,
        demand_m3s: float | None = None,
        evaporation_scale: float = 1.0,
        label: str = "",
    ) -> WhatIf:
        """The equilibrium of a changed lake and the time to reach 95% of it from today.

        Parameters
        ----------
        inflow_m3s : float
            Sustained inflow, m³/s.
        start_stage_m : float
            Today's stage, m.
        outflow_fn : callable, optional
            A changed outlet law (gate setting, lowered sill), m³/s at stage m.
        demand_m3s : float, optional
            A changed demand, m³/s.
        evaporation_scale : float
            Factor (-) on the evaporation depth.
        label : str
            Names the case.
        """
        changed = replace(
            self,
            outflow_fn=self.outflow_fn if outflow_fn is None else outflow_fn,
            demand_m3s=self.demand_m3s if demand_m3s is None else float(demand_m3s),
            evaporation_m_per_d=self.evaporation_m_per_d * float(evaporation_scale),
        )
        eq = changed.equilibrium(inflow_m3s)
        t95 = changed.time_to_fraction(inflow_m3s, start_stage_m) if eq.status == "ok" else math.nan
        return WhatIf(label or "changed lake", eq, float(start_stage_m), float(t95))


def residence_times(
    daily: pd.DataFrame,
    water_year_start: int = 1,
    seepage_m3: pd.Series | None = None,
) -> pd.DataFrame:
    """Residence time per water year and overall.

    Parameters
    ----------
    daily : pandas.DataFrame
        The daily balance table (:attr:`lakebalance.balance.Balance.daily`): ``storage_m3``,
        ``outflow_m3``, ``evaporation_m3``, ``withdrawal_m3``, ``release_m3`` (m³ per day).
    water_year_start : int
        First month of the water year.
    seepage_m3 : pandas.Series, optional
        Daily net seepage loss, m³ per day (positive = leaving), added to the losses.

    Returns
    -------
    pandas.DataFrame
        Index: water year, then ``"all"``. Columns ``mean_storage_m3``, ``mean_outflow_m3s``,
        ``mean_losses_m3s``, ``residence_outflow_days`` (mean volume / mean outflow) and
        ``residence_losses_days`` (mean volume / mean total losses). Days lacking the storage or
        a loss are left out of the means.

    Notes
    -----
    τ_res = V̄ / Q̄ (common practice, no source).
    """
    losses = daily[["outflow_m3", "evaporation_m3", "withdrawal_m3", "release_m3"]].copy()
    if seepage_m3 is not None:
        losses["seepage_m3"] = pd.Series(seepage_m3).reindex(daily.index)
    frame = pd.DataFrame(
        {
            "storage": daily["storage_m3"],
            "outflow": daily["outflow_m3"] / SECONDS_PER_DAY,
            "losses": losses.sum(axis=1, min_count=losses.shape[1]) / SECONDS_PER_DAY,
        }
    )
    frame = frame.where(frame.notna().all(axis=1))
    keys = water_year_of(pd.DatetimeIndex(daily.index), water_year_start)
    per = frame.groupby(keys).mean()
    per.loc["all"] = frame.mean()
    per.index.name = "water_year"
    with np.errstate(divide="ignore", invalid="ignore"):
        out = pd.DataFrame(
            {
                "mean_storage_m3": per["storage"],
                "mean_outflow_m3s": per["outflow"],
                "mean_losses_m3s": per["losses"],
                "residence_outflow_days": per["storage"]
                / per["outflow"].where(per["outflow"] > 0)
                / SECONDS_PER_DAY,
                "residence_losses_days": per["storage"]
                / per["losses"].where(per["losses"] > 0)
                / SECONDS_PER_DAY,
            }
        )
    out["days"] = (
        pd.Series(frame["storage"].notna().to_numpy()).groupby(keys).sum().reindex(out.index)
    )
    out.loc["all", "days"] = int(frame["storage"].notna().sum())
    return out


@dataclass(frozen=True)
class Dynamics:
    """Residence times, response times, equilibria, inflow limits and what-ifs of one lake.

    Attributes
    ----------
    residence : pandas.DataFrame
        :func:`residence_times` (per water year and ``"all"``).
    response : pandas.DataFrame
        Per stage (index ``label``): ``stage_m``, ``area_m2``, ``loss_slope_m2s`` (dL/dh),
        ``response_time_days``.
    inflow_m3s : float
        The sustained inflow analysed, m³/s.
    equilibrium : Equilibrium
        Its equilibrium.
    limits : pandas.DataFrame
        Per named level (index ``level``): ``stage_m`` and ``max_inflow_m3s``, the largest
        sustained inflow that keeps the lake at or below that level.
    cease_to_flow_stage_m : float
        Highest stage at which the outlet does not flow, m.
    minimum_inflow_to_flow_m3s : float
        Smallest sustained inflow that keeps the outlet flowing, m³/s.
    today : str
        Date of today's state (last stage of the record).
    today_stage_m : float
        Today's stage, m.
    what_if : tuple of WhatIf
        The base case first (the lake as it is, from today's stage), then each change asked for.
    rates : dict
        The stage-independent rates used: evaporation and rain (m/d), demand (m³/s).
    lake : LakeModel
        The model (not serialised).
    notes : tuple of str
    caution : str
    """

    residence: pd.DataFrame
    response: pd.DataFrame
    inflow_m3s: float
    equilibrium: Equilibrium
    limits: pd.DataFrame
    cease_to_flow_stage_m: float
    minimum_inflow_to_flow_m3s: float
    today: str
    today_stage_m: float
    what_if: tuple[WhatIf, ...] = ()
    rates: dict[str, float] = field(default_factory=dict)
    lake: LakeModel | None = field(default=None, repr=False)
    notes: tuple[str, ...] = ()
    caution: str = CAUTION

    def to_frame(self) -> pd.DataFrame:
        """Response times by stage (:attr:`response`)."""
        return self.response

    def to_dict(self) -> dict:
        """Plain structure for JSON output."""

        def eq(e: Equilibrium) -> dict:
            return {
                "inflow_m3s": e.inflow_m3s,
                "stage_m": e.stage_m,
                "status": e.status,
                "response_time_days": e.response_time_days,
            }

        return {
            "inflow_m3s": self.inflow_m3s,
            "equilibrium": eq(self.equilibrium),
            "today": self.today,
            "today_stage_m": self.today_stage_m,
            "cease_to_flow_stage_m": self.cease_to_flow_stage_m,
            "minimum_inflow_to_flow_m3s": self.minimum_inflow_to_flow_m3s,
            "rates": dict(self.rates),
            "limits": self.limits.reset_index().to_dict(orient="records"),
            "response": self.response.reset_index().to_dict(orient="records"),
            "residence": self.residence.reset_index().to_dict(orient="records"),
            "what_if": [
                {
                    "label": w.label,
                    "equilibrium": eq(w.equilibrium),
                    "start_stage_m": w.start_stage_m,
                    "time_to_95_days": w.time_to_95_days,
                }
                for w in self.what_if
            ],
            "notes": list(self.notes),
            "caution": self.caution,
        }

    def summary(self) -> Summary:
        """Plain-text summary."""
        e = self.equilibrium
        lines = [
            f"Sustained inflow {self.inflow_m3s:.4g} m3/s: equilibrium stage "
            + (
                f"{e.stage_m:.3f} m, response time {e.response_time_days:.1f} d"
                if e.status == "ok"
                else {
                    "above_range": "above the modelled range",
                    "empties": "none (the lake falls to the bottom of the relations)",
                }[e.status]  # fmt: skip
            ),
            f"today ({self.today}): stage {self.today_stage_m:.3f} m",
            (
                f"outlet ceases to flow at {self.cease_to_flow_stage_m:.3f} m; smallest inflow "
                f"that keeps it flowing {self.minimum_inflow_to_flow_m3s:.4g} m3/s"
                if math.isfinite(self.cease_to_flow_stage_m)
                else "no outlet rating: the lake loses water by evaporation, seepage and "
                "withdrawals only"
            ),
        ]

        def table(title: str, frame: pd.DataFrame, empty: str) -> list[str]:
            if frame.empty:
                return ["", f"{title} {empty}"]
            from .display import text_table

            return ["", title, text_table(frame)]

        lines += table(
            "largest sustained inflow that keeps the lake at or below each level:",
            self.limits,
            "none ([levels] names no stage)",
        )
        lines += table(
            "response time tau(h) = A(h) / (dLoss/dh):", self.response, "none (no stage given)"
        )
        from .display import text_table

        if "residence_outflow_days" in self.residence:
            lines += [
                "",
                "residence time (mean volume / mean outflow; / mean total losses), days:",
                text_table(self.residence[["residence_outflow_days", "residence_losses_days"]]),
            ]
            if (
                self.residence[["residence_outflow_days", "residence_losses_days"]]
                .isna()
                .any(axis=None)
            ):
                lines.append("  (-: no outflow or no loss in that period)")
        if self.what_if:
            lines += ["", "what-if (from today's stage):"]
            for w in self.what_if:
                st = (
                    f"equilibrium {w.equilibrium.stage_m:.3f} m, 95% reached in "
                    f"{w.time_to_95_days:.1f} d"
                    if w.equilibrium.status == "ok"
                    else f"no equilibrium in range ({w.equilibrium.status})"
                )
                lines.append(f"  {w.label}: {st}")
        lines += ["", *self.notes, "", self.caution]
        return Summary("\n".join(lines), "lake dynamics")


def analyse_dynamics(
    lake: LakeModel,
    *,
    inflow_m3s: float,
    today: str,
    today_stage_m: float,
    levels: dict[str, float] | None = None,
    stages: dict[str, float] | None = None,
    residence: pd.DataFrame | None = None,
    changes: tuple[tuple[str, dict], ...] = (),
    notes: tuple[str, ...] = (),
) -> Dynamics:
    """Every dynamics figure of a lake model (see :class:`Dynamics`).

    Parameters
    ----------
    lake : LakeModel
        The lake.
    inflow_m3s : float
        Sustained inflow, m³/s.
    today, today_stage_m : str, float
        Date and stage (m) of today's state.
    levels : dict, optional
        Named stages (m) for the inflow limits.
    stages : dict, optional
        Named stages (m) for the response times (default: the levels).
    residence : pandas.DataFrame, optional
        From :func:`residence_times`.
    changes : tuple of (label, dict)
        What-if cases: keyword arguments of :meth:`LakeModel.what_if` (``outflow_fn``,
        ``demand_m3s``, ``evaporation_scale``).
    notes : tuple of str
    """
    levels = dict(levels or {})
    stages = dict(stages if stages is not None else levels)
    lo, hi = lake.stage_range_m
    h = np.array(list(stages.values()), dtype=float)
    response = pd.DataFrame(
        {
            "stage_m": h,
            "area_m2": np.asarray(lake.area_fn(h), dtype=float) if h.size else h,
            "loss_slope_m2s": lake.loss_derivative(h) if h.size else h,
            "response_time_days": lake.response_time_s(h) / SECONDS_PER_DAY if h.size else h,
        },
        index=pd.Index(list(stages), name="label"),
    )
    lv = np.array(list(levels.values()), dtype=float)
    limits = pd.DataFrame(
        {
            "stage_m": lv,
            "max_inflow_m3s": [lake.inflow_for_stage(x) for x in lv],
            "within_range": (lv >= lo) & (lv <= hi),
        },
        index=pd.Index(list(levels), name="level"),
    )
    cases = [lake.what_if(inflow_m3s, today_stage_m, label="as is")]
    for label, kwargs in changes:
        cases.append(lake.what_if(inflow_m3s, today_stage_m, label=label, **kwargs))
    return Dynamics(
        residence=residence if residence is not None else pd.DataFrame(),
        response=response,
        inflow_m3s=float(inflow_m3s),
        equilibrium=lake.equilibrium(inflow_m3s),
        limits=limits,
        cease_to_flow_stage_m=lake.cease_to_flow_stage(),
        minimum_inflow_to_flow_m3s=lake.minimum_inflow_to_flow(),
        today=today,
        today_stage_m=float(today_stage_m),
        what_if=tuple(cases),
        rates={
            "evaporation_m_per_d": lake.evaporation_m_per_d,
            "rain_m_per_d": lake.rain_m_per_d,
            "demand_m3s": lake.demand_m3s,
        },
        lake=lake,
        notes=tuple(notes),
    )


@dataclass(frozen=True)
class WhatIfRequest:
    """Changes to analyse beside the lake as it is (each one a what-if case).

    Parameters
    ----------
    outlet : dict of str to float
        Rating parameters changed (``{"sill.e": 9.5}``, SI), e.g. a lowered sill.
    demand_m3s : float, optional
        A changed stage-independent demand (withdrawals and releases), m³/s.
    evaporation_scale : float, optional
        A factor (-) on the mean evaporation depth.
    """

    outlet: dict[str, float] = field(default_factory=dict)
    demand_m3s: float | None = None
    evaporation_scale: float | None = None


def mean_depth_m_per_d(daily: pd.DataFrame, column: str) -> float:
    """Record mean of a surface term as a depth: Σ volume / Σ area over the days with both (m/d).

    Parameters
    ----------
    daily : pandas.DataFrame
        The daily balance table: ``area_m2`` (m²) and ``column`` (m³ per day).
    column : str
        ``"evaporation_m3"`` or ``"rain_m3"``.
    """
    ok = daily["area_m2"].notna()
    if float(daily.loc[ok, "area_m2"].sum()) <= 0:
        return 0.0
    sel = ok & daily[column].notna()
    if not sel.any():
        return 0.0
    return float(daily.loc[sel, column].sum() / daily.loc[sel, "area_m2"].sum())


def _outlet_change(rating: Any, outlet: dict[str, float]) -> tuple[str, dict]:
    """The what-if case of changed rating parameters (SI)."""
    from .errors import ConfigError, suggest

    if rating is None:
        raise ConfigError("an outlet what-if needs an [outlet] rating")
    names = list(rating.param_names)
    vec = np.asarray(rating.vector, dtype=float).copy()
    for key, value in outlet.items():
        if key not in names:
            raise ConfigError(
                f"unknown rating parameter '{key}'{suggest(key, names)}; parameters are "
                + ", ".join(names)
            )
        vec[names.index(key)] = float(value)
    row = vec[None, :]

    def changed(h, _row=row):
        h = np.asarray(h, dtype=float)
        return rating.discharge_with(_row, h[None, ...])[0]

    label = "outlet " + ", ".join(f"{k} = {v:g}" for k, v in outlet.items())
    return label, {"outflow_fn": changed}


def _warn_levels_outside(laws: LakeLaws) -> None:
    lo, hi = laws.min_stage_m, laws.max_stage_m
    outside = {k: v for k, v in laws.levels.items() if not lo <= v <= hi}
    if outside and laws.above != "error" and laws.below != "error":
        import warnings

        from .errors import ExtrapolationWarning

        warnings.warn(
            "named level(s) outside the storage relation "
            f"({lo:.4g} to {hi:.4g} m): "
            + ", ".join(f"{k} {v:.4g} m" for k, v in outside.items())
            + f"; the area there follows the relation's policies (below '{laws.below}', "
            f"above '{laws.above}')",
            ExtrapolationWarning,
            stacklevel=3,
        )


def dynamics_of_lake(
    laws: LakeLaws,
    daily: pd.DataFrame,
    water_year_start: int,
    *,
    inflow_m3s: float | None = None,
    what_if: WhatIfRequest | None = None,
    stages: dict[str, float] | None = None,
    notes: tuple[str, ...] = (),
) -> Dynamics:
    """Residence, response and equilibrium analysis of a lake from its laws and its balance.

    Parameters
    ----------
    laws : LakeLaws
        Storage relation, rating, seepage law (or None) and named levels.
    daily : pandas.DataFrame
        The daily balance table (:attr:`lakebalance.balance.Balance.daily`, m³ per day).
    water_year_start : int
        First month of the water year.
    inflow_m3s : float, optional
        Sustained inflow, m³/s (default: the mean gauged inflow of the record).
    what_if : WhatIfRequest, optional
        Changes analysed beside the lake as it is.
    stages : dict, optional
        Named stages (m) for the response times, added to the levels and the record's 10th,
        50th and 90th percentile stages.
    notes : tuple of str
        Notes carried into the result.

    Notes
    -----
    Evaporation and rain enter as their record means (m per day, :func:`mean_depth_m_per_d`)
    times the area at each stage; demand as the record mean of withdrawals and releases.
    """
    from .errors import RangeError

    d = daily
    notes_list = list(notes)
    evap = mean_depth_m_per_d(d, "evaporation_m3")
    rain = mean_depth_m_per_d(d, "rain_m3")
    demand = float((d["withdrawal_m3"] + d["release_m3"]).mean() / SECONDS_PER_DAY)
    if not np.isfinite(demand):
        raise RangeError(
            "no day of the stage record has the withdrawals and releases: their records do not "
            "overlap the stage record"
        )
    if inflow_m3s is None:
        inflow_m3s = float(d["inflow_m3"].mean() / SECONDS_PER_DAY)
        if not np.isfinite(inflow_m3s):
            raise RangeError(
                "no day of the stage record has a gauged inflow (the inflow records do not "
                "overlap it): give the sustained inflow (m3/s) with --inflow"
            )
        notes_list.append(
            f"sustained inflow: the record's mean gauged inflow, {inflow_m3s:.4g} m3/s"
        )
    levels = dict(laws.levels)
    _warn_levels_outside(laws)
    lo, hi = laws.min_stage_m, laws.max_stage_m
    if laws.above == "extend" and levels:
        hi = max(hi, *levels.values())  # named levels above the survey: area extended
    lake = LakeModel(
        area_fn=laws.area,
        outflow_fn=laws.outflow,
        seepage_fn=laws.seepage,
        evaporation_m_per_d=evap,
        rain_m_per_d=rain,
        demand_m3s=demand,
        stage_range_m=(lo, hi),
    )
    if laws.seepage is not None:
        notes_list.append("net seepage law from the residual included in the losses")
    changes: list[tuple[str, dict]] = []
    what_if = what_if or WhatIfRequest()
    if what_if.outlet:
        changes.append(_outlet_change(laws.rating, what_if.outlet))
    if what_if.demand_m3s is not None:
        changes.append(
            (f"demand {what_if.demand_m3s:g} m3/s", {"demand_m3s": float(what_if.demand_m3s)})
        )
    if what_if.evaporation_scale is not None:
        scale = what_if.evaporation_scale
        changes.append((f"evaporation x {scale:g}", {"evaporation_scale": scale}))
    stage = d["stage_m"].dropna()
    chosen = dict(levels)
    for q in (10, 50, 90):
        chosen[f"record p{q}"] = float(stage.quantile(q / 100))
    chosen.update(stages or {})
    seep_m3 = (
        pd.Series(laws.seepage(d["stage_m"].to_numpy()) * SECONDS_PER_DAY, index=d.index)
        if laws.seepage is not None
        else None
    )
    residence = residence_times(d, water_year_start, seepage_m3=seep_m3)
    return analyse_dynamics(
        lake,
        inflow_m3s=float(inflow_m3s),
        today=stage.index[-1].date().isoformat(),
        today_stage_m=float(stage.iloc[-1]),
        levels=levels,
        stages=chosen,
        residence=residence,
        changes=tuple(changes),
        notes=tuple(notes_list),
    )
