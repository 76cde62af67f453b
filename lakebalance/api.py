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
            if len(rain_keys) > 1:
                averaged.append(f"rain is the daily mean of {len(rain_keys)} series")
                changes["notes"] = (*result.notes, *averaged)
            changes["rain_m3"] = surface_volume_m3(rain_m, area_m2).rename("rain_m3")
    return _dc.replace(result, **changes) if changes else result


# ---- outlet rating ----------------------------------------------------------------------------
if TYPE_CHECKING:  # pragma: no cover
    import numpy as _np

    from .outlet.fit import FitOptions, RatingFit

__all__ += ["fit_rating", "rating_options"]


def rating_options(site: Site) -> FitOptions:
    """The fit options an ``[outlet]`` section asks for (component keys become ``name.param``)."""
    from .errors import ConfigError
    from .outlet.fit import FitOptions

    opts = site.outlet
    if opts is None:
        raise ConfigError("the site file has no [outlet] section", file=site.path)
    fixed, initial, bounds = dict(opts.fixed), dict(opts.initial), {}
    for key, pair in opts.bounds.items():
        bounds[key] = tuple(pair)
    for comp in opts.component:
        fixed.update({f"{comp.name}.{k}": v for k, v in comp.fixed.items()})
        initial.update({f"{comp.name}.{k}": v for k, v in comp.initial.items()})
        bounds.update({f"{comp.name}.{k}": tuple(v) for k, v in comp.bounds.items()})
    for key, pair in bounds.items():
        if len(pair) != 2:
            raise ConfigError(
                f"[outlet] bounds of '{key}' must be [lower, upper], got {list(pair)}",
                file=site.path,
            )
    return FitOptions(
        residuals=opts.residuals,
        fixed=fixed,
        initial=initial,
        bounds=bounds,
        bootstrap=opts.bootstrap,
    )


def fit_rating(site: Site, *, rng: _np.random.Generator | None = None) -> RatingFit:
    """Fit the outlet rating of ``site`` to its spot gaugings.

    Parameters
    ----------
    site : Site
        The validated site file; ``[outlet]`` names the gaugings file, the control form and any
        fixed, initial or bounded parameters (SI).
    rng : numpy.random.Generator, optional
        Source of the bootstrap draws (default: seeded from ``[site] seed``).

    Returns
    -------
    RatingFit
        Parameters with standard errors, covariance and intervals; ``predict`` gives discharge
        (m³/s) with confidence or prediction bands. See ``docs/rating.md``.

    Raises
    ------
    ConfigError, InputError, FitError
        Missing section or gaugings file, an unreadable table, or gaugings that cannot fit.
    """
    import numpy as np

    from .errors import ConfigError, FitError
    from .io.gaugings import read_gaugings
    from .outlet.fit import fit_rating_curve
    from .outlet.laws import law_from_options

    options = rating_options(site)
    try:
        law = law_from_options(site.outlet)
    except ConfigError as exc:
        raise ConfigError(exc.message, file=site.path) from None
    g = read_gaugings(site.outlet)
    if rng is None and options.bootstrap > 0:
        rng = np.random.default_rng(site.site.seed)
    try:
        return fit_rating_curve(
            law,
            g.stage_m,
            g.discharge_m3s,
            dates=g.date,
            weights=g.weight,
            options=options,
            rng=rng,
        )
    except FitError as exc:
        raise FitError(exc.message, file=g.file) from None
    except ConfigError as exc:
        raise ConfigError(exc.message, file=site.path) from None


# ---- storage relation -------------------------------------------------------------------------
if TYPE_CHECKING:  # pragma: no cover
    from .storage import StorageCurve

__all__ += ["load_storage", "lake_location"]


def load_storage(site: Site, *, file: Path | None = None) -> StorageCurve:
    """The stage-area-storage relation of ``site`` (``[storage]``), in SI units.

    Parameters
    ----------
    site : Site
        The validated site file.
    file : Path, optional
        Read this survey instead of ``[storage] file`` (a table or a contour layer, told apart by
        the suffix), with the same column names, units and policies; used for ``compare``.

    Returns
    -------
    StorageCurve
        ``area(stage_m)`` m², ``volume(stage_m)`` m³, ``stage(volume_m3)`` m, vectorised; see
        ``docs/storage.md``.

    Raises
    ------
    ConfigError
        No ``[storage]`` section, or a key its source needs is missing.
    InputError
        The survey cannot be read or is inconsistent (errors name the file and rows).
    """
    from .errors import ConfigError
    from .io.storage import read_storage

    if site.storage is None:
        raise ConfigError("the site file has no [storage] section", file=site.path)
    return read_storage(site.storage, site_file=site.path, file=file)


def lake_location(site: Site) -> tuple[float, float] | None:
    """Latitude and longitude of the lake (decimal degrees, WGS 84).

    From ``[site] latitude``/``longitude`` when both are given, else the centroid of the storage
    survey's contours or outline (a table has no position: None). The site is frozen: the value
    is returned, never written back.
    """
    if site.site.latitude is not None and site.site.longitude is not None:
        return float(site.site.latitude), float(site.site.longitude)
    if site.storage is None:
        return None
    from .io.storage import storage_location

    return storage_location(site.storage)
