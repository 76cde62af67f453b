"""The drought drawdown forecast: ensemble runs of the whole balance, as level-crossing odds.

:func:`run_forecast` takes the lake (storage relation, outlet rating with its spillway, seepage
law), the start state and a scenario's forcing (:mod:`.scenarios`), runs the engine
(:mod:`.engine`) and returns a frozen :class:`Forecast`: daily stage percentiles (a fan chart),
the probability of being below each named level on each day, the distribution of the days to
the first crossing of each level, the volume remaining above the dead level, and sentences to
quote. When restriction rules are given, the same members are also run without them, side by
side.

Caution: a forecast is a set of scenarios, not a prediction of the weather. Where it informs
public water supply or dam operation, the decisions rest with the responsible operator and the
licensed professionals under local codes.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..display import count_of, percent
from ..operations import OperatingRules, RestrictionLevel
from ..resources import check_memory
from ..results import Summary
from ..units import SECONDS_PER_DAY
from .engine import EngineResult, build_tables, simulate
from .scenarios import Forcing
from .support import (
    MIN_YEARS_FOR_CHANCE,
    can_quote_chance,
    clopper_pearson,
    percentile_supported,
    successes,
)

if TYPE_CHECKING:  # pragma: no cover
    from ..laws import LakeLaws

__all__ = [
    "Forecast",
    "LevelOdds",
    "MethodOdds",
    "METHOD_WORDS",
    "ForecastPlan",
    "ModelSamples",
    "run_forecast",
    "sample_model_uncertainty",
    "check_start_stage",
    "forecast_stage_max",
    "CAUTION",
    "PERCENTILES",
]

#: Stage percentiles of the fan chart (%).
PERCENTILES = (5, 10, 25, 50, 75, 90, 95)

CAUTION = (
    "These are scenario results, not weather predictions. Where they inform public water supply, "
    "dam operation or flood levels, decisions rest with the responsible operator and licensed "
    "professionals under local codes."
)


@dataclass(frozen=True)
class LevelOdds:
    """Crossing odds of one named level.

    ``direction`` is ``"falling"`` (members start above the level) or ``"rising"``;
    ``probability`` the share of members that cross it within the horizon; ``days_10/50/90``
    the days after the start by which 10/50/90 % of the members have crossed (None when fewer
    cross, or when the ensemble cannot support that percentile, see :mod:`.support`);
    ``dates_10/50/90`` the same as dates. ``crossed`` counts the members that cross;
    ``years_reached`` of ``years_total`` counts the historical years that reach the level (a
    replay; with model uncertainty drawn, a year counts when most of its runs reach it);
    ``interval`` is the exact binomial 95 % interval of the probability on the
    ``independent_years`` behind the ensemble (None for a constructed trace).
    """

    name: str
    stage_m: float
    direction: str
    probability: float
    days_10: float | None
    days_50: float | None
    days_90: float | None
    dates_10: _dt.date | None
    dates_50: _dt.date | None
    dates_90: _dt.date | None
    crossed: int = 0
    years_reached: int | None = None
    years_total: int | None = None
    interval: tuple[float, float] | None = None
    independent_years: int | None = None


def _odds(
    name: str,
    stage: float,
    days: np.ndarray,
    start: pd.Timestamp,
    direction: str,
    *,
    n_eff: int | None = None,
    member_year: np.ndarray | None = None,
    n_years: int | None = None,
    replay: bool = False,
) -> LevelOdds:
    m = days.size
    hit = np.isfinite(days)
    crossed = np.sort(days[hit])
    prob = crossed.size / m if m else 0.0
    out: dict[str, Any] = {}
    for q in (10, 50, 90):
        k = int(np.ceil(q / 100.0 * m)) - 1  # the member whose crossing makes q % crossed
        if 0 <= k < crossed.size and (m == 1 or percentile_supported(q, n_eff)):
            d = float(crossed[k])
            out[f"days_{q}"] = d
            out[f"dates_{q}"] = (start + pd.Timedelta(days=int(np.ceil(d)))).date()
        else:
            out[f"days_{q}"] = None
            out[f"dates_{q}"] = None
    years_reached = interval = None
    if replay and member_year is not None and n_years:
        runs = np.bincount(member_year, minlength=n_years)
        share = np.bincount(member_year, weights=hit.astype(float), minlength=n_years)
        share = np.divide(share, runs, out=np.zeros(n_years), where=runs > 0)
        years_reached = int(np.sum(share >= 0.5))
        interval = clopper_pearson(years_reached, n_years)
    elif n_eff:
        interval = clopper_pearson(successes(prob, n_eff), n_eff)
    return LevelOdds(
        name=name,
        stage_m=stage,
        direction=direction,
        probability=prob,
        crossed=int(crossed.size),
        years_reached=years_reached,
        years_total=n_years if replay else None,
        interval=interval,
        independent_years=n_eff,
        **out,
    )


@dataclass(frozen=True)
class MethodOdds:
    """One scenario method's crossing probabilities, for the side-by-side spread.

    ``probability`` maps level names to the share of members crossing within the horizon,
    ``interval`` to the exact binomial 95 % interval on ``independent_years``, ``years_reached``
    (replay only) to the count of historical years reaching the level.
    """

    method: str
    description: str
    members: int
    independent_years: int | None
    probability: dict[str, float]
    interval: dict[str, tuple[float, float] | None]
    years_reached: dict[str, int | None]

    @classmethod
    def of(cls, forecast: Forecast) -> MethodOdds:
        """The spread row of a forecast."""
        return cls(
            method=forecast.method,
            description=METHOD_WORDS.get(forecast.method, forecast.method),
            members=forecast.members,
            independent_years=forecast.independent_years,
            probability={o.name: o.probability for o in forecast.odds},
            interval={o.name: o.interval for o in forecast.odds},
            years_reached={o.name: o.years_reached for o in forecast.odds},
        )

    def to_dict(self) -> dict[str, Any]:
        return {
            "method": self.method,
            "description": self.description,
            "members": self.members,
            "independent_years": self.independent_years,
            "levels": {
                k: {
                    "probability_by_horizon": p,
                    "interval_95": None if self.interval[k] is None else list(self.interval[k]),
                    "years_reached": self.years_reached[k],
                }
                for k, p in self.probability.items()
            },
        }


#: Words for each scenario method, as the outlook names them.
METHOD_WORDS = {
    "replay": "replay of the historical years",
    "esp": "historical years weighted by likeness to the present (ESP)",
    "bootstrap": "30-day block bootstrap of the historical years",
    "ar1": "daily seasonal AR(1) of log inflow",
    "monthly": "persistent monthly AR(1) of log inflow with fragments",
    "percentile": "the dry trace at the stated horizon-volume percentile",
    "constant": "a constant inflow",
}


@dataclass(frozen=True)
class Forecast:
    """An ensemble drawdown forecast (see the module docstring).

    Tables are indexed by date, the first row being the start day (its end-of-day state):
    ``stage_percentiles`` (m, columns ``p5``..``p95``), ``probability_below`` (-, one column per
    level), ``volume_percentiles`` (m³ above the dead level). ``stage_m`` holds every member's
    path (days + 1, members); ``crossing_days`` the fractional days to first crossing of each
    level per member (NaN: not crossed). ``unrestricted`` is the same forecast without the
    restriction rules (None when there are none).
    """

    scenario: str
    start: _dt.date
    start_stage_m: float
    days: int
    members: int
    labels: tuple[str, ...]
    levels: dict[str, float]
    dead_level_m: float
    stage_m: np.ndarray = field(repr=False)
    dates: pd.DatetimeIndex = field(repr=False)
    stage_percentiles: pd.DataFrame = field(repr=False)
    probability_below: pd.DataFrame = field(repr=False)
    volume_percentiles: pd.DataFrame = field(repr=False)
    crossing_days: dict[str, np.ndarray] = field(repr=False)
    odds: tuple[LevelOdds, ...]
    withdrawn_m3: np.ndarray = field(repr=False)  # (members,) total withdrawal + release drawn
    demand_m3: float  # total demand before restrictions of the mean member (m³)
    restricted: bool
    unrestricted: Forecast | None = field(default=None, repr=False)
    seed: int | None = None
    sampled_uncertainty: bool = False
    refined_member_days: int = 0
    notes: tuple[str, ...] = ()
    #: the scenario method (replay, esp, bootstrap, ar1, monthly, percentile, constant)
    method: str = ""
    #: what the members are: "years", "members" (generated from the years) or "scenario"
    basis: str = "scenario"
    #: independent historical years behind the ensemble (None: a constructed trace)
    independent_years: int | None = None
    #: the historical years behind the members
    years: tuple[int, ...] = ()
    #: the uncertainties the outlook carries, and those it does not
    carried: tuple[str, ...] = ()
    not_carried: tuple[str, ...] = ()
    #: every scenario method's crossing probabilities, side by side (empty: not compared)
    method_spread: tuple[MethodOdds, ...] = ()
    #: window (days) of the ESP conditioning
    antecedent_days: int | None = None

    def level(self, name: str) -> LevelOdds:
        """The odds of the named level."""
        for o in self.odds:
            if o.name == name:
                return o
        raise KeyError(name)

    @property
    def support_years(self) -> int | None:
        """The independent sample size the rule of :mod:`.support` applies to: the historical
        years behind the ensemble, or, for one constructed trace with model uncertainty drawn,
        the draws (None for a single trace without them)."""
        if self.basis in ("years", "members"):
            return self.independent_years
        return self.members if self.members > 1 else None

    def level_sentences(self) -> dict[str, list[str]]:
        """The sentences of each level (see :meth:`sentences`), by level name."""
        parts_of: dict[str, list[str]] = {}
        horizon = (pd.Timestamp(self.start) + pd.Timedelta(days=self.days)).date()
        within = f"within {self.days} days (by {_fmt(horizon)})"
        n = self.support_years
        for o in self.odds:
            out: list[str] = []
            parts_of[o.name] = out
            verb = "falls to" if o.direction == "falling" else "rises to"
            what = f"the {o.name} level ({o.stage_m:.2f} m)"
            ci = "" if o.interval is None else f"95 % interval {_ci(o.interval)}"
            if self.basis == "scenario" and self.members == 1:
                out.append(
                    f"In the {self.scenario} scenario the lake {verb} {what} on "
                    f"{_fmt(o.dates_50)} (day {o.days_50:.1f})."
                    if o.dates_50 is not None
                    else f"In the {self.scenario} scenario the lake does not reach {what} {within}."
                )
                continue
            if self.basis == "scenario":
                text = (
                    f"Of {self.members:,} draws of the model uncertainty on the one "
                    f"{self.scenario} trace ({self.labels[0] if self.labels else ''}), "
                    f"{_share(o.probability)} reach {what} {within}"
                    " (a spread of the model, not of the weather)"
                )
            elif self.method == "replay" and o.years_reached is not None:
                text = (
                    f"Replaying the {o.years_total} historical years, the lake {verb} {what} "
                    f"{within} {count_of(o.years_reached, o.years_total)} ({ci}, exact binomial)"
                    if o.years_reached
                    else f"Replaying the {o.years_total} historical years, the lake reaches "
                    f"{what} {within} in none of them ({ci}, exact binomial: not impossible)"
                )
                if self.sampled_uncertainty:
                    text += (
                        f"; with the model uncertainty drawn, {_share(o.probability)} of the "
                        f"{self.members:,} runs do"
                    )
            elif self.method == "esp":
                text = (
                    f"Weighting the {len(self.years)} historical years by how like the present "
                    f"their last {self.antecedent_days} days of inflow were ({n} effective "
                    f"years), the lake {verb} {what} {within} in {_share(o.probability)} of the "
                    f"weighted runs"
                )
                text += _chance_or_count(o, n, ci)
            else:
                text = (
                    f"{_share(o.probability, capital=True)} of the {self.members:,} members of "
                    f"the {METHOD_WORDS.get(self.method, self.method)} (made from {n} historical "
                    f"years) {'fall' if o.direction == 'falling' else 'rise'} to {what} {within}"
                )
                text += _chance_or_count(o, n, ci)
            out.append(text + ".")
            parts = []
            for q, d in ((10, o.dates_10), (50, o.dates_50), (90, o.dates_90)):
                if d is not None:
                    who = f"{q} % of the runs reach {what}" if q != 50 else "half of them"
                    parts.append(f"{who} by {_fmt(d)}")
            if parts:
                text = "; ".join(parts)
                out.append(text[0].upper() + text[1:] + ".")
        return parts_of

    def key_sentences(self, k: int = 3) -> list[str]:
        """Up to ``k`` sentences for a headline: the levels that some but not all runs reach
        (the informative ones), then the methods' disagreement."""
        parts = self.level_sentences()
        keep = [o.name for o in self.odds if 0.0 < o.probability < 1.0] or [
            o.name for o in self.odds
        ]
        out = [parts[name][0] for name in keep if parts[name]]
        spread = [t for t in self.spread_sentences() if "disagree" in t]
        return (out[: max(k - len(spread[:1]), 1)] + spread[:1])[:k]

    def sentences(self) -> list[str]:
        """Plain sentences a manager can quote: per level the count or share of the runs that
        reach it, with its exact 95 % interval and the years behind it, worded by the rule of
        :mod:`.support`; then the spread across methods, what the outlook carries and does not,
        the restrictions' effect and the caution."""
        out: list[str] = [t for ts in self.level_sentences().values() for t in ts]
        out += self.spread_sentences()
        if self.carried:
            out.append("This outlook carries " + "; ".join(self.carried) + ".")
        if self.not_carried:
            out.append("It does not carry " + "; ".join(self.not_carried) + ".")
        if self.unrestricted is not None:
            for o, u in zip(self.odds, self.unrestricted.odds, strict=True):
                if o.probability == u.probability and o.days_50 == u.days_50:
                    continue
                text = (
                    f"With the restrictions, {_share(o.probability)} of the runs reach the "
                    f"{o.name} level within the horizon (without them: {_share(u.probability)})"
                )
                if o.days_50 is not None and u.days_50 is not None and o.days_50 != u.days_50:
                    text += f"; the median crossing comes {o.days_50 - u.days_50:+.0f} days later"
                out.append(text + ".")
        out.append(CAUTION)
        return out

    def spread_sentences(self, threshold: float = 0.10) -> list[str]:
        """One sentence per level on which the scenario methods differ by ``threshold`` (-) or
        more, naming each method's share; one sentence when they agree."""
        if len(self.method_spread) < 2:
            return []
        out = []
        agree = []
        for o in self.odds:
            ps = [r.probability[o.name] for r in self.method_spread]
            if max(ps) - min(ps) >= threshold:
                each = ", ".join(
                    f"{r.method} {_share(r.probability[o.name])}"
                    + (
                        f" ({r.years_reached[o.name]} of {r.independent_years} years)"
                        if r.years_reached[o.name] is not None
                        else ""
                    )
                    for r in self.method_spread
                )
                out.append(
                    f"The scenario methods disagree on the {o.name} level: {each} of the runs "
                    f"reach it within {self.days} days; the spread between them is part of the "
                    "uncertainty."
                )
            else:
                agree.append(o.name)
        if agree:
            out.append(
                f"For the {', '.join(agree)} level{'s' if len(agree) > 1 else ''} the "
                f"{len(self.method_spread)} scenario methods agree within "
                f"{threshold * 100:.0f} points."
            )
        return out

    def method_spread_frame(self) -> pd.DataFrame:
        """The methods side by side: probability (-) of reaching each level within the horizon,
        one row per method, with its members and independent years."""
        rows = []
        for r in self.method_spread:
            row: dict[str, Any] = {
                "method": r.method,
                "members": r.members,
                "independent_years": r.independent_years,
            }
            row.update({k: p for k, p in r.probability.items()})
            rows.append(row)
        return pd.DataFrame(rows).set_index("method") if rows else pd.DataFrame()

    def restriction_effect(self) -> pd.DataFrame:
        """Restricted and unrestricted runs side by side, per level: crossing probability and
        median days to crossing; plus the water drawn (m³, member mean)."""
        if self.unrestricted is None:
            raise ValueError("this forecast has no restriction rules")
        rows = []
        for o, u in zip(self.odds, self.unrestricted.odds, strict=True):
            rows.append(
                {
                    "level": o.name,
                    "stage_m": o.stage_m,
                    "probability_restricted": o.probability,
                    "probability_unrestricted": u.probability,
                    "median_days_restricted": o.days_50,
                    "median_days_unrestricted": u.days_50,
                }
            )
        frame = pd.DataFrame(rows).set_index("level")
        frame.attrs["withdrawn_m3_restricted"] = float(np.mean(self.withdrawn_m3))
        frame.attrs["withdrawn_m3_unrestricted"] = float(np.mean(self.unrestricted.withdrawn_m3))
        return frame

    def to_frame(self) -> pd.DataFrame:
        """Stage percentiles by day (:attr:`stage_percentiles`, m)."""
        return self.stage_percentiles

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready summary: per level the probability by the horizon and the 10/50/90 %
        days to crossing; start, scenario, members, seed and notes."""

        def level_dict(f: Forecast) -> dict[str, Any]:
            return {
                o.name: {
                    "stage_m": o.stage_m,
                    "direction": o.direction,
                    "probability_by_horizon": o.probability,
                    "days_to_crossing": {"p10": o.days_10, "p50": o.days_50, "p90": o.days_90},
                    "date_of_crossing": {"p10": o.dates_10, "p50": o.dates_50, "p90": o.dates_90},
                    "members_crossing": o.crossed,
                    "years_reached": o.years_reached,
                    "years_total": o.years_total,
                    "interval_95": None if o.interval is None else list(o.interval),
                }
                for o in f.odds
            }

        end = self.stage_percentiles.iloc[-1]
        out: dict[str, Any] = {
            "scenario": self.scenario,
            "start": self.start,
            "start_stage_m": self.start_stage_m,
            "days": self.days,
            "members": self.members,
            "seed": self.seed,
            "sampled_uncertainty": self.sampled_uncertainty,
            "dead_level_m": self.dead_level_m,
            "levels": level_dict(self),
            "method": self.method,
            "basis": self.basis,
            "independent_years": self.independent_years,
            "support_rule": {
                "chance_quoted_from_years": MIN_YEARS_FOR_CHANCE,
                "percentile_shown_when": "years * min(q, 100 - q) / 100 >= 1 (median always)",
            },
            "final_stage_m": {c: _num(end[c]) for c in self.stage_percentiles.columns},
            "final_volume_above_dead_m3": {
                c: _num(v) for c, v in self.volume_percentiles.iloc[-1].items()
            },
            "method_spread": [r.to_dict() for r in self.method_spread],
            "uncertainty": {"carried": list(self.carried), "not_carried": list(self.not_carried)},
            "restricted": self.restricted,
            "sentences": self.sentences(),
            "notes": list(self.notes),
            "caution": CAUTION,
        }
        if self.unrestricted is not None:
            out["unrestricted"] = {"levels": level_dict(self.unrestricted)}
            out["withdrawn_m3_mean"] = {
                "restricted": float(np.mean(self.withdrawn_m3)),
                "unrestricted": float(np.mean(self.unrestricted.withdrawn_m3)),
            }
        return out

    def summary(self) -> Summary:
        """A short text report: the odds per level (counts of years for a replay, shares with
        their exact 95 % interval otherwise), the stage at the horizon where the ensemble
        supports it, the methods side by side, the sentences and the notes."""
        n = self.support_years
        basis = {
            "years": f"{len(self.years)} historical years"
            + (f", {n} effective" if self.method == "esp" else ""),
            "members": f"made from {n} historical years",
            "scenario": "one constructed trace",
        }[self.basis]
        lines = [
            f"Drawdown forecast: {self.scenario}"
            + (f" ({self.method})" if self.method and self.method != self.scenario else "")
            + f", {self.members:,} members ({basis}), {self.days} days from "
            f"{self.start} (stage {self.start_stage_m:.3f} m)"
            + (f", seed {self.seed}" if self.seed is not None else ""),
            "",
            f"{'level':<14}{'stage m':>9}{'reached':>14}{'95% interval':>15}{'10% day':>9}"
            f"{'50% day':>9}{'90% day':>9}",
        ]
        for o in self.odds:
            reached = (
                f"{o.years_reached} of {o.years_total}"
                if o.years_reached is not None
                else percent(100.0 * o.probability)
            )
            lines.append(
                f"{o.name:<14}{o.stage_m:>9.2f}{reached:>14}"
                f"{(_ci(o.interval) if o.interval else '-'):>15}"
                + "".join(f"{_day(d):>9}" for d in (o.days_10, o.days_50, o.days_90))
            )
        end = self.stage_percentiles.iloc[-1]
        shown = [c for c in self.stage_percentiles.columns if np.isfinite(end[c])]
        hidden = [c for c in self.stage_percentiles.columns if c not in shown]
        lines += [
            "",
            "stage at the horizon (m): "
            + ", ".join(f"{c} {end[c]:.2f}" for c in shown)
            + (
                f" ({', '.join(hidden)} not shown: fewer than one independent year beyond them)"
                if hidden
                else ""
            ),
        ]
        if self.method_spread:
            names = [o.name for o in self.odds]
            lines += [
                "",
                "the scenario methods side by side (share of runs reaching each level):",
                f"{'method':<12}{'members':>9}{'years':>7}" + "".join(f"{k:>12}" for k in names),
            ]
            for r in self.method_spread:
                lines.append(
                    f"{r.method:<12}{r.members:>9,}{_int(r.independent_years):>7}"
                    + "".join(
                        f"{_reach(r.probability[k], r.years_reached[k], r.independent_years):>12}"
                        for k in names
                    )
                )
        lines += ["", *self.sentences()]
        if self.notes:
            lines += ["", "notes:", *(f"  - {n}" for n in self.notes)]
        return Summary("\n".join(lines), "drawdown forecast")

    def __str__(self) -> str:  # pragma: no cover - convenience
        return self.summary()


def _fmt(d: _dt.date) -> str:
    return f"{d.day} {d.strftime('%B %Y')}"


def _share(p: float, capital: bool = False) -> str:
    """A share of runs in words (``39 %``); "none" and "all" at the ends."""
    if p <= 0.0:
        return "None" if capital else "none"
    if p >= 1.0:
        return "All" if capital else "all"
    return percent(100.0 * p)


def _ci(interval: tuple[float, float]) -> str:
    lo, hi = interval
    return f"{percent(100.0 * lo).removesuffix(' %')}–{percent(100.0 * hi)}"


def _chance_or_count(o: LevelOdds, n: int | None, ci: str) -> str:
    """The rule of :mod:`.support`: a chance from 20 independent years up, else a count."""
    if not n:
        return ""
    if o.probability <= 0.0 or o.probability >= 1.0:
        return f" ({ci} on {n} independent years)"
    if can_quote_chance(n):
        return f": a {percent(100.0 * o.probability)} chance ({ci} on {n} independent years)"
    k = successes(o.probability, n)
    return (
        f"; on {n} independent years that is about {k} of {n} ({ci}), too few to quote as a "
        f"chance (the rule needs {MIN_YEARS_FOR_CHANCE})"
    )


def _int(v: int | None) -> str:
    return "-" if v is None else f"{v:,}"


def _reach(p: float, years: int | None, n: int | None) -> str:
    if years is not None and n:
        return f"{years}/{n}"
    return percent(100.0 * p)


def _num(v: Any) -> float | None:
    v = float(v)
    return v if np.isfinite(v) else None


def _day(d: float | None) -> str:
    return "-" if d is None else f"{d:.0f}"


def _demand_schedule(
    dates: pd.DatetimeIndex, demand_m3s: float | Sequence[float] | None
) -> np.ndarray | None:
    """(days,) demand from a constant or 12 monthly values (m³/s); None when not given."""
    if demand_m3s is None:
        return None
    if isinstance(demand_m3s, int | float):
        return np.full(len(dates), float(demand_m3s))
    values = np.asarray(demand_m3s, dtype=float)
    if values.shape != (12,):
        from ..errors import ConfigError

        raise ConfigError("a monthly demand needs 12 values (January to December), m³/s")
    return values[dates.month.to_numpy() - 1]


@dataclass(frozen=True)
class ForecastPlan:
    """What a forecast is asked: where it starts and how the lake is operated.

    Parameters
    ----------
    start : date
        Start day (the state is the end of this day).
    start_stage_m : float
        Stage at the start (m).
    scenario : str
        Scenario name, for the outputs.
    stage_max_m : float, optional
        Highest stage the tables need (m; default: the laws' surveyed range).
    dead_level_m : float, optional
        Stage (m) below which withdrawals and releases stop (default: the empty lake).
    demand_m3s : float or 12 floats, optional
        Withdrawal demand, constant or monthly (m³/s); default: the forcing's withdrawals.
    environmental_release_m3s : float
        Minimum downstream flow kept while above the dead level (m³/s).
    restriction : tuple of (trigger_m, cut)
        Demand cut by ``cut`` (-) on days starting below ``trigger_m`` (m).
    operations : OperatingRules, optional
        The site's operating rules (:mod:`lakebalance.operations`): gate release by month and
        stage, environmental minimum, spill, demand schedule and restriction levels (with
        monthly triggers, restore levels and lags). Its demand, when set, replaces
        ``demand_m3s``; its restriction levels join ``restriction``; its environmental release,
        when above zero, replaces ``environmental_release_m3s``.
    demand_dated : pandas.Series, optional
        The dated values of ``operations.demand.file`` (m³/s), read by the caller.
    """

    start: _dt.date | pd.Timestamp
    start_stage_m: float
    scenario: str
    stage_max_m: float | None = None
    dead_level_m: float | None = None
    demand_m3s: float | Sequence[float] | None = None
    environmental_release_m3s: float = 0.0
    restriction: tuple[tuple[float, float], ...] = ()
    operations: OperatingRules | None = None
    demand_dated: pd.Series | None = None


@dataclass(frozen=True, eq=False)
class ModelSamples:
    """Sampled model uncertainty of an ensemble: one evaporation factor per member and rating
    variants shared by the members.

    Parameters
    ----------
    evaporation_factor : ndarray (members,), optional
        Per-member factor (-) on evaporation.
    outflow_variants : callable, optional
        Stage array (n,) -> discharge (variants, n), m³/s: one row per sampled rating.
    variants : int
        Number of rating variants; members are assigned to them at random.
    notes : tuple of str
    seepage_variants : callable, optional
        Stage array (n,) -> net seepage (variants, n), m³/s: one seepage law per rating variant.
    carried : tuple of str
        The uncertainties drawn, in words for the outlook.
    """

    evaporation_factor: np.ndarray | None = None
    outflow_variants: Callable[[np.ndarray], np.ndarray] | None = None
    variants: int = 0
    notes: tuple[str, ...] = ()
    #: stage (n,) -> net seepage (variants, n), m³/s: the seepage law drawn per variant
    seepage_variants: Callable[[np.ndarray], np.ndarray] | None = None
    #: the uncertainties drawn, in words
    carried: tuple[str, ...] = ()


def sample_model_uncertainty(
    rating: Any,
    members: int,
    evaporation_sigma: float | None,
    rating_variants: int,
    rng: np.random.Generator,
    *,
    seepage: Any = None,
    seepage_constant: bool = False,
) -> ModelSamples:
    """Draw the model uncertainty of an ensemble.

    Parameters
    ----------
    rating : RatingFit, optional
        The fitted rating (None: no rating uncertainty).
    members : int
        Ensemble members.
    evaporation_sigma : float, optional
        Relative (1-σ) error of lake evaporation (-); 10 % when not given (assumed, no source).
    rating_variants : int
        Ratings drawn from the rating's parameter covariance, shared by the members.
    rng : numpy.random.Generator
        Source of the draws (evaporation factors first, then the ratings, then the seepage).
    seepage : SeepageFit, optional
        The seepage law carried into the forecast; one law per variant is drawn from its
        coefficients' (Newey–West) covariance.
    seepage_constant : bool
        The forecast carries the seepage rate at the mean stage (``[seepage] in_forecasts =
        'constant'``): the draws are of that rate.

    Notes
    -----
    Each member draws an evaporation factor ``max(1 + s z, 0)`` with z standard normal. Rating
    variant ``v`` and seepage draw ``v`` are independent and go together (one table row).
    """
    from ..errors import FitError

    notes: list[str] = []
    carried: list[str] = []
    sigma = evaporation_sigma
    if sigma is None:
        sigma = 0.10
        notes.append("evaporation error taken as 10 % (1 sigma): assumed, no source")
    factor = np.maximum(1.0 + sigma * rng.standard_normal(int(members)), 0.0)
    carried.append(
        f"the error of lake evaporation ({percent(100.0 * sigma)} at 1 sigma, a factor per run)"
    )
    variants_fn = None
    n_var = 0
    if rating is not None:
        try:
            params = rating.sample_params(rng, max(1, int(rating_variants)))
            n_var = params.shape[0]

            def variants_fn(x, params=params):
                grid = np.broadcast_to(np.asarray(x, dtype=float), (params.shape[0], len(x)))
                return rating.discharge_with(params, grid)

            carried.append(f"the rating curve's fitted uncertainty ({n_var:,} ratings drawn)")
        except FitError as exc:
            notes.append(f"rating uncertainty left out: {exc.message}")
    seep_fn = None
    if seepage is not None:
        cov = np.asarray(seepage.coef_cov, dtype=float)
        coef = np.asarray(seepage.coef, dtype=float)
        n_seep = n_var if n_var > 0 else max(1, int(rating_variants))
        if np.all(np.isfinite(cov)) and np.all(np.isfinite(coef)):
            draws = rng.multivariate_normal(coef, cov, size=n_seep, method="eigh")
            if seepage_constant:
                x0 = seepage._design(np.array([seepage.mean_stage_m]))[0]
                rates = draws @ x0

                def seep_fn(x, rates=rates):
                    return np.repeat(rates[:, None], len(x), axis=1)

            else:

                def seep_fn(x, draws=draws):
                    return seepage._design(np.asarray(x, dtype=float)) @ draws.T

                def _t(fn=seep_fn):  # (n, variants) -> (variants, n)
                    return lambda x: fn(x).T

                seep_fn = _t()
            carried.append(
                f"the seepage law's fitted uncertainty ({n_seep:,} laws drawn from its "
                "Newey-West covariance)"
            )
        else:
            notes.append("seepage uncertainty left out: its covariance is not finite")
    return ModelSamples(
        factor,
        variants_fn,
        n_var,
        tuple(notes),
        seepage_variants=seep_fn,
        carried=tuple(carried),
    )


def check_start_stage(start_stage_m: float, laws: LakeLaws) -> None:
    """Stop a forecast that would start outside the storage relation.

    A forecast may start above the survey by a tenth of its span when area is extended there;
    anywhere else outside the relation it would extrapolate blindly (often a stage in the wrong
    unit or on another datum), so it is one :class:`~lakebalance.errors.RangeError`.
    """
    from ..errors import RangeError

    lo, hi = laws.min_stage_m, laws.max_stage_m
    top = hi + (0.1 * (hi - lo) if laws.above == "extend" else 0.0)
    if not (lo - 1e-9 <= start_stage_m <= top + 1e-9):
        raise RangeError(
            f"the forecast's start stage {start_stage_m:.3f} m lies outside the storage relation "
            f"({lo:.2f} to {hi:.2f} m"
            + (f", extended to {top:.2f} m" if top > hi else "")
            + "); check the stage's units and datum, or give --start-stage"
        )


def forecast_stage_max(laws: LakeLaws, start_stage_m: float) -> float:
    """Highest stage the forecast's tables cover (m): a metre above the start and the highest
    level where the relation extends its area, else the surveyed top."""
    if laws.above != "extend":
        return laws.max_stage_m
    top_level = max(laws.levels.values(), default=laws.min_stage_m)
    return max(laws.max_stage_m, top_level + 1.0, float(start_stage_m) + 1.0)


def run_forecast(
    laws: LakeLaws,
    forcing: Forcing,
    plan: ForecastPlan,
    *,
    samples: ModelSamples | None = None,
    rng: np.random.Generator | None = None,
    seed: int | None = None,
    progress: Callable[[int], None] | None = None,
    notes: Sequence[str] = (),
    side_by_side: bool = True,
) -> Forecast:
    """Run an ensemble forecast from a lake and a scenario's forcing.

    Parameters
    ----------
    laws : LakeLaws
        Area, volume, outflow (m³/s; zero when None) and seepage of a stage, and the named
        levels whose crossing odds are reported.
    forcing : Forcing
        The scenario's forcing (:func:`~lakebalance.drawdown.scenarios.build_forcing`).
    plan : ForecastPlan
        Start, scenario name, dead level, demand, environmental release and restriction rules.
    samples : ModelSamples, optional
        Sampled evaporation factors and rating variants (:func:`sample_model_uncertainty`).
    rng : numpy.random.Generator, optional
        Used to assign members to rating variants.
    seed : int, optional
        The seed that made ``rng``, recorded in the result.
    progress : callable, optional
        Called with the number of days done.
    notes : sequence of str
        Notes carried into the result.
    side_by_side : bool
        With restriction rules, also run the members without them (:attr:`Forecast.unrestricted`).

    Returns
    -------
    Forecast
    """
    samples = samples or ModelSamples()
    notes = (*notes, *samples.notes)
    area, volume = laws.area, laws.volume
    outflow = laws.outflow if laws.outflow is not None else _no_outflow
    seepage = laws.seepage
    seepage_drawn = seepage is not None and samples.seepage_variants is not None
    if seepage_drawn:
        seepage = samples.seepage_variants
    levels = dict(laws.levels)
    lo = laws.min_stage_m
    hi = plan.stage_max_m if plan.stage_max_m is not None else laws.max_stage_m
    stage_range_m = (lo, hi)
    start, start_stage_m, scenario = plan.start, plan.start_stage_m, plan.scenario
    dead_level_m, demand_m3s = plan.dead_level_m, plan.demand_m3s
    environmental_release_m3s, restriction = plan.environmental_release_m3s, plan.restriction
    outflow_variants, variants = samples.outflow_variants, samples.variants
    evaporation_factor = samples.evaporation_factor
    lo, hi = stage_range_m
    floor = lo if dead_level_m is None else float(dead_level_m)
    out_fn = outflow_variants if outflow_variants is not None and variants > 0 else outflow
    ops = plan.operations or OperatingRules()
    out_fn = _with_spill(out_fn, ops)
    if ops.environmental_release > 0:
        environmental_release_m3s = ops.environmental_release
    _check_forecast_memory(forcing, samples, plan, hi - lo)
    tables = build_tables(
        area,
        out_fn,
        stage_min_m=lo,
        stage_max_m=hi,
        seepage=seepage,
        # with a gate release table the environmental minimum is the gate's (in the table)
        environmental_release_m3s=0.0 if ops.release is not None else environmental_release_m3s,
        floor_m=floor,
        gate_release=ops.gate_release_by_month if ops.release is not None else None,
    )
    forcing, evap = _with_evaporation_factors(forcing, evaporation_factor)
    m = forcing.members
    days = forcing.inflow_m3s.shape[0]
    net = forcing.rain_m - evap
    schedule = _demand_schedule(forcing.dates, demand_m3s)
    if ops.demand is not None:
        schedule = ops.demand.demand_m3s(forcing.dates, plan.demand_dated)
    demand = (
        forcing.withdrawal_m3s
        if schedule is None
        else np.broadcast_to(schedule[:, None], (days, m))
    )
    variant = None
    if tables.variants > 1:
        gen = rng if rng is not None else np.random.default_rng(0)
        variant = gen.integers(0, tables.variants, m)
    start_ts = pd.Timestamp(start)
    if forcing.basis in ("years", "members"):
        n_eff = forcing.independent_years
    else:
        n_eff = m if m > 1 else None
    carried, not_carried = _uncertainties(
        forcing, samples, laws, variant is not None, seepage_drawn
    )

    def one(
        rules: Sequence[tuple[float, float] | RestrictionLevel],
        prog: Callable[[int], None] | None,
    ) -> EngineResult:
        return simulate(
            tables,
            float(start_stage_m),
            forcing.inflow_m3s,
            net,
            demand,
            release_m3s=forcing.release_m3s,
            variant=variant,
            restriction=rules,
            months=forcing.dates.month.to_numpy(),
            levels=levels,
            progress=prog,
        )

    def wrap(res: EngineResult, restricted: bool, unrestricted: Forecast | None) -> Forecast:
        dates = pd.DatetimeIndex([start_ts, *forcing.dates], name="date")
        stage = res.stage_m
        v_floor = float(np.asarray(volume(np.array([floor])))[0])
        vol = np.maximum(np.asarray(volume(stage)) - v_floor, 0.0)
        sp, vp = (_percentile_table(x, dates, m, n_eff) for x in (stage, vol))
        below = pd.DataFrame({k: (stage < v).mean(axis=1) for k, v in levels.items()}, index=dates)
        odds = _level_odds(res.crossing_day, levels, start_ts, float(start_stage_m), n_eff, forcing)
        return Forecast(
            scenario=scenario,
            start=start_ts.date(),
            start_stage_m=float(start_stage_m),
            days=days,
            members=m,
            labels=tuple(forcing.labels),
            levels=levels,
            dead_level_m=floor,
            stage_m=stage,
            dates=dates,
            stage_percentiles=sp,
            probability_below=below,
            volume_percentiles=vp,
            crossing_days=res.crossing_day,
            odds=odds,
            withdrawn_m3=res.withdrawal_m3s.sum(axis=0) * SECONDS_PER_DAY,
            demand_m3=float(
                np.mean(demand.sum(axis=0) + forcing.release_m3s.sum(axis=0)) * SECONDS_PER_DAY
            ),
            restricted=restricted,
            unrestricted=unrestricted,
            seed=seed,
            sampled_uncertainty=evaporation_factor is not None or variant is not None,
            refined_member_days=res.refined_member_days,
            notes=(*notes, *forcing.notes),
            method=forcing.method or scenario,
            basis=forcing.basis,
            independent_years=n_eff if forcing.basis != "scenario" else None,
            years=tuple(forcing.years),
            carried=carried,
            not_carried=not_carried,
            antecedent_days=forcing.antecedent_days,
        )

    rules: list[tuple[float, float] | RestrictionLevel] = [
        (float(t), float(c)) for t, c in restriction
    ]
    rules += list(ops.restriction)
    if rules and not side_by_side:
        return wrap(one(rules, progress), True, None)
    if rules:
        free = wrap(one((), None), False, None)
        return wrap(one(rules, progress), True, free)
    return wrap(one((), progress), False, None)


def _with_evaporation_factors(
    forcing: Forcing, evaporation_factor: np.ndarray | None
) -> tuple[Forcing, np.ndarray]:
    """The forcing with as many members as sampled evaporation factors (members repeat the
    scenario's members, e.g. a replay year), and its evaporation (days, members) scaled by them
    (m/d)."""
    if evaporation_factor is None:
        return forcing, forcing.evaporation_m
    m, m_total = forcing.members, evaporation_factor.size
    if m != m_total:
        reps = -(-m_total // m)
        forcing = _take_members(forcing, np.tile(np.arange(m), reps)[:m_total])
    return forcing, forcing.evaporation_m * evaporation_factor[None, :]


def _level_odds(
    crossing_day: dict[str, np.ndarray],
    levels: dict[str, float],
    start: pd.Timestamp,
    start_stage_m: float,
    n_eff: int | None,
    forcing: Forcing,
) -> tuple[LevelOdds, ...]:
    """The odds of every level, highest first, counted on the forcing's years where they are
    the members."""
    return tuple(
        _odds(
            k,
            v,
            crossing_day[k],
            start,
            "falling" if start_stage_m > v else "rising",
            n_eff=n_eff,
            member_year=forcing.member_year,
            n_years=len(forcing.years) if forcing.basis == "years" else None,
            replay=forcing.method == "replay",
        )
        for k, v in sorted(levels.items(), key=lambda kv: -kv[1])
    )


def _percentile_table(
    values: np.ndarray, dates: pd.DatetimeIndex, members: int, n_eff: int | None
) -> pd.DataFrame:
    """Percentiles :data:`PERCENTILES` of ``values`` (days + 1, members) per day; by the rule of
    :mod:`.support`, NaN for a percentile the independent years cannot support."""
    pct = np.percentile(values, PERCENTILES, axis=1).T
    for i, p in enumerate(PERCENTILES):
        if members > 1 and not percentile_supported(p, n_eff):
            pct[:, i] = np.nan
    return pd.DataFrame(pct, index=dates, columns=[f"p{p}" for p in PERCENTILES])


def _with_spill(
    outflow: Callable[[np.ndarray], np.ndarray], ops: OperatingRules
) -> Callable[[np.ndarray], np.ndarray]:
    """The outlet law plus the rules' spill over a crest (rows of rating variants alike)."""
    if ops.spill is None:
        return outflow
    spill = ops.spill

    def with_spill(h: np.ndarray) -> np.ndarray:
        return np.asarray(outflow(h), dtype=float) + spill.spill_m3s(h)

    return with_spill


def _no_outflow(h: np.ndarray) -> np.ndarray:
    return np.zeros_like(np.asarray(h, dtype=float))


def _check_forecast_memory(
    forcing: Forcing, samples: ModelSamples, plan: ForecastPlan, span_m: float
) -> None:
    """Stop a forecast whose arrays would not fit, before they are made.

    Per member and day (float64): five forcing terms, the stage path, withdrawal and cut, the
    volume and the sorted copies of the percentiles, about 12 arrays (twice with restriction
    rules, which run the members again without them). Per rating variant: its discharge on the
    stage grid (at most 65,536 points, see :func:`~lakebalance.drawdown.engine.build_tables`),
    with its slope and two working copies.
    """
    days = forcing.inflow_m3s.shape[0]
    m = forcing.members
    if samples.evaporation_factor is not None:
        m = max(m, int(samples.evaporation_factor.size))
    ops_levels = plan.operations.restriction if plan.operations is not None else ()
    runs = 2 if plan.restriction or ops_levels else 1
    check_memory(
        8.0 * 12 * runs * (days + 1) * m,
        option="members",
        value=m,
        what=f"a forecast of {days:,} days",
    )
    if samples.variants > 0:
        grid = min(65_536, int(np.ceil(max(span_m, 0.0) / 0.001)) + 1)
        check_memory(
            8.0 * 4 * samples.variants * grid,
            option="rating_variants",
            value=samples.variants,
            what=f"the sampled ratings on a stage grid of {grid:,} points",
        )


def _take_members(forcing: Forcing, idx: np.ndarray) -> Forcing:
    import dataclasses

    return dataclasses.replace(
        forcing,
        inflow_m3s=forcing.inflow_m3s[:, idx],
        rain_m=forcing.rain_m[:, idx],
        evaporation_m=forcing.evaporation_m[:, idx],
        withdrawal_m3s=forcing.withdrawal_m3s[:, idx],
        release_m3s=forcing.release_m3s[:, idx],
        labels=tuple(forcing.labels[i] for i in idx),
        member_year=None if forcing.member_year is None else forcing.member_year[idx],
    )


def _uncertainties(
    forcing: Forcing, samples: ModelSamples, laws: Any, rating_drawn: bool, seepage_drawn: bool
) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """What the outlook carries and what it does not, in words."""
    n = forcing.independent_years
    weather = {
        "replay": f"the weather of {len(forcing.years)} historical years, each year's inflow, "
        "rain and evaporation together",
        "esp": f"the weather of {len(forcing.years)} historical years weighted by likeness to the "
        "present inflow",
        "bootstrap": f"the weather of {n} historical years in 30-day blocks",
        "ar1": "day-to-day inflow variability (daily AR(1))",
        "monthly": "month-to-month inflow persistence (periodic monthly AR(1)) with the days, "
        "rain and evaporation of historical months",
        "percentile": "one dry trace (the stated horizon-volume percentile)",
        "constant": "no weather variability (one constant inflow)",
    }.get(forcing.method, "the scenario's weather")
    carried = [weather]
    if samples.evaporation_factor is not None:
        carried += [c for c in samples.carried if "evaporation" in c]
    if rating_drawn:
        carried += [c for c in samples.carried if "rating" in c]
    if seepage_drawn:
        carried += [c for c in samples.carried if "seepage" in c]
    not_carried = []
    if samples.evaporation_factor is None:
        not_carried.append("the error of lake evaporation")
    if not rating_drawn and laws.outflow is not None:
        not_carried.append("the rating curve's uncertainty")
    if not seepage_drawn and laws.seepage is not None:
        not_carried.append("the seepage law's uncertainty")
    persistence = {
        "bootstrap": "dry spells longer than a 30-day block (built only by chance)",
        "ar1": "persistence beyond the daily AR(1)'s memory of days to weeks",
        "replay": "droughts longer or deeper than those of the record",
        "esp": "droughts longer or deeper than those of the record",
        "monthly": "persistence beyond one month's lag (multi-year droughts are understated)",
    }.get(forcing.method)
    if persistence:
        not_carried.append(persistence)
    not_carried += [
        "errors of the inflow, rain and stage records themselves and of the storage survey",
        "weather outside the record (trends, climate change)",
        "demand other than stated",
    ]
    return tuple(carried), tuple(not_carried)
