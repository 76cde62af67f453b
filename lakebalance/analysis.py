"""One analysis object per site: every step of the job, each computed once on first use.

>>> lake = open_site("data_demo/site.toml")          # doctest: +SKIP
>>> lake.balance.water_years()                          # doctest: +SKIP

:class:`Lake` is the one place where a site's chain is assembled: the records, the storage
relation, the rating, lake evaporation, the balance, its flags and seepage, the dynamics and the
drawdown forecast. Every command, the report, the batch runner and the notebook go through it, so
that one site is read, fitted and closed once, in one way. The computations themselves live in
their modules (pure functions on data and options objects); this module only wires them.

A step that cannot run raises its :class:`~lakebalance.errors.LakebalanceError` when asked for;
:meth:`Lake.get` returns None instead and :meth:`Lake.reason` says why, once, in one line (what the
report shows). Only ``LakebalanceError`` is turned into a reason: anything else is a bug and
propagates.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .config import Site, load_site
from .errors import ConfigError, LakebalanceError

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from .balance import Balance, ClosureOptions, DailyTerms, TermErrors
    from .drawdown import Forecast
    from .drawdown.hindcast import Hindcast
    from .drawdown.yield_ import YieldStudy
    from .dynamics import Dynamics, WhatIfRequest
    from .evaporation.lake import EvaporationResult
    from .fieldchecks import FieldChecks
    from .flags import Flags
    from .laws import LakeLaws
    from .outlet.fit import RatingFit
    from .outlet.periods import DatedRating
    from .records import Records
    from .seepage import SeepageFit
    from .storage import StorageCurve
    from .surveys import DatedStorage

__all__ = ["Lake", "open_site", "STEPS"]

#: The steps of the job in the order they run, with the words the report uses for each.
STEPS = {
    "records": "the records",
    "storage": "the storage relation",
    "rating": "the rating",
    "evaporation": "lake evaporation",
    "balance": "the balance",
    "flags": "the flags",
    "seepage": "the seepage estimate",
    "dynamics": "the dynamics",
    "forecast": "the drawdown forecast",
    "yield": "the yield study",
    "hindcast": "the hindcast",
    "field_checks": "the field checks",
    "surveys": "the dated surveys",
    "ratings": "the dated ratings",
}


def open_site(path: str | Path, **settings: Any) -> Lake:
    """Read and validate a site file and return its analysis object.

    Parameters
    ----------
    path : str or Path
        The site file (TOML; see ``docs/site-file.md``).
    **settings
        ``seed``, ``forecast_seed``, ``draws``, ``members``, ``forecast_start``, ``progress``:
        see :class:`Lake`.
    """
    return Lake(load_site(path), **settings)


def _with_file(exc: LakebalanceError, file: Path | str | None) -> LakebalanceError:
    """``exc`` with ``file`` filled in when the computation did not know it."""
    if exc.file is None and file is not None:
        exc.file = str(file)
    return exc


class Lake:
    """The analysis of one site: its steps as attributes, each computed once and kept.

    Parameters
    ----------
    site : Site
        The validated site file (:func:`lakebalance.config.load_site`).
    seed : int, optional
        Seed of every random draw (default ``[site] seed``); written into every result.
    forecast_seed : int, optional
        Seed of the drawdown forecast's draws (default: ``seed``). The report draws its outlook
        from ``seed + 1``, so that its streams are not those of the balance.
    draws : int, optional
        Monte Carlo draws of the balance (default ``[uncertainty] draws``; 0 = no bands).
    members : int, optional
        Ensemble members of the default forecast (default ``[drawdown] members``).
    forecast_start : str, optional
        ISO date the default forecast starts from (default ``[drawdown] start``, else the last
        recorded stage).
    progress : bool
        Show progress bars on stderr (reading, forecast).

    Notes
    -----
    The object holds results, not state that changes them: asking for a step twice returns the
    same object. Warnings raised while a step runs are kept (:meth:`messages`) and passed on.
    """

    def __init__(
        self,
        site: Site,
        *,
        seed: int | None = None,
        forecast_seed: int | None = None,
        draws: int | None = None,
        members: int | None = None,
        forecast_start: str | None = None,
        progress: bool = False,
    ) -> None:
        self.site = site
        self.seed = int(site.site.seed if seed is None else seed)
        self.forecast_seed = self.seed if forecast_seed is None else int(forecast_seed)
        if draws is not None and (draws < 0 or draws == 1):
            raise ConfigError(
                f"Monte Carlo draws must be 0 (no bands) or at least 2 for a 5-95% band, got {draws}",
                file=site.path,
            )
        if draws is not None:  # the declared range of [uncertainty] draws applies here too
            try:
                dataclasses.replace(site.uncertainty, draws=int(draws))
            except LakebalanceError as exc:
                raise _with_file(exc, site.path) from None
        self.draws = int(site.uncertainty.draws if draws is None else draws)
        self.members = members
        self.forecast_start = forecast_start
        #: stage (m) the default forecast starts from, when not the record's that day (e.g. the
        #: record corrected for a datum shift the field checks confirm)
        self.forecast_start_stage: float | None = None
        self.progress = progress
        self._results: dict[Any, Any] = {}
        self._failures: dict[Any, LakebalanceError] = {}
        self._reasons: dict[Any, str] = {}
        self._messages: dict[Any, tuple[str, ...]] = {}
        self.computed: dict[str, int] = {}  # step -> times computed (a test checks: once)

    @classmethod
    def with_results(cls, site: Site, /, *, settings: dict | None = None, **results: Any) -> Lake:
        """A Lake whose named steps are already known (e.g. records built in memory, a storage
        relation from analytic laws); the other steps are computed from them as usual.

        Parameters
        ----------
        site : Site
            The site file.
        settings : dict, optional
            Keyword arguments of :class:`Lake` (``seed``, ``draws``, ...).
        **results
            Step name (``records``, ``storage``, ``rating``, ...) → its result.
        """
        unknown = set(results) - set(STEPS)
        if unknown:
            raise ValueError(f"unknown steps {sorted(unknown)}; steps are {', '.join(STEPS)}")
        lake = cls(site, **(settings or {}))
        lake._results.update(results)
        return lake

    def __repr__(self) -> str:
        done = ", ".join(str(k) for k in self._results) or "nothing yet"
        return f"<Lake {self.site.site.name!r} (seed {self.seed}); computed: {done}>"

    # ---- the step machinery ----------------------------------------------------------------
    def _step(self, key: Any, compute: Callable[[], Any]) -> Any:
        if key in self._results:
            return self._results[key]
        if key in self._failures:
            raise self._failures[key]
        name = key[0] if isinstance(key, tuple) else key
        self.computed[name] = self.computed.get(name, 0) + 1
        with warnings.catch_warnings(record=True) as seen:
            warnings.simplefilter("always")
            try:
                value = compute()
            except LakebalanceError as exc:
                exc = _with_file(exc, self.site.path)
                dependency = next(
                    (k for k, f in self._failures.items() if f is exc and k != key), None
                )
                self._failures[key] = exc
                self._reasons[key] = (
                    f"needs {STEPS.get(_name(dependency), _name(dependency))}, which is not "
                    f"available: {self._reasons[dependency]}"
                    if dependency is not None
                    else exc.one_line().removeprefix("error: ")
                )
                failed = exc
            else:
                failed = None
        self._messages[key] = tuple(dict.fromkeys(f"{w.message}" for w in seen))
        for w in seen:  # passed on to whoever is listening
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno, source=w.source)
        if failed is not None:
            raise failed
        self._results[key] = value
        return value

    def get(self, step: str) -> Any:
        """The result of ``step`` (a name of :data:`STEPS`), or None when it cannot run (then
        :meth:`reason` says why). Optional parts that a site does not have (no ``[outlet]``)
        are None too, with no reason."""
        try:
            if step == "yield":
                return self.yield_()
            return (
                getattr(self, step)()
                if step in ("dynamics", "forecast", "hindcast")
                else getattr(self, step)
            )
        except LakebalanceError:
            return None

    def reason(self, step: str) -> str | None:
        """Why ``step`` could not run (one line), or None when it ran or was not asked for."""
        return self.unavailable.get(step)

    @property
    def unavailable(self) -> dict[str, str]:
        """Every step asked for that could not run, with its reason."""
        return {_name(k): why for k, why in self._reasons.items()}

    def messages(self) -> list[str]:
        """Every warning raised while the steps ran, once each, in order."""
        seen: dict[str, None] = {}
        for texts in self._messages.values():
            seen.update(dict.fromkeys(texts))
        return list(seen)

    # ---- steps -----------------------------------------------------------------------------
    @property
    def records(self) -> Records:
        """Every series read, converted to SI, checked and aggregated to days."""

        def compute() -> Records:
            from .io import read_records

            return _with_offset_periods(self, read_records(self.site, progress=self.progress))

        return self._step("records", compute)

    @property
    def field_checks(self) -> FieldChecks | None:
        """The staff-gauge checks against the logger (records as corrected), the corrections
        they propose and their judgment of the flagged datum shifts; None without checks."""

        def compute() -> FieldChecks | None:
            from .fieldchecks import FieldChecks, compare_checks, judge_shifts, size_corrections

            records = self.records
            if records.check_readings is None or "stage" not in records.daily.columns:
                return None
            options = self.site.field_checks
            comp = compare_checks(
                records.check_readings, records.daily["stage"], records.subdaily_stage
            )
            flags = self.get("flags")
            shifts = [
                (f.start, float(f.magnitude_m))
                for f in (flags.of_kind("datum_shift") if flags is not None else ())
                if f.magnitude_m is not None and not f.accepted
            ]
            proposals = size_corrections(
                comp,
                records.daily["stage"],
                options,
                step_days=[d for d, _ in shifts],
                accepted=self.site.correction,
                residual_with=_preliminary_residual(self, records),
            )
            notes = []
            if flags is None and self.reason("flags"):
                notes.append(f"no flags to judge: {self.reason('flags')}")
            return FieldChecks(
                comparison=comp,
                proposals=proposals,
                judgments=judge_shifts(comp, shifts, options),
                tolerance_m=2.0 * options.reading_error,
                notes=tuple(notes),
            )

        return self._step("field_checks", compute)

    @property
    def storage(self) -> StorageCurve:
        """The stage–area–storage relation (``[storage]``), in SI units."""

        def compute() -> StorageCurve:
            from .io.storage import read_storage

            if self.site.storage is None:
                raise ConfigError("the site file has no [storage] section", file=self.site.path)
            surveys = self.surveys
            if surveys is not None:
                return surveys.latest
            return read_storage(self.site.storage, site_file=self.site.path)

        return self._step("storage", compute)

    @property
    def surveys(self) -> DatedStorage | None:
        """The dated surveys (``[storage] date`` and ``[[storage.survey]]``), interpolated in time;
        None with one survey. :attr:`storage` is then the latest, and the balance uses each
        day's relation."""

        def compute() -> DatedStorage | None:
            from .io.storage import read_surveys

            if self.site.storage is None:
                return None
            return read_surveys(self.site.storage, site_file=self.site.path)

        return self._step("surveys", compute)

    def survey(self, file: Path) -> StorageCurve:
        """Another survey read with the ``[storage]`` settings (e.g. ``--compare``)."""
        from .io.storage import read_storage

        if self.site.storage is None:
            raise ConfigError("the site file has no [storage] section", file=self.site.path)
        return read_storage(self.site.storage, site_file=self.site.path, file=file)

    @property
    def location(self) -> tuple[float, float] | None:
        """Latitude and longitude of the lake (decimal degrees, WGS 84): ``[site]`` when both are
        given, else the centroid of the survey's contours or outline, else None."""
        info = self.site.site
        if info.latitude is not None and info.longitude is not None:
            return float(info.latitude), float(info.longitude)
        if self.site.storage is None:
            return None
        from .io.storage import storage_location

        return storage_location(self.site.storage)

    @property
    def rating(self) -> RatingFit | None:
        """The outlet rating fitted to the spot gaugings, or None when the site has no
        ``[outlet]``. With dated rating periods (``[[outlet.period]]``) it is the rating in force
        now (the last period's); :attr:`ratings` holds them all."""

        def compute() -> RatingFit | None:
            import numpy as np

            from .errors import FitError, OptionError
            from .io.gaugings import read_gaugings
            from .outlet.fit import fit_rating_curve
            from .outlet.laws import law_from_options

            outlet = self.site.outlet
            if outlet is None:
                return None
            if outlet.period:
                dated = self.ratings
                return None if dated is None else dated.latest
            options = outlet.fit_options()
            law = law_from_options(outlet)
            gaugings = read_gaugings(outlet)
            rng = np.random.default_rng(self.seed) if options.bootstrap > 0 else None
            try:
                return fit_rating_curve(
                    law,
                    gaugings.stage_m,
                    gaugings.discharge_m3s,
                    dates=gaugings.date,
                    weights=gaugings.weight,
                    options=options,
                    rng=rng,
                )
            except FitError as exc:
                raise _with_file(exc, gaugings.file) from None
            except OptionError as exc:  # a key of [outlet] the law does not accept: its line
                from .config import site_key_line

                if exc.file is None:
                    exc.file = str(self.site.path)
                    exc.line = site_key_line(self.site, "outlet", exc.option)
                raise

        return self._step("rating", compute)

    @property
    def ratings(self) -> DatedRating | None:
        """The dated ratings of ``[[outlet.period]]``, each fitted from its own period's gaugings
        (:mod:`lakebalance.outlet.periods`); None without periods. The balance applies each
        day's rating."""

        def compute() -> DatedRating | None:
            import numpy as np

            from .errors import FitError
            from .io.gaugings import read_gaugings
            from .outlet.laws import law_from_options
            from .outlet.periods import fit_rating_periods

            outlet = self.site.outlet
            if outlet is None or not outlet.period:
                return None
            options = outlet.fit_options()
            gaugings = read_gaugings(outlet)
            rng = np.random.default_rng(self.seed) if options.bootstrap > 0 else None
            try:
                return fit_rating_periods(
                    law_from_options(outlet),
                    gaugings.stage_m,
                    gaugings.discharge_m3s,
                    gaugings.date,
                    outlet.period,
                    weights=gaugings.weight,
                    options=options,
                    rng=rng,
                )
            except FitError as exc:
                raise _with_file(exc, gaugings.file) from None

        return self._step("ratings", compute)

    @property
    def evaporation(self) -> EvaporationResult:
        """Daily lake evaporation by every method the site's weather allows, and the one chosen;
        with the daily volumes (depth × area) when the storage relation and stage are known."""
        return self._step("evaporation", lambda: self._evaporation(None))

    def evaporation_by(self, method: str | None) -> EvaporationResult:
        """Lake evaporation by ``method`` (default: ``[evaporation] method``, :attr:`evaporation`)."""
        if method is None or method == self.site.evaporation.method:
            return self.evaporation
        return self._step(("evaporation", method), lambda: self._evaporation(method))

    def _evaporation(self, method: str | None) -> EvaporationResult:
        import numpy as np
        import pandas as pd

        from .evaporation.lake import WEATHER_ROLES, estimate_lake_evaporation, surface_volume_m3

        records = self.records
        site = self.site
        opts = site.evaporation
        weather, averaged = {}, []
        for role in WEATHER_ROLES:
            mean = records.mean(role)
            if mean is None:
                continue
            weather[role] = mean
            if len(records.keys(role)) > 1:
                averaged.append(f"{role} is the daily mean of {len(records.keys(role))} series")
        frame = pd.DataFrame(weather, index=records.daily.index)
        if method is not None and method != opts.method:
            opts = dataclasses.replace(opts, method=method)
        storage = self.get("storage")
        daily = records.daily
        area_m2 = depth_m = None
        if storage is not None and "stage" in daily.columns:
            stage = daily["stage"].to_numpy()
            area_m2 = pd.Series(storage.area(stage), index=daily.index)
            if hasattr(storage, "volume"):  # mean depth = volume / area, day by day
                volume = storage.volume(stage, warn=False)
                with np.errstate(invalid="ignore", divide="ignore"):
                    depth_m = np.where(area_m2.to_numpy() > 0, volume / area_m2.to_numpy(), 0.0)
        # Ice periods declared for the record ([[period]] kind = "ice") are ice for the
        # evaporation too, with those of [evaporation] ice_periods; inferring ice from the air
        # temperature (ice = "from_air_temperature") is the evaporation's own rule.
        ice_mask = None
        from .periods import days_of, periods_of_kind

        declared = periods_of_kind(site.period, "ice")
        if declared and opts.ice != "from_air_temperature":
            from .evaporation import ice_mask_from_periods

            index = pd.DatetimeIndex(frame.index)
            ice_mask = days_of(declared, index)
            if opts.ice == "declared":
                ice_mask = ice_mask | np.asarray(
                    ice_mask_from_periods(index, opts.ice_periods, site_file=str(site.path)),
                    dtype=bool,
                )
            averaged.append(
                f"{int(ice_mask.sum())} days under ice from the declared periods ([[period]] "
                'kind = "ice"): evaporation is the sublimation rate there'
            )
        result = estimate_lake_evaporation(
            frame,
            opts,
            latitude_deg=site.site.latitude,
            elevation_m=site.site.elevation,
            site_file=str(site.path),
            mean_depth_m=depth_m,
            area_m2=None if area_m2 is None else area_m2.to_numpy(),
            water_year_start=site.site.water_year_start,
            ice_mask=ice_mask,
        )
        changes: dict[str, Any] = {}
        frozen_pan = sum(
            f.count for f in records.findings if f.series == "pan" and "'ice'" in f.detail.lower()
        )
        if frozen_pan and opts.ice == "none":
            averaged.append(
                f"the pan record has {frozen_pan} 'ICE' days, filled as open water: declare the "
                "ice periods ([evaporation] ice = 'declared') or infer them "
                "(ice = 'from_air_temperature') so that they count as ice"
            )
        if averaged:
            changes["notes"] = (*result.notes, *averaged)
        if area_m2 is not None:
            changes["evaporation_m3"] = surface_volume_m3(result.depth_m, area_m2).rename(
                "evaporation_m3"
            )
            rain = records.mean("rain")
            if rain is not None:
                changes["rain_m3"] = surface_volume_m3(rain, area_m2).rename("rain_m3")
                gauges = len(records.keys("rain"))
                if gauges > 1 and "rain" not in WEATHER_ROLES:
                    averaged.append(f"rain is the daily mean of {gauges} series")
                    changes["notes"] = (*result.notes, *averaged)
        return dataclasses.replace(result, **changes) if changes else result

    def _evaporation_depth(self) -> pd.Series | None:
        """Daily lake evaporation (m/d) when the site records weather for it, else None."""
        from .evaporation.lake import WEATHER_ROLES

        records = self.records
        if not any(records.has(r) for r in WEATHER_ROLES if r != "rain"):
            return None
        return self.evaporation.depth_m

    @property
    def term_errors(self) -> TermErrors:
        """The Monte Carlo term errors: ``[uncertainty]`` over the documented defaults.

        The stage resolution comes from ``[uncertainty] stage_resolution`` (m), else from the
        stage series' ``resolution`` (in its own units), else the default."""
        from .balance import TermErrors
        from .units import conversion

        spec = next(iter(self.site.series_of("stage")), None)
        resolution = None
        if spec is not None and spec.resolution is not None:
            resolution = float(conversion(spec.units, "length", "stage").scale * spec.resolution)
        spread = None
        if self.site.uncertainty.evaporation_error == "method_spread":
            spread = self._evaporation_spread()
        return TermErrors.from_options(self.site.uncertainty, resolution, spread)

    def _evaporation_spread(self) -> float:
        """The relative spread between the evaporation methods over complete water years (-),
        for ``[uncertainty] evaporation_error = "method_spread"``."""
        if self._evaporation_depth() is None:
            raise ConfigError(
                "[uncertainty] evaporation_error = 'method_spread' needs lake evaporation from "
                "weather series"
            )
        spread = self.evaporation.relative_spread()
        if spread is None:
            raise ConfigError(
                "[uncertainty] evaporation_error = 'method_spread' needs two or more evaporation "
                "methods over at least one complete water year"
            )
        return spread

    @property
    def balance(self) -> Balance:
        """The daily water balance with Monte Carlo bands (``draws`` of them)."""
        return self._step("balance", self._balance)

    def _terms(
        self,
        records: Records,
        evaporation_m: pd.Series | None,
        notes: list[str] | None = None,
    ) -> DailyTerms:
        """The balance's daily terms from ``records`` (stage, flows, depths; SI); what was
        decided on the way is appended to ``notes``."""
        import pandas as pd

        from .balance import DailyTerms, boundary_stage_from_readings

        notes = [] if notes is None else notes
        daily = records.daily
        info = {s.key: s for s in records.series}
        inflows = {info[k].name if k in info else k: daily[k] for k in records.keys("inflow")}
        rain_keys = records.keys("rain")
        if len(rain_keys) > 1:
            notes.append(f"rain is the daily mean of {len(rain_keys)} gauges")
        rain_m = records.mean("rain")
        if rain_m is not None and evaporation_m is not None:
            rain_m = self._precipitation_on_ice(rain_m, notes)
        return DailyTerms(
            stage_m=daily["stage"],
            inflow_m3s=inflows,
            rain_m=rain_m,
            evaporation_m=evaporation_m,
            withdrawal_m3s=records.total("withdrawal") if records.has("withdrawal") else None,
            release_m3s=records.total("release") if records.has("release") else None,
            boundary_stage_m=(
                boundary_stage_from_readings(records.subdaily_stage, pd.DatetimeIndex(daily.index))
                if records.subdaily_stage is not None
                else None
            ),
            subdaily_stage_m=records.subdaily_stage,
        )

    def _closure_options(self) -> ClosureOptions:
        from .balance import ClosureOptions

        site = self.site
        stage_spec = next(iter(site.series_of("stage")), None)
        return ClosureOptions(
            boundary_rule=site.uncertainty.boundary_rule,
            water_year_start=site.site.water_year_start,
            subdaily_coverage=stage_spec.coverage if stage_spec is not None else 0.8,
        )

    def _graded(
        self, balance: Balance, terms: DailyTerms, laws: Any, outflow: Any, options: Any
    ) -> Balance:
        """The balance with the grade of every term on every day and the infilled table."""
        import pandas as pd

        from .balance import grade_balance
        from .periods import days_of, periods_of_kind

        records = self.records
        stage_est = None
        if records.estimated is not None and "stage" in records.estimated.columns:
            stage_est = records.estimated["stage"].reindex(records.daily.index).fillna("")
            stage_est = stage_est.to_numpy(dtype=object)
        index = pd.DatetimeIndex(balance.daily.index)
        ice = {}
        for p in periods_of_kind(self.site.period, "ice"):
            if p.how_outflow != "rating":
                how = (
                    f"{p.fraction:g} of the open-water rating under ice"
                    if p.how_outflow == "fraction"
                    else "interpolated across the ice period"
                )
                ice[how] = ice.get(how, False) | days_of(p, index)
        return grade_balance(
            balance,
            terms,
            volume_fn=laws.volume,
            area_fn=laws.area,
            outflow_fn=outflow,
            options=options,
            stage_estimated=stage_est,
            after_closure=lambda b: _ice_outflow(b, self.site.period),
            outflow_estimated=ice,
        )

    def _balance(self) -> Balance:
        import numpy as np

        from .balance import (
            OutletParameters,
            add_uncertainty,
            close_daily,
        )

        site, records = self.site, self.records
        daily = records.daily
        if "stage" not in daily.columns:
            raise ConfigError("the water balance needs a stage series ([series.stage])")
        storage, rating = self.storage, self.rating
        notes: list[str] = []
        evaporation_m = self._evaporation_depth()
        if evaporation_m is not None:
            notes.append(f"lake evaporation by the {self.evaporation.method} method")
        terms = self._terms(records, evaporation_m, notes)
        options = self._closure_options()
        try:
            storage.check_record(daily["stage"].to_numpy(dtype=float), daily.index)
        except LakebalanceError as exc:
            where = site.storage.file if site.storage is not None else None
            raise _with_file(exc, where or site.path) from None
        laws = self.laws_without_seepage
        surveys = self.surveys
        if surveys is not None:  # each day's relation, interpolated between the surveys
            lo = storage.min_stage_m if storage.below == "error" else -np.inf
            hi = storage.max_stage_m if storage.above == "error" else np.inf
            laws = dataclasses.replace(
                laws,
                volume=surveys.volume_relation((lo, hi)),
                area=surveys.area_relation((lo, hi)),
            )
            notes.append(
                f"storage: {len(surveys.dates)} surveys ({', '.join(surveys.dates)}), each day's "
                "relation interpolated linearly in time between them"
            )
        outflow = None if rating is None else rating.discharge
        dated = self.ratings
        if dated is not None:
            outflow = dated
            notes.append(
                f"outflow: {len(dated.fits)} rating periods (from "
                + ", ".join(s or "the start" for s in dated.starts)
                + "), each day by its own"
            )
        balance = close_daily(
            terms, volume_fn=laws.volume, area_fn=laws.area, outflow_fn=outflow, options=options
        )
        balance = _ice_outflow(balance, site.period)
        balance = self._graded(balance, terms, laws, outflow, options)
        if self.draws > 0:
            outlet = None
            if dated is not None:
                cov = dated.cov
                if np.all(np.isfinite(cov)):
                    outlet = OutletParameters(
                        values=dated.vector,
                        discharge_with=dated.discharge_with,
                        cov=cov,
                        names=dated.param_names,
                        dated=True,
                    )
                else:
                    notes.append("rating covariance not finite: rating parameter error left out")
            elif rating is not None:
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
                area_fn=laws.area,
                outflow_fn=outflow,
                outlet=outlet,
                errors=self.term_errors,
                draws=self.draws,
                rng=np.random.default_rng(self.seed),
                seed=self.seed,
                rating_variants=site.uncertainty.rating_variants,
            )
        return dataclasses.replace(balance, notes=(*balance.notes, *notes))

    def _precipitation_on_ice(self, rain_m: pd.Series, notes: list[str]) -> pd.Series:
        """Rain and snow on the ice as ``[evaporation] precipitation_on_ice`` says."""
        from .evaporation.ice import precipitation_on_ice

        ice = self.evaporation.ice
        rule = self.site.evaporation.precipitation_on_ice
        if ice is None or not ice.any() or rule == "as_it_falls":
            return rain_m
        notes.append("precipitation on the ice held until the first open day (at_break_up)")
        return precipitation_on_ice(
            rain_m, ice.reindex(rain_m.index, fill_value=False).to_numpy(), rule
        )

    @property
    def flags(self) -> Flags:
        """Dated, sized and explained flags on the residual of the daily balance."""

        def compute() -> Flags:
            from .flags import detect_flags

            daily = self.balance.daily
            return detect_flags(
                daily,
                self.site.flags,
                sigma_m3=self.balance.residual_sigma_m3(),
                corrections=tuple(self.site.correction),
                exclude=self.records.flatline_days("stage", daily.index),
                errors=self.balance.error_model,
            )

        return self._step("flags", compute)

    @property
    def seepage(self) -> SeepageFit:
        """Net groundwater exchange estimated from the residual of the daily balance."""

        def compute() -> SeepageFit:
            import pandas as pd

            from .seepage import fit_seepage, select_days

            options = self.site.seepage
            balance = self.balance
            daily = balance.daily
            flagged = None
            if options.exclude_flags:
                flagged = self.flags.mask(daily.index) | pd.Series(
                    self.records.flatline_days("stage", daily.index), index=daily.index
                )
            spill = self.site.levels.get("spill") if self.site.outlet is None else None
            mask, counts = select_days(daily, options, flagged=flagged, spill_stage_m=spill)
            chosen = mask.to_numpy()
            used = daily[chosen]
            sigma = balance.residual_sigma_m3()
            return fit_seepage(
                used["stage_m"],
                used["residual_m3"],
                model=options.model,
                area_stage_m=daily["stage_m"].to_numpy(),
                area_m2=daily["area_m2"].to_numpy(),
                levels=dict(self.site.levels),
                other_sigma_m3=None if sigma is None else sigma[chosen],
                persistent_cov_m6=_persistent_errors(balance, chosen, used["residual_m3"]),
                selection=counts,
            )

        return self._step("seepage", compute)

    # ---- laws, dynamics, forecast ---------------------------------------------------------
    @property
    def laws_without_seepage(self) -> LakeLaws:
        """Storage relation, rating and named levels (no seepage law)."""
        from .laws import LakeLaws

        return LakeLaws.from_fits(self.storage, self.rating, None, self.site.levels)

    def laws(self, *, seepage: bool = True) -> tuple[LakeLaws, str | None]:
        """The lake's laws, with the seepage law when asked and when it can be estimated.

        Returns the laws and, when the seepage law was asked for but could not be estimated,
        the reason (the laws then carry none).
        """
        import numpy as np

        from .errors import DataQualityWarning

        laws = self.laws_without_seepage
        if not seepage:
            return laws, None
        choice = self.site.seepage.in_forecasts
        if choice == "none":
            return laws, "[seepage] in_forecasts = 'none'"
        fit = self.get("seepage")
        if fit is None:
            return laws, self.reason("seepage")
        if choice == "auto" and not fit.law_supported:
            why = (
                "k is not positive and told from zero"
                if fit.model == "linear"
                else "the rate cannot be told from zero"
            )
            message = (
                f"the fitted seepage law is not carried into the dynamics and the forecast: {why}; "
                "choose [seepage] in_forecasts = 'constant' (the rate at the mean stage), 'law' "
                "(the fit as it is) or 'none'"
            )
            warnings.warn(message, DataQualityWarning, stacklevel=2)
            return laws, message.removeprefix(
                "the fitted seepage law is not carried into the dynamics and the forecast: "
            )
        if choice == "constant":
            rate = fit.constant_rate_m3s()

            def constant(h, rate=rate):
                return np.full(np.shape(h), rate)

            return dataclasses.replace(laws, seepage=constant), None
        return dataclasses.replace(laws, seepage=fit.rate_m3s), None

    def dynamics(
        self,
        inflow_m3s: float | None = None,
        *,
        what_if: WhatIfRequest | None = None,
        stages: dict[str, float] | None = None,
        use_seepage: bool = True,
    ) -> Dynamics:
        """Residence, response and equilibrium analysis, with optional what-ifs.

        Parameters
        ----------
        inflow_m3s : float, optional
            Sustained inflow, m³/s (default: the mean gauged inflow of the record).
        what_if : WhatIfRequest, optional
            Changed rating parameters (SI), demand (m³/s) or evaporation factor (-).
        stages : dict, optional
            Named stages (m) for the response times, beside the levels and the record's
            10th, 50th and 90th percentile stages.
        use_seepage : bool
            Include the net seepage law estimated from the residual, when it can be estimated.
        """
        key = ("dynamics", inflow_m3s, repr(what_if), repr(stages), use_seepage)

        def compute() -> Dynamics:
            from .dynamics import dynamics_of_lake

            balance = self.balance
            laws, why = self.laws(seepage=use_seepage)
            notes = (f"seepage left out: {why}",) if why else ()
            return dynamics_of_lake(
                laws,
                balance.daily,
                balance.water_year_start,
                inflow_m3s=inflow_m3s,
                what_if=what_if,
                stages=stages,
                notes=notes,
            )

        return self._step(key, compute)

    def drawdown_history(self) -> pd.DataFrame:
        """The daily history the drawdown scenarios draw from (SI).

        Columns ``inflow_m3s`` (sum of the tributaries, m³/s), ``rain_m`` (mean of the gauges,
        m/d), ``evaporation_m`` (lake evaporation, m/d), ``withdrawal_m3s`` and ``release_m3s``
        (m³/s). A term without a record is left out (the scenarios take it as zero).
        """
        import pandas as pd

        records = self.records
        daily = records.daily
        cols: dict[str, pd.Series] = {}
        if records.has("inflow"):
            cols["inflow_m3s"] = records.total("inflow")
        if records.has("rain"):
            cols["rain_m"] = records.mean("rain")
        evaporation_m = self._evaporation_depth()
        if evaporation_m is not None:
            cols["evaporation_m"] = evaporation_m.reindex(daily.index)
        if records.has("withdrawal"):
            cols["withdrawal_m3s"] = records.total("withdrawal")
        if records.has("release"):
            cols["release_m3s"] = records.total("release")
        return pd.DataFrame(cols, index=daily.index)

    def forecast(
        self,
        start: str | None = None,
        *,
        days: int | None = None,
        scenario: str | None = None,
        members: int | None = None,
        start_stage_m: float | None = None,
        compare_methods: bool | None = None,
    ) -> Forecast:
        """Drought drawdown forecast: an ensemble of the whole balance from a start day.

        Parameters
        ----------
        start : str, optional
            ISO date of the start day (default: the Lake's ``forecast_start``, else
            ``[drawdown] start``, else the last recorded stage).
        days : int, optional
            Horizon in days (default ``[drawdown] days``).
        scenario : str, optional
            ``"replay"``, ``"esp"``, ``"percentile"``, ``"stochastic"`` or ``"constant"`` (default
            ``[drawdown] scenario``).
        members : int, optional
            Members of the stochastic scenario, or of any scenario when model uncertainty is
            sampled (default: the Lake's ``members``, else ``[drawdown] members``).
        start_stage_m : float, optional
            Stage at the start (m; default ``[drawdown] start_stage``, else the record that day).
        compare_methods : bool, optional
            Also run every scenario method and show them side by side (default
            ``[drawdown] compare_methods``).

        Notes
        -----
        Draws come from ``forecast_seed``. The dead level (withdrawals and releases stop below it) is
        the ``[levels]`` entry named by ``[drawdown] dead_level``, else the level named ``dead``,
        else the bottom of the storage relation. See ``docs/drawdown.md``.
        """
        opts = self.site.drawdown
        changes = {
            k: v
            for k, v in {
                "days": days,
                "scenario": scenario,
                "members": members if members is not None else self.members,
                "start": start if start is not None else self.forecast_start,
                "start_stage": start_stage_m
                if start_stage_m is not None
                else self.forecast_start_stage,
                "compare_methods": compare_methods,
            }.items()
            if v is not None
        }
        if changes.get("scenario", opts.scenario) not in (
            "replay",
            "esp",
            "percentile",
            "stochastic",
            "constant",
        ):
            raise ConfigError(
                f"unknown drawdown scenario {changes['scenario']!r}: replay, esp, percentile, "
                "stochastic or constant",
                file=self.site.path,
            )
        try:
            opts = dataclasses.replace(opts, **changes)
        except LakebalanceError as exc:
            raise _with_file(exc, self.site.path) from None
        key = ("forecast", repr(opts))
        return self._step(key, lambda: self._forecast(opts))

    def _forecast_start(self, opts: Any) -> tuple[pd.Timestamp, float]:
        import numpy as np
        import pandas as pd

        daily = self.records.daily
        stage = daily["stage"] if "stage" in daily.columns else None
        if opts.start is None:
            if stage is None or not stage.notna().any():
                raise ConfigError(
                    "the drawdown forecast needs a start date and stage ([drawdown] start, "
                    "start_stage) when there is no stage record"
                )
            start_ts = pd.Timestamp(stage.last_valid_index())
        else:
            try:
                start_ts = pd.Timestamp(opts.start).normalize()
            except (ValueError, TypeError):
                raise ConfigError(f"drawdown start {opts.start!r} is not an ISO date") from None
        h0 = opts.start_stage
        if h0 is None:
            h0 = float(stage.get(start_ts, np.nan)) if stage is not None else float("nan")
            if not np.isfinite(h0):
                raise ConfigError(
                    f"no recorded stage on {start_ts.date()}: give the start stage "
                    "([drawdown] start_stage or --start-stage)"
                )
        return start_ts, float(h0)

    def _forecast(self, opts: Any) -> Forecast:
        import numpy as np

        from .drawdown import (
            ForecastPlan,
            build_forcing,
            check_start_stage,
            forecast_stage_max,
            run_forecast,
            sample_model_uncertainty,
        )

        seed = self.forecast_seed
        rng = np.random.default_rng(seed)
        notes: list[str] = []
        start_ts, h0 = self._forecast_start(opts)
        check_start_stage(h0, self.laws_without_seepage)
        history = self.drawdown_history()
        if opts.scenario != "constant" and "inflow_m3s" not in history.columns:
            raise ConfigError(
                f"the '{opts.scenario}' scenario needs an inflow record; use the 'constant' scenario"
            )
        for term in ("rain_m", "evaporation_m"):
            if term not in history.columns:
                notes.append(f"no {term.split('_')[0]} record: taken as zero")
        forcing = build_forcing(
            history,
            start_ts,
            opts.days,
            opts.scenario,
            members=opts.members,
            rng=rng,
            percentile=opts.percentile,
            inflow_m3s=opts.inflow,
            method=opts.stochastic,
            block_days=opts.block_days,
            antecedent_days=opts.antecedent_days,
        )
        levels = dict(self.site.levels)
        dead_name = opts.dead_level or ("dead" if "dead" in levels else None)
        if dead_name is not None and dead_name not in levels:
            raise ConfigError(f"[drawdown] dead_level '{dead_name}' is not a [levels] name")
        has_stage = "stage" in self.records.daily.columns
        laws, why = self.laws(seepage=opts.seepage and has_stage)
        if why:
            notes.append(f"seepage left out: {why}")
        if laws.seepage is not None:
            notes.append("net seepage to groundwater from the law fitted to the balance residual")
        if self.rating is None:
            notes.append("no [outlet]: the lake has no outflow but its withdrawals and releases")
        dead = levels[dead_name] if dead_name is not None else laws.min_stage_m
        seep_fit = self.get("seepage") if laws.seepage is not None else None
        seep_constant = self.site.seepage.in_forecasts == "constant"

        def draw(members: int, gen: Any) -> Any:
            if not opts.sample_uncertainty:
                return None
            return sample_model_uncertainty(
                self.rating, members, self.site.uncertainty.evaporation, opts.rating_variants,
                gen, seepage=seep_fit, seepage_constant=seep_constant,
            )  # fmt: skip

        samples = draw(opts.members, rng)
        plan = ForecastPlan(
            start=start_ts,
            start_stage_m=h0,
            scenario=opts.scenario,
            stage_max_m=forecast_stage_max(laws, h0),
            dead_level_m=dead,
            demand_m3s=opts.demand,
            environmental_release_m3s=opts.environmental_release,
            restriction=tuple((r.trigger, r.cut) for r in opts.restriction),
            operations=self.site.operations,
            demand_dated=_read_demand_file(self.site),
        )
        bar = callback = None
        if self.progress:
            from tqdm import tqdm

            bar = tqdm(total=opts.days, unit="day", desc="drawdown", leave=False)

            def callback(done: int) -> None:
                bar.update(done - bar.n)

        try:
            main = run_forecast(
                laws, forcing, plan, samples=samples, rng=rng, seed=seed, progress=callback,
                notes=notes,
            )  # fmt: skip
        finally:
            if bar is not None:
                bar.close()
        if not opts.compare_methods or opts.scenario == "constant":
            return main
        return self._method_spread(main, opts, history, start_ts, laws, plan, draw, seed)

    def _method_spread(
        self, main: Any, opts: Any, history: Any, start_ts: Any, laws: Any, plan: Any,
        draw: Callable, seed: int | None,
    ) -> Forecast:  # fmt: skip
        """The same outlook by every scenario method, side by side (``Forecast.method_spread``):
        replay, ESP-weighted replay, the 30-day block bootstrap and the persistent monthly
        generator (and the daily AR(1) when it is the chosen one), each with
        ``[drawdown] compare_members`` members (the years themselves for a plain replay) and
        its own draws of the model uncertainty; the chosen method's own row is its forecast."""
        import numpy as np

        from .drawdown import MethodOdds, build_forcing, run_forecast

        specs = [("replay", "bootstrap"), ("esp", "bootstrap"), ("stochastic", "bootstrap"),
                 ("stochastic", "monthly")]  # fmt: skip
        if opts.scenario == "stochastic" and opts.stochastic == "ar1":
            specs.append(("stochastic", "ar1"))
        rows, notes = [], []
        for k, (scenario, method) in enumerate(specs):
            name = method if scenario == "stochastic" else scenario
            if name == main.method:
                rows.append(MethodOdds.of(main))
                continue
            gen = np.random.default_rng([int(seed or 0), 14, k])
            members = opts.compare_members
            try:
                forcing = build_forcing(
                    history, start_ts, opts.days, scenario, members=members, rng=gen,
                    method=method, block_days=opts.block_days,
                    antecedent_days=opts.antecedent_days,
                )  # fmt: skip
                fc = run_forecast(
                    laws, forcing, dataclasses.replace(plan, scenario=scenario),
                    samples=draw(members, gen), rng=gen, side_by_side=False,
                )  # fmt: skip
            except LakebalanceError as exc:
                notes.append(f"the {name} method left out of the comparison: {exc}")
                continue
            rows.append(MethodOdds.of(fc))
        return dataclasses.replace(
            main, method_spread=tuple(rows), notes=(*main.notes, *notes)
        )  # fmt: skip

    # ---- yield and hindcast --------------------------------------------------------------
    def _dead_level(self, name: str | None = None) -> tuple[str, float]:
        """The named level at which the intake fails (default ``[drawdown] dead_level``, else
        ``dead``, else the bottom of the storage relation) and its stage (m)."""
        levels = dict(self.site.levels)
        name = name or self.site.drawdown.dead_level or ("dead" if "dead" in levels else None)
        if name is None:
            return "bottom", float(self.laws_without_seepage.min_stage_m)
        if name not in levels:
            known = ", ".join(levels) or "none"
            raise ConfigError(f"'{name}' is not a [levels] name (levels: {known})")
        return name, float(levels[name])

    def _demand(self) -> tuple[float | None, Any, str]:
        """(mean demand m³/s, 12 monthly values or None, where it came from): ``[drawdown]
        demand``, else the record's mean withdrawal by calendar month, else none."""
        import numpy as np

        demand = self.site.drawdown.demand
        if isinstance(demand, int | float):
            return float(demand), None, "[drawdown] demand"
        if demand is not None:
            return float(np.mean(demand)), list(demand), "[drawdown] demand (monthly)"
        if self.records.has("withdrawal"):
            w = self.records.total("withdrawal").dropna()
            if not w.empty:
                by_month = w.groupby(w.index.month).mean().reindex(range(1, 13))
                monthly = by_month.fillna(float(w.mean())).to_numpy()
                if monthly.sum() > 0:
                    return float(monthly.mean()), list(monthly), "the record's mean withdrawals"
        return None, None, "none"

    def yield_(
        self,
        *,
        failure_level: str | None = None,
        start_level: str | None = None,
        pattern: str = "demand",
        dry_inflow_m3s: float = 0.0,
        supply_days: int = 3650,
        shares: tuple[float, ...] = (0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9),
        rtol: float = 1e-3,
    ) -> YieldStudy:
        """Firm yield through the record, storage–yield curve, reliability of the demand under
        the restriction rules, and days of supply from the last recorded stage.

        Parameters
        ----------
        failure_level : str, optional
            ``[levels]`` name at which the intake fails (default: the dead level, see
            :meth:`forecast`).
        start_level : str, optional
            ``[levels]`` name of the stage the record is started from (default: the first
            recorded stage).
        pattern : {"demand", "constant"}
            Firm yield as a constant demand, or with the monthly pattern of the demand
            (``[drawdown] demand``, else the record's withdrawals by month).
        dry_inflow_m3s : float
            Constant inflow of the dry scenario of the days of supply (m³/s; 0: none).
        supply_days : int
            Horizon of the days of supply (days; several years by default).
        shares : tuple of float
            Yields of the storage–yield curve, as shares of the mean net inflow (-).
        rtol : float
            Relative width of the firm yield's final bracket (-), 1e-6 to 0.5.

        See :mod:`lakebalance.drawdown.yield_` for the methods and their references.
        """
        if pattern not in ("demand", "constant"):
            raise ConfigError(f"yield pattern {pattern!r}: 'demand' or 'constant'")
        if supply_days < 1 or supply_days > 36_525:
            raise ConfigError(f"days of supply horizon {supply_days}: 1 to 36,525 days")
        if dry_inflow_m3s < 0:
            raise ConfigError(f"dry inflow {dry_inflow_m3s} m³/s: not below zero")
        if not 1e-6 <= rtol <= 0.5:
            raise ConfigError(f"firm yield tolerance {rtol}: 1e-6 to 0.5")
        key = (
            "yield", failure_level, start_level, pattern, dry_inflow_m3s, supply_days, shares,
            rtol,
        )  # fmt: skip
        return self._step(
            key,
            lambda: self._yield(
                failure_level, start_level, pattern, dry_inflow_m3s, supply_days, shares, rtol
            ),
        )

    def _yield(
        self,
        failure_level: str | None,
        start_level: str | None,
        pattern: str,
        dry_inflow_m3s: float,
        supply_days: int,
        shares: tuple[float, ...],
        rtol: float,
    ) -> YieldStudy:
        import numpy as np
        import pandas as pd

        from .drawdown.yield_ import (
            YieldStudy,
            days_of_supply,
            firm_yield,
            record_forcing,
            record_performance,
            storage_yield_curve,
        )

        opts, ops = self.site.drawdown, self.site.operations
        history = self.drawdown_history()
        if "inflow_m3s" not in history.columns:
            raise ConfigError("the yield study needs an inflow record")
        daily = self.records.daily
        stage = daily["stage"] if "stage" in daily.columns else None
        notes: list[str] = []
        fail_name, fail_m = self._dead_level(failure_level)
        if start_level is not None:
            levels = dict(self.site.levels)
            if start_level not in levels:
                raise ConfigError(f"start level '{start_level}' is not a [levels] name")
            first = pd.Timestamp(history.index[0])
            h0 = float(levels[start_level])
            start_name = f"the {start_level} level"
        else:
            if stage is None or not stage.notna().any():
                raise ConfigError(
                    "the yield study starts from the first recorded stage: there is none; "
                    "name a start level"
                )
            first = pd.Timestamp(stage.first_valid_index())
            h0 = float(stage.loc[first])
            start_name = f"the first recorded stage ({first.date()})"
        notes.append(f"the record is run from {start_name}")
        rules_used = [
            words
            for words, present in (
                ("the gate release table", ops.release is not None),
                ("the spill over the crest", ops.spill is not None),
                ("the environmental release", ops.environmental_release > 0),
                (f"{len(ops.restriction)} restriction levels", bool(ops.restriction)),
            )
            if present
        ]
        if rules_used:
            notes.append("operating rules ([operations]): " + ", ".join(rules_used))
        forcing = record_forcing(history, first + pd.Timedelta(days=1), None)
        laws, why = self.laws(seepage=opts.seepage and stage is not None)
        if why:
            notes.append(f"seepage left out: {why}")
        mean_demand, monthly, source = self._demand()
        use_pattern = monthly if pattern == "demand" else None
        if pattern == "demand" and monthly is not None:
            notes.append(f"firm yield with the monthly pattern of {source}")
        bar = callback = None
        if self.progress:
            from tqdm import tqdm

            bar = tqdm(total=None, unit="round", desc="firm yield", leave=False)

            def callback(done: int) -> None:
                bar.update(done - bar.n)

        try:
            firm = firm_yield(
                laws, forcing, failure_level_m=fail_m, failure_level=fail_name, start_stage_m=h0,
                pattern=use_pattern, environmental_release_m3s=opts.environmental_release,
                rtol=rtol, progress=callback, operations=ops,
            )  # fmt: skip
        finally:
            if bar is not None:
                bar.close()
        vol = np.asarray(laws.volume(np.array([fail_m, h0], dtype=float)), dtype=float)
        area = float(np.asarray(laws.area(np.array([h0], dtype=float)))[0])
        curve = storage_yield_curve(
            forcing,
            area_m2=area,
            available_m3=max(float(vol[1] - vol[0]), 0.0),
            shares=shares,
            pattern=use_pattern,
        )
        rules = tuple((r.trigger, r.cut) for r in opts.restriction)
        performance = supply = None
        if mean_demand is None:
            notes.append("no demand ([drawdown] demand or withdrawals): no reliability judged")
        else:
            performance = record_performance(
                laws, forcing, demand_m3s=mean_demand, pattern=monthly, restriction=rules,
                failure_level_m=fail_m, failure_level=fail_name, start_stage_m=h0,
                water_year_start=self.site.site.water_year_start,
                environmental_release_m3s=opts.environmental_release, operations=ops,
            )  # fmt: skip
            try:
                start_ts, start_h = self._forecast_start(opts)
            except ConfigError as exc:
                notes.append(f"no days of supply: {exc.message}")
            else:
                supply = days_of_supply(
                    laws, history, start=start_ts, start_stage_m=start_h, demand_m3s=mean_demand,
                    pattern=monthly, inflow_m3s=dry_inflow_m3s, horizon=supply_days,
                    restriction=rules, failure_level_m=fail_m, failure_level=fail_name,
                    environmental_release_m3s=opts.environmental_release, operations=ops,
                )  # fmt: skip
            notes.append(f"demand: {source}")
        return YieldStudy(firm, curve, performance, supply, tuple(notes))

    def hindcast(
        self,
        *,
        days: int | None = None,
        every: int = 60,
        scenario: str = "replay",
        members: int = 100,
        first: str | None = None,
        last: str | None = None,
        anniversary: str | None = None,
    ) -> Hindcast:
        """Hindcast skill of the drawdown outlook (:mod:`lakebalance.drawdown.hindcast`).

        Parameters
        ----------
        days : int, optional
            Horizon (default ``[drawdown] days``).
        every : int
            Days between start dates.
        scenario : {"replay", "stochastic", "percentile"}
            Scenario of the outlook scored.
        members : int
            Members per start of the stochastic scenario.
        first, last : str, optional
            ISO dates bounding the starts.
        anniversary : str, optional
            ISO date: start on its day of the year in every year instead (``every`` unused).

        Notes
        -----
        Uses the dead level, demand, environmental release and restriction rules of
        ``[drawdown]``, the seed ``forecast_seed``.
        """
        opts = self.site.drawdown
        days = int(opts.days if days is None else days)
        if not 1 <= days <= 36_525:
            raise ConfigError(f"hindcast horizon {days} days: 1 to 36,525")
        if every < 1:
            raise ConfigError(f"days between hindcast starts {every}: at least 1")
        if scenario not in ("replay", "stochastic", "percentile"):
            raise ConfigError(f"hindcast scenario {scenario!r}: replay, stochastic or percentile")
        if members < 1:
            raise ConfigError(f"hindcast members {members}: at least 1")
        if anniversary is not None:
            import pandas as pd

            try:
                pd.Timestamp(anniversary)
            except (ValueError, TypeError):
                raise ConfigError(
                    f"hindcast anniversary {anniversary!r} is not an ISO date"
                ) from None
        key = ("hindcast", days, every, scenario, members, first, last, anniversary)
        return self._step(
            key,
            lambda: self._hindcast(days, every, scenario, members, first, last, anniversary),
        )

    def _hindcast(
        self,
        days: int,
        every: int,
        scenario: str,
        members: int,
        first: Any,
        last: Any,
        anniversary: Any,
    ) -> Hindcast:
        import numpy as np

        from .drawdown.hindcast import hindcast_starts, run_hindcast

        opts = self.site.drawdown
        daily = self.records.daily
        if "stage" not in daily.columns:
            raise ConfigError("the hindcast is scored against a stage record: there is none")
        history = self.drawdown_history()
        if "inflow_m3s" not in history.columns:
            raise ConfigError("the hindcast's scenarios need an inflow record")
        stage = daily["stage"]
        starts = hindcast_starts(stage, days, every, first, last, anniversary=anniversary)
        _, dead = self._dead_level()
        laws, why = self.laws(seepage=opts.seepage)
        bar = callback = None
        if self.progress:
            from tqdm import tqdm

            bar = tqdm(total=len(starts), unit="start", desc="hindcast", leave=False)

            def callback(done: int) -> None:
                bar.update(done - bar.n)

        try:
            hc = run_hindcast(
                laws, history, stage, days=days, starts=starts, scenario=scenario, every=every,
                dead_level_m=dead, demand_m3s=opts.demand,
                environmental_release_m3s=opts.environmental_release,
                restriction=tuple((r.trigger, r.cut) for r in opts.restriction),
                members=members, rng=np.random.default_rng(self.forecast_seed),
                seed=self.forecast_seed, method=opts.stochastic, block_days=opts.block_days,
                progress=callback,
            )  # fmt: skip
        finally:
            if bar is not None:
                bar.close()
        if why:
            hc = dataclasses.replace(hc, notes=(*hc.notes, f"seepage left out: {why}"))
        return hc


def _read_demand_file(site: Any) -> Any:
    """The daily values (m³/s) of ``[operations.demand] file``, read like a series (None when
    not given)."""
    demand = site.operations.demand
    if demand is None or demand.file is None:
        return None
    from .config import SeriesSpec
    from .io.series import load_series

    spec = SeriesSpec(
        file=demand.file, units=demand.units, role="withdrawal", key="demand", name="demand"
    )
    return load_series(spec, site).daily


def _persistent_errors(balance: Balance, chosen: Any, used: pd.Series) -> Callable | None:
    """The covariance of weighted sums of the persistent residual errors over the days used,
    from the balance's error model (None without one)."""
    import numpy as np

    model = balance.error_model
    if model is None:
        return None
    keep = np.asarray(chosen, dtype=bool) & np.isfinite(balance.daily["residual_m3"].to_numpy())
    keep &= np.isfinite(balance.daily["stage_m"].to_numpy())
    if int(keep.sum()) != len(used.dropna()):
        return None  # the fit's days are not the chosen days: leave the extra errors out

    def cov(weights: np.ndarray) -> np.ndarray:
        full = np.zeros((weights.shape[0], model.days))
        full[:, keep] = weights
        return model.covariance_of_sums(full, ("systematic", "area", "rating"))

    return cov


def _ice_outflow(balance: Balance, periods: Any) -> Balance:
    """The balance with the outflow of each declared ice period estimated as declared."""
    import numpy as np
    import pandas as pd

    from .balance import replace_outflow
    from .periods import days_of, period_outflow, periods_of_kind

    for p in periods_of_kind(periods, "ice"):
        if p.how_outflow == "rating" or "outflow" in balance.absent_terms:
            continue
        index = pd.DatetimeIndex(balance.daily.index)
        mask = days_of(p, index)
        if not mask.any():
            continue
        q = period_outflow(balance.daily["outflow_m3"].to_numpy(), mask, p.how_outflow, p.fraction)
        how = (
            f"{p.fraction:g} of the open-water rating"
            if p.how_outflow == "fraction"
            else "interpolated in time between the open-water days around it"
        )
        sd = np.where(mask, p.outflow_error * np.abs(q), 0.0)
        balance = replace_outflow(
            balance,
            q,
            f"outflow of {p.describe()} ({int(mask.sum())} days): {how}, with a "
            f"{100 * p.outflow_error:.0f} % error (1 σ) in the bands",
            error_sd_m3=sd,
        )
    return balance


def _preliminary_residual(lake: Lake, records: Records) -> Callable | None:
    """Corrected stage (m) → the daily residual (m³/d) of a balance closed on ``records`` with it
    (no evaporation, no bands: what sizes an offset period), or None without a storage
    relation."""
    import numpy as np
    import pandas as pd

    from .balance import close_daily

    storage = lake.get("storage")
    if storage is None:
        return None
    rating = lake.get("rating")
    outflow = lake.get("ratings") or (None if rating is None else rating.discharge)
    terms = lake._terms(records, None)
    index = pd.DatetimeIndex(records.daily.index)
    options = lake._closure_options()

    def residual(stage_m: np.ndarray) -> np.ndarray:
        t = dataclasses.replace(
            terms,
            stage_m=pd.Series(stage_m, index=index),
            boundary_stage_m=None,
            subdaily_stage_m=None,
        )
        b = close_daily(
            t,
            volume_fn=storage.volume,
            area_fn=storage.area,
            outflow_fn=outflow,
            options=options,
        )
        return b.daily["residual_m3"].reindex(index).to_numpy(dtype=float)

    return residual


def _with_offset_periods(lake: Lake, records: Records) -> Records:
    """``records`` with the stage offset of each declared offset period removed (sized from the
    field checks inside it, from the balance residual or from its end steps), the days marked
    estimated, and a finding."""
    import numpy as np
    import pandas as pd

    from .periods import correct_offset_periods, periods_of_kind
    from .records import Finding

    site = records.site
    periods = periods_of_kind(site.period, "offset", "fouled")
    daily = records.daily
    if not periods or "stage" not in daily.columns:
        return records
    times = diffs = None
    if records.check_readings is not None:
        from .fieldchecks import compare_checks

        comp = compare_checks(records.check_readings, daily["stage"], records.subdaily_stage)
        times, diffs = pd.DatetimeIndex(comp["time"]), comp["difference_m"].to_numpy()
    index = pd.DatetimeIndex(daily.index)
    stage, method, applied = correct_offset_periods(
        daily["stage"].to_numpy(dtype=float), index, periods, times, diffs,
        residual_with=_preliminary_residual(lake, records),
    )  # fmt: skip
    findings = list(records.findings)
    sub = records.subdaily_stage
    for p, delta, words in applied:
        sized = np.isfinite(delta)
        findings.append(
            Finding(
                "stage",
                "offset_period",
                p.first.isoformat(),
                p.last.isoformat(),
                int(((index >= pd.Timestamp(p.first)) & (index <= pd.Timestamp(p.last))).sum()),
                "corrected, estimated" if sized else "left, could not be sized",
                f"{p.describe()}: {words}" + (f", {delta * 1000:+.0f} mm removed" if sized else ""),
            )  # fmt: skip
        )
        if sized and sub is not None:
            t = pd.DatetimeIndex(sub.index)
            inside = (t >= pd.Timestamp(p.first)) & (
                t < pd.Timestamp(p.last) + pd.Timedelta(days=1)
            )
            sub = sub.where(~inside, sub - delta)
    new_daily = daily.copy()
    new_daily["stage"] = stage
    estimated = (
        records.estimated.copy()
        if records.estimated is not None
        else pd.DataFrame(index=daily.index)
    )
    estimated["stage"] = method
    return dataclasses.replace(
        records, daily=new_daily, findings=tuple(findings), subdaily_stage=sub, estimated=estimated
    )


def _name(key: Any) -> str:
    return key[0] if isinstance(key, tuple) else str(key)
