"""Rating diagnostics: has the control shifted, and how far does the record leave the gaugings?

Notes
-----
Shift test: in each period (before/after a date, or each year) the mean residual
:math:`\\bar r` of the gaugings (log residuals: a relative bias; linear: m³/s) gets the Student t
interval :math:`\\bar r \\pm t_{1-\\alpha/2,\\,m-1}\\, s_r/\\sqrt m`; a period whose interval excludes
zero no longer fits the rating. Two periods are compared by Welch's t-test (Welch, 1947, eq. 9).
This is the usual check of rating stability by residual bias (ISO 1100-2, 2010, §9; common
practice).

References
----------
ISO 1100-2 (2010). Hydrometry - Determination of the stage-discharge relationship.
Welch, B. L. (1947). The generalization of "Student's" problem when several different
population variances are involved. Biometrika 34, 28-35.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from ..errors import ExtrapolationWarning, FitError

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from .fit import RatingFit

__all__ = ["ShiftTest", "shift_test", "ExtrapolationCheck", "extrapolation_check"]


@dataclass(frozen=True)
class ShiftTest:
    """Mean residual per period with its interval.

    Attributes
    ----------
    periods : DataFrame
        Columns ``period``, ``first``, ``last``, ``n``, ``mean_residual``, ``lower``, ``upper``,
        ``shifted`` (interval excludes 0), ``bias_percent`` (log residuals: 100 (e^mean - 1)).
    by : str
        ``"date"`` (before/after ``shift_date``) or ``"year"``.
    p_value : float or None
        Welch t-test of equal means before and after (``by="date"`` only).
    first_shift : str or None
        The first period that no longer fits, or None.
    level : float
        Confidence level (-).
    """

    periods: pd.DataFrame
    by: str
    p_value: float | None
    first_shift: str | None
    level: float

    def messages(self) -> list[str]:
        """Plain-words findings (empty when every period fits)."""
        out = []
        for row in self.periods.itertuples():
            if row.shifted:
                out.append(
                    f"gaugings of {row.period} ({row.n}) depart from the rating: mean residual "
                    f"{row.mean_residual:+.3g} [{row.lower:+.3g}, {row.upper:+.3g}]"
                )
        return out


def shift_test(
    fit: RatingFit,
    shift_date: str | None = None,
    *,
    by: Literal["auto", "date", "year"] = "auto",
    alpha: float = 0.05,
) -> ShiftTest:
    """Test whether the gaugings of some period no longer fit the rating.

    Parameters
    ----------
    fit : RatingFit
        A fitted rating whose gaugings carry dates.
    shift_date : str, optional
        ISO date splitting before and after (``by="date"``).
    by : {"auto", "date", "year"}
        ``"auto"``: by date when ``shift_date`` is given, else per calendar year.
    alpha : float
        1 - confidence level (-).

    Raises
    ------
    FitError
        When the gaugings have no dates.
    """
    import pandas as pd
    from scipy import stats

    t = fit.table
    t = t[t["used"] & t["residual"].notna()]
    if t["date"].isna().all():
        raise FitError("the gaugings have no dates; a rating-shift test needs them")
    t = t[t["date"].notna()]
    mode = ("date" if shift_date else "year") if by == "auto" else by
    if mode == "date":
        if not shift_date:
            raise FitError("a before/after shift test needs a shift_date")
        cut = pd.Timestamp(shift_date)
        label = np.where(t["date"] < cut, f"before {cut.date()}", f"from {cut.date()}")
    else:
        label = t["date"].dt.year.astype(str).to_numpy()
    rows = []
    groups = {}
    for name in pd.unique(label):
        r = t.loc[label == name, "residual"].to_numpy()
        d = t.loc[label == name, "date"]
        groups[name] = r
        m = r.size
        mean = float(r.mean())
        if m >= 2:
            half = float(stats.t.ppf(1 - alpha / 2, m - 1) * r.std(ddof=1) / np.sqrt(m))
        else:
            half = np.nan
        lo, hi = mean - half, mean + half
        rows.append(
            {
                "period": str(name),
                "first": d.min().date().isoformat(),
                "last": d.max().date().isoformat(),
                "n": m,
                "mean_residual": mean,
                "lower": lo,
                "upper": hi,
                "shifted": bool(np.isfinite(half) and (lo > 0 or hi < 0)),
                "bias_percent": 100 * (np.exp(mean) - 1) if fit.residuals == "log" else np.nan,
            }
        )
    periods = pd.DataFrame(rows).sort_values("first").reset_index(drop=True)
    p_value = None
    if mode == "date" and len(groups) == 2 and all(g.size >= 2 for g in groups.values()):
        a, b = groups.values()
        p_value = float(stats.ttest_ind(a, b, equal_var=False).pvalue)
    shifted = periods[periods["shifted"]]
    first = None if shifted.empty else str(shifted["period"].iloc[0])
    return ShiftTest(periods, mode, p_value, first, 1 - alpha)


@dataclass(frozen=True)
class ExtrapolationCheck:
    """How the record's stages compare with the gauged range.

    Attributes
    ----------
    gauged_range : (float, float)
        Lowest and highest gauged stage, m.
    days : int
        Days with a stage.
    share_above, share_below : float
        Share of those days above / below the gauged range (-).
    max_above_m, max_below_m : float
        Largest distance above the highest / below the lowest gauging, m (0 when none).
    first_above, last_above : str or None
        ISO dates of the first and last day above the gauged range.
    """

    gauged_range: tuple[float, float]
    days: int
    share_above: float
    share_below: float
    max_above_m: float
    max_below_m: float
    first_above: str | None = None
    last_above: str | None = None

    def messages(self) -> list[str]:
        """Plain-words findings (empty when the record stays inside the gauged range)."""
        lo, hi = self.gauged_range
        out = []
        if self.share_above > 0:
            out.append(
                f"the record is above the highest gauging ({hi:.3f} m) on "
                f"{100 * self.share_above:.1f}% of days, by up to {self.max_above_m:.3f} m: "
                "outflow there is extrapolated"
            )
        if self.share_below > 0:
            out.append(
                f"the record is below the lowest gauging ({lo:.3f} m) on "
                f"{100 * self.share_below:.1f}% of days, by up to {self.max_below_m:.3f} m"
            )
        return out

    def warn(self) -> None:
        """Issue an :class:`ExtrapolationWarning` per finding."""
        for m in self.messages():
            warnings.warn(f"rating: {m}", ExtrapolationWarning, stacklevel=2)


def extrapolation_check(fit: RatingFit, stage_m: pd.Series | np.ndarray) -> ExtrapolationCheck:
    """Compare a stage record (m) with the gauged range of ``fit``.

    Stages at or below the highest zero-flow gauging count as inside the range, since the
    rating is known to give no flow there.

    Parameters
    ----------
    fit : RatingFit
        The fitted rating.
    stage_m : Series or ndarray
        Daily stages, m (NaN days are ignored); a Series with a DatetimeIndex also gives dates.
    """
    import pandas as pd

    lo, hi = fit.gauged_range
    s = stage_m if isinstance(stage_m, pd.Series) else pd.Series(np.asarray(stage_m, float))
    s = s.dropna()
    n = int(s.size)
    if n == 0:
        return ExtrapolationCheck((lo, hi), 0, 0.0, 0.0, 0.0, 0.0)
    above = s > hi
    low_edge = lo if fit.zero_flow_stage_m is None else -np.inf
    below = s < low_edge
    first = last = None
    if above.any() and isinstance(s.index, pd.DatetimeIndex):
        first = s.index[above.to_numpy()].min().date().isoformat()
        last = s.index[above.to_numpy()].max().date().isoformat()
    return ExtrapolationCheck(
        gauged_range=(lo, hi),
        days=n,
        share_above=float(above.mean()),
        share_below=float(below.mean()),
        max_above_m=float((s[above] - hi).max()) if above.any() else 0.0,
        max_below_m=float((lo - s[below]).max()) if below.any() else 0.0,
        first_above=first,
        last_above=last,
    )
