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

from ..operations import OperatingRules, RestrictionLevel
from ..resources import check_memory
from ..results import Summary
from ..units import SECONDS_PER_DAY
from .engine import EngineResult, build_tables, simulate
from .scenarios import Forcing

if TYPE_CHECKING:  # pragma: no cover
    from ..laws import LakeLaws

__all__ = [
    "Forecast",
    "LevelOdds",
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
    cross); ``dates_10/50/90`` the same as dates.
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


def _odds(
    name: str, stage: float, days: np.ndarray, start: pd.Timestamp, direction: str
) -> LevelOdds:
    m = days.size
    crossed = np.sort(days[np.isfinite(days)])
    prob = crossed.size / m if m else 0.0
    out: dict[str, Any] = {}
    for q in (10, 50, 90):
        k = int(np.ceil(q / 100.0 * m)) - 1  # the member whose crossing makes q % crossed
        if 0 <= k < crossed.size:
            d = float(crossed[k])
            out[f"days_{q}"] = d
            out[f"dates_{q}"] = (start + pd.Timedelta(days=int(np.ceil(d)))).date()
        else:
            out[f"days_{q}"] = None
            out[f"dates_{q}"] = None
    return LevelOdds(name=name, stage_m=stage, direction=direction, probability=prob, **out)


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

    def level(self, name: str) -> LevelOdds:
        """The odds of the named level."""
        for o in self.odds:
            if o.name == name:
                return o
        raise KeyError(name)

    def sentences(self) -> list[str]:
        """Plain sentences a manager can quote, one or two per level, then the caution."""
        out: list[str] = []
        horizon = (pd.Timestamp(self.start) + pd.Timedelta(days=self.days)).date()
        for o in self.odds:
            verb = "falling to" if o.direction == "falling" else "rising to"
            what = f"the {o.name} level ({o.stage_m:.2f} m)"
            if o.probability == 0.0:
                out.append(
                    f"No member of the {self.scenario} ensemble reaches {what} before "
                    f"{_fmt(horizon)}."
                )
                continue
            if self.members == 1:
                out.append(
                    f"The {self.scenario} scenario reaches {what} on {_fmt(o.dates_50)} "
                    f"(day {o.days_50:.1f})."
                    if o.dates_50 is not None
                    else f"The {self.scenario} scenario does not reach {what}."
                )
                continue
            parts = []
            for q, d in ((10, o.dates_10), (50, o.dates_50), (90, o.dates_90)):
                if d is not None:
                    parts.append(f"a {q}% chance of {verb} {what} by {_fmt(d)}")
            if parts:
                out.append("There is " + "; ".join(parts) + ".")
            out.append(
                f"Overall {o.probability:.0%} of the members reach {what} within {self.days} days "
                f"(by {_fmt(horizon)})."
            )
        if self.unrestricted is not None:
            for o, u in zip(self.odds, self.unrestricted.odds, strict=True):
                if o.probability == u.probability and o.days_50 == u.days_50:
                    continue
                text = (
                    f"With the restrictions, the chance of reaching the {o.name} level within the "
                    f"horizon is {o.probability:.0%} (without them: {u.probability:.0%})"
                )
                if o.days_50 is not None and u.days_50 is not None and o.days_50 != u.days_50:
                    text += f"; the median crossing comes {o.days_50 - u.days_50:+.0f} days later"
                out.append(text + ".")
        out.append(CAUTION)
        return out

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
            "final_stage_m": {c: float(end[c]) for c in self.stage_percentiles.columns},
            "final_volume_above_dead_m3": {
                c: float(v) for c, v in self.volume_percentiles.iloc[-1].items()
            },
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
        """A short text report."""
        lines = [
            f"Drawdown forecast: {self.scenario}, {self.members} members, {self.days} days from "
            f"{self.start} (stage {self.start_stage_m:.3f} m)"
            + (f", seed {self.seed}" if self.seed is not None else ""),
            "",
            f"{'level':<14}{'stage m':>9}{'P(cross)':>10}{'10% day':>9}{'50% day':>9}"
            f"{'90% day':>9}",
        ]
        for o in self.odds:
            lines.append(
                f"{o.name:<14}{o.stage_m:>9.2f}{o.probability:>10.0%}"
                + "".join(f"{_day(d):>9}" for d in (o.days_10, o.days_50, o.days_90))
            )
        end = self.stage_percentiles.iloc[-1]
        lines += [
            "",
            "stage at the horizon (m): "
            + ", ".join(f"{c} {end[c]:.2f}" for c in self.stage_percentiles.columns),
            "",
            *self.sentences(),
        ]
        if self.notes:
            lines += ["", "notes:", *(f"  - {n}" for n in self.notes)]
        return Summary("\n".join(lines), "drawdown forecast")

    def __str__(self) -> str:  # pragma: no cover - convenience
        return self.summary()


def _fmt(d: _dt.date) -> str:
    return f"{d.day} {d.strftime('%B %Y')}"


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
    """

    evaporation_factor: np.ndarray | None = None
    outflow_variants: Callable[[np.ndarray], np.ndarray] | None = None
    variants: int = 0
    notes: tuple[str, ...] = ()


def sample_model_uncertainty(
    rating: Any,
    members: int,
    evaporation_sigma: float | None,
    rating_variants: int,
    rng: np.random.Generator,
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
        Source of the draws (evaporation factors first, then the ratings).

    Notes
    -----
    Each member draws an evaporation factor ``max(1 + s z, 0)`` with z standard normal.
    """
    from ..errors import FitError

    notes: list[str] = []
    sigma = evaporation_sigma
    if sigma is None:
        sigma = 0.10
        notes.append("evaporation error taken as 10 % (1 sigma): assumed, no source")
    factor = np.maximum(1.0 + sigma * rng.standard_normal(int(members)), 0.0)
    variants_fn = None
    n_var = 0
    if rating is not None:
        try:
            params = rating.sample_params(rng, max(1, int(rating_variants)))
            n_var = params.shape[0]

            def variants_fn(x, params=params):
                grid = np.broadcast_to(np.asarray(x, dtype=float), (params.shape[0], len(x)))
                return rating.discharge_with(params, grid)

        except FitError as exc:
            notes.append(f"rating uncertainty left out: {exc.message}")
    return ModelSamples(factor, variants_fn, n_var, tuple(notes))


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

    Returns
    -------
    Forecast
    """
    samples = samples or ModelSamples()
    notes = (*notes, *samples.notes)
    area, volume = laws.area, laws.volume
    outflow = laws.outflow if laws.outflow is not None else _no_outflow
    seepage = laws.seepage
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
    m = forcing.members
    days = forcing.inflow_m3s.shape[0]
    evap = forcing.evaporation_m
    if evaporation_factor is not None:
        m_total = evaporation_factor.size
        if m != m_total:  # members repeat the scenario's members (a replay year, a percentile)
            reps = -(-m_total // m)
            idx = np.tile(np.arange(m), reps)[:m_total]
            forcing = _take_members(forcing, idx)
            m = m_total
            evap = forcing.evaporation_m
        evap = evap * evaporation_factor[None, :]
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
        pct = np.percentile(stage, PERCENTILES, axis=1).T
        sp = pd.DataFrame(pct, index=dates, columns=[f"p{p}" for p in PERCENTILES])
        below = pd.DataFrame({k: (stage < v).mean(axis=1) for k, v in levels.items()}, index=dates)
        v_floor = float(np.asarray(volume(np.array([floor])))[0])
        vol = np.maximum(np.asarray(volume(stage)) - v_floor, 0.0)
        vp = pd.DataFrame(
            np.percentile(vol, PERCENTILES, axis=1).T,
            index=dates,
            columns=[f"p{p}" for p in PERCENTILES],
        )
        odds = tuple(
            _odds(
                k,
                v,
                res.crossing_day[k],
                start_ts,
                "falling" if start_stage_m > v else "rising",
            )
            for k, v in sorted(levels.items(), key=lambda kv: -kv[1])
        )
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
        )

    rules: list[tuple[float, float] | RestrictionLevel] = [
        (float(t), float(c)) for t, c in restriction
    ]
    rules += list(ops.restriction)
    if rules:
        free = wrap(one((), None), False, None)
        return wrap(one(rules, progress), True, free)
    return wrap(one((), progress), False, None)


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
    )
