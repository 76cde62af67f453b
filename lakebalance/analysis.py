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

    from .balance import Balance, TermErrors
    from .drawdown import Forecast
    from .dynamics import Dynamics, WhatIfRequest
    from .evaporation.lake import EvaporationResult
    from .flags import Flags
    from .laws import LakeLaws
    from .outlet.fit import RatingFit
    from .records import Records
    from .seepage import SeepageFit
    from .storage import StorageCurve

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
            return (
                getattr(self, step)() if step in ("dynamics", "forecast") else getattr(self, step)
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

            return read_records(self.site, progress=self.progress)

        return self._step("records", compute)

    @property
    def storage(self) -> StorageCurve:
        """The stage–area–storage relation (``[storage]``), in SI units."""

        def compute() -> StorageCurve:
            from .io.storage import read_storage

            if self.site.storage is None:
                raise ConfigError("the site file has no [storage] section", file=self.site.path)
            return read_storage(self.site.storage, site_file=self.site.path)

        return self._step("storage", compute)

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
        ``[outlet]``."""

        def compute() -> RatingFit | None:
            import numpy as np

            from .errors import FitError
            from .io.gaugings import read_gaugings
            from .outlet.fit import fit_rating_curve
            from .outlet.laws import law_from_options

            outlet = self.site.outlet
            if outlet is None:
                return None
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

        return self._step("rating", compute)

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
        result = estimate_lake_evaporation(
            frame,
            opts,
            latitude_deg=site.site.latitude,
            elevation_m=site.site.elevation,
            site_file=str(site.path),
        )
        changes: dict[str, Any] = {}
        if averaged:
            changes["notes"] = (*result.notes, *averaged)
        storage = self.get("storage")
        daily = records.daily
        if storage is not None and "stage" in daily.columns:
            area_m2 = pd.Series(storage.area(daily["stage"].to_numpy()), index=daily.index)
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
        return TermErrors.from_options(self.site.uncertainty, resolution)

    @property
    def balance(self) -> Balance:
        """The daily water balance with Monte Carlo bands (``draws`` of them)."""
        return self._step("balance", self._balance)

    def _balance(self) -> Balance:
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

        site, records = self.site, self.records
        daily = records.daily
        if "stage" not in daily.columns:
            raise ConfigError("the water balance needs a stage series ([series.stage])")
        storage, rating = self.storage, self.rating
        notes: list[str] = []
        evaporation_m = self._evaporation_depth()
        if evaporation_m is not None:
            notes.append(f"lake evaporation by the {self.evaporation.method} method")
        info = {s.key: s for s in records.series}
        inflows = {info[k].name if k in info else k: daily[k] for k in records.keys("inflow")}
        rain_keys = records.keys("rain")
        if len(rain_keys) > 1:
            notes.append(f"rain is the daily mean of {len(rain_keys)} gauges")
        terms = DailyTerms(
            stage_m=daily["stage"],
            inflow_m3s=inflows,
            rain_m=records.mean("rain"),
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
        stage_spec = next(iter(site.series_of("stage")), None)
        options = ClosureOptions(
            boundary_rule=site.uncertainty.boundary_rule,
            water_year_start=site.site.water_year_start,
            subdaily_coverage=stage_spec.coverage if stage_spec is not None else 0.8,
        )
        try:
            storage.check_record(daily["stage"].to_numpy(dtype=float), daily.index)
        except LakebalanceError as exc:
            where = site.storage.file if site.storage is not None else None
            raise _with_file(exc, where or site.path) from None
        laws = self.laws_without_seepage
        outflow = None if rating is None else rating.discharge
        balance = close_daily(
            terms, volume_fn=laws.volume, area_fn=laws.area, outflow_fn=outflow, options=options
        )
        if self.draws > 0:
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
            ``"replay"``, ``"percentile"``, ``"stochastic"`` or ``"constant"`` (default
            ``[drawdown] scenario``).
        members : int, optional
            Members of the stochastic scenario, or of any scenario when model uncertainty is
            sampled (default: the Lake's ``members``, else ``[drawdown] members``).
        start_stage_m : float, optional
            Stage at the start (m; default ``[drawdown] start_stage``, else the record that day).

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
                "start_stage": start_stage_m,
            }.items()
            if v is not None
        }
        if changes.get("scenario", opts.scenario) not in (
            "replay",
            "percentile",
            "stochastic",
            "constant",
        ):
            raise ConfigError(
                f"unknown drawdown scenario {changes['scenario']!r}: replay, percentile, "
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
        samples = None
        if opts.sample_uncertainty:
            samples = sample_model_uncertainty(
                self.rating, opts.members, self.site.uncertainty.evaporation,
                opts.rating_variants, rng,
            )  # fmt: skip
        plan = ForecastPlan(
            start=start_ts,
            start_stage_m=h0,
            scenario=opts.scenario,
            stage_max_m=forecast_stage_max(laws, h0),
            dead_level_m=dead,
            demand_m3s=opts.demand,
            environmental_release_m3s=opts.environmental_release,
            restriction=tuple((r.trigger, r.cut) for r in opts.restriction),
        )
        bar = callback = None
        if self.progress:
            from tqdm import tqdm

            bar = tqdm(total=opts.days, unit="day", desc="drawdown", leave=False)

            def callback(done: int) -> None:
                bar.update(done - bar.n)

        try:
            return run_forecast(
                laws, forcing, plan, samples=samples, rng=rng, seed=seed, progress=callback,
                notes=notes,
            )  # fmt: skip
        finally:
            if bar is not None:
                bar.close()


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


def _name(key: Any) -> str:
    return key[0] if isinstance(key, tuple) else str(key)
