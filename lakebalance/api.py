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


# ---- water balance and lake dynamics ---------------------------------------------------------
if TYPE_CHECKING:  # pragma: no cover
    import pandas as _pd

    from .balance import Balance, TermErrors
    from .dynamics import Dynamics

__all__ += ["close_balance", "term_errors", "lake_dynamics"]


def term_errors(site: Site, records: Records | None = None) -> TermErrors:
    """The Monte Carlo term errors of ``site``: ``[uncertainty]`` over the documented defaults.

    The stage resolution comes from ``[uncertainty] stage_resolution`` (m), else from the stage
    series' ``resolution`` (in its own units), else the default of
    :class:`~lakebalance.balance.TermErrors`.
    """
    import dataclasses as _dc

    from .balance import TermErrors
    from .units import conversion

    u = site.uncertainty
    changes = {
        name: float(getattr(u, name))
        for name in ("inflow", "rain", "evaporation", "withdrawal", "release", "area", "systematic")
        if getattr(u, name) is not None
    }
    if u.stage_resolution is not None:
        changes["stage_resolution_m"] = float(u.stage_resolution)
    else:
        spec = next(iter(site.series_of("stage")), None)
        if spec is not None and spec.resolution is not None:
            changes["stage_resolution_m"] = float(
                conversion(spec.units, "length", "stage").scale * spec.resolution
            )
    try:
        return _dc.replace(TermErrors(), **changes)
    except ValueError as exc:
        from .errors import ConfigError

        raise ConfigError(f"[uncertainty]: {exc}", file=site.path) from None


def close_balance(
    site: Site,
    *,
    draws: int | None = None,
    rng: _np.random.Generator | None = None,
    seed: int | None = None,
    records: Records | None = None,
    storage: StorageCurve | None = None,
    rating: RatingFit | None = None,
    evaporation_m: _pd.Series | None = None,
) -> Balance:
    """The daily water balance of ``site`` with Monte Carlo bands.

    Parameters
    ----------
    site : Site
        The validated site file: a stage series and ``[storage]`` are required; inflow, rain,
        withdrawal and release series, the ``[outlet]`` rating and the evaporation inputs are
        used when given (a term without any record is taken as zero and noted).
    draws : int, optional
        Monte Carlo draws (default ``[uncertainty] draws``; 0 skips the bands).
    rng : numpy.random.Generator, optional
        Source of the draws (default: seeded with ``seed``).
    seed : int, optional
        Seed of the draws when no ``rng`` is given (default ``[site] seed``); recorded in the
        result.
    records, storage, rating : optional
        Already loaded records, storage relation and fitted rating (loaded from the site when
        not given).
    evaporation_m : pandas.Series, optional
        Daily lake evaporation depth, m per day (default: :func:`lake_evaporation`).

    Returns
    -------
    Balance
        Daily table, ``monthly()`` and ``water_years()`` with 5-95% residual bands; see
        ``docs/balance.md``.

    Raises
    ------
    ConfigError
        No stage series or no ``[storage]`` section.
    """
    import numpy as np
    import pandas as pd

    from .balance import (
        ClosureOptions,
        DailyTerms,
        OutletParameters,
        add_uncertainty,
        boundary_stage_from_readings,
        close_daily,
    )
    from .errors import ConfigError

    if records is None:
        records = load_records(site)
    daily = records.daily
    if "stage" not in daily.columns:
        raise ConfigError("the water balance needs a stage series ([series.stage])", file=site.path)
    if storage is None:
        storage = load_storage(site)
    if rating is None and site.outlet is not None:
        rating = fit_rating(site)
    notes: list[str] = []
    if evaporation_m is None:
        from .evaporation.lake import WEATHER_ROLES

        weather = [r for r in WEATHER_ROLES if r != "rain" and records.has(r)]
        if weather:
            evap = lake_evaporation(site, records)
            evaporation_m = evap.depth_m
            notes.append(f"lake evaporation by the {evap.method} method")
    info = {s.key: s for s in records.series}
    inflows = {info[k].name if k in info else k: daily[k] for k in records.keys("inflow")}
    rain_keys = records.keys("rain")
    rain = daily[rain_keys].mean(axis=1, skipna=True) if rain_keys else None
    if len(rain_keys) > 1:
        notes.append(f"rain is the daily mean of {len(rain_keys)} gauges")
    terms = DailyTerms(
        stage_m=daily["stage"],
        inflow_m3s=inflows,
        rain_m=rain,
        evaporation_m=evaporation_m,
        withdrawal_m3s=records.total("withdrawal") if records.has("withdrawal") else None,
        release_m3s=records.total("release") if records.has("release") else None,
        boundary_stage_m=(
            boundary_stage_from_readings(records.subdaily_stage, pd.DatetimeIndex(daily.index))
            if records.subdaily_stage is not None
            else None
        ),
    )
    options = ClosureOptions(
        boundary_rule=site.uncertainty.boundary_rule,
        water_year_start=site.site.water_year_start,
    )
    outflow = rating.discharge if rating is not None else None
    volume_fn, area_fn = _storage_for_stage(site, storage, daily["stage"])
    balance = close_daily(
        terms, volume_fn=volume_fn, area_fn=area_fn, outflow_fn=outflow, options=options
    )
    n_draws = site.uncertainty.draws if draws is None else int(draws)
    if n_draws == 1 or n_draws < 0:
        raise ConfigError(
            f"Monte Carlo draws must be 0 (no bands) or at least 2 for a 5-95% band, got {n_draws}",
            file=site.path,
        )
    if n_draws > 0:
        if rng is None:
            seed = site.site.seed if seed is None else int(seed)
            rng = np.random.default_rng(seed)
        else:
            seed = None  # unknown: the caller's generator
        outlet = None
        if rating is not None:
            cov = np.asarray(rating.cov, dtype=float)
            if np.all(np.isfinite(cov)):
                outlet = OutletParameters(
                    values=np.asarray(rating.vector, dtype=float),
                    discharge_with=rating.discharge_with,
                    cov=cov,
                    names=tuple(rating.param_names),
                )
            else:
                notes.append("rating covariance not finite: rating parameter error left out")
        balance = add_uncertainty(
            balance,
            area_fn=area_fn,
            outflow_fn=outflow,
            outlet=outlet,
            errors=term_errors(site, records),
            draws=n_draws,
            rng=rng,
            seed=seed,
        )
    import dataclasses as _dc

    return _dc.replace(balance, notes=(*balance.notes, *notes))


def lake_dynamics(
    site: Site,
    inflow_m3s: float | None = None,
    *,
    outlet: dict[str, float] | None = None,
    demand_m3s: float | None = None,
    evaporation_scale: float | None = None,
    balance: Balance | None = None,
    use_seepage: bool = True,
    stages: dict[str, float] | None = None,
    records: Records | None = None,
    storage: StorageCurve | None = None,
    rating: RatingFit | None = None,
    seepage: SeepageFit | None = None,
) -> Dynamics:
    """Residence, response and equilibrium analysis of ``site``, with optional what-ifs.

    Parameters
    ----------
    site : Site
        The validated site file (stage, ``[storage]``; ``[outlet]`` when the lake has one).
    inflow_m3s : float, optional
        Sustained inflow, m³/s (default: the mean gauged inflow of the record).
    outlet : dict, optional
        What-if: rating parameters changed (``{"sill.e": 9.5}``, SI), e.g. a lowered sill.
    demand_m3s : float, optional
        What-if: a changed stage-independent demand (withdrawals and releases), m³/s.
    evaporation_scale : float, optional
        What-if: a factor (-) on the mean evaporation depth.
    balance : Balance, optional
        An already closed balance (default: :func:`close_balance`).
    use_seepage : bool
        Include the net seepage law estimated from the residual, when it can be estimated.
    stages : dict, optional
        Named stages (m) for the response times, added to the levels and the record's 10th,
        50th and 90th percentile stages.

    records, storage, rating, seepage : optional
        Results already at hand (default: loaded, fitted or estimated from the site).

    Returns
    -------
    Dynamics
        See ``docs/balance.md``; ``summary()`` and ``to_dict()``.

    Notes
    -----
    Evaporation and rain enter as their record means (m per day) times the area at each stage;
    demand as the record mean of withdrawals and releases.
    """
    import numpy as np
    import pandas as pd

    from .dynamics import LakeModel, analyse_dynamics, residence_times
    from .errors import ConfigError, LakebalanceError, RangeError
    from .units import SECONDS_PER_DAY

    if storage is None:
        storage = load_storage(site)
    if rating is None and site.outlet is not None:
        rating = fit_rating(site)
    if records is None:
        records = load_records(site)
    if balance is None:
        balance = close_balance(site, records=records, storage=storage, rating=rating)
    d = balance.daily
    notes: list[str] = []
    if not use_seepage:
        seepage = None
    elif seepage is None:
        try:
            seepage = estimate_seepage(site, balance=balance, records=records)
        except LakebalanceError as exc:
            notes.append(f"seepage left out: {exc.message}")
    ok = d["area_m2"].notna()
    area_sum = float(d.loc[ok, "area_m2"].sum())

    def mean_depth(col: str) -> float:
        sel = ok & d[col].notna()
        return float(d.loc[sel, col].sum() / d.loc[sel, "area_m2"].sum()) if sel.any() else 0.0

    evap = mean_depth("evaporation_m3") if area_sum > 0 else 0.0
    rain = mean_depth("rain_m3") if area_sum > 0 else 0.0
    demand = float((d["withdrawal_m3"] + d["release_m3"]).mean() / SECONDS_PER_DAY)
    if not np.isfinite(demand):
        raise RangeError(
            "no day of the stage record has the withdrawals and releases: their records do not "
            "overlap the stage record",
            file=site.path,
        )
    if inflow_m3s is None:
        inflow_m3s = float(d["inflow_m3"].mean() / SECONDS_PER_DAY)
        if not np.isfinite(inflow_m3s):
            raise RangeError(
                "no day of the stage record has a gauged inflow (the inflow records do not "
                "overlap it): give the sustained inflow (m3/s) with --inflow",
                file=site.path,
            )
        notes.append(f"sustained inflow: the record's mean gauged inflow, {inflow_m3s:.4g} m3/s")
    levels = dict(site.levels)
    lo = float(storage.min_stage_m)
    hi = float(storage.max_stage_m)
    outside = {k: v for k, v in levels.items() if not lo <= v <= hi}
    if outside and storage.above != "error" and storage.below != "error":
        import warnings

        from .errors import ExtrapolationWarning

        warnings.warn(
            "named level(s) outside the storage relation "
            f"({lo:.4g} to {hi:.4g} m): "
            + ", ".join(f"{k} {v:.4g} m" for k, v in outside.items())
            + f"; the area there follows the relation's policies (below '{storage.below}', "
            f"above '{storage.above}')",
            ExtrapolationWarning,
            stacklevel=2,
        )
    if storage.above == "extend" and levels:
        hi = max(hi, *levels.values())  # named levels above the survey: area extended

    def quiet_area(h):  # days outside the relation were reported by the balance, levels above
        return storage.area(h, warn=False)

    outflow = rating.discharge if rating is not None else None
    lake = LakeModel(
        area_fn=quiet_area,
        outflow_fn=outflow,
        seepage_fn=seepage.rate_m3s if seepage is not None else None,
        evaporation_m_per_d=evap,
        rain_m_per_d=rain,
        demand_m3s=demand,
        stage_range_m=(lo, hi),
    )
    if seepage is not None:
        notes.append("net seepage law from the residual included in the losses")
    changes: list[tuple[str, dict]] = []
    if outlet:
        if rating is None:
            raise ConfigError("an outlet what-if needs an [outlet] rating", file=site.path)
        names = list(rating.param_names)
        vec = np.asarray(rating.vector, dtype=float).copy()
        for key, value in outlet.items():
            if key not in names:
                from .errors import suggest

                raise ConfigError(
                    f"unknown rating parameter '{key}'{suggest(key, names)}; parameters are "
                    + ", ".join(names),
                    file=site.path,
                )
            vec[names.index(key)] = float(value)
        row = vec[None, :]

        def changed(h, _row=row):
            h = np.asarray(h, dtype=float)
            return rating.discharge_with(_row, h[None, ...])[0]

        label = "outlet " + ", ".join(f"{k} = {v:g}" for k, v in outlet.items())
        changes.append((label, {"outflow_fn": changed}))
    if demand_m3s is not None:
        changes.append((f"demand {demand_m3s:g} m3/s", {"demand_m3s": float(demand_m3s)}))
    if evaporation_scale is not None:
        changes.append(
            (f"evaporation x {evaporation_scale:g}", {"evaporation_scale": evaporation_scale})
        )
    stage = d["stage_m"].dropna()
    chosen = dict(levels)
    for q in (10, 50, 90):
        chosen[f"record p{q}"] = float(stage.quantile(q / 100))
    chosen.update(stages or {})
    seep_m3 = (
        pd.Series(seepage.rate_m3s(d["stage_m"].to_numpy()) * SECONDS_PER_DAY, index=d.index)
        if seepage is not None
        else None
    )
    residence = residence_times(d, balance.water_year_start, seepage_m3=seep_m3)
    return analyse_dynamics(
        lake,
        inflow_m3s=float(inflow_m3s),
        today=stage.index[-1].date().isoformat(),
        today_stage_m=float(stage.iloc[-1]),
        levels=levels,
        stages=chosen,
        residence=residence,
        changes=tuple(changes),
        notes=tuple(notes),
    )


# ---- residual flags and seepage ---------------------------------------------------------------
if TYPE_CHECKING:  # pragma: no cover
    from .flags import Flags
    from .seepage import SeepageFit

__all__ += ["find_flags", "estimate_seepage"]


def _band_sigma_m3(daily: _pd.DataFrame) -> _np.ndarray | None:
    """1-σ daily residual uncertainty (m³/d) from the balance's 5–95 % band, when present."""
    if "residual_p05_m3" not in daily.columns or "residual_p95_m3" not in daily.columns:
        return None
    from scipy.stats import norm

    width = (daily["residual_p95_m3"] - daily["residual_p05_m3"]).to_numpy(dtype=float)
    return width / (2.0 * float(norm.ppf(0.95)))


def _flatline_days(records: Records, index: _pd.DatetimeIndex) -> _np.ndarray:
    """Days of a stage flat-line found by the checks on the raw series (already reported)."""
    import numpy as np

    out = np.zeros(len(index), dtype=bool)
    for f in records.findings:
        if f.series == "stage" and f.kind == "flatline" and f.first and f.last:
            out |= (index >= _pd_timestamp(f.first)) & (index <= _pd_timestamp(f.last))
    return out


def _pd_timestamp(text: str):
    import pandas as pd

    return pd.Timestamp(text[:10])


def find_flags(
    site: Site,
    *,
    balance: Balance | None = None,
    records: Records | None = None,
) -> Flags:
    """Dated, sized and explained flags on the residual of the daily balance of ``site``.

    Parameters
    ----------
    site : Site
        The validated site file (``[flags]`` holds the thresholds).
    balance : Balance, optional
        An already closed balance (default: :func:`close_balance`).
    records : Records, optional
        Already loaded records (default: loaded from the site).

    Returns
    -------
    Flags
        See :func:`lakebalance.flags.detect_flags` and ``docs/flags-and-seepage.md``. The data
        are never altered; corrections the site file accepts (``[[correction]]``) are listed.
    """
    from .flags import detect_flags

    if records is None:
        records = load_records(site)
    if balance is None:
        balance = close_balance(site, records=records)
    daily = balance.daily
    return detect_flags(
        daily,
        site.flags,
        sigma_m3=_band_sigma_m3(daily),
        corrections=tuple(site.correction),
        exclude=_flatline_days(records, daily.index),
    )


def estimate_seepage(
    site: Site,
    *,
    balance: Balance | None = None,
    flags: Flags | None = None,
    records: Records | None = None,
) -> SeepageFit:
    """Net groundwater exchange of ``site`` from the residual of its daily balance.

    Parameters
    ----------
    site : Site
        The validated site file (``[seepage]`` selects the law and the days; ``[levels]`` names
        the stages at which the rate is reported).
    balance : Balance, optional
        An already closed balance (default: :func:`close_balance`).
    flags : Flags, optional
        Flags of that balance (default: :func:`find_flags`), left out with ``exclude_flags``.
    records : Records, optional
        Already loaded records.

    Returns
    -------
    SeepageFit
        ``k`` (m²/s), ``h0`` (m), ``rate_m3s(stage_m)`` (positive = water leaving the lake),
        rates by stage in m³/d, L/s and mm/d with 95 % intervals.

    Raises
    ------
    FitError
        Too few days are left after the selection.
    """
    from .seepage import fit_seepage, select_days

    if records is None:
        records = load_records(site)
    if balance is None:
        balance = close_balance(site, records=records)
    options = site.seepage
    if flags is None and options.exclude_flags:
        flags = find_flags(site, balance=balance, records=records)
    daily = balance.daily
    flagged = None
    if flags is not None:
        flagged = flags.mask(daily.index) | _pd_series(
            _flatline_days(records, daily.index), daily.index
        )
    spill = site.levels.get("spill") if site.outlet is None else None
    mask, counts = select_days(daily, options, flagged=flagged, spill_stage_m=spill)
    used = daily[mask.to_numpy()]
    sigma = _band_sigma_m3(daily)
    return fit_seepage(
        used["stage_m"],
        used["residual_m3"],
        model=options.model,
        area_stage_m=daily["stage_m"].to_numpy(),
        area_m2=daily["area_m2"].to_numpy(),
        levels=dict(site.levels),
        other_sigma_m3=None if sigma is None else sigma[mask.to_numpy()],
        selection=counts,
    )


def _pd_series(values, index):
    import pandas as pd

    return pd.Series(values, index=index)


def _storage_for_stage(site: Site, storage: StorageCurve, stage_m: _pd.Series):
    """The storage relation's volume and area functions for the balance of ``stage_m`` (m).

    The stage record is checked against the relation once: a record that lies wholly outside it
    is a :class:`~lakebalance.errors.RangeError` (the two are not on one datum, or the stage is
    in the wrong unit), and days outside it give one
    :class:`~lakebalance.errors.ExtrapolationWarning` counted in days (or the relation's
    ``"error"`` policy raises). The functions returned do not warn again, so that the many
    evaluations of one day (boundaries, quadrature nodes, Monte Carlo) are not each reported.
    """
    import numpy as np

    from .errors import RangeError

    h = stage_m.to_numpy(dtype=float)
    h = h[np.isfinite(h)]
    lo, hi = float(storage.min_stage_m), float(storage.max_stage_m)
    if h.size and not np.any((h >= lo) & (h <= hi)):
        where = site.storage.file if site.storage is not None and site.storage.file else site.path
        raise RangeError(
            f"the stage record ({h.min():.4g} to {h.max():.4g} m) lies wholly outside the storage "
            f"relation ({lo:.6g} to {hi:.6g} m): are both on the gauge datum (a table's stage "
            "column is taken as stage, not elevation) and is the stage series in its declared "
            "unit?",
            file=where,
        )
    if h.size:
        storage.area(h)  # one warning (or the "error" policy) for the days outside

    def volume_fn(x):
        return storage.volume(x, warn=False)

    def area_fn(x):
        return storage.area(x, warn=False)

    return volume_fn, area_fn


# ---- drawdown ---------------------------------------------------------------------------------
if TYPE_CHECKING:  # pragma: no cover
    from .drawdown import Forecast

__all__ += ["forecast_drawdown", "drawdown_history"]


def drawdown_history(
    site: Site, records: Records, evaporation_m: _pd.Series | None = None
) -> _pd.DataFrame:
    """The daily history the drawdown scenarios draw from (SI).

    Columns ``inflow_m3s`` (sum of the tributaries, m³/s), ``rain_m`` (mean of the gauges, m per
    day), ``evaporation_m`` (lake evaporation, m per day: ``evaporation_m`` when given, else
    :func:`lake_evaporation` when weather is recorded), ``withdrawal_m3s`` and ``release_m3s``
    (m³/s). A term without a record is left out (the scenarios take it as zero).
    """
    import pandas as pd

    daily = records.daily
    cols: dict[str, pd.Series] = {}
    if records.has("inflow"):
        cols["inflow_m3s"] = records.total("inflow")
    if records.has("rain"):
        cols["rain_m"] = daily[records.keys("rain")].mean(axis=1, skipna=True)
    if evaporation_m is None:
        from .evaporation.lake import WEATHER_ROLES

        if any(records.has(r) for r in WEATHER_ROLES if r != "rain"):
            evaporation_m = lake_evaporation(site, records).depth_m
    if evaporation_m is not None:
        cols["evaporation_m"] = evaporation_m.reindex(daily.index)
    if records.has("withdrawal"):
        cols["withdrawal_m3s"] = records.total("withdrawal")
    if records.has("release"):
        cols["release_m3s"] = records.total("release")
    return pd.DataFrame(cols, index=daily.index)


def _check_start_stage(h0: float, storage: StorageCurve, site: Site) -> None:
    """A forecast may start above the survey by a tenth of its span when area is extended there;
    anywhere else outside the storage relation it would extrapolate blindly (often a stage in the
    wrong unit or on another datum), so it stops with one error."""
    from .errors import RangeError

    lo, hi = float(storage.min_stage_m), float(storage.max_stage_m)
    top = hi + (0.1 * (hi - lo) if storage.above == "extend" else 0.0)
    if not (lo - 1e-9 <= h0 <= top + 1e-9):
        raise RangeError(
            f"the forecast's start stage {h0:.3f} m lies outside the storage relation "
            f"({lo:.2f} to {hi:.2f} m"
            + (f", extended to {top:.2f} m" if top > hi else "")
            + "); check the stage's units and datum, or give --start-stage",
            file=site.path,
        )


def forecast_drawdown(
    site: Site,
    start: str | None = None,
    days: int | None = None,
    scenario: str | None = None,
    members: int | None = None,
    rng: _np.random.Generator | None = None,
    *,
    seed: int | None = None,
    start_stage_m: float | None = None,
    records: Records | None = None,
    storage: StorageCurve | None = None,
    rating: RatingFit | None = None,
    seepage: SeepageFit | None = None,
    evaporation_m: _pd.Series | None = None,
    progress: bool = False,
) -> Forecast:
    """Drought drawdown forecast of ``site``: an ensemble of the whole balance from a start day.

    Parameters
    ----------
    site : Site
        The validated site file: ``[storage]``, a stage series (for the start state unless
        ``start_stage_m`` is given), the ``[outlet]`` rating when the lake has an outlet,
        ``[levels]`` and ``[drawdown]``.
    start : str, optional
        ISO date of the start day (default ``[drawdown] start``, else the last recorded stage).
    days : int, optional
        Horizon in days (default ``[drawdown] days``).
    scenario : str, optional
        ``"replay"``, ``"percentile"``, ``"stochastic"`` or ``"constant"`` (default
        ``[drawdown] scenario``).
    members : int, optional
        Members of the stochastic scenario, or of any scenario when uncertainty is sampled
        (default ``[drawdown] members``).
    rng : numpy.random.Generator, optional
        Source of every random draw (default: seeded with ``seed``).
    seed : int, optional
        Seed when no ``rng`` is given (default ``[site] seed``); written into the result.
    start_stage_m : float, optional
        Stage at the start (m; default ``[drawdown] start_stage``, else the record that day).
    records, storage, rating, seepage : optional
        Results already at hand (default: loaded, fitted or estimated from the site).
    evaporation_m : pandas.Series, optional
        Daily lake evaporation (m per day) of the record (default: :func:`lake_evaporation`).
    progress : bool
        A progress bar on stderr during the run.

    Returns
    -------
    Forecast
        Stage percentiles, probability below each level, days to crossing, volume remaining,
        sentences; the unrestricted run beside a restricted one. See ``docs/drawdown.md``.

    Notes
    -----
    The dead level (withdrawals and releases stop below it) is the ``[levels]`` entry named by
    ``[drawdown] dead_level``, else the level named ``dead``, else the bottom of the storage
    relation. With ``sample_uncertainty`` each member draws an evaporation factor
    ``1 + s z`` (``s`` = ``[uncertainty] evaporation``, 10 % when not given) and one of
    ``rating_variants`` ratings sampled from the rating's covariance.
    """
    import numpy as np
    import pandas as pd

    from .drawdown import build_forcing, run_forecast
    from .errors import ConfigError, FitError, LakebalanceError

    opts = site.drawdown
    notes: list[str] = []
    if records is None:
        records = load_records(site)
    if storage is None:
        storage = load_storage(site)
    if rating is None and site.outlet is not None:
        rating = fit_rating(site)
    if seed is None and rng is None:
        seed = site.site.seed
    if rng is None:
        rng = np.random.default_rng(seed)
    scenario = scenario or opts.scenario
    if scenario not in ("replay", "percentile", "stochastic", "constant"):
        raise ConfigError(
            f"unknown drawdown scenario {scenario!r}: replay, percentile, stochastic or constant",
            file=site.path,
        )
    days = int(days if days is not None else opts.days)
    n_members = int(members if members is not None else opts.members)
    if days < 1 or n_members < 1:
        raise ConfigError("the drawdown horizon and the members must be at least 1", file=site.path)
    daily = records.daily
    stage = daily["stage"] if "stage" in daily.columns else None
    start = start or opts.start
    if start is None:
        if stage is None or not stage.notna().any():
            raise ConfigError(
                "the drawdown forecast needs a start date and stage ([drawdown] start, "
                "start_stage) when there is no stage record",
                file=site.path,
            )
        start_ts = pd.Timestamp(stage.last_valid_index())
    else:
        try:
            start_ts = pd.Timestamp(start).normalize()
        except (ValueError, TypeError):
            raise ConfigError(
                f"drawdown start {start!r} is not an ISO date", file=site.path
            ) from None
    h0 = start_stage_m if start_stage_m is not None else opts.start_stage
    if h0 is None:
        h0 = float(stage.get(start_ts, np.nan)) if stage is not None else float("nan")
        if not np.isfinite(h0):
            raise ConfigError(
                f"no recorded stage on {start_ts.date()}: give the start stage "
                "([drawdown] start_stage or --start-stage)",
                file=site.path,
            )
    _check_start_stage(float(h0), storage, site)
    history = drawdown_history(site, records, evaporation_m)
    if scenario != "constant" and "inflow_m3s" not in history.columns:
        raise ConfigError(
            f"the '{scenario}' scenario needs an inflow record; use the 'constant' scenario",
            file=site.path,
        )
    for term in ("rain_m", "evaporation_m"):
        if term not in history.columns:
            notes.append(f"no {term.split('_')[0]} record: taken as zero")
    forcing = build_forcing(
        history,
        start_ts,
        days,
        scenario,  # type: ignore[arg-type]
        members=n_members,
        rng=rng,
        percentile=opts.percentile,
        inflow_m3s=opts.inflow,
        method=opts.stochastic,
        block_days=opts.block_days,
    )
    levels = dict(site.levels)
    dead_name = opts.dead_level or ("dead" if "dead" in levels else None)
    if dead_name is not None and dead_name not in levels:
        raise ConfigError(
            f"[drawdown] dead_level '{dead_name}' is not a [levels] name", file=site.path
        )
    dead = levels[dead_name] if dead_name is not None else float(storage.min_stage_m)
    seep_fn = None
    if seepage is None and opts.seepage and stage is not None:
        try:
            balance = close_balance(
                site,
                draws=0,
                records=records,
                storage=storage,
                rating=rating,
                evaporation_m=history.get("evaporation_m"),
            )
            seepage = estimate_seepage(site, balance=balance, records=records)
        except LakebalanceError as exc:
            notes.append(f"seepage left out: {exc.message}")
    if seepage is not None:
        seep_fn = seepage.rate_m3s
        notes.append("net seepage to groundwater from the law fitted to the balance residual")
    lo = float(storage.min_stage_m)
    hi = max(float(storage.max_stage_m), max(levels.values(), default=lo) + 1.0, float(h0) + 1.0)
    if storage.above != "extend":
        hi = float(storage.max_stage_m)

    def area(x):
        return storage.area(x, warn=False)

    def volume(x):
        return storage.volume(x, warn=False)

    if rating is not None:
        outflow = rating.discharge
    else:
        notes.append("no [outlet]: the lake has no outflow but its withdrawals and releases")

        def outflow(x):
            return np.zeros_like(np.asarray(x, dtype=float))

    variants_fn = None
    n_var = 0
    factor = None
    if opts.sample_uncertainty:
        sigma = site.uncertainty.evaporation
        if sigma is None:
            sigma = 0.10
            notes.append("evaporation error taken as 10 % (1 sigma): assumed, no source")
        factor = np.maximum(1.0 + sigma * rng.standard_normal(n_members), 0.0)
        if rating is not None:
            try:
                params = rating.sample_params(rng, max(1, int(opts.rating_variants)))
                n_var = params.shape[0]

                def variants_fn(x, params=params):
                    grid = np.broadcast_to(np.asarray(x, dtype=float), (params.shape[0], len(x)))
                    return rating.discharge_with(params, grid)

            except FitError as exc:
                notes.append(f"rating uncertainty left out: {exc.message}")
    bar = None
    callback = None
    if progress:
        from tqdm import tqdm

        bar = tqdm(total=days, unit="day", desc="drawdown", leave=False)

        def callback(done: int) -> None:
            bar.update(done - bar.n)

    try:
        result = run_forecast(
            area=area,
            volume=volume,
            outflow=outflow,
            stage_range_m=(lo, hi),
            forcing=forcing,
            start=start_ts,
            start_stage_m=float(h0),
            scenario=scenario,
            levels=levels,
            dead_level_m=dead,
            seepage=seep_fn,
            demand_m3s=opts.demand,
            environmental_release_m3s=opts.environmental_release,
            restriction=[(r.trigger, r.cut) for r in opts.restriction],
            outflow_variants=variants_fn,
            variants=n_var,
            evaporation_factor=factor,
            rng=rng,
            seed=seed,
            progress=callback,
            notes=notes,
        )
    finally:
        if bar is not None:
            bar.close()
    return result
