"""Yield and reliability of a lake through its record: firm yield, storage–yield, RRV, supply days.

* :func:`firm_yield` — the largest constant (or seasonally patterned) demand the lake meets through
  the whole record without its intake failing at a named level, by simulation of the record with
  the lake's fitted laws (the drawdown engine, :mod:`.engine`), with the critical period dated;
* :func:`sequent_peak` and :func:`storage_yield_curve` — the storage a yield needs (sequent-peak
  analysis of the net inflow, the record run twice), and the curve over a set of yields;
* :func:`rrv` and :func:`record_performance` — reliability, resilience and vulnerability of a
  demand operated under restriction rules through the record (Hashimoto et al. 1982);
* :func:`days_of_supply` — days until the intake fails from a given stage under a stated dry
  scenario (a constant inflow, zero by default), over a horizon of several years.

Firm yield by simulation
------------------------
A candidate demand ``D`` (m³/s) is withdrawn every day, ``D f_m`` in month ``m`` when twelve
monthly factors ``f`` (mean 1) give a pattern; inflow, rain and evaporation are the record's own,
gaps filled with their day-of-year means. The lake starts at the record's first stage (or a
given stage) and runs through the record with its outlet rating, spillway, seepage law and
minimum environmental release. The intake stops at the *failure level* (it draws in full down to
one centimetre above it, :func:`~lakebalance.drawdown.engine.build_tables`), so that a demand
*fails* on the first day on which less than the demand is drawn. The lowest stage of the record
falls monotonically with the demand (more withdrawal, lower stage on every day: the comparison
principle of the scalar balance equation), so that the firm yield is the boundary between met and
failed demands; it is bracketed by evaluating ``candidates`` demands at once (one ensemble member
per demand) and narrowing the bracket to the pair that straddles the boundary, until it is tighter
than ``rtol``.

The critical period runs from the start of the drawdown — the last day before the lowest stage
on which the lake stood at its starting ("full") stage, within 5 mm — to the lowest stage
(McMahon & Adeloye 2005: from the last full reservoir to the empty one; from memory).

Sequent peak
------------
With net inflow ``Q_t`` and demand ``D_t`` (volumes per period), the deficit
``K_t = max(0, K_{t-1} + D_t - Q_t)`` from ``K_0 = 0``, run through the record twice so that a
critical period that wraps round the end is seen; the storage needed is ``max K_t``
(Thomas & Burden 1963; Loucks & van Beek 2017, section 11.2.2). It knows no outlet below the
spill level: on a lake with a natural outlet below its full level the simulated firm yield is
smaller than the sequent-peak yield of the same storage.

References
----------
Hashimoto, T., Stedinger, J. R. & Loucks, D. P. (1982). Reliability, resiliency, and vulnerability
criteria for water resource system performance evaluation. Water Resources Research 18(1), 14-20.
McMahon, T. A. & Adeloye, A. J. (2005). Water Resources Yield. Water Resources Publications.
Loucks, D. P. & van Beek, E. (2017). Water Resource Systems Planning and Management. Springer.

Caution: yields computed from a record of a few decades describe that record, not the future;
where they inform public water supply or dam safety, decisions rest with the responsible operator
and licensed professionals under local codes.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..display import SI, number, percent, quantity, stage
from ..errors import ConfigError
from ..operations import OperatingRules, RestrictionLevel
from ..results import Summary
from ..units import SECONDS_PER_DAY
from .engine import EngineResult, LakeTables, build_tables, simulate
from .scenarios import TERMS, climatology

if TYPE_CHECKING:  # pragma: no cover
    from ..laws import LakeLaws

__all__ = [
    "RecordForcing",
    "record_forcing",
    "yield_tables",
    "FirmYield",
    "firm_yield",
    "critical_period",
    "SequentPeak",
    "sequent_peak",
    "StorageYield",
    "storage_yield_curve",
    "Performance",
    "rrv",
    "record_performance",
    "SupplyDays",
    "days_of_supply",
    "monthly_factors",
    "RecordPerformance",
    "YieldStudy",
    "CAUTION",
]

CAUTION = (
    "Yields and reliabilities describe the record, not the future: a longer or drier future "
    "sequence gives less. Where they inform public water supply or dam safety, decisions rest "
    "with the responsible operator and licensed professionals under local codes."
)

_RAMP_M = 0.01  # m: the intake draws in full from this height above the failure level up

_FLOW = SI.of("flow")[1]  # display labels of the summaries (SI display units)
_VOLUME = SI.of("volume")[1]
_LENGTH = SI.of("length")[1]


def _flow(x: float) -> str:
    return f"{quantity(x, 'flow')} {_FLOW}"


def _volume(x: float) -> str:
    return f"{quantity(x, 'volume')} {_VOLUME}"


def _stage(x: float) -> str:
    return f"{stage(x)} {_LENGTH}"


def _share(x: float | None) -> str:
    return percent(100.0 * x) if x is not None else "–"


def _reliable(x: float | None) -> str:
    """A reliability to one decimal (99.6 % is not 100 %)."""
    return f"{number(100.0 * x, decimals=1)} %" if x is not None else "–"


# ---- the record as the forcing of one run ---------------------------------------------------
@dataclass(frozen=True)
class RecordForcing:
    """The record's daily forcing (SI), gaps filled with the day-of-year mean.

    ``inflow_m3s``, ``net_depth_m`` (rain minus evaporation, m per day) and ``release_m3s``
    are (days,); ``filled`` says per term how many days were filled.
    """

    dates: pd.DatetimeIndex
    inflow_m3s: np.ndarray
    net_depth_m: np.ndarray
    release_m3s: np.ndarray
    filled: dict[str, int]

    @property
    def days(self) -> int:
        """Number of days."""
        return int(self.dates.size)


def _doy(index: pd.DatetimeIndex) -> np.ndarray:
    d = index.day_of_year.to_numpy() - 1
    leap = index.is_leap_year & (d >= 59)
    return np.where(leap, d - 1, d)


def record_forcing(
    history: pd.DataFrame, start: Any = None, end: Any = None, *, evaporation_factor: float = 1.0
) -> RecordForcing:
    """The record between ``start`` and ``end`` (inclusive; default all of it) as one forcing.

    Parameters
    ----------
    history : pandas.DataFrame
        Daily history with any of :data:`~lakebalance.drawdown.scenarios.TERMS` (m³/s; m per day).
    start, end : date-like, optional
    evaporation_factor : float
        Factor on lake evaporation (-), for a what-if.
    """
    h = history.loc[start:end] if (start is not None or end is not None) else history
    if h.empty:
        raise ConfigError("the record has no days in the period asked for")
    index = pd.DatetimeIndex(h.index)
    doy = _doy(index)
    filled: dict[str, int] = {}
    out: dict[str, np.ndarray] = {}
    for term in TERMS:
        if term not in history.columns:
            out[term] = np.zeros(len(h))
            continue
        clim = np.nan_to_num(climatology(history[term]), nan=0.0)  # from the whole record
        v = h[term].to_numpy(dtype=float)
        bad = ~np.isfinite(v)
        filled[term] = int(bad.sum())
        out[term] = np.where(bad, clim[doy], v)
    return RecordForcing(
        dates=index,
        inflow_m3s=np.maximum(out["inflow_m3s"], 0.0),
        net_depth_m=np.maximum(out["rain_m"], 0.0) - evaporation_factor * out["evaporation_m"],
        release_m3s=np.maximum(out["release_m3s"], 0.0),
        filled=filled,
    )


def yield_tables(
    laws: LakeLaws,
    failure_level_m: float,
    *,
    environmental_release_m3s: float = 0.0,
    stage_max_m: float | None = None,
    operations: OperatingRules | None = None,
) -> LakeTables:
    """The engine's tables of the lake with its intake stopping at ``failure_level_m`` (m),
    under the site's operating rules when given (gate release by month and stage, spill over a
    crest, environmental minimum: the same rules as the drawdown outlook's)."""
    from .forecast import _with_spill

    ops = operations or OperatingRules()
    outflow = laws.outflow if laws.outflow is not None else _no_outflow
    outflow = _with_spill(outflow, ops)
    if ops.environmental_release > 0:
        environmental_release_m3s = ops.environmental_release
    hi = laws.max_stage_m if stage_max_m is None else float(stage_max_m)
    return build_tables(
        laws.area,
        outflow,
        stage_min_m=laws.min_stage_m,
        stage_max_m=hi,
        seepage=laws.seepage,
        # with a gate release table the environmental minimum is the gate's (in the table)
        environmental_release_m3s=0.0 if ops.release is not None else environmental_release_m3s,
        floor_m=float(failure_level_m),
        ramp_m=_RAMP_M,
        gate_release=ops.gate_release_by_month if ops.release is not None else None,
    )


def _no_outflow(h: np.ndarray) -> np.ndarray:
    return np.zeros_like(np.asarray(h, dtype=float))


def monthly_factors(values: float | Sequence[float] | None) -> np.ndarray:
    """Twelve demand factors of mean 1 (-) from twelve monthly demands, or all ones.

    A single number or None gives a constant demand (all factors 1).
    """
    if values is None or isinstance(values, int | float):
        return np.ones(12)
    v = np.asarray(values, dtype=float)
    if v.shape != (12,) or not np.all(np.isfinite(v)) or np.any(v < 0) or v.sum() <= 0:
        raise ConfigError("a demand pattern needs 12 non-negative monthly values, not all zero")
    return v / v.mean()


def _run(
    tables: LakeTables,
    forcing: RecordForcing,
    start_stage_m: float,
    demand_m3s: np.ndarray,
    pattern: np.ndarray,
    restriction: Sequence[tuple[float, float] | RestrictionLevel] = (),
    progress: Callable[[int], None] | None = None,
) -> tuple[EngineResult, np.ndarray]:
    """Run the record with one member per demand (m³/s, (k,)); returns the engine result and the
    daily demand (days, k) before restrictions."""
    k = demand_m3s.size
    days = forcing.days
    month = forcing.dates.month.to_numpy() - 1
    demand = pattern[month][:, None] * demand_m3s[None, :]
    res = simulate(
        tables,
        float(start_stage_m),
        np.broadcast_to(forcing.inflow_m3s[:, None], (days, k)),
        np.broadcast_to(forcing.net_depth_m[:, None], (days, k)),
        demand,
        release_m3s=np.broadcast_to(forcing.release_m3s[:, None], (days, k)),
        restriction=restriction,
        months=forcing.dates.month.to_numpy(),
        progress=progress,
    )
    return res, demand


def _shortage(
    res: EngineResult, demand: np.ndarray, release: np.ndarray, *, restricted: bool
) -> np.ndarray:
    """(days, k) shortfall (m³/s): what was asked (after the cut when ``restricted``) less what
    was drawn; zero within a relative 1e-6."""
    asked = demand * (1.0 - res.cut) if restricted else demand
    asked = asked + release[:, None]
    short = asked - res.withdrawal_m3s
    return np.where(short > 1e-6 * np.maximum(asked, 1e-12), short, 0.0)


# ---- firm yield -----------------------------------------------------------------------------
@dataclass(frozen=True)
class FirmYield:
    """The firm yield of a lake through its record (see the module docstring).

    ``demand_m3s`` is the mean daily demand of the pattern at the firm yield (m³/s; the
    largest met), ``bracket_m3s`` the met and failed demands around it, ``factors`` the twelve
    monthly factors (mean 1). ``stage_m`` is the daily stage at the firm yield (days + 1, from
    the start), on ``dates``.
    """

    demand_m3s: float
    bracket_m3s: tuple[float, float]
    factors: tuple[float, ...]
    failure_level: str
    failure_level_m: float
    start_stage_m: float
    period: tuple[_dt.date, _dt.date]
    mean_inflow_m3s: float
    lowest_stage_m: float
    lowest_date: _dt.date
    critical_start: _dt.date
    critical_end: _dt.date
    refill_date: _dt.date | None
    evaluations: int
    dates: pd.DatetimeIndex = field(repr=False)
    stage_m: np.ndarray = field(repr=False)
    notes: tuple[str, ...] = ()

    @property
    def critical_days(self) -> int:
        """Length of the critical period (days)."""
        return (self.critical_end - self.critical_start).days

    @property
    def share_of_inflow(self) -> float:
        """Firm yield as a share of the mean inflow (-); NaN without inflow."""
        return self.demand_m3s / self.mean_inflow_m3s if self.mean_inflow_m3s > 0 else np.nan

    def to_frame(self) -> pd.DataFrame:
        """Daily stage at the firm yield (m)."""
        return pd.DataFrame({"stage_m": self.stage_m}, index=self.dates)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready summary."""
        return {
            "firm_yield_m3s": self.demand_m3s,
            "firm_yield_m3_per_day": self.demand_m3s * SECONDS_PER_DAY,
            "bracket_m3s": list(self.bracket_m3s),
            "share_of_mean_inflow": _num(self.share_of_inflow),
            "monthly_factors": list(self.factors),
            "failure_level": self.failure_level,
            "failure_level_m": self.failure_level_m,
            "start_stage_m": self.start_stage_m,
            "record": {"start": self.period[0], "end": self.period[1]},
            "mean_inflow_m3s": self.mean_inflow_m3s,
            "lowest_stage_m": self.lowest_stage_m,
            "lowest_date": self.lowest_date,
            "critical_period": {
                "start": self.critical_start,
                "end": self.critical_end,
                "days": self.critical_days,
                "refill_date": self.refill_date,
            },
            "evaluations": self.evaluations,
            "notes": list(self.notes),
        }

    def summary(self) -> Summary:
        """A short text report."""
        d = self.demand_m3s
        pattern = "constant" if np.allclose(self.factors, 1.0) else "monthly pattern"
        share = self.share_of_inflow
        lines = [
            f"Firm yield through the record {self.period[0]} to {self.period[1]} ({pattern}): "
            f"{_flow(d)} ({_volume(d * SECONDS_PER_DAY)} a day"
            + (f", {_share(share)} of the mean inflow)" if np.isfinite(share) else ")"),
            f"  without the intake failing at the {self.failure_level} level "
            f"({_stage(self.failure_level_m)}), starting at {_stage(self.start_stage_m)}",
            f"  critical period: {self.critical_start} to {self.critical_end} "
            f"({self.critical_days:,} days), lowest stage {_stage(self.lowest_stage_m)}"
            + (f"; back by {self.refill_date}" if self.refill_date else "; not back by the end"),
        ]
        lines += [f"  note: {n}" for n in self.notes]
        return Summary("\n".join(lines), "firm yield")


def _num(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


def critical_period(
    stage_m: np.ndarray, full_m: float, *, tol_m: float = 0.005
) -> tuple[int, int, int | None]:
    """(start, lowest, refill) indices into ``stage_m`` of the critical period.

    ``lowest`` is the first day of the lowest stage; ``start`` the last day before it on which
    the stage stood at the full level ``full_m`` (within ``tol_m``; capped at the highest stage
    before the lowest, so that a lake that never comes back to it starts from its highest);
    ``refill`` the first day after ``lowest`` back at that level (None: not within the record).
    """
    s = np.asarray(stage_m, dtype=float)
    low = int(np.argmin(s))
    full = min(float(full_m), float(np.max(s[: low + 1])))
    near = np.flatnonzero(s[: low + 1] >= full - tol_m)
    start = int(near[-1])
    back = np.flatnonzero(s[low:] >= full - tol_m)
    refill = int(back[0]) + low if back.size else None
    return start, low, refill


def firm_yield(
    laws: LakeLaws,
    forcing: RecordForcing,
    *,
    failure_level_m: float,
    failure_level: str = "failure",
    start_stage_m: float,
    pattern: Sequence[float] | None = None,
    environmental_release_m3s: float = 0.0,
    stage_max_m: float | None = None,
    rtol: float = 1e-3,
    candidates: int = 8,
    progress: Callable[[int], None] | None = None,
    operations: OperatingRules | None = None,
) -> FirmYield:
    """The firm yield through the record by simulation, with its critical period.

    Parameters
    ----------
    laws : LakeLaws
        The lake's laws (storage, outlet with spillway, seepage).
    forcing : RecordForcing
        The record (:func:`record_forcing`).
    failure_level_m : float
        Stage (m) at which the intake fails; the demand must be met above it on every day.
    failure_level : str
        Its name, for the outputs.
    start_stage_m : float
        Stage (m) at the start of the record.
    pattern : 12 floats, optional
        Monthly demand factors (normalised to mean 1); default constant.
    environmental_release_m3s : float
        Minimum flow kept downstream above the failure level (m³/s), not part of the yield.
    stage_max_m : float, optional
        Top of the engine's tables (m).
    rtol : float
        Relative width of the final bracket (-).
    candidates : int
        Demands evaluated together in each round (ensemble members); the bracket narrows by
        ``candidates + 1`` per round.
    progress : callable, optional
        Called with the number of rounds done.
    operations : OperatingRules, optional
        The site's release, spill and environmental rules (its restriction levels do not
        apply: the firm yield is met in full).

    Returns
    -------
    FirmYield
    """
    factors = monthly_factors(pattern)
    if start_stage_m <= failure_level_m:
        raise ConfigError(
            f"the start stage {start_stage_m:.2f} m is not above the {failure_level} level "
            f"({failure_level_m:.2f} m): there is no yield to find"
        )
    hi_stage = stage_max_m
    if hi_stage is None:
        hi_stage = max(laws.max_stage_m, float(start_stage_m) + 1.0)
    tables = yield_tables(
        laws,
        failure_level_m,
        environmental_release_m3s=environmental_release_m3s,
        stage_max_m=hi_stage,
        operations=operations,
    )
    notes: list[str] = []
    seconds = forcing.days * SECONDS_PER_DAY
    v = laws.volume(np.array([failure_level_m, start_stage_m], dtype=float))
    store = max(float(v[1] - v[0]), 0.0)
    a_top = float(np.max(laws.area(np.array([start_stage_m], dtype=float))))
    gain = (
        forcing.inflow_m3s.mean() + max(forcing.net_depth_m.mean(), 0.0) * a_top / SECONDS_PER_DAY
    )
    upper = max((gain + store / seconds) * 2.0 / factors.max(), 1e-6)

    def failed(demands: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        res, demand = _run(tables, forcing, start_stage_m, demands, factors)
        short = _shortage(res, demand, forcing.release_m3s, restricted=False)
        return short.max(axis=0) > 0.0, res.stage_m

    # the first round spans [0, upper] with its ends; later rounds the open bracket
    evaluations = 0
    lo, hi = 0.0, upper
    best_stage = None
    trial = np.linspace(0.0, upper, candidates)
    rounds = 0
    while True:
        bad, stage_k = failed(trial)
        evaluations += trial.size
        rounds += 1
        if progress is not None:
            progress(rounds)
        if rounds == 1 and bad[0]:
            notes.append(
                "the record's releases or the environmental release alone fail at the failure "
                "level: firm yield zero"
            )
            best_stage = stage_k[:, 0]
            hi = 0.0
            break
        if rounds == 1 and not bad[-1]:
            if upper > 1e3 * (gain + store / seconds + 1e-6):
                raise ConfigError(
                    "no demand fails through the record: the firm yield is not bounded"
                )
            upper *= 4.0
            hi = upper
            trial = np.linspace(0.0, upper, candidates)
            rounds = 0
            continue
        ok = np.flatnonzero(~bad)
        nok = np.flatnonzero(bad)
        if ok.size:
            j = int(ok.max())
            if trial[j] >= lo:
                lo, best_stage = float(trial[j]), stage_k[:, j]
        if nok.size:
            hi = min(hi, float(trial[nok.min()]))
        if hi - lo <= rtol * hi:
            break
        trial = np.linspace(lo, hi, candidates + 2)[1:-1]
    best = lo
    if best_stage is None:  # pragma: no cover - the first round always has demand 0
        raise AssertionError("no met demand")
    stage = best_stage
    dates = pd.DatetimeIndex([forcing.dates[0] - pd.Timedelta(days=1), *forcing.dates])
    start, low, refill = critical_period(stage, start_stage_m)
    for term, n in forcing.filled.items():
        if n:
            notes.append(f"{n} day(s) of {term.split('_')[0]} filled with the day-of-year mean")
    return FirmYield(
        demand_m3s=float(best),
        bracket_m3s=(float(best), float(hi)),
        factors=tuple(float(f) for f in factors),
        failure_level=failure_level,
        failure_level_m=float(failure_level_m),
        start_stage_m=float(start_stage_m),
        period=(forcing.dates[0].date(), forcing.dates[-1].date()),
        mean_inflow_m3s=float(forcing.inflow_m3s.mean()),
        lowest_stage_m=float(stage[low]),
        lowest_date=dates[low].date(),
        critical_start=dates[start].date(),
        critical_end=dates[low].date(),
        refill_date=dates[refill].date() if refill is not None else None,
        evaluations=evaluations,
        dates=dates,
        stage_m=stage,
        notes=tuple(notes),
    )


# ---- sequent peak ---------------------------------------------------------------------------
@dataclass(frozen=True)
class SequentPeak:
    """Result of a sequent-peak analysis: ``storage`` (the volume unit of the inputs),
    ``deficit`` (the running deficit ``K_t`` over the passes), ``peak`` the index of its
    maximum and ``start`` the index of the last zero before it (0-based, periods of the first
    pass counted from 0; an index past the record length is in the second pass)."""

    storage: float
    deficit: np.ndarray = field(repr=False)
    peak: int
    start: int


def sequent_peak(inflow: Any, demand: Any, *, passes: int = 2) -> SequentPeak:
    """Sequent-peak storage of a demand: ``K_t = max(0, K_{t-1} + D_t - Q_t)``, storage max K.

    Parameters
    ----------
    inflow : array (n,)
        Net inflow per period (any volume unit).
    demand : float or array (n,)
        Demand per period (same unit).
    passes : int
        Times the record is run (2: a critical period wrapping round the end is seen). With more
        than one pass, a demand larger than the record's inflow needs infinite storage.

    Returns
    -------
    SequentPeak

    References
    ----------
    Thomas, H. A. & Burden, R. P. (1963). Operations Research in Water Quality Management.
    Harvard University. Loucks & van Beek (2017), section 11.2.2.
    """
    q = np.asarray(inflow, dtype=float).ravel()
    d = np.broadcast_to(np.asarray(demand, dtype=float), q.shape)
    if q.size == 0 or not np.all(np.isfinite(q)) or not np.all(np.isfinite(d)):
        raise ValueError("sequent peak needs finite inflow and demand")
    if passes > 1 and float(np.sum(d - q)) > 0.0:
        # more demand than inflow over the record: no storage meets it in a repeated record
        return SequentPeak(
            storage=float("inf"), deficit=np.full(q.size * passes, np.inf), peak=0, start=0
        )
    x = np.tile(d - q, int(passes))
    # K_t = max(0, K_{t-1} + x_t) = S_t - min(0, min_{s<=t} S_s), S the cumulative sum (Lindley)
    s = np.cumsum(x)
    k = s - np.minimum(np.minimum.accumulate(s), 0.0)
    k = np.maximum(k, 0.0)
    peak = int(np.argmax(k))
    zeros = np.flatnonzero(k[: peak + 1] <= 0.0)
    start = int(zeros[-1]) + 1 if zeros.size else 0
    return SequentPeak(storage=float(k[peak]), deficit=k, peak=peak, start=start)


@dataclass(frozen=True)
class StorageYield:
    """A storage–yield curve: ``yields_m3s`` and the ``storage_m3`` each needs (sequent peak of
    the monthly net inflow), the ``available_m3`` between the start and failure levels, and
    ``yield_at_available_m3s`` read off the curve (linear between points)."""

    yields_m3s: np.ndarray
    storage_m3: np.ndarray
    available_m3: float
    yield_at_available_m3s: float | None
    mean_net_inflow_m3s: float
    area_m2: float
    months: int

    def to_frame(self) -> pd.DataFrame:
        """One row per yield: m³/s, share of the mean net inflow, storage m³."""
        return pd.DataFrame(
            {
                "yield_m3s": self.yields_m3s,
                "share_of_net_inflow": self.yields_m3s / self.mean_net_inflow_m3s
                if self.mean_net_inflow_m3s > 0
                else np.nan,
                "storage_m3": self.storage_m3,
            }
        )

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready curve."""
        return {
            "method": "sequent peak of the monthly net inflow, record run twice",
            "area_m2": self.area_m2,
            "months": self.months,
            "mean_net_inflow_m3s": self.mean_net_inflow_m3s,
            "available_storage_m3": self.available_m3,
            "yield_at_available_storage_m3s": self.yield_at_available_m3s,
            "curve": [
                {"yield_m3s": float(y), "storage_m3": float(s)}
                for y, s in zip(self.yields_m3s, self.storage_m3, strict=True)
            ],
        }

    def summary(self) -> Summary:
        """A short table."""
        lines = [
            f"Storage-yield (sequent peak, {self.months} months of net inflow on "
            f"{quantity(self.area_m2, 'area')} {SI.of('area')[1]}, record run twice)",
            f"{'yield ' + _FLOW:>14}{'share':>8}{'storage ' + _VOLUME:>22}",
        ]
        share = self.to_frame()["share_of_net_inflow"].to_numpy()
        for y, f, v in zip(self.yields_m3s, share, self.storage_m3, strict=True):
            lines.append(
                f"{quantity(y, 'flow'):>14}{percent(100.0 * f):>8}{quantity(v, 'volume'):>22}"
            )
        lines.append(f"storage between the start and failure levels: {_volume(self.available_m3)}")
        if self.yield_at_available_m3s is not None:
            lines.append(
                f"sequent-peak yield of that storage: {_flow(self.yield_at_available_m3s)} "
                "(no outlet losses below the start level: an upper bound)"
            )
        return Summary("\n".join(lines), "storage-yield")


def storage_yield_curve(
    forcing: RecordForcing,
    *,
    area_m2: float,
    available_m3: float,
    shares: Sequence[float] = (0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9),
    pattern: Sequence[float] | None = None,
) -> StorageYield:
    """Storage needed for yields of given shares of the mean net inflow (sequent peak, monthly).

    Net inflow per calendar month: inflow plus (rain - evaporation) on ``area_m2`` less the
    scheduled releases (m³). The demand of month ``m`` is the yield times ``f_m`` times the
    month's seconds.
    """
    factors = monthly_factors(pattern)
    daily = pd.Series(
        (forcing.inflow_m3s - forcing.release_m3s) * SECONDS_PER_DAY
        + forcing.net_depth_m * area_m2,
        index=forcing.dates,
    )
    monthly = daily.resample("MS").sum()
    seconds = pd.Series(SECONDS_PER_DAY, index=forcing.dates).resample("MS").sum().to_numpy()
    months = monthly.index.month.to_numpy() - 1
    net = monthly.to_numpy()
    mean_rate = float(net.sum() / seconds.sum())
    yields = np.asarray(shares, dtype=float) * max(mean_rate, 0.0)
    storage = np.array([sequent_peak(net, y * factors[months] * seconds).storage for y in yields])
    at = None
    if storage.size and np.any(storage >= available_m3) and available_m3 >= 0:
        order = np.argsort(yields)
        at = float(np.interp(available_m3, storage[order], yields[order]))
    return StorageYield(
        yields_m3s=yields,
        storage_m3=storage,
        available_m3=float(available_m3),
        yield_at_available_m3s=at,
        mean_net_inflow_m3s=mean_rate,
        area_m2=float(area_m2),
        months=int(net.size),
    )


# ---- reliability, resilience, vulnerability -------------------------------------------------
@dataclass(frozen=True)
class Performance:
    """Reliability, resilience and vulnerability of a supply (Hashimoto et al. 1982).

    ``reliability_days`` is the share of days satisfactory; ``reliability_years`` the share of
    years with no unsatisfactory day (None without years); ``resilience`` the chance that an
    unsatisfactory day is followed by a satisfactory one (recoveries / unsatisfactory days;
    None when there is none); ``vulnerability`` the mean over failure events of the event's
    largest daily shortfall as a share of that day's demand (-); ``worst_shortfall`` the largest;
    ``mean_event_deficit`` the mean volume short per event (demand units times days); ``events``
    the number of runs of unsatisfactory days, ``longest_days`` the longest.
    """

    what: str
    days: int
    failure_days: int
    reliability_days: float
    years: int
    failure_years: int
    reliability_years: float | None
    resilience: float | None
    vulnerability: float | None
    worst_shortfall: float | None
    mean_event_deficit: float | None
    events: int
    longest_days: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


def rrv(
    demand: Any, supplied: Any, years: Any = None, *, what: str = "supply", rtol: float = 1e-6
) -> Performance:
    """Reliability, resilience and vulnerability of a supplied sequence against its demand.

    Parameters
    ----------
    demand, supplied : array (n,)
        Demand and what was supplied each period (same unit, e.g. m³/s).
    years : array (n,), optional
        The year (any label) of each period, for the share of years without failure.
    what : str
        What counts as unsatisfactory, for the outputs.
    rtol : float
        A period is unsatisfactory when ``supplied < demand (1 - rtol)``.

    Notes
    -----
    With ``X_t`` satisfactory (S) or not (F): reliability ``alpha = P(X_t in S)``; resilience
    ``gamma = P(X_{t+1} in S | X_t in F)``, counted as transitions F -> S over periods in F (a
    last period in F counts as a period without its transition); vulnerability the mean of each
    failure event's worst shortfall (Hashimoto et al. 1982, eqs. 1, 6 and 9, from memory).
    """
    d = np.asarray(demand, dtype=float).ravel()
    s = np.broadcast_to(np.asarray(supplied, dtype=float), d.shape)
    n = d.size
    fail = s < d * (1.0 - rtol)
    nf = int(fail.sum())
    short = np.where(fail, d - s, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(fail & (d > 0), short / d, 0.0)
    edges = np.diff(np.concatenate([[0], fail.astype(int), [0]]))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    events = starts.size
    recoveries = int(np.sum(fail[:-1] & ~fail[1:])) if n > 1 else 0
    resilience = recoveries / nf if nf else None
    if events:
        worst = np.array([share[a:b].max() for a, b in zip(starts, ends, strict=True)])
        deficit = np.array([short[a:b].sum() for a, b in zip(starts, ends, strict=True)])
        vul, worst_all, mean_def = float(worst.mean()), float(worst.max()), float(deficit.mean())
        longest = int((ends - starts).max())
    else:
        vul = worst_all = mean_def = None
        longest = 0
    ny = fy = 0
    rel_years = None
    if years is not None:
        y = np.asarray(years).ravel()
        labels = pd.unique(y)
        ny = labels.size
        fy = int(pd.Series(fail).groupby(y).any().sum())
        rel_years = 1.0 - fy / ny if ny else None
    return Performance(
        what=what,
        days=n,
        failure_days=nf,
        reliability_days=1.0 - nf / n if n else float("nan"),
        years=int(ny),
        failure_years=fy,
        reliability_years=rel_years,
        resilience=resilience,
        vulnerability=vul,
        worst_shortfall=worst_all,
        mean_event_deficit=mean_def,
        events=int(events),
        longest_days=longest,
    )


@dataclass(frozen=True)
class RecordPerformance:
    """A demand under its restriction rules, run through the record: RRV of full supply
    (``restriction``: any day below the full demand, by a cut or a shortage) and of the
    restricted supply (``failure``: the intake gives less than the restricted demand)."""

    demand_m3s: float
    factors: tuple[float, ...]
    rules: tuple[tuple[float, float], ...]
    failure_level: str
    failure_level_m: float
    start_stage_m: float
    period: tuple[_dt.date, _dt.date]
    water_year_start: int
    restriction: Performance
    failure: Performance
    lowest_stage_m: float

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        return {
            "demand_m3s": self.demand_m3s,
            "monthly_factors": list(self.factors),
            "rules": [{"trigger_m": t, "cut": c} for t, c in self.rules],
            "failure_level": self.failure_level,
            "failure_level_m": self.failure_level_m,
            "start_stage_m": self.start_stage_m,
            "record": {"start": self.period[0], "end": self.period[1]},
            "water_year_start": self.water_year_start,
            "lowest_stage_m": self.lowest_stage_m,
            "restriction": self.restriction.to_dict(),
            "failure": self.failure.to_dict(),
        }

    def summary(self) -> Summary:
        """A short table."""
        rules = (
            ", ".join(f"{percent(100.0 * c)} below {_stage(t)}" for t, c in self.rules) or "none"
        )
        lines = [
            f"Demand {_flow(self.demand_m3s)} (mean of its pattern) through the record "
            f"{self.period[0]} to {self.period[1]}, restrictions: {rules}",
            f"{'':<22}{'days ok':>9}{'years ok':>10}{'resilience':>12}{'vulnerab.':>11}"
            f"{'events':>8}{'longest d':>11}",
        ]
        for label, p in (
            ("without restriction", self.restriction),
            ("without failure", self.failure),
        ):
            lines.append(
                f"{label:<22}{_reliable(p.reliability_days):>9}"
                f"{_reliable(p.reliability_years):>10}"
                f"{_reliable(p.resilience):>12}{_reliable(p.vulnerability):>11}"
                f"{number(p.events, decimals=0):>8}{number(p.longest_days, decimals=0):>11}"
            )
        lines.append(
            f"failure: the intake gives less than the restricted demand (at the "
            f"{self.failure_level} level, {_stage(self.failure_level_m)}); lowest stage "
            f"{_stage(self.lowest_stage_m)}"
        )
        return Summary("\n".join(lines), "reliability")


def record_performance(
    laws: LakeLaws,
    forcing: RecordForcing,
    *,
    demand_m3s: float,
    pattern: Sequence[float] | None = None,
    restriction: Sequence[tuple[float, float]] = (),
    failure_level_m: float,
    failure_level: str = "failure",
    start_stage_m: float,
    water_year_start: int = 1,
    environmental_release_m3s: float = 0.0,
    stage_max_m: float | None = None,
    operations: OperatingRules | None = None,
) -> RecordPerformance:
    """Reliability, resilience and vulnerability of a demand and its restriction rules through
    the record (years are water years starting in month ``water_year_start``)."""
    factors = monthly_factors(pattern)
    hi = stage_max_m if stage_max_m is not None else max(laws.max_stage_m, start_stage_m + 1.0)
    tables = yield_tables(
        laws,
        failure_level_m,
        environmental_release_m3s=environmental_release_m3s,
        stage_max_m=hi,
        operations=operations,
    )
    rules = tuple((float(t), float(c)) for t, c in restriction)
    levels = (*rules, *(operations.restriction if operations is not None else ()))
    res, demand = _run(
        tables, forcing, start_stage_m, np.array([float(demand_m3s)]), factors, levels
    )
    dem = demand[:, 0] + forcing.release_m3s
    drawn = res.withdrawal_m3s[:, 0]
    asked = demand[:, 0] * (1.0 - res.cut[:, 0]) + forcing.release_m3s
    idx = forcing.dates
    wy = idx.year.to_numpy() + (idx.month.to_numpy() >= water_year_start) * (water_year_start > 1)
    return RecordPerformance(
        demand_m3s=float(demand_m3s),
        factors=tuple(float(f) for f in factors),
        rules=rules,
        failure_level=failure_level,
        failure_level_m=float(failure_level_m),
        start_stage_m=float(start_stage_m),
        period=(idx[0].date(), idx[-1].date()),
        water_year_start=int(water_year_start),
        restriction=rrv(dem, drawn, wy, what="a day below the full demand"),
        failure=rrv(asked, drawn, wy, what="a day below the restricted demand"),
        lowest_stage_m=float(res.stage_m[:, 0].min()),
    )


# ---- days of supply -------------------------------------------------------------------------
@dataclass(frozen=True)
class SupplyDays:
    """Days of supply from a start stage under a dry scenario: ``days`` to the first day the
    intake gives less than the (restricted) demand, None when it does not within ``horizon``;
    ``date`` that day; ``stage_m`` the daily stage path."""

    start: _dt.date
    start_stage_m: float
    inflow_m3s: float
    demand_m3s: float
    horizon: int
    days: int | None
    date: _dt.date | None
    failure_level: str
    failure_level_m: float
    volume_m3: float
    stage_m: np.ndarray = field(repr=False)

    def sentence(self) -> str:
        """One sentence to quote."""
        scen = (
            "no inflow"
            if self.inflow_m3s == 0
            else f"a constant inflow of {_flow(self.inflow_m3s)}"
        )
        head = (
            f"From {self.start} at {_stage(self.start_stage_m)} ({_volume(self.volume_m3)} above "
            f"the {self.failure_level} level), with {scen}, rain and evaporation at their "
            f"day-of-year means and a demand of {_flow(self.demand_m3s)}"
        )
        if self.days is None:
            return head + f", supply lasts beyond the horizon of {self.horizon:,} days."
        return head + f", supply lasts {self.days:,} days (to {self.date})."

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        return {
            "start": self.start,
            "start_stage_m": self.start_stage_m,
            "inflow_m3s": self.inflow_m3s,
            "demand_m3s": self.demand_m3s,
            "horizon_days": self.horizon,
            "days": self.days,
            "date": self.date,
            "failure_level": self.failure_level,
            "failure_level_m": self.failure_level_m,
            "volume_above_failure_m3": self.volume_m3,
            "sentence": self.sentence(),
        }


def days_of_supply(
    laws: LakeLaws,
    history: pd.DataFrame,
    *,
    start: Any,
    start_stage_m: float,
    demand_m3s: float,
    pattern: Sequence[float] | None = None,
    inflow_m3s: float = 0.0,
    horizon: int = 3650,
    restriction: Sequence[tuple[float, float]] = (),
    failure_level_m: float,
    failure_level: str = "failure",
    environmental_release_m3s: float = 0.0,
    operations: OperatingRules | None = None,
) -> SupplyDays:
    """Days until the intake fails from ``start_stage_m`` under a constant inflow (m³/s) with
    rain and evaporation at their day-of-year means (several years: ``horizon`` days)."""
    factors = monthly_factors(pattern)
    start_ts = pd.Timestamp(start).normalize()
    dates = pd.date_range(start_ts + pd.Timedelta(days=1), periods=int(horizon), freq="D")
    doy = _doy(dates)
    clim = {}
    for term in ("rain_m", "evaporation_m"):
        c = climatology(history[term]) if term in history.columns else np.zeros(365)
        clim[term] = np.nan_to_num(c, nan=0.0)[doy]
    forcing = RecordForcing(
        dates=dates,
        inflow_m3s=np.full(dates.size, float(inflow_m3s)),
        net_depth_m=clim["rain_m"] - clim["evaporation_m"],
        release_m3s=np.zeros(dates.size),
        filled={},
    )
    hi = max(laws.max_stage_m, float(start_stage_m) + 1.0)
    tables = yield_tables(
        laws,
        failure_level_m,
        environmental_release_m3s=environmental_release_m3s,
        stage_max_m=hi,
        operations=operations,
    )
    rules = tuple((float(t), float(c)) for t, c in restriction)
    levels = (*rules, *(operations.restriction if operations is not None else ()))
    res, demand = _run(
        tables, forcing, start_stage_m, np.array([float(demand_m3s)]), factors, levels
    )
    short = _shortage(res, demand, forcing.release_m3s, restricted=True)[:, 0]
    hit = np.flatnonzero(short > 0.0)
    v = laws.volume(np.array([failure_level_m, start_stage_m], dtype=float))
    days = int(hit[0]) if hit.size else None  # supply is full on days before the first short one
    return SupplyDays(
        start=start_ts.date(),
        start_stage_m=float(start_stage_m),
        inflow_m3s=float(inflow_m3s),
        demand_m3s=float(demand_m3s),
        horizon=int(horizon),
        days=days,
        date=dates[hit[0]].date() if hit.size else None,
        failure_level=failure_level,
        failure_level_m=float(failure_level_m),
        volume_m3=max(float(v[1] - v[0]), 0.0),
        stage_m=res.stage_m[:, 0],
    )


# ---- the study of one lake ------------------------------------------------------------------
@dataclass(frozen=True)
class YieldStudy:
    """Firm yield, storage–yield curve, the demand's reliability under its rules and the days
    of supply from the last state, for one lake (:meth:`lakebalance.analysis.Lake.yield_`).
    ``performance`` and ``supply`` are None when there is no demand to judge."""

    firm: FirmYield
    curve: StorageYield
    performance: RecordPerformance | None
    supply: SupplyDays | None
    notes: tuple[str, ...] = ()

    def to_frame(self) -> pd.DataFrame:
        """The storage–yield curve."""
        return self.curve.to_frame()

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready summary."""
        return {
            "firm_yield": self.firm.to_dict(),
            "storage_yield": self.curve.to_dict(),
            "performance": None if self.performance is None else self.performance.to_dict(),
            "days_of_supply": None if self.supply is None else self.supply.to_dict(),
            "notes": list(self.notes),
            "caution": CAUTION,
        }

    def summary(self) -> Summary:
        """The whole study as text."""
        parts = [self.firm.summary(), "", self.curve.summary()]
        if self.performance is not None:
            parts += ["", self.performance.summary()]
        if self.supply is not None:
            parts += ["", self.supply.sentence()]
        parts += [f"note: {n}" for n in self.notes]
        parts += ["", CAUTION]
        return Summary("\n".join(parts), "yield and reliability")
