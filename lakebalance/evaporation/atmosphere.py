"""Air pressure, psychrometric constant, latent heat, vapour pressure and wind (FAO-56, chapter 3).

Every function is a pure, vectorised numpy expression: arrays of any shape broadcast together.
Temperatures are in °C, pressures in kPa, relative humidity in % (0-100), wind in m/s, heights
in m, as in the published equations (Allen et al., 1998); :mod:`lakebalance.units` declares these
as the internal units of the weather kinds.

References
----------
Allen, R.G., Pereira, L.S., Raes, D., Smith, M. (1998). Crop evapotranspiration: guidelines for
computing crop water requirements. FAO Irrigation and Drainage Paper 56, Rome.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "LATENT_HEAT_FAO56",
    "MJ_TO_MM_FAO56",
    "air_pressure",
    "psychrometric_constant",
    "latent_heat",
    "saturation_vapour_pressure",
    "mean_saturation_vapour_pressure",
    "slope_vapour_pressure_curve",
    "vapour_pressure_from_dewpoint",
    "vapour_pressure_from_rh_extremes",
    "vapour_pressure_from_rh_mean",
    "wind_at_2m",
]

#: Latent heat of vaporisation used by FAO-56 for the reference equations, MJ/kg (eq. 8, 20).
LATENT_HEAT_FAO56 = 2.45  # MJ kg-1

#: Evaporation equivalent of 1 MJ m⁻² d⁻¹, mm/d (FAO-56 eq. 20: 1/λ with λ = 2.45 MJ/kg).
MJ_TO_MM_FAO56 = 0.408  # mm per MJ m-2


def _arr(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def air_pressure(elevation_m: ArrayLike) -> NDArray[np.float64]:
    """Mean atmospheric pressure from elevation.

    Parameters
    ----------
    elevation_m : array_like
        Elevation above sea level, m.

    Returns
    -------
    ndarray
        Atmospheric pressure, kPa.

    Notes
    -----
    FAO-56 eq. 7: :math:`P = 101.3 \\left(\\frac{293 - 0.0065 z}{293}\\right)^{5.26}`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 7.

    Examples
    --------
    >>> round(float(air_pressure(1800.0)), 1)
    81.8
    """
    z = _arr(elevation_m)
    return 101.3 * ((293.0 - 0.0065 * z) / 293.0) ** 5.26


def psychrometric_constant(pressure_kpa: ArrayLike) -> NDArray[np.float64]:
    """Psychrometric constant.

    Parameters
    ----------
    pressure_kpa : array_like
        Atmospheric pressure, kPa.

    Returns
    -------
    ndarray
        Psychrometric constant γ, kPa/°C.

    Notes
    -----
    FAO-56 eq. 8: :math:`\\gamma = \\frac{c_p P}{\\varepsilon \\lambda} = 0.665 \\times 10^{-3} P`
    (with λ = 2.45 MJ/kg, c_p = 1.013e-3 MJ/kg/°C, ε = 0.622).

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 8.
    """
    return 0.665e-3 * _arr(pressure_kpa)


def latent_heat(tmean_c: ArrayLike) -> NDArray[np.float64]:
    """Latent heat of vaporisation as a function of temperature.

    Parameters
    ----------
    tmean_c : array_like
        Air (or water surface) temperature, °C.

    Returns
    -------
    ndarray
        Latent heat λ, MJ/kg.

    Notes
    -----
    FAO-56 Annex 3, eq. 3-1: :math:`\\lambda = 2.501 - 2.361 \\times 10^{-3} T`.

    References
    ----------
    Allen et al. (1998), FAO-56, Annex 3, eq. 3-1 (after Harrison, 1963).
    """
    return 2.501 - 2.361e-3 * _arr(tmean_c)


def saturation_vapour_pressure(t_c: ArrayLike) -> NDArray[np.float64]:
    """Saturation vapour pressure over water at temperature ``t_c``.

    Parameters
    ----------
    t_c : array_like
        Temperature, °C.

    Returns
    -------
    ndarray
        e°(T), kPa.

    Notes
    -----
    FAO-56 eq. 11: :math:`e^\\circ(T) = 0.6108 \\exp\\left(\\frac{17.27 T}{T + 237.3}\\right)`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 11.

    Examples
    --------
    >>> round(float(saturation_vapour_pressure(24.5)), 3)
    3.075
    """
    t = _arr(t_c)
    return 0.6108 * np.exp(17.27 * t / (t + 237.3))


def mean_saturation_vapour_pressure(tmax_c: ArrayLike, tmin_c: ArrayLike) -> NDArray[np.float64]:
    """Mean daily saturation vapour pressure from daily extremes of temperature.

    Parameters
    ----------
    tmax_c, tmin_c : array_like
        Daily maximum and minimum air temperature, °C.

    Returns
    -------
    ndarray
        e_s, kPa.

    Notes
    -----
    FAO-56 eq. 12: :math:`e_s = \\frac{e^\\circ(T_{max}) + e^\\circ(T_{min})}{2}`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 12.
    """
    return 0.5 * (saturation_vapour_pressure(tmax_c) + saturation_vapour_pressure(tmin_c))


def slope_vapour_pressure_curve(t_c: ArrayLike) -> NDArray[np.float64]:
    """Slope of the saturation vapour pressure curve.

    Parameters
    ----------
    t_c : array_like
        Temperature, °C.

    Returns
    -------
    ndarray
        Δ, kPa/°C.

    Notes
    -----
    FAO-56 eq. 13: :math:`\\Delta = \\frac{4098\\, e^\\circ(T)}{(T + 237.3)^2}`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 13.
    """
    t = _arr(t_c)
    return 4098.0 * saturation_vapour_pressure(t) / (t + 237.3) ** 2


def vapour_pressure_from_dewpoint(dewpoint_c: ArrayLike) -> NDArray[np.float64]:
    """Actual vapour pressure from the dewpoint temperature.

    Parameters
    ----------
    dewpoint_c : array_like
        Dewpoint temperature, °C.

    Returns
    -------
    ndarray
        e_a, kPa.

    Notes
    -----
    FAO-56 eq. 14: :math:`e_a = e^\\circ(T_{dew})`. With no humidity measurement at all, FAO-56
    (chapter 3, "missing humidity data", eq. 48) takes :math:`T_{dew} \\approx T_{min}`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 14 and eq. 48.
    """
    return saturation_vapour_pressure(dewpoint_c)


def vapour_pressure_from_rh_extremes(
    tmax_c: ArrayLike, tmin_c: ArrayLike, rh_max_pct: ArrayLike, rh_min_pct: ArrayLike
) -> NDArray[np.float64]:
    """Actual vapour pressure from the daily maximum and minimum relative humidity.

    Parameters
    ----------
    tmax_c, tmin_c : array_like
        Daily maximum and minimum air temperature, °C.
    rh_max_pct, rh_min_pct : array_like
        Daily maximum and minimum relative humidity, %.

    Returns
    -------
    ndarray
        e_a, kPa.

    Notes
    -----
    FAO-56 eq. 17:
    :math:`e_a = \\frac{e^\\circ(T_{min}) RH_{max}/100 + e^\\circ(T_{max}) RH_{min}/100}{2}`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 17.
    """
    return 0.5 * (
        saturation_vapour_pressure(tmin_c) * _arr(rh_max_pct) / 100.0
        + saturation_vapour_pressure(tmax_c) * _arr(rh_min_pct) / 100.0
    )


def vapour_pressure_from_rh_mean(
    rh_pct: ArrayLike,
    tmax_c: ArrayLike | None = None,
    tmin_c: ArrayLike | None = None,
    tmean_c: ArrayLike | None = None,
) -> NDArray[np.float64]:
    """Actual vapour pressure from the daily mean relative humidity.

    Parameters
    ----------
    rh_pct : array_like
        Daily mean relative humidity, %.
    tmax_c, tmin_c : array_like, optional
        Daily maximum and minimum air temperature, °C (used when both are given).
    tmean_c : array_like, optional
        Daily mean air temperature, °C (used when the extremes are not given).

    Returns
    -------
    ndarray
        e_a, kPa.

    Notes
    -----
    FAO-56 eq. 19: :math:`e_a = \\frac{RH_{mean}}{100} \\frac{e^\\circ(T_{max}) + e^\\circ(T_{min})}{2}`;
    with only a mean temperature, :math:`e_a = RH_{mean}/100 \\; e^\\circ(T_{mean})`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 19.
    """
    if tmax_c is not None and tmin_c is not None:
        es = mean_saturation_vapour_pressure(tmax_c, tmin_c)
    elif tmean_c is not None:
        es = saturation_vapour_pressure(tmean_c)
    else:
        raise ValueError("vapour_pressure_from_rh_mean needs tmax_c and tmin_c, or tmean_c")
    return _arr(rh_pct) / 100.0 * es


def wind_at_2m(wind_ms: ArrayLike, height_m: float | ArrayLike) -> NDArray[np.float64]:
    """Wind speed at 2 m above the ground from a measurement at another height.

    Parameters
    ----------
    wind_ms : array_like
        Wind speed measured at ``height_m``, m/s.
    height_m : float or array_like
        Height of the measurement above the ground, m (must exceed 0.08 m).

    Returns
    -------
    ndarray
        u_2, m/s.

    Notes
    -----
    FAO-56 eq. 47 (logarithmic profile over short grass):
    :math:`u_2 = u_z \\frac{4.87}{\\ln(67.8 z - 5.42)}`. At exactly z = 2 m the wind is
    returned unchanged (the published constants give a factor of 1.0002 there, a rounding artefact).

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 47.

    Examples
    --------
    >>> round(float(wind_at_2m(10 / 3.6, 10.0)), 3)
    2.078
    """
    z = _arr(height_m)
    if np.any(z <= 0.08):
        raise ValueError("wind measurement height must exceed 0.08 m (FAO-56 eq. 47)")
    factor = np.where(z == 2.0, 1.0, 4.87 / np.log(67.8 * z - 5.42))
    return _arr(wind_ms) * factor
