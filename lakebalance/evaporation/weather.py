"""The weather the methods share: gaps filled, and the derived quantities of FAO-56 chapter 3.

:func:`prepare_weather` takes the daily weather table (one column per role, in the internal units
of :mod:`lakebalance.units`), fills missing days (``fill = "climatology"``) and derives, once for
every method, the quantities they use: mean temperature, saturation and actual vapour pressure,
air pressure, wind at 2 m, extraterrestrial and solar radiation, net longwave radiation and the
available energy of open water. Each quantity that cannot be made says what it needs
(:attr:`PreparedWeather.missing`), in the words the error messages use.

Missing weather
---------------
When ``fill = "climatology"`` (the default) a missing day of any input series is filled with the
day-of-year climatology of that series over the record: the mean of all years' values within
±15 days of the same day of the year (circular across the new year), or the series' overall mean
where even that window is empty. Every day whose estimate used a filled value is flagged; nothing
is filled silently.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import atmosphere as atm
from . import radiation as rad
from .options import EvaporationOptions

__all__ = [
    "WEATHER_ROLES",
    "QUANTITIES",
    "PreparedWeather",
    "prepare_weather",
    "climatology_fill",
]

#: Weather columns the methods can use (series roles of the site file).
WEATHER_ROLES: tuple[str, ...] = (
    "evaporation",
    "pan",
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

#: The quantities a method can need (:attr:`EvaporationMethod.needs`), and what each is.
QUANTITIES: dict[str, str] = {
    "evaporation": "a measured lake evaporation series (m/d)",
    "pan": "a pan evaporation series (m/d)",
    "energy": (
        "the available energy of open water (net radiation less heat storage, MJ m⁻² d⁻¹) with "
        "mean temperature, saturation and actual vapour pressure and air pressure"
    ),
    "wind": "wind at 2 m (m/s)",
    "temperature_range": "daily maximum and minimum temperature (°C)",
    "extraterrestrial": "extraterrestrial radiation (MJ m⁻² d⁻¹), from the site latitude",
    "lake_geometry": (
        "the lake's mean depth (volume/area, m) and area (m²) of each day, from the storage "
        "relation and the stage record (or [evaporation] mean_depth and lake_area)"
    ),
}

_FILL_HALF_WINDOW = 15  # days either side of the day of year in the climatology
_LATITUDE = "the site latitude ([site] latitude)"


@dataclass(frozen=True)
class PreparedWeather:
    """Daily weather with gaps filled and the derived quantities the methods use.

    Attributes
    ----------
    index : pandas.DatetimeIndex
        The days.
    data : pandas.DataFrame
        The weather series present, by role, after filling (internal units).
    was_filled : pandas.DataFrame of bool
        True where a value of ``data`` was filled.
    tmax_c, tmin_c, tmean_c : ndarray or None
        Daily maximum, minimum and mean air temperature, °C.
    saturation_kpa, vapour_pressure_kpa : ndarray or None
        Saturation and actual vapour pressure e_s and e_a, kPa.
    pressure_kpa : float
        Air pressure, kPa.
    elevation_m : float
        Site elevation used, m (0 when unknown).
    latitude_deg : float or None
        Site latitude, decimal degrees north.
    wind_2m_ms : ndarray or None
        Wind speed at 2 m, m/s.
    extraterrestrial : ndarray or None
        R_a, MJ m⁻² d⁻¹.
    solar : ndarray or None
        R_s, MJ m⁻² d⁻¹.
    net_longwave : ndarray or None
        R_nl, MJ m⁻² d⁻¹.
    available_energy : ndarray or None
        Net radiation of open water (``albedo``) less heat going into storage, MJ m⁻² d⁻¹.
    net_radiation_water : ndarray or None
        Net radiation of open water, without any heat-storage lag, MJ m⁻² d⁻¹.
    albedo : ndarray or None
        The daily albedo of the water used, (-).
    mean_depth_m, area_m2 : ndarray or None
        Mean depth (volume / area, m) and surface area (m²) of the lake each day.
    ice : ndarray of bool or None
        Days under ice.
    quantities : dict
        Each quantity of :data:`QUANTITIES` that could be made -> the series roles behind it.
    missing : dict
        Each quantity that could not be made -> what it needs, in words.
    notes : tuple of str
        What was assumed or approximated.
    inputs : dict
        Which inputs each derived quantity came from.
    """

    index: pd.DatetimeIndex
    data: pd.DataFrame
    was_filled: pd.DataFrame
    tmax_c: np.ndarray | None = None
    tmin_c: np.ndarray | None = None
    tmean_c: np.ndarray | None = None
    saturation_kpa: np.ndarray | None = None
    vapour_pressure_kpa: np.ndarray | None = None
    pressure_kpa: float = 101.3
    elevation_m: float = 0.0
    latitude_deg: float | None = None
    wind_2m_ms: np.ndarray | None = None
    extraterrestrial: np.ndarray | None = None
    solar: np.ndarray | None = None
    net_longwave: np.ndarray | None = None
    available_energy: np.ndarray | None = None
    net_radiation_water: np.ndarray | None = None
    albedo: np.ndarray | None = None
    mean_depth_m: np.ndarray | None = None
    area_m2: np.ndarray | None = None
    ice: np.ndarray | None = None
    quantities: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    missing: Mapping[str, str] = field(default_factory=dict)
    notes: tuple[str, ...] = ()
    inputs: Mapping[str, str] = field(default_factory=dict)

    def series(self, role: str) -> np.ndarray | None:
        """The (filled) values of the series ``role``, or None when it is absent."""
        return self.data[role].to_numpy() if role in self.data.columns else None

    def has(self, needs: Iterable[str]) -> bool:
        """Whether every quantity of ``needs`` could be made."""
        return all(q in self.quantities for q in needs)

    def filled_mask(self, needs: Iterable[str]) -> np.ndarray:
        """True on days where a series behind ``needs`` was filled."""
        out = np.zeros(len(self.index), dtype=bool)
        for q in needs:
            for role in self.quantities.get(q, ()):
                if role in self.was_filled.columns:
                    out |= self.was_filled[role].to_numpy()
        return out

    def missing_text(self, needs: Iterable[str]) -> str:
        """What is missing for ``needs``, in words (empty when nothing is)."""
        return " and ".join(self.missing[q] for q in needs if q not in self.quantities)


def prepare_weather(
    weather: pd.DataFrame,
    options: EvaporationOptions,
    *,
    latitude_deg: float | None,
    elevation_m: float | None,
    mean_depth_m: pd.Series | np.ndarray | None = None,
    area_m2: pd.Series | np.ndarray | None = None,
    ice: np.ndarray | None = None,
) -> PreparedWeather:
    """Fill the weather and derive the quantities every method uses (FAO-56 chapter 3).

    Parameters
    ----------
    weather : pandas.DataFrame
        Daily weather (tz-naive DatetimeIndex), columns named by role (see
        :data:`WEATHER_ROLES`): ``evaporation`` and ``pan`` in m/d, temperatures in °C,
        humidity in %, ``wind`` in m/s at ``options.wind_height``, ``solar`` in MJ m⁻² d⁻¹,
        ``sunshine`` in h/d. Absent or empty columns are not used.
    options : EvaporationOptions
        ``fill``, ``wind_height`` (m), ``albedo`` (-), ``heat_storage_lag`` (days),
        ``angstrom_a``, ``angstrom_b`` (-).
    latitude_deg : float or None
        Site latitude, decimal degrees north (radiation).
    elevation_m : float or None
        Site elevation, m above sea level (air pressure); sea level when None.
    mean_depth_m, area_m2 : pandas.Series or ndarray, optional
        The lake's mean depth (volume / area, m) and area (m²) of each day; default: the
        constants ``options.mean_depth`` and ``options.lake_area`` when set.
    ice : ndarray of bool, optional
        Days under ice: a missing ``pan`` or ``evaporation`` value on them is not filled (the
        pan is frozen, and the day's lake evaporation is the sublimation of the ice).

    Returns
    -------
    PreparedWeather
    """
    index = pd.DatetimeIndex(weather.index)
    roles = [r for r in WEATHER_ROLES if _present(weather, r)]
    raw = weather[roles].astype(float) if roles else pd.DataFrame(index=index)
    if options.fill == "climatology" and roles:
        data, was_filled = climatology_fill(raw)
    else:
        data = raw.copy()
        was_filled = pd.DataFrame(False, index=index, columns=roles)
    if ice is not None and roles:
        frozen = np.asarray(ice, dtype=bool)
        for role in ("pan", "evaporation"):
            if role in data.columns:
                unfill = frozen & was_filled[role].to_numpy()
                if unfill.any():
                    data.loc[unfill, role] = np.nan
                    was_filled.loc[unfill, role] = False

    def col(role: str) -> np.ndarray | None:
        return data[role].to_numpy() if role in data.columns else None

    notes: list[str] = []
    inputs: dict[str, str] = {}
    quantities: dict[str, tuple[str, ...]] = {}
    missing: dict[str, str] = {}
    for role, words in (("evaporation", "an evaporation series"), ("pan", "a pan series")):
        if role in data:
            quantities[role] = (role,)
        else:
            missing[role] = words

    tmax, tmin, tmean, temp_cols = _temperatures(col, inputs)
    have_extremes = tmax is not None and tmin is not None
    es, ea, hum_cols = _vapour_pressures(col, tmax, tmin, tmean, inputs, notes)
    elevation, pressure = _pressure(elevation_m, inputs)
    u2 = None
    if "wind" in data:
        u2 = atm.wind_at_2m(col("wind"), options.wind_height)
        if options.wind_height != 2.0:
            inputs["wind"] = f"wind at {options.wind_height:g} m to 2 m (FAO-56 eq. 47)"
        quantities["wind"] = ("wind",)
    else:
        missing["wind"] = "a wind series"
    ra, rs, rnl, rad_cols = _radiation(
        col,
        index,
        latitude_deg,
        elevation,
        options,
        temperatures=(tmax, tmin, tmean),
        ea=ea,
        inputs=inputs,
    )

    available = rn_water = albedo = None
    if rnl is not None:
        albedo = _albedo(options, latitude_deg, index, rs, ra, inputs)
        rn_water = rad.net_radiation(rad.net_shortwave(rs, albedo), rnl)
        if options.heat_storage_lag > 0:
            available = rad.heat_storage_lag(rn_water, options.heat_storage_lag)
            notes.append(
                f"heat-storage lag on available energy: first-order, time constant "
                f"{options.heat_storage_lag:g} days (Penman, Priestley-Taylor)"
            )
        else:
            available = rn_water
        quantities["energy"] = temp_cols + hum_cols + rad_cols
    else:
        missing["energy"] = _energy_needs(latitude_deg, tmean, rs, ea)

    if have_extremes:
        quantities["temperature_range"] = ("tmax", "tmin")
    else:
        missing["temperature_range"] = "tmax and tmin series"
    if ra is not None:
        quantities["extraterrestrial"] = ()
    else:
        missing["extraterrestrial"] = _LATITUDE
    depth, area = _geometry(index, options, mean_depth_m, area_m2, quantities, missing)

    return PreparedWeather(
        index=index,
        data=data,
        was_filled=was_filled,
        tmax_c=tmax,
        tmin_c=tmin,
        tmean_c=tmean,
        saturation_kpa=es,
        vapour_pressure_kpa=ea,
        pressure_kpa=pressure,
        elevation_m=elevation,
        latitude_deg=latitude_deg,
        wind_2m_ms=u2,
        extraterrestrial=ra,
        solar=rs,
        net_longwave=rnl,
        available_energy=available,
        net_radiation_water=rn_water,
        albedo=albedo,
        mean_depth_m=depth,
        area_m2=area,
        ice=None if ice is None else np.asarray(ice, dtype=bool),
        quantities=quantities,
        missing=missing,
        notes=tuple(notes),
        inputs=inputs,
    )


_Column = Callable[[str], "np.ndarray | None"]


def _temperatures(col: _Column, inputs: dict[str, str]):
    """``(tmax, tmin, tmean, roles)``: the mean from ``tmean`` or FAO-56 eq. 9, °C."""
    tmax, tmin = col("tmax"), col("tmin")
    have_extremes = tmax is not None and tmin is not None
    temp_cols: tuple[str, ...]
    tmean = col("tmean")
    if tmean is not None:
        temp_cols = ("tmean",) + (("tmax", "tmin") if have_extremes else ())
    elif have_extremes:
        tmean = 0.5 * (tmax + tmin)  # FAO-56 eq. 9
        temp_cols = ("tmax", "tmin")
        inputs["tmean"] = "(tmax + tmin)/2 (FAO-56 eq. 9)"
    else:
        temp_cols = ()
    return tmax, tmin, tmean, temp_cols


def _vapour_pressures(col: _Column, tmax, tmin, tmean, inputs: dict[str, str], notes: list[str]):
    """``(e_s, e_a, roles)`` in kPa, e_a from the best humidity series there is (FAO-56)."""
    es = ea = None
    hum_cols: tuple[str, ...] = ()
    if tmean is None:
        return es, ea, hum_cols
    have_extremes = tmax is not None and tmin is not None
    if have_extremes:
        es = atm.mean_saturation_vapour_pressure(tmax, tmin)
        inputs["saturation_vapour_pressure"] = "tmax/tmin (FAO-56 eq. 12)"
    else:
        es = atm.saturation_vapour_pressure(tmean)
        inputs["saturation_vapour_pressure"] = "tmean (FAO-56 eq. 11)"
    dewpoint, rh_max, rh_min, rh = col("dewpoint"), col("rh_max"), col("rh_min"), col("rh")
    if dewpoint is not None:
        ea = atm.vapour_pressure_from_dewpoint(dewpoint)
        hum_cols = ("dewpoint",)
        inputs["vapour_pressure"] = "dewpoint (FAO-56 eq. 14)"
    elif have_extremes and rh_max is not None and rh_min is not None:
        ea = atm.vapour_pressure_from_rh_extremes(tmax, tmin, rh_max, rh_min)
        hum_cols = ("rh_max", "rh_min")
        inputs["vapour_pressure"] = "rh_max/rh_min (FAO-56 eq. 17)"
    elif rh is not None:
        ea = atm.vapour_pressure_from_rh_mean(rh, tmax, tmin, tmean_c=tmean)
        hum_cols = ("rh",)
        inputs["vapour_pressure"] = "rh (FAO-56 eq. 19)"
    elif tmin is not None:
        ea = atm.vapour_pressure_from_dewpoint(tmin)
        hum_cols = ("tmin",)
        inputs["vapour_pressure"] = "tmin as dewpoint (FAO-56 eq. 48, approximation)"
        notes.append(
            "no humidity series: dewpoint taken as the daily minimum temperature "
            "(FAO-56 eq. 48), an approximation for humid, well-watered sites"
        )
    return es, ea, hum_cols


def _pressure(elevation_m: float | None, inputs: dict[str, str]) -> tuple[float, float]:
    """``(elevation m, air pressure kPa)``: FAO-56 eq. 7, or sea level when unknown."""
    if elevation_m is None:
        inputs["pressure"] = "101.3 kPa (no elevation in [site]; sea level assumed)"
        return 0.0, 101.3
    elevation = float(elevation_m)
    pressure = float(atm.air_pressure(elevation))
    inputs["pressure"] = f"{pressure:.1f} kPa from elevation {elevation:g} m (FAO-56 eq. 7)"
    return elevation, pressure


def _radiation(
    col: _Column,
    index: pd.DatetimeIndex,
    latitude_deg: float | None,
    elevation: float,
    options: EvaporationOptions,
    *,
    temperatures: tuple,
    ea,
    inputs: dict[str, str],
):
    """``(R_a, R_s, R_nl, roles)`` in MJ m⁻² d⁻¹ (FAO-56 eqs. 21-39); None without latitude."""
    doy = index.day_of_year.to_numpy()
    ra = rs = rnl = None
    rad_cols: tuple[str, ...] = ()
    if latitude_deg is None:
        return ra, rs, rnl, rad_cols
    tmax, tmin, tmean = temperatures
    a_s, b_s = options.angstrom_a, options.angstrom_b
    ra = rad.extraterrestrial_radiation(latitude_deg, doy)
    solar, sunshine = col("solar"), col("sunshine")
    if solar is not None:
        rs = solar
        rad_cols = ("solar",)
        inputs["solar"] = "measured"
    elif sunshine is not None:
        big_n = rad.daylight_hours(latitude_deg, doy)
        rs = rad.solar_from_sunshine(sunshine, big_n, ra, a_s, b_s)
        rad_cols = ("sunshine",)
        inputs["solar"] = "sunshine hours (FAO-56 eq. 35)"
    if rs is not None and ea is not None and tmean is not None:
        rso = (
            rad.clear_sky_radiation(ra, elevation)
            if a_s == 0.25 and b_s == 0.50  # the default Angström coefficients
            else rad.clear_sky_radiation(ra, a_s=a_s, b_s=b_s)
        )
        have_extremes = tmax is not None and tmin is not None
        rnl = rad.net_longwave(
            tmax if have_extremes else None,
            tmin if have_extremes else None,
            ea,
            rs,
            rso,
            tmean_c=tmean,
        )
    return ra, rs, rnl, rad_cols


def _albedo(options, latitude_deg, index, rs, ra, inputs) -> np.ndarray:
    """The daily albedo of the water: constant, or by sun angle (Taylor et al. 1996)."""
    if options.albedo_model == "constant":
        return np.full(len(index), float(options.albedo))
    from .openwater import water_albedo

    inputs["albedo"] = (
        "by sun angle (Taylor et al. 1996 direct beam, diffuse "
        f"{options.albedo:g}, diffuse fraction by Erbs et al. 1982)"
    )
    return water_albedo(
        latitude_deg, index.day_of_year.to_numpy(), rs, ra, diffuse_albedo=options.albedo
    )


def _geometry(index, options, mean_depth_m, area_m2, quantities, missing):
    """``(mean depth m, area m²)`` of each day (arrays or None) and the lake_geometry quantity."""
    n = len(index)

    def daily(values, constant):
        if values is not None:
            out = pd.Series(np.asarray(values, dtype=float).reshape(-1))
            if out.size == n and np.isfinite(out).any():  # gaps bridged linearly, ends held
                return out.interpolate(limit_area="inside").ffill().bfill().to_numpy()
        return None if constant is None else np.full(n, float(constant))

    depth = daily(mean_depth_m, options.mean_depth)
    area = daily(area_m2, options.lake_area)
    needs_area = options.wind_function == "sweers"
    if depth is not None and (area is not None or not needs_area):
        quantities["lake_geometry"] = ()
    else:
        words = []
        if depth is None:
            words.append("the lake's mean depth")
        if area is None and needs_area:
            words.append("its area")
        missing["lake_geometry"] = (
            " and ".join(words) + " (a storage relation with a stage record, or [evaporation] "
            "mean_depth and lake_area)"
        )
    return depth, area


def _energy_needs(latitude_deg, tmean, rs, ea) -> str:
    """What the available energy of open water needs that is not there, in words."""
    need = []
    if latitude_deg is None:
        need.append(_LATITUDE)
    if tmean is None:
        need.append("air temperature (tmax and tmin, or tmean)")
    if rs is None and latitude_deg is not None:
        need.append("solar radiation or sunshine hours")
    if ea is None and tmean is not None:
        need.append("humidity (dewpoint, rh_max and rh_min, rh) or tmin")
    return " and ".join(need) or "radiation inputs"


def _present(weather: pd.DataFrame, role: str) -> bool:
    return role in weather.columns and bool(weather[role].notna().any())


def climatology_fill(
    frame: pd.DataFrame, half_window_days: int = _FILL_HALF_WINDOW
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Fill missing days with each column's day-of-year climatology of the record.

    Parameters
    ----------
    frame : pandas.DataFrame
        Daily values (DatetimeIndex), any units; each column is filled on its own.
    half_window_days : int
        Days either side of the day of year pooled into the climatology, days.

    Returns
    -------
    filled : pandas.DataFrame
        ``frame`` with missing days filled (a column without any value stays missing).
    mask : pandas.DataFrame of bool
        True where a value was filled.

    Notes
    -----
    Days sit on a 365-day circle; 29 February shares the slot of 28 February. The climatology of
    day d is
    the mean of all values whose day lies within ``half_window_days`` of d on that circle; where
    none does, the column mean. Vectorised with cumulative sums (no loop over days).
    """
    values = frame.to_numpy(dtype=float)
    mask = np.isnan(values)
    if not mask.any():
        return frame.copy(), pd.DataFrame(False, index=frame.index, columns=frame.columns)
    doy = _day_of_365(pd.DatetimeIndex(frame.index))
    ok = ~mask
    sums = np.zeros((365, values.shape[1]))
    counts = np.zeros((365, values.shape[1]))
    np.add.at(sums, doy, np.where(ok, values, 0.0))
    np.add.at(counts, doy, ok.astype(float))
    w = int(half_window_days)
    kernel_len = 2 * w + 1
    # circular moving sums via padding and cumulative sums
    pad_s = np.concatenate([sums[-w:], sums, sums[:w]]) if w else sums
    pad_c = np.concatenate([counts[-w:], counts, counts[:w]]) if w else counts
    cs = np.vstack([np.zeros((1, values.shape[1])), np.cumsum(pad_s, axis=0)])
    cc = np.vstack([np.zeros((1, values.shape[1])), np.cumsum(pad_c, axis=0)])
    win_s = cs[kernel_len:] - cs[:-kernel_len]
    win_c = cc[kernel_len:] - cc[:-kernel_len]
    with np.errstate(invalid="ignore", divide="ignore"):
        clim = np.where(win_c > 0, win_s / np.where(win_c > 0, win_c, 1.0), np.nan)
        overall = np.where(
            ok.any(axis=0), sums.sum(axis=0) / np.maximum(counts.sum(axis=0), 1), np.nan
        )
    clim = np.where(np.isnan(clim), overall, clim)
    filled = np.where(mask, clim[doy], values)
    filled_mask = mask & ~np.isnan(filled)
    return (
        pd.DataFrame(filled, index=frame.index, columns=frame.columns),
        pd.DataFrame(filled_mask, index=frame.index, columns=frame.columns),
    )


def _day_of_365(index: pd.DatetimeIndex) -> np.ndarray:
    """0-based day on a 365-day circle (29 February shares 28 February's slot)."""
    doy = index.day_of_year.to_numpy() - 1
    late_leap = index.is_leap_year & (doy >= 59)
    return np.where(late_leap, doy - 1, doy)
