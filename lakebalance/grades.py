"""Grades of every daily value of every balance term, the missing days estimated, and totals.

Each day of each term is *measured*, *estimated* (with its method in words) or *missing*:

* stage: a gap of up to ``max_gap_days`` is interpolated linearly in time; a declared offset
  period's corrected stage is estimated (:mod:`lakebalance.periods`);
* a tributary's inflow: scaled from the other gauged tributaries on the same day by the ratio of
  the two over the common days within ±45 days (a neighbouring gauge), else the tributary's own
  day-of-year climatology;
* rain and lake evaporation: day-of-year climatology (the mean of the record's days within ±15
  days of the same day of the year);
* metered withdrawals and releases: the metered rate interpolated linearly in time over a gap of
  up to ``max_gap_days``, else the day-of-year climatology;
* outflow and storage change follow the stage they come from (and a declared ice period makes
  the outflow estimated); rain and evaporation volumes also need the area at the day's stage;
  the residual is measured only when every term is.

These are the usual infilling methods of hydrometric records (WMO-No. 168, 2008, vol. I, ch. 5:
interpolation, correlation with a neighbouring station, climatological means), in our words.

Totals (:func:`graded_totals`) are given measured-only (the days a term was measured) and
infilled (every day that is not missing), with the share estimated. Pure: arrays and frames in,
frames out.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from .balance import DailyTerms

__all__ = [
    "MEASURED",
    "MISSING",
    "ESTIMATED",
    "estimated",
    "day_of_year_climatology",
    "interpolate_gaps",
    "scale_from_neighbours",
    "infill_terms",
    "term_grades",
    "graded_totals",
]

MEASURED = "measured"
MISSING = "missing"
ESTIMATED = "estimated"


def estimated(method: str) -> str:
    """The grade of a value estimated by ``method`` (words), e.g. ``"estimated: interpolated"``."""
    return f"{ESTIMATED}: {method}"


def is_estimated(grades: np.ndarray) -> np.ndarray:
    """True where a grade is an estimate (of any method)."""
    g = np.asarray(grades, dtype=object)
    return np.array([str(x).startswith(ESTIMATED) for x in g.ravel()], dtype=bool).reshape(g.shape)


def day_of_year_climatology(
    values: np.ndarray, index: pd.DatetimeIndex, half_window: int = 15
) -> np.ndarray:
    """The mean of the record's values within ±``half_window`` days of each day's day of year.

    Parameters
    ----------
    values : ndarray
        Daily values (NaN = missing).
    index : pandas.DatetimeIndex
        Their days.
    half_window : int
        Days each side, days (circular over the year; 29 February counts as day 60).

    Returns
    -------
    ndarray
        The climatology on each day of ``index`` (NaN when no value falls in the window).
    """
    v = np.asarray(values, dtype=float)
    doy = np.asarray(index.day_of_year) - 1  # 0..365
    ok = np.isfinite(v)
    sums = np.bincount(doy[ok], weights=v[ok], minlength=366)
    counts = np.bincount(doy[ok], minlength=366).astype(float)
    kernel = np.ones(2 * half_window + 1)
    wrap = lambda a: np.r_[a[-half_window:], a, a[:half_window]]  # noqa: E731
    s = np.convolve(wrap(sums), kernel, mode="valid")
    c = np.convolve(wrap(counts), kernel, mode="valid")
    with np.errstate(invalid="ignore", divide="ignore"):
        clim = np.where(c > 0, s / c, np.nan)
    return clim[doy]


def interpolate_gaps(values: np.ndarray, max_gap_days: int) -> np.ndarray:
    """``values`` with each run of at most ``max_gap_days`` missing days between two values
    filled linearly in time; longer runs and runs at the ends stay missing."""
    v = np.asarray(values, dtype=float).copy()
    ok = np.isfinite(v)
    if ok.sum() < 2:
        return v
    x = np.arange(v.size)
    filled = np.interp(x, x[ok], v[ok])
    miss = ~ok
    edges = np.flatnonzero(np.diff(np.r_[0, miss.astype(int), 0]))
    for a, b in zip(edges[::2], edges[1::2], strict=True):
        if a > 0 and b < v.size and (b - a) <= max_gap_days:
            v[a:b] = filled[a:b]
    return v


def scale_from_neighbours(
    target: np.ndarray, neighbours: np.ndarray, half_window: int = 45
) -> np.ndarray:
    """The target gauge estimated from the sum of its neighbours: ratio × neighbours.

    The ratio is Σ target / Σ neighbours over the days within ±``half_window`` days on which
    both were gauged (NaN with fewer than 10 such days).
    """
    t = np.asarray(target, dtype=float)
    nb = np.asarray(neighbours, dtype=float)
    both = np.isfinite(t) & np.isfinite(nb)
    kernel = np.ones(2 * half_window + 1)
    st = np.convolve(np.where(both, t, 0.0), kernel, mode="same")
    sn = np.convolve(np.where(both, nb, 0.0), kernel, mode="same")
    cnt = np.convolve(both.astype(float), kernel, mode="same")
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where((cnt >= 10) & (sn > 0), st / sn, np.nan)
    return ratio * nb


def _fill(
    values: np.ndarray, grade: np.ndarray, estimate: np.ndarray, method: str
) -> tuple[np.ndarray, np.ndarray]:
    use = ~np.isfinite(values) & np.isfinite(estimate)
    out = np.where(use, estimate, values)
    g = grade.copy()
    g[use] = estimated(method)
    return out, g


def _base_grade(values: np.ndarray) -> np.ndarray:
    return np.where(np.isfinite(values), MEASURED, MISSING).astype(object)


def infill_terms(
    terms: DailyTerms,
    *,
    stage_estimated: np.ndarray | None = None,
    max_gap_days: int = 31,
) -> tuple[DailyTerms, dict[str, np.ndarray]]:
    """The daily terms with their missing days estimated, and the grade of each input series.

    Parameters
    ----------
    terms : DailyTerms
        The measured daily terms (their stage index is the balance's days).
    stage_estimated : ndarray of str, optional
        Per day, the method of a stage already estimated (a declared offset period), ``""``
        where measured.
    max_gap_days : int
        Longest gap of stage, withdrawal or release interpolated in time, days.

    Returns
    -------
    terms : DailyTerms
        The same terms, gaps estimated (sub-daily stage and day-boundary stage left out: the
        infilled closure uses the daily path).
    grades : dict of str to ndarray
        ``stage``, ``inflow:<name>``, ``rain``, ``evaporation``, ``withdrawal``, ``release`` (each
        present term): one grade a day.
    """
    import pandas as pd

    stage_s = pd.Series(terms.stage_m, dtype=float)
    index = pd.DatetimeIndex(stage_s.index)
    grades: dict[str, np.ndarray] = {}

    h = stage_s.to_numpy(dtype=float)
    g = _base_grade(h)
    if stage_estimated is not None:
        method = np.asarray(stage_estimated, dtype=object)
        mark = (method != "") & np.isfinite(h)
        g[mark] = [estimated(str(m)) for m in method[mark]]
    h_f, g = _fill(h, g, interpolate_gaps(h, max_gap_days), "stage interpolated in time")
    grades["stage"] = g
    changes: dict = {
        "stage_m": pd.Series(h_f, index=index),
        "boundary_stage_m": None,
        "subdaily_stage_m": None,
    }

    def arr(s: pd.Series | None) -> np.ndarray | None:
        return None if s is None else pd.Series(s, dtype=float).reindex(index).to_numpy()

    raw_inflows = {k: arr(v) for k, v in terms.inflow_m3s.items()}
    new_inflows = {}
    for name, q in raw_inflows.items():
        g = _base_grade(q)
        others = [v for k, v in raw_inflows.items() if k != name]
        if others:
            nb = np.sum(np.vstack(others), axis=0)  # NaN when any neighbour is missing
            names = ", ".join(k for k in raw_inflows if k != name)
            q, g = _fill(
                q, g, scale_from_neighbours(q, nb), f"scaled from {names} (ratio over ±45 days)"
            )
        q, g = _fill(q, g, day_of_year_climatology(q, index), "day-of-year climatology")
        new_inflows[name] = pd.Series(q, index=index)
        grades[f"inflow:{name}"] = g
    changes["inflow_m3s"] = new_inflows

    for field, key in (("rain_m", "rain"), ("evaporation_m", "evaporation")):
        v = arr(getattr(terms, field))
        if v is None:
            continue
        g = _base_grade(v)
        v, g = _fill(v, g, day_of_year_climatology(v, index), "day-of-year climatology")
        changes[field] = pd.Series(v, index=index)
        grades[key] = g
    for field, key in (("withdrawal_m3s", "withdrawal"), ("release_m3s", "release")):
        v = arr(getattr(terms, field))
        if v is None:
            continue
        g = _base_grade(v)
        v, g = _fill(v, g, interpolate_gaps(v, max_gap_days), "metered rate interpolated in time")
        v, g = _fill(v, g, day_of_year_climatology(v, index), "day-of-year climatology")
        changes[field] = pd.Series(v, index=index)
        grades[key] = g
    return dataclasses.replace(terms, **changes), grades


def _combine(*grades: np.ndarray) -> np.ndarray:
    """Missing if any is missing, else estimated (with the first method) if any is, else
    measured."""
    stack = np.vstack([np.asarray(g, dtype=object) for g in grades])
    out = np.full(stack.shape[1], MEASURED, dtype=object)
    est = is_estimated(stack)
    any_est = est.any(axis=0)
    first = np.argmax(est, axis=0)
    out[any_est] = stack[first[any_est], np.flatnonzero(any_est)]
    out[(stack == MISSING).any(axis=0)] = MISSING
    return out


def term_grades(
    index: pd.DatetimeIndex,
    input_grades: Mapping[str, np.ndarray],
    input_index: pd.DatetimeIndex,
    *,
    absent: tuple[str, ...] = (),
    outflow_estimated: Mapping[str, np.ndarray] | None = None,
) -> pd.DataFrame:
    """The grade of every balance term on every day of the balance.

    Parameters
    ----------
    index : pandas.DatetimeIndex
        The balance's days.
    input_grades : mapping
        From :func:`infill_terms` (on ``input_index``).
    input_index : pandas.DatetimeIndex
        The days of the input grades.
    absent : tuple of str
        Terms the lake has no record of (graded measured: zero by the lake's make-up).
    outflow_estimated : mapping of str to ndarray of bool, optional
        Method → days whose outflow was estimated otherwise (a declared ice period).

    Returns
    -------
    pandas.DataFrame
        Columns ``stage``, ``storage_change``, ``inflow`` and ``inflow:<name>``, ``rain``,
        ``evaporation``, ``outflow``, ``withdrawal``, ``release``, ``residual``.
    """
    import pandas as pd

    pos = input_index.get_indexer(index)

    def at(key: str) -> np.ndarray:
        g = np.asarray(input_grades[key], dtype=object)
        return np.where(pos >= 0, g[np.clip(pos, 0, None)], MISSING).astype(object)

    stage = at("stage")
    prev = np.r_[stage[:1], stage[:-1]]
    nxt = np.r_[stage[1:], stage[-1:]]
    # the day-boundary stage comes from the day and its neighbours; storage change from both ends
    storage = _combine(stage, prev, nxt)
    out: dict[str, np.ndarray] = {"stage": stage, "storage_change": storage}
    names = [k.split(":", 1)[1] for k in input_grades if k.startswith("inflow:")]
    per = {f"inflow:{n}": at(f"inflow:{n}") for n in names}
    out["inflow"] = _combine(*per.values()) if per else np.full(len(index), MEASURED, object)
    out.update(per)
    for key in ("rain", "evaporation"):  # a depth times the area at the day's stage
        if key in input_grades:
            out[key] = _combine(at(key), stage)
        else:
            out[key] = np.full(len(index), MEASURED, object)
    outflow = storage.copy() if "outflow" not in absent else np.full(len(index), MEASURED, object)
    for method, mask in (outflow_estimated or {}).items():
        m = np.asarray(mask, dtype=bool) & (outflow != MISSING)
        outflow[m] = estimated(method)
    out["outflow"] = outflow
    for key in ("withdrawal", "release"):
        out[key] = at(key) if key in input_grades else np.full(len(index), MEASURED, object)
    cols = [c for c in out if c not in ("stage",)]
    out["residual"] = _combine(*[out[c] for c in cols if not c.startswith("inflow:")])
    return pd.DataFrame(out, index=index)


def graded_totals(
    measured: pd.DataFrame,
    infilled: pd.DataFrame,
    grades: pd.DataFrame,
    keys: np.ndarray,
    label: str,
    terms: list[str],
) -> pd.DataFrame:
    """Totals of each term over each period, measured-only and infilled, with the share estimated.

    Parameters
    ----------
    measured : pandas.DataFrame
        The balance's daily table (``<term>_m3`` columns, m³/d).
    infilled : pandas.DataFrame
        The same columns from the closure of the infilled terms.
    grades : pandas.DataFrame
        From :func:`term_grades` (same index).
    keys : ndarray
        The period of each day (a month's first day, a water year).
    label : str
        Name of the index.
    terms : list of str
        Terms (``inflow``, ``inflow:<name>``, ``rain``, ...).

    Returns
    -------
    pandas.DataFrame
        Per period: ``days``; per term ``<term>_measured_m3`` (sum over the days it was
        measured), ``<term>_infilled_m3`` (sum over every day not missing, estimates included),
        ``<term>_estimated_share`` (share of the infilled total's absolute volume that is
        estimated, -), and ``<term>_measured_days`` + ``<term>_estimated_days`` +
        ``<term>_missing_days`` = ``days``.
    """
    import pandas as pd

    cols: dict[str, np.ndarray] = {}
    days = pd.Series(1, index=measured.index).groupby(np.asarray(keys)).sum()
    out = pd.DataFrame({"days": days.to_numpy()}, index=pd.Index(days.index, name=label))
    for t in terms:
        g = grades[t].to_numpy(dtype=object)
        meas = g == MEASURED
        miss = g == MISSING
        est = ~meas & ~miss
        col = f"{t}_m3"
        vm = measured[col].to_numpy(dtype=float) if col in measured else np.zeros(len(g))
        vi = infilled[col].reindex(measured.index).to_numpy(dtype=float)
        vi_ok = np.where(~miss & np.isfinite(vi), vi, 0.0)
        vm_ok = np.where(meas & np.isfinite(vm), vm, 0.0)
        frame = (
            pd.DataFrame(
                {
                    "m": vm_ok,
                    "i": vi_ok,
                    "e": np.where(est, np.abs(vi_ok), 0.0),
                    "a": np.abs(vi_ok),
                    "nm": meas.astype(int),
                    "ne": est.astype(int),
                    "nx": miss.astype(int),
                }
            )
            .groupby(np.asarray(keys))
            .sum()
        )
        cols[f"{t}_measured_m3"] = frame["m"].to_numpy()
        cols[f"{t}_infilled_m3"] = frame["i"].to_numpy()
        with np.errstate(invalid="ignore", divide="ignore"):
            cols[f"{t}_estimated_share"] = np.where(frame["a"] > 0, frame["e"] / frame["a"], 0.0)
        cols[f"{t}_measured_days"] = frame["nm"].to_numpy()
        cols[f"{t}_estimated_days"] = frame["ne"].to_numpy()
        cols[f"{t}_missing_days"] = frame["nx"].to_numpy()
    return pd.concat([out, pd.DataFrame(cols, index=out.index)], axis=1)
