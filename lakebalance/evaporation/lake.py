"""Daily lake evaporation from a site's weather: every method the inputs allow, one chosen.

:func:`estimate_lake_evaporation` takes a daily weather table (one column per weather role, in
the internal units of :mod:`lakebalance.units`) and the ``[evaporation]`` options, and returns an
:class:`EvaporationResult`. It is pure: the site file and the records are unpacked by
:class:`lakebalance.analysis.Lake`. The methods are the entries of
:data:`~lakebalance.evaporation.registry.REGISTRY`; this module only asks them which are
possible, computes those, and chooses one. Missing weather is filled and flagged by
:func:`~lakebalance.evaporation.weather.prepare_weather` (see there).
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from ..errors import ApproximationWarning, ConfigError
from ..results import Summary
from ..units import factor
from .method import EvaporationMethod
from .options import EvaporationOptions
from .registry import METHODS, PREFERENCE, REGISTRY, method_named
from .weather import WEATHER_ROLES, PreparedWeather, climatology_fill, prepare_weather

__all__ = [
    "CAUTION",
    "METHODS",
    "PREFERENCE",
    "WEATHER_ROLES",
    "EvaporationResult",
    "climatology_fill",
    "estimate_lake_evaporation",
    "surface_volume_m3",
]

CAUTION = (
    "Lake evaporation is an estimate; where it informs public water supply or dam safety, "
    "defer to local codes and licensed professionals."
)


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
    ice : pandas.Series of bool or None
        Days under ice (``[evaporation] ice``); every method gives the sublimation on them.
    lake_heat : pandas.DataFrame or None
        The heat path of the lake method when it was computed: ``water_temperature_c`` and
        ``equilibrium_temperature_c`` (°C), ``heat_storage_mj_m2`` (MJ m⁻² d⁻¹ into the water),
        ``mean_depth_m`` (m), ``time_constant_days``, ``no_storage_m`` (the same equation
        without heat storage, m/d).
    water_year_start : int
        First month of the water year (the totals by water year).
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
    ice: pd.Series | None = None
    lake_heat: pd.DataFrame | None = None
    water_year_start: int = 10

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

    def water_years(self, unit: str = "mm") -> pd.DataFrame:
        """Water-year totals of every method, in ``unit``, with day counts.

        A year's total is the sum of its days with a value; ``days`` counts the chosen method's
        days with a value (365 or 366 in a complete year), ``filled_days`` those that used filled
        weather, ``ice_days`` the days under ice.
        """
        from ..stats import water_year_of

        scale = 1.0 / factor(unit, "m")
        years = pd.Index(
            water_year_of(self.by_method.index, self.water_year_start), name="water_year"
        )
        totals = self.by_method.groupby(years).sum(min_count=1) * scale
        totals["days"] = self.depth_m.notna().groupby(years).sum().astype(int).to_numpy()
        totals["filled_days"] = (
            (self.filled & self.depth_m.notna()).groupby(years).sum().astype(int).to_numpy()
        )
        ice = self.ice if self.ice is not None else pd.Series(False, index=self.by_method.index)
        totals["ice_days"] = ice.groupby(years).sum().astype(int).to_numpy()
        return totals

    def spread(self, unit: str = "mm") -> pd.DataFrame:
        """The spread between the methods' totals of each complete water year.

        Returns
        -------
        pandas.DataFrame
            Per complete water year (every day of the chosen method known): ``methods`` (how
            many), ``mean`` and ``sd`` of the methods' totals (``unit``), ``range`` (max − min)
            and ``relative_sd`` (sd / mean, -). A year with fewer than two methods has NaN.

        Notes
        -----
        The sample standard deviation across methods of a year's total is a measure of how well
        the term is known: the methods rest on different physics and inputs, so their spread is
        a floor for the systematic error of any one of them (common practice, no source; e.g.
        Winter 1981 compares methods this way, from memory).
        """
        years = self.water_years(unit)
        complete = years["days"] >= 365
        values = years.loc[complete, list(self.available)]
        out = pd.DataFrame(index=values.index)
        out["methods"] = values.notna().sum(axis=1)
        out["mean"] = values.mean(axis=1)
        out["sd"] = values.std(axis=1, ddof=1)
        out["range"] = values.max(axis=1) - values.min(axis=1)
        out["relative_sd"] = out["sd"] / out["mean"]
        return out

    def relative_spread(self) -> float | None:
        """Mean over complete water years of the methods' relative spread (-), None when no
        complete year has two methods (:meth:`spread`)."""
        rel = self.spread()["relative_sd"].dropna()
        return float(rel.mean()) if len(rel) else None

    def _lake_heat_monthly(self) -> list[dict[str, Any]] | None:
        """Monthly means of the lake method's heat path for JSON (None without the method)."""
        if self.lake_heat is None:
            return None
        heat = self.lake_heat
        grouper = heat.index.to_period("M")
        means = (
            heat[["water_temperature_c", "mean_depth_m", "mixed_depth_m"]].groupby(grouper).mean()
        )
        stored = heat["heat_storage_mj_m2"].groupby(grouper).sum(min_count=1)
        return [
            {
                "month": str(month),
                "water_temperature_c": row["water_temperature_c"],
                "mean_depth_m": row["mean_depth_m"],
                "mixed_depth_m": row["mixed_depth_m"],
                "heat_stored_mj_m2": stored[month],
            }
            for month, row in means.iterrows()
        ]

    def monthly_differences(self, unit: str = "mm") -> pd.DataFrame:
        """Monthly total of each other method minus the chosen one, in ``unit``."""
        totals = self.monthly(unit)
        others = [c for c in self.by_method.columns if c != self.method]
        return totals[others].sub(totals[self.method], axis=0)

    def summary(self) -> Summary:
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
        return Summary("\n".join(lines), "lake evaporation")

    def to_frame(self) -> pd.DataFrame:
        """The daily table of every method the inputs allow, m per day (:attr:`by_method`)."""
        return self.by_method.copy()

    def to_dict(self, unit: str = "mm", warnings: Iterable[str] = ()) -> dict[str, Any]:
        """The JSON document of ``lakebalance evaporation --json`` (without the site's name).

        Parameters
        ----------
        unit : str
            Depth unit of the monthly totals and differences (``"mm"``, ``"in"``, ...).
        warnings : iterable of str
            Warnings to state with the document (the command passes those raised while the
            evaporation was computed).

        Returns
        -------
        dict
            ``method``, ``available``, ``unit``, ``monthly`` (totals of every method, days and
            filled days per month), ``differences`` (each other method minus the chosen one),
            ``totals``, ``water_year_start``, ``water_years`` (totals by water year),
            ``spread`` (between the methods, by complete water year), ``ice_days``,
            ``lake_heat`` (monthly water temperature, depths and heat stored of the lake method,
            or None),
            ``filled_days``, ``inputs``, ``notes``, ``warnings``, ``caution``.
        """
        monthly = self.monthly(unit)
        diffs = self.monthly_differences(unit)
        years = self.water_years(unit)
        spread = self.spread(unit)
        return {
            "method": self.method,
            "available": list(self.available),
            "unit": unit,
            "monthly": [
                {"month": str(month), **{k: row[k] for k in monthly.columns}}
                for month, row in monthly.iterrows()
            ],
            "differences": [
                {"month": str(month), **{f"{k}-{self.method}": row[k] for k in diffs.columns}}
                for month, row in diffs.iterrows()
            ],
            "totals": {k: monthly[k].sum(min_count=1) for k in self.available},
            "water_year_start": self.water_year_start,
            "water_years": [
                {"water_year": int(year), **{k: row[k] for k in years.columns}}
                for year, row in years.iterrows()
            ],
            "spread": {
                "relative_sd": self.relative_spread(),
                "by_water_year": [
                    {"water_year": int(year), **{k: row[k] for k in spread.columns}}
                    for year, row in spread.iterrows()
                ],
            },
            "ice_days": 0 if self.ice is None else int(self.ice.sum()),
            "lake_heat": self._lake_heat_monthly(),
            "filled_days": int(self.filled.sum()),
            "inputs": self.inputs,
            "notes": list(self.notes),
            "warnings": list(warnings),
            "caution": CAUTION,
        }


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


def estimate_lake_evaporation(
    weather: pd.DataFrame,
    options: EvaporationOptions | None = None,
    *,
    latitude_deg: float | None,
    elevation_m: float | None,
    site_file: str | None = None,
    mean_depth_m: pd.Series | np.ndarray | None = None,
    area_m2: pd.Series | np.ndarray | None = None,
    ice_mask: np.ndarray | pd.Series | None = None,
    water_year_start: int = 10,
) -> EvaporationResult:
    """Daily lake evaporation by every method the weather allows, and the one chosen.

    Parameters
    ----------
    weather : pandas.DataFrame
        Daily weather (tz-naive DatetimeIndex), columns named by role (see
        :data:`WEATHER_ROLES`): ``evaporation`` and ``pan`` in m/d, temperatures in °C,
        humidity in %, ``wind`` in m/s at ``options.wind_height``, ``solar`` in MJ m⁻² d⁻¹,
        ``sunshine`` in h/d. Absent or empty columns are not used.
    options : EvaporationOptions, optional
        ``method`` (``"auto"``: the first possible of :data:`PREFERENCE`; or one of
        :data:`METHODS`), the coefficients (pan coefficient, albedo, alpha, open-water
        coefficient, Angström coefficients; all dimensionless), ``wind_height`` (m),
        ``heat_storage_lag`` (days, 0 = off), ``fill`` and ``clip_negative``. Default: the
        defaults of :class:`~lakebalance.evaporation.options.EvaporationOptions`.
    latitude_deg : float or None
        Site latitude, decimal degrees north; needed by every method that uses radiation.
    elevation_m : float or None
        Site elevation, m above sea level (air pressure, clear-sky radiation); sea level is
        assumed, with a note, when absent.
    site_file : str, optional
        Named in configuration errors.
    mean_depth_m, area_m2 : pandas.Series or ndarray, optional
        The lake's mean depth (volume / area, m) and surface area (m²) of each day, for the lake
        method and the FAO-56 depth classes (default: ``[evaporation] mean_depth`` and
        ``lake_area``).
    ice_mask : array_like of bool, optional
        Days under ice; default: from ``options.ice`` (``"declared"``: ``ice_periods``;
        ``"from_air_temperature"``: the rule of :data:`~lakebalance.evaporation.ice.ICE_RULE`).
        Declared periods of the site (``[[period]]``) plug in here.
    water_year_start : int
        First month of the water year (1-12), for the totals by water year.

    Returns
    -------
    EvaporationResult

    Raises
    ------
    ConfigError
        When ``method`` is not possible with the inputs (naming what is missing), when no method
        is possible, or when a latitude is needed and absent.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from lakebalance.evaporation import EvaporationOptions, estimate_lake_evaporation
    >>> days = pd.date_range("2021-06-01", periods=30, freq="D")
    >>> weather = pd.DataFrame({"tmax": 25.0, "tmin": 12.0, "rh": 60.0, "wind": 2.0,
    ...                         "solar": 24.0}, index=days)
    >>> result = estimate_lake_evaporation(weather, EvaporationOptions(), latitude_deg=46.0,
    ...                                    elevation_m=400.0)
    >>> result.method
    'penman'
    """
    options = options or EvaporationOptions()
    if options.method != "auto":
        method_named(options.method, site_file)  # unknown method: ConfigError
    ice, ice_notes = _ice_mask(weather, options, ice_mask, site_file)
    prepared = prepare_weather(
        weather,
        options,
        latitude_deg=latitude_deg,
        elevation_m=elevation_m,
        mean_depth_m=mean_depth_m,
        area_m2=area_m2,
        ice=ice,
    )
    try:
        results = {m.name: m.compute(prepared, options) for m in REGISTRY if prepared.has(m.needs)}
        heat = _heat_table(prepared, options, results)
    except ConfigError as exc:
        if exc.file is None and site_file is not None:
            exc.file = str(site_file)
        raise
    notes = [n for m in REGISTRY if m.name in results for n in _input_notes(m, options)]
    notes.extend(prepared.notes)
    notes.extend(ice_notes)
    by_method, filled_by_method = _tables(prepared, results, options, notes)
    chosen = _choose(prepared, results, options.method, site_file)
    if chosen.chosen_warning:
        warnings.warn(chosen.chosen_warning, ApproximationWarning, stacklevel=2)
    notes.extend(_choice_notes(chosen, results, filled_by_method, options, elevation_m))
    return EvaporationResult(
        method=chosen.name,
        depth_m=by_method[chosen.name].rename("evaporation_m"),
        filled=filled_by_method[chosen.name].rename("filled"),
        by_method=by_method,
        notes=tuple(notes),
        filled_by_method=filled_by_method,
        inputs=dict(prepared.inputs),
        ice=None if ice is None else pd.Series(ice, index=prepared.index, name="ice"),
        lake_heat=heat,
        water_year_start=int(water_year_start),
    )


def _ice_mask(
    weather: pd.DataFrame,
    options: EvaporationOptions,
    ice_mask: np.ndarray | pd.Series | None,
    site_file: str | None,
) -> tuple[np.ndarray | None, list[str]]:
    """The daily ice mask (given, declared or inferred; None for none) and what it says."""
    from .ice import ICE_RULE, ice_mask_from_air_temperature, ice_mask_from_periods

    index = pd.DatetimeIndex(weather.index)
    if ice_mask is not None:
        mask = np.asarray(ice_mask, dtype=bool).reshape(-1)
        if mask.size != len(index):
            raise ValueError("ice_mask must have one value per day of the weather")
        how = "given periods"
    elif options.ice == "declared":
        mask = ice_mask_from_periods(index, options.ice_periods, site_file=site_file)
        how = "[evaporation] ice_periods"
    elif options.ice == "from_air_temperature":
        if "tmean" in weather.columns and weather["tmean"].notna().any():
            tmean = weather["tmean"].astype(float)
        elif {"tmax", "tmin"} <= set(weather.columns):
            tmean = 0.5 * (weather["tmax"].astype(float) + weather["tmin"].astype(float))
        else:
            raise ConfigError(
                "[evaporation] ice = 'from_air_temperature' needs an air temperature series "
                "(tmean, or tmax and tmin)",
                file=site_file,
            )
        mask = ice_mask_from_air_temperature(tmean, options.ice_window, options.ice_threshold)
        how = ICE_RULE.format(window=options.ice_window, threshold=options.ice_threshold)
    else:
        return None, []
    n = int(mask.sum())
    notes = (
        [
            f"ice cover on {n} days ({how}): evaporation is the sublimation of the ice, "
            f"{options.ice_sublimation:g} mm/d, for every method; pan gaps on those days are not "
            "filled as open water"
        ]
        if n
        else [f"no ice days ({how})"]
    )
    return mask, notes


def _heat_table(
    prepared: PreparedWeather, options: EvaporationOptions, results: dict[str, np.ndarray]
) -> pd.DataFrame | None:
    """The lake method's heat path (see :attr:`EvaporationResult.lake_heat`), None without it."""
    from .equilibrium import EQUILIBRIUM, lake_heat_of

    if EQUILIBRIUM.name not in results:
        return None
    heat = lake_heat_of(prepared, options)
    mm = factor("mm", "m")
    return pd.DataFrame(
        {
            "water_temperature_c": heat.water_temperature_c,
            "equilibrium_temperature_c": heat.equilibrium_c,
            "heat_storage_mj_m2": heat.storage,
            "mean_depth_m": prepared.mean_depth_m,
            "mixed_depth_m": (
                prepared.mean_depth_m
                if options.mixed_depth_max is None
                else np.minimum(prepared.mean_depth_m, options.mixed_depth_max)
            ),
            "time_constant_days": heat.tau_days,
            "no_storage_m": heat.no_storage_mm * mm,
        },
        index=prepared.index,
    )


def _input_notes(method: EvaporationMethod, options: EvaporationOptions) -> list[str]:
    note = method.input_note(options) if method.input_note else None
    return [note] if note else []


def _tables(
    prepared: PreparedWeather,
    results: dict[str, np.ndarray],
    options: EvaporationOptions,
    notes: list[str],
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Daily depths by method (m/d; condensation clipped when asked, with a note) and their
    filled masks, columns in table order."""
    index = prepared.index
    order = [m for m in REGISTRY if m.name in results]
    by_method = pd.DataFrame(index=index)
    sublimation = options.ice_sublimation * factor("mm", "m")
    ice = prepared.ice
    for m in order:
        values = np.asarray(results[m.name], dtype=float)
        keep = m.keep_negative is not None and m.keep_negative(options)
        if m.condensation and options.clip_negative and not keep:
            negative = values < 0
            if negative.any():
                added = -float(np.sum(values[negative])) / factor("mm", "m")
                notes.append(
                    f"{m.name}: {int(negative.sum())} days of negative evaporation "
                    f"(condensation) set to 0, adding {added:.1f} mm to the record's total"
                )
            values = np.where(negative, 0.0, values)
        if ice is not None:
            values = np.where(ice, sublimation, values)
        by_method[m.name] = values
    by_method.index.name = "date"
    frozen = np.zeros(len(index), dtype=bool) if ice is None else ice
    filled_by_method = pd.DataFrame(
        {m.name: prepared.filled_mask(m.needs) & ~frozen for m in order}, index=index, dtype=bool
    )
    return by_method, filled_by_method


def _choose(
    prepared: PreparedWeather,
    results: dict[str, np.ndarray],
    method: str,
    site_file: str | None,
) -> EvaporationMethod:
    """The method asked for, or with ``"auto"`` the first possible of :data:`PREFERENCE`."""

    def needs(name: str) -> str:
        return prepared.missing_text(method_named(name).needs)

    if method == "auto":
        chosen = next((n for n in PREFERENCE if n in results), None)
        if chosen is None:
            detail = "; ".join(f"{n} needs {needs(n)}" for n in PREFERENCE)
            raise ConfigError(
                f"no lake evaporation method is possible with the series given ({detail})",
                file=site_file,
            )
        return method_named(chosen)
    if method not in results:
        raise ConfigError(
            f"evaporation method {method!r} needs {needs(method) or 'more inputs'}",
            file=site_file,
        )
    return method_named(method)


def _choice_notes(
    chosen: EvaporationMethod,
    results: dict[str, np.ndarray],
    filled_by_method: pd.DataFrame,
    options: EvaporationOptions,
    elevation_m: float | None,
) -> list[str]:
    """What the choice implies: the chosen method's own note, the methods shown for comparison
    only, the days of filled weather, the air pressure assumed."""
    notes = []
    if chosen.chosen_note is not None:
        notes.append(chosen.chosen_note(options))
    for m in REGISTRY:
        if m.comparison_note and m.name in results and m is not chosen:
            notes.append(m.comparison_note)
    if options.fill == "climatology":
        n_filled = int(filled_by_method[chosen.name].sum())
        if n_filled:
            notes.append(
                f"{n_filled} days of {chosen.name} used weather filled from the day-of-year "
                "climatology of the record"
            )
    if elevation_m is None and chosen.uses_pressure:
        notes.append("no elevation in [site]: sea-level air pressure assumed")
    return notes
