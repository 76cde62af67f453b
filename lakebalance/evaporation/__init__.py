"""Lake evaporation: radiation and humidity helpers, the published methods, and the daily result.

Modules by method family:

- :mod:`~lakebalance.evaporation.atmosphere`: air pressure, psychrometric constant, latent heat,
  vapour pressures, wind at 2 m (FAO-56 chapter 3);
- :mod:`~lakebalance.evaporation.radiation`: solar geometry, clear-sky and net radiation;
- :mod:`~lakebalance.evaporation.methods`: Penman (open water), Priestley-Taylor, FAO-56
  Penman-Monteith, Hargreaves, pan coefficients, heat-storage lag;
- :mod:`~lakebalance.evaporation.lake`: every method the weather allows for one site, missing
  weather filled and flagged, the :class:`EvaporationResult`.

All equations are pure numpy functions that broadcast over days and ensemble members.
"""

from __future__ import annotations

from .atmosphere import (
    air_pressure,
    latent_heat,
    mean_saturation_vapour_pressure,
    psychrometric_constant,
    saturation_vapour_pressure,
    slope_vapour_pressure_curve,
    vapour_pressure_from_dewpoint,
    vapour_pressure_from_rh_extremes,
    vapour_pressure_from_rh_mean,
    wind_at_2m,
)
from .lake import (
    METHODS,
    PREFERENCE,
    EvaporationResult,
    climatology_fill,
    estimate_lake_evaporation,
    surface_volume_m3,
)
from .methods import (
    fao56_reference,
    hargreaves,
    heat_storage_lag,
    pan_to_lake,
    penman_open_water,
    priestley_taylor,
)
from .radiation import (
    clear_sky_radiation,
    daylight_hours,
    extraterrestrial_radiation,
    inverse_relative_distance,
    net_longwave,
    net_radiation,
    net_shortwave,
    solar_declination,
    solar_from_sunshine,
    sunset_hour_angle,
)

__all__ = [
    "METHODS",
    "PREFERENCE",
    "EvaporationResult",
    "air_pressure",
    "clear_sky_radiation",
    "climatology_fill",
    "daylight_hours",
    "estimate_lake_evaporation",
    "extraterrestrial_radiation",
    "fao56_reference",
    "hargreaves",
    "heat_storage_lag",
    "inverse_relative_distance",
    "latent_heat",
    "mean_saturation_vapour_pressure",
    "net_longwave",
    "net_radiation",
    "net_shortwave",
    "pan_to_lake",
    "penman_open_water",
    "priestley_taylor",
    "psychrometric_constant",
    "saturation_vapour_pressure",
    "slope_vapour_pressure_curve",
    "solar_declination",
    "solar_from_sunshine",
    "sunset_hour_angle",
    "surface_volume_m3",
    "vapour_pressure_from_dewpoint",
    "vapour_pressure_from_rh_extremes",
    "vapour_pressure_from_rh_mean",
    "wind_at_2m",
]
