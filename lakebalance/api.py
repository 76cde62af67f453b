"""The Python API: from a site file to the objects of each step.

Each function takes a :class:`~lakebalance.config.Site` (from :func:`load_site`) and returns a frozen
result object. The command line calls these and nothing else.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from .config import Site
from .config import load_site as _load_site

if TYPE_CHECKING:  # pragma: no cover
    from .records import Records

__all__ = ["load_site", "load_records"]


def load_site(path: str | Path) -> Site:
    """Read and validate a site file (see ``docs/site-file.md``)."""
    return _load_site(path)


def load_records(site: Site, *, progress: bool = False) -> Records:
    """Read, convert to SI, aggregate to days and check every series of ``site``.

    Parameters
    ----------
    site : Site
        The validated site file.
    progress : bool
        Show a progress bar on stderr while reading.
    """
    from .io import read_records

    return read_records(site, progress=progress)


# ---- domain functions below: append one block per domain -------------------------------------


# ---- evaporation ------------------------------------------------------------------------------
if TYPE_CHECKING:  # pragma: no cover
    from .evaporation.lake import EvaporationResult
    from .storage import StorageCurve

__all__ += ["lake_evaporation"]


def lake_evaporation(
    site: Site,
    records: Records | None = None,
    storage: StorageCurve | None = None,
    method: str | None = None,
) -> EvaporationResult:
    """Daily lake evaporation by every method the site's weather allows, and the one chosen.

    Parameters
    ----------
    site : Site
        The validated site file; ``[evaporation]`` holds the method and coefficients, ``[site]``
        the latitude (degrees) and elevation (m).
    records : Records, optional
        The loaded records (read from the site when not given).
    storage : StorageCurve, optional
        When given (and a stage record exists), the result also carries the daily volumes
        ``evaporation_m3`` and ``rain_m3`` (depth × area(stage), m³ per day).
    method : str, optional
        Overrides ``[evaporation] method`` (``"auto"``, ``"given"``, ``"pan"``, ``"penman"``,
        ``"priestley_taylor"``, ``"fao56"``, ``"hargreaves"``).

    Returns
    -------
    EvaporationResult
        ``depth_m`` (m per day), ``filled`` mask, ``by_method`` (m per day), ``notes``.

    Notes
    -----
    Several series of one weather role (two rain gauges, two thermometers) are averaged day by
    day. See ``docs/evaporation.md`` for the methods and their equations.
    """
    import dataclasses as _dc

    from .evaporation.lake import WEATHER_ROLES, estimate_lake_evaporation, surface_volume_m3

    if records is None:
        records = load_records(site)
    opts = site.evaporation
    daily = records.daily
    weather = {}
    averaged = []
    for role in WEATHER_ROLES:
        keys = records.keys(role) if records.series else [k for k in daily.columns if k == role]
        keys = [k for k in keys if k in daily.columns]
        if not keys:
            continue
        weather[role] = daily[keys].mean(axis=1, skipna=True)
        if len(keys) > 1:
            averaged.append(f"{role} is the daily mean of {len(keys)} series")
    import pandas as pd

    frame = pd.DataFrame(weather, index=daily.index)
    result = estimate_lake_evaporation(
        frame,
        latitude_deg=site.site.latitude,
        elevation_m=site.site.elevation,
        method=method or opts.method,
        pan_coefficient=opts.pan_coefficient,
        albedo=opts.albedo,
        alpha=opts.alpha,
        open_water_coefficient=opts.open_water_coefficient,
        wind_height_m=opts.wind_height,
        heat_storage_lag_days=opts.heat_storage_lag,
        fill=opts.fill,
        angstrom_a=opts.angstrom_a,
        angstrom_b=opts.angstrom_b,
        clip_negative=opts.clip_negative,
        site_file=str(site.path),
    )
    changes: dict = {}
    if averaged:
        changes["notes"] = (*result.notes, *averaged)
    if storage is not None and "stage" in daily.columns:
        area_m2 = pd.Series(storage.area(daily["stage"].to_numpy()), index=daily.index)
        changes["evaporation_m3"] = surface_volume_m3(result.depth_m, area_m2).rename(
            "evaporation_m3"
        )
        rain_keys = [k for k in (records.keys("rain") if records.series else []) if k in daily]
        if not rain_keys and "rain" in daily.columns:
            rain_keys = ["rain"]
        if rain_keys:
            rain_m = daily[rain_keys].mean(axis=1, skipna=True)
            changes["rain_m3"] = surface_volume_m3(rain_m, area_m2).rename("rain_m3")
    return _dc.replace(result, **changes) if changes else result
