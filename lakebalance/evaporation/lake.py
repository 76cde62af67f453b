"""Daily lake evaporation from a site's weather: every method the inputs allow, one chosen.

:func:`estimate_lake_evaporation` takes a daily weather table (one column per weather role, in
the internal units of :mod:`lakebalance.units`) and returns an :class:`EvaporationResult`. It is
pure: the site file and the records are unpacked by :class:`lakebalance.analysis.Lake`.

Missing weather
---------------
When ``fill = "climatology"`` (the default) a missing day of any input series is filled with the
day-of-year climatology of that series over the record: the mean of all years' values within
±15 days of the same day of the year (circular across the new year), or the series' overall mean
where even that window is empty. Every day whose estimate used a filled value is flagged in
``filled`` (and per method in ``filled_by_method``); nothing is filled silently.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import pandas as pd

from ..errors import ApproximationWarning, ConfigError
from ..units import factor
from . import atmosphere as atm
from . import methods as m
from . import radiation as rad

__all__ = [
    "METHODS",
    "PREFERENCE",
    "WEATHER_ROLES",
    "Method",
    "EvaporationResult",
    "climatology_fill",
    "estimate_lake_evaporation",
    "surface_volume_m3",
]

Method = Literal["given", "pan", "penman", "priestley_taylor", "fao56", "hargreaves"]

#: Every method, in the order tables list them.
METHODS: tuple[str, ...] = ("given", "pan", "penman", "priestley_taylor", "fao56", "hargreaves")

#: The order ``method = "auto"`` tries them: a measurement, then a pan, then the open-water
#: energy-and-aerodynamic method, the grass reference scaled, energy only, temperature only.
PREFERENCE: tuple[str, ...] = ("given", "pan", "penman", "fao56", "priestley_taylor", "hargreaves")

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

FAO56_GRASS_ALBEDO = 0.23  # (-) albedo of the FAO-56 grass reference (eq. 38)
_FILL_HALF_WINDOW = 15  # days either side of the day of year in the climatology


@dataclass(frozen=True)
class EvaporationResult:
    """Daily lake evaporation of one site.

    Attributes
    ----------
    method : str
        The method chosen for ``depth_m``.
    depth_m : pandas.Series
        Daily lake evaporation, m per day (NaN where no estimate is possible).
    filled : pandas.Series of bool
        True on days whose ``depth_m`` used a filled (climatology) input.
    by_method : pandas.DataFrame
        Daily evaporation of every method the inputs allow, m per day, one column per method.
    notes : tuple of str
        What was assumed, approximated or filled, in plain words.
    filled_by_method : pandas.DataFrame
        The ``filled`` mask of every column of ``by_method``.
    inputs : dict
        Which inputs each derived quantity came from (e.g. ``{"vapour_pressure": "rh_max/rh_min
        (FAO-56 eq. 17)"}``).
    evaporation_m3, rain_m3 : pandas.Series or None
        Daily volumes over the lake surface, m³ per day (depth × area(stage)), when a storage
        relation and a stage record were given.
    """

    method: str
    depth_m: pd.Series
    filled: pd.Series
    by_method: pd.DataFrame
    notes: tuple[str, ...] = ()
    filled_by_method: pd.DataFrame = field(default_factory=pd.DataFrame)
    inputs: dict[str, str] = field(default_factory=dict)
    evaporation_m3: pd.Series | None = None
    rain_m3: pd.Series | None = None

    @property
    def available(self) -> tuple[str, ...]:
        """The methods the inputs allow, in table order."""
        return tuple(self.by_method.columns)

    def monthly(self, unit: str = "mm") -> pd.DataFrame:
        """Monthly totals of every method, in ``unit`` (a depth unit), with day counts.

        A month's total is the sum of the days with a value; ``days`` counts the days of the
        chosen method with a value, ``filled_days`` those of them that used filled weather.
        """
        scale = 1.0 / factor(unit, "m")  # UnitError for a unit that is not a length
        grouper = self.by_method.index.to_period("M")
        totals = self.by_method.groupby(grouper).sum(min_count=1) * scale
        totals["days"] = self.depth_m.notna().groupby(grouper).sum().astype(int)
        totals["filled_days"] = (self.filled & self.depth_m.notna()).groupby(grouper).sum()
        totals.index.name = "month"
        return totals

    def monthly_differences(self, unit: str = "mm") -> pd.DataFrame:
        """Monthly total of each other method minus the chosen one, in ``unit``."""
        totals = self.monthly(unit)
        others = [c for c in self.by_method.columns if c != self.method]
        return totals[others].sub(totals[self.method], axis=0)

    def summary(self) -> str:
        """A few lines of plain text: the method, the mean rates and the notes."""
        mm = 1.0 / factor("mm", "m")
        lines = [f"lake evaporation: method {self.method}"]
        for name in self.by_method.columns:
            s = self.by_method[name]
            mark = " (chosen)" if name == self.method else ""
            lines.append(
                f"  {name:<17} mean {s.mean() * mm:6.2f} mm/d over {int(s.notna().sum())} days"
                f"{mark}"
            )
        lines.append(f"  days using filled weather: {int(self.filled.sum())}")
        lines.extend(f"  note: {n}" for n in self.notes)
        return "\n".join(lines)


def surface_volume_m3(depth_m: pd.Series | np.ndarray, area_m2: pd.Series | np.ndarray):
    """Daily volume over the lake surface: a depth (rain, evaporation) times the lake area.

    Parameters
    ----------
    depth_m : array_like or pandas.Series
        Daily depth, m per day.
    area_m2 : array_like or pandas.Series
        Lake surface area of the same days, m².

    Returns
    -------
    Same type as the inputs
        Volume, m³ per day (NaN where either input is missing).
    """
    return depth_m * area_m2


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


def _present(weather: pd.DataFrame, role: str) -> bool:
    return role in weather.columns and bool(weather[role].notna().any())


def estimate_lake_evaporation(
    weather: pd.DataFrame,
    *,
    latitude_deg: float | None,
    elevation_m: float | None,
    method: str = "auto",
    pan_coefficient: float | list[float] = 0.7,
    albedo: float = 0.06,
    alpha: float = 1.26,
    open_water_coefficient: float = 1.05,
    wind_height_m: float = 2.0,
    heat_storage_lag_days: float = 0.0,
    fill: Literal["climatology", "none"] = "climatology",
    angstrom_a: float = 0.25,
    angstrom_b: float = 0.50,
    clip_negative: bool = True,
    site_file: str | None = None,
) -> EvaporationResult:
    """Daily lake evaporation by every method the weather allows, and the one chosen.

    Parameters
    ----------
    weather : pandas.DataFrame
        Daily weather (tz-naive DatetimeIndex), columns named by role (see
        :data:`WEATHER_ROLES`): ``evaporation`` and ``pan`` in m/d, temperatures in °C,
        humidity in %, ``wind`` in m/s at ``wind_height_m``, ``solar`` in MJ m⁻² d⁻¹,
        ``sunshine`` in h/d. Absent or empty columns are not used.
    latitude_deg : float or None
        Site latitude, decimal degrees north; needed by every method that uses radiation.
    elevation_m : float or None
        Site elevation, m above sea level (air pressure, clear-sky radiation); sea level is
        assumed, with a note, when absent.
    method : str
        ``"auto"`` (first available of :data:`PREFERENCE`) or one of :data:`METHODS`.
    pan_coefficient : float or list of 12 floats
        Pan-to-lake coefficient, dimensionless (constant or monthly, January first).
    albedo : float
        Open-water albedo, dimensionless (Penman and Priestley-Taylor).
    alpha : float
        Priestley-Taylor coefficient, dimensionless.
    open_water_coefficient : float
        Factor on FAO-56 reference evapotranspiration giving open-water evaporation,
        dimensionless.
    wind_height_m : float
        Height of the wind measurement, m.
    heat_storage_lag_days : float
        Time constant of the heat-storage lag on available energy (Penman and
        Priestley-Taylor), days; 0 = off.
    fill : {"climatology", "none"}
        How missing days of the inputs are treated (see the module docstring).
    angstrom_a, angstrom_b : float
        Angström coefficients for solar radiation from sunshine, dimensionless.
    clip_negative : bool
        Set negative computed evaporation (condensation) to 0 (common practice, no source).
    site_file : str, optional
        Named in configuration errors.

    Returns
    -------
    EvaporationResult

    Raises
    ------
    ConfigError
        When ``method`` is not possible with the inputs (naming what is missing), when no method
        is possible, or when a latitude is needed and absent.
    """
    if method not in ("auto", *METHODS):
        raise ConfigError(f"unknown evaporation method {method!r}", file=site_file)
    index = pd.DatetimeIndex(weather.index)
    notes: list[str] = []
    inputs: dict[str, str] = {}
    roles = [r for r in WEATHER_ROLES if _present(weather, r)]
    raw = weather[roles].astype(float) if roles else pd.DataFrame(index=index)
    if fill == "climatology" and roles:
        data, was_filled = climatology_fill(raw)
    else:
        data = raw.copy()
        was_filled = pd.DataFrame(False, index=index, columns=roles)

    def col(role: str) -> np.ndarray | None:
        return data[role].to_numpy() if role in data.columns else None

    def flag(*names: str) -> np.ndarray:
        out = np.zeros(len(index), dtype=bool)
        for n in names:
            if n in was_filled.columns:
                out |= was_filled[n].to_numpy()
        return out

    missing_for: dict[str, str] = {}
    results: dict[str, np.ndarray] = {}
    filled_masks: dict[str, np.ndarray] = {}
    mm_to_m = factor("mm", "m")

    # ---- measured and pan ----------------------------------------------------------------
    if "evaporation" in data:
        results["given"] = col("evaporation")
        filled_masks["given"] = flag("evaporation")
    else:
        missing_for["given"] = "an evaporation series"
    if "pan" in data:
        k = pan_coefficient
        if isinstance(k, list) and len(k) != 12:
            raise ConfigError(
                f"[evaporation] pan_coefficient must be one number or 12 monthly numbers, "
                f"got {len(k)}",
                file=site_file,
            )
        results["pan"] = m.pan_to_lake(col("pan"), k, index.month.to_numpy())
        filled_masks["pan"] = flag("pan")
        if not isinstance(k, list) and k == 0.7:
            notes.append(
                "pan coefficient 0.7 is a rule of thumb (Class A pan, annual); calibrate it for "
                "the site where possible"
            )
    else:
        missing_for["pan"] = "a pan series"

    # ---- temperature, humidity, wind, radiation --------------------------------------------
    tmax, tmin = col("tmax"), col("tmin")
    have_extremes = tmax is not None and tmin is not None
    temp_cols: tuple[str, ...]
    if "tmean" in data:
        tmean = col("tmean")
        temp_cols = ("tmean",) + (("tmax", "tmin") if have_extremes else ())
    elif have_extremes:
        tmean = 0.5 * (tmax + tmin)  # FAO-56 eq. 9
        temp_cols = ("tmax", "tmin")
        inputs["tmean"] = "(tmax + tmin)/2 (FAO-56 eq. 9)"
    else:
        tmean = None
        temp_cols = ()

    es = ea = None
    hum_cols: tuple[str, ...] = ()
    if tmean is not None:
        if have_extremes:
            es = atm.mean_saturation_vapour_pressure(tmax, tmin)
            inputs["saturation_vapour_pressure"] = "tmax/tmin (FAO-56 eq. 12)"
        else:
            es = atm.saturation_vapour_pressure(tmean)
            inputs["saturation_vapour_pressure"] = "tmean (FAO-56 eq. 11)"
        if "dewpoint" in data:
            ea = atm.vapour_pressure_from_dewpoint(col("dewpoint"))
            hum_cols = ("dewpoint",)
            inputs["vapour_pressure"] = "dewpoint (FAO-56 eq. 14)"
        elif have_extremes and "rh_max" in data and "rh_min" in data:
            ea = atm.vapour_pressure_from_rh_extremes(tmax, tmin, col("rh_max"), col("rh_min"))
            hum_cols = ("rh_max", "rh_min")
            inputs["vapour_pressure"] = "rh_max/rh_min (FAO-56 eq. 17)"
        elif "rh" in data:
            ea = atm.vapour_pressure_from_rh_mean(col("rh"), tmax, tmin, tmean_c=tmean)
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

    if elevation_m is None:
        elevation = 0.0
        pressure = 101.3
        inputs["pressure"] = "101.3 kPa (no elevation in [site]; sea level assumed)"
    else:
        elevation = float(elevation_m)
        pressure = float(atm.air_pressure(elevation))
        inputs["pressure"] = f"{pressure:.1f} kPa from elevation {elevation:g} m (FAO-56 eq. 7)"

    u2 = None
    if "wind" in data:
        u2 = atm.wind_at_2m(col("wind"), wind_height_m)
        if wind_height_m != 2.0:
            inputs["wind"] = f"wind at {wind_height_m:g} m to 2 m (FAO-56 eq. 47)"

    doy = index.day_of_year.to_numpy()
    ra = rs = rnl = None
    rad_cols: tuple[str, ...] = ()
    if latitude_deg is not None:
        ra = rad.extraterrestrial_radiation(latitude_deg, doy)
        default_angstrom = angstrom_a == 0.25 and angstrom_b == 0.50
        if "solar" in data:
            rs = col("solar")
            rad_cols = ("solar",)
            inputs["solar"] = "measured"
        elif "sunshine" in data:
            big_n = rad.daylight_hours(latitude_deg, doy)
            rs = rad.solar_from_sunshine(col("sunshine"), big_n, ra, angstrom_a, angstrom_b)
            rad_cols = ("sunshine",)
            inputs["solar"] = "sunshine hours (FAO-56 eq. 35)"
        if rs is not None and ea is not None and tmean is not None:
            rso = (
                rad.clear_sky_radiation(ra, elevation)
                if default_angstrom
                else rad.clear_sky_radiation(ra, a_s=angstrom_a, b_s=angstrom_b)
            )
            rnl = rad.net_longwave(
                tmax if have_extremes else None,
                tmin if have_extremes else None,
                ea,
                rs,
                rso,
                tmean_c=tmean,
            )

    def need_latitude(name: str) -> None:
        if latitude_deg is None:
            missing_for[name] = "the site latitude ([site] latitude)"

    # ---- energy methods ---------------------------------------------------------------------
    if rnl is not None:
        rn_water = rad.net_radiation(rad.net_shortwave(rs, albedo), rnl)
        if heat_storage_lag_days > 0:
            available = m.heat_storage_lag(rn_water, heat_storage_lag_days)
            notes.append(
                f"heat-storage lag on available energy: first-order, time constant "
                f"{heat_storage_lag_days:g} days (Penman, Priestley-Taylor)"
            )
        else:
            available = rn_water
        energy_cols = temp_cols + hum_cols + rad_cols
        results["priestley_taylor"] = m.priestley_taylor(available, tmean, pressure, alpha)
        filled_masks["priestley_taylor"] = flag(*energy_cols)
        if u2 is not None:
            results["penman"] = m.penman_open_water(available, tmean, es, ea, u2, pressure)
            filled_masks["penman"] = flag(*energy_cols, "wind")
            rn_grass = rad.net_radiation(rad.net_shortwave(rs, FAO56_GRASS_ALBEDO), rnl)
            et0 = m.fao56_reference(rn_grass, tmean, es, ea, u2, pressure)
            results["fao56"] = open_water_coefficient * et0
            filled_masks["fao56"] = flag(*energy_cols, "wind")
        else:
            missing_for["penman"] = missing_for["fao56"] = "a wind series"
    else:
        need = []
        if latitude_deg is None:
            need.append("the site latitude ([site] latitude)")
        if tmean is None:
            need.append("air temperature (tmax and tmin, or tmean)")
        if rs is None and latitude_deg is not None:
            need.append("solar radiation or sunshine hours")
        if ea is None and tmean is not None:
            need.append("humidity (dewpoint, rh_max and rh_min, rh) or tmin")
        what = " and ".join(need) or "radiation inputs"
        for name in ("penman", "priestley_taylor", "fao56"):
            missing_for[name] = what
        if u2 is None:
            missing_for["penman"] = missing_for["fao56"] = what + " and a wind series"

    if have_extremes and ra is not None:
        results["hargreaves"] = m.hargreaves(tmax, tmin, ra)
        filled_masks["hargreaves"] = flag("tmax", "tmin")
    elif not have_extremes:
        missing_for["hargreaves"] = "tmax and tmin series"
    else:
        need_latitude("hargreaves")

    computed = ("penman", "priestley_taylor", "fao56", "hargreaves")
    order = [n for n in METHODS if n in results]
    by_method = pd.DataFrame(index=index)
    for name in order:
        values = np.asarray(results[name], dtype=float)
        if name in computed:
            values = values * mm_to_m
            if clip_negative:
                negative = values < 0
                if negative.any():
                    notes.append(
                        f"{name}: {int(negative.sum())} days of negative evaporation "
                        "(condensation) set to 0"
                    )
                values = np.where(negative, 0.0, values)
        by_method[name] = values
    by_method.index.name = "date"
    filled_by_method = pd.DataFrame({n: filled_masks[n] for n in order}, index=index, dtype=bool)

    if method == "auto":
        chosen = next((n for n in PREFERENCE if n in results), None)
        if chosen is None:
            detail = "; ".join(f"{n} needs {missing_for.get(n, '?')}" for n in PREFERENCE)
            raise ConfigError(
                f"no lake evaporation method is possible with the series given ({detail})",
                file=site_file,
            )
    else:
        if method not in results:
            raise ConfigError(
                f"evaporation method {method!r} needs {missing_for.get(method, 'more inputs')}",
                file=site_file,
            )
        chosen = method
    if chosen == "hargreaves":
        warnings.warn(
            "lake evaporation by Hargreaves uses temperature only; expect errors of 20% or more "
            "on single days and a bias for open water (FAO-56, section on missing data)",
            ApproximationWarning,
            stacklevel=2,
        )
        notes.append("Hargreaves (temperature only) is a rough estimate for open water")
    if chosen == "fao56":
        notes.append(
            f"FAO-56 grass reference ET0 times an open-water coefficient of "
            f"{open_water_coefficient:g}"
        )
    if "hargreaves" in results and chosen != "hargreaves":
        notes.append("hargreaves is shown for comparison only (temperature-only estimate)")
    if fill == "climatology":
        n_filled = int(filled_by_method[chosen].sum())
        if n_filled:
            notes.append(
                f"{n_filled} days of {chosen} used weather filled from the day-of-year "
                "climatology of the record"
            )
    if elevation_m is None and chosen in computed and chosen != "hargreaves":
        notes.append("no elevation in [site]: sea-level air pressure assumed")
    return EvaporationResult(
        method=chosen,
        depth_m=by_method[chosen].rename("evaporation_m"),
        filled=filled_by_method[chosen].rename("filled"),
        by_method=by_method,
        notes=tuple(notes),
        filled_by_method=filled_by_method,
        inputs=inputs,
    )
