"""Options of lake evaporation (``[evaporation]`` in the site file)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from ..options import Options, setting

__all__ = ["EvaporationOptions"]


@dataclass(frozen=True)
class EvaporationOptions(Options):
    """``[evaporation]``: which method makes lake evaporation, and its coefficients."""

    method: Literal[
        "auto",
        "given",
        "equilibrium_temperature",
        "pan",
        "penman",
        "priestley_taylor",
        "fao56",
        "hargreaves",
    ] = "auto"
    # constant or 12 monthly values
    pan_coefficient: float | list[float] = setting(0.7, unit="-", low=0.0, high=2.0, low_open=True)
    albedo: float = setting(0.06, unit="-", low=0.0, high=1.0)  # open water, constant
    # "sun_angle": daily albedo of water by sun angle (Taylor et al. 1996; openwater.water_albedo)
    albedo_model: Literal["constant", "sun_angle"] = "constant"
    alpha: float = setting(1.26, unit="-", low=0.0, high=3.0, low_open=True)  # Priestley-Taylor
    open_water_coefficient: float = setting(1.05, unit="-", low=0.0, high=2.0, low_open=True)
    # FAO-56 route: "constant" (open_water_coefficient) or "by_depth" (FAO-56 Table 12 classes,
    # seasonal for deep temperate water; needs the mean depth)
    open_water_class: Literal["constant", "by_depth"] = "constant"
    # Hargreaves is a grass reference: as lake evaporation it takes this coefficient, or the
    # open-water coefficient of the FAO-56 route when unset
    hargreaves_coefficient: float | None = setting(None, unit="-", low=0.0, high=2.0, low_open=True)
    wind_height: float = setting(2.0, unit="m", low=0.0, high=100.0, low_open=True)
    # where the anemometer stands, and the roughness lengths of its surface and of open water
    wind_exposure: Literal["land", "water"] = "land"
    land_roughness: float = setting(0.03, unit="m", low=1e-5, high=2.0)
    water_roughness: float = setting(2e-4, unit="m", low=1e-6, high=0.01)
    # the lake method's aerodynamic resistance: Sweers (1976) or the log profile over water
    wind_function: Literal["sweers", "log_profile"] = "sweers"
    # lake geometry when there is no storage relation and stage (else from them, day by day)
    mean_depth: float | None = setting(None, unit="m", low=0.0, high=2000.0)
    lake_area: float | None = setting(None, unit="m2", low=0.0, low_open=True)
    # depth of the water in the seasonal heat store, at most this (a stratified lake's mixed
    # layer); unset: the whole mean depth
    mixed_depth_max: float | None = setting(None, unit="m", low=0.1, high=500.0)
    initial_water_temperature: float | None = setting(None, unit="degC", low=0.0, high=40.0)
    heat_storage_lag: float = setting(0.0, unit="days", low=0.0)  # lag on energy (0 = off)
    fill: Literal["climatology", "none"] = "climatology"  # missing weather days
    angstrom_a: float = setting(0.25, unit="-", low=0.0, high=1.0)  # FAO-56 eq. 35 a_s
    angstrom_b: float = setting(0.50, unit="-", low=0.0, high=1.0)  # FAO-56 eq. 35 b_s
    clip_negative: bool = True  # set negative computed evaporation (condensation) to 0
    # ice cover: none, the dated ice_periods, or inferred from the air temperature
    ice: Literal["none", "declared", "from_air_temperature"] = "none"
    ice_periods: list[list[str]] = setting(default_factory=list)  # [[start, end], ...] inclusive
    ice_window: int = setting(30, unit="days", low=1, high=120)  # from_air_temperature
    ice_threshold: float = setting(0.0, unit="degC", low=-20.0, high=5.0)  # from_air_temperature
    ice_sublimation: float = setting(0.1, unit="mm/d", low=0.0, high=2.0)  # under ice
    precipitation_on_ice: Literal["as_it_falls", "at_break_up"] = "as_it_falls"
