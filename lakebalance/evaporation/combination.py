"""Combination methods: an energy term and an aerodynamic term (Penman, 1948; FAO-56).

- ``penman``: open-water Penman (1948), SI form, on the available energy of open water;
- ``fao56``: the FAO-56 Penman-Monteith grass reference ET0 (eq. 6, grass albedo 0.23) times an
  open-water coefficient: ``open_water_coefficient``, or by depth class and season
  (``open_water_class = "by_depth"``, FAO-56 Table 12 notes;
  :func:`~lakebalance.evaporation.openwater.open_water_coefficient`).

Equations return mm per day, the unit they are published in; the entries convert to m per day
through :mod:`lakebalance.units`.

References
----------
Allen, R.G., Pereira, L.S., Raes, D., Smith, M. (1998). Crop evapotranspiration. FAO Irrigation
and Drainage Paper 56, Rome.
Penman, H.L. (1948). Natural evaporation from open water, bare soil and grass. Proc. R. Soc.
Lond. A 193, 120-145.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..units import factor
from . import radiation as rad
from .atmosphere import (
    MJ_TO_MM_FAO56,
    latent_heat,
    psychrometric_constant,
    slope_vapour_pressure_curve,
)
from .method import EvaporationMethod
from .options import EvaporationOptions
from .weather import PreparedWeather

__all__ = [
    "COMBINATION_ROLES",
    "FAO56_GRASS_ALBEDO",
    "PENMAN",
    "FAO56",
    "penman_open_water",
    "fao56_reference",
]

FAO56_GRASS_ALBEDO = 0.23  # (-) albedo of the FAO-56 grass reference (eq. 38)

#: Weather roles a combination (energy and aerodynamic) method can use.
COMBINATION_ROLES = (
    "tmax",
    "tmin",
    "tmean",
    "rh",
    "rh_max",
    "rh_min",
    "dewpoint",
    "wind",
    "solar",
    "sunshine",
)


def _arr(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def penman_open_water(
    available_energy: ArrayLike,
    tmean_c: ArrayLike,
    saturation_kpa: ArrayLike,
    vapour_pressure_kpa: ArrayLike,
    wind_2m_ms: ArrayLike,
    pressure_kpa: ArrayLike,
) -> NDArray[np.float64]:
    """Open-water evaporation by the Penman (1948) combination equation, SI form.

    Parameters
    ----------
    available_energy : array_like
        Net radiation less heat going into storage, R_n - G, MJ m⁻² d⁻¹.
    tmean_c : array_like
        Mean daily air temperature, °C.
    saturation_kpa : array_like
        Saturation vapour pressure e_s, kPa.
    vapour_pressure_kpa : array_like
        Actual vapour pressure e_a, kPa.
    wind_2m_ms : array_like
        Wind speed at 2 m, m/s.
    pressure_kpa : array_like
        Atmospheric pressure, kPa.

    Returns
    -------
    ndarray
        Open-water evaporation E, mm/d.

    Notes
    -----
    .. math:: E = \\frac{\\Delta (R_n - G)/\\lambda + \\gamma f(u_2) (e_s - e_a)}{\\Delta + \\gamma},
       \\qquad f(u_2) = 2.6 (1 + 0.54 u_2) \\;\\mathrm{mm\\,d^{-1}\\,kPa^{-1}}

    with Δ from FAO-56 eq. 13, γ from eq. 8 and the temperature-dependent latent heat λ
    (FAO-56 Annex 3 eq. 3-1). The wind function is Penman's (1948) open-water function
    0.26 (1 + 0.54 u_2) mm d⁻¹ hPa⁻¹ written for kPa.

    References
    ----------
    Penman (1948), the combination equation with the open-water wind function; SI form as in
    Shuttleworth (1993), Handbook of Hydrology, chapter 4 (from memory).
    """
    t = _arr(tmean_c)
    delta = slope_vapour_pressure_curve(t)
    gamma = psychrometric_constant(pressure_kpa)
    lam = latent_heat(t)
    f_u = 2.6 * (1.0 + 0.54 * _arr(wind_2m_ms))
    deficit = _arr(saturation_kpa) - _arr(vapour_pressure_kpa)
    return (delta * _arr(available_energy) / lam + gamma * f_u * deficit) / (delta + gamma)


def fao56_reference(
    available_energy: ArrayLike,
    tmean_c: ArrayLike,
    saturation_kpa: ArrayLike,
    vapour_pressure_kpa: ArrayLike,
    wind_2m_ms: ArrayLike,
    pressure_kpa: ArrayLike,
) -> NDArray[np.float64]:
    """FAO-56 Penman-Monteith reference evapotranspiration of a short grass.

    Parameters
    ----------
    available_energy : array_like
        R_n - G of the grass reference (albedo 0.23), MJ m⁻² d⁻¹.
    tmean_c : array_like
        Mean daily air temperature, °C.
    saturation_kpa, vapour_pressure_kpa : array_like
        e_s and e_a, kPa.
    wind_2m_ms : array_like
        Wind speed at 2 m, m/s.
    pressure_kpa : array_like
        Atmospheric pressure, kPa.

    Returns
    -------
    ndarray
        ET_0, mm/d.

    Notes
    -----
    FAO-56 eq. 6:

    .. math:: ET_0 = \\frac{0.408 \\Delta (R_n - G) + \\gamma \\frac{900}{T + 273} u_2 (e_s - e_a)}
       {\\Delta + \\gamma (1 + 0.34 u_2)}

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 6 (worked examples 17 and 18).
    """
    t = _arr(tmean_c)
    u2 = _arr(wind_2m_ms)
    delta = slope_vapour_pressure_curve(t)
    gamma = psychrometric_constant(pressure_kpa)
    deficit = _arr(saturation_kpa) - _arr(vapour_pressure_kpa)
    num = (
        MJ_TO_MM_FAO56 * delta * _arr(available_energy) + gamma * 900.0 / (t + 273.0) * u2 * deficit
    )
    return num / (delta + gamma * (1.0 + 0.34 * u2))


def _penman(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray:
    """Open-water Penman on the available energy of open water, m/d."""
    mm_per_day = penman_open_water(
        weather.available_energy,
        weather.tmean_c,
        weather.saturation_kpa,
        weather.vapour_pressure_kpa,
        weather.wind_2m_ms,
        weather.pressure_kpa,
    )
    return np.asarray(mm_per_day, dtype=float) * factor("mm", "m")


def open_water_kc(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray | float:
    """The FAO-56 open-water coefficient of each day (-): the constant, or by depth class.

    Raises
    ------
    ConfigError
        With ``open_water_class = "by_depth"`` and no mean depth or latitude.
    """
    if options.open_water_class == "constant":
        return options.open_water_coefficient
    from ..errors import ConfigError
    from .openwater import open_water_coefficient

    if weather.mean_depth_m is None or weather.latitude_deg is None:
        raise ConfigError(
            "[evaporation] open_water_class = 'by_depth' needs the lake's mean depth (a storage "
            "relation with a stage record, or [evaporation] mean_depth) and [site] latitude"
        )
    return open_water_coefficient(
        weather.index.day_of_year.to_numpy(), weather.mean_depth_m, weather.latitude_deg
    )


def _fao56(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray:
    """FAO-56 grass reference ET0 times the open-water coefficient, m/d."""
    rn_grass = rad.net_radiation(
        rad.net_shortwave(weather.solar, FAO56_GRASS_ALBEDO), weather.net_longwave
    )
    et0 = fao56_reference(
        rn_grass,
        weather.tmean_c,
        weather.saturation_kpa,
        weather.vapour_pressure_kpa,
        weather.wind_2m_ms,
        weather.pressure_kpa,
    )
    mm_per_day = open_water_kc(weather, options) * et0
    return np.asarray(mm_per_day, dtype=float) * factor("mm", "m")


PENMAN = EvaporationMethod(
    name="penman",
    family="combination",
    label="Penman (open water)",
    reference="Penman (1948), combination equation with the open-water wind function",
    roles=COMBINATION_ROLES,
    needs=("energy", "wind"),
    compute=_penman,
    preference=3,
    condensation=True,
    uses_pressure=True,
    keep_negative=lambda options: options.heat_storage_lag > 0,
)

FAO56 = EvaporationMethod(
    name="fao56",
    family="combination",
    label="FAO-56 Penman-Monteith x open-water coefficient",
    reference="Allen et al. (1998), FAO-56, eq. 6, times an open-water coefficient",
    roles=COMBINATION_ROLES,
    needs=("energy", "wind"),
    compute=_fao56,
    preference=4,
    condensation=True,
    uses_pressure=True,
    chosen_note=lambda options: (
        f"FAO-56 grass reference ET0 times an open-water coefficient of "
        f"{options.open_water_coefficient:g}"
        if options.open_water_class == "constant"
        else "FAO-56 grass reference ET0 times the open-water coefficient of the lake's depth "
        "class (FAO-56 Table 12 notes: 1.05 below 2 m; 0.65 in spring to 1.25 in autumn "
        "beyond 5 m)"
    ),
)
