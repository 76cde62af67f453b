"""Forcing of the drawdown ensemble: what comes into and goes out of the lake on each future day.

Every scenario turns the daily history of the lake (inflow, rain, evaporation, withdrawal and
release, all in SI) into arrays ``(days, members)`` starting on the day after the forecast start:

* ``replay``: each historical year of the record is a member, its days taken from the same day of
  the year as the forecast days (a year is used when at least 80 % of its inflow days are known;
  the gaps are filled with the day-of-year climatology);
* ``percentile``: the trace whose accumulated inflow volume over the horizon has the stated
  non-exceedance among the historical years (Weibull plotting position), a historical year's
  daily pattern scaled to that volume, with that year's rain and evaporation;
* ``esp``: the historical years as in ``replay``, weighted by the likeness of their inflow over
  the days before the start to the present's (ensemble streamflow prediction, Day 1985; see
  :mod:`.persistence`), the members shared out among the years by weight;
* ``stochastic``: either a block bootstrap of the historical years (blocks of ``block_days``, each
  member drawing a year per block, all terms of a block from the same year so that dry inflow
  and high evaporation stay together), or a seasonal AR(1) model of the log inflow anomalies
  fitted with statsmodels (rain and evaporation at their day-of-year means), or the persistent
  periodic monthly AR(1) of log inflow with days by fragments (:mod:`.persistence`, method
  ``monthly``), which keeps the month-to-month memory that makes droughts long;
* ``constant``: a given inflow (zero for the worst case), rain and evaporation at their
  day-of-year means.

References
----------
Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap, Chapman & Hall, section
8.6 (moving-block bootstrap of dependent data).
Box, G. E. P. & Jenkins, G. M. (1976). Time Series Analysis, Forecasting and Control, chapter 3
(first-order autoregressive process); seasonal standardisation as in Salas et al. (1980),
Applied Modeling of Hydrologic Time Series, chapter 5.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import pandas as pd

from ..errors import ConfigError
from ..resources import check_memory

__all__ = ["Forcing", "TERMS", "climatology", "build_forcing", "horizon_volumes"]

#: Columns of the history frame (SI): flows m³/s, depths m per day.
TERMS = ("inflow_m3s", "rain_m", "evaporation_m", "withdrawal_m3s", "release_m3s")

Scenario = Literal["replay", "esp", "percentile", "stochastic", "constant"]
StochasticMethod = Literal["bootstrap", "ar1", "monthly"]

_WINDOW_DAYS = 7  # half-width of the day-of-year window, days
_MIN_COVERAGE = 0.8  # share of known inflow days that makes a year usable in replay/bootstrap


@dataclass(frozen=True)
class Forcing:
    """Daily forcing of every member, arrays ``(days, members)`` in SI.

    ``labels`` names each member (the historical year of a replay, ``"p10"``, ``"member 12"``);
    ``notes`` say what was assumed.
    """

    dates: pd.DatetimeIndex  # the forecast days (day after the start onwards)
    inflow_m3s: np.ndarray
    rain_m: np.ndarray
    evaporation_m: np.ndarray
    withdrawal_m3s: np.ndarray
    release_m3s: np.ndarray
    labels: tuple[str, ...]
    notes: tuple[str, ...] = field(default=())
    #: what the members are: ``"years"`` (each member replays one historical year, listed in
    #: :attr:`years` and indexed by :attr:`member_year`), ``"members"`` (generated from the
    #: years: a bootstrap, a fitted model) or ``"scenario"`` (one constructed trace)
    basis: str = "scenario"
    #: the scenario method: replay, esp, bootstrap, ar1, monthly, percentile, constant
    method: str = ""
    #: the historical years behind the members
    years: tuple[int, ...] = ()
    #: independent historical years the ensemble stands on (None: none, a constructed trace);
    #: for weighted years the effective number 1 / sum(w²) (Kish, 1965), rounded down
    independent_years: int | None = None
    #: (members,) index into :attr:`years` of each member's year (``basis == "years"``)
    member_year: np.ndarray | None = field(default=None, repr=False)
    #: (years,) weight of each year (``esp``; None: equal)
    year_weights: np.ndarray | None = field(default=None, repr=False)
    #: window (days) of the ESP conditioning
    antecedent_days: int | None = None

    @property
    def members(self) -> int:
        """Number of members."""
        return int(self.inflow_m3s.shape[1])


def _doy(index: pd.DatetimeIndex) -> np.ndarray:
    """Day of the year 0..365 with 29 February sharing 28 February's slot (leap-free)."""
    d = index.day_of_year.to_numpy() - 1
    leap = index.is_leap_year & (d >= 59)
    return np.where(leap, d - 1, d)


def climatology(series: pd.Series, *, statistic: str = "mean", q: float = 0.5) -> np.ndarray:
    """Day-of-year statistic (365 values) of a daily series, pooling a window of +-7 days.

    Parameters
    ----------
    series : pandas.Series
        Daily values on a DatetimeIndex (any SI unit; NaN is missing).
    statistic : {"mean", "quantile"}
        The statistic of the pooled values.
    q : float
        Non-exceedance probability (-) for ``"quantile"``.

    Returns
    -------
    ndarray (365,)
        NaN where no value falls in a window.
    """
    values = series.to_numpy(dtype=float)
    doy = _doy(pd.DatetimeIndex(series.index))
    out = np.full(365, np.nan)
    ok = np.isfinite(values)
    values, doy = values[ok], doy[ok]
    if values.size == 0:
        return out
    if statistic == "mean":
        total = np.bincount(doy, weights=values, minlength=365)
        count = np.bincount(doy, minlength=365).astype(float)
        k = np.ones(2 * _WINDOW_DAYS + 1)
        tot = np.convolve(
            np.concatenate([total[-_WINDOW_DAYS:], total, total[:_WINDOW_DAYS]]), k, "valid"
        )
        cnt = np.convolve(
            np.concatenate([count[-_WINDOW_DAYS:], count, count[:_WINDOW_DAYS]]), k, "valid"
        )
        with np.errstate(invalid="ignore", divide="ignore"):
            out = np.where(cnt > 0, tot / cnt, np.nan)
        return out
    order = np.argsort(doy, kind="stable")
    values, doy = values[order], doy[order]
    starts = np.searchsorted(doy, np.arange(366))
    for d in range(365):  # 365 small quantiles: once per forecast, not per day or member
        parts = []
        for off in range(-_WINDOW_DAYS, _WINDOW_DAYS + 1):
            j = (d + off) % 365
            parts.append(values[starts[j] : starts[j + 1]])
        pool = np.concatenate(parts)
        if pool.size:
            out[d] = np.quantile(pool, q)
    return out


def _filled(history: pd.DataFrame, term: str) -> tuple[pd.Series, np.ndarray]:
    """The term's series and its day-of-year mean (zeros when the term was never recorded)."""
    s = history[term] if term in history.columns else pd.Series(np.nan, index=history.index)
    clim = climatology(s)
    return s, np.nan_to_num(clim, nan=0.0)


def _year_matrix(
    history: pd.DataFrame, dates: pd.DatetimeIndex
) -> tuple[list[int], dict[str, np.ndarray], int]:
    """Aligned historical years: for each usable year Y, the terms on the forecast's days of the
    year shifted to Y (gaps filled with the day-of-year mean). Returns (years, term -> (years,
    days), skipped)."""
    first, last = history.index.min(), history.index.max()
    years: list[int] = []
    blocks: dict[str, list[np.ndarray]] = {t: [] for t in TERMS}
    clim = {t: _filled(history, t) for t in TERMS}
    skipped = 0
    start_year = dates[0].year
    for y in range(first.year - 1, last.year + 1):
        shift = y - start_year
        try:
            days_y = pd.DatetimeIndex(
                [d.replace(year=d.year + shift) for d in dates.to_pydatetime()]
            )
        except ValueError:  # 29 February in a non-leap year
            days_y = pd.DatetimeIndex(
                [
                    (d - pd.Timedelta(days=1) if (d.month, d.day) == (2, 29) else d).replace(
                        year=d.year + shift
                    )
                    for d in dates.to_pydatetime()
                ]
            )
        if days_y[0] < first or days_y[-1] > last:
            continue
        inflow = clim["inflow_m3s"][0].reindex(days_y).to_numpy(dtype=float)
        if np.isfinite(inflow).mean() < _MIN_COVERAGE:
            skipped += 1
            continue
        years.append(y)
        doy = _doy(days_y)
        for t in TERMS:
            s, c = clim[t]
            v = s.reindex(days_y).to_numpy(dtype=float)
            blocks[t].append(np.where(np.isfinite(v), v, c[doy]))
    return (
        years,
        {t: np.array(b).reshape(len(years), len(dates)) for t, b in blocks.items()},
        skipped,
    )


def build_forcing(
    history: pd.DataFrame,
    start: pd.Timestamp,
    days: int,
    scenario: Scenario,
    *,
    members: int = 1000,
    rng: np.random.Generator | None = None,
    percentile: float = 10.0,
    inflow_m3s: float = 0.0,
    method: StochasticMethod = "bootstrap",
    block_days: int = 30,
    antecedent_days: int = 90,
) -> Forcing:
    """The forcing arrays of a scenario.

    Parameters
    ----------
    history : pandas.DataFrame
        Daily history on a DatetimeIndex with any of the columns of :data:`TERMS` (inflow,
        withdrawal and release in m³/s; rain and evaporation in m per day).
    start : pandas.Timestamp
        Forecast start day; the forcing covers the ``days`` days after it.
    days : int
        Horizon (days).
    scenario : {"replay", "esp", "percentile", "stochastic", "constant"}
        See the module docstring.
    members : int
        Members of the stochastic scenario (others have one member per year, or one).
    rng : numpy.random.Generator, optional
        Source of the stochastic draws (required for ``stochastic``).
    percentile : float
        Non-exceedance (%) of the inflow for ``percentile``.
    inflow_m3s : float
        The inflow of ``constant`` (m³/s).
    method : {"bootstrap", "ar1", "monthly"}
        The stochastic model.
    block_days : int
        Block length of the bootstrap (days).
    antecedent_days : int
        Window before the start whose inflow anomaly conditions the ``esp`` weights (days).

    Returns
    -------
    Forcing
    """
    if days < 1:
        raise ConfigError(f"the forecast horizon must be at least one day, got {days}")
    last = pd.Timestamp.max.normalize() - pd.Timedelta(days=1)
    if (last - pd.Timestamp(start)).days < days:
        raise ConfigError(
            f"a horizon of {days:,} days from {pd.Timestamp(start).date()} ends after "
            f"{last.date()}, the last date the forecast can hold"
        )
    if scenario in ("stochastic", "esp"):  # the five daily terms of every member
        check_memory(
            5 * 8.0 * days * members,
            option="members",
            value=members,
            what=f"the stochastic forcing of {days:,} days",
        )
    dates = pd.date_range(start + pd.Timedelta(days=1), periods=days, freq="D", name="date")
    doy = _doy(dates)
    clim = {t: _filled(history, t)[1] for t in TERMS}
    notes: list[str] = []

    def flat(term: str, m: int) -> np.ndarray:
        return np.repeat(clim[term][doy][:, None], m, axis=1)

    extra: dict = {}
    if scenario in ("replay", "esp") or (scenario == "stochastic" and method == "bootstrap"):
        years, mat, skipped = _year_matrix(history, dates)
        if not years:
            raise ConfigError(
                f"the '{scenario}' scenario needs at least one historical year with {_MIN_COVERAGE:.0%}"
                f" of its inflow days recorded over the {days} forecast days of the year"
            )
        if skipped:
            notes.append(
                f"{skipped} year(s) left out: less than {_MIN_COVERAGE:.0%} inflow coverage"
            )
        if scenario == "replay":
            arrays = {t: mat[t].T.copy() for t in TERMS}
            labels = tuple(str(y) for y in years)
            notes.append(f"replay of {len(years)} historical years ({years[0]}-{years[-1]})")
            extra = dict(
                basis="years",
                method="replay",
                years=tuple(years),
                independent_years=len(years),
                member_year=np.arange(len(years)),
            )
        elif scenario == "esp":
            from .persistence import allocate_members, esp_weights

            w, note = esp_weights(history, years, dates[0] - pd.Timedelta(days=1), antecedent_days)
            alloc = allocate_members(w, members)
            arrays = {t: mat[t].T[:, alloc].copy() for t in TERMS}
            labels = tuple(str(years[i]) for i in alloc)
            n_eff = 1.0 / float(np.sum(w**2))
            notes.append(
                note + f"; {members} members shared out by weight, {n_eff:.1f} effective years"
            )
            extra = dict(
                basis="years",
                method="esp",
                years=tuple(years),
                independent_years=max(1, int(np.floor(n_eff + 1e-9))),
                member_year=alloc,
                year_weights=w,
                antecedent_days=antecedent_days,
            )
        else:
            if rng is None:
                raise ValueError("the stochastic scenario needs a random generator")
            nblocks = -(-days // block_days)
            pick = rng.integers(0, len(years), size=(nblocks, members))
            rows = np.repeat(pick, block_days, axis=0)[:days]  # (days, members) year index
            cols = np.arange(days)[:, None]
            arrays = {t: mat[t][rows, cols] for t in TERMS}
            labels = tuple(f"member {i + 1}" for i in range(members))
            notes.append(
                f"block bootstrap of {len(years)} historical years, blocks of {block_days} days"
            )
            extra = dict(
                basis="members", method="bootstrap", years=tuple(years),
                independent_years=len(years),
            )  # fmt: skip
    elif scenario == "stochastic" and method == "ar1":  # seasonal AR(1) of log inflow
        if rng is None:
            raise ValueError("the stochastic scenario needs a random generator")
        arrays, note, n_years = _ar1(history, dates, members, rng)
        arrays.update({t: flat(t, members) for t in TERMS if t != "inflow_m3s"})
        labels = tuple(f"member {i + 1}" for i in range(members))
        notes.append(note)
        extra = dict(basis="members", method="ar1", independent_years=n_years)
    elif scenario == "stochastic" and method == "monthly":
        if rng is None:
            raise ValueError("the stochastic scenario needs a random generator")
        from .persistence import monthly_generator

        gen = monthly_generator(history, dates, members, rng)
        arrays = gen.arrays
        labels = tuple(f"member {i + 1}" for i in range(members))
        notes.append(gen.note)
        extra = dict(
            basis="members", method="monthly", years=gen.years,
            independent_years=len(gen.years),
        )  # fmt: skip
    elif scenario == "stochastic":
        raise ConfigError(f"unknown stochastic model {method!r}: bootstrap, ar1 or monthly")
    elif scenario == "percentile":
        inflow = history["inflow_m3s"] if "inflow_m3s" in history.columns else None
        if inflow is None or not inflow.notna().any():
            raise ConfigError("the 'percentile' scenario needs an inflow record")
        arrays, label, note, n_years = _volume_percentile(history, dates, percentile)
        labels = (label,)
        notes.append(note)
        extra = dict(method="percentile", independent_years=None)
    elif scenario == "constant":
        arrays = {t: flat(t, 1) for t in TERMS}
        arrays["inflow_m3s"] = np.full((days, 1), float(inflow_m3s))
        labels = (f"inflow {inflow_m3s:g} m3/s",)
        notes.append(f"constant inflow {inflow_m3s:g} m3/s; other terms at their day-of-year means")
        extra = dict(method="constant")
    else:
        raise ConfigError(f"unknown scenario {scenario!r}")
    return Forcing(
        dates=dates,
        inflow_m3s=np.maximum(arrays["inflow_m3s"], 0.0),
        rain_m=np.maximum(arrays["rain_m"], 0.0),
        evaporation_m=arrays["evaporation_m"],
        withdrawal_m3s=np.maximum(arrays["withdrawal_m3s"], 0.0),
        release_m3s=np.maximum(arrays["release_m3s"], 0.0),
        labels=labels,
        notes=tuple(notes),
        **extra,
    )


def horizon_volumes(inflow_m3s: np.ndarray) -> np.ndarray:
    """Accumulated inflow volume of each member over the horizon (m³): the sum of the daily mean
    flows (m³/s, array ``(days, members)``) times 86,400 s."""
    return np.asarray(inflow_m3s, dtype=float).sum(axis=0) * 86_400.0


def _volume_percentile(
    history: pd.DataFrame, dates: pd.DatetimeIndex, percentile: float
) -> tuple[dict[str, np.ndarray], str, str, int]:
    """The trace whose inflow volume over the horizon has the stated non-exceedance.

    The historical years aligned on the forecast's days (as in ``replay``) give n horizon
    volumes; the target is their ``percentile`` quantile by the Weibull plotting position
    i/(n+1) (``numpy.quantile(method="weibull")``; Weibull 1939, the usual plotting position of
    hydrology), which stays at the driest or wettest year outside 1/(n+1)..n/(n+1). The year
    whose volume is nearest the target gives the pattern; its daily inflow is scaled so that the
    horizon volume equals the target exactly, and its rain, evaporation, withdrawals and
    releases are kept as they were (one trace).
    """
    years, mat, _ = _year_matrix(history, dates)
    if not years:
        raise ConfigError(
            f"the 'percentile' scenario needs at least one historical year with {_MIN_COVERAGE:.0%}"
            f" of its inflow days recorded over the {len(dates)} forecast days of the year"
        )
    vol = horizon_volumes(mat["inflow_m3s"].T)
    n = len(years)
    target = float(np.quantile(vol, percentile / 100.0, method="weibull"))
    k = int(np.argmin(np.abs(vol - target)))
    scale = target / vol[k] if vol[k] > 0 else 1.0
    arrays = {t: mat[t][k][:, None].copy() for t in TERMS}
    arrays["inflow_m3s"] = arrays["inflow_m3s"] * scale
    label = f"p{percentile:g} of horizon inflow volume ({years[k]} scaled x{scale:.3f})"
    note = (
        f"percentile scenario: the inflow volume over the {len(dates)} days at "
        f"{percentile:g}% non-exceedance among {n} historical years (Weibull plotting position "
        f"i/(n+1)), {target:.4g} m3; daily pattern, rain and evaporation of {years[k]}, its inflow "
        f"scaled by {scale:.3f}"
    )
    lo, hi = 100.0 / (n + 1), 100.0 * n / (n + 1)
    if not lo <= percentile <= hi:
        note += (
            f"; {n} years resolve non-exceedances from {lo:.0f} to {hi:.0f}% only, so this is the "
            f"{'driest' if percentile < lo else 'wettest'} year of the record, not a "
            f"{percentile:g}% volume"
        )
    return arrays, label, note, n


def _anomaly_at(z: pd.Series, start: pd.Timestamp) -> tuple[float, pd.Timestamp | None]:
    """The anomaly on ``start``, or the last one recorded up to 3 days before it; (0, None) when
    there is none. The record may go on after ``start`` (a forecast started inside the record):
    those later values are never used."""
    known = z.loc[: pd.Timestamp(start)]
    if known.empty or known.index[-1] < pd.Timestamp(start) - pd.Timedelta(days=3):
        return 0.0, None
    return float(known.iloc[-1]), pd.Timestamp(known.index[-1])


def _ar1(
    history: pd.DataFrame, dates: pd.DatetimeIndex, members: int, rng: np.random.Generator
) -> tuple[dict[str, np.ndarray], str, int]:
    """Seasonal AR(1) of log inflow: z = (log(Q + eps) - mu(doy)) / sd(doy), z_t = phi z_{t-1}
    + e_t with e ~ N(0, sigma^2) of the fit, started from the anomaly on the forecast's start day
    (the last one recorded up to 3 days before it; the mean when there is none)."""
    from statsmodels.tsa.ar_model import AutoReg

    q = history["inflow_m3s"] if "inflow_m3s" in history.columns else None
    if q is None or q.notna().sum() < 60:
        raise ConfigError("the AR(1) scenario needs at least 60 days of inflow record")
    eps = max(float(q[q > 0].quantile(0.01)) if (q > 0).any() else 1e-6, 1e-9)  # m³/s
    logq = np.log(q + eps)
    mu = climatology(logq)
    sd = np.sqrt(np.maximum(climatology((logq - mu[_doy(pd.DatetimeIndex(q.index))]) ** 2), 1e-12))
    hd = _doy(pd.DatetimeIndex(q.index))
    z = ((logq - mu[hd]) / sd[hd]).dropna()
    # the longest run of consecutive days for the fit
    gaps = np.flatnonzero(np.diff(z.index.to_numpy()) != np.timedelta64(1, "D"))
    bounds = np.concatenate([[0], gaps + 1, [z.size]])
    k = int(np.argmax(np.diff(bounds)))
    run = z.iloc[bounds[k] : bounds[k + 1]].to_numpy()
    if run.size < 30:
        raise ConfigError("the AR(1) scenario needs at least 30 consecutive days of inflow")
    fit = AutoReg(run, lags=1, trend="n").fit()
    phi = float(np.clip(fit.params[0], -0.999, 0.999))
    innov = float(np.sqrt(max(fit.sigma2, 1e-12)))
    days = len(dates)
    z0, z0_date = _anomaly_at(z, dates[0] - pd.Timedelta(days=1))
    e = rng.standard_normal((days, members)) * innov
    sim = np.empty((days, members))
    prev = np.full(members, z0)
    for d in range(days):  # a recursion over days, vectorised over members
        prev = phi * prev + e[d]
        sim[d] = prev
    doy = _doy(dates)
    inflow = np.exp(mu[doy][:, None] + sd[doy][:, None] * sim) - eps
    n_years = max(1, int(run.size // 365))
    note = f"seasonal AR(1) of log inflow: phi = {phi:.3f}, innovation sd = {innov:.3f}, " + (
        f"started from the anomaly of {z0_date.date()} ({z0:+.2f} sd)"
        if z0_date is not None
        else "started from the mean (no inflow recorded within 3 days before the start)"
    )
    return {"inflow_m3s": np.maximum(inflow, 0.0)}, note, n_years
