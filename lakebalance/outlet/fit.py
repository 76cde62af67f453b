"""Fitting a rating curve to spot gaugings, with its uncertainty.

:func:`fit_rating_curve` fits any law of :mod:`lakebalance.outlet.laws` by nonlinear least squares
(:mod:`lakebalance.outlet.nls`, analytic Jacobians), in log space by default, and returns a frozen
:class:`RatingFit` with parameters, standard errors, covariance, confidence and prediction
intervals (delta method, or a residual bootstrap), and a residual table.

Notes
-----
Log-space residuals (the default) assume a multiplicative error,
:math:`\\ln Q_i = \\ln f(h_i; \\theta) + \\varepsilon_i`, as rating practice does (ISO 1100-2, 2010,
§6; the percentage standard error of estimate :math:`S_e = 100\\,\\sigma_{\\ln}` of its eq. 7 is
reported as ``se_percent``). Linear residuals, :math:`Q_i = f(h_i;\\theta) + \\varepsilon_i`,
optionally weighted, are the textbook nonlinear regression (Bates & Watts, 1988, §2.1).

Zero-flow gaugings cannot enter a log residual. They carry information on the datum instead: a
control that is dry at stage :math:`z` has its datum at or above :math:`z`, so every datum is
bounded below by the highest zero-flow stage (common practice, no source). A zero-flow gauging
above a gauging with flow contradicts any single control; it is excluded and reported.

Confidence bands come from the delta method, :math:`\\operatorname{var}\\,\\hat g(h) = \\nabla g^T
\\Sigma \\nabla g` with :math:`g = \\ln f` (log) or :math:`f` (linear); prediction bands add the
residual variance (Seber & Wild, 1989, §5.1, eq. 5.8). The bootstrap option resamples residuals
and refits every replicate at once by a vectorised Levenberg-Marquardt started at the estimate
(Davison & Hinkley, 1997, Algorithm 6.1).

References
----------
Bates, D. M. and Watts, D. G. (1988). Nonlinear Regression Analysis and Its Applications. Wiley.
Davison, A. C. and Hinkley, D. V. (1997). Bootstrap Methods and their Application. CUP.
ISO 1100-2 (2010). Hydrometry - Determination of the stage-discharge relationship.
Seber, G. A. F. and Wild, C. J. (1989). Nonlinear Regression. Wiley.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from ..errors import ConfigError, DataQualityWarning, FitError, OptionError, suggest
from ..options import Options, setting
from ..resources import check_memory
from ..results import Summary, estimate
from .laws import GaugedStages, Law, Rating, discharge_with
from .nls import covariance_from_jacobian, solve_least_squares
from .options import MAX_BOOTSTRAP

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = [
    "CAUTION",
    "FitOptions",
    "RatingFit",
    "Prediction",
    "RatingSummary",
    "fit_rating_curve",
]

CAUTION = (
    "Rating curves beyond the gauged range are extrapolations. Where outflows inform dam "
    "safety, spillway capacity, flood levels or public water supply, defer to local codes and "
    "a licensed professional engineer."
)

Array = np.ndarray
Residuals = Literal["log", "linear"]


@dataclass(frozen=True)
class FitOptions(Options):
    """How a rating is fitted.

    Parameters
    ----------
    residuals : {"log", "linear"}
        Residual space: ``"log"`` (multiplicative error, default) or ``"linear"``.
    fixed : dict
        Parameter name -> value held fixed (SI).
    initial : dict
        Parameter name -> starting value (SI); others are found automatically.
    bounds : dict
        Parameter name -> (lower, upper) (SI); either may be ``None``/inf for none.
    bootstrap : int
        Residual-bootstrap refits kept for intervals (0: delta method only).
    priors : dict
        Parameter name -> (value, standard error) (SI) from a handbook or the drawings: a
        Gaussian prior, applied as penalised least squares (see :func:`fit_rating_curve`).
    """

    residuals: Residuals = "log"
    fixed: Mapping[str, float] = field(default_factory=dict)
    initial: Mapping[str, float] = field(default_factory=dict)
    bounds: Mapping[str, tuple[float | None, float | None]] = field(default_factory=dict)
    bootstrap: int = setting(0, unit="refits", low=0, high=MAX_BOOTSTRAP)
    priors: Mapping[str, tuple[float, float]] = field(default_factory=dict)


@dataclass(frozen=True)
class Prediction:
    """Discharge with an interval, m³/s (arrays of the stage's shape)."""

    stage_m: Array
    discharge_m3s: Array
    lower_m3s: Array
    upper_m3s: Array
    interval: str
    level: float  # confidence level (-), e.g. 0.95

    def frame(self) -> pd.DataFrame:
        """The prediction as a table (1-D stages)."""
        import pandas as pd

        return pd.DataFrame(
            {
                "stage_m": np.ravel(self.stage_m),
                "discharge_m3s": np.ravel(self.discharge_m3s),
                "lower_m3s": np.ravel(self.lower_m3s),
                "upper_m3s": np.ravel(self.upper_m3s),
            }
        )


class RatingSummary(Summary):
    """The summary of a fit: text (a :class:`~lakebalance.results.Summary`, so a ``str``) that
    renders as tables in a notebook (``_repr_html_``).

    Parameters
    ----------
    title : str
        The heading.
    rows : tuple
        ``(name, value, stderr, lower, upper, fixed)`` of every parameter (SI).
    facts : tuple
        ``(label, text)`` pairs: form, residuals, gaugings, statistics.
    notes : tuple of str
        The fit's warnings.
    """

    rows: tuple[tuple[str, float, float, float, float, bool], ...]
    facts: tuple[tuple[str, str], ...]
    notes: tuple[str, ...]

    def __new__(
        cls,
        title: str,
        rows: tuple[tuple[str, float, float, float, float, bool], ...],
        facts: tuple[tuple[str, str], ...],
        notes: tuple[str, ...],
    ) -> RatingSummary:
        obj = super().__new__(cls, _rating_text(title, rows, facts, notes), title)
        obj.rows, obj.facts, obj.notes = tuple(rows), tuple(facts), tuple(notes)
        return obj

    def __getnewargs__(self):  # pickling: rebuild from the parts
        return (self.title, self.rows, self.facts, self.notes)

    def _repr_html_(self) -> str:
        from html import escape

        facts = "".join(f"<tr><th>{escape(k)}</th><td>{escape(v)}</td></tr>" for k, v in self.facts)
        rows = "".join(
            f"<tr><td>{escape(n)}</td><td>{v:.6g}</td>"
            + (
                "<td colspan=2>(fixed)</td>"
                if fx
                else f"<td>{se:.4g}</td><td>[{lo:.6g}, {hi:.6g}]</td>".replace(
                    "<td>nan</td>", "<td>undefined</td>"
                )
            )
            + "</tr>"
            for n, v, se, lo, hi, fx in self.rows
        )
        notes = "".join(f"<li>{escape(n)}</li>" for n in self.notes)
        return (
            f"<h4>{escape(self.title)}</h4><table>{facts}</table>"
            f"<table><tr><th>parameter</th><th>value</th><th>std. error</th><th>95% interval</th>"
            f"</tr>{rows}</table>" + (f"<ul>{notes}</ul>" if notes else "")
        )


def _rating_text(title: str, rows, facts, notes) -> str:
    """The plain text of a :class:`RatingSummary`."""
    lines = [title, "=" * len(title)]
    lines += [f"{k:<28s} {v}" for k, v in facts]
    lines.append("")
    lines.append(f"{'parameter':<18s}{'value':>14s}{'std. error':>14s}{'95% interval':>30s}")
    for name, v, se, lo, hi, fixed in rows:
        if fixed:
            lines.append(f"{name:<18s}{v:>14.6g}{'(fixed)':>14s}")
        else:
            se_text = f"{se:.4g}" if np.isfinite(se) else "undefined"
            lines.append(f"{name:<18s}{v:>14.6g}{se_text:>14s}{f'[{lo:.6g}, {hi:.6g}]':>30s}")
    if notes:
        lines.append("")
        lines += [f"note: {n}" for n in notes]
    return "\n".join(lines)


@dataclass(frozen=True)
class RatingFit:
    """A fitted rating curve (frozen). Build with :func:`fit_rating_curve`.

    Attributes
    ----------
    law : Law
        The control law.
    params : dict
        Estimates by name (SI), fixed ones included.
    param_names : tuple
        Order of ``cov`` and of parameter rows in ensembles.
    cov : ndarray (k, k)
        Covariance of the estimates (zero rows/columns for fixed parameters).
    free : tuple of bool
        Which parameters were estimated.
    n : int
        Gaugings in the residuals.
    dof : int
        Degrees of freedom ``n - free parameters``.
    sigma : float
        Residual standard deviation in the residual space (log: -, linear: m³/s).
    residuals : {"log", "linear"}
        Residual space.
    table : DataFrame
        One row per gauging: date, stage_m, discharge_m3s, fitted_m3s, residual, used, note.
    lower, upper : ndarray (k,)
        Bounds used (SI), for clipping sampled parameters.
    warnings : tuple of str
        What the fit had to exclude or assume.
    bootstrap_params : ndarray (B, k) or None
        Bootstrap refits when requested.
    zero_flow_stage_m : float or None
        Highest stage of a zero-flow gauging used as a datum bound.
    derived : dict
        Quantities implied by the parameters (segment coefficients set by continuity).
    priors : dict
        Parameter name -> (value, standard error) of the priors applied (SI).
    profile : dict
        Parameter name -> profile-likelihood 95 % interval, for the parameters whose Wald
        interval says nothing (on a bound, weakly identified, leaving its bounds); an end may be
        infinite (not bounded by the gaugings).
    support : tuple of ControlSupport
        Gaugings above the threshold of each control
        (:class:`~lakebalance.outlet.identify.ControlSupport`).
    """

    law: Law
    params: dict[str, float]
    param_names: tuple[str, ...]
    cov: Array
    free: tuple[bool, ...]
    n: int
    dof: int
    sigma: float
    residuals: Residuals
    table: pd.DataFrame
    lower: Array
    upper: Array
    warnings: tuple[str, ...] = ()
    bootstrap_params: Array | None = None
    bootstrap_residuals: Array | None = None
    zero_flow_stage_m: float | None = None
    derived: dict[str, float] = field(default_factory=dict)
    priors: dict[str, tuple[float, float]] = field(default_factory=dict)
    profile: dict[str, tuple[float, float]] = field(default_factory=dict)
    support: tuple = ()

    # ---- statistics --------------------------------------------------------------------
    @property
    def form(self) -> str:
        return self.law.form

    @cached_property
    def rating(self) -> Rating:
        """The fitted curve as a plain :class:`Rating`."""
        return Rating(self.law, self.params)

    @cached_property
    def stderr(self) -> dict[str, float]:
        """Standard error of each parameter (0 for fixed ones), SI."""
        with np.errstate(invalid="ignore"):
            se = np.sqrt(np.diag(self.cov))
        return {n: float(s) for n, s in zip(self.param_names, se)}

    @property
    def vector(self) -> Array:
        return np.array([self.params[n] for n in self.param_names])

    def t_quantile(self, alpha: float = 0.05) -> float:
        """Two-sided Student t quantile with ``dof`` degrees of freedom."""
        from scipy.stats import t

        return float(t.ppf(1 - alpha / 2, self.dof))

    def conf_int(self, alpha: float = 0.05) -> dict[str, tuple[float, float]]:
        """Confidence interval of each parameter: Wald, ``value ± t(1-α/2, dof) · se``, or at
        ``alpha = 0.05`` the profile-likelihood interval of :attr:`profile` where one was made."""
        t = self.t_quantile(alpha)
        out = {
            n: (self.params[n] - t * self.stderr[n], self.params[n] + t * self.stderr[n])
            for n in self.param_names
        }
        if np.isclose(alpha, 0.05):
            out.update({n: tuple(v) for n, v in self.profile.items()})
        return out

    def interval_method(self, name: str) -> str | None:
        """How the interval of ``name`` was made when not by the Wald rule (None)."""
        return "profile likelihood" if name in self.profile else None

    def region_contains(self, values: Mapping[str, float], alpha: float = 0.05) -> bool:
        """Whether ``values`` lie inside the joint likelihood confidence region of the fit.

        Notes
        -----
        The region of Beale (1960) is
        :math:`S(\\theta) \\le S(\\hat\\theta)\\,[1 + \\tfrac{p}{n-p} F_{p,\\,n-p}(1-\\alpha)]`
        with :math:`S` the sum of squared residuals over the gaugings used and :math:`p` the free
        parameters. Unlike the Wald intervals of :meth:`conf_int` it follows the curvature of the
        model (the C-e-b trade-off of a power law). Fixed parameters keep their fixed value.

        References
        ----------
        Beale, E. M. L. (1960). Confidence regions in non-linear estimation. Journal of the Royal
        Statistical Society B 22(1), 41-88.
        """
        from scipy.stats import f as f_dist

        p = [
            values.get(n, self.params[n]) if free else self.params[n]
            for n, free in zip(self.param_names, self.free)
        ]
        t = self.table[self.table["in_residuals"]]
        h, q, w = (t[c].to_numpy() for c in ("stage_m", "discharge_m3s", "weight"))
        model = self.law.discharge(p, h)
        with np.errstate(divide="ignore"):
            r = np.log(q) - np.log(model) if self.residuals == "log" else q - model
        s_theta = float(np.sum(w * r**2))
        k = int(sum(self.free))
        s_hat = self.sigma**2 * self.dof
        return s_theta <= s_hat * (1 + k / self.dof * f_dist.ppf(1 - alpha, k, self.dof))

    @property
    def se_percent(self) -> float:
        """Standard error of estimate in percent (ISO 1100-2, 2010, eq. 7; log residuals)."""
        used = self.table[self.table["used"] & (self.table["discharge_m3s"] > 0)]
        rel = np.log(used["discharge_m3s"] / used["fitted_m3s"]).to_numpy()
        return float(100.0 * np.sqrt(np.sum(rel**2) / self.dof)) if self.dof > 0 else np.nan

    @property
    def gauged_range(self) -> tuple[float, float]:
        """Lowest and highest stage of the gaugings used (m)."""
        used = self.table.loc[self.table["used"], "stage_m"]
        return float(used.min()), float(used.max())

    # ---- curves ------------------------------------------------------------------------
    def discharge(self, stage_m: Array | float) -> Array:
        """Fitted discharge (m³/s) at ``stage_m`` (m, any shape)."""
        return self.rating.discharge(stage_m)

    def discharge_derivative(self, stage_m: Array | float) -> Array:
        """dQ/dh (m²/s) of the fitted curve at ``stage_m`` (m)."""
        return self.rating.discharge_derivative(stage_m)

    def discharge_with(self, params: Array, stage_m: Array) -> Array:
        """Ensemble discharge (m³/s): row i of ``params`` (n, k) on ``stage_m[i, ...]`` (m)."""
        return discharge_with(self.law, params, stage_m)

    def sample_params(self, rng: np.random.Generator, n: int) -> Array:
        """``n`` parameter rows (n, k) drawn from the estimate's normal approximation.

        Draws use the covariance (fixed parameters stay fixed) and are clipped to the bounds of
        the fit (coefficients stay positive, datums stay above zero-flow gaugings).
        """
        if not np.all(np.isfinite(self.cov)):
            raise FitError("the rating covariance is not finite; parameters cannot be sampled")
        draws = rng.multivariate_normal(self.vector, self.cov, size=n, method="eigh")
        return np.clip(draws, self.lower, self.upper)

    def predict(
        self,
        stage_m: Array | float,
        interval: Literal["confidence", "prediction"] | None = None,
        alpha: float = 0.05,
        method: Literal["auto", "delta", "bootstrap"] = "auto",
    ) -> Array | Prediction:
        """Discharge at ``stage_m`` (m), optionally with a confidence or prediction interval.

        Parameters
        ----------
        stage_m : array_like
            Stages, m (any shape).
        interval : {None, "confidence", "prediction"}
            None returns the discharge array (m³/s); otherwise a :class:`Prediction`.
        alpha : float
            1 - confidence level (-).
        method : {"auto", "delta", "bootstrap"}
            ``"auto"`` uses the bootstrap when the fit holds bootstrap refits, else the delta
            method.
        """
        h = np.asarray(stage_m, dtype=float)
        q = self.discharge(h)
        if interval is None:
            return q
        if interval not in ("confidence", "prediction"):
            raise ValueError("interval must be None, 'confidence' or 'prediction'")
        use_boot = method == "bootstrap" or (method == "auto" and self.bootstrap_params is not None)
        if use_boot:
            if self.bootstrap_params is None:
                raise FitError("this fit holds no bootstrap refits (set bootstrap > 0)")
            lo, hi = self._bootstrap_band(h, interval, alpha)
        else:
            lo, hi = self._delta_band(h, q, interval, alpha)
        return Prediction(h, q, lo, hi, interval, 1 - alpha)

    def _delta_band(self, h: Array, q: Array, interval: str, alpha: float) -> tuple[Array, Array]:
        grads = np.stack(np.broadcast_arrays(*self.law.gradient(list(self.vector), h)), axis=-1)
        var = np.einsum("...i,ij,...j->...", grads, self.cov, grads)
        t = self.t_quantile(alpha)
        if self.residuals == "log":
            with np.errstate(divide="ignore", invalid="ignore"):
                var_log = var / q**2
                if interval == "prediction":
                    var_log = var_log + self.sigma**2
                half = t * np.sqrt(var_log)
                lo = np.where(q > 0, q * np.exp(-half), 0.0)
                hi = np.where(q > 0, q * np.exp(half), 0.0)
            return lo, hi
        if interval == "prediction":
            var = var + self.sigma**2
        half = t * np.sqrt(var)
        return np.maximum(q - half, 0.0), q + half

    def _bootstrap_band(self, h: Array, interval: str, alpha: float) -> tuple[Array, Array]:
        boot = self.bootstrap_params
        assert boot is not None
        hb = np.broadcast_to(h, (boot.shape[0], *h.shape))
        qb = self.discharge_with(boot, hb)
        if interval == "prediction":
            rng = np.random.default_rng(0)  # fixed: the band must not change between calls
            res = self.bootstrap_residuals
            assert res is not None
            e = rng.choice(res, size=qb.shape)
            qb = qb * np.exp(e) if self.residuals == "log" else np.maximum(qb + e, 0.0)
        lo, hi = np.quantile(qb, [alpha / 2, 1 - alpha / 2], axis=0)
        return lo, hi

    # ---- reporting ---------------------------------------------------------------------
    def parameter_table(self, alpha: float = 0.05) -> dict[str, dict[str, Any]]:
        """``{name: {value, stderr, ci95: [lo, hi], unit, fixed}}`` (SI): the shared estimate
        shape (:class:`~lakebalance.results.Estimate`, Wald interval with Student t) and whether
        the parameter was held fixed; ``interval`` says ``"profile likelihood"`` where the Wald
        interval was replaced (an open end is null)."""
        ci = self.conf_int(alpha)
        units = self.law.param_units
        return {
            n: {
                **estimate(
                    self.params[n],
                    self.stderr[n],
                    *ci[n],
                    unit=units[n],
                    interval=self.interval_method(n) if np.isclose(alpha, 0.05) else None,
                ).to_dict(),
                "fixed": not f,
            }
            for n, f in zip(self.param_names, self.free)
        }

    def to_dict(self) -> dict[str, Any]:
        """The fit's part of ``lakebalance rating --json`` (SI).

        ``form``, ``residuals``, ``parameters`` (:meth:`parameter_table`), ``derived``, ``n``,
        ``dof``, ``se_percent``, ``gauged_range`` (m), ``zero_flow_stage_m``, ``bootstrap``
        (refits kept), ``priors`` (parameter, value, stderr, unit), ``controls`` (gaugings above
        each control's threshold, weakly identified or below practice), ``warnings``,
        ``caution``. The command adds the site, the seed, the
        rating-shift test and the extrapolation check.
        """
        return {
            "form": self.form,
            "residuals": self.residuals,
            "parameters": self.parameter_table(),
            "derived": self.derived,
            "n": self.n,
            "dof": self.dof,
            "se_percent": self.se_percent,
            "gauged_range": list(self.gauged_range),
            "zero_flow_stage_m": self.zero_flow_stage_m,
            "bootstrap": 0 if self.bootstrap_params is None else int(len(self.bootstrap_params)),
            "priors": [
                {"parameter": n, "value": v, "stderr": se, "unit": self.law.param_units[n]}
                for n, (v, se) in self.priors.items()
            ],
            "controls": [
                {
                    "control": c.control,
                    "threshold_m": c.threshold_m,
                    "gaugings": c.gaugings,
                    "free": list(c.free),
                    "prior": list(c.prior),
                    "weakly_identified": c.weak,
                    "below_practice": c.below_practice,
                }
                for c in self.support
            ],
            "warnings": list(self.warnings),
            "caution": CAUTION,
        }

    def to_frame(self) -> pd.DataFrame:
        """The gaugings table (:attr:`table`): one row per gauging, fitted value and residual."""
        return self.table.copy()

    def summary(self) -> RatingSummary:
        """Parameters with standard errors and 95% intervals, and the fit statistics."""
        ci = self.conf_int()
        rows = tuple(
            (n, self.params[n], self.stderr[n], ci[n][0], ci[n][1], not f)
            for n, f in zip(self.param_names, self.free)
        )
        lo, hi = self.gauged_range
        facts = (
            ("form", self.form),
            ("residuals", self.residuals),
            ("gaugings used", str(self.n)),
            ("degrees of freedom", str(self.dof)),
            ("standard error of estimate", f"{self.se_percent:.2f} %"),
            ("gauged stage range", f"{lo:.3f} to {hi:.3f} m"),
        )
        facts += tuple((k, f"{v:.6g}") for k, v in self.derived.items())
        if self.zero_flow_stage_m is not None:
            facts += (("highest zero-flow stage", f"{self.zero_flow_stage_m:.3f} m"),)
        for n, (v, se) in self.priors.items():
            facts += ((f"prior on {n}", f"{v:.6g} ± {se:.4g} (penalised least squares)"),)
        for c in self.support:
            state = " (weakly identified)" if c.weak else ""
            facts += (
                (
                    f"gaugings above {c.control}",
                    f"{c.gaugings} above {c.threshold_m:.3f} m{state}",
                ),
            )
        if self.profile:
            facts += (("profile-likelihood intervals", ", ".join(self.profile)),)
        return RatingSummary(f"Rating curve ({self.form})", rows, facts, self.warnings)


# --------------------------------------------------------------------------------------------
# Fitting
# --------------------------------------------------------------------------------------------
def _check_names(names: tuple[str, ...], given: Mapping[str, Any], what: str) -> None:
    for key in given:
        if key not in names:
            raise OptionError(
                what,
                f"rating: unknown parameter '{key}' in '{what}'{suggest(key, names)}; "
                f"parameters are {', '.join(names)}",
            )


def _clean(
    stage_m: Array, discharge_m3s: Array, weights: Array | None
) -> tuple[Array, Array, Array, Array, list[str], list[str]]:
    """Masks of usable rows, notes per row, and warnings."""
    h = np.asarray(stage_m, dtype=float).ravel()
    q = np.asarray(discharge_m3s, dtype=float).ravel()
    if h.shape != q.shape:
        raise FitError("stage and discharge of the gaugings differ in length")
    w = np.ones_like(h) if weights is None else np.asarray(weights, dtype=float).ravel()
    if w.shape != h.shape:
        raise FitError("weights and gaugings differ in length")
    notes = [""] * h.size
    used = np.ones(h.size, bool)
    msgs: list[str] = []
    for mask, why in (
        (~np.isfinite(h) | ~np.isfinite(q), "missing stage or discharge"),
        (np.isfinite(q) & (q < 0), "negative discharge"),
        (~np.isfinite(w) | (w <= 0), "weight not positive"),
    ):
        mask = mask & used
        if mask.any():
            used &= ~mask
            for i in np.flatnonzero(mask):
                notes[i] = why
            msgs.append(f"{int(mask.sum())} gauging(s) excluded: {why}")
    return h, q, w, used, notes, msgs


@dataclass(frozen=True)
class _Gaugings:
    """The gaugings as the fit uses them: usable rows, rows with flow, the zero-flow bound."""

    h: Array  # stage, m
    q: Array  # discharge, m³/s
    w: Array  # weight, -
    used: Array  # bool: usable
    flowing: Array  # bool: usable with flow
    in_resid: Array  # bool: in the residuals
    notes: list[str]
    msgs: list[str]
    stages: GaugedStages
    dates: pd.Series


def _gaugings(stage_m, discharge_m3s, weights, dates, residuals: str) -> _Gaugings:
    """Usable rows, zero-flow gaugings that bound the datums, and the contradictory ones."""
    import pandas as pd

    h, q, w, used, notes, msgs = _clean(stage_m, discharge_m3s, weights)
    if dates is None:
        date_col = pd.Series(pd.NaT, index=range(h.size), dtype="datetime64[ns]")
    else:
        date_col = pd.Series(pd.to_datetime(np.asarray(dates).ravel()))
        if date_col.size != h.size:
            raise FitError("dates and gaugings differ in length")
    flowing = used & (q > 0)
    if not flowing.any():
        raise FitError(
            "no gauging with flow: a rating cannot be fitted from zero-flow gaugings alone"
            if used.any()
            else "no usable gauging (all are missing or negative)"
        )
    hmin_flow = float(h[flowing].min())
    zero = used & (q == 0)
    if zero.any():
        bad = zero & (h >= hmin_flow)
        if bad.any():
            used &= ~bad
            for i in np.flatnonzero(bad):
                notes[i] = "zero flow above a gauging with flow (contradiction)"
            msgs.append(
                f"{int(bad.sum())} zero-flow gauging(s) at or above {hmin_flow:.3f} m, the lowest "
                "stage with flow, excluded as contradictory"
            )
            zero &= ~bad
    zero_stage = float(h[zero].max()) if zero.any() else None
    in_resid = flowing if residuals == "log" else used
    for i in np.flatnonzero(zero & ~in_resid):
        notes[i] = "zero flow: bounds the datum"
    stages = GaugedStages(hmin_flow, zero_stage)
    return _Gaugings(h, q, w, used, flowing, in_resid, notes, msgs, stages, date_col)


def _bounds(law: Law, stages: GaugedStages, options: FitOptions) -> tuple[Array, Array]:
    """The law's default bounds, narrowed by the user's."""
    lo, hi = (np.array(b, dtype=float) for b in law.default_bounds(stages))
    names = law.param_names
    for key, (blo, bhi) in options.bounds.items():
        idx = names.index(key)
        if blo is not None:
            lo[idx] = max(lo[idx], float(blo))
        if bhi is not None:
            hi[idx] = min(hi[idx], float(bhi))
        if lo[idx] > hi[idx]:
            raise OptionError(
                "bounds", f"rating: bounds of '{key}' leave no room ([{lo[idx]}, {hi[idx]}])"
            )
    return lo, hi


def _check_identifiable(g: _Gaugings, kf: int, n_priors: int = 0) -> None:
    """Enough gaugings (a prior counts as one), over enough distinct stages, for ``kf`` free
    parameters."""
    n_used = int(g.in_resid.sum())
    if n_used + n_priors <= kf:
        extra = f" and {n_priors} prior(s)" if n_priors else ""
        raise FitError(
            f"{n_used} usable gauging(s){extra} cannot fit {kf} free parameter(s) with any "
            f"uncertainty; need at least {kf + 1 - n_priors} gaugings"
        )
    k_data = max(kf - n_priors, 1)
    n_stages = np.unique(g.h[g.in_resid]).size
    if n_stages < min(k_data, 3) or n_stages < 2 and k_data > 1:
        raise FitError(
            f"the gaugings span only {n_stages} distinct stage(s); {kf} free parameters need "
            "gaugings over a range of stages"
        )


@dataclass(frozen=True)
class _Problem:
    """The least-squares problem of a fit: the gaugings in the residuals, the free parameters.

    ``y`` is ``ln Q`` (log residuals) or ``Q``; ``sw`` the square roots of the weights; ``base``
    holds the fixed values (NaN where free); ``lo``/``hi`` the bounds of every parameter.
    ``prior_at`` are positions in the free vector with a prior of mean ``prior_mean`` and standard
    error ``prior_sd``; their pseudo-residuals ``prior_scale (theta - mean) / sd`` follow the
    data residuals (``prior_scale`` is the residual standard deviation, so that the sum of squares
    divided by it is the negative log posterior up to a constant).
    """

    law: Law
    free: Array
    base: Array
    h: Array
    y: Array
    sw: Array
    lo: Array
    hi: Array
    log: bool
    prior_at: Array = field(default_factory=lambda: np.zeros(0, dtype=int))
    prior_mean: Array = field(default_factory=lambda: np.zeros(0))
    prior_sd: Array = field(default_factory=lambda: np.zeros(0))
    prior_scale: float = 1.0

    def full_params(self, theta: Array) -> list[Array | float]:
        p = self.base.copy()
        p[self.free] = theta
        return list(p)

    def data_residual(self, theta: Array) -> Array:
        f = self.law.discharge(self.full_params(theta), self.h)
        if self.log:
            with np.errstate(divide="ignore"):
                f = np.log(f)
        return self.sw * (self.y - f)

    def residual(self, theta: Array) -> Array:
        r = self.data_residual(theta)
        if self.prior_at.size == 0:
            return r
        pen = self.prior_scale * (np.asarray(theta)[self.prior_at] - self.prior_mean)
        return np.concatenate([r, pen / self.prior_sd])

    def jacobian(self, theta: Array) -> Array:
        p = self.full_params(theta)
        g = np.stack(np.broadcast_arrays(*self.law.gradient(p, self.h)), axis=-1)[:, self.free]
        if self.log:
            with np.errstate(divide="ignore", invalid="ignore"):
                g = g / self.law.discharge(p, self.h)[:, None]
        jac = -self.sw[:, None] * g
        if self.prior_at.size == 0:
            return jac
        rows = np.zeros((self.prior_at.size, jac.shape[1]))
        rows[np.arange(self.prior_at.size), self.prior_at] = self.prior_scale / self.prior_sd
        return np.vstack([jac, rows])

    def held(self, j: int, value: float) -> _Problem:
        """The problem with free parameter ``j`` held at ``value`` (for its profile)."""
        full = np.flatnonzero(self.free)[j]
        free = self.free.copy()
        free[full] = False
        base = self.base.copy()
        base[full] = value
        # the prior of the held parameter is a constant of the profile: kept as a pseudo-datum
        keep = self.prior_at != j
        const = (
            self.prior_scale * (value - self.prior_mean[~keep]) / self.prior_sd[~keep]
            if (~keep).any()
            else np.zeros(0)
        )
        at = self.prior_at[keep]
        at = np.where(at > j, at - 1, at)
        return _HeldProblem(
            law=self.law,
            free=free,
            base=base,
            h=self.h,
            y=self.y,
            sw=self.sw,
            lo=self.lo,
            hi=self.hi,
            log=self.log,
            prior_at=at,
            prior_mean=self.prior_mean[keep],
            prior_sd=self.prior_sd[keep],
            prior_scale=self.prior_scale,
            constant=const,
        )


@dataclass(frozen=True)
class _HeldProblem(_Problem):
    """A problem with one parameter held (its prior term a constant pseudo-residual)."""

    constant: Array = field(default_factory=lambda: np.zeros(0))

    def residual(self, theta: Array) -> Array:
        return np.concatenate([super().residual(theta), self.constant])

    def jacobian(self, theta: Array) -> Array:
        jac = super().jacobian(theta)
        return np.vstack([jac, np.zeros((self.constant.size, jac.shape[1]))])


def _solve(problem: _Problem, starts: list[Array]):
    """The best least-squares solution over the starting vectors (smallest sum of squares)."""
    free, lo, hi = problem.free, problem.lo, problem.hi
    best = None
    failures = []
    for start in starts:
        p0 = np.clip(start[free], lo[free], hi[free])
        try:
            res = solve_least_squares(
                problem.residual, problem.jacobian, p0, bounds=(lo[free], hi[free])
            )
        except FitError as exc:
            failures.append(exc.message)
            continue
        if best is None or res.rss < best.rss:
            best = res
    if best is None:
        raise FitError("the rating fit did not converge: " + "; ".join(failures[:1]))
    return best


def _covariance(best, sigma: float, dof: int) -> Array:
    """Covariance of the free parameters, :math:`s^2 (J^T J)^{-1}` of the (penalised) Jacobian;
    a parameter resting on a bound gets zero rows here (its variance comes from its profile)."""
    kf = best.params.size
    keep = ~best.active
    sub, _ = covariance_from_jacobian(best.jacobian[:, keep], sigma**2 * dof, dof)
    cov_free = np.zeros((kf, kf))
    cov_free[np.ix_(keep, keep)] = sub
    return cov_free


def _profile_all(
    problem: _Problem,
    best,
    cov_free: Array,
    which: Array,
    sigma: float,
    dof: int,
    alpha: float = 0.05,
) -> dict[int, tuple[float, float]]:
    """Profile-likelihood intervals of the free parameters marked in ``which``
    (:func:`~lakebalance.outlet.identify.profile_interval`)."""
    from scipy.stats import t as t_dist

    from .identify import profile_interval

    theta = best.params
    lo_f, hi_f = problem.lo[problem.free], problem.hi[problem.free]
    r0 = problem.residual(theta)
    s_min = float(r0 @ r0)
    tq = float(t_dist.ppf(1 - alpha / 2, dof)) if dof > 0 else np.inf
    threshold = sigma**2 * tq**2

    def objective(j: int, v: float, start: Array) -> tuple[float, Array]:
        held = problem.held(j, v)
        p0 = np.delete(start, j)
        if p0.size == 0:
            r = held.residual(p0)
            return float(r @ r), start
        res = solve_least_squares(
            held.residual, held.jacobian, p0, bounds=(held.lo[held.free], held.hi[held.free])
        )
        return res.rss, np.insert(res.params, j, v)

    out = {}
    with np.errstate(all="ignore"):
        se = np.sqrt(np.abs(np.diag(cov_free)))
    for j in np.flatnonzero(which):
        scale = se[j] if np.isfinite(se[j]) and se[j] > 0 else 0.0
        width = hi_f[j] - lo_f[j]
        scale = scale or 0.05 * max(abs(theta[j]), 1e-3)
        if np.isfinite(width):
            scale = min(scale, 0.05 * width)
        out[int(j)] = profile_interval(
            objective,
            theta,
            int(j),
            lower=lo_f[j],
            upper=hi_f[j],
            s_min=s_min,
            threshold=threshold,
            scale=scale,
        )
    return out


def _residual_table(g: _Gaugings, law: Law, pfull: Array, log: bool) -> pd.DataFrame:
    """One row per gauging: date, stage, discharge, weight, fitted, residual, used, note."""
    import pandas as pd

    h, q, used = g.h, g.q, g.used
    fitted = law.discharge(list(pfull), h)
    with np.errstate(divide="ignore", invalid="ignore"):
        resid_all = np.where(used, np.log(q / fitted) if log else q - fitted, np.nan)
    if log:
        resid_all = np.where(used & (q > 0), resid_all, np.nan)
    return pd.DataFrame(
        {
            "date": g.dates.to_numpy(),
            "stage_m": h,
            "discharge_m3s": q,
            "weight": g.w,
            "fitted_m3s": fitted,
            "residual": resid_all,
            "used": used,
            "in_residuals": g.in_resid,
            "note": g.notes,
        }
    )


def _starting_values(law: Law, g: _Gaugings, lo: Array, hi: Array, options: FitOptions):
    """The law's candidate starting vectors, with the user's initial and fixed values set."""
    names = law.param_names
    given = {**options.initial, **options.fixed}
    f = g.flowing
    starts = law.starting_values(g.h[f], g.q[f], g.w[f], lo, hi, given)
    for vec in starts:
        for key, value in given.items():
            vec[names.index(key)] = value
    return starts


def fit_rating_curve(
    law: Law,
    stage_m: Array,
    discharge_m3s: Array,
    *,
    dates: Any = None,
    weights: Array | None = None,
    options: FitOptions | None = None,
    rng: np.random.Generator | None = None,
) -> RatingFit:
    """Fit ``law`` to gaugings by nonlinear least squares.

    Parameters
    ----------
    law : Law
        The control law (:func:`~lakebalance.outlet.laws.power_law` etc.).
    stage_m : array_like (n,)
        Gauged stages, m on the gauge datum.
    discharge_m3s : array_like (n,)
        Gauged discharges, m³/s (zero for a dry outlet).
    dates : array_like (n,), optional
        Dates of the gaugings (for the shift test and the residual table).
    weights : array_like (n,), optional
        Relative weights (inverse variances, -) of the gaugings.
    options : FitOptions, optional
        Residual space, fixed/initial/bounded parameters, bootstrap size.
    rng : numpy.random.Generator, optional
        Source of the bootstrap draws (required when ``options.bootstrap > 0``).

    Returns
    -------
    RatingFit

    Raises
    ------
    FitError
        Fewer usable gaugings than free parameters plus one, fewer distinct stages than free
        parameters, no gauging with flow, or no convergence.
    ConfigError
        A fixed, initial or bounded parameter that the law does not have.

    Notes
    -----
    The residual of gauging i is :math:`\\sqrt{w_i}(\\ln Q_i - \\ln f(h_i;\\theta))` (log) or
    :math:`\\sqrt{w_i}(Q_i - f(h_i;\\theta))` (linear). Coefficients are bounded below by 0 and
    every datum below by the highest zero-flow stage; the first control's datum lies below the
    lowest gauging with flow.

    Examples
    --------
    >>> import numpy as np
    >>> from lakebalance.outlet import power_law, fit_rating_curve
    >>> h = np.linspace(0.3, 2.0, 12)
    >>> fit = fit_rating_curve(power_law(), h, 4.0 * (h - 0.1) ** 1.6)
    >>> round(fit.params["b"], 3)
    1.6
    """
    options = options or FitOptions()
    names = law.param_names
    for what in ("fixed", "initial", "bounds", "priors"):
        _check_names(names, getattr(options, what), what)
    priors = _check_priors(options)
    g = _gaugings(stage_m, discharge_m3s, weights, dates, options.residuals)
    lo, hi = _bounds(law, g.stages, options)
    free = np.array([n not in options.fixed for n in names])
    _check_identifiable(g, int(free.sum()), len(priors))
    starts = _starting_values(law, g, lo, hi, options)

    log = options.residuals == "log"
    r = g.in_resid
    free_names = [n for n, f in zip(names, free) if f]
    problem = _Problem(
        law=law,
        free=free,
        base=np.array([options.fixed.get(n, np.nan) for n in names], dtype=float),
        h=g.h[r],
        y=np.log(g.q[r]) if log else g.q[r],
        sw=np.sqrt(g.w[r]),
        lo=lo,
        hi=hi,
        log=log,
        prior_at=np.array([free_names.index(n) for n in priors], dtype=int),
        prior_mean=np.array([priors[n][0] for n in priors], dtype=float),
        prior_sd=np.array([priors[n][1] for n in priors], dtype=float),
    )
    problem, best, sigma, dof = _solve_penalised(problem, starts)
    msgs = g.msgs
    cov_free = _covariance(best, sigma, dof)
    pfull = np.array(problem.full_params(best.params), dtype=float)
    params = {n: float(v) for n, v in zip(names, pfull)}
    from .identify import control_support

    support = control_support(
        law, params, dict(zip(names, free.tolist())), tuple(priors), problem.h
    )
    weak_names = {n for c in support if c.weak for n in c.free}
    profile, cov_free = _honest_intervals(
        problem,
        best,
        cov_free,
        free_names=free_names,
        weak_names=weak_names,
        sigma=sigma,
        dof=dof,
        stages=g.stages,
        msgs=msgs,
    )
    for c in support:
        msgs.extend(c.messages())
    boot = boot_res = None
    if options.bootstrap > 0:
        if rng is None:
            raise FitError("a bootstrap needs a random generator (rng)")
        # resampled indices and data, the model, its Jacobian (three copies) per refit and point
        check_memory(
            8.0 * options.bootstrap * len(problem.h) * (6 + 3 * int(np.sum(free))),
            option="bootstrap",
            value=options.bootstrap,
            what=f"the bootstrap refits of {len(problem.h)} gaugings",
        )
        boot, boot_res = _bootstrap(problem, best, options.bootstrap, rng)
    for m in msgs:
        warnings.warn(f"rating: {m}", DataQualityWarning, stacklevel=2)
    k = len(names)
    cov = np.zeros((k, k))
    cov[np.ix_(free, free)] = cov_free
    return RatingFit(
        law=law,
        params=params,
        param_names=names,
        cov=cov,
        free=tuple(bool(f) for f in free),
        n=int(r.sum()),
        dof=dof,
        sigma=sigma,
        residuals=options.residuals,
        table=_residual_table(g, law, pfull, log),
        lower=np.where(free, lo, pfull),
        upper=np.where(free, hi, pfull),
        warnings=tuple(msgs),
        bootstrap_params=boot,
        bootstrap_residuals=boot_res,
        zero_flow_stage_m=g.stages.highest_zero_flow_m,
        derived=law.derived(list(pfull)),
        priors=dict(priors),
        profile={free_names[j]: v for j, v in profile.items()},
        support=support,
    )


def _check_priors(options: FitOptions) -> dict[str, tuple[float, float]]:
    """The priors as ``name -> (mean, sd)``, each on a free parameter with a positive finite sd."""
    out = {}
    for name, pair in options.priors.items():
        try:
            mean, sd = (float(x) for x in pair)
        except (TypeError, ValueError):
            raise ConfigError(
                f"rating: the prior of '{name}' must be [value, standard error], got {pair!r}"
            ) from None
        if name in options.fixed:
            raise OptionError("priors", f"rating: '{name}' is fixed; it cannot also have a prior")
        if not (np.isfinite(mean) and np.isfinite(sd) and sd > 0):
            raise ConfigError(
                f"rating: the prior of '{name}' needs a finite value and a positive standard "
                f"error, got [{mean}, {sd}]"
            )
        out[name] = (mean, sd)
    if out and options.bootstrap > 0:
        raise ConfigError(
            "rating: a bootstrap refits without the priors; use either priors (intervals from "
            "the penalised fit and its profiles) or bootstrap = 0"
        )
    return out


def _solve_penalised(problem: _Problem, starts: list[Array]):
    """Solve, with the priors' pseudo-residuals scaled by the residual standard deviation.

    Notes
    -----
    The penalised sum of squares :math:`\\sum_i r_i^2 + s^2 \\sum_j (\\theta_j - \\mu_j)^2 /
    \\tau_j^2` is :math:`s^2` times the negative log posterior of a Gaussian likelihood and
    independent Gaussian priors :math:`N(\\mu_j, \\tau_j^2)`: its minimum is the posterior mode
    and :math:`s^2 (J^T J)^{-1}` of the augmented Jacobian the posterior covariance of the
    linearised model, the prior entering as additional data (Gelman et al., 2013, *Bayesian Data
    Analysis*, 3rd ed., §14.8). The residual variance is estimated from the data residuals with
    the priors counted as observations, :math:`s^2 = \\sum_i r_i^2/(n + m - p)`, iterated with the
    fit to a fixed point.

    Returns
    -------
    problem, best, sigma, dof
    """
    m = problem.prior_at.size
    kf = int(problem.free.sum())
    n = problem.h.size
    best = _solve(problem, starts)
    if m == 0:
        return problem, best, best.sigma, best.dof
    dof = n + m - kf
    scale = problem.prior_scale
    for _ in range(50):
        rd = problem.data_residual(best.params)
        new = float(np.sqrt(rd @ rd / dof)) if dof > 0 else float("nan")
        if not np.isfinite(new):
            break
        converged = abs(new - scale) <= 1e-10 * max(scale, 1e-300)
        scale = new
        problem = replace(problem, prior_scale=scale)
        best = _solve(problem, [np.array(problem.full_params(best.params), dtype=float)])
        if converged:
            break
    rd = problem.data_residual(best.params)
    sigma = float(np.sqrt(rd @ rd / dof)) if dof > 0 else float("nan")
    return problem, best, sigma, dof


def _honest_intervals(
    problem: _Problem,
    best,
    cov_free: Array,
    *,
    free_names: list[str],
    weak_names: set[str],
    sigma: float,
    dof: int,
    stages: GaugedStages,
    msgs: list[str],
) -> tuple[dict[int, tuple[float, float]], Array]:
    """Profile-likelihood intervals where the Wald ones say nothing, and the covariance they
    imply.

    A free parameter is profiled when it rests on a bound, when its variance is not finite, when
    its Wald interval leaves its bounds, or when its control is weakly identified. Its variance
    becomes :math:`((u - l) / (2 t))^2` of the profile interval :math:`[l, u]`, its covariances
    rescaled with it (correlations kept; zero for one on a bound), so draws of the rating carry
    it; an open interval leaves the variance undefined (NaN) and says so.
    """
    from scipy.stats import t as t_dist

    theta = best.params
    lo_f, hi_f = problem.lo[problem.free], problem.hi[problem.free]
    with np.errstate(invalid="ignore"):
        se = np.sqrt(np.diag(cov_free))
    tq = float(t_dist.ppf(0.975, dof)) if dof > 0 else np.inf
    which = best.active | ~np.isfinite(se)
    which |= (theta - tq * se < lo_f) | (theta + tq * se > hi_f)
    which |= np.array([n in weak_names for n in free_names], dtype=bool)
    if not which.any() or not np.isfinite(sigma) or dof <= 0:
        if not np.all(np.isfinite(cov_free)):
            msgs.append(
                "some parameters are not identified by the gaugings (singular Jacobian): e.g. a "
                "control whose datum lies above every gauging; their standard errors are undefined"
            )
        return {}, cov_free
    profile = _profile_all(problem, best, cov_free, which, sigma, dof)
    cov = cov_free.copy()
    for j, (a, b) in profile.items():
        name = free_names[j]
        if best.active[j]:
            why = (
                "the highest zero-flow gauging"
                if stages.highest_zero_flow_m is not None
                and np.isclose(theta[j], stages.highest_zero_flow_m)
                else "a bound"
            )
            msgs.append(
                f"parameter {name} = {theta[j]:.6g} rests on {why}; its interval [{a:.6g}, "
                f"{b:.6g}] is from the profile likelihood"
            )
        if np.isfinite(a) and np.isfinite(b):
            var = ((b - a) / (2 * tq)) ** 2
            old = cov[j, j]
            if best.active[j] or not (np.isfinite(old) and old > 0):
                cov[j, :] = 0.0
                cov[:, j] = 0.0
                cov[j, j] = var
            else:
                f = np.sqrt(var / old)
                cov[j, :] *= f
                cov[:, j] *= f
        else:
            cov[j, :] = np.nan
            cov[:, j] = np.nan
            msgs.append(
                f"parameter {name}: the gaugings do not bound it (profile interval "
                f"[{a:.6g}, {b:.6g}]); its variance is undefined, so draws of the rating "
                "cannot carry it; give it a prior (value and standard error)"
            )
    return profile, cov


def _bootstrap(
    problem: _Problem,
    best,
    n_boot: int,
    rng: np.random.Generator,
    iterations: int = 40,
) -> tuple[Array, Array]:
    """Residual bootstrap, every replicate refitted at once (vectorised Levenberg-Marquardt).

    Residuals are rescaled by ``sqrt(n/(n-p))`` (Davison & Hinkley, 1997, eq. 6.9) before
    resampling; each replicate starts at the estimate and takes damped Gauss-Newton steps with
    its own damping factor, accepting a step only when it lowers that replicate's sum of squares.
    """
    law, free, base, h, y, sw = (
        problem.law,
        problem.free,
        problem.base,
        problem.h,
        problem.y,
        problem.sw,
    )
    lo, hi, log = problem.lo, problem.hi, problem.log
    theta = best.params
    n = h.size
    kf = int(free.sum())
    e = best.residuals  # sqrt(w) * (y - f): homoscedastic
    e = (e - e.mean()) * np.sqrt(n / max(n - kf, 1))
    fit_y = y - best.residuals / sw  # fitted values in the residual space
    idx = rng.integers(0, n, size=(n_boot, n))
    ystar = fit_y[None, :] + e[idx] / sw[None, :]
    lo_f, hi_f = lo[free], hi[free]
    th = np.repeat(theta[None, :], n_boot, axis=0)

    def evaluate(t: Array) -> tuple[Array, Array]:
        p = []
        fi = 0
        for j in range(free.size):
            if free[j]:
                p.append(t[:, fi : fi + 1])
                fi += 1
            else:
                p.append(base[j])
        f = law.discharge(p, h[None, :])
        g = np.stack(np.broadcast_arrays(*law.gradient(p, h[None, :])), axis=-1)[..., free]
        if log:
            with np.errstate(divide="ignore", invalid="ignore"):
                g = g / f[..., None]
                f = np.log(f)
        return f, g

    def cost(f: Array) -> Array:
        res = sw * (ystar - f)
        c = np.einsum("bn,bn->b", res, res)
        return np.where(np.isfinite(c), c, np.inf)

    f, g = evaluate(th)
    c = cost(f)
    lam = np.full(n_boot, 1e-3)
    eye = np.eye(kf)
    for _ in range(iterations):
        jw = g * sw[None, :, None]
        rw = sw * (ystar - f)
        jtj = np.einsum("bni,bnj->bij", jw, jw)
        jtr = np.einsum("bni,bn->bi", jw, rw)
        diag = np.einsum("bii->bi", jtj)
        a = jtj + lam[:, None, None] * (diag[:, :, None] * eye + 1e-12 * eye)
        try:
            step = np.linalg.solve(a, jtr[..., None])[..., 0]
        except np.linalg.LinAlgError:
            step = np.einsum("bij,bj->bi", np.linalg.pinv(a), jtr)
        trial = np.clip(th + step, lo_f, hi_f)
        f_t, g_t = evaluate(trial)
        c_t = cost(f_t)
        better = c_t < c
        th = np.where(better[:, None], trial, th)
        f = np.where(better[:, None], f_t, f)
        g = np.where(better[:, None, None], g_t, g)
        done_rel = np.abs(c - c_t) <= 1e-12 * np.maximum(c, 1e-300)
        c = np.where(better, c_t, c)
        lam = np.where(better, lam / 3.0, lam * 4.0)
        if np.all(done_rel | (lam > 1e10)):
            break
    out = np.repeat(base[None, :], n_boot, axis=0)
    out[:, free] = th
    return out, e
