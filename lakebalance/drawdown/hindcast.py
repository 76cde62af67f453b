"""Hindcast skill of the drawdown outlook: the outlook started at past dates, scored on the record.

For each start date ``s`` (every ``every`` days through the record, where the stage is recorded
at the start and over the following ``days``), the scenario's forcing is built from the history
with the start's own future — the days ``s+1 .. s+days`` — taken out (so that a replay cannot
draw the year that actually followed, and day-of-year means do not see it), and the outlook is
run from the recorded stage with the same engine, tables, dead level, demand and restriction
rules as :func:`~lakebalance.drawdown.forecast.run_forecast` (all starts' members in one
vectorised run, in chunks). It is then scored against what the record did:

* per named level and direction (falling to it from above, rising to it from below), the
  probability that the stage reaches it within the horizon against whether the record did:
  Brier score (Brier 1950) and its skill against the sample climatology of the same starts,
  ``BSS = 1 - BS / (o (1 - o))`` (Wilks 2011, section 8.4.2), with Murphy's (1973)
  decomposition from a reliability table of probability bins;
* the stage at the horizon: the continuous ranked probability score of the members
  (:func:`crps_ensemble`; Hersbach 2000, eq. 20; Gneiting & Raftery 2007, eq. 21), against two
  references: persistence (the start stage; its CRPS is the absolute error) and climatology
  (the recorded stages on the horizon's day of the year in the other years).

Starts a horizon apart or closer share days of the record, so that the scores of neighbouring
starts are not independent: the number of independent horizons is about the record length over
the horizon, which the summary states.

References
----------
Brier, G. W. (1950). Verification of forecasts expressed in terms of probability. Monthly
Weather Review 78(1), 1-3.
Murphy, A. H. (1973). A new vector partition of the probability score. Journal of Applied
Meteorology 12, 595-600.
Hersbach, H. (2000). Decomposition of the continuous ranked probability score for ensemble
prediction systems. Weather and Forecasting 15, 559-570.
Gneiting, T. & Raftery, A. E. (2007). Strictly proper scoring rules, prediction, and
estimation. Journal of the American Statistical Association 102, 359-378.
Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed. Academic Press.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..display import number, stage
from ..errors import ConfigError
from ..results import Summary
from .engine import build_tables, simulate
from .scenarios import build_forcing

if TYPE_CHECKING:  # pragma: no cover
    from ..laws import LakeLaws

__all__ = [
    "brier_score",
    "crps_ensemble",
    "reliability_table",
    "hindcast_starts",
    "Hindcast",
    "run_hindcast",
    "BINS",
]

#: Edges of the probability bins of the reliability table (-).
BINS = (0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0)

_MIN_COVERAGE = 0.95  # share of the horizon's days with a recorded stage for a start to be scored
_MEMBER_DAYS = 200_000  # member-days per engine run (a chunk: memory, and progress shown)


# ---- scores ---------------------------------------------------------------------------------
def brier_score(probability: Any, outcome: Any) -> np.ndarray:
    """Brier score of each forecast: ``(p - o)^2`` with ``o`` 1 when the event happened (Brier
    1950; its mean over forecasts is the Brier score of the set)."""
    p = np.asarray(probability, dtype=float)
    o = np.asarray(outcome, dtype=float)
    if np.any((p < 0) | (p > 1)) or np.any((o != 0) & (o != 1)):
        raise ValueError("probabilities must lie in [0, 1] and outcomes be 0 or 1")
    return (p - o) ** 2


def crps_ensemble(observation: Any, members: Any) -> np.ndarray:
    """Continuous ranked probability score of ensembles (the members' empirical distribution).

    ``CRPS = mean_i |x_i - y| - (1 / 2 m^2) sum_ij |x_i - x_j|`` (Gneiting & Raftery 2007,
    eq. 21), the second sum from the sorted members as ``2 sum_k (2k - m + 1) x_(k)``, k from 0.
    ``observation`` is (n,) or a scalar, ``members`` (n, m) or (m,); NaN members are left out.

    Returns
    -------
    ndarray (n,) or scalar, in the unit of the inputs.
    """
    y = np.asarray(observation, dtype=float)
    x = np.asarray(members, dtype=float)
    scalar = y.ndim == 0
    y = np.atleast_1d(y)
    x = x.reshape(1, -1) if x.ndim == 1 else x
    if x.shape[0] != y.size:
        raise ValueError("one ensemble per observation")
    out = np.empty(y.size)
    for i in range(y.size):
        xi = np.sort(x[i][np.isfinite(x[i])])
        m = xi.size
        if m == 0 or not np.isfinite(y[i]):
            out[i] = np.nan
            continue
        spread = 2.0 * np.sum((2.0 * np.arange(m) - m + 1.0) * xi)
        out[i] = np.mean(np.abs(xi - y[i])) - spread / (2.0 * m * m)
    return out[0] if scalar else out


def reliability_table(probability: Any, outcome: Any, bins: Sequence[float] = BINS) -> pd.DataFrame:
    """Reliability table: per probability bin the number of forecasts, their mean probability
    and the observed frequency (Wilks 2011, section 8.4.4). Bins are closed on the right, the
    first also on the left (p = 0 falls in the first bin)."""
    p = np.asarray(probability, dtype=float)
    o = np.asarray(outcome, dtype=float)
    edges = np.asarray(bins, dtype=float)
    k = np.clip(np.searchsorted(edges, p, side="left") - 1, 0, edges.size - 2)
    rows = []
    for b in range(edges.size - 1):
        sel = k == b
        n = int(sel.sum())
        rows.append(
            {
                "bin_low": float(edges[b]),
                "bin_high": float(edges[b + 1]),
                "forecasts": n,
                "mean_probability": float(p[sel].mean()) if n else np.nan,
                "observed_frequency": float(o[sel].mean()) if n else np.nan,
            }
        )
    return pd.DataFrame(rows)


def _murphy(table: pd.DataFrame, base_rate: float, n: int) -> tuple[float, float, float]:
    """(reliability, resolution, uncertainty) of Murphy (1973) from a reliability table; with
    probabilities binned, ``BS ~ REL - RES + UNC`` (exact when each bin holds one value)."""
    t = table[table["forecasts"] > 0]
    w = t["forecasts"].to_numpy() / n
    rel = float(np.sum(w * (t["mean_probability"] - t["observed_frequency"]) ** 2))
    res = float(np.sum(w * (t["observed_frequency"] - base_rate) ** 2))
    return rel, res, base_rate * (1.0 - base_rate)


# ---- starts ---------------------------------------------------------------------------------
def hindcast_starts(
    stage: pd.Series,
    days: int,
    every: int = 30,
    first: Any = None,
    last: Any = None,
    *,
    anniversary: Any = None,
) -> pd.DatetimeIndex:
    """Start dates every ``every`` days from the first recorded stage (or ``first``) to the last
    date whose whole horizon lies in the record (or ``last``), kept where the stage is recorded
    on the start day and on at least 95 % of the horizon's days, the last one included.

    With ``anniversary`` (a date), the starts are that day of the year in every year instead
    (29 February as 28 February in other years): the outlook's own season, year after year.
    """
    s = stage.dropna()
    if s.empty:
        raise ConfigError("the hindcast needs a stage record")
    t0 = pd.Timestamp(first).normalize() if first is not None else s.index[0]
    t1 = s.index[-1] - pd.Timedelta(days=days)
    if last is not None:
        t1 = min(t1, pd.Timestamp(last).normalize())
    if t1 < t0:
        raise ConfigError(
            f"the stage record ({s.index[0].date()} to {s.index[-1].date()}) is shorter than one "
            f"horizon of {days:,} days after the first start"
        )
    if anniversary is None:
        cand = pd.date_range(t0, t1, freq=f"{int(every)}D")
    else:
        a = pd.Timestamp(anniversary)
        cand = pd.DatetimeIndex(
            [
                pd.Timestamp(y, a.month, 28 if (a.month, a.day) == (2, 29) else a.day)
                for y in range(t0.year, t1.year + 1)
            ]
        )
        cand = cand[(cand >= t0) & (cand <= t1)]
    known = stage.notna()
    cum = np.concatenate([[0], np.cumsum(known.to_numpy())])
    pos = pd.Index(stage.index)
    keep = []
    for t in cand:
        i = pos.get_indexer([t])[0]
        j = pos.get_indexer([t + pd.Timedelta(days=days)])[0]
        if i < 0 or j < 0 or not known.iloc[i] or not known.iloc[j]:
            continue
        if (cum[j + 1] - cum[i + 1]) >= _MIN_COVERAGE * days:
            keep.append(t)
    return pd.DatetimeIndex(keep, name="start")


# ---- the hindcast ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Hindcast:
    """Scores of a hindcast (see the module docstring).

    ``events`` has one row per start, level and direction: the forecast probability of reaching
    the level within the horizon and whether the record did. ``skill`` has one row per level and
    direction: starts, base rate, Brier score, the climatology's, the skill score and Murphy's
    terms. ``reliability`` is the reliability table of all events pooled. ``stage`` has one row
    per start: recorded stage at the start and at the horizon, ensemble median, and CRPS of the
    ensemble, of persistence and of climatology (m).
    """

    scenario: str
    days: int
    every: int
    starts: int
    members_per_start: float
    years: int
    events: pd.DataFrame = field(repr=False)
    skill: pd.DataFrame = field(repr=False)
    reliability: pd.DataFrame = field(repr=False)
    stage: pd.DataFrame = field(repr=False)
    seed: int | None = None
    notes: tuple[str, ...] = ()

    @property
    def crps_m(self) -> float:
        """Mean CRPS of the stage at the horizon (m)."""
        return float(self.stage["crps_m"].mean())

    @property
    def crps_skill_climatology(self) -> float | None:
        """CRPS skill against climatology (-)."""
        ref = float(self.stage["crps_climatology_m"].mean())
        return 1.0 - self.crps_m / ref if ref > 0 else None

    @property
    def crps_skill_persistence(self) -> float | None:
        """CRPS skill against persistence (-)."""
        ref = float(self.stage["crps_persistence_m"].mean())
        return 1.0 - self.crps_m / ref if ref > 0 else None

    @property
    def independent_horizons(self) -> float:
        """Record span of the starts' horizons over one horizon: about the independent cases."""
        if self.stage.empty:
            return 0.0
        span = (self.stage.index[-1] - self.stage.index[0]).days + self.days
        return span / self.days

    def to_frame(self) -> pd.DataFrame:
        """The skill table (one row per level and direction)."""
        return self.skill

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready summary."""

        def rows(frame: pd.DataFrame) -> list[dict[str, Any]]:
            return [
                {k: _jsonable(v) for k, v in r.items()}
                for r in frame.reset_index().to_dict("records")
            ]

        return {
            "scenario": self.scenario,
            "days": self.days,
            "every_days": self.every,
            "starts": self.starts,
            "members_per_start": self.members_per_start,
            "years_of_record": self.years,
            "independent_horizons": self.independent_horizons,
            "seed": self.seed,
            "skill": rows(self.skill),
            "reliability": rows(self.reliability),
            "stage_at_horizon": {
                "crps_m": _jsonable(self.crps_m),
                "crps_persistence_m": _jsonable(float(self.stage["crps_persistence_m"].mean())),
                "crps_climatology_m": _jsonable(float(self.stage["crps_climatology_m"].mean())),
                "skill_vs_persistence": _jsonable(self.crps_skill_persistence),
                "skill_vs_climatology": _jsonable(self.crps_skill_climatology),
            },
            "notes": list(self.notes),
        }

    def summary(self) -> Summary:
        """The skill table as text."""
        lines = [
            f"Hindcast of the {self.scenario} outlook: {self.starts} starts every {self.every} "
            f"days, horizon {self.days} days, {self.members_per_start:.0f} members per start "
            f"(about {self.independent_horizons:.0f} independent horizons in the record)",
            "",
            f"{'level':<12}{'event':<10}{'starts':>7}{'happened':>10}{'Brier':>8}"
            f"{'clim.':>8}{'skill':>8}",
        ]
        for r in self.skill.itertuples():
            lines.append(
                f"{r.level:<12}{r.direction:<10}{r.starts:>7}{r.happened:>10}"
                f"{number(r.brier, decimals=3):>8}{number(r.brier_climatology, decimals=3):>8}"
                f"{_skill(r.brier_skill):>8}"
            )
        lines += [
            "",
            "stage at the horizon, CRPS (m): "
            f"outlook {stage(self.crps_m)}, persistence "
            f"{stage(self.stage['crps_persistence_m'].mean())} (skill "
            f"{_skill(self.crps_skill_persistence)}), climatology "
            f"{stage(self.stage['crps_climatology_m'].mean())} (skill "
            f"{_skill(self.crps_skill_climatology)})",
            "",
            "reliability (all levels pooled):",
            f"{'probability':<14}{'forecasts':>10}{'mean p':>9}{'observed':>10}",
        ]
        for r in self.reliability.itertuples():
            lines.append(
                f"{f'{r.bin_low:.1f}-{r.bin_high:.1f}':<14}{r.forecasts:>10}"
                f"{_f(r.mean_probability):>9}{_f(r.observed_frequency):>10}"
            )
        lines.append(
            "skill: 1 - Brier / Brier of the sample climatology of the same starts; "
            "'–' where the event never or always happened (no skill can be told)"
        )
        lines += [f"note: {n}" for n in self.notes]
        return Summary("\n".join(lines), "hindcast skill")


def _skill(x: Any) -> str:
    return "–" if x is None or not np.isfinite(x) else f"{x:+.2f}"


def _f(x: float) -> str:
    return number(x, decimals=2)


def _jsonable(v: Any) -> Any:
    if isinstance(v, pd.Timestamp):
        return v.date()
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, float | np.floating):
        return float(v) if np.isfinite(v) else None
    return v


def _schedule(dates: pd.DatetimeIndex, demand: float | Sequence[float]) -> np.ndarray:
    if isinstance(demand, int | float):
        return np.full(len(dates), float(demand))
    v = np.asarray(demand, dtype=float)
    if v.shape != (12,):
        raise ConfigError("a monthly demand needs 12 values (January to December), m³/s")
    return v[dates.month.to_numpy() - 1]


def run_hindcast(
    laws: LakeLaws,
    history: pd.DataFrame,
    stage: pd.Series,
    *,
    days: int,
    starts: pd.DatetimeIndex,
    scenario: str = "replay",
    every: int = 30,
    dead_level_m: float | None = None,
    demand_m3s: float | Sequence[float] | None = None,
    environmental_release_m3s: float = 0.0,
    restriction: Sequence[tuple[float, float]] = (),
    members: int = 100,
    rng: np.random.Generator | None = None,
    seed: int | None = None,
    method: str = "bootstrap",
    block_days: int = 30,
    stage_max_m: float | None = None,
    progress: Callable[[int], None] | None = None,
) -> Hindcast:
    """Start the outlook at each of ``starts`` without its own future and score it.

    Parameters
    ----------
    laws : LakeLaws
        The lake's laws and its named levels (those scored).
    history : pandas.DataFrame
        The drawdown history (:meth:`lakebalance.analysis.Lake.drawdown_history`, SI).
    stage : pandas.Series
        Recorded daily stage (m), what the outlook is scored against.
    days : int
        Horizon (days).
    starts : DatetimeIndex
        Start days (:func:`hindcast_starts`).
    scenario : str
        Scenario of :func:`~lakebalance.drawdown.scenarios.build_forcing` (``replay``,
        ``stochastic``, ``percentile``; ``constant`` has nothing to score).
    every : int
        Days between starts, for the outputs.
    dead_level_m, demand_m3s, environmental_release_m3s, restriction
        As in :class:`~lakebalance.drawdown.forecast.ForecastPlan`.
    members, rng, method, block_days
        Of the stochastic scenario.
    seed : int, optional
        The seed that made ``rng``, recorded.
    stage_max_m : float, optional
        Top of the engine's tables (m).
    progress : callable, optional
        Called with the number of starts scored, after each chunk.

    Returns
    -------
    Hindcast
    """
    if scenario == "constant":
        raise ConfigError("the 'constant' scenario has no spread to score: choose another")
    if len(starts) == 0:
        raise ConfigError("no start date of the hindcast has a recorded stage over its horizon")
    if scenario == "stochastic" and rng is None:
        rng = np.random.default_rng(seed)
    levels = dict(laws.levels)
    lo = laws.min_stage_m
    top_level = max(levels.values(), default=laws.max_stage_m)
    hi = stage_max_m
    if hi is None:
        hi = max(laws.max_stage_m, top_level + 1.0, float(stage.max()) + 1.0)
    floor = lo if dead_level_m is None else float(dead_level_m)
    tables = build_tables(
        laws.area,
        laws.outflow if laws.outflow is not None else _no_outflow,
        stage_min_m=lo,
        stage_max_m=hi,
        seepage=laws.seepage,
        environmental_release_m3s=environmental_release_m3s,
        floor_m=floor,
    )
    rules = [(float(t), float(c)) for t, c in restriction]
    stage = stage.astype(float)
    masked_cols = list(history.columns)
    pending: list[dict[str, Any]] = []
    results: list[dict[str, Any]] = []
    notes: list[str] = []

    def flush() -> None:
        if not pending:
            return
        inflow = np.concatenate([p["forcing"].inflow_m3s for p in pending], axis=1)
        net = np.concatenate(
            [p["forcing"].rain_m - p["forcing"].evaporation_m for p in pending], axis=1
        )
        demand = np.concatenate([p["demand"] for p in pending], axis=1)
        release = np.concatenate([p["forcing"].release_m3s for p in pending], axis=1)
        h0 = np.concatenate([np.full(p["forcing"].members, p["h0"]) for p in pending])
        res = simulate(tables, h0, inflow, net, demand, release_m3s=release, restriction=rules)
        path = res.stage_m[1:]
        k = 0
        for p in pending:
            m = p["forcing"].members
            seg = path[:, k : k + m]
            results.append({**p, "low": seg.min(axis=0), "high": seg.max(axis=0), "end": seg[-1]})
            del p["forcing"]
            k += m
        pending.clear()
        if progress is not None:
            progress(len(results))

    per_chunk = 0
    for s in starts:
        s = pd.Timestamp(s)
        h0 = float(stage.loc[s])
        window = slice(s + pd.Timedelta(days=1), s + pd.Timedelta(days=days))
        masked = history.copy()
        masked.loc[window, masked_cols] = np.nan  # the start's own future is left out
        try:
            forcing = build_forcing(
                masked, s, days, scenario, members=members, rng=rng,  # type: ignore[arg-type]
                method=method, block_days=block_days,  # type: ignore[arg-type]
            )  # fmt: skip
        except ConfigError as exc:
            notes.append(f"start {s.date()} left out: {exc.message}")
            continue
        if demand_m3s is None:
            demand = forcing.withdrawal_m3s
        else:
            demand = np.repeat(_schedule(forcing.dates, demand_m3s)[:, None], forcing.members, 1)
        observed = stage.loc[window]
        pending.append(
            {
                "start": s,
                "h0": h0,
                "forcing": forcing,
                "demand": demand,
                "obs_low": float(observed.min()),
                "obs_high": float(observed.max()),
                "obs_end": float(stage.loc[s + pd.Timedelta(days=days)]),
                "members": forcing.members,
            }
        )
        per_chunk += forcing.members * days
        if per_chunk >= _MEMBER_DAYS:
            flush()
            per_chunk = 0
    flush()
    notes.append(
        "each start's forcing leaves its own future out; the lake's laws (storage, rating, "
        "seepage) are those fitted to the whole record"
    )
    if not results:
        raise ConfigError("no start of the hindcast could be run: " + "; ".join(notes[:3]))
    return _score(results, levels, stage, scenario, days, every, seed, notes)


def _climatology_ensemble(stage: pd.Series, when: pd.Timestamp) -> np.ndarray:
    """Recorded stages on ``when``'s day of the year (29 February as 28) in the other years."""
    s = stage.dropna()
    idx = pd.DatetimeIndex(s.index)
    md = (when.month, min(when.day, 28) if when.month == 2 else when.day)
    day = np.where((idx.month == 2) & (idx.day == 29), 28, idx.day)
    sel = (idx.month == md[0]) & (day == md[1]) & (idx.year != when.year)
    return s.to_numpy()[sel]


def _score(
    results: list[dict[str, Any]],
    levels: dict[str, float],
    stage: pd.Series,
    scenario: str,
    days: int,
    every: int,
    seed: int | None,
    notes: list[str],
) -> Hindcast:
    event_rows = []
    for r in results:
        for name, lev in levels.items():
            if r["h0"] > lev:
                p = float(np.mean(r["low"] < lev))
                o = int(r["obs_low"] < lev)
                direction = "falling"
            else:
                p = float(np.mean(r["high"] > lev))
                o = int(r["obs_high"] > lev)
                direction = "rising"
            event_rows.append(
                {
                    "start": r["start"],
                    "level": name,
                    "stage_m": lev,
                    "direction": direction,
                    "probability": p,
                    "happened": o,
                }
            )
    events = pd.DataFrame(
        event_rows, columns=["start", "level", "stage_m", "direction", "probability", "happened"]
    )
    skill_rows = []
    order = sorted(levels, key=lambda k: -levels[k])
    for name in order:
        for direction in ("falling", "rising"):
            e = events[(events["level"] == name) & (events["direction"] == direction)]
            if e.empty:
                continue
            n = len(e)
            base = float(e["happened"].mean())
            bs = float(brier_score(e["probability"], e["happened"]).mean())
            ref = base * (1.0 - base)
            table = reliability_table(e["probability"], e["happened"])
            rel, res, unc = _murphy(table, base, n)
            skill_rows.append(
                {
                    "level": name,
                    "stage_m": levels[name],
                    "direction": direction,
                    "starts": n,
                    "happened": int(e["happened"].sum()),
                    "base_rate": base,
                    "mean_probability": float(e["probability"].mean()),
                    "brier": bs,
                    "brier_climatology": ref,
                    "brier_skill": 1.0 - bs / ref if ref > 0 else np.nan,
                    "reliability_term": rel,
                    "resolution_term": res,
                    "uncertainty_term": unc,
                }
            )
    skill = pd.DataFrame(
        skill_rows,
        columns=[
            "level", "stage_m", "direction", "starts", "happened", "base_rate",
            "mean_probability", "brier", "brier_climatology", "brier_skill",
            "reliability_term", "resolution_term", "uncertainty_term",
        ],
    )  # fmt: skip
    pooled = reliability_table(events["probability"], events["happened"])
    stage_rows = []
    for r in results:
        clim = _climatology_ensemble(stage, r["start"] + pd.Timedelta(days=days))
        stage_rows.append(
            {
                "start": r["start"],
                "start_stage_m": r["h0"],
                "observed_m": r["obs_end"],
                "median_m": float(np.median(r["end"])),
                "crps_m": float(crps_ensemble(r["obs_end"], r["end"])),
                "crps_persistence_m": abs(r["h0"] - r["obs_end"]),
                "crps_climatology_m": float(crps_ensemble(r["obs_end"], clim))
                if clim.size
                else np.nan,
            }
        )
    stage_frame = pd.DataFrame(stage_rows).set_index("start")
    first, last = stage.dropna().index[[0, -1]]
    return Hindcast(
        scenario=scenario,
        days=int(days),
        every=int(every),
        starts=len(results),
        members_per_start=float(np.mean([r["members"] for r in results])),
        years=int(round((last - first).days / 365.25)),
        events=events,
        skill=skill,
        reliability=pooled,
        stage=stage_frame,
        seed=seed,
        notes=tuple(dict.fromkeys(notes)),
    )


def _no_outflow(h: np.ndarray) -> np.ndarray:
    return np.zeros_like(np.asarray(h, dtype=float))
