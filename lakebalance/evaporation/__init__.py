"""Lake evaporation: the weather the methods share, the methods by family, and the daily result.

Shared pieces (FAO-56 chapter 3):

- :mod:`~lakebalance.evaporation.atmosphere`: air pressure, psychrometric constant, latent heat,
  vapour pressures, wind at 2 m;
- :mod:`~lakebalance.evaporation.radiation`: solar geometry, clear-sky and net radiation, the
  heat-storage lag of a deep lake;
- :mod:`~lakebalance.evaporation.weather`: missing weather filled and flagged, the derived
  quantities every method uses (:class:`PreparedWeather`).

Methods by family, each an :class:`EvaporationMethod` entry of :data:`REGISTRY`
(:mod:`~lakebalance.evaporation.registry`):

- :mod:`~lakebalance.evaporation.measured`: ``given``, a measured series;
- :mod:`~lakebalance.evaporation.equilibrium`: ``equilibrium_temperature``, the lake method
  (heat storage from the mean depth, Penman-Monteith for open water);
- :mod:`~lakebalance.evaporation.pan`: ``pan``, pan times a coefficient;
- :mod:`~lakebalance.evaporation.combination`: ``penman`` (open water), ``fao56``
  (Penman-Monteith reference times an open-water coefficient);
- :mod:`~lakebalance.evaporation.radiation_based`: ``priestley_taylor``;
- :mod:`~lakebalance.evaporation.temperature_based`: ``hargreaves``.

:mod:`~lakebalance.evaporation.lake` runs every method the weather allows for one site and
chooses one (:func:`estimate_lake_evaporation`, :class:`EvaporationResult`).
:mod:`~lakebalance.evaporation.openwater` holds what makes water differ from grass (wind over
water, the fetch-aware wind function, albedo by sun angle, the FAO-56 open-water coefficients);
:mod:`~lakebalance.evaporation.ice` the ice cover. All equations are
pure numpy functions that broadcast over days and ensemble members.
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
from .combination import fao56_reference, penman_open_water
from .equilibrium import lake_heat, penman_monteith_open_water
from .ice import ice_mask_from_air_temperature, ice_mask_from_periods, precipitation_on_ice
from .lake import EvaporationResult, estimate_lake_evaporation, surface_volume_m3
from .method import EvaporationMethod
from .openwater import (
    fetch_from_area,
    open_water_coefficient,
    sweers_wind_function,
    water_albedo,
    wind_over_water,
)
from .options import EvaporationOptions
from .pan import pan_to_lake
from .radiation import (
    clear_sky_radiation,
    daylight_hours,
    extraterrestrial_radiation,
    heat_storage_lag,
    inverse_relative_distance,
    net_longwave,
    net_radiation,
    net_shortwave,
    solar_declination,
    solar_from_sunshine,
    sunset_hour_angle,
)
from .radiation_based import priestley_taylor
from .registry import METHODS, PREFERENCE, REGISTRY, method_named
from .temperature_based import hargreaves
from .weather import WEATHER_ROLES, PreparedWeather, climatology_fill, prepare_weather

__all__ = [
    "METHODS",
    "PREFERENCE",
    "REGISTRY",
    "WEATHER_ROLES",
    "EvaporationMethod",
    "EvaporationOptions",
    "EvaporationResult",
    "PreparedWeather",
    "air_pressure",
    "clear_sky_radiation",
    "climatology_fill",
    "daylight_hours",
    "estimate_lake_evaporation",
    "extraterrestrial_radiation",
    "fao56_reference",
    "fetch_from_area",
    "ice_mask_from_air_temperature",
    "ice_mask_from_periods",
    "lake_heat",
    "open_water_coefficient",
    "penman_monteith_open_water",
    "precipitation_on_ice",
    "sweers_wind_function",
    "water_albedo",
    "wind_over_water",
    "hargreaves",
    "heat_storage_lag",
    "inverse_relative_distance",
    "latent_heat",
    "method_named",
    "mean_saturation_vapour_pressure",
    "net_longwave",
    "net_radiation",
    "net_shortwave",
    "pan_to_lake",
    "penman_open_water",
    "prepare_weather",
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
