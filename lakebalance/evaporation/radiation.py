"""Solar geometry and the radiation balance of a surface for daily periods (FAO-56, chapter 3),
and the heat-storage lag of a deep lake on its available energy.

Pure, vectorised numpy functions. Latitude is in decimal degrees (north positive) at the public
interface and converted to radians inside; radiation is in MJ m⁻² d⁻¹; day of year ``J`` runs
from 1 (1 January) to 365 or 366.

References
----------
Allen, R.G., Pereira, L.S., Raes, D., Smith, M. (1998). Crop evapotranspiration. FAO Irrigation
and Drainage Paper 56, Rome.
ASCE-EWRI (2005). The ASCE standardized reference evapotranspiration equation. Reston, VA.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "SOLAR_CONSTANT",
    "STEFAN_BOLTZMANN",
    "inverse_relative_distance",
    "solar_declination",
    "sunset_hour_angle",
    "extraterrestrial_radiation",
    "daylight_hours",
    "solar_from_sunshine",
    "clear_sky_radiation",
    "net_shortwave",
    "net_longwave",
    "net_radiation",
    "heat_storage_lag",
]

SOLAR_CONSTANT = 0.0820  # MJ m-2 min-1 (FAO-56 eq. 21)
STEFAN_BOLTZMANN = 4.903e-9  # MJ K-4 m-2 d-1 (FAO-56 eq. 39)
_KELVIN = 273.16  # K, as FAO-56 eq. 39 writes it


def _arr(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def inverse_relative_distance(day_of_year: ArrayLike) -> NDArray[np.float64]:
    """Inverse relative distance Earth-Sun.

    Parameters
    ----------
    day_of_year : array_like
        Day of the year J, 1-366.

    Returns
    -------
    ndarray
        d_r, dimensionless.

    Notes
    -----
    FAO-56 eq. 23: :math:`d_r = 1 + 0.033 \\cos(2\\pi J / 365)`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 23.
    """
    return 1.0 + 0.033 * np.cos(2.0 * np.pi / 365.0 * _arr(day_of_year))


def solar_declination(day_of_year: ArrayLike) -> NDArray[np.float64]:
    """Solar declination.

    Parameters
    ----------
    day_of_year : array_like
        Day of the year J, 1-366.

    Returns
    -------
    ndarray
        δ, rad.

    Notes
    -----
    FAO-56 eq. 24: :math:`\\delta = 0.409 \\sin(2\\pi J / 365 - 1.39)`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 24.
    """
    return 0.409 * np.sin(2.0 * np.pi / 365.0 * _arr(day_of_year) - 1.39)


def sunset_hour_angle(latitude_deg: ArrayLike, declination_rad: ArrayLike) -> NDArray[np.float64]:
    """Sunset hour angle.

    Parameters
    ----------
    latitude_deg : array_like
        Latitude, decimal degrees (north positive).
    declination_rad : array_like
        Solar declination, rad.

    Returns
    -------
    ndarray
        ω_s, rad. The argument of arccos is clipped to [-1, 1], so that polar day gives π and
        polar night 0 (common practice, no source).

    Notes
    -----
    FAO-56 eq. 25: :math:`\\omega_s = \\arccos(-\\tan\\varphi \\tan\\delta)`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 25.
    """
    phi = np.deg2rad(_arr(latitude_deg))
    return np.arccos(np.clip(-np.tan(phi) * np.tan(_arr(declination_rad)), -1.0, 1.0))


def extraterrestrial_radiation(
    latitude_deg: ArrayLike, day_of_year: ArrayLike
) -> NDArray[np.float64]:
    """Daily extraterrestrial radiation on a horizontal surface.

    Parameters
    ----------
    latitude_deg : array_like
        Latitude, decimal degrees (north positive).
    day_of_year : array_like
        Day of the year J, 1-366.

    Returns
    -------
    ndarray
        R_a, MJ m⁻² d⁻¹.

    Notes
    -----
    FAO-56 eq. 21:
    :math:`R_a = \\frac{24 \\cdot 60}{\\pi} G_{sc} d_r [\\omega_s \\sin\\varphi \\sin\\delta +
    \\cos\\varphi \\cos\\delta \\sin\\omega_s]`, with eqs. 23-25.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 21 (worked example 8).

    Examples
    --------
    >>> round(float(extraterrestrial_radiation(-20.0, 246)), 1)  # FAO-56 example 8
    32.2
    """
    phi = np.deg2rad(_arr(latitude_deg))
    j = _arr(day_of_year)
    dr = inverse_relative_distance(j)
    delta = solar_declination(j)
    ws = sunset_hour_angle(latitude_deg, delta)
    return (
        24.0
        * 60.0
        / np.pi
        * SOLAR_CONSTANT
        * dr
        * (ws * np.sin(phi) * np.sin(delta) + np.cos(phi) * np.cos(delta) * np.sin(ws))
    )


def daylight_hours(latitude_deg: ArrayLike, day_of_year: ArrayLike) -> NDArray[np.float64]:
    """Maximum possible duration of sunshine.

    Parameters
    ----------
    latitude_deg : array_like
        Latitude, decimal degrees (north positive).
    day_of_year : array_like
        Day of the year J, 1-366.

    Returns
    -------
    ndarray
        N, h per day.

    Notes
    -----
    FAO-56 eq. 34: :math:`N = \\frac{24}{\\pi} \\omega_s`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 34 (worked example 9).
    """
    return 24.0 / np.pi * sunset_hour_angle(latitude_deg, solar_declination(day_of_year))


def solar_from_sunshine(
    sunshine_h: ArrayLike,
    daylight_h: ArrayLike,
    extraterrestrial: ArrayLike,
    a_s: float = 0.25,
    b_s: float = 0.50,
) -> NDArray[np.float64]:
    """Solar (shortwave) radiation from the relative sunshine duration (Angström formula).

    Parameters
    ----------
    sunshine_h : array_like
        Actual duration of sunshine n, h per day.
    daylight_h : array_like
        Maximum possible duration of sunshine N, h per day (:func:`daylight_hours`).
    extraterrestrial : array_like
        R_a, MJ m⁻² d⁻¹ (:func:`extraterrestrial_radiation`).
    a_s, b_s : float
        Angström coefficients, dimensionless; 0.25 and 0.50 are the FAO-56 values where no
        calibration exists.

    Returns
    -------
    ndarray
        R_s, MJ m⁻² d⁻¹. n/N is limited to [0, 1]; at polar night (N = 0) R_s = a_s R_a = 0.

    Notes
    -----
    FAO-56 eq. 35: :math:`R_s = (a_s + b_s n/N) R_a`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 35 (worked example 10).
    """
    n = _arr(sunshine_h)
    big_n = _arr(daylight_h)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(big_n > 0, n / np.where(big_n > 0, big_n, 1.0), 0.0)
    ratio = np.where(np.isnan(n), np.nan, np.clip(ratio, 0.0, 1.0))
    return (a_s + b_s * ratio) * _arr(extraterrestrial)


def clear_sky_radiation(
    extraterrestrial: ArrayLike,
    elevation_m: ArrayLike = 0.0,
    a_s: float | None = None,
    b_s: float | None = None,
) -> NDArray[np.float64]:
    """Clear-sky solar radiation.

    Parameters
    ----------
    extraterrestrial : array_like
        R_a, MJ m⁻² d⁻¹.
    elevation_m : array_like
        Station elevation above sea level, m.
    a_s, b_s : float, optional
        Calibrated Angström coefficients, dimensionless. When both are given, eq. 36 is used;
        otherwise eq. 37 (the FAO-56 choice with the default coefficients).

    Returns
    -------
    ndarray
        R_so, MJ m⁻² d⁻¹.

    Notes
    -----
    FAO-56 eq. 37: :math:`R_{so} = (0.75 + 2 \\times 10^{-5} z) R_a`;
    eq. 36: :math:`R_{so} = (a_s + b_s) R_a`.

    References
    ----------
    Allen et al. (1998), FAO-56, eqs. 36-37.
    """
    ra = _arr(extraterrestrial)
    if a_s is not None and b_s is not None:
        return (a_s + b_s) * ra
    return (0.75 + 2e-5 * _arr(elevation_m)) * ra


def net_shortwave(solar: ArrayLike, albedo: float | ArrayLike) -> NDArray[np.float64]:
    """Net shortwave radiation.

    Parameters
    ----------
    solar : array_like
        Incoming solar radiation R_s, MJ m⁻² d⁻¹.
    albedo : float or array_like
        Albedo of the surface, dimensionless (0.23 for the FAO-56 grass reference; about 0.06
        for open water, from memory).

    Returns
    -------
    ndarray
        R_ns, MJ m⁻² d⁻¹.

    Notes
    -----
    FAO-56 eq. 38: :math:`R_{ns} = (1 - \\alpha) R_s`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 38.
    """
    return (1.0 - _arr(albedo)) * _arr(solar)


def net_longwave(
    tmax_c: ArrayLike | None,
    tmin_c: ArrayLike | None,
    vapour_pressure_kpa: ArrayLike,
    solar: ArrayLike,
    clear_sky: ArrayLike,
    tmean_c: ArrayLike | None = None,
) -> NDArray[np.float64]:
    """Net outgoing longwave radiation.

    Parameters
    ----------
    tmax_c, tmin_c : array_like or None
        Daily maximum and minimum air temperature, °C.
    vapour_pressure_kpa : array_like
        Actual vapour pressure e_a, kPa.
    solar : array_like
        Measured or estimated solar radiation R_s, MJ m⁻² d⁻¹.
    clear_sky : array_like
        Clear-sky radiation R_so, MJ m⁻² d⁻¹.
    tmean_c : array_like, optional
        Daily mean temperature, °C, used in place of the extremes when they are not given.

    Returns
    -------
    ndarray
        R_nl, MJ m⁻² d⁻¹ (positive = loss).

    Notes
    -----
    FAO-56 eq. 39:
    :math:`R_{nl} = \\sigma \\frac{T_{max,K}^4 + T_{min,K}^4}{2} (0.34 - 0.14\\sqrt{e_a})
    (1.35 R_s/R_{so} - 0.35)`. R_s/R_so is limited to 0.3-1.0 as in ASCE-EWRI (2005,
    eq. 18; from memory); FAO-56 states only the upper limit. Where R_so is 0 (polar night) the
    ratio is taken as 0.3.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 39 (worked example 11).
    """
    if tmax_c is not None and tmin_c is not None:
        t4 = 0.5 * ((_arr(tmax_c) + _KELVIN) ** 4 + (_arr(tmin_c) + _KELVIN) ** 4)
    elif tmean_c is not None:
        t4 = (_arr(tmean_c) + _KELVIN) ** 4
    else:
        raise ValueError("net_longwave needs tmax_c and tmin_c, or tmean_c")
    rs = _arr(solar)
    rso = _arr(clear_sky)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(rso > 0, rs / np.where(rso > 0, rso, 1.0), 0.3)
    ratio = np.where(np.isnan(rs), np.nan, np.clip(ratio, 0.3, 1.0))
    return (
        STEFAN_BOLTZMANN
        * t4
        * (0.34 - 0.14 * np.sqrt(_arr(vapour_pressure_kpa)))
        * (1.35 * ratio - 0.35)
    )


def net_radiation(net_short: ArrayLike, net_long: ArrayLike) -> NDArray[np.float64]:
    """Net radiation.

    Parameters
    ----------
    net_short : array_like
        R_ns, MJ m⁻² d⁻¹.
    net_long : array_like
        R_nl, MJ m⁻² d⁻¹ (positive = loss).

    Returns
    -------
    ndarray
        R_n, MJ m⁻² d⁻¹.

    Notes
    -----
    FAO-56 eq. 40: :math:`R_n = R_{ns} - R_{nl}`.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 40 (worked example 12).
    """
    return _arr(net_short) - _arr(net_long)


def heat_storage_lag(
    energy: ArrayLike, lag_days: float, initial: float | None = None
) -> NDArray[np.float64]:
    """First-order lag of the available energy, for the heat stored in a deep lake.

    Parameters
    ----------
    energy : array_like
        Daily energy input R_n, MJ m⁻² d⁻¹, along the last axis (days). NaN days are bridged by
        linear interpolation of the input and come back as NaN.
    lag_days : float
        Time constant τ of the lag, days (0 = no lag: the input comes back unchanged).
    initial : float, optional
        Starting lagged value, MJ m⁻² d⁻¹; default: the mean of the first 365 valid days (so a
        record that starts in summer does not start from an empty lake heat store).

    Returns
    -------
    ndarray
        Lagged available energy R_n - G, MJ m⁻² d⁻¹; G = R_n - (R_n - G) is the heat going into
        (positive) or out of (negative) storage.

    Notes
    -----
    A linear reservoir of heat with time constant τ (common practice, no source):

    .. math:: Q_t = Q_{t-1} + k (R_{n,t} - Q_{t-1}), \\qquad k = 1 - e^{-1/\\tau}

    computed with a recursive filter (``scipy.signal.lfilter``), not a loop over days. It
    conserves energy over long periods (the mean of Q equals the mean of R_n) and delays and
    damps the seasonal cycle of lake evaporation, as seen in deep lakes.
    """
    x = _arr(energy)
    if lag_days <= 0:
        return x.copy()
    from scipy.signal import lfilter

    missing = np.isnan(x)
    if missing.all():
        return x.copy()
    k = 1.0 - np.exp(-1.0 / lag_days)
    # Missing days are bridged by interpolating the input across the gap before filtering.
    idx = np.arange(x.shape[-1])
    filled = np.apply_along_axis(
        lambda row: (
            np.interp(idx, idx[~np.isnan(row)], row[~np.isnan(row)])
            if (~np.isnan(row)).any()
            else row
        ),
        -1,
        x,
    )
    if initial is None:
        start = np.nanmean(filled[..., :365], axis=-1, keepdims=True)
    else:
        start = np.full(x.shape[:-1] + (1,), float(initial))
    zi = (1.0 - k) * start  # state so that the output starts at `start`
    y, _ = lfilter([k], [1.0, -(1.0 - k)], filled, axis=-1, zi=zi)
    return np.where(missing, np.nan, y)
