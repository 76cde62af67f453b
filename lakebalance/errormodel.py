"""One error model of the daily residual, used by every judgment made from it.

The residual of day d (m³) is what the measured terms do not explain,
``r_d = ΔV_d − Σ_k s_k T_kd``. Its error is modelled as the sum of independent parts::

    e_d = Σ_k σ_k T_kd (√ρ z_k,p(d) + √(1−ρ) ε_kd)        terms: persistent + random parts
        + σ_A a (ΔV_d − P_d + E_d)                          area of the storage relation
        + R_v,d                                             rating (one variant per draw)
        + c⁻_d δ_d + c⁺_d δ_d+1                            boundary stages: resolution and
                                                            interpolation from daily means

with σ_k the relative (1-σ) error of term k, ρ the share of its variance that persists, z one
standard normal deviate per term and *period* (the whole record by default, or each water year),
δ_b also carries, where boundary b was estimated from daily means rather than read, an
interpolation error of standard deviation |N_b − N_b−1| / (4 A_b): the stage path bends where the
gauged net inflow N (m³/d) changes from one day to the next (a storm's onset), and the mean of two
adjacent daily means misses the boundary stage by up to a quarter of the change of the daily rise
(a kink of slope; for a smooth curve the error is h″/6, smaller), common practice, no source; it
follows the gauged flows, so a bad stage reading does not widen its own band. And
ε standard normals independent between terms and, from day to day, either independent or a
first-order autoregressive (AR(1)) sequence of lag-one correlation φ (a gauge's daily error that
decays over a few days, as a stream gauge's rating or a pan's exposure does), a one standard normal for the record, δ_b ~ U(−r/2, r/2) the error
of boundary stage b (r the gauge resolution), c⁻_d = −A(h_s) + T Σ_j w_j Q′(h_j)(1−τ_j) and
c⁺_d = A(h_e) + T Σ_j w_j Q′(h_j) τ_j. The rating part R_v,d = T Σ_j w_j [Q(θ_v, h_j) − Q(θ̂, h_j)]
is the day's outflow volume under rating variant θ_v drawn from the fit's full covariance (or its
bootstrap), through the day's stage path: not linearised, so a poorly constrained spillway
coefficient widens the flood days as it should.

:class:`ResidualErrors` holds these parts day by day. The balance's Monte Carlo bands draw from
it, and the flags' significance and the seepage interval use its exact variance of any weighted
sum of days (:meth:`ResidualErrors.covariance_of_sums`), so that a run of days at high flow is
judged against the persistent rating and term errors that a daily band alone does not show.

References
----------
Box, G. E. P. & Jenkins, G. M. (1976). Time Series Analysis: Forecasting and Control, rev. ed.,
§3.2.4 (autocorrelation of a first-order autoregressive process, ρ_k = φ^k).
Winter, T. C. (1981). Uncertainties in estimating the water balance of lakes. Water Resources
Bulletin 17(1), 82–115 (typical term errors; the values used are from memory).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["ResidualErrors", "PARTS", "ar1_quadratic"]

Array = np.ndarray

#: The parts of the error model, by name.
PARTS = ("random", "systematic", "area", "rating", "resolution")


@dataclass(frozen=True, eq=False)
class ResidualErrors:
    """The error model of a daily residual (see the module docstring). All volumes in m³.

    Parameters
    ----------
    random_sd_m3 : ndarray (days,)
        Standard deviation of the day-to-day independent part of the terms' errors.
    systematic_m3 : ndarray (K, days)
        Residual change per unit deviate of each term's persistent part (√ρ σ_k s_k T_kd).
    period : ndarray (days,) of int
        Period of each day: one persistent deviate per term and period.
    area_m3 : ndarray (days,)
        Residual change per unit deviate of the area error (σ_A (ΔV − P + E)).
    boundary_prev_m3, boundary_next_m3 : ndarray (days,)
        Residual change per metre of error of the day's first and last boundary stage.
    resolution_m : float
        Gauge resolution r (m): each boundary stage errs uniformly within ±r/2.
    rating_m3 : ndarray (V, days) or None
        Outflow volume of each rating variant minus that of the fitted rating.
    ok : ndarray (days,) of bool
        Days whose residual is known (the parts are zero elsewhere).
    term_names : tuple of str
        The terms of the rows of ``systematic_m3``.
    boundary_sd_m : ndarray (days + 1,) or None
        Standard deviation (m) of each day-boundary stage's interpolation error where the
        boundary was estimated from daily means (zero where a sub-daily reading gave it); it
        enters through the same coefficients as the resolution.
    random_ar1 : float
        Lag-one autocorrelation φ (0 ≤ φ < 1, -) of the day-to-day part: its errors on days i
        and j correlate as φ^|i−j| (stationary AR(1) of unit variance; Box & Jenkins, 1976,
        §3.2.4). Zero: independent from day to day.
    """

    random_sd_m3: Array
    systematic_m3: Array
    period: Array
    area_m3: Array
    boundary_prev_m3: Array
    boundary_next_m3: Array
    resolution_m: float
    rating_m3: Array | None = field(default=None, repr=False)
    ok: Array = field(default_factory=lambda: np.zeros(0, bool))
    term_names: tuple[str, ...] = ()
    random_ar1: float = 0.0
    boundary_sd_m: Array | None = field(default=None, repr=False)

    def __post_init__(self) -> None:
        if not (0.0 <= float(self.random_ar1) < 1.0):
            raise ValueError(f"random_ar1 must lie in [0, 1), got {self.random_ar1!r}")

    @property
    def days(self) -> int:
        """Number of days of the model."""
        return int(self.random_sd_m3.size)

    @property
    def rating_variants(self) -> int:
        """Rating variants carried (0 without rating uncertainty)."""
        return 0 if self.rating_m3 is None else int(self.rating_m3.shape[0])

    # ---- variances ----------------------------------------------------------------------
    def covariance_of_sums(self, weights: Array, parts: Sequence[str] = PARTS) -> Array:
        """Covariance (m⁶) of the weighted sums ``Σ_d W_qd e_d`` of the residual errors.

        Parameters
        ----------
        weights : ndarray (q, days) or (days,)
            One row of day weights (-) per sum; e.g. ones over a run of days for the error of
            the run's volume, or the rows of a regression's ``(XᵀX)⁻¹Xᵀ`` for the error of its
            coefficients.
        parts : sequence of str
            The parts to include (:data:`PARTS`); e.g. leave out ``"random"`` and
            ``"resolution"`` where a regression's own residual scatter already carries them.

        Returns
        -------
        ndarray (q, q)
            Exact for the linear parts; the rating part is the sample covariance over the
            rating variants.
        """
        w = np.atleast_2d(np.asarray(weights, dtype=float))
        if w.shape[1] != self.days:
            raise ValueError(f"weights must have {self.days} columns, got {w.shape[1]}")
        w = np.where(self.ok[None, :], w, 0.0)
        q = w.shape[0]
        cov = np.zeros((q, q))
        unknown = set(parts) - set(PARTS)
        if unknown:
            raise ValueError(f"unknown error parts {sorted(unknown)}; parts are {PARTS}")
        if "random" in parts:
            cov += ar1_quadratic(w * self.random_sd_m3[None, :], float(self.random_ar1))
        if "systematic" in parts and self.systematic_m3.size:
            labels, inverse = np.unique(self.period, return_inverse=True)
            for row in self.systematic_m3:  # each term: one deviate per period
                per = np.zeros((q, labels.size))
                for j in range(q):
                    per[j] = np.bincount(inverse, weights=w[j] * row, minlength=labels.size)
                cov += per @ per.T
        if "area" in parts:
            s = w @ self.area_m3
            cov += np.outer(s, s)
        if "rating" in parts and self.rating_m3 is not None and self.rating_variants > 1:
            sums = w @ self.rating_m3.T.astype(float)  # (q, V)
            cov += np.atleast_2d(np.cov(sums, ddof=1))
        if "resolution" in parts and (self.resolution_m > 0 or self.boundary_sd_m is not None):
            # boundary b is the last of day b-1 and the first of day b
            coef = np.zeros((q, self.days + 1))
            coef[:, :-1] += w * self.boundary_prev_m3[None, :]
            coef[:, 1:] += w * self.boundary_next_m3[None, :]
            var_b = np.full(self.days + 1, self.resolution_m**2 / 12.0)
            if self.boundary_sd_m is not None:
                var_b = var_b + np.nan_to_num(self.boundary_sd_m) ** 2
            cov += (coef * var_b[None, :]) @ coef.T
        return cov

    def sd_of_sum(self, weights: Array, parts: Sequence[str] = PARTS) -> float:
        """Standard deviation (m³) of ``Σ_d w_d e_d`` for one row of day weights (-)."""
        return float(np.sqrt(max(self.covariance_of_sums(weights, parts)[0, 0], 0.0)))

    def sd_of_window(self, first: int, last: int, parts: Sequence[str] = PARTS) -> float:
        """Standard deviation (m³) of the residual summed over days ``first``..``last``
        (inclusive indices)."""
        w = np.zeros(self.days)
        w[first : last + 1] = 1.0
        return self.sd_of_sum(w, parts)

    def daily_sd(self) -> Array:
        """Standard deviation (m³) of each day's residual error (all parts)."""
        var = self.random_sd_m3**2 + self.area_m3**2
        var = var + np.sum(self.systematic_m3**2, axis=0)
        if self.rating_m3 is not None and self.rating_variants > 1:
            var = var + np.var(self.rating_m3.astype(float), axis=0, ddof=1)
        if self.resolution_m > 0 or self.boundary_sd_m is not None:
            var_b = np.full(self.days + 1, self.resolution_m**2 / 12.0)
            if self.boundary_sd_m is not None:
                var_b = var_b + np.nan_to_num(self.boundary_sd_m) ** 2
            var = var + self.boundary_prev_m3**2 * var_b[:-1] + self.boundary_next_m3**2 * var_b[1:]
        return np.where(self.ok, np.sqrt(var), np.nan)

    def to_dict(self) -> dict:
        """A summary for JSON: the share of each part in the variance of the record's sum."""
        ones = np.ones(self.days)
        total = self.covariance_of_sums(ones)[0, 0]
        shares = {
            p: (float(self.covariance_of_sums(ones, (p,))[0, 0] / total) if total > 0 else None)
            for p in PARTS
        }
        return {
            "days": self.days,
            "rating_variants": self.rating_variants,
            "terms": list(self.term_names),
            "record_sum_sd_m3": float(np.sqrt(total)),
            "variance_share_of_record_sum": shares,
        }


def ar1_quadratic(u: Array, phi: float) -> Array:
    """``U R Uᵀ`` for the correlation matrix ``R_ij = φ^|i−j|`` of a stationary AR(1), in O(q·n).

    Parameters
    ----------
    u : ndarray (q, n)
        Rows of coefficients (each day's weight times its standard deviation).
    phi : float
        Lag-one autocorrelation (0 ≤ φ < 1).

    Returns
    -------
    ndarray (q, q)

    Notes
    -----
    ``(R u)_i = F_i + B_i − u_i`` with the forward sum ``F_i = Σ_{l≤i} φ^{i−l} u_l`` and the
    backward sum ``B_i = Σ_{l≥i} φ^{l−i} u_l``, each one first-order recursive filter
    (``F_i = u_i + φ F_{i−1}``), so the n × n matrix R is never formed.
    """
    u = np.atleast_2d(np.asarray(u, dtype=float))
    if phi == 0.0:
        return u @ u.T
    from scipy.signal import lfilter

    forward = lfilter([1.0], [1.0, -phi], u, axis=1)
    backward = lfilter([1.0], [1.0, -phi], u[:, ::-1], axis=1)[:, ::-1]
    return u @ (forward + backward - u).T


def rating_variant_volumes(
    discharge_with: Callable[[Array, Array], Array],
    params: Array,
    fitted: Array,
    path_m: Array,
    weights: Array,
    ok: Array,
    chunk_days: int = 4096,
    dates: Any = None,
) -> Array:
    """Daily outflow volume (m³) of each rating variant minus the fitted rating's, float32.

    Parameters
    ----------
    discharge_with : callable
        ``discharge_with(params (n, k), stage_m (n, ...)) -> m³/s``.
    params : ndarray (V, k)
        Rating variants (SI).
    fitted : ndarray (k,)
        The fitted parameters.
    path_m : ndarray (days, nodes)
        Stage at the quadrature nodes of each day (m).
    weights : ndarray (nodes,)
        Quadrature weights on [0, 1] (sum 1).
    ok : ndarray (days,) of bool
        Days with a known path.
    chunk_days : int
        Days evaluated at once (memory).
    dates : pandas.DatetimeIndex, optional
        The days of ``path_m``: when given, ``discharge_with`` is called with ``days=`` the
        chunk's days (a rating that changes in time, e.g. dated rating periods).
    """
    from .units import SECONDS_PER_DAY

    v = params.shape[0]
    days, nodes = path_m.shape
    out = np.zeros((v, days), dtype=np.float32)
    h_all = np.where(np.isfinite(path_m), path_m, 0.0)
    rows = np.vstack([np.asarray(fitted, dtype=float)[None, :], params])
    for a in range(0, days, chunk_days):
        h = h_all[a : a + chunk_days]
        grid = np.broadcast_to(h, (v + 1, *h.shape))
        if dates is None:
            q = np.asarray(discharge_with(rows, grid), dtype=float)  # (V+1, m, nodes)
        else:
            q = np.asarray(discharge_with(rows, grid, days=dates[a : a + chunk_days]), dtype=float)
        vol = (q @ weights) * SECONDS_PER_DAY  # (V+1, m)
        out[:, a : a + chunk_days] = (vol[1:] - vol[0][None, :]).astype(np.float32)
    out[:, ~ok] = 0.0
    return out
