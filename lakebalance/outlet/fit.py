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
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from ..errors import ConfigError, DataQualityWarning, FitError, suggest
from ..resources import check_memory
from ..results import Summary, estimate
from .laws import GaugedStages, Law, Rating, discharge_with
from .nls import covariance_from_jacobian, solve_least_squares

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
class FitOptions:
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
    """

    residuals: Residuals = "log"
    fixed: Mapping[str, float] = field(default_factory=dict)
    initial: Mapping[str, float] = field(default_factory=dict)
    bounds: Mapping[str, tuple[float | None, float | None]] = field(default_factory=dict)
    bootstrap: int = 0


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
                else f"<td>{se:.4g}</td><td>[{lo:.6g}, {hi:.6g}]</td>"
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
            lines.append(f"{name:<18s}{v:>14.6g}{se:>14.4g}{f'[{lo:.6g}, {hi:.6g}]':>30s}")
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
        """Wald confidence interval of each parameter, ``value ± t(1-α/2, dof) · se``."""
        t = self.t_quantile(alpha)
        return {
            n: (self.params[n] - t * self.stderr[n], self.params[n] + t * self.stderr[n])
            for n in self.param_names
        }

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
        the parameter was held fixed."""
        ci = self.conf_int(alpha)
        units = self.law.param_units
        return {
            n: {
                **estimate(self.params[n], self.stderr[n], *ci[n], unit=units[n]).to_dict(),
                "fixed": not f,
            }
            for n, f in zip(self.param_names, self.free)
        }

    def to_dict(self) -> dict[str, Any]:
        """The fit's part of ``lakebalance rating --json`` (SI).

        ``form``, ``residuals``, ``parameters`` (:meth:`parameter_table`), ``derived``, ``n``,
        ``dof``, ``se_percent``, ``gauged_range`` (m), ``zero_flow_stage_m``, ``bootstrap``
        (refits kept), ``warnings``, ``caution``. The command adds the site, the seed, the
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
        return RatingSummary(f"Rating curve ({self.form})", rows, facts, self.warnings)


# --------------------------------------------------------------------------------------------
# Fitting
# --------------------------------------------------------------------------------------------
def _check_names(names: tuple[str, ...], given: Mapping[str, Any], what: str) -> None:
    for key in given:
        if key not in names:
            raise ConfigError(
                f"rating: unknown parameter '{key}' in '{what}'{suggest(key, names)}; "
                f"parameters are {', '.join(names)}"
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
            raise ConfigError(f"rating: bounds of '{key}' leave no room ([{lo[idx]}, {hi[idx]}])")
    return lo, hi


def _check_identifiable(g: _Gaugings, kf: int) -> None:
    """Enough gaugings, over enough distinct stages, for ``kf`` free parameters."""
    n_used = int(g.in_resid.sum())
    if n_used <= kf:
        raise FitError(
            f"{n_used} usable gauging(s) cannot fit {kf} free parameter(s) with any uncertainty; "
            f"need at least {kf + 1}"
        )
    n_stages = np.unique(g.h[g.in_resid]).size
    if n_stages < min(kf, 3) or n_stages < 2 and kf > 1:
        raise FitError(
            f"the gaugings span only {n_stages} distinct stage(s); {kf} free parameters need "
            "gaugings over a range of stages"
        )


@dataclass(frozen=True)
class _Problem:
    """The least-squares problem of a fit: the gaugings in the residuals, the free parameters.

    ``y`` is ``ln Q`` (log residuals) or ``Q``; ``sw`` the square roots of the weights; ``base``
    holds the fixed values (NaN where free); ``lo``/``hi`` the bounds of every parameter.
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

    def full_params(self, theta: Array) -> list[Array | float]:
        p = self.base.copy()
        p[self.free] = theta
        return list(p)

    def residual(self, theta: Array) -> Array:
        f = self.law.discharge(self.full_params(theta), self.h)
        if self.log:
            with np.errstate(divide="ignore"):
                f = np.log(f)
        return self.sw * (self.y - f)

    def jacobian(self, theta: Array) -> Array:
        p = self.full_params(theta)
        g = np.stack(np.broadcast_arrays(*self.law.gradient(p, self.h)), axis=-1)[:, self.free]
        if self.log:
            g = g / self.law.discharge(p, self.h)[:, None]
        return -self.sw[:, None] * g


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


def _covariance(best, names, free: Array, zero_stage: float | None, msgs: list[str]) -> Array:
    """Covariance of every parameter (zero for fixed ones and for those resting on a bound)."""
    kf = int(free.sum())
    theta = best.params
    cov_free = best.cov
    if best.active.any():
        # parameters on a bound are held there: their variance is conditional (zero)
        keep = ~best.active
        sub, _ = covariance_from_jacobian(best.jacobian[:, keep], best.rss, best.dof)
        cov_free = np.zeros((kf, kf))
        cov_free[np.ix_(keep, keep)] = sub
        fnames = [n for n, f in zip(names, free) if f]
        for i in np.flatnonzero(best.active):
            why = (
                "the highest zero-flow gauging"
                if zero_stage is not None and np.isclose(theta[i], zero_stage)
                else "a bound"
            )
            msgs.append(
                f"parameter {fnames[i]} = {theta[i]:.6g} rests on {why}; its standard error is "
                "not estimated (held fixed there)"
            )
    if not np.all(np.isfinite(cov_free)):
        msgs.append(
            "some parameters are not identified by the gaugings (singular Jacobian): e.g. a "
            "control whose datum lies above every gauging; their standard errors are undefined"
        )
    k = len(names)
    cov = np.zeros((k, k))
    cov[np.ix_(free, free)] = cov_free
    return cov


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
    for what in ("fixed", "initial", "bounds"):
        _check_names(names, getattr(options, what), what)
    g = _gaugings(stage_m, discharge_m3s, weights, dates, options.residuals)
    lo, hi = _bounds(law, g.stages, options)
    free = np.array([n not in options.fixed for n in names])
    _check_identifiable(g, int(free.sum()))
    starts = _starting_values(law, g, lo, hi, options)

    log = options.residuals == "log"
    r = g.in_resid
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
    )
    best = _solve(problem, starts)
    msgs = g.msgs
    cov = _covariance(best, names, free, g.stages.highest_zero_flow_m, msgs)
    pfull = np.array(problem.full_params(best.params), dtype=float)
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
    return RatingFit(
        law=law,
        params={n: float(v) for n, v in zip(names, pfull)},
        param_names=names,
        cov=cov,
        free=tuple(bool(f) for f in free),
        n=int(r.sum()),
        dof=best.dof,
        sigma=best.sigma,
        residuals=options.residuals,
        table=_residual_table(g, law, pfull, log),
        lower=np.where(free, lo, pfull),
        upper=np.where(free, hi, pfull),
        warnings=tuple(msgs),
        bootstrap_params=boot,
        bootstrap_residuals=boot_res,
        zero_flow_stage_m=g.stages.highest_zero_flow_m,
        derived=law.derived(list(pfull)),
    )


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
