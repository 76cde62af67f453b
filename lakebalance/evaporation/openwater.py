"""Open water, not grass: wind over the lake, the fetch-aware wind function, the aerodynamic
transfer of open water, the albedo of water by sun angle and the FAO-56 open-water coefficients.

Pure, vectorised numpy functions shared by the lake method (:mod:`.equilibrium`) and the FAO-56
route (:mod:`.combination`).

- :func:`log_profile_wind` and :func:`wind_over_water`: the neutral logarithmic wind profile, and
  the wind of an anemometer on land (or on the water) brought to a height over the water through a
  blending height where the wind no longer feels the surface below;
- :func:`sweers_wind_function`: the area-dependent wind function of Sweers (1976), as used by
  McJannet et al. (2008) for open water of any size;
- :func:`fetch_from_area`: the fetch of a lake of area A, the diameter of the circle of that area;
- :func:`transfer_coefficient`: the sensible-heat transfer coefficient ρ_a c_p / r_a of the water
  surface, from the wind function or from the log profile over open water;
- :func:`water_albedo`: the daily albedo of water by sun angle (Taylor et al., 1996, for the direct
  beam; a constant for diffuse light; the diffuse fraction from the clearness index, Erbs et al.,
  1982);
- :func:`open_water_coefficient`: the FAO-56 Table 12 coefficients of open water by depth class,
  seasonal for deep temperate water.

References
----------
Allen, R.G., Pereira, L.S., Raes, D., Smith, M. (1998). Crop evapotranspiration. FAO Irrigation
and Drainage Paper 56, Rome (Table 12 and its notes).
Brutsaert, W. (1982). Evaporation into the atmosphere. Reidel, Dordrecht (the log profile,
roughness of water surfaces).
Erbs, D.G., Klein, S.A., Duffie, J.A. (1982). Estimation of the diffuse radiation fraction for
hourly, daily and monthly-average global radiation. Solar Energy 28, 293-302.
McJannet, D.L., Webster, I.T., Stenson, M.P., Sherman, B.S. (2008). Estimating open water
evaporation for the Murray-Darling Basin. CSIRO, Australia.
Sweers, H.E. (1976). A nomogram to estimate the heat-exchange coefficient at the air-water
interface as a function of wind speed and temperature; a critical survey of some literature.
J. Hydrol. 30, 375-401.
Taylor, J.P., Edwards, J.M., Glew, M.D., Hignett, P., Slingo, A. (1996). Studies with a flexible
new radiation code. II: Comparisons with aircraft short-wave observations. Q. J. R. Meteorol.
Soc. 122, 839-861.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..units import SECONDS_PER_DAY
from . import radiation as rad

__all__ = [
    "VON_KARMAN",
    "WATER_ROUGHNESS_M",
    "LAND_ROUGHNESS_M",
    "BLENDING_HEIGHT_M",
    "SPECIFIC_HEAT_AIR",
    "log_profile_wind",
    "wind_over_water",
    "fetch_from_area",
    "sweers_wind_function",
    "air_density",
    "transfer_coefficient",
    "direct_beam_albedo",
    "diffuse_fraction",
    "water_albedo",
    "open_water_coefficient",
]

VON_KARMAN = 0.41  # (-) von Kármán constant (common practice, no source)
WATER_ROUGHNESS_M = 2e-4  # m, roughness length of open water (Brutsaert 1982; from memory)
LAND_ROUGHNESS_M = 0.03  # m, open flat terrain with grass, WMO class "open" (from memory)
BLENDING_HEIGHT_M = 60.0  # m, where land and lake share one wind (common practice, no source)
SPECIFIC_HEAT_AIR = 1.013e-3  # MJ kg-1 K-1 (FAO-56 p. 26)


def _arr(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def log_profile_wind(
    wind_ms: ArrayLike, from_height_m: float, to_height_m: float, roughness_m: float
) -> NDArray[np.float64]:
    """Wind at another height over the same surface by the neutral logarithmic profile.

    Parameters
    ----------
    wind_ms : array_like
        Wind speed at ``from_height_m``, m/s.
    from_height_m, to_height_m : float
        Heights above the surface (or above the zero-plane displacement), m; both above
        ``roughness_m``.
    roughness_m : float
        Aerodynamic roughness length z₀ of the surface, m.

    Returns
    -------
    ndarray
        Wind speed at ``to_height_m``, m/s.

    Notes
    -----
    .. math:: u(z_2) = u(z_1) \\frac{\\ln(z_2 / z_0)}{\\ln(z_1 / z_0)}

    (Brutsaert 1982, ch. 4; neutral stability).
    """
    if min(from_height_m, to_height_m) <= roughness_m or roughness_m <= 0:
        raise ValueError("heights must exceed the roughness length, which must be positive")
    return _arr(wind_ms) * (np.log(to_height_m / roughness_m) / np.log(from_height_m / roughness_m))


def wind_over_water(
    wind_ms: ArrayLike,
    height_m: float,
    *,
    exposure: str = "land",
    to_height_m: float = 2.0,
    land_roughness_m: float = LAND_ROUGHNESS_M,
    water_roughness_m: float = WATER_ROUGHNESS_M,
    blending_height_m: float = BLENDING_HEIGHT_M,
) -> NDArray[np.float64]:
    """Wind at ``to_height_m`` over the lake from an anemometer on land or on the water.

    Parameters
    ----------
    wind_ms : array_like
        Measured wind speed, m/s.
    height_m : float
        Anemometer height above its surface, m.
    exposure : {"land", "water"}
        Where the anemometer stands: on land (roughness ``land_roughness_m``) or over the water
        (a raft, a buoy, a jetty head; roughness ``water_roughness_m``).
    to_height_m : float
        Height over the water wanted, m (2 m for the evaporation equations).
    land_roughness_m, water_roughness_m : float
        Roughness lengths z₀ of the land around the anemometer and of open water, m.
    blending_height_m : float
        Height at which the wind is taken to be the same over land and water, m.

    Returns
    -------
    ndarray
        Wind over the water at ``to_height_m``, m/s.

    Notes
    -----
    Over water: :math:`u_w(z) = u(z_a) \\ln(z/z_{0w}) / \\ln(z_a/z_{0w})`. From land: up to the
    blending height z_b over land, then down over water,

    .. math:: u_w(z) = u(z_a) \\frac{\\ln(z_b/z_{0l})}{\\ln(z_a/z_{0l})}
       \\frac{\\ln(z/z_{0w})}{\\ln(z_b/z_{0w})}

    (the log profile of Brutsaert 1982; the matching at a blending height is common practice,
    no source). The smoother water surface gives a faster wind near it than over land.
    """
    if exposure == "water":
        return log_profile_wind(wind_ms, height_m, to_height_m, water_roughness_m)
    if exposure != "land":
        raise ValueError("exposure must be 'land' or 'water'")
    blended = log_profile_wind(wind_ms, height_m, blending_height_m, land_roughness_m)
    return log_profile_wind(blended, blending_height_m, to_height_m, water_roughness_m)


def fetch_from_area(area_m2: ArrayLike) -> NDArray[np.float64]:
    """Fetch of a lake of area A: the diameter of the circle of that area.

    Parameters
    ----------
    area_m2 : array_like
        Lake surface area, m².

    Returns
    -------
    ndarray
        Fetch L = √(4A/π), m (common practice, no source; an elongated lake has a longer fetch
        along its axis and a shorter one across).
    """
    return np.sqrt(4.0 * _arr(area_m2) / np.pi)


def sweers_wind_function(wind_10m_ms: ArrayLike, area_m2: ArrayLike) -> NDArray[np.float64]:
    """The area-dependent wind function of open water (Sweers, 1976).

    Parameters
    ----------
    wind_10m_ms : array_like
        Wind speed at 10 m at a land station, m/s.
    area_m2 : array_like
        Surface area of the water body, m².

    Returns
    -------
    ndarray
        f(u), MJ m⁻² d⁻¹ kPa⁻¹: the latent heat flux per kPa of vapour pressure difference
        between the water surface and the air, λE = f(u) (e*_w − e_a).

    Notes
    -----
    Sweers (1976), as written by McJannet et al. (2008, appendix; from memory):

    .. math:: f(u) = \\left(\\frac{5}{A}\\right)^{0.05} (3.80 + 1.57 u_{10})

    with A in km². In Sweers' units this is (5/A)^0.05 (4.4 + 1.82 u₁₀) W m⁻² hPa⁻¹
    (4.4 W m⁻² hPa⁻¹ × 0.0864 MJ d⁻¹ W⁻¹ × 10 hPa kPa⁻¹ = 3.80). The function falls slowly with
    area (fetch): the air crossing a larger lake is moistened on its way and takes up less.
    """
    area_km2 = _arr(area_m2) * 1e-6
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.where(
            area_km2 > 0, (5.0 / np.where(area_km2 > 0, area_km2, 1.0)) ** 0.05, np.nan
        )
    return scale * (3.80 + 1.57 * _arr(wind_10m_ms))


def air_density(pressure_kpa: ArrayLike, tmean_c: ArrayLike) -> NDArray[np.float64]:
    """Mean air density at constant pressure.

    Parameters
    ----------
    pressure_kpa : array_like
        Air pressure, kPa.
    tmean_c : array_like
        Air temperature, °C.

    Returns
    -------
    ndarray
        ρ_a, kg m⁻³.

    Notes
    -----
    FAO-56 Box 6 (virtual temperature as 1.01 (T + 273)):
    :math:`\\rho_a = P / (1.01 (T + 273) R)`, R = 0.287 kJ kg⁻¹ K⁻¹.
    """
    return _arr(pressure_kpa) / (1.01 * (_arr(tmean_c) + 273.0) * 0.287)


def transfer_coefficient(
    *,
    psychrometric_kpa_c: ArrayLike,
    wind_function: ArrayLike | None = None,
    wind_2m_water_ms: ArrayLike | None = None,
    air_density_kg_m3: ArrayLike | None = None,
    water_roughness_m: float = WATER_ROUGHNESS_M,
) -> NDArray[np.float64]:
    """The sensible-heat transfer coefficient of the water surface, ρ_a c_p / r_a.

    Parameters
    ----------
    psychrometric_kpa_c : array_like
        γ, kPa °C⁻¹.
    wind_function : array_like, optional
        f(u), MJ m⁻² d⁻¹ kPa⁻¹ (:func:`sweers_wind_function`).
    wind_2m_water_ms : array_like, optional
        Wind at 2 m over the water, m/s (used when ``wind_function`` is None).
    air_density_kg_m3 : array_like, optional
        ρ_a, kg m⁻³ (needed with ``wind_2m_water_ms``).
    water_roughness_m : float
        z₀ of open water, m (equal for momentum and vapour: a simplification).

    Returns
    -------
    ndarray
        h = ρ_a c_p / r_a, MJ m⁻² d⁻¹ °C⁻¹. The aerodynamic resistance is r_a = 86400 ρ_a c_p / h
        s m⁻¹ with ρ_a c_p in MJ m⁻³ °C⁻¹.

    Notes
    -----
    From a wind function (Calder and Neal 1984; McJannet et al. 2008; from memory):
    r_a = ρ_a c_p / (γ f(u)), hence :math:`h = \\gamma f(u)`. From the log profile over open
    water (neutral stability, FAO-56 eq. 4 with no displacement and z₀ of water):
    :math:`r_a = \\ln^2(z/z_0) / (k^2 u_z)`, z = 2 m.
    """
    gamma = _arr(psychrometric_kpa_c)
    if wind_function is not None:
        return gamma * _arr(wind_function)
    if wind_2m_water_ms is None or air_density_kg_m3 is None:
        raise ValueError("give a wind function, or the 2 m wind over water and the air density")
    u = np.maximum(_arr(wind_2m_water_ms), 0.1)  # m/s: calm is never quite calm
    r_a = np.log(2.0 / water_roughness_m) ** 2 / (VON_KARMAN**2 * u)  # s m-1
    return _arr(air_density_kg_m3) * SPECIFIC_HEAT_AIR * SECONDS_PER_DAY / r_a


def direct_beam_albedo(cos_zenith: ArrayLike) -> NDArray[np.float64]:
    """Albedo of a water surface for the direct solar beam (Taylor et al., 1996).

    Parameters
    ----------
    cos_zenith : array_like
        Cosine of the solar zenith angle μ (-), 0-1.

    Returns
    -------
    ndarray
        α_dir (-).

    Notes
    -----
    :math:`\\alpha_{dir} = 0.037 / (1.1 \\mu^{1.4} + 0.15)` (Taylor et al., 1996; from memory):
    about 0.03 with the sun overhead, 0.065 at 60° zenith, rising steeply towards the horizon.
    """
    mu = np.clip(_arr(cos_zenith), 0.0, 1.0)
    return 0.037 / (1.1 * mu**1.4 + 0.15)


def diffuse_fraction(clearness: ArrayLike, sunset_hour_angle_rad: ArrayLike) -> NDArray[np.float64]:
    """Daily diffuse fraction of global radiation from the clearness index (Erbs et al., 1982).

    Parameters
    ----------
    clearness : array_like
        K_T = R_s / R_a (-).
    sunset_hour_angle_rad : array_like
        ω_s, rad.

    Returns
    -------
    ndarray
        H_d / H (-), 0-1.

    Notes
    -----
    Erbs et al. (1982), daily correlation (from memory): for ω_s ≤ 81.4°,
    1 − 0.2727 K + 2.4495 K² − 11.9514 K³ + 9.3879 K⁴ when K < 0.715, else 0.143; for
    ω_s > 81.4°, 1 + 0.2832 K − 2.5557 K² + 0.8448 K³ when K < 0.722, else 0.175.
    """
    k = np.clip(_arr(clearness), 0.0, 1.0)
    short = np.where(
        k < 0.715, 1 - 0.2727 * k + 2.4495 * k**2 - 11.9514 * k**3 + 9.3879 * k**4, 0.143
    )
    long = np.where(k < 0.722, 1 + 0.2832 * k - 2.5557 * k**2 + 0.8448 * k**3, 0.175)
    out = np.where(_arr(sunset_hour_angle_rad) <= np.deg2rad(81.4), short, long)
    return np.clip(out, 0.0, 1.0)


def water_albedo(
    latitude_deg: float,
    day_of_year: ArrayLike,
    solar: ArrayLike,
    extraterrestrial: ArrayLike,
    diffuse_albedo: float = 0.06,
    nodes: int = 12,
) -> NDArray[np.float64]:
    """Daily albedo of open water by sun angle.

    Parameters
    ----------
    latitude_deg : float
        Latitude, decimal degrees north.
    day_of_year : array_like
        Day of the year J, 1-366.
    solar : array_like
        Global radiation R_s, MJ m⁻² d⁻¹.
    extraterrestrial : array_like
        R_a, MJ m⁻² d⁻¹.
    diffuse_albedo : float
        Albedo of water under diffuse light (-): about 0.06-0.07 (Payne 1972; from memory).
    nodes : int
        Gauss-Legendre nodes over the hour angle from sunrise to sunset.

    Returns
    -------
    ndarray
        Daily albedo (-); NaN where R_s is missing, ``diffuse_albedo`` at polar night.

    Notes
    -----
    The direct-beam albedo of :func:`direct_beam_albedo` is averaged over the day weighted by the
    beam on a horizontal surface (∝ μ, the extraterrestrial shape), and mixed with the diffuse
    albedo by the daily diffuse fraction of :func:`diffuse_fraction`:
    :math:`\\alpha = (1 - f_d) \\bar\\alpha_{dir} + f_d \\alpha_{dif}`.
    """
    j = _arr(day_of_year)
    phi = np.deg2rad(latitude_deg)
    delta = rad.solar_declination(j)
    ws = rad.sunset_hour_angle(latitude_deg, delta)
    x, w = np.polynomial.legendre.leggauss(int(nodes))
    omega = ws[..., None] * x  # hour angles from -ω_s to ω_s
    mu = np.sin(phi) * np.sin(delta)[..., None] + np.cos(phi) * np.cos(delta)[..., None] * np.cos(
        omega
    )
    mu = np.clip(mu, 0.0, None)
    weight = mu * w
    total = weight.sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        direct = np.where(
            total > 0,
            (direct_beam_albedo(mu) * weight).sum(axis=-1) / np.where(total > 0, total, 1.0),
            diffuse_albedo,
        )
        ra = _arr(extraterrestrial)
        kt = np.where(ra > 0, _arr(solar) / np.where(ra > 0, ra, 1.0), 0.0)
    fd = np.where(ra > 0, diffuse_fraction(kt, ws), 1.0)
    out = (1.0 - fd) * direct + fd * diffuse_albedo
    return np.where(np.isnan(_arr(solar)), np.nan, out)


def open_water_coefficient(
    day_of_year: ArrayLike,
    mean_depth_m: ArrayLike,
    latitude_deg: float,
    *,
    shallow_m: float = 2.0,
    deep_m: float = 5.0,
) -> NDArray[np.float64]:
    """FAO-56 open-water coefficient K_c by depth class and season.

    Parameters
    ----------
    day_of_year : array_like
        Day of the year J, 1-366.
    mean_depth_m : array_like
        Mean depth of the lake (volume / area), m.
    latitude_deg : float
        Latitude, decimal degrees north (the seasons are shifted by half a year south of the
        equator).
    shallow_m, deep_m : float
        Depth limits of the two classes of FAO-56 Table 12, m.

    Returns
    -------
    ndarray
        K_c (-).

    Notes
    -----
    FAO-56 Table 12 (from memory): open water shallower than 2 m (or in subhumid or tropical
    climates) K_c = 1.05; deeper than 5 m, clear, temperate climate, K_c mid = 0.65 and
    K_c end = 1.25, with the note that the low value holds while the water body gains heat
    (spring, early summer) and the high one while it releases it (autumn, winter). FAO-56 gives
    only the two values; the seasonal path between them is ours: a cosine with its minimum 0.65
    on 15 April and its maximum 1.25 on 15 October (northern hemisphere), half a year later in the
    southern. Between 2 and 5 m the coefficient is interpolated linearly in depth between the
    shallow value and the deep seasonal one.
    """
    j = _arr(day_of_year)
    peak = 288.0 if latitude_deg >= 0 else 288.0 - 182.5  # 15 October, or 15 April in the south
    deep = 0.95 + 0.30 * np.cos(2.0 * np.pi * (j - peak) / 365.0)
    share = np.clip((_arr(mean_depth_m) - shallow_m) / (deep_m - shallow_m), 0.0, 1.0)
    return (1.0 - share) * 1.05 + share * deep
