"""Evaporation equations: open-water Penman, Priestley-Taylor, FAO-56 Penman-Monteith, Hargreaves,
pan coefficients and a first-order heat-storage lag.

Pure, vectorised numpy functions returning depths in mm per day, the unit of the published
equations; :mod:`lakebalance.evaporation.lake` turns them into m per day through
:mod:`lakebalance.units`. Negative values (condensation) are returned as they are; the caller
decides whether to keep them.

References
----------
Allen, R.G., Pereira, L.S., Raes, D., Smith, M. (1998). Crop evapotranspiration. FAO Irrigation
and Drainage Paper 56, Rome.
Penman, H.L. (1948). Natural evaporation from open water, bare soil and grass. Proc. R. Soc.
Lond. A 193, 120-145.
Priestley, C.H.B., Taylor, R.J. (1972). On the assessment of surface heat flux and evaporation
using large-scale parameters. Mon. Weather Rev. 100, 81-92.
Hargreaves, G.H., Samani, Z.A. (1985). Reference crop evapotranspiration from temperature.
Appl. Eng. Agric. 1, 96-99.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .atmosphere import (
    latent_heat,
    psychrometric_constant,
    slope_vapour_pressure_curve,
)

__all__ = [
    "MJ_TO_MM_FAO56",
    "penman_open_water",
    "priestley_taylor",
    "fao56_reference",
    "hargreaves",
    "pan_to_lake",
    "heat_storage_lag",
]

#: Evaporation equivalent of 1 MJ m⁻² d⁻¹, mm/d (FAO-56 eq. 20: 1/λ with λ = 2.45 MJ/kg).
MJ_TO_MM_FAO56 = 0.408  # mm per MJ m-2


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


def priestley_taylor(
    available_energy: ArrayLike,
    tmean_c: ArrayLike,
    pressure_kpa: ArrayLike,
    alpha: float = 1.26,
) -> NDArray[np.float64]:
    """Evaporation from a wet surface by Priestley and Taylor (1972).

    Parameters
    ----------
    available_energy : array_like
        R_n - G, MJ m⁻² d⁻¹.
    tmean_c : array_like
        Mean daily air temperature, °C.
    pressure_kpa : array_like
        Atmospheric pressure, kPa.
    alpha : float
        Priestley-Taylor coefficient, dimensionless (1.26 for saturated surfaces).

    Returns
    -------
    ndarray
        E, mm/d.

    Notes
    -----
    .. math:: E = \\alpha \\frac{\\Delta}{\\Delta + \\gamma} \\frac{R_n - G}{\\lambda}

    with Δ (FAO-56 eq. 13), γ (eq. 8) and λ(T) (Annex 3 eq. 3-1).

    References
    ----------
    Priestley and Taylor (1972), the equilibrium evaporation scaled by alpha.
    """
    t = _arr(tmean_c)
    delta = slope_vapour_pressure_curve(t)
    gamma = psychrometric_constant(pressure_kpa)
    return alpha * delta / (delta + gamma) * _arr(available_energy) / latent_heat(t)


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


def hargreaves(
    tmax_c: ArrayLike, tmin_c: ArrayLike, extraterrestrial: ArrayLike
) -> NDArray[np.float64]:
    """Reference evapotranspiration from temperature only (Hargreaves and Samani, 1985).

    Parameters
    ----------
    tmax_c, tmin_c : array_like
        Daily maximum and minimum air temperature, °C.
    extraterrestrial : array_like
        R_a, MJ m⁻² d⁻¹.

    Returns
    -------
    ndarray
        ET_0, mm/d. A rough estimate: FAO-56 recommends it only where radiation, humidity and
        wind are missing. A negative temperature range is treated as zero.

    Notes
    -----
    FAO-56 eq. 52:
    :math:`ET_0 = 0.0023 (T_{mean} + 17.8) (T_{max} - T_{min})^{0.5} R_a`, R_a in mm/d
    (0.408 R_a), T_mean = (T_max + T_min)/2.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 52; Hargreaves and Samani (1985).
    """
    tmax = _arr(tmax_c)
    tmin = _arr(tmin_c)
    tmean = 0.5 * (tmax + tmin)
    spread = np.sqrt(np.clip(tmax - tmin, 0.0, None))
    return 0.0023 * (tmean + 17.8) * spread * MJ_TO_MM_FAO56 * _arr(extraterrestrial)


def pan_to_lake(
    pan: ArrayLike, coefficient: float | ArrayLike, month: ArrayLike | None = None
) -> NDArray[np.float64]:
    """Lake evaporation from pan evaporation and a pan coefficient.

    Parameters
    ----------
    pan : array_like
        Pan evaporation, any depth unit per day (the result has the same unit).
    coefficient : float or sequence of 12 floats
        Pan-to-lake coefficient, dimensionless: one value, or one per calendar month
        (January first).
    month : array_like of int, optional
        Calendar month (1-12) of each value of ``pan``; needed with monthly coefficients.

    Returns
    -------
    ndarray
        Lake evaporation, same unit as ``pan``.

    Notes
    -----
    :math:`E_{lake} = K_p E_{pan}`. The annual coefficient of a Class A pan is commonly taken as
    about 0.7 (a rule of thumb, from memory); it varies by season, climate and pan siting.
    """
    k = _arr(coefficient)
    if k.ndim == 0:
        return k * _arr(pan)
    if k.shape != (12,):
        raise ValueError("pan coefficient must be one value or 12 monthly values")
    if month is None:
        raise ValueError("monthly pan coefficients need the month of each day")
    return k[_arr(month).astype(int) - 1] * _arr(pan)


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
