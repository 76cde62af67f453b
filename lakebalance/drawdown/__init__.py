"""Drought drawdown forecasts: a fast ensemble simulation of the whole balance.

* :mod:`.engine` — the vectorised day-by-day integrator (accurate for slow and stiff lakes);
* :mod:`.scenarios` — the forcing of each scenario (replay, esp, percentile, stochastic,
  constant); :mod:`.persistence` — the persistent monthly generator and the ESP weights;
* :mod:`.support` — exact binomial intervals and the rule of what an ensemble can support;
* :mod:`.forecast` — the ensemble run and its frozen :class:`Forecast` result.

See ``docs/drawdown.md``.
"""

from __future__ import annotations

from .engine import EngineResult, LakeTables, build_tables, simulate
from .forecast import (
    CAUTION,
    PERCENTILES,
    Forecast,
    ForecastPlan,
    LevelOdds,
    MethodOdds,
    ModelSamples,
    check_start_stage,
    forecast_stage_max,
    run_forecast,
    sample_model_uncertainty,
)
from .options import DemandRule, DrawdownOptions
from .scenarios import TERMS, Forcing, build_forcing, climatology

__all__ = [
    "EngineResult",
    "LakeTables",
    "build_tables",
    "simulate",
    "CAUTION",
    "PERCENTILES",
    "Forecast",
    "LevelOdds",
    "MethodOdds",
    "run_forecast",
    "ForecastPlan",
    "ModelSamples",
    "check_start_stage",
    "forecast_stage_max",
    "sample_model_uncertainty",
    "DemandRule",
    "DrawdownOptions",
    "TERMS",
    "Forcing",
    "build_forcing",
    "climatology",
]
