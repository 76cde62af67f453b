"""Options of lake evaporation (``[evaporation]`` in the site file)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from ..options import Options, setting

__all__ = ["EvaporationOptions"]


@dataclass(frozen=True)
class EvaporationOptions(Options):
    """``[evaporation]``: which method makes lake evaporation, and its coefficients."""

    method: Literal["auto", "given", "pan", "penman", "priestley_taylor", "fao56", "hargreaves"] = (
        "auto"
    )
    # constant or 12 monthly values
    pan_coefficient: float | list[float] = setting(0.7, unit="-", low=0.0, high=2.0, low_open=True)
    albedo: float = setting(0.06, unit="-", low=0.0, high=1.0)  # open water
    alpha: float = setting(1.26, unit="-", low=0.0, high=3.0, low_open=True)  # Priestley-Taylor
    open_water_coefficient: float = setting(1.05, unit="-", low=0.0, high=2.0, low_open=True)
    wind_height: float = setting(2.0, unit="m", low=0.0, high=100.0, low_open=True)
    heat_storage_lag: float = setting(0.0, unit="days", low=0.0)  # lag on energy (0 = off)
    fill: Literal["climatology", "none"] = "climatology"  # missing weather days
    angstrom_a: float = setting(0.25, unit="-", low=0.0, high=1.0)  # FAO-56 eq. 35 a_s
    angstrom_b: float = setting(0.50, unit="-", low=0.0, high=1.0)  # FAO-56 eq. 35 b_s
    clip_negative: bool = True  # set negative computed evaporation (condensation) to 0
