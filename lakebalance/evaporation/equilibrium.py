"""The lake method: heat storage from the mean depth by the equilibrium temperature, and evaporation
by a Penman-Monteith form for open water.

``equilibrium_temperature``: a well-mixed layer of water as deep as the lake's mean depth
(volume / area of the day) relaxes towards the equilibrium temperature of the day, the surface
temperature at which the water would neither gain nor lose heat (de Bruin, 1982; Keijman, 1974),
with the time constant of its heat capacity. The heat it stores or releases is taken from the
available energy of the Penman-Monteith equation with an open-water aerodynamic resistance (from
the fetch-aware wind function of Sweers, 1976, or the log profile over water). This is the scheme
of Finch (2001) and McJannet et al. (2008), written here in the FAO-56 quantities the other
methods share (the longwave balance of FAO-56 eq. 39, corrected for the surface temperature).

References
----------
de Bruin, H.A.R. (1982). Temperature and energy balance of a water reservoir determined from
standard weather data of a land station. J. Hydrol. 59, 261-274.
Finch, J.W. (2001). A comparison between measured and modelled open water evaporation from a
reservoir in south-east England. Hydrol. Process. 15, 2771-2778.
Keijman, J.Q. (1974). The estimation of the energy balance of a lake from simple weather data.
Boundary-Layer Meteorol. 7, 399-407.
McJannet, D.L., Webster, I.T., Stenson, M.P., Sherman, B.S. (2008). Estimating open water
evaporation for the Murray-Darling Basin. CSIRO, Australia.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import ConfigError
from ..units import factor
from . import openwater as ow
from .atmosphere import (
    latent_heat,
    psychrometric_constant,
    saturation_vapour_pressure,
    slope_vapour_pressure_curve,
)
from .combination import COMBINATION_ROLES
from .method import EvaporationMethod
from .options import EvaporationOptions
from .radiation import STEFAN_BOLTZMANN
from .weather import PreparedWeather

__all__ = [
    "EQUILIBRIUM",
    "WATER_HEAT_CAPACITY",
    "LakeHeat",
    "wet_bulb_temperature",
    "equilibrium_temperature",
    "water_temperature_path",
    "start_temperature",
    "heat_storage",
    "penman_monteith_open_water",
    "lake_heat",
]

WATER_HEAT_CAPACITY = 4.18  # MJ m-3 °C-1, ρ_w c_w of fresh water near 15 °C (common practice)
_KELVIN = 273.16  # K, as FAO-56 eq. 39 writes it


def _arr(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def wet_bulb_temperature(
    tmean_c: ArrayLike, vapour_pressure_kpa: ArrayLike, pressure_kpa: ArrayLike
) -> NDArray[np.float64]:
    """Wet-bulb temperature from the air temperature and vapour pressure.

    Parameters
    ----------
    tmean_c : array_like
        Air temperature, °C.
    vapour_pressure_kpa : array_like
        Actual vapour pressure e_a, kPa.
    pressure_kpa : array_like
        Air pressure, kPa.

    Returns
    -------
    ndarray
        T_n, °C.

    Notes
    -----
    The root of the psychrometer equation :math:`e^\\circ(T_n) - \\gamma (T_a - T_n) = e_a`
    (FAO-56 eq. 15 with the ventilated coefficient of γ, eq. 8), by Newton's method from the air
    temperature (the function is increasing in T_n, so the iteration converges).
    """
    ta = _arr(tmean_c)
    ea = _arr(vapour_pressure_kpa)
    gamma = psychrometric_constant(pressure_kpa)
    tn = ta.copy()
    for _ in range(30):
        g = saturation_vapour_pressure(tn) - gamma * (ta - tn) - ea
        step = g / (slope_vapour_pressure_curve(tn) + gamma)
        tn = tn - step
        if np.all(~np.isfinite(step) | (np.abs(step) < 1e-9)):
            break
    return tn


def equilibrium_temperature(
    net_radiation: ArrayLike,
    tmean_c: ArrayLike,
    vapour_pressure_kpa: ArrayLike,
    pressure_kpa: ArrayLike,
    transfer: ArrayLike,
    *,
    linear: bool = False,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Equilibrium temperature of the water surface and the heat-exchange coefficient.

    Parameters
    ----------
    net_radiation : array_like
        Net radiation of the water surface at air temperature, R_n (FAO-56 eqs. 38-40 with the
        water albedo), MJ m⁻² d⁻¹.
    tmean_c : array_like
        Air temperature T_a, °C.
    vapour_pressure_kpa : array_like
        e_a, kPa.
    pressure_kpa : array_like
        Air pressure, kPa.
    transfer : array_like
        h = ρ_a c_p / r_a of the water surface, MJ m⁻² d⁻¹ °C⁻¹
        (:func:`~lakebalance.evaporation.openwater.transfer_coefficient`).
    linear : bool
        True: de Bruin's (1982) closed form, linearised about the wet-bulb temperature (k at
        T_n). False (default): that value refined by Newton's method on the full surface
        balance (k at T_e).

    Returns
    -------
    t_e : ndarray
        Equilibrium temperature T_e, °C.
    k : ndarray
        Heat-exchange coefficient of the surface at T_e, MJ m⁻² d⁻¹ °C⁻¹: the net heat flux into
        the water falls by k for each degree the surface is above T_e.

    Notes
    -----
    T_e is the surface temperature at which the water gains no heat (de Bruin 1982):
    :math:`F(T) = R_n + \\sigma[(T_a + 273.16)^4 - (T + 273.16)^4] - \\frac{h}{\\gamma}(e^\\circ(T)
    - e_a) - h (T - T_a) = 0` (net radiation with the longwave emitted at T rather than at T_a,
    emissivity 1; latent and sensible heat with one transfer coefficient). de Bruin's closed form
    linearises F about the wet-bulb temperature T_n, where λE = −H:

    .. math:: T_e = T_n + \\frac{Q^*_n}{4\\sigma (T_n + 273.16)^3 + h (\\Delta_n + \\gamma)/\\gamma}

    with :math:`Q^*_n = F(T_n)`. When T_e is far from T_n (a warm, dry, sunny day) the convex
    e°(T) makes that closed form a few degrees too warm, so by default it is the first step of
    Newton's method on F, iterated to convergence; k = −F′(T_e) =
    4σ(T_e + 273.16)³ + h (Δ(T_e) + γ)/γ.
    """
    ta = _arr(tmean_c)
    ea = _arr(vapour_pressure_kpa)
    rn = _arr(net_radiation)
    h = _arr(transfer)
    gamma = psychrometric_constant(pressure_kpa)

    def balance(t):
        return (
            rn
            + STEFAN_BOLTZMANN * ((ta + _KELVIN) ** 4 - (t + _KELVIN) ** 4)
            - h / gamma * (saturation_vapour_pressure(t) - ea)
            - h * (t - ta)
        )

    def slope(t):  # -F'(t)
        return (
            4.0 * STEFAN_BOLTZMANN * (t + _KELVIN) ** 3
            + h * (slope_vapour_pressure_curve(t) + gamma) / gamma
        )

    t = wet_bulb_temperature(ta, ea, pressure_kpa)
    if linear:  # de Bruin's closed form: one step from T_n, k at T_n
        k_n = slope(t)
        return t + balance(t) / k_n, k_n
    for _ in range(30):
        step = balance(t) / slope(t)
        t = t + step
        if np.all(~np.isfinite(step) | (np.abs(step) < 1e-9)):
            break
    return t, slope(t)


def water_temperature_path(
    t_e: ArrayLike,
    tau_days: ArrayLike,
    initial_c: float | None = None,
    *,
    frozen: ArrayLike | None = None,
    floor_c: float | None = 0.0,
) -> NDArray[np.float64]:
    """Daily water temperature of a well-mixed layer relaxing towards the equilibrium temperature.

    Parameters
    ----------
    t_e : array_like
        Equilibrium temperature of each day, °C (NaN days: the temperature is held).
    tau_days : array_like
        Time constant of each day, ρ_w c_w z / k, days (0: the water is at T_e every day).
    initial_c : float, optional
        Water temperature at the start (the end of the day before the first), °C. Default: the
        periodic start, the temperature that the first year of forcing, repeated, returns to
        (exact for the linear recursion, then three repeats with the floor); with less than a
        year of forcing, the mean equilibrium temperature.
    frozen : array_like of bool, optional
        Days under ice: the water keeps its temperature (the ice cover insulates it).
    floor_c : float or None
        Lowest water temperature, °C (0: liquid water; the cooling beyond it forms ice, whose
        latent heat is not followed); None for none.

    Returns
    -------
    ndarray
        T_w at the end of each day, °C.

    Notes
    -----
    The exact solution of :math:`dT_w/dt = (T_e - T_w)/\\tau` over one day with T_e and τ held
    (de Bruin 1982; McJannet et al. 2008):
    :math:`T_{w,t} = T_{e,t} + (T_{w,t-1} - T_{e,t}) e^{-1/\\tau_t}`.
    The recursion is sequential (each day needs the day before): a loop over days on plain
    floats, about 10 ms per century of days.
    """
    te, a, b = _coefficients(t_e, tau_days, frozen)
    n = te.size
    if n == 0:
        return te.copy()
    lo = -np.inf if floor_c is None else float(floor_c)
    if initial_c is None:
        initial_c = _periodic_start(a, b, te, lo)
    out = np.empty(n)
    t = float(initial_c)
    for i, (ai, bi) in enumerate(zip(a.tolist(), b.tolist(), strict=True)):
        t = ai * t + bi
        if t < lo:
            t = lo
        out[i] = t
    return out


def _coefficients(t_e: ArrayLike, tau_days: ArrayLike, frozen: ArrayLike | None):
    """``(T_e, a, b)`` of the recursion T_t = a_t T_t-1 + b_t (held days: a = 1, b = 0)."""
    te = _arr(t_e).ravel()
    tau = _arr(tau_days).ravel() * np.ones_like(te)
    hold = ~np.isfinite(te) | ~np.isfinite(tau)
    if frozen is not None:
        hold |= np.asarray(frozen, dtype=bool).ravel()
    with np.errstate(divide="ignore", over="ignore"):
        a = np.where(tau > 0, np.exp(-1.0 / np.where(tau > 0, tau, 1.0)), 0.0)
    a = np.where(hold, 1.0, a)
    b = np.where(hold, 0.0, (1.0 - a) * np.nan_to_num(te))
    return te, a, b


def start_temperature(
    t_e: ArrayLike, tau_days: ArrayLike, frozen: ArrayLike | None = None, floor_c: float = 0.0
) -> float:
    """The default start of :func:`water_temperature_path`, °C (see there)."""
    te, a, b = _coefficients(t_e, tau_days, frozen)
    return _periodic_start(a, b, te, float(floor_c))


def _periodic_start(a: np.ndarray, b: np.ndarray, te: np.ndarray, lo: float) -> float:
    """The start temperature that the first year of forcing, repeated, returns to."""
    finite = te[np.isfinite(te)]
    mean_te = float(np.mean(finite)) if finite.size else 10.0
    if a.size < 365:
        return max(mean_te, lo)
    a1, b1 = a[:365], b[:365]
    # T_365 = A T_0 + B for the linear recursion: the fixed point T_0 = B / (1 - A)
    big_a = float(np.prod(a1))
    t = 0.0
    for ai, bi in zip(a1.tolist(), b1.tolist(), strict=True):
        t = ai * t + bi
    start = t / (1.0 - big_a) if big_a < 1.0 - 1e-12 else mean_te
    if not np.isfinite(lo):
        return start
    start = max(start, lo)
    for _ in range(3):  # the floor makes the recursion non-linear: repeat the year
        for ai, bi in zip(a1.tolist(), b1.tolist(), strict=True):
            start = max(ai * start + bi, lo)
    return start


def heat_storage(
    water_temperature_c: ArrayLike, depth_m: ArrayLike, initial_c: float
) -> NDArray[np.float64]:
    """Heat going into the water column each day.

    Parameters
    ----------
    water_temperature_c : array_like
        T_w at the end of each day, °C.
    depth_m : array_like
        Mean depth of the mixed water of each day, m.
    initial_c : float
        T_w at the end of the day before the first, °C.

    Returns
    -------
    ndarray
        N = ρ_w c_w z_t (T_w,t − T_w,t−1) / (1 d), MJ m⁻² d⁻¹ (positive: the water warms).

    Notes
    -----
    Over a period at constant depth the sum of N is ρ_w c_w z (T_w,end − T_w,start): what is
    stored comes back when the temperature returns (energy conservation). Heat carried by inflow
    and outflow is not included (common practice for this method; McJannet et al. 2008).
    """
    tw = _arr(water_temperature_c)
    prev = np.concatenate([[float(initial_c)], tw[:-1]])
    return WATER_HEAT_CAPACITY * _arr(depth_m) * (tw - prev)


def penman_monteith_open_water(
    available_energy: ArrayLike,
    tmean_c: ArrayLike,
    saturation_kpa: ArrayLike,
    vapour_pressure_kpa: ArrayLike,
    transfer: ArrayLike,
    pressure_kpa: ArrayLike,
) -> NDArray[np.float64]:
    """Open-water evaporation by the Penman-Monteith equation (no surface resistance).

    Parameters
    ----------
    available_energy : array_like
        Q* − N, net radiation less heat going into storage, MJ m⁻² d⁻¹.
    tmean_c : array_like
        Air temperature, °C.
    saturation_kpa, vapour_pressure_kpa : array_like
        e_s and e_a, kPa.
    transfer : array_like
        ρ_a c_p / r_a, MJ m⁻² d⁻¹ °C⁻¹.
    pressure_kpa : array_like
        Air pressure, kPa.

    Returns
    -------
    ndarray
        E, mm/d (negative: condensation).

    Notes
    -----
    Monteith (1965) with r_s = 0, as Finch (2001) and McJannet et al. (2008) use it:

    .. math:: \\lambda E = \\frac{\\Delta (Q^* - N) + \\rho_a c_p (e_s - e_a)/r_a}{\\Delta + \\gamma}

    Δ at air temperature (FAO-56 eq. 13), γ (eq. 8), λ (FAO-56 Annex 3 eq. 3-1). With a wind
    function, ρ_a c_p / r_a = γ f(u) and this is Penman's form with f(u).
    """
    t = _arr(tmean_c)
    delta = slope_vapour_pressure_curve(t)
    gamma = psychrometric_constant(pressure_kpa)
    deficit = _arr(saturation_kpa) - _arr(vapour_pressure_kpa)
    lam_e = (delta * _arr(available_energy) + _arr(transfer) * deficit) / (delta + gamma)
    return lam_e / latent_heat(t)


class LakeHeat:
    """The heat path of the lake method: what :func:`lake_heat` returns (arrays over days).

    Attributes
    ----------
    evaporation_mm : ndarray
        Daily evaporation E, mm/d.
    no_storage_mm : ndarray
        The same equation with N = 0, mm/d.
    water_temperature_c, equilibrium_c : ndarray
        T_w (end of day) and T_e, °C.
    storage : ndarray
        Heat going into storage N, MJ m⁻² d⁻¹.
    tau_days : ndarray
        Time constant, days.
    transfer : ndarray
        ρ_a c_p / r_a, MJ m⁻² d⁻¹ °C⁻¹.
    initial_c : float
        T_w at the start, °C.
    """

    __slots__ = (
        "evaporation_mm",
        "no_storage_mm",
        "water_temperature_c",
        "equilibrium_c",
        "storage",
        "tau_days",
        "transfer",
        "initial_c",
    )

    def __init__(self, **values: object) -> None:
        for name in self.__slots__:
            setattr(self, name, values[name])


def lake_heat(
    net_radiation: ArrayLike,
    tmean_c: ArrayLike,
    saturation_kpa: ArrayLike,
    vapour_pressure_kpa: ArrayLike,
    transfer: ArrayLike,
    pressure_kpa: float,
    depth_m: ArrayLike,
    *,
    initial_c: float | None = None,
    frozen: ArrayLike | None = None,
) -> LakeHeat:
    """Water temperature, heat storage and evaporation of a lake of the given mean depth.

    Parameters
    ----------
    net_radiation : array_like
        Net radiation of the water surface (FAO-56 eqs. 38-40, water albedo), MJ m⁻² d⁻¹.
    tmean_c : array_like
        Air temperature, °C.
    saturation_kpa, vapour_pressure_kpa : array_like
        e_s and e_a, kPa.
    transfer : array_like
        ρ_a c_p / r_a of the water surface, MJ m⁻² d⁻¹ °C⁻¹.
    pressure_kpa : float
        Air pressure, kPa.
    depth_m : array_like
        Mean depth of each day (volume / area), m; 0 gives the no-storage value.
    initial_c : float, optional
        Water temperature at the start, °C (default: see :func:`water_temperature_path`).
    frozen : array_like of bool, optional
        Days under ice (the water temperature is held; no heat stored).

    Returns
    -------
    LakeHeat
    """
    rn = _arr(net_radiation)
    t_e, k = equilibrium_temperature(rn, tmean_c, vapour_pressure_kpa, pressure_kpa, transfer)
    z = np.maximum(_arr(depth_m) * np.ones_like(rn), 0.0)
    tau = WATER_HEAT_CAPACITY * z / k
    tw0 = start_temperature(t_e, tau, frozen) if initial_c is None else float(initial_c)
    tw = water_temperature_path(t_e, tau, tw0, frozen=frozen)
    n = heat_storage(tw, np.nan_to_num(z), tw0)
    n = np.where(np.isfinite(rn), n, np.nan)
    args = (tmean_c, saturation_kpa, vapour_pressure_kpa, transfer, pressure_kpa)
    return LakeHeat(
        evaporation_mm=penman_monteith_open_water(rn - n, *args),
        no_storage_mm=penman_monteith_open_water(rn, *args),
        water_temperature_c=tw,
        equilibrium_c=t_e,
        storage=n,
        tau_days=tau,
        transfer=_arr(transfer) * np.ones_like(rn),
        initial_c=tw0,
    )


# --- the registry entry -------------------------------------------------------------------
def wind_10m_land(wind_ms: np.ndarray, options: EvaporationOptions) -> np.ndarray:
    """The anemometer's wind as the 10 m wind of a land station (the wind of Sweers' function)."""
    z = options.wind_height
    if options.wind_exposure == "land":
        if z == 10.0:
            return np.asarray(wind_ms, dtype=float)
        return ow.log_profile_wind(wind_ms, z, 10.0, options.land_roughness)
    # over water: up to the blending height over water, down to 10 m over land
    blended = ow.log_profile_wind(wind_ms, z, ow.BLENDING_HEIGHT_M, options.water_roughness)
    return ow.log_profile_wind(blended, ow.BLENDING_HEIGHT_M, 10.0, options.land_roughness)


def wind_2m_water(wind_ms: np.ndarray, options: EvaporationOptions) -> np.ndarray:
    """The anemometer's wind at 2 m over the water (log profile, open-water roughness)."""
    return ow.wind_over_water(
        wind_ms,
        options.wind_height,
        exposure=options.wind_exposure,
        land_roughness_m=options.land_roughness,
        water_roughness_m=options.water_roughness,
    )


def open_water_transfer(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray:
    """ρ_a c_p / r_a of the lake surface for each day, MJ m⁻² d⁻¹ °C⁻¹."""
    wind = weather.series("wind")
    gamma = psychrometric_constant(weather.pressure_kpa) * np.ones(len(weather.index))
    if options.wind_function == "sweers":
        f_u = ow.sweers_wind_function(wind_10m_land(wind, options), weather.area_m2)
        return ow.transfer_coefficient(psychrometric_kpa_c=gamma, wind_function=f_u)
    rho = ow.air_density(weather.pressure_kpa, weather.tmean_c)
    return ow.transfer_coefficient(
        psychrometric_kpa_c=gamma,
        wind_2m_water_ms=wind_2m_water(wind, options),
        air_density_kg_m3=rho,
        water_roughness_m=options.water_roughness,
    )


def lake_heat_of(weather: PreparedWeather, options: EvaporationOptions) -> LakeHeat:
    """:func:`lake_heat` on the prepared weather of a site."""
    if weather.net_radiation_water is None or weather.mean_depth_m is None:
        raise ConfigError("the lake method needs net radiation and a mean depth")
    depth = weather.mean_depth_m
    if options.mixed_depth_max is not None:
        depth = np.minimum(depth, options.mixed_depth_max)
    return lake_heat(
        weather.net_radiation_water,
        weather.tmean_c,
        weather.saturation_kpa,
        weather.vapour_pressure_kpa,
        open_water_transfer(weather, options),
        weather.pressure_kpa,
        depth,
        initial_c=options.initial_water_temperature,
        frozen=weather.ice,
    )


def _equilibrium(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray:
    """Lake evaporation with heat storage from the mean depth, m/d."""
    return lake_heat_of(weather, options).evaporation_mm * factor("mm", "m")


def _note(options: EvaporationOptions) -> str:
    depth = (
        "the mean depth (volume/area each day)"
        if options.mixed_depth_max is None
        else f"the mean depth (volume/area each day), at most {options.mixed_depth_max:g} m"
    )
    wind = (
        "the area-dependent wind function of Sweers (1976)"
        if options.wind_function == "sweers"
        else "the log profile over open water"
    )
    return (
        f"equilibrium_temperature: heat storage of a mixed layer as deep as {depth}, "
        f"aerodynamic resistance from {wind}, wind from "
        f"{options.wind_height:g} m over {options.wind_exposure}; negative days (condensation, "
        "heat released) are kept"
    )


EQUILIBRIUM = EvaporationMethod(
    name="equilibrium_temperature",
    family="lake",
    label="equilibrium temperature with heat storage (lake)",
    reference=(
        "de Bruin (1982); Finch (2001); McJannet et al. (2008): equilibrium temperature, heat "
        "storage from the mean depth, Penman-Monteith for open water; Sweers (1976) wind function"
    ),
    roles=COMBINATION_ROLES,  # the weather of the combination methods
    needs=("energy", "wind", "lake_geometry"),
    compute=_equilibrium,
    preference=1,
    condensation=True,
    uses_pressure=True,
    input_note=_note,
    keep_negative=lambda options: True,
)
