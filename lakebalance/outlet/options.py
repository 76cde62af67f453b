"""Options of the outlet rating (``[outlet]`` and ``[[outlet.component]]`` in the site file)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

from ..options import Options, setting
from .periods import RatingPeriod

__all__ = ["OutletComponent", "OutletOptions"]


MAX_BOOTSTRAP = 100_000  # refits; percentile intervals settle within a few thousand


def _prior_rule(value) -> str | None:
    """A prior table: parameter -> [value, standard error], the error positive and finite."""
    import math

    if not isinstance(value, dict):
        return "be a table of parameter = [value, standard error]"
    for key, pair in value.items():
        if (
            not isinstance(pair, list | tuple)
            or len(pair) != 2
            or not all(isinstance(x, int | float) and not isinstance(x, bool) for x in pair)
        ):
            return f"give '{key}' as [value, standard error]"
        if not (math.isfinite(pair[0]) and math.isfinite(pair[1]) and pair[1] > 0):
            return f"give '{key}' a finite value and a positive standard error"
    return None


def _bounds_rule(value) -> str | None:
    """A bounds table: parameter -> [lower, upper], lower not above upper."""
    if not isinstance(value, dict):
        return "be a table of parameter = [lower, upper]"
    for key, pair in value.items():
        if (
            not isinstance(pair, list | tuple)
            or len(pair) != 2
            or not all(isinstance(x, int | float) and not isinstance(x, bool) for x in pair)
        ):
            return f"give '{key}' as [lower, upper]"
        if pair[0] > pair[1]:
            return f"give '{key}' a lower bound not above its upper bound"
    return None


def _bounds() -> dict:
    return setting(default_factory=dict, unit="SI units of each parameter", rule=_bounds_rule)


def _priors() -> dict:
    return setting(default_factory=dict, unit="SI units of each parameter", rule=_prior_rule)


@dataclass(frozen=True)
class OutletComponent(Options):
    """``[[outlet.component]]``: one control of a compound outlet (acting in parallel)."""

    name: str
    form: Literal["power", "weir", "vnotch", "orifice"] = "power"
    fixed: dict[str, float] = field(default_factory=dict)  # parameter -> value (SI)
    initial: dict[str, float] = field(default_factory=dict)  # parameter -> starting value (SI)
    bounds: dict[str, list[float]] = _bounds()  # parameter -> [lo, hi] (SI)
    length: float | None = setting(None, unit="m", low=0.0, low_open=True)  # weir crest length
    angle: float | None = setting(
        None, unit="degrees", low=0.0, high=180.0, low_open=True, high_open=True
    )  # V-notch angle
    upper: float | None = setting(None, unit="m")  # segmented rating: applies up to this stage
    # parameter -> [value, standard error] (SI), from a handbook or the drawings
    priors: dict[str, list[float]] = _priors()


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
    dayfirst: bool | None = None  # day/month order of the dates; inferred when absent
    form: Literal["power", "weir", "vnotch", "orifice", "compound", "segmented"] = "power"
    residuals: Literal["log", "linear"] = "log"
    weights: str | None = None  # optional gaugings column of weights
    fixed: dict[str, float] = field(default_factory=dict)  # single-law form: parameter -> SI value
    initial: dict[str, float] = field(default_factory=dict)
    bounds: dict[str, list[float]] = _bounds()
    length: float | None = setting(None, unit="m", low=0.0, low_open=True)  # weir crest length
    angle: float | None = setting(
        None, unit="degrees", low=0.0, high=180.0, low_open=True, high_open=True
    )  # V-notch angle
    component: tuple[OutletComponent, ...] = ()  # compound/segmented controls
    # parameter -> [value, standard error] (SI), from a handbook or the drawings
    priors: dict[str, list[float]] = _priors()
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
        priors = {k: tuple(v) for k, v in self.priors.items()}
        for key, pair in self.bounds.items():
            bounds[key] = tuple(pair)
        for comp in self.component:
            fixed.update({f"{comp.name}.{k}": v for k, v in comp.fixed.items()})
            initial.update({f"{comp.name}.{k}": v for k, v in comp.initial.items()})
            bounds.update({f"{comp.name}.{k}": tuple(v) for k, v in comp.bounds.items()})
            priors.update({f"{comp.name}.{k}": tuple(v) for k, v in comp.priors.items()})
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
            priors=priors,
        )
