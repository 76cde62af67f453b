"""Dated ratings: rating periods from a date on, each fitted from its own gaugings, with an
optional shift linear in time between two gaugings.

An outlet is re-rated after works, or when weed or debris changes its control. The site file
declares each period by the date it starts (``[[outlet.period]]``); the gaugings of each period
(on or after its start, before the next) are fitted with the outlet's law by the one fit of
:func:`lakebalance.outlet.fit.fit_rating_curve`. Before the first declared start the gaugings
before it make the first rating.

Within a period a *shift* may vary linearly in time between two gaugings (``shift_from`` and
``shift_to``: weed growing on a control between two visits). The rating of the period is then
fitted to its gaugings up to and including ``shift_from``; each gauging's stage shift is
s_i = f⁻¹(Q_i) − h_i (the stage change that puts the rating through it), and the stage shift
on day t is interpolated linearly between the two gaugings' shifts and held beyond them within
the period: Q(h, t) = f(h + s(t)) (the usual shift of rating practice, in our words: USGS
Techniques and Methods 3-A10, Kennedy 1984 ch. on shifts; ISO 1100-2, 2010, §9).

Whether a new period is needed is the shift test of the rating fit (``[outlet] shift_date``).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import FitError
from ..options import Options, iso_date, setting
from ..results import Summary

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from .fit import FitOptions, RatingFit
    from .laws import Law

__all__ = ["RatingPeriod", "StageShift", "DatedRating", "fit_rating_periods"]

Array = np.ndarray


@dataclass(frozen=True)
class RatingPeriod(Options):
    """``[[outlet.period]]``: a rating that applies from ``start`` (until the next period).

    Parameters
    ----------
    start : str
        ISO date from which the new rating applies (e.g. the day outlet works ended).
    reason : str
        Words for the report.
    shift_from, shift_to : str, optional
        ISO dates of two gaugings of this period between which a stage shift varies linearly
        in time (both or neither).
    keep : list of str
        Parameters the change did not touch (e.g. ``"spillway.Cw"`` after works on the sill
        only), held at the previous period's estimates: a control the period's gaugings do not
        reach is not refitted from nothing.
    """

    start: str = setting(rule=iso_date)
    reason: str = ""
    keep: list[str] = field(default_factory=list)
    shift_from: str | None = setting(None, rule=iso_date)
    shift_to: str | None = setting(None, rule=iso_date)

    def __post_init__(self) -> None:
        super().__post_init__()
        from ..errors import OptionError

        if (self.shift_from is None) != (self.shift_to is None):
            raise OptionError("shift_to", "'shift_from' and 'shift_to' go together")
        if self.shift_from is not None and str(self.shift_to) <= str(self.shift_from):
            raise OptionError("shift_to", "'shift_to' must be after 'shift_from'")
        if self.shift_from is not None and str(self.shift_from)[:10] < str(self.start)[:10]:
            raise OptionError("shift_from", "'shift_from' must be inside the period")


@dataclass(frozen=True)
class StageShift:
    """A stage shift linear in time between two gaugings (m added to the stage).

    ``value_from_m`` and ``value_to_m`` are the shifts of the two gaugings, with standard errors
    from the delta method: se(s_i) = σ · Q_i / Q'(h_i + s_i) (log residuals; σ the period fit's
    residual standard deviation), so ``interval_*`` are ±1.96 se.
    """

    date_from: str
    date_to: str
    value_from_m: float
    value_to_m: float
    stderr_from_m: float
    stderr_to_m: float

    def at(self, days: pd.DatetimeIndex) -> Array:
        """The shift on each day (m), held at the ends."""
        import pandas as pd

        t = pd.DatetimeIndex(days).as_unit("ns").asi8.astype(float)
        knots = pd.DatetimeIndex([self.date_from, self.date_to]).as_unit("ns").asi8.astype(float)
        return np.interp(t, knots, [self.value_from_m, self.value_to_m])

    def interval(self, which: str = "to") -> tuple[float, float]:
        """95 % interval of the shift at ``which`` ("from" or "to") gauging, m."""
        v = self.value_to_m if which == "to" else self.value_from_m
        se = self.stderr_to_m if which == "to" else self.stderr_from_m
        return v - 1.96 * se, v + 1.96 * se


@dataclass(frozen=True, eq=False)
class DatedRating:
    """Ratings by period, each applying from its start to the next start.

    ``starts[0]`` is None (the first rating covers everything before the second start).
    Called with a stage only (:meth:`discharge`) it is the rating in force now (the last
    period, its shift held at the last gauging's); :meth:`on_days` applies each day's.
    """

    starts: tuple[str | None, ...]
    fits: tuple[RatingFit, ...]
    shifts: tuple[StageShift | None, ...]
    reasons: tuple[str, ...] = ()

    @property
    def latest(self) -> RatingFit:
        """The rating of the last period."""
        return self.fits[-1]

    def period_of(self, days: pd.DatetimeIndex) -> Array:
        """Index of the period of each day."""
        import pandas as pd

        t = pd.DatetimeIndex(days).as_unit("ns").asi8
        edges = pd.DatetimeIndex([s for s in self.starts[1:]]).as_unit("ns").asi8
        return np.searchsorted(edges, t, side="right")

    def discharge(self, stage_m: Array | float) -> Array:
        """Discharge (m³/s) by the rating in force now, at ``stage_m`` (m)."""
        h = np.asarray(stage_m, dtype=float)
        shift = self.shifts[-1]
        s = 0.0 if shift is None else shift.value_to_m
        return self.latest.discharge(h + s)

    __call__ = discharge

    def on_days(self, stage_m: Array, days: pd.DatetimeIndex) -> Array:
        """Discharge (m³/s) at ``stage_m`` (m, one value per day of ``days``) by each day's
        rating and shift."""
        h = np.asarray(stage_m, dtype=float)
        p = self.period_of(days)
        out = np.full(h.shape, np.nan)
        for k, fit in enumerate(self.fits):
            m = p == k
            if not m.any():
                continue
            shift = self.shifts[k]
            s = 0.0 if shift is None else shift.at(days[m])
            out[m] = fit.discharge(h[m] + s)
        return out

    # ---- the error model's view: one parameter vector over all periods ---------------------
    @property
    def param_names(self) -> tuple[str, ...]:
        """Every period's parameters, ``"<start>:<name>"`` (``"first:<name>"`` for the first)."""
        return tuple(
            f"{s or 'first'}:{n}" for s, f in zip(self.starts, self.fits, strict=True)
            for n in f.param_names
        )  # fmt: skip

    @property
    def vector(self) -> Array:
        """The periods' parameter vectors end to end (SI)."""
        return np.concatenate([np.asarray(f.vector, dtype=float) for f in self.fits])

    @property
    def cov(self) -> Array:
        """Block-diagonal covariance: periods are fitted from disjoint gaugings (independent)."""
        sizes = [len(f.param_names) for f in self.fits]
        out = np.zeros((sum(sizes), sum(sizes)))
        a = 0
        for f, k in zip(self.fits, sizes, strict=True):
            out[a : a + k, a : a + k] = np.asarray(f.cov, dtype=float)
            a += k
        return out

    def discharge_with(self, params: Array, stage_m: Array, *, days: pd.DatetimeIndex) -> Array:
        """Ensemble discharge (m³/s): row i of ``params`` (n, K: :attr:`vector`'s layout) on
        ``stage_m[i, j, ...]`` (m), day j of ``days`` by its own period's part of the row."""
        h = np.asarray(stage_m, dtype=float)
        period = self.period_of(days)
        out = np.zeros(h.shape)
        a = 0
        for k, fit in enumerate(self.fits):
            n = len(fit.param_names)
            m = period == k
            if m.any():
                shift = self.shifts[k]
                s = 0.0 if shift is None else shift.at(days[m])
                hk = h[:, m] + (np.reshape(s, (1, -1) + (1,) * (h.ndim - 2)) if shift else 0.0)
                out[:, m] = fit.discharge_with(params[:, a : a + n], hk)
            a += n
        return out

    def to_dict(self) -> dict[str, Any]:
        """Each period: its start, the fit's dictionary and its shift (SI)."""
        return {
            "periods": [
                {
                    "start": s,
                    "reason": r,
                    "fit": f.to_dict(),
                    "shift": None if sh is None else sh.__dict__,
                }
                for s, f, sh, r in zip(
                    self.starts,
                    self.fits,
                    self.shifts,
                    self.reasons or [""] * len(self.fits),
                    strict=True,
                )  # fmt: skip
            ]
        }

    def summary(self) -> Summary:
        """Each period's parameters with their 95 % intervals."""
        lines = [f"{len(self.fits)} rating periods"]
        for s, f, sh in zip(self.starts, self.fits, self.shifts, strict=True):
            ci = f.conf_int()
            lines.append(
                f"  from {s or 'the start'} ({f.n} gaugings): "
                + ", ".join(
                    f"{n} = {f.params[n]:.4g} [{ci[n][0]:.4g}, {ci[n][1]:.4g}]"
                    for n in f.param_names
                )
            )
            if sh is not None:
                lines.append(
                    f"    stage shift {sh.value_from_m * 1000:+.0f} mm on {sh.date_from} to "
                    f"{sh.value_to_m * 1000:+.0f} mm on {sh.date_to}, linear between"
                )
        return Summary("\n".join(lines), "dated ratings")


def _inverse_stage(fit: RatingFit, q: float, h0: float) -> float:
    """The stage at which ``fit`` gives discharge ``q`` (m³/s), found from ``h0`` (m)."""
    from scipy.optimize import brentq

    lo, hi = h0 - 5.0, h0 + 5.0
    f = lambda h: float(fit.discharge(np.array([h]))[0]) - q  # noqa: E731
    while f(lo) > 0 and lo > h0 - 100:
        lo -= 5.0
    while f(hi) < 0 and hi < h0 + 100:
        hi += 5.0
    if f(lo) > 0 or f(hi) < 0:
        raise FitError(f"no stage gives {q:g} m³/s on the period's rating")
    return float(brentq(f, lo, hi, xtol=1e-9))


def fit_rating_periods(
    law: Law,
    stage_m: Array,
    discharge_m3s: Array,
    dates: Any,
    periods: Sequence[RatingPeriod],
    *,
    weights: Array | None = None,
    options: FitOptions | None = None,
    rng: np.random.Generator | None = None,
) -> DatedRating:
    """Fit one rating per period from the gaugings of that period.

    Parameters
    ----------
    law : Law
        The outlet's control law (the same for every period).
    stage_m, discharge_m3s : array_like (n,)
        Gauged stages (m) and discharges (m³/s).
    dates : array_like (n,)
        Dates of the gaugings.
    periods : sequence of RatingPeriod
        The declared periods, by start (sorted here).
    weights, options, rng
        As for :func:`~lakebalance.outlet.fit.fit_rating_curve`.

    Returns
    -------
    DatedRating

    Raises
    ------
    FitError
        A period without enough gaugings (named by its start), or a shift gauging that is not
        there.
    """
    import pandas as pd

    from .fit import fit_rating_curve

    h = np.asarray(stage_m, dtype=float)
    q = np.asarray(discharge_m3s, dtype=float)
    t = pd.DatetimeIndex(pd.to_datetime(np.asarray(dates)))
    w = None if weights is None else np.asarray(weights, dtype=float)
    ordered = sorted(periods, key=lambda p: str(p.start)[:10])
    starts: list[str | None] = [None, *[str(p.start)[:10] for p in ordered]]
    decl: list[RatingPeriod | None] = [None, *ordered]
    edges = pd.DatetimeIndex([s for s in starts[1:]])
    which = np.searchsorted(edges.as_unit("ns").asi8, t.as_unit("ns").asi8, side="right")
    fits, shifts, reasons, kept = [], [], [], []
    for k, (start, p) in enumerate(zip(starts, decl, strict=True)):
        sel = which == k
        if k == 0 and not sel.any():
            continue  # no gauging before the first period: it covers the days before too
        label = f"the rating from {start}" if start else "the rating before the first period"
        base = sel.copy()
        if p is not None and p.shift_from is not None:
            base &= t <= pd.Timestamp(p.shift_from)
        if not base.any():
            raise FitError(f"{label} has no gauging")
        opts = options
        if p is not None and p.keep:
            if not fits:
                raise FitError(f"{label}: 'keep' needs an earlier period to keep parameters from")
            unknown = [k for k in p.keep if k not in fits[-1].params]
            if unknown:
                raise FitError(
                    f"{label}: 'keep' names {', '.join(unknown)}, not parameters of the rating "
                    f"({', '.join(fits[-1].param_names)})"
                )
            from .fit import FitOptions

            base_opts = options or FitOptions()
            held = {k: float(fits[-1].params[k]) for k in p.keep}
            opts = dataclasses.replace(base_opts, fixed={**dict(base_opts.fixed), **held})
        try:
            fit = fit_rating_curve(
                law, h[base], q[base], dates=np.asarray(t[base]),
                weights=None if w is None else w[base], options=opts, rng=rng,
            )  # fmt: skip
        except FitError as exc:
            raise FitError(f"{label}: {exc.message}") from None
        shift = None
        if p is not None and p.shift_from is not None:
            vals, ses = [], []
            for d in (p.shift_from, p.shift_to):
                at = np.flatnonzero(sel & (t.normalize() == pd.Timestamp(d)))
                if not at.size:
                    raise FitError(f"{label}: no gauging on {d} for the shift")
                i = int(at[0])
                s = _inverse_stage(fit, q[i], h[i]) - h[i]
                slope = float(fit.discharge_derivative(np.array([h[i] + s]))[0])
                se = fit.sigma * q[i] / slope if fit.residuals == "log" else fit.sigma / slope
                vals.append(s)
                ses.append(abs(se))
            shift = StageShift(
                str(p.shift_from)[:10], str(p.shift_to)[:10], vals[0], vals[1], ses[0], ses[1]
            )
        fits.append(fit)
        shifts.append(shift)
        reasons.append("" if p is None else p.reason)
        kept.append(start)
    kept[0] = None
    return DatedRating(tuple(kept), tuple(fits), tuple(shifts), tuple(reasons))
