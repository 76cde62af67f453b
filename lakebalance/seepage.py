"""Net groundwater exchange (seepage) estimated from the unexplained residual of the balance.

On days when the other terms are well known (little rain, the outlet not spilling, no flags) the
residual of the balance is mostly the net exchange with the ground. Seepage here is a net *loss*:
positive when water leaves the lake. Two laws are fitted by ordinary least squares with
heteroscedasticity- and autocorrelation-consistent (Newey–West) standard errors:

* ``linear``:   loss(h) = k (h − h0)   (k in m²/s: m³/s of loss per m of stage; h0 in m, the stage
  at which the exchange changes sign, a proxy for the surrounding groundwater head);
* ``constant``: loss = q (m³/s).

The fit reports k, h0 and the rate at the mean and at named stages in m³/d, L/s and mm/d with
95 % confidence intervals, the Durbin–Watson statistic, and warnings when the estimate cannot be
told from zero or from the combined uncertainty of the other balance terms.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

import numpy as np

from .errors import DataQualityWarning, FitError
from .options import Options, setting
from .results import Estimate, Summary, estimate
from .stats import newey_west_lags
from .units import SECONDS_PER_DAY, from_si

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = [
    "SeepageOptions",
    "SeepageFit",
    "select_days",
    "fit_seepage",
    "newey_west_lags",
    "andrews_lags",
]

SeepageModel = Literal["linear", "constant"]


@dataclass(frozen=True)
class SeepageOptions(Options):
    """``[seepage]``: net groundwater exchange estimated from the residual."""

    model: Literal["linear", "constant"] = "linear"
    start: str | None = None  # ISO date, first day used
    end: str | None = None  # ISO date, last day used
    max_rain: float = setting(0.0005, unit="m/d", low=0.0)  # days with more rain are not used
    rain_buffer: int = setting(1, unit="days", low=0)  # days around a rainy day left out too
    exclude_spill: bool = True  # leave out days when the outlet spills
    exclude_flags: bool = True  # leave out flagged days
    # what the dynamics and the drawdown forecast carry: "auto" the fitted law when its k is
    # positive and told from zero (else nothing, with a warning), "law" the fitted law as it is,
    # "constant" the rate at the mean stage of the days used, "none" no seepage
    in_forecasts: Literal["auto", "law", "constant", "none"] = "auto"


def andrews_lags(scores: np.ndarray) -> int:
    """Data-dependent Bartlett truncation lag from AR(1) fits to the regression scores.

    Parameters
    ----------
    scores : ndarray, shape (n, p)
        Regressors times OLS residuals, x_tj·u_t (unit of the regression).

    Returns
    -------
    int
        ``floor(1.1447 (α̂ n)^(1/3))``, at least :func:`newey_west_lags` and at most n/4.

    Notes
    -----
    α̂ = Σ_j 4 ρ_j² σ_j⁴ / ((1 − ρ_j)⁶ (1 + ρ_j)²) / Σ_j σ_j⁴ / (1 − ρ_j)⁴, with ρ_j and σ_j² the
    AR(1) coefficient and innovation variance of score j (Andrews, 1991, eqs. 6.2 and 6.4, all
    weights one). Persistent errors get more lags than the fixed rule of thumb gives.

    References
    ----------
    Andrews, D. W. K. (1991). Heteroskedasticity and autocorrelation consistent covariance matrix
    estimation. Econometrica 59(3), 817–858.
    """
    z = np.atleast_2d(np.asarray(scores, dtype=float).T).T
    n = z.shape[0]
    num = den = 0.0
    for j in range(z.shape[1]):  # loop over regressors
        a, b = z[:-1, j] - z[:, j].mean(), z[1:, j] - z[:, j].mean()
        denom = float(np.dot(a, a))
        if denom <= 0:
            continue
        rho = float(np.clip(np.dot(a, b) / denom, -0.97, 0.97))
        sig2 = float(np.mean((b - rho * a) ** 2))
        num += 4 * rho**2 * sig2**2 / ((1 - rho) ** 6 * (1 + rho) ** 2)
        den += sig2**2 / (1 - rho) ** 4
    if den <= 0:
        return newey_west_lags(n)
    lags = int(math.floor(1.1447 * ((num / den) * n) ** (1.0 / 3.0)))
    return int(min(max(lags, newey_west_lags(n)), max(1, n // 4)))


@dataclass(frozen=True, eq=False)
class SeepageFit:
    """A fitted seepage law (see the module docstring).

    Attributes
    ----------
    model : {"linear", "constant"}
    params : dict
        ``{"k": m²/s, "h0": m}`` or ``{"rate": m³/s}``.
    stderr : dict
        Newey–West standard errors of ``params`` (h0 by the delta method).
    cov : ndarray
        Covariance of ``params`` in the order of :attr:`param_names`.
    coef, coef_cov : ndarray
        The regression actually fitted, loss = b0 + b1 (h − mean_stage_m) (m³/s, m²/s), and the
        Newey–West covariance of (b0, b1); for the constant model just (q,).
    mean_stage_m : float
        Mean stage of the days used (m).
    n, hac_lags : int
        Days used and Bartlett truncation lag.
    durbin_watson : float
        Durbin–Watson statistic of the regression residuals (-); near 2 when uncorrelated.
    r_squared : float
    dates : DatetimeIndex
        Days used.
    stage_m, loss_m3s, fitted_m3s : ndarray
        Stage (m), observed loss (m³/s, = −residual / 86 400) and fitted loss of the days used.
    area_stage_m, area_m2 : ndarray
        Stage–area pairs (m, m²) for converting rates to mm/d (sorted by stage).
    levels : dict
        Named stages (m) reported in :meth:`rate_table`.
    other_sigma_m3s : float or None
        Mean 1-σ uncertainty of the residual from the other balance terms (m³/s) over the days
        used, when an uncertainty band was given.
    selection : dict
        Days considered and left out, by reason.
    notes : tuple of str
        Warnings raised by the fit, in plain words.
    regression_cov : ndarray or None
        The regression's own (Newey–West) covariance of the coefficients, before the persistent
        errors of the other terms were added to :attr:`coef_cov`.
    persistent_errors : bool
        Whether :attr:`coef_cov` carries the persistent errors of the other terms.
    """

    model: SeepageModel
    params: dict[str, float]
    stderr: dict[str, float]
    cov: np.ndarray = field(repr=False)
    coef: np.ndarray = field(repr=False)
    coef_cov: np.ndarray = field(repr=False)
    mean_stage_m: float = float("nan")
    n: int = 0
    hac_lags: int = 0
    durbin_watson: float = float("nan")
    r_squared: float = float("nan")
    dates: pd.DatetimeIndex | None = field(default=None, repr=False)
    stage_m: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    loss_m3s: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    fitted_m3s: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    area_stage_m: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    area_m2: np.ndarray = field(default_factory=lambda: np.empty(0), repr=False)
    levels: dict[str, float] = field(default_factory=dict)
    other_sigma_m3s: float | None = None
    selection: dict[str, int] = field(default_factory=dict)
    notes: tuple[str, ...] = ()
    regression_cov: np.ndarray | None = field(default=None, repr=False)
    persistent_errors: bool = False

    # ---- parameters ------------------------------------------------------------------------
    @property
    def param_names(self) -> tuple[str, ...]:
        """Names of :attr:`params` in the order of :attr:`cov`."""
        return tuple(self.params)

    @property
    def k(self) -> float:
        """Loss rate per m of stage (m²/s); 0 for the constant model."""
        return float(self.params.get("k", 0.0))

    @property
    def h0(self) -> float:
        """Stage of zero net exchange (m); NaN for the constant model."""
        return float(self.params.get("h0", float("nan")))

    def conf_int(self, alpha: float = 0.05) -> dict[str, tuple[float, float]]:
        """Normal-theory (1 − alpha) intervals of the parameters with Newey–West errors.

        h0's interval is by the delta method and is only meaningful when k is clearly non-zero.
        """
        zq = _z(alpha)
        return {
            name: (value - zq * self.stderr[name], value + zq * self.stderr[name])
            for name, value in self.params.items()
        }

    # ---- rates -----------------------------------------------------------------------------
    def _design(self, stage_m: np.ndarray) -> np.ndarray:
        h = np.asarray(stage_m, dtype=float)
        if self.model == "constant":
            return np.ones(h.shape + (1,))
        return np.stack([np.ones_like(h), h - self.mean_stage_m], axis=-1)

    def rate_m3s(self, stage_m: np.ndarray | float) -> np.ndarray:
        """Net loss to the ground (m³/s, positive = water leaving the lake) at ``stage_m`` (m).

        Vectorised over any shape; the linear law is extrapolated outside the fitted stages.
        """
        return self._design(stage_m) @ self.coef

    def predict(
        self,
        stage_m: np.ndarray | float,
        interval: Literal["confidence"] | None = None,
        alpha: float = 0.05,
    ) -> np.ndarray | tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Loss (m³/s) at ``stage_m`` (m); with ``interval="confidence"`` also its bounds.

        Notes
        -----
        var(loss(h)) = xᵀ Σ x with x = (1, h − h̄) and Σ the Newey–West covariance of (b0, b1):
        the interval is exact in the fitted coefficients (no delta method).
        """
        x = self._design(stage_m)
        rate = x @ self.coef
        if interval is None:
            return rate
        if interval != "confidence":
            raise ValueError("interval must be None or 'confidence'")
        se = np.sqrt(np.einsum("...i,ij,...j->...", x, self.coef_cov, x))
        zq = _z(alpha)
        return rate, rate - zq * se, rate + zq * se

    def area_at(self, stage_m: np.ndarray | float) -> np.ndarray:
        """Lake area (m²) at ``stage_m`` (m), interpolated from the balance days (clamped)."""
        if self.area_m2.size == 0:
            return np.full(np.shape(stage_m), np.nan)
        return np.interp(np.asarray(stage_m, dtype=float), self.area_stage_m, self.area_m2)

    def rate_table(
        self, levels: dict[str, float] | None = None, alpha: float = 0.05
    ) -> pd.DataFrame:
        """The loss at the mean stage and at named stages, in m³/d, L/s and mm/d, with CIs.

        Parameters
        ----------
        levels : dict, optional
            Name -> stage (m); default :attr:`levels` of the fit.
        alpha : float
            1 − confidence level.
        """
        import pandas as pd

        names = {"mean stage of days used": self.mean_stage_m}
        names.update(self.levels if levels is None else levels)
        stages = np.array(list(names.values()), dtype=float)
        rate, lo, hi = self.predict(stages, interval="confidence", alpha=alpha)
        area = self.area_at(stages)
        lo_obs = self.stage_m.min() if self.stage_m.size else np.nan
        hi_obs = self.stage_m.max() if self.stage_m.size else np.nan
        out = pd.DataFrame({"name": list(names), "stage_m": stages})
        for label, values in (("", rate), ("_low", lo), ("_high", hi)):
            out[f"m3_per_day{label}"] = from_si(values, "flow", "m**3/day")
            out[f"L_per_s{label}"] = from_si(values, "flow", "L/s")
            depth_m_per_day = values * SECONDS_PER_DAY / area
            out[f"mm_per_day{label}"] = from_si(depth_m_per_day, "depth", "mm")
        out["within_fitted_stages"] = (stages >= lo_obs) & (stages <= hi_obs)
        return out

    # ---- diagnostics -----------------------------------------------------------------------
    @property
    def residuals_m3s(self) -> np.ndarray:
        """Regression residuals (m³/s) of the days used."""
        return self.loss_m3s - self.fitted_m3s

    @property
    def distinguishable_from_zero(self) -> bool:
        """The 95 % interval of the loss at the mean stage excludes zero."""
        _, lo, hi = self.predict(self.mean_stage_m, interval="confidence")
        return bool(lo > 0 or hi < 0)

    def estimates(self) -> dict[str, Estimate]:
        """Each parameter as an :class:`~lakebalance.results.Estimate` (value, standard error,
        95 % interval, unit)."""
        ci = self.conf_int(0.05)
        return {
            name: estimate(value, self.stderr[name], *ci[name], unit=_PARAM_UNITS[name])
            for name, value in self.params.items()
        }

    @property
    def h0_identified(self) -> bool:
        """The data separate h0 from k: k's 95 % interval excludes zero and h0's standard error
        is within the spread of the stages used (common practice, no source). When not, only
        the rate at the stages used is meaningful."""
        if self.model != "linear" or self.stage_m.size == 0:
            return False
        lo, hi = self.conf_int()["k"]
        spread = float(np.ptp(self.stage_m))
        return bool((lo > 0 or hi < 0) and self.stderr["h0"] <= spread)

    @property
    def law_supported(self) -> bool:
        """The fitted law is fit to carry into the dynamics and the forecast: a linear law with
        k positive and told from zero, or a constant rate told from zero."""
        if self.model == "linear":
            return bool(self.conf_int()["k"][0] > 0)
        return self.distinguishable_from_zero

    def constant_rate_m3s(self) -> float:
        """The rate (m³/s) at the mean stage of the days used, for a constant-rate seepage."""
        return float(self.rate_m3s(self.mean_stage_m))

    def to_frame(self) -> pd.DataFrame:
        """The loss at the mean stage and the named stages (:meth:`rate_table`)."""
        return self.rate_table()

    def to_dict(self, alpha: float = 0.05) -> dict:
        """A JSON-ready summary (used by ``lakebalance seepage --json``)."""
        table = self.rate_table(alpha=alpha)
        estimates = self.estimates()
        if self.model == "linear" and not self.h0_identified:
            estimates.pop("h0")  # not separated from k: only the rates are meaningful
        return {
            "model": self.model,
            "parameters": {k: v.to_dict() for k, v in estimates.items()},
            "h0_identified": self.h0_identified,
            "law_supported": self.law_supported,
            "interval_includes_persistent_errors": self.persistent_errors,
            "mean_stage_m": self.mean_stage_m,
            "n_days": self.n,
            "hac_lags": self.hac_lags,
            "durbin_watson": self.durbin_watson,
            "r_squared": self.r_squared,
            "period": [
                None if self.dates is None or len(self.dates) == 0 else str(self.dates[0].date()),
                None if self.dates is None or len(self.dates) == 0 else str(self.dates[-1].date()),
            ],
            "selection": self.selection,
            "rates": table.to_dict(orient="records"),
            "other_terms_sigma_m3_per_day": None
            if self.other_sigma_m3s is None
            else self.other_sigma_m3s * SECONDS_PER_DAY,
            "distinguishable_from_zero": self.distinguishable_from_zero,
            "warnings": list(self.notes),
            "note": NOTE,
        }

    def summary(self, alpha: float = 0.05) -> Summary:
        """Plain text: the law, parameters with intervals, rates by stage, diagnostics, warnings."""
        pct = round(100 * (1 - alpha))
        ci = self.conf_int(alpha)
        lines = [
            f"Seepage (net loss to the ground, positive = leaving the lake), model: {self.model}",
            f"  days used: {self.n}"
            + (
                f" ({self.dates[0].date()} to {self.dates[-1].date()})"
                if self.dates is not None and len(self.dates)
                else ""
            )
            + f"; Newey–West lags {self.hac_lags}",
            "  intervals: "
            + (
                "the regression's scatter (Newey–West) and the persistent errors of the other "
                "terms on the days used (the balance's error model)"
                if self.persistent_errors
                else "the regression's scatter only (Newey–West); the persistent errors of the "
                "other terms are not included"
            ),
        ]
        if self.selection:
            lines.append(
                "  days left out: "
                + ", ".join(f"{k} {v}" for k, v in self.selection.items() if k != "considered")
            )
        if self.model == "linear":
            lines.append("  loss = k (h - h0)")
            lo, hi = ci["k"]
            lines.append(
                f"  k  = {self.k:.4g} m²/s  ({pct}% CI {lo:.4g} to {hi:.4g}); "
                f"{from_si([self.k], 'flow', 'm**3/day')[0]:,.0f} m³/d per m of stage"
            )
            lo, hi = ci["h0"]
            if self.h0_identified:
                lines.append(
                    f"  h0 = {self.h0:.3f} m  ({pct}% CI {lo:.3f} to {hi:.3f}, delta method)"
                )
            else:
                lines.append(
                    "  h0 not reported: the days used do not separate it from k (only the rates "
                    "at the stages used below are meaningful)"
                )
        else:
            lo, hi = ci["rate"]
            lines.append(
                f"  rate = {self.params['rate']:.4g} m³/s ({pct}% CI {lo:.4g} to {hi:.4g})"
            )
        lines.append(f"  Durbin–Watson {self.durbin_watson:.2f}, R² {self.r_squared:.3f}")
        lines.append(f"\n  Loss by stage ({pct}% CI):")
        for row in self.rate_table(alpha=alpha).itertuples(index=False):
            flag = "" if row.within_fitted_stages else "  (outside the fitted stages)"
            lines.append(
                f"  {row.name:<26} {row.stage_m:8.3f} m  "
                f"{row.m3_per_day:10,.0f} m³/d [{row.m3_per_day_low:,.0f}, {row.m3_per_day_high:,.0f}]"
                f"  {row.L_per_s:8.1f} L/s  {row.mm_per_day:6.2f} mm/d{flag}"
            )
        for note in self.notes:
            lines.append(f"\n  Warning: {note}")
        lines.append("\n" + NOTE)
        return Summary("\n".join(lines), "seepage")

    def __str__(self) -> str:  # pragma: no cover - convenience
        return self.summary()


#: Units of the seepage parameters.
_PARAM_UNITS = {"k": "m2/s", "h0": "m", "rate": "m3/s"}

NOTE = (
    "Seepage from a balance residual also holds every unmeasured error of the other terms. Where "
    "it bears on dam safety (piping, embankment seepage) or public water supply, defer to local "
    "codes and a licensed professional."
)


def _z(alpha: float) -> float:
    from scipy.special import ndtri as _ndtri  # standard normal quantile; lighter than scipy.stats

    return float(_ndtri(1.0 - alpha / 2.0))


# --------------------------------------------------------------------------------------------
# Day selection
# --------------------------------------------------------------------------------------------
def select_days(
    daily: pd.DataFrame,
    options: SeepageOptions | None = None,
    *,
    flagged: pd.Series | None = None,
    spill_stage_m: float | None = None,
) -> tuple[pd.Series, dict[str, int]]:
    """The days on which the residual is taken as seepage, and why the others were left out.

    Parameters
    ----------
    daily : DataFrame
        Daily balance: ``residual_m3`` and ``stage_m`` required; ``rain_m3`` (m³/d) with
        ``area_m2`` (m²) and ``outflow_m3`` (m³/d) used when present.
    options : SeepageOptions, optional
        ``start``/``end`` (ISO dates), ``max_rain`` (m/d), ``exclude_spill``, ``exclude_flags``.
    flagged : Series of bool, optional
        Days covered by a residual flag (:meth:`lakebalance.flags.Flags.mask`).
    spill_stage_m : float, optional
        Stage (m) above which the outlet spills; days above it are left out with
        ``exclude_spill`` (in addition to days with a positive outflow).

    Returns
    -------
    mask : Series of bool
        True on the days used.
    counts : dict
        ``considered`` and the number of days left out by each reason, in order of application
        (a day is counted under the first reason that removes it).
    """
    import pandas as pd

    options = options or SeepageOptions()
    idx = daily.index
    keep = pd.Series(True, index=idx)
    counts: dict[str, int] = {"considered": len(idx)}

    def drop(reason: str, bad: np.ndarray) -> None:
        nonlocal keep
        bad = pd.Series(np.asarray(bad, dtype=bool), index=idx)
        counts[reason] = int((keep & bad).sum())
        keep = keep & ~bad

    drop(
        "no residual or stage",
        ~(np.isfinite(daily["residual_m3"].to_numpy(float)) & np.isfinite(daily["stage_m"])),
    )
    if options.start:
        drop("before start", idx < pd.Timestamp(options.start))
    if options.end:
        drop("after end", idx > pd.Timestamp(options.end))
    if "rain_m3" in daily.columns and "area_m2" in daily.columns:
        depth = daily["rain_m3"].to_numpy(float) / daily["area_m2"].to_numpy(float)
        with np.errstate(invalid="ignore"):
            rainy = ~(np.nan_to_num(depth, nan=0.0) <= options.max_rain)
        drop("rain", rainy)
        if options.rain_buffer > 0:
            # A day's storage change comes from boundary stages estimated from the neighbouring
            # daily means, so a rise spreads into the days either side of the rain.
            near = (
                pd.Series(rainy)
                .rolling(2 * options.rain_buffer + 1, center=True, min_periods=1)
                .max()
                .to_numpy(bool)
            )
            drop("next to a rainy day", near)
    if options.exclude_spill:
        spilling = np.zeros(len(idx), dtype=bool)
        if "outflow_m3" in daily.columns:
            spilling |= np.nan_to_num(daily["outflow_m3"].to_numpy(float), nan=1.0) > 0
        if spill_stage_m is not None:
            spilling |= daily["stage_m"].to_numpy(float) > spill_stage_m
        drop("outlet spilling", spilling)
    if options.exclude_flags and flagged is not None:
        drop("flagged", flagged.reindex(idx, fill_value=False).to_numpy(bool))
    return keep.rename("used"), counts


# --------------------------------------------------------------------------------------------
# The fit
# --------------------------------------------------------------------------------------------
def fit_seepage(
    stage_m: np.ndarray | pd.Series,
    residual_m3: np.ndarray | pd.Series,
    *,
    model: SeepageModel = "linear",
    dates: pd.DatetimeIndex | None = None,
    area_stage_m: np.ndarray | None = None,
    area_m2: np.ndarray | None = None,
    levels: dict[str, float] | None = None,
    other_sigma_m3: np.ndarray | None = None,
    persistent_cov_m6: Callable[[np.ndarray], np.ndarray] | None = None,
    maxlags: int | None = None,
    selection: dict[str, int] | None = None,
    alpha: float = 0.05,
) -> SeepageFit:
    """Fit the seepage law to the daily residual of the selected days.

    Parameters
    ----------
    stage_m : ndarray or Series
        Stage of each day used (m), in time order.
    residual_m3 : ndarray or Series
        Residual of the balance on the same days (m³/d, positive = unexplained gain).
    model : {"linear", "constant"}
        ``loss = k (h − h0)`` or ``loss = q``.
    dates : DatetimeIndex, optional
        The days (kept for reporting; defaults to the index of ``stage_m`` when a Series).
    area_stage_m, area_m2 : ndarray, optional
        Stage (m) and lake area (m²) pairs to express rates in mm/d.
    levels : dict, optional
        Named stages (m) for :meth:`SeepageFit.rate_table`.
    other_sigma_m3 : ndarray, optional
        1-σ uncertainty of each day's residual from the other terms (m³/d), e.g. the balance's
        Monte Carlo band, for the "cannot be told from the other terms" warning.
    persistent_cov_m6 : callable, optional
        ``W (q, n) -> (q, q)``: covariance (m⁶) of the weighted sums ``Σ_t W_qt e_t`` of the
        persistent errors of the residual on the days used (the balance's error model:
        :meth:`~lakebalance.errormodel.ResidualErrors.covariance_of_sums` with the systematic,
        area and rating parts). Their share of the coefficients' covariance is added to the
        regression's: a bias common to the days used does not show in the regression's scatter.
    maxlags : int, optional
        Newey–West truncation lag (default: :func:`andrews_lags` of the OLS scores).
    selection : dict, optional
        Counts from :func:`select_days`, reported.
    alpha : float
        1 − confidence level used by the warnings.

    Returns
    -------
    SeepageFit

    Raises
    ------
    FitError
        Fewer than 10 usable days, or (linear model) no spread of stage.

    Warns
    -----
    DataQualityWarning
        When the loss at the mean stage cannot be told from zero, when it is smaller than the
        combined uncertainty of the other terms, when k cannot be told from zero or is negative.

    Notes
    -----
    With the loss y_t = −R_t / 86 400 (m³/s) and x_t = h_t − h̄ the regression is
    y_t = b0 + b1 x_t + e_t by OLS; k = b1, h0 = h̄ − b0/b1, and the loss at stage h is
    b0 + b1 (h − h̄). The covariance of (b0, b1) is the Newey–West (1987) HAC estimator with a
    Bartlett kernel and Andrews' (1991) data-dependent number of lags (never fewer than
    the rule of thumb floor(4 (n/100)^(2/9)) of Newey & West, 1994), counted over the days
    used in time order (gaps between selected days are ignored, which errs towards too little
    autocorrelation when many days are dropped). Var(h0) by the delta method with gradient
    (−1/b1, b0/b1²). Intervals use the normal quantile (HAC theory is asymptotic).

    References
    ----------
    Newey, W. K. & West, K. D. (1987). A simple, positive semi-definite, heteroskedasticity and
    autocorrelation consistent covariance matrix. Econometrica 55(3), 703–708. Durbin, J. &
    Watson, G. S. (1950). Testing for serial correlation in least squares regression I.
    Biometrika 37, 409–428.
    """
    import statsmodels.api as sm
    from statsmodels.stats.stattools import durbin_watson

    if dates is None and hasattr(stage_m, "index"):
        dates = stage_m.index
    h = np.asarray(stage_m, dtype=float)
    r = np.asarray(residual_m3, dtype=float)
    if h.shape != r.shape:
        raise FitError("stage and residual must have one value per day each")
    ok = np.isfinite(h) & np.isfinite(r)
    if dates is not None:
        dates = dates[ok]
    h, r = h[ok], r[ok]
    n = h.size
    if n < 10:
        raise FitError(
            f"only {n} day(s) are left to estimate seepage (at least 10 needed): widen the "
            "period, or relax [seepage] max_rain / exclude_spill / exclude_flags"
        )
    y = -r / SECONDS_PER_DAY
    h_mean = float(h.mean())
    if model == "linear":
        if np.ptp(h) <= 0:
            raise FitError("the stage does not vary over the days used: use model = 'constant'")
        x = np.column_stack([np.ones(n), h - h_mean])
    elif model == "constant":
        x = np.ones((n, 1))
    else:
        raise FitError(f"unknown seepage model {model!r}")
    if maxlags is None:
        first = sm.OLS(y, x).fit()
        lags = andrews_lags(x * np.asarray(first.resid)[:, None])
    else:
        lags = int(maxlags)
    res = sm.OLS(y, x).fit(cov_type="HAC", cov_kwds={"maxlags": lags, "use_correction": True})
    coef = np.asarray(res.params, dtype=float)
    coef_cov = np.asarray(res.cov_params(), dtype=float)
    regression_cov = coef_cov.copy()
    if persistent_cov_m6 is not None:
        # b = (XᵀX)⁻¹ Xᵀ y with y = −r / T: Cov(δb) = A Cov(δr) Aᵀ / T²
        design = np.linalg.solve(x.T @ x, x.T)  # (p, n)
        extra = np.asarray(persistent_cov_m6(design), dtype=float) / SECONDS_PER_DAY**2
        coef_cov = coef_cov + extra
    fitted = x @ coef
    if model == "linear":
        b0, b1 = coef
        k = float(b1)
        h0 = float(h_mean - b0 / b1) if b1 != 0 else float("nan")
        jac = (
            np.array([[0.0, 1.0], [-1.0 / b1, b0 / b1**2]]) if b1 != 0 else np.full((2, 2), np.nan)
        )
        cov = jac @ coef_cov @ jac.T
        params = {"k": k, "h0": h0}
        stderr = {"k": float(math.sqrt(cov[0, 0])), "h0": float(math.sqrt(max(cov[1, 1], 0.0)))}
    else:
        cov = coef_cov.copy()
        params = {"rate": float(coef[0])}
        stderr = {"rate": float(math.sqrt(cov[0, 0]))}

    if area_stage_m is not None and area_m2 is not None:
        a_h = np.asarray(area_stage_m, dtype=float)
        a_a = np.asarray(area_m2, dtype=float)
        good = np.isfinite(a_h) & np.isfinite(a_a)
        order = np.argsort(a_h[good])
        a_h, a_a = a_h[good][order], a_a[good][order]
    else:
        a_h = a_a = np.empty(0)

    other = None
    if other_sigma_m3 is not None:
        s = np.asarray(other_sigma_m3, dtype=float)
        s = s[ok] if s.shape == ok.shape else s
        if np.isfinite(s).any():
            other = float(np.nanmean(s)) / SECONDS_PER_DAY

    fit = SeepageFit(
        model=model,
        params=params,
        stderr=stderr,
        cov=cov,
        coef=coef,
        coef_cov=coef_cov,
        mean_stage_m=h_mean,
        n=n,
        hac_lags=lags,
        durbin_watson=float(durbin_watson(y - fitted)),
        r_squared=float(res.rsquared) if model == "linear" else 0.0,
        dates=dates,
        stage_m=h,
        loss_m3s=y,
        fitted_m3s=fitted,
        area_stage_m=a_h,
        area_m2=a_a,
        levels=dict(levels or {}),
        other_sigma_m3s=other,
        selection=dict(selection or {}),
        regression_cov=regression_cov,
        persistent_errors=persistent_cov_m6 is not None,
    )
    notes = _diagnose(fit, alpha)
    for note in notes:
        warnings.warn(note, DataQualityWarning, stacklevel=2)
    import dataclasses

    return dataclasses.replace(fit, notes=tuple(notes))


def _diagnose(fit: SeepageFit, alpha: float) -> list[str]:
    notes = []
    rate, lo, hi = fit.predict(fit.mean_stage_m, interval="confidence", alpha=alpha)
    rate, lo, hi = float(rate), float(lo), float(hi)
    pct = round(100 * (1 - alpha))
    if lo <= 0 <= hi:
        notes.append(
            f"the seepage at the mean stage ({rate * SECONDS_PER_DAY:,.0f} m³/d, {pct}% CI "
            f"{lo * SECONDS_PER_DAY:,.0f} to {hi * SECONDS_PER_DAY:,.0f}) cannot be told from zero"
        )
    if (
        not fit.persistent_errors  # else the interval above already carries them
        and fit.other_sigma_m3s is not None
        and abs(rate) < _z(alpha) * fit.other_sigma_m3s
    ):
        notes.append(
            f"the seepage at the mean stage ({rate * SECONDS_PER_DAY:,.0f} m³/d) is smaller than "
            f"the combined uncertainty of the other terms (±{_z(alpha) * fit.other_sigma_m3s * SECONDS_PER_DAY:,.0f} "
            "m³/d at 95 %, taken as a bias common to all days): it cannot be told from their errors"
        )
    if fit.model == "linear":
        k_lo, k_hi = fit.conf_int(alpha)["k"]
        if k_lo <= 0 <= k_hi:
            notes.append(
                "k cannot be told from zero: the loss does not measurably depend on stage over "
                "the days used (consider model = 'constant'; h0 is then not meaningful)"
            )
        elif fit.k < 0:
            notes.append(
                "k is negative: the loss falls as the stage rises, which a head-driven exchange "
                "does not do; look for a term that varies with stage (rating, evaporation)"
            )
    if fit.durbin_watson < 1.0:
        notes.append(
            f"the regression residuals are strongly autocorrelated (Durbin–Watson "
            f"{fit.durbin_watson:.2f}); Newey–West errors allow for it, but a missing term is "
            "likely"
        )
    return notes
