"""Scenarios that keep the persistence of droughts and see the present state.

* :func:`monthly_generator`: a periodic first-order autoregressive model of the log of monthly
  mean inflow (Thomas & Fiering, 1962; Salas et al., 1980, ch. 5), so that a dry month tends to
  follow a dry month with the correlation fitted for that pair of calendar months, disaggregated
  to days by the method of fragments: each simulated month takes the daily pattern (the
  fragments, day / month mean) of a historical month of the same calendar month, chosen among
  the 3 whose monthly inflow is nearest to the simulated one (k-nearest neighbours, as in Lall &
  Sharma, 1996), and that historical month's rain, evaporation, withdrawals and releases, so that
  the terms of one trace stay together. The monthly mean of each member is kept exactly.
* :func:`esp_weights`: ensemble streamflow prediction (Day, 1985) takes the historical years as
  traces from the present state; here each year is weighted by how alike its inflow anomaly over
  the days before the start is to the present one (a Gaussian kernel on the standardised
  anomaly, bandwidth by Silverman's rule, as in the trace weighting of Smith et al., 1992, from
  memory).

References
----------
Thomas, H. A. & Fiering, M. B. (1962). Mathematical synthesis of streamflow sequences for the
analysis of river basins by simulation. In Maass et al., Design of Water-Resource Systems,
Harvard University Press, ch. 12.
Salas, J. D., Delleur, J. W., Yevjevich, V. & Lane, W. L. (1980). Applied Modeling of Hydrologic
Time Series. Water Resources Publications, ch. 5 (periodic AR(1), eq. 5.2 form).
Lall, U. & Sharma, A. (1996). A nearest neighbor bootstrap for resampling hydrologic time series.
Water Resources Research 32(3), 679-693.
Day, G. N. (1985). Extended streamflow forecasting using NWSRFS. Journal of Water Resources
Planning and Management 111(2), 157-170.
Smith, J. A., Day, G. N. & Kane, M. D. (1992). Nonparametric framework for long-range streamflow
forecasting. Journal of Water Resources Planning and Management 118(1), 82-92.
Silverman, B. W. (1986). Density Estimation for Statistics and Data Analysis, eq. 3.31.
Kish, L. (1965). Survey Sampling, Wiley, section 11.7 (effective sample size of weights).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import ConfigError

__all__ = ["MonthlyTraces", "monthly_generator", "esp_weights", "allocate_members"]

_NEIGHBOURS = 3  # historical months among which a simulated month's fragments are drawn
_MIN_COVERAGE = 0.8  # share of known inflow days that makes a month usable
_RECENT_DAYS = 30  # days before the start standing for the month before the first simulated


@dataclass(frozen=True)
class MonthlyTraces:
    """Output of :func:`monthly_generator`.

    ``arrays`` maps each term of :data:`~lakebalance.drawdown.scenarios.TERMS` to ``(days,
    members)``; ``months`` the (year, month) of each simulated month; ``monthly_mean_m3s`` the
    simulated monthly mean inflow ``(months, members)`` (m³/s) that the daily values keep
    exactly over each whole calendar month; ``params`` the fitted mean, standard deviation and
    lag-one correlation of log inflow per calendar month (DataFrame, index 1..12).
    """

    arrays: dict[str, np.ndarray]
    months: tuple[tuple[int, int], ...]
    monthly_mean_m3s: np.ndarray
    params: pd.DataFrame
    years: tuple[int, ...]  # the years of the calendar month with the fewest whole records
    note: str


def _offset(q: pd.Series) -> float:
    """Offset before the log (m³/s): the 1 % quantile of the positive flows (>= 1e-9)."""
    pos = q[q > 0]
    return max(float(pos.quantile(0.01)) if pos.size else 1e-6, 1e-9)


def _monthly_table(history: pd.DataFrame) -> tuple[pd.DataFrame, dict, float]:
    """Monthly mean log inflow of the usable months, and the daily terms of each of them."""
    from .scenarios import TERMS, _filled

    q = history["inflow_m3s"] if "inflow_m3s" in history.columns else None
    if q is None or not q.notna().any():
        raise ConfigError("the monthly generator needs an inflow record")
    eps = _offset(q.dropna())
    filled = {}
    for t in TERMS:
        s, clim = _filled(history, t)
        from .scenarios import _doy

        doy = _doy(pd.DatetimeIndex(s.index))
        filled[t] = np.where(
            np.isfinite(s.to_numpy(dtype=float)), s.to_numpy(dtype=float), clim[doy]
        )
    idx = pd.DatetimeIndex(history.index)
    known = q.notna().to_numpy()
    key = idx.year * 100 + idx.month
    days_in = idx.days_in_month.to_numpy()
    rows = []
    pools: dict[int, list] = {m: [] for m in range(1, 13)}
    for k in np.unique(key):
        sel = np.flatnonzero(key == k)
        y, m = divmod(int(k), 100)
        if sel.size < days_in[sel[0]] or known[sel].mean() < _MIN_COVERAGE:
            continue  # a month not wholly in the record, or too patchy
        inflow = np.maximum(filled["inflow_m3s"][sel], 0.0)
        mean = float(inflow.mean())
        rows.append({"year": y, "month": m, "x": np.log(mean + eps)})
        pools[m].append({"year": y, "mean": mean, **{t: filled[t][sel] for t in TERMS}})
    table = pd.DataFrame(rows, columns=["year", "month", "x"])
    return table, pools, eps


def _fit(table: pd.DataFrame) -> pd.DataFrame:
    """Per calendar month: mean and sd (ddof 1) of x, and the correlation r_m of (x_{m-1}, x_m)
    over the years that have both (January pairs with the previous December)."""
    wide = table.pivot(index="year", columns="month", values="x")
    out = []
    for m in range(1, 13):
        col = wide[m].dropna() if m in wide.columns else pd.Series(dtype=float)
        if col.size < 3:
            raise ConfigError(
                f"the monthly generator needs at least 3 whole recorded years of each calendar "
                f"month; month {m} has {col.size}"
            )
        if m == 1:
            prev = wide[12].shift(1) if 12 in wide.columns else pd.Series(np.nan, wide.index)
        else:
            prev = wide[m - 1] if m - 1 in wide.columns else pd.Series(np.nan, wide.index)
        pair = pd.concat([prev, wide[m]], axis=1).dropna()
        r = float(np.corrcoef(pair.iloc[:, 0], pair.iloc[:, 1])[0, 1]) if len(pair) >= 3 else 0.0
        out.append(
            {
                "month": m,
                "mean": float(col.mean()),
                "sd": max(float(col.std(ddof=1)), 1e-9),
                "r1": float(np.clip(np.nan_to_num(r), -0.99, 0.99)),
                "years": int(col.size),
            }
        )
    return pd.DataFrame(out).set_index("month")


def monthly_generator(
    history: pd.DataFrame,
    dates: pd.DatetimeIndex,
    members: int,
    rng: np.random.Generator,
) -> MonthlyTraces:
    """Persistent daily traces from a periodic monthly AR(1) of log inflow and fragments.

    Parameters
    ----------
    history : pandas.DataFrame
        Daily history (SI) with ``inflow_m3s`` and any other term of
        :data:`~lakebalance.drawdown.scenarios.TERMS`.
    dates : pandas.DatetimeIndex
        The forecast days.
    members : int
        Members.
    rng : numpy.random.Generator
        Source of the draws.

    Returns
    -------
    MonthlyTraces

    Notes
    -----
    With ``x = log(Q + eps)`` the monthly mean inflow's log, standardised per calendar month
    ``z = (x - mu_m) / s_m``, the model is (Thomas & Fiering, 1962; Salas et al., 1980, ch. 5)

        z_t = r_m z_{t-1} + sqrt(1 - r_m^2) e_t,     e_t ~ N(0, 1),

    which keeps the monthly means, standard deviations and month-to-month correlations of x.
    The first simulated month follows the anomaly of the 30 days up to the start (standardised
    with the statistics of the month before the first simulated one), so a dry present carries
    forward with the fitted decay; with no inflow recorded then it starts from N(0, 1).
    """
    from .scenarios import TERMS

    table, pools, eps = _monthly_table(history)
    params = _fit(table)
    days = len(dates)
    periods = pd.PeriodIndex(dates, freq="M")
    months = list(dict.fromkeys((p.year, p.month) for p in periods))
    # the present: the inflow of the 30 days up to the start, as the month before the first
    start = dates[0] - pd.Timedelta(days=1)
    q = history["inflow_m3s"]
    recent = q.loc[start - pd.Timedelta(days=_RECENT_DAYS - 1) : start].dropna()
    m_prev = (months[0][1] - 2) % 12 + 1
    if recent.size >= 0.5 * _RECENT_DAYS:
        z0 = (np.log(max(float(recent.mean()), 0.0) + eps) - params.at[m_prev, "mean"]) / params.at[
            m_prev, "sd"
        ]
        z = np.full(members, float(z0))
        start_note = f"from the anomaly of the 30 days up to the start ({z0:+.2f} sd)"
    else:
        z = rng.standard_normal(members)
        start_note = "from the climatology (no inflow recorded in the 30 days up to the start)"
    arrays = {t: np.empty((days, members)) for t in TERMS}
    mean_m3s = np.empty((len(months), members))
    day_month = np.array([(p.year, p.month) for p in periods])
    for j, (y, m) in enumerate(months):
        r, mu, sd = params.at[m, "r1"], params.at[m, "mean"], params.at[m, "sd"]
        z = r * z + np.sqrt(1.0 - r * r) * rng.standard_normal(members)
        x = mu + sd * z
        qm = np.maximum(np.exp(x) - eps, 0.0)  # simulated monthly mean inflow (m³/s)
        mean_m3s[j] = qm
        pool = pools[m]
        hx = np.log(np.array([p["mean"] for p in pool]) + eps)
        near = np.argsort(np.abs(hx[None, :] - x[:, None]), axis=1, kind="stable")
        k = min(_NEIGHBOURS, len(pool))
        pick = near[np.arange(members), rng.integers(0, k, members)]
        length = pd.Period(year=y, month=m, freq="M").days_in_month
        rows = np.flatnonzero((day_month[:, 0] == y) & (day_month[:, 1] == m))
        dom = dates[rows].day.to_numpy() - 1  # day of month (0-based) of the forecast days
        for t in TERMS:
            full = np.stack(
                [p[t][np.minimum(np.arange(length), p[t].size - 1)] for p in pool]
            )  # (pool, length): a 28-day February stretched by its last day to 29
            if t == "inflow_m3s":
                full = np.maximum(full, 0.0)
                tot = full.sum(axis=1, keepdims=True)
                frag = np.where(tot > 0, full * length / np.where(tot > 0, tot, 1.0), 1.0)
                arrays[t][rows] = frag[pick][:, dom].T * qm[None, :]
            else:
                arrays[t][rows] = full[pick][:, dom].T
    # the independent years: those of the calendar month with the fewest whole records
    fewest = int(params["years"].idxmin())
    years = tuple(sorted(int(v) for v in table.loc[table["month"] == fewest, "year"]))
    note = (
        f"periodic monthly AR(1) of log inflow (Thomas-Fiering) fitted on {len(years)} years, "
        f"lag-one month correlation {params['r1'].min():.2f} to {params['r1'].max():.2f}, "
        f"started {start_note}; days by fragments of the 3 nearest historical months, with their "
        "rain and evaporation"
    )
    return MonthlyTraces(arrays, tuple(months), mean_m3s, params, years, note)


def esp_weights(
    history: pd.DataFrame,
    years: list[int] | tuple[int, ...],
    start: pd.Timestamp,
    antecedent_days: int = 90,
) -> tuple[np.ndarray, str]:
    """Weights of the historical years by the likeness of their antecedent inflow to the present.

    Parameters
    ----------
    history : pandas.DataFrame
        Daily history with ``inflow_m3s`` (m³/s).
    years : sequence of int
        The historical years of the traces (the year each trace's start falls in).
    start : pandas.Timestamp
        The forecast start (the last day of the antecedent window).
    antecedent_days : int
        Length of the window (days) ending on the start day.

    Returns
    -------
    weights : ndarray (years,)
        Summing to 1; equal when the present or too many years lack an antecedent record.
    note : str

    Notes
    -----
    ``a_y = log(mean inflow of year y's window + eps)``; with ``s`` the standard deviation of the
    ``a_y`` and ``h = 1.06 s n^(-1/5)`` (Silverman, 1986, eq. 3.31),
    ``w_y ∝ exp(-((a_y - a_0) / h)^2 / 2)``. A year without 80 % of its window recorded keeps
    the mean weight of the others (it is neither favoured nor dropped).
    """
    q = history["inflow_m3s"]
    eps = _offset(q.dropna())
    start = pd.Timestamp(start)
    n = len(years)

    def anomaly(end: pd.Timestamp) -> float:
        window = q.loc[end - pd.Timedelta(days=antecedent_days - 1) : end]
        if window.notna().sum() < _MIN_COVERAGE * antecedent_days:
            return float("nan")
        return float(np.log(max(float(window.mean()), 0.0) + eps))

    def shifted(y: int) -> pd.Timestamp:
        try:
            return start.replace(year=y)
        except ValueError:  # 29 February
            return (start - pd.Timedelta(days=1)).replace(year=y)

    a0 = anomaly(start)
    a = np.array([anomaly(shifted(y)) for y in years])
    ok = np.isfinite(a)
    if not np.isfinite(a0) or ok.sum() < 3:
        return np.full(n, 1.0 / n), (
            f"ESP: {n} historical years from the present state, equally weighted (no "
            f"{antecedent_days}-day inflow record before the start to condition on)"
        )
    s = float(np.std(a[ok], ddof=1))
    h = max(1.06 * s * ok.sum() ** -0.2, 1e-9)
    k = np.full(n, np.nan)
    k[ok] = np.exp(-0.5 * ((a[ok] - a0) / h) ** 2)
    if not np.any(k[ok] > 0):
        k[ok] = 1.0
    k[~ok] = np.mean(k[ok])
    w = k / k.sum()
    drier_than = float(np.mean(a[ok] > a0))  # share of the years wetter than the present
    note = (
        f"ESP: {n} historical years from the present state, weighted by the likeness of their "
        f"inflow over the {antecedent_days} days before the start to the present's (drier than "
        f"{drier_than:.0%} of the years; Gaussian kernel, bandwidth {h / s if s > 0 else 0:.2f} sd)"
    )
    return w, note


def allocate_members(weights: np.ndarray, members: int) -> np.ndarray:
    """Member -> year index, each year getting a share of the members proportional to its weight
    (largest-remainder rounding, so that counts differ from ``w M`` by less than one)."""
    w = np.asarray(weights, dtype=float)
    w = w / w.sum()
    exact = w * int(members)
    counts = np.floor(exact).astype(int)
    short = int(members) - int(counts.sum())
    if short > 0:
        counts[np.argsort(-(exact - counts), kind="stable")[:short]] += 1
    return np.repeat(np.arange(w.size), counts)
