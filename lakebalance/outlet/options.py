"""Options of the outlet rating (``[outlet]`` and ``[[outlet.component]]`` in the site file)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

from ..options import Options, setting
from .periods import RatingPeriod

__all__ = ["OutletComponent", "OutletOptions"]


MAX_BOOTSTRAP = 100_000  # refits; percentile intervals settle within a few thousand


@dataclass(frozen=True)
class OutletComponent(Options):
    """``[[outlet.component]]``: one control of a compound outlet (acting in parallel)."""

    name: str
    form: Literal["power", "weir", "vnotch", "orifice"] = "power"
    fixed: dict[str, float] = field(default_factory=dict)  # parameter -> value (SI)
    initial: dict[str, float] = field(default_factory=dict)  # parameter -> starting value (SI)
    bounds: dict[str, list[float]] = field(default_factory=dict)  # parameter -> [lo, hi] (SI)
    length: float | None = setting(None, unit="m", low=0.0, low_open=True)  # weir crest length
    angle: float | None = setting(
        None, unit="degrees", low=0.0, high=180.0, low_open=True, high_open=True
    )  # V-notch angle
    upper: float | None = setting(None, unit="m")  # segmented rating: applies up to this stage


@dataclass(frozen=True)
class OutletOptions(Options):
    """``[outlet]``: gaugings and the control form of the outlet rating."""

    gaugings: Path | None = None  # CSV/XLSX of spot gaugings
    sheet: str | None = None
    date: str = "date"
    stage: str = "stage"
    discharge: str = "discharge"
    stage_units: str = "m"
    discharge_units: str = "m**3/s"
    delimiter: str | None = None
    decimal: str = "."
    encoding: str | None = None  # text encoding of a CSV table (UTF-8 when absent)
    dayfirst: bool = False
    form: Literal["power", "weir", "vnotch", "orifice", "compound", "segmented"] = "power"
    residuals: Literal["log", "linear"] = "log"
    weights: str | None = None  # optional gaugings column of weights
    fixed: dict[str, float] = field(default_factory=dict)  # single-law form: parameter -> SI value
    initial: dict[str, float] = field(default_factory=dict)
    bounds: dict[str, list[float]] = field(default_factory=dict)
    length: float | None = setting(None, unit="m", low=0.0, low_open=True)  # weir crest length
    angle: float | None = setting(
        None, unit="degrees", low=0.0, high=180.0, low_open=True, high_open=True
    )  # V-notch angle
    component: tuple[OutletComponent, ...] = ()  # compound/segmented controls
    shift_date: str | None = None  # ISO date for a before/after rating-shift test
    # [[outlet.period]]: dated ratings, each fitted from its own gaugings (outlet/periods.py)
    period: tuple[RatingPeriod, ...] = ()
    bootstrap: int = setting(0, unit="refits", low=0, high=MAX_BOOTSTRAP)  # 0 = delta method only

    def fit_options(self):
        """The :class:`~lakebalance.outlet.fit.FitOptions` this section asks for (component keys
        become ``name.param``)."""
        from ..errors import ConfigError
        from .fit import FitOptions

        fixed, initial, bounds = dict(self.fixed), dict(self.initial), {}
        for key, pair in self.bounds.items():
            bounds[key] = tuple(pair)
        for comp in self.component:
            fixed.update({f"{comp.name}.{k}": v for k, v in comp.fixed.items()})
            initial.update({f"{comp.name}.{k}": v for k, v in comp.initial.items()})
            bounds.update({f"{comp.name}.{k}": tuple(v) for k, v in comp.bounds.items()})
        for key, pair in bounds.items():
            if len(pair) != 2:
                raise ConfigError(
                    f"[outlet] bounds of '{key}' must be [lower, upper], got {list(pair)}"
                )
        return FitOptions(
            residuals=self.residuals,
            fixed=fixed,
            initial=initial,
            bounds=bounds,
            bootstrap=self.bootstrap,
        )
