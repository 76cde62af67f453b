"""Options of the drought drawdown forecast (``[drawdown]`` in the site file)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from ..options import Options, setting

__all__ = ["DemandRule", "DrawdownOptions", "MAX_MEMBERS", "MAX_DAYS", "MAX_RATING_VARIANTS"]

MAX_MEMBERS = 1_000_000  # members; an exceedance probability is stable to 0.1 % long before
MAX_DAYS = 36_525  # days (100 years): a drought outlook, well inside the datetime range
MAX_RATING_VARIANTS = 100_000  # ratings drawn from the fit's covariance


@dataclass(frozen=True)
class DemandRule(Options):
    """``[[drawdown.restriction]]``: below ``trigger`` (m, stage) demand is cut by ``cut`` (-)."""

    trigger: float = setting(unit="m")
    cut: float = setting(unit="-", low=0.0, high=1.0)


@dataclass(frozen=True)
class DrawdownOptions(Options):
    """``[drawdown]``: defaults of the drought forecast."""

    scenario: Literal["replay", "esp", "percentile", "stochastic", "constant"] = "replay"
    # ensemble size and horizon; the memory they need is checked when the forecast is made
    members: int = setting(1000, unit="members", low=1, high=MAX_MEMBERS)
    days: int = setting(365, unit="days", low=1, high=MAX_DAYS)
    percentile: float = setting(10.0, unit="%", low=0.0, high=100.0, low_open=True, high_open=True)
    inflow: float = setting(0.0, unit="m3/s", low=0.0)  # constant scenario
    demand: float | list[float] | None = setting(None, unit="m3/s", low=0.0)  # or 12 monthly
    environmental_release: float = setting(0.0, unit="m3/s", low=0.0)
    restriction: tuple[DemandRule, ...] = ()
    # draw the rating, evaporation and seepage errors per member (the outlook says which)
    sample_uncertainty: bool = True
    # run every scenario method (replay, esp, bootstrap, monthly) and show them side by side
    compare_methods: bool = True
    compare_members: int = setting(500, unit="members", low=20, high=MAX_MEMBERS)
    start: str | None = None  # ISO date of the start (default: last day with a recorded stage)
    start_stage: float | None = setting(None, unit="m")  # default: recorded stage that day
    # model of the stochastic scenario: 30-day block bootstrap, daily seasonal AR(1), or the
    # persistent periodic monthly AR(1) with fragments
    stochastic: Literal["bootstrap", "ar1", "monthly"] = "bootstrap"
    block_days: int = setting(30, unit="days", low=1)  # block length of the bootstrap
    # window before the start whose inflow conditions the esp weights
    antecedent_days: int = setting(90, unit="days", low=7, high=3660)
    dead_level: str | None = None  # [levels] name below which draws stop (default "dead")
    rating_variants: int = setting(200, unit="ratings", low=1, high=MAX_RATING_VARIANTS)  # shared
    seepage: bool = True  # include the seepage law estimated from the balance residual
