"""lakebalance: a defensible daily water balance of a lake or reservoir from its gauge records.

The public API is re-exported here lazily, so that ``import lakebalance`` (and the command line's
``--help``) stay fast.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

# name -> module that defines it
_EXPORTS = {
    "open_site": "lakebalance.analysis",
    "Lake": "lakebalance.analysis",
    "load_site": "lakebalance.config",
    "LakeLaws": "lakebalance.laws",
    "WhatIfRequest": "lakebalance.dynamics",
    "ForecastPlan": "lakebalance.drawdown",
    "Site": "lakebalance.config",
    "Records": "lakebalance.records",
    "Finding": "lakebalance.records",
    "RowAccount": "lakebalance.records",
    "LakebalanceError": "lakebalance.errors",
    "InputError": "lakebalance.errors",
    "ConfigError": "lakebalance.errors",
    "UnitError": "lakebalance.errors",
    "FitError": "lakebalance.errors",
    "RangeError": "lakebalance.errors",
    "EvaporationResult": "lakebalance.evaporation",
    "RatingFit": "lakebalance.outlet",
    "Rating": "lakebalance.outlet",
    "FitOptions": "lakebalance.outlet",
    "fit_rating_curve": "lakebalance.outlet",
    "StorageCurve": "lakebalance.storage",
    "storage_from_table": "lakebalance.storage",
    "storage_from_outline": "lakebalance.storage",
    "Balance": "lakebalance.balance",
    "DailyTerms": "lakebalance.balance",
    "ClosureOptions": "lakebalance.balance",
    "TermErrors": "lakebalance.balance",
    "OutletParameters": "lakebalance.balance",
    "close_daily": "lakebalance.balance",
    "add_uncertainty": "lakebalance.balance",
    "LakeModel": "lakebalance.dynamics",
    "Dynamics": "lakebalance.dynamics",
    "residence_times": "lakebalance.dynamics",
    "Flag": "lakebalance.flags",
    "Flags": "lakebalance.flags",
    "detect_flags": "lakebalance.flags",
    "change_points": "lakebalance.flags",
    "SeepageFit": "lakebalance.seepage",
    "fit_seepage": "lakebalance.seepage",
    "select_days": "lakebalance.seepage",
    "read_table": "lakebalance.io.tables",
    "SeriesInfo": "lakebalance.records",
    "Forecast": "lakebalance.drawdown",
    "LevelOdds": "lakebalance.drawdown",
    "run_forecast": "lakebalance.drawdown",
    "build_forcing": "lakebalance.drawdown",
}

__all__ = ["__version__", *_EXPORTS]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'lakebalance' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
